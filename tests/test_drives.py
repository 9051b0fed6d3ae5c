"""Tests for models.drives: CDM losses and classes (IEC 61800-9-2), IEEE 1459 supply quantities, added drives.

Sources: IEC 61800-9-2:2017 (CDM points, clause 5, and class limits) and IEEE Std 1459-2010 with
PF = DPF/sqrt(1 + THD_I²) (numeric checks); hand calculations in
docs/derivations/drives-cdm-losses-and-ieee1459.md. The reference CDM loss (4 % of rated kVA) and the
class levels are from memory (module constants), so tests built on them check the model's arithmetic,
not the standard's table.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose

from models.drives import (
    CDM_OPERATING_POINTS_PCT,
    DriveLossShape,
    cdm_relative_loss_frac,
    cdm_standard_point_losses_kw,
    drive_class_from_loss,
    drive_losses_kw,
    drive_rated_s_kva_for_motor,
    induction_motor_with_added_drive,
    pwm_extra_motor_loss_kw,
    supply_side_powers,
    true_power_factor,
)

# Hand calculations are carried to 6-7 significant figures; 1e-6 relative covers their rounding.
HAND_RTOL = 1e-6


class TestCdmOperatingPoints:
    def test_points_are_the_eight_of_the_standard(self):
        # published: IEC 61800-9-2:2017 CDM points, clause 5
        assert CDM_OPERATING_POINTS_PCT == (
            (0, 25), (0, 50), (0, 100), (50, 25), (50, 50), (50, 100), (90, 50), (90, 100),
        )

    def test_ie2_100kva_point_losses(self):
        # hand calculation, see docs/derivations/drives-cdm-losses-and-ieee1459.md (table)
        expected = [0.621193, 0.977157, 1.898477, 0.663071, 1.060914, 2.065990, 1.127919, 2.2]
        table = cdm_standard_point_losses_kw(100.0, "IE2")
        assert list(table.columns) == [f"({f}, {i})" for f, i in CDM_OPERATING_POINTS_PCT]
        assert_allclose(table.iloc[0].to_numpy(), expected, rtol=HAND_RTOL)

    def test_class_sets_level_at_90_100(self):
        # hand calculation, see docs/derivations/drives-cdm-losses-and-ieee1459.md: IE1 4.0, IE0 5.6 kW
        assert_allclose(drive_losses_kw(100.0, 0.9, 1.0, ["IE1", "IE0"]), [4.0, 5.6], rtol=HAND_RTOL)

    def test_relative_loss_is_loss_over_rating(self):
        # hand calculation, see docs/derivations/drives-cdm-losses-and-ieee1459.md: 2.2 kW / 100 kVA
        assert_allclose(cdm_relative_loss_frac(0.9, 1.0, "IE2"), 0.022, rtol=HAND_RTOL)

    def test_standby_loss_at_zero_current(self):
        # hand calculation: g(0, 0) = 0.15, loss = 2.2 · 0.15 / 0.985 for a 100 kVA IE2 drive
        assert_allclose(drive_losses_kw(100.0, 0.0, 0.0, "IE2"), 2.2 * 0.15 / 0.985, rtol=HAND_RTOL)


class TestDriveLossInvariants:
    @settings(max_examples=60, deadline=None)
    @given(
        f=st.floats(0.0, 1.5), i1=st.floats(0.0, 2.0), i2=st.floats(0.0, 2.0),
        cls=st.sampled_from(["IE0", "IE1", "IE2"]),
    )
    def test_losses_monotone_in_current(self, f, i1, i2, cls):
        lo, hi = sorted((i1, i2))
        assert drive_losses_kw(50.0, f, lo, cls) <= drive_losses_kw(50.0, f, hi, cls) + 1e-12

    @settings(max_examples=60, deadline=None)
    @given(f1=st.floats(0.0, 1.5), f2=st.floats(0.0, 1.5), i=st.floats(0.0, 2.0))
    def test_losses_non_decreasing_in_frequency(self, f1, f2, i):
        lo, hi = sorted((f1, f2))
        assert drive_losses_kw(50.0, lo, i) <= drive_losses_kw(50.0, hi, i) + 1e-12

    def test_class_order_at_every_point(self):
        table = cdm_standard_point_losses_kw([80.0, 80.0, 80.0], ["IE2", "IE1", "IE0"]).to_numpy()
        assert np.all(table[0] < table[1]) and np.all(table[1] < table[2])

    def test_losses_scale_with_rating(self):
        # p_L is relative to rated kVA, so doubling the rating doubles the loss at the same point
        assert_allclose(drive_losses_kw(200.0, 0.5, 0.5), 2.0 * drive_losses_kw(100.0, 0.5, 0.5), rtol=1e-12)

    def test_magnetising_current_adds_loss(self):
        assert drive_losses_kw(100.0, 0.5, 0.5, magnetising_current_frac=0.3) > drive_losses_kw(100.0, 0.5, 0.5)

    def test_custom_shape_normalised_at_class_point(self):
        shape = DriveLossShape(constant=0.0, linear=0.0, quadratic=1.0, frequency_current=0.0)
        # with a pure I² shape, the (90, 100) loss is still k·p_ref·S and (0, 50) is a quarter of it
        assert_allclose(drive_losses_kw(100.0, [0.9, 0.0], [1.0, 0.5], "IE1", shape=shape), [4.0, 1.0], rtol=1e-12)


class TestDriveClassFromLoss:
    @pytest.mark.parametrize(
        "loss_kw, expected",
        [
            (2.99, "IE2"),  # published rule (IEC 61800-9-2:2017): > 25 % below reference 4.0 kW -> IE2
            (3.0, "IE1"),  # boundary: exactly 25 % below is not "more than", stays IE1
            (4.0, "IE1"),
            (5.0, "IE1"),  # boundary: exactly 25 % above stays IE1
            (5.01, "IE0"),  # more than 25 % above -> IE0
        ],
    )
    def test_boundaries_100kva(self, loss_kw, expected):
        # hand calculation, see docs/derivations/drives-cdm-losses-and-ieee1459.md (limits 3.0 / 5.0 kW)
        assert drive_class_from_loss(loss_kw, 100.0) == expected

    def test_vectorised(self):
        out = drive_class_from_loss(np.array([1.0, 4.0, 9.0]), 100.0)
        assert out.tolist() == ["IE2", "IE1", "IE0"]

    def test_model_levels_fall_in_their_own_class(self):
        losses = drive_losses_kw(100.0, 0.9, 1.0, ["IE0", "IE1", "IE2"])
        assert drive_class_from_loss(losses, 100.0).tolist() == ["IE0", "IE1", "IE2"]

    def test_negative_loss_raises(self):
        with pytest.raises(ValueError, match="loss_at_90_100_kw"):
            drive_class_from_loss(-1.0, 100.0)


class TestTruePowerFactor:
    @pytest.mark.parametrize(
        "dpf, thd, expected",
        [
            (0.97, 0.40, 0.9006),  # published check, PF = DPF/sqrt(1 + THD²) (DPF 0.97, THD 40 %)
            (0.97, 0.90, 0.721),  # published check, same relation (THD 90 %)
            (0.90, 0.0, 0.90),  # published check, same relation (no distortion)
        ],
    )
    def test_reference_checks(self, dpf, thd, expected):
        # the checks are rounded to 4 (or 3) decimals; abs 6e-4 covers that rounding
        assert_allclose(true_power_factor(dpf, thd), expected, atol=6e-4)

    def test_voltage_distortion(self):
        # hand calculation, see docs/derivations/drives-cdm-losses-and-ieee1459.md: 0.899499
        assert_allclose(true_power_factor(0.97, 0.40, 0.05), 0.899499, rtol=HAND_RTOL)

    def test_invalid_dpf_raises(self):
        with pytest.raises(ValueError, match="dpf must lie in"):
            true_power_factor(1.2, 0.4)

    def test_negative_thd_raises(self):
        with pytest.raises(ValueError, match="thd_i_frac"):
            true_power_factor(0.97, -0.1)

    def test_nan_raises(self):
        with pytest.raises(ValueError, match="finite"):
            true_power_factor(np.nan, 0.4)


class TestSupplySidePowers:
    def test_hand_example(self):
        # hand calculation, see docs/derivations/drives-cdm-losses-and-ieee1459.md (P = 100 kW)
        s = supply_side_powers(100.0, 0.97, 0.40)
        assert_allclose(s.s1_kva, 103.0928, rtol=1e-6)
        assert_allclose(s.q_kvar, 25.0624, rtol=1e-5)
        assert_allclose(s.distortion_power_kvar, 41.2371, rtol=1e-5)
        assert_allclose(s.s_kva, 111.0343, rtol=1e-6)
        assert_allclose(s.power_factor, 0.900622, rtol=1e-6)
        assert_allclose(s.nonactive_power_kvar, 48.2558, rtol=1e-5)

    def test_nonactive_split_with_sinusoidal_voltage(self):
        # IEEE Std 1459-2010 decomposition: with THD_V = 0, N² = Q1² + D_I²
        s = supply_side_powers(np.array([10.0, 55.0]), 0.95, np.array([0.3, 1.0]))
        assert_allclose(s.nonactive_power_kvar ** 2, s.q_kvar ** 2 + s.distortion_power_kvar ** 2, rtol=1e-12)

    def test_series_in_series_out(self):
        idx = pd.date_range("2026-01-01", periods=3, freq="h", tz="Europe/Madrid")
        p = pd.Series([0.0, 10.0, 20.0], index=idx)
        s = supply_side_powers(p, 0.97, 0.4)
        assert isinstance(s.q_kvar, pd.Series) and s.q_kvar.index.equals(idx)
        assert isinstance(s.s_kva, pd.Series)

    def test_negative_power_raises(self):
        with pytest.raises(ValueError, match="p_kw"):
            supply_side_powers(-1.0, 0.97, 0.4)


class TestPwmExtraLoss:
    def test_default_fraction(self):
        # common practice constant PWM_EXTRA_LOSS_FRAC = 0.10 (from memory): 10 % of 2 kW
        assert_allclose(pwm_extra_motor_loss_kw(2.0), 0.2, rtol=1e-12)

    def test_fraction_out_of_range_raises(self):
        with pytest.raises(ValueError, match="extra_loss_frac"):
            pwm_extra_motor_loss_kw(2.0, 1.5)


class TestInductionMotorWithAddedDrive:
    def test_hand_example(self):
        # hand calculation, see docs/derivations/drives-cdm-losses-and-ieee1459.md (added drive)
        r = induction_motor_with_added_drive(50.0, 0.8, 0.6, 75.0, motor_losses_kw=3.0)
        assert_allclose(r.drive_loss_kw, 1.067068, rtol=HAND_RTOL)
        assert_allclose(r.pwm_extra_loss_kw, 0.3, rtol=1e-12)
        assert_allclose(r.p_kw, 51.367068, rtol=HAND_RTOL)
        assert_allclose(r.q_kvar, 12.873801, rtol=HAND_RTOL)
        assert_allclose(r.s_kva, 57.035078, rtol=HAND_RTOL)
        assert_allclose(r.drive_current_frac, 0.662118, rtol=HAND_RTOL)

    def test_supply_power_is_motor_plus_losses(self):
        p_motor = np.array([[10.0, 20.0, 0.0], [30.0, 40.0, 50.0]])
        r = induction_motor_with_added_drive(p_motor, 0.7, 0.5, np.array([30.0, 60.0]), motor_losses_kw=1.0)
        assert_allclose(r.p_kw, p_motor + r.drive_loss_kw + r.pwm_extra_loss_kw, rtol=1e-12)
        assert r.drive_loss_kw.shape == (2, 3)
        # per-asset rating broadcasts as rating[:, None]: the bigger drive has the bigger standby loss
        assert np.all(r.drive_loss_kw[1] > r.drive_loss_kw[0])

    def test_dataframe_in_dataframe_out(self):
        idx = pd.date_range("2026-01-01", periods=4, freq="h", tz="UTC")
        p = pd.DataFrame({"m1": [10.0, 11, 12, 13], "m2": [20.0, 21, 22, 23]}, index=idx)
        r = induction_motor_with_added_drive(p, 0.8, 0.6, np.array([20.0, 40.0]))
        assert isinstance(r.p_kw, pd.DataFrame)
        assert r.p_kw.index.equals(idx) and list(r.p_kw.columns) == ["m1", "m2"]
        # column m2 uses the second rating (40 kVA): same current, larger drive -> larger loss
        assert np.all(r.drive_loss_kw["m2"] > r.drive_loss_kw["m1"])

    def test_no_motor_losses_means_no_pwm_term(self):
        r = induction_motor_with_added_drive(10.0, 0.5, 0.5, 15.0)
        assert_allclose(r.pwm_extra_loss_kw, 0.0, atol=0)

    def test_torque_out_of_range_raises(self):
        with pytest.raises(ValueError, match="torque_frac"):
            induction_motor_with_added_drive(10.0, 0.5, 3.0, 15.0)

    def test_unknown_class_raises(self):
        with pytest.raises(ValueError, match="drive_class"):
            induction_motor_with_added_drive(10.0, 0.5, 0.5, 15.0, drive_class="IE3")


class TestRatedKva:
    def test_motor_rated_kva(self):
        # hand calculation: 90 / (0.9 · 0.8) = 125 kVA
        assert_allclose(drive_rated_s_kva_for_motor(90.0, 0.9, 0.8), 125.0, rtol=1e-12)

    def test_efficiency_one_raises(self):
        with pytest.raises(ValueError, match="rated_efficiency_frac"):
            drive_rated_s_kva_for_motor(90.0, 1.0, 0.8)
