"""The Fleet page's filters from a real Chromium: they hold for the tab's session.

A user narrows the table (site, application), opens an asset from it and comes back with the browser's
Back button: the filters are as they left them, and so is the table they narrow.
"""

from __future__ import annotations

import json
import re

import pytest
from playwright.sync_api import expect

from browser.test_browser_dashboard import PAGES

pytestmark = pytest.mark.browser

#: The demo case's pumps at Kestrel Gorge Quarry (data/demo/assets.csv: 10 rows with site_id KGQ and
#: application pump, of 82 assets).
NARROWED = "10 of 82 assets"


def pick(page, dropdown: str, option: str) -> None:
    """Open a filter's list, tick one option by its label and close the list."""
    page.click(dropdown)
    page.locator("[role=option]").filter(has_text=option).first.click()
    page.keyboard.press("Escape")


def open_and_come_back(tab, first) -> str:
    """Open the asset of the table's row ``first`` (a locator of its link cell), then go Back to the Fleet page;
    return the asset's id."""
    asset_id = first.inner_text()
    first.click()
    page = tab.page
    page.wait_for_url(f"**/asset?id={asset_id}")
    page.locator("#asset-summary").filter(has_text=asset_id).wait_for()
    page.go_back()
    page.wait_for_url(tab.url + "/")
    page.locator(PAGES[0][1]).first.wait_for()
    page.wait_for_load_state("networkidle")
    return asset_id


def test_filters_hold_when_the_user_opens_an_asset_and_comes_back(tab, artifacts):
    page = tab.goto("/", PAGES[0][1])
    page.wait_for_load_state("networkidle")
    page.locator("#fleet-count").filter(has_text="82 of 82 assets").wait_for()
    pick(page, "#fleet-site-filter", "KGQ: Kestrel Gorge Quarry")
    pick(page, "#fleet-application-filter", "pump")
    page.locator("#fleet-count").filter(has_text=NARROWED).wait_for()
    first = page.locator("#fleet-table .ag-pinned-left-cols-container .ag-row[row-index='0'] .link-cell")
    expect(first).to_have_text(re.compile(r"^KGQ-"))  # the grid shows the narrowed rows
    open_and_come_back(tab, first)
    page.screenshot(path=artifacts / "fleet_filters_after_back.png")
    # the filters show what was picked, and the table and its count are narrowed by them
    assert "KGQ" in page.locator("#fleet-site-filter").inner_text()
    assert "pump" in page.locator("#fleet-application-filter").inner_text()
    page.locator("#fleet-count").filter(has_text=NARROWED).wait_for(timeout=10_000)
    sites = page.locator("#fleet-table .ag-center-cols-container [col-id='site_id']").all_inner_texts()
    assert sites and set(sites) == {"KGQ"}
    assert tab.errors == [], f"console errors: {tab.errors}"


def test_the_sort_holds_when_the_user_opens_an_asset_and_comes_back(tab, artifacts):
    # the table opens ranked by NPV, largest first; the user sorts by rating, smallest first, opens the first
    # asset and comes back: the order is the one they chose (data/demo/assets.csv: the smallest motors are
    # 0.75 kW dosing pumps)
    page = tab.goto("/", PAGES[0][1])
    page.wait_for_load_state("networkidle")
    page.locator("#fleet-count").filter(has_text="82 of 82 assets").wait_for()
    # a server's answer that would store the sort never arrives (as when the user opens an asset before it does):
    # the sort must be kept in the browser itself
    sent = []

    def no_server_sort(route):
        body = route.request.post_data or ""
        output = json.loads(body).get("output", "") if body.startswith("{") else ""
        if "fleet-sort" in output:
            sent.append(output)
            route.abort()
        else:
            route.continue_()

    callbacks = re.compile(r"/_dash-update-component(\?|$)")  # (the address carries a query)
    page.route(callbacks, no_server_sort)
    header = page.locator("#fleet-table .ag-header-cell[col-id='rating'] .ag-header-cell-label")
    header.click()
    rating = page.locator("#fleet-table .ag-center-cols-container .ag-row[row-index='0'] [col-id='rating']")
    expect(rating).to_have_text("0.75")
    first = page.locator("#fleet-table .ag-pinned-left-cols-container .ag-row[row-index='0'] .link-cell")
    asset_id = open_and_come_back(tab, first)
    page.locator("#fleet-count").filter(has_text="82 of 82 assets").wait_for()
    page.screenshot(path=artifacts / "fleet_sort_after_back.png")
    expect(rating).to_have_text("0.75", timeout=10_000)
    expect(first).to_have_text(asset_id)
    assert sent == []  # (the browser kept it: nothing asked of the server)
    page.unroute(callbacks)
    assert tab.errors == [], f"console errors: {tab.errors}"
