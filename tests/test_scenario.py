"""The whole analysis: one asset worked by hand, invariants of the fleet run, and the run command."""

from __future__ import annotations

import filecmp
import re
import threading
from pathlib import Path

import numpy as np
import pandas as pd
from dataclasses import replace

import pytest
from numpy.testing import assert_allclose

import casebuilder as cb
from drivecase.cli import main
from models.case import load_case
from models.finance import FinanceAssumptions
from models import scenario

REPO = Path(__file__).resolve().parents[1]
FLAT_TARIFF = cb.FLAT_TARIFF  # (0.10 per kWh, all hours)
OPTIONS = ("option_id,technology,efficiency_class,speed_remedy,equipment_cost_coef,equipment_cost_exp,life_yr,"
           "maintenance_cost_per_kw_yr\n"
           "keep,existing,,none,0,1,20,0\n"
           "ie3,induction,IE3,trim_or_pulley,100,1,20,0\n")


def _one_asset_case(folder, price_per_kwh: float = 0.10):
    """Write and load the one-motor case of docs/derivations/scenario-one-asset.md."""
    assets = [["M1", "S1", "Conveyor drive", "other", "15", "4", "50", "400", "IE1", "88.7", "0.82", "1460", "2025", "0",
               "fixed", "", "6000", "100", "medium"]]
    cb.write_case(folder, assets=assets, sites=[["S1", "Works", "0", "0.9"]], capacitors=[], duty=[], profiles=[])
    (folder / "profiles.csv").unlink()
    (folder / "tariffs").mkdir()
    (folder / "tariffs" / "flat.toml").write_text(FLAT_TARIFF.replace("0.10", f"{price_per_kwh}"), encoding="utf-8")
    sites = (folder / "sites.csv").read_text(encoding="utf-8").splitlines()
    (folder / "sites.csv").write_text(sites[0] + ",tariff_file\n" + sites[1] + ",flat.toml\n", encoding="utf-8")
    (folder / "options.csv").write_text(OPTIONS, encoding="utf-8")
    (folder / "finance.toml").write_text('discount_rate_frac = 0.03\nhorizon_yr = 10\nrate_basis = "real"\n'
                                         'replacement_mode = "replace_now"\n', encoding="utf-8")
    case, problems = load_case(folder, mode="strict")
    return case


@pytest.fixture(scope="module")
def one_asset(tmp_path_factory):
    return _one_asset_case(tmp_path_factory.mktemp("one"))


def test_doubling_prices_doubles_bill_savings(one_asset, tmp_path):
    dear = _one_asset_case(tmp_path / "dear", price_per_kwh=0.20)
    base = scenario.run(one_asset, one_asset.finance, with_risk=False).results
    twice = scenario.run(dear, dear.finance, with_risk=False).results
    # invariant: a bill linear in price gives savings linear in price
    assert_allclose(twice["bill_saving_per_yr"].to_numpy(), 2.0 * base["bill_saving_per_yr"].to_numpy(), rtol=1e-9)


def test_energy_price_factor_equals_a_dearer_tariff(one_asset, tmp_path):
    # Independent check: the tariff written at twice the price against the factor 2 on the tariff as written.
    dear = _one_asset_case(tmp_path / "dear", price_per_kwh=0.20)
    written = scenario.run(dear, dear.finance, with_risk=False)
    scaled = scenario.run(one_asset, replace(one_asset.finance, energy_price_factor=2.0), with_risk=False)
    for column in ("bill_saving_per_yr", "saving_energy_per_yr", "npv", "life_cycle_cost", "irr_frac"):
        assert_allclose(scaled.results[column].to_numpy(dtype=float), written.results[column].to_numpy(dtype=float),
                        rtol=1e-9, equal_nan=True, err_msg=column)
    key = ["site_id", "month", "scenario", "line_item"]
    assert_allclose(scaled.bills.sort_values(key)["amount"].to_numpy(), written.bills.sort_values(key)["amount"].to_numpy(),
                    rtol=1e-9)


def test_capital_cost_factor_equals_a_dearer_catalogue(one_asset, tmp_path):
    # Independent check: the option's cost coefficient written at 1.5 x (150 instead of 100) against the factor 1.5.
    folder = tmp_path / "dear"
    _one_asset_case(folder)
    (folder / "options.csv").write_text(OPTIONS.replace("trim_or_pulley,100,", "trim_or_pulley,150,"), encoding="utf-8")
    dear, _ = load_case(folder, mode="strict")
    written = scenario.run(dear, dear.finance, with_risk=False).results
    scaled = scenario.run(one_asset, replace(one_asset.finance, capital_cost_factor=1.5), with_risk=False).results
    for column in ("capital", "npv", "simple_payback_yr", "life_cycle_cost"):
        assert_allclose(scaled[column].to_numpy(dtype=float), written[column].to_numpy(dtype=float), rtol=1e-9,
                        err_msg=column)


@pytest.mark.parametrize("field", ["energy_price_factor", "capital_cost_factor"])
@pytest.mark.parametrize("value", [0.0, -1.0, float("nan")])
def test_price_factors_must_be_positive(one_asset, field, value):
    with pytest.raises(ValueError, match=field):
        replace(one_asset.finance, **{field: value})


@pytest.fixture(scope="module")
def row(one_asset):
    result = scenario.run(one_asset, one_asset.finance, with_risk=False)
    r = result.results
    return r[r["option_id"] == "ie3"].iloc[0]


@pytest.fixture(scope="module")
def result(demo_case):
    return scenario.run(demo_case, demo_case.finance)


class TestOneAssetByHand:
    """Hand calculation, see docs/derivations/scenario-one-asset.md."""

    def test_energy_saved(self, row):
        # 15/0.887*6000 - 15/0.9289*6000 = 4576.821 kWh/yr (IEC 60034-30-1 IE1 and IE3 minima; hand calculation)
        assert_allclose(row["energy_saved_kwh_per_yr"], 4576.821, rtol=1e-5)

    def test_bill_saving(self, row):
        assert_allclose(row["bill_saving_per_yr"], 457.682, rtol=1e-5)

    def test_npv_from_nist_factors(self, row):
        # NIST Handbook 135: UPV(3 %, 10) = 8.530203, SPV(3 %, 10) = 0.744094 -> NPV = 2962.19 (hand calculation)
        assert_allclose(row["npv"], 2962.19, rtol=1e-5)

    def test_simple_payback(self, row):
        assert_allclose(row["simple_payback_yr"], 3.2774, rtol=1e-4)

    def test_capital(self, row):
        assert_allclose(row["capital"], 1500.0, rtol=1e-12)


class TestDemoRun:
    def test_plan_respects_the_budget(self, result, demo_case):
        budget = np.array(demo_case.finance.budget_per_yr)
        plan = result.plan
        spend = plan.groupby("start_yr")["capital"].sum()
        for year, amount in spend.items():
            assert amount <= budget[int(year)] * (1 + 1e-9)

    def test_exact_plan_is_not_beaten_by_rank_order(self, result):
        assert result.plan["npv_at_plan_start"].sum() >= result.plan_greedy["npv_at_plan_start"].sum() - 1e-6

    def test_one_best_option_per_asset(self, result, demo_case):
        best = result.results[result.results["best_for_asset"]]
        assert sorted(best["asset_id"]) == sorted(demo_case.assets["asset_id"])

    def test_discounted_payback_not_before_simple(self, result):
        r = result.results
        ok = r["capital"] > 0
        assert (r.loc[ok, "discounted_payback_yr"] >= r.loc[ok, "simple_payback_yr"] - 1e-9).all()

    def test_adjusted_irr_blank_where_savings_are_not_positive(self, result, demo_case):
        # NIST Handbook 135: AIRR = (1 + d) SIR^(1/n) - 1, defined for SIR > 0 (SIR <= 0 would read -100 %)
        r = result.results
        d, n = demo_case.finance.discount_rate_frac, demo_case.finance.horizon_yr
        not_positive = r["sir"].to_numpy(dtype=float) <= 0
        assert not_positive.any() and r.loc[not_positive, "airr_frac"].isna().all()
        positive = r["sir"].to_numpy(dtype=float) > 0
        finite = positive & np.isfinite(r["sir"].to_numpy(dtype=float))
        assert_allclose(r.loc[finite, "airr_frac"], (1 + d) * r.loc[finite, "sir"] ** (1 / n) - 1, rtol=1e-12)

    def test_keep_is_the_baseline_of_every_increment(self, result):
        # every NPV is an increment over keeping today's motor (docs/finance.md, section 4): keep's own is 0, and
        # keep's capital, savings and payback are nothing
        keep = result.results[result.results["option_id"] == "keep"]
        assert len(keep) == result.results["asset_id"].nunique()
        assert_allclose(keep["npv"], 0.0, atol=1e-9)
        assert_allclose(keep["capital"].to_numpy(dtype=float), 0.0, atol=1e-12)
        assert_allclose(keep["bill_saving_per_yr"].to_numpy(dtype=float), 0.0, atol=1e-9)

    def test_lcc_difference_is_the_npv_of_every_option(self, result):
        # NIST Handbook 135's comparison of alternatives: LCC(base) - LCC(alternative) = the alternative's NPV, for
        # options with or without a must-spend, replacements and add-ons alike
        lcc = result.lcc.groupby(["asset_id", "option_id"])["pv"].sum()
        r = result.results.set_index(["asset_id", "option_id"])
        rows = r[r["capital"] > 0].index
        assert (r.loc[rows, "must_spend_capital"] > 0).any() and (r.loc[rows, "must_spend_capital"] == 0).any()
        keep = lcc.loc[[(a, "keep") for a, _ in rows]].to_numpy()
        assert_allclose(keep - lcc.loc[list(rows)].to_numpy(), r.loc[rows, "npv"].to_numpy(), rtol=1e-9, atol=1e-6)
        assert set(result.lcc["component"]) == set(scenario.LCC_COMPONENTS)

    def test_monthly_bills_fall_with_the_plan(self, result):
        totals = result.bills.groupby(["site_id", "scenario"])["amount"].sum().unstack()
        assert (totals["plan"] <= totals["baseline"] + 1e-6).all()

    def test_monte_carlo_summary_is_sane(self, result):
        risk = result.risk
        assert (risk["npv_p10"] <= risk["npv_p50"] + 1e-9).all() and (risk["npv_p50"] <= risk["npv_p90"] + 1e-9).all()
        assert risk["prob_npv_positive_frac"].between(0, 1).all()

    def test_tornado_sorted_by_swing(self, result):
        swing = result.tornado["swing"].to_numpy()
        assert (np.diff(swing) <= 1e-9).all()


def test_run_command_writes_identical_files(tmp_path, capsys, monkeypatch):
    demo = REPO / "data" / "demo"
    # both runs on one default purchase date (written to run_settings.csv), should midnight pass in the case's zone
    import models.case

    today = models.case._today_in("Europe/Berlin")
    monkeypatch.setattr(models.case, "_today_in", lambda zone: today)
    assert main(["run", str(demo), "--out", str(tmp_path / "a"), "--quiet"]) == 0
    assert main(["run", str(demo), "--out", str(tmp_path / "b"), "--quiet"]) == 0
    out = capsys.readouterr().out
    assert "Plan under the budget" in out and "qualified persons" in out and "Exact plan: plan proven within" in out
    # the yearly saving as the report's headline counts it (bills and maintenance), its two parts beside it
    line = next(x for x in out.splitlines() if "Plan under the budget" in x)
    total, bills, maintenance = (float(m.replace(",", "")) for m in re.search(
        r"yearly saving as the plan counts it EUR ([-\d,]+)/yr \(bills ([-\d,]+), maintenance ([-\d,]+)\)", line).groups())
    assert abs(total - (bills + maintenance)) <= 1.0  # each printed to the whole euro
    # the same figure as the pack's headline (the console and the pack never print two yearly savings for one plan)
    from models.pack import content

    case, _ = load_case(demo)
    result = scenario.run(case, case.finance, with_risk=False)
    headline = content.headline(result, content.select_scope(case, result))
    assert abs(total - headline.yearly_saving) <= 1.0
    assert "bill saving [EUR/yr]" in out  # the table of best options says which saving it shows
    names = sorted(p.name for p in (tmp_path / "a").iterdir())
    assert {"results.csv", "cashflows.csv", "bills.csv", "plan.csv", "risk.csv"} <= set(names)
    match, mismatch, errors = filecmp.cmpfiles(tmp_path / "a", tmp_path / "b", names, shallow=False)
    assert not mismatch and not errors
    results = pd.read_csv(tmp_path / "a" / "results.csv")
    assert {"npv", "irr_frac", "simple_payback_yr", "life_cycle_cost", "co2_avoided_t_per_yr"} <= set(results.columns)
    # the best-options table says what the plan takes for each asset (this option, another, or nothing)
    plan = pd.read_csv(tmp_path / "a" / "plan.csv")
    # plan.csv rebuilds the headline's yearly saving: each project's saving as the plan counts it, summed; the
    # demo holds reactive projects credited only part of their bill saving, so the counted sum is the smaller
    assert plan["saving_counted_per_yr"].sum() == pytest.approx(headline.yearly_saving, rel=1e-9)
    assert (plan["bill_saving_counted_frac"] < 1).any()
    assert plan["saving_per_yr"].sum() > plan["saving_counted_per_yr"].sum()
    takes = dict(zip(plan["asset_id"], plan["option_id"]))
    assert "the plan takes" in out
    first = next(l for l in out.splitlines() if l.strip().startswith(("HRW-", "KGQ-")))
    asset_id = first.split()[0]
    option_id = results.loc[(results["asset_id"] == asset_id) & results["best_for_asset"], "option_id"].iloc[0]
    label = results.drop_duplicates("option_id").set_index("option_id")["label"]  # options named as the catalogue does
    expected = ("this option" if takes.get(asset_id) == option_id
                else label[takes[asset_id]] if asset_id in takes else "nothing")
    assert label[option_id] in first and first.rstrip().endswith(expected)
    # the summary's plan saving on the bills is today's bills less the plan's, read back from bills.csv
    bills = pd.read_csv(tmp_path / "a" / "bills.csv")
    by_scenario = bills.groupby("scenario")["amount"].sum()
    together = by_scenario["baseline"] - by_scenario["plan"]
    assert f"the sites' bills fall by EUR {together:,.0f}/yr" in out


def test_plan_bill_saving_from_bills():
    _plan_bill_saving = scenario.plan_bill_saving_per_yr

    # hand calculation: two sites, today's bills 100 + 50, the plan's 70 + 45 -> 35 a year
    bills = pd.DataFrame({"site_id": ["A", "A", "B", "B"], "scenario": ["baseline", "plan", "baseline", "plan"],
                          "amount": [100.0, 70.0, 50.0, 45.0]})
    assert _plan_bill_saving(bills) == 35.0
    assert _plan_bill_saving(bills[bills["scenario"] == "baseline"]) is None
    assert _plan_bill_saving(pd.DataFrame()) is None


def test_fleet_npv_draws_add_the_projects_of_each_draw(result):
    # Invariant: the draws share the factors of one draw across projects, so the fleet draw is the sum;
    # its median lies between the smallest and the largest sum of per-project P10s and P90s.
    draws = result.fleet_npv_draws
    assert draws.shape == (result.assumptions.monte_carlo_draws,)
    assert result.risk["npv_p10"].sum() <= np.median(draws) <= result.risk["npv_p90"].sum()


def test_a_new_budget_from_a_previous_result_equals_a_fresh_run(demo_case):
    # Invariant: the budget moves only the plan and the plan's bills, so reusing the rest is exact.
    phys = scenario.physics(demo_case, float(demo_case.finance.capacitor_cost_per_kvar))
    first = scenario.economics(demo_case, phys, demo_case.finance, with_risk=False)
    tight = replace(demo_case.finance, budget_per_yr=(120000.0, 90000.0))
    reused = scenario.economics(demo_case, phys, tight, with_risk=False, previous=first)
    fresh = scenario.economics(demo_case, phys, tight, with_risk=False)
    assert reused.results is first.results  # taken over, not recomputed
    pd.testing.assert_frame_equal(reused.plan, fresh.plan)
    pd.testing.assert_frame_equal(reused.bills, fresh.bills)
    pd.testing.assert_series_equal(reused.plan_comparison, fresh.plan_comparison)
    assert reused.assumptions == tight and reused.plan["capital"].sum() <= 120000.0 + 90000.0
    # any other change (here the discount rate) is computed afresh
    other = scenario.economics(demo_case, phys, replace(tight, discount_rate_frac=0.05), with_risk=False, previous=first)
    assert other.results is not first.results


def test_price_level_keeps_each_bill_line_consistent(result, demo_case):
    # Invariant: after scaling, each line still reads quantity x rate = amount, with a tax's base (its
    # quantity, in the currency) scaled and its rate kept; the total is 1.3 x today's.
    dear = scenario.economics(demo_case, result.physics, replace(demo_case.finance, energy_price_factor=1.3),
                              with_risk=False)
    lines = dear.bills[dear.bills["scenario"] == "baseline"]
    base = result.bills[result.bills["scenario"] == "baseline"]
    assert_allclose(lines["amount"].sum(), 1.3 * base["amount"].sum(), rtol=1e-12)
    priced = lines[lines["unit"] != "month"]
    assert_allclose(priced["quantity"] * priced["rate"], priced["amount"], rtol=1e-9, atol=1e-9)
    taxes = lines["unit"] == demo_case.settings.currency
    assert taxes.any()
    assert_allclose(lines.loc[taxes, "rate"].to_numpy(), base.loc[base["unit"] == demo_case.settings.currency, "rate"].to_numpy())


def test_the_plan_beside_end_of_life_and_risk_gives_the_plan_alone(demo_case, monkeypatch):
    # Invariant: with risk the plan is solved in a second thread while the end of life and the risk run;
    # none reads another's results, so the plan, its bills and the end of life are those of the run
    # without risk (the plan alone), and each stage's own time is reported
    phys = scenario.physics(demo_case, float(demo_case.finance.capacitor_cost_per_kvar))
    threads = []
    real = scenario._plan

    def spy(*args, **kwargs):
        threads.append(threading.current_thread().name)
        return real(*args, **kwargs)

    monkeypatch.setattr(scenario, "_plan", spy)
    own: dict = {}
    steps: list = []
    beside = scenario.economics(demo_case, phys, demo_case.finance, progress=steps.append, with_risk=True, timer=own)
    # while the plan finishes after the risk, the progress says so (a note, between the risk and the bills)
    assert steps == ["cash flows", "metrics", "fleet plan", "end of life", "risk", scenario.PLAN_FINISHING, "bills"]
    solves = len(threads)  # the plan and its re-solves without worthless reactive projects
    alone = scenario.economics(demo_case, phys, demo_case.finance, with_risk=False)
    assert all(name.startswith("drivecase-plan") for name in threads[:solves])
    assert threads[solves:] == [threading.main_thread().name] * solves
    pd.testing.assert_frame_equal(beside.plan, alone.plan)
    pd.testing.assert_frame_equal(beside.bills, alone.bills)
    pd.testing.assert_frame_equal(beside.end_of_life, alone.end_of_life)
    assert not beside.risk.empty and alone.risk.empty
    assert set(own) == {"fleet plan", "end of life", "risk", "bills"} and all(v > 0 for v in own.values())


def test_add_ons_keep_todays_maintenance():
    # hand: a 10 kW motor at 2.0 /kW/yr today; a capacitor (0.2) and a drive (1.0) are maintained on top of it,
    # a new motor (1.5) replaces it: 20, 22, 30 and 15 per year
    options = pd.DataFrame({"technology": ["existing", "capacitor", "add_drive", "induction"],
                            "maintenance_cost_per_kw_yr": [2.0, 0.2, 1.0, 1.5]})
    assert_allclose(scenario._maintenance_per_yr(options, np.array([10.0])), [[20.0, 22.0, 30.0, 15.0]])


def test_reactive_projects_are_credited_what_they_add_to_the_plan(demo_run_physics):
    # the reactive projects' in-plan savings add up to the bill without them less the bill with them, both read
    # from the bill engine's own meters (an independent route: meter_and_bills, not the attribution module);
    # every one kept is worth at least the threshold share of its own saving, and the withdrawn are named
    from models import reactive_plan
    from models.bill_savings import meter_and_bills

    case, phys = demo_run_physics
    result = scenario.economics(case, phys, case.finance, with_risk=False)
    op = phys.operation
    value = reactive_plan.reactive_value_in_plan(case, op, result.plan, result.results)
    assert len(value)
    choice = scenario.plan_choice(op, result.plan)
    without = np.where(np.isin(op.technologies[choice], ("capacitor", "wound_field")), 0, choice)
    _, with_bills = meter_and_bills(case, op, choice)
    _, without_bills = meter_and_bills(case, op, without)
    for site_id, part in value.groupby("site_id"):
        gain = (without_bills.loc[without_bills.site_id == site_id, "amount"].sum()
                - with_bills.loc[with_bills.site_id == site_id, "amount"].sum())
        runs = part.drop_duplicates("run")
        assert runs["run_saving_in_plan_per_yr"].sum() == pytest.approx(gain, rel=1e-9, abs=1e-6)
        assert runs["run_saving_alone_per_yr"].sum() == pytest.approx(part["saving_alone_per_yr"].sum(), rel=1e-12)
    kept = (value["run_saving_in_plan_per_yr"]
            >= reactive_plan.PLAN_REACTIVE_MIN_SHARE * value["run_saving_alone_per_yr"].clip(lower=0))
    assert kept.all()
    withdrawn = result.plan_status["withdrawn"]
    assert withdrawn and not set(withdrawn) & set(scenario.project_labels(result.plan))
    noun = "reactive project" if len(withdrawn) == 1 else "reactive projects"
    assert reactive_plan.withdrawn_text(result.plan_status).startswith(f"{len(withdrawn)} {noun} left out")
    # a project kept at a share r of its own saving enters the plan at NPV - (1 - r) x PV(its bill savings), the PV
    # read from the run's own cash-flow table (bill components, discounted at the case's rate; no tax in the demo)
    repriced = result.plan_status["repriced"]
    assert repriced and all(0.0 <= r < 1.0 for r in repriced.values())
    d = case.finance.discount_rate_frac
    cash = result.cashflows
    bill = cash[cash["component"].isin(list(reactive_plan.BILL_SAVING_COMPONENTS))]
    pv = (bill["amount"] / (1.0 + d) ** bill["year"]).groupby([bill["asset_id"], bill["option_id"]]).sum()
    own = result.results.set_index(["asset_id", "option_id"])["npv"]
    planned = result.plan.set_index(["asset_id", "option_id"])["npv"]
    for label, share in repriced.items():  # every project named repriced is in the plan (so the words count it)
        key = tuple(label.split("/", 1))
        assert key in planned.index, label
        assert planned[key] == pytest.approx(own[key] - (1.0 - share) * pv[key], rel=1e-5)


def test_withdrawn_text_counts_in_words():
    from models import reactive_plan

    # one project, one option set aside and one repriced take the singular; more take the plural
    one = reactive_plan.withdrawn_text({"withdrawn": ("A/capacitor",), "set_aside": ("B/capacitor",), "repriced": {"C/wfsm": 0.5}})
    assert one.startswith("1 reactive project left out of the plan: beside the rest of the plan it would cut its site's bill")
    assert "1 other reactive option at the same sites, whose value the plan has taken, was set aside" in one
    assert "1 reactive project kept in the plan at the share of its saving it adds" in one
    two = reactive_plan.withdrawn_text({"withdrawn": ("A/capacitor", "D/capacitor"), "set_aside": ("B/c", "E/c"), "repriced": {}})
    assert two.startswith("2 reactive projects left out of the plan: beside the rest of the plan they would cut their site's")
    assert "2 other reactive options at the same sites, whose value the plan has taken, were set aside" in two
    assert "(s)" not in one + two


def test_a_catalogue_without_keep_row_runs_as_with_the_shipped_one(tmp_path, demo_case):
    # today's motor then takes the shipped catalogue's keep row: the same results as the shipped catalogue
    import shutil

    from models.io import DEFAULT_OPTIONS_PATH

    without = Path(shutil.copytree(REPO / "data" / "demo", tmp_path / "demo"))
    lines = DEFAULT_OPTIONS_PATH.read_text(encoding="utf-8").splitlines()
    (without / "options.csv").write_text("\n".join(l for l in lines if not l.startswith("keep,")) + "\n", encoding="utf-8")
    # (on the date the shared demo was loaded: its default purchase date, should midnight pass in between)
    import datetime as dt

    case_b, problems = load_case(without, today=dt.date.fromisoformat(demo_case.settings.purchase_date))
    assert case_b is not None and any("no 'existing'" in p.rule for p in problems)
    a = scenario.run(demo_case, demo_case.finance, with_risk=False).results
    b = scenario.run(case_b, case_b.finance, with_risk=False).results
    cols = ["asset_id", "option_id", "npv", "saving_maintenance_per_yr", "bill_saving_per_yr"]
    pd.testing.assert_frame_equal(a[cols].reset_index(drop=True), b[cols].reset_index(drop=True), check_exact=False, rtol=1e-12)


def test_rank_order_plan_does_not_depend_on_the_exact_plans_precision(demo_run_physics):
    # each plan's interactions are checked on its own: the rank-order plan (and its own withdrawals) is the same
    # whether the exact plan was cut short (1 ms, 5 %: its first plan) or proven (the full run); budget 100,000 in year 0
    from dataclasses import replace

    case, phys = demo_run_physics
    assumptions = replace(case.finance, budget_per_yr=(100_000.0,))
    live = scenario.economics(case, phys, assumptions, with_risk=False,
                              plan_settings=scenario.PlanSettings(time_limit_s=1e-3, gap_frac=0.05))
    precise = scenario.economics(case, phys, assumptions, with_risk=False, plan_settings=scenario.PRECISE_PLAN)
    pd.testing.assert_frame_equal(live.plan_greedy.reset_index(drop=True), precise.plan_greedy.reset_index(drop=True))
    assert live.plan_comparison["npv_greedy"] == precise.plan_comparison["npv_greedy"]


def test_the_plans_uncertainty_starts_from_the_plans_own_value(result):
    # Cross-check of two paths: the tornado's centre is the plan re-priced at every factor's base value,
    # which must give the plan solver's own total (deferred projects discounted by their delay).
    assert not result.plan.empty and (result.plan["start_yr"] > 0).any()  # the demo's budget defers projects
    assert_allclose(result.plan_tornado["base_npv"], result.plan["npv_at_plan_start"].sum(), rtol=1e-9)
    assert result.plan_npv_draws.shape == (result.assumptions.monte_carlo_draws,)
    risk_rows = result.plan_risk.set_index("project_id")
    labels = result.plan["asset_id"] + "/" + result.plan["option_id"]
    assert list(risk_rows.index) == list(labels)
    assert risk_rows["start_yr"].tolist() == result.plan["start_yr"].tolist()


def test_draws_at_every_factors_base_value_give_the_plans_own_total(result, demo_case, monkeypatch):
    # Cross-check of two paths: a Monte Carlo whose every draw holds each factor at its base value must give,
    # in every draw, the plan solver's own total at the plan's start (deferred projects discounted by their
    # delay, reactive projects at the value the plan gave them).
    from models import risk as risk_module

    def base_draws(n_draws, seed, distributions=risk_module.DEFAULT_FACTORS):
        return {name: np.full(n_draws, 0.0 if name.endswith("_delta_frac") else 1.0) for name in distributions}

    monkeypatch.setattr(risk_module, "draw_factors", base_draws)
    d = float(result.assumptions.discount_rate_frac)
    _, summary, draws = scenario._plan_risk(result.cash_flows, result.assumptions, result.results, result.plan, d,
                                            bill_saving_pv=result.bill_saving_pv, loss_band=result.loss_band)
    assert_allclose(draws, result.plan["npv_at_plan_start"].sum(), rtol=1e-9)
    assert_allclose(summary["npv_p50"], result.plan["npv"], rtol=1e-9)  # each project at its own start


def test_a_reactive_projects_plan_correction_moves_with_the_draws(result, monkeypatch):
    # Invariant (linearity of NPV in the flows): the plan keeps a share r of a reactive project's bill savings
    # (models.reactive_plan). Energy price x1.2 in every draw scales only bill savings, so the project's drawn
    # NPV must move by r times what it moves by priced alone; a correction held at its base value would move
    # it by the whole change.
    from models import risk as risk_module

    def priced_up(n_draws, seed, distributions=risk_module.DEFAULT_FACTORS):
        out = {name: np.full(n_draws, 0.0 if name.endswith("_delta_frac") else 1.0) for name in distributions}
        out["energy_price_mult"] = np.full(n_draws, 1.2)
        return out

    repriced = result.plan_status["repriced"]
    assert len(repriced) >= 2  # the demo's plan keeps part of its terminal capacitors' savings
    monkeypatch.setattr(risk_module, "draw_factors", priced_up)
    d = float(result.assumptions.discount_rate_frac)
    _, summary, _ = scenario._plan_risk(result.cash_flows, result.assumptions, result.results, result.plan, d,
                                        bill_saving_pv=result.bill_saving_pv)
    rows = summary.set_index("project_id")
    alone = scenario.project_labels(result.results)
    results = result.results.assign(label=alone.to_numpy()).set_index("label")
    plan = result.plan.assign(label=(result.plan["asset_id"] + "/" + result.plan["option_id"]).to_numpy()).set_index("label")
    for label, share in repriced.items():
        alone_rise = float(scenario._risk_of_rows(result.cash_flows, result.assumptions,
                                                  np.flatnonzero((alone == label).to_numpy()), d)[2][0]
                           - results.loc[label, "npv"])
        plan_rise = float(rows.loc[label, "npv_p50"] - plan.loc[label, "npv"])
        assert alone_rise > 0
        assert_allclose(plan_rise, share * alone_rise, rtol=2e-6)  # shares are rounded to 6 decimals


def test_a_new_budget_redoes_the_plans_uncertainty(demo_case):
    # Invariant: reusing a result under a new budget gives the plan's uncertainty of a fresh run.
    phys = scenario.physics(demo_case, float(demo_case.finance.capacitor_cost_per_kvar))
    first = scenario.economics(demo_case, phys, demo_case.finance)
    tight = replace(demo_case.finance, budget_per_yr=(120000.0, 90000.0))
    reused = scenario.economics(demo_case, phys, tight, previous=first)
    fresh = scenario.economics(demo_case, phys, tight)
    assert reused.results is first.results
    assert_allclose(reused.plan_npv_draws, fresh.plan_npv_draws, rtol=1e-12)
    pd.testing.assert_frame_equal(reused.plan_risk, fresh.plan_risk)
    pd.testing.assert_frame_equal(reused.plan_tornado, fresh.plan_tornado)
    assert reused.plan_npv_draws.mean() < first.plan_npv_draws.mean()  # a smaller budget, a smaller plan


def test_without_risk_the_plan_has_no_uncertainty(demo_run_physics):
    case, phys = demo_run_physics
    r = scenario.economics(case, phys, case.finance, with_risk=False)
    assert r.plan_risk.empty and r.plan_tornado.empty and r.plan_npv_draws.size == 0


def test_the_plans_draws_taken_from_the_best_options_equal_draws_made_afresh(result):
    # Invariant: a project's draws depend only on its own flows and the seeded factors, so the plan's Monte
    # Carlo may take the projects it shares with the best options' Monte Carlo from it
    d = float(result.assumptions.discount_rate_frac)
    _, _, _, known = scenario._risk(result.cash_flows, result.assumptions, result.results, d)
    shared = set(result.results["asset_id"].to_numpy()[known[0]] + "/" + result.results["option_id"].to_numpy()[known[0]])
    plan_ids = set(result.plan["asset_id"] + "/" + result.plan["option_id"])
    assert 0 < len(plan_ids & shared) < len(plan_ids)  # the demo's plan has projects of both kinds
    with_known = scenario._plan_risk(result.cash_flows, result.assumptions, result.results, result.plan, d, known)
    afresh = scenario._plan_risk(result.cash_flows, result.assumptions, result.results, result.plan, d)
    assert_allclose(with_known[2], afresh[2], rtol=1e-12)
    pd.testing.assert_frame_equal(with_known[1], afresh[1], check_exact=False, rtol=1e-12)


def test_risk_added_to_a_result_equals_a_run_with_risk(demo_run_physics):
    # Invariant: the uncertainty added afterwards (scenario.with_risk) is the one a run with risk computes, for
    # the same plan; the plan itself is kept, not solved again
    case, phys = demo_run_physics
    plain = scenario.economics(case, phys, case.finance, with_risk=False)
    added = scenario.with_risk(plain)
    full = scenario.economics(case, phys, case.finance, with_risk=True)
    assert added.plan is plain.plan
    pd.testing.assert_frame_equal(added.plan, full.plan)  # the case's own budget: the same exact plan
    for name in ("tornado", "risk", "plan_tornado", "plan_risk"):
        pd.testing.assert_frame_equal(getattr(added, name), getattr(full, name), check_exact=False, rtol=1e-12)
    assert_allclose(added.fleet_npv_draws, full.fleet_npv_draws, rtol=1e-12)
    assert_allclose(added.plan_npv_draws, full.plan_npv_draws, rtol=1e-12)


def test_end_of_life_says_where_each_outage_cost_comes_from(result, demo_case):
    # models.scenario: the asset register's figure, else the finance assumptions', else the criticality default
    # (DOWNTIME_COST_BY_CRITICALITY: low 0, medium 200, high 2,000 per h, common practice placeholders)
    eol = result.end_of_life.set_index("asset_id")
    assets = demo_case.assets.set_index("asset_id")
    # an asset for which no new induction motor is offered has no replacement to compare, and no row
    r = result.results
    offered = set(r.loc[r["technology"] == "induction", "asset_id"])
    assert set(eol.index) == offered and len(offered) < len(assets)
    assets = assets.loc[assets.index.isin(eol.index)]
    given = assets["downtime_cost_per_h"].notna()
    assert (eol.loc[given[given].index, "downtime_cost_basis"] == "asset register").all()
    assert_allclose(eol.loc[given[given].index, "downtime_cost_per_h"], assets.loc[given, "downtime_cost_per_h"])
    if demo_case.finance.downtime_cost_per_h <= 0:
        high = assets.index[~given & (assets["criticality"] == "high")]
        assert len(high) and (eol.loc[high, "downtime_cost_per_h"] == 2000.0).all()
        assert (eol.loc[high, "downtime_cost_basis"] == "default for a high-criticality motor").all()


def test_each_past_rewind_shortens_the_failure_law_by_ten_percent():
    # Two new 20 kW motors (7.5-75 kW class: Weibull shape 2.5, scale 20 yr, models.end_of_life defaults),
    # one never rewound and one rewound twice. Hand calculation (common practice, 10 % of life per rewind):
    # scale 20 x 0.9^2 = 16.2 yr; at age 0 the mean residual life is the mean life
    # scale x Gamma(1.4) = 20 x 0.887264 = 17.7453 yr and 16.2 x 0.887264 = 14.3737 yr
    # (Gamma(1.4) from Abramowitz & Stegun table 6.1).
    from types import SimpleNamespace

    assets = pd.DataFrame({"rated_p_kw": [20.0, 20.0], "year_installed": [2026.0, 2026.0], "rewind_count": [0, 2]})
    age, shape, scale, residual = scenario._remaining_life(SimpleNamespace(assets=assets), 2026)
    assert_allclose(age, [0.0, 0.0])
    assert_allclose(shape, [2.5, 2.5])
    assert_allclose(scale, [20.0, 16.2], rtol=1e-12)
    assert_allclose(residual, [17.7453, 14.3737], rtol=1e-5)


def test_repair_or_replace_policy_buys_the_new_motor_the_rules_allow(demo_run_physics, monkeypatch):
    # The demo is an EU case: a new 4-pole motor of 75-200 kW must be IE4 since July 2023 (Regulation (EU)
    # 2019/1781 Annex I point 1(b)), so the policy's replacement at 90 kW (a size of its grid) is the catalogue's
    # IE4 motor, not its first (IE3) one; at 55 kW it stays IE3. Efficiency as every new catalogue motor's: the class floor less 10 %
    # of its losses (models.defaults.CLASS_MARGIN_LOSS_FRAC, common practice). Hand calculation from IEC
    # 60034-30-1 (4-pole, 50 Hz, table values +/-0.05): 90 kW IE4 96.1 -> 100 - 0.9 x 3.9 = 96.49 %;
    # 55 kW IE3 94.6 -> 100 - 0.9 x 5.4 = 95.14 %.
    from models import end_of_life

    case, phys = demo_run_physics
    op, sav = phys.operation, phys.savings
    options = scenario._options_in_order(case, op)
    seen = {}
    real = end_of_life.fleet_rules

    def spy(sizes, hours, **kw):
        seen.update(kw, sizes=np.asarray(sizes, dtype=float))
        return real(sizes, hours, **kw)

    monkeypatch.setattr(end_of_life, "fleet_rules", spy)
    scenario._fleet_rules(case, options, case.finance, 0.08, 15, sav, op)
    sizes = seen["sizes"]
    eff = dict(zip(sizes, seen["efficiency_new_frac"]))
    capex = dict(zip(sizes, seen["new_capex"]))
    assert_allclose(eff[90.0], 0.9649, atol=5e-4)
    assert_allclose(eff[55.0], 0.9514, atol=5e-4)
    ie3 = options[(options["technology"] == "induction") & (options["efficiency_class"] == "IE3")].iloc[0]
    ie4 = options[(options["technology"] == "induction") & (options["efficiency_class"] == "IE4")].iloc[0]
    from models.options import capital_cost

    assert_allclose(capex[90.0], capital_cost(pd.DataFrame([ie4]), np.array([90.0])).total[0, 0], rtol=1e-12)
    assert_allclose(capex[55.0], capital_cost(pd.DataFrame([ie3]), np.array([55.0])).total[0, 0], rtol=1e-12)


def test_repair_or_replace_policy_covers_the_fleets_sizes_in_its_unit(demo_run_physics):
    # The demo's largest motor is 1,600 kW (data/demo/assets.csv): the policy runs on to 1,000 kW, the top of the
    # IE class tables (IEC 60034-30-1 scope), not only to 315 kW. The same fleet declared in hp gets NEMA ratings
    # and sentences in hp.
    case, phys = demo_run_physics
    op, sav = phys.operation, phys.savings
    options = scenario._options_in_order(case, op)
    rules = scenario._fleet_rules(case, options, case.finance, 0.08, 15, sav, op)
    assert case.assets["rated_p_kw"].max() == 1600.0
    assert rules["min_rated_p_kw"].min() == 0.75 and rules["max_rated_p_kw"].max() == 1000.0
    assert all(" kW" in r and " hp" not in r for r in rules["rule"])
    in_hp = replace(case, settings=replace(case.settings, power_unit="hp"))
    rules_hp = scenario._fleet_rules(in_hp, options, case.finance, 0.08, 15, sav, op)
    # 1 hp = 0.745699872 kW (NIST SP 811 B.9); the 1,600 kW motor is above the grid's 1,250 hp (932 kW) top
    assert_allclose(rules_hp["min_rated_p_kw"].min(), 0.745699872, rtol=1e-12)
    assert_allclose(rules_hp["max_rated_p_kw"].max(), 1250 * 0.745699872, rtol=1e-12)
    assert all(" hp" in r and " kW" not in r for r in rules_hp["rule"])


def test_add_ons_are_bought_at_once_when_replacements_wait_for_failure(demo_run_physics):
    # a drive or a capacitor added to the running motor does not wait for the motor to fail: under
    # replace_at_failure its flows (capital in year 0, no must-spend credit) are those of replace_now, while an
    # option that replaces the motor is bought at the failure year (docs/finance.md, section 4)
    case, phys = demo_run_physics
    now = scenario.economics(case, phys, case.finance, with_risk=False).results.set_index(["asset_id", "option_id"])
    later = scenario.economics(case, phys, replace(case.finance, replacement_mode="replace_at_failure"),
                               with_risk=False).results.set_index(["asset_id", "option_id"])
    add_ons = now["technology"].isin(scenario.ADD_ON_TECHNOLOGIES).to_numpy()
    assert add_ons.sum() > 20 and (now.loc[add_ons, "npv"].abs() > 0).all()
    pd.testing.assert_series_equal(later.loc[add_ons, "npv"], now.loc[add_ons, "npv"])
    replacing = (now["technology"] == "induction").to_numpy()
    assert (later.loc[replacing, "npv"] != now.loc[replacing, "npv"]).any()


def test_replacements_at_failure_pay_back_from_their_purchase(demo_run_physics):
    # a replacement bought at the failure year has nothing in year 0: its payback runs from its purchase
    # (finance-metrics.md section 1a), so none reads 0 "within the horizon" before any money is spent, and a
    # rewind that only costs money never pays back
    case, phys = demo_run_physics
    later = scenario.economics(case, phys, replace(case.finance, replacement_mode="replace_at_failure"),
                               with_risk=False)
    r = later.results
    flows = later.cash_flows.net()
    waits = (flows[:, 0] == 0) & (flows.min(axis=1) < 0)  # the first money out after year 0
    assert waits.sum() > 20
    assert (r.loc[waits, "simple_payback_yr"].fillna(np.inf) > 0).all()
    losing = waits & (flows.max(axis=1) <= 0)
    assert losing.any() and not np.isfinite(r.loc[losing, "simple_payback_yr"]).any()  # (blank in results.csv)
    assert not r.loc[losing, "payback_within_horizon"].any()


def test_sixty_hertz_motors_of_eight_and_twelve_poles_run(tmp_path):
    # 8-pole (900 rpm) and 12-pole 60 Hz motors are ordinary in a US plant; the class tables have no 60 Hz
    # 8-pole column, so their levels are derived (docs/derivations/case-defaults.md) and the analysis runs
    rows = [list(r) for r in cb.ASSETS]
    for row, poles in zip(rows[:2], ("8", "12")):
        row[5], row[6], row[11], row[8] = poles, "60", "", ""  # poles, 60 Hz, no speed, no class
    folder = tmp_path / "c"
    # (a purchase date given: the US rules in force change with it)
    cb.write_case(folder, assets=rows, case_toml=cb.CASE_TOML + 'region = "US"\npurchase_date = "2026-12-01"\n')
    (folder / "tariffs").mkdir()
    (folder / "tariffs" / "flat.toml").write_text(FLAT_TARIFF, encoding="utf-8")
    sites = (folder / "sites.csv").read_text(encoding="utf-8").splitlines()
    (folder / "sites.csv").write_text(sites[0] + ",tariff_file\n" + sites[1] + ",flat.toml\n", encoding="utf-8")
    case, problems = load_case(folder)
    assert case is not None, [str(p) for p in problems if p.severity == "error"]
    assert np.isfinite(case.assets["rated_efficiency_pct"]).all()
    result = scenario.run(case, case.finance, with_risk=False)
    assert np.isfinite(result.results["npv"]).all() and len(result.results) > 10


def test_a_shorter_study_does_not_shorten_a_payback(demo_run_physics):
    # the paybacks leave out the residual value at the horizon's end (a book value, not cash): a project that
    # pays back in P years over 20 has no payback within a horizon shorter than P, instead of one the
    # end-of-study value makes up (finance-metrics.md section 1a; docs/finance.md)
    case, phys = demo_run_physics
    long = scenario.economics(case, phys, replace(case.finance, horizon_yr=20), with_risk=False).results
    long = long[np.isfinite(long["simple_payback_yr"]) & (long["simple_payback_yr"] > 3.0)]
    assert len(long) > 20
    for horizon in (3, 6):
        short = scenario.economics(case, phys, replace(case.finance, horizon_yr=horizon), with_risk=False).results
        paid = short.set_index(["asset_id", "option_id"])["simple_payback_yr"].reindex(
            pd.MultiIndex.from_frame(long[["asset_id", "option_id"]]))
        later = long["simple_payback_yr"].to_numpy() > horizon
        assert later.any() and not np.isfinite(paid.to_numpy()[later]).any()


def test_a_motors_running_cost_is_its_kwh_share_of_the_site_bill(tmp_path):
    # the one-asset case of docs/derivations/scenario-one-asset.md (flat 0.10 per kWh) on a site with a 50 kW base
    # load beside the motor: the motor bears the bill in proportion to its kWh, 0.10 per kWh, whatever the base
    # load (hand calculation: keep's running PV = kWh x 0.10 x (1 - 1.03^-10) / 0.03 = kWh x 0.10 x 8.530203)
    folder = tmp_path / "c"
    _one_asset_case(folder)
    sites = (folder / "sites.csv").read_text(encoding="utf-8").splitlines()
    fields = sites[1].split(",")
    fields[2] = "50"  # base load [kW]
    (folder / "sites.csv").write_text("\n".join([sites[0], ",".join(fields)]) + "\n", encoding="utf-8")
    case, problems = load_case(folder, mode="strict")
    result = scenario.run(case, case.finance, with_risk=False)
    kwh = float(result.results.set_index("option_id").loc["keep", "energy_kwh_per_yr"])
    running = result.lcc.set_index(["option_id", "component"]).loc[("keep", "running"), "pv"]
    assert_allclose(running, kwh * 0.10 * 8.530203, rtol=1e-6)


def test_an_option_saves_nothing_over_a_base_case_that_has_bought_it_at_failure(result):
    # a rewind whose must-spend is that same rewind (the cheaper of a rewind and a new motor): once today's motor
    # fails the base case runs the same rewound motor, so from the failure year on the increment saves nothing
    # (docs/finance.md, section 4)
    r = result.results
    flows = result.cash_flows
    horizon = int(result.assumptions.horizon_yr)
    same = ((r["option_id"] == "rewind") & np.isclose(r["capital"], r["must_spend_capital"])
            & (np.rint(r["existing_remaining_life_yr"]) < horizon)).to_numpy()
    assert same.sum() > 3
    savings = sum(flows.component(name) for name in ("savings_energy", "savings_demand", "savings_reactive",
                                                      "savings_fixed", "savings_maintenance"))
    for i in np.flatnonzero(same):
        failure = int(np.rint(r["existing_remaining_life_yr"].iloc[i]))
        assert np.all(savings[i, failure + 1:] == 0.0), r[["asset_id", "option_id"]].iloc[i].tolist()
        assert np.any(savings[i, 1:failure + 1] != 0.0)


def test_a_payback_lost_again_is_flagged_from_the_project_s_own_flows(demo_run_physics):
    # finance-metrics.md section 1: a payback is lost again where the cumulative flow, without the residual value
    # (the paybacks leave it out), ends the horizon below zero. Checked against the result's own cash-flow table
    # (an independent route: the flows' sum, not the payback kernel); the demo has at least one such project
    case, phys = demo_run_physics
    result = scenario.economics(case, phys, case.finance, with_risk=False)
    cash = result.cashflows[result.cashflows["component"].astype(str) != "residual"]
    ends = cash.groupby(["asset_id", "option_id"])["amount"].sum()
    res = result.results.set_index(["asset_id", "option_id"])
    finite = np.isfinite(res["simple_payback_yr"].to_numpy(dtype=float))
    end = ends.reindex(res.index, fill_value=0.0).to_numpy(dtype=float)
    expected = finite & (end < -1e-6)
    assert expected.any()
    assert res["simple_payback_lost_again"].to_numpy(dtype=bool).tolist() == expected.tolist()
    # never flagged without a finite payback
    assert not (res["discounted_payback_lost_again"] & ~np.isfinite(res["discounted_payback_yr"])).any()


def test_results_of_a_case_in_hp_give_ratings_in_hp_beside_kw(demo_run_physics):
    # docs/outputs.md: results.csv is in kW; a case declared in hp adds rated_p_hp (1 hp = 0.745699872 kW, NIST
    # SP 811 B.9): the demo's 1,600 kW motor is 1,600 / 0.745699872 = 2,145.6 hp (hand calculation)
    from models.exports import run_tables

    case, phys = demo_run_physics
    result = scenario.economics(case, phys, case.finance, with_risk=False)
    assert "rated_p_hp" not in run_tables(result, case)["results.csv"]
    in_hp = replace(case, settings=replace(case.settings, power_unit="hp"))
    results = run_tables(result, in_hp)["results.csv"]
    columns = list(results.columns)
    assert columns[columns.index("rated_p_kw") + 1] == "rated_p_hp"
    big = results.loc[results["rated_p_kw"] == 1600.0, "rated_p_hp"].iloc[0]
    assert big == pytest.approx(2145.6, abs=0.05)
    assert "rated_p_hp" not in result.results  # the engine's own table stays in kW
