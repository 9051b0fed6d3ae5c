"""The pack in a real browser: the report loads offline and draws every chart; records print on one page.

Runs Debian's Chromium through Playwright (docs/pack.md, section PDF); skipped when the browser or
Playwright is missing (install the ``chromium`` package and ``pip install playwright``).
"""

from __future__ import annotations

import os
import re
import subprocess
import sys
import unicodedata
from pathlib import Path

import pytest

from models import scenario
from models.pack import REPORT_NAME, write_pack
from test_pack_workbook import INJECTION_AT, INJECTION_HTML, INJECTION_HYPERLINK, build_case

pytestmark = pytest.mark.browser
CHROMIUM = os.environ.get("CHROMIUM_PATH", "/usr/bin/chromium")
ARGS = ["--no-sandbox", "--disable-gpu", "--disable-background-networking", "--disable-component-update",
        "--disable-sync", "--no-first-run"]
if not os.path.exists(CHROMIUM):
    pytest.skip(f"no Chromium at {CHROMIUM}: apt-get install chromium (or set CHROMIUM_PATH)", allow_module_level=True)
sync_api = pytest.importorskip("playwright.sync_api", reason="pip install playwright")
DRAWN = ("() => Array.from(document.querySelectorAll('.plotly-graph-div'))"
         ".every(d => d.querySelector('svg.main-svg'))")


def pdf_pages(data: bytes) -> int:
    """Number of page objects in a PDF (Chromium writes uncompressed page dictionaries)."""
    return len(re.findall(rb"/Type\s*/Page(?![s\w])", data))


@pytest.fixture(scope="module")
def pack_browser(request):
    if request.config.pluginmanager.has_plugin("playwright"):  # share pytest-playwright's loop when loaded
        p, manager = request.getfixturevalue("playwright"), None
    else:
        manager = sync_api.sync_playwright()
        p = manager.__enter__()
    b = p.chromium.launch(executable_path=CHROMIUM, args=ARGS)
    yield b
    b.close()
    if manager is not None:
        manager.__exit__(None, None, None)


@pytest.fixture(scope="module")
def pack(tmp_path_factory):
    case = build_case(tmp_path_factory.mktemp("case"),
                      descriptions={"F1": INJECTION_HYPERLINK, "C1": INJECTION_AT, "P1": INJECTION_HTML})
    result = scenario.run(case, case.finance, with_risk=True)
    out = tmp_path_factory.mktemp("pack")
    write_pack(case, result, out, assets=["P1", "F1", "C1"], plan=False)
    return out


@pytest.fixture(scope="module")
def loaded(pack_browser, pack):
    """The report opened from disk, every chart drawn; with the requests, errors and dialogs seen."""
    page = pack_browser.new_page(viewport={"width": 1200, "height": 900})
    seen = {"requests": [], "errors": [], "dialogs": []}
    page.on("request", lambda r: seen["requests"].append(r.url))
    page.on("pageerror", lambda e: seen["errors"].append(str(e)))
    page.on("console", lambda m: seen["errors"].append(m.text) if m.type == "error" else None)
    page.on("dialog", lambda d: (seen["dialogs"].append(d.message), d.dismiss()))
    url = (pack / REPORT_NAME).resolve().as_uri()
    page.goto(url, wait_until="load")
    page.wait_for_function(DRAWN, timeout=60_000)
    yield page, seen, url
    page.close()


def test_no_network_request(loaded):
    _, seen, url = loaded
    others = [u for u in seen["requests"] if u != url]
    assert others == []


def test_every_chart_drawn(loaded):
    page, _, _ = loaded
    charts = page.locator(".plotly-graph-div")
    assert charts.count() == 7
    for k in range(charts.count()):
        assert charts.nth(k).locator("svg.main-svg").count() >= 1
        assert charts.nth(k).locator(".trace, .bars, .scatterlayer path").count() >= 1  # something plotted


def test_no_errors_and_no_script_from_user_text(loaded):
    page, seen, _ = loaded
    assert seen["errors"] == [] and seen["dialogs"] == []
    assert page.get_by_text(INJECTION_HTML, exact=True).count() >= 1  # shown as literal text
    assert page.evaluate("Array.from(document.scripts).every(s => !s.textContent.includes('alert(1)'))")


def test_decision_record_prints_on_one_a4_page(pack_browser, pack):
    page = pack_browser.new_page()
    for name in ("P1.html", "F1.html", "C1.html"):
        page.goto((pack / "decision-records" / name).resolve().as_uri())
        page.emulate_media(media="print")
        data = page.pdf(format="A4", print_background=True, prefer_css_page_size=True)
        assert pdf_pages(data) == 1, name
    page.close()


def test_every_demo_decision_record_prints_on_one_a4_page(pack_browser, demo_run_physics, tmp_path):
    # the demo's records are the longest (11 options, drive and speed cautions, two rewinds): every one on one page
    case, phys = demo_run_physics
    result = scenario.economics(case, phys, case.finance, with_risk=False)
    write_pack(case, result, tmp_path, assets=list(case.assets["asset_id"]), plan=False)
    page = pack_browser.new_page()
    spilled = []
    for record in sorted((tmp_path / "decision-records").glob("*.html")):
        page.goto(record.resolve().as_uri())
        page.emulate_media(media="print")
        if pdf_pages(page.pdf(format="A4", print_background=True, prefer_css_page_size=True)) != 1:
            spilled.append(record.name)
    page.close()
    assert len(list((tmp_path / "decision-records").glob("*.html"))) == len(case.assets)
    assert spilled == []


def test_cli_prints_the_report_to_pdf(tmp_path):
    """End to end as a user runs it; in a fresh process so its browser does not meet the test's."""
    case_dir = tmp_path / "case"
    build_case(case_dir)
    out = tmp_path / "out"
    done = subprocess.run([sys.executable, "-m", "drivecase", "report", str(case_dir), "--out", str(out),
                           "--assets", "P1,C1", "--pdf"], capture_output=True, text=True, timeout=300,
                          cwd=Path(__file__).resolve().parents[1])
    assert done.returncode == 0, done.stderr
    data = (out / "capital-request.pdf").read_bytes()
    assert data.startswith(b"%PDF-") and pdf_pages(data) > 3
    assert "capital-request.pdf" in done.stdout
    # every page carries the caution and its number, so that a page copied alone still says what it is
    pypdf = pytest.importorskip("pypdf")
    pages = [" ".join(unicodedata.normalize("NFKC", page.extract_text()).split())  # (the "fi" ligature as two letters)
             for page in pypdf.PdfReader(out / "capital-request.pdf").pages]
    for number, text in enumerate(pages, start=1):
        assert f"page {number} of {len(pages)}" in text, number
        assert "qualified persons under local codes" in text, number


def test_no_table_runs_off_the_printed_page(pack_browser, demo_run_physics, tmp_path):
    # the demo's options table has a column per option (11): in print, no element reaches past the page width
    case, phys = demo_run_physics
    result = scenario.economics(case, phys, case.finance, with_risk=False)
    write_pack(case, result, tmp_path)
    page = pack_browser.new_page(viewport={"width": 1054, "height": 1400})
    page.goto((tmp_path / REPORT_NAME).as_uri())
    for media in ("print", "screen"):
        page.emulate_media(media=media)
        beyond = page.evaluate("() => Array.from(document.querySelectorAll('body *'))"
                               ".filter(e => e.getBoundingClientRect().right > document.documentElement.clientWidth + 1)"
                               ".map(e => e.tagName)")
        assert beyond == [], media
    page.close()
