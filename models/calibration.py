"""Today's fleet as modelled against the site's own bills: how far the baseline can be trusted.

The model of today's fleet makes each site's meter, interval by interval, and the tariff turns it into
monthly bills. Where the case gives the bills the utility sent (``bill_history``), each month's modelled
energy, peak demand, lagging kVArh and bill total is set beside the billed one, and each site's fit is
summed up in the two statistics calibration guidelines judge a model of monthly bills by: the normalised
mean bias error and the coefficient of variation of the root-mean-square error.

A bill from another year is compared with the same calendar month of the analysis year: the motors'
profiles are of one year, and a bill history is often of the year before.
"""

from __future__ import annotations

from typing import Mapping

import numpy as np
import pandas as pd

from models.wording import counted

#: Quantities compared, with the unit each is in (the bill history's columns).
QUANTITIES: dict[str, str] = {"energy_kwh": "kWh", "peak_kw": "kW", "reactive_kvarh": "kVArh", "amount": "currency"}
#: Monthly calibration criteria [%]: |NMBE| at most 5 % and CV(RMSE) at most 15 % (ASHRAE Guideline 14-2014,
#: calibrated models of monthly bills; the guideline sets them for energy, and the other quantities are read
#: against them as a yardstick, common practice).
NMBE_LIMIT_PCT = 5.0
CV_RMSE_LIMIT_PCT = 15.0
#: Parameters taken off the degrees of freedom in both statistics, the guideline's (n - p) form with p = 1
#: (from memory).
PARAMETERS_P = 1


def modelled_months(meters: Mapping[str, object], bills: pd.DataFrame, index: pd.DatetimeIndex,
                    interval_h: float, billing_days: Mapping[str, int] | None = None) -> pd.DataFrame:
    """Each site's month as modelled for today's fleet.

    Parameters
    ----------
    meters : mapping of str to models.site.SiteMeter
        Today's meter of each site (``p_kw`` and ``q_kvar`` per interval [kW], [kVAr]).
    bills : pandas.DataFrame
        Today's bills: ``site_id``, ``month`` (``YYYY-MM``), ``amount`` [currency] per line item.
    index : pandas.DatetimeIndex
        The interval starts of the meters (tz-aware, one analysis year).
    interval_h : float
        Interval length [h].
    billing_days : mapping of str to int, optional
        Each site's tariff's ``billing_day`` (default 1 for every site): the months are its billing months
        (:func:`models.billing.billing_months`), as its bills and the bill table are, each named by the month
        it starts in.

    Returns
    -------
    pandas.DataFrame
        ``site_id``, ``month_of_year`` (1-12), ``energy_kwh`` (imported, sum of max(P, 0) h), ``peak_kw``
        (highest interval mean of P), ``reactive_kvarh`` (lagging, sum of max(Q, 0) h) and ``amount``
        (the bill's total at the tariff as written).

    Examples
    --------
    >>> from types import SimpleNamespace
    >>> idx = pd.date_range("2025-01-31 22:00", periods=4, freq="h", tz="UTC")
    >>> meter = SimpleNamespace(p_kw=np.array([10.0, 20.0, 30.0, -5.0]), q_kvar=np.array([5.0, -5.0, 5.0, 5.0]))
    >>> bills = pd.DataFrame({"site_id": ["S"] * 2, "month": ["2025-01", "2025-02"], "amount": [3.0, 4.0]})
    >>> modelled_months({"S": meter}, bills, idx, 1.0)[["month_of_year", "energy_kwh", "peak_kw", "reactive_kvarh",
    ...                                                  "amount"]].values.tolist()
    [[1.0, 30.0, 20.0, 5.0, 3.0], [2.0, 30.0, 30.0, 10.0, 4.0]]
    """
    from models.billing import billing_months

    calendar_month = np.asarray(index.month, dtype=int)
    frames = []
    totals = (bills.assign(month_of_year=bills["month"].astype(str).str[5:7].astype(int))
              .groupby(["site_id", "month_of_year"])["amount"].sum()) if len(bills) else pd.Series(dtype=float)
    for site_id, meter in meters.items():
        day = int((billing_days or {}).get(site_id, 1))
        month = calendar_month if day <= 1 else billing_months(index.tz_localize(None), day, interval_h)[0] % 12 + 1
        p = np.asarray(meter.p_kw, dtype=float)
        q = np.asarray(meter.q_kvar, dtype=float)
        frame = pd.DataFrame({"m": month, "e": np.maximum(p, 0.0) * interval_h, "p": p,
                              "r": np.maximum(q, 0.0) * interval_h}).groupby("m").agg(e=("e", "sum"), p=("p", "max"),
                                                                                     r=("r", "sum"))
        amounts = [float(totals.get((site_id, int(m)), np.nan)) for m in frame.index]
        frames.append(pd.DataFrame({"site_id": str(site_id), "month_of_year": frame.index.to_numpy(dtype=int),
                                    "energy_kwh": frame["e"].to_numpy(), "peak_kw": frame["p"].to_numpy(),
                                    "reactive_kvarh": frame["r"].to_numpy(), "amount": amounts}))
    columns = ["site_id", "month_of_year", *QUANTITIES]
    return pd.concat(frames, ignore_index=True)[columns] if frames else pd.DataFrame(columns=columns)


def compare_with_bills(modelled: pd.DataFrame, bill_history: pd.DataFrame) -> pd.DataFrame:
    """Each billed month and quantity beside the model's.

    Parameters
    ----------
    modelled : pandas.DataFrame
        :func:`modelled_months`.
    bill_history : pandas.DataFrame
        The case's bills: ``site_id``, ``month`` (``YYYY-MM``) and any of :data:`QUANTITIES` (blank = not
        on the bill).

    Returns
    -------
    pandas.DataFrame
        One row per bill and quantity it gives: ``site_id``, ``month`` (the bill's), ``quantity``, ``unit``,
        ``modelled``, ``billed`` and ``difference_pct`` ((modelled - billed) / billed x 100; blank where
        nothing was billed). A bill of a month the model does not cover is left out.

    Examples
    --------
    >>> modelled = pd.DataFrame({"site_id": ["S"], "month_of_year": [3], "energy_kwh": [110.0], "peak_kw": [9.0],
    ...                          "reactive_kvarh": [0.0], "amount": [50.0]})
    >>> history = pd.DataFrame({"site_id": ["S"], "month": ["2024-03"], "energy_kwh": [100.0],
    ...                         "peak_kw": [np.nan], "reactive_kvarh": [np.nan], "amount": [np.nan]})
    >>> compare_with_bills(modelled, history)[["month", "quantity", "modelled", "billed", "difference_pct"]].values.tolist()
    [['2024-03', 'energy_kwh', 110.0, 100.0, 10.0]]
    """
    columns = ["site_id", "month", "quantity", "unit", "modelled", "billed", "difference_pct"]
    if bill_history is None or bill_history.empty or modelled.empty:
        return pd.DataFrame(columns=columns)
    model = modelled.set_index(["site_id", "month_of_year"])
    rows = []
    for bill in bill_history.itertuples(index=False):
        key = (str(bill.site_id), int(str(bill.month)[5:7]))
        if key not in model.index:
            continue
        for quantity, unit in QUANTITIES.items():
            billed = float(getattr(bill, quantity, np.nan))
            if not np.isfinite(billed):
                continue
            value = float(model.loc[key, quantity])
            if not np.isfinite(value):
                continue
            diff = 100.0 * (value - billed) / billed if billed > 0 else np.nan
            rows.append((key[0], str(bill.month), quantity, unit, value, billed, diff))
    return pd.DataFrame(rows, columns=columns)


def fit_statistics(modelled: np.ndarray, billed: np.ndarray, p: int = PARAMETERS_P) -> tuple[float, float]:
    """Normalised mean bias error and CV(RMSE) of a model against measured values [%].

    Parameters
    ----------
    modelled, billed : array_like
        The model's and the bills' values of the same months.
    p : int
        Parameters taken off the degrees of freedom (:data:`PARAMETERS_P`).

    Returns
    -------
    nmbe_pct, cv_rmse_pct : float
        NMBE = sum(billed - modelled) / ((n - p) x mean(billed)) x 100 (positive: the model reads below the
        bills) and CV(RMSE) = sqrt(sum((billed - modelled)^2) / (n - p)) / mean(billed) x 100; NaN with
        n <= p or a mean of zero.

    References
    ----------
    .. [1] ASHRAE Guideline 14-2014, *Measurement of Energy, Demand, and Water Savings*, ASHRAE, 2014:
       the statistics of a calibrated simulation and their limits for monthly data (from memory).

    Examples
    --------
    >>> fit_statistics([90.0, 110.0, 100.0], [100.0, 100.0, 100.0])  # errors 10, -10, 0; n - p = 2
    (0.0, 10.0)
    """
    m = np.asarray(modelled, dtype=float)
    y = np.asarray(billed, dtype=float)
    n = m.size
    mean = float(np.mean(y)) if n else np.nan
    if n <= p or not mean:
        return np.nan, np.nan
    error = y - m
    return (100.0 * float(np.sum(error)) / ((n - p) * mean),
            100.0 * float(np.sqrt(np.sum(error ** 2) / (n - p))) / mean)


def calibration_summary(comparison: pd.DataFrame) -> pd.DataFrame:
    """Each site's and quantity's fit over the months billed.

    Parameters
    ----------
    comparison : pandas.DataFrame
        :func:`compare_with_bills`.

    Returns
    -------
    pandas.DataFrame
        ``site_id``, ``quantity``, ``unit``, ``n_months``, ``modelled_total``, ``billed_total``,
        ``nmbe_pct``, ``cv_rmse_pct`` (:func:`fit_statistics`) and ``within_criteria`` (|NMBE| <=
        :data:`NMBE_LIMIT_PCT` and CV(RMSE) <= :data:`CV_RMSE_LIMIT_PCT`; False where they cannot be
        computed), in the order of :data:`QUANTITIES` per site.
    """
    columns = ["site_id", "quantity", "unit", "n_months", "modelled_total", "billed_total", "nmbe_pct", "cv_rmse_pct",
               "within_criteria"]
    rows = []
    order = {q: i for i, q in enumerate(QUANTITIES)}
    for (site_id, quantity), group in sorted(comparison.groupby(["site_id", "quantity"], sort=False),
                                             key=lambda kv: (str(kv[0][0]), order[kv[0][1]])):
        nmbe, cv = fit_statistics(group["modelled"].to_numpy(), group["billed"].to_numpy())
        within = bool(np.isfinite(nmbe) and abs(nmbe) <= NMBE_LIMIT_PCT and cv <= CV_RMSE_LIMIT_PCT)
        rows.append((site_id, quantity, QUANTITIES[quantity], len(group), float(group["modelled"].sum()),
                     float(group["billed"].sum()), nmbe, cv, within))
    return pd.DataFrame(rows, columns=columns)


def summary_text(row, brief: bool = False) -> str:
    """One site's fit of one quantity in words: for the command line and the pack, or ``brief`` (the two
    statistics and the verdict only) for a page's summary line."""
    what = {"energy_kwh": "energy", "peak_kw": "peak demand", "reactive_kvarh": "lagging kVArh",
            "amount": "bill total"}[row["quantity"]]
    if not np.isfinite(row["nmbe_pct"]):
        if int(row["n_months"]) > PARAMETERS_P and not float(row["billed_total"]) > 0:
            return f"{what}: billed as 0 in each of {counted(row['n_months'], 'month')}, nothing to judge the fit by"
        return f"{what}: {counted(row['n_months'], 'month')} billed, too few to judge the fit"
    within = "within" if row["within_criteria"] else "outside"
    # the plain bias of the totals in words; the statistics (their (n - p) form) in brackets
    billed, modelled = float(row["billed_total"]), float(row["modelled_total"])
    bias_pct = 100.0 * (modelled - billed) / billed if billed > 0 else np.nan
    side = "above" if bias_pct > 0 else "below"
    if brief:  # the bias in words, the verdict, and the statistics the criteria judge named for what they measure
        return (f"{what}: the model reads {abs(bias_pct):.1f} % {side} the bills over {counted(row['n_months'], 'month')}, "
                f"{within} the criteria (mean error NMBE {row['nmbe_pct']:+.2f} %, month-to-month scatter CV(RMSE) "
                f"{row['cv_rmse_pct']:.2f} %)")
    verdict = f"{within} the monthly criteria (|NMBE| <= {NMBE_LIMIT_PCT:g} %, CV(RMSE) <= {CV_RMSE_LIMIT_PCT:g} %)"
    few = " (the criteria are meant for a year of bills)" if int(row["n_months"]) < 12 else ""
    return (f"{what}: the model reads {abs(bias_pct):.1f} % {side} the bills over "
            f"{counted(row['n_months'], 'month')} (NMBE {row['nmbe_pct']:+.2f} %, CV(RMSE) {row['cv_rmse_pct']:.2f} %), "
            f"{verdict}{few}")


def calibrate(case, op) -> tuple[pd.DataFrame, pd.DataFrame]:
    """The case's bills against today's fleet as modelled: (:func:`compare_with_bills`,
    :func:`calibration_summary`); both empty, with their columns, when the case gives no bills.

    Parameters
    ----------
    case : models.case.Case
        With its ``bill_history`` and a tariff for every site.
    op : models.operation.OperatingResult
        The machines' results (today's motors are option 0).
    """
    from models.bill_savings import meter_and_bills

    history = getattr(case, "bill_history", None)
    if history is None or history.empty:
        empty = compare_with_bills(pd.DataFrame(), None)
        return empty, calibration_summary(empty)
    meters, bills = meter_and_bills(case, op, np.zeros(len(op.asset_ids), dtype=int))
    return fit_to_bills(meters, bills, op, history, billing_days_of(case))


def billing_days_of(case) -> dict[str, int]:
    """Each site's ``billing_day`` (its tariff's; 1 where the tariff is not at hand)."""
    tariffs = getattr(case, "tariffs", {}) or {}
    return {str(site_id): int(getattr(tariffs.get(tariff_file), "billing_day", 1) or 1)
            for site_id, tariff_file in zip(case.sites["site_id"], case.sites["tariff_file"])}


def fit_to_bills(meters: Mapping[str, object], bills: pd.DataFrame, op, history: pd.DataFrame,
                 billing_days: Mapping[str, int] | None = None) -> tuple[pd.DataFrame, pd.DataFrame]:
    """:func:`calibrate` from today's meters and bills already made (``op`` gives their index and interval;
    ``billing_days`` each site's tariff's, :func:`billing_days_of`)."""
    comparison = compare_with_bills(modelled_months(meters, bills, op.index, op.interval_h, billing_days), history)
    return comparison, calibration_summary(comparison)
