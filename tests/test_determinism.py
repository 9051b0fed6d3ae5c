"""Determinism: the same input gives the same case and the same result files, whatever the row order,
the process locale or the TZ environment variable.

The locale and time-zone checks run the command line in fresh processes with a changed environment
(``LC_ALL``/``LANG``, ``TZ``, and once the plain C locale with UTF-8 coercion switched off, where
Python's default text encoding is ASCII) on a small case built in ``tmp_path``, and compare every
result file byte for byte. A locale not installed is compiled with ``localedef`` into ``tmp_path`` when
its source is on the machine (``LOCPATH``); otherwise that environment is skipped with a note.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import os
import shutil
import subprocess
import sys
import textwrap
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import casebuilder as cb
from models.case import load_case

REPO = Path(__file__).resolve().parents[1]
DEMO = REPO / "data" / "demo"
DEMO_TARIFF = DEMO / "tariffs" / "example_tou_kw_reactive_ratchet.toml"  # invented, EUR, Europe/Berlin
#: The date loads are made on (an input: the default purchase date), the same for both loads compared.
TODAY = dt.date(2026, 12, 1)


def _case_tables(case) -> dict[str, object]:
    """Every table of a Case, for equality checks."""
    return {"assets": case.assets, "sites": case.sites, "capacitors": case.capacitors, "duty": case.duty,
            "options": case.options, "defaults": case.defaults, "profile_info": case.profile_info,
            "profiles": case.profiles, "settings": case.settings, "finance": case.finance,
            "problems": [str(p) for p in case.problems]}


def _assert_same_case(a, b) -> None:
    ta, tb = _case_tables(a), _case_tables(b)
    for key in ("assets", "sites", "capacitors", "duty", "options", "defaults", "profile_info"):
        pd.testing.assert_frame_equal(ta[key], tb[key], check_exact=True, obj=key)
    assert ta["profiles"].keys() == tb["profiles"].keys()
    for pid in ta["profiles"]:
        pd.testing.assert_series_equal(ta["profiles"][pid], tb["profiles"][pid], check_exact=True)
    assert ta["settings"] == tb["settings"] and ta["finance"] == tb["finance"]
    assert ta["problems"] == tb["problems"]


def _small_case(folder: Path) -> Path:
    """The small test case with a tariff, so that 'drivecase run' prices it (a second or two to run)."""
    rows = [list(r) for r in cb.ASSETS]
    rows[0][cb.ASSET_HEADER.index("description")] = "Kühlwasserpumpe"  # non-ASCII text through every locale
    # (a purchase date given: runs compared across midnight in the case's zone would otherwise differ by it)
    cb.write_case(folder, assets=rows, case_toml=cb.CASE_TOML + f'purchase_date = "{TODAY.isoformat()}"\n')
    cb.write_csv(folder / "sites.csv", cb.SITES_HEADER + ["tariff_file"], [cb.SITES[0] + ["t.toml"]])
    (folder / "tariffs").mkdir()
    shutil.copyfile(DEMO_TARIFF, folder / "tariffs" / "t.toml")
    return folder


class TestSameInputSameCase:
    def test_folder_loaded_twice(self, tmp_path):
        folder = _small_case(tmp_path / "c")
        first, _ = load_case(folder, mode="strict", today=TODAY)
        second, _ = load_case(folder, mode="strict", today=TODAY)
        _assert_same_case(first, second)

    def test_workbook_loaded_twice(self, tmp_path):
        book = cb.write_workbook(tmp_path / "case.xlsx")
        _assert_same_case(load_case(book, mode="strict", today=TODAY)[0], load_case(book, mode="strict", today=TODAY)[0])

    def test_demo_loaded_twice(self):
        # (the date is an input too: given, so that loads either side of midnight in the case's zone compare)
        first, _ = load_case(DEMO, mode="strict", today=TODAY)
        again, _ = load_case(DEMO, mode="strict", today=TODAY)
        _assert_same_case(first, again)


def _per_asset(case) -> dict[str, pd.DataFrame]:
    defaults = case.defaults.sort_values(["asset_id", "column"]).reset_index(drop=True)
    defaults["value"] = defaults["value"].astype(str)
    return {"assets": case.assets.set_index("asset_id").sort_index(),
            "defaults": defaults,
            "sites": case.sites.set_index("site_id").sort_index(),
            "capacitors": case.capacitors.set_index("bank_id").sort_index(),
            "duty": case.duty.sort_values(list(case.duty.columns)).reset_index(drop=True),
            "options": case.options.set_index("option_id").sort_index(),
            "profile_info": case.profile_info.set_index("profile_id").sort_index()}


class TestRowOrder:
    def test_demo_with_every_table_reversed_and_shuffled(self, tmp_path, demo_case):
        folder = tmp_path / "demo"
        shutil.copytree(DEMO, folder)
        rng = np.random.default_rng(20260101)
        for name in ("assets.csv", "sites.csv", "capacitors.csv", "duty.csv"):
            frame = pd.read_csv(folder / name, dtype=str, keep_default_na=False)
            frame.iloc[rng.permutation(len(frame))].to_csv(folder / name, index=False)
        profiles = pd.read_parquet(folder / "profiles.parquet")
        profiles.iloc[::-1].reset_index(drop=True).to_parquet(folder / "profiles.parquet", index=False)
        shuffled, _ = load_case(folder, mode="strict", today=dt.date.fromisoformat(demo_case.settings.purchase_date))
        assert list(shuffled.assets["asset_id"]) != list(demo_case.assets["asset_id"])  # the order did change
        got, expected = _per_asset(shuffled), _per_asset(demo_case)
        for key in expected:
            pd.testing.assert_frame_equal(got[key], expected[key], check_exact=True, obj=key)
        for pid, series in demo_case.profiles.items():
            pd.testing.assert_series_equal(shuffled.profiles[pid], series, check_exact=True)


def _installed_locales() -> set[str]:
    try:
        out = subprocess.run(["locale", "-a"], capture_output=True, text=True, timeout=10).stdout
    except (OSError, subprocess.SubprocessError):
        return set()
    return {line.strip().lower().replace("utf8", "utf-8") for line in out.splitlines()}


#: Environments that must not change anything: name -> variables set on top of a clean environment.
ENVIRONMENTS: dict[str, dict[str, str]] = {
    "utc_c_utf8": {"TZ": "UTC", "LC_ALL": "C.UTF-8", "LANG": "C.UTF-8"},
    "new_york": {"TZ": "America/New_York", "LC_ALL": "C.UTF-8", "LANG": "C.UTF-8"},
    "kolkata_posix": {"TZ": "Asia/Kolkata", "LC_ALL": "POSIX", "LANG": "POSIX"},
    "ascii_c_locale": {"TZ": "Pacific/Auckland", "LC_ALL": "C", "LANG": "C", "PYTHONCOERCECLOCALE": "0", "PYTHONUTF8": "0"},
    "german": {"TZ": "America/Sao_Paulo", "LC_ALL": "de_DE.UTF-8", "LANG": "de_DE.UTF-8"},
}


def _env(extra: dict[str, str]) -> dict[str, str]:
    keep = {k: v for k, v in os.environ.items()
            if not k.startswith(("LC_", "LANG", "TZ", "LOCPATH", "PYTHONUTF8", "PYTHONCOERCE"))}
    return {**keep, **extra}


def _locale_env(name: str, workdir: Path) -> dict[str, str] | None:
    """Variables that make the environment's locale available: {} when installed, LOCPATH to a locale
    compiled with localedef when its source is on the machine, None when neither."""
    wanted = ENVIRONMENTS[name]["LC_ALL"]
    key = wanted.lower().replace("utf8", "utf-8")
    if key in ("c", "posix", "c.utf-8") or key in _installed_locales():
        return {}
    source = wanted.split(".")[0]
    if shutil.which("localedef") is None or not Path("/usr/share/i18n/locales", source).is_file():
        return None
    target = workdir / "locales"
    target.mkdir(exist_ok=True)
    made = subprocess.run(["localedef", "-i", source, "-f", "UTF-8", str(target / wanted)], capture_output=True,
                          timeout=120)
    return {"LOCPATH": str(target)} if (target / wanted).is_dir() or made.returncode == 0 else None


def _digest(folder: Path) -> dict[str, str]:
    return {p.name: hashlib.sha256(p.read_bytes()).hexdigest() for p in sorted(folder.iterdir()) if p.is_file()}


SCRIPT = textwrap.dedent("""
    import hashlib, json, sys
    from drivecase.cli import main
    from models.case import load_case
    case, problems = load_case(sys.argv[1], mode="strict")
    tables = {"assets": case.assets, "sites": case.sites, "capacitors": case.capacitors, "duty": case.duty,
              "options": case.options, "defaults": case.defaults, "profile_info": case.profile_info}
    tables.update({"profile " + k: v.to_frame() for k, v in case.profiles.items()})
    digest = {k: hashlib.sha256(v.to_csv(float_format="%.17g").encode("utf-8")).hexdigest() for k, v in tables.items()}
    digest["problems"] = [str(p) for p in problems]
    code = main(["run", sys.argv[1], "--out", sys.argv[2], "--no-risk", "--quiet"])
    print("DIGEST " + json.dumps(digest, sort_keys=True))
    sys.exit(code)
""")


def _load_and_run(case: Path, out: Path, environment: str, extra: dict[str, str] | None = None) -> tuple[str, dict[str, str]]:
    """In a fresh process under ``environment``: digest of the loaded case's tables, and 'drivecase run'."""
    run = subprocess.run([sys.executable, "-c", SCRIPT, str(case), str(out)],
                         env=_env({**ENVIRONMENTS[environment], **(extra or {})}),
                         cwd=REPO, capture_output=True, text=True, timeout=300)
    assert run.returncode == 0, run.stdout + run.stderr
    digest = next(line for line in run.stdout.splitlines() if line.startswith("DIGEST "))
    return digest, _digest(out)


@pytest.fixture(scope="module")
def small_case(tmp_path_factory):
    return _small_case(tmp_path_factory.mktemp("determinism") / "case")


@pytest.fixture(scope="module")
def baseline(small_case, tmp_path_factory):
    return _load_and_run(small_case, tmp_path_factory.mktemp("baseline"), "utc_c_utf8")


class TestEnvironment:
    def test_baseline_has_result_files(self, baseline):
        assert {"results.csv", "cashflows.csv", "plan.csv"} <= set(baseline[1])

    @pytest.mark.parametrize("name", [n for n in ENVIRONMENTS if n != "utc_c_utf8"])
    def test_load_and_run_give_identical_bytes(self, name, small_case, baseline, tmp_path):
        extra = _locale_env(name, tmp_path)
        if extra is None:
            pytest.skip(f"locale {ENVIRONMENTS[name]['LC_ALL']} is neither installed (see 'locale -a') nor buildable")
        before = _digest(small_case)
        digest, files = _load_and_run(small_case, tmp_path / "out", name, extra)
        assert digest == baseline[0], "load_case gave different tables"
        assert files == baseline[1], "drivecase run wrote different bytes"
        assert _digest(small_case) == before  # the case's own files are never written


class TestReaderPaths:
    """Large plain CSV files go through pandas' C reader, others line by line: both give the same case."""

    @pytest.mark.parametrize("entry", [None, "semicolons_decimal_commas", "wrong_types", "non_finite_numbers",
                                       "duplicate_timestamps", "dst_spring_gap", "mixed_offsets", "trailing_empty_columns",
                                       "stray_extra_cell", "header_case_and_spaces"])
    def test_fast_and_line_by_line_readers_agree(self, entry, tmp_path, monkeypatch):
        from models import io as case_io
        from test_malformed import _build

        folder = _small_case(tmp_path / "c") if entry is None else _build(entry, tmp_path)
        monkeypatch.setattr(case_io, "FAST_CSV_BYTES", 10**12)
        slow_case, slow_problems = load_case(folder, today=TODAY)
        monkeypatch.setattr(case_io, "FAST_CSV_BYTES", 0)
        fast_case, fast_problems = load_case(folder, today=TODAY)
        assert [str(p) for p in fast_problems] == [str(p) for p in slow_problems]
        assert (fast_case is None) == (slow_case is None)
        if slow_case is not None:
            _assert_same_case(fast_case, slow_case)
