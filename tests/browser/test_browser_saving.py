"""Saving assumptions into the case from a real Chromium: the status line, the file on disk, the kept version.

The server here runs on a copy of the demo case in a temporary folder (its own engine and port, for this
module only; the repository's demo is never written). One journey: type a new discount rate and click
"Save these assumptions into the case" without pressing Enter first; the status line says what was
written and where the previous version is kept, ``finance.toml`` holds the new rate, and a reload of the
page shows it as the case's own value.
"""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest

from browser.conftest import Tab, served_dashboard

pytestmark = pytest.mark.browser

DEMO = Path(__file__).resolve().parents[2] / "data" / "demo"
READY = "#inputs-headline-npv:not(:text-is('-'))"


@pytest.fixture(scope="module")
def saving_server(tmp_path_factory):
    """The dashboard on a copy of the demo case; yields (url, case folder). The previous engine is restored."""
    case_dir = Path(shutil.copytree(DEMO, tmp_path_factory.mktemp("saving") / "demo"))
    with served_dashboard(case_dir, tmp_path_factory.mktemp("saving-uploads")) as url:
        yield url, case_dir


def test_save_a_typed_discount_rate_into_the_case(sys_browser, saving_server, artifacts):
    url, case_dir = saving_server
    original = (case_dir / "finance.toml").read_bytes()
    context = sys_browser.new_context(viewport={"width": 1400, "height": 900})
    tab = Tab(context, url)
    try:
        page = tab.goto("/inputs", READY)
        page.wait_for_function("document.querySelector('#inputs-discount-rate')?.value === '8'")
        page.wait_for_load_state("networkidle")
        page.fill("#inputs-discount-rate", "6.5")  # typed, not applied with Enter: the click must save it
        asked = []  # the save asks first, naming the file it writes; accepted here

        def accept(dialog):
            asked.append(dialog.message)
            dialog.accept()

        page.once("dialog", accept)
        page.click("#inputs-save")
        status = page.locator("#inputs-save-status")
        status.filter(has_text="Saved 1 value into finance.toml").wait_for()
        text = status.inner_text()
        assert len(asked) == 1 and "finance.toml" in asked[0]
        assert "discount_rate_frac 0.08 -> 0.065" in text
        assert "The previous version is kept as .versions/finance-" in text
        page.screenshot(path=artifacts / "saving_status.png", full_page=True)

        lines = (case_dir / "finance.toml").read_text(encoding="utf-8").splitlines()
        assert "discount_rate_frac = 0.065" in lines and "discount_rate_frac = 0.08" not in lines
        kept = sorted((case_dir / ".versions").glob("finance-*.toml"))
        assert len(kept) == 1 and kept[0].name in text and kept[0].read_bytes() == original

        page.locator("#app-case-label").filter(has_text="discount 6.5 %").wait_for()
        page.reload()  # the case's own value now, with no edits pending
        page.locator(READY).first.wait_for()
        page.wait_for_function("document.querySelector('#inputs-discount-rate')?.value === '6.5'")
        assert tab.errors == [], f"console errors: {tab.errors}"
    except Exception:
        tab.page.screenshot(path=artifacts / "saving_failure.png", full_page=True)
        raise
    finally:
        context.close()
