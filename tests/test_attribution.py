"""Tests for models.attribution: option and plan savings, interaction, equivalent bank, saturation.

Sources: hand calculations in docs/derivations/billing-site-and-attribution.md (A1) and
docs/derivations/billing-reactive.md (R4). Amounts are sums of a few exact decimal products:
compared to 1e-9 (floating-point rounding only) unless stated otherwise.
"""

from __future__ import annotations

import tomllib
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose

from models.attribution import (
    bill_calendar,
    equivalent_capacitor_bank_q_kvar,
    option_savings,
    plan_savings,
    reactive_balance,
    reactive_saving_sweep,
    scenario_bills,
)
from models.site import Site, SteppedCapacitorBank, site_meter
from models.tariff import tariff_from_dict

EXACT = dict(rtol=0, atol=1e-9)
TARIFF_DIR = Path(__file__).resolve().parents[1] / "data" / "tariffs"

# Tariff of case A1 / R4.
A1 = """
[tariff]
name = "A1"
currency = "EUR"
[[periods]]
code = "all"
[energy]
price_per_kwh = { all = 0.10 }
[[reactive]]
name = "excess"
price_per_kvarh = 0.10
free_kvarh_per_kwh = 0.33
"""


def load(text: str):
    t, problems = tariff_from_dict(tomllib.loads(text), source="test.toml")
    assert t is not None, [str(p) for p in problems]
    return t


def a1_inputs():
    idx = pd.date_range("2025-01-06", periods=2, freq="h", tz="UTC")
    p = np.array([100.0, 100.0])
    q = np.array([60.0, 60.0])
    dp = np.array([[-10.0, -10.0], [0.0, 0.0]])
    dq = np.array([[-30.0, -30.0], [-30.0, -30.0]])
    return idx, p, q, dp, dq


class TestOptionSavings:
    def test_hand_calculated_options(self):
        # hand calculation, see docs/derivations/billing-site-and-attribution.md, A1
        idx, p, q, dp, dq = a1_inputs()
        r = option_savings(load(A1), idx, p, q, dp, dq, option_names=["motor 1", "motor 2"])
        assert list(r.index) == ["motor 1", "motor 2"]
        assert_allclose(r["baseline_bill"].to_numpy(), [25.40, 25.40], **EXACT)
        assert_allclose(r["option_bill"].to_numpy(), [18.06, 20.00], **EXACT)
        assert_allclose(r["saving"].to_numpy(), [7.34, 5.40], **EXACT)
        assert_allclose(r["reactive_saving"].to_numpy(), [5.40, 5.40], **EXACT)
        assert_allclose(r["other_saving"].to_numpy(), [1.94, 0.0], **EXACT)
        assert_allclose(r["saving_energy"].to_numpy(), [2.00, 0.0], **EXACT)
        assert_allclose(r["saving_reactive"].to_numpy(), [5.34, 5.40], **EXACT)
        assert_allclose(r["max_q_reduction_kvar"].to_numpy(), [30.0, 30.0], **EXACT)
        # hand calculation, A1: lagging kVArh 120 → 60 for either option; nothing leads
        assert_allclose(r["lagging_kvarh_change"].to_numpy(), [-60.0, -60.0], **EXACT)
        assert_allclose(r["leading_kvarh_change"].to_numpy(), [0.0, 0.0], **EXACT)

    def test_scenario_bills_with_the_calendar_handed_back(self):
        # hand calculation, A1: the option bills 18.06 and 20.00 whether the calendar is built per call or
        # built once and handed back
        idx, p, q, dp, dq = a1_inputs()
        tariff = load(A1)
        assert_allclose(scenario_bills(tariff, idx, p, q, dp, dq), [18.06, 20.00], **EXACT)
        assert_allclose(scenario_bills(tariff, idx, p, q, dp, dq, calendar=bill_calendar(tariff, idx)), [18.06, 20.00],
                        **EXACT)

    def test_equivalent_bank(self):
        # hand calculation, A1: option 2's 5.40 EUR needs a 27 kVAr bank (810 EUR at 30 EUR/kVAr); the grid
        # search may return up to one grid step (60 kVAr / 256) above
        idx, p, q, dp, dq = a1_inputs()
        r = option_savings(load(A1), idx, p, q, dp, dq, capacitor_cost_per_kvar=30.0)
        step = 60.0 / 256
        assert 27.0 - 1e-9 <= r["equivalent_bank_q_kvar"].iloc[1] <= 27.0 + step
        assert_allclose(r["equivalent_bank_cost"].iloc[1], 30.0 * r["equivalent_bank_q_kvar"].iloc[1], rtol=1e-12)
        # option 2 supplies 30 kVAr, 3 kVAr more than the bank that buys the same saving
        assert r["equivalent_bank_q_kvar"].iloc[1] < r["max_q_reduction_kvar"].iloc[1]

    def test_equivalent_bank_zero_for_no_saving_and_refines_with_grid(self):
        idx, p, q, _, _ = a1_inputs()
        got = equivalent_capacitor_bank_q_kvar(load(A1), idx, p, q, [0.0, -1.0, 2.0], n_grid=600)
        # hand calculation, A1: saving = 0.20 EUR per kVAr up to 27 kVAr → 2.00 EUR needs 10 kVAr;
        # grid step 0.1 kVAr and the point 10 kVAr lies on the grid
        assert_allclose(got, [0.0, 0.0, 10.0], atol=1e-9)

    def test_equivalent_bank_of_a_saving_that_removes_the_whole_charge(self):
        # hand calculation, A1: the excess charge is 0.20 EUR per kVAr up to 27 kVAr, 5.40 EUR in all; a saving of
        # 5.40 summed in another order (a rounding above the bank curve's plateau) needs the 27 kVAr bank, not
        # the 60 kVAr that takes the site to unity power factor (the search must stop at the plateau; the grid may
        # return up to one step, 60 / 256 kVAr, above 27). A saving clearly above the plateau still returns 60.
        idx, p, q, _, _ = a1_inputs()
        whole = 5.40 * (1.0 + 1e-13)
        got = equivalent_capacitor_bank_q_kvar(load(A1), idx, p, q, [whole, 5.40, 6.0])
        step = 60.0 / 256
        assert 27.0 - 1e-9 <= got[0] <= 27.0 + step and 27.0 - 1e-9 <= got[1] <= 27.0 + step
        assert_allclose(got[2], 60.0, rtol=1e-12)

    def test_existing_automatic_bank_takes_the_reactive_saving(self):
        # hand calculation: assets 400 kW, 300 kVAr; a 250 kVAr bank in 50 kVAr steps at target 0.95 puts in
        # 200 kVAr (billing-site-and-attribution.md, S2) → 100 kVAr, 0.25 kVArh/kWh < 0.33: no excess.
        # Cutting the assets' kVAr by 100 only switches out two steps: reactive saving 0.
        idx = pd.date_range("2025-01-06", periods=2, freq="h", tz="UTC")
        site = Site(stepped_banks=(SteppedCapacitorBank(250.0, 50.0, 0.95),))
        p, q = np.full(2, 400.0), np.full(2, 300.0)
        with_bank = option_savings(load(A1), idx, p, q, np.zeros((1, 2)), np.full((1, 2), -100.0), site=site)
        without = option_savings(load(A1), idx, p, q, np.zeros((1, 2)), np.full((1, 2), -100.0))
        assert_allclose(with_bank["saving"].iloc[0], 0.0, **EXACT)
        # without the bank: 600 kVArh − 264 = 336 excess before, 400 − 264 = 136 after → 200 kVArh × 0.10 = 20.00 EUR
        assert_allclose(without["saving"].iloc[0], 20.0, **EXACT)

    def test_leading_ban_is_reported(self):
        t = load(A1 + '[[leading]]\nname = "lead"\nbanned = true\nprice_per_kvarh = 0.05')
        idx, p, q, _, _ = a1_inputs()
        r = option_savings(t, idx, p, q, np.zeros((1, 2)), np.full((1, 2), -80.0))
        assert r["flags"].iloc[0] == ["leading:lead"]

    def test_invalid_inputs_raise(self):
        idx, p, q, dp, dq = a1_inputs()
        with pytest.raises(ValueError, match="shape"):
            option_savings(load(A1), idx, p, q, dp, dq[:, :1])
        with pytest.raises(ValueError, match="option names"):
            option_savings(load(A1), idx, p, q, dp, dq, option_names=["only one"])
        with pytest.raises(ValueError, match="capacitor_cost_per_kvar"):
            option_savings(load(A1), idx, p, q, dp, dq, capacitor_cost_per_kvar=-1.0)


class TestPlanSavings:
    def test_interaction_is_reported_once(self):
        # hand calculation, A1: plan saving 7.40; singles 7.34 + 5.40; interaction −5.34 (all in reactive)
        idx, p, q, dp, dq = a1_inputs()
        plan = plan_savings(load(A1), idx, p, q, dp, dq, option_names=["motor 1", "motor 2"], capacitor_cost_per_kvar=30.0)
        rows = plan.by_option
        assert list(rows.index) == ["motor 1", "motor 2", "interaction", "plan"]
        assert_allclose(rows["saving"].to_numpy(), [7.34, 5.40, -5.34, 7.40], **EXACT)
        assert_allclose(rows.loc["interaction", "saving_energy"], 0.0, **EXACT)
        assert_allclose(rows.loc["interaction", "saving_reactive"], -5.34, **EXACT)
        assert_allclose([plan.baseline_bill, plan.plan_bill], [25.40, 18.00], **EXACT)
        # the plan's kVAr change alone removes the whole 5.40 EUR excess: same 27 kVAr bank (one grid step)
        assert_allclose(plan.plan_reactive_saving, 5.40, **EXACT)
        assert 27.0 - 1e-9 <= plan.equivalent_bank_q_kvar <= 27.0 + 60.0 / 256

    def test_reactive_balance_before_and_after(self):
        # hand calculation, A1: before 200 kWh, 120 kVArh, PF 200/sqrt(200² + 120²); after 180 kWh, 0 kVArh
        idx, p, q, dp, dq = a1_inputs()
        bal = plan_savings(load(A1), idx, p, q, dp, dq).reactive_balance
        assert_allclose(bal.loc["lagging_kvarh"].to_numpy(), [120.0, 0.0, -120.0], **EXACT)
        assert_allclose(bal.loc["energy_kwh", "after"], 180.0, **EXACT)
        assert_allclose(bal.loc["average_power_factor"].to_numpy()[:2], [200.0 / np.hypot(200.0, 120.0), 1.0], rtol=1e-12)

    def test_one_asset_twice_is_refused(self):
        idx, p, q, dp, dq = a1_inputs()
        with pytest.raises(ValueError, match="repeated asset ids: M1"):
            plan_savings(load(A1), idx, p, q, dp, dq, asset_ids=["M1", "M1"])


class TestSaturation:
    def test_hand_calculated_sweep_flattens_at_threshold(self):
        # hand calculation, see docs/derivations/billing-reactive.md, case R4
        idx = pd.date_range("2025-01-06", periods=2, freq="h", tz="UTC")
        s = [0.0, 10.0, 20.0, 27.0, 30.0, 60.0, 80.0]
        sweep = reactive_saving_sweep(load(A1), idx, np.full(2, 100.0), np.full(2, 60.0), s)
        assert_allclose(sweep["saving"].to_numpy(), [0.0, 2.0, 4.0, 5.4, 5.4, 5.4, 5.4], atol=1e-9)
        assert_allclose(sweep["leading_kvarh"].to_numpy(), [0, 0, 0, 0, 0, 0, 40.0], atol=1e-9)

    def test_leading_charge_bends_the_sweep_down(self):
        # hand calculation, R4: leading 40 kVArh × 0.05 = 2.00 → saving 3.40 at 80 kVAr
        t = load(A1 + '[[leading]]\nname = "lead"\nprice_per_kvarh = 0.05')
        idx = pd.date_range("2025-01-06", periods=2, freq="h", tz="UTC")
        sweep = reactive_saving_sweep(t, idx, np.full(2, 100.0), np.full(2, 60.0), [60.0, 80.0])
        assert_allclose(sweep["saving"].to_numpy(), [5.4, 3.4], atol=1e-9)

    @settings(max_examples=15, deadline=None)
    @given(seed=st.integers(0, 2**32 - 1))
    def test_saving_is_monotone_then_flat_past_unity(self, seed):
        # invariant: when only lagging kVArh is charged (example A), the saving never falls as kVAr supply
        # grows, and stops changing once the supply exceeds the largest lagging kVAr (past every threshold)
        with open(TARIFF_DIR / "example_tou_kw_reactive_ratchet.toml", "rb") as f:
            t = tariff_from_dict(tomllib.load(f))[0]
        rng = np.random.default_rng(seed)
        idx = pd.date_range("2025-02-03", periods=96 * 3, freq="15min", tz=t.time_zone)
        p = rng.uniform(200.0, 900.0, len(idx))
        q = p * rng.uniform(0.2, 0.9, len(idx))
        supply = np.linspace(0.0, q.max() * 1.5, 16)
        saving = reactive_saving_sweep(t, idx, p, q, supply)["saving"].to_numpy()
        assert np.all(np.diff(saving) >= -1e-6)
        past = supply >= q.max()
        assert np.ptp(saving[past]) <= 1e-6
        assert saving[-1] > 0.0

    def test_kva_demand_penalises_over_correction(self):
        # kVA demand uses the window's net kVAr: once the supply exceeds the peak window's lagging kVAr the
        # site leads and the kVA grows again. Hand calculation, one 30-min window: P = 300 kW, Q = 400 kVAr;
        # supply 400 → 300 kVA; supply 800 → sqrt(300² + 400²) = 500 kVA again (saving back to 0)
        with open(TARIFF_DIR / "example_kva_demand.toml", "rb") as f:
            t = tariff_from_dict(tomllib.load(f))[0]
        idx = pd.date_range("2025-02-03 10:00", periods=2, freq="15min", tz=t.time_zone)
        sweep = reactive_saving_sweep(t, idx, np.full(2, 300.0), np.full(2, 400.0), [0.0, 400.0, 800.0])
        # 200 kVA × 9.20 EUR × 1.135 (VAT 13.5 % on all charges) = 2 088.40 EUR
        assert_allclose(sweep["saving_demand"].to_numpy(), [0.0, 1840.0, 0.0], atol=1e-9)
        assert_allclose(sweep["saving"].to_numpy(), [0.0, 2088.40, 0.0], atol=1e-9)


class TestInvariants:
    def site_and_tariff(self):
        with open(TARIFF_DIR / "example_tou_kw_reactive_ratchet.toml", "rb") as f:
            t = tariff_from_dict(tomllib.load(f))[0]
        idx = pd.date_range("2025-01-27", periods=96 * 14, freq="15min", tz=t.time_zone)  # crosses a month
        site = Site(base_p_kw=80.0, base_power_factor=0.9, stepped_banks=(SteppedCapacitorBank(200.0, 25.0, 0.95),))
        return t, idx, site

    def test_no_change_gives_zero_saving(self):
        t, idx, site = self.site_and_tariff()
        rng = np.random.default_rng(3)
        p = rng.uniform(0, 60, (8, len(idx)))
        q = 0.7 * p
        r = option_savings(t, idx, p, q, np.zeros((3, len(idx))), np.zeros((3, len(idx))), site=site, capacitor_cost_per_kvar=25.0)
        assert_allclose(r[["saving", "reactive_saving", "other_saving", "equivalent_bank_q_kvar"]].to_numpy(), 0.0, atol=1e-9)

    @settings(max_examples=10, deadline=None)
    @given(seed=st.integers(0, 2**32 - 1), scale=st.floats(0.0, 3.0))
    def test_savings_never_exceed_the_baseline_bill(self, seed, scale):
        # even options that remove more than the whole load: export is not credited, charges are >= 0
        t, idx, site = self.site_and_tariff()
        rng = np.random.default_rng(seed)
        p = rng.uniform(0, 60, (6, len(idx)))
        q = 0.7 * p
        dp = -scale * rng.uniform(0, 1, (4, len(idx))) * p.sum(axis=0)
        dq = -scale * rng.uniform(0, 1, (4, len(idx))) * q.sum(axis=0)
        r = option_savings(t, idx, p, q, dp, dq, site=site)
        assert np.all(r["saving"].to_numpy() <= r["baseline_bill"].to_numpy() + 1e-9)

    @settings(max_examples=10, deadline=None)
    @given(seed=st.integers(0, 2**32 - 1), data=st.data())
    def test_results_independent_of_option_and_asset_order(self, seed, data):
        t, idx, site = self.site_and_tariff()
        rng = np.random.default_rng(seed)
        p = rng.uniform(0, 60, (6, len(idx)))
        q = 0.7 * p
        dp = -rng.uniform(0, 5, (4, len(idx)))
        dq = -rng.uniform(0, 20, (4, len(idx)))
        names = ["a", "b", "c", "d"]
        opt = data.draw(st.permutations(range(4)))
        rows = data.draw(st.permutations(range(6)))
        r1 = option_savings(t, idx, p, q, dp, dq, site=site, option_names=names)
        r2 = option_savings(t, idx, p[list(rows)], q[list(rows)], dp[list(opt)], dq[list(opt)], site=site, option_names=[names[i] for i in opt])
        cols = ["saving", "reactive_saving", "other_saving"]
        # asset sums in another order differ by float rounding only (amounts ~1e5 EUR)
        assert_allclose(r2.loc[names, cols].to_numpy(), r1.loc[names, cols].to_numpy(), rtol=1e-9, atol=1e-6)

    def test_plan_rows_add_up(self):
        t, idx, site = self.site_and_tariff()
        rng = np.random.default_rng(11)
        p = rng.uniform(0, 60, (6, len(idx)))
        q = 0.7 * p
        dp = -rng.uniform(0, 5, (3, len(idx)))
        dq = -rng.uniform(0, 20, (3, len(idx)))
        plan = plan_savings(t, idx, p, q, dp, dq, site=site)
        rows = plan.by_option
        parts = rows.drop(index="plan").sum(axis=0)
        assert_allclose(parts.to_numpy(), rows.loc["plan"].to_numpy(), rtol=1e-12, atol=1e-9)
        assert_allclose(rows.loc["plan", "saving"], plan.baseline_bill - plan.plan_bill, rtol=1e-12)


def test_reactive_balance_example():
    # hand calculation: 100 kW with 75 kVAr then −10 kVAr over half-hours: 37.5 kVArh lagging, 5 kVArh leading
    m = site_meter(np.array([100.0, 100.0]), np.array([75.0, -10.0]))
    bal = reactive_balance(m, 0.5)
    assert_allclose(bal[["energy_kwh", "lagging_kvarh", "leading_kvarh", "leading_intervals_frac"]].to_numpy(dtype=float), [100.0, 37.5, 5.0, 0.5], **EXACT)
    assert_allclose(bal["max_leading_q_kvar"], 10.0, **EXACT)
    with pytest.raises(ValueError, match="interval_h"):
        reactive_balance(m, 0.0)


class TestRatchetOfATypicalYear:
    """A 12-month series is billed as a typical year repeated (hand calculation, docs/derivations/billing-demand.md, D7)."""

    TARIFF = A1.split("[energy]")[0] + (
        '[[demand]]\nname = "d"\nprice_per_kw_month = 10.0\nwindow_min = 60\nratchet_frac = 0.8\nratchet_months = 11\n')

    def inputs(self, end="2026-01-01"):
        idx = pd.date_range("2025-01-01", end, freq="h", tz="UTC", inclusive="left")
        p = np.where(idx.month == 7, 200.0, 100.0)
        dp = (100.0 - p)[None, :]
        return idx, p, np.zeros(len(idx)), dp, np.zeros_like(dp)

    def test_saving_of_a_typical_year(self):
        idx, p, q, dp, dq = self.inputs()
        r = option_savings(load(self.TARIFF), idx, p, q, dp, dq)
        # hand calculation, D7: 19,600 today, 12,000 with the option, saving 7,600
        assert_allclose(r["baseline_bill"].iloc[0], 19_600.0, **EXACT)
        assert_allclose(r["option_bill"].iloc[0], 12_000.0, **EXACT)
        assert_allclose(r["saving"].iloc[0], 7_600.0, **EXACT)

    def test_lone_year_when_asked(self):
        idx, p, q, dp, dq = self.inputs()
        r = option_savings(load(self.TARIFF), idx, p, q, dp, dq, repeat_year=False)
        # hand calculation, D7: 16,000 today as a lone year, saving 4,000
        assert_allclose(r["baseline_bill"].iloc[0], 16_000.0, **EXACT)
        assert_allclose(r["saving"].iloc[0], 4_000.0, **EXACT)

    def test_part_year_is_billed_as_it_stands(self):
        idx, p, q, dp, dq = self.inputs(end="2025-07-01")
        r = option_savings(load(self.TARIFF), idx, p, q, dp, dq)
        # January to June at 100 kW with or without the option: 6 x 100 kW x 10 = 6,000, nothing saved
        assert_allclose(r["baseline_bill"].iloc[0], 6_000.0, **EXACT)
        assert_allclose(r["saving"].iloc[0], 0.0, **EXACT)


@pytest.mark.parametrize("repeat_year, expected", [(False, 13 * 20.0 + 13 * 1000.0), (None, 12 * 20.0 + 12 * 1000.0)])
def test_scenario_bills_take_the_billing_months_bill_takes(repeat_year, expected):
    # hand calculation: 100 kW flat through 2025 (UTC), a 20 EUR standing charge and 10 EUR/kW-month demand, billing
    # months from the 15th. Billed as it stands (repeat_year False) the year meets 13 billing months (1-14 January its
    # own): 13 x (20 + 1 000); as a year repeated (None, the analysis's rule), 12
    import tomllib

    from models.attribution import scenario_bills
    from models.billing import bill
    from models.tariff import tariff_from_dict

    text = ('[tariff]\nname = "t"\ncurrency = "EUR"\ntime_zone = "UTC"\nbilling_day = 15\n[[periods]]\ncode = "all"\n'
            '[[fixed]]\nname = "standing"\ncharge_per_month = 20.0\n[[demand]]\nname = "d"\nprice_per_kw_month = 10.0\n'
            'window_min = 60\n')
    t, problems = tariff_from_dict(tomllib.loads(text))
    assert t is not None, problems
    idx = pd.date_range("2025-01-01", "2026-01-01", freq="h", tz="UTC", inclusive="left")
    p = np.full(len(idx), 100.0)
    assert bill(t, idx, p, np.zeros_like(p), repeat_year=repeat_year)["amount"].sum() == pytest.approx(expected)
    scenarios = scenario_bills(t, idx, p, np.zeros_like(p), np.zeros((1, len(p))), np.zeros((1, len(p))),
                               repeat_year=repeat_year)
    assert np.asarray(scenarios, dtype=float).ravel()[0] == pytest.approx(expected)
