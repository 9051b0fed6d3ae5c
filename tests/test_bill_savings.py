"""Bill savings of asset-options at the site meter: zero for no change, order-independent, plan interaction."""

from __future__ import annotations

import shutil
from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose, assert_array_equal

import casebuilder as cb
from drivecase.cli import main
from models.bill_savings import bill_savings, meter_and_bills, monthly_bill_table, plan_bill_savings, reactive_value_curve
from models.case import load_case
from models.operation import operate

TARIFF = Path(__file__).resolve().parents[1] / "data" / "tariffs" / "example_tou_kw_reactive_ratchet.toml"
HEADER = cb.ASSET_HEADER
ASSETS = [
    ["P1", "S1", "Throttled pump", "pump", "30", "4", "50", "400", "IE1", "", "", "1460", "2006", "0", "throttled", "LP1", "", "", "high"],
    ["F1", "S1", "Fan", "fan", "15", "4", "50", "400", "IE2", "", "", "1455", "2010", "0", "fixed", "LP1", "", "", "low"],
    ["C1", "S1", "Compressor", "compressor", "55", "2", "50", "400", "unknown", "", "", "", "1999", "1", "fixed", "", "5000", "80", "low"],
]


def _case(folder: Path, assets, capacitors=None):
    cb.write_case(folder, assets=assets, sites=[["S1", "Works", "40", "0.8"]], duty=[], capacitors=capacitors,
                  profiles=[["LP1", f"2025-01-{1 + d:02d} {h:02d}:00", f"{55 + 10 * (h % 3)}"] for d in range(28) for h in range(24)])
    (folder / "tariffs").mkdir()
    shutil.copyfile(TARIFF, folder / "tariffs" / TARIFF.name)
    text = (folder / "sites.csv").read_text(encoding="utf-8").splitlines()
    text[0] += ",tariff_file"
    text[1] += f",{TARIFF.name}"
    (folder / "sites.csv").write_text("\n".join(text) + "\n", encoding="utf-8")
    case, problems = load_case(folder, mode="strict")
    return case


@pytest.fixture(scope="module")
def small(tmp_path_factory):
    case = _case(tmp_path_factory.mktemp("s"), ASSETS)
    op = operate(case)
    return case, op, bill_savings(case, op, 35.0)


def test_keeping_everything_saves_nothing(small):
    _, op, savings = small
    assert_allclose(savings.total[:, 0], 0.0, atol=1e-9)


def test_results_do_not_depend_on_row_order(small, tmp_path):
    case, op, savings = small
    case2 = _case(tmp_path / "r", [ASSETS[2], ASSETS[0], ASSETS[1]])
    op2 = operate(case2)
    savings2 = bill_savings(case2, op2, 35.0)
    for k, asset in enumerate(op.asset_ids):
        j = op2.asset_position(asset)
        assert_allclose(savings2.total[j], savings.total[k], rtol=1e-9, atol=1e-6)


def test_savings_never_exceed_the_bill(small):
    case, op, savings = small
    assert (savings.total <= savings.baseline_bills["amount"].sum() + 1e-9).all()


def test_drive_on_the_throttled_pump_saves_energy_and_demand(small):
    _, op, savings = small
    j, o = op.asset_position("P1"), op.option_position("pm_drive")
    energy, demand = savings.saving[j, o, 0], savings.saving[j, o, 1]
    assert energy > 0 and demand > 0


def test_plan_rows_and_interaction_add_up(small):
    case, op, savings = small
    choice = np.array([op.option_position("pm_drive"), op.option_position("ie4"), op.option_position("capacitor")])
    plans = plan_bill_savings(case, op, choice, 35.0)
    plan = plans["S1"]
    rows = plan.by_option["saving"]
    assert_allclose(rows.drop("plan").sum(), rows["plan"], rtol=1e-9)
    assert_allclose(rows["plan"], plan.baseline_bill - plan.plan_bill, rtol=1e-9)


def test_monthly_table_totals(small):
    case, op, savings = small
    _, bills = meter_and_bills(case, op, np.zeros(len(op.asset_ids), dtype=int))
    table = monthly_bill_table(bills, "S1")
    assert_allclose(table["total"].sum(), bills["amount"].sum(), rtol=1e-12)
    # a four-week profile is extended to the analysis year, so the bill has twelve months
    assert list(table.index) == [f"2025-{m:02d}" for m in range(1, 13)]
    # line items in the bill's own order (taxes after what they are levied on), not alphabetical
    site = bills[bills["site_id"] == "S1"]
    assert list(table.columns[:-1]) == list(dict.fromkeys(site["line_item"]))


def test_existing_automatic_bank_leaves_no_reactive_value(small):
    case, op, _ = small
    # the case's stepped 60 kVAr bank already holds the site at its target: extra kVAr is worth nothing
    curve = reactive_value_curve(case, op, "C1", 35.0, n_points=5)
    assert_allclose(curve["saving"], 0.0, atol=1e-9)


def test_reactive_value_saturates(tmp_path):
    case = _case(tmp_path / "nobank", ASSETS, capacitors=[])
    op = operate(case)
    curve = reactive_value_curve(case, op, "C1", 35.0, n_points=9)
    marginal = curve["marginal_saving_per_kvar"].to_numpy()[1:]
    # the first kVAr are worth more than the last: value falls once the reactive allowance is met
    assert marginal[0] > 0 and marginal[-1] < 0.5 * marginal[0]
    assert_allclose(curve["capacitor_bank_cost"], curve["supplied_q_kvar"] * 35.0)


def test_bill_command_prints_months_by_line_item(capsys):
    demo = Path(__file__).resolve().parents[1] / "data" / "demo"
    assert main(["bill", str(demo), "--site", "KGQ", "--reactive-sweep", "KGQ-CR01"]) == 0
    out = capsys.readouterr().out
    # (the months of the bills, beside the model's after it, are the demo's bill history of 2024)
    bills_part = out.split("against the bills the case gives")[0]
    assert "Site KGQ" in out and "2025-01" in out and "2025-12" in out and "2024-12" not in bills_part
    assert "capacitor bank" in out and "qualified persons" in out
    assert "\n  year " in out and "line_item" not in out  # a yearly total row; months headed as such


def test_changed_pairs_are_the_numpy_rule():
    # the compiled pass of bill_savings._changed_pairs (no curve book; arrays by option, asset, interval) against its
    # rule in plain numpy: an option that applies changes an asset when max |kW - today's kW| > 0 or
    # max |kVAr - today's kVAr| > 0 over the intervals (a NaN difference makes the max NaN, which is not > 0)
    from models.bill_savings import _changed_pairs

    rng = np.random.default_rng(5)
    n_s, n_o, n_t = 7, 5, 48
    p = np.repeat(rng.uniform(0, 10, (1, n_s, n_t)), n_o, axis=0)
    q = np.repeat(rng.uniform(-3, 3, (1, n_s, n_t)), n_o, axis=0)
    p[2, 1, 17] += 0.5           # a kW change in one interval
    q[3, 2, 40] -= 1e-9          # a tiny kVAr change
    p[1, 3, 5] = np.nan          # NaN beside an otherwise unchanged row
    p[4, 4, :] *= 0.9            # a kW change everywhere
    q[4, 4, 9] = np.nan          # and a NaN in its kVAr
    applies = rng.uniform(size=(n_s, n_o)) > 0.2
    applies[:, 0] = True
    applies[[1, 2, 4, 3], [2, 3, 4, 1]] = True
    js, os_ = _changed_pairs(p, q, applies)
    got = np.zeros((n_s, n_o), dtype=bool)
    got[js, os_] = True
    with np.errstate(invalid="ignore"):
        dp = np.max(np.abs(p - p[:1]), axis=2).T   # (n_s, n_o)
        dq = np.max(np.abs(q - q[:1]), axis=2).T
    expected = applies & ((dp > 0) | (dq > 0))
    expected[:, 0] = False
    assert_array_equal(got, expected)
    assert got[1, 2] and got[2, 3] and not got[3, 1] and got[4, 4]


def test_a_saving_split_by_component_carries_each_charges_own_taxes():
    # Hand calculation, docs/derivations/billing-site-and-attribution.md T1: a 5 % levy on energy, then 19 %
    # VAT on everything; energy -1,756.2168, demand -325.3372, reactive +1,628.2915 untaxed (today less option)
    from models.bill_savings import _category_savings
    from models.tariff import Tax

    taxes = (Tax("levy", 5.0, "energy_charges"), Tax("VAT", 19.0, "all_charges_and_earlier_taxes"))
    names = ["energy:all", "demand:peak", "reactive:lagging", "tax:levy", "tax:VAT"]
    today = np.array([10_000.0, 2_000.0, 3_000.0])
    option = today - np.array([-1756.2168, -325.3372, 1628.2915])

    def with_taxes(charges):  # the bill's own arithmetic, written out: levy on energy, VAT on all and the levy
        levy = 0.05 * charges[0]
        return np.r_[charges, levy, 0.19 * (charges.sum() + levy)]

    saving = _category_savings(names, with_taxes(today), with_taxes(option)[None, :], taxes)[0]
    assert_allclose(saving, [-2194.39, -387.15, 1937.67, 0.0], atol=0.005)  # energy, demand, reactive, fixed
    assert_allclose(saving.sum(), -643.88, atol=0.005)


def test_a_power_factor_adjustment_saving_is_reactive_and_keeps_its_demand_tax():
    # hand calculation: a 10 % tax on the demand charges (which include the power-factor adjustment, as the bill
    # levies it); changes energy 100, demand 50, power-factor adjustment 20: energy 100, demand 50 x 1.1 = 55,
    # reactive 20 x 1.1 = 22 (the adjustment is the price of the reactive power), fixed 0
    from models.bill_savings import _category_savings
    from models.tariff import Tax

    names = ["energy:all", "demand:peak", "pf adjustment:peak", "tax:demand levy"]
    today = np.array([1000.0, 500.0, 100.0, 60.0])  # the tax: 10 % of 500 + 100
    option = np.array([900.0, 450.0, 80.0, 53.0])   # 10 % of 450 + 80
    saving = _category_savings(names, today, option[None, :], (Tax("demand levy", 10.0, "demand_charges"),))[0]
    assert_allclose(saving, [100.0, 55.0, 22.0, 0.0], atol=1e-9)


def test_under_a_contract_only_the_demand_above_it_is_saved():
    # hand calculation, docs/derivations/billing-demand.md case D9: a 500 kW contract, February's peak 650 kW at
    # 20 per kW above it; lowering the peak to 550 kW saves 2 000, to 450 kW only the 150 kW above the contract
    # (3 000); January's 400 kW peak is under the contract, so lowering it saves nothing
    import pandas as pd

    from models.bill_savings import SiteSetup, site_savings
    from models.site import Site
    from models.tariff import tariff_from_dict

    t, problems = tariff_from_dict({"tariff": {"name": "contract (invented)", "currency": "EUR", "time_zone": "UTC"},
                                    "periods": [{"code": "all"}],
                                    "demand": [{"name": "d", "price_per_kw_month": 10.0, "window_min": 60,
                                                "contracted_kw": 500.0, "excess_price_per_kw_month": 20.0}]})
    assert t is not None, problems
    idx = pd.date_range("2025-01-01", "2025-03-01", freq="h", tz="UTC", inclusive="left")
    today = np.where(idx.month == 1, 300.0, 200.0)
    jan, feb = idx.get_loc(pd.Timestamp("2025-01-20 09:00", tz="UTC")), idx.get_loc(pd.Timestamp("2025-02-11 14:00", tz="UTC"))
    today[jan], today[feb] = 400.0, 650.0
    options = [today.copy() for _ in range(4)]
    options[1][feb] = 550.0
    options[2][feb] = 450.0
    options[3][jan] = 300.0
    p = np.stack(options)[:, None, :]
    out = site_savings(SiteSetup("S", t, Site(), None), idx, 1.0, p, np.zeros_like(p), np.ones((1, 4), dtype=bool),
                       np.array(["keep", "ie4", "ie4", "ie4"]), 35.0)
    assert_allclose(out["saving"][0].sum(axis=-1), [0.0, 2_000.0, 3_000.0, 0.0], atol=1e-9)
    assert_allclose(out["saving"][0, :, 1], [0.0, 2_000.0, 3_000.0, 0.0], atol=1e-9)  # all of it demand


def test_a_coincident_peak_charge_is_saved_only_where_the_motor_runs_at_the_peak_times():
    # hand calculation, docs/derivations/billing-demand.md case D10: two peak hours (15 July 17:00, 5 August
    # 16:00) at 5 per kW-month, every month of the year. A motor drawing 20 kW less in both hours saves
    # 20 x 5 x 12 = 1 200; one drawing 20 kW less in one of them saves half of that (the mean of the two), 600; one
    # that draws less only in the mornings saves nothing
    import pandas as pd

    from models.bill_savings import SiteSetup, site_savings
    from models.site import Site
    from models.tariff import tariff_from_dict

    t, problems = tariff_from_dict({"tariff": {"name": "cp (invented)", "currency": "EUR", "time_zone": "UTC"},
                                    "periods": [{"code": "all"}],
                                    "coincident_peak": [{"name": "tx", "price_per_kw_month": 5.0,
                                                         "times": ["2025-07-15 17:00", "2025-08-05 16:00"]}]})
    assert t is not None, problems
    idx = pd.date_range("2025-01-01", "2026-01-01", freq="h", tz="UTC", inclusive="left")
    today = np.full(len(idx), 100.0)
    jul, aug = idx.get_loc(pd.Timestamp("2025-07-15 17:00", tz="UTC")), idx.get_loc(pd.Timestamp("2025-08-05 16:00", tz="UTC"))
    both, one, mornings = today.copy(), today.copy(), today.copy()
    both[[jul, aug]] = 80.0
    one[jul] = 80.0
    mornings[idx.hour < 12] = 80.0
    p = np.stack([today, both, one, mornings])[:, None, :]
    out = site_savings(SiteSetup("S", t, Site(), None), idx, 1.0, p, np.zeros_like(p), np.ones((1, 4), dtype=bool),
                       np.array(["keep", "ie4", "ie4", "ie4"]), 35.0)
    assert_allclose(out["saving"][0].sum(axis=-1), [0.0, 1_200.0, 600.0, 0.0], atol=1e-9)
    assert_allclose(out["saving"][0, :, 1], [0.0, 1_200.0, 600.0, 0.0], atol=1e-9)  # in the demand component


@pytest.mark.parametrize("rolling, expected", [(True, 1_000.0), (False, 0.0)])
def test_a_rolling_demand_saving_counts_the_peak_between_two_clock_windows(rolling, expected):
    # hand calculation: a motor drawing 200 kW every 15 minutes of February but 400 kW at 10:15 and 10:30 on the
    # 11th. A 30-minute rolling window ending at 10:30 reads 400 kW, the month's peak; block windows read (200 + 400)
    # / 2 = 300 at 10:00 and 10:30. The option draws 200 kW at 10:30: the rolling peak falls to 300 (the windows
    # ending 10:15 and 10:30), a saving of 100 kW x 10 = 1 000; the block peak stays 300 (the window at 10:00)
    import pandas as pd

    from models.bill_savings import SiteSetup, site_savings
    from models.site import Site
    from models.tariff import tariff_from_dict

    t, problems = tariff_from_dict({"tariff": {"name": "rolling (invented)", "currency": "EUR", "time_zone": "UTC"},
                                    "periods": [{"code": "all"}],
                                    "demand": [{"name": "d", "price_per_kw_month": 10.0, "window_min": 30,
                                                "rolling": rolling}]})
    assert t is not None, problems
    idx = pd.date_range("2025-02-01", "2025-03-01", freq="15min", tz="UTC", inclusive="left")
    today = np.full(len(idx), 200.0)
    at = idx.get_loc(pd.Timestamp("2025-02-11 10:15", tz="UTC"))
    today[at:at + 2] = 400.0
    option = today.copy()
    option[at + 1] = 200.0
    p = np.stack([today, option])[:, None, :]
    out = site_savings(SiteSetup("S", t, Site(), None), idx, 0.25, p, np.zeros_like(p), np.ones((1, 2), dtype=bool),
                       np.array(["keep", "ie4"]), 35.0)
    assert_allclose(out["saving"][0].sum(axis=-1), [0.0, expected], atol=1e-9)


@pytest.mark.parametrize("billing_day, expected", [(1, 1_000.0), (15, 4_000.0)])
def test_a_demand_saving_follows_the_billing_months_of_the_read_day(billing_day, expected):
    # hand calculation (docs/derivations/billing-demand.md case D11's peaks): 100 kW all 2025, 500 kW at 10 Jan 12:00
    # and 400 kW at 20 Jan 12:00, 10 EUR per kW-month. An option drawing 100 kW at 10 Jan 12:00: in calendar months
    # January's peak falls to 400, (500 - 400) x 10 = 1 000; with billing months from the 15th the 10 January peak is
    # alone in the billing month from 15 December, which falls to 100: (500 - 100) x 10 = 4 000
    import pandas as pd

    from models.bill_savings import SiteSetup, site_savings
    from models.site import Site
    from models.tariff import tariff_from_dict

    t, problems = tariff_from_dict({"tariff": {"name": "read day (invented)", "currency": "EUR", "time_zone": "UTC",
                                               "billing_day": billing_day},
                                    "periods": [{"code": "all"}],
                                    "demand": [{"name": "d", "price_per_kw_month": 10.0, "window_min": 60}]})
    assert t is not None, problems
    idx = pd.date_range("2025-01-01", "2026-01-01", freq="h", tz="UTC", inclusive="left")
    today = np.full(len(idx), 100.0)
    first, second = idx.get_loc(pd.Timestamp("2025-01-10 12:00", tz="UTC")), idx.get_loc(pd.Timestamp("2025-01-20 12:00", tz="UTC"))
    today[first], today[second] = 500.0, 400.0
    option = today.copy()
    option[first] = 100.0
    p = np.stack([today, option])[:, None, :]
    out = site_savings(SiteSetup("S", t, Site(), None), idx, 1.0, p, np.zeros_like(p), np.ones((1, 2), dtype=bool),
                       np.array(["keep", "ie4"]), 35.0)
    assert_allclose(out["saving"][0].sum(axis=-1), [0.0, expected], atol=1e-9)


def test_bill_command_says_when_billing_months_start_on_a_read_day(tmp_path, capsys):
    # a tariff with billing_day = 15 (docs/tariffs.md): the monthly bill names its months by the month they start in
    # and says so
    demo = Path(__file__).resolve().parents[1] / "data" / "demo"
    copy = tmp_path / "demo"
    shutil.copytree(demo, copy)
    tariff = copy / "tariffs" / "example_kva_demand.toml"
    tariff.write_text(tariff.read_text(encoding="utf-8").replace('time_zone = "Europe/Berlin"\n',
                                                                  'time_zone = "Europe/Berlin"\nbilling_day = 15\n', 1),
                      encoding="utf-8")
    assert main(["bill", str(copy), "--site", "KGQ"]) == 0
    out = capsys.readouterr().out
    assert "billing months start on day 15 of each month" in out and "2025-12" in out
    assert main(["bill", str(demo), "--site", "KGQ"]) == 0
    assert "billing months start" not in capsys.readouterr().out


def test_kvar_demand_and_a_power_factor_percentage_are_reactive_savings_priced_alike_on_the_reduced_tariff():
    # hand calculation, docs/derivations/billing-reactive.md cases R6 and R7: January, 1,000 kW and 700 kVAr
    # (hour 6: 900 kVAr). A 300 kVAr bank (400 kVAr, hour 6 600 kVAr) removes the 280 kVAr of kVAr demand
    # (140.00 USD) and takes the month's PF from 0.819128 to 744,000 / sqrt(744,000² + 297,800²) = 0.928391:
    # 1.08047 % of 74,400 = 803.87 in place of 7,876.84. Saving 140.00 + 7,072.97 = 7,212.97, all of it reactive,
    # and the kVAr-only pricing (a tariff cut to its kVAr clauses, the energy charge kept under the percentage)
    # finds the same
    import pandas as pd

    from models.bill_savings import SAVING_COMPONENTS, SiteSetup, kvar_clauses, site_savings, tariff_depends_on_kvar
    from models.site import Site
    from models.tariff import tariff_from_dict

    t, problems = tariff_from_dict({
        "tariff": {"name": "pf clauses (invented)", "currency": "USD", "time_zone": "UTC"},
        "periods": [{"code": "all"}], "energy": {"price_per_kwh": {"all": 0.10}},
        "reactive_demand": [{"name": "kvar", "price_per_kvar_month": 0.50, "free_kvar_per_kw": 0.62, "window_min": 60}],
        "energy_power_factor": [{"name": "pf", "penalty": [{"below": 0.95, "percent_per_point": 0.5},
                                                            {"below": 0.90, "percent_per_point": 1.0}],
                                 "rebate": [{"above": 0.95, "percent_per_point": 0.5}]}]}, "t.toml")
    assert t is not None, problems
    assert tariff_depends_on_kvar(t)
    assert kvar_clauses(t).energy is not None and kvar_clauses(t).reactive_demand == t.reactive_demand
    idx = pd.date_range("2025-01-01", periods=744, freq="h", tz="UTC")
    p_today = np.full(744, 1000.0)
    q_today = np.full(744, 700.0)
    q_today[5] = 900.0
    p = np.stack([p_today, p_today])[:, None, :]
    q = np.stack([q_today, q_today - 300.0])[:, None, :]
    out = site_savings(SiteSetup("S", t, Site(), None), idx, 1.0, p, q, np.ones((1, 2), dtype=bool),
                       np.array(["keep", "capacitor"]), 35.0)
    assert_allclose(out["saving"][0].sum(axis=-1), [0.0, 7_212.97], atol=0.005)
    assert_allclose(out["saving"][0, 1, SAVING_COMPONENTS.index("reactive")], 7_212.97, atol=0.005)
    assert_allclose(out["reactive_saving"][0], [0.0, 7_212.97], atol=0.005)


def test_a_power_factor_percentage_of_all_charges_keeps_the_whole_tariff_for_kvar_only_savings():
    # with base = "all_charges" the percentage's change multiplies every charge (fixed and kW demand too): the
    # kVAr-only pricing must keep them, or its saving would be the percentage's change times the energy alone.
    # Checked against the direct difference of two full bills (models.billing.bill, priced on its own)
    import pandas as pd

    from models.bill_savings import SiteSetup, kvar_clauses, site_savings
    from models.billing import bill, bill_total
    from models.site import Site
    from models.tariff import tariff_from_dict

    t, problems = tariff_from_dict({
        "tariff": {"name": "pf of the bill (invented)", "currency": "USD", "time_zone": "UTC"},
        "periods": [{"code": "all"}], "energy": {"price_per_kwh": {"all": 0.10}},
        "fixed": [{"name": "meter", "charge_per_month": 500.0}],
        "demand": [{"name": "kw", "price_per_kw_month": 12.0, "window_min": 60}],
        "energy_power_factor": [{"name": "pf", "base": "all_charges",
                                 "penalty": [{"below": 0.95, "percent_per_point": 1.0}]}]}, "t.toml")
    assert t is not None, problems
    assert kvar_clauses(t) is t
    idx = pd.date_range("2025-01-01", periods=744, freq="h", tz="UTC")
    p_today = np.full(744, 1000.0)
    q_today = np.full(744, 700.0)
    q_new = q_today - 300.0
    direct = bill_total(bill(t, idx, p_today, q_today)) - bill_total(bill(t, idx, p_today, q_new))
    p = np.stack([p_today, p_today])[:, None, :]
    q = np.stack([q_today, q_new])[:, None, :]
    out = site_savings(SiteSetup("S", t, Site(), None), idx, 1.0, p, q, np.ones((1, 2), dtype=bool),
                       np.array(["keep", "capacitor"]), 35.0)
    assert direct > 0
    assert_allclose(out["saving"][0, 1].sum(), direct, rtol=1e-9)
    assert_allclose(out["reactive_saving"][0, 1], direct, rtol=1e-9)
