"""Malformed input: every bad file ends in a problem list (or a flagged repair), never a traceback.

Each corpus entry of ``tests/malformed/`` (see its README) is laid over the valid small case of
``casebuilder`` in a temporary folder and loaded with :func:`models.case.load_case`. Each test checks
that no exception escapes, that the case is accepted or refused as expected, that the problem list
names the file, row, column and rule (and the hint where the hint is the point), and that every input
file is byte-identical afterwards. Workbook defects are built at test time from the valid workbook;
the 50 MB profile is generated in ``tmp_path``. Row numbers are as a spreadsheet shows them: the
header is row 1, so P1, F1 and C1 of the small case are rows 2, 3 and 4.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import io
import json
import os
import shutil
import subprocess
import sys
import textwrap
import time
import zipfile
from dataclasses import dataclass
from pathlib import Path

import pytest
from numpy.testing import assert_allclose

import casebuilder as cb
from drivecase.cli import main
from models.case import load_case

MALFORMED = Path(__file__).resolve().parent / "malformed"
sys.path.insert(0, str(MALFORMED))
import make_corpus  # noqa: E402

ANY = object()  # a column or row the expectation does not pin down


@dataclass(frozen=True)
class Expect:
    """One problem that must be in the list."""

    severity: str
    file: str
    row: object
    column: object
    rule: str
    hint: str = ""

    def matches(self, problem) -> bool:
        return (problem.severity == self.severity and problem.file == self.file
                and (self.row is ANY or problem.row == self.row)
                and (self.column is ANY or problem.column == self.column)
                and self.rule in problem.rule and self.hint in problem.hint)


def E(file, row, column, rule, hint=""):  # noqa: N802 - short constructors keep the table readable
    return Expect("error", file, row, column, rule, hint)


def W(file, row, column, rule, hint=""):  # noqa: N802
    return Expect("warning", file, row, column, rule, hint)


#: entry -> (the case loads, problems that must be reported). Rows and columns are those of the entry's
#: files as written by tests/malformed/make_corpus.py.
CORPUS: dict[str, tuple[bool, tuple[Expect, ...]]] = {
    # wrong types, renamed and missing columns
    "wrong_types": (False, (E("assets.csv", 2, "poles", "must be a number"),
                            E("assets.csv", 3, "rated_p_kw", "must be a number"),
                            E("assets.csv", 4, "rewind_count", "whole number"))),
    "missing_required_column": (False, (E("assets.csv", None, "poles", "required column 'poles' is missing"),)),
    "misspelt_required_column": (False, (E("assets.csv", None, "poles", "required column", "'Pols' was not recognised"),
                                         W("assets.csv", None, "Pols", "unknown column"))),
    "renamed_columns_aliases": (True, ()),
    "header_case_and_spaces": (True, ()),
    "duplicate_column": (False, (E("sites.csv", 1, "site", "column 'site_id' appears twice"),)),
    # units off by 1000
    "rating_in_watts": (False, (E("assets.csv", 4, "rated_p_kw", "must lie between", "W rather than kW"),)),
    "rating_in_watts_within_range": (False, (E("assets.csv", 3, "rated_p_kw", "would draw about", "W rather than kW"),)),
    "rating_header_in_watts": (False, (E("assets.csv", 1, "Rated power (W)", "is in W", "divide the values by 1000"),)),
    "voltage_in_kilovolts": (False, (E("assets.csv", 2, "rated_v_v", "must lie between", "kV rather than V"),)),
    "input_profile_in_watts": (False, (E("assets.csv", 2, "profile_id", "above 125 %", "W instead of kW"),)),
    "load_as_fraction": (False, (E("assets.csv", 3, "mean_load_pct", "implausibly low", "fraction"),
                                 E("profiles.csv", 2, "shaft_load_pct", "never exceeds", "fractions"))),
    # number formats and separators
    "semicolons_decimal_commas": (True, (W("assets.csv", None, None, "non-comma delimiter"),
                                         W("assets.csv", 3, "rated_p_kw", "decimal comma"),
                                         W("assets.csv", 3, "rated_power_factor", "decimal comma"))),
    "thousands_dot_decimal_comma": (True, (W("assets.csv", 3, "operating_h_per_yr", "thousands separator"),)),
    "ambiguous_thousands_comma": (False, (E("assets.csv", 3, "operating_h_per_yr", "ambiguous"),)),
    "non_finite_numbers": (False, (E("assets.csv", 2, "rated_p_kw", "not a finite number"),
                                   E("assets.csv", 3, "rated_p_kw", "not a finite number"),
                                   E("assets.csv", 4, "rated_v_v", "not a finite number"))),
    "spreadsheet_error_values": (False, (E("assets.csv", 3, "rated_power_factor", "#DIV/0!"),
                                         E("assets.csv", 3, "rated_efficiency_pct", "#N/A"))),
    # encodings
    "utf8_bom": (True, ()),
    "windows_1252": (True, (W("assets.csv", None, None, "read as Windows-1252"),)),
    "latin_1": (True, (W("assets.csv", None, None, "not UTF-8"),)),
    "utf16_bom": (True, (W("assets.csv", None, None, "UTF-16"),)),
    "utf16_without_bom": (True, (W("assets.csv", None, None, "UTF-16 without a byte-order mark"),)),
    "crlf_line_ends": (True, ()),
    "cr_line_ends": (True, ()),
    # empty and broken files
    "zero_byte_file": (False, (E("sites.csv", None, None, "empty"),)),
    "blank_lines_only": (False, (E("assets.csv", None, None, "empty"),)),
    "comments_only": (False, (E("assets.csv", None, None, "empty"),)),
    "header_only_register": (False, (E("assets.csv", None, None, "no rows"),)),
    "header_only_sites": (False, (E("sites.csv", None, None, "no rows"),)),
    "stray_extra_cell": (False, (E("assets.csv", 3, "(no header, column 20)", "20 cells but the header has 19"),)),
    "trailing_empty_columns": (True, ()),
    "quote_left_open": (False, (E("assets.csv", 2, None, "never closed"),)),
    "quote_open_swallows_rows": (False, (E("assets.csv", 2, None, "swallows what look like rows", "quote"),)),
    "binary_garbage": (False, (E("assets.csv", None, None, "binary data"),)),
    "workbook_renamed_csv": (False, (E("assets.csv", None, None, "zip archive", "workbook"),)),
    "nul_bytes_in_text": (False, (E("assets.csv", None, None, "binary data"),)),
    "damaged_parquet": (False, (E("profiles.parquet", None, None, "cannot be read as Parquet"),)),
    "csv_and_parquet_both": (False, (E("profiles.csv", None, None, "both profiles.csv and profiles.parquet"),)),
    "unknown_files_in_folder": (True, (W("asset.csv", None, None, "not part of the case format", "did you mean assets.csv"),)),
    "upper_case_file_names": (True, ()),
    # timestamps (Europe/Berlin; EU summer-time rule, Directive 2000/84/EC)
    "dst_spring_gap": (False, (E("profiles.csv", 4, "timestamp", "does not exist"),)),
    "dst_autumn_hour_once": (False, (E("profiles.csv", 4, "timestamp", "occurs twice"),)),
    "dst_autumn_hour_twice_in_order": (True, ()),
    "mixed_offsets": (True, ()),
    "duplicate_timestamps": (False, (E("profiles.csv", 5, "timestamp", "repeated"),)),
    "timestamps_as_serial_numbers": (False, (E("profiles.csv", 2, "timestamp", "not readable", "date serial"),)),
    "unreadable_timestamps": (False, (E("profiles.csv", 3, "timestamp", "not readable"),
                                      E("profiles.csv", 4, "timestamp", "blank"),
                                      E("profiles.csv", 5, "timestamp", "not readable"))),
    "irregular_resolution": (False, (E("profiles.csv", 2, "timestamp", "allowed are 15, 30 or 60 min"),)),
    # tariffs
    "tariff_overlapping_periods": (False, (E("tariffs/t.toml", 12, "periods[2].hours", "overlaps periods[1]"),)),
    "tariff_missing_period": (False, (E("tariffs/t.toml", 6, "periods", "no period covers"),)),
    "tariff_unknown_keys": (True, (W("tariffs/t.toml", 5, "tariff.colour", "unknown key"),)),
    "tariff_wrong_types": (False, (E("tariffs/t.toml", 15, "energy.price_per_kwh", "table of numbers"),)),
    "tariff_syntax_error": (False, (E("tariffs/t.toml", 11, None, "TOML syntax error"),
                                    E("sites.csv", 2, "tariff_file", "could not be read"))),
    "tariff_empty_file": (False, (E("tariffs/t.toml", None, None, "the file is empty: it holds no tariff"),)),
    "tariff_not_named": (False, (E("sites.csv", 2, "tariff_file", "not found"),)),
    # options
    "options_negative_cost": (False, (E("options.csv", 3, "equipment_cost_coef", "must lie between"),)),
    "options_unknown_technology": (False, (E("options.csv", 3, "technology", "must be one of"),)),
    "options_duplicate_ids": (False, (E("options.csv", 4, "option_id", "duplicate option_id (first seen on row 3)"),)),
    # settings and finance
    "finance_rate_in_percent": (False, (E("finance.toml", 2, "discount_rate_frac", "fraction", "8 % is 0.08"),)),
    "finance_mixed_layout": (False, (E("finance.toml", 3, "finance", "both given"),)),
    "finance_wrong_types": (False, (E("finance.toml", 1, "discount_rate_frac", "must be a number"),
                                    E("finance.toml", 2, "horizon_yr", "whole number"),
                                    E("finance.toml", 3, "budget_per_yr", "list of numbers"))),
    "case_toml_not_a_table": (False, (E("case.toml", 1, "case", "must be a table"),)),
    "case_toml_syntax_error": (False, (E("case.toml", 2, None, "TOML syntax error"),)),
    "case_toml_bad_values": (False, (E("case.toml", 3, "currency", "ISO 4217"),
                                     E("case.toml", 4, "time_zone", "IANA"),
                                     E("case.toml", 5, "power_unit", "kW or hp"))),
    # a folder that is not a case
    "folder_without_tables": (False, (E(ANY, None, None, "holds no case tables", "fleet.json, notes.txt"),)),
}


def _build(entry: str, root: Path) -> Path:
    """Copy a corpus entry into ``root`` (laid over the valid small case unless it stands alone)."""
    folder = root / entry
    source = MALFORMED / entry
    if entry in make_corpus.STANDALONE:
        shutil.copytree(source, folder)
        return folder
    cb.write_case(folder)
    for path in sorted(source.rglob("*")):
        if path.is_file() and path.name != "DELETE":
            target = folder / path.relative_to(source)
            target.parent.mkdir(parents=True, exist_ok=True)
            target.write_bytes(path.read_bytes())
    if (source / "DELETE").is_file():
        for rel in (source / "DELETE").read_text(encoding="utf-8").split():
            (folder / rel).unlink()
    return folder


def _hashes(root: Path) -> dict[str, str]:
    """SHA-256 of every file under ``root`` (or of ``root`` itself when it is a file)."""
    files = [root] if root.is_file() else sorted(p for p in root.rglob("*") if p.is_file())
    return {str(p): hashlib.sha256(p.read_bytes()).hexdigest() for p in files}


def _well_formed(problems) -> None:
    """Every problem has a severity, a file, a rule; none is the loader's internal-error safety net."""
    assert isinstance(problems, list)
    for p in problems:
        assert p.severity in ("error", "warning"), p
        assert isinstance(p.file, str) and p.file, p
        assert isinstance(p.rule, str) and p.rule.strip(), p
        assert p.row is None or (isinstance(p.row, int) and p.row >= 1), p
        assert not p.rule.startswith("internal error"), p


def _check(path: Path, loads: bool, expected, watch: Path | None = None):
    """Load ``path``; assert the outcome, the expected problems and unchanged files; return (case, problems)."""
    watch = watch or path
    before = _hashes(watch) if watch.exists() else {}
    case, problems = load_case(path)
    assert (_hashes(watch) if watch.exists() else {}) == before, "an input file changed while it was read"
    _well_formed(problems)
    listing = "\n".join(str(p) for p in problems)
    assert (case is not None) == loads, listing
    if not loads:
        assert any(p.severity == "error" for p in problems), listing
    for expect in expected:
        if expect.file is ANY:
            expect = Expect(expect.severity, str(path), expect.row, expect.column, expect.rule, expect.hint)
        assert any(expect.matches(p) for p in problems), f"missing {expect} in:\n{listing}"
    return case, problems


class TestCorpus:
    @pytest.mark.parametrize("entry", sorted(CORPUS))
    def test_entry(self, entry, tmp_path):
        loads, expected = CORPUS[entry]
        case, _ = _check(_build(entry, tmp_path), loads, expected)
        assert (case is not None) == loads

    def test_every_corpus_folder_has_expectations_and_a_readme_line(self):
        folders = {p.name for p in MALFORMED.iterdir() if p.is_dir() and not p.name.startswith("__")}
        assert folders == set(CORPUS), folders ^ set(CORPUS)
        readme = (MALFORMED / "README.md").read_text(encoding="utf-8")
        assert not [e for e in CORPUS if f"`{e}`" not in readme]

    def test_checked_in_bytes_match_the_generator(self, tmp_path):
        make_corpus.write(tmp_path)
        assert {k.replace(str(tmp_path), ""): v for k, v in _hashes(tmp_path).items()} == \
            {k.replace(str(MALFORMED), ""): v for k, v in _hashes(MALFORMED).items()
             if "/__pycache__/" not in k and not k.endswith((".md", ".py", ".gitattributes"))}

    def test_corpus_read_in_place_is_unchanged(self):
        # the standalone entry is a case folder on its own: read it where it is checked in
        case, problems = _check(MALFORMED / "folder_without_tables", False, (), watch=MALFORMED)
        assert case is None and problems


class TestRepairedValues:
    """Where a defect is repaired rather than refused, the repaired values are the intended ones."""

    @pytest.mark.parametrize("entry", ["renamed_columns_aliases", "header_case_and_spaces", "trailing_empty_columns",
                                       "utf16_bom", "crlf_line_ends", "cr_line_ends", "upper_case_file_names"])
    def test_same_register_as_the_valid_case(self, entry, tmp_path):
        case, _ = _check(_build(entry, tmp_path), True, ())
        reference, _ = load_case(cb.write_case(tmp_path / "reference"), mode="strict")
        assert list(case.assets["asset_id"]) == ["P1", "F1", "C1"]
        assert_allclose(case.assets["rated_p_kw"], reference.assets["rated_p_kw"], rtol=0)
        assert list(case.assets.columns) == list(reference.assets.columns)

    @pytest.mark.parametrize("entry", ["utf8_bom", "windows_1252", "utf16_bom", "utf16_without_bom"])
    def test_accented_text_decoded(self, entry, tmp_path):
        case, _ = _check(_build(entry, tmp_path), True, ())
        assert case.assets.loc[0, "description"] == "Kühlwasserpumpe Süd"

    def test_latin_1_text_decoded(self, tmp_path):
        case, _ = _check(_build("latin_1", tmp_path), True, ())
        assert case.assets.loc[0, "description"] == "Pumpe für Öl"

    def test_decimal_commas(self, tmp_path):
        case, _ = _check(_build("semicolons_decimal_commas", tmp_path), True, ())
        assert_allclose(case.assets.loc[1, ["rated_p_kw", "rated_power_factor"]].to_numpy(float), [7.5, 0.82], rtol=0)

    def test_thousands_dot_and_decimal_comma(self, tmp_path):
        case, _ = _check(_build("thousands_dot_decimal_comma", tmp_path), True, ())
        assert_allclose(case.assets.loc[1, "operating_h_per_yr"], 6000.5, rtol=0)

    def test_mixed_offsets_land_on_consecutive_local_hours(self, tmp_path):
        # 00:00+01:00, 00:00Z, naive 02:00, 21:00-05:00 (previous day), 04:00+0100 are local hours
        # 0, 1, 2, 3, 4 in Europe/Berlin (UTC+1 in January; hand calculation)
        case, _ = _check(_build("mixed_offsets", tmp_path), True, ())
        index = case.profiles["LP1"].index
        assert str(index.tz) == "Europe/Berlin"
        assert list(index.hour) == [0, 1, 2, 3, 4] and (index.day == 2).all()

    def test_repeated_autumn_hour_in_order(self, tmp_path):
        # 26 October 2025, Europe/Berlin: 02:00 occurs at UTC+2 and again at UTC+1 (Directive 2000/84/EC)
        case, _ = _check(_build("dst_autumn_hour_twice_in_order", tmp_path), True, ())
        offsets = [t.utcoffset().total_seconds() / 3600 for t in case.profiles["LP1"].index]
        assert offsets == [2, 2, 2, 1, 1, 1, 1]
        assert case.profile_info.loc[0, "resolution_min"] == 60


class TestCheckCommand:
    """``drivecase check`` on bad input: exit 1 and a message naming file, row and column."""

    @pytest.mark.parametrize(("entry", "location"), [
        ("wrong_types", "assets.csv, row 2, column 'poles'"),
        ("rating_in_watts", "assets.csv, row 4, column 'rated_p_kw'"),
        ("dst_spring_gap", "profiles.csv, row 4, column 'timestamp'"),
        ("stray_extra_cell", "assets.csv, row 3, column '(no header, column 20)'"),
        ("binary_garbage", "assets.csv: the file holds binary data"),
        ("tariff_syntax_error", "tariffs/t.toml, line 11"),
    ])
    def test_check_exits_1_and_names_the_place(self, entry, location, tmp_path, capsys):
        folder = _build(entry, tmp_path)
        before = _hashes(folder)
        assert main(["check", str(folder)]) == 1
        out = capsys.readouterr().out
        assert "NOT VALID" in out and location in out, out
        assert "Traceback" not in out
        assert _hashes(folder) == before

    def test_check_on_a_file_of_another_kind(self, tmp_path, capsys):
        path = tmp_path / "fleet.ods"
        path.write_bytes(b"PK\x03\x04not really")
        assert main(["check", str(path)]) == 1
        assert "save it as .xlsx" in capsys.readouterr().out


def _workbook(tmp_path: Path, name: str = "case.xlsx"):
    """The valid small case as a workbook, opened for editing; returns (path, book)."""
    from openpyxl import load_workbook

    path = cb.write_workbook(tmp_path / name)
    return path, load_workbook(path)


def _with_cached_result(path: Path, formula: str, value: str) -> None:
    """Store a saved result for a formula cell, as a spreadsheet program does on saving."""
    data = path.read_bytes()
    out = io.BytesIO()
    with zipfile.ZipFile(io.BytesIO(data)) as src, zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED) as dst:
        for item in src.infolist():
            body = src.read(item.filename)
            if item.filename.startswith("xl/worksheets/"):
                body = body.replace(f"<f>{formula}</f><v />".encode(), f"<f>{formula}</f><v>{value}</v>".encode())
            dst.writestr(item, body)
    path.write_bytes(out.getvalue())


class TestWorkbooks:
    def test_merged_data_cells_spread_with_a_warning(self, tmp_path):
        path, book = _workbook(tmp_path)
        sheet = book["assets"]
        sheet["B3"] = sheet["B4"] = None
        sheet.merge_cells("B2:B4")
        book.save(path)
        case, _ = _check(path, True, (W("case.xlsx:assets", None, None, "merged cells"),))
        assert list(case.assets["site_id"]) == ["S1", "S1", "S1"]

    def test_extra_and_hidden_sheets_and_hidden_rows(self, tmp_path):
        path, book = _workbook(tmp_path)
        book.create_sheet("Pivot").append(["anything"])
        book["duty"].sheet_state = "hidden"
        book["assets"].row_dimensions[3].hidden = True
        book.save(path)
        case, _ = _check(path, True, (W("case.xlsx:Pivot", None, None, "not part of the case format"),
                                      W("case.xlsx:duty", None, None, "sheet is hidden"),
                                      W("case.xlsx:assets", 3, None, "hidden row")))
        assert len(case.assets) == 3

    def test_formula_without_saved_result_reads_blank(self, tmp_path):
        path, book = _workbook(tmp_path)
        book["assets"]["E3"] = "=15/2"  # F1's rated_p_kw; a library-written formula has no saved result
        book.save(path)
        case, _ = _check(path, False, (W("case.xlsx:assets", 3, "rated_p_kw", "formula with no saved result"),
                                      E("case.xlsx:assets", 3, "rated_p_kw", "rated power is required")))
        assert case is None

    def test_formula_with_saved_result_uses_it(self, tmp_path):
        path, book = _workbook(tmp_path)
        book["assets"]["E3"] = "=15/2"
        book.save(path)
        _with_cached_result(path, "15/2", "7.5")
        case, _ = _check(path, True, (W("case.xlsx:assets", None, None, "1 cell holds a formula; its last saved result was used"),))
        assert_allclose(case.assets["rated_p_kw"], [15, 7.5, 75], rtol=0)

    def test_dates_typed_as_dates(self, tmp_path):
        path, book = _workbook(tmp_path)
        book["assets"]["M2"] = dt.datetime(2015, 6, 1)       # year_installed of P1
        book["assets"]["E3"] = dt.datetime(1900, 1, 7, 12)   # 7.5 shown as a date
        book.save(path)
        case, _ = _check(path, False, (W("case.xlsx:assets", 2, "year_installed", "its year was used"),
                                      E("case.xlsx:assets", 3, "rated_p_kw", "date", "number")))
        assert case is None

    def test_timestamps_as_date_cells_and_as_serial_numbers(self, tmp_path):
        path, book = _workbook(tmp_path)
        sheet = book["profiles"]
        for r in range(2, sheet.max_row + 1):
            stamp = dt.datetime.fromisoformat(sheet.cell(r, 2).value)
            # spreadsheet serial: days since 1899-12-30 (the 1900 date system)
            sheet.cell(r, 2).value = stamp if r % 2 else (stamp - dt.datetime(1899, 12, 30)).total_seconds() / 86400
        book.save(path)
        case, _ = _check(path, True, (W("case.xlsx:profiles", 2, "timestamp", "spreadsheet date numbers"),))
        reference, _ = load_case(cb.write_workbook(tmp_path / "reference.xlsx"), mode="strict")
        assert case.profiles["LP1"].index.equals(reference.profiles["LP1"].index)

    def test_old_format_workbook_renamed(self, tmp_path):
        path = tmp_path / "case.xlsx"
        path.write_bytes(b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1" + bytes(512))
        _, problems = _check(path, False, (E("case.xlsx", None, None, "cannot be opened", "save it as .xlsx"),))
        assert len(problems) == 1

    def test_empty_sheet_and_tariff_sheet_syntax(self, tmp_path):
        path, book = _workbook(tmp_path)
        del book["sites"]
        book.create_sheet("sites")
        book.create_sheet("tariff t.toml").append(["[tariff"])
        book.save(path)
        case, _ = _check(path, False, (E("case.xlsx:sites", None, None, "sheet is empty"),
                                      E("case.xlsx:tariff t.toml", ANY, None, "TOML syntax error")))
        assert case is None


class TestCasePaths:
    @pytest.mark.parametrize(("name", "content", "says"), [
        ("assets.csv", b"asset_id\nP1\n", "give the folder"),
        ("fleet.xls", b"\xd0\xcf\x11\xe0", "save it as .xlsx"),
        ("fleet.ods", b"PK\x03\x04", "save it as .xlsx"),
        ("case.zip", b"PK\x03\x04", "unpack it"),
        ("case.toml", b"[case]\n", "give the folder"),
        ("picture.png", b"\x89PNG", "neither a folder nor an .xlsx workbook"),
    ])
    def test_a_file_of_another_kind(self, tmp_path, name, content, says):
        path = tmp_path / name
        path.write_bytes(content)
        _, problems = _check(path, False, ())
        assert len(problems) == 1 and says in problems[0].rule, problems

    def test_missing_path_and_impossible_path(self, tmp_path):
        _check(tmp_path / "nowhere", False, (E(str(tmp_path / "nowhere"), None, None, "does not exist"),))
        case, problems = load_case("bad\x00name")  # no file system accepts a NUL in a name
        assert case is None and len(problems) == 1 and problems[0].severity == "error"

    def test_table_that_is_a_folder(self, tmp_path):
        folder = cb.write_case(tmp_path / "c")
        (folder / "sites.csv").unlink()
        (folder / "sites.csv").mkdir()
        case, _ = _check(folder, False, (E("sites.csv", None, None, "required table 'sites' is missing"),))
        assert case is None

    @pytest.mark.skipif(os.name != "posix" or os.geteuid() == 0, reason="needs a non-root POSIX user to deny reading")
    def test_unreadable_file(self, tmp_path):
        folder = cb.write_case(tmp_path / "c")
        (folder / "sites.csv").chmod(0)
        try:
            case, problems = load_case(folder)
        finally:
            (folder / "sites.csv").chmod(0o644)
        assert case is None and any("cannot be read" in p.rule for p in problems)


class TestSize:
    def test_file_over_the_limit_is_refused_unread(self, tmp_path):
        from models import io as case_io

        folder = cb.write_case(tmp_path / "c")
        with open(folder / "profiles.csv", "wb") as handle:  # sparse: the size is real, the disk use is not
            handle.seek(case_io.MAX_TEXT_BYTES + 1)
            handle.write(b"\n")
        started = time.perf_counter()
        _check(folder, False, (E("profiles.csv", None, None, "larger than", "profiles.parquet"),))
        assert time.perf_counter() - started < 10.0  # refused from its size, not parsed

    @pytest.mark.slow
    def test_fifty_megabyte_profile_loads_in_bounded_time_and_memory(self, tmp_path):
        # 56 profiles x 35,040 quarter hours (one 2025 year) = 1.96 M rows, about 53 MB; time zone UTC so
        # that naive local times have no daylight-saving gap.
        folder = cb.write_case(tmp_path / "big", case_toml='[case]\nname = "big"\ntime_zone = "UTC"\n')
        import numpy as np
        import pandas as pd

        stamps = pd.date_range("2025-01-01", periods=35040, freq="15min").strftime("%Y-%m-%d %H:%M").to_numpy()
        rng = np.random.default_rng(1)
        with open(folder / "profiles.csv", "w", encoding="utf-8", newline="\n") as handle:
            handle.write("profile_id,timestamp,shaft_load_pct\n")
            for k in range(56):
                values = np.round(rng.uniform(20, 90, stamps.size), 1).astype(str)
                pid = "LP1" if k == 0 else f"X{k:03d}"
                handle.write("".join(f"{pid},{s},{v}\n" for s, v in zip(stamps, values)))
        size_mb = (folder / "profiles.csv").stat().st_size / 1e6
        assert size_mb > 50
        script = textwrap.dedent(f"""
            import json, resource, time
            from models.case import load_case
            started = time.perf_counter()
            case, problems = load_case({str(folder)!r})
            print(json.dumps({{"seconds": time.perf_counter() - started, "loaded": case is not None,
                              "profiles": 0 if case is None else len(case.profiles),
                              "errors": [str(p) for p in problems if p.severity == "error"][:5],
                              "max_rss_mb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024}}))
        """)
        before = _hashes(folder)
        run = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True, timeout=120,
                             cwd=Path(__file__).resolve().parents[1])
        assert run.returncode == 0, run.stderr
        report = json.loads(run.stdout.strip().splitlines()[-1])
        assert report["loaded"] and report["profiles"] == 56, report["errors"]
        # bounds with margin over what was measured on the 2-core development machine (about 5 s and
        # 570-630 MB; one run in a fresh CI checkout peaked at 1,517 MB, not reproduced since, so the memory
        # bound leaves room for the allocator's and the kernel's page handling): a regression to a
        # cell-by-cell reader would break the time bound
        assert report["seconds"] < 25.0, report
        assert report["max_rss_mb"] < 2500.0, report
        assert _hashes(folder) == before


class TestFormulaInjection:
    def test_formula_like_asset_id_is_neutralised_in_result_files(self, tmp_path, capsys):
        # an id a spreadsheet would run as a formula on opening the result file (CSV injection)
        bad_id = '=HYPERLINK("http://example.invalid","open")'
        rows = [list(r) for r in cb.ASSETS]
        rows[1][cb.ASSET_HEADER.index("asset_id")] = bad_id
        folder = cb.write_case(tmp_path / "c", assets=rows)
        cb.write_csv(folder / "sites.csv", cb.SITES_HEADER + ["tariff_file"], [cb.SITES[0] + ["t.toml"]])
        (folder / "tariffs").mkdir()
        shutil.copyfile(Path(__file__).resolve().parents[1] / "data" / "demo" / "tariffs" / "example_tou_kw_reactive_ratchet.toml",
                        folder / "tariffs" / "t.toml")
        before = _hashes(folder)
        assert main(["run", str(folder), "--out", str(tmp_path / "out"), "--no-risk", "--quiet"]) == 0
        capsys.readouterr()
        assert _hashes(folder) == before
        results = (tmp_path / "out" / "results.csv").read_text(encoding="utf-8")
        assert "'=HYPERLINK" in results
        for path in (tmp_path / "out").glob("*.csv"):
            for line in path.read_text(encoding="utf-8").splitlines():
                assert not line.startswith(("=", "+", "@")) and ",=" not in line and ',"=' not in line, (path.name, line)

    def test_a_parquet_file_over_the_limit_is_refused_unread(self, tmp_path, monkeypatch):
        from models import io as case_io

        folder = cb.write_case(tmp_path / "c")
        (folder / "profiles.csv").unlink()
        with open(folder / "profiles.parquet", "wb") as handle:  # sparse, as above
            handle.seek(4096)
            handle.write(b"\n")
        monkeypatch.setattr(case_io, "MAX_FILE_BYTES", 4096)
        _check(folder, False, (E("profiles.parquet", None, None, "larger than", "shared profile"),))
        assert (folder / "profiles.parquet").stat().st_size == 4097  # (left as it was)

    def test_profiles_that_would_not_fit_in_memory_are_refused_before_they_are_read(self, tmp_path, monkeypatch):
        # the rows from the file's footer, times the memory a row takes while read, against 80 % of the free
        # memory: 48 rows x 30 bytes = 1,440 bytes against 0.8 x 1,500 = 1,200 bytes free (hand calculation; the ids
        # are read as categories and the timestamps are typed, so no text is counted and the table is read batch
        # by batch, PARQUET_ROW_BYTES)
        import pandas as pd

        from models import io as case_io

        folder = cb.write_case(tmp_path / "c")
        (folder / "profiles.csv").unlink()
        stamps = pd.date_range("2025-01-01", periods=48, freq="h", tz="UTC")
        pd.DataFrame({"profile_id": "P1", "timestamp": stamps, "shaft_load_pct": 50.0}).to_parquet(
            folder / "profiles.parquet", index=False)
        before = (folder / "profiles.parquet").read_bytes()
        monkeypatch.setattr(case_io, "available_bytes", lambda: 1_500)
        read, real = [], case_io._parquet_frame
        monkeypatch.setattr(case_io, "_parquet_frame", lambda *a: read.append(a) or real(*a))
        raw, problems = case_io.read_parquet_table(folder / "profiles.parquet", "profiles")
        assert not read and not raw.readable
        (p,) = problems
        assert p.severity == "error" and p.value == "48 rows"
        assert "more than 80% of the 0.0 GiB this machine has free" in p.rule and "shared profile" in p.hint
        assert (folder / "profiles.parquet").read_bytes() == before
        monkeypatch.setattr(case_io, "available_bytes", lambda: 2_000)  # 1,440 <= 1,600: read
        raw, problems = case_io.read_parquet_table(folder / "profiles.parquet", "profiles")
        assert read and not problems

    def test_text_in_a_parquet_table_is_counted_by_its_cells_and_bytes(self, tmp_path):
        # timestamps written as text: each cell is counted besides its characters, so a table of long text (or a
        # few rows of huge cells) is refused from its footer too (hand calculation of the plan's figure below)
        import pandas as pd
        import pyarrow.parquet as pq

        from models import io as case_io

        path = tmp_path / "profiles.parquet"
        stamps = pd.date_range("2025-01-01", periods=48, freq="h").strftime("%Y-%m-%d %H:%M")
        pd.DataFrame({"profile_id": "P1", "timestamp": stamps, "shaft_load_pct": 50.0}).to_parquet(path, index=False)
        meta = pq.ParquetFile(path).metadata
        text = sum(meta.row_group(g).column(1).total_uncompressed_size for g in range(meta.num_row_groups))
        plan = case_io._parquet_plan(path, "profiles")
        assert not plan.streamed  # (text is read whole: PARQUET_WHOLE_ROW_BYTES, 50 bytes a row)
        assert plan.needed_bytes == 48 * 50 + text + 48 * 160


def test_a_local_time_in_a_clock_change_names_its_profile_and_the_time_as_written(tmp_path):
    # docs/case-format.md: a problem in a profile row names the profile and the row's timestamp as written
    folder = _build("dst_spring_gap", tmp_path)
    _, problems = load_case(folder)
    hit = next(p for p in problems if "does not exist" in p.rule)
    assert "in profile '" in hit.rule and " at " in hit.rule, hit.rule


def test_an_empty_tariff_file_is_one_error(tmp_path):
    folder = cb.write_case(tmp_path / "c")
    (folder / "tariffs").mkdir()
    (folder / "tariffs" / "t.toml").write_bytes(b"")
    _, problems = load_case(folder)
    errors = [p for p in problems if p.severity == "error" and p.file == "tariffs/t.toml"]
    assert len(errors) == 1 and "the file is empty" in errors[0].rule, [str(p) for p in errors]


def test_a_cell_formatted_far_down_a_sheet_is_not_read_cell_by_cell(tmp_path):
    # A cell coloured at row 1,048,000, column 200 (nothing in it) declares a sheet of 200 million cells: the reader
    # reads the cells that hold values only, so the case reads as it would without it (before, memory grew past
    # 17 GB). The check is on the cells the reader creates, not on time.
    import casebuilder as cb
    from openpyxl import load_workbook
    from openpyxl.styles import PatternFill

    from models.case import load_case

    path = cb.write_workbook(tmp_path / "case.xlsx")
    book = load_workbook(path)
    sheet = book["assets"]
    sheet.cell(1_048_000, 200).fill = PatternFill("solid", fgColor="FFFF00")
    book.save(path)
    assert load_workbook(path)["assets"].max_row == 1_048_000  # the declared size the reader must not walk
    case, problems = load_case(path)
    assert case is not None, [str(p) for p in problems if p.severity == "error"]
    assert len(case.assets) == len(cb.ASSETS)


def test_a_cell_too_long_to_read_is_one_error_not_also_an_empty_register(tmp_path):
    # a description of 200,000 characters: the reader stops at it and says so; the register's "no rows" would only
    # repeat the cause
    import casebuilder as cb

    from models.case import load_case

    assets = [list(row) for row in cb.ASSETS]
    assets[0][2] = "x" * 200_000
    folder = cb.write_case(tmp_path / "case", assets=assets)
    case, problems = load_case(folder)
    rules = [p.rule for p in problems if p.severity == "error" and p.file == "assets.csv"]
    assert case is None and any("longer than" in r for r in rules), rules
    assert not any("has no rows" in r for r in rules), rules


def test_toml_nested_thousands_deep_is_a_problem_not_a_crash(tmp_path):
    # 5,000 arrays inside each other exhaust the TOML parser's recursion: one error naming the file, no traceback
    import casebuilder as cb
    from models.case import load_case

    folder = cb.write_case(tmp_path / "c")
    (folder / "finance.toml").write_text("[finance]\ndiscount_rate_frac = " + "[" * 5000 + "]" * 5000 + "\n",
                                         encoding="utf-8")
    case, problems = load_case(folder)
    said = [p for p in problems if p.severity == "error" and "nested too deeply" in p.rule]
    assert case is None and len(said) == 1 and said[0].file == "finance.toml", [str(p) for p in problems]
