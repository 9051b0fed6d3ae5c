"""The plan and fleet tables at common laptop widths (1024 and 1366 px) from a real Chromium.

The page itself never scrolls sideways; a table either fits its panel with every text whole (long texts
wrap) or scrolls sideways inside its own panel. Whether a text is cut off depends on the grid's own
layout at the window's width, so these need the browser.
"""

from __future__ import annotations

import pytest

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
        # every column fits the panel: nothing is hidden to the right of the grid
        fits = page.locator(f"#{grid} .ag-center-cols-viewport").evaluate("v => v.scrollWidth <= v.clientWidth + 1")
        assert fits, grid
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
