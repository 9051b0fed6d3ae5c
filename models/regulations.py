"""Minimum-efficiency rules for new motors placed on the market, by region.

A like-for-like replacement may no longer be legal to buy: when a motor is replaced at failure, the
baseline is the cheapest replacement the rules still allow, not the old motor. Rules apply to new motors,
not to repairs, so a rewind stays legal. The rule table is ``data/reference/minimum_efficiency_rules.csv``
(each row names its regulation); verify current scope and exemptions locally.
"""

from __future__ import annotations

import datetime

import numpy as np

from models import io

_CLASS_RANK = {"IE1": 1, "IE2": 2, "IE3": 3, "IE4": 4, "IE5": 5}


def _covered(rule, p_kw: np.ndarray, poles: np.ndarray) -> np.ndarray:
    """Which motors (ratings [kW], poles) a row of the rule table covers."""
    allowed_poles = [float(x) for x in str(rule.poles).split("|")]
    return (p_kw >= rule.min_rated_p_kw - 1e-9) & (p_kw <= rule.max_rated_p_kw + 1e-9) & np.isin(poles, allowed_poles)


#: Highest rated voltage the minimum-efficiency rules cover [V]: Regulation (EU) 2019/1781 Annex I covers motors
#: rated up to 1,000 V (10 CFR 431 covers up to 600 V; the table's US rows are read with the same bound).
MAX_RULED_V_V = 1000.0


def minimum_class(region: str, rated_p_kw, poles, on_date: str | None = None, rated_v_v=None) -> np.ndarray:
    """Return the lowest efficiency class a new motor may have, per motor.

    Parameters
    ----------
    region : str
        ``EU``, ``US``, ``CN`` or ``OTHER``.
    rated_p_kw : array_like
        Rating [kW].
    poles : array_like
        Number of poles.
    on_date : str, optional
        ISO date at which the rules are read, the day the new motors are bought (rules that take effect
        later are ignored); default today.
    rated_v_v : array_like, optional
        Rated voltage [V]; a motor above :data:`MAX_RULED_V_V` is covered by no rule (blank: covered).

    Returns
    -------
    numpy.ndarray of str
        ``IE2``...``IE4``, or ``none`` where no rule covers the motor (e.g. above 1000 kW, or a
        medium-voltage machine).

    Notes
    -----
    Where several rows cover a motor the strictest class applies (e.g. EU 75-200 kW: IE4).

    References
    ----------
    .. [1] European Commission, Regulation (EU) 2019/1781, Annex I, 2019.
    .. [2] U.S. Code of Federal Regulations, 10 CFR 431.25, 2014.

    Examples
    --------
    >>> minimum_class("EU", [15, 110, 1600], [4, 4, 6]).tolist()
    ['IE3', 'IE4', 'none']
    >>> minimum_class("EU", [110, 110], [4, 4], rated_v_v=[400, 6600]).tolist()
    ['IE4', 'none']
    """
    on_date = datetime.date.today().isoformat() if not on_date else str(on_date)
    rules = io.read_reference("minimum_efficiency_rules")
    rules = rules[(rules["region"] == region.upper()) & (rules["effective_from"] <= on_date)]
    p, n = np.broadcast_arrays(np.asarray(rated_p_kw, dtype=float), np.asarray(poles, dtype=float))
    rank = np.zeros(p.shape, dtype=int)
    for row in rules.itertuples(index=False):
        rank = np.where(_covered(row, p, n), np.maximum(rank, _CLASS_RANK[row.min_class]), rank)
    if rated_v_v is not None:
        v = np.broadcast_to(np.asarray(rated_v_v, dtype=float), p.shape)
        rank = np.where(v > MAX_RULED_V_V, 0, rank)  # (NaN compares False: a blank voltage stays covered)
    names = np.array(["none", "IE1", "IE2", "IE3", "IE4", "IE5"], dtype=object)
    return names[rank]


def rules_taking_effect(region: str, rated_p_kw, poles, after_date: str | None = None, within_yr: float = 3.0) -> list[dict]:
    """Rules of ``region`` that take effect within ``within_yr`` years after ``after_date`` (default today) and
    raise the class required of at least one of the motors given.

    Returns
    -------
    list of dict
        Per rule, in date order: ``effective_from`` (ISO date), ``min_class``, ``min_rated_p_kw``,
        ``max_rated_p_kw``, ``source`` and ``n_motors`` (how many of the motors it raises).

    Examples
    --------
    >>> [r["min_class"] for r in rules_taking_effect("US", [110.0, 15.0], [4, 4], "2026-12-01")]
    ['IE4']
    """
    start = datetime.date.fromisoformat(str(after_date)) if after_date else datetime.date.today()
    end = (start + datetime.timedelta(days=round(365.25 * within_yr))).isoformat()
    rules = io.read_reference("minimum_efficiency_rules")
    later = rules[(rules["region"] == region.upper()) & (rules["effective_from"] > start.isoformat())
                  & (rules["effective_from"] <= end)].sort_values("effective_from")
    now = class_rank(minimum_class(region, rated_p_kw, poles, start.isoformat()))
    p, n = np.broadcast_arrays(np.asarray(rated_p_kw, dtype=float), np.asarray(poles, dtype=float))
    out = []
    for row in later.itertuples(index=False):
        raised = int(np.sum(_covered(row, p, n) & (_CLASS_RANK[row.min_class] > now)))
        if raised:
            out.append({"effective_from": row.effective_from, "min_class": row.min_class,
                        "min_rated_p_kw": float(row.min_rated_p_kw), "max_rated_p_kw": float(row.max_rated_p_kw),
                        "source": row.source, "n_motors": raised})
    return out


def class_rank(efficiency_class) -> np.ndarray:
    """Return 1-5 for IE1-IE5 and 0 for anything else (for comparing classes)."""
    return np.vectorize(lambda c: _CLASS_RANK.get(str(c), 0), otypes=[int])(np.asarray(efficiency_class, dtype=object))
