"""Minimum full-load efficiency of line-operated induction motors by IEC efficiency class.

50 Hz values come from the IEC 60034-30-1 interpolation formula with the coefficients published in EU
Regulation 2019/1781 (IE2-IE4; IE1 coefficients are from memory and flagged in the reference table).
60 Hz values come from the US federal tables (10 CFR 431.25) with their midpoint rule: the IE2 level is
the EPAct 1992 table and the IE3 level the premium table. Levels the published tables do not give (IE1
and IE4 at 60 Hz, IE5 everywhere, 8-pole IE1) are derived from a neighbouring class by the class-to-class
loss ratio and are marked as derived.
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np
import pandas as pd

from models import io

#: Efficiency classes known to the lookup, lowest first.
CLASSES: tuple[str, ...] = ("IE1", "IE2", "IE3", "IE4", "IE5")
#: IE5 has about 20 % fewer losses than IE4 (IEC TS 60034-30-2 level, value from memory).
IE5_LOSS_RATIO_TO_IE4 = 0.8
#: Above this rating the IEC classes are flat (IEC 60034-30-1 table row 200-1000 kW) [kW].
FLAT_ABOVE_KW = 200.0
#: Upper end of the IEC 60034-30-1 scope [kW].
MAX_CLASS_KW = 1000.0
#: Lower end of the IEC 60034-30-1 scope [kW].
MIN_CLASS_KW = 0.12


@lru_cache(maxsize=None)
def _coefficients_50hz(efficiency_class: str) -> tuple[tuple[float, ...], ...]:
    """The IEC 60034-30-1 cubic's rows for one class: (min_rated_p_kw, poles, a, b, c, d) each, read once."""
    table = io.read_reference("iec_60034_30_1_coefficients_50hz")
    table = table[table["efficiency_class"] == efficiency_class]
    return tuple((row.min_rated_p_kw, row.poles, row.coef_a, row.coef_b, row.coef_c, row.coef_d)
                 for row in table.itertuples(index=False))


def _formula_50hz(rated_p_kw: np.ndarray, poles: np.ndarray, efficiency_class: str) -> np.ndarray:
    """Evaluate the IEC 60034-30-1 cubic for one class (NaN where no coefficients exist)."""
    p = np.clip(rated_p_kw, MIN_CLASS_KW, FLAT_ABOVE_KW)
    out = np.full(np.broadcast(p, poles).shape, np.nan)
    p_b, poles_b = np.broadcast_arrays(p, poles)
    for min_rated_p_kw, row_poles, coef_a, coef_b, coef_c, coef_d in _coefficients_50hz(efficiency_class):
        if min_rated_p_kw >= 0.75:
            band = p_b >= 0.75
        else:
            band = p_b < 0.75
        mask = band & (poles_b == row_poles)
        x = np.log10(p_b[mask])
        out[mask] = ((coef_a * x + coef_b) * x + coef_c) * x + coef_d
    return out


#: Smallest rating of the federal 60 Hz tables [kW]: 1 hp, listed as 0.75 kW.
SMALLEST_60HZ_TABLE_KW = 0.75
#: 1 hp [kW]: a motor rated below it is below the federal tables' first row.
ONE_HP_KW = 0.745699872


def _table_60hz(rated_p_kw: np.ndarray, poles: np.ndarray, efficiency_class: str) -> np.ndarray:
    """Look up the federal 60 Hz table with its midpoint rule (NaN where the table has no column)."""
    table = io.read_reference("us_10cfr431_min_efficiency_60hz")
    table = table[table["efficiency_class"] == efficiency_class]
    p_b, poles_b = np.broadcast_arrays(np.asarray(rated_p_kw, dtype=float), poles)
    out = np.full(p_b.shape, np.nan)
    for pole_count, group in table.groupby("poles"):
        ratings = group["rated_p_kw"].to_numpy(dtype=float)
        values = group["min_efficiency_pct"].to_numpy(dtype=float)
        order = np.argsort(ratings)
        ratings, values = ratings[order], values[order]
        mask = poles_b == pole_count
        p = p_b[mask]
        # midpoint rule: at or above the midpoint between two ratings take the higher rating's value
        midpoints = (ratings[:-1] + ratings[1:]) / 2.0
        idx = np.searchsorted(midpoints, p, side="right")
        out[mask] = values[idx]
    return out


def _from_loss_ratio(eta_pct: np.ndarray, ratio: np.ndarray | float) -> np.ndarray:
    """Scale losses (100 - eta) by a ratio and return the new efficiency [%]."""
    return 100.0 - ratio * (100.0 - eta_pct)


def min_efficiency_pct(rated_p_kw, poles, f_hz, efficiency_class) -> np.ndarray:
    """Return the minimum full-load efficiency of an efficiency class.

    Parameters
    ----------
    rated_p_kw : array_like
        Rated output power [kW], 0.12-1000 kW (outside it the result is NaN).
    poles : array_like of int
        Number of poles: 2, 4, 6 or 8 (others give NaN).
    f_hz : array_like of int
        Supply frequency [Hz], 50 or 60.
    efficiency_class : array_like of str
        ``IE1`` to ``IE5``; anything else gives NaN.

    Returns
    -------
    numpy.ndarray
        Minimum efficiency [%], rounded to 0.1 point as the standard tabulates it.

    Notes
    -----
    50 Hz: eta = A x^3 + B x^2 + C x + D with x = log10(P / 1 kW) [1], Table 27 below 0.75 kW and Table 28
    from 0.75 kW; from 200 kW to 1000 kW the 200 kW value applies [2]. 60 Hz: the federal tables with the
    midpoint rule between listed ratings [3]; ratings above the largest listed row take its value.
    Derived levels: IE5 = 100 - 0.8 (100 - eta_IE4) (from memory); IE1 and IE4 at 60 Hz and IE1 8-pole
    at 50 Hz scale the neighbouring class's losses by the 50 Hz loss ratio at the same rating and poles
    (IE1 below 0.75 kW by the ratio at 0.75 kW); IE2 and IE3 8-pole at 60 Hz, which the federal table does
    not list, scale the 50 Hz 8-pole losses by the 6-pole ratio of 60 Hz to 50 Hz losses at the same rating;
    IE2 and IE3 at 60 Hz below 1 hp, where the federal table starts, scale the 50 Hz losses at the rating by
    the ratio of 60 Hz to 50 Hz losses at 0.75 kW, the same poles.

    References
    ----------
    .. [1] European Commission, "Commission Regulation (EU) 2019/1781 laying down ecodesign requirements for
       electric motors and variable speed drives," OJ L 272, 2019, Annex I, Tables 1-2.
    .. [2] IEC 60034-30-1:2014, Rotating electrical machines - Part 30-1: Efficiency classes of line operated
       AC motors (IE code), Table 2.
    .. [3] U.S. Code of Federal Regulations, 10 CFR 431.25, Energy conservation standards for electric
       motors, Table 1 (2010) and paragraph (a) (EPAct 1992 levels).

    Examples
    --------
    >>> float(min_efficiency_pct(15, 4, 50, "IE3"))
    92.1
    >>> float(min_efficiency_pct(15, 4, 60, "IE3"))
    93.0
    """
    p, n_poles, f, cls = np.broadcast_arrays(
        np.asarray(rated_p_kw, dtype=float), np.asarray(poles), np.asarray(f_hz), np.asarray(efficiency_class, dtype=object)
    )
    n_poles = n_poles.astype(float)
    f = f.astype(float)
    out = np.full(p.shape, np.nan)
    in_scope = (p >= MIN_CLASS_KW - 1e-9) & (p <= MAX_CLASS_KW + 1e-9)
    cache: dict[tuple[float, str], np.ndarray] = {}

    def level(freq: float, name: str) -> np.ndarray:
        key = (freq, name)
        if key in cache:
            return cache[key]
        if name == "IE5":
            value = _from_loss_ratio(level(freq, "IE4"), IE5_LOSS_RATIO_TO_IE4)
        elif freq == 50.0:
            value = _formula_50hz(p, n_poles, name)
            if name == "IE1":
                derived = _from_loss_ratio(_formula_50hz(p, n_poles, "IE2"), _ie1_ie2_loss_ratio(p))
                value = np.where(np.isnan(value), derived, value)
        else:
            if name in ("IE2", "IE3"):
                value = _table_60hz(np.clip(p, SMALLEST_60HZ_TABLE_KW, None), n_poles, name)
                # 8-pole motors, which the federal table does not list: the 50 Hz 8-pole level with its losses
                # scaled by the 6-pole ratio of 60 Hz to 50 Hz losses at the same rating (derived)
                six = np.full(p.shape, 6.0)
                q = np.clip(p, SMALLEST_60HZ_TABLE_KW, None)
                ratio = (100 - _table_60hz(q, six, name)) / (100 - _formula_50hz(q, six, name))
                value = np.where(np.isnan(value) & (n_poles == 8), _from_loss_ratio(level(50.0, name), ratio), value)
                # below 1 hp (0.75 kW), where the federal table starts: the 50 Hz level at the rating with its losses
                # scaled by the ratio of 60 Hz to 50 Hz losses at 0.75 kW, the same poles (derived; 8-pole rows
                # are scaled at their own rating above)
                small = (p < ONE_HP_KW - 1e-9) & (n_poles != 8)
                if small.any():
                    at_smallest = _formula_50hz(np.full(p.shape, SMALLEST_60HZ_TABLE_KW), n_poles, name)
                    ratio = (100 - value) / (100 - at_smallest)
                    value = np.where(small, _from_loss_ratio(level(50.0, name), ratio), value)
            elif name == "IE1":
                ratio = (100 - level(50.0, "IE1")) / (100 - level(50.0, "IE2"))
                value = _from_loss_ratio(level(60.0, "IE2"), ratio)
            else:  # IE4
                ratio = (100 - level(50.0, "IE4")) / (100 - level(50.0, "IE3"))
                value = _from_loss_ratio(level(60.0, "IE3"), ratio)
        cache[key] = value
        return value

    for name in CLASSES:
        for freq in (50.0, 60.0):
            mask = (cls == name) & (f == freq) & in_scope
            if mask.any():
                out[mask] = level(freq, name)[mask]
    return np.round(out, 1)


def _ie1_ie2_loss_ratio(rated_p_kw: np.ndarray) -> np.ndarray:
    """IE1/IE2 loss ratio of 4-pole motors at 50 Hz, used to derive IE1 where no coefficients exist."""
    p = np.clip(np.asarray(rated_p_kw, dtype=float), 0.75, None)  # (no IE1 coefficients below 0.75 kW)
    p4 = np.full(np.shape(p), 4)
    return (100 - _formula_50hz(p, p4, "IE1")) / (100 - _formula_50hz(p, p4, "IE2"))


def efficiency_basis(rated_p_kw, poles, f_hz, efficiency_class) -> np.ndarray:
    """Say where a :func:`min_efficiency_pct` value comes from, for the data-quality log.

    Returns
    -------
    numpy.ndarray of str
        ``published`` (from a published table or formula), ``derived`` (scaled from a neighbouring class)
        or ``out of scope`` (no class value: rating outside 0.12-1000 kW, other poles, unknown class).
    """
    p, n_poles, f, cls = np.broadcast_arrays(
        np.asarray(rated_p_kw, dtype=float), np.asarray(poles), np.asarray(f_hz), np.asarray(efficiency_class, dtype=object)
    )
    value = min_efficiency_pct(p, n_poles, f, cls)
    published = (
        ((f == 50) & np.isin(cls, ["IE2", "IE3", "IE4"]))
        | ((f == 50) & (cls == "IE1") & (n_poles != 8))
        | ((f == 60) & np.isin(cls, ["IE2", "IE3"]) & (n_poles != 8) & (p >= ONE_HP_KW - 1e-9))
    )
    return np.where(np.isnan(value), "out of scope", np.where(published, "published", "derived"))


def class_of_efficiency(rated_p_kw, poles, f_hz, efficiency_pct) -> np.ndarray:
    """Return the highest class whose minimum a given full-load efficiency meets (``below IE1`` if none).

    Examples
    --------
    >>> str(class_of_efficiency(15, 4, 50, 92.5))
    'IE3'
    """
    eff = np.asarray(efficiency_pct, dtype=float)
    shape = np.broadcast(np.asarray(rated_p_kw), np.asarray(poles), np.asarray(f_hz), eff).shape
    out = np.full(shape, "below IE1", dtype=object)
    for name in CLASSES:
        floor = min_efficiency_pct(rated_p_kw, poles, f_hz, np.full(shape, name, dtype=object))
        out = np.where(eff >= floor - 1e-9, name, out)
    out = np.where(np.isnan(min_efficiency_pct(rated_p_kw, poles, f_hz, np.full(shape, "IE1", dtype=object))),
                   "out of scope", out)
    return out if out.shape else out.item()


def class_table(poles: int = 4, f_hz: int = 50) -> pd.DataFrame:
    """Return a rating x class table of minimum efficiencies for display [%]."""
    ratings = np.array([0.75, 1.1, 1.5, 2.2, 3, 4, 5.5, 7.5, 11, 15, 18.5, 22, 30, 37, 45, 55, 75, 90, 110, 132, 160, 200])
    data = {name: min_efficiency_pct(ratings, poles, f_hz, name) for name in CLASSES}
    return pd.DataFrame(data, index=pd.Index(ratings, name="rated_p_kw"))


#: IEC 60034-1 tolerance on a machine's declared efficiency, as the share of its complement (1 - eta) by which
#: a machine may fall short: 15 % up to this rating, 10 % above it (the break was at 50 kW in older editions;
#: the 150 kW break is from memory) [kW].
TOLERANCE_BREAK_KW = 150.0
#: The two tolerance bands [frac of (1 - eta)]: at or below :data:`TOLERANCE_BREAK_KW`, and above it.
TOLERANCE_LOSSES_FRAC = (0.15, 0.10)


def efficiency_tolerance_losses_frac(rated_p_kw, efficiency_frac=None) -> np.ndarray:
    """Return the IEC 60034-1 tolerance on declared efficiency, as a share of the efficiency's complement or, with
    the efficiency, as the share of the losses by which a machine's losses may exceed the declared ones.

    Parameters
    ----------
    rated_p_kw : array_like
        Rated output [kW], > 0.
    efficiency_frac : array_like, optional
        The declared efficiency eta [-], in (0, 1), broadcastable to ``rated_p_kw``.

    Returns
    -------
    numpy.ndarray
        Without ``efficiency_frac``: x, the share of (1 - eta) by which the measured efficiency may fall short
        of the declared one, 0.15 up to 150 kW and 0.10 above. With it: the most the machine's losses may
        exceed the declared losses at the same output, as a share of them, x / eta' [frac].

    Notes
    -----
    The tolerance is written on efficiency: a machine declared at eta may measure down to
    eta' = eta - x (1 - eta) = eta (1 + x) - x. The driven load fixes the output P, so the losses go from
    L = P (1 - eta) / eta to L' = P (1 - eta') / eta', and L' / L - 1 = (1 + x) eta / eta' - 1 = x / eta'
    (16.3 % of the losses for x = 0.15 at eta = 0.93).

    References
    ----------
    .. [1] IEC 60034-1, *Rotating electrical machines - Part 1: Rating and performance*, table of
       tolerances (efficiency). Geneva: IEC (values from memory; older editions break at 50 kW, as in
       K. C. Agrawal, *Industrial Power Engineering and Applications Handbook*, Newnes, 2001, Table 11.9).

    Examples
    --------
    >>> efficiency_tolerance_losses_frac([11.0, 150.0, 160.0]).tolist()
    [0.15, 0.15, 0.1]
    >>> round(float(efficiency_tolerance_losses_frac(11.0, 0.93)), 6)  # 0.15 / (0.93 x 1.15 - 0.15)
    0.163132
    """
    p = np.asarray(rated_p_kw, dtype=float)
    x = np.where(p <= TOLERANCE_BREAK_KW, TOLERANCE_LOSSES_FRAC[0], TOLERANCE_LOSSES_FRAC[1])
    if efficiency_frac is None:
        return x
    eta = np.asarray(efficiency_frac, dtype=float)
    return x / (eta * (1.0 + x) - x)
