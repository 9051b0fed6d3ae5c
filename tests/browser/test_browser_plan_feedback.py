"""Feedback in a real Chromium: long actions say they are running, budget fields carry their unit and refuse
absurd amounts, the top bar tells two scenarios apart, and a refused upload leads with its cause.

The server runs in this process (tests/browser/conftest.py), so a test can slow a service down with
``monkeypatch`` to see what the page shows while it runs.
"""

from __future__ import annotations

import re
import time

import pytest
from playwright.sync_api import expect

from browser.test_browser_dashboard import PAGES, assets_csv, upload
from dashboard import app as _shell  # noqa: F401  (the pages register after the app)
from dashboard import services
from dashboard.pages import plan

pytestmark = pytest.mark.browser

PLAN_READY = PAGES[3][1]
INPUTS_READY = PAGES[-1][1]
#: How long the slowed services take [s]: long enough to look at the page while they run.
SLOW_S = 3.0


def test_proving_the_plan_disables_the_button_and_says_so(tab, monkeypatch, artifacts):
    # the button is on (the plan on show counts as not proven) and the proof takes SLOW_S seconds
    monkeypatch.setattr(services, "plan_is_proven", lambda result: False)
    original = services.Engine.result

    def slow(self, *args, **kwargs):
        if kwargs.get("precise"):
            time.sleep(SLOW_S)
        return original(self, *args, **kwargs)

    monkeypatch.setattr(services.Engine, "result", slow)
    page = tab.goto("/plan", PLAN_READY)
    page.wait_for_load_state("networkidle")
    button, proving = page.locator(f"#{plan.PROVE}"), page.locator(f"#{plan.PROVING}")
    expect(button).to_be_enabled()
    expect(proving).to_have_text("")
    button.click()
    # while it runs: the button is off and says so, and the line beside it says what is going on
    expect(button).to_be_disabled(timeout=2_000)
    expect(button).to_have_text("Proving…")
    expect(proving).to_have_text(re.compile(r"^Proving the plan…"))
    page.screenshot(path=artifacts / "plan_proving.png", full_page=True)
    # once done: the button is back (here it stays on, as the plan is made to count as not proven) and the
    # status line is written again
    expect(proving).to_have_text("", timeout=30_000)
    expect(button).to_have_text(plan.PROVE_TEXT)
    expect(button).to_be_enabled()
    expect(page.locator(f"#{plan.SOLVE_STATUS}")).not_to_have_text("")
    assert tab.errors == []


def test_building_the_pack_disables_its_button_and_says_so(tab, monkeypatch):
    def slow_pack(view_):
        time.sleep(SLOW_S)
        return b"PK\x05\x06" + bytes(18)  # an empty zip archive

    monkeypatch.setattr(services, "pack_zip_bytes", slow_pack)
    page = tab.goto("/plan", PLAN_READY)
    page.wait_for_load_state("networkidle")
    button = page.locator(f"#{plan.PACK_BUTTON}")
    expect(button).to_have_text(plan.PACK_TEXT)
    with page.expect_download(timeout=30_000):
        button.click()
        expect(button).to_be_disabled(timeout=2_000)
        expect(button).to_have_text("Building the pack…")
    expect(page.locator(f"#{plan.PACK_STATUS}")).to_have_text("Pack ready: see your downloads.")
    expect(button).to_be_enabled()
    expect(button).to_have_text(plan.PACK_TEXT)
    assert tab.errors == []


def test_budget_fields_carry_the_currency_and_refuse_absurd_amounts(tab):
    page = tab.goto("/plan", PLAN_READY)
    page.wait_for_function("document.querySelector('#plan-budget-0')?.value !== ''")
    # the demo case is in EUR: each budget field is labelled with it (and found by that label)
    field = page.get_by_label("Year 0 [EUR]", exact=True)
    expect(field).to_have_attribute("id", "plan-budget-0")
    expect(page.locator("label[for='plan-budget-5']")).to_have_text("Year 5 [EUR]")
    spend = page.locator("#plan-spend").inner_text()
    field.fill("1e99")
    field.press("Enter")
    message = page.locator(f"#{plan.BUDGET_MESSAGE}")
    expect(message).to_have_text(re.compile(r"^Not applied: Year 0 budget \[EUR\]: 1e99 is above the largest budget "
                                            r"the form takes, EUR 1,000,000,000,000 a year"))
    expect(message).to_have_class(re.compile(r"\brefused\b"))
    expect(page.locator("#plan-spend")).to_have_text(spend)  # the budget in force stays
    # the Case & assumptions page's budget fields too
    page.click("a.nav-link[href='/inputs']")
    page.locator(INPUTS_READY).first.wait_for()
    expect(page.locator("label[for='inputs-budget-0']")).to_have_text("Year 0 [EUR]")
    page.fill("#inputs-budget-1", "-3")
    page.press("#inputs-budget-1", "Enter")
    expect(page.locator("#inputs-form-message")).to_contain_text("Year 1 budget [EUR]: -3 is below zero")
    assert tab.errors == []


def test_the_top_bar_names_what_differs_from_the_case(tab, artifacts):
    page = tab.goto("/inputs", INPUTS_READY)
    page.wait_for_function("document.querySelector('#inputs-price-level')?.value !== ''")
    bar = page.locator("#app-case-label")
    # data/demo/finance.toml: 8 %, 15 years, budgets 250000 + 250000 + 150000
    expect(bar).to_have_text(re.compile(r"discount 8 % · 15 yr · budget 3 yr, EUR\s650\.0\sk in all$"))
    page.fill("#inputs-price-level", "120")
    page.press("#inputs-price-level", "Tab")
    page.fill("#inputs-escalation", "2")
    page.press("#inputs-escalation", "Enter")
    expect(bar).to_have_text(re.compile(r"budget 3 yr, EUR\s650\.0\sk in all · electricity price 120 % · escalation 2 %/yr$"),
                             timeout=60_000)
    # one line at this width
    height, line = bar.evaluate("e => [e.getBoundingClientRect().height, parseFloat(getComputedStyle(e).lineHeight) "
                                "|| parseFloat(getComputedStyle(e).fontSize) * 1.6]")
    page.screenshot(path=artifacts / "topbar_scenario.png")
    assert height < 2 * line, (height, line)


def test_an_upload_lacking_a_table_leads_with_it(tab):
    page = tab.goto("/inputs", INPUTS_READY)
    page.wait_for_load_state("networkidle")
    page.locator("#inputs-keep-files input[type=checkbox]").uncheck()
    upload(page, "assets.csv", assets_csv())
    status = page.locator("#inputs-status")
    expect(status).to_have_text(re.compile(r"^The upload lacks the required table 'sites' \(sites\.csv\)"))
    expect(status).to_have_class(re.compile(r"\brefused\b"))
    first = page.locator("#inputs-problems .ag-center-cols-container .ag-row[row-index='0']")
    expect(first.locator("[col-id='rule']")).to_have_text("the required table 'sites' is missing")
    expect(first.locator("[col-id='hint']")).to_contain_text("'Download a blank case workbook' button")
    expect(page.get_by_role("button", name="Download a blank case workbook")).to_be_visible()
    assert "drivecase new" not in first.inner_text()
