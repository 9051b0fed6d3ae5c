"""Savings verified: the energy a project avoided, measured before and after it, beside the saving predicted.

Once a project is installed, the question its approvers ask is whether it saves what the case said. The
International Performance Measurement and Verification Protocol (IPMVP) answers with the avoided energy [1]:

    avoided = adjusted baseline - reporting-period energy,

the baseline (today's motor, measured before the project) adjusted to the reporting period's conditions by a
routine adjustment. Here the adjustment is a ratio through zero on the first of these both periods give:

- production (m3 pumped, t crushed): baseline kWh per unit of production times the reporting period's production;
- running hours: baseline kWh per running hour times the reporting period's hours;
- days: baseline kWh per day times the reporting period's days (no adjustment for the load).

The prediction is the model's: the share of today's energy the installed option saves
(1 - E_option / E_today, :mod:`models.operation`), applied to the same adjusted baseline, so that both are for
the reporting period's conditions. Their ratio is the realisation rate. The money is the avoided energy at the
project's modelled bill saving per kWh saved (its demand and reactive value in proportion).

A ratio through zero is the simplest routine adjustment: a load with a fixed part (no-load losses, static head)
is not proportional to its output, and a full IPMVP report fits a regression over several baseline intervals and
states its uncertainty (ASHRAE Guideline 14 [2]).

References
----------
.. [1] Efficiency Valuation Organization, "International Performance Measurement and Verification Protocol: Core
   Concepts," EVO 10000-1:2022 (avoided energy; Options A and B; routine adjustments).
.. [2] ASHRAE Guideline 14-2014, *Measurement of Energy, Demand, and Water Savings* (cited from memory).
"""

from __future__ import annotations

import datetime as _dt

import numpy as np
import pandas as pd

from models.options import DRIVE_TECHNOLOGIES

#: Realisation rates read as "as predicted" [%] (common practice: down to 10 % short of the estimate, given the
#: uncertainty of a short measurement; above 120 % the baseline or its adjustment is suspect).
AS_PREDICTED_PCT = (90.0, 120.0)
#: Below this realisation rate [%] the saving is "well below" the prediction.
WELL_BELOW_PCT = 70.0
#: A measured baseline further than this from today's motor as modelled [%] says the model's load is off (the
#: measurement and verification plan's rule before a purchase order, common practice).
BASELINE_MODEL_TOLERANCE_PCT = 10.0
#: Shortest reporting period read without a caution [days] (common practice, as the measurement and verification
#: plan asks: two weeks for a like-for-like swap at unchanged duty, a full duty cycle of about four weeks for a change
#: of speed control; a seasonal load needs its seasons).
MIN_REPORTING_DAYS = 14
MIN_REPORTING_DAYS_SPEED_CONTROL = 28

#: Columns of :func:`verify_savings`'s table.
VERIFIED_COLUMNS: tuple[str, ...] = (
    "asset_id", "option_id", "basis", "baseline_kwh", "baseline_days", "reporting_kwh", "reporting_days",
    "adjusted_baseline_kwh", "avoided_kwh", "avoided_pct", "predicted_avoided_kwh", "realisation_pct",
    "avoided_kwh_per_yr", "verified_value", "baseline_model_kwh", "baseline_model_difference_pct", "finding")


def _days(start: str, end: str) -> int:
    """Days from a first to a last day, both included."""
    return (_dt.date.fromisoformat(str(end)[:10]) - _dt.date.fromisoformat(str(start)[:10])).days + 1


def adjusted_baseline_kwh(baseline_kwh, baseline_normaliser, reporting_normaliser) -> np.ndarray:
    """The baseline energy set to the reporting period's conditions: E_b x N_r / N_b (a ratio through zero).

    Examples
    --------
    A pump that drew 12,000 kWh to move 40,000 m3 before its project, and moves 45,000 m3 in the reporting period:

    >>> float(adjusted_baseline_kwh(12_000.0, 40_000.0, 45_000.0))
    13500.0
    """
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.asarray(baseline_kwh, dtype=float) * np.asarray(reporting_normaliser, dtype=float) / np.asarray(
            baseline_normaliser, dtype=float)


def realisation_pct(avoided_kwh, predicted_avoided_kwh) -> np.ndarray:
    """The measured avoided energy as a share of the predicted [%] (NaN where nothing was predicted to be saved).

    Examples
    --------
    >>> realisation_pct([1_500.0, 10.0], [2_000.0, 0.0]).tolist()
    [75.0, nan]
    """
    predicted = np.asarray(predicted_avoided_kwh, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(predicted > 0, 100.0 * np.asarray(avoided_kwh, dtype=float) / predicted, np.nan)


def _finding(row: dict, min_days: int = MIN_REPORTING_DAYS) -> str:
    """The verification's verdict in words (``min_days``: the reporting period the project's kind asks for)."""
    if row["reporting_days"] == 0:
        return "baseline captured; no reporting period yet"
    if row["baseline_days"] == 0:
        return "no baseline: the savings cannot be verified"
    rate = row["realisation_pct"]
    if not np.isfinite(rate):
        text = f"{row['avoided_kwh']:,.0f} kWh avoided; the model predicted no saving"
    elif rate < WELL_BELOW_PCT:
        text = (f"well below the prediction ({rate:.0f} % of it): check the installation, its settings and the load "
                "before the next projects of the kind")
    elif rate < AS_PREDICTED_PCT[0]:
        text = f"below the prediction ({rate:.0f} % of it)"
    elif rate <= AS_PREDICTED_PCT[1]:
        text = f"as predicted ({rate:.0f} % of the prediction)"
    else:
        text = f"above the prediction ({rate:.0f} % of it): check the baseline and its adjustment"
    off = row["baseline_model_difference_pct"]
    if np.isfinite(off) and abs(off) > BASELINE_MODEL_TOLERANCE_PCT:
        text += (f"; the measured baseline is {abs(off):.0f} % {'above' if off > 0 else 'below'} today's motor as "
                 "modelled: set its load from the measurements and run the case again")
    if row["reporting_days"] < min_days:
        text += f"; a reporting period of {row['reporting_days']:.0f} days, shorter than the {min_days} days asked"
    if row["basis"] == "days":
        text += "; adjusted by days only (give running_h or production in both periods)"
    return text


def verify_savings(case, result) -> pd.DataFrame:
    """The savings verified on each measured asset against the saving predicted for its installed option.

    Parameters
    ----------
    case : models.case.Case
        Its ``verification`` table: energy measured per asset and period (baseline, reporting).
    result : models.scenario.ScenarioResult
        The run: each asset's yearly energy today and under the option (operating result) and the option's
        bill saving and energy saved per year (``results``).

    Returns
    -------
    pandas.DataFrame
        One row per asset of the table (:data:`VERIFIED_COLUMNS`): the ``basis`` of the adjustment
        ("production", "running hours" or "days"), the periods' energy [kWh] and days, the adjusted baseline,
        avoided energy [kWh] and its share of the adjusted baseline [%], the predicted avoided energy [kWh] and the
        realisation rate [%], the avoided energy per year (over the reporting period's days, x 365) [kWh/yr], its
        value at the project's modelled bill saving per kWh saved [currency], today's motor as modelled over the
        baseline period (per running hour, else per day of its year) [kWh] and the measured baseline's difference
        from it [%], and the finding in words.
    """
    table = getattr(case, "verification", None)
    if table is None or table.empty:
        return pd.DataFrame(columns=list(VERIFIED_COLUMNS))
    op = result.physics.operation
    res = result.results.set_index(["asset_id", "option_id"])
    year_days = len(op.index) * float(op.interval_h) / 24.0
    rows = []
    v = table.assign(days=[_days(s, e) for s, e in zip(table["start_date"], table["end_date"])])
    for asset_id, mine in v.groupby(v["asset_id"].astype(str), sort=False):
        option_id = str(mine["option_id"].iloc[0])
        sums = {}
        for period in ("baseline", "reporting"):
            part = mine[mine["period"] == period]
            hours = part["running_h"].to_numpy(dtype=float)
            production = part["production"].to_numpy(dtype=float)
            sums[period] = {"kwh": float(part["energy_kwh"].sum()), "days": float(part["days"].sum()),
                            "h": float(hours.sum()) if len(part) and np.isfinite(hours).all() else np.nan,
                            "production": (float(production.sum()) if len(part) and np.isfinite(production).all()
                                           else np.nan)}
        b, r = sums["baseline"], sums["reporting"]
        if b["production"] > 0 and r["production"] >= 0:
            basis, n_b, n_r = "production", b["production"], r["production"]
        elif b["h"] > 0 and r["h"] >= 0:
            basis, n_b, n_r = "running hours", b["h"], r["h"]
        else:
            basis, n_b, n_r = "days", b["days"], r["days"]
        adjusted = float(adjusted_baseline_kwh(b["kwh"], n_b, n_r)) if b["days"] > 0 and r["days"] > 0 else np.nan
        avoided = adjusted - r["kwh"]
        i, o = op.asset_position(asset_id), op.option_position(option_id)
        today_kwh, option_kwh = float(op.energy_kwh[i, 0]), float(op.energy_kwh[i, o])
        predicted_frac = 1.0 - option_kwh / today_kwh if today_kwh > 0 else np.nan
        predicted = predicted_frac * adjusted
        key = (asset_id, option_id)
        value_per_kwh = np.nan
        if key in res.index:
            saved = float(res.loc[key, "energy_saved_kwh_per_yr"])
            value_per_kwh = float(res.loc[key, "bill_saving_per_yr"]) / saved if saved > 0 else np.nan
        running_h = float(op.running_h[i])
        if np.isfinite(b["h"]) and running_h > 0:
            model_b = today_kwh / running_h * b["h"]
        else:
            model_b = today_kwh / year_days * b["days"]
        row = {"asset_id": asset_id, "option_id": option_id, "basis": basis, "baseline_kwh": b["kwh"],
               "baseline_days": b["days"], "reporting_kwh": r["kwh"], "reporting_days": r["days"],
               "adjusted_baseline_kwh": adjusted, "avoided_kwh": avoided,
               "avoided_pct": 100.0 * avoided / adjusted if adjusted > 0 else np.nan,
               "predicted_avoided_kwh": predicted,
               "realisation_pct": float(realisation_pct(avoided, predicted)) if np.isfinite(predicted) else np.nan,
               "avoided_kwh_per_yr": avoided * 365.0 / r["days"] if r["days"] > 0 else np.nan,
               "verified_value": avoided * value_per_kwh,
               "baseline_model_kwh": model_b if b["days"] > 0 else np.nan,
               "baseline_model_difference_pct": (100.0 * (b["kwh"] - model_b) / model_b
                                                 if b["days"] > 0 and model_b > 0 else np.nan)}
        speed = str(op.technologies[o]) in DRIVE_TECHNOLOGIES
        row["finding"] = _finding(row, MIN_REPORTING_DAYS_SPEED_CONTROL if speed else MIN_REPORTING_DAYS)
        rows.append(row)
    return pd.DataFrame(rows, columns=list(VERIFIED_COLUMNS))
