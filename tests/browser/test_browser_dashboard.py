"""The dashboard in a real Chromium: every page loads cleanly, and the whole journey of a user works.

Journey: a broken upload shows its row-level message while the demo stays loaded; a good upload replaces
the case for this tab only; an asset opens from the fleet table; a new discount rate changes the NPV on
every page; a capital budget caps the plan's spend per year. Screenshots go to tests/artifacts/.
"""

from __future__ import annotations

import csv
import io
import json
import re
import statistics
from pathlib import Path

import pytest

pytestmark = pytest.mark.browser

DEMO = Path(__file__).resolve().parents[2] / "data" / "demo"
#: The demo motors kept in the "good" upload (a small case: its physics take about a second).
SMALL_IDS = ("HRW-P01", "HRW-M01", "HRW-S01", "KGQ-CR01", "KGQ-F01", "HRW-V01", "KGQ-WP01")

PAGES = [  # path, element that shows the page has its data, screenshot name
    ("/", "#fleet-table .ag-center-cols-container .ag-row", "fleet"),
    ("/asset?id=HRW-P01", "#asset-options .ag-center-cols-container .ag-row", "asset"),
    ("/site", "#site-week-figure .main-svg", "site"),
    ("/plan", "#plan-chosen .ag-center-cols-container .ag-row", "plan"),
    ("/risk", "#risk-table .ag-center-cols-container .ag-row", "risk"),
    ("/inputs", "#inputs-headline-npv:not(:text-is('-'))", "inputs"),
]


def assets_csv(ids=None, negative_row: int | None = None) -> bytes:
    """The demo's assets.csv, optionally cut to ``ids`` or with one rated_p_kw made negative."""
    with open(DEMO / "assets.csv", newline="", encoding="utf-8") as handle:
        rows = list(csv.reader(handle))
    header, body = rows[0], rows[1:]
    if ids is not None:
        body = [r for r in body if r[0] in ids]
    if negative_row is not None:
        body[negative_row - 2][header.index("rated_p_kw")] = "-250"  # spreadsheet row = data index + 2
    out = io.StringIO()
    csv.writer(out, lineterminator="\n").writerows([header] + body)
    return out.getvalue().encode("utf-8")


def upload(page, name: str, data: bytes) -> None:
    page.set_input_files("#inputs-upload input[type=file]", files=[{"name": name, "mimeType": "text/csv", "buffer": data}])


def money(text: str) -> float:
    """Read a card like 'EUR 1.25 M', 'EUR 48.2 k' or 'EUR 950' back into a number."""
    match = re.search(r"(-?[\d,.]+)\s*([Mk]?)", text.replace("\u2212", "-"))
    value = float(match.group(1).replace(",", ""))
    return value * {"M": 1e6, "k": 1e3, "": 1.0}[match.group(2)]


def grid_column(page, grid: str, column: str) -> list[str]:
    return page.locator(f"#{grid} .ag-row [col-id='{column}']").all_inner_texts()


@pytest.mark.parametrize("path, ready, name", PAGES, ids=[p[2] for p in PAGES])
def test_page_loads_without_console_errors(tab, artifacts, path, ready, name):
    page = tab.goto(path, ready)
    page.wait_for_load_state("networkidle")
    assert page.locator("#app-cautions").inner_text().count("\n") >= 4  # the cautions on every page
    assert "qualified persons" in page.locator("#app-cautions").inner_text()
    page.screenshot(path=artifacts / f"page_{name}.png", full_page=True)
    for status in ("#inputs-save-status", "#plan-pack-status"):  # opening a page is not a click on its buttons
        if page.locator(status).count():
            assert page.locator(status).inner_text().strip() == ""
    assert tab.errors == []


def test_journey(tab, artifacts):
    """The whole journey; every step's checks (Playwright expect and assert) live in :func:`journey`."""
    try:
        journey(tab, artifacts)
        assert tab.errors == [], f"console errors during the journey: {tab.errors}"
    except Exception:
        page = tab.page
        page.screenshot(path=artifacts / "journey_failure.png", full_page=True)
        print("URL", page.url, "| storage", page.evaluate("JSON.stringify(sessionStorage)"), "| console", tab.errors)
        raise


def journey(tab, artifacts):
    page = tab.goto("/inputs", PAGES[-1][1])
    demo_npv = page.locator("#inputs-headline-npv").inner_text()

    # 1. a broken assets.csv: its row-level message shows and the demo stays loaded
    upload(page, "assets.csv", assets_csv(negative_row=3))
    status = page.locator("#inputs-status")
    status.filter(has_text="previous case stays loaded").wait_for()
    problem = page.locator("#inputs-problems .ag-row").filter(has_text="rated_p_kw").first
    problem.wait_for()
    cells = problem.inner_text()
    assert "assets.csv" in cells and "3" in cells and "-250" in cells
    assert "82 assets" in page.locator("#inputs-case").inner_text()
    page.screenshot(path=artifacts / "journey_1_bad_upload.png", full_page=True)

    # 2. a good upload (seven motors; the tab keeps the demo's other files)
    upload(page, "assets.csv", assets_csv(ids=SMALL_IDS))
    status.filter(has_text="Loaded").wait_for()
    page.locator("#inputs-case").filter(has_text="7 assets").wait_for()
    assert "your upload" in page.locator("#inputs-case").inner_text()

    # 3. the fleet table holds the uploaded motors; a click opens one asset
    page.click("a.nav-link[href='/']")
    rows = page.locator("#fleet-table .ag-center-cols-container .ag-row")
    page.wait_for_function("document.querySelectorAll('#fleet-table .ag-center-cols-container .ag-row').length === 7")
    assert rows.count() == 7
    page.locator("#fleet-table .ag-pinned-left-cols-container [row-id='HRW-V01'] [col-id='asset_id']").click()
    page.wait_for_url("**/asset?id=HRW-V01")
    page.locator("#asset-summary").filter(has_text="HRW-V01").wait_for()
    page.locator("#asset-options .ag-row").filter(has_text="impeller trim").first.wait_for()
    page.locator("#asset-performance .main-svg").first.wait_for()
    page.screenshot(path=artifacts / "journey_2_asset.png", full_page=True)

    # 4. a lower discount rate raises the NPV, and the fleet page follows
    page.click("a.nav-link[href='/inputs']")
    npv = page.locator("#inputs-headline-npv")
    page.wait_for_function("document.querySelector('#inputs-discount-rate')?.value === '8'")
    page.wait_for_function("document.querySelector('#inputs-headline-npv')?.innerText !== '-'")
    page.wait_for_load_state("networkidle")
    before = npv.inner_text()
    assert before != demo_npv  # the seven-motor case, not the demo
    page.fill("#inputs-discount-rate", "3")
    page.press("#inputs-discount-rate", "Enter")
    page.wait_for_function(f"document.querySelector('#inputs-headline-npv')?.innerText !== {json.dumps(before)}")
    after = npv.inner_text()
    assert money(after) > money(before)  # lower rate, same positive savings: higher NPV
    page.click("a.nav-link[href='/']")
    page.locator("#fleet-headline-npv").filter(has_text=after).wait_for()
    assert "discount 3 %" in page.locator("#app-case-label").inner_text()

    # 5. a budget caps the plan's capital in every plan year
    page.click("a.nav-link[href='/plan']")
    page.wait_for_function("document.querySelector('#plan-budget-0')?.value !== ''")
    # the page's own first render is done (a live edit's plan is "best found" until proven, then "exact")
    page.locator("#plan-solve-status").filter(has_text=re.compile("Exact plan|Best plan found")).wait_for()
    page.wait_for_load_state("networkidle")
    budgets = [20000.0, 8000.0]
    edit_field(page, "#plan-budget-2", "", "Tab",  # an emptied year ends the budget list
               page.locator("#app-case-label").filter(has_text="budget 2 yr"))
    page.fill("#plan-budget-1", str(int(budgets[1])))
    page.press("#plan-budget-1", "Tab")
    page.fill("#plan-budget-0", str(int(budgets[0])))
    page.press("#plan-budget-0", "Enter")
    page.locator("#plan-spend").filter(has_text="of EUR 20.0 k").filter(has_text="of EUR 8,000").wait_for()
    assert "year 2" not in page.locator("#plan-spend").inner_text()
    starts = [int(x) for x in grid_column(page, "plan-chosen", "start_yr")]
    capital = [float(x.replace(",", "")) for x in grid_column(page, "plan-chosen", "capital")]
    assert starts, "the plan should fund something within these budgets"
    for year, budget in enumerate(budgets):
        spent = sum(c for s, c in zip(starts, capital) if s == year)
        assert spent <= budget + 1.0  # grid shows whole currency units
    page.screenshot(path=artifacts / "journey_3_plan_budget.png", full_page=True)
    assert tab.errors == []


def edit_field(page, selector: str, value: str, key: str, done, attempts: int = 3) -> None:
    """Type a value and press a key until ``done`` shows. A page whose first callbacks are still in
    flight can write the field again after the keystroke (its fill arrives late); the field is then
    typed again, and the check of ``done`` stays strict."""
    for attempt in range(attempts):
        page.fill(selector, value)
        page.press(selector, key)
        try:
            done.wait_for(timeout=15_000)
            return
        except Exception:
            if attempt == attempts - 1 or page.input_value(selector) == value:
                raise  # the field kept the value and still nothing happened: a real failure


def test_tabs_keep_their_own_case(new_tab):
    first, second = new_tab(), new_tab()
    a = first.goto("/inputs", PAGES[-1][1])
    upload(a, "assets.csv", assets_csv(ids=SMALL_IDS[:3]))
    a.locator("#inputs-case").filter(has_text="3 assets").wait_for()
    b = second.goto("/inputs", PAGES[-1][1])
    b.locator("#inputs-case").filter(has_text="82 assets").wait_for()
    a.reload()
    a.locator("#inputs-case").filter(has_text="3 assets").wait_for()  # kept across a reload of the tab
    assert first.errors == [] and second.errors == []


WATCH_TEXT_JS = """
([input, target]) => {
  window.__lat = []; window.__t0 = null;
  document.addEventListener('keydown', (e) => {
    if (e.key === 'Enter' && e.target.id === input) window.__t0 = performance.now();
  }, true);
  new MutationObserver(() => {
    if (window.__t0 === null) return;
    window.__lat.push(performance.now() - window.__t0); window.__t0 = null;
  }).observe(document.querySelector('#' + target), {childList: true, characterData: true, subtree: true});
}
"""

WATCH_PLOT_JS = """
([input, graph]) => {
  window.__lat = []; window.__t0 = null;
  document.addEventListener('keydown', (e) => {
    if (e.key === 'Enter' && e.target.id === input) window.__t0 = performance.now();
  }, true);
  document.querySelector('#' + graph + ' .js-plotly-plot').on('plotly_afterplot', () => {
    if (window.__t0 === null) return;
    window.__lat.push(performance.now() - window.__t0); window.__t0 = null;
  });
}
"""


def timed_edits(page, field: str, values) -> list[float]:
    """Type each value and press Enter; return the in-page times from the Enter keydown to the update [ms]."""
    for n, value in enumerate(values, start=1):
        page.fill(f"#{field}", str(value))
        page.press(f"#{field}", "Enter")
        page.wait_for_function(f"window.__lat.length >= {n}", timeout=30_000)
        page.wait_for_timeout(150)
    return page.evaluate("window.__lat")


def test_rerender_after_an_assumption_edit(tab, artifacts):
    """Time from Enter in the discount-rate field to the new NPV text in the page, and from Enter in a
    budget field to the redrawn plan figure, on the demo case (physics cached; each value is new, so the
    economics run afresh every time). Timestamps are taken inside the page (performance.now)."""
    page = tab.goto("/inputs", PAGES[-1][1])
    page.wait_for_function("document.querySelector('#inputs-discount-rate')?.value !== ''")
    page.wait_for_load_state("networkidle")
    from dashboard import services

    page.evaluate(WATCH_TEXT_JS, ["inputs-discount-rate", "inputs-headline-npv"])
    engine = services.engine()
    n_before = len(engine.timings["economics"])
    rates = [7.1, 6.3, 5.7, 9.2, 4.4, 7.7, 6.9]
    all_ms = timed_edits(page, "inputs-discount-rate", rates + rates[:3])  # then three cached rates again
    npv_ms, cached_ms = all_ms[:len(rates)], all_ms[len(rates):]
    economics_ms = [1000 * t for t in engine.timings["economics"][n_before:]]
    assert len(economics_ms) == len(rates)  # revisited rates come from the cache
    page.click("a.nav-link[href='/plan']")
    page.locator("#plan-by-year .main-svg").first.wait_for()
    page.wait_for_function("document.querySelector('#plan-budget-0')?.value !== ''")
    page.wait_for_load_state("networkidle")
    page.evaluate(WATCH_PLOT_JS, ["plan-budget-0", "plan-by-year"])
    n_before = len(engine.timings["economics"])
    plot_ms = timed_edits(page, "plan-budget-0", [210000, 190000, 260000, 230000, 170000])
    budget_economics_ms = [1000 * t for t in engine.timings["economics"][n_before:]]
    record = {"discount_rate_to_npv_text_ms": npv_ms, "cached_discount_rate_to_npv_text_ms": cached_ms,
              "budget_to_plan_figure_ms": plot_ms,
              "economics_during_discount_edits_ms": economics_ms,
              "economics_during_budget_edits_ms": budget_economics_ms,
              "median_npv_ms": statistics.median(npv_ms), "median_plan_figure_ms": statistics.median(plot_ms),
              "median_economics_ms": statistics.median(economics_ms) if economics_ms else None}
    (artifacts / "rerender_latency.json").write_text(json.dumps(record, indent=2))
    print(json.dumps(record))
    # the target is 300 ms (docs/performance.md); the bound here only catches a physics re-run (seconds)
    assert record["median_npv_ms"] < 2000 and record["median_plan_figure_ms"] < 2000
    assert tab.errors == []


def test_a_blank_or_out_of_range_assumption_gets_a_message(tab):
    # the assumption fields are text fields: one emptied and left with Enter or Tab reaches the server and is
    # refused by name (Dash 4's number input reported nothing, and the old value stayed with no message), and
    # a value out of range gets a message in the form's words
    page = tab.goto("/inputs", PAGES[-1][1])
    # the demo's warnings are listed (its hourly profiles against 15- and 30-min demand windows)
    page.locator("#inputs-problems").filter(has_text="demand charge takes 15-min windows").wait_for()
    page.wait_for_function("document.querySelector('#inputs-discount-rate')?.value === '8'")
    message = page.locator("#inputs-form-message")
    edit_field(page, "#inputs-discount-rate", "", "Enter", message.filter(has_text="Discount rate: enter a number."))
    edit_field(page, "#inputs-horizon", "", "Tab", message.filter(has_text="Horizon: enter a number."))
    # each refusal says what stays in force (data/demo/finance.toml: 8 %, 15 years)
    assert message.inner_text().startswith("Not applied: Discount rate: enter a number. It stays at 8 %/yr. "
                                           "Horizon: enter a number. It stays at 15 yr.")
    page.click("#inputs-save")  # refused by the form: nothing is written, and the status says why
    page.locator("#inputs-save-status").filter(
        has_text="Not saved: Discount rate: enter a number. It stays at 8 %/yr. Horizon: enter a number.").wait_for()
    edit_field(page, "#inputs-discount-rate", "8", "Enter", message.filter(has_text="Not applied: Horizon: enter a number."))
    edit_field(page, "#inputs-horizon", "0", "Enter", message.filter(has_text="whole number of years"))
    assert "enter a number" not in message.inner_text()
    assert tab.errors == []


def test_scenarios_side_by_side_and_a_kept_one(tab, artifacts):
    # the Case & assumptions page lists the case as written and the demo's three scenarios (scenarios.toml); a
    # new discount rate kept under a name joins them as the tab's own row
    page = tab.goto("/inputs", PAGES[-1][1])
    grid = "#inputs-scenarios .ag-pinned-left-cols-container"  # the scenario names, pinned while the grid scrolls
    page.locator(grid).filter(has_text="Wait for failures").wait_for()
    assert set(grid_column(page, "inputs-scenarios", "scenario")) == {
        "Case as written", "Cheaper money", "Dearer electricity, larger budget", "Wait for failures"}
    page.wait_for_function("document.querySelector('#inputs-discount-rate')?.value === '8'")
    edit_field(page, "#inputs-discount-rate", "9.5", "Enter", page.locator("#app-case-label").filter(has_text="discount 9.5 %"))
    page.fill("#inputs-scenario-name", "Dearer money")
    page.click("#inputs-scenario-keep")
    page.locator("#inputs-scenario-message").filter(has_text="Kept 'Dearer money'").wait_for()
    page.locator(grid).filter(has_text="Dearer money (kept in this tab)").wait_for()
    page.screenshot(path=artifacts / "inputs_scenarios.png", full_page=True)
    assert tab.errors == []
