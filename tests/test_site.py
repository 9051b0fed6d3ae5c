"""Tests for models.site: the site meter and capacitor banks.

Sources: hand calculations in docs/derivations/billing-site-and-attribution.md and
docs/derivations/billing-equivalences.md; published power-factor-correction values (multiplier table
tan(acos PF1) - tan(acos PF2); worked checks on nodeandvolt.com).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose

from models.site import (
    FixedCapacitorBank,
    add_stepped_bank_kvar,
    Site,
    SteppedCapacitorBank,
    meter_from_asset_totals,
    power_factor,
    power_factor_from_tan_phi,
    q_from_power_factor_kvar,
    site_meter,
    stepped_bank_q_kvar,
    tan_phi_from_power_factor,
)


class TestPowerFactorRelations:
    @pytest.mark.parametrize(
        "tan_phi, pf",
        [
            (0.33, 0.9496),  # hand calculation (billing-equivalences.md): GB DUoS kVArh/kWh 0.33 ⇔ PF 0.9496
            (0.40, 0.9285),  # hand calculation (billing-equivalences.md): RTE tan φ 0.4 ⇔ PF 0.9285
            (0.62, 0.850),  # hand calculation (billing-equivalences.md): kvar/kW 0.62 ⇔ PF 0.850
            (0.50, 0.894),  # hand calculation (billing-equivalences.md): kvar/kW 0.5 ⇔ PF 0.894
        ],
    )
    def test_published_equivalences(self, tan_phi, pf):
        # published to 3-4 decimals: half a unit in the last published digit
        tol = 5e-5 if len(str(pf)) == 6 else 5e-4
        assert_allclose(power_factor_from_tan_phi(tan_phi), pf, atol=tol)

    def test_tan_phi_round_trip(self):
        pf = np.array([0.5, 0.8, 0.95, 1.0])
        assert_allclose(power_factor_from_tan_phi(tan_phi_from_power_factor(pf)), pf, rtol=1e-12)

    @pytest.mark.parametrize(
        "p_kw, pf1, pf2, q_kvar",
        [
            (100.0, 0.75, 0.95, 55.30),  # published (nodeandvolt.com): 100 kW, 0.75 → 0.95: 55.30 kvar
            (250.0, 0.80, 0.95, 105.33),  # published (nodeandvolt.com): 250 kW, 0.80 → 0.95: 105.33 kvar
            (75.0, 0.70, 0.90, 40.19),  # published (nodeandvolt.com): 75 kW, 0.70 → 0.90: 40.19 kvar
        ],
    )
    def test_correction_formula(self, p_kw, pf1, pf2, q_kvar):
        # Q_c = P (tan φ1 − tan φ2). The source multiplies P by the 3-decimal table multiplier (0.553 for
        # 0.75 → 0.95, exact 0.553233), so the published kvar carries up to P × 0.0005 of rounding
        got = q_from_power_factor_kvar(p_kw, pf1) - q_from_power_factor_kvar(p_kw, pf2)
        assert_allclose(got, q_kvar, atol=p_kw * 5e-4)

    @pytest.mark.parametrize(
        "pf1, pf2, multiplier",
        [
            (0.75, 0.90, 0.398),  # PF-correction multiplier table, cell as published (slideshare "bank kapasitor")
            (0.65, 1.00, 1.169),  # PF-correction multiplier table, cell as published (elmeasure.com)
            (0.80, 0.95, 0.421),  # PF-correction multiplier table tan(acos PF1) - tan(acos PF2) [C]
        ],
    )
    def test_correction_multiplier_table(self, pf1, pf2, multiplier):
        # table to 3 decimals: half a unit in the last digit
        got = tan_phi_from_power_factor(pf1) - tan_phi_from_power_factor(pf2)
        assert_allclose(got, multiplier, atol=5e-4)

    def test_power_factor_of_idle_interval_is_one(self):
        # documented convention: S = 0 → PF 1.0
        assert_allclose(power_factor(np.array([0.0, 80.0]), np.array([0.0, -60.0])), [1.0, 0.8], rtol=1e-12)

    @pytest.mark.parametrize("bad", [0.0, -0.5, 1.2, np.nan])
    def test_invalid_power_factor_raises(self, bad):
        with pytest.raises(ValueError, match=r"\(0, 1\]"):
            tan_phi_from_power_factor(bad)


class TestSiteMeter:
    def test_two_motors_and_a_fixed_bank(self):
        # hand calculation, see docs/derivations/billing-site-and-attribution.md, S1
        m = site_meter(np.array([[80.0], [20.0]]), np.array([[60.0], [15.0]]), fixed_bank_q_kvar=[45.0])
        assert_allclose(m.p_kw, [100.0], rtol=1e-12)
        assert_allclose(m.q_kvar, [30.0], rtol=1e-12)
        assert_allclose(m.s_kva, [104.403], atol=5e-4)  # derivation shows 3 decimals
        assert_allclose(m.power_factor, [0.957826], atol=5e-7)
        assert_allclose(m.capacitor_q_kvar, [-45.0], rtol=1e-12)
        assert not m.leading[0]

    def test_base_load_and_bank_schedule(self):
        # hand calculation, billing-site-and-attribution.md, S1: base 50 kW at PF 0.80 adds 37.5 kVAr;
        # bank on in the first interval, off in the second
        m = site_meter(
            np.array([[80.0, 80.0], [20.0, 20.0]]),
            np.array([[60.0, 60.0], [15.0, 15.0]]),
            base_p_kw=50.0,
            base_power_factor=0.80,
            fixed_bank_q_kvar=[45.0],
            fixed_bank_energised=np.array([[True, False]]),
        )
        assert_allclose(m.p_kw, [150.0, 150.0], rtol=1e-12)
        assert_allclose(m.q_kvar, [67.5, 112.5], rtol=1e-12)

    def test_over_correction_leads(self):
        # hand calculation: 100 kW, 30 kVAr with a 50 kVAr fixed bank → −20 kVAr, leading, PF 100/sqrt(10 400)
        m = site_meter(np.array([100.0]), np.array([30.0]), fixed_bank_q_kvar=[50.0])
        assert bool(m.leading[0])
        assert_allclose(m.power_factor, [100.0 / np.sqrt(10_400.0)], rtol=1e-12)

    def test_series_and_dataframe_inputs_keep_the_index(self):
        idx = pd.date_range("2025-01-06", periods=3, freq="15min", tz="Europe/Berlin")
        p = pd.DataFrame({"m1": [80.0, 80.0, 0.0], "m2": [20.0, 20.0, 0.0]}, index=idx)
        q = pd.DataFrame({"m1": [60.0, 60.0, 0.0], "m2": [15.0, 15.0, 0.0]}, index=idx)
        m = site_meter(p, q, fixed_bank_q_kvar=[45.0])
        assert isinstance(m.q_kvar, pd.Series) and m.q_kvar.index.equals(idx)
        # hand calculation, S1; third interval idle: only the bank, −45 kVAr, leading
        assert_allclose(m.q_kvar.to_numpy(), [30.0, 30.0, -45.0], rtol=1e-12)
        assert m.leading.tolist() == [False, False, True]
        frame = m.to_frame()
        assert list(frame.columns) == ["p_kw", "q_kvar", "s_kva", "power_factor", "leading", "capacitor_q_kvar"]
        assert frame.index.equals(idx)

    def test_inputs_are_not_mutated(self):
        p = np.array([[80.0, 10.0], [20.0, 5.0]])
        q = np.array([[60.0, 5.0], [15.0, 1.0]])
        p0, q0 = p.copy(), q.copy()
        site_meter(p, q, base_p_kw=5.0, fixed_bank_q_kvar=[10.0], stepped_banks=[SteppedCapacitorBank(50.0, 10.0, 0.95)])
        assert np.array_equal(p, p0) and np.array_equal(q, q0)

    def test_scenario_axis_broadcasts(self):
        # two scenarios of one interval each: 400/300 and 400/100 kW/kVAr, 250 kVAr bank in 50 kVAr steps at 0.95
        m = meter_from_asset_totals(
            np.array([[400.0], [400.0]]), np.array([[300.0], [100.0]]), stepped_banks=[SteppedCapacitorBank(250.0, 50.0, 0.95)]
        )
        # hand calculation, S2: 200 kVAr; second: allowed 131.47 > 100 → no step
        assert_allclose(m.capacitor_q_kvar, [[-200.0], [0.0]], rtol=1e-12)

    @pytest.mark.parametrize(
        "kwargs, match",
        [
            (dict(base_p_kw=-1.0), "base_p_kw"),
            (dict(base_power_factor=1.5), r"\(0, 1\]"),
            (dict(fixed_bank_q_kvar=[-10.0]), "positive"),
        ],
    )
    def test_invalid_site_raises(self, kwargs, match):
        with pytest.raises(ValueError, match=match):
            site_meter(np.array([1.0]), np.array([1.0]), **kwargs)

    def test_shape_mismatch_raises(self):
        with pytest.raises(ValueError, match="differ in shape"):
            site_meter(np.ones((2, 3)), np.ones((2, 4)))

    def test_site_dataclass_passes_through(self):
        site = Site(base_p_kw=50.0, base_power_factor=0.8, fixed_banks=(FixedCapacitorBank(45.0, "B1"),))
        m = site.meter(np.array([[80.0], [20.0]]), np.array([[60.0], [15.0]]))
        # hand calculation, S1: 150 kW, 60 + 15 + 37.5 − 45 = 67.5 kVAr
        assert_allclose([m.p_kw[0], m.q_kvar[0]], [150.0, 67.5], rtol=1e-12)
        with pytest.raises(ValueError):
            Site(base_power_factor=0.0)
        with pytest.raises(ValueError):
            SteppedCapacitorBank(100.0, 0.0)


class TestSteppedBank:
    def test_reaches_target(self):
        # hand calculation, billing-site-and-attribution.md, S2
        q_cap = stepped_bank_q_kvar(400.0, 300.0, 250.0, 50.0, 0.95)
        assert_allclose(q_cap, -200.0, rtol=1e-12)
        assert_allclose(power_factor(400.0, 300.0 + q_cap), 0.970143, atol=5e-7)

    def test_not_enough_steps(self):
        # hand calculation, S3
        q_cap = stepped_bank_q_kvar(400.0, 300.0, 100.0, 50.0, 0.95)
        assert_allclose(q_cap, -100.0, rtol=1e-12)
        assert_allclose(power_factor(400.0, 300.0 + q_cap), 0.894427, atol=5e-7)

    @pytest.mark.parametrize("target", [1.0, 0.95])
    def test_never_leading(self, target):
        # hand calculation, S4
        assert_allclose(stepped_bank_q_kvar(10.0, 120.0, 250.0, 50.0, target), -100.0, rtol=1e-12)

    def test_published_correction_with_fine_steps(self):
        # published (nodeandvolt.com): 250 kW from 0.80 to 0.95 needs 105.33 kvar (published to 2 decimals); with
        # 0.01 kVAr steps the controller switches the fewest steps reaching 0.95: at most one step above
        q = q_from_power_factor_kvar(250.0, 0.80)
        q_cap = -stepped_bank_q_kvar(250.0, q, 200.0, 0.01, 0.95)
        assert 105.33 - 5e-3 <= q_cap <= 105.33 + 0.01 + 5e-3

    def test_vectorised_over_intervals_with_series(self):
        idx = pd.date_range("2025-01-06", periods=3, freq="h", tz="UTC")
        out = stepped_bank_q_kvar(pd.Series([400.0, 400.0, 0.0], index=idx), pd.Series([300.0, 50.0, 0.0], index=idx), 250.0, 50.0, 0.95)
        assert isinstance(out, pd.Series) and out.index.equals(idx)
        # hand calculation: S2; 50 kVAr is within the 131.5 kVAr allowed; idle interval needs nothing
        assert_allclose(out.to_numpy(), [-200.0, 0.0, 0.0], atol=0)

    @pytest.mark.parametrize("args", [(400.0, 300.0, -1.0, 50.0, 0.95), (400.0, 300.0, 100.0, 0.0, 0.95), (400.0, 300.0, 100.0, 50.0, 1.01)])
    def test_invalid_bank_raises(self, args):
        with pytest.raises(ValueError):
            stepped_bank_q_kvar(*args)

    @settings(max_examples=200, deadline=None)
    @given(
        p=st.floats(0.0, 5000.0),
        q=st.floats(-500.0, 5000.0),
        rated=st.floats(0.0, 3000.0),
        step=st.floats(1.0, 300.0),
        target=st.floats(0.5, 1.0),
    )
    def test_never_makes_a_lagging_site_lead(self, p, q, rated, step, target):
        q_cap = stepped_bank_q_kvar(p, q, rated, step, target)
        assert q_cap <= 0.0
        assert -q_cap <= rated + 1e-9
        if q >= 0.0:
            assert q + q_cap >= -1e-9 * max(1.0, step)
        else:
            assert q_cap == 0.0  # a leading site gets no capacitors

    @settings(max_examples=200, deadline=None)
    @given(p=st.floats(1.0, 5000.0), q=st.floats(0.0, 5000.0), step=st.floats(0.5, 100.0), target=st.floats(0.6, 0.99))
    def test_reaches_target_with_enough_steps(self, p, q, step, target):
        # enough steps: the bank can cancel all of Q, and one step fits inside the allowed kVAr at the target
        allowed = p * tan_phi_from_power_factor(target)
        if allowed < step:
            return
        rated = step * (np.ceil(q / step) + 1)
        q_cap = stepped_bank_q_kvar(p, q, rated, step, target)
        assert power_factor(p, q + q_cap) >= target - 1e-9
        # and it does not switch more than one step beyond what the target needs
        assert -q_cap <= max(q - allowed, 0.0) + step + 1e-9


    @pytest.mark.parametrize("one_row_of_p", [False, True])
    def test_in_place_pass_gives_the_rule_bit_for_bit(self, one_row_of_p):
        # the compiled pass against stepped_bank_q_kvar itself: same values, including exact step
        # boundaries (q a whole number of steps), leading sites, idle intervals and a NaN (kept NaN)
        rng = np.random.default_rng(3)
        p = rng.uniform(-50.0, 900.0, (1 if one_row_of_p else 5, 400))
        q = rng.uniform(-200.0, 700.0, (5, 400))
        q[:, :40] = 50.0 * rng.integers(0, 10, (5, 40))
        p[:, 40:60] = 0.0
        q[2, 7] = np.nan
        expected = q + stepped_bank_q_kvar(p, q, 250.0, 50.0, 0.95)
        got = q.copy()
        add_stepped_bank_kvar(p, got, 250.0, 50.0, 0.95)
        np.testing.assert_array_equal(got, expected)
        assert np.isnan(got[2, 7])

    @pytest.mark.parametrize("args", [(-1.0, 50.0, 0.95), (100.0, 0.0, 0.95), (100.0, 50.0, 1.01)])
    def test_in_place_pass_refuses_an_invalid_bank(self, args):
        with pytest.raises(ValueError):
            add_stepped_bank_kvar(np.ones((1, 3)), np.ones((1, 3)), *args)

class TestOrderIndependence:
    @settings(max_examples=30, deadline=None)
    @given(n_assets=st.integers(1, 12), seed=st.integers(0, 2**32 - 1), data=st.data())
    def test_asset_row_order_does_not_matter(self, n_assets, seed, data):
        rng = np.random.default_rng(seed)
        p = rng.uniform(0.0, 200.0, (n_assets, 24))
        q = rng.uniform(-50.0, 150.0, (n_assets, 24))
        perm = data.draw(st.permutations(list(range(n_assets))))
        banks = [SteppedCapacitorBank(300.0, 25.0, 0.95)]
        a = site_meter(p, q, base_p_kw=20.0, base_power_factor=0.9, fixed_bank_q_kvar=[40.0], stepped_banks=banks)
        b = site_meter(p[perm], q[perm], base_p_kw=20.0, base_power_factor=0.9, fixed_bank_q_kvar=[40.0], stepped_banks=banks)
        # sums in another order differ by float rounding only; the step count could flip only at an exact
        # step boundary, which random data hit with probability ~0
        assert_allclose(b.p_kw, a.p_kw, rtol=1e-12)
        assert_allclose(b.q_kvar, a.q_kvar, rtol=1e-9, atol=1e-9)
        assert_allclose(b.capacitor_q_kvar, a.capacitor_q_kvar, atol=1e-9)
