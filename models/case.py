"""Validating a case and filling its gaps: from the files as read to a typed, checked :class:`Case`.

Every problem is collected (not just the first) and names the file or sheet, the row as the user sees it,
the column, the value and the rule, with a hint. Errors stop a run; warnings do not. Missing nameplate
data is filled from class and size defaults, and every defaulted field is logged, so each asset gets a
data-quality score. Input files are never written to.
"""

from __future__ import annotations

import datetime as _dt
import re
import zoneinfo
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from models import defaults as nameplate_defaults
from models import io
from models import options as options_module
from models.problems import CaseError, Problem, error, has_errors, warning

HP_TO_KW = 0.745699872  # 1 hp (imperial, 550 ft·lbf/s) in kW, NIST SP 811 (2008) Appendix B.9
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
                      "inverter": "drive", "variable speed drive": "drive"},
    "machine_type": {"im": "induction", "asynchronous": "induction", "wfsm": "wound_field_synchronous",
                     "synchronous": "wound_field_synchronous", "pm": "pm_synchronous"},
    "efficiency_class": {"": "unknown", "none": "unknown", "n/a": "unknown", "na": "unknown", "?": "unknown"},
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


def _blank(value: object) -> bool:
    """True for an empty cell (None, NaN, NaT or blank text)."""
    if value is None or value is pd.NaT:
        return True
    if isinstance(value, float) and np.isnan(value):
        return True
    return isinstance(value, str) and not value.strip()


def _to_number(value: object) -> tuple[float, str | None]:
    """Parse one cell as a number; return (value, note) where note explains a repair or failure."""
    if _blank(value):
        return np.nan, None
    if isinstance(value, bool):
        return np.nan, "not a number"
    if isinstance(value, (int, float, np.integer, np.floating)):
        return float(value), None
    text = str(value).strip().replace("\u00a0", "").replace(" ", "")
    if text.endswith("%"):
        text = text[:-1]
    try:
        return float(text), None
    except ValueError:
        pass
    if _THOUSANDS.match(text):
        return np.nan, "ambiguous: a comma as thousands separator or decimal mark"
    if _DECIMAL_COMMA.match(text):
        return float(text.replace(",", ".")), "decimal comma read as a decimal point"
    return np.nan, "not a number"


def _normalise_category(value: object) -> str:
    text = str(value).strip().lower()
    return re.sub(r"[\s\-/]+", "_", text) if text not in ("n/a",) else text


class _TableChecker:
    """Types one raw table against its schema and collects problems."""

    def __init__(self, raw: io.RawTable):
        self.raw = raw
        self.schema = io.read_schema(raw.name).set_index("name")
        self.problems: list[Problem] = []
        self.frame = pd.DataFrame(index=pd.RangeIndex(len(raw.frame)))
        self.rows = np.asarray(raw.rows, dtype=int)

    def header(self, column: str) -> str:
        return self.raw.headers.get(column, column)

    def err(self, i: int | None, column: str | None, value: object, rule: str, hint: str = "") -> None:
        row = None if i is None else int(self.rows[i])
        self.problems.append(error(self.raw.source, row, None if column is None else self.header(column), value, rule, hint))

    def warn(self, i: int | None, column: str | None, value: object, rule: str, hint: str = "") -> None:
        row = None if i is None else int(self.rows[i])
        self.problems.append(warning(self.raw.source, row, None if column is None else self.header(column), value, rule, hint))

    def run(self) -> pd.DataFrame:
        source = self.raw.frame
        known = set(self.schema.index)
        for column in source.columns:
            if column not in known:
                self.warn(None, column, None, f"unknown column '{column}' was ignored",
                          f"known columns: {', '.join(self.schema.index)}")
        for name, spec in self.schema.iterrows():
            if name in source.columns:
                self.frame[name] = self._typed(name, spec, source[name].tolist())
            else:
                self.frame[name] = self._empty(spec["dtype"])
            if spec["required"] == "yes":
                if name not in source.columns:
                    self.err(None, name, None, f"required column '{name}' is missing",
                             f"add a column headed '{name}'")
                else:
                    missing = self.frame[name].isna().to_numpy()
                    for i in np.flatnonzero(missing):
                        if _blank(source[name].iloc[i]):
                            self.err(i, name, None, f"'{name}' is required", "fill in this cell")
        return self.frame

    @staticmethod
    def _empty(dtype: str) -> pd.Series:
        return pd.Series(dtype="float64") if dtype in ("float", "int") else pd.Series(dtype=object)

    def _typed(self, name: str, spec: pd.Series, values: list[object]) -> pd.Series:
        dtype = spec["dtype"]
        if dtype in ("float", "int"):
            numbers = np.empty(len(values))
            for i, value in enumerate(values):
                number, note = _to_number(value)
                numbers[i] = number
                if note == "decimal comma read as a decimal point":
                    self.warn(i, name, value, note, "use a point as decimal mark to avoid this repair")
                elif note is not None:
                    self.err(i, name, value, f"'{name}' must be a number ({note})",
                             f"unit: {spec['unit']}" if spec["unit"] != "-" else "write a plain number")
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
                    self.err(i, name, value, f"'{name}' must be true or false")
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
                    self.err(i, name, value, f"'{name}' must be one of: {', '.join(allowed)}", "check the spelling")
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


def _range_hint(name: str, value: float) -> str:
    if name.endswith("_kw") and value > 1000:
        return "is this in W rather than kW? divide by 1000"
    if name.endswith("_pct") and 0 < value <= 1.25 and name != "rated_efficiency_pct":
        return "percent columns take 0-100; was a fraction entered?"
    if name.endswith("_pct") and value < 0:
        return "percent columns take 0-100"
    if name.startswith("rated_p") and value <= 0:
        return "rated power must be positive"
    return "check the value and its unit"


# ---------------------------------------------------------------------------------------------------
# Settings
# ---------------------------------------------------------------------------------------------------
def _settings(raw: io.RawCase, problems: list[Problem]) -> CaseSettings:
    data = raw.settings.get("case", {}) if isinstance(raw.settings, dict) else {}
    source = raw.settings_source
    default_name = raw.path.stem if raw.kind == "workbook" else raw.path.name
    known = {"name", "description", "currency", "power_unit", "time_zone", "invented", "region"}
    for key in data:
        if key not in known:
            problems.append(warning(source, None, key, data[key], f"unknown setting '{key}' was ignored",
                                    f"known settings: {', '.join(sorted(known))}"))
    for key in raw.settings:
        if key != "case" and isinstance(raw.settings, dict):
            problems.append(warning(source, None, key, None, f"unknown table [{key}] was ignored",
                                    "case.toml holds a [case] table only"))
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
    except (zoneinfo.ZoneInfoNotFoundError, ValueError):
        problems.append(error(source, None, "time_zone", zone, "time_zone must be an IANA time-zone name",
                              "for example Europe/Berlin, America/Chicago, Asia/Kolkata"))
        zone = "UTC"
    invented = data.get("invented", False)
    region = str(data.get("region", "EU")).strip().upper()
    if region not in REGIONS:
        problems.append(error(source, None, "region", region, f"region must be one of {', '.join(REGIONS)}",
                              "it selects the minimum-efficiency rules that apply to new motors"))
        region = "EU"
    return CaseSettings(
        region=region,
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
def _check_profiles(raw: io.RawTable | None, zone: str, problems: list[Problem]) -> tuple[dict[str, pd.Series], pd.DataFrame]:
    """Type and check long-format interval profiles; return series by id and a summary table."""
    info_columns = ["profile_id", "quantity", "resolution_min", "n_intervals", "start", "end", "coverage_days"]
    if raw is None or raw.frame.empty:
        return {}, pd.DataFrame(columns=info_columns)
    source = raw.source
    frame = raw.frame
    rows = np.asarray(raw.rows, dtype=int)
    for column in ("profile_id", "timestamp"):
        if column not in frame.columns:
            problems.append(error(source, None, column, None, f"required column '{column}' is missing",
                                  "profiles are long tables: profile_id, timestamp, shaft_load_pct or input_kw"))
            return {}, pd.DataFrame(columns=info_columns)
    value_columns = [c for c in ("shaft_load_pct", "input_kw") if c in frame.columns]
    if not value_columns:
        problems.append(error(source, None, None, None, "no value column: give shaft_load_pct or input_kw",
                              "add a column headed shaft_load_pct (% of rated) or input_kw (measured)"))
        return {}, pd.DataFrame(columns=info_columns)
    header = raw.headers.get
    ids = frame["profile_id"].astype(object).where(frame["profile_id"].notna(), None)
    ids = ids.map(lambda v: None if _blank(v) else (str(int(v)) if isinstance(v, float) and v.is_integer() else str(v).strip()))
    for i in np.flatnonzero(ids.isna().to_numpy()):
        problems.append(error(source, int(rows[i]), header("profile_id", "profile_id"), None, "'profile_id' is required"))
    values = {}
    for column in value_columns:
        series = frame[column]
        numeric = pd.to_numeric(series, errors="coerce")
        bad = numeric.isna() & series.notna()
        if bad.any():
            # second chance for decimal commas, cell by cell (rare path)
            for i in np.flatnonzero(bad.to_numpy()):
                number, note = _to_number(series.iloc[i])
                if note == "decimal comma read as a decimal point":
                    numeric.iloc[i] = number
                else:
                    problems.append(error(source, int(rows[i]), header(column, column), series.iloc[i],
                                          f"'{column}' must be a number"))
            if (numeric.notna() & bad).any():
                problems.append(warning(source, None, header(column, column), None,
                                        "decimal commas were read as decimal points", "use a point as decimal mark"))
        values[column] = numeric.to_numpy(dtype=float)
    # timestamps
    stamps = _parse_timestamps(frame["timestamp"], zone, source, rows, header("timestamp", "timestamp"), problems)
    profiles: dict[str, pd.Series] = {}
    info: list[dict] = []
    ids_arr = ids.to_numpy(dtype=object)
    for profile_id in pd.unique(ids_arr[pd.notna(ids_arr)]):
        idx = np.flatnonzero(ids_arr == profile_id)
        has = {c: np.isfinite(values[c][idx]) for c in value_columns}
        present = [c for c in value_columns if has[c].any()]
        if len(present) != 1:
            rule = ("profile has values in both shaft_load_pct and input_kw" if len(present) > 1
                    else "profile has no values")
            problems.append(error(source, int(rows[idx[0]]), "profile_id", profile_id, rule,
                                  "each profile gives one quantity: shaft_load_pct or input_kw"))
            continue
        quantity = present[0]
        v = values[quantity][idx]
        missing_value = np.flatnonzero(~np.isfinite(v))
        for j in missing_value[:20]:
            problems.append(error(source, int(rows[idx[j]]), header(quantity, quantity), None,
                                  f"profile '{profile_id}' has a blank value", "fill the gap or delete the row"))
        negative = np.flatnonzero(v < 0)
        for j in negative[:20]:
            problems.append(error(source, int(rows[idx[j]]), header(quantity, quantity), v[j], "values must not be negative"))
        if quantity == "shaft_load_pct":
            over = np.flatnonzero(v > MAX_LOAD_PCT)
            for j in over[:20]:
                problems.append(error(source, int(rows[idx[j]]), header(quantity, quantity), v[j],
                                      f"shaft load above {MAX_LOAD_PCT:.0f} % of rating",
                                      "check the unit (percent of rated power) or the rated power of the motor"))
            if len(over) > 20:
                problems.append(error(source, None, header(quantity, quantity), None,
                                      f"{len(over) - 20} more intervals of '{profile_id}' above {MAX_LOAD_PCT:.0f} %"))
        t = stamps[idx]
        ok = ~pd.isna(t)
        if not ok.any():
            continue
        t_ok = pd.DatetimeIndex(t[ok])
        v_ok = v[ok]
        order = np.argsort(t_ok.asi8, kind="stable")
        t_sorted = t_ok[order]
        rows_sorted = rows[idx][ok][order]
        dup = t_sorted.duplicated(keep="first")
        for j in np.flatnonzero(dup)[:20]:
            problems.append(error(source, int(rows_sorted[j]), header("timestamp", "timestamp"), str(t_sorted[j]),
                                  f"timestamp repeated in profile '{profile_id}'", "delete the duplicate row"))
        if dup.sum() > 20:
            problems.append(error(source, None, header("timestamp", "timestamp"), None,
                                  f"{int(dup.sum()) - 20} more repeated timestamps in '{profile_id}'"))
        t_unique = t_sorted[~dup]
        v_unique = v_ok[order][~dup]
        if len(t_unique) < 2:
            problems.append(error(source, int(rows[idx[0]]), "profile_id", profile_id, "a profile needs at least two intervals"))
            continue
        step = np.diff(t_unique.asi8) / 60e6  # microsecond or nanosecond resolution handled below
        unit_scale = {"ns": 1e9, "us": 1e6, "ms": 1e3, "s": 1.0}[t_unique.unit] if hasattr(t_unique, "unit") else 1e9
        step = np.diff(t_unique.asi8) / (60.0 * unit_scale)
        resolution = float(np.median(step))
        if not any(abs(resolution - r) < 1e-6 for r in ALLOWED_RESOLUTIONS_MIN):
            problems.append(error(source, int(rows[idx[0]]), header("timestamp", "timestamp"), f"{resolution:g} min",
                                  f"profile '{profile_id}' has an interval of {resolution:g} min; allowed are 15, 30 or 60 min",
                                  "resample the data to 15-min, 30-min or hourly means"))
            continue
        gaps = np.flatnonzero(step > resolution + 1e-6)
        if len(gaps):
            n_missing = int(np.sum(np.round(step[gaps] / resolution) - 1))
            first = t_unique[gaps[0]] + pd.Timedelta(minutes=resolution)
            problems.append(warning(source, int(rows_sorted[~dup][gaps[0] + 1]), header("timestamp", "timestamp"), str(first),
                                    f"profile '{profile_id}' misses {n_missing} interval(s), the first at {first}",
                                    "missing intervals are filled from the same weekday and time of day"))
        odd = np.flatnonzero((step < resolution - 1e-6))
        for j in odd[:5]:
            problems.append(error(source, int(rows_sorted[~dup][j + 1]), header("timestamp", "timestamp"), str(t_unique[j + 1]),
                                  f"irregular interval in profile '{profile_id}'", "keep one resolution per profile"))
        coverage_days = (t_unique[-1] - t_unique[0]).total_seconds() / 86400 + resolution / 1440
        if coverage_days < 364.5:
            problems.append(warning(source, None, "profile_id", profile_id,
                                    f"profile '{profile_id}' covers {coverage_days:.1f} days, less than a year",
                                    "it is extended to a year by repeating its typical week; log a full year where it matters"))
        series = pd.Series(v_unique, index=t_unique, name=quantity)
        profiles[str(profile_id)] = series
        info.append({"profile_id": str(profile_id), "quantity": quantity, "resolution_min": int(round(resolution)),
                     "n_intervals": len(series), "start": t_unique[0], "end": t_unique[-1],
                     "coverage_days": round(coverage_days, 3)})
    return profiles, pd.DataFrame(info, columns=info_columns)


def _parse_timestamps(column: pd.Series, zone: str, source: str, rows: np.ndarray, header: str,
                      problems: list[Problem]) -> np.ndarray:
    """Parse interval-start timestamps into the case zone; DST gaps and unreadable cells are errors."""
    if pd.api.types.is_datetime64_any_dtype(column.dtype):
        parsed = pd.DatetimeIndex(column)
        if parsed.tz is None:
            return _localise(parsed, zone, source, rows, header, problems)
        return parsed.tz_convert(zone).to_numpy(dtype=object)
    text = column.map(lambda v: None if v is None or (isinstance(v, float) and np.isnan(v)) else
                      (v.isoformat() if isinstance(v, (_dt.datetime, pd.Timestamp)) else str(v).strip()))
    has_offset = text.str.contains(r"(?:[+-]\d{2}:?\d{2}|Z)$", regex=True, na=False)
    out = np.full(len(column), pd.NaT, dtype=object)
    if has_offset.any():
        parsed = pd.to_datetime(text[has_offset], utc=True, errors="coerce", format="ISO8601")
        out[has_offset.to_numpy()] = parsed.dt.tz_convert(zone).to_numpy(dtype=object)
    naive = ~has_offset & text.notna()
    if naive.any():
        parsed = pd.to_datetime(text[naive], errors="coerce", format="ISO8601")
        bad_parse = parsed.isna().to_numpy()
        good_idx = np.flatnonzero(naive.to_numpy())
        for j in np.flatnonzero(bad_parse)[:20]:
            i = good_idx[j]
            problems.append(error(source, int(rows[i]), header, column.iloc[i], "timestamp not readable",
                                  "write ISO 8601, e.g. 2025-01-31 13:15 or 2025-01-31T13:15+01:00"))
        if bad_parse.sum() > 20:
            problems.append(error(source, None, header, None, f"{int(bad_parse.sum()) - 20} more unreadable timestamps"))
        localised = _localise(pd.DatetimeIndex(parsed), zone, source, rows[good_idx], header, problems)
        out[good_idx] = localised
    bad_offset = np.flatnonzero(has_offset.to_numpy() & pd.isna(out))
    for i in bad_offset[:20]:
        problems.append(error(source, int(rows[i]), header, column.iloc[i], "timestamp not readable"))
    for i in np.flatnonzero(text.isna().to_numpy())[:20]:
        problems.append(error(source, int(rows[i]), header, None, "timestamp is blank"))
    return out


def _localise(naive: pd.DatetimeIndex, zone: str, source: str, rows: np.ndarray, header: str,
              problems: list[Problem]) -> np.ndarray:
    """Attach the case zone to naive local times; times inside a daylight-saving gap are errors."""
    result = np.full(len(naive), pd.NaT, dtype=object)
    valid = ~naive.isna()
    if not valid.any():
        return result
    local = naive[valid]
    try:
        aware = local.tz_localize(zone, ambiguous="infer", nonexistent="NaT")
    except Exception:  # ambiguity cannot be inferred (e.g. the repeated autumn hour appears once)
        aware = local.tz_localize(zone, ambiguous="NaT", nonexistent="NaT")
        ambiguous = aware.isna() & ~local.tz_localize(zone, ambiguous=False, nonexistent="NaT").isna()
        positions = np.flatnonzero(valid)[np.flatnonzero(np.asarray(ambiguous))]
        for i in positions[:10]:
            problems.append(error(source, int(rows[i]), header, str(naive[i]),
                                  f"local time occurs twice when clocks go back in {zone}; its order cannot be inferred",
                                  "give timestamps with a UTC offset, or both repeated hours in order"))
    gap = np.asarray(aware.isna())
    positions = np.flatnonzero(valid)[np.flatnonzero(gap)]
    for i in positions[:20]:
        problems.append(error(source, int(rows[i]), header, str(naive[i]),
                              f"local time does not exist in {zone} (clocks go forward)",
                              "daylight-saving gap: give timestamps with a UTC offset or drop this row"))
    result[np.flatnonzero(valid)] = aware.to_numpy(dtype=object)
    return result


# ---------------------------------------------------------------------------------------------------
# Cross-checks and defaults
# ---------------------------------------------------------------------------------------------------
def _duplicates(checker: _TableChecker, column: str, what: str) -> None:
    ids = checker.frame[column]
    dup = ids.duplicated(keep=False) & ids.notna()
    first: dict[object, int] = {}
    for i in np.flatnonzero(dup.to_numpy()):
        key = ids.iloc[i]
        if key in first:
            checker.err(i, column, key, f"duplicate {what} (first seen on row {first[key]})", f"each {what} must be unique")
        else:
            first[key] = int(checker.rows[i])


def _check_assets(checker: _TableChecker, site_ids: set[str], profile_ids: set[str], duty_ids: set[str],
                  profiles: dict[str, pd.Series], this_year: int) -> None:
    a = checker.frame
    _duplicates(checker, "asset_id", "asset_id")
    for i in np.flatnonzero(a["site_id"].notna().to_numpy() & ~a["site_id"].isin(site_ids).to_numpy()):
        checker.err(i, "site_id", a["site_id"].iloc[i], "unknown site_id (not in sites)", "add the site or correct the id")
    kw, hp = a["rated_p_kw"].to_numpy(), a["rated_p_hp"].to_numpy()
    both_missing = np.isnan(kw) & np.isnan(hp)
    raw_kw = checker.raw.frame["rated_p_kw"] if "rated_p_kw" in checker.raw.frame else pd.Series([None] * len(a))
    raw_hp = checker.raw.frame["rated_p_hp"] if "rated_p_hp" in checker.raw.frame else pd.Series([None] * len(a))
    for i in np.flatnonzero(both_missing):
        if _blank(raw_kw.iloc[i]) and _blank(raw_hp.iloc[i]):
            checker.err(i, "rated_p_kw", None, "rated power is required (rated_p_kw or rated_p_hp)")
    conflict = ~np.isnan(kw) & ~np.isnan(hp) & (np.abs(kw - hp * HP_TO_KW) > 0.06 * np.maximum(kw, 1e-9))
    for i in np.flatnonzero(conflict):
        checker.err(i, "rated_p_hp", hp[i], f"rated_p_kw ({kw[i]:g}) and rated_p_hp ({hp[i]:g}) disagree by more than 6 %",
                    "give one of the two")
    rated_kw = np.where(np.isnan(kw), hp * HP_TO_KW, kw)
    a["rated_p_kw"] = rated_kw
    poles = a["poles"].to_numpy()
    for i in np.flatnonzero(~np.isnan(poles) & (poles % 2 != 0)):
        checker.err(i, "poles", poles[i], "poles must be an even number", "a 4-pole motor has 2 pole pairs: write 4")
    f = a["supply_f_hz"].to_numpy()
    sync = 120.0 * f / np.where(poles > 0, poles, np.nan)
    a["sync_speed_rpm"] = sync
    speed = a["rated_speed_rpm"].to_numpy()
    machine = a["machine_type"].fillna("induction").to_numpy(dtype=object)
    induction = machine == "induction"
    slip = (sync - speed) / sync
    has = ~np.isnan(speed) & ~np.isnan(sync)
    for i in np.flatnonzero(has & induction & (speed >= sync)):
        checker.err(i, "rated_speed_rpm", speed[i],
                    f"an induction motor runs below synchronous speed 120·f/p = {sync[i]:g} rpm",
                    "check poles, frequency and speed; a synchronous machine needs machine_type set")
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
    known_profiles = profile_ids | duty_ids
    for i in np.flatnonzero(has_profile & ~prof.isin(known_profiles).to_numpy()):
        checker.err(i, "profile_id", prof.iloc[i], "unknown profile reference (not in profiles or duty)",
                    "add the profile or correct the reference")
    for i in np.flatnonzero(~has_profile & ~has_hours):
        missing = "operating_h_per_yr" if np.isnan(hours[i]) else "mean_load_pct"
        checker.err(i, missing, None, "give a profile_id, or both operating_h_per_yr and mean_load_pct")
    for i in np.flatnonzero(has_profile & has_hours):
        checker.warn(i, "profile_id", prof.iloc[i], "both a profile and hours + mean load are given; the profile is used")
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
    record("rewind_count", a["rewind_count"].isna().to_numpy(), 0.0, "assumed never rewound")
    record("efficiency_class", a["efficiency_class"].isna().to_numpy(), "unknown", "no class given")
    record("start_duty", a["start_duty"].isna().to_numpy(),
           np.vectorize(nameplate_defaults.START_DUTY_BY_APPLICATION.get, otypes=[object])(app),
           "application default (common practice)")
    record("static_head_frac", np.isnan(a["static_head_frac"].to_numpy()),
           np.vectorize(nameplate_defaults.STATIC_HEAD_FRAC_BY_APPLICATION.get, otypes=[float])(app),
           "application default (common practice)")
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


def _check_sites(checker: _TableChecker, tariffs: dict[str, dict], profiles: dict[str, pd.Series],
                 tariffs_expected: bool) -> None:
    s = checker.frame
    _duplicates(checker, "site_id", "site_id")
    for i in np.flatnonzero(s["tariff_file"].notna().to_numpy()):
        name = s["tariff_file"].iloc[i]
        if tariffs_expected and name not in tariffs:
            checker.err(i, "tariff_file", name, "tariff file not found in the case's tariffs",
                        "put the file in the tariffs/ folder (or a 'tariff <name>' sheet)")
    for i in np.flatnonzero(s["base_profile_id"].notna().to_numpy()):
        pid = s["base_profile_id"].iloc[i]
        series = profiles.get(str(pid))
        if series is None:
            checker.err(i, "base_profile_id", pid, "unknown profile reference (not in profiles)")
        elif series.name != "input_kw":
            checker.err(i, "base_profile_id", pid, "the base-load profile must be in input_kw")
    s["base_p_kw"] = s["base_p_kw"].fillna(0.0)
    s["base_power_factor"] = s["base_power_factor"].fillna(0.9)


def _check_capacitors(checker: _TableChecker, site_ids: set[str]) -> None:
    c = checker.frame
    _duplicates(checker, "bank_id", "bank_id")
    for i in np.flatnonzero(c["site_id"].notna().to_numpy() & ~c["site_id"].isin(site_ids).to_numpy()):
        checker.err(i, "site_id", c["site_id"].iloc[i], "unknown site_id (not in sites)")
    c["control"] = c["control"].fillna("fixed")
    rated = c["rated_q_kvar"].to_numpy()
    step = c["step_q_kvar"].to_numpy()
    for i in np.flatnonzero(~np.isnan(step) & ~np.isnan(rated) & (step > rated)):
        checker.err(i, "step_q_kvar", step[i], "a step cannot be larger than the bank", "step_q_kvar <= rated_q_kvar")
    c["step_q_kvar"] = np.where(np.isnan(step), rated / 6.0, step)
    c["target_power_factor"] = c["target_power_factor"].fillna(0.95)


def _check_tariffs(raw: io.RawCase, settings: CaseSettings, problems: list[Problem]) -> dict:
    """Parse and check every tariff of the case; a tariff's currency must be the case's."""
    from models.tariff import tariff_from_dict

    parsed = {}
    for name, data in raw.tariffs.items():
        source = f"tariffs/{name}" if raw.kind == "folder" else f"{raw.path.name}:tariff {name}"
        tariff, tariff_problems = tariff_from_dict(data, source=source)
        problems.extend(tariff_problems)
        if tariff is None:
            continue
        if tariff.currency != settings.currency:
            problems.append(error(source, None, "tariff.currency", tariff.currency,
                                  f"the tariff's currency differs from the case currency {settings.currency}",
                                  "one case prices everything in one currency"))
        if tariff.time_zone and tariff.time_zone != settings.time_zone:
            problems.append(error(source, None, "tariff.time_zone", tariff.time_zone,
                                  f"the tariff's time zone differs from the case time zone {settings.time_zone}",
                                  "periods and billing months are read on the site's clock: use the case zone"))
        parsed[name] = tariff
    return parsed


def _check_finance(raw: io.RawCase, settings: CaseSettings, problems: list[Problem]):
    """Read the finance assumptions (defaults where absent); the currency must be the case's."""
    from models.finance import FinanceAssumptions

    data, source, read_problems = io.read_finance_settings(raw)
    problems.extend(read_problems)
    flat = data.get("finance", data) if isinstance(data, dict) else {}
    if "currency" not in flat:
        flat = {**flat, "currency": settings.currency}
    assumptions, finance_problems = FinanceAssumptions.from_dict(flat, source=source)
    problems.extend(finance_problems)
    if assumptions is not None and assumptions.currency != settings.currency:
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
                        f"duty table '{profile_id}' adds up to more than {MAX_HOURS_PER_YR:g} hours a year")


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
        Date used for the "not in the future" checks (default: today).

    Returns
    -------
    case : Case or None
        The validated case, or ``None`` when errors were found.
    problems : list of Problem
        Every error and warning, in file order.

    Raises
    ------
    CaseError
        In strict mode, when any error was found.
    ValueError
        When ``mode`` is not ``warn`` or ``strict``.
    """
    if mode not in ("warn", "strict"):
        raise ValueError(f"mode must be 'warn' or 'strict', got {mode!r}")
    this_year = (today or _dt.date.today()).year
    raw = io.read_case_files(path)
    problems = list(raw.problems)
    if raw.kind == "missing":
        return _finish(None, problems, mode)
    settings = _settings(raw, problems)
    if "options" not in raw.tables:
        raw.tables["options"], option_problems = io.read_default_options()
        problems += option_problems
    checkers = {name: _TableChecker(table) for name, table in raw.tables.items() if name != "profiles"}
    frames = {}
    for name, checker in checkers.items():
        frames[name] = checker.run()
    profiles, profile_info = _check_profiles(raw.tables.get("profiles"), settings.time_zone, problems)
    site_ids = set(frames.get("sites", pd.DataFrame({"site_id": []}))["site_id"].dropna())
    duty_ids = set(frames.get("duty", pd.DataFrame({"profile_id": []}))["profile_id"].dropna())
    if "duty" in checkers:
        _check_duty(checkers["duty"])
        overlap = duty_ids & set(profiles)
        for pid in sorted(overlap):
            problems.append(error(checkers["duty"].raw.source, None, "profile_id", pid,
                                  "the same profile_id is used in profiles and in duty", "rename one of them"))
    tariffs = _check_tariffs(raw, settings, problems)
    finance_assumptions = _check_finance(raw, settings, problems)
    if "sites" in checkers:
        _check_sites(checkers["sites"], raw.tariffs, profiles, tariffs_expected=True)
    if "capacitors" in checkers:
        _check_capacitors(checkers["capacitors"], site_ids)
    options_frame = options_module.check_options(checkers["options"])
    if "assets" in checkers:
        _check_assets(checkers["assets"], site_ids, set(profiles), duty_ids, profiles, this_year)
        if frames["assets"].empty:
            problems.append(error(checkers["assets"].raw.source, None, None, None, "the asset register has no rows",
                                  "add one row per motor"))
    for checker in checkers.values():
        problems.extend(checker.problems)
    problems = _ordered(problems)
    if has_errors(problems) or "assets" not in frames or "sites" not in frames:
        return _finish(None, problems, mode)
    assets, defaults = _fill_defaults(frames["assets"], duty_ids)
    empty_caps = _TableChecker(io.RawTable("capacitors", "capacitors.csv", pd.DataFrame(), np.array([], dtype=int))).run()
    empty_duty = _TableChecker(io.RawTable("duty", "duty.csv", pd.DataFrame(), np.array([], dtype=int))).run()
    case = Case(
        path=Path(path),
        settings=settings,
        assets=assets,
        sites=frames["sites"],
        capacitors=frames.get("capacitors", empty_caps),
        duty=frames.get("duty", empty_duty),
        options=options_frame,
        profiles=profiles,
        profile_info=profile_info,
        defaults=defaults,
        tariffs=tariffs,
        finance=finance_assumptions,
        extra=dict(raw.extra),
        problems=tuple(problems),
    )
    return _finish(case, problems, mode)


def _ordered(problems: list[Problem]) -> list[Problem]:
    """Sort problems by file then row (file-level first), keeping the order of equal keys."""
    return sorted(problems, key=lambda p: (p.file, -1 if p.row is None else p.row))


def _finish(case: Case | None, problems: list[Problem], mode: str) -> tuple[Case | None, list[Problem]]:
    if mode == "strict" and has_errors(problems):
        raise CaseError(problems)
    return case, problems


def fleet_summary(case: Case) -> dict[str, pd.DataFrame]:
    """Summarise a case for a first look: installed kW by site and application, and what was defaulted.

    Returns
    -------
    dict of str -> pandas.DataFrame
        ``by_site`` (site_id, assets, installed_kw), ``by_application`` (application, assets, installed_kw),
        ``defaulted`` (column, assets, basis examples) and ``quality`` (site_id, mean data_quality_pct).
    """
    a = case.assets
    by_site = (a.groupby("site_id", sort=True)
                .agg(assets=("asset_id", "size"), installed_kw=("rated_p_kw", "sum")).reset_index())
    by_application = (a.groupby("application", sort=True)
                       .agg(assets=("asset_id", "size"), installed_kw=("rated_p_kw", "sum")).reset_index())
    if case.defaults.empty:
        defaulted = pd.DataFrame(columns=["column", "assets", "basis"])
    else:
        defaulted = (case.defaults.groupby("column", sort=True)
                     .agg(assets=("asset_id", "nunique"), basis=("basis", "first")).reset_index())
    quality = a.groupby("site_id", sort=True)["data_quality_pct"].mean().round(1).reset_index()
    return {"by_site": by_site, "by_application": by_application, "defaulted": defaulted, "quality": quality}
