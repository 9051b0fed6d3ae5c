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

from models.financing import FINANCED_COLUMNS, plan_financing

#: Characters that make a spreadsheet read a cell as a formula.
FORMULA_STARTS = ("=", "+", "-", "@", "\t", "\r")

#: The files of a run, in the order they are written (documented in docs/outputs.md).
RUN_FILES = ("results.csv", "cashflows.csv", "bills.csv", "plan.csv", "plan_rank_order.csv", "financing.csv", "risk.csv",
             "tornado.csv", "plan_risk.csv", "plan_tornado.csv", "npv_draws.csv", "abatement.csv", "end_of_life.csv", "fleet_rules.csv", "lcc.csv", "flags.csv",
             "calibration.csv", "calibration_months.csv")
#: The file saying what a run was computed with (:func:`run_settings`), written beside :data:`RUN_FILES`.
RUN_SETTINGS_FILE = "run_settings.csv"
#: The nameplate fields the case left blank and the values taken for them (:func:`defaulted_fields`).
DEFAULTS_FILE = "defaults.csv"
#: The plan's headline under the case's own assumptions and under each of its named scenarios
#: (:func:`models.comparison.case_scenarios`).
SCENARIOS_FILE = "scenarios.csv"
#: The assets ranked by the value of measuring them before deciding (:func:`models.information.measure_first`).
MEASURE_FIRST_FILE = "measure_first.csv"
#: The sites' harmonic screen, today and with the plan (:func:`models.harmonics.site_screen`; with the case only).
HARMONIC_SCREEN_FILE = "harmonic_screen.csv"
#: The savings measured after each project against its prediction (:func:`models.verification.verify_savings`; with
#: the case only: the case's verification table).
VERIFIED_FILE = "savings_verified.csv"
#: The spares of each group of interchangeable motors (:func:`models.spares.spares_table`; with the case only).
SPARES_FILE = "spares.csv"
#: Every file a run may write into its folder.
ALL_RUN_FILES = RUN_FILES + (RUN_SETTINGS_FILE, DEFAULTS_FILE, SCENARIOS_FILE, MEASURE_FIRST_FILE, HARMONIC_SCREEN_FILE,
                             VERIFIED_FILE, SPARES_FILE)
#: The list of the files a run wrote, kept in its folder: a later run writes over those, never over a file of the
#: same name it did not write.
RUN_MANIFEST_NAME = ".drivecase-run"


def foreign_run_files(out_dir: str | Path) -> list[str]:
    """The files of ``out_dir`` a run would write over that no earlier run wrote there (by its list), sorted.

    Examples
    --------
    >>> foreign_run_files("/no/such/folder")
    []
    """
    out = Path(out_dir)
    if not out.is_dir():
        return []
    try:
        earlier = {line.strip() for line in (out / RUN_MANIFEST_NAME).read_text(encoding="utf-8").splitlines()}
    except (OSError, UnicodeDecodeError):
        earlier = set()
    return sorted(name for name in ALL_RUN_FILES if (out / name).exists() and name not in earlier)


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
    """Return a copy whose text cells are neutralised (:func:`neutralise_text`) and whose negative zeros
    are plain zeros (a "-0" in a file reads as a sign error).

    Text columns are tested in one vectorised pass (a cash-flow table of millions of rows would otherwise
    take a Python call per cell); columns of mixed objects cell by cell.
    """
    out = frame.copy()
    for column in out.columns:
        series = out[column]
        if series.dtype == np.float64:
            values = series.to_numpy()
            if np.signbit(values[values == 0.0]).any():
                out[column] = values + 0.0  # -0.0 + 0.0 is +0.0; every other value is unchanged
        elif series.dtype == object:
            out[column] = series.map(neutralise_text)
        elif pd.api.types.is_string_dtype(series.dtype):
            risky = series.str.startswith(FORMULA_STARTS).fillna(False).to_numpy(dtype=bool)
            if risky.any():
                out[column] = series.where(~risky, "'" + series)
    return out


def _write_temp(path: Path, data: bytes) -> str:
    """Write ``data`` to a new temporary file beside ``path`` (flushed to disk, the user's usual permissions);
    return its name. Nothing is left behind when the writing fails."""
    handle, temp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".part", dir=path.parent)
    try:
        with os.fdopen(handle, "wb") as out:
            out.write(data)
            out.flush()
            os.fsync(out.fileno())
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(temp, 0o666 & ~umask)  # mkstemp creates 0600; give the file the user's usual permissions
    except BaseException:
        if os.path.exists(temp):
            os.unlink(temp)
        raise
    return temp


def atomic_write_bytes(path: Path, data: bytes) -> None:
    """Write bytes to ``path`` through a temporary file in the same folder and an atomic rename."""
    path = Path(path)
    write_file_set(path.parent, [(path.name, data)])


def write_file_set(out_dir: str | Path, contents) -> list[Path]:
    """Write a set of files into ``out_dir`` (created if needed) all or none; return their paths.

    ``contents`` yields (file name, bytes) pairs, a name relative to ``out_dir``. Each file is first written
    whole to a temporary file beside its place; only once every one is on disk are they renamed into place, one
    rename each (which needs no space). A failure while writing (a full disk, a removed folder) or an
    interruption leaves the folder's earlier files as they were and no temporary file behind, so a folder never
    holds a mix of two runs' files.
    """
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    staged: list[tuple[Path, str]] = []
    try:
        for name, data in contents:
            path = out / name
            path.parent.mkdir(parents=True, exist_ok=True)
            staged.append((path, _write_temp(path, data)))
        for path, temp in staged:
            os.replace(temp, path)
    except BaseException:
        for _, temp in staged:
            if os.path.exists(temp):
                os.unlink(temp)
        raise
    return [path for path, _ in staged]


def csv_bytes(frame: pd.DataFrame) -> bytes:
    """Serialise a table to CSV bytes: neutralised text, 10 significant digits, '\\n' line ends.

    The bytes of ``pandas.DataFrame.to_csv(index=False, float_format="%.10g", lineterminator="\\n")``
    of the neutralised table; tables of plain columns (floats, integers, booleans, text without
    delimiters, quotes or line breaks) are built column by column (:func:`_csv_bytes_by_columns`, the
    same bytes, several times faster on a cash-flow table of millions of rows), the others by pandas.
    """
    safe = safe_frame(frame)
    data = _csv_bytes_by_columns(safe)
    if data is None:
        data = safe.to_csv(index=False, float_format="%.10g", lineterminator="\n").encode("utf-8")
    return data


#: Characters that make the CSV writer quote a field (delimiter, quote, line breaks).
_QUOTED = (",", '"', "\n", "\r")


def _floats_as_text(values: np.ndarray):
    """Each float as ``"%.10g" % value`` ("" for NaN), as pandas' CSV writer formats a float column, as a
    pyarrow large-string array. When a sample of the values repeats, each distinct value is formatted once."""
    import pyarrow as pa
    import pyarrow.compute as pc

    sample = values[:: max(1, len(values) // 20_000)]
    repeats = len(np.unique(sample)) < 0.5 * len(sample)
    if repeats:
        unique, inverse = np.unique(values, return_inverse=True)
        text = pa.array(list(map("%.10g".__mod__, unique.tolist())), type=pa.large_string())
        text = text.take(pa.array(inverse.ravel()))
    else:
        text = pa.array(list(map("%.10g".__mod__, values.tolist())), type=pa.large_string())
    nan = np.isnan(values)
    if nan.any():
        text = pc.if_else(pa.array(nan), pa.scalar("", type=pa.large_string()), text)
    return text


def _csv_bytes_by_columns(frame: pd.DataFrame) -> bytes | None:
    """The UTF-8 bytes of ``frame.to_csv(index=False, float_format="%.10g", lineterminator="\\n")``, built
    column by column with pyarrow's string kernels; None for a table this path does not cover (a column
    of mixed objects or of another kind, text that would be quoted, a single column, no rows).
    """
    import pyarrow as pa
    import pyarrow.compute as pc

    if frame.shape[1] < 2 or len(frame) == 0:
        return None
    if any(not isinstance(c, str) or any(ch in c for ch in _QUOTED) for c in frame.columns):
        return None
    empty = pa.scalar("", type=pa.large_string())
    columns = []
    for name in frame.columns:
        series = frame[name]
        dtype = series.dtype
        if dtype == np.float64:
            text = _floats_as_text(series.to_numpy())
        elif dtype == np.int64 or dtype == np.int32:
            text = pa.array(series.to_numpy()).cast(pa.large_string())  # decimal digits, as str()
        elif dtype == np.bool_:
            text = pa.array(np.where(series.to_numpy(), "True", "False"), type=pa.large_string())
        elif isinstance(dtype, pd.CategoricalDtype) and pd.api.types.is_string_dtype(dtype.categories.dtype):
            categories = pa.array(dtype.categories.to_numpy(dtype=object), type=pa.large_string())
            codes = series.cat.codes.to_numpy()
            coded = pa.DictionaryArray.from_arrays(pa.array(codes, mask=codes < 0), categories)
            text = pc.fill_null(coded.cast(pa.large_string()), empty)
        elif isinstance(dtype, pd.StringDtype):
            text = pc.fill_null(pa.chunked_array(pa.array(series.array)).combine_chunks().cast(pa.large_string()), empty)
        else:
            return None
        if not pa.types.is_large_string(text.type):
            return None
        if dtype.kind not in "fiub" and pc.any(pc.match_substring_regex(pc.unique(text), '[,"\n\r]')).as_py():
            return None  # a field the writer would quote
        columns.append(text)
    lines = pc.binary_join_element_wise(*columns, pa.scalar(",", type=pa.large_string()))
    body = pc.binary_join(pa.LargeListArray.from_arrays(pa.array([0, len(lines)], type=pa.int64()), lines),
                          pa.scalar("\n", type=pa.large_string()))
    header = (",".join(frame.columns) + "\n").encode("utf-8")
    return header + body[0].as_buffer().to_pybytes() + b"\n"


#: Columns of the files whose table can be empty (no risk asked for, no rewind option, nothing to plan): an
#: empty file still has its header row (docs/outputs.md).
EMPTY_COLUMNS = {
    "risk.csv": ["asset_id", "option_id", "npv_p10", "npv_p50", "npv_p90", "npv_mean", "npv_standard_error",
                 "prob_npv_positive_frac", "payback_p10_yr", "payback_p50_yr", "payback_p90_yr",
                 "prob_payback_within_target_frac"],
    "tornado.csv": ["variable", "low_value", "high_value", "npv_at_low", "npv_at_high", "base_npv", "swing"],
    "plan_risk.csv": ["asset_id", "option_id", "start_yr", "npv_p10", "npv_p50", "npv_p90", "npv_mean",
                      "npv_standard_error", "prob_npv_positive_frac", "payback_p10_yr", "payback_p50_yr",
                      "payback_p90_yr", "prob_payback_within_target_frac"],
    "plan_tornado.csv": ["variable", "low_value", "high_value", "npv_at_low", "npv_at_high", "base_npv", "swing"],
    "npv_draws.csv": ["draw", "best_options_npv", "plan_npv"],
    "end_of_life.csv": ["asset_id", "age_yr", "new_option_id", "failed", "failure_probability_in_horizon_frac",
                        "mean_residual_life_yr", "cost_replace_now", "cost_replace_at_failure", "cost_rewind_at_failure",
                        "best_strategy", "advantage_over_next", "downtime_cost_per_h", "downtime_cost_basis",
                        "new_lead_time_h", "rewind_lead_time_h", "lead_time_basis"],
    "abatement.csv": ["option_id", "asset_id", "abatement_cost_per_t", "co2_avoided_t_per_yr", "bar_start_t_per_yr",
                      "cumulative_co2_avoided_t_per_yr", "npv"],
    "fleet_rules.csv": ["min_rated_p_kw", "max_rated_p_kw", "min_hours_to_replace_h_per_yr", "decision", "rule"],
    "plan.csv": ["asset_id", "option_id", "start_yr", "capital", "npv", "npv_at_plan_start", "saving_per_yr",
                 "bill_saving_counted_frac", "saving_counted_per_yr"],
    "plan_rank_order.csv": ["asset_id", "option_id", "start_yr", "capital", "npv", "npv_at_plan_start"],
    "flags.csv": ["asset_id", "option_id", "flag"],
    "lcc.csv": ["asset_id", "option_id", "component", "pv"],
    "financing.csv": list(FINANCED_COLUMNS),
    "calibration.csv": ["site_id", "quantity", "unit", "n_months", "modelled_total", "billed_total", "nmbe_pct",
                        "cv_rmse_pct", "within_criteria"],
    "calibration_months.csv": ["site_id", "month", "quantity", "unit", "modelled", "billed", "difference_pct"],
}


def plan_with_savings(plan: pd.DataFrame, results: pd.DataFrame, repriced: dict | None) -> pd.DataFrame:
    """The exact plan's rows with each project's yearly saving, alone and as the plan counts it.

    Parameters
    ----------
    plan : pandas.DataFrame
        The plan's projects (``asset_id``, ``option_id`` and the plan's own columns).
    results : pandas.DataFrame
        Every asset and option (``bill_saving_per_yr`` and ``saving_maintenance_per_yr`` [currency/yr]).
    repriced : dict or None
        The share (0-1) of its own bill saving each reactive project of the plan is credited with beside the
        rest of the plan, by ``"asset/option"`` label; projects not named count their whole saving.

    Returns
    -------
    pandas.DataFrame
        ``plan`` with ``saving_per_yr`` (bill plus maintenance saving of the project alone),
        ``bill_saving_counted_frac`` (the share of its bill saving the plan counts, 1 for all but a reactive
        project the rest of the plan leaves only part of its saving) and ``saving_counted_per_yr`` (share x bill
        saving + maintenance saving): summed, the plan's yearly saving that its NPV and the pack's headline
        rest on.
    """
    out = plan.copy()
    if out.empty:
        return out.reindex(columns=list(out.columns) + [c for c in EMPTY_COLUMNS["plan.csv"] if c not in out])
    own = results.drop_duplicates(["asset_id", "option_id"]).set_index(["asset_id", "option_id"]).reindex(
        pd.MultiIndex.from_frame(out[["asset_id", "option_id"]].astype(str)))
    bill = own["bill_saving_per_yr"].to_numpy(dtype=float)
    maintenance = own["saving_maintenance_per_yr"].to_numpy(dtype=float)
    shares = repriced or {}
    share = np.array([float(shares.get(f"{a}/{o}", 1.0)) for a, o in zip(out["asset_id"], out["option_id"])])
    out["saving_per_yr"] = bill + maintenance
    out["bill_saving_counted_frac"] = share
    out["saving_counted_per_yr"] = share * bill + maintenance
    return out


def _by_asset_and_option(rows: pd.DataFrame) -> pd.DataFrame:
    """A Monte Carlo summary with its "asset/option" project label split into asset_id and option_id."""
    rows = rows.copy()
    if not rows.empty and "project_id" in rows:
        split = rows["project_id"].str.rsplit("/", n=1, expand=True)  # (an asset id may hold "/"; an option id not)
        rows.insert(0, "option_id", split[1])
        rows.insert(0, "asset_id", split[0])
        rows = rows.drop(columns=["project_id"])
    return rows


def run_tables(result, case=None) -> dict[str, pd.DataFrame]:
    """Return every table of a run, by file name (see :data:`RUN_FILES`).

    With the ``case`` (:class:`models.case.Case`) run, :data:`RUN_SETTINGS_FILE` (:func:`run_settings`),
    :data:`DEFAULTS_FILE` (:func:`defaulted_fields`), :data:`SCENARIOS_FILE`
    (:func:`models.comparison.case_scenarios`: the case's named scenarios run on the same physics) and
    :data:`MEASURE_FIRST_FILE` (:func:`models.information.measure_first`), :data:`HARMONIC_SCREEN_FILE`
    (:func:`models.harmonics.site_screen`), :data:`VERIFIED_FILE` (:func:`models.verification.verify_savings`) and
    :data:`SPARES_FILE` (:func:`models.spares.spares_table`) are added.
    """
    results = result.results.copy()
    if case is not None:
        from models.case import power_label, rating_in_unit

        if power_label(case.settings.power_unit) == "hp":  # a case declared in hp: its ratings in hp beside kW
            results.insert(results.columns.get_loc("rated_p_kw") + 1, "rated_p_hp",
                           rating_in_unit(results["rated_p_kw"].to_numpy(dtype=float), "hp"))
    for column in ("irr_frac", "mirr_frac", "airr_frac", "simple_payback_yr", "discounted_payback_yr",
                   "abatement_cost_per_t", "cost_of_saved_energy_per_mwh", "sir"):
        values = results[column].to_numpy(dtype=float)
        results[column] = np.where(np.isinf(values), np.nan, values)  # documented: blank = none / not within horizon
    bills = result.bills.copy()
    banned = bills["flag"].fillna(False).astype(bool) if "flag" in bills else pd.Series(False, index=bills.index)
    bills = bills[["site_id", "month", "scenario", "line_item", "quantity", "unit", "rate", "amount"]].assign(
        banned=banned.to_numpy())
    risk_rows, plan_risk_rows = _by_asset_and_option(result.risk), _by_asset_and_option(result.plan_risk)
    draws = pd.DataFrame(columns=EMPTY_COLUMNS["npv_draws.csv"])
    if len(result.fleet_npv_draws):
        plan_draws = result.plan_npv_draws if len(result.plan_npv_draws) else np.zeros(len(result.fleet_npv_draws))
        draws = pd.DataFrame({"draw": np.arange(1, len(result.fleet_npv_draws) + 1),
                              "best_options_npv": result.fleet_npv_draws, "plan_npv": plan_draws})
    abatement = result.abatement.copy()
    if not abatement.empty:
        abatement.insert(1, "option_id", abatement["project_id"].str.rsplit("/", n=1, expand=True)[1])
        abatement = abatement.drop(columns=["project_id"])
    flags = result.physics.operation.flags.copy()
    tables = {
        "results.csv": results, "cashflows.csv": result.cashflows, "bills.csv": bills,
        "plan.csv": plan_with_savings(result.plan, result.results, (result.plan_status or {}).get("repriced")),
        "plan_rank_order.csv": result.plan_greedy, "financing.csv": plan_financing(result), "risk.csv": risk_rows,
        "tornado.csv": result.tornado,
        "plan_risk.csv": plan_risk_rows, "plan_tornado.csv": result.plan_tornado, "npv_draws.csv": draws,
        "abatement.csv": abatement, "end_of_life.csv": result.end_of_life, "fleet_rules.csv": result.fleet_rules,
        "lcc.csv": result.lcc, "flags.csv": flags,
    }
    # today's fleet as modelled against the bills the case gives (header only without them)
    months, summary = pd.DataFrame(), pd.DataFrame()
    if case is not None and len(getattr(case, "bill_history", ())):
        from models.calibration import calibrate

        months, summary = calibrate(case, result.physics.operation)
    tables["calibration.csv"], tables["calibration_months.csv"] = summary, months
    for name, columns in EMPTY_COLUMNS.items():
        if tables[name].empty and not len(tables[name].columns):
            tables[name] = pd.DataFrame(columns=columns)
    if case is not None:
        from models.comparison import case_scenarios

        tables[RUN_SETTINGS_FILE] = run_settings(result, case.settings)
        tables[DEFAULTS_FILE] = defaulted_fields(case)
        tables[SCENARIOS_FILE] = case_scenarios(case, result)
        from models.information import measure_first

        tables[MEASURE_FIRST_FILE] = measure_first(case, result)
        from models.harmonics import site_screen

        tables[HARMONIC_SCREEN_FILE] = site_screen(case, result.physics.operation, result.plan)
        from models.verification import verify_savings

        tables[VERIFIED_FILE] = verify_savings(case, result)
        from models.spares import spares_table

        tables[SPARES_FILE] = spares_table(case, result)
    return tables


def defaulted_fields(case) -> pd.DataFrame:
    """Return the nameplate fields the case left blank and what was taken for them, one row per field.

    Columns ``asset_id``, ``column`` (the register's column), ``value`` (the value used), ``basis`` (where it
    comes from: the efficiency class, the year installed, a typical value by size...) and
    ``data_quality_pct`` (the asset's data-quality score, 0-100: the share of its inputs given rather than
    defaulted, weighted by their effect on the result).
    """
    columns = ["asset_id", "column", "value", "basis", "data_quality_pct"]
    log = case.defaults
    if log is None or log.empty:
        return pd.DataFrame(columns=columns)
    score = case.assets.set_index("asset_id")["data_quality_pct"]
    frame = log[["asset_id", "column", "value", "basis"]].copy()
    frame["value"] = [v if isinstance(v, str) else float(v) for v in frame["value"]]
    frame["data_quality_pct"] = frame["asset_id"].map(score).to_numpy(dtype=float)
    return frame.reset_index(drop=True)[columns]


def _setting_text(value: object) -> str:
    """One setting's value as written in ``run_settings.csv``: numbers as numbers, lists joined by ``;``."""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, (tuple, list)):
        return ";".join(_setting_text(v) for v in value)
    if isinstance(value, float):
        return "" if np.isinf(value) else f"{value:.10g}"
    return str(value)


def run_settings(result, settings) -> pd.DataFrame:
    """Return what a run was computed with: the case's settings, the finance assumptions and the plan's.

    One row per setting (``setting``, ``value``, ``meaning``), so that a result folder says on its own
    which rules date, region, discount rate, seed and plan tolerance its numbers rest on.

    Parameters
    ----------
    result : models.scenario.ScenarioResult
        The run.
    settings : models.case.CaseSettings
        The case's settings, as the run used them (``purchase_date`` filled in with the day of the run
        when the case left it blank).
    """
    from dataclasses import fields

    from models import __version__

    rows = [("drivecase_version", __version__, "version of the program that wrote these files"),
            ("case_name", settings.name, "the case's name"),
            ("invented", settings.invented, "true when the case is an invented scenario"),
            ("region", settings.region, "whose minimum-efficiency rules decide which new motors may be bought"),
            ("purchase_date", settings.purchase_date, "the day those rules are read on (the day of the run when the case gives none)"),
            ("in_service_month", "" if getattr(settings, "in_service_month", None) is None else settings.in_service_month,
             "calendar month at whose start the changes come into service, for a demand ratchet's first years "
             "(blank: the analysis year's first month)"),
            ("currency", settings.currency, "currency of every money column"),
            ("power_unit", settings.power_unit, "power unit the case displays (result files are in kW; results.csv adds rated_p_hp for a case in hp)"),
            ("time_zone", settings.time_zone, "time zone of the load profiles and tariff periods")]
    assumptions = result.assumptions
    for f in fields(assumptions):
        value = getattr(assumptions, f.name)
        blank = isinstance(value, float) and np.isinf(value)
        rows.append((f"finance.{f.name}", value,
                     "finance assumption (docs/finance.md)" + ("; blank: no limit" if blank else "")))
    plan = result.plan_status or {}
    plan_settings = plan.get("settings")
    if plan_settings is not None:
        rows.append(("plan.gap_asked_frac", plan_settings.gap_frac, "relative gap the exact plan was asked to prove"))
        rows.append(("plan.time_limit_s", plan_settings.time_limit_s, "time the exact plan's solver was given [s]"))
    if "status" in plan:
        rows.append(("plan.status", plan["status"], "how the exact plan's solve ended"))
    if "gap_frac" in plan:
        rows.append(("plan.gap_proven_frac", plan["gap_frac"], "proven gap of the exact plan to the best possible NPV"))
    return pd.DataFrame([(name, _setting_text(value), meaning) for name, value, meaning in rows],
                        columns=["setting", "value", "meaning"])


def write_run(result, out_dir: str | Path, case=None) -> list[Path]:
    """Write every result table of a run into ``out_dir`` (created if needed); return the paths.

    The folder keeps the list of the files written (:data:`RUN_MANIFEST_NAME`), so that a later run writes over
    them and never over a file of the same name it did not write (:func:`foreign_run_files`). The files are
    written all or none (:func:`write_file_set`): a run that cannot write them all leaves an earlier run's as
    they were.

    With the ``case`` run, :data:`RUN_SETTINGS_FILE` and :data:`DEFAULTS_FILE` are written too
    (:func:`run_tables`).
    """
    tables = run_tables(result, case)
    names = list(tables)
    manifest = ("\n".join(sorted(names)) + "\n").encode("utf-8")

    def contents():  # one table's text at a time (the fleet's cash flows can be large)
        for name in names:
            yield name, csv_bytes(tables[name])
        yield RUN_MANIFEST_NAME, manifest

    return write_file_set(out_dir, contents())[:-1]
