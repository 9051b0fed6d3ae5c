"""Spare motors to keep on the shelf for each group of interchangeable motors, by the failures they cover.

Motors of one rating, pole number, voltage and frequency can share spares. A failed motor is swapped for a
spare and goes to be rewound, after which it is the group's spare: the pool is a rotating one. At a random
moment the number of the group's motors away being rewound follows a Poisson law of mean m = F L (failures per
year F times the rewind's turnaround L in years; the repair queue is an infinite-server queue, Palm's theorem
[1]). A failure finds a spare on the shelf when fewer than s of the others are away, with probability
P(N <= s - 1) (arrivals see time averages [1]): the fill rate of s spares. Each failure that finds one stops
the machine for the swap only; each that finds none for the outage of a motor bought or rewound on the spot.

The group's failures per year add each motor's chance of failing within the next year given its age (the
Weibull law of :mod:`models.end_of_life`). The economic number of spares weighs the downtime they avoid, at
each motor's cost of downtime, against the cost of holding them (their price times a carrying rate: the
discount rate plus upkeep); the number for a fill rate answers a policy that sets one.

References
----------
.. [1] C. C. Sherbrooke, *Optimal Inventory Modeling of Systems: Multi-Echelon Techniques*, 2nd ed. Boston:
   Kluwer, 2004, ch. 2 (Palm's theorem; fill rate and expected backorders of a Poisson pipeline); cited from
   memory.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from scipy.stats import poisson

#: Fill rate a spares policy commonly aims at (common practice: 95 % of failures find a spare).
TARGET_FILL_FRAC = 0.95
#: Yearly upkeep of a spare on the shelf as a share of its price, on top of the money it ties up (common practice,
#: from memory: dry storage, turning the shaft, an insulation test before use; 3-8 %).
SPARE_UPKEEP_FRAC = 0.05
#: Most spares considered for one group (far beyond any economic number for fleets of motors).
MAX_SPARES = 20

#: Columns of :func:`spares_table`.
SPARES_COLUMNS: tuple[str, ...] = (
    "group", "rated_p_kw", "poles", "rated_v_v", "supply_f_hz", "motors", "asset_ids", "motors_with_spare_on_hand",
    "failures_per_yr", "rewind_turnaround_h", "outage_without_spare_h", "mean_away", "spares_for_target",
    "fill_at_target_frac", "economic_spares", "fill_at_economic_frac", "spare_price", "downtime_cost_without_per_yr",
    "downtime_cost_at_economic_per_yr", "holding_cost_at_economic_per_yr", "saving_at_economic_per_yr")


def fill_rate_frac(spares, mean_away) -> np.ndarray:
    """Share of failures that find a spare on the shelf, P(N <= s - 1) with N Poisson of mean ``mean_away``.

    Examples
    --------
    >>> fill_rate_frac([0, 1, 2], 0.5).round(6).tolist()
    [0.0, 0.606531, 0.909796]
    """
    s = np.asarray(spares, dtype=float)
    return np.where(s > 0, poisson.cdf(s - 1.0, np.asarray(mean_away, dtype=float)), 0.0)


def spares_for_fill(mean_away: float, target_frac: float = TARGET_FILL_FRAC) -> int:
    """Fewest spares whose fill rate reaches ``target_frac`` (0 where nothing fails).

    Examples
    --------
    >>> spares_for_fill(0.5, 0.95), spares_for_fill(0.0)
    (3, 0)
    """
    if not mean_away > 0:
        return 0
    s = np.arange(1, MAX_SPARES + 1)
    reached = np.flatnonzero(fill_rate_frac(s, mean_away) >= target_frac)
    return int(s[reached[0]]) if len(reached) else MAX_SPARES


def _group_name(p_kw: float, poles: float, v: float, f: float) -> str:
    return f"{p_kw:g} kW, {poles:g}-pole, {v:g} V, {f:g} Hz"


def spares_table(case, result) -> pd.DataFrame:
    """The spares of each group of interchangeable motors that run: for a fill rate and at the least cost.

    Parameters
    ----------
    case : models.case.Case
    result : models.scenario.ScenarioResult
        Its end-of-life comparison (``end_of_life``: each motor's age, failure law, new motor, cost of downtime and
        rewind turnaround) and per-option capital (``results``); the discount rate of its assumptions.

    Returns
    -------
    pandas.DataFrame
        One row per group (:data:`SPARES_COLUMNS`), largest rating first: its motors and the ids, how many of them the
        register marks ``spare_on_hand`` (a spare may be shared: not a count of spares), the failures per year, the
        rewind's turnaround and the outage of a failure without a spare [h], the mean number away being rewound, the
        spares for :data:`TARGET_FILL_FRAC` and the economic number with their fill rates (blank where no new motor
        of the kind is priced), a spare's price (the group's cheapest new motor's capital), and per year the downtime cost without spares and at the economic
        number, the holding cost of those spares and the saving [currency/yr]. Empty without an end-of-life
        comparison (it needs a rewind and a new induction option in the catalogue).

    Notes
    -----
    A failure without a spare waits for the quicker of a new motor and a rewind (the size class's outage, or the
    register's lead times); one with a spare for its fitting (models.end_of_life.SPARE_SWAP_H). The group's motors
    must also share frame, mounting and shaft to share a spare: the register does not say, so that is to confirm.
    """
    from models import end_of_life
    from models.scenario import _remaining_life, analysis_year

    eol = result.end_of_life
    if eol is None or eol.empty:
        return pd.DataFrame(columns=list(SPARES_COLUMNS))
    a = case.assets.set_index("asset_id")
    year = analysis_year(result.physics.operation)
    age, shape, scale, _ = _remaining_life(case, year)
    law = pd.DataFrame({"age": age, "shape": shape, "scale": scale}, index=case.assets["asset_id"].to_numpy())
    e = eol[~eol["failed"].to_numpy(dtype=bool)].set_index("asset_id")
    ids = e.index.to_numpy(dtype=object)
    rated = a.loc[ids, "rated_p_kw"].to_numpy(dtype=float)
    new_h, rewind_h = end_of_life.outage_hours(rated)  # without a spare: the size class's hours ...
    own_new = a.loc[ids, "new_lead_time_h"].to_numpy(dtype=float) if "new_lead_time_h" in a else np.full(len(ids), np.nan)
    own_rewind = (a.loc[ids, "rewind_lead_time_h"].to_numpy(dtype=float) if "rewind_lead_time_h" in a
                  else np.full(len(ids), np.nan))
    new_h = np.where(np.isnan(own_new), new_h, own_new)  # ... or the register's own
    rewind_h = np.where(np.isnan(own_rewind), rewind_h, own_rewind)
    fail = end_of_life.conditional_failure_probability(law.loc[ids, "age"].to_numpy(dtype=float), 1.0,
                                                       law.loc[ids, "shape"].to_numpy(dtype=float),
                                                       law.loc[ids, "scale"].to_numpy(dtype=float))
    res = result.results
    capital = dict(zip(zip(res["asset_id"].astype(str), res["option_id"].astype(str)), res["capital"].astype(float)))
    price = np.array([capital.get((str(i), str(o)), np.nan) for i, o in zip(ids, e["new_option_id"])], dtype=float)
    on_hand = (a.loc[ids, "spare_on_hand"].map(lambda v: v is True or v == 1).to_numpy(dtype=bool)
               if "spare_on_hand" in a else np.zeros(len(ids), dtype=bool))
    frame = pd.DataFrame({
        "asset_id": ids, "rated_p_kw": rated, "poles": a.loc[ids, "poles"].to_numpy(dtype=float),
        "rated_v_v": a.loc[ids, "rated_v_v"].to_numpy(dtype=float),
        "supply_f_hz": a.loc[ids, "supply_f_hz"].to_numpy(dtype=float), "fail": fail,
        "outage": np.minimum(new_h, rewind_h), "rewind": rewind_h, "price": price, "on_hand": on_hand,
        "downtime": e["downtime_cost_per_h"].to_numpy(dtype=float)})
    carrying = float(result.assumptions.discount_rate_frac) + SPARE_UPKEEP_FRAC
    swap = end_of_life.SPARE_SWAP_H
    rows = []
    keys = ["rated_p_kw", "poles", "rated_v_v", "supply_f_hz"]
    for key, g in frame.groupby(keys, sort=False):
        failures = float(g["fail"].sum())
        turnaround = float((g["rewind"] * g["fail"]).sum() / failures) if failures > 0 else float(g["rewind"].mean())
        outage = float((g["outage"] * g["fail"]).sum() / failures) if failures > 0 else float(g["outage"].mean())
        cost_h = float((g["downtime"] * g["fail"]).sum() / failures) if failures > 0 else float(g["downtime"].mean())
        spare_price = float(g["price"].min())
        m = failures * turnaround / 8760.0
        s = np.arange(MAX_SPARES + 1)
        fill = fill_rate_frac(s, m)
        downtime_cost = failures * (fill * swap + (1.0 - fill) * outage) * cost_h
        holding = s * spare_price * carrying
        priced = np.isfinite(spare_price)  # (no new motor of the kind priced: the policy's number only)
        best = int(np.argmin(downtime_cost + holding)) if priced else 0
        target = spares_for_fill(m)
        rows.append({"group": _group_name(*key), "rated_p_kw": key[0], "poles": key[1], "rated_v_v": key[2],
                     "supply_f_hz": key[3], "motors": len(g), "asset_ids": " ".join(g["asset_id"].astype(str)),
                     "motors_with_spare_on_hand": int(g["on_hand"].sum()), "failures_per_yr": failures,
                     "rewind_turnaround_h": turnaround, "outage_without_spare_h": outage, "mean_away": m,
                     "spares_for_target": target, "fill_at_target_frac": float(fill[target]),
                     "economic_spares": best if priced else np.nan,
                     "fill_at_economic_frac": float(fill[best]) if priced else np.nan, "spare_price": spare_price,
                     "downtime_cost_without_per_yr": float(downtime_cost[0]),
                     "downtime_cost_at_economic_per_yr": float(downtime_cost[best]) if priced else np.nan,
                     "holding_cost_at_economic_per_yr": float(holding[best]) if priced else np.nan,
                     "saving_at_economic_per_yr": (float(downtime_cost[0] - downtime_cost[best] - holding[best])
                                                   if priced else np.nan)})
    out = pd.DataFrame(rows, columns=list(SPARES_COLUMNS))
    return out.sort_values(["rated_p_kw", "group"], ascending=[False, True], kind="stable").reset_index(drop=True)
