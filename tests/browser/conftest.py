"""Browser fixtures: one dashboard server and one Chromium for the whole session.

The server runs the real app on the demo case in a thread (werkzeug on a free port); its physics are
computed once before the first test. Playwright drives Debian's Chromium (``/usr/bin/chromium`` or
``CHROMIUM_PATH``); without it every browser test is skipped with a message saying how to install it.
"""

from __future__ import annotations

import logging
import os
import threading
from contextlib import contextmanager
from pathlib import Path

import pytest

CHROMIUM = os.environ.get("CHROMIUM_PATH", "/usr/bin/chromium")
ARGS = ["--no-sandbox", "--disable-gpu", "--disable-background-networking", "--disable-component-update",
        "--disable-sync", "--no-first-run"]
ARTIFACTS = Path(__file__).resolve().parents[1] / "artifacts"
SKIP_REASON = (f"Chromium not found at {CHROMIUM}: install it (Debian/Ubuntu: apt-get install chromium) or set "
               "CHROMIUM_PATH to a Chromium or Chrome executable")


def pytest_collection_modifyitems(config, items):
    here = Path(__file__).resolve().parent
    if Path(CHROMIUM).exists():
        return
    skip = pytest.mark.skip(reason=SKIP_REASON)
    for item in items:
        if here in Path(str(item.fspath)).resolve().parents:
            item.add_marker(skip)


@pytest.fixture(scope="session")
def artifacts() -> Path:
    ARTIFACTS.mkdir(exist_ok=True)
    return ARTIFACTS


@contextmanager
def served_dashboard(case_dir, upload_root):
    """Serve the real app on ``case_dir`` from a thread on a free port; yield its URL.

    The case's physics are computed before the first page asks; the engine in use before is restored
    on exit.
    """
    from werkzeug.serving import make_server

    from dashboard import services
    from dashboard.app import app

    previous = services._ENGINE
    engine = services.use_engine(services.Engine(upload_root=upload_root))
    entry, problems = engine.set_default_case(case_dir)
    assert entry is not None, problems
    engine.physics(entry.key)  # the slow part, once per server
    logging.getLogger("werkzeug").setLevel(logging.ERROR)
    server = make_server("127.0.0.1", 0, app.server, threaded=True)
    # requests in threads the server waits for when closed: a callback still solving a plan when the tests end
    # would otherwise be cut at the interpreter's exit inside the solver's native code, which aborts the process
    server.daemon_threads = False
    thread = threading.Thread(target=server.serve_forever, daemon=True)
    thread.start()
    try:
        yield f"http://127.0.0.1:{server.server_port}"
    finally:
        server.shutdown()
        server.server_close()  # (joins the requests still running)
        thread.join(5)
        services.use_engine(previous)


@pytest.fixture(scope="session")
def dash_url(tmp_path_factory):
    """The dashboard on the demo case, served from a thread on a free port."""
    from models.io import DEMO_DIR

    with served_dashboard(DEMO_DIR, tmp_path_factory.mktemp("uploads")) as url:
        yield url


@pytest.fixture(scope="session")
def sys_browser(request):
    """One Chromium for the session (shares pytest-playwright's event loop when that plugin is active)."""
    if not Path(CHROMIUM).exists():
        pytest.skip(SKIP_REASON)
    from playwright.sync_api import sync_playwright

    if request.config.pluginmanager.has_plugin("playwright"):
        playwright, manager = request.getfixturevalue("playwright"), None
    else:
        manager = sync_playwright()
        playwright = manager.__enter__()
    browser = playwright.chromium.launch(executable_path=CHROMIUM, args=ARGS)
    yield browser
    browser.close()
    if manager is not None:
        manager.__exit__(None, None, None)


@pytest.fixture(scope="session")
def browser_type_launch_args(browser_type_launch_args):
    """pytest-playwright's own fixtures, pointed at the system Chromium."""
    return {**browser_type_launch_args, "executable_path": CHROMIUM, "args": ARGS}


@pytest.fixture(scope="session")
def base_url(dash_url):
    return dash_url


class Tab:
    """A browser tab with its own session storage, collecting console errors."""

    def __init__(self, context, url: str):
        self.context, self.url = context, url
        self.page = context.new_page()
        self.errors: list[str] = []
        self.page.on("console", lambda m: self.errors.append(m.text) if m.type == "error" else None)
        self.page.on("pageerror", lambda e: self.errors.append(str(e)))
        self.page.set_default_timeout(45_000)

    def goto(self, path: str, ready: str):
        self.page.goto(self.url + path)
        self.page.locator(ready).first.wait_for()
        return self.page


@pytest.fixture
def tab(sys_browser, dash_url):
    """A fresh tab (new browser context: its own session storage, so its own case)."""
    context = sys_browser.new_context(viewport={"width": 1400, "height": 900})
    yield Tab(context, dash_url)
    context.close()


@pytest.fixture
def new_tab(sys_browser, dash_url):
    """Make more tabs, each in its own browser context (closed at the end of the test)."""
    made: list[Tab] = []

    def make() -> Tab:
        made.append(Tab(sys_browser.new_context(viewport={"width": 1400, "height": 900}), dash_url))
        return made[-1]

    yield make
    for t in made:
        t.context.close()
