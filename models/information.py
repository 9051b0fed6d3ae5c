"""What to measure first: the value of learning an asset's uncertain inputs before deciding on it.

An asset whose load comes from a typical mean load, or whose efficiency and power factor were taken from
defaults, carries a wider range of savings than one logged for a year. Measuring it is worth what the
decision stands to gain from knowing: the expected value of perfect information (EVPI) of the decision
"buy its best option or keep the motor". With the option's NPV uncertain, X ~ Normal(mu, sigma),

    EVPI = E[max(X, 0)] - max(mu, 0) = mu Phi(mu / sigma) + sigma phi(mu / sigma) - max(mu, 0),

where mu is the option's NPV as modelled and sigma the spread its uncertain inputs put on the present
value of its savings [1], [2]. EVPI is largest where the NPV is near zero and the savings are large and
uncertain; it is near zero where the decision is clear either way. Ranked, it is the list of assets to
measure first, and an upper bound on what measuring each one is worth.

The spreads are rules of thumb (common practice, values from memory): see :data:`SPREAD_FRAC`.

References
----------
.. [1] H. Raiffa and R. Schlaifer, *Applied Statistical Decision Theory*. Boston: Harvard University, 1961,
   ch. 4 (expected value of perfect information; the normal linear-loss integral).
.. [2] M. G. Morgan and M. Henrion, *Uncertainty: A Guide to Dealing with Uncertainty in Quantitative Risk
   and Policy Analysis*. Cambridge University Press, 1990, ch. 12 (the value of information).
"""

from __future__ import annotations

import math
import weakref

import numpy as np
import pandas as pd
from scipy.stats import norm

#: One-standard-deviation spread of an option's savings [fraction of their present value] from each
#: uncertain input (common practice, from memory; combined in quadrature). The load's source: a year of
#: logged intervals is known within a few percent; a duty table of load bins, roughly; a single mean load
#: and running hours, loosely. Nameplate fields taken from defaults widen it further.
SPREAD_FRAC: dict[str, float] = {
    "load: interval profile": 0.05,
    "load: duty table": 0.15,
    "load: mean load and hours": 0.25,
    "rated_efficiency_pct": 0.15,
    "rated_power_factor": 0.05,
    "rated_speed_rpm": 0.05,
    "static_head_frac": 0.10,
    "rewind_loss_pct_points": 0.05,
}
#: What each source of spread reads as in a table or a sentence.
SPREAD_WORDS: dict[str, str] = {
    "load: interval profile": "load from logged intervals",
    "load: duty table": "load from a duty table",
    "load: mean load and hours": "load from a mean load and hours only",
    "rated_efficiency_pct": "efficiency not on the nameplate",
    "rated_power_factor": "power factor not on the nameplate",
    "rated_speed_rpm": "rated speed not on the nameplate",
    "static_head_frac": "static head assumed",
    "rewind_loss_pct_points": "rewind losses assumed",
}


def evpi(npv: np.ndarray | float, sigma: np.ndarray | float) -> np.ndarray:
    """Expected value of perfect information of "do it if its NPV is positive", the NPV ~ Normal(npv, sigma).

    Parameters
    ----------
    npv : array_like
        The NPV as modelled (the mean) [currency].
    sigma : array_like
        Its standard deviation [currency], >= 0.

    Returns
    -------
    numpy.ndarray
        EVPI [currency], >= 0; 0 where ``sigma`` is 0.

    References
    ----------
    .. [1] H. Raiffa and R. Schlaifer, *Applied Statistical Decision Theory*, 1961, ch. 4.

    Examples
    --------
    >>> float(evpi(0.0, 1000.0).round(2)), float(evpi(1000.0, 1000.0).round(2)), float(evpi(-1000.0, 1000.0).round(2))
    (398.94, 83.32, 83.32)
    """
    mu = np.asarray(npv, dtype=float)
    s = np.asarray(sigma, dtype=float)
    safe = np.where(s > 0.0, s, 1.0)
    z = mu / safe
    gain = mu * norm.cdf(z) + s * norm.pdf(z) - np.maximum(mu, 0.0)
    return np.where(s > 0.0, np.maximum(gain, 0.0), 0.0)


def spread_sources(case) -> dict[str, list[str]]:
    """The uncertain inputs of each asset (keys of :data:`SPREAD_FRAC`), by asset id: its load's source, then
    each nameplate field taken from a default that moves its savings."""
    a = case.assets
    profiles = set(getattr(case, "profiles", {}) or {})
    duty = set(case.duty["profile_id"].astype(str)) if len(getattr(case, "duty", ())) and "profile_id" in case.duty else set()
    defaults = getattr(case, "defaults", pd.DataFrame(columns=["asset_id", "column"]))
    defaulted: dict[str, set[str]] = {}
    for asset_id, column in zip(defaults.get("asset_id", []), defaults.get("column", [])):
        defaulted.setdefault(str(asset_id), set()).add(str(column))
    out = {}
    applications = a["application"].astype(str).str.lower() if "application" in a else pd.Series([""] * len(a))
    for asset_id, profile, application in zip(a["asset_id"].astype(str),
                                              a["profile_id"] if "profile_id" in a else [None] * len(a), applications):
        pid = str(profile) if isinstance(profile, str) and profile else None
        load = ("load: interval profile" if pid in profiles else "load: duty table" if pid in duty
                else "load: mean load and hours")
        fields = [f for f in SPREAD_FRAC if not f.startswith("load:") and f in defaulted.get(asset_id, set())
                  # a static head moves the savings of a pump or fan's speed control only
                  and (f != "static_head_frac" or application in ("pump", "fan"))]
        out[asset_id] = [load] + fields
    return out


def spread_frac(sources: list[str]) -> float:
    """The combined spread of an asset's savings [fraction]: its sources' spreads in quadrature."""
    return math.sqrt(sum(SPREAD_FRAC[s] ** 2 for s in sources))


#: The last result's ranking: (weak reference to the result, weak reference to the case, the table).
_LAST: dict[str, tuple] = {}


def measure_first_of(case, result) -> pd.DataFrame:
    """:func:`measure_first`, computed once for the last result asked (a pack asks it once per asset)."""
    kept = _LAST.get("last")
    if kept is not None and kept[0]() is result and kept[1]() is case:
        return kept[2]
    table = measure_first(case, result)
    _LAST["last"] = (weakref.ref(result), weakref.ref(case), table)
    return table


def _savings_pv(result) -> np.ndarray | None:
    """Present value of each result row's savings after tax [currency], at the result's discount rate."""
    flows = result.cash_flows
    if flows is None or result.results.empty:
        return None
    savings, _ = flows.savings_and_investment()
    d = float(result.assumptions.discount_rate_frac)
    return savings @ np.power(1.0 + d, -np.arange(savings.shape[1], dtype=float))


def _decisions(case, chosen: pd.DataFrame) -> pd.DataFrame:
    """The value of measuring each asset of ``chosen`` (rows of the result with ``savings_pv``, one per asset)
    before deciding on its row's option against keeping the motor; in ``chosen``'s order, without ranks."""
    sources = spread_sources(case)
    spread = np.array([spread_frac(sources.get(str(a), ["load: mean load and hours"])) for a in chosen["asset_id"]])
    sigma = spread * np.abs(chosen["savings_pv"].to_numpy(dtype=float))
    value = evpi(chosen["npv"].to_numpy(dtype=float), sigma)
    quality = case.assets.set_index(case.assets["asset_id"].astype(str)).get("data_quality_pct")
    return pd.DataFrame({
        "asset_id": chosen["asset_id"].to_numpy(dtype=object), "site_id": chosen["site_id"].to_numpy(dtype=object),
        "option_id": chosen["option_id"].to_numpy(dtype=object), "label": chosen["label"].to_numpy(dtype=object),
        "npv": chosen["npv"].to_numpy(dtype=float), "savings_pv": chosen["savings_pv"].to_numpy(dtype=float),
        "spread_frac": spread, "npv_sigma": sigma, "value_of_measuring": value,
        "uncertain_inputs": ["; ".join(SPREAD_WORDS[s] for s in sources.get(str(a), [])) for a in chosen["asset_id"]],
        "data_quality_pct": (quality.reindex(chosen["asset_id"].astype(str)).to_numpy(dtype=float)
                             if quality is not None else np.nan),
    })


def value_of_measuring_option(case, result, asset_id: str, option_id: str) -> pd.Series | None:
    """The value of measuring one asset before deciding on a given option of it (the one a plan recommends,
    which need not be its highest-NPV option priced alone) against keeping the motor: a row as
    :func:`measure_first`'s (without ``rank``), or None where that option is today's motor or costs nothing.

    The same spreads and EVPI as :func:`measure_first`, on that option's own NPV and savings.
    """
    r = result.results
    rows = np.flatnonzero((r["asset_id"].astype(str) == str(asset_id)).to_numpy()
                          & (r["option_id"].astype(str) == str(option_id)).to_numpy()
                          & (r["technology"] != "existing").to_numpy() & (r["capital"] > 0).to_numpy())
    pv = _savings_pv(result) if len(rows) else None
    if pv is None:
        return None
    return _decisions(case, r.iloc[rows[:1]].assign(savings_pv=pv[rows[:1]])).iloc[0]


def measure_first(case, result) -> pd.DataFrame:
    """Rank the assets by the value of measuring them before deciding.

    For each asset, the decision is its highest-NPV option other than keeping today's motor (or that
    option's least repair basis for a motor that has failed, as its NPV is counted), against keeping it.

    Parameters
    ----------
    case : models.case.Case
    result : models.scenario.ScenarioResult

    Returns
    -------
    pandas.DataFrame
        One row per asset with an option, highest value first: ``asset_id``, ``site_id``, ``option_id``,
        ``label``, ``npv`` [currency], ``savings_pv`` (present value of the option's savings, after tax)
        [currency], ``spread_frac`` [-], ``npv_sigma`` [currency], ``value_of_measuring`` (EVPI) [currency],
        ``uncertain_inputs`` (in words, ``; ``-separated), ``data_quality_pct``, ``rank`` (1 = measure first).
    """
    r = result.results
    columns = ["rank", "asset_id", "site_id", "option_id", "label", "npv", "savings_pv", "spread_frac", "npv_sigma",
               "value_of_measuring", "uncertain_inputs", "data_quality_pct"]
    savings_pv = _savings_pv(result)
    if savings_pv is None:
        return pd.DataFrame(columns=columns)
    candidates = np.flatnonzero((r["technology"] != "existing").to_numpy() & (r["capital"] > 0).to_numpy())
    if not len(candidates):
        return pd.DataFrame(columns=columns)
    frame = r.iloc[candidates].assign(savings_pv=savings_pv[candidates])
    best = frame.sort_values(["asset_id", "npv"], ascending=[True, False], kind="mergesort").groupby(
        "asset_id", sort=False).head(1)
    out = _decisions(case, best)
    out = out.sort_values(["value_of_measuring", "asset_id"], ascending=[False, True], kind="mergesort").reset_index(drop=True)
    out.insert(0, "rank", np.arange(1, len(out) + 1))
    return out[columns]
