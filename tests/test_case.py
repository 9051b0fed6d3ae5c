"""Loading and validating a case: every rule catches a bad input and names file, row, column and value."""

from __future__ import annotations

import copy
import hashlib
import shutil
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose

import casebuilder as cb
from models.case import load_case
from models.profiles import conform
from models.problems import CaseError

ROOT = Path(__file__).resolve().parents[1]
TARIFFS = ROOT / "data" / "tariffs"


def _assets_with(row: int, column: str, value: str, header=None) -> list[list[str]]:
    header = header or cb.ASSET_HEADER
    rows = copy.deepcopy(cb.ASSETS)
    rows[row][header.index(column)] = value
    return rows


def _errors(problems):
    return [p for p in problems if p.severity == "error"]


def _find(problems, *, file=None, row=None, column=None, text=None, severity="error"):
    hits = [p for p in problems if p.severity == severity
            and (file is None or p.file == file) and (row is None or p.row == row)
            and (column is None or p.column == column) and (text is None or text in p.rule)]
    assert hits, f"no {severity} matching file={file} row={row} column={column} text={text!r} in:\n" + \
        "\n".join(str(p) for p in problems)
    return hits[0]


class TestValidCase:
    def test_small_case_loads(self, tmp_path):
        case, problems = load_case(cb.write_case(tmp_path / "c"))
        assert case is not None, [str(p) for p in problems]
        assert list(case.assets["asset_id"]) == ["P1", "F1", "C1"]
        assert case.settings.time_zone == "Europe/Berlin"
        assert str(case.profiles["LP1"].index.tz) == "Europe/Berlin"

    def test_folder_and_workbook_give_the_same_case(self, tmp_path):
        folder_case, p1 = load_case(cb.write_case(tmp_path / "folder"), mode="strict")
        book_case, p2 = load_case(cb.write_workbook(tmp_path / "case.xlsx"), mode="strict")
        cols = [c for c in folder_case.assets.columns]
        a, b = folder_case.assets[cols], book_case.assets[cols]
        for column in cols:
            if a[column].dtype.kind == "f":
                assert_allclose(a[column].to_numpy(), b[column].to_numpy(), equal_nan=True, err_msg=column)
            else:
                assert a[column].tolist() == b[column].tolist(), column
        assert folder_case.profiles["LP1"].equals(book_case.profiles["LP1"])
        assert folder_case.sites.equals(book_case.sites)
        assert folder_case.defaults.equals(book_case.defaults)

    def test_input_files_are_never_changed(self, tmp_path):
        folder = cb.write_case(tmp_path / "c", assets=_assets_with(0, "rated_p_kw", "-3"))
        before = {p.name: hashlib.sha256(p.read_bytes()).hexdigest() for p in folder.iterdir()}
        load_case(folder)
        after = {p.name: hashlib.sha256(p.read_bytes()).hexdigest() for p in folder.iterdir()}
        assert before == after

    def test_strict_mode_raises_with_every_problem(self, tmp_path):
        rows = _assets_with(0, "rated_p_kw", "-3")
        rows[1][cb.ASSET_HEADER.index("site_id")] = "NOPE"
        with pytest.raises(CaseError) as info:
            load_case(cb.write_case(tmp_path / "c", assets=rows), mode="strict")
        assert len(_errors(info.value.problems)) >= 2
        assert "row 2" in str(info.value) and "row 3" in str(info.value)


class TestAssetRules:
    def test_negative_rated_power(self, tmp_path):
        case, problems = load_case(cb.write_case(tmp_path / "c", assets=_assets_with(1, "rated_p_kw", "-7.5")))
        assert case is None
        p = _find(problems, file="assets.csv", row=3, column="rated_p_kw", text="must lie between")
        assert p.value == "-7.5"

    def test_duplicate_ids(self, tmp_path):
        _, problems = load_case(cb.write_case(tmp_path / "c", assets=_assets_with(2, "asset_id", "P1")))
        assert "first seen on row 2" in _find(problems, row=4, column="asset_id", text="duplicate").rule

    def test_unknown_site(self, tmp_path):
        _, problems = load_case(cb.write_case(tmp_path / "c", assets=_assets_with(0, "site_id", "S9")))
        assert _find(problems, row=2, column="site_id", text="unknown site_id")

    def test_unknown_profile(self, tmp_path):
        _, problems = load_case(cb.write_case(tmp_path / "c", assets=_assets_with(0, "profile_id", "LP9")))
        assert _find(problems, row=2, column="profile_id", text="unknown profile").value == "LP9"

    def test_speed_at_or_above_synchronous(self, tmp_path):
        # 120 f / p = 120 * 50 / 4 = 1500 rpm (Engineering ToolBox, synchronous-speed table); an induction
        # motor must run below it
        _, problems = load_case(cb.write_case(tmp_path / "c", assets=_assets_with(0, "rated_speed_rpm", "1500")))
        assert _find(problems, row=2, column="rated_speed_rpm", text="below synchronous speed")

    def test_speed_with_implausible_slip(self, tmp_path):
        # 1000 rpm on a 4-pole 50 Hz motor is 33 % slip: the poles are probably 6 (hand calculation)
        _, problems = load_case(cb.write_case(tmp_path / "c", assets=_assets_with(0, "rated_speed_rpm", "1000")))
        assert _find(problems, row=2, column="rated_speed_rpm", text="implausible")

    @pytest.mark.parametrize(("column", "value"), [("rated_power_factor", "1.2"), ("rated_efficiency_pct", "101"),
                                                   ("rated_efficiency_pct", "0.92")])
    def test_power_factor_and_efficiency_range(self, tmp_path, column, value):
        _, problems = load_case(cb.write_case(tmp_path / "c", assets=_assets_with(1, column, value)))
        assert _find(problems, row=3, column=column, text="must lie between")

    def test_efficiency_written_as_a_fraction_is_named_so(self, tmp_path):
        # 0.952 in a percent column is 95.2 % written as a fraction (hand calculation: 0.952 x 100)
        _, problems = load_case(cb.write_case(tmp_path / "c", assets=_assets_with(1, "rated_efficiency_pct", "0.952")))
        found = _find(problems, row=3, column="rated_efficiency_pct", text="must lie between")
        assert "was a fraction entered? 0.952 as a fraction is 95.2 %" in found.hint

    def test_load_above_125_pct(self, tmp_path):
        _, problems = load_case(cb.write_case(tmp_path / "c", assets=_assets_with(1, "mean_load_pct", "140")))
        assert _find(problems, row=3, column="mean_load_pct", text="must lie between")

    def test_hours_above_a_leap_year(self, tmp_path):
        _, problems = load_case(cb.write_case(tmp_path / "c", assets=_assets_with(1, "operating_h_per_yr", "8785")))
        assert _find(problems, row=3, column="operating_h_per_yr", text="8784")

    def test_not_a_number(self, tmp_path):
        _, problems = load_case(cb.write_case(tmp_path / "c", assets=_assets_with(0, "poles", "four")))
        assert _find(problems, row=2, column="poles", text="must be a number")

    def test_odd_poles(self, tmp_path):
        _, problems = load_case(cb.write_case(tmp_path / "c", assets=_assets_with(0, "poles", "5")))
        assert _find(problems, row=2, column="poles", text="even")

    def test_unknown_category(self, tmp_path):
        _, problems = load_case(cb.write_case(tmp_path / "c", assets=_assets_with(0, "application", "pumpp")))
        assert _find(problems, row=2, column="application", text="must be one of")

    def test_category_synonyms_accepted(self, tmp_path):
        case, problems = load_case(cb.write_case(tmp_path / "c", assets=_assets_with(0, "speed_control", "VFD")))
        assert case is not None, [str(p) for p in problems]
        assert case.assets.loc[0, "speed_control"] == "drive"

    def test_no_load_data(self, tmp_path):
        rows = _assets_with(1, "operating_h_per_yr", "")
        _, problems = load_case(cb.write_case(tmp_path / "c", assets=rows))
        assert _find(problems, row=3, text="give a profile_id, or both")

    def test_missing_required_column(self, tmp_path):
        header = [h for h in cb.ASSET_HEADER if h != "poles"]
        rows = [[v for h, v in zip(cb.ASSET_HEADER, r) if h != "poles"] for r in cb.ASSETS]
        _, problems = load_case(cb.write_case(tmp_path / "c", assets=rows, asset_header=header))
        assert _find(problems, file="assets.csv", column="poles", text="required column")

    def test_required_cell_blank(self, tmp_path):
        _, problems = load_case(cb.write_case(tmp_path / "c", assets=_assets_with(2, "application", "")))
        assert _find(problems, row=4, column="application", text="required")

    def test_kw_and_hp_disagree(self, tmp_path):
        header = cb.ASSET_HEADER + ["rated_p_hp"]
        rows = [r + [""] for r in copy.deepcopy(cb.ASSETS)]
        rows[0][-1] = "30"  # 30 hp = 22.4 kW against 15 kW
        _, problems = load_case(cb.write_case(tmp_path / "c", assets=rows, asset_header=header))
        assert _find(problems, row=2, column="rated_p_hp", text="disagree")

    def test_rating_in_hp_is_converted(self, tmp_path):
        header = cb.ASSET_HEADER + ["rated_p_hp"]
        rows = [r + [""] for r in copy.deepcopy(cb.ASSETS)]
        rows[0][header.index("rated_p_kw")] = ""
        rows[0][-1] = "20"
        case, problems = load_case(cb.write_case(tmp_path / "c", assets=rows, asset_header=header))
        assert case is not None, [str(p) for p in problems]
        # NIST SP 811 (2008) B.9: 1 hp = 745.699872 W, so 20 hp = 14.914 kW
        assert_allclose(case.assets.loc[0, "rated_p_kw"], 14.91399744, rtol=1e-9)

    def test_watts_instead_of_kilowatts_gets_a_hint(self, tmp_path):
        _, problems = load_case(cb.write_case(tmp_path / "c", assets=_assets_with(0, "rated_p_kw", "75000")))
        assert "W rather than kW" in _find(problems, row=2, column="rated_p_kw").hint

    def test_year_in_the_future(self, tmp_path):
        _, problems = load_case(cb.write_case(tmp_path / "c", assets=_assets_with(0, "year_installed", "2099")))
        assert _find(problems, row=2, column="year_installed", text="after the current year")

    def test_unknown_column_is_a_warning(self, tmp_path):
        header = cb.ASSET_HEADER + ["colour"]
        rows = [r + ["blue"] for r in cb.ASSETS]
        case, problems = load_case(cb.write_case(tmp_path / "c", assets=rows, asset_header=header))
        assert case is not None
        assert _find(problems, column="colour", text="unknown column", severity="warning")

    def test_headers_with_aliases_and_case(self, tmp_path):
        header = ["Asset ID" if h == "asset_id" else "Rated kW" if h == "rated_p_kw" else h for h in cb.ASSET_HEADER]
        case, problems = load_case(cb.write_case(tmp_path / "c", asset_header=header))
        assert case is not None, [str(p) for p in problems]
        assert_allclose(case.assets["rated_p_kw"], [15, 7.5, 75])

    def test_decimal_comma_repaired_with_warning(self, tmp_path):
        case, problems = load_case(cb.write_case(tmp_path / "c", assets=_assets_with(1, "rated_p_kw", "7,5")))
        assert case is not None
        assert _find(problems, row=3, column="rated_p_kw", text="decimal comma", severity="warning")
        assert_allclose(case.assets.loc[1, "rated_p_kw"], 7.5)

    def test_empty_register(self, tmp_path):
        _, problems = load_case(cb.write_case(tmp_path / "c", assets=[]))
        assert _find(problems, file="assets.csv", text="no rows")

    def test_rating_header_in_watts_is_one_message_with_the_conversion(self, tmp_path):
        # docs/case-format.md, "Reading rules", Headers: "A header in W (`Rated power (W)`) is one error, whose
        # hint is the conversion ... no hint suggests renaming such a header alone, which would read watts as
        # kilowatts". So no second hint "head it 'rated_p_kw'" appears beside the conversion.
        header = ["Rated power (W)" if h == "rated_p_kw" else h for h in cb.ASSET_HEADER]
        rows = [r[:4] + [str(float(r[4]) * 1000)] + r[5:] for r in cb.ASSETS]  # 15 kW written 15000.0 W
        case, problems = load_case(cb.write_case(tmp_path / "c", assets=rows, asset_header=header))
        assert case is None
        about = [p for p in problems if p.file == "assets.csv" and (p.column in ("Rated power (W)", "rated_p_kw")
                                                                   or "Rated power (W)" in p.rule + p.hint)]
        assert len(about) == 1, "\n".join(str(p) for p in about)
        (p,) = about
        assert (p.severity, p.row, p.column) == ("error", 1, "Rated power (W)")
        assert p.rule == "the column 'Rated power (W)' is in W; drivecase reads 'rated_p_kw' in kW"
        assert p.hint == "divide the values by 1000 and head the column 'rated_p_kw'"
        assert not [q for q in problems if "head it" in q.hint or "was not recognised" in q.hint]

    def test_a_missing_column_hint_never_offers_a_header_in_watts_as_a_plain_rename(self):
        # docs/case-format.md, "Reading rules", Headers: the hint naming a likely header for a missing column
        # gives the conversion when that header is the column in W
        from models.case import _missing_column_hint

        assert _missing_column_hint("rated_p_kw", ["Rated power (W)"], "assets") == (
            "the column 'Rated power (W)' is in W: divide its values by 1000 and head it 'rated_p_kw'")
        assert _missing_column_hint("rated_p_kw", ["Rated pwr"], "assets") == (
            "the column 'Rated pwr' was not recognised: if it is rated_p_kw, head it 'rated_p_kw'")


class TestTariffReferences:
    """A case with tariffs prices every site: a site naming none, or one the case lacks, is an error naming its row."""

    @staticmethod
    def _case(tmp_path, tariff_file: str):
        folder = cb.write_case(tmp_path / "c", sites=[["S1", "Test works", "50", "0.9", tariff_file]])
        header = cb.SITES_HEADER + ["tariff_file"]
        cb.write_csv(folder / "sites.csv", header, [["S1", "Test works", "50", "0.9", tariff_file]])
        (folder / "tariffs").mkdir()
        shutil.copyfile(TARIFFS / "example_kva_demand.toml", folder / "tariffs" / "flat.toml")
        return folder

    def test_a_site_without_a_tariff(self, tmp_path):
        case, problems = load_case(self._case(tmp_path, ""))
        assert case is None
        p = _find(problems, file="sites.csv", row=2, column="tariff_file", text="no tariff file named")
        assert "flat.toml" in p.hint

    def test_a_misspelt_tariff_is_named_with_a_guess(self, tmp_path):
        case, problems = load_case(self._case(tmp_path, "flatt.toml"))
        assert case is None
        p = _find(problems, file="sites.csv", row=2, column="tariff_file", text="not found")
        assert "did you mean 'flat.toml'?" in p.hint

    def test_a_case_without_any_tariff_is_warned_once(self, tmp_path):
        case, problems = load_case(cb.write_case(tmp_path / "c"))  # casebuilder's case has no tariffs/
        assert case is not None
        assert len([p for p in problems if "has no tariff" in p.rule and p.severity == "warning"]) == 1


def test_hourly_profiles_against_a_shorter_demand_window_are_warned(demo_case):
    # the demo's sites (data/demo/sites.csv): HRW on a tariff with 15-min demand windows, KGQ on one with 30-min
    # windows; every demo profile is hourly (data/generate_demo.py)
    found = [p for p in demo_case.problems if "demand charge takes" in p.rule and p.column == "tariff_file"]
    assert [(p.file, p.row, p.severity) for p in found] == [("sites.csv", 2, "warning"), ("sites.csv", 3, "warning")]
    assert "15-min windows" in found[0].rule and "60-min profiles" in found[0].rule and "30-min windows" in found[1].rule
    # HRW's own hourly base-load profile (data/demo/sites.csv, base_profile_id) is read the same way
    base = [p for p in demo_case.problems if "demand charge takes" in p.rule and p.column == "base_profile_id"]
    assert [(p.file, p.row) for p in base] == [("sites.csv", 2)] and "60-min intervals" in base[0].rule


class TestProfileRules:
    def test_duplicated_timestamps(self, tmp_path):
        rows = cb.profile_rows()
        rows.insert(5, list(rows[4]))
        _, problems = load_case(cb.write_case(tmp_path / "c", profiles=rows))
        # header is line 1, so the inserted copy of the 5th data row sits on line 7
        assert _find(problems, file="profiles.csv", row=7, column="timestamp", text="repeated")

    def test_daylight_saving_gap(self, tmp_path):
        # 30 March 2025: clocks in Europe/Berlin jump from 02:00 to 03:00 (EU summer-time rule, Directive 2000/84/EC)
        rows = [["LP1", f"2025-03-30 {h:02d}:00", "50"] for h in range(0, 24)]
        _, problems = load_case(cb.write_case(tmp_path / "c", profiles=rows))
        p = _find(problems, file="profiles.csv", row=4, column="timestamp", text="does not exist")
        assert p.value.startswith("2025-03-30 02:00")

    def test_offsets_make_the_gap_harmless(self, tmp_path):
        stamps = ["2025-03-30T00:00+01:00", "2025-03-30T01:00+01:00", "2025-03-30T03:00+02:00", "2025-03-30T04:00+02:00"]
        rows = [["LP1", s, "50"] for s in stamps]
        case, problems = load_case(cb.write_case(tmp_path / "c", profiles=rows))
        assert case is not None, [str(p) for p in _errors(problems)]
        assert case.profile_info.loc[0, "resolution_min"] == 60

    def test_two_digit_offsets_are_instants_not_local_clock(self, tmp_path):
        # "+01"/"+02" (hours only, as database exports write offsets) on 30 March 2025 in Europe/Berlin: 00:00+01,
        # 01:00+01, 03:00+02, 04:00+02 are four consecutive hours across the spring change (Directive 2000/84/EC),
        # read as the local hours 0, 1, 3, 4 (hand calculation: each stamp is already local time)
        stamps = ["2025-03-30 00:00:00+01", "2025-03-30 01:00:00+01", "2025-03-30 03:00:00+02", "2025-03-30 04:00:00+02"]
        rows = [["LP1", s, "50"] for s in stamps]
        case, problems = load_case(cb.write_case(tmp_path / "c", profiles=rows))
        assert case is not None, [str(p) for p in _errors(problems)]
        index = case.profiles["LP1"].index
        assert list(index.hour) == [0, 1, 3, 4] and case.profile_info.loc[0, "resolution_min"] == 60

    def test_a_fixed_two_digit_offset_is_not_read_as_local_time(self, tmp_path):
        # 08:00-05 is 13:00 UTC, 14:00 in Europe/Berlin in January (UTC+1): hand calculation. Read as a naive local
        # time its UTC clock (13:00) would be localised again
        rows = [["LP1", f"2025-01-02 {h:02d}:00:00-05", "50"] for h in range(8, 12)]
        case, problems = load_case(cb.write_case(tmp_path / "c", profiles=rows))
        assert case is not None, [str(p) for p in _errors(problems)]
        assert list(case.profiles["LP1"].index.hour) == [14, 15, 16, 17]

    @pytest.mark.parametrize("start, warned", [("2025-01-01 01:00", True), ("2025-01-01 00:00", False)])
    def test_a_year_stamped_at_the_interval_ends_is_warned(self, tmp_path, start, warned):
        # 8,760 hourly stamps from 01:00 on 1 January 2025 end at 00:00 on 1 January 2026: the ends of the hours of
        # 2025 ("hour ending"), read as starts an hour late; the same count from 00:00 are the starts
        stamps = pd.date_range(start, periods=8760, freq="h", tz="Europe/Berlin")
        rows = [["LP1", t.isoformat(), "50"] for t in stamps]
        case, problems = load_case(cb.write_case(tmp_path / "c", profiles=rows))
        assert case is not None, [str(p) for p in _errors(problems)]
        found = [p for p in problems if "look like the ends of the intervals" in p.rule]
        assert bool(found) == warned
        if warned:
            assert found[0].value == "LP1" and "2025-01-01 01:00 to 2026-01-01 00:00" in found[0].rule

    def test_an_unknown_profile_column_is_warned(self, tmp_path):
        rows = [r + ["note"] for r in cb.profile_rows()]
        folder = cb.write_case(tmp_path / "c")
        cb.write_csv(folder / "profiles.csv", ["profile_id", "timestamp", "shaft_load_pct", "comment"], rows)
        case, problems = load_case(folder)
        assert case is not None
        assert _find(problems, file="profiles.csv", column="comment", severity="warning", text="unknown column")

    def test_parquet_empty_text_cells_are_blank_as_empty_csv_cells(self, tmp_path):
        # a value column written as text, "" where the row gives its other quantity: blank, not "not a number"
        folder = cb.write_case(tmp_path / "c")
        rows = cb.profile_rows()
        frame = pd.DataFrame({"profile_id": [r[0] for r in rows], "timestamp": [r[1] for r in rows],
                              "shaft_load_pct": [str(r[2]) for r in rows], "input_kw": [""] * len(rows)})
        (folder / "profiles.csv").unlink()
        frame.to_parquet(folder / "profiles.parquet", index=False)
        case, problems = load_case(folder)
        assert case is not None, [str(p) for p in _errors(problems)]

    def test_a_parquet_file_of_no_rows_is_named(self, tmp_path):
        folder = cb.write_case(tmp_path / "c")
        (folder / "profiles.csv").unlink()
        pd.DataFrame({"profile_id": pd.Series(dtype=str), "timestamp": pd.Series(dtype=str),
                      "shaft_load_pct": pd.Series(dtype=float)}).to_parquet(folder / "profiles.parquet", index=False)
        _, problems = load_case(folder)
        assert _find(problems, file="profiles.parquet", severity="warning", text="holds no rows")

    def test_local_times_beside_an_offset_of_a_rare_form_stay_local(self, tmp_path):
        # 14:15 local, 15:15+0200 written in the basic ISO form (20250701T151500+0200) and 16:15 local, Europe/Berlin in
        # July (UTC+2): three consecutive local hours (hand calculation); the local ones are not read as UTC
        rows = [["LP1", "2025-07-01 14:15", "50"], ["LP1", "20250701T151500+0200", "50"], ["LP1", "2025-07-01 16:15", "50"]]
        case, problems = load_case(cb.write_case(tmp_path / "c", profiles=rows))
        assert case is not None, [str(p) for p in _errors(problems)]
        assert list(case.profiles["LP1"].index.hour) == [14, 15, 16]

    def test_missing_timestamps_warned(self, tmp_path):
        rows = cb.profile_rows()
        del rows[10:13]
        case, problems = load_case(cb.write_case(tmp_path / "c", profiles=rows))
        assert case is not None
        assert "misses 3 interval" in _find(problems, file="profiles.csv", severity="warning", text="misses").rule

    def test_missing_timestamps_warning_names_the_row_after_the_gap_as_written(self, tmp_path):
        # hourly rows from 2 January 2025 00:00; rows of 10:00, 11:00 and 12:00 deleted, so the 11th data row
        # (line 12 with the header) holds 13:00, the first interval after the gap, written "2025-01-02T13:00"
        rows = cb.profile_rows()
        del rows[10:13]
        rows[10][1] = rows[10][1].replace(" ", "T")
        _, problems = load_case(cb.write_case(tmp_path / "c", profiles=rows))
        p = _find(problems, file="profiles.csv", severity="warning", text="misses 3 interval")
        assert (p.row, p.column, p.value) == (12, "timestamp", "2025-01-02T13:00")
        assert "the first at 2025-01-02 10:00" in p.rule and "first after the gap" in p.rule

    def test_blank_values_warned_and_filled_like_missing_intervals(self, tmp_path):
        # three weeks of hourly rows from Thursday 2 January 2025; the value of Thursday 9 January 10:00
        # (data row 24 * 7 + 10 = 178, line 180 with the header) left blank
        rows = cb.profile_rows(24 * 21)
        rows[24 * 7 + 10][2] = ""
        case, problems = load_case(cb.write_case(tmp_path / "c", profiles=rows))
        assert case is not None, [str(p) for p in _errors(problems)]
        p = _find(problems, file="profiles.csv", severity="warning", text="blank value")
        assert p.row == 180 and p.column == "shaft_load_pct" and "1 blank value" in p.rule
        series = case.profiles["LP1"]
        values, filled_frac = conform(series, pd.DatetimeIndex(series.index))
        # hand calculation: the same weekday and hour in the other weeks are rows 10 and 24 * 14 + 10 = 346 of
        # casebuilder.profile_rows, 60 + (10 % 5) * 5 = 60 and 60 + (346 % 5) * 5 = 65 %; their mean 62.5 %
        assert values[24 * 7 + 10] == pytest.approx(62.5, abs=1e-12)
        assert filled_frac == pytest.approx(1 / (24 * 21), abs=1e-15)
        assert np.isfinite(values).all()

    def test_timestamp_off_the_grid_named_at_its_own_row(self, tmp_path):
        # an hourly profile with one stamp moved to 20:07: that row (data row 21, line 22 with the header) and
        # its value are named, and neither a bogus gap nor the next, valid stamp is reported
        rows = cb.profile_rows()
        rows[20][1] = "2025-01-02 20:07"
        case, problems = load_case(cb.write_case(tmp_path / "c", profiles=rows))
        assert case is None
        p = _find(problems, file="profiles.csv", column="timestamp", text="off the 60-min grid")
        assert p.row == 22 and str(p.value).startswith("2025-01-02 20:07")
        assert [q for q in _errors(problems) if q.file == "profiles.csv"] == [p]
        assert not [q for q in problems if "misses" in q.rule]

    def test_resolution_not_allowed(self, tmp_path):
        rows = [["LP1", f"2025-01-02 00:{m:02d}", "50"] for m in range(0, 60, 10)]
        _, problems = load_case(cb.write_case(tmp_path / "c", profiles=rows))
        assert _find(problems, file="profiles.csv", text="allowed are 15, 30 or 60 min")

    def test_load_above_125_in_profile(self, tmp_path):
        rows = cb.profile_rows()
        rows[3][2] = "180"
        _, problems = load_case(cb.write_case(tmp_path / "c", profiles=rows))
        assert _find(problems, file="profiles.csv", row=5, column="shaft_load_pct", text="above 125")

    def test_a_bad_value_names_its_profile_and_timestamp(self, tmp_path):
        # docs/case-format.md, "Interval profiles": "A problem in a row names the profile and the row's timestamp
        # as written, besides the row number". casebuilder.profile_rows: data row 4 (line 5) is LP1 at
        # 2025-01-02 03:00, data row 7 (line 8) LP1 at 2025-01-02 06:00
        rows = cb.profile_rows()
        rows[3][2] = "-12.5"
        rows[6][2] = "#N/A"
        _, problems = load_case(cb.write_case(tmp_path / "c", profiles=rows))
        negative = _find(problems, file="profiles.csv", row=5, column="shaft_load_pct", text="negative")
        assert negative.rule == "values must not be negative in profile 'LP1' at 2025-01-02 03:00"
        assert negative.value == -12.5
        assert str(negative) == ("ERROR profiles.csv, row 5, column 'shaft_load_pct': values must not be negative in "
                                 "profile 'LP1' at 2025-01-02 03:00 (value: -12.5).")
        text = _find(problems, file="profiles.csv", row=8, column="shaft_load_pct", text="must be a number")
        assert text.rule == "'shaft_load_pct' must be a number in profile 'LP1' at 2025-01-02 06:00"

    def test_input_kw_profile_above_rating(self, tmp_path):
        # P1 is 15 kW at about 92 % efficiency: 125 % of its rated input is about 20 kW; 40 kW is too much
        rows = [["LP1", f"2025-01-02 {h:02d}:00", "", "40" if h == 3 else "10"] for h in range(24)]
        folder = cb.write_case(tmp_path / "c")
        cb.write_csv(folder / "profiles.csv", ["profile_id", "timestamp", "shaft_load_pct", "input_kw"], rows)
        _, problems = load_case(folder)
        assert _find(problems, file="assets.csv", row=2, column="profile_id", text="above 125 %")

    def test_short_profile_warned(self, tmp_path):
        case, problems = load_case(cb.write_case(tmp_path / "c"))
        assert case is not None
        assert _find(problems, file="profiles.csv", severity="warning", text="less than a year")

    def test_bad_timestamp_text(self, tmp_path):
        rows = cb.profile_rows()
        rows[2][1] = "yesterday"
        _, problems = load_case(cb.write_case(tmp_path / "c", profiles=rows))
        assert _find(problems, file="profiles.csv", row=4, column="timestamp", text="not readable")


class TestOtherTables:
    def test_duplicate_site(self, tmp_path):
        _, problems = load_case(cb.write_case(tmp_path / "c", sites=cb.SITES + [["S1", "Again", "0", "0.9"]]))
        assert _find(problems, file="sites.csv", row=3, column="site_id", text="duplicate")

    def test_capacitor_unknown_site_and_oversized_step(self, tmp_path):
        caps = [["S2", "B1", "60", "stepped", "10", "0.95"], ["S1", "B2", "60", "stepped", "90", "0.95"]]
        _, problems = load_case(cb.write_case(tmp_path / "c", capacitors=caps))
        assert _find(problems, file="capacitors.csv", row=2, column="site_id", text="unknown site_id")
        assert _find(problems, file="capacitors.csv", row=3, column="step_q_kvar", text="larger than the bank")

    def test_duty_hours_over_a_year(self, tmp_path):
        _, problems = load_case(cb.write_case(tmp_path / "c", duty=[["D1", "80", "6000"], ["D1", "40", "3000"]]))
        hit = _find(problems, file="duty.csv", row=2, column="duration_h_per_yr", text="more than 8784")
        assert "hours a year of each load state" in hit.hint

    @pytest.mark.parametrize("loads, warned", [(("0.85", "0.6"), True), (("85", "60"), False), (("1", "0"), True),
                                               (("1.5", "0.5"), False)])
    def test_duty_loads_that_never_pass_one_percent_are_refused_as_fractions(self, tmp_path, loads, warned):
        # docs/case-format.md: shaft_load_pct is 0-100 % of rating; a table of 0.85 and 0.6 is 85 % and 60 % entered as
        # fractions (the motor would be modelled at about 1 % load): an error, as for profiles and mean_load_pct
        duty = [["D1", loads[0], "1800"], ["D1", loads[1], "1400"]]
        case, problems = load_case(cb.write_case(tmp_path / "c", duty=duty))
        hits = [p for p in problems if p.file == "duty.csv" and "never exceeds" in p.rule]
        assert bool(hits) == warned
        if warned:
            assert case is None
            assert hits[0].severity == "error" and hits[0].column == "shaft_load_pct" and hits[0].row == 2
            assert "fractions (0-1)" in hits[0].hint

    def test_bad_settings(self, tmp_path):
        toml = '[case]\nname = "x"\ncurrency = "euro"\ntime_zone = "Mars/Olympus"\n'
        _, problems = load_case(cb.write_case(tmp_path / "c", case_toml=toml))
        assert _find(problems, file="case.toml", column="currency", text="ISO 4217")
        assert _find(problems, file="case.toml", column="time_zone", text="IANA")

    def test_missing_required_table(self, tmp_path):
        folder = cb.write_case(tmp_path / "c")
        (folder / "sites.csv").unlink()
        _, problems = load_case(folder)
        assert _find(problems, file="sites.csv", text="required table 'sites' is missing")

    def test_empty_file(self, tmp_path):
        folder = cb.write_case(tmp_path / "c")
        (folder / "sites.csv").write_bytes(b"")
        _, problems = load_case(folder)
        assert _find(problems, file="sites.csv", text="empty")

    def test_an_unreadable_duty_file_is_one_error_not_one_per_reference(self, tmp_path):
        """docs/case-format.md: a file that cannot be read is one error; the references it would resolve are
        not judged (as for the profiles file): the demo's empty duty.csv used to add an "unknown profile
        reference" error for each of the four assets that name its 'SLUDGE-DUTY' profile."""
        folder = tmp_path / "demo"
        shutil.copytree(Path(__file__).resolve().parents[1] / "data" / "demo", folder)
        (folder / "duty.csv").write_bytes(b"")
        _, problems = load_case(folder)
        errors = [p for p in problems if p.severity == "error"]
        assert [p.file for p in errors] == ["duty.csv"] and "empty" in errors[0].rule
        assert not any("unknown profile reference" in p.rule for p in problems)

    def test_missing_case_path(self, tmp_path):
        case, problems = load_case(tmp_path / "nowhere")
        assert case is None and "does not exist" in problems[0].rule


class TestSettings:
    """docs/case-format.md, "case.toml": the file may be left out (defaults); empty, or comments only, it is an
    error; with no time_zone declared UTC is assumed, and a tariff in another zone says the case declares none."""

    @staticmethod
    def _case_with_tariff(tmp_path, case_toml: str | None):
        folder = cb.write_case(tmp_path / "c")
        cb.write_csv(folder / "sites.csv", cb.SITES_HEADER + ["tariff_file"], [cb.SITES[0] + ["berlin.toml"]])
        (folder / "tariffs").mkdir()
        # data/tariffs/example_kva_demand.toml line 10: time_zone = "Europe/Berlin"
        shutil.copyfile(TARIFFS / "example_kva_demand.toml", folder / "tariffs" / "berlin.toml")
        if case_toml is None:
            (folder / "case.toml").unlink()
        else:
            (folder / "case.toml").write_text(case_toml, encoding="utf-8")
        return folder

    def test_an_empty_case_toml_is_an_error_and_the_tariff_zone_message_says_none_is_declared(self, tmp_path):
        folder = self._case_with_tariff(tmp_path, "")
        before = hashlib.sha256((folder / "case.toml").read_bytes()).hexdigest()
        case, problems = load_case(folder)
        assert case is None
        empty = _find(problems, file="case.toml", text="empty")
        assert (empty.row, empty.column, empty.rule) == (None, None, "the file is empty: it holds no settings")
        assert "[case]" in empty.hint and "time_zone" in empty.hint
        zone = _find(problems, file="tariffs/berlin.toml", column="tariff.time_zone")
        assert zone.row == 10 and zone.value == "Europe/Berlin"
        assert zone.rule == ("the tariff's time zone differs from the case's: case.toml declares no time zone, "
                             "so UTC is assumed")
        assert zone.hint.startswith('declare the sites\' zone in case.toml: time_zone = "Europe/Berlin" under the '
                                    "[case] line")
        # errors first (models.problems.ordered): the empty file leads, the warnings follow every error
        assert problems[0] == empty
        assert [p.severity for p in problems] == sorted(p.severity for p in problems)
        assert hashlib.sha256((folder / "case.toml").read_bytes()).hexdigest() == before

    def test_a_case_toml_of_comments_only_is_an_error(self, tmp_path):
        _, problems = load_case(self._case_with_tariff(tmp_path, "# settings to come\n"))
        assert _find(problems, file="case.toml", text="holds no settings, only comments").row is None

    def test_without_case_toml_the_defaults_apply(self, tmp_path):
        # the same tariff, no case.toml at all: no error about the file, the zone message as above
        _, problems = load_case(self._case_with_tariff(tmp_path, None))
        assert not [p for p in _errors(problems) if p.file == "case.toml"]
        assert "declares no time zone" in _find(problems, column="tariff.time_zone").rule

    def test_a_declared_zone_keeps_its_message(self, tmp_path):
        toml = '[case]\nname = "x"\ncurrency = "EUR"\ntime_zone = "Europe/Paris"\n'
        _, problems = load_case(self._case_with_tariff(tmp_path, toml))
        zone = _find(problems, column="tariff.time_zone")
        assert zone.rule == "the tariff's time zone differs from the case time zone Europe/Paris"


class TestProblemOrder:
    """docs/case-format.md, "Reading rules", Problems: errors first, then warnings; within each by file, the
    whole file or column before its rows, then by row; an "N more ..." line on the row of the first it counts."""

    def test_errors_before_warnings_and_a_summary_after_its_rows(self, tmp_path):
        header = cb.ASSET_HEADER + ["colour"]  # an unknown column: a warning of assets.csv, a file before profiles.csv
        assets = [r + ["blue"] for r in cb.ASSETS]
        rows = cb.profile_rows()
        for k in range(1, 26):  # 25 unreadable timestamps, data rows k = 1-25 on lines k + 2 = 3-27: the first 20
            rows[k][1] = f"{k:02d}.01.2025 00:00"  # listed (lines 3-22), the other 5 counted on line 23 (k = 21)
        _, problems = load_case(cb.write_case(tmp_path / "c", assets=assets, asset_header=header, profiles=rows))
        severities = [p.severity for p in problems]
        assert severities == sorted(severities) and "warning" in severities  # "error" < "warning"
        stamps = [p for p in problems if p.file == "profiles.csv" and p.column == "timestamp"
                  and "readable" in p.rule]
        assert [p.row for p in stamps] == list(range(3, 24))
        summary = stamps[-1]
        assert summary.rule == "5 more unreadable timestamps, the first of them in this row"
        assert (summary.row, summary.value) == (23, "21.01.2025 00:00")
        assert problems.index(summary) == problems.index(stamps[-2]) + 1
        unknown = _find(problems, file="assets.csv", column="colour", severity="warning")
        assert problems.index(unknown) > max(problems.index(p) for p in _errors(problems))


class TestDefaults:
    def test_efficiency_from_class_minimum_plus_margin(self, tmp_path):
        case, _ = load_case(cb.write_case(tmp_path / "c"), mode="strict")
        # IEC 60034-30-1 Table 2: IE3 4-pole 15 kW minimum 92.1 %; default removes 10 % of those losses:
        # 100 - 0.9 * (100 - 92.1) = 92.89 % (hand calculation, see docs/derivations/case-defaults.md)
        assert_allclose(case.assets.loc[0, "rated_efficiency_pct"], 92.89, atol=0.005)
        logged = case.defaults[(case.defaults.asset_id == "P1") & (case.defaults.column == "rated_efficiency_pct")]
        assert "IE3 minimum" in logged["basis"].iloc[0]

    def test_nameplate_values_are_kept(self, tmp_path):
        case, _ = load_case(cb.write_case(tmp_path / "c"), mode="strict")
        assert_allclose(case.assets.loc[1, "rated_efficiency_pct"], 89.5)
        assert not ((case.defaults.asset_id == "F1") & (case.defaults.column == "rated_efficiency_pct")).any()

    def test_old_motor_without_class_gets_pre_rule_losses(self, tmp_path):
        case, _ = load_case(cb.write_case(tmp_path / "c"), mode="strict")
        # C1: 75 kW 2-pole from 1995, class unknown -> IE1 by year (IEC 60034-30-1 IE1 2-pole 75 kW = 92.7 %),
        # first the catalogue margin: 100 - 0.9 * 7.3 = 93.43 ... but 1995 is not before the 1995 rule year, so
        # the margin applies (hand calculation, docs/derivations/case-defaults.md)
        assert_allclose(case.assets.loc[2, "rated_efficiency_pct"], 93.43, atol=0.005)
        # no rule applied to a new 50 Hz motor in 1995 (the EU's first minimum came in June 2011, Regulation
        # 640/2009): the log says IE1 is the typical motor of its time, not a minimum then
        logged = case.defaults[(case.defaults.asset_id == "C1") & (case.defaults.column == "rated_efficiency_pct")]
        assert logged["basis"].iloc[0] == ("IE1 assumed from the year installed (typical of motors then; no minimum "
                                           "applied yet)")

    def test_the_basis_says_whether_a_rule_applied_in_the_year(self):
        # 60 Hz: the EPAct 1992 levels applied from October 1997 (10 CFR 431.25), so a 1996 motor is the typical
        # motor of its time and a 1998 one at the minimum then (IE2); 50 Hz: the EU's first minimum came in 2011
        from models.defaults import default_efficiency_pct

        _, basis = default_efficiency_pct([10.0] * 4, [4] * 4, [60, 60, 50, 50], ["unknown"] * 4,
                                          [1996, 1998, 2005, 2012], ["induction"] * 4)
        assert [b.split(" assumed")[0] for b in basis] == ["IE1", "IE2", "IE1", "IE2"]
        assert ["regulatory minimum then" in b for b in basis] == [False, True, False, True]

    def test_speed_default_from_typical_slip(self, tmp_path):
        case, _ = load_case(cb.write_case(tmp_path / "c"), mode="strict")
        # C1: 75 kW 2-pole 50 Hz, n_s = 3000 rpm; Engineering ToolBox typical slip 1.7 % at 50 hp (37.3 kW) and
        # 0.8 % at 250 hp (186 kW): log interpolation at 75 kW gives 1.7 - 0.9 * log(75/37.28)/log(5) = 1.311 %
        # so 3000 * (1 - 0.01311) = 2960.7 rpm (hand calculation, docs/derivations/case-defaults.md)
        assert_allclose(case.assets.loc[2, "rated_speed_rpm"], 2960.7, atol=0.1)

    def test_quality_score_ranks_measured_above_guessed(self, tmp_path):
        case, _ = load_case(cb.write_case(tmp_path / "c"), mode="strict")
        score = dict(zip(case.assets.asset_id, case.assets.data_quality_pct))
        # penalties in models.defaults.QUALITY_PENALTY_PCT / LOAD_DATA_PENALTY_PCT (hand calculation,
        # docs/derivations/case-defaults.md): P1 has an interval profile (0) but defaulted efficiency (25),
        # power factor (10) and load type (5): 100 - 40 = 60. F1 has nameplate efficiency, PF and speed but only
        # hours + mean load (25) and a defaulted load type (5): 100 - 30 = 70.
        assert_allclose([score["P1"], score["F1"]], [60.0, 70.0])
        assert score["C1"] < score["P1"]


class TestDemoCase:
    def test_demo_is_valid_and_big_enough(self, demo_case):
        a = demo_case.assets
        assert len(a) >= 80 and a["site_id"].nunique() >= 2
        assert a["rated_p_kw"].min() <= 0.75 and a["rated_p_kw"].max() >= 1500
        assert set(a["application"]) == {"pump", "fan", "compressor", "conveyor", "crusher", "mixer", "other"}
        assert (a["speed_control"] == "throttled").sum() >= 5
        assert (a["rewind_count"] > 0).sum() >= 5
        assert demo_case.settings.invented

    def test_demo_profiles_cover_a_year(self, demo_case):
        info = demo_case.profile_info
        assert (info["coverage_days"] >= 365).all()
        assert set(info["resolution_min"]) <= {15, 60}


def test_fleet_summary_counts_each_default_basis_on_its_own_row():
    # the demo's efficiency defaults come from three bases (assumed class by year, IE1 or IE2 minimum plus a
    # catalogue margin): each gets its own row and count, the counts read straight from the defaults table
    from models.case import fleet_summary

    case, _ = load_case(Path(__file__).resolve().parents[1] / "data" / "demo")
    table = fleet_summary(case)["defaulted"]
    eff = table[table["column"] == "rated_efficiency_pct"]
    assert len(eff) >= 2 and eff["basis"].is_unique
    d = case.defaults
    for basis, assets in zip(eff["basis"], eff["assets"]):
        rows = d[(d["column"] == "rated_efficiency_pct") & (d["basis"] == basis)]
        assert assets == rows["asset_id"].nunique()
    assert eff["assets"].sum() == d.loc[d["column"] == "rated_efficiency_pct", "asset_id"].nunique()


class TestStaticHeadWarning:
    """A throttled pump or fan without its static head takes the application default: said once for the file."""

    def test_blank_static_head_of_a_throttled_pump_is_named(self, tmp_path):
        _, problems = load_case(cb.write_case(tmp_path / "c"))
        # P1 is the only throttled pump or fan of the small case (F1 is a fixed-speed fan)
        hit = _find(problems, file="assets.csv", column="static_head_frac", severity="warning",
                    text="blank for 1 throttled pump or fan (P1)")
        assert hit.row is None and "0.3 for pumps, 0 for fans" in hit.rule

    def test_given_static_head_is_not_warned(self, tmp_path):
        header = cb.ASSET_HEADER + ["static_head_frac"]
        rows = [r + ["0.5" if r[0] == "P1" else ""] for r in copy.deepcopy(cb.ASSETS)]
        _, problems = load_case(cb.write_case(tmp_path / "c", assets=rows, asset_header=header))
        assert not [p for p in problems if p.column == "static_head_frac"]


class TestFinanceWarnings:
    def test_case_without_finance_assumptions_says_defaults_are_used(self, tmp_path):
        folder = cb.write_case(tmp_path / "c")
        assert not (folder / "finance.toml").exists()
        _, problems = load_case(folder)
        hit = _find(problems, file="finance.toml", severity="warning", text="no finance assumptions were found")
        assert "no capital budget" in hit.rule

    @pytest.mark.parametrize("text, error", [(b"", True), (b"  \n\n", True), (b"\xef\xbb\xbf\n", True),
                                             (b"# only a comment\n", False)])
    def test_an_empty_finance_file_is_an_error(self, tmp_path, text, error):
        # an empty finance.toml (a failed save, a sync) is an error, as an empty case.toml is: its defaults would
        # replace the organisation's rate and budget unseen; a file of comments only is the defaults, warned
        folder = cb.write_case(tmp_path / "c")
        (folder / "finance.toml").write_bytes(text)
        case, problems = load_case(folder)
        assert (case is None) == error
        if error:
            hit = _find(problems, file="finance.toml", severity="error", text="the file is empty")
            assert "delete the file" in hit.hint
        else:
            assert _find(problems, file="finance.toml", severity="warning", text="no finance assumptions were found")

    def test_a_misspelt_key_is_an_error_named_with_a_guess(self, tmp_path):
        folder = cb.write_case(tmp_path / "c")
        (folder / "finance.toml").write_text('currency = "EUR"\ndiscount_rate = 0.05\n', encoding="utf-8")
        case, problems = load_case(folder)
        # an error: read as unknown, the rate would be dropped and the program's default (0.08,
        # models.finance.FinanceAssumptions, docs/finance.md) used unsaid
        assert case is None
        hit = _find(problems, file="finance.toml", column="discount_rate", text="unknown finance key")
        assert "looks like 'discount_rate_frac'" in hit.rule and "discount_rate_frac = 0.08 would be used" in hit.rule
        assert "did you mean 'discount_rate_frac'?" in hit.hint

    def test_a_key_like_none_of_the_finance_keys_is_a_warning(self, tmp_path):
        folder = cb.write_case(tmp_path / "c")
        (folder / "finance.toml").write_text('currency = "EUR"\nprepared_by = "energy team"\n', encoding="utf-8")
        case, problems = load_case(folder)
        assert case is not None
        assert _find(problems, file="finance.toml", column="prepared_by", severity="warning", text="unknown finance key")

    def test_a_budget_of_zero_every_year_is_warned(self, tmp_path):
        folder = cb.write_case(tmp_path / "c")
        (folder / "finance.toml").write_text('currency = "EUR"\nbudget_per_yr = [0, 0, 0]\n', encoding="utf-8")
        case, problems = load_case(folder)
        assert case is not None
        hit = _find(problems, file="finance.toml", column="budget_per_yr", severity="warning", text="plan buys only projects that need no capital")
        assert hit.row == 2  # the line where budget_per_yr is written
        assert not [p for p in problems if "no finance assumptions" in p.rule]


class TestIllustrativePriceCurrency:
    """The shipped catalogue's illustrative prices are in EUR (data/defaults/options.csv, first line): a case in
    another currency is warned that it takes them unconverted; nothing is changed."""

    def test_a_case_in_usd_on_the_shipped_prices_is_warned(self, tmp_path):
        toml = '[case]\nname = "x"\ncurrency = "USD"\ntime_zone = "Europe/Berlin"\n'
        case, problems = load_case(cb.write_case(tmp_path / "c", case_toml=toml))
        assert case is not None
        found = _find(problems, column="illustrative", severity="warning")
        assert found.severity == "warning" and found.file == "default options catalogue"
        assert "which are in EUR (2025); this case counts in USD and takes them as USD amounts, unconverted" in found.rule
        assert "quotes in USD" in found.hint
        # the keep row prices nothing: every other shipped option is named or counted
        shipped = pd.read_csv(ROOT / "data" / "defaults" / "options.csv", comment="#")
        priced = int((shipped["technology"] != "existing").sum())
        assert found.rule.startswith(f"{priced} options (")

    def test_a_case_in_eur_or_with_its_own_prices_is_not(self, tmp_path):
        _, problems = load_case(cb.write_case(tmp_path / "eur"))
        assert not [p for p in problems if p.column == "illustrative"]
        toml = '[case]\nname = "x"\ncurrency = "USD"\ntime_zone = "Europe/Berlin"\n'
        folder = cb.write_case(tmp_path / "own", case_toml=toml)
        shipped = (ROOT / "data" / "defaults" / "options.csv").read_text(encoding="utf-8")
        (folder / "options.csv").write_text(shipped.replace(",true,", ",false,"), encoding="utf-8")
        _, problems = load_case(folder)
        assert not [p for p in problems if p.column == "illustrative"]


class TestRegionAgainstFrequency:
    """With no region declared the EU's rules are taken; a fleet mostly at 60 Hz is told to declare one."""

    @staticmethod
    def _sixty_hz(tmp_path, toml):
        assets = [list(row) for row in cb.ASSETS]
        for row in assets:
            row[6] = "60"  # supply_f_hz
            row[11] = ""  # rated_speed_rpm: the 50 Hz speeds would not fit
        return cb.write_case(tmp_path, assets=assets, case_toml=toml)

    def test_no_region_and_60_hz_motors_is_warned(self, tmp_path):
        case, problems = load_case(self._sixty_hz(tmp_path / "c", cb.CASE_TOML))
        assert case is not None and case.settings.region == "EU" and not case.settings.region_declared
        found = _find(problems, column="region", severity="warning")
        assert found.file == "case.toml"
        assert found.rule.endswith("but 3 of 3 motors with a supply frequency run at 60 Hz")
        assert 'region = "US"' in found.hint

    def test_a_declared_region_or_a_50_hz_fleet_is_not(self, tmp_path):
        toml = cb.CASE_TOML + 'region = "US"\n'
        case, problems = load_case(self._sixty_hz(tmp_path / "us", toml))
        assert case.settings.region == "US" and not [p for p in problems if p.column == "region"]
        _, problems = load_case(cb.write_case(tmp_path / "eu"))
        assert not [p for p in problems if p.column == "region"]
        _, problems = load_case(cb.write_case(tmp_path / "eu2", case_toml=cb.CASE_TOML + 'region = "EU"\n'))
        assert not [p for p in problems if p.column == "region"]

    def test_the_eu_declared_for_a_60_hz_fleet_is_warned(self, tmp_path):
        # the blank templates write region = "EU": a US user who keeps that line is told the rules do not fit
        case, problems = load_case(self._sixty_hz(tmp_path / "c", cb.CASE_TOML + 'region = "EU"\n'))
        assert case is not None and case.settings.region == "EU"
        found = _find(problems, column="region", severity="warning")
        assert "region EU is declared" in found.rule and "but 3 of 3 motors with a supply frequency run at 60 Hz" in found.rule
        assert "one of EU, US, CN, OTHER" in found.hint


class TestHintsForOtherConventions:
    """Hints that meet values written in another convention (US nameplates, thousands commas, hp columns)."""

    @staticmethod
    def _with(tmp_path, column, value, asset=0, header=None):
        head = list(header or cb.ASSET_HEADER)
        assets = [list(row) for row in cb.ASSETS]
        assets[asset][head.index(column)] = value
        return load_case(cb.write_case(tmp_path, assets=assets, asset_header=head))[1]

    def test_a_nema_class_name_is_given_its_ie_class(self, tmp_path):
        # common practice: NEMA Premium was set beside IE3 (IEC 60034-30-1 names IE3 "premium efficiency")
        found = _find(self._with(tmp_path, "efficiency_class", "NEMA Premium"), column="efficiency_class", row=2)
        assert found.hint.startswith("'NEMA Premium' corresponds to IE3") and found.hint.endswith("write IE3")
        other = _find(self._with(tmp_path / "b", "efficiency_class", "IE9"), column="efficiency_class", row=2)
        assert other.hint == "check the spelling"

    def test_a_thousands_comma_says_how_to_write_the_number(self, tmp_path):
        problems = self._with(tmp_path, "operating_h_per_yr", "6,000", asset=1)
        found = _find(problems, column="operating_h_per_yr", row=3)
        assert found.hint == "write 6000 without the comma, or 6.000 if the comma is a decimal mark (unit: h/yr)"
        # one error for the cell: the hours were given, so they are not also said to be missing
        assert [p.rule for p in problems if p.row == 3 and p.severity == "error"] == [found.rule]

    def test_commas_between_thousands_only_are_said_as_such(self, tmp_path):
        # "1,500,000": two commas can only separate thousands; the hint does not offer a decimal reading
        problems = self._with(tmp_path, "operating_h_per_yr", "1,500,000", asset=1)
        found = _find(problems, column="operating_h_per_yr", row=3)
        assert found.hint.startswith("write 1500000 without the commas (")

    def test_an_implausible_current_on_a_rating_in_hp_does_not_speak_of_watts(self, tmp_path):
        # 500 hp = 372.85 kW at 4.16 V: about 51,700 A, so the voltage was given in kV
        header = [("rated_p_hp" if h == "rated_p_kw" else h) for h in cb.ASSET_HEADER]
        assets = [list(row) for row in cb.ASSETS]
        assets[0][header.index("rated_p_hp")] = "500"
        assets[0][header.index("rated_v_v")] = "4.16"
        _, problems = load_case(cb.write_case(tmp_path, assets=assets, asset_header=header))
        found = _find(problems, column="rated_p_hp", row=2, text="would draw")
        assert "W rather than kW" not in found.hint and "kV rather than V" in found.hint


def test_the_default_purchase_date_is_the_cases_own_day_whatever_the_machines_zone(monkeypatch):
    # the demo's time zone is Europe/Berlin (data/demo/case.toml): a machine set to a zone a day ahead or behind
    # reads the same purchase date, so the same case gives the same files on either
    import datetime as dt
    import time
    import zoneinfo

    berlin = zoneinfo.ZoneInfo("Europe/Berlin")
    before = dt.datetime.now(berlin).date().isoformat()
    days = set()
    for zone in ("Pacific/Kiritimati", "Pacific/Pago_Pago"):  # UTC+14 and UTC-11: never on one date at once
        monkeypatch.setenv("TZ", zone)
        time.tzset()
        case, _ = load_case(Path(__file__).resolve().parents[1] / "data" / "demo")
        days.add(case.settings.purchase_date)
    monkeypatch.delenv("TZ")
    time.tzset()
    after = dt.datetime.now(berlin).date().isoformat()
    # Berlin's date, one for both loads (two only should midnight pass there between them)
    assert days <= {before, after} and (len(days) == 1 or before != after)


def test_a_motor_whose_efficiency_cannot_be_defaulted_is_refused_by_row(tmp_path, monkeypatch):
    # should the class tables give no efficiency for a motor with none on its nameplate, check says so for its
    # row instead of a run failing later on an internal array
    from models import defaults as nameplate_defaults

    real = nameplate_defaults.default_efficiency_pct

    def none_for_the_second(*args, **kwargs):
        values, basis = real(*args, **kwargs)
        values = np.array(values, dtype=float)
        values[1] = np.nan
        return values, basis

    monkeypatch.setattr(nameplate_defaults, "default_efficiency_pct", none_for_the_second)
    case, problems = load_case(cb.write_case(tmp_path / "c", assets=_assets_with(1, "rated_efficiency_pct", "")))
    assert case is None
    found = _find(problems, row=3, column="rated_efficiency_pct", text="none can be taken from the efficiency classes")
    assert "nameplate efficiency" in found.hint



def test_a_motor_the_model_cannot_calibrate_is_refused_by_check_on_its_row(tmp_path):
    # F1 (7.5 kW) at 97 % and 1380 rpm. Hand calculation: slip s = (1500 - 1380) / 1500 = 0.08, air-gap power
    # >= 7.5 / (1 - 0.08) = 8.152 kW, rotor copper loss s x P_ag >= 0.652 kW; full-load losses
    # 7.5 x (1 / 0.97 - 1) = 0.232 kW, so the rotor alone would take more than all of them (the model asks at
    # most 95 %): an error on the file's row 3 (F1), said with the nameplate as read, before any run
    rows = _assets_with(1, "rated_efficiency_pct", "97")
    rows[1][cb.ASSET_HEADER.index("rated_speed_rpm")] = "1380"
    case, problems = load_case(cb.write_case(tmp_path / "c", assets=rows))
    assert case is None
    found = _find(problems, file="assets.csv", row=3, column="rated_speed_rpm", text="rotor copper loss")
    assert "7.5 kW, 97 %" in found.hint and "1380 rpm: a slip of 8 %" in found.hint
    assert len(_errors(problems)) == 1


def test_a_part_load_efficiency_the_model_cannot_fit_is_named_in_the_registers_words(tmp_path):
    # F1 at 89.5 % full load, 60 % at 75 % load and 40 % at half load: losses that fall with load, which no
    # loss law a + b y^k with k in the model's range fits; said on the register's column, not the model's name
    header = cb.ASSET_HEADER + ["efficiency_75_pct", "efficiency_50_pct"]
    rows = [r + ["", ""] for r in _assets_with(1, "rated_efficiency_pct", "89.5")]
    rows[1][-2:] = ["60", "40"]
    case, problems = load_case(cb.write_case(tmp_path / "c", assets=rows, asset_header=header))
    assert case is None
    said = [p for p in _errors(problems) if p.file == "assets.csv" and p.row == 3]
    assert len(said) == 1 and said[0].column == "efficiency_75_pct" and said[0].value == 60
    assert said[0].rule.startswith("efficiency_75_pct and efficiency_50_pct are not consistent with losses rising")


def test_a_profile_giving_both_quantities_is_said_on_the_odd_row(tmp_path):
    # LP1 gives shaft_load_pct on all 48 rows and, on its fourth (the file's row 5), input_kw 150 too: the error
    # names that row, its column and value, with the profile and timestamp
    folder = cb.write_case(tmp_path / "c")
    rows = [r + [""] for r in cb.profile_rows()]
    rows[3][-1] = "150"
    cb.write_csv(folder / "profiles.csv", cb.PROFILE_HEADER + ["input_kw"], rows)
    case, problems = load_case(folder)
    assert case is None
    found = _find(problems, file="profiles.csv", row=5, column="input_kw", text="values in both")
    assert found.value == 150.0 and "(48 and 1 rows)" in found.rule and "at 2025-01-02 03:00" in found.rule


def test_a_misspelt_case_time_zone_is_one_error_not_one_per_tariff(tmp_path):
    # the case's zone is not a zone: its stand-in (UTC) is not set against the tariffs' own zones
    folder = cb.write_case(tmp_path / "c", case_toml=cb.CASE_TOML.replace('"Europe/Berlin"', '"Europe/Berln"'))
    cb.with_flat_tariff(folder)
    case, problems = load_case(folder)
    assert case is None
    assert [(p.file, p.column) for p in _errors(problems)] == [("case.toml", "time_zone")]


def test_a_case_time_zone_without_summer_time_is_warned(tmp_path):
    case, problems = load_case(cb.write_case(tmp_path / "c", case_toml=cb.CASE_TOML.replace('"Europe/Berlin"', '"EST"')))
    assert case is not None
    found = _find(problems, column="time_zone", severity="warning")
    assert "no summer time" in found.rule and "America/New_York" in found.hint


def test_an_hourly_base_load_under_a_quarter_hour_demand_charge_is_warned(tmp_path):
    # the tariff's demand charge takes 15-min windows (data/tariffs/example_tou_kw_reactive_ratchet.toml); an
    # hourly base-load profile averages a 15-min peak over its hour (a 500 kW quarter-hour in 100 kW hours
    # reads as 200 kW: hand calculation (500 + 3 x 100) / 4), so the bill and the demand savings are understated
    folder = cb.write_case(tmp_path / "c")
    rows = [r.split(",") for r in (folder / "profiles.csv").read_text(encoding="utf-8").splitlines()[1:]]
    base = [["BASE", ts, "", f"{100 + 10 * (k % 3)}"] for k, (_, ts, _) in enumerate(rows)]
    cb.write_csv(folder / "profiles.csv", ["profile_id", "timestamp", "shaft_load_pct", "input_kw"],
                 [r + [""] for r in rows] + base)
    (folder / "tariffs").mkdir()
    shutil.copy(Path(__file__).resolve().parents[1] / "data" / "tariffs" / "example_tou_kw_reactive_ratchet.toml",
                folder / "tariffs" / "t.toml")
    cb.write_csv(folder / "sites.csv", cb.SITES_HEADER + ["tariff_file", "base_profile_id"],
                 [cb.SITES[0] + ["t.toml", "BASE"]])
    case, problems = load_case(folder)
    assert case is not None, [str(p) for p in problems if p.severity == "error"]
    found = _find(problems, file="sites.csv", column="base_profile_id", severity="warning")
    assert "15-min windows" in found.rule and "60-min intervals" in found.rule


def test_an_hourly_base_load_under_a_quarter_hour_coincident_peak_window_is_warned(tmp_path):
    # as a demand charge's (above): a 15-min peak window on an hourly base load reads the hour that holds it
    folder = cb.write_case(tmp_path / "c")
    rows = [r.split(",") for r in (folder / "profiles.csv").read_text(encoding="utf-8").splitlines()[1:]]
    base = [["BASE", ts, "", "100"] for _, ts, _ in rows]
    cb.write_csv(folder / "profiles.csv", ["profile_id", "timestamp", "shaft_load_pct", "input_kw"],
                 [r + [""] for r in rows] + base)
    (folder / "tariffs").mkdir()
    head = ('[tariff]\nname = "cp (invented)"\ncurrency = "EUR"\ntime_zone = "Europe/Berlin"\n[[periods]]\ncode = "all"\n'
            '[energy]\nprice_per_kwh = { all = 0.1 }\n[[coincident_peak]]\nname = "tx"\nprice_per_kw_month = 5.0\n'
            'times = [2025-01-02T10:00:00]\n')
    cb.write_csv(folder / "sites.csv", cb.SITES_HEADER + ["tariff_file", "base_profile_id"],
                 [cb.SITES[0] + ["t.toml", "BASE"]])
    for window, warned in ((15, True), (60, False)):
        (folder / "tariffs" / "t.toml").write_text(head + f"window_min = {window}\n", encoding="utf-8")
        case, problems = load_case(folder)
        assert case is not None, [str(p) for p in problems if p.severity == "error"]
        found = [p for p in problems if p.column == "base_profile_id" and "coincident-peak charge takes" in p.rule]
        assert bool(found) == warned
        if warned:
            assert "15-min windows" in found[0].rule and "60-min intervals" in found[0].rule


def _problems_with_periods(tmp_path, weekday_rules: str) -> list:
    """The small case's problems with a two-period tariff whose weekday rules are given (weekends off-peak)."""
    folder = cb.write_case(tmp_path / "c")
    (folder / "tariffs").mkdir()
    text = ('[tariff]\nname = "tou (invented)"\ncurrency = "EUR"\ntime_zone = "Europe/Berlin"\n' + weekday_rules
            + '[[periods]]\ncode = "off"\ndays = ["saturday", "sunday"]\nhours = ["00:00-24:00"]\n'
            '[energy]\nprice_per_kwh = { peak = 0.3, off = 0.1 }\n')
    (folder / "tariffs" / "t.toml").write_text(text, encoding="utf-8")
    cb.write_csv(folder / "sites.csv", cb.SITES_HEADER + ["tariff_file"], [cb.SITES[0] + ["t.toml"]])
    case, problems = load_case(folder)
    assert case is not None, [str(p) for p in problems if p.severity == "error"]
    return problems


@pytest.mark.parametrize("peak_hours, off_hours, warned", [('"17:30-20:30"', '"20:30-17:30"', "17:30, 20:30"),
                                                      ('"07:20-23:00"', '"23:00-07:20"', "07:20"),
                                                      ('"17:00-20:00"', '"20:00-17:00"', None)])
def test_a_time_of_use_boundary_between_the_interval_starts_is_warned(tmp_path, peak_hours, off_hours, warned):
    # the small case's profile is hourly (tests/casebuilder.py): a period from 17:30 prices the 17:00 hour wholly in
    # the period before (each interval takes the period in force at its start: docs/tariffs.md)
    problems = _problems_with_periods(tmp_path, f'[[periods]]\ncode = "peak"\ndays = ["weekday"]\nhours = [{peak_hours}]\n'
                                                f'[[periods]]\ncode = "off"\ndays = ["weekday"]\nhours = [{off_hours}]\n')
    found = [p for p in problems if p.file == "tariffs/t.toml" and "between the starts of the case's 60-min" in p.rule]
    if warned is None:
        assert not found
    else:
        assert [p.value for p in found] == [warned]  # one warning for the tariff, each change listed once
        # the resolution the change falls on (07:20 is on no 15-min grid: an internal error before, not a warning)
        assert found[0].column == "periods" and ("30-min" if warned.endswith(":30") else "5-min") in found[0].hint


def test_two_rules_of_one_period_that_meet_off_the_grid_are_no_change(tmp_path):
    # "off" from 00:00 to 06:30 and again from 06:30 to 08:00: the period does not change at 06:30
    problems = _problems_with_periods(tmp_path, '[[periods]]\ncode = "off"\ndays = ["weekday"]\nhours = ["00:00-06:30"]\n'
                                                '[[periods]]\ncode = "off"\ndays = ["weekday"]\nhours = ["06:30-08:00", "20:00-24:00"]\n'
                                                '[[periods]]\ncode = "peak"\ndays = ["weekday"]\nhours = ["08:00-20:00"]\n')
    assert not [p for p in problems if "time-of-use period changes" in p.rule]


def test_tariff_holidays_outside_the_analysis_year_are_warned(tmp_path):
    # the case's profiles are of January 2025 (tests/casebuilder.py); a tariff listing only 2026's holidays bills
    # 2025's as ordinary days
    folder = cb.write_case(tmp_path / "c")
    (folder / "tariffs").mkdir()
    text = (Path(__file__).resolve().parents[1] / "data" / "tariffs" / "example_tou_kw_reactive_ratchet.toml").read_text(
        encoding="utf-8")
    assert "2025-12-25" in text
    (folder / "tariffs" / "t.toml").write_text(text.replace("2025-", "2026-"), encoding="utf-8")
    cb.write_csv(folder / "sites.csv", cb.SITES_HEADER + ["tariff_file"], [cb.SITES[0] + ["t.toml"]])
    case, problems = load_case(folder)
    assert case is not None
    found = _find(problems, file="tariffs/t.toml", column="calendar.holidays", severity="warning")
    assert "analysis year 2025" in found.rule and "2025" in found.hint
    (folder / "tariffs" / "t.toml").write_text(text, encoding="utf-8")
    _, problems = load_case(folder)
    assert not [p for p in problems if p.column == "calendar.holidays"]


def test_coincident_peak_times_outside_the_profiles_are_warned(tmp_path):
    # the case's profiles (tests/casebuilder.py) are extended to the year 2025: 02:00 on 30 March 2025 falls in the
    # hour the clocks skip in Europe/Berlin, so the clause bills nothing; 15 July 2019 is read 6 x 52 weeks later,
    # on Monday 7 July 2025, inside
    folder = cb.write_case(tmp_path / "c")
    (folder / "tariffs").mkdir()
    head = ('[tariff]\nname = "cp (invented)"\ncurrency = "EUR"\ntime_zone = "Europe/Berlin"\n[[periods]]\ncode = "all"\n'
            '[energy]\nprice_per_kwh = { all = 0.1 }\n[[coincident_peak]]\nname = "tx"\nprice_per_kw_month = 5.0\n')
    (folder / "tariffs" / "t.toml").write_text(head + "times = [2025-03-30T02:00:00]\n", encoding="utf-8")
    cb.write_csv(folder / "sites.csv", cb.SITES_HEADER + ["tariff_file"], [cb.SITES[0] + ["t.toml"]])
    case, problems = load_case(folder)
    assert case is not None
    found = _find(problems, file="tariffs/t.toml", column="coincident_peak[1].times", severity="warning")
    assert "it bills nothing and no motor saves on it" in found.rule and "2025-01-01 to 2025-12-31" in found.rule
    (folder / "tariffs" / "t.toml").write_text(head + "times = [2019-07-15T17:00:00]\n", encoding="utf-8")
    _, problems = load_case(folder)
    assert not [p for p in problems if p.column == "coincident_peak[1].times"]


def test_profiles_coarser_than_a_coincident_peak_window_are_warned(tmp_path):
    # the small case's profile LP1 is hourly (tests/casebuilder.py); a 15-min coincident-peak window cannot see
    # within an hour, a 60-min one can
    folder = cb.write_case(tmp_path / "c")
    (folder / "tariffs").mkdir()
    head = ('[tariff]\nname = "cp (invented)"\ncurrency = "EUR"\ntime_zone = "Europe/Berlin"\n[[periods]]\ncode = "all"\n'
            '[energy]\nprice_per_kwh = { all = 0.1 }\n[[coincident_peak]]\nname = "tx"\nprice_per_kw_month = 5.0\n'
            'times = [2025-01-02T10:00:00]\n')
    cb.write_csv(folder / "sites.csv", cb.SITES_HEADER + ["tariff_file"], [cb.SITES[0] + ["t.toml"]])
    (folder / "tariffs" / "t.toml").write_text(head + "window_min = 15\n", encoding="utf-8")
    _, problems = load_case(folder)
    found = _find(problems, file="sites.csv", column="tariff_file", severity="warning")
    assert "coincident-peak charge takes 15-min windows, but 1 motor of the site has 60-min profiles" in found.rule
    (folder / "tariffs" / "t.toml").write_text(head + "window_min = 60\n", encoding="utf-8")
    _, problems = load_case(folder)
    assert not [p for p in problems if "coincident-peak charge takes" in p.rule]


def test_budget_years_past_the_horizon_are_warned(tmp_path):
    # models.plan.plan_beyond_horizon_text: 3 budget years over a 2-year horizon start projects after the study
    from models.case import load_case

    folder = cb.write_case(tmp_path / "case")
    (folder / "finance.toml").write_text("horizon_yr = 2\nbudget_per_yr = [1000, 1000, 1000]\n", encoding="utf-8")
    _, problems = load_case(folder)
    found = [p for p in problems if p.column == "budget_per_yr" and "study horizon is 2 years" in p.rule]
    assert found and found[0].severity == "warning" and "horizon_yr = 3 or more" in found[0].hint


@pytest.mark.parametrize("contracted_kw, warned", [(20_000, True), (14_000, False)])
def test_a_contract_far_above_what_the_site_can_draw_is_warned(tmp_path, contracted_kw, warned):
    # the demo's quarry (KGQ): motors of 4,940.05 kW rated output in all (data/demo/assets.csv) and a base load of
    # 180 kW (data/demo/sites.csv). Hand calculation of the bound: 4,940.05 / 0.7 + 180 = 7,237 kW; twice that is
    # 14,474 kW, so a contract of 20,000 kW is warned and one of 14,000 kW is not
    demo = shutil.copytree(Path(__file__).resolve().parents[1] / "data" / "demo", tmp_path / "demo")
    text = (Path(__file__).resolve().parents[1] / "data" / "tariffs" / "example_contracted_capacity.toml").read_text(
        encoding="utf-8")
    assert "contracted_kw = 900\n" in text
    (demo / "tariffs" / "contract.toml").write_text(text.replace("contracted_kw = 900\n",
                                                                 f"contracted_kw = {contracted_kw}\n"), encoding="utf-8")
    sites = pd.read_csv(demo / "sites.csv", dtype=str, keep_default_na=False)
    sites.loc[sites["site_id"] == "KGQ", "tariff_file"] = "contract.toml"
    sites.to_csv(demo / "sites.csv", index=False)
    case, problems = load_case(demo)
    assert case is not None, [str(p) for p in _errors(problems)]
    found = [p for p in problems if p.severity == "warning" and "books a contract" in p.rule]
    assert bool(found) == warned
    if warned:
        assert found[0].file == "sites.csv" and found[0].column == "tariff_file" and found[0].row == 3
        assert "20,000 kW" in found[0].rule and "about 7,237 kW" in found[0].rule and "base load" in found[0].hint


def _profile_table(frame: pd.DataFrame):
    """A long profile table as read from a Parquet file (typed cells), rows numbered from 2."""
    from models import io as case_io

    return case_io.RawTable("profiles", "profiles.parquet", frame, np.arange(2, len(frame) + 2), {})


def _profiles_both_ways(raw, monkeypatch):
    """_check_profiles with its one-pass reading of the usual profile, and with every profile checked row by row."""
    import models.case as case_module

    quick_problems, slow_problems = [], []
    quick = case_module._check_profiles(raw, "Europe/Berlin", quick_problems)
    with monkeypatch.context() as mp:
        mp.setattr(case_module, "_quick_profiles", lambda *args: [None] * args[-1])
        slow = case_module._check_profiles(raw, "Europe/Berlin", slow_problems)
    return quick, quick_problems, slow, slow_problems


def _parquet_profiles(tmp_path, frame: pd.DataFrame):
    """A long profile table written to Parquet and read back as a case reads it."""
    from models import io as case_io

    path = tmp_path / "profiles.parquet"
    frame.to_parquet(path, index=False)
    raw, problems = case_io.read_parquet_table(path, "profiles")
    assert not problems, [str(p) for p in problems]
    return raw


def test_profile_ids_of_a_parquet_table_are_read_as_cells_are(tmp_path):
    # ids written as categories (a pandas category column) or as text: stripped, an empty id blank (an error), the
    # profiles' stamps unnamed, as from a CSV file
    import models.case as case_module

    stamps = pd.date_range("2025-01-01", periods=48, freq="h", tz="Europe/Berlin")
    for ids in (pd.Categorical([" A "] * 24 + [""] * 2 + ["B"] * 22), [" A "] * 24 + [""] * 2 + ["B"] * 22):
        frame = pd.DataFrame({"profile_id": ids, "timestamp": stamps, "shaft_load_pct": 50.0})
        problems = []
        profiles, _ = case_module._check_profiles(_parquet_profiles(tmp_path, frame), "Europe/Berlin", problems)
        assert list(profiles) == ["A", "B"]
        assert [p.row for p in problems if "'profile_id' is required" in p.rule] == [26, 27]
        assert profiles["A"].index.name is None and profiles["A"].name == "shaft_load_pct"


def test_an_all_blank_value_column_is_left_out_only_beside_the_other_quantity(tmp_path):
    from models import io as case_io

    stamps = pd.date_range("2025-01-01", periods=48, freq="h", tz="Europe/Berlin")
    both = pd.DataFrame({"profile_id": "A", "timestamp": stamps, "shaft_load_pct": 50.0, "input_kw": np.nan})
    assert list(_parquet_profiles(tmp_path, both).frame.columns) == ["profile_id", "timestamp", "shaft_load_pct"]
    # two headers for one quantity (the column and its alias): both kept, for the check to name the duplicate
    alias = pd.DataFrame({"profile_id": "A", "timestamp": stamps, "shaft_load_pct": np.nan, "load": 50.0})
    path = tmp_path / "alias.parquet"
    alias.to_parquet(path, index=False)
    raw, problems = case_io.read_parquet_table(path, "profiles")
    assert len(raw.frame.columns) == 4 and any("appears twice" in p.rule for p in problems)


def test_the_usual_profile_read_in_one_pass_gives_what_the_row_by_row_checks_give(monkeypatch, tmp_path):
    # profiles of every kind side by side: usual ones (hourly and 15-min, in load and in kW, one of fractions, one
    # short, one stamped at interval ends) and ones the row-by-row checks must take (a gap, a repeat, rows out of
    # order, a negative value, a blank value); the profiles, their summary and the problems are the same both ways
    year = pd.date_range("2025-01-01", "2026-01-01", freq="h", inclusive="left", tz="Europe/Berlin")
    quarter = pd.date_range("2025-03-01", "2025-03-08", freq="15min", inclusive="left", tz="Europe/Berlin")
    rng = np.random.default_rng(5)
    parts = []

    def add(pid, stamps, pct=None, kw=None):
        n = len(stamps)
        parts.append(pd.DataFrame({"profile_id": pid, "timestamp": stamps,
                                   "shaft_load_pct": np.full(n, np.nan) if pct is None else pct,
                                   "input_kw": np.full(n, np.nan) if kw is None else kw}))

    add("YEAR", year, pct=rng.uniform(20, 90, len(year)))
    add("QUARTER", quarter, pct=rng.uniform(20, 90, len(quarter)))
    add("KW", year, kw=rng.uniform(5, 50, len(year)))
    add("FRACTIONS", year, pct=rng.uniform(0.1, 0.9, len(year)))
    add("ENDS", year + pd.Timedelta(hours=1), pct=rng.uniform(20, 90, len(year)))
    add("GAP", year.delete(slice(100, 110)), pct=rng.uniform(20, 90, len(year) - 10))
    add("REPEAT", year.insert(50, year[50]), pct=rng.uniform(20, 90, len(year) + 1))
    add("NEGATIVE", year, pct=np.r_[-5.0, rng.uniform(20, 90, len(year) - 1)])
    add("BLANK", year, pct=np.r_[np.nan, rng.uniform(20, 90, len(year) - 1)])
    shuffled = year[rng.permutation(len(year))]
    add("SHUFFLED", shuffled, pct=rng.uniform(20, 90, len(year)))
    frame = pd.concat(parts, ignore_index=True)
    quick, quick_problems, slow, slow_problems = _profiles_both_ways(_profile_table(frame), monkeypatch)
    # the same through a Parquet file, as a case reads it (ids as categories, typed stamps)
    parquet = _profiles_both_ways(_parquet_profiles(tmp_path, frame), monkeypatch)
    assert [str(p) for p in parquet[1]] == [str(p) for p in parquet[3]] == [str(p) for p in slow_problems]
    for pid, series in slow[0].items():
        pd.testing.assert_series_equal(parquet[0][0][pid], series, check_exact=True)
        pd.testing.assert_series_equal(parquet[2][0][pid], series, check_exact=True)
    assert [str(p) for p in quick_problems] == [str(p) for p in slow_problems]
    assert any("never exceeds" in p.rule for p in quick_problems)  # (the fractions are refused)
    assert any("ends of the intervals" in p.rule for p in quick_problems)
    assert any("less than a year" in p.rule for p in quick_problems)
    assert list(quick[0]) == list(slow[0])
    for pid, series in slow[0].items():
        pd.testing.assert_series_equal(quick[0][pid], series, check_exact=True)
    pd.testing.assert_frame_equal(quick[1], slow[1])
    # the usual ones were read in one pass, the others row by row
    import models.case as case_module

    codes, uniques = case_module._profile_ids(frame["profile_id"])
    read_quick = [u for u, q in zip(uniques, case_module._quick_profiles(
        ["shaft_load_pct", "input_kw"],
        {c: frame[c].to_numpy(dtype=float) for c in ("shaft_load_pct", "input_kw")},
        pd.DatetimeIndex(frame["timestamp"]).as_unit("us"), True,
        np.searchsorted(codes, np.arange(len(uniques) + 1)), len(uniques))) if q is not None]
    assert read_quick == ["YEAR", "QUARTER", "KW", "FRACTIONS", "ENDS"]


def test_profiles_on_one_grid_share_one_copy_of_their_timestamps(monkeypatch, tmp_path):
    # three usual profiles on the same hourly year share one index, its own memory (not a view of the table's
    # timestamp column, which is then let go); a fourth on another grid (15-min) has its own; the values stay
    import gc
    import weakref

    import models.case as case_module

    year = pd.date_range("2025-01-01", "2026-01-01", freq="h", inclusive="left", tz="Europe/Berlin")
    quarter = pd.date_range("2025-03-01", "2025-03-08", freq="15min", inclusive="left", tz="Europe/Berlin")
    parts = [pd.DataFrame({"profile_id": pid, "timestamp": year, "shaft_load_pct": 10.0 + k})
             for k, pid in enumerate(("A", "B", "C"))]
    parts.append(pd.DataFrame({"profile_id": "Q", "timestamp": quarter, "shaft_load_pct": 50.0}))
    raw = _parquet_profiles(tmp_path, pd.concat(parts, ignore_index=True))
    column = weakref.ref(raw.frame["timestamp"].array._ndarray.base if raw.frame["timestamp"].array._ndarray.base
                         is not None else raw.frame["timestamp"].array._ndarray)
    profiles, _ = case_module._check_profiles(raw, "Europe/Berlin", [])
    assert profiles["A"].index is profiles["B"].index is profiles["C"].index
    assert profiles["Q"].index is not profiles["A"].index and len(profiles["Q"]) == 7 * 96
    assert profiles["A"].index.equals(year) and profiles["Q"].index.equals(quarter)
    assert [float(profiles[p].iloc[0]) for p in "ABCQ"] == [10.0, 11.0, 12.0, 50.0]
    del raw
    gc.collect()
    assert column() is None  # the table's timestamps are not held by the profiles


def test_each_profiles_rows_from_its_bounds():
    import models.case as case_module

    bounds = np.array([0, 3, 3, 7])  # three profiles: rows 0-2, none, 3-6
    in_order = case_module._ProfileRows(bounds, None)
    assert len(in_order) == 3
    assert [list(r) for r in in_order] == [[0, 1, 2], [], [3, 4, 5, 6]]
    assert list(in_order[-1]) == [3, 4, 5, 6] and [list(r) for r in in_order[1:]] == [[], [3, 4, 5, 6]]
    order = np.array([6, 0, 2, 1, 3, 4, 5])  # the rows sorted by profile
    assert [list(r) for r in case_module._ProfileRows(bounds, order)] == [[6, 0, 2], [], [1, 3, 4, 5]]
    with pytest.raises(IndexError):
        in_order[3]


def test_ids_read_as_categories_in_order_are_taken_as_they_are():
    # a grouped table whose ids are written once each, in order: its codes are the ids' own (no copy); any other
    # (an id out of order, one stripped to equal another, a blank) goes through the general path, as before
    import models.case as case_module

    column = pd.Series(pd.Categorical(["A"] * 3 + ["B"] * 2 + ["C"] * 4))
    codes, ids = case_module._profile_ids(column)
    assert np.shares_memory(codes, column.array.codes) and list(ids) == ["A", "B", "C"]
    assert list(codes) == [0, 0, 0, 1, 1, 2, 2, 2, 2]
    for cells, want_codes, want_ids in (
            (["B"] * 2 + ["A"] * 3, [0, 0, 1, 1, 1], ["B", "A"]),
            (["A", "A", " A", "B"], [0, 0, 0, 1], ["A", "B"]),
            (["A", "A", "", "B"], [0, 0, -1, 1], ["A", "B"])):
        codes, ids = case_module._profile_ids(pd.Series(pd.Categorical(cells)))
        assert list(codes) == want_codes and list(ids) == want_ids


def test_a_parquet_tables_unknown_and_empty_columns_are_not_read(tmp_path, monkeypatch):
    # a metered export with a meter serial and a unit beside its values, and the other quantity's column empty:
    # only the known columns are read, the unknown ones are named in a warning as before, and the empty one is
    # left out from the footer's statistics; written without statistics, it is read and then dropped: the same
    import pyarrow.parquet as pq

    import models.case as case_module
    from models import io as case_io

    stamps = pd.date_range("2025-01-01", periods=48, freq="h", tz="Europe/Berlin")
    frame = pd.DataFrame({"profile_id": "P1", "meter": "M-001", "timestamp": stamps, "shaft_load_pct": 50.0,
                          "input_kw": np.nan, "unit": "%"})
    read = []
    real = pq.ParquetFile.iter_batches  # (the table is read batch by batch: models.io._parquet_stream)
    monkeypatch.setattr(pq.ParquetFile, "iter_batches", lambda self, *a, **k: read.append(k.get("columns")) or real(self, *a, **k))
    frames = []
    for statistics in (True, False):
        path = tmp_path / f"profiles_{statistics}.parquet"
        frame.to_parquet(path, index=False, write_statistics=statistics)
        raw, problems = case_io.read_parquet_table(path, "profiles")
        assert not problems
        assert list(raw.frame.columns) == ["profile_id", "timestamp", "shaft_load_pct"]
        assert raw.unread == ("meter", "unit")
        warned = []
        profiles, _ = case_module._check_profiles(raw, "Europe/Berlin", warned)
        assert [p.rule for p in warned][:2] == ["unknown column 'meter' was ignored", "unknown column 'unit' was ignored"]
        assert list(profiles) == ["P1"]
        frames.append(raw.frame)
    assert read == [["profile_id", "timestamp", "shaft_load_pct"], ["profile_id", "timestamp", "shaft_load_pct", "input_kw"]]
    pd.testing.assert_frame_equal(frames[0], frames[1])


def test_a_parquet_column_in_watts_is_still_named(tmp_path):
    from models import io as case_io

    stamps = pd.date_range("2025-01-01", periods=48, freq="h", tz="Europe/Berlin")
    path = tmp_path / "profiles.parquet"
    pd.DataFrame({"profile_id": "P1", "timestamp": stamps, "input_w": 5000.0}).to_parquet(path, index=False)
    _raw, problems = case_io.read_parquet_table(path, "profiles")
    assert any("is in W" in p.rule for p in problems)


def _whole_table_frame(path, plan):
    """A Parquet table's frame as pyarrow converts the whole table (the reference the batch-by-batch reading must
    give: pyarrow's own ``Table.to_pandas``)."""
    import pyarrow.parquet as pq

    from models import io as case_io

    with open(path, "rb") as handle:
        arrow = pq.read_table(handle, columns=plan.columns, read_dictionary=plan.ids or None)
    frame = arrow.to_pandas(types_mapper=case_io._pandas_text_type)
    if len(plan.quantities) == 2 and all(q in frame.columns for q in plan.quantities) and len(frame):
        empty = [q for q in plan.quantities if frame[q].isna().all()]
        if len(empty) == 1:
            frame = frame.drop(columns=empty)
    return frame


def _metered(n_profiles: int, n_steps: int, seed: int = 0) -> pd.DataFrame:
    """A long profile table of ``n_profiles`` profiles, written profile by profile (invented values)."""
    rng = np.random.default_rng(seed)
    stamps = pd.date_range("2025-03-29", periods=n_steps, freq="15min", tz="Europe/Berlin")  # (across a DST change)
    return pd.DataFrame({"profile_id": np.repeat([f"M{k:05d}" for k in range(n_profiles)], n_steps),
                         "timestamp": np.tile(stamps, n_profiles),
                         "shaft_load_pct": rng.uniform(0.0, 100.0, n_profiles * n_steps), "input_kw": np.nan})


class TestParquetReadByBatches:
    """A long profile table of numbers, timestamps and ids is read batch by batch into its columns; the frame must
    be the one pyarrow's conversion of the whole table gives, whatever the batches and row groups."""

    @pytest.mark.parametrize("case", ["usual", "shuffled ids", "blank ids", "naive ms", "ns float32", "integers",
                                      "blank values", "blank stamps", "many ids", "both quantities", "range index",
                                      "no rows", "UTC"])
    def test_the_frame_is_the_whole_tables(self, tmp_path, monkeypatch, case):
        import pyarrow.parquet as pq

        from models import io as case_io

        frame = _metered(5, 40)
        options = {"index": False, "row_group_size": 64}
        if case == "shuffled ids":  # (each row group's dictionary brings the ids in another order)
            frame = frame.sample(frac=1.0, random_state=3).reset_index(drop=True)
        elif case == "blank ids":
            frame.loc[[3, 77, 150], "profile_id"] = None
            frame.loc[[4], "profile_id"] = ""
        elif case == "naive ms":
            frame["timestamp"] = frame["timestamp"].dt.tz_localize(None).astype("datetime64[ms]")
        elif case == "ns float32":
            frame["timestamp"] = frame["timestamp"].astype("datetime64[ns, Europe/Berlin]")
            frame["shaft_load_pct"] = frame["shaft_load_pct"].astype(np.float32)
        elif case == "integers":
            frame["shaft_load_pct"] = frame["shaft_load_pct"].round().astype(np.int16)
        elif case == "blank values":
            frame.loc[[0, 99, 199], "shaft_load_pct"] = np.nan
        elif case == "blank stamps":
            frame.loc[[5, 123], "timestamp"] = pd.NaT
        elif case == "many ids":  # (more than 127 and 32,767 ids: the codes widen from 1 to 2 to 4 bytes as they come)
            frame = _metered(33_000, 1)
            options["row_group_size"] = 10_000
        elif case == "both quantities":
            frame["input_kw"] = frame["shaft_load_pct"] / 10.0
        elif case == "range index":
            options["index"] = None  # (pandas keeps a range index in its metadata only)
        elif case == "no rows":
            frame = frame.iloc[:0]
        elif case == "UTC":
            frame["timestamp"] = frame["timestamp"].dt.tz_convert("UTC")
        path = tmp_path / "profiles.parquet"
        frame.to_parquet(path, **options)
        monkeypatch.setattr(case_io, "PARQUET_BATCH_ROWS", 50)  # (batches across row groups)
        plan = case_io._parquet_plan(path, "profiles")
        assert plan.streamed
        got = case_io._parquet_stream(path, plan)
        want = _whole_table_frame(path, plan)
        pd.testing.assert_frame_equal(got, want)
        assert list(got.dtypes) == list(want.dtypes)
        codes = got["profile_id"].array.codes
        assert codes.dtype == want["profile_id"].array.codes.dtype
        assert got["profile_id"].cat.categories.dtype == want["profile_id"].cat.categories.dtype
        assert got["timestamp"].dtype == want["timestamp"].dtype and str(got["timestamp"].dt.tz) == str(want["timestamp"].dt.tz)
        assert pq.ParquetFile(path).metadata.num_row_groups > 1 or case == "no rows"
        if case == "many ids":
            assert codes.dtype == np.int32 and len(got["profile_id"].cat.categories) == 33_000

    def test_the_codes_and_values_are_not_copied_into_the_frame(self, tmp_path):
        # the columns made for the whole table are the frame's own (no second copy of hundreds of millions of rows)
        from models import io as case_io

        path = tmp_path / "profiles.parquet"
        _metered(3, 100).to_parquet(path, index=False, row_group_size=64)
        made = {}
        real_from_codes = pd.Categorical.from_codes

        def from_codes(codes, *a, **k):
            made["codes"] = codes
            return real_from_codes(codes, *a, **k)

        import unittest.mock

        with unittest.mock.patch.object(pd.Categorical, "from_codes", from_codes):
            got = case_io._parquet_stream(path, case_io._parquet_plan(path, "profiles"))
        assert np.shares_memory(got["profile_id"].array.codes, made["codes"])

    @pytest.mark.parametrize("case", ["saved index", "text stamps", "nullable integers", "half floats",
                                      "zone in the metadata only", "zone in the metadata only (int96)"])
    def test_other_tables_are_read_whole(self, tmp_path, case):
        from models import io as case_io

        frame = _metered(2, 30).drop(columns="input_kw")
        options = {"index": False}
        if case == "zone in the metadata only":  # (stored as UTC wall clocks, the zone named in pandas' metadata)
            options["flavor"] = "spark"
        elif case == "zone in the metadata only (int96)":
            options["use_deprecated_int96_timestamps"] = True
        if case == "saved index":
            frame = frame.set_index("timestamp")
            options["index"] = True
        elif case == "text stamps":
            frame["timestamp"] = frame["timestamp"].dt.strftime("%Y-%m-%d %H:%M")
        elif case == "nullable integers":
            frame["shaft_load_pct"] = pd.array([50, None] * 30, dtype="Int64")
        elif case == "half floats":
            frame["shaft_load_pct"] = frame["shaft_load_pct"].astype(np.float16)
        path = tmp_path / "profiles.parquet"
        frame.to_parquet(path, **options)
        plan = case_io._parquet_plan(path, "profiles")
        assert not plan.streamed
        assert plan.needed_bytes >= len(frame) * case_io.PARQUET_WHOLE_ROW_BYTES
        raw, problems = case_io.read_parquet_table(path, "profiles")
        assert raw.readable and "timestamp" in raw.frame.columns and len(raw.frame) == len(frame)
        if case.startswith("zone"):  # (the instants and zone as written, not the stored wall clocks)
            assert str(raw.frame["timestamp"].dt.tz) == "Europe/Berlin"
            assert (raw.frame["timestamp"].to_numpy() == frame["timestamp"].to_numpy()).all()

    def test_an_other_quantity_column_of_no_type_is_left_unread(self, tmp_path):
        # a column of None only (pyarrow's null type, written without statistics) is the other quantity's empty
        # column as a float column of blanks is: not read, and the table is read batch by batch
        from models import io as case_io

        frame = _metered(2, 30)
        frame["input_kw"] = None
        path = tmp_path / "profiles.parquet"
        frame.to_parquet(path, index=False)
        plan = case_io._parquet_plan(path, "profiles")
        assert plan.streamed and plan.columns == ["profile_id", "timestamp", "shaft_load_pct"]
        raw, problems = case_io.read_parquet_table(path, "profiles")
        assert not problems and list(raw.frame.columns) == ["profile_id", "timestamp", "shaft_load_pct"]

    def test_timestamps_without_a_zone_are_counted_more(self, tmp_path):
        # local times are copied and placed in the case's zone while checked: 24 bytes a row more than zoned ones
        # (PARQUET_NAIVE_STAMP_BYTES; hand calculation: 48 rows x (30 + 24) bytes)
        from models import io as case_io

        stamps = pd.date_range("2025-01-01", periods=48, freq="h")
        path = tmp_path / "profiles.parquet"
        pd.DataFrame({"profile_id": "P1", "timestamp": stamps, "shaft_load_pct": 50.0}).to_parquet(path, index=False)
        plan = case_io._parquet_plan(path, "profiles")
        assert plan.streamed and plan.needed_bytes == 48 * (30 + 24)

    def test_a_file_shorter_than_its_footer_is_damaged(self, tmp_path, monkeypatch):
        # the footer promises more rows than the batches bring: the file cannot be read, as any damaged one
        import pyarrow.parquet as pq

        from models import io as case_io

        path = tmp_path / "profiles.parquet"
        _metered(2, 30).to_parquet(path, index=False)
        real = pq.ParquetFile.iter_batches
        monkeypatch.setattr(pq.ParquetFile, "iter_batches", lambda self, *a, **k: iter(list(real(self, *a, **k))[:-1]))
        monkeypatch.setattr(case_io, "PARQUET_BATCH_ROWS", 16)
        raw, problems = case_io.read_parquet_table(path, "profiles")
        assert not raw.readable and "cannot be read as Parquet" in problems[0].rule


class TestRowNumbers:
    """A Parquet table's row numbers, made when asked for, index as numpy.arange(2, n + 2) does (numpy as
    reference)."""

    @pytest.mark.parametrize("key", [0, 9, -1, -10, np.int32(4), slice(2, 7), slice(None, None, -3),
                                     [0, 3, 3, -2], np.array([], dtype=np.int64), np.arange(10) % 3 == 0])
    def test_indexing_as_an_array(self, key):
        from models.io import RowNumbers

        rows, want = RowNumbers(2, 10), np.arange(2, 12)
        got = rows[key]
        if np.ndim(want[key]) == 0:
            assert isinstance(got, int) and got == want[key]
        else:
            np.testing.assert_array_equal(got, want[key])
        assert len(rows) == 10
        np.testing.assert_array_equal(np.asarray(rows), want)

    @pytest.mark.parametrize("key", [10, -11, [0, 10], np.ones(9, dtype=bool), np.array([1.0, 2.0])])
    def test_out_of_range_is_an_index_error(self, key):
        from models.io import RowNumbers

        with pytest.raises(IndexError):
            RowNumbers(2, 10)[key]


class TestSpeedControlNeedsADrive:
    """The speed remedy "speed_control" holds the speed with a drive: only the drive technologies have one. A
    line-fed new machine given it would be a drive with no cost, no losses and no power factor of its own."""

    def test_a_line_fed_option_with_speed_control_is_refused(self, tmp_path):
        folder = cb.write_case(tmp_path / "c")
        shipped = (ROOT / "data" / "defaults" / "options.csv").read_text(encoding="utf-8").splitlines()
        rows = [line if not line.startswith("lspm_trim,") else line.replace(",trim_or_pulley,", ",speed_control,", 1)
                for line in shipped]
        assert rows != shipped  # the shipped catalogue has a line-start PM row with an impeller trim
        (folder / "options.csv").write_text("\n".join(rows) + "\n", encoding="utf-8")
        case, problems = load_case(folder)
        assert case is None
        found = _find(problems, file="options.csv", column="speed_remedy", text="runs on the line")
        assert "line-start PM motor" in found.rule and "pm_drive" in found.hint

    def test_the_shipped_catalogue_gives_speed_control_to_drives_only(self):
        shipped = pd.read_csv(ROOT / "data" / "defaults" / "options.csv", comment="#")
        with_control = set(shipped.loc[shipped["speed_remedy"] == "speed_control", "technology"])
        assert with_control and with_control <= {"pm_drive", "reluctance_drive", "add_drive"}


def test_no_line_fed_synchronous_machine_where_a_drive_sets_the_speed():
    # Pumps on a drive: a line-start PM (55 kW, within its catalogue range) or a wound-field machine (630 kW)
    # on the line would lose the speed control; the same pumps throttled are offered both.
    from models.options import applicability

    case, _ = load_case(ROOT / "data" / "demo")
    sizes, control = [55.0, 55.0, 630.0, 630.0], ["drive", "throttle"] * 2
    assets = pd.DataFrame({"rated_p_kw": sizes, "poles": [4] * 4, "application": ["pump"] * 4,
                           "load_type": ["centrifugal"] * 4, "speed_control": control,
                           "machine_type": ["induction"] * 4, "rated_v_v": [400.0, 400.0, 690.0, 690.0]})
    applies, reason = applicability(case.options, assets, "EU")
    tech = case.options["technology"].to_numpy(dtype=object)
    for t, (on_drive, throttled) in (("line_start_pm", (0, 1)), ("wound_field", (2, 3))):
        cols = np.flatnonzero(tech == t)
        assert len(cols) and applies[throttled, cols].any(), t
        assert not applies[on_drive, cols].any(), t
        assert all(r.startswith("speed is drive-controlled") for r in reason[on_drive, cols]), reason[on_drive, cols]
    pm_drive = np.flatnonzero(tech == "pm_drive")
    assert applies[0, pm_drive].all()  # the synchronous choice on a drive


def test_no_drive_on_a_constant_torque_load_switched_on_and_off():
    # a drive on a constant-torque load that runs at fixed speed, continuously or on and off, only adds losses; a
    # pump switched on and off is offered one
    from models.options import applicability

    case, _ = load_case(ROOT / "data" / "demo")
    assets = pd.DataFrame({"rated_p_kw": [30.0] * 3, "poles": [4] * 3, "application": ["conveyor", "conveyor", "pump"],
                           "load_type": ["constant_torque", "constant_torque", "variable_torque"],
                           "speed_control": ["fixed", "on_off", "on_off"], "machine_type": ["induction"] * 3,
                           "rated_v_v": [400.0] * 3})
    options = case.options.copy()
    options.loc[options["technology"] == "add_drive", "applications"] = ""  # offered for every application
    applies, reason = applicability(options, assets, "EU")
    cols = np.flatnonzero(options["technology"].to_numpy(dtype=object) == "add_drive")
    assert len(cols) and not applies[:2, cols].any() and applies[2, cols].all()
    assert all(r == "a drive on a fixed-speed constant-torque load only adds losses" for r in reason[:2, cols].ravel())


def test_a_misspelt_finance_table_is_refused_not_ignored(tmp_path):
    # [financ] holding the case's keys would leave every assumption at its default (no budget limit among them):
    # refused, naming the table
    from models.case import load_case

    folder = cb.write_case(tmp_path / "case")
    (folder / "finance.toml").write_text("[financ]\ndiscount_rate_frac = 0.06\nbudget_per_yr = [1000]\n", encoding="utf-8")
    case, problems = load_case(folder)
    found = [p for p in problems if p.severity == "error" and p.column == "financ"]
    assert case is None and found and "unknown table" in found[0].rule and "[finance]" in found[0].hint


@pytest.mark.parametrize("text, rule", [
    ("budget_per_yr = [" + ", ".join(["1000"] * 101) + "]\n", "has 101 plan years: at most 100"),
    ("discount_rate_frac = -0.99\n", "must be above -0.98"),
])
def test_finance_values_no_run_can_use_are_refused_when_read(tmp_path, text, rule):
    # a budget of more plan years than the longest horizon (100), and a discount rate whose uncertainty draws
    # (2 points either side) reach -100 %: refused by the case check, not found out by the run
    from models.case import load_case

    folder = cb.write_case(tmp_path / "case")
    (folder / "finance.toml").write_text(text, encoding="utf-8")
    case, problems = load_case(folder)
    assert case is None and any(p.severity == "error" and rule in p.rule for p in problems), [str(p) for p in problems]


@pytest.mark.parametrize("date", ["9999-12-31", "1900-01-01"])
def test_a_purchase_date_far_from_any_rule_is_refused(tmp_path, date):
    # the efficiency rules are read by the purchase date; a date in the year 9999 overflowed the calendar
    # (an internal error before), one in 1900 is a slip of the keyboard: both refused with the key named
    from models.case import load_case

    folder = cb.write_case(tmp_path / "case")
    toml = folder / "case.toml"
    toml.write_text(toml.read_text(encoding="utf-8") + f'purchase_date = "{date}"\n', encoding="utf-8")
    case, problems = load_case(folder)
    found = [p for p in problems if p.column == "purchase_date" and p.severity == "error"]
    assert case is None and found and "between 1990 and 2100" in found[0].rule
    assert not any("internal error" in p.rule for p in problems)


def test_load_data_that_cannot_count_is_named(tmp_path):
    # P1 has a profile and hours beside it (the hours are not used); F1 runs 0 hours a year (nothing to save):
    # each is warned with the column named (tests/casebuilder.py: P1 on profile LP1, F1 on 6,000 h at 60 %)
    from models.case import load_case

    assets = [list(row) for row in cb.ASSETS]
    assets[0][16] = "4000"  # P1: operating_h_per_yr beside its profile
    assets[1][16] = "0"  # F1: never runs
    case, problems = load_case(cb.write_case(tmp_path / "case", assets=assets))
    assert case is not None
    warned = {(p.row, p.column): p.rule for p in problems if p.severity == "warning" and p.file == "assets.csv"}
    assert "is not used: the profile LP1 sets the load and the hours" in warned[(2, "operating_h_per_yr")]
    assert "the motor never runs (0)" in warned[(3, "operating_h_per_yr")]


def test_a_site_without_motors_is_named(tmp_path):
    # a second site in sites.csv that no motor of the register names (tests/casebuilder.py: every motor at S1)
    from models.case import load_case

    folder = cb.write_case(tmp_path / "case", sites=cb.SITES + [["S2", "Empty works", "20", "0.9"]])
    case, problems = load_case(folder)
    found = [p for p in problems if p.file == "sites.csv" and p.column == "site_id" and p.severity == "warning"]
    assert case is not None and len(found) == 1 and found[0].value == "S2" and "nothing is compared" in found[0].rule


def test_a_catalogue_row_s_unknown_hazardous_area_is_refused(tmp_path):
    # a column added to the shipped catalogue: a known class is read, an unknown one names the row and the classes
    folder = cb.write_case(tmp_path / "c")
    lines = (ROOT / "data" / "defaults" / "options.csv").read_text(encoding="utf-8").splitlines()
    head = next(k for k, line in enumerate(lines) if line.startswith("option_id,"))
    rows = lines[:head] + [lines[head] + ",hazardous_areas"] + [
        line + (",zone_1|zone_9" if line.startswith("ie4,") else ",Zone 1 | Class I Div 2" if line.startswith("ie3,")
                else ",")
        for line in lines[head + 1:] if line.strip()]
    (folder / "options.csv").write_text("\n".join(rows) + "\n", encoding="utf-8")
    case, problems = load_case(folder)
    assert case is None
    found = _find(problems, file="options.csv", column="hazardous_areas", text="unknown hazardous-area class")
    assert "zone_9" in found.rule and "zone_2" in found.hint
    # the register's own spellings are read ("Zone 1 | Class I Div 2"): only the ie4 row is refused
    assert [p.value for p in problems if p.column == "hazardous_areas" and p.severity == "error"] == ["zone_1|zone_9"]
