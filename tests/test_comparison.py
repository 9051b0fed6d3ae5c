"""Named scenarios: how a case declares them, the comparison table, and the files and words that carry it.

Expected numbers: the differences are hand calculations on the rows given; each scenario's headline is
checked against the economics run on its own (one physics, the scenario's assumptions), which the
comparison must reproduce, not re-derive.
"""

from __future__ import annotations

import math
import shutil
from dataclasses import replace
from pathlib import Path

import pandas as pd
import pytest
from numpy.testing import assert_allclose

import casebuilder as cb
from models import comparison, scenario
from models.case import load_case
from models.finance import FinanceAssumptions

DEMO = Path(__file__).resolve().parents[1] / "data" / "demo"


def _headline(npv: float, capital: float = 100.0, projects: int = 3) -> dict:
    return {"plan_capital": capital, "yearly_saving_per_yr": 30.0, "plan_npv": npv, "co2_avoided_t_per_yr": 2.0,
            "projects": projects}


def test_each_scenario_is_set_beside_the_first_with_its_change():
    # hand calculation: NPV 50 -> 65 (+15) and 40 (-10); capital 100 -> 180 (+80); projects 3 -> 5 (+2)
    base, cheap = FinanceAssumptions(), FinanceAssumptions(discount_rate_frac=0.06, budget_per_yr=(100.0, 50.0))
    table = comparison.compare([("Case as written", base, _headline(50.0)),
                                ("Cheaper money", cheap, _headline(65.0, capital=180.0, projects=5)),
                                ("Worse", base, _headline(40.0))])
    assert table["scenario"].tolist() == ["Case as written", "Cheaper money", "Worse"]
    assert table["plan_npv_change"].tolist() == [0.0, 15.0, -10.0]
    assert table["plan_capital_change"].tolist() == [0.0, 80.0, 0.0]
    assert table["projects_change"].tolist() == [0, 2, 0]
    assert table["discount_rate_pct"].tolist() == pytest.approx([8.0, 6.0, 8.0])  # FinanceAssumptions default 8 %
    assert math.isnan(table["budget_total"].iloc[0]) and table["budget_total"].iloc[1] == 150.0


class TestReading:
    BASE = {"currency": "EUR", "discount_rate_frac": 0.08, "horizon_yr": 15}

    def test_a_scenario_changes_only_the_keys_it_names(self):
        named, problems = comparison.read_scenarios(
            [{"name": "Cheaper money", "discount_rate_frac": 0.06},
             {"name": " Long view ", "horizon_yr": 25, "escalation_energy_frac": 0.02}], self.BASE, "finance.toml")
        assert problems == []
        assert [n for n, _ in named] == ["Cheaper money", "Long view"]
        cheap, long_view = named[0][1], named[1][1]
        assert (cheap.discount_rate_frac, cheap.horizon_yr) == (0.06, 15)
        assert (long_view.discount_rate_frac, long_view.horizon_yr, long_view.escalation_energy_frac) == (0.08, 25, 0.02)

    @pytest.mark.parametrize("tables, key, rule", [
        ([{"discount_rate_frac": 0.06}], "scenarios[1].name", "needs a name"),
        ([{"name": "A", "discount_rate_frac": 0.06}, {"name": "A", "horizon_yr": 20}], "scenarios[2].name",
         "duplicate scenario name (also scenarios[1])"),
        ([{"name": "Case as written", "horizon_yr": 20}], "scenarios[1].name", "names a row of every comparison"),
        ([{"name": "Assumptions of this run", "horizon_yr": 20}], "scenarios[1].name", "names a row of every comparison"),
        ([{"name": "Dollars", "currency": "USD"}], "scenarios[1].currency", "cannot change the currency"),
        ([{"name": "Same"}], "scenarios[1]", "changes no assumption"),
        ([{"name": "Bad rate", "discount_rate_frac": 5.0}], "scenarios[1].discount_rate_frac", "between -1 and 1"),
        ([{"name": "Bad mode", "replacement_mode": "sometimes"}], "scenarios[1].replacement_mode", "'replace_now' or 'replace_at_failure'"),
        ([{"name": "x" * 61, "horizon_yr": 20}], "scenarios[1].name", "at most 60 characters"),
    ])
    def test_a_bad_scenario_is_an_error_naming_its_entry_and_key(self, tables, key, rule):
        named, problems = comparison.read_scenarios(tables, self.BASE, "finance.toml")
        found = [p for p in problems if p.column == key and p.severity == "error" and rule in p.rule]
        assert found, [str(p) for p in problems]
        assert found[0].file == "finance.toml"

    def test_a_scenario_gets_the_budget_warnings_of_the_case_s_own_file(self):
        # models.case: a budget of 0 in every year, and budget years past the horizon, are warned for a scenario
        # as for finance.toml, under the scenario's entry
        named, problems = comparison.read_scenarios(
            [{"name": "No money", "budget_per_yr": [0, 0]}, {"name": "Short", "horizon_yr": 1, "budget_per_yr": [1, 2, 3]}],
            self.BASE, "finance.toml")
        assert [n for n, _ in named] == ["No money", "Short"]
        found = {(p.column, p.severity, p.rule.split(":")[0]) for p in problems}
        assert ("scenarios[1].budget_per_yr", "warning", "every plan year's capital budget is 0") in found
        assert any(c == "scenarios[2].budget_per_yr" and sev == "warning" for c, sev, _ in found)

    def test_the_case_s_own_problems_are_not_repeated_for_each_scenario(self):
        base = {**self.BASE, "budget_per_yr": [0, 0]}  # the case's own warning, reported once with the case
        named, problems = comparison.read_scenarios([{"name": "Cheaper money", "discount_rate_frac": 0.06}], base,
                                                    "finance.toml")
        assert named and problems == []

    def test_an_unknown_key_of_a_scenario_is_an_error_with_the_key_meant(self):
        # a misspelt key would leave the scenario the same as the case without a word: refused, not ignored
        named, problems = comparison.read_scenarios([{"name": "Typo", "discount_rate": 0.06}], self.BASE, "finance.toml")
        assert named == []
        assert [(p.severity, p.column) for p in problems] == [("error", "scenarios[1].discount_rate")]
        assert problems[0].hint == "did you mean 'discount_rate_frac'?"


def test_the_demo_declares_three_invented_scenarios(demo_case):
    names = [n for n, _ in demo_case.scenarios]
    assert names == ["Cheaper money", "Dearer electricity, larger budget", "Wait for failures"]
    a = dict(demo_case.scenarios)
    # each starts from the demo's own finance.toml (discount 8 %, budgets 250k/250k/150k) and changes its keys
    assert a["Cheaper money"].discount_rate_frac == 0.06 and a["Cheaper money"].budget_per_yr == (250000.0, 250000.0, 150000.0)
    assert a["Dearer electricity, larger budget"].energy_price_factor == 1.2
    assert a["Dearer electricity, larger budget"].budget_per_yr == (400000.0, 300000.0, 200000.0)
    assert a["Wait for failures"].replacement_mode == "replace_at_failure"
    assert a["Wait for failures"].discount_rate_frac == demo_case.finance.discount_rate_frac


def test_a_workbook_declares_scenarios_on_a_sheet_of_its_own(tmp_path):
    from openpyxl import load_workbook

    book = cb.write_workbook(tmp_path / "case.xlsx")
    wb = load_workbook(book)
    sheet = wb.create_sheet("scenarios")
    for row in (["name", "discount_rate_frac", "horizon_yr", "budget_per_yr"],
                ["# a note row is passed over", None, None, None],
                ["Cheaper money", 0.06, None, None],
                ["Long view, budget", None, 25, "[1000, 2000]"]):
        sheet.append(row)
    wb.save(book)
    case, problems = load_case(book)
    assert case is not None, [str(p) for p in problems]
    a = dict(case.scenarios)
    assert list(a) == ["Cheaper money", "Long view, budget"]
    assert a["Cheaper money"].discount_rate_frac == 0.06 and a["Cheaper money"].horizon_yr == case.finance.horizon_yr
    assert a["Long view, budget"].horizon_yr == 25 and a["Long view, budget"].budget_per_yr == (1000.0, 2000.0)
    assert not [p for p in problems if "scenarios" in str(p.file) and "not part of the case format" in p.rule]


def test_a_workbook_scenario_with_a_bad_value_names_its_sheet_and_row_entry(tmp_path):
    from openpyxl import load_workbook

    book = cb.write_workbook(tmp_path / "case.xlsx")
    wb = load_workbook(book)
    sheet = wb.create_sheet("scenarios")
    sheet.append(["name", "discount_rate_frac"])
    sheet.append(["Bad", 7])
    wb.save(book)
    case, problems = load_case(book)
    assert case is None
    found = [p for p in problems if p.column == "scenarios[1].discount_rate_frac"]
    assert found and found[0].file == "case.xlsx:scenarios" and found[0].row == 2  # the header is row 1


def test_a_value_under_a_blank_header_cell_is_an_error_naming_its_row_and_column(tmp_path):
    # a value the header does not name would change nothing: it is reported, not dropped
    from openpyxl import load_workbook

    book = cb.write_workbook(tmp_path / "case.xlsx")
    wb = load_workbook(book)
    sheet = wb.create_sheet("scenarios")
    sheet.append(["name", "discount_rate_frac", None])
    sheet.append(["Cheaper money", 0.06, 0.05])
    wb.save(book)
    case, problems = load_case(book)
    assert case is None
    found = [p for p in problems if p.column == "scenarios[1] (column C)"]
    assert found and found[0].severity == "error" and found[0].row == 2 and found[0].value == 0.05
    assert "blank header" in found[0].rule


def test_a_toml_scenario_key_is_never_taken_for_the_sheet_s_row_number(tmp_path):
    # the sheet's row number is kept under a key no TOML table can hold: a key of that spelling is unknown
    folder = tmp_path / "demo"
    shutil.copytree(DEMO, folder)
    (folder / "scenarios.toml").write_text('[[scenarios]]\nname = "A"\ndiscount_rate_frac = 0.06\n_sheet_row = 4\n',
                                           encoding="utf-8")
    case, problems = load_case(folder)
    assert case is None
    assert [p.column for p in problems if p.severity == "error"] == ["scenarios[1]._sheet_row"]


def test_each_scenario_row_is_the_economics_of_its_own_assumptions(demo_run_physics):
    # the comparison reproduces, for each scenario, the plan the economics give under its assumptions alone
    case, phys = demo_run_physics
    result = scenario.economics(case, phys, case.finance, with_risk=False)
    table = comparison.case_scenarios(case, result).set_index("scenario")
    assert list(table.index) == [comparison.BASE_NAME] + [n for n, _ in case.scenarios]
    for name, assumptions in [(comparison.BASE_NAME, case.finance)] + list(case.scenarios):
        own = scenario.economics(case, phys, assumptions, with_risk=False)
        plan = own.plan
        assert table.loc[name, "plan_npv"] == pytest.approx(float(plan["npv_at_plan_start"].sum()), rel=1e-9), name
        assert table.loc[name, "plan_capital"] == pytest.approx(float(plan["capital"].sum()), rel=1e-9), name
        assert table.loc[name, "projects"] == len(plan), name
        # its yearly saving as its plan counts it and its CO2, summed by hand from its own results
        res = own.results.set_index(["asset_id", "option_id"])
        shares = own.plan_status.get("repriced") or {}
        pairs = list(zip(plan["asset_id"], plan["option_id"]))
        saving = sum(shares.get(f"{a}/{o}", 1.0) * res.loc[(a, o), "bill_saving_per_yr"]
                     + res.loc[(a, o), "saving_maintenance_per_yr"] for a, o in pairs)
        assert table.loc[name, "yearly_saving_per_yr"] == pytest.approx(saving, rel=1e-9), name
        assert table.loc[name, "co2_avoided_t_per_yr"] == pytest.approx(
            sum(res.loc[p, "co2_avoided_t_per_yr"] for p in pairs), rel=1e-9), name
    # each change is the row's figure less the case's own
    base = table.loc[comparison.BASE_NAME]
    for column in ("plan_npv", "plan_capital", "yearly_saving_per_yr"):
        assert_allclose(table[f"{column}_change"].to_numpy(dtype=float), (table[column] - base[column]).to_numpy(dtype=float),
                        rtol=1e-12, atol=1e-9, err_msg=column)
    # a lower discount rate raises the value of the same savings (docs/finance.md, section 2)
    assert table.loc["Cheaper money", "plan_npv_change"] > 0
    assert table.loc["Dearer electricity, larger budget", "budget_total"] == 900000.0


def test_run_writes_the_scenarios_file_and_says_each_change(tmp_path, capsys):
    from drivecase.cli import main

    out = tmp_path / "out"
    assert main(["run", str(DEMO), "--out", str(out), "--no-risk", "--quiet"]) == 0
    table = pd.read_csv(out / "scenarios.csv")
    assert table["scenario"].tolist() == ["Case as written", "Cheaper money", "Dearer electricity, larger budget",
                                          "Wait for failures"]
    assert table["plan_npv_change"].iloc[0] == 0.0
    said = capsys.readouterr().out
    assert "Scenarios (scenarios.csv): the plan under each, and its change from the case as written" in said
    assert "  Cheaper money: plan NPV EUR " in said and "(NPV +EUR " in said


def test_a_case_without_scenarios_writes_its_own_row_alone(tmp_path):
    from drivecase.cli import main

    folder = cb.with_flat_tariff(cb.write_case(tmp_path / "case"))
    out = tmp_path / "out"
    assert main(["run", str(folder), "--out", str(out), "--no-risk", "--quiet"]) == 0
    table = pd.read_csv(out / "scenarios.csv")
    assert table["scenario"].tolist() == ["Case as written"]


def test_scenarios_start_from_the_case_s_own_assumptions_as_saved(tmp_path):
    # scenarios.toml names only the changes: a finance key saved into the case (models.io.save_finance_settings)
    # reaches every scenario that does not change it, and scenarios.toml itself is left as written
    from models.io import save_finance_settings

    folder = tmp_path / "demo"
    shutil.copytree(DEMO, folder)
    before = (folder / "scenarios.toml").read_bytes()
    saved = save_finance_settings(folder, {"tax_rate_frac": 0.25})
    assert saved.outcome == "saved"
    case, problems = load_case(folder)
    assert case is not None, [str(p) for p in problems]
    assert case.finance.tax_rate_frac == 0.25
    assert [n for n, _ in case.scenarios] == ["Cheaper money", "Dearer electricity, larger budget", "Wait for failures"]
    assert all(a.tax_rate_frac == 0.25 for _, a in case.scenarios)
    assert (folder / "scenarios.toml").read_bytes() == before


def test_a_key_of_the_case_s_own_in_the_scenarios_file_is_warned(tmp_path):
    folder = tmp_path / "demo"
    shutil.copytree(DEMO, folder)
    text = (folder / "scenarios.toml").read_text(encoding="utf-8")
    (folder / "scenarios.toml").write_text("discount_rate_frac = 0.05\n" + text, encoding="utf-8")
    case, problems = load_case(folder)
    assert case is not None and case.finance.discount_rate_frac == 0.08  # (finance.toml's, not this one)
    found = [p for p in problems if p.file == "scenarios.toml" and p.column == "discount_rate_frac"]
    assert found and found[0].severity == "warning" and "finance.toml" in found[0].hint


def test_the_dashboard_headline_is_the_comparisons(demo_run_physics):
    from dashboard import services

    case, phys = demo_run_physics
    result = scenario.economics(case, phys, replace(case.finance, discount_rate_frac=0.07), with_risk=False)
    h = services.headline(result)
    # the cards' figures from the plan's rows (hand sums): its capital and NPV at plan start, its projects, its CO2,
    # and each project's yearly saving as the plan counts it (share of the bill saving + maintenance saving)
    plan, res = result.plan, result.results.set_index(["asset_id", "option_id"])
    shares = result.plan_status.get("repriced") or {}
    saving = sum(shares.get(f"{a}/{o}", 1.0) * res.loc[(a, o), "bill_saving_per_yr"] + res.loc[(a, o), "saving_maintenance_per_yr"]
                 for a, o in zip(plan["asset_id"], plan["option_id"]))
    co2 = sum(res.loc[(a, o), "co2_avoided_t_per_yr"] for a, o in zip(plan["asset_id"], plan["option_id"]))
    assert h["projects"] == len(plan) > 0
    assert h["plan_capital"] == pytest.approx(float(plan["capital"].sum()), rel=1e-12)
    assert h["plan_npv"] == pytest.approx(float(plan["npv_at_plan_start"].sum()), rel=1e-12)
    assert h["yearly_saving_per_yr"] == pytest.approx(saving, rel=1e-9)
    assert h["co2_avoided_t_per_yr"] == pytest.approx(co2, rel=1e-9)


def test_the_pack_carries_the_scenarios(demo_run_physics):
    # the report's plan section and the workbook's Scenarios sheet: the same rows as scenarios.csv
    from openpyxl import load_workbook
    import io

    from models.pack import content
    from models.pack.report_html import render_report
    from models.pack.workbook import build_workbook

    case, phys = demo_run_physics
    result = scenario.economics(case, phys, case.finance, with_risk=False)
    table = comparison.case_scenarios(case, result)
    scope = content.select_scope(case, result)
    html = render_report(case, result, scope)
    assert "The plan under the case's scenarios" in html
    for name in table["scenario"]:
        assert f"<td>{name}</td>" in html
    sheet = load_workbook(io.BytesIO(build_workbook(case, result, scope)))["Scenarios"]
    cells = [[c.value for c in r] for r in sheet.iter_rows()]
    header = next(r for r in cells if r and r[0] == "Scenario")
    body = cells[cells.index(header) + 1: cells.index(header) + 1 + len(table)]
    assert [r[0] for r in body] == table["scenario"].tolist()
    npv_col = header.index("Plan NPV [EUR]")
    assert [r[npv_col] for r in body] == pytest.approx(table["plan_npv"].tolist())


def test_a_report_of_a_case_without_scenarios_has_no_such_section(tmp_path):
    from models.pack import content
    from models.pack.report_html import render_report

    folder = cb.with_flat_tariff(cb.write_case(tmp_path / "case"))
    case, _ = load_case(folder)
    result = scenario.run(case, case.finance, with_risk=False)
    assert "The plan under the case's scenarios" not in render_report(case, result, content.select_scope(case, result))


def test_a_run_under_edited_assumptions_is_a_row_of_its_own(demo_run_physics):
    # a pack made from the dashboard's edited assumptions (discount 12 %): the case as written stays the first row,
    # the run's own follows it, and every change is from the case as written (independent economics runs)
    case, phys = demo_run_physics
    edited = replace(case.finance, discount_rate_frac=0.12)
    result = scenario.economics(case, phys, edited, with_risk=False)
    table = comparison.case_scenarios(case, result).set_index("scenario")
    assert list(table.index[:2]) == [comparison.BASE_NAME, comparison.RUN_NAME]
    own = scenario.economics(case, phys, case.finance, with_risk=False)
    assert table.loc[comparison.BASE_NAME, "plan_npv"] == pytest.approx(float(own.plan["npv_at_plan_start"].sum()), rel=1e-9)
    assert table.loc[comparison.BASE_NAME, "discount_rate_pct"] == pytest.approx(8.0)
    assert table.loc[comparison.RUN_NAME, "discount_rate_pct"] == pytest.approx(12.0)
    assert table.loc[comparison.RUN_NAME, "plan_npv_change"] < 0
    wait = scenario.economics(case, phys, dict(case.scenarios)["Wait for failures"], with_risk=False)
    assert table.loc["Wait for failures", "plan_npv_change"] == pytest.approx(
        float(wait.plan["npv_at_plan_start"].sum()) - float(own.plan["npv_at_plan_start"].sum()), rel=1e-9)
    # a run under another seed alone is still the case as written
    seeded = scenario.economics(case, phys, replace(case.finance, monte_carlo_seed=7), with_risk=False)
    assert comparison.case_scenarios(case, seeded)["scenario"].iloc[1] == "Cheaper money"

