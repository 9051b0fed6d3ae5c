"""The dashboard's only door to the engine: cases, cached physics and economics, uploads, and page data.

Everything the pages show comes through here. A case is read with :func:`models.case.load_case`, its
physics (:func:`models.scenario.physics`, the slow part) runs once per case and is kept in a process-level
cache keyed by the case's content hash, and :func:`models.scenario.economics` runs once per case and set
of finance assumptions (also cached). Assumption edits re-run only the economics, without the Monte Carlo;
the risk page asks for the run with risk, which is cached separately.

Each browser session keeps its own case: the session stores the case *key* (a content hash, never the
data) in the browser's session storage, and the case objects live here in a bounded cache. Uploaded files
are checked (names, suffixes, total size), written only into a folder created for the session under the
process's own temporary directory, and read with the ordinary case reader: nothing a user uploads is
unpickled, evaluated or executed.

The helpers at the end turn a result into the small tables the figure builders draw (presentation only:
selecting, labelling, unit conversion for display). Equations belong to :mod:`models`.
"""

from __future__ import annotations

import atexit
import base64
import binascii
import hashlib
import math
import os
import re
import shutil
import tempfile
import threading
import time
import unicodedata
import uuid
from collections import OrderedDict
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Callable

import numpy as np
import pandas as pd

from models import end_of_life, finance, reactive_plan, risk
from models import io as case_io
from models import scenario
from models.bill_savings import meter_and_bills, monthly_bill_table, site_setups
from models.case import default_value, load_case, power_label, rating_in_unit
from models.operation import performance_curves
from models.options import speed_remedy_name, technology_name
from models.plan import low_data_quality, option_labels, plan_capital_spent, plan_purchase_yr
from models.risk import break_even_words
from models.problems import Problem, error, has_errors, missing_table, ordered
from models.profiles import asset_loads
from models.wording import counted, money_text

#: One megabyte as the dashboard counts it (2**20 bytes) [bytes].
MB = 1024 * 1024
#: Largest upload accepted, all files of one upload together [bytes].
MAX_UPLOAD_BYTES = 50 * MB
#: Most files in one upload.
MAX_UPLOAD_FILES = 24
#: File name endings accepted in an upload.
ALLOWED_SUFFIXES: tuple[str, ...] = (".xlsx", ".csv", ".toml", ".parquet")
#: Uploaded cases held in memory at once (the case the server was started with is always kept).
MAX_UPLOADED_CASES = 4
#: Economics results held in memory at once (all cases and assumption sets together).
MAX_RESULTS = 32
#: Columns of the problem grid, in order.
PROBLEM_COLUMNS: tuple[str, ...] = ("severity", "file", "row", "column", "value", "rule", "hint")
#: Plan years shown as budget inputs.
BUDGET_YEARS = 6
#: Settings files that sit at the top of a case folder; any other TOML file is a tariff.
ROOT_TOML = ("case.toml", "finance.toml", "scenarios.toml")

_SESSION_ID = re.compile(r"^[0-9a-f]{32}$")
#: Digits grouped by thousands with commas ("1,000" or "1,000.5"), as a form's number fields take them.
_GROUPED = re.compile(r"^[+-]?\d{1,3}(,\d{3})+(\.\d+)?$")
#: A point grouping thousands ("250.000", as many write 250,000): in a money field it would read as 250
_POINT_GROUPED = re.compile(r"^[+-]?\d{1,3}(\.\d{3})+$")
_SAFE_NAME = re.compile(r"^[A-Za-z0-9][A-Za-z0-9 ._()+-]{0,119}$")


# ---------------------------------------------------------------------------------------------------
# Cases and their content keys
# ---------------------------------------------------------------------------------------------------
def _plan_start(result) -> tuple[tuple[str, int], ...]:
    """The exact plan of a result as (project label, start year) pairs, a first plan for the next solve."""
    plan_ = getattr(result, "plan", None)
    if not isinstance(plan_, pd.DataFrame) or not {"asset_id", "option_id", "start_yr"} <= set(plan_.columns):
        return ()
    return tuple(zip(scenario.project_labels(plan_).tolist(), plan_["start_yr"].astype(int).tolist()))


@dataclass(frozen=True)
class CaseEntry:
    """A loaded case held by the server.

    Attributes
    ----------
    key : str
        Content hash of the case's files (same files, same key).
    case : models.case.Case
        The validated case.
    files : pathlib.Path
        Folder or workbook the case was read from.
    origin : {"default", "upload"}
        The case the server was started with, or a session's upload.
    owned_dir : pathlib.Path or None
        Temporary folder holding an upload's files, removed when the entry leaves the cache.
    """

    key: str
    case: object
    files: Path
    origin: str
    owned_dir: Path | None = None

    @property
    def name(self) -> str:
        """The case's display name."""
        return str(self.case.settings.name)


def case_files(path: Path) -> list[Path]:
    """Return the files a case reader would read, in a fixed order (a workbook is its own file)."""
    path = Path(path)
    if path.is_file():
        return [path]
    found = [path / name for name in ROOT_TOML if (path / name).is_file()]
    for table in case_io.CASE_TABLES:
        for suffix in (".csv", ".parquet"):
            if (path / f"{table}{suffix}").is_file():
                found.append(path / f"{table}{suffix}")
    tariffs = path / "tariffs"
    if tariffs.is_dir():
        found += sorted(p for p in tariffs.glob("*.toml") if p.is_file())
    return found


def content_key(path: Path) -> str:
    """Return the content hash of a case folder or workbook (names and bytes of its case files)."""
    path = Path(path)
    digest = hashlib.sha256()
    base = path if path.is_dir() else path.parent
    for file in case_files(path):
        name = file.name if path.is_file() else file.relative_to(base).as_posix()
        with open(file, "rb") as handle:  # (in blocks: a metered fleet's profiles are gigabytes)
            size = os.fstat(handle.fileno()).st_size
            digest.update(name.encode("utf-8") + b"\0" + str(size).encode() + b"\0")
            for block in iter(lambda: handle.read(1 << 20), b""):
                digest.update(block)
    return digest.hexdigest()[:32]


@dataclass(frozen=True)
class UploadOutcome:
    """What became of an upload.

    Attributes
    ----------
    ok : bool
        True when the upload gave a valid case that is now the session's case.
    session : str
        The session id (created when the session had none).
    key : str or None
        The new case key when ``ok``; None otherwise (the session keeps its previous case).
    message : str
        One line for the user.
    problems : list of dict
        Every problem, as rows of :data:`PROBLEM_COLUMNS` (warnings too when the upload was accepted).
    """

    ok: bool
    session: str
    key: str | None
    message: str
    problems: list[dict] = field(default_factory=list)


#: The page's own template button, as its hints name it.
TEMPLATE_BUTTON_TEXT = "Download a blank case workbook"
#: The reader's hints name the command line's template; in the dashboard they name the page's button instead.
_TEMPLATE_HINTS = (
    (re.compile(r"start from the (?:template|workbook) written by 'drivecase new[^']*'"),
     f"start from the blank case workbook that the '{TEMPLATE_BUTTON_TEXT}' button of the Case & assumptions page gives"),
    (re.compile(r"'drivecase new[^']*' writes a (?:template|blank case|blank one)"),
     f"the '{TEMPLATE_BUTTON_TEXT}' button of the Case & assumptions page gives a template (one sheet per table)"),
)


def dashboard_hint(hint):
    """A reader's hint as the dashboard shows it: a template is the page's download button, not the command line's
    ``drivecase new``. Other hints are returned as they are."""
    if not isinstance(hint, str):
        return hint
    for pattern, text in _TEMPLATE_HINTS:
        hint = pattern.sub(text, hint)
    return hint


def _problem_rows(problems: list[Problem]) -> list[dict]:
    rows = []
    for p in problems:
        d = p.as_dict()
        row = {c: d.get(c) for c in PROBLEM_COLUMNS}
        row["hint"] = dashboard_hint(row.get("hint"))
        rows.append(row)
    return rows


def missing_tables(problems: list[Problem]) -> list[tuple[str, str]]:
    """The required tables a case lacks, as (table, file) from the reader's problems, in the reader's order."""
    return [(table, str(p.file)) for p in problems if (table := missing_table(p))]


def refused_case_message(problems: list[Problem]) -> str:
    """The status line of an upload the reader refused: the missing tables first when there are any (they
    cause most of the other errors), then the count of errors."""
    n = sum(p.severity == "error" for p in problems)
    count = f"{counted(n, 'error')} in the upload; the previous case stays loaded."
    lacking = missing_tables(problems)
    if not lacking:
        return count
    names = " and ".join(f"'{t}' ({f})" for t, f in lacking)
    table = "table" if len(lacking) == 1 else "tables"
    others = n - len(lacking)
    return (f"The upload lacks the required {table} {names}: upload {'it' if len(lacking) == 1 else 'them'} with the "
            "other files, or tick 'Keep the current case's other files'. "
            + (f"{counted(n, 'error')} in the upload, {others:,} of them following from the missing {table}; "
               "the previous case stays loaded." if others else count))


def case_problem_rows(view_: "View") -> list[dict]:
    """The problems (warnings) the view's case was read with, as rows of :data:`PROBLEM_COLUMNS`."""
    return _problem_rows(list(view_.entry.case.problems or ()))


#: Most problem rows of a refused upload a tab keeps in its session storage (a few hundred kB at most: the
#: browser allows a few MB per site, and a store written past that fails).
KEPT_PROBLEM_ROWS = 1000


def refusal_to_keep(outcome: UploadOutcome, max_rows: int = KEPT_PROBLEM_ROWS) -> dict | None:
    """What a tab keeps of an upload to show again when its page opens: the refusal, or nothing.

    Parameters
    ----------
    outcome : UploadOutcome
        What became of the upload.
    max_rows : int
        Most problem rows kept.

    Returns
    -------
    dict or None
        ``{"message": str, "problems": list of dict}`` for a refused upload: its message and its problem rows
        as the upload listed them. Beyond ``max_rows`` rows the errors come first, the first ``max_rows`` are
        kept and the message says so. None for an accepted upload, which clears what the tab kept.
    """
    if outcome.ok:
        return None
    rows, message = list(outcome.problems), outcome.message
    if len(rows) > max_rows:
        rows = sorted(rows, key=lambda row: row.get("severity") != "error")[:max_rows]  # stable: errors first
        message += (f" Kept for this tab: the first {counted(max_rows, 'problem')} of {len(outcome.problems):,} "
                    "(errors first); upload the files again to list them all.")
    return {"message": message, "problems": rows}


def kept_refusal(data: object) -> dict | None:
    """The refused upload a tab keeps (see :func:`refusal_to_keep`), or None when it keeps none.

    Session storage is the browser's: anything but a message and a list of rows is taken as nothing kept.
    """
    if (isinstance(data, dict) and isinstance(data.get("message"), str) and isinstance(data.get("problems"), list)
            and all(isinstance(row, dict) for row in data["problems"])):
        return data
    return None


def check_file_name(name: object) -> tuple[str | None, Problem | None]:
    """Return the safe base name of an uploaded file, or a problem saying why it is refused.

    Path components (``/`` or ``\\``) are dropped; hidden names, odd characters and endings other than
    :data:`ALLOWED_SUFFIXES` are refused.
    """
    text = unicodedata.normalize("NFKC", str(name or "")).strip()
    base = re.split(r"[\\/]", text)[-1].strip()
    if not base or base in (".", "..") or not _SAFE_NAME.match(base):
        return None, error(base or "(no name)", None, None, text, "file name refused",
                           "use plain names such as assets.csv (letters, digits, space, . _ - ( ) +)")
    suffix = Path(base).suffix.lower()
    if suffix not in ALLOWED_SUFFIXES:
        return None, error(base, None, None, None, f"files ending in '{suffix or '(none)'}' are not accepted",
                           f"upload {', '.join(ALLOWED_SUFFIXES)} files only")
    return base, None


def place_in_case(name: str) -> tuple[str | None, Problem | None]:
    """Return where a checked file goes inside the upload folder (relative path), or a problem."""
    lower = name.lower()
    suffix = Path(lower).suffix
    if suffix == ".xlsx":
        return name, None
    if lower in ROOT_TOML:
        return lower, None
    if suffix == ".toml":
        return f"tariffs/{name}", None
    stem = Path(lower).stem
    if stem in case_io.CASE_TABLES:
        return f"{stem}{suffix}", None
    return None, error(name, None, None, None, "not a case table name",
                       "name table files after their table: " + ", ".join(f"{t}.csv" for t in case_io.CASE_TABLES)
                       + "; tariffs as <name>.toml; settings as case.toml, finance.toml and scenarios.toml")


def decode_upload(contents: object) -> tuple[bytes | None, str | None]:
    """Decode one ``data:...;base64,...`` string from the upload component; return (bytes, error text)."""
    if not isinstance(contents, str) or "," not in contents:
        return None, "the upload is not a data URL"
    head, payload = contents.split(",", 1)
    if ";base64" not in head:
        return None, "the upload is not base64-encoded"
    try:
        return base64.b64decode(payload, validate=True), None
    except (binascii.Error, ValueError):
        return None, "the upload is damaged (invalid base64)"


def encoded_size_bytes(contents: object) -> int:
    """Return the size a base64 data URL decodes to, without decoding it [bytes]."""
    if not isinstance(contents, str):
        return 0
    payload = contents.split(",", 1)[-1]
    return (len(payload) * 3) // 4


# ---------------------------------------------------------------------------------------------------
# The engine: bounded, thread-safe caches around models.scenario
# ---------------------------------------------------------------------------------------------------
def physics_within_free_memory(case, capacitor_cost_per_kvar: float):
    """The physics of a case (:func:`models.scenario.physics`) within the machine's free memory, as ``drivecase run``
    runs it: the budgets of :func:`models.estimate.memory_plan` where the defaults would not fit, else the defaults."""
    from models.estimate import memory_plan

    memory = memory_plan(case)
    return scenario.physics(case, capacitor_cost_per_kvar, budgets=memory.budgets if memory.given_up else None)


class Engine:
    """Process-level holder of cases, physics and economics, with bounded caches.

    Parameters
    ----------
    physics_fn, economics_fn : callable, optional
        The engine's stages (default :func:`models.scenario.physics` and :func:`models.scenario.economics`);
        tests pass counting wrappers.
    max_uploaded_cases : int
        Uploaded cases kept at once; the oldest unused one is dropped first.
    max_results : int
        Economics results kept at once.
    upload_root : pathlib.Path, optional
        Where session folders are created (default: a new temporary folder, removed at exit).
    """

    def __init__(self, physics_fn: Callable | None = None, economics_fn: Callable | None = None,
                 max_uploaded_cases: int = MAX_UPLOADED_CASES, max_results: int = MAX_RESULTS,
                 upload_root: Path | None = None):
        self._physics_fn = physics_fn or physics_within_free_memory
        self._economics_fn = economics_fn or scenario.economics
        self.max_uploaded_cases = int(max_uploaded_cases)
        self.max_results = int(max_results)
        self._upload_root = Path(upload_root) if upload_root else None
        self._lock = threading.RLock()
        self._inflight: dict[tuple, threading.Lock] = {}
        self._cases: OrderedDict[str, CaseEntry] = OrderedDict()
        self._physics: dict[str, object] = {}
        self._results: OrderedDict[tuple, object] = OrderedDict()
        self._last_result: dict[str, object] = {}
        self._derived: OrderedDict[tuple, object] = OrderedDict()
        self.default_key: str | None = None
        self.counts = {"physics": 0, "economics": 0}
        #: Wall-clock seconds of the latest runs of each stage (the last 50), for performance notes.
        self.timings: dict[str, list[float]] = {"physics": [], "economics": []}

    def _timed(self, stage: str, fn: Callable[[], object]) -> object:
        start = time.perf_counter()
        try:
            return fn()
        finally:
            with self._lock:
                self.counts[stage] += 1
                self.timings[stage] = (self.timings[stage] + [time.perf_counter() - start])[-50:]

    # -- cases ------------------------------------------------------------------------------------
    def set_default_case(self, path: str | Path) -> tuple[CaseEntry | None, list[Problem]]:
        """Load the case sessions see until they upload their own; return it and its problems."""
        try:
            case, problems = load_case(path)
        except Exception as exc:  # the reader reports problems; anything else must not become a traceback
            return None, [error(str(path), None, None, None, f"the case could not be read ({exc.__class__.__name__}: {exc})")]
        if case is None:
            return None, problems
        path = Path(path)
        entry = CaseEntry(content_key(path), case, path, "default")
        with self._lock:
            self._cases[entry.key] = entry
            self._cases.move_to_end(entry.key, last=False)
            self.default_key = entry.key
        return entry, problems

    def entry(self, key: str | None) -> CaseEntry | None:
        """Return the cached case of a key (None when unknown or dropped)."""
        with self._lock:
            found = self._cases.get(key) if isinstance(key, str) else None
            if found is not None and found.origin == "upload":
                self._cases.move_to_end(key)
            return found

    def default_entry(self) -> CaseEntry:
        """Return the case the server was started with."""
        entry = self.entry(self.default_key)
        if entry is None:
            raise RuntimeError("no default case: call set_default_case first")
        return entry

    def _add_upload(self, entry: CaseEntry) -> CaseEntry:
        dropped: list[CaseEntry] = []
        with self._lock:
            existing = self._cases.get(entry.key)
            if existing is not None:
                if existing.origin == "upload":
                    self._cases.move_to_end(entry.key)
                dropped_dir = entry.owned_dir
                entry = existing
            else:
                dropped_dir = None
                self._cases[entry.key] = entry
                uploads = [k for k, e in self._cases.items() if e.origin == "upload"]
                while len(uploads) > self.max_uploaded_cases:
                    old = uploads.pop(0)
                    dropped.append(self._cases.pop(old))
                    self._forget(old)
        if dropped_dir is not None:
            shutil.rmtree(dropped_dir, ignore_errors=True)
        for old in dropped:
            if old.owned_dir is not None:
                shutil.rmtree(old.owned_dir, ignore_errors=True)
        return entry

    def _forget(self, key: str) -> None:
        """Drop every cached computation of a case (lock held)."""
        self._physics.pop(key, None)
        self._last_result.pop(key, None)
        for cache in (self._results, self._derived):
            for k in [k for k in cache if k[0] == key]:
                cache.pop(k, None)

    def _remove(self, key: str) -> None:
        with self._lock:
            entry = self._cases.pop(key, None)
            self._forget(key)
        if entry is not None and entry.owned_dir is not None:
            shutil.rmtree(entry.owned_dir, ignore_errors=True)

    # -- single-flight computation ----------------------------------------------------------------
    def _once(self, cache: dict, key: tuple | str, compute: Callable[[], object], bound: int | None = None):
        with self._lock:
            if key in cache:
                if isinstance(cache, OrderedDict):
                    cache.move_to_end(key)
                return cache[key]
            gate = self._inflight.setdefault(("gate", key), threading.Lock())
        with gate:
            with self._lock:
                if key in cache:
                    return cache[key]
            try:
                value = compute()
            finally:
                with self._lock:
                    self._inflight.pop(("gate", key), None)
            with self._lock:
                cache[key] = value
                if bound is not None and isinstance(cache, OrderedDict):
                    while len(cache) > bound:
                        cache.popitem(last=False)
            return value

    def physics(self, key: str):
        """Return the physics of a case, computing it once per case."""
        entry = self.entry(key)
        if entry is None:
            raise KeyError(f"unknown case key {key!r}")

        def compute():
            return self._timed("physics", lambda: self._physics_fn(entry.case,
                                                                   float(entry.case.finance.capacitor_cost_per_kvar)))

        return self._once(self._physics, key, compute)

    def result(self, key: str, assumptions, with_risk: bool = False, precise: bool = False):
        """Return the economics of a case under assumptions (cached).

        A live ask (``precise=False``) bounds the exact plan's solve (:data:`models.scenario.LIVE_PLAN`)
        and starts it from the last plan of the same case (a budget-only change reuses the rest of the
        last result, :func:`models.scenario.economics`), so an edit answers at once; a precise ask
        (the pack, the "prove" button) solves it to :data:`models.scenario.PRECISE_PLAN`. A cached result
        at least as rich serves any ask: with risk serves without, precise serves live. The case's own
        assumptions (nothing edited) are always solved precisely: the plan shown before any edit is the one
        the capital-request pack and the command line give.
        """
        entry = self.entry(key)
        if entry is None:
            raise KeyError(f"unknown case key {key!r}")
        if not precise and assumptions == entry.case.finance:
            precise = True
        shown = None  # a result without risk under the same assumptions: its uncertainty is added to it
        with self._lock:
            for precise_ok in ((True,) if precise else (True, False)):  # a proved plan first
                for risk_ok in ((True,) if with_risk else (True, False)):
                    found = self._results.get((key, assumptions, risk_ok, precise_ok))
                    if found is not None:
                        self._results.move_to_end((key, assumptions, risk_ok, precise_ok))
                        self._remember(key, found)
                        return found
                if with_risk and shown is None and (key, assumptions, False, precise_ok) in self._results:
                    shown = (precise_ok, self._results[(key, assumptions, False, precise_ok)])
            previous = self._last_result.get(key)
        if shown is not None and getattr(shown[1], "cash_flows", None) is not None:
            # the plan another page showed under these assumptions, not a plan solved again (a live solve is
            # bounded in time, so a second one may stop at another plan)
            def enrich():
                out = self._timed("economics", lambda: scenario.with_risk(shown[1]))
                self._remember(key, out)
                return out

            return self._once(self._results, (key, assumptions, True, shown[0]), enrich, self.max_results)
        phys = self.physics(key)
        settings = scenario.PRECISE_PLAN if precise else replace(scenario.LIVE_PLAN, start=_plan_start(previous))

        def compute():
            out = self._timed("economics", lambda: self._economics_fn(entry.case, phys, assumptions, with_risk=with_risk,
                                                                      plan_settings=settings, previous=previous))
            self._remember(key, out)
            return out

        return self._once(self._results, (key, assumptions, bool(with_risk), bool(precise)), compute, self.max_results)

    def _remember(self, key: str, result) -> None:
        """Keep the result last served for a case: the next live ask starts from its plan and, when only
        the budget changes, reuses the rest of it."""
        with self._lock:
            self._last_result[key] = result

    def derived(self, key: str, name: str, args: tuple, compute: Callable[[], object]):
        """Cache a finance-independent or plan-dependent view of a case (curves, meters, loads)."""
        return self._once(self._derived, (key, name, args), compute, 64)

    # -- uploads ----------------------------------------------------------------------------------
    def upload_root(self) -> Path:
        """The process's temporary folder for session uploads (created on first use)."""
        with self._lock:
            if self._upload_root is None:
                self._upload_root = Path(tempfile.mkdtemp(prefix="drivecase-dashboard-"))
                atexit.register(shutil.rmtree, self._upload_root, True)
            self._upload_root.mkdir(parents=True, exist_ok=True)
            return self._upload_root

    def accept_upload(self, session: object, current_key: str | None, names: object, contents: object,
                      keep_other_files: bool = True) -> UploadOutcome:
        """Check, store and load an upload; on success it becomes the session's case.

        Parameters
        ----------
        session : str or None
            The session id from the browser (a new one is made when missing or malformed).
        current_key : str or None
            The session's current case; with ``keep_other_files`` its files fill in whatever the
            upload does not replace (CSV uploads onto a folder case only).
        names, contents : list of str
            File names and ``data:...;base64,...`` contents from the upload component.
        keep_other_files : bool
            Start from the current case's files (True) or from an empty folder (False).

        Returns
        -------
        UploadOutcome
            On any error the outcome is not ``ok`` and nothing changes for the session.
        """
        session = session if isinstance(session, str) and _SESSION_ID.match(session) else uuid.uuid4().hex
        names = [names] if isinstance(names, str) else list(names or [])
        contents = [contents] if isinstance(contents, str) else list(contents or [])

        def refuse(message: str, problems: list[Problem]) -> UploadOutcome:
            return UploadOutcome(False, session, None, message, _problem_rows(problems))

        if not names or len(names) != len(contents):
            return refuse("Nothing was uploaded; the previous case stays loaded.", [])
        if len(names) > MAX_UPLOAD_FILES:
            return refuse(f"Too many files ({len(names)}); at most {MAX_UPLOAD_FILES} per upload. Nothing was read; "
                          "the previous case stays loaded.", [])
        total = sum(encoded_size_bytes(c) for c in contents)
        if total > MAX_UPLOAD_BYTES:
            return refuse(f"The upload is {total / MB:.1f} MB, above the {MAX_UPLOAD_BYTES / MB:.0f} MB limit; "
                          "nothing was read.", [error("(upload)", None, None, f"{total / MB:.1f} MB",
                                                       f"uploads are limited to {MAX_UPLOAD_BYTES / MB:.0f} MB",
                                                       "split the case, or save profiles as Parquet")])
        problems: list[Problem] = []
        placed: dict[str, bytes] = {}
        for name, data_url in zip(names, contents):
            safe, problem = check_file_name(name)
            if problem is not None:
                problems.append(problem)
                continue
            where, problem = place_in_case(safe)
            if problem is not None:
                problems.append(problem)
                continue
            data, why = decode_upload(data_url)
            if data is None:
                problems.append(error(safe, None, None, None, why, "upload the file again"))
                continue
            if where.lower() in {p.lower() for p in placed}:
                problems.append(error(safe, None, None, None, "the same file was given twice", "upload it once"))
                continue
            placed[where] = data
        books = [w for w in placed if w.lower().endswith(".xlsx")]
        if books and len(placed) > 1:
            problems.append(error(books[0], None, None, None, "a workbook holds the whole case; upload it alone",
                                  "or upload CSV/TOML files without a workbook"))
        if problems:
            return refuse("The upload was refused; the previous case stays loaded.", problems)

        folder = self.upload_root() / f"session-{session}" / f"upload-{uuid.uuid4().hex[:12]}"
        folder.mkdir(parents=True)
        try:
            target = self._write_upload(folder, placed, books, current_key, keep_other_files)
            try:
                case, found = load_case(target)
            except Exception as exc:  # never a traceback: report what failed
                case, found = None, [error(target.name, None, None, None,
                                           f"the case could not be read ({exc.__class__.__name__}: {exc})")]
            if case is None or has_errors(found):
                shutil.rmtree(folder, ignore_errors=True)
                return refuse(refused_case_message(found), ordered(found))
            entry = self._add_upload(CaseEntry(content_key(target), case, target, "upload", folder))
            try:
                self.physics(entry.key)
            except Exception as exc:  # e.g. a site the tariff cannot price
                self._remove(entry.key)
                shutil.rmtree(folder, ignore_errors=True)
                return refuse("The case was read but cannot be priced; the previous case stays loaded.",
                              found + [error(target.name, None, None, None, f"the analysis failed: {exc}",
                                             "check the tariffs and sites of the case")])
        except OSError as exc:
            shutil.rmtree(folder, ignore_errors=True)
            return refuse("The upload could not be stored on the server.", [error("(upload)", None, None, None, str(exc))])
        n_warn = sum(p.severity == "warning" for p in found)
        message = (f"Loaded '{entry.name}': {counted(len(entry.case.assets), 'asset')}, {counted(len(entry.case.sites), 'site')}"
                   + (f", {counted(n_warn, 'warning')}." if n_warn else "."))
        return UploadOutcome(True, session, entry.key, message, _problem_rows(found))

    def _write_upload(self, folder: Path, placed: dict[str, bytes], books: list[str], current_key: str | None,
                      keep_other_files: bool) -> Path:
        if books:
            target = folder / books[0]
            target.write_bytes(placed[books[0]])
            return target
        base = self.entry(current_key) or (self.entry(self.default_key) if current_key is None else None)
        if keep_other_files and base is not None and base.files.is_dir():
            for file in case_files(base.files):
                relative = file.relative_to(base.files)
                (folder / relative).parent.mkdir(parents=True, exist_ok=True)
                shutil.copyfile(file, folder / relative)
        for where, data in placed.items():
            path = folder / where
            if path.parent != folder:
                path.parent.mkdir(parents=True, exist_ok=True)
            stem, suffix = Path(where).stem, Path(where).suffix.lower()
            if path.parent == folder and suffix in (".csv", ".parquet"):
                twin = folder / f"{stem}{'.parquet' if suffix == '.csv' else '.csv'}"
                twin.unlink(missing_ok=True)
            path.write_bytes(data)
        return folder


_ENGINE: Engine | None = None
_ENGINE_LOCK = threading.Lock()


def engine() -> Engine:
    """Return the process's engine, loading the demo case as default on first use."""
    global _ENGINE
    with _ENGINE_LOCK:
        if _ENGINE is None:
            _ENGINE = Engine()
        if _ENGINE.default_key is None:
            entry, problems = _ENGINE.set_default_case(case_io.DEMO_DIR)
            if entry is None:
                raise RuntimeError("the demo case does not load: " + "; ".join(str(p) for p in problems))
        return _ENGINE


def use_engine(new: Engine) -> Engine:
    """Make ``new`` the process's engine (the server and tests call this)."""
    global _ENGINE
    with _ENGINE_LOCK:
        _ENGINE = new
    return new


# ---------------------------------------------------------------------------------------------------
# Sessions and assumptions
# ---------------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class View:
    """What one session sees: its case, its assumptions, and a notice when something fell back."""

    entry: CaseEntry
    assumptions: object
    notice: str = ""

    @property
    def key(self) -> str:
        return self.entry.key

    @property
    def case(self):
        return self.entry.case

    @property
    def currency(self) -> str:
        return str(self.case.settings.currency)

    @property
    def power_unit(self) -> str:
        return "hp" if str(self.case.settings.power_unit).lower() == "hp" else "kW"

    def result(self, with_risk: bool = False, precise: bool = False):
        """The economics of this view (cached; ``precise`` proves the plan to the full-run gap)."""
        return engine().result(self.key, self.assumptions, with_risk=with_risk, precise=precise)

    def physics(self):
        """The physics of this view's case (cached)."""
        return engine().physics(self.key)


def session_entry(session: dict | None) -> tuple[CaseEntry, str]:
    """Return the session's case (the default when it has none) and a notice when its case was dropped."""
    eng = engine()
    key = session.get("case") if isinstance(session, dict) else None
    if key:
        found = eng.entry(key)
        if found is not None:
            return found, ""
        default = eng.default_entry()
        return default, (f"The case this tab uploaded is no longer held by the server (it keeps the "
                         f"{eng.max_uploaded_cases} most recent uploads); showing '{default.name}'. Upload it again.")
    return eng.default_entry(), ""


def view(session: dict | None, edits: dict | None) -> View:
    """Return the session's view: its case and the assumptions with its edits applied.

    Edits made for another case (before an upload) are ignored; edits that the finance model refuses
    leave the case's own assumptions in place and say why in the notice.
    """
    entry, notice = session_entry(session)
    base = entry.case.finance
    if isinstance(edits, dict) and edits.get("case") == entry.key:
        try:
            return View(entry, assumptions_with_edits(base, edits), notice)
        except ValueError as exc:
            notice = (notice + " " if notice else "") + f"Assumption edits not applied: {exc}"
    return View(entry, base, notice)


#: What a scenario kept in the tab is called beside the case's own (its name, then this).
KEPT_MARK = " (kept in this tab)"


def kept_scenarios(view_: View, kept) -> list[tuple[str, object]]:
    """The tab's kept scenarios of this case (others are left out), as (name, assumptions), in the order kept."""
    out = []
    for item in kept if isinstance(kept, list) else []:
        edits = item.get("edits") if isinstance(item, dict) else None
        if not isinstance(edits, dict) or edits.get("case") != view_.key:
            continue
        try:
            out.append((str(item.get("name", "")) + KEPT_MARK, assumptions_with_edits(view_.entry.case.finance, edits)))
        except (TypeError, ValueError):  # (a store entry the form never wrote)
            continue
    return out


def scenario_rows(view_: View, kept) -> pd.DataFrame:
    """The case as written, the case's own scenarios (scenarios.toml) and the tab's kept ones, side by side
    (:func:`models.comparison.compare`); each plan proven as the pack's and the command line's (so the rows of
    the case's scenarios are those of scenarios.csv) for a fleet of up to :data:`PROVEN_SCENARIO_ASSETS` motors,
    a larger one's bounded as a live edit's (each proof can take up to a minute there)."""
    from models.comparison import BASE_NAME, compare

    entry, eng = view_.entry, engine()
    precise = len(entry.case.assets) <= PROVEN_SCENARIO_ASSETS
    named = [(BASE_NAME, entry.case.finance)] + list(getattr(entry.case, "scenarios", ())) + kept_scenarios(view_, kept)
    return compare([(name, a, headline(eng.result(entry.key, a, precise=precise))) for name, a in named])


#: Largest fleet [motors] whose scenario plans the Case & assumptions page proves as the pack does.
PROVEN_SCENARIO_ASSETS = 2000


def keep_scenario(view_: View, kept, name, edits) -> tuple[list | None, str]:
    """Add the tab's assumptions in force (``view_``, made with ``edits``) as a named scenario: (the new kept
    list, or None when refused; the message)."""
    from models.comparison import BASE_NAME, MAX_NAME_CHARS, RUN_NAME, _folded

    text = str(name or "").strip()
    kept = [k for k in kept if isinstance(k, dict)] if isinstance(kept, list) else []
    taken = {n for n, _ in getattr(view_.entry.case, "scenarios", ())} | {BASE_NAME, RUN_NAME}
    taken |= {str(k.get("name", "")) for k in kept if isinstance(k.get("edits"), dict)
              and k["edits"].get("case") == view_.key}
    if not text:
        return None, "Not kept: give these assumptions a name."
    if len(text) > MAX_NAME_CHARS:
        return None, f"Not kept: a name is at most {MAX_NAME_CHARS} characters."
    alike = next((n for n in sorted(taken) if _folded(n) == _folded(text)), None)  # capitals and spaces aside
    if alike is not None:
        return None, (f"Not kept: '{text}' already names a scenario of this case." if alike == text else
                      f"Not kept: '{text}' reads as '{alike}', a scenario of this case; give it a name of its own.")
    if not isinstance(edits, dict) or edits.get("case") != view_.key or view_.assumptions == view_.entry.case.finance:
        return None, "Not kept: these are the case's own assumptions (its first row). Change a field above first."
    return kept + [{"name": text, "edits": dict(edits)}], f"Kept '{text}' for this tab: it is compared below."


def rekey_kept(kept, old_key: str | None, new_key: str | None) -> list:
    """The tab's kept scenarios after the case was saved under a new key: those of the old case follow it
    (their edits were made against its assumptions, now the saved ones; each keeps the values it was kept with)."""
    out = []
    for item in kept if isinstance(kept, list) else []:
        edits = item.get("edits") if isinstance(item, dict) else None
        if isinstance(edits, dict) and old_key and new_key and edits.get("case") == old_key:
            item = {**item, "edits": {**edits, "case": new_key}}
        out.append(item)
    return out


#: Price levels edited on screen in percent of the prices as written -> finance assumption factor.
PRICE_LEVEL_FIELDS = {"energy_price_level_pct": "energy_price_factor", "capital_cost_level_pct": "capital_cost_factor"}


def assumptions_with_edits(base, edits: dict):
    """Return the finance assumptions with the dashboard's edits (percent fields become fractions).

    Raises
    ------
    ValueError
        When the edited assumptions are refused by :class:`models.finance.FinanceAssumptions`.
    """
    changes = {}
    if edits.get("discount_rate_pct") is not None:
        changes["discount_rate_frac"] = float(edits["discount_rate_pct"]) / 100.0
    if edits.get("escalation_energy_pct") is not None:
        changes["escalation_energy_frac"] = float(edits["escalation_energy_pct"]) / 100.0
    if edits.get("horizon_yr") is not None:
        horizon = float(edits["horizon_yr"])
        if not horizon.is_integer():
            raise ValueError("horizon_yr: must be a whole number of years")
        changes["horizon_yr"] = int(horizon)
    if "budget_per_yr" in edits and edits["budget_per_yr"] is not None:
        changes["budget_per_yr"] = tuple(float(b) for b in edits["budget_per_yr"])
    for key, field_name in PRICE_LEVEL_FIELDS.items():
        if edits.get(key) is not None:
            changes[field_name] = float(edits[key]) / 100.0
    return replace(base, **changes)


def assumption_form(assumptions) -> dict:
    """Return the editable assumptions as the form shows them (percent, years, budget list)."""
    return {
        "discount_rate_pct": round(float(assumptions.discount_rate_frac) * 100.0, 6),
        "escalation_energy_pct": round(float(assumptions.escalation_energy_frac) * 100.0, 6),
        "horizon_yr": int(assumptions.horizon_yr),
        "budget_per_yr": [float(b) for b in assumptions.budget_per_yr],
        "energy_price_level_pct": round(float(assumptions.energy_price_factor) * 100.0, 6),
        "capital_cost_level_pct": round(float(assumptions.capital_cost_factor) * 100.0, 6),
    }


#: The largest capital budget the form takes for one plan year, in the case's currency: far above any real
#: fleet's budget in any currency, low enough that the figures it gives are still read as amounts (a design
#: choice of this tool, as :data:`FORM_RANGES` is).
MAX_BUDGET_PER_YR = 1e12


def typed_number(text, percent: bool = False):
    """What a finance field holds, as the form's check takes it: a float, None when blank, else the text as
    typed (then refused as not a number, in the form's words, by :func:`edit_assumptions` or :func:`parse_budget`).

    Spaces (also thin and no-break ones), underscores and apostrophes between digits are dropped and commas
    that group thousands ("1,000") are dropped; a percent field may end in "%"
    ("8 %"). A number as such (a callback called directly) is taken as it is.

    Parameters
    ----------
    text : str, float, int or None
        The field's value.
    percent : bool
        True for a field in percent [%] or [%/yr].
    """
    if text is None or (isinstance(text, (int, float)) and not isinstance(text, bool)):
        return None if text is None else float(text)
    typed = str(text).strip()
    if not typed:
        return None
    cleaned = "".join(c for c in typed if c not in " _'\u00a0\u2009\u202f")
    if percent and cleaned.endswith("%"):
        cleaned = cleaned[:-1]
    if _GROUPED.match(cleaned):
        cleaned = cleaned.replace(",", "")
    try:
        return float(cleaned)
    except ValueError:
        return typed


def budget_field(k: int, currency: str = "") -> str:
    """What the page calls the budget field of plan year ``k`` in a message (its label, with the unit)."""
    return f"Year {k} budget" + (f" [{currency}]" if currency else "")


def parse_budget(values: list, currency: str = "") -> tuple[list[float] | None, str]:
    """Parse the budget inputs (plan years 0, 1, ...); return (budget list, error text).

    Blank years after the last filled one are dropped; a blank before a filled year, a negative amount,
    an amount that is not finite or above :data:`MAX_BUDGET_PER_YR`, or text is an error, named by its
    field (with the ``currency``), the value as typed and the rule. No filled year at all means no capital
    limit (empty list).
    """
    cleaned: list[float | None] = []
    for k, v in enumerate(values or []):
        if v is None or (isinstance(v, str) and not v.strip()):
            cleaned.append(None)
            continue
        field_name, typed = budget_field(k, currency), str(v).strip()
        number = typed_number(v)
        if isinstance(v, str) and _POINT_GROUPED.match("".join(c for c in typed if c not in " _'\u00a0\u2009\u202f")):
            whole = typed.replace(".", "")
            if isinstance(number, str):
                return None, f"{field_name}: '{typed}' groups thousands with points: write {whole} (or with commas)."
            return None, (f"{field_name}: '{typed}' is ambiguous: a point grouping thousands would make it {whole}, "
                          f"a decimal point {number:,.2f}. Write the amount without a point (250000 or 250,000).")
        if isinstance(number, str):
            return None, f"{field_name}: '{typed}' is not a number (write it like 250000 or 250,000)."
        if not np.isfinite(number):
            return None, (f"{field_name}: '{typed}' is not an amount; the budget must be a finite amount "
                          "(leave the year blank for no limit).")
        if number < 0:
            return None, f"{field_name}: {typed} is below zero; the budget must be zero or more."
        if number > MAX_BUDGET_PER_YR:
            return None, (f"{field_name}: {typed} is above the largest budget the form takes, "
                          f"{money_text(MAX_BUDGET_PER_YR, currency) if currency else f'{MAX_BUDGET_PER_YR:,.0f}'} a year "
                          "(leave the year blank for no limit).")
        cleaned.append(number)
    while cleaned and cleaned[-1] is None:
        cleaned.pop()
    if any(v is None for v in cleaned):
        k = cleaned.index(None)
        return None, f"Year {k} is blank: fill every year up to the last one (0 for no spending that year)."
    return [float(v) for v in cleaned], ""


def edit_assumptions(entry_key: str, base, current: dict | None, refused: tuple[str, ...] = (),
                     **fields) -> tuple[dict | None, str]:
    """Merge new form values into a session's edits and check them; return (edits, what was refused).

    ``fields`` holds any of ``discount_rate_pct``, ``escalation_energy_pct``, ``horizon_yr``,
    ``energy_price_level_pct``, ``capital_cost_level_pct`` and ``budget_per_yr``. Each value is checked
    on its own: the valid ones are applied, and the text names every refused one ("Not applied: ...",
    with ``refused``, problems the caller found before, e.g. in the budget fields). The edits are None
    when no value could be applied (nothing changes); the text is "" when every value was.
    """
    edits = dict(current) if isinstance(current, dict) and current.get("case") == entry_key else {"case": entry_key}
    problems = list(refused)
    applied = 0
    for name, value in fields.items():
        problem = (f"{FORM_FIELDS[name]}: enter a number." if value is None or value == ""
                   else _form_field_problem(name, value)) if name in FORM_FIELDS else ""
        if problem:
            problems.append(problem + _in_force_text(name, base, edits))
            continue
        edits[name] = value
        applied += 1
    try:
        assumptions_with_edits(base, edits)
    except (TypeError, ValueError) as exc:
        return None, "Not applied: " + " ".join(problems + [str(exc)])
    text = "Not applied: " + " ".join(problems) if problems else ""
    if problems and applied:
        text += " The other values are applied."
    return (edits if applied else None), text


def _in_force_text(name: str, base, edits: dict) -> str:
    """What a refused form field leaves in force, in the form's units (" The rate in force stays 8 %.")."""
    try:
        form = assumption_form(assumptions_with_edits(base, {k: v for k, v in edits.items() if k != "case"}))
    except (TypeError, ValueError):
        return ""
    value = form.get(name)
    if value is None:
        return ""
    unit = {"discount_rate_pct": " %/yr", "escalation_energy_pct": " %/yr", "horizon_yr": " yr",
            "energy_price_level_pct": " %", "capital_cost_level_pct": " %"}.get(name, "")
    return f" It stays at {float(value):,.6g}{unit}."


#: The assumptions form's fields and their labels as the page shows them.
FORM_FIELDS = {"discount_rate_pct": "Discount rate", "escalation_energy_pct": "Energy price escalation",
               "horizon_yr": "Horizon", "energy_price_level_pct": "Electricity price level",
               "capital_cost_level_pct": "Capital cost level"}


#: What the assumptions form accepts, in its own units: wide enough for any real study, narrow enough that
#: every stage stays defined (the Monte Carlo draws the discount rate 2 points either side, and a rate
#: must stay above -100 %; a price level of a million per cent only prints meaningless figures). A design
#: choice of this tool; finance.toml itself takes the wider ranges of FinanceAssumptions.
FORM_RANGES = {"discount_rate_pct": (-20.0, 100.0), "escalation_energy_pct": (-50.0, 50.0), "horizon_yr": (1.0, 100.0),
               # the price levels' bounds in % (models.finance.PRICE_LEVEL_BOUNDS, as fractions)
               "energy_price_level_pct": tuple(100.0 * b for b in finance.PRICE_LEVEL_BOUNDS),
               "capital_cost_level_pct": tuple(100.0 * b for b in finance.PRICE_LEVEL_BOUNDS)}


def _form_field_problem(name: str, value) -> str:
    """What is wrong with one form value, in the form's own words and units ("" when nothing is); the
    ranges are those :class:`models.finance.FinanceAssumptions` accepts, in percent where the form is."""
    label = FORM_FIELDS[name]
    try:
        number = float(value)
    except (TypeError, ValueError):
        if isinstance(value, str) and re.fullmatch(r"[-+]?\d+,\d+\s*%?", value.strip()):
            return f"{label}: enter a number with a decimal point ({value.strip().replace(',', '.')})."
        return f"{label}: enter a number."
    if not math.isfinite(number):
        return f"{label}: enter a finite number."
    low, high = FORM_RANGES.get(name, (-math.inf, math.inf))
    if name in ("discount_rate_pct", "escalation_energy_pct") and not low <= number <= high:
        return f"{label}: must lie between {low:g} and {high:g} %/yr (e.g. 8 for 8 %)."
    if name == "horizon_yr" and not (number.is_integer() and low <= number <= high):
        return f"{label}: must be a whole number of years from {low:g} to {high:g}."
    if name in ("energy_price_level_pct", "capital_cost_level_pct") and not low <= number <= high:
        return f"{label}: must lie between {low:g} and {high:,g} % (100 % = as written)."
    return ""


def assumption_notes(edits: dict | None, own=None) -> str:
    """A caution about edits that are accepted but unusual ("" when there is none).

    ``own`` (the case's own :class:`models.finance.FinanceAssumptions`) stands for what the edits leave as the
    case has it: a budget of more plan years than the horizon is told whichever of the two was edited."""
    if not isinstance(edits, dict):
        return ""
    notes = [note for note in (_rate_note(edits), _budget_years_note(edits, own)) if note]
    return " ".join(notes)


def _budget_years_note(edits: dict, own) -> str:
    horizon = edits.get("horizon_yr", getattr(own, "horizon_yr", None))
    budget = edits.get("budget_per_yr", getattr(own, "budget_per_yr", None)) or ()
    if horizon is None or len(budget) <= int(horizon):
        return ""
    return (f"The budget has {counted(len(budget), 'plan year')}, more than the {counted(int(horizon), 'year')} of "
            "the horizon: a project started in a later year has no year left to save in.")


def _rate_note(edits: dict) -> str:
    rate = edits.get("discount_rate_pct")
    if rate is None:
        return ""
    rate = float(rate)
    if rate < 0.0:
        text = ("Applied. A negative discount rate values future savings above money today: check it is meant "
                "(real rates below zero do occur when inflation exceeds interest).")
        horizon = edits.get("horizon_yr")
        if horizon is not None and rate > -100.0:
            growth = (1.0 + rate / 100.0) ** -float(horizon)
            if growth > 1e3:  # the last year's flows count a thousand times or more: figures without bound
                text += (f" Over {float(horizon):g} years it counts the last year's flows {growth:,.3g} times: the "
                         "figures grow without bound.")
        return text
    if 0.0 < rate < 1.0:  # a rate typed as a fraction ("0.08" for 8 %)
        return (f"Applied as {rate:g} % a year. If you meant {rate * 100:g} %, type {rate * 100:g} (the field is "
                "in percent).")
    return ""


#: Assumptions the top bar names only where they differ from the case's own file (the discount rate, the
#: horizon and the budget are always named): (field, words, how the value is written).
EDITED_ASSUMPTIONS = (
    ("energy_price_factor", "electricity price", lambda v: f"{v * 100:,.6g} %"),
    ("escalation_energy_frac", "escalation", lambda v: f"{v * 100:,.6g} %/yr"),
    ("capital_cost_factor", "capital cost", lambda v: f"{v * 100:,.6g} %"),
)


def assumption_differences(view_: View) -> list[str]:
    """What the tab's assumptions change from the case's own file, beyond the discount rate, the horizon and
    the budget (which the top bar always names): e.g. ``["electricity price 120 %", "escalation 2 %/yr"]``."""
    own = view_.entry.case.finance
    return [f"{words} {fmt(float(getattr(view_.assumptions, name)))}"
            for name, words, fmt in EDITED_ASSUMPTIONS
            if getattr(view_.assumptions, name) != getattr(own, name)]


def edits_change(view_: View, new_edits: dict) -> bool:
    """True when ``new_edits`` would change the assumptions the view already uses."""
    try:
        return assumptions_with_edits(view_.entry.case.finance, new_edits) != view_.assumptions
    except (TypeError, ValueError):
        return True


# ---------------------------------------------------------------------------------------------------
# Presentation helpers: result -> small tables for the figure builders
# ---------------------------------------------------------------------------------------------------
def headline(result) -> dict:
    """Plan capital, yearly saving (as the plan counts it), plan NPV and CO2 avoided of the exact plan
    (:func:`models.comparison.plan_headline`)."""
    from models.comparison import plan_headline

    return plan_headline(result)


def no_option_text(result, asset_id: str) -> str:
    """Why only today's motor is offered for an asset, in words ("" when some option applies): each reason
    the catalogue's options give, with how many options it leaves out."""
    left_out = scenario.options_left_out(result, asset_id)
    if not left_out:
        return ""
    parts = [f"{reason} ({n} option{'s' if n != 1 else ''})" for reason, n in left_out]
    return ("No option of the catalogue applies to this motor, so it is kept as it is: " + "; ".join(parts) + ". "
            "A catalogue of your own (options.csv) can offer what fits it.")


def failed_text(result, asset_id: str, currency: str) -> str:
    """What the Asset page says of a motor the asset register marks as failed ("" for a running one): the
    options are counted against the least that puts it back in service now (docs/finance.md, section 4)."""
    res = result.results
    rows = res[res["asset_id"].astype(str) == str(asset_id)]
    if "failed" not in rows or not rows["failed"].astype(bool).any():
        return ""
    least = scenario.least_repair(res, asset_id)
    what = (f"{least['label']} for {money_text(float(least['capital']), currency)}" if least is not None
            else "a rewind or a new motor")
    return ("This motor has failed (asset register): every option is counted against the least that puts it back "
            f"in service now ({what}); keeping it as it is would leave it stopped.")


def in_service(view_: View, result) -> str:
    """The month the case's changes are taken to come into service, in words
    (:func:`models.pack.content.in_service_words`)."""
    from models.pack.content import in_service_words

    return in_service_words(view_.case, result)


def ratchet_text(result, asset_id: str, currency: str, in_service: str = "the analysis year's first month") -> str:
    """What the Asset page says where a demand ratchet holds back an option's first years ("" where none
    does): the largest shortfall among the asset's options, the change in service from the start of the month
    ``in_service`` names (:func:`models.pack.content.in_service_words`; docs/finance.md, section 4)."""
    res = result.results
    rows = res[res["asset_id"].astype(str) == str(asset_id)]
    if "ratchet_shortfall" not in rows or not len(rows):
        return ""
    short = rows["ratchet_shortfall"].to_numpy(dtype=float)
    i = int(np.argmax(short))
    if not short[i] > 0.5:
        return ""
    return (f"The site's demand ratchet still bills today's peaks for a while after a change (the first year in "
            f"service, longer for a look-back over 12 months): {rows['label'].iloc[i]} saves "
            f"{money_text(float(short[i]), currency)} less in all than the yearly saving shown (the NPVs and paybacks "
            f"count it within the horizon), in service from the start of {in_service}. The month moves it: a change "
            "made just before the month of today's peak holds back least (the case setting in_service_month).")


def measure_text(view_: View, result, asset_id: str) -> str:
    """What the Asset page says of the value of measuring this motor before deciding ("" where it is under one
    unit of currency): :func:`models.information.measure_first`, computed once per result."""
    from models.information import measure_first

    table = engine().derived(view_.key, "measure_first", (id(result), result.assumptions),
                             lambda: measure_first(view_.case, result))
    rows = table[table["asset_id"].astype(str) == str(asset_id)]
    if rows.empty or not rows["value_of_measuring"].iloc[0] > 1.0:
        return ""
    r = rows.iloc[0]
    return (f"Worth measuring before deciding: up to {money_text(float(r['value_of_measuring']), view_.currency)} "
            f"(rank {int(r['rank'])} of {len(table)} motors), as {r['label']}'s NPV of "
            f"{money_text(float(r['npv']), view_.currency)} rests on {r['uncertain_inputs']}. Logging kW, power factor "
            "and hours for 1-4 weeks costing less than that is worth doing first.")


def verified_text(view_: View, result, asset_id: str) -> str:
    """What the Asset page says of the savings measured after this motor's project ("" where the case's
    verification table has none): :func:`models.verification.verify_savings`, computed once per result."""
    from models.verification import verify_savings

    table = engine().derived(view_.key, "verified", (id(result), result.assumptions),
                             lambda: verify_savings(view_.case, result))
    rows = table[table["asset_id"].astype(str) == str(asset_id)]
    if rows.empty:
        return ""
    r = rows.iloc[0]
    label = option_labels(result.results).get(str(r["option_id"]), str(r["option_id"]))
    if not np.isfinite(float(r["avoided_kwh"])):
        return f"Measured for {label}: {r['finding']}."
    value = float(r["verified_value"])
    return (f"Measured after {label}: {float(r['avoided_kwh']):,.0f} kWh avoided over {float(r['reporting_days']):.0f} "
            f"days (the baseline adjusted by {r['basis']})"
            + (f", worth {money_text(value, view_.currency)}" if np.isfinite(value) else "")
            + f"; {r['finding']}.")


def _plan_buys(result, best: pd.DataFrame, bought: np.ndarray, plan_yr: np.ndarray | None = None,
               purchase_yr: np.ndarray | None = None) -> np.ndarray:
    """What the plan buys for each asset, and why nothing where it buys nothing though the best option pays;
    with the plan years and the plan years each is bought (:func:`models.plan.plan_purchase_yr`), a motor
    bought after its plan year (replaced when today's motor fails) says when."""
    status = result.plan_status or {}
    taken = set(status.get("withdrawn", ())) | set(status.get("set_aside", ()))
    label = (best["asset_id"].astype(str) + "/" + best["option_id"].astype(str)).to_numpy(dtype=object)
    pays = (best["capital"].to_numpy(dtype=float) > 0) & (best["npv"].to_numpy(dtype=float) > 0)
    op = getattr(getattr(result, "physics", None), "operation", None)
    none_fits = np.zeros(len(best), dtype=bool)
    if op is not None:  # the assets only today's motor is offered for (by id, one pass)
        only_today = pd.Series(~op.applies[:, 1:].any(axis=1), index=np.asarray(op.asset_ids, dtype=object).astype(str))
        none_fits = only_today.reindex(best["asset_id"].astype(str)).fillna(False).to_numpy(dtype=bool)
    why = np.where(np.isin(label, list(taken)), "nothing: its value is taken by the plan's other projects",
                   np.where(pays, "nothing: outside the budget",
                            np.where(none_fits, "nothing: no option of the catalogue applies (see the asset's page)", "")))
    bought = np.asarray(bought, dtype=object)
    if plan_yr is not None and purchase_yr is not None:
        later = np.flatnonzero((bought != "") & (np.nan_to_num(purchase_yr, nan=-1) > np.nan_to_num(plan_yr, nan=-1)))
        bought = bought.copy()
        for i in later:
            bought[i] = f"{bought[i]}, bought when today's motor fails (plan year {int(purchase_yr[i])})"
    return np.where(bought != "", bought, why).astype(object)


def asset_choice_text(result, asset_id: str, currency: str) -> str:
    """One line for an asset's page: its best option priced alone and what the budgeted plan buys for it
    (the plan may buy another option, or nothing: then why), as the fleet table says it ("" when the
    results hold no row for it)."""
    res = result.results
    rows = res[res["asset_id"].astype(str) == str(asset_id)]
    best = rows[rows["best_for_asset"].to_numpy(dtype=bool)]
    if best.empty:
        return ""
    top = best.iloc[0]
    if str(top["technology"]) == "existing":
        alone = "Priced alone, no option beats keeping today's motor."
    else:
        alone = f"Best option priced alone: {top['label']} (NPV {money_text(float(top['npv']), currency)})."
    plan_rows = result.plan[result.plan["asset_id"].astype(str) == str(asset_id)] if len(result.plan) else result.plan
    if len(plan_rows):
        p = plan_rows.iloc[0]
        chosen = rows[rows["option_id"] == p["option_id"]]
        name = str(chosen["label"].iloc[0]) if len(chosen) else str(p["option_id"])
        start = int(p["start_yr"])
        bought = (f"The budgeted plan buys: {name}, in plan year {start} "
                  f"(capital {money_text(float(p['capital']), currency)}).")
        purchase = int(plan_purchase_yr(plan_rows.iloc[:1], res, result.capital_spend_by_year)[0])
        if purchase > start:  # bought when today's motor fails, not when the project enters the plan
            bought = (f"The budgeted plan buys: {name}, entered in plan year {start} and bought when today's "
                      f"motor fails, expected in plan year {purchase} (capital "
                      f"{money_text(float(p['capital']), currency)}).")
    else:
        why = str(_plan_buys(result, best.iloc[:1], np.array([""], dtype=object))[0])
        bought = ("The budgeted plan buys " + why.replace("nothing: ", "nothing for it: ", 1) + "."
                  if why else "The budgeted plan buys nothing for it.")
    even = "" if str(top["technology"]) == "existing" else break_even_words(top)
    return f"{alone} {bought}" + (f" {top['label']}: {even}" if even else "")


def ranked_assets(view_: View, result, sites=None, applications=None) -> pd.DataFrame:
    """Best option per asset, ranked by NPV, with the asset's data-quality score and what the budgeted plan
    buys for it (its option, plan year and capital: the plan may choose another option than the best, or
    none)."""
    res = result.results
    best = res[res["best_for_asset"].to_numpy(dtype=bool)]
    assets = view_.case.assets.set_index("asset_id")
    planned = result.plan.set_index("asset_id") if len(result.plan) else pd.DataFrame(
        columns=["option_id", "start_yr", "capital"], index=pd.Index([], name="asset_id"))
    plan_year = planned["start_yr"]
    # the plan year its capital is spent: later than its plan year for a motor replaced when it fails
    bought_yr = pd.Series(plan_purchase_yr(result.plan, res, result.capital_spend_by_year) if len(result.plan)
                          else np.zeros(0), index=planned.index, dtype=float)
    labels = res.drop_duplicates("option_id").set_index("option_id")["label"]
    plan_option = planned["option_id"].map(labels)
    out = pd.DataFrame({
        "asset_id": best["asset_id"].to_numpy(dtype=object),
        "site_id": best["site_id"].to_numpy(dtype=object),
        "application": assets["application"].reindex(best["asset_id"]).to_numpy(dtype=object),
        # a motor that has failed says so where it is ranked (its options count over the least repair)
        "description": [f"{d or ''} (failed)".strip() if bool(f) else d for d, f in zip(
            assets["description"].reindex(best["asset_id"]).to_numpy(dtype=object),
            best["failed"].to_numpy(dtype=bool) if "failed" in best else np.zeros(len(best), dtype=bool))],
        "rating": rating_in_unit(best["rated_p_kw"].to_numpy(dtype=float), view_.power_unit),
        "best_option": best["label"].to_numpy(dtype=object),
        "option_id": best["option_id"].to_numpy(dtype=object),
        "capital": best["capital"].to_numpy(dtype=float),
        "npv": best["npv"].to_numpy(dtype=float),
        "discounted_payback_yr": np.where(best["payback_within_horizon"].to_numpy(dtype=bool),
                                          best["discounted_payback_yr"].to_numpy(dtype=float), np.nan),
        "payback_lost_again": (best["discounted_payback_lost_again"].to_numpy(dtype=bool)
                               if "discounted_payback_lost_again" in best else np.zeros(len(best), dtype=bool)),
        "saving_per_yr": (best["bill_saving_per_yr"] + best["saving_maintenance_per_yr"]).to_numpy(dtype=float),
        "co2_avoided_t_per_yr": best["co2_avoided_t_per_yr"].to_numpy(dtype=float),
        "data_quality_pct": assets["data_quality_pct"].reindex(best["asset_id"]).to_numpy(dtype=float),
        "plan_option": _plan_buys(result, best, plan_option.reindex(best["asset_id"]).fillna("").to_numpy(dtype=object),
                                  plan_year.reindex(best["asset_id"]).to_numpy(dtype=float),
                                  bought_yr.reindex(best["asset_id"]).to_numpy(dtype=float)),
        "plan_year": plan_year.reindex(best["asset_id"]).to_numpy(dtype=float),
        "plan_bought_yr": bought_yr.reindex(best["asset_id"]).to_numpy(dtype=float),
        "plan_capital": planned["capital"].reindex(best["asset_id"]).to_numpy(dtype=float),
    })
    if sites:
        out = out[out["site_id"].isin(list(sites))]
    if applications:
        out = out[out["application"].isin(list(applications))]
    out = out.sort_values("npv", ascending=False, kind="stable").reset_index(drop=True)
    out.insert(0, "rank", np.arange(1, len(out) + 1))
    return out


def site_options(view_: View, only: set | None = None) -> list[dict]:
    """Dropdown options for the case's sites (those in ``only`` when given): label 'id: name', value the id."""
    return [{"label": f"{r.site_id}: {r.site_name}" if getattr(r, "site_name", None) else str(r.site_id),
             "value": str(r.site_id)} for r in view_.case.sites.itertuples(index=False)
            if only is None or str(r.site_id) in only]


def filter_choices(view_: View) -> tuple[list[dict], list[str]]:
    """Sites (with their names) and applications of the case, for the overview filters."""
    a = view_.case.assets
    return (site_options(view_, {str(x) for x in a["site_id"].dropna().unique()}),
            sorted(a["application"].dropna().unique().tolist()))


def asset_choices(view_: View) -> list[dict]:
    """Dropdown options for every asset: label 'id: description'."""
    a = view_.case.assets
    return [{"label": f"{r.asset_id}: {r.description}" if r.description else str(r.asset_id), "value": str(r.asset_id)}
            for r in a.itertuples(index=False)]


#: How close to the best plan a live edit's plan is proven [%] (:data:`models.scenario.LIVE_PLAN`).
LIVE_PLAN_GAP_PCT = 100.0 * scenario.LIVE_PLAN.gap_frac


def performance_note(view_: View, result, asset_id: str) -> str:
    """The note under an asset's efficiency and power-factor chart: against what load the curves are drawn, and,
    for a throttled pump or fan one of whose options puts it on a drive, that the drive runs a lower load."""
    from models.options import DRIVE_TECHNOLOGIES

    note = "Against today's shaft load."
    assets = view_.case.assets.set_index("asset_id")
    res = result.results[result.results["asset_id"] == asset_id]
    if (asset_id in assets.index and str(assets.loc[asset_id, "speed_control"]) == "throttled"
            and res["technology"].isin(DRIVE_TECHNOLOGIES).any()):
        note += (" A drive that replaces the throttle runs the flow's own, lower load (flat below the zero-flow "
                 "load).")
    return note


def asset_options(view_: View, result, asset_id: str) -> pd.DataFrame:
    """Every applicable option of one asset, side by side."""
    res = result.results[result.results["asset_id"] == asset_id]
    options = view_.case.options.set_index("option_id")
    remedy = options["speed_remedy"].reindex(res["option_id"]).fillna("none").to_numpy(dtype=object)
    return pd.DataFrame({
        "option_id": res["option_id"].to_numpy(dtype=object),
        "label": res["label"].to_numpy(dtype=object),
        "technology": np.array([technology_name(t) for t in res["technology"]], dtype=object),
        "speed_remedy": np.array([speed_remedy_name(r) for r in remedy], dtype=object),
        "speed_remedy_id": remedy,
        "capital": res["capital"].to_numpy(dtype=float),
        "saving_per_yr": (res["bill_saving_per_yr"] + res["saving_maintenance_per_yr"]).to_numpy(dtype=float),
        "npv": res["npv"].to_numpy(dtype=float),
        "irr_pct": res["irr_frac"].to_numpy(dtype=float) * 100.0,
        "discounted_payback_yr": np.where(res["payback_within_horizon"].to_numpy(dtype=bool),
                                          res["discounted_payback_yr"].to_numpy(dtype=float), np.nan),
        "payback_lost_again": (res["discounted_payback_lost_again"].to_numpy(dtype=bool)
                               if "discounted_payback_lost_again" in res else np.zeros(len(res), dtype=bool)),
        "energy_kwh_per_yr": res["energy_kwh_per_yr"].to_numpy(dtype=float),
        # (in MWh as the speed and energy chart beside the table shows it)
        "energy_mwh_per_yr": res["energy_kwh_per_yr"].to_numpy(dtype=float) / 1000.0,
        "mean_speed_rpm": res["mean_speed_rpm"].to_numpy(dtype=float),
        "life_cycle_cost": res["life_cycle_cost"].to_numpy(dtype=float),
        "best": res["best_for_asset"].to_numpy(dtype=bool),
        "today": (res["technology"] == "existing").to_numpy(dtype=bool),
        "flags": res["flags"].fillna("").to_numpy(dtype=object),
        "cautions_count": np.array([len(split_cautions(f)) for f in res["flags"].fillna("")], dtype=int),
    })


def option_colour_keys(view_: View) -> list[str]:
    """The case's option ids in catalogue order, today's motor first: the keys of one colour per option.

    Built from the case's option list (not from the options one chart happens to draw), so that an option
    keeps its colour on every chart of a page. A catalogue without an 'existing' row still shows today's
    motor, as ``keep`` (:func:`asset_performance`).
    """
    options = view_.case.options
    ids = [str(x) for x in options["option_id"]]
    today = [str(x) for x in options.loc[options["technology"] == "existing", "option_id"]] or ["keep"]
    return list(dict.fromkeys(today + ids))


def split_cautions(text) -> list[str]:
    """The cautions of one project, from the text :mod:`models.scenario` joins with "; ".

    Only a separator outside brackets splits: one caution may list its own reasons in brackets, joined by
    "; " too (the line-start screen's "confirm with the supplier (load inertia ...; start load torque ...)").
    """
    parts, depth, start = [], 0, 0
    text = "" if text is None or (isinstance(text, float) and not math.isfinite(text)) else str(text)
    for k, char in enumerate(text):
        if char in "([{":
            depth += 1
        elif char in ")]}":
            depth = max(depth - 1, 0)
        elif char == ";" and depth == 0:
            parts.append(text[start:k])
            start = k + 1
    parts.append(text[start:])
    return [part.strip() for part in parts if part.strip()]


def asset_lcc(result, asset_id: str) -> pd.DataFrame:
    """Life-cycle cost of one asset's options by component, with option labels."""
    lcc = result.lcc[result.lcc["asset_id"] == asset_id]
    labels = result.results[result.results["asset_id"] == asset_id].set_index("option_id")["label"]
    return lcc.assign(label=labels.reindex(lcc["option_id"]).to_numpy(dtype=object)).reset_index(drop=True)


def asset_cumulative_cash(view_: View, result, asset_id: str) -> pd.DataFrame:
    """Cumulative discounted cash flow per option of one asset, year by year, with its payback."""
    d = float(result.assumptions.discount_rate_frac)
    horizon = int(result.assumptions.horizon_yr)
    cash = result.cashflows[result.cashflows["asset_id"] == asset_id]
    res = result.results[(result.results["asset_id"] == asset_id) & (result.results["capital"] > 0)]
    factors = finance.discount_factors(d, horizon)
    years = np.arange(horizon + 1)
    frames = []
    for row in res.itertuples(index=False):
        flows = cash[cash["option_id"] == row.option_id].groupby("year")["amount"].sum()
        net = flows.reindex(years, fill_value=0.0).to_numpy(dtype=float)
        frames.append(pd.DataFrame({
            "option_id": row.option_id, "label": row.label, "year": years,
            "cumulative_pv": np.cumsum(net * factors),
            "payback_yr": row.discounted_payback_yr if row.payback_within_horizon else np.nan}))
    return pd.concat(frames, ignore_index=True) if frames else pd.DataFrame(
        columns=["option_id", "label", "year", "cumulative_pv", "payback_yr"])


def asset_performance(view_: View, asset_id: str) -> pd.DataFrame:
    """Efficiency, power factor and kVAr against shaft load for each option of one asset (cached)."""
    eng = engine()
    curves = eng.derived(view_.key, "curves", (asset_id,), lambda: performance_curves(view_.case, asset_id))
    labels = view_.case.options.set_index("option_id")["label"]
    label = labels.reindex(curves["option_id"]).to_numpy(dtype=object)
    label = np.where(pd.isna(label), np.where(curves["option_id"] == "keep", "Keep as is", curves["option_id"]), label)
    return curves.assign(label=label, load_pct=curves["load_frac"] * 100.0)


def asset_load_hours(view_: View, asset_id: str, bin_pct: float = 10.0) -> tuple[pd.DataFrame, str]:
    """Hours per year in each band of shaft load (running hours only) and what the load is based on."""
    eng = engine()
    phys = view_.physics()
    op = phys.operation
    rows, values, is_input, states, _notes = eng.derived(view_.key, "loads", (), lambda: asset_loads(view_.case, op.index))
    pos = op.asset_position(asset_id)
    rated = float(view_.case.assets["rated_p_kw"].iloc[pos])
    hit = np.flatnonzero(rows == pos)
    if len(hit):
        k = int(hit[0])
        if is_input[k]:
            load_pct = values[k] / rated * 100.0
            basis = "measured input kW as % of the rating (interval profile)"
        else:
            load_pct = values[k] * 100.0
            basis = "shaft load (interval profile)"
        hours = np.full(load_pct.shape, float(op.interval_h))
    else:
        load_pct = states.shaft_load_frac[pos] * 100.0
        hours = states.duration_h_per_yr[pos]
        basis = "shaft load (duty table or annual hours at mean load)"
    running = (load_pct > 0) & (hours > 0)
    edges = np.arange(0.0, 130.0 + bin_pct, bin_pct)
    counts, _ = np.histogram(np.clip(load_pct[running], 0, edges[-1] - 1e-9), bins=edges, weights=hours[running])
    return pd.DataFrame({"load_from_pct": edges[:-1], "load_to_pct": edges[1:], "hours_per_yr": counts}), basis


def asset_quality(view_: View, result, asset_id: str) -> tuple[float, pd.DataFrame, pd.DataFrame]:
    """Data-quality score [%], the defaulted fields (``field`` in words, from the asset register's column
    descriptions, beside the ``column`` heading of the template, and ``score_effect``: the points each takes off
    the score, or "not scored") and the cautions raised for one asset."""
    a = view_.case.assets
    score = float(a.loc[a["asset_id"] == asset_id, "data_quality_pct"].iloc[0])
    defaults = view_.case.defaults
    defaults = defaults[defaults["asset_id"] == asset_id][["column", "value", "basis"]].reset_index(drop=True)
    defaults = defaults.assign(value=[default_text(c, v) for c, v in zip(defaults["column"], defaults["value"])]).astype(str)
    defaults.insert(0, "field", [case_io.column_title("assets", c) for c in defaults["column"]])
    # what each default takes off the score (models.defaults.QUALITY_PENALTY_PCT): some fields are not scored
    from models.defaults import QUALITY_PENALTY_PCT

    defaults["score_effect"] = [f"-{QUALITY_PENALTY_PCT[c]:g} points" if c in QUALITY_PENALTY_PCT else "not scored"
                                for c in defaults["column"]]
    res = result.results[result.results["asset_id"] == asset_id]
    rows = [{"option": r.label, "flag": text} for r in res.itertuples(index=False) for text in split_cautions(r.flags)]
    return score, defaults, pd.DataFrame(rows, columns=["option", "flag"])


#: Decimals a defaulted value is shown with, by the end of its column name (the unit suffix); the first
#: match wins. Efficiency in percent to 1 decimal is the fraction to 3 decimals, as the power factor.
DEFAULT_DECIMALS: tuple[tuple[str, int], ...] = (
    ("power_factor", 3), ("_frac", 3), ("_pu", 3), ("_pct", 1), ("_rpm", 0), ("_v", 0), ("_hz", 1),
    ("_yr", 1), ("_kw", 2), ("_kvar", 2), ("_kva", 2), ("_count", 0),
)


def default_text(column: str, value) -> str:
    """A defaulted value as the asset page shows it: rounded to what its quantity carries.

    Parameters
    ----------
    column : str
        The case column the value fills (its suffix names the unit, e.g. ``rated_speed_rpm``).
    value : object
        The value as the filling rule gave it (a number, a number as text, or text).

    Returns
    -------
    str
        Numbers to the decimals of :data:`DEFAULT_DECIMALS` with trailing zeros dropped (power factor and
        fractions 0.879, percent 81.6, speeds 982 rpm, ratings 0.75 kW), other numbers to 4 significant
        digits; text as it is.
    """
    shown = default_value(value)
    if not isinstance(shown, float):
        return str(shown)
    decimals = next((d for suffix, d in DEFAULT_DECIMALS if str(column).endswith(suffix)), None)
    if decimals is None:
        return f"{shown:.4g}"
    text = f"{shown:.{decimals}f}"
    text = text.rstrip("0").rstrip(".") if "." in text else text
    return "0" if text in ("-0", "") else text


def plan_choice(view_: View, result) -> np.ndarray:
    """Position of the chosen option per asset under the exact plan (0 = today's motor)."""
    return scenario.plan_choice(view_.physics().operation, result.plan)


def site_meters(view_: View, result) -> dict[str, dict[str, pd.DataFrame]]:
    """Per site, the meter readings before ('before') and with the plan ('after'), on the time index."""
    op = view_.physics().operation
    choice = plan_choice(view_, result)
    eng = engine()
    setups = eng.derived(view_.key, "setups", (), lambda: site_setups(view_.case, op.index))
    before = eng.derived(view_.key, "meters", (b"",), lambda: meter_and_bills(view_.case, op, np.zeros_like(choice), setups)[0])
    after = eng.derived(view_.key, "meters", (choice.tobytes(),), lambda: meter_and_bills(view_.case, op, choice, setups)[0])
    out = {}
    for site_id in before:
        out[site_id] = {"before": before[site_id].to_frame().set_axis(op.index),
                        "after": after[site_id].to_frame().set_axis(op.index)}
    return out


def harmonic_screen(view_: View, result, site_id: str) -> list[dict]:
    """The site's harmonic screen today and with the exact plan (:func:`models.harmonics.site_screen`), as grid
    rows (infinite resonance orders blank), made once per case and plan."""
    table = _screen_table(view_, result)
    mine = table[table["site_id"].astype(str) == str(site_id)].replace([np.inf, -np.inf], np.nan)
    return mine.astype(object).where(mine.notna(), None).to_dict("records")


def _screen_table(view_: View, result) -> pd.DataFrame:
    """Every site's harmonic screen today and with the exact plan, made once per case and plan."""
    from models.harmonics import site_screen

    op = view_.physics().operation
    choice = plan_choice(view_, result)
    return engine().derived(view_.key, "harmonics", (choice.tobytes(),), lambda: site_screen(view_.case, op, result.plan))


def asset_harmonic_text(view_: View, result, asset_id: str) -> str:
    """The plan's harmonic caution for one asset's drive and capacitor options.

    Parameters
    ----------
    view_ : View
    result : models.scenario.ScenarioResult
    asset_id : str

    Returns
    -------
    str
        :func:`plan_harmonic_text` of the asset's site, said for its drive and capacitor options, where it is
        offered one and the exact plan takes its site past a harmonic limit; "" elsewhere.
    """
    from models.options import DRIVE_TECHNOLOGIES

    op = view_.physics().operation
    i = op.asset_position(asset_id)
    kinds = np.asarray(op.technologies, dtype=object)[np.asarray(op.applies[i], dtype=bool)]
    if not np.isin(kinds, list(DRIVE_TECHNOLOGIES) + ["capacitor"]).any():
        return ""
    site = str(view_.case.assets.set_index("asset_id").loc[asset_id, "site_id"])
    text = plan_harmonic_text(view_, result, [site])
    return ("Drive and capacitor options here: " + text[:1].lower() + text[1:]) if text else ""


def plan_harmonic_text(view_: View, result, site_ids=None, brief: bool = False) -> str:
    """The exact plan's harmonic screen in words, as the Fleet, Capital plan and Asset pages say it beside the plan.

    Parameters
    ----------
    view_ : View
    result : models.scenario.ScenarioResult
    site_ids : iterable of str, optional
        The sites to say it for (default every site).
    brief : bool
        The sites only, in one sentence (the Fleet page's notice line).

    Returns
    -------
    str
        :func:`models.harmonics.plan_screen_text` where a site passes a limit with the plan; "" elsewhere (and
        for a plan that buys nothing).
    """
    from models.harmonics import plan_screen_text

    if result is None or not len(result.plan):
        return ""
    return plan_screen_text(_screen_table(view_, result), site_ids, brief)


def _site_fit(view_: View, site_id: str) -> tuple[pd.DataFrame, pd.DataFrame] | None:
    """The site's rows of :func:`models.calibration.calibrate` (months, summary), made once per case; None when
    the case gives no bill of the site."""
    from models import calibration

    history = getattr(view_.case, "bill_history", None)
    if history is None or history.empty or not (history["site_id"].astype(str) == str(site_id)).any():
        return None
    op = view_.physics().operation
    both = engine().derived(view_.key, "calibration", (), lambda: calibration.calibrate(view_.case, op))
    return tuple(f[f["site_id"].astype(str) == str(site_id)].reset_index(drop=True) for f in both)


def site_bill_months(view_: View, site_id: str) -> pd.DataFrame:
    """The site's billed months beside today's fleet as modelled (:func:`models.calibration.calibrate`'s
    comparison, the site's rows); empty when the case gives no bill of the site."""
    fit = _site_fit(view_, site_id)
    return fit[0] if fit is not None else pd.DataFrame(
        columns=["site_id", "month", "quantity", "unit", "modelled", "billed", "difference_pct"])


def site_calibration_text(view_: View, site_id: str) -> list[str]:
    """Today's fleet as modelled against the site's own bills (the case's bill history), one sentence per
    quantity billed (:func:`models.calibration.summary_text`); empty when the case gives no bill of the site."""
    from models import calibration

    fit = _site_fit(view_, site_id)
    if fit is None:
        return []
    mine = fit[1]
    if mine.empty:
        return ["none of its bills is of a month the model covers"]
    return [calibration.summary_text(row, brief=True) for row in mine.to_dict("records")]


def week_starts(view_: View) -> list[dict]:
    """Monday starts of the analysis year, as dropdown options (and its first day when that is not a Monday)."""
    index = view_.physics().operation.index

    def day(t) -> str:
        # the year only where it is not the analysis year's: the list's search matches each typed word
        # inside the label's words, so "20 Oct" would also match every "2025"
        return f"{t:%a} {t.day} {t:%b}" + (f" {t.year}" if len(index) and t.year != index[0].year else "")

    mondays = index[(index.dayofweek == 0) & (index.hour == 0) & (index.minute == 0)]
    options = [{"label": f"Week of {day(t)}", "value": t.isoformat()} for t in mondays]
    if len(index) and (not len(mondays) or index[0] < mondays[0]):  # the days before the first Monday
        options.insert(0, {"label": f"First days, from {day(index[0])}", "value": index[0].isoformat()})
    return options


def peak_week(meters: dict[str, pd.DataFrame]) -> str:
    """ISO start of the Monday-based week holding today's peak site kW."""
    frame = meters["before"]
    peak = frame["p_kw"].idxmax()
    monday = (peak - pd.Timedelta(days=int(peak.dayofweek))).normalize()
    return max(monday, frame.index[0]).isoformat()  # a peak before the first Monday: the first days


def meter_summary(frame: pd.DataFrame, interval_h: float) -> dict[str, float]:
    """A site meter's peak kW and peak kVA (each the largest interval's) and its average power factor as a
    bill reads it (kWh over the kVAh of kWh and lagging kVArh, :func:`models.attribution.reactive_balance`)."""
    from models.attribution import reactive_balance
    from models.site import site_meter

    p = frame["p_kw"].to_numpy(dtype=float)
    q = frame["q_kvar"].to_numpy(dtype=float)
    balance = reactive_balance(site_meter(p, q), interval_h)
    return {"peak_kw": float(p.max()), "peak_kva": float(np.hypot(p, q).max()),
            "average_power_factor": float(balance["average_power_factor"])}


def week_slice(meters: dict[str, pd.DataFrame], start_iso: str | None) -> dict[str, pd.DataFrame]:
    """The seven days from ``start_iso`` of the before and after meter readings."""
    start = pd.Timestamp(start_iso) if start_iso else pd.Timestamp(peak_week(meters))
    zone = next(iter(meters.values())).index.tz
    if zone is not None and start.tzinfo is not None:
        # seven days of the local calendar (167 or 169 hours across a clock change), in the meter's own zone
        # (an ISO start carries only its offset)
        start = start.tz_convert(zone)
        end = (start.tz_localize(None) + pd.Timedelta(days=7)).tz_localize(zone, ambiguous=True, nonexistent="shift_forward")
    else:
        end = start + pd.Timedelta(days=7)
    return {k: v[(v.index >= start) & (v.index < end)] for k, v in meters.items()}


def pf_duration(meters: dict[str, pd.DataFrame], interval_h: float, points: int = 400) -> pd.DataFrame:
    """Power-factor duration curve before and after: hours of the year at or below each power factor, and the
    hours the site leads (kVAr below zero) in ``leading_h``, whose power factor the curve shows unsigned."""
    frames = []
    for scenario_name, frame in meters.items():
        pf = np.sort(frame["power_factor"].to_numpy(dtype=float))
        hours = np.arange(1, len(pf) + 1) * interval_h
        take = np.unique(np.linspace(0, len(pf) - 1, min(points, len(pf))).astype(int))
        leading_h = float((frame["q_kvar"].to_numpy(dtype=float) < 0).sum() * interval_h) if "q_kvar" in frame else 0.0
        frames.append(pd.DataFrame({"scenario": scenario_name, "hours": hours[take], "power_factor": pf[take],
                                    "leading_h": leading_h}))
    return pd.concat(frames, ignore_index=True)


def monthly_bills(result, site_id: str) -> pd.DataFrame:
    """Monthly bill of one site by line-item category, before and with the plan [currency]."""
    frames = []
    for scenario_name, label in (("baseline", "before"), ("plan", "after")):
        bills = result.bills[result.bills["scenario"] == scenario_name]
        if bills.empty:
            continue
        table = monthly_bill_table(bills, site_id).drop(columns="total")
        long = table.reset_index().melt(id_vars="month", var_name="line_item", value_name="amount")
        long["category"] = long["line_item"].str.split(":", n=1).str[0]
        frames.append(long.groupby(["month", "category"], as_index=False)["amount"].sum().assign(scenario=label))
    return pd.concat(frames, ignore_index=True) if frames else pd.DataFrame(columns=["month", "category", "amount", "scenario"])


def reactive_balance(view_: View, result, site_id: str, meters: dict[str, pd.DataFrame]) -> pd.DataFrame:
    """Mean reactive power of a site by source, before and with the plan [kVAr] (negative = leading)."""
    op = view_.physics().operation
    a = view_.case.assets
    members = np.flatnonzero(op.site_ids == site_id)
    wound_today = a["machine_type"].to_numpy(dtype=object)[members] == "wound_field_synchronous"
    rows = []
    for scenario_name, choice in (("before", np.zeros(len(op.asset_ids), dtype=int)), ("after", plan_choice(view_, result))):
        q = op.q_kvar[choice[members], members]  # (n_members, n_steps)
        wound = (wound_today & (choice[members] == 0)) | (op.technologies[choice[members]] == "wound_field")
        frame = meters[scenario_name]
        motors = q[~wound].sum(axis=0).mean() if (~wound).any() else 0.0
        wfsm = q[wound].sum(axis=0).mean() if wound.any() else 0.0
        caps = float(frame["capacitor_q_kvar"].mean())
        net = float(frame["q_kvar"].mean())
        base = net - caps - motors - wfsm
        for source, value in (("Induction and other motors", motors), ("Wound-field machines", wfsm),
                              ("Non-motor base load", base), ("Capacitor banks", caps), ("Net at the meter", net)):
            rows.append({"scenario": scenario_name, "source": source, "q_kvar": float(value)})
    return pd.DataFrame(rows)


def plan_financing_text(result) -> str:
    """The plan's financing in words (:func:`models.financing.plan_financing_words`), "" for cash."""
    from models.financing import plan_financing_words

    return plan_financing_words(result)


def plan_solve_text(result) -> str:
    """Say in plain words how far the exact plan is proven (a live edit bounds the solver's time), and
    which reactive projects were left out as worthless beside the rest of the plan (by asset and option
    label, as the tables name them)."""
    text = _plan_proof_text(result)
    results = getattr(result, "results", None)
    withdrawn = reactive_plan.withdrawn_text(getattr(result, "plan_status", None),
                                             labels=option_labels(results) if results is not None else None)
    return " ".join(x for x in (text, withdrawn, _beyond_horizon(result)) if x)


def _beyond_horizon(result) -> str:
    """:func:`models.plan.plan_beyond_horizon_text` of a result's assumptions, as a sentence ("" when none)."""
    from models.plan import plan_beyond_horizon_text

    assumptions = getattr(result, "assumptions", None)
    budgets = getattr(assumptions, "budget_per_yr", None)
    text = plan_beyond_horizon_text(len(budgets), assumptions.horizon_yr) if budgets else ""
    return text[:1].upper() + text[1:] + "." if text else ""


def _plan_proof_text(result) -> str:
    status = getattr(result, "plan_status", None) or {}
    kind, gap = status.get("status"), status.get("gap_frac", float("nan"))
    settings = status.get("settings")
    if kind in ("unconstrained", "empty"):
        text = str(status.get("message", ""))
        return text[:1].upper() + text[1:] + "."
    if kind == "failed":
        return f"The exact plan could not be solved ({status.get('message', '')}); the rank-order plan stands."
    if kind == "kept":
        return (f"The plan before this edit still fits every budget and is better than the plan found in the "
                f"{settings.time_limit_s:g} s allowed for a live edit, so it is kept. Prove the plan for the best "
                "under the new budgets.")
    if gap != gap:  # NaN: no bound known
        return "Exact plan: no bound on how far it is from the best possible plan."
    proven = f"proven within {gap * 100:.2g} % of the best possible plan NPV" if gap > 1e-9 else "proven optimal"
    live = _live(settings)
    if kind == "time_limit":
        return (f"Best plan found in the {settings.time_limit_s:g} s allowed for a live edit, {proven}. "
                "Prove it for the pack's precision." if live else f"Best plan found: the solver's time ran out; {proven}.")
    if live and gap > scenario.PRECISE_PLAN.gap_frac:
        return f"Best plan found {proven} (live edit: solved to 0.1 %)."
    return f"Exact plan {proven}."


def plan_name(result) -> str:
    """What the page calls the integer-programme plan: "exact plan" once proven to the full run's precision,
    else "best plan found" (a live edit's solve, stopped by its time or gap bound, may not be the best)."""
    return "exact plan" if plan_is_proven(result) else "best plan found"


def plan_is_proven(result) -> bool:
    """True when proving the plan to the full run's precision would change nothing (no button needed)."""
    status = getattr(result, "plan_status", None) or {}
    kind, gap = status.get("status"), status.get("gap_frac", float("nan"))
    if kind in ("unconstrained", "empty"):
        return True
    return kind == "optimal" and gap == gap and gap <= scenario.PRECISE_PLAN.gap_frac


def _live(settings) -> bool:
    """True for the plan settings of a live edit (bounded below the full run's time)."""
    return settings is not None and settings.time_limit_s < scenario.PRECISE_PLAN.time_limit_s


def plan_notice(result) -> str:
    """A short warning for pages that show plan figures while the plan is a live one not yet proven to
    the full run's gap, or when its budget years run past the study horizon; empty otherwise."""
    beyond = _beyond_horizon(result)
    status = getattr(result, "plan_status", None) or {}
    settings, gap = status.get("settings"), status.get("gap_frac", float("nan"))
    if not _live(settings):
        return beyond
    if status.get("status") not in ("time_limit", "kept") and not gap > scenario.PRECISE_PLAN.gap_frac:
        return beyond
    within = f"within {gap * 100:.2g} %" if gap == gap else "without a bound"
    return " ".join(x for x in (f"The plan figures come from a plan solved for a live edit and proven {within} of the "
                                "best possible; prove it on the Capital plan page for the pack's precision.", beyond) if x)


def with_option_labels(frame: pd.DataFrame, result) -> pd.DataFrame:
    """A frame of projects (asset_id, option_id) with the option's name as the tables show it (``label``).

    A frame with ``project_id`` ("asset/option", as the abatement curve's) and ``asset_id`` but no ``option_id``
    takes the option from the project id after its asset's id."""
    if frame is not None and len(frame) and "option_id" not in frame and {"project_id", "asset_id"} <= set(frame):
        frame = frame.assign(option_id=[str(p)[len(str(a)) + 1:] for p, a in zip(frame["project_id"], frame["asset_id"])])
    if frame is None or not len(frame) or "option_id" not in frame:
        return frame
    names = result.results.drop_duplicates("option_id").set_index("option_id")["label"]
    return frame.assign(label=frame["option_id"].map(names).fillna(frame["option_id"]).to_numpy(dtype=object))


def plan_tables(view_: View, result) -> dict[str, pd.DataFrame]:
    """The exact plan with labels, capital by plan year of both plans, and projects only one plan has."""
    labels = result.results.set_index(scenario.project_labels(result.results))["label"]
    quality = view_.case.assets.set_index("asset_id")["data_quality_pct"]
    out = {}
    for name, frame in (("exact", result.plan), ("rank_order", result.plan_greedy)):
        f = frame.copy()
        f["label"] = labels.reindex(scenario.project_labels(f)).to_numpy(dtype=object) if len(f) else []
        f["data_quality_pct"] = quality.reindex(f["asset_id"]).to_numpy(dtype=float) if len(f) else []
        out[name] = f
    budgets = list(result.assumptions.budget_per_yr)
    years = max([len(budgets)] + [int(f["start_yr"].max()) + 1 for f in out.values() if len(f)] + [1])
    rows = []
    later = {}
    from models.pack.content import plan_year_names

    names = plan_year_names(view_.case, result, years)  # the budget (fiscal) year of each plan year, if named
    for name, f in out.items():
        # capital in the plan year it is spent, as the budgets count it (a motor replaced at failure the year
        # it is expected to fail); what falls after the plan years is kept apart
        by_year, later[name] = plan_capital_spent(f, result.results, result.capital_spend_by_year, years)
        for y in range(years):
            rows.append({"plan": name, "start_yr": y, "capital": float(by_year[y]),
                         "budget": budgets[y] if y < len(budgets) else np.nan,
                         "budget_year": names[y] if y < len(names) else ""})
    out["by_year"] = pd.DataFrame(rows)
    out["capital_later"] = later
    exact_keys, greedy_keys = set(scenario.project_labels(out["exact"])), set(scenario.project_labels(out["rank_order"]))
    diff = []
    for name, f, other in (("exact only", out["exact"], greedy_keys), ("rank order only", out["rank_order"], exact_keys)):
        for r in f.itertuples(index=False):
            if f"{r.asset_id}/{r.option_id}" not in other:
                diff.append({"plan": name, "asset_id": r.asset_id, "label": r.label, "start_yr": r.start_yr,
                             "capital": r.capital, "npv_at_plan_start": r.npv_at_plan_start})
    out["differences"] = pd.DataFrame(diff, columns=["plan", "asset_id", "label", "start_yr", "capital", "npv_at_plan_start"])
    out["low_quality"] = low_data_quality(out["exact"], quality.to_dict())
    return out


#: What the Uncertainty page analyses: the budgeted plan, or each asset's best option with no budget.
RISK_SCOPES = {"plan": "The capital plan under the budget", "best": "Each asset's best option, no budget"}


def _risk_frames(result, scope: str) -> tuple[pd.DataFrame, pd.DataFrame, np.ndarray]:
    """(tornado, Monte Carlo summary per project, NPV per draw) of a scope of :data:`RISK_SCOPES`."""
    if scope not in RISK_SCOPES:
        raise ValueError(f"unknown scope {scope!r}: one of {', '.join(RISK_SCOPES)}")
    if scope == "plan":
        return result.plan_tornado, result.plan_risk, result.plan_npv_draws
    return result.tornado, result.risk, result.fleet_npv_draws


def tornado_rows(result, scope: str = "best") -> pd.DataFrame:
    """Tornado rows of a scope (:data:`RISK_SCOPES`) with readable labels, largest swing last (drawn on top)."""
    t = _risk_frames(result, scope)[0]
    if t is None or t.empty:
        return pd.DataFrame(columns=["label", "npv_at_low", "npv_at_high", "base_npv", "swing"])
    labels = [risk.tornado_label(r.variable, r.low_value, r.high_value) for r in t.itertuples(index=False)]
    return t.assign(label=labels).sort_values("swing", ascending=True, kind="stable").reset_index(drop=True)


def npv_draws(result, scope: str = "best") -> np.ndarray:
    """NPV of each Monte Carlo draw [currency] of a scope (:data:`RISK_SCOPES`; the plan's at its start)."""
    return np.asarray(_risk_frames(result, scope)[2], dtype=float)


def risk_summary_text(result, scope: str, currency: str) -> str:
    """One line on what the Uncertainty page analyses, with the total's P10/P50/P90 and P(NPV > 0)."""
    _, rows, draws = _risk_frames(result, scope)
    a = result.assumptions
    runs = f"{a.monte_carlo_draws:,} draws, seed {a.monte_carlo_seed} (the same seed gives the same answer)"
    if scope == "plan" and (rows is None or rows.empty):
        return (f"The capital plan holds no project under this budget, so it has no uncertainty to show; choose "
                f"'{RISK_SCOPES['best']}' to see the fleet's. {runs}.")
    if rows is None or rows.empty or not len(draws):
        return f"No project needs capital, so there is no uncertainty to show. {runs}."
    s = risk.distribution_summary(draws)
    what = "plan NPV at the plan's start" if scope == "plan" else "fleet NPV of the best options"
    if scope == "plan":
        later = int((rows["start_yr"] > 0).sum()) if "start_yr" in rows else 0
        who = f"{len(rows)} projects of the capital plan" + (f" ({later} starting in a later year, discounted by "
                                                              f"their delay)" if later else "")
    else:
        who = f"{len(rows)} projects (the best option of each asset that needs capital)"
    def drawn(value: float) -> str:  # a percentile of draws to three significant figures, as its chart labels it
        return money_text(float(f"{value:.3g}") if np.isfinite(value) else value, currency)

    return (f"{who} · {what}: P10 {drawn(s['npv_p10'])}, P50 {drawn(s['npv_p50'])}, "
            f"P90 {drawn(s['npv_p90'])}; "
            f"P(NPV > 0) {100 * s['prob_npv_positive_frac']:.0f} % · {runs}.")


def plan_bill_saving_alone(result, site_id: str) -> float:
    """The yearly bill saving of the plan's projects at one site, each priced alone against today's bill
    [currency/yr]: what the headline adds up (with maintenance), beside which the site's bill before and
    with the whole plan shows the projects priced together (demand peaks that coincide, reactive value
    that saturates)."""
    res = result.results
    if not len(result.plan):
        return 0.0
    chosen = res.set_index(scenario.project_labels(res)).reindex(scenario.project_labels(result.plan))
    return float(chosen.loc[chosen["site_id"] == site_id, "bill_saving_per_yr"].sum())


def risk_rows(result, scope: str = "best") -> pd.DataFrame:
    """Monte Carlo summary per project of a scope (:data:`RISK_SCOPES`) with asset and option labels, best P50
    first (the plan's with each project's start year)."""
    r = _risk_frames(result, scope)[1]
    if r is None or r.empty:
        return pd.DataFrame(columns=["project_id", "asset_id", "label", "start_yr", "npv_p10", "npv_p50", "npv_p90",
                                     "prob_npv_positive_frac"])
    r = r.copy()
    split = r["project_id"].astype(str).str.rsplit("/", n=1, expand=True)
    r["asset_id"], r["option_id"] = split[0], split[1]
    labels = result.results.set_index(scenario.project_labels(result.results))["label"]
    r["label"] = labels.reindex(r["project_id"].astype(str)).to_numpy(dtype=object)
    return r.sort_values("npv_p50", ascending=False, kind="stable").reset_index(drop=True)


def case_summary(view_: View) -> dict:
    """Name, description, currency, power unit, counts and the invented flag of the session's case."""
    c = view_.case
    return {"name": c.settings.name, "description": c.settings.description, "currency": view_.currency,
            "power_unit": view_.power_unit, "assets": int(len(c.assets)), "sites": int(len(c.sites)),
            "invented": bool(c.settings.invented), "mark_invented": c.settings.mark_invented,
            "origin": view_.entry.origin,
            "warnings": int(sum(p.severity == "warning" for p in c.problems))}


def blank_template_bytes() -> bytes:
    """A blank case workbook (written by :func:`models.io.write_blank_case` into a temporary folder)."""
    with tempfile.TemporaryDirectory(prefix="drivecase-template-") as tmp:
        path = Path(tmp) / "drivecase-blank-case.xlsx"
        case_io.write_blank_case(path, workbook=True)
        return path.read_bytes()


def pack_zip_bytes(view_: View) -> bytes:
    """The capital-request pack for this view's plan (workbook, HTML report, decision records), zipped.

    The pack is written by :func:`models.pack.write_pack` into a temporary folder (no PDF: that needs a
    browser process) and zipped in memory; nothing is written into the case.
    """
    import io
    import zipfile

    from models.pack import write_pack

    result = view_.result(with_risk=True, precise=True)
    with tempfile.TemporaryDirectory(prefix="drivecase-pack-") as tmp:
        written = write_pack(view_.case, result, tmp, assets=None, plan=True, pdf=False)
        buffer = io.BytesIO()
        with zipfile.ZipFile(buffer, "w", compression=zipfile.ZIP_DEFLATED) as archive:
            for path in sorted(written):
                archive.write(path, arcname=str(Path(path).relative_to(tmp)))
        return buffer.getvalue()


# ---------------------------------------------------------------------------------------------------
# Saving the tab's assumptions into its case
# ---------------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class CaseSave:
    """What saving a tab's assumptions into its case did, for the page to show.

    Attributes
    ----------
    ok : bool
        True when the case now holds the assumptions (saved, or already held them).
    message : str
        One line for the user: what was written where and where the previous version is kept, or why not.
    session : dict or None
        The tab's session after the save when it changed (an uploaded case gets a new key); None otherwise.
    download : bytes or None
        The saved case to keep (an uploaded case: the workbook as is, a folder as a zip); None otherwise.
    download_name : str or None
        File name of the download.
    """

    ok: bool
    message: str
    session: dict | None = None
    download: bytes | None = None
    download_name: str | None = None


def save_tab_assumptions(session: dict | None, edits: dict | None, now=None) -> CaseSave:
    """Write the tab's assumptions (its case's own with its edits) into the tab's case.

    The case the server was started with is saved where it lies; an uploaded case is saved in the
    server's copy of the upload, which is then offered as a download. After a save the tab's case is the
    saved one (a new content key, registered like an upload, its machine results carried over because
    only the finance values changed) and no edits are pending. Nothing is written when the tab's
    uploaded case was dropped, when its edits are not valid, or when the case's files changed on disk
    since the server read them.

    Parameters
    ----------
    session, edits : dict or None
        The tab's session and edits stores.
    now : datetime.datetime, optional
        Time-zone aware time naming the kept version (tests fix it).
    """
    session = session if isinstance(session, dict) else {}
    entry, notice = session_entry(session)
    if notice:
        return CaseSave(False, "Not saved: this tab's uploaded case is no longer held by the server; upload it again.")
    assumptions = entry.case.finance
    if isinstance(edits, dict) and edits.get("case") == entry.key:
        try:
            assumptions = assumptions_with_edits(entry.case.finance, edits)
        except (TypeError, ValueError) as exc:
            return CaseSave(False, f"Not saved: the assumptions are not valid ({exc}).")
    try:
        on_disk = content_key(entry.files)
    except OSError as exc:
        on_disk = f"unreadable: {exc}"
    if on_disk != entry.key:
        return CaseSave(False, "Not saved: the case's files changed on disk since the server read them, so saving "
                               "could overwrite someone else's change. Nothing was written; restart drivecase serve "
                               "on the case (or upload it again) to read the files as they are now.")
    try:
        saved = case_io.save_finance_settings(entry.files, assumptions, now=now)
    except ValueError as exc:
        return CaseSave(False, f"Not saved: {exc}.")
    if not saved.ok:
        return CaseSave(False, saved.summary() + " The edits stay in force in this tab.")
    if saved.outcome == "unchanged":
        return CaseSave(True, saved.summary())
    new = _register_saved(engine(), entry, saved.case, content_key(entry.files))
    if entry.origin != "upload":
        return CaseSave(True, f"{saved.summary()} Case: {entry.files}.")
    data, name = saved_case_bytes(new)
    return CaseSave(True, f"{saved.summary()} This is the server's copy of your upload; keep the download ({name}).",
                    {"session": session.get("session"), "case": new.key}, data, name)


def _register_saved(eng: Engine, old: CaseEntry, case, key: str) -> CaseEntry:
    """Put the saved case in the engine in place of the old one, carrying over what finance cannot change.

    The machine results and finance-independent views are kept when the capacitor cost (the one finance
    value the machine models take) is unchanged. The old entry is dropped without removing its folder,
    which now holds the saved case.
    """
    with eng._lock:
        carry = (old.key in eng._physics and float(case.finance.capacitor_cost_per_kvar)
                 == float(old.case.finance.capacitor_cost_per_kvar))
        physics = eng._physics.get(old.key) if carry else None
        derived = {(key,) + k[1:]: v for k, v in eng._derived.items() if k[0] == old.key} if carry else {}
        last_result = eng._last_result.get(old.key) if carry else None  # same physics: its plan starts the next
        eng._cases.pop(old.key, None)
        eng._forget(old.key)
        if old.origin == "upload":
            new = eng._cases.get(key) or eng._add_upload(CaseEntry(key, case, old.files, "upload", old.owned_dir))
        else:
            new = CaseEntry(key, case, old.files, old.origin)
            eng._cases[key] = new
            eng._cases.move_to_end(key, last=False)
            eng.default_key = key
        if physics is not None:
            eng._physics.setdefault(key, physics)
            for k, v in derived.items():
                eng._derived.setdefault(k, v)
        if last_result is not None:
            eng._last_result.setdefault(key, last_result)
    return new


def saved_case_bytes(entry: CaseEntry) -> tuple[bytes, str]:
    """The case of an entry as one download: a workbook as it is, a folder's case files as a zip."""
    import io
    import zipfile

    if entry.files.is_file():
        return entry.files.read_bytes(), entry.files.name
    buffer = io.BytesIO()
    with zipfile.ZipFile(buffer, "w", compression=zipfile.ZIP_DEFLATED) as archive:
        for path in case_files(entry.files):
            archive.write(path, arcname=path.relative_to(entry.files).as_posix())
    stem = re.sub(r"[^A-Za-z0-9]+", "-", entry.name).strip("-")[:60] or "case"
    return buffer.getvalue(), f"{stem}.zip"


# ---------------------------------------------------------------------------------------------------
# End of life (added at the end: the strategy costs of one asset and the fleet's repair-or-replace policy)
# ---------------------------------------------------------------------------------------------------
#: What the Asset page says when the engine has no end-of-life comparison (the pack's wording).
END_OF_LIFE_UNAVAILABLE = "Not available: the options catalogue needs a rewind option and a new induction motor option."


#: Two strategies closer than this share of the cheapest's cost are said to be level [frac].
CLOSE_CALL_FRAC = 0.01


@dataclass(frozen=True)
class EndOfLifeSummary:
    """The end-of-life comparison of one asset, ready to draw and to read.

    Attributes
    ----------
    strategies : pandas.DataFrame
        One row per strategy in :data:`models.end_of_life.STRATEGIES` order: ``strategy`` (key), ``label``
        (plain words, capitalised), ``cost_pv`` (expected present cost [currency]) and ``cheapest`` (bool,
        one row). Empty when there is nothing to compare.
    cheapest : str
        Key of the cheapest strategy ("" when empty).
    margin_pv : float
        How much less the cheapest costs than the next cheapest [currency, PV], >= 0 (NaN when empty).
    text : str
        One or two sentences: the cheapest strategy, by how much, the motor's age and its probability of
        failing within the horizon where the frame carries them.
    caution : str
        :func:`models.end_of_life.failure_law_caution` ("" when empty).
    message : str
        Why there is nothing to show ("" when there is).
    """

    strategies: pd.DataFrame
    cheapest: str = ""
    margin_pv: float = float("nan")
    text: str = ""
    caution: str = ""
    message: str = ""


#: How each source of an outage's hours (``lead_time_basis`` of the end-of-life frame) is said on screen.
_HOURS_BASIS_WORDS = {"asset register": "as the asset register gives them", "size class": "by its size",
                      "spare on hand": "a spare's fitting, the register saying one is on hand"}


def _hours_basis_words(basis: str) -> str:
    """The end-of-life frame's ``lead_time_basis`` in words ("size class" -> "by its size"; a mixed basis such
    as "asset register (new), size class (rewound)" word by word)."""
    out = basis
    for key, words in _HOURS_BASIS_WORDS.items():
        out = out.replace(key, words)
    return out


def end_of_life_summary(frame: pd.DataFrame | None, asset_id: str, currency: str, horizon_yr: int,
                        labels: dict | None = None, age_known: bool = True,
                        rewind_count: float = 0.0, power_unit: str = "kW") -> EndOfLifeSummary:
    """Return the end-of-life comparison of one asset from the engine's end-of-life frame.

    Parameters
    ----------
    frame : pandas.DataFrame or None
        :attr:`models.scenario.ScenarioResult.end_of_life`: asset_id, the three ``cost_*`` columns
        [currency, PV] and, where given, age_yr [yr], new_option_id, failure_probability_in_horizon_frac
        [frac] and mean_residual_life_yr [yr]. Empty when the catalogue has no rewind or no new induction
        motor option.
    asset_id : str
        The asset shown.
    currency : str
        The case currency, for the text.
    horizon_yr : int
        Study period [yr], for the probability of failing within it.
    labels : dict, optional
        option_id -> option name (:func:`models.plan.option_labels`), to name the new motor compared.
    age_known : bool
        False when the case gives no installation year (the engine then assumes an age): the text says so.
    rewind_count : float
        The motor's past rewinds [-]: the text says how much shorter its failure law counts its life
        (:func:`models.end_of_life.rewind_life_note`).
    power_unit : {"kW", "hp"}
        The case's unit, which the caution gives the size classes in.

    Returns
    -------
    EndOfLifeSummary
        With ``message`` set, and no strategies, when the frame is empty, has no row for the asset, or its
        costs are not finite.

    Notes
    -----
    The cheapest strategy is the lowest expected present cost; a tie goes to the first in
    :data:`models.end_of_life.STRATEGIES` order, the rule of :func:`models.end_of_life.strategy_costs`
    (its ``best_strategy`` and ``advantage_over_next`` are the same numbers). A gap below
    :data:`CLOSE_CALL_FRAC` of the cheapest cost is called level in the text: the failure laws and prices
    behind it are not that precise.
    """
    from models.end_of_life import COST_COLUMNS, STRATEGIES, STRATEGY_NAMES, failure_law_caution, rewind_life_note

    empty = pd.DataFrame({"strategy": pd.Series(dtype="str"), "label": pd.Series(dtype="str"),
                          "cost_pv": pd.Series(dtype=float), "cheapest": pd.Series(dtype=bool)})
    if frame is None or frame.empty or not set(COST_COLUMNS.values()) <= set(frame.columns):
        return EndOfLifeSummary(empty, message=END_OF_LIFE_UNAVAILABLE)
    rows = frame[frame["asset_id"].astype(str) == str(asset_id)]
    if rows.empty:
        return EndOfLifeSummary(empty, message=f"No end-of-life comparison for {asset_id}.")
    row = rows.iloc[0]
    costs = np.array([float(row[COST_COLUMNS[s]]) for s in STRATEGIES])
    if not np.isfinite(costs).all():
        return EndOfLifeSummary(empty, message=f"No end-of-life comparison for {asset_id}: its costs could not be "
                                               "computed.")
    failed = bool(row["failed"]) if "failed" in row.index and pd.notna(row["failed"]) else False
    # a motor that has failed is replaced or rewound now (replacing now and at failure are then one choice)
    keys = ("replace_now", "rewind_at_failure") if failed else STRATEGIES
    names = ({"replace_now": "replace it now", "rewind_at_failure": "rewind it now"} if failed else STRATEGY_NAMES)
    costs = np.array([float(row[COST_COLUMNS[s]]) for s in keys])
    order = np.argsort(costs, kind="stable")
    best, runner_up = keys[order[0]], keys[order[1]]
    margin = float(costs[order[1]] - costs[order[0]])
    strategies = pd.DataFrame({
        "strategy": pd.Series(keys, dtype="str"),
        "label": pd.Series([names[s].capitalize() for s in keys], dtype="str"),
        "cost_pv": costs, "cheapest": [s == best for s in keys]})

    if failed:
        first = (f"{asset_id} has failed (asset register): the cheaper way back into service is to {names[best]}, a "
                 f"present cost of {money_text(costs[order[0]], currency)} with the outage until it runs again, ")
    else:
        first = (f"For {asset_id} the cheapest end-of-life strategy is to {names[best]}: an expected present "
                 f"cost of {money_text(costs[order[0]], currency)}, ")
    if round(margin) == 0:
        first += f"level with the next cheapest ({names[runner_up]})."
    else:
        first += f"{money_text(margin, currency)} less than the next cheapest ({names[runner_up]})"
        # a gap inside the precision of the inputs is not a preference
        first += (": under 1 % apart, so treat the two as level." if margin < CLOSE_CALL_FRAC * costs[order[0]]
                  else ".")
    facts = []
    age = float(row["age_yr"]) if "age_yr" in row.index else float("nan")
    if math.isfinite(age):
        facts.append(f"Today's motor is {age:.0f} years old" + ("" if age_known else
                                                                 " (assumed: the case gives no installation year)"))
    p = float(row["failure_probability_in_horizon_frac"]) if "failure_probability_in_horizon_frac" in row.index \
        else float("nan")
    if failed:
        clause = "every option of this page is counted against the least that puts it back in service now"
        facts.append(clause if facts else clause[:1].upper() + clause[1:])
    elif math.isfinite(p):
        life = float(row["mean_residual_life_yr"]) if "mean_residual_life_yr" in row.index else float("nan")
        clause = f"the probability that it fails within the {int(horizon_yr)}-year horizon is {p * 100:.0f} %"
        clause += f" (mean residual life {life:.1f} yr)" if math.isfinite(life) else ""
        facts.append(clause if facts else clause[:1].upper() + clause[1:])
    second = "; ".join(facts) + "." if facts else ""
    rewound = "" if failed else rewind_life_note(rewind_count)  # (a failure law says nothing once it has failed)
    if rewound:
        second += (" " if second else "") + rewound
    new_id = row["new_option_id"] if "new_option_id" in row.index else None
    if isinstance(new_id, str) and new_id:
        second += (" " if second else "") + f"New motor compared: {(labels or {}).get(new_id, new_id)}."
    outage = float(row["downtime_cost_per_h"]) if "downtime_cost_per_h" in row.index else float("nan")
    if math.isfinite(outage):
        basis = str(row["downtime_cost_basis"]) if "downtime_cost_basis" in row.index else ""
        hours_from = str(row["lead_time_basis"]) if "lead_time_basis" in row.index else "size class"
        hours = (f" ({float(row['new_lead_time_h']):.0f} h to a new motor, {float(row['rewind_lead_time_h']):.0f} h "
                 f"to a rewound one: {_hours_basis_words(hours_from)})" if "new_lead_time_h" in row.index else "")
        second += (" " if second else "") + f"A failure's outage{hours} is priced at {money_text(outage, currency)}/h"
        if basis.startswith("default"):
            second += (f": the {basis}, a placeholder that can decide the answer; give the asset's downtime cost per "
                       "hour in the asset register to use your own.")
        else:
            second += f" ({basis})." if basis else "."
    return EndOfLifeSummary(strategies, best, margin, " ".join(x for x in (first, second) if x),
                            failure_law_caution(power_unit=power_unit))


def spares_text(view_: View, result, asset_id: str) -> str:
    """What the Asset page says of the spares of this motor's group of interchangeable motors ("" where it has no
    end-of-life comparison): :func:`models.spares.spares_table`, computed once per result."""
    from models.spares import SPARE_UPKEEP_FRAC, TARGET_FILL_FRAC, spares_table

    table = engine().derived(view_.key, "spares", (id(result), result.assumptions),
                             lambda: spares_table(view_.case, result))
    mine = table[[str(asset_id) in ids.split(" ") for ids in table["asset_ids"]]]
    if mine.empty:
        return ""
    r = mine.iloc[0]
    others = int(r["motors"]) - 1
    failures = f"{float(r['failures_per_yr']):.2f} times a year"
    group = (f"It and {others} other motor{'s' if others != 1 else ''} of the case ({r['group']}) fail about "
             f"{failures} together" if others
             else f"It is the case's only motor of its kind ({r['group']}) and fails about {failures}")
    economic = float(r["economic_spares"])
    if not np.isfinite(economic):
        keep = "no new motor of its kind is priced in the catalogue, so the number that costs least is not known"
    elif economic:
        n = int(economic)
        keep = (f"keeping {n} spare{'s' if n != 1 else ''} on the shelf costs least: "
                f"{money_text(float(r['saving_at_economic_per_yr']), view_.currency)} a year of downtime saved, net of "
                f"holding {'them' if n != 1 else 'it'} (price x (discount rate + {100 * SPARE_UPKEEP_FRAC:g} %))")
    else:
        keep = "no spare on the shelf pays for its holding cost at this price and cost of downtime"
    return (f"Spares. {group}; "
            f"{int(r['spares_for_target'])} spare{'s' if int(r['spares_for_target']) != 1 else ''} would cover "
            f"{100 * TARGET_FILL_FRAC:g} % of failures (rewound and put back on the shelf, a rotating pool), and {keep}. "
            "Confirm that they share frame, mounting and shaft.")


def asset_end_of_life(view_: View, result, asset_id: str) -> EndOfLifeSummary:
    """The end-of-life comparison of one asset under the view's assumptions (:func:`end_of_life_summary`)."""
    labels = option_labels(result.results)
    assets = view_.case.assets
    mine = assets["asset_id"].astype(str) == str(asset_id)
    installed = assets.loc[mine, "year_installed"]
    age_known = bool(len(installed)) and bool(pd.notna(installed.iloc[0]))
    rewinds = assets.loc[mine, "rewind_count"] if "rewind_count" in assets else pd.Series(dtype=float)
    summary = end_of_life_summary(result.end_of_life, asset_id, view_.currency, int(result.assumptions.horizon_yr),
                                  labels, age_known, float(rewinds.iloc[0]) if len(rewinds) else 0.0, view_.power_unit)
    why = scenario.end_of_life_left_out(result, asset_id)
    if why and summary.strategies.empty:  # the reason the comparison leaves the motor out, in words
        return replace(summary, message=f"No end-of-life comparison for {asset_id}: {scenario.END_OF_LIFE_LEFT_OUT[why]}.")
    return summary


#: Each repair-or-replace decision of :func:`models.end_of_life.fleet_rules` in plain words.
FLEET_RULE_DECISIONS = end_of_life.DECISION_NAMES


def fleet_rules_scope_text(result, rated_p_kw, currency: str, power_unit: str = "kW") -> str:
    """What the fleet's repair-or-replace policy covers, and what it leaves to each asset's own comparison.

    Parameters
    ----------
    result : models.scenario.ScenarioResult
    rated_p_kw : array_like
        The case's ratings [kW]: motors above the policy's largest size are counted.
    currency : str
    power_unit : {"kW", "hp"}
        The case's unit, which the text gives the sizes in.
    """
    rules = result.fleet_rules
    if rules is None or rules.empty:
        return ""
    low_kw, high_kw = float(rules["min_rated_p_kw"].min()), float(rules["max_rated_p_kw"].max())
    rated = np.asarray(rated_p_kw, dtype=float)
    above = int(np.sum(rated > high_kw * (1.0 + 1e-9)))
    # of the larger motors, those the asset comparison leaves out too because no new motor of the catalogue fits them
    # (models.scenario.end_of_life_left_out: an idle motor is left out for another reason, said on its own page)
    op = getattr(getattr(result, "physics", None), "operation", None)
    asset_ids = getattr(op, "asset_ids", None)
    uncompared = (int(sum(1 for a, r in zip(asset_ids, rated) if r > high_kw * (1.0 + 1e-9)
                          and scenario.end_of_life_left_out(result, str(a)) == "no_new_motor"))
                  if asset_ids is not None and len(asset_ids) == len(rated) else 0)
    low, high = (round(float(rating_in_unit(v, power_unit)), 2) for v in (low_kw, high_kw))
    downtime = float(result.assumptions.downtime_cost_per_h)
    larger = ""
    if above:
        larger = (f"; {above} motor{'s' if above != 1 else ''} of the case {'are' if above != 1 else 'is'} larger and "
                  f"{'are' if above != 1 else 'is'} left to {'their' if above != 1 else 'its'} own comparison above")
        if uncompared:
            larger += (f" ({'all of them' if uncompared == above else str(uncompared)} without one: no new motor of the "
                       "catalogue fits, so a replacement and a rewind need quotes of their own)") if above != 1 else (
                " (none is made: no new motor of the catalogue fits it, so a replacement and a rewind need quotes of "
                "their own)")
    text = (f"It covers standard ratings from {low:,.10g} to {high:,.10g} {power_label(power_unit)}"  # (1,000 as the grid)
            + larger
            + ". It prices an outage at the finance assumptions' downtime cost "
            + (f"({money_text(downtime, currency)} per hour)" if downtime > 0 else "(none set, so outages count nothing)")
            + ", not at each motor's own, so an asset's own comparison above can differ from it.")
    return text


def fleet_rule_rows(result, power_unit: str = "kW") -> pd.DataFrame:
    """The fleet's repair-or-replace policy as the grid shows it.

    Parameters
    ----------
    result : models.scenario.ScenarioResult
    power_unit : {"kW", "hp"}
        The case's unit, which the two rating columns are given in.

    Returns
    -------
    pandas.DataFrame
        from_rating and to_rating (the band's ratings in the case's unit, kW or hp, as the fleet table's
        ``rating``), min_hours_to_replace_h_per_yr [h/yr] (NaN where rewinding
        wins at every hours of the grid: no threshold), decision (plain words) and rule. Empty (with these
        columns) when the engine has no policy.
    """
    columns = ["from_rating", "to_rating", "min_hours_to_replace_h_per_yr", "decision", "rule"]
    rules = result.fleet_rules
    if rules is None or rules.empty:
        return pd.DataFrame(columns=columns)
    hours = rules["min_hours_to_replace_h_per_yr"].to_numpy(dtype=float)
    return pd.DataFrame({
        "from_rating": np.round(rating_in_unit(rules["min_rated_p_kw"].to_numpy(dtype=float), power_unit), 2),
        "to_rating": np.round(rating_in_unit(rules["max_rated_p_kw"].to_numpy(dtype=float), power_unit), 2),
        "min_hours_to_replace_h_per_yr": np.where(np.isfinite(hours), hours, np.nan),
        "decision": [FLEET_RULE_DECISIONS.get(d, d) for d in rules["decision"]],
        "rule": rules["rule"].to_numpy(dtype=object)})
