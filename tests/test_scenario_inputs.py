"""Bad input in a case's scenarios: each problem names the file or sheet, the row or key, the value and the
rule, and nothing the user wrote is dropped without a word (docs/case-format.md, "Scenarios")."""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest
from openpyxl import load_workbook

import casebuilder as cb
from models import comparison
from models.case import load_case

DEMO = Path(__file__).resolve().parents[1] / "data" / "demo"


def _book_with_sheet(tmp_path, rows, title="scenarios"):
    book = cb.write_workbook(tmp_path / "case.xlsx")
    wb = load_workbook(book)
    sheet = wb.create_sheet(title)
    for row in rows:
        sheet.append(row)
    wb.save(book)
    return book


def _folder_with(tmp_path, text: str | bytes):
    folder = tmp_path / "demo"
    shutil.copytree(DEMO, folder)
    path = folder / "scenarios.toml"
    path.write_bytes(text if isinstance(text, bytes) else text.encode("utf-8"))
    return folder


def _found(problems, severity, words):
    return [p for p in problems if p.severity == severity and words in p.rule]


def test_a_key_heading_two_columns_is_an_error_naming_both(tmp_path):
    book = _book_with_sheet(tmp_path, [["name", "discount_rate_frac", "Discount Rate Frac"], ["A", 0.06, 0.03]])
    case, problems = load_case(book)
    assert case is None
    found = _found(problems, "error", "heads two columns (B and C)")
    assert found and found[0].file == "case.xlsx:scenarios" and found[0].row == 1 and found[0].column == "discount_rate_frac"


def test_a_formula_with_no_saved_result_is_an_error_not_the_case_s_value(tmp_path):
    # openpyxl writes a formula without a saved result, as a program that never calculated it would
    book = _book_with_sheet(tmp_path, [["name", "discount_rate_frac", "horizon_yr"], ["A", "=0.03*2", 20]])
    case, problems = load_case(book)
    assert case is None
    found = _found(problems, "error", "formula with no saved result")
    assert found and found[0].row == 2 and found[0].column == "discount_rate_frac"


def test_a_comment_row_with_values_is_said_to_be_passed_over(tmp_path):
    book = _book_with_sheet(tmp_path, [["name", "discount_rate_frac"], ["#2 budget case", 0.06], ["Other", 0.05]])
    case, problems = load_case(book)
    assert case is not None, [str(p) for p in problems]
    assert [n for n, _ in case.scenarios] == ["Other"]
    found = _found(problems, "warning", "passed over as a comment")
    assert found and found[0].row == 2 and found[0].value == "#2 budget case" and "column B" in found[0].rule


@pytest.mark.parametrize("rows", [[], [["name", "discount_rate_frac"]]])
def test_a_sheet_with_no_scenario_is_warned(tmp_path, rows):
    book = _book_with_sheet(tmp_path, rows)
    case, problems = load_case(book)
    assert case is not None and not case.scenarios
    assert _found(problems, "warning", "holds no scenario")


@pytest.mark.parametrize("text", ["", "# scenarios to come\n"])
def test_an_empty_scenarios_file_is_warned(tmp_path, text):
    case, problems = load_case(_folder_with(tmp_path, text))
    assert case is not None and not case.scenarios
    found = _found(problems, "warning", "holds no scenario")
    assert found and found[0].file == "scenarios.toml"


@pytest.mark.parametrize("table", ["scenario", "Scenarios"])
def test_a_misspelt_table_is_an_error_not_every_scenario_dropped(tmp_path, table):
    case, problems = load_case(_folder_with(tmp_path, f'[[{table}]]\nname = "A"\ndiscount_rate_frac = 0.06\n'))
    assert case is None
    found = _found(problems, "error", "did you mean 'scenarios'?")
    assert found and found[0].column == table


def test_a_misspelt_sheet_name_is_an_error_with_the_name_meant(tmp_path):
    book = _book_with_sheet(tmp_path, [["name", "discount_rate_frac"], ["A", 0.06]], title="Scenario")
    case, problems = load_case(book)
    assert case is None
    found = _found(problems, "error", "did you mean 'scenarios'?")
    assert found and found[0].file == "case.xlsx:Scenario"


def test_an_unknown_sheet_is_warned_with_every_sheet_the_format_reads(tmp_path):
    book = _book_with_sheet(tmp_path, [["a note"]], title="Notes")
    case, problems = load_case(book)
    assert case is not None
    found = _found(problems, "warning", "sheet not part of the case format")
    assert found and "finance, scenarios" in found[0].hint


class TestNames:
    BASE = {"discount_rate_frac": 0.08}

    @pytest.mark.parametrize("name, rule", [
        (2030, "must be text"),
        ("Two\nlines", "one line of text"),
        ("case as written", "'Case as written' names a row of every comparison"),
        ("  Assumptions  of this run ", "'Assumptions of this run' names a row of every comparison"),
    ])
    def test_a_name_that_cannot_be_a_row_s_is_an_error(self, name, rule):
        named, problems = comparison.read_scenarios([{"name": name, "horizon_yr": 20}], self.BASE, "scenarios.toml")
        assert named == []
        assert [p.column for p in _found(problems, "error", rule)] == ["scenarios[1].name"]

    def test_names_that_differ_only_in_capitals_or_spaces_are_warned(self):
        named, problems = comparison.read_scenarios([{"name": "Cheap", "horizon_yr": 20}, {"name": "cheap ", "horizon_yr": 25}],
                                                    self.BASE, "scenarios.toml")
        assert [n for n, _ in named] == ["Cheap", "cheap"]
        found = _found(problems, "warning", "only in capitals or spaces")
        assert [p.column for p in found] == ["scenarios[2].name"] and "'Cheap'" in found[0].rule


@pytest.mark.parametrize("value", [1e100, 0.001])
def test_a_price_level_beyond_any_price_paid_is_an_error(tmp_path, value):
    # bounds of models.finance.PRICE_LEVEL_BOUNDS (0.01 to 100): a hundredfold price is the most a case may ask
    case, problems = load_case(_folder_with(tmp_path, f'[[scenarios]]\nname = "A"\nenergy_price_factor = {value}\n'))
    assert case is None
    found = _found(problems, "error", "must lie between 0.01 and 100")
    assert [p.column for p in found] == ["scenarios[1].energy_price_factor"]


def test_a_scenarios_file_not_in_utf8_is_told_to_be_saved_as_utf8_text(tmp_path):
    case, problems = load_case(_folder_with(tmp_path, '[[scenarios]]\nname = "Caf\xe9"\nhorizon_yr = 20\n'.encode("cp1252")))
    assert case is not None
    found = [p for p in problems if p.file == "scenarios.toml" and "not UTF-8" in p.rule]
    assert found and found[0].hint == "save it as UTF-8 text to be sure accented text is read as intended"


def test_a_scenario_s_problem_shows_beside_an_error_of_the_case_s_own_assumptions(tmp_path):
    # every problem in one pass: the case's discount rate and the scenario's unknown key together
    folder = _folder_with(tmp_path, '[[scenarios]]\nname = "A"\nfoo = 1\n')
    (folder / "finance.toml").write_text("discount_rate_frac = 5\n", encoding="utf-8")
    case, problems = load_case(folder)
    assert case is None
    errors = {(p.file, p.column) for p in problems if p.severity == "error"}
    assert ("finance.toml", "discount_rate_frac") in errors and ("scenarios.toml", "scenarios[1].foo") in errors


def test_the_scenarios_beside_an_error_are_checked_against_the_case_s_other_keys(tmp_path):
    # the case's horizon of 30 years stands although another of its keys is in error: a scenario's 25 budget years
    # fit within it (no warning against the default horizon)
    budgets = ", ".join(["1000"] * 25)
    folder = _folder_with(tmp_path, f'[[scenarios]]\nname = "A"\nbudget_per_yr = [{budgets}]\n')
    (folder / "finance.toml").write_text("horizon_yr = 30\ngrid_co2_kg_per_kwh = 5\n", encoding="utf-8")
    case, problems = load_case(folder)
    assert case is None
    assert [p for p in problems if p.column == "grid_co2_kg_per_kwh" and p.severity == "error"]
    assert not [p for p in problems if p.file == "scenarios.toml" and "horizon" in p.rule]


@pytest.mark.parametrize("finance", ["finance = 5\nhorizon_yr = 30\n",
                                     "horizon_yr = 30\n[finance]\ndiscount_rate_frac = 0.06\n",
                                     "discount_rate_frac = 0.06\n[finance]\nhorizon_yr = 30\n"])
def test_the_scenarios_beside_a_finance_file_of_the_wrong_layout_are_still_checked(tmp_path, finance):
    # a [finance] that is not a table, or keys both at the top and under [finance]: the case's assumptions cannot
    # be read, and the scenario's unknown key is reported in the same pass, its budget years checked against the
    # 30-year horizon that was written (25 years fit: no warning against the default horizon)
    budgets = ", ".join(["1000"] * 25)
    folder = _folder_with(tmp_path, f'[[scenarios]]\nname = "A"\nfoo = 1\nbudget_per_yr = [{budgets}]\n')
    (folder / "finance.toml").write_text(finance, encoding="utf-8")
    case, problems = load_case(folder)
    assert case is None
    errors = {(p.file, p.column) for p in problems if p.severity == "error"}
    assert ("finance.toml", "finance") in errors and ("scenarios.toml", "scenarios[1].foo") in errors
    assert not [p for p in problems if p.file == "scenarios.toml" and "horizon" in p.rule]


def test_a_table_one_letter_off_is_an_error_too(tmp_path):
    case, problems = load_case(_folder_with(tmp_path, '[[senarios]]\nname = "A"\ndiscount_rate_frac = 0.06\n'))
    assert case is None and _found(problems, "error", "did you mean 'scenarios'?")


@pytest.mark.parametrize("title", ["Scenarios 2", "Bill history notes", "old scenarios"])
def test_a_sheet_of_a_name_of_its_own_is_warned_not_refused(tmp_path, title):
    book = _book_with_sheet(tmp_path, [["name", "discount_rate_frac"], ["A", 0.06]], title=title)
    case, problems = load_case(book)
    assert case is not None, [str(p) for p in problems if p.severity == "error"]
    found = [p for p in problems if p.file == f"case.xlsx:{title}"]
    assert found and found[0].severity == "warning" and "ignored" in found[0].rule


def test_formulas_with_saved_results_and_hidden_rows_are_warned_once_per_sheet(tmp_path):
    # as the case's table sheets are: one warning counting the formula cells, one listing the hidden rows
    book = _book_with_sheet(tmp_path, [["name", "discount_rate_frac", "horizon_yr"],
                                       ["A", "=0.03*2", "=10+10"], ["B", 0.05, 15], ["C", 0.04, 12]])
    wb = load_workbook(book)
    wb["scenarios"].row_dimensions[3].hidden = True
    wb["scenarios"].row_dimensions[4].hidden = True
    wb.save(book)
    from test_malformed import _with_cached_result  # (a saved result, as a spreadsheet program writes it)

    _with_cached_result(book, "0.03*2", "0.06")
    _with_cached_result(book, "10+10", "20")
    case, problems = load_case(book)
    assert case is not None, [str(p) for p in problems]
    assert dict(case.scenarios)["A"].discount_rate_frac == 0.06  # the saved result, 0.03 x 2
    assert dict(case.scenarios)["A"].horizon_yr == 20  # 10 + 10
    formulas = _found(problems, "warning", "hold formulas")
    assert len(formulas) == 1 and formulas[0].value == 2 and formulas[0].file == "case.xlsx:scenarios"
    hidden = _found(problems, "warning", "hidden row")
    assert len(hidden) == 1 and hidden[0].row == 3 and "rows 3, 4" in hidden[0].rule
