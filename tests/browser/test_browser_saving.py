"""Saving assumptions into the case from a real Chromium: the status line, the file on disk, the kept version.

The server here runs on a copy of the demo case in a temporary folder (its own engine and port, for this
module only; the repository's demo is never written). One journey: type a new discount rate and click
"Save these assumptions into the case" without pressing Enter first; the status line says what was
written and where the previous version is kept, ``finance.toml`` holds the new rate, and a reload of the
page shows it as the case's own value.
"""

from __future__ import annotations

import logging
import shutil
import threading
from pathlib import Path

import pytest

from browser.conftest import Tab

pytestmark = pytest.mark.browser

DEMO = Path(__file__).resolve().parents[2] / "data" / "demo"
READY = "#inputs-headline-npv:not(:text-is('-'))"


@pytest.fixture(scope="module")
def saving_server(tmp_path_factory):
    """The dashboard on a copy of the demo case; yields (url, case folder). The previous engine is restored."""
    from werkzeug.serving import make_server

    from dashboard import services
    from dashboard.app import app

    case_dir = Path(shutil.copytree(DEMO, tmp_path_factory.mktemp("saving") / "demo"))
    previous = services._ENGINE
    engine = services.use_engine(services.Engine(upload_root=tmp_path_factory.mktemp("saving-uploads")))
    entry, problems = engine.set_default_case(case_dir)
    assert entry is not None, problems
    engine.physics(entry.key)  # the slow part, before the page asks
    logging.getLogger("werkzeug").setLevel(logging.ERROR)
    server = make_server("127.0.0.1", 0, app.server, threaded=True)
    thread = threading.Thread(target=server.serve_forever, daemon=True)
    thread.start()
    try:
        yield f"http://127.0.0.1:{server.server_port}", case_dir
    finally:
        server.shutdown()
        thread.join(5)
        services.use_engine(previous)


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
        page.click("#inputs-save")
        status = page.locator("#inputs-save-status")
        status.filter(has_text="Saved 1 value(s) into finance.toml").wait_for()
        text = status.inner_text()
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
