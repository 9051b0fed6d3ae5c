"""Reading a case's files, saving finance assumptions into a case, and the tables shipped with drivecase.

A case is a folder (CSV and TOML files, Parquet allowed for long profiles) or one ``.xlsx`` workbook with
one sheet per table. This module turns either into :class:`RawTable` records of text cells with our
column names, the row numbers the user sees and every problem met while reading. Reading never writes
to, renames or locks a user's file: files are read into memory in one pass and closed. Whatever the bytes
hold (another encoding, a workbook renamed ``.csv``, binary garbage, a quote left open), reading ends
in a problem list, never an exception. Typing, ranges and cross-checks happen in :mod:`models.case`.

The one write into an existing case is :func:`save_finance_settings`, run only when the user asks for it:
it changes the finance values of ``finance.toml`` (or of a workbook's ``finance`` sheet) with an atomic
replace, keeps the previous file under a versions folder the reader ignores, and puts it back when the
saved case no longer loads.
"""

from __future__ import annotations

import csv
import datetime as _dt
import difflib
import io
import math
import os
import re
import stat
import threading
import tomllib
import unicodedata
import zipfile
from collections.abc import Mapping
from dataclasses import dataclass, field
from functools import lru_cache
from pathlib import Path
from typing import Literal

import numpy as np
import pandas as pd

from models.problems import MISSING_TABLE_RULE, Problem, error, has_errors, misspelt_name, warning
from models.wording import counted

PACKAGE_DIR = Path(__file__).resolve().parent
DATA_DIR = PACKAGE_DIR.parent / "data"
SCHEMA_DIR = DATA_DIR / "schema"
REFERENCE_DIR = DATA_DIR / "reference"
DEMO_DIR = DATA_DIR / "demo"

#: Tables of the case format, in the order they are read and documented.
CASE_TABLES: tuple[str, ...] = ("assets", "sites", "capacitors", "profiles", "duty", "options", "bill_history",
                                 "verification")
#: Where the default options catalogue lives (used when a case has no options table).
DEFAULT_OPTIONS_PATH = DATA_DIR / "defaults" / "options.csv"
#: Tables a case must have.
REQUIRED_TABLES: tuple[str, ...] = ("assets", "sites")
#: Largest Parquet file drivecase reads (long profiles) [bytes]: a year of 15-minute readings of 10,000 metered
#: motors is about 1.1 GB; what bounds a smaller one is the memory its rows take once read
#: (:data:`PARQUET_ROW_BYTES`, :data:`PARQUET_TEXT_CELL_BYTES`).
MAX_FILE_BYTES = 16 * 2**30
#: Memory a long profile table's row takes while it is read and checked [bytes], the table read batch by batch
#: into its columns (numbers, timestamps and ids, :func:`_parquet_stream`): a resident peak of 7.42 GiB, 0.25 GiB
#: of it before, for the 350.4 million rows (id, timestamp, load, an empty kW column) of 10,000 metered 15-minute
#: profiles (benchmarks/synthetic_fleet.py --assets 10000 --step-minutes 15 --assets-per-profile 1,
#: docs/performance.md): (7.42 - 0.25) GiB / 350.4e6 = 22.0 bytes with the profiles on one grid; 8 bytes more
#: where each profile starts or ends apart (its timestamps copied while the table's are held): 30 here.
PARQUET_ROW_BYTES = 30
#: The same for a table read whole and converted (text read as text, a saved pandas index): its peak holds much
#: of the Arrow table and the frame at once, 13.67 GiB for the same table read so (41.1 bytes a row; 8 more, as
#: above): 50 here.
PARQUET_WHOLE_ROW_BYTES = 50
#: Memory a typed timestamp without a time zone (local times) takes more while it is read and checked [bytes a row]:
#: its local times are copied and placed in the case's zone (models.case._localise); 20.5 and 22.5 bytes a row more
#: than the same table with zoned timestamps, measured at 8.1 and 4.0 million rows (resident peaks, fresh processes):
#: 24 here.
PARQUET_NAIVE_STAMP_BYTES = 24
#: Memory a text cell of a long profile table takes once read, besides its characters [bytes]: timestamps
#: written as ISO text took 204 bytes a row against 48 typed (1 million rows, read and checked), so 160 here.
PARQUET_TEXT_CELL_BYTES = 160
#: Share of the machine's free memory a profile table may take once read [-] (as a run's, models.estimate).
PARQUET_MEMORY_SHARE = 0.8
#: Largest text file (CSV, TOML) [bytes]: parsed text takes several times its size in memory, so longer
#: profiles belong in Parquet.
MAX_TEXT_BYTES = 128 * 1024 * 1024
#: Largest workbook [bytes]: a spreadsheet library holds every cell as an object, tens of times the
#: compressed file size.
MAX_WORKBOOK_BYTES = 64 * 1024 * 1024
#: CSV files from this size on are parsed by pandas' C reader when they are plain (no quotes, comments
#: or blank lines); smaller or irregular files go through the line-by-line reader [bytes].
FAST_CSV_BYTES = 2 * 1024 * 1024
#: Workbook suffixes read as a case (macros in ``.xlsm`` files are never run: only cell values are read).
WORKBOOK_SUFFIXES: tuple[str, ...] = (".xlsx", ".xlsm")

#: Leading bytes of file kinds users save under a wrong name, and what to say about each.
_SIGNATURES: tuple[tuple[bytes, str], ...] = (
    (b"PK\x03\x04", "a zip archive (often an .xlsx workbook saved under another name)"),
    (b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1", "an old-format Excel (.xls) or other Office file"),
    (b"PAR1", "a Parquet file"),
    (b"%PDF", "a PDF document"),
    (b"\x1f\x8b", "a gzip archive"),
    (b"\x89PNG", "a PNG image"),
    (b"\xff\xd8\xff", "a JPEG image"),
    (b"SQLite format 3\x00", "an SQLite database"),
)
#: Byte-order marks, longest first (a UTF-32 LE mark starts with the UTF-16 LE one).
_BOMS: tuple[tuple[bytes, str, str], ...] = (
    (b"\xff\xfe\x00\x00", "utf-32-le", "UTF-32"),
    (b"\x00\x00\xfe\xff", "utf-32-be", "UTF-32"),
    (b"\xef\xbb\xbf", "utf-8", "UTF-8"),
    (b"\xff\xfe", "utf-16-le", "UTF-16"),
    (b"\xfe\xff", "utf-16-be", "UTF-16"),
)
#: Control characters that never occur in text files (tab, line feed, form feed and carriage return
#: excepted); C1 controls appear when binary bytes are read as Latin-1.
_CONTROL = re.compile(r"[\x00-\x08\x0b\x0e-\x1f\x7f-\x9f]")
_TOML_LINE = re.compile(r"at line (\d+)")


class RowNumbers:
    """The row numbers of a table read in one piece, ``first`` to ``first + n - 1``, made when asked for.

    Indexed as the integer array ``numpy.arange(first, first + n)`` would be (an integer, a slice, an array of
    positions or a boolean mask), without holding it: a long profile table has hundreds of millions of rows.
    """

    __slots__ = ("first", "n")

    def __init__(self, first: int, n: int):
        self.first, self.n = int(first), int(n)

    def __len__(self) -> int:
        return self.n

    def __getitem__(self, k):
        if isinstance(k, slice):
            return np.arange(self.first, self.first + self.n)[k]
        if np.ndim(k) == 0 and not isinstance(k, (bool, np.bool_)):
            i = range(self.n)[int(k)]  # (negative positions from the end, out of range an IndexError)
            return self.first + i
        k = np.asarray(k)
        if k.dtype == bool:
            if k.shape != (self.n,):
                raise IndexError(f"a mask of {k.shape} for {self.n} rows")
            return np.flatnonzero(k) + self.first
        if k.dtype.kind not in "iu" and k.size:
            raise IndexError(f"row positions must be integers, not {k.dtype}")
        positions = k.astype(np.int64)
        if len(positions) and (positions.min() < -self.n or positions.max() >= self.n):
            raise IndexError(f"a row position out of 0..{self.n - 1}")
        return np.where(positions < 0, positions + self.n, positions) + self.first

    def __array__(self, dtype=None, copy=None):
        return np.arange(self.first, self.first + self.n, dtype=dtype or np.int64)

    def __repr__(self) -> str:
        return f"RowNumbers({self.first}, {self.n})"


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
    rows : numpy.ndarray or RowNumbers
        Row number of each frame row as the user sees it (header row = 1 for a plain file); a Parquet table's
        are a :class:`RowNumbers`, indexed alike.
    headers : dict
        Our column name -> the header as written in the user's file.
    readable : bool
        False when the file could not be read at all (empty, binary, unreadable); its problems say why,
        and the table is not checked further.
    """

    name: str
    source: str
    frame: pd.DataFrame
    rows: object
    headers: dict[str, str] = field(default_factory=dict)
    readable: bool = True
    #: columns of the file left unread (not known to the table), under their headers
    unread: tuple[str, ...] = ()


@dataclass
class RawCase:
    """Everything read from a case before validation."""

    path: Path
    kind: str  # "folder", "workbook" or "missing"
    settings: dict = field(default_factory=dict)
    settings_source: str = "case.toml"
    tables: dict[str, RawTable] = field(default_factory=dict)
    tariffs: dict[str, dict] = field(default_factory=dict)
    extra: dict[str, object] = field(default_factory=dict)
    problems: list[Problem] = field(default_factory=list)
    #: Tariff files present but unreadable (syntax or encoding errors already reported).
    unreadable_tariffs: set[str] = field(default_factory=set)


def _empty_table(table: str, source: str) -> RawTable:
    """A table that could not be read: no rows, flagged unreadable."""
    return RawTable(table, source, pd.DataFrame(), np.array([], dtype=np.int64), {}, readable=False)


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
def _kind_of_text(source: str) -> str:
    """What a text file is saved as, for a hint: "text" for a TOML file, else "CSV"."""
    return "text" if str(source).lower().endswith(".toml") else "CSV"


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


@lru_cache(maxsize=None)
def ratio_kind(table: str, column: str) -> str | None:
    """Whether a column of a case table holds a percentage, a fraction or neither (for a % sign in a cell).

    Parameters
    ----------
    table : str
        One of :data:`CASE_TABLES`.
    column : str
        Our column name.

    Returns
    -------
    str or None
        ``"pct"`` for a column in percent (unit ``%`` or percentage points: ``_pct`` names, 0-100),
        ``"frac"`` for a fraction (``_frac`` names and power factors, 0-1, docs/conventions.md), else None.

    Examples
    --------
    >>> ratio_kind("assets", "mean_load_pct"), ratio_kind("assets", "rated_power_factor"), ratio_kind("assets", "poles")
    ('pct', 'frac', None)
    """
    units = dict(zip(read_schema(table)["name"], read_schema(table)["unit"])) if table in CASE_TABLES else {}
    name = str(column)
    if units.get(name) in ("%", "pct points") or name.endswith(("_pct", "_pct_points")):
        return "pct"
    if name.endswith("_frac") or "power_factor" in name:
        return "frac"
    return None


_WATT_TOKEN = re.compile(r"(?<![a-z])(w|watts?)(?![a-z])")


def watt_header_target(table: str, header: object) -> str | None:
    """Return our kW column a header would name if its unit were kW instead of W, else None.

    Examples
    --------
    >>> watt_header_target("assets", "Rated power (W)")
    'rated_p_kw'
    >>> watt_header_target("assets", "Rated power (kW)") is None
    True
    """
    text = normalise_header(header)
    if not _WATT_TOKEN.search(text):
        return None
    target = header_map(table).get(_WATT_TOKEN.sub("kw", text))
    return target if target is not None and target.endswith("_kw") else None


def _rename(table: str, source: str, headers: list[object]) -> tuple[list[str], dict[str, str], list[Problem]]:
    """Map the user's headers to our names; report duplicates, blanks and headers in W."""
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
        if ours == text and ours not in mapping.values():
            target = watt_header_target(table, text)
            if target is not None:
                problems.append(error(source, 1, text, text, f"the column '{text}' is in W; drivecase reads '{target}' in kW",
                                      f"divide the values by 1000 and head the column '{target}'"))
        if ours in shown:
            problems.append(error(source, 1, text, text, f"column '{ours}' appears twice",
                                  f"keep one of '{shown[ours]}' and '{text}'"))
            ours = f"{text} (duplicate {position})"
        shown[ours] = text
        names.append(ours)
    return names, shown, problems


def _drop_blank_header_columns(frame: pd.DataFrame) -> pd.DataFrame:
    """Drop columns with no header and no values (trailing delimiters left by spreadsheet exports)."""
    drop = [c for c in frame.columns if str(c).startswith("(blank header ") and frame[c].isna().all()]
    return frame.drop(columns=drop) if drop else frame


# ---------------------------------------------------------------------------------------------------
# Plain files
# ---------------------------------------------------------------------------------------------------
def read_file(path: Path, source: str, limit: int = MAX_TEXT_BYTES,
              hint: str = "split the file, or save long profiles as profiles.parquet") -> tuple[bytes | None, list[Problem]]:
    """Read a whole file read-only; a file too large or unreadable becomes a problem instead of an error.

    Parameters
    ----------
    path : pathlib.Path
        File to read.
    source : str
        Name shown in problems.
    limit : int
        Largest size accepted [bytes].
    hint : str
        What to suggest when the file is too large.

    Returns
    -------
    data : bytes or None
        The file's bytes, or None when it could not be read.
    problems : list of Problem
    """
    try:
        size = path.stat().st_size
        if size > limit:
            return None, [error(source, None, None, f"{size / 1e6:,.0f} MB",
                                f"the file is larger than the {limit / 1e6:,.0f} MB drivecase reads", hint)]
        with open(path, "rb") as handle:
            return handle.read(), []
    except OSError as exc:
        return None, [error(source, None, None, None, f"the file cannot be read ({exc.strerror or exc.__class__.__name__})",
                            "check that the file exists and that you may read it")]


def _signature(data: bytes) -> str | None:
    return next((kind for magic, kind in _SIGNATURES if data.startswith(magic)), None)


def _utf16_without_bom(head: bytes) -> str | None:
    """Guess UTF-16 without a byte-order mark from the zero bytes of ASCII text (every other byte)."""
    if len(head) < 8:
        return None
    even, odd = head[0::2], head[1::2]
    zeros_even, zeros_odd = even.count(0) / len(even), odd.count(0) / len(odd)
    if zeros_odd > 0.4 and zeros_even < 0.05:
        return "utf-16-le"
    if zeros_even > 0.4 and zeros_odd < 0.05:
        return "utf-16-be"
    return None


def _decode(data: bytes, source: str) -> tuple[str | None, list[Problem], str]:
    """Decode file bytes into text, or report why they are not text.

    Returns
    -------
    text : str or None
        None when the bytes are not text (a known binary format, or control characters).
    problems : list of Problem
    encoding : str
        Codec used (for the fast CSV path).

    Notes
    -----
    Order: a byte-order mark (UTF-8, UTF-16, UTF-32) decides; else UTF-8; else UTF-16 without a mark
    when every other byte of ASCII text is zero; else Windows-1252; else Latin-1 (which maps every byte).
    A non-UTF-8 decode is a warning, binary content an error.
    """
    kind = _signature(data)
    if kind is not None:
        return None, [error(source, None, None, None, f"the file is {kind}, not a text (CSV or TOML) file",
                            "save the table as CSV (comma- or semicolon-separated text), or give the workbook itself as the case")], ""
    problems: list[Problem] = []
    text: str | None = None
    encoding = "utf-8"
    for bom, codec, label in _BOMS:
        if data.startswith(bom):
            try:
                text, encoding = data[len(bom):].decode(codec), codec
            except UnicodeDecodeError as exc:
                return None, [error(source, None, None, None,
                                    f"the file starts with a {label} byte-order mark but is not valid {label} (byte {exc.start})",
                                    f"save it again as UTF-8 {_kind_of_text(source)}")], ""
            if label != "UTF-8":
                problems.append(warning(source, None, None, None, f"the file is {label} text; it was decoded as such",
                                        f"UTF-8 is the expected encoding; save it as UTF-8 {_kind_of_text(source)} to be sure"))
            break
    if text is None:
        try:
            text = data.decode("utf-8")
        except UnicodeDecodeError as exc:
            codec = _utf16_without_bom(data[:4096])
            decoded = None
            if codec is not None:
                try:
                    decoded, encoding = data.decode(codec), codec
                    label = "UTF-16 without a byte-order mark"
                except UnicodeDecodeError:
                    decoded = None
            if decoded is None:
                try:
                    decoded, encoding, label = data.decode("cp1252"), "cp1252", "Windows-1252"
                except UnicodeDecodeError:
                    decoded, encoding, label = data.decode("latin-1"), "latin-1", "Latin-1 (ISO 8859-1)"
            text = decoded
            problems.append(warning(source, None, None, None,
                                    f"the file is not UTF-8 (byte {exc.start}); it was read as {label}",
                                    f"save it as UTF-8 {_kind_of_text(source)} to be sure accented text is read as intended"))
    sample = text[:65536]
    controls = len(_CONTROL.findall(sample))
    if "\x00" in text or controls > max(2, 0.001 * len(sample)):
        return None, [error(source, None, None, None, "the file holds binary data, not text",
                            "is it a renamed spreadsheet or archive? Save the table as CSV text")], ""
    return text, problems, encoding


def decode_text(data: bytes, source: str) -> tuple[str, list[Problem]]:
    """Decode file bytes as text (BOM, UTF-8, UTF-16, Windows-1252 or Latin-1); binary data gives an error.

    Returns
    -------
    text : str
        Decoded text; empty when the bytes are not text.
    problems : list of Problem
        A warning for any encoding other than UTF-8, an error for binary content.

    Examples
    --------
    >>> decode_text("Kühl".encode("cp1252"), "a.csv")[0]
    'Kühl'
    >>> decode_text(b"PK\\x03\\x04rest", "a.csv")[1][0].severity
    'error'
    """
    text, problems, _ = _decode(data, source)
    return ("" if text is None else text), problems


_LINE = re.compile(r"[^\r\n]+")


def _header_line(text: str) -> str:
    """Return the first line that is neither blank nor a comment."""
    for match in _LINE.finditer(text):
        line = match.group(0)
        if line.strip() and not line.lstrip().startswith("#"):
            return line
    return ""


def _sniff_delimiter(header: str) -> str:
    """Pick the delimiter among comma, semicolon and tab that splits the header best."""
    counts = {d: header.count(d) for d in (",", ";", "\t")}
    return max(counts, key=lambda d: (counts[d], d == ","))


def _csv_error_problem(source: str, line: int | None, exc: Exception) -> Problem:
    message = str(exc)
    if "field larger than field limit" in message:
        return error(source, line, None, None, f"a cell is longer than {csv.field_size_limit():,} characters",
                     "usually a quote (\") opened further up and never closed; close or remove it")
    return error(source, line, None, None, f"the line cannot be read as CSV ({message})",
                 "check quotes and delimiters on this line")


def _title_above_header(first: list, second: list, table: str) -> bool:
    """Whether ``first`` (a table's first line) names none of the table's columns and ``second`` names two or more:
    a title line above the header."""
    try:
        known = set(header_map(table))
    except (KeyError, OSError, ValueError):  # (a table without a schema)
        return False

    def named(cells) -> int:
        return sum(normalise_header(c) in known for c in cells if str(c).strip())

    return named(first) == 0 and named(second) >= 2


def parse_csv_text(text: str, table: str, source: str) -> tuple[RawTable, list[Problem]]:
    """Parse CSV text into a :class:`RawTable` keeping the user's line numbers.

    Lines starting with ``#`` before or between rows are comments; blank lines are skipped. The
    delimiter (comma, semicolon or tab) is detected from the header line. Line ends may be LF, CRLF or
    CR. A row is numbered by the line it starts on. A quote left open (the rest of the file read as one
    cell) is an error; a quoted cell running over several lines is a warning.
    """
    problems: list[Problem] = []
    delimiter = _sniff_delimiter(_header_line(text))
    reader = csv.reader(io.StringIO(text, newline=None), delimiter=delimiter)
    header: list[str] | None = None
    header_line = 0
    records: list[list[str]] = []
    rows: list[int] = []
    spans: list[tuple[int, int, bool]] = []
    last_line = 0
    try:
        for record in reader:
            start, last_line = last_line + 1, reader.line_num
            if not record or all(not c.strip() for c in record):
                continue
            if record[0].lstrip().startswith("#"):
                continue
            if last_line > start:
                width = max(2, ((len(header) if header else len(record)) - 1) // 2)
                rowlike = any(cell.count(delimiter) >= width for c in record if "\n" in c for cell in c.split("\n"))
                spans.append((start, last_line, rowlike))
            if header is None:
                header, header_line = record, start
                continue
            if not records and header_line and _title_above_header(header, record, table):
                # a title line above the header (a spreadsheet's caption saved with the table): one error, and the
                # rows read under their own header rather than a cascade of "missing column" errors
                problems.append(error(source, header_line, None, " ".join(c.strip() for c in header if c.strip()),
                                      f"line {header_line} is a title, not the table's header: the header is line {start}",
                                      "delete the lines above the header, or start them with # (a comment)"))
                header, header_line = record, 0
                continue
            if len(record) > len(header):
                extra = [c for c in record[len(header):] if c.strip()]
                if extra:
                    problems.append(error(source, start, f"(no header, column {len(header) + 1})", delimiter.join(extra),
                                          f"the row has {len(record)} cells but the header has {len(header)}",
                                          "check for a stray delimiter in this row or a missing header"))
                record = record[: len(header)]
            records.append(record + [""] * (len(header) - len(record)))
            rows.append(start)
    except csv.Error as exc:
        problems.append(_csv_error_problem(source, reader.line_num or None, exc))
    if spans:
        odd_quotes = text.count('"') % 2 == 1
        for k, (first, end, rowlike) in enumerate(spans):
            if k == len(spans) - 1 and end == last_line and odd_quotes:
                problems.append(error(source, first, None, None,
                                      f"a quote opened on line {first} is never closed: lines {first}-{end} were read as one cell",
                                      "close the quote (\") or remove it"))
            elif rowlike:
                problems.append(error(source, first, None, None,
                                      f"a quoted cell runs over lines {first}-{end} and swallows what look like rows",
                                      "a quote (\") is probably left open on this line; close or remove it"))
            else:
                problems.append(warning(source, first, None, None, f"a quoted cell runs over lines {first}-{end}",
                                        "line breaks inside a cell are kept; check that no quote was left open"))
    if header is None:
        problems.append(error(source, None, None, None, "the file is empty (no header row)",
                              "start from the template written by 'drivecase new'"))
        return _empty_table(table, source), problems
    names, shown, rename_problems = _rename(table, source, header)
    problems += rename_problems
    frame = pd.DataFrame(records, columns=names, dtype=object)
    frame = frame.map(lambda c: None if c is None or str(c).strip() == "" else str(c).strip())
    frame = _drop_blank_header_columns(frame)
    if delimiter != ",":
        problems.append(warning(source, None, None, repr(delimiter),
                                "the file uses a non-comma delimiter; it was detected and read",
                                "decimal commas in numbers are read as decimal points"))
    raw = RawTable(table, source, frame, np.asarray(rows, dtype=np.int64), shown)
    return raw, problems


_COMMENT_OR_BLANK = re.compile(r"(?m)^[ \t]*(#|\r?$)")
_LONE_CR = re.compile(r"\r(?!\n)")


def _parse_plain_csv(data: bytes, text: str, encoding: str, table: str,
                     source: str) -> tuple[RawTable | None, list[Problem]]:
    """Parse a large, plain CSV (no quotes, comments, blank lines or lone CR) with pandas' C reader.

    Returns ``(None, [])`` when the file is not plain or a row has more cells than the header, so the
    line-by-line reader (which names the offending line) takes over.
    """
    body = text.rstrip("\r\n")
    if '"' in text or _COMMENT_OR_BLANK.search(body) or _LONE_CR.search(text) or not body:
        return None, []
    delimiter = _sniff_delimiter(_header_line(text))
    codec = "utf-8-sig" if encoding == "utf-8" else encoding
    try:
        cells = pd.read_csv(io.BytesIO(data), sep=delimiter, header=None, dtype=str, keep_default_na=False,
                            na_filter=False, encoding=codec, engine="c", skip_blank_lines=False)
    except (pd.errors.ParserError, ValueError, UnicodeDecodeError):
        return None, []
    header = [str(h) for h in cells.iloc[0].tolist()]
    names, shown, problems = _rename(table, source, header)
    frame = cells.iloc[1:].reset_index(drop=True)
    frame.columns = names
    for column in frame.columns:
        stripped = frame[column].str.strip()
        frame[column] = stripped.mask(stripped == "")
    frame = _drop_blank_header_columns(frame)
    if delimiter != ",":
        problems.append(warning(source, None, None, repr(delimiter),
                                "the file uses a non-comma delimiter; it was detected and read",
                                "decimal commas in numbers are read as decimal points"))
    rows = np.arange(2, len(frame) + 2, dtype=np.int64)
    return RawTable(table, source, frame, rows, shown), problems


def read_csv_table(path: Path, table: str, source: str | None = None) -> tuple[RawTable, list[Problem]]:
    """Read one CSV table of a case folder; every failure is a problem (the table is then unreadable)."""
    source = source or path.name
    data, problems = read_file(path, source, MAX_TEXT_BYTES,
                               "save long profiles as profiles.parquet, or split the case")
    if data is None:
        return _empty_table(table, source), problems
    if not data.strip():
        return _empty_table(table, source), problems + [
            error(source, None, None, None, "the file is empty (no header row)",
                  "start from the template written by 'drivecase new'")]
    text, more, encoding = _decode(data, source)
    problems += more
    if text is None:
        return _empty_table(table, source), problems
    if len(data) >= FAST_CSV_BYTES:
        raw, more = _parse_plain_csv(data, text, encoding, table, source)
        if raw is not None:
            return raw, problems + more
    raw, more = parse_csv_text(text, table, source)
    return raw, problems + more


@dataclass(frozen=True)
class _ParquetPlan:
    """What reading a Parquet table takes, from its footer: the columns to read (None: all), the ids read as
    categories, every column of the file under our names in file order, the memory reading needs [bytes], and the
    value columns of which one may be empty."""

    rows: int
    columns: list[str] | None
    ids: list[str]
    file_columns: tuple[str, ...]
    needed_bytes: int
    #: the file's two value columns, one per quantity (empty when a quantity has none or several): the one of no
    #: value is left out
    quantities: tuple[str, ...] = ()
    #: read batch by batch into its columns (:func:`_parquet_stream`), not whole
    streamed: bool = False


#: Columns of a long profile table that are read; any other is named in a warning and left unread.
PROFILE_COLUMNS = ("profile_id", "timestamp", "shaft_load_pct", "input_kw")


def _parquet_plan(path: Path, table: str) -> _ParquetPlan:
    """Plan the reading of a Parquet table from its footer alone (nothing else of the file is read).

    In a long profile table only the known columns are read (a column a pandas index was saved in too), and a
    value column whose footer statistics show no value at all beside the other quantity's (a template's other
    column) is not read either. The memory reading needs is :data:`PARQUET_ROW_BYTES` a row where the table is read
    batch by batch (:func:`_streamable`), else :data:`PARQUET_WHOLE_ROW_BYTES`, and for every text column read (other
    than the ids, read as categories) its uncompressed bytes and :data:`PARQUET_TEXT_CELL_BYTES` a cell, and for a
    typed timestamp column without a time zone :data:`PARQUET_NAIVE_STAMP_BYTES` a row.
    """
    import pyarrow as pa
    import pyarrow.parquet as pq

    with open(path, "rb") as handle:  # (the footer read through a file object: closed at once, nothing mapped)
        meta = pq.ParquetFile(handle).metadata
    schema = meta.schema.to_arrow_schema()
    mapping = header_map(table)
    named: dict[str, list[str]] = {}  # our column -> the file's columns that map to it
    for name in schema.names:
        named.setdefault(mapping.get(normalise_header(name), ""), []).append(name)
    profiles = table == "profiles"
    ids = [name for name in named.get("profile_id", ()) if profiles and len(named["profile_id"]) == 1
           and _is_text(schema.field(name).type)]
    ours, _shown, _ = _rename(table, "", list(schema.names))
    read = list(schema.names)
    quantities: tuple[str, ...] = ()
    if profiles:
        read = [name for name, our in zip(schema.names, ours)
                if our in PROFILE_COLUMNS or " (duplicate " in our or name.startswith("__index_level_")
                or watt_header_target(table, str(name)) is not None]  # (a column in W: read, to be named an error)
        by_quantity = [named.get(c, []) for c in ("shaft_load_pct", "input_kw")]
        if all(len(q) == 1 for q in by_quantity):  # (one column for each quantity)
            quantities = tuple(q[0] for q in by_quantity)
            empty = [name for name in quantities  # (a column of Arrow's null type holds no value by its type)
                     if pa.types.is_null(schema.field(name).type) or _all_null(meta, name)]
            if len(empty) == 1:
                read.remove(empty[0])
    streamed = _streamable(meta, schema, read, ids)
    needed = meta.num_rows * (PARQUET_ROW_BYTES if streamed else PARQUET_WHOLE_ROW_BYTES)
    for name in read:
        kind = schema.field(name).type
        if name not in ids and (_is_text(kind) or pa.types.is_binary(kind)):
            needed += _uncompressed_bytes(meta, name) + meta.num_rows * PARQUET_TEXT_CELL_BYTES
        elif pa.types.is_timestamp(kind) and kind.tz is None:
            needed += meta.num_rows * PARQUET_NAIVE_STAMP_BYTES
    return _ParquetPlan(int(meta.num_rows), None if read == list(schema.names) else read, ids, tuple(ours),
                        int(needed), quantities, streamed)


def _is_text(kind) -> bool:
    """Whether an Arrow type is text (``string`` or ``large_string``)."""
    import pyarrow as pa

    return pa.types.is_string(kind) or pa.types.is_large_string(kind)


def _column_chunks(meta, column: str):
    """The chunks of a column in each row group of a Parquet footer (None where a group lacks it)."""
    for g in range(meta.num_row_groups):
        group = meta.row_group(g)
        yield group, next((group.column(i) for i in range(group.num_columns)
                           if group.column(i).path_in_schema == column), None)


def _all_null(meta, column: str) -> bool:
    """Whether a Parquet footer shows a column without any value (False when a row group of it has no null count:
    it is not known unread)."""
    if not meta.num_rows:
        return False
    for group, chunk in _column_chunks(meta, column):
        stats = None if chunk is None else chunk.statistics
        if stats is None or not stats.has_null_count or stats.null_count != group.num_rows:
            return False
    return True


def _uncompressed_bytes(meta, column: str) -> int:
    """A column's bytes once decompressed, from a Parquet footer."""
    return sum(int(chunk.total_uncompressed_size) for _, chunk in _column_chunks(meta, column) if chunk is not None)


def available_bytes() -> int:
    """Memory the machine has available now for a new program [bytes] (``psutil.virtual_memory().available``)."""
    import psutil

    return int(psutil.virtual_memory().available)


#: Rows of a Parquet table decoded at a time where it is read into its columns as they will be held
#: (:func:`_parquet_stream`): about 24 MB of decoded values per batch of a long profile table.
PARQUET_BATCH_ROWS = 1 << 20


def _parquet_frame(path: Path, table: str, plan: _ParquetPlan | None = None) -> pd.DataFrame:
    """A Parquet file's frame, as ``pandas.read_parquet`` gives it, except in a long profile table: only the columns
    of :func:`_parquet_plan` are read; its text id column (``profile_id``) comes as categories, one code per row
    instead of one string (a fraction of the memory on a fleet of metered motors: hundreds of millions of rows);
    and a value column with no value at all beside the other quantity's (a template's other column) is left out
    (read and dropped where the footer has no statistics), as the profile check reads past it.

    A table of numbers, timestamps and those ids is read batch by batch into its columns as they will be held
    (:func:`_parquet_stream`): the peak is the columns and one batch. Any other (text read as text, a saved pandas
    index, a type pandas gives another shape) is read whole and converted with the Arrow table given up as it goes
    (``self_destruct``); its peak holds much of both (docs/performance.md). The file is read through a file object,
    not mapped (a file rewritten while mapped would stop the process)."""
    import pyarrow as pa
    import pyarrow.parquet as pq

    plan = plan or _parquet_plan(path, table)
    if plan.streamed:
        frame = _parquet_stream(path, plan)
    else:
        with open(path, "rb") as handle:
            arrow = pq.read_table(handle, columns=plan.columns, read_dictionary=plan.ids or None)
        if len(plan.quantities) == 2 and all(q in arrow.column_names for q in plan.quantities) and arrow.num_rows:
            # (no statistics: both value columns were read; the one of no value is dropped now)
            empty = [q for q in plan.quantities if arrow.column(q).null_count == arrow.num_rows]
            if len(empty) == 1:
                arrow = arrow.drop_columns(empty)
        frame = arrow.to_pandas(types_mapper=_pandas_text_type, self_destruct=True, split_blocks=True)
        del arrow
    pa.default_memory_pool().release_unused()
    return frame


def _streamable(meta, schema, names: list[str], ids: list[str]) -> bool:
    """Whether :func:`_parquet_stream` gives a table's frame as ``to_pandas`` of the whole table would: unique
    columns of floating point numbers (not half precision), timestamps, integers the footer shows without a blank
    cell, and the text ids read as categories; no pandas index saved, no column whose pandas metadata names a type
    other than a plain number or time (an extension type: a nullable integer, pandas' text), and no timestamp
    whose metadata names another time zone than its own (a table written with timestamps stored without their
    zone, as some writers do, which ``to_pandas`` puts back)."""
    import pyarrow as pa

    if len(set(names)) != len(names) or any(schema.get_field_index(name) < 0 for name in names):
        return False
    pandas_meta = schema.pandas_metadata or {}
    if any(not (isinstance(index, dict) and index.get("kind") == "range" and index.get("name") is None)
           for index in pandas_meta.get("index_columns", ())):
        return False
    saved = {str(c.get("field_name", c.get("name"))): c for c in pandas_meta.get("columns", ()) if isinstance(c, dict)}
    for name in names:
        if name in ids:
            continue
        kind = schema.field(name).type
        entry = saved.get(name, {})
        if entry.get("numpy_type") is not None:
            try:
                dtype = pd.api.types.pandas_dtype(entry["numpy_type"])
            except TypeError:
                return False
            if not isinstance(dtype, np.dtype) or dtype.kind not in "fiuM":
                return False
        if pa.types.is_timestamp(kind):
            extra = entry.get("metadata")
            zone = extra.get("timezone") if isinstance(extra, dict) else None
            if (zone is not None or entry.get("pandas_type") == "datetimetz") and zone != kind.tz:
                return False
            if kind.tz is not None:
                try:
                    kind.to_pandas_dtype()
                except Exception:  # (a zone pandas does not know: the whole table's conversion says so)
                    return False
            continue
        if pa.types.is_floating(kind) and not pa.types.is_float16(kind):
            continue
        if pa.types.is_integer(kind) and meta.num_rows and all(
                chunk is not None and chunk.statistics is not None and chunk.statistics.has_null_count
                and chunk.statistics.null_count == 0 for _, chunk in _column_chunks(meta, name)):
            continue
        return False
    return True


def _parquet_stream(path: Path, plan: _ParquetPlan) -> pd.DataFrame:
    """Read a Parquet table batch by batch into its columns as they will be held: the frame ``to_pandas`` of the
    whole table gives, without holding the Arrow table and the frame at once (for a table :func:`_streamable`
    finds so read).

    Each batch of :data:`PARQUET_BATCH_ROWS` rows is decoded and copied into columns made for the whole table
    first: numbers into an array of their type, timestamps into their time zone's array (their instants, as
    stored), and ids read as dictionaries into one code per row, the categories in the order the batches'
    dictionaries bring them (as Arrow unifies them).
    """
    import pyarrow as pa
    import pyarrow.compute as pc
    import pyarrow.parquet as pq

    with open(path, "rb") as handle:
        source = pq.ParquetFile(handle, read_dictionary=plan.ids or None)
        meta, schema = source.metadata, source.schema_arrow
        names = list(plan.columns) if plan.columns is not None else list(schema.names)
        n = int(meta.num_rows)
        columns: dict[str, object] = {}
        writable: dict[str, np.ndarray] = {}
        for name in names:
            kind = schema.field(name).type
            if name in plan.ids:
                writable[name] = np.empty(n, dtype=_codes_type(0))
            elif pa.types.is_timestamp(kind):
                naive = np.zeros(n, dtype=f"M8[{kind.unit}]")  # (untouched pages until written: nothing resident)
                if kind.tz is None:
                    columns[name] = writable[name] = naive
                else:  # the zone's own array, written through its instants (a copy of pages not yet written)
                    zone = kind.to_pandas_dtype().tz  # (the zone object to_pandas gives)
                    held = pd.DatetimeIndex(naive, dtype=pd.DatetimeTZDtype(kind.unit, "UTC")).tz_convert(zone).array
                    del naive
                    columns[name], writable[name] = held, held.asi8
            else:
                columns[name] = writable[name] = np.empty(n, dtype=kind.to_pandas_dtype())
        categories: dict[str, dict[str, int]] = {name: {} for name in plan.ids}
        nulls = dict.fromkeys(names, 0)
        at = 0
        for batch in source.iter_batches(batch_size=PARQUET_BATCH_ROWS, columns=names, use_threads=True):
            end = at + batch.num_rows
            for i, name in enumerate(names):
                values = batch.column(i)
                nulls[name] += values.null_count
                if name in categories:
                    seen = categories[name]
                    lookup = np.array([seen.setdefault(v, len(seen)) for v in values.dictionary.to_pylist()] + [-1],
                                      dtype=np.int64)
                    if writable[name].dtype != _codes_type(len(seen)):  # (more ids than its codes hold: widened)
                        wider = np.empty(n, dtype=_codes_type(len(seen)))
                        wider[:at] = writable[name][:at]
                        writable[name] = wider
                    codes = pc.fill_null(values.indices, len(lookup) - 1).to_numpy(zero_copy_only=False)
                    writable[name][at:end] = lookup[codes]
                elif pa.types.is_timestamp(values.type):  # (their instants as stored; a blank one NaT)
                    writable[name][at:end] = pc.fill_null(values.view(pa.int64()), np.iinfo(np.int64).min).to_numpy()
                else:
                    writable[name][at:end] = values.to_numpy(zero_copy_only=False)
            at = end
    if at != n:
        raise ValueError(f"the file holds {at:,} rows, its footer {n:,}")
    for name, seen in categories.items():
        ids = pd.Index(list(seen), dtype=_id_text_type() if seen else object)  # (none: as to_pandas gives them)
        columns[name] = pd.Categorical.from_codes(writable[name], categories=ids, validate=False)
    if len(plan.quantities) == 2 and all(q in columns for q in plan.quantities) and n:
        # (no statistics: both value columns were read; the one of no value is dropped now)
        empty = [q for q in plan.quantities if nulls[q] == n]
        if len(empty) == 1:
            del columns[empty[0]]
    return pd.DataFrame({name: columns[name] for name in names if name in columns}, copy=False)


def _codes_type(n_categories: int) -> type:
    """The integer type pandas keeps the codes of so many categories in (``Categorical.from_codes`` makes them so)."""
    for kind in (np.int8, np.int16, np.int32):
        if n_categories < np.iinfo(kind).max:
            return kind
    return np.int64


def _id_text_type():
    """The type of the ids' categories as ``to_pandas`` gives them (pandas' ``str`` where it infers one)."""
    import pyarrow as pa

    return _pandas_text_type(pa.string()) or object


def _pandas_text_type(kind):
    """pandas' own type for an Arrow text column, as ``pandas.read_parquet`` gives it: its ``str`` type where pandas
    infers one (pandas 3, or 2.x with ``future.infer_string``), else None (the Arrow default, Python strings)."""
    if not _is_text(kind):
        return None
    if int(pd.__version__.split(".")[0]) < 3:
        try:
            if not pd.get_option("future.infer_string"):
                return None
        except (KeyError, pd.errors.OptionError):
            return None
    return pd.StringDtype(na_value=np.nan)


def read_parquet_table(path: Path, table: str, source: str | None = None) -> tuple[RawTable, list[Problem]]:
    """Read one Parquet table (long profiles) of a case folder; a damaged file is a problem."""
    source = source or path.name
    try:  # (read where it lies, in the Parquet library's own reads: not copied into memory as a whole first)
        size = path.stat().st_size
        with open(path, "rb"):
            pass
    except OSError as exc:
        return _empty_table(table, source), [
            error(source, None, None, None, f"the file cannot be read ({exc.strerror or exc.__class__.__name__})",
                  "check that the file exists and that you may read it")]
    if size > MAX_FILE_BYTES:
        return _empty_table(table, source), [
            error(source, None, None, f"{size / 2**30:,.1f} GiB",
                  f"the file is larger than the {MAX_FILE_BYTES / 2**30:,.0f} GiB drivecase reads",
                  "give motors of one duty a shared profile, or hourly means, or split the fleet into cases")]
    if not size:  # nothing to read: say so, rather than what the Parquet library makes of no bytes
        return _empty_table(table, source), [
            error(source, None, None, None, "the file is empty (0 bytes)",
                  "export the profiles again (Parquet, or CSV as profiles.csv); without profiles, delete the file")]
    try:
        plan = _parquet_plan(path, table)
        free = available_bytes()
        if plan.needed_bytes > PARQUET_MEMORY_SHARE * free:
            return _empty_table(table, source), [
                error(source, None, None, f"{plan.rows:,} rows",
                      f"the profiles take about {plan.needed_bytes / 2**30:.1f} GiB while they are read, more than "
                      f"{PARQUET_MEMORY_SHARE:.0%} of the {free / 2**30:.1f} GiB this machine has free",
                      "close other programs or use a machine with more memory; or give motors of one duty a shared "
                      "profile, or hourly means, or split the fleet into cases")]
        frame = _parquet_frame(path, table, plan)
    except Exception as exc:  # pyarrow raises several unrelated types for a damaged file
        return (_empty_table(table, source),
                [error(source, None, None, None, f"the file cannot be read as Parquet ({exc.__class__.__name__})",
                       "export it again, or save it as CSV")])
    problems: list[Problem] = []
    if not isinstance(frame.index, pd.RangeIndex) or any(n is not None for n in frame.index.names):
        frame = frame.reset_index()  # a timestamp or id saved as the index is a column to us
    names, shown, more = _rename(table, source, list(frame.columns))
    frame.columns = names
    # each row's number as a spreadsheet shows it (header row 1), made when asked for (a metered fleet's table has
    # hundreds of millions of rows)
    rows = RowNumbers(2, len(frame))
    unread = (tuple(c for c in plan.file_columns if c not in names and c not in PROFILE_COLUMNS)
              if plan.columns is not None else ())
    return RawTable(table, source, frame.reset_index(drop=True), rows, shown, unread=unread), problems + more


def read_toml_file(path: Path, source: str | None = None) -> tuple[dict, list[Problem]]:
    """Read a TOML file into a dict; a syntax error becomes a problem naming the line."""
    _text, data, problems = _read_toml(path, source or path.name)
    return data, problems


def _read_toml(path: Path, source: str) -> tuple[str | None, dict, list[Problem]]:
    """Read a TOML file: its text (None when it could not be read as text), its dict and the problems met."""
    data, problems = read_file(path, source, MAX_TEXT_BYTES, "a settings or tariff file is a few kB: is this the right file?")
    if data is None:
        return None, {}, problems
    text, more, _ = _decode(data, source)
    problems += more
    if text is None:
        return None, {}, problems
    parsed, problems = parse_toml_text(text, source, problems)
    return text, parsed, problems


#: What to write in an empty ``case.toml`` (docs/case-format.md, "case.toml").
_CASE_TOML_HINT = ("write the settings under a [case] line: name, currency and time_zone (the sites' IANA zone, "
                   "e.g. time_zone = \"Europe/Berlin\"); 'drivecase new' writes a filled-in case.toml, "
                   "docs/case-format.md lists the keys; without case.toml every setting takes its default")


def parse_toml_text(text: str, source: str, problems: list[Problem] | None = None,
                    hint: str = "check quotes, brackets and '=' signs on that line") -> tuple[dict, list[Problem]]:
    """Parse TOML text; a syntax error becomes a problem naming the line (row = line number)."""
    problems = list(problems or [])
    try:
        return tomllib.loads(text), problems
    except RecursionError:  # (arrays or tables nested thousands deep: the parser's own recursion gives up)
        return {}, problems + [error(source, None, None, None, "TOML nested too deeply to read (arrays or tables "
                                     "inside each other hundreds of levels deep)", "no setting of a case nests more "
                                     "than two levels: remove the extra brackets")]
    except tomllib.TOMLDecodeError as exc:
        message = getattr(exc, "msg", None) or str(exc)
        line = getattr(exc, "lineno", None)
        if line is None:
            found = _TOML_LINE.search(str(exc))
            line = int(found.group(1)) if found else None
        if "Cannot overwrite a value" in message or "twice" in message:
            line, key = _repeated_toml_key(text, line)
            if key is not None:
                return {}, problems + [error(source, line, key, None, f"'{key}' is given twice",
                                             "keep one of the two lines (TOML takes each key once per table)")]
        return {}, problems + [error(source, line, None, None, f"TOML syntax error: {message}", hint)]


_TOML_KEY = re.compile(r"^\s*(\[{1,2}\s*[^\]]+?\s*\]{1,2}|[A-Za-z0-9_\-.\"' ]+?)\s*(=|$)")


def _repeated_toml_key(text: str, line: int | None) -> tuple[int | None, str | None]:
    """The line and name of a key (or table header) written a second time in TOML text, for a message.

    ``line`` is where the parser stopped (None when it did not say): its key when that line has one,
    else the first key seen twice within one table."""
    lines = text.splitlines()
    seen: dict[tuple[str, str], int] = {}
    table = ""
    first: tuple[int | None, str | None] = (None, None)
    for number, raw in enumerate(lines, start=1):
        found = _TOML_KEY.match(raw.split("#", 1)[0]) if raw.strip() and not raw.lstrip().startswith("#") else None
        if not found:
            continue
        name = found.group(1).strip()
        if name.startswith("["):
            if name.startswith("[[" ):  # an array of tables: a new table every time
                table = f"{name}#{number}"
                continue
            table = name
            key = (name, "")
        else:
            key = (table, name)
        if key in seen and first[1] is None:
            first = (number, name)
        seen.setdefault(key, number)
        if line is not None and number == line and key in seen and seen[key] != number:
            return number, name
    return first



# ---------------------------------------------------------------------------------------------------
# Workbook
# ---------------------------------------------------------------------------------------------------
#: Error values a spreadsheet stores as a formula's result.
SPREADSHEET_ERRORS: tuple[str, ...] = ("#DIV/0!", "#N/A", "#NAME?", "#NULL!", "#NUM!", "#REF!", "#VALUE!",
                                       "#GETTING_DATA", "#SPILL!", "#CALC!")


def _sheet_lookup(names: list[str]) -> dict[str, str]:
    lookup: dict[str, str] = {}
    for name in names:
        lookup.setdefault(normalise_header(name), name)
    return lookup


def _has_formulas(data: bytes) -> bool:
    """True when any worksheet of an .xlsx package holds a formula (an ``<f>`` element)."""
    try:
        with zipfile.ZipFile(io.BytesIO(data)) as package:
            for name in package.namelist():
                if name.startswith("xl/worksheets/") and name.endswith(".xml"):
                    body = package.read(name)
                    if b"<f>" in body or b"<f " in body or b":f>" in body or b":f " in body:
                        return True
    except (zipfile.BadZipFile, OSError, KeyError, ValueError):
        return False
    return False


def _merged_fill(sheet, source: str, problems: list[Problem], max_cells: int = 1_000_000) -> dict[tuple[int, int], object]:
    """Spread each merged block's value over its cells (a flagged repair); return (row, col) -> value."""
    fill: dict[tuple[int, int], object] = {}
    ranges = list(sheet.merged_cells.ranges)
    if not ranges:
        return fill
    max_row, max_col = sheet.max_row, sheet.max_column
    for block in ranges:
        value = sheet.cell(block.min_row, block.min_col).value
        for r in range(block.min_row, min(block.max_row, max_row) + 1):
            for c in range(block.min_col, min(block.max_col, max_col) + 1):
                if (r, c) != (block.min_row, block.min_col) and len(fill) < max_cells:
                    fill[(r, c)] = value
    shown = ", ".join(str(r) for r in ranges[:5]) + (f" and {len(ranges) - 5} more" if len(ranges) > 5 else "")
    problems.append(warning(source, None, None, shown,
                            "merged cells were found; below the header, every cell of a merged block was given the block's value",
                            "unmerge the cells so each row carries its own value, and check the result"))
    return fill


def _filled(sheet) -> dict[str, int]:
    """Bounds for ``sheet.iter_rows`` that hold every cell with a value (``max_row``, ``max_col``).

    A sheet's declared size counts cells that are only formatted: one coloured cell at row 1,048,000 would make
    the reader visit, and create, every cell up to it (gigabytes for a file of a few MB). Read from the cells the
    workbook stores; a sheet object without them keeps its declared size.
    """
    cells = getattr(sheet, "_cells", None)
    if not isinstance(cells, dict):
        return {}
    held = [key for key, cell in cells.items() if cell.value is not None]
    if not held:
        return {"max_row": 1, "max_col": 1}
    return {"max_row": max(r for r, _ in held), "max_col": max(c for _, c in held)}


def _formula_cells(formula_sheet, value_sheet) -> dict[tuple[int, int], bool]:
    """Return (row, col) -> whether a saved result exists, for every formula cell of a sheet."""
    out: dict[tuple[int, int], bool] = {}
    if formula_sheet is None:
        return out
    for row in formula_sheet.iter_rows(**_filled(formula_sheet)):
        for cell in row:
            if cell.data_type == "f" or (isinstance(cell.value, str) and cell.value.startswith("=")):
                cached = value_sheet.cell(cell.row, cell.column).value
                out[(cell.row, cell.column)] = cached is not None
    return out


def _hidden_sheet(sheet, source: str) -> list[Problem]:
    """The warning of a sheet hidden in its workbook (read like the others), or none."""
    if sheet.sheet_state == "visible":
        return []
    return [warning(source, None, None, None, "the sheet is hidden in the workbook; it was read",
                    "unhide it to check what it holds")]


def _formulas_read(source: str, cached: int) -> Problem:
    """The one warning of a sheet whose ``cached`` formula cells were read as their last saved results."""
    text = ("1 cell holds a formula; its last saved result was used" if cached == 1 else
            f"{counted(cached, 'cell')} hold formulas; their last saved results were used")
    return warning(source, None, None, cached, text,
                   "drivecase never recalculates formulas: save the workbook after editing")


def _hidden_rows_read(source: str, rows: list[int]) -> Problem:
    """The one warning of a sheet whose hidden ``rows`` (sorted) were read like the others."""
    shown_rows = ", ".join(str(r) for r in rows[:10]) + (" ..." if len(rows) > 10 else "")
    return warning(source, rows[0], None, shown_rows,
                   (f"1 hidden row was read like the others (row {shown_rows})" if len(rows) == 1 else
                    f"{counted(len(rows), 'hidden row')} were read like the others (rows {shown_rows})"),
                   "delete rows that should not count; hiding or filtering does not remove them")


def _hidden_rows(sheet) -> set[int]:
    return {int(r) for r, dim in sheet.row_dimensions.items() if getattr(dim, "hidden", False)}


def read_workbook(path: Path) -> RawCase:
    """Read a case workbook: one sheet per table, plus an optional ``case`` sheet of settings.

    Cell values are read, never formulas evaluated or macros run: a formula cell gives its last saved
    result (with a warning), or a blank (with a warning) when the file holds none. Merged blocks give
    every cell the block's value, hidden rows and sheets are read, and sheets outside the format are
    ignored, each with a warning.
    """
    from openpyxl import load_workbook  # imported here: only workbook cases need it

    case = RawCase(path=path, kind="workbook", settings_source=f"{path.name}:case")
    data, problems = read_file(path, path.name, MAX_WORKBOOK_BYTES,
                               "use a case folder with profiles.parquet for long profiles")
    case.problems += problems
    if data is None:
        return case
    if not data.startswith(b"PK\x03\x04"):
        kind = _signature(data)
        what = (f"is {kind}" if kind else "is not an .xlsx workbook (no zip package inside)")
        what = f"cannot be opened: it {what}"
        hint = ("open it in a spreadsheet program and save it as .xlsx" if kind and "xls" in kind
                else "save the workbook again from a spreadsheet program as .xlsx")
        case.problems.append(error(path.name, None, None, None, f"the workbook {what}", hint))
        return case
    try:
        book = load_workbook(io.BytesIO(data), read_only=False, data_only=True)
        formula_book = (load_workbook(io.BytesIO(data), read_only=False, data_only=False)
                        if _has_formulas(data) else None)
    except Exception as exc:  # openpyxl raises zipfile, KeyError or its own errors for a damaged book
        case.problems.append(error(path.name, None, None, None,
                                   f"the workbook cannot be opened ({exc.__class__.__name__})",
                                   "save it again from a spreadsheet program as .xlsx"))
        return case
    try:
        _read_sheets(book, formula_book, path, case)
    finally:
        book.close()
        if formula_book is not None:
            formula_book.close()
    return case


def _read_sheets(book, formula_book, path: Path, case: RawCase) -> None:
    sheets = _sheet_lookup(book.sheetnames)
    for name in book.sheetnames:
        if sheets[normalise_header(name)] != name:
            case.problems.append(warning(f"{path.name}:{name}", None, None, None,
                                         f"two sheets are named '{name}' apart from case or spaces; only '{sheets[normalise_header(name)]}' was read",
                                         "delete or rename one of them"))
    # sheet names are looked up as headers are (normalise_header: case, spaces and underscores folded), so a
    # table whose name holds an underscore ("bill_history") is found under its folded key
    table_key = {table: normalise_header(table) for table in CASE_TABLES}
    known = set(table_key.values()) | {"case", "finance", "scenarios", "instructions", "read me", "readme"}
    listed = f"case sheets are: {', '.join(CASE_TABLES)}, case, finance, scenarios and 'tariff <file name>'"
    for key, name in sheets.items():
        if key not in known and not key.startswith("tariff"):
            # a near miss of a sheet the workbook lacks would drop what it holds: an error, as a misspelt
            # table of a tariff is
            missing = sorted(k for k in known - set(sheets) if k not in ("instructions", "read me", "readme"))
            meant = misspelt_name(key, missing)
            if meant is not None:
                case.problems.append(error(f"{path.name}:{name}", None, None, None,
                                           f"sheet name not part of the case format: did you mean '{meant}'? "
                                           "As written, nothing on it would be read",
                                           f"rename the sheet '{meant}'; {listed}"))
            else:
                close = difflib.get_close_matches(key, missing, n=1, cutoff=0.8)
                case.problems.append(warning(f"{path.name}:{name}", None, None, None,
                                             "sheet not part of the case format; it was ignored",
                                             (f"if it holds the {close[0]} sheet, name it '{close[0]}'; " if close else "")
                                             + listed))
    for table in CASE_TABLES:
        if table_key[table] not in sheets:
            continue
        sheet = book[sheets[table_key[table]]]
        source = f"{path.name}:{sheet.title}"
        case.problems += _hidden_sheet(sheet, source)
        fill = _merged_fill(sheet, source, case.problems)
        formulas = _formula_cells(formula_book[sheet.title] if formula_book is not None else None, sheet)
        raw, problems = _sheet_table(sheet, table, source, fill, formulas, _hidden_rows(sheet))
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
                except (tomllib.TOMLDecodeError, RecursionError):
                    pass
        case.extra["finance"] = values
    if "scenarios" in sheets:
        name = sheets["scenarios"]
        case.extra["scenarios"], found = _scenarios_sheet(book[name], formula_book[name] if formula_book is not None else None,
                                                          f"{path.name}:{name}")
        case.problems += found
    for key, name in sheets.items():
        if key.startswith("tariff"):
            # each row of column A its line(s) of the text (a blank cell an empty line), and each line's row kept
            lines: list[str] = []
            rows_of_line: list[int] = []
            for number, r in enumerate(book[name].iter_rows(values_only=True, **_filled(book[name])), start=1):
                cell_lines = ("" if not r or r[0] is None else str(r[0])).split("\n")
                lines += cell_lines
                rows_of_line += [number] * len(cell_lines)
            text = "\n".join(lines)
            file_name = name.split(" ", 1)[1].strip() if " " in name else f"{name}.toml"
            sheet_text = (f"{path.name}:{name}", text, tuple(rows_of_line))
            texts = case.extra.setdefault(SHEET_TEXTS_KEY, {})
            texts[f"{path.name}:{name}"] = sheet_text  # as the problems of reading it name it
            texts[f"{path.name}:tariff {file_name}"] = sheet_text  # as the tariff's checks name it
            data, problems = parse_toml_text(text, f"{path.name}:{name}", hint="each row of column A holds one line of the tariff file")
            case.problems += problems
            if has_errors(problems):
                case.unreadable_tariffs.add(file_name)
            else:
                case.tariffs[file_name] = data


def _sheet_table(sheet, table: str, source: str, fill: dict | None = None, formulas: dict | None = None,
                 hidden: set[int] | None = None) -> tuple[RawTable, list[Problem]]:
    """Turn one worksheet into a RawTable; comment rows (first cell starting with #) are skipped."""
    fill, formulas, hidden = fill or {}, formulas or {}, hidden or set()
    fill_by_row: dict[int, list[tuple[int, object]]] = {}
    for (r, c), value in fill.items():
        fill_by_row.setdefault(r, []).append((c, value))
    header: list[object] | None = None
    header_row = 0
    records: list[list[object]] = []
    rows: list[int] = []
    percent_columns: list[int] = []  # positions of the columns in percent (0-100)
    percent_cells: dict[int, list[tuple[int, float, float]]] = {}  # position -> (row, as stored, as shown)
    for row_no, row_cells in enumerate(sheet.iter_rows(**_filled(sheet)), start=1):
        values = tuple(cell.value for cell in row_cells)
        if header is not None and row_no in fill_by_row:  # a merged header spans columns: not spread
            values = list(values)
            for c, value in fill_by_row[row_no]:
                if c <= len(values):
                    values[c - 1] = value
        if values is None or all(v is None or (isinstance(v, str) and not v.strip()) for v in values):
            continue
        first = values[0]
        if isinstance(first, str) and first.lstrip().startswith("#"):
            continue
        if header is None:
            header = list(values)
            while header and (header[-1] is None or str(header[-1]).strip() == ""):
                header.pop()
            header_row = row_no
            percent_columns = [k for k, h in enumerate(header)
                               if ratio_kind(table, header_map(table).get(normalise_header(h), "")) == "pct"]
            continue
        cells = list(values[: len(header)]) + [None] * max(0, len(header) - len(values))
        for k in percent_columns:  # a cell formatted as percent shows 100 times what it holds (0.952 as 95.2 %)
            v = cells[k]
            if (isinstance(v, (int, float)) and not isinstance(v, bool) and k < len(row_cells)
                    and _percent_format(getattr(row_cells[k], "number_format", None))):
                cells[k] = float(f"{v * 100.0:.15g}")  # 15 significant digits: 0.952 * 100 is 95.2, not 95.19999...
                percent_cells.setdefault(k, []).append((row_no, v, cells[k]))
        records.append([None if (isinstance(v, str) and not v.strip()) else (v.strip() if isinstance(v, str) else v) for v in cells])
        rows.append(row_no)
    if header is None:
        return (_empty_table(table, source),
                [error(source, None, None, None, "the sheet is empty (no header row)",
                       "start from the workbook written by 'drivecase new --workbook'")])
    names, shown, problems = _rename(table, source, header)
    for k, found in percent_cells.items():  # one warning per column, naming the first cells
        row_no, stored, as_shown = found[0]
        listed = ", ".join(str(r) for r, _, _ in found[:5]) + (f" and {len(found) - 5} more" if len(found) > 5 else "")
        problems.append(warning(source, None, str(header[k]).strip(), None,
                                f"{counted(len(found), 'cell')} of this column {'is' if len(found) == 1 else 'are'} "
                                f"formatted as percent in the workbook ({stored:g} shown as {as_shown:g} %): read as "
                                f"the percent shown, {as_shown:g} (row{'s' if len(found) > 1 else ''} {listed})",
                                f"'{names[k]}' is in percent (0-100): format the cells as plain numbers holding the "
                                f"percent ({as_shown:g}) to avoid this repair"))
    frame = pd.DataFrame(records, columns=names, dtype=object)
    frame = _drop_blank_header_columns(frame)
    header_text = {c: ("" if h is None else str(h).strip()) or f"(blank header {c})" for c, h in enumerate(header, start=1)}
    data_rows = set(rows)
    blank_formulas = sorted((r, c) for (r, c), cached in formulas.items() if not cached and r in data_rows and c in header_text)
    for r, c in blank_formulas[:20]:
        problems.append(warning(source, r, header_text[c], None,
                                "the cell holds a formula with no saved result; it was read as blank",
                                "drivecase never recalculates formulas: open and save the workbook in a spreadsheet "
                                "program, or paste the values"))
    if len(blank_formulas) > 20:  # on the row of the first one it counts, so it follows the rows listed
        problems.append(warning(source, blank_formulas[20][0], header_text[blank_formulas[20][1]], None,
                                f"{len(blank_formulas) - 20} more formula cells with no saved result were read as "
                                "blank, the first of them in this row"))
    cached = sum(1 for (r, c), has in formulas.items() if has and (r in data_rows or r == header_row) and c in header_text)
    if cached:
        problems.append(_formulas_read(source, cached))
    hidden_data = sorted(data_rows & hidden)
    if hidden_data:
        problems.append(_hidden_rows_read(source, hidden_data))
    return RawTable(table, source, frame, np.asarray(rows, dtype=np.int64), shown), problems


def _percent_format(number_format: object) -> bool:
    """True for a spreadsheet number format that shows a cell as a percentage (100 times its value).

    A % sign inside quotes or after a backslash is a literal character that does not scale the value.

    Examples
    --------
    >>> _percent_format("0.0%"), _percent_format('0.0" %"'), _percent_format("General"), _percent_format(None)
    (True, False, False, False)
    """
    if not isinstance(number_format, str):
        return False
    return "%" in re.sub(r'"[^"]*"|\\.', "", number_format)


#: Key of :attr:`RawCase.extra` under which a workbook keeps each tariff sheet's TOML text, by the names its
#: problems give (``book.xlsx:Tariff flat.toml`` as the sheet is named, ``book.xlsx:tariff flat.toml`` as the
#: tariff's checks name it): (the sheet as named, the text, the sheet row of each line of the text).
SHEET_TEXTS_KEY = "sheet toml texts"
#: Key under which a scenario read from a workbook sheet carries its row number (problems name the row).
#: Not a string, so no key of a TOML table or a sheet's header can be mistaken for it.
SHEET_ROW_KEY = ("sheet", "row")
#: Key under which a sheet's scenario carries the cells it filled under a blank header cell, as
#: (column letter, value) pairs: an error, as the value would change nothing.
BLANK_HEADER_KEY = ("sheet", "blank header")


def _scenarios_sheet(sheet, formula_sheet, source: str) -> tuple[list[dict], list[Problem]]:
    """Read a ``scenarios`` sheet: a header row (``name`` and the finance keys), then one scenario per row;
    a blank cell leaves that key as the case has it. Rows whose first cell starts with # and empty rows are
    passed over. Each scenario carries its sheet row under :data:`SHEET_ROW_KEY`, and any value written
    under a blank header cell under :data:`BLANK_HEADER_KEY`.

    Returns the scenarios and the sheet's own problems: a key in two columns, a formula with no saved result
    (an error: the blank it reads as would keep the case's value), formulas read as their saved results, a
    comment row that holds values in other cells, hidden rows or sheet and merged cells (each block's value
    spread over its cells, as in the other sheets), and a sheet with no scenario."""
    from openpyxl.utils import get_column_letter

    problems: list[Problem] = _hidden_sheet(sheet, source)
    fill = _merged_fill(sheet, source, problems)
    formulas = _formula_cells(formula_sheet, sheet)
    hidden = _hidden_rows(sheet)
    header: list[str] | None = None
    out: list[dict] = []
    hidden_read: list[int] = []  # hidden rows read as scenarios
    cached = 0  # formula cells read as their saved results
    for number, row in enumerate(sheet.iter_rows(values_only=True, **_filled(sheet)), start=1):
        row = tuple(fill.get((number, c), v) if v is None else v for c, v in enumerate(row, start=1))
        if not row or all(v is None for v in row):
            continue
        if str(row[0] or "").lstrip().startswith("#"):
            rest = [get_column_letter(c) for c, v in enumerate(row[1:], start=2)
                    if v is not None and not (isinstance(v, str) and not v.strip())]
            if rest:
                problems.append(warning(source, number, None, row[0],
                                        f"the row starts with # and was passed over as a comment, with the values in "
                                        f"column{'s' if len(rest) > 1 else ''} {', '.join(rest)}",
                                        "a scenario's name cannot start with #: rename it to read the row"))
            continue
        if header is None:
            header = [normalise_header(v).replace(" ", "_") if v is not None else "" for v in row]
            seen: dict[str, int] = {}
            for c, key in enumerate(header, start=1):
                if key and key in seen:
                    problems.append(error(source, number, key, row[c - 1],
                                          f"the key heads two columns ({get_column_letter(seen[key])} and "
                                          f"{get_column_letter(c)}): which value a scenario takes is unclear",
                                          "keep one column per key"))
                seen.setdefault(key, c)
            continue
        if number in hidden:
            hidden_read.append(number)
        entry: dict = {SHEET_ROW_KEY: number}
        for column, value in enumerate(row, start=1):
            key = header[column - 1] if column <= len(header) else ""
            if (number, column) in formulas:
                if not formulas[(number, column)]:
                    problems.append(error(source, number, key or get_column_letter(column), None,
                                          "the cell holds a formula with no saved result: read as blank, it would "
                                          "leave the key as the case has it",
                                          "drivecase never recalculates formulas: open and save the workbook in a "
                                          "spreadsheet program, or paste the values"))
                else:
                    cached += 1
            if value is None or (isinstance(value, str) and not value.strip()):
                continue
            if not key:
                entry.setdefault(BLANK_HEADER_KEY, []).append((get_column_letter(column), value))
                continue
            if isinstance(value, str) and value.strip().startswith("["):
                try:
                    value = tomllib.loads(f"v = {value}")["v"]
                except (tomllib.TOMLDecodeError, RecursionError):
                    pass
            entry[key] = value
        out.append(entry)
    if cached:
        problems.append(_formulas_read(source, cached))
    if hidden_read:
        problems.append(_hidden_rows_read(source, hidden_read))
    if not out:
        problems.append(warning(source, None, None, None, "the sheet holds no scenario: the run compares none",
                                "write a header row (name and the finance keys), then one scenario per row; or "
                                "delete the sheet"))
    return out, problems


def _settings_sheet(sheet) -> dict:
    """Read a two-column key/value settings sheet into the ``[case]`` table of a settings dict."""
    values: dict[str, object] = {}
    for row in sheet.iter_rows(values_only=True, **_filled(sheet)):
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
#: File kinds in a case folder that look like case input; others (README, notes) are passed over.
_CASE_LIKE_SUFFIXES = (".csv", ".tsv", ".txt", ".parquet", ".toml", ".xlsx", ".xlsm", ".xls", ".ods", ".json")


def _folder_files(path: Path) -> tuple[dict[str, Path], list[Problem]]:
    """Return lower-case file name -> path for the files of a folder (exact-case names win).

    Only files are listed: subfolders are passed over, so the :data:`VERSIONS_DIR` folder of previous
    finance files is never read as part of the case (``tariffs/`` is read on its own).
    """
    try:
        entries = sorted(path.iterdir())
    except OSError as exc:
        return {}, [error(str(path), None, None, None, f"the case folder cannot be listed ({exc.strerror or exc.__class__.__name__})",
                          "check that you may read the folder")]
    files: dict[str, Path] = {}
    same: dict[str, list[str]] = {}
    for entry in entries:
        try:
            if not entry.is_file():
                continue
        except OSError:
            continue
        key = entry.name.lower()
        same.setdefault(key, []).append(entry.name)
        if key not in files or entry.name == key:
            files[key] = entry
    problems = []
    for key, names in same.items():
        if len(names) > 1 and (key in folder_names() or key.endswith(".toml")):  # (a file the case reads)
            problems.append(error(str(path.name), None, None, ", ".join(names),
                                  f"{len(names)} files whose names differ only in capitals: which one is meant is not "
                                  "known", "keep one of them (on another computer either could be the one read)"))
    return files, problems


def folder_names() -> tuple[str, ...]:
    """The lower-case names of the files of a case folder that :func:`read_folder` reads, besides
    ``tariffs/*.toml``: ``case.toml``, each table as CSV or Parquet, ``finance.toml`` and ``scenarios.toml``."""
    return ("case.toml", *(f"{t}.{suffix}" for t in CASE_TABLES for suffix in ("csv", "parquet")), "finance.toml",
            "scenarios.toml")


def folder_case_files(path: Path) -> list[Path]:
    """The files of a case folder that :func:`read_folder` reads (:func:`folder_names`, then every
    ``tariffs/*.toml``), those present only."""
    files, _ = _folder_files(path)
    chosen = [files[name] for name in folder_names() if name in files]
    if (path / "tariffs").is_dir():
        tariffs, _ = _folder_files(path / "tariffs")
        chosen += [tariffs[key] for key in sorted(tariffs) if tariffs[key].suffix.lower() == ".toml"]
    return chosen


def read_folder(path: Path) -> RawCase:
    """Read a case folder: ``case.toml``, one CSV per table (Parquet allowed), ``tariffs/``, ``finance.toml``.

    File names are matched without regard to case (``Assets.CSV`` is the asset register). Files that
    look like case input but are not part of the format are reported as warnings, with the closest
    expected name.
    """
    case = RawCase(path=path, kind="folder")
    files, problems = _folder_files(path)
    case.problems += problems
    used = set(folder_names())  # (what folder_case_files lists: keep the two in step)
    if "case.toml" in files:
        name = files["case.toml"].name
        text, case.settings, problems = _read_toml(files["case.toml"], name)
        if text is not None and not has_errors(problems) and not case.settings:
            # an empty settings file is an error as an empty table is: the user meant to write settings
            blank = not text.strip()
            problems.append(error(name, None, None, None,
                                  "the file is empty: it holds no settings" if blank else
                                  "the file holds no settings, only comments", _CASE_TOML_HINT))
        case.problems += problems
    for table in CASE_TABLES:
        csv_path, parquet_path = files.get(f"{table}.csv"), files.get(f"{table}.parquet")
        if csv_path is not None and parquet_path is not None:
            case.problems.append(error(csv_path.name, None, None, None,
                                       f"both {csv_path.name} and {parquet_path.name} are present",
                                       "keep one of them"))
            case.tables[table] = _empty_table(table, csv_path.name)
            continue
        if csv_path is not None:
            raw, problems = read_csv_table(csv_path, table, csv_path.name)
        elif parquet_path is not None:
            raw, problems = read_parquet_table(parquet_path, table, parquet_path.name)
        else:
            continue
        case.tables[table] = raw
        case.problems += problems
    tariff_dir = path / "tariffs"
    if tariff_dir.is_dir():
        tariff_files, problems = _folder_files(tariff_dir)
        case.problems += problems
        for key in sorted(tariff_files):
            tariff_path = tariff_files[key]
            source = f"tariffs/{tariff_path.name}"
            if tariff_path.suffix.lower() != ".toml":
                if not tariff_path.name.startswith((".", "~$")):
                    case.problems.append(warning(source, None, None, None, "not a .toml file; it was ignored",
                                                 "tariff files are TOML text ending in .toml (see docs/tariffs.md)"))
                continue
            data, problems = read_toml_file(tariff_path, source)
            if not data and not has_errors(problems) and _blank_file(tariff_path):
                problems.append(error(source, None, None, None, "the file is empty: it holds no tariff",
                                      "write the tariff (docs/tariffs.md and the examples in data/tariffs), or remove the file"))
            case.problems += problems
            if has_errors(problems):
                case.unreadable_tariffs.add(tariff_path.name)
            else:
                case.tariffs[tariff_path.name] = data
    elif tariff_dir.exists():
        case.problems.append(warning("tariffs", None, None, None, "'tariffs' is not a folder; it was ignored",
                                     "put tariff files in a folder named tariffs"))
    if "finance.toml" in files:
        case.extra["finance.toml"] = files["finance.toml"]
    if "scenarios.toml" in files:
        case.extra["scenarios.toml"] = files["scenarios.toml"]
    expected = sorted(used)
    for key, file_path in files.items():
        if key in used or file_path.name.startswith((".", "~$")) or file_path.suffix.lower() not in _CASE_LIKE_SUFFIXES:
            continue
        close = difflib.get_close_matches(key, expected, n=1, cutoff=0.6)
        if file_path.suffix.lower() in WORKBOOK_SUFFIXES:
            hint = f"a workbook is read as a case when you give its path: drivecase check {file_path}"
        elif close:
            hint = f"did you mean {close[0]}?"
        else:
            hint = (f"case files are: {', '.join(f'{t}.csv' for t in CASE_TABLES)}, case.toml, finance.toml, "
                    "scenarios.toml")
        case.problems.append(warning(file_path.name, None, None, None, "file not part of the case format; it was ignored", hint))
    return case


def read_scenario_tables(raw: "RawCase") -> tuple[list | None, str, list[Problem]]:
    """Return a case's named scenarios as written: the ``[[scenarios]]`` tables of ``scenarios.toml``, or the
    rows of a workbook's ``scenarios`` sheet (each a dict of ``name`` and finance keys); None without any.

    Returns
    -------
    tables : list of dict or None
    source : str
        File or sheet name for problem messages.
    problems : list of Problem
    """
    if raw.kind == "folder":
        path = raw.extra.get("scenarios.toml")
        if not isinstance(path, Path) or not path.is_file():
            return None, "scenarios.toml", []
        data, problems = read_toml_file(path, path.name)
        if has_errors(problems):
            return None, path.name, problems
        from models.finance import FinanceAssumptions

        finance_keys = set(FinanceAssumptions.__dataclass_fields__)
        for key in sorted(k for k in data if k != "scenarios"):
            if misspelt_name(key, ["scenarios"]) is not None:
                # a misspelt table name would drop every scenario in it
                problems.append(error(path.name, None, key, None,
                                      "scenarios.toml holds [[scenarios]] tables: did you mean 'scenarios'? As "
                                      "written, none of its scenarios would be read",
                                      "write each scenario under a [[scenarios]] line"))
            else:
                problems.append(warning(path.name, None, key, None,
                                        "scenarios.toml holds [[scenarios]] tables only; this key was ignored",
                                        "the case's own assumptions go in finance.toml" if key in finance_keys
                                        else "write each scenario under a [[scenarios]] line"))
        if not data:
            problems.append(warning(path.name, None, None, None, "the file holds no scenario: the run compares none",
                                    '[[scenarios]]\nname = "Cheaper money"\ndiscount_rate_frac = 0.06'))
        return data.get("scenarios", []), path.name, problems
    if raw.kind == "workbook" and raw.extra.get("scenarios") is not None:
        return list(raw.extra["scenarios"]), f"{raw.path.name}:scenarios", []
    return None, "scenarios.toml", []


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
        path = raw.extra.get("finance.toml")
        if not isinstance(path, Path) or not path.is_file():
            return {}, "finance.toml", []
        data, problems = read_toml_file(path, path.name)
        if not data and not has_errors(problems) and _blank_file(path):
            # (emptied by a failed save or a sync: the defaults would replace the organisation's rate and budget)
            problems.append(error(path.name, None, None, None, "the file is empty: it holds no finance assumptions",
                                  "write the case's assumptions (docs/finance.md lists the keys), or delete the file to "
                                  "run on the program's defaults"))
        return data, path.name, problems
    if raw.kind == "workbook":
        return dict(raw.extra.get("finance", {})), f"{raw.path.name}:finance", []
    return {}, "finance.toml", []


def _blank_file(path: Path) -> bool:
    """Whether a text file holds nothing but white space (an unreadable one: False, its reading says why)."""
    try:
        return not path.read_bytes().removeprefix(b"\xef\xbb\xbf").strip()  # (a byte-order mark alone is blank too)
    except OSError:
        return False


def read_default_options() -> tuple[RawTable, list[Problem]]:
    """Read the default options catalogue shipped in ``data/defaults/options.csv`` (illustrative prices)."""
    raw, problems = read_csv_table(DEFAULT_OPTIONS_PATH, "options")
    return RawTable("options", "default options catalogue", raw.frame, raw.rows, raw.headers, raw.readable), problems


def _not_a_case(path: Path) -> str:
    """Explain why a path is not a case, by what it is."""
    suffix = path.suffix.lower()
    if suffix in (".csv", ".tsv", ".txt", ".parquet"):
        return f"is one file, not a case; give the folder that holds the case's tables ({path.parent})"
    if suffix == ".xls":
        return "is an old-format Excel workbook (.xls); open it in a spreadsheet program and save it as .xlsx"
    if suffix == ".ods":
        return "is an OpenDocument spreadsheet; save it as .xlsx"
    if suffix == ".zip":
        return "is a zip archive; unpack it and give the folder"
    if suffix == ".toml":
        return f"is a settings file; give the folder that holds it ({path.parent})"
    return "is neither a folder nor an .xlsx workbook"


def read_case_files(path: str | Path) -> RawCase:
    """Read a case (folder or ``.xlsx`` workbook) without validating it.

    Parameters
    ----------
    path : str or pathlib.Path
        A case folder, or a workbook file ending in ``.xlsx`` (or ``.xlsm``; macros are never run).

    Returns
    -------
    RawCase
        The tables as read plus any problems met while reading (a missing case, an unreadable file,
        a missing required table). Reading never raises for bad input.
    """
    try:
        path = Path(path)
        is_dir, is_file = path.is_dir(), path.is_file()
    except (OSError, ValueError, TypeError) as exc:
        case = RawCase(path=Path("."), kind="missing")
        case.problems.append(error(str(path), None, None, None, f"the case path cannot be used ({exc.__class__.__name__}: {exc})",
                                   "give a case folder or a .xlsx workbook"))
        return case
    if is_dir:
        case = read_folder(path)
    elif is_file and path.suffix.lower() in WORKBOOK_SUFFIXES:
        case = read_workbook(path)
    else:
        case = RawCase(path=path, kind="missing")
        what = "does not exist" if not path.exists() else _not_a_case(path)
        case.problems.append(error(str(path), None, None, None, f"the case {what}",
                                   "give a case folder or a .xlsx workbook; 'drivecase new DIR' writes a blank one"))
        return case
    if case.kind == "folder" and not case.tables and not has_errors(case.problems):
        try:
            held = sorted(p.name for p in path.iterdir())
        except OSError:
            held = []
        books = [n for n in held if n.lower().endswith(WORKBOOK_SUFFIXES)]
        hint = (f"the folder holds the workbook {books[0]}: give its path as the case" if books else
                f"the folder holds {', '.join(held[:6]) + (' ...' if len(held) > 6 else '') if held else 'nothing'}; "
                "'drivecase new DIR' writes a blank case")
        case.problems.append(error(str(path), None, None, None,
                                   "the folder holds no case tables (no assets.csv, sites.csv ...)", hint))
        return case
    for table in REQUIRED_TABLES:
        if table not in case.tables and not (case.kind == "workbook" and has_errors(case.problems) and not case.tables):
            where = f"{table}.csv" if case.kind == "folder" else f"{path.name}:{table}"
            case.problems.append(error(where, None, None, None, MISSING_TABLE_RULE.format(table=table),
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
# Whose minimum-efficiency rules apply to new motors: "EU", "US", "CN" or "OTHER".
region = "EU"
# Month (1-12) at whose start the changes come into service; under a demand ratchet the first years'
# savings depend on it. Left out: the analysis year's first month, January.
# in_service_month = 4
"""

#: The example tariff a new case folder starts with (an invented one from data/tariffs, to replace).
BLANK_CASE_TARIFF = "example_tou_kw_reactive_ratchet.toml"
#: Its file name in a new workbook (sheet "tariff example.toml": a sheet's name has at most 31 characters).
BLANK_WORKBOOK_TARIFF = "example.toml"

TABLE_NOTES: dict[str, str] = {
    "assets": "Asset register: one row per motor.",
    "sites": "Sites: one row per utility meter.",
    "capacitors": "Existing capacitor banks (optional).",
    "profiles": "Interval load profiles (optional), long format: one row per profile and interval; 15, 30 or 60 min.",
    "duty": "Duty tables (optional): load points and hours per year.",
    "options": "Options catalogue (optional; without it the default catalogue is used): technologies and cost models.",
    "bill_history": "Bill history (optional): one row per site and billing month, as the utility billed it, to set "
                    "today's fleet as modelled beside it.",
    "verification": "Savings verification (optional): energy measured on a motor before its project (baseline) and "
                    "after it (reporting), to set the savings achieved beside the savings predicted.",
}


def column_title(table: str, column: str) -> str:
    """The words a reader knows a case column by: the first clause of its description in the schema (the
    text the template's comment line gives it) and its unit.

    Parameters
    ----------
    table : str
        One of :data:`CASE_TABLES`.
    column : str
        Our column name, e.g. ``rated_efficiency_pct``.

    Returns
    -------
    str
        E.g. "Nameplate full-load efficiency [%]"; the column name itself for a column the schema does not hold.

    Examples
    --------
    >>> column_title("assets", "rated_efficiency_pct"), column_title("assets", "start_duty")
    ('Nameplate full-load efficiency [%]', 'Starting duty')
    >>> column_title("assets", "no_such_column")
    'no_such_column'
    """
    return _column_titles(table).get(str(column), str(column))


@lru_cache(maxsize=None)
def _column_titles(table: str) -> dict[str, str]:
    titles = {}
    for row in read_schema(table).itertuples(index=False):
        words = _first_clause(row.description) or row.name
        titles[row.name] = words + ("" if row.unit == "-" else f" [{row.unit}]")
    return titles


def _first_clause(text: str) -> str:
    """A description up to its first full stop, colon or semicolon outside brackets ("Starting duty: light
    (pumps, ..." gives "Starting duty"; "Mean load (lighting; fans)." gives "Mean load (lighting; fans)")."""
    text, depth = str(text).strip(), 0
    for i, char in enumerate(text):
        depth += (char == "(") - (char == ")")
        if depth == 0 and char in ".:;" and (i + 1 == len(text) or text[i + 1].isspace()):
            return text[:i].strip()
    return text


def _template_comments(table: str) -> list[str]:
    schema = read_schema(table)
    lines = [f"# {TABLE_NOTES[table]} Lines starting with # are ignored; delete them or keep them."]
    for row in schema.itertuples(index=False):
        unit = "" if row.unit == "-" else f" [{row.unit}]"
        need = ("required" if row.required == "yes" else "optional" if row.required == "no"
                else "required " + row.required.removeprefix("yes, ") if row.required.startswith("yes, when")
                else row.required)
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
    if target.is_symlink() and not target.exists():  # a link to nothing: a folder cannot be made there
        raise ValueError(f"{target} is a link to {os.readlink(target)}, which does not exist; give a new folder, "
                         "or the folder the link should point to")
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
        path = target / f"{table}.csv"
        if table == "options":  # the shipped catalogue to edit (illustrative prices, said in its first line)
            path.write_text(DEFAULT_OPTIONS_PATH.read_text(encoding="utf-8"), encoding="utf-8")
        else:
            schema = read_schema(table)
            path.write_text("\n".join(_template_comments(table) + [",".join(schema["name"])]) + "\n", encoding="utf-8")
        written.append(path)
    from models.finance import finance_template

    (target / "finance.toml").write_text(finance_template(), encoding="utf-8")
    written.append(target / "finance.toml")
    example = DATA_DIR / "tariffs" / BLANK_CASE_TARIFF
    tariff = target / "tariffs" / BLANK_CASE_TARIFF
    tariff.write_text("# An invented example tariff: replace it with your utility's (docs/tariffs.md), and name the file\n"
                      "# in sites.csv's tariff_file column.\n" + example.read_text(encoding="utf-8"), encoding="utf-8")
    written.append(tariff)
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
                       ("time_zone", "Europe/Berlin"), ("region", "EU")):
        settings.append([key, value])
    for table in CASE_TABLES:
        sheet = book.create_sheet(table)
        if table == "options":  # the shipped catalogue to edit (illustrative prices, said in its first row)
            lines = DEFAULT_OPTIONS_PATH.read_text(encoding="utf-8").splitlines()
            for line in (x for x in lines if x.startswith("#")):  # comment rows whole, in column A
                sheet.append([line])
            for record in csv.reader(x for x in lines if x.strip() and not x.startswith("#")):
                sheet.append([_template_cell(v) for v in record])
            header_row = next(r for r in range(1, sheet.max_row + 1) if not str(sheet.cell(r, 1).value).startswith("#"))
        else:
            sheet.append(list(read_schema(table)["name"]))
            header_row = 1
        for cell in sheet[header_row]:
            cell.font = Font(bold=True)
    from models.finance import finance_template

    # the finance assumptions as the folder form's finance.toml holds them: one key per row, its note beside it
    finance = book.create_sheet("finance")
    finance.append(["key", "value", "note"])
    for line in finance_template().splitlines():
        if not line.strip():
            continue
        if line.startswith("#"):
            finance.append([line])
            continue
        key, rest = line.split("=", 1)
        value, _, note = rest.partition("  # ")
        value = value.strip()
        finance.append([key.strip(), _template_cell(value) if not value.startswith(("[", '"')) else value.strip('"'),
                        note.strip()])
    for cell in finance[1]:
        cell.font = Font(bold=True)
    tariff = book.create_sheet(f"tariff {BLANK_WORKBOOK_TARIFF}")
    tariff.append(["# An invented example tariff: replace it with your utility's (docs/tariffs.md), one line of the "
                   "file per row; name it in the sites sheet's tariff_file column."])
    for line in (DATA_DIR / "tariffs" / BLANK_CASE_TARIFF).read_text(encoding="utf-8").splitlines():
        tariff.append([line])
    path.parent.mkdir(parents=True, exist_ok=True)
    book.save(path)
    return path


def _template_cell(text: str) -> object:
    """A cell of a template written into a workbook: a number as a number, other text as it is."""
    try:
        number = float(text)
    except ValueError:
        return text
    if text.strip().lower() in ("nan", "inf", "-inf", "infinity", "-infinity"):
        return text
    return int(number) if number.is_integer() and "." not in text and "e" not in text.lower() else number


# ---------------------------------------------------------------------------------------------------
# Saving finance assumptions into a case (the one write into an existing case, on the user's request)
# ---------------------------------------------------------------------------------------------------
#: Folder inside a case folder where earlier ``finance.toml`` files are kept (the reader skips folders).
VERSIONS_DIR = ".versions"
#: Ending of the folder beside a workbook case where earlier copies of the workbook are kept.
WORKBOOK_VERSIONS_SUFFIX = ".versions"
#: Significant decimal digits of the numbers written: the digits a binary64 float always keeps
#: (``DBL_DIG`` = 15, ISO/IEC 9899:2018 5.2.4.2.2), so 7.1 / 100 is written 0.071, not 0.07099999999999999.
SAVED_FLOAT_DIGITS = 15
#: First line of a ``finance.toml`` that saving creates.
FINANCE_TOML_HEADER = "# drivecase finance assumptions (every key, unit and default: docs/finance.md).\n"
#: Parts of an .xlsx package that a rewrite by the spreadsheet library would drop; a workbook holding
#: any of them is not saved into (its finance sheet is then edited in a spreadsheet program).
_PARTS_NOT_KEPT: tuple[tuple[str, str], ...] = (
    ("xl/drawings/", "charts, images or shapes"), ("xl/charts/", "charts"), ("xl/media/", "images"),
    ("xl/pivotTables/", "pivot tables"), ("xl/pivotCache/", "pivot tables"),
    ("xl/externalLinks/", "links to other workbooks"), ("xl/vbaProject.bin", "macros"),
)

SaveOutcome = Literal["saved", "unchanged", "refused", "failed"]
#: One save at a time in this process (the dashboard serves several tabs from threads).
_SAVE_LOCK = threading.Lock()


@dataclass(frozen=True)
class SavedCase:
    """What :func:`save_finance_settings` did.

    Attributes
    ----------
    outcome : {"saved", "unchanged", "refused", "failed"}
        ``saved``: the file was replaced and the case reloads with the new values. ``unchanged``: the case
        already holds these values; nothing was written. ``refused``: a check failed before anything was
        written. ``failed``: writing or the reload check failed and the case was put back as it was.
    case_path : pathlib.Path
        The case as given (folder or workbook).
    written : pathlib.Path or None
        The file that holds the finance values (``finance.toml`` or the workbook), once it is known.
    previous : pathlib.Path or None
        Where the file as it was before the save is kept; None when there was no file or nothing was kept.
    changes : tuple of (str, object, object)
        Each key written, with the case's value before and the value saved (rates as fractions).
    problems : tuple of Problem
        Why the save was refused or failed (empty after ``saved`` and ``unchanged``).
    case : models.case.Case or None
        The case as reloaded after ``saved`` (None otherwise).
    """

    outcome: SaveOutcome
    case_path: Path
    written: Path | None = None
    previous: Path | None = None
    changes: tuple[tuple[str, object, object], ...] = ()
    problems: tuple[Problem, ...] = ()
    case: object = field(default=None, repr=False, compare=False)

    @property
    def ok(self) -> bool:
        """True when the case now holds the assumptions (saved, or already held them)."""
        return self.outcome in ("saved", "unchanged")

    def summary(self) -> str:
        """One line for the user: what was written where and where the previous version is kept, or why not."""
        name = self.written.name if self.written is not None else str(self.case_path)
        if self.outcome == "unchanged":
            return f"Nothing to save: {name} already holds these assumptions."
        if self.outcome == "saved":
            shown = "; ".join(f"{k} {_shown(old)} -> {_shown(new)}" for k, old, new in self.changes)
            kept = (f"The previous version is kept as {self.previous.relative_to(self.written.parent).as_posix()}."
                    if self.previous is not None else f"There was no {name} before; it was created.")
            return f"Saved {counted(len(self.changes), 'value')} into {name} ({shown}). {kept}"
        first = self.problems[0] if self.problems else None
        why = f"{first.location()}: {first.rule}" + (f". {first.hint}" if first.hint else "") if first else "unknown reason"
        tail = " The case was put back as it was." if self.outcome == "failed" else " Nothing was written."
        return f"Not saved ({why}).{tail}"


@dataclass(frozen=True)
class _Place:
    """Where a save goes: the file written, the folder of kept versions, the name shown in problems."""

    kind: str
    target: Path
    versions: Path
    source: str


def save_finance_settings(case_path: str | Path, assumptions: object, *,
                          now: _dt.datetime | None = None) -> SavedCase:
    """Write finance assumptions into a case: only the keys that differ, atomically, keeping the previous file.

    Parameters
    ----------
    case_path : str or pathlib.Path
        A case folder (its ``finance.toml`` is changed, or created) or an ``.xlsx`` workbook (its
        ``finance`` sheet is changed, or added).
    assumptions : models.finance.FinanceAssumptions or mapping
        Either the whole set the case should hold (every field whose value differs from the case's is
        written), or a mapping of keys from docs/finance.md to new values as a TOML file holds them
        (rates as fractions, ``budget_per_yr`` as a list [currency]); only those keys change.
    now : datetime.datetime, optional
        Time-zone aware time that names the kept version, written in UTC (default: the current time).

    Returns
    -------
    SavedCase
        The outcome, the file written, the kept previous version, the changes, or the problems that
        stopped the save. File-system trouble never raises: it is a ``refused`` or ``failed`` outcome.

    Raises
    ------
    ValueError
        When the assumptions are refused by :class:`models.finance.FinanceAssumptions` (an unknown key,
        a value out of range) or ``now`` has no time zone. Nothing is written.

    Notes
    -----
    The steps, under a process-wide lock:

    1. Refuse a case that is missing, read-only (no write permission bit, or no write access), a
       macro-enabled or formula-holding workbook, or whose finance file is a link to a file outside the
       case; refuse a case that does not load (the errors are returned).
    2. Compare the new values with the case's (file values, or defaults where the file has no key);
       keys that differ are changed in place with their comments, order and layout kept (TOML through
       ``tomlkit``; a workbook cell through ``openpyxl``); keys the file lacks are added.
    3. Copy the file as it was to ``<case>/.versions/finance-<UTC stamp>.toml`` (a workbook to
       ``<book>.xlsx.versions/<book>-<UTC stamp>.xlsx``), created exclusively so no kept version is
       ever overwritten (a second save within the same second gets ``_002``, ``_003``...; the names sort
       in time order).
    4. Write the new content to a temporary file in the same folder, flush and fsync it, and rename it
       over the old file (:func:`models.exports.atomic_write_bytes`): a rename within one file system
       replaces the file in one step [1]_.
    5. Reload the case (:func:`models.case.load_case`): unless it loads, reads back the saved values and
       leaves every other table and setting as before (a workbook's other sheets and settings read as before;
       the other files a folder's case reads with the content, sizes and modification times they had, as the
       save writes none of them, a long profile table by size and time, not read again for it), the previous
       content is written back the same way and the outcome is ``failed``. An exception at any step, even an
       interrupt, puts the previous content back before it propagates.

    Warnings
    --------
    There is no lock against another program editing the same case at the same moment; a power loss
    after step 4 leaves the new file in place and the old one under the versions folder.

    References
    ----------
    .. [1] IEEE and The Open Group, "rename," in *IEEE Std 1003.1-2017 (POSIX.1-2017), System
       Interfaces*, 2018.
    .. [2] T. Preston-Werner et al., "TOML v1.0.0," 2021. [Online]. Available: https://toml.io/en/v1.0.0
    """
    if now is None:
        now = _dt.datetime.now(_dt.timezone.utc)
    elif not isinstance(now, _dt.datetime) or now.utcoffset() is None:
        raise ValueError("now must be a time-zone aware datetime, e.g. datetime.now(timezone.utc)")
    stamp = now.astimezone(_dt.timezone.utc).strftime("%Y%m%dT%H%M%SZ")
    with _SAVE_LOCK:
        return _save_finance(Path(case_path), assumptions, stamp)


def _save_finance(path: Path, assumptions: object, stamp: str) -> SavedCase:
    from models.case import load_case  # models.case imports this module
    from models.finance import FinanceAssumptions

    place, problems = _save_place(path)
    if place is None:
        return SavedCase("refused", path, problems=tuple(problems))
    before, found = load_case(path)
    if before is None or before.finance is None:
        return SavedCase("refused", path, place.target, problems=(
            error(str(path), None, None, None, "the case has errors, so nothing was saved into it",
                  "fix the errors listed (drivecase check shows them) and save again"),
            *[p for p in found if p.severity == "error"]))
    current = before.finance
    del before  # (only its finance is compared: a large case is not held while it is read again below)
    new = _assumptions_to_save(current, assumptions, place.source)
    changes = tuple((name, getattr(current, name), getattr(new, name))
                    for name in FinanceAssumptions.__dataclass_fields__
                    if not _same_value(getattr(current, name), getattr(new, name)))
    if not changes:
        return SavedCase("unchanged", path, place.target)
    try:
        original = place.target.read_bytes() if place.target.exists() else None
        mode = stat.S_IMODE(place.target.stat().st_mode) if original is not None else None
    except OSError as exc:
        return SavedCase("refused", path, place.target, problems=(_os_problem(place.source, "read", exc),))
    if place.kind == "workbook":
        why = _workbook_not_rewritable(original or b"")
        if why:
            return SavedCase("refused", path, place.target, problems=(
                error(place.target.name, None, None, None, f"the workbook holds {why}, which saving it again would lose",
                      "change the finance sheet in a spreadsheet program, or save the case as a folder"),))
    try:
        data = (_finance_sheet_bytes(original or b"", changes) if place.kind == "workbook"
                else _finance_toml_bytes(original, changes, place.source))
    except Exception as exc:  # tomlkit or openpyxl met something the reader accepted; never a traceback
        return SavedCase("refused", path, place.target, problems=(
            error(place.source, None, None, None, f"the file cannot be edited ({exc.__class__.__name__}: {exc})",
                  "change the values in a text editor or spreadsheet program"),))
    # what the save must leave as it was: a workbook's other sheets and settings, read; the other files a folder's
    # case reads, by content, size and time (the save writes none of them: a large profile table is not read again)
    raw_before = read_case_files(path) if place.kind == "workbook" else _other_files(path, place.target)
    previous = None
    if original is not None:
        try:
            previous = _keep_version(place.versions, place.target, original, stamp, mode)
        except OSError as exc:
            return SavedCase("refused", path, place.target, problems=(_os_problem(
                str(place.versions), "keep the previous version in", exc),))
    try:
        from models.exports import atomic_write_bytes

        atomic_write_bytes(place.target, data)
        if mode is not None and stat.S_IMODE(place.target.stat().st_mode) != mode:
            os.chmod(place.target, mode)
        _fsync_dir(place.target.parent)
        after, found_after = load_case(path)
        raw_after = read_case_files(path) if place.kind == "workbook" else _other_files(path, place.target)
        trouble = _saved_case_trouble(raw_before, raw_after, after, found_after, new, place.source)
    except Exception as exc:
        after, trouble = None, [error(place.source, None, None, None,
                                      f"saving failed ({exc.__class__.__name__}: {exc})",
                                      "check the disk space and the permissions of the case folder")]
    except BaseException:  # an interrupt: put the old file back, then let it stop the program
        if _put_back(place.target, original, mode) is None:
            _drop(previous)
        raise
    if not trouble:
        return SavedCase("saved", path, place.target, previous, changes, (), after)
    back = _put_back(place.target, original, mode)
    if back is None:
        _drop(previous)
        previous = None
    else:
        trouble = [back] + trouble
    return SavedCase("failed", path, place.target, previous, changes, tuple(trouble))


def save_target(case_path: str | Path) -> tuple[Path, Path, str] | None:
    """Where :func:`save_finance_settings` would write a case's assumptions, for a front to ask before it saves.

    Parameters
    ----------
    case_path : str or pathlib.Path
        A case folder or ``.xlsx`` workbook.

    Returns
    -------
    tuple or None
        The file written (a folder's ``finance.toml``, a link to it followed, or the workbook), the folder its
        present version is kept in, and its kind (``"folder"`` or ``"workbook"``); None where nothing could be
        saved (the save then says why).
    """
    place, _ = _save_place(Path(case_path))
    return None if place is None else (place.target, place.versions, place.kind)


def _save_place(path: Path) -> tuple[_Place | None, list[Problem]]:
    """Find the file a save writes and the versions folder; refuse links out of the case and read-only places."""
    def refuse(file: str, rule: str, hint: str) -> tuple[None, list[Problem]]:
        return None, [error(file, None, None, None, rule, hint)]

    try:
        is_dir, is_file = path.is_dir(), path.is_file()
        if is_dir:
            root = path.resolve(strict=True)
            files, problems = _folder_files(root)
            if problems:
                return None, problems
            given = files.get("finance.toml", root / "finance.toml")
            if given.is_symlink():
                real = given.resolve()
                if not real.is_relative_to(root) or not real.is_file():
                    return refuse(given.name, f"{given.name} is a link to {real}, outside the case or missing; "
                                  "drivecase does not write through it", "replace the link by the file itself")
                given = real
            elif given.exists() and not given.is_file():
                return refuse(given.name, f"{given.name} is not a file", "rename or remove it")
            place = _Place("folder", given, root / VERSIONS_DIR, given.name)
        elif is_file and path.suffix.lower() == ".xlsx":
            real = path.resolve(strict=True)
            if path.is_symlink() and real.parent != path.parent.resolve():
                return refuse(path.name, f"the workbook is a link to {real}, in another folder; drivecase does not "
                              "write through it", "give the workbook itself as the case")
            place = _Place("workbook", real, real.parent / f"{real.name}{WORKBOOK_VERSIONS_SUFFIX}", f"{real.name}:finance")
        elif is_file and path.suffix.lower() in WORKBOOK_SUFFIXES:
            return refuse(path.name, "drivecase saves only into .xlsx workbooks, never into a macro-enabled one",
                          "change the finance sheet in a spreadsheet program, or save the case as .xlsx")
        else:
            what = "does not exist" if not path.exists() else _not_a_case(path)
            return refuse(str(path), f"the case {what}", "give a case folder or a .xlsx workbook")
        versions = place.versions
        if versions.is_symlink() or (versions.exists() and not versions.is_dir()):
            return refuse(str(versions), f"'{versions.name}' is a link or a file, not a folder; earlier versions are "
                          "kept in a folder of that name", "rename or remove it")
        if _read_only(place.target.parent, folder=True):
            return refuse(str(place.target.parent), "the case folder is read-only, so nothing can be saved into it",
                          "save into a writable copy of the case, or make the folder writable")
        if place.target.exists() and _read_only(place.target):
            return refuse(place.target.name, f"{place.target.name} is read-only, so it is not changed",
                          "make the file writable, or save into a copy of the case")
        if versions.exists() and _read_only(versions, folder=True):
            return refuse(str(versions), f"'{versions.name}' is read-only, so the previous version cannot be kept",
                          "make the folder writable")
    except (OSError, RuntimeError) as exc:  # RuntimeError: a symbolic-link loop in resolve()
        return None, [_os_problem(str(path), "inspect", exc)]
    return place, []


def _read_only(path: Path, folder: bool = False) -> bool:
    """True when a file or folder refuses writes: no write bit at all (honoured even for an administrator,
    who could write anyway), or no write access for this process."""
    need = os.W_OK | (os.X_OK if folder else 0)
    return not stat.S_IMODE(path.stat().st_mode) & 0o222 or not os.access(path, need)


def _os_problem(file: str, doing: str, exc: BaseException) -> Problem:
    why = getattr(exc, "strerror", None) or f"{exc.__class__.__name__}: {exc}"
    return error(file, None, None, None, f"drivecase could not {doing} it ({why})",
                 "check that the case exists, that you may write to it and that the disk has space")


def _assumptions_to_save(current, assumptions: object, source: str):
    """The full set of assumptions to save: given whole, or the current set with a mapping's keys changed."""
    from models.finance import FinanceAssumptions

    if isinstance(assumptions, FinanceAssumptions):
        return assumptions
    if not isinstance(assumptions, Mapping):
        raise ValueError(f"assumptions must be FinanceAssumptions or a mapping of finance keys, got "
                         f"{type(assumptions).__name__}")
    names = FinanceAssumptions.__dataclass_fields__
    unknown = sorted(str(k) for k in assumptions if k not in names)
    if unknown:
        raise ValueError(f"unknown finance {'key' if len(unknown) == 1 else 'keys'} {', '.join(unknown)}; the keys are "
                         "listed in docs/finance.md")
    data = {name: getattr(current, name) for name in names}
    data.update(assumptions)
    new, problems = FinanceAssumptions.from_dict(data, source=source)
    if new is None:
        raise ValueError("; ".join(f"{p.column}: {p.rule}" for p in problems if p.severity == "error"))
    return new


def _same_value(a: object, b: object) -> bool:
    """Equal values, floats within 1e-12 relative (the rounding of the digits written is 1e-15)."""
    if isinstance(a, (tuple, list)) or isinstance(b, (tuple, list)):
        return (isinstance(a, (tuple, list)) and isinstance(b, (tuple, list)) and len(a) == len(b)
                and all(_same_value(x, y) for x, y in zip(a, b)))
    numbers = (int, float)
    if isinstance(a, numbers) and isinstance(b, numbers) and not isinstance(a, bool) and not isinstance(b, bool):
        if math.isnan(a) or math.isnan(b):
            return math.isnan(a) and math.isnan(b)
        return a == b or math.isclose(a, b, rel_tol=1e-12, abs_tol=0.0)
    return a == b


def _file_number(value: float | int) -> float | int:
    """A number as written: whole amounts in a list as integers, others to :data:`SAVED_FLOAT_DIGITS` digits."""
    if isinstance(value, bool) or isinstance(value, int) or not math.isfinite(value):
        return value
    return float(f"{value:.{SAVED_FLOAT_DIGITS}g}")


def _toml_value(value: object) -> object:
    if isinstance(value, (tuple, list)):
        return [int(v) if float(v).is_integer() and abs(v) < 2 ** 53 else _file_number(float(v)) for v in value]
    if isinstance(value, float):
        return _file_number(value)
    return value


def _sheet_value(value: object) -> object:
    """A value as a workbook cell holds it: numbers as numbers, a list as its TOML text, infinity as text."""
    if isinstance(value, (tuple, list)):
        return "[" + ", ".join(repr(v) for v in _toml_value(value)) + "]"
    if isinstance(value, float) and not math.isfinite(value):
        return "inf" if value > 0 else "-inf"
    return _toml_value(value)


def _shown(value: object) -> str:
    if isinstance(value, (tuple, list)):
        return "[" + ", ".join(f"{v:g}" for v in value) + "]"
    if isinstance(value, float):
        return f"{_file_number(value):g}" if math.isfinite(value) else str(value)
    return str(value)


def _finance_toml_bytes(original: bytes | None, changes, source: str) -> bytes:
    """The finance file with only the changed keys rewritten (comments, order, quotes and line ends kept)."""
    import tomlkit

    if original is None:
        text = FINANCE_TOML_HEADER
    else:
        decoded, _problems, _codec = _decode(original, source)
        if decoded is None:
            raise ValueError("the file is not text")
        text = decoded
    newline = "\r\n" if "\r\n" in text else "\n"
    document = tomlkit.parse(text)
    table = document["finance"] if isinstance(document.get("finance"), dict) else document
    for key, _old, new in changes:
        table[key] = _toml_value(new)
    out = document.as_string()
    if newline == "\r\n":
        out = re.sub(r"(?<!\r)\n", "\r\n", out)
    return out.encode("utf-8")


def _finance_sheet_bytes(original: bytes, changes) -> bytes:
    """The workbook with only the changed keys of its ``finance`` sheet rewritten (the sheet added if absent)."""
    from openpyxl import load_workbook

    book = load_workbook(io.BytesIO(original))
    try:
        sheets = _sheet_lookup(book.sheetnames)
        if "finance" in sheets:
            sheet = book[sheets["finance"]]
        else:
            sheet = book.create_sheet("finance")
            sheet.append(["key", "value"])
        rows: dict[str, int] = {}
        for row_no, values in enumerate(sheet.iter_rows(max_col=1, values_only=True), start=1):
            first = values[0] if values else None
            if first is None or str(first).lstrip().startswith("#"):
                continue
            rows[normalise_header(first).replace(" ", "_")] = row_no  # the reader keeps the last of a key
        for key, _old, new in changes:
            if key in rows:
                sheet.cell(rows[key], 2).value = _sheet_value(new)
            else:
                sheet.append([key, _sheet_value(new)])
        out = io.BytesIO()
        book.save(out)
        return out.getvalue()
    finally:
        book.close()


def _workbook_not_rewritable(data: bytes) -> str:
    """What a workbook holds that a rewrite would lose (formulas lose their saved results), or ''."""
    if _has_formulas(data):
        return "formulas (their saved results)"
    try:
        with zipfile.ZipFile(io.BytesIO(data)) as package:
            names = package.namelist()
    except (zipfile.BadZipFile, OSError):
        return "a damaged package"
    found = sorted({what for prefix, what in _PARTS_NOT_KEPT for name in names if name.startswith(prefix)})
    return " and ".join(found)


def _keep_version(folder: Path, target: Path, data: bytes, stamp: str, mode: int | None) -> Path:
    """Copy the old content to a new, never-existing file of the versions folder; return its path."""
    folder.mkdir(exist_ok=True)
    flags = os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_BINARY", 0) | getattr(os, "O_NOFOLLOW", 0)
    for n in range(1, 1000):
        candidate = folder / f"{target.stem}-{stamp}{'' if n == 1 else f'_{n:03d}'}{target.suffix}"
        try:
            handle = os.open(candidate, flags, 0o666 if mode is None else mode)
        except FileExistsError:
            continue
        try:
            with os.fdopen(handle, "wb") as out:
                out.write(data)
                out.flush()
                os.fsync(out.fileno())
        except BaseException:
            candidate.unlink(missing_ok=True)
            raise
        _fsync_dir(folder)
        return candidate
    raise FileExistsError(f"{folder} already holds 999 versions stamped {stamp}")


def _fsync_dir(folder: Path) -> None:
    """Make a rename or a new file in ``folder`` durable (POSIX; a no-op where folders cannot be opened)."""
    try:
        handle = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(handle)
    except OSError:
        pass
    finally:
        os.close(handle)


def _put_back(target: Path, original: bytes | None, mode: int | None) -> Problem | None:
    """Restore the file as it was before the save (remove it when there was none); a problem if that fails."""
    from models.exports import atomic_write_bytes

    try:
        if original is None:
            target.unlink(missing_ok=True)
            return None
        try:
            current = target.read_bytes()
        except OSError:
            current = None
        if current != original:
            atomic_write_bytes(target, original)
        if mode is not None and stat.S_IMODE(target.stat().st_mode) != mode:
            os.chmod(target, mode)
        return None
    except Exception as exc:
        return error(target.name, None, None, None,
                     f"the previous version could not be put back ({exc.__class__.__name__}: {exc})",
                     f"copy the newest file of {target.parent} versions folder over {target.name} by hand")


def _drop(path: Path | None) -> None:
    if path is not None:
        try:
            path.unlink(missing_ok=True)
        except OSError:
            pass


def _saved_case_trouble(raw_before: RawCase | dict, raw_after: RawCase | dict, after, found_after: list[Problem], new,
                        source: str) -> list[Problem]:
    """Why a saved case must be put back: it no longer loads, reads other values, or reads other tables."""
    if after is None or after.finance is None:
        return [error(source, None, None, None, "the case no longer loads with the saved values",
                      "see the errors listed; the saved values were taken back")] + [
            p for p in found_after if p.severity == "error"]
    trouble = []
    differ = [name for name in type(new).__dataclass_fields__
              if not _same_value(getattr(after.finance, name), getattr(new, name))]
    if differ:
        trouble.append(error(source, None, ", ".join(differ), None, "the saved file reads back other values than were saved",
                             "please report this with the case files"))
    if isinstance(raw_before, dict) and raw_before != raw_after:
        changed = sorted(k for k in raw_before.keys() | raw_after.keys() if raw_before.get(k) != raw_after.get(k))
        trouble.append(error(source, None, None, None,
                             f"another file of the case changed while the finance values were saved "
                             f"({', '.join(changed[:5])})",
                             "save again once no other program is editing the case"))
    elif not isinstance(raw_before, dict) and not _same_apart_from_finance(raw_before, raw_after):
        trouble.append(error(source, None, None, None,
                             "saving changed more than the finance values (another table or setting reads differently)",
                             "change the finance values in a text editor or spreadsheet program"))
    return trouble


#: Files of a case folder a save compares by their content, not only by size and time, up to this size [bytes] (a
#: file system may keep times to 2 s only).
SAVE_DIGEST_MAX_BYTES = 64 * 2**20


def _other_files(folder: Path, target: Path) -> dict[str, tuple]:
    """The files of a case folder that reading the case reads (:func:`folder_case_files`) but ``target`` (the
    finance file a save writes), by path within the folder: each its size and modification time [ns], and the
    digest of its bytes up to :data:`SAVE_DIGEST_MAX_BYTES` (a large profile table by size and time alone)."""
    import hashlib

    state: dict[str, tuple] = {}
    for entry in folder_case_files(folder):
        try:
            if entry.resolve() == target.resolve():
                continue
            info = entry.stat()
            digest = (hashlib.sha256(entry.read_bytes()).hexdigest() if info.st_size <= SAVE_DIGEST_MAX_BYTES
                      else None)
        except OSError:
            digest, info = "unreadable", None
        state[entry.relative_to(folder).as_posix()] = (
            (int(info.st_size), int(info.st_mtime_ns), digest) if info is not None else digest)
    return state


def _same_apart_from_finance(a: RawCase, b: RawCase) -> bool:
    """True when two reads of a case agree on every table, setting and tariff."""
    if (a.kind, a.settings, a.tariffs, a.unreadable_tariffs) != (b.kind, b.settings, b.tariffs, b.unreadable_tariffs):
        return False
    if a.tables.keys() != b.tables.keys():
        return False
    for name, t in a.tables.items():
        u = b.tables[name]
        if (t.source, t.headers, t.readable) != (u.source, u.headers, u.readable):
            return False
        if not np.array_equal(np.asarray(t.rows), np.asarray(u.rows)) or not t.frame.equals(u.frame):
            return False
    return True
