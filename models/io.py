"""Reading (never writing) a case's files, and the reference and schema tables shipped with drivecase.

A case is a folder (CSV and TOML files, Parquet allowed for long profiles) or one ``.xlsx`` workbook with
one sheet per table. This module turns either into :class:`RawTable` records of text cells with our
column names, the row numbers the user sees and every problem met while reading. It never writes to,
renames or locks a user's file: files are read into memory in one pass and closed.
Typing, ranges and cross-checks happen in :mod:`models.case`.
"""

from __future__ import annotations

import csv
import io
import re
import tomllib
import unicodedata
from dataclasses import dataclass, field
from functools import lru_cache
from pathlib import Path

import pandas as pd

from models.problems import Problem, error, warning

PACKAGE_DIR = Path(__file__).resolve().parent
DATA_DIR = PACKAGE_DIR.parent / "data"
SCHEMA_DIR = DATA_DIR / "schema"
REFERENCE_DIR = DATA_DIR / "reference"
DEMO_DIR = DATA_DIR / "demo"

#: Tables of the case format, in the order they are read and documented.
CASE_TABLES: tuple[str, ...] = ("assets", "sites", "capacitors", "profiles", "duty", "options")
#: Where the default options catalogue lives (used when a case has no options table).
DEFAULT_OPTIONS_PATH = DATA_DIR / "defaults" / "options.csv"
#: Tables a case must have.
REQUIRED_TABLES: tuple[str, ...] = ("assets", "sites")
#: Largest file drivecase reads, to keep a stray file from exhausting memory [bytes].
MAX_FILE_BYTES = 512 * 1024 * 1024


@dataclass(frozen=True)
class RawTable:
    """One table as read: text cells under our column names, with the user's row numbers.

    Attributes
    ----------
    name : str
        Table name (``assets``, ``sites``...).
    source : str
        File or sheet as the user sees it (``assets.csv`` or ``case.xlsx:assets``).
    frame : pandas.DataFrame
        Cells as read (strings, numbers or timestamps; blank cells are missing), columns renamed to our
        names. Unknown columns are kept under their original header.
    rows : numpy.ndarray
        Row number of each frame row as the user sees it (header row = 1 for a plain file).
    headers : dict
        Our column name -> the header as written in the user's file.
    """

    name: str
    source: str
    frame: pd.DataFrame
    rows: object
    headers: dict[str, str] = field(default_factory=dict)


@dataclass
class RawCase:
    """Everything read from a case before validation."""

    path: Path
    kind: str  # "folder" or "workbook"
    settings: dict = field(default_factory=dict)
    settings_source: str = "case.toml"
    tables: dict[str, RawTable] = field(default_factory=dict)
    tariffs: dict[str, dict] = field(default_factory=dict)
    extra: dict[str, object] = field(default_factory=dict)
    problems: list[Problem] = field(default_factory=list)


# ---------------------------------------------------------------------------------------------------
# Shipped tables
# ---------------------------------------------------------------------------------------------------
@lru_cache(maxsize=None)
def read_schema(table: str) -> pd.DataFrame:
    """Return the schema of a case table from ``data/schema/<table>.csv``.

    Parameters
    ----------
    table : str
        One of :data:`CASE_TABLES`.

    Returns
    -------
    pandas.DataFrame
        One row per column: name, dtype, unit, default, required, allowed, min, max, aliases,
        description, source.
    """
    path = SCHEMA_DIR / f"{table}.csv"
    if not path.is_file():
        raise ValueError(f"no schema for table '{table}' (looked for {path})")
    return pd.read_csv(path, dtype=str, keep_default_na=False)


@lru_cache(maxsize=None)
def read_reference(name: str) -> pd.DataFrame:
    """Return a reference table from ``data/reference/<name>.csv`` (each row carries its source)."""
    path = REFERENCE_DIR / f"{name}.csv"
    if not path.is_file():
        raise ValueError(f"no reference table '{name}' (looked for {path})")
    return pd.read_csv(path)


# ---------------------------------------------------------------------------------------------------
# Header matching
# ---------------------------------------------------------------------------------------------------
def normalise_header(text: object) -> str:
    """Return a header reduced for matching: lower case, no accents, single spaces, ``_`` as space.

    Examples
    --------
    >>> normalise_header("  Rated_P (kW) ")
    'rated p (kw)'
    """
    s = unicodedata.normalize("NFKD", str(text)).encode("ascii", "ignore").decode("ascii")
    s = s.replace("\ufeff", "").replace("_", " ").strip().lower()
    return re.sub(r"\s+", " ", s)


@lru_cache(maxsize=None)
def header_map(table: str) -> dict[str, str]:
    """Return normalised header or alias -> our column name for a case table."""
    schema = read_schema(table)
    mapping: dict[str, str] = {}
    for name, aliases in zip(schema["name"], schema["aliases"]):
        mapping[normalise_header(name)] = name
        for alias in filter(None, (a.strip() for a in aliases.split(";"))):
            mapping.setdefault(normalise_header(alias), name)
    return mapping


def _rename(table: str, source: str, headers: list[object]) -> tuple[list[str], dict[str, str], list[Problem]]:
    """Map the user's headers to our names; report duplicates and blanks."""
    mapping = header_map(table)
    names: list[str] = []
    shown: dict[str, str] = {}
    problems: list[Problem] = []
    for position, header in enumerate(headers, start=1):
        text = "" if header is None else str(header).strip()
        if not text:
            text = f"(blank header {position})"
            names.append(text)
            continue
        ours = mapping.get(normalise_header(text), text)
        if ours in shown:
            problems.append(error(source, 1, text, text, f"column '{ours}' appears twice",
                                  f"keep one of '{shown[ours]}' and '{text}'"))
            ours = f"{text} (duplicate {position})"
        shown[ours] = text
        names.append(ours)
    return names, shown, problems


# ---------------------------------------------------------------------------------------------------
# Plain files
# ---------------------------------------------------------------------------------------------------
def read_bytes(path: Path) -> bytes:
    """Read a whole file in one pass (read-only) after checking its size."""
    size = path.stat().st_size
    if size > MAX_FILE_BYTES:
        raise ValueError(f"{path.name} is {size / 1e6:.0f} MB, above the {MAX_FILE_BYTES / 1e6:.0f} MB limit")
    with open(path, "rb") as handle:
        return handle.read()


def decode_text(data: bytes, source: str) -> tuple[str, list[Problem]]:
    """Decode file bytes as UTF-8 (with or without byte-order mark), falling back to Windows-1252."""
    try:
        return data.decode("utf-8-sig"), []
    except UnicodeDecodeError as exc:
        text = data.decode("cp1252", errors="replace")
        return text, [warning(source, None, None, None,
                              f"the file is not UTF-8 (byte {exc.start}); it was read as Windows-1252",
                              "save it as UTF-8 CSV to be sure accented text is read as intended")]


def _sniff_delimiter(lines: list[str]) -> str:
    """Pick the delimiter among comma, semicolon and tab that splits the header best."""
    header = next((ln for ln in lines if ln.strip() and not ln.lstrip().startswith("#")), "")
    counts = {d: header.count(d) for d in (",", ";", "\t")}
    return max(counts, key=lambda d: (counts[d], d == ","))


def parse_csv_text(text: str, table: str, source: str) -> tuple[RawTable, list[Problem]]:
    """Parse CSV text into a :class:`RawTable` keeping the user's line numbers.

    Lines starting with ``#`` before or between rows are comments; blank lines are skipped. The
    delimiter (comma, semicolon or tab) is detected from the header line.
    """
    problems: list[Problem] = []
    lines = text.splitlines()
    delimiter = _sniff_delimiter(lines)
    reader = csv.reader(io.StringIO(text), delimiter=delimiter)
    header: list[str] | None = None
    records: list[list[str]] = []
    rows: list[int] = []
    for record in reader:
        line_no = reader.line_num
        if not record or all(not c.strip() for c in record):
            continue
        if record[0].lstrip().startswith("#"):
            continue
        if header is None:
            header = record
            continue
        if len(record) > len(header):
            extra = [c for c in record[len(header):] if c.strip()]
            if extra:
                problems.append(error(source, line_no, None, delimiter.join(extra),
                                      f"the row has {len(record)} cells but the header has {len(header)}",
                                      "check for a stray delimiter or a missing header"))
            record = record[: len(header)]
        records.append(record + [""] * (len(header) - len(record)))
        rows.append(line_no)
    if header is None:
        problems.append(error(source, None, None, None, "the file is empty (no header row)",
                              "start from the template written by 'drivecase new'"))
        return RawTable(table, source, pd.DataFrame(), pd.Series(dtype=int).to_numpy()), problems
    names, shown, rename_problems = _rename(table, source, header)
    problems += rename_problems
    frame = pd.DataFrame(records, columns=names, dtype=object)
    frame = frame.map(lambda c: None if c is None or str(c).strip() == "" else str(c).strip())
    if delimiter != ",":
        problems.append(warning(source, None, None, repr(delimiter),
                                "the file uses a non-comma delimiter; it was detected and read",
                                "decimal commas in numbers are read as decimal points"))
    raw = RawTable(table, source, frame, pd.array(rows, dtype="int64").to_numpy(), shown)
    return raw, problems


def read_csv_table(path: Path, table: str) -> tuple[RawTable, list[Problem]]:
    """Read one CSV table of a case folder."""
    text, problems = decode_text(read_bytes(path), path.name)
    raw, more = parse_csv_text(text, table, path.name)
    return raw, problems + more


def read_parquet_table(path: Path, table: str) -> tuple[RawTable, list[Problem]]:
    """Read one Parquet table (long profiles) of a case folder."""
    try:
        frame = pd.read_parquet(path)
    except Exception as exc:  # pyarrow raises several unrelated types for a damaged file
        return (RawTable(table, path.name, pd.DataFrame(), pd.array([], dtype="int64").to_numpy()),
                [error(path.name, None, None, None, f"the file cannot be read as Parquet ({exc.__class__.__name__})",
                       "export it again, or save it as CSV")])
    names, shown, problems = _rename(table, path.name, list(frame.columns))
    frame.columns = names
    rows = pd.RangeIndex(2, len(frame) + 2).to_numpy()
    return RawTable(table, path.name, frame.reset_index(drop=True), rows, shown), problems


def read_toml_file(path: Path) -> tuple[dict, list[Problem]]:
    """Read a TOML file into a dict; a syntax error becomes a problem naming the line."""
    text, problems = decode_text(read_bytes(path), path.name)
    try:
        return tomllib.loads(text), problems
    except tomllib.TOMLDecodeError as exc:
        line = getattr(exc, "lineno", None)
        return {}, problems + [error(path.name, line, None, None, f"TOML syntax error: {exc.msg if hasattr(exc, 'msg') else exc}",
                                     "check quotes, brackets and '=' signs on that line")]


# ---------------------------------------------------------------------------------------------------
# Workbook
# ---------------------------------------------------------------------------------------------------
def _sheet_lookup(names: list[str]) -> dict[str, str]:
    return {normalise_header(n): n for n in names}


def read_workbook(path: Path) -> RawCase:
    """Read a case workbook: one sheet per table, plus an optional ``case`` sheet of settings."""
    from openpyxl import load_workbook  # imported here: only workbook cases need it

    case = RawCase(path=path, kind="workbook", settings_source=f"{path.name}:case")
    data = read_bytes(path)
    try:
        book = load_workbook(io.BytesIO(data), read_only=False, data_only=True)
    except Exception as exc:  # openpyxl raises zipfile, KeyError or its own errors for a damaged book
        case.problems.append(error(path.name, None, None, None,
                                   f"the workbook cannot be opened ({exc.__class__.__name__})",
                                   "save it again from a spreadsheet program as .xlsx"))
        return case
    sheets = _sheet_lookup(book.sheetnames)
    known = set(CASE_TABLES) | {"case", "finance", "instructions", "read me", "readme"}
    for key, name in sheets.items():
        if key not in known and not key.startswith("tariff"):
            case.problems.append(warning(f"{path.name}:{name}", None, None, None,
                                         "sheet not part of the case format; it was ignored",
                                         f"case sheets are: {', '.join(CASE_TABLES)}, case"))
    for table in CASE_TABLES:
        if table not in sheets:
            continue
        sheet = book[sheets[table]]
        source = f"{path.name}:{sheets[table]}"
        if sheet.merged_cells.ranges:
            case.problems.append(warning(source, None, None, ", ".join(str(r) for r in list(sheet.merged_cells.ranges)[:5]),
                                         "merged cells were found; only the top-left cell of each keeps its value",
                                         "unmerge the cells so each row carries its own value"))
        raw, problems = _sheet_table(sheet, table, source)
        case.tables[table] = raw
        case.problems += problems
    if "case" in sheets:
        case.settings = _settings_sheet(book[sheets["case"]])
    if "finance" in sheets:
        values = _settings_sheet(book[sheets["finance"]])["case"]
        for key, value in list(values.items()):
            if isinstance(value, str) and value.strip().startswith("["):
                try:
                    values[key] = tomllib.loads(f"v = {value}")["v"]
                except tomllib.TOMLDecodeError:
                    pass
        case.extra["finance"] = values
    for key, name in sheets.items():
        if key.startswith("tariff"):
            text = "\n".join(str(r[0]) for r in book[name].iter_rows(values_only=True) if r and r[0] is not None)
            file_name = name.split(" ", 1)[1].strip() if " " in name else f"{name}.toml"
            try:
                case.tariffs[file_name] = tomllib.loads(text)
            except tomllib.TOMLDecodeError as exc:
                case.problems.append(error(f"{path.name}:{name}", None, None, None, f"TOML syntax error: {exc}",
                                           "each row of column A holds one line of the tariff file"))
    book.close()
    return case


def _sheet_table(sheet, table: str, source: str) -> tuple[RawTable, list[Problem]]:
    """Turn one worksheet into a RawTable; comment rows (first cell starting with #) are skipped."""
    header: list[object] | None = None
    records: list[list[object]] = []
    rows: list[int] = []
    for row_no, values in enumerate(sheet.iter_rows(values_only=True), start=1):
        if values is None or all(v is None or (isinstance(v, str) and not v.strip()) for v in values):
            continue
        first = values[0]
        if isinstance(first, str) and first.lstrip().startswith("#"):
            continue
        if header is None:
            header = list(values)
            while header and (header[-1] is None or str(header[-1]).strip() == ""):
                header.pop()
            continue
        cells = list(values[: len(header)]) + [None] * max(0, len(header) - len(values))
        records.append([None if (isinstance(v, str) and not v.strip()) else (v.strip() if isinstance(v, str) else v) for v in cells])
        rows.append(row_no)
    if header is None:
        return (RawTable(table, source, pd.DataFrame(), pd.array([], dtype="int64").to_numpy()),
                [error(source, None, None, None, "the sheet is empty (no header row)",
                       "start from the workbook written by 'drivecase new --workbook'")])
    names, shown, problems = _rename(table, source, header)
    frame = pd.DataFrame(records, columns=names, dtype=object)
    return RawTable(table, source, frame, pd.array(rows, dtype="int64").to_numpy(), shown), problems


def _settings_sheet(sheet) -> dict:
    """Read a two-column key/value settings sheet into the ``[case]`` table of a settings dict."""
    values: dict[str, object] = {}
    for row in sheet.iter_rows(values_only=True):
        if not row or row[0] is None or str(row[0]).lstrip().startswith("#"):
            continue
        key = normalise_header(row[0]).replace(" ", "_")
        if key in ("key", "setting"):
            continue
        values[key] = row[1] if len(row) > 1 else None
    return {"case": values}


# ---------------------------------------------------------------------------------------------------
# Folder
# ---------------------------------------------------------------------------------------------------
def read_folder(path: Path) -> RawCase:
    """Read a case folder: ``case.toml``, one CSV per table (Parquet allowed for profiles), ``tariffs/``."""
    case = RawCase(path=path, kind="folder")
    settings_path = path / "case.toml"
    if settings_path.is_file():
        case.settings, problems = read_toml_file(settings_path)
        case.problems += problems
    for table in CASE_TABLES:
        csv_path = path / f"{table}.csv"
        parquet_path = path / f"{table}.parquet"
        if csv_path.is_file() and parquet_path.is_file():
            case.problems.append(error(f"{table}.csv", None, None, None,
                                       f"both {table}.csv and {table}.parquet are present",
                                       "keep one of them"))
            continue
        if csv_path.is_file():
            raw, problems = read_csv_table(csv_path, table)
        elif parquet_path.is_file():
            raw, problems = read_parquet_table(parquet_path, table)
        else:
            continue
        case.tables[table] = raw
        case.problems += problems
    tariff_dir = path / "tariffs"
    if tariff_dir.is_dir():
        for tariff_path in sorted(tariff_dir.glob("*.toml")):
            data, problems = read_toml_file(tariff_path)
            case.problems += problems
            if data:
                case.tariffs[tariff_path.name] = data
    for extra in ("finance.toml",):
        extra_path = path / extra
        if extra_path.is_file():
            case.extra[extra] = extra_path
    return case


def read_finance_settings(raw: "RawCase") -> tuple[dict, str, list[Problem]]:
    """Return the finance settings of a case as a dict (``finance.toml``, or a workbook ``finance`` sheet).

    Returns
    -------
    data : dict
        Flat keys as written (empty when the case has none: the defaults apply).
    source : str
        File or sheet name for problem messages.
    problems : list of Problem
    """
    if raw.kind == "folder":
        path = raw.path / "finance.toml"
        if not path.is_file():
            return {}, "finance.toml", []
        data, problems = read_toml_file(path)
        return data, "finance.toml", problems
    if raw.kind == "workbook":
        return dict(raw.extra.get("finance", {})), f"{raw.path.name}:finance", []
    return {}, "finance.toml", []


def read_default_options() -> tuple[RawTable, list[Problem]]:
    """Read the default options catalogue shipped in ``data/defaults/options.csv`` (illustrative prices)."""
    raw, problems = read_csv_table(DEFAULT_OPTIONS_PATH, "options")
    return RawTable("options", "default options catalogue", raw.frame, raw.rows, raw.headers), problems


def read_case_files(path: str | Path) -> RawCase:
    """Read a case (folder or ``.xlsx`` workbook) without validating it.

    Parameters
    ----------
    path : str or pathlib.Path
        A case folder, or a workbook file ending in ``.xlsx``.

    Returns
    -------
    RawCase
        The tables as read plus any problems met while reading (a missing case, an unreadable file,
        a missing required table).
    """
    path = Path(path)
    if path.is_dir():
        case = read_folder(path)
    elif path.is_file() and path.suffix.lower() == ".xlsx":
        case = read_workbook(path)
    else:
        case = RawCase(path=path, kind="missing")
        what = "does not exist" if not path.exists() else "is neither a folder nor an .xlsx workbook"
        case.problems.append(error(str(path), None, None, None, f"the case {what}",
                                   "give a case folder or a .xlsx workbook; 'drivecase new DIR' writes a blank one"))
        return case
    for table in REQUIRED_TABLES:
        if table not in case.tables:
            where = f"{table}.csv" if case.kind == "folder" else f"{path.name}:{table}"
            case.problems.append(error(where, None, None, None, f"the required table '{table}' is missing",
                                       f"add {table}.csv (or a sheet '{table}'); 'drivecase new' writes a template"))
    return case


# ---------------------------------------------------------------------------------------------------
# Blank case (the only files drivecase writes into a case folder, and only into a new one)
# ---------------------------------------------------------------------------------------------------
BLANK_CASE_TOML = """# drivecase case settings. Lines starting with # are comments.
[case]
name = "My motor fleet"
description = ""
# Three-letter ISO 4217 code; every amount in the case is in this currency.
currency = "EUR"
# Power unit shown in the dashboard and reports: "kW" or "hp" (files may use either column).
power_unit = "kW"
# IANA time zone of the sites; naive timestamps in profiles are read in this zone.
time_zone = "Europe/Berlin"
"""

TABLE_NOTES: dict[str, str] = {
    "assets": "Asset register: one row per motor.",
    "sites": "Sites: one row per utility meter.",
    "capacitors": "Existing capacitor banks (optional).",
    "profiles": "Interval load profiles (optional), long format: one row per profile and interval; 15, 30 or 60 min.",
    "duty": "Duty tables (optional): load points and hours per year.",
    "options": "Options catalogue (optional; without it the default catalogue is used): technologies and cost models.",
}


def _template_comments(table: str) -> list[str]:
    schema = read_schema(table)
    lines = [f"# {TABLE_NOTES[table]} Lines starting with # are ignored; delete them or keep them."]
    for row in schema.itertuples(index=False):
        unit = "" if row.unit == "-" else f" [{row.unit}]"
        need = "required" if row.required == "yes" else ("optional" if row.required == "no" else row.required)
        allowed = f" Allowed: {row.allowed.replace('|', ', ')}." if row.allowed else ""
        default = f" Default: {row.default}." if row.default else ""
        lines.append(f"# {row.name}{unit} ({need}): {row.description}{allowed}{default}")
    return lines


def write_blank_case(target: str | Path, workbook: bool = False) -> list[Path]:
    """Write a blank case (templates with header comments, or a workbook with an instructions sheet).

    Parameters
    ----------
    target : str or pathlib.Path
        A folder that does not exist yet or is empty (folder form), or a path ending in ``.xlsx``
        that does not exist yet (workbook form, also chosen by ``workbook=True``).
    workbook : bool
        Write one workbook instead of a folder of CSV files.

    Returns
    -------
    list of pathlib.Path
        The files written.

    Raises
    ------
    ValueError
        When the target exists and is not an empty folder (nothing is overwritten).
    """
    target = Path(target)
    if workbook or target.suffix.lower() == ".xlsx":
        book_path = target if target.suffix.lower() == ".xlsx" else target / "case.xlsx"
        if book_path.exists():
            raise ValueError(f"{book_path} already exists; drivecase never overwrites a case")
        if book_path.parent != target and target.exists() and any(target.iterdir()):
            raise ValueError(f"{target} is not empty; choose a new folder")
        return [_write_blank_workbook(book_path)]
    if target.exists() and (not target.is_dir() or any(target.iterdir())):
        raise ValueError(f"{target} exists and is not an empty folder; drivecase never overwrites a case")
    target.mkdir(parents=True, exist_ok=True)
    (target / "tariffs").mkdir()
    written = []
    (target / "case.toml").write_text(BLANK_CASE_TOML, encoding="utf-8")
    written.append(target / "case.toml")
    for table in CASE_TABLES:
        schema = read_schema(table)
        text = "\n".join(_template_comments(table) + [",".join(schema["name"])]) + "\n"
        path = target / f"{table}.csv"
        path.write_text(text, encoding="utf-8")
        written.append(path)
    return written


def _write_blank_workbook(path: Path) -> Path:
    from openpyxl import Workbook
    from openpyxl.styles import Font

    book = Workbook()
    info = book.active
    info.title = "instructions"
    info.append(["drivecase case workbook"])
    info["A1"].font = Font(bold=True)
    info.append(["One sheet per table. Row 1 of each sheet is the header; fill one row per item below it."])
    info.append(["Rows whose first cell starts with # are ignored. Tariffs go in sheets named 'tariff <file>.toml',"
                 " one line of the tariff file per row in column A."])
    info.append([])
    info.append(["table", "column", "unit", "required", "allowed", "default", "meaning"])
    for cell in info[5]:
        cell.font = Font(bold=True)
    for table in CASE_TABLES:
        for row in read_schema(table).itertuples(index=False):
            info.append([table, row.name, row.unit, row.required, row.allowed.replace("|", ", "), row.default, row.description])
    settings = book.create_sheet("case")
    settings.append(["key", "value"])
    for key, value in (("name", "My motor fleet"), ("description", ""), ("currency", "EUR"), ("power_unit", "kW"),
                       ("time_zone", "Europe/Berlin")):
        settings.append([key, value])
    for table in CASE_TABLES:
        sheet = book.create_sheet(table)
        sheet.append(list(read_schema(table)["name"]))
        for cell in sheet[1]:
            cell.font = Font(bold=True)
    path.parent.mkdir(parents=True, exist_ok=True)
    book.save(path)
    return path
