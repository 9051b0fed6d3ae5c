"""The plan, fleet and asset-option tables at common screen widths (1024, 1366 and 1920 px) from a real Chromium.

The page itself never scrolls sideways; a table either fits its panel with every text whole (long texts
wrap) or scrolls sideways inside its own panel. Whether a text is cut off depends on the grid's own
layout at the window's width, so these need the browser.
"""

from __future__ import annotations

import pytest
from playwright.sync_api import TimeoutError as PlaywrightTimeout

from browser.conftest import Tab
from browser.test_browser_asset import CUT_OFF
from browser.test_browser_dashboard import PAGES

pytestmark = pytest.mark.browser

#: Window sizes of common laptops [px].
WINDOWS = ((1024, 768), (1366, 768))

#: How far the page reaches to the right, against the window's width [px].
PAGE_WIDTH = "() => [document.documentElement.scrollWidth, window.innerWidth]"
#: Header texts wider than their header cell (cut off), as the grid renders them.
HEADER_CUT_OFF = """texts => texts.filter(t => t.scrollWidth > t.clientWidth + 1 || t.scrollHeight > t.clientHeight + 1)
    .map(t => t.innerText)"""


@pytest.fixture(params=WINDOWS, ids=[f"{w}x{h}" for w, h in WINDOWS])
def window(request, sys_browser, dash_url):
    """A fresh tab in a window of a common laptop size."""
    width_px, height_px = request.param
    context = sys_browser.new_context(viewport={"width": width_px, "height": height_px})
    yield Tab(context, dash_url)
    context.close()


def test_plan_tables_show_every_column_with_its_text_whole(window):
    page = window.goto("/plan", PAGES[3][1])
    page.wait_for_load_state("networkidle")
    page_width_px, window_width_px = page.evaluate(PAGE_WIDTH)
    assert page_width_px <= window_width_px
    options = page.locator("#plan-chosen .ag-row [col-id='label']")
    assert options.count() > 0 and options.evaluate_all(CUT_OFF) == []
    for grid in ("plan-chosen", "plan-differences"):
        assert page.locator(f"#{grid} .ag-row [col-id]").evaluate_all(CUT_OFF) == [], grid
        assert page.locator(f"#{grid} .ag-header-cell-text").evaluate_all(HEADER_CUT_OFF) == [], grid
        # every column fits the panel: nothing is hidden to the right of the grid, once the grid has sized its columns
        # to the panel (it does so after its rows arrive: read at once, a busy machine may catch it before)
        fits = f"""() => {{ const v = document.querySelector('#{grid} .ag-center-cols-viewport');
            return v !== null && v.scrollWidth <= v.clientWidth + 1; }}"""
        try:
            page.wait_for_function(fits, timeout=10_000)
        except PlaywrightTimeout:
            raise AssertionError(f"{grid}: columns hidden to the right of the grid") from None
    assert window.errors == []


def test_the_fleet_table_scrolls_inside_its_panel_not_the_page(window):
    page = window.goto("/", PAGES[0][1])
    page.wait_for_load_state("networkidle")
    page_width_px, window_width_px = page.evaluate(PAGE_WIDTH)
    assert page_width_px <= window_width_px
    grid = page.locator("#fleet-table")
    box = grid.bounding_box()
    assert box and box["x"] >= 0 and box["x"] + box["width"] <= window_width_px
    # the table's last column is reached by scrolling the table itself; the page still does not move sideways
    page.locator("#fleet-table .ag-center-cols-viewport").evaluate("v => { v.scrollLeft = v.scrollWidth; }")
    last = page.locator("#fleet-table .ag-header-cell[col-id='data_quality_pct']")
    last.wait_for()
    header = last.bounding_box()
    assert header and box["x"] <= header["x"] and header["x"] + header["width"] <= box["x"] + box["width"] + 1
    assert page.evaluate("window.scrollX") == 0 and page.evaluate(PAGE_WIDTH)[0] <= window_width_px
    assert page.locator("#fleet-table .ag-row [col-id]").evaluate_all(CUT_OFF) == []
    assert window.errors == []


#: Where each header of the options grid lies, against the grid and its pinned columns [px].
OPTION_HEADERS = """g => {
    const left = g.querySelector('.ag-pinned-left-header').getBoundingClientRect().right;
    const right = g.querySelector('.ag-pinned-right-header').getBoundingClientRect().left;
    const box = g.getBoundingClientRect();
    return [...g.querySelectorAll('.ag-header-viewport .ag-header-cell')].filter(h => {
        const r = h.getBoundingClientRect();
        return r.left < left - 1 || r.right > right + 1 || r.right > box.right + 1;
    }).map(h => h.getAttribute('col-id'));
}"""


@pytest.mark.parametrize("size", [(1366, 768), (1920, 1080)], ids=["1366x768", "1920x1080"])
def test_the_asset_options_show_every_column_and_every_row(size, sys_browser, dash_url):
    # the demo's HRW-P11 has eight options; its "Life-cycle cost" column was behind the pinned cautions and
    # its eighth row below the grid's fixed 500 px
    width_px, height_px = size
    context = sys_browser.new_context(viewport={"width": width_px, "height": height_px})
    try:
        tab = Tab(context, dash_url)
        page = tab.goto("/asset?id=HRW-P11", "#asset-options .ag-center-cols-container .ag-row")
        page.wait_for_load_state("networkidle")
        grid = page.locator("#asset-options")
        assert grid.evaluate(OPTION_HEADERS) == []  # no header behind a pinned column or off the grid
        fits = grid.locator(".ag-center-cols-viewport").evaluate("v => v.scrollWidth <= v.clientWidth + 1")
        assert fits and page.evaluate(PAGE_WIDTH)[0] <= width_px
        assert grid.locator(".ag-row [col-id]").evaluate_all(CUT_OFF) == []
        assert grid.locator(".ag-header-cell-text").evaluate_all(HEADER_CUT_OFF) == []
        # every row is in the grid's own height, none below it
        assert grid.locator(".ag-center-cols-container .ag-row").count() == 8
        # (the grid sets its height once the wrapped rows are measured: on a busy machine that can come after the
        # rows are drawn, so the test waits up to 5 s for it; a grid that never grows to its rows still fails)
        page.wait_for_function("() => { const v = document.querySelector('#asset-options .ag-body-viewport'); "
                               "return v !== null && v.scrollHeight <= v.clientHeight + 1; }", timeout=5000)
        # the payback written as the Fleet table writes it: rewinding spends capital and never pays back
        rewind = grid.locator(".ag-center-cols-container [row-id='rewind'] [col-id='discounted_payback_yr']")
        assert rewind.inner_text().split() == ["not", "within", "the", "horizon"]
        assert tab.errors == []
    finally:
        context.close()
