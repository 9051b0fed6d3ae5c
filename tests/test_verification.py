"""Savings verified against the prediction (IPMVP avoided energy, a ratio adjustment of the baseline).

Sources: hand calculations in docs/derivations/savings-verification.md (cases V1-V3). The model's yearly energies
(today's and the installed option's) are inputs here, read from the run; what is checked is the verification's
arithmetic and its reading of the table.
"""

from __future__ import annotations

import numpy as np
import pytest

import casebuilder as cb
from models import scenario, verification
from models.case import load_case

HEADER = "asset_id,option_id,period,start_date,end_date,energy_kwh,running_h,production\n"


def _case(folder, rows: str):
    cb.write_case(folder)
    cb.with_flat_tariff(folder)
    (folder / "verification.csv").write_text(HEADER + rows, encoding="utf-8")
    return load_case(folder)


@pytest.fixture(scope="module")
def verified(tmp_path_factory):
    rows = ("F1,ie3,baseline,2026-01-05,2026-01-18,12000,,40000\n"
            "F1,ie3,reporting,2026-03-02,2026-03-15,12600,,45000\n"
            "P1,ie4,baseline,2026-01-01,2026-01-10,1500,150,\n"
            "P1,ie4,baseline,2026-01-11,2026-01-20,1500,150,\n"
            "P1,ie4,reporting,2026-03-01,2026-03-20,3040,320,\n"
            "C1,ie3,baseline,2026-01-01,2026-01-07,700,,\n"
            "C1,ie3,reporting,2026-02-01,2026-02-10,950,,\n")
    case, problems = _case(tmp_path_factory.mktemp("v"), rows)
    assert case is not None, [p.rule for p in problems if p.severity == "error"]
    result = scenario.run(case, case.finance, with_risk=False)
    return case, result, verification.verify_savings(case, result).set_index("asset_id")


def test_production_normalised_saving(verified):
    # hand calculation V1
    _, result, table = verified
    row = table.loc["F1"]
    assert row["basis"] == "production"
    assert (row["baseline_days"], row["reporting_days"]) == (14, 14)
    assert row["adjusted_baseline_kwh"] == pytest.approx(13_500.0)
    assert row["avoided_kwh"] == pytest.approx(900.0)
    assert row["avoided_pct"] == pytest.approx(6.6667, abs=1e-4)
    assert row["avoided_kwh_per_yr"] == pytest.approx(23_464.29, abs=0.01)
    op = result.physics.operation
    i, o = op.asset_position("F1"), op.option_position("ie3")
    share = 1.0 - op.energy_kwh[i, o] / op.energy_kwh[i, 0]  # the model's saving share (an input here)
    assert row["predicted_avoided_kwh"] == pytest.approx(share * 13_500.0, rel=1e-12)
    assert row["realisation_pct"] == pytest.approx(900.0 / (share * 13_500.0) * 100.0, rel=1e-12)


def test_running_hours_normalised_saving_adds_the_rows_of_a_period(verified):
    # hand calculation V2
    _, _, table = verified
    row = table.loc["P1"]
    assert row["basis"] == "running hours"
    assert row["baseline_kwh"] == 3000.0 and row["baseline_days"] == 20
    assert row["adjusted_baseline_kwh"] == pytest.approx(3200.0)
    assert row["avoided_kwh"] == pytest.approx(160.0)
    assert row["avoided_pct"] == pytest.approx(5.0)


def test_days_only_and_a_short_period_are_said(verified):
    # hand calculation V3
    _, _, table = verified
    row = table.loc["C1"]
    assert row["basis"] == "days" and (row["baseline_days"], row["reporting_days"]) == (7, 10)
    assert row["adjusted_baseline_kwh"] == pytest.approx(1000.0)
    assert row["avoided_kwh"] == pytest.approx(50.0)
    assert row["avoided_kwh_per_yr"] == pytest.approx(1825.0)
    # C1's option is a new induction motor at unchanged duty: two weeks asked (the M&V plan's rule)
    assert "adjusted by days only" in row["finding"] and "a reporting period of 10 days, shorter than the 14 days asked" in row["finding"]


def test_the_value_is_the_projects_bill_saving_per_kwh_saved(verified):
    _, result, table = verified
    res = result.results.set_index(["asset_id", "option_id"]).loc[("F1", "ie3")]
    per_kwh = res["bill_saving_per_yr"] / res["energy_saved_kwh_per_yr"]
    assert table.loc["F1", "verified_value"] == pytest.approx(900.0 * per_kwh, rel=1e-12)


def test_the_baseline_is_set_beside_todays_motor_as_modelled(verified):
    # per running hour where the baseline gives its hours, else per day of the modelled year
    _, result, table = verified
    op = result.physics.operation
    i = op.asset_position("P1")
    assert table.loc["P1", "baseline_model_kwh"] == pytest.approx(op.energy_kwh[i, 0] / op.running_h[i] * 300.0, rel=1e-12)
    j = op.asset_position("F1")
    year_days = len(op.index) * op.interval_h / 24.0
    assert table.loc["F1", "baseline_model_kwh"] == pytest.approx(op.energy_kwh[j, 0] / year_days * 14.0, rel=1e-12)
    off = 100.0 * (12_000.0 - table.loc["F1", "baseline_model_kwh"]) / table.loc["F1", "baseline_model_kwh"]
    assert table.loc["F1", "baseline_model_difference_pct"] == pytest.approx(off, rel=1e-12)


@pytest.mark.parametrize("rate, words", [(95.0, "as predicted"), (80.0, "below the prediction"),
                                         (50.0, "well below the prediction"), (130.0, "above the prediction")])
def test_realisation_bands(rate, words):
    # docs/derivations/savings-verification.md, "Realisation bands" (common practice)
    row = {"reporting_days": 30, "baseline_days": 30, "realisation_pct": rate, "avoided_kwh": 1.0,
           "baseline_model_difference_pct": 0.0, "basis": "production"}
    assert verification._finding(row).startswith(words)


def _refused(folder, rows: str) -> dict:
    """The errors of verification.csv of a case refused for them, by (row, column)."""
    case, problems = _case(folder, rows)
    assert case is None
    return {(p.row, p.column): p.rule for p in problems if p.severity == "error" and p.file == "verification.csv"}


def test_bad_rows_are_told_by_file_row_and_column(tmp_path):
    rows = ("NOPE,ie3,baseline,2026-01-05,2026-01-18,100,,\n"
            "F1,keep,baseline,2026-01-05,2026-01-18,100,,\n"
            "P1,ie3,baseline,2026-01-18,2026-01-05,100,,\n"
            "P1,ie3,reporting,2026-02-01,2026-02-02,100,49,\n"
            "C1,ie3,baseline,2026-01-05,5 Jan,100,,\n")
    said = _refused(tmp_path / "bad", rows)
    assert "unknown asset_id" in said[(2, "asset_id")]
    assert "cannot be today's motor" in said[(3, "option_id")]
    assert "the last day is before the first" in said[(4, "end_date")]
    assert "more running hours than the period's 2 days hold" in said[(5, "running_h")]
    assert "YYYY-MM-DD" in said[(6, "end_date")]


def test_a_reporting_period_must_come_after_the_baseline(tmp_path):
    # F1: the reporting period starts on the baseline's last day; P1: between two baseline rows; C1: before
    # the baseline (each an error on its reporting row's start_date; rows counted from 2, under the header)
    rows = ("F1,ie3,baseline,2026-01-05,2026-01-18,12000,,\n"
            "F1,ie3,reporting,2026-01-18,2026-01-31,11000,,\n"
            "P1,ie4,baseline,2026-01-01,2026-01-10,1500,,\n"
            "P1,ie4,baseline,2026-02-01,2026-02-10,1500,,\n"
            "P1,ie4,reporting,2026-01-12,2026-01-20,1400,,\n"
            "C1,ie3,baseline,2026-03-01,2026-03-07,700,,\n"
            "C1,ie3,reporting,2026-02-01,2026-02-10,950,,\n")
    said = _refused(tmp_path / "order", rows)
    assert "starts on or before the last day of its baseline (2026-01-18)" in said[(3, "start_date")]
    assert "starts on or before the last day of its baseline (2026-02-10)" in said[(6, "start_date")]
    assert "ends before its baseline starts (2026-03-01)" in said[(8, "end_date")]
    assert len(said) == 3


def test_a_baseline_without_a_reporting_period_is_a_warning_and_a_row_that_waits(tmp_path):
    case, problems = _case(tmp_path / "wait", "F1,ie3,baseline,2026-01-05,2026-01-18,12000,,\n")
    assert case is not None
    assert any(p.severity == "warning" and "no reporting period yet" in p.rule for p in problems)
    result = scenario.run(case, case.finance, with_risk=False)
    row = verification.verify_savings(case, result).iloc[0]
    assert row["finding"] == "baseline captured; no reporting period yet" and np.isnan(row["avoided_kwh"])


def test_no_table_gives_an_empty_table_with_its_columns(tmp_path):
    cb.write_case(tmp_path / "none")
    cb.with_flat_tariff(tmp_path / "none")
    case, _ = load_case(tmp_path / "none")
    result = scenario.run(case, case.finance, with_risk=False)
    table = verification.verify_savings(case, result)
    assert table.empty and list(table.columns) == list(verification.VERIFIED_COLUMNS)


def test_the_run_files_the_report_and_the_command_carry_the_verified_savings(verified, tmp_path, capsys):
    from drivecase.cli import main
    from models.exports import VERIFIED_FILE, write_run
    from models.pack import content
    from models.pack.report_html import render_report, report_context

    case, result, table = verified
    written = [p.name for p in write_run(result, tmp_path / "out", case)]
    assert VERIFIED_FILE in written
    import pandas as pd

    saved = pd.read_csv(tmp_path / "out" / VERIFIED_FILE).set_index("asset_id")
    assert saved.loc["F1", "avoided_kwh"] == pytest.approx(900.0) and saved.loc["P1", "basis"] == "running hours"
    scope = content.select_scope(case, result, ["F1", "P1", "C1"], False)
    context = report_context(case, result, scope, [])
    assert [r["cells"][0]["text"].split(":")[0] for r in context["verified_rows"]] == ["F1", "P1", "C1"]
    assert "Savings measured so far" in render_report(case, result, scope)
    assert main(["run", str(case.path), "--out", str(tmp_path / "cli"), "--no-risk", "--quiet"]) == 0
    said = capsys.readouterr().out
    assert "Savings verified (savings_verified.csv)" in said and "F1 (ie3): 900 kWh avoided (production)" in said


def test_check_counts_the_measurements(verified, capsys):
    from drivecase.cli import main

    case, _, _ = verified
    main(["check", str(case.path)])
    assert "Savings verification: 7 measurements of 3 assets" in capsys.readouterr().out
