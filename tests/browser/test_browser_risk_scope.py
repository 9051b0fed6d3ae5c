"""The Uncertainty page in a real Chromium: it analyses the budgeted plan by default, switches to every
asset's best option on request, and keeps the choice when the user comes back to the page."""

from __future__ import annotations

import re

import pytest
from playwright.sync_api import expect

from browser.test_browser_dashboard import PAGES
from dashboard import app as _shell  # noqa: F401  (the pages register after the app)
from dashboard.pages import risk

pytestmark = pytest.mark.browser

RISK_READY = PAGES[4][1]
FLEET_READY = PAGES[0][1]


def test_the_plan_by_default_the_best_options_on_request(tab, artifacts):
    page = tab.goto("/risk", RISK_READY)
    summary = page.locator(f"#{risk.SUMMARY}")
    histogram_title = page.locator(f"#{risk.FLEET} .gtitle")
    expect(summary).to_have_text(re.compile(r"projects of the capital plan .* P\(NPV > 0\)"))
    expect(histogram_title).to_have_text(re.compile(r"^Plan NPV over"))
    page.screenshot(path=artifacts / "risk_plan.png", full_page=True)
    page.get_by_label("Each asset's best option, no budget").check()
    expect(summary).to_have_text(re.compile(r"the best option of each asset that needs capital"))
    expect(histogram_title).to_have_text(re.compile(r"^Fleet NPV over"))
    # the choice is kept for the tab: away to the fleet and back by the browser's Back button
    page.goto(tab.url + "/")
    page.wait_for_selector(FLEET_READY)
    page.go_back()
    page.wait_for_selector(RISK_READY)
    expect(page.get_by_label("Each asset's best option, no budget")).to_be_checked()
    expect(histogram_title).to_have_text(re.compile(r"^Fleet NPV over"))
    assert tab.errors == []
