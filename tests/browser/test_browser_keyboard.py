"""Keyboard and repeat paths from a real Chromium (dashboard/assets/keyboard.js).

- The Fleet table: Enter on a focused row opens its asset, as a click does.
- The upload area: a file refused, corrected and chosen again under the same name is read again. (A
  desktop browser reports no change when the same file is chosen twice; keyboard.js lets the chosen
  file go once it is read. Headless Chromium's file dialog reports every choice, so this journey
  passes with or without that line: it guards the journey, not that line.)
"""

from __future__ import annotations

import pytest

from browser.test_browser_dashboard import PAGES, assets_csv

pytestmark = pytest.mark.browser


def test_enter_on_a_fleet_row_opens_its_asset(tab):
    page = tab.goto("/", PAGES[0][1])
    page.wait_for_load_state("networkidle")
    # the first row's asset id, read before anything on the row is clicked (a click may open the asset)
    asset_id = page.locator("#fleet-table .ag-pinned-left-cols-container .ag-row[row-index='0'] .link-cell").inner_text()
    cell = page.locator("#fleet-table .ag-center-cols-container .ag-row[row-index='0'] .ag-cell").first
    cell.click()  # focus a cell of the first row that is not the asset id itself (the pinned column)
    page.goto(tab.url + "/")  # back, then the keyboard alone
    page.locator(PAGES[0][1]).first.wait_for()
    page.wait_for_load_state("networkidle")
    page.locator("#fleet-table .ag-center-cols-container .ag-row[row-index='0'] .ag-cell").first.focus()
    page.keyboard.press("Enter")
    page.wait_for_url(f"**/asset?id={asset_id}")
    page.locator("#asset-summary").filter(has_text=asset_id).wait_for()
    assert tab.errors == [], f"console errors: {tab.errors}"


def choose(page, path) -> None:
    """Choose a file through the page's own file dialog, as a user does (a click on "choose files")."""
    with page.expect_file_chooser() as chooser:
        page.click("#inputs-upload a")
    chooser.value.set_files(str(path))


def test_a_corrected_file_under_the_same_name_is_read_again(tab, tmp_path):
    page = tab.goto("/inputs", PAGES[-1][1])
    page.wait_for_load_state("networkidle")
    status = page.locator("#inputs-status")
    path = tmp_path / "assets.csv"
    # the demo's assets.csv with HRW-P01 (spreadsheet row 2) rated -250 kW: refused
    path.write_bytes(assets_csv(negative_row=2))
    choose(page, path)
    status.filter(has_text="error").wait_for()
    # the same file, corrected on disk and chosen again: read again (the demo's own register)
    path.write_bytes(assets_csv())
    choose(page, path)
    status.filter(has_not_text="error in the upload").wait_for()
    assert "error" not in status.inner_text().lower()
    assert tab.errors == [], f"console errors: {tab.errors}"


def test_the_site_chosen_stays_chosen_on_reload(tab):
    page = tab.goto("/site", "#site-week-figure .main-svg")
    page.wait_for_load_state("networkidle")
    page.click("#site-pick")
    page.keyboard.type("KGQ", delay=30)
    page.keyboard.press("Enter")
    page.locator("#site-pick").filter(has_text="KGQ").wait_for()
    # the address names the site on screen (the demo's second site, data/demo/sites.csv) ...
    page.wait_for_url("**/site?site=KGQ")
    page.reload()
    page.locator("#site-week-figure .main-svg").first.wait_for()
    # ... so a reload shows it again, once the page's list of sites has arrived
    page.locator("#site-pick").filter(has_text="KGQ").wait_for(timeout=30_000)
    page.wait_for_load_state("networkidle")
    assert "KGQ" in page.locator("#site-pick").inner_text() and "HRW" not in page.locator("#site-pick").inner_text()
    assert tab.errors == [], f"console errors: {tab.errors}"
