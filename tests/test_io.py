"""Reading case files: encodings, delimiters, workbooks with extra sheets, merged cells and formulas."""

from __future__ import annotations

import hashlib
from pathlib import Path

import pytest
from numpy.testing import assert_allclose

import casebuilder as cb
from models.case import load_case


def _find(problems, text, severity=None):
    hits = [p for p in problems if text in p.rule and (severity is None or p.severity == severity)]
    assert hits, "\n".join(str(p) for p in problems)
    return hits[0]


def test_byte_order_mark_is_ignored(tmp_path):
    folder = cb.write_case(tmp_path / "c")
    data = (folder / "assets.csv").read_bytes()
    (folder / "assets.csv").write_bytes(b"\xef\xbb\xbf" + data)
    case, problems = load_case(folder)
    assert case is not None, [str(p) for p in problems]
    assert case.assets.loc[0, "asset_id"] == "P1"


def test_semicolons_and_decimal_commas(tmp_path):
    folder = cb.write_case(tmp_path / "c")
    text = (folder / "assets.csv").read_text(encoding="utf-8").replace(",", ";").replace(";7.5;", ";7,5;")
    (folder / "assets.csv").write_text(text, encoding="utf-8")
    case, problems = load_case(folder)
    assert case is not None, [str(p) for p in problems]
    assert_allclose(case.assets["rated_p_kw"], [15, 7.5, 75])
    _find(problems, "non-comma delimiter", "warning")


def test_windows_1252_text_is_read_with_a_warning(tmp_path):
    folder = cb.write_case(tmp_path / "c")
    text = (folder / "assets.csv").read_text(encoding="utf-8").replace("Cooling water pump", "Kühlwasserpumpe")
    (folder / "assets.csv").write_bytes(text.encode("cp1252"))
    case, problems = load_case(folder)
    assert case is not None
    assert case.assets.loc[0, "description"] == "Kühlwasserpumpe"
    _find(problems, "not UTF-8", "warning")


def test_extra_sheets_merged_cells_and_formulas(tmp_path):
    from openpyxl import load_workbook

    path = cb.write_workbook(tmp_path / "case.xlsx")
    book = load_workbook(path)
    book.create_sheet("my notes").append(["anything"])
    sheet = book["sites"]
    sheet["F1"] = "comment"
    sheet.merge_cells("F1:G1")
    book.save(path)
    before = hashlib.sha256(path.read_bytes()).hexdigest()
    case, problems = load_case(path)
    assert case is not None, [str(p) for p in problems]
    _find(problems, "sheet not part of the case format", "warning")
    _find(problems, "merged cells", "warning")
    assert hashlib.sha256(path.read_bytes()).hexdigest() == before


def test_damaged_workbook(tmp_path):
    path = tmp_path / "case.xlsx"
    path.write_bytes(b"not a zip file at all")
    case, problems = load_case(path)
    assert case is None
    _find(problems, "cannot be opened", "error")


def test_toml_syntax_error_names_the_line(tmp_path):
    folder = cb.write_case(tmp_path / "c", case_toml='[case]\nname = "x\n')
    _, problems = load_case(folder)
    p = _find(problems, "TOML syntax error", "error")
    assert p.file == "case.toml"


@pytest.mark.parametrize("text, line, name", [
    ('[case]\nname = "x"\ncurrency = "EUR"\nname = "y"\n', 4, "name"),     # a key twice in one table
    ('[case]\nname = "x"\n\n[case]\ncurrency = "EUR"\n', 4, "[case]"),   # a table twice
])
def test_a_key_given_twice_is_named(tmp_path, text, line, name):
    folder = cb.write_case(tmp_path / "c", case_toml=text)
    _, problems = load_case(folder)
    p = _find(problems, "is given twice", "error")
    assert (p.file, p.row, p.column) == ("case.toml", line, name) and f"'{name}' is given twice" in p.rule


def test_parquet_profiles_equal_csv_profiles(tmp_path):
    import pandas as pd

    folder = cb.write_case(tmp_path / "c")
    frame = pd.read_csv(folder / "profiles.csv")
    frame["timestamp"] = pd.to_datetime(frame["timestamp"]).dt.tz_localize("Europe/Berlin")
    (folder / "profiles.csv").unlink()
    frame.to_parquet(folder / "profiles.parquet")
    case_pq, problems = load_case(folder)
    assert case_pq is not None, [str(p) for p in problems]
    case_csv, _ = load_case(cb.write_case(tmp_path / "d"))
    assert_allclose(case_pq.profiles["LP1"].to_numpy(), case_csv.profiles["LP1"].to_numpy())
    assert (case_pq.profiles["LP1"].index == case_csv.profiles["LP1"].index).all()


def test_decimal_commas_of_a_semicolon_file_are_one_warning_per_column(tmp_path):
    # docs/case-format.md, "Reading rules", Numbers: "A column with several such repairs gets one warning, not
    # one per cell: it says how many cells were repaired and shows the first few rows with their values".
    # The case: a CSV saved by a European spreadsheet program (semicolons, decimal commas), one warning per column,
    # not one per cell.
    folder = cb.write_case(tmp_path / "c")
    header = cb.ASSET_HEADER
    pf, kw = header.index("rated_power_factor"), header.index("rated_p_kw")
    rows = [list(r) for r in cb.ASSETS]
    for row, factor in zip(rows, ("0,85", "0,82", "0,88")):  # every motor's power factor with a decimal comma
        row[pf] = factor
    rows[1][kw] = "7,5"  # and one rating: a single repaired cell keeps its own row
    lines = [";".join(header)] + [";".join(r) for r in rows]
    (folder / "assets.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")
    case, problems = load_case(folder)
    assert case is not None, [str(p) for p in problems]
    assert_allclose(case.assets["rated_power_factor"], [0.85, 0.82, 0.88])
    repairs = [p for p in problems if "decimal comma" in p.rule]
    assert [(p.row, p.column) for p in repairs] == [(None, "rated_power_factor"), (3, "rated_p_kw")]
    assert repairs[0].severity == "warning" and repairs[0].rule == (
        "decimal comma read as a decimal point in 3 cells of this column: rows 2 ('0,85'), 3 ('0,82'), 4 ('0,88')")
    assert repairs[1].rule == "decimal comma read as a decimal point" and repairs[1].value == "7,5"


def test_a_point_between_thousands_in_a_table_of_decimal_commas_is_not_read_as_a_decimal(tmp_path):
    # a European spreadsheet's export: power factors written 0,85, and F1's hours 6.000, which that locale reads as
    # six thousand; read as 6.0 h/yr the motor would all but vanish from the bills, so the cell is an error naming
    # both readings (a plain 6000 and a point in a table of points are read as written)
    folder = cb.write_case(tmp_path / "c")
    header = cb.ASSET_HEADER
    pf, hours = header.index("rated_power_factor"), header.index("operating_h_per_yr")
    rows = [list(r) for r in cb.ASSETS]
    rows[1][pf], rows[1][hours] = "0,82", "6.000"
    lines = [";".join(header)] + [";".join(r) for r in rows]
    (folder / "assets.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")
    case, problems = load_case(folder)
    assert case is None
    found = [p for p in problems if p.severity == "error"]
    assert [(p.row, p.column, p.value) for p in found] == [(3, "operating_h_per_yr", "6.000")]
    assert "the table writes its decimals with a comma" in found[0].rule
    assert "write 6000 if the point separates thousands, or 6,000 if it is a decimal mark" in found[0].hint
    rows[1][pf] = "0.82"  # no decimal comma anywhere: 6.000 is six
    (folder / "assets.csv").write_text("\n".join([";".join(header)] + [";".join(r) for r in rows]) + "\n",
                                       encoding="utf-8")
    case, problems = load_case(folder)
    assert case is not None and case.assets.set_index("asset_id").loc["F1", "operating_h_per_yr"] == 6.0


def test_digits_grouped_with_spaces_are_read_and_said(tmp_path):
    # "1 200" (a space, or the no-break space French spreadsheets write) is 1200 in every locale that groups so
    folder = cb.write_case(tmp_path / "c")
    rows = [list(r) for r in cb.ASSETS]
    rows[1][cb.ASSET_HEADER.index("operating_h_per_yr")] = "6\u00a0000"
    cb.write_csv(folder / "assets.csv", cb.ASSET_HEADER, rows)
    case, problems = load_case(folder)
    assert case is not None and case.assets.set_index("asset_id").loc["F1", "operating_h_per_yr"] == 6000.0
    said = [p for p in problems if p.column == "operating_h_per_yr"]
    assert [(p.severity, p.row, p.rule) for p in said] == [("warning", 3, "a space read as a thousands separator")]


def test_an_empty_parquet_profile_file_says_it_is_empty(tmp_path):
    # docs/case-format.md, "Interval profiles": "An empty `profiles.parquet` (0 bytes) is an error saying so";
    # references to the unread profiles are not reported again. The message says the file is empty, not "the file
    # cannot be read as Parquet (ArrowInvalid)".
    folder = cb.write_case(tmp_path / "c")
    (folder / "profiles.csv").unlink()
    (folder / "profiles.parquet").write_bytes(b"")
    case, problems = load_case(folder)
    assert case is None
    errors = [p for p in problems if p.severity == "error"]
    assert [(p.file, p.row, p.column, p.rule) for p in errors] == [
        ("profiles.parquet", None, None, "the file is empty (0 bytes)")]
    assert (folder / "profiles.parquet").read_bytes() == b""


def test_a_bad_parquet_value_names_its_profile_and_timestamp(tmp_path):
    # docs/case-format.md, "Interval profiles": "A problem in a row names the profile and the row's timestamp as
    # written, besides the row number". Parquet rows are numbered as a spreadsheet would show them (first data
    # row 2), so casebuilder.profile_rows' 4th row (LP1, 2025-01-02 03:00 in Europe/Berlin, UTC+1 in January) is
    # row 5. A row number alone ("row 1002") would not say which profile or time is wrong.
    import pandas as pd

    folder = cb.write_case(tmp_path / "c")
    frame = pd.read_csv(folder / "profiles.csv")
    frame["timestamp"] = pd.to_datetime(frame["timestamp"]).dt.tz_localize("Europe/Berlin")
    frame["shaft_load_pct"] = frame["shaft_load_pct"].astype(float)
    frame.loc[3, "shaft_load_pct"] = -12.5
    (folder / "profiles.csv").unlink()
    frame.to_parquet(folder / "profiles.parquet")
    _, problems = load_case(folder)
    p = _find(problems, "negative", "error")
    assert (p.file, p.row, p.column, p.value) == ("profiles.parquet", 5, "shaft_load_pct", -12.5)
    assert p.rule == "values must not be negative in profile 'LP1' at 2025-01-02 03:00:00+01:00"


def test_blank_case_says_when_a_site_needs_a_tariff(tmp_path):
    # docs/case-format.md, "Sites": tariff_file is required "yes, when the case has tariffs" (a site without one
    # is an error in a case that has tariffs). The blank template said "# tariff_file (optional)".
    from openpyxl import load_workbook

    from models.io import write_blank_case

    write_blank_case(tmp_path / "new")
    notes = [line for line in (tmp_path / "new" / "sites.csv").read_text(encoding="utf-8").splitlines()
             if line.startswith("# tariff_file")]
    assert len(notes) == 1 and notes[0].startswith("# tariff_file (required when the case has tariffs): ")
    assert "A site without one is an error when the case has tariffs" in notes[0] and "optional" not in notes[0]
    doc = (Path(__file__).resolve().parents[1] / "docs" / "case-format.md").read_text(encoding="utf-8")
    assert "| `tariff_file` | - | yes, when the case has tariffs |" in doc
    book = load_workbook(write_blank_case(tmp_path / "new.xlsx")[0], read_only=True)
    rows = [r for r in book["instructions"].iter_rows(values_only=True) if r[:2] == ("sites", "tariff_file")]
    assert rows and rows[0][3] == "yes, when the case has tariffs"


def test_the_files_a_folder_case_reads_are_listed_in_one_place(tmp_path):
    # read_folder warns of every file it does not read; folder_case_files lists the ones it does (the finance
    # save compares those): in a folder holding every name of the format and a stray file, the two lists are
    # complementary
    from models.io import CASE_TABLES, folder_case_files, read_folder

    (tmp_path / "tariffs").mkdir()
    names = ["case.toml", "finance.toml", "scenarios.toml", "notes.csv"] + [f"{t}.csv" for t in CASE_TABLES]
    for name in names:
        (tmp_path / name).write_text("", encoding="utf-8")
    (tmp_path / "tariffs" / "flat.toml").write_text("", encoding="utf-8")
    (tmp_path / "tariffs" / "readme.txt").write_text("", encoding="utf-8")
    listed = {p.relative_to(tmp_path).as_posix() for p in folder_case_files(tmp_path)}
    assert listed == (set(names) - {"notes.csv"}) | {"tariffs/flat.toml"}
    ignored = {p.file for p in read_folder(tmp_path).problems if "ignored" in p.rule}
    assert ignored == {"notes.csv", "tariffs/readme.txt"}


def test_a_misspelt_finance_file_is_named_when_the_case_has_none(tmp_path):
    from models.io import read_folder

    (tmp_path / "finanse.toml").write_text("", encoding="utf-8")
    hit = _find(read_folder(tmp_path).problems, "not part of the case format")
    assert hit.hint == "did you mean finance.toml?"
