"""Properties of the case loader over generated input (Hypothesis).

- Whatever text, number, unicode, blank, huge number or NaN-like string lands in whatever cell of a
  small valid case (written properly quoted or raw), and whatever bytes replace a whole file,
  :func:`models.case.load_case` returns ``(Case or None, list of Problem)`` without raising; every
  problem has a severity, a file and a rule, and none is the loader's internal-error safety net.
- Row order does not matter: a valid case with its rows shuffled gives the same per-asset tables
  (defaults, data-quality scores, profiles).
- Header case, underscores and surrounding spaces do not matter.
- Small pieces: header normalisation is idempotent, decoding round-trips UTF-8 and UTF-16 text, and
  numbers written in either decimal convention read back exactly.
"""

from __future__ import annotations

import csv
import datetime as dt
import io
import random
import tempfile
from pathlib import Path

import numpy as np
import pandas as pd
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import casebuilder as cb
from models import io as case_io
from models.case import _to_number, load_case

# --------------------------------------------------------------------------------------------------
# A small valid case with some variety (two sites, interval profiles, duty tables, hours + load)
# --------------------------------------------------------------------------------------------------
EXTRA_ASSETS = [
    ["P2", "S2", "Booster pump", "pump", "30", "2", "50", "400", "IE2", "", "", "", "2008", "1", "fixed", "", "4000", "70", "medium"],
    ["F2", "S2", "Supply fan", "fan", "4", "6", "50", "400", "unknown", "", "", "", "1990", "0", "throttled", "LP2", "", "", "low"],
    ["K1", "S1", "Belt conveyor", "conveyor", "11", "4", "50", "400", "IE3", "91.4", "0.81", "1460", "2019", "0", "fixed", "D2", "", "", "high"],
    ["M1", "S2", "Slurry mixer", "mixer", "55", "4", "60", "460", "IE3", "", "", "1780", "", "2", "fixed", "", "5000", "80", ""],
    ["X1", "S1", "Sample pump", "other", "0.75", "4", "50", "400", "", "", "", "", "2021", "", "", "LP1", "", "", "low"],
]
ASSETS = [list(r) for r in cb.ASSETS] + EXTRA_ASSETS
SITES = [["S1", "Test works", "50", "0.9"], ["S2", "Second works", "20", "0.85"]]
DUTY = [["D1", "80", "4000"], ["D1", "40", "2000"], ["D2", "90", "3000"], ["D2", "60", "3000"], ["D2", "30", "1500"]]
PROFILES = cb.profile_rows() + [["LP2", f"2025-01-{2 + k // 24:02d} {k % 24:02d}:00", f"{30 + (k % 7) * 8}"] for k in range(48)]
TABLES = {
    "assets.csv": (cb.ASSET_HEADER, ASSETS),
    "sites.csv": (cb.SITES_HEADER, SITES),
    "capacitors.csv": (cb.CAPACITORS_HEADER, cb.CAPACITORS),
    "duty.csv": (cb.DUTY_HEADER, DUTY),
    "profiles.csv": (cb.PROFILE_HEADER, PROFILES),
}


def _text(header: list[str], rows: list[list[str]], quoted: bool = True) -> str:
    if not quoted:
        return "".join(",".join(r) + "\n" for r in [header] + rows)
    out = io.StringIO()
    csv.writer(out, lineterminator="\n").writerows([header] + rows)
    return out.getvalue()


def _write(folder: Path, tables: dict[str, tuple[list[str], list[list[str]]]], quoted: dict[str, bool] | None = None) -> Path:
    folder.mkdir(parents=True, exist_ok=True)
    for name, (header, rows) in tables.items():
        (folder / name).write_text(_text(header, rows, (quoted or {}).get(name, True)), encoding="utf-8")
    (folder / "case.toml").write_text(cb.CASE_TOML, encoding="utf-8")
    return folder


def _assert_well_formed(result) -> None:
    assert isinstance(result, tuple) and len(result) == 2
    case, problems = result
    assert case is None or hasattr(case, "assets")
    assert isinstance(problems, list)
    for p in problems:
        assert p.severity in ("error", "warning"), p
        assert isinstance(p.file, str) and p.file, p
        assert isinstance(p.rule, str) and p.rule.strip(), p
        assert p.row is None or (isinstance(p.row, int) and p.row >= 1), p
        assert not p.rule.startswith("internal error"), p
    if case is None:
        assert any(p.severity == "error" for p in problems)
    else:
        assert not any(p.severity == "error" for p in problems)


def test_the_base_case_is_valid(tmp_path):
    case, problems = load_case(_write(tmp_path / "c", TABLES), mode="strict")
    assert len(case.assets) == 8 and set(case.profiles) == {"LP1", "LP2"}


# --------------------------------------------------------------------------------------------------
# Random cells and random files never raise
# --------------------------------------------------------------------------------------------------
SPECIAL = ["", " ", "nan", "NaN", "-nan", "inf", "-Infinity", "1e999", "-1e999", "1e-400", "0", "-0", "#N/A", "#DIV/0!",
           "TRUE", "false", "7,5", "1.500,5", "1,500", "1_000", "0x1F", "½", "٣", "１２", '"', '""', "'", "\n", "\r",
           "\r\n", ",", ";", "\t", "#comment", "=1+2", "\ufeff", "\u00a0", "2025-03-30 02:30", "2025-10-26 02:00",
           "9999-12-31", "0001-01-01T00:00Z", "45659.5", "S1", "LP1", "D1", "pump", "IE3", "-1", "1" * 400]
CELL = st.one_of(
    st.sampled_from(SPECIAL),
    st.text(max_size=30),
    st.integers(min_value=-10**40, max_value=10**40).map(str),
    st.floats(allow_nan=True, allow_infinity=True).map(repr),
    st.floats(min_value=-1e6, max_value=1e6).map(lambda x: f"{x:.6g}"),
)
EDIT = st.tuples(st.sampled_from(sorted(TABLES)), st.integers(min_value=-1, max_value=60),
                 st.integers(min_value=0, max_value=25), CELL)


@settings(deadline=None, max_examples=60, suppress_health_check=[HealthCheck.too_slow])
@given(edits=st.lists(EDIT, min_size=1, max_size=4), quoted=st.booleans())
def test_random_cells_never_raise(edits, quoted):
    tables = {name: (list(header), [list(r) for r in rows]) for name, (header, rows) in TABLES.items()}
    for name, row, column, value in edits:
        header, rows = tables[name]
        target = header if row < 0 or not rows else rows[row % len(rows)]
        target[column % len(target)] = value
    with tempfile.TemporaryDirectory() as tmp:
        folder = _write(Path(tmp) / "case", tables, {name: quoted for name in tables})
        before = {p.name: p.read_bytes() for p in folder.iterdir()}
        result = load_case(folder)
        assert {p.name: p.read_bytes() for p in folder.iterdir()} == before
    _assert_well_formed(result)


FILES = sorted(TABLES) + ["case.toml", "finance.toml", "tariffs/t.toml", "options.csv", "profiles.parquet"]


@settings(deadline=None, max_examples=40, suppress_health_check=[HealthCheck.too_slow])
@given(name=st.sampled_from(FILES),
       content=st.one_of(st.binary(max_size=400), st.text(max_size=200).map(lambda t: t.encode("utf-8")),
                         st.text(max_size=200).map(lambda t: t.encode("utf-16")),
                         st.sampled_from([b"", b"\xef\xbb\xbf", b"\xff\xfe", b"PK\x03\x04", b"PAR1", b"[case]\ncase = 1\n",
                                          b"[finance]\n[finance.x]\n", b"a = 1\n" * 3, b"#\n" * 5])))
def test_random_file_contents_never_raise(name, content):
    with tempfile.TemporaryDirectory() as tmp:
        folder = _write(Path(tmp) / "case", TABLES)
        (folder / name).parent.mkdir(exist_ok=True)
        (folder / name).write_bytes(content)
        result = load_case(folder)
        assert (folder / name).read_bytes() == content
    _assert_well_formed(result)


WORKBOOK_CELL = st.one_of(
    CELL,
    st.sampled_from([True, False, None, 0, -5, 10**20, 1.5e308, -0.0, 45659.5, 45659, 1e-300,
                     dt.datetime(2025, 1, 2, 3), dt.date(2020, 5, 5), dt.time(3, 15), dt.timedelta(days=2),
                     "=1+2", "=NOW()", "#N/A"]),
    st.floats(allow_nan=False, allow_infinity=False),
)


@settings(deadline=None, max_examples=25, suppress_health_check=[HealthCheck.too_slow])
@given(edits=st.lists(st.tuples(st.sampled_from(["assets", "sites", "profiles", "duty", "capacitors", "case"]),
                                st.integers(min_value=1, max_value=8), st.integers(min_value=1, max_value=20),
                                WORKBOOK_CELL), min_size=1, max_size=4))
def test_random_workbook_cells_never_raise(edits):
    from openpyxl import load_workbook
    from openpyxl.cell.cell import ILLEGAL_CHARACTERS_RE
    from openpyxl.utils.exceptions import IllegalCharacterError

    with tempfile.TemporaryDirectory() as tmp:
        path = cb.write_workbook(Path(tmp) / "case.xlsx")
        book = load_workbook(path)
        for sheet_name, row, column, value in edits:
            sheet = book[sheet_name]
            cell = sheet.cell(1 + (row - 1) % max(sheet.max_row, 1), 1 + (column - 1) % max(sheet.max_column, 1))
            if isinstance(value, str):  # characters the file format cannot hold at all
                value = ILLEGAL_CHARACTERS_RE.sub("", value)
            try:
                cell.value = value
            except (ValueError, TypeError, IllegalCharacterError):  # a value the file format cannot hold
                continue
        book.save(path)
        before = path.read_bytes()
        result = load_case(path)
        assert path.read_bytes() == before
    _assert_well_formed(result)


# --------------------------------------------------------------------------------------------------
# Order independence and header spelling
# --------------------------------------------------------------------------------------------------
def _per_asset(case) -> dict[str, pd.DataFrame]:
    """Tables that describe each asset, keyed and sorted by id so row order cannot show."""
    defaults = case.defaults.sort_values(["asset_id", "column"]).reset_index(drop=True)
    defaults["value"] = defaults["value"].astype(str)
    return {
        "assets": case.assets.set_index("asset_id").sort_index(),
        "defaults": defaults,
        "sites": case.sites.set_index("site_id").sort_index(),
        "capacitors": case.capacitors.set_index("bank_id").sort_index(),
        "duty": case.duty.sort_values(["profile_id", "shaft_load_pct"]).reset_index(drop=True),
        "profile_info": case.profile_info.set_index("profile_id").sort_index(),
    }


_REFERENCE: dict[str, object] = {}


def _reference_case():
    if "case" not in _REFERENCE:
        with tempfile.TemporaryDirectory() as tmp:
            _REFERENCE["case"], _ = load_case(_write(Path(tmp) / "case", TABLES), mode="strict")
    return _REFERENCE["case"]


@settings(deadline=None, max_examples=15, suppress_health_check=[HealthCheck.too_slow])
@given(seed=st.integers(min_value=0, max_value=2**32 - 1))
def test_row_order_does_not_change_per_asset_results(seed):
    rng = random.Random(seed)
    shuffled = {}
    for name, (header, rows) in TABLES.items():
        rows = [list(r) for r in rows]
        rng.shuffle(rows)
        shuffled[name] = (header, rows)
    with tempfile.TemporaryDirectory() as tmp:
        case, problems = load_case(_write(Path(tmp) / "case", shuffled), mode="strict")
    reference = _reference_case()
    for key, expected in _per_asset(reference).items():
        pd.testing.assert_frame_equal(_per_asset(case)[key], expected, check_exact=True, obj=key)
    assert set(case.profiles) == set(reference.profiles)
    for pid, series in reference.profiles.items():
        pd.testing.assert_series_equal(case.profiles[pid], series, check_exact=True)
    assert {str(p) for p in problems if p.row is None} == {str(p) for p in reference.problems if p.row is None}


def _respell(name: str, draw) -> str:
    letters = [c.upper() if draw(st.booleans()) else c for c in name]
    text = "".join(letters).replace("_", draw(st.sampled_from(["_", " ", "  ", " _ "])))
    return draw(st.sampled_from(["", " ", "  "])) + text + draw(st.sampled_from(["", " ", "   "]))


@settings(deadline=None, max_examples=25, suppress_health_check=[HealthCheck.too_slow])
@given(data=st.data())
def test_header_case_and_spacing_do_not_matter(data):
    header = [_respell(h, data.draw) for h in cb.ASSET_HEADER]
    tables = dict(TABLES, **{"assets.csv": (header, ASSETS)})
    with tempfile.TemporaryDirectory() as tmp:
        case, problems = load_case(_write(Path(tmp) / "case", tables), mode="strict")
    reference = _reference_case()
    pd.testing.assert_frame_equal(case.assets, reference.assets, check_exact=True)
    assert not [p for p in problems if "unknown column" in p.rule]


# --------------------------------------------------------------------------------------------------
# Pieces
# --------------------------------------------------------------------------------------------------
@settings(deadline=None, max_examples=200)
@given(st.text(max_size=40))
def test_header_normalisation_is_idempotent(text):
    once = case_io.normalise_header(text)
    assert case_io.normalise_header(once) == once
    assert once == once.strip() and "  " not in once and once == once.lower()


TEXT = st.text(alphabet=st.characters(blacklist_categories=("Cc", "Cs"), blacklist_characters="\ufeff"), max_size=200)


@settings(deadline=None, max_examples=200)
@given(text=TEXT, codec=st.sampled_from(["utf-8", "utf-8-sig", "utf-16", "utf-16-be", "utf-32"]))
def test_decoding_round_trips(text, codec):
    data = text.encode(codec)
    if codec == "utf-16-be":  # a byte-order mark says which way round; without one, UTF-8 is tried first
        data = b"\xfe\xff" + data
    decoded, problems = case_io.decode_text(data, "a.csv")
    assert decoded == text
    assert not [p for p in problems if p.severity == "error"]


@settings(deadline=None, max_examples=300)
@given(x=st.floats(allow_nan=False, allow_infinity=False, min_value=-1e15, max_value=1e15))
def test_numbers_read_back_exactly(x):
    value, note = _to_number(repr(x))
    assert note is None and value == x  # repr round-trips a double exactly (IEEE 754, Python float repr)
    text = f"{x:.2f}"
    if "e" not in text and "." in text:
        # the same number with a decimal comma reads back equal, flagged as a repair
        comma, note = _to_number(text.replace(".", ","))
        assert note == "decimal comma read as a decimal point" and comma == float(text)


@settings(deadline=None, max_examples=100)
@given(st.sampled_from(["nan", "NaN", "inf", "-inf", "Infinity", "1e999", "-1e400"]).map(lambda s: s if s else s))
def test_non_finite_numbers_are_refused(text):
    value, note = _to_number(text)
    assert np.isnan(value) and note == "not a finite number"
