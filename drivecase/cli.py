"""The ``drivecase`` command: write a blank case, check a case, and (as they land) run, bill and serve.

A thin front: it parses arguments, calls :mod:`models`, and prints. Exit status 0 means success, 1 means
the input has errors (the problem list is printed), 2 means the command line itself was wrong.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

import pandas as pd

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
    errors = [p for p in problems if p.severity == "error"]
    warnings = [p for p in problems if p.severity == "warning"]
    print(f"\nProblems: {len(errors)} error(s), {len(warnings)} warning(s)")
    for problem in (errors + warnings)[:limit]:
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
    print(f"Blank case written to {args.dir}:")
    for path in written:
        print(f"  {path}")
    print("Fill in assets and sites (one row each), then run: drivecase check", args.dir)
    return 0


def cmd_check(args: argparse.Namespace) -> int:
    from models.case import fleet_summary, load_case

    case, problems = load_case(args.case)
    if case is None:
        print(f"Case {args.case}: NOT VALID")
        _print_problems(problems)
        return 1
    s = case.settings
    print(f"Case: {s.name}{' (invented demo data)' if s.invented else ''}")
    print(f"  {len(case.assets)} assets, {case.assets['rated_p_kw'].sum():,.1f} kW installed, "
          f"{len(case.sites)} site(s), {len(case.profiles)} interval profile(s); currency {s.currency}; zone {s.time_zone}")
    summary = fleet_summary(case)
    _print_table(summary["by_site"], "Installed power by site [kW]")
    _print_table(summary["by_application"], "Installed power by application [kW]")
    _print_table(summary["defaulted"], "Defaulted fields (filled from class, size or application defaults)")
    _print_table(summary["quality"], "Mean data-quality score by site [%]")
    _print_problems(problems)
    print(f"\n{CAUTION}")
    return 0


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(prog="drivecase", description="Keep, rewind or replace: motor-fleet economics.")
    sub = parser.add_subparsers(dest="command", required=True)
    p_new = sub.add_parser("new", help="write a blank case (CSV templates, or a workbook with --workbook)")
    p_new.add_argument("dir", help="new folder (or .xlsx file) to create")
    p_new.add_argument("--workbook", action="store_true", help="write one .xlsx workbook instead of CSV files")
    p_new.set_defaults(func=cmd_new)
    p_check = sub.add_parser("check", help="validate a case and print a fleet summary")
    p_check.add_argument("case", help="case folder or .xlsx workbook")
    p_check.set_defaults(func=cmd_check)
    return parser


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    return int(args.func(args))


if __name__ == "__main__":
    raise SystemExit(main())
