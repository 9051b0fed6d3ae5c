"""Validation record for models.end_of_life: Weibull failure law, strategy costs, fleet rules.

Hand calculations are in docs/derivations/finance-end-of-life.md.
"""

import math

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose

from models import end_of_life as eol

# Half a unit of the 6th decimal written in the derivation.
SIX_DECIMALS = 5e-7
# Failure law with yearly survival 1/2 at any age (beta = 1, eta = 1/ln 2), finance-end-of-life.md section 4.
HALF_LIFE_SCALE_YR = 1.0 / math.log(2.0)


class TestWeibull:
    def test_survival_at_scale(self):
        # Hand calculation, finance-end-of-life.md section 1: R(eta) = e^-1.
        assert_allclose(eol.weibull_survival(10.0, 2.0, 10.0), 0.367879, atol=SIX_DECIMALS)

    def test_conditional_probability(self):
        # Hand calculation, finance-end-of-life.md section 1: 1 - e^-1.25 = 0.713495.
        assert_allclose(eol.conditional_failure_probability(10.0, 5.0, 2.0, 10.0), 0.713495, atol=SIX_DECIMALS)

    @settings(max_examples=40, deadline=None)
    @given(st.floats(0, 50), st.floats(0, 20), st.floats(1, 40))
    def test_exponential_is_memoryless(self, age, within, scale):
        # Hand calculation, finance-end-of-life.md section 1: beta = 1 -> 1 - exp(-x/eta), whatever the age.
        assert_allclose(eol.conditional_failure_probability(age, within, 1.0, scale),
                        1.0 - math.exp(-within / scale), atol=1e-12)

    @settings(max_examples=40, deadline=None)
    @given(st.floats(0, 40), st.floats(0.5, 5), st.floats(2, 40))
    def test_probability_grows_with_window(self, age, shape, scale):
        # Invariant: F(x | a) is non-decreasing in x and within [0, 1].
        p = eol.conditional_failure_probability(age, np.array([0.0, 1.0, 5.0, 50.0]), shape, scale)
        assert np.all(np.diff(p) >= -1e-15) and p[0] == 0.0 and np.all((p >= 0) & (p <= 1))

    def test_failure_year_probabilities(self):
        p = eol.failure_year_probabilities(5.0, 3, 1.0, 10.0)
        # Hand calculation, finance-end-of-life.md section 2.
        assert_allclose(p, [0.0, 0.095163, 0.086107, 0.077913], atol=SIX_DECIMALS)
        assert_allclose(p.sum(), 1 - math.exp(-0.3), rtol=1e-12)

    def test_failure_year_probabilities_vectorised(self):
        p = eol.failure_year_probabilities(np.array([0.0, 10.0, 30.0]), 15, 2.5, 20.0)
        assert p.shape == (3, 16)
        # Invariant: rows sum to the conditional probability of failing within the horizon.
        assert_allclose(p.sum(axis=1), eol.conditional_failure_probability([0.0, 10.0, 30.0], 15, 2.5, 20.0),
                        rtol=1e-12)

    def test_mean_residual_life(self):
        # Hand calculation, finance-end-of-life.md section 3.
        assert_allclose(eol.mean_residual_life_yr(7.0, 1.0, 10.0), 10.0, rtol=1e-10)
        assert_allclose(eol.mean_residual_life_yr(0.0, 2.0, 10.0), 8.86227, atol=5e-6)

    def test_mean_residual_life_shrinks_with_age_for_wear_out(self):
        # Invariant: beta > 1 (wear-out) -> older motors have less life left; finite deep in the tail.
        m = eol.mean_residual_life_yr(np.array([0.0, 10.0, 20.0, 40.0, 400.0]), 2.5, 20.0)
        assert np.all(np.diff(m) < 0) and np.all(np.isfinite(m)) and m[-1] > 0

    def test_life_classes(self):
        shape, scale = eol.life_class_parameters([5.5, 7.5, 7.6, 75.0, 200.0])
        # DEFAULT_LIFE_CLASSES (common practice, documented in the module): 14, 20, 28 yr scales.
        assert scale.tolist() == [14.0, 14.0, 20.0, 20.0, 28.0]
        assert shape.tolist() == [2.5] * 5

    def test_default_mean_lives_inside_common_practice_bands(self):
        # Common practice (typical motor-life bands): <7.5 kW 10-15 yr, 7.5-75 kW 15-20 yr, >75 kW 20-30 yr.
        bands = [(10, 15), (15, 20), (20, 30)]
        for life_class, (low, high) in zip(eol.DEFAULT_LIFE_CLASSES, bands):
            assert low <= life_class.mean_life_yr <= high

    @pytest.mark.parametrize("call", [
        lambda: eol.weibull_survival(-1.0, 2.0, 10.0),
        lambda: eol.conditional_failure_probability(1.0, 1.0, 0.0, 10.0),
        lambda: eol.life_class_parameters([0.0]),
        lambda: eol.failure_year_probabilities(1.0, 0, 2.0, 10.0),
        lambda: eol.LifeClass(10.0, -1.0, 5.0, "bad"),
    ])
    def test_invalid_raises(self, call):
        with pytest.raises(ValueError):
            call()


def two_year_case(**overrides):
    kwargs = dict(age_yr=3.0, shape=1.0, scale_yr=HALF_LIFE_SCALE_YR, new_capex=100.0, rewind_capex=40.0,
                  energy_cost_existing_per_yr=50.0, energy_cost_new_per_yr=40.0, energy_cost_rewound_per_yr=55.0,
                  downtime_cost_per_h=2.0, new_lead_time_h=10.0, rewind_lead_time_h=20.0, planned_swap_h=0.0,
                  new_life_yr=10.0, rewind_life_yr=10.0, discount_rate_frac=0.0, horizon_yr=2)
    kwargs.update(overrides)
    return eol.strategy_costs(**kwargs)


class TestStrategyCosts:
    def test_hand_example(self):
        row = two_year_case().iloc[0]
        # Hand calculation, finance-end-of-life.md section 4: 100, 115, 134.5.
        assert_allclose([row.cost_replace_now, row.cost_replace_at_failure, row.cost_rewind_at_failure],
                        [100.0, 115.0, 134.5], rtol=1e-12)
        assert row.best_strategy == "replace_now"
        assert_allclose(row.advantage_over_next, 15.0, rtol=1e-12)
        assert_allclose(row.failure_probability_in_horizon_frac, 0.75, rtol=1e-12)

    def test_spare_on_hand(self):
        row = two_year_case(spare_on_hand=True, spare_swap_h=1.0).iloc[0]
        # Hand calculation, finance-end-of-life.md section 4 (spare on hand): 101.5 and 106.
        assert_allclose([row.cost_replace_at_failure, row.cost_rewind_at_failure], [101.5, 106.0], rtol=1e-12)

    def test_discounted(self):
        row = two_year_case(discount_rate_frac=0.1, horizon_yr=1).iloc[0]
        # Hand calculation, finance-end-of-life.md section 4 (with discounting): 54.545455.
        assert_allclose(row.cost_replace_now, 54.545455, atol=SIX_DECIMALS)

    def test_vectorised_and_indexed(self):
        out = eol.strategy_costs([2.0, 20.0], 2.5, 20.0, [1000.0, 1000.0], 400.0, 900.0, 850.0, 920.0,
                                 asset_id=["P-1", "P-2"])
        assert list(out.index) == ["P-1", "P-2"]
        assert set(out["best_strategy"]) <= set(eol.STRATEGIES)
        # Invariant: an older wear-out motor is more likely to fail within the horizon.
        assert out["failure_probability_in_horizon_frac"].iloc[1] > out["failure_probability_in_horizon_frac"].iloc[0]

    def test_free_downtime_and_equal_running_cost_prefers_waiting(self):
        # Invariant: with no downtime cost, no efficiency gain and d > 0, delaying the purchase is cheaper.
        row = eol.strategy_costs(10.0, 2.5, 20.0, 1000.0, 400.0, 900.0, 900.0, 900.0,
                                 discount_rate_frac=0.08, horizon_yr=15).iloc[0]
        assert row.cost_replace_at_failure < row.cost_replace_now

    def test_negative_capex_raises(self):
        with pytest.raises(ValueError, match="new_capex"):
            two_year_case(new_capex=-1.0)


class TestFailedMotor:
    def test_hand_example(self):
        out = eol.failed_motor_costs(1000.0, 400.0, 900.0, 1000.0, discount_rate_frac=0.0, horizon_yr=10,
                                     new_life_yr=20.0, rewind_life_yr=10.0)
        # Hand calculation, finance-end-of-life.md section 5: 9500 and 10400.
        assert_allclose(out[["cost_replace", "cost_rewind"]].to_numpy()[0], [9500.0, 10400.0], rtol=1e-12)
        assert out["best"].iloc[0] == "replace"


class TestFleetRules:
    def test_hand_thresholds(self):
        rules = eol.fleet_rules(
            [5.0, 10.0, 100.0], [100.0, 200.0, 300.0, 400.0, 500.0],
            new_capex=[600.0, 2000.0, 1_000_000.0], rewind_capex=500.0, efficiency_new_frac=0.9,
            efficiency_rewound_frac=0.8, price_per_kwh=0.1, load_frac=1.0, discount_rate_frac=0.0,
            horizon_yr=10, new_life_yr=20.0, rewind_life_yr=10.0)
        # Hand calculation, finance-end-of-life.md section 6: always replace, above 360 h (grid 400), never.
        assert rules["min_hours_to_replace_h_per_yr"].tolist() == [0.0, 400.0, np.inf]
        assert rules["decision"].tolist() == ["replace", "replace_above_hours", "rewind"]
        assert "400 h/yr" in rules["rule"].iloc[1] and "10 kW" in rules["rule"].iloc[1]
        # the bands follow on: 5 kW, above 5 up to 10 kW, above 10 up to 100 kW (no motor between falls outside)
        assert rules["min_rated_p_kw"].tolist() == [5.0, 5.0, 10.0] and rules["max_rated_p_kw"].tolist() == [5.0, 10.0, 100.0]
        assert rules["rule"].iloc[0].startswith("Motors of 5 kW: replace")
        assert rules["rule"].iloc[2].startswith("Motors above 10 kW, up to 100 kW: rewind")

    def test_sizes_with_same_threshold_merge(self):
        rules = eol.fleet_rules(
            [1.0, 2.0, 3.0], [1000.0, 2000.0], new_capex=0.0, rewind_capex=100.0, efficiency_new_frac=0.9,
            efficiency_rewound_frac=0.8, price_per_kwh=0.1)
        # A free new motor that also runs better always wins: one merged row.
        assert len(rules) == 1 and rules["min_rated_p_kw"].iloc[0] == 1.0 and rules["max_rated_p_kw"].iloc[0] == 3.0
        assert isinstance(rules, pd.DataFrame) and rules["decision"].iloc[0] == "replace"

    def test_rules_speak_in_the_cases_unit(self):
        # the hand example above with 7.457 and 74.57 kW grids (10 and 100 hp, 1 hp = 0.745699872 kW, NIST SP 811
        # B.9): the sizes in the sentences are hp, the size columns stay kW
        hp = 0.745699872
        rules = eol.fleet_rules([10.0 * hp, 100.0 * hp], [1000.0], new_capex=0.0, rewind_capex=100.0,
                                efficiency_new_frac=0.9, efficiency_rewound_frac=0.8, price_per_kwh=0.1, power_unit="hp")
        assert rules["rule"].iloc[0].startswith("Motors of 10-100 hp: replace")
        assert_allclose(rules[["min_rated_p_kw", "max_rated_p_kw"]].to_numpy()[0], [7.45699872, 74.5699872])

    def test_policy_grid_reaches_the_fleets_largest_motor(self):
        # common IEC ratings to 315 kW at least, on to the first at or above the largest motor, to 1,000 kW
        # (the IE class tables' top, IEC 60034-30-1 scope); NEMA ratings for a case in hp
        assert eol.policy_sizes_kw(45.0).tolist()[-1] == 315.0 and eol.policy_sizes_kw(45.0)[0] == 0.75
        assert eol.policy_sizes_kw(315.0).tolist()[-1] == 315.0
        assert eol.policy_sizes_kw(355.0).tolist()[-1] == 500.0
        assert eol.policy_sizes_kw(1600.0).tolist()[-1] == 1000.0
        assert eol.policy_sizes_kw(float("nan")).tolist()[-1] == 315.0
        hp = np.asarray(eol.policy_sizes_kw(20.0, "hp")) / 0.745699872
        assert_allclose(hp, [1, 3, 7.5, 15, 30, 50, 75, 125, 200, 300], rtol=1e-12)
        assert_allclose(eol.policy_sizes_kw(600.0 * 0.745699872, "hp")[-1] / 0.745699872, 800.0, rtol=1e-12)

    def test_unsorted_grid_raises(self):
        with pytest.raises(ValueError, match="ascending"):
            eol.fleet_rules([10.0, 5.0], [1000.0], new_capex=1.0, rewind_capex=1.0, efficiency_new_frac=0.9,
                            efficiency_rewound_frac=0.8, price_per_kwh=0.1)

    def test_efficiency_in_percent_raises(self):
        with pytest.raises(ValueError, match="fraction"):
            eol.energy_cost_per_yr(10.0, 0.75, 4000.0, 91.0, 0.1)


class TestWording:
    def test_strategy_names_cover_every_strategy(self):
        assert list(eol.STRATEGY_NAMES) == list(eol.STRATEGIES)

    def test_caution_names_the_mean_life_of_each_class(self):
        text = eol.failure_law_caution()
        # mean life eta * Gamma(1 + 1/2.5), Gamma(1.4) = 0.887264 (Abramowitz & Stegun table 6.1):
        # 14 x 0.887264 = 12.42, 20 x 0.887264 = 17.75, 28 x 0.887264 = 24.84 yr
        assert "up to 7.5 kW 12.4 yr, 7.5-75 kW 17.7 yr, above 75 kW 24.8 yr" in text
        assert "not a forecast" in text and "common practice" in text
        # the life cut the engine applies per past rewind (a common practice 10 %, models.scenario._remaining_life)
        assert "each past rewind shortens a motor's expected life by 10 %" in text

    def test_caution_follows_the_classes_given(self):
        # one class of beta = 1 (exponential, Gamma(2) = 1): mean life = eta = 10 yr
        text = eol.failure_law_caution((eol.LifeClass(math.inf, 1.0, 10.0, "one"),))
        assert "above 0 kW 10.0 yr" in text


def test_a_motor_that_never_runs_is_left_out_of_the_end_of_life_comparison(tmp_path):
    # User report: a spare motor (operating_h_per_yr = 0) was advised "replace now" because its failure was
    # priced as an outage. A motor that does not run in the analysis year stops nothing when it fails: it is
    # left out, and the asset page and the decision record say why.
    import casebuilder as cb
    from dashboard import services
    from models import scenario
    from models.case import load_case

    assets = [list(row) for row in cb.ASSETS]
    assets[1][16] = "0"  # F1, the 7.5 kW exhaust fan: a spare, 0 h/yr
    folder = cb.with_flat_tariff(cb.write_case(tmp_path / "case", assets=assets))
    case, problems = load_case(folder)
    assert case is not None, problems
    result = scenario.run(case, case.finance, with_risk=False)
    compared = set(result.end_of_life["asset_id"])
    assert "F1" not in compared and "P1" in compared
    assert scenario.end_of_life_left_out(result, "F1") == "idle"
    assert scenario.end_of_life_left_out(result, "P1") == ""
    import types

    view = types.SimpleNamespace(case=case, currency="EUR", power_unit="kW")  # (what the asset page's view gives)
    summary = services.asset_end_of_life(view, result, "F1")
    assert summary.strategies.empty
    assert summary.message == f"No end-of-life comparison for F1: {scenario.END_OF_LIFE_LEFT_OUT['idle']}."
    assert not services.asset_end_of_life(view, result, "P1").strategies.empty
    from models.pack import content
    from models.pack.decision_record import record_context

    said = " ".join(str(v) for v in record_context(case, result, content.select_scope(case, result, assets=["F1"],
                                                                                       plan=False), "F1").values())
    assert "Not compared: it does not run in the analysis year" in said


def test_a_spare_on_hand_shortens_the_outage_to_its_fitting(tmp_path):
    # the asset register's spare_on_hand (data/schema/assets.csv): a failure stops the motor only while the spare
    # is fitted, SPARE_SWAP_H = 8 h (common practice), for both at-failure strategies, whatever the size; a motor
    # without one keeps its size class's hours (OUTAGE_CLASSES: up to 37 kW, 24 h new and 72 h rewound)
    import casebuilder as cb
    from models import scenario
    from models.case import load_case

    header = cb.ASSET_HEADER + ["spare_on_hand"]
    assets = [list(row) + [flag] for row, flag in zip(cb.ASSETS, ["yes", "", "no"])]
    folder = cb.with_flat_tariff(cb.write_case(tmp_path / "case", assets=assets, asset_header=header))
    case, problems = load_case(folder)
    assert case is not None, problems
    eol = scenario.run(case, case.finance, with_risk=False).end_of_life.set_index("asset_id")
    assert (eol.loc["P1", "new_lead_time_h"], eol.loc["P1", "rewind_lead_time_h"]) == (8.0, 8.0)  # 15 kW, a spare
    assert (eol.loc["F1", "new_lead_time_h"], eol.loc["F1", "rewind_lead_time_h"]) == (24.0, 72.0)  # 7.5 kW, blank
    assert (eol.loc["C1", "new_lead_time_h"], eol.loc["C1", "rewind_lead_time_h"]) == (72.0, 168.0)  # 75 kW, no


def test_the_register_s_outage_hours_override_the_size_class_and_the_spare(tmp_path):
    # the asset register's new_lead_time_h and rewind_lead_time_h (data/schema/assets.csv): where given they are the
    # outage's hours, over the size class (OUTAGE_CLASSES, common practice from memory) and a spare's fitting
    # (SPARE_SWAP_H = 8 h); a blank keeps those. Each hour says where it comes from (lead_time_basis).
    import casebuilder as cb
    from models import scenario
    from models.case import load_case

    header = cb.ASSET_HEADER + ["spare_on_hand", "new_lead_time_h", "rewind_lead_time_h"]
    extra = {"P1": ["yes", "", "30"], "F1": ["", "500", ""], "C1": ["no", "", ""]}
    assets = [list(row) + extra[row[0]] for row in cb.ASSETS]
    folder = cb.with_flat_tariff(cb.write_case(tmp_path / "case", assets=assets, asset_header=header))
    case, problems = load_case(folder)
    assert case is not None, problems
    eol = scenario.run(case, case.finance, with_risk=False).end_of_life.set_index("asset_id")
    # P1, 15 kW with a spare: the spare's 8 h for a new motor, the register's 30 h for the rewind
    assert (eol.loc["P1", "new_lead_time_h"], eol.loc["P1", "rewind_lead_time_h"]) == (8.0, 30.0)
    assert eol.loc["P1", "lead_time_basis"] == "spare on hand (new), asset register (rewound)"
    # F1, 7.5 kW: the register's 500 h to a new motor, the class's 72 h to a rewound one
    assert (eol.loc["F1", "new_lead_time_h"], eol.loc["F1", "rewind_lead_time_h"]) == (500.0, 72.0)
    assert eol.loc["F1", "lead_time_basis"] == "asset register (new), size class (rewound)"
    # C1, 75 kW, nothing given: the class's 72 h and 168 h
    assert (eol.loc["C1", "new_lead_time_h"], eol.loc["C1", "rewind_lead_time_h"]) == (72.0, 168.0)
    assert eol.loc["C1", "lead_time_basis"] == "size class"
    # the decision record says where the hours come from apart from the cost per hour's source (so the cost's
    # "asset register" is not read as the hours' source)
    from models.pack import content
    from models.pack.decision_record import record_context

    result = scenario.run(case, case.finance, with_risk=False)
    said = " ".join(str(v) for v in record_context(case, result, content.select_scope(case, result, assets=["P1"],
                                                                                       plan=False), "P1").values())
    assert "30 h to a rewound one (hours: spare on hand (new), asset register (rewound))" in said


def test_outage_hours_outside_a_year_are_refused(tmp_path):
    # data/schema/assets.csv, new_lead_time_h: min 0, max 8760 h (a year); -5 h (P1, file row 2) and 9000 h (C1,
    # file row 4) lie outside it, F1's blank takes its size class. Each is an error naming its row, the column and
    # the rule, and the case is refused
    import casebuilder as cb
    from models.case import load_case

    header = cb.ASSET_HEADER + ["new_lead_time_h"]
    assets = [list(row) + [value] for row, value in zip(cb.ASSETS, ["-5", "", "9000"])]
    case, problems = load_case(cb.write_case(tmp_path / "case", assets=assets, asset_header=header))
    assert case is None
    column = [p for p in problems if p.column == "new_lead_time_h"]
    for row, value in ((2, "-5"), (4, "9000")):
        found = [p for p in column if p.row == row]
        assert len(found) == 1, [str(p) for p in column]
        p = found[0]
        assert p.severity == "error" and p.file == "assets.csv" and p.value == value
        assert p.rule == "'new_lead_time_h' must lie between 0 and 8760 h"
    assert {p.row for p in column} == {2, 4}


def _failed_case(tmp_path, flags):
    import casebuilder as cb
    from models.case import load_case

    header = cb.ASSET_HEADER + ["failed"]
    assets = [list(row) + [flag] for row, flag in zip(cb.ASSETS, flags)]
    folder = cb.with_flat_tariff(cb.write_case(tmp_path / "case", assets=assets, asset_header=header))
    case, problems = load_case(folder)
    assert case is not None, problems
    return case


def test_a_failed_motor_is_counted_against_the_least_that_puts_it_back_in_service(tmp_path):
    # the asset register's `failed` (data/schema/assets.csv): the spend a failure forces (the cheaper of a rewind
    # and the cheapest new motor the rules allow, the "must-spend" item) falls now, so the motor's expected
    # remaining life is 0. Hand reasoning (docs/finance.md, section 4, "A motor that has failed"): the rewind,
    # bought as the option and as the base case in year 0, has the same capital, life and running cost in both,
    # so every flow cancels and its NPV is zero; today's motor cannot be kept, so it is not the best option.
    from models import scenario

    case = _failed_case(tmp_path, ["", "yes", "yes"])
    result = scenario.run(case, case.finance, with_risk=False)
    r = result.results.set_index(["asset_id", "option_id"])
    for asset_id in ("F1", "C1"):
        assert bool(r.loc[(asset_id, "keep"), "failed"]) and r.loc[(asset_id, "keep"), "existing_remaining_life_yr"] == 0
        assert r.loc[(asset_id, "rewind"), "must_spend_option_id"] == "rewind"
        assert abs(r.loc[(asset_id, "rewind"), "npv"]) < 1e-6 * r.loc[(asset_id, "rewind"), "capital"]
        assert not r.loc[(asset_id, "keep"), "best_for_asset"]
    assert not bool(r.loc[("P1", "keep"), "failed"]) and r.loc[("P1", "keep"), "existing_remaining_life_yr"] > 0
    # the base case buys the least repair in year 0: its capital is credited to a replacing option then
    cash = result.cashflows
    credit = cash[(cash["asset_id"] == "F1") & (cash["option_id"] == "ie3") & (cash["component"] == "baseline_credit")]
    assert credit.loc[credit["year"] == 0, "amount"].iloc[0] == pytest.approx(r.loc[("F1", "rewind"), "capital"])
    # F1 (7.5 kW): every new option loses money against the rewind (as it does against today's running motor),
    # so the least repair is its best option
    assert r.loc[("F1", "rewind"), "best_for_asset"]
    # the least repair invests nothing over itself: NPV exactly 0, no rate, no payback, no saving
    least = r.loc[("F1", "rewind")]
    assert least["npv"] == 0.0 and least["irr_status"] == "none" and np.isnan(least["mirr_frac"])
    assert np.isnan(least["simple_payback_yr"]) and np.isnan(least["profitability_index"])
    assert least["bill_saving_per_yr"] == 0.0 and least["saving_maintenance_per_yr"] == 0.0
    # a replacing option's saving is over the least repair (the basis of its NPV): the same motor running
    # (the case without `failed`) gives its saving over today's motor, less the rewind's over today's motor
    running = scenario.run(_failed_case(tmp_path / "running", ["", "", ""]), case.finance,
                           with_risk=False).results.set_index(["asset_id", "option_id"])
    for column in ("bill_saving_per_yr", "saving_maintenance_per_yr", "energy_saved_kwh_per_yr"):
        assert r.loc[("F1", "ie3"), column] == pytest.approx(
            running.loc[("F1", "ie3"), column] - running.loc[("F1", "rewind"), column], rel=1e-9, abs=1e-9)
        # an add-on keeps its saving over today's motor (its repair is the base case's too)
        assert r.loc[("F1", "add_drive"), column] == running.loc[("F1", "add_drive"), column]

    eol = result.end_of_life.set_index("asset_id")
    assert not eol.loc["P1", "failed"] and eol.loc["P1", "failure_probability_in_horizon_frac"] < 1
    for asset_id in ("F1", "C1"):
        e = eol.loc[asset_id]
        # the failure is now: certain, no residual life; replacing now and at failure are one cost
        assert e["failed"] and e["failure_probability_in_horizon_frac"] == 1.0 and e["mean_residual_life_yr"] == 0.0
        assert e["cost_replace_now"] == e["cost_replace_at_failure"]
        cheaper = "replace_now" if e["cost_replace_now"] < e["cost_rewind_at_failure"] else "rewind_at_failure"
        assert e["best_strategy"] == cheaper
        assert e["advantage_over_next"] == pytest.approx(abs(e["cost_replace_now"] - e["cost_rewind_at_failure"]))


def test_a_failed_motor_s_project_starts_in_plan_year_0_or_not_at_all(tmp_path):
    # with a first-year budget too small for P1's project, a running P1 waits for plan year 1; marked as failed
    # it cannot wait (docs/finance.md, section 6): the plan takes it in year 0 or leaves it out
    import dataclasses

    from models import scenario

    budgets = dict(budget_per_yr=(100.0, 1e9))
    running = _failed_case(tmp_path / "running", ["", "", ""])
    plan = scenario.run(running, dataclasses.replace(running.finance, **budgets), with_risk=False).plan
    assert dict(zip(plan["asset_id"], plan["start_yr"])).get("P1") == 1
    failed = _failed_case(tmp_path / "failed", ["yes", "", ""])
    result = scenario.run(failed, dataclasses.replace(failed.finance, **budgets), with_risk=False)
    for frame in (result.plan, result.plan_greedy):
        assert "P1" not in set(frame.loc[frame["start_yr"] > 0, "asset_id"])
    # year 0: with a budget of 1e9 in each year nothing waits, and the failed P1's project is in the plan at start
    # year 0 (in both the optimised and the greedy plan)
    ample = scenario.run(failed, dataclasses.replace(failed.finance, budget_per_yr=(1e9, 1e9)), with_risk=False)
    for frame in (ample.plan, ample.plan_greedy):
        assert list(frame.loc[frame["asset_id"] == "P1", "start_yr"]) == [0]


def test_a_failed_motor_s_record_says_so_and_recommends_a_way_back_into_service(tmp_path):
    from models import scenario
    from models.pack import content
    from models.pack.decision_record import record_context

    case = _failed_case(tmp_path, ["", "yes", ""])
    result = scenario.run(case, case.finance, with_risk=False)
    scope = content.select_scope(case, result, assets=["F1"], plan=False)
    rec = scope.recommended.set_index("asset_id").loc["F1"]
    assert rec["option_id"] == "rewind" and rec["reason_short"] == "failed; least that puts it back in service"
    ctx = record_context(case, result, scope, "F1")
    assert ctx["recommended"] == "Rewind"
    said = " ".join(ctx["reasons"])
    assert "This motor has failed (asset register). The least that puts it back in service now is rewind (" in said
    assert "now that it has failed" in said and "A separate decision" not in said
    assert "The motor has failed" in ctx["eol_note"] and "Probability" not in ctx["eol_note"]
    assert ("State", "failed, out of service", False) in ctx["nameplate"]  # (label, value, defaulted)
    assert len(ctx["eol_rows"]) == 2 and ctx["options_basis"].startswith("increment over the least that puts")
    # the rewind earns nothing over itself, so the plan leaves it out: the record and the register say its
    # capital is to be booked on its own
    assert "F1" not in set(result.plan["asset_id"])
    assert "Not in the fleet plan: the motor needs a way back into service at once" in said + " ".join(ctx["reasons"])
    register = content.risk_register(case, result, scope)
    row = register[register["item"] == "Motors that have failed"].iloc[0]
    assert row["assets"] == "F1" and "not in the plan's capital" in row["detail"]
    # a pack of the plan speaks for the fleet: it names the failed motor the plan leaves out
    plan_scope = content.select_scope(case, result)
    assert "F1" not in plan_scope.asset_ids
    fleet_row = content.risk_register(case, result, plan_scope)
    fleet_row = fleet_row[fleet_row["item"] == "Motors that have failed"].iloc[0]
    assert fleet_row["assets"] == "F1" and "of which F1 has no project in the plan that replaces the motor" in fleet_row["detail"]
    # the Asset page says the same above the options
    from dashboard import services

    rewind = result.results.set_index(["asset_id", "option_id"]).loc[("F1", "rewind"), "capital"]
    assert services.failed_text(result, "F1", "EUR") == (
        "This motor has failed (asset register): every option is counted against the least that puts it back in "
        f"service now (Rewind for EUR {rewind:,.0f}); keeping it as it is would leave it stopped.")
    assert services.failed_text(result, "P1", "EUR") == ""


def test_a_failed_flag_that_is_not_yes_or_no_is_refused(tmp_path):
    # data/schema/assets.csv: `failed` is true or false; the problem names the column and the value
    import casebuilder as cb
    from models.case import load_case

    header = cb.ASSET_HEADER + ["failed"]
    assets = [list(row) + [flag] for row, flag in zip(cb.ASSETS, ["maybe", "", "no"])]
    case, problems = load_case(cb.write_case(tmp_path / "case", assets=assets, asset_header=header))
    said = [str(p) for p in problems if p.severity == "error"]
    assert case is None and any("'failed' must be true or false" in t and "maybe" in t for t in said), said


def test_a_failed_motor_is_marked_in_the_report_and_the_workbook(tmp_path):
    # the report's option matrix and appendix mark the failed motor and say its NPVs' basis; the workbook's
    # Results sheet says which rows are of a failed motor and its End of life sheet says "now"
    import re

    from openpyxl import load_workbook

    from models import scenario
    from models.pack import REPORT_NAME, WORKBOOK_NAME, write_pack

    case = _failed_case(tmp_path, ["", "yes", ""])
    result = scenario.run(case, case.finance, with_risk=False)
    write_pack(case, result, tmp_path / "pack", assets=["F1", "P1"])
    html = (tmp_path / "pack" / REPORT_NAME).read_text(encoding="utf-8")
    assert re.search(r">F1 \(failed\)<", html) and not re.search(r">P1 \(failed\)<", html)
    assert "each NPV is over the least that puts it back in service now" in html
    book = load_workbook(tmp_path / "pack" / WORKBOOK_NAME)
    ws = book["Results"]
    header = [c.value for c in ws[3]]
    col_asset, col_failed = header.index("Asset") + 1, header.index("Motor has failed") + 1
    marks = {ws.cell(r, col_asset).value: ws.cell(r, col_failed).value for r in range(4, ws.max_row + 1)}
    assert marks["F1"] == "yes" and marks["P1"] == "no"
    eol = book["End of life"]
    rows = [[c.value for c in r] for r in eol.iter_rows()]
    f1 = next(r for r in rows if r and r[0] == "F1")
    assert "yes" in f1 and any(v in ("replace it now", "rewind it now") for v in f1)


def test_check_and_run_name_the_motors_marked_as_failed(tmp_path, capsys):
    from drivecase.cli import main

    case = _failed_case(tmp_path, ["", "yes", "yes"])
    assert main(["check", str(case.path)]) == 0
    assert "2 motors marked as failed (asset register column failed): F1, C1" in capsys.readouterr().out
    assert main(["run", str(case.path), "--out", str(tmp_path / "out"), "--no-risk", "--quiet"]) == 0
    out = capsys.readouterr().out
    assert "2 motors marked as failed, each option counted over the least that puts it back in service now: F1, C1" in out
    # and what to do with each: what the plan buys (or that the repair is outside its capital), the least repair and
    # the cheaper of a rewind and a new motor now, read against the run's files
    import pandas as pd

    plan = pd.read_csv(tmp_path / "out" / "plan.csv").set_index("asset_id")
    eol = pd.read_csv(tmp_path / "out" / "end_of_life.csv").set_index("asset_id")
    for asset_id in ("F1", "C1"):
        line = next(x for x in out.splitlines() if x.startswith(f"    {asset_id}: "))
        if asset_id in plan.index:
            assert f"in plan year {int(plan.loc[asset_id, 'start_yr'])}" in line
        else:
            assert "The plan buys nothing for it; its repair or replacement is not in the plan's capital" in line
        if asset_id in eol.index:
            now = {"replace_now": "a new motor now", "rewind_at_failure": "a rewind now"}[eol.loc[asset_id, "best_strategy"]]
            assert f"over the study period {now} costs least" in line
        assert "the cheapest outlay that puts it back in service is " in line


def test_a_failed_motor_s_measurement_plan_takes_the_least_repair_as_its_baseline(tmp_path):
    # a motor that has failed cannot be logged before the change: the baseline is the modelled rewound motor
    # (its must-spend), as results.csv gives it
    from models import scenario
    from models.pack import content

    case = _failed_case(tmp_path, ["", "", "yes"])
    result = scenario.run(case, case.finance, with_risk=False)
    r = result.results.set_index(["asset_id", "option_id"])
    project = result.results[(result.results["asset_id"] == "C1") & (result.results["option_id"] == "ie4")]
    plan = content.mv_plan(result, project).iloc[0]
    assert plan["measure"].startswith("after the change only (the motor has failed: the baseline is the modelled Rewind)")
    assert plan["baseline_energy_kwh_per_yr"] == pytest.approx(r.loc[("C1", "rewind"), "energy_kwh_per_yr"])
    assert plan["baseline_speed_rpm"] == pytest.approx(r.loc[("C1", "rewind"), "mean_speed_rpm"])


def test_the_fleet_ranking_marks_a_failed_motor(tmp_path):
    from types import SimpleNamespace

    from dashboard import services
    from models import scenario

    case = _failed_case(tmp_path, ["", "yes", ""])
    result = scenario.run(case, case.finance, with_risk=False)
    ranked = services.ranked_assets(SimpleNamespace(case=case, power_unit="kW"), result).set_index("asset_id")
    descriptions = case.assets.set_index("asset_id")["description"]
    assert ranked.loc["F1", "description"] == f"{descriptions['F1'] or ''} (failed)".strip()
    assert ranked.loc["P1", "description"] == descriptions["P1"]
