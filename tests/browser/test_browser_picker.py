"""The asset picker from a real Chromium: a click on it, a name typed and Enter open that asset.

The dropdown opened with the mouse puts the keyboard on its highlighted option; dashboard/assets/
dropdown_search.js moves the keyboard to its search box when a letter is typed, so the letters filter the
list and Enter picks the first match.
"""

from __future__ import annotations

import pytest

pytestmark = pytest.mark.browser

READY = "#asset-summary:not(:empty)"


def test_click_type_enter_opens_the_asset(tab):
    page = tab.goto("/asset", READY)
    page.wait_for_load_state("networkidle")
    first = page.locator("#asset-summary").inner_text()
    # the demo's register (data/demo/assets.csv) has KGQ-F01, not the asset shown first
    assert "KGQ-F01" not in first
    page.click("#asset-pick")
    page.locator(".dash-dropdown-content").wait_for()
    page.keyboard.type("KGQ-F01", delay=30)
    assert page.locator("input.dash-dropdown-search").input_value() == "KGQ-F01"
    page.keyboard.press("Enter")
    page.locator("#asset-summary").filter(has_text="KGQ-F01").wait_for()
    assert tab.errors == [], f"console errors: {tab.errors}"
