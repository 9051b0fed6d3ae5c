"""Defaults for missing nameplate data, and the data-quality score that says how much was guessed.

Each default is a documented, editable table of this module. Values marked *common practice* are typical
catalogue figures, not measurements; the case log flags every field filled from them.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from models.efficiency_classes import min_efficiency_pct
from models.induction import default_rated_slip_frac

#: Starting duty by application (common practice): centrifugal pumps start light, crushers and loaded
#: conveyors heavy; fans vary with inertia and are taken as normal.
START_DUTY_BY_APPLICATION: dict[str, str] = {
    "pump": "light", "fan": "normal", "compressor": "normal", "conveyor": "heavy",
    "crusher": "heavy", "mixer": "heavy", "other": "normal",
}

#: Static share of the design head (common practice): pumping systems typically 0.2-0.5 (0.3 taken),
#: fan systems nearly all friction (0). Only used for variable-torque loads moving to speed control.
STATIC_HEAD_FRAC_BY_APPLICATION: dict[str, float] = {
    "pump": 0.3, "fan": 0.0, "compressor": 0.0, "conveyor": 0.0, "crusher": 0.0, "mixer": 0.0, "other": 0.0,
}

#: Margin of a catalogue motor above its class minimum, as a share of the class-minimum losses
#: (common practice: catalogue motors exceed the class floor by roughly 0.3-1 point).
CLASS_MARGIN_LOSS_FRAC = 0.10

#: Class assumed from the year a motor was installed when no class or efficiency is given
#: (regulatory history; 50 Hz: EU 640/2009 and 2019/1781; 60 Hz: EPAct 1992 and EISA 2007 (10 CFR 431.25)).
#: Rows are (first year, class at 50 Hz, class at 60 Hz).
CLASS_BY_YEAR: tuple[tuple[int, str, str], ...] = (
    (0, "IE1", "IE1"),
    (1997, "IE1", "IE2"),
    (2011, "IE2", "IE3"),
    (2017, "IE3", "IE3"),
)
#: First year a mandatory minimum efficiency applied to new motors, by supply frequency [Hz] -> year: 60 Hz the
#: US EPAct 1992 levels (in force October 1997, 10 CFR 431.25), 50 Hz the EU's Regulation 640/2009 (IE2 from
#: June 2011). A class assumed from an earlier year is the typical motor of its time, not a rule's minimum.
RULE_START_YEAR: dict[int, int] = {50: 2011, 60: 1997}
#: Motors older than this year predate efficiency rules; their losses are taken 15 % above IE1
#: (common practice for old standard motors, value from memory).
PRE_RULE_YEAR = 1995
PRE_RULE_LOSS_RATIO = 1.15

#: Large (medium-voltage) motors above the IEC class scope (> 1000 kW): typical full-load efficiency
#: by rating [kW] -> [%] (common practice, catalogue ranges of 4-pole MV induction motors; from memory).
LARGE_MOTOR_EFFICIENCY_PCT: tuple[tuple[float, float], ...] = ((1000.0, 95.8), (2000.0, 96.5), (5000.0, 97.1), (20000.0, 97.6))

#: Full-load power factor of 4-pole induction motors by rating (common practice, catalogue medians
#: of IE2/IE3 motors; from memory). Poles shift it by POWER_FACTOR_POLE_SHIFT.
POWER_FACTOR_4POLE: tuple[tuple[float, float], ...] = (
    (0.75, 0.73), (2.2, 0.79), (7.5, 0.82), (22.0, 0.84), (75.0, 0.86), (250.0, 0.87), (1000.0, 0.88), (5000.0, 0.89)
)
POWER_FACTOR_POLE_SHIFT: dict[int, float] = {2: 0.03, 4: 0.0, 6: -0.04, 8: -0.07}

#: Data-quality penalty [points of 100] for each defaulted field.
QUALITY_PENALTY_PCT: dict[str, float] = {
    "rated_efficiency_pct": 25.0, "rated_power_factor": 10.0, "rated_speed_rpm": 10.0,
    "load_type": 5.0, "year_installed": 5.0, "speed_control": 5.0, "rewind_count": 5.0,
}
#: Penalty by kind of load data: interval profiles are best, annual hours and a mean load worst.
LOAD_DATA_PENALTY_PCT: dict[str, float] = {"interval": 0.0, "duty": 10.0, "hours": 25.0}


def _interp_log(x: np.ndarray, table: tuple[tuple[float, float], ...]) -> np.ndarray:
    xs = np.log10([r[0] for r in table])
    ys = np.array([r[1] for r in table])
    return np.interp(np.log10(np.clip(np.asarray(x, dtype=float), 1e-3, None)), xs, ys)


def typical_slip_frac(rated_p_kw) -> np.ndarray:
    """Return a typical full-load slip of an induction motor by rating [-].

    Delegates to :func:`models.induction.default_rated_slip_frac` (Engineering ToolBox slip table).

    Examples
    --------
    >>> round(float(typical_slip_frac(15 * 0.745699872)), 4)
    0.025
    """
    return np.asarray(default_rated_slip_frac(np.asarray(rated_p_kw, dtype=float)), dtype=float)


def default_power_factor(rated_p_kw, poles) -> np.ndarray:
    """Return a typical full-load power factor by rating and poles (common practice, from memory).

    Examples
    --------
    >>> round(float(default_power_factor(75, 4)), 2)
    0.86
    """
    base = _interp_log(rated_p_kw, POWER_FACTOR_4POLE)
    poles = np.asarray(poles, dtype=float)
    shift = np.select([poles <= 2, poles == 4, poles == 6], [0.03, 0.0, -0.04], default=-0.07)
    return np.clip(base + shift, 0.5, 0.95)


def _class_from_year(year: np.ndarray, f_hz: np.ndarray) -> np.ndarray:
    out = np.full(year.shape, "IE1", dtype=object)
    for first, cls50, cls60 in CLASS_BY_YEAR:
        out = np.where(year >= first, np.where(f_hz == 60, cls60, cls50), out)
    return out


def class_floor_pct(rated_p_kw, poles, f_hz, efficiency_class) -> np.ndarray:
    """Return a class's minimum efficiency read within the tables' scope [%].

    Ratings are clipped to 0.12-1000 kW and pole counts above 8 read as 8-pole, so every motor gets a
    class floor; see :func:`models.efficiency_classes.min_efficiency_pct` for the tables.

    Examples
    --------
    >>> float(class_floor_pct(15, 4, 50, "IE3")), float(class_floor_pct(1600, 10, 50, "IE3"))
    (92.1, 94.6)
    """
    poles = np.asarray(poles, dtype=float)
    poles_in_table = np.where(np.isin(poles, [2, 4, 6, 8]), poles, np.where(poles > 8, 8, 2))
    f = np.where(np.asarray(f_hz, dtype=float) == 60, 60, 50)
    return min_efficiency_pct(np.clip(np.asarray(rated_p_kw, dtype=float), 0.12, 1000.0), poles_in_table, f,
                              efficiency_class)


def catalogue_efficiency_pct(floor_pct) -> np.ndarray:
    """Return a catalogue motor's efficiency from its class floor: the floor's losses less the margin [%].

    Examples
    --------
    >>> round(float(catalogue_efficiency_pct(92.1)), 2)
    92.89
    """
    return 100.0 - (1.0 - CLASS_MARGIN_LOSS_FRAC) * (100.0 - np.asarray(floor_pct, dtype=float))


def default_efficiency_pct(rated_p_kw, poles, f_hz, efficiency_class, year_installed, machine_type):
    """Return a default full-load efficiency and its basis for motors without a nameplate value.

    Parameters
    ----------
    rated_p_kw, poles, f_hz : array_like
        Rating [kW], poles [-], supply frequency [Hz].
    efficiency_class : array_like of str
        ``IE1``-``IE5`` or ``unknown``.
    year_installed : array_like of float
        Year of installation (NaN when unknown).
    machine_type : array_like of str
        Machine kind; the class tables apply to induction motors.

    Returns
    -------
    efficiency_pct : numpy.ndarray
        Default efficiency [%]: the class minimum plus :data:`CLASS_MARGIN_LOSS_FRAC` of its losses
        removed; without a class, the class the regulations required in the year of installation;
        before the rules, IE1 losses times :data:`PRE_RULE_LOSS_RATIO`; above 1000 kW the large-motor table.
    basis : numpy.ndarray of str
        Plain-words basis for the data-quality log.

    Notes
    -----
    Class minima are from IEC 60034-30-1:2014 (see :func:`models.efficiency_classes.min_efficiency_pct`).
    """
    p = np.asarray(rated_p_kw, dtype=float)
    poles = np.asarray(poles, dtype=float)
    f = np.asarray(f_hz, dtype=float)
    cls = np.asarray(efficiency_class, dtype=object)
    year = np.asarray(year_installed, dtype=float)
    known = np.isin(cls, ["IE1", "IE2", "IE3", "IE4", "IE5"])
    by_year = _class_from_year(np.nan_to_num(year, nan=0.0), f)
    use_cls = np.where(known, cls, by_year)
    floor = class_floor_pct(p, poles, f, use_cls)
    eta = catalogue_efficiency_pct(floor)
    old = ~known & ~np.isnan(year) & (year < PRE_RULE_YEAR)
    eta = np.where(old, 100.0 - PRE_RULE_LOSS_RATIO * (100.0 - floor), eta)
    large = p > 1000.0
    eta = np.where(large, _interp_log(p, LARGE_MOTOR_EFFICIENCY_PCT), eta)
    basis = np.where(
        large, "typical large-motor efficiency by rating (common practice)",
        np.where(known, np.char.add(np.asarray(use_cls, dtype=str), " minimum plus a typical catalogue margin"),
                 np.where(old, "pre-regulation motor: IE1 losses plus 15 % (common practice)",
                          np.where(np.isnan(year), np.char.add(np.asarray(use_cls, dtype=str), " assumed: class and year unknown"),
                                   np.char.add(np.asarray(use_cls, dtype=str), np.where(
                                       year >= np.where(f == 60, RULE_START_YEAR[60], RULE_START_YEAR[50]),
                                       " assumed from the year installed (regulatory minimum then)",
                                       " assumed from the year installed (typical of motors then; no minimum "
                                       "applied yet)"))))))
    return np.round(eta, 2), basis.astype(object)


def data_quality_pct(assets: pd.DataFrame, defaults: pd.DataFrame, duty_ids: set[str] = frozenset()) -> np.ndarray:
    """Return a 0-100 data-quality score per asset: 100 less a penalty per defaulted field.

    Notes
    -----
    Penalties are :data:`QUALITY_PENALTY_PCT` per defaulted field and :data:`LOAD_DATA_PENALTY_PCT` by
    the kind of load data (interval profile, duty table, or hours and mean load). A missing
    ``year_installed`` counts as a defaulted field.
    """
    penalty = pd.Series(0.0, index=assets["asset_id"].to_numpy())
    if not defaults.empty:
        weights = defaults["column"].map(QUALITY_PENALTY_PCT).fillna(0.0)
        penalty = penalty.add(weights.groupby(defaults["asset_id"].to_numpy()).sum(), fill_value=0.0)
    penalty = penalty.reindex(assets["asset_id"].to_numpy()).to_numpy(dtype=float)
    penalty = penalty + np.where(assets["year_installed"].isna().to_numpy(), QUALITY_PENALTY_PCT["year_installed"], 0.0)
    has_profile = assets["profile_id"].notna().to_numpy()
    is_duty = assets["profile_id"].isin(list(duty_ids)).to_numpy()
    kind_penalty = np.where(is_duty, LOAD_DATA_PENALTY_PCT["duty"],
                            np.where(has_profile, LOAD_DATA_PENALTY_PCT["interval"], LOAD_DATA_PENALTY_PCT["hours"]))
    return np.clip(100.0 - penalty - kind_penalty, 0.0, 100.0)
