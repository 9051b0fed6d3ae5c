"""Validation record for models.finance: discount factors, NPV, IRR, MIRR, payback, SIR/AIRR, assumptions.

Sources: NIST Handbook 135 (Life-Cycle Costing Manual for the Federal Energy Management Program)
formulas and factor values computed from them; the ASHRAE Pocket Guide ESPWF table; numpy-financial doc
examples, numpy-financial 1.0.0 as an independent implementation, and hand calculations in
docs/derivations/finance-metrics.md.
"""

import math

import numpy as np
import numpy_financial as npf
import pandas as pd
import pytest
from hypothesis import example, given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose

from models import finance as fin
from models.finance import FinanceAssumptions

# Factor tables give 6 decimals: half a unit of the last digit.
SIX_DECIMALS = 5e-7


class TestDiscountFactors:
    # Computed [C] from the NIST Handbook 135 formula SPV = 1/(1+d)^t, 6 decimals.
    @pytest.mark.parametrize("d, t, expected", [(0.03, 10, 0.744094), (0.03, 20, 0.553676)])
    def test_spv_published(self, d, t, expected):
        assert_allclose(fin.spv_factor(d, t), expected, atol=SIX_DECIMALS)

    # Computed [C] from the NIST Handbook 135 UPV formula; ASHRAE Pocket Guide ESPWF table [V] gives the same
    # to 2 decimals.
    @pytest.mark.parametrize("d, n, expected", [
        (0.03, 10, 8.530203), (0.03, 15, 11.937935), (0.03, 20, 14.877475),
        (0.07, 10, 7.023582), (0.10, 15, 7.606080)])
    def test_upv_published(self, d, n, expected):
        assert_allclose(fin.upv_factor(d, n), expected, atol=SIX_DECIMALS)

    # ASHRAE Pocket Guide 2013 ESPWF table [V], 2 decimals.
    @pytest.mark.parametrize("d, n, expected", [(0.03, 10, 8.53), (0.07, 10, 7.02), (0.03, 15, 11.94),
                                                (0.10, 15, 7.61)])
    def test_upv_ashrae_table(self, d, n, expected):
        assert_allclose(fin.upv_factor(d, n), expected, atol=0.005)

    # Computed [C] from the NIST Handbook 135 UPV* formula (equal to the explicit sums of ((1+e)/(1+d))^t).
    @pytest.mark.parametrize("d, e, n, expected, tol", [
        (0.03, 0.02, 20, 18.081229, SIX_DECIMALS),
        (0.03, -0.01, 20, 13.541833, SIX_DECIMALS),
        (0.03, 0.02, 15, 13.8861, 5e-5)])  # table value has 4 decimals
    def test_upv_star_published(self, d, e, n, expected, tol):
        assert_allclose(fin.upv_star_factor(d, e, n), expected, atol=tol)

    def test_upv_zero_rate_is_years(self):
        # Definition: sum of n factors equal to 1.
        assert_allclose(fin.upv_factor(0.0, 12), 12.0, rtol=1e-15)

    def test_upv_star_equal_rates_is_years(self):
        # Definition: ((1+e)/(1+d))^t = 1 for every t when e = d.
        assert_allclose(fin.upv_star_factor(0.05, 0.05, 7), 7.0, rtol=1e-15)

    def test_upv_equals_numpy_financial_pv(self):
        # numpy-financial [C]: npf.pv(0.03, 20, -1000) = 14877.47 = 1000 x UPV
        # (npf: payments in negative, PV out positive).
        assert_allclose(1000 * fin.upv_factor(0.03, 20), npf.pv(0.03, 20, -1000), rtol=1e-12)
        assert_allclose(1000 * fin.upv_factor(0.03, 20), 14877.47, atol=0.005)

    def test_factors_broadcast(self):
        out = fin.upv_factor(np.array([0.03, 0.07]), 10)
        # NIST Handbook 135 UPV formula values [C], 6 decimals.
        assert_allclose(out, [8.530203, 7.023582], atol=SIX_DECIMALS)

    def test_discount_factors_shape(self):
        out = fin.discount_factors(np.array([0.0, 0.1]), 2)
        # Hand: 1, 1/1.1, 1/1.21.
        assert_allclose(out, [[1, 1, 1], [1, 1 / 1.1, 1 / 1.21]], rtol=1e-15)

    def test_rate_at_minus_one_raises(self):
        with pytest.raises(ValueError, match="greater than -1"):
            fin.spv_factor(-1.0, 3)

    def test_capital_recovery_zero_years_raises(self):
        with pytest.raises(ValueError, match="> 0"):
            fin.capital_recovery_factor(0.05, 0)


class TestFisher:
    def test_nominal_from_real(self):
        # Hand calculation, docs/derivations/finance-metrics.md section 7.
        assert_allclose(fin.nominal_rate_frac(0.05, 0.02), 0.071, rtol=1e-14)

    def test_real_from_nominal(self):
        # Hand calculation, docs/derivations/finance-metrics.md section 7.
        assert_allclose(fin.real_rate_frac(0.071, 0.02), 0.05, rtol=1e-13)

    @settings(max_examples=50, deadline=None)
    @given(st.floats(-0.5, 0.5), st.floats(-0.2, 0.5))
    def test_round_trip(self, r, i):
        assert_allclose(fin.real_rate_frac(fin.nominal_rate_frac(r, i), i), r, atol=1e-12)


class TestNpv:
    def test_numpy_financial_doc_example(self):
        # numpy-financial npv documentation example [V]: rate 0.08 -> 3065.22267 (5 decimals).
        assert_allclose(fin.npv([-40_000, 5_000, 8_000, 12_000, 30_000], 0.08), 3065.22267, atol=5e-6)

    def test_spreadsheet_convention_differs(self):
        # Computed [C]: spreadsheet NPV of the same list (first value discounted) = 2838.16914;
        # ours (year 0 undiscounted) divided by 1.08 gives it.
        ours = fin.npv([-40_000, 5_000, 8_000, 12_000, 30_000], 0.08)
        assert_allclose(ours / 1.08, 2838.16914, atol=5e-6)

    def test_numpy_docs_near_irr(self):
        # numpy documentation example (npv, numpy 1.13-1.17) [V]:
        # npf.npv(0.281, [-100, 39, 59, 55, 20]) = -0.0084785916.
        assert_allclose(fin.npv([-100, 39, 59, 55, 20], 0.281), -0.0084785916, atol=5e-11)

    def test_zero_rate_is_sum(self):
        # Definition: every factor is 1.
        assert_allclose(fin.npv([-100, 30, 40, 50], 0.0), 20.0, rtol=1e-15)

    def test_returns_kind_given(self):
        flows = np.array([[-100.0, 60, 60], [-50.0, 30, 30]])
        assert isinstance(fin.npv(flows[0], 0.1), float)
        assert fin.npv(flows, 0.1).shape == (2,)
        frame = pd.DataFrame(flows, index=["m1", "m2"])
        out = fin.npv(frame, 0.1)
        assert isinstance(out, pd.Series) and list(out.index) == ["m1", "m2"]
        # numpy-financial 1.0.0 as independent reference (same t = 0 convention).
        assert_allclose(out.to_numpy(), [npf.npv(0.1, row) for row in flows], rtol=1e-13)

    def test_rate_per_project_broadcasts(self):
        flows = np.array([[-100.0, 110], [-100.0, 110]])
        # Hand: -100 + 110/1.1 = 0; -100 + 110/1.0 = 10.
        assert_allclose(fin.npv(flows, np.array([0.1, 0.0])), [0.0, 10.0], atol=1e-12)

    def test_does_not_mutate_input(self):
        flows = np.array([[-100.0, 60, 60]])
        copy = flows.copy()
        fin.npv(flows, 0.1)
        fin.irr(flows)
        fin.simple_payback(flows)
        assert np.array_equal(flows, copy)

    def test_nan_raises(self):
        with pytest.raises(ValueError, match="finite"):
            fin.npv([-100, np.nan], 0.1)

    def test_scalar_raises(self):
        with pytest.raises(ValueError, match="year axis"):
            fin.npv(5.0, 0.1)

    def test_empty_year_axis_raises(self):
        with pytest.raises(ValueError, match="year 0"):
            fin.npv(np.zeros((3, 0)), 0.1)

    def test_no_projects_gives_empty(self):
        assert fin.npv(np.zeros((0, 4)), 0.1).shape == (0,)

    @settings(max_examples=60, deadline=None)
    @given(st.lists(st.floats(-1e4, 1e4), min_size=1, max_size=30), st.floats(-0.5, 1.0))
    def test_matches_numpy_financial(self, flows, rate):
        # numpy-financial 1.0.0 as independent reference.
        assert_allclose(fin.npv(flows, rate), npf.npv(rate, flows), rtol=1e-10, atol=1e-6)


class TestLifeCycleCost:
    def test_costs_positive(self):
        # Hand: 1000 + 100 + 100 at zero rate.
        assert_allclose(fin.life_cycle_cost([-1000, -100, -100], 0.0), 1200.0, rtol=1e-15)

    def test_residual_reduces_lcc(self):
        # Hand: 1000 + 100/1.1 - 500/1.1 = 636.3636...
        assert_allclose(fin.life_cycle_cost([-1000, -100 + 500], 0.1), 1000 - 400 / 1.1, rtol=1e-14)


class TestIrr:
    def test_numpy_doc_example(self):
        # numpy documentation example [V]: npf.irr([-100, 39, 59, 55, 20]) = 0.2809484211599611 (numpy 1.3 docs).
        result = fin.irr([-100, 39, 59, 55, 20])
        assert_allclose(result.irr_frac, 0.2809484211599611, rtol=1e-13)
        assert result.status == fin.IRR_UNIQUE and result.is_unique is True

    def test_deferred_start(self):
        # Hand calculation, docs/derivations/finance-metrics.md section 4: r = 0.1306624 (7 significant).
        result = fin.irr([0, 0, -100, 60, 60])
        assert_allclose(result.irr_frac, 0.1306623863, rtol=1e-9)
        assert result.status == "unique"

    def test_two_roots_lorie_savage(self):
        # Hand calculation, finance-metrics.md section 4 (Lorie and Savage 1955): roots 0.25 and 4.
        result = fin.irr([-1600, 10_000, -10_000])
        assert result.status == fin.IRR_MULTIPLE
        assert_allclose(result.irr_frac, 0.25, rtol=1e-12)

    def test_repeat_purchase_unique(self):
        # numpy-financial 1.0.0 irr of the same flows: 0.07635322458553695 (independent tool).
        flows = np.r_[-1000.0, [150.0] * 9, 150.0 - 1000.0, [150.0] * 9]
        result = fin.irr(flows)
        assert result.status == "unique"
        assert_allclose(result.irr_frac, 0.07635322458553695, rtol=1e-12)

    @pytest.mark.parametrize("flows, expected", [([-1, 1e6], 999_999.0), ([-100, 0.005], -0.99995),
                                                 ([1, -2], 1.0)])
    def test_extreme_single_roots(self, flows, expected):
        # Hand calculation, finance-metrics.md section 4 (two-value flows: 1 + r = -CF1/CF0).
        result = fin.irr(flows)
        assert result.status == "unique"
        assert_allclose(result.irr_frac, expected, rtol=1e-12)

    @pytest.mark.parametrize("flows, expected", [([-100, -5], -np.inf), ([5, 5, 5], np.inf),
                                                 ([0, 0, 0], -np.inf)])
    def test_no_irr_sentinel(self, flows, expected):
        # Documented sentinel: +/-inf with status "none", never NaN.
        result = fin.irr(flows)
        assert result.status == fin.IRR_NONE
        assert result.irr_frac == expected

    def test_vectorised_mixed_rows(self):
        flows = np.array([[-100, 39, 59, 55, 20], [-1600, 10_000, -10_000, 0, 0], [-100, -5, 0, 0, 0],
                          [0, 0, -100, 60, 60]], dtype=float)
        result = fin.irr(flows)
        assert list(result.status) == ["unique", "multiple", "none", "unique"]
        # Same sources as the single-row tests above.
        assert_allclose(result.irr_frac, [0.2809484211599611, 0.25, -np.inf, 0.1306623863], rtol=1e-9)
        assert not np.isnan(result.irr_frac).any()

    def test_dataframe_gives_series(self):
        frame = pd.DataFrame([[-100, 110], [-100, 121]], index=["a", "b"])
        result = fin.irr(frame)
        assert isinstance(result.irr_frac, pd.Series) and list(result.status.index) == ["a", "b"]
        # Hand: 1 + r = 1.1 and 1.21.
        assert_allclose(result.irr_frac.to_numpy(), [0.1, 0.21], rtol=1e-12)

    @settings(max_examples=80, deadline=None)
    @given(st.floats(10, 1e5), st.lists(st.floats(0, 1e4), min_size=1, max_size=25).filter(lambda v: sum(v) > 1))
    @example(outlay=1431.0, inflows=[1.0, 1.4303888017222247e-09])
    def test_npv_at_irr_is_zero(self, outlay, inflows):
        # Invariant: NPV(IRR) = 0, for one outlay followed by inflows (one sign change -> unique).
        # Inflows summing to > 1 keep 1 + IRR well above the spacing of floats near 0.
        flows = [-outlay] + inflows
        result = fin.irr(flows)
        assert result.status == "unique"
        scale = outlay + sum(inflows)
        # the flows as irr reads them: those within 1e-12 of the largest are zero (its documented rule). At an IRR
        # near -100 % such a flow would weigh (1 + r)^-t, millions of times itself: e.g. [-1431, 1, 1.43e-9] has
        # 1 + r = 1/1431 and its last flow x 1431^2 = 0.0029 (a case found by Hypothesis)
        read = [f if abs(f) > 1e-12 * max(outlay, max(inflows)) else 0.0 for f in flows]
        assert abs(fin.npv(read, result.irr_frac)) <= 1e-9 * scale

    @settings(max_examples=100, deadline=None)
    @given(st.lists(st.one_of(st.just(0.0), st.floats(1e-3, 1e4), st.floats(-1e4, -1e-3)), min_size=2, max_size=15))
    def test_agrees_with_numpy_financial_when_unique(self, flows):
        # numpy-financial 1.0.0 (roots of the polynomial, root closest to 0) as independent reference.
        result = fin.irr(flows)
        assert not math.isnan(result.irr_frac)
        # Near r = -1 the NPV is ill-conditioned (1 + r carries few significant digits): skip that corner.
        if result.status == "unique" and -0.9 < result.irr_frac < 1e3:
            # the residual is measured against the size of the discounted flows: at r = -0.86 a flow in
            # year 10 is multiplied by 0.14**-10 ~ 3e8, so a tolerance on the undiscounted flows cannot hold
            scale = sum(abs(v) / (1.0 + result.irr_frac) ** t for t, v in enumerate(flows))
            assert abs(fin.npv(flows, result.irr_frac)) <= 1e-7 * scale
            reference = npf.irr(flows)
            if not math.isnan(reference):
                # atol 1e-7: at a double root (e.g. -1, 1, 1, -1 has r = 0 twice) the reference's eigenvalue
                # method is only accurate to about sqrt(machine epsilon) ~ 1e-8
                assert_allclose(result.irr_frac, reference, rtol=1e-6, atol=1e-7)


class TestMirr:
    def test_published_example(self):
        # published example (w3resource) [V] = [C]: mirr([-1000, 100, 50, 10, 15], .34, .21) = -0.2742274708267268.
        assert_allclose(fin.mirr([-1000, 100, 50, 10, 15], 0.34, 0.21), -0.2742274708267268, rtol=1e-13)

    @settings(max_examples=60, deadline=None)
    @given(st.lists(st.floats(-1e4, 1e4), min_size=2, max_size=20), st.floats(0, 0.5), st.floats(0, 0.5))
    def test_matches_numpy_financial(self, flows, finance, reinvest):
        # numpy-financial 1.0.0 as independent reference; it returns NaN where we return a sentinel.
        ours = fin.mirr(flows, finance, reinvest)
        with np.errstate(over="ignore"):  # a tiny outflow overflows the reference's ratio to inf, as ours
            reference = npf.mirr(flows, finance, reinvest)
        if math.isnan(reference):
            assert ours == np.inf or ours == -1.0
        else:
            assert_allclose(ours, reference, rtol=1e-10, atol=1e-12)

    def test_sentinels(self):
        # Documented: no outflow -> +inf; no inflow -> -1.
        assert fin.mirr([5, 5], 0.1, 0.1) == np.inf
        assert fin.mirr([-5, 0], 0.1, 0.1) == -1.0

    def test_one_value_raises(self):
        with pytest.raises(ValueError, match="at least one year"):
            fin.mirr([-100], 0.1, 0.1)


class TestPayback:
    def test_interpolated(self):
        # Hand calculation, finance-metrics.md section 1: 2 + 300/500.
        result = fin.simple_payback([-1000, 300, 400, 500, 500])
        assert_allclose(result.payback_yr, 2.6, rtol=1e-14)
        assert result.within_horizon is True

    def test_exact_break_even(self):
        # Hand calculation, finance-metrics.md section 1.
        assert_allclose(fin.simple_payback([-1000, 500, 500]).payback_yr, 2.0, rtol=1e-14)

    def test_rounding_at_break_even(self):
        # Hand calculation, finance-metrics.md section 1: -0.3 + 3 x 0.1 is -5.6e-17 in floating point.
        assert_allclose(fin.simple_payback([-0.3, 0.1, 0.1, 0.1]).payback_yr, 3.0, rtol=1e-12)

    def test_first_crossing_kept_after_repeat_purchase(self):
        # Hand calculation, finance-metrics.md section 1: 1 + 40/60.
        assert_allclose(fin.simple_payback([-100, 60, 60, -100, 60]).payback_yr, 1 + 40 / 60, rtol=1e-14)

    def test_a_payback_lost_again_is_said(self):
        # Hand calculation, finance-metrics.md section 1: the cumulative flow ends at -20 (lost again) for
        # [-100, 60, 60, -100, 60] and at +10 (held) for [-100, 60, 60, -10]; the first crossing is the same.
        lost = fin.simple_payback([-100, 60, 60, -100, 60])
        held = fin.simple_payback([-100, 60, 60, -10])
        assert lost.lost_again is True and held.lost_again is False
        assert_allclose(held.payback_yr, 1 + 40 / 60, rtol=1e-14)
        # never paid back: nothing to lose again; row-wise on a 2D array
        both = fin.simple_payback(np.array([[-100, 10, 10, 0, 0], [-100, 60, 60, -100, 60]], dtype=float))
        assert both.lost_again.tolist() == [False, True]

    def test_not_within_horizon_sentinel(self):
        # Documented sentinel: inf plus within_horizon False, never NaN.
        result = fin.simple_payback([-100, 10, 10])
        assert result.payback_yr == np.inf and result.within_horizon is False

    def test_already_paid_at_year_zero(self):
        assert fin.simple_payback([100, -50]).payback_yr == 0.0

    def test_counted_from_an_outlay_after_year_zero(self):
        # Hand calculation, finance-metrics.md section 1a: a replacement bought at the failure year 2;
        # cumulative 0, 0, -300, -200, -100, 0: back at zero at the end of year 5, 3 years after the outlay.
        result = fin.simple_payback([0, 0, -300, 100, 100, 100, 100])
        assert_allclose(result.payback_yr, 3.0, rtol=1e-14)
        assert result.within_horizon is True

    def test_money_out_only_never_pays_back(self):
        # Hand calculation, finance-metrics.md section 1a: cumulative 0, -10, -20 never back at zero.
        result = fin.simple_payback([0, -10, -10])
        assert result.payback_yr == np.inf and result.within_horizon is False

    def test_no_flows_have_no_payback(self):
        # finance-metrics.md section 1a: nothing is invested and nothing comes in (e.g. a replacement whose
        # failure year lies beyond the horizon).
        result = fin.simple_payback([0.0, 0.0, 0.0])
        assert result.payback_yr == np.inf and result.within_horizon is False

    def test_money_in_without_outlay_pays_back_at_once(self):
        # finance-metrics.md section 1a: a project costing nothing that saves from year 1.
        result = fin.simple_payback([0, 50, 50])
        assert result.payback_yr == 0.0 and result.within_horizon is True

    def test_discounted(self):
        # Hand calculation, finance-metrics.md section 2: 3 + 21.036814/341.506728 = 3.0616.
        assert_allclose(fin.discounted_payback([-1000, 300, 400, 500, 500], 0.10).payback_yr, 3.0616, rtol=1e-10)

    def test_discounted_not_within_horizon(self):
        # Hand calculation, finance-metrics.md section 2 (cumulative ends at -21.04).
        result = fin.discounted_payback([-1000, 300, 400, 500], 0.10)
        assert result.payback_yr == np.inf and not result.within_horizon

    def test_vectorised_with_flags(self):
        flows = np.array([[-1000, 300, 400, 500, 500], [-100, 10, 10, 10, 10]], dtype=float)
        result = fin.simple_payback(flows)
        # Hand calculations above.
        assert_allclose(result.payback_yr, [2.6, np.inf])
        assert result.within_horizon.tolist() == [True, False]

    @settings(max_examples=80, deadline=None)
    @given(st.floats(1, 1e5), st.lists(st.floats(0, 1e4), min_size=1, max_size=25), st.floats(0.001, 0.5))
    def test_discounted_not_shorter(self, outlay, inflows, rate):
        # Invariant (STYLE.md section 5): positive rate, one upfront outlay -> discounted >= simple.
        flows = [-outlay] + inflows
        simple = fin.simple_payback(flows).payback_yr
        discounted = fin.discounted_payback(flows, rate).payback_yr
        assert discounted >= simple - 1e-9


def _payback_by_plain_numpy(c: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The payback rule in plain numpy, array by array (reference for the compiled pass): from the first year
    the cumulative flow is below zero to the first year after it that it is back at zero or above."""
    scale = np.maximum(np.max(c, axis=-1), -np.min(c, axis=-1))[..., None]
    cumulative = np.cumsum(c, axis=-1)
    tolerance = -1e-12 * scale
    out = cumulative < tolerance
    has_outlay = out.any(axis=-1)
    outlay = np.argmax(out, axis=-1)
    back = (cumulative >= tolerance) & (np.arange(c.shape[-1]) > outlay[..., None]) & has_outlay[..., None]
    has_back = back.any(axis=-1)
    first = np.argmax(back, axis=-1)
    at = np.take_along_axis(cumulative, first[..., None], axis=-1)[..., 0]
    before = np.take_along_axis(cumulative, np.maximum(first - 1, 0)[..., None], axis=-1)[..., 0]
    flow = at - before
    with np.errstate(divide="ignore", invalid="ignore"):
        part = np.clip(-before / np.where(flow > 0, flow, 1.0), 0.0, 1.0)
    at_once = ~has_outlay & (cumulative > -tolerance).any(axis=-1)
    years = np.where(has_back, first - 1.0 + part - outlay, np.where(at_once, 0.0, np.inf))
    return years, has_back | at_once


class TestPaybackPass:
    """The compiled payback pass gives the plain numpy rule's numbers, bit for bit."""

    def test_seeded_flows_of_every_kind(self):
        rng = np.random.default_rng(21)
        flows = rng.normal(0, 100, (500, 4, 12))
        flows[:, :, 0] -= rng.uniform(0, 600, (500, 4))  # outlays
        flows[::7, :, 5] -= 800.0                         # repeat purchases
        flows[::11] = np.round(flows[::11], 0)            # exact break-evens
        flows[3, 1] = 0.0                                 # nothing at all
        result = fin.simple_payback(flows)
        years, within = _payback_by_plain_numpy(flows)
        assert np.array_equal(result.payback_yr, years) and np.array_equal(result.within_horizon, within)

    @settings(max_examples=150, deadline=None)
    @given(st.lists(st.floats(-1e4, 1e4), min_size=1, max_size=30))
    def test_any_flows(self, flows):
        flows = np.array(flows)
        result = fin.simple_payback(flows)
        years, within = _payback_by_plain_numpy(flows)
        assert result.payback_yr == years and result.within_horizon == within


class TestSirAirr:
    def test_sir_hand(self):
        # Hand calculation, finance-metrics.md section 3: 300 x UPV(5 %, 5) / 1000 = 1.298843 (7 digits).
        savings = [0, 300, 300, 300, 300, 300]
        investment = [-1000, 0, 0, 0, 0, 0]
        assert_allclose(fin.savings_to_investment_ratio(savings, investment, 0.05), 1.298843001, rtol=1e-9)

    def test_airr_equals_mirr(self):
        # Hand calculation, finance-metrics.md section 3 (AIRR 0.1063706, 7 decimals), and
        # numpy-financial mirr with finance = reinvest = d (computed [C]: AIRR = MIRR).
        sir = fin.savings_to_investment_ratio([0, 300, 300, 300, 300, 300], [-1000, 0, 0, 0, 0, 0], 0.05)
        value = fin.airr(sir, 0.05, 5)
        assert_allclose(value, 0.1063706, atol=5e-8)
        assert_allclose(value, npf.mirr([-1000, 300, 300, 300, 300, 300], 0.05, 0.05), rtol=1e-12)

    def test_airr_of_unit_sir_is_discount_rate(self):
        # Definition: (1 + d) x 1 - 1 = d.
        assert_allclose(fin.airr(1.0, 0.07, 12), 0.07, rtol=1e-14)

    def test_sentinels(self):
        # Documented: no net investment -> SIR inf, AIRR inf; no savings and no investment -> 0, AIRR -1.
        assert fin.savings_to_investment_ratio([0, 10], [0, 0], 0.1) == np.inf
        assert fin.savings_to_investment_ratio([0, 0], [0, 0], 0.1) == 0.0
        assert fin.airr(np.inf, 0.05, 10) == np.inf
        assert fin.airr(0.0, 0.05, 10) == -1.0

    def test_sir_above_one_iff_npv_positive(self):
        savings = np.array([[0, 300, 300, 300], [0, 100, 100, 100]], dtype=float)
        investment = np.array([[-700, 0, 0, 0], [-700, 0, 0, 0]], dtype=float)
        sir = fin.savings_to_investment_ratio(savings, investment, 0.05)
        total = fin.npv(savings + investment, 0.05)
        assert ((sir > 1) == (total > 0)).all()


class TestAnnualisedMetrics:
    def test_equivalent_annual_cost_loan(self):
        # numpy-financial [C]: npf.pmt(0.075/12, 180, 200000) = -1854.0247 (sign flip), 4 decimals.
        assert_allclose(fin.equivalent_annual_cost(200_000, 0.075 / 12, 180), 1854.0247, atol=5e-5)

    def test_cost_of_saved_energy(self):
        # Hand calculation, finance-metrics.md section 5: 10000 x 0.1295046 / 50 = 25.900915 per MWh.
        assert_allclose(fin.cost_of_saved_energy_per_mwh(10_000, 50, 0.05, 10), 25.900915, atol=5e-7)

    def test_cost_of_saved_energy_no_savings_is_inf(self):
        assert fin.cost_of_saved_energy_per_mwh(1000, 0.0, 0.05, 10) == np.inf

    def test_co2_path(self):
        # Hand calculation, finance-metrics.md section 6: 5 t, declining 10 %/yr from year 0.
        assert_allclose(fin.co2_avoided_t(10_000, 0.5, 0.1, 2), [0.0, 4.5, 4.05], rtol=1e-14)

    def test_abatement_cost(self):
        # Hand calculation, finance-metrics.md section 6.
        assert_allclose(fin.abatement_cost_per_t(1000.0, [0, 10, 10], 0.0), -50.0, rtol=1e-14)
        assert_allclose(fin.abatement_cost_per_t(-100.0, [0, 1, 1], 0.1), 57.619048, atol=5e-7)

    def test_abatement_cost_nothing_avoided_is_inf(self):
        assert fin.abatement_cost_per_t(100.0, [0, 0, 0], 0.1) == np.inf

    def test_profitability_index(self):
        # Definition: NPV / capital; sentinels for zero capital.
        assert_allclose(fin.profitability_index([50.0, -10.0], [100.0, 100.0]), [0.5, -0.1])
        assert fin.profitability_index(5.0, 0.0) == np.inf
        assert fin.profitability_index(0.0, 0.0) == 0.0


class TestFinanceAssumptions:
    def test_defaults_valid(self):
        a = FinanceAssumptions()
        assert a.rate_basis == "real" and a.budget_per_yr == ()

    def test_from_dict_full(self):
        data = {"currency": "USD", "discount_rate_frac": 0.07, "rate_basis": "nominal", "inflation_frac": 0.03,
                "horizon_yr": 20, "escalation_energy_frac": 0.02, "grid_co2_kg_per_kwh": 0.35,
                "budget_per_yr": [50_000, 40_000], "replacement_mode": "replace_at_failure",
                "monte_carlo_draws": 500, "monte_carlo_seed": 3, "tax_rate_frac": 0.21, "depreciation_yr": 7}
        a, problems = FinanceAssumptions.from_dict(data, source="finance.toml")
        assert problems == []
        assert a.budget_per_yr == (50_000.0, 40_000.0) and a.horizon_yr == 20
        assert a.escalation_frac("energy") == 0.02

    def test_percent_given_for_fraction(self):
        a, problems = FinanceAssumptions.from_dict({"discount_rate_frac": 8}, source="finance.toml")
        assert a is None
        (p,) = problems
        assert p.severity == "error" and p.file == "finance.toml" and p.column == "discount_rate_frac"
        assert p.value == 8 and "0.08" in p.hint

    def test_collects_every_problem(self):
        data = {"horizon_yr": 15.5, "rate_basis": "Real", "budget_per_yr": [100, "lots"], "colour": "red"}
        a, problems = FinanceAssumptions.from_dict(data, source="case.toml")
        assert a is None
        columns = sorted(p.column for p in problems)
        assert columns == ["budget_per_yr", "colour", "horizon_yr"]  # type errors first; choices after
        assert [p.severity for p in problems if p.column == "colour"] == ["warning"]

    def test_choice_errors_reported_after_types_pass(self):
        a, problems = FinanceAssumptions.from_dict({"rate_basis": "Real", "replacement_mode": "later"})
        assert a is None
        assert sorted(p.column for p in problems) == ["rate_basis", "replacement_mode"]

    def test_nested_table_and_numeric_text(self):
        a, problems = FinanceAssumptions.from_dict({"finance": {"discount_rate_frac": "0.06", "colour": 1}})
        assert a is not None and a.discount_rate_frac == 0.06
        assert [p.column for p in problems] == ["finance.colour"]

    def test_price_levels_read_and_checked(self):
        a, problems = FinanceAssumptions.from_dict({"energy_price_factor": 1.2, "capital_cost_factor": "0.9"})
        assert problems == [] and a.energy_price_factor == 1.2 and a.capital_cost_factor == 0.9
        assert FinanceAssumptions().energy_price_factor == 1.0  # the tariffs as written unless asked
        a, problems = FinanceAssumptions.from_dict({"energy_price_factor": 0, "capital_cost_factor": "dear"})
        assert a is None and sorted(p.column for p in problems) == ["capital_cost_factor"]  # type errors first
        a, problems = FinanceAssumptions.from_dict({"energy_price_factor": 0})
        assert a is None and problems[0].column == "energy_price_factor" and "> 0" in problems[0].rule
        a, problems = FinanceAssumptions.from_dict({"capital_cost_factor": 12})  # 12 x: perhaps a percent
        assert a is not None and [p.severity for p in problems] == ["warning"]

    def test_unusual_value_warns(self):
        a, problems = FinanceAssumptions.from_dict({"discount_rate_frac": 0.6})
        assert a is not None and [p.severity for p in problems] == ["warning"]

    def test_direct_construction_validates(self):
        with pytest.raises(ValueError, match="horizon_yr"):
            FinanceAssumptions(horizon_yr=0)

    def test_real_nominal_properties(self):
        a = FinanceAssumptions(discount_rate_frac=0.05, inflation_frac=0.02, escalation_energy_frac=0.01)
        # Hand: Fisher, (1.05)(1.02) - 1 = 0.071; (1.01)(1.02) - 1 = 0.0302.
        assert_allclose(a.nominal_discount_rate_frac, 0.071, rtol=1e-14)
        assert_allclose(a.escalation_on_basis_frac("energy", "nominal"), 0.0302, rtol=1e-14)
        b = FinanceAssumptions(discount_rate_frac=0.071, inflation_frac=0.02, rate_basis="nominal")
        assert_allclose(b.real_discount_rate_frac, 0.05, rtol=1e-13)

    def test_unknown_component_raises(self):
        with pytest.raises(ValueError, match="component"):
            FinanceAssumptions().escalation_frac("gas")


def test_one_number_for_the_budgets_is_read_as_one_plan_year_and_said_so():
    assumptions, problems = fin.FinanceAssumptions.from_dict({"budget_per_yr": 5000})
    assert assumptions.budget_per_yr == (5000.0,)
    found = [p for p in problems if p.column == "budget_per_yr"]
    assert found and found[0].severity == "warning" and "[5000, 5000, 5000]" in found[0].hint
    _, problems = fin.FinanceAssumptions.from_dict({"budget_per_yr": [5000, 5000]})
    assert not [p for p in problems if p.column == "budget_per_yr"]


def test_plan_years_are_named_by_the_budget_year_they_fall_in():
    # hand calculation (docs/finance.md, fiscal_year_start_month): a budget year from April, named by the calendar
    # year it ends in (common practice); plan year 0 holds the purchase date. Bought on 15 June 2027: the year from
    # April 2027 to March 2028, FY2028; bought on 1 February 2027: April 2026 to March 2027, FY2027; bought on
    # 1 April 2027, the budget year's first day: FY2028. Calendar years are named as they are.
    from models.finance import budget_year_names

    assert budget_year_names("2027-06-15", 4, 3) == ["FY2028", "FY2029", "FY2030"]
    assert budget_year_names("2027-02-01", 4, 2) == ["FY2027", "FY2028"]
    assert budget_year_names("2027-04-01", 4, 1) == ["FY2028"]
    assert budget_year_names("2027-09-30", 10, 1) == ["FY2027"] and budget_year_names("2027-10-01", 10, 1) == ["FY2028"]
    assert budget_year_names("2027-06-15", 1, 2) == ["2027", "2028"]
    assert budget_year_names("2027-06-15", 0, 2) == [] and budget_year_names("", 4, 2) == []
    ok, problems = FinanceAssumptions.from_dict({"fiscal_year_start_month": 4}, "finance.toml")
    assert ok is not None and ok.fiscal_year_start_month == 4 and not problems
    got, problems = FinanceAssumptions.from_dict({"fiscal_year_start_month": 13}, "finance.toml")
    assert got is None and any(p.column == "fiscal_year_start_month" for p in problems)
