"""The site meter: every asset's active and reactive power plus base load and capacitor banks, per interval.

Scope: the site is metered at one point. Per interval the meter sees the sum of all assets' mean active
power ``p_kw`` and reactive power ``q_kvar``, a non-motor base load (constant kW or a kW profile, at one
lagging power factor), fixed capacitor banks (a constant leading kVAr while energised) and automatically
stepped capacitor banks, whose controller is modelled by :func:`stepped_bank_q_kvar`. Outputs are the
site's ``p_kw``, ``q_kvar`` (positive lagging, negative leading), ``s_kva``, the unsigned
``power_factor``, a ``leading`` flag and the capacitor kVAr in service. Reactive power here is the
fundamental (displacement) reactive power, the quantity a utility kVArh register integrates; harmonic
distortion power is not part of it (IEEE Std 1459-2010).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Sequence

import numba
import numpy as np
import pandas as pd

__all__ = [
    "FixedCapacitorBank",
    "Site",
    "SiteMeter",
    "SteppedCapacitorBank",
    "meter_from_asset_totals",
    "power_factor",
    "power_factor_from_tan_phi",
    "q_from_power_factor_kvar",
    "site_meter",
    "stepped_bank_q_kvar",
    "tan_phi_from_power_factor",
]

# Switching tolerance in units of one capacitor step: guards the floor/ceil of the controller rule
# against floating-point noise (e.g. 299.99999999 kVAr of need for three 100 kVAr steps).
_STEP_TOLERANCE = 1e-9


def tan_phi_from_power_factor(power_factor):
    """Return tan φ, the ratio of reactive to active power, for a displacement power factor.

    Parameters
    ----------
    power_factor : float or array_like
        Displacement power factor cos φ [-], in (0, 1].

    Returns
    -------
    float or ndarray
        tan φ = Q / P [-], >= 0.

    Raises
    ------
    ValueError
        If any power factor lies outside (0, 1].

    Notes
    -----
    tan φ = sqrt(1 − cos²φ) / cos φ. A reactive allowance written as a kVArh/kWh ratio is a tan φ
    threshold, so 0.33 kVArh per kWh corresponds to cos φ = 1/sqrt(1 + 0.33²) = 0.9496 [1].

    References
    ----------
    .. [1] IEEE Std 1459-2010, *IEEE Standard Definitions for the Measurement of Electric Power
       Quantities Under Sinusoidal, Nonsinusoidal, Balanced, or Unbalanced Conditions*, IEEE, 2010,
       clause 3.1.1 (single-phase sinusoidal definitions).

    Examples
    --------
    >>> round(float(tan_phi_from_power_factor(0.8)), 4)
    0.75
    """
    pf = np.asarray(power_factor, dtype=float)
    if np.any(~((pf > 0.0) & (pf <= 1.0))):
        raise ValueError("power_factor must lie in (0, 1]")
    out = np.sqrt(1.0 - pf * pf) / pf
    return out if out.ndim else float(out)


def power_factor_from_tan_phi(tan_phi):
    """Return the displacement power factor for a ratio tan φ = Q / P.

    Parameters
    ----------
    tan_phi : float or array_like
        Ratio of reactive to active power [-], >= 0 (sign ignored: the result is unsigned).

    Returns
    -------
    float or ndarray
        cos φ = 1 / sqrt(1 + tan²φ) [-], in (0, 1].

    Notes
    -----
    Inverse of :func:`tan_phi_from_power_factor` (IEEE Std 1459-2010, clause 3.1.1).

    Examples
    --------
    >>> round(float(power_factor_from_tan_phi(0.4)), 4)
    0.9285
    """
    t = np.asarray(tan_phi, dtype=float)
    out = 1.0 / np.sqrt(1.0 + t * t)
    return out if out.ndim else float(out)


def q_from_power_factor_kvar(p_kw, power_factor):
    """Return the lagging reactive power drawn by a load of given active power and power factor.

    Parameters
    ----------
    p_kw : float, ndarray or pandas object
        Active power [kW], consumer view.
    power_factor : float or array_like
        Lagging displacement power factor [-], in (0, 1].

    Returns
    -------
    same kind as ``p_kw``
        Reactive power [kVAr], positive (lagging) for positive ``p_kw``.

    Notes
    -----
    Q = P · tan φ with tan φ = sqrt(1 − PF²)/PF (IEEE Std 1459-2010, clause 3.1.1).

    Examples
    --------
    >>> round(float(q_from_power_factor_kvar(100.0, 0.8)), 6)
    75.0
    """
    t = tan_phi_from_power_factor(power_factor)
    return p_kw * t


def power_factor(p_kw, q_kvar):
    """Return the unsigned power factor |P| / S of each interval.

    Parameters
    ----------
    p_kw : float, ndarray or pandas object
        Active power [kW].
    q_kvar : float, ndarray or pandas object
        Reactive power [kVAr], positive lagging, negative leading.

    Returns
    -------
    same kind as ``p_kw``
        Power factor [-], in [0, 1]. An interval with S = 0 has power factor 1.0 by convention
        (nothing is drawn, so nothing is penalised).

    Notes
    -----
    PF = |P| / sqrt(P² + Q²) (IEEE Std 1459-2010, clause 3.1.1). Whether it is leading is the sign of Q,
    reported separately (see ``docs/conventions.md``).

    Examples
    --------
    >>> round(float(power_factor(80.0, 60.0)), 6)
    0.8
    """
    p = np.asarray(p_kw, dtype=float)
    q = np.asarray(q_kvar, dtype=float)
    s = np.hypot(p, q)
    with np.errstate(invalid="ignore", divide="ignore"):
        pf = np.where(s > 0.0, np.abs(p) / np.where(s > 0.0, s, 1.0), 1.0)
    return _like(p_kw, pf)


def _check_bank(rated_q_kvar: float, step_kvar: float, target_power_factor: float) -> None:
    """Raise ValueError for a stepped bank's size, step or target outside their ranges."""
    if rated_q_kvar < 0.0:
        raise ValueError("rated_q_kvar must be >= 0 (enter the bank size as a positive number)")
    if not step_kvar > 0.0:
        raise ValueError("step_kvar must be > 0")
    if not 0.0 < target_power_factor <= 1.0:
        raise ValueError("target_power_factor must lie in (0, 1]")


def stepped_bank_q_kvar(p_kw, q_kvar, rated_q_kvar, step_kvar, target_power_factor):
    """Return the kVAr an automatically stepped capacitor bank puts in service in each interval.

    Parameters
    ----------
    p_kw : float, ndarray or pandas object
        Site active power seen by the bank's controller [kW].
    q_kvar : float, ndarray or pandas object
        Site reactive power seen by the controller before this bank [kVAr], positive lagging.
    rated_q_kvar : float
        Bank size [kVAr], >= 0 (entered as a positive size).
    step_kvar : float
        Size of one switched step [kVAr], > 0. The bank has floor(rated / step) equal steps.
    target_power_factor : float
        Lagging power factor the controller aims for [-], in (0, 1].

    Returns
    -------
    same kind as ``q_kvar``
        Capacitor reactive power in service [kVAr], <= 0 (a capacitor supplies kVAr).

    Raises
    ------
    ValueError
        If a size is negative, the step is not positive, or the target lies outside (0, 1].

    Notes
    -----
    Controller rule (a "reach the target, never lead" rule, our modelling choice). With
    Q_t = |P| · tan(acos PF_target) the reactive power still allowed at the target,

    * k_reach = ceil((Q − Q_t) / step): the fewest steps that bring the PF up to the target;
    * k_lead = floor(Q / step): the most steps that keep the site lagging (Q − k·step >= 0);
    * k = clip(min(k_reach, k_lead), 0, N) with N = floor(rated / step) steps;

    so the bank reaches the target whenever it has enough steps and switching them in does not make
    the site lead; otherwise it switches in as many as it can without going leading. The capacitor kVAr
    is −k · step. The compensation needed is Q_c = P (tan φ1 − tan φ2), the classic correction
    formula [1]. The rule is evaluated independently in every interval (no switching delay or
    hysteresis), which matches the interval averages a meter integrates when the controller's
    response time is short against the interval.

    Warnings
    --------
    Real controllers have a response delay and a switching threshold; over 15-min intervals these
    effects are small but not zero.

    References
    ----------
    .. [1] IEEE Std 1036-2010, *IEEE Guide for the Application of Shunt Power Capacitors*, IEEE, 2010.

    Examples
    --------
    A site at 400 kW, 300 kVAr (PF 0.80) with a 250 kVAr bank in 50 kVAr steps aiming at PF 0.95:
    Q_t = 131.5 kVAr, need 168.5 kVAr, so four steps (200 kVAr) go in.

    >>> float(stepped_bank_q_kvar(400.0, 300.0, 250.0, 50.0, 0.95))
    -200.0
    """
    _check_bank(rated_q_kvar, step_kvar, target_power_factor)
    p = np.asarray(p_kw, dtype=float)
    q = np.asarray(q_kvar, dtype=float)
    shape = np.broadcast_shapes(p.shape, q.shape)
    n_max = np.floor(rated_q_kvar / step_kvar + _STEP_TOLERANCE)
    q_allowed = np.abs(p) * tan_phi_from_power_factor(target_power_factor)  # p's shape: once per scenario set
    # the rule in place in two arrays (the same operations in the same order as written above)
    k = np.subtract(q, q_allowed, out=np.empty(shape))
    k /= step_kvar
    k -= _STEP_TOLERANCE
    np.ceil(k, out=k)  # k_reach
    k_lead = np.divide(q, step_kvar, out=np.empty(shape))
    k_lead += _STEP_TOLERANCE
    np.floor(k_lead, out=k_lead)
    np.minimum(k, k_lead, out=k)
    np.clip(k, 0.0, n_max, out=k)
    k *= -step_kvar
    return _like(q_kvar, k)


def add_stepped_bank_kvar(p_kw: np.ndarray, q_kvar: np.ndarray, rated_q_kvar: float, step_kvar: float,
                          target_power_factor: float) -> None:
    """Add a stepped bank's kVAr in service to (S, T) meter arrays in place: ``q_kvar += stepped_bank_q_kvar(...)``.

    Parameters
    ----------
    p_kw : numpy.ndarray, shape (S, T) or (1, T)
        Site active power seen by the controller [kW] (one row stands for every row of ``q_kvar``).
    q_kvar : numpy.ndarray, shape (S, T), float64
        Site reactive power before the bank [kVAr]; on return, after it.
    rated_q_kvar, step_kvar, target_power_factor : float
        As in :func:`stepped_bank_q_kvar` (checked the same way).

    Notes
    -----
    One compiled pass doing :func:`stepped_bank_q_kvar`'s operations in its order (the same values,
    bit for bit), without its two temporaries.
    """
    _check_bank(rated_q_kvar, step_kvar, target_power_factor)
    n_max = np.floor(rated_q_kvar / step_kvar + _STEP_TOLERANCE)
    _add_stepped_kernel(p_kw, q_kvar, float(tan_phi_from_power_factor(target_power_factor)), float(step_kvar),
                        float(n_max), _STEP_TOLERANCE)


@numba.njit(nogil=True, cache=True)
def _add_stepped_kernel(p, q, tan_target, step, n_max, tol):  # pragma: no cover - compiled
    """Compiled body of :func:`add_stepped_bank_kvar` (NaN in, NaN out, as numpy's minimum and clip)."""
    one_p = p.shape[0] == 1
    for s in range(q.shape[0]):
        sp = 0 if one_p else s
        for t in range(q.shape[1]):
            q_t = q[s, t]
            k = np.ceil((q_t - abs(p[sp, t]) * tan_target) / step - tol)
            k_lead = np.floor(q_t / step + tol)
            if k != k or k_lead != k_lead:
                k = np.nan
            else:
                if k_lead < k:
                    k = k_lead
                if k < 0.0:
                    k = 0.0
                if k > n_max:
                    k = n_max
            q[s, t] = q_t + k * -step


@dataclass(frozen=True)
class FixedCapacitorBank:
    """A capacitor bank that supplies its full rating whenever it is energised.

    Parameters
    ----------
    rated_q_kvar : float
        Bank size [kVAr], >= 0, entered as a positive number.
    name : str
        Label for reports.
    """

    rated_q_kvar: float
    name: str = ""

    def __post_init__(self) -> None:
        if not self.rated_q_kvar >= 0.0:
            raise ValueError(f"fixed bank {self.name!r}: rated_q_kvar must be >= 0")


@dataclass(frozen=True)
class SteppedCapacitorBank:
    """An automatically switched capacitor bank (see :func:`stepped_bank_q_kvar` for the rule).

    Parameters
    ----------
    rated_q_kvar : float
        Bank size [kVAr], >= 0.
    step_kvar : float
        Step size [kVAr], > 0.
    target_power_factor : float
        Controller target, lagging [-], in (0, 1].
    name : str
        Label for reports.
    """

    rated_q_kvar: float
    step_kvar: float
    target_power_factor: float = 0.95
    name: str = ""

    def __post_init__(self) -> None:
        if not self.rated_q_kvar >= 0.0:
            raise ValueError(f"stepped bank {self.name!r}: rated_q_kvar must be >= 0")
        if not self.step_kvar > 0.0:
            raise ValueError(f"stepped bank {self.name!r}: step_kvar must be > 0")
        if not 0.0 < self.target_power_factor <= 1.0:
            raise ValueError(f"stepped bank {self.name!r}: target_power_factor must lie in (0, 1]")

    def q_kvar(self, p_kw, q_kvar):
        """Return the bank's kVAr in service; passes through to :func:`stepped_bank_q_kvar`."""
        return stepped_bank_q_kvar(p_kw, q_kvar, self.rated_q_kvar, self.step_kvar, self.target_power_factor)


@dataclass(frozen=True, eq=False)
class SiteMeter:
    """Site meter readings per interval (mean values over each interval).

    Attributes
    ----------
    p_kw : ndarray or Series
        Site active power [kW], positive = import.
    q_kvar : ndarray or Series
        Site reactive power [kVAr], positive lagging, negative leading.
    s_kva : ndarray or Series
        Apparent power sqrt(P² + Q²) [kVA].
    power_factor : ndarray or Series
        Unsigned power factor [-], 1.0 when S = 0.
    leading : ndarray or Series of bool
        True where Q < 0 (the site supplies reactive power to the grid).
    capacitor_q_kvar : ndarray or Series
        Reactive power of all capacitor banks in service [kVAr], <= 0.
    """

    p_kw: object
    q_kvar: object
    s_kva: object
    power_factor: object
    leading: object
    capacitor_q_kvar: object

    def to_frame(self) -> pd.DataFrame:
        """Return the readings as a DataFrame (time index kept when the inputs had one)."""
        cols = {
            "p_kw": self.p_kw,
            "q_kvar": self.q_kvar,
            "s_kva": self.s_kva,
            "power_factor": self.power_factor,
            "leading": self.leading,
            "capacitor_q_kvar": self.capacitor_q_kvar,
        }
        index = self.p_kw.index if isinstance(self.p_kw, pd.Series) else None
        return pd.DataFrame({k: np.asarray(v) for k, v in cols.items()}, index=index)


def meter_from_asset_totals(
    p_kw,
    q_kvar,
    *,
    base_p_kw=0.0,
    base_power_factor: float = 1.0,
    fixed_bank_q_kvar: Sequence[float] = (),
    fixed_bank_energised=True,
    stepped_banks: Sequence[SteppedCapacitorBank] = (),
) -> SiteMeter:
    """Return the site meter from the summed asset power, adding base load and capacitor banks.

    Parameters
    ----------
    p_kw : ndarray or Series, shape (..., n_steps)
        Sum of all assets' active power per interval [kW]. Leading axes (e.g. scenarios) broadcast.
    q_kvar : ndarray or Series, shape (..., n_steps)
        Sum of all assets' reactive power [kVAr], positive lagging.
    base_p_kw : float or array_like, shape (n_steps,)
        Non-motor base load [kW], constant or a profile, >= 0.
    base_power_factor : float
        Lagging power factor of the base load [-], in (0, 1].
    fixed_bank_q_kvar : sequence of float
        Sizes of the fixed capacitor banks [kVAr], each >= 0.
    fixed_bank_energised : bool or array_like of bool
        Whether each fixed bank is energised in each interval: ``True`` (always), an array of shape
        (n_steps,) (one schedule for every bank), (n_fixed, 1) (per bank, constant) or
        (n_fixed, n_steps).
    stepped_banks : sequence of SteppedCapacitorBank
        Automatic banks, applied in order: each controller sees the site after the fixed banks and the
        earlier stepped banks.

    Returns
    -------
    SiteMeter
        Arrays of the input's shape, or Series with the input's index when given Series.

    Raises
    ------
    ValueError
        On negative base load, a base power factor outside (0, 1] or a negative bank size.

    Notes
    -----
    P_site = ΣP_asset + P_base; Q_site = ΣQ_asset + P_base · tan φ_base − Σ Q_fixed · energised
    + Σ Q_stepped, with each stepped bank's Q from :func:`stepped_bank_q_kvar`. S = sqrt(P² + Q²),
    PF = |P|/S (IEEE Std 1459-2010, clause 3.1.1).
    """
    base_p = np.asarray(base_p_kw, dtype=float)
    if np.any(base_p < 0.0):
        raise ValueError("base_p_kw must be >= 0")
    sizes = np.asarray(fixed_bank_q_kvar, dtype=float).reshape(-1)
    if np.any(sizes < 0.0):
        raise ValueError("fixed_bank_q_kvar sizes must be >= 0 (enter bank sizes as positive numbers)")
    p_in = np.asarray(p_kw, dtype=float)
    q_in = np.asarray(q_kvar, dtype=float)
    p = p_in + base_p
    q = q_in + base_p * tan_phi_from_power_factor(base_power_factor)
    cap = np.zeros(np.broadcast_shapes(p.shape, q.shape))
    if sizes.size:
        energised = np.broadcast_to(np.asarray(fixed_bank_energised, dtype=bool), (sizes.size,) + p.shape[-1:])
        cap = cap - np.tensordot(sizes, energised.astype(float), axes=(0, 0))
    q = q + cap
    for bank in stepped_banks:
        q_bank = bank.q_kvar(p, q)
        q = q + q_bank
        cap = cap + q_bank
    s = np.hypot(p, q)
    pf = power_factor(p, q)
    leading = q < 0.0
    return SiteMeter(
        p_kw=_like(p_kw, p),
        q_kvar=_like(p_kw, q),
        s_kva=_like(p_kw, s),
        power_factor=_like(p_kw, pf),
        leading=_like(p_kw, leading),
        capacitor_q_kvar=_like(p_kw, cap),
    )


def site_meter(
    asset_p_kw,
    asset_q_kvar,
    *,
    base_p_kw=0.0,
    base_power_factor: float = 1.0,
    fixed_bank_q_kvar: Sequence[float] = (),
    fixed_bank_energised=True,
    stepped_banks: Sequence[SteppedCapacitorBank] = (),
) -> SiteMeter:
    """Return the site meter per interval from every asset's power, base load and capacitor banks.

    Parameters
    ----------
    asset_p_kw : ndarray, Series or DataFrame
        Assets' active power [kW]: an ndarray of shape (n_assets, n_steps) or a DataFrame with a time
        index and one column per asset (summed over assets), or already summed: a 1-D ndarray
        (n_steps,) or a Series.
    asset_q_kvar : same kind and shape as ``asset_p_kw``
        Assets' reactive power [kVAr], positive lagging, negative leading (e.g. an over-excited
        synchronous motor).
    base_p_kw, base_power_factor, fixed_bank_q_kvar, fixed_bank_energised, stepped_banks
        As in :func:`meter_from_asset_totals`.

    Returns
    -------
    SiteMeter
        1-D arrays (n_steps,), or Series with the input's time index when given pandas objects.

    Raises
    ------
    ValueError
        If the two inputs have different shapes, or as in :func:`meter_from_asset_totals`.

    Notes
    -----
    The sum over assets is order independent (up to floating-point rounding), so results do not
    depend on the order of the asset register.

    Examples
    --------
    Two motors (80 kW at 60 kVAr and 20 kW at 15 kVAr) and a 45 kVAr fixed bank give 100 kW and
    30 kVAr at the meter:

    >>> import numpy as np
    >>> m = site_meter(np.array([[80.0], [20.0]]), np.array([[60.0], [15.0]]), fixed_bank_q_kvar=[45.0])
    >>> float(m.q_kvar[0]), round(float(m.power_factor[0]), 4)
    (30.0, 0.9578)
    """
    p_total = _sum_assets(asset_p_kw)
    q_total = _sum_assets(asset_q_kvar)
    if np.shape(p_total) != np.shape(q_total):
        raise ValueError(f"asset_p_kw and asset_q_kvar differ in shape: {np.shape(asset_p_kw)} vs {np.shape(asset_q_kvar)}")
    return meter_from_asset_totals(
        p_total,
        q_total,
        base_p_kw=base_p_kw,
        base_power_factor=base_power_factor,
        fixed_bank_q_kvar=fixed_bank_q_kvar,
        fixed_bank_energised=fixed_bank_energised,
        stepped_banks=stepped_banks,
    )


@dataclass(frozen=True)
class Site:
    """The site's equipment outside the asset register: base load and existing capacitor banks.

    Parameters
    ----------
    base_p_kw : float
        Constant non-motor base load [kW], >= 0 (pass a profile to :meth:`meter` instead when it varies).
    base_power_factor : float
        Lagging power factor of the base load [-], in (0, 1].
    fixed_banks : tuple of FixedCapacitorBank
        Fixed banks, energised in every interval unless :meth:`meter` is told otherwise.
    stepped_banks : tuple of SteppedCapacitorBank
        Automatic banks, applied in the order given.
    """

    base_p_kw: float = 0.0
    base_power_factor: float = 1.0
    fixed_banks: tuple[FixedCapacitorBank, ...] = field(default_factory=tuple)
    stepped_banks: tuple[SteppedCapacitorBank, ...] = field(default_factory=tuple)

    def __post_init__(self) -> None:
        if not self.base_p_kw >= 0.0:
            raise ValueError("Site.base_p_kw must be >= 0")
        if not 0.0 < self.base_power_factor <= 1.0:
            raise ValueError("Site.base_power_factor must lie in (0, 1]")

    def meter(self, asset_p_kw, asset_q_kvar, *, base_p_kw_profile=None, fixed_bank_energised=True) -> SiteMeter:
        """Return :func:`site_meter` for this site (a profile, when given, replaces ``base_p_kw``)."""
        return site_meter(asset_p_kw, asset_q_kvar, **self._kwargs(base_p_kw_profile, fixed_bank_energised))

    def meter_from_totals(self, p_kw, q_kvar, *, base_p_kw_profile=None, fixed_bank_energised=True) -> SiteMeter:
        """Return :func:`meter_from_asset_totals` for this site (totals may carry a scenario axis)."""
        return meter_from_asset_totals(p_kw, q_kvar, **self._kwargs(base_p_kw_profile, fixed_bank_energised))

    def _kwargs(self, base_p_kw_profile, fixed_bank_energised) -> dict:
        return {
            "base_p_kw": self.base_p_kw if base_p_kw_profile is None else np.asarray(base_p_kw_profile, dtype=float),
            "base_power_factor": self.base_power_factor,
            "fixed_bank_q_kvar": tuple(b.rated_q_kvar for b in self.fixed_banks),
            "fixed_bank_energised": fixed_bank_energised,
            "stepped_banks": self.stepped_banks,
        }


def _sum_assets(x):
    """Sum an asset array over assets: rows of a 2-D ndarray, columns of a DataFrame."""
    if isinstance(x, pd.DataFrame):
        return x.sum(axis=1)
    if isinstance(x, pd.Series):
        return x
    a = np.asarray(x, dtype=float)
    if a.ndim == 2:
        return a.sum(axis=0)
    if a.ndim == 1:
        return a
    raise ValueError(f"asset arrays must be 1-D (n_steps,) or 2-D (n_assets, n_steps); got shape {a.shape}")


def _like(template, values):
    """Return ``values`` as the kind of ``template``: a Series keeps its index, a scalar stays scalar."""
    if isinstance(template, pd.Series):
        return pd.Series(np.asarray(values), index=template.index, name=template.name)
    arr = np.asarray(values)
    if arr.ndim == 0 and np.ndim(template) == 0:
        return arr.item()
    return arr
