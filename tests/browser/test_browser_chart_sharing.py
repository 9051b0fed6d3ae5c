"""No chart offers to send its data off this machine.

The charts hold a client's assets, NPVs and bills. The plotting library's mode bar can carry a button that
uploads a chart to an outside sharing service; dashboard/components.py removes it (GRAPH_CONFIG), so the
only ways to share are the exported files and the pack (docs/security.md).
"""

from __future__ import annotations

import pytest

pytestmark = pytest.mark.browser


@pytest.mark.parametrize("path, chart", [("/", "#fleet-abatement"), ("/plan", "#plan-by-year")])
def test_no_chart_has_a_button_that_shares_it_outside(tab, path, chart):
    page = tab.goto(path, f"{chart} .main-svg")
    page.locator(chart).hover()
    page.locator(f"{chart} .modebar-btn").first.wait_for(state="attached")
    assert page.locator(f"{chart} .modebar-btn").count() > 0  # the mode bar is there (download, zoom ...)
    titles = page.locator(f"{chart} .modebar-btn").evaluate_all("bs => bs.map(b => b.getAttribute('data-title'))")
    assert not [t for t in titles if t and ("share" in t.lower() or "cloud" in t.lower() or "chart studio" in t.lower())]
    assert tab.errors == [], f"console errors: {tab.errors}"
