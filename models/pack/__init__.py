"""The capital-request pack: an auditable workbook, a self-contained HTML report and decision records.

:func:`write_pack` is the one entry point (the command line's ``drivecase report`` and the dashboard's
download both call it). It covers either the assets asked for (every option of each) or the exact fleet
plan's projects, and writes into one folder:

* ``capital-request.xlsx``: assumptions, options compared, cash flows with live NPV/IRR/payback formulas,
  checks against the engine, plan, bills, data quality, end of life, risk (:mod:`models.pack.workbook`);
* ``capital-request.html``: the report, plotly.js inlined once, no network (:mod:`models.pack.report_html`);
* ``capital-request.pdf``: the report printed by headless Chromium, when asked and available (:mod:`models.pack.pdf`);
* ``decision-records/<asset>.html``: one printable page per asset (:mod:`models.pack.decision_record`).

Every file is written atomically and only inside the output folder. docs/pack.md describes the contents.
A pack also writes the list of its files (``.drivecase-pack``); writing a pack again into the same folder
removes the files of the earlier pack that the new one does not cover (a decision record of an asset no
longer asked for, a PDF not printed again), and only those: any other file is left and named in a note.
"""

from __future__ import annotations

import warnings
from pathlib import Path

from models.exports import atomic_write_bytes, write_file_set
from models.pack.content import Scope, select_scope
from models.pack.decision_record import record_file_name, render_decision_record
from models.pack.report_html import render_report
from models.pack.workbook import build_workbook
from models.wording import counted

__all__ = ["write_pack", "select_scope", "Scope", "PackWarning", "WORKBOOK_NAME", "REPORT_NAME", "PDF_NAME", "RECORDS_DIR"]

WORKBOOK_NAME = "capital-request.xlsx"
REPORT_NAME = "capital-request.html"
PDF_NAME = "capital-request.pdf"
RECORDS_DIR = "decision-records"
#: The list of the files a pack wrote, one relative path per line, kept in its folder.
MANIFEST_NAME = ".drivecase-pack"


class PackWarning(UserWarning):
    """A part of the pack was skipped (e.g. the PDF without a browser); the rest was written."""


def _pack_file(relative: str) -> bool:
    """Whether a relative path is one a pack writes (so one an earlier pack's list may name for removal)."""
    parts = relative.split("/")
    return (relative in (WORKBOOK_NAME, REPORT_NAME, PDF_NAME)
            or (len(parts) == 2 and parts[0] == RECORDS_DIR and parts[1].endswith(".html") and not parts[1].startswith(".")))


def _earlier_pack(out: Path) -> set[str]:
    """The files the earlier pack in ``out`` wrote, from its list (empty without one)."""
    try:
        lines = (out / MANIFEST_NAME).read_text(encoding="utf-8").splitlines()
    except (OSError, UnicodeDecodeError):
        return set()
    return {line.strip() for line in lines if _pack_file(line.strip())}


def _tidy(out: Path, written: list[Path], notes: list[str]) -> None:
    """Remove the earlier pack's files that this one did not write, note any other leftover, write the list."""
    now = {path.relative_to(out).as_posix() for path in written}
    removed = []
    for relative in sorted(_earlier_pack(out) - now):
        path = out / relative
        if path.is_file() and not path.is_symlink() and path.resolve().is_relative_to(out.resolve()):
            path.unlink()
            removed.append(relative)
    if removed:
        notes.append(f"Removed {counted(len(removed), 'file')} of the earlier pack in this folder that this pack does "
                     f"not cover: {', '.join(removed[:4])}{' and more' if len(removed) > 4 else ''}.")
    records = out / RECORDS_DIR
    others = sorted(p.relative_to(out).as_posix() for p in records.glob("*.html")
                    if p.relative_to(out).as_posix() not in now) if records.is_dir() else []
    if (out / PDF_NAME).is_file() and PDF_NAME not in now:
        others.insert(0, PDF_NAME)
    if others:
        notes.append(f"The folder also holds {counted(len(others), 'file')} this pack did not write, left as they are "
                     f"(an earlier pack's?): {', '.join(others[:4])}{' and more' if len(others) > 4 else ''}; write the "
                     "pack to a new folder to have it alone.")
    atomic_write_bytes(out / MANIFEST_NAME, ("\n".join(sorted(now)) + "\n").encode("utf-8"))


def pdf_footer(settings) -> str:
    """The text at the foot of every PDF page: the case, whether it is invented, and the standing caution.

    Examples
    --------
    >>> from models.case import CaseSettings
    >>> pdf_footer(CaseSettings(name="Mill", invented=True))
    "Mill · Invented demo data · Planning estimate, not a design: electrical work by qualified persons under local codes and the utility's rules"
    """
    parts = [str(settings.name)]
    if settings.invented:
        parts.append("Invented demo data")
    parts.append("Planning estimate, not a design: electrical work by qualified persons under local codes and the "
                 "utility's rules")
    return " · ".join(parts)


def _inside(out: Path, path: Path) -> Path:
    """Return ``path`` after checking it stays inside ``out``."""
    if not path.resolve().is_relative_to(out.resolve()):
        raise ValueError(f"refusing to write outside the output folder: {path}")
    return path


def write_pack(case, result, out_dir, assets: list[str] | None = None, plan: bool = True, pdf: bool = False,
               messages: list[str] | None = None) -> list[Path]:
    """Write the capital-request pack of a finished run.

    Parameters
    ----------
    case : models.case.Case
        The case the run was made from.
    result : models.scenario.ScenarioResult
        The run (``models.scenario.run(case, case.finance)``); the tornado and Monte Carlo appear when it
        was run with risk.
    out_dir : str or pathlib.Path
        Folder for the pack, created if needed. Nothing is written outside it.
    assets : list of str, optional
        Asset ids to cover, each with all its options.
    plan : bool
        Cover the exact fleet plan's projects (used alone when no assets are given).
    pdf : bool
        Also print the report to PDF with headless Chromium; skipped with a message when unavailable.
    messages : list of str, optional
        Receives notes for the user (whether the PDF was printed; the earlier pack's files removed, other
        files left in the folder). A skipped PDF also raises a :class:`PackWarning`.

    Returns
    -------
    list of pathlib.Path
        The files written.

    Raises
    ------
    ValueError
        For unknown asset ids or an empty selection.
    """
    notes = messages if messages is not None else []
    scope = select_scope(case, result, assets, plan if assets else True)
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    taken: set[str] = set()
    record_names = {}
    for asset_id in scope.asset_ids:
        name = record_file_name(asset_id, taken)
        taken.add(name.lower())
        record_names[asset_id] = name
    listed = [WORKBOOK_NAME, REPORT_NAME] + ([PDF_NAME] if pdf else []) + [f"{RECORDS_DIR}/{n}" for n in record_names.values()]

    workbook = build_workbook(case, result, scope)
    report = render_report(case, result, scope, listed).encode("utf-8")
    records = {f"{RECORDS_DIR}/{name}": render_decision_record(case, result, scope, asset_id).encode("utf-8")
               for asset_id, name in record_names.items()}
    printed = None
    if pdf:
        import tempfile

        from models.pack.pdf import pdf_bytes

        with tempfile.TemporaryDirectory(prefix="drivecase-pack-") as folder:  # printed before any file is replaced
            staged_report = Path(folder) / REPORT_NAME
            staged_report.write_bytes(report)
            printed, message = pdf_bytes(staged_report, footer=pdf_footer(case.settings))
        notes.append(message)
        if printed is None:
            warnings.warn(message, PackWarning, stacklevel=2)
    files = [(WORKBOOK_NAME, workbook), (REPORT_NAME, report)] + ([(PDF_NAME, printed)] if printed is not None else [])
    files += list(records.items())
    for name, _ in files:
        _inside(out, out / name)
    # all or none: an earlier pack in the folder stays whole if any file cannot be written
    written = write_file_set(out, files)
    _tidy(out, written, notes)
    return written
