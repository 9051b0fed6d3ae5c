"""Bad input in a tariff file: each message names the key, the value as written and the rule broken.

The rules are those of docs/tariffs.md ("[[coincident_peak]]", "Validation"); the calendar facts used (no
29 February in 2025; in Europe/Berlin the clocks go from 02:00 to 03:00 on 30 March 2025, the last Sunday of
March, EU Directive 2000/84/EC) are checked against Python's zoneinfo in the tests themselves.
"""

from __future__ import annotations

import calendar
import datetime as dt
import tomllib
import zoneinfo
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import casebuilder as cb
from models.billing import bill
from models.case import load_case
from models.tariff import tariff_from_dict

HEAD = ('[tariff]\nname = "cp (invented)"\ncurrency = "EUR"\ntime_zone = "Europe/Berlin"\n[[periods]]\ncode = "all"\n'
        '[energy]\nprice_per_kwh = { all = 0.1 }\n')
PEAK = '[[coincident_peak]]\nname = "tx"\nprice_per_kw_month = 5.0\n'


def load(text: str):
    return tariff_from_dict(tomllib.loads(text), source="t.toml")


def at(problems, column: str, severity: str):
    return [p for p in problems if p.column == column and p.severity == severity]


def case_with(tmp_path: Path, times: str):
    """The small case of tests/casebuilder.py (profiles of 2025: the analysis year 2025) with one coincident-peak
    clause of these times."""
    folder = cb.write_case(tmp_path / "c")
    (folder / "tariffs").mkdir()
    (folder / "tariffs" / "t.toml").write_text(HEAD + PEAK + f"times = {times}\n", encoding="utf-8")
    cb.write_csv(folder / "sites.csv", cb.SITES_HEADER + ["tariff_file"], [cb.SITES[0] + ["t.toml"]])
    case, problems = load_case(folder)
    assert case is not None, [str(p) for p in problems if p.severity == "error"]
    return at(problems, "coincident_peak[1].times", "warning")


def test_the_calendar_facts_the_tests_rely_on():
    assert not calendar.isleap(2025)
    berlin = zoneinfo.ZoneInfo("Europe/Berlin")
    gap = dt.datetime(2025, 3, 30, 2, 0, tzinfo=berlin)
    assert gap.astimezone(dt.timezone.utc).astimezone(berlin).replace(tzinfo=None) != gap.replace(tzinfo=None)


class TestPeakTimesThatCannotBePlaced:
    """Rule: a peak time that cannot be placed in the analysis year is left out of the mean, never silently."""

    def test_each_left_out_time_is_warned_with_its_reason(self, tmp_path):
        found = case_with(tmp_path, "[2024-02-29T17:00:00, 2025-03-30T02:00:00, 2025-07-15T17:00:00]")
        assert len(found) == 1, [str(p) for p in found]  # 29 February 2024 is read 52 weeks later: see below
        gap = found[0]
        assert str(gap.value) == "2025-03-30T02:00:00" and "time 2 of 3" in gap.rule
        assert "falls in the hour the clocks skip on 30 March 2025" in gap.rule and "left out of the mean" in gap.rule
        assert "from 02:00 straight to 03:00" in gap.hint
        assert gap.row is not None  # the line of 'times' in the file

    def test_a_time_written_as_text_is_named_as_written(self, tmp_path):
        found = case_with(tmp_path, '["2025-03-30 02:00", "2025-07-15 17:00"]')
        assert [p.value for p in found] == ["2025-03-30 02:00"]

    def test_a_clause_whose_only_time_is_in_the_spring_gap_gets_that_reason(self, tmp_path):
        found = case_with(tmp_path, "[2025-03-30T02:00:00]")
        assert len(found) == 1
        assert "it bills nothing and no motor saves on it" in found[0].rule
        assert "falls in the hour the clocks skip on 30 March 2025" in found[0].rule
        assert str(found[0].value) == "2025-03-30T02:00:00"

    def test_times_that_can_be_placed_are_not_warned(self, tmp_path):
        # 29 February 2024 and 2 January 2019 are read 52 weeks per year later, inside 2025
        assert case_with(tmp_path, "[2025-07-15T17:00:00, 2024-02-29T17:00:00, 2019-01-02T10:00:00]") == []

    def test_the_left_out_times_do_not_change_the_bill(self):
        # docs/tariffs.md: the charge is the mean over the times that fall inside the series; the left-out ones
        # count for nothing, so the bill equals that of the clause with the 15 July time alone
        index = pd.date_range("2025-01-01", "2026-01-01", freq="15min", tz="Europe/Berlin", inclusive="left")
        p = 400.0 + 100.0 * np.sin(np.arange(len(index)) / 97.0)
        q = 0.3 * p
        bills = []
        for times in ("[2025-03-30T02:00:00, 2025-07-15T17:00:00]", "[2025-07-15T17:00:00]"):
            tariff, problems = load(HEAD + PEAK + f"times = {times}\n")
            assert tariff is not None and problems == []
            bills.append(bill(tariff, index, p, q))
        pd.testing.assert_frame_equal(bills[0], bills[1])


class TestPeakTimesOfAnotherYear:
    """Rule (docs/tariffs.md, "[[coincident_peak]]"): a time of another year is read 52 weeks (364 days) per year
    later or earlier, on the same weekday and clock time, as a profile of another year is moved."""

    @staticmethod
    def _weekday_site(index):
        # 300 kW on weekdays 06:00-22:00, 20 kW otherwise (at the site meter, power factor 1)
        local = index.tz_convert("Europe/Berlin")
        working = (local.day_of_week < 5) & (local.hour >= 6) & (local.hour < 22)
        return np.where(working, 300.0, 20.0)

    def test_last_year_s_friday_peaks_are_read_on_this_year_s_fridays(self):
        # the notice of 2024: Friday 19 July 17:00 and Friday 2 August 16:00 (calendar facts checked below). On the
        # same dates of 2025 (Saturdays) the site draws 20 kW; 52 weeks later, Friday 18 July and Friday 1 August
        # 2025, it draws 300 kW. Hand calculation: 300 kW x 5/kW-month = 1,500 a month
        assert dt.date(2024, 7, 19).weekday() == dt.date(2024, 8, 2).weekday() == 4  # Fridays
        assert dt.date(2025, 7, 19).weekday() == dt.date(2025, 8, 2).weekday() == 5  # Saturdays
        assert dt.date(2024, 7, 19) + dt.timedelta(days=364) == dt.date(2025, 7, 18)
        index = pd.date_range("2025-01-01", "2026-01-01", freq="h", tz="Europe/Berlin", inclusive="left")
        p = self._weekday_site(index)
        tariff, problems = load(HEAD + PEAK + "times = [2024-07-19T17:00:00, 2024-08-02T16:00:00]\n")
        assert tariff is not None and problems == []
        b = bill(tariff, index, p, np.zeros(len(index)))
        cp = b[b["line_item"] == "coincident:tx"]
        assert len(cp) == 12
        np.testing.assert_allclose(cp["quantity"].to_numpy(), 300.0, rtol=0, atol=1e-9)
        np.testing.assert_allclose(cp["amount"].to_numpy(), 1_500.0, rtol=0, atol=1e-9)

    def test_one_day_of_two_years_is_two_peak_times(self):
        # 15 July 2024 (a Monday) is read on Monday 14 July 2025, 15 July 2025 on itself: two times, none repeated
        tariff, problems = load(HEAD + PEAK + "times = [2024-07-15T17:00:00, 2025-07-15T17:00:00]\n")
        assert tariff is not None and problems == []
        from models.billing import placed_peak_times

        assert placed_peak_times(tariff.coincident[0], 2025) == ((7, 14, 17, 0), (7, 15, 17, 0))


def test_two_years_read_on_one_day_are_warned(tmp_path):
    # Friday 19 July 2024 17:00 is read 52 weeks later, on Friday 18 July 2025 17:00 (2024-07-19 + 364 days): the
    # same window as the time written for 2025, which would count twice in the mean
    found = case_with(tmp_path, "[2024-07-19T17:00:00, 2025-07-18T17:00:00]")
    assert len(found) == 1 and "times 1 and 2 of 2 are read on the same day and time" in found[0].rule
    assert "18 July 17:00" in found[0].rule
    assert [str(v) for v in found[0].value] == ["2024-07-19T17:00:00", "2025-07-18T17:00:00"]


class TestPeakTimeInTheRepeatedHour:
    """Rule (docs/tariffs.md): a peak time in the hour the clocks repeat (26 October 2025 02:00-03:00 in
    Europe/Berlin, EU Directive 2000/84/EC) is billed on its first occurrence (summer time), warned."""

    # the site draws 100 kW in the first 02:00 hour (CEST, 00:00 UTC), 300 kW in the second (CET, 01:00 UTC),
    # 50 kW otherwise. Hand calculation: the first occurrence bills 100 kW x 5/kW-month = 500 a month
    @pytest.mark.parametrize("freq, window", [("h", 60), ("15min", 60), ("15min", 15), ("15min", 30)])
    def test_the_first_occurrence_is_billed_on_hourly_and_15_min_data(self, freq, window):
        index = pd.date_range("2025-01-01", "2026-01-01", freq=freq, tz="Europe/Berlin", inclusive="left")
        utc = index.tz_convert("UTC")
        p = np.full(len(index), 50.0)
        p[(utc >= pd.Timestamp("2025-10-26 00:00", tz="UTC")) & (utc < pd.Timestamp("2025-10-26 01:00", tz="UTC"))] = 100.0
        p[(utc >= pd.Timestamp("2025-10-26 01:00", tz="UTC")) & (utc < pd.Timestamp("2025-10-26 02:00", tz="UTC"))] = 300.0
        tariff, problems = load(HEAD + PEAK + f"window_min = {window}\ntimes = [2025-10-26T02:00:00]\n")
        assert tariff is not None and problems == []
        b = bill(tariff, index, p, np.zeros(len(index)))
        cp = b[b["line_item"] == "coincident:tx"]
        np.testing.assert_allclose(cp["quantity"].to_numpy(), 100.0, rtol=0, atol=1e-9)

    @pytest.mark.parametrize("year", [2024, 2026, 2027])
    def test_the_same_in_other_years(self, year):
        # the last Sunday of October: 27 October 2024, 25 October 2026, 31 October 2027 (checked by zoneinfo)
        day = max(d for d in range(25, 32) if dt.date(year, 10, d).weekday() == 6)
        berlin = zoneinfo.ZoneInfo("Europe/Berlin")
        assert dt.datetime(year, 10, day, 2, 30, tzinfo=berlin).utcoffset() != dt.datetime(
            year, 10, day, 2, 30, fold=1, tzinfo=berlin).utcoffset()
        index = pd.date_range(f"{year}-01-01", f"{year + 1}-01-01", freq="15min", tz="Europe/Berlin", inclusive="left")
        utc = index.tz_convert("UTC")
        first = pd.Timestamp(f"{year}-10-{day} 00:00", tz="UTC")
        p = np.full(len(index), 50.0)
        p[(utc >= first) & (utc < first + pd.Timedelta(hours=1))] = 100.0
        p[(utc >= first + pd.Timedelta(hours=1)) & (utc < first + pd.Timedelta(hours=2))] = 300.0
        tariff, _ = load(HEAD + PEAK + f"times = [{year}-10-{day}T02:00:00]\n")
        b = bill(tariff, index, p, np.zeros(len(index)))
        np.testing.assert_allclose(b.loc[b["line_item"] == "coincident:tx", "quantity"].to_numpy(), 100.0, rtol=0)

    def test_the_case_check_warns_that_the_time_is_ambiguous(self, tmp_path):
        found = case_with(tmp_path, "[2025-07-15T17:00:00, 2025-10-26T02:00:00]")
        assert len(found) == 1 and str(found[0].value) == "2025-10-26T02:00:00"
        assert "hour repeated when the clocks go back on 26 October 2025" in found[0].rule
        assert "first time the clock shows it (summer time) is billed" in found[0].rule


class TestPeakTimeListedTwice:
    """Rule: each peak time counts once per listing in the mean, so one listed twice is warned, by name."""

    def test_the_time_listed_twice_is_named(self):
        _, problems = load(HEAD + PEAK + 'times = [2025-07-15T17:00:00, 2025-08-05T16:00:00, 2025-07-15T17:00:00]\n')
        found = at(problems, "coincident_peak[1].times", "warning")
        assert len(found) == 1 and str(found[0].value) == "2025-07-15T17:00:00"
        assert "listed twice (times 1 and 3 of 3)" in found[0].rule



def test_every_bad_peak_time_is_reported_with_its_place():
    # Rule: every wrong time is reported, not only the first ("x", a clock time without a date, "y", and a time
    # off the 60-min clock grid)
    tariff, problems = load(HEAD + PEAK + 'times = ["x", 17:20:00, "y", "2025-07-15 17:20", 2025-07-16T17:00:00]\n')
    assert tariff is None
    found = at(problems, "coincident_peak[1].times", "error")
    assert [str(p.value) for p in found] == ["x", "17:20:00", "y", "2025-07-15 17:20"]
    assert [p.rule.split(":")[0] for p in found] == ["time 1 of 5", "time 2 of 5", "time 3 of 5", "time 4 of 5"]
    assert "expected a local date and time" in found[0].rule and "must start a 60-min window" in found[3].rule


class TestDemandContract:
    BASE = {"tariff": {"name": "c", "currency": "EUR"}, "periods": [{"code": "all"}]}

    def test_a_negative_excess_price_is_warned_that_a_higher_peak_lowers_the_bill(self):
        # Rule: allow_negative_prices lets a negative price through, but a negative excess price rewards a higher peak
        tariff, problems = tariff_from_dict(
            {**self.BASE, "tariff": {**self.BASE["tariff"], "allow_negative_prices": True},
             "demand": [{"name": "d", "price_per_kva_month": 10.0, "contracted_kva": 500.0,
                         "excess_price_per_kva_month": -50.0}]}, source="t.toml")
        assert tariff is not None
        found = at(problems, "demand[1].excess_price_per_kva_month", "warning")
        assert len(found) == 1 and found[0].value == -50.0 and "a higher peak would lower it" in found[0].rule
        _, problems = tariff_from_dict(
            {**self.BASE, "demand": [{"name": "d", "price_per_kva_month": 10.0, "contracted_kva": 500.0,
                                      "excess_price_per_kva_month": 50.0}]}, source="t.toml")
        assert not at(problems, "demand[1].excess_price_per_kva_month", "warning")

    @pytest.mark.parametrize("clause, key", [
        ({"demand": [{"name": "d", "price_per_kw_month": -10.0}]}, "demand[1].price_per_kw_month"),
        ({"coincident_peak": [{"name": "cp", "price_per_kw_month": -10.0, "times": ["2025-07-15T17:00:00"]}]},
         "coincident_peak[1].price_per_kw_month"),
    ])
    def test_a_negative_price_on_a_peak_is_warned_that_a_higher_peak_lowers_the_bill(self, clause, key):
        # Rule: allow_negative_prices lets a negative price through; on a peak it rewards a higher peak
        tariff, problems = tariff_from_dict({**self.BASE, "tariff": {**self.BASE["tariff"], "allow_negative_prices": True},
                                             **clause}, source="t.toml")
        assert tariff is not None
        found = at(problems, key, "warning")
        assert len(found) == 1 and found[0].value == -10.0 and "a higher peak would lower the bill" in found[0].rule

    @pytest.mark.parametrize("unit, hint_part, not_in_hint", [
        ("kw", "or bill the demand in kVA", "already carries"),
        ("kva", "a kVA demand already carries the power factor", "bill the demand in kVA"),
    ])
    def test_a_contract_with_a_pf_adjustment_gets_a_hint_that_fits_the_charge(self, unit, hint_part, not_in_hint):
        # Rule: a contracted capacity with a power-factor adjustment is not modelled
        _, problems = tariff_from_dict(
            {**self.BASE, "demand": [{"name": "d", f"price_per_{unit}_month": 10.0, f"contracted_{unit}": 500.0,
                                      "power_factor_adjustment": {"method": "ratio", "target_power_factor": 0.9}}]},
            source="t.toml")
        found = [p for p in at(problems, f"demand[1].contracted_{unit}", "error") if "not modelled" in p.rule]
        assert len(found) == 1 and hint_part in found[0].hint and not_in_hint not in found[0].hint


def test_dates_and_times_in_messages_are_shown_in_iso_form():
    # Rule: a value is shown as the user wrote it: TOML dates and date-times in ISO form, not as Python objects
    text = (HEAD.replace("[[periods]]", '[calendar]\nholidays = [2025-07-15, 2025-07-15T01:00:00]\n[[periods]]')
            + PEAK + "times = [2025-07-15T17:00:00+02:00]\n")
    text = text.replace("price_per_kwh = { all = 0.1 }", "price_per_kwh = { all = 2025-01-01 }")
    _, problems = load(text)
    shown = {p.column: str(p) for p in problems}
    assert "(value: 2025-07-15T17:00:00+02:00)" in shown["coincident_peak[1].times"]
    assert "(value: [2025-07-15, 2025-07-15T01:00:00])" in shown["calendar.holidays"]
    assert "(value: {all = 2025-01-01})" in shown["energy.price_per_kwh"]
    assert not any("datetime." in s for s in shown.values())
    # the value the problem carries (a table or an export shows it as it stands) is the text as written too
    values = {p.column: p.value for p in problems}
    assert str(values["coincident_peak[1].times"]) == "2025-07-15T17:00:00+02:00"
    assert [p.as_dict()["value"] for p in problems if p.column == "coincident_peak[1].times"] == ["2025-07-15T17:00:00+02:00"]


def test_a_workbook_tariff_sheet_s_problem_names_its_row(tmp_path):
    # a tariff sheet's column A holds one line of the file per row: a problem on a key names the row it is on,
    # blank rows counted (as the folder form names the line)
    from openpyxl import load_workbook

    import casebuilder as cb
    from models.case import load_case

    book = cb.write_workbook(tmp_path / "case.xlsx")
    wb = load_workbook(book)
    sheet = wb.create_sheet("tariff flat.toml")
    lines = cb.FLAT_TARIFF.splitlines() + ["", "[[coincident_peak]]", 'name = "cp"', "price_per_kw_month = -5",
                                           "times = [2025-07-15T17:00:00]"]
    for k, line in enumerate(lines, start=1):
        sheet.cell(k, 1, line or None)
    tariff_sheet = "tariff flat.toml"
    rows = lines[:-4]
    wb.save(book)
    case, problems = load_case(book)
    found = [p for p in problems if p.column == "coincident_peak[1].price_per_kw_month" and p.severity == "error"]
    assert found and found[0].file == f"case.xlsx:{tariff_sheet}" and found[0].row == len(rows) + 3  # price line


def test_a_tariff_sheet_named_in_capitals_with_a_cell_of_two_lines_names_the_sheet_and_row(tmp_path):
    # sheets are matched in any capitals; a cell holding two lines of the file shifts no later row
    from openpyxl import load_workbook

    import casebuilder as cb
    from models.case import load_case

    book = cb.write_workbook(tmp_path / "case.xlsx")
    wb = load_workbook(book)
    sheet = wb.create_sheet("Tariff flat.toml")
    lines = cb.FLAT_TARIFF.splitlines()
    lines[1:3] = [lines[1] + "\n" + lines[2]]  # two lines of the file in one cell
    lines += ["[[coincident_peak]]", 'name = "cp"', "price_per_kw_month = -5", "times = [2025-07-15T17:00:00]"]
    for k, line in enumerate(lines, start=1):
        sheet.cell(k, 1, line or None)
    wb.save(book)
    case, problems = load_case(book)
    found = [p for p in problems if p.column == "coincident_peak[1].price_per_kw_month" and p.severity == "error"]
    assert found and found[0].file == "case.xlsx:Tariff flat.toml" and found[0].row == len(lines) - 1  # the price row


@pytest.mark.parametrize("currency, price, warned", [("EUR", 178.0, True), ("EUR", 0.35, False), ("JPY", 31.0, False)])
def test_an_energy_price_the_size_of_one_per_mwh_is_warned(currency, price, warned):
    # 178 EUR per kWh is a wholesale price per MWh written per kWh (hand: 178 per MWh is 0.178 per kWh); in yen a
    # price of 31 per kWh is ordinary and is not warned
    text = HEAD.replace('currency = "EUR"', f'currency = "{currency}"').replace(
        "price_per_kwh = { all = 0.1 }", f"price_per_kwh = {{ all = {price} }}")
    assert f"price_per_kwh = {{ all = {price} }}" in text
    _, problems = load(text)
    found = [p for p in problems if p.column == "energy.price_per_kwh.all" and p.severity == "warning"]
    assert bool(found) == warned
    if warned:
        assert "is it a price per MWh? 178 per MWh is 0.178 per kWh" in found[0].hint


def test_a_price_too_large_for_any_bill_is_refused():
    # 1e300 per kWh overflowed every sum after it (figures of 300 digits and the solver stopping without a plan)
    text = HEAD.replace("price_per_kwh = { all = 0.1 }", "price_per_kwh = { all = 1e300 }")
    tariff, problems = load(text)
    found = [p for p in problems if p.column == "energy.price_per_kwh" and p.severity == "error"]
    assert tariff is None and found and "at most 1e+09 in size" in found[0].rule


@pytest.mark.parametrize("currency, price, warned", [("EUR", 9200.0, True), ("EUR", 14.5, False), ("JPY", 1800.0, False)])
def test_a_demand_price_the_size_of_one_per_mva_or_per_year_is_warned(currency, price, warned):
    # 9,200 EUR per kVA-month is a price per MVA-month or per kVA-year written per kVA-month (hand: 9200 / 1000 =
    # 9.2 per kVA-month; 9200 / 12 = 766.667 per kVA-month); in yen 1,800 per kW-month is ordinary
    text = HEAD.replace('currency = "EUR"', f'currency = "{currency}"') + (
        f'\n[[demand]]\nname = "d"\nprice_per_kva_month = {price}\n')
    _, problems = load(text)
    found = [p for p in problems if p.column == "demand[1].price_per_kva_month" and p.severity == "warning"]
    assert bool(found) == warned, problems
    if warned:
        assert "per MVA-month (9.2 per kVA-month) or per kVA-year (766.667 per kVA-month)" in found[0].hint
