"""Problems found in user input: what is wrong, where, and what to do about it.

Every loader and validator in drivecase reports problems as :class:`Problem` records instead of raising
on the first one, so a user sees the whole list at once. Errors stop a run; warnings do not.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field, replace
from typing import Iterable, Literal

Severity = Literal["error", "warning"]


@dataclass(frozen=True)
class Problem:
    """One problem in the user's input.

    Parameters
    ----------
    severity : {"error", "warning"}
        Errors stop a run; warnings are shown and the run goes on.
    file : str
        File name (or workbook sheet, as ``book.xlsx:assets``) as the user sees it.
    row : int or None
        Row number as the user sees it in a spreadsheet: the header is row 1, so the first data row
        is row 2; in a TOML file, the line. ``None`` when the problem concerns the whole file or column.
    column : str or None
        Column header as written in the user's file; in a TOML file, the key path.
    value : object
        The offending value, as read.
    rule : str
        The rule that was broken, in plain words.
    hint : str
        What to do about it.
    """

    severity: Severity
    file: str
    row: int | None
    column: str | None
    value: object
    rule: str
    hint: str = ""

    def location(self) -> str:
        """Return ``file, row R, column C`` as far as known (``line L, key K`` in a TOML file)."""
        toml = self.file.lower().endswith(".toml")
        parts = [self.file]
        if self.row is not None:
            parts.append(f"{'line' if toml else 'row'} {self.row}")
        if self.column is not None:
            parts.append(f"{'key' if toml else 'column'} '{self.column}'")
        return ", ".join(parts)

    def __str__(self) -> str:
        value = "" if self.value is None or self.value == "" else f" (value: {shown_value(self.value)})"
        hint = f" Hint: {self.hint}" if self.hint else ""
        return f"{self.severity.upper()} {self.location()}: {self.rule}{value}.{hint}"

    def as_dict(self) -> dict[str, object]:
        """Return the problem as a flat dict for tables and CSV export."""
        return {
            "severity": self.severity,
            "file": self.file,
            "row": self.row,
            "column": self.column,
            # whole numbers without '.0' as the messages show them (a table cell needs no quotes around text)
            "value": None if self.value is None else (self.value if isinstance(self.value, str) else shown_value(self.value)),
            "rule": self.rule,
            "hint": self.hint,
        }


def error(file: str, row: int | None, column: str | None, value: object, rule: str, hint: str = "") -> Problem:
    """Build an error-severity :class:`Problem`."""
    return Problem("error", file, row, column, value, rule, hint)


def warning(file: str, row: int | None, column: str | None, value: object, rule: str, hint: str = "") -> Problem:
    """Build a warning-severity :class:`Problem`."""
    return Problem("warning", file, row, column, value, rule, hint)


def did_you_mean(word: object, choices: Iterable[str], cutoff: float = 0.7) -> str:
    """The start of a hint naming the closest of ``choices`` to ``word`` ("did you mean 'x'? "), or "" when
    none is close enough: one that differs only in upper and lower case, else the closest by
    :func:`difflib.get_close_matches` (similarity >= ``cutoff``).

    Examples
    --------
    >>> did_you_mean("curency", ["currency", "region"])
    "did you mean 'currency'? "
    >>> did_you_mean("hrw-p01", ["HRW-P01", "HRW-P02"])
    "did you mean 'HRW-P01'? "
    >>> did_you_mean("colour", ["currency", "region"])
    ''
    >>> did_you_mean("example_tou.toml", ["example_kva_demand.toml", "example_tou_kw_reactive_ratchet.toml"])
    "did you mean 'example_tou_kw_reactive_ratchet.toml'? "
    """
    import difflib

    choices = [str(c) for c in choices]
    same = [c for c in choices if c.casefold() == str(word).casefold()]
    # a name cut short (its stem the start of exactly one choice, a file's extension aside) is that choice
    stem = str(word).casefold().rsplit(".", 1)[0] if "." in str(word) else str(word).casefold()
    longer = [c for c in choices if len(stem) >= 3 and c.casefold().startswith(stem) and c.casefold() != stem]
    close = same or (longer if len(longer) == 1 else []) or difflib.get_close_matches(str(word), choices, n=1,
                                                                                        cutoff=cutoff)
    return f"did you mean '{close[0]}'? " if close else ""


def unknown_ids_hint(unknown: Iterable[str], known: Iterable[str]) -> str:
    """" (a: did you mean 'A'?; ...)" for the unknown ids that have a near known one, else "".

    Examples
    --------
    >>> unknown_ids_hint(["hrw-p01", "ZZ"], ["HRW-P01", "HRW-P02"])
    " (hrw-p01: did you mean 'HRW-P01'?)"
    """
    known = [str(k) for k in known]
    hints = "; ".join(f"{a}: {h.strip()}" for a in unknown if (h := did_you_mean(a, known)))
    return f" ({hints})" if hints else ""


def shown_value(value: object) -> str:
    """A value as a message shows it: text quoted, whole numbers without '.0', lists in brackets, dates and
    times in ISO 8601 (as a TOML file or a spreadsheet cell writes them).

    Examples
    --------
    >>> shown_value(5.0), shown_value(2031.0), shown_value(0.08), shown_value("-250"), shown_value((-5.0,))
    ('5', '2031', '0.08', "'-250'", '[-5]')
    >>> import datetime as dt
    >>> shown_value(dt.date(2025, 7, 15)), shown_value(dt.datetime(2025, 1, 6)), shown_value(dt.time(17, 15))
    ('2025-07-15', '2025-01-06T00:00:00', '17:15:00')
    """
    import datetime as _dt

    if isinstance(value, bool):
        return repr(value)
    if isinstance(value, (_dt.date, _dt.time)):  # (datetime is a date)
        return value.isoformat()
    if isinstance(value, float):
        return str(int(value)) if value.is_integer() and abs(value) < 1e15 else f"{value:g}"
    if isinstance(value, (list, tuple)):
        return "[" + ", ".join(shown_value(v) for v in value) + "]"
    return repr(value)


@dataclass
class CaseError(ValueError):
    """Raised in strict mode when input has errors; carries every problem found."""

    problems: list[Problem] = field(default_factory=list)

    def __post_init__(self) -> None:
        super().__init__(self.__str__())

    def __str__(self) -> str:
        errors = [p for p in self.problems if p.severity == "error"]
        head = f"{len(errors)} {'error' if len(errors) == 1 else 'errors'} in the input"
        return head + ("\n" + "\n".join(str(p) for p in errors) if errors else "")


#: The rule of the error a reader gives for a required table a case lacks (``{table}``: its name). Every row
#: that refers to such a table is an error too, so :func:`ordered` lists this one first.
MISSING_TABLE_RULE = "the required table '{table}' is missing"
_MISSING_TABLE = re.compile("^" + re.escape(MISSING_TABLE_RULE).replace(re.escape("{table}"), "([^']+)") + "$")


def missing_table(problem: Problem) -> str | None:
    """The name of the required table an error says is missing, else None.

    Examples
    --------
    >>> missing_table(error("sites.csv", None, None, None, MISSING_TABLE_RULE.format(table="sites")))
    'sites'
    >>> missing_table(error("sites.csv", 3, "site_id", "S1", "duplicate site_id")) is None
    True
    """
    if problem.severity != "error":
        return None
    found = _MISSING_TABLE.match(str(problem.rule or ""))
    return found.group(1) if found else None


def _is_settings_file(file: str) -> bool:
    """Whether a problem's file is a TOML file (settings, finance, a tariff) or a workbook's tariff sheet."""
    return str(file).lower().endswith(".toml") or ":tariff " in str(file)


def ordered(problems: Iterable[Problem]) -> list[Problem]:
    """Return problems in the order they are shown and returned: the causes before what follows from them.

    Errors come before warnings. Among errors, a missing required table comes first (the rows that refer to
    it fail too), then the other errors of a whole file or column and the errors of TOML files (settings,
    finance, tariffs: the tables' rows refer to them), by file, then the errors of rows, by file and row. Warnings follow by file, a whole file or column before its rows, then by row.

    The sort is stable: problems with the same key keep the order they were found in. A summary line
    that counts the rest of a long list ("20 more unreadable timestamps") carries the row of the first
    one it counts, so it follows the rows it continues. ``models.case.load_case`` returns its problems
    in this order; fronts show them as given.

    Examples
    --------
    >>> found = [warning("a.csv", 3, "x", 1, "w"), error("b.csv", 5, "y", 2, "e2"),
    ...          error("b.csv", None, "y", None, "e1"), error("a.csv", 9, "x", 3, "e0"),
    ...          error("c.csv", None, None, None, MISSING_TABLE_RULE.format(table="c"))]
    >>> [p.rule for p in ordered(found)]
    ["the required table 'c' is missing", 'e1', 'e0', 'e2', 'w']
    """
    def key(p: Problem) -> tuple:
        if p.severity != "error":
            return (1, 0, p.file, -1 if p.row is None else p.row)
        # (a settings or tariff file's errors, by line, are of the files the tables' rows refer to: causes too)
        cause = 0 if missing_table(p) else (1 if p.row is None or _is_settings_file(p.file) else 2)
        return (0, cause, p.file, -1 if p.row is None else p.row)

    return sorted(problems, key=key)


#: Most rows listed of one problem repeated row after row (same file, column, rule and hint); one line
#: counts the rest.
MAX_ALIKE_ROWS = 20


def folded(problems: Iterable[Problem], limit: int = MAX_ALIKE_ROWS) -> list[Problem]:
    """Return ``problems`` with each problem repeated over more than ``limit`` rows (the same severity, file,
    column, rule and hint) listed for its first ``limit`` rows and counted in one line for the rest.

    The counting line stands on the row of the first one it counts, with its value, so :func:`ordered` shows
    it after the rows listed; the order of the rest is kept.

    Examples
    --------
    >>> rows = [error("a.csv", r, "x", None, "give x") for r in range(2, 6)]
    >>> [(p.row, p.rule) for p in folded(rows + [warning("a.csv", 9, "y", 1, "w")], limit=2)]
    [(2, 'give x'), (3, 'give x'), (4, '2 more rows alike, the first of them in this row: give x'), (9, 'w')]
    """
    problems = list(problems)
    groups: dict[tuple, list[int]] = {}
    for k, p in enumerate(problems):
        if p.row is not None:
            groups.setdefault((p.severity, p.file, p.column, p.rule, p.hint), []).append(k)
    dropped: set[int] = set()
    counted_at: dict[int, Problem] = {}
    for members in groups.values():
        if len(members) > limit:
            first = problems[members[limit]]
            counted_at[members[limit]] = replace(
                first, rule=f"{len(members) - limit} more rows alike, the first of them in this row: {first.rule}")
            dropped.update(members[limit + 1:])
    return [counted_at.get(k, p) for k, p in enumerate(problems) if k not in dropped]


def has_errors(problems: Iterable[Problem]) -> bool:
    """Return True when any problem is an error."""
    return any(p.severity == "error" for p in problems)


#: Legacy zone names that keep one offset from UTC all year, and the place a site using them most likely
#: means (the IANA time zone database keeps them for old systems; they have no summer time).
FIXED_OFFSET_ZONES = {"EST": "America/New_York", "MST": "America/Denver (or America/Phoenix, which keeps no summer time)",
                      "HST": "Pacific/Honolulu"}


def fixed_offset_hint(zone: str) -> str | None:
    """A hint for a time-zone name that keeps one offset all year (``EST``, ``Etc/GMT+5``...), else None.

    A site that keeps summer time and is described by such a name gets every time-of-use period and
    every clock time of its profiles one hour off for half the year.

    Examples
    --------
    >>> fixed_offset_hint("EST")
    'if the site keeps summer time, name its place instead, e.g. America/New_York'
    >>> fixed_offset_hint("Europe/Berlin") is None, fixed_offset_hint("UTC") is None
    (True, True)
    """
    name = str(zone).strip()
    if name in FIXED_OFFSET_ZONES:
        return f"if the site keeps summer time, name its place instead, e.g. {FIXED_OFFSET_ZONES[name]}"
    if name.startswith(("Etc/GMT+", "Etc/GMT-")):
        return "if the site keeps summer time, name its place instead, e.g. America/Chicago or Europe/Berlin"
    return None


def misspelt_name(word: object, choices: Iterable[str]) -> str | None:
    """The one of ``choices`` that ``word`` is a misspelling of, or None: equal once capitals, spaces,
    underscores, hyphens and a plural s are set aside, or one letter added, dropped or changed. A name that
    differs by more, or by a digit ("scenarios 2"), is taken as a name of its own.

    Examples
    --------
    >>> misspelt_name("Scenario", ["scenarios"]), misspelt_name("senarios", ["scenarios"])
    ('scenarios', 'scenarios')
    >>> misspelt_name("Scenarios 2", ["scenarios"]), misspelt_name("Bill history notes", ["bill history"])
    (None, None)
    """
    def fold(text: object) -> str:
        folded = re.sub(r"[\s_\-]+", "", str(text).casefold())
        return folded[:-1] if folded.endswith("s") else folded

    def one_letter_apart(a: str, b: str) -> bool:
        if abs(len(a) - len(b)) > 1 or a == b:
            return a == b
        i = 0
        while i < min(len(a), len(b)) and a[i] == b[i]:
            i += 1
        rest_a, rest_b = a[i:], b[i:]
        if len(a) == len(b):
            changed = (rest_a[0], rest_b[0])
            return rest_a[1:] == rest_b[1:] and all(ch.isalpha() for ch in changed)
        longer, shorter = (rest_a, rest_b) if len(a) > len(b) else (rest_b, rest_a)
        return longer[1:] == shorter and longer[0].isalpha()

    target = fold(word)
    for choice in choices:
        if one_letter_apart(target, fold(choice)):
            return choice
    return None
