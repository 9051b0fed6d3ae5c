"""Validation record for models.calibration: today's fleet as modelled against the site's own bills.

Expected values are worked out by hand beside each test (the statistics' formulas are in docs/calibration.md).
"""

from __future__ import annotations

import shutil
from pathlib import Path
from types import SimpleNamespace

import numpy as np
import pandas as pd
import pytest

from models import calibration

REPO = Path(__file__).resolve().parents[1]


class TestFitStatistics:
    def test_a_year_of_bills_by_hand(self):
        # 12 months billed 100 each; the model reads 95 in six months and 100 in the other six.
        # errors (billed - modelled): six of 5, six of 0; n - p = 11 (p = 1)
        # NMBE = 30 / (11 x 100) x 100 = 2.727 %; CV(RMSE) = sqrt(6 x 25 / 11) / 100 x 100 = 3.693 %
        modelled = np.array([95.0] * 6 + [100.0] * 6)
        nmbe, cv = calibration.fit_statistics(modelled, np.full(12, 100.0))
        assert nmbe == pytest.approx(300.0 / 110.0, rel=1e-12)
        assert cv == pytest.approx(np.sqrt(150.0 / 11.0), rel=1e-12)

    def test_the_model_above_the_bills_gives_a_negative_bias(self):
        # the guideline's sign: billed - modelled; the model 10 % above in both months: (-10 - 10) / (1 x 100)
        nmbe, cv = calibration.fit_statistics([110.0, 110.0], [100.0, 100.0])
        assert nmbe == pytest.approx(-20.0) and cv == pytest.approx(np.sqrt(200.0), rel=1e-12)

    def test_one_month_is_too_few(self):
        assert all(np.isnan(calibration.fit_statistics([1.0], [2.0])))


class TestCompareAndSummarise:
    def modelled(self):
        # site S, January and February as modelled (hand-written)
        return pd.DataFrame({"site_id": ["S", "S"], "month_of_year": [1, 2], "energy_kwh": [1100.0, 900.0],
                             "peak_kw": [10.0, 12.0], "reactive_kvarh": [300.0, 200.0], "amount": [220.0, 180.0]})

    def test_a_bill_of_another_year_meets_the_same_calendar_month(self):
        history = pd.DataFrame({"site_id": ["S", "S", "S"], "month": ["2023-01", "2023-02", "2023-07"],
                                "energy_kwh": [1000.0, 1000.0, 500.0], "peak_kw": [np.nan, 10.0, np.nan],
                                "reactive_kvarh": [np.nan] * 3, "amount": [200.0, np.nan, np.nan]})
        c = calibration.compare_with_bills(self.modelled(), history)
        # July is not modelled (left out); blanks are not compared
        assert c[["month", "quantity", "modelled", "billed"]].values.tolist() == [
            ["2023-01", "energy_kwh", 1100.0, 1000.0], ["2023-01", "amount", 220.0, 200.0],
            ["2023-02", "energy_kwh", 900.0, 1000.0], ["2023-02", "peak_kw", 12.0, 10.0]]
        # (1100 - 1000) / 1000 = +10 %; (900 - 1000) / 1000 = -10 %; (12 - 10) / 10 = +20 %
        assert c["difference_pct"].tolist() == pytest.approx([10.0, 10.0, -10.0, 20.0])
        s = calibration.calibration_summary(c).set_index("quantity")
        # energy: errors -100 and +100 -> NMBE 0; CV(RMSE) = sqrt(20,000 / 1) / 1,000 = 14.14 % (within 15 %)
        assert s.loc["energy_kwh", "nmbe_pct"] == pytest.approx(0.0, abs=1e-12)
        assert s.loc["energy_kwh", "cv_rmse_pct"] == pytest.approx(100.0 * np.sqrt(20000.0) / 1000.0)
        assert bool(s.loc["energy_kwh", "within_criteria"]) and s.loc["energy_kwh", "n_months"] == 2
        assert (s.loc["energy_kwh", "modelled_total"], s.loc["energy_kwh", "billed_total"]) == (2000.0, 2000.0)
        # one month of amount and of peak: too few (n - p = 0), never within
        assert np.isnan(s.loc["amount", "nmbe_pct"]) and not s.loc["amount", "within_criteria"]
        assert list(s.index) == ["energy_kwh", "peak_kw", "amount"]  # in the order of QUANTITIES

    def test_words_say_which_side_and_the_verdict(self):
        # the words give the plain bias of the totals, (94 - 100) / 100 = -6 %: 6.0 % below; the statistics (their
        # (n - 1) form) in brackets
        row = {"quantity": "energy_kwh", "n_months": 12, "nmbe_pct": 6.5, "cv_rmse_pct": 9.0, "within_criteria": False,
               "modelled_total": 94.0, "billed_total": 100.0}
        text = calibration.summary_text(row)
        assert text.startswith("energy: the model reads 6.0 % below the bills over 12 months (NMBE +6.50 %, "
                               "CV(RMSE) 9.00 %)")
        assert "outside the monthly criteria" in text and "meant for a year" not in text

    @pytest.mark.parametrize("reads, nmbe, cv, within", [(110.0, -10.91, 10.44, False), (90.0, 10.91, 10.44, False),
                                                          (95.5, 4.91, 4.70, True)])
    def test_the_bias_limit_holds_on_either_side(self, reads, nmbe, cv, within):
        # hand calculations, docs/calibration.md: twelve months billed 100, the model reading the same in all;
        # |NMBE| <= 5 % and CV(RMSE) <= 15 % (ASHRAE Guideline 14-2014, the limits from memory)
        months = [f"2024-{m:02d}" for m in range(1, 13)]
        modelled = pd.DataFrame({"site_id": "S", "month_of_year": range(1, 13), "energy_kwh": reads, "peak_kw": np.nan,
                                 "reactive_kvarh": np.nan, "amount": np.nan})
        history = pd.DataFrame({"site_id": "S", "month": months, "energy_kwh": 100.0, "peak_kw": np.nan,
                                "reactive_kvarh": np.nan, "amount": np.nan})
        row = calibration.calibration_summary(calibration.compare_with_bills(modelled, history)).set_index("quantity").loc["energy_kwh"]
        assert row["nmbe_pct"] == pytest.approx(nmbe, abs=0.005) and row["cv_rmse_pct"] == pytest.approx(cv, abs=0.005)
        assert bool(row["within_criteria"]) is within

    def test_modelled_months_by_hand(self):
        # a site of two months, hourly: January 2 h at 100 kW and 50 kVAr, February 1 h at 300 kW exporting
        # 20 kVAr and 1 h at -10 kW: January 200 kWh, peak 100 kW, 100 kVArh; February 300 kWh (the export of
        # 10 kW is not import), peak 300 kW, 0 kVArh lagging
        idx = pd.DatetimeIndex(["2025-01-10 00:00", "2025-01-10 01:00", "2025-02-10 00:00", "2025-02-10 01:00"],
                               tz="Europe/Berlin")
        meter = SimpleNamespace(p_kw=np.array([100.0, 100.0, 300.0, -10.0]), q_kvar=np.array([50.0, 50.0, -20.0, 0.0]))
        bills = pd.DataFrame({"site_id": ["S", "S", "S"], "month": ["2025-01", "2025-01", "2025-02"],
                              "amount": [10.0, 5.0, 7.0]})
        m = calibration.modelled_months({"S": meter}, bills, idx, 1.0)
        assert m[["month_of_year", "energy_kwh", "peak_kw", "reactive_kvarh", "amount"]].values.tolist() == [
            [1, 200.0, 100.0, 100.0, 15.0], [2, 300.0, 300.0, 0.0, 7.0]]


def _demo_with_bills(tmp_path, text):
    case = tmp_path / "demo"
    shutil.copytree(REPO / "data" / "demo", case)
    (case / "bill_history.csv").write_text(text, encoding="utf-8")
    return case


class TestCaseTable:
    def test_bad_rows_are_named(self, tmp_path):
        from models.case import load_case

        case = _demo_with_bills(tmp_path, "site_id,month,energy_kwh\nHRW,2024-01,1000\nHRW,2024-1,5\nNOPE,2024-02,5\n"
                                          "HRW,2024-01,7\nKGQ,2024-03,-4\n")
        loaded, problems = load_case(case)
        said = [str(p) for p in problems if p.severity == "error"]
        assert loaded is None
        assert any("bill_history.csv, row 3, column 'month'" in t and "YYYY-MM" in t for t in said), said
        assert any("bill_history.csv, row 4, column 'site_id'" in t and "unknown site_id" in t for t in said), said
        assert any("row 5, column 'month'" in t and "a second bill for site HRW in 2024-01 (first on row 2)" in t
                   for t in said), said
        assert any("row 6, column 'energy_kwh'" in t for t in said), said

    def test_a_date_that_is_no_day_is_refused_and_a_zero_bill_warned(self, tmp_path):
        from models.case import load_case

        case = _demo_with_bills(tmp_path, "site_id,month,energy_kwh\nHRW,2024-03-99,1000\nHRW,2024-04-01,0\n")
        loaded, problems = load_case(case)
        assert loaded is None
        assert any("row 2, column 'month'" in str(p) and p.severity == "error" for p in problems)
        assert not any("row 3, column 'month'" in str(p) for p in problems)  # a real day: its month
        assert any("row 3, column 'energy_kwh'" in str(p) and "0 kWh" in str(p) and p.severity == "warning"
                   for p in problems)

    def test_a_date_within_a_month_is_warned_and_read_as_its_month(self, tmp_path):
        # 2024-01-15 may be the day a December bill was issued: it reads as 2024-01 and says so
        from models.case import load_case

        case = _demo_with_bills(tmp_path, "site_id,month,energy_kwh\nHRW,2024-01-15,1000\nHRW,2024-02-01,900\n")
        loaded, problems = load_case(case)
        assert loaded is not None and loaded.bill_history["month"].tolist() == ["2024-01", "2024-02"]
        said = [p for p in problems if p.column == "month"]
        assert len(said) == 1 and said[0].severity == "warning" and "row 2" in str(said[0])
        assert "read as the billing month 2024-01" in said[0].rule and "the month the bill covers" in said[0].hint

    def test_a_case_without_bills_has_an_empty_history(self, tmp_path):
        import casebuilder as cb
        from models.case import load_case

        case, _ = load_case(cb.write_case(tmp_path / "c"))
        assert case.bill_history.empty

    def test_the_demo_gives_a_year_of_invented_bills_per_site(self):
        from models.case import load_case

        case, _ = load_case(REPO / "data" / "demo")
        assert case.bill_history.groupby("site_id").size().to_dict() == {"HRW": 12, "KGQ": 12}


def test_run_and_bill_commands_compare_the_model_with_the_bills(tmp_path, capsys):
    from drivecase.cli import main

    # three bills of site HRW (energy; two with a total) and one of KGQ, hand-written
    case = _demo_with_bills(tmp_path, "site_id,month,energy_kwh,amount\nHRW,2024-01,1500000,250000\n"
                                      "HRW,2024-02,1400000,240000\nHRW,2024-03,1450000,\nKGQ,2024-07,900000,\n")
    assert main(["run", str(case), "--out", str(tmp_path / "o"), "--no-risk", "--quiet"]) == 0
    out = capsys.readouterr().out
    summary = pd.read_csv(tmp_path / "o" / "calibration.csv")
    months = pd.read_csv(tmp_path / "o" / "calibration_months.csv")
    s = summary.set_index(["site_id", "quantity"])
    # the bills' own sums: 1,500,000 + 1,400,000 + 1,450,000 = 4,350,000 kWh; 250,000 + 240,000 = 490,000
    assert s.loc[("HRW", "energy_kwh"), "billed_total"] == 4350000.0 and s.loc[("HRW", "energy_kwh"), "n_months"] == 3
    assert s.loc[("HRW", "amount"), "billed_total"] == 490000.0 and s.loc[("HRW", "amount"), "n_months"] == 2
    assert s.loc[("KGQ", "energy_kwh"), "n_months"] == 1 and np.isnan(s.loc[("KGQ", "energy_kwh"), "nmbe_pct"])
    assert len(months) == 6 and set(months["month"]) == {"2024-01", "2024-02", "2024-03", "2024-07"}
    # the bias's sign follows the totals: the model below the bills gives a positive NMBE
    e = s.loc[("HRW", "energy_kwh")]
    assert np.sign(e["nmbe_pct"]) == np.sign(e["billed_total"] - e["modelled_total"])
    assert "Site HRW, energy: the model reads" in out and "Site KGQ, energy: 1 month billed, too few" in out
    # the bill command sets the same months side by side
    assert main(["bill", str(case), "--site", "HRW"]) == 0
    out = capsys.readouterr().out
    assert "against the bills the case gives" in out and "2024-03" in out and "energy billed [kWh]" in out
    # a run without bills writes both files with their headers only
    (case / "bill_history.csv").unlink()
    assert main(["run", str(case), "--out", str(tmp_path / "p"), "--no-risk", "--quiet"]) == 0
    assert pd.read_csv(tmp_path / "p" / "calibration.csv").empty
    assert pd.read_csv(tmp_path / "p" / "calibration_months.csv").empty


def test_the_pack_states_the_fit_and_registers_a_model_off_the_bills(demo_run_physics):
    # the demo with a hand-written bill history: site HRW's three energy bills set far below anything the demo's
    # fleet draws (1 kWh a month), so its energy fit is outside the criteria; KGQ has one bill (too few)
    import dataclasses

    from models import scenario
    from models.pack import content

    case, phys = demo_run_physics
    history = pd.DataFrame({"site_id": ["HRW", "HRW", "HRW", "KGQ"], "month": ["2024-01", "2024-02", "2024-03", "2024-07"],
                            "energy_kwh": [1.0, 1.0, 1.0, 900000.0], "peak_kw": [np.nan] * 4,
                            "reactive_kvarh": [np.nan] * 4, "amount": [np.nan] * 4, "notes": [None] * 4})
    with_bills = dataclasses.replace(case, bill_history=history)
    result = scenario.economics(with_bills, phys, case.finance, with_risk=False)
    basis = {item: (value, note) for item, value, note in content.basis_rows(with_bills, result)}
    assert basis["Today's fleet against the bills of site HRW"][0] == "energy: outside the monthly criteria"
    assert basis["Today's fleet against the bills of site KGQ"][0] == "energy: too few months to judge"
    scope = content.select_scope(with_bills, result)
    register = content.risk_register(with_bills, result, scope)
    row = register[register["item"] == "Model off the bills at site HRW"].iloc[0]
    assert row["category"] == "data" and "energy: the model reads" in row["detail"] and "above the bills" in row["detail"]
    assert not (register["item"] == "Model off the bills at site KGQ").any()
    # without bills: no such row
    without = dataclasses.replace(case, bill_history=history.iloc[0:0])
    assert not content.risk_register(without, result, scope)["item"].str.startswith("Model off the bills").any()


def test_a_workbook_case_reads_its_bill_history_sheet_date_cells_too(tmp_path):
    # a workbook's bill_history sheet (the blank template has one): month cells as text or as real date cells
    import datetime as dt

    from openpyxl import load_workbook

    from drivecase.cli import main
    from models.case import load_case

    assert main(["new", str(tmp_path / "wb"), "--workbook"]) == 0
    path = next((tmp_path / "wb").glob("*.xlsx"))
    book = load_workbook(path)
    assert "bill_history" in book.sheetnames
    _, problems = load_case(path)
    assert not any("bill_history" in str(p) and "ignored" in str(p) for p in problems)
    ws = book["bill_history"]
    header_row = next(r for r in range(1, ws.max_row + 1) if ws.cell(r, 1).value == "site_id")
    ws.cell(header_row + 1, 1, "S1"), ws.cell(header_row + 1, 2, dt.datetime(2024, 3, 1))
    ws.cell(header_row + 1, 3, 1000)
    ws.cell(header_row + 2, 1, "S1"), ws.cell(header_row + 2, 2, "2024-04"), ws.cell(header_row + 2, 3, 900)
    from models import io as case_io

    book.save(path)
    table = case_io.read_case_files(path).tables["bill_history"].frame
    months = [str(v)[:7] for v in table["month"]]
    assert months == ["2024-03", "2024-04"]


def test_the_workbook_carries_each_sites_fit(demo_run_physics, tmp_path):
    # the demo's own bill history (invented, data/demo/bill_history.csv): the workbook's Assumptions sheet gives a
    # row per site beside the tariffs, as the report's basis does
    from openpyxl import load_workbook

    from models import scenario
    from models.pack import WORKBOOK_NAME, write_pack

    case, phys = demo_run_physics
    result = scenario.economics(case, phys, case.finance, with_risk=False)
    write_pack(case, result, tmp_path / "pack", assets=["HRW-P01"])
    ws = load_workbook(tmp_path / "pack" / WORKBOOK_NAME)["Assumptions"]
    labels = {str(ws.cell(r, 1).value): str(ws.cell(r, 2).value) for r in range(1, ws.max_row + 1)}
    assert labels["today's fleet against the bills of site HRW"].startswith("energy: within the monthly criteria")
    assert "today's fleet against the bills of site KGQ" in labels


def test_zero_bills_say_why_there_is_no_fit():
    row = {"quantity": "energy_kwh", "n_months": 2, "nmbe_pct": np.nan, "cv_rmse_pct": np.nan,
           "within_criteria": False, "modelled_total": 10.0, "billed_total": 0.0}
    assert calibration.summary_text(row) == "energy: billed as 0 in each of 2 months, nothing to judge the fit by"


def test_a_peak_off_the_bills_at_a_site_of_coarse_profiles_says_why(demo_run_physics):
    # the demo's HRW: hourly profiles against 15-min demand windows (the case check's warning), and invented bills
    # whose peaks are a few % above the hourly model's: the register row gives that reason beside the figures
    from models import scenario
    from models.pack import content

    case, phys = demo_run_physics
    result = scenario.economics(case, phys, case.finance, with_risk=False)
    register = content.risk_register(case, result, content.select_scope(case, result, assets=["HRW-P01"], plan=False))
    row = register[register["item"] == "Model off the bills at site HRW"].iloc[0]
    assert "peak demand: the model reads" in row["detail"]
    assert "the site's profiles are coarser than its demand window" in row["detail"]
    assert not (register["item"] == "Model off the bills at site KGQ").any()  # no KGQ asset in this pack


def test_months_are_the_tariffs_billing_months(tmp_path):
    # hand calculation: a UTC site drawing 100 kW in January and 200 kW the rest of 2025, billed at 0.10 EUR/kWh
    # in billing months from the 15th (docs/tariffs.md, billing_day). Its bill for month 1 (15 January to 14
    # February) is of 17 d x 24 h x 100 kW + 14 d x 24 h x 200 kW = 40 800 + 67 200 = 108 000 kWh, 10 800 EUR; the
    # model's energy of month 1 must be of the same days (the calendar January would give 74 400 kWh)
    import tomllib

    from models.billing import bill
    from models.tariff import tariff_from_dict

    text = ('[tariff]\nname = "t"\ncurrency = "EUR"\ntime_zone = "UTC"\nbilling_day = 15\n[[periods]]\ncode = "all"\n'
            '[energy]\nprice_per_kwh = { all = 0.10 }\n')
    tariff, problems = tariff_from_dict(tomllib.loads(text))
    assert tariff is not None, problems
    idx = pd.date_range("2025-01-01", "2026-01-01", freq="h", tz="UTC", inclusive="left")
    p = np.where(idx.month == 1, 100.0, 200.0)
    bills = bill(tariff, idx, p, np.zeros_like(p)).assign(site_id="S")
    meter = SimpleNamespace(p_kw=p, q_kvar=np.zeros_like(p))
    months = calibration.modelled_months({"S": meter}, bills, idx, 1.0, {"S": 15}).set_index("month_of_year")
    assert months.loc[1, "energy_kwh"] == pytest.approx(108_000.0, abs=1e-6)
    assert months.loc[1, "amount"] == pytest.approx(10_800.0, abs=1e-6)
    assert months["energy_kwh"].sum() == pytest.approx(float(p.sum()), abs=1e-6)
    calendar = calibration.modelled_months({"S": meter}, bills, idx, 1.0).set_index("month_of_year")
    assert calendar.loc[1, "energy_kwh"] == pytest.approx(31 * 24 * 100.0, abs=1e-6)
