"""Writing a run's result files: CSV tables that are safe to open in a spreadsheet, written atomically.

Every file is written to a temporary file in the target folder and renamed into place, so a crash
never leaves a half-written file. Text cells that a spreadsheet could take for a formula (starting
with ``=``, ``+``, ``-`` or ``@``) are prefixed with an apostrophe; numbers are written as numbers.
Floats are written with 10 significant digits so the same run gives byte-identical files on any machine.
"""

from __future__ import annotations

import os
import tempfile
from pathlib import Path

import numpy as np
import pandas as pd

#: Characters that make a spreadsheet read a cell as a formula.
FORMULA_STARTS = ("=", "+", "-", "@", "\t", "\r")

#: The files of a run, in the order they are written (documented in docs/outputs.md).
RUN_FILES = ("results.csv", "cashflows.csv", "bills.csv", "plan.csv", "plan_rank_order.csv", "risk.csv",
             "tornado.csv", "abatement.csv", "end_of_life.csv", "fleet_rules.csv", "lcc.csv", "flags.csv")


def neutralise_text(value: object) -> object:
    """Return text that cannot be read as a spreadsheet formula; other values unchanged.

    Examples
    --------
    >>> neutralise_text("=HYPERLINK(1)"), neutralise_text(-3.5), neutralise_text("pump")
    ("'=HYPERLINK(1)", -3.5, 'pump')
    """
    if isinstance(value, str) and value.startswith(FORMULA_STARTS):
        return "'" + value
    return value


def safe_frame(frame: pd.DataFrame) -> pd.DataFrame:
    """Return a copy whose text cells are neutralised (:func:`neutralise_text`).

    Text columns are tested in one vectorised pass (a cash-flow table of millions of rows would otherwise
    take a Python call per cell); columns of mixed objects cell by cell.
    """
    out = frame.copy()
    for column in out.columns:
        series = out[column]
        if series.dtype == object:
            out[column] = series.map(neutralise_text)
        elif pd.api.types.is_string_dtype(series.dtype):
            risky = series.str.startswith(FORMULA_STARTS).fillna(False).to_numpy(dtype=bool)
            if risky.any():
                out[column] = series.where(~risky, "'" + series)
    return out


def atomic_write_bytes(path: Path, data: bytes) -> None:
    """Write bytes to ``path`` through a temporary file in the same folder and an atomic rename."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    handle, temp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".part", dir=path.parent)
    try:
        with os.fdopen(handle, "wb") as out:
            out.write(data)
            out.flush()
            os.fsync(out.fileno())
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(temp, 0o666 & ~umask)  # mkstemp creates 0600; give the file the user's usual permissions
        os.replace(temp, path)
    except BaseException:
        if os.path.exists(temp):
            os.unlink(temp)
        raise


def csv_bytes(frame: pd.DataFrame) -> bytes:
    """Serialise a table to CSV bytes: neutralised text, 10 significant digits, '\\n' line ends."""
    text = safe_frame(frame).to_csv(index=False, float_format="%.10g", lineterminator="\n")
    return text.encode("utf-8")


def write_csv(path: Path, frame: pd.DataFrame) -> Path:
    """Write one table atomically as CSV."""
    atomic_write_bytes(Path(path), csv_bytes(frame))
    return Path(path)


def run_tables(result) -> dict[str, pd.DataFrame]:
    """Return every table of a run, by file name (see :data:`RUN_FILES`)."""
    results = result.results.copy()
    for column in ("irr_frac", "mirr_frac", "airr_frac", "simple_payback_yr", "discounted_payback_yr",
                   "abatement_cost_per_t", "cost_of_saved_energy_per_mwh"):
        values = results[column].to_numpy(dtype=float)
        results[column] = np.where(np.isinf(values), np.nan, values)  # documented: blank = none / not within horizon
    bills = result.bills.copy()
    bills = bills[["site_id", "month", "scenario", "line_item", "quantity", "unit", "rate", "amount"]]
    risk_rows = result.risk.copy()
    if not risk_rows.empty and "project_id" in risk_rows:
        split = risk_rows["project_id"].str.split("/", n=1, expand=True)
        risk_rows.insert(0, "option_id", split[1])
        risk_rows.insert(0, "asset_id", split[0])
        risk_rows = risk_rows.drop(columns=["project_id"])
    abatement = result.abatement.copy()
    if not abatement.empty:
        abatement.insert(1, "option_id", abatement["project_id"].str.split("/", n=1, expand=True)[1])
        abatement = abatement.drop(columns=["project_id"])
    flags = result.physics.operation.flags.copy()
    return {
        "results.csv": results, "cashflows.csv": result.cashflows, "bills.csv": bills, "plan.csv": result.plan,
        "plan_rank_order.csv": result.plan_greedy, "risk.csv": risk_rows, "tornado.csv": result.tornado,
        "abatement.csv": abatement, "end_of_life.csv": result.end_of_life, "fleet_rules.csv": result.fleet_rules,
        "lcc.csv": result.lcc, "flags.csv": flags,
    }


def write_run(result, out_dir: str | Path) -> list[Path]:
    """Write every result table of a run into ``out_dir`` (created if needed); return the paths."""
    out = Path(out_dir)
    written = []
    for name, frame in run_tables(result).items():
        written.append(write_csv(out / name, frame))
    return written
