"""Variable-speed drives: converter (CDM) losses and what the site meter sees at the drive input.

Scope: the complete drive module (CDM, IEC 61800-9-2) as one loss model evaluated at any relative
stator frequency and current, its efficiency class IE0/IE1/IE2 against a reference CDM, the supply-side
powers of a drive input with distorted current under the IEEE Std 1459-2010 definitions, the extra motor
losses caused by PWM supply, and the combination "an existing induction motor fed by an added drive".
Motors with their own models live in ``models.induction`` and ``models.synchronous``; the functions here
take the motor's numbers as plain arrays.

Array shapes: per-asset values have shape ``(n,)`` and per-interval values ``(n, t)``; a per-asset array
is broadcast against an ``(n, t)`` operating array as ``value[:, None]``. A pandas Series is returned as a
Series with the same index; a DataFrame is read as rows = time, columns = assets and returned the same way.

Sign convention (docs/conventions.md): consumer view, active and reactive power positive when drawn
from the supply; reactive power positive = lagging.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

import numpy as np
import pandas as pd

from models.wording import counted

DriveClass = Literal["IE0", "IE1", "IE2"]

#: The eight CDM operating points of IEC 61800-9-2 as (relative motor-stator frequency %, relative
#: torque-producing current %); published (IEC 61800-9-2:2017, clause 5).
CDM_OPERATING_POINTS_PCT: tuple[tuple[int, int], ...] = (
    (0, 25),
    (0, 50),
    (0, 100),
    (50, 25),
    (50, 50),
    (50, 100),
    (90, 50),
    (90, 100),
)

#: Loss of the reference CDM at the (90, 100) point as a fraction of the CDM rated apparent output power.
#: From memory / common practice, verify against IEC 61800-9-2 tables: the standard tabulates the
#: reference losses by rating, and those numbers were not read for this project. 4 % of rated kVA puts an IE2
#: drive (55 % of it, below) at 97-98 % efficiency at full load, the usual catalogue range.
REFERENCE_CDM_LOSS_FRAC_AT_90_100 = 0.040

#: Half-width of the IE1 band around the reference CDM loss at (90, 100): IE2 is more than 25 % below,
#: IE0 more than 25 % above (IEC 61800-9-2:2017; published).
CDM_CLASS_BAND_FRAC = 0.25

#: Loss at (90, 100) relative to the reference CDM for a typical drive of each class. Common practice:
#: one representative level inside each band of IEC 61800-9-2 (IE2 < 0.75, IE1 0.75-1.25, IE0 > 1.25);
#: replace with the drive's declared loss when it is known.
DRIVE_CLASS_LOSS_RATIO: dict[str, float] = {"IE0": 1.40, "IE1": 1.00, "IE2": 0.55}

#: Extra motor loss caused by PWM (converter) supply, as a fraction of the motor's losses on a sinusoidal
#: supply. Common practice, from memory: 5-20 % depending on switching frequency and filtering
#: (IEC TS 60034-2-3 gives the test method for converter-fed motors).
PWM_EXTRA_LOSS_FRAC = 0.10

#: Typical input displacement power factor and current THD by front end, (dpf, thd_i_frac).
#: From memory / common practice [M] (typical six-pulse, twelve-pulse and active-front-end figures).
FRONT_END_DEFAULTS: dict[str, tuple[float, float]] = {
    "six_pulse_with_choke": (0.97, 0.40),
    "six_pulse_no_choke": (0.96, 0.90),
    "twelve_pulse": (0.97, 0.12),
    "active_front_end": (1.00, 0.04),
}
#: The front end a drive has where nothing says otherwise (a drive fitted today, a catalogue row without one).
DEFAULT_FRONT_END = "six_pulse_with_choke"
#: Drive losses by front end relative to a six-pulse drive with a choke (common practice, from memory: a
#: twelve-pulse drive adds its phase-shifting transformer's losses, an active front end its switching rectifier's,
#: about 1-1.5 % of the drive's rating at full load against 2-3 % for the drive itself).
FRONT_END_LOSS_RATIO: dict[str, float] = {
    "six_pulse_with_choke": 1.0,
    "six_pulse_no_choke": 0.97,
    "twelve_pulse": 1.35,
    "active_front_end": 1.5,
}


@dataclass(frozen=True)
class DriveLossShape:
    """Shape of the CDM loss curve: P_loss ∝ a + b·I + c·I² + d·f·I (weights, any scale).

    Parameters
    ----------
    constant : float
        Weight of the load-independent loss (control electronics, fans, DC-link standby) [-], >= 0.
    linear : float
        Weight of the loss proportional to output current (semiconductor threshold voltage, switching
        at a fixed DC-link voltage) [-], >= 0.
    quadratic : float
        Weight of the loss proportional to current squared (on-state resistance, cables, chokes) [-], >= 0.
    frequency_current : float
        Weight of the loss proportional to relative frequency times current, i.e. to the active power
        through the rectifier and DC link (the small frequency-dependent term) [-], >= 0.

    Notes
    -----
    The weights are common practice, chosen so that the (0, 100) point has about 85 % and the (50, 25)
    point about 30 % of the (90, 100) loss, the usual look of published IEC 61800-9-2 loss tables
    (from memory). Only ratios matter: the curve is normalised to 1 at (90, 100).
    """

    constant: float = 0.15
    linear: float = 0.45
    quadratic: float = 0.25
    frequency_current: float = 0.15

    def __post_init__(self) -> None:
        values = (self.constant, self.linear, self.quadratic, self.frequency_current)
        if min(values) < 0 or sum(values) <= 0:
            raise ValueError(f"DriveLossShape weights must be >= 0 and not all zero; got {values}")


DEFAULT_DRIVE_LOSS_SHAPE = DriveLossShape()


# --------------------------------------------------------------------------------------------------
# Private helpers shared with models.synchronous
# --------------------------------------------------------------------------------------------------
class _Kind:
    """Remember the kind of an operating input so outputs can be returned as the same kind."""

    def __init__(self, template: object) -> None:
        self.index = None
        self.columns = None
        if isinstance(template, pd.DataFrame):
            self.kind = "frame"
            self.index, self.columns = template.index, template.columns
        elif isinstance(template, pd.Series):
            self.kind = "series"
            self.index = template.index
        elif np.ndim(template) == 0:
            self.kind = "scalar"
        else:
            self.kind = "array"

    def arr(self, x: object) -> np.ndarray:
        """Return ``x`` as a float array in the internal (n, t) orientation."""
        if isinstance(x, pd.DataFrame):
            return x.to_numpy(dtype=float).T
        if isinstance(x, pd.Series):
            return x.to_numpy(dtype=float)
        return np.asarray(x, dtype=float)

    def out(self, a: np.ndarray) -> object:
        """Return the internal array ``a`` as the kind of the template."""
        if self.kind == "scalar":
            return a[()] if np.ndim(a) == 0 else a
        if self.kind == "series" and np.ndim(a) == 1 and len(a) == len(self.index):
            return pd.Series(a, index=self.index)
        if self.kind == "frame" and np.ndim(a) == 2 and a.shape == (len(self.columns), len(self.index)):
            return pd.DataFrame(a.T, index=self.index, columns=self.columns)
        return a


def _per_asset(value: object, ndim: int) -> np.ndarray:
    """Return a per-asset value ready to broadcast against an operating array of ``ndim`` dimensions."""
    a = np.asarray(value.to_numpy() if isinstance(value, (pd.Series, pd.Index)) else value)
    if a.dtype.kind in "fiub":
        a = a.astype(float)
    if a.ndim == 1 and ndim == 2:
        return a[:, None]
    return a


def _check_range(name: str, a: object, lo: float, hi: float, *, lo_open: bool = False,
                 hi_open: bool = False, unit: str = "") -> None:
    """Raise ValueError naming the argument when a value is not finite or falls outside [lo, hi].

    Uses two reductions (no temporary arrays) on the common path; counts only when raising.
    """
    a = np.asarray(a, dtype=float)
    if a.size == 0:
        return
    amin, amax = float(np.min(a)), float(np.max(a))
    if np.isnan(amin) or np.isnan(amax) or np.isinf(amin) or np.isinf(amax):
        raise ValueError(f"{name} must be finite numbers; found NaN or infinity")
    below = amin <= lo if lo_open else amin < lo
    above = amax >= hi if hi_open else amax > hi
    if below or above:
        bad = ((a <= lo) if lo_open else (a < lo)) | ((a >= hi) if hi_open else (a > hi))
        first = a[bad].flat[0]
        left = "(" if lo_open else "["
        right = ")" if hi_open else "]"
        raise ValueError(
            f"{name} must lie in {left}{lo}, {hi}{right}{(' ' + unit) if unit else ''}; "
            f"{counted(np.count_nonzero(bad), 'value')} outside, e.g. {first!r}"
        )


#: Elements per block in :func:`_blockwise` (about 256 kB per float64 temporary, cache-sized).
_BLOCK_ELEMENTS = 1 << 15


def _blockwise(kernel, shape: tuple[int, ...], /, **inputs: object) -> dict[str, np.ndarray]:
    """Evaluate an elementwise ``kernel(**inputs) -> dict`` in cache-sized blocks.

    Long operating arrays (1,000 assets x 8,760 intervals) would otherwise create dozens of full-size
    temporaries. Blocks run along the first axis (whole rows, contiguous in memory) when a row is small,
    else along the last axis. Every input that spans the blocked axis is sliced; the others (per-asset
    ``(n, 1)`` columns, scalars) pass whole. Each block holds many assets and intervals and is computed
    with vectorised numpy; outputs are allocated once with ``shape``.
    """
    if len(shape) == 0 or int(np.prod(shape)) <= _BLOCK_ELEMENTS:
        res = kernel(**inputs)
        return {k: np.broadcast_to(v, shape).copy() for k, v in res.items()}
    row = int(np.prod(shape[1:])) if len(shape) > 1 else 1
    if row <= _BLOCK_ELEMENTS:
        axis, length, step = 0, shape[0], max(1, _BLOCK_ELEMENTS // row)
    else:
        axis, length = len(shape) - 1, shape[-1]
        step = max(1, _BLOCK_ELEMENTS // int(np.prod(shape[:-1])))
    nd = len(shape)
    outs: dict[str, np.ndarray] = {}
    for start in range(0, length, step):
        sl = slice(start, min(start + step, length))
        index = (sl,) if axis == 0 else (Ellipsis, sl)
        blk = {k: (v[index] if np.ndim(v) == nd and np.shape(v)[axis] == length else v) for k, v in inputs.items()}
        res = kernel(**blk)
        if not outs:
            outs = {k: np.empty(shape, dtype=np.result_type(v)) for k, v in res.items()}
        for k, v in res.items():
            outs[k][index] = v
    return outs


def _class_loss_ratio(drive_class: object, ndim: int) -> np.ndarray:
    classes = np.asarray(drive_class)
    names = np.unique(classes)
    unknown = [str(c) for c in names if str(c) not in DRIVE_CLASS_LOSS_RATIO]
    if unknown:
        raise ValueError(f"drive_class must be one of {sorted(DRIVE_CLASS_LOSS_RATIO)}; got {unknown}")
    ratio = np.zeros(classes.shape, dtype=float)
    for name, value in DRIVE_CLASS_LOSS_RATIO.items():  # loop over 3 class names, not over assets
        ratio = np.where(classes == name, value, ratio)
    return _per_asset(ratio, ndim)


# --------------------------------------------------------------------------------------------------
# CDM losses
# --------------------------------------------------------------------------------------------------
def cdm_relative_loss_frac(speed_frac, torque_current_frac, drive_class="IE2", magnetising_current_frac=0.0,
                           *, shape: DriveLossShape = DEFAULT_DRIVE_LOSS_SHAPE):
    """Return CDM losses as a fraction of its rated apparent output power.

    Parameters
    ----------
    speed_frac : float or array_like
        Relative motor-stator frequency (for a synchronous motor equal to the relative speed; for an
        induction motor about equal) [-], 0-1.5. Shape ``(n,)`` or ``(n, t)``.
    torque_current_frac : float or array_like
        Relative torque-producing output current, referred to the CDM rated output current [-], 0-2.
    drive_class : {"IE0", "IE1", "IE2"} or array_like of str
        CDM efficiency class per asset; sets the loss level at (90, 100) through
        :data:`DRIVE_CLASS_LOSS_RATIO`.
    magnetising_current_frac : float or array_like, optional
        Relative magnetising (flux-producing) output current, referred to the CDM rated current [-], 0-1.
        0 (the default) makes the output current equal to the torque-producing current, as at the
        operating points of IEC 61800-9-2.
    shape : DriveLossShape, optional
        Loss-curve weights.

    Returns
    -------
    float or ndarray
        Relative loss p_L = P_loss / S_r [-], broadcast shape of the inputs.

    Raises
    ------
    ValueError
        For values outside the ranges above or an unknown class.

    Notes
    -----
    Output current I = sqrt(I_t² + I_m²) (the two components are in quadrature). The loss is

        p_L(f, I) = k_class · p_ref · g(f, I) / g(0.9, 1),
        g(f, I) = a + b·I + c·I² + d·f·I,

    the usual semiconductor-loss form (constant, threshold-voltage and resistive conduction terms) plus a
    rectifier/DC-link term that follows the power through the drive. p_ref is
    :data:`REFERENCE_CDM_LOSS_FRAC_AT_90_100` and k_class the class ratio, so p_L(0.9, 1) = k_class·p_ref
    exactly. Normalising losses to the rated apparent output power and reporting them at the eight
    (frequency, torque-current) points follows IEC 61800-9-2 [1]; the weights are common practice.

    References
    ----------
    [1] IEC 61800-9-2:2017, *Adjustable speed electrical power drive systems - Part 9-2: Ecodesign for
        power drive systems, motor starters, power electronics and their driven applications - Energy
        efficiency indicators*, IEC, 2017 (Ed. 2.0, 2023, keeps the CDM points and classes).

    Examples
    --------
    An IE1 drive at the class point loses the reference share of its rating:

    >>> round(float(cdm_relative_loss_frac(0.9, 1.0, "IE1")), 4)
    0.04
    """
    f = np.asarray(speed_frac, dtype=float)
    it = np.asarray(torque_current_frac, dtype=float)
    ndim = max(f.ndim, it.ndim)
    f, it, im, k = _cdm_inputs(f, it, drive_class, magnetising_current_frac, ndim)
    out = _blockwise(_cdm_kernel, np.broadcast_shapes(f.shape, it.shape, im.shape, k.shape),
                     f=f, it=it, im=im, k=k, s=1.0, shape=shape)["loss"]
    return out[()] if out.ndim == 0 else out


def _cdm_inputs(f, it, drive_class, magnetising_current_frac, ndim):
    """Validate the CDM loss inputs and shape the per-asset ones for broadcasting."""
    _check_range("speed_frac", f, 0.0, 1.5)
    _check_range("torque_current_frac", it, 0.0, 2.0)
    im = _per_asset(np.asarray(magnetising_current_frac, dtype=float), ndim)
    _check_range("magnetising_current_frac", im, 0.0, 1.0)
    return f, it, im, _class_loss_ratio(drive_class, ndim)


def _cdm_kernel(f, it, im, k, s, shape):
    """CDM loss p_L(f, I)·S (elementwise; see :func:`cdm_relative_loss_frac`)."""
    i_out = np.sqrt(it * it + im * im)
    g = shape.constant + i_out * (shape.linear + shape.quadratic * i_out + shape.frequency_current * f)
    g_ref = shape.constant + shape.linear + shape.quadratic + shape.frequency_current * 0.9
    return {"loss": (k * s * (REFERENCE_CDM_LOSS_FRAC_AT_90_100 / g_ref)) * g}


def drive_losses_kw(rated_s_kva, speed_frac, torque_current_frac, drive_class="IE2", magnetising_current_frac=0.0,
                    *, shape: DriveLossShape = DEFAULT_DRIVE_LOSS_SHAPE):
    """Return the losses of a drive (CDM) at a relative frequency and current.

    Parameters
    ----------
    rated_s_kva : float or array_like
        CDM rated apparent output power, sqrt(3)·V_r·I_r [kVA], > 0. Shape ``(n,)`` per asset.
    speed_frac : float, array_like, pandas Series or DataFrame
        Relative motor-stator frequency [-], 0-1.5. Shape ``(n,)`` or ``(n, t)``.
    torque_current_frac : float, array_like, pandas Series or DataFrame
        Relative torque-producing output current referred to the CDM rated current [-], 0-2.
    drive_class : {"IE0", "IE1", "IE2"} or array_like of str, optional
        CDM class per asset; default "IE2", the EU minimum since 1 July 2021 (EU Regulation 2019/1781, Annex I).
    magnetising_current_frac : float or array_like, optional
        Relative magnetising output current [-], 0-1; see :func:`cdm_relative_loss_frac`.
    shape : DriveLossShape, optional
        Loss-curve weights.

    Returns
    -------
    float, ndarray, Series or DataFrame
        Drive losses [kW], the kind of ``speed_frac``. At zero frequency and current the drive still
        loses its standby share (the constant term).

    Notes
    -----
    P_loss = p_L(f, I)·S_r with p_L from :func:`cdm_relative_loss_frac` (IEC 61800-9-2 [1] normalisation;
    loss-curve form common practice).

    References
    ----------
    [1] IEC 61800-9-2:2017, IEC, 2017.

    Examples
    --------
    A 100 kVA IE2 drive at the (90, 100) point: 0.55 · 4 % · 100 kVA.

    >>> round(float(drive_losses_kw(100.0, 0.9, 1.0, "IE2")), 3)
    2.2
    """
    kind = _Kind(speed_frac)
    f = kind.arr(speed_frac)
    it = kind.arr(torque_current_frac)
    s = np.asarray(rated_s_kva, dtype=float)
    _check_range("rated_s_kva", s, 0.0, np.inf, lo_open=True, unit="kVA")
    ndim = max(f.ndim, it.ndim)
    f, it, im, k = _cdm_inputs(f, it, drive_class, magnetising_current_frac, ndim)
    s = _per_asset(s, ndim)
    out = _blockwise(_cdm_kernel, np.broadcast_shapes(f.shape, it.shape, im.shape, k.shape, s.shape),
                     f=f, it=it, im=im, k=k, s=s, shape=shape)["loss"]
    return kind.out(out)


def cdm_standard_point_losses_kw(rated_s_kva, drive_class="IE2", *, shape: DriveLossShape = DEFAULT_DRIVE_LOSS_SHAPE):
    """Return the losses at the eight IEC 61800-9-2 CDM operating points.

    Parameters
    ----------
    rated_s_kva : float or array_like
        CDM rated apparent output power [kVA], > 0, shape ``(n,)``.
    drive_class : {"IE0", "IE1", "IE2"} or array_like of str, optional
        CDM class per asset.
    shape : DriveLossShape, optional
        Loss-curve weights.

    Returns
    -------
    pandas.DataFrame
        One row per asset, one column per point labelled ``"(f %, I %)"`` in the order of
        :data:`CDM_OPERATING_POINTS_PCT` [kW].

    Notes
    -----
    The points are those of IEC 61800-9-2:2017 [1]; the loss at each comes from :func:`drive_losses_kw`.

    References
    ----------
    [1] IEC 61800-9-2:2017, IEC, 2017.
    """
    s = np.atleast_1d(np.asarray(rated_s_kva, dtype=float))
    f = np.array([p[0] for p in CDM_OPERATING_POINTS_PCT], dtype=float) / 100.0
    i = np.array([p[1] for p in CDM_OPERATING_POINTS_PCT], dtype=float) / 100.0
    cls = np.broadcast_to(np.asarray(drive_class), s.shape)
    losses = drive_losses_kw(s, np.broadcast_to(f, (s.size, 8)), np.broadcast_to(i, (s.size, 8)), cls, shape=shape)
    labels = [f"({p[0]}, {p[1]})" for p in CDM_OPERATING_POINTS_PCT]
    return pd.DataFrame(losses, columns=labels)


def drive_class_from_loss(loss_at_90_100_kw, rated_s_kva, *, reference_loss_frac=REFERENCE_CDM_LOSS_FRAC_AT_90_100):
    """Return the IEC 61800-9-2 CDM class from the declared loss at the (90, 100) point.

    Parameters
    ----------
    loss_at_90_100_kw : float or array_like
        Declared CDM loss at 90 % frequency and 100 % torque-producing current [kW], >= 0.
    rated_s_kva : float or array_like
        CDM rated apparent output power [kVA], > 0.
    reference_loss_frac : float, optional
        Reference CDM loss at (90, 100) as a fraction of rated apparent power [-]; default
        :data:`REFERENCE_CDM_LOSS_FRAC_AT_90_100` (from memory, verify against the standard's table).

    Returns
    -------
    str or ndarray of str
        "IE2" when the loss is more than 25 % below the reference, "IE0" when more than 25 % above,
        otherwise "IE1" (both boundaries belong to IE1).

    Notes
    -----
    Class limits from IEC 61800-9-2:2017 [1].

    References
    ----------
    [1] IEC 61800-9-2:2017, IEC, 2017.

    Examples
    --------
    >>> str(drive_class_from_loss(2.0, 100.0))
    'IE2'
    """
    loss = np.asarray(loss_at_90_100_kw, dtype=float)
    s = np.asarray(rated_s_kva, dtype=float)
    _check_range("loss_at_90_100_kw", loss, 0.0, np.inf, unit="kW")
    _check_range("rated_s_kva", s, 0.0, np.inf, lo_open=True, unit="kVA")
    _check_range("reference_loss_frac", np.asarray(reference_loss_frac, dtype=float), 0.0, 1.0, lo_open=True)
    ratio = loss / (reference_loss_frac * s)
    out = np.where(ratio < 1.0 - CDM_CLASS_BAND_FRAC, "IE2", np.where(ratio > 1.0 + CDM_CLASS_BAND_FRAC, "IE0", "IE1"))
    return out[()] if out.ndim == 0 else out


def drive_rated_s_kva_for_motor(rated_p_kw, rated_efficiency_frac, rated_power_factor):
    """Return the rated apparent input power of a motor, the usual size of the drive that feeds it.

    Parameters
    ----------
    rated_p_kw : float or array_like
        Motor rated shaft power [kW], > 0.
    rated_efficiency_frac : float or array_like
        Motor rated efficiency [-], (0, 1).
    rated_power_factor : float or array_like
        Motor rated power factor [-], (0, 1].

    Returns
    -------
    float or ndarray
        S = P / (eta · PF) [kVA].

    Examples
    --------
    >>> round(float(drive_rated_s_kva_for_motor(90.0, 0.9, 0.8)), 1)
    125.0
    """
    p = np.asarray(rated_p_kw, dtype=float)
    eta = np.asarray(rated_efficiency_frac, dtype=float)
    pf = np.asarray(rated_power_factor, dtype=float)
    _check_range("rated_p_kw", p, 0.0, np.inf, lo_open=True, unit="kW")
    _check_range("rated_efficiency_frac", eta, 0.0, 1.0, lo_open=True, hi_open=True)
    _check_range("rated_power_factor", pf, 0.0, 1.0, lo_open=True)
    out = p / (eta * pf)
    return out[()] if out.ndim == 0 else out


# --------------------------------------------------------------------------------------------------
# Supply side: IEEE Std 1459 quantities
# --------------------------------------------------------------------------------------------------
def true_power_factor(dpf, thd_i_frac, thd_v_frac=0.0):
    """Return the true power factor P/S of a load with distorted current.

    Parameters
    ----------
    dpf : float or array_like
        Displacement (fundamental) power factor cos(theta_1) [-], (0, 1].
    thd_i_frac : float or array_like
        Current total harmonic distortion I_H / I_1 [-], >= 0 (0.40 means 40 %).
    thd_v_frac : float or array_like, optional
        Voltage total harmonic distortion V_H / V_1 [-], >= 0; default 0 (sinusoidal voltage).

    Returns
    -------
    float or ndarray
        PF = P / S [-].

    Notes
    -----
    With V = V_1·sqrt(1 + THD_V²), I = I_1·sqrt(1 + THD_I²) and P ≈ P_1 (harmonic active power
    neglected):

        PF = DPF / sqrt((1 + THD_I²)·(1 + THD_V²)),

    which for sinusoidal voltage is the familiar DPF / sqrt(1 + THD_I²). Definitions of IEEE Std
    1459-2010 [1] (S = V·I, S_1 = V_1·I_1, PF = P/S, PF_1 = P_1/S_1).

    References
    ----------
    [1] IEEE Std 1459-2010, *IEEE Standard Definitions for the Measurement of Electric Power Quantities
        Under Sinusoidal, Nonsinusoidal, Balanced, or Unbalanced Conditions*, IEEE, 2010.

    Examples
    --------
    >>> round(float(true_power_factor(0.97, 0.40)), 4)
    0.9006
    """
    dpf = np.asarray(dpf, dtype=float)
    thd_i = np.asarray(thd_i_frac, dtype=float)
    thd_v = np.asarray(thd_v_frac, dtype=float)
    _check_range("dpf", dpf, 0.0, 1.0, lo_open=True)
    _check_range("thd_i_frac", thd_i, 0.0, np.inf)
    _check_range("thd_v_frac", thd_v, 0.0, np.inf)
    out = dpf / np.sqrt((1.0 + thd_i * thd_i) * (1.0 + thd_v * thd_v))
    return out[()] if out.ndim == 0 else out


class _Ieee1459Quantities:
    """Derived IEEE Std 1459 quantities of a result holding active power, PF, DPF and current THD."""

    @property
    def _supply_p(self):
        return self.p_kw

    @property
    def s_kva(self):
        """Apparent power S = V·I = P / PF [kVA]."""
        return self._supply_p / self.power_factor

    @property
    def s1_kva(self):
        """Fundamental apparent power S_1 = P / DPF [kVA]."""
        return self._supply_p / self.displacement_power_factor

    @property
    def distortion_power_kvar(self):
        """Current distortion power D_I = S_1·THD_I [kvar]."""
        return self.s1_kva * self.thd_i_frac

    @property
    def nonactive_power_kvar(self):
        """Nonactive power N = sqrt(S² - P²) [kvar]: Q_1 and all distortion terms."""
        s, p = self.s_kva, self._supply_p
        return np.sqrt(np.maximum(s * s - p * p, 0.0))


@dataclass(frozen=True)
class SupplySide(_Ieee1459Quantities):
    """Powers at the supply terminals of a drive (consumer sign: positive = drawn from the supply).

    Attributes
    ----------
    p_kw : active power P [kW].
    q_kvar : fundamental reactive power Q_1 = P·tan(acos DPF) [kvar]; this is what the tool bills as
        reactive power (the usual meter definition, see Notes of :func:`supply_side_powers`).
    power_factor : true power factor P / S [-].
    displacement_power_factor : DPF = P_1 / S_1 [-].
    thd_i_frac : input current THD used [-].
    s_kva, s1_kva, distortion_power_kvar, nonactive_power_kvar : derived on access (properties).
    """

    p_kw: object
    q_kvar: object
    power_factor: object
    displacement_power_factor: object
    thd_i_frac: object


def supply_side_powers(p_kw, dpf, thd_i_frac, thd_v_frac=0.0) -> SupplySide:
    """Return the IEEE Std 1459 powers at a drive input from its active power, DPF and THD.

    Parameters
    ----------
    p_kw : float, array_like, Series or DataFrame
        Active power drawn by the drive input [kW], >= 0.
    dpf : float or array_like
        Input displacement power factor [-], (0, 1]; per asset ``(n,)`` or per interval.
    thd_i_frac : float or array_like
        Input current THD [-], >= 0.
    thd_v_frac : float or array_like, optional
        Supply voltage THD [-], >= 0; default 0.

    Returns
    -------
    SupplySide
        Arrays of the kind of ``p_kw``.

    Notes
    -----
    Following IEEE Std 1459-2010 [1], with the drive's input current leading or lagging the voltage by
    theta_1 at the fundamental and P ≈ P_1:

        S_1 = P / DPF,  Q_1 = S_1·sin(theta_1) = P·tan(acos DPF),
        D_I = S_1·THD_I,  S = S_1·sqrt((1 + THD_I²)(1 + THD_V²)),  N = sqrt(S² - P²).

    Metering choice: ``q_kvar`` is the fundamental reactive power Q_1, the quantity that utilities'
    kvarh registers usually integrate and that capacitors can compensate (from memory). The current
    distortion shows in ``power_factor`` (and in kVA or kVAh billing, which uses ``s_kva``), not in
    ``q_kvar``. A diode front end draws lagging fundamental current, so Q_1 >= 0.

    References
    ----------
    [1] IEEE Std 1459-2010, IEEE, 2010.
    """
    kind = _Kind(p_kw)
    p = kind.arr(p_kw)
    _check_range("p_kw", p, 0.0, np.inf, unit="kW")
    d, ti, tv = _supply_inputs(kind, p.ndim, dpf, thd_i_frac, thd_v_frac)
    shape = np.broadcast_shapes(p.shape, d.shape, ti.shape, tv.shape)
    pf = true_power_factor(d, ti, tv)
    q1 = _blockwise(_q1_kernel, shape, p=p, d=d)["q1"]
    o = kind.out
    view = lambda a: o(np.broadcast_to(a, shape))  # noqa: E731
    return SupplySide(view(p), o(q1), view(pf), view(d), view(ti))


def _supply_inputs(kind: _Kind, ndim: int, dpf, thd_i_frac, thd_v_frac):
    """Validate and shape the drive-input DPF and THD arguments."""
    d = _per_asset(kind.arr(dpf) if isinstance(dpf, pd.DataFrame) else dpf, ndim)
    ti = _per_asset(kind.arr(thd_i_frac) if isinstance(thd_i_frac, pd.DataFrame) else thd_i_frac, ndim)
    tv = _per_asset(kind.arr(thd_v_frac) if isinstance(thd_v_frac, pd.DataFrame) else thd_v_frac, ndim)
    _check_range("dpf", d, 0.0, 1.0, lo_open=True)
    _check_range("thd_i_frac", ti, 0.0, np.inf)
    _check_range("thd_v_frac", tv, 0.0, np.inf)
    return d, ti, tv


def _q1_kernel(p, d):
    """Fundamental reactive power Q_1 = P·tan(acos DPF) (elementwise)."""
    return {"q1": p * (np.sqrt(1.0 - d * d) / d)}


# --------------------------------------------------------------------------------------------------
# Motor-side additions
# --------------------------------------------------------------------------------------------------
def pwm_extra_motor_loss_kw(motor_losses_kw, extra_loss_frac=PWM_EXTRA_LOSS_FRAC):
    """Return the extra motor loss caused by feeding a motor from a PWM drive.

    Parameters
    ----------
    motor_losses_kw : float, array_like, Series or DataFrame
        The motor's losses on a sinusoidal supply at the same operating point [kW], >= 0.
    extra_loss_frac : float or array_like, optional
        Extra loss as a fraction of those losses [-], 0-1; default :data:`PWM_EXTRA_LOSS_FRAC`
        (common practice, from memory: 5-20 %).

    Returns
    -------
    float, ndarray, Series or DataFrame
        Extra (harmonic) motor loss [kW].

    Notes
    -----
    P_extra = k · P_loss,sine. The voltage harmonics of PWM supply add stator and rotor copper and iron
    losses. Apply this to a sine-rated motor that gets an added drive; the rated efficiency of a motor
    sold for converter duty (PM, SynRM) is normally determined on converter supply (IEC TS 60034-2-3)
    and already contains it.

    Examples
    --------
    >>> float(pwm_extra_motor_loss_kw(2.0))
    0.2
    """
    kind = _Kind(motor_losses_kw)
    loss = kind.arr(motor_losses_kw)
    _check_range("motor_losses_kw", loss, 0.0, np.inf, unit="kW")
    k = _per_asset(np.asarray(extra_loss_frac, dtype=float), loss.ndim)
    _check_range("extra_loss_frac", k, 0.0, 1.0)
    return kind.out(loss * k)


@dataclass(frozen=True)
class DriveFedSupply(_Ieee1459Quantities):
    """Supply-side result of a motor fed through a drive (consumer sign).

    Attributes
    ----------
    p_kw : active power at the drive input, motor input + PWM extra + drive loss [kW].
    q_kvar : fundamental reactive power Q_1 at the drive input [kvar].
    power_factor : true power factor P/S at the drive input [-].
    displacement_power_factor : DPF of the drive input [-].
    thd_i_frac : input current THD [-].
    drive_loss_kw : CDM loss [kW].
    pwm_extra_loss_kw : extra motor loss from PWM supply [kW].
    p_motor_in_kw : the motor's own electrical input on a sinusoidal supply, as given [kW].
    drive_current_frac : drive output current referred to the drive rated current [-].
    s_kva, s1_kva, distortion_power_kvar, nonactive_power_kvar : derived on access (properties).
    """

    p_kw: object
    q_kvar: object
    power_factor: object
    displacement_power_factor: object
    thd_i_frac: object
    drive_loss_kw: object
    pwm_extra_loss_kw: object
    p_motor_in_kw: object
    drive_current_frac: object


def induction_motor_with_added_drive(p_motor_in_kw, speed_frac, torque_frac, rated_s_kva, *, drive_class="IE2",
                                     magnetising_current_frac=0.35, motor_to_drive_current_ratio=1.0,
                                     motor_losses_kw=None, pwm_extra_loss_frac=PWM_EXTRA_LOSS_FRAC,
                                     dpf=FRONT_END_DEFAULTS["six_pulse_with_choke"][0],
                                     thd_i_frac=FRONT_END_DEFAULTS["six_pulse_with_choke"][1],
                                     thd_v_frac=0.0,
                                     shape: DriveLossShape = DEFAULT_DRIVE_LOSS_SHAPE) -> DriveFedSupply:
    """Return what the site meter sees when an existing induction motor gets a drive.

    Parameters
    ----------
    p_motor_in_kw : float, array_like, Series or DataFrame
        The motor's electrical input at the operating point, as the induction-motor model computes it
        for a sinusoidal supply at that speed and torque [kW], >= 0. Shape ``(n,)`` or ``(n, t)``.
    speed_frac : float or array_like
        Relative speed ≈ relative stator frequency [-], 0-1.5.
    torque_frac : float or array_like
        Shaft torque relative to the motor's rated torque [-], 0-2.
    rated_s_kva : float or array_like
        Drive rated apparent output power [kVA], > 0, per asset.
    drive_class : {"IE0", "IE1", "IE2"} or array_like of str, optional
        Drive class; default "IE2".
    magnetising_current_frac : float or array_like, optional
        Motor magnetising current relative to its rated current [-], 0-1; default 0.35 (common practice
        for mid-size 4-pole motors, from memory). Held constant below rated speed (constant V/f).
    motor_to_drive_current_ratio : float or array_like, optional
        Motor rated current / drive rated current [-], > 0; default 1 (drive sized to the motor).
    motor_losses_kw : float, array_like or None, optional
        The motor's sinusoidal-supply losses at the operating point [kW]; when given, the PWM extra loss
        ``pwm_extra_loss_frac · motor_losses_kw`` is added. None (default) adds nothing.
    pwm_extra_loss_frac : float, optional
        See :func:`pwm_extra_motor_loss_kw`.
    dpf, thd_i_frac, thd_v_frac : float or array_like, optional
        Drive input displacement power factor, current THD and supply voltage THD [-]; defaults are the
        six-pulse-with-choke values of :data:`FRONT_END_DEFAULTS` (from memory).
    shape : DriveLossShape, optional
        Drive loss-curve weights.

    Returns
    -------
    DriveFedSupply
        Arrays of the kind of ``p_motor_in_kw``.

    Notes
    -----
    Motor current referred to its rating: I_m = m (magnetising), I_t = T·sqrt(1 - m²) (torque-producing
    at rated flux), so that I = 1 at rated torque. Both are multiplied by the current ratio and passed to
    :func:`drive_losses_kw`. Supply power P = P_motor + P_PWM + P_drive; reactive and distortion powers
    from :func:`supply_side_powers` (IEEE Std 1459-2010 definitions). The motor's own reactive power
    stays behind the drive's DC link and does not reach the meter.
    """
    kind = _Kind(p_motor_in_kw)
    p_motor = kind.arr(p_motor_in_kw)
    _check_range("p_motor_in_kw", p_motor, 0.0, np.inf, unit="kW")
    f = kind.arr(speed_frac)
    tau = kind.arr(torque_frac)
    _check_range("torque_frac", tau, 0.0, 2.0)
    ndim = max(p_motor.ndim, f.ndim, tau.ndim)
    m = _per_asset(np.asarray(magnetising_current_frac, dtype=float), ndim)
    _check_range("magnetising_current_frac", m, 0.0, 1.0, hi_open=True)
    ratio = _per_asset(np.asarray(motor_to_drive_current_ratio, dtype=float), ndim)
    _check_range("motor_to_drive_current_ratio", ratio, 0.0, np.inf, lo_open=True)
    s_r = _per_asset(np.asarray(rated_s_kva, dtype=float), ndim)
    _check_range("rated_s_kva", s_r, 0.0, np.inf, lo_open=True, unit="kVA")
    f, tau, _, k = _cdm_inputs(f, tau, drive_class, 0.0, ndim)
    if motor_losses_kw is None:
        pwm_k, motor_loss = np.zeros(()), np.zeros(())
    else:
        motor_loss = kind.arr(motor_losses_kw)
        _check_range("motor_losses_kw", motor_loss, 0.0, np.inf, unit="kW")
        pwm_k = _per_asset(np.asarray(pwm_extra_loss_frac, dtype=float), ndim)
        _check_range("pwm_extra_loss_frac", pwm_k, 0.0, 1.0)
    d, ti, tv = _supply_inputs(kind, ndim, dpf, thd_i_frac, thd_v_frac)
    shape_ = np.broadcast_shapes(p_motor.shape, f.shape, tau.shape, m.shape, ratio.shape, s_r.shape, k.shape,
                                 np.shape(motor_loss), np.shape(pwm_k), d.shape, ti.shape, tv.shape)
    r = _blockwise(_added_drive_kernel, shape_, p_motor=p_motor, f=f, tau=tau, m=m, ratio=ratio, s_r=s_r, k=k,
                   motor_loss=motor_loss, pwm_k=pwm_k, d=d, shape=shape)
    o = kind.out
    view = lambda a: o(np.broadcast_to(a, shape_))  # noqa: E731
    return DriveFedSupply(
        p_kw=o(r["p"]), q_kvar=o(r["q1"]), power_factor=view(true_power_factor(d, ti, tv)),
        displacement_power_factor=view(d), thd_i_frac=view(ti), drive_loss_kw=o(r["drive_loss"]),
        pwm_extra_loss_kw=o(r["pwm"]) if motor_losses_kw is not None else view(0.0), p_motor_in_kw=view(p_motor),
        drive_current_frac=o(r["i_drive"]),
    )


def _added_drive_kernel(p_motor, f, tau, m, ratio, s_r, k, motor_loss, pwm_k, d, shape):
    """Elementwise body of :func:`induction_motor_with_added_drive`."""
    it = tau * np.sqrt(1.0 - m * m) * ratio
    im = m * ratio
    drive_loss = _cdm_kernel(f, it, im, k, s_r, shape)["loss"]
    pwm = pwm_k * motor_loss
    p = p_motor + pwm + drive_loss
    return {"p": p, "q1": _q1_kernel(p, d)["q1"], "drive_loss": drive_loss, "pwm": pwm + 0.0 * p,
            "i_drive": np.sqrt(it * it + im * im) + 0.0 * p}
