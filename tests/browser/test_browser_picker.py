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


def test_a_letter_pressed_as_the_list_opens_is_not_lost(tab):
    """A letter pressed on the picker's button in the frame before the keyboard reaches the highlighted
    option, and released on that option, lands in the search box (it was lost: "GQ-F01" for "KGQ-F01")."""
    page = tab.goto("/asset", READY)
    page.wait_for_load_state("networkidle")
    page.click("#asset-pick")
    page.locator(".dash-dropdown-content").wait_for()
    # the same moment, made certain: the key goes down on the open dropdown's button ...
    page.evaluate("() => document.getElementById('asset-pick').focus()")
    page.keyboard.down("K")
    # ... and the dropdown's own focus move to the highlighted option happens before it comes up
    page.evaluate("() => document.querySelector('.dash-dropdown-content .dash-options-list-option-checkbox')"
                  "?.focus()")
    page.keyboard.up("K")
    page.keyboard.type("GQ-F01", delay=30)
    assert page.locator("input.dash-dropdown-search").input_value() == "KGQ-F01"
    page.keyboard.press("Enter")
    page.locator("#asset-summary").filter(has_text="KGQ-F01").wait_for()
    assert tab.errors == [], f"console errors: {tab.errors}"
