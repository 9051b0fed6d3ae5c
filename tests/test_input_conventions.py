"""Input conventions a user's files break in ordinary ways: settings without [case], % signs, percent-formatted
workbook cells, a profile that changes resolution, near-miss headers and ids.

Each test writes a small case (tests/casebuilder.py), loads it and checks the problem's file, row, column and
rule, and the value read. Rows are as a spreadsheet shows them: the header is row 1, so P1, F1 and C1 of the
small case are rows 2, 3 and 4 of assets.csv.
"""

from __future__ import annotations

import copy
import shutil
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose

import casebuilder as cb
from models.case import _to_number, load_case, resolution_changes

ROOT = Path(__file__).resolve().parents[1]
TARIFFS = ROOT / "data" / "tariffs"


def _assets_with(*changes: tuple[int, str, str]) -> list[list[str]]:
    rows = copy.deepcopy(cb.ASSETS)
    for row, column, value in changes:
        rows[row][cb.ASSET_HEADER.index(column)] = value
    return rows


def _find(problems, *, file=None, row=..., column=None, text=None, severity="error"):
    hits = [p for p in problems if p.severity == severity
            and (file is None or p.file == file) and (row is ... or p.row == row)
            and (column is None or p.column == column) and (text is None or text in p.rule)]
    assert hits, f"no {severity} matching file={file} row={row} column={column} text={text!r} in:\n" + \
        "\n".join(str(p) for p in problems)
    return hits[0]


def _none(problems, text: str) -> None:
    found = [str(p) for p in problems if text in p.rule]
    assert not found, found


def _asset(case, asset_id: str, column: str):
    return case.assets.set_index("asset_id").loc[asset_id, column]


# ---------------------------------------------------------------------------------------------------
# 1. case.toml written without its [case] line
# ---------------------------------------------------------------------------------------------------
FLAT_CASE_TOML = 'name = "Flat case"\ncurrency = "GBP"\ntime_zone = "Europe/Berlin"\nregion = "EU"\n'


class TestSettingsWithoutCaseLine:
    def test_top_level_keys_are_the_settings(self, tmp_path):
        case, problems = load_case(cb.write_case(tmp_path / "c", case_toml=FLAT_CASE_TOML))
        assert case is not None, [str(p) for p in problems]
        assert (case.settings.name, case.settings.currency, case.settings.time_zone) == ("Flat case", "GBP", "Europe/Berlin")
        assert case.settings.region_declared
        # one warning for the file, on the line of its first key: where [case] belongs
        p = _find(problems, file="case.toml", row=1, column="name", severity="warning",
                  text="4 settings written without a [case] line (name, currency, time_zone, region) were read")
        assert p.hint == "write [case] on a line of its own above them"
        _none(problems, "unknown table")
        _none(problems, "no time zone declared")

    def test_a_tariff_in_the_declared_zone_is_accepted(self, tmp_path):
        # a flat case file's time_zone is kept: lost, its Berlin tariff would be refused against UTC
        folder = cb.write_case(tmp_path / "c", case_toml=FLAT_CASE_TOML.replace("GBP", "EUR"))
        cb.write_csv(folder / "sites.csv", cb.SITES_HEADER + ["tariff_file"], [["S1", "Test works", "50", "0.9", "t.toml"]])
        (folder / "tariffs").mkdir()
        shutil.copyfile(TARIFFS / "example_kva_demand.toml", folder / "tariffs" / "t.toml")  # time_zone Europe/Berlin
        case, problems = load_case(folder)
        assert case is not None, [str(p) for p in problems]
        _none(problems, "time zone differs")

    def test_a_key_above_case_and_under_it(self, tmp_path):
        toml = 'description = "above"\ntime_zone = "Europe/Paris"\n' + cb.CASE_TOML
        case, problems = load_case(cb.write_case(tmp_path / "c", case_toml=toml))
        assert case is not None, [str(p) for p in problems]
        assert case.settings.time_zone == "Europe/Berlin"  # the [case] table's value
        assert case.settings.description == "above"  # given above [case] only: read
        p = _find(problems, file="case.toml", row=1, column="description", severity="warning",
                  text="1 setting written without a [case] line (description) was read")
        assert p.hint == "move it under the [case] line"
        _find(problems, file="case.toml", row=2, column="time_zone", severity="warning",
              text="'time_zone' is given above the [case] line and under it; the value under [case] is used")

    def test_unknown_top_level_keys_are_called_keys(self, tmp_path):
        toml = 'colour = "blue"\ntime_zon = "Europe/Berlin"\n' + cb.CASE_TOML.replace('time_zone = "Europe/Berlin"\n', "") \
            + "\n[extra]\nx = 1\n"
        case, problems = load_case(cb.write_case(tmp_path / "c", case_toml=toml))
        p = _find(problems, file="case.toml", row=1, column="colour", severity="warning", text="unknown key 'colour' was ignored")
        assert "[" not in p.rule
        p = _find(problems, file="case.toml", row=2, column="time_zon", severity="warning", text="unknown key 'time_zon'")
        assert p.hint.startswith("did you mean 'time_zone'?")
        _find(problems, file="case.toml", column="extra", severity="warning", text="unknown table [extra] was ignored")
        _find(problems, file="case.toml", column="time_zone", severity="warning", text="no time zone declared")


# ---------------------------------------------------------------------------------------------------
# 2. % signs in number columns
# ---------------------------------------------------------------------------------------------------
class TestPercentSigns:
    def test_to_number_by_kind_of_column(self):
        assert _to_number("89%", ratio="frac") == (0.89, "a percentage was read as a fraction (divided by 100)")
        assert _to_number("0.1%", ratio="frac")[0] == 0.001  # 0.1 % = 0.001 (hand calculation)
        assert _to_number("95.2 %", ratio="pct") == (95.2, "a % sign was dropped (the column is in percent)")
        number, note = _to_number("95,2%", ratio="pct")
        assert number == 95.2 and "decimal comma" in note and "% sign was dropped" in note
        number, note = _to_number("15%")
        assert np.isnan(number) and note == "a % sign, in a column that is not in percent"

    def test_fraction_columns_divide_by_100(self, tmp_path):
        # F1 (row 3) is a fan: static_head_frac and rated_power_factor both take 0-1
        header = cb.ASSET_HEADER + ["static_head_frac"]
        rows = [r + [""] for r in _assets_with((1, "rated_power_factor", "89%"))]
        rows[1][-1] = "0.1%"
        case, problems = load_case(cb.write_case(tmp_path / "c", assets=rows, asset_header=header))
        assert case is not None, [str(p) for p in problems]
        assert _asset(case, "F1", "rated_power_factor") == 0.89  # 89 % = 0.89 (hand calculation)
        assert _asset(case, "F1", "static_head_frac") == 0.001  # 0.1 % = 0.001 (hand calculation)
        p = _find(problems, file="assets.csv", row=3, column="rated_power_factor", severity="warning",
                  text="89% read as 0.89")
        assert "fraction (0-1)" in p.rule and "write 0.89 for 89%" in p.hint
        p = _find(problems, file="assets.csv", row=3, column="static_head_frac", severity="warning",
                  text="0.1% read as 0.001")
        assert "or 0.1 if that was meant" in p.hint

    def test_several_cells_give_one_warning_per_column(self, tmp_path):
        rows = _assets_with((0, "rated_power_factor", "85%"), (1, "rated_power_factor", "82 %"))
        case, problems = load_case(cb.write_case(tmp_path / "c", assets=rows))
        assert case is not None, [str(p) for p in problems]
        assert_allclose(case.assets["rated_power_factor"].to_numpy()[:2], [0.85, 0.82], rtol=0, atol=0)
        hits = [p for p in problems if p.column == "rated_power_factor"]
        assert len(hits) == 1
        assert hits[0].row is None and hits[0].severity == "warning"
        assert "percentages were read as fractions (divided by 100) in 2 cells" in hits[0].rule
        assert "2 (85% as 0.85), 3 (82 % as 0.82)" in hits[0].rule

    def test_percent_columns_drop_the_sign(self, tmp_path):
        rows = _assets_with((1, "rated_efficiency_pct", "89.5%"), (1, "mean_load_pct", "60 %"))
        case, problems = load_case(cb.write_case(tmp_path / "c", assets=rows))
        assert case is not None, [str(p) for p in problems]
        assert _asset(case, "F1", "rated_efficiency_pct") == 89.5
        assert _asset(case, "F1", "mean_load_pct") == 60.0
        _find(problems, file="assets.csv", row=3, column="rated_efficiency_pct", severity="warning",
              text="a % sign was dropped (the column is in percent): '89.5%' was read as 89.5")
        _find(problems, file="assets.csv", row=3, column="mean_load_pct", severity="warning", text="'60 %' was read as 60")

    def test_percent_sign_in_another_column_is_an_error(self, tmp_path):
        case, problems = load_case(cb.write_case(tmp_path / "c", assets=_assets_with((0, "rated_p_kw", "15%"))))
        assert case is None
        p = _find(problems, file="assets.csv", row=2, column="rated_p_kw",
                  text="'rated_p_kw' must be a number (a % sign, in a column that is not in percent)")
        assert p.value == "15%" and p.hint == "write the value in kW, without a % sign"

    def test_profile_percent_signs_are_read_like_the_register(self, tmp_path):
        rows = [[pid, stamp, f"{value}%"] for pid, stamp, value in cb.profile_rows()]
        case, problems = load_case(cb.write_case(tmp_path / "c", profiles=rows))
        assert case is not None, [str(p) for p in problems]
        expected = [float(r[2]) for r in cb.profile_rows()]
        assert_allclose(case.profiles["LP1"].to_numpy(), expected, rtol=0, atol=0)
        hits = [p for p in problems if p.file == "profiles.csv" and p.column == "shaft_load_pct"]
        assert len(hits) == 1, [str(p) for p in hits]
        assert hits[0].severity == "warning" and hits[0].row == 2 and hits[0].column == "shaft_load_pct"
        assert "% signs were dropped in 48 cells of 'shaft_load_pct'" in hits[0].rule
        _none(problems, "profile has no values")

    def test_profile_percent_sign_in_input_kw_is_an_error(self, tmp_path):
        folder = cb.write_case(tmp_path / "c")
        rows = [[pid, stamp, f"{value}%"] for pid, stamp, value in cb.profile_rows()]
        cb.write_csv(folder / "profiles.csv", ["profile_id", "timestamp", "input_kw"], rows)
        case, problems = load_case(folder)
        assert case is None
        _find(problems, file="profiles.csv", row=2, column="input_kw",
              text="'input_kw' must be a number (a % sign, in a column that is not in percent) in profile 'LP1'")
        # the cells' own errors say why the profile has no values: not said a second time
        _none(problems, "profile has no values")


# ---------------------------------------------------------------------------------------------------
# 3. a profile that changes resolution part way
# ---------------------------------------------------------------------------------------------------
def _mixed_rows() -> list[list[str]]:
    """LP1: hourly from 2 to 4 January 2025 (72 rows, rows 2-73), then 15-min from 5 to 7 January (rows 74-361)."""
    hourly = [["LP1", f"2025-01-{2 + h // 24:02d} {h % 24:02d}:00", "60"] for h in range(72)]
    quarter = [["LP1", f"2025-01-{5 + q // 96:02d} {q % 96 // 4:02d}:{15 * (q % 4):02d}", "70"] for q in range(288)]
    return hourly + quarter


class TestResolutionChange:
    def test_change_is_an_error_naming_where_and_both_steps(self, tmp_path):
        case, problems = load_case(cb.write_case(tmp_path / "c", profiles=_mixed_rows()))
        assert case is None
        p = _find(problems, file="profiles.csv", row=74, column="timestamp",
                  text="profile 'LP1' changes resolution at 2025-01-05 00:00:00+01:00: every 60 min before, "
                       "every 15 min from there on")
        assert p.value == "2025-01-05 00:00:00+01:00"
        assert "average the finer part to 60-min means" in p.hint
        _none(problems, "misses")  # not read as a 15-min profile with missing intervals
        _none(problems, "unknown profile reference")  # P1's reference to the refused profile is not an error again

    def test_finer_then_coarser(self, tmp_path):
        rows = _mixed_rows()
        rows = [["LP1", r[1], r[2]] for r in rows[72:]] + [["LP1", f"2025-01-{8 + h // 24:02d} {h % 24:02d}:00", "60"]
                                                          for h in range(48)]
        case, problems = load_case(cb.write_case(tmp_path / "c", profiles=rows))
        assert case is None
        # the 15-min rows are rows 2-289; the first hourly step starts at the last 15-min stamp's successor
        _find(problems, file="profiles.csv", row=290, column="timestamp",
              text="changes resolution at 2025-01-08 00:00:00+01:00: every 15 min before, every 60 min from there on")

    def test_missing_readings_are_not_a_change(self, tmp_path):
        rows = cb.profile_rows(96)
        del rows[30:54]  # a day missing from an hourly profile
        case, problems = load_case(cb.write_case(tmp_path / "c", profiles=rows))
        assert case is not None, [str(p) for p in problems]
        _find(problems, file="profiles.csv", column="timestamp", severity="warning", text="misses 24 intervals")
        _none(problems, "changes resolution")

    def test_resolution_changes(self):
        assert resolution_changes(np.array([60.0] * 30 + [15.0] * 40)) == [(30, 60.0, 15.0)]
        # seconds of jitter are rounded to the minute; a gap is not a stretch
        assert resolution_changes(np.array([59.98, 60.02] * 20 + [180.0] + [60.0] * 30)) == []
        assert resolution_changes(np.array([15.0] * 30 + [30.0] * 30 + [15.0] * 30)) == [(30, 15.0, 30.0), (60, 30.0, 15.0)]


# ---------------------------------------------------------------------------------------------------
# 4. workbook cells formatted as percent
# ---------------------------------------------------------------------------------------------------
def _format(book_path: Path, sheet: str, row: int, header: list[str], column: str, value, number_format: str) -> None:
    from openpyxl import load_workbook

    book = load_workbook(book_path)
    cell = book[sheet].cell(row, header.index(column) + 1)
    cell.value = value
    cell.number_format = number_format
    book.save(book_path)


class TestWorkbookPercentFormat:
    def test_percent_cells_in_percent_columns_are_read_as_shown(self, tmp_path):
        path = cb.write_workbook(tmp_path / "book.xlsx")
        # F1 is sheet row 3: 89.5 % efficiency stored as 0.895, 60 % mean load stored as 0.6
        _format(path, "assets", 3, cb.ASSET_HEADER, "rated_efficiency_pct", 0.895, "0.0%")
        _format(path, "assets", 3, cb.ASSET_HEADER, "mean_load_pct", 0.6, "0%")
        _format(path, "assets", 3, cb.ASSET_HEADER, "rated_power_factor", 0.82, "0%")  # a fraction column: 0.82 as is
        _format(path, "profiles", 2, cb.PROFILE_HEADER, "shaft_load_pct", 0.6, "0%")
        case, problems = load_case(path)
        assert case is not None, [str(p) for p in problems]
        assert _asset(case, "F1", "rated_efficiency_pct") == 89.5
        assert _asset(case, "F1", "mean_load_pct") == 60.0
        assert _asset(case, "F1", "rated_power_factor") == 0.82
        assert case.profiles["LP1"].iloc[0] == 60.0
        p = _find(problems, file="book.xlsx:assets", row=None, column="rated_efficiency_pct", severity="warning",
                  text="1 cell of this column is formatted as percent in the workbook (0.895 shown as 89.5 %): "
                       "read as the percent shown, 89.5 (row 3)")
        assert "'rated_efficiency_pct' is in percent (0-100)" in p.hint
        _find(problems, file="book.xlsx:assets", row=None, column="mean_load_pct", severity="warning",
              text="(0.6 shown as 60 %)")
        _find(problems, file="book.xlsx:profiles", row=None, column="shaft_load_pct", severity="warning",
              text="formatted as percent")
        assert not [p for p in problems if p.column == "rated_power_factor"]
        _none(problems, "implausibly low")

    def test_a_literal_percent_sign_in_the_format_does_not_scale(self, tmp_path):
        path = cb.write_workbook(tmp_path / "book.xlsx")
        _format(path, "assets", 3, cb.ASSET_HEADER, "rated_efficiency_pct", 89.5, '0.0" %"')  # shows "89.5 %"
        case, problems = load_case(path)
        assert case is not None, [str(p) for p in problems]
        assert _asset(case, "F1", "rated_efficiency_pct") == 89.5
        _none(problems, "formatted as percent")

    def test_several_cells_give_one_warning(self, tmp_path):
        path = cb.write_workbook(tmp_path / "book.xlsx")
        _format(path, "assets", 2, cb.ASSET_HEADER, "rated_efficiency_pct", 0.92, "0%")
        _format(path, "assets", 3, cb.ASSET_HEADER, "rated_efficiency_pct", 0.895, "0.0%")
        case, problems = load_case(path)
        assert case is not None, [str(p) for p in problems]
        assert_allclose(case.assets["rated_efficiency_pct"].to_numpy()[:2], [92.0, 89.5], rtol=0, atol=0)
        hits = [p for p in problems if p.column == "rated_efficiency_pct"]
        assert len(hits) == 1 and "2 cells of this column are formatted as percent" in hits[0].rule
        assert "(rows 2, 3)" in hits[0].rule


# ---------------------------------------------------------------------------------------------------
# 5. near-miss headers and ids
# ---------------------------------------------------------------------------------------------------
class TestHeadersAndIds:
    @pytest.mark.parametrize("heading", ["Nominal Efficiency", "NEMA Nominal Efficiency", "Nom. Eff."])
    def test_a_nema_nameplates_nominal_efficiency_is_the_rated_efficiency(self, tmp_path, heading):
        # a NEMA nameplate (and a US motor survey) gives the full-load efficiency as "nominal efficiency"
        header = [heading if c == "rated_efficiency_pct" else c for c in cb.ASSET_HEADER]
        rows = [list(r) for r in cb.ASSETS]
        rows[1][cb.ASSET_HEADER.index("rated_efficiency_pct")] = "94.5"
        case, problems = load_case(cb.write_case(tmp_path / "c", assets=rows, asset_header=header))
        assert case is not None, [str(p) for p in problems]
        assert _asset(case, "F1", "rated_efficiency_pct") == 94.5
        _none(problems, "unknown column")

    @pytest.mark.parametrize("heading", ["Hours/yr", "hours per year", "h/yr", "Hrs/yr", "Hours per yr"])
    def test_hours_headings_are_operating_hours(self, tmp_path, heading):
        header = [heading if c == "operating_h_per_yr" else c for c in cb.ASSET_HEADER]
        case, problems = load_case(cb.write_case(tmp_path / "c", asset_header=header))
        assert case is not None, [str(p) for p in problems]
        assert _asset(case, "F1", "operating_h_per_yr") == 6000.0
        _none(problems, "unknown column")

    def test_unknown_heading_gets_the_closest_column(self, tmp_path):
        header = ["Hours  / yr." if c == "operating_h_per_yr" else c for c in cb.ASSET_HEADER]
        case, problems = load_case(cb.write_case(tmp_path / "c", asset_header=header))
        # a heading that looks like an optional column the file does not give is an error: read as unknown, the
        # hours it holds would be dropped unsaid
        assert case is None
        p = _find(problems, file="assets.csv", row=None, column="Hours  / yr.", severity="error",
                  text="unknown column 'Hours  / yr.': it looks like 'operating_h_per_yr'")
        assert p.hint.startswith("did you mean 'operating_h_per_yr'?")

    def test_asset_id_differing_only_in_case_is_a_likely_duplicate(self, tmp_path):
        rows = copy.deepcopy(cb.ASSETS) + [copy.deepcopy(cb.ASSETS[1])]
        rows[3][0] = "f1 "
        case, problems = load_case(cb.write_case(tmp_path / "c", assets=rows))
        assert case is not None, [str(p) for p in problems]
        p = _find(problems, file="assets.csv", row=5, column="asset_id", severity="warning",
                  text="asset_id 'f1' differs from 'F1' (row 3) only in upper and lower case or surrounding spaces: "
                       "a likely duplicate")
        assert "keep one of them" in p.hint

    def test_site_reference_that_matches_when_case_is_ignored(self, tmp_path):
        case, problems = load_case(cb.write_case(tmp_path / "c", assets=_assets_with((1, "site_id", "s1"))))
        assert case is None
        p = _find(problems, file="assets.csv", row=3, column="site_id", text="unknown site_id (not in sites)")
        assert p.value == "s1" and p.hint.startswith("did you mean 'S1'?")

    def test_profile_reference_that_matches_when_case_is_ignored(self, tmp_path):
        case, problems = load_case(cb.write_case(tmp_path / "c", assets=_assets_with((0, "profile_id", "lp1"))))
        assert case is None
        p = _find(problems, file="assets.csv", row=2, column="profile_id", text="unknown profile reference")
        assert p.hint.startswith("did you mean 'LP1'?")

    def test_unknown_site_without_a_near_match_keeps_its_hint(self, tmp_path):
        case, problems = load_case(cb.write_case(tmp_path / "c", assets=_assets_with((1, "site_id", "S9"))))
        p = _find(problems, file="assets.csv", row=3, column="site_id", text="unknown site_id")
        assert p.hint == "add the site or correct the id"


def test_todays_synchronous_machines_are_said_to_be_modelled_as_induction_motors(tmp_path):
    # the register may say today's machine is synchronous; the model of today's motor is the induction one, so the
    # check says what that gets wrong (reactive power) instead of passing it over
    header = cb.ASSET_HEADER + ["machine_type"]
    assets = [list(row) + [kind] for row, kind in zip(cb.ASSETS, ["wound_field_synchronous", "", ""])]
    assets[0][11] = "1500"  # rated_speed_rpm: synchronous speed of a 4-pole 50 Hz machine
    case, problems = load_case(cb.write_case(tmp_path / "c", assets=assets, asset_header=header))
    assert case is not None
    found = [p for p in problems if p.column == "machine_type" and p.severity == "warning"]
    assert len(found) == 1 and found[0].file == "assets.csv"
    assert found[0].rule.startswith("1 motor of today's fleet is a synchronous machine (P1), modelled with an induction "
                                    "motor's losses")
    assert "a wound-field machine is taken at unity power factor (no kVAr)" in found[0].rule
    assert "reactive savings of options against these motors are estimates" in found[0].hint
    _, problems = load_case(cb.write_case(tmp_path / "d"))
    assert not [p for p in problems if p.column == "machine_type"]


def test_a_profile_longer_than_a_year_is_said_to_be_used_for_one_year_only(tmp_path):
    # two years of hourly data (17,544 h from 2024-01-01, a leap year, to 2025-12-31 23:00) cover 731 days; one
    # analysis year is used, so the check says the rest is not
    stamps = pd.date_range("2024-01-01", "2025-12-31 23:00", freq="h", tz="Europe/Berlin")  # the case's zone
    rows = [["LP1", t.isoformat(), "70"] for t in stamps]
    case, problems = load_case(cb.write_case(tmp_path / "c", profiles=rows))
    assert case is not None
    found = [p for p in problems if p.severity == "warning" and "more than a year" in p.rule]
    assert len(found) == 1 and found[0].file == "profiles.csv"
    assert found[0].rule.startswith("profile 'LP1' covers 731.0 days, more than a year (2024-01-01 to 2025-12-31)")
    one_year = [["LP1", t.isoformat(), "70"]
                for t in pd.date_range("2025-01-01", "2025-12-31 23:00", freq="h", tz="Europe/Berlin")]
    _, problems = load_case(cb.write_case(tmp_path / "d", profiles=one_year))
    assert not [p for p in problems if "more than a year" in p.rule]


def test_a_row_with_a_stray_delimiter_gives_one_error_not_one_per_shifted_cell(tmp_path):
    # "Hood exhaust fan, dry end" unquoted: the row has one cell more than the header and every cell after the
    # comma sits under the wrong column; the one problem to fix is the stray comma
    assets = [list(row) for row in cb.ASSETS]
    assets[1][2] = "Exhaust fan"
    folder = cb.write_case(tmp_path / "c", assets=assets)
    text = (folder / "assets.csv").read_text(encoding="utf-8").replace("Exhaust fan", "Exhaust fan, dry end")
    (folder / "assets.csv").write_text(text, encoding="utf-8")
    _, problems = load_case(folder)
    row_three = [p for p in problems if p.file == "assets.csv" and p.row == 3]
    assert len(row_three) == 1, [str(p) for p in row_three]
    assert "the row has 20 cells but the header has 19" in row_three[0].rule
    assert "other" in row_three[0].hint and "follow from its shifted cells" in row_three[0].hint


# ---------------------------------------------------------------------------------------------------
# 6. nameplate habits of US registers: what each error's hint says
# ---------------------------------------------------------------------------------------------------
@pytest.mark.parametrize(("changes", "column", "hint"), [
    # a power factor written in percent: 86 % is 0.86 (hand calculation)
    ([(1, "rated_power_factor", "86")], "rated_power_factor", "a power factor is a fraction (0-1): 86 % is 0.86"),
    # a date where the year is asked
    ([(1, "year_installed", "06/01/2014")], "year_installed", "write the year alone, e.g. 2014"),
    # poles left blank beside a nameplate speed: 1450 rpm at 50 Hz sits below 120 x 50 / 4 = 1500 rpm (hand
    # calculation), so the motor has 4 poles
    ([(1, "poles", ""), (1, "rated_speed_rpm", "1450")], "poles", "1450 rpm at 50 Hz is a 4-pole motor"),
    # the synchronous speed written as the nameplate speed (120 x 50 / 4 = 1500 rpm)
    ([(1, "rated_speed_rpm", "1500")], "rated_speed_rpm", "1500 rpm is the synchronous speed itself"),
])
def test_us_register_habits_get_a_hint_that_says_what_to_write(tmp_path, changes, column, hint):
    _, problems = load_case(cb.write_case(tmp_path / "c", assets=_assets_with(*changes)))
    found = _find(problems, row=3, column=column)
    assert hint in found.hint


def test_an_enclosure_code_in_the_class_column_is_named_so(tmp_path):
    # "TEFC" (totally enclosed fan-cooled) is a NEMA nameplate's enclosure, often copied into the class column
    _, problems = load_case(cb.write_case(tmp_path / "c", assets=_assets_with((1, "efficiency_class", "TEFC"))))
    found = _find(problems, row=3, column="efficiency_class")
    assert "names the enclosure, not the efficiency" in found.hint


def test_two_files_whose_names_differ_only_in_capitals_are_refused(tmp_path):
    # assets.csv beside Assets.csv (another register): only one would be read, and which depends on the computer
    import casebuilder as cb
    from models.case import load_case

    folder = cb.write_case(tmp_path / "case")
    (folder / "Assets.csv").write_text((folder / "assets.csv").read_text(encoding="utf-8"), encoding="utf-8")
    case, problems = load_case(folder)
    found = [p for p in problems if p.severity == "error" and "differ only in capitals" in p.rule]
    assert case is None and found and "Assets.csv" in str(found[0].value) and "assets.csv" in str(found[0].value)


def test_a_title_line_above_the_header_is_one_error_not_a_cascade(tmp_path):
    # "Motor register, plant 3" on line 1 and the header on line 2: one error naming both lines (before: about 90
    # errors, every column "missing" and every row "longer than the header")
    import casebuilder as cb
    from models.case import load_case

    folder = cb.write_case(tmp_path / "case")
    path = folder / "assets.csv"
    path.write_text("Motor register plant 3\n" + path.read_text(encoding="utf-8"), encoding="utf-8")
    case, problems = load_case(folder)
    errors = [p for p in problems if p.severity == "error"]
    assert case is None and len(errors) == 1, [str(p) for p in errors]
    assert errors[0].row == 1 and "line 1 is a title, not the table's header: the header is line 2" in errors[0].rule
