"""Load coupling: how the driven machine's shaft power follows the speed of the motor that drives it.

Scope: the affinity laws of centrifugal (variable-torque) loads and the power-speed relation of
constant-torque loads; the speed-coupled operating point of a replacement motor that runs at another
speed than the motor whose load was measured (a lower-slip induction motor, or a synchronous machine at
synchronous speed), solved as a fixed point; the remedies that undo the speed change (impeller trim or
pulley change, or a drive that holds the old speed); the conversion of a throttled pump or fan load to
speed control on a system curve with static head; and the extra shaft power and energy a speed rise
costs. Equations, assumptions and sources are collected in ``docs/models-induction.md`` (section
"Load coupling").
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Callable, Literal

import numpy as np
import pandas as pd

from models.induction import MAX_COUPLING_ITERATIONS, _forbid, _require, _unwrap

LoadType = Literal["variable_torque", "constant_torque"]
Remedy = Literal["none", "trim_or_pulley", "speed_control"]

#: Exponent k of P ~ n^k by load type: 3 for centrifugal pumps and fans (affinity laws), 1 for
#: constant torque (conveyors, positive-displacement machines).
SPEED_EXPONENT_BY_LOAD_TYPE: dict[str, float] = {"variable_torque": 3.0, "constant_torque": 1.0}
#: Shaft power of a throttled radial-flow centrifugal pump at zero flow, as a fraction of its power at
#: design flow [-]. Common practice (value from memory): shut-off power of radial pumps is about 30-50 %
#: of design power; fans with outlet dampers are higher (about 50-60 %).
DEFAULT_THROTTLED_ZERO_FLOW_POWER_FRAC = 0.4
#: Pump shut-off head as a multiple of the design head [pu]. Common practice (value from memory):
#: 1.1-1.3 for radial-flow pumps with a stable (rising-to-shut-off) curve.
DEFAULT_SHUTOFF_HEAD_PU = 1.2


@dataclass(frozen=True)
class SpeedCoupledLoad:
    """Shaft load of a replacement machine, coupled to the driven machine through its speed.

    Attributes
    ----------
    shaft_p_kw : array_like
        Shaft power the replacement machine delivers [kW].
    speed_rpm : array_like
        Its shaft speed at that load [rpm].
    speed_ratio : array_like
        New speed / reference speed [-].
    """

    shaft_p_kw: Any
    speed_rpm: Any
    speed_ratio: Any


@dataclass(frozen=True)
class SpeedControlledLoad:
    """Shaft load of a pump or fan after conversion from throttling to speed control.

    Attributes
    ----------
    shaft_p_kw : array_like
        Shaft power under speed control [kW].
    speed_frac : array_like
        Speed as a fraction of the design (full) speed [-].
    flow_frac : array_like
        Flow as a fraction of design flow [-] (the same flow the throttled system delivered).
    """

    shaft_p_kw: Any
    speed_frac: Any
    flow_frac: Any


@dataclass(frozen=True)
class SpeedRiseEffect:
    """Extra shaft load caused by a speed rise.

    Attributes
    ----------
    extra_shaft_p_kw : array_like
        New minus reference shaft power per step [kW], the kind of the inputs.
    extra_shaft_energy_kwh : float or array_like
        Sum over the time axis of extra power x interval [kWh], one value per motor.
    extra_shaft_energy_frac : float or array_like
        Extra energy / reference shaft energy [-], one value per motor (NaN where the reference is 0).
    """

    extra_shaft_p_kw: Any
    extra_shaft_energy_kwh: Any
    extra_shaft_energy_frac: Any


def _per_motor(value: Any, kind: str, ndim: int) -> np.ndarray:
    """Shape a per-motor value to broadcast against a load of ``kind`` and ``ndim``.

    As in :func:`models.induction.induction_operating_point`, a 2-D numpy load is (n_motors, n_steps),
    so a 1-D per-motor value gets a trailing axis; a DataFrame is (time, motors) and needs nothing.
    """
    a = value.to_numpy() if hasattr(value, "to_numpy") else np.asarray(value)
    return a[:, None] if kind == "array" and ndim == 2 and a.ndim == 1 else a


# --------------------------------------------------------------------------------------------------
# (a) Affinity laws
# --------------------------------------------------------------------------------------------------
def speed_exponent(load_type):
    """Exponent k of shaft power against speed, P ~ n^k, for a load type.

    Parameters
    ----------
    load_type : str or array_like of str
        ``"variable_torque"`` (centrifugal pumps and fans) or ``"constant_torque"``.

    Returns
    -------
    float or ndarray
        3.0 for variable torque, 1.0 for constant torque [-].

    Raises
    ------
    ValueError
        For any other label.

    Notes
    -----
    Variable torque: T ~ n^2, so P = T omega ~ n^3 (affinity laws [1]). Constant torque: P ~ n.

    References
    ----------
    .. [1] I. J. Karassik, J. P. Messina, P. Cooper and C. C. Heald, *Pump Handbook*, 4th ed.
       New York: McGraw-Hill, 2008, sec. 2.1 (affinity laws).

    Examples
    --------
    >>> speed_exponent("variable_torque")
    3.0
    """
    labels = np.asarray(load_type, dtype=object)
    known = np.isin(labels, list(SPEED_EXPONENT_BY_LOAD_TYPE))
    _require(known, f"load_type must be one of {sorted(SPEED_EXPONENT_BY_LOAD_TYPE)}")
    out = np.where(labels == "variable_torque", 3.0, 1.0).astype(float)
    return float(out) if out.ndim == 0 else out


def affinity_flow_ratio(speed_ratio):
    """Flow ratio of a centrifugal machine for a speed ratio, Q2/Q1 = n2/n1 (affinity law [1]).

    Parameters
    ----------
    speed_ratio : float or array_like
        n2/n1 [-], > 0.

    Returns
    -------
    float or array_like
        Q2/Q1 [-].

    Notes
    -----
    Same impeller, near the best-efficiency point, speed changes up to about +-30 % [1].

    References
    ----------
    .. [1] ANSI/HI 14.3-2019, *Rotodynamic Pumps for Design and Application*, Hydraulic Institute,
       2019 (affinity rules).
    """
    r, wrap, _ = _unwrap(speed_ratio)
    _require(r > 0, "speed_ratio must be positive")
    return wrap(r * 1.0)


def affinity_head_ratio(speed_ratio):
    """Head (or pressure) ratio of a centrifugal machine, H2/H1 = (n2/n1)^2 (affinity law).

    Parameters
    ----------
    speed_ratio : float or array_like
        n2/n1 [-], > 0.

    Returns
    -------
    float or array_like
        H2/H1 [-].

    Notes
    -----
    ANSI/HI 14.3-2019 affinity rules; same validity as :func:`affinity_flow_ratio`.
    """
    r, wrap, _ = _unwrap(speed_ratio)
    _require(r > 0, "speed_ratio must be positive")
    return wrap(r**2)


def affinity_power_ratio(speed_ratio, speed_exponent=3.0):
    """Shaft power ratio for a speed ratio, P2/P1 = (n2/n1)^k.

    Parameters
    ----------
    speed_ratio : float or array_like
        n2/n1 [-], > 0.
    speed_exponent : float or array_like, optional
        k [-]: 3 for variable torque (affinity law), 1 for constant torque; see :func:`speed_exponent`.

    Returns
    -------
    float or array_like
        P2/P1 [-].

    Notes
    -----
    For variable torque this is the third affinity law (ANSI/HI 14.3-2019); it ignores the change of
    pump efficiency with speed (small within +-30 %) and holds only without static head: on a system
    with static head use :func:`speed_controlled_shaft_frac`.

    Examples
    --------
    A 20 % speed cut on a fan roughly halves its power (0.8^3 = 0.512):

    >>> round(affinity_power_ratio(0.8), 3)
    0.512
    """
    r, wrap, _ = _unwrap(speed_ratio)
    _require(r > 0, "speed_ratio must be positive")
    return wrap(r ** np.asarray(speed_exponent, dtype=float))


# --------------------------------------------------------------------------------------------------
# (b) Speed-coupled operating point
# --------------------------------------------------------------------------------------------------
def shaft_power_at_speed_kw(ref_shaft_p_kw, ref_speed_rpm, new_speed_rpm, speed_exponent=3.0):
    """Shaft power of the driven machine when it is run at a fixed new speed.

    Parameters
    ----------
    ref_shaft_p_kw : float, array_like, pandas.Series or pandas.DataFrame
        Shaft power measured or profiled with the existing motor [kW], >= 0.
    ref_speed_rpm : float or array_like
        Speed at which that power was drawn [rpm], > 0 (the existing motor's own, slip-dependent,
        speed at each step, or its nameplate speed).
    new_speed_rpm : float or array_like
        Fixed speed of the new machine [rpm], > 0, e.g. synchronous speed for a synchronous or
        line-start PM motor.
    speed_exponent : float or array_like, optional
        k in P ~ n^k [-]; 3 variable torque, 1 constant torque.

    Returns
    -------
    array_like
        P_new = P_ref (n_new / n_ref)^k [kW], same kind as ``ref_shaft_p_kw``. Per-motor arrays of a
        2-D (n_motors, n_steps) load are broadcast along the motors axis.

    Raises
    ------
    ValueError
        On negative power or non-positive speeds.

    Notes
    -----
    Closed form of the speed coupling when the new speed does not depend on load. Affinity laws
    [ANSI/HI 14.3-2019]; magnitude discussed in docs/models-induction.md.

    Examples
    --------
    A 4-pole pump load measured at 1475 rpm, driven instead at 1500 rpm by a synchronous machine:

    >>> round(shaft_power_at_speed_kw(30.0, 1475.0, 1500.0), 3)
    31.551
    """
    p_ref, wrap, kind = _unwrap(ref_shaft_p_kw)
    n_ref = _per_motor(ref_speed_rpm, kind, p_ref.ndim)
    n_new = _per_motor(new_speed_rpm, kind, p_ref.ndim)
    k = _per_motor(speed_exponent, kind, p_ref.ndim)
    _forbid(p_ref < 0, "ref_shaft_p_kw must not be negative")
    _require(n_ref > 0, "ref_speed_rpm must be positive")
    _require(n_new > 0, "new_speed_rpm must be positive")
    return wrap(p_ref * ratio_power(n_new / n_ref, k))


def ratio_power(ratio, k):
    """``ratio ** k`` for the affinity laws: the cube as (ratio ratio) ratio, the first power as ratio itself.

    Parameters
    ----------
    ratio : numpy.ndarray or float
        A speed ratio [-].
    k : float or numpy.ndarray broadcastable to ``ratio``
        The load's exponent [-].

    Returns
    -------
    numpy.ndarray or float
        ``numpy.power(ratio, k)`` within an ulp (exactly for k = 1), in a fifth of the time for the cube
        and none for the first power (the rule of :func:`models.induction.coupling_power`).

    References
    ----------
    ANSI/HI 14.3-2019, *Rotodynamic Pumps for Design and Application* (affinity laws: P ~ n^3).
    """
    ratio = np.asarray(ratio, dtype=float)
    k = np.asarray(k, dtype=float)
    shape = np.broadcast_shapes(ratio.shape, k.shape)
    if k.size and (k == 3.0).all():
        out = ratio * ratio * ratio
    elif k.size and (k == 1.0).all():
        out = ratio.copy()
    else:  # each exponent its own way, element by element (masks, no gathered copies)
        out = np.empty(shape)
        r, kb = np.broadcast_to(ratio, shape), np.broadcast_to(k, shape)
        cube, one = kb == 3.0, kb == 1.0
        np.multiply(r, r, out=out, where=cube)
        np.multiply(out, r, out=out, where=cube)
        np.copyto(out, r, where=one)
        np.power(r, kb, out=out, where=~(cube | one))
    return out if out.shape == shape else np.broadcast_to(out, shape).copy()


def solve_speed_coupled_load(
    ref_shaft_p_kw,
    ref_speed_rpm,
    speed_of_new: Callable[[Any], Any],
    speed_exponent=3.0,
    tol_kw: float = 1e-9,
) -> SpeedCoupledLoad:
    """Shaft load and speed of a replacement machine whose speed depends on its own load.

    Parameters
    ----------
    ref_shaft_p_kw : float, array_like, pandas.Series or pandas.DataFrame
        Shaft power drawn with the existing motor at its own speed [kW], >= 0. A 2-D numpy array is
        (n_motors, n_steps); a DataFrame is (time, motors).
    ref_speed_rpm : float or array_like
        Existing motor's speed at each step [rpm], > 0, broadcastable to ``ref_shaft_p_kw`` (e.g.
        :func:`models.induction.induction_speed_rpm` of the old motor at ``ref_shaft_p_kw``).
    speed_of_new : callable
        ``speed_of_new(shaft_p_kw) -> speed_rpm`` for the new machine; it receives an object of the
        kind and shape of ``ref_shaft_p_kw`` and returns speeds of the same shape, e.g.
        ``lambda p: induction_speed_rpm(new_params, p)``.
    speed_exponent : float or array_like, optional
        k in P ~ n^k [-]; 3 variable torque, 1 constant torque; per motor.
    tol_kw : float, optional
        Convergence tolerance on the shaft power [kW], scaled per element by max(1, its reference
        power): each element stops iterating when its own change is within it.

    Returns
    -------
    SpeedCoupledLoad
        Fields of the kind and shape of ``ref_shaft_p_kw``.

    Raises
    ------
    ValueError
        On negative power, non-positive speeds, or if the iteration does not converge within
        :data:`MAX_COUPLING_ITERATIONS` (a speed-vs-load relation far steeper than any motor's).

    Notes
    -----
    The fixed point P = P_ref (n_new(P) / n_ref)^k is iterated from P = P_ref (a cube k = 3 taken as
    a product of three ratios, within an ulp of ``pow`` and a fifth of its time). Its contraction factor
    is about k s_r P/P_r (k x the new motor's slip at that load, a few per cent), so the error falls
    by a factor 20-100 per pass and a handful of passes reach the tolerance. Every element stops on
    its own change, so an element's result is the same whatever else is solved with it (``speed_of_new``
    being element by element).

    Examples
    --------
    A pump load measured at 1475 rpm; the new motor runs at 1500 - 0.5 rpm per kW:

    >>> out = solve_speed_coupled_load(30.0, 1475.0, lambda p: 1500.0 - 0.5 * p)
    >>> round(out.shaft_p_kw, 4), round(out.speed_rpm, 4)
    (30.5959, 1484.7021)
    """
    p_ref, wrap, kind = _unwrap(ref_shaft_p_kw)
    n_ref = _per_motor(ref_speed_rpm, kind, p_ref.ndim).astype(float)
    k = _per_motor(speed_exponent, kind, p_ref.ndim)
    _forbid(p_ref < 0, "ref_shaft_p_kw must not be negative")
    _require(n_ref > 0, "ref_speed_rpm must be positive")
    shape = np.broadcast_shapes(p_ref.shape, n_ref.shape, np.shape(k))
    # Work at least 1-D so the in-place passes below also work for a single value; reshape at the end.
    p_target = np.array(np.broadcast_to(p_ref, shape), dtype=float, ndmin=1)

    def new_speed(p: np.ndarray) -> np.ndarray:
        n = speed_of_new(wrap(p.reshape(shape)))
        n = np.asarray(n.to_numpy() if hasattr(n, "to_numpy") else n, dtype=float)
        # one pass on the usual path: the smallest speed, NaN (missing data) left aside as in the full test
        if n.size and np.fmin.reduce(n, axis=None) <= 0:
            _require(~(n <= 0), "speed_of_new returned a non-positive speed")
        return np.broadcast_to(n.reshape(n.shape if n.ndim else (1,) * p.ndim), p.shape)

    p = p_target.copy()
    # each element stops on its own change, against its own scale max(1, |P_ref|): its value does not
    # depend on the other elements solved with it (any batch, any block size gives the same bits)
    limit = tol_kw * np.maximum(np.abs(p_target), 1.0)
    done = np.isnan(p_target)  # missing data propagates as NaN and does not block convergence
    for _ in range(MAX_COUPLING_ITERATIONS):
        with np.errstate(over="ignore", invalid="ignore"):
            p_next = ratio_power(np.divide(new_speed(p), n_ref), k)
            p_next *= p_target
            change = np.abs(p_next - p)
            np.copyto(p_next, p, where=done)  # a converged element keeps its value
            done |= change <= limit  # (NaN from an overflow counts as not converged)
        p = p_next
        if done.all():
            break
    else:
        raise ValueError(
            "speed-coupled load did not converge; the new machine's speed-vs-load relation is far "
            "steeper than a motor's slip (check speed_of_new)"
        )
    n_final = np.array(new_speed(p))
    return SpeedCoupledLoad(
        shaft_p_kw=wrap(p.reshape(shape)),
        speed_rpm=wrap(n_final.reshape(shape)),
        speed_ratio=wrap(np.divide(n_final, n_ref).reshape(shape)),
    )


# --------------------------------------------------------------------------------------------------
# (c) Remedies for the speed rise
# --------------------------------------------------------------------------------------------------
def apply_speed_remedy(ref_shaft_p_kw, coupled_shaft_p_kw, remedy):
    """Shaft load of the new machine after an optional remedy for its speed change.

    Parameters
    ----------
    ref_shaft_p_kw : float, array_like, pandas.Series or pandas.DataFrame
        Shaft power with the existing motor [kW].
    coupled_shaft_p_kw : same kind as ``ref_shaft_p_kw``
        Shaft power of the new machine without remedy [kW] (from
        :func:`shaft_power_at_speed_kw` or :func:`solve_speed_coupled_load`).
    remedy : str or array_like of str
        Per motor: ``"none"`` (the driven machine follows the new speed), ``"trim_or_pulley"`` (the
        impeller is trimmed or the pulley ratio changed so the driven machine turns as before) or
        ``"speed_control"`` (a drive holds the reference speed).

    Returns
    -------
    array_like
        Shaft power [kW], same kind as ``ref_shaft_p_kw``: the coupled power for ``"none"``, the
        reference power otherwise.

    Raises
    ------
    ValueError
        For an unknown remedy label.

    Notes
    -----
    Trim and pulley change restore the driven machine's duty point, hence its shaft power (the small
    efficiency change of a trimmed impeller is neglected). Under ``"speed_control"`` the motor runs at
    the reference speed, so its shaft power is the reference power; the drive's own losses are added
    by the drive model, not here.

    Examples
    --------
    >>> apply_speed_remedy(30.0, 31.55, "trim_or_pulley")
    30.0
    """
    p_ref, wrap, kind = _unwrap(ref_shaft_p_kw)
    p_new, _, _ = _unwrap(coupled_shaft_p_kw)
    labels = _per_motor(np.asarray(remedy, dtype=object), kind, p_ref.ndim)
    _require(np.isin(labels, ["none", "trim_or_pulley", "speed_control"]), "remedy must be 'none', 'trim_or_pulley' or 'speed_control'")
    return wrap(np.where(labels == "none", p_new, p_ref).astype(float))


# --------------------------------------------------------------------------------------------------
# (d) Throttled pump or fan converted to speed control, on a system curve with static head
# --------------------------------------------------------------------------------------------------
def throttled_flow_frac(throttled_shaft_p_kw, design_shaft_p_kw, zero_flow_power_frac=DEFAULT_THROTTLED_ZERO_FLOW_POWER_FRAC):
    """Flow of a throttled pump or fan inferred from its shaft power.

    Parameters
    ----------
    throttled_shaft_p_kw : float, array_like, pandas.Series or pandas.DataFrame
        Shaft power at fixed speed with a throttling valve or damper [kW], >= 0.
    design_shaft_p_kw : float or array_like
        Shaft power at design flow, valve fully open [kW], > 0; per motor.
    zero_flow_power_frac : float or array_like, optional
        Shaft power at zero flow as a fraction of design power [-], in [0, 1). Default
        :data:`DEFAULT_THROTTLED_ZERO_FLOW_POWER_FRAC` (common practice).

    Returns
    -------
    array_like
        Flow fraction q = (P/P_d - p0)/(1 - p0) [-], clipped to [0, 1], same kind as the load.

    Notes
    -----
    Linear shaft-power-vs-flow line of a radial-flow pump at constant speed, P/P_d = p0 + (1 - p0) q,
    a common-practice approximation of the rising power curve (see docs/models-induction.md).
    """
    p, wrap, kind = _unwrap(throttled_shaft_p_kw)
    p_d = _per_motor(design_shaft_p_kw, kind, p.ndim)
    p0 = _per_motor(zero_flow_power_frac, kind, p.ndim)
    return wrap(_flow_frac(p, p_d, p0))


def _flow_frac(p: np.ndarray, p_d: np.ndarray, p0: np.ndarray) -> np.ndarray:
    """Validated core of :func:`throttled_flow_frac` on arrays already shaped to broadcast."""
    _forbid(p < 0, "throttled_shaft_p_kw must not be negative")
    _require(p_d > 0, "design_shaft_p_kw must be positive")
    _require((p0 >= 0) & (p0 < 1), "zero_flow_power_frac must lie in [0, 1)")
    return np.clip((p / p_d - p0) / (1.0 - p0), 0.0, 1.0)


def system_head_frac(flow_frac, static_head_frac):
    """Head of a system curve with static head, as a fraction of the design head.

    Parameters
    ----------
    flow_frac : float or array_like
        Flow as a fraction of design flow [-], >= 0.
    static_head_frac : float or array_like
        Static head as a fraction of design head [-], in [0, 1].

    Returns
    -------
    float or array_like
        H/H_d = h_s + (1 - h_s) q^2 [-].

    Notes
    -----
    System curve: static head plus friction head growing with the square of flow (US DOE,
    *Improving Pumping System Performance: A Sourcebook for Industry*, 2nd ed., 2006).
    """
    q, wrap, _ = _unwrap(flow_frac)
    h_s = np.asarray(static_head_frac, dtype=float)
    _require((h_s >= 0) & (h_s <= 1), "static_head_frac must lie in [0, 1]")
    return wrap(h_s + (1.0 - h_s) * q**2)


def speed_frac_for_flow(flow_frac, static_head_frac, shutoff_head_pu=DEFAULT_SHUTOFF_HEAD_PU):
    """Speed at which a pump meets its system curve at a given flow.

    Parameters
    ----------
    flow_frac : float or array_like
        Flow as a fraction of design flow [-], in [0, 1].
    static_head_frac : float or array_like
        Static head as a fraction of design head [-], in [0, 1].
    shutoff_head_pu : float or array_like, optional
        Pump shut-off head at full speed over design head [pu], >= 1.

    Returns
    -------
    float or array_like
        r = n/n_d = sqrt((h_s + (h0 - h_s) q^2)/h0) [-].

    Notes
    -----
    Full-speed pump curve H/H_d = h0 - (h0 - 1) q^2 through the design point; at speed r the affinity
    laws give r^2 h0 - (h0 - 1) q^2. Equating with the system curve h_s + (1 - h_s) q^2 gives r
    (Karassik et al., *Pump Handbook*, 4th ed., sec. 2.1 and ch. 13). Without static head r = q.
    """
    q, wrap, _ = _unwrap(flow_frac)
    h0 = np.asarray(shutoff_head_pu, dtype=float)
    h_s = np.asarray(static_head_frac, dtype=float)
    _require(h0 >= 1, "shutoff_head_pu must be >= 1")
    _require((h_s >= 0) & (h_s <= 1), "static_head_frac must lie in [0, 1]")
    return wrap(np.sqrt((h_s + (h0 - h_s) * q**2) / h0))


def pump_efficiency_ratio(flow_frac, speed_frac):
    """Pump efficiency relative to its best-efficiency point, simple parabola.

    Parameters
    ----------
    flow_frac : float or array_like
        Flow as a fraction of design (best-efficiency) flow at full speed [-], >= 0.
    speed_frac : float or array_like
        Speed as a fraction of design speed [-], > 0.

    Returns
    -------
    float or array_like
        eta/eta_BEP = 2x - x^2 with x = q / r [-] (the flow relative to the best-efficiency flow at
        that speed, by the first affinity law).

    Notes
    -----
    A parabola through zero at shut-off and 1 at the best-efficiency point: a common-practice shape
    of a radial pump's efficiency curve (about 75 % of best efficiency at half the best-efficiency
    flow). It assumes the design duty is at the best-efficiency point and ignores the small loss of
    efficiency with speed itself (Reynolds-number effects), so on a pure-friction system (x = 1) it
    reproduces the cube law.
    """
    q, wrap, _ = _unwrap(flow_frac)
    r = np.asarray(speed_frac, dtype=float)
    _require(r > 0, "speed_frac must be positive")
    x = q / r
    return wrap(x * (2.0 - x))


def speed_controlled_shaft_frac(flow_frac, static_head_frac, shutoff_head_pu=DEFAULT_SHUTOFF_HEAD_PU):
    """Shaft power of a speed-controlled pump on a system curve, as a fraction of design power.

    Parameters
    ----------
    flow_frac : float or array_like
        Flow as a fraction of design flow [-], in [0, 1].
    static_head_frac : float or array_like
        Static head as a fraction of design head [-], in [0, 1].
    shutoff_head_pu : float or array_like, optional
        Pump shut-off head over design head [pu], >= 1.

    Returns
    -------
    float or array_like
        P/P_d = q H(q) / (eta/eta_d) = r H(q) / (2 - q/r) [-].

    Notes
    -----
    Hydraulic power q H(q) on the system curve (:func:`system_head_frac`) divided by the relative
    pump efficiency (:func:`pump_efficiency_ratio`) at the speed r of :func:`speed_frac_for_flow`.
    The form r H/(2 - q/r) avoids 0/0 at zero flow. With h_s = 0 it reduces to q^3 (cube law).

    Examples
    --------
    Half flow on a friction-only system needs one eighth of the design power:

    >>> round(speed_controlled_shaft_frac(0.5, 0.0), 6)
    0.125
    """
    q, wrap, _ = _unwrap(flow_frac)
    h_s = np.asarray(static_head_frac, dtype=float)
    r = speed_frac_for_flow(q, h_s, np.asarray(shutoff_head_pu, dtype=float))
    h = system_head_frac(q, h_s)
    x = np.where(r > 0, q / np.where(r > 0, r, 1.0), 1.0)
    return wrap(r * h / (2.0 - x))


def throttled_to_speed_control(
    throttled_shaft_p_kw,
    design_shaft_p_kw,
    static_head_frac,
    zero_flow_power_frac=DEFAULT_THROTTLED_ZERO_FLOW_POWER_FRAC,
    shutoff_head_pu=DEFAULT_SHUTOFF_HEAD_PU,
) -> SpeedControlledLoad:
    """Map a throttled pump or fan shaft-load profile to the same flows under speed control.

    Parameters
    ----------
    throttled_shaft_p_kw : float, array_like, pandas.Series or pandas.DataFrame
        Shaft power at fixed speed with throttling [kW], >= 0; 0 means the machine is off. A 2-D numpy
        array is (n_motors, n_steps); a DataFrame is (time, motors).
    design_shaft_p_kw : float or array_like
        Shaft power at design flow with the valve fully open [kW], > 0; per motor.
    static_head_frac : float or array_like
        Static head as a fraction of design head [-], in [0, 1]; per motor.
    zero_flow_power_frac : float or array_like, optional
        Throttled shaft power at zero flow over design power [-], in [0, 1); per motor.
    shutoff_head_pu : float or array_like, optional
        Pump shut-off head over design head [pu], >= 1; per motor.

    Returns
    -------
    SpeedControlledLoad
        Speed-controlled shaft power [kW], speed fraction and flow fraction, each the kind of the
        input. Steps with zero throttled power stay at zero power and zero speed.

    Raises
    ------
    ValueError
        On negative power or parameters out of range.

    Notes
    -----
    1. Flow from the throttled power, q = (P/P_d - p0)/(1 - p0), clipped to [0, 1]
       (:func:`throttled_flow_frac`).
    2. Speed on the system curve r = sqrt((h_s + (h0 - h_s) q^2)/h0) (:func:`speed_frac_for_flow`).
    3. Shaft power P = P_d r H(q) / (2 - q/r) (:func:`speed_controlled_shaft_frac`).
    A worked case is in docs/derivations/loads-throttled-to-speed-control.md. Drive losses are not
    included.

    Examples
    --------
    A 30 kW design-point pump throttled to 22 kW, 30 % static head:

    >>> out = throttled_to_speed_control(22.0, 30.0, 0.3)
    >>> round(out.flow_frac, 4), round(out.speed_frac, 4), round(out.shaft_p_kw, 3)
    (0.5556, 0.6939, 8.957)
    """
    p, wrap, kind = _unwrap(throttled_shaft_p_kw)
    h_s = _per_motor(static_head_frac, kind, p.ndim)
    h0 = _per_motor(shutoff_head_pu, kind, p.ndim)
    p_d = _per_motor(design_shaft_p_kw, kind, p.ndim)
    _require((h_s >= 0) & (h_s <= 1), "static_head_frac must lie in [0, 1]")
    _require(h0 >= 1, "shutoff_head_pu must be >= 1")
    q = _flow_frac(p, p_d, _per_motor(zero_flow_power_frac, kind, p.ndim))
    running = p > 0
    r = np.where(running, speed_frac_for_flow(q, h_s, h0), 0.0)
    frac = np.where(running, speed_controlled_shaft_frac(q, h_s, h0), 0.0)
    return SpeedControlledLoad(shaft_p_kw=wrap(frac * p_d), speed_frac=wrap(r), flow_frac=wrap(np.where(running, q, 0.0)))


# --------------------------------------------------------------------------------------------------
# (e) What a speed rise costs
# --------------------------------------------------------------------------------------------------
def speed_rise_effect(ref_shaft_p_kw, new_shaft_p_kw, interval_h=1.0) -> SpeedRiseEffect:
    """Extra shaft power per step and extra shaft energy per motor caused by a speed change.

    Parameters
    ----------
    ref_shaft_p_kw : float, array_like, pandas.Series or pandas.DataFrame
        Shaft power with the existing motor [kW]. Time is the last axis of a 1-D or 2-D numpy array
        ((n_steps,) for one motor, (n_motors, n_steps) for a fleet) and the index of a Series or
        DataFrame (one column per motor).
    new_shaft_p_kw : same kind and shape as ``ref_shaft_p_kw``
        Shaft power with the new machine [kW].
    interval_h : float or array_like, optional
        Length of each step [h], > 0 (mean power x interval = energy).

    Returns
    -------
    SpeedRiseEffect
        Extra power (same kind as the inputs) and, per motor, extra energy [kWh] and its share of the
        reference energy [-]. A Series gives scalars, a DataFrame a Series indexed by its columns.

    Examples
    --------
    >>> out = speed_rise_effect([30.0, 30.0], [31.55, 31.55], interval_h=1.0)
    >>> round(out.extra_shaft_energy_kwh, 6), round(out.extra_shaft_energy_frac, 4)
    (3.1, 0.0517)
    """
    p_ref, wrap, kind = _unwrap(ref_shaft_p_kw)
    p_new, _, _ = _unwrap(new_shaft_p_kw)
    dt, _, _ = _unwrap(interval_h)
    _require(dt > 0, "interval_h must be positive")
    if p_ref.shape != p_new.shape:
        raise ValueError(f"ref_shaft_p_kw and new_shaft_p_kw must have the same shape, got {p_ref.shape} and {p_new.shape}.")
    extra = p_new - p_ref
    axis = None if p_ref.ndim == 0 else (0 if kind == "frame" else -1)
    energy_extra = np.sum(extra * dt, axis=axis)
    energy_ref = np.sum(p_ref * dt, axis=axis)
    with np.errstate(divide="ignore", invalid="ignore"):
        frac = np.where(energy_ref > 0, energy_extra / np.where(energy_ref > 0, energy_ref, 1.0), np.nan)
    if kind == "frame":
        cols = ref_shaft_p_kw.columns
        per_motor = (pd.Series(energy_extra, index=cols), pd.Series(frac, index=cols))
    elif np.ndim(energy_extra) == 0:
        per_motor = (float(energy_extra), float(frac))
    else:
        per_motor = (energy_extra, frac)
    return SpeedRiseEffect(extra_shaft_p_kw=wrap(extra), extra_shaft_energy_kwh=per_motor[0], extra_shaft_energy_frac=per_motor[1])
