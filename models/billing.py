"""The electricity bill of a site meter series under a tariff, per billing month and line item.

Scope: :func:`bill` prices one meter series (mean kW and kVAr per interval, tz-aware index of interval
start times, 15-min, 30-min or hourly) under a :class:`~models.tariff.Tariff` and returns one row per
billing month and line item. :func:`bill_many` prices many meter series at once (scenarios × intervals)
and returns each scenario's totals by line item; it is the engine behind savings attribution, and
:func:`bill` is the same engine run on one scenario. Everything is vectorised over intervals and
scenarios: grouping by month, period and demand window uses ``numpy.add.reduceat`` over contiguous
segments and one gather for the (month, period) cells. The pure helpers
:func:`pf_adjusted_demand_kw`, :func:`percent_adjusted_demand_kw` and :func:`excess_kvarh` state the
clauses' equations on their own.

Metering conventions used throughout (see ``docs/tariffs.md``):

* energy per interval = mean kW × interval hours; only import is billed (P < 0 counts as 0 kWh: this
  format has no export price);
* lagging kVArh = max(Q, 0) × h and leading kVArh = max(−Q, 0) × h, registered separately as
  four-quadrant meters do, so leading kVArh never nets against lagging kVArh;
* kVAh per interval = sqrt(kWh² + kVArh²) with the interval's net kVArh (lagging or leading);
* billing months are calendar months of local time in the tariff's zone; fixed and demand charges are
  charged in full for every month that has data, even a partial one.
"""

from __future__ import annotations

from dataclasses import dataclass

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
]

LINE_ITEM_CATEGORIES: tuple[str, ...] = (
    "fixed",
    "energy",
    "demand",
    "pf adjustment",
    "ratchet",
    "reactive",
    "leading",
    "tax",
)
_TAX_BASE_CATEGORIES = {
    "all_charges": ("fixed", "energy", "demand", "pf adjustment", "ratchet", "reactive", "leading"),
    "energy_charges": ("energy",),
    "demand_charges": ("demand", "pf adjustment", "ratchet"),
    "reactive_charges": ("reactive", "leading"),
    "fixed_charges": ("fixed",),
    "all_charges_and_earlier_taxes": ("fixed", "energy", "demand", "pf adjustment", "ratchet", "reactive", "leading", "tax"),
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
    billed kW = kW × 0.90 / PF when PF < 0.90, which equals 0.90 × kVA. Checks (REFERENCES §11, worked
    in ``docs/derivations/billing-equivalences.md``): 480 kW at PF 0.82 → 526.8 kW; 800 kW at PF 0.80
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
    below 95 %", as in US public-utility schedules (REFERENCES §11).

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
    month_starts: np.ndarray  # first window of each month (M,)
    identity: bool  # one interval per window (data as coarse as the window or coarser): means are the values


@dataclass(frozen=True, eq=False)
class _Calendar:
    n_steps: int
    interval_h: float
    month_labels: tuple[str, ...]
    month: np.ndarray  # (T,)
    month_starts: np.ndarray  # (M,)
    period: np.ndarray  # (T,)
    season: np.ndarray  # (T,)
    n_periods: int
    cell_order: np.ndarray  # stable argsort of month * K + period
    cell_starts: np.ndarray  # segment starts in the sorted order
    cell_ids: np.ndarray  # cell id of each segment
    steps_in_cell: np.ndarray  # intervals per (month, period) cell (M, K)
    windows: dict[int, _Windows]

    @property
    def n_months(self) -> int:
        return len(self.month_labels)


def _utc_ns(index: pd.DatetimeIndex) -> np.ndarray:
    return index.tz_convert("UTC").tz_localize(None).to_numpy().astype("datetime64[ns]").astype(np.int64)


def _calendar(tariff: Tariff, index: pd.DatetimeIndex, interval_h: float | None) -> _Calendar:
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
    ym = np.asarray(wall.year) * 12 + np.asarray(wall.month) - 1
    month = (ym - ym[0]).astype(np.int64)
    month_starts = np.concatenate(([0], np.nonzero(np.diff(month))[0] + 1))
    if np.any(np.diff(month) < 0):
        raise ValueError("index must be in time order")
    # Months without data in the middle of the series cannot occur in a regular index; renumber anyway.
    uniq, month = np.unique(month, return_inverse=True)
    labels = tuple(f"{(ym[0] + u) // 12:04d}-{(ym[0] + u) % 12 + 1:02d}" for u in uniq)
    period = period_index(tariff, index).astype(np.int64)
    if np.any(period < 0):
        first = index[np.argmax(period < 0)]
        raise ValueError(f"time {first} falls in no time-of-use period of tariff {tariff.name!r}")
    season = _season_of_month(tariff)[np.asarray(wall.month) - 1].astype(np.int64)
    k = len(tariff.period_codes)
    cell = month * k + period
    order = np.argsort(cell, kind="stable")
    sorted_cell = cell[order]
    cell_starts = np.concatenate(([0], np.nonzero(np.diff(sorted_cell))[0] + 1))
    windows = {}
    utc = _utc_ns(index)
    wall_ns = wall.to_numpy().astype("datetime64[ns]").astype(np.int64)
    for minutes in sorted({d.window_min for d in tariff.demand}):
        w = minutes * _NS_PER_MIN
        offset = wall_ns - utc
        key = (wall_ns // w) * w - offset  # window start in UTC, aligned to the local clock
        starts = np.concatenate(([0], np.nonzero(np.diff(key))[0] + 1))
        count = np.diff(np.concatenate((starts, [len(index)])))
        wmonth = month[starts]
        windows[minutes] = _Windows(
            starts=starts,
            count=count,
            month=wmonth,
            period=period[starts],
            season=season[starts],
            month_starts=np.concatenate(([0], np.nonzero(np.diff(wmonth))[0] + 1)),
            identity=len(starts) == len(index),
        )
    steps_in_cell = np.zeros(len(labels) * k, dtype=np.int64)
    np.add.at(steps_in_cell, month * k + period, 1)
    return _Calendar(
        n_steps=len(index),
        interval_h=float(interval_h),
        month_labels=labels,
        month=month,
        month_starts=month_starts,
        period=period,
        season=season,
        n_periods=k,
        cell_order=order,
        cell_starts=cell_starts,
        cell_ids=sorted_cell[cell_starts],
        steps_in_cell=steps_in_cell.reshape(len(labels), k),
        windows=windows,
    )


def _by_month(cal: _Calendar, x: np.ndarray) -> np.ndarray:
    """Sum (S, T) over the intervals of each month → (S, M)."""
    return np.add.reduceat(x, cal.month_starts, axis=1)


def _by_cell(cal: _Calendar, x: np.ndarray) -> np.ndarray:
    """Sum (S, T) over the intervals of each (month, period) cell → (S, M, K)."""
    out = np.zeros((x.shape[0], cal.n_months * cal.n_periods))
    out[:, cal.cell_ids] = np.add.reduceat(x[:, cal.cell_order], cal.cell_starts, axis=1)
    return out.reshape(x.shape[0], cal.n_months, cal.n_periods)


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

    @property
    def amount(self) -> np.ndarray:
        return self.quantity * self.rate


def _allowance_excess(cal, kvarh, kwh, ratio, scope, mask):
    """Excess kVArh per month (S, M) for an allowance netted per interval, period or month."""
    everywhere = bool(mask.all())
    kv = kvarh if everywhere else kvarh * mask
    kw = kwh if everywhere else kwh * mask
    if scope == "interval":
        excess = kw * -ratio
        excess = np.add(excess, kv, out=excess) if excess.shape == np.broadcast_shapes(kv.shape, kw.shape) else excess + kv
        return _by_month(cal, np.maximum(excess, 0.0, out=excess))
    if scope == "period":
        return np.maximum(_by_cell(cal, kv) - ratio * _by_cell(cal, kw), 0.0).sum(axis=2)
    return np.maximum(_by_month(cal, kv) - ratio * _by_month(cal, kw), 0.0)


def _months_with(cal: _Calendar, mask: np.ndarray) -> np.ndarray:
    """(M,) True where some interval of the month is inside the mask."""
    return np.add.reduceat(mask.astype(np.int64), cal.month_starts) > 0


def _window_means(win: _Windows, x: np.ndarray) -> np.ndarray:
    """Means of (R, T) over each demand window → (R, W); the values themselves when windows are intervals."""
    if win.identity:
        return x
    return np.add.reduceat(x, win.starts, axis=1) / win.count


def _at_windows(x: np.ndarray, first: np.ndarray) -> np.ndarray:
    """x[r, first[r, m]] for every row r and month m, broadcasting a single row of x or of first."""
    n_r = max(x.shape[0], first.shape[0])
    first = np.broadcast_to(first, (n_r, first.shape[1]))
    rows = np.arange(n_r)[:, None] if x.shape[0] == n_r else np.zeros((n_r, 1), dtype=np.intp)
    return x[rows, first]


def _demand_items(tariff, cal, d: DemandCharge, p, q, kwh_month, lag_kvarh_month, repeat_year, n_s) -> list[_Item]:
    win = cal.windows[d.window_min]
    n_m = cal.n_months
    p_w = _window_means(win, p)
    q_w = _window_means(win, q) if (d.basis != "kW" or d.power_factor_adjustment is not None) else None
    demand_w = p_w if d.basis == "kW" else np.hypot(p_w, q_w)
    in_scope = _mask(cal, tariff, d.periods, d.seasons, win.period, win.season)
    masked = demand_w if in_scope.all() else np.where(in_scope, demand_w, -np.inf)
    peak = np.maximum.reduceat(masked, win.month_starts, axis=1)
    applies = np.maximum.reduceat(in_scope.astype(np.int8), win.month_starts) > 0
    peak = np.where(applies, np.maximum(peak, 0.0), 0.0)

    adjusted = peak
    a = d.power_factor_adjustment
    if a is not None:
        if a.power_factor_from == "month_average":
            with np.errstate(invalid="ignore", divide="ignore"):
                s = np.hypot(kwh_month, lag_kvarh_month)
                pf = np.where(s > 0.0, kwh_month / np.where(s > 0.0, s, 1.0), 1.0)
        else:
            # PF of the first window of each month that reaches the month's peak (lagging kVAr only).
            n_w = masked.shape[1]
            at_peak = in_scope & (masked >= peak[:, win.month])
            first = np.minimum.reduceat(np.where(at_peak, np.arange(n_w), n_w), win.month_starts, axis=1)
            found = first < n_w
            first = np.minimum(first, n_w - 1)
            pw, qw = _at_windows(p_w, first), np.maximum(_at_windows(q_w, first), 0.0)
            s = np.hypot(pw, qw)
            ok = found & (pw > 0.0)
            pf = np.where(ok, pw / np.where(ok, s, 1.0), 1.0)
        if a.method == "ratio":
            adjusted = pf_adjusted_demand_kw(peak, pf, a.target_power_factor)
        else:
            adjusted = percent_adjusted_demand_kw(peak, pf, a.target_power_factor, a.percent_per_point, a.round_points_up)
        adjusted = np.where(applies, adjusted, 0.0)

    billed = adjusted
    if d.ratchet_frac is not None and d.ratchet_months > 0:
        floor = np.zeros_like(adjusted)
        for lag in range(1, d.ratchet_months + 1):
            if repeat_year:
                floor = np.maximum(floor, np.roll(adjusted, lag, axis=1))
            elif lag < n_m:
                floor[:, lag:] = np.maximum(floor[:, lag:], adjusted[:, :-lag])
        billed = np.where(applies, np.maximum(adjusted, d.ratchet_frac * floor), 0.0)

    unit = d.basis
    rate = np.full(n_m, d.price_per_unit_month)
    no_flag = np.zeros((n_s, n_m), dtype=bool)
    items = [_Item(f"demand:{d.name}", "demand", unit, rate, peak, applies, no_flag)]
    if a is not None:
        items.append(_Item(f"pf adjustment:{d.name}", "pf adjustment", unit, rate, adjusted - peak, applies, no_flag))
    if d.ratchet_frac is not None:
        items.append(_Item(f"ratchet:{d.name}", "ratchet", unit, rate, billed - adjusted, applies, no_flag))
    return items


def _bill_items(tariff: Tariff, cal: _Calendar, p: np.ndarray, q: np.ndarray, repeat_year: bool) -> list[_Item]:
    """Price (S, T) meter arrays; return the line items with (S, M) quantities.

    ``p`` or ``q`` may have a single row that stands for every scenario (e.g. scenarios that change
    only the kVAr): what depends on that quantity alone is then computed once, and an item's quantity
    has one row when it depends on nothing else.
    """
    n_s, n_m = max(p.shape[0], q.shape[0]), cal.n_months
    h = cal.interval_h
    p_imp = np.maximum(p, 0.0)
    kwh = p_imp if h == 1.0 else p_imp * h  # x * 1.0 is x: the hourly case skips a pass
    needs_lag = bool(tariff.reactive) or any(d.power_factor_adjustment is not None for d in tariff.demand)
    lag = None
    if needs_lag:
        lag = np.maximum(q, 0.0)
        if h != 1.0:
            lag *= h
    lead = None
    if tariff.leading:
        lead = np.negative(q)
        np.maximum(lead, 0.0, out=lead)
        if h != 1.0:
            lead *= h
    every_month = np.ones(n_m, dtype=bool)
    no_flag = np.zeros((n_s, n_m), dtype=bool)
    items: list[_Item] = []

    for f in tariff.fixed:
        items.append(_Item(f"fixed:{f.name}", "fixed", "month", np.full(n_m, f.charge_per_month), np.ones((n_s, n_m)), every_month, no_flag))

    if tariff.energy is not None:
        if tariff.energy.basis == "kWh":
            energy = kwh
        else:
            energy = np.hypot(p_imp, q)
            if h != 1.0:
                energy *= h
        cells = _by_cell(cal, energy)
        for k, code in enumerate(tariff.period_codes):
            items.append(
                _Item(
                    f"energy:{code}",
                    "energy",
                    tariff.energy.basis,
                    np.full(n_m, tariff.energy.price(code)),
                    cells[:, :, k],
                    cal.steps_in_cell[:, k] > 0,
                    no_flag,
                )
            )

    if tariff.demand:
        kwh_month = _by_month(cal, kwh)
        lag_month = _by_month(cal, lag) if lag is not None else None
        for d in tariff.demand:
            items.extend(_demand_items(tariff, cal, d, p, q, kwh_month, lag_month, repeat_year, n_s))

    for r in tariff.reactive:
        mask = _mask(cal, tariff, r.periods, r.seasons)
        qty = _allowance_excess(cal, lag, kwh, r.free_kvarh_per_kwh, r.allowance_per, mask)
        items.append(_Item(f"reactive:{r.name}", "reactive", "kVArh", np.full(n_m, r.price_per_kvarh), qty, _months_with(cal, mask), no_flag))

    for r in tariff.leading:
        mask = _mask(cal, tariff, r.periods, r.seasons)
        qty = _allowance_excess(cal, lead, kwh, r.free_kvarh_per_kwh, r.allowance_per, mask)
        flag = (qty > 0.0) if r.banned else no_flag
        items.append(_Item(f"leading:{r.name}", "leading", "kVArh", np.full(n_m, r.price_per_kvarh), qty, _months_with(cal, mask), flag))

    for t in tariff.taxes:
        cats = _TAX_BASE_CATEGORIES[t.base]
        base = np.zeros((n_s, n_m))
        for it in items:
            if it.category in cats:
                base = base + np.where(it.applies, it.amount, 0.0)
        items.append(_Item(f"tax:{t.name}", "tax", tariff.currency, np.full(n_m, t.rate_pct / 100.0), base, every_month, no_flag))
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
    repeat_year: bool = False,
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
    repeat_year : bool
        Treat the series as one typical year repeated, so a ratchet in its first months looks back
        at its last months. Needs exactly 12 billing months.

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
    Q for kVA, S_w = sqrt(P_w² + Q_w²)) over clock-aligned windows; the month's demand is the highest
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
    cal = _calendar(tariff, index, interval_h)
    p = _as_2d(p_kw, cal.n_steps, "p_kw")
    q = _as_2d(q_kvar, cal.n_steps, "q_kvar")
    if p.shape[0] != 1 or q.shape[0] != 1:
        raise ValueError("bill() prices one meter series; use bill_many() for several scenarios")
    _check_repeat(cal, repeat_year)
    items = _bill_items(tariff, cal, p, q, repeat_year)
    rows = []
    for m, label in enumerate(cal.month_labels):
        for it in items:
            if it.applies[m]:
                rows.append((label, it.name, float(it.quantity[0, m]), it.unit, float(it.rate[m]), float(it.amount[0, m]), bool(it.flag[0, m])))
    return pd.DataFrame(rows, columns=["month", "line_item", "quantity", "unit", "rate", "amount", "flag"])


def _check_repeat(cal: _Calendar, repeat_year: bool) -> None:
    if repeat_year and cal.n_months != 12:
        raise ValueError(f"repeat_year needs exactly 12 billing months; the series has {cal.n_months}")


def bill_many(
    tariff: Tariff,
    index: pd.DatetimeIndex,
    p_kw_2d,
    q_kvar_2d,
    *,
    interval_h: float | None = None,
    repeat_year: bool = False,
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
    return _bill_many_on(_calendar(tariff, index, interval_h), tariff, p_kw_2d, q_kvar_2d, repeat_year)


def _bill_many_on(cal: _Calendar, tariff: Tariff, p_kw_2d, q_kvar_2d, repeat_year: bool) -> pd.DataFrame:
    """:func:`bill_many` against a calendar already built (for callers that bill one site block by block)."""
    p = _as_2d(p_kw_2d, cal.n_steps, "p_kw_2d")
    q = _as_2d(q_kvar_2d, cal.n_steps, "q_kvar_2d")
    if p.shape != q.shape:
        raise ValueError(f"p_kw_2d and q_kvar_2d differ in shape: {p.shape} vs {q.shape}")
    _check_repeat(cal, repeat_year)
    return _priced(tariff, cal, _shared_row(p), _shared_row(q), repeat_year, n_rows=p.shape[0])


def _block_totals(tariff: Tariff, cal: _Calendar, p: np.ndarray, q: np.ndarray, repeat_year: bool):
    """Line-item names, amounts summed over months (S, I) [currency] and flagged items (S, I) of one block.

    ``p`` and ``q`` are (S, T) or (1, T) standing for every row (at least one of them has S rows, or both
    one row and S = 1).
    """
    n = max(p.shape[0], q.shape[0])
    items = _bill_items(tariff, cal, p, q, repeat_year)
    names = [it.name for it in items]
    if not items:
        return names, np.zeros((n, 0)), np.zeros((n, 0), dtype=bool)
    amounts = np.stack([np.broadcast_to(np.where(it.applies, it.amount, 0.0).sum(axis=1), (n,)) for it in items], axis=1)
    flagged = np.stack([np.broadcast_to((it.flag & it.applies).any(axis=1), (n,)) for it in items], axis=1)
    return names, amounts, flagged


def _priced(tariff: Tariff, cal: _Calendar, p: np.ndarray, q: np.ndarray, repeat_year: bool, n_rows: int | None = None,
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
