"""The outcome of an upload from a real Chromium: a refusal looks apart from a load, and stays for the tab.

A refused upload's status line carries the warning colours and a bar at its left (an accepted one the
accent colours and no bar), and its words say what happened. The refusal and its rows are kept in the
tab's session storage: going to another page and back shows them again, until the next upload replaces
them; an accepted upload clears them.
"""

from __future__ import annotations

import re

import pytest
from playwright.sync_api import expect

from browser.test_browser_asset import CUT_OFF
from browser.test_browser_dashboard import PAGES, SMALL_IDS, assets_csv, upload

pytestmark = pytest.mark.browser

#: The demo's --warn and --warn-soft colours (dashboard/assets/style.css), as the browser computes them.
WARN_RGB, WARN_SOFT_RGB = "rgb(160, 82, 45)", "rgb(251, 240, 230)"


def test_a_refused_upload_stays_listed_after_a_visit_to_another_page(tab, artifacts):
    page = tab.goto("/inputs", PAGES[-1][1])
    page.wait_for_load_state("networkidle")
    status = page.locator("#inputs-status")
    # the hidden file input carries the area's name (dashboard/assets/keyboard.js), for a screen reader
    from dashboard.pages.inputs import UPLOAD_INPUT_NAME

    expect(page.locator("#inputs-upload input[type=file]")).to_have_attribute("aria-label", UPLOAD_INPUT_NAME)
    refused_row = page.locator("#inputs-problems .ag-row").filter(has_text="rated_p_kw").first

    # the demo's assets.csv with spreadsheet row 3 rated -250 kW: refused, and said so in words and in looks
    upload(page, "assets.csv", assets_csv(negative_row=3))
    status.filter(has_text="previous case stays loaded").wait_for()
    refused_row.wait_for()
    expect(status).to_have_class(re.compile(r"\brefused\b"))
    looks = status.evaluate("e => { const s = getComputedStyle(e); "
                            "return [s.backgroundColor, s.borderLeftColor, s.borderLeftWidth]; }")
    assert looks == [WARN_SOFT_RGB, WARN_RGB, "4px"]
    message = status.inner_text()
    # the value refused, the rule and the hint are read whole (wrapped, not cut)
    for column in ("value", "rule", "hint"):
        cells = page.locator(f"#inputs-problems .ag-row [col-id='{column}']")
        assert cells.count() > 0 and cells.evaluate_all(CUT_OFF) == [], column

    # another page of the dashboard, then back in the same tab: the refusal and its rows are still there
    page.click("a.nav-link[href='/']")
    page.locator(PAGES[0][1]).first.wait_for()
    page.click("a.nav-link[href='/inputs']")
    refused_row.wait_for()
    expect(status).to_have_text(message)
    expect(status).to_have_class(re.compile(r"\brefused\b"))
    assert "-250" in refused_row.inner_text()
    page.screenshot(path=artifacts / "upload_refusal_kept.png", full_page=True)

    # an accepted upload replaces it, and the refusal does not come back when the page opens again
    upload(page, "assets.csv", assets_csv(ids=SMALL_IDS))
    status.filter(has_text="Loaded").wait_for()
    expect(status).to_have_class(re.compile(r"\baccepted\b"))
    assert status.evaluate("e => getComputedStyle(e).borderLeftWidth") == "0px"  # the bar marks a refusal only
    page.click("a.nav-link[href='/']")
    page.wait_for_function("document.querySelectorAll('#fleet-table .ag-center-cols-container .ag-row').length === 7")
    page.click("a.nav-link[href='/inputs']")
    page.locator("#inputs-case").filter(has_text="7 assets").wait_for()
    page.wait_for_load_state("networkidle")
    expect(status).to_have_text("")
    expect(page.locator("#inputs-problems")).not_to_contain_text("rated_p_kw")
    assert tab.errors == [], f"console errors: {tab.errors}"
