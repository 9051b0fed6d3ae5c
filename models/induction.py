"""Three-phase cage induction motor on a fixed-frequency supply, calibrated from its nameplate.

Scope: the steady-state operating point (input kW and kVAr, efficiency, power factor, slip, shaft speed
and the loss split) of line-operated induction motors from 0 to 125 % of rated shaft power, vectorised
over a fleet (one array element per motor) and over time steps. Losses are split into a constant part
(core, friction and windage) and load-dependent parts (stator copper, rotor copper = slip x air-gap power,
stray load). The model is calibrated so that full-load efficiency and power factor equal the nameplate
values exactly; published 75 % and 50 % load points are honoured where given, and a documented typical
split is used otherwise. Rewinds raise the losses by a set number of efficiency points per rewind.
The equations, their sources and the range of validity are collected in ``docs/models-induction.md``.
"""

from __future__ import annotations

from dataclasses import dataclass, fields
from typing import Any, Callable

import numba
import numpy as np
import pandas as pd

#: One mechanical horsepower [kW] (docs/conventions.md).
KW_PER_HP = 0.745699872

#: Efficiency drop per rewind [percentage points]. Average change measured on ten IE3 motors of
#: 30-75 kW rewound to good practice (EASA/AEMT 2019 study, -0.1 point; see the module References).
#: Typical-shop and poor-practice figures are :data:`REWIND_LOSS_TYPICAL_PCT_POINTS` and
#: :data:`REWIND_LOSS_POOR_PCT_POINTS`.
DEFAULT_REWIND_LOSS_PCT_POINTS = 0.1
#: Lowest full-load efficiency a rewound motor is calibrated at [-]: below it the rewinds' losses leave no credible
#: motor (:func:`calibrate_induction` refuses it; a rewind that would take a motor there is not offered).
MIN_REWOUND_EFFICIENCY_FRAC = 0.05
#: Efficiency drop per rewind in a typical shop [percentage points]; common practice ("about one
#: point per rewind" is the often-quoted figure from older utility studies), not a measured value.
REWIND_LOSS_TYPICAL_PCT_POINTS = 1.0
#: Efficiency drop per rewind with uncontrolled burn-off or core damage [percentage points]; common
#: practice (0.5-2 points quoted), upper end.
REWIND_LOSS_POOR_PCT_POINTS = 2.0

#: Load at which efficiency peaks when no part-load data are given [-]. "Maximum efficiency is usually
#: near 75 % of rated load" (US DOE fact sheet DOE/GO-10097-517). Equal constant and load-dependent
#: losses at that load give a constant-loss share x^2/(1+x^2) = 0.36 of full-load losses.
DEFAULT_PEAK_EFFICIENCY_LOAD_FRAC = 0.75
#: Share of full-load kVAr drawn at no load (magnetising kVAr) when no part-load PF is given [-].
#: Common practice (value from memory): no-load kVAr of a standard LV motor is 60-80 % of its full-load
#: kVAr; 0.70 gives PF(50 %) 0.10-0.15 below PF(100 %) for typical 15-75 kW motors.
DEFAULT_MAGNETISING_KVAR_SHARE_FRAC = 0.70
#: Friction-and-windage share of the constant losses [-]; common practice (typical loss-distribution
#: tables give core 15-25 % and friction and windage 5-15 % of full-load losses).
FRICTION_WINDAGE_SHARE_OF_CONSTANT = 0.3
#: Stray-load share of the stator-copper-plus-stray losses [-]; common practice (typical tables give
#: stator copper 25-40 % and stray 10-20 % of full-load losses). Only the reported split depends on it.
STRAY_SHARE_OF_STATOR_AND_STRAY = 0.25
#: Highest shaft load accepted [fraction of rated]; the model is calibrated for 0-125 %.
MAX_LOAD_FRAC = 1.5
#: Highest rated slip accepted [-]; beyond it the linear slip-torque relation is not credible.
MAX_RATED_SLIP_FRAC = 0.15

#: Typical full-load slip by size (Engineering ToolBox, "Slip in electrical induction motors"):
#: rating [hp] and slip [-].
_SLIP_TABLE_HP = np.array([0.5, 5.0, 15.0, 50.0, 250.0])
_SLIP_TABLE_FRAC = np.array([0.05, 0.03, 0.025, 0.017, 0.008])
#: Range of the load exponent k fitted when both part-load points are given [-].
MIN_LOAD_EXPONENT = 0.5
MAX_LOAD_EXPONENT = 6.0
#: Fixed-point passes for the friction-and-windage share during calibration (converges to ~1e-9).
_CALIBRATION_PASSES = 6
#: Bisection steps for the load exponent (interval 5.5 / 2**60: far below float precision of k).
_EXPONENT_BISECTIONS = 60
#: Newton steps in :func:`shaft_from_input_kw` when a load exponent differs from 2.
_NEWTON_STEPS = 4


# --------------------------------------------------------------------------------------------------
# Array kinds: accept scalars, numpy arrays and pandas objects; return the kind given.
# --------------------------------------------------------------------------------------------------
def _unwrap(x: Any) -> tuple[np.ndarray, Callable[[np.ndarray], Any], str]:
    """Return ``x`` as a float array, a function that restores the input kind, and the kind."""
    if isinstance(x, pd.DataFrame):
        return (
            x.to_numpy(dtype=float),
            lambda a: pd.DataFrame(a, index=x.index, columns=x.columns),
            "frame",
        )
    if isinstance(x, pd.Series):
        return x.to_numpy(dtype=float), lambda a: pd.Series(a, index=x.index, name=x.name), "series"
    a = np.asarray(x, dtype=float)
    if a.ndim == 0:
        return a, lambda r: float(r) if np.ndim(r) == 0 else r, "scalar"
    return a, lambda r: r, "array"


def _bad_index_text(bad: np.ndarray) -> str:
    """Describe where a boolean 'bad' mask is true (first few flat indices)."""
    idx = np.flatnonzero(bad)
    shown = ", ".join(str(i) for i in idx[:5])
    more = f" and {idx.size - 5} more" if idx.size > 5 else ""
    return f"at index {shown}{more}"


def _forbid(bad: np.ndarray | bool, message: str) -> None:
    """Raise ValueError with ``message`` and the offending positions where ``bad`` holds (NaN is not bad)."""
    bad_arr = np.asarray(bad)
    if bad_arr.any():
        raise ValueError(f"{message} ({_bad_index_text(bad_arr)}).")


def _require(ok: np.ndarray | bool, message: str) -> None:
    """Raise ValueError with ``message`` and the offending positions unless ``ok`` holds everywhere."""
    ok_arr = np.asarray(ok)
    if not ok_arr.all():
        raise ValueError(f"{message} ({_bad_index_text(~ok_arr)}).")


def _require_in(ok: np.ndarray | bool, message: str, quantity: str) -> None:
    """:func:`_require`, given also the input a calibration rule points at (``quantity``, not read here)."""
    _require(ok, message)


# --------------------------------------------------------------------------------------------------
# Speed, slip and power-flow relations
# --------------------------------------------------------------------------------------------------
def sync_speed_rpm(f_hz, poles):
    """Synchronous speed of a rotating field.

    Parameters
    ----------
    f_hz : float or array_like
        Supply frequency [Hz], > 0.
    poles : int or array_like
        Number of poles [-], a positive even integer.

    Returns
    -------
    float or array_like
        Synchronous speed [rpm], same kind as the inputs.

    Raises
    ------
    ValueError
        If ``f_hz`` <= 0 or ``poles`` is not a positive even integer.

    Notes
    -----
    n_s = 120 f / p, the standard relation [1]. Do not confuse ``poles`` with pole pairs.

    References
    ----------
    .. [1] A. E. Fitzgerald, C. Kingsley Jr. and S. D. Umans, *Electric Machinery*, 6th ed.
       New York: McGraw-Hill, 2003, ch. 4.

    Examples
    --------
    A 4-pole motor on a 50 Hz supply:

    >>> sync_speed_rpm(50.0, 4)
    1500.0
    """
    f, _, _ = _unwrap(f_hz)
    p, _, _ = _unwrap(poles)
    _require(np.isfinite(f) & (f > 0), "f_hz must be a positive frequency")
    _require((p > 0) & (np.mod(p, 2) == 0), "poles must be a positive even integer (poles, not pole pairs)")
    return 120.0 * f_hz / poles


def slip_frac(sync_speed_rpm, speed_rpm):
    """Slip of an induction machine.

    Parameters
    ----------
    sync_speed_rpm : float or array_like
        Synchronous speed [rpm], > 0.
    speed_rpm : float or array_like
        Rotor (shaft) speed [rpm].

    Returns
    -------
    float or array_like
        Slip s = (n_s - n)/n_s [-]; positive when motoring.

    Notes
    -----
    Definition of slip, e.g. Fitzgerald et al., *Electric Machinery*, 6th ed., Eq. 6.1.

    Examples
    --------
    >>> round(slip_frac(1500.0, 1470.0), 6)
    0.02
    """
    ns, _, _ = _unwrap(sync_speed_rpm)
    _require(ns > 0, "sync_speed_rpm must be positive")
    return (sync_speed_rpm - speed_rpm) / sync_speed_rpm


def slip_from_power_flow(airgap_p_kw, converted_p_kw):
    """Slip implied by the air-gap and converted (internal mechanical) power.

    Parameters
    ----------
    airgap_p_kw : float or array_like
        Power crossing the air gap [kW], > 0.
    converted_p_kw : float or array_like
        Power converted to mechanical form before friction and windage [kW].

    Returns
    -------
    float or array_like
        Slip s = 1 - P_conv / P_ag [-].

    Notes
    -----
    From P_conv = (1 - s) P_ag (Fitzgerald et al., *Electric Machinery*, 6th ed., Eq. 6.32).
    """
    pag, _, _ = _unwrap(airgap_p_kw)
    _require(pag > 0, "airgap_p_kw must be positive")
    return 1.0 - converted_p_kw / airgap_p_kw


def rotor_copper_loss_kw(airgap_p_kw, slip_frac):
    """Rotor copper loss, the slip share of the air-gap power.

    Parameters
    ----------
    airgap_p_kw : float or array_like
        Air-gap power [kW].
    slip_frac : float or array_like
        Slip [-], 0-1.

    Returns
    -------
    float or array_like
        P_RCL = s P_ag [kW].

    Notes
    -----
    Fitzgerald et al., *Electric Machinery*, 6th ed., Eq. 6.31.

    Examples
    --------
    20 kW across the air gap at 2 % slip:

    >>> round(rotor_copper_loss_kw(20.0, 0.02), 6)
    0.4
    """
    return slip_frac * airgap_p_kw


def converted_power_kw(airgap_p_kw, slip_frac):
    """Power converted to mechanical form (before friction and windage).

    Parameters
    ----------
    airgap_p_kw : float or array_like
        Air-gap power [kW].
    slip_frac : float or array_like
        Slip [-], 0-1.

    Returns
    -------
    float or array_like
        P_conv = (1 - s) P_ag [kW].

    Notes
    -----
    Fitzgerald et al., *Electric Machinery*, 6th ed., Eq. 6.32.
    """
    return (1.0 - slip_frac) * airgap_p_kw


def rotor_frequency_hz(f_hz, slip_frac):
    """Frequency of the rotor currents, f_r = s f [Hz] (Fitzgerald et al., 6th ed., Eq. 6.3)."""
    return slip_frac * f_hz


def shaft_torque_nm(shaft_p_kw, speed_rpm):
    """Shaft torque from shaft power and speed.

    Parameters
    ----------
    shaft_p_kw : float or array_like
        Shaft power [kW].
    speed_rpm : float or array_like
        Shaft speed [rpm], > 0.

    Returns
    -------
    float or array_like
        T = P / omega_m with omega_m = 2 pi n / 60 [N m].
    """
    n, _, _ = _unwrap(speed_rpm)
    _require(n > 0, "speed_rpm must be positive")
    return shaft_p_kw * 1000.0 / (speed_rpm * 2.0 * np.pi / 60.0)


def default_rated_slip_frac(rated_p_kw):
    """Typical full-load slip of a standard induction motor by size.

    Parameters
    ----------
    rated_p_kw : float or array_like
        Rated shaft power [kW], > 0.

    Returns
    -------
    float or array_like
        Typical rated slip [-], interpolated linearly on log10(rated power) between the table points
        and held constant beyond the smallest and largest.

    Notes
    -----
    Table [1]: 0.5 hp 5 %, 5 hp 3 %, 15 hp 2.5 %, 50 hp 1.7 %, 250 hp 0.8 %, converted at
    1 hp = 0.745699872 kW. It describes standard motors; premium-efficiency (IE3/IE4) motors usually
    slip less, so use the nameplate speed where known. The IEC tolerance on guaranteed slip is +-20 %
    (+-30 % below 1 kW) [2].

    References
    ----------
    .. [1] The Engineering ToolBox, "Slip in electrical induction motors," table of typical slip.
    .. [2] IEC 60034-1:2017, *Rotating electrical machines - Part 1: Rating and performance*,
       Table 21 (tolerances).

    Examples
    --------
    >>> round(default_rated_slip_frac(3.7285), 4)  # 5 hp
    0.03
    """
    p, wrap, _ = _unwrap(rated_p_kw)
    _require(np.isfinite(p) & (p > 0), "rated_p_kw must be positive")
    x = np.log10(p)
    xp = np.log10(_SLIP_TABLE_HP * KW_PER_HP)
    return wrap(np.interp(x, xp, _SLIP_TABLE_FRAC))


# --------------------------------------------------------------------------------------------------
# Parameter set and operating point
# --------------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class InductionParams:
    """Calibrated loss and reactive-power coefficients of a fleet of induction motors.

    Every field is a read-only numpy array with one element per motor (or a 0-d array for one motor).
    Build it with :func:`calibrate_induction`; the coefficients are those of the equations in
    ``docs/models-induction.md`` in terms of the per-unit air-gap power (per-unit torque) y.

    Attributes
    ----------
    rated_p_kw : ndarray
        Rated shaft power [kW].
    rated_efficiency_frac : ndarray
        Full-load efficiency after any rewinds [-].
    rated_power_factor : ndarray
        Nameplate full-load power factor [-].
    sync_speed_rpm : ndarray
        Synchronous speed [rpm].
    rated_slip_frac : ndarray
        Full-load slip [-].
    rated_airgap_p_kw : ndarray
        Air-gap power at full load [kW].
    friction_windage_kw : ndarray
        Friction and windage loss [kW] (constant).
    loss_constant_kw : ndarray
        Core plus friction-and-windage loss, A [kW] (constant).
    loss_load_kw : ndarray
        Stator copper plus stray load loss at rated torque, B [kW].
    loss_exponent : ndarray
        Exponent k of the stator copper plus stray loss, B y^k [-] (2 unless both part-load
        efficiencies are given).
    q_constant_kvar : ndarray
        Reactive power at zero torque (magnetising), Q0 [kVAr].
    q_load_kvar : ndarray
        Leakage reactive power at rated torque, Q2 [kVAr].
    q_exponent : ndarray
        Exponent of the leakage kVAr, Q2 y^kq [-] (2 unless both part-load PFs are given).
    """

    rated_p_kw: np.ndarray
    rated_efficiency_frac: np.ndarray
    rated_power_factor: np.ndarray
    sync_speed_rpm: np.ndarray
    rated_slip_frac: np.ndarray
    rated_airgap_p_kw: np.ndarray
    friction_windage_kw: np.ndarray
    loss_constant_kw: np.ndarray
    loss_load_kw: np.ndarray
    loss_exponent: np.ndarray
    q_constant_kvar: np.ndarray
    q_load_kvar: np.ndarray
    q_exponent: np.ndarray

    def __post_init__(self) -> None:
        for f in fields(self):
            a = np.array(getattr(self, f.name), dtype=float)
            a.flags.writeable = False
            object.__setattr__(self, f.name, a)

    @property
    def rated_speed_rpm(self) -> np.ndarray:
        """Full-load shaft speed [rpm]."""
        return self.sync_speed_rpm * (1.0 - self.rated_slip_frac)

    def operating_point(self, shaft_p_kw) -> "InductionPoint":
        """Operating point at the given shaft power; see :func:`induction_operating_point`."""
        return induction_operating_point(self, shaft_p_kw)

    def shaft_from_input_kw(self, p_in_kw):
        """Shaft power from input power; see :func:`shaft_from_input_kw`."""
        return shaft_from_input_kw(self, p_in_kw)


@dataclass(frozen=True)
class InductionPoint:
    """Operating point of induction motors; every field has the shape and kind of the shaft load.

    Attributes
    ----------
    p_in_kw : array_like
        Electrical input (active) power [kW], consumer sign (positive = drawn).
    q_kvar : array_like
        Reactive power drawn [kVAr], positive = lagging.
    efficiency_frac : array_like
        Shaft power / input power [-] (0 at zero load).
    power_factor : array_like
        Displacement power factor P/S [-], lagging.
    slip_frac : array_like
        Slip [-].
    speed_rpm : array_like
        Shaft speed [rpm].
    p_airgap_kw : array_like
        Air-gap power [kW].
    loss_core_fw_kw : array_like
        Core plus friction-and-windage loss [kW].
    loss_stator_cu_kw : array_like
        Stator copper loss [kW].
    loss_rotor_cu_kw : array_like
        Rotor copper loss = slip x air-gap power [kW].
    loss_stray_kw : array_like
        Stray load loss [kW].
    """

    p_in_kw: Any
    q_kvar: Any
    efficiency_frac: Any
    power_factor: Any
    slip_frac: Any
    speed_rpm: Any
    p_airgap_kw: Any
    loss_core_fw_kw: Any
    loss_stator_cu_kw: Any
    loss_rotor_cu_kw: Any
    loss_stray_kw: Any


def _torque_pu(internal_p_kw, rated_airgap_p_kw, rated_slip_frac):
    """Per-unit air-gap power y that delivers ``internal_p_kw`` = shaft + friction and windage.

    Solves P_ag,r (1 - s_r y) y = internal power (slip proportional to air-gap torque), in the
    cancellation-free form y = 2u / (1 + sqrt(1 - 4 s_r u)), u = internal / P_ag,r.
    """
    u = internal_p_kw / rated_airgap_p_kw
    disc = np.maximum(1.0 - 4.0 * rated_slip_frac * u, 0.0)
    return 2.0 * u / (1.0 + np.sqrt(disc))


def _torque_pu_fresh(p, p_fw, p_ag_r, s_r) -> tuple[np.ndarray, np.ndarray]:
    """:func:`_torque_pu` of shaft power ``p`` in two new arrays (y, scratch), in one compiled pass.

    Both are at least 1-D so that ``out=`` arithmetic works for a single value; callers reshape. The
    scratch holds 1 + sqrt(max(1 - 4 s_r u, 0)). The pass (:func:`_torque_rows`) does the numpy rule's
    operations in its order: u = (p + p_fw) / p_ag_r, w = u (-4 s_r) + 1, w = sqrt(max(w, 0)) + 1,
    y = 2 u / w.
    """
    shape, (p2, fw2, ag2, sr2) = _as_rows(p, p_fw, p_ag_r, s_r)
    y, work = np.empty(p2.shape), np.empty(p2.shape)
    _torque_rows(p2, fw2, ag2, sr2, y, work)
    return y.reshape(shape), work.reshape(shape)


def _as_rows(*values):
    """Broadcast values to their common shape as 2-D arrays (rows, last axis): views where a leading axis
    of 1 is added, copies where more than two axes are folded. Return (that shape at least 1-D, arrays)."""
    arrays = [np.asarray(v, dtype=float) for v in values]
    shape = np.broadcast_shapes(*(a.shape for a in arrays))
    two = (1,) * (2 - len(shape)) + shape if len(shape) <= 2 else (-1, shape[-1])
    return (shape if shape else (1,)), [np.broadcast_to(a, shape).reshape(two) for a in arrays]


@numba.njit(inline="always", error_model="numpy")
def _torque_pu_one(p, p_fw, p_ag_r, s_r):  # pragma: no cover - compiled
    """One element of :func:`_torque_pu_fresh`: (y, scratch), the numpy rule's operations in order."""
    u = (p + p_fw) / p_ag_r
    w = u * (-4.0 * s_r) + 1.0
    w = w if (w >= 0.0 or w != w) else 0.0  # numpy.maximum(w, 0): NaN stays NaN
    w = np.sqrt(w) + 1.0
    return (u * 2.0) / w, w


@numba.njit(nogil=True, cache=True, error_model="numpy")
def _torque_rows(p, p_fw, p_ag_r, s_r, y, work):  # pragma: no cover - compiled
    """:func:`_torque_pu_fresh`'s pass over 2-D arrays of one shape."""
    n, m = y.shape
    for i in range(n):
        for t in range(m):
            y[i, t], work[i, t] = _torque_pu_one(p[i, t], p_fw[i, t], p_ag_r[i, t], s_r[i, t])


def _aligned(params: InductionParams, kind: str, ndim: int) -> Callable[[str], np.ndarray]:
    """Return a getter that shapes a parameter field to broadcast against a load of ``kind``.

    A 2-D numpy load is (n_motors, n_steps), so 1-D fields get a trailing axis. A DataFrame load is
    (n_steps, n_motors) (time index, one column per motor), which numpy broadcasting already matches.
    """
    expand = kind == "array" and ndim == 2 and params.rated_p_kw.ndim == 1

    def get(name: str) -> np.ndarray:
        a = getattr(params, name)
        return a[:, None] if expand else a

    return get


def induction_operating_point(params: InductionParams, shaft_p_kw) -> InductionPoint:
    """Input power, reactive power, efficiency, power factor, slip and losses at a shaft load.

    Parameters
    ----------
    params : InductionParams
        Calibrated motors, shape (n_motors,) or 0-d.
    shaft_p_kw : float, array_like, pandas.Series or pandas.DataFrame
        Shaft (output) power [kW], 0 to 1.5 x rated (the calibration covers 0-125 %). A 2-D numpy
        array is (n_motors, n_steps); a DataFrame is (time, motors) with one column per motor; a 1-D
        array or Series broadcasts against the motors (one motor's time series, or one value per
        motor). NaN propagates (missing data).

    Returns
    -------
    InductionPoint
        Every field has the shape and kind of ``shaft_p_kw``.

    Raises
    ------
    ValueError
        If any shaft power is negative or above 1.5 x rated.

    Notes
    -----
    With y the per-unit air-gap power (per-unit torque) and slip proportional to torque, s = s_r y:

    * P_ag = y P_ag,r, rotor copper P_rcu = s P_ag, shaft P = (1 - s) P_ag - P_fw [1, Eqs. 6.31-6.32];
    * core + friction and windage = A (constant); stator copper + stray = B y^k, k = 2 unless
      fitted to two part-load points [2];
    * P_in = P + A + B y^k + P_rcu;
    * Q = Q0 + Q2 y^kq (magnetising kVAr nearly constant, leakage kVAr growing with the square of the
      load current, kq = 2 unless fitted) [1, ch. 6];
    * PF = P_in / sqrt(P_in^2 + Q^2), efficiency = P / P_in, speed = n_s (1 - s).

    At zero shaft power the motor draws its no-load losses as active power and about Q0 of reactive
    power, so the power factor is small but finite. See ``docs/models-induction.md``.

    References
    ----------
    .. [1] A. E. Fitzgerald, C. Kingsley Jr. and S. D. Umans, *Electric Machinery*, 6th ed.
       New York: McGraw-Hill, 2003, ch. 6.
    .. [2] IEC 60034-2-1:2014, *Rotating electrical machines - Part 2-1: Standard methods for
       determining losses and efficiency from tests*, cl. 6.1 (loss segregation).

    Examples
    --------
    A 15 kW IE3 motor (92.1 %, PF 0.84, 1465 rpm) at full load and at 50 %:

    >>> m = calibrate_induction(15.0, 0.921, 0.84, 1465.0, 1500.0)
    >>> op = induction_operating_point(m, np.array([15.0, 7.5]))
    >>> np.round(op.efficiency_frac, 3).tolist(), np.round(op.power_factor, 3).tolist()
    ([0.921, 0.918], [0.84, 0.708])
    """
    p, wrap, kind = _unwrap(shaft_p_kw)
    get = _aligned(params, kind, p.ndim)
    _forbid(p < 0, "shaft_p_kw must not be negative")
    _forbid(p > MAX_LOAD_FRAC * get("rated_p_kw"), f"shaft_p_kw above {MAX_LOAD_FRAC:g} x rated power is outside the model")

    # In-place arithmetic keeps a fleet-year (1,000 x 8,760) to about a dozen array allocations.
    s_r = get("rated_slip_frac")
    p_ag_r = get("rated_airgap_p_kw")
    shape = np.broadcast_shapes(p.shape, p_ag_r.shape)
    y, work = _torque_pu_fresh(p, get("friction_windage_kw"), p_ag_r, s_r)
    s = np.multiply(y, s_r)
    p_ag = np.multiply(y, p_ag_r)
    loss_rcu = np.multiply(s, p_ag)
    core_fw = np.broadcast_to(get("loss_constant_kw"), y.shape).copy()  # constant, one value per step
    _power(y, get("loss_exponent"), out=work)
    work *= get("loss_load_kw")  # stator copper + stray
    loss_stray = np.multiply(work, STRAY_SHARE_OF_STATOR_AND_STRAY)
    loss_scu = np.multiply(work, 1.0 - STRAY_SHARE_OF_STATOR_AND_STRAY)
    p_in = np.add(p, core_fw)
    p_in += work
    p_in += loss_rcu
    q = _power(y, get("q_exponent"))
    q *= get("q_load_kvar")
    q += get("q_constant_kvar")
    pf = np.hypot(p_in, q)
    np.divide(p_in, pf, out=pf)
    eff = np.divide(p, p_in)
    speed = np.multiply(s, -get("sync_speed_rpm"))
    speed += get("sync_speed_rpm")
    def out(a: np.ndarray) -> Any:
        return wrap(a.reshape(shape))

    return InductionPoint(
        p_in_kw=out(p_in),
        q_kvar=out(q),
        efficiency_frac=out(eff),
        power_factor=out(pf),
        slip_frac=out(s),
        speed_rpm=out(speed),
        p_airgap_kw=out(p_ag),
        loss_core_fw_kw=out(core_fw),
        loss_stator_cu_kw=out(loss_scu),
        loss_rotor_cu_kw=out(loss_rcu),
        loss_stray_kw=out(loss_stray),
    )


def _input_reactive_speed(params: InductionParams, shaft_p_kw: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Input power [kW], reactive power [kVAr] and speed [rpm] of :func:`induction_operating_point`.

    The same operations in the same order, so the same values, for a numpy load (n_motors, n_steps)
    or a 1-D one, without the fields the caller does not need (efficiency, power factor, loss split):
    six arrays of the load's size instead of a dozen.
    """
    p = np.asarray(shaft_p_kw, dtype=float)
    get = _aligned(params, "array", p.ndim)
    _forbid(p < 0, "shaft_p_kw must not be negative")
    _forbid(p > MAX_LOAD_FRAC * get("rated_p_kw"), f"shaft_p_kw above {MAX_LOAD_FRAC:g} x rated power is outside the model")
    s_r = get("rated_slip_frac")
    p_ag_r = get("rated_airgap_p_kw")
    shape = np.broadcast_shapes(p.shape, p_ag_r.shape)
    y, work = _torque_pu_fresh(p, get("friction_windage_kw"), p_ag_r, s_r)
    s = np.multiply(y, s_r)
    loss_rcu = np.multiply(y, p_ag_r)  # air-gap power
    loss_rcu *= s  # rotor copper = slip x air-gap power
    _power(y, get("loss_exponent"), out=work)
    work *= get("loss_load_kw")  # stator copper + stray
    p_in = np.add(p, np.broadcast_to(get("loss_constant_kw"), y.shape).reshape(np.shape(y)))
    p_in += work
    p_in += loss_rcu
    q = _power(y, get("q_exponent"), out=y)
    q *= get("q_load_kvar")
    q += get("q_constant_kvar")
    speed = s
    speed *= -get("sync_speed_rpm")
    speed += get("sync_speed_rpm")
    return p_in.reshape(shape), q.reshape(shape), speed.reshape(shape)


#: On a drive at constant flux: iron loss follows the stator frequency to this power (between hysteresis, to the
#: first, and eddy-current loss, to the second; common practice, as for the synchronous machines on a drive).
DRIVE_IRON_LOSS_FREQUENCY_EXPONENT = 1.5
#: Lowest rotor speed share the drive-fed model divides by [-] (a motor that runs is never held slower).
DRIVE_MIN_SPEED_FRAC = 0.05


def input_on_drive_kw(params: InductionParams, shaft_p_kw, speed_frac):
    """Input power of induction motors fed by a drive at constant flux, at a shaft power and rotor speed.

    Parameters
    ----------
    params : InductionParams
        Calibrated motors (:func:`calibrate_induction`), one per row.
    shaft_p_kw : array_like
        Shaft power [kW], >= 0, shape (n,) or (n, t).
    speed_frac : array_like
        Rotor speed as a share of the synchronous speed on the line [-], broadcastable to ``shaft_p_kw``
        (at least :data:`DRIVE_MIN_SPEED_FRAC` is used).

    Returns
    -------
    numpy.ndarray
        Electrical input at the motor terminals, fundamental frequency [kW]: what the motor takes from the
        drive's output.

    Notes
    -----
    With the flux held (V/f constant), friction and windage follow the rotor's speed from their value at
    the rated speed, F = P_fw phi / (1 - s_r), where phi is the rotor speed share; the electromagnetic
    torque per unit of the rated air-gap torque is y = (P + F) / (P_ag,r phi), and the slip speed is s_r y
    (of the line's synchronous speed), so the stator frequency share is f = phi + s_r y. The losses of the
    line model (docs/models-induction.md) then follow their causes instead of the shaft power:

        P_in = P + F + (A - P_fw) f^1.5 + B y^k + s_r P_ag,r y^2

    iron loss with frequency to the power 1.5, stator copper and stray loss with the torque as on the
    line, and rotor copper loss s' P_ag = (s_r y / f)(y P_ag,r f). At the rated speed and load (phi = 1 - s_r,
    y = 1, f = 1) this is the line model's rated input exactly.

    References
    ----------
    .. [1] A. E. Fitzgerald, C. Kingsley and S. D. Umans, *Electric Machinery*, 6th ed. New York:
       McGraw-Hill, 2003: the induction machine's power flow, and its speed control by variable frequency
       at constant flux (chapters from memory).

    Examples
    --------
    A 1.0 kW loss split of a motor on its drive at half speed: hand calculation in
    docs/derivations/induction-power-flow.md, "On a drive".
    """
    p = np.asarray(shaft_p_kw, dtype=float)
    get = _aligned(params, "array", p.ndim)
    _forbid(p < 0, "shaft_p_kw must not be negative")
    phi = np.maximum(np.asarray(speed_frac, dtype=float), DRIVE_MIN_SPEED_FRAC)
    p_fw, p_ag_r, s_r = get("friction_windage_kw"), get("rated_airgap_p_kw"), get("rated_slip_frac")
    friction = p_fw * phi / (1.0 - s_r)
    y = (p + friction) / (p_ag_r * phi)
    f = phi + s_r * y
    # (f^1.5 as f sqrt(f) and y^k through _power: element by element the same bits however the rows are
    # blocked, which a vectorised power does not promise)
    grown = f * np.sqrt(f) if DRIVE_IRON_LOSS_FREQUENCY_EXPONENT == 1.5 else f ** DRIVE_IRON_LOSS_FREQUENCY_EXPONENT
    iron = (get("loss_constant_kw") - p_fw) * grown
    return p + friction + iron + get("loss_load_kw") * _power(y, get("loss_exponent")) + s_r * p_ag_r * y * y


def induction_speed_rpm(params: InductionParams, shaft_p_kw):
    """Shaft speed at a shaft load (the speed part of :func:`induction_operating_point`, cheaper).

    Parameters
    ----------
    params : InductionParams
        Calibrated motors.
    shaft_p_kw : float, array_like, pandas.Series or pandas.DataFrame
        Shaft power [kW], shapes as in :func:`induction_operating_point`.

    Returns
    -------
    array_like
        Speed n = n_s (1 - s_r y) [rpm], same kind as ``shaft_p_kw``.

    Examples
    --------
    >>> m = calibrate_induction(30.0, 0.936, 0.86, 1475.0, 1500.0)
    >>> round(induction_speed_rpm(m, 30.0), 6)
    1475.0
    """
    p, wrap, kind = _unwrap(shaft_p_kw)
    get = _aligned(params, kind, p.ndim)
    _forbid(p < 0, "shaft_p_kw must not be negative")
    return wrap(_speed_of(p, get))


def _speed_rpm_unchecked(params: InductionParams, shaft_p_kw: np.ndarray) -> np.ndarray:
    """:func:`induction_speed_rpm` of a numpy load known to be >= 0 (no sign test; the same operations).

    For inner loops that keep the load non-negative by construction (the speed-coupling fixed point).
    """
    p = np.asarray(shaft_p_kw, dtype=float)
    return _speed_of(p, _aligned(params, "array", p.ndim))


def _speed_of(p: np.ndarray, get: Callable[[str], np.ndarray]) -> np.ndarray:
    """n = n_s (1 - s_r y) of a numpy load ``p`` with the motors' fields from ``get`` (:func:`_aligned`)."""
    p_ag_r = get("rated_airgap_p_kw")
    shape = np.broadcast_shapes(p.shape, p_ag_r.shape)
    # torque and speed in one compiled pass (the numpy rule's operations, in order)
    _, rows = _as_rows(p, get("friction_windage_kw"), p_ag_r, get("rated_slip_frac"), get("sync_speed_rpm"))
    n = np.empty(rows[0].shape)
    _speed_rows(*rows, n)
    return n.reshape(shape)


@numba.njit(nogil=True, cache=True, error_model="numpy")
def _speed_rows(p, p_fw, p_ag_r, s_r, n_s, out):  # pragma: no cover - compiled
    """:func:`_speed_rpm_unchecked`'s pass: :func:`_speed_one` element by element."""
    n, m = out.shape
    for i in range(n):
        for t in range(m):
            out[i, t] = _speed_one(p[i, t], p_fw[i, t], p_ag_r[i, t], s_r[i, t], n_s[i, t])


@numba.njit(inline="always", error_model="numpy")
def _speed_one(p, p_fw, p_ag_r, s_r, n_s):  # pragma: no cover - compiled
    """One motor's speed at a shaft load: :func:`_torque_pu_one`'s y, then n = ((y (-s_r)) + 1) n_s, in order."""
    y, _ = _torque_pu_one(p, p_fw, p_ag_r, s_r)
    return (y * (-s_r) + 1.0) * n_s


#: Fixed-point passes allowed in a speed-coupled load (:func:`coupled_load_kw` and
#: :func:`models.loads.solve_speed_coupled_load`).
MAX_COUPLING_ITERATIONS = 50


def coupled_load_kw(params: InductionParams, ref_shaft_p_kw: np.ndarray, ref_speed_rpm, speed_exponent,
                    tol_kw: float = 1e-9,
                    max_iterations: int = MAX_COUPLING_ITERATIONS) -> tuple[np.ndarray, np.ndarray]:
    """Shaft load and speed of new induction motors on the driven machines of today's, in one compiled pass.

    :func:`models.loads.solve_speed_coupled_load` with ``speed_of_new`` the motors' own speed
    (:func:`induction_speed_rpm`), element by element: the same operations in the same order, so the
    same values bit for bit for cube and linear loads, without a fleet-sized temporary per fixed-point
    pass. For other exponents the power is the C library's ``pow`` here and numpy's in the generic
    solver, which on processors with AVX-512 differ by an ulp in some elements: the values then agree
    within the fixed point's tolerance.

    Parameters
    ----------
    params : InductionParams
        The new motors, one per row of the load (fields of shape (n,)).
    ref_shaft_p_kw : numpy.ndarray, shape (n, m)
        Shaft power drawn with today's motor at its own speed [kW], >= 0 (not checked; NaN propagates).
    ref_speed_rpm : array_like, broadcastable to (n, m)
        Today's speed at each step [rpm], > 0.
    speed_exponent : array_like, shape (n,) or (n, 1)
        k in P ~ n^k [-], one per motor.
    tol_kw : float, optional
        Convergence tolerance on the shaft power [kW], scaled per element by max(1, its reference power).
    max_iterations : int, optional
        Passes allowed (default :data:`MAX_COUPLING_ITERATIONS`).

    Returns
    -------
    shaft_p_kw, speed_rpm : numpy.ndarray, shape (n, m)

    Raises
    ------
    ValueError
        If a speed is not positive or an element does not converge (as the generic solver).

    Notes
    -----
    Per element, from P = P_ref: P <- P_ref (n_new(P) / n_ref)^k until |change| <= tol max(1, |P_ref|),
    n_new(P) = n_s (1 - s_r y(P)) with y the per-unit torque of :func:`_torque_pu_one` [1]_.

    References
    ----------
    .. [1] A. E. Fitzgerald, C. Kingsley Jr. and S. D. Umans, *Electric Machinery*, 6th ed. McGraw-Hill,
       2003, Ch. 6 (the induction motor's torque-slip relation near rated slip).
    """
    p_ref = np.ascontiguousarray(ref_shaft_p_kw, dtype=float)
    n, m = p_ref.shape

    def per_row(value):
        return np.ascontiguousarray(np.broadcast_to(np.asarray(value, dtype=float).reshape(-1), (n,)))

    k = np.asarray(speed_exponent, dtype=float)
    if k.ndim == 2 and k.shape[1] != 1:
        raise ValueError("speed_exponent must be one value per motor (shape (n,) or (n, 1))")
    n_ref = np.broadcast_to(np.asarray(ref_speed_rpm, dtype=float), (n, m))
    rows = (p_ref, n_ref, per_row(k), per_row(params.friction_windage_kw), per_row(params.rated_airgap_p_kw),
            per_row(params.rated_slip_frac), per_row(params.sync_speed_rpm))
    p_out, n_out = np.empty((n, m)), np.empty((n, m))
    status = _coupled_rows(*rows, float(tol_kw), int(max_iterations), p_out, n_out)
    if status == 1:
        raise ValueError("speed_of_new returned a non-positive speed")
    if status == 2:
        raise ValueError("speed-coupled load did not converge; the new machine's speed-vs-load relation is far "
                         "steeper than a motor's slip (check speed_of_new)")
    return p_out, n_out


@numba.njit(inline="always", error_model="numpy")
def coupling_power(ratio, k):  # pragma: no cover - compiled
    """The speed ratio to the load's exponent, ratio ** k, the cube as (ratio ratio) ratio (a fifth of
    the time of ``pow``; within an ulp of it): the rule of :func:`models.loads.solve_speed_coupled_load`."""
    return ratio * ratio * ratio if k == 3.0 else ratio ** k


@numba.njit(nogil=True, cache=True, error_model="numpy")
def _coupled_rows(p_ref, n_ref, k_, p_fw_, p_ag_r_, s_r_, n_s_, tol, max_iterations, p_out, n_out):  # pragma: no cover - compiled
    """:func:`coupled_load_kw`'s pass: 0, or 1 for a non-positive speed, 2 for no convergence.

    A row at a time, each fixed-point pass over all its intervals (a converged one keeps its value, as in
    the generic solver): the loop has no exit per element, so the compiler runs it on several intervals
    at once, and every interval still does the generic solver's operations in its order.
    """
    n, m = p_out.shape
    p = np.empty(m)
    target = np.empty(m)
    ratio = np.empty(m)
    limit = np.empty(m)
    done = np.empty(m, dtype=np.bool_)
    for i in range(n):
        k, fw, ag, sr, ns = k_[i], p_fw_[i], p_ag_r_[i], s_r_[i], n_s_[i]
        for t in range(m):
            target[t] = p_ref[i, t]
            p[t] = target[t]
            limit[t] = tol * max(abs(target[t]), 1.0)
            done[t] = target[t] != target[t]  # (NaN stays NaN, as missing data)
        converged = False
        for _ in range(max_iterations):
            bad = 0
            for t in range(m):
                speed = _speed_one(p[t], fw, ag, sr, ns)
                bad += speed <= 0.0
                ratio[t] = speed / n_ref[i, t]
            if bad:
                return 1
            left = 0
            for t in range(m):
                p_next = coupling_power(ratio[t], k)
                p_next *= target[t]
                close = abs(p_next - p[t]) <= limit[t]
                p[t] = p[t] if done[t] else p_next
                done[t] = done[t] or close
                left += not done[t]
            if left == 0:
                converged = True
                break
        if not converged:
            return 2
        for t in range(m):
            speed = _speed_one(p[t], fw, ag, sr, ns)
            if speed <= 0.0:
                return 1
            p_out[i, t] = p[t]
            n_out[i, t] = speed
    return 0


def shaft_from_input_kw(params: InductionParams, p_in_kw):
    """Shaft power that makes the motor draw a given (measured) input power.

    Parameters
    ----------
    params : InductionParams
        Calibrated motors.
    p_in_kw : float, array_like, pandas.Series or pandas.DataFrame
        Electrical input power [kW], >= 0; shapes as the shaft load of
        :func:`induction_operating_point`. NaN propagates.

    Returns
    -------
    array_like
        Shaft power [kW], same kind as ``p_in_kw``, clipped to 0 when the input is below the no-load
        input and to 1.5 x rated above that load.

    Raises
    ------
    ValueError
        If any input power is negative.

    Notes
    -----
    The rotor copper loss cancels from P_in = P_ag + (A - P_fw) + B y^k. For k = 2 this is a
    quadratic in y solved in closed form,
    y = 2 (P_in - A + P_fw) / (P_ag,r + sqrt(P_ag,r^2 + 4 B (P_in - A + P_fw)));
    for other k that value starts a few Newton steps. Then P = (1 - s_r y) y P_ag,r - P_fw.

    Examples
    --------
    >>> m = calibrate_induction(15.0, 0.921, 0.84, 1465.0, 1500.0)
    >>> round(shaft_from_input_kw(m, 15.0 / 0.921), 6)
    15.0
    """
    p_in, wrap, kind = _unwrap(p_in_kw)
    get = _aligned(params, kind, p_in.ndim)
    _forbid(p_in < 0, "p_in_kw must not be negative")
    p_fw = get("friction_windage_kw")
    p_ag_r = get("rated_airgap_p_kw")
    s_r = get("rated_slip_frac")
    b_load = get("loss_load_kw")
    k = get("loss_exponent")
    excess = p_in - get("loss_constant_kw") + p_fw
    y = 2.0 * excess / (p_ag_r + np.sqrt(np.maximum(p_ag_r * p_ag_r + 4.0 * b_load * excess, 0.0)))
    newton = k != 2.0
    if np.any(newton):  # only where k != 2 (the closed form is exact at k = 2), so each element is its own
        z = y
        for _ in range(_NEWTON_STEPS):
            z = np.maximum(z, 0.0)
            z_k1 = np.power(z, k - 1.0)
            z = z - (p_ag_r * z + b_load * z_k1 * z - excess) / (p_ag_r + k * b_load * z_k1)
        y = np.where(newton, z, y)
    y_min = _torque_pu(p_fw, p_ag_r, s_r)
    y_max = _torque_pu(MAX_LOAD_FRAC * get("rated_p_kw") + p_fw, p_ag_r, s_r)
    y = np.clip(y, y_min, y_max)
    shaft = (1.0 - s_r * y) * y * p_ag_r - p_fw
    return wrap(np.maximum(shaft, 0.0))


# --------------------------------------------------------------------------------------------------
# Calibration
# --------------------------------------------------------------------------------------------------
def _power(y: np.ndarray, k: np.ndarray, out: np.ndarray | None = None) -> np.ndarray:
    """y**k, with a fast path when every exponent is 2 (the usual case)."""
    if np.all(k == 2.0):
        return np.multiply(y, y, out=out)
    return np.power(y, k, out=out)


def _exponent_through(y75, y50, ratio):
    """Exponent k with (1 - y75^k)/(1 - y50^k) = ratio, by bisection (the ratio rises with k)."""
    lo = np.full_like(ratio, MIN_LOAD_EXPONENT)
    hi = np.full_like(ratio, MAX_LOAD_EXPONENT)
    for _ in range(_EXPONENT_BISECTIONS):
        mid = 0.5 * (lo + hi)
        below = (1.0 - y75**mid) / (1.0 - y50**mid) < ratio
        lo = np.where(below, mid, lo)
        hi = np.where(below, hi, mid)
    return 0.5 * (lo + hi)


def _exponent_ratio_bounds(y75, y50):
    """Lowest and highest attainable (1 - y75^k)/(1 - y50^k) over the exponent range."""
    f = lambda k: (1.0 - y75**k) / (1.0 - y50**k)  # noqa: E731 - local shorthand
    return f(MIN_LOAD_EXPONENT), f(MAX_LOAD_EXPONENT)


def _fit_profile(full, y75, v75, has75, y50, v50, has50, default_share):
    """Fit c0 + c y^k through (1, full) and the given part-load points (y, v); NaN-free inputs.

    Neither point given: c0 = default_share x full, k = 2. One point: k = 2 and the curve passes
    through it. Both: k as well, by bisection. Returns (c0, c, k, ok) where ``ok`` is False for
    motors whose two points cannot be met with k in [MIN_LOAD_EXPONENT, MAX_LOAD_EXPONENT].
    """
    both = has75 & has50
    only75 = has75 & ~has50
    only50 = has50 & ~has75
    rise50 = full - v50
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = np.where(both, (full - v75) / rise50, 0.5)
    lo, hi = _exponent_ratio_bounds(y75, y50)
    ok = ~both | ((rise50 > 0) & (ratio > lo) & (ratio < hi))
    fit = both & ok
    r = np.where(ok, ratio, 0.5)
    # the bisection only where some motor has both part-load points (its result is not used elsewhere)
    through = _exponent_through(y75, y50, r) if np.any(fit) else np.zeros(np.broadcast_shapes(np.shape(y75), np.shape(y50), np.shape(r)))
    k = np.where(fit, through, 2.0)
    c_both = rise50 / (1.0 - y50**k)
    c_75 = (full - v75) / (1.0 - y75 * y75)
    c_50 = rise50 / (1.0 - y50 * y50)
    c_default = (1.0 - default_share) * full
    c = np.select([both, only75, only50], [c_both, c_75, c_50], c_default)
    return full - c, c, k, ok


def calibrate_induction(
    rated_p_kw,
    rated_efficiency_frac,
    rated_power_factor,
    rated_speed_rpm,
    sync_speed_rpm,
    efficiency_75_frac=np.nan,
    efficiency_50_frac=np.nan,
    power_factor_75=np.nan,
    power_factor_50=np.nan,
    rewind_count=0,
    rewind_loss_pct_points=DEFAULT_REWIND_LOSS_PCT_POINTS,
    peak_efficiency_load_frac=DEFAULT_PEAK_EFFICIENCY_LOAD_FRAC,
    magnetising_kvar_share_frac=DEFAULT_MAGNETISING_KVAR_SHARE_FRAC,
    *,
    fail=None,
) -> InductionParams:
    """Calibrate induction-motor loss and reactive coefficients from nameplate and catalogue data.

    All arguments broadcast against each other (one element per motor). NaN marks "not given" for
    the optional part-load points and for the rated speed, motor by motor.

    Parameters
    ----------
    rated_p_kw : array_like
        Rated shaft power [kW], > 0.
    rated_efficiency_frac : array_like
        Nameplate full-load efficiency [-], in (0, 1).
    rated_power_factor : array_like
        Nameplate full-load power factor [-], in (0, 1].
    rated_speed_rpm : array_like
        Nameplate full-load speed [rpm], 0 < n < sync speed; NaN uses
        :func:`default_rated_slip_frac`.
    sync_speed_rpm : array_like
        Synchronous speed [rpm], > 0 (see :func:`sync_speed_rpm`).
    efficiency_75_frac, efficiency_50_frac : array_like, optional
        Catalogue efficiency at 75 % and 50 % of rated shaft power [-], in (0, 1); NaN = not given.
    power_factor_75, power_factor_50 : array_like, optional
        Catalogue power factor at 75 % and 50 % load [-], in (0, 1]; NaN = not given.
    rewind_count : array_like, optional
        Number of rewinds since the nameplate data were valid [-], >= 0.
    rewind_loss_pct_points : array_like, optional
        Full-load efficiency lost per rewind [percentage points], >= 0. Default
        :data:`DEFAULT_REWIND_LOSS_PCT_POINTS` (good-practice rewinds, EASA/AEMT 2019 [3]).
    peak_efficiency_load_frac : array_like, optional
        Load of peak efficiency used when no part-load efficiency is given [-], in (0.3, 1].
    magnetising_kvar_share_frac : array_like, optional
        No-load kVAr as a share of full-load kVAr used when no part-load PF is given [-], in [0, 1].
    fail : callable, optional
        ``fail(ok, message, quantity)``, called with each rule's mask (True where a motor passes it), its
        message and the input it points at; default: raise ValueError where a motor fails
        (:func:`calibration_failures` collects instead).

    Returns
    -------
    InductionParams
        Calibrated coefficients, one element per motor.

    Raises
    ------
    ValueError
        On out-of-range inputs, or when the data are physically inconsistent (e.g. a rated slip whose
        rotor copper loss would exceed the load-dependent losses, or part-load points that make the
        losses fall with load). The message names the offending motors.

    Notes
    -----
    Full-load losses L_r = P_r (1/eta_r - 1). Slip is proportional to air-gap torque, so the rotor
    copper loss is R y^2 with R = s_r P_ag,r and P_ag,r = (P_r + P_fw)/(1 - s_r) [1]. The remaining
    losses A + B y^k are fitted to L_r and to the part-load points (their loads mapped to y by the
    slip relation): one point fixes A and B with k = 2, two points fix k as well; without part-load
    data A = x^2/(1+x^2) L_r and k = 2, which puts the efficiency peak near
    x = ``peak_efficiency_load_frac`` (near 75 % load for standard motors [2]). Friction and windage
    are a fixed share of A (common practice). Reactive power Q0 + Q2 y^kq is fitted the same way to
    Q = P_in tan(phi) at full load and at any given PF points; without them
    Q0 = ``magnetising_kvar_share_frac`` x Q_r. A rewind raises the core and stator-side losses (not
    rotor copper, friction or windage) in proportion so that full-load efficiency falls by
    ``rewind_count`` x ``rewind_loss_pct_points``; kVAr is left as calibrated (same magnetic design).

    References
    ----------
    .. [1] A. E. Fitzgerald, C. Kingsley Jr. and S. D. Umans, *Electric Machinery*, 6th ed.
       New York: McGraw-Hill, 2003, ch. 6.
    .. [2] US Department of Energy, "Determining Electric Motor Load and Efficiency," Motor Challenge
       fact sheet DOE/GO-10097-517, 1997.
    .. [3] EASA and AEMT, *The Effect of Repair/Rewinding on Premium Efficiency/IE3 Motors*,
       Electrical Apparatus Service Association, 2019.

    Examples
    --------
    Two 15 kW motors, the second with a catalogue 50 % point:

    >>> m = calibrate_induction(15.0, 0.921, 0.84, 1465.0, 1500.0, efficiency_50_frac=[np.nan, 0.925])
    >>> op = m.operating_point(np.array([7.5, 7.5]))
    >>> np.round(op.efficiency_frac, 4).tolist()
    [0.9182, 0.925]
    """
    fail = _require_in if fail is None else fail
    arrays = np.broadcast_arrays(
        *[
            np.asarray(v, dtype=float)
            for v in (
                rated_p_kw,
                rated_efficiency_frac,
                rated_power_factor,
                rated_speed_rpm,
                sync_speed_rpm,
                efficiency_75_frac,
                efficiency_50_frac,
                power_factor_75,
                power_factor_50,
                rewind_count,
                rewind_loss_pct_points,
                peak_efficiency_load_frac,
                magnetising_kvar_share_frac,
            )
        ]
    )
    p_r, eta, pf, n_r, n_s, e75, e50, pf75, pf50, rewinds, per_rewind, x_pk, q_share = (a.copy() for a in arrays)

    # ---- input validation ----
    fail(np.isfinite(p_r) & (p_r > 0), "rated_p_kw must be positive", "rated_p_kw")
    fail((eta > 0) & (eta < 1), "rated_efficiency_frac must lie in (0, 1)", "rated_efficiency")
    fail((pf > 0) & (pf <= 1), "rated_power_factor must lie in (0, 1]", "rated_power_factor")
    fail(np.isfinite(n_s) & (n_s > 0), "sync_speed_rpm must be positive", "sync_speed")
    given_speed = ~np.isnan(n_r)
    with np.errstate(invalid="ignore"):
        fail(~given_speed | (n_r < n_s), "rated_speed_rpm must be below sync_speed_rpm for an induction motor", "rated_speed")
        fail(~given_speed | (n_r > 0), "rated_speed_rpm must be positive", "rated_speed")
        for name, v in (("efficiency_75_frac", e75), ("efficiency_50_frac", e50)):
            fail(np.isnan(v) | ((v > 0) & (v < 1)), f"{name} must lie in (0, 1) or be NaN", name)
        for name, v in (("power_factor_75", pf75), ("power_factor_50", pf50)):
            fail(np.isnan(v) | ((v > 0) & (v <= 1)), f"{name} must lie in (0, 1] or be NaN", name)
    fail(np.isfinite(rewinds) & (rewinds >= 0), "rewind_count must be >= 0", "rewind_count")
    fail(np.isfinite(per_rewind) & (per_rewind >= 0), "rewind_loss_pct_points must be >= 0", "rewind_loss")
    fail((x_pk > 0.3) & (x_pk <= 1.0), "peak_efficiency_load_frac must lie in (0.3, 1]", "peak_efficiency_load")
    fail((q_share >= 0) & (q_share <= 1), "magnetising_kvar_share_frac must lie in [0, 1]", "magnetising_kvar_share")
    eta_rewound = eta - rewinds * per_rewind / 100.0
    fail(eta_rewound > MIN_REWOUND_EFFICIENCY_FRAC, "rewind losses leave no credible efficiency; check rewind_count and "
         "rewind_loss_pct_points", "rewind_count")

    # (the typical slip read at a rating that is one: a rating that is none was said above, by ``fail``)
    s_r = np.where(given_speed, (n_s - np.where(given_speed, n_r, 0.0)) / n_s,
                   default_rated_slip_frac(np.where(np.isfinite(p_r) & (p_r > 0), p_r, 1.0)))
    fail(s_r <= MAX_RATED_SLIP_FRAC, f"rated slip above {MAX_RATED_SLIP_FRAC:.0%} is outside the model; check rated and sync speed", "rated_speed")

    has75, has50 = ~np.isnan(e75), ~np.isnan(e50)
    e75 = np.where(has75, e75, 1.0)
    e50 = np.where(has50, e50, 1.0)
    loss_r = p_r * (1.0 / eta - 1.0)
    loss_75 = 0.75 * p_r * (1.0 / e75 - 1.0)
    loss_50 = 0.50 * p_r * (1.0 / e50 - 1.0)
    share = x_pk * x_pk / (1.0 + x_pk * x_pk)

    # ---- losses: friction and windage sit inside A and shift the load-to-torque map; iterate ----
    a_const = share * loss_r
    for _ in range(_CALIBRATION_PASSES):
        p_fw = FRICTION_WINDAGE_SHARE_OF_CONSTANT * a_const
        p_ag_r = (p_r + p_fw) / (1.0 - s_r)
        r_cu = s_r * p_ag_r
        y75 = _torque_pu(0.75 * p_r + p_fw, p_ag_r, s_r)
        y50 = _torque_pu(0.50 * p_r + p_fw, p_ag_r, s_r)
        rest = loss_r - r_cu
        share_of_rest = np.where(rest > 0, share * loss_r / np.where(rest > 0, rest, 1.0), share)
        a_const, b_load, k_loss, fit_ok = _fit_profile(
            rest,
            y75, loss_75 - r_cu * y75 * y75, has75,
            y50, loss_50 - r_cu * y50 * y50, has50,
            share_of_rest,
        )
    # p_fw, p_ag_r and r_cu are those of the last pass, so the fit is exact for them; friction and
    # windage is then the set share of the previous pass's A (converged to ~1e-9 relative).
    fail(
        rest > 0.05 * loss_r,
        "rated slip implies a rotor copper loss (slip x air-gap power) above 95 % of the full-load losses; "
        "check rated speed against rated efficiency",
        "rated_speed",
    )
    fail(
        fit_ok,
        "efficiency_75_frac and efficiency_50_frac are not consistent with losses rising with load "
        f"as y^k, {MIN_LOAD_EXPONENT:g} <= k <= {MAX_LOAD_EXPONENT:g}",
        "efficiency_75_frac",
    )
    fail(
        b_load >= 0,
        "rated slip, efficiency and part-load points leave a negative stator copper loss; "
        "check rated speed, rated efficiency and the part-load efficiencies",
        "rated_efficiency",
    )
    core0 = a_const - p_fw
    fail(core0 > 0, "part-load efficiencies imply a negative core loss; check efficiency_75_frac and efficiency_50_frac", "efficiency_50_frac")

    # ---- reactive power, fitted on the original (pre-rewind) input power ----
    has_pf75, has_pf50 = ~np.isnan(pf75), ~np.isnan(pf50)
    pf75 = np.where(has_pf75, pf75, 1.0)
    pf50 = np.where(has_pf50, pf50, 1.0)

    def model_input_kw(x, y):
        return x * p_r + a_const + b_load * y**k_loss + r_cu * y * y

    p_in_r = p_r / eta
    p_in_75 = np.where(has75, 0.75 * p_r / e75, model_input_kw(0.75, y75))
    p_in_50 = np.where(has50, 0.50 * p_r / e50, model_input_kw(0.50, y50))
    tan_phi = lambda c: np.sqrt(1.0 - c * c) / c  # noqa: E731 - tan(acos(PF)), local shorthand
    q_r = p_in_r * tan_phi(pf)
    q0, q_load, k_q, q_ok = _fit_profile(
        q_r, y75, p_in_75 * tan_phi(pf75), has_pf75, y50, p_in_50 * tan_phi(pf50), has_pf50, q_share
    )
    fail(
        q_ok & (q0 >= 0) & (q_load >= 0),
        "power_factor_75 and power_factor_50 imply kVAr that is negative or falls with load; check them",
        "power_factor_75",
    )

    # ---- rewinds: raise core and stator-side losses so full-load efficiency drops by the set points ----
    loss_rewound = p_r * (1.0 / eta_rewound - 1.0)
    scale = (loss_rewound - p_fw - r_cu) / (core0 + b_load)
    return InductionParams(
        rated_p_kw=p_r,
        rated_efficiency_frac=eta_rewound,
        rated_power_factor=pf,
        sync_speed_rpm=n_s,
        rated_slip_frac=s_r,
        rated_airgap_p_kw=p_ag_r,
        friction_windage_kw=p_fw,
        loss_constant_kw=core0 * scale + p_fw,
        loss_load_kw=b_load * scale,
        loss_exponent=k_loss,
        q_constant_kvar=q0,
        q_load_kvar=q_load,
        q_exponent=k_q,
    )


def calibration_failures(*args, **kwargs) -> tuple[np.ndarray, np.ndarray]:
    """The first rule of :func:`calibrate_induction` each motor fails, without raising.

    Takes :func:`calibrate_induction`'s arguments. A motor failing one rule is not judged by the later ones
    (their values rest on the first).

    Returns
    -------
    quantity, message : numpy.ndarray of object, shape of the broadcast inputs
        The input the first failed rule points at (``"rated_speed"``, ``"rated_efficiency"``,
        ``"efficiency_75_frac"``...) and the rule's message; "" for a motor that passes every rule.

    Examples
    --------
    A 0.75 kW motor at 97 % and 1,380 rpm: its slip's rotor loss is more than all its losses.

    >>> q, m = calibration_failures([15.0, 0.75], [0.921, 0.97], [0.84, 0.75], [1465.0, 1380.0], 1500.0)
    >>> q.tolist()
    ['', 'rated_speed']
    >>> m[1].startswith("rated slip implies a rotor copper loss")
    True
    """
    found: list[tuple[np.ndarray, str, str]] = []

    def collect(ok, message: str, quantity: str) -> None:
        found.append((~np.asarray(ok, dtype=bool), message, quantity))

    with np.errstate(all="ignore"):
        calibrate_induction(*args, fail=collect, **kwargs)
    shape = np.broadcast_shapes(*(np.shape(bad) for bad, _, _ in found)) if found else ()
    quantity = np.full(shape, "", dtype=object)
    message = np.full(shape, "", dtype=object)
    for bad, text, name in found:
        new = np.broadcast_to(bad, shape) & (quantity == "")
        quantity[new] = name
        message[new] = text
    return quantity, message

