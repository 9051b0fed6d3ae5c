"""Validating a case and filling its gaps: from the files as read to a typed, checked :class:`Case`.

Every problem is collected (not just the first) and names the file or sheet, the row as the user sees it,
the column, the value and the rule, with a hint. Errors stop a run; warnings do not. Missing nameplate
data is filled from class and size defaults, and every defaulted field is logged, so each asset gets a
data-quality score. Input files are never written to.
"""

from __future__ import annotations

import datetime as _dt
import difflib
import re
import zoneinfo
from collections.abc import Sequence
from functools import lru_cache
from dataclasses import dataclass, field, replace
from pathlib import Path

import numpy as np
import pandas as pd

from models import defaults as nameplate_defaults
from models import io
from models import options as options_module
from models import profiles as profiles_module
from models.problems import (CaseError, Problem, did_you_mean, error, fixed_offset_hint, folded, has_errors, ordered,
                             shown_value, warning)
from models.wording import counted

HP_TO_KW = 0.745699872  # 1 hp (imperial, 550 ft·lbf/s) in kW, NIST SP 811 (2008) Appendix B.9


def power_label(power_unit: str) -> str:
    """The unit label of motor ratings as a case declares them: ``kW`` or ``hp``."""
    return "hp" if str(power_unit).lower() == "hp" else "kW"


def rating_in_unit(p_kw, power_unit: str):
    """Ratings [kW] in the case's display unit (1 hp = 0.745699872 kW, NIST SP 811 (2008) B.9).

    Examples
    --------
    >>> rating_in_unit(7.45699872, "hp"), rating_in_unit(7.5, "kW")
    (10.0, 7.5)
    """
    return p_kw / HP_TO_KW if power_label(power_unit) == "hp" else p_kw


def usual_supply_hz(f_hz) -> int:
    """The supply frequency most of a fleet's motors give [Hz]: 60 when more give 60 than 50, else 50.

    Examples
    --------
    >>> usual_supply_hz([60, 60, 50, float("nan")]), usual_supply_hz([50, 60]), usual_supply_hz([])
    (60, 50, 50)
    """
    f = pd.to_numeric(pd.Series(np.asarray(f_hz, dtype=object).ravel()), errors="coerce").to_numpy(dtype=float)
    return 60 if int(np.sum(f == 60)) > int(np.sum(f == 50)) else 50


MAX_HOURS_PER_YR = 8784.0  # hours in a leap year
MAX_LOAD_PCT = 125.0
ALLOWED_RESOLUTIONS_MIN = (15, 30, 60)
#: Regions whose minimum-efficiency rules drivecase knows (data/reference/minimum_efficiency_rules.csv).
REGIONS = ("EU", "US", "CN", "OTHER")

#: Synonyms users write for our category values (normalised text -> value).
CATEGORY_SYNONYMS: dict[str, dict[str, str]] = {
    "load_type": {"variable": "variable_torque", "vt": "variable_torque", "centrifugal": "variable_torque",
                  "quadratic": "variable_torque", "constant": "constant_torque", "ct": "constant_torque"},
    "speed_control": {"none": "fixed", "dol": "fixed", "direct on line": "fixed", "throttle": "throttled",
                      "valve": "throttled", "damper": "throttled", "vsd": "drive", "vfd": "drive",
                      "inverter": "drive", "variable speed drive": "drive", "level": "on_off", "float_switch": "on_off",
                      "level_control": "on_off", "level_switch": "on_off", "pressure_switch": "on_off",
                      "cycling": "on_off", "start_stop": "on_off", "on_off_control": "on_off"},
    "machine_type": {"im": "induction", "asynchronous": "induction", "wfsm": "wound_field_synchronous",
                     "synchronous": "wound_field_synchronous", "pm": "pm_synchronous"},
    "efficiency_class": {"": "unknown", "none": "unknown", "n/a": "unknown", "na": "unknown", "?": "unknown"},
    "hazardous_area": options_module.HAZARDOUS_AREA_SYNONYMS,
    "capacitors.control": {"automatic": "stepped", "auto": "stepped", "switched": "stepped", "apfc": "stepped"},
}


@dataclass(frozen=True)
class CaseSettings:
    """Case-wide settings from ``case.toml`` (or the workbook's ``case`` sheet)."""

    name: str
    description: str = ""
    currency: str = "EUR"
    power_unit: str = "kW"
    time_zone: str = "UTC"
    invented: bool = False
    region: str = "EU"
    #: False when the case gave no region and the default (EU) was taken.
    region_declared: bool = True
    #: ISO date the new motors are bought: the region's rules in force then decide which new motors may be
    #: bought (blank: the day of the run).
    purchase_date: str = ""
    #: False when the case gave no purchase date and the day of the run was taken.
    purchase_date_declared: bool = True
    #: Calendar month (1-12) at whose start the changes come into service: where a demand ratchet still
    #: reads the months before a change, its first years depend on it (None: the analysis year's first month).
    in_service_month: int | None = None

    @property
    def mark_invented(self) -> bool:
        """Whether a reader needs telling, beside the name, that the case is invented (its name does not say so)."""
        return bool(self.invented) and "invented" not in str(self.name).lower()


@dataclass(frozen=True)
class Case:
    """A validated case: typed tables with defaults filled, profiles on tz-aware indexes, and the log.

    Attributes
    ----------
    path : pathlib.Path
        Where the case was read from (folder or workbook).
    settings : CaseSettings
        Name, currency, display power unit and time zone.
    assets : pandas.DataFrame
        One row per motor, every schema column present, ``rated_p_kw`` always filled, defaults applied;
        plus ``sync_speed_rpm`` [rpm] and ``data_quality_pct`` [%].
    sites, capacitors, duty : pandas.DataFrame
        Typed tables (possibly empty).
    bill_history : pandas.DataFrame
        The site's bills the case gives, to compare the model of today's fleet with (possibly empty):
        site_id, month (``YYYY-MM``), energy_kwh and, where given, peak_kw, reactive_kvarh, amount.
    verification : pandas.DataFrame
        Energy measured on motors before and after their projects (possibly empty): asset_id, option_id,
        period (baseline or reporting), start_date and end_date (``YYYY-MM-DD``, read as dates), energy_kwh and,
        where given, running_h and production (:mod:`models.verification`).
    options : pandas.DataFrame
        The options catalogue (the case's own, or the default catalogue when the case has none).
    profiles : dict of str -> pandas.Series
        Interval profiles by id, indexed by tz-aware interval-start timestamps in the case time zone.
    profile_info : pandas.DataFrame
        One row per profile: quantity (``shaft_load_pct`` or ``input_kw``), resolution_min, n_intervals,
        start, end, coverage_days.
    defaults : pandas.DataFrame
        Every defaulted field: asset_id, column, value, basis.
    tariffs : dict of str -> models.tariff.Tariff
        Checked tariffs by file name.
    finance : models.finance.FinanceAssumptions
        Finance assumptions from ``finance.toml`` (defaults where the case has none).
    scenarios : tuple of (str, FinanceAssumptions)
        Named scenarios: the case's own assumptions with the keys each ``[[scenarios]]`` table of
        ``scenarios.toml`` (or row of a workbook's ``scenarios`` sheet) changes (:mod:`models.comparison`).
    problems : list of Problem
        Errors and warnings found.
    """

    path: Path
    settings: CaseSettings
    assets: pd.DataFrame
    sites: pd.DataFrame
    capacitors: pd.DataFrame
    duty: pd.DataFrame
    options: pd.DataFrame
    profiles: dict[str, pd.Series]
    profile_info: pd.DataFrame
    defaults: pd.DataFrame
    tariffs: dict[str, dict] = field(default_factory=dict)
    extra: dict[str, object] = field(default_factory=dict)
    finance: object = None
    problems: tuple[Problem, ...] = ()
    bill_history: pd.DataFrame = field(default_factory=pd.DataFrame)
    verification: pd.DataFrame = field(default_factory=pd.DataFrame)
    scenarios: tuple = ()

    @property
    def errors(self) -> list[Problem]:
        """Problems of error severity."""
        return [p for p in self.problems if p.severity == "error"]

    @property
    def warnings(self) -> list[Problem]:
        """Problems of warning severity."""
        return [p for p in self.problems if p.severity == "warning"]


# ---------------------------------------------------------------------------------------------------
# Cell typing
# ---------------------------------------------------------------------------------------------------
_DECIMAL_COMMA = re.compile(r"^[-+]?\d+,\d+$")
_THOUSANDS = re.compile(r"^[-+]?\d{1,3}(,\d{3})+(\.\d+)?$")
_DOT_THOUSANDS_DECIMAL_COMMA = re.compile(r"^[-+]?\d{1,3}(\.\d{3})+,\d+$")
_DOT_THOUSANDS = re.compile(r"^[-+]?[1-9]\d{0,2}(\.\d{3})+$")
#: Note of :func:`_to_number` for "4.200" in a table that writes its decimals with a comma.
DOT_AMBIGUOUS = "ambiguous: the table writes its decimals with a comma, so this point may separate thousands"
#: Notes of :func:`_to_number` for a % sign: dropped in a column in percent, or the number divided by 100 in a
#: column that holds a fraction (docs/conventions.md: ``_pct`` is 0-100, ``_frac`` 0-1).
PERCENT_SIGN_DROPPED = "a % sign was dropped (the column is in percent)"
PERCENT_READ_AS_FRACTION = "a percentage was read as a fraction (divided by 100)"
#: Notes of :func:`_to_number` that describe a repair (a warning) rather than a failure (an error). A cell
#: repaired twice (``95,2%``) has both notes, joined by ``"; also "``.
#: Note of :func:`_to_number` for digits grouped with spaces (``1 200``, as French and other locales write).
SPACE_THOUSANDS = "a space read as a thousands separator"
_SPACED_DIGITS = re.compile(r"\d[ \u00a0\u202f]+\d")
#: Digits grouped by threes with spaces, a decimal part after a point or a comma allowed (``1 200``, ``12 500,5``).
_SPACE_GROUPS = re.compile(r"^[-+]?\d{1,3}([ \u00a0\u202f]\d{3})+([.,]\d+)?%?$")
REPAIR_NOTES = (SPACE_THOUSANDS, "decimal comma read as a decimal point",
                "decimal comma read as a decimal point and '.' as a thousands separator",
                "a date was given; its year was used",
                PERCENT_SIGN_DROPPED, PERCENT_READ_AS_FRACTION)
#: Note of :func:`_to_number` for a % sign in a column that is neither in percent nor a fraction.
PERCENT_SIGN_OUT_OF_PLACE = "a % sign, in a column that is not in percent"
#: Largest plausible line current of a motor [A], for the kW-versus-W check: P / (sqrt(3) V) above it
#: means the rating or the voltage is off by a factor of 1000. Common practice: low-voltage motors are
#: rarely built above about 1.5 MW (about 1,500 A at 690 V); 6,000 A leaves a wide margin.
MAX_PLAUSIBLE_CURRENT_A = 6000.0


def _blank(value: object) -> bool:
    """True for an empty cell (None, NaN, NaT, pandas NA or blank text)."""
    if value is None or value is pd.NaT or value is pd.NA:
        return True
    if isinstance(value, (float, np.floating)) and np.isnan(value):
        return True
    if isinstance(value, np.datetime64) and np.isnat(value):
        return True
    return isinstance(value, str) and not value.strip()


def _is_repair(note: str | None) -> bool:
    """True when a note of :func:`_to_number` describes a repair (or two), not a failure."""
    return note is not None and all(part in REPAIR_NOTES for part in note.split("; also "))


def _to_number(value: object, year: bool = False, ratio: str | None = None,
               comma_decimals: bool = False) -> tuple[float, str | None]:
    """Parse one cell as a finite number; return (value, note) where note explains a repair or failure.

    Parameters
    ----------
    value : object
        Cell as read (text, number, date or blank).
    year : bool
        The column holds a year: a date cell gives its year (a flagged repair).
    ratio : {"pct", "frac", None}
        What a trailing % sign means in the column (:func:`models.io.ratio_kind`): in a column in percent
        (``pct``, 0-100) the sign is dropped; in a fraction column (``frac``, 0-1) the number is divided by
        100 (``89%`` is 0.89); both are flagged repairs. In any other column a % sign is an error.
    comma_decimals : bool
        The table writes decimals with a comma elsewhere (a spreadsheet of a locale that does): a number
        written with points between groups of three digits (``4.200``) may then be 4200, and is not read.

    Returns
    -------
    number : float
        The number, NaN when blank or unreadable.
    note : str or None
        None when read as is; one of :data:`REPAIR_NOTES` for a repair (two joined by ``"; also "`` for a cell
        repaired twice); otherwise why it failed.

    Examples
    --------
    >>> _to_number("89%", ratio="frac")
    (0.89, 'a percentage was read as a fraction (divided by 100)')
    >>> _to_number("95.2 %", ratio="pct")
    (95.2, 'a % sign was dropped (the column is in percent)')
    >>> _to_number("15%")
    (nan, 'a % sign, in a column that is not in percent')
    >>> _to_number("2_50")
    (nan, 'not a number')
    >>> _to_number("4.200"), _to_number("4.200", comma_decimals=True)[0]
    ((4.2, None), nan)
    >>> _to_number("1 200"), _to_number("0.850", comma_decimals=True), _to_number("7 5")[0]
    ((1200.0, 'a space read as a thousands separator'), (0.85, None), nan)
    """
    if _blank(value):
        return np.nan, None
    if isinstance(value, bool):
        return np.nan, "true/false is not a number"
    if isinstance(value, (_dt.date, _dt.time, np.datetime64)):
        if year and isinstance(value, _dt.date):
            return float(value.year), "a date was given; its year was used"
        return np.nan, "a date or time, not a number: the spreadsheet cell is formatted as a date"
    if isinstance(value, (int, float, np.integer, np.floating)):
        try:
            number = float(value)
        except OverflowError:
            return np.nan, "not a finite number"
        return (number, None) if np.isfinite(number) else (np.nan, "not a finite number")
    if isinstance(value, str) and _SPACED_DIGITS.search(value.strip()):  # read without its spaces, and said
        if not _SPACE_GROUPS.match(value.strip()):  # "7 5" is no way of writing a number
            return np.nan, "digits apart that are not groups of three (a space is a thousands separator only so)"
        number, note = _to_number(re.sub(r"[ \u00a0\u202f]", "", value), year, ratio, comma_decimals)
        if np.isnan(number):
            return number, note
        return number, SPACE_THOUSANDS if note is None else f"{SPACE_THOUSANDS}; also {note}"
    text = str(value).strip().replace("\u00a0", "").replace("\u202f", "").replace(" ", "")
    if text.upper() in io.SPREADSHEET_ERRORS:
        return np.nan, f"the spreadsheet formula gave the error {text.upper()}"
    if text.endswith("%") and text[:-1]:
        if ratio not in ("pct", "frac"):
            return np.nan, PERCENT_SIGN_OUT_OF_PLACE
        number, note = _to_number(text[:-1], year=year, comma_decimals=comma_decimals)
        if np.isnan(number):
            return number, note
        if ratio == "frac":  # 15 significant digits: 0.1 / 100 is 0.001, not 1.0000000000000002e-03
            number = float(f"{number / 100.0:.15g}")
        done = PERCENT_SIGN_DROPPED if ratio == "pct" else PERCENT_READ_AS_FRACTION
        return number, done if note is None else f"{done}; also {note}"
    if comma_decimals and _DOT_THOUSANDS.match(text):
        return np.nan, DOT_AMBIGUOUS
    try:
        # (Python reads "2_50" as 250: no spreadsheet or logger writes that, so an underscore is no number)
        number = float(text) if "_" not in text else None
    except ValueError:
        number = None
    if number is not None:
        return (number, None) if np.isfinite(number) else (np.nan, "not a finite number")
    if _THOUSANDS.match(text):
        return np.nan, "ambiguous: a comma as thousands separator or decimal mark"
    if _DECIMAL_COMMA.match(text):
        return float(text.replace(",", ".")), "decimal comma read as a decimal point"
    if _DOT_THOUSANDS_DECIMAL_COMMA.match(text):
        return (float(text.replace(".", "").replace(",", ".")),
                "decimal comma read as a decimal point and '.' as a thousands separator")
    return np.nan, "not a number"


def _writes_comma_decimals(frame: pd.DataFrame, columns: list[str]) -> bool:
    """Whether any text cell of the numeric ``columns`` writes a decimal with a comma (``95,6``, ``1.200,5``)."""
    for column in columns:
        for value in frame[column].tolist():
            if isinstance(value, str) and "," in value:
                text = value.strip().replace("\u00a0", "").replace("\u202f", "").replace(" ", "").rstrip("%")
                if _DECIMAL_COMMA.match(text) or _DOT_THOUSANDS_DECIMAL_COMMA.match(text):
                    return True
    return False


def _plain(value: object) -> object:
    """Return numpy scalars as Python numbers, so problem messages show ``7.5`` rather than a numpy repr."""
    return value.item() if isinstance(value, np.generic) else value


def _normalise_category(value: object) -> str:
    text = str(value).strip().lower()
    return re.sub(r"[\s\-/]+", "_", text) if text not in ("n/a",) else text


class _TableChecker:
    """Types one raw table against its schema and collects problems."""

    def __init__(self, raw: io.RawTable):
        self.raw = raw
        self.schema = io.read_schema(raw.name).set_index("name")
        self.problems: list[Problem] = []
        self.comma_decimals = False  # (set by run: the table writes decimals with a comma)
        self.frame = pd.DataFrame(index=pd.RangeIndex(len(raw.frame)))
        self.rows = np.asarray(raw.rows, dtype=int)

    def header(self, column: str) -> str:
        return self.raw.headers.get(column, column)

    def err(self, i: int | None, column: str | None, value: object, rule: str, hint: str = "") -> None:
        row = None if i is None else int(self.rows[i])
        self.problems.append(error(self.raw.source, row, None if column is None else self.header(column),
                                   _plain(value), rule, hint))

    def warn(self, i: int | None, column: str | None, value: object, rule: str, hint: str = "") -> None:
        row = None if i is None else int(self.rows[i])
        self.problems.append(warning(self.raw.source, row, None if column is None else self.header(column),
                                     _plain(value), rule, hint))

    def run(self) -> pd.DataFrame:
        source = self.raw.frame
        known = set(self.schema.index)
        self.comma_decimals = _writes_comma_decimals(source, [c for c in source.columns if c in known
                                                              and self.schema.loc[c, "dtype"] in ("float", "int")])
        unknown = [c for c in source.columns if c not in known]
        for column in unknown:
            if io.watt_header_target(self.raw.name, column) is not None:
                continue  # a header in W is an error of its own, whose hint gives the conversion
            # the closest column not given, by its name or one of its aliases ('Hours / yr' is 'hours/yr')
            missing = set(self.schema.index) - set(source.columns)
            spellings = {text: ours for text, ours in io.header_map(self.raw.name).items() if ours in missing}
            close = difflib.get_close_matches(io.normalise_header(column), list(spellings), n=1, cutoff=0.75)
            guess = spellings[close[0]] if close else None
            if guess is not None and self.schema.loc[guess, "required"] != "yes":
                # a misspelt optional column would drop what it holds unsaid (a required one is an error of its own)
                self.err(None, column, None, f"unknown column '{column}': it looks like '{guess}', which the file "
                         "does not give (read so, its values would be ignored and defaults used)",
                         f"did you mean '{guess}'? Head the column so, or rename a column of your own that is not "
                         "meant to be read")
                continue
            self.warn(None, column, None, f"unknown column '{column}' was ignored",
                      (f"did you mean '{guess}'? " if guess else "") + f"known columns: {', '.join(self.schema.index)}")
        for name, spec in self.schema.iterrows():
            if name in source.columns:
                self.frame[name] = self._typed(name, spec, source[name].tolist())
            else:
                self.frame[name] = self._empty(spec["dtype"])
            if spec["required"] == "yes":
                if name not in source.columns:
                    self.err(None, name, None, f"required column '{name}' is missing",
                             _missing_column_hint(name, unknown, self.raw.name))
                else:
                    missing = self.frame[name].isna().to_numpy()
                    for i in np.flatnonzero(missing):
                        if _blank(source[name].iloc[i]):
                            self.err(i, name, None, f"'{name}' is required", self._required_hint(name, source, i))
        return self.frame

    def _required_hint(self, name: str, source: pd.DataFrame, i: int) -> str:
        """What to write in a required cell left blank (the poles a nameplate speed implies, where it is given)."""
        if name == "poles" and {"rated_speed_rpm", "supply_f_hz"} <= set(source.columns):
            speed = pd.to_numeric(pd.Series([source["rated_speed_rpm"].iloc[i]]), errors="coerce").iloc[0]
            f_hz = pd.to_numeric(pd.Series([source["supply_f_hz"].iloc[i]]), errors="coerce").iloc[0]
            if speed > 0 and f_hz > 0:
                poles = 2 * int(np.floor(60.0 * f_hz / speed))  # the synchronous speed just above the nameplate's
                if poles >= 2:
                    return (f"fill in this cell: {speed:g} rpm at {f_hz:g} Hz is a {poles}-pole motor "
                            f"(synchronous speed 120·f/p = {120 * f_hz / poles:g} rpm)")
        return "fill in this cell"

    def _warn_percent(self, name: str, note: str, cells: list[int], values: list[object], numbers: np.ndarray) -> None:
        """One warning for the % signs of a column: dropped (a column in percent) or read as a fraction."""
        written = [str(values[i]).strip() for i in cells]
        first = numbers[cells[0]]
        if note == PERCENT_SIGN_DROPPED:
            hint = f"write plain numbers in '{name}', which is in percent (0-100): {first:g} for {written[0]}"
            if len(cells) == 1:
                self.warn(cells[0], name, values[cells[0]],
                          f"{note}: '{written[0]}' was read as {numbers[cells[0]]:g}", hint)
            else:
                shown = _rows_shown([int(self.rows[i]) for i in cells], [values[i] for i in cells])
                self.warn(None, name, None, f"% signs were dropped in {len(cells)} cells of this column (the column is "
                          f"in percent): {shown}", hint)
            return
        as_written = 100.0 * first
        meant = f" (or {as_written:.15g} if that was meant)" if 0 <= as_written <= 1 else ""
        hint = f"'{name}' takes a fraction (0-1): write {first:g} for {written[0]}{meant}, without a % sign"
        if len(cells) == 1:
            self.warn(cells[0], name, values[cells[0]],
                      f"{written[0]} read as {numbers[cells[0]]:g}: '{name}' is a fraction (0-1), not a percentage", hint)
        else:
            rows = [int(self.rows[i]) for i in cells]
            items = [f"{r} ({w} as {numbers[i]:g})" for r, w, i in zip(rows[:5], written[:5], cells[:5])]
            rest = f" and {len(cells) - 5} more" if len(cells) > 5 else ""
            self.warn(None, name, None, f"percentages were read as fractions (divided by 100) in {len(cells)} cells "
                      f"of this column: rows {', '.join(items)}{rest}", hint)

    @staticmethod
    def _empty(dtype: str) -> pd.Series:
        return pd.Series(dtype="float64") if dtype in ("float", "int") else pd.Series(dtype=object)

    def _typed(self, name: str, spec: pd.Series, values: list[object]) -> pd.Series:
        dtype = spec["dtype"]
        if dtype in ("float", "int"):
            numbers = np.empty(len(values))
            is_year = name.startswith("year")
            ratio = io.ratio_kind(self.raw.name, name)
            repaired: dict[str, list[int]] = {}
            for i, value in enumerate(values):
                number, note = _to_number(value, year=is_year, ratio=ratio, comma_decimals=self.comma_decimals)
                numbers[i] = number
                if _is_repair(note):
                    repaired.setdefault(note, []).append(i)
                elif note is not None:
                    hint = f"unit: {spec['unit']}" if spec["unit"] != "-" else "write a plain number"
                    if note == PERCENT_SIGN_OUT_OF_PLACE:
                        hint = (f"write the value in {spec['unit']}, without a % sign" if spec["unit"] != "-"
                                else "write a plain number, without a % sign")
                    if note == DOT_AMBIGUOUS:
                        written = str(value).strip()
                        hint = (f"write {written.replace('.', '')} if the point separates thousands, or "
                                f"{written.replace('.', ',')} if it is a decimal mark ({hint})")
                    elif note.startswith("ambiguous"):
                        written = str(value).strip()
                        hint = (f"write {written.replace(',', '')} without the commas ({hint})"
                                if written.count(",") > 1 else  # commas between thousands only
                                f"write {written.replace(',', '')} without the comma, or {written.replace(',', '.')} "
                                f"if the comma is a decimal mark ({hint})")
                    if note.startswith("a date"):
                        hint = f"format the cell as a number in the spreadsheet ({hint})"
                    written = str(value).strip()
                    year_in = re.search(r"\b(1[89]|2[01])\d\d\b", written) if is_year else None
                    if year_in and note == "not a number":
                        hint = f"write the year alone, e.g. {year_in.group(0)}"
                    elif note == "not a number" and re.match(r"^[$€£¥]\s*[0-9]", written):
                        hint = f"write a plain number without the currency sign or thousands commas ({hint})"
                    rule = f"'{name}' must be a number" + ("" if note == "not a number" else f" ({note})")
                    self.err(i, name, value, rule, hint)
            for note, cells in repaired.items():  # one warning per column and kind of repair, not one per cell
                if note in (PERCENT_SIGN_DROPPED, PERCENT_READ_AS_FRACTION):
                    self._warn_percent(name, note, cells, values, numbers)
                    continue
                hint = ("format the cells as numbers" if note.startswith("a date")
                        else "write numbers without spaces (1200, not 1 200) to avoid this repair" if note == SPACE_THOUSANDS
                        else "use a point as decimal mark to avoid this repair")
                if PERCENT_SIGN_DROPPED in note or PERCENT_READ_AS_FRACTION in note:
                    hint = (f"write plain numbers with a point as decimal mark: '{name}' is "
                            + ("in percent (0-100)" if ratio == "pct" else "a fraction (0-1): 0.89 for 89 %"))
                if len(cells) == 1:
                    self.warn(cells[0], name, values[cells[0]], note, hint.replace("cells as numbers", "cell as a number"))
                else:
                    shown = _rows_shown([int(self.rows[i]) for i in cells], [values[i] for i in cells])
                    self.warn(None, name, None, f"{note} in {len(cells)} cells of this column: {shown}", hint)
            lo = float(spec["min"]) if spec["min"] else -np.inf
            hi = float(spec["max"]) if spec["max"] else np.inf
            bad = np.flatnonzero(~np.isnan(numbers) & ((numbers < lo) | (numbers > hi)))
            for i in bad:
                unit = "" if spec["unit"] == "-" else f" {spec['unit']}"
                self.err(i, name, values[i], f"'{name}' must lie between {spec['min'] or '-inf'} and {spec['max'] or 'inf'}{unit}",
                         _range_hint(name, numbers[i]))
            if dtype == "int":
                frac = np.flatnonzero(~np.isnan(numbers) & (np.abs(numbers - np.round(numbers)) > 1e-9))
                for i in frac:
                    self.err(i, name, values[i], f"'{name}' must be a whole number")
            if spec["allowed"]:
                allowed = [float(a) for a in spec["allowed"].split("|")]
                for i in np.flatnonzero(~np.isnan(numbers) & ~np.isin(numbers, allowed)):
                    self.err(i, name, values[i], f"'{name}' must be one of {spec['allowed'].replace('|', ', ')}")
            return pd.Series(numbers, dtype="float64")
        if dtype == "bool":
            flags: list[object] = []
            for i, value in enumerate(values):
                if _blank(value):
                    flags.append(None)
                    continue
                text = str(value).strip().lower()
                if text in ("true", "yes", "1", "y", "1.0"):
                    flags.append(True)
                elif text in ("false", "no", "0", "n", "0.0"):
                    flags.append(False)
                else:
                    self.err(i, name, value, f"'{name}' must be true or false (yes or no, 1 or 0)")
                    flags.append(None)
            return pd.Series(flags, dtype=object)
        if dtype == "category":
            allowed = spec["allowed"].split("|")
            synonyms = CATEGORY_SYNONYMS.get(f"{self.raw.name}.{name}", CATEGORY_SYNONYMS.get(name, {}))
            out: list[object] = []
            for i, value in enumerate(values):
                if _blank(value):
                    out.append(None)
                    continue
                text = _normalise_category(value)
                text = synonyms.get(text, synonyms.get(str(value).strip().lower(), text))
                if name == "efficiency_class":
                    text = text.upper() if text.lower() != "unknown" else "unknown"
                if text not in allowed:
                    self.err(i, name, value, f"'{name}' must be one of: {', '.join(allowed)}",
                             (_class_name_hint(value) if name == "efficiency_class" else "") or "check the spelling")
                    out.append(None)
                else:
                    out.append(text)
            return pd.Series(out, dtype=object)
        # text columns: integers read from a spreadsheet (1.0) are shown without the decimal
        out_text = []
        for value in values:
            if _blank(value):
                out_text.append(None)
            elif isinstance(value, float) and value.is_integer():
                out_text.append(str(int(value)))
            else:
                out_text.append(str(value).strip())
        return pd.Series(out_text, dtype=object)


#: Efficiency class names of other schemes and the IE class each corresponds to (common practice: the
#: IEC 60034-30-1 levels were set beside them, IE1 standard, IE2 high, IE3 premium, IE4 super premium
#: efficiency; equivalences from memory), tried in order on the lower-case text.
CLASS_NAME_EQUIVALENTS: tuple[tuple[str, str], ...] = (
    ("super premium", "IE4"), ("super-premium", "IE4"), ("premium", "IE3"), ("epact", "IE2"),
    ("energy efficient", "IE2"), ("high efficiency", "IE2"), ("eff1", "IE2"), ("eff2", "IE1"),
    ("standard", "IE1"),
)


#: Enclosure codes of NEMA nameplates, which registers sometimes put in a class or type column.
ENCLOSURE_CODES = frozenset({"tefc", "odp", "tenv", "teao", "txp", "xp", "wpi", "wpii", "tebc", "tewc"})


def _class_name_hint(value: object) -> str:
    """A hint for an efficiency class written in another scheme's words ("" when none matches).

    Examples
    --------
    >>> _class_name_hint("NEMA Premium")
    "'NEMA Premium' corresponds to IE3 (IEC 60034-30-1: IE1 standard, IE2 high, IE3 premium, IE4 super premium efficiency): write IE3"
    >>> _class_name_hint("IE9")
    ''
    >>> _class_name_hint("TEFC")
    "'TEFC' names the enclosure, not the efficiency: write the IE class (IE1-IE4), or leave the cell blank"
    """
    text = str(value).strip().lower()
    if text.replace(" ", "") in ENCLOSURE_CODES:
        return (f"'{str(value).strip()}' names the enclosure, not the efficiency: write the IE class (IE1-IE4), or "
                "leave the cell blank")
    for words, ie in CLASS_NAME_EQUIVALENTS:
        if words in text:
            return (f"'{str(value).strip()}' corresponds to {ie} (IEC 60034-30-1: IE1 standard, IE2 high, IE3 premium, "
                    f"IE4 super premium efficiency): write {ie}")
    return ""


def _missing_column_hint(name: str, unknown: list[str], table: str | None = None) -> str:
    """Suggest which unrecognised header may be the missing column.

    A header that names the column in W (``Rated power (W)`` for ``rated_p_kw``) gets the conversion, never
    the bare rename, which would read watts as kilowatts; a header in W of another column is no candidate.
    """
    if table is not None:
        for c in unknown:
            if io.watt_header_target(table, c) == name:
                return f"the column '{c}' is in W: divide its values by 1000 and head it '{name}'"
        unknown = [c for c in unknown if io.watt_header_target(table, c) is None]
    candidates = {io.normalise_header(c): c for c in unknown if not str(c).startswith("(blank header")}
    close = difflib.get_close_matches(io.normalise_header(name), list(candidates), n=1, cutoff=0.6)
    if close:
        return f"the column '{candidates[close[0]]}' was not recognised: if it is {name}, head it '{name}'"
    return f"add a column headed '{name}'"


def _rows_shown(rows: list[int], values: list[object] | None = None, first: int = 5) -> str:
    """The first few rows of a list (with their cells, when given) for a message that counts the rest.

    Examples
    --------
    >>> _rows_shown([4, 7, 10], ["95,6", "95,4", "0,7"], first=2)
    "rows 4 ('95,6'), 7 ('95,4') and 1 more"
    """
    items = [str(r) if values is None else f"{r} ({shown_value(v)})" for r, v in
             zip(rows[:first], (values or [None] * len(rows))[:first])]
    rest = f" and {len(rows) - first} more" if len(rows) > first else ""
    return f"{'row' if len(rows) == 1 else 'rows'} {', '.join(items)}{rest}"


def _range_hint(name: str, value: float) -> str:
    if name.endswith("_kw") and value > 1000:
        return "is this in W rather than kW? divide by 1000"
    if name.endswith("_v_v") and 0 < value < 100:
        return "is this in kV rather than V? multiply by 1000"
    if name.endswith("_pct") and 0 < value <= (1.0 if name == "rated_efficiency_pct" else 1.25):
        return f"percent columns take 0-100; was a fraction entered? {value:g} as a fraction is {value * 100:.4g} %"
    if name.endswith("_pct") and value < 0:
        return "percent columns take 0-100"
    if name.endswith("power_factor") and 1 < value <= 100:
        # (1.2 is no percent written for a fraction: 1.2 % is no power factor of a motor either)
        return (f"a power factor is a fraction (0-1): {value:g} % is {value / 100:g}" if value >= 10
                else "a power factor lies between 0 and 1 (a motor's full-load one between about 0.7 and 0.95)")
    if name.endswith("power_factor") and value <= 0:
        return "a power factor lies between 0 and 1 (a motor's full-load one between about 0.7 and 0.95)"
    if name in ("rated_p_kw", "rated_p_hp") and value <= 0:
        return "rated power must be positive"
    return "check the value and its unit"


# ---------------------------------------------------------------------------------------------------
# Settings
# ---------------------------------------------------------------------------------------------------
@lru_cache(maxsize=1)
def _known_zones() -> frozenset[str]:
    """IANA zone names of the installed time-zone database (never ``localtime``, which varies by machine)."""
    return frozenset(zoneinfo.available_timezones()) - {"localtime", "Factory"}


#: The years a purchase date may fall in: the efficiency rules' history to a planning horizon ahead.
PURCHASE_YEARS = (1990, 2100)
#: The settings a case declares (docs/case-format.md, "case.toml").
SETTING_KEYS = ("name", "description", "currency", "power_unit", "time_zone", "invented", "region", "purchase_date",
                "in_service_month")


def _settings_table(raw: io.RawCase) -> tuple[dict, list[str]]:
    """The case's settings as one table, and the known keys read from above the ``[case]`` line.

    ``case.toml`` writes its settings under ``[case]``; a file written without that line (``name = ...``
    at the top, as finance.toml writes its keys) gives the same settings: known top-level keys are read as
    settings where ``[case]`` does not give them too.
    """
    settings = raw.settings if isinstance(raw.settings, dict) else {}
    data = settings.get("case", {})
    data = dict(data) if isinstance(data, dict) else {}
    top = [k for k in settings if k in SETTING_KEYS and not isinstance(settings[k], dict)]
    for key in top:
        data.setdefault(key, settings[key])
    return data, top


def _settings(raw: io.RawCase, problems: list[Problem]) -> CaseSettings:
    source = raw.settings_source
    if not isinstance(raw.settings, dict):
        raw.settings = {}
    given = raw.settings.get("case", {})
    if not isinstance(given, dict):
        problems.append(error(source, None, "case", given, "'case' must be a table of settings",
                              "write [case] on a line of its own, then one key = value per line"))
    data, top = _settings_table(raw)
    default_name = raw.path.stem if raw.kind == "workbook" else raw.path.name
    known = set(SETTING_KEYS)
    for key in (given if isinstance(given, dict) else {}):
        if key not in known:
            problems.append(warning(source, None, key, given[key], f"unknown setting '{key}' was ignored",
                                    did_you_mean(key, sorted(known - set(data)))
                                    + f"known settings: {', '.join(sorted(known))}"))
    twice = [k for k in top if isinstance(given, dict) and k in given]
    read = [k for k in top if k not in twice]
    if read:  # named by its first key, so the message stands on the line where [case] belongs
        one = len(read) == 1
        problems.append(warning(source, None, read[0], None,
                                f"{counted(len(read), 'setting')} written without a [case] line ({', '.join(read)}) "
                                f"{'was' if one else 'were'} read as the case's settings",
                                f"move {'it' if one else 'them'} under the [case] line" if isinstance(given, dict) and given
                                else f"write [case] on a line of its own above {'it' if one else 'them'}"))
    for key in twice:
        problems.append(warning(source, None, key, raw.settings[key],
                                f"'{key}' is given above the [case] line and under it; the value under [case] is used",
                                "delete the line above [case]"))
    for key, value in raw.settings.items():
        if key == "case" or key in top:
            continue
        if isinstance(value, dict):
            problems.append(warning(source, None, key, None, f"unknown table [{key}] was ignored",
                                    "case.toml holds a [case] table only"))
        else:
            problems.append(warning(source, None, key, value, f"unknown key '{key}' was ignored",
                                    did_you_mean(key, sorted(known - set(data)))
                                    + f"case.toml holds the settings {', '.join(SETTING_KEYS)}, under a [case] line"))
    currency = str(data.get("currency", "EUR")).strip().upper()
    if not re.fullmatch(r"[A-Z]{3}", currency):
        problems.append(error(source, None, "currency", data.get("currency"), "currency must be a three-letter ISO 4217 code",
                              "for example EUR, USD, GBP, INR, ZAR"))
    power_unit = str(data.get("power_unit", "kW")).strip()
    if power_unit.lower() not in ("kw", "hp"):
        problems.append(error(source, None, "power_unit", power_unit, "power_unit must be kW or hp"))
    power_unit = "hp" if power_unit.lower() == "hp" else "kW"
    zone = str(data.get("time_zone", "UTC")).strip()
    if "time_zone" not in data:
        problems.append(warning(source, None, "time_zone", None, "no time zone declared; UTC is assumed",
                                "set time_zone to the site's IANA zone, e.g. Europe/Berlin"))
    try:
        zoneinfo.ZoneInfo(zone)
        if zone not in _known_zones() and zone != "UTC":
            raise ValueError(zone)
    except (zoneinfo.ZoneInfoNotFoundError, ValueError, OSError, TypeError):
        problems.append(error(source, None, "time_zone", zone, "time_zone must be an IANA time-zone name",
                              "for example Europe/Berlin, America/Chicago, Asia/Kolkata"))
        zone = "UTC"
    fixed = fixed_offset_hint(zone)
    if fixed:
        problems.append(warning(source, None, "time_zone", zone, f"time zone {zone} keeps one offset from UTC all "
                                "year, with no summer time", fixed))
    invented = data.get("invented", False)
    region = str(data.get("region", "EU")).strip().upper()
    if region not in REGIONS:
        problems.append(error(source, None, "region", region, f"region must be one of {', '.join(REGIONS)}",
                              "it selects the minimum-efficiency rules that apply to new motors"))
        region = "EU"
    given = data.get("purchase_date", "")
    if isinstance(given, _dt.datetime):
        given = given.date()
    purchase = given.isoformat() if isinstance(given, _dt.date) else str(given).strip()
    if purchase:
        try:
            if len(purchase) != 10:
                raise ValueError(purchase)
            purchase = _dt.date.fromisoformat(purchase).isoformat()
        except ValueError:
            problems.append(error(source, None, "purchase_date", data.get("purchase_date"),
                                  "purchase_date must be a date written YYYY-MM-DD",
                                  "the day the new motors are bought, e.g. 2027-09-01; leave it out for the day of the run"))
            purchase = ""
        else:
            if not PURCHASE_YEARS[0] <= int(purchase[:4]) <= PURCHASE_YEARS[1]:
                # (the rules are read by date; a date far from today is a slip of the keyboard)
                problems.append(error(source, None, "purchase_date", data.get("purchase_date"),
                                      f"purchase_date must fall between {PURCHASE_YEARS[0]} and {PURCHASE_YEARS[1]}",
                                      "the day the new motors are bought, e.g. 2027-09-01; leave it out for the day "
                                      "of the run"))
                purchase = ""
    in_service = data.get("in_service_month")
    if in_service is not None:
        number = in_service if isinstance(in_service, int) and not isinstance(in_service, bool) else None
        if isinstance(in_service, float) and in_service.is_integer():
            number = int(in_service)  # (a workbook cell holds numbers as floats)
        if isinstance(in_service, str) and in_service.strip().isdigit():
            number = int(in_service.strip())  # (a number written as text, as the finance settings accept)
        if number is None or not 1 <= number <= 12:
            problems.append(error(source, None, "in_service_month", in_service,
                                  "in_service_month must be a whole month number from 1 (January) to 12 (December)",
                                  "the month the changes come into service, e.g. 4 for April; leave it out for "
                                  "January, the analysis year's first month"))
        in_service = number if number is not None and 1 <= number <= 12 else None
    return CaseSettings(
        in_service_month=in_service,
        region=region,
        region_declared="region" in data,
        purchase_date=purchase,
        purchase_date_declared=bool(purchase),
        name=str(data.get("name", default_name)),
        description=str(data.get("description", "")),
        currency=currency,
        power_unit=power_unit,
        time_zone=zone,
        invented=bool(invented) if isinstance(invented, bool) else str(invented).lower() in ("true", "yes", "1"),
    )


# ---------------------------------------------------------------------------------------------------
# Profiles
# ---------------------------------------------------------------------------------------------------
#: Most problems of one kind reported per profile; the rest are counted in one summary line.
MAX_LISTED = 20
#: Spreadsheet date serials accepted from workbook cells: days since 1899-12-30 for the years
#: 1954-2119 (the 1900 leap-year bug of the spreadsheet epoch only affects dates before March 1900).
SERIAL_DAYS_RANGE = (20000.0, 80000.0)
_SPREADSHEET_EPOCH = np.datetime64("1899-12-30T00:00:00", "us")
_NAT = np.iinfo(np.int64).min
#: Interval timestamps must fall in these years (a plausibility window for measured load data).
TIMESTAMP_YEARS = (1900, 2199)
_FIRST_US = int(np.datetime64(f"{TIMESTAMP_YEARS[0]}-01-01", "us").astype(np.int64))
_END_US = int(np.datetime64(f"{TIMESTAMP_YEARS[1] + 1}-01-01", "us").astype(np.int64))


def _listed(problems: list[Problem], items, make, summary) -> None:
    """Append a problem for each of the first :data:`MAX_LISTED` items and one line for the rest.

    The line for the rest (``summary(n)``) takes the row and value of the first item it counts, so it is
    shown after the rows it continues (:func:`models.problems.ordered`) and says where the rest begins.
    """
    items = list(items)
    for item in items[:MAX_LISTED]:
        problems.append(make(item))
    if len(items) > MAX_LISTED:
        line, first = summary(len(items) - MAX_LISTED), make(items[MAX_LISTED])
        if first.row is not None:
            line = replace(line, row=first.row, value=first.value if line.value is None else line.value,
                           rule=f"{line.rule}, the first of them in this row")
        problems.append(line)


def _profile_id_text(value: object) -> str | None:
    """A profile id cell as an id: None when blank; a number as written (7.0 is "7"); text stripped."""
    if _blank(value):
        return None
    return str(int(value)) if isinstance(value, float) and value.is_integer() else str(value).strip()


class _ProfileRows(Sequence):
    """The table rows of each profile (``rows[k]``: an integer array, in file order) from the profiles' bounds
    in the rows sorted by profile, and that order (None: the table's own, its rows made when asked for)."""

    def __init__(self, bounds: np.ndarray, order: np.ndarray | None):
        self.bounds, self.order = bounds, order

    def __len__(self) -> int:
        return len(self.bounds) - 1

    def __getitem__(self, k):
        if isinstance(k, slice):
            return [self[j] for j in range(*k.indices(len(self)))]
        k = range(len(self))[k]
        a, b = int(self.bounds[k]), int(self.bounds[k + 1])
        return np.arange(a, b) if self.order is None else self.order[a:b]


def _profile_ids(column: pd.Series) -> tuple[np.ndarray, np.ndarray]:
    """Return (codes, ids): an integer code per row (-1 when blank) and the ids in order of appearance."""
    if isinstance(column.dtype, pd.CategoricalDtype):
        # ids read as categories (a long Parquet table): each category written as an id once, as a cell would be
        # (stripped, blank when empty), then the rows' codes of those ids, in order of appearance
        written = pd.Series(np.asarray(column.cat.categories, dtype=object), dtype=object).map(_profile_id_text)
        id_of_category, ids = pd.factorize(written, use_na_sentinel=True)
        codes = np.asarray(column.array.codes)  # (a read-only view of the column's codes)
        if (len(codes) and len(ids) == len(written) and (id_of_category == np.arange(len(written))).all()
                and codes[0] == 0 and codes[-1] == len(written) - 1 and bool((np.diff(codes) <= 1).all())
                and bool((codes[1:] >= codes[:-1]).all())):
            # the usual table: its rows grouped by id, the ids in order and each written once (no blank, none equal
            # to another once stripped), so the codes are already the ids' in order of appearance: no copy
            return codes, np.asarray(ids, dtype=object)
        appearance, categories_seen = pd.factorize(codes)  # (category -1: a blank cell)
        id_seen = np.where(categories_seen >= 0, id_of_category[np.maximum(categories_seen, 0)], -1)
        code_of_seen, seen = pd.factorize(id_seen)  # the ids in order of appearance (id -1, blank: taken out below)
        blank = np.flatnonzero(seen < 0)
        if len(blank):
            k = int(blank[0])
            code_of_seen = np.where(code_of_seen == k, -1, np.where(code_of_seen > k, code_of_seen - 1, code_of_seen))
            seen = np.delete(seen, k)
        return code_of_seen[appearance], np.asarray(np.asarray(ids, dtype=object)[seen], dtype=object)
    if not pd.api.types.is_string_dtype(column.dtype) or column.dtype == object:
        # numbers (a Parquet id column of floats, a workbook cell) are ids as written: 7.0 is "7"
        column = column.astype(object).map(_profile_id_text)
    codes, uniques = pd.factorize(column, use_na_sentinel=True)
    return np.asarray(codes), np.asarray(uniques, dtype=object)


def _profile_values(series: pd.Series, column: str, source: str, rows: np.ndarray | io.RowNumbers, header: str,
                    problems: list[Problem], where=lambda i: "") -> np.ndarray:
    """Parse a value column to finite floats (NaN where blank or bad); decimal commas are repaired.

    In a column in percent (``shaft_load_pct``) a trailing % sign is dropped, as in the register, with one
    warning for the column; in any other column it is an error. ``where(i)`` says which profile and interval
    row ``i`` belongs to (`` in profile 'P' at T``), for the messages of a long table whose row numbers alone
    are hard to find.
    """
    if pd.api.types.is_bool_dtype(series.dtype) or series.dtype == object:
        series = series.astype(object)
        flags = series.map(lambda v: isinstance(v, (bool, np.bool_))).to_numpy(dtype=bool)
        numeric = pd.to_numeric(series.where(~flags, "true/false"), errors="coerce").astype(float).to_numpy(copy=True)
    elif pd.api.types.is_float_dtype(series.dtype) and isinstance(series.dtype, np.dtype):
        numeric = series.to_numpy(dtype=float)  # (read as it is: nothing below writes into a float column's values)
    else:
        numeric = pd.to_numeric(series, errors="coerce").astype(float).to_numpy(copy=True)
    if pd.api.types.is_float_dtype(series.dtype):  # (a float cell is a number or blank: nothing is bad)
        bad = np.zeros(0, dtype=np.intp)
    else:
        # a blank text cell (Parquet's empty string, spaces) is blank, as an empty CSV cell is
        given = series.notna().to_numpy(copy=True)
        if series.dtype == object or pd.api.types.is_string_dtype(series.dtype):  # (numbers hold no text)
            text = series[given].astype(str)
            given[np.flatnonzero(given)[text.str.strip().eq("").to_numpy(dtype=bool)]] = False
        bad = np.flatnonzero(np.isnan(numeric) & given)
    if len(bad):
        cells = series.iloc[bad].map(lambda v: str(v).strip())
        signed = cells.str.endswith("%").to_numpy(dtype=bool)
        in_percent = io.ratio_kind("profiles", column) == "pct"
        text = cells.where(~signed, cells.str[:-1].str.strip()) if in_percent else cells
        plain = np.full(len(bad), np.nan)
        if in_percent and signed.any():
            plain[signed] = pd.to_numeric(text[signed], errors="coerce").to_numpy(dtype=float)
            numeric[bad[~np.isnan(plain)]] = plain[~np.isnan(plain)]
        comma = np.isnan(plain) & text.str.match(r"^[-+]?\d+,\d+$").to_numpy(dtype=bool)
        if comma.any():
            numeric[bad[comma]] = pd.to_numeric(text[comma].str.replace(",", ".", regex=False)).to_numpy(dtype=float)
            repaired = bad[comma]
            problems.append(warning(source, int(rows[repaired[0]]), header, None,
                                    f"decimal commas were read as decimal points ({counted(comma.sum(), 'cell')}: "
                                    f"{_rows_shown(rows[repaired].tolist(), list(cells[comma].iloc[:5]))})",
                                    "use a point as decimal mark"))
        dropped = signed & (comma | ~np.isnan(plain)) if in_percent else np.zeros(len(bad), dtype=bool)
        if dropped.any():
            first = int(np.flatnonzero(dropped)[0])
            problems.append(warning(source, int(rows[bad[first]]), header, None,
                                    f"% signs were dropped in {counted(dropped.sum(), 'cell')} of '{column}', which is in "
                                    f"percent ({_rows_shown(rows[bad[dropped]].tolist(), list(cells[dropped].iloc[:5]))})",
                                    f"write plain numbers in '{column}' (0-100 % of rated power): "
                                    f"{numeric[bad[first]]:g} for {cells.iloc[first]}"))

        def not_a_number(i: int) -> Problem:
            value = series.iloc[i]
            if str(value).strip().endswith("%"):
                return error(source, int(rows[i]), header, value,
                             f"'{column}' must be a number (a % sign, in a column that is not in percent){where(i)}",
                             f"give '{column}' in its unit, without a % sign")
            return error(source, int(rows[i]), header, value, f"'{column}' must be a number{where(i)}",
                         "write a plain number; spreadsheet error values (#N/A, #DIV/0!) are not numbers")

        _listed(problems, bad[~comma & np.isnan(plain)], not_a_number,
                lambda n: error(source, None, header, None, f"{n} more cells of '{column}' are not numbers"))
    infinite = np.flatnonzero(np.isinf(numeric))
    _listed(problems, infinite,
            lambda i: error(source, int(rows[i]), header, series.iloc[i], f"'{column}' must be a finite number{where(i)}"),
            lambda n: error(source, None, header, None, f"{n} more cells of '{column}' are not finite"))
    if len(infinite):
        numeric = np.array(numeric)  # (a float column is read in place: its own values are left as they are)
        numeric[infinite] = np.nan
    return numeric


def _check_profiles(raw: io.RawTable | None, zone: str, problems: list[Problem],
                    seen: dict | None = None) -> tuple[dict[str, pd.Series], pd.DataFrame]:
    """Type and check long-format interval profiles; return series by id and a summary table. ``seen["ids"]``
    is set to every id the table names (accepted or not) once they are read."""
    info_columns = ["profile_id", "quantity", "resolution_min", "n_intervals", "start", "end", "coverage_days"]
    empty_info = pd.DataFrame(columns=info_columns)
    if raw is None or not raw.readable:
        return {}, empty_info
    source = raw.source
    frame = raw.frame
    if frame.empty:  # a header-only template: no profiles
        if str(source).lower().endswith(".parquet"):  # (a template is CSV: an empty export is not)
            problems.append(warning(source, None, None, None, "the file holds no rows: no profile is read from it",
                                    "export the profiles again, or delete the file when the case has no profiles"))
        return {}, empty_info
    rows = raw.rows if isinstance(raw.rows, io.RowNumbers) else np.asarray(raw.rows)  # (Parquet's: made when asked)
    known = io.PROFILE_COLUMNS
    for column in list(frame.columns) + [c for c in raw.unread if c not in frame.columns]:
        if column not in known:
            problems.append(warning(source, None, raw.headers.get(column, column), None,
                                    f"unknown column '{raw.headers.get(column, column)}' was ignored",
                                    f"known columns: {', '.join(known)}"))
    for column in ("profile_id", "timestamp"):
        if column not in frame.columns:
            problems.append(error(source, None, column, None, f"required column '{column}' is missing",
                                  "profiles are long tables: profile_id, timestamp, shaft_load_pct or input_kw"))
            return {}, empty_info
    value_columns = [c for c in ("shaft_load_pct", "input_kw") if c in frame.columns]
    if len(value_columns) == 2:  # a column of no value at all beside one with values (a template's other column)
        unused = [c for c in value_columns if not frame[c].notna().any()]  # gives nothing to any profile: not read
        if len(unused) == 1:
            value_columns.remove(unused[0])
    if not value_columns:
        problems.append(error(source, None, None, None, "no value column: give shaft_load_pct or input_kw",
                              "add a column headed shaft_load_pct (% of rated) or input_kw (measured)"))
        return {}, empty_info

    def header(column: str) -> str:
        return raw.headers.get(column, column)

    codes, uniques = _profile_ids(frame["profile_id"])
    if seen is not None:
        seen["ids"] = uniques
    _listed(problems, np.flatnonzero(codes < 0),
            lambda i: error(source, int(rows[i]), header("profile_id"), None, "'profile_id' is required"),
            lambda n: error(source, None, header("profile_id"), None, f"{n} more rows have no profile_id"))
    stamp_cells = frame["timestamp"]

    def where(i: int) -> str:
        """Which profile and interval frame row ``i`` is, as the file writes them (a long table's row
        number alone is hard to find: docs/case-format.md, "Interval profiles")."""
        code = int(codes[i])
        profile = f" in profile '{uniques[code]}'" if code >= 0 else " in a row without profile_id"
        stamp = _stamp_as_written(stamp_cells.iloc[i])
        return profile + (f" at {stamp}" if stamp else " (blank timestamp)")

    values = {c: _profile_values(frame[c], c, source, rows, header(c), problems, where) for c in value_columns}
    # rows by profile, each profile's in file order (a table written profile by profile is in that order already:
    # each profile's rows are then made when asked for, not held for the whole table)
    grouped = bool((codes[1:] >= codes[:-1]).all())
    order = None if grouped else np.argsort(codes, kind="stable")
    # (the profiles' numbers in the codes' own type: numpy would otherwise widen the whole column to compare)
    numbers = np.arange(len(uniques) + 1, dtype=np.promote_types(codes.dtype, np.min_scalar_type(len(uniques) + 1)))
    bounds = np.searchsorted(codes if grouped else codes[order], numbers)
    groups = _ProfileRows(bounds, order)
    stamps = _parse_timestamps(frame["timestamp"], zone, source, rows, header("timestamp"), problems, groups, where)
    profiles: dict[str, pd.Series] = {}
    info: list[dict] = []
    # the usual profile, written in order on its grid with every value readable and within bounds, is read
    # from one pass over the table (models.profiles.segment_stats); any other takes the checks row by row below
    quick = _quick_profiles(value_columns, values, stamps, grouped, bounds, len(uniques))
    on_grid: dict[tuple, pd.DatetimeIndex] = {}  # (first stamp, resolution, intervals) -> the profiles' index
    for k, (profile_id, idx) in enumerate(zip(uniques, groups)):
        profile_id = str(profile_id)
        if quick[k] is not None:
            quantity, resolution, peak = quick[k]
            qh = header(quantity)
            if quantity == "shaft_load_pct" and 0 < peak <= 1.0:
                problems.append(error(source, int(rows[idx[0]]), qh, profile_id,
                                      f"profile '{profile_id}' never exceeds {peak:g} % load",
                                      "shaft_load_pct takes 0-100 % of rated power: were fractions (0-1) entered?"))
            # (one index for every profile on the same grid: its start, step and length; a copy, so that the
            # table's timestamp column is let go once read: half a metered fleet's profile memory)
            grid = (int(stamps.asi8[bounds[k]]), resolution, int(bounds[k + 1] - bounds[k]))
            t_unique = on_grid.get(grid)
            if t_unique is None:
                t_unique = on_grid[grid] = stamps[bounds[k]:bounds[k + 1]].copy(deep=True)
            v_unique = values[quantity][bounds[k]:bounds[k + 1]]
            if len(value_columns) > 1:  # (a view would hold both quantities' whole columns: its own values)
                v_unique = np.array(v_unique)
        else:
            has = {c: np.isfinite(values[c][idx]) for c in value_columns}
            present = [c for c in value_columns if has[c].any()]
            if not present and any(frame[c].iloc[idx].notna().any() for c in value_columns):
                continue  # values given, none readable: each unreadable cell is an error of its own already
            if len(present) > 1:
                # said on the first row of the quantity fewer rows give (the odd one out), where both are given if
                # a row gives both
                counts = {c: int(has[c].sum()) for c in present}
                odd = min(present, key=lambda c: counts[c])
                both = np.flatnonzero(np.logical_and.reduce([has[c] for c in present]))
                j = int(both[0]) if len(both) else int(np.flatnonzero(has[odd])[0])
                problems.append(error(source, int(rows[idx[j]]), header(odd), float(values[odd][idx[j]]),
                                      f"profile '{profile_id}' has values in both shaft_load_pct and input_kw "
                                      f"({counts[present[0]]:,} and {counts[present[1]]:,} rows){where(idx[j])}",
                                      "each profile gives one quantity: shaft_load_pct or input_kw"))
                continue
            if not present:
                problems.append(error(source, int(rows[idx[0]]), header("profile_id"), profile_id,
                                      "profile has no values",
                                      "each profile gives one quantity: shaft_load_pct or input_kw"))
                continue
            quantity = present[0]
            qh = header(quantity)
            v = values[quantity][idx]
            blank = np.flatnonzero(~np.isfinite(v) & ~frame[quantity].iloc[idx].notna().to_numpy())
            if len(blank):  # an interval without a value is a missing interval: filled the same way, with a warning
                first_stamp = _stamp_as_written(stamp_cells.iloc[idx[blank[0]]])
                problems.append(warning(source, int(rows[idx[blank[0]]]), qh, None,
                                        f"profile '{profile_id}' has {counted(len(blank), 'blank value')}, the first in this row"
                                        + (f" (at {first_stamp})" if first_stamp else ""),
                                        "blank intervals are filled from the same weekday and time of day, as missing "
                                        "intervals are; enter the readings where they exist"))
            _listed(problems, np.flatnonzero(v < 0),
                    lambda j: error(source, int(rows[idx[j]]), qh, float(v[j]), f"values must not be negative{where(idx[j])}"),
                    lambda n: error(source, None, qh, None, f"{n} more negative values in '{profile_id}'"))
            if quantity == "shaft_load_pct":
                _listed(problems, np.flatnonzero(v > MAX_LOAD_PCT),
                        lambda j: error(source, int(rows[idx[j]]), qh, float(v[j]),
                                        f"shaft load above {MAX_LOAD_PCT:.0f} % of rating{where(idx[j])}",
                                        "check the unit (percent of rated power) or the rated power of the motor"),
                        lambda n: error(source, None, qh, None,
                                        f"{n} more intervals of '{profile_id}' above {MAX_LOAD_PCT:.0f} %"))
                peak = np.nanmax(v) if np.isfinite(v).any() else np.nan
                if 0 < peak <= 1.0:
                    problems.append(error(source, int(rows[idx[0]]), qh, profile_id,
                                          f"profile '{profile_id}' never exceeds {peak:g} % load",
                                          "shaft_load_pct takes 0-100 % of rated power: were fractions (0-1) entered?"))
            else:
                limit = float(io.read_schema("profiles").set_index("name").loc["input_kw", "max"])
                _listed(problems, np.flatnonzero(v > limit),
                        lambda j: error(source, int(rows[idx[j]]), qh, float(v[j]), f"input above {limit:g} kW{where(idx[j])}",
                                        "is this in W rather than kW? divide by 1000"),
                        lambda n: error(source, None, qh, None, f"{n} more intervals of '{profile_id}' above {limit:g} kW"))
            t = stamps[idx]
            ok = ~t.isna()
            if not ok.any():
                continue
            every = bool(ok.all())  # (the usual profile: every stamp readable, in order, none repeated; no copies then)
            t_ok = t if every else t[ok]
            v_ok = v if every else v[ok]
            ascending = every and bool((np.diff(t_ok.asi8) > 0).all())
            if ascending:
                t_sorted, rows_sorted, cells_sorted = t_ok, rows[idx], idx
                dup = np.zeros(len(t_sorted), dtype=bool)
            else:
                order_t = np.argsort(t_ok.asi8, kind="stable")
                t_sorted = t_ok[order_t]
                rows_sorted = rows[idx][ok][order_t]
                cells_sorted = idx[ok][order_t]  # positions in the file's frame, for a timestamp as written
                dup = t_sorted.duplicated(keep="first")
                v_ok = v_ok[order_t]
            _listed(problems, np.flatnonzero(dup),
                    lambda j: error(source, int(rows_sorted[j]), header("timestamp"),
                                    _stamp_as_written(stamp_cells.iloc[cells_sorted[j]]) or str(t_sorted[j]),
                                    f"timestamp repeated in profile '{profile_id}' (as {t_sorted[j]})",
                                    "delete the duplicate row"),
                    lambda n: error(source, None, header("timestamp"), None, f"{n} more repeated timestamps in '{profile_id}'"))
            t_unique = t_sorted if ascending else t_sorted[~dup]
            v_unique = v_ok if ascending else v_ok[~dup]
            if len(t_unique) < 2:
                problems.append(error(source, int(rows[idx[0]]), header("profile_id"), profile_id,
                                      "a profile needs at least two intervals"))
                continue
            step = np.diff(t_unique.asi8) / (60.0 * 1e6)  # microseconds to minutes
            changes = resolution_changes(step)
            if changes:
                rows_changed = rows_sorted[~dup]
                _listed(problems, changes,
                        lambda c: error(source, int(rows_changed[c[0]]), header("timestamp"), str(t_unique[c[0]]),
                                        f"profile '{profile_id}' changes resolution at {t_unique[c[0]]}: every {c[1]:g} min "
                                        f"before, every {c[2]:g} min from there on",
                                        "keep one resolution per profile: average the finer part to "
                                        f"{max(c[1], c[2]):g}-min means (docs/case-format.md, interval profiles)"),
                        lambda n: error(source, None, header("timestamp"), None,
                                        f"{n} more changes of resolution in '{profile_id}'"))
                continue
            resolution = float(np.median(step))
            if not any(abs(resolution - r) < 1e-6 for r in ALLOWED_RESOLUTIONS_MIN):
                problems.append(error(source, int(rows[idx[0]]), header("timestamp"), f"{resolution:g} min",
                                      f"profile '{profile_id}' has an interval of {resolution:g} min; allowed are 15, 30 or 60 min",
                                      "resample the data to 15-min, 30-min or hourly means"))
                continue
            rows_unique = rows_sorted if ascending else rows_sorted[~dup]
            # every timestamp on the profile's grid: the resolution's phase that most stamps share
            res_us = int(round(resolution * 60e6))
            stamps_us = t_unique.as_unit("us").asi8
            phase = np.mod(stamps_us, res_us)
            if (phase == phase[0]).all():  # (one phase: every stamp on it)
                off = np.zeros(0, dtype=np.intp)
            else:
                values_, counts_ = np.unique(phase, return_counts=True)
                off = np.flatnonzero(phase != values_[np.argmax(counts_)])
            _listed(problems, off,
                    lambda j: error(source, int(rows_unique[j]), header("timestamp"), str(t_unique[j]),
                                    f"timestamp off the {resolution:g}-min grid of profile '{profile_id}'",
                                    "keep one resolution per profile, each interval starting on it (e.g. hourly on the "
                                    "hour)"),
                    lambda n: error(source, None, header("timestamp"), None,
                                    f"{n} more timestamps off the grid of '{profile_id}'"))
            on = np.setdiff1d(np.arange(len(t_unique)), off) if len(off) else np.arange(len(t_unique))
            step_on = np.diff(stamps_us[on]) / 60e6
            gaps = np.flatnonzero(step_on > resolution + 1e-6)
            if len(gaps) and not len(off):
                n_missing = int(np.sum(np.round(step_on[gaps] / resolution) - 1))
                first = t_unique[on[gaps[0]]] + pd.Timedelta(minutes=resolution)
                after = on[gaps[0] + 1]  # the row named is the first one after the gap, quoted as written
                problems.append(warning(source, int(rows_unique[after]), header("timestamp"),
                                        _stamp_as_written(stamp_cells.iloc[cells_sorted[~dup][after]]),
                                        f"profile '{profile_id}' misses {counted(n_missing, 'interval')}, the first at {first}; "
                                        "this row is the first after the gap",
                                        "missing intervals are filled from the same weekday and time of day"))
        first, last = t_unique[0], t_unique[-1]
        coverage_days = (last - first).total_seconds() / 86400 + resolution / 1440
        if coverage_days < 364.5:
            problems.append(warning(source, None, header("profile_id"), profile_id,
                                    f"profile '{profile_id}' covers {coverage_days:.1f} days, less than a year",
                                    "it is extended to a year by repeating its measured weeks in turn (a profile of less than a "
                                    "week: by its mean of each weekday and time of day), so every month filled holds the weeks "
                                    "measured, their peaks included, but no season or holiday of its own; log a full year where "
                                    "it matters"))
        elif coverage_days > 366.5 + resolution / 1440:
            problems.append(warning(source, None, header("profile_id"), profile_id,
                                    f"profile '{profile_id}' covers {coverage_days:.1f} days, more than a year "
                                    f"({first:%Y-%m-%d} to {last:%Y-%m-%d}): one year is analysed, the "
                                    "rest of the profile is not used",
                                    "the analysis year is the one most of the case's intervals fall in, and a profile is "
                                    "moved by whole weeks onto it; give the one year that is most typical, or each "
                                    "year as its own case"))
        if (first.month == 1 and first.day == 1 and first.hour * 60 + first.minute == int(round(resolution))
                and last.month == 1 and last.day == 1 and last.hour == 0 and last.minute == 0):
            problems.append(warning(source, None, header("profile_id"), profile_id,
                                    f"profile '{profile_id}' runs from {first:%Y-%m-%d %H:%M} to {last:%Y-%m-%d %H:%M}: "
                                    "its timestamps look like the ends of the intervals, read as their starts "
                                    "(each interval an interval late, moved into the next period at a boundary)",
                                    "timestamps mark the start of each interval: shift the data back one interval "
                                    "(\"hour ending\" 01:00 is the hour from 00:00)"))
        # (the values as they are: a read-only view of the table's one value column for a profile read in one
        # pass, else its own)
        series = pd.Series(v_unique, index=t_unique, name=quantity, copy=False)
        profiles[profile_id] = series
        info.append({"profile_id": profile_id, "quantity": quantity, "resolution_min": int(round(resolution)),
                     "n_intervals": len(series), "start": first, "end": last,
                     "coverage_days": round(coverage_days, 3)})
    return profiles, pd.DataFrame(info, columns=info_columns)


def _quick_profiles(value_columns: list[str], values: dict[str, np.ndarray],
                    stamps: pd.DatetimeIndex, grouped: bool, bounds: np.ndarray, n_profiles: int) -> list:
    """Profiles that need no row-by-row check: (quantity, resolution [min], greatest value) for each, else None.

    Such a profile's rows are together in the table and in time order at one allowed step (so no repeat,
    gap or stamp off its grid), every value of its one quantity is readable and within that quantity's
    bounds, and it has at least two intervals: the checks below would find nothing but its coverage, which
    is checked for it as for the others.
    """
    quick: list = [None] * n_profiles
    if not n_profiles or not grouped:  # (rows of a profile apart: the row-by-row checks)
        return quick
    n = np.diff(bounds)
    instants = np.asarray(stamps.asi8)
    stats = {c: profiles_module.segment_stats(bounds, instants, values[c]) for c in value_columns}
    allowed_us = np.array([int(r * 60e6) for r in ALLOWED_RESOLUTIONS_MIN], dtype=np.int64)
    caps = {"shaft_load_pct": MAX_LOAD_PCT,
            "input_kw": float(io.read_schema("profiles").set_index("name").loc["input_kw", "max"])}
    for c in value_columns:
        s = stats[c]
        fine = ((s["finite"] == n) & (n >= 2) & s["all_stamped"] & (s["step_low"] == s["step_high"])
                & np.isin(s["step_low"], allowed_us) & (s["low"] >= 0) & (s["high"] <= caps[c]))
        for other in value_columns:
            if other != c:
                fine &= stats[other]["finite"] == 0
        for k in np.flatnonzero(fine):
            quick[k] = (c, float(s["step_low"][k]) / (60.0 * 1e6), float(s["high"][k]))
    return quick


#: Consecutive intervals at one step that make a stretch of a profile at that resolution (6 hours at
#: 15 min, a day at 60 min): a few missing readings never line up this long, a logger set to another
#: resolution does.
RESOLUTION_STRETCH_INTERVALS = 24


def resolution_changes(step_min: np.ndarray, stretch: int = RESOLUTION_STRETCH_INTERVALS) -> list[tuple[int, float, float]]:
    """Where a profile changes resolution: stretches of one step followed by stretches of another.

    Parameters
    ----------
    step_min : numpy.ndarray
        Steps between a profile's sorted, distinct timestamps [min] (``step_min[k]`` from stamp k to k + 1).
    stretch : int
        Least number of consecutive equal steps (to the minute) that count as a stretch at that resolution;
        shorter runs (a gap, a missing reading) are passed over.

    Returns
    -------
    list of (int, float, float)
        For each change, the position of the first timestamp at the new step, the step before and the step
        from there on [min]; empty when the profile keeps one resolution.

    Examples
    --------
    >>> resolution_changes(np.array([60.0] * 30 + [15.0] * 40))
    [(30, 60.0, 15.0)]
    >>> resolution_changes(np.array([60.0] * 30 + [120.0] + [60.0] * 30))
    []
    """
    step = np.round(np.asarray(step_min, dtype=float))
    if len(step) < 2 * stretch:
        return []
    starts = np.flatnonzero(np.r_[True, step[1:] != step[:-1]])
    lengths = np.diff(np.r_[starts, len(step)])
    long = np.flatnonzero(lengths >= stretch)
    changes = []
    for before, after in zip(long[:-1], long[1:]):
        if step[starts[after]] != step[starts[before]]:
            changes.append((int(starts[after]), float(step[starts[before]]), float(step[starts[after]])))
    return changes


#: A UTC offset at the end of a timestamp, after its time of day: Z, +hh:mm, +hhmm or +hh (the last as database
#: exports write it; a date alone, 2025-01-31, is not read as ending in an offset of -31)
_OFFSET = r"\d:\d{2}(?::\d{2}(?:[.,]\d+)?)?\s*(?:[+-]\d{2}(?::?\d{2})?|Z)$"
_SERIAL_TEXT = re.compile(r"^\d{5}(\.\d+)?$")


def _cell_text(value: object) -> str | None:
    """Return a timestamp cell as ISO text (None when blank)."""
    if _blank(value):
        return None
    if isinstance(value, (_dt.datetime, pd.Timestamp, _dt.date, _dt.time)):
        return value.isoformat()
    return str(value).strip()


def _stamp_as_written(value: object) -> str | None:
    """A timestamp cell as its file shows it, for a message (None when blank): text as written, a date cell
    or Parquet timestamp as ``2025-02-11 17:00:00+01:00``."""
    if _blank(value):
        return None
    if isinstance(value, (_dt.datetime, _dt.date, _dt.time, np.datetime64)):
        return str(pd.Timestamp(value)) if isinstance(value, np.datetime64) else str(value)
    return shown_value(_plain(value)) if not isinstance(value, str) else value.strip()


def _is_serial(value: object) -> bool:
    return (isinstance(value, (int, float, np.integer, np.floating)) and not isinstance(value, bool)
            and SERIAL_DAYS_RANGE[0] <= float(value) <= SERIAL_DAYS_RANGE[1])


def _parse_timestamps(column: pd.Series, zone: str, source: str, rows: np.ndarray | io.RowNumbers, header: str,
                      problems: list[Problem], groups: Sequence[np.ndarray], where=None) -> pd.DatetimeIndex:
    """Parse interval-start timestamps into the case zone, NaT where unusable (each reported).

    Cells with a UTC offset are converted to the zone; naive cells are local times in the zone,
    localised profile by profile in file order (so a repeated autumn hour is told apart by its
    order); a local time in a daylight-saving gap, an unreadable cell and a blank are errors. Workbook
    cells holding a spreadsheet date serial are read as dates (a flagged repair). ``where(i)`` (optional)
    words which profile and timestamp row ``i`` is, for the messages of local times.

    Returns
    -------
    pandas.DatetimeIndex
        One tz-aware timestamp per row (microsecond unit), NaT where unusable.
    """
    n = len(column)
    if isinstance(column.dtype, pd.DatetimeTZDtype):
        # instants (a typed Parquet column): the usual long table needs no cell-wise work and no copy (an index made
        # from the column's array, in the zone: the same instants; a unit other than microseconds is converted)
        stamps = column.array if column.dtype.unit == "us" else column.array.as_unit("us")
        parsed = pd.DatetimeIndex(stamps.tz_convert(zone), copy=False, name=None)
        instants = parsed.asi8
        if len(instants) and not parsed.hasnans and instants.min() >= _FIRST_US and instants.max() < _END_US:
            return parsed
    if not (pd.api.types.is_datetime64_any_dtype(column.dtype) or pd.api.types.is_string_dtype(column.dtype)):
        column = column.astype(object)  # numbers or mixed cells (Parquet, workbooks)
    if pd.api.types.is_datetime64_any_dtype(column.dtype):
        # (a typed column: one array of instants or of local times, the other kind absent; no cell-wise work)
        parsed = pd.DatetimeIndex(column).as_unit("us")
        if parsed.tz is not None:
            utc, naive = np.array(parsed.asi8), None  # (instants since 1970 UTC, a copy to mark NaT in)
        else:
            utc, naive = np.full(n, _NAT, dtype=np.int64), np.array(parsed.asi8)
        blank = np.asarray(parsed.isna())
    else:
        utc = np.full(n, _NAT, dtype=np.int64)
        naive = np.full(n, _NAT, dtype=np.int64)
        if column.dtype == object:
            serial = column.map(_is_serial).to_numpy(dtype=bool)
            if serial.any():
                days = column[serial].astype(float).to_numpy()
                stamps = _SPREADSHEET_EPOCH + np.round(days * 86400.0).astype(np.int64) * np.timedelta64(1, "s")
                naive[serial] = stamps.astype("datetime64[us]").astype(np.int64)
                first = int(np.flatnonzero(serial)[0])
                problems.append(warning(source, int(rows[first]), header, column.iloc[first],
                                        f"{counted(serial.sum(), 'timestamp')} "
                                        + ("was a spreadsheet date number; it was read as a date and time" if int(serial.sum()) == 1
                                           else "were spreadsheet date numbers; they were read as dates and times"),
                                        "format the timestamp column as date and time in the spreadsheet"))
            text = column.map(_cell_text).where(~serial, None)
        else:
            serial = np.zeros(n, dtype=bool)
            text = column.str.strip()
        blank = text.isna().to_numpy() & ~serial
        has_offset = text.str.contains(_OFFSET, regex=True, na=False).to_numpy(dtype=bool, copy=True)
        if has_offset.any():
            parsed = pd.to_datetime(text[has_offset], utc=True, errors="coerce", format="ISO8601")
            utc[has_offset] = pd.DatetimeIndex(parsed).as_unit("us").asi8
        plain = ~has_offset & ~blank & ~serial
        if plain.any():
            try:
                parsed = pd.DatetimeIndex(pd.to_datetime(text[plain], errors="coerce", format="ISO8601"))
            except ValueError:  # offsets of other forms, several of them or beside local times: cell by cell
                parsed = None
                where = np.flatnonzero(plain)
                for i, cell in zip(where, text[plain]):
                    stamp = pd.to_datetime(cell, errors="coerce", format="ISO8601")
                    if pd.isna(stamp):
                        continue
                    if stamp.tzinfo is not None:
                        utc[i] = stamp.value // 1000  # (ns since 1970 UTC, to microseconds)
                        has_offset[i] = True
                    else:
                        naive[i] = stamp.value // 1000
            if parsed is not None and parsed.tz is not None:
                # an offset of a form the pattern does not know: the instant it names, never its UTC clock as local
                utc[plain] = parsed.tz_convert("UTC").as_unit("us").asi8
                has_offset = has_offset | plain
            elif parsed is not None:
                naive[plain] = parsed.as_unit("us").asi8
        unreadable = np.flatnonzero(~blank & ~serial & (np.where(has_offset, utc, naive) == _NAT))

        def bad(i: int) -> Problem:
            value = column.iloc[i]
            hint = ("a number like this is a spreadsheet date serial: format the column as date and time before saving"
                    if _SERIAL_TEXT.match(str(value).strip()) else
                    "write ISO 8601, e.g. 2025-01-31 13:15 or 2025-01-31T13:15+01:00")
            return error(source, int(rows[i]), header, value, "timestamp not readable", hint)

        _listed(problems, unreadable, bad,
                lambda k: error(source, None, header, None, f"{k} more unreadable timestamps"))
    # one window for UTC (offset cells) and local (naive cells) times alike
    for stamps in (utc, naive) if naive is not None else (utc,):
        outside = np.flatnonzero((stamps != _NAT) & ((stamps < _FIRST_US) | (stamps >= _END_US)))
        _listed(problems, outside,
                lambda i: error(source, int(rows[i]), header, _plain(column.iloc[i]),
                                f"timestamp outside the years {TIMESTAMP_YEARS[0]}-{TIMESTAMP_YEARS[1]}",
                                "check the year; write ISO 8601, e.g. 2025-01-31 13:15"),
                lambda k: error(source, None, header, None, f"{k} more timestamps outside the years "
                                f"{TIMESTAMP_YEARS[0]}-{TIMESTAMP_YEARS[1]}"))
        stamps[outside] = _NAT
    _listed(problems, np.flatnonzero(blank),
            lambda i: error(source, int(rows[i]), header, None, "timestamp is blank"),
            lambda k: error(source, None, header, None, f"{k} more blank timestamps"))
    if naive is not None and (naive != _NAT).any():
        for idx in groups:
            local = idx[naive[idx] != _NAT]
            if len(local):
                utc[local] = _localise(naive[local], zone, source, rows[local], header, problems,
                                       None if where is None else (lambda i, at=local: where(int(at[i]))))
    return pd.DatetimeIndex(utc.view("datetime64[us]")).tz_localize("UTC").tz_convert(zone)


def _localise(naive_us: np.ndarray, zone: str, source: str, rows: np.ndarray, header: str,
              problems: list[Problem], where=None) -> np.ndarray:
    """Attach the case zone to naive local times of one profile (in file order); return UTC microseconds.

    Times inside a daylight-saving gap, and repeated autumn times whose order does not tell them apart,
    are errors (NaT), named by ``where(i)`` (the profile and the timestamp as written) where given.
    """
    local = pd.DatetimeIndex(naive_us.view("datetime64[us]"))
    said = (lambda i: "") if where is None else where
    ambiguous = np.zeros(len(local), dtype=bool)
    try:
        aware = local.tz_localize(zone, ambiguous="infer", nonexistent="NaT")
    except Exception:  # pandas raises for a repeated hour it cannot order (e.g. given once); mark those
        aware = local.tz_localize(zone, ambiguous="NaT", nonexistent="NaT")
        ambiguous = np.asarray(aware.isna()) & ~np.asarray(local.tz_localize(zone, ambiguous=False, nonexistent="NaT").isna())
        _listed(problems, np.flatnonzero(ambiguous),
                lambda i: error(source, int(rows[i]), header, str(local[i]),
                                f"local time occurs twice when clocks go back in {zone}; its order cannot be inferred"
                                f"{said(i)}",
                                "give timestamps with a UTC offset, or both repeated hours in order"),
                lambda k: error(source, None, header, None, f"{k} more local times that occur twice"))
    gap = np.asarray(aware.isna()) & ~ambiguous
    _listed(problems, np.flatnonzero(gap),
            lambda i: error(source, int(rows[i]), header, str(local[i]),
                            f"local time does not exist in {zone} (clocks go forward){said(i)}",
                            "daylight-saving gap: give timestamps with a UTC offset or drop this row"),
            lambda k: error(source, None, header, None, f"{k} more local times in a daylight-saving gap"))
    return aware.tz_convert("UTC").as_unit("us").asi8


# ---------------------------------------------------------------------------------------------------
# Cross-checks and defaults
# ---------------------------------------------------------------------------------------------------
def _duplicates(checker: _TableChecker, column: str, what: str) -> None:
    """Repeated ids are errors; ids that differ from an earlier one only in case (or in surrounding spaces,
    which are dropped on reading) are warned as likely duplicates: ids are matched exactly."""
    ids = checker.frame[column]
    dup = ids.duplicated(keep=False) & ids.notna()
    first: dict[object, int] = {}
    for i in np.flatnonzero(dup.to_numpy()):
        key = ids.iloc[i]
        if key in first:
            checker.err(i, column, key, f"duplicate {what} (first seen on row {first[key]})", f"each {what} must be unique")
        else:
            first[key] = int(checker.rows[i])
    folded = ids.map(lambda v: None if v is None else str(v).strip().casefold())
    seen: dict[str, tuple[object, int]] = {}
    for i in np.flatnonzero((ids.notna() & ~ids.duplicated(keep="first")).to_numpy()):  # each id once, first row
        key = folded.iloc[i]
        if key not in seen:
            seen[key] = (ids.iloc[i], int(checker.rows[i]))
            continue
        other, row = seen[key]
        written = checker.raw.frame[column].iloc[i] if column in checker.raw.frame else ids.iloc[i]
        checker.warn(i, column, written,
                     f"{what} '{ids.iloc[i]}' differs from '{other}' (row {row}) only in upper and lower case or "
                     "surrounding spaces: a likely duplicate",
                     f"ids are matched exactly: if both rows are one item keep one of them; if not, give them {what}s "
                     "that differ in more than case")


def _near_id_hint(value: object, known: set[str] | None, otherwise: str) -> str:
    """A hint for a reference no table defines: the id it matches when case and surrounding spaces are
    ignored (ids are matched exactly), else ``otherwise``.

    Examples
    --------
    >>> _near_id_hint("mill", {"MILL", "ETP"}, "add the site or correct the id")
    "did you mean 'MILL'? ids are matched exactly, upper and lower case included"
    """
    folded = str(value).strip().casefold()
    match = sorted(k for k in (known or ()) if str(k).strip().casefold() == folded)
    if match:
        return f"did you mean '{match[0]}'? ids are matched exactly, upper and lower case included"
    return otherwise


def _few_ids(asset_ids) -> tuple[list[str], str]:
    """Asset ids in order, and the first five of them in words for a warning of the whole file.

    >>> _few_ids(["P3", "P1"])[1], _few_ids([f"M{k}" for k in range(7)])[1]
    ('P1, P3', 'M0, M1, M2, M3, M4 and 2 more')
    """
    ids = sorted(str(x) for x in asset_ids)
    return ids, ", ".join(ids[:5]) + (f" and {len(ids) - 5} more" if len(ids) > 5 else "")


def _check_assets(checker: _TableChecker, site_ids: set[str] | None, profile_ids: set[str], duty_ids: set[str],
                  profiles: dict[str, pd.Series], this_year: int, rejected_profiles: set[str] | None = frozenset(),
                  duty_readable: bool = True) -> None:
    """Cross-check the asset register.

    ``site_ids`` None means the sites table could not be read, and ``rejected_profiles`` None that the
    profiles table could not be read: references to them are then not checked (the unreadable file is
    already an error). Profiles listed in ``rejected_profiles`` exist but failed their own checks.
    ``duty_readable`` False means the duty file could not be read: profile references are then not checked
    either (one of them may be in it).
    """
    a = checker.frame
    _duplicates(checker, "asset_id", "asset_id")
    site_given = a["site_id"].notna().to_numpy() & (site_ids is not None)
    for i in np.flatnonzero(site_given & ~a["site_id"].isin(site_ids or set()).to_numpy()):
        checker.err(i, "site_id", a["site_id"].iloc[i], "unknown site_id (not in sites)",
                    _near_id_hint(a["site_id"].iloc[i], site_ids, "add the site or correct the id"))
    kw, hp = a["rated_p_kw"].to_numpy(), a["rated_p_hp"].to_numpy()
    both_missing = np.isnan(kw) & np.isnan(hp)
    raw_kw = checker.raw.frame["rated_p_kw"] if "rated_p_kw" in checker.raw.frame else pd.Series([None] * len(a))
    raw_hp = checker.raw.frame["rated_p_hp"] if "rated_p_hp" in checker.raw.frame else pd.Series([None] * len(a))
    unknown = [c for c in checker.raw.frame.columns if c not in set(checker.schema.index)]
    rating_in_watts = "rated_p_kw" not in checker.raw.frame and any(
        io.watt_header_target(checker.raw.name, c) == "rated_p_kw" for c in unknown)
    if rating_in_watts:
        pass  # the ratings sit under a header in W: that header's own error gives the conversion, once
    elif len(a) > 1 and all(_blank(v) for v in raw_kw) and all(_blank(v) for v in raw_hp):
        # no rating in the whole file (no column, or empty ones): one message for the file, not one per row
        checker.err(None, "rated_p_kw", None, "no rated power column (rated_p_kw or rated_p_hp): every motor needs its rating",
                    _missing_column_hint("rated_p_kw", unknown, checker.raw.name))
    else:
        hint = ""
        if "rated_p_kw" not in checker.raw.frame:  # perhaps under another heading
            hint = _missing_column_hint("rated_p_kw", unknown, checker.raw.name)
            hint = hint if "was not recognised" in hint else ""
        rows = [i for i in np.flatnonzero(both_missing) if _blank(raw_kw.iloc[i]) and _blank(raw_hp.iloc[i])]
        if "rated_p_kw" not in checker.raw.frame and len(rows) > 1:
            # one missing heading, not one message per row: the file's message names the rows it leaves unrated
            shown = ", ".join(str(int(checker.raw.rows[i])) for i in rows[:5]) + (
                f" and {len(rows) - 5} more" if len(rows) > 5 else "")
            checker.err(None, "rated_p_kw", None, f"no rated_p_kw column: {len(rows)} motors have no rating "
                        f"(rated_p_kw or rated_p_hp), rows {shown}", hint or _missing_column_hint("rated_p_kw", unknown, checker.raw.name))
        else:
            for i in rows:
                checker.err(i, "rated_p_kw", None, "rated power is required (rated_p_kw or rated_p_hp)", hint)
    conflict = ~np.isnan(kw) & ~np.isnan(hp) & (np.abs(kw - hp * HP_TO_KW) > 0.06 * np.maximum(kw, 1e-9))
    for i in np.flatnonzero(conflict):
        checker.err(i, "rated_p_hp", hp[i], f"rated_p_kw ({kw[i]:g}) and rated_p_hp ({hp[i]:g}) disagree by more than 6 %",
                    "give one of the two")
    rated_kw = np.where(np.isnan(kw), hp * HP_TO_KW, kw)
    a["rated_p_kw"] = rated_kw
    volts = a["rated_v_v"].to_numpy()
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):  # (a value out of range is flagged elsewhere)
        current_a = rated_kw * 1000.0 / (np.sqrt(3.0) * volts)
    for i in np.flatnonzero(np.isfinite(current_a) & (current_a > MAX_PLAUSIBLE_CURRENT_A)):
        column = "rated_p_kw" if not np.isnan(kw[i]) else "rated_p_hp"
        checker.err(i, column, kw[i] if column == "rated_p_kw" else hp[i],
                    f"a {rated_kw[i]:,.6g} kW motor at {volts[i]:,.6g} V would draw about {current_a[i]:,.0f} A, "
                    f"more than any motor of that voltage (plausible up to {MAX_PLAUSIBLE_CURRENT_A:,.0f} A)",
                    ("is the rating in W rather than kW? divide by 1000; or is rated_v_v in kV rather than V?"
                     if column == "rated_p_kw" else
                     "is rated_v_v in kV rather than V? multiply it by 1000; or is the rating in another unit than hp?"))
    # a drive's saving on a throttled pump or fan depends most on the static share of its head: a blank one
    # takes the application default, which suits friction-dominated systems (ducts, circulating loops) only
    static = a["static_head_frac"].to_numpy(dtype=float)
    throttled = ((a["speed_control"].to_numpy(dtype=object) == "throttled")
                 & np.isin(a["application"].to_numpy(dtype=object), ["pump", "fan"]) & np.isnan(static))
    if throttled.any():
        ids, named = _few_ids(a["asset_id"].to_numpy(dtype=object)[throttled])  # whatever the row order
        checker.warn(None, "static_head_frac", None,
                     f"static_head_frac is blank for {counted(len(ids), 'throttled pump or fan', 'throttled pumps and fans')} "
                     f"({named}): the application "
                     f"default is used ({nameplate_defaults.STATIC_HEAD_FRAC_BY_APPLICATION['pump']:g} for pumps, "
                     f"{nameplate_defaults.STATIC_HEAD_FRAC_BY_APPLICATION['fan']:g} for fans), and a drive's saving "
                     "falls as the static share of the head rises",
                     "give the static share of the design head (lift, or the diffusers' submergence of an aeration "
                     "blower, often most of its pressure) where a drive is considered")
    # a drive on a centrifugal load switched on and off (with an interval profile) saves by running it at its
    # demand, which the static head decides
    load_type = a["load_type"].to_numpy(dtype=object)
    centrifugal = np.where(pd.isna(a["load_type"]).to_numpy(), np.isin(a["application"].to_numpy(dtype=object),
                                                                        ["pump", "fan"]), load_type == "variable_torque")
    given = a["profile_id"].notna().to_numpy() & ~a["profile_id"].isin(list(duty_ids)).to_numpy()
    cycled = (a["speed_control"].to_numpy(dtype=object) == "on_off") & centrifugal & given & np.isnan(static)
    if cycled.any():
        ids, named = _few_ids(a["asset_id"].to_numpy(dtype=object)[cycled])
        checker.warn(None, "static_head_frac", None,
                     f"static_head_frac is blank for {counted(len(ids), 'centrifugal load switched on and off', 'centrifugal loads switched on and off')} "
                     f"({named}): the application default is used "
                     f"({nameplate_defaults.STATIC_HEAD_FRAC_BY_APPLICATION['pump']:g} for pumps, "
                     f"{nameplate_defaults.STATIC_HEAD_FRAC_BY_APPLICATION['fan']:g} otherwise), and what a drive "
                     "saves by running such a load at its demand falls as the static share of the head rises (a "
                     "sump's lift is often most of it)",
                     "give the static share of the design head (the lift from the sump's level to the discharge) "
                     "where a drive is considered")
    mean_load = a["mean_load_pct"].to_numpy()
    for i in np.flatnonzero((mean_load > 0) & (mean_load <= 1.0)):
        checker.err(i, "mean_load_pct", mean_load[i], f"a mean load of {mean_load[i]:g} % of rating is implausibly low",
                     "mean_load_pct takes 0-100 % of rated power: was a fraction (0-1) entered?")
    poles = a["poles"].to_numpy()
    for i in np.flatnonzero(~np.isnan(poles) & (poles % 2 != 0)):
        checker.err(i, "poles", poles[i], "poles must be an even number", "a 4-pole motor has 2 pole pairs: write 4")
    f = a["supply_f_hz"].to_numpy()
    with np.errstate(over="ignore"):  # an absurd frequency is reported by the range checks, not here
        sync = 120.0 * f / np.where(poles > 0, poles, np.nan)
    a["sync_speed_rpm"] = sync
    speed = a["rated_speed_rpm"].to_numpy()
    machine = a["machine_type"].fillna("induction").to_numpy(dtype=object)
    induction = machine == "induction"
    synchronous_today = np.isin(machine, ["wound_field_synchronous", "pm_synchronous"])
    if synchronous_today.any():
        # today's machine is modelled by the induction-motor model whatever its type: say what that gets wrong
        ids, named = _few_ids(a["asset_id"].to_numpy(dtype=object)[synchronous_today])
        verb = "is a synchronous machine" if len(ids) == 1 else "are synchronous machines"
        checker.warn(None, "machine_type", None,
                     f"{counted(len(ids), 'motor')} of today's fleet {verb} ({named}), modelled with an induction "
                     "motor's losses at its nameplate efficiency and speed (a slip of at most 0.1 %); a wound-field "
                     "machine is taken at unity power factor (no kVAr), a PM motor with an induction motor's lagging "
                     "kVAr at its nameplate power factor",
                     "a wound-field machine run leading today supplies kVAr that its replacement would lose, and a PM "
                     "motor draws less kVAr at part load than an induction motor: the reactive savings of options "
                     "against these motors are estimates; compare them on energy where it matters")
    with np.errstate(divide="ignore", invalid="ignore"):
        slip = (sync - speed) / sync
    has = ~np.isnan(speed) & ~np.isnan(sync)
    for i in np.flatnonzero(has & induction & (speed >= sync)):
        hint = "check poles, frequency and speed; a synchronous machine needs machine_type set"
        if speed[i] == sync[i]:  # the nominal speed US registers often carry
            hint = (f"{speed[i]:g} rpm is the synchronous speed itself: give the nameplate's full-load speed "
                    f"(a little below it) or leave the cell blank for a typical slip; {hint}")
        checker.err(i, "rated_speed_rpm", speed[i],
                    f"an induction motor runs below synchronous speed 120·f/p = {sync[i]:g} rpm", hint)
    for i in np.flatnonzero(has & induction & (speed < sync) & (slip > 0.10)):
        checker.err(i, "rated_speed_rpm", speed[i],
                    f"slip of {100 * slip[i]:.1f} % against {sync[i]:g} rpm is implausible (above 10 %)",
                    "check the number of poles and the frequency")
    for i in np.flatnonzero(has & induction & (slip > 0.07) & (slip <= 0.10)):
        checker.warn(i, "rated_speed_rpm", speed[i], f"slip of {100 * slip[i]:.1f} % is high for an induction motor",
                     "plausible for motors below about 1 kW only")
    for i in np.flatnonzero(has & ~induction & (np.abs(slip) > 0.005)):
        checker.err(i, "rated_speed_rpm", speed[i], f"a synchronous machine runs at 120·f/p = {sync[i]:g} rpm")
    # efficiency and class
    eff = a["rated_efficiency_pct"].to_numpy()
    for col in ("efficiency_75_pct", "efficiency_50_pct"):
        part = a[col].to_numpy()
        for i in np.flatnonzero(~np.isnan(part) & ~np.isnan(eff) & (part > eff + 3.0)):
            checker.warn(i, col, part[i], f"part-load efficiency is more than 3 points above full-load ({eff[i]:g} %)",
                         "check the datasheet columns")
    # load data
    prof = a["profile_id"]
    hours = a["operating_h_per_yr"].to_numpy()
    load = a["mean_load_pct"].to_numpy()
    has_profile = prof.notna().to_numpy()
    has_hours = ~np.isnan(hours) & ~np.isnan(load)
    known_profiles = profile_ids | duty_ids | (rejected_profiles or set())
    # (an unreadable profiles or duty file is an error of its own: the references it would hold are not judged)
    checkable = has_profile & (rejected_profiles is not None) & duty_readable
    for i in np.flatnonzero(checkable & ~prof.isin(known_profiles).to_numpy()):
        checker.err(i, "profile_id", prof.iloc[i], "unknown profile reference (not in profiles or duty)",
                    _near_id_hint(prof.iloc[i], known_profiles, "add the profile or correct the reference"))
    # (a cell given but unreadable has its own error already: not said again as missing)
    unreadable = {(p.row, p.column) for p in checker.problems if p.severity == "error"}
    for i in np.flatnonzero(~has_profile & ~has_hours):
        missing = "operating_h_per_yr" if np.isnan(hours[i]) else "mean_load_pct"
        if (int(checker.rows[i]), checker.header(missing)) not in unreadable:
            checker.err(i, missing, None, "give a profile_id, or both operating_h_per_yr and mean_load_pct")
    for i in np.flatnonzero(has_profile & has_hours):
        checker.warn(i, "profile_id", prof.iloc[i], "both a profile and hours + mean load are given; the profile is used")
    for i in np.flatnonzero(has_profile & (np.isnan(hours) != np.isnan(load))):  # one of the two beside a profile
        given = "operating_h_per_yr" if not np.isnan(hours[i]) else "mean_load_pct"
        checker.warn(i, given, hours[i] if given == "operating_h_per_yr" else load[i],
                     f"{given} is not used: the profile {prof.iloc[i]} sets the load and the hours",
                     "leave it blank, or leave the profile_id blank to use hours and mean load")
    for i in np.flatnonzero(~has_profile & has_hours & ((hours == 0) | (load == 0))):
        column = "operating_h_per_yr" if hours[i] == 0 else "mean_load_pct"
        checker.warn(i, column, 0, "the motor never runs (0): no option saves anything on it",
                     "give its running hours and mean load, or leave a spare or stand-by motor out of the register")
    # the load while an on/off motor runs reads its interval profile: elsewhere it is not used
    if "running_load_pct" in a:
        running_load = a["running_load_pct"].to_numpy(dtype=float)
        cycled = a["speed_control"].to_numpy(dtype=object) == "on_off"
        # (a profile that is not a duty table is an interval profile, read or not)
        interval = has_profile & ~prof.isin(list(duty_ids)).to_numpy()
        for i in np.flatnonzero(~np.isnan(running_load) & ~(cycled & interval)):
            why = ("the motor is not switched on and off (speed_control is not on_off)" if not cycled[i] else
                   "its load is given as load states or hours and mean load, which are loads while it runs already")
            checker.warn(i, "running_load_pct", running_load[i], f"running_load_pct is not used: {why}",
                         "leave it blank, or set speed_control to on_off for a motor started and stopped by a level "
                         "or pressure switch with an interval profile")
    # input-kW profiles against rating
    for i in np.flatnonzero(has_profile):
        series = profiles.get(str(prof.iloc[i]))
        if series is None or series.name != "input_kw" or np.isnan(rated_kw[i]):
            continue
        eta = eff[i] / 100 if not np.isnan(eff[i]) else 0.9
        limit = MAX_LOAD_PCT / 100 * rated_kw[i] / eta
        peak = float(series.max())
        if peak > limit:
            checker.err(i, "profile_id", prof.iloc[i],
                        f"measured input reaches {peak:g} kW, above 125 % of this motor's rated input ({limit:.1f} kW)",
                        "check the rated power, or whether the profile is in W instead of kW")
    year = a["year_installed"].to_numpy()
    for i in np.flatnonzero(~np.isnan(year) & (year > this_year)):
        checker.err(i, "year_installed", year[i], f"year_installed is after the current year ({this_year})")
    if "hazardous_area" in a:  # an explosive atmosphere present continuously: no motor belongs there
        area = a["hazardous_area"].to_numpy(dtype=object)
        for i in np.flatnonzero(np.isin(area, ["zone_0", "zone_20"])):
            checker.warn(i, "hazardous_area", area[i],
                         f"{area[i].replace('_', ' ')} is where an explosive atmosphere is present continuously or "
                         "for long periods: motors are not installed there",
                         "check the area classification with the site's hazardous-area drawings (zone 1 or 2 for gas, "
                         "21 or 22 for dust)")


def _fill_defaults(assets: pd.DataFrame, duty_ids: set[str]) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Fill missing nameplate fields from class, size and application defaults; log each one."""
    a = assets.copy()
    log: list[pd.DataFrame] = []

    def record(column: str, mask: np.ndarray, values, basis) -> None:
        if not mask.any():
            return
        series = a[column].copy()
        if pd.api.types.is_float_dtype(series.dtype):
            series = series.to_numpy(dtype=float).copy()
            series[mask] = np.asarray(values, dtype=float)[mask] if np.ndim(values) else values
        else:
            series = series.to_numpy(dtype=object).copy()
            series[mask] = np.asarray(values, dtype=object)[mask] if np.ndim(values) else values
        a[column] = series
        basis_arr = np.broadcast_to(np.asarray(basis, dtype=object), mask.shape)
        value_arr = np.broadcast_to(np.asarray(values, dtype=object), mask.shape) if np.ndim(values) else np.full(mask.shape, values, dtype=object)
        log.append(pd.DataFrame({"asset_id": a["asset_id"].to_numpy(dtype=object)[mask], "column": column,
                                 "value": value_arr[mask], "basis": basis_arr[mask]}))

    app = a["application"].to_numpy(dtype=object)
    record("load_type", a["load_type"].isna().to_numpy(),
           np.where(np.isin(app, ["pump", "fan"]), "variable_torque", "constant_torque"),
           "application default (pumps and fans are centrifugal, others constant torque)")
    record("machine_type", a["machine_type"].isna().to_numpy(), "induction", "assumed induction motor")
    record("speed_control", a["speed_control"].isna().to_numpy(), "fixed", "assumed fixed speed, no throttle")
    record("criticality", a["criticality"].isna().to_numpy(), "medium", "assumed medium criticality")
    if "hazardous_area" in a:  # (a blank is an unclassified area, not a defaulted nameplate field)
        a["hazardous_area"] = a["hazardous_area"].fillna("none")
    record("rewind_count", a["rewind_count"].isna().to_numpy(), 0.0, "assumed never rewound")
    if "rewind_loss_pct_points" in a:
        from models.induction import DEFAULT_REWIND_LOSS_PCT_POINTS

        # logged where it changes today's motor (rewound before); a rewind option takes it too
        blank = np.isnan(a["rewind_loss_pct_points"].to_numpy(dtype=float))
        rewound = a["rewind_count"].to_numpy(dtype=float) > 0
        record("rewind_loss_pct_points", blank & rewound, DEFAULT_REWIND_LOSS_PCT_POINTS,
               "good-practice rewinds (EASA/AEMT 2019); about 1 point in a typical shop")
        a["rewind_loss_pct_points"] = np.where(blank, DEFAULT_REWIND_LOSS_PCT_POINTS,
                                               a["rewind_loss_pct_points"].to_numpy(dtype=float))
    record("efficiency_class", a["efficiency_class"].isna().to_numpy(), "unknown", "no class given")
    record("start_duty", a["start_duty"].isna().to_numpy(),
           np.vectorize(nameplate_defaults.START_DUTY_BY_APPLICATION.get, otypes=[object])(app),
           "application default (common practice)")
    # logged where a model reads it: a throttled centrifugal load whose drive options follow its system curve
    head_blank = np.isnan(a["static_head_frac"].to_numpy(dtype=float))
    head_default = np.vectorize(nameplate_defaults.STATIC_HEAD_FRAC_BY_APPLICATION.get, otypes=[float])(app)
    # (and a centrifugal load switched on and off with an interval profile, which a drive may run at its demand)
    control = a["speed_control"].to_numpy(dtype=object)
    interval_profile = a["profile_id"].notna().to_numpy() & ~a["profile_id"].isin(list(duty_ids)).to_numpy()
    read = (((control == "throttled") | ((control == "on_off") & interval_profile))
            & (a["load_type"].to_numpy(dtype=object) == "variable_torque"))
    record("static_head_frac", head_blank & read, head_default, "application default (common practice)")
    a["static_head_frac"] = np.where(head_blank, head_default, a["static_head_frac"].to_numpy(dtype=float))
    p_kw = a["rated_p_kw"].to_numpy(dtype=float)
    poles = a["poles"].to_numpy(dtype=float)
    f_hz = a["supply_f_hz"].to_numpy(dtype=float)
    eff_default, eff_basis = nameplate_defaults.default_efficiency_pct(
        p_kw, poles, f_hz, a["efficiency_class"].to_numpy(dtype=object), a["year_installed"].to_numpy(dtype=float),
        a["machine_type"].to_numpy(dtype=object))
    record("rated_efficiency_pct", np.isnan(a["rated_efficiency_pct"].to_numpy()) & ~np.isnan(eff_default),
           eff_default, eff_basis)
    record("rated_power_factor", np.isnan(a["rated_power_factor"].to_numpy()),
           nameplate_defaults.default_power_factor(p_kw, poles), "typical full-load power factor by size and poles (common practice)")
    sync = a["sync_speed_rpm"].to_numpy(dtype=float)
    induction = a["machine_type"].to_numpy(dtype=object) == "induction"
    default_speed = np.where(induction, sync * (1 - nameplate_defaults.typical_slip_frac(p_kw)), sync)
    record("rated_speed_rpm", np.isnan(a["rated_speed_rpm"].to_numpy()), default_speed,
           np.where(induction, "synchronous speed less typical full-load slip by size", "synchronous speed"))
    defaults = pd.concat(log, ignore_index=True) if log else pd.DataFrame(columns=["asset_id", "column", "value", "basis"])
    a["data_quality_pct"] = nameplate_defaults.data_quality_pct(a, defaults, duty_ids)
    return a, defaults


#: The register's column each calibration rule of today's motors points at, and the rule's words for
#: the model's own names (:func:`models.operation.today_calibration_failures`).
_CALIBRATION_COLUMNS = {"rated_p_kw": "rated_p_kw", "rated_efficiency": "rated_efficiency_pct",
                        "rated_power_factor": "rated_power_factor", "sync_speed": "poles",
                        "rated_speed": "rated_speed_rpm", "efficiency_75_frac": "efficiency_75_pct",
                        "efficiency_50_frac": "efficiency_50_pct", "power_factor_75": "power_factor_75",
                        "power_factor_50": "power_factor_50", "rewind_count": "rewind_count",
                        "rewind_loss": "rewind_loss_pct_points"}
_CALIBRATION_WORDS = (("rated_efficiency_frac", "rated_efficiency_pct"), ("efficiency_75_frac", "efficiency_75_pct"),
                      ("efficiency_50_frac", "efficiency_50_pct"), ("sync_speed_rpm", "the synchronous speed"))


def _check_calibration(checker: _TableChecker, assets: pd.DataFrame, defaults: pd.DataFrame) -> list[Problem]:
    """Today's motors the machine model cannot calibrate from their nameplates (defaults filled in), one
    error per motor on the column its first failed rule points at, said with the cell's value and, where
    that value is a default, its basis; returns the new problems (none: every motor calibrates)."""
    from models.operation import asset_arrays, today_calibration_failures

    quantity, message = today_calibration_failures(asset_arrays(assets))
    before = len(checker.problems)
    filled = {(str(r.asset_id), str(r.column)): str(r.basis) for r in defaults.itertuples(index=False)}
    for i in np.flatnonzero(quantity != ""):
        column = _CALIBRATION_COLUMNS.get(str(quantity[i]), "rated_efficiency_pct")
        text = str(message[i])
        for model_name, register_name in _CALIBRATION_WORDS:
            text = text.replace(model_name, register_name)
        basis = filled.get((str(assets["asset_id"].iloc[i]), column))
        value = assets[column].iloc[i] if column in assets else None
        read = assets.iloc[i]
        sync = float(read["sync_speed_rpm"])
        hint = (f"the machine model cannot be calibrated from the nameplate as read ({read['rated_p_kw']:g} kW, "
                f"{read['rated_efficiency_pct']:.4g} %, power factor {read['rated_power_factor']:.3g}, "
                f"{read['rated_speed_rpm']:.5g} rpm: a slip of {100 * (sync - read['rated_speed_rpm']) / sync:.2g} %): "
                "check them against the nameplate or datasheet")
        if basis:
            hint = f"this value is a default ({basis}): give the nameplate's; " + hint
        checker.err(i, column, value, text, hint)
    return checker.problems[before:]


def _check_sites(checker: _TableChecker, tariffs: dict[str, dict], profiles: dict[str, pd.Series],
                 tariffs_expected: bool, unreadable: set[str] = frozenset(),
                 rejected_profiles: set[str] | None = frozenset()) -> None:
    """Cross-check the sites: ids, tariff files and base-load profiles.

    ``rejected_profiles`` None means the profiles file could not be read, and a profile listed in it exists
    but failed its own checks: a base-load reference to either is not reported again (as in the assets).
    """
    s = checker.frame
    _duplicates(checker, "site_id", "site_id")
    known = sorted(set(tariffs) | set(unreadable))
    for i in np.flatnonzero(s["tariff_file"].notna().to_numpy()):
        name = s["tariff_file"].iloc[i]
        if name in unreadable:
            checker.err(i, "tariff_file", name, "the tariff file named here could not be read (see its own problems)",
                        "fix the tariff file first")
        elif tariffs_expected and name not in tariffs:
            hint = did_you_mean(name, known, cutoff=0.6) + (
                f"the case's tariffs are: {', '.join(known)}" if known else
                "put the file in the tariffs/ folder (or a 'tariff <name>' sheet)")
            checker.err(i, "tariff_file", name, "tariff file not found in the case's tariffs", hint)
    blank = np.flatnonzero(s["tariff_file"].isna().to_numpy())
    if len(blank) and known:  # a case with tariffs prices every site: one without a tariff cannot run
        for i in blank:
            checker.err(i, "tariff_file", None, "no tariff file named: pricing the site's bill needs one",
                        f"name one of the case's tariffs: {', '.join(known)}")
    elif len(blank) and len(s):  # no tariff at all: the machines compare, nothing is priced
        checker.warn(None, "tariff_file", None, "the case has no tariff: its machines can be compared, but no bill "
                     "can be priced", "drivecase bill, run and report need a tariff file per site (docs/tariffs.md)")
    for i in np.flatnonzero(s["base_profile_id"].notna().to_numpy() & (rejected_profiles is not None)):
        pid = s["base_profile_id"].iloc[i]
        series = profiles.get(str(pid))
        if series is None and str(pid) in rejected_profiles:
            continue  # in the profiles, but refused there: its own problems say why
        if series is None:
            checker.err(i, "base_profile_id", pid, "unknown profile reference (not in profiles)",
                        _near_id_hint(pid, set(profiles) | set(rejected_profiles), ""))
        elif series.name != "input_kw":
            checker.err(i, "base_profile_id", pid, "the base-load profile must be in input_kw")
    s["base_p_kw"] = s["base_p_kw"].fillna(0.0)
    s["base_power_factor"] = s["base_power_factor"].fillna(0.9)


def coarse_demand_profiles(sites: pd.DataFrame, assets: pd.DataFrame, tariffs: dict,
                           profile_info, clause: str = "demand") -> dict[str, tuple[int, list[int], int]]:
    """Sites whose demand charge (or with ``clause="coincident"``, coincident-peak charge) takes shorter
    windows than their motors' profiles resolve.

    Parameters
    ----------
    sites, assets : pandas.DataFrame
        The case's sites (site_id, tariff_file) and assets (site_id, profile_id).
    tariffs : dict of str -> models.tariff.Tariff
        The case's tariffs by file name.
    profile_info : pandas.DataFrame
        One row per profile with profile_id and resolution_min (:attr:`Case.profile_info`).

    Returns
    -------
    dict
        site_id -> (the shortest demand window [min], the coarser profile resolutions [min], sorted, and
        the number of the site's motors with such a profile). Each such profile interval is read as one
        demand window, which averages the peak away and understates the demand charge and its savings
        (docs/tariffs.md, "Modelling limits").

    Examples
    --------
    >>> from types import SimpleNamespace
    >>> tariff = SimpleNamespace(demand=[SimpleNamespace(window_min=15)])
    >>> coarse_demand_profiles(pd.DataFrame({"site_id": ["S"], "tariff_file": ["t.toml"]}),
    ...                        pd.DataFrame({"site_id": ["S", "S"], "profile_id": ["a", "b"]}), {"t.toml": tariff},
    ...                        pd.DataFrame({"profile_id": ["a", "b"], "resolution_min": [60, 15]}))
    {'S': (15, [60], 1)}
    """
    found: dict[str, tuple[int, list[int], int]] = {}
    if not isinstance(profile_info, pd.DataFrame) or profile_info.empty or "profile_id" not in assets:
        return found
    resolution = dict(zip(profile_info["profile_id"], profile_info["resolution_min"]))
    for site_id, tariff_file in zip(sites["site_id"], sites["tariff_file"]):
        window = shortest_demand_window_min(tariffs, tariff_file, clause)
        if window is None:
            continue
        own = [p for p in assets.loc[assets["site_id"] == site_id, "profile_id"].dropna()
               if p in resolution and resolution[p] > window]
        if own:
            found[str(site_id)] = (int(window), sorted({int(resolution[p]) for p in own}), len(own))
    return found


def shortest_demand_window_min(tariffs: dict, tariff_file, clause: str = "demand") -> int | None:
    """The shortest demand window of a site's tariff [min], None where it has no demand charge (or none is named);
    its kW or kVA demand charges' and its kVAr demand charges' alike; ``clause="coincident"``: of its
    coincident-peak charges."""
    tariff = tariffs.get(tariff_file) if isinstance(tariff_file, str) else None
    clauses = list(getattr(tariff, clause, ()))
    if clause == "demand":
        clauses += list(getattr(tariff, "reactive_demand", ()))
    windows = [d.window_min for d in clauses]
    return int(min(windows)) if windows else None


def demand_window_text(window_min: int, coarse_min: list[int], n_motors: int, whose: str = "of the site") -> str:
    """The caution of :func:`coarse_demand_profiles`, in words (the case check's and the Site meter page's);
    ``whose`` says which motors ``n_motors`` counts (the pack's register: "of the site in this pack")."""
    return (f"the tariff's demand charge takes {window_min}-min windows, but {counted(n_motors, 'motor')} {whose} "
            f"{'has' if n_motors == 1 else 'have'} "
            f"{'/'.join(map(str, coarse_min))}-min profiles: each interval is read as one window, which "
            "understates the demand peak and its savings")


def _check_peak_windows(sites: _TableChecker, assets: pd.DataFrame, tariffs: dict, profile_info) -> None:
    """Warn where a site's coincident-peak charge takes shorter windows than its motors' profiles resolve: each
    peak window then reads the whole interval that holds it, which cannot show the demand within it."""
    s = sites.frame
    found = coarse_demand_profiles(s, assets, tariffs, profile_info, clause="coincident")
    for i in range(len(s)):
        if str(s["site_id"].iloc[i]) in found:
            window, coarse, n = found[str(s["site_id"].iloc[i])]
            sites.warn(i, "tariff_file", s["tariff_file"].iloc[i],
                       f"the tariff's coincident-peak charge takes {window}-min windows, but {counted(n, 'motor')} of "
                       f"the site {'has' if n == 1 else 'have'} {'/'.join(map(str, coarse))}-min profiles: each peak "
                       "window reads the interval that holds it, which cannot show the demand within it",
                       f"log the motors that run at the system's peak times at {window}-min resolution")
    # the site's own base load, read the same way
    _coarse_base_loads(sites, tariffs, profile_info, "coincident",
                       lambda window, own: f"the tariff's coincident-peak charge takes {window}-min windows, but the "
                       f"site's base-load profile has {own}-min intervals: each peak window reads the interval that "
                       "holds it, which cannot show the demand within it")


def _coarse_base_loads(sites: _TableChecker, tariffs: dict, profile_info, clause: str, rule) -> None:
    """Warn of each site whose base-load profile is coarser than the shortest window of its tariff's ``clause``
    ("demand" or "coincident"); ``rule(window_min, profile_min)`` words it."""
    s = sites.frame
    if "base_profile_id" not in s or not isinstance(profile_info, pd.DataFrame) or profile_info.empty:
        return
    resolution = dict(zip(profile_info["profile_id"], profile_info["resolution_min"]))
    for i in range(len(s)):
        base = s["base_profile_id"].iloc[i]
        window = shortest_demand_window_min(tariffs, s["tariff_file"].iloc[i], clause)
        if isinstance(base, str) and window is not None and resolution.get(base, 0) > window:
            sites.warn(i, "base_profile_id", base, rule(window, int(resolution[base])),
                       f"give the base load at {window}-min resolution (the meter's own interval data)")


def _checked_index(profiles: dict, settings: CaseSettings, assets: pd.DataFrame, sites: pd.DataFrame):
    """The analysis index of the profiles the case's assets and sites use, or None where they cannot give one
    (profiles with errors of their own, reported where they are read)."""
    from models.profiles import analysis_index

    used = set(assets.get("profile_id", pd.Series(dtype=object)).dropna().astype(str))
    used |= set(sites.get("base_profile_id", pd.Series(dtype=object)).dropna().astype(str))
    try:
        return analysis_index(profiles, settings.time_zone, used=used)
    except (ValueError, KeyError, IndexError):
        return None


def _check_period_grid(tariffs: dict, profiles: dict, settings: CaseSettings, assets: pd.DataFrame,
                       sites: pd.DataFrame, raw: io.RawCase, problems: list[Problem]) -> None:
    """Warn of a used tariff whose time-of-use period begins or ends between the starts of the analysis
    intervals (17:30 on hourly data): each interval is priced in the period in force at its start, so the
    part of it after the boundary is priced in the period before."""
    if "tariff_file" not in sites:
        return
    used_tariffs = set(sites["tariff_file"].dropna().astype(str))
    index = _checked_index(profiles, settings, assets, sites)
    if index is None:
        return
    step_min = int(round((index[1] - index[0]).total_seconds() / 60)) if len(index) > 1 else 60
    for name, tariff in tariffs.items():
        if name not in used_tariffs:
            continue
        source = f"tariffs/{name}" if raw.kind == "folder" else f"{raw.path.name}:tariff {name}"
        # the period in force at each minute of each season and day type; a boundary is a minute where it changes
        # (two rules of one period that meet are no boundary)
        grids: dict[tuple[str, str], np.ndarray] = {}
        for rule in tariff.periods:
            for season in rule.seasons:
                for day_type in rule.day_types:
                    grid = grids.setdefault((season, day_type), np.full(1440, "", dtype=object))
                    grid[rule.minute_mask()] = rule.code
        off = sorted({int(m) for grid in grids.values() for m in np.flatnonzero(grid[1:] != grid[:-1]) + 1
                      if m % step_min})
        if not off:
            continue
        times = ", ".join(f"{m // 60:02d}:{m % 60:02d}" for m in off)
        problems.append(warning(
            source, None, "periods", times,
            f"the time-of-use period changes at {times}, between the starts of the case's {step_min}-min "
            "intervals: each interval is priced in the period in force at its start, so the part of it after "
            "the change is priced in the period before",
            f"give the profiles at a resolution the change falls on (e.g. {_grid_for(off)}-min), or read the "
            "tariff's change as the interval's start"))


def _grid_for(minutes: list[int]) -> int:
    """The coarsest profile resolution (60, 30, 15, 5 or 1 min) on which every one of ``minutes`` falls.

    >>> _grid_for([420]), _grid_for([440]), _grid_for([427])
    (60, 5, 1)
    """
    return next(step for step in (60, 30, 15, 5, 1) if all(m % step == 0 for m in minutes))


def _check_demand_windows(sites: _TableChecker, assets: pd.DataFrame, tariffs: dict, profile_info) -> None:
    """Warn where a site's demand charge takes shorter windows than its motors' profiles resolve
    (:func:`coarse_demand_profiles`)."""
    s = sites.frame
    found = coarse_demand_profiles(s, assets, tariffs, profile_info)
    for i in range(len(s)):
        site_id = str(s["site_id"].iloc[i])
        if site_id in found:
            window, coarse, n = found[site_id]
            sites.warn(i, "tariff_file", s["tariff_file"].iloc[i], demand_window_text(window, coarse, n),
                       f"log the largest motors at {window}-min resolution where the demand charge matters")
    # the site's own base load, read the same way
    _coarse_base_loads(sites, tariffs, profile_info, "demand",
                       lambda window, own: f"the tariff's demand charge takes {window}-min windows, but the site's "
                       f"base-load profile has {own}-min intervals: each is read as one window, which understates "
                       "the demand peak, the bill and the demand savings")


#: A contracted capacity above this multiple of the most a site's motors and base load can draw is warned [-]
#: (a rule of thumb on a generous bound, so that only a unit slip or a site missing most of its loads is
#: flagged).
CONTRACT_WARN_FACTOR = 2.0
#: The bound's least efficiency and power factor of a motor at its rated output [-] (generous: lower than any
#: motor's at full load in the efficiency classes of IEC 60034-30-1, and than usual full-load power factors).
_BOUND_EFFICIENCY_FRAC = 0.7
_BOUND_POWER_FACTOR = 0.6


def _check_contracts_against_sites(sites: _TableChecker, assets: pd.DataFrame, tariffs: dict,
                                   profiles: dict[str, pd.Series]) -> None:
    """Warn where a demand charge's contracted capacity is more than :data:`CONTRACT_WARN_FACTOR` times the
    most the site can draw: every motor at its rated output at 70 % efficiency (and a power factor of 0.6
    for a kVA contract), plus the base load's largest value. The demand then stays below the contract,
    which is billed whatever the demand, so no option lowers that charge: usually a unit slip, or a site
    whose other loads are missing from its base load."""
    s = sites.frame
    if "rated_p_kw" not in assets or "site_id" not in assets:
        return
    rated = pd.to_numeric(assets["rated_p_kw"], errors="coerce").groupby(assets["site_id"].astype(str)).sum()
    for i in range(len(s)):
        tariff = tariffs.get(s["tariff_file"].iloc[i]) if isinstance(s["tariff_file"].iloc[i], str) else None
        contracts = [d for d in getattr(tariff, "demand", ()) if d.contracted is not None]
        if not contracts:
            continue
        site_id = str(s["site_id"].iloc[i])
        base_kw = float(s["base_p_kw"].iloc[i]) if "base_p_kw" in s else 0.0
        pid = s["base_profile_id"].iloc[i] if "base_profile_id" in s else None
        profile = profiles.get(str(pid)) if isinstance(pid, str) else None
        if profile is not None and len(profile):
            base_kw = max(base_kw, float(np.nanmax(profile.to_numpy(dtype=float))))
        most_kw = float(rated.get(site_id, 0.0)) / _BOUND_EFFICIENCY_FRAC + max(base_kw, 0.0)
        for d in contracts:
            most = most_kw if d.basis == "kW" else most_kw / _BOUND_POWER_FACTOR
            if d.contracted > CONTRACT_WARN_FACTOR * most:
                sites.warn(i, "tariff_file", s["tariff_file"].iloc[i],
                           f"the demand charge '{d.name}' books a contract of {d.contracted:,.0f} {d.basis}, more than "
                           f"{CONTRACT_WARN_FACTOR:g} times the most the site's motors and base load can draw (about "
                           f"{most:,.0f} {d.basis}): the demand stays below the contract, which is billed whatever the "
                           "demand, so no option lowers this charge",
                           "check the contract's unit, and that the site's other loads are in its base load "
                           "(base_p_kw or base_profile_id)")


def _check_holidays_in_year(tariffs: dict, profiles: dict, settings: CaseSettings, assets: pd.DataFrame,
                            sites: pd.DataFrame, raw: io.RawCase, problems: list[Problem]) -> None:
    """Warn of a tariff whose listed holidays all fall outside the analysis year (the year of the profiles the
    case uses; :data:`models.profiles.DEFAULT_YEAR` without any): its holidays are then billed as ordinary days."""
    from models.profiles import DEFAULT_YEAR, analysis_index

    listed = {name: t for name, t in tariffs.items() if getattr(t, "holidays", ())}
    if not listed:
        return
    used = set(assets.get("profile_id", pd.Series(dtype=object)).dropna().astype(str))
    used |= set(sites.get("base_profile_id", pd.Series(dtype=object)).dropna().astype(str))
    try:
        year = int(analysis_index(profiles, settings.time_zone, used=used)[0].year)
    except (ValueError, KeyError, IndexError):  # (profiles with their own errors are reported there)
        return
    for name, tariff in listed.items():
        years = sorted({d.year for d in tariff.holidays})
        if year not in years:
            source = f"tariffs/{name}" if raw.kind == "folder" else f"{raw.path.name}:tariff {name}"
            problems.append(warning(
                source, None, "calendar.holidays", ", ".join(map(str, years)),
                f"none of the tariff's holidays falls in the analysis year {year} (the year of the case's profiles; "
                f"{DEFAULT_YEAR} for a case without any): its holidays are billed as ordinary days",
                f"list the holidays of {year} as well"))


def _peak_time_miss(time: tuple[int, int, int, int], years: range, zone) -> tuple[str, str]:
    """Why a coincident-peak time has no window in the analysis series, as (reason, hint): its day does not
    exist in the series' years (29 February), it falls in the hour the clocks skip in spring, or else its day
    lies outside the series."""
    from models.wording import MONTH_NAMES

    month, day, hour, minute = time
    no_day, skipped = [], []
    for year in years:
        try:
            wall = pd.Timestamp(year=year, month=month, day=day, hour=hour, minute=minute)
        except ValueError:
            no_day.append(str(year))
            continue
        if pd.isna(wall.tz_localize(zone, nonexistent="NaT", ambiguous=True)):
            after = wall.tz_localize(zone, nonexistent="shift_forward", ambiguous=True)
            before = wall.tz_localize(zone, nonexistent="shift_backward", ambiguous=True)
            start = after.tz_localize(None) - (after.utcoffset() - before.utcoffset())
            skipped.append((f"{day} {MONTH_NAMES[month - 1]} {year}", f"{start:%H:%M}", f"{after:%H:%M}"))
    reasons, hints = [], []
    if no_day:
        reasons.append(f"no {day} {MONTH_NAMES[month - 1]} in {' or '.join(no_day)}")
        hints.append("give the system's peak time as a day the analysis year has, or leave it out")
    for date, start, end in skipped:
        reasons.append(f"falls in the hour the clocks skip on {date}")
        hints.append(f"on {date} the clocks go from {start} straight to {end}, so no interval starts at "
                     f"{hour:02d}:{minute:02d}; check the time against the utility's notice")
    if not reasons:
        reasons.append("its day lies outside the analysis period")
        hints.append("list the system's peak times inside the profiles' period; a time of another year is read "
                     "52 weeks per year later or earlier, on the same weekday and clock time")
    return "; ".join(reasons), " ".join(hints)


def _repeated_hour_times(times, window_min: int, years: range, zone) -> list[tuple[int, str]]:
    """(position, date in words) of each peak time whose window reaches into the hour the clocks repeat when
    they go back, in the first year of ``years`` that has its day (as the bill reads it)."""
    from models.wording import MONTH_NAMES

    out = []
    for j, (month, day, hour, minute) in enumerate(times):
        for year in years:
            try:
                start = pd.Timestamp(year=year, month=month, day=day, hour=hour, minute=minute)
            except ValueError:
                continue
            ends = (start, start + pd.Timedelta(minutes=window_min - 1))
            if any(pd.isna(t.tz_localize(zone, ambiguous="NaT", nonexistent="shift_forward")) for t in ends):
                out.append((j, f"{day} {MONTH_NAMES[month - 1]} {year}"))
            break
    return out


def sites_have_ratchet(tariffs: dict, sites: pd.DataFrame) -> bool:
    """Whether the tariff of some site (``sites.tariff_file``) has a demand ratchet: the one charge whose first
    years after a change depend on the month it comes into service."""
    if "tariff_file" not in sites:
        return False
    used = set(sites["tariff_file"].dropna().astype(str))
    return any(getattr(d, "ratchet_frac", None) is not None for name, t in tariffs.items() if name in used
               for d in getattr(t, "demand", ()))


def _check_in_service_month_read(tariffs: dict, settings: CaseSettings, sites: pd.DataFrame, raw: io.RawCase,
                                 problems: list[Problem]) -> None:
    """Warn of an ``in_service_month`` that nothing reads (:func:`sites_have_ratchet`)."""
    if settings.in_service_month is not None and "tariff_file" in sites and not sites_have_ratchet(tariffs, sites):
        problems.append(warning(raw.settings_source, None, "in_service_month", settings.in_service_month,
                                "no site's tariff has a demand ratchet, the one charge the month of the change moves: "
                                "the setting changes nothing", "leave it out, or check the sites' tariffs"))


def _check_peak_times_in_year(tariffs: dict, profiles: dict, settings: CaseSettings, assets: pd.DataFrame,
                              sites: pd.DataFrame, raw: io.RawCase, problems: list[Problem]) -> None:
    """Warn of each coincident-peak time that cannot be placed in the analysis series (a time in the hour the
    clocks skip in spring; for a clause built without years, also a 29 February in a year without one or a
    day outside the series), naming the time as written and the reason: it is left out of the clause's mean.
    When no time of a clause can be placed, one warning says so with each time's reason: the clause bills
    nothing, so no motor saves on it. Also warned: a time in the hour the clocks repeat in autumn (its first
    occurrence is billed), and two times of different years read on the same day and time of the analysis
    year (:func:`models.billing.placed_peak_times`)."""
    from models.billing import peak_windows, placed_peak_times
    from models.tariff import _local_wall, peak_time_text

    listed = {name: t for name, t in tariffs.items() if getattr(t, "coincident", ())}
    if not listed:
        return
    index = _checked_index(profiles, settings, assets, sites)
    if index is None:
        return
    period = f"{index[0]:%Y-%m-%d} to {index[-1]:%Y-%m-%d}"
    step = int(index[1].value - index[0].value) if len(index) > 1 else None
    for name, tariff in listed.items():
        source = f"tariffs/{name}" if raw.kind == "folder" else f"{raw.path.name}:tariff {name}"
        wall = _local_wall(tariff, index)
        wall_ns = wall.to_numpy().astype("datetime64[ns]").astype(np.int64)
        years = range(int(wall[0].year), int(wall[-1].year) + 1)  # (as peak_windows looks for each time)
        zone = tariff.time_zone or index.tz
        for i, clause in enumerate(tariff.coincident, start=1):
            key = f"coincident_peak[{i}].times"
            placed = placed_peak_times(clause, int(wall[len(wall) // 2].year))
            missed: dict[tuple[int, int, int, int], int] = {}  # each time once, at its first listing
            for j, time in enumerate(placed):
                if time not in missed and not peak_windows(wall_ns, (time,), clause.window_min, step):
                    missed[time] = j
            first_at: dict[tuple[int, int, int, int], int] = {}
            for j, time in enumerate(placed):
                k = first_at.setdefault(time, j)
                written_k = (clause.years[k] if k < len(clause.years) else None, *clause.times[k])
                written_j = (clause.years[j] if j < len(clause.years) else None, *clause.times[j])
                if k != j and written_k != written_j:  # (the same time written twice is warned with the tariff)
                    problems.append(warning(
                        source, None, key, [clause.time_text(k), clause.time_text(j)],
                        f"times {k + 1} and {j + 1} of {len(placed)} are read on the same day and time of the "
                        f"analysis year, {peak_time_text(time)} (52 weeks per year from the year each is written "
                        "in): that window counts twice in the mean",
                        "list each system peak once, in the year the utility's notice gives"))
            for j, date in _repeated_hour_times(placed, clause.window_min, years, zone):
                problems.append(warning(
                    source, None, key, clause.time_text(j),
                    f"time {j + 1} of {len(placed)} falls in the hour repeated when the clocks go back on {date}: the "
                    "first time the clock shows it (summer time) is billed",
                    "check the utility's notice: a time meant in the second occurrence (standard time) is an hour "
                    "later in summer time; it cannot be written otherwise"))
            if not missed:
                continue
            why = {time: _peak_time_miss(time, years, zone) for time in missed}
            if len(missed) < len(set(placed)):
                kept = len(set(placed)) - len(missed)
                for time, j in missed.items():
                    reason, hint = why[time]
                    problems.append(warning(
                        source, None, key, clause.time_text(j),
                        f"time {j + 1} of {len(clause.times)} cannot be placed in the analysis period ({period}, the "
                        f"case's profiles): {reason}; it is left out of the mean, which takes the clause's "
                        f"{counted(kept, 'other peak time')}", hint))
                continue
            texts = [clause.time_text(j) for j in missed.values()]
            hints = list(dict.fromkeys(why[time][1] for time in missed))
            problems.append(warning(
                source, None, key, texts[0] if len(texts) == 1 else texts,
                f"no peak time of the clause falls in the analysis period ({period}, the case's profiles): it bills "
                "nothing and no motor saves on it ("
                + "; ".join(f"{text}: {why[time][0]}" for text, time in zip(texts, missed)) + ")", "; ".join(hints)))


def _check_capacitors(checker: _TableChecker, site_ids: set[str] | None) -> None:
    c = checker.frame
    _duplicates(checker, "bank_id", "bank_id")
    site_given = c["site_id"].notna().to_numpy() & (site_ids is not None)
    for i in np.flatnonzero(site_given & ~c["site_id"].isin(site_ids or set()).to_numpy()):
        checker.err(i, "site_id", c["site_id"].iloc[i], "unknown site_id (not in sites)",
                    _near_id_hint(c["site_id"].iloc[i], site_ids, ""))
    c["control"] = c["control"].fillna("fixed")
    rated = c["rated_q_kvar"].to_numpy()
    step = c["step_q_kvar"].to_numpy()
    for i in np.flatnonzero(~np.isnan(step) & ~np.isnan(rated) & (step > rated)):
        checker.err(i, "step_q_kvar", step[i], "a step cannot be larger than the bank", "step_q_kvar <= rated_q_kvar")
    c["step_q_kvar"] = np.where(np.isnan(step), rated / 6.0, step)
    c["target_power_factor"] = c["target_power_factor"].fillna(0.95)


#: A billing month as the bill history writes it: ``YYYY-MM``.
_MONTH_PATTERN = re.compile(r"^(\d{4})-(\d{2})$")


def _check_verification(checker: _TableChecker, asset_ids: set[str] | None, option_techs: dict | None) -> None:
    """The savings verification table: known assets and options (not today's motor), dates written YYYY-MM-DD with
    the last day on or after the first, no more running hours than the period has, one option per asset, an asset's
    reporting period after its baseline; an asset with a baseline and no reporting period yet (or the other way
    round) is said."""
    v = checker.frame
    for i in np.flatnonzero(v["asset_id"].notna().to_numpy() & (asset_ids is not None)
                            & ~v["asset_id"].astype(str).isin(asset_ids or set()).to_numpy()):
        checker.err(i, "asset_id", v["asset_id"].iloc[i], "unknown asset_id (not in the asset register)",
                    _near_id_hint(v["asset_id"].iloc[i], asset_ids, ""))
    if option_techs is not None:
        for i, option in enumerate(v["option_id"]):
            if option is None or (isinstance(option, float) and np.isnan(option)):
                continue
            if str(option) not in option_techs:
                checker.err(i, "option_id", option, "unknown option_id (not in the options catalogue)",
                            _near_id_hint(option, set(option_techs), ""))
            elif option_techs[str(option)] == "existing":
                checker.err(i, "option_id", option, "the option installed cannot be today's motor kept as it is",
                            "name the project installed (a rewind, a new motor, a drive, a capacitor...)")
    days, spans = [], []
    for i, (start, end) in enumerate(zip(v["start_date"], v["end_date"])):
        dates = []
        for column, value in (("start_date", start), ("end_date", end)):
            text = "" if value is None or (isinstance(value, float) and np.isnan(value)) else str(value).strip()[:10]
            try:
                dates.append(_dt.date.fromisoformat(text) if text else None)
            except ValueError:
                checker.err(i, column, value, "a date is written YYYY-MM-DD", "e.g. 2026-03-01")
                dates.append(None)
        if dates[0] is not None and dates[1] is not None and dates[1] < dates[0]:
            checker.err(i, "end_date", end, "the last day is before the first", "end_date >= start_date")
            dates[1] = None
        days.append((dates[1] - dates[0]).days + 1 if None not in dates else np.nan)
        spans.append(tuple(dates) if None not in dates else None)
        if None not in dates:
            v.loc[v.index[i], "start_date"], v.loc[v.index[i], "end_date"] = dates[0].isoformat(), dates[1].isoformat()
    days = np.asarray(days, dtype=float)
    hours = v["running_h"].to_numpy(dtype=float)
    for i in np.flatnonzero(hours > 24.0 * days):
        checker.err(i, "running_h", hours[i], f"more running hours than the period's {int(days[i])} days hold",
                    "running_h <= 24 x (end_date - start_date + 1)")
    assets = v["asset_id"].astype(str).to_numpy()
    period_of = v["period"].astype(str).to_numpy()
    given = v["asset_id"].notna().to_numpy()
    for asset, rows in sorted(pd.Series(np.arange(len(v)))[given].groupby(assets[given]).indices.items()):
        rows = np.flatnonzero(given)[rows]
        options = {str(o) for o in v["option_id"].iloc[rows] if o is not None and o == o}
        if len(options) > 1:
            checker.err(int(rows[-1]), "option_id", v["option_id"].iloc[rows[-1]],
                        f"asset {asset} names more than one option installed ({', '.join(sorted(options))})",
                        "one project per asset: give every row of the asset the option installed")
        periods = set(v["period"].iloc[rows].dropna().astype(str))
        _check_periods_apart(checker, asset, rows, period_of, spans)
        if periods == {"baseline"}:
            checker.warn(int(rows[0]), "period", "baseline", f"asset {asset} has a baseline and no reporting period yet: "
                         "nothing to verify", "add the measurements after the project as period reporting")
        elif periods == {"reporting"}:
            checker.warn(int(rows[0]), "period", "reporting", f"asset {asset} has no baseline: its savings cannot be "
                         "verified", "add the measurements of today's motor before the project as period baseline")


def _check_periods_apart(checker: _TableChecker, asset: str, rows: np.ndarray, periods: np.ndarray,
                         spans: list) -> None:
    """An asset's reporting rows must start after its baseline ends: a reporting row that starts on or before the
    baseline's last day, or ends before it starts, is an error (the baseline is today's motor before the project, the
    reporting period the project's after it)."""
    base = [spans[i] for i in rows if periods[i] == "baseline" and spans[i] is not None]
    if not base:
        return
    first, last = min(s[0] for s in base), max(s[1] for s in base)
    for i in rows:
        if periods[i] != "reporting" or spans[i] is None:
            continue
        start, end = spans[i]
        if end < first:
            checker.err(int(i), "end_date", end.isoformat(),
                        f"asset {asset}'s reporting period ends before its baseline starts ({first.isoformat()})",
                        "the baseline is measured before the project, the reporting period after it")
        elif start <= last:
            checker.err(int(i), "start_date", start.isoformat(),
                        f"asset {asset}'s reporting period starts on or before the last day of its baseline "
                        f"({last.isoformat()})", "start the reporting period after the project is installed, "
                        "once the baseline has ended")


def _check_bill_history(checker: _TableChecker, site_ids: set[str] | None) -> None:
    """The bill history: known sites, months written YYYY-MM, one bill per site and month (a month may come
    from several years; each is compared with the same calendar month of the analysis year)."""
    b = checker.frame
    site_given = b["site_id"].notna().to_numpy() & (site_ids is not None)
    for i in np.flatnonzero(site_given & ~b["site_id"].isin(site_ids or set()).to_numpy()):
        checker.err(i, "site_id", b["site_id"].iloc[i], "unknown site_id (not in sites)",
                    _near_id_hint(b["site_id"].iloc[i], site_ids, ""))
    months = []
    for i, value in enumerate(b["month"]):
        text = "" if value is None or (isinstance(value, float) and np.isnan(value)) else str(value).strip()
        dated = len(text) >= 10 and text[7:8] == "-"  # a date (a workbook's date cell): its month, if a real day
        day_ok = True
        if dated:
            try:
                _dt.date.fromisoformat(text[:10])
            except ValueError:
                day_ok = False
        found = _MONTH_PATTERN.match(text[:7] if dated else text)
        if text and (found is None or not day_ok or not 1 <= int(found.group(2)) <= 12):
            checker.err(i, "month", value, "a billing month is written YYYY-MM", "e.g. 2024-03 for March 2024")
            months.append(None)
        else:
            months.append(found.group(0) if found else None)
            if dated and found is not None and text[8:10] != "01":  # a day within the month: which month is meant?
                checker.warn(i, "month", value, f"a date, not a month: read as the billing month {found.group(0)}",
                             "write the month the bill covers (YYYY-MM); a bill is often dated after its month ends")
    b["month"] = pd.array(months, dtype="str")
    key = b["site_id"].astype(str) + "/" + b["month"].astype(str)
    seen: dict[str, int] = {}
    for i, (k, month) in enumerate(zip(key, months)):
        if month is None:
            continue
        if k in seen:
            checker.err(i, "month", month, f"a second bill for site {b['site_id'].iloc[i]} in {month} (first on row "
                        f"{seen[k]})", "give each site one bill per month")
        else:
            seen[k] = int(checker.rows[i])
    energy = pd.to_numeric(b["energy_kwh"], errors="coerce").to_numpy(dtype=float)
    for i in np.flatnonzero(energy == 0):
        checker.warn(i, "energy_kwh", 0, "a bill of 0 kWh: compared as it stands",
                     "leave the row out where the month's reading is missing")


def _check_tariffs(raw: io.RawCase, settings: CaseSettings, problems: list[Problem]) -> dict:
    """Parse and check every tariff of the case; a tariff's currency must be the case's."""
    from models.tariff import tariff_from_dict

    parsed = {}
    # a case zone that is not one (an error of its own) is not set against the tariffs' zones: its stand-in is not
    # the user's
    declared_zone = str(_settings_table(raw)[0].get("time_zone", "")).strip() if _declared(raw, "time_zone") else ""
    zone_stands = not declared_zone or declared_zone == settings.time_zone
    for name, data in raw.tariffs.items():
        source = f"tariffs/{name}" if raw.kind == "folder" else f"{raw.path.name}:tariff {name}"
        tariff, tariff_problems = tariff_from_dict(data, source=source)
        problems.extend(tariff_problems)
        if tariff is None:
            continue
        if tariff.currency != settings.currency and _valid_currency(settings.currency):
            if _declared(raw, "currency"):
                rule, hint = (f"the tariff's currency differs from the case currency {settings.currency}",
                              "one case prices everything in one currency")
            else:
                rule, hint = (f"the tariff's currency differs from the case's: {raw.settings_source} declares no "
                              f"currency, so {settings.currency} is assumed",
                              f"declare the case currency in {raw.settings_source}: "
                              + _setting_line(raw, "currency", tariff.currency))
            problems.append(error(source, None, "tariff.currency", tariff.currency, rule, hint))
        if tariff.time_zone and tariff.time_zone != settings.time_zone and zone_stands:
            if _declared(raw, "time_zone"):
                rule, hint = (f"the tariff's time zone differs from the case time zone {settings.time_zone}",
                              "periods and billing months are read on the site's clock: use the case zone")
            else:  # docs/case-format.md, case.toml: time_zone defaults to UTC, with a warning
                rule, hint = (f"the tariff's time zone differs from the case's: {raw.settings_source} declares no "
                              f"time zone, so {settings.time_zone} is assumed",
                              f"declare the sites' zone in {raw.settings_source}: "
                              + _setting_line(raw, "time_zone", tariff.time_zone)
                              + " (periods and billing months are read on the site's clock)")
            problems.append(error(source, None, "tariff.time_zone", tariff.time_zone, rule, hint))
        parsed[name] = tariff
    return parsed


def _declared(raw: io.RawCase, key: str) -> bool:
    """Whether the case settings (``case.toml``'s [case] table or its keys above it, or a workbook's case
    sheet) give ``key``."""
    return key in _settings_table(raw)[0]


def _setting_line(raw: io.RawCase, key: str, value: str) -> str:
    """How to write one setting where the case keeps its settings, for a hint."""
    if raw.kind == "workbook":
        return f"a row '{key}' with the value '{value}'"
    return f"{key} = \"{value}\" under the [case] line"


def _valid_currency(code: str) -> bool:
    """True for a well-formed ISO 4217 code (an invalid one is reported once, in case.toml)."""
    return bool(re.fullmatch(r"[A-Z]{3}", code))


def _check_finance(raw: io.RawCase, settings: CaseSettings, problems: list[Problem], scenarios: list | None = None):
    """Read the finance assumptions (defaults where absent); the currency must be the case's. The named
    scenarios (``[[scenarios]]`` of scenarios.toml, a workbook's ``scenarios`` sheet) go into ``scenarios``."""
    from models.comparison import read_scenarios
    from models.finance import FinanceAssumptions

    data, source, read_problems = io.read_finance_settings(raw)
    problems.extend(read_problems)
    if has_errors(read_problems):
        return None
    flat = data if isinstance(data, dict) else {}
    tables, scenario_source, scenario_problems = io.read_scenario_tables(raw)
    problems.extend(scenario_problems)
    if not flat and raw.kind in ("folder", "workbook"):
        problems.append(warning(source, None, None, None,
                                "no finance assumptions were found: the program's defaults are used (discount rate, "
                                "horizon, escalation, grid emission factor; no capital budget)",
                                "write your own in finance.toml (or the workbook's finance sheet); docs/finance.md "
                                "lists the keys"))
    layout_error = False
    if "finance" in flat:
        nested = flat["finance"]
        others = {k: v for k, v in flat.items() if k != "finance"}
        if not isinstance(nested, dict):
            problems.append(error(source, None, "finance", nested, "'finance' must be a table of key = value",
                                  "write the keys at the top of the file, or under a [finance] line"))
        elif others:
            problems.append(error(source, None, "finance", None,
                                  f"keys at the top ({', '.join(sorted(others)[:5])}) and a [finance] table are both "
                                  "given", "write every key at the top of the file, or every key under [finance]"))
        # the keys written, at the top and under [finance]: with a layout error the case's assumptions cannot be
        # read, but their values and the scenarios are still checked below, so that every problem shows in one pass
        layout_error = not isinstance(nested, dict) or bool(others)
        flat = {**others, **(nested if isinstance(nested, dict) else {})}
    if "currency" not in flat and _valid_currency(settings.currency):
        flat = {**flat, "currency": settings.currency}
    assumptions, finance_problems = FinanceAssumptions.from_dict(flat, source=source)
    problems.extend(finance_problems)
    if layout_error:
        assumptions = None
    if tables is not None:
        # with the case's own assumptions in error the scenarios are still checked, against the case's keys less
        # those in error, so that every problem shows in one pass; none of them is kept (the case does not load)
        wrong = {p.column for p in finance_problems if p.severity == "error"}
        base = flat if assumptions is not None else {k: v for k, v in flat.items() if k not in wrong}
        named, scenario_problems = read_scenarios(tables, base, scenario_source)
        problems.extend(scenario_problems)
        if scenarios is not None and assumptions is not None:
            scenarios.extend(named)
    if assumptions is not None:
        from models.comparison import finance_checks

        problems.extend(finance_checks(assumptions, source))
    if assumptions is not None and assumptions.currency != settings.currency and _valid_currency(settings.currency):
        problems.append(error(source, None, "currency", assumptions.currency,
                              f"the finance currency differs from the case currency {settings.currency}",
                              "one case prices everything in one currency"))
    return assumptions


def _check_duty(checker: _TableChecker) -> None:
    d = checker.frame
    totals = d.groupby("profile_id")["duration_h_per_yr"].sum()
    for profile_id, total in totals.items():
        if total > MAX_HOURS_PER_YR + 1e-9:
            i = int(np.flatnonzero((d["profile_id"] == profile_id).to_numpy())[0])
            checker.err(i, "duration_h_per_yr", round(float(total), 2),
                        f"duty table '{profile_id}' adds up to more than {MAX_HOURS_PER_YR:g} hours a year",
                        "durations are hours a year of each load state; their sum is at most the year's hours")
    # loads that never pass 1 % of rating: fractions (0-1) entered for percentages, as profiles are refused
    if "shaft_load_pct" in d:
        peaks = d.groupby("profile_id")["shaft_load_pct"].max()
        for profile_id, peak in peaks.items():
            if np.isfinite(peak) and 0.0 < peak <= 1.0:
                i = int(np.flatnonzero((d["profile_id"] == profile_id).to_numpy())[0])
                checker.err(i, "shaft_load_pct", float(peak), f"duty table '{profile_id}' never exceeds {peak:g} % load",
                             "shaft_load_pct takes 0-100 % of rated power: were fractions (0-1) entered?")


# ---------------------------------------------------------------------------------------------------
# Entry point
# ---------------------------------------------------------------------------------------------------
def load_case(path: str | Path, mode: str = "warn", today: _dt.date | None = None) -> tuple[Case | None, list[Problem]]:
    """Read, type, check and complete a case.

    Parameters
    ----------
    path : str or pathlib.Path
        Case folder or ``.xlsx`` workbook.
    mode : {"warn", "strict"}
        ``warn`` returns the problems (the case is ``None`` when there are errors); ``strict`` raises
        :class:`~models.problems.CaseError` on any error.
    today : datetime.date, optional
        Date used for the "not in the future" checks and as the default ``purchase_date`` (default: today
        in the case's time zone, so that machines in other zones read a case alike).

    Returns
    -------
    case : Case or None
        The validated case, or ``None`` when errors were found.
    problems : list of Problem
        Every error and warning: errors first, then warnings, each by file and row
        (:func:`models.problems.ordered`).

    Raises
    ------
    CaseError
        In strict mode, when any error was found.
    ValueError
        When ``mode`` is not ``warn`` or ``strict``.

    Notes
    -----
    Bad input never raises in ``warn`` mode: every defect found while reading or checking becomes a
    :class:`~models.problems.Problem`. Should a defect slip past every check and make the checking
    code itself fail, that failure is also returned as an error problem (rule starting "internal
    error") rather than raised; the tests assert it never happens on their corpus.
    """
    if mode not in ("warn", "strict"):
        raise ValueError(f"mode must be 'warn' or 'strict', got {mode!r}")
    try:
        case, problems = _load(path, today)
    except Exception as exc:  # last line of defence: a bad file must never end in a traceback
        case, problems = None, [error(str(path), None, None, None,
                                      f"internal error while checking the case ({exc.__class__.__name__}: {exc})",
                                      "please report this with the case files; nothing was written to them")]
    return _finish(case, problems, mode)


def _check_rules_ahead(settings: CaseSettings, source: str, assets: pd.DataFrame, problems: list[Problem]) -> None:
    """Warn when a minimum-efficiency rule of the case's region takes effect within three years after the
    purchase date and raises the class some of its motors' replacements must have: options and the
    replacement at failure follow the rules in force on the purchase date. Changes nothing."""
    from models.regulations import rules_taking_effect

    if "rated_p_kw" not in assets or "poles" not in assets:
        return
    p_kw = pd.to_numeric(assets["rated_p_kw"], errors="coerce").to_numpy(dtype=float)
    poles = pd.to_numeric(assets["poles"], errors="coerce").to_numpy(dtype=float)
    for rule in rules_taking_effect(settings.region, p_kw, poles, settings.purchase_date):
        sizes = f"{rule['min_rated_p_kw']:.4g}-{rule['max_rated_p_kw']:.4g} kW"
        if power_label(settings.power_unit) == "hp":
            sizes = (f"{rating_in_unit(rule['min_rated_p_kw'], 'hp'):.0f}-{rating_in_unit(rule['max_rated_p_kw'], 'hp'):.0f}"
                     f" hp ({sizes})")
        problems.append(warning(
            source, None, "purchase_date", settings.purchase_date,
            f"a {settings.region} rule from {rule['effective_from']} asks {rule['min_class']} of new motors of {sizes}: "
            f"{counted(rule['n_motors'], 'motor')} of this case would need a better replacement if bought after it "
            f"({rule['source']})",
            f"options are priced with the rules of {settings.purchase_date}; set purchase_date under [case] "
            f"to the day the motors will be bought (e.g. purchase_date = {rule['effective_from']}) to apply it"))


def _check_region_against_frequency(settings: CaseSettings, source: str, assets: pd.DataFrame,
                                    problems: list[Problem]) -> None:
    """Warn when a case gives no region, so the EU's minimum-efficiency rules are taken, yet most of its
    motors run at 60 Hz (the supply of the Americas, parts of Asia), or declares the EU or the US while
    most of its motors run on the other's frequency: the rules decide which new motors can still be
    bought and the baseline of a replacement at failure. Changes nothing."""
    if "supply_f_hz" not in assets:
        return
    usual = usual_supply_hz(assets["supply_f_hz"])
    f_hz = pd.to_numeric(assets["supply_f_hz"], errors="coerce").to_numpy(dtype=float)
    n60, n50 = int(np.sum(f_hz == 60)), int(np.sum(f_hz == 50))
    if settings.region_declared:
        # a region written down (the blank templates write region = "EU") whose supply most motors do not run on
        region_hz = {"EU": 50, "US": 60}.get(settings.region)
        n_usual = n60 if usual == 60 else n50
        if region_hz is not None and usual != region_hz and 2 * n_usual > n60 + n50:
            problems.append(warning(
                source, None, "region", settings.region,
                f"region {settings.region} is declared, whose minimum-efficiency rules are for {region_hz} Hz motors, "
                f"but {n_usual} of {n60 + n50} motors with a supply frequency run at {usual} Hz: the {settings.region} "
                "rules decide which new motors are offered",
                f"check the region under [case] (one of {', '.join(REGIONS)}); the blank case templates write "
                'region = "EU"'))
        return
    if usual != 60:
        return
    problems.append(warning(
        source, None, "region", None,
        f"no region declared, so the EU's minimum-efficiency rules for new motors are assumed, but {n60} of "
        f"{n60 + n50} motors with a supply frequency run at 60 Hz",
        'declare the region whose rules apply under [case], e.g. region = "US" (one of '
        f"{', '.join(REGIONS)})"))


def _check_price_currency(options: pd.DataFrame | None, source: str, currency: str, problems: list[Problem]) -> None:
    """Warn when options priced at the shipped illustrative prices (in EUR) count in another currency.

    The shipped catalogue's prices (``illustrative`` true) are common-practice ranges in
    :data:`models.options.ILLUSTRATIVE_PRICES_CURRENCY`; a case in another currency would take them as its
    own amounts, unconverted. The check names the options and says what to do; it changes nothing.
    """
    if options is None or options.empty or "illustrative" not in options:
        return
    priced = options["illustrative"].fillna(False).astype(bool) & (options["technology"].astype(str) != "existing")
    if currency == options_module.ILLUSTRATIVE_PRICES_CURRENCY or not priced.any():
        return
    ids = [str(x) for x in options.loc[priced, "option_id"]]
    shown = ", ".join(ids[:6]) + (f" and {len(ids) - 6} more" if len(ids) > 6 else "")
    problems.append(warning(
        source, None, "illustrative", None,
        f"{counted(len(ids), 'option')} ({shown}) carry the shipped illustrative prices, which are in "
        f"{options_module.ILLUSTRATIVE_PRICES_CURRENCY} ({options_module.ILLUSTRATIVE_PRICES_YEAR}); this case counts "
        f"in {currency} and takes them as {currency} amounts, unconverted",
        f"put your own quotes in {currency} in the case's options table (and set illustrative to false), "
        f"or convert the shipped prices to {currency}"))


def _today_in(time_zone: str) -> _dt.date:
    """Today's date in a time zone (the machine's own date where the zone is not known): the same for every
    machine running a case at the same moment, whatever the machine's own zone."""
    try:
        return _dt.datetime.now(zoneinfo.ZoneInfo(time_zone)).date()
    except (zoneinfo.ZoneInfoNotFoundError, ValueError):
        return _dt.date.today()


def _load(path: str | Path, today: _dt.date | None) -> tuple[Case | None, list[Problem]]:
    """Read and check a case; return it (None when any error was found) and every problem. ``today`` None:
    the date in the case's time zone."""
    raw = io.read_case_files(path)
    problems = list(raw.problems)
    if raw.kind == "missing" or (not raw.tables and has_errors(problems)):
        return None, problems  # nothing readable: settings warnings would only add noise
    settings = _settings(raw, problems)
    today = today or _today_in(settings.time_zone)
    this_year = today.year
    if not settings.purchase_date:
        settings = replace(settings, purchase_date=today.isoformat())
    own_options = raw.tables.get("options")
    if own_options is not None and own_options.readable and own_options.frame.empty:
        problems.append(warning(own_options.source, None, None, None,
                                "the options table has no rows; the default catalogue (illustrative prices) is used",
                                "add one row per option to compare your own"))
        del raw.tables["options"]
    if "options" not in raw.tables:
        raw.tables["options"], option_problems = io.read_default_options()
        problems += option_problems
    checkers = {name: _TableChecker(table) for name, table in raw.tables.items()
                if name != "profiles" and table.readable}
    frames = {}
    for name, checker in checkers.items():
        if name != "options":  # check_options runs its own checker
            frames[name] = checker.run()
    seen_profiles: dict = {}
    profiles, profile_info = _check_profiles(raw.tables.get("profiles"), settings.time_zone, problems, seen_profiles)
    profile_table = raw.tables.get("profiles")
    if profile_table is not None and not profile_table.readable:
        rejected_profiles = None
    elif profile_table is not None and "profile_id" in profile_table.frame.columns:
        ids = seen_profiles["ids"] if "ids" in seen_profiles else _profile_ids(profile_table.frame["profile_id"])[1]
        rejected_profiles = set(ids.astype(str)) - set(profiles)
    else:
        rejected_profiles = set()
    site_ids = set(frames.get("sites", pd.DataFrame({"site_id": []}))["site_id"].dropna())
    if "sites" in raw.tables and not raw.tables["sites"].readable:
        site_ids = None
    duty_ids = set(frames.get("duty", pd.DataFrame({"profile_id": []}))["profile_id"].dropna())
    if "duty" in checkers:
        _check_duty(checkers["duty"])
        overlap = duty_ids & set(profiles)
        for pid in sorted(overlap):
            problems.append(error(checkers["duty"].raw.source, None, "profile_id", pid,
                                  "the same profile_id is used in profiles and in duty", "rename one of them"))
    tariffs = _check_tariffs(raw, settings, problems)
    named_scenarios: list = []
    finance_assumptions = _check_finance(raw, settings, problems, named_scenarios)
    if "sites" in checkers:
        _check_sites(checkers["sites"], raw.tariffs, profiles, tariffs_expected=True,
                     unreadable=raw.unreadable_tariffs, rejected_profiles=rejected_profiles)
    if "capacitors" in checkers:
        _check_capacitors(checkers["capacitors"], site_ids)
    if "bill_history" in checkers:
        _check_bill_history(checkers["bill_history"], site_ids)
    options_frame = None
    if "options" in checkers:
        options_frame = options_module.check_options(checkers["options"])
        _check_price_currency(options_frame, checkers["options"].raw.source, settings.currency, problems)
    if "verification" in checkers:
        asset_ids = (set(frames["assets"]["asset_id"].dropna().astype(str)) if "assets" in frames
                     and raw.tables["assets"].readable else None)
        option_techs = (dict(zip(options_frame["option_id"].astype(str), options_frame["technology"]))
                        if options_frame is not None else None)
        _check_verification(checkers["verification"], asset_ids, option_techs)
    def unread(table: str) -> bool:  # (a file whose reading failed has said why: "no rows" would only repeat it)
        source = checkers[table].raw.source
        return any(p.severity == "error" and p.file == source for p in raw.problems)

    if "sites" in checkers and frames["sites"].empty and not unread("sites"):
        problems.append(error(checkers["sites"].raw.source, None, None, None, "the sites table has no rows",
                              "add one row per site (utility meter)"))
    if "assets" in checkers:
        _check_assets(checkers["assets"], site_ids, set(profiles), duty_ids, profiles, this_year, rejected_profiles,
                      duty_readable="duty" not in raw.tables or raw.tables["duty"].readable)
        if frames["assets"].empty and not unread("assets"):
            problems.append(error(checkers["assets"].raw.source, None, None, None, "the asset register has no rows",
                                  "add one row per motor"))
    if "sites" in checkers and "assets" in checkers:
        s_frame, with_motors = checkers["sites"].frame, set(checkers["assets"].frame["site_id"].dropna().astype(str))
        for i in np.flatnonzero(~s_frame["site_id"].astype(str).isin(with_motors).to_numpy() & s_frame["site_id"].notna().to_numpy()):
            checkers["sites"].warn(i, "site_id", s_frame["site_id"].iloc[i],
                                   "no motor of the asset register is at this site: nothing is compared there",
                                   "check the asset register's site_id column, or leave the site out")
        _check_demand_windows(checkers["sites"], checkers["assets"].frame, tariffs, profile_info)
        _check_peak_windows(checkers["sites"], checkers["assets"].frame, tariffs, profile_info)
        _check_holidays_in_year(tariffs, profiles, settings, checkers["assets"].frame, checkers["sites"].frame,
                                raw, problems)
        _check_period_grid(tariffs, profiles, settings, checkers["assets"].frame, checkers["sites"].frame, raw, problems)
        _check_peak_times_in_year(tariffs, profiles, settings, checkers["assets"].frame, checkers["sites"].frame,
                                  raw, problems)
        _check_in_service_month_read(tariffs, settings, checkers["sites"].frame, raw, problems)
        _check_contracts_against_sites(checkers["sites"], checkers["assets"].frame, tariffs, profiles)
    if "assets" in checkers:
        _check_region_against_frequency(settings, raw.settings_source, checkers["assets"].frame, problems)
        _check_rules_ahead(settings, raw.settings_source, checkers["assets"].frame, problems)
    for checker in checkers.values():
        problems.extend(checker.problems)
    problems = ordered(_with_toml_lines(raw, problems))
    if has_errors(problems) or "assets" not in frames or "sites" not in frames or options_frame is None:
        return None, problems
    assets, defaults = _fill_defaults(frames["assets"], duty_ids)
    undefaulted = np.flatnonzero(np.isnan(assets["rated_efficiency_pct"].to_numpy(dtype=float)))
    if len(undefaulted):  # no model can run such a motor: said here, by row, rather than when a run starts
        checker = checkers["assets"]
        before = len(checker.problems)
        for i in undefaulted:
            checker.err(i, "rated_efficiency_pct", None,
                        "no rated efficiency given, and none can be taken from the efficiency classes for this "
                        "motor's rating, poles and supply frequency",
                        "give the nameplate efficiency in percent")
        return None, ordered(problems + checker.problems[before:])
    uncalibrated = _check_calibration(checkers["assets"], assets, defaults)
    if uncalibrated:
        return None, ordered(problems + uncalibrated)
    empty_caps = _TableChecker(io.RawTable("capacitors", "capacitors.csv", pd.DataFrame(), np.array([], dtype=int))).run()
    empty_duty = _TableChecker(io.RawTable("duty", "duty.csv", pd.DataFrame(), np.array([], dtype=int))).run()
    empty_bills = _TableChecker(io.RawTable("bill_history", "bill_history.csv", pd.DataFrame(),
                                            np.array([], dtype=int))).run()
    empty_verification = _TableChecker(io.RawTable("verification", "verification.csv", pd.DataFrame(),
                                                   np.array([], dtype=int))).run()
    case = Case(
        path=Path(path),
        settings=settings,
        assets=assets,
        sites=frames["sites"],
        capacitors=frames.get("capacitors", empty_caps),
        duty=frames.get("duty", empty_duty),
        bill_history=frames.get("bill_history", empty_bills),
        verification=frames.get("verification", empty_verification),
        options=options_frame,
        profiles=profiles,
        profile_info=profile_info,
        defaults=defaults,
        tariffs=tariffs,
        finance=finance_assumptions,
        scenarios=tuple(named_scenarios),
        extra=dict(raw.extra),
        problems=tuple(problems),
    )
    return case, problems


#: The table a settings file's keys may sit in, tried after the key path as given (case.toml writes its
#: settings under [case]; finance.toml may write its under [finance]).
_TOML_TABLE_OF_FILE = {"case.toml": "case", "finance.toml": "finance"}


def _with_toml_lines(raw: io.RawCase, problems: list[Problem]) -> list[Problem]:
    """Problems on a key of a case folder's TOML file (case.toml, finance.toml, tariffs/*.toml), or of a
    workbook's tariff sheet, with the line where the file writes the key (or, for a key left out, its entry or
    table): the row of the message (in a sheet, a line is a row)."""
    from models.tariff import key_line

    if raw.kind not in ("folder", "workbook"):
        return problems
    # a workbook's tariff sheets: their texts as read, with each line's row (models.io.SHEET_TEXTS_KEY)
    sheets: dict = dict(raw.extra.get(io.SHEET_TEXTS_KEY, {})) if raw.kind == "workbook" else {}
    texts: dict[str, str | None] = {}
    out = []
    for p in problems:
        if p.file in sheets:  # a line of the sheet's text (as written or found by its key) to its sheet row
            named, text, rows_of_line = sheets[p.file]
            line = p.row if p.row is not None else (key_line(text, p.column) if p.column else None)
            row = rows_of_line[line - 1] if line is not None and 1 <= line <= len(rows_of_line) else None
            out.append(replace(p, file=named, row=row))
            continue
        if p.row is None and p.column and p.file.lower().endswith(".toml"):
            if p.file not in texts:
                try:
                    texts[p.file] = ((Path(raw.path) / p.file).read_text(encoding="utf-8-sig") if raw.kind == "folder"
                                     else None)
                except (OSError, UnicodeDecodeError):
                    texts[p.file] = None
            text = texts[p.file]
            if text is not None:
                table = _TOML_TABLE_OF_FILE.get(p.file)
                line = key_line(text, p.column)
                if line is None and table and not p.column.startswith(table + "."):
                    line = key_line(text, f"{table}.{p.column}")
                if line is not None:
                    p = replace(p, row=line)
        out.append(p)
    return out


#: The start of the rule of a table row with more cells than its header (models.io): its cells are shifted.
_SHIFTED_ROW_RULE = "cells but the header has"


def _without_shifted_cells(problems: list[Problem]) -> list[Problem]:
    """Problems with the checks of a row whose cells are shifted (a stray delimiter: more cells than the
    header) folded into that row's own error: each shifted cell would fail its column's check and bury the
    one problem to fix under a dozen that follow from it."""
    shifted = {(p.file, p.row) for p in problems if p.severity == "error" and _SHIFTED_ROW_RULE in p.rule}
    if not shifted:
        return problems
    hidden: dict[tuple, int] = {}
    kept = []
    for p in problems:
        if (p.file, p.row) in shifted and _SHIFTED_ROW_RULE not in p.rule:
            hidden[(p.file, p.row)] = hidden.get((p.file, p.row), 0) + 1
            continue
        kept.append(p)
    return [replace(p, hint=f"{p.hint}; the row's other {counted(hidden[(p.file, p.row)], 'problem')} follow from its "
                              "shifted cells and are not listed")
            if _SHIFTED_ROW_RULE in p.rule and hidden.get((p.file, p.row)) else p for p in kept]


def _finish(case: Case | None, problems: list[Problem], mode: str) -> tuple[Case | None, list[Problem]]:
    # every path: a problem repeated row after row listed for its first rows and counted, errors first, then
    # file and row
    problems = ordered(folded(_without_shifted_cells(problems)))
    if case is not None and case.problems != tuple(problems):
        case = replace(case, problems=tuple(problems))
    if mode == "strict" and has_errors(problems):
        raise CaseError(problems)
    return case, problems


def default_value(value):
    """A defaulted input as shown to a reader: a number to 6 significant digits (a float), else its text ("" for
    none); the defaults table keeps values as the filling rule gave them (numbers, or numbers as text)."""
    if value is None or isinstance(value, (bool, np.bool_)):
        return "" if value is None else str(value)
    try:
        number = float(value)
    except (TypeError, ValueError):
        return str(value)
    return float(f"{number:.6g}") if np.isfinite(number) else str(value)


def fleet_summary(case: Case) -> dict[str, pd.DataFrame]:
    """Summarise a case for a first look: installed kW by site and application, and what was defaulted.

    Returns
    -------
    dict of str -> pandas.DataFrame
        ``by_site`` (site_id, assets, installed_kw), ``by_application`` (application, assets, installed_kw),
        ``defaulted`` (column, assets, basis: one row per column and basis) and ``quality`` (site_id, mean data_quality_pct).
    """
    a = case.assets
    by_site = (a.groupby("site_id", sort=True)
                .agg(assets=("asset_id", "size"), installed_kw=("rated_p_kw", "sum")).reset_index())
    by_application = (a.groupby("application", sort=True)
                       .agg(assets=("asset_id", "size"), installed_kw=("rated_p_kw", "sum")).reset_index())
    if case.defaults.empty:
        defaulted = pd.DataFrame(columns=["column", "assets", "basis"])
    else:
        defaulted = (case.defaults.groupby(["column", "basis"], sort=True)
                     .agg(assets=("asset_id", "nunique")).reset_index()[["column", "assets", "basis"]])
    quality = a.groupby("site_id", sort=True)["data_quality_pct"].mean().round(1).reset_index()
    return {"by_site": by_site, "by_application": by_application, "defaulted": defaulted, "quality": quality}
