"""Electricity tariffs: the data model, reading one from a parsed TOML table, validation, time-of-use periods.

Scope: a tariff is a frozen :class:`Tariff` built from the plain dict that ``tomllib`` returns for a
tariff file (reading the file is the job of ``models.io``). It covers fixed monthly charges; energy
charges per kWh or per kVAh by time-of-use period (seasons of months × day types × clock windows,
including windows across midnight and public holidays); demand charges on kW or kVA over 15/30/60-minute
windows, optionally limited to some periods, with a ratchet and a power-factor adjustment; charges for
lagging kVArh above a free allowance; charges or bans on leading kVArh; kVAr demand above a share of the kW
demand; a percentage of the energy charges by bands of the month's power factor; and taxes as percentages of
a documented base. The file format, every key, its unit and default are documented in
``docs/tariffs.md``. :func:`tariff_from_dict` never stops at the first problem: it returns every
:class:`~models.problems.Problem` found, each naming the file and the key path (``periods[2].hours``,
entries counted from 1). :func:`assign_periods` maps a tz-aware time index to period codes. The bill
itself is computed in ``models.billing``.
"""

from __future__ import annotations

import datetime as dt
import difflib
import functools
import math
import re
from dataclasses import dataclass, field
from typing import Literal

import numpy as np
import pandas as pd

from models.problems import Problem, error, fixed_offset_hint, shown_value, warning
from models.site import tan_phi_from_power_factor
from models.wording import MONTH_NAMES

__all__ = [
    "DAY_TYPES",
    "DemandCharge",
    "EnergyCharge",
    "EnergyPowerFactorClause",
    "FixedCharge",
    "HourWindow",
    "LeadingCharge",
    "NEAR_MISS_CUTOFF",
    "PeriodRule",
    "PowerFactorAdjustment",
    "PowerFactorBand",
    "ReactivePriceBand",
    "ReactiveCharge",
    "ReactiveDemandCharge",
    "Season",
    "Tariff",
    "Tax",
    "TAX_BASES",
    "assign_periods",
    "assign_seasons",
    "check_tariff",
    "day_types",
    "near_misses",
    "period_index",
    "tariff_from_dict",
]

DayType = Literal["weekday", "saturday", "sunday", "holiday"]
DAY_TYPES: tuple[str, ...] = ("weekday", "saturday", "sunday", "holiday")
TAX_BASES: tuple[str, ...] = (
    "all_charges",
    "energy_charges",
    "demand_charges",
    "reactive_charges",
    "fixed_charges",
    "all_charges_and_earlier_taxes",
)
ALLOWANCE_SCOPES: tuple[str, ...] = ("interval", "period", "month")
DEMAND_WINDOWS_MIN: tuple[int, ...] = (15, 30, 60)
MINUTES_PER_DAY = 1440
_MAX_RATCHET_MONTHS = 36


# --------------------------------------------------------------------------------------------------
# Data model (layer 2: frozen parameter sets)
# --------------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class Season:
    """A named set of calendar months.

    Parameters
    ----------
    name : str
        Season name, referenced by period rules and clauses.
    months : tuple of int
        Calendar months 1-12 in this season.
    """

    name: str
    months: tuple[int, ...]


@dataclass(frozen=True)
class HourWindow:
    """A clock-time window within a day, start included, end excluded.

    Parameters
    ----------
    start_min : int
        Start, minutes after midnight [min], 0-1439.
    end_min : int
        End, minutes after midnight [min], 0-1440. An end at or before the start means the window
        crosses midnight: ``22:00-06:00`` covers 22:00-24:00 and 00:00-06:00 of the same day type.
    """

    start_min: int
    end_min: int

    @property
    def crosses_midnight(self) -> bool:
        """True when the window wraps past 24:00."""
        return self.end_min <= self.start_min

    def mask(self) -> np.ndarray:
        """Return a boolean array over the 1440 minutes of a day, True inside the window."""
        minute = np.arange(MINUTES_PER_DAY)
        if self.crosses_midnight:
            return (minute >= self.start_min) | (minute < self.end_min)
        return (minute >= self.start_min) & (minute < self.end_min)

    def __str__(self) -> str:
        return f"{_hhmm(self.start_min)}-{_hhmm(self.end_min)}"


@dataclass(frozen=True)
class PeriodRule:
    """One rule mapping seasons × day types × clock windows to a time-of-use period code.

    Parameters
    ----------
    code : str
        Period code (e.g. ``"peak"``). Several rules may share a code.
    seasons : tuple of str
        Season names the rule applies in.
    day_types : tuple of str
        Day types, from ``DAY_TYPES``.
    windows : tuple of HourWindow
        Clock windows; their union is the rule's time of day.
    """

    code: str
    seasons: tuple[str, ...]
    day_types: tuple[str, ...]
    windows: tuple[HourWindow, ...]

    def minute_mask(self) -> np.ndarray:
        """Return the union of the windows as a boolean array over the minutes of a day."""
        mask = np.zeros(MINUTES_PER_DAY, dtype=bool)
        for w in self.windows:
            mask |= w.mask()
        return mask


@dataclass(frozen=True)
class EnergyCharge:
    """Energy prices by period, per kWh or per kVAh.

    Parameters
    ----------
    basis : {"kWh", "kVAh"}
        Billed energy quantity. kVAh per interval is sqrt(kWh² + kVArh²).
    prices : tuple of (str, float)
        (period code, price per unit of ``basis``) pairs [currency/kWh or currency/kVAh].
    """

    basis: Literal["kWh", "kVAh"]
    prices: tuple[tuple[str, float], ...]

    def price(self, code: str) -> float:
        """Return the price of a period [currency per unit of ``basis``]."""
        return dict(self.prices)[code]


@dataclass(frozen=True)
class PowerFactorAdjustment:
    """Raising a kW billing demand for a low power factor.

    Parameters
    ----------
    method : {"ratio", "percent_per_point"}
        ``ratio``: billed = kW × target / PF when PF < target. ``percent_per_point``: billed = kW ×
        (1 + percent_per_point/100 × points), points = (target − PF) / 0.01.
    target_power_factor : float
        Power factor below which the adjustment applies [-], in (0, 1].
    percent_per_point : float
        Increase per 0.01 of power factor below target [%], in (0, 100]; ``percent_per_point`` only.
    round_points_up : bool
        Count a part of a point as a whole point ("or fraction thereof"); ``percent_per_point`` only.
    power_factor_from : {"month_average", "peak_window"}
        The PF used: the month's average lagging PF (from kWh and lagging kVArh) or the PF of the
        demand window that set the month's maximum.
    """

    method: Literal["ratio", "percent_per_point"]
    target_power_factor: float
    percent_per_point: float = 1.0
    round_points_up: bool = False
    power_factor_from: Literal["month_average", "peak_window"] = "month_average"


@dataclass(frozen=True)
class DemandCharge:
    """A charge on the month's highest windowed demand, in kW or kVA.

    Parameters
    ----------
    name : str
        Label; line items are ``demand:<name>``, ``pf adjustment:<name>``, ``ratchet:<name>``.
    basis : {"kW", "kVA"}
        Demand quantity.
    price_per_unit_month : float
        Price [currency per kW per month or per kVA per month].
    window_min : int
        Demand window [min]: 15, 30 or 60. Finer interval data are averaged to the window.
    periods : tuple of str or None
        Only windows starting in these periods count (a rolling window: ending in them); None = all.
    seasons : tuple of str or None
        Only windows in these seasons count (the charge is zero in other months); None = all.
    ratchet_frac : float or None
        Share of the highest demand of the previous ``ratchet_months`` months that is billed at least
        [-], in (0, 1]; None = no ratchet.
    ratchet_months : int
        Look-back of the ratchet [months], 1-36.
    power_factor_adjustment : PowerFactorAdjustment or None
        Adjustment of a kW demand for low power factor.
    contracted : float or None
        Capacity booked in the supply contract [kW or kVA, the charge's basis], > 0; None = none. With a
        contract the charge bills the contracted capacity every month it is in force (line item
        ``demand:<name>``, whatever the demand) and the month's demand above it at
        ``excess_price_per_unit_month`` (``excess:<name>``). Not combined with a ratchet or a
        power-factor adjustment.
    excess_price_per_unit_month : float or None
        Price of each kW (kVA) of the month's demand above the contract [currency per unit per month];
        None = ``price_per_unit_month`` (the greater of the contract and the demand is billed).
    rolling : bool
        False: block demand, windows aligned to the local clock (a 15-minute window starts on the quarter
        hour). True: rolling (sliding) demand, a window ending at every interval of data finer than the
        window, counted in the month, period and season of its last interval; on data as coarse as the
        window or coarser the two are the same.
    """

    name: str
    basis: Literal["kW", "kVA"]
    price_per_unit_month: float
    window_min: int = 15
    periods: tuple[str, ...] | None = None
    seasons: tuple[str, ...] | None = None
    ratchet_frac: float | None = None
    ratchet_months: int = 0
    power_factor_adjustment: PowerFactorAdjustment | None = None
    contracted: float | None = None
    excess_price_per_unit_month: float | None = None
    rolling: bool = False

    @property
    def excess_price(self) -> float:
        """Price of the demand above the contract [currency per unit per month]."""
        return self.price_per_unit_month if self.excess_price_per_unit_month is None else self.excess_price_per_unit_month


@dataclass(frozen=True)
class ReactivePriceBand:
    """A price of excess kVArh for a power factor below an edge.

    Parameters
    ----------
    below_power_factor : float
        The band's edge [-], in (0, 1]: the band prices the excess of a month (or of a period of a month) whose
        power factor is below it.
    price_per_kvarh : float
        Price of each excess kVArh of such a month or period [currency/kVArh], >= 0.
    """

    below_power_factor: float
    price_per_kvarh: float


@dataclass(frozen=True)
class ReactiveCharge:
    """A charge on lagging kVArh above a free allowance proportional to kWh.

    Parameters
    ----------
    name : str
        Label; the line item is ``reactive:<name>``.
    price_per_kvarh : float
        Price of each excess kVArh [currency/kVArh].
    free_kvarh_per_kwh : float
        Free lagging kVArh per kWh imported [-] (= tan φ threshold), >= 0.
    allowance_per : {"interval", "period", "month"}
        Where the allowance is netted: in each interval, per period per month, or over the month.
    periods, seasons : tuple of str or None
        Limit the charge to these periods / seasons; None = all.
    price_bands : tuple of ReactivePriceBand
        Prices by power factor (``allowance_per`` ``period`` or ``month``): the whole excess of a netting unit
        (a period of a month, or a month) whose power factor kWh / sqrt(kWh² + kVArh²) is below a band's edge
        is priced at that band's price, the band of the lowest such edge; a unit below no edge takes
        ``price_per_kvarh``. Each band's excess is a line item of its own, ``reactive:<name> (power factor
        below <edge>)``. Empty (default): one price.
    power_factor_decimals : int or None
        The decimals the bill rounds a unit's power factor to before it is set against the bands' edges (half
        up: 0.8996 is 0.90 at 2 decimals, so not below 0.90); None (default): compared as computed.
    """

    name: str
    price_per_kvarh: float
    free_kvarh_per_kwh: float
    allowance_per: Literal["interval", "period", "month"] = "month"
    periods: tuple[str, ...] | None = None
    seasons: tuple[str, ...] | None = None
    price_bands: tuple[ReactivePriceBand, ...] = ()
    power_factor_decimals: int | None = None


@dataclass(frozen=True)
class LeadingCharge:
    """A charge on, or a ban of, leading (capacitive) kVArh.

    Parameters
    ----------
    name : str
        Label; the line item is ``leading:<name>``.
    price_per_kvarh : float
        Price of each leading kVArh above the allowance [currency/kVArh], >= 0.
    free_kvarh_per_kwh : float
        Free leading kVArh per kWh imported [-], >= 0.
    banned : bool
        Leading kVArh above the allowance is not allowed: the line item is flagged.
    allowance_per : {"interval", "period", "month"}
        Where the allowance is netted.
    periods, seasons : tuple of str or None
        Limit the clause to these periods / seasons; None = all.
    """

    name: str
    price_per_kvarh: float = 0.0
    free_kvarh_per_kwh: float = 0.0
    banned: bool = False
    allowance_per: Literal["interval", "period", "month"] = "month"
    periods: tuple[str, ...] | None = None
    seasons: tuple[str, ...] | None = None


@dataclass(frozen=True)
class ReactiveDemandCharge:
    """A charge on the month's highest lagging kVAr demand above an allowance proportional to its kW demand.

    Parameters
    ----------
    name : str
        Label; the line item is ``reactive demand:<name>``.
    price_per_kvar_month : float
        Price of each kVAr of billed reactive demand [currency per kVAr per month].
    free_kvar_per_kw : float
        Free kVAr of reactive demand per kW of the month's kW demand [-] (= tan φ threshold), >= 0.
    window_min : int
        Demand window [min]: 15, 30 or 60, as a demand charge's.
    rolling : bool
        Rolling (sliding) windows, as a demand charge's.
    periods, seasons : tuple of str or None
        Only windows in these periods / seasons count, for the kVAr and the kW demand alike; None = all.

    Notes
    -----
    The month's kVAr demand is its highest window mean of the lagging kVAr (an interval's leading kVAr counted
    as zero, as a lagging register reads it), 0 when every window leads; its kW demand the highest window mean
    of the kW, in the same windows. Billed kVAr = max(kVAr
    demand − ``free_kvar_per_kw`` × kW demand, 0). The two maxima may fall in different windows, as the
    utilities' meters record them.
    """

    name: str
    price_per_kvar_month: float
    free_kvar_per_kw: float = 0.0
    window_min: int = 15
    rolling: bool = False
    periods: tuple[str, ...] | None = None
    seasons: tuple[str, ...] | None = None


@dataclass(frozen=True)
class PowerFactorBand:
    """One band of an energy charge's power-factor clause.

    Parameters
    ----------
    power_factor : float
        The band's edge [-], in (0, 1]: a penalty band counts the points below it, a rebate band those above it.
    percent_per_point : float
        Percent of the clause's base (the month's energy charges, or all its charges) per 0.01 of power factor
        inside the band [%], in (0, 100].
    """

    power_factor: float
    percent_per_point: float


@dataclass(frozen=True)
class EnergyPowerFactorClause:
    """A percentage added to (or taken off) the month's energy charges (or all its charges) for its average
    power factor.

    Parameters
    ----------
    name : str
        Label; the line item is ``pf energy:<name>``.
    penalties : tuple of PowerFactorBand
        Bands of surcharge below their edges. A band counts the points from its edge down to the next lower
        edge (the lowest band down to 0), so 0.5 % per point below 0.95 and 1 % per point below 0.90 bill a
        month at 0.87 PF 5 x 0.5 % + 3 x 1 % = 5.5 %.
    rebates : tuple of PowerFactorBand
        Bands of rebate above their edges, counted likewise upwards (the highest band up to 1).
    round_points : {"none", "down", "up"}
        How the points away from the nearest edge are counted: as they are, whole points only ("for every
        full 0.01"), or a part of a point as a whole one ("or part thereof").
    count_leading : bool
        False: the month's PF is kWh / sqrt(kWh² + lagging kVArh²) (leading kVArh does not count). True:
        lagging and leading kVArh are added, as where a leading power factor is penalised as a lagging one.
    rebate_when_leading : bool
        False: a month whose leading kVArh exceed its lagging kVArh (a leading month) earns no rebate, as
        where no incentive is given for a leading power factor.
    base : {"energy_charges", "all_charges"}
        What the percentage is of: the month's energy charges, or all its charges before taxes (fixed,
        energy, demand, reactive).
    """

    name: str
    penalties: tuple[PowerFactorBand, ...] = ()
    rebates: tuple[PowerFactorBand, ...] = ()
    round_points: Literal["none", "down", "up"] = "none"
    count_leading: bool = False
    rebate_when_leading: bool = True
    base: Literal["energy_charges", "all_charges"] = "energy_charges"


@dataclass(frozen=True)
class FixedCharge:
    """A fixed charge per billing month.

    Parameters
    ----------
    name : str
        Label; the line item is ``fixed:<name>``.
    charge_per_month : float
        Amount [currency per month].
    """

    name: str
    charge_per_month: float


@dataclass(frozen=True)
class CoincidentPeak:
    """A charge on the site's demand at the supply system's peak times, whatever the site's own peak.

    Transmission and capacity charges are often set by the site's demand in the few intervals when the
    whole system peaked (named by the utility after the season), not by the site's own monthly peak: a
    motor saves on them only where it runs, and draws less, at those times.

    Parameters
    ----------
    name : str
        Label; the line item is ``coincident:<name>``.
    price_per_kw_month : float
        Price [currency per kW per month], billed every month on the coincident demand.
    times : tuple of (int, int, int, int)
        The system's peak times as (month, day, hour, minute) of the local clock, each the start of a window
        of ``window_min``.
    window_min : int
        Length of each peak window [min]: 15, 30 or 60.
    written : tuple of str
        The times as the tariff file writes them (a TOML date-time in ISO form, a text as given), in the order
        of ``times``, for messages; empty for a clause built in code. Not part of the clause's identity: two
        clauses that differ only in how a time is written are equal.
    years : tuple of int
        The year each time is written with, in the order of ``times`` (empty for a clause built in code without
        them). The analysis bills one year: a time of another year is read 52 weeks (364 days) per year
        earlier or later, on the same weekday and clock time, as a profile of another year is moved
        (:func:`models.billing.placed_peak_times`); a clause without years is read on the same calendar
        date in every year the meter series covers.

    Notes
    -----
    The coincident demand is the mean over the listed times that fall inside the series of the site's mean
    import [kW] over each window, billed at the same quantity in every month of the series.
    """

    name: str
    price_per_kw_month: float
    times: tuple[tuple[int, int, int, int], ...]
    window_min: int = 60
    written: tuple[str, ...] = field(default=(), compare=False)
    years: tuple[int, ...] = ()

    def time_text(self, j: int) -> str:
        """The ``j``-th time (from 0) as written in the file, else as ``15 July 17:00``."""
        if j < len(self.written):
            return self.written[j]
        return peak_time_text(self.times[j])


def peak_time_text(time: tuple[int, int, int, int]) -> str:
    """A peak time (month, day, hour, minute) in words, without a year.

    Examples
    --------
    >>> peak_time_text((7, 15, 17, 0))
    '15 July 17:00'
    """
    month, day, hour, minute = time
    name = MONTH_NAMES[month - 1] if isinstance(month, int) and 1 <= month <= 12 else f"month {month}"
    return f"{day} {name} {hour:02d}:{minute:02d}"


@dataclass(frozen=True)
class Tax:
    """A tax or levy as a percentage of a base.

    Parameters
    ----------
    name : str
        Label; the line item is ``tax:<name>``.
    rate_pct : float
        Rate [%], 0-100.
    base : str
        One of ``TAX_BASES`` (see ``docs/tariffs.md``).
    """

    name: str
    rate_pct: float
    base: str = "all_charges"


@dataclass(frozen=True)
class Tariff:
    """A complete tariff. Hashable: every field is immutable.

    Parameters
    ----------
    name : str
        Tariff name.
    currency : str
        ISO 4217 code of every amount (e.g. ``"EUR"``).
    seasons : tuple of Season
        Seasons covering the 12 months once each.
    periods : tuple of PeriodRule
        Time-of-use rules covering every minute of every day type in every season exactly once.
    holidays : tuple of datetime.date
        Public holidays (day type ``holiday``).
    energy : EnergyCharge or None
        Energy charge.
    demand, reactive, leading, fixed, taxes, coincident, reactive_demand, energy_power_factor : tuples of the clause types
        Clauses, in file order.
    time_zone : str or None
        IANA zone the tariff's clock times are in; None = the meter index's own zone.
    allow_negative_prices : bool
        Accept negative prices (otherwise they are errors).
    notes : str
        Free text (source, effective date).
    billing_day : int
        Day of the month each billing month starts on, at midnight of the tariff's clock, 1-28 (1: calendar
        months; 15: the 15th of one month to the 14th of the next, a meter read on the 15th). A billing month
        takes the season of the calendar month it starts in, for its clauses' seasons (the time-of-use
        periods keep each interval's own).
    """

    name: str
    currency: str
    seasons: tuple[Season, ...]
    periods: tuple[PeriodRule, ...]
    holidays: tuple[dt.date, ...] = ()
    energy: EnergyCharge | None = None
    demand: tuple[DemandCharge, ...] = ()
    reactive: tuple[ReactiveCharge, ...] = ()
    leading: tuple[LeadingCharge, ...] = ()
    fixed: tuple[FixedCharge, ...] = ()
    taxes: tuple[Tax, ...] = ()
    time_zone: str | None = None
    coincident: tuple[CoincidentPeak, ...] = ()
    reactive_demand: tuple[ReactiveDemandCharge, ...] = ()
    energy_power_factor: tuple[EnergyPowerFactorClause, ...] = ()
    allow_negative_prices: bool = False
    notes: str = ""
    billing_day: int = 1

    @property
    def period_codes(self) -> tuple[str, ...]:
        """Period codes in order of first appearance in ``periods``."""
        return tuple(dict.fromkeys(r.code for r in self.periods))

    @property
    def season_names(self) -> tuple[str, ...]:
        """Season names in file order."""
        return tuple(s.name for s in self.seasons)


# --------------------------------------------------------------------------------------------------
# Time-of-use assignment (layer 1)
# --------------------------------------------------------------------------------------------------


@functools.lru_cache(maxsize=64)
def _period_table(tariff: Tariff) -> np.ndarray:
    """Return period indices as an int16 array (12 months, 4 day types, 1440 minutes); −1 = none."""
    table = np.full((12, len(DAY_TYPES), MINUTES_PER_DAY), -1, dtype=np.int16)
    codes = tariff.period_codes
    for rule in tariff.periods:
        cell = _rule_cells(tariff, rule)
        table[cell & (table < 0)] = codes.index(rule.code)
    return table


@functools.lru_cache(maxsize=64)
def _season_of_month(tariff: Tariff) -> np.ndarray:
    """Return the season index of each month 1-12 (array position month − 1); −1 = none."""
    out = np.full(12, -1, dtype=np.int16)
    for i, s in enumerate(tariff.seasons):
        for m in s.months:
            if 1 <= m <= 12 and out[m - 1] < 0:
                out[m - 1] = i
    return out


def _rule_cells(tariff: Tariff, rule: PeriodRule) -> np.ndarray:
    """Return the (12, 4, 1440) boolean cells a rule covers."""
    months = np.zeros(12, dtype=bool)
    season_of_month = _season_of_month(tariff)
    names = tariff.season_names
    for s in rule.seasons:
        if s in names:
            months |= season_of_month == names.index(s)
    days = np.array([d in rule.day_types for d in DAY_TYPES])
    return months[:, None, None] & days[None, :, None] & rule.minute_mask()[None, None, :]


def _local_wall(tariff: Tariff, index: pd.DatetimeIndex) -> pd.DatetimeIndex:
    """Return the index as naive wall-clock time in the tariff's zone (or the index's own zone)."""
    if not isinstance(index, pd.DatetimeIndex):
        raise ValueError("index must be a pandas DatetimeIndex")
    if index.tz is None:
        raise ValueError("index must be tz-aware (see docs/conventions.md: time series carry a time zone)")
    local = index.tz_convert(tariff.time_zone) if tariff.time_zone else index
    return local.tz_localize(None)


def day_types(tariff: Tariff, index: pd.DatetimeIndex) -> np.ndarray:
    """Return the day-type number (0 weekday, 1 saturday, 2 sunday, 3 holiday) of each timestamp.

    Parameters
    ----------
    tariff : Tariff
        Supplies the holiday list and the time zone.
    index : pandas.DatetimeIndex
        Tz-aware interval start times.

    Returns
    -------
    ndarray of int8
        Positions in ``DAY_TYPES``. A holiday overrides the weekday.
    """
    wall = _local_wall(tariff, index)
    dow = np.asarray(wall.day_of_week)
    out = np.where(dow < 5, 0, np.where(dow == 5, 1, 2)).astype(np.int8)
    if tariff.holidays:
        dates = wall.to_numpy().astype("datetime64[D]")
        out[np.isin(dates, np.array(tariff.holidays, dtype="datetime64[D]"))] = 3
    return out


def period_index(tariff: Tariff, index: pd.DatetimeIndex) -> np.ndarray:
    """Return the position in ``tariff.period_codes`` of each interval's period.

    Parameters
    ----------
    tariff : Tariff
        A valid tariff.
    index : pandas.DatetimeIndex
        Tz-aware interval start times.

    Returns
    -------
    ndarray of int16
        Period positions; −1 where the tariff leaves a time uncovered (a validation error).

    Notes
    -----
    Vectorised lookup ``table[month − 1, day type, minute of day]`` in a precomputed table.
    """
    wall = _local_wall(tariff, index)
    month = np.asarray(wall.month) - 1
    minute = np.asarray(wall.hour) * 60 + np.asarray(wall.minute)
    return _period_table(tariff)[month, day_types(tariff, index), minute]


def assign_periods(tariff: Tariff, index: pd.DatetimeIndex) -> np.ndarray:
    """Return the time-of-use period code of each interval.

    Parameters
    ----------
    tariff : Tariff
        A valid tariff (see :func:`check_tariff`).
    index : pandas.DatetimeIndex
        Tz-aware interval **start** times.

    Returns
    -------
    ndarray of str
        Period code per interval.

    Raises
    ------
    ValueError
        If the index is not a tz-aware DatetimeIndex, or a time falls in no period.

    Warnings
    --------
    An interval belongs to the period of its start time. With hourly data and a period boundary at
    half past, the whole hour goes to the period in force at its start. A window across midnight
    (``22:00-06:00``) applies to clock time on each day of its day types: on a weekday rule, Saturday
    00:00-06:00 belongs to Saturday's rules, not to Friday night's.

    Examples
    --------
    >>> t = tariff_from_dict({
    ...     "tariff": {"name": "demo", "currency": "EUR"},
    ...     "periods": [{"code": "night", "hours": ["22:00-06:00"]},
    ...                 {"code": "day", "hours": ["06:00-22:00"]}],
    ... })[0]
    >>> idx = pd.date_range("2025-03-03 21:00", periods=3, freq="h", tz="Europe/Madrid")
    >>> assign_periods(t, idx).tolist()
    ['day', 'night', 'night']
    """
    idx = period_index(tariff, index)
    if np.any(idx < 0):
        first = index[np.argmax(idx < 0)]
        raise ValueError(f"time {first} falls in no time-of-use period of tariff {tariff.name!r}")
    return np.asarray(tariff.period_codes, dtype=str)[idx]


def assign_seasons(tariff: Tariff, index: pd.DatetimeIndex) -> np.ndarray:
    """Return the season name of each interval (by the month of its local start time).

    Parameters
    ----------
    tariff : Tariff
        A valid tariff.
    index : pandas.DatetimeIndex
        Tz-aware interval start times.

    Returns
    -------
    ndarray of str
        Season names.
    """
    wall = _local_wall(tariff, index)
    return np.asarray(tariff.season_names, dtype=str)[_season_of_month(tariff)[np.asarray(wall.month) - 1]]


# --------------------------------------------------------------------------------------------------
# Semantic validation of a Tariff (works on tariffs built in code too)
# --------------------------------------------------------------------------------------------------


def check_tariff(tariff: Tariff, source: str = "") -> list[Problem]:
    """Return every semantic problem of a tariff: coverage, references, signs and ranges.

    Parameters
    ----------
    tariff : Tariff
        The tariff to check.
    source : str
        File name used in the problems.

    Returns
    -------
    list of Problem
        Errors and warnings; the ``column`` field holds the key path (entries counted from 1).

    Notes
    -----
    Rules: seasons cover the 12 months exactly once; every minute of every day type (``holiday`` only
    when holidays are listed) in every season belongs to exactly one period rule; every referenced
    period and season exists; every period has an energy price when an energy charge exists; prices
    are >= 0 unless ``allow_negative_prices``; power factors lie in (0, 1]; shares and percentages
    are in range; names of line items are unique.
    """
    return _check(tariff, source or tariff.name, None, report_gaps=True)


def _check(tariff: Tariff, src: str, positions: dict[str, list[int]] | None, *, report_gaps: bool) -> list[Problem]:
    """Semantic checks; ``positions`` maps a table name to the file position of each built entry."""
    out: list[Problem] = []

    def at(table: str, i: int) -> str:
        """Key of the i-th (from 1) built entry of a table, as numbered in the file."""
        n = positions[table][i - 1] if positions and table in positions else i
        return f"{table}[{n}]"

    def err(key: str, value: object, rule: str, hint: str = "") -> None:
        out.append(error(src, None, key, _as_written(value), rule, hint))

    def warn(key: str, value: object, rule: str, hint: str = "") -> None:
        out.append(warning(src, None, key, _as_written(value), rule, hint))

    # Seasons: each month in exactly one season.
    owner: dict[int, int] = {}
    for i, s in enumerate(tariff.seasons, start=1):
        for m in s.months:
            if not (isinstance(m, int) and 1 <= m <= 12):
                err(at("seasons", i) + ".months", m, "months are whole numbers 1-12")
            elif m in owner:
                err(
                    at("seasons", i) + ".months",
                    m,
                    f"month {m} is already in season '{tariff.seasons[owner[m] - 1].name}' (seasons[{owner[m]}])",
                    "put each month in exactly one season",
                )
            else:
                owner[m] = i
    missing_months = [m for m in range(1, 13) if m not in owner]
    if missing_months:
        err("seasons", missing_months, "months not in any season", "add them to a season; every month needs one")
    _check_unique([s.name for s in tariff.seasons], "seasons", "name", err, at)

    season_names = set(tariff.season_names)
    codes = tariff.period_codes

    # Period rules: references, then coverage and overlap.
    for i, r in enumerate(tariff.periods, start=1):
        for s in r.seasons:
            if s not in season_names:
                err(at("periods", i) + ".seasons", s, "unknown season", f"seasons are: {', '.join(sorted(season_names))}")
        for d in r.day_types:
            if d not in DAY_TYPES:
                err(at("periods", i) + ".days", d, "unknown day type", f"day types are: {', '.join(DAY_TYPES)}")
        if not r.windows and report_gaps:
            err(at("periods", i) + ".hours", [], "no hour window", "omit 'hours' for the whole day, or list windows")
    if not tariff.periods:
        err("periods", None, "the tariff defines no time-of-use period", "add at least one [[periods]] entry")
    else:
        out.extend(_coverage_problems(tariff, src, at, report_gaps=report_gaps))

    day = tariff.billing_day
    day_ok = _billing_day_ok(day)
    if not day_ok:
        err("tariff.billing_day", day, *_BILLING_DAY_RULE)

    # Clauses.
    neg_ok = tariff.allow_negative_prices

    def price(key: str, value: float) -> None:
        if not math.isfinite(value):
            err(key, value, "price must be a finite number")
        elif value < 0.0 and not neg_ok:
            err(key, value, "negative price", "set tariff.allow_negative_prices = true if this is intended")

    def peak_price(key: str, value: float, what: str) -> None:
        """A charge on a peak priced below 0 (let through by allow_negative_prices) rewards a higher peak."""
        if neg_ok and math.isfinite(value) and value < 0.0:
            warn(key, value, f"a negative price on {what}: a higher peak would lower the bill (allow_negative_prices "
                 "lets the value through)", "check the sign: a charge on a peak is a cost")

    def refs(key: str, items: tuple[str, ...] | None, known, kind: str) -> None:
        if items is not None and not len(items):  # an empty list is "none", not "all": the clause bills nothing
            warn(key, [], f"the clause lists no {kind}: it applies in none and bills nothing",
                 f"leave '{key.rsplit('.', 1)[-1]}' out for every {kind}, or list the {kind}s it applies in")
        for x in items or ():
            if x not in known:
                err(key, x, f"unknown {kind}", f"{kind}s are: {', '.join(sorted(known))}")

    def occurs(key: str, periods: tuple[str, ...] | None, seasons: tuple[str, ...] | None) -> None:
        """Warn when a clause's periods never fall in its seasons (it would bill nothing, silently)."""
        if not periods or not seasons or any(x not in codes for x in periods) or any(x not in season_names for x in seasons):
            return  # (no limit on one of them, or an unknown name, reported above)
        season_of_month = _season_of_month(tariff)
        months = np.isin(season_of_month, [tariff.season_names.index(x) for x in seasons])
        if day_ok and int(day) > 1:  # a billing month takes its first month's season and runs into the next month
            months = months | np.roll(months, 1)
        days = np.array([True, True, True, bool(tariff.holidays)])
        for rule in tariff.periods:
            if rule.code in periods and (_rule_cells(tariff, rule)[months][:, days]).any():
                return
        warn(key, list(periods), f"the clause's periods never occur in its seasons ({', '.join(seasons)}): "
             "it bills nothing", "check the clause's periods and seasons against the period rules")

    if tariff.energy is not None:
        priced = dict(tariff.energy.prices)
        key = "energy.price_per_" + tariff.energy.basis.lower()
        for code, value in tariff.energy.prices:
            if code not in codes:
                err(f"{key}.{code}", value, "price for a period that no rule defines", f"periods are: {', '.join(codes)}")
            price(f"{key}.{code}", value)
        for code in codes:
            if code not in priced:
                err(key, code, f"period '{code}' has no energy price", "give every period a price (0 if free)")

    _check_unique([c.name for c in tariff.coincident], "coincident_peak", "name", err, at)
    for i, c in enumerate(tariff.coincident, start=1):
        k = at("coincident_peak", i)
        price(f"{k}.price_per_kw_month", c.price_per_kw_month)
        peak_price(f"{k}.price_per_kw_month", c.price_per_kw_month, "the demand at the system's peak times")
        if c.window_min not in DEMAND_WINDOWS_MIN:
            err(f"{k}.window_min", c.window_min, f"peak window must be one of {DEMAND_WINDOWS_MIN} minutes")
        else:
            for j, (_, _, h, m) in enumerate(c.times):
                if (h * 60 + m) % c.window_min:
                    err(f"{k}.times", c.time_text(j), _off_grid_rule(c.window_min, j, len(c.times)), f"e.g. {h:02d}:00")
        for rule, value in _repeated_peak_times(c):
            warn(f"{k}.times", value, rule, "list each time once")
    _check_unique([d.name for d in tariff.demand], "demand", "name", err, at)
    for i, d in enumerate(tariff.demand, start=1):
        k = at("demand", i)
        price(f"{k}.price_per_{d.basis.lower()}_month", d.price_per_unit_month)
        if d.contracted is None:  # (a contract's price bills the capacity booked, not the peak)
            peak_price(f"{k}.price_per_{d.basis.lower()}_month", d.price_per_unit_month, "the month's peak demand")
        if d.window_min not in DEMAND_WINDOWS_MIN:
            err(f"{k}.window_min", d.window_min, f"demand window must be one of {DEMAND_WINDOWS_MIN} minutes")
        refs(f"{k}.periods", d.periods, codes, "period")
        refs(f"{k}.seasons", d.seasons, season_names, "season")
        occurs(f"{k}.periods", d.periods, d.seasons)
        if d.ratchet_frac is not None:
            if not 0.0 < d.ratchet_frac <= 1.0:
                err(f"{k}.ratchet_frac", d.ratchet_frac, "ratchet share must lie in (0, 1]", "write 80 % as 0.8")
            if d.ratchet_months == 0:
                err(f"{k}.ratchet_months", None, f"ratchet_frac needs a look-back of 1-{_MAX_RATCHET_MONTHS} months "
                    "(ratchet_months)", "e.g. ratchet_months = 11; or leave ratchet_frac out for no ratchet")
            elif not (isinstance(d.ratchet_months, int) and 1 <= d.ratchet_months <= _MAX_RATCHET_MONTHS):
                err(f"{k}.ratchet_months", d.ratchet_months, f"ratchet look-back must be 1-{_MAX_RATCHET_MONTHS} months")
        elif d.ratchet_months:
            err(f"{k}.ratchet_frac", None, "ratchet_months needs ratchet_frac", "e.g. ratchet_frac = 0.8")
        unit = d.basis.lower()
        if d.contracted is not None:
            if not (math.isfinite(d.contracted) and d.contracted > 0.0):
                err(f"{k}.contracted_{unit}", d.contracted, "contracted capacity must be a number > 0",
                    f"the {d.basis} booked in the supply contract")
            if d.ratchet_frac is not None:
                err(f"{k}.contracted_{unit}", d.contracted, "a contracted capacity and a ratchet in one demand charge",
                    "give one of them: the contract bills its capacity every month, the ratchet past peaks")
            if d.power_factor_adjustment is not None:
                err(f"{k}.contracted_{unit}", d.contracted, "a contracted capacity with a power-factor adjustment is "
                    "not modelled",
                    "price the power factor with a [[reactive]] clause, or bill the demand in kVA" if d.basis == "kW"
                    else "leave the power-factor adjustment out: a kVA demand already carries the power factor")
        if d.excess_price_per_unit_month is not None:
            price(f"{k}.excess_price_per_{unit}_month", d.excess_price_per_unit_month)
            if d.contracted is not None and neg_ok and d.excess_price_per_unit_month < 0.0:
                warn(f"{k}.excess_price_per_{unit}_month", d.excess_price_per_unit_month,
                     f"a negative excess price: each {d.basis} of the month's demand above the contract would lower the "
                     "bill, so a higher peak would lower it (allow_negative_prices lets the value through)",
                     "check the sign: the demand above a contract is usually priced higher than the contract itself")
            if d.contracted is not None and 0.0 <= d.excess_price_per_unit_month < d.price_per_unit_month:
                warn(f"{k}.excess_price_per_{unit}_month", d.excess_price_per_unit_month,
                     "the demand above the contract is priced below the contract itself: were the two prices swapped?",
                     f"the excess price is usually the higher; check it against price_per_{unit}_month")
            if d.contracted is None:
                err(f"{k}.excess_price_per_{unit}_month", d.excess_price_per_unit_month,
                    f"an excess price needs the contracted capacity it is above (contracted_{unit})",
                    f"e.g. contracted_{unit} = 500")
        a = d.power_factor_adjustment
        if a is not None:
            ka = f"{k}.power_factor_adjustment"
            if d.basis == "kVA":
                err(ka, d.name, "a power-factor adjustment applies to kW demand only", "a kVA demand already carries the power factor")
            if a.method not in ("ratio", "percent_per_point"):
                err(f"{ka}.method", a.method, "unknown method", "use 'ratio' or 'percent_per_point'")
            if not 0.0 < a.target_power_factor <= 1.0:
                err(f"{ka}.target_power_factor", a.target_power_factor, "power factor must lie in (0, 1]")
            if a.method == "percent_per_point" and not 0.0 < a.percent_per_point <= 100.0:
                err(f"{ka}.percent_per_point", a.percent_per_point, "percent per 0.01 PF must lie in (0, 100]")
            if a.power_factor_from not in ("month_average", "peak_window"):
                err(f"{ka}.power_factor_from", a.power_factor_from, "unknown value", "use 'month_average' or 'peak_window'")

    _check_unique([r.name for r in tariff.reactive], "reactive", "name", err, at)
    for i, r in enumerate(tariff.reactive, start=1):
        k = at("reactive", i)
        price(f"{k}.price_per_kvarh", r.price_per_kvarh)
        if not r.free_kvarh_per_kwh >= 0.0:
            err(f"{k}.free_kvarh_per_kwh", r.free_kvarh_per_kwh, "free kVArh per kWh must be >= 0")
        elif r.free_kvarh_per_kwh > 5.0:
            warn(f"{k}.free_kvarh_per_kwh", r.free_kvarh_per_kwh, "allowance above 5 kVArh/kWh (PF < 0.2) is unusual", "check the value")
        if r.allowance_per not in ALLOWANCE_SCOPES:
            err(f"{k}.allowance_per", r.allowance_per, "unknown value", f"use one of {', '.join(ALLOWANCE_SCOPES)}")
        bands = getattr(r, "price_bands", ())
        if bands and r.allowance_per == "interval":
            err(f"{k}.price_by_power_factor", len(bands),
                "a price by power factor reads the power factor of a period of a month or of the month",
                "set allowance_per to 'period' or 'month'")
        decimals = getattr(r, "power_factor_decimals", None)
        if decimals is not None:
            if not bands:
                warn(f"{k}.power_factor_decimals", decimals, "read only with price_by_power_factor: no band here",
                     "leave it out, or give the clause its bands")
            if not 0 <= decimals <= 4:
                err(f"{k}.power_factor_decimals", decimals, "the decimals a power factor is rounded to lie in 0-4",
                    "bills round it to 2 decimals (0.90) or 3 (0.905)")
        edges = [b.below_power_factor for b in bands]
        for j, b in enumerate(bands, start=1):
            if not 0.0 < b.below_power_factor <= 1.0:
                err(f"{k}.price_by_power_factor[{j}].below", b.below_power_factor, "power factor must lie in (0, 1]")
            price(f"{k}.price_by_power_factor[{j}].price_per_kvarh", b.price_per_kvarh)
            if b.below_power_factor in edges[:j - 1]:
                err(f"{k}.price_by_power_factor[{j}].below", b.below_power_factor,
                    f"two bands share the edge {b.below_power_factor:g}", "give each band its own edge")
        refs(f"{k}.periods", r.periods, codes, "period")
        refs(f"{k}.seasons", r.seasons, season_names, "season")
        occurs(f"{k}.periods", r.periods, r.seasons)

    _check_unique([r.name for r in tariff.leading], "leading", "name", err, at)
    for i, r in enumerate(tariff.leading, start=1):
        k = at("leading", i)
        price(f"{k}.price_per_kvarh", r.price_per_kvarh)
        if not r.free_kvarh_per_kwh >= 0.0:
            err(f"{k}.free_kvarh_per_kwh", r.free_kvarh_per_kwh, "free kVArh per kWh must be >= 0")
        if r.allowance_per not in ALLOWANCE_SCOPES:
            err(f"{k}.allowance_per", r.allowance_per, "unknown value", f"use one of {', '.join(ALLOWANCE_SCOPES)}")
        if r.price_per_kvarh == 0.0 and not r.banned:
            warn(k, r.name, "leading clause with no price and no ban has no effect", "set price_per_kvarh or banned = true")
        refs(f"{k}.periods", r.periods, codes, "period")
        refs(f"{k}.seasons", r.seasons, season_names, "season")
        occurs(f"{k}.periods", r.periods, r.seasons)

    _check_unique([c.name for c in tariff.reactive_demand], "reactive_demand", "name", err, at)
    for i, c in enumerate(tariff.reactive_demand, start=1):
        k = at("reactive_demand", i)
        price(f"{k}.price_per_kvar_month", c.price_per_kvar_month)
        peak_price(f"{k}.price_per_kvar_month", c.price_per_kvar_month, "the month's peak reactive demand")
        if not c.free_kvar_per_kw >= 0.0:
            err(f"{k}.free_kvar_per_kw", c.free_kvar_per_kw, "free kVAr per kW must be >= 0")
        elif c.free_kvar_per_kw > 5.0:
            warn(f"{k}.free_kvar_per_kw", c.free_kvar_per_kw, "allowance above 5 kVAr per kW (PF < 0.2) is unusual",
                 "check the value: 0.62 kVAr per kW is a PF of 0.85")
        if c.window_min not in DEMAND_WINDOWS_MIN:
            err(f"{k}.window_min", c.window_min, f"demand window must be one of {DEMAND_WINDOWS_MIN} minutes")
        refs(f"{k}.periods", c.periods, codes, "period")
        refs(f"{k}.seasons", c.seasons, season_names, "season")
        occurs(f"{k}.periods", c.periods, c.seasons)

    _check_unique([c.name for c in tariff.energy_power_factor], "energy_power_factor", "name", err, at)
    for i, c in enumerate(tariff.energy_power_factor, start=1):
        k = at("energy_power_factor", i)
        for key, bands, edge in (("penalty", c.penalties, "below"), ("rebate", c.rebates, "above")):
            edges = [b.power_factor for b in bands]
            for j, b in enumerate(bands, start=1):
                if not 0.0 < b.power_factor <= 1.0:
                    err(f"{k}.{key}[{j}].{edge}", b.power_factor, "power factor must lie in (0, 1]")
                if not 0.0 < b.percent_per_point <= 100.0:
                    err(f"{k}.{key}[{j}].percent_per_point", b.percent_per_point,
                        "percent per 0.01 PF must lie in (0, 100]", "write 0.5 % per point as 0.5")
            for j, x in enumerate(edges, start=1):
                if x in edges[:j - 1]:
                    err(f"{k}.{key}[{j}].{edge}", x, f"two {key} bands share the edge {x:g}", "give each band its own edge")
        edges_ok = all(0.0 < b.power_factor <= 1.0 for b in c.penalties + c.rebates)
        if (edges_ok and c.penalties and c.rebates
                and min(b.power_factor for b in c.rebates) < max(b.power_factor for b in c.penalties)):
            err(f"{k}.rebate", min(b.power_factor for b in c.rebates),
                f"a rebate from a power factor below the highest penalty edge ({max(b.power_factor for b in c.penalties):g}): "
                "a month's power factor would be both penalised and rebated", "start the rebate at or above the penalty's edge")
        if c.round_points not in ROUND_POINTS:
            err(f"{k}.round_points", c.round_points, "unknown value", f"use one of {', '.join(ROUND_POINTS)}")
        if c.base not in ENERGY_PF_BASES:
            err(f"{k}.base", c.base, "unknown value", f"use one of {', '.join(ENERGY_PF_BASES)}")
        if tariff.energy is None:
            warn(k, c.name, "a percentage of the energy charges, but the tariff has no [energy] charge: it bills nothing",
                 "add the [energy] prices, or leave the clause out")

    _check_unique([f.name for f in tariff.fixed], "fixed", "name", err, at)
    for i, f in enumerate(tariff.fixed, start=1):
        price(at("fixed", i) + ".charge_per_month", f.charge_per_month)

    _check_unique([t.name for t in tariff.taxes], "taxes", "name", err, at)
    for i, t in enumerate(tariff.taxes, start=1):
        if not 0.0 <= t.rate_pct <= 100.0:
            err(at("taxes", i) + ".rate_pct", t.rate_pct, "rate must lie in 0-100 %",
                "a tax or levy adds to the bill: a rebate or credit is not modelled" if t.rate_pct < 0
                else "check the rate: 20 % is written 20")
        elif 0.0 < t.rate_pct < 1.0:
            warn(at("taxes", i) + ".rate_pct", t.rate_pct, "rate below 1 %: is this a fraction written in place of a percentage?", "write 20 % as 20")
        if t.base not in TAX_BASES:
            err(at("taxes", i) + ".base", t.base, "unknown tax base", f"use one of {', '.join(TAX_BASES)}")
    return out


def _off_grid_rule(window_min: int, j: int, n: int) -> str:
    """The rule broken by the ``j``-th (from 0) of ``n`` peak times that does not start a window of the clock."""
    return f"time {j + 1} of {n}: a peak time must start a {window_min}-min window of the clock"


def _repeated_peak_times(c: CoincidentPeak) -> list[tuple[str, object]]:
    """(rule, value) of each peak time a clause lists more than once: it counts once per listing in the mean.
    Times are the same when their year, month, day and clock time are (the same day and time of two years
    are read on two days of the analysis year, 52 weeks apart per year: on the same weekday of each)."""
    at: dict[tuple, list[int]] = {}
    for j, t in enumerate(c.times):
        at.setdefault((c.years[j] if j < len(c.years) else None, *t), []).append(j)
    out = []
    n = len(c.times)
    for (_, *t), js in at.items():
        if len(js) < 2:
            continue
        texts = [c.time_text(j) for j in js]
        places = ", ".join(str(j + 1) for j in js[:-1]) + f" and {js[-1] + 1}"
        times = "twice" if len(js) == 2 else f"{len(js)} times"
        if len(set(texts)) == 1:
            out.append((f"a peak time is listed {times} (times {places} of {n}): it counts {times} in the mean", texts[0]))
        else:
            out.append((f"a peak time is listed {times} (times {places} of {n}): {' and '.join(texts)} name the same "
                        f"time, {peak_time_text(tuple(t))}, and it counts {times} in the mean", texts))
    return out


def _check_unique(names: list[str], table: str, key: str, err, at) -> None:
    seen: dict[str, int] = {}
    for i, n in enumerate(names, start=1):
        if n in seen:
            err(f"{at(table, i)}.{key}", n, f"duplicate name (also {at(table, seen[n])})", "names label bill line items and must be unique")
        else:
            seen[n] = i


def _coverage_problems(tariff: Tariff, src: str, at, *, report_gaps: bool) -> list[Problem]:
    """Return overlap and gap problems of the period rules, per season and day type."""
    out: list[Problem] = []
    season_of_month = _season_of_month(tariff)
    cells = [_rule_cells(tariff, r) for r in tariff.periods]
    # Overlaps, pairwise, reported once per pair with the first place they meet.
    for i in range(len(cells)):
        for j in range(i + 1, len(cells)):
            both = cells[i] & cells[j]
            if both.any():
                m, d, minute = (int(x[0]) for x in np.nonzero(both))
                where = _describe(tariff, season_of_month[m], d, both[m, d])
                out.append(
                    error(
                        src,
                        None,
                        at("periods", j + 1) + ".hours",
                        [str(w) for w in tariff.periods[j].windows],
                        f"overlaps {at('periods', i + 1)} ('{tariff.periods[i].code}') in {where}",
                        "every minute of every day type in every season must belong to exactly one period",
                    )
                )
    if not report_gaps:
        return out
    # Gaps, reported per season and day type (holidays only when the tariff lists some).
    count = np.sum(cells, axis=0) if cells else np.zeros((12, 4, MINUTES_PER_DAY), dtype=int)
    needed_days = [0, 1, 2] + ([3] if tariff.holidays else [])
    for si, season in enumerate(tariff.seasons):
        months = np.nonzero(season_of_month == si)[0]
        if months.size == 0:
            continue
        m = months[0]
        for d in needed_days:
            gap = count[m, d] == 0
            if gap.any():
                out.append(
                    error(
                        src,
                        None,
                        "periods",
                        None,
                        f"no period covers {_describe(tariff, si, d, gap)}",
                        "add a [[periods]] rule for these times",
                    )
                )
    return out


def _describe(tariff: Tariff, season_idx: int, day: int, minute_mask: np.ndarray) -> str:
    """Describe a set of minutes of one season and day type as clock ranges."""
    season = tariff.seasons[season_idx].name if season_idx >= 0 else "(no season)"
    return f"season '{season}', {DAY_TYPES[day]}, {', '.join(_ranges(minute_mask))}"


def _ranges(mask: np.ndarray) -> list[str]:
    """Return the runs of True minutes in a day as ``HH:MM-HH:MM`` strings."""
    edges = np.diff(np.concatenate(([0], mask.astype(np.int8), [0])))
    starts = np.nonzero(edges == 1)[0]
    ends = np.nonzero(edges == -1)[0]
    return [f"{_hhmm(int(a))}-{_hhmm(int(b))}" for a, b in zip(starts, ends)]


def _hhmm(minute: int) -> str:
    return f"{minute // 60:02d}:{minute % 60:02d}"


# --------------------------------------------------------------------------------------------------
# Reading a parsed TOML table
# --------------------------------------------------------------------------------------------------

_MISSING = object()
_HOURS_RE = re.compile(r"^\s*(\d{1,2}):(\d{2})\s*-\s*(\d{1,2}):(\d{2})\s*$")
_CURRENCY_RE = re.compile(r"^[A-Z]{3}$")

_TOP_KEYS = ("tariff", "calendar", "seasons", "periods", "energy", "fixed", "demand", "coincident_peak", "reactive",
             "leading", "reactive_demand", "energy_power_factor", "taxes")
_TARIFF_KEYS = ("name", "currency", "time_zone", "allow_negative_prices", "notes", "billing_day")
#: The rule and hint of a billing day out of range (the reader's and :func:`check_tariff`'s).
_BILLING_DAY_RULE = ("the day billing months start on must be 1-28 (every month has it)",
                     "the meter's read day, e.g. 15; 1 for calendar months")


def _billing_day_ok(day: object) -> bool:
    """Whether ``day`` is a whole number of 1-28: a day every month has."""
    return not isinstance(day, bool) and isinstance(day, (int, np.integer)) and 1 <= int(day) <= 28
_CALENDAR_KEYS = ("holidays",)
_SEASON_KEYS = ("name", "months")
_PERIOD_KEYS = ("code", "seasons", "days", "hours")
_ENERGY_KEYS = ("price_per_kwh", "price_per_kvah")
#: An energy price above this [currency/kWh] is warned in the currencies of :data:`UNIT_PRICED_CURRENCIES`: far
#: above any utility's there (a few tenths of a unit at most; common practice, from memory), and the size of a
#: price per MWh written per kWh.
ENERGY_PRICE_WARN_PER_KWH = 5.0
#: Currencies whose unit buys several kWh (ISO 4217 codes), where :data:`ENERGY_PRICE_WARN_PER_KWH` applies.
UNIT_PRICED_CURRENCIES = frozenset({"EUR", "USD", "GBP", "CHF", "CAD", "AUD", "NZD", "SGD", "BRL", "PLN", "DKK", "NOK",
                                    "SEK", "CNY", "MYR", "AED", "SAR", "ILS"})
#: A demand price above this [currency/kW-month or kVA-month] is warned in the currencies of
#: :data:`UNIT_PRICED_CURRENCIES`: utilities there ask a few units to a few tens per kW-month (common practice,
#: from memory), and a price per MW-month or per kW-year written per kW-month is tens to thousands of times that.
DEMAND_PRICE_WARN_PER_KW_MONTH = 100.0


def _demand_price_hint(price: float, unit: str) -> str:
    """What a demand price far above any utility's may have been meant as (the per-MW and per-year readings).

    Examples
    --------
    >>> _demand_price_hint(9200.0, "kVA")
    'is it a price per MVA-month (9.2 per kVA-month) or per kVA-year (766.667 per kVA-month)?'
    """
    return (f"is it a price per M{unit[1:]}-month ({price / 1000:g} per {unit}-month) or per {unit}-year "
            f"({price / 12:g} per {unit}-month)?")
_FIXED_KEYS = ("name", "charge_per_month")
_DEMAND_KEYS = (
    "name",
    "price_per_kw_month",
    "price_per_kva_month",
    "window_min",
    "periods",
    "seasons",
    "ratchet_frac",
    "ratchet_months",
    "power_factor_adjustment",
    "contracted_kw",
    "contracted_kva",
    "excess_price_per_kw_month",
    "excess_price_per_kva_month",
    "rolling",
)
_PFA_KEYS = ("method", "target_power_factor", "percent_per_point", "round_points_up", "power_factor_from")
_REACTIVE_KEYS = ("name", "price_per_kvarh", "free_kvarh_per_kwh", "free_power_factor", "allowance_per", "periods", "seasons",
                  "price_by_power_factor", "power_factor_decimals")
_LEADING_KEYS = ("name", "price_per_kvarh", "free_kvarh_per_kwh", "free_power_factor", "banned", "allowance_per", "periods", "seasons")
_TAX_KEYS = ("name", "rate_pct", "base")
_COINCIDENT_KEYS = ("name", "price_per_kw_month", "times", "window_min")
_REACTIVE_DEMAND_KEYS = ("name", "price_per_kvar_month", "free_kvar_per_kw", "free_power_factor", "window_min", "rolling",
                         "periods", "seasons")
_ENERGY_PF_KEYS = ("name", "penalty", "rebate", "round_points", "count_leading", "rebate_when_leading", "base")
#: What an energy power-factor clause's percentage may be of.
ENERGY_PF_BASES: tuple[str, ...] = ("energy_charges", "all_charges")
_PENALTY_BAND_KEYS = ("below", "percent_per_point")
_REBATE_BAND_KEYS = ("above", "percent_per_point")
ROUND_POINTS: tuple[str, ...] = ("none", "down", "up")


#: Similarity (difflib ratio, 0-1) from which an unknown key counts as a misspelling of an allowed key:
#: ``taxs``/``taxes`` 0.89 and ``price_per_kw_mont``/``price_per_kw_month`` 0.97 are misspellings;
#: ``notes_for_me``/``notes`` 0.59 and ``colour``/``currency`` 0.43 are not.
NEAR_MISS_CUTOFF = 0.8
#: Similarity from which an allowed key is named first in the hint of an unknown key that is no near miss.
_CLOSEST_CUTOFF = 0.6
#: Unit suffixes a key may be written without and still be a near miss (``window`` for ``window_min``).
_UNIT_SUFFIXES = ("min", "pct", "frac", "months")


def near_misses(key: str, allowed: tuple[str, ...]) -> list[str]:
    """The allowed keys an unknown key is most likely a misspelling of (empty when it resembles none).

    Parameters
    ----------
    key : str
        A key of a tariff file that is not among ``allowed``.
    allowed : tuple of str
        The keys allowed at that place of the file.

    Returns
    -------
    list of str
        The allowed keys written the same but for letter case, ``_``/``-``/space, a plural ``s``/``es``/``ies`` or a
        unit suffix left off (``_min``, ``_pct``, ``_frac``, ``_months``); failing those, the allowed keys
        within a difflib similarity ratio of :data:`NEAR_MISS_CUTOFF` of the key in small letters, closest
        first.

    Notes
    -----
    The rule is the project's case format (``docs/tariffs.md``, "Validation"): a near miss is an error,
    since the table or value it holds would otherwise be dropped without a word; any other unknown key is
    a warning. The ratio is :class:`difflib.SequenceMatcher`'s 2M/T (M matched characters, T characters
    in both strings) [1]_.

    References
    ----------
    .. [1] Python Software Foundation, "difflib - Helpers for computing deltas," *The Python Standard
       Library*, Python 3.11. [Online]. Available: https://docs.python.org/3.11/library/difflib.html

    Examples
    --------
    >>> near_misses("taxs", _TOP_KEYS), near_misses("Time-Zone", _TARIFF_KEYS), near_misses("window", _DEMAND_KEYS)
    (['taxes'], ['time_zone'], ['window_min'])
    >>> near_misses("notes_for_me", _TARIFF_KEYS), near_misses("price_per_kv_month", _DEMAND_KEYS)
    ([], ['price_per_kva_month', 'price_per_kw_month', 'excess_price_per_kva_month'])
    >>> near_misses("Taxs", _TOP_KEYS), near_misses("penalties", _ENERGY_PF_KEYS)
    (['taxes'], ['penalty'])
    """

    def squash(text: str) -> str:
        return re.sub(r"[\s_\-]+", "", text.lower())

    written = squash(key)
    variants = []
    for a in allowed:
        full = squash(a)
        stem, _, suffix = a.rpartition("_")
        plural = full[:-1] + "ies" if full.endswith("y") else None  # penalty -> penalties
        single = written[:-3] + "y" if written.endswith("ies") else None
        if (written == full or full in (written + "s", written + "es") or written in (full + "s", full + "es")
                or written == plural or full == single
                or (stem and suffix in _UNIT_SUFFIXES and written == squash(stem))):
            variants.append(a)
    if variants:
        return variants
    return difflib.get_close_matches(key.lower(), allowed, n=3, cutoff=NEAR_MISS_CUTOFF)


def _quoted(keys: list[str], joint: str) -> str:
    """``'a'``, ``'a' or 'b'``, ``'a', 'b' or 'c'``."""
    q = [f"'{k}'" for k in keys]
    return q[0] if len(q) == 1 else f"{', '.join(q[:-1])} {joint} {q[-1]}"


class _Brief(str):
    """A short description shown in a message in place of a value too large to show (shown unquoted)."""

    __slots__ = ()

    def __repr__(self) -> str:
        return str(self)


def _brief(value: object) -> object:
    """The value itself, or for a table or an array of tables a short description of it.

    Examples
    --------
    >>> print(_brief([{"name": "VAT", "rate_pct": 19.0}, {"name": "levy", "base": "energy_charges"}]))
    2 tables with name, rate_pct, base
    >>> print(_brief({}))
    an empty table
    >>> _brief(0.2)
    0.2
    """
    if isinstance(value, dict):
        return _Brief(f"a table with {_key_list(value)}" if value else "an empty table")
    if isinstance(value, list) and value and all(isinstance(v, dict) for v in value):
        keys = dict.fromkeys(k for v in value for k in v)
        n = len(value)
        return _Brief(f"{n} {'table' if n == 1 else 'tables'}" + (f" with {_key_list(keys)}" if keys else ""))
    return _as_written(value)


def _holds_date(value: object) -> bool:
    """True when the value is, or a list or table holds, a TOML date, time or date-time."""
    if isinstance(value, (dt.date, dt.time)):
        return True
    if isinstance(value, (list, tuple)):
        return any(_holds_date(v) for v in value)
    if isinstance(value, dict):
        return any(_holds_date(v) for v in value.values())
    return False


def _as_written(value: object) -> object:
    """A value as a message shows it: a TOML date, time or date-time in ISO form, as the file writes it, also
    inside a list or an inline table (not Python's ``datetime.date(2025, 7, 15)``); any other value unchanged.

    Examples
    --------
    >>> print(_as_written(dt.datetime(2025, 7, 15, 17, 0, tzinfo=dt.timezone(dt.timedelta(hours=2)))))
    2025-07-15T17:00:00+02:00
    >>> print(_as_written([dt.date(2025, 7, 15), "x", 17.0, dt.time(17, 20)]))
    [2025-07-15, 'x', 17, 17:20:00]
    >>> _as_written(0.2)
    0.2
    """
    if not _holds_date(value):
        return value
    if isinstance(value, dict):  # (shown_value writes dates and times as written, not tables holding them)
        return _Brief("{" + ", ".join(f"{k} = {shown_value(_as_written(v))}" for k, v in value.items()) + "}")
    if isinstance(value, (list, tuple)):
        return _Brief("[" + ", ".join(shown_value(_as_written(v)) for v in value) + "]")
    return _Brief(shown_value(value))


def _key_list(keys) -> str:
    names = [str(k) for k in keys]
    return ", ".join(names[:4]) + (", ..." if len(names) > 4 else "")


class _Reader:
    """Collects problems while pulling typed values out of nested dicts."""

    def __init__(self, source: str) -> None:
        self.source = source
        self.problems: list[Problem] = []
        #: Paths of the allowed keys that an unknown key was taken for a misspelling of (``taxes``,
        #: ``taxes[1].rate_pct``): their absence is already reported, once, by that key's error.
        self.meant: set[str] = set()

    def err(self, key: str, value: object, rule: str, hint: str = "") -> None:
        self.problems.append(error(self.source, None, key, _as_written(value), rule, hint))

    def warn(self, key: str, value: object, rule: str, hint: str = "") -> None:
        self.problems.append(warning(self.source, None, key, _as_written(value), rule, hint))

    def known(self, table: dict, allowed: tuple[str, ...], path: str) -> None:
        """Report each key of ``table`` not in ``allowed``: an error when it is a near miss, else a warning."""
        for k in table:
            if k in allowed:
                continue
            full, value = _join(path, k), _brief(table[k])
            meant = near_misses(str(k), allowed)
            if meant:
                self.meant.update(_join(path, m) for m in meant)
                self.err(full, value,
                         f"unknown key that looks like a misspelling of {_quoted(meant, 'or')}: a misspelt key is not "
                         "read, so what it holds would be left out of the tariff",
                         f"did you mean {_quoted(meant, 'or')}? Rename the key; a note for yourself goes in a # comment")
                continue
            closest = difflib.get_close_matches(str(k).lower(), allowed, n=3, cutoff=_CLOSEST_CUTOFF)
            lead = f"closest allowed {'key' if len(closest) == 1 else 'keys'}: {_quoted(closest, 'and')}; " if closest else ""
            self.warn(full, value, "unknown key, ignored", f"{lead}allowed keys here: {', '.join(allowed)}")

    def reported(self, path: str, *keys: str) -> bool:
        """True when ``path`` (or, given ``keys``, one of them under it) lies at or under a key whose
        misspelling is already reported."""
        paths = [_join(path, k) for k in keys] if keys else [path]
        return any(p == m or p.startswith((m + ".", m + "[")) for p in paths for m in self.meant)

    def table(self, data: dict, key: str, path: str) -> dict | None:
        v = data.get(key, _MISSING)
        if v is _MISSING:
            return None
        if not isinstance(v, dict):
            self.err(_join(path, key), v, "expected a table", f"write it as [{_join(path, key)}]")
            return None
        return v

    def tables(self, data: dict, key: str) -> list[dict]:
        v = data.get(key, _MISSING)
        if v is _MISSING:
            return []
        if not isinstance(v, list) or not all(isinstance(x, dict) for x in v):
            self.err(key, v, "expected an array of tables", f"write each entry as [[{key}]]")
            return []
        return v

    def get(self, table: dict, key: str, path: str, kind: str, default: object = _MISSING) -> object:
        """Return a typed value; record an error and return ``default`` (or None) when it is wrong."""
        full = _join(path, key)
        v = table.get(key, _MISSING)
        if v is _MISSING:
            if default is _MISSING:
                if not self.reported(full):
                    self.err(full, None, "required key is missing")
                return None
            return default
        ok, value = _coerce(v, kind)
        if not ok:
            self.err(full, v, f"expected {_KIND_WORDS[kind]}")
            return None if default is _MISSING else default
        numbers = [value] if kind == "number" else [x for _, x in value] if kind == "number_table" else []
        if any(not abs(x) <= MAX_TARIFF_NUMBER for x in numbers):  # (1e300 prices overflowed every sum after them)
            self.err(full, v, f"a number of a tariff is at most {MAX_TARIFF_NUMBER:g} in size (no price or quantity "
                              "of a bill is larger)", "check the value and its unit")
            return None if default is _MISSING else default
        return value


#: The largest number a tariff may give (a price, a quantity, a contract) in size: above it no bill's figures stay
#: finite once summed over a year of intervals.
MAX_TARIFF_NUMBER = 1e9

_KIND_WORDS = {
    "str": "a text string",
    "number": "a number",
    "int": "a whole number",
    "bool": "true or false",
    "str_list": "a list of text strings",
    "int_list": "a list of whole numbers",
    "number_table": "a table of numbers, e.g. { peak = 0.2, offpeak = 0.1 }",
    "date_list": "a list of dates (2025-12-25 or \"2025-12-25\")",
}


def _coerce(v: object, kind: str) -> tuple[bool, object]:
    def is_num(x: object) -> bool:
        return isinstance(x, (int, float)) and not isinstance(x, bool)

    if kind == "str":
        return (isinstance(v, str) and v.strip() != "", v.strip() if isinstance(v, str) else v)
    if kind == "number":
        return (is_num(v), float(v) if is_num(v) else v)
    if kind == "int":
        if isinstance(v, int) and not isinstance(v, bool):
            return True, v
        if isinstance(v, float) and v.is_integer():
            return True, int(v)
        return False, v
    if kind == "bool":
        return isinstance(v, bool), v
    if kind == "str_list":
        ok = isinstance(v, list) and all(isinstance(x, str) and x.strip() for x in v)
        return ok, tuple(x.strip() for x in v) if ok else v
    if kind == "int_list":
        ok = isinstance(v, list) and all(isinstance(x, int) and not isinstance(x, bool) for x in v)
        return ok, tuple(v) if ok else v
    if kind == "number_table":
        ok = isinstance(v, dict) and all(is_num(x) for x in v.values())
        return ok, tuple((str(k), float(x)) for k, x in v.items()) if ok else v
    if kind == "date_list":
        if not isinstance(v, list):
            return False, v
        dates = []
        for x in v:
            if isinstance(x, dt.datetime):
                return False, v
            if isinstance(x, dt.date):
                dates.append(x)
            elif isinstance(x, str):
                try:
                    dates.append(dt.date.fromisoformat(x.strip()))
                except ValueError:
                    return False, v
            else:
                return False, v
        return True, tuple(dates)
    raise AssertionError(kind)


def _join(path: str, key: str) -> str:
    return f"{path}.{key}" if path else key


def _parse_window(text: str) -> HourWindow | None:
    m = _HOURS_RE.match(text)
    if not m:
        return None
    h1, m1, h2, m2 = (int(x) for x in m.groups())
    if not (0 <= h1 <= 23 and 0 <= m1 <= 59 and 0 <= m2 <= 59 and (0 <= h2 <= 23 or (h2 == 24 and m2 == 0))):
        return None
    start, end = h1 * 60 + m1, h2 * 60 + m2
    if start == end:
        return None
    return HourWindow(start, end)


_TOML_ARRAY_HEADER = re.compile(r"^\s*\[\[\s*([^\[\]]+?)\s*\]\]")
_TOML_TABLE_HEADER = re.compile(r"^\s*\[\s*([^\[\]]+?)\s*\]")
_TOML_KEY = re.compile(r"""^\s*((?:"[^"]*"|'[^']*'|[A-Za-z0-9_\-]+)(?:\s*\.\s*(?:"[^"]*"|'[^']*'|[A-Za-z0-9_\-]+))*)\s*=""")
_PATH_PART = re.compile(r"^([^\[\]]+)(?:\[(\d+)\])?$")


def _dotted(name: str) -> list[str]:
    return [part.strip().strip("\"'") for part in name.split(".")]


def _encloses(path: list, target: list) -> bool:
    """Whether a written path (tables and a key, as :func:`key_line` reads them) leads to ``target``: each part the
    same, or the last a key holding the inline array whose entry the target names (``penalty`` for
    ``penalty[2]``)."""
    if len(path) > len(target):
        return False
    for k, (written, wanted) in enumerate(zip(path, target)):
        if written != wanted and not (k == len(path) - 1 and written[1] is None and written[0] == wanted[0]):
            return False
    return True


def key_line(text: str, key_path: str) -> int | None:
    r"""The line of a tariff file where a key path of its problem messages is written, or None.

    Parameters
    ----------
    text : str
        The tariff file's TOML text.
    key_path : str
        A path as the messages give it: tables and keys joined by dots, the entries of an array of tables
        counted from 1 (``demand[2].ratchet_frac``, ``energy.price_per_kwh.peak``, ``tariff.currency``).

    Returns
    -------
    int or None
        The 1-based line of the key itself; else of the nearest enclosing table or key written in the file
        (an entry's ``[[demand]]`` line for a key it lacks; an inline table's line for a key inside it);
        None when nothing of the path is written (e.g. a table the file leaves out).

    Examples
    --------
    >>> text = '[tariff]\nname = "t"\n[[demand]]\nname = "a"\n[[demand]]\nname = "b"\nratchet_frac = 1.8\n'
    >>> key_line(text, "demand[2].ratchet_frac"), key_line(text, "demand[1].ratchet_frac"), key_line(text, "fixed")
    (7, 3, None)
    >>> key_line(text, "demand")  # a whole array of tables: its first entry
    3
    >>> key_line('[[energy_power_factor]]\npenalty = [\n  { below = 1.2, percent_per_point = 1 },\n]\n',
    ...          "energy_power_factor[1].penalty[1].below")  # an inline array's entry: the key holding it
    2
    """
    target = []
    for part in key_path.split("."):
        found = _PATH_PART.match(part.strip())
        if not found:
            return None
        target.append((found.group(1), int(found.group(2)) if found.group(2) else None))
    counts: dict[tuple, int] = {}
    table: list[tuple[str, int | None]] = []
    best, best_depth = None, 0

    def resolved(names: list[str], array: bool) -> list[tuple[str, int | None]]:
        out: list[tuple[str, int | None]] = []
        for k, name in enumerate(names):
            prefix = tuple(n for n, _ in out) + (name,)
            last = k == len(names) - 1
            if array and last:
                counts[prefix] = counts.get(prefix, 0) + 1
                out.append((name, counts[prefix]))
            else:
                out.append((name, counts.get(prefix)))
        return out

    for number, line in enumerate(text.splitlines(), start=1):
        header = _TOML_ARRAY_HEADER.match(line)
        if header:
            table = resolved(_dotted(header.group(1)), True)
            path = table
        else:
            header = _TOML_TABLE_HEADER.match(line)
            if header:
                table = resolved(_dotted(header.group(1)), False)
                path = table
            else:
                key = _TOML_KEY.match(line)
                if not key:
                    continue
                path = table + [(name, None) for name in _dotted(key.group(1))]
        if path == target:
            return number
        if len(path) > best_depth and _encloses(path, target):
            best, best_depth = number, len(path)
    if best_depth < len(target) and target[-1][1] is None and not key_path.rstrip().endswith("]"):
        # a whole array of tables named without an entry (e.g. a misspelt ``[[taxs]]``): its first entry's line
        first = key_line(text, f"{key_path}[1]")
        if first is not None and first != best:
            return first
    return best


def tariff_from_dict(data: dict, source: str = "tariff.toml") -> tuple[Tariff | None, list[Problem]]:
    """Build a :class:`Tariff` from a parsed TOML table and return it with every problem found.

    Parameters
    ----------
    data : dict
        The table ``tomllib.load`` returns for a tariff file (format in ``docs/tariffs.md``).
    source : str
        File name to name in the problems.

    Returns
    -------
    tariff : Tariff or None
        None when any error was found.
    problems : list of Problem
        Errors and warnings, each naming the key path in ``column`` (array entries counted from 1,
        e.g. ``periods[2].hours`` is the ``hours`` of the second ``[[periods]]`` entry), the value,
        the rule broken and a hint. An unknown key is an error when it is a near miss of an allowed key
        (:func:`near_misses`), else a warning.

    Examples
    --------
    >>> t, problems = tariff_from_dict({"tariff": {"name": "flat", "currency": "EUR"},
    ...                                 "periods": [{"code": "all"}],
    ...                                 "energy": {"price_per_kwh": {"all": 0.15}}})
    >>> t.energy.price("all"), problems
    (0.15, [])
    """
    r = _Reader(source)
    if not isinstance(data, dict):
        r.err("", type(data).__name__, "a tariff file must hold a TOML table")
        return None, r.problems
    r.known(data, _TOP_KEYS, "")

    head = r.table(data, "tariff", "") or {}
    if "tariff" not in data and not r.reported("tariff"):
        r.err("tariff", None, "missing [tariff] table", "start the file with [tariff] name = ... currency = ...")
    r.known(head, _TARIFF_KEYS, "tariff")
    name = r.get(head, "name", "tariff", "str", default=source) or source
    currency = r.get(head, "currency", "tariff", "str")
    if isinstance(currency, str) and not _CURRENCY_RE.match(currency):
        r.err("tariff.currency", currency, "currency must be a 3-letter ISO 4217 code in capitals", "e.g. EUR, USD, GBP")
    time_zone = r.get(head, "time_zone", "tariff", "str", default=None)
    if time_zone is not None:
        try:
            pd.Timestamp("2000-01-01", tz=time_zone)
        except Exception:  # noqa: BLE001 - any failure means the zone name is unusable
            r.err("tariff.time_zone", time_zone, "unknown time zone", "use an IANA name such as Europe/Berlin")
            time_zone = None
        fixed = fixed_offset_hint(time_zone) if time_zone else None
        if fixed:
            r.warn("tariff.time_zone", time_zone, f"time zone {time_zone} keeps one offset from UTC all year, with no "
                   "summer time: the periods are read on that clock", fixed)
    allow_negative = r.get(head, "allow_negative_prices", "tariff", "bool", default=False)
    notes = r.get(head, "notes", "tariff", "str", default="")
    billing_day = r.get(head, "billing_day", "tariff", "int", default=1)
    if billing_day is not None and not _billing_day_ok(billing_day):
        r.err("tariff.billing_day", billing_day, *_BILLING_DAY_RULE)
        billing_day = None

    cal = r.table(data, "calendar", "") or {}
    r.known(cal, _CALENDAR_KEYS, "calendar")
    holidays = r.get(cal, "holidays", "calendar", "date_list", default=())
    if len(set(holidays)) != len(holidays):
        r.warn("calendar.holidays", [str(d) for d in holidays], "a date is listed twice")

    pos: dict[str, list[int]] = {t: [] for t in ("seasons", "periods", "fixed", "demand", "reactive", "leading", "taxes",
                                                 "coincident_peak", "reactive_demand", "energy_power_factor")}
    seasons: list[Season] = []
    for i, s in enumerate(r.tables(data, "seasons"), start=1):
        p = f"seasons[{i}]"
        r.known(s, _SEASON_KEYS, p)
        sname = r.get(s, "name", p, "str")
        months = r.get(s, "months", p, "int_list")
        if sname is not None and months is not None:
            seasons.append(Season(sname, months))
            pos["seasons"].append(i)
    if "seasons" not in data:
        seasons = [Season("all year", tuple(range(1, 13)))]
    all_seasons = tuple(s.name for s in seasons)

    periods: list[PeriodRule] = []
    n_before = len(r.problems)
    for i, e in enumerate(r.tables(data, "periods"), start=1):
        p = f"periods[{i}]"
        r.known(e, _PERIOD_KEYS, p)
        code = r.get(e, "code", p, "str")
        pseasons = r.get(e, "seasons", p, "str_list", default=all_seasons)
        days = r.get(e, "days", p, "str_list", default=DAY_TYPES)
        hours = r.get(e, "hours", p, "str_list", default=("00:00-24:00",))
        windows = []
        for text in hours or ():
            w = _parse_window(text)
            if w is None:
                r.err(
                    f"{p}.hours",
                    text,
                    "not a clock window HH:MM-HH:MM (start 00:00-23:59, end up to 24:00, start != end)",
                    "e.g. \"07:00-11:00\", \"22:00-06:00\" across midnight, \"00:00-24:00\" for the whole day",
                )
            else:
                windows.append(w)
        if code is not None and pseasons is not None and days is not None and hours is not None:
            if windows and len(windows) == len(hours):
                mask_sum = sum(w.mask().astype(int) for w in windows)
                if np.any(mask_sum > 1):
                    r.warn(f"{p}.hours", list(hours), "windows of one rule overlap each other", "merge them")
            periods.append(PeriodRule(code, pseasons, days, tuple(windows)))
            pos["periods"].append(i)
    periods_complete = not any(pr.severity == "error" for pr in r.problems[n_before:])

    energy = None
    et = r.table(data, "energy", "")
    if et is not None:
        r.known(et, _ENERGY_KEYS, "energy")
        has_kwh, has_kvah = "price_per_kwh" in et, "price_per_kvah" in et
        if has_kwh and has_kvah:
            r.err("energy", None, "give price_per_kwh or price_per_kvah, not both")
        elif not (has_kwh or has_kvah):
            if not r.reported("energy", "price_per_kwh", "price_per_kvah"):
                r.err("energy", None, "[energy] needs price_per_kwh or price_per_kvah")
        else:
            key = "price_per_kwh" if has_kwh else "price_per_kvah"
            prices = r.get(et, key, "energy", "number_table")
            if prices is not None:
                energy = EnergyCharge("kWh" if has_kwh else "kVAh", prices)
                for code, price in prices:
                    # (a price per MWh written where one per kWh is asked; told in currencies whose unit buys
                    # a few kWh, where no utility asks more than a few units)
                    if str(currency or "").upper() in UNIT_PRICED_CURRENCIES and price > ENERGY_PRICE_WARN_PER_KWH:
                        r.warn(f"energy.{key}.{code}", price,
                               f"{price:g} per {'kWh' if has_kwh else 'kVAh'} is far above any utility's energy price",
                               f"is it a price per MWh? {price:g} per MWh is {price / 1000:g} per kWh")

    fixed = []
    for i, f in enumerate(r.tables(data, "fixed"), start=1):
        p = f"fixed[{i}]"
        r.known(f, _FIXED_KEYS, p)
        fname = r.get(f, "name", p, "str", default=f"fixed {i}")
        amount = r.get(f, "charge_per_month", p, "number")
        if amount is not None:
            fixed.append(FixedCharge(fname, amount))
            pos["fixed"].append(i)

    demand = []
    for i, d in enumerate(r.tables(data, "demand"), start=1):
        p = f"demand[{i}]"
        r.known(d, _DEMAND_KEYS, p)
        dname = r.get(d, "name", p, "str", default=f"demand {i}")
        has_kw, has_kva = "price_per_kw_month" in d, "price_per_kva_month" in d
        basis, dprice = None, None
        if has_kw and has_kva:
            r.err(p, dname, "give price_per_kw_month or price_per_kva_month, not both")
        elif not (has_kw or has_kva):
            if not r.reported(p, "price_per_kw_month", "price_per_kva_month"):
                r.err(p, dname, "a demand charge needs price_per_kw_month or price_per_kva_month")
        else:
            basis = "kW" if has_kw else "kVA"
            key = "price_per_kw_month" if has_kw else "price_per_kva_month"
            dprice = r.get(d, key, p, "number")
            if (dprice is not None and str(currency or "").upper() in UNIT_PRICED_CURRENCIES
                    and dprice > DEMAND_PRICE_WARN_PER_KW_MONTH):
                r.warn(f"{p}.{key}", dprice, f"{dprice:g} per {basis}-month is far above any utility's demand price",
                       _demand_price_hint(dprice, basis))
        window = r.get(d, "window_min", p, "int", default=15)
        rolling = r.get(d, "rolling", p, "bool", default=False)
        dperiods = r.get(d, "periods", p, "str_list", default=None)
        dseasons = r.get(d, "seasons", p, "str_list", default=None)
        share = r.get(d, "ratchet_frac", p, "number", default=None)
        months = r.get(d, "ratchet_months", p, "int", default=None)
        pfa = None
        at = r.table(d, "power_factor_adjustment", p)
        if at is not None:
            pa = f"{p}.power_factor_adjustment"
            r.known(at, _PFA_KEYS, pa)
            method = r.get(at, "method", pa, "str")
            target = r.get(at, "target_power_factor", pa, "number")
            pct = r.get(at, "percent_per_point", pa, "number", default=None)
            if method == "percent_per_point" and pct is None and "percent_per_point" not in at:
                r.err(f"{pa}.percent_per_point", None, "method 'percent_per_point' needs percent_per_point", "e.g. 1.0 for 1 % per 0.01 PF")
            if method == "ratio" and "percent_per_point" in at:
                r.warn(f"{pa}.percent_per_point", pct, "ignored with method 'ratio'")
            round_up = r.get(at, "round_points_up", pa, "bool", default=False)
            if method == "ratio" and "round_points_up" in at:
                r.warn(f"{pa}.round_points_up", round_up, "ignored with method 'ratio' (it rounds the points of "
                       "method 'percent_per_point')")
            pf_from = r.get(at, "power_factor_from", pa, "str", default="month_average")
            if method is not None and target is not None:
                pfa = PowerFactorAdjustment(method, target, 1.0 if pct is None else pct, round_up, pf_from)
        contract = excess = None
        for unit in ("kw", "kva"):
            for key in (f"contracted_{unit}", f"excess_price_per_{unit}_month"):
                if key in d and basis is not None and unit != basis.lower():
                    meant = key.replace(unit, basis.lower())
                    r.err(f"{p}.{key}", d[key], f"the charge is on {basis}, so its contract is in {basis} too",
                          f"remove it: {meant} is given" if meant in d else f"write {meant}")
        if basis is not None:
            contract = r.get(d, f"contracted_{basis.lower()}", p, "number", default=None)
            excess = r.get(d, f"excess_price_per_{basis.lower()}_month", p, "number", default=None)
        if basis is not None and dprice is not None and window is not None:
            demand.append(
                DemandCharge(
                    name=dname,
                    basis=basis,
                    price_per_unit_month=dprice,
                    window_min=window,
                    periods=dperiods,
                    seasons=dseasons,
                    ratchet_frac=share,
                    ratchet_months=months if months is not None else 0,
                    power_factor_adjustment=pfa,
                    contracted=contract,
                    excess_price_per_unit_month=excess,
                    rolling=bool(rolling),
                )
            )
            pos["demand"].append(i)

    reactive = []
    for i, e in enumerate(r.tables(data, "reactive"), start=1):
        p = f"reactive[{i}]"
        r.known(e, _REACTIVE_KEYS, p)
        rname = r.get(e, "name", p, "str", default=f"reactive {i}")
        rprice = r.get(e, "price_per_kvarh", p, "number")
        ratio = _allowance(r, e, p, required=True)
        scope = r.get(e, "allowance_per", p, "str", default="month")
        rperiods = r.get(e, "periods", p, "str_list", default=None)
        rseasons = r.get(e, "seasons", p, "str_list", default=None)
        rbands = _reactive_price_bands(r, e, p)
        decimals = r.get(e, "power_factor_decimals", p, "int", default=None)
        if rprice is not None and ratio is not None and rbands is not None:
            reactive.append(ReactiveCharge(rname, rprice, ratio, scope, rperiods, rseasons, rbands, decimals))
            pos["reactive"].append(i)

    leading = []
    for i, e in enumerate(r.tables(data, "leading"), start=1):
        p = f"leading[{i}]"
        r.known(e, _LEADING_KEYS, p)
        lname = r.get(e, "name", p, "str", default=f"leading {i}")
        lprice = r.get(e, "price_per_kvarh", p, "number", default=0.0)
        ratio = _allowance(r, e, p, required=False)
        banned = r.get(e, "banned", p, "bool", default=False)
        scope = r.get(e, "allowance_per", p, "str", default="month")
        lperiods = r.get(e, "periods", p, "str_list", default=None)
        lseasons = r.get(e, "seasons", p, "str_list", default=None)
        if ratio is not None:
            leading.append(LeadingCharge(lname, lprice, ratio, banned, scope, lperiods, lseasons))
            pos["leading"].append(i)

    reactive_demand = []
    for i, e in enumerate(r.tables(data, "reactive_demand"), start=1):
        p = f"reactive_demand[{i}]"
        r.known(e, _REACTIVE_DEMAND_KEYS, p)
        qname = r.get(e, "name", p, "str", default=f"reactive demand {i}")
        qprice = r.get(e, "price_per_kvar_month", p, "number")
        ratio = _allowance(r, e, p, required=True, ratio_key="free_kvar_per_kw")
        qwindow = r.get(e, "window_min", p, "int", default=15)
        qrolling = r.get(e, "rolling", p, "bool", default=False)
        qperiods = r.get(e, "periods", p, "str_list", default=None)
        qseasons = r.get(e, "seasons", p, "str_list", default=None)
        if qprice is not None and ratio is not None and qwindow is not None:
            reactive_demand.append(ReactiveDemandCharge(qname, qprice, ratio, qwindow, bool(qrolling), qperiods, qseasons))
            pos["reactive_demand"].append(i)

    energy_pf = []
    for i, e in enumerate(r.tables(data, "energy_power_factor"), start=1):
        p = f"energy_power_factor[{i}]"
        r.known(e, _ENERGY_PF_KEYS, p)
        ename = r.get(e, "name", p, "str", default=f"power factor {i}")
        penalties = _power_factor_bands(r, e, p, "penalty", "below")
        rebates = _power_factor_bands(r, e, p, "rebate", "above")
        rounding = r.get(e, "round_points", p, "str", default="none")
        leading_too = r.get(e, "count_leading", p, "bool", default=False)
        rebate_leading = r.get(e, "rebate_when_leading", p, "bool", default=True)
        pf_base = r.get(e, "base", p, "str", default="energy_charges")
        if not (e.get("penalty") or e.get("rebate")) and not r.reported(p, "penalty", "rebate"):
            r.err(p, ename, "a power-factor clause on the energy charges needs a penalty or a rebate band",
                  "e.g. penalty = [{ below = 0.9, percent_per_point = 1.0 }]")
        elif penalties is not None and rebates is not None:
            energy_pf.append(EnergyPowerFactorClause(ename, penalties, rebates, rounding, bool(leading_too),
                                                     bool(rebate_leading), pf_base))
            pos["energy_power_factor"].append(i)

    coincident = []
    for i, e in enumerate(r.tables(data, "coincident_peak"), start=1):
        p = f"coincident_peak[{i}]"
        r.known(e, _COINCIDENT_KEYS, p)
        cname = r.get(e, "name", p, "str", default=f"coincident peak {i}")
        cprice = r.get(e, "price_per_kw_month", p, "number")
        if (cprice is not None and str(currency or "").upper() in UNIT_PRICED_CURRENCIES
                and cprice > DEMAND_PRICE_WARN_PER_KW_MONTH):
            r.warn(f"{p}.price_per_kw_month", cprice, f"{cprice:g} per kW-month is far above any utility's demand price",
                   _demand_price_hint(cprice, "kW"))
        cwindow = r.get(e, "window_min", p, "int", default=60)
        read = _peak_times(r, e, p, cwindow)
        if cprice is not None and cwindow is not None and read is not None:
            coincident.append(CoincidentPeak(cname, cprice, read[0], cwindow, written=read[1], years=read[2]))
            pos["coincident_peak"].append(i)

    taxes = []
    for i, e in enumerate(r.tables(data, "taxes"), start=1):
        p = f"taxes[{i}]"
        r.known(e, _TAX_KEYS, p)
        tname = r.get(e, "name", p, "str", default=f"tax {i}")
        rate = r.get(e, "rate_pct", p, "number")
        base = r.get(e, "base", p, "str", default="all_charges")
        if rate is not None:
            taxes.append(Tax(tname, rate, base))
            pos["taxes"].append(i)

    tariff = Tariff(
        name=name,
        currency=currency or "",
        seasons=tuple(seasons),
        periods=tuple(periods),
        holidays=tuple(sorted(set(holidays))),
        energy=energy,
        demand=tuple(demand),
        reactive=tuple(reactive),
        leading=tuple(leading),
        fixed=tuple(fixed),
        taxes=tuple(taxes),
        time_zone=time_zone,
        allow_negative_prices=allow_negative,
        notes=notes,
        coincident=tuple(coincident),
        reactive_demand=tuple(reactive_demand),
        energy_power_factor=tuple(energy_pf),
        billing_day=1 if billing_day is None else int(billing_day),
    )
    # A near miss leaves out what the misspelt key holds: the checks across the tariff (coverage, references,
    # prices) would judge another tariff than the one written, so they wait until the key is named right.
    problems = r.problems + ([] if r.meant else _check(tariff, source, pos, report_gaps=periods_complete))
    if any(pr.severity == "error" for pr in problems):
        return None, problems
    return tariff, problems


def _peak_times(r: _Reader, e: dict, path: str, window_min: object) -> tuple[tuple, tuple] | None:
    """Read a coincident-peak clause's ``times``: TOML local date-times (``2025-07-15T17:00:00``) or text
    (``"2025-07-15 17:00"``). Return (month, day, hour, minute) of each and each as written, or None when any
    is wrong: every wrong time is reported, each with its place in the list. A time off the clock grid of the
    window is reported here when ``window_min`` is a valid window (else the window's own error is)."""
    key = f"{path}.times"
    if "times" not in e:
        if not r.reported(path, "times"):
            r.err(key, None, "a coincident-peak charge needs the system's peak times",
                  'e.g. times = [2025-07-15T17:00:00, 2025-08-02T16:00:00] (local clock, window starts)')
        return None
    raw = e["times"]
    if not isinstance(raw, list) or not raw:
        r.err(key, raw, "expected a non-empty list of date-times", 'e.g. times = [2025-07-15T17:00:00]')
        return None
    out, written, years, bad = [], [], [], False
    n = len(raw)
    for j, value in enumerate(raw):
        stamp = None
        if isinstance(value, dt.datetime):
            stamp = value
        elif isinstance(value, str):
            try:
                stamp = dt.datetime.fromisoformat(value.strip().replace(" ", "T", 1))
            except ValueError:
                stamp = None
        if stamp is None or stamp.tzinfo is not None:
            r.err(key, value, f"time {j + 1} of {n}: expected a local date and time (no zone: the tariff's time_zone "
                  "applies)", 'write 2025-07-15T17:00:00 or "2025-07-15 17:00"')
            bad = True
            continue
        if stamp.second or stamp.microsecond:
            r.err(key, value, f"time {j + 1} of {n}: a peak time starts a window on a whole minute",
                  'e.g. 2025-07-15T17:00:00')
            bad = True
            continue
        if window_min in DEMAND_WINDOWS_MIN and (stamp.hour * 60 + stamp.minute) % window_min:
            r.err(key, value, _off_grid_rule(window_min, j, n), f"e.g. {stamp.hour:02d}:00")
            bad = True
            continue
        out.append((stamp.month, stamp.day, stamp.hour, stamp.minute))
        years.append(stamp.year)
        written.append(_as_written(value) if isinstance(value, dt.datetime) else value.strip())
    return None if bad else (tuple(out), tuple(written), tuple(years))


def _allowance(r: _Reader, e: dict, path: str, *, required: bool, ratio_key: str = "free_kvarh_per_kwh") -> float | None:
    """Read a free allowance given as a ratio (``ratio_key``: kVArh per kWh, or kVAr per kW) or as a power
    factor; return the ratio."""
    has_ratio, has_pf = ratio_key in e, "free_power_factor" in e
    if has_ratio and has_pf:
        r.err(path, None, f"give {ratio_key} or free_power_factor, not both")
        return None
    if has_pf:
        pf = r.get(e, "free_power_factor", path, "number")
        if pf is None:
            return None
        if not 0.0 < pf <= 1.0:
            r.err(f"{path}.free_power_factor", pf, "power factor must lie in (0, 1]")
            return None
        return float(tan_phi_from_power_factor(pf))
    if has_ratio:
        return r.get(e, ratio_key, path, "number")
    if required:
        if not r.reported(path, ratio_key, "free_power_factor"):
            r.err(path, None, f"needs {ratio_key} or free_power_factor",
                  f"use {ratio_key} = 0 to charge every {'kVAr' if ratio_key.endswith('per_kw') else 'kVArh'}")
        return None
    return 0.0


def _reactive_price_bands(r: _Reader, e: dict, path: str) -> tuple[ReactivePriceBand, ...] | None:
    """Read a reactive clause's ``price_by_power_factor`` list (:func:`_band_list`); () when there is none."""
    return _band_list(r, e, path, "price_by_power_factor", "below", "price_per_kvarh", ReactivePriceBand, (0.8, 0.06))


def _power_factor_bands(r: _Reader, e: dict, path: str, key: str, edge: str) -> tuple[PowerFactorBand, ...] | None:
    """Read a power-factor clause's ``penalty`` or ``rebate`` list (``edge``: ``below`` or ``above``,
    :func:`_band_list`)."""
    return _band_list(r, e, path, key, edge, "percent_per_point", PowerFactorBand, (0.95, 0.5))


def _band_list(r: _Reader, e: dict, path: str, key: str, edge: str, value_key: str, make, example: tuple[float, float]):
    """Read a list of bands ``{ <edge> = PF, <value_key> = number }`` under ``key``, each made by ``make(PF, number)``:
    every wrong band is reported with its place in the list; None when any is wrong, () when there is none."""
    full = f"{path}.{key}"
    raw = e.get(key, [])
    if not isinstance(raw, list) or not all(isinstance(x, dict) for x in raw):
        r.err(full, raw, "expected a list of bands",
              f"e.g. {key} = [{{ {edge} = {example[0]:g}, {value_key} = {example[1]:g} }}]")
        return None
    bands, bad = [], False
    for j, band in enumerate(raw, start=1):
        at = f"{full}[{j}]"
        r.known(band, (edge, value_key), at)
        pf = r.get(band, edge, at, "number")
        value = r.get(band, value_key, at, "number")
        if pf is None or value is None:
            bad = True
        else:
            bands.append(make(pf, value))
    return None if bad else tuple(bands)
