"""The Fleet page from a real Chromium: keys at a person's pace, the state while the case is computed, the
table's columns at common window widths and the site filter's options.

- Enter on a focused cell opens that row's asset (dashboard/assets/keyboard.js); Tab and Shift+Tab leave
  the grid (components.data_grid: the grid does not move between cells on Tab).
- While the tab's results are not there yet, the page says the case is being computed, never "No asset
  matches the filters" or "0 of n assets".
- The columns fit at 1366 and 1920 px with every word whole; at 1024 px the table scrolls sideways inside
  its panel and its bottom edge (where its scrollbar is) is on the first screen.
"""

from __future__ import annotations

import json

import pytest

from browser.conftest import Tab
from browser.test_browser_asset import CUT_OFF
from browser.test_browser_dashboard import PAGES

pytestmark = pytest.mark.browser

#: Pause between keys [ms] and how long each key is held [ms]: a person's pace, not a script's.
KEY_GAP_MS = 350
KEY_HOLD_MS = 80
#: Where the focus is: inside the Fleet grid or not, and which element.
FOCUS = """() => { const e = document.activeElement;
    return {inGrid: !!(e && e.closest && e.closest('#fleet-table')), id: e ? e.id : null,
            col: e && e.getAttribute ? e.getAttribute('col-id') : null}; }"""
#: Words broken across two lines (a line break inside a word), as the grid renders its texts.
BROKEN_WORDS = """els => els.filter(el => {
    const t = el.firstChild && el.firstChild.nodeType === 3 ? el.firstChild : null;
    if (!t) return false;
    let i = 0;
    for (const w of t.textContent.split(' ')) {
        if (w) {
            const r = document.createRange(); r.setStart(t, i); r.setEnd(t, i + w.length);
            if ([...r.getClientRects()].filter(q => q.width > 0).length > 1) return true;
        }
        i += w.length + 1;
    }
    return false;
}).map(el => el.textContent)"""


def press(page, key: str) -> None:
    page.keyboard.press(key, delay=KEY_HOLD_MS)
    page.wait_for_timeout(KEY_GAP_MS)


def open_fleet(tab) -> object:
    page = tab.goto("/", PAGES[0][1])
    page.wait_for_load_state("networkidle")
    return page


def test_enter_at_a_persons_pace_opens_the_focused_rows_asset(tab):
    page = open_fleet(tab)
    # the page says this path in words under the table (the hint a keyboard user reads first)
    from dashboard.pages.fleet import KEYBOARD_HINT

    assert page.locator(".keyboard-hint").inner_text() == KEYBOARD_HINT and page.locator(".keyboard-hint").is_visible()
    # the asset of the third row (row index 2), read from the pinned asset column
    asset_id = page.locator("#fleet-table .ag-pinned-left-cols-container .ag-row[row-index='2'] .link-cell").inner_text()
    page.focus("#fleet-application-filter")
    page.wait_for_timeout(KEY_GAP_MS)
    press(page, "Tab")  # into the grid: its first header cell
    assert page.evaluate(FOCUS)["inGrid"]
    for _ in range(3):  # header -> rows 0, 1, 2
        press(page, "ArrowDown")
    focus = page.evaluate(FOCUS)
    assert focus["inGrid"] and focus["col"] == "rank"
    press(page, "Enter")
    page.wait_for_url(f"**/asset?id={asset_id}")
    page.locator("#asset-summary").filter(has_text=asset_id).wait_for()
    assert tab.errors == [], f"console errors: {tab.errors}"


def test_enter_on_a_cell_right_of_the_asset_column_opens_the_asset(tab):
    page = open_fleet(tab)
    asset_id = page.locator("#fleet-table .ag-pinned-left-cols-container .ag-row[row-index='1'] .link-cell").inner_text()
    # focus (a click would open the row's asset at once) a cell of the unpinned columns
    page.locator("#fleet-table .ag-center-cols-container .ag-row[row-index='0'] [col-id='npv']").focus()
    page.wait_for_timeout(KEY_GAP_MS)
    press(page, "ArrowDown")
    press(page, "ArrowRight")
    assert page.evaluate(FOCUS)["col"] == "discounted_payback_yr"
    press(page, "Enter")
    page.wait_for_url(f"**/asset?id={asset_id}")
    assert tab.errors == [], f"console errors: {tab.errors}"


def test_tab_and_shift_tab_leave_the_grid(tab):
    page = open_fleet(tab)
    page.focus("#fleet-application-filter")
    page.wait_for_timeout(KEY_GAP_MS)
    press(page, "Tab")
    assert page.evaluate(FOCUS)["inGrid"]
    press(page, "Tab")  # one more Tab: out of the grid, to the next element of the page
    assert not page.evaluate(FOCUS)["inGrid"]
    press(page, "Shift+Tab")  # back into the grid ...
    assert page.evaluate(FOCUS)["inGrid"]
    press(page, "ArrowDown")  # ... move inside it with the arrows ...
    assert page.evaluate(FOCUS)["inGrid"]
    press(page, "Shift+Tab")  # ... and Shift+Tab leaves it to the filter before it
    assert page.evaluate(FOCUS)["id"] == "fleet-application-filter"
    assert tab.errors == [], f"console errors: {tab.errors}"


def test_while_the_results_are_computed_the_page_says_so(tab, artifacts):
    page = tab.page
    held = []

    def hold_the_fleet_results(route):
        # the Fleet page's main callback (cards, table, count...) stands for results still being computed
        if "fleet-table.rowData" in (route.request.post_data or ""):
            held.append(route)
        else:
            route.continue_()

    page.route("**/_dash-update-component*", hold_the_fleet_results)
    page.goto(tab.url + "/")
    page.locator("#fleet-table .ag-root-wrapper").wait_for()
    page.wait_for_timeout(1500)  # longer than the cards' spinner delay and the grid's first layout
    assert held, "the Fleet callback was not asked"
    count = page.locator("#fleet-count")
    assert count.inner_text() == "Computing the case…"
    grid_text = page.locator("#fleet-table").inner_text()
    assert "Computing the case…" in grid_text and "No asset matches" not in grid_text
    assert page.locator(".computing").filter(has_text="Computing the case…").first.is_visible()
    page.screenshot(path=artifacts / "fleet_computing.png")
    for route in held:
        route.continue_()
    page.unroute("**/_dash-update-component*")
    page.locator(PAGES[0][1]).first.wait_for()
    page.locator("#fleet-count").filter(has_text=" of ").wait_for()
    assert "assets" in count.inner_text() and "Computing" not in count.inner_text()
    assert page.locator(".computing").count() == 0 or not page.locator(".computing").first.is_visible()
    # a filter that matches nothing is said as such (the results are there)
    assert "No asset matches" not in page.locator("#fleet-table").inner_text()


@pytest.mark.parametrize("width_px,height_px", [(1366, 768), (1920, 1080)])
def test_every_fleet_column_shows_whole_at_common_widths(sys_browser, dash_url, artifacts, width_px, height_px):
    context = sys_browser.new_context(viewport={"width": width_px, "height": height_px})
    try:
        tab = Tab(context, dash_url)
        page = open_fleet(tab)
        page.screenshot(path=artifacts / f"fleet_columns_{width_px}.png")
        box = page.locator("#fleet-table").bounding_box()
        last = page.locator("#fleet-table .ag-header-cell[col-id='data_quality_pct']").bounding_box()
        assert box and last and last["x"] + last["width"] <= box["x"] + box["width"] + 1
        # nothing to scroll to (headless Chromium's hidden scrollbars leave the grid's fit-to-width 2 px over)
        fits = page.locator("#fleet-table .ag-center-cols-viewport").evaluate("v => v.scrollWidth <= v.clientWidth + 3")
        assert fits
        assert page.locator("#fleet-table .ag-header-cell-text").evaluate_all(BROKEN_WORDS) == []
        assert page.locator("#fleet-table .ag-row .ag-cell-value").evaluate_all(BROKEN_WORDS) == []
        assert page.locator("#fleet-table .ag-row [col-id]").evaluate_all(CUT_OFF) == []
        assert tab.errors == [], f"console errors: {tab.errors}"
    finally:
        context.close()


def test_at_1024_the_table_scrolls_within_the_first_screen(sys_browser, dash_url, artifacts):
    context = sys_browser.new_context(viewport={"width": 1024, "height": 768})
    try:
        tab = Tab(context, dash_url)
        page = open_fleet(tab)
        page.screenshot(path=artifacts / "fleet_columns_1024.png")
        overflows = page.locator("#fleet-table .ag-center-cols-viewport").evaluate("v => v.scrollWidth > v.clientWidth + 1")
        assert overflows  # the columns do not all fit: the table scrolls sideways ...
        box = page.locator("#fleet-table").bounding_box()
        scroll = page.locator("#fleet-table .ag-body-horizontal-scroll").bounding_box()
        # ... and its scrollbar, along its bottom edge, is on the first screen, without scrolling the page
        assert page.evaluate("window.scrollY") == 0
        assert box and box["y"] + box["height"] <= 768
        assert scroll and scroll["y"] + scroll["height"] <= 768
        assert tab.errors == [], f"console errors: {tab.errors}"
    finally:
        context.close()


def test_the_site_filter_shows_each_checkbox_on_its_labels_line(tab, artifacts):
    page = open_fleet(tab)
    page.click("#fleet-site-filter")
    options = page.locator("[role=option]")
    options.first.wait_for()
    lines = options.evaluate_all("""os => os.map(o => {
        const box = o.querySelector('input[type=checkbox]').getBoundingClientRect();
        const text = o.querySelector('.dash-options-list-option-text').getBoundingClientRect();
        return {same: box.bottom > text.top && box.top < text.bottom, left: box.right <= text.left + 1};
    })""")
    page.screenshot(path=artifacts / "fleet_site_filter.png")
    assert lines and all(line["same"] and line["left"] for line in lines), json.dumps(lines)
    page.keyboard.press("Escape")
    assert tab.errors == [], f"console errors: {tab.errors}"
