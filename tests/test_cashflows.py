"""Validation record for models.cashflows: timing, repeat purchases, must-spend credit, residual, tax.

Hand calculations are in docs/derivations/finance-cashflows.md (examples A-E) and
docs/derivations/finance-metrics.md section 8; factor values computed from the NIST Handbook 135
formulas.
"""

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose

from models import cashflows as cf
from models.finance import FinanceAssumptions, npv


def example_a():
    projects = cf.ProjectInputs(
        project_id=["M1/IE4"], capex_equipment=1000.0, capex_installation=200.0, capex_engineering=50.0,
        capex_contingency=50.0, savings_energy_per_yr=400.0, savings_demand_per_yr=50.0, option_life_yr=3.0,
        midlife_cost=60.0, midlife_year_yr=2.0)
    assumptions = FinanceAssumptions(horizon_yr=5, escalation_energy_frac=0.02, incentive_capital_share_frac=0.1,
                                     incentive_max=100.0)
    return cf.build_cash_flows(projects, assumptions)


def example_b():
    projects = cf.ProjectInputs(
        project_id=["M2/IE4"], capex_equipment=1000.0, savings_energy_per_yr=100.0, option_life_yr=10.0,
        baseline_capex=400.0, baseline_life_yr=5.0, existing_remaining_life_yr=1.6)
    assumptions = FinanceAssumptions(horizon_yr=4, tax_rate_frac=0.25, depreciation_yr=2,
                                     replacement_mode="replace_at_failure")
    return cf.build_cash_flows(projects, assumptions)


class TestBuildCashFlows:
    def test_example_a_net(self):
        # Hand calculation, docs/derivations/finance-cashflows.md example A.
        expected = [-1200.0, 458.0, 406.16, -825.5168, 482.972864, 864.96565461]
        assert_allclose(example_a().net()[0], expected, rtol=1e-9)

    def test_example_a_components(self):
        flows = example_a()
        # Hand calculation, finance-cashflows.md example A.
        assert_allclose(flows.component("capital_equipment")[0], [-1000, 0, 0, -1000, 0, 0])
        assert_allclose(flows.component("midlife")[0], [0, 0, -60, 0, 0, -60])
        assert_allclose(flows.component("incentive")[0], [100, 0, 0, 0, 0, 0])
        assert_allclose(flows.component("residual")[0], [0, 0, 0, 0, 0, 1300 / 3], rtol=1e-14)
        assert_allclose(flows.component("savings_energy")[0],
                        [0, 408, 416.16, 424.4832, 432.972864, 441.63232128], rtol=1e-12)
        assert_allclose(flows.capital_spend_by_year()[0], [1300, 0, 0, 1300, 0, 0])

    def test_example_b_at_failure_with_tax(self):
        flows = example_b()
        # Hand calculation, finance-cashflows.md example B.
        assert_allclose(flows.net()[0], [0.0, 0.0, -600.0, 150.0, 710.0], rtol=1e-12, atol=1e-12)
        assert_allclose(flows.component("tax_depreciation")[0], [0, 0, 0, 75, 75], atol=1e-12)
        assert_allclose(flows.component("residual")[0], [0, 0, 0, 0, 560], atol=1e-12)
        assert flows.start_year.tolist() == [2]

    def test_nominal_basis_inflates_repeat_purchase(self):
        projects = cf.ProjectInputs(project_id=["x"], capex_equipment=100.0, option_life_yr=1.0)
        a = FinanceAssumptions(horizon_yr=2, rate_basis="nominal", inflation_frac=0.1, discount_rate_frac=0.12)
        # Hand calculation, finance-cashflows.md example C.
        assert_allclose(cf.build_cash_flows(projects, a).net()[0], [-100.0, -110.0, 0.0], rtol=1e-14)

    def test_escalating_savings_equal_upv_star(self):
        projects = cf.ProjectInputs(project_id=["x"], savings_energy_per_yr=1000.0)
        a = FinanceAssumptions(horizon_yr=20, escalation_energy_frac=0.02)
        # NIST Handbook 135 UPV* formula [C]: UPV*(3 %, 2 %, 20) = 18.081229 (6 decimals);
        # finance-cashflows.md example D.
        assert_allclose(npv(cf.build_cash_flows(projects, a).net()[0], 0.03), 18081.229, atol=5e-4)

    def test_option_equal_to_must_spend_cancels(self):
        projects = cf.ProjectInputs(project_id=["x"], capex_equipment=500.0, option_life_yr=4.0,
                                    baseline_capex=500.0, baseline_life_yr=4.0, existing_remaining_life_yr=3.0)
        a = FinanceAssumptions(horizon_yr=10, replacement_mode="replace_at_failure", tax_rate_frac=0.3)
        # Hand calculation, finance-cashflows.md example E.
        assert_allclose(cf.build_cash_flows(projects, a).net(), 0.0, atol=1e-9)

    def test_failure_beyond_horizon_gives_zero_flows(self):
        projects = cf.ProjectInputs(project_id=["x"], capex_equipment=500.0, savings_energy_per_yr=50.0)
        a = FinanceAssumptions(horizon_yr=5, replacement_mode="replace_at_failure")
        assert_allclose(cf.build_cash_flows(projects, a).net(), 0.0)

    def test_replace_now_credits_avoided_must_spend(self):
        projects = cf.ProjectInputs(project_id=["x"], capex_equipment=1000.0, option_life_yr=30.0,
                                    baseline_capex=300.0, baseline_life_yr=30.0, existing_remaining_life_yr=2.0)
        flows = cf.build_cash_flows(projects, FinanceAssumptions(horizon_yr=3))
        # Hand: the rewind of year 2 is avoided (+300); its residual (2 + 30 - 3)/30 x 300 = 290 is forgone.
        assert_allclose(flows.component("baseline_credit")[0], [0, 0, 300, 0])
        assert_allclose(flows.component("residual")[0, 3], 1000 * 27 / 30 - 290, rtol=1e-14)

    def test_per_project_timing_overrides_mode(self):
        projects = cf.ProjectInputs(project_id=["now", "later"], capex_equipment=100.0,
                                    existing_remaining_life_yr=2.0, replace_at_failure=[False, True])
        flows = cf.build_cash_flows(projects, FinanceAssumptions(horizon_yr=4))
        assert flows.start_year.tolist() == [0, 2]

    def test_incentive_rule_per_kwh_and_cap(self):
        # Hand: min(1500, 0.05 x 20000 + 0.1 x 10000) = min(1500, 2000) = 1500; without cap 2000.
        assert_allclose(cf.incentive_amount(10_000.0, 20_000.0, 0.05, 0.1, 1500.0), 1500.0)
        assert_allclose(cf.incentive_amount(10_000.0, 20_000.0, 0.05, 0.1, np.inf), 2000.0)
        # Negative savings earn nothing: 0.1 x 10000.
        assert_allclose(cf.incentive_amount(10_000.0, -5.0, 0.05, 0.1, np.inf), 1000.0)


class TestInvariants:
    def test_zero_saving_option(self):
        projects = cf.ProjectInputs(project_id=["x"], capex_equipment=1000.0, option_life_yr=20.0)
        flows = cf.build_cash_flows(projects, FinanceAssumptions(horizon_yr=10))
        # Hand calculation, finance-metrics.md section 8: -1000 + 500/1.08^10 = -768.403256.
        assert_allclose(npv(flows.net()[0], 0.08), -768.403256, atol=5e-7)

    @settings(max_examples=40, deadline=None)
    @given(st.lists(st.floats(0, 1e5), min_size=1, max_size=8), st.floats(-0.05, 0.1), st.floats(0, 0.4),
           st.integers(1, 30))
    def test_doubling_savings_doubles_savings_pv(self, savings, escalation, tax, horizon):
        n = len(savings)
        a = FinanceAssumptions(horizon_yr=horizon, escalation_energy_frac=escalation, tax_rate_frac=tax)
        make = lambda s: cf.build_cash_flows(cf.ProjectInputs(  # noqa: E731
            project_id=[str(i) for i in range(n)], capex_equipment=500.0, savings_energy_per_yr=s,
            savings_demand_per_yr=np.asarray(s) / 10, option_life_yr=7.0), a)
        one, two = make(savings), make(2 * np.asarray(savings))
        names = cf.SAVINGS_COMPONENTS + ("tax_savings",)
        assert_allclose(npv(two.sum_of(names), 0.08), 2 * npv(one.sum_of(names), 0.08), rtol=1e-12, atol=1e-9)
        # Capital-side flows do not move.
        assert_allclose(two.capital_spend_by_year(), one.capital_spend_by_year())

    def test_components_sum_to_net_and_frame_matches(self):
        flows = example_a()
        frame = flows.to_frame()
        assert list(frame.columns) == ["project", "year", "component", "amount"]
        assert len(frame) == 6 * len(cf.COMPONENTS)
        by_year = frame.groupby("year")["amount"].sum().to_numpy()
        assert_allclose(by_year, flows.net()[0], rtol=1e-12)
        small = flows.to_frame(drop_zero=True)
        assert (small["amount"] != 0).all() and set(small["component"].astype(str)) <= set(cf.COMPONENTS)

    def test_savings_and_investment_split_is_complete(self):
        flows = example_b()
        savings, investment = flows.savings_and_investment()
        assert_allclose(savings + investment, flows.net(), atol=1e-12)

    def test_vectorised_equals_one_by_one(self):
        rng = np.random.default_rng(3)
        n = 20
        kwargs = dict(capex_equipment=rng.uniform(100, 1000, n), savings_energy_per_yr=rng.uniform(0, 300, n),
                      option_life_yr=rng.integers(2, 12, n).astype(float), baseline_capex=rng.uniform(0, 200, n),
                      existing_remaining_life_yr=rng.uniform(0, 12, n), midlife_cost=50.0, midlife_year_yr=3.0)
        a = FinanceAssumptions(horizon_yr=10, tax_rate_frac=0.2, replacement_mode="replace_at_failure")
        together = cf.build_cash_flows(cf.ProjectInputs(project_id=[f"p{i}" for i in range(n)], **kwargs), a)
        for i in range(n):
            single = cf.ProjectInputs(project_id=[f"p{i}"], **{k: (v[i] if np.ndim(v) else v) for k, v in kwargs.items()})
            assert_allclose(cf.build_cash_flows(single, a).amounts[0], together.amounts[i], atol=1e-9)

    def test_inputs_not_mutated(self):
        capex = np.array([100.0, 200.0])
        copy = capex.copy()
        cf.build_cash_flows(cf.ProjectInputs(project_id=["a", "b"], capex_equipment=capex), FinanceAssumptions())
        assert np.array_equal(capex, copy)


class TestInvalidInput:
    @pytest.mark.parametrize("kwargs, message", [
        (dict(capex_equipment=-1.0), "capital_equipment must be >= 0"),
        (dict(option_life_yr=0.0), "option_life_yr must be > 0"),
        (dict(savings_energy_per_yr=np.nan), "must not contain NaN"),
        (dict(option_life_yr=np.inf), "option_life_yr must be finite"),
    ])
    def test_raises(self, kwargs, message):
        with pytest.raises(ValueError, match=message):
            cf.build_cash_flows(cf.ProjectInputs(project_id=["x"], **kwargs), FinanceAssumptions())

    def test_duplicate_ids_raise(self):
        with pytest.raises(ValueError, match="unique"):
            cf.build_cash_flows(cf.ProjectInputs(project_id=["x", "x"]), FinanceAssumptions())

    def test_unknown_component_raises(self):
        with pytest.raises(ValueError, match="unknown component"):
            example_a().component("coffee")

    def test_empty_fleet(self):
        flows = cf.build_cash_flows(cf.ProjectInputs(project_id=[]), FinanceAssumptions(horizon_yr=3))
        assert flows.amounts.shape == (0, 4, len(cf.COMPONENTS))
        assert isinstance(flows.to_frame(), pd.DataFrame) and flows.to_frame().empty


def test_savings_over_a_base_case_that_buys_a_new_motor_at_failure():
    # Hand calculation, finance-cashflows.md example G (8 %, 10 years, replace now): an IE4 motor for 1,100
    # saving 489.36 a year, where today's
    # motor would fail in year 7 and be replaced by the same IE4 motor (the must-spend, life 20). From year 8 the
    # base case runs that motor, so the increment saves nothing more:
    # NPV = -1,100 + 489.36 x (1 - 1.08^-7) / 0.08 + 1,100 / 1.08^7 - (0.85 - 0.5) x 1,100 / 1.08^10
    #     = -1,100 + 489.36 x 5.206370 + 1,100 / 1.713824 - 385 / 2.158925
    #     = -1,100 + 2,547.789 + 641.839 - 178.330 = 1,911.30 (residuals: the option's 10 of 20 years left, the
    #       must-spend's 17 of 20)
    a = FinanceAssumptions(discount_rate_frac=0.08, horizon_yr=10)
    p = cf.ProjectInputs(project_id=["M1/ie4"], capex_equipment=1100.0, savings_energy_per_yr=489.36,
                      option_life_yr=20.0, baseline_capex=1100.0, baseline_life_yr=20.0,
                      existing_remaining_life_yr=7.0, baseline_savings_per_yr=[[489.36, 0.0, 0.0, 0.0, 0.0]])
    flows = cf.build_cash_flows(p, a)
    assert_allclose(flows.component("savings_energy")[0, 8:], 0.0, atol=1e-12)
    assert_allclose(npv(flows.net()[0], 0.08), 1911.30, atol=0.01)
