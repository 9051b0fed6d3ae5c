"""The drivecase command: new, check, exit codes and messages a user sees."""

from __future__ import annotations

import re
import csv
import os
import shutil
import subprocess
import sys
from pathlib import Path

import pandas as pd
import pytest

from drivecase.cli import main
from models import io as case_io

REPO = Path(__file__).resolve().parents[1]
DEMO = REPO / "data" / "demo"


def _edit_csv(path: Path, row_index: int, column: str, value: str) -> None:
    """Change one cell of a CSV (row_index 0 = first data row)."""
    with open(path, newline="", encoding="utf-8") as handle:
        rows = list(csv.reader(handle))
    header = rows[0]
    rows[row_index + 1][header.index(column)] = value
    with open(path, "w", newline="", encoding="utf-8") as handle:
        csv.writer(handle, lineterminator="\n").writerows(rows)


def test_check_demo_succeeds(capsys):
    assert main(["check", str(DEMO)]) == 0
    out = capsys.readouterr().out
    assert "invented" in out and "Installed power by site [kW]" in out and "qualified persons" in out


def test_check_gives_ratings_in_the_cases_unit(tmp_path, capsys):
    # the demo declared in hp. Hand calculation from data/demo/assets.csv: 80 ratings in kW summing to 8,081.2 kW
    # (10,837.07 hp) and two of 50 hp, so 10,937.1 hp installed (1 hp = 0.745699872 kW, NIST SP 811 B.9)
    case = tmp_path / "demo"
    shutil.copytree(DEMO, case)
    toml = (case / "case.toml").read_text(encoding="utf-8")
    assert 'power_unit = "kW"' in toml
    (case / "case.toml").write_text(toml.replace('power_unit = "kW"', 'power_unit = "hp"'), encoding="utf-8")
    assert main(["check", str(case)]) == 0
    out = capsys.readouterr().out
    assert "10,937.1 hp installed" in out and "Installed power by site [hp]" in out
    assert "Installed power by application [hp]" in out and "[kW]" not in out


def test_broken_demo_copy_names_both_problems(tmp_path, capsys):
    case = tmp_path / "demo"
    shutil.copytree(DEMO, case)
    _edit_csv(case / "assets.csv", 4, "rated_p_kw", "-200")      # sheet row 6
    _edit_csv(case / "assets.csv", 9, "profile_id", "NO-SUCH")   # sheet row 11
    assert main(["check", str(case)]) == 1
    out = capsys.readouterr().out
    assert "assets.csv, row 6, column 'rated_p_kw'" in out
    assert "assets.csv, row 11, column 'profile_id'" in out and "NO-SUCH" in out


def test_new_then_fill_then_check(tmp_path, capsys):
    case = tmp_path / "mycase"
    assert main(["new", str(case)]) == 0
    assert (case / "assets.csv").read_text(encoding="utf-8").startswith("#")
    # an empty template is not a valid case yet: the register has no rows
    assert main(["check", str(case)]) == 1
    with open(case / "sites.csv", "a", encoding="utf-8") as handle:  # without a tariff the site cannot be priced
        handle.write("S1,Main works,,,150,0.9,,\n")
    capsys.readouterr()
    assert main(["check", str(case)]) == 1
    out = capsys.readouterr().out
    assert "sites.csv, row" in out and "no tariff file named" in out and case_io.BLANK_CASE_TARIFF in out
    text = (case / "sites.csv").read_text(encoding="utf-8")
    (case / "sites.csv").write_text(text.replace("S1,Main works,,,150", f"S1,Main works,,{case_io.BLANK_CASE_TARIFF},150"),
                                    encoding="utf-8")
    with open(case / "assets.csv", "a", encoding="utf-8") as handle:
        header = [h for h in (case / "assets.csv").read_text(encoding="utf-8").splitlines() if not h.startswith("#")][0].split(",")
        rows = [
            {"asset_id": "M1", "site_id": "S1", "application": "pump", "rated_p_kw": "22", "poles": "4", "supply_f_hz": "50",
             "rated_v_v": "400", "operating_h_per_yr": "6000", "mean_load_pct": "70"},
            {"asset_id": "M2", "site_id": "S1", "application": "fan", "rated_p_hp": "40", "poles": "2", "supply_f_hz": "60",
             "rated_v_v": "460", "efficiency_class": "IE3", "operating_h_per_yr": "3000", "mean_load_pct": "55"},
        ]
        for row in rows:
            handle.write(",".join(row.get(h, "") for h in header) + "\n")
    capsys.readouterr()
    assert main(["check", str(case)]) == 0, capsys.readouterr().out


def test_new_workbook_then_check_reports_empty_register(tmp_path, capsys):
    book = tmp_path / "case.xlsx"
    assert main(["new", str(book)]) == 0
    assert book.is_file()
    assert main(["check", str(book)]) == 1
    assert "no rows" in capsys.readouterr().out


def test_new_workbook_holds_what_a_new_folder_holds(tmp_path, capsys):
    """The blank workbook carries the folder's catalogue, finance defaults and example tariff: filled with the
    same site and asset, both forms read as the same case, without a warning that something was missing."""
    from openpyxl import load_workbook

    from models.case import load_case

    folder, book = tmp_path / "folder", tmp_path / "book.xlsx"
    assert main(["new", str(folder)]) == 0
    assert "in tariffs/" in capsys.readouterr().out
    assert main(["new", str(book)]) == 0
    out = capsys.readouterr().out
    assert "in a sheet named 'tariff <file>.toml'" in out and "tariffs/" not in out
    site = {"site_id": "S1", "site_name": "Main works", "base_p_kw": 150, "base_power_factor": 0.9}
    asset = {"asset_id": "M1", "site_id": "S1", "application": "pump", "rated_p_kw": 22, "poles": 4, "supply_f_hz": 50,
             "rated_v_v": 400, "operating_h_per_yr": 6000, "mean_load_pct": 70}
    site_f = dict(site, tariff_file=case_io.BLANK_CASE_TARIFF)
    site_b = dict(site, tariff_file=case_io.BLANK_WORKBOOK_TARIFF)
    for table, row in (("sites", site_f), ("assets", asset)):
        text = (folder / f"{table}.csv").read_text(encoding="utf-8")
        header = [h for h in text.splitlines() if not h.startswith("#")][0].split(",")
        with open(folder / f"{table}.csv", "a", encoding="utf-8") as handle:
            handle.write(",".join(str(row.get(h, "")) for h in header) + "\n")
    wb = load_workbook(book)
    for table, row in (("sites", site_b), ("assets", asset)):
        ws = wb[table]
        ws.append([row.get(c.value) for c in ws[1]])
    wb.save(book)
    for target in (folder, book):
        assert main(["check", str(target)]) == 0
        out = capsys.readouterr().out
        assert "no finance assumptions" not in out and "options table has no rows" not in out, out
    a, _ = load_case(folder)
    b, _ = load_case(book)
    pd.testing.assert_frame_equal(a.options.reset_index(drop=True), b.options.reset_index(drop=True), check_dtype=False)
    assert a.finance == b.finance
    assert a.tariffs[case_io.BLANK_CASE_TARIFF] == b.tariffs[case_io.BLANK_WORKBOOK_TARIFF]


def test_new_never_overwrites(tmp_path, capsys):
    target = tmp_path / "existing"
    target.mkdir()
    (target / "keep.txt").write_text("mine", encoding="utf-8")
    assert main(["new", str(target)]) == 1
    assert (target / "keep.txt").read_text(encoding="utf-8") == "mine"
    assert "never overwrites" in capsys.readouterr().err


def test_check_missing_case(tmp_path, capsys):
    assert main(["check", str(tmp_path / "nope")]) == 1
    assert "does not exist" in capsys.readouterr().out


def test_console_command_runs():
    result = subprocess.run([sys.executable, "-m", "drivecase", "check", str(DEMO)], capture_output=True, text=True,
                            cwd=REPO, timeout=120)
    assert result.returncode == 0, result.stdout + result.stderr


def test_bad_arguments_exit_2():
    with pytest.raises(SystemExit) as info:
        main(["frobnicate"])
    assert info.value.code == 2


def test_run_announces_a_large_run_and_drives_the_dask_engine(tmp_path, capsys, monkeypatch):
    from drivecase import cli
    from test_scenario import _one_asset_case

    _one_asset_case(tmp_path / "case")
    monkeypatch.setattr(cli, "LARGE_RUN_S", 0.0)  # every run counts as large: the estimate is printed first
    assert main(["run", str(tmp_path / "case"), "--out", str(tmp_path / "local"), "--no-risk"]) == 0
    assert "Large run ahead" in capsys.readouterr().err
    assert main(["run", str(tmp_path / "case"), "--out", str(tmp_path / "dask"), "--no-risk", "--engine", "dask"]) == 0
    err = capsys.readouterr().err
    assert "sites" in err  # the per-site progress bar of the Dask engine
    local = (tmp_path / "local" / "results.csv").read_bytes()
    assert local == (tmp_path / "dask" / "results.csv").read_bytes()


def test_run_says_in_one_line_that_a_worker_kept_dying(tmp_path, capsys, monkeypatch):
    pytest.importorskip("distributed")
    from models import distributed as engine
    from test_scenario import _one_asset_case

    def lost(*_args, **_kwargs):
        raise engine.SiteLost("the task of site S1 (1 motor) was lost with its worker 3 times: ... run out of memory")

    _one_asset_case(tmp_path / "case")
    monkeypatch.setattr(engine, "run_distributed", lost)
    assert main(["run", str(tmp_path / "case"), "--out", str(tmp_path / "o"), "--no-risk", "--engine", "dask"]) == 1
    err = capsys.readouterr().err
    assert "drivecase run: the task of site S1 (1 motor) was lost" in err and "Traceback" not in err


def test_run_says_each_site_sent_again_after_its_result_was_lost(tmp_path, capsys, monkeypatch):
    pytest.importorskip("distributed")
    from models import distributed as engine
    from test_scenario import _one_asset_case

    real = engine.run_distributed

    def one_lost(*args, notice=None, **kwargs):
        notice("site S1: its result was lost (its worker left or failed); the site is sent again (attempt 2 of 3)")
        return real(*args, notice=notice, **kwargs)

    _one_asset_case(tmp_path / "case")
    monkeypatch.setattr(engine, "run_distributed", one_lost)
    assert main(["run", str(tmp_path / "case"), "--out", str(tmp_path / "o"), "--no-risk", "--engine", "dask"]) == 0
    err = capsys.readouterr().err
    assert ("drivecase run: site S1: its result was lost (its worker left or failed); the site is sent again "
            "(attempt 2 of 3)\n") in err


def test_run_plan_limits_and_the_settings_it_records(tmp_path, capsys):
    demo = shutil.copytree(DEMO, tmp_path / "demo")
    toml = demo / "case.toml"
    toml.write_text(toml.read_text(encoding="utf-8") + 'purchase_date = "2027-06-01"\n', encoding="utf-8")
    assert main(["run", str(demo), "--out", str(tmp_path / "a"), "--plan-seconds", "0"]) == 2
    assert "--plan-seconds" in capsys.readouterr().err
    assert main(["run", str(demo), "--out", str(tmp_path / "a"), "--quiet", "--no-risk", "--plan-gap", "5",
                 "--seed", "7"]) == 0
    out = capsys.readouterr().out
    line = next(text for text in out.splitlines() if "Exact plan:" in text)
    # the solver stops at the first plan proven within 5 %: the gap it states is at most that
    assert "proven within" in line or "optimal" in line
    if "proven within" in line:
        assert float(line.split("proven within ")[1].split(" %")[0]) <= 5.0
    # the result folder says what its numbers rest on: the rules date and region, the case's discount rate
    # (data/demo/finance.toml: 0.08), the seed given on the command line, the plan's tolerance
    assert "run_settings.csv" in out
    settings = pd.read_csv(tmp_path / "a" / "run_settings.csv", dtype=str, keep_default_na=False).set_index("setting")
    assert settings.loc["purchase_date", "value"] == "2027-06-01"
    assert settings.loc["region", "value"] == "EU"
    assert settings.loc["in_service_month", "value"] == ""  # the demo gives none: the analysis year's first month
    assert settings.loc["invented", "value"] == "true"
    assert settings.loc["finance.discount_rate_frac", "value"] == "0.08"
    assert settings.loc["finance.monte_carlo_seed", "value"] == "7"
    assert settings.loc["plan.gap_asked_frac", "value"] == "0.05"
    assert float(settings.loc["plan.gap_proven_frac", "value"]) <= 0.05
    assert settings["meaning"].str.len().min() > 0
    # the defaulted nameplate fields the summary points to (data/demo/assets.csv: HRW-D01 gives no efficiency)
    defaults = pd.read_csv(tmp_path / "a" / "defaults.csv")
    assert list(defaults.columns) == ["asset_id", "column", "value", "basis", "data_quality_pct"]
    assert len(defaults) and defaults["data_quality_pct"].between(0, 100).all()


def test_no_command_prints_help_and_version_is_known(capsys):
    assert main([]) == 2
    assert "usage: drivecase" in capsys.readouterr().err
    with pytest.raises(SystemExit) as info:
        main(["--version"])
    assert info.value.code == 0
    assert capsys.readouterr().out.startswith("drivecase ")


def test_bill_unknown_sweep_asset_is_refused_before_any_output(capsys):
    assert main(["bill", str(DEMO), "--site", "KGQ", "--reactive-sweep", "NO-SUCH"]) == 1
    captured = capsys.readouterr()
    assert "unknown asset 'NO-SUCH'" in captured.err and "Traceback" not in captured.err
    assert "Site KGQ" not in captured.out  # refused before the bills were printed


def test_bill_sweep_prices_the_bank_at_the_case_cost_unless_given(tmp_path, capsys):
    case = tmp_path / "demo"
    shutil.copytree(DEMO, case)
    finance = case / "finance.toml"
    text = finance.read_text(encoding="utf-8")
    assert "capacitor_cost_per_kvar = 35.0" in text
    finance.write_text(text.replace("capacitor_cost_per_kvar = 35.0", "capacitor_cost_per_kvar = 60.0"), encoding="utf-8")
    assert main(["bill", str(case), "--site", "KGQ", "--reactive-sweep", "KGQ-CR01"]) == 0
    out = capsys.readouterr().out
    assert "capacitor bank at 60 EUR/kVAr" in out
    assert "its taxes and levies included" in out  # the saving is the whole bill's change (the demo's tariff has VAT)
    assert "stepped capacitor bank (KGQ-C1) switches steps out" in out  # why the curve can dip (the demo's KGQ bank)
    assert "nan" not in out.lower()  # the first point has no marginal value: shown as '-'
    assert "[EUR/yr]" in out and "[kVAr]" in out
    assert main(["bill", str(case), "--site", "KGQ", "--reactive-sweep", "KGQ-CR01", "--capacitor-cost", "20"]) == 0
    assert "capacitor bank at 20 EUR/kVAr" in capsys.readouterr().out


def test_run_refuses_negative_seed_and_the_case_folder_as_output(tmp_path, capsys):
    case = tmp_path / "demo"
    shutil.copytree(DEMO, case)
    before = sorted(p.name for p in case.iterdir())
    assert main(["run", str(case), "--out", str(tmp_path / "o"), "--seed", "-5", "--quiet"]) == 2
    assert "--seed" in capsys.readouterr().err
    assert main(["run", str(case), "--out", str(case), "--quiet", "--no-risk"]) == 2
    assert "own folder" in capsys.readouterr().err
    assert main(["report", str(case), "--out", str(case)]) == 2
    assert "own folder" in capsys.readouterr().err
    assert sorted(p.name for p in case.iterdir()) == before


def test_run_prints_the_case_warnings(tmp_path, capsys):
    from test_scenario import _one_asset_case

    folder = tmp_path / "case"
    _one_asset_case(folder)
    finance = folder / "finance.toml"
    finance.write_text(finance.read_text(encoding="utf-8") + "horizon_years = 15\n", encoding="utf-8")
    assert main(["run", str(folder), "--out", str(tmp_path / "o"), "--no-risk", "--quiet"]) == 0
    captured = capsys.readouterr()
    assert "1 warning;" in captured.err and "horizon_years" in captured.err
    # without the uncertainty, its two files are written with headers only, and the run says so
    assert ("with --no-risk, risk.csv, tornado.csv, plan_risk.csv, plan_tornado.csv and npv_draws.csv hold their "
            "column headers only") in captured.out
    for name in ("risk.csv", "tornado.csv", "plan_risk.csv", "plan_tornado.csv", "npv_draws.csv"):
        assert len((tmp_path / "o" / name).read_text(encoding="utf-8").splitlines()) == 1


def test_run_dask_without_its_package_gives_a_message(tmp_path, capsys, monkeypatch):
    from test_scenario import _one_asset_case

    folder = tmp_path / "case"
    _one_asset_case(folder)
    monkeypatch.setitem(sys.modules, "distributed", None)  # as if the 'scale' extra were not installed
    assert main(["run", str(folder), "--out", str(tmp_path / "o"), "--no-risk", "--quiet", "--engine", "dask"]) == 1
    err = capsys.readouterr().err
    assert "the Dask engine needs the 'scale' extra (pip install -e '.[scale]')" in err and "Traceback" not in err
    assert not (tmp_path / "o").exists()


def test_run_dask_without_its_package_in_a_fresh_interpreter(tmp_path):
    """The same in a new interpreter where Dask cannot be imported at all (a meta-path hook refuses it, as
    an installation without the 'scale' extra would): a message, exit code 1, no traceback."""
    import subprocess

    from test_scenario import _one_asset_case

    folder = tmp_path / "case"
    _one_asset_case(folder)
    code = ("import sys\n"
            "class NoDask:\n"
            "    def find_spec(self, name, path=None, target=None):\n"
            "        if name.split('.')[0] in ('dask', 'distributed'):\n"
            "            raise ModuleNotFoundError(f'No module named {name!r}')\n"
            "sys.meta_path.insert(0, NoDask())\n"
            "from drivecase.cli import main\n"
            f"sys.exit(main(['run', {str(folder)!r}, '--out', {str(tmp_path / 'o')!r}, '--no-risk', '--quiet', "
            "'--engine', 'dask']))\n")
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=REPO, timeout=300)
    assert done.returncode == 1, done.stderr
    assert "the Dask engine needs the 'scale' extra" in done.stderr and "Traceback" not in done.stderr
    assert not (tmp_path / "o").exists()


def test_out_inside_the_case_folder_is_refused(tmp_path, capsys):
    """--out inside a case folder (results there would be read as part of the case next time) is refused
    as the case folder itself is, for run and report; a workbook case's own folder is refused too, for
    .xlsm as for .xlsx. Nothing is written (rule of this project: a case's files are never written to)."""
    case = tmp_path / "demo"
    shutil.copytree(DEMO, case)
    before = sorted(str(p.relative_to(case)) for p in case.rglob("*"))
    for out in (case / "tariffs", case / "results", case / "tariffs" / ".." / "new"):
        assert main(["run", str(case), "--out", str(out), "--quiet", "--no-risk"]) == 2
        assert "is inside the case's folder; give a folder outside it" in capsys.readouterr().err
        assert main(["report", str(case), "--out", str(out)]) == 2
        assert "inside the case's folder" in capsys.readouterr().err
    assert sorted(str(p.relative_to(case)) for p in case.rglob("*")) == before
    book = tmp_path / "books" / "case.xlsm"
    book.parent.mkdir()
    book.write_bytes(b"")  # refused before it is read
    assert main(["run", str(book), "--out", str(book.parent), "--quiet", "--no-risk"]) == 2
    assert "is the folder of the case workbook" in capsys.readouterr().err
    assert sorted(p.name for p in book.parent.iterdir()) == ["case.xlsm"]


def test_new_workbook_in_a_folder_points_check_at_the_workbook(tmp_path, capsys):
    assert main(["new", str(tmp_path / "blank"), "--workbook"]) == 0
    out = capsys.readouterr().out
    assert f"drivecase check {tmp_path / 'blank' / 'case.xlsx'}" in out


def test_bill_without_banks_says_zero_not_minus_zero(tmp_path, capsys):
    case = tmp_path / "demo"
    shutil.copytree(DEMO, case)
    header = (case / "capacitors.csv").read_text(encoding="utf-8").splitlines()[0]
    (case / "capacitors.csv").write_text(header + "\n", encoding="utf-8")  # no capacitor bank anywhere
    assert main(["bill", str(case), "--site", "HRW"]) == 0
    out = capsys.readouterr().out
    assert "supplied by capacitor banks 0 MVArh" in out and "-0 MVArh" not in out


def test_report_says_a_skipped_pdf_in_a_plain_line(tmp_path, capsys, monkeypatch):
    import models.pack.pdf as pdf
    from test_scenario import _one_asset_case

    folder = tmp_path / "case"
    _one_asset_case(folder)
    monkeypatch.setattr(pdf, "CHROMIUM_PATH", str(tmp_path / "no-such-browser"))
    assert main(["report", str(folder), "--out", str(tmp_path / "pack"), "--pdf"]) == 0
    captured = capsys.readouterr()
    assert "drivecase report: PDF skipped" in captured.err and "PackWarning" not in captured.err
    assert "write_pack(" not in captured.err and "PDF skipped" not in captured.out  # said once, on the error stream


def test_bill_models_today_s_motors_of_the_site_asked_for_and_prints_the_full_analysis_figures(capsys, monkeypatch):
    # drivecase bill reads today's bills only: it models today's motors (not the catalogue) of the site asked for,
    # on the whole case's analysis index; its table is the one the full analysis's baseline gives
    import models.operation as operation

    asked = []
    real = operation.operate
    monkeypatch.setattr(operation, "operate", lambda case, **kw: asked.append(case) or real(case, **kw))
    assert main(["bill", str(DEMO), "--site", "KGQ"]) == 0
    narrow = capsys.readouterr().out
    assert len(asked) == 1 and len(asked[0].options) == 1 and set(asked[0].assets["site_id"]) == {"KGQ"}
    monkeypatch.setattr(operation, "operate", real)
    assert main(["bill", str(DEMO)]) == 0
    whole = capsys.readouterr().out
    kgq = narrow[narrow.index("Site KGQ"):narrow.index("Reactive balance")]
    assert kgq in whole


def test_bill_shows_its_sites_progress_on_the_error_stream_unless_quiet(capsys):
    # the demo's two sites, modelled one after the other: one line each when the error stream is not a terminal
    assert main(["bill", str(DEMO)]) == 0
    captured = capsys.readouterr()
    lines = [line for line in captured.err.splitlines() if line.startswith("drivecase bill:")]
    assert [line.split(" (")[0] for line in lines] == ["drivecase bill: 1/2 sites", "drivecase bill: 2/2 sites"]
    assert "drivecase bill" not in captured.out and "Site HRW" in captured.out
    assert main(["bill", str(DEMO), "--quiet"]) == 0
    assert "drivecase bill:" not in capsys.readouterr().err


def test_progress_on_a_terminal_is_a_bar_that_keeps_its_clock_running(monkeypatch):
    import io
    import time

    from drivecase import cli

    class Terminal(io.StringIO):
        def isatty(self):
            return True

    screen = Terminal()
    monkeypatch.setattr(cli.sys, "stderr", screen)
    monkeypatch.setattr(cli._Progress, "REFRESH_S", 0.05)
    bar = cli._Progress(8, "drivecase run", "stage", quiet=False)
    bar.update(1)
    bar.set_postfix_str("fleet plan")
    drawn = screen.getvalue().count("\r")
    deadline = time.monotonic() + 5.0  # a long stage: the bar is redrawn with its elapsed time, unasked
    while screen.getvalue().count("\r") < drawn + 2 and time.monotonic() < deadline:
        time.sleep(0.05)
    assert screen.getvalue().count("\r") >= drawn + 2
    bar.close()
    text = screen.getvalue()
    assert "drivecase run:" in text and "1/8" in text and "fleet plan" in text and "<" not in text  # no time left


def test_progress_into_a_file_counts_items_by_tenths(monkeypatch, capsys):
    from drivecase import cli

    bar = cli._Progress(20, "sites", "site", quiet=False, lines_of_stages=False)
    for _ in range(20):
        bar.update(1)
    bar.close()
    lines = capsys.readouterr().err.splitlines()
    assert [line.split(" (")[0] for line in lines] == [f"sites: {k}/20 sites" for k in range(2, 21, 2)]


@pytest.mark.parametrize("command", ["run", "report"])
def test_estimate_alone_prints_the_estimate_and_writes_nothing(tmp_path, capsys, command):
    # the demo: 82 assets, 11 options (the catalogue with today's motor), an hourly year of 8,760 steps, 2 sites
    out = tmp_path / "o"
    assert main([command, str(DEMO), "--out", str(out), "--estimate"]) == 0
    printed = capsys.readouterr().out
    assert printed.startswith("Estimate: 82 assets x 11 options x 8,760 steps on 2 sites: about ")
    assert "GiB peak" in printed and not out.exists()


def test_max_memory_fits_the_run_and_says_what_it_keeps_less_of(tmp_path, capsys):
    # the demo, kept in full, is estimated at about 0.7 GiB; within 0.6 GiB every option's per-interval power is
    # given up (recomputed where read: the same numbers)
    assert main(["run", str(DEMO), "--out", str(tmp_path / "o"), "--estimate", "--max-memory", "0.6"]) == 0
    out = capsys.readouterr().out
    assert "Memory: within 0.6 GiB (as asked)" in out and "every option's per-interval power" in out
    assert "The numbers are the same" in out and not (tmp_path / "o").exists()


@pytest.mark.parametrize("command, limit", [("run", "0.01"), ("report", "0.01"), ("run", "1e-10")])
def test_max_memory_below_the_least_run_stops_with_a_message(tmp_path, capsys, command, limit):
    assert main([command, str(DEMO), "--out", str(tmp_path / "o"), "--max-memory", limit]) == 1
    err = capsys.readouterr().err
    assert f"drivecase {command}: the run cannot keep within {float(limit):g} GiB" in err
    assert "with the estimate's margin" in err and "Traceback" not in err and not (tmp_path / "o").exists()
    least = err.split("give --max-memory ")[1].split(" ")[0]
    assert 0.01 < float(least) < 1.0
    # the least limit said is accepted (rounded up, not to the nearest)
    assert main([command, str(DEMO), "--out", str(tmp_path / "o"), "--max-memory", least, "--estimate"]) == 0
    assert "cannot keep" not in capsys.readouterr().err
    assert not (tmp_path / "o").exists()


@pytest.mark.parametrize("text", ["0", "-2", "abc", "inf", "nan"])
def test_max_memory_must_be_a_memory_size(tmp_path, capsys, text):
    with pytest.raises(SystemExit) as info:
        main(["run", str(DEMO), "--out", str(tmp_path / "o"), f"--max-memory={text}"])
    assert info.value.code == 2
    assert "is not a memory size: give a number of GiB above 0" in capsys.readouterr().err


def test_a_run_fits_itself_to_the_machines_free_memory(tmp_path, capsys, monkeypatch):
    # 0.5 GiB free: 80 % of it (0.4 GiB) is below the demo's 0.7 GiB kept in full, so the run keeps less and says so
    from models import estimate, scenario

    monkeypatch.setattr(estimate, "available_bytes", lambda: 2**29)
    given = []
    real = scenario.run

    def spy(*args, budgets=None, **kwargs):
        given.append(budgets)
        return real(*args, budgets=budgets, **kwargs)

    monkeypatch.setattr(scenario, "run", spy)
    assert main(["run", str(DEMO), "--out", str(tmp_path / "o"), "--no-risk", "--quiet"]) == 0
    err = capsys.readouterr().err
    assert "Memory: within 0.4 GiB (80% of the 0.5 GiB this machine has free)" in err
    assert len(given) == 1 and given[0] is not None and given[0].dense_bytes == 0
    assert (tmp_path / "o" / "results.csv").exists()


def test_report_shows_its_stages_on_the_error_stream_unless_quiet(tmp_path, capsys):
    from test_scenario import _one_asset_case

    folder = tmp_path / "case"
    _one_asset_case(folder)
    assert main(["report", str(folder), "--out", str(tmp_path / "pack")]) == 0
    captured = capsys.readouterr()
    # (the error stream here is no terminal: one plain line per stage, no bar)
    stages = [line.split(": ", 1)[1].rsplit(" (", 1)[0] for line in captured.err.splitlines()
              if line.startswith("drivecase report: ") and line.endswith(" s)")]
    assert stages[0] == "machines" and stages[-1] == "pack" and "fleet plan" in stages and "\r" not in captured.err
    assert "drivecase report: machines" not in captured.out
    # the plan the pack carries is said on the terminal, as the report's headline gives it
    headline = next(line for line in captured.out.splitlines() if line.startswith("Fleet plan: "))
    assert "at the plan's start" in headline and "capital EUR " in headline
    assert any(line.startswith("Exact plan: ") for line in captured.out.splitlines())
    assert main(["report", str(folder), "--out", str(tmp_path / "pack2"), "--quiet", "--plan-seconds", "5"]) == 0
    assert "drivecase report: machines" not in capsys.readouterr().err
    assert main(["report", str(folder), "--out", str(tmp_path / "pack3"), "--plan-seconds", "0"]) == 2
    assert "--plan-seconds > 0" in capsys.readouterr().err


def test_report_again_into_its_folder_says_what_it_removed(tmp_path, capsys):
    # the demo's records of two assets, then of one: the other's record of the earlier pack goes, and is named
    out = tmp_path / "pack"
    assert main(["report", str(DEMO), "--out", str(out), "--assets", "HRW-P01,HRW-P02"]) == 0
    capsys.readouterr()
    assert main(["report", str(DEMO), "--out", str(out), "--assets", "HRW-P01"]) == 0
    assert ("Removed 1 file of the earlier pack in this folder that this pack does not cover: "
            "decision-records/HRW-P02.html.") in capsys.readouterr().out
    assert sorted(p.name for p in (out / "decision-records").iterdir()) == ["HRW-P01.html"]


def test_out_that_is_a_file_is_refused_before_any_work(tmp_path, capsys):
    afile = tmp_path / "afile"
    afile.write_text("mine", encoding="utf-8")
    assert main(["run", str(DEMO), "--out", str(afile), "--quiet"]) == 2
    assert "is a file, not a folder" in capsys.readouterr().err
    assert main(["report", str(DEMO), "--out", str(afile / "sub")]) == 2
    assert "which is a file" in capsys.readouterr().err
    assert afile.read_text(encoding="utf-8") == "mine"  # the user's file is left as it was


def test_scheduler_without_dask_and_empty_assets_are_refused(tmp_path, capsys):
    assert main(["run", str(DEMO), "--out", str(tmp_path / "o"), "--scheduler", "tcp://192.0.2.1:8786"]) == 2
    assert "add --engine dask" in capsys.readouterr().err
    assert main(["report", str(DEMO), "--out", str(tmp_path / "p"), "--assets", " , "]) == 2
    assert "--assets names no asset" in capsys.readouterr().err
    assert not (tmp_path / "o").exists() and not (tmp_path / "p").exists()


def test_misspelt_heading_is_named_first_with_a_guess(tmp_path, capsys):
    case = tmp_path / "demo"
    shutil.copytree(DEMO, case)
    text = (case / "assets.csv").read_text(encoding="utf-8")
    (case / "assets.csv").write_text(text.replace("rated_p_kw", "rated_pkw", 1), encoding="utf-8")
    assert main(["check", str(case)]) == 1
    lines = [l for l in capsys.readouterr().out.splitlines() if l.startswith("  ")]
    # the cause first (the heading that looks like rated_p_kw), then one error for the file (not one per unrated
    # row), carrying the guess; data/demo/assets.csv: 82 motors, 2 of them rated in hp (rated_p_hp) and so still rated
    assert lines[0].startswith("  ERROR assets.csv, column 'rated_pkw': unknown column 'rated_pkw': it looks like "
                               "'rated_p_kw'") and "did you mean 'rated_p_kw'?" in lines[0]
    assert lines[1].startswith("  ERROR assets.csv, column 'rated_p_kw': no rated_p_kw column: 80 motors")
    assert "if it is rated_p_kw, head it 'rated_p_kw'" in lines[1]
    assert sum("rated_p_kw" in l and "ERROR" in l for l in lines) == 2


def test_a_misspelt_optional_heading_is_the_first_error_and_its_rows_are_folded(tmp_path, capsys):
    import csv

    case = tmp_path / "demo"
    shutil.copytree(DEMO, case)
    with open(case / "assets.csv", encoding="utf-8", newline="") as f:
        profiled = sum(1 for row in csv.DictReader(f) if row["profile_id"].strip())  # the demo's motors with a profile
    text = (case / "assets.csv").read_text(encoding="utf-8")
    (case / "assets.csv").write_text(text.replace(",profile_id,", ",profil_id,", 1), encoding="utf-8")
    assert main(["check", str(case)]) == 1
    lines = [l for l in capsys.readouterr().out.splitlines() if l.startswith("  ERROR")]
    assert lines[0].startswith("  ERROR assets.csv, column 'profil_id': unknown column 'profil_id': it looks like "
                               "'profile_id'")
    # each motor with a profile now gives neither a profile nor hours and load: 20 rows listed, one line counts the rest
    rows = [l for l in lines[1:] if "give a profile_id, or both operating_h_per_yr and mean_load_pct" in l]
    assert len(rows) == 21 and len(lines) == 22
    assert f"{profiled - 20} more rows alike, the first of them in this row" in rows[-1]


def test_whole_file_without_ratings_is_one_message(tmp_path, capsys):
    import casebuilder as cb

    rows = [r[:4] + [""] + r[5:] for r in cb.ASSETS]  # every rated_p_kw blank, no rated_p_hp column
    folder = cb.write_case(tmp_path / "c", assets=rows)
    assert main(["check", str(folder)]) == 1
    out = capsys.readouterr().out
    assert out.count("rated power") == 1 and "no rated power column" in out


def test_new_case_starts_with_finance_options_and_an_example_tariff(tmp_path, capsys):
    # a new folder holds the program's default finance assumptions (read back unchanged), the shipped
    # options catalogue to edit and an invented example tariff: check then asks only for assets and sites
    import tomllib

    from models.finance import FinanceAssumptions
    from models.io import DEFAULT_OPTIONS_PATH

    folder = tmp_path / "new"
    assert main(["new", str(folder)]) == 0
    data = tomllib.loads((folder / "finance.toml").read_text(encoding="utf-8"))
    assumptions, problems = FinanceAssumptions.from_dict({**data, "currency": "EUR"}, source="finance.toml")
    assert not problems and assumptions == FinanceAssumptions()
    assert (folder / "options.csv").read_text(encoding="utf-8") == DEFAULT_OPTIONS_PATH.read_text(encoding="utf-8")
    assert list((folder / "tariffs").glob("*.toml"))
    capsys.readouterr()
    assert main(["check", str(folder)]) == 1
    out = capsys.readouterr().out
    assert "0 warnings" in out and "asset register has no rows" in out and "sites table has no rows" in out


def test_serve_prints_its_address_and_cautions_at_once_into_a_pipe(tmp_path):
    """Started with its output going to a pipe (a log file, a service manager), the dashboard says where it
    listens and the cautions as soon as it starts, not when it stops (a pipe's output is held in blocks)."""
    import socket
    import time

    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]
    case = tmp_path / "demo"
    shutil.copytree(DEMO, case)
    proc = subprocess.Popen([sys.executable, "-m", "drivecase", "serve", str(case), "--no-browser", "--port", str(port)],
                            stdout=subprocess.PIPE, stderr=subprocess.DEVNULL, text=True, cwd=REPO)
    import queue
    import threading

    lines: queue.Queue = queue.Queue()
    # read in a thread: a pipe read blocks, so the deadline below holds even if the server says nothing at all
    threading.Thread(target=lambda: [lines.put(x) for x in iter(proc.stdout.readline, "")], daemon=True).start()
    try:
        seen, deadline = [], time.monotonic() + 120
        while time.monotonic() < deadline:
            try:
                line = lines.get(timeout=max(0.1, deadline - time.monotonic()))
            except queue.Empty:
                break
            seen.append(line)
            if "qualified persons" in line:
                break
        text = "".join(seen)
        assert f"Dashboard on http://127.0.0.1:{port}" in text and "qualified persons" in text, text
        assert proc.poll() is None  # still serving: the lines came while it runs
    finally:
        proc.terminate()
        proc.wait(timeout=30)


def test_run_names_withdrawn_reactive_projects_as_a_reader_knows_them(tmp_path, capsys):
    # the demo's plan leaves terminal capacitors out (test_scenario.py); the summary names them by asset and the
    # option's catalogue label ("Motor-terminal capacitor", data/defaults/options.csv), not "HRW-A01/capacitor"
    assert main(["run", str(DEMO), "--out", str(tmp_path / "out"), "--quiet", "--no-risk", "--plan-gap", "5"]) == 0
    line = next(text for text in capsys.readouterr().out.splitlines() if "left out of the plan" in text)
    named = line.split("own saving (", 1)[1].split(")", 1)[0]
    assert ": Motor-terminal capacitor" in named and "/" not in named, line


def test_run_names_the_ten_best_options_by_their_catalogue_labels(tmp_path, capsys):
    # the table of best options names each option and what the plan takes as the catalogue does
    # (data/defaults/options.csv labels, e.g. "PM motor on a drive"), not by option id ("pm_drive")
    assert main(["run", str(DEMO), "--out", str(tmp_path / "out"), "--quiet", "--no-risk", "--plan-gap", "5"]) == 0
    out = capsys.readouterr().out
    # installed power in the summary; hand calculation from data/demo/assets.csv (test above): 8,081.2 kW plus
    # two of 50 hp (2 x 37.28 kW) is 8,155.8 kW
    assert "82 assets (8,156 kW installed)" in out
    # the plan's cautions the dashboard and the pack give, on the command line too: the demo's plan rests mostly on
    # assets with defaulted nameplates (models.plan.low_data_quality), and its catalogue prices are illustrative
    assert "  Data quality: " in out and "rest on assets whose data-quality score is below 70 %" in out
    assert "  Capital: the options catalogue's prices are illustrative cost curves, not quotes" in out
    table = out.split("Ten best options by NPV", 1)[1].split("Files written", 1)[0]
    assert "PM motor on a drive" in table and "pm_drive" not in table and "add_drive" not in table
    assert "Simple payback: years from the outlay" in table and "not capital / yearly saving" in table


def test_run_with_an_empty_plan_says_it_has_no_uncertainty_of_its_own(tmp_path, capsys):
    # a budget of nothing a year: no project fits, so the plan has no Monte Carlo of its own; the run says so
    import shutil

    case = Path(shutil.copytree(DEMO, tmp_path / "demo"))
    finance = case / "finance.toml"
    finance.write_text(re.sub(r"(?m)^budget_per_yr = .*$", "budget_per_yr = [0, 0, 0]",
                              finance.read_text(encoding="utf-8")), encoding="utf-8")
    assert main(["run", str(case), "--out", str(tmp_path / "out"), "--quiet", "--plan-gap", "5"]) == 0
    out = capsys.readouterr().out
    assert "Plan under the budget: 0 projects" in out
    assert "Plan NPV under uncertainty: none to show, the plan holds no project under this budget" in out


def test_an_output_folder_that_cannot_be_written_gives_one_line(tmp_path, capsys, monkeypatch):
    # a folder the user may not write into (read-only media, another user's folder, an immutable flag that even
    # root meets): the commands say so in one line, no traceback, and leave the case alone
    from models import exports, io, pack

    case = Path(shutil.copytree(DEMO, tmp_path / "case"))
    before = {p.name: p.read_bytes() for p in case.iterdir() if p.is_file()}

    def denied(*args, **kwargs):
        raise PermissionError(13, "Permission denied", str(tmp_path / "out" / ".results.csv.part"))

    monkeypatch.setattr(exports, "write_run", denied)
    monkeypatch.setattr(pack, "write_pack", denied)
    monkeypatch.setattr(io, "write_blank_case", denied)
    assert main(["run", str(case), "--out", str(tmp_path / "out"), "--quiet", "--no-risk", "--plan-gap", "5"]) == 1
    assert main(["new", str(tmp_path / "blank")]) == 1
    err = capsys.readouterr().err
    for command in ("run", "new"):  # report writes its pack through the same handler (cli._write_failed)
        assert f"drivecase {command}: could not write into" in err and "Permission denied" in err
    assert "Traceback" not in err
    assert {p.name: p.read_bytes() for p in case.iterdir() if p.is_file()} == before


def test_a_full_disk_leaves_the_earlier_runs_files_whole(tmp_path, monkeypatch, capsys):
    # the disk fills while the fifth file of a second run is written: the folder keeps the first run's files,
    # byte for byte, and the user is told what to do
    import errno

    from models import exports

    out = tmp_path / "out"
    args = ["run", str(DEMO), "--out", str(out), "--quiet", "--no-risk", "--plan-gap", "5"]
    assert main(args) == 0
    first = {p.name: p.read_bytes() for p in out.iterdir()}
    real, calls = exports._write_temp, []

    def full_at_the_fifth(path, data):
        calls.append(path.name)
        if len(calls) == 5:
            raise OSError(errno.ENOSPC, "No space left on device", str(path))
        return real(path, data)

    monkeypatch.setattr(exports, "_write_temp", full_at_the_fifth)
    capsys.readouterr()
    assert main(args + ["--seed", "7"]) == 1
    err = capsys.readouterr().err
    assert "No space left on device" in err and "free some space" in err and "as they were" in err
    assert "Traceback" not in err
    assert {p.name: p.read_bytes() for p in out.iterdir()} == first


@pytest.mark.skipif(not hasattr(os, "geteuid") or os.geteuid() == 0, reason="root may write into any folder")
def test_a_read_only_output_folder_is_refused_before_the_run(tmp_path, capsys):
    import casebuilder as cb

    case = cb.write_case(tmp_path / "case")
    out = tmp_path / "out"
    out.mkdir()
    out.chmod(0o555)
    try:
        assert main(["run", str(case), "--out", str(out), "--quiet", "--no-risk"]) == 2
    finally:
        out.chmod(0o755)
    assert "cannot write into" in capsys.readouterr().err


def test_a_scheduler_address_that_is_not_one_gets_a_plain_message_without_waiting(tmp_path, capsys):
    # the Dask dashboard's web address, a malformed one, a port where nothing listens and a port that answers but
    # is not a scheduler (a silent server, as the dashboard's port is to a scheduler's client): each a one-line
    # message naming the expected form, in seconds rather than a wait without end
    import socket
    import time

    pytest.importorskip("distributed")
    from test_scenario import _one_asset_case

    _one_asset_case(tmp_path / "case")
    silent = socket.socket()
    silent.bind(("127.0.0.1", 0))
    silent.listen()
    port = silent.getsockname()[1]
    free = socket.socket()
    free.bind(("127.0.0.1", 0))
    closed_port = free.getsockname()[1]
    free.close()
    cases = {"http://127.0.0.1:8787": "is a web address, such as the Dask dashboard's",
             "foo bar": "is not a scheduler address",
             f"tcp://127.0.0.1:{closed_port}": "nothing listens at",
             f"tcp://127.0.0.1:{port}": "answers but is not a Dask scheduler"}
    try:
        for address, said in cases.items():
            start = time.monotonic()
            rc = main(["run", str(tmp_path / "case"), "--out", str(tmp_path / "o"), "--no-risk", "--quiet",
                       "--engine", "dask", "--scheduler", address])
            err = capsys.readouterr().err
            assert rc == 1 and said in err, err
            assert "Traceback" not in err
            assert time.monotonic() - start < 30.0
    finally:
        silent.close()


def test_the_commands_own_mistakes_come_before_the_case_is_read(tmp_path, capsys):
    # --scheduler without --engine dask is a mistake of the command line: said first, not after the case's warnings
    assert main(["run", str(DEMO), "--out", str(tmp_path / "o"), "--scheduler", "tcp://127.0.0.1:8786"]) == 2
    captured = capsys.readouterr()
    assert "add --engine dask" in captured.err and "Case " not in captured.err + captured.out


def test_ctrl_c_ends_a_command_with_one_line(monkeypatch, capsys):
    from drivecase import cli

    def interrupted(args):
        raise KeyboardInterrupt

    parser_default = cli.build_parser
    monkeypatch.setattr(cli, "build_parser", lambda: _with_check(parser_default(), interrupted))
    assert main(["check", str(DEMO)]) == 130
    err = capsys.readouterr().err
    assert err.strip() == "drivecase check: interrupted"


def test_the_command_leaves_at_once_after_ctrl_c_without_waiting_for_the_plan_s_solver(monkeypatch):
    # the exact plan's solver thread cannot be stopped: after Ctrl+C the command's process exits without joining
    # it (os._exit); after any other ending it exits as usual
    from drivecase import cli

    left = []
    monkeypatch.setattr(cli.os, "_exit", left.append)
    main_itself = cli.main

    def interrupted_check(args):
        raise KeyboardInterrupt

    parser_default = cli.build_parser
    monkeypatch.setattr(cli, "build_parser", lambda: _with_check(parser_default(), interrupted_check))
    monkeypatch.setattr(cli, "main", lambda argv=None: main_itself(["check", str(DEMO)]))
    assert cli.entry() == 130 and left == [130]
    left.clear()
    monkeypatch.setattr(cli, "main", lambda argv=None: main_itself(["check", str(DEMO), "--help-never"]))  # exit 2
    with pytest.raises(SystemExit):
        cli.entry()
    assert left == []


def test_the_dashboard_command_leaves_at_once_once_stopped(monkeypatch):
    # a request of the dashboard may still be solving a plan in its thread when Ctrl+C stops the server: the
    # command exits without finalising the interpreter around it (os._exit), with the server's own code
    from drivecase import cli
    from dashboard import server

    left = []
    monkeypatch.setattr(cli.os, "_exit", left.append)
    monkeypatch.setattr(server, "serve", lambda *a, **k: 0)
    monkeypatch.setitem(cli._LEAVE_AT_ONCE, "serve", False)
    monkeypatch.setattr(cli, "main", lambda argv=None, main_itself=cli.main: main_itself(["serve", "--no-browser"]))
    ran = []  # the exit handlers still run first (the dashboard's uploads folder is removed by one); not this
    # process's own here, which the rest of the tests need
    import atexit

    monkeypatch.setattr(atexit, "_run_exitfuncs", lambda: ran.append("handlers"))
    assert cli.entry() == 0 and left == [0] and ran == ["handlers"]


def test_ctrl_c_beside_the_plan_does_not_wait_for_the_plan(tmp_path, monkeypatch):
    # Ctrl+C while the risk runs beside a plan still searching: the run stops at once, not when the search ends
    import time

    from models import scenario
    from models.case import load_case
    from test_scenario import _one_asset_case

    folder = tmp_path / "case"
    _one_asset_case(folder)
    case, _ = load_case(folder)
    monkeypatch.setattr(scenario, "_plan_with_interactions", lambda *a, **k: time.sleep(6))

    def pressed(*args, **kwargs):
        raise KeyboardInterrupt

    monkeypatch.setattr(scenario, "_risk", pressed)
    t0 = time.perf_counter()
    with pytest.raises(KeyboardInterrupt):
        scenario.run(case, case.finance)
    assert time.perf_counter() - t0 < 4.0


def test_an_error_beside_the_plan_waits_for_the_plan(tmp_path, monkeypatch):
    # an error (not Ctrl+C) while the plan is searched beside the risk: the run waits for the plan's thread before
    # it raises, so nothing reads the run's rows after it ends
    import time

    from models import scenario
    from models.case import load_case
    from test_scenario import _one_asset_case

    folder = tmp_path / "case"
    _one_asset_case(folder)
    case, _ = load_case(folder)
    finished = []
    monkeypatch.setattr(scenario, "_plan_with_interactions", lambda *a, **k: time.sleep(1.5) or finished.append(1))

    def broken(*args, **kwargs):
        raise ValueError("risk failed")

    monkeypatch.setattr(scenario, "_risk", broken)
    with pytest.raises(ValueError, match="risk failed"):
        scenario.run(case, case.finance)
    assert finished == [1]


def _with_check(parser, func):
    """The parser with the check command's function replaced (the parser keeps the function it was built with)."""
    for action in parser._subparsers._group_actions:
        action.choices["check"].set_defaults(func=func)
    return parser


def test_a_worker_without_drivecase_gives_a_message(tmp_path, capsys, monkeypatch):
    # a Dask worker whose Python lacks drivecase fails to unpickle the site's task with ModuleNotFoundError, which
    # the client re-raises; the command says what to install where, without a traceback
    pytest.importorskip("distributed")
    from models import distributed as engine
    from test_scenario import _one_asset_case

    def no_package(*args, **kwargs):
        raise ModuleNotFoundError("No module named 'models'")

    monkeypatch.setattr(engine, "run_distributed", no_package)
    _one_asset_case(tmp_path / "case")
    assert main(["run", str(tmp_path / "case"), "--out", str(tmp_path / "o"), "--no-risk", "--quiet",
                 "--engine", "dask"]) == 1
    err = capsys.readouterr().err
    assert "a Dask worker could not load drivecase's code (No module named 'models')" in err
    assert "in the Python every worker runs" in err and "Traceback" not in err


def test_run_progress_counts_stages_and_says_when_it_waits_for_the_plan(tmp_path, capsys):
    # ten stages (drivecase.cli.STAGES), each said once in order (the error stream here is no terminal: one
    # line per stage); the plan's "finishing" note, shown while the plan solved beside the risk is awaited, is a
    # line of its own between them
    from drivecase.cli import STAGES

    assert main(["run", str(DEMO), "--out", str(tmp_path / "o")]) == 0
    said = [line.split(": ", 1)[1].rsplit(" (", 1)[0] for line in capsys.readouterr().err.splitlines()
            if line.startswith("drivecase run: ") and line.endswith(" s)")]
    assert [s for s in said if s in STAGES] == list(STAGES)
    assert "fleet plan (finishing)" in said
    # the named scenarios' plans (data/demo/scenarios.toml: three) are said one by one before the files are
    # written, so the run does not fall silent after the bills
    notes = said[said.index("scenarios") + 1:said.index("files")]
    assert [n.split(":")[0] for n in notes] == ["scenario 1 of 3", "scenario 2 of 3", "scenario 3 of 3"]


def test_bill_says_when_the_analysis_prices_at_another_level(tmp_path, capsys):
    # drivecase bill prints the tariff as written; with energy_price_factor 1.2 the analysis's bills are these x 1.2
    case = shutil.copytree(DEMO, tmp_path / "demo")
    finance = case / "finance.toml"
    finance.write_text(finance.read_text(encoding="utf-8") + "energy_price_factor = 1.2\n", encoding="utf-8")
    assert main(["bill", str(case), "--site", "KGQ"]) == 0
    out = capsys.readouterr().out
    assert "at the tariff as written" in out and "energy_price_factor = 1.2" in out and "x 1.2" in out


def _leading_banned_case(folder: Path) -> Path:
    """A 90 kW pump running all year beside a 20 kW base load at 0.9 and a 40 kVAr fixed bank, priced by the
    example tariff whose night leading kVArh are banned (data/tariffs/example_pf_adjusted_demand.toml)."""
    folder.mkdir(parents=True)
    (folder / "case.toml").write_text('[case]\nname = "Banned leading (invented)"\ncurrency = "USD"\n'
                                      'time_zone = "America/Chicago"\nregion = "OTHER"\ninvented = true\n',
                                      encoding="utf-8")
    (folder / "assets.csv").write_text(
        "asset_id,site_id,application,rated_p_kw,poles,supply_f_hz,rated_v_v,efficiency_class,rated_efficiency_pct,"
        "rated_power_factor,rated_speed_rpm,year_installed,speed_control,operating_h_per_yr,mean_load_pct\n"
        "M1,S1,pump,90,4,60,460,IE1,92.0,0.84,1775,2000,throttled,8760,70\n", encoding="utf-8")
    (folder / "sites.csv").write_text("site_id,tariff_file,base_p_kw,base_power_factor\n"
                                      "S1,example_pf_adjusted_demand.toml,20,0.9\n", encoding="utf-8")
    (folder / "capacitors.csv").write_text("site_id,bank_id,rated_q_kvar,control\nS1,C1,40,fixed\n", encoding="utf-8")
    (folder / "tariffs").mkdir()
    shutil.copy(REPO / "data" / "tariffs" / "example_pf_adjusted_demand.toml", folder / "tariffs")
    return folder


def test_bill_of_a_site_with_base_load_alone(tmp_path, capsys):
    # a second site S2 of 30 kW base load and no motor: asked alone it is billed as within the whole case
    case = _leading_banned_case(tmp_path / "case")
    (case / "sites.csv").write_text("site_id,tariff_file,base_p_kw,base_power_factor\n"
                                    "S1,example_pf_adjusted_demand.toml,20,0.9\n"
                                    "S2,example_pf_adjusted_demand.toml,30,0.9\n", encoding="utf-8")
    assert main(["bill", str(case)]) == 0
    whole = capsys.readouterr().out
    assert main(["bill", str(case), "--site", "S2"]) == 0
    alone = capsys.readouterr().out
    s2 = alone[alone.index("Site S2"):alone.index("Reactive balance")]
    assert s2 in whole and "yearly 263 MWh" in s2  # 30 kW x 8,760 h = 262.8 MWh (hand calculation)


def test_a_plan_that_makes_a_site_lead_where_its_tariff_bans_it_is_cautioned(tmp_path, capsys):
    # with today's lagging pump the site never leads; a PM motor on a drive runs near unity power factor, so the
    # 40 kVAr bank makes the site lead at night, which the tariff bans (its [[leading]] clause, banned = true).
    # Hand calculation: at night the meter's kVAr is about 20 x tan(acos 0.9) + (drive ~0) - 40 = 9.7 - 40 < 0
    case = _leading_banned_case(tmp_path / "case")
    assert main(["run", str(case), "--out", str(tmp_path / "o"), "--quiet", "--no-risk"]) == 0
    out = capsys.readouterr().out
    bills = pd.read_csv(tmp_path / "o" / "bills.csv")
    banned = bills[bills["banned"]]
    plan = pd.read_csv(tmp_path / "o" / "plan.csv")
    assert list(plan["option_id"]) == ["pm_drive"] and (banned["scenario"] == "plan").sum() == 12  # every month
    assert "CAUTION: With the plan in place, site S1 is billed" in out and "where its tariff bans them" in out
    assert not (banned["scenario"] == "baseline").any()  # today the site lags
    assert (banned["line_item"].str.startswith("leading:")).all()


def test_bill_cautions_a_site_that_leads_where_its_tariff_bans_it(tmp_path, capsys):
    # a 150 kVAr fixed bank beside the pump (about 48 kVAr lagging at 70 % load) and the base load (9.7 kVAr):
    # the site leads at night already today (hand estimate: 48 + 9.7 - 150 < 0)
    case = _leading_banned_case(tmp_path / "case")
    (case / "capacitors.csv").write_text("site_id,bank_id,rated_q_kvar,control\nS1,C1,150,fixed\n", encoding="utf-8")
    assert main(["bill", str(case)]) == 0
    out = capsys.readouterr().out
    assert "CAUTION: Today, site S1 is billed" in out and "where its tariff bans them (leading:night leading kVArh)" in out


def test_an_asset_id_in_another_case_gets_a_did_you_mean(tmp_path, capsys):
    # asset ids are matched exactly; one typed in lower case is named with the register's spelling
    assert main(["bill", str(DEMO), "--site", "KGQ", "--reactive-sweep", "kgq-cr01"]) == 1
    assert "did you mean 'KGQ-CR01'?" in capsys.readouterr().err
    assert main(["report", str(DEMO), "--out", str(tmp_path / "p"), "--assets", "hrw-p01"]) == 1
    assert "did you mean 'HRW-P01'?" in capsys.readouterr().err


def test_run_says_why_the_end_of_life_files_are_empty(tmp_path, capsys):
    # a catalogue without a rewind row has no end-of-life comparison: the run says so beside the files
    case = shutil.copytree(DEMO, tmp_path / "demo")
    catalogue = (REPO / "data" / "defaults" / "options.csv").read_text(encoding="utf-8").splitlines()
    kept = [line for line in catalogue if not line.startswith("rewind,")]
    assert len(kept) == len(catalogue) - 1
    (case / "options.csv").write_text("\n".join(kept) + "\n", encoding="utf-8")
    assert main(["run", str(case), "--out", str(tmp_path / "o"), "--quiet", "--no-risk", "--plan-gap", "5"]) == 0
    out = capsys.readouterr().out
    assert "end_of_life.csv and fleet_rules.csv hold column headers only" in out


def test_run_says_how_much_of_the_plans_capital_the_budgets_cover_when_replacements_wait_for_failure(tmp_path, capsys):
    # under replace_at_failure a replacement is bought at its motor's expected failure, often after the budgeted
    # plan years (data/demo/finance.toml budgets three years): the summary splits the plan's capital so
    case = shutil.copytree(DEMO, tmp_path / "demo")
    finance = case / "finance.toml"
    text = finance.read_text(encoding="utf-8")
    assert 'replacement_mode = "replace_now"' in text
    finance.write_text(text.replace('replacement_mode = "replace_now"', 'replacement_mode = "replace_at_failure"'),
                       encoding="utf-8")
    assert main(["run", str(case), "--out", str(tmp_path / "o"), "--quiet", "--no-risk", "--plan-gap", "5"]) == 0
    out = capsys.readouterr().out
    assert "Of the plan's capital over the horizon" in out and "falls in the 3 budgeted plan years" in out


def test_out_that_cannot_be_made_is_refused_before_any_work(capsys):
    # a folder the access bits allow but the system does not (/proc takes no new folder, even for root): refused at
    # once, not after the whole analysis
    import sys as _sys

    if not _sys.platform.startswith("linux"):
        pytest.skip("/proc is Linux's")
    assert main(["run", str(DEMO), "--out", "/proc/drivecase-results", "--quiet"]) == 2
    err = capsys.readouterr().err
    assert "cannot write into /proc" in err and "give a folder you can write to" in err


def test_out_that_is_a_broken_link_is_refused_before_any_work(tmp_path, capsys):
    # a link to nowhere, a folder under one, a link to itself: each refused at once, nothing made
    link = tmp_path / "results"
    link.symlink_to(tmp_path / "gone")
    loop = tmp_path / "loop"
    loop.symlink_to(loop)
    for out, through in ((link, link), (link / "sub", link), (loop, loop)):
        assert main(["run", str(DEMO), "--out", str(out), "--quiet"]) == 2
        err = capsys.readouterr().err
        assert f"goes through {through}" in err and "does not lead to a folder" in err, err
    assert link.is_symlink() and not (tmp_path / "gone").exists()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["loop", "results"]  # no probe folder left behind


def test_a_scenario_that_waits_for_failures_says_why_its_capital_exceeds_its_budget(monkeypatch, capsys):
    # a scenario replacing motors at failure buys each one the year it is expected to fail: its plan's capital over
    # the horizon can be many times its budget, most of it after the budgeted years; the line says so (hand-made
    # table of the shape models.comparison.case_scenarios returns)
    from types import SimpleNamespace

    import pandas as pd

    from drivecase import cli
    from models import comparison

    table = pd.DataFrame({"scenario": ["Case as written", "Wait for failures", "No budget"],
                          "replacement_mode": ["replace now", "replace at failure", "replace at failure"],
                          "budget_total": [650_000.0, 650_000.0, 0.0], "plan_capital": [649_950.0, 1_165_664.0, 2e6],
                          "plan_npv": [8e6, 9e6, 9e6], "yearly_saving_per_yr": [1e6, 1e6, 1e6], "projects": [71, 80, 90],
                          "plan_npv_change": [0.0, 1e6, 1e6]})
    monkeypatch.setattr(comparison, "case_scenarios", lambda case, result: table)
    cli._print_scenarios(SimpleNamespace(scenarios=[("x", None)], settings=SimpleNamespace(currency="EUR")), None)
    lines = [line for line in capsys.readouterr().out.splitlines() if line.startswith("  ")]
    assert "bought as each motor fails, most of it after the budgeted years (EUR 650,000 of budget)" in lines[1]
    assert "budgeted years" not in lines[0] and "budgeted years" not in lines[2]  # within budget; no budget at all


@pytest.mark.parametrize("command", ["new", "check", "bill", "run", "serve", "report"])
def test_each_commands_own_help_says_what_it_does(command, capsys):
    # `drivecase COMMAND --help` opens with the command's summary (the list of commands gives the same words)
    with pytest.raises(SystemExit):
        main([command, "--help"])
    text = capsys.readouterr().out
    usage, summary = text.split("\n\n")[:2]
    assert usage.startswith(f"usage: drivecase {command}")
    assert summary.endswith(".") and len(summary) > 20 and summary[0].isupper(), summary


def test_run_names_the_plans_repeat_purchases_after_the_budgeted_years(tmp_path, capsys):
    # replacing now, the plan's capital over the horizon still holds repeat purchases (equipment whose life ends
    # within it) after the three budgeted years (data/demo/finance.toml); the summary names them, as the pack's
    # plan-by-year table gives them on its "later" row; read against the cash flows written
    import pandas as pd

    assert main(["run", str(DEMO), "--out", str(tmp_path / "o"), "--quiet", "--no-risk"]) == 0
    out = capsys.readouterr().out
    line = next(x for x in out.splitlines() if "Of the plan's capital over the horizon" in x)
    assert "repeat purchases of equipment whose life ends within the horizon" in line
    cf = pd.read_csv(tmp_path / "o" / "cashflows.csv")
    plan = pd.read_csv(tmp_path / "o" / "plan.csv")[["asset_id", "option_id", "start_yr"]]
    capital = cf[cf["component"].astype(str).str.startswith("capital_")].merge(plan, on=["asset_id", "option_id"])
    later = -capital.loc[capital["start_yr"] + capital["year"] >= 3, "amount"].sum()
    assert f"and EUR {later:,.0f} later" in line


def test_run_never_writes_over_a_file_it_did_not_write(tmp_path, capsys):
    # a user's own plan.csv in the folder given as --out: refused before any work, the file left as it was; a folder
    # a run wrote is written again (its list of files says so), other files in it left alone
    from test_scenario import _one_asset_case

    folder = tmp_path / "case"
    _one_asset_case(folder)
    out = tmp_path / "o"
    out.mkdir()
    (out / "plan.csv").write_text("my plan, not drivecase's\n", encoding="utf-8")
    (out / "notes.txt").write_text("mine\n", encoding="utf-8")
    assert main(["run", str(folder), "--out", str(out), "--quiet", "--no-risk"]) == 2
    assert "holds plan.csv, which no drivecase run wrote there" in capsys.readouterr().err
    assert (out / "plan.csv").read_text(encoding="utf-8") == "my plan, not drivecase's\n"

    (out / "plan.csv").unlink()
    assert main(["run", str(folder), "--out", str(out), "--quiet", "--no-risk"]) == 0
    assert (out / "notes.txt").read_text(encoding="utf-8") == "mine\n"  # not a run's file: left alone
    capsys.readouterr()
    assert main(["run", str(folder), "--out", str(out), "--quiet", "--no-risk"]) == 0  # its own folder: written again
    assert (out / "plan.csv").read_text(encoding="utf-8") != "my plan, not drivecase's\n"


def test_bill_names_its_line_items_in_words(capsys):
    # the demo's quarry (KGQ) is billed a standing charge, day and night energy, a kVA demand charge and VAT
    # (data/demo/tariffs/example_kva_demand.toml): the table's headings are in words, not the tariff's keys
    assert main(["bill", str(DEMO), "--site", "KGQ", "--quiet"]) == 0
    out = capsys.readouterr().out
    heading = next(line for line in out.splitlines() if "Total" in line)
    assert "Energy: day" in heading and "Tax: VAT" in heading and "energy:" not in heading and "tax:" not in heading
    assert "\n  month" not in out  # (no row of its own for the months' name)


def test_report_takes_the_seed_a_run_took(tmp_path, capsys, monkeypatch):
    # a pack made with --seed N carries the uncertainty of `run --seed N`: the seed reaches the analysis
    from test_scenario import _one_asset_case

    from models import scenario

    folder = tmp_path / "case"
    _one_asset_case(folder)
    seen = []
    real = scenario.run
    monkeypatch.setattr(scenario, "run", lambda case, assumptions, **kw: seen.append(assumptions.monte_carlo_seed)
                        or real(case, assumptions, **kw))
    assert main(["report", str(folder), "--out", str(tmp_path / "pack"), "--quiet", "--seed", "7"]) == 0
    assert seen == [7]
    assert main(["report", str(folder), "--out", str(tmp_path / "pack2"), "--seed", "-1"]) == 2
    assert "--seed must be a whole number >= 0" in capsys.readouterr().err


def test_new_on_a_link_to_nothing_says_so(tmp_path, capsys):
    # a link whose target is gone: not "File exists" (the system's word for it) but what the link points to
    link = tmp_path / "case"
    link.symlink_to(tmp_path / "gone")
    assert main(["new", str(link)]) == 1
    err = capsys.readouterr().err
    assert f"is a link to {tmp_path / 'gone'}, which does not exist" in err and "File exists" not in err
    assert link.is_symlink() and not (tmp_path / "gone").exists()  # nothing made, the link left as it was


def test_an_output_folder_on_a_read_only_file_system_is_named_so(tmp_path, capsys, monkeypatch):
    # access() refuses writing on a read-only mount as it does for a folder's permissions: the message names the
    # mount (a read-only medium is mended otherwise than a permission), before any work
    import types

    from drivecase import cli

    monkeypatch.setattr(cli.os, "access", lambda path, mode: False)
    monkeypatch.setattr(cli.os, "statvfs", lambda path: types.SimpleNamespace(f_flag=os.ST_RDONLY))
    assert main(["run", str(DEMO), "--out", str(tmp_path / "out"), "--quiet"]) == 2
    err = capsys.readouterr().err
    assert "(a read-only file system)" in err and "permission denied" not in err
