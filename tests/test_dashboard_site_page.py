"""The Site meter page's harmonic screen grid: the finding in view, headers that wrap between words, and no worst
harmonic where a site has no drives (the page's columns and rows, the callback called directly)."""

from __future__ import annotations

import re

import pytest

from dashboard import app as _shell  # noqa: F401  (the app must exist before pages register)
from dashboard import services
from dashboard.pages import site
from test_dashboard_services import small_case_engine

#: Room a header cell takes besides its text [px]: its padding each side and the column menu's button.
HEADER_EXTRA_PX = 2 * site.PADDING_PX + 20
#: Width of one character of a header at the grid's 14 px font, a little above the average (wide letters) [px].
HEADER_CHAR_PX = 7.5
#: Width the grid has in a 1440 px window [px]: less the page's scrollbar (15), the content's padding (2 x 24)
#: and the panel's border and padding (2 x 13).
GRID_AT_1440_PX = 1440 - 15 - 48 - 26


@pytest.fixture(scope="module")
def small_engine(tmp_path_factory):
    return small_case_engine(tmp_path_factory, "small-site-page")


@pytest.fixture
def engine(small_engine, monkeypatch):
    monkeypatch.setattr(services, "_ENGINE", small_engine)
    return small_engine


def _grid(layout, component_id: str):
    return next(c for c in layout._traverse() if getattr(c, "id", None) == component_id)


def test_the_finding_is_in_view_next_to_the_scenario():
    # the audit: 13 columns, the finding last and off-screen (a 30 px slice at 1440 px, none at 1024)
    columns = site.HARMONIC_COLUMNS
    fields = [c["field"] for c in columns]
    assert fields[:2] == ["scenario", "finding"]
    assert columns[0]["pinned"] == "left" and not any(c.get("pinned") for c in columns[1:])
    finding = columns[1]
    assert finding["wrapText"] and finding["autoHeight"] and finding["tooltipField"] == "finding"
    # the whole grid fits a 1440 px window (the finding takes the larger share of a wider one)
    assert sum(c["minWidth"] for c in columns) <= GRID_AT_1440_PX
    assert finding["width"] == max(c["width"] for c in columns)
    assert _grid(site.layout(), site.HARMONICS).columnDefs == columns


def test_each_limit_is_written_beside_its_value():
    # three "Limit [%]" columns made the grid too wide: each limit is now in its value's cell ("26.1 (limit 15)")
    by_field = {c["field"]: c for c in site.HARMONIC_COLUMNS}
    for value, limit in (("voltage_thd_pct", "voltage_thd_limit_pct"), ("worst_harmonic_pct", "harmonic_limit_pct"),
                         ("current_tdd_pct", "current_tdd_limit_pct")):
        assert limit not in by_field
        text = by_field[value]["valueFormatter"]["function"]
        assert f"params.data.{limit}" in text and "' (limit '" in text
        assert by_field[value]["wrapText"]  # wrapped rather than cut in a narrow column
    assert len(site.HARMONIC_COLUMNS) <= 10


def test_the_cell_formatters_use_only_names_the_grid_knows():
    # dash-ag-grid evaluates a formatter with static-eval and the names params and d3 only: any other name
    # (isFinite, Number) makes the whole formatter fail, and the cell shows the raw 1.3418906155656798
    known = {"params", "d3"}
    for column in site.HARMONIC_COLUMNS:
        text = column.get("valueFormatter", {}).get("function", "")
        # string literals aside, and the shared number formatter's "!isFinite(params.value)" (always false there:
        # "!" of a failed name, so the formatter still works; its rows carry None, never NaN)
        code = re.sub(r"'[^']*'", "''", text).replace("!isFinite(params.value)", "false")
        names = set(re.findall(r"(?<![.\w])([A-Za-z_]\w*)", code)) - {"null", "true", "false"}
        assert names <= known, (column["field"], names - known)


def test_headers_wrap_between_words_never_inside_one():
    # the audit: "Capacitor s, most [kVAr]", "Resonan ce order, lowest" (columns narrower than their longest word)
    for column in site.HARMONIC_COLUMNS:
        assert column["wrapHeaderText"] and column["autoHeaderHeight"], column["field"]
        # a header may also break after a hyphen ("Short-" / "circuit")
        longest = max(len(word) for word in re.findall(r"[^\s-]+-?", column["headerName"]))
        assert column["minWidth"] >= HEADER_EXTRA_PX + HEADER_CHAR_PX * longest, column["headerName"]
        assert column.get("maxWidth", column["minWidth"]) >= column["minWidth"]
        # the narrower padding the widths count on, in the header and in the cells alike
        assert column["headerStyle"]["paddingLeft"] == column["cellStyle"]["paddingLeft"] == f"{site.PADDING_PX}px"


def test_a_row_with_no_drives_has_no_worst_harmonic():
    rows = [{"scenario": "today", "drive_kva": 0.0, "worst_harmonic": 5, "worst_harmonic_pct": 0.0,
             "finding": "no drives"},
            {"scenario": "plan", "drive_kva": 272.4, "worst_harmonic": 5, "worst_harmonic_pct": 0.94, "finding": "x"},
            {"scenario": "plan", "drive_kva": None, "worst_harmonic": 7, "worst_harmonic_pct": 0.1, "finding": "y"}]
    shown = site.screen_rows(rows)
    assert [r["worst_harmonic"] for r in shown] == [None, 5, None]
    assert [r["worst_harmonic_pct"] for r in shown] == [None, 0.94, None]
    assert shown[0]["finding"] == "no drives"
    assert rows[0]["worst_harmonic"] == 5  # the service's rows are left as they were
    # the grid writes a dash for the missing order and its voltage, not a blank
    by_field = {c["field"]: c for c in site.HARMONIC_COLUMNS}
    for field in ("worst_harmonic", "worst_harmonic_pct"):
        assert f"'{site.NO_VALUE}'" in by_field[field]["valueFormatter"]["function"]


def test_the_page_shows_no_worst_harmonic_today_at_a_site_without_drives(engine):
    # the demo's HRW has no drive today (the screen's row still names the 5th); the plan brings drives
    today, plan = site.update("HRW", None, None, None)[7]
    assert (today["scenario"], today["drive_kva"]) == ("today", 0.0)
    assert today["worst_harmonic"] is None and today["worst_harmonic_pct"] is None
    assert plan["drive_kva"] > 0 and plan["worst_harmonic"] == 5 and plan["worst_harmonic_pct"] > 0
