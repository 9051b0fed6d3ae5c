"""The electricity bill of a site meter series under a tariff, per billing month and line item.

Scope: :func:`bill` prices one meter series (mean kW and kVAr per interval, tz-aware index of interval
start times, 15-min, 30-min or hourly) under a :class:`~models.tariff.Tariff` and returns one row per
billing month and line item. :func:`bill_many` prices many meter series at once (scenarios × intervals)
and returns each scenario's totals by line item; it is the engine behind savings attribution, and
:func:`bill` is the same engine run on one scenario. Everything is vectorised over intervals and
scenarios: the energies of each (month, period) cell and the demand windows' monthly peaks are taken
in compiled passes over the meter arrays (one pass per quantity set, no per-interval temporaries), and
every clause is then priced on those small (scenario, month) arrays. The pure helpers
:func:`pf_adjusted_demand_kw`, :func:`percent_adjusted_demand_kw` and :func:`excess_kvarh` state the
clauses' equations on their own.

Metering conventions used throughout (see ``docs/tariffs.md``):

* energy per interval = mean kW × interval hours; only import is billed (P < 0 counts as 0 kWh: this
  format has no export price);
* lagging kVArh = max(Q, 0) × h and leading kVArh = max(−Q, 0) × h, registered separately as
  four-quadrant meters do, so leading kVArh never nets against lagging kVArh;
* kVAh per interval = sqrt(kWh² + kVArh²) with the interval's net kVArh (lagging or leading);
* billing months are calendar months of local time in the tariff's zone, or months from the tariff's read
  day (``billing_day``); fixed and demand charges are charged in full for every month that has data, even a
  partial one.
"""

from __future__ import annotations

import datetime as _dt
from collections.abc import Mapping
from dataclasses import dataclass, field

import numba
import numpy as np
import pandas as pd

from models.tariff import DemandCharge, Tariff, _local_wall, _season_of_month, period_index

__all__ = [
    "LINE_ITEM_CATEGORIES",
    "bill",
    "bill_many",
    "bill_total",
    "excess_kvarh",
    "interval_hours",
    "pf_adjusted_demand_kw",
    "percent_adjusted_demand_kw",
    "energy_power_factor_pct",
    "reactive_demand_kvar",
]

LINE_ITEM_CATEGORIES: tuple[str, ...] = (
    "fixed",
    "energy",
    "pf energy",
    "demand",
    "pf adjustment",
    "ratchet",
    "excess",
    "coincident",
    "reactive demand",
    "reactive",
    "leading",
    "tax",
)
_TAX_BASE_CATEGORIES = {
    "all_charges": ("fixed", "energy", "pf energy", "demand", "pf adjustment", "ratchet", "excess", "coincident",
                    "reactive demand", "reactive", "leading"),
    # a power-factor percentage of the energy charges is part of them, as a demand's adjustment is of the demand's
    "energy_charges": ("energy", "pf energy"),
    "demand_charges": ("demand", "pf adjustment", "ratchet", "excess", "coincident", "reactive demand"),
    "reactive_charges": ("reactive", "leading"),
    "fixed_charges": ("fixed",),
    "all_charges_and_earlier_taxes": ("fixed", "energy", "pf energy", "demand", "pf adjustment", "ratchet", "excess",
                                      "coincident", "reactive demand", "reactive", "leading", "tax"),
}
# Scenario rows priced together in bill_many: bounds memory at about 8 arrays × 2**17 floats (14 rows
# of an hourly year). Blocks this small stay in the processor's cache and their temporaries are reused
# by the allocator instead of being mapped afresh: on a 1,000-asset fleet 2**17 priced the site bills in
# about 0.75 of the time 2**22 took (benchmarks/bench_fleet.py).
_CHUNK_ELEMENTS = 2**17
# Tolerance on "points below target" before rounding up: 0.9000000001 points is 1 point, not 2.
_POINT_TOLERANCE = 1e-9
_NS_PER_MIN = 60_000_000_000


# --------------------------------------------------------------------------------------------------
# Clause equations (layer 1)
# --------------------------------------------------------------------------------------------------


def pf_adjusted_demand_kw(demand_kw, power_factor, target_power_factor: float):
    """Return a kW billing demand raised in the ratio target / actual power factor.

    Parameters
    ----------
    demand_kw : float or array_like
        Measured demand [kW], >= 0.
    power_factor : float or array_like
        Actual lagging power factor [-], in (0, 1].
    target_power_factor : float
        Power factor at or above which no adjustment applies [-], in (0, 1].

    Returns
    -------
    float or ndarray
        Billed demand [kW] = demand × target / PF when PF < target, else demand.

    Notes
    -----
    A clause common in North American commercial and industrial rate schedules (common practice):
    billed kW = kW × 0.90 / PF when PF < 0.90, which equals 0.90 × kVA. Checks (hand calculation in
    ``docs/derivations/billing-equivalences.md``; the 800 kW case is the foretaggroup.com Georgia Power
    demand-charge example): 480 kW at PF 0.82 → 526.8 kW; 800 kW at PF 0.80
    → 900 kW. PF is the displacement power factor P/S (IEEE Std 1459-2010, clause 3.1.1).

    Examples
    --------
    >>> round(float(pf_adjusted_demand_kw(480.0, 0.82, 0.90)), 1)
    526.8
    """
    d = np.asarray(demand_kw, dtype=float)
    pf = np.asarray(power_factor, dtype=float)
    out = np.where(pf < target_power_factor, d * target_power_factor / np.where(pf > 0.0, pf, 1.0), d)
    return out if out.ndim else float(out)


def percent_adjusted_demand_kw(
    demand_kw, power_factor, target_power_factor: float, percent_per_point: float, round_points_up: bool = False
):
    """Return a kW billing demand raised by a percentage per 0.01 of power factor below a target.

    Parameters
    ----------
    demand_kw : float or array_like
        Measured demand [kW], >= 0.
    power_factor : float or array_like
        Actual lagging power factor [-], in [0, 1].
    target_power_factor : float
        Target power factor [-], in (0, 1].
    percent_per_point : float
        Increase per 0.01 of power factor below target [%], e.g. 1.0.
    round_points_up : bool
        Count a fraction of a point as a whole point ("for each 1 % or fraction thereof").

    Returns
    -------
    float or ndarray
        Billed demand [kW] = demand × (1 + percent_per_point/100 × n), n = (target − PF)/0.01 (rounded up
        when asked), n >= 0.

    Notes
    -----
    Clause form "billing demand raised 1 % for each 1 % by which the average lagging power factor is
    below 95 %", as in US public-utility schedules (e.g. Schedule 92 – Power Factor Rate, crpud.net).

    Examples
    --------
    PF 0.905 against a 0.95 target is 4.5 points: +4.5 %, or +5 % when parts of a point count whole.

    >>> round(float(percent_adjusted_demand_kw(1000.0, 0.905, 0.95, 1.0)), 6)
    1045.0
    >>> round(float(percent_adjusted_demand_kw(1000.0, 0.905, 0.95, 1.0, round_points_up=True)), 6)
    1050.0
    """
    d = np.asarray(demand_kw, dtype=float)
    points = np.maximum((target_power_factor - np.asarray(power_factor, dtype=float)) / 0.01, 0.0)
    if round_points_up:
        points = np.ceil(points - _POINT_TOLERANCE)
    out = d * (1.0 + percent_per_point / 100.0 * points)
    return out if out.ndim else float(out)


def reactive_price_tier(kwh, kvarh, below_power_factor, decimals: int | None = None) -> np.ndarray:
    """Which price of a reactive clause's bands each netting unit takes: 0 for the clause's own price, j for its
    j-th band (1-based, in the order given), the band of the lowest edge its power factor is below.

    Parameters
    ----------
    kwh, kvarh : array_like
        The unit's kWh and lagging kVArh (a period of a month, or a month), broadcast together.
    below_power_factor : sequence of float
        The bands' edges, each in (0, 1].
    decimals : int, optional
        Round each power factor half up to this many decimals before it is set against the edges (as a bill
        that prints it so reads it); default: as computed.

    Returns
    -------
    numpy.ndarray of int
        The tier of each unit. The power factor is kWh / sqrt(kWh² + kVArh²), 1 for a unit with neither: a power
        factor equal to an edge is not below it.

    Examples
    --------
    Hand calculation (docs/derivations/billing-reactive.md, case R8): 200 kWh with 120 kVArh is a power factor of
    0.8575, below 0.95 only; 200 kWh with 180 kVArh is 0.7433, below 0.80 as well; 400 kWh with 300 kVArh is 0.8.

    >>> reactive_price_tier([200.0, 200.0, 400.0, 0.0], [120.0, 180.0, 300.0, 0.0], [0.95, 0.80]).tolist()
    [1, 2, 1, 0]

    Case R9: 1,000 kWh with 485 kVArh is a power factor of 0.89976, below 0.90 as computed, 0.90 (not below) when
    the bill rounds it to two decimals.

    >>> reactive_price_tier([1000.0], [485.0], [0.90]).tolist(), reactive_price_tier([1000.0], [485.0], [0.90], 2).tolist()
    ([1], [0])

    References
    ----------
    docs/tariffs.md, ``[[reactive]]``, ``price_by_power_factor``.
    """
    kwh, kvarh = np.broadcast_arrays(np.asarray(kwh, dtype=float), np.asarray(kvarh, dtype=float))
    apparent = np.hypot(kwh, kvarh)
    pf = np.where(apparent > 0.0, kwh / np.where(apparent > 0.0, apparent, 1.0), 1.0)
    if decimals is not None:  # half up; the small allowance keeps 0.895 (0.89499999... in binary) at 0.90
        scale = 10.0 ** int(decimals)
        pf = np.floor(pf * scale + 0.5 + 1e-9) / scale
    tier = np.zeros(pf.shape, dtype=int)
    lowest = np.full(pf.shape, np.inf)
    for j, edge in enumerate(below_power_factor, start=1):
        hit = (pf < edge) & (edge < lowest)
        tier = np.where(hit, j, tier)
        lowest = np.where(hit, edge, lowest)
    return tier


def excess_kvarh(kvarh, kwh, free_kvarh_per_kwh: float):
    """Return the kVArh above a free allowance proportional to kWh.

    Parameters
    ----------
    kvarh : float or array_like
        Reactive energy of one sign (lagging or leading) [kVArh], >= 0.
    kwh : float or array_like
        Active energy imported over the same time [kWh], >= 0.
    free_kvarh_per_kwh : float
        Allowance [-] (= tan φ threshold; 0.33 ⇔ PF 0.9496, 0.4 ⇔ PF 0.9285).

    Returns
    -------
    float or ndarray
        max(kVArh − ratio × kWh, 0) [kVArh].

    Examples
    --------
    >>> round(float(excess_kvarh(500.0, 1000.0, 0.33)), 6)
    170.0
    """
    out = np.maximum(np.asarray(kvarh, dtype=float) - free_kvarh_per_kwh * np.asarray(kwh, dtype=float), 0.0)
    return out if out.ndim else float(out)


def energy_power_factor_pct(power_factor, penalties=(), rebates=(), round_points: str = "none"):
    """Return the percentage added to a month's energy charges for its power factor (a rebate negative).

    Parameters
    ----------
    power_factor : float or array_like
        The month's average power factor [-], in [0, 1].
    penalties : sequence of PowerFactorBand
        Surcharge bands, each ``percent_per_point`` [%] per 0.01 of power factor below its edge
        ``power_factor``, down to the next lower edge (the lowest band down to 0).
    rebates : sequence of PowerFactorBand
        Rebate bands, each per 0.01 above its edge, up to the next higher edge (the highest band up to 1).
    round_points : {"none", "down", "up"}
        The points between the power factor and the edge it is beyond (the highest penalty edge, or the
        lowest rebate edge) are counted as they are, as whole points only, or with a part of a point as a
        whole one; the bands are then applied to the power factor so rounded.

    Returns
    -------
    float or ndarray
        Penalty percent minus rebate percent [%].

    Notes
    -----
    With edges e_1 > e_2 > ... > e_n of rates r_i and e_(n+1) = 0, a power factor x below e_1 pays
    sum_i r_i · max(0, e_i − max(x, e_(i+1))) / 0.01 percent; rebates mirror it upwards. Clauses of this
    shape (about 0.5-1 % per 0.01, stepped by band, the rebate sometimes only above a higher edge) are
    common in Indian state tariffs (common practice). Hand calculation in
    ``docs/derivations/billing-reactive.md``, case R7.

    Examples
    --------
    0.5 % per point below 0.95 and 1 % below 0.90; 0.5 % rebate per point above 0.95. A month at 0.87:
    5 points x 0.5 % + 3 points x 1 % = 5.5 %; at 0.98: 3 points x 0.5 % rebate.

    >>> from models.tariff import PowerFactorBand as B
    >>> pen, reb = (B(0.95, 0.5), B(0.90, 1.0)), (B(0.95, 0.5),)
    >>> [round(float(x), 6) for x in energy_power_factor_pct([0.87, 0.93, 0.95, 0.98], pen, reb)]
    [5.5, 1.0, 0.0, -1.5]
    >>> round(float(energy_power_factor_pct(0.935, pen, reb, "down")), 6), round(float(energy_power_factor_pct(0.935, pen, reb, "up")), 6)
    (0.5, 1.0)
    """
    x = np.clip(np.asarray(power_factor, dtype=float), 0.0, 1.0)
    out = np.zeros(x.shape)
    for bands, sign in ((sorted(penalties, key=lambda b: -b.power_factor), 1.0),
                        (sorted(rebates, key=lambda b: b.power_factor), -1.0)):
        if not bands:
            continue
        first = bands[0].power_factor
        points = np.maximum(sign * (first - x) / 0.01, 0.0)
        if round_points == "down":
            points = np.floor(points + _POINT_TOLERANCE)
        elif round_points == "up":
            points = np.ceil(points - _POINT_TOLERANCE)
        at = first - sign * points * 0.01  # the power factor the bands read, rounded as asked
        for i, band in enumerate(bands):
            end = (bands[i + 1].power_factor if i + 1 < len(bands) else (0.0 if sign > 0 else 1.0))
            if sign > 0:
                inside = np.maximum(band.power_factor - np.maximum(at, end), 0.0)
            else:
                inside = np.maximum(np.minimum(at, end) - band.power_factor, 0.0)
            out = out + sign * band.percent_per_point * inside / 0.01
    return out if out.ndim else float(out)


def reactive_demand_kvar(kvar_demand, kw_demand, free_kvar_per_kw: float):
    """Return the billed reactive demand: the kVAr demand above an allowance proportional to the kW demand.

    Parameters
    ----------
    kvar_demand : float or array_like
        The month's highest window mean of the lagging kVAr [kVAr] (0 when every window leads).
    kw_demand : float or array_like
        The month's highest window mean of the kW [kW].
    free_kvar_per_kw : float
        Allowance [-] (= tan φ threshold; 0.62 ⇔ PF 0.85, 0.2917 ⇔ PF 0.96).

    Returns
    -------
    float or ndarray
        max(kVAr − ratio × kW, 0) [kVAr].

    Notes
    -----
    The clause form "each kVAr of the maximum reactive demand in excess of a percentage of the maximum kW
    demand" appears in North American rate schedules (common practice; 62 % ⇔ PF 0.85). Hand calculation
    in ``docs/derivations/billing-reactive.md``, case R6.

    Examples
    --------
    A month of 1,000 kW and 700 kVAr of demand with 0.62 kVAr free per kW bills 80 kVAr.

    >>> round(float(reactive_demand_kvar(700.0, 1000.0, 0.62)), 6)
    80.0
    """
    q = np.maximum(np.asarray(kvar_demand, dtype=float), 0.0)
    out = np.maximum(q - free_kvar_per_kw * np.maximum(np.asarray(kw_demand, dtype=float), 0.0), 0.0)
    return out if out.ndim else float(out)


def interval_hours(index: pd.DatetimeIndex) -> float:
    """Return the length of the intervals of a regular, increasing, tz-aware index [h].

    Raises
    ------
    ValueError
        If the index is naive, has fewer than two entries, is not strictly increasing or is irregular.
    """
    if not isinstance(index, pd.DatetimeIndex) or index.tz is None:
        raise ValueError("index must be a tz-aware pandas DatetimeIndex")
    if len(index) < 2:
        raise ValueError("cannot infer the interval length from fewer than two timestamps; pass interval_h")
    ns = _utc_ns(index)
    step = np.diff(ns)
    if np.any(step <= 0):
        raise ValueError("index must be strictly increasing")
    if np.any(step != step[0]):
        raise ValueError("index must be regular (one interval length); resample the meter data first")
    return float(step[0]) / 3.6e12


# --------------------------------------------------------------------------------------------------
# Calendar: everything about the index that does not depend on the power values
# --------------------------------------------------------------------------------------------------


@dataclass(frozen=True, eq=False)
class _Windows:
    starts: np.ndarray  # first interval of each demand window (W,)
    count: np.ndarray  # intervals per window (W,)
    month: np.ndarray  # month position of each window (W,)
    period: np.ndarray  # period position of each window's first interval (W,)
    season: np.ndarray  # season position (W,)
    month_starts: np.ndarray  # first window of each month (M,): of the next one where a month has none
    identity: bool  # one interval per window (data as coarse as the window or coarser): means are the values

    @property
    def month_bounds(self) -> np.ndarray:
        """First window of each month, then the number of windows (M + 1,)."""
        return np.append(self.month_starts, len(self.starts)).astype(np.int64)


@dataclass(frozen=True, eq=False)
class _Calendar:
    n_steps: int
    interval_h: float
    month_labels: tuple[str, ...]
    month: np.ndarray  # billing month position of each interval (T,)
    month_starts: np.ndarray  # first interval (in series order) of each billing month, by month position (M,)
    period: np.ndarray  # (T,)
    season: np.ndarray  # season of each interval's calendar month (T,)
    month_season: np.ndarray  # season of each billing month (M,)
    n_periods: int
    steps_in_cell: np.ndarray  # intervals per (month, period) cell (M, K)
    windows: dict[tuple[int, bool], _Windows]  # by (length [min], rolling): :func:`window_key`
    run_starts: np.ndarray  # first interval of each run of consecutive intervals in one cell, then T (R + 1,)
    run_cell: np.ndarray  # (month, period) cell of each run, month * K + period (R,)
    masks: dict = field(default_factory=dict)  # scope masks already built, by (periods, seasons, window)
    # each coincident-peak clause's windows found in the series: (first step, step after), by clause name
    peaks: dict = field(default_factory=dict)

    @property
    def n_months(self) -> int:
        return len(self.month_labels)


def billing_months(wall: pd.DatetimeIndex, billing_day: int, interval_h: float,
                   wrap: bool = True) -> tuple[np.ndarray, bool]:
    """Each interval's billing month, as year * 12 + month - 1 of the month it starts in, and whether the series
    is a whole year that wraps round.

    Parameters
    ----------
    wall : pandas.DatetimeIndex
        Interval starts as naive local clock time of the tariff.
    billing_day : int
        Day of the month billing months start on (1-28; 1 = calendar months).
    interval_h : float
        Hours per interval [h].
    wrap : bool
        Whether a whole year stands for a year repeated (below); False: every series takes the billing months
        it meets.

    Returns
    -------
    (numpy.ndarray of int64, bool)
        With ``billing_day`` 1, the calendar months. Otherwise an interval before the read day belongs to the
        billing month that started in the month before. A series of twelve whole calendar months (from the 1st
        at 00:00 to the 1st twelve months on, the analysis year) stands for a year repeated: its days before the
        first read day belong to its last billing month (15 December to 14 January of the year repeated), so it
        holds twelve billing months, each whole; the second value is then True and the months are not in time
        order. Any other series takes the billing months it meets, the first and the last partial.

    Examples
    --------
    >>> wall = pd.date_range("2025-01-01", "2026-01-01", freq="D", inclusive="left")
    >>> ym, wrapped = billing_months(wall, 15, 24.0)
    >>> wrapped, sorted({int(m) % 12 + 1 for m in ym}) == list(range(1, 13)), int(ym[0] - ym[14])
    (True, True, 11)
    """
    calendar = np.asarray(wall.year, dtype=np.int64) * 12 + np.asarray(wall.month, dtype=np.int64) - 1
    if int(billing_day) <= 1 or not len(wall):
        return calendar, False
    shifted = wall - pd.Timedelta(days=int(billing_day) - 1)
    ym = np.asarray(shifted.year, dtype=np.int64) * 12 + np.asarray(shifted.month, dtype=np.int64) - 1
    first, after = wall[0], wall[-1] + pd.Timedelta(hours=float(interval_h))
    midnight = _dt.time(0, 0)
    whole_year = (first.day == 1 and first.time() == midnight and after.day == 1 and after.time() == midnight
                  and (after.year * 12 + after.month) - (first.year * 12 + first.month) == 12)
    if whole_year and wrap:
        ym = np.where(ym < calendar[0], ym + 12, ym)
        return ym, True
    return ym, False


def _utc_ns(index: pd.DatetimeIndex) -> np.ndarray:
    return index.tz_convert("UTC").tz_localize(None).to_numpy().astype("datetime64[ns]").astype(np.int64)


def _calendar(tariff: Tariff, index: pd.DatetimeIndex, interval_h: float | None, wrap: bool = True) -> _Calendar:
    """Everything about a tariff's billing of an index that does not depend on the power values. With ``wrap``
    False a whole year billed as it stands keeps its own first billing month (:func:`billing_months`)."""
    if not isinstance(index, pd.DatetimeIndex) or index.tz is None:
        raise ValueError("index must be a tz-aware pandas DatetimeIndex")
    if len(index) == 0:
        raise ValueError("index is empty: nothing to bill")
    if interval_h is None:
        interval_h = interval_hours(index)
    elif not interval_h > 0.0:
        raise ValueError("interval_h must be > 0")
    elif len(index) > 1 and np.any(np.diff(_utc_ns(index)) <= 0):
        raise ValueError("index must be strictly increasing")
    wall = _local_wall(tariff, index)
    ym, wrapped = billing_months(wall, getattr(tariff, "billing_day", 1), float(interval_h), wrap)
    if not wrapped and np.any(np.diff(ym) < 0):
        raise ValueError("index must be in time order")
    # Months without data in the middle of the series cannot occur in a regular index; renumber anyway.
    base = int(ym.min())
    uniq, month = np.unique(ym - base, return_inverse=True)
    month = month.astype(np.int64).reshape(-1)
    month_starts = np.unique(month, return_index=True)[1].astype(np.int64)  # (in series order)
    labels = tuple(f"{(base + u) // 12:04d}-{(base + u) % 12 + 1:02d}" for u in uniq)
    period = period_index(tariff, index).astype(np.int64)
    if np.any(period < 0):
        first = index[np.argmax(period < 0)]
        raise ValueError(f"time {first} falls in no time-of-use period of tariff {tariff.name!r}")
    by_month = _season_of_month(tariff)
    season = by_month[np.asarray(wall.month) - 1].astype(np.int64)
    # a billing month's season is its first calendar month's (a calendar month's own with billing_day 1)
    month_season = by_month[(base + uniq) % 12].astype(np.int64)
    k = len(tariff.period_codes)
    cell = month * k + period
    run_starts = np.nonzero(np.diff(cell))[0] + 1
    windows = {}
    utc = _utc_ns(index)
    wall_ns = wall.to_numpy().astype("datetime64[ns]").astype(np.int64)
    interval_ns = int(round(float(interval_h) * 3_600e9))
    for minutes, rolling in sorted({window_key(d) for d in (*tariff.demand, *getattr(tariff, "reactive_demand", ()))}):
        w = minutes * _NS_PER_MIN
        n_in = w // interval_ns if interval_ns > 0 else 1
        if rolling and n_in > 1:
            # a window ending at every interval that has a whole window before it, counted in the month and
            # period of its last interval (the meter's demand at the window's end)
            ends = np.arange(n_in - 1, len(index), dtype=np.int64)
            starts, count, at = ends - (n_in - 1), np.full(len(ends), n_in, dtype=np.int64), ends
        else:
            # block windows: aligned to the local clock (a rolling window no longer than an interval is one)
            offset = wall_ns - utc
            key = (wall_ns // w) * w - offset  # window start in UTC, aligned to the local clock
            starts = np.concatenate(([0], np.nonzero(np.diff(key))[0] + 1))
            count = np.diff(np.concatenate((starts, [len(index)])))
            at = starts
        if wrapped:  # each billing month's windows together (the one that wraps round the year has two runs)
            order = np.argsort(month[at], kind="stable")
            starts, count, at = starts[order], count[order], at[order]
        wmonth = month[at]
        windows[(minutes, rolling)] = _Windows(
            starts=starts,
            count=count,
            month=wmonth,
            period=period[at],
            season=month_season[wmonth],
            month_starts=np.searchsorted(wmonth, np.arange(len(labels))),  # (a month without a window: none)
            identity=len(starts) == len(index) and bool(np.all(count == 1)),
        )
    steps_in_cell = np.zeros(len(labels) * k, dtype=np.int64)
    np.add.at(steps_in_cell, month * k + period, 1)
    year = pd.Timestamp(int(wall_ns[len(wall_ns) // 2])).year if len(wall_ns) else None
    peaks = {c.name: peak_windows(wall_ns, placed_peak_times(c, year), c.window_min, interval_ns)
             for c in getattr(tariff, "coincident", ())}
    return _Calendar(
        n_steps=len(index),
        interval_h=float(interval_h),
        month_labels=labels,
        month=month,
        month_starts=month_starts,
        period=period,
        season=season,
        month_season=month_season,
        n_periods=k,
        steps_in_cell=steps_in_cell.reshape(len(labels), k),
        windows=windows,
        run_starts=np.concatenate(([0], run_starts, [len(index)])).astype(np.int64),
        run_cell=cell[np.concatenate(([0], run_starts))].astype(np.int64),
        peaks=peaks,
    )


#: The step by which a peak time of another year is moved onto the analysis year: 52 weeks, so that it keeps
#: its weekday and clock time (as profiles of another year are moved, :func:`models.profiles.conform`).
PEAK_YEAR_STEP_DAYS = 364


def placed_peak_times(clause, year: int | None) -> tuple[tuple[int, int, int, int], ...]:
    """A coincident-peak clause's times as (month, day, hour, minute) of the analysis ``year``.

    Parameters
    ----------
    clause : models.tariff.CoincidentPeak
        The clause; its ``years`` (one per time, or none) are the years the times are written in.
    year : int or None
        The analysis year (the year of the middle of the meter series); None keeps the calendar dates.

    Returns
    -------
    tuple of (int, int, int, int)
        (month, day, hour, minute) of each time, in the clause's order.

    A time written with a year (``clause.years``) moves by whole 52-week steps, the number nearest the
    years between, so it falls on the same weekday and clock time near the same date: 19 July 2024 17:00, a
    Friday, is read on Friday 18 July 2025. The system peaks on working-day afternoons; the same date of
    another year may be a weekend, when the site's load says nothing of its load at a system peak. A day
    that the nearest number of steps leaves in the year before or after (1 January 2024, a Monday, lands
    on 30 December 2024) takes one step more, onto the analysis year (Monday 29 December 2025). A clause
    built without years, or no ``year``, keeps its calendar dates.

    Examples
    --------
    >>> from models.tariff import CoincidentPeak
    >>> c = CoincidentPeak("c", 1.0, ((7, 19, 17, 0), (2, 29, 12, 0)), years=(2024, 2024))
    >>> placed_peak_times(c, 2025)
    ((7, 18, 17, 0), (2, 27, 12, 0))
    >>> placed_peak_times(CoincidentPeak("c", 1.0, ((1, 1, 9, 0),), years=(2024,)), 2025)  # a Monday
    ((12, 29, 9, 0),)
    """
    if year is None or not getattr(clause, "years", ()):
        return tuple(clause.times)
    if len(clause.years) != len(clause.times):
        raise ValueError(f"coincident-peak clause '{clause.name}': {len(clause.times)} times but "
                         f"{len(clause.years)} years")
    out = []
    for (month, day, hour, minute), written_year in zip(clause.times, clause.years):
        written = _dt.date(written_year, month, day)
        # the same day of the analysis year (28 February for a 29th the year lacks), for the number of steps
        same = _dt.date(year, month, min(day, 28) if month == 2 else day)
        steps = round((same - written).days / PEAK_YEAR_STEP_DAYS)
        placed = written + _dt.timedelta(days=PEAK_YEAR_STEP_DAYS * steps)
        if placed.year != year:  # a day near the year's end or start: one step more, onto the analysis year
            placed += _dt.timedelta(days=PEAK_YEAR_STEP_DAYS * (1 if placed.year < year else -1))
        out.append((placed.month, placed.day, hour, minute))
    return tuple(out)


def peak_windows(wall_ns: np.ndarray, times, window_min: int, interval_ns: int | None = None) -> list[tuple[int, int]]:
    """The steps of each listed peak time's window, in every year of the series.

    Parameters
    ----------
    wall_ns : numpy.ndarray of int64, shape (n_steps,)
        Interval starts as local wall-clock time [ns since 1970, naive], in time order (the clock repeats an
        hour on the day it goes back).
    times : sequence of (month, day, hour, minute)
        Window starts on the local clock.
    window_min : int
        Window length [min].
    interval_ns : int, optional
        Length of an interval [ns]; default the step between the first two starts (one hour for one step).

    Returns
    -------
    list of (int, int)
        (first step, step after the last) of the intervals that overlap each window [t, t + window) on the
        local clock: the interval holding its start (data coarser than the window: the hour that holds a
        15-min peak window), then every interval starting before its end; each time once, in the first year of
        the series that holds it (a series crossing a year end does not count a date twice). A time whose day
        does not exist in a year (29 February) or whose window no interval of the series overlaps is left out
        (``models.case`` warns of each such time, with the reason).

    Notes
    -----
    On the day the clocks go back, a window in the repeated hour takes its first occurrence only (summer
    time, the hour the clock shows first), on 15-min and hourly data alike: a bill charges one interval of
    real time, and ``models.case`` warns that the time is ambiguous. A time in the hour skipped when they go
    forward (02:00 on 30 March 2025 in Europe/Berlin) has no interval: the one before it ends as the gap
    begins and the next starts after it, so the time is left out in that year.
    """
    if not len(wall_ns):
        return []
    wall_ns = np.asarray(wall_ns, dtype=np.int64)
    step = int(interval_ns) if interval_ns else (int(wall_ns[1] - wall_ns[0]) if len(wall_ns) > 1 else 3_600_000_000_000)
    years = range(pd.Timestamp(int(wall_ns[0])).year, pd.Timestamp(int(wall_ns[-1])).year + 1)
    # where the clock goes back: a run of increasing wall-clock starts ends before each such step
    back = np.flatnonzero(np.diff(wall_ns) <= 0) + 1
    out = []
    for month, day, hour, minute in times:
        for year in years:  # each time once: in the first year of the series that holds it
            try:
                start = pd.Timestamp(year=year, month=month, day=day, hour=hour, minute=minute).value
            except ValueError:
                continue
            end = start + window_min * _NS_PER_MIN
            overlaps = np.flatnonzero((wall_ns < end) & (wall_ns + step > start))
            if not len(overlaps):
                continue
            a = int(overlaps[0])
            # the first occurrence: up to the window's end or the clock's step back, whichever comes first
            stop = back[back > a]
            limit = int(stop[0]) if len(stop) else len(wall_ns)
            b = a + 1
            while b < limit and wall_ns[b] < end:
                b += 1
            out.append((a, b))
            break
    return out


def _coincident_items(cal: _Calendar, c, p: np.ndarray, n_s: int) -> _Item:
    """A coincident-peak clause's line item: the mean of the site's import over its windows, every month."""
    n_m = cal.n_months
    windows = cal.peaks.get(c.name, [])
    demand = np.zeros(p.shape[0])
    for a, b in windows:
        demand += np.maximum(p[:, a:b].mean(axis=1), 0.0)
    if windows:
        demand /= len(windows)
    quantity = np.broadcast_to(demand[:, None], (p.shape[0], n_m))
    if quantity.shape[0] != n_s:
        quantity = np.broadcast_to(quantity, (n_s, n_m))
    return _Item(f"coincident:{c.name}", "coincident", "kW", np.full(n_m, c.price_per_kw_month), quantity,
                 np.ones(n_m, dtype=bool), np.zeros((n_s, n_m), dtype=bool))


def _mask(cal: _Calendar, tariff: Tariff, periods, seasons, period_arr=None, season_arr=None) -> np.ndarray:
    """Boolean mask of intervals (or windows) inside the listed periods and seasons (None = all)."""
    p = cal.period if period_arr is None else period_arr
    s = cal.season if season_arr is None else season_arr
    m = np.ones(p.shape, dtype=bool)
    if periods is not None:
        m &= np.isin(p, [tariff.period_codes.index(c) for c in periods])
    if seasons is not None:
        m &= np.isin(s, [tariff.season_names.index(c) for c in seasons])
    return m


def window_key(charge) -> tuple[int, bool]:
    """The demand windows a charge reads: (length [min], rolling)."""
    return int(charge.window_min), bool(charge.rolling)


def _scope(cal: _Calendar, tariff: Tariff, periods, seasons,
           window: tuple[int, bool] | None = None) -> tuple[np.ndarray, np.ndarray]:
    """A clause's scope and the months it is in force, built once per calendar.

    Without ``window``: the (month, period) cells inside the listed periods and seasons, (M * K,)
    bool (a cell is one period of one month, so it is wholly inside or wholly outside: a season is a
    set of months), and the months (M,) with some interval inside. With ``window`` (:func:`window_key`):
    the demand windows of that kind inside, (W,), and the months with some window inside.
    """
    key = (None if periods is None else tuple(periods), None if seasons is None else tuple(seasons), window)
    got = cal.masks.get(key)
    if got is None:
        n_m, k = cal.n_months, cal.n_periods
        if window is None:
            inside = _mask(cal, tariff, periods, seasons, np.tile(np.arange(k), n_m), np.repeat(cal.month_season, k))
            months = (cal.steps_in_cell * inside.reshape(n_m, k)).sum(axis=1) > 0
        else:
            win = cal.windows[window]
            inside = _mask(cal, tariff, periods, seasons, win.period, win.season)
            months = np.zeros(n_m, dtype=bool)
            months[np.unique(win.month[inside])] = True
        got = cal.masks[key] = (inside, months)
    return got


#: Per-interval quantities that :func:`_cell_sums` adds up by (month, period) cell.
_KWH, _KVAH, _LAG_KVARH, _LEAD_KVARH, _LAG_EXCESS_KVARH, _LEAD_EXCESS_KVARH = range(6)


def _cell_sums(cal: _Calendar, p: np.ndarray, q: np.ndarray, codes: list[int], ratios: list[float],
               scopes: list[np.ndarray | None]) -> np.ndarray:
    """Sums (n_codes, S, M * K) of per-interval quantities over each (month, period) cell, in one pass.

    Codes: ``_KWH`` max(P, 0)·h; ``_KVAH`` sqrt(max(P, 0)² + Q²)·h; ``_LAG_KVARH`` max(Q, 0)·h;
    ``_LEAD_KVARH`` max(−Q, 0)·h; ``_LAG_EXCESS_KVARH`` and ``_LEAD_EXCESS_KVARH`` the kVArh above an
    allowance netted per interval, max(kVArh − ratio·kWh, 0), counted in the cells of its scope only.
    ``p`` and ``q`` are (S, T) or (1, T) for every row.
    """
    n_cells = cal.n_months * cal.n_periods
    in_scope = np.ones((len(codes), n_cells), dtype=bool)
    for i, scope in enumerate(scopes):
        if scope is not None:
            in_scope[i] = scope
    return _cell_sums_kernel(p, q, np.asarray(codes, dtype=np.int64), np.asarray(ratios, dtype=float), in_scope,
                             cal.interval_h, cal.run_starts, cal.run_cell, n_cells, max(p.shape[0], q.shape[0]))


@numba.njit(inline="always")
def _interval_quantity(code, p_t, q_t, scale, h, neg_ratio):  # pragma: no cover - compiled
    """One interval's quantity of :func:`_cell_sums` (codes as there), in the numpy rule's order."""
    if code == 0:
        v = max(p_t, 0.0)
        if scale:
            v = v * h
    elif code == 1:
        a = max(p_t, 0.0)
        v = np.sqrt(a * a + q_t * q_t)
        if scale:
            v = v * h
    else:
        kv = max(q_t, 0.0) if (code == 2 or code == 4) else max(-q_t, 0.0)
        if scale:
            kv = kv * h
        if code <= 3:
            v = kv
        else:
            kwh = max(p_t, 0.0)
            if scale:
                kwh = kwh * h
            v = max(kwh * neg_ratio + kv, 0.0)
    return v


@numba.njit(nogil=True, cache=True)
def _cell_sums_kernel(p, q, codes, ratios, in_scope, h, run_starts, run_cell, n_cells, n_rows):  # pragma: no cover - compiled
    """Compiled body of :func:`_cell_sums`, a pass per quantity over runs of intervals in one cell.

    Per interval: kWh = max(P, 0) (times h when h != 1), kVAh = sqrt(max(P, 0)² + Q²) (times h; the
    value of numpy's hypot to rounding), kVArh = max(±Q, 0) (times h), excess = max(kWh·(−ratio) +
    kVArh, 0), in the numpy rule's order. A cell's sum is its runs' sums (each added in time order)
    added in time order; a numpy reduction adds in blocks, so the sums agree to rounding (about
    1e-16 relative).
    """
    n_c = codes.shape[0]
    out = np.zeros((n_c, n_rows, n_cells))
    scale = h != 1.0
    one_p = p.shape[0] == 1
    one_q = q.shape[0] == 1
    for i in range(n_c):
        code = codes[i]
        neg_ratio = -ratios[i]
        for r in range(n_rows):
            rp = 0 if one_p else r
            rq = 0 if one_q else r
            for j in range(run_cell.shape[0]):
                c = run_cell[j]
                if code >= 4 and not in_scope[i, c]:
                    continue
                acc = 0.0
                for t in range(run_starts[j], run_starts[j + 1]):
                    acc += _interval_quantity(code, p[rp, t], q[rq, t], scale, h, neg_ratio)
                out[i, r, c] += acc
    return out


@numba.njit(nogil=True, cache=True)
def _window_peaks_kernel(p, q, kva, want_q, starts, count, identity, month_starts, in_scope,
                         n_rows):  # pragma: no cover - compiled
    """Each month's highest demand window in scope, with the window's mean kW and kVAr, in one pass.

    Window means as the numpy rule (the window's values added in time order, divided by their count;
    the values themselves when every window is one interval); demand = mean P, or hypot(mean P, mean Q)
    on a kVA basis (windows compared by P² + Q², whose order is the root's but for rounding ties).
    ``month_starts`` are the first window of each month, then the number of windows. Returns peak
    (S, M) (−inf in a month with no window in scope) and the mean P and Q of the month's first window
    reaching it (S, M) each (Q only with ``want_q``, else 0).
    """
    n_months = month_starts.shape[0] - 1
    peak = np.full((n_rows, n_months), -np.inf)
    p_at = np.zeros((n_rows, n_months))
    q_at = np.zeros((n_rows, n_months))
    one_p = p.shape[0] == 1
    one_q = q.shape[0] == 1
    for r in range(n_rows):
        rp = 0 if one_p else r
        rq = 0 if one_q else r
        for m in range(n_months):
            best, best_p, best_q = -np.inf, 0.0, 0.0
            for w in range(month_starts[m], month_starts[m + 1]):
                if not in_scope[w]:
                    continue
                if identity:  # (windows in billing-month order: the interval of window w is starts[w])
                    pw = p[rp, starts[w]]
                    qw = q[rq, starts[w]] if want_q else 0.0
                else:
                    a, n = starts[w], count[w]
                    acc = 0.0
                    for t in range(a, a + n):
                        acc += p[rp, t]
                    pw = acc / n
                    qw = 0.0
                    if want_q:
                        acc = 0.0
                        for t in range(a, a + n):
                            acc += q[rq, t]
                        qw = acc / n
                d = pw * pw + qw * qw if kva else pw  # kVA: compared squared, one root per month below
                if d > best:
                    best, best_p, best_q = d, pw, qw
            if kva and best > -np.inf:
                best = np.hypot(best_p, best_q)
            peak[r, m], p_at[r, m], q_at[r, m] = best, best_p, best_q
    return peak, p_at, q_at


# --------------------------------------------------------------------------------------------------
# The engine
# --------------------------------------------------------------------------------------------------


@dataclass(frozen=True, eq=False)
class _Item:
    name: str
    category: str
    unit: str
    rate: np.ndarray  # (M,)
    quantity: np.ndarray  # (S, M)
    applies: np.ndarray  # (M,) bool: the clause is in force this month
    flag: np.ndarray  # (S, M) bool
    # (S, M) each: the quantity in the 1st, 2nd... year after a change, where it differs from the steady year's
    # (a ratchet still reading the months before the change, the taxes on it); None = the same in every year
    transition: tuple[np.ndarray, ...] | None = None
    # (S, M): for a ratchet item, the demand after any power-factor adjustment that later months' ratchet reads
    reads: np.ndarray | None = None

    @property
    def amount(self) -> np.ndarray:
        return self.quantity * self.rate

    def year_amount(self, year: int) -> np.ndarray:
        """The amount (S, M) in year ``year`` (1, 2...) after a change: the steady amount once the transition ends."""
        if self.transition is None or year > len(self.transition):
            return self.amount
        return self.transition[year - 1] * self.rate


def _ratchet_floor(adjusted: np.ndarray, months: int, repeat_year: bool, before: np.ndarray | None = None,
                   year: int = 1, start: int = 0) -> np.ndarray:
    """Highest adjusted demand of the previous ``months`` billing months, (S, M).

    With ``repeat_year`` the months before the series are the same typical year's (a year repeated); with
    ``before`` (M,) they are those of another year instead: the year before a change, whose demands the
    ratchet still reads in year ``year`` (1, 2, ...) after it, in the months its look-back reaches back
    past the change. The change comes into service at the start of billing month ``start`` (0 = the
    series' first), so year ``year`` runs from that month to the one before it, twelve months on. Without
    ``before`` or ``repeat_year``, months before the series count as none.
    """
    n_m = adjusted.shape[1]
    floor = np.zeros_like(adjusted)
    prior = adjusted if before is None else np.broadcast_to(np.asarray(before, dtype=float), adjusted.shape)
    start = start if before is not None else 0  # (the steady year has no change to count from)
    since = (np.arange(n_m) - start) % n_m  # months since the change within its year
    for lag in range(1, months + 1):
        # month m of year k reads the month (k - 1) x 12 + (m - start) - lag counted from the change
        pos = (year - 1) * n_m + since - lag
        inside = pos >= 0
        at = (pos + start) % n_m  # that month's billing month in the series
        if inside.any():
            floor[:, inside] = np.maximum(floor[:, inside], adjusted[:, at[inside]])
        if repeat_year and not inside.all():
            floor[:, ~inside] = np.maximum(floor[:, ~inside], prior[:, at[~inside]])
    return floor


def _check_month(month) -> None:
    """Raise ValueError unless ``month`` is a whole month number from 1 to 12."""
    if isinstance(month, bool) or not isinstance(month, (int, np.integer)) or not 1 <= month <= 12:
        raise ValueError(f"in_service_month must be a whole month number from 1 to 12, not {month!r}")


def service_start(cal: "_Calendar", in_service_month: int | None) -> int:
    """The billing month (0 = the series' first) in which a change coming into service in calendar month
    ``in_service_month`` (1-12; None: the series' first month) begins."""
    if in_service_month is None:
        return 0
    _check_month(in_service_month)
    for m, label in enumerate(cal.month_labels):
        if int(label[5:7]) == int(in_service_month):
            return m
    raise ValueError(f"no billing month of the series is month {in_service_month}")


def transition_years(months: int, n_months: int = 12) -> int:
    """Years after a change in which a ratchet of ``months`` look-back still reads months before it (>= 1)."""
    return max(1, -(-int(months) // int(n_months)))


def _demand_items(tariff, cal, d: DemandCharge, p, q, kwh_month, lag_kvarh_month, repeat_year, n_s,
                  before: Mapping[str, np.ndarray] | None = None, start: int = 0) -> list[_Item]:
    win = cal.windows[window_key(d)]
    n_m = cal.n_months
    a = d.power_factor_adjustment
    in_scope, applies = _scope(cal, tariff, d.periods, d.seasons, window_key(d))
    want_q = d.basis != "kW" or (a is not None and a.power_factor_from != "month_average")
    raw, p_at, q_at = _window_peaks_kernel(p, q, d.basis != "kW", want_q, win.starts, win.count, win.identity,
                                           win.month_bounds, in_scope, n_s)
    peak = np.where(applies, np.maximum(raw, 0.0), 0.0)
    rate = np.full(n_m, d.price_per_unit_month)
    no_flag = np.zeros((n_s, n_m), dtype=bool)
    if d.contracted is not None:
        # the contract's capacity every month the charge is in force, and the demand above it at its own price
        booked = np.broadcast_to(np.where(applies, float(d.contracted), 0.0), (n_s, n_m))
        return [_Item(f"demand:{d.name}", "demand", d.basis, rate, booked, applies, no_flag),
                _Item(f"excess:{d.name}", "excess", d.basis, np.full(n_m, d.excess_price),
                      np.maximum(peak - float(d.contracted), 0.0), applies, no_flag)]

    adjusted = peak
    if a is not None:
        if a.power_factor_from == "month_average":
            with np.errstate(invalid="ignore", divide="ignore"):
                s = np.hypot(kwh_month, lag_kvarh_month)
                pf = np.where(s > 0.0, kwh_month / np.where(s > 0.0, s, 1.0), 1.0)
        else:
            # PF of the first window of each month that reaches the month's peak (lagging kVAr only);
            # a month whose windows all export has no such window
            pw, qw = p_at, np.maximum(q_at, 0.0)
            s = np.hypot(pw, qw)
            ok = (raw >= 0.0) & (pw > 0.0)
            pf = np.where(ok, pw / np.where(ok, s, 1.0), 1.0)
        if a.method == "ratio":
            adjusted = pf_adjusted_demand_kw(peak, pf, a.target_power_factor)
        else:
            adjusted = percent_adjusted_demand_kw(peak, pf, a.target_power_factor, a.percent_per_point, a.round_points_up)
        adjusted = np.where(applies, adjusted, 0.0)

    billed = adjusted
    transition = None
    if d.ratchet_frac is not None and d.ratchet_months > 0:
        floor = _ratchet_floor(adjusted, d.ratchet_months, repeat_year)
        billed = np.where(applies, np.maximum(adjusted, d.ratchet_frac * floor), 0.0)
        if before is not None and repeat_year and d.name in before:
            years = []
            for year in range(1, transition_years(d.ratchet_months, n_m) + 1):
                floor = _ratchet_floor(adjusted, d.ratchet_months, True, before[d.name], year, start)
                years.append(np.where(applies, np.maximum(adjusted, d.ratchet_frac * floor), 0.0) - adjusted)
            transition = tuple(years)

    unit = d.basis
    items = [_Item(f"demand:{d.name}", "demand", unit, rate, peak, applies, no_flag)]
    if a is not None:
        items.append(_Item(f"pf adjustment:{d.name}", "pf adjustment", unit, rate, adjusted - peak, applies, no_flag))
    if d.ratchet_frac is not None:
        items.append(_Item(f"ratchet:{d.name}", "ratchet", unit, rate, billed - adjusted, applies, no_flag,
                           transition, adjusted))
    return items


def _bill_items(tariff: Tariff, cal: _Calendar, p: np.ndarray, q: np.ndarray, repeat_year: bool | None,
                before: Mapping[str, np.ndarray] | None = None, start: int = 0) -> list[_Item]:
    """Price (S, T) meter arrays; return the line items with (S, M) quantities.

    ``before`` (demand charge name -> adjusted demand of each billing month, (M,)) is the year before a
    change that comes into service at the start of billing month ``start``: the ratchet items then carry
    the quantities of the years after it whose look-back still reaches it (:attr:`_Item.transition`, each
    year's months in the series' order), and the taxes on them too.

    ``p`` or ``q`` may have a single row that stands for every scenario (e.g. scenarios that change
    only the kVAr). The per-interval work is two kinds of compiled pass: the cell sums of every
    quantity the clauses need (:func:`_cell_sums`, one pass for all of them) and each demand charge's
    monthly peak (:func:`_window_peaks_kernel`); the clauses are priced on the (S, M) results.
    """
    n_s, n_m, k = max(p.shape[0], q.shape[0]), cal.n_months, cal.n_periods
    repeat_year = repeats_year(n_m, repeat_year)
    p = np.asarray(p, dtype=float)
    q = np.asarray(q, dtype=float)
    every_month = np.ones(n_m, dtype=bool)
    no_flag = np.zeros((n_s, n_m), dtype=bool)

    # what the clauses need, summed by cell in one pass
    codes: list[int] = []
    ratios: list[float] = []
    scopes: list[np.ndarray | None] = []
    plain: dict[int, int] = {}

    def summed(code: int, ratio: float = 0.0, scope: np.ndarray | None = None) -> int:
        if scope is None and code in plain:
            return plain[code]
        codes.append(code)
        ratios.append(ratio)
        scopes.append(scope)
        if scope is None:
            plain[code] = len(codes) - 1
        return len(codes) - 1

    energy_at = None
    if tariff.energy is not None:
        energy_at = summed(_KWH if tariff.energy.basis == "kWh" else _KVAH)
    energy_pf = getattr(tariff, "energy_power_factor", ())
    kwh_at = lag_at = lead_at = None
    if tariff.demand or energy_pf:
        kwh_at = summed(_KWH)
        if energy_pf or any(d.power_factor_adjustment is not None for d in tariff.demand):
            lag_at = summed(_LAG_KVARH)
        if energy_pf:
            lead_at = summed(_LEAD_KVARH)
    clauses = []
    for kind, clause_list, plain_code, excess_code in (("reactive", tariff.reactive, _LAG_KVARH, _LAG_EXCESS_KVARH),
                                                       ("leading", tariff.leading, _LEAD_KVARH, _LEAD_EXCESS_KVARH)):
        for r in clause_list:
            scope, months = _scope(cal, tariff, r.periods, r.seasons)
            if r.allowance_per == "interval":
                at = (summed(excess_code, float(r.free_kvarh_per_kwh), scope),)
            else:
                at = (summed(plain_code), summed(_KWH))
            clauses.append((kind, r, scope, months, at))
    cells = _cell_sums(cal, p, q, codes, ratios, scopes).reshape(len(codes), n_s, n_m, k) if codes else None

    items: list[_Item] = []
    for f in tariff.fixed:
        items.append(_Item(f"fixed:{f.name}", "fixed", "month", np.full(n_m, f.charge_per_month), np.ones((n_s, n_m)), every_month, no_flag))

    if energy_at is not None:
        energy = cells[energy_at]
        for kk, code in enumerate(tariff.period_codes):
            items.append(_Item(f"energy:{code}", "energy", tariff.energy.basis, np.full(n_m, tariff.energy.price(code)),
                               energy[:, :, kk], cal.steps_in_cell[:, kk] > 0, no_flag))

    kwh_month = cells[kwh_at].sum(axis=2) if kwh_at is not None else None
    lag_month = cells[lag_at].sum(axis=2) if lag_at is not None else None
    lead_month = cells[lead_at].sum(axis=2) if lead_at is not None else None

    for d in tariff.demand:
        items.extend(_demand_items(tariff, cal, d, p, q, kwh_month, lag_month, repeat_year, n_s, before, start))

    lagging = np.maximum(q, 0.0) if getattr(tariff, "reactive_demand", ()) else None
    for c in getattr(tariff, "reactive_demand", ()):
        win = cal.windows[window_key(c)]
        in_scope, applies = _scope(cal, tariff, c.periods, c.seasons, window_key(c))
        # the highest window mean of the lagging kVAr (a lagging register: a leading interval adds nothing), by the
        # kW pass run on it (its arguments swapped)
        kvar_peak = _window_peaks_kernel(lagging, p, False, False, win.starts, win.count, win.identity,
                                         win.month_bounds, in_scope, n_s)[0]
        kw_peak = 0.0
        if c.free_kvar_per_kw > 0.0:
            kw_peak = _window_peaks_kernel(p, q, False, False, win.starts, win.count, win.identity, win.month_bounds,
                                           in_scope, n_s)[0]
        billed = np.where(applies, reactive_demand_kvar(kvar_peak, kw_peak, c.free_kvar_per_kw), 0.0)
        items.append(_Item(f"reactive demand:{c.name}", "reactive demand", "kVAr", np.full(n_m, c.price_per_kvar_month),
                           billed, applies, no_flag))

    for c in getattr(tariff, "coincident", ()):
        items.append(_coincident_items(cal, c, p, n_s))

    for kind, r, scope, months, at in clauses:
        bands = getattr(r, "price_bands", ())
        banded = []  # a line item per price band (netted per period or month only)
        if r.allowance_per == "interval":
            qty = cells[at[0]].sum(axis=2)
        else:
            inside = scope.reshape(n_m, k)
            kv = np.where(inside, cells[at[0]], 0.0)
            kw = np.where(inside, cells[at[1]], 0.0)
            if r.allowance_per != "period":  # the month is the netting unit: one cell of its own
                kv, kw = kv.sum(axis=2, keepdims=True), kw.sum(axis=2, keepdims=True)
            excess = np.maximum(kv - r.free_kvarh_per_kwh * kw, 0.0)
            if bands:  # each unit's whole excess at the price of its power factor's band, a line item per band
                tier = reactive_price_tier(kw, kv, [b.below_power_factor for b in bands], r.power_factor_decimals)
                for j, b in sorted(enumerate(bands, start=1), key=lambda jb: -jb[1].below_power_factor):
                    banded.append(_Item(f"{kind}:{r.name} (power factor below {b.below_power_factor:g})", kind, "kVArh",
                                        np.full(n_m, b.price_per_kvarh), np.where(tier == j, excess, 0.0).sum(axis=2),
                                        months, no_flag))
                excess = np.where(tier == 0, excess, 0.0)
            qty = excess.sum(axis=2)
        flag = (qty > 0.0) if kind == "leading" and r.banned else no_flag
        items.append(_Item(f"{kind}:{r.name}", kind, "kVArh", np.full(n_m, r.price_per_kvarh), qty, months, flag))
        items.extend(banded)

    if energy_pf:  # a percentage of the month's charges before taxes: priced once every other charge is
        charges = {base: sum(np.where(it.applies, it.amount, 0.0) for it in items if it.category in cats)
                   for base, cats in (("energy_charges", ("energy",)),
                                      ("all_charges", _TAX_BASE_CATEGORIES["all_charges"]))}
        for c in energy_pf:
            kvarh = lag_month + (lead_month if c.count_leading else 0.0)
            with np.errstate(invalid="ignore", divide="ignore"):
                apparent = np.hypot(kwh_month, kvarh)
                pf = np.where(apparent > 0.0, kwh_month / np.where(apparent > 0.0, apparent, 1.0), 1.0)
            pct = energy_power_factor_pct(pf, c.penalties, c.rebates, c.round_points)
            if not c.rebate_when_leading:  # no rebate in a month whose leading kVArh exceed its lagging kVArh
                pct = np.where(lead_month > lag_month, np.maximum(pct, 0.0), pct)
            items.append(_Item(f"pf energy:{c.name}", "pf energy", tariff.currency, np.ones(n_m),
                               pct / 100.0 * charges[c.base], every_month, no_flag))

    for t in tariff.taxes:
        cats = _TAX_BASE_CATEGORIES[t.base]
        base = np.zeros((n_s, n_m))
        for it in items:
            if it.category in cats:
                base = base + np.where(it.applies, it.amount, 0.0)
        years = max((len(it.transition) for it in items if it.category in cats and it.transition is not None), default=0)
        transition = None
        if years:
            transition = []
            for year in range(1, years + 1):
                base_k = np.zeros((n_s, n_m))
                for it in items:
                    if it.category in cats:
                        base_k = base_k + np.where(it.applies, it.year_amount(year), 0.0)
                transition.append(base_k)
            transition = tuple(transition)
        items.append(_Item(f"tax:{t.name}", "tax", tariff.currency, np.full(n_m, t.rate_pct / 100.0), base, every_month,
                           no_flag, transition))
    return items


def _all_finite(a: np.ndarray) -> bool:
    """True when every value is finite (one summing pass; the element test only when the sum is not finite)."""
    with np.errstate(over="ignore", invalid="ignore"):
        if np.isfinite(np.add.reduce(a, axis=None)):
            return True
    return bool(np.all(np.isfinite(a)))


def _shared_row(a: np.ndarray) -> np.ndarray:
    """A (S, T) array whose rows are one row broadcast (zero row stride) as that one row (1, T)."""
    return a[:1] if a.shape[0] > 1 and a.strides[0] == 0 else a


def _as_2d(x, n_steps: int, name: str) -> np.ndarray:
    a = np.asarray(x, dtype=float)
    if a.ndim == 1:
        a = a[None, :]
    if a.ndim != 2 or a.shape[1] != n_steps:
        raise ValueError(f"{name} must have {n_steps} values per scenario (one per interval); got shape {np.shape(x)}")
    if not _all_finite(_shared_row(a)):
        raise ValueError(f"{name} contains NaN or infinite values; fill or drop the gaps first")
    return a


def bill(
    tariff: Tariff,
    index: pd.DatetimeIndex,
    p_kw,
    q_kvar,
    *,
    interval_h: float | None = None,
    repeat_year: bool | None = False,
    before_p_kw=None,
    before_q_kvar=None,
    year_after: int = 1,
    in_service_month: int | None = None,
) -> pd.DataFrame:
    """Return the bill of one site meter series, by billing month and line item.

    Parameters
    ----------
    tariff : Tariff
        A valid tariff.
    index : pandas.DatetimeIndex
        Tz-aware interval start times, regular and increasing (15-min, 30-min, hourly, ...).
    p_kw : array_like or Series, shape (n_steps,)
        Site active power, mean over each interval [kW], positive = import.
    q_kvar : array_like or Series, shape (n_steps,)
        Site reactive power, mean over each interval [kVAr], positive lagging, negative leading.
    interval_h : float, optional
        Interval length [h]; inferred from the index when omitted (required for a single interval).
    repeat_year : bool or None
        Treat the series as one typical year repeated, so a ratchet in its first months looks back
        at its last months. Needs exactly 12 billing months. None: repeat when the series has exactly
        12 billing months, else bill it as it stands (:func:`repeats_year`; the analysis's rule). Under a tariff
        whose billing months start on a read day (``billing_day``), a whole year's first days belong to the
        billing month that starts in its December unless ``repeat_year`` is False (then they are a billing month
        of their own, and the year holds 13).
    before_p_kw, before_q_kvar : array_like, shape (n_steps,), optional
        The meter of the year before a change, on the same index [kW], [kVAr]. Given both (with a
        typical year: ``repeat_year`` true or None with 12 months), the bill is that of the first year
        after the change: a ratchet reads the year before in place of the series' own last months, so
        a peak that has gone is still billed at its ratchet share until it leaves the look-back.
    year_after : int
        With the year before a change: which year after it to bill (1 = the first; a look-back of more than
        12 months reads the year before in the second and third years too). Default 1.
    in_service_month : int, optional
        With the year before a change: the calendar month (1-12) at whose start it comes into service; each
        year after it runs from that month for twelve months (shown in the series' month order). Default:
        the series' first month.

    Returns
    -------
    pandas.DataFrame
        Columns ``month`` (``"YYYY-MM"``), ``line_item`` (``"<category>:<name>"``), ``quantity``,
        ``unit``, ``rate``, ``amount`` (tariff currency; ``amount = quantity × rate``) and ``flag``
        (True where a banned condition occurred, e.g. leading kVArh in a banned period). A line item
        appears in the months its clause is in force. Categories are ``LINE_ITEM_CATEGORIES``.

    Raises
    ------
    ValueError
        On a naive, irregular or unordered index; inputs of the wrong length or with NaN; a time in no
        period; ``repeat_year`` without 12 months.

    Notes
    -----
    Per interval t of length h: kWh_t = max(P_t, 0)·h, kVArh_lag,t = max(Q_t, 0)·h,
    kVArh_lead,t = max(−Q_t, 0)·h, kVAh_t = sqrt(max(P_t, 0)² + Q_t²)·h. Demand: window means of P (and
    Q for kVA, S_w = sqrt(P_w² + Q_w²)) over clock-aligned windows (rolling ones ending at every interval,
    where the clause says so); the month's demand is the highest
    window in scope. PF adjustment, ratchet and allowances follow ``docs/tariffs.md``; worked bills
    are in ``docs/derivations/billing-*.md``.

    Warnings
    --------
    Data coarser than the demand window (hourly data, 15-min demand) cannot show the true window
    peak: each interval is taken as one window, which understates the demand.

    Examples
    --------
    >>> from models.tariff import tariff_from_dict
    >>> t = tariff_from_dict({"tariff": {"name": "flat", "currency": "EUR"},
    ...                       "periods": [{"code": "all"}],
    ...                       "energy": {"price_per_kwh": {"all": 0.10}},
    ...                       "fixed": [{"name": "standing", "charge_per_month": 20.0}]})[0]
    >>> idx = pd.date_range("2025-01-01", periods=4, freq="h", tz="UTC")
    >>> b = bill(t, idx, [100.0, 100.0, 50.0, 50.0], [0.0, 0.0, 0.0, 0.0])
    >>> list(zip(b["line_item"], b["quantity"], b["amount"]))
    [('fixed:standing', 1.0, 20.0), ('energy:all', 300.0, 30.0)]
    """
    cal = _calendar(tariff, index, interval_h, wrap=repeat_year is not False)
    p = _as_2d(p_kw, cal.n_steps, "p_kw")
    q = _as_2d(q_kvar, cal.n_steps, "q_kvar")
    if p.shape[0] != 1 or q.shape[0] != 1:
        raise ValueError("bill() prices one meter series; use bill_many() for several scenarios")
    _check_repeat(cal, repeat_year)
    if not (isinstance(year_after, int) and year_after >= 1):
        raise ValueError("year_after counts the years after the change from 1")
    if in_service_month is not None:
        _check_month(in_service_month)
    before = None
    if (before_p_kw is None) != (before_q_kvar is None):
        raise ValueError("the year before a change needs both before_p_kw and before_q_kvar")
    if before_p_kw is not None:
        bp = _as_2d(before_p_kw, cal.n_steps, "before_p_kw")
        bq = _as_2d(before_q_kvar, cal.n_steps, "before_q_kvar")
        if repeats_year(cal.n_months, repeat_year):
            before = ratchet_history(tariff, cal, bp, bq)
    start = service_start(cal, in_service_month) if before is not None else 0  # (read only with the year before)
    items = _bill_items(tariff, cal, p, q, repeat_year, before, start)
    rows = []
    for m, label in enumerate(cal.month_labels):
        for it in items:
            if it.applies[m]:
                quantity = (it.quantity if it.transition is None or year_after > len(it.transition)
                            else it.transition[year_after - 1])
                rows.append((label, it.name, float(quantity[0, m]), it.unit, float(it.rate[m]),
                             float(quantity[0, m] * it.rate[m]), bool(it.flag[0, m])))
    return pd.DataFrame(rows, columns=["month", "line_item", "quantity", "unit", "rate", "amount", "flag"])


def repeats_year(cal_months: int, repeat_year: bool | None) -> bool:
    """Whether a series of ``cal_months`` billing months is billed as one typical year repeated.

    ``repeat_year`` None is the analysis's rule: a series of exactly 12 billing months is a typical year
    (a ratchet in January looks back at the same year's later months, as it would in every year after
    the first); any other series is billed as it stands (months before it are unknown).
    """
    return cal_months == 12 if repeat_year is None else bool(repeat_year)


def _check_repeat(cal: _Calendar, repeat_year: bool | None) -> None:
    if repeat_year and cal.n_months != 12:
        raise ValueError(f"repeat_year needs exactly 12 billing months; the series has {cal.n_months}")


def bill_many(
    tariff: Tariff,
    index: pd.DatetimeIndex,
    p_kw_2d,
    q_kvar_2d,
    *,
    interval_h: float | None = None,
    repeat_year: bool | None = False,
) -> pd.DataFrame:
    """Return the bill totals by line item for many meter series at once.

    Parameters
    ----------
    tariff : Tariff
        A valid tariff.
    index : pandas.DatetimeIndex
        Tz-aware interval start times, shared by every scenario.
    p_kw_2d : array_like, shape (n_scenarios, n_steps)
        Site active power per scenario [kW] (a 1-D array is one scenario).
    q_kvar_2d : array_like, shape (n_scenarios, n_steps)
        Site reactive power per scenario [kVAr], positive lagging.
    interval_h, repeat_year
        As in :func:`bill`.

    Returns
    -------
    pandas.DataFrame
        One row per scenario (index 0..n-1), one column per line item with the amount summed over all
        months [currency], and a ``total`` column. ``df.attrs["flags"]`` holds the names of line items
        flagged in any month, per scenario (a list of lists).

    Notes
    -----
    The same engine as :func:`bill`, evaluated on scenario blocks of bounded size; the calendar (months,
    periods, windows) is built once.
    """
    return _bill_many_on(_calendar(tariff, index, interval_h, wrap=repeat_year is not False), tariff, p_kw_2d,
                         q_kvar_2d, repeat_year)


def _bill_many_on(cal: _Calendar, tariff: Tariff, p_kw_2d, q_kvar_2d, repeat_year: bool | None) -> pd.DataFrame:
    """:func:`bill_many` against a calendar already built (for callers that bill one site block by block)."""
    p = _as_2d(p_kw_2d, cal.n_steps, "p_kw_2d")
    q = _as_2d(q_kvar_2d, cal.n_steps, "q_kvar_2d")
    if p.shape != q.shape:
        raise ValueError(f"p_kw_2d and q_kvar_2d differ in shape: {p.shape} vs {q.shape}")
    _check_repeat(cal, repeat_year)
    return _priced(tariff, cal, _shared_row(p), _shared_row(q), repeat_year, n_rows=p.shape[0])


def _block_totals(tariff: Tariff, cal: _Calendar, p: np.ndarray, q: np.ndarray, repeat_year: bool | None,
                  before: Mapping[str, np.ndarray] | None = None, with_transition: bool = False, start: int = 0):
    """Line-item names, amounts summed over months (S, I) [currency] and flagged items (S, I) of one block.

    ``p`` and ``q`` are (S, T) or (1, T) standing for every row (at least one of them has S rows, or both
    one row and S = 1). With ``with_transition`` a fourth value follows: the amounts of each year after a change
    from the meter of ``before`` (see :func:`_bill_items`) while a ratchet still reads it, (K, S, I)
    [currency], K >= 1 (the steady amounts where no item differs), the change coming into service at the
    start of billing month ``start`` (:func:`service_start`).
    """
    n = max(p.shape[0], q.shape[0])
    items = _bill_items(tariff, cal, p, q, repeat_year, before, start)
    names = [it.name for it in items]
    if not items:
        empty = np.zeros((n, 0))
        return (names, empty, np.zeros((n, 0), dtype=bool)) + ((empty[None],) if with_transition else ())
    # every item's quantity and flag is (S, M): one (S, I, M) stack, summed over the months of each row
    applies = np.stack([it.applies for it in items])  # (I, M)
    amounts = np.where(applies, np.stack([it.amount for it in items], axis=1), 0.0).sum(axis=2)
    flagged = (np.stack([it.flag for it in items], axis=1) & applies).any(axis=2)
    if not with_transition:
        return names, amounts, flagged
    years = max((len(it.transition) for it in items if it.transition is not None), default=1)
    out = np.repeat(amounts[None], years, axis=0)
    for i, it in enumerate(items):
        if it.transition is not None:
            for year in range(1, len(it.transition) + 1):
                out[year - 1, :, i] = np.where(it.applies, it.year_amount(year), 0.0).sum(axis=1)
    return names, amounts, flagged, out


def ratchet_history(tariff: Tariff, cal: _Calendar, p: np.ndarray, q: np.ndarray) -> dict[str, np.ndarray]:
    """The adjusted demand of each billing month of one meter, per demand charge with a ratchet.

    Parameters
    ----------
    tariff : Tariff
    cal : _Calendar
        The billing calendar of the series (12 billing months: a typical year repeated).
    p, q : numpy.ndarray, shape (1, n_steps)
        The meter [kW], [kVAr].

    Returns
    -------
    dict of str to numpy.ndarray
        Demand charge name -> (M,) demand after any power-factor adjustment [kW or kVA]: what a ratchet
        reads of these months in the year after them. Empty when no demand charge has a ratchet, or when
        the series is not a typical year (months before it are unknown).
    """
    ratcheted = [d.name for d in tariff.demand if d.ratchet_frac is not None and d.ratchet_months > 0]
    if not ratcheted or not repeats_year(cal.n_months, None):
        return {}
    items = {it.name: it for it in _bill_items(tariff, cal, np.asarray(p, dtype=float), np.asarray(q, dtype=float), True)}
    return {name: items[f"ratchet:{name}"].reads[0].copy() for name in ratcheted}


def _priced(tariff: Tariff, cal: _Calendar, p: np.ndarray, q: np.ndarray, repeat_year: bool | None, n_rows: int | None = None,
            chunk_elements: int | None = None) -> pd.DataFrame:
    """The :func:`bill_many` table of checked (S, T) arrays (one of them may be (1, T) for every row).

    For callers that price many blocks of one site against a calendar built once.
    """
    n = n_rows if n_rows is not None else max(p.shape[0], q.shape[0])
    chunk = max(1, (chunk_elements or _CHUNK_ELEMENTS) // max(cal.n_steps, 1))
    blocks, flags, names = [], [], None
    for start in range(0, n, chunk):
        stop = min(start + chunk, n)
        names, amounts, flagged = _block_totals(tariff, cal, p[start:stop] if p.shape[0] > 1 else p,
                                                q[start:stop] if q.shape[0] > 1 else q, repeat_year)
        amounts = np.broadcast_to(amounts, (stop - start, amounts.shape[1]))
        flagged = np.broadcast_to(flagged, (stop - start, flagged.shape[1]))
        blocks.append(amounts)
        flags.extend([[n_ for n_, f in zip(names, row) if f] for row in flagged])
    amounts = np.concatenate(blocks, axis=0) if blocks else np.zeros((0, 0))
    out = pd.DataFrame(amounts, columns=names or [])
    out["total"] = amounts.sum(axis=1)
    out.attrs["flags"] = flags
    out.attrs["currency"] = tariff.currency
    return out


def bill_total(bill_frame: pd.DataFrame) -> float:
    """Return the total of a :func:`bill` table [currency]: the sum of its line-item amounts."""
    return float(bill_frame["amount"].sum())
