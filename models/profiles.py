"""Putting every asset's load on one analysis year: interval profiles, duty tables and annual hours.

The machines, the site meter and the bill all work on one time axis: a calendar year in the case's time
zone at the finest resolution the case's profiles use (15, 30 or 60 min). An interval profile is
resampled to that resolution (finer data averaged, coarser data held over the interval) and placed on
the year; a profile shorter than a year is repeated, its measured weeks in turn, and intervals it does not
cover otherwise (gaps) take the profile's own mean for the same weekday and time of day. A profile from
another year is moved by whole weeks so weekdays line up, and a year of data that crosses the new year has its part in the other calendar year
moved onto the analysis year by 52 weeks, so every measured interval is used. Assets without interval data are described by load states with hours per year (a duty
table, or annual hours at a mean load) and reach the meter as their expected power in every interval,
which keeps their energy exact but assumes their demand is spread evenly (flagged).
"""

from __future__ import annotations

from dataclasses import dataclass

import numba
import numpy as np
import pandas as pd

#: Analysis year used when the case has no interval profiles.
DEFAULT_YEAR = 2025


@dataclass(frozen=True)
class LoadStates:
    """Load of assets without interval data, as states with hours per year.

    Attributes
    ----------
    shaft_load_frac : numpy.ndarray
        Shaft load of each state [-] (fraction of rating), shape (n_assets, n_states), zero-padded.
    duration_h_per_yr : numpy.ndarray
        Hours per year in each state [h], same shape; padding states have 0 h.
    """

    shaft_load_frac: np.ndarray
    duration_h_per_yr: np.ndarray


def analysis_index(profiles: dict[str, pd.Series], time_zone: str, used: set[str] | None = None) -> pd.DatetimeIndex:
    """Return the analysis year: interval starts over one calendar year in the case zone.

    Parameters
    ----------
    profiles : dict of str -> pandas.Series
        Interval profiles with tz-aware indexes.
    time_zone : str
        IANA zone of the case.
    used : set of str, optional
        Profile ids that matter (referenced by an asset or site); default all.

    Returns
    -------
    pandas.DatetimeIndex
        Start of each interval, tz-aware, from 1 January 00:00 to 31 December, at the finest resolution
        of the used profiles (60 min when there are none); the year is the one most intervals fall in.

    Examples
    --------
    >>> idx = analysis_index({}, "Europe/Berlin")
    >>> len(idx), str(idx[0])
    (8760, '2025-01-01 00:00:00+01:00')
    """
    chosen = [s for k, s in profiles.items() if used is None or k in used]
    if chosen:
        steps = [int(round(_typical_step(s.index.asi8) / _unit_per_minute(s.index))) for s in chosen]
        resolution = min(steps)
        counts: dict[int, int] = {}
        for s in chosen:  # each profile's intervals per calendar year of the case zone, from the years' starts
            for y, n in _intervals_per_year(s.index, time_zone).items():
                counts[y] = counts.get(y, 0) + n
        year = max(sorted(counts), key=lambda y: counts[y])  # (the earliest of equal counts, as numpy.unique's order)
    else:
        resolution, year = 60, DEFAULT_YEAR
    start = pd.Timestamp(year=year, month=1, day=1, tz=time_zone)
    end = pd.Timestamp(year=year + 1, month=1, day=1, tz=time_zone)
    return pd.date_range(start, end, freq=f"{resolution}min", inclusive="left")


def _typical_step(stamps: np.ndarray) -> float:
    """The median step between sorted stamps [their unit]; the step itself when all are equal (no sort)."""
    steps = np.diff(stamps)
    if len(steps) and steps.min() == steps.max():
        return float(steps[0])
    return float(np.median(steps))


def _intervals_per_year(index: pd.DatetimeIndex, time_zone: str) -> dict[int, int]:
    """Stamps of a sorted tz-aware index in each calendar year of ``time_zone`` (the years it spans), counted
    between the years' starts: two look-ups per year instead of a year per stamp."""
    if not len(index):
        return {}
    if not index.is_monotonic_increasing:  # (a profile built by hand, out of order: a year per stamp)
        years, counts = np.unique(index.tz_convert(time_zone).year.to_numpy(), return_counts=True)
        return {int(y): int(n) for y, n in zip(years, counts)}
    first, last = index[0].tz_convert(time_zone).year, index[-1].tz_convert(time_zone).year
    starts = pd.DatetimeIndex([pd.Timestamp(year=y, month=1, day=1, tz=time_zone) for y in range(first, last + 2)])
    cuts = np.searchsorted(index.asi8, starts.as_unit(index.unit).asi8)
    return {y: int(n) for y, n in zip(range(first, last + 1), np.diff(cuts)) if n}


def _unit_per_minute(index: pd.DatetimeIndex) -> float:
    unit = getattr(index, "unit", "ns")
    return {"ns": 60e9, "us": 60e6, "ms": 60e3, "s": 60.0}[unit]


def conform(series: pd.Series, index: pd.DatetimeIndex) -> tuple[np.ndarray, float]:
    """Place one interval profile on the analysis index.

    Parameters
    ----------
    series : pandas.Series
        Mean values per interval (tz-aware index of interval starts).
    index : pandas.DatetimeIndex
        Analysis index (regular, tz-aware).

    Returns
    -------
    values : numpy.ndarray
        Values on ``index``.
    filled_frac : float
        Share of the analysis intervals filled [-]: by the profile's measured weeks in turn where it is shorter
        than a year, else (a gap) by the mean of the same weekday and time of day.

    Notes
    -----
    Finer data are averaged into each analysis interval; coarser data are held over their interval
    (a mean power is constant over it). A profile centred on another year is moved by whole weeks
    (52-week steps, 364 days) to the analysis year so that weekdays line up, and its intervals still
    outside that calendar year (a year of data from July to June) are moved onto it by 52-week steps too,
    never over an interval measured in it. The profile's own step is the
    median of its steps: a profile keeps one resolution, and :func:`models.case.resolution_changes` is
    how reading a case refuses one that changes part way (hourly, then 15-min), which would be read here
    at its majority step with the rest taken for missing intervals.

    Examples
    --------
    >>> idx = pd.date_range("2025-01-06", periods=4, freq="30min", tz="UTC")
    >>> s = pd.Series([1.0, 3.0], index=pd.date_range("2025-01-06", periods=2, freq="h", tz="UTC"))
    >>> conform(s, idx)[0].tolist()
    [1.0, 1.0, 3.0, 3.0]
    """
    zone = index.tz
    own_index = series.index
    if (len(own_index) == len(index) and len(index) and own_index.tz is not None
            and getattr(own_index, "unit", "ns") == getattr(index, "unit", "ns")
            and np.array_equal(own_index.asi8, index.asi8)):  # the same instants (asi8 counts from UTC)
        # already on the analysis index (the common case of a year of data at the analysis step)
        values = series.to_numpy(dtype=float).copy()
        missing = np.isnan(values)
        if not missing.any():
            return values, 0.0
    s = series.copy()
    s.index = s.index.tz_convert(zone)
    step_min = (index[1] - index[0]).total_seconds() / 60 if len(index) > 1 else 60.0
    target_year = index[0].year
    mid = s.index[len(s) // 2]
    year_shift = target_year - mid.year
    if year_shift:
        moved = _moved_by_weeks(s.index, np.full(len(s), 52 * year_shift, dtype=np.int64))
        s = pd.Series(s.to_numpy(), index=moved, name=s.name)
        s = s[~s.index.isna()]
        s = s[~s.index.duplicated(keep="first")]
    own_step = np.median(np.diff(s.index.asi8)) / _unit_per_minute(s.index)
    if own_step < step_min - 1e-9:
        s = s.resample(f"{int(step_min)}min").mean()
    elif own_step > step_min + 1e-9:
        fine = pd.date_range(s.index[0], s.index[-1] + pd.Timedelta(minutes=own_step - step_min), freq=f"{int(step_min)}min")
        s = s.reindex(fine, method="ffill", limit=int(round(own_step / step_min)) - 1)
    measured = s.dropna()  # (as measured, before a part in another calendar year is moved onto this one)
    s = _wrapped_onto(s, index)
    values = s.reindex(index).to_numpy(dtype=float).copy()
    missing = np.isnan(values)
    if missing.any():
        own = s.dropna()
        at_missing = index[missing]
        # a profile shorter than a year: its measured weeks in turn outside the span measured; what they do not give
        # (a gap inside the span, a profile of less than a week): the mean of the same weekday and time of day
        fill = _repeated_weeks(measured, at_missing)
        left = np.isnan(fill)
        if left.any():
            at = at_missing[left]
            slot = at.day_of_week.to_numpy() * 1440 + at.hour.to_numpy() * 60 + at.minute.to_numpy()
            own_slot = own.index.day_of_week.to_numpy() * 1440 + own.index.hour.to_numpy() * 60 + own.index.minute.to_numpy()
            table = pd.Series(own.to_numpy(dtype=float)).groupby(own_slot).mean()
            by_slot = table.reindex(slot).to_numpy()
            fill[left] = np.where(np.isnan(by_slot), float(own.mean()) if len(own) else 0.0, by_slot)
        values[missing] = fill
    return values, float(missing.mean())


#: A profile measured over this many whole weeks or more is a year: its gaps are filled by weekday and time of day,
#: not by repeating its weeks.
YEAR_WEEKS = 52


def _repeated_weeks(own: pd.Series, times: pd.DatetimeIndex) -> np.ndarray:
    """The values at ``times`` of a profile shorter than a year repeated: its whole measured weeks in turn.

    Parameters
    ----------
    own : pandas.Series
        The profile's measured values on the analysis step (tz-aware index in the analysis zone, increasing).
    times : pandas.DatetimeIndex
        Intervals to fill (the analysis year's, outside or inside the measured span).

    Returns
    -------
    numpy.ndarray
        At each time outside the span measured (its first interval to its last), the value measured k whole
        periods of n weeks away by the local clock, where n is the number of whole weeks the profile spans, a day
        short counting as a week (a blank first or last reading does not drop a week; so every time lands on the
        same weekday and clock time, within the first n weeks measured); NaN inside the span (a gap there is a
        gap), where that interval was not measured, and where the profile spans less than a week or a year
        (:data:`YEAR_WEEKS` weeks) or more.

    Notes
    -----
    A short logging campaign extended so keeps its measured peaks in every month filled: a month holds the
    weeks measured, as a month of the real year holds weeks like them. The mean of each weekday and time of day
    over the weeks measured (the fill of a gap) would flatten those peaks and understate the demand charges a
    motor sets, and their savings; energy is the same either way over whole repeats.

    Examples
    --------
    >>> idx = pd.date_range("2025-03-03", periods=14 * 24, freq="h", tz="UTC")  # two weeks from a Monday
    >>> own = pd.Series(np.where(np.arange(len(idx)) < 168, 1.0, 2.0), index=idx)
    >>> at = pd.DatetimeIndex(["2025-03-17 05:00", "2025-03-24 05:00", "2025-02-24 05:00"]).tz_localize("UTC")
    >>> _repeated_weeks(own, at).tolist()  # two weeks on: the first week; three: the second; one before: the second
    [1.0, 2.0, 2.0]
    """
    out = np.full(len(times), np.nan)
    if len(own) < 2 or not len(times):
        return out

    def wall_ns(t: pd.DatetimeIndex) -> np.ndarray:
        return (t.tz_localize(None) if t.tz is not None else t).as_unit("ns").asi8

    measured = wall_ns(own.index)
    step_ns = int(np.median(np.diff(measured)))
    day_ns = 86_400 * 10**9
    week_ns = 7 * day_ns
    weeks = int((measured[-1] - measured[0] + step_ns + day_ns) // week_ns)
    if weeks < 1 or weeks >= YEAR_WEEKS:
        return out
    period_ns = weeks * week_ns
    at = wall_ns(times)
    outside = (at < measured[0]) | (at > measured[-1])
    source = measured[0] + np.mod(at[outside] - measured[0], period_ns)
    values = pd.Series(own.to_numpy(dtype=float), index=measured)
    values = values[~values.index.duplicated(keep="first")]  # (a repeated autumn hour: its first reading)
    out[outside] = values.reindex(source).to_numpy(dtype=float)
    return out


#: The step by which intervals outside the analysis year are moved onto it: 52 weeks, so weekdays line up.
_YEAR_STEP = pd.Timedelta(days=364)


def _moved_by_weeks(times: pd.DatetimeIndex, weeks: np.ndarray) -> pd.DatetimeIndex:
    """Each of ``times`` moved by ``weeks[i]`` whole weeks of its zone's clock: the same weekday and clock time.

    A move by absolute time would land an hour off in the week between two years' clock changes (the last
    Sunday of March 2023 and of 2024 are a week apart). A clock time that does not exist on the day it lands
    on (the hour skipped when the clocks go forward) is NaT; one that occurs twice (the hour repeated when they
    go back) lands on one of its two occurrences, the other being left for the caller to treat as missing.

    Examples
    --------
    >>> t = pd.DatetimeIndex(["2023-03-27 08:00"]).tz_localize("Europe/Berlin")
    >>> str(_moved_by_weeks(t, np.array([52]))[0])
    '2024-03-25 08:00:00+01:00'
    """
    shift = pd.to_timedelta(np.asarray(weeks, dtype=np.int64) * 7, unit="D")
    moved = times + shift  # by absolute time: by the clock too, but where the two years' clock changes differ
    if times.tz is None:
        return moved
    wall = times.tz_localize(None) + shift
    off = np.asarray(moved.tz_localize(None) != wall)
    if not off.any():
        return moved
    # only the times an hour off are placed again by the clock (placing all of them is twice as slow)
    fixed = wall[off].tz_localize(times.tz, ambiguous=np.ones(int(off.sum()), dtype=bool), nonexistent="NaT")
    instants = moved.asi8.copy()
    instants[off] = fixed.as_unit(moved.unit).asi8  # (NaT is the smallest int64, as numpy's NaT)
    return pd.DatetimeIndex(instants.view(f"M8[{moved.unit}]")).tz_localize("UTC").tz_convert(times.tz)


def _wrapped_onto(s: pd.Series, index: pd.DatetimeIndex) -> pd.Series:
    """Move the intervals of ``s`` outside the calendar year of ``index`` onto it by whole 52-week steps.

    A year of data that crosses the new year (July to June, a utility's last twelve months) keeps every
    measured interval: its part in the other calendar year lands on the same weekday and time of day of
    the analysis year. An interval measured inside the year is never replaced by a moved one, and of two
    moved onto one interval the earlier measured is kept; the day or two of the year neither covers (two
    in a leap year) are left missing (filled from the typical week by :func:`conform`). A profile longer
    than a year (366.5 days and an interval) is not moved: of it the analysis year alone is used.

    Parameters
    ----------
    s : pandas.Series
        A profile on the analysis step (tz-aware index of interval starts, increasing); blank values are
        dropped.
    index : pandas.DatetimeIndex
        The analysis index (one calendar year, regular).

    Returns
    -------
    pandas.Series
        The profile's intervals inside the year of ``index``, sorted, unique, with those moved onto it (a
        profile longer than a year: as given, its blank values dropped).
    """
    s = s.dropna()  # (a gap in the year is a gap, whichever resolution the profile was brought to)
    if not len(index) or not len(s):
        return s
    step = np.median(np.diff(s.index.asi8)) / _unit_per_minute(s.index) if len(s) > 1 else 60.0
    if (s.index[-1] - s.index[0]) > pd.Timedelta(days=366.5) + pd.Timedelta(minutes=float(step)):
        return s  # a profile longer than a year: the analysis year alone is used, its gaps filled as gaps are
    start = index[0]
    end = index[-1] + (index[-1] - index[-2] if len(index) > 1 else pd.Timedelta(hours=1))
    t = s.index
    before, after = t < start, t >= end
    if not (before.any() or after.any()):
        return s
    step_ns = _YEAR_STEP.value
    offset_ns = t.asi8 * (1_000_000_000 // int(round(_unit_per_minute(t) / 60)))  # instants in ns
    k = np.zeros(len(t), dtype=np.int64)
    k[before] = -((offset_ns[before] - start.value) // step_ns)  # steps forward, the least that reaches the year
    k[after] = -((offset_ns[after] - end.value) // step_ns + 1)  # steps back
    moved_index = _moved_by_weeks(t, 52 * k)  # (k steps of 52 weeks, by the clock)
    inside = ~moved_index.isna() & (moved_index >= start) & (moved_index < end)
    kept = pd.Series(s.to_numpy()[~(before | after)], index=t[~(before | after)])
    moved = pd.Series(s.to_numpy()[(before | after) & inside], index=moved_index[(before | after) & inside])
    moved = moved[~moved.index.duplicated(keep="first")]
    moved = moved[~moved.index.isin(kept.index)]
    return pd.concat([kept, moved]).sort_index()


def asset_loads(case, index: pd.DatetimeIndex) -> tuple[np.ndarray, np.ndarray, np.ndarray, LoadStates, pd.DataFrame]:
    """Split a case's assets into interval-profile assets and load-state assets, on the analysis index.

    Parameters
    ----------
    case : models.case.Case
        A validated case.
    index : pandas.DatetimeIndex
        Analysis index from :func:`analysis_index`.

    Returns
    -------
    interval_rows : numpy.ndarray of int
        Positions (in ``case.assets``) of assets with an interval profile.
    interval_values : numpy.ndarray
        Their profile values on the index, shape (n_interval, n_steps): shaft load [-] (fraction of
        rating) or measured input [kW], see ``interval_is_input_kw``.
    interval_is_input_kw : numpy.ndarray of bool
        True where the profile is measured input kW (to be turned into shaft load by the existing motor's model).
    states : LoadStates
        Load states of every asset (zero hours for interval-profile assets), shape (n_assets, n_states).
    notes : pandas.DataFrame
        asset_id, note: data-quality notes (filled intervals, uniform demand assumption).
    """
    a = case.assets
    profile_id = a["profile_id"].to_numpy(dtype=object)
    is_interval = np.array([p is not None and p in case.profiles for p in profile_id], dtype=bool)
    interval_rows = np.flatnonzero(is_interval)
    values = np.empty((len(interval_rows), len(index)))  # every row is written below
    is_input = np.zeros(len(interval_rows), dtype=bool)
    notes: list[dict] = []
    cache: dict[str, tuple[np.ndarray, float, bool]] = {}
    for k, row in enumerate(interval_rows):
        pid = profile_id[row]
        if pid not in cache:
            cache[pid] = conform(case.profiles[pid], index) + (case.profiles[pid].name == "input_kw",)
        v, filled, as_input = cache[pid]
        is_input[k] = as_input
        if as_input:
            values[k] = v
        else:
            np.divide(v, 100.0, out=values[k])
        if filled > 0.001:
            notes.append({"asset_id": a["asset_id"].iloc[row],
                          "note": f"{100 * filled:.1f} % of the year filled (by the profile's measured weeks repeated, "
                                  "or by its mean of the same weekday and time of day)"})
    # load states for the others
    duty = case.duty
    n_states = max([1] + [int((duty["profile_id"] == p).sum()) for p in set(duty["profile_id"].dropna())])
    load = np.zeros((len(a), n_states))
    hours = np.zeros((len(a), n_states))
    state_rows = np.flatnonzero(~is_interval)
    if len(state_rows):
        # each duty table once (rows in file order), the register's columns as arrays
        tables = {pid: (t["shaft_load_pct"].to_numpy(dtype=float) / 100.0, t["duration_h_per_yr"].to_numpy(dtype=float))
                  for pid, t in duty.groupby("profile_id", sort=False)}
        mean_load = a["mean_load_pct"].to_numpy(dtype=float, na_value=np.nan)
        hours_per_yr = a["operating_h_per_yr"].to_numpy(dtype=float, na_value=np.nan)
        asset_ids = a["asset_id"].to_numpy(dtype=object)
    for row in state_rows:
        pid = profile_id[row]
        if pid is not None and pid in tables:
            shares, durations = tables[pid]
            m = len(shares)
            load[row, :m] = shares
            hours[row, :m] = durations
        else:
            load[row, 0] = mean_load[row] / 100.0
            hours[row, 0] = hours_per_yr[row]
        notes.append({"asset_id": asset_ids[row],
                      "note": "no interval data: its demand is spread evenly over the year at the meter"})
    return interval_rows, values, is_input, LoadStates(load, hours), pd.DataFrame(notes, columns=["asset_id", "note"])


#: The int64 value of a missing timestamp (NaT).
_NAT_I8 = np.iinfo(np.int64).min


@numba.njit(cache=True, nogil=True)
def _segment_stats(bounds, stamps, values):  # pragma: no cover - compiled
    n_seg = len(bounds) - 1
    finite = np.zeros(n_seg, dtype=np.int64)
    low = np.full(n_seg, np.inf)
    high = np.full(n_seg, -np.inf)
    step_low = np.full(n_seg, np.iinfo(np.int64).max, dtype=np.int64)
    step_high = np.full(n_seg, np.iinfo(np.int64).min, dtype=np.int64)
    all_stamped = np.ones(n_seg, dtype=np.bool_)
    for k in range(n_seg):
        for i in range(bounds[k], bounds[k + 1]):
            if stamps[i] == _NAT_I8:
                all_stamped[k] = False
            elif i > bounds[k] and stamps[i - 1] != _NAT_I8:
                d = stamps[i] - stamps[i - 1]
                if d < step_low[k]:
                    step_low[k] = d
                if d > step_high[k]:
                    step_high[k] = d
            x = values[i]
            if np.isfinite(x):
                finite[k] += 1
                if x < low[k]:
                    low[k] = x
                if x > high[k]:
                    high[k] = x
    return finite, low, high, step_low, step_high, all_stamped


def segment_stats(bounds: np.ndarray, stamps_us: np.ndarray, values: np.ndarray) -> dict[str, np.ndarray]:
    """Per-profile figures of a long profile table whose rows are grouped by profile, in one pass.

    Parameters
    ----------
    bounds : numpy.ndarray of int, shape (n_profiles + 1,)
        Profile k holds rows ``bounds[k]:bounds[k + 1]``.
    stamps_us : numpy.ndarray of int64, shape (n_rows,)
        Interval starts [microseconds since 1970 UTC], NaT as the int64 minimum.
    values : numpy.ndarray, shape (n_rows,)
        A value column (NaN where blank).

    Returns
    -------
    dict
        ``finite`` (n_profiles,): finite values; ``low``, ``high``: their least and greatest (+inf, -inf
        without any); ``step_low``, ``step_high``: the least and greatest step between consecutive stamps in
        row order [us] (int64 max and min with fewer than two stamps); ``all_stamped``: no missing stamp. A
        profile whose steps are all equal and positive is in time order, without repeats or gaps, every stamp
        on one grid.

    Examples
    --------
    >>> s = segment_stats(np.array([0, 3, 5]), np.array([0, 60, 120, 0, 30], dtype=np.int64),
    ...                   np.array([1.0, np.nan, 3.0, 5.0, 4.0]))
    >>> s["finite"].tolist(), s["high"].tolist(), s["step_low"].tolist(), s["step_high"].tolist()
    ([2, 2], [3.0, 5.0], [60, 30], [60, 30])
    """
    finite, low, high, step_low, step_high, all_stamped = _segment_stats(
        np.ascontiguousarray(bounds, dtype=np.int64), np.ascontiguousarray(stamps_us, dtype=np.int64),
        np.ascontiguousarray(values, dtype=np.float64))
    return {"finite": finite, "low": low, "high": high, "step_low": step_low, "step_high": step_high,
            "all_stamped": all_stamped}
