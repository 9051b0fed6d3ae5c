"""Validation record for models/loads.py: affinity laws, the speed-coupled load of a replacement
machine, remedies, throttled-to-speed-control conversion on a system curve, and the cost of a speed rise."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose
from scipy.optimize import brentq

from models.induction import calibrate_induction, induction_speed_rpm
from models.loads import (
    affinity_flow_ratio,
    affinity_head_ratio,
    affinity_power_ratio,
    apply_speed_remedy,
    pump_efficiency_ratio,
    shaft_power_at_speed_kw,
    solve_speed_coupled_load,
    speed_controlled_shaft_frac,
    speed_exponent,
    speed_frac_for_flow,
    speed_rise_effect,
    system_head_frac,
    throttled_flow_frac,
    throttled_to_speed_control,
)


class TestAffinityLaws:
    """Published affinity-law worked examples [V] (calculatorlib.com, calculatorcollection.org); working in
    docs/derivations/loads-speed-coupling.md.
    The sources round to 2-4 significant digits, so tolerance 0.5 % relative."""

    def test_1750_to_1450_rpm(self):
        r = 1450.0 / 1750.0
        # published: calculatorlib.com affinity-law example: 100 gpm, 50 ft, 10 hp -> 82.86 gpm, 34.33 ft, 5.69 hp
        assert_allclose(100.0 * affinity_flow_ratio(r), 82.86, rtol=5e-3)
        assert_allclose(50.0 * affinity_head_ratio(r), 34.33, rtol=5e-3)
        assert_allclose(10.0 * affinity_power_ratio(r), 5.69, rtol=5e-3)

    def test_1450_to_1750_rpm(self):
        r = 1750.0 / 1450.0
        # published: calculatorcollection.org example: 60 m3/h, 25 m, 8 kW -> 72.4 m3/h, 36.4 m, 14.1 kW
        assert_allclose(60.0 * affinity_flow_ratio(r), 72.4, rtol=5e-3)
        assert_allclose(25.0 * affinity_head_ratio(r), 36.4, rtol=5e-3)
        assert_allclose(8.0 * affinity_power_ratio(r), 14.1, rtol=5e-3)

    def test_rules_of_thumb(self):
        # common practice: affinity-law rules of thumb: +10 % speed -> +21 % head, +33 % power; -20 % -> x 0.512
        assert_allclose(affinity_head_ratio(1.1), 1.21, rtol=1e-12)
        assert_allclose(affinity_power_ratio(1.1), 1.331, rtol=1e-12)
        assert_allclose(affinity_power_ratio(0.8), 0.512, rtol=1e-12)

    def test_constant_torque_is_linear(self):
        # hand calculation: P ~ n for constant torque, 1500/1475 = 1.016949
        assert_allclose(affinity_power_ratio(1500.0 / 1475.0, speed_exponent("constant_torque")), 1.016949, rtol=1e-6)

    def test_speed_exponent_labels(self):
        assert_allclose(speed_exponent(["variable_torque", "constant_torque"]), [3.0, 1.0], rtol=0)
        with pytest.raises(ValueError, match="load_type"):
            speed_exponent("quadratic")

    def test_series_kind_is_kept(self):
        idx = pd.date_range("2025-06-01", periods=3, freq="h", tz="UTC")
        out = affinity_power_ratio(pd.Series([0.9, 1.0, 1.1], index=idx))
        assert isinstance(out, pd.Series) and out.index.equals(idx)

    def test_non_positive_speed_ratio_raises(self):
        with pytest.raises(ValueError, match="speed_ratio"):
            affinity_power_ratio(0.0)


class TestSpeedCoupling:
    """Hand calculations in docs/derivations/loads-speed-coupling.md; efficiencies from the IEC 60034-30-1 table."""

    def test_domain_example_30kw_1475_to_1500_rpm(self):
        # hand calculation (docs/derivations/loads-speed-coupling.md): 30 kW 4-pole 1475 -> 1500 rpm:
        # +5.2 % shaft power; (1500/1475)^3 = 1.0517
        p = shaft_power_at_speed_kw(30.0, 1475.0, 1500.0)
        assert_allclose(p / 30.0, 1.0517, atol=5e-5)
        assert_allclose(p / 30.0 - 1.0, 0.052, atol=5e-4)

    def test_domain_example_net_input_change(self):
        # hand calculation: with IE3 93.6 % -> IE4 94.9 % (IEC 60034-30-1 table, 30 kW 4-pole 50 Hz)
        # the net input change is +3.7 % (hand: 1.051714 x 0.936/0.949 = 1.037307)
        ratio = shaft_power_at_speed_kw(30.0, 1475.0, 1500.0) / 30.0 * 0.936 / 0.949
        assert_allclose(ratio, 1.037307, rtol=1e-6)

    def test_constant_torque_exponent(self):
        # hand calculation: 30 x 1500/1475 = 30.508475 kW
        assert_allclose(shaft_power_at_speed_kw(30.0, 1475.0, 1500.0, speed_exponent=1.0), 30.508475, rtol=1e-7)

    def test_fixed_point_matches_hand_iteration_and_bisection(self):
        # hand calculation (docs/derivations/loads-speed-coupling.md): n_new = 1500 - 0.5 P -> P = 30.595892 kW
        out = solve_speed_coupled_load(30.0, 1475.0, lambda p: 1500.0 - 0.5 * p)
        assert_allclose(out.shaft_p_kw, 30.595892, rtol=1e-7)
        assert_allclose(out.speed_rpm, 1484.702054, rtol=1e-9)
        assert_allclose(out.speed_ratio, 1484.702054 / 1475.0, rtol=1e-9)

    def test_two_induction_motors_against_brentq(self):
        # independent tool: scipy.optimize.brentq (scipy 1.x, xtol 1e-12) on P - P_ref (n_new(P)/n_ref)^3 = 0,
        # with n_new(P) from the new motor's model; checks the fixed-point solver, not the motor model
        old = calibrate_induction(30.0, 0.913, 0.85, 1460.0, 1500.0)
        new = calibrate_induction(30.0, 0.949, 0.84, 1480.0, 1500.0)
        p_ref = np.array([[30.0, 22.5, 12.0, 0.0]])
        n_ref = induction_speed_rpm(old, p_ref)
        out = solve_speed_coupled_load(p_ref, n_ref, lambda p: induction_speed_rpm(new, p))
        for j in range(3):
            root = brentq(
                lambda p: p - p_ref[0, j] * (induction_speed_rpm(new, p) / n_ref[0, j]) ** 3,
                0.5 * p_ref[0, j],
                1.5 * p_ref[0, j],
                xtol=1e-12,
            )
            assert_allclose(out.shaft_p_kw[0, j], root, rtol=1e-9)
        assert out.shaft_p_kw[0, 3] == 0.0
        # a lower-slip motor runs faster, so the centrifugal load rises
        assert np.all(out.shaft_p_kw[0, :3] > p_ref[0, :3])

    def test_fleet_layout_motors_by_steps_with_per_motor_exponent(self):
        # hand calculation: fixed speed 1500 rpm, per motor exponents 3 and 1, reference speed 1475 rpm
        p_ref = np.array([[30.0, 15.0], [30.0, 15.0]])
        out = shaft_power_at_speed_kw(p_ref, 1475.0, 1500.0, speed_exponent=np.array([3.0, 1.0]))
        assert_allclose(out, [[31.551424, 15.775712], [30.508475, 15.254237]], rtol=1e-6)

    def test_frame_layout_time_by_motors(self):
        idx = pd.date_range("2025-01-01", periods=2, freq="h", tz="Europe/Paris")
        frame = pd.DataFrame({"pump": [30.0, 15.0], "conveyor": [30.0, 15.0]}, index=idx)
        out = solve_speed_coupled_load(frame, 1475.0, lambda p: p * 0.0 + 1500.0, speed_exponent=np.array([3.0, 1.0]))
        assert isinstance(out.shaft_p_kw, pd.DataFrame) and out.shaft_p_kw.index.equals(idx)
        # hand calculation as above: constant new speed -> closed form
        assert_allclose(out.shaft_p_kw["pump"], [31.551424, 15.775712], rtol=1e-6)
        assert_allclose(out.shaft_p_kw["conveyor"], [30.508475, 15.254237], rtol=1e-6)

    def test_divergent_speed_relation_raises(self):
        with pytest.raises(ValueError, match="did not converge"):
            solve_speed_coupled_load(30.0, 1475.0, lambda p: 1500.0 + 200.0 * p)

    def test_missing_data_propagates(self):
        # NaN (missing step) stays NaN and does not block convergence of the other steps
        out = solve_speed_coupled_load(np.array([np.nan, 30.0]), 1475.0, lambda p: 1500.0 - 0.5 * np.nan_to_num(p))
        assert np.isnan(out.shaft_p_kw[0])
        # hand calculation (docs/derivations/loads-speed-coupling.md): 30.595892 kW
        assert_allclose(out.shaft_p_kw[1], 30.595892, rtol=1e-7)

    def test_negative_reference_power_raises(self):
        with pytest.raises(ValueError, match="ref_shaft_p_kw"):
            shaft_power_at_speed_kw(-1.0, 1475.0, 1500.0)

    def test_an_element_solved_alone_or_in_any_batch_gives_the_same_bits(self):
        # invariant of our own design (operate_site, Notes): each element stops on its own change, so a
        # light load solved beside loads over a thousand times larger, in another order or alone, gives the same
        # bits (a batch-wide stop would let the largest load set the tolerance of the others)
        old = calibrate_induction(30.0, 0.913, 0.85, 1460.0, 1500.0)
        new = calibrate_induction(30.0, 0.949, 0.84, 1480.0, 1500.0)

        def solve(p_ref):
            p_ref = np.asarray(p_ref, dtype=float)[None, :]
            return solve_speed_coupled_load(p_ref, induction_speed_rpm(old, p_ref),
                                            lambda p: induction_speed_rpm(new, p)).shaft_p_kw[0]

        batch = solve([0.02, 33.0, 12.0, 0.0, 29.0])
        assert solve([0.02])[0] == batch[0]
        assert solve([12.0, 0.02])[1] == batch[0]
        assert solve([29.0, 12.0])[1] == batch[2]
        assert solve([0.0])[0] == batch[3] == 0.0

    @settings(max_examples=50, deadline=None)
    @given(st.floats(0.0, 500.0), st.floats(0.005, 0.05), st.floats(0.0, 0.04))
    def test_fixed_point_satisfies_its_equation(self, p_ref, slip_new, slip_ref):
        # invariant: the returned load satisfies P = P_ref (n_new(P)/n_ref)^3 with n_new(P) the returned speed
        rated = 500.0
        out = solve_speed_coupled_load(p_ref, 1500.0 * (1 - slip_ref), lambda p: 1500.0 * (1 - slip_new * p / rated))
        assert_allclose(out.speed_rpm, 1500.0 * (1 - slip_new * out.shaft_p_kw / rated), rtol=1e-9)
        assert_allclose(out.shaft_p_kw, p_ref * (out.speed_rpm / (1500.0 * (1 - slip_ref))) ** 3, rtol=1e-8, atol=1e-8)


class TestRemedies:
    def test_per_motor_labels(self):
        # definition: "none" keeps the coupled load; trim/pulley and speed control restore the reference
        ref = np.array([[30.0, 20.0], [30.0, 20.0], [30.0, 20.0]])
        coupled = ref * 1.0517
        out = apply_speed_remedy(ref, coupled, ["none", "trim_or_pulley", "speed_control"])
        assert_allclose(out, [[31.551, 21.034], [30.0, 20.0], [30.0, 20.0]], rtol=1e-12)

    def test_unknown_label_raises(self):
        with pytest.raises(ValueError, match="remedy"):
            apply_speed_remedy(30.0, 31.0, "gearbox")


class TestThrottledToSpeedControl:
    """Hand calculation, docs/derivations/loads-throttled-to-speed-control.md (6-digit working, rtol 1e-5)."""

    def test_worked_case(self):
        out = throttled_to_speed_control(22.0, 30.0, 0.3)
        assert_allclose(out.flow_frac, 0.555556, rtol=1e-5)
        assert_allclose(out.speed_frac, 0.693889, rtol=1e-5)
        assert_allclose(out.shaft_p_kw, 8.957, rtol=1e-4)

    def test_parts_of_the_worked_case(self):
        assert_allclose(throttled_flow_frac(22.0, 30.0), 0.555556, rtol=1e-5)
        assert_allclose(system_head_frac(5.0 / 9.0, 0.3), 0.516049, rtol=1e-5)
        assert_allclose(speed_frac_for_flow(5.0 / 9.0, 0.3), 0.693889, rtol=1e-5)
        assert_allclose(pump_efficiency_ratio(5.0 / 9.0, 0.693889), 0.960256, rtol=1e-5)
        assert_allclose(speed_controlled_shaft_frac(5.0 / 9.0, 0.3), 0.298560, rtol=1e-5)

    def test_static_head_beats_bare_cube_law(self):
        # hand calculation: the cube law alone would give 30 (5/9)^3 = 5.144 kW < 8.957 kW with 30 % static head
        out = throttled_to_speed_control(22.0, 30.0, 0.3)
        assert out.shaft_p_kw > 5.144

    def test_no_static_head_is_cube_law(self):
        # hand calculation: h_s = 0 -> r = q and P/P_d = q^3; at q = 0.5: 0.125
        assert_allclose(speed_controlled_shaft_frac(0.5, 0.0), 0.125, rtol=1e-12)
        assert_allclose(speed_frac_for_flow(0.5, 0.0), 0.5, rtol=1e-12)

    def test_pure_static_head_flat_pump(self):
        # hand calculation: h_s = 1, h0 = 1 -> r = 1, P/P_d = 1/(2 - q); at q = 0.5: 0.666667
        assert_allclose(speed_controlled_shaft_frac(0.5, 1.0, shutoff_head_pu=1.0), 0.666667, rtol=1e-6)

    def test_dead_headed_and_off(self):
        # hand calculation: throttled 5 kW <= p0 P_d = 12 kW -> q = 0, r = 0.5, P = 30 x 0.075 = 2.25 kW; 0 kW -> off
        out = throttled_to_speed_control(np.array([5.0, 0.0]), 30.0, 0.3)
        assert_allclose(out.shaft_p_kw, [2.25, 0.0], rtol=1e-12)
        assert_allclose(out.speed_frac, [0.5, 0.0], rtol=1e-12)

    def test_design_point_is_unchanged(self):
        # definition: at design flow the speed-controlled pump runs at full speed and design power
        out = throttled_to_speed_control(30.0, 30.0, np.array([0.0, 0.5, 1.0]))
        assert_allclose(out.shaft_p_kw, 30.0, rtol=1e-12)
        assert_allclose(out.speed_frac, 1.0, rtol=1e-12)

    def test_fleet_layout_per_motor_parameters(self):
        # motors x steps with per-motor static head; row 0 is the worked case, row 1 friction only (cube law)
        load = np.array([[22.0, 30.0], [22.0, 30.0]])
        out = throttled_to_speed_control(load, 30.0, np.array([0.3, 0.0]))
        assert_allclose(out.shaft_p_kw[0], [8.957, 30.0], rtol=1e-4)
        # hand calculation: 30 (5/9)^3 = 5.144033 kW
        assert_allclose(out.shaft_p_kw[1], [5.144033, 30.0], rtol=1e-6)

    def test_series_input(self):
        idx = pd.date_range("2025-01-01", periods=2, freq="h", tz="UTC")
        out = throttled_to_speed_control(pd.Series([22.0, 0.0], index=idx), 30.0, 0.3)
        assert isinstance(out.shaft_p_kw, pd.Series) and out.shaft_p_kw.index.equals(idx)

    @settings(max_examples=60, deadline=None)
    @given(st.floats(0.0, 0.99), st.floats(0.0, 0.99), st.floats(1.0, 1.4), st.floats(1e-3, 1e-2))
    def test_power_rises_with_flow_and_static_head_up_to_design(self, q, h_s, h0, step):
        # invariant: more flow, or more static head at the same flow, never needs less shaft power;
        # never more than design power (flow <= design)
        base = speed_controlled_shaft_frac(q, h_s, h0)
        assert speed_controlled_shaft_frac(q + step, h_s, h0) >= base - 1e-12
        assert speed_controlled_shaft_frac(q, h_s + step, h0) >= base - 1e-12
        assert 0.0 <= base <= 1.0 + 1e-12

    @settings(max_examples=60, deadline=None)
    @given(st.floats(0.0, 1.0), st.floats(0.0, 1.0))
    def test_operating_point_lies_on_both_curves(self, q, h_s):
        # invariant: at speed r the affinity-scaled pump curve r^2 h0 - (h0 - 1) q^2 meets the system curve
        h0 = 1.2
        r = speed_frac_for_flow(q, h_s, h0)
        assert_allclose(r * r * h0 - (h0 - 1.0) * q * q, system_head_frac(q, h_s), rtol=1e-12, atol=1e-12)
        assert q <= r + 1e-12

    def test_bad_parameters_raise(self):
        with pytest.raises(ValueError, match="static_head_frac"):
            throttled_to_speed_control(22.0, 30.0, 1.5)
        with pytest.raises(ValueError, match="design_shaft_p_kw"):
            throttled_to_speed_control(22.0, 0.0, 0.3)
        with pytest.raises(ValueError, match="shutoff_head_pu"):
            throttled_to_speed_control(22.0, 30.0, 0.3, shutoff_head_pu=0.9)
        with pytest.raises(ValueError, match="zero_flow_power_frac"):
            throttled_to_speed_control(22.0, 30.0, 0.3, zero_flow_power_frac=1.0)
        with pytest.raises(ValueError, match="throttled_shaft_p_kw"):
            throttled_to_speed_control(-1.0, 30.0, 0.3)


class TestSpeedRiseEffect:
    def test_series_of_one_motor(self):
        # hand calculation: 24 h at 30 kW, speed 1475 -> 1500 rpm: extra 1.551424 kW x 24 h = 37.234 kWh, 5.17 %
        idx = pd.date_range("2025-01-01", periods=24, freq="h", tz="Europe/Berlin")
        ref = pd.Series(30.0, index=idx)
        new = shaft_power_at_speed_kw(ref, 1475.0, 1500.0)
        out = speed_rise_effect(ref, new, interval_h=1.0)
        assert isinstance(out.extra_shaft_p_kw, pd.Series)
        assert_allclose(out.extra_shaft_energy_kwh, 37.234178, rtol=1e-6)
        assert_allclose(out.extra_shaft_energy_frac, 0.0517141, rtol=1e-5)

    def test_fleet_array_and_quarter_hours(self):
        # hand calculation: motor 0: (1 + 2) kW x 0.25 h = 0.75 kWh over 30 kWh reference x 0.25 = 7.5 kWh -> 0.1;
        # motor 1 never runs: 0 kWh, fraction NaN
        ref = np.array([[10.0, 20.0], [0.0, 0.0]])
        new = np.array([[11.0, 22.0], [0.0, 0.0]])
        out = speed_rise_effect(ref, new, interval_h=0.25)
        assert_allclose(out.extra_shaft_energy_kwh, [0.75, 0.0], rtol=1e-12)
        assert_allclose(out.extra_shaft_energy_frac[0], 0.1, rtol=1e-12)
        assert np.isnan(out.extra_shaft_energy_frac[1])

    def test_frame_gives_one_value_per_column(self):
        idx = pd.date_range("2025-01-01", periods=2, freq="h", tz="UTC")
        ref = pd.DataFrame({"a": [10.0, 10.0], "b": [5.0, 5.0]}, index=idx)
        out = speed_rise_effect(ref, ref * 1.1)
        # hand calculation: a: 2 h x 1 kW = 2 kWh; b: 2 h x 0.5 kW = 1 kWh; both 10 %
        assert_allclose(out.extra_shaft_energy_kwh[["a", "b"]], [2.0, 1.0], rtol=1e-12)
        assert_allclose(out.extra_shaft_energy_frac, [0.1, 0.1], rtol=1e-12)

    def test_mismatched_shapes_raise(self):
        with pytest.raises(ValueError, match="same shape"):
            speed_rise_effect(np.ones(3), np.ones(4))


class TestRatioPower:
    def test_cube_and_first_power_and_others(self):
        # numpy.power as reference: within an ulp for the cube, exact for the first power and others
        from models.loads import ratio_power

        ratio = np.random.default_rng(3).uniform(0.5, 1.5, (4, 1000))
        k = np.array([[3.0], [1.0], [2.5], [3.0]])
        out = ratio_power(ratio, k)
        assert_allclose(out, np.power(ratio, k), rtol=2.3e-16 * 2, atol=0)
        np.testing.assert_array_equal(out[1], ratio[1])
        np.testing.assert_array_equal(out[2], np.power(ratio[2], 2.5))
        np.testing.assert_array_equal(out[0], ratio[0] * ratio[0] * ratio[0])
        assert ratio_power(1.5, 3.0) == 3.375  # hand calculation: 1.5^3 = 3.375 exactly
        assert ratio_power(np.array([2.0]), np.array([[3.0], [1.0]])).tolist() == [[8.0], [2.0]]
