"""Reading case files: encodings, delimiters, workbooks with extra sheets, merged cells and formulas."""

from __future__ import annotations

import hashlib

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
