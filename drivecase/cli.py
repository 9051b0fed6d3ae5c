"""The ``drivecase`` command: write a blank case, check a case, and (as they land) run, bill and serve.

A thin front: it parses arguments, calls :mod:`models`, and prints. Exit status 0 means success, 1 means
the input has errors (the problem list is printed), 2 means the command line itself was wrong.
"""

from __future__ import annotations

import argparse
import errno
import os
import sys
import threading
import time
from pathlib import Path

from models.memory import one_heap

# First, before pandas or numpy start a thread: every thread of the command allocates from one heap, so that
# the large arrays of a run on 15-minute data are reused, not mapped afresh (models.memory, one_heap).
one_heap()

import pandas as pd  # noqa: E402

from models.wording import PAYBACK_TEXT, counted  # noqa: E402

CAUTION = ("Planning estimates only, not a design. Electrical work must be done by qualified persons under "
           "local codes and the utility's rules; confirm ratings with the manufacturers.")


def _print_table(frame: pd.DataFrame, title: str) -> None:
    print(f"\n{title}")
    if frame.empty:
        print("  (none)")
        return
    text = frame.to_string(index=False, float_format=lambda v: f"{v:,.1f}")
    print("\n".join("  " + line for line in text.splitlines()))


def _print_problems(problems, limit: int = 200) -> None:
    from models.problems import ordered

    errors = [p for p in problems if p.severity == "error"]
    warnings = [p for p in problems if p.severity == "warning"]
    print(f"\nProblems: {counted(len(errors), 'error')}, {counted(len(warnings), 'warning')}")
    # in the order the case loader gives (models.problems.ordered): causes first (a missing table, then errors
    # of a whole file or column, which often explain many row errors), then the rows' errors, then warnings;
    # a "N more" line after the rows it follows on from
    for problem in ordered(problems)[:limit]:
        print(f"  {problem}")
    if len(problems) > limit:
        print(f"  ... and {len(problems) - limit} more")


def cmd_new(args: argparse.Namespace) -> int:
    from models.io import write_blank_case

    try:
        written = write_blank_case(args.dir, workbook=args.workbook)
    except ValueError as exc:
        print(f"drivecase new: {exc}", file=sys.stderr)
        return 1
    except OSError as exc:
        return _write_failed("new", args.dir, exc)
    print(f"Blank case written to {args.dir}:")
    for path in written:
        print(f"  {path}")
    # a workbook is checked by its own path; a folder of CSV tables by the folder
    target = written[0] if len(written) == 1 and str(written[0]).lower().endswith(".xlsx") else args.dir
    where = ("in a sheet named 'tariff <file>.toml'; an invented example to replace is in the workbook"
             if target != args.dir else "in tariffs/; an invented example to replace is there")
    print(f"Fill in assets and sites (one row each; each site names its tariff file, {where}), then run: "
          f"drivecase check {target}")
    return 0


def cmd_check(args: argparse.Namespace) -> int:
    from models.case import fleet_summary, load_case

    case, problems = load_case(args.case)
    if case is None:
        print(f"Case {args.case}: NOT VALID")
        _print_problems(problems)
        return 1
    s = case.settings
    print(f"Case: {s.name}{' (invented demo data)' if s.mark_invented else ''}")
    from models.case import power_label, rating_in_unit

    unit = power_label(s.power_unit)  # motor ratings in the case's unit
    print(f"  {counted(len(case.assets), 'asset')}, {rating_in_unit(case.assets['rated_p_kw'].sum(), unit):,.1f} {unit} installed, "
          f"{counted(len(case.sites), 'site')}, {counted(len(case.profiles), 'interval profile')}; currency {s.currency}; zone {s.time_zone}; "
          f"rules of region {s.region} on the purchase date {s.purchase_date}")
    from models.scenario import failed_assets

    failed = list(case.assets.loc[failed_assets(case.assets), "asset_id"])
    if failed:  # said here, so that a mark on the wrong row is seen before the results are read
        print(f"  {counted(len(failed), 'motor')} marked as failed (asset register column failed): {', '.join(failed)}")
    if len(case.verification):
        print(f"  Savings verification: {counted(len(case.verification), 'measurement')} of "
              f"{counted(case.verification['asset_id'].nunique(), 'asset')} (drivecase run sets them beside the "
              "savings predicted)")
    if len(case.bill_history):
        print(f"  Bill history: {counted(len(case.bill_history), 'bill')} of "
              f"{counted(case.bill_history['site_id'].nunique(), 'site')} (drivecase bill and run set the model "
              "beside them)")
    summary = fleet_summary(case)
    # headings in words, as the other tables (the engine's column names are the files')
    headings = {"site_id": "site", "assets": "motors", "installed_kw": f"installed [{unit}]",
                "column": "field (asset register column)", "data_quality_pct": "mean data quality [%]"}
    for key in ("by_site", "by_application"):
        table = summary[key]
        summary[key] = table.assign(installed_kw=rating_in_unit(table["installed_kw"], unit))
    summary = {key: table.rename(columns=headings) for key, table in summary.items()}
    _print_table(summary["by_site"], f"Installed power by site [{unit}]")
    _print_table(summary["by_application"], f"Installed power by application [{unit}]")
    _print_table(summary["defaulted"], "Defaulted fields (filled from class, size or application defaults)")
    _print_table(summary["quality"], "Mean data-quality score by site [%]")
    _print_problems(problems)
    print(f"\n{CAUTION}")
    return 0


#: Warnings of a valid case listed before a run or a report (``drivecase check`` lists them all).
WARNINGS_SHOWN = 10


def _load_or_report(path: str):
    """The case, or None after printing why it is not valid; a valid case's warnings are printed too
    (to standard error: they qualify the figures that follow)."""
    from models.case import load_case

    case, problems = load_case(path)
    if case is None:
        print(f"Case {path}: NOT VALID")
        _print_problems(problems)
        return None
    warnings = [p for p in problems if p.severity == "warning"]
    if warnings:
        print(f"Case {path}: {counted(len(warnings), 'warning')}; the values noted were used as described", file=sys.stderr)
        for problem in warnings[:WARNINGS_SHOWN]:
            print(f"  {problem}", file=sys.stderr)
        if len(warnings) > WARNINGS_SHOWN:
            print(f"  ... and {len(warnings) - WARNINGS_SHOWN} more: drivecase check {path} lists them all",
                  file=sys.stderr)
    return case


def _out_problem(command: str, case_path: str, out: str) -> str | None:
    """Why ``--out`` cannot take the results (a message for the user), or None when it can."""
    import os
    from pathlib import Path

    where = _writes_into_case(case_path, out)
    if where:
        return (f"drivecase {command}: --out {out} is {where}; give a folder outside it (a case's files are "
                "never written to, and files written among them would be read as part of the case)")
    target = Path(out)
    broken = next((p for p in (target, *target.parents) if p.is_symlink() and not p.exists()), None)
    if broken is not None:  # (a link to nowhere, or to itself: the folder could not be made)
        return (f"drivecase {command}: --out {out} goes through {broken}, a link to {os.readlink(broken)}, which does not "
                "lead to a folder; give a folder")
    if target.exists() and not target.is_dir():
        return f"drivecase {command}: --out {out} is a file, not a folder; give a folder to write the results into"
    if command == "run":
        from models.exports import foreign_run_files

        foreign = foreign_run_files(target)
        if foreign:  # (files of the same names no run wrote there: a user's own, or an older run's without its list)
            shown = ", ".join(foreign[:4]) + (f" and {len(foreign) - 4} more" if len(foreign) > 4 else "")
            return (f"drivecase run: --out {out} holds {shown}, which no drivecase run wrote there; a run would "
                    "write over them: give another folder, or move them away")
    parent = next((p for p in target.absolute().parents if p.exists()), None)
    if parent is not None and not parent.is_dir():
        return f"drivecase {command}: --out {out} lies under {parent}, which is a file; give a folder"

    writable = target if target.is_dir() else parent
    if writable is not None and not os.access(writable, os.W_OK | os.X_OK):
        try:  # access() says no on a read-only file system too: name that, it is not the folder's permissions
            read_only = bool(os.statvfs(writable).f_flag & os.ST_RDONLY)
        except (OSError, AttributeError):
            read_only = False
        reason = "a read-only file system" if read_only else "permission denied"
        return (f"drivecase {command}: cannot write into {writable} ({reason}); give a folder you can write to")
    if writable is not None:
        # what the access bits do not tell (a read-only file system, a system folder such as /proc): a folder
        # made and removed at once, before the analysis rather than after it
        import tempfile

        try:
            probe = tempfile.mkdtemp(prefix=".drivecase-probe-", dir=writable)
        except OSError as exc:
            return (f"drivecase {command}: cannot write into {writable} ({exc.strerror or exc.__class__.__name__}); "
                    "give a folder you can write to")
        try:
            os.rmdir(probe)
        except OSError:
            pass  # (made, so writable: an empty folder a virus scanner holds a moment is left, not a reason to stop)
    return None


class _Progress:
    """A command's progress on the error stream.

    On a terminal, a bar that redraws its elapsed time every second, so that a long stage (the exact plan's
    search) does not look hung; it shows no time left, as the stages take very different times. Written to a
    file or a pipe, one plain line per stage (and for counted items such as sites, one per tenth), never the
    bar's carriage returns and cursor moves. Nothing with ``quiet``.
    """

    #: Seconds between redraws of a bar on a terminal.
    REFRESH_S = 1.0

    def __init__(self, total: int, desc: str, unit: str, quiet: bool, lines_of_stages: bool = True):
        self.total, self.n, self.desc, self.unit = int(total), 0, desc, unit
        self.lines_of_stages = lines_of_stages
        self.bar = None
        self.lines = False
        self._closed = threading.Event()
        self._t0 = time.monotonic()
        self._said = 0  # tenths of the items said
        if quiet:
            return
        if sys.stderr.isatty():
            from tqdm import tqdm

            self.bar = tqdm(total=self.total, desc=desc, unit=unit, file=sys.stderr,
                            bar_format="{desc}: {percentage:3.0f}%|{bar}| {n_fmt}/{total_fmt} [{elapsed}{postfix}]")
            threading.Thread(target=self._tick, name="drivecase-progress", daemon=True).start()
        else:
            self.lines = True

    def _tick(self) -> None:
        while not self._closed.wait(self.REFRESH_S):
            bar = self.bar
            if bar is not None:
                bar.refresh()

    def update(self, k: int = 1) -> None:
        self.n += int(k)
        if self.bar is not None:
            self.bar.update(k)
        elif self.lines and not self.lines_of_stages:
            tenth = (10 * self.n) // max(self.total, 1)
            if tenth > self._said:
                self._said = tenth
                print(f"{self.desc}: {self.n}/{self.total} {self.unit}s ({time.monotonic() - self._t0:.0f} s)",
                      file=sys.stderr, flush=True)

    def set_postfix_str(self, text: str) -> None:
        if self.bar is not None:
            self.bar.set_postfix_str(text)
        elif self.lines and self.lines_of_stages:
            print(f"{self.desc}: {text} ({time.monotonic() - self._t0:.0f} s)", file=sys.stderr, flush=True)

    def stage(self, name: str, stages: tuple[str, ...]) -> None:
        """Show the stage ``name``: one of ``stages`` after the first moves the count on; a note (the plan
        finishing) is shown without moving it."""
        if name in stages and name != stages[0]:
            self.update(1)
        self.set_postfix_str(name)  # (after the count, so that the bar shows the stage with its own count)

    def say(self, line: str) -> None:
        """A line on the error stream above the bar (or among the progress lines)."""
        if self.bar is not None:
            self.bar.write(line, file=sys.stderr)
        else:
            print(line, file=sys.stderr, flush=True)

    def close(self) -> None:
        self._closed.set()
        if self.bar is not None:
            self.bar.close()


def _said_estimate(memory, alone: bool, then: str | None = None) -> bool:
    """Print the run's estimate (of a :class:`models.estimate.MemoryPlan`) and, when it keeps less than the
    defaults, its memory note: alone on the output with ``--estimate`` (returns True: the command stops
    there), else on the error stream (the estimate before a large run only). ``then`` says what follows
    the run."""
    estimate, after = memory.estimate, f" Then {then}." if then else ""
    if alone:
        print(f"Estimate: {estimate.note}{after}")
        if memory.note:
            print(memory.note)
        return True
    if estimate.seconds > LARGE_RUN_S or estimate.peak_bytes > LARGE_RUN_BYTES:
        print(f"Large run ahead: {estimate.note}{after}", file=sys.stderr)
    if memory.note:
        print(memory.note, file=sys.stderr)
    return False


def _memory_plan(command: str, case, args, workers: int = 1, workers_here: bool = True, dask: bool = False):
    """The run's memory plan (:func:`models.estimate.memory_plan`, ``--max-memory`` given in GiB), or None
    after saying why the run cannot keep within the memory asked for."""
    import math

    from models.estimate import memory_plan

    asked = None if args.max_memory is None else max(1, int(args.max_memory * 2**30))
    memory = memory_plan(case, asked, workers=workers, workers_here=workers_here, dask=dask)
    if asked is not None and not memory.fits:
        least = math.ceil(memory.least_limit_bytes / 2**30 * 100) / 100  # (rounded up: the value given is accepted)
        held = ("the interpreter, the Dask workers on this machine and the per-asset results" if dask and workers_here
                else "the interpreter, one site's machines per thread and the per-asset results")
        print(f"{command}: the run cannot keep within {args.max_memory:g} GiB: the least it can keep is estimated at "
              f"{memory.estimate.peak_bytes / 2**30:.2f} GiB ({held}), {least:.2f} GiB with the estimate's margin; give "
              f"--max-memory {least:.2f} or more, or run a smaller case (fewer sites or assets)", file=sys.stderr)
        return None
    return memory


def _close_bars(*bars) -> None:
    """Close the progress bars there are (before a message, so the message is the last line)."""
    for bar in bars:
        if bar is not None:
            bar.close()


def _write_failed(command: str, out: str, exc: OSError) -> int:
    """Say that writing the results failed, in one line, and return the exit code."""
    where = getattr(exc, "filename", None) or out
    reason = exc.strerror or exc.__class__.__name__
    fix = ("free some space on that disk or give a folder on another" if exc.errno == errno.ENOSPC
           else "give a folder you can write to")
    kept = ("" if command == "new" else ", and files an earlier run wrote there are as they were (the new files "
            "are written all or none)")
    print(f"drivecase {command}: could not write into {out} ({reason}: {where}); {fix} and run again. The case's "
          f"files were not changed{kept}.", file=sys.stderr)
    return 1


def _writes_into_case(case_path: str, out: str) -> str | None:
    """Where an output folder falls in a case, in words ("the case's own folder", "inside the case's
    folder"), or None when it is elsewhere; for a case workbook, its own folder counts as the case's."""
    from pathlib import Path

    from models.io import WORKBOOK_SUFFIXES

    case_dir = Path(case_path)
    workbook = case_dir.suffix.lower() in WORKBOOK_SUFFIXES
    if workbook:
        case_dir = case_dir.parent
    try:
        target, root = Path(out).resolve(), case_dir.resolve()
    except (OSError, RuntimeError):  # (a link loop: Python 3.11 raises RuntimeError; _out_problem names it)
        return None
    if target == root:
        return "the folder of the case workbook" if workbook else "the case's own folder"
    if not workbook and target.is_relative_to(root):
        return "inside the case's folder"
    return None


def cmd_bill(args: argparse.Namespace) -> int:
    from dataclasses import replace

    import numpy as np

    from models.attribution import reactive_balance
    from models.bill_savings import (banned_caution, banned_quantities, meter_and_bills, monthly_bill_table,
                                     reactive_value_curve, site_setups)
    from models.operation import case_index, operate, options_with_baseline, site_case

    case = _load_or_report(args.case)
    if case is None:
        return 1
    sites = list(case.sites["site_id"]) if not args.site else [args.site]
    unknown = [s for s in sites if s not in set(case.sites["site_id"])]
    if unknown:
        print(f"drivecase bill: unknown site {unknown[0]!r}; sites are {', '.join(case.sites['site_id'])}", file=sys.stderr)
        return 1
    if args.reactive_sweep and args.reactive_sweep not in set(case.assets["asset_id"]):
        from models.problems import unknown_ids_hint

        print(f"drivecase bill: unknown asset {args.reactive_sweep!r} for --reactive-sweep (asset_id in the asset "
              f"register){unknown_ids_hint([args.reactive_sweep], case.assets['asset_id'])}", file=sys.stderr)
        return 1
    if args.capacitor_cost is not None and not args.capacitor_cost >= 0:
        print("drivecase bill: --capacitor-cost must be >= 0", file=sys.stderr)
        return 2
    capacitor_cost = (float(case.finance.capacitor_cost_per_kvar) if args.capacitor_cost is None
                      else float(args.capacitor_cost))
    # today's motors only, on the sites asked for (the sweep alone reads the other options), on the whole
    # case's analysis index, so the figures are those of the full analysis
    index = case_index(case)
    sweep_site = (case.assets.loc[case.assets["asset_id"] == args.reactive_sweep, "site_id"].iloc[0]
                  if args.reactive_sweep else None)
    if args.site and sweep_site in (None, args.site) and (case.assets["site_id"] == args.site).any():
        case = site_case(case, args.site)  # (a site of base load alone is billed within the whole case)
    if not args.reactive_sweep:
        case = replace(case, options=options_with_baseline(case.options).iloc[:1].reset_index(drop=True))
    # a bar over the sites whose motors are modelled (the bills that follow take a fraction of their time)
    bar = _Progress(int(case.assets["site_id"].nunique()), "drivecase bill", "site", args.quiet,
                    lines_of_stages=False)
    try:
        op = operate(case, index=index, on_site=lambda _site: bar.update(1))
        setups = site_setups(case, op.index)
        meters, bills = meter_and_bills(case, op, np.zeros(len(op.asset_ids), dtype=int), setups)
    except ValueError as exc:  # a case the check passed that a model still refuses: said, not a traceback
        _close_bars(bar)
        print(f"drivecase bill: {exc}", file=sys.stderr)
        return 1
    finally:
        _close_bars(bar)
    currency = case.settings.currency
    for site_id in sites:
        from models.wording import line_item_text

        table = monthly_bill_table(bills, site_id)
        table.index = pd.Index([str(m)[:7] for m in table.index])
        # the line items in words (the tariff's own names of its clauses), as the pack's Bills sheet writes them
        table.columns = [("Total" if c == "total" else line_item_text(c)) for c in table.columns]
        table.loc["year"] = table.sum(axis=0)
        meter = meters[site_id]
        energy = float(np.sum(meter.p_kw) * op.interval_h)
        print(f"\nSite {site_id}: today's fleet, monthly bill by line item [{currency}], at the tariff as written")
        print(f"  yearly {energy / 1000:,.0f} MWh, peak {np.max(meter.p_kw):,.0f} kW")
        day = int(getattr(setups[site_id].tariff, "billing_day", 1))
        if day != 1:
            print(f"  billing months start on day {day} of each month (named by the month they start in; the year's "
                  f"days before day {day} of January belong to the one that starts in December)")
        print("\n".join("  " + line for line in table.to_string(float_format=lambda v: f"{v:,.0f}").splitlines()))
        for line in banned_quantities(bills[bills["site_id"] == site_id]).itertuples(index=False):
            print(f"  CAUTION: {banned_caution(line)}")
        balance = reactive_balance(meter, op.interval_h)
        print(f"  Reactive balance: lagging {balance['lagging_kvarh'] / 1000:,.0f} MVArh, leading "
              f"{balance['leading_kvarh'] / 1000:,.0f} MVArh, supplied by capacitor banks "
              f"{round(balance['capacitor_kvarh'] / 1000) + 0.0:,.0f} MVArh; average power factor "
              f"{balance['average_power_factor']:.3f}")  # (+ 0.0: no "-0" for a rounded zero)
    _print_calibration(case, meters, bills, op, sites)
    factor = float(case.finance.energy_price_factor)
    if factor != 1.0:
        print(f"\nThe analysis (drivecase run, the dashboard, the pack) prices every charge at energy_price_factor = "
              f"{factor:g} of finance.toml: its bills and savings are these figures x {factor:g}.")
    if args.reactive_sweep:
        curve = reactive_value_curve(case, op, args.reactive_sweep, capacitor_cost)
        print(f"\nReactive-power value on the site of {args.reactive_sweep}: yearly bill saving as leading kVAr grows "
              f"(the whole bill's change, its taxes and levies included), beside a capacitor bank at "
              f"{capacitor_cost:g} {currency}/kVAr")
        shown = curve[["supplied_q_kvar", "saving", "marginal_saving_per_kvar", "capacitor_bank_cost"]].rename(
            columns={"supplied_q_kvar": "supplied [kVAr]", "saving": f"bill saving [{currency}/yr]",
                     "marginal_saving_per_kvar": f"next kVAr [{currency}/kVAr/yr]",
                     "capacitor_bank_cost": f"capacitor bank [{currency}]"})
        text = shown.to_string(index=False, na_rep="-", float_format=lambda v: f"{v:,.1f}")
        print("\n".join("  " + line for line in text.splitlines()))
        print("  Leading kVAr is worth something only while it lowers a reactive charge of the tariff (kVArh beyond a "
              "power-factor threshold, a demand charge raised for a poor power factor, or kVA demand at the peak "
              "intervals); past that point more is worth nothing, or costs where leading kVArh is charged. The "
              "capacitor bank is the yardstick.")
        site_of = dict(zip(case.assets["asset_id"], case.assets["site_id"]))
        stepped = case.capacitors[(case.capacitors["site_id"] == site_of.get(args.reactive_sweep))
                                  & (case.capacitors["control"] == "stepped")] if len(case.capacitors) else case.capacitors
        if len(stepped):
            print(f"  The site's stepped capacitor bank ({', '.join(map(str, stepped['bank_id']))}) switches steps out as "
                  "the supplied kVAr grows, so the saving can dip between points: read the curve's trend, and size "
                  "equipment on the points either side of a dip, not on the dip.")
    print(f"\n{CAUTION}")
    return 0


#: Runs estimated above these are announced before they start (time [s], peak memory [bytes]).
#: Exit code of a command stopped by Ctrl+C (128 + SIGINT, as shells report it); :func:`main` returns it only then.
INTERRUPTED = 130
LARGE_RUN_S = 60.0
LARGE_RUN_BYTES = 4 * 1024**3
#: The engine's stages (models.scenario.run says them), and those of ``drivecase run``: the named scenarios'
#: plans and the files after them.
ENGINE_STAGES = ("machines", "site bills", "cash flows", "metrics", "fleet plan", "end of life", "risk", "bills")
STAGES = ENGINE_STAGES + ("scenarios", "files")


def _print_calibration(case, meters, bills, op, sites) -> None:
    """Today's fleet as modelled beside the bills the case gives (bill_history), site by site."""
    from models import calibration

    history = case.bill_history
    if history is None or history.empty:
        return
    comparison, summary = calibration.fit_to_bills(meters, bills, op, history, calibration.billing_days_of(case))
    currency = case.settings.currency
    print("\nToday's fleet as modelled against the bills the case gives (bill_history; a bill of another year is set "
          "beside the same calendar month of the analysis year; amounts at the tariff as written)")
    for site_id in sites:
        mine = comparison[comparison["site_id"] == site_id]
        if mine.empty:
            print(f"  Site {site_id}: no bill of a month the model covers")
            continue
        print(f"  Site {site_id}:")
        for row in summary[summary["site_id"] == site_id].to_dict("records"):
            print(f"    {calibration.summary_text(row)}")
        table = mine.pivot_table(index="month", columns="quantity", values=["modelled", "billed"], sort=True)
        shown = pd.DataFrame(index=table.index)
        for quantity, unit in calibration.QUANTITIES.items():
            if ("billed", quantity) in table:
                unit = currency if unit == "currency" else unit
                shown[f"{quantity.split('_')[0]} billed [{unit}]"] = table[("billed", quantity)]
                shown[f"modelled [{unit}]"] = table[("modelled", quantity)]
        text = shown.to_string(float_format=lambda v: f"{v:,.0f}", na_rep="-")
        print("\n".join("    " + line for line in text.splitlines()))
    print("  A model well off the bills is a baseline to question before its savings are: check the base load "
          "(sites.csv), the running hours and the loads of the largest motors.")


def _print_calibration_summary(case, path: Path) -> None:
    """The run's fit of today's fleet to the bills the case gives, one line per site and quantity."""
    from models import calibration

    if case.bill_history is None or case.bill_history.empty or not path.is_file():
        return
    summary = pd.read_csv(path)
    if summary.empty:
        print("\nThe bills the case gives (bill_history) are of no month the model covers: nothing to compare")
        return
    print("\nToday's fleet as modelled against the bills the case gives (calibration.csv, calibration_months.csv):")
    for row in summary.to_dict("records"):
        print(f"  Site {row['site_id']}, {calibration.summary_text(row)}")


def cmd_run(args: argparse.Namespace) -> int:
    from dataclasses import replace

    from models import scenario
    from models.exports import write_run

    problem = _out_problem("run", args.case, args.out)
    if problem:
        print(problem, file=sys.stderr)
        return 2
    # the command line's own mistakes first, before the case is read
    if args.seed is not None and args.seed < 0:
        print("drivecase run: --seed must be a whole number >= 0", file=sys.stderr)
        return 2
    if not (args.plan_gap >= 0 and args.plan_seconds > 0):
        print("drivecase run: --plan-gap must be >= 0 and --plan-seconds > 0", file=sys.stderr)
        return 2
    if args.scheduler and args.engine != "dask":
        print("drivecase run: --scheduler is the address of a Dask scheduler; add --engine dask to use it",
              file=sys.stderr)
        return 2
    case = _load_or_report(args.case)
    if case is None:
        return 1
    assumptions = case.finance
    if args.seed is not None:
        assumptions = replace(assumptions, monte_carlo_seed=int(args.seed))
    if args.engine == "dask":
        try:  # (models.distributed imports Dask only when a run starts: ask for it here)
            import dask  # noqa: F401
            import distributed  # noqa: F401

            from models.distributed import LOCAL_WORKERS, SiteLost, local_workers, run_distributed
        except ImportError as exc:
            print(f"drivecase run: the Dask engine needs the 'scale' extra (pip install -e '.[scale]'): {exc}",
                  file=sys.stderr)
            return 1
    plan_settings = scenario.PlanSettings(time_limit_s=float(args.plan_seconds), gap_frac=float(args.plan_gap) / 100.0)
    workers = 1
    if args.engine == "dask":  # a cluster of one's own: its workers are not known before it is reached
        workers = LOCAL_WORKERS if args.scheduler else local_workers(len(case.sites))
    memory = _memory_plan("drivecase run", case, args, workers, not args.scheduler, args.engine == "dask")
    if memory is None:
        return 1
    if _said_estimate(memory, args.estimate):
        return 0
    budgets = memory.budgets if memory.given_up else None
    bar = _Progress(len(STAGES), "drivecase run", "stage", args.quiet)
    site_bar = None

    def progress(stage: str) -> None:
        bar.stage(stage, STAGES)

    try:
        if args.engine == "dask":
            site_bar = _Progress(len(case.sites), "sites", "site", args.quiet, lines_of_stages=False)

            def site_progress(_site_id: str, done: int, total: int) -> None:
                site_bar.update(done - site_bar.n)
                if done >= total:  # the sites' own time, not the whole run's
                    site_bar.close()

            result = run_distributed(case, assumptions, scheduler=args.scheduler, progress=progress,
                                     with_risk=not args.no_risk, site_progress=site_progress,
                                     plan_settings=plan_settings, budgets=budgets,
                                     notice=lambda line: site_bar.say(f"drivecase run: {line}"))
        else:
            result = scenario.run(case, assumptions, progress=progress, with_risk=not args.no_risk,
                                  plan_settings=plan_settings, budgets=budgets)
    except KeyboardInterrupt:
        _close_bars(bar, site_bar)  # (so that "interrupted" is the last line)
        raise
    except ValueError as exc:
        _close_bars(bar, site_bar)
        print(f"drivecase run: {exc}", file=sys.stderr)
        return 1
    except RuntimeError as exc:
        _close_bars(bar, site_bar)
        if args.engine != "dask" or not isinstance(exc, SiteLost):
            raise
        print(f"drivecase run: {exc}", file=sys.stderr)
        return 1
    except ImportError as exc:  # raised on a Dask worker whose Python lacks drivecase
        _close_bars(bar, site_bar)
        if args.engine != "dask":
            raise
        print(f"drivecase run: a Dask worker could not load drivecase's code ({exc}); install drivecase with its "
              "'scale' extra, at this version, in the Python every worker runs (docs/scale.md)", file=sys.stderr)
        return 1
    except (OSError, TimeoutError) as exc:  # the Dask scheduler could not be reached
        _close_bars(bar, site_bar)
        if args.engine != "dask":
            raise
        where = args.scheduler or "the local cluster"
        print(f"drivecase run: could not work with the Dask scheduler at {where}: {exc}", file=sys.stderr)
        return 1
    if site_bar is not None:
        site_bar.close()
    try:
        if getattr(case, "scenarios", ()):  # each named scenario's plan (solved once: the files read it again)
            from models.comparison import case_scenarios

            progress("scenarios")
            case_scenarios(case, result, progress=bar.set_postfix_str)
        progress("files")
        written = write_run(result, args.out, case)
    except OSError as exc:
        _close_bars(bar)
        return _write_failed("run", args.out, exc)
    except BaseException:  # (an interruption: "interrupted" is the last line)
        _close_bars(bar)
        raise
    bar.update(bar.total - bar.n)
    bar.close()
    _print_run_summary(case, result)
    _print_scenarios(case, result)
    _print_measure_first(case, result)
    _print_harmonic_screen(Path(args.out) / "harmonic_screen.csv")
    _print_verified(case, Path(args.out) / "savings_verified.csv")
    _print_calibration_summary(case, Path(args.out) / "calibration.csv")
    print(f"\nFiles written to {args.out}: {', '.join(p.name for p in written)}")
    if args.no_risk:
        print("(with --no-risk, risk.csv, tornado.csv, plan_risk.csv, plan_tornado.csv and npv_draws.csv hold their "
              "column headers only: no uncertainty was run)")
    if result.end_of_life.empty:
        files = "end_of_life.csv and fleet_rules.csv hold" if result.fleet_rules.empty else "end_of_life.csv holds"
        print(f"({files} column headers only: the end-of-life comparison needs a rewind option and a new induction "
              "motor option in the catalogue, offered to at least one motor)")
    print(f"\n{CAUTION}")
    return 0


def _print_measure_first(case, result, shown: int = 5) -> None:
    """The assets most worth measuring before deciding (measure_first.csv), the first few; nothing where no
    decision stands to gain more than a unit of currency."""
    from models.information import measure_first
    from models.wording import money_text

    table = measure_first(case, result)
    worth = table[table["value_of_measuring"] > 1.0].head(shown)
    if worth.empty:
        return
    cur = case.settings.currency
    print("\nMeasure first (measure_first.csv): what knowing each motor's inputs before deciding could be worth")
    for row in worth.to_dict("records"):
        print(f"  {row['asset_id']}: up to {money_text(row['value_of_measuring'], cur)} "
              f"({row['label']}, NPV {money_text(row['npv'], cur)} as modelled; {row['uncertain_inputs']})")


def _print_harmonic_screen(path: Path) -> None:
    """The sites whose drives or capacitors the harmonic screen finds past IEEE 519's limits or near a resonance
    with the plan (harmonic_screen.csv), and how many sites it could not screen; nothing else."""
    import pandas as pd

    try:
        table = pd.read_csv(path, keep_default_na=False)
    except (OSError, pd.errors.EmptyDataError):
        return
    plan = table[table["scenario"] == "plan"] if "plan" in set(table["scenario"]) else table
    found = plan[plan["finding"].str.contains("harmonic study|resonate", regex=True)]
    unscreened = int(plan["finding"].str.startswith("not screened").sum())
    if found.empty and not unscreened:
        return
    print("\nHarmonic screen (harmonic_screen.csv), with the plan: a first screen to IEEE 519, not a study")
    for row in found.to_dict("records"):
        print(f"  {row['site_id']}: {row['finding']}")
    if unscreened:
        print(f"  {unscreened} site{'s' if unscreened != 1 else ''} not screened: give transformer_kva (or "
              "supply_fault_kva) in sites.csv")


def _print_verified(case, path: Path) -> None:
    """The savings measured after the projects against their predictions (savings_verified.csv), one line per
    asset; nothing where the case gives no measurements."""
    if not len(case.verification):
        return
    import pandas as pd

    from models.wording import money_text

    table = pd.read_csv(path, keep_default_na=False, na_values=[""])
    print("\nSavings verified (savings_verified.csv): measured after each project, beside its prediction")
    for row in table.to_dict("records"):
        measured = ("" if row["avoided_kwh"] != row["avoided_kwh"] else
                    f"{row['avoided_kwh']:,.0f} kWh avoided ({row['basis']}), "
                    + ("" if row["verified_value"] != row["verified_value"]
                       else f"{money_text(row['verified_value'], case.settings.currency)}, "))
        print(f"  {row['asset_id']} ({row['option_id']}): {measured}{row['finding']}")


def _print_scenarios(case, result) -> None:
    """The case's named scenarios beside its own assumptions (scenarios.csv), one line each; nothing without any."""
    if not getattr(case, "scenarios", ()):
        return
    from models.comparison import case_scenarios
    from models.wording import money_text

    table = case_scenarios(case, result)
    cur = case.settings.currency
    print("\nScenarios (scenarios.csv): the plan under each, and its change from the case as written")
    for row in table.to_dict("records"):
        line = (f"  {row['scenario']}: plan NPV {money_text(row['plan_npv'], cur)}, capital "
                f"{money_text(row['plan_capital'], cur)}, saving {money_text(row['yearly_saving_per_yr'], cur)}/yr, "
                f"{int(row['projects'])} projects")
        if row["scenario"] != table["scenario"].iloc[0]:
            line += (f" (NPV {'+' if row['plan_npv_change'] >= 0 else '-'}"
                     f"{money_text(abs(row['plan_npv_change']), cur)})")
        if (row["replacement_mode"] == "replace at failure" and row["budget_total"] > 0
                and row["plan_capital"] > row["budget_total"] + 0.5):
            # the budgets count each motor in the year it is bought, at its expected failure: most fall later
            line += ("; the capital is over the horizon, bought as each motor fails, most of it after the "
                     f"budgeted years ({money_text(row['budget_total'], cur)} of budget)")
        print(line)


def _print_run_summary(case, result) -> None:
    from models import scenario
    from models.bill_savings import banned_caution, banned_quantities
    from models.plan import option_labels
    from models.reactive_plan import withdrawn_text
    from models.wording import money_text

    currency = case.settings.currency
    r = result.results
    best = r[r["best_for_asset"] & (r["technology"] != "existing")]  # (an option without capital counts too)
    plan = result.plan
    chosen = r.set_index(["asset_id", "option_id"]).loc[list(zip(plan["asset_id"], plan["option_id"]))] if len(plan) else r.iloc[:0]
    from models.case import power_label, rating_in_unit

    unit = power_label(case.settings.power_unit)  # motor ratings in the case's unit; meters and energy stay in kW
    from models.plan import LOW_DATA_QUALITY_PCT, capital_in_budget_years, low_data_quality

    print(f"\nCase: {case.settings.name}")
    print(f"  {counted(len(case.assets), 'asset')} ({rating_in_unit(case.assets['rated_p_kw'].sum(), unit):,.0f} {unit} "
          f"installed); best option differs from today's motor for {len(best)} of them")
    failed = list(case.assets.loc[scenario.failed_assets(case.assets), "asset_id"])
    if failed:
        print(f"  {counted(len(failed), 'motor')} marked as failed, each option counted over the least that puts it "
              f"back in service now: {', '.join(failed)}")
        from models.pack.content import failed_motor_texts

        texts = failed_motor_texts(result, currency)
        for asset_id, text in texts[:10]:
            print(f"    {asset_id}: {text[:1].upper() + text[1:]}")
        if len(texts) > 10:
            print(f"    ... and {len(texts) - 10} more (end_of_life.csv, plan.csv)")
    under = "under the budget" if len(result.assumptions.budget_per_yr) else "with no budget limit"
    # the yearly saving as the plan counts it (a reactive project at its share beside the others), the pack's headline
    from models.pack.content import plan_counted

    in_plan = plan_counted(result, chosen.reset_index().assign(in_plan=True)) if len(plan) else chosen
    bills_saved, maintenance_saved = in_plan["bill_saving_per_yr"].sum(), in_plan["saving_maintenance_per_yr"].sum()
    # (money written as on every other line: the currency first, "EUR 649,950")
    print(f"  Plan {under}: {counted(len(plan), 'project')}, capital {money_text(chosen['capital'].sum(), currency)}, "
          f"yearly saving as the plan counts it {money_text(bills_saved + maintenance_saved, currency)}/yr "
          f"(bills {bills_saved:,.0f}, maintenance {maintenance_saved:,.0f}), "
          f"NPV {money_text(plan['npv_at_plan_start'].sum(), currency)}, CO2 avoided "
          f"{chosen['co2_avoided_t_per_yr'].sum():,.0f} t/yr")
    budgets = result.assumptions.budget_per_yr
    if len(budgets) and result.capital_spend_by_year is not None:
        # (as the pack's plan-by-year table: its "later" row)
        inside, after = capital_in_budget_years(plan, r, result.capital_spend_by_year, len(budgets))
        if after > 0.01 * max(inside + after, 1e-9):
            why = ("replacements bought at each motor's expected failure, repeat purchases"
                   if result.assumptions.replacement_mode == "replace_at_failure"
                   else "repeat purchases of equipment whose life ends within the horizon")
            print(f"  Of the plan's capital over the horizon, {money_text(inside, currency)} falls in the "
                  f"{counted(len(budgets), 'budgeted plan year')} and {money_text(after, currency)} later ({why}), "
                  "which the budgets do not cover")
    low_n, low_share = low_data_quality(plan, dict(zip(case.assets["asset_id"], case.assets["data_quality_pct"])))
    if low_n:
        print(f"  Data quality: {counted(low_n, 'project')} of the plan, {100 * low_share:.0f} % of its NPV, rest on "
              f"assets whose data-quality score is below {LOW_DATA_QUALITY_PCT:g} % (defaulted nameplate fields: "
              "defaults.csv); confirm their nameplates before committing capital")
    if "illustrative" in case.options and case.options["illustrative"].fillna(False).astype(bool).any():
        print("  Capital: the options catalogue's prices are illustrative cost curves, not quotes; replace them with "
              "quotes before committing capital")
    together = scenario.plan_bill_saving_per_yr(result.bills)
    if together is not None and len(plan):
        print(f"  The bill saving adds up each project priced alone; with the whole plan in place the sites' "
              f"bills fall by {money_text(together, currency)}/yr (projects share demand peaks, ratchets and reactive "
              f"allowances; bills.csv)")
    for line in banned_quantities(result.bills).itertuples(index=False):
        print(f"  CAUTION: {banned_caution(line)} (bills.csv, column banned)")
    status = result.plan_status or {}
    if status.get("message"):
        print(f"  Exact plan: {status['message']}")
    withdrawn = withdrawn_text(status, labels=option_labels(r))
    if withdrawn:
        print(f"  {withdrawn}")
    if len(result.plan_npv_draws):
        from models.risk import distribution_summary

        s = distribution_summary(result.plan_npv_draws)
        print(f"  Plan NPV under uncertainty ({len(result.plan_npv_draws):,} draws, seed "
              f"{result.assumptions.monte_carlo_seed}): P10 {money_text(s['npv_p10'], currency)}, P50 "
              f"{money_text(s['npv_p50'], currency)}, P90 {money_text(s['npv_p90'], currency)}; P(plan NPV > 0) {100 * s['prob_npv_positive_frac']:.0f} % "
              f"(plan_risk.csv, plan_tornado.csv, npv_draws.csv)")
    elif len(result.fleet_npv_draws) and plan.empty:
        print("  Plan NPV under uncertainty: none to show, the plan holds no project under this budget "
              "(risk.csv and tornado.csv give every asset's best option)")
    from models.financing import plan_financing_words

    financing = plan_financing_words(result)
    if financing:
        print(f"  Financing: {financing} Year by year: financing.csv")
    comparison = result.plan_comparison
    if "shortfall" in comparison:
        print(f"  Rank-by-profitability-index plan falls short of the exact plan by "
              f"{money_text(comparison['shortfall'], currency)} NPV")
    top = best.sort_values("npv", ascending=False).head(10).copy()
    takes = dict(zip(plan["asset_id"], plan["option_id"]))
    labels = option_labels(r)
    top["in_plan"] = ["this option" if takes.get(a) == o else (labels.get(takes[a], takes[a]) if a in takes else "nothing")
                      for a, o in zip(top["asset_id"], top["option_id"])]
    top["option"] = [labels.get(o, o) for o in top["option_id"]]  # as the catalogue names it
    for column in ("capital", "bill_saving_per_yr", "npv"):  # whole currency units
        top[column] = [f"{v:,.0f}" for v in top[column]]
    table = top[["asset_id", "option", "capital", "bill_saving_per_yr", "npv", "simple_payback_yr", "in_plan"]].rename(
        columns={"asset_id": "asset", "capital": f"capital [{currency}]", "bill_saving_per_yr": f"bill saving [{currency}/yr]",
                 "npv": f"NPV [{currency}]", "simple_payback_yr": "simple payback [yr]", "in_plan": "the plan takes"})
    _print_table(table, "Ten best options by NPV (each asset's best, before the budget: the plan may choose another "
                        "option or none)")
    if len(table):
        print("  " + PAYBACK_TEXT.rstrip("."))


#: Set once the dashboard has stopped: the command then leaves without waiting for its request threads (see
#: :func:`entry`).
_LEAVE_AT_ONCE = {"serve": False}


def cmd_serve(args: argparse.Namespace) -> int:
    from dashboard.server import serve

    try:
        return int(serve(args.case, host=args.host, port=args.port, debug=args.debug, open_browser=not args.no_browser))
    finally:
        _LEAVE_AT_ONCE["serve"] = True


def cmd_report(args: argparse.Namespace) -> int:
    from models import scenario
    from models.pack import write_pack

    problem = _out_problem("report", args.case, args.out)
    if problem:
        print(problem, file=sys.stderr)
        return 2
    if not (args.plan_gap >= 0 and args.plan_seconds > 0):
        print("drivecase report: --plan-gap must be >= 0 and --plan-seconds > 0", file=sys.stderr)
        return 2
    if args.seed is not None and args.seed < 0:
        print("drivecase report: --seed must be a whole number >= 0", file=sys.stderr)
        return 2
    case = _load_or_report(args.case)
    if case is None:
        return 1
    assets = [a.strip() for a in args.assets.split(",") if a.strip()] if args.assets is not None else None
    if args.assets is not None and not assets:
        print("drivecase report: --assets names no asset; give comma-separated asset ids, or leave it out for the "
              "plan's projects", file=sys.stderr)
        return 2
    if assets:
        unknown = sorted(set(assets) - set(case.assets["asset_id"]))
        if unknown:
            from models.problems import unknown_ids_hint

            print(f"drivecase report: unknown {'asset' if len(unknown) == 1 else 'assets'}: {', '.join(unknown)}"
                  + unknown_ids_hint(unknown, case.assets["asset_id"]), file=sys.stderr)
            return 1
    memory = _memory_plan("drivecase report", case, args)
    if memory is None:
        return 1
    if _said_estimate(memory, args.estimate, then="the pack is written"):
        return 0
    steps = ENGINE_STAGES + ("pack",)
    bar = _Progress(len(steps), "drivecase report", "stage", args.quiet)

    def progress(stage: str) -> None:
        bar.stage(stage, steps)

    plan_settings = scenario.PlanSettings(time_limit_s=float(args.plan_seconds), gap_frac=float(args.plan_gap) / 100.0)
    try:
        assumptions = case.finance
        if args.seed is not None:
            from dataclasses import replace

            assumptions = replace(assumptions, monte_carlo_seed=int(args.seed))
        result = scenario.run(case, assumptions, progress=progress, plan_settings=plan_settings,
                              budgets=memory.budgets if memory.given_up else None)
    except KeyboardInterrupt:
        _close_bars(bar)
        raise
    except ValueError as exc:
        _close_bars(bar)
        print(f"drivecase report: {exc}", file=sys.stderr)
        return 1
    import warnings

    from models.pack import PackWarning

    bar.update(len(ENGINE_STAGES) - 1 - bar.n)
    progress("pack")
    notes: list[str] = []
    with warnings.catch_warnings(record=True) as caught:  # the pack's notes as plain lines, not Python warnings
        warnings.simplefilter("always", PackWarning)
        try:
            written = write_pack(case, result, args.out, assets=assets, plan=args.plan or not assets, pdf=args.pdf,
                                 messages=notes)
        except OSError as exc:
            _close_bars(bar)
            return _write_failed("report", args.out, exc)
        except BaseException:
            _close_bars(bar)  # (so that the message is the last line)
            raise
    bar.update(bar.total - bar.n)
    bar.close()
    skipped = set()
    for note in caught:
        if issubclass(note.category, PackWarning):
            print(f"drivecase report: {note.message}", file=sys.stderr)
            skipped.add(str(note.message))
        else:
            warnings.showwarning(note.message, note.category, note.filename, note.lineno)
    _print_pack_headline(case, result)
    print(f"Capital-request pack written to {args.out}:")
    for path in written:
        print(f"  {path}")
    for note in notes:
        if note not in skipped:  # a skipped part was said above, on the error stream
            print(f"  {note}")
    print(f"\n{CAUTION}")
    return 0


def _print_pack_headline(case, result) -> None:
    """The fleet plan the pack carries, in one line, and how far its exact plan is proven."""
    from models.wording import money_text

    cur = case.settings.currency
    plan = result.plan
    capital = float(plan["capital"].sum()) if len(plan) else 0.0
    npv = float(plan["npv_at_plan_start"].sum()) if len(plan) else 0.0
    print(f"Fleet plan: {counted(len(plan), 'project')}, capital {money_text(capital, cur)}, NPV "
          f"{money_text(npv, cur)} at the plan's start (the report's headline and decision table)")
    message = (result.plan_status or {}).get("message")
    if message:
        print(f"Exact plan: {message}")


def build_parser() -> argparse.ArgumentParser:
    from models.scenario import PRECISE_PLAN

    gap_frac, time_s = PRECISE_PLAN.gap_frac, PRECISE_PLAN.time_limit_s
    parser = argparse.ArgumentParser(prog="drivecase", description="Keep, rewind or replace: motor-fleet economics.")
    parser.add_argument("--version", action="version", version=f"%(prog)s {_version()}")
    sub = parser.add_subparsers(dest="command")
    p_new = _command(sub, "new", "write a blank case (CSV templates, or a workbook with --workbook)")
    p_new.add_argument("dir", help="new folder (or .xlsx file) to create")
    p_new.add_argument("--workbook", action="store_true", help="write one .xlsx workbook instead of CSV files")
    p_new.set_defaults(func=cmd_new)
    p_check = _command(sub, "check", "validate a case and print a fleet summary")
    p_check.add_argument("case", help="case folder or .xlsx workbook")
    p_check.set_defaults(func=cmd_check)
    p_bill = _command(sub, "bill", "print each site's monthly bill by line item for today's fleet")
    p_bill.add_argument("case", help="case folder or .xlsx workbook")
    p_bill.add_argument("--site", help="only this site")
    p_bill.add_argument("--reactive-sweep", metavar="ASSET",
                        help="also show how the bill saving of leading kVAr on this asset's site saturates")
    p_bill.add_argument("--capacitor-cost", type=float, default=None, metavar="PER_KVAR",
                        help="installed capacitor bank cost for the comparison [currency/kVAr] (default: the case's "
                             "capacitor_cost_per_kvar in finance.toml)")
    p_bill.add_argument("--quiet", action="store_true", help="no progress bar")
    p_bill.set_defaults(func=cmd_bill)
    p_run = _command(sub, "run", "run the whole analysis and write the result files")
    p_run.add_argument("case", help="case folder or .xlsx workbook")
    p_run.add_argument("--out", required=True, help="folder for the result files (created if needed)")
    p_run.add_argument("--seed", type=int, help="Monte Carlo seed (default: monte_carlo_seed of finance.toml)")
    p_run.add_argument("--no-risk", action="store_true", help="skip the tornado and Monte Carlo")
    p_run.add_argument("--engine", choices=("local", "dask"), default="local",
                       help="local (default) or dask: the same analysis partitioned by site on a Dask cluster")
    p_run.add_argument("--scheduler", metavar="ADDRESS",
                       help="address of a running Dask scheduler, with --engine dask (default: start a local cluster)")
    _add_run_options(p_run, gap_frac, time_s)
    p_run.set_defaults(func=cmd_run)
    p_serve = _command(sub, "serve", "open the dashboard on a case (the demo case by default)")
    p_serve.add_argument("case", nargs="?", default=None, help="case folder or .xlsx workbook (default: the demo case)")
    p_serve.add_argument("--port", type=_port, default=8050, help="port, 1 to 65535 (default 8050)")
    p_serve.add_argument("--host", default="127.0.0.1",
                         help="address to bind (default 127.0.0.1, this computer only); another address shares the "
                              "dashboard on the network and prints a warning")
    p_serve.add_argument("--debug", action="store_true", help="the dashboard's debug mode (development only)")
    p_serve.add_argument("--no-browser", action="store_true", help="do not open a browser window")
    p_serve.set_defaults(func=cmd_serve)
    p_report = _command(sub, "report", "write the capital-request pack (workbook, HTML report, decision records)")
    p_report.add_argument("case", help="case folder or .xlsx workbook")
    p_report.add_argument("--out", required=True, help="folder for the pack (created if needed)")
    group = p_report.add_mutually_exclusive_group()
    group.add_argument("--assets", help="comma-separated asset ids to report on")
    group.add_argument("--plan", action="store_true", help="report on the fleet plan (default)")
    p_report.add_argument("--seed", type=int,
                          help="Monte Carlo seed (default: monte_carlo_seed of finance.toml); the same seed as a run's "
                               "gives that run's uncertainty figures")
    p_report.add_argument("--pdf", action="store_true",
                          help="also print the report to PDF with headless Chromium (needs Playwright and a Chromium; "
                               "skipped with a message without them)")
    _add_run_options(p_report, gap_frac, time_s)
    p_report.set_defaults(func=cmd_report)
    return parser


def _command(sub, name: str, summary: str) -> argparse.ArgumentParser:
    """A command whose own help (``drivecase NAME --help``) opens with what it does, as the list of commands
    says it."""
    return sub.add_parser(name, help=summary, description=summary[:1].upper() + summary[1:] + ".")


def _port(text: str) -> int:
    """A network port given on the command line: a whole number from 1 to 65535."""
    try:
        value = int(text)
    except ValueError:
        value = 0
    if not 1 <= value <= 65535:
        raise argparse.ArgumentTypeError(f"{text!r} is not a port: give a whole number from 1 to 65535, e.g. 8050")
    return value


def _positive_gib(text: str) -> float:
    """A memory size in GiB given on the command line: a number above 0."""
    try:
        value = float(text)
    except ValueError:
        value = float("nan")
    if not value > 0 or value == float("inf"):
        raise argparse.ArgumentTypeError(f"{text!r} is not a memory size: give a number of GiB above 0, e.g. 4")
    return value


def _add_run_options(parser: argparse.ArgumentParser, gap_frac: float, time_s: float) -> None:
    """The options of a command that runs the analysis (run, report): progress, estimate, the exact plan's bounds."""
    parser.add_argument("--quiet", action="store_true", help="no progress bar and no line per stage")
    parser.add_argument("--estimate", action="store_true",
                        help="print the estimate of time and memory of the run and stop (nothing is written)")
    parser.add_argument("--max-memory", type=_positive_gib, metavar="GIB",
                        help="keep the run's estimated peak memory on this machine, with a margin for the estimate's "
                             "error, within this many GiB: it keeps less and recomputes more, with the same numbers "
                             "(default: fitted to most of the memory the machine has free, when the run would need "
                             "more)")
    parser.add_argument("--plan-gap", type=float, default=100.0 * gap_frac, metavar="PCT",
                        help="stop the exact plan once it is proven within this %% of the best possible NPV "
                             f"(default {100.0 * gap_frac:g})")
    parser.add_argument("--plan-seconds", type=float, default=time_s, metavar="S",
                        help=f"time limit of the exact plan's solver (default {time_s:g}); the best plan "
                             "found and its proven gap are reported when it is reached")


def _version() -> str:
    from importlib.metadata import PackageNotFoundError, version

    try:
        return version("drivecase")
    except PackageNotFoundError:
        return "(not installed)"


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if getattr(args, "func", None) is None:  # no command: the help, as for a wrong command line
        parser.print_help(sys.stderr)
        return 2
    try:
        return int(args.func(args))
    except KeyboardInterrupt:  # Ctrl+C: one line, no traceback; nothing half-written is left (atomic writes)
        print(f"\n{' '.join(filter(None, ('drivecase', getattr(args, 'command', None))))}: interrupted", file=sys.stderr)
        return INTERRUPTED
    except BrokenPipeError:  # the reader of the output (e.g. `| head`) stopped reading: not an error of ours
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())  # no second error when Python flushes stdout at exit
        return 0


def entry() -> int:
    """The ``drivecase`` command: :func:`main`, and after Ctrl+C an exit that does not wait for the exact plan's
    solver thread to finish its search (up to ``--plan-seconds``): it cannot be stopped, and its result would be
    thrown away (a Dask run's cluster is closed by then, on the way out of its engine). So too once the dashboard
    has stopped: a request still solving a plan in its thread would otherwise be cut inside the solver's native
    code as the interpreter ends, which aborts the process with a message of its own (the case's files are
    written atomically, so none is left half-written)."""
    code = main()
    if code == INTERRUPTED or _LEAVE_AT_ONCE["serve"]:
        if _LEAVE_AT_ONCE["serve"]:  # the exit handlers still run: the dashboard's uploads folder is removed
            import atexit

            atexit._run_exitfuncs()
        sys.stdout.flush()
        sys.stderr.flush()
        os._exit(code)
    return code


if __name__ == "__main__":
    raise SystemExit(entry())
