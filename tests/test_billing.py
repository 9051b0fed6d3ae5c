"""Tests for models.billing: hand-calculated bills for each clause, equivalences, invariants, input kinds.

Sources: hand calculations in docs/derivations/billing-energy.md, billing-demand.md, billing-reactive.md,
billing-fixed-taxes.md and billing-equivalences.md (published examples: foretaggroup.com Georgia Power
demand charge, 800 kW at PF 0.80 → 900 kW; a forum worked example, 480 kW at PF 0.82 → 527 kW).
Tolerances: hand calculations are exact to the cent unless a square root is involved; amounts are
compared to 1e-9 (floating-point summation only) unless stated otherwise.
"""

from __future__ import annotations

import tomllib
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose, assert_array_equal

from models.billing import (
    bill,
    bill_many,
    bill_total,
    energy_power_factor_pct,
    excess_kvarh,
    interval_hours,
    pf_adjusted_demand_kw,
    percent_adjusted_demand_kw,
    reactive_demand_kvar,
)
from models.tariff import PowerFactorBand, tariff_from_dict

from test_tariff import TARIFF_E

TARIFF_DIR = Path(__file__).resolve().parents[1] / "data" / "tariffs"
EXACT = dict(rtol=0, atol=1e-9)  # sums of a few products of exact decimals: only float rounding


def load(text: str):
    t, problems = tariff_from_dict(tomllib.loads(text), source="test.toml")
    assert t is not None, [str(p) for p in problems]
    return t


def example(name: str):
    with open(TARIFF_DIR / name, "rb") as f:
        t, problems = tariff_from_dict(tomllib.load(f), source=name)
    assert t is not None, problems
    return t


def amounts(b: pd.DataFrame) -> dict[str, float]:
    return b.groupby("line_item", sort=False)["amount"].sum().to_dict()


def quantity(b: pd.DataFrame, item: str, month: str | None = None) -> float:
    rows = b[(b["line_item"] == item) & ((b["month"] == month) if month else True)]
    assert len(rows) >= 1, f"{item} not in bill"
    return float(rows["quantity"].sum())


HEAD = '[tariff]\nname = "t"\ncurrency = "EUR"\n'
FLAT = HEAD + '[[periods]]\ncode = "all"\n'


# --------------------------------------------------------------------------------------------------
# Energy
# --------------------------------------------------------------------------------------------------


class TestEnergy:
    def test_tou_window_crossing_midnight(self):
        # hand calculation, see docs/derivations/billing-energy.md, case E1
        idx = pd.date_range("2025-01-03 20:00", periods=8, freq="h", tz="Europe/Berlin")
        b = bill(load(TARIFF_E), idx, np.arange(1, 9) * 100.0, np.zeros(8))
        a = amounts(b)
        assert_allclose([a["energy:day-w"], a["energy:night"], a["energy:weekend"]], [60.0, 70.0, 208.0], **EXACT)
        assert_allclose(bill_total(b), 338.0, **EXACT)

    def test_holiday_priced_as_weekend(self):
        # hand calculation, see docs/derivations/billing-energy.md, case E2
        idx = pd.date_range("2025-01-01 22:00", periods=4, freq="h", tz="Europe/Berlin")
        a = amounts(bill(load(TARIFF_E), idx, np.full(4, 100.0), np.zeros(4)))
        assert_allclose([a["energy:weekend"], a["energy:night"]], [16.0, 20.0], **EXACT)

    def test_season_boundary_splits_months(self):
        # hand calculation, see docs/derivations/billing-energy.md, case E3
        idx = pd.date_range("2025-03-31 20:00", periods=12, freq="h", tz="Europe/Berlin")
        b = bill(load(TARIFF_E), idx, np.full(12, 100.0), np.zeros(12))
        by_month = b.groupby("month")["amount"].sum()
        assert list(by_month.index) == ["2025-03", "2025-04"]
        assert_allclose(by_month.to_numpy(), [60.0, 110.0], **EXACT)
        assert_allclose(quantity(b, "energy:day-s", "2025-04"), 200.0, **EXACT)
        # a period with no interval in a month is not listed in that month
        assert b[(b["month"] == "2025-03") & (b["line_item"] == "energy:day-s")].empty

    def test_kvah_energy(self):
        # hand calculation, see docs/derivations/billing-energy.md, case E4
        t = load(FLAT + "[energy]\nprice_per_kvah = { all = 0.10 }")
        idx = pd.date_range("2025-01-06", periods=4, freq="15min", tz="UTC")
        b = bill(t, idx, [300.0, 300.0, 400.0, 0.0], [400.0, -400.0, 300.0, 100.0])
        assert b["unit"].tolist() == ["kVAh"]
        assert_allclose(quantity(b, "energy:all"), 400.0, **EXACT)
        assert_allclose(bill_total(b), 40.0, **EXACT)

    def test_spring_forward_day_has_23_hours(self):
        # hand calculation, see docs/derivations/billing-energy.md, case E5
        idx = pd.date_range("2025-03-30", "2025-03-31", freq="15min", tz="Europe/Berlin", inclusive="left")
        b = bill(load(TARIFF_E), idx, np.full(len(idx), 100.0), np.zeros(len(idx)))
        assert_allclose(quantity(b, "energy:weekend"), 2300.0, **EXACT)
        assert_allclose(bill_total(b), 184.0, **EXACT)

    def test_export_is_not_credited(self):
        # format rule (docs/tariffs.md): only import is billed; 100 kW for 1 h then −100 kW for 1 h = 100 kWh
        t = load(FLAT + "[energy]\nprice_per_kwh = { all = 0.10 }")
        idx = pd.date_range("2025-01-06", periods=2, freq="h", tz="UTC")
        assert_allclose(bill_total(bill(t, idx, [100.0, -100.0], [0.0, 0.0])), 10.0, **EXACT)


# --------------------------------------------------------------------------------------------------
# Demand
# --------------------------------------------------------------------------------------------------

D1_P = [100.0, 300.0, 260.0, 220.0, 400.0, 100.0, 250.0, 150.0]
D1_Q = [0.0, 0.0, 0.0, 0.0, 300.0, 300.0, 0.0, 0.0]
D1_PERIODS = HEAD + """
[[periods]]
code = "peak"
days = ["weekday"]
hours = ["08:00-09:00"]
[[periods]]
code = "off"
days = ["weekday"]
hours = ["09:00-08:00"]
[[periods]]
code = "off"
days = ["saturday", "sunday"]
"""


def d1_index():
    return pd.date_range("2025-01-06 08:00", periods=8, freq="15min", tz="UTC")


class TestDemand:
    @pytest.mark.parametrize(
        "clause, expected_qty, expected_amount",
        [
            # hand calculation, see docs/derivations/billing-demand.md, case D1
            ("price_per_kw_month = 10.0\nwindow_min = 30", 250.0, 2500.0),
            ("price_per_kw_month = 10.0\nwindow_min = 30\nperiods = [\"peak\"]", 240.0, 2400.0),
            ("price_per_kw_month = 10.0\nwindow_min = 15", 400.0, 4000.0),
        ],
    )
    def test_windows_and_periods(self, clause, expected_qty, expected_amount):
        t = load(D1_PERIODS + '[[demand]]\nname = "d"\n' + clause)
        b = bill(t, d1_index(), D1_P, D1_Q)
        assert_allclose(quantity(b, "demand:d"), expected_qty, **EXACT)
        assert_allclose(bill_total(b), expected_amount, **EXACT)

    @pytest.mark.parametrize(
        "clause, expected_qty",
        [
            # hand calculation, see docs/derivations/billing-demand.md, case D1r (rolling windows on D1's data)
            ("window_min = 30", 310.0),
            ("window_min = 30\nperiods = [\"peak\"]", 280.0),
            ("window_min = 60", 295.0),
            ("window_min = 15", 400.0),  # a window no longer than an interval: as block demand
        ],
    )
    def test_rolling_windows(self, clause, expected_qty):
        t = load(D1_PERIODS + '[[demand]]\nname = "d"\nprice_per_kw_month = 10.0\nrolling = true\n' + clause)
        b = bill(t, d1_index(), D1_P, D1_Q)
        assert_allclose(quantity(b, "demand:d"), expected_qty, **EXACT)
        assert_allclose(bill_total(b), 10.0 * expected_qty, **EXACT)

    def test_rolling_kva_demand(self):
        # hand calculation, docs/derivations/billing-demand.md, case D1r: the window ending 09:15 (as D1's block)
        t = load(D1_PERIODS + '[[demand]]\nname = "d"\nprice_per_kva_month = 8.0\nwindow_min = 30\nrolling = true')
        assert_allclose(quantity(bill(t, d1_index(), D1_P, D1_Q), "demand:d"), 390.5125, atol=1e-4)

    def test_rolling_windows_count_in_the_month_of_their_end(self):
        # hand calculation: 15-minute data 31 Jan 23:15 to 1 Feb 00:00 (UTC) of 100, 100, 500, 100 kW; 30-minute
        # rolling windows end at 23:30 (mean 100), 23:45 ((100 + 500) / 2 = 300) and 00:00 ((500 + 100) / 2 = 300),
        # the last in February: January's peak 300, February's 300
        t = load(FLAT + '[[demand]]\nname = "d"\nprice_per_kw_month = 1.0\nwindow_min = 30\nrolling = true')
        idx = pd.date_range("2025-01-31 23:15", periods=4, freq="15min", tz="UTC")
        b = bill(t, idx, [100.0, 100.0, 500.0, 100.0], [0.0] * 4)
        assert_allclose(quantity(b, "demand:d", "2025-01"), 300.0, **EXACT)
        assert_allclose(quantity(b, "demand:d", "2025-02"), 300.0, **EXACT)
        # block windows (23:00, 23:30 and 00:00) read 100, 300 and 100
        block = load(FLAT + '[[demand]]\nname = "d"\nprice_per_kw_month = 1.0\nwindow_min = 30')
        b = bill(block, idx, [100.0, 100.0, 500.0, 100.0], [0.0] * 4)
        assert_allclose(quantity(b, "demand:d", "2025-02"), 100.0, **EXACT)

    def test_kva_demand(self):
        # hand calculation, see docs/derivations/billing-demand.md, case D1: sqrt(152 500) = 390.5125 kVA;
        # the derivation rounds to 4 decimals, hence atol 1e-4 kVA and 1e-3 EUR
        t = load(D1_PERIODS + '[[demand]]\nname = "d"\nprice_per_kva_month = 8.0\nwindow_min = 30')
        b = bill(t, d1_index(), D1_P, D1_Q)
        assert b["unit"].tolist() == ["kVA"]
        assert_allclose(quantity(b, "demand:d"), 390.5125, atol=1e-4)
        assert_allclose(bill_total(b), 3124.10, atol=1e-3)

    def test_pf_adjustment_ratio_800_kw_at_0_80(self):
        # hand calculation, see docs/derivations/billing-demand.md, case D2 (published on foretaggroup.com:
        # 800 kW at PF 0.80 → 900 kW)
        t = load(FLAT + '[[demand]]\nname = "d"\nprice_per_kw_month = 10.0\n'
                 '[demand.power_factor_adjustment]\nmethod = "ratio"\ntarget_power_factor = 0.90')
        idx = pd.date_range("2025-01-06", periods=4, freq="h", tz="UTC")
        a = amounts(bill(t, idx, np.full(4, 800.0), np.full(4, 600.0)))
        assert_allclose([a["demand:d"], a["pf adjustment:d"]], [8000.0, 1000.0], atol=1e-9)

    @pytest.mark.parametrize(
        "round_up, expected_kw",
        [
            (False, 810.937),  # hand calculation, docs/derivations/billing-demand.md, case D3 (3 decimals shown)
            (True, 816.0),  # hand calculation, same case, 2 whole points
        ],
    )
    def test_pf_adjustment_percent_per_point(self, round_up, expected_kw):
        t = load(FLAT + '[[demand]]\nname = "d"\nprice_per_kw_month = 1.0\nwindow_min = 60\n'
                 '[demand.power_factor_adjustment]\nmethod = "percent_per_point"\ntarget_power_factor = 0.95\n'
                 f'percent_per_point = 1.0\nround_points_up = {"true" if round_up else "false"}')
        idx = pd.date_range("2025-01-06", periods=2, freq="h", tz="UTC")
        b = bill(t, idx, [800.0, 800.0], [600.0, 0.0])
        billed = quantity(b, "demand:d") + quantity(b, "pf adjustment:d")
        assert_allclose(billed, expected_kw, atol=5e-4)  # derivation shows 3 decimals

    @pytest.mark.parametrize(
        "source, expected_kw",
        [
            ("peak_window", 900.0),  # hand calculation, docs/derivations/billing-demand.md, case D4
            ("month_average", 906.690),  # same case, 3 decimals shown
        ],
    )
    def test_pf_from_peak_window_or_month_average(self, source, expected_kw):
        t = load(FLAT + '[[demand]]\nname = "d"\nprice_per_kw_month = 1.0\nwindow_min = 60\n'
                 '[demand.power_factor_adjustment]\nmethod = "ratio"\ntarget_power_factor = 0.95\n'
                 f'power_factor_from = "{source}"')
        idx = pd.date_range("2025-01-06", periods=2, freq="h", tz="UTC")
        b = bill(t, idx, [900.0, 800.0], [0.0, 600.0])
        assert_allclose(quantity(b, "demand:d") + quantity(b, "pf adjustment:d"), expected_kw, atol=5e-4)

    def test_ratchet(self):
        # hand calculation, see docs/derivations/billing-demand.md, case D5
        t = load(FLAT + '[[demand]]\nname = "d"\nprice_per_kw_month = 10.0\nwindow_min = 60\nratchet_frac = 0.8\nratchet_months = 2')
        idx = pd.date_range("2025-01-01", "2025-05-01", freq="h", tz="UTC", inclusive="left")
        p = pd.Series(100.0, index=idx)
        for stamp, peak in [("2025-01-15 10:00", 1000.0), ("2025-02-15 10:00", 500.0), ("2025-03-15 10:00", 700.0), ("2025-04-15 10:00", 300.0)]:
            p[pd.Timestamp(stamp, tz="UTC")] = peak
        b = bill(t, idx, p, np.zeros(len(idx)))
        ratchet = b[b["line_item"] == "ratchet:d"].set_index("month")
        assert_allclose(ratchet["quantity"].to_numpy(), [0.0, 300.0, 100.0, 260.0], **EXACT)
        assert_allclose(ratchet["amount"].to_numpy(), [0.0, 3000.0, 1000.0, 2600.0], **EXACT)
        assert list(ratchet.index) == ["2025-01", "2025-02", "2025-03", "2025-04"]

    @pytest.mark.parametrize("clause, expected_excess, expected_total", [
        # hand calculation, see docs/derivations/billing-demand.md, case D9: contract 500 kW at 10, peaks 400 and
        # 650 kW; the excess at 20 (given) or at the demand price (left out)
        ("contracted_kw = 500\nexcess_price_per_kw_month = 20.0", [0.0, 150.0], 13_000.0),
        ("contracted_kw = 500", [0.0, 150.0], 11_500.0),
    ])
    def test_contracted_capacity_and_the_demand_above_it(self, clause, expected_excess, expected_total):
        t = load(FLAT + '[[demand]]\nname = "d"\nprice_per_kw_month = 10.0\nwindow_min = 60\n' + clause)
        idx = pd.date_range("2025-01-01", "2025-03-01", freq="h", tz="UTC", inclusive="left")
        p = np.where(idx.month == 1, 300.0, 200.0)
        p[idx.get_loc(pd.Timestamp("2025-01-20 09:00", tz="UTC"))] = 400.0
        p[idx.get_loc(pd.Timestamp("2025-02-11 14:00", tz="UTC"))] = 650.0
        b = bill(t, idx, p, np.zeros(len(idx)))
        assert_allclose(b[b["line_item"] == "demand:d"]["quantity"].to_numpy(), [500.0, 500.0], **EXACT)
        assert_allclose(b[b["line_item"] == "excess:d"]["quantity"].to_numpy(), expected_excess, **EXACT)
        assert_allclose(bill_total(b), expected_total, **EXACT)
        assert set(b["line_item"]) == {"demand:d", "excess:d"}

    def test_a_contract_in_kva_bills_the_apparent_power_above_it(self):
        # case D9, kVA: 400 kW at 300 kVAr is 500 kVA (3-4-5), 40 kVA above a 460 kVA contract, at 15
        t = load(FLAT + '[[demand]]\nname = "d"\nprice_per_kva_month = 10.0\nwindow_min = 60\n'
                 'contracted_kva = 460\nexcess_price_per_kva_month = 15.0')
        idx = pd.date_range("2025-01-06", periods=2, freq="h", tz="UTC")
        b = bill(t, idx, [400.0, 100.0], [300.0, 0.0])
        assert_allclose(quantity(b, "excess:d"), 40.0, atol=1e-9)
        assert_allclose(bill_total(b), 4_600.0 + 600.0, atol=1e-9)

    @pytest.mark.parametrize("freq, steps_per_h", [("h", 1), ("15min", 4)])
    def test_coincident_peak_bills_the_demand_at_the_systems_peak_times(self, freq, steps_per_h):
        # hand calculation, see docs/derivations/billing-demand.md, case D10: 300 kW all year but 500 kW in the
        # hour from 15 July 17:00 and 400 kW from 5 August 16:00; the site's own peak (800 kW on 1 March) is not
        # at a system peak. Coincident demand (500 + 400) / 2 = 450 kW x 5 x 12 months = 27 000
        t = load(FLAT + '[[coincident_peak]]\nname = "transmission"\nprice_per_kw_month = 5.0\n'
                 'times = [2025-07-15T17:00:00, "2025-08-05 16:00"]\n')
        idx = pd.date_range("2025-01-01", "2026-01-01", freq=freq, tz="UTC", inclusive="left")
        p = pd.Series(300.0, index=idx)
        p[pd.Timestamp("2025-07-15 17:00", tz="UTC"):pd.Timestamp("2025-07-15 17:59", tz="UTC")] = 500.0
        p[pd.Timestamp("2025-08-05 16:00", tz="UTC"):pd.Timestamp("2025-08-05 16:59", tz="UTC")] = 400.0
        p[pd.Timestamp("2025-03-01 10:00", tz="UTC")] = 800.0
        b = bill(t, idx, p.to_numpy(), np.zeros(len(idx)))
        assert set(b["line_item"]) == {"coincident:transmission"}
        assert_allclose(b["quantity"].to_numpy(), np.full(12, 450.0), **EXACT)
        assert_allclose(bill_total(b), 27_000.0, **EXACT)
        assert len(p[pd.Timestamp("2025-07-15 17:00", tz="UTC"):pd.Timestamp("2025-07-15 17:59", tz="UTC")]) == steps_per_h

    def test_a_peak_window_takes_the_mean_of_its_intervals_and_the_hour_that_holds_it(self):
        # hand calculation, see docs/derivations/billing-demand.md, case D10, "More windows": 15-min data 400, 600,
        # 500, 500 kW in the hour from 15 July 17:00 -> (400 + 600 + 500 + 500) / 4 = 500 kW; a window in which the
        # site exports (-100 kW) counts 0, so (500 + 0) / 2 = 250; on hourly data, a 15-min window at 17:15 takes
        # the 17:00 hour that holds it (its 400 kW)
        text = FLAT + '[[coincident_peak]]\nname = "c"\nprice_per_kw_month = 1.0\n'
        quarter = pd.date_range("2025-07-01", "2025-08-01", freq="15min", tz="UTC", inclusive="left")
        p = pd.Series(100.0, index=quarter)
        p[pd.Timestamp("2025-07-15 17:00", tz="UTC"):pd.Timestamp("2025-07-15 17:59", tz="UTC")] = [400.0, 600.0, 500.0, 500.0]
        p[pd.Timestamp("2025-07-20 12:00", tz="UTC"):pd.Timestamp("2025-07-20 12:59", tz="UTC")] = -100.0
        one = load(text + 'times = [2025-07-15T17:00:00]\n')
        assert_allclose(quantity(bill(one, quarter, p.to_numpy(), np.zeros(len(quarter))), "coincident:c"), 500.0, **EXACT)
        two = load(text + 'times = [2025-07-15T17:00:00, 2025-07-20T12:00:00]\n')
        assert_allclose(quantity(bill(two, quarter, p.to_numpy(), np.zeros(len(quarter))), "coincident:c"), 250.0, **EXACT)
        hourly = pd.date_range("2025-07-01", "2025-08-01", freq="h", tz="UTC", inclusive="left")
        h = np.where(hourly == pd.Timestamp("2025-07-15 17:00", tz="UTC"), 400.0, 100.0)
        off_grid = load(text + 'window_min = 15\ntimes = [2025-07-15T17:15:00]\n')
        assert_allclose(quantity(bill(off_grid, hourly, h, np.zeros(len(hourly))), "coincident:c"), 400.0, **EXACT)

    def test_a_date_is_counted_once_in_a_series_that_crosses_a_year_end(self):
        # hand calculation, see docs/derivations/billing-demand.md, case D10, "A series across a year end":
        # December 2024 to December 2025 holds 10 December 12:00 twice; the first (1 000 kW) counts, once, and is
        # billed in each of the 13 months (counted twice it would be (1 000 + 100) / 2 = 550)
        text = FLAT + '[[coincident_peak]]\nname = "c"\nprice_per_kw_month = 1.0\ntimes = [2025-12-10T12:00:00]\n'
        idx = pd.date_range("2024-12-01", "2025-12-31", freq="h", tz="UTC", inclusive="left")
        p = np.full(len(idx), 100.0)
        p[idx.get_loc(pd.Timestamp("2024-12-10 12:00", tz="UTC"))] = 1000.0
        b = bill(load(text), idx, p, np.zeros(len(idx)))
        assert list(b["month"]) == ["2024-12"] + [f"2025-{m:02d}" for m in range(1, 13)]
        assert_allclose(b["quantity"].to_numpy(), np.full(13, 1000.0), **EXACT)

    @pytest.mark.parametrize("clause, item", [
        # hand calculation, see docs/derivations/billing-demand.md, case D9, "In a season, with a tax": May bills no
        # contract (out of season); June 500 x 10 + (700 - 500) x 20 = 9 000, and a 10 % tax on it 900
        ('[[demand]]\nname = "d"\nprice_per_kw_month = 10.0\nwindow_min = 60\ncontracted_kw = 500\n'
         'excess_price_per_kw_month = 20.0\nseasons = ["s"]\n', "excess:d"),
        # hand calculation, see docs/derivations/billing-demand.md, case D10, "With a tax": the clause has no
        # seasons; 700 kW at the June time x 10 in both months = 14 000, and a 10 % tax on it 1 400
        ('[[coincident_peak]]\nname = "d"\nprice_per_kw_month = 10.0\ntimes = [2025-06-11T14:00:00]\n', "coincident:d"),
    ])
    def test_a_tax_on_demand_charges_holds_the_excess_in_its_season_and_the_coincident_charge(self, clause, item):
        # the tax line's quantity is its base; amount = quantity x rate (docs/tariffs.md, "How the bill is computed")
        head = HEAD + '[[seasons]]\nname = "w"\nmonths = [1,2,3,4,5,10,11,12]\n[[seasons]]\nname = "s"\nmonths = [6,7,8,9]\n'
        t = load(head + '[[periods]]\ncode = "all"\n' + clause + '[[taxes]]\nname = "t"\nrate_pct = 10\nbase = "demand_charges"\n')
        idx = pd.date_range("2025-05-01", "2025-07-01", freq="h", tz="UTC", inclusive="left")
        p = np.full(len(idx), 300.0)
        p[idx.get_loc(pd.Timestamp("2025-06-11 14:00", tz="UTC"))] = 700.0
        b = bill(t, idx, p, np.zeros(len(idx)))
        if item == "excess:d":
            assert set(b.loc[b["month"] == "2025-05", "line_item"]) <= {"tax:t"}
            assert_allclose(b.loc[b["month"] == "2025-05", "amount"].sum(), 0.0, **EXACT)
            assert_allclose(quantity(b, "excess:d", "2025-06"), 200.0, **EXACT)
            assert_allclose(quantity(b, "tax:t"), 9_000.0, **EXACT)
            assert_allclose(amounts(b)["tax:t"], 900.0, **EXACT)
        else:
            assert_allclose(b.loc[b["line_item"] == "coincident:d", "quantity"].to_numpy(), [700.0, 700.0], **EXACT)
            assert_allclose(quantity(b, "tax:t"), 14_000.0, **EXACT)
            assert_allclose(amounts(b)["tax:t"], 1_400.0, **EXACT)

    def test_a_peak_time_outside_the_series_is_left_out(self):
        # only July's time falls in a series of June to August 2025; 29 February 2024 is read 52 weeks later, on
        # 27 February 2025, outside it, as 1 December is (docs/derivations/billing-demand.md, case D10)
        t = load(FLAT + '[[coincident_peak]]\nname = "c"\nprice_per_kw_month = 1.0\n'
                 'times = [2024-02-29T12:00:00, 2025-07-15T17:00:00, 2025-12-01T17:00:00]\n')
        idx = pd.date_range("2025-06-01", "2025-09-01", freq="h", tz="UTC", inclusive="left")
        p = np.where(idx == pd.Timestamp("2025-07-15 17:00", tz="UTC"), 250.0, 100.0)
        b = bill(t, idx, p, np.zeros(len(idx)))
        assert_allclose(b["quantity"].to_numpy(), [250.0, 250.0, 250.0], **EXACT)

    @pytest.mark.parametrize("repeat_year, expected_jan_kw", [(False, 100.0), (True, 800.0)])
    def test_ratchet_of_a_repeated_year(self, repeat_year, expected_jan_kw):
        # hand calculation, see docs/derivations/billing-demand.md, case D6
        t = load(FLAT + '[[demand]]\nname = "d"\nprice_per_kw_month = 1.0\nwindow_min = 60\nratchet_frac = 0.8\nratchet_months = 11')
        idx = pd.date_range("2025-01-01", "2026-01-01", freq="h", tz="UTC", inclusive="left")
        p = np.full(len(idx), 100.0)
        p[idx.get_loc(pd.Timestamp("2025-12-10 12:00", tz="UTC"))] = 1000.0
        b = bill(t, idx, p, np.zeros(len(idx)), repeat_year=repeat_year)
        jan = b[b["month"] == "2025-01"]
        assert_allclose(jan["quantity"].sum(), expected_jan_kw, **EXACT)

    def test_repeat_year_needs_twelve_months(self):
        t = load(FLAT + '[[demand]]\nname = "d"\nprice_per_kw_month = 1.0\nratchet_frac = 0.8\nratchet_months = 11')
        idx = pd.date_range("2025-01-01", periods=48, freq="h", tz="UTC")
        with pytest.raises(ValueError, match="12 billing months"):
            bill(t, idx, np.ones(48), np.zeros(48), repeat_year=True)

    def test_seasonal_demand_charge_only_in_its_months(self):
        t = load(
            HEAD
            + '[[seasons]]\nname = "w"\nmonths = [1,2,3,10,11,12]\n[[seasons]]\nname = "s"\nmonths = [4,5,6,7,8,9]\n'
            + '[[periods]]\ncode = "all"\n[[demand]]\nname = "d"\nprice_per_kw_month = 1.0\nseasons = ["s"]'
        )
        idx = pd.date_range("2025-03-31 23:00", periods=2, freq="h", tz="UTC")
        b = bill(t, idx, [500.0, 100.0], [0.0, 0.0])
        # March is outside the season: no line; April's only interval is 100 kW
        assert b["month"].tolist() == ["2025-04"]
        assert_allclose(quantity(b, "demand:d"), 100.0, **EXACT)


class TestDemandEquations:
    def test_480_kw_at_0_82(self):
        # hand calculation: 480 kW at PF 0.82 with 0.90/PF → 526.8 kW (billing-equivalences.md: 526.83)
        assert_allclose(pf_adjusted_demand_kw(480.0, 0.82, 0.90), 526.83, atol=5e-3)

    def test_800_kw_at_0_80(self):
        # published (foretaggroup.com, Georgia Power demand charge): 800 kW at PF 0.80 → 900 kW
        assert_allclose(pf_adjusted_demand_kw(800.0, 0.80, 0.90), 900.0, rtol=1e-12)

    def test_no_adjustment_at_or_above_target(self):
        # hand calculation, billing-equivalences.md: 500 kW at PF 0.95 → 500 kW
        assert_allclose(pf_adjusted_demand_kw(np.array([500.0, 500.0]), np.array([0.95, 0.90]), 0.90), [500.0, 500.0], rtol=1e-12)

    def test_percent_per_point(self):
        # hand calculation, billing-equivalences.md: 1 000 kW at PF 0.905, 1 %/point below 0.95 → 1 045 / 1 050 kW
        assert_allclose(percent_adjusted_demand_kw(1000.0, 0.905, 0.95, 1.0), 1045.0, atol=1e-9)
        assert_allclose(percent_adjusted_demand_kw(1000.0, 0.905, 0.95, 1.0, round_points_up=True), 1050.0, atol=1e-9)

    def test_excess_kvarh(self):
        # hand calculation, billing-reactive.md, R1 (month): 160 − 0.33 × 400 = 28
        assert_allclose(excess_kvarh(160.0, 400.0, 0.33), 28.0, atol=1e-12)
        assert_allclose(excess_kvarh(100.0, 400.0, 0.33), 0.0, atol=0)


# --------------------------------------------------------------------------------------------------
# Reactive and leading
# --------------------------------------------------------------------------------------------------

AB_PERIODS = HEAD + '[[periods]]\ncode = "A"\nhours = ["00:00-12:00"]\n[[periods]]\ncode = "B"\nhours = ["12:00-24:00"]\n'


def r_index():
    return pd.date_range("2025-01-06 10:00", periods=4, freq="h", tz="UTC")


class TestReactive:
    @pytest.mark.parametrize(
        "scope, expected_kvarh",
        [("month", 28.0), ("interval", 84.0), ("period", 34.0)],  # hand calculation, billing-reactive.md, case R1
    )
    def test_allowance_netting(self, scope, expected_kvarh):
        t = load(AB_PERIODS + f'[[reactive]]\nname = "r"\nprice_per_kvarh = 0.01\nfree_kvarh_per_kwh = 0.33\nallowance_per = "{scope}"')
        b = bill(t, r_index(), np.full(4, 100.0), [0.0, 100.0, 50.0, 10.0])
        assert_allclose(quantity(b, "reactive:r"), expected_kvarh, atol=1e-9)
        assert_allclose(bill_total(b), expected_kvarh * 0.01, atol=1e-12)

    def test_allowance_as_power_factor(self):
        # hand calculation, billing-reactive.md, case R1: free_power_factor 0.9496 → 27.96 kVArh (2 decimals shown)
        t = load(AB_PERIODS + '[[reactive]]\nname = "r"\nprice_per_kvarh = 0.01\nfree_power_factor = 0.9496')
        b = bill(t, r_index(), np.full(4, 100.0), [0.0, 100.0, 50.0, 10.0])
        assert_allclose(quantity(b, "reactive:r"), 27.96, atol=5e-3)

    def test_leading_does_not_offset_lagging(self):
        # hand calculation, billing-reactive.md, case R2
        t = load(AB_PERIODS + '[[reactive]]\nname = "r"\nprice_per_kvarh = 0.01\nfree_kvarh_per_kwh = 0.33')
        b = bill(t, r_index(), np.full(4, 100.0), [0.0, 100.0, 50.0, -40.0])
        assert_allclose(quantity(b, "reactive:r"), 18.0, atol=1e-9)
        assert_allclose(bill_total(b), 0.18, atol=1e-12)

    def test_leading_charge_and_ban_in_one_period(self):
        # hand calculation, billing-reactive.md, case R3
        t = load(
            AB_PERIODS
            + '[[reactive]]\nname = "r"\nprice_per_kvarh = 0.01\nfree_kvarh_per_kwh = 0.33\n'
            + '[[leading]]\nname = "night"\nprice_per_kvarh = 0.02\nbanned = true\nperiods = ["B"]'
        )
        b = bill(t, r_index(), np.full(4, 100.0), [-30.0, 100.0, -50.0, -40.0])
        row = b[b["line_item"] == "leading:night"].iloc[0]
        assert_allclose([row["quantity"], row["amount"]], [90.0, 1.80], atol=1e-9)
        assert bool(row["flag"]) and row["unit"] == "kVArh"
        assert_allclose(quantity(b, "reactive:r"), 0.0, atol=0)
        assert not b.loc[b["line_item"] != "leading:night", "flag"].any()

    def test_ban_not_flagged_without_leading(self):
        t = load(AB_PERIODS + '[[leading]]\nname = "n"\nbanned = true\nperiods = ["B"]')
        b = bill(t, r_index(), np.full(4, 100.0), [-30.0, 10.0, 10.0, 10.0])  # leading only in period A
        assert not b["flag"].any()

    def test_example_c_flags_leading_at_night(self):
        t = example("example_pf_adjusted_demand.toml")
        idx = pd.date_range("2025-01-07 20:00", periods=4, freq="h", tz="America/Chicago")  # Tuesday, night from 21:00
        b = bill(t, idx, np.full(4, 500.0), [-100.0, -100.0, 50.0, 50.0])
        row = b[b["line_item"] == "leading:night leading kVArh"].iloc[0]
        # hand count: only the 21:00 interval is leading and at night: 100 kVArh × 0.02 USD
        assert_allclose([row["quantity"], row["amount"]], [100.0, 2.0], atol=1e-9)
        assert bool(row["flag"])


class TestReactiveDemandAndEnergyPowerFactor:
    """kVAr demand above a share of the kW demand, and a percentage of the energy charges by power-factor bands.

    Source: hand calculations in docs/derivations/billing-reactive.md, cases R6 and R7."""

    USD = '[tariff]\nname = "t"\ncurrency = "USD"\ntime_zone = "UTC"\n[[periods]]\ncode = "all"\n[energy]\nprice_per_kwh = { all = 0.10 }\n'
    KVAR = '[[reactive_demand]]\nname = "kvar"\nprice_per_kvar_month = 0.50\nfree_kvar_per_kw = 0.62\nwindow_min = 60\n'
    PF = ('[[energy_power_factor]]\nname = "pf"\n'
          'penalty = [{ below = 0.95, percent_per_point = 0.5 }, { below = 0.90, percent_per_point = 1.0 }]\n'
          'rebate = [{ above = 0.95, percent_per_point = 0.5 }]\n')

    @staticmethod
    def month():
        """January 2025, hourly: 1,000 kW and 700 kVAr, the sixth hour 900 kVAr (cases R6, R7)."""
        idx = pd.date_range("2025-01-01", periods=744, freq="h", tz="UTC")
        q = np.full(744, 700.0)
        q[5] = 900.0
        return idx, np.full(744, 1000.0), q

    def test_kvar_demand_above_the_kw_share(self):
        idx, p, q = self.month()
        b = bill(load(self.USD + self.KVAR), idx, p, q)
        row = b[b["line_item"] == "reactive demand:kvar"].iloc[0]
        # hand calculation, billing-reactive.md, case R6: max(900 − 0.62 × 1,000, 0) = 280 kVAr × 0.50 = 140.00
        assert_allclose([row["quantity"], row["amount"]], [280.0, 140.0], **EXACT)
        assert row["unit"] == "kVAr"

    def test_kvar_demand_maxima_are_each_the_months_own(self):
        idx, p, q = self.month()
        p = p.copy()
        p[99] = 1200.0  # the kW peak in hour 100, the kVAr peak in hour 6
        b = bill(load(self.USD + self.KVAR), idx, p, q)
        # hand calculation (case R6's rule): 900 − 0.62 × 1,200 = 156 kVAr
        assert_allclose(quantity(b, "reactive demand:kvar"), 156.0, **EXACT)

    def test_kvar_demand_of_leading_windows_and_a_bank(self):
        idx, p, _ = self.month()
        t = load(self.USD + self.KVAR)
        # case R6: every hour leading bills nothing; a 300 kVAr bank (600 kVAr at most) bills max(600 − 620, 0) = 0
        assert_allclose(quantity(bill(t, idx, p, np.full(744, -200.0)), "reactive demand:kvar"), 0.0, atol=0)
        _, _, q = self.month()
        assert_allclose(quantity(bill(t, idx, p, q - 300.0), "reactive demand:kvar"), 0.0, atol=0)

    def test_kvar_demand_of_a_power_factor_allowance_and_on_15_minute_windows(self):
        idx = pd.date_range("2025-01-01", periods=8, freq="15min", tz="UTC")
        p = np.full(8, 100.0)
        q = np.array([10.0, 90.0, 30.0, 30.0, 40.0, 40.0, 40.0, 40.0])
        t60 = load(self.USD + '[[reactive_demand]]\nname = "q"\nprice_per_kvar_month = 1\nfree_power_factor = 0.96\nwindow_min = 60\n')
        t15 = load(self.USD + '[[reactive_demand]]\nname = "q"\nprice_per_kvar_month = 1\nfree_kvar_per_kw = 0\n'
                              'window_min = 15\n')
        # hand calculation: hourly means 40 and 40 kVAr; free tan(acos 0.96) × 100 = 29.1667 kVAr → 10.8333
        assert_allclose(quantity(bill(t60, idx, p, q), "reactive demand:q"), 40.0 - 100.0 * 0.28 / 0.96, rtol=1e-12)
        # no allowance, 15-min windows: the highest interval, 90 kVAr
        assert_allclose(quantity(bill(t15, idx, p, q), "reactive demand:q"), 90.0, **EXACT)

    @pytest.mark.parametrize("pf, expected_pct", [(0.87, 5.5), (0.93, 1.0), (0.95, 0.0), (0.98, -1.5), (0.90, 2.5),
                                                  (1.0, -2.5), (0.0, 92.5)])
    def test_power_factor_bands(self, pf, expected_pct):
        # hand calculation, billing-reactive.md, case R7 (0.90: 5 points x 0.5 %; 1.0: 5 points of rebate x 0.5 %;
        # 0.0: 2.5 % + 90 points x 1 %)
        pen, reb = (PowerFactorBand(0.95, 0.5), PowerFactorBand(0.90, 1.0)), (PowerFactorBand(0.95, 0.5),)
        assert_allclose(energy_power_factor_pct(pf, pen, reb), expected_pct, atol=1e-9)

    @pytest.mark.parametrize("rounding, expected_pct", [("none", 0.75), ("down", 0.5), ("up", 1.0)])
    def test_power_factor_points_rounded(self, rounding, expected_pct):
        # hand calculation, case R7: 0.935 is 1.5 points below 0.95 at 0.5 % each
        pen = (PowerFactorBand(0.95, 0.5), PowerFactorBand(0.90, 1.0))
        assert_allclose(energy_power_factor_pct(0.935, pen, (), rounding), expected_pct, atol=1e-9)
        # a whole number of points is not rounded away by the floating point of 0.95 − 0.93
        assert_allclose(energy_power_factor_pct(0.93, pen, (), rounding), 1.0, atol=1e-9)

    def test_percentage_of_the_months_energy_charges(self):
        idx, p, q = self.month()
        b = bill(load(self.USD + self.PF), idx, p, q)
        row = b[b["line_item"] == "pf energy:pf"].iloc[0]
        # hand calculation, billing-reactive.md, case R7: PF 0.819128, 10.5872 % of 74,400.00 = 7,876.84
        assert_allclose(row["amount"], 7876.84, atol=0.005)
        assert_allclose(quantity(b, "energy:all"), 744000.0, **EXACT)

    def test_rebate_and_leading_kvarh_counted_when_asked(self):
        idx = pd.date_range("2025-01-01", periods=2, freq="h", tz="UTC")
        p, q = np.array([100.0, 100.0]), np.array([-20.0, 0.0])
        reb = '[[energy_power_factor]]\nname = "pf"\nrebate = [{ above = 0.95, percent_per_point = 1.0 }]\n'
        # hand calculation: kWh 200, energy 20.00 USD. Leading not counted: PF 1.0, 5 points of rebate = −1.00.
        b = bill(load(self.USD + reb), idx, p, q)
        assert_allclose(amounts(b)["pf energy:pf"], -1.0, atol=1e-12)
        # counted: kVArh 20, PF = 200 / sqrt(200² + 20²) = 200 / 200.99751 = 0.9950372, 4.50372 points x 1 %
        # of 20.00 → −0.900744
        b = bill(load(self.USD + reb + "count_leading = true\n"), idx, p, q)
        assert_allclose(amounts(b)["pf energy:pf"], -0.900744, atol=1e-6)

    def test_taxes_take_the_new_lines_in_their_bases(self):
        idx, p, q = self.month()
        taxes = ('[[taxes]]\nname = "on energy"\nrate_pct = 10\nbase = "energy_charges"\n'
                 '[[taxes]]\nname = "on demand"\nrate_pct = 10\nbase = "demand_charges"\n')
        b = bill(load(self.USD + self.KVAR + self.PF + taxes), idx, p, q)
        a = amounts(b)
        # documented bases (docs/tariffs.md): pf energy with the energy charges, reactive demand with the demand's
        assert_allclose(a["tax:on energy"], 0.1 * (a["energy:all"] + a["pf energy:pf"]), rtol=1e-12)
        assert_allclose(a["tax:on demand"], 0.1 * 140.0, rtol=1e-12)

    def test_kvar_demand_reads_lagging_kvar_only(self):
        # a lagging kVAr register: quarter-hours of +400 and -400 kVAr in one 60-min window read (400 + 0 + 400 + 0)
        # / 4 = 200 kVAr (hand calculation), not the net 0
        idx = pd.date_range("2025-01-01", periods=4, freq="15min", tz="UTC")
        t = load(self.USD + '[[reactive_demand]]\nname = "q"\nprice_per_kvar_month = 1\nfree_kvar_per_kw = 0\n'
                            'window_min = 60\n')
        b = bill(t, idx, np.full(4, 1000.0), np.array([400.0, -400.0, 400.0, -400.0]))
        assert_allclose(quantity(b, "reactive demand:q"), 200.0, **EXACT)

    def test_no_rebate_for_a_leading_month_when_the_clause_says_so(self):
        # DOMAIN's clause with no incentive for a leading power factor: a month leading by 100 kVAr at 200 kW
        # (lagging kVArh 0) reads PF 1.0 from its lagging kVArh, 5 points above 0.95; with the rebate 0.5 % a point
        # that is -2.5 % of 20.00 = -0.50, and nothing once a leading month earns no rebate (hand calculation)
        idx = pd.date_range("2025-01-01", periods=2, freq="h", tz="UTC")
        p, q = np.array([100.0, 100.0]), np.array([-100.0, -100.0])
        clause = self.PF
        assert_allclose(amounts(bill(load(self.USD + clause), idx, p, q))["pf energy:pf"], -0.5, atol=1e-12)
        b = bill(load(self.USD + clause + "rebate_when_leading = false\n"), idx, p, q)
        assert_allclose(amounts(b)["pf energy:pf"], 0.0, atol=0)
        # leading counted as lagging (a penalty on lead as well as lag) and no rebate: PF 200 / sqrt(200² + 200²)
        # = 0.707107, penalty 5 x 0.5 + 19.2893 x 1 = 21.7893 % of 20.00 = 4.357864
        b = bill(load(self.USD + clause + "rebate_when_leading = false\ncount_leading = true\n"), idx, p, q)
        assert_allclose(amounts(b)["pf energy:pf"], 4.357864, atol=1e-6)

    def test_a_percentage_of_every_charge_before_taxes(self):
        # base = "all_charges": the month's energy (74,400.00), kVAr demand (140.00) and a fixed charge (60.00) before
        # taxes, 74,600.00 x 10.58715 % = 7,898.02 (case R7's percentage to one more digit: 2.5 + (0.90 - 0.8191285) /
        # 0.01, hand calculation); the tax on all charges takes the adjustment in its base
        idx, p, q = self.month()
        text = (self.USD + '[[fixed]]\nname = "meter"\ncharge_per_month = 60\n' + self.KVAR + self.PF
                + 'base = "all_charges"\n[[taxes]]\nname = "vat"\nrate_pct = 10\n')
        a = amounts(bill(load(text), idx, p, q))
        assert_allclose(a["pf energy:pf"], 7_898.02, atol=0.01)
        assert_allclose(a["tax:vat"], 0.1 * (74_400.0 + 140.0 + 60.0 + a["pf energy:pf"]), rtol=1e-12)

    def test_equations_on_their_own(self):
        # case R6's figures; a negative kVAr demand counts as none
        assert reactive_demand_kvar(900.0, 1000.0, 0.62) == pytest.approx(280.0, abs=1e-9)
        assert reactive_demand_kvar(-50.0, 1000.0, 0.0) == 0.0
        assert_allclose(reactive_demand_kvar([700.0, 500.0], [1000.0, 1000.0], 0.62), [80.0, 0.0], atol=1e-9)


# --------------------------------------------------------------------------------------------------
# Fixed charges and taxes
# --------------------------------------------------------------------------------------------------


class TestFixedAndTaxes:
    TEXT = FLAT + (
        '[energy]\nprice_per_kwh = { all = 0.10 }\n[[fixed]]\nname = "standing"\ncharge_per_month = 50.0\n'
        '[[taxes]]\nname = "levy"\nrate_pct = 5.0\nbase = "energy_charges"\n'
        '[[taxes]]\nname = "VAT"\nrate_pct = 20.0\nbase = "{base}"\n'
    )

    def test_fixed_levy_and_vat_on_earlier_taxes(self):
        # hand calculation, see docs/derivations/billing-fixed-taxes.md
        t = load(self.TEXT.replace("{base}", "all_charges_and_earlier_taxes"))
        idx = pd.date_range("2025-01-31 23:00", periods=2, freq="h", tz="UTC")
        b = bill(t, idx, [1000.0, 1000.0], [0.0, 0.0])
        by_month = b.groupby("month")["amount"].sum()
        assert_allclose(by_month.to_numpy(), [186.0, 186.0], **EXACT)
        jan = b[b["month"] == "2025-01"].set_index("line_item")
        assert_allclose(jan.loc["tax:VAT", ["quantity", "rate", "amount"]].to_numpy(dtype=float), [155.0, 0.20, 31.0], **EXACT)
        assert jan.loc["tax:VAT", "unit"] == "EUR"

    def test_vat_on_charges_only(self):
        # hand calculation, billing-fixed-taxes.md: VAT on all_charges → 185.00 per month
        t = load(self.TEXT.replace("{base}", "all_charges"))
        idx = pd.date_range("2025-01-31 23:00", periods=2, freq="h", tz="UTC")
        assert_allclose(bill_total(bill(t, idx, [1000.0, 1000.0], [0.0, 0.0])), 370.0, **EXACT)


# --------------------------------------------------------------------------------------------------
# Invariants
# --------------------------------------------------------------------------------------------------

EXAMPLES = ["example_tou_kw_reactive_ratchet.toml", "example_kva_demand.toml", "example_pf_adjusted_demand.toml"]


@st.composite
def meter_series(draw):
    n = draw(st.integers(min_value=4, max_value=96 * 3))
    start = draw(st.datetimes(min_value=pd.Timestamp("2025-01-01").to_pydatetime(), max_value=pd.Timestamp("2025-12-20").to_pydatetime()))
    freq = draw(st.sampled_from(["15min", "30min", "h"]))
    seed = draw(st.integers(min_value=0, max_value=2**32 - 1))
    rng = np.random.default_rng(seed)
    p = rng.uniform(-50.0, 2000.0, n)
    q = rng.uniform(-800.0, 1500.0, n)
    return pd.Timestamp(start).floor("h"), freq, p, q


class TestInvariants:
    @settings(max_examples=40, deadline=None)
    @given(series=meter_series(), name=st.sampled_from(EXAMPLES))
    def test_total_is_sum_of_items_and_amount_is_quantity_times_rate(self, series, name):
        start, freq, p, q = series
        t = example(name)
        idx = pd.date_range(start, periods=len(p), freq=freq, tz=t.time_zone)
        b = bill(t, idx, p, q)
        assert_allclose(b["amount"].to_numpy(), (b["quantity"] * b["rate"]).to_numpy(), rtol=1e-12, atol=1e-9)
        many = bill_many(t, idx, np.vstack([p, 0.5 * p]), np.vstack([q, 0.5 * q]))
        # bill_many row 0 is the same series: same total, and its items sum to its total
        assert_allclose(many["total"].iloc[0], bill_total(b), rtol=1e-10)
        items = many.drop(columns="total")
        assert_allclose(items.sum(axis=1).to_numpy(), many["total"].to_numpy(), rtol=1e-12)
        assert (b["amount"] >= -1e-9).all()  # prices >= 0 give charges >= 0

    def test_scenarios_are_priced_independently(self):
        t = example(EXAMPLES[0])
        idx = pd.date_range("2025-01-01", periods=96 * 40, freq="15min", tz=t.time_zone)
        rng = np.random.default_rng(7)
        p = rng.uniform(100, 900, (5, len(idx)))
        q = rng.uniform(0, 600, (5, len(idx)))
        order = [3, 0, 4, 1, 2]
        a = bill_many(t, idx, p, q)
        b = bill_many(t, idx, p[order], q[order])
        assert_allclose(b.to_numpy(), a.to_numpy()[order], rtol=1e-12)


# --------------------------------------------------------------------------------------------------
# Input kinds and invalid input
# --------------------------------------------------------------------------------------------------


class TestInputs:
    def flat(self):
        return load(FLAT + '[energy]\nprice_per_kwh = { all = 0.10 }')

    @pytest.mark.parametrize("freq, hours", [("15min", 0.25), ("30min", 0.5), ("h", 1.0)])
    def test_interval_length_is_inferred(self, freq, hours):
        idx = pd.date_range("2025-01-06", periods=4, freq=freq, tz="UTC")
        assert interval_hours(idx) == hours
        # 100 kW for 4 intervals: 400 × hours kWh at 0.10 EUR
        assert_allclose(bill_total(bill(self.flat(), idx, np.full(4, 100.0), np.zeros(4))), 40.0 * hours, **EXACT)

    def test_series_inputs(self):
        idx = pd.date_range("2025-01-06", periods=4, freq="h", tz="UTC")
        b = bill(self.flat(), idx, pd.Series(100.0, index=idx), pd.Series(0.0, index=idx))
        assert_allclose(bill_total(b), 40.0, **EXACT)

    def test_single_interval_needs_interval_h(self):
        idx = pd.date_range("2025-01-06", periods=1, freq="h", tz="UTC")
        with pytest.raises(ValueError, match="interval_h"):
            bill(self.flat(), idx, [100.0], [0.0])
        assert_allclose(bill_total(bill(self.flat(), idx, [100.0], [0.0], interval_h=0.5)), 5.0, **EXACT)

    @pytest.mark.parametrize(
        "idx, match",
        [
            (pd.date_range("2025-01-06", periods=3, freq="h"), "tz-aware"),
            (pd.DatetimeIndex(["2025-01-06 00:00", "2025-01-06 01:00", "2025-01-06 03:00"]).tz_localize("UTC"), "regular"),
            (pd.DatetimeIndex(["2025-01-06 02:00", "2025-01-06 01:00", "2025-01-06 00:00"]).tz_localize("UTC"), "increasing"),
        ],
    )
    def test_bad_index_raises(self, idx, match):
        with pytest.raises(ValueError, match=match):
            bill(self.flat(), idx, np.ones(3), np.zeros(3))

    def test_wrong_length_and_nan_raise(self):
        idx = pd.date_range("2025-01-06", periods=3, freq="h", tz="UTC")
        with pytest.raises(ValueError, match="3 values"):
            bill(self.flat(), idx, np.ones(4), np.zeros(4))
        with pytest.raises(ValueError, match="NaN"):
            bill(self.flat(), idx, [1.0, np.nan, 1.0], np.zeros(3))

    def test_bill_refuses_several_scenarios(self):
        idx = pd.date_range("2025-01-06", periods=3, freq="h", tz="UTC")
        with pytest.raises(ValueError, match="bill_many"):
            bill(self.flat(), idx, np.ones((2, 3)), np.zeros((2, 3)))

    def test_zero_load_gives_fixed_charges_only(self):
        t = load(FLAT + '[energy]\nprice_per_kwh = { all = 0.10 }\n[[fixed]]\nname = "f"\ncharge_per_month = 12.5\n'
                 '[[demand]]\nname = "d"\nprice_per_kw_month = 9.0\n'
                 '[demand.power_factor_adjustment]\nmethod = "ratio"\ntarget_power_factor = 0.9')
        idx = pd.date_range("2025-01-06", periods=8, freq="15min", tz="UTC")
        b = bill(t, idx, np.zeros(8), np.zeros(8))
        # hand calculation: nothing drawn, PF taken as 1 (no adjustment), only the fixed 12.50
        assert_allclose(bill_total(b), 12.5, **EXACT)


# --------------------------------------------------------------------------------------------------
# The compiled passes against the numpy rules they replace
# --------------------------------------------------------------------------------------------------


class TestCompiledPasses:
    """The cell sums and the demand windows' peaks, against the same rules written in plain numpy here.

    The compiled passes add each cell's or window's values in time order; a numpy reduction adds in
    blocks, so the two agree to rounding: 1e-12 relative is asked (the largest sums here hold about
    3,000 values).
    """

    CLOSE = dict(rtol=1e-12, atol=1e-9)

    @pytest.fixture(scope="class")
    @classmethod
    def meters(cls):
        from models.billing import _calendar

        t = example("example_pf_adjusted_demand.toml")
        # 15-minute data across a month end and a season change (May -> June), with export and leading kVAr
        index = pd.date_range("2025-05-20", periods=4 * 24 * 20, freq="15min", tz=t.time_zone)
        rng = np.random.default_rng(5)
        p = rng.uniform(-50.0, 400.0, (3, len(index)))
        q = rng.uniform(-150.0, 250.0, (3, len(index)))
        return t, _calendar(t, index, 0.25), p, q

    def numpy_cells(self, cal, x):
        """Sum of (S, T) values by (month, period) cell, with numpy.add.at."""
        out = np.zeros((x.shape[0], cal.n_months * cal.n_periods))
        cell = cal.month * cal.n_periods + cal.period
        for s in range(x.shape[0]):
            np.add.at(out[s], cell, x[s])
        return out

    @pytest.mark.parametrize("code", range(6))
    def test_cell_sums(self, meters, code):
        from models.billing import _cell_sums

        t, cal, p, q = meters
        h, ratio = cal.interval_h, 0.4
        kwh, lag, lead = np.maximum(p, 0.0) * h, np.maximum(q, 0.0) * h, np.maximum(-q, 0.0) * h
        scope = np.zeros(cal.n_months * cal.n_periods, dtype=bool)
        scope[::2] = True  # every other cell
        rule = {
            0: kwh,
            1: np.hypot(np.maximum(p, 0.0), q) * h,
            2: lag,
            3: lead,
            4: np.maximum(lag - ratio * kwh, 0.0),
            5: np.maximum(lead - ratio * kwh, 0.0),
        }[code]
        expected = self.numpy_cells(cal, rule)
        if code >= 4:
            expected = np.where(scope, expected, 0.0)
        got = _cell_sums(cal, p, q, [code], [ratio], [scope if code >= 4 else None])[0]
        assert_allclose(got, expected, **self.CLOSE)

    def test_a_single_row_stands_for_every_scenario(self, meters):
        from models.billing import _KVAH, _cell_sums

        t, cal, p, q = meters
        got = _cell_sums(cal, p[:1], q, [_KVAH], [0.0], [None])[0]
        expected = self.numpy_cells(cal, np.hypot(np.maximum(p[:1], 0.0), q) * cal.interval_h)
        assert_allclose(got, expected, **self.CLOSE)

    @pytest.mark.parametrize("window_min, rolling", [(15, False), (60, False), (15, True), (60, True)])
    @pytest.mark.parametrize("kva", [False, True])
    def test_window_peaks(self, meters, window_min, rolling, kva):
        from dataclasses import replace

        from numpy.lib.stride_tricks import sliding_window_view

        from models.billing import _calendar, _mask, _window_peaks_kernel

        t, _, p, q = meters
        index = pd.date_range("2025-05-20", periods=p.shape[1], freq="15min", tz=t.time_zone)
        t = replace(t, demand=(replace(t.demand[0], window_min=window_min, rolling=rolling),))
        cal = _calendar(t, index, 0.25)
        win = cal.windows[(window_min, rolling)]
        assert win.identity == (window_min == 15)
        scope = _mask(cal, t, ("on-peak", "mid-peak"), None, win.period, win.season)
        # the rule in numpy: window means, masked, the month's maximum and its first window
        if rolling:  # a window of n intervals ending at every interval from the n-th on
            n = window_min // 15
            assert_array_equal(win.starts, np.arange(p.shape[1] - n + 1))
            p_w = sliding_window_view(p, n, axis=1).mean(axis=-1)
            q_w = sliding_window_view(q, n, axis=1).mean(axis=-1)
        else:
            p_w = np.add.reduceat(p, win.starts, axis=1) / win.count
            q_w = np.add.reduceat(q, win.starts, axis=1) / win.count
        demand = np.hypot(p_w, q_w) if kva else p_w
        masked = np.where(scope, demand, -np.inf)
        peak, p_at, q_at = _window_peaks_kernel(p, q, kva, True, win.starts, win.count, win.identity,
                                                win.month_bounds, scope, p.shape[0])
        for m in range(cal.n_months):
            seg = slice(win.month_bounds[m], win.month_bounds[m + 1])
            best = masked[:, seg].max(axis=1)
            first = np.argmax(masked[:, seg] >= best[:, None], axis=1) + win.month_bounds[m]
            assert_allclose(peak[:, m], best, **self.CLOSE)
            rows = np.arange(p.shape[0])
            assert_allclose(p_at[:, m], p_w[rows, first], **self.CLOSE)
            assert_allclose(q_at[:, m], q_w[rows, first], **self.CLOSE)

    def test_a_month_without_a_window_in_scope(self, meters):
        from models.billing import _window_peaks_kernel

        t, cal, p, q = meters
        win = cal.windows[(t.demand[0].window_min, False)]
        scope = np.zeros(len(win.starts), dtype=bool)
        peak, _, _ = _window_peaks_kernel(p, q, False, False, win.starts, win.count, win.identity, win.month_bounds,
                                          scope, p.shape[0])
        assert np.all(peak == -np.inf)


class TestBillingDay:
    """Billing months from a read day: hand calculations, docs/derivations/billing-demand.md case D11."""

    DEMAND = FLAT.replace('currency = "EUR"\n', 'currency = "EUR"\ntime_zone = "UTC"\n{day}') + (
        '[[demand]]\nname = "d"\nprice_per_kw_month = 10.0\nwindow_min = 60\n')

    @staticmethod
    def year(peaks: dict[str, float]) -> tuple[pd.DatetimeIndex, np.ndarray]:
        idx = pd.date_range("2025-01-01", "2026-01-01", freq="h", tz="UTC", inclusive="left")
        p = np.full(len(idx), 100.0)
        for when, kw in peaks.items():
            p[idx.get_loc(pd.Timestamp(when, tz="UTC"))] = kw
        return idx, p

    @pytest.mark.parametrize("day, expected", [("", 16_000.0), ("billing_day = 1\n", 16_000.0),
                                               ("billing_day = 15\n", 19_000.0)])
    def test_peaks_either_side_of_the_read_day(self, day, expected):
        t = load(self.DEMAND.format(day=day))
        idx, p = self.year({"2025-01-10 12:00": 500.0, "2025-01-20 12:00": 400.0})
        b = bill(t, idx, p, np.zeros_like(p), repeat_year=None)  # (the analysis's rule: a whole year repeated)
        assert b["month"].nunique() == 12
        assert_allclose(bill_total(b), expected, **EXACT)
        if day == "billing_day = 15\n":
            assert_allclose([quantity(b, "demand:d", "2025-12"), quantity(b, "demand:d", "2025-01")], [500.0, 400.0],
                            **EXACT)

    def test_a_series_that_is_not_a_whole_year_meets_partial_billing_months(self):
        t = load(FLAT.replace('currency = "EUR"\n', 'currency = "EUR"\ntime_zone = "UTC"\nbilling_day = 15\n')
                 + '[[fixed]]\nname = "meter"\ncharge_per_month = 30.0\n')
        idx = pd.date_range("2025-01-01", "2025-03-01", freq="h", tz="UTC", inclusive="left")
        b = bill(t, idx, np.full(len(idx), 50.0), np.zeros(len(idx)))
        assert sorted(b["month"].unique()) == ["2024-12", "2025-01", "2025-02"]
        assert_allclose(bill_total(b), 90.0, **EXACT)

    @pytest.mark.parametrize("day, expected", [("", 6_000.0), ("billing_day = 15\n", 5_500.0)])
    def test_a_billing_month_takes_the_season_of_the_month_it_starts_in(self, day, expected):
        text = (HEAD + 'time_zone = "UTC"\n' + day + '[[seasons]]\nname = "summer"\nmonths = [6, 7, 8, 9]\n'
                '[[seasons]]\nname = "winter"\nmonths = [1, 2, 3, 4, 5, 10, 11, 12]\n[[periods]]\ncode = "all"\n'
                '[[demand]]\nname = "d"\nprice_per_kw_month = 10.0\nwindow_min = 60\nseasons = ["summer"]\n')
        idx, p = self.year({"2025-06-10 12:00": 300.0, "2025-10-10 12:00": 250.0})
        assert_allclose(bill_total(bill(load(text), idx, p, np.zeros_like(p), repeat_year=None)), expected, **EXACT)

    def test_a_year_billed_as_it_stands_keeps_its_first_days_as_a_billing_month_of_their_own(self):
        # repeat_year=False (bill()'s default): 1-14 January is the billing month "2024-12", 15-31 December "2025-12":
        # 13 billing months, each charged its demand: 500 (1-14 Jan) + 400 + 11 x 100 = 2 000 kW-months
        t = load(self.DEMAND.format(day="billing_day = 15\n"))
        idx, p = self.year({"2025-01-10 12:00": 500.0, "2025-01-20 12:00": 400.0})
        b = bill(t, idx, p, np.zeros_like(p))
        assert b["month"].nunique() == 13 and b["month"].min() == "2024-12"
        assert_allclose(bill_total(b), 20_000.0, **EXACT)


@pytest.mark.parametrize("rolling, expected", [(True, 16_500.0), (False, 15_000.0)])
def test_rolling_windows_and_billing_months_from_a_read_day(rolling, expected):
    # hand calculation: 15-minute data for 2025 (UTC) at 100 kW but 400 kW at 14 Jan 23:45 and 15 Jan 00:00; 30-minute
    # windows, 10 EUR/kW-month, billing months from the 15th (docs/derivations/billing-demand.md D1r and D11).
    # Rolling: the window ending 15 Jan 00:00 reads 400 kW in the January billing month, the one ending 14 Jan 23:45
    # reads (100 + 400) / 2 = 250 in the December one (which wraps round the year): 400 + 250 + 10 x 100 = 1 650
    # kW-months. Block: 23:30-24:00 reads 250 (December's), 00:00-00:30 reads 250 (January's): 1 500
    t = load(HEAD + 'time_zone = "UTC"\nbilling_day = 15\n[[periods]]\ncode = "all"\n[[demand]]\nname = "d"\n'
             f'price_per_kw_month = 10.0\nwindow_min = 30\nrolling = {"true" if rolling else "false"}\n')
    idx = pd.date_range("2025-01-01", "2026-01-01", freq="15min", tz="UTC", inclusive="left")
    p = np.full(len(idx), 100.0)
    at = idx.get_loc(pd.Timestamp("2025-01-14 23:45", tz="UTC"))
    p[at:at + 2] = 400.0
    b = bill(t, idx, p, np.zeros_like(p), repeat_year=None)
    assert b["month"].nunique() == 12
    assert_allclose(bill_total(b), expected, **EXACT)


def test_every_line_item_category_has_words_a_colour_a_saving_component_and_a_tax_base():
    from dashboard.figures import BILL_COLOURS
    from models.bill_savings import COMPONENT_CATEGORIES
    from models.billing import _TAX_BASE_CATEGORIES, LINE_ITEM_CATEGORIES
    from models.wording import LINE_ITEM_CATEGORIES as WORDS

    assert set(WORDS) == set(LINE_ITEM_CATEGORIES)
    assert set(BILL_COLOURS) == set(LINE_ITEM_CATEGORIES)
    charges = set(LINE_ITEM_CATEGORIES) - {"tax"}
    assert {c for group in COMPONENT_CATEGORIES.values() for c in group} == charges
    assert set(_TAX_BASE_CATEGORIES["all_charges"]) == charges
    # every charge is in exactly one of the narrower bases (docs/tariffs.md, the table of tax bases)
    narrow = ("energy_charges", "demand_charges", "reactive_charges", "fixed_charges")
    assert sorted(c for b in narrow for c in _TAX_BASE_CATEGORIES[b]) == sorted(charges)


class TestReactivePriceByPowerFactor:
    # Hand calculation, docs/derivations/billing-reactive.md, case R8. Four hours of 100 kWh each, two in period A
    # (10:00, 11:00) and two in B (12:00, 13:00); excess above 0.33 kVArh per kWh; 0.041554 per kVArh while the
    # unit's power factor is not below 0.80, 0.062332 below it (a price band of the kind some rate schedules set
    # by the period's power factor).
    CLAUSE = ('[[reactive]]\nname = "r"\nprice_per_kvarh = 0.041554\nfree_kvarh_per_kwh = 0.33\n'
              'allowance_per = "{scope}"\nprice_by_power_factor = [{{ below = 0.80, price_per_kvarh = 0.062332 }}]\n')

    def test_each_period_priced_by_its_power_factor(self):
        # A: 200 kWh, 120 kVArh, PF 0.8575: 54 kVArh at 0.041554 = 2.243916; B: 200 kWh, 180 kVArh, PF 0.7433:
        # 114 kVArh at 0.062332 = 7.105848
        t = load(AB_PERIODS + self.CLAUSE.format(scope="period"))
        b = bill(t, r_index(), np.full(4, 100.0), [60.0, 60.0, 100.0, 80.0])
        assert_allclose(quantity(b, "reactive:r"), 54.0, atol=1e-9)
        assert_allclose(quantity(b, "reactive:r (power factor below 0.8)"), 114.0, atol=1e-9)
        assert_allclose(bill_total(b), 2.243916 + 7.105848, atol=1e-9)

    @pytest.mark.parametrize("q_last, band, kvarh", [(80.0, False, 168.0), (100.0, True, 188.0)])
    def test_the_month_priced_by_its_power_factor(self, q_last, band, kvarh):
        # the month: 400 kWh with 300 kVArh is a power factor of exactly 0.8, not below the edge: 168 kVArh at
        # 0.041554 = 6.981072; with 320 kVArh it is 0.7809: 188 kVArh at 0.062332 = 11.718416
        t = load(AB_PERIODS + self.CLAUSE.format(scope="month"))
        b = bill(t, r_index(), np.full(4, 100.0), [60.0, 60.0, 100.0, q_last])
        assert_allclose(quantity(b, "reactive:r (power factor below 0.8)"), kvarh if band else 0.0, atol=1e-9)
        assert_allclose(quantity(b, "reactive:r"), 0.0 if band else kvarh, atol=1e-9)
        assert_allclose(bill_total(b), 11.718416 if band else 6.981072, atol=1e-9)

    def test_the_lowest_edge_below_which_the_power_factor_falls_sets_the_price(self):
        # two bands given highest edge last: period B's 0.7433 is below 0.95 and 0.80, and takes 0.80's price;
        # period A's 0.8575 is below 0.95 only
        clause = ('[[reactive]]\nname = "r"\nprice_per_kvarh = 0.01\nfree_kvarh_per_kwh = 0.33\nallowance_per = "period"\n'
                  'price_by_power_factor = [{ below = 0.80, price_per_kvarh = 0.062332 }, '
                  '{ below = 0.95, price_per_kvarh = 0.041554 }]\n')
        b = bill(load(AB_PERIODS + clause), r_index(), np.full(4, 100.0), [60.0, 60.0, 100.0, 80.0])
        assert_allclose(quantity(b, "reactive:r (power factor below 0.95)"), 54.0, atol=1e-9)
        assert_allclose(quantity(b, "reactive:r (power factor below 0.8)"), 114.0, atol=1e-9)
        assert_allclose(quantity(b, "reactive:r"), 0.0, atol=1e-9)
        assert_allclose(bill_total(b), 2.243916 + 7.105848, atol=1e-9)

    @pytest.mark.parametrize("decimals, band", [(None, True), (2, False), (3, False), (4, True)])
    def test_a_power_factor_rounded_as_the_bill_prints_it(self, decimals, band):
        # case R9: the month's 400 kWh with 300.4 kVArh is a power factor of 0.799616: below 0.80 as computed and
        # at 4 decimals (0.7996), not below at 2 or 3 (0.80, 0.800); excess 300.4 - 132 = 168.4 kVArh at
        # 0.062332 = 10.4967088 below the edge, at 0.041554 = 6.9976936 not
        clause = self.CLAUSE.format(scope="month")
        if decimals is not None:
            clause += f"power_factor_decimals = {decimals}\n"
        b = bill(load(AB_PERIODS + clause), r_index(), np.full(4, 100.0), [60.0, 60.0, 100.0, 80.4])
        below = "reactive:r (power factor below 0.8)"
        assert_allclose(quantity(b, below) + quantity(b, "reactive:r"), 168.4, atol=1e-9)
        assert_allclose(bill_total(b), 10.4967088 if band else 6.9976936, atol=1e-9)

    def test_rounding_decimals_out_of_range_or_without_bands_are_said(self):
        text = AB_PERIODS + self.CLAUSE.format(scope="month") + "power_factor_decimals = 7\n"
        problems = tariff_from_dict(tomllib.loads(text), source="t.toml")[1]
        assert any(p.severity == "error" and "power_factor_decimals" in str(p) for p in problems)
        plain = (AB_PERIODS + '[[reactive]]\nname = "r"\nprice_per_kvarh = 0.04\nfree_kvarh_per_kwh = 0.33\n'
                 'power_factor_decimals = 2\n')
        problems = tariff_from_dict(tomllib.loads(plain), source="t.toml")[1]
        assert any(p.severity == "warning" and "power_factor_decimals" in str(p) for p in problems)

    def test_bands_need_a_period_or_month_allowance(self):
        problems = tariff_from_dict(tomllib.loads(AB_PERIODS + self.CLAUSE.format(scope="interval")), source="t.toml")[1]
        assert any(p.severity == "error" and "price_by_power_factor" in str(p) for p in problems)

    @pytest.mark.parametrize("band, key", [("{ below = 1.2, price_per_kvarh = 0.06 }", "below"),
                                           ("{ below = 0.8, price_per_kvarh = -1 }", "price_per_kvarh"),
                                           ("{ below = 0.8 }", "price_per_kvarh"),
                                           ("{ below = 0.8, price = 0.06 }", "price")])
    def test_a_wrong_band_names_its_place(self, band, key):
        text = (AB_PERIODS + '[[reactive]]\nname = "r"\nprice_per_kvarh = 0.04\nfree_kvarh_per_kwh = 0.33\n'
                f'allowance_per = "period"\nprice_by_power_factor = [{band}]\n')
        problems = tariff_from_dict(tomllib.loads(text), source="t.toml")[1]
        assert any(f"price_by_power_factor[1]" in str(p) and key in str(p) for p in problems), [str(p) for p in problems]
