"""The asset page in a real Chromium: the address follows the asset on screen, and long grid texts can be read.

Both need the browser: the address is rewritten by the page's clientside callback, and whether a cell's text
is cut off depends on the grid's own layout (widths, wrapping) at a 1400 x 900 viewport.
"""

from __future__ import annotations

import pytest

pytestmark = pytest.mark.browser

#: A cell whose text is wider than the cell (shown with an ellipsis or hidden), as the grid renders it.
CUT_OFF = """cells => cells.filter(c => {
    const v = c.querySelector('.ag-cell-value') || c;
    return v.scrollWidth > v.clientWidth + 1 || v.scrollHeight > c.clientHeight + 1;
}).map(c => c.innerText)"""


def test_the_address_follows_the_chosen_asset(tab):
    # coming from the Fleet page: /asset?id=KGQ-F01; the demo's assets.csv row HRW-D01 is a 0.75 kW dosing pump
    page = tab.goto("/asset?id=KGQ-F01", "#asset-summary:has-text('KGQ-F01')")
    entries = page.evaluate("history.length")
    page.locator("#asset-pick").click()
    page.keyboard.type("HRW-D01")
    page.get_by_text("HRW-D01: Chemical dosing pump 1").click()
    page.locator("#asset-summary").filter(has_text="0.75 kW").wait_for()
    page.wait_for_function("window.location.search === '?id=HRW-D01'")
    assert page.evaluate("history.length") == entries  # the entry is replaced, not one added per pick
    page.reload()
    page.locator("#asset-summary").filter(has_text="HRW-D01").wait_for()
    assert not tab.errors


def test_long_grid_texts_are_not_cut_off(tab):
    page = tab.goto("/asset?id=HRW-P01", "#asset-options .ag-center-cols-container .ag-row")
    page.locator("#asset-options [col-id='speed_remedy']").filter(has_text="follows the speed").first.wait_for()
    for column in ("label", "technology", "speed_remedy"):
        cells = page.locator(f"#asset-options .ag-row [col-id='{column}']")
        assert cells.count() > 0 and cells.evaluate_all(CUT_OFF) == [], column
    header = page.locator("#asset-options .ag-header-cell[col-id='cautions_count']").bounding_box()
    assert header and header["x"] + header["width"] <= 1400  # the cautions column is on screen
    page = tab.goto("/", "#fleet-table .ag-center-cols-container .ag-row")
    cells = page.locator("#fleet-table .ag-row [col-id='plan_option']")
    cells.filter(has_text="a").first.wait_for()
    assert cells.evaluate_all(CUT_OFF) == []
    assert not tab.errors


def test_the_end_of_life_section_shows_the_strategies_and_the_policy(tab, artifacts):
    page = tab.goto("/asset?id=HRW-P01", "#asset-end-of-life-text:has-text('cheapest end-of-life strategy')")
    text = page.locator("#asset-end-of-life-text").inner_text()
    assert "HRW-P01" in text and "not a forecast" in text
    page.locator("#asset-end-of-life .bars .point").nth(2).wait_for()
    assert page.locator("#asset-end-of-life .bars .point").count() == 3
    labels = page.locator("#asset-end-of-life .bars text").all_text_contents()
    assert sum("cheapest" in t for t in labels) == 1
    rows = page.locator("#asset-fleet-rules .ag-center-cols-container .ag-row")
    rows.first.wait_for()
    assert rows.count() > 0
    headers = page.locator("#asset-fleet-rules .ag-header-cell-text").all_text_contents()
    assert "Replace rather than rewind from [h/yr]" in headers and "Rule" in headers
    cells = page.locator("#asset-fleet-rules .ag-row [col-id='rule']")
    assert cells.evaluate_all(CUT_OFF) == []  # the rules wrap, none cut off
    page.locator("#asset-end-of-life").scroll_into_view_if_needed()
    page.screenshot(path=artifacts / "asset_end_of_life.png", full_page=True)
    assert not tab.errors


def test_the_navigation_link_comes_back_to_the_asset_shown_last(tab):
    # opened from the Fleet page on KGQ-F01 (data/demo/assets.csv), then another page, then the "Asset" link
    # (no asset in its address): the asset under discussion, not the register's first
    page = tab.goto("/asset?id=KGQ-F01", "#asset-summary:has-text('KGQ-F01')")
    page.wait_for_load_state("networkidle")
    page.locator("a.nav-link", has_text="Fleet").click()
    page.locator("#fleet-table .ag-row").first.wait_for()
    page.locator("a.nav-link", has_text="Asset").click()
    page.locator("#asset-summary").filter(has_text="KGQ-F01").wait_for()
    page.wait_for_function("window.location.search === '?id=KGQ-F01'")
    assert tab.errors == [], f"console errors: {tab.errors}"
