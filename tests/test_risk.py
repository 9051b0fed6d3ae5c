"""Validation record for models.risk: tornado, break-even, seeded draws, Monte Carlo re-pricing.

Hand calculations are in docs/derivations/finance-risk.md.
"""

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose

from models import risk
from models.finance import simple_payback
from models.cashflows import COMPONENTS, ProjectInputs, build_cash_flows
from models.finance import FinanceAssumptions


def single_project(n_years=2, capital=150.0, energy=100.0, tax=0.0):
    """Flows (1, n_years + 1, n_components): capital at year 0, energy savings in every later year."""
    amounts = np.zeros((1, n_years + 1, len(COMPONENTS)))
    amounts[0, 0, COMPONENTS.index("capital_equipment")] = -capital
    amounts[0, 1:, COMPONENTS.index("savings_energy")] = energy
    if tax:
        amounts[0, 1:, COMPONENTS.index("tax_savings")] = -tax * energy
    return amounts


def fixed(n=1, **values):
    """Factors with every multiplier at 1 and every delta at 0, except those given."""
    base = {name: np.full(n, 1.0 if name.endswith("_mult") else 0.0) for name in risk.DEFAULT_FACTORS}
    base.update({k: np.full(n, v) for k, v in values.items()})
    return base


RESPONSE = risk.default_response(FinanceAssumptions())


class TestTornado:
    def test_hand_example(self):
        rows = risk.tornado(lambda v: v["price"] * 100.0 - v["capex"], {"price": 1.0, "capex": 50.0},
                            {"price": (0.8, 1.2), "capex": (40.0, 70.0)})
        # Hand calculation, finance-risk.md section 1.
        assert rows["variable"].tolist() == ["price", "capex"]
        assert_allclose(rows[["npv_at_low", "npv_at_high", "swing"]].to_numpy(), [[30, 70, 40], [60, 30, 30]])
        assert_allclose(rows["base_npv"], 50.0)

    def test_reduce_picks_one_project(self):
        f = lambda v: np.array([v["x"], 10.0 * v["x"]])  # noqa: E731
        rows = risk.tornado(f, {"x": 1.0}, {"x": (0.0, 2.0)}, reduce=lambda a: a[1])
        assert_allclose(rows["swing"], 20.0)

    def test_unknown_variable_raises(self):
        with pytest.raises(ValueError, match="missing from base"):
            risk.tornado(lambda v: 0.0, {"a": 1.0}, {"b": (0.0, 1.0)})

    def test_break_even(self):
        # Hand calculation, finance-risk.md section 1: 0.5 h - 1000 = 0 at 2000 h.
        value = risk.break_even(lambda v: v["hours"] * 0.5 - 1000.0, {"hours": 4000.0}, "hours", 0.0, 8760.0)
        assert_allclose(value, 2000.0, rtol=1e-10)

    def test_break_even_outside_range_is_none(self):
        assert risk.break_even(lambda v: v["hours"] + 1.0, {"hours": 1.0}, "hours", 0.0, 10.0) is None


class TestDraws:
    def test_reproducible_by_seed(self):
        a = risk.draw_factors(500, seed=42)
        b = risk.draw_factors(500, seed=42)
        c = risk.draw_factors(500, seed=43)
        for name in risk.DEFAULT_FACTORS:
            assert np.array_equal(a[name], b[name])
            assert not np.array_equal(a[name], c[name])

    def test_sample_means_near_distribution_means(self):
        draws = risk.draw_factors(40_000, seed=1)
        for name, dist in risk.DEFAULT_FACTORS.items():
            spread = draws[name].std()
            # Mean of 40,000 draws: 5 standard errors (spread / 200) is a loose but real bound.
            assert abs(draws[name].mean() - dist.mean) <= 5 * spread / 200 + 1e-12, name

    def test_triangular_bounds_respected(self):
        draws = risk.draw_factors(10_000, seed=3)["capital_mult"]
        assert draws.min() >= 0.9 and draws.max() <= 1.3

    @pytest.mark.parametrize("kwargs", [dict(kind="normal", a=0.0, b=-1.0), dict(kind="lognormal", a=0.0, b=0.1),
                                        dict(kind="triangular", a=1.0, b=0.5, c=2.0), dict(kind="beta", a=1.0)])
    def test_invalid_distribution_raises(self, kwargs):
        with pytest.raises(ValueError):
            risk.Distribution(**kwargs)

    def test_invalid_draw_count_raises(self):
        with pytest.raises(ValueError, match="n_draws"):
            risk.draw_factors(0, seed=1)

    def test_the_loss_band_is_drawn_either_side_of_the_declared_losses(self):
        # Our assumption (docs/finance.md): a new machine's losses fall either side of the declared value, by
        # at most the IEC 60034-1 band: triangular -1 / 0 / +1 of the band, mean 0 (the run's NPV at P50).
        band = risk.DEFAULT_FACTORS[risk.LOSS_BAND_FACTOR]
        assert (band.kind, band.a, band.b, band.c) == ("triangular", -1.0, 0.0, 1.0)
        draws = risk.draw_factors(20000, seed=3)[risk.LOSS_BAND_FACTOR]
        assert draws.min() >= -1.0 and draws.max() <= 1.0
        # the mean of 20,000 draws of a triangular(-1, 0, 1) (sd 1/sqrt(6) = 0.408): within 4 standard errors
        assert abs(draws.mean()) < 4 * 0.408 / np.sqrt(20000)

    def test_the_loss_band_flow_responds_as_the_energy_savings_times_the_band(self):
        a = FinanceAssumptions(escalation_energy_frac=0.03)
        response = risk.default_response(a)
        energy, band = response["savings_energy"], response[risk.LOSS_BAND_COMPONENT]
        assert band.multipliers == (risk.LOSS_BAND_FACTOR,) + energy.multipliers
        assert (band.escalation_delta, band.base_escalation_frac, band.taxable) == (
            energy.escalation_delta, 0.03, True)


class TestMonteCarlo:
    def test_one_draw_by_hand(self):
        factors = fixed(energy_price_mult=1.2, capital_mult=1.1, discount_rate_delta_frac=0.02)
        result = risk.monte_carlo(single_project(), COMPONENTS, factors, RESPONSE, 0.08)
        # Hand calculation, finance-risk.md section 2: 43.264463.
        assert_allclose(result.npv[0, 0], 43.264463, atol=5e-7)
        # Hand: payback 1 + (165 - 120)/120 = 1.375 yr.
        assert_allclose(result.payback_yr[0, 0], 1.375, rtol=1e-12)

    def test_re_escalation(self):
        amounts = single_project(capital=0.0)
        factors = fixed(escalation_delta_frac=0.1, discount_rate_delta_frac=0.02)
        result = risk.monte_carlo(amounts, COMPONENTS, factors, RESPONSE, 0.08)
        # Hand calculation, finance-risk.md section 3: 110/1.1 + 121/1.21 = 200.
        assert_allclose(result.npv[0, 0], 200.0, rtol=1e-12)

    def test_tax_recomputed(self):
        amounts = single_project(n_years=1, capital=0.0, tax=0.25)
        result = risk.monte_carlo(amounts, COMPONENTS, fixed(energy_price_mult=2.0), RESPONSE, 0.0,
                                  tax_rate_frac=0.25)
        # Hand calculation, finance-risk.md section 4: 2 x 100 x 0.75 = 150.
        assert_allclose(result.npv[0, 0], 150.0, rtol=1e-12)

    def test_base_factors_reproduce_cash_flow_npv(self):
        a = FinanceAssumptions(horizon_yr=12, tax_rate_frac=0.3, escalation_energy_frac=0.02,
                               replacement_mode="replace_at_failure")
        flows = build_cash_flows(ProjectInputs(
            project_id=["p", "q"], capex_equipment=[1000.0, 4000.0], savings_energy_per_yr=[300.0, 500.0],
            savings_demand_per_yr=40.0, option_life_yr=[5.0, 15.0], baseline_capex=200.0,
            existing_remaining_life_yr=[0.0, 3.0], midlife_cost=50.0, midlife_year_yr=3.0), a)
        result = risk.monte_carlo(flows.amounts, flows.component_names, fixed(3), risk.default_response(a),
                                  a.discount_rate_frac, tax_rate_frac=a.tax_rate_frac)
        # Invariant: factors at their base values re-price nothing (identity recombination).
        t = np.arange(13)
        expected = (flows.net() / 1.08 ** t).sum(axis=1)
        assert_allclose(result.npv, np.tile(expected, (3, 1)), rtol=1e-12)
        # and the payback is the cash flows' own, the residual value at the horizon's end left out (as
        # models.scenario.economics computes it; expected from models.finance on the flows themselves)
        assert np.any(flows.component("residual"))
        paid = simple_payback(flows.net() - flows.component("residual")).payback_yr
        assert_allclose(result.payback_yr, np.tile(paid, (3, 1)), rtol=1e-12)

    def test_payback_leaves_the_residual_value_out(self):
        # hand calculation: 5,500 spent, 649.66 saved a year, a 20-year life studied over 5 years; the
        # residual 15/20 x 5,500 = 4,125 at year 5 would make the cumulative flow -5,500 + 5 x 649.66 + 4,125 =
        # +1,873.3, a "payback" of 4.61 years; without it the cumulative flow ends at -2,251.7: no payback
        a = FinanceAssumptions(horizon_yr=5, discount_rate_frac=0.08)
        flows = build_cash_flows(ProjectInputs(project_id=["m3"], capex_equipment=5500.0,
                                               savings_energy_per_yr=649.66, option_life_yr=20.0), a)
        assert_allclose(flows.component("residual")[0, 5], 4125.0, rtol=1e-12)
        result = risk.monte_carlo(flows.amounts, flows.component_names, fixed(2), risk.default_response(a),
                                  a.discount_rate_frac)
        assert np.isinf(result.payback_yr).all()

    def test_chunking_does_not_change_results(self):
        amounts = np.repeat(single_project(n_years=10), 7, axis=0) * np.arange(1, 8)[:, None, None]
        factors = risk.draw_factors(300, seed=5)
        big = risk.monte_carlo(amounts, COMPONENTS, factors, RESPONSE, 0.08)
        small = risk.monte_carlo(amounts, COMPONENTS, factors, RESPONSE, 0.08, max_chunk_elements=100)
        assert_allclose(big.npv, small.npv, rtol=1e-13)
        assert np.array_equal(big.payback_yr, small.payback_yr)

    def test_reproducible_by_seed(self):
        amounts = single_project(n_years=5)
        one = risk.monte_carlo(amounts, COMPONENTS, risk.draw_factors(200, seed=9), RESPONSE, 0.08)
        two = risk.monte_carlo(amounts, COMPONENTS, risk.draw_factors(200, seed=9), RESPONSE, 0.08)
        assert np.array_equal(one.npv, two.npv)

    def test_converges_to_analytic_mean(self):
        # Hand calculation, finance-risk.md section 6: E[NPV] = 313.537486, sd 198.144.
        amounts = np.zeros((1, 6, len(COMPONENTS)))
        amounts[0, 0, COMPONENTS.index("capital_equipment")] = -1000.0
        amounts[0, 1:, COMPONENTS.index("savings_energy")] = 300.0
        only_price = {"energy_price_mult": risk.DEFAULT_FACTORS["energy_price_mult"]}
        response = {"savings_energy": risk.ComponentResponse(("energy_price_mult",))}
        errors = {}
        for n in (400, 6400):
            result = risk.monte_carlo(amounts, COMPONENTS, risk.draw_factors(n, 11, only_price), response, 0.05,
                                      rate_delta=None)
            summary = result.summary()
            # Sample mean within 4 standard errors of the exact mean (fails by chance ~6e-5 of the time).
            assert abs(summary["npv_mean"].iloc[0] - 313.537486) <= 4 * 198.144 / np.sqrt(n)
            errors[n] = summary["npv_standard_error"].iloc[0]
        # Standard error shrinks as 1/sqrt(n): 16x the draws -> 1/4; 15 % covers the spread of the sd estimate.
        assert_allclose(errors[400] / errors[6400], 4.0, rtol=0.15)

    def test_spread_across_seeds_shrinks(self):
        amounts = single_project(n_years=5)
        only_price = {"energy_price_mult": risk.DEFAULT_FACTORS["energy_price_mult"]}
        response = {"savings_energy": risk.ComponentResponse(("energy_price_mult",))}
        spread = {}
        for n in (50, 800):
            means = [risk.monte_carlo(amounts, COMPONENTS, risk.draw_factors(n, seed, only_price), response, 0.05,
                                      rate_delta=None).npv.mean() for seed in range(40)]
            spread[n] = np.std(means, ddof=1)
        # Expected ratio sqrt(800/50) = 4; with 40 seeds the sd of each spread estimate is ~11 %: allow 35 %.
        assert_allclose(spread[50] / spread[800], 4.0, rtol=0.35)

    def test_per_project_multiplier(self):
        amounts = np.repeat(single_project(capital=0.0, n_years=1), 2, axis=0)
        factors = fixed(2)
        factors["efficiency_savings_mult"] = np.array([[0.5, 1.0], [1.0, 0.0]])
        response = {"savings_energy": risk.ComponentResponse(("efficiency_savings_mult",))}
        result = risk.monte_carlo(amounts, COMPONENTS, factors, response, 0.0)
        # Hand: savings 100 x multiplier per draw and project.
        assert_allclose(result.npv, [[50.0, 100.0], [100.0, 0.0]])

    def test_missing_factor_raises(self):
        response = {"savings_energy": risk.ComponentResponse(("wind_mult",))}
        with pytest.raises(ValueError, match="wind_mult"):
            risk.monte_carlo(single_project(), COMPONENTS, fixed(), response, 0.08)

    def test_shape_mismatch_raises(self):
        with pytest.raises(ValueError, match="shape"):
            risk.monte_carlo(np.zeros((1, 3, 2)), COMPONENTS, fixed(), RESPONSE, 0.08)


class TestSummary:
    def test_percentiles_by_hand(self):
        result = risk.MonteCarloResult(project_id=np.array(["p"]), npv=np.arange(1.0, 101.0)[:, None],
                                       payback_yr=np.ones((100, 1)), discount_rate_frac=np.zeros(100))
        row = result.summary().iloc[0]
        # Hand calculation, finance-risk.md section 5: 10.9, 50.5, 90.1.
        assert_allclose([row.npv_p10, row.npv_p50, row.npv_p90], [10.9, 50.5, 90.1], rtol=1e-12)

    def test_payback_percentiles_keep_inf(self):
        result = risk.MonteCarloResult(project_id=np.array(["p"]), npv=np.array([[-1.0], [2.0], [3.0], [-4.0]]),
                                       payback_yr=np.array([[1.0], [2.0], [np.inf], [np.inf]]),
                                       discount_rate_frac=np.zeros(4))
        row = result.summary(target_payback_yr=1.5).iloc[0]
        # Hand calculation, finance-risk.md section 5: P50 = 2, P90 = inf, P(NPV > 0) = 0.5.
        assert row.payback_p50_yr == 2.0 and row.payback_p90_yr == np.inf
        assert_allclose(row.prob_npv_positive_frac, 0.5)
        assert_allclose(row.prob_payback_within_target_frac, 0.25)
        assert not np.isnan(result.summary().to_numpy(dtype=float)).any()


def test_tornado_labels_read_as_the_pages_show_them():
    from models.risk import tornado_label

    # hand: a +/-0.02 discount-rate shift is 2 percentage points; multipliers are shown as factors
    assert tornado_label("discount_rate_delta_frac", -0.02, 0.02) == "Discount rate (-2 to +2 points)"
    assert tornado_label("energy_price_mult", 0.8, 1.2) == "Electricity price (x0.8 to x1.2)"
    assert tornado_label("something_new", 1, 2) == "something_new (1 to 2)"


class TestPortfolio:
    """A plan's NPV from its projects' drawn NPVs; hand calculations in docs/derivations/finance-plan-risk.md."""

    def test_a_project_a_year_later_is_discounted_one_year(self):
        # 100 + 110 / 1.10 = 200 (hand calculation)
        assert_allclose(risk.portfolio_npv(np.array([[100.0, 110.0]]), np.array([0.10]), [0, 1]), [200.0], rtol=1e-12)

    def test_each_draw_at_its_own_rate_with_offsets(self):
        # draw 0 at 0 %: (10 + 1) + (20 - 5) = 26; draw 1 at 25 %: (30 + 1) + (40 - 5) / 1.25^2 = 31 + 22.4 = 53.4
        # (hand calculation)
        out = risk.portfolio_npv(np.array([[10.0, 20.0], [30.0, 40.0]]), np.array([0.0, 0.25]), [0, 2], [1.0, -5.0])
        assert_allclose(out, [26.0, 53.4], rtol=1e-12)

    @pytest.mark.parametrize("npv, rate, start", [
        (np.ones(3), [0.1], [0, 0, 0]),            # not (draws, projects)
        (np.ones((2, 3)), [0.1], [0, 0, 0]),       # one rate for two draws
        (np.ones((1, 3)), [0.1], [0, 0]),          # two start years for three projects
        (np.ones((1, 2)), [0.1], [0, -1]),         # a start before the plan's
        (np.ones((1, 2)), [-1.0], [0, 1]),         # a rate of -100 %
    ])
    def test_bad_shapes_and_values_are_refused(self, npv, rate, start):
        with pytest.raises(ValueError):
            risk.portfolio_npv(npv, np.asarray(rate), start)

    def test_distribution_summary_by_hand(self):
        # five draws -10, 0, 10, 20, 30: P10 at position 0.4 -> -6, P50 10, P90 at 3.6 -> 26 (linear between
        # draws); mean 10; s = sqrt(1000 / 4) = 15.8114, s / sqrt(5) = 7.0711; 3 of 5 above 0 (hand calculation)
        s = risk.distribution_summary([-10.0, 0.0, 10.0, 20.0, 30.0])
        assert_allclose([s["npv_p10"], s["npv_p50"], s["npv_p90"], s["npv_mean"], s["npv_standard_error"]],
                        [-6.0, 10.0, 26.0, 10.0, 7.0711], rtol=1e-4)
        assert s["prob_npv_positive_frac"] == 0.6

    def test_an_empty_set_of_draws_is_refused(self):
        with pytest.raises(ValueError, match="no draws"):
            risk.distribution_summary([])


class TestNewMachinesLossBand:
    """The new machines' losses within the IEC 60034-1 tolerance on their declared efficiency, drawn in the
    Monte Carlo (hand calculations in docs/derivations/finance-risk.md, section 7)."""

    def test_the_yearly_cost_at_the_top_of_the_band(self):
        from types import SimpleNamespace

        from models import scenario

        techs = np.array(["existing", "induction", "wound_field", "add_drive"], dtype=object)
        saving = np.zeros((3, 4, 4))
        saving[:, :, 0] = [[0, 1000, -200, 3000], [0, 2400, 500, 0], [0, -50, 0, 0]]
        energy_saved = np.array([[0, 5000, -1000, 15000], [0, 10000, 0, 0], [0, -100, 0, 0]], dtype=float)
        losses = np.zeros((3, 4, 3))  # (asset, option, motor / drive / excitation)
        losses[0, 1] = [8000, 0, 0]
        losses[0, 2] = [6000, 0, 1000]
        losses[0, 3] = [9000, 2000, 0]
        losses[1, 1] = [12000, 0, 0]
        losses[1, 2] = [10000, 0, 3000]
        losses[2, 1] = [3000, 0, 0]
        losses[:, 0] = [[20000, 0, 0], [30000, 0, 0], [4000, 0, 0]]
        shaft = np.array([[180000, 72000, 133000, 100000], [270000, 228000, 247000, 0], [36000, 27000, 0, 0]],
                         dtype=float)
        applies = np.ones((3, 4), dtype=bool)
        applies[2, 2] = False
        op = SimpleNamespace(losses_kwh=losses, technologies=techs, applies=applies, shaft_energy_kwh=shaft,
                             site_ids=np.array(["S1", "S1", "S2"], dtype=object))
        cost = scenario._loss_band_cost_per_yr(op, SimpleNamespace(saving=saving), np.array([100.0, 200.0, 50.0]),
                                               energy_saved)
        # Hand calculation (docs/derivations/finance-risk.md, section 7): price 6,400 / 30,000 EUR/kWh, band x / eta'
        assert_allclose(cost, [[0, 289.2655, 237.6658, 0], [0, 270.8995, 293.4744, 0], [0, 108.4746, 0, 0]],
                        rtol=5e-7, atol=1e-12)  # the hand values are rounded to 4 decimals

    @pytest.mark.parametrize("tax_rate_frac, expected_difference", [(0.0, 371.149512), (0.25, 278.362134)])
    def test_a_projects_draws_move_by_the_bands_present_value(self, monkeypatch, tax_rate_frac, expected_difference):
        from models import scenario
        from models.cashflows import build_cash_flows as build

        a = FinanceAssumptions(horizon_yr=3, discount_rate_frac=0.10, tax_rate_frac=tax_rate_frac, monte_carlo_draws=3)
        project = ProjectInputs(project_id=["M1/ie4"], capex_equipment=500.0, savings_energy_per_yr=1000.0,
                                option_life_yr=20.0, existing_remaining_life_yr=1.0)
        band = ProjectInputs(project_id=["M1/ie4"], savings_energy_per_yr=-100.0, option_life_yr=20.0,
                             existing_remaining_life_yr=1.0, baseline_savings_per_yr=[[-40.0, 0, 0, 0, 0]])

        def draws(n_draws, seed, distributions=risk.DEFAULT_FACTORS):
            out = {name: np.full(n_draws, 0.0 if name.endswith("_delta_frac") else 1.0) for name in distributions}
            out[risk.LOSS_BAND_FACTOR] = np.array([1.0, -1.0, 0.0])
            return out

        monkeypatch.setattr(risk, "draw_factors", draws)
        flows = build(project, a)
        tornado, _, _, (_, mc) = scenario._risk_of_rows(flows, a, np.array([0]), 0.10, loss_band=band)
        # Hand calculation (section 7): the draws at -1 and +1 of the band differ by twice its present value
        assert_allclose(mc.npv[1, 0] - mc.npv[0, 0], expected_difference, rtol=1e-8)
        # the draw at the declared losses is the project's own NPV (the band's flow is not in its cash flows)
        without = scenario._risk_of_rows(flows, a, np.array([0]), 0.10)[3][1]
        assert_allclose(mc.npv[2, 0], without.npv[2, 0], rtol=1e-12)
        row = tornado.set_index("variable").loc[risk.LOSS_BAND_FACTOR]
        assert_allclose(row["npv_at_low"] - row["npv_at_high"], expected_difference, rtol=1e-8)

    def test_a_case_without_a_new_machine_shows_no_tolerance_bar(self):
        # A capacitor bank alone (no new machine: its band is nil) or no band given: the tolerance moves
        # nothing, so the tornado has no bar for it; the other inputs keep theirs.
        from models import scenario
        from models.cashflows import build_cash_flows as build

        a = FinanceAssumptions(horizon_yr=3, discount_rate_frac=0.10, monte_carlo_draws=3)
        project = ProjectInputs(project_id=["M1/cap"], capex_equipment=500.0, savings_energy_per_yr=1000.0,
                                option_life_yr=20.0, existing_remaining_life_yr=1.0)
        nil = ProjectInputs(project_id=["M1/cap"], option_life_yr=20.0, existing_remaining_life_yr=1.0)
        flows = build(project, a)
        for band in (None, nil):
            tornado = scenario._risk_of_rows(flows, a, np.array([0]), 0.10, loss_band=band)[0]
            assert risk.LOSS_BAND_FACTOR not in set(tornado["variable"])
            assert set(tornado["variable"]) == set(scenario.TORNADO_RANGES) - {risk.LOSS_BAND_FACTOR}

    def test_a_failed_motor_whose_least_repair_is_a_new_machine(self, tmp_path):
        # A failed motor is counted against the least that puts it back in service (here a new IE3 motor: the
        # rewind is priced out). The IE4 option's band flow is then its own machine's band less the IE3 motor's,
        # every year from year 1 (the base case runs the IE3 motor from the failure, at once); the IE3 option's
        # own row nets to nothing. Each band priced alone is :func:`_loss_band_cost_per_yr`'s (hand-checked above).
        import casebuilder as cb
        from models import cashflows as cf
        from models import scenario
        from models.case import load_case
        from models.options import NEW_MACHINE_TECHNOLOGIES

        assets = [["M1", "S1", "Conveyor", "other", "15", "4", "50", "400", "IE1", "88.7", "0.82", "1460", "2005", "0",
                   "fixed", "", "6000", "100", "medium", "1"]]
        folder = cb.write_case(tmp_path / "c", assets=assets, sites=[["S1", "Works", "0", "0.9"]], capacitors=[],
                               duty=[], profiles=[], asset_header=cb.ASSET_HEADER + ["failed"])
        (folder / "profiles.csv").unlink()
        cb.with_flat_tariff(folder)
        from pathlib import Path

        shipped = (Path(__file__).resolve().parents[1] / "data" / "defaults" / "options.csv").read_text(encoding="utf-8")
        priced_out = shipped.replace("rewind,rewind,Rewind,,none,,0.75,100000,95,", "rewind,rewind,Rewind,,none,,0.75,100000,950,")
        assert priced_out != shipped
        (folder / "options.csv").write_text(priced_out, encoding="utf-8")
        (folder / "finance.toml").write_text('discount_rate_frac = 0.0\nhorizon_yr = 5\nrate_basis = "real"\n'
                                             'monte_carlo_draws = 20\n', encoding="utf-8")
        case, problems = load_case(folder)
        assert case is not None, [str(p) for p in problems if p.severity == "error"]
        result = scenario.run(case, case.finance, with_risk=False)
        res = result.results.set_index("option_id")
        assert res.loc["ie4", "must_spend_option_id"] == "ie3"  # the least repair is the new IE3 motor
        op = result.physics.operation
        energy_saved = op.energy_kwh[:, [0]] - op.energy_kwh
        band = scenario._loss_band_cost_per_yr(op, result.physics.savings, case.assets["rated_p_kw"].to_numpy(float),
                                               energy_saved)[0]
        ids = list(op.option_ids)
        assert band[ids.index("ie4")] > 0 and band[ids.index("ie3")] > 0
        assert set(op.technologies[np.flatnonzero(band > 0)]) <= set(NEW_MACHINE_TECHNOLOGIES)
        flows = cf.build_cash_flows(result.loss_band, result.assumptions).component("savings_energy")
        row = {p.split("/")[1]: k for k, p in enumerate(result.loss_band.project_id)}
        expected = -(band[ids.index("ie4")] - band[ids.index("ie3")])
        assert_allclose(flows[row["ie4"], 1:], expected, rtol=1e-12)
        assert_allclose(flows[row["ie3"]], 0.0, atol=1e-12)

    def test_a_fleet_that_saves_no_energy_prices_the_band_from_its_bills(self):
        # No option saves both money and kWh: the band is priced at the mean price of today's energy lines.
        # Hand calculation: (1,000 + 500) EUR / (10,000 + 2,500) kWh = 0.12 EUR/kWh; an IE3 motor of 11 kW at
        # eta = 0.9 (shaft 9,000 kWh, losses 1,000 kWh): band 0.15 / 0.885 = 0.1694915, x 1,000 x 0.12 = 20.33898.
        from types import SimpleNamespace

        from models import scenario

        bills = pd.DataFrame({"line_item": ["energy:peak", "energy:off-peak", "fixed:standing", "tax:VAT"],
                              "unit": ["kWh", "kWh", "month", "EUR"], "quantity": [10000.0, 2500.0, 1.0, 1.0],
                              "amount": [1000.0, 500.0, 40.0, 300.0]})
        losses = np.zeros((1, 2, 3))
        losses[0, 1, 0] = 1000.0
        op = SimpleNamespace(losses_kwh=losses, technologies=np.array(["existing", "induction"], dtype=object),
                             applies=np.ones((1, 2), dtype=bool), shaft_energy_kwh=np.array([[9500.0, 9000.0]]),
                             site_ids=np.array(["S1"], dtype=object))
        sav = SimpleNamespace(saving=np.zeros((1, 2, 4)), baseline_bills=bills)
        cost = scenario._loss_band_cost_per_yr(op, sav, np.array([11.0]), np.zeros((1, 2)))
        assert_allclose(cost, [[0.0, 20.33898]], rtol=1e-6)


def test_break_even_multipliers_against_numpy_financial():
    # a project: capital 10,000 in year 0, energy savings 1,800 a year and demand savings 400 a year for 8 years,
    # residual 1,000 at the end; at 7 %. numpy_financial's npv as reference for each part:
    # NPV(price x m) = -10000 + 1000/1.07^8 + m (2200 a(8)), zero at m = (10000 - 1000/1.07^8) / (2200 a(8));
    # NPV(hours x m) moves the energy savings only (demand at the peak stays): m = (10000 - 1000/1.07^8 - 400 a(8))
    # / (1800 a(8)); NPV(capital x m) moves the capital and the residual: m = 2200 a(8) / (10000 - 1000/1.07^8).
    import numpy_financial as npf

    from models.risk import ComponentResponse, break_even_multipliers

    names = ("capital", "residual", "savings_energy", "savings_demand")
    amounts = np.zeros((1, 9, 4))
    amounts[0, 0, 0] = -10_000.0
    amounts[0, 8, 1] = 1_000.0
    amounts[0, 1:, 2] = 1_800.0
    amounts[0, 1:, 3] = 400.0
    response = {"capital": ComponentResponse(("capital_mult",)), "residual": ComponentResponse(("capital_mult",)),
                "savings_energy": ComponentResponse(("energy_price_mult", "hours_mult", "load_mult")),
                "savings_demand": ComponentResponse(("energy_price_mult", "load_mult"))}
    got = break_even_multipliers(amounts, names, response, 0.07)
    annuity = npf.npv(0.07, [0.0] + [1.0] * 8)
    residual = npf.npv(0.07, [0.0] * 8 + [1_000.0])
    assert got["energy_price_mult"][0] == pytest.approx((10_000.0 - residual) / (2_200.0 * annuity), rel=1e-12)
    assert got["load_mult"][0] == pytest.approx((10_000.0 - residual) / (2_200.0 * annuity), rel=1e-12)
    assert got["hours_mult"][0] == pytest.approx((10_000.0 - residual - 400.0 * annuity) / (1_800.0 * annuity), rel=1e-12)
    assert got["capital_mult"][0] == pytest.approx(2_200.0 * annuity / (10_000.0 - residual), rel=1e-12)


def test_a_factor_that_cannot_bring_the_npv_to_zero_has_no_break_even():
    # savings that never repay the capital whatever their hours... at m >= 0 the NPV only rises with the hours:
    # a project already positive at zero hours (its demand saving alone repays it) has no break-even in hours
    from models.risk import ComponentResponse, break_even_multipliers

    names = ("capital", "savings_energy", "savings_demand")
    amounts = np.zeros((2, 6, 3))
    amounts[:, 0, 0] = -1_000.0
    amounts[:, 1:, 1] = 100.0
    amounts[0, 1:, 2] = 500.0  # demand alone repays it
    response = {"capital": ComponentResponse(("capital_mult",)),
                "savings_energy": ComponentResponse(("energy_price_mult", "hours_mult")),
                "savings_demand": ComponentResponse(("energy_price_mult",))}
    got = break_even_multipliers(amounts, names, response, 0.05)
    assert np.isnan(got["hours_mult"][0]) and np.isfinite(got["hours_mult"][1])
    assert np.isnan(got["load_mult"]).all()  # nothing responds to the load
