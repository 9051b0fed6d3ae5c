"""The capital-request workbook: sheets, live formulas recomputed by an independent evaluator, injection guard.

The numbers compared are the engine's (``result.results``, ``result.plan``); the workbook's formulas are
recomputed by the ``formulas`` package (an independent spreadsheet-formula evaluator, PyPI, 1.3.x),
never by drivecase. A match within 0.01 % shows the workbook reproduces the engine.
"""

from __future__ import annotations

import dataclasses
import io
import math
import re
from pathlib import Path

import numpy as np
import numpy_financial as npf
import pandas as pd
import pytest
from numpy.testing import assert_allclose
from openpyxl import Workbook, load_workbook

import casebuilder as cb
from models import scenario
from models.case import load_case
from models.pack import WORKBOOK_NAME, write_pack
from models.pack.content import select_scope
from models.pack.workbook import build_workbook
from models.pack.workbook import put, put_formula, write_project_block

formulas = pytest.importorskip("formulas")

# two plan years: the drive (about 3,700) fills year 0's 4,000; the new IE3 motor of C1 (about 10,900, the only
# other project worth its capital on a flat energy tariff) waits for year 1's 11,000
FINANCE = ('discount_rate_frac = 0.08\nhorizon_yr = 15\nrate_basis = "real"\nbudget_per_yr = [4000, 11000]\n'
           'monte_carlo_draws = 200\nmonte_carlo_seed = 7\n')
INJECTION_HYPERLINK = '=HYPERLINK("http://x","y")'
INJECTION_AT = "@SUM(A1)"
INJECTION_HTML = '<script>alert(1)</script> & "pump"'
#: Relative tolerance of the formula check: 0.01 % (the "Checks" sheet's, docs/pack.md; both sides are doubles,
#: the evaluator's IRR is a polynomial root and the engine's a Newton root, both far tighter than this).
RTOL = 1e-4
SHEETS = ["Read me", "Assumptions", "Results", "Cash flows", "Checks", "Plan", "Financing", "Scenarios", "Bills",
          "Harmonics", "Data quality", "End of life", "Risk"]


def build_case(folder: Path, descriptions: dict[str, str] | None = None, ids: dict[str, str] | None = None):
    """Write and load the three-motor test case (flat 0.10/kWh tariff), with optional descriptions or ids."""
    assets = [list(row) for row in cb.ASSETS]
    for row in assets:
        if descriptions and row[0] in descriptions:
            row[2] = descriptions[row[0]]
        if ids and row[0] in ids:
            row[0] = ids[row[0]]
    # a region without minimum-efficiency rules: C1's new IE3 motor stays on offer (in the EU a 75 kW 2-pole
    # motor must be IE4)
    cb.with_flat_tariff(cb.write_case(folder, assets=assets, case_toml=cb.CASE_TOML + 'region = "OTHER"\n'))
    (folder / "finance.toml").write_text(FINANCE, encoding="utf-8")
    case, problems = load_case(folder)
    assert case is not None, problems
    return case


@pytest.fixture(scope="module")
def small(tmp_path_factory):
    """The small case (injection strings in two descriptions) and its run, with risk."""
    case = build_case(tmp_path_factory.mktemp("case"),
                      descriptions={"F1": INJECTION_HYPERLINK, "C1": INJECTION_AT, "P1": INJECTION_HTML})
    return case, scenario.run(case, case.finance, with_risk=True)


@pytest.fixture(scope="module")
def asset_pack(small, tmp_path_factory):
    """Pack of every option of the three assets (25 projects)."""
    case, result = small
    out = tmp_path_factory.mktemp("pack_assets")
    write_pack(case, result, out, assets=["P1", "F1", "C1"], plan=False)
    return out / WORKBOOK_NAME


@pytest.fixture(scope="module")
def plan_pack(small, tmp_path_factory):
    case, result = small
    out = tmp_path_factory.mktemp("pack_plan")
    write_pack(case, result, out)
    return out / WORKBOOK_NAME


def with_discount_rate(path: Path, rate_frac: float, out: Path):
    """Save a copy of a pack's workbook at ``out`` with the Assumptions sheet's discount rate set to ``rate_frac``;
    return the edited workbook (openpyxl, formulas as written)."""
    book = load_workbook(path)
    ws = book["Assumptions"]
    row = next(r for r in range(1, ws.max_row + 1) if ws.cell(r, 1).value == "discount_rate_frac")
    ws.cell(row, 2).value = rate_frac
    book.save(out)
    return book


def evaluate(path: Path) -> dict[tuple[str, str], object]:
    """Recompute every formula with the independent evaluator; return {(SHEET, 'B12'): value}."""
    model = formulas.ExcelModel().loads(str(path)).finish()
    solution = model.calculate()
    out = {}
    for key, value in solution.items():
        if ":" in key or "!" not in key:
            continue
        sheet, ref = key.split("!")
        sheet = sheet.split("]")[-1].strip("'")
        cell_value = value.value[0][0] if hasattr(value, "value") else value
        out[(sheet.upper(), ref.upper())] = cell_value
    return out


def block_rows(path: Path) -> dict[tuple[str, str], dict[str, int]]:
    """Find each project block on 'Cash flows' by its title and labels: {(asset, option): {label: row}}."""
    ws = load_workbook(path)["Cash flows"]
    blocks: dict[tuple[str, str], dict[str, int]] = {}
    current = None
    for r in range(1, ws.max_row + 1):
        text = ws.cell(r, 1).value
        if not isinstance(text, str):
            continue
        if " / " in text and ": " in text and ws.cell(r + 1, 1).value == "Project year":
            asset, rest = text.split(" / ", 1)
            current = (asset, rest.split(":", 1)[0])
            blocks[current] = {"title": r}
        elif current is not None:
            blocks[current].setdefault(text, r)
    return blocks


def as_float(value) -> float:
    """An evaluated cell as a float; text ('none', 'not within horizon') and errors become NaN."""
    try:
        return float(value)
    except (TypeError, ValueError):
        return math.nan


class TestWorkbookOpens:
    def test_expected_sheets(self, asset_pack):
        assert load_workbook(asset_pack).sheetnames == SHEETS

    def test_every_finance_assumption_listed(self, asset_pack, small):
        ws = load_workbook(asset_pack)["Assumptions"]
        keys = {ws.cell(r, 1).value for r in range(1, ws.max_row + 1)}
        # every field of the case's FinanceAssumptions appears (budget as one row per plan year)
        for name in ("discount_rate_frac", "horizon_yr", "escalation_energy_frac", "grid_co2_kg_per_kwh",
                     "replacement_mode", "monte_carlo_seed", "budget_per_yr, plan year 0", "budget_per_yr, plan year 1"):
            assert name in keys

    def test_one_block_per_project(self, asset_pack, small):
        _, result = small
        res = result.results
        projects = set(zip(res["asset_id"], res["option_id"])) - {(a, "keep") for a in res["asset_id"]}
        assert set(block_rows(asset_pack)) == projects

    def test_money_cells_carry_the_currency(self, asset_pack):
        ws = load_workbook(asset_pack)["Results"]
        formats = {ws.cell(r, c).number_format for r in range(4, 10) for c in range(1, ws.max_column + 1)}
        assert any('"EUR"' in f for f in formats)

    def test_money_headers_name_the_currency(self, asset_pack):
        ws = load_workbook(asset_pack)["Results"]
        headers = [ws.cell(3, c).value for c in range(1, ws.max_column + 1)]
        money = [h for h, c in zip(headers, range(1, ws.max_column + 1)) if '"EUR"' in ws.cell(4, c).number_format]
        assert money and all("[EUR" in h for h in money), money
        assert "Bill saving [EUR/yr]" in headers and "NPV [EUR]" in headers and "Abatement cost [EUR/t]" in headers


def test_plan_sheet_says_how_far_the_exact_plan_is_proven(plan_pack, small):
    # the workbook carries the plan's proof as the report and the terminal say it (the run's own status message)
    _, result = small
    ws = load_workbook(plan_pack)["Plan"]
    cells = {ws.cell(r, 1).value: ws.cell(r, 2).value for r in range(1, ws.max_row + 1)}
    assert cells["Exact plan's proof"].startswith(result.plan_status["message"] + ".")


def test_plan_sheet_money_headers_name_the_currency(plan_pack):
    ws = load_workbook(plan_pack)["Plan"]
    headers = [r for r in range(1, ws.max_row + 1) if ws.cell(r, 1).value == "Plan year"]
    assert len(headers) == 3  # the exact plan, the rank-order plan, the totals by plan year
    for r in headers:
        money = [c for c in range(1, ws.max_column + 1) if '"EUR"' in ws.cell(r + 1, c).number_format]
        # "[EUR]", or "[EUR/yr]" for the yearly saving
        assert money and all(re.search(r"\[EUR(/yr)?\]", ws.cell(r, c).value) for c in money), \
            [ws.cell(r, c).value for c in money]


@pytest.fixture(scope="module")
def values(asset_pack):
    """The asset pack's cells as the independent evaluator computes them (about 7 s, so once)."""
    return evaluate(asset_pack)


@pytest.fixture(scope="module")
def blocks(asset_pack):
    return block_rows(asset_pack)


class TestFormulasReproduceTheEngine:
    """Independent tool: the `formulas` evaluator recomputes the sheet; expected = the engine's metrics."""

    def metric(self, values, blocks, asset, option, label):
        return values[("CASH FLOWS", f"B{blocks[(asset, option)][label]}")]

    def test_net_rows_add_up_to_the_engine_flows(self, values, blocks, small):
        _, result = small
        cf = result.cashflows
        for (asset, option), rows in blocks.items():
            net_row = rows["Net cash flow"]
            engine = cf[(cf["asset_id"] == asset) & (cf["option_id"] == option)].groupby("year")["amount"].sum()
            expected = engine.reindex(range(16), fill_value=0.0).to_numpy()
            got = [as_float(values[("CASH FLOWS", f"{chr(ord('B') + t)}{net_row}")]) for t in range(16)]
            assert_allclose(got, expected, rtol=1e-12, atol=1e-9)  # same doubles summed: rounding only

    def test_differences_of_rounding_read_zero_not_minus_zero(self, values, blocks, asset_pack):
        # The "Difference" column (workbook formula less engine) is rounded to a millionth: two sums of the
        # same doubles in another order differ by about 1e-10, which a money format would show as "-0.00".
        # (A spreadsheet has no negative zero; the value stored beside the formula, which readers that do not
        # recalculate show, must not carry one either.)
        ws = load_workbook(asset_pack)["Cash flows"]
        stored = load_workbook(asset_pack, data_only=True)["Cash flows"]
        seen = 0
        for rows in blocks.values():
            mr = rows["NPV at the discount rate"]
            got, kept = values[("CASH FLOWS", f"D{mr}")], stored.cell(mr, 4).value
            assert ws.cell(mr, 4).value.startswith("=IF(") and "ROUND(" in ws.cell(mr, 4).value
            if isinstance(got, float):
                assert abs(got) < 0.01, got
                assert isinstance(kept, (int, float)) and abs(kept) < 0.01, kept
                assert kept != 0.0 or math.copysign(1.0, kept) > 0, kept
                seen += 1
        assert seen > 0

    def test_npv_of_every_project(self, values, blocks, small):
        _, result = small
        for r in result.results[result.results["option_id"] != "keep"].itertuples():
            got = as_float(self.metric(values, blocks, r.asset_id, r.option_id, "NPV at the discount rate"))
            assert_allclose(got, r.npv, rtol=RTOL, atol=1e-6)

    def test_irr_of_every_project(self, values, blocks, small):
        _, result = small
        for r in result.results[result.results["option_id"] != "keep"].itertuples():
            got = self.metric(values, blocks, r.asset_id, r.option_id, "IRR")
            if r.irr_status == "none":
                assert got == "none"  # no rate zeroes the NPV: the sheet says so in words
            else:
                assert_allclose(as_float(got), r.irr_frac, rtol=RTOL)

    def test_paybacks_of_every_project(self, values, blocks, small):
        _, result = small
        for r in result.results[result.results["option_id"] != "keep"].itertuples():
            for label, engine in (("Simple payback [yr]", r.simple_payback_yr),
                                  ("Discounted payback [yr]", r.discounted_payback_yr)):
                got = self.metric(values, blocks, r.asset_id, r.option_id, label)
                if math.isinf(engine):
                    assert got == "not within horizon"
                else:
                    assert_allclose(as_float(got), engine, rtol=RTOL)

    def test_named_cases(self, values, blocks, small):
        """The variety the comparison above covers, pinned so a changed case cannot hollow it out."""
        _, result = small
        res = result.results.set_index(["asset_id", "option_id"])
        # payback within the horizon (the recommended drive)
        assert math.isfinite(res.loc[("P1", "add_drive"), "simple_payback_yr"])
        # simple payback inside 15 years, discounted payback not
        assert math.isfinite(res.loc[("C1", "lspm"), "simple_payback_yr"])
        assert math.isinf(res.loc[("C1", "lspm"), "discounted_payback_yr"])
        assert self.metric(values, blocks, "C1", "lspm", "Discounted payback [yr]") == "not within horizon"
        # payback never reached and no IRR at all (the rewind only loses money)
        assert math.isinf(res.loc[("P1", "rewind"), "simple_payback_yr"])
        assert self.metric(values, blocks, "P1", "rewind", "Simple payback [yr]") == "not within horizon"
        assert self.metric(values, blocks, "P1", "rewind", "IRR") == "none"
        # flows with several sign changes: both sides report the root closest to 0
        assert res.loc[("F1", "rewind"), "irr_status"] == "multiple"

    def test_checks_sheet_all_ok(self, values, blocks):
        statuses = [v for (sheet, ref), v in values.items() if sheet == "CHECKS" and ref.startswith("M")
                    and ref != "M4"]
        assert len(statuses) == len(blocks)
        assert set(statuses) == {"OK"}


class TestLiveFormulas:
    def test_discount_rate_cell_drives_every_npv(self, plan_pack, small, tmp_path):
        """Change the rate on 'Assumptions': the sheet's NPV follows numpy_financial.npv of the engine's flows."""
        _, result = small
        edited = tmp_path / "edited.xlsx"
        with_discount_rate(plan_pack, 0.12, edited)
        values = evaluate(edited)
        blocks = block_rows(edited)
        cf = result.cashflows
        for (asset, option), rows in blocks.items():
            flows = cf[(cf["asset_id"] == asset) & (cf["option_id"] == option)].groupby("year")["amount"].sum()
            flows = flows.reindex(range(16), fill_value=0.0).to_numpy()
            # independent tool: numpy_financial 1.0 npv (year 0 undiscounted, as the engine's convention)
            expected = npf.npv(0.12, flows)
            got = as_float(values[("CASH FLOWS", f"B{rows['NPV at the discount rate']}")])
            assert_allclose(got, expected, rtol=1e-9)

    def test_plan_sheet_formulas(self, plan_pack, small):
        """Plan-year totals (SUMIF) and NPV at plan start (NPV / (1 + d)^year) against the engine's plan."""
        _, result = small
        plan = result.plan
        assert sorted(plan["start_yr"]) == [0, 1]  # the budget splits the two projects over two years
        values = evaluate(plan_pack)
        ws = load_workbook(plan_pack)["Plan"]
        title = next(r for r in range(1, ws.max_row + 1) if ws.cell(r, 1).value == "By plan year")
        header = next(r for r in range(title, ws.max_row + 1) if ws.cell(r, 1).value == "Plan year")
        for r in range(header + 1, header + 3):
            year = ws.cell(r, 1).value
            expected = plan.loc[plan["start_yr"] == year, "capital"].sum()
            assert_allclose(as_float(values[("PLAN", f"C{r}")]), expected, rtol=1e-12)
            expected_npv = plan.loc[plan["start_yr"] == year, "npv_at_plan_start"].sum()
            assert_allclose(as_float(values[("PLAN", f"E{r}")]), expected_npv, rtol=RTOL)


def test_a_plan_replaced_at_failure_counts_capital_in_the_year_it_is_spent(tmp_path):
    """A motor replaced when it fails is bought in the plan year it is expected to fail: the Plan sheet's and the
    report's capital by plan year stay within each year's budget (the plan solver's own rule), with what falls
    after the budgeted years on a row of its own. Before, the whole capital showed in the project's start year."""
    from models.pack.report_html import report_context

    case = build_case(tmp_path / "case")
    result = scenario.run(case, dataclasses.replace(case.finance, replacement_mode="replace_at_failure"),
                          with_risk=False)
    budgets = list(result.assumptions.budget_per_yr)
    # independent path: the plan's capital rows of the long cash-flow table, project year t in plan year start + t
    cf = result.cashflows
    capital = cf[cf["component"].astype(str).str.startswith("capital_")].merge(
        result.plan[["asset_id", "option_id", "start_yr"]], on=["asset_id", "option_id"])
    plan_year = capital["start_yr"] + capital["year"]
    expected = [-capital.loc[plan_year == y, "amount"].sum() for y in range(len(budgets))]
    later = -capital.loc[plan_year >= len(budgets), "amount"].sum()
    assert later > 0 and (result.plan["start_yr"] < len(budgets)).all()  # the small case has one such motor
    assert sum(expected) < budgets[0] < result.plan.loc[result.plan["start_yr"] == 0, "capital"].sum()

    out = tmp_path / "pack"
    write_pack(case, result, out)
    ws = load_workbook(out / WORKBOOK_NAME)["Plan"]
    title = next(r for r in range(1, ws.max_row + 1) if ws.cell(r, 1).value == "By plan year")
    header = next(r for r in range(title, ws.max_row + 1) if ws.cell(r, 1).value == "Plan year")
    got = [ws.cell(header + 1 + y, 3).value for y in range(len(budgets))]
    assert_allclose(got, expected, rtol=1e-12, atol=1e-9)
    assert all(g <= b + 1e-6 for g, b in zip(got, budgets))
    assert ws.cell(header + 1 + len(budgets), 1).value == "later"
    assert_allclose(ws.cell(header + 1 + len(budgets), 3).value, later, rtol=1e-12)

    ctx = report_context(case, result, select_scope(case, result), [])
    rows = [[c["text"] for c in r["cells"]] for r in ctx["plan_rows"]]
    assert [r[0] for r in rows] == [str(y) for y in range(len(budgets))] + ["later", "Total, later included"]
    assert [float(r[2].replace(",", "")) for r in rows] == [round(v) for v in expected] + [round(later),
                                                                                          round(sum(expected) + later)]
    # no budget beside a total with later spend in it (the two do not compare), as the workbook's Plan sheet; the
    # plan's projects and NPVs at plan start (the plan's own rows)
    assert rows[-1][1] == ""
    assert rows[-1][3] == str(len(result.plan))
    assert float(rows[-1][4].replace(",", "")) == round(result.plan["npv_at_plan_start"].sum())
    # the decision table names the year the motor is bought beside its plan year (the first capital row above)
    first = capital[capital["amount"] < 0].assign(plan_year=plan_year).groupby("asset_id")["plan_year"].min()
    start = result.plan.set_index("asset_id")["start_yr"]
    waiting = [a for a in first.index if first[a] > start[a]]
    assert waiting
    decision = {r["cells"][0]["text"]: r["cells"][3]["text"] for r in ctx["decision_rows"]}
    for a in waiting:
        assert decision[a] == f"{int(start[a])}, bought {int(first[a])}", decision[a]
    assert 'read "n, bought m"' in ctx["measures_text"]


class TestInjectionGuard:
    def test_descriptions_are_inert_text(self, asset_pack):
        book = load_workbook(asset_pack)
        found = {INJECTION_HYPERLINK: 0, INJECTION_AT: 0, INJECTION_HTML: 0}
        for ws in book.worksheets:
            for row in ws.iter_rows():
                for c in row:
                    if c.value in found:
                        found[c.value] += 1
                        assert c.data_type == "s"
                        if c.value[0] in "=@":
                            assert c.quotePrefix  # a spreadsheet keeps it as text even when edited
        assert all(n > 0 for n in found.values()), found

    def test_no_formula_carries_user_text(self, asset_pack):
        book = load_workbook(asset_pack)
        for ws in book.worksheets:
            for row in ws.iter_rows():
                for c in row:
                    if c.data_type == "f":
                        assert "HYPERLINK" not in c.value and "SUM(A1)" not in c.value

    def test_evaluator_reads_the_text_back(self, values):
        assert INJECTION_HYPERLINK in set(values.values())

    def test_put_text_guard(self):
        ws = Workbook().active
        for k, text in enumerate(("=1+1", "+1", "-1", "@A1", "plain", "bell\x07char"), start=1):
            c = put(ws, k, 1, text)
            assert c.data_type == "s"
        assert ws.cell(6, 1).value == "bellchar"  # control characters XML cannot hold are dropped
        assert put(ws, 7, 1, float("inf")).value is None  # infinite numbers are left blank
        with pytest.raises(ValueError, match="starts with '='"):
            put_formula(ws, 8, 1, "SUM(A1:A2)")


@pytest.fixture(scope="module")
def hand(tmp_path_factory):
    """Three hand-worked projects written with the block writer, evaluated by `formulas`."""
    book = Workbook()
    book.active.title = "Assumptions"
    book["Assumptions"]["A2"] = "discount_rate_frac"
    book["Assumptions"]["B2"] = 0.08
    ws = book.create_sheet("Cash flows")
    cases = {"A": {"capital_equipment": [-1000, 0, 0, 0], "savings_energy": [0, 400, 400, 400]},
             "B": {"capital_equipment": [-1000, 0, 0, 0], "savings_energy": [0, -10, -10, -10]},
             "C": {"savings_energy": [0, 0, 50, 50]},
             "D": {"capital_equipment": [0, -300, 0, 0], "savings_energy": [0, 0, 200, 200]},
             "E": {"capital_equipment": [0, 0, 0, 0]}}
    row = 1
    for name, flows in cases.items():
        table = pd.DataFrame.from_dict(flows, orient="index", columns=range(4), dtype=float)
        row, _ = write_project_block(ws, row, f"T{name} / case: hand", table, "'Assumptions'!$B$2", {})
    path = tmp_path_factory.mktemp("hand") / "hand.xlsx"
    book.save(path)
    values = evaluate(path)
    rows = block_rows(path)
    return {name: {label: values.get(("CASH FLOWS", f"B{r}")) for label, r in rows[(f"T{name}", "case")].items()}
            for name in cases}


class TestBlockFormulasByHand:
    """Hand calculation, see docs/derivations/pack-workbook-formulas.md (evaluated by `formulas`)."""

    def test_case_a(self, hand):
        a = hand["A"]
        assert_allclose(as_float(a["NPV at the discount rate"]), 30.838795, atol=1e-6)  # hand, case A
        assert_allclose(as_float(a["Simple payback [yr]"]), 2.5, rtol=1e-12)  # hand, case A
        assert_allclose(as_float(a["Discounted payback [yr]"]), 2.90288, rtol=1e-9)  # hand, case A (exact)
        assert_allclose(as_float(a["IRR"]), 0.097010, atol=5e-7)  # hand interpolation, case A, to 6 decimals

    def test_case_b_never_pays_back(self, hand):
        b = hand["B"]
        assert_allclose(as_float(b["NPV at the discount rate"]), -1025.770970, atol=1e-6)  # hand, case B
        assert b["Simple payback [yr]"] == b["Discounted payback [yr]"] == "not within horizon"
        assert b["IRR"] == "none"

    def test_case_c_nothing_up_front(self, hand):
        c = hand["C"]
        assert_allclose(as_float(c["NPV at the discount rate"]), 82.558553, atol=1e-6)  # hand, case C
        assert_allclose([as_float(c["Simple payback [yr]"]), as_float(c["Discounted payback [yr]"])], 0.0,
                        atol=1e-12)  # hand, case C: S_0 = 0 has paid back at once
        assert c["IRR"] == "none"


    def test_case_d_counted_from_the_outlay(self, hand):
        # hand, case D (pack-workbook-formulas.md): bought in year 1 (a replacement at failure); cumulative 0,
        # -300, -100, +100: back at zero in year 3 at 2 + 100/200 = 2.5, less the outlay year 1: 1.5 yr
        assert_allclose(as_float(hand["D"]["Simple payback [yr]"]), 1.5, rtol=1e-12)

    def test_case_e_no_flows_no_payback(self, hand):
        # hand, case E: nothing invested, nothing saved (a failure beyond the horizon)
        e = hand["E"]
        assert e["Simple payback [yr]"] == e["Discounted payback [yr]"] == "not within horizon"


def test_defaulted_inputs_are_numbers_to_six_digits():
    # the data-quality sheet shows a defaulted efficiency or speed as a number cell, not 17 digits of text
    from models.case import default_value

    assert default_value("0.8962932127617428") == 0.896293  # hand: 6 significant digits
    assert default_value(974.9238910196385) == 974.924
    assert default_value("induction") == "induction" and default_value(None) == ""


def test_plan_and_risk_sheets_speak_in_words(plan_pack):
    # the approver reads labels: no engine keys in the comparison, the end of life or the sensitivity rows
    book = load_workbook(plan_pack)
    words = " ".join(str(c.value) for name in ("Plan", "End of life", "Risk") if name in book.sheetnames
                     for r in book[name].iter_rows() for c in r if c.value is not None)
    for key in ("npv_exact", "projects_greedy", "shortfall_frac", "replace_now", "energy_price_mult", "min_rated_p_kw"):
        assert key not in words, key
    assert "Projects in the exact plan" in words
    # the end-of-life costs come with the failure law's caution
    sheet = " ".join(str(c.value) for r in book["End of life"].iter_rows() for c in r if c.value is not None)
    assert "not a forecast of when this motor will fail" in sheet and "each past rewind shortens" in sheet


def test_the_checks_sheet_says_yes_or_no_as_the_other_sheets_do(plan_pack):
    ws = load_workbook(plan_pack)["Checks"]
    assert ws.cell(4, 4).value == "Recommended"
    column = [ws.cell(r, 4).value for r in range(5, ws.max_row + 1) if ws.cell(r, 1).value is not None]
    assert column and set(column) <= {"yes", "no"} and "yes" in column, column


def risk_tables(book) -> dict[str, list[dict[str, object]]]:
    """The Risk sheet's tables: {bold heading: rows as {header: value}}. A table's header row is the first row
    after its heading in the header fill; its rows run to the first blank row."""
    ws = book["Risk"]
    tables: dict[str, list[dict[str, object]]] = {}
    r = 2
    while r <= ws.max_row:
        heading = ws.cell(r, 1)
        if isinstance(heading.value, str) and heading.font.bold:
            h = r + 1
            while h <= ws.max_row and not (ws.cell(h, 1).fill and ws.cell(h, 1).fill.fgColor.rgb.endswith("DDE4EE")):
                h += 1
            headers = [c.value for c in ws[h] if c.value is not None]
            rows, k = [], h + 1
            while k <= ws.max_row and ws.cell(k, 1).value is not None:
                rows.append({name: ws.cell(k, j + 1).value for j, name in enumerate(headers)})
                k += 1
            tables[heading.value] = rows
            r = k
        r += 1
    return tables


def workbook_of(case, result, assets=None, plan=True):
    scope = select_scope(case, result, assets, plan if assets else True)
    return load_workbook(io.BytesIO(build_workbook(case, result, scope)))


class TestRiskSheetIsThePlans:
    """The Risk sheet shows the uncertainty of what the pack asks money for: the exact plan under the budget."""

    def test_plan_npv_percentiles(self, plan_pack, small):
        _, result = small
        book = load_workbook(plan_pack)
        tables = risk_tables(book)
        heading = "Monte Carlo of the plan's NPV at its start over 200 draws"  # monte_carlo_draws of FINANCE
        (summary,) = tables[heading]
        draws = result.plan_npv_draws
        # numpy as the reference; both are the same doubles, so to rounding
        assert_allclose(summary["NPV P50"], np.median(draws), rtol=1e-12)
        assert_allclose([summary["NPV P10"], summary["NPV P90"]], np.percentile(draws, [10, 90]), rtol=1e-12)
        assert_allclose(summary["P(NPV > 0)"], np.mean(draws > 0), rtol=1e-12)
        # shown as the pack shows money: the case currency in the number format
        ws = book["Risk"]
        p50 = next(c for row in ws.iter_rows() for c in row
                   if isinstance(c.value, float) and math.isclose(c.value, float(np.median(draws)), rel_tol=1e-12))
        assert p50.number_format == '#,##0 "EUR";-#,##0 "EUR"'

    def test_tornado_centre_is_the_plans_npv(self, plan_pack, small):
        _, result = small
        tables = risk_tables(load_workbook(plan_pack))
        rows = tables["One-at-a-time sensitivity of the exact plan's NPV at its start"]
        # engine: plan.csv's npv_at_plan_start, summed (the plan's NPV at its start)
        assert_allclose([r["Base NPV"] for r in rows], result.plan["npv_at_plan_start"].sum(), rtol=1e-9)

    def test_per_project_rows_are_the_plans_projects_in_scope_with_their_start_year(self, small):
        case, result = small
        heading = "Monte Carlo per project of the plan in scope (NPV at its own start, P10/P50/P90)"
        # engine: the exact plan's projects and plan years (plan.csv)
        plan = result.plan
        whole = risk_tables(workbook_of(case, result))[heading]
        # the asset, and the option as the catalogue names it (not the internal "asset/option" key)
        assert [(r["Asset"], r["Plan year"]) for r in whole] == list(zip(plan["asset_id"], plan["start_yr"].astype(int)))
        # each named beside its key as the catalogue names the option (the results' label column)
        label = result.results.drop_duplicates("option_id").set_index("option_id")["label"]
        assert [r["Option"] for r in whole] == list(label.reindex(result.plan["option_id"]))
        only_c1 = risk_tables(workbook_of(case, result, ["C1"], plan=False))
        c1 = plan[plan["asset_id"] == "C1"]
        assert [(r["Asset"], r["Plan year"]) for r in only_c1[heading]] == [("C1", 1)] and len(c1) == 1
        # a pack of part of the plan says the plan's figures are the whole fleet plan's
        assert any("the whole fleet plan, not only this pack's scope" in h for h in only_c1)

    def test_fallback_without_the_plans_uncertainty(self, small):
        case, result = small
        older = dataclasses.replace(result, plan_tornado=pd.DataFrame(), plan_risk=pd.DataFrame(),
                                    plan_npv_draws=np.zeros(0))
        book = workbook_of(case, older)
        tables = risk_tables(book)
        tornado = tables["One-at-a-time sensitivity of the fleet NPV of each asset's best option"]
        assert_allclose([r["Base NPV"] for r in tornado], result.tornado["base_npv"].to_numpy(), rtol=1e-12)
        rows = tables["Monte Carlo per project in scope (P10/P50/P90)"]
        assert rows and all("Plan year" not in r for r in rows)
        # engine: risk.csv's rows of the plan's projects (the recommended projects of a plan pack)
        keys = set(result.plan["asset_id"] + "/" + result.plan["option_id"])
        assert [r["Asset"] for r in rows] == [p.rsplit("/", 1)[0] for p in result.risk["project_id"] if p in keys]
        assert not any(h.startswith("Monte Carlo of the plan's NPV") for h in tables)
        words = " ".join(str(c.value) for row in book["Risk"].iter_rows() for c in row if c.value is not None)
        assert "plan choices that trade NPV for budget are not simulated" in words


def test_policy_ratings_in_the_cases_unit(small):
    # a case declared in hp: the policy's rating columns are hp (1 hp = 0.745699872 kW, NIST SP 811 B.9)
    case, result = small
    in_hp = dataclasses.replace(case, settings=dataclasses.replace(case.settings, power_unit="hp"))
    book = load_workbook(io.BytesIO(build_workbook(in_hp, result, select_scope(in_hp, result))))
    cells = [[c.value for c in r] for r in book["End of life"].iter_rows()]
    top = next(i for i, r in enumerate(cells) if r[0] == "Repair-or-replace policy for the fleet")
    assert cells[top + 1][:2] == ["From rating [hp]", "To rating [hp]"]
    first_kw = float(result.fleet_rules["min_rated_p_kw"].iloc[0])
    assert cells[top + 2][0] == pytest.approx(round(first_kw / 0.745699872, 2), abs=1e-9)


def test_the_assumptions_sheet_says_which_cells_the_formulas_read(tmp_path):
    # only the discount rate (and the budgets) drive the workbook's formulas; the sheet says so beside each
    # assumption, so a reader does not change the horizon or an escalation and expect the NPVs to move
    from openpyxl import load_workbook

    from models.case import load_case
    from models import scenario
    from models.pack import write_pack

    case, _ = load_case(Path(__file__).resolve().parents[1] / "data" / "demo")
    result = scenario.run(case, case.finance, with_risk=False)
    paths = write_pack(case, result, tmp_path / "pack", assets=["HRW-P11"], plan=False)
    book = load_workbook(next(p for p in paths if str(p).endswith(".xlsx")))
    ws = book["Assumptions"]
    live = {ws.cell(r, 1).value: ws.cell(r, 6).value for r in range(1, ws.max_row + 1) if ws.cell(r, 6).value}
    assert live["discount_rate_frac"].startswith("yes")
    assert live["horizon_yr"].startswith("no") and live["escalation_energy_frac"].startswith("no")


def _stored_against_evaluated(path: Path, evaluated: dict) -> tuple[int, list[str], list[str]]:
    """Each formula cell's stored value (what a previewer shows) against the independent evaluator's.

    Returns (cells compared, cells left without a value, disagreements)."""
    formulas_book, stored_book = load_workbook(path), load_workbook(path, data_only=True)
    compared, missing, wrong = 0, [], []
    for ws in formulas_book.worksheets:
        stored = stored_book[ws.title]
        for row in ws.iter_rows():
            for cell in row:
                if not (isinstance(cell.value, str) and cell.value.startswith("=")):
                    continue
                here = stored[cell.coordinate].value
                expected = evaluated[(ws.title.upper(), cell.coordinate)]
                if here is None:  # (an empty text result reads back as an empty cell)
                    if not (isinstance(expected, str) and expected == ""):
                        missing.append(f"{ws.title}!{cell.coordinate} ({expected!r})")
                    continue
                compared += 1
                if isinstance(here, str) or isinstance(expected, str):
                    same = str(here) == str(expected)
                elif isinstance(here, bool):
                    same = here == bool(expected)
                else:
                    same = math.isclose(float(here), float(expected), rel_tol=1e-9, abs_tol=1e-9)
                if not same:
                    wrong.append(f"{ws.title}!{cell.coordinate}: stored {here!r}, evaluated {expected!r}")
    return compared, missing, wrong


def test_every_formula_carries_the_value_it_gives(asset_pack, values):
    # A previewer or a reader of values (not recalculating) shows what is stored beside each formula: it must
    # be what the formula gives. Expected = the independent `formulas` evaluator's value of every formula cell.
    compared, missing, wrong = _stored_against_evaluated(asset_pack, values)
    assert wrong == []
    assert compared > 1000 and missing == []


def test_the_plan_sheet_carries_its_values(plan_pack):
    compared, missing, wrong = _stored_against_evaluated(plan_pack, evaluate(plan_pack))
    assert wrong == [] and missing == [] and compared > 100


@pytest.mark.parametrize("invented", [True, False])
def test_every_sheet_carries_the_caution_and_the_invented_mark(small, invented):
    # a sheet printed or copied alone still says what it is: the print footer of every sheet carries the case,
    # the invented-data mark where the case is invented, and the standing caution (as every PDF page does,
    # models.pack.pdf_footer); an invented case's sheet titles (A1) open with the mark
    import dataclasses
    import io

    from models.pack import pdf_footer
    from models.pack.content import select_scope
    from models.pack.workbook import INVENTED_TITLE_MARK, build_workbook

    case, result = small
    case = dataclasses.replace(case, settings=dataclasses.replace(case.settings, invented=invented))
    book = load_workbook(io.BytesIO(build_workbook(case, result, select_scope(case, result))))
    assert book.sheetnames == SHEETS
    for ws in book.worksheets:
        footer = ws.oddFooter.left.text
        assert footer == pdf_footer(case.settings).replace("&", "&&"), ws.title
        assert "qualified persons under local codes and the utility's rules" in footer
        assert ("Invented demo data" in footer) == invented, ws.title
        assert "&P of &N" in ws.oddFooter.right.text
        assert str(ws["A1"].value).startswith(INVENTED_TITLE_MARK) == invented, ws.title


def test_the_plan_sheet_npv_of_a_project_in_the_pack_follows_the_discount_rate(demo_run_physics, tmp_path):
    # The 'Plan' sheet's "NPV at its own start" of a project whose block the pack holds is a formula on that
    # block; a reactive project credited the share r of its bill saving (the demo's KGQ-AC01 capacitor) counts
    # its block's NPV less (1 - r) x the present value of its bill-saving rows. Expected at 12 %: numpy_financial
    # 1.0 npv of the engine's flows (cashflows), less (1 - r) x npv of its bill-saving flows; the rest of the plan
    # (outside this pack) keeps the engine's figure.
    from models import scenario
    from models.pack import write_pack
    from models.reactive_plan import BILL_SAVING_COMPONENTS

    case, phys = demo_run_physics
    result = scenario.economics(case, phys, case.finance, with_risk=False)
    share = result.plan_status["repriced"]["KGQ-AC01/capacitor"]
    assert 0 < share < 1
    paths = write_pack(case, result, tmp_path / "pack", assets=["KGQ-AC01"], plan=False)
    path = next(p for p in paths if str(p).endswith(".xlsx"))
    # at the run's rate the formulas give the engine's plan NPVs (and store them)
    compared, missing, wrong = _stored_against_evaluated(path, evaluate(path))
    assert wrong == [] and missing == []
    book = load_workbook(path)
    plan_ws = book["Plan"]
    row = next(r for r in range(1, plan_ws.max_row + 1)
               if plan_ws.cell(r, 2).value == "KGQ-AC01" and plan_ws.cell(r, 3).value == "capacitor")
    assert str(plan_ws.cell(row, 6).value).startswith("='Cash flows'!")
    outside = next(r for r in range(row + 1, plan_ws.max_row + 1) if plan_ws.cell(r, 9).value == "no")
    assert isinstance(plan_ws.cell(outside, 6).value, float)  # no block in this pack: the engine's figure
    edited = tmp_path / "edited.xlsx"
    with_discount_rate(path, 0.12, edited)
    values = evaluate(edited)
    cf = result.cashflows
    mine = cf[(cf["asset_id"] == "KGQ-AC01") & (cf["option_id"] == "capacitor")]
    horizon = int(result.assumptions.horizon_yr)
    flows = mine.groupby("year")["amount"].sum().reindex(range(horizon + 1), fill_value=0.0).to_numpy()
    bill = (mine[mine["component"].isin(BILL_SAVING_COMPONENTS)].groupby("year")["amount"].sum()
            .reindex(range(horizon + 1), fill_value=0.0).to_numpy())
    expected = npf.npv(0.12, flows) - (1 - share) * npf.npv(0.12, bill)
    assert_allclose(as_float(values[("PLAN", f"F{row}")]), expected, rtol=1e-9)
    start = int(plan_ws.cell(row, 1).value)
    assert_allclose(as_float(values[("PLAN", f"H{row}")]), expected / 1.12 ** start, rtol=1e-9)
    assert abs(expected - float(result.plan.set_index(["asset_id", "option_id"]).loc[("KGQ-AC01", "capacitor"), "npv"])) > 1.0


def test_the_workbook_speaks_the_readers_words(small, tmp_path):
    # User report (a finance reviewer): units read "currency" where the case's currency was meant, a fraction's
    # unit read "frac/yr" beside a cell shown as 8.0%, the Results sheet mixed TRUE/FALSE with the Plan sheet's
    # yes/no, and the fleet policy's decision read "replace_above_hours".
    from models.end_of_life import DECISION_NAMES

    case, result = small
    write_pack(case, result, tmp_path / "pack")
    book = load_workbook(tmp_path / "pack" / WORKBOOK_NAME)
    ws = book["Assumptions"]
    units = {ws.cell(r, 1).value: ws.cell(r, 3).value for r in range(1, ws.max_row + 1)}
    assert units["downtime_cost_per_h"] == "EUR/h" and units["capacitor_cost_per_kvar"] == "EUR/kVAr"
    assert units["discount_rate_frac"].startswith("%/yr")
    assert not any(isinstance(u, str) and "currency" in u for u in units.values())
    results = book["Results"]
    # its NPVs are priced alone; the Plan sheet's of a reactive project can be lower, and the sheet says so
    assert results["A2"].value.startswith("Each option priced alone against today's bill (for a motor that has "
                                          "failed, against the least that puts it back in service now). The Plan "
                                          "sheet counts")
    header = [c.value for c in results[3]]
    for name in ("Recommended", "In the exact plan"):
        col = header.index(name) + 1
        values = {results.cell(r, col).value for r in range(4, results.max_row + 1)}
        assert values == {"yes", "no"}, (name, values)
    decisions = {c.value for row in book["End of life"].iter_rows() for c in row if isinstance(c.value, str)}
    assert not decisions & set(DECISION_NAMES) - set(DECISION_NAMES.values())
    # the payback lost again to a later outlay is said in words like the other yes/no columns
    for basis in ("Simple", "Discounted"):
        col = header.index(f"{basis} payback lost again by the horizon's end") + 1
        assert {results.cell(r, col).value for r in range(4, results.max_row + 1)} <= {"yes", "no"}
    # the bill line items read in words (models.wording.LINE_ITEM_CATEGORIES), the tariff's code kept beside them
    bills = book["Bills"]
    top = next(r for r in range(1, bills.max_row + 1) if bills.cell(r, 1).value == "Bill line items") + 1
    head = [c.value for c in bills[top]]
    words_col, code_col = head.index("Line item") + 1, head.index("Tariff clause") + 1
    pairs = {(bills.cell(r, code_col).value, bills.cell(r, words_col).value) for r in range(top + 1, bills.max_row + 1)}
    assert pairs and all(":" in code for code, _ in pairs)
    energy = [words for code, words in pairs if code.startswith("energy:")]
    assert energy and all(w == "Energy: " + c.split(":", 1)[1] for c, w in pairs if c.startswith("energy:"))
    assert not any(words.startswith(("energy:", "demand:", "tax:", "fixed:")) for _, words in pairs)


def test_the_rank_order_plan_counts_a_reactive_project_at_its_own_share(demo_run_physics, tmp_path):
    # the rank-order plan keeps the demo's KGQ-AC01 capacitor at the share r_g of its bill saving that it adds beside
    # the rest of that plan (plan_status "repriced_greedy", as "repriced" is the exact plan's): the Plan sheet's
    # "Yearly saving as the plan counts it" of its rank-order row is r_g x bill saving + maintenance saving (hand
    # calculation from results.csv), on the basis of the NPV beside it; before, the full saving stood beside the
    # share-counted NPV
    from models import scenario
    from models.pack import write_pack

    case, phys = demo_run_physics
    result = scenario.economics(case, phys, case.finance, with_risk=False)
    share = result.plan_status["repriced_greedy"]["KGQ-AC01/capacitor"]
    assert 0 < share < 1
    own = result.results.set_index(["asset_id", "option_id"]).loc[("KGQ-AC01", "capacitor")]
    paths = write_pack(case, result, tmp_path / "pack", assets=["KGQ-AC01"], plan=False)
    path = next(p for p in paths if str(p).endswith(".xlsx"))
    compared, missing, wrong = _stored_against_evaluated(path, evaluate(path))
    assert wrong == [] and missing == []
    ws = load_workbook(path)["Plan"]
    start = next(r for r in range(1, ws.max_row + 1) if ws.cell(r, 1).value == "Rank-order plan")
    row = next(r for r in range(start, ws.max_row + 1)
               if ws.cell(r, 2).value == "KGQ-AC01" and ws.cell(r, 3).value == "capacitor")
    assert ws.cell(start + 1, 10).value.startswith("Yearly saving as the plan counts it")
    expected = share * own["bill_saving_per_yr"] + own["saving_maintenance_per_yr"]
    assert_allclose(float(ws.cell(row, 10).value), expected, rtol=1e-12)


def test_scenario_change_headers_keep_an_abbreviation_in_capitals(plan_pack):
    # "Change: plan NPV", "Change: CO2 avoided [t/yr]" (not "cO2"): a label's first letter is lowered after
    # "Change:" unless it begins an abbreviation
    ws = load_workbook(plan_pack)["Scenarios"]
    heads = {str(c.value) for row in ws.iter_rows() for c in row if str(c.value or "").startswith("Change: ")}
    assert "Change: CO2 avoided [t/yr]" in heads and any(h.startswith("Change: plan NPV") for h in heads), heads
    assert not any(h.startswith("Change: cO2") for h in heads)


def test_the_plan_sheet_npv_formulas_give_the_engines_figures_under_an_income_tax(demo_run_physics, tmp_path):
    # a reactive project's plan NPV formula takes off (1 - r) x (1 - tax rate) x its bill rows' present value, as the
    # engine does: at a 25 % tax rate the formulas, evaluated, give the engine's figures stored beside them
    from dataclasses import replace

    from models import scenario
    from models.pack import write_pack

    case, phys = demo_run_physics
    result = scenario.economics(case, phys, replace(case.finance, tax_rate_frac=0.25), with_risk=False)
    assert "KGQ-AC01/capacitor" in (result.plan_status.get("repriced") or {})
    paths = write_pack(case, result, tmp_path / "pack", assets=["KGQ-AC01"], plan=False)
    path = next(p for p in paths if str(p).endswith(".xlsx"))
    compared, missing, wrong = _stored_against_evaluated(path, evaluate(path))
    assert compared and wrong == [] and missing == []
    ws = load_workbook(path)["Plan"]
    row = next(r for r in range(1, ws.max_row + 1) if ws.cell(r, 2).value == "KGQ-AC01" and ws.cell(r, 3).value == "capacitor")
    assert "*(1-0.25)*" in str(ws.cell(row, 6).value)


@pytest.mark.parametrize("terms, said", [
    ({"financing": "shared_savings", "shared_savings_share_frac": 0.6, "shared_savings_term_yr": 3}, "energy-service company"),
    ({"financing": "lease", "lease_rate_frac": 0.07, "lease_term_yr": 4, "lease_buyout_frac": 0.05, "tax_rate_frac": 0.2},
     "leased over 4 years")])
def test_the_financing_sheet_holds_the_plan_s_flows_to_the_owner(small, tmp_path, terms, said):
    # a shared-savings contract, then a lease, on the small case: the Financing sheet gives each plan year's cash
    # net and the company's (or lessor's and lease's) parts as values and the financed net and its running sum as
    # formulas; evaluated independently they are models.financing.plan_financing's (its figures:
    # tests/test_financing.py)
    from models.financing import plan_financing

    case, result = small
    a = dataclasses.replace(result.assumptions, **terms)
    financed = scenario.economics(case, result.physics, a, with_risk=False)
    assert len(financed.plan)
    out = tmp_path / "pack"
    write_pack(case, financed, out)
    path = out / WORKBOOK_NAME
    ws = load_workbook(path)["Financing"]
    assert said in str(ws.cell(2, 1).value)
    header = [ws.cell(5, c).value for c in range(1, ws.max_column + 1)]
    net_col, cum_col = header.index("Financed net [EUR]") + 1, header.index("Cumulative financed [EUR]") + 1
    table = plan_financing(financed)
    values = evaluate(path)
    for k, r in enumerate(table.to_dict("records")):
        row = 6 + k
        assert ws.cell(row, 1).value == r["year"]
        assert str(ws.cell(row, net_col).value).startswith("=SUM(")
        net = values[("FINANCING", f"{ws.cell(row, net_col).column_letter}{row}")]
        cum = values[("FINANCING", f"{ws.cell(row, cum_col).column_letter}{row}")]
        assert_allclose([float(net), float(cum)], [r["financed_net"], r["cumulative_financed"]], rtol=1e-9, atol=1e-6)


def test_harmonics_sheet_lists_each_sites_screen(plan_pack, small):
    """The Harmonics sheet holds models.harmonics.site_screen's rows (the small case gives no transformer: its site
    is listed as not screened, with the column to give), under the screen's caution."""
    from models.harmonics import SCREEN_CAUTION, site_screen

    case, result = small
    ws = load_workbook(plan_pack)["Harmonics"]
    assert SCREEN_CAUTION in ws.cell(3, 1).value
    assert ws.cell(5, 1).value == "Site" and ws.cell(5, 2).value == "Scenario"
    expected = site_screen(case, result.physics.operation, result.plan)
    finding_col = next(c for c in range(1, ws.max_column + 1) if ws.cell(5, c).value == "Finding")
    got = [[ws.cell(r, 1).value, ws.cell(r, 2).value, ws.cell(r, finding_col).value] for r in range(6, 6 + len(expected))]
    assert got == expected[["site_id", "scenario", "finding"]].values.tolist()
    assert got[0][2].startswith("not screened: give the site's transformer_kva")


def test_end_of_life_sheet_lists_the_spares_of_the_groups_in_scope(plan_pack, small):
    """The End of life sheet ends with models.spares.spares_table's rows for the groups of the assets in scope."""
    from models.spares import spares_table

    case, result = small
    ws = load_workbook(plan_pack)["End of life"]
    title = next(r for r in range(1, ws.max_row + 1) if ws.cell(r, 1).value == "Spares for groups of interchangeable motors")
    assert ws.cell(title + 3, 1).value == "Group"
    from models.pack import content

    scope = set(content.select_scope(case, result, None, True).asset_ids)
    expected = spares_table(case, result)
    expected = expected[[bool(scope & set(ids.split(" "))) for ids in expected["asset_ids"]]]
    assert len(expected)
    got = [ws.cell(r, 1).value for r in range(title + 4, title + 5 + len(expected))]
    assert got == expected["group"].tolist() + [None]
