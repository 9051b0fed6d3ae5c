"""Synchronous machines: line-start PM motors, PM and synchronous-reluctance motors on a drive, and
wound-field synchronous motors (WFSM) with their reactive-power control.

Scope: steady-state operating points per asset and interval, as pure vectorised functions. Line-start PM
(LSPM) motors run on the line at synchronous speed with fixed magnet excitation; PM and SynRM motors run
on a drive whose input is what the site meter sees (drive losses and supply-side powers come from
:mod:`models.drives`); a WFSM follows the phasor model V = E_f + (R_a + jX_s)·I and sets its reactive power
by a power-factor setpoint, a kvar setpoint, or by following the site meter, always inside its stator
current, field current and load-angle limits. A starting screen flags LSPM applications that need the
supplier's synchronisation check. Equations, defaults and their sources: docs/models-synchronous.md.

Array shapes: per-asset values ``(n,)``; per-interval values ``(n, t)``; per-asset arrays broadcast as
``value[:, None]``. A pandas Series comes back as a Series with the same index; a DataFrame is read as
rows = time, columns = assets and comes back the same way.

Signs (docs/conventions.md): consumer view; ``q_kvar`` > 0 lagging (absorbed), < 0 leading (supplied to
the site). Power factors are unsigned with a separate ``leading`` flag.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

import numba
import numpy as np
import pandas as pd

from models.drives import (
    DEFAULT_DRIVE_LOSS_SHAPE,
    FRONT_END_DEFAULTS,
    DriveLossShape,
    _blockwise,
    _cdm_inputs,
    _cdm_kernel,
    _check_range,
    _Kind,
    _per_asset,
    _Ieee1459Quantities,
    _q1_kernel,
    _supply_inputs,
    true_power_factor,
    drive_rated_s_kva_for_motor,
)
from models.wording import counted

SQRT3 = float(np.sqrt(3.0))


# --------------------------------------------------------------------------------------------------
# Common relations
# --------------------------------------------------------------------------------------------------
def synchronous_speed_rpm(f_hz, poles):
    """Return the synchronous speed of a rotating field.

    Parameters
    ----------
    f_hz : float or array_like
        Supply (stator) frequency [Hz], > 0.
    poles : int or array_like
        Number of poles [-], a positive even integer.

    Returns
    -------
    float or ndarray
        n_s = 120·f / p [rpm].

    Raises
    ------
    ValueError
        For a non-positive frequency or a pole number that is not a positive even integer.

    Notes
    -----
    n_s = 120·f/p, Eq. in Ch. 4 of [1] (speed table: Engineering ToolBox, "Slip in electrical induction
    motors"). A synchronous motor runs at n_s at every load.

    References
    ----------
    [1] S. J. Chapman, *Electric Machinery Fundamentals*, 4th ed. New York, NY, USA: McGraw-Hill, 2005.

    Examples
    --------
    >>> float(synchronous_speed_rpm(50.0, 4))
    1500.0
    """
    f = np.asarray(f_hz, dtype=float)
    p = np.asarray(poles, dtype=float)
    _check_range("f_hz", f, 0.0, np.inf, lo_open=True, unit="Hz")
    _check_range("poles", p, 2.0, np.inf)
    if np.any(p % 2 != 0):
        raise ValueError(f"poles must be a positive even integer; got {p[p % 2 != 0].flat[0]!r}")
    out = 120.0 * f / p
    return out[()] if out.ndim == 0 else out


def reactive_power_to_reach_power_factor_kvar(p_kw, q_kvar, target_power_factor):
    """Return the reactive power to add so that (p, q) reaches a lagging target power factor.

    Parameters
    ----------
    p_kw : float or array_like
        Active power at the meter [kW], >= 0.
    q_kvar : float or array_like
        Reactive power at the meter before the addition [kvar] (> 0 lagging).
    target_power_factor : float or array_like
        Target lagging power factor [-], (0, 1].

    Returns
    -------
    float or ndarray
        Reactive power to add [kvar]; negative means supply (capacitive, leading), the consumer-sign
        form of Q_c = P·(tan phi_1 - tan phi_2).

    Notes
    -----
    Q_add = P·tan(acos PF_target) - Q, the power-factor-correction formula Q_c = P·(tan phi_1 - tan phi_2)
    (published; worked checks on nodeandvolt.com) written in the tool's sign convention.

    Examples
    --------
    100 kW at 0.75 lagging to 0.95 needs about 55.3 kvar supplied (published check, nodeandvolt.com):

    >>> round(float(reactive_power_to_reach_power_factor_kvar(100.0, 88.19171, 0.95)), 1)
    -55.3
    """
    p = np.asarray(p_kw, dtype=float)
    q = np.asarray(q_kvar, dtype=float)
    pf = np.asarray(target_power_factor, dtype=float)
    _check_range("p_kw", p, 0.0, np.inf, unit="kW")
    _check_range("q_kvar", q, -np.inf, np.inf, unit="kvar")
    _check_range("target_power_factor", pf, 0.0, 1.0, lo_open=True)
    out = p * np.sqrt(1.0 - pf * pf) / pf - q
    return out[()] if out.ndim == 0 else out


def power_angle_p_kw(v_ph_v, e_f_ph_v, synchronous_reactance_ohm, load_angle_deg):
    """Return the three-phase power of a round-rotor synchronous machine at a load angle.

    Parameters
    ----------
    v_ph_v : float or array_like
        Terminal phase voltage [V], > 0 (phase of the connection the reactance refers to).
    e_f_ph_v : float or array_like
        Excitation EMF per phase [V], >= 0.
    synchronous_reactance_ohm : float or array_like
        Synchronous reactance per phase [ohm], > 0.
    load_angle_deg : float or array_like
        Load (torque) angle delta by which E_f lags V [deg].

    Returns
    -------
    float or ndarray
        P = 3·V·E_f·sin(delta)/X_s [kW] (R_a neglected).

    Notes
    -----
    Power-angle equation, Ch. 5 of [1]. Maximum (pull-out) at delta = 90°.

    References
    ----------
    [1] S. J. Chapman, *Electric Machinery Fundamentals*, 4th ed. McGraw-Hill, 2005.

    Examples
    --------
    >>> round(float(power_angle_p_kw(230.0, 230.0, 1.0, 90.0)), 2)
    158.7
    """
    v = np.asarray(v_ph_v, dtype=float)
    e = np.asarray(e_f_ph_v, dtype=float)
    x = np.asarray(synchronous_reactance_ohm, dtype=float)
    _check_range("v_ph_v", v, 0.0, np.inf, lo_open=True, unit="V")
    _check_range("e_f_ph_v", e, 0.0, np.inf, unit="V")
    _check_range("synchronous_reactance_ohm", x, 0.0, np.inf, lo_open=True, unit="ohm")
    out = 3.0 * v * e * np.sin(np.radians(np.asarray(load_angle_deg, dtype=float))) / x / 1e3
    return out[()] if out.ndim == 0 else out


@dataclass(frozen=True)
class LossSplit:
    """Split of a machine's rated losses by kind, as fractions of the total rated loss.

    Parameters
    ----------
    stator_copper : float
        Stator I²R loss share [-], scales with stator current squared.
    core : float
        Iron (core) loss share [-]; constant on the line, ∝ speed^1.5 on a drive.
    friction_windage : float
        Friction and windage share [-]; constant at synchronous speed, ∝ speed on a drive.
    stray_load : float
        Additional (stray) load loss share [-], ∝ torque squared (IEC 60034-2-1 convention).
    """

    stator_copper: float
    core: float
    friction_windage: float
    stray_load: float

    def __post_init__(self) -> None:
        parts = (self.stator_copper, self.core, self.friction_windage, self.stray_load)
        if min(parts) < 0 or abs(sum(parts) - 1.0) > 1e-9:
            raise ValueError(f"LossSplit shares must be >= 0 and sum to 1; got {parts} (sum {sum(parts)})")


# --------------------------------------------------------------------------------------------------
# Line-start PM motor
# --------------------------------------------------------------------------------------------------
#: LSPM rated-loss split. Common practice (assumption, see docs/models-synchronous.md): no magnetising
#: current and no rotor copper loss at synchronous speed, so the stator copper and stray shares carry
#: most of the loss; core and friction (30 % together) stay constant on the line.
LSPM_LOSS_SPLIT = LossSplit(stator_copper=0.55, core=0.22, friction_windage=0.08, stray_load=0.15)
#: Default LSPM rated power factor. From memory / common practice: catalogue LSPMs show 0.90-0.97.
LSPM_RATED_POWER_FACTOR = 0.95
#: Default LSPM synchronous reactance on the rated input kVA base. From memory, round-rotor equivalent
#: of a buried-magnet rotor (0.4-1.0 pu).
LSPM_SYNCHRONOUS_REACTANCE_PU = 0.6


@dataclass(frozen=True)
class LineStartPMResult:
    """LSPM operating point (arrays of the kind of the shaft-power input).

    Attributes
    ----------
    p_in_kw : electrical input [kW].
    q_kvar : reactive power [kvar] (> 0 lagging).
    leading : True where the current leads the voltage.
    speed_rpm : shaft speed = synchronous speed [rpm].
    load_angle_deg : angle by which the magnet EMF lags the terminal voltage [deg].
    p_shaft_kw : shaft power, as given [kW].
    stator_copper_loss_kw, core_loss_kw, friction_windage_loss_kw, stray_load_loss_kw : losses [kW].
    s_kva, power_factor, efficiency_frac, total_loss_kw : derived on access (properties).
    """

    p_in_kw: object
    q_kvar: object
    leading: object
    speed_rpm: object
    load_angle_deg: object
    p_shaft_kw: object
    stator_copper_loss_kw: object
    core_loss_kw: object
    friction_windage_loss_kw: object
    stray_load_loss_kw: object

    @property
    def s_kva(self):
        """Apparent power [kVA]."""
        return np.sqrt(self.p_in_kw * self.p_in_kw + self.q_kvar * self.q_kvar)

    @property
    def power_factor(self):
        """Unsigned power factor P/S [-]."""
        return _safe_ratio(self.p_in_kw, self.s_kva)

    @property
    def efficiency_frac(self):
        """Shaft / input [-]."""
        return _safe_ratio(self.p_shaft_kw, self.p_in_kw)

    @property
    def total_loss_kw(self):
        """Sum of the losses [kW]."""
        return self.stator_copper_loss_kw + self.core_loss_kw + self.friction_windage_loss_kw + self.stray_load_loss_kw


def _safe_ratio(num, den):
    """num / den with 0 where den is 0 (works for numpy arrays and pandas objects)."""
    return num / (den + (den == 0))


def _split_array(split: LossSplit, name: str, nd: int) -> np.ndarray:
    return _per_asset(np.asarray(getattr(split, name), dtype=float), nd)


def lspm_operating_point(p_shaft_kw, rated_p_kw, rated_efficiency_frac, poles, f_hz=50.0, *,
                         rated_power_factor=LSPM_RATED_POWER_FACTOR, rated_leading=False,
                         synchronous_reactance_pu=LSPM_SYNCHRONOUS_REACTANCE_PU, supply_voltage_pu=1.0,
                         loss_split: LossSplit = LSPM_LOSS_SPLIT) -> LineStartPMResult:
    """Return the operating point of a line-start PM motor on a sinusoidal supply.

    Parameters
    ----------
    p_shaft_kw : float, array_like, Series or DataFrame
        Shaft power demanded by the load [kW], >= 0. Shape ``(n,)`` or ``(n, t)``.
    rated_p_kw : float or array_like
        Rated shaft power [kW], > 0, per asset.
    rated_efficiency_frac : float or array_like
        Rated full-load efficiency [-], (0, 1): the IE4 or IE5 level of the motor (see
        :func:`models.efficiency_classes.min_efficiency_pct`; IE5 ≈ 20 % fewer losses than IE4, from memory).
    poles : int or array_like
        Number of poles [-].
    f_hz : float or array_like, optional
        Supply frequency [Hz]; default 50.
    rated_power_factor : float or array_like, optional
        Power factor at rated load [-], (0, 1]; default :data:`LSPM_RATED_POWER_FACTOR` (from memory).
    rated_leading : bool or array_like, optional
        True when the rated power factor is leading; default False (lagging).
    synchronous_reactance_pu : float or array_like, optional
        Synchronous reactance on the rated input kVA base [pu], > 0; default
        :data:`LSPM_SYNCHRONOUS_REACTANCE_PU` (from memory).
    supply_voltage_pu : float or array_like, optional
        Supply voltage relative to rated [-], 0.8-1.2; default 1.
    loss_split : LossSplit, optional
        Rated-loss split; default :data:`LSPM_LOSS_SPLIT` (common practice).

    Returns
    -------
    LineStartPMResult

    Raises
    ------
    ValueError
        For inputs out of range, or a shaft power above pull-out (the motor would lose synchronism).

    Notes
    -----
    Speed n = 120·f/p at every load (no slip). Losses: the rated loss L_r = P_r·(1/eta_r - 1) is split by
    ``loss_split``; stator copper ∝ I², stray ∝ T², core ∝ V², friction and windage constant. The
    magnet EMF E_0 is fixed by the rated point of the round-rotor phasor model V = E_0 + jX_s·I [1]
    (R_a neglected for the reactive power; per unit on S_b = P_r/(eta_r·PF_r)):

        E_0 = |1 - x·Q_r - j·x·P_r|,  P_r = PF_r,  Q_r = ±sqrt(1 - PF_r²).

    At any input P (pu): sin(delta) = P·x/(V·E_0), Q = (V² - V·E_0·cos delta)/x ([1], Ch. 5). The
    copper loss needs the current, which needs P: three fixed-point steps converge (copper is a few
    per cent of input); input = shaft + losses holds exactly. At rated load the model returns the rated
    efficiency and power factor.

    References
    ----------
    [1] S. J. Chapman, *Electric Machinery Fundamentals*, 4th ed. McGraw-Hill, 2005, Ch. 5.

    Examples
    --------
    A 15 kW 4-pole LSPM at IE4 level (93.9 %, IEC 60034-30-1) at rated load:

    >>> r = lspm_operating_point(15.0, 15.0, 0.939, 4)
    >>> float(r.speed_rpm), round(float(r.efficiency_frac), 3), round(float(r.power_factor), 3)
    (1500.0, 0.939, 0.95)
    """
    kind = _Kind(p_shaft_kw)
    p = kind.arr(p_shaft_kw)
    _check_range("p_shaft_kw", p, 0.0, np.inf, unit="kW")
    nd = p.ndim
    pr = _per_asset(rated_p_kw, nd)
    eta = _per_asset(rated_efficiency_frac, nd)
    pf = _per_asset(rated_power_factor, nd)
    x = _per_asset(synchronous_reactance_pu, nd)
    v = (kind.arr(supply_voltage_pu) if isinstance(supply_voltage_pu, pd.DataFrame)
         else _per_asset(supply_voltage_pu, nd))
    lead = _per_asset(np.asarray(rated_leading, dtype=bool), nd)
    _check_range("rated_p_kw", pr, 0.0, np.inf, lo_open=True, unit="kW")
    _check_range("rated_efficiency_frac", eta, 0.0, 1.0, lo_open=True, hi_open=True)
    _check_range("rated_power_factor", pf, 0.0, 1.0, lo_open=True)
    _check_range("synchronous_reactance_pu", x, 0.0, np.inf, lo_open=True)
    _check_range("supply_voltage_pu", v, 0.8, 1.2)
    speed = _per_asset(synchronous_speed_rpm(f_hz, poles), nd)

    s_b = pr / (eta * pf)
    loss_r = pr * (1.0 / eta - 1.0)
    cu_r = loss_r * _split_array(loss_split, "stator_copper", nd)
    core = loss_r * _split_array(loss_split, "core", nd) * v * v
    fw = loss_r * _split_array(loss_split, "friction_windage", nd)
    stray_r = loss_r * _split_array(loss_split, "stray_load", nd)
    q_r = np.where(lead, -1.0, 1.0) * np.sqrt(1.0 - pf * pf)
    if np.any(1.0 - x * q_r <= 0.0):
        raise ValueError(
            "rated point lies beyond 90 degrees load angle (synchronous_reactance_pu x sin(phi_rated) >= 1): "
            "lower synchronous_reactance_pu or raise rated_power_factor"
        )
    e0 = np.sqrt((1.0 - x * q_r) ** 2 + (x * pf) ** 2)
    shape = np.broadcast_shapes(p.shape, pr.shape, eta.shape, pf.shape, x.shape, v.shape, lead.shape, speed.shape)
    r = _blockwise(_lspm_kernel, shape, p=p, pr=pr, s_b=s_b, cu_r=cu_r, core=core, fw=fw, stray_r=stray_r, x=x,
                   v=v, e0=e0)
    over = r.pop("beyond_pull_out")
    if np.any(over):
        raise ValueError(
            f"p_shaft_kw exceeds the LSPM pull-out power in {counted(np.count_nonzero(over), 'value')}: the motor "
            "would lose synchronism; check the load or the rated data"
        )
    o = kind.out
    view = lambda a: o(np.broadcast_to(a, shape))  # noqa: E731
    return LineStartPMResult(
        p_in_kw=o(r["p_in"]), q_kvar=o(r["q"]), leading=o(r["leading"]), speed_rpm=view(speed),
        load_angle_deg=o(r["delta"]), p_shaft_kw=view(p), stator_copper_loss_kw=o(r["cu"]), core_loss_kw=view(core),
        friction_windage_loss_kw=view(fw), stray_load_loss_kw=o(r["stray"]),
    )


def _lspm_kernel(p, pr, s_b, cu_r, core, fw, stray_r, x, v, e0):
    """Elementwise body of :func:`lspm_operating_point` (per unit on s_b inside)."""
    tau = p / pr
    stray = stray_r * tau * tau
    fixed = p + core + fw + stray
    cu = cu_r * tau * tau
    ve = v * e0
    for _ in range(3):  # fixed point on the copper loss (converges by ~0.05 per step)
        pp = (fixed + cu) / s_b
        sin_d = np.minimum(pp * x / ve, 1.0)
        qq = (v * v - ve * np.sqrt(1.0 - sin_d * sin_d)) / x
        cu = cu_r * (pp * pp + qq * qq) / (v * v)
    p_in = fixed + cu
    pp = p_in / s_b
    ratio = pp * x / ve
    sin_d = np.minimum(ratio, 1.0)
    q = s_b * (v * v - ve * np.sqrt(1.0 - sin_d * sin_d)) / x
    return {
        "p_in": p_in, "q": q, "leading": q < 0.0, "delta": np.degrees(np.arcsin(sin_d)), "cu": cu, "stray": stray,
        "beyond_pull_out": ratio >= 1.0,
    }


@dataclass(frozen=True)
class LineStartPMMotor:
    """Nameplate and model parameters of a line-start PM motor (fields: see :func:`lspm_operating_point`)."""

    rated_p_kw: object
    rated_efficiency_frac: object
    poles: object
    f_hz: object = 50.0
    rated_power_factor: object = LSPM_RATED_POWER_FACTOR
    rated_leading: object = False
    synchronous_reactance_pu: object = LSPM_SYNCHRONOUS_REACTANCE_PU
    loss_split: LossSplit = LSPM_LOSS_SPLIT

    def operate(self, p_shaft_kw, supply_voltage_pu=1.0) -> LineStartPMResult:
        """Return the operating point at the given shaft power; see :func:`lspm_operating_point`."""
        return lspm_operating_point(
            p_shaft_kw, self.rated_p_kw, self.rated_efficiency_frac, self.poles, self.f_hz,
            rated_power_factor=self.rated_power_factor, rated_leading=self.rated_leading,
            synchronous_reactance_pu=self.synchronous_reactance_pu, supply_voltage_pu=supply_voltage_pu,
            loss_split=self.loss_split,
        )


# --------------------------------------------------------------------------------------------------
# LSPM starting screen
# --------------------------------------------------------------------------------------------------
#: Starting-screen thresholds. Common practice, from memory (no standard sets them): edit to the supplier's
#: published synchronisation limits when known.
LSPM_MAX_LOAD_INERTIA_RATIO = 5.0  # load inertia referred to the motor shaft / rotor inertia [-]
LSPM_MAX_START_LOAD_TORQUE_FRAC = 0.5  # load torque during run-up / rated motor torque [-]
LSPM_MAX_STARTS_PER_HOUR = 6.0  # evenly spread starts [1/h]
LSPM_MAX_SUPPLY_VOLTAGE_DIP_FRAC = 0.10  # terminal voltage dip during the start [-]

StartingStatus = Literal["ok", "confirm with the supplier"]
STARTING_OK: StartingStatus = "ok"
STARTING_CONFIRM: StartingStatus = "confirm with the supplier"


@dataclass(frozen=True)
class StartingScreenResult:
    """Per-asset outcome of the LSPM starting screen.

    Attributes
    ----------
    status : ndarray of str, "ok" or "confirm with the supplier".
    reasons : ndarray of str, the failed checks in words ("" when ok).
    high_inertia, heavy_start_load, frequent_starts, voltage_dip : ndarray of bool, one per check.
    """

    status: np.ndarray
    reasons: np.ndarray
    high_inertia: np.ndarray
    heavy_start_load: np.ndarray
    frequent_starts: np.ndarray
    voltage_dip: np.ndarray


def lspm_starting_screen(load_inertia_ratio, start_load_torque_frac, starts_per_hour, supply_voltage_dip_frac, *,
                         max_load_inertia_ratio=LSPM_MAX_LOAD_INERTIA_RATIO,
                         max_start_load_torque_frac=LSPM_MAX_START_LOAD_TORQUE_FRAC,
                         max_starts_per_hour=LSPM_MAX_STARTS_PER_HOUR,
                         max_supply_voltage_dip_frac=LSPM_MAX_SUPPLY_VOLTAGE_DIP_FRAC) -> StartingScreenResult:
    """Screen line-start PM applications for starting and synchronisation risk.

    Parameters
    ----------
    load_inertia_ratio : float or array_like
        Load moment of inertia referred to the motor shaft divided by the rotor's [-], >= 0.
    start_load_torque_frac : float or array_like
        Highest load torque during run-up relative to the motor's rated torque [-], >= 0 (constant-torque
        loads near 1, centrifugal pumps and fans with closed valve or damper about 0.1-0.3).
    starts_per_hour : float or array_like
        Starts per hour [1/h], >= 0.
    supply_voltage_dip_frac : float or array_like
        Terminal-voltage dip during the start [-], 0-1 (0.1 = 10 %).
    max_load_inertia_ratio, max_start_load_torque_frac : float, optional
        Inertia-ratio and start-torque thresholds; defaults are the module constants (common practice).
    max_starts_per_hour, max_supply_voltage_dip_frac : float, optional
        Starts-per-hour and voltage-dip thresholds; defaults are the module constants (common practice).

    Returns
    -------
    StartingScreenResult
        "confirm with the supplier" where any check fails, with the reasons.

    Notes
    -----
    A cage-started PM rotor must pull into step against the magnet braking torque; the margin shrinks
    with load inertia, load torque during run-up and low voltage (published: a 2.2 kW LSPM synchronises at
    rated load but fails at 1.07 x rated start load, J. Europ. Syst. Autom. 59(5), doi:10.18280/jesa.590511;
    limited critical inertia reviewed in Energies 18(17):4545, 2025). Accelerating and synchronising
    torques scale with V², so the inertia and torque checks use the dip-derated values J/(1 - dip)² and
    T/(1 - dip)². The screen only sorts; the supplier's synchronisation calculation decides.

    Examples
    --------
    >>> r = lspm_starting_screen([2.0, 20.0], [0.2, 0.2], [1.0, 1.0], [0.05, 0.05])
    >>> r.status.tolist()
    ['ok', 'confirm with the supplier']
    """
    j = np.atleast_1d(np.asarray(load_inertia_ratio, dtype=float))
    t = np.atleast_1d(np.asarray(start_load_torque_frac, dtype=float))
    n = np.atleast_1d(np.asarray(starts_per_hour, dtype=float))
    dip = np.atleast_1d(np.asarray(supply_voltage_dip_frac, dtype=float))
    _check_range("load_inertia_ratio", j, 0.0, np.inf)
    _check_range("start_load_torque_frac", t, 0.0, np.inf)
    _check_range("starts_per_hour", n, 0.0, np.inf, unit="1/h")
    _check_range("supply_voltage_dip_frac", dip, 0.0, 1.0, hi_open=True)
    j, t, n, dip = np.broadcast_arrays(j, t, n, dip)
    derate = (1.0 - dip) ** 2
    high_inertia = j / derate > max_load_inertia_ratio
    heavy = t / derate > max_start_load_torque_frac
    frequent = n > max_starts_per_hour
    dipped = dip > max_supply_voltage_dip_frac
    phrases = (
        (high_inertia, f"load inertia above {max_load_inertia_ratio:g} x rotor inertia (voltage-dip derated); "),
        (heavy, f"start load torque above {max_start_load_torque_frac:g} x rated torque (voltage-dip derated); "),
        (frequent, f"more than {max_starts_per_hour:g} starts per hour; "),
        (dipped, f"voltage dip above {max_supply_voltage_dip_frac:.0%} during the start; "),
    )
    reasons = np.full(j.shape, "", dtype=object)
    for flag, text in phrases:  # four checks, vectorised over assets
        reasons = np.where(flag, reasons + text, reasons)
    reasons = np.char.rstrip(reasons.astype(str), "; ")
    any_flag = high_inertia | heavy | frequent | dipped
    status = np.where(any_flag, STARTING_CONFIRM, STARTING_OK)
    return StartingScreenResult(status, reasons, high_inertia, heavy, frequent, dipped)


# --------------------------------------------------------------------------------------------------
# PM and SynRM motors on a drive
# --------------------------------------------------------------------------------------------------
MotorKind = Literal["pm", "synrm"]
#: Rated-loss split of a drive-fed PM motor. Common practice: stator copper dominates, iron loss is
#: significant, no rotor copper.
PM_DRIVE_LOSS_SPLIT = LossSplit(stator_copper=0.50, core=0.30, friction_windage=0.10, stray_load=0.10)
#: Rated-loss split of a SynRM. Common practice: no rotor cage loss; more stator copper because of the
#: magnetising current.
SYNRM_LOSS_SPLIT = LossSplit(stator_copper=0.60, core=0.20, friction_windage=0.10, stray_load=0.10)
#: Magnetising (flux) current relative to rated current. PM: 0 (flux from the magnets, below base speed).
#: SynRM: 0.45, common practice / from memory.
MAGNETISING_CURRENT_FRAC: dict[str, float] = {"pm": 0.0, "synrm": 0.45}
#: Rated motor power factor at the motor terminals. From memory / common practice: PM 0.90-0.95,
#: SynRM 0.75-0.85 (lower than an induction motor of the same rating).
RATED_MOTOR_POWER_FACTOR: dict[str, float] = {"pm": 0.92, "synrm": 0.78}
#: Iron loss ∝ speed^1.5 at constant flux: between hysteresis (∝ f) and eddy-current (∝ f²) loss;
#: common practice.
IRON_LOSS_SPEED_EXPONENT = 1.5
#: Friction ∝ speed (bearing friction torque roughly constant); common practice, windage neglected.
FRICTION_LOSS_SPEED_EXPONENT = 1.0


@dataclass(frozen=True)
class DriveFedSynchronousResult(_Ieee1459Quantities):
    """Operating point of a PM or SynRM motor and its drive (arrays of the kind of ``speed_frac``).

    Attributes
    ----------
    p_in_kw : active power at the drive input (the meter) [kW].
    q_kvar : fundamental reactive power Q_1 at the drive input [kvar].
    power_factor : true power factor at the drive input [-].
    displacement_power_factor : drive input DPF [-].
    thd_i_frac : drive input current THD [-].
    p_shaft_kw : shaft power [kW].
    motor_copper_loss_kw, motor_iron_loss_kw, motor_friction_loss_kw, motor_stray_loss_kw,
    drive_loss_kw : losses [kW].
    motor_current_frac : motor current / motor rated current [-].
    drive_current_frac : drive output current / drive rated current [-].
    p_motor_in_kw, efficiency_frac, motor_efficiency_frac, s_kva, s1_kva, distortion_power_kvar,
    nonactive_power_kvar : derived on access (properties).
    """

    p_in_kw: object
    q_kvar: object
    power_factor: object
    displacement_power_factor: object
    thd_i_frac: object
    p_shaft_kw: object
    motor_copper_loss_kw: object
    motor_iron_loss_kw: object
    motor_friction_loss_kw: object
    motor_stray_loss_kw: object
    drive_loss_kw: object
    motor_current_frac: object
    drive_current_frac: object

    @property
    def _supply_p(self):
        return self.p_in_kw

    @property
    def p_motor_in_kw(self):
        """Motor electrical input = shaft + motor losses [kW]."""
        return (self.p_shaft_kw + self.motor_copper_loss_kw + self.motor_iron_loss_kw + self.motor_friction_loss_kw
                + self.motor_stray_loss_kw)

    @property
    def efficiency_frac(self):
        """System efficiency, shaft / drive input [-]."""
        return _safe_ratio(self.p_shaft_kw, self.p_in_kw)

    @property
    def motor_efficiency_frac(self):
        """Motor efficiency, shaft / motor input [-] (0 at zero shaft power)."""
        return _safe_ratio(self.p_shaft_kw, self.p_motor_in_kw)


def _by_kind(kinds: np.ndarray, values: dict[str, float]) -> np.ndarray:
    out = np.zeros(kinds.shape, dtype=float)
    for name, value in values.items():  # two motor kinds, vectorised over assets
        out = np.where(kinds == name, value, out)
    return out


def drive_fed_synchronous_operating_point(speed_frac, torque_frac, rated_p_kw, rated_efficiency_frac, motor_kind="pm",
                                          *, rated_motor_power_factor=None, drive_rated_s_kva=None,
                                          drive_class="IE2",
                                          dpf=FRONT_END_DEFAULTS["six_pulse_with_choke"][0],
                                          thd_i_frac=FRONT_END_DEFAULTS["six_pulse_with_choke"][1],
                                          thd_v_frac=0.0, loss_split: LossSplit | None = None,
                                          drive_loss_shape: DriveLossShape = DEFAULT_DRIVE_LOSS_SHAPE,
                                          ) -> DriveFedSynchronousResult:
    """Return the operating point of a PM or synchronous-reluctance motor on a drive, seen from the meter.

    Parameters
    ----------
    speed_frac : float, array_like, Series or DataFrame
        Speed relative to rated (base) speed [-], 0-1 (constant-torque range). Shape ``(n,)`` or ``(n, t)``.
    torque_frac : float, array_like, Series or DataFrame
        Shaft torque relative to rated torque [-], 0-1.5.
    rated_p_kw : float or array_like
        Rated shaft power [kW], > 0, per asset.
    rated_efficiency_frac : float or array_like
        Motor rated efficiency on converter supply [-], (0, 1) (IE4/IE5 level of IEC TS 60034-30-2).
    motor_kind : {"pm", "synrm"} or array_like of str, optional
        Motor technology per asset; default "pm".
    rated_motor_power_factor : float, array_like or None, optional
        Motor-terminal power factor at rated load [-]; None uses :data:`RATED_MOTOR_POWER_FACTOR`.
        It sizes the motor current and, by default, the drive.
    drive_rated_s_kva : float, array_like or None, optional
        Drive rated apparent output power [kVA]; None sizes the drive to the motor's rated input kVA.
    drive_class : {"IE0", "IE1", "IE2"} or array_like of str, optional
        Drive class; default "IE2".
    dpf, thd_i_frac, thd_v_frac : float or array_like, optional
        Drive input displacement PF, current THD and supply voltage THD [-]; defaults six-pulse drive with
        choke (:data:`models.drives.FRONT_END_DEFAULTS`, from memory).
    loss_split : LossSplit or None, optional
        Motor rated-loss split for every asset; None uses :data:`PM_DRIVE_LOSS_SPLIT` or
        :data:`SYNRM_LOSS_SPLIT` by kind.
    drive_loss_shape : DriveLossShape, optional
        Drive loss-curve weights.

    Returns
    -------
    DriveFedSynchronousResult

    Notes
    -----
    With n = speed_frac, T = torque_frac and m the magnetising current share (:data:`MAGNETISING_CURRENT_FRAC`):

        P_shaft = P_r·n·T,   I_motor = sqrt(m² + (1 - m²)·T²)
        P_cu = L_cu,r·I_motor²,  P_fe = L_fe,r·n^1.5,  P_fw = L_fw,r·n,  P_stray = L_st,r·T²

    with L_x,r the shares of L_r = P_r(1/eta_r - 1). Drive loss from :func:`models.drives.drive_losses_kw`
    with the motor current referred to the drive rating (torque component sqrt(1 - m²)·T, magnetising
    component m). The SynRM's lower motor power factor raises its current, hence the drive size and loss,
    but not the meter's reactive power: the meter sees the drive input (IEEE Std 1459-2010 quantities,
    :func:`models.drives.supply_side_powers`). Motor harmonic (PWM) losses are taken as included in the
    converter-supply rated efficiency.

    Examples
    --------
    >>> r = drive_fed_synchronous_operating_point(1.0, 1.0, 30.0, 0.95)
    >>> round(float(r.motor_efficiency_frac), 3)
    0.95
    """
    kind = _Kind(speed_frac)
    n = kind.arr(speed_frac)
    tau = kind.arr(torque_frac)
    _check_range("speed_frac", n, 0.0, 1.0)
    _check_range("torque_frac", tau, 0.0, 1.5)
    nd = max(n.ndim, tau.ndim)
    pr = _per_asset(rated_p_kw, nd)
    eta = _per_asset(rated_efficiency_frac, nd)
    _check_range("rated_p_kw", pr, 0.0, np.inf, lo_open=True, unit="kW")
    _check_range("rated_efficiency_frac", eta, 0.0, 1.0, lo_open=True, hi_open=True)
    kinds = np.asarray(motor_kind)
    unknown = sorted({str(k) for k in np.unique(kinds)} - set(MAGNETISING_CURRENT_FRAC))
    if unknown:
        raise ValueError(f"motor_kind must be 'pm' or 'synrm'; got {unknown}")
    m = _per_asset(_by_kind(kinds, MAGNETISING_CURRENT_FRAC), nd)
    pf_r = _per_asset(_by_kind(kinds, RATED_MOTOR_POWER_FACTOR) if rated_motor_power_factor is None
                      else np.asarray(rated_motor_power_factor, dtype=float), nd)
    _check_range("rated_motor_power_factor", pf_r, 0.0, 1.0, lo_open=True)
    if loss_split is None:
        is_pm = kinds == "pm"
        shares = {
            name: _per_asset(np.where(is_pm, getattr(PM_DRIVE_LOSS_SPLIT, name), getattr(SYNRM_LOSS_SPLIT, name)), nd)
            for name in ("stator_copper", "core", "friction_windage", "stray_load")
        }
    else:
        shares = {name: _split_array(loss_split, name, nd)
                  for name in ("stator_copper", "core", "friction_windage", "stray_load")}

    loss_r = pr * (1.0 / eta - 1.0)
    s_motor_r = drive_rated_s_kva_for_motor(pr, eta, pf_r)
    s_drive = s_motor_r if drive_rated_s_kva is None else _per_asset(drive_rated_s_kva, nd)
    _check_range("drive_rated_s_kva", s_drive, 0.0, np.inf, lo_open=True, unit="kVA")
    n, tau, _, k = _cdm_inputs(n, tau, drive_class, 0.0, nd)
    d, ti, tv = _supply_inputs(kind, nd, dpf, thd_i_frac, thd_v_frac)
    per_asset = dict(
        pr=pr, m=m, l_cu=loss_r * shares["stator_copper"], l_fe=loss_r * shares["core"],
        l_fw=loss_r * shares["friction_windage"], l_st=loss_r * shares["stray_load"], ratio=s_motor_r / s_drive,
        s_drive=s_drive, k=k, d=d,
    )
    shape = np.broadcast_shapes(n.shape, tau.shape, *(np.shape(a) for a in per_asset.values()))
    r = _blockwise(_drive_fed_kernel, shape, n=n, tau=tau, loss_shape=drive_loss_shape, **per_asset)
    o = kind.out
    view = lambda a: o(np.broadcast_to(a, shape))  # noqa: E731
    return DriveFedSynchronousResult(
        p_in_kw=o(r["p"]), q_kvar=o(r["q1"]), power_factor=view(true_power_factor(d, ti, tv)),
        displacement_power_factor=view(d), thd_i_frac=view(ti), p_shaft_kw=o(r["p_shaft"]),
        motor_copper_loss_kw=o(r["cu"]), motor_iron_loss_kw=o(r["fe"]), motor_friction_loss_kw=o(r["fw"]),
        motor_stray_loss_kw=o(r["st"]), drive_loss_kw=o(r["drive_loss"]), motor_current_frac=o(r["i_motor"]),
        drive_current_frac=o(r["i_drive"]),
    )


def _speed_power(n, exponent: float):
    """n ** exponent with fast paths for the default exponents 1 and 1.5."""
    if exponent == 1.0:
        return n
    if exponent == 1.5:
        return n * np.sqrt(n)
    return n ** exponent


def _drive_fed_kernel(n, tau, pr, m, l_cu, l_fe, l_fw, l_st, ratio, s_drive, k, d, loss_shape):
    """Elementwise body of :func:`drive_fed_synchronous_operating_point`."""
    tau2 = tau * tau
    i2 = m * m + (1.0 - m * m) * tau2
    p_shaft = pr * n * tau
    cu = l_cu * i2
    fe = l_fe * _speed_power(n, IRON_LOSS_SPEED_EXPONENT)
    fw = l_fw * _speed_power(n, FRICTION_LOSS_SPEED_EXPONENT)
    st = l_st * tau2
    it = tau * np.sqrt(1.0 - m * m) * ratio
    im = m * ratio
    drive_loss = _cdm_kernel(n, it, im, k, s_drive, loss_shape)["loss"]
    p = p_shaft + cu + fe + fw + st + drive_loss
    return {
        "p": p, "q1": _q1_kernel(p, d)["q1"], "p_shaft": p_shaft, "cu": cu, "fe": fe, "fw": fw, "st": st,
        "drive_loss": drive_loss, "i_motor": np.sqrt(i2), "i_drive": np.sqrt(it * it + im * im),
    }


@dataclass(frozen=True)
class DriveFedSynchronousMotor:
    """A PM or SynRM motor with its drive (fields: see :func:`drive_fed_synchronous_operating_point`)."""

    rated_p_kw: object
    rated_efficiency_frac: object
    motor_kind: object = "pm"
    rated_motor_power_factor: object = None
    drive_rated_s_kva: object = None
    drive_class: object = "IE2"
    dpf: object = FRONT_END_DEFAULTS["six_pulse_with_choke"][0]
    thd_i_frac: object = FRONT_END_DEFAULTS["six_pulse_with_choke"][1]
    loss_split: LossSplit | None = None

    def operate(self, speed_frac, torque_frac, thd_v_frac=0.0) -> DriveFedSynchronousResult:
        """Return the operating point; see :func:`drive_fed_synchronous_operating_point`."""
        return drive_fed_synchronous_operating_point(
            speed_frac, torque_frac, self.rated_p_kw, self.rated_efficiency_frac, self.motor_kind,
            rated_motor_power_factor=self.rated_motor_power_factor, drive_rated_s_kva=self.drive_rated_s_kva,
            drive_class=self.drive_class, dpf=self.dpf, thd_i_frac=self.thd_i_frac, thd_v_frac=thd_v_frac,
            loss_split=self.loss_split,
        )


# --------------------------------------------------------------------------------------------------
# Wound-field synchronous motor
# --------------------------------------------------------------------------------------------------
WfsmMode = Literal["power_factor", "kvar", "follow_site"]
WFSM_MODES: tuple[str, ...] = ("power_factor", "kvar", "follow_site")
#: Largest allowed load angle. Common practice: 60-75° keeps a margin to pull-out at 90°.
WFSM_MAX_LOAD_ANGLE_DEG = 70.0
#: Exciter efficiency (static or brushless). From memory / common practice: 0.85-0.95.
WFSM_EXCITER_EFFICIENCY_FRAC = 0.90
#: Default synchronous reactance on the machine's rated kVA base. From memory: 0.8-1.2 pu.
WFSM_SYNCHRONOUS_REACTANCE_PU = 1.0
#: Rated-loss split used by :meth:`WoundFieldSynchronousMotor.from_rating`. Common practice / from memory
#: for large synchronous motors; "excitation" is field copper plus exciter loss, stray load loss is in
#: the stator copper share.
WFSM_LOSS_SPLIT: dict[str, float] = {"stator_copper": 0.35, "excitation": 0.20, "core": 0.28, "friction_windage": 0.17}
#: Relative tolerance before a clipped setpoint counts as "limited" (guards float round-off only).
_LIMIT_RTOL = 1e-9
_WFSM_ITERATIONS = 3


def _occ_emf(i_f, i_f_ag, v_r, sat):
    """Open-circuit characteristic E_f(I_f): air-gap line (sat = 1) or Froehlich-type saturation."""
    lin = v_r * i_f / i_f_ag
    s = np.where(sat > 1.0, sat, 2.0)
    e_max = s * v_r / (s - 1.0)
    i0 = i_f_ag * e_max / v_r
    return np.where(sat > 1.0, e_max * i_f / (i0 + i_f), lin)


def _occ_field(e, i_f_ag, v_r, sat):
    """Inverse of :func:`_occ_emf`: field current for an EMF (inf at or beyond the saturation asymptote)."""
    lin = i_f_ag * e / v_r
    s = np.where(sat > 1.0, sat, 2.0)
    e_max = s * v_r / (s - 1.0)
    i0 = i_f_ag * e_max / v_r
    with np.errstate(divide="ignore", invalid="ignore"):
        sat_i = np.where(e < e_max, i0 * e / (e_max - e), np.inf)
    return np.where(sat > 1.0, sat_i, lin)


@dataclass(frozen=True)
class WoundFieldResult:
    """WFSM operating point (arrays of the kind of the shaft-power input).

    Attributes
    ----------
    p_in_kw : total electrical input, stator + excitation [kW].
    q_kvar : reactive power at the stator terminals [kvar] (< 0 = supplied to the site, leading).
    leading : True where the machine supplies reactive power (over-excited).
    stator_current_a : line current [A].
    field_current_a : field current [A].
    emf_ph_v : excitation EMF per phase, star equivalent [V].
    load_angle_deg : angle by which E_f lags V [deg].
    q_desired_kvar : the mode's request before limits [kvar].
    p_shaft_kw : shaft power, as given [kW].
    stator_copper_loss_kw, field_copper_loss_kw, exciter_loss_kw, core_loss_kw,
    friction_windage_loss_kw : losses [kW].
    limited_by_stator_current, limited_by_field_current, limited_by_load_angle : bool, the limit that
        moved q away from the request.
    infeasible : bool, no reactive power satisfies all limits at this load (overload); the values are
        then the nearest point on the binding limit and are not attainable in service.
    p_stator_kw, s_kva, power_factor, efficiency_frac, total_loss_kw : derived on access (properties).
    """

    p_in_kw: object
    q_kvar: object
    leading: object
    stator_current_a: object
    field_current_a: object
    emf_ph_v: object
    load_angle_deg: object
    q_desired_kvar: object
    p_shaft_kw: object
    stator_copper_loss_kw: object
    field_copper_loss_kw: object
    exciter_loss_kw: object
    core_loss_kw: object
    friction_windage_loss_kw: object
    limited_by_stator_current: object
    limited_by_field_current: object
    limited_by_load_angle: object
    infeasible: object

    @property
    def p_stator_kw(self):
        """Stator terminal active power, input less excitation [kW]."""
        return self.p_in_kw - self.field_copper_loss_kw - self.exciter_loss_kw

    @property
    def s_kva(self):
        """Apparent power sqrt(p_in² + q²) [kVA]."""
        return np.sqrt(self.p_in_kw * self.p_in_kw + self.q_kvar * self.q_kvar)

    @property
    def power_factor(self):
        """Unsigned power factor p_in / s [-]."""
        return _safe_ratio(self.p_in_kw, self.s_kva)

    @property
    def efficiency_frac(self):
        """Shaft / total input [-]."""
        return _safe_ratio(self.p_shaft_kw, self.p_in_kw)

    @property
    def total_loss_kw(self):
        """Sum of the losses [kW]."""
        return (self.stator_copper_loss_kw + self.field_copper_loss_kw + self.exciter_loss_kw + self.core_loss_kw
                + self.friction_windage_loss_kw)

    def limit_counts(self) -> dict[str, object]:
        """Return, per asset, how many intervals each limit bound (and how many were infeasible)."""
        out = {}
        for name in ("limited_by_stator_current", "limited_by_field_current", "limited_by_load_angle", "infeasible"):
            flag = getattr(self, name)
            if isinstance(flag, pd.DataFrame):
                out[name] = flag.sum(axis=0)
            elif isinstance(flag, pd.Series):
                out[name] = int(flag.sum())
            else:
                a = np.asarray(flag)
                out[name] = a.sum(axis=-1) if a.ndim == 2 else a.astype(int)
        return out


def wfsm_operating_point(p_shaft_kw, *, rated_v_ll_v, synchronous_reactance_ohm, armature_resistance_ohm,
                         field_current_at_rated_voltage_a, field_resistance_ohm, core_loss_kw,
                         friction_windage_loss_kw, max_stator_current_a, max_field_current_a,
                         saturation_factor=1.0, exciter_efficiency_frac=WFSM_EXCITER_EFFICIENCY_FRAC,
                         max_load_angle_deg=WFSM_MAX_LOAD_ANGLE_DEG, mode="power_factor",
                         power_factor_setpoint=1.0, setpoint_leading=True, q_setpoint_kvar=0.0,
                         site_p_kw_other=0.0, site_q_kvar_other=0.0, site_target_power_factor=0.95,
                         supply_v_ll_v=None, detail=True) -> WoundFieldResult:
    """Return the operating point of a wound-field synchronous motor in its reactive-power mode.

    Parameters
    ----------
    p_shaft_kw : float, array_like, Series or DataFrame
        Shaft power [kW], >= 0. Shape ``(n,)`` or ``(n, t)``.
    rated_v_ll_v : float or array_like
        Rated line-to-line voltage [V], > 0, per asset.
    synchronous_reactance_ohm : float or array_like
        Synchronous reactance per phase of the star equivalent [ohm], > 0 (a delta value divided by 3).
    armature_resistance_ohm : float or array_like
        Armature resistance per phase of the star equivalent [ohm], >= 0.
    field_current_at_rated_voltage_a : float or array_like
        Field current giving rated phase voltage on the air-gap line [A], > 0.
    field_resistance_ohm : float or array_like
        Field winding resistance (hot) [ohm], >= 0.
    core_loss_kw, friction_windage_loss_kw : float or array_like
        Core loss at rated voltage and friction + windage loss [kW], >= 0.
    max_stator_current_a, max_field_current_a : float or array_like
        Stator line-current and field-current ceilings [A], > 0.
    saturation_factor : float or array_like, optional
        Field current on the open-circuit characteristic at rated voltage over that on the air-gap line
        [-], >= 1; 1 (default) is the linear air-gap line.
    exciter_efficiency_frac : float or array_like, optional
        Exciter efficiency [-], (0, 1]; default :data:`WFSM_EXCITER_EFFICIENCY_FRAC` (from memory).
    max_load_angle_deg : float or array_like, optional
        Largest allowed load angle [deg], (0, 90); default :data:`WFSM_MAX_LOAD_ANGLE_DEG`.
    mode : {"power_factor", "kvar", "follow_site"} or array_like of str, optional
        Reactive-power mode per asset.
    power_factor_setpoint : float or array_like, optional
        "power_factor" mode: target power factor of the machine's total input [-], (0, 1].
    setpoint_leading : bool or array_like, optional
        "power_factor" mode: True (default) for a leading (over-excited) setpoint.
    q_setpoint_kvar : float or array_like, optional
        "kvar" mode: reactive power [kvar], negative = supplied to the site.
    site_p_kw_other, site_q_kvar_other : float or array_like, optional
        "follow_site" mode: active and reactive power at the site meter from everything except this
        machine [kW], [kvar], per interval (``(n, t)``, or ``(1, t)`` for one site).
    site_target_power_factor : float or array_like, optional
        "follow_site" mode: lagging site power factor to reach [-], (0, 1]; default 0.95.
    supply_v_ll_v : float, array_like or None, optional
        Actual supply line voltage [V]; None means rated.
    detail : bool, optional
        True (default): every field. False: only ``p_in_kw``, ``q_kvar``, ``p_shaft_kw``, the field copper,
        exciter, core and friction losses and the three ``limited_by_*`` flags, the others None (what a
        year of intervals needs, in a little over half the time for long per-interval arrays).

    Returns
    -------
    WoundFieldResult
        With per-interval limit flags; :meth:`WoundFieldResult.limit_counts` counts them per asset.

    Raises
    ------
    ValueError
        For out-of-range inputs or an unknown mode.

    Notes
    -----
    Motor convention, star-equivalent phase quantities, V on the real axis [1] (Ch. 5):

        V = E_f + (R_a + jX_s)·I,   I = (P - jQ)/(3V),   P = 3·V·E_f·sin(delta)/X_s  (R_a = 0).

    Over-excitation (E_f·cos delta > V) gives Q < 0 (leading), under-excitation Q > 0 (lagging).
    E_f = OCC(I_f): the air-gap line E = V_r·I_f/I_f,ag, or with saturation factor s > 1 the
    Froehlich-type curve E = E_m·I_f/(I_0 + I_f), E_m = s·V_r/(s - 1), I_0 = I_f,ag·E_m/V_r, which meets
    the air-gap line at the origin and needs s times the air-gap field current at rated voltage.
    Power balance: P_stator = P_shaft + P_core·(V/V_r)² + P_fw + 3·I²·R_a (solved as a quadratic in P);
    excitation input I_f²·R_f/eta_exc; P_in = P_stator + excitation; so P_in = P_shaft + losses exactly.

    The request Q* is set by the mode: Q* = ∓P_in·tan(acos PF) ("power_factor"); the setpoint
    ("kvar"); or Q* = min(0, (P_site,other + P_in)·tan(acos PF_target) - Q_site,other) ("follow_site",
    the correction formula Q_c = P·(tan phi_1 - tan phi_2); the machine never absorbs reactive power to worsen a site
    that already meets the target). Limits give a feasible band Q_lo <= Q <= Q_hi at the operating P:
    stator current |S| <= 3·V·I_max; field ceiling |3V² - Z(P - jQ)| <= 3·V·E_f,max (a circle in the PQ
    plane); load angle delta <= delta_max (a half-plane, the under-excitation limit). Q* is clipped into
    the band and the binding limit is flagged; an empty band is flagged ``infeasible``.

    References
    ----------
    [1] S. J. Chapman, *Electric Machinery Fundamentals*, 4th ed. McGraw-Hill, 2005, Ch. 5.
    [2] A. E. Fitzgerald, C. Kingsley Jr. and S. D. Umans, *Electric Machinery*, 6th ed. McGraw-Hill, 2003,
        Ch. 5 (capability curve, V-curves).
    """
    kind = _Kind(p_shaft_kw)
    p_kw = kind.arr(p_shaft_kw)
    _check_range("p_shaft_kw", p_kw, 0.0, np.inf, unit="kW")
    nd = p_kw.ndim

    def asset(name, value, lo, hi, **kw):
        a = _per_asset(value, nd) if not isinstance(value, pd.DataFrame) else kind.arr(value)
        _check_range(name, a, lo, hi, **kw)
        return a

    vr_ll = asset("rated_v_ll_v", rated_v_ll_v, 0.0, np.inf, lo_open=True, unit="V")
    v_ll = (vr_ll if supply_v_ll_v is None
            else asset("supply_v_ll_v", supply_v_ll_v, 0.0, np.inf, lo_open=True, unit="V"))
    x = asset("synchronous_reactance_ohm", synchronous_reactance_ohm, 0.0, np.inf, lo_open=True, unit="ohm")
    r = asset("armature_resistance_ohm", armature_resistance_ohm, 0.0, np.inf, unit="ohm")
    i_ag = asset("field_current_at_rated_voltage_a", field_current_at_rated_voltage_a, 0.0, np.inf, lo_open=True,
                 unit="A")
    r_f = asset("field_resistance_ohm", field_resistance_ohm, 0.0, np.inf, unit="ohm")
    core_r = asset("core_loss_kw", core_loss_kw, 0.0, np.inf, unit="kW") * 1e3
    fw = asset("friction_windage_loss_kw", friction_windage_loss_kw, 0.0, np.inf, unit="kW") * 1e3
    i_max = asset("max_stator_current_a", max_stator_current_a, 0.0, np.inf, lo_open=True, unit="A")
    if_max = asset("max_field_current_a", max_field_current_a, 0.0, np.inf, lo_open=True, unit="A")
    sat = asset("saturation_factor", saturation_factor, 1.0, np.inf)
    eta_x = asset("exciter_efficiency_frac", exciter_efficiency_frac, 0.0, 1.0, lo_open=True)
    d_max = asset("max_load_angle_deg", max_load_angle_deg, 0.0, 90.0, lo_open=True, hi_open=True, unit="deg")
    modes = _per_asset(np.asarray(mode, dtype=str), nd)
    unknown = sorted(set(np.unique(modes).tolist()) - set(WFSM_MODES))
    if unknown:
        raise ValueError(f"mode must be one of {list(WFSM_MODES)}; got {unknown}")
    pf_set = asset("power_factor_setpoint", power_factor_setpoint, 0.0, 1.0, lo_open=True)
    lead = _per_asset(np.asarray(setpoint_leading, dtype=bool), nd)
    q_set = asset("q_setpoint_kvar", q_setpoint_kvar, -np.inf, np.inf, unit="kvar") * 1e3
    site_p = asset("site_p_kw_other", site_p_kw_other, -np.inf, np.inf, unit="kW") * 1e3
    site_q = asset("site_q_kvar_other", site_q_kvar_other, -np.inf, np.inf, unit="kvar") * 1e3
    pf_t = asset("site_target_power_factor", site_target_power_factor, 0.0, 1.0, lo_open=True)
    if np.any(np.tan(np.radians(d_max)) * x <= r):
        raise ValueError("max_load_angle_deg is too small for this armature resistance: need tan(delta_max)·X_s > R_a")

    v = v_ll / SQRT3
    v_r = vr_ll / SQRT3
    z2 = r * r + x * x
    t = np.tan(np.radians(d_max))
    e_ceil = _occ_emf(if_max, i_ag, v_r, sat)
    s_max = 3.0 * v * i_max
    rad = 3.0 * v * e_ceil / np.sqrt(z2)
    is_pf, is_kvar = modes == "power_factor", modes == "kvar"
    per_asset = dict(
        v=v, v_r=v_r, r=r, x=x, i_ag=i_ag, r_f=r_f, sat=sat, inv_eta_x=1.0 / eta_x,
        fixed=core_r * (v / v_r) ** 2 + fw, s_max=s_max, s_max2=s_max * s_max, a=r / (3.0 * v * v),
        cq=3.0 * v * v * x / z2, c_re=3.0 * v * v * r / z2, rad2=rad * rad,
        qd0=3.0 * t * v * v / (t * x - r), qd1=(t * r + x) / (t * x - r), v3=3.0 * v * v, inv3v=1.0 / (3.0 * v),
        tan_set=np.where(lead, -1.0, 1.0) * np.sqrt(1.0 - pf_set * pf_set) / pf_set,
        tan_t=np.sqrt(1.0 - pf_t * pf_t) / pf_t, is_pf=is_pf, is_kvar=is_kvar,
        q_set=q_set, site_p=site_p, site_q=site_q,
    )
    shape = np.broadcast_shapes(p_kw.shape, *(np.shape(val) for val in per_asset.values()))
    flags = dict(occ_linear=bool(np.all(sat == 1.0)), all_pf=bool(np.all(is_pf)), all_kvar=bool(np.all(is_kvar)))
    res = _wfsm_compiled(shape, p=p_kw, **per_asset, **flags, lean=not detail)
    o = kind.out
    view = lambda a: o(np.broadcast_to(a, shape))  # noqa: E731
    res = {name: None if res.get(name) is None else o(res[name])
           for name in _WFSM_FLOAT_OUTPUTS + _WFSM_BOOL_OUTPUTS}
    return WoundFieldResult(p_shaft_kw=view(p_kw), core_loss_kw=view(core_r * (v / v_r) ** 2 / 1e3),
                            friction_windage_loss_kw=view(fw / 1e3), **res)


def _wfsm_kernel(p, v, v_r, r, x, i_ag, r_f, sat, inv_eta_x, fixed, s_max, s_max2, a, cq, c_re, rad2, qd0, qd1, v3,
                 inv3v, tan_set, tan_t, is_pf, is_kvar, q_set, site_p, site_q, occ_linear, all_pf, all_kvar):
    """Elementwise body of :func:`wfsm_operating_point` (SI units inside: W, var, V, A)."""
    p = p * 1e3
    pm = p + fixed
    k_lin = i_ag / v_r
    # starting point: copper and excitation at the unclipped request (current capped at its ceiling)
    if all_pf:
        q0 = tan_set * pm
    elif all_kvar:
        q0 = q_set + 0.0 * pm
    else:
        q0 = np.where(is_pf, tan_set * pm, np.where(is_kvar, q_set, np.minimum((site_p + pm) * tan_t - site_q, 0.0)))
    p_st = pm + a * np.minimum(pm * pm + q0 * q0, s_max2)
    re3 = v3 - r * p_st - x * q0
    im3 = x * p_st - r * q0
    i_f = np.sqrt(re3 * re3 + im3 * im3) * inv3v * k_lin
    p_exc = i_f * i_f * r_f * inv_eta_x
    for _ in range(_WFSM_ITERATIONS):  # fixed point on copper and excitation losses
        p_tot = p_st + p_exc
        if all_pf:
            q_des = tan_set * p_tot
        elif all_kvar:
            q_des = q_set + 0.0 * p_tot
        else:
            q_follow = np.minimum((site_p + p_tot) * tan_t - site_q, 0.0)
            q_des = np.where(is_pf, tan_set * p_tot, np.where(is_kvar, q_set, q_follow))
        q_i = np.sqrt(np.maximum(s_max2 - p_st * p_st, 0.0))
        dp = p_st - c_re
        h2 = rad2 - dp * dp
        h = np.sqrt(np.maximum(h2, 0.0))
        q_lo_f = cq - h
        q_hi_d = qd0 - qd1 * p_st
        lo = np.maximum(-q_i, q_lo_f)
        # upper side of the field circle (cq + h) lies above the load-angle line for delta_max < 90 deg
        # wherever the band is not empty, so the upper bound is stator current or load angle
        hi = np.minimum(q_i, q_hi_d)
        q = np.minimum(np.maximum(q_des, lo), hi)
        c = pm + a * q * q
        disc = 1.0 - 4.0 * a * c
        p_st = 2.0 * c / (1.0 + np.sqrt(np.maximum(disc, 0.0)))
        re3 = v3 - r * p_st - x * q
        im3 = x * p_st - r * q
        emf = np.sqrt(re3 * re3 + im3 * im3) * inv3v
        i_f = emf * k_lin if occ_linear else _occ_field(emf, i_ag, v_r, sat)
        p_fcu = i_f * i_f * r_f
        p_exc = p_fcu * inv_eta_x

    tol = _LIMIT_RTOL * np.maximum(s_max, np.abs(q_des))
    low = q_des < lo - tol
    high = q_des > hi + tol
    i_line = np.sqrt(p_st * p_st + q * q) * inv3v
    k = 1e-3
    return {
        "p_in_kw": (p_st + p_exc) * k, "q_kvar": q * k, "leading": q < 0.0,
        "stator_current_a": i_line, "field_current_a": i_f, "emf_ph_v": emf,
        "load_angle_deg": np.degrees(np.arctan2(im3, re3)), "q_desired_kvar": q_des * k,
        "stator_copper_loss_kw": (3.0 * i_line * i_line * r) * k, "field_copper_loss_kw": p_fcu * k,
        "exciter_loss_kw": (p_exc - p_fcu) * k,
        "limited_by_stator_current": (low & (-q_i >= q_lo_f)) | (high & (q_i <= q_hi_d)),
        "limited_by_field_current": low & (q_lo_f > -q_i),
        "limited_by_load_angle": high & (q_hi_d < q_i),
        "infeasible": (p_st > s_max) | (h2 < 0.0) | (lo > hi + tol) | (disc < 0.0),
    }


#: Outputs of the wound-field kernels, in the compiled pass's order.
_WFSM_FLOAT_OUTPUTS = ("p_in_kw", "q_kvar", "stator_current_a", "field_current_a", "emf_ph_v", "load_angle_deg",
                       "q_desired_kvar", "stator_copper_loss_kw", "field_copper_loss_kw", "exciter_loss_kw")
_WFSM_BOOL_OUTPUTS = ("leading", "limited_by_stator_current", "limited_by_field_current", "limited_by_load_angle",
                      "infeasible")
#: Inputs of the wound-field kernel that hold one value per asset (the load and the site vary per interval).
_WFSM_ROW_INPUTS = ("r", "x", "i_ag", "r_f", "sat", "inv_eta_x", "fixed", "s_max", "s_max2", "a", "cq", "c_re", "rad2",
                    "qd0", "qd1", "v3", "inv3v", "v_r", "tan_set", "tan_t", "is_pf", "is_kvar", "q_set")


#: The outputs a lean pass writes (``wfsm_operating_point(..., detail=False)``), in its order.
_WFSM_LEAN_FLOATS = ("p_in_kw", "q_kvar", "field_copper_loss_kw", "exciter_loss_kw")
_WFSM_LEAN_FLAGS = ("limited_by_stator_current", "limited_by_field_current", "limited_by_load_angle")


def _wfsm_compiled(shape: tuple[int, ...], *, occ_linear: bool, all_pf: bool, all_kvar: bool, lean: bool = False,
                   **inputs) -> dict[str, np.ndarray]:
    """:func:`_wfsm_kernel`'s outputs for inputs broadcast to ``shape``, in one compiled pass.

    The pass (:func:`_wfsm_pass`) does the kernel's operations element by element in its order, so the
    values are the same bit for bit (checked against :func:`_wfsm_kernel` in the tests); it holds no
    temporaries the size of the operating arrays and releases the interpreter lock. The shaft load
    and the site's other power vary per interval; every other input is one value per asset (row), as
    :func:`wfsm_operating_point` builds them; inputs of any other shape go to the numpy kernel. With
    ``lean`` the pass writes only :data:`_WFSM_LEAN_FLOATS` and :data:`_WFSM_LEAN_FLAGS` (the same values).
    """
    n_t = shape[-1] if len(shape) else 1
    n_rows = int(np.prod(shape[:-1])) if len(shape) > 1 else 1

    def per_interval(value):
        return np.ascontiguousarray(np.broadcast_to(np.asarray(value, dtype=float), shape)).reshape(n_rows, n_t)

    def per_row(name):
        value = inputs[name]
        if np.ndim(value) == len(shape) and len(shape) and np.shape(value)[-1] != 1:
            return None  # varies along the intervals: not a per-asset value
        col = np.broadcast_to(np.asarray(value, dtype=bool if name in ("is_pf", "is_kvar") else float),
                              shape[:-1] + (1,) if len(shape) else (1,))
        return np.ascontiguousarray(col).reshape(n_rows)

    rows = [per_row(name) for name in _WFSM_ROW_INPUTS]
    if any(r is None for r in rows):
        return _blockwise(_wfsm_kernel, shape, occ_linear=occ_linear, all_pf=all_pf, all_kvar=all_kvar, **inputs)
    site_rows = [per_row("site_p"), per_row("site_q")]
    site_varies = any(r is None for r in site_rows)
    if site_varies:
        site_p, site_q = per_interval(inputs["site_p"]), per_interval(inputs["site_q"])
    else:  # one value per asset: passed as a one-column array
        site_p, site_q = site_rows[0][:, None], site_rows[1][:, None]
    if _WFSM_ITERATIONS != 3:  # the pass writes the fixed point's three steps out
        return _blockwise(_wfsm_kernel, shape, occ_linear=occ_linear, all_pf=all_pf, all_kvar=all_kvar, **inputs)
    n_floats, n_flags = ((len(_WFSM_LEAN_FLOATS), len(_WFSM_LEAN_FLAGS)) if lean
                         else (len(_WFSM_FLOAT_OUTPUTS) + 1, len(_WFSM_BOOL_OUTPUTS)))
    floats = np.empty((n_floats, n_rows, n_t))
    flags = np.empty((n_flags, n_rows, n_t), dtype=bool)
    _wfsm_pass(per_interval(inputs["p"]), site_p, site_q, site_varies, *rows, bool(occ_linear), bool(all_pf),
               bool(all_kvar), _LIMIT_RTOL, floats, flags, bool(lean))
    if lean:
        out = {name: floats[i].reshape(shape) for i, name in enumerate(_WFSM_LEAN_FLOATS)}
        out.update({name: flags[i].reshape(shape) for i, name in enumerate(_WFSM_LEAN_FLAGS)})
        return out
    # the pass leaves re3 in the load angle's slot and im3 in the extra one: the angle is taken with numpy's
    # arctan2 (its vectorised loop may differ from the C library's in the last bit)
    at = _WFSM_FLOAT_OUTPUTS.index("load_angle_deg")
    re3, im3 = floats[at], floats[-1]
    np.degrees(np.arctan2(im3, re3, out=re3), out=re3)
    out = {name: floats[i].reshape(shape) for i, name in enumerate(_WFSM_FLOAT_OUTPUTS)}
    out.update({name: flags[i].reshape(shape) for i, name in enumerate(_WFSM_BOOL_OUTPUTS)})
    return out


@numba.njit(inline="always")
def _mx(a, b):  # pragma: no cover - compiled
    """numpy.maximum of two floats (the first when equal; NaN when either is NaN)."""
    return a if (a >= b or a != a) else b


@numba.njit(inline="always")
def _mn(a, b):  # pragma: no cover - compiled
    """numpy.minimum of two floats (the first when equal; NaN when either is NaN)."""
    return a if (a <= b or a != a) else b


@numba.njit(error_model="numpy", cache=True)
def _wfsm_step(p_st, p_exc, pm, site_p, site_q, all_pf, all_kvar, is_pf, is_kvar, tan_set, tan_t, q_set, s_max2, c_re,
               rad2, cq, qd0, qd1, a, v3, r, x, inv3v, occ_linear, k_lin, sat, i0, e_max, i_ag, v_r, r_f,
               inv_eta_x):  # pragma: no cover - compiled
    """One step of :func:`_wfsm_kernel`'s fixed point on copper and excitation losses, for one element."""
    p_tot = p_st + p_exc
    if all_pf:
        q_des = tan_set * p_tot
    elif all_kvar:
        q_des = q_set + 0.0 * p_tot
    else:
        q_follow = _mn((site_p + p_tot) * tan_t - site_q, 0.0)
        q_des = tan_set * p_tot if is_pf else (q_set if is_kvar else q_follow)
    q_i = np.sqrt(_mx(s_max2 - p_st * p_st, 0.0))
    dp = p_st - c_re
    h2 = rad2 - dp * dp
    h = np.sqrt(_mx(h2, 0.0))
    q_lo_f = cq - h
    q_hi_d = qd0 - qd1 * p_st
    lo = _mx(-q_i, q_lo_f)
    hi = _mn(q_i, q_hi_d)
    q = _mn(_mx(q_des, lo), hi)
    c = pm + a * q * q
    disc = 1.0 - 4.0 * a * c
    p_st = 2.0 * c / (1.0 + np.sqrt(_mx(disc, 0.0)))
    re3 = v3 - r * p_st - x * q
    im3 = x * p_st - r * q
    emf = np.sqrt(re3 * re3 + im3 * im3) * inv3v
    if occ_linear:
        i_f = emf * k_lin
    elif sat > 1.0:  # _occ_field on the saturating characteristic
        i_f = i0 * emf / (e_max - emf) if emf < e_max else np.inf
    else:  # _occ_field on the air-gap line
        i_f = i_ag * emf / v_r
    p_fcu = i_f * i_f * r_f
    p_exc = p_fcu * inv_eta_x
    return p_st, p_exc, q_des, q, q_i, q_lo_f, q_hi_d, lo, hi, h2, disc, re3, im3, emf, i_f, p_fcu


@numba.njit(error_model="numpy", cache=True)
def _wfsm_start(p_raw, site_p, site_q, fixed, all_pf, all_kvar, is_pf, is_kvar, tan_set, tan_t, q_set, a, s_max2, v3,
                r, x, inv3v, k_lin, r_f, inv_eta_x):  # pragma: no cover - compiled
    """The fixed point's starting values for one element of :func:`_wfsm_kernel`: (pm, p_st, p_exc)."""
    p = p_raw * 1e3
    pm = p + fixed
    if all_pf:
        q0 = tan_set * pm
    elif all_kvar:
        q0 = q_set + 0.0 * pm
    elif is_pf:
        q0 = tan_set * pm
    elif is_kvar:
        q0 = q_set
    else:
        q0 = _mn((site_p + pm) * tan_t - site_q, 0.0)
    p_st = pm + a * _mn(pm * pm + q0 * q0, s_max2)
    re3 = v3 - r * p_st - x * q0
    im3 = x * p_st - r * q0
    i_f = np.sqrt(re3 * re3 + im3 * im3) * inv3v * k_lin
    p_exc = i_f * i_f * r_f * inv_eta_x
    return pm, p_st, p_exc


@numba.njit(error_model="numpy", cache=True)
def _wfsm_finish(floats, flags, i, t, p_st, p_exc, q_des, q, q_i, q_lo_f, q_hi_d, lo, hi, h2, disc, re3, im3, emf, i_f,
                 p_fcu, s_max, inv3v, r, limit_rtol):  # pragma: no cover - compiled
    """Write one element's outputs of :func:`_wfsm_kernel` (after the fixed point's three steps)."""
    tol = limit_rtol * _mx(s_max, abs(q_des))
    low = q_des < lo - tol
    high = q_des > hi + tol
    i_line = np.sqrt(p_st * p_st + q * q) * inv3v
    k = 1e-3
    floats[0, i, t] = (p_st + p_exc) * k
    floats[1, i, t] = q * k
    floats[2, i, t] = i_line
    floats[3, i, t] = i_f
    floats[4, i, t] = emf
    floats[5, i, t] = re3  # the load angle is taken from re3 and im3 in numpy afterwards
    floats[6, i, t] = q_des * k
    floats[7, i, t] = (3.0 * i_line * i_line * r) * k
    floats[8, i, t] = p_fcu * k
    floats[9, i, t] = (p_exc - p_fcu) * k
    floats[10, i, t] = im3
    flags[0, i, t] = q < 0.0
    flags[1, i, t] = (low and (-q_i >= q_lo_f)) or (high and (q_i <= q_hi_d))
    flags[2, i, t] = low and (q_lo_f > -q_i)
    flags[3, i, t] = high and (q_hi_d < q_i)
    flags[4, i, t] = (p_st > s_max) or (h2 < 0.0) or (lo > hi + tol) or (disc < 0.0)


@numba.njit(error_model="numpy", cache=True)
def _wfsm_finish_lean(floats, flags, i, t, p_st, p_exc, q_des, q, q_i, q_lo_f, q_hi_d, lo, hi, h2, disc, re3, im3, emf,
                      i_f, p_fcu, s_max, limit_rtol):  # pragma: no cover - compiled
    """:func:`_wfsm_finish` for a lean pass: :data:`_WFSM_LEAN_FLOATS` and :data:`_WFSM_LEAN_FLAGS` only."""
    tol = limit_rtol * _mx(s_max, abs(q_des))
    low = q_des < lo - tol
    high = q_des > hi + tol
    k = 1e-3
    floats[0, i, t] = (p_st + p_exc) * k
    floats[1, i, t] = q * k
    floats[2, i, t] = p_fcu * k
    floats[3, i, t] = (p_exc - p_fcu) * k
    flags[0, i, t] = (low and (-q_i >= q_lo_f)) or (high and (q_i <= q_hi_d))
    flags[1, i, t] = low and (q_lo_f > -q_i)
    flags[2, i, t] = high and (q_hi_d < q_i)


@numba.njit(nogil=True, cache=True, error_model="numpy")
def _wfsm_pass(p_, site_p_, site_q_, site_varies, r_, x_, i_ag_, r_f_, sat_, inv_eta_x_, fixed_, s_max_, s_max2_, a_,
               cq_, c_re_, rad2_, qd0_, qd1_, v3_, inv3v_, v_r_, tan_set_, tan_t_, is_pf_, is_kvar_, q_set_, occ_linear,
               all_pf, all_kvar, limit_rtol, floats, flags, lean):  # pragma: no cover - compiled
    """Compiled body of :func:`_wfsm_compiled`: :func:`_wfsm_kernel` element by element, row by row.

    Each row is worked a step at a time over all its intervals (start, the fixed point's steps, then the
    outputs), the state held in scratch rows that stay in cache: each loop is a plain element-wise loop
    that the compiler can run on several intervals at once, and every interval still does the kernel's
    operations in its order, so the values are the same bit for bit.
    """
    n_i, n_t = p_.shape
    pm, p_st, p_exc = np.empty(n_t), np.empty(n_t), np.empty(n_t)
    sp, sq = np.empty(n_t), np.empty(n_t)
    for i in range(n_i):
        fixed, a, r, x, v3, inv3v = fixed_[i], a_[i], r_[i], x_[i], v3_[i], inv3v_[i]
        i_ag, v_r, sat, r_f, inv_eta_x = i_ag_[i], v_r_[i], sat_[i], r_f_[i], inv_eta_x_[i]
        s_max, s_max2, c_re, rad2, cq = s_max_[i], s_max2_[i], c_re_[i], rad2_[i], cq_[i]
        qd0, qd1, tan_set, tan_t, q_set = qd0_[i], qd1_[i], tan_set_[i], tan_t_[i], q_set_[i]
        is_pf, is_kvar = is_pf_[i], is_kvar_[i]
        k_lin = i_ag / v_r
        s_sat = sat if sat > 1.0 else 2.0
        e_max = s_sat * v_r / (s_sat - 1.0)
        i0 = i_ag * e_max / v_r
        for t in range(n_t):
            sp[t] = site_p_[i, t] if site_varies else site_p_[i, 0]
            sq[t] = site_q_[i, t] if site_varies else site_q_[i, 0]
        for t in range(n_t):
            pm[t], p_st[t], p_exc[t] = _wfsm_start(p_[i, t], sp[t], sq[t], fixed, all_pf, all_kvar, is_pf, is_kvar,
                                                   tan_set, tan_t, q_set, a, s_max2, v3, r, x, inv3v, k_lin, r_f,
                                                   inv_eta_x)
        for _ in range(2):  # the fixed point's first two steps
            for t in range(n_t):
                s = _wfsm_step(p_st[t], p_exc[t], pm[t], sp[t], sq[t], all_pf, all_kvar, is_pf, is_kvar, tan_set,
                               tan_t, q_set, s_max2, c_re, rad2, cq, qd0, qd1, a, v3, r, x, inv3v, occ_linear, k_lin,
                               sat, i0, e_max, i_ag, v_r, r_f, inv_eta_x)
                p_st[t], p_exc[t] = s[0], s[1]
        for t in range(n_t):  # the third step, and the outputs
            s = _wfsm_step(p_st[t], p_exc[t], pm[t], sp[t], sq[t], all_pf, all_kvar, is_pf, is_kvar, tan_set, tan_t,
                           q_set, s_max2, c_re, rad2, cq, qd0, qd1, a, v3, r, x, inv3v, occ_linear, k_lin, sat, i0,
                           e_max, i_ag, v_r, r_f, inv_eta_x)
            if lean:
                _wfsm_finish_lean(floats, flags, i, t, *s, s_max, limit_rtol)
            else:
                _wfsm_finish(floats, flags, i, t, *s, s_max, inv3v, r, limit_rtol)


@dataclass(frozen=True)
class VCurve:
    """V-curves of a WFSM: stator current against field current at several shaft loads.

    Attributes
    ----------
    p_shaft_kw : ndarray (k,), the loads [kW].
    field_current_a : ndarray (m,), the field currents [A].
    stator_current_a : ndarray (k, m), line current [A]; NaN where unstable.
    power_factor : ndarray (k, m) [-]; NaN where unstable.
    leading : ndarray (k, m) of bool.
    load_angle_deg : ndarray (k, m) [deg]; NaN where unstable.
    stable : ndarray (k, m) of bool, False beyond pull-out (no steady state at that excitation).
    """

    p_shaft_kw: np.ndarray
    field_current_a: np.ndarray
    stator_current_a: np.ndarray
    power_factor: np.ndarray
    leading: np.ndarray
    load_angle_deg: np.ndarray
    stable: np.ndarray


def wfsm_v_curve(p_shaft_kw, field_current_a, *, rated_v_ll_v, synchronous_reactance_ohm, armature_resistance_ohm,
                 field_current_at_rated_voltage_a, core_loss_kw, friction_windage_loss_kw, saturation_factor=1.0,
                 supply_v_ll_v=None) -> VCurve:
    """Return V-curves (stator current vs field current at given loads) of one WFSM, ready to plot.

    Parameters
    ----------
    p_shaft_kw : array_like, shape (k,)
        Shaft loads [kW], >= 0.
    field_current_a : array_like, shape (m,)
        Field currents [A], >= 0.
    rated_v_ll_v, synchronous_reactance_ohm, armature_resistance_ohm, field_current_at_rated_voltage_a,
    core_loss_kw, friction_windage_loss_kw, saturation_factor, supply_v_ll_v : float
        As in :func:`wfsm_operating_point` (one machine).

    Returns
    -------
    VCurve

    Notes
    -----
    For each field current, E_f = OCC(I_f); the stator active power P (shaft + core + friction +
    copper, three fixed-point steps) fixes the operating point on the circle |3V² - Z(P - jQ)| = 3·V·E_f.
    The stable branch is the one with the smaller load angle, Q = 3V²X/|Z|² - sqrt(r² - (P - 3V²R/|Z|²)²),
    r = 3·V·E_f/|Z|; no real root means the load exceeds pull-out at that excitation [1], [2].

    References
    ----------
    [1] S. J. Chapman, *Electric Machinery Fundamentals*, 4th ed. McGraw-Hill, 2005, Ch. 5 (V-curves).
    [2] A. E. Fitzgerald, C. Kingsley Jr. and S. D. Umans, *Electric Machinery*, 6th ed. McGraw-Hill, 2003.
    """
    pk = np.atleast_1d(np.asarray(p_shaft_kw, dtype=float))
    ifa = np.atleast_1d(np.asarray(field_current_a, dtype=float))
    _check_range("p_shaft_kw", pk, 0.0, np.inf, unit="kW")
    _check_range("field_current_a", ifa, 0.0, np.inf, unit="A")
    for name, val in (("rated_v_ll_v", rated_v_ll_v), ("synchronous_reactance_ohm", synchronous_reactance_ohm),
                      ("field_current_at_rated_voltage_a", field_current_at_rated_voltage_a)):
        _check_range(name, np.asarray(val, dtype=float), 0.0, np.inf, lo_open=True)
    for name, val in (("armature_resistance_ohm", armature_resistance_ohm), ("core_loss_kw", core_loss_kw),
                      ("friction_windage_loss_kw", friction_windage_loss_kw)):
        _check_range(name, np.asarray(val, dtype=float), 0.0, np.inf)
    _check_range("saturation_factor", np.asarray(saturation_factor, dtype=float), 1.0, np.inf)
    v_r = float(rated_v_ll_v) / SQRT3
    v = v_r if supply_v_ll_v is None else float(supply_v_ll_v) / SQRT3
    x = float(synchronous_reactance_ohm)
    r = float(armature_resistance_ohm)
    z2 = r * r + x * x
    e = _occ_emf(ifa[None, :], float(field_current_at_rated_voltage_a), v_r, np.asarray(float(saturation_factor)))
    pm = (pk[:, None] + float(core_loss_kw) * (v / v_r) ** 2 + float(friction_windage_loss_kw)) * 1e3
    rad = 3.0 * v * e / np.sqrt(z2)
    cq = 3.0 * v * v * x / z2
    c_re = 3.0 * v * v * r / z2
    a = r / (3.0 * v * v)
    p = np.broadcast_to(pm, np.broadcast_shapes(pm.shape, rad.shape)).copy()
    for _ in range(3):
        h2 = rad * rad - (p - c_re) ** 2
        q = cq - np.sqrt(np.maximum(h2, 0.0))
        p = pm + a * (p * p + q * q)
    h2 = rad * rad - (p - c_re) ** 2
    q = cq - np.sqrt(np.maximum(h2, 0.0))
    stable = h2 >= 0.0
    i = np.sqrt(p * p + q * q) / (3.0 * v)
    pf = p / np.sqrt(p * p + q * q)
    delta = np.degrees(np.arctan2(x * p - r * q, 3.0 * v * v - r * p - x * q))
    nan = np.nan
    return VCurve(pk, ifa, np.where(stable, i, nan), np.where(stable, pf, nan), stable & (q < 0.0),
                  np.where(stable, delta, nan), stable)


def wfsm_parameters_from_rating(rated_p_kw, rated_v_ll_v, *, rated_efficiency_frac=0.97, rated_power_factor=0.8,
                                rated_leading=True, synchronous_reactance_pu=WFSM_SYNCHRONOUS_REACTANCE_PU,
                                rated_field_current_a=100.0, saturation_factor=1.0,
                                exciter_efficiency_frac=WFSM_EXCITER_EFFICIENCY_FRAC,
                                loss_split: dict[str, float] | None = None) -> dict[str, np.ndarray]:
    """Return WFSM circuit parameters that reproduce a nameplate rating.

    Parameters
    ----------
    rated_p_kw : float or array_like
        Rated shaft power [kW], > 0.
    rated_v_ll_v : float or array_like
        Rated line voltage [V], > 0.
    rated_efficiency_frac : float or array_like, optional
        Rated efficiency including excitation [-], (0, 1); default 0.97 (from memory, large motors).
    rated_power_factor : float or array_like, optional
        Rated (design) power factor [-], (0, 1]; default 0.8.
    rated_leading : bool or array_like, optional
        True (default) for a leading design power factor.
    synchronous_reactance_pu : float or array_like, optional
        X_s on the rated kVA base [pu]; default :data:`WFSM_SYNCHRONOUS_REACTANCE_PU` (from memory).
    rated_field_current_a : float or array_like, optional
        Field current at the rated point [A]; sets the scale of field quantities only; default 100.
    saturation_factor : float or array_like, optional
        See :func:`wfsm_operating_point`; default 1 (air-gap line).
    exciter_efficiency_frac : float or array_like, optional
        Exciter efficiency [-]; default :data:`WFSM_EXCITER_EFFICIENCY_FRAC`.
    loss_split : dict or None, optional
        Shares of the rated loss with keys "stator_copper", "excitation", "core", "friction_windage";
        default :data:`WFSM_LOSS_SPLIT` (common practice).

    Returns
    -------
    dict of ndarray
        Keyword arguments for :func:`wfsm_operating_point` (the rating sits on both the stator-current
        and the field-current ceiling, as in a machine designed for that point).

    Notes
    -----
    L = P_r(1/eta - 1); P_in = P_r + L; Q_r = ∓P_in·tan(acos PF_r); P_stator = P_in - L_exc;
    I_r = sqrt(P_stator² + Q_r²)/(sqrt(3)·V); R_a = L_cu/(3·I_r²); X_s = x_pu·V²/S_r with S_r = P_in/PF_r;
    E_r from V = E + Z·I; R_f = L_exc·eta_exc/I_f,r²; the air-gap field current at rated voltage
    follows from the open-circuit characteristic through (I_f,r, E_r).
    """
    split = dict(WFSM_LOSS_SPLIT if loss_split is None else loss_split)
    if set(split) != set(WFSM_LOSS_SPLIT) or min(split.values()) < 0 or abs(sum(split.values()) - 1) > 1e-9:
        raise ValueError(f"loss_split needs keys {sorted(WFSM_LOSS_SPLIT)} with shares >= 0 summing to 1; got {split}")
    p = np.asarray(rated_p_kw, dtype=float) * 1e3
    v_ll = np.asarray(rated_v_ll_v, dtype=float)
    eta = np.asarray(rated_efficiency_frac, dtype=float)
    pf = np.asarray(rated_power_factor, dtype=float)
    xpu = np.asarray(synchronous_reactance_pu, dtype=float)
    i_fr = np.asarray(rated_field_current_a, dtype=float)
    sat = np.asarray(saturation_factor, dtype=float)
    eta_x = np.asarray(exciter_efficiency_frac, dtype=float)
    _check_range("rated_p_kw", p, 0.0, np.inf, lo_open=True)
    _check_range("rated_v_ll_v", v_ll, 0.0, np.inf, lo_open=True)
    _check_range("rated_efficiency_frac", eta, 0.0, 1.0, lo_open=True, hi_open=True)
    _check_range("rated_power_factor", pf, 0.0, 1.0, lo_open=True)
    _check_range("synchronous_reactance_pu", xpu, 0.0, np.inf, lo_open=True)
    _check_range("rated_field_current_a", i_fr, 0.0, np.inf, lo_open=True, unit="A")
    _check_range("saturation_factor", sat, 1.0, np.inf)
    _check_range("exciter_efficiency_frac", eta_x, 0.0, 1.0, lo_open=True)
    loss = p * (1.0 / eta - 1.0)
    l_cu, l_exc = loss * split["stator_copper"], loss * split["excitation"]
    l_core, l_fw = loss * split["core"], loss * split["friction_windage"]
    p_in = p + loss
    q = np.where(np.asarray(rated_leading, dtype=bool), -1.0, 1.0) * p_in * np.sqrt(1.0 - pf * pf) / pf
    p_st = p_in - l_exc
    v = v_ll / SQRT3
    i_r = np.sqrt(p_st * p_st + q * q) / (3.0 * v)
    r_a = l_cu / (3.0 * i_r * i_r)
    x_s = xpu * v_ll * v_ll / (p_in / pf)
    re3 = 3.0 * v * v - r_a * p_st - x_s * q
    im3 = x_s * p_st - r_a * q
    e_r = np.sqrt(re3 * re3 + im3 * im3) / (3.0 * v)
    s = np.where(sat > 1.0, sat, 2.0)
    e_max = s * v / (s - 1.0)
    if np.any((sat > 1.0) & (e_r >= e_max)):
        raise ValueError("saturation_factor too large: the rated EMF lies beyond the saturation asymptote")
    i0 = i_fr * (e_max - e_r) / np.where(sat > 1.0, e_r, 1.0)
    i_ag = np.where(sat > 1.0, v * i0 / e_max, i_fr * v / e_r)
    r_f = l_exc * eta_x / (i_fr * i_fr)
    return {
        "rated_v_ll_v": v_ll, "synchronous_reactance_ohm": x_s, "armature_resistance_ohm": r_a,
        "field_current_at_rated_voltage_a": i_ag, "field_resistance_ohm": r_f, "core_loss_kw": l_core / 1e3,
        "friction_windage_loss_kw": l_fw / 1e3, "max_stator_current_a": i_r, "max_field_current_a": i_fr * 1.0,
        "saturation_factor": sat, "exciter_efficiency_frac": eta_x,
    }


@dataclass(frozen=True)
class WoundFieldSynchronousMotor:
    """Circuit parameters and limits of a wound-field synchronous motor (see :func:`wfsm_operating_point`).

    Fields are floats or per-asset arrays ``(n,)``. Build from a nameplate with :meth:`from_rating`.
    """

    rated_p_kw: object
    rated_v_ll_v: object
    poles: object
    synchronous_reactance_ohm: object
    armature_resistance_ohm: object
    field_current_at_rated_voltage_a: object
    field_resistance_ohm: object
    core_loss_kw: object
    friction_windage_loss_kw: object
    max_stator_current_a: object
    max_field_current_a: object
    f_hz: object = 50.0
    saturation_factor: object = 1.0
    exciter_efficiency_frac: object = WFSM_EXCITER_EFFICIENCY_FRAC
    max_load_angle_deg: object = WFSM_MAX_LOAD_ANGLE_DEG

    @classmethod
    def from_rating(cls, rated_p_kw, rated_v_ll_v, poles, f_hz=50.0, *, max_load_angle_deg=WFSM_MAX_LOAD_ANGLE_DEG,
                    **rating) -> "WoundFieldSynchronousMotor":
        """Build from a nameplate; keyword arguments as :func:`wfsm_parameters_from_rating`."""
        params = wfsm_parameters_from_rating(rated_p_kw, rated_v_ll_v, **rating)
        return cls(rated_p_kw=rated_p_kw, poles=poles, f_hz=f_hz, max_load_angle_deg=max_load_angle_deg, **params)

    def speed_rpm(self):
        """Return the synchronous speed [rpm]; see :func:`synchronous_speed_rpm`."""
        return synchronous_speed_rpm(self.f_hz, self.poles)

    def _circuit(self) -> dict[str, object]:
        return {
            "rated_v_ll_v": self.rated_v_ll_v, "synchronous_reactance_ohm": self.synchronous_reactance_ohm,
            "armature_resistance_ohm": self.armature_resistance_ohm,
            "field_current_at_rated_voltage_a": self.field_current_at_rated_voltage_a,
            "core_loss_kw": self.core_loss_kw, "friction_windage_loss_kw": self.friction_windage_loss_kw,
            "saturation_factor": self.saturation_factor,
        }

    def operate(self, p_shaft_kw, **mode) -> WoundFieldResult:
        """Return the operating point; mode keywords as :func:`wfsm_operating_point`."""
        return wfsm_operating_point(
            p_shaft_kw, field_resistance_ohm=self.field_resistance_ohm,
            max_stator_current_a=self.max_stator_current_a, max_field_current_a=self.max_field_current_a,
            exciter_efficiency_frac=self.exciter_efficiency_frac, max_load_angle_deg=self.max_load_angle_deg,
            **self._circuit(), **mode,
        )

    def v_curve(self, p_shaft_kw, field_current_a, supply_v_ll_v=None) -> VCurve:
        """Return V-curves; see :func:`wfsm_v_curve` (single machine)."""
        return wfsm_v_curve(p_shaft_kw, field_current_a, supply_v_ll_v=supply_v_ll_v, **self._circuit())


__all__ = [
    "LSPM_LOSS_SPLIT", "LSPM_MAX_LOAD_INERTIA_RATIO", "LSPM_MAX_START_LOAD_TORQUE_FRAC", "LSPM_MAX_STARTS_PER_HOUR",
    "LSPM_MAX_SUPPLY_VOLTAGE_DIP_FRAC", "LSPM_RATED_POWER_FACTOR", "LSPM_SYNCHRONOUS_REACTANCE_PU",
    "PM_DRIVE_LOSS_SPLIT", "SYNRM_LOSS_SPLIT", "MAGNETISING_CURRENT_FRAC", "RATED_MOTOR_POWER_FACTOR",
    "IRON_LOSS_SPEED_EXPONENT", "FRICTION_LOSS_SPEED_EXPONENT", "WFSM_MODES", "WFSM_MAX_LOAD_ANGLE_DEG",
    "WFSM_EXCITER_EFFICIENCY_FRAC", "WFSM_SYNCHRONOUS_REACTANCE_PU", "WFSM_LOSS_SPLIT",
    "LossSplit", "LineStartPMResult", "LineStartPMMotor", "StartingScreenResult", "DriveFedSynchronousResult",
    "DriveFedSynchronousMotor", "WoundFieldResult", "VCurve", "WoundFieldSynchronousMotor",
    "synchronous_speed_rpm", "reactive_power_to_reach_power_factor_kvar", "power_angle_p_kw",
    "lspm_operating_point", "lspm_starting_screen", "drive_fed_synchronous_operating_point",
    "wfsm_operating_point", "wfsm_v_curve", "wfsm_parameters_from_rating",
]
