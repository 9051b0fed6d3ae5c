"""Validation record for the first years after a change under a demand ratchet.

A ratchet bills at least a share of the highest demand of the previous months. The analysis bills a
typical year repeated, so once the look-back has passed every year looks back at a year with the project
in service; the first year (and the second and third, for a look-back over 12 or 24 months) still looks
back at the months before the change (today's peaks). The bill saving of those years falls short of the
yearly one, and the cash flows carry the shortfall.

Sources: hand calculations in docs/derivations/billing-demand.md, cases D7 (the yearly saving) and D8
(the years after the change), and docs/derivations/finance-cashflows.md, example F (the cash flows).
"""

from __future__ import annotations

import tomllib
from dataclasses import replace

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose

from models import cashflows as cf
from models import scenario
from models.bill_savings import RATCHET_YEARS, SiteSetup, site_savings
from models.billing import bill
from models.finance import FinanceAssumptions
from models.site import Site
from models.tariff import tariff_from_dict

EXACT = dict(rtol=0, atol=1e-9)  # sums of a few products of exact decimals: only float rounding

RATCHET = '''
[tariff]
name = "flat demand with ratchet (invented)"
currency = "EUR"
time_zone = "UTC"
[[periods]]
code = "all"
[[demand]]
name = "d"
price_per_kw_month = 10.0
window_min = 60
ratchet_frac = 0.8
ratchet_months = 11
'''
TAX = '[[taxes]]\nname = "vat"\nrate_pct = 10.0\nbase = "all_charges"\n'


def _tariff(text: str):
    t, problems = tariff_from_dict(tomllib.loads(text), source="test.toml")
    assert t is not None, [str(p) for p in problems]
    return t


@pytest.fixture(scope="module")
def year():
    return pd.date_range("2025-01-01", "2026-01-01", freq="h", tz="UTC", inclusive="left")


def _july_peak(index) -> np.ndarray:
    """100 kW throughout, 200 kW in every hour of July (case D7's motor today)."""
    return np.where(index.month == 7, 200.0, 100.0)


class TestFirstYearBill:
    def test_the_first_year_still_bills_todays_july_peak(self, year):
        # hand calculation, billing-demand.md case D8: January to June read the July before the change
        t = _tariff(RATCHET)
        flat = np.full(len(year), 100.0)
        first = bill(t, year, flat, 0 * flat, repeat_year=None, before_p_kw=_july_peak(year), before_q_kvar=0 * flat)
        billed = first.groupby("month")["quantity"].sum().to_numpy()
        assert_allclose(billed, [160.0] * 6 + [100.0] * 6, **EXACT)
        assert_allclose(first["amount"].sum(), 15_600.0, **EXACT)
        # every later year: 1 200 kW-months (case D7)
        later = bill(t, year, flat, 0 * flat, repeat_year=None)
        assert_allclose(later["amount"].sum(), 12_000.0, **EXACT)

    def test_the_year_before_needs_both_meters(self, year):
        flat = np.full(len(year), 100.0)
        with pytest.raises(ValueError, match="both before_p_kw and before_q_kvar"):
            bill(_tariff(RATCHET), year, flat, 0 * flat, before_p_kw=flat)

    def test_a_lone_year_has_no_months_before_it_to_read(self, year):
        # billed as it stands (repeat_year False): the months before the series are unknown, so the year
        # before the change is not read either (case D7, lone year: 1 200 kW-months for the option)
        t = _tariff(RATCHET)
        flat = np.full(len(year), 100.0)
        first = bill(t, year, flat, 0 * flat, repeat_year=False, before_p_kw=_july_peak(year), before_q_kvar=0 * flat)
        assert_allclose(first["amount"].sum(), 12_000.0, **EXACT)


class TestSiteSavings:
    @staticmethod
    def _arrays(index, option_kw):
        today = _july_peak(index)
        p = np.stack([today, option_kw])[:, None, :]  # (options, assets, steps): one asset, today and one option
        return p, np.zeros_like(p), np.ones((1, 2), dtype=bool), np.array(["keep", "ie4"])

    @pytest.mark.parametrize("tax, factor", [("", 1.0), (TAX, 1.1)])
    def test_an_option_that_removes_the_peak_saves_less_in_its_first_year(self, year, tax, factor):
        # cases D7 and D8: yearly saving 7 600, first year 4 000 (19 600 - 15 600), so the shortfall is 3 600,
        # all of it demand; a 10 % tax on every charge scales both (hand calculation: x 1.1)
        p, q, applies, tech = self._arrays(year, np.full(len(year), 100.0))
        out = site_savings(SiteSetup("S", _tariff(RATCHET + tax), Site(), None), year, 1.0, p, q, applies, tech, 35.0)
        assert_allclose(out["saving"][0, 1].sum(), 7_600.0 * factor, rtol=1e-12)
        assert_allclose(out["ratchet_shortfall"][0, 1, 0], [0.0, 3_600.0 * factor, 0.0, 0.0], rtol=1e-12, atol=1e-9)
        assert np.all(out["ratchet_shortfall"][0, 0] == 0.0)  # today's motor does not change
        assert np.all(out["ratchet_shortfall"][0, 1, 1:] == 0.0)  # an 11-month look-back: the first year alone

    def test_an_option_that_adds_a_peak_costs_less_in_its_first_year(self, year):
        # the reverse change (today flat, the option peaks in July): the first year reads today's flat months,
        # so January to June bill 100 kW, not 160. Hand calculation (case D8, reversed): yearly saving
        # 12 000 - 19 600 = -7 600; first year 12 000 - 16 000 = -4 000; shortfall -3 600 (a first-year gain)
        t = _tariff(RATCHET)
        flat = np.full(len(year), 100.0)
        p = np.stack([flat, _july_peak(year)])[:, None, :]
        out = site_savings(SiteSetup("S", t, Site(), None), year, 1.0, p, np.zeros_like(p),
                           np.ones((1, 2), dtype=bool), np.array(["keep", "ie4"]), 35.0)
        assert_allclose(out["saving"][0, 1].sum(), -7_600.0, rtol=1e-12)
        assert_allclose(out["ratchet_shortfall"][0, 1].sum(), -3_600.0, rtol=1e-12)

    def test_without_a_ratchet_the_first_year_saves_the_same(self, year):
        no_ratchet = RATCHET.replace("ratchet_frac = 0.8\nratchet_months = 11\n", "")
        p, q, applies, tech = self._arrays(year, np.full(len(year), 100.0))
        out = site_savings(SiteSetup("S", _tariff(no_ratchet), Site(), None), year, 1.0, p, q, applies, tech, 35.0)
        assert out["saving"][0, 1].sum() == pytest.approx(1_000.0)  # July: 100 kW x 10 (hand calculation)
        assert np.all(out["ratchet_shortfall"] == 0.0)


class TestCashFlows:
    def test_the_first_year_in_service_carries_the_shortfall(self):
        # docs/derivations/finance-cashflows.md example F: 1 000 now, 7 600 a year of demand saving, 3 600 short
        # in year 1; no escalation, life 3 years over a 3-year horizon (no residual)
        p = cf.ProjectInputs(project_id=["A/IE4"], capex_equipment=1000.0, savings_demand_per_yr=7600.0,
                             option_life_yr=3.0, ratchet_shortfall=[[0.0, 3600.0, 0.0, 0.0, 0.0]])
        flows = cf.build_cash_flows(p, FinanceAssumptions(horizon_yr=3, escalation_demand_frac=0.0))
        assert_allclose(flows.net()[0], [-1000.0, 4000.0, 7600.0, 7600.0], **EXACT)

    def test_a_change_at_failure_carries_it_in_the_year_after_the_purchase(self):
        # example F, at failure: bought in year 1 (remaining life 1), so year 2 is its first year in service;
        # demand escalating 10 %/yr: 7 600 x 1.1^3 = 10 115.6 in year 3, (7 600 - 3 600) x 1.1^2 = 4 840 in year 2
        p = cf.ProjectInputs(project_id=["A/IE4"], capex_equipment=1000.0, savings_demand_per_yr=7600.0,
                             option_life_yr=3.0, existing_remaining_life_yr=1.0,
                             ratchet_shortfall=[[0.0, 3600.0, 0.0, 0.0, 0.0]])
        a = FinanceAssumptions(horizon_yr=3, escalation_demand_frac=0.1, replacement_mode="replace_at_failure")
        assert_allclose(cf.build_cash_flows(p, a).component("savings_demand")[0], [0.0, 0.0, 4840.0, 10115.6],
                        rtol=1e-12)

    def test_the_base_cases_own_first_year_is_given_back(self):
        # example F, base case: the must-spend item bought at failure in year 1 saves 2 000 a year and 500 less in
        # its first year (year 2); the option, bought now, saves 7 600 - 3 600 in year 1, then 7 600 - 2 000 + 500
        # in year 2 and 7 600 - 2 000 in year 3
        p = cf.ProjectInputs(project_id=["A/IE4"], capex_equipment=1000.0, savings_demand_per_yr=7600.0,
                             option_life_yr=3.0, baseline_capex=400.0, baseline_life_yr=3.0,
                             existing_remaining_life_yr=1.0,
                             baseline_savings_per_yr=[[0.0, 2000.0, 0.0, 0.0, 0.0]],
                             ratchet_shortfall=[[0.0, 3600.0, 0.0, 0.0, 0.0]],
                             baseline_ratchet_shortfall=[[0.0, 500.0, 0.0, 0.0, 0.0]])
        flows = cf.build_cash_flows(p, FinanceAssumptions(horizon_yr=3, escalation_demand_frac=0.0))
        assert_allclose(flows.component("savings_demand")[0], [0.0, 4000.0, 6100.0, 5600.0], **EXACT)

    def test_a_shortfall_must_be_finite(self):
        p = cf.ProjectInputs(project_id=["A/IE4"], ratchet_shortfall=[[0.0, np.nan, 0.0, 0.0, 0.0]])
        with pytest.raises(ValueError, match="ratchet_shortfall must be finite"):
            cf.build_cash_flows(p, FinanceAssumptions(horizon_yr=3))


def test_a_projects_npv_falls_by_its_discounted_shortfall(demo_run_physics):
    # one demo project given a 1 000 demand shortfall: its NPV falls by 1 000 x (1 + e_demand) / (1 + d) x
    # (1 - tax) (finance-cashflows.md example F, "Its NPV": the shortfall sits in year 1 only, escalated and
    # taxed like the demand saving it reduces), and results.csv names it
    case, phys = demo_run_physics
    a = case.finance
    base = scenario.economics(case, phys, a, with_risk=False)
    r = base.results
    i = int(np.flatnonzero((r["option_id"] == "ie4").to_numpy() & (r["existing_remaining_life_yr"] > 2).to_numpy()
                           & ~r["failed"].to_numpy(dtype=bool))[0])
    asset, option = str(r["asset_id"].iloc[i]), str(r["option_id"].iloc[i])
    ai = list(phys.operation.asset_ids).index(asset)
    oi = list(phys.operation.option_ids).index(option)
    short = np.zeros(phys.savings.saving.shape[:2] + (RATCHET_YEARS, phys.savings.saving.shape[2]))
    short[ai, oi, 0, 1] = 1000.0
    bumped = scenario.economics(case, replace(phys, savings=replace(phys.savings, ratchet_shortfall=short)), a,
                                with_risk=False)
    got = bumped.results.iloc[i]
    assert got["ratchet_shortfall"] == pytest.approx(1000.0 * float(a.energy_price_factor))
    expected = (1000.0 * float(a.energy_price_factor) * (1.0 + a.escalation_demand_frac)
                / (1.0 + a.discount_rate_frac) * (1.0 - a.tax_rate_frac))
    assert base.results["npv"].iloc[i] - got["npv"] == pytest.approx(expected, rel=1e-9)
    # every other project's NPV is untouched
    others = np.arange(len(r)) != i
    assert np.array_equal(base.results["npv"].to_numpy()[others], bumped.results["npv"].to_numpy()[others])


#: A steep demand charge (invented), so that an option pays for the pump and is the one recommended.
DEMAND_PRICE = 200.0
RATCHET_TARIFF_FILE = '''[tariff]
name = "energy and steep demand with ratchet (invented)"
currency = "EUR"
time_zone = "UTC"
[[periods]]
code = "all"
[energy]
price_per_kwh = { all = 0.10 }
[[demand]]
name = "d"
price_per_kw_month = 200.0
window_min = 60
ratchet_frac = 0.8
ratchet_months = 11
'''


@pytest.fixture(scope="module")
def july_pump_case(tmp_path_factory):
    """One site on a ratchet tariff whose only motor, a 75 kW pump, runs at 90 % load in July alone: the
    site's July peak sets the ratchet of every other month (invented)."""
    import casebuilder as cb
    from models.case import load_case

    folder = tmp_path_factory.mktemp("july") / "case"
    asset = ["P1", "S1", "Summer cooling pump", "pump", "75", "4", "50", "400", "IE2", "", "", "1475", "2012", "0",
             "fixed", "LP1", "", "", "high"]
    hours = pd.date_range("2025-01-01", "2026-01-01", freq="h", inclusive="left")
    profiles = [["LP1", t.strftime("%Y-%m-%d %H:%M"), "90" if t.month == 7 else "0"] for t in hours]
    cb.write_case(folder, assets=[asset], sites=[["S1", "Test works", "50", "0.9"]], capacitors=[], duty=[],
                  profiles=profiles, case_toml='[case]\nname = "Ratchet case"\ncurrency = "EUR"\ntime_zone = "UTC"\n')
    (folder / "tariffs").mkdir()
    (folder / "tariffs" / "ratchet.toml").write_text(RATCHET_TARIFF_FILE, encoding="utf-8")
    sites = (folder / "sites.csv").read_text(encoding="utf-8").splitlines()
    (folder / "sites.csv").write_text(sites[0] + ",tariff_file\n" + sites[1] + ",ratchet.toml\n", encoding="utf-8")
    case, problems = load_case(folder)
    assert case is not None, [str(p) for p in problems]
    return case, scenario.run(case, case.finance, with_risk=False)


def test_a_summer_peak_s_saving_waits_for_the_ratchet_in_a_whole_run(july_pump_case):
    # Hand reasoning (billing-demand.md case D8, "In symbols", with the pump's own July input): July's site peak
    # is 50 kW + the pump's input, every other month 50 kW, under a floor of 0.8 x July's peak. An option that draws
    # dP kW less in July saves c x (dP + 11 x 0.8 dP) = 9.8 c dP a year on demand (c the price per kW-month), and
    # its first year 6 x 0.8 x dP x c = 4.8 c dP less (January to June still read today's July). dP is read from
    # the option's and today's July input.
    case, result = july_pump_case
    op = result.physics.operation
    july = op.index.month == 7
    r = result.results.set_index("option_id")
    checked = 0
    for o, option_id in enumerate(op.option_ids):
        if option_id not in r.index or option_id == "keep" or not op.applies[0, o]:
            continue
        dp = float(op.p_kw[0, 0][july].max() - op.p_kw[o, 0][july].max())
        if dp <= 0.01:
            continue
        checked += 1
        assert r.loc[option_id, "saving_demand_per_yr"] == pytest.approx(9.8 * DEMAND_PRICE * dp, rel=1e-9), option_id
        assert r.loc[option_id, "ratchet_shortfall"] == pytest.approx(4.8 * DEMAND_PRICE * dp, rel=1e-9), option_id
    assert checked >= 2
    # the cash flows carry it in year 1 (replace now): the demand saving of year 1 is the yearly one less it,
    # before tax, escalated once
    a = result.assumptions
    best = r[r["ratchet_shortfall"] > 0].index[0]
    cash = result.cashflows
    demand = cash[(cash["option_id"] == best) & (cash["component"].astype(str) == "savings_demand")].set_index("year")["amount"]
    grow = 1.0 + a.escalation_demand_frac
    assert demand.loc[1] == pytest.approx((r.loc[best, "saving_demand_per_yr"] - r.loc[best, "ratchet_shortfall"])
                                          * grow, rel=1e-9)
    assert demand.loc[2] == pytest.approx(r.loc[best, "saving_demand_per_yr"] * grow ** 2, rel=1e-9)
    # the life-cycle costs read the same flows: today's less the option's is still the option's NPV
    # (docs/outputs.md, life_cycle_cost)
    for option_id in r.index[r["ratchet_shortfall"] > 0]:
        assert (r.loc["keep", "life_cycle_cost"] - r.loc[option_id, "life_cycle_cost"]
                == pytest.approx(r.loc[option_id, "npv"], rel=1e-9, abs=1e-6)), option_id


def test_the_asset_page_and_the_record_say_the_first_year_saves_less(july_pump_case):
    from dashboard import services
    from models.pack import content
    from models.pack.decision_record import record_context

    case, result = july_pump_case
    r = result.results
    i = int(np.argmax(r["ratchet_shortfall"].to_numpy(dtype=float)))
    said = services.ratchet_text(result, "P1", "EUR")
    assert said.startswith("The site's demand ratchet still bills today's peaks for a while after a change (the first "
                           f"year in service, longer for a look-back over 12 months): {r['label'].iloc[i]} saves EUR ")
    scope = content.select_scope(case, result, assets=["P1"], plan=False)
    rec = scope.recommended.set_index("asset_id").loc["P1"]
    reasons = " ".join(record_context(case, result, scope, "P1")["reasons"])
    assert rec["option_id"] != "keep"
    short = float(r.set_index("option_id").loc[rec["option_id"], "ratchet_shortfall"])
    assert short > 0.5
    assert ("While the site's demand ratchet still bills today's peaks (the first year in service, longer for a "
            f"look-back over 12 months) it saves {content.money(short, 'EUR')} less in all") in reasons
    # the month it is taken to come into service: the case gives none, so the profiles' first (January 2025)
    assert content.in_service_words(case, result) == "January (the analysis year's first month)"
    assert "in service from the start of January (the analysis year's first month)" in reasons
    moved = replace(case, settings=replace(case.settings, in_service_month=8))
    assert content.in_service_words(moved, result) == "August"
    assert "in service from the start of August. The month moves it" in services.ratchet_text(result, "P1", "EUR", "August")


def test_without_a_ratchet_nothing_is_said(demo_run_physics):
    from dashboard import services

    case, phys = demo_run_physics
    result = scenario.economics(case, phys, case.finance, with_risk=False)
    kgq = result.results.loc[result.results["site_id"] == "KGQ", "asset_id"].iloc[0]  # a kVA tariff without ratchet
    assert services.ratchet_text(result, kgq, "EUR") == ""
    assert (result.results.loc[result.results["site_id"] == "KGQ", "ratchet_shortfall"] == 0.0).all()


def test_the_risk_register_names_the_projects_the_ratchet_holds_back(july_pump_case):
    from models.pack import content

    case, result = july_pump_case
    scope = content.select_scope(case, result, assets=["P1"], plan=False)
    rec = scope.recommended.set_index("asset_id").loc["P1"]
    short = float(result.results.set_index("option_id").loc[rec["option_id"], "ratchet_shortfall"])
    register = content.risk_register(case, result, scope)
    row = register[register["item"] == "Demand ratchet holds back the first savings"].iloc[0]
    assert row["assets"] == "P1"
    assert row["detail"].startswith("while the site's ratchet still bills today's peaks (the first year in service, longer "
                                    f"for a look-back over 12 months), 1 recommended project saves {content.money(short, 'EUR')} less")


def test_the_register_says_nothing_of_a_ratchet_that_holds_nothing_back(demo_run_physics):
    from models.pack import content

    case, phys = demo_run_physics
    result = scenario.economics(case, phys, case.finance, with_risk=False)
    scope = content.select_scope(case, result)
    # the precondition: none of the demo's recommended projects is held back (its ratchet site's peaks stay)
    short = result.results.set_index(["asset_id", "option_id"])["ratchet_shortfall"]
    rec = pd.MultiIndex.from_arrays([scope.recommended["asset_id"], scope.recommended["option_id"]])
    assert len(rec) and (short.reindex(rec).fillna(0.0) <= 0.5).all()
    register = content.risk_register(case, result, scope)
    assert "Demand ratchet holds back the first savings" not in set(register["item"])


class TestLongLookBacks:
    """A look-back of more than 12 months still reads the year before the change in the second and third years
    (billing-demand.md case D8, "A look-back of 24 months")."""

    @staticmethod
    def _tariff(months: int):
        return _tariff(RATCHET.replace("ratchet_months = 11", f"ratchet_months = {months}"))

    def test_the_second_year_still_bills_last_july_in_its_first_seven_months(self, year):
        # hand calculation: year 2 of a 24-month look-back bills 160 kW January-July, 100 kW after: 16 200; year 3
        # no longer reads the year before: 12 000
        flat = np.full(len(year), 100.0)
        kw = dict(repeat_year=None, before_p_kw=_july_peak(year), before_q_kvar=0 * flat)
        t = self._tariff(24)
        second = bill(t, year, flat, 0 * flat, year_after=2, **kw)
        assert_allclose(second.groupby("month")["quantity"].sum().to_numpy(), [160.0] * 7 + [100.0] * 5, **EXACT)
        assert_allclose(second["amount"].sum(), 16_200.0, **EXACT)
        assert_allclose(bill(t, year, flat, 0 * flat, year_after=1, **kw)["amount"].sum(), 19_200.0, **EXACT)
        assert_allclose(bill(t, year, flat, 0 * flat, year_after=3, **kw)["amount"].sum(), 12_000.0, **EXACT)

    @pytest.mark.parametrize("months, expected", [(11, [3_600.0, 0.0, 0.0]), (12, [4_200.0, 0.0, 0.0]),
                                                  (13, [4_800.0, 0.0, 0.0]), (24, [7_200.0, 4_200.0, 0.0]),
                                                  (36, [7_200.0, 7_200.0, 4_200.0])])
    def test_each_year_s_shortfall(self, year, months, expected):
        # hand calculations (billing-demand.md case D8; every month billed 160 kW instead of 100 costs 60 x 10 = 600):
        # month m (0 = January) of year k reads the July before the change (6 months before it) when
        # (k - 1) x 12 + m + 6 <= months. 11 months: m <= 5, 6 months, 3 600. 12: m <= 6, 7 months, 4 200 (July reads
        # last July at lag 12). 13: m <= 7, 4 800. 24: year 1 all 12 (7 200), year 2 m <= 6 (4 200). 36: 7 200, 7 200,
        # then m <= 6 (4 200). The steady bills are the same for every look-back (each month reads a July).
        p, q, applies, tech = TestSiteSavings._arrays(year, np.full(len(year), 100.0))
        out = site_savings(SiteSetup("S", self._tariff(months), Site(), None), year, 1.0, p, q, applies, tech, 35.0)
        assert_allclose(out["ratchet_shortfall"][0, 1].sum(axis=-1), expected, rtol=1e-12, atol=1e-9)


class TestSeveralYearsOfCashFlows:
    def test_two_years_short_then_the_steady_saving(self):
        # finance-cashflows.md example F, over two years: 7 600 a year, 7 200 then 4 200 short: 400, 3 400, 7 600
        p = cf.ProjectInputs(project_id=["A/IE4"], capex_equipment=1000.0, savings_demand_per_yr=7600.0,
                             option_life_yr=3.0,
                             ratchet_shortfall=[[[0.0, 7200.0, 0.0, 0.0, 0.0], [0.0, 4200.0, 0.0, 0.0, 0.0]]])
        flows = cf.build_cash_flows(p, FinanceAssumptions(horizon_yr=3, escalation_demand_frac=0.0))
        assert_allclose(flows.component("savings_demand")[0], [0.0, 400.0, 3400.0, 7600.0], **EXACT)

    def test_a_year_beyond_the_horizon_is_not_counted(self):
        # example F, bought at failure in year 2 of a 3-year horizon: only the first year in service (year 3) counts
        p = cf.ProjectInputs(project_id=["A/IE4"], capex_equipment=1000.0, savings_demand_per_yr=7600.0,
                             option_life_yr=3.0, existing_remaining_life_yr=2.0,
                             ratchet_shortfall=[[[0.0, 7200.0, 0.0, 0.0, 0.0], [0.0, 4200.0, 0.0, 0.0, 0.0]]])
        a = FinanceAssumptions(horizon_yr=3, escalation_demand_frac=0.0, replacement_mode="replace_at_failure")
        assert_allclose(cf.build_cash_flows(p, a).component("savings_demand")[0], [0.0, 0.0, 0.0, 400.0], **EXACT)


class TestEconomicsCarriesEveryPart:
    """Each part of the economics' handling, checked on the demo physics with a shortfall set by hand."""

    @staticmethod
    def _with(phys, cells):
        short = np.zeros(phys.savings.saving.shape[:2] + (RATCHET_YEARS, phys.savings.saving.shape[2]))
        for (ai, oi, year), value in cells.items():
            short[ai, oi, year, 1] = value
        return replace(phys, savings=replace(phys.savings, ratchet_shortfall=short))

    def test_the_base_case_s_own_shortfall_comes_back_to_the_option(self, demo_run_physics):
        # a replace-now option whose base case buys its must-spend at failure in year f (inside the horizon): 500
        # short in the must-spend's first year with it (f + 1) raises the option's NPV by 500 (1 + e)^(f+1) /
        # (1 + d)^(f+1) (1 - tax) (hand calculation, finance-cashflows.md example F, base case)
        case, phys = demo_run_physics
        a = case.finance
        base = scenario.economics(case, phys, a, with_risk=False)
        r = base.results
        life = np.rint(r["existing_remaining_life_yr"].to_numpy(dtype=float))
        pick = np.flatnonzero((r["option_id"] == "ie4").to_numpy() & (r["must_spend_option_id"] != "").to_numpy()
                              & (life >= 1) & (life + 1 <= a.horizon_yr))[0]
        asset, must = str(r["asset_id"].iloc[pick]), str(r["must_spend_option_id"].iloc[pick])
        ids, opts = list(phys.operation.asset_ids), list(phys.operation.option_ids)
        bumped = scenario.economics(case, self._with(phys, {(ids.index(asset), opts.index(must), 0): 500.0}), a,
                                    with_risk=False)
        t = int(life[pick]) + 1
        expected = 500.0 * float(a.energy_price_factor) * ((1 + a.escalation_demand_frac) / (1 + a.discount_rate_frac)) ** t \
            * (1 - a.tax_rate_frac)
        assert bumped.results["npv"].iloc[pick] - r["npv"].iloc[pick] == pytest.approx(expected, rel=1e-9)

    def test_a_price_level_scales_the_shortfall(self, demo_run_physics):
        # energy_price_factor multiplies every charge, so every bill difference (docs/finance.md, section 3)
        case, phys = demo_run_physics
        cells = {(0, 2, 0): 1000.0, (0, 2, 1): 250.0}
        dearer = scenario.economics(case, self._with(phys, cells), replace(case.finance, energy_price_factor=2.0),
                                    with_risk=False)
        row = dearer.results[(dearer.results["asset_id"] == phys.operation.asset_ids[0])
                             & (dearer.results["option_id"] == phys.operation.option_ids[2])]
        assert float(row["ratchet_shortfall"].iloc[0]) == pytest.approx(2.0 * 1250.0)

    def test_a_failed_motor_s_option_counts_its_shortfall_over_the_least_repair(self, demo_run_physics):
        # docs/finance.md section 4: a failed motor's replacing option saves over the least repair, so its shortfall
        # shown is its own less the repair's (hand calculation: 1 000 - 300 = 700)
        case, phys = demo_run_physics
        base = scenario.economics(case, phys, case.finance, with_risk=False)
        r = base.results
        pick = np.flatnonzero((r["option_id"] == "ie4").to_numpy() & (r["must_spend_option_id"] != "").to_numpy())[0]
        asset, must = str(r["asset_id"].iloc[pick]), str(r["must_spend_option_id"].iloc[pick])
        failed_case = replace(case, assets=case.assets.assign(failed=(case.assets["asset_id"] == asset).to_numpy()))
        ids, opts = list(phys.operation.asset_ids), list(phys.operation.option_ids)
        cells = {(ids.index(asset), opts.index("ie4"), 0): 1000.0, (ids.index(asset), opts.index(must), 0): 300.0}
        out = scenario.economics(failed_case, self._with(phys, cells), case.finance, with_risk=False).results
        got = out[(out["asset_id"] == asset)].set_index("option_id")
        assert bool(got.loc["ie4", "failed"])
        assert got.loc["ie4", "ratchet_shortfall"] == pytest.approx(700.0)
        assert got.loc[must, "ratchet_shortfall"] == 0.0  # the least repair over itself


def test_the_history_meter_is_the_site_s_with_its_banks(year):
    # the first year's shortfall at a site with a base load and a stepped capacitor bank under a kVA ratchet equals
    # the bills of the public site meter (models.site.Site.meter, banks applied) priced with billing.bill: the
    # meter before the change read as the year before (an independent route through the public functions)
    from models.site import SteppedCapacitorBank

    t = _tariff(RATCHET.replace("price_per_kw_month", "price_per_kva_month"))
    site = Site(base_p_kw=50.0, base_power_factor=0.85,
                stepped_banks=(SteppedCapacitorBank(rated_q_kvar=60.0, step_kvar=20.0, target_power_factor=0.95),))
    today_p = _july_peak(year)
    option_p = np.full(len(year), 100.0)
    q_of = lambda p_kw: 0.75 * p_kw  # noqa: E731 (PF 0.8 motors)
    p = np.stack([today_p, option_p])[:, None, :]
    q = np.stack([q_of(today_p), q_of(option_p)])[:, None, :]
    out = site_savings(SiteSetup("S", t, site, None), year, 1.0, p, q, np.ones((1, 2), dtype=bool),
                       np.array(["keep", "ie4"]), 35.0)
    before, after = site.meter(today_p, q_of(today_p)), site.meter(option_p, q_of(option_p))
    today_bill = bill(t, year, before.p_kw, before.q_kvar, repeat_year=None)["amount"].sum()
    steady = bill(t, year, after.p_kw, after.q_kvar, repeat_year=None)["amount"].sum()
    first = bill(t, year, after.p_kw, after.q_kvar, repeat_year=None, before_p_kw=before.p_kw,
                 before_q_kvar=before.q_kvar)["amount"].sum()
    assert out["saving"][0, 1].sum() == pytest.approx(today_bill - steady, rel=1e-12)
    assert out["ratchet_shortfall"][0, 1, 0].sum() == pytest.approx(first - steady, rel=1e-12)
    assert first - steady > 100.0  # the bank does not hide the July peak's ratchet


class TestMonthOfTheChange:
    """The change comes into service at the start of a calendar month; the first years run twelve months from
    it (billing-demand.md case D8, "The month of the change"). Today's peak is in July (200 kW against 100 kW),
    the option flat at 100 kW; every month billed 160 kW instead of 100 costs 600."""

    def test_a_change_in_august_bills_last_july_in_eleven_months(self, year):
        # hand calculation: August to June read the July just before the change (at most 11 months back); only
        # July reads August to June, all with the option: 11 x 160 + 100 = 1 860 kW-months, 18 600 (series order
        # January to December: 160 x 6, 100, 160 x 5)
        t = _tariff(RATCHET)
        flat = np.full(len(year), 100.0)
        first = bill(t, year, flat, 0 * flat, repeat_year=None, before_p_kw=_july_peak(year), before_q_kvar=0 * flat,
                     in_service_month=8)
        assert_allclose(first.groupby("month")["quantity"].sum().to_numpy(), [160.0] * 6 + [100.0] + [160.0] * 5, **EXACT)
        assert_allclose(first["amount"].sum(), 18_600.0, **EXACT)

    def test_a_change_in_july_dodges_the_peak_it_replaces(self, year):
        # hand calculation: the July before the change is 12 months back, beyond an 11-month look-back: 12 000,
        # the steady bill
        t = _tariff(RATCHET)
        flat = np.full(len(year), 100.0)
        first = bill(t, year, flat, 0 * flat, repeat_year=None, before_p_kw=_july_peak(year), before_q_kvar=0 * flat,
                     in_service_month=7)
        assert_allclose(first["amount"].sum(), 12_000.0, **EXACT)

    @pytest.mark.parametrize("month, look_back, expected", [
        (1, 11, [3_600.0, 0.0, 0.0]), (7, 11, [0.0, 0.0, 0.0]), (8, 11, [6_600.0, 0.0, 0.0]),
        (12, 11, [4_200.0, 0.0, 0.0]), (1, 24, [7_200.0, 4_200.0, 0.0]), (7, 24, [7_200.0, 600.0, 0.0]),
        (8, 24, [7_200.0, 7_200.0, 0.0]), (12, 24, [7_200.0, 4_800.0, 0.0])])
    def test_each_year_s_shortfall_by_the_month_of_the_change(self, year, month, look_back, expected):
        # hand calculations (billing-demand.md case D8, "The month of the change"): the July before the change is
        # d = 6, 12, 1 and 5 months before a change in January, July, August and December; month i (0 = the first
        # in service) of year k reads it when (k - 1) x 12 + i + d <= look-back: min(12, max(0, look-back - d
        # - 12 (k - 1) + 1)) months of year k billed 160 kW, 600 each
        t = _tariff(RATCHET.replace("ratchet_months = 11", f"ratchet_months = {look_back}"))
        p, q, applies, tech = TestSiteSavings._arrays(year, np.full(len(year), 100.0))
        out = site_savings(SiteSetup("S", t, Site(), None, in_service_month=month), year, 1.0, p, q, applies, tech, 35.0)
        assert_allclose(out["ratchet_shortfall"][0, 1].sum(axis=-1), expected, rtol=1e-12, atol=1e-9)
        # the steady saving does not depend on the month (case D7: 7 600)
        assert_allclose(out["saving"][0, 1].sum(), 7_600.0, rtol=1e-12)

    def test_a_whole_run_reads_the_month_from_the_case(self, july_pump_case):
        # the pump of the whole-run case, its option's July saving dP: in service from July the first year
        # dodges today's July (no shortfall); from August 11 of its 12 months still read it: 11 x 0.8 x dP x c,
        # against 6 x 0.8 x dP x c from January (billing-demand.md case D8, "In symbols")
        case, result = july_pump_case
        january = result.results.set_index("option_id")["ratchet_shortfall"]
        assert (january > 0.5).any()  # (some option is held back from January)
        for month, months_read in ((7, 0), (8, 11)):
            moved = replace(case, settings=replace(case.settings, in_service_month=month))
            shortfall = scenario.run(moved, moved.finance, with_risk=False).results.set_index("option_id")["ratchet_shortfall"]
            for option_id in january.index[january > 0.5]:
                assert shortfall[option_id] == pytest.approx(january[option_id] * months_read / 6, rel=1e-9, abs=1e-6)


@pytest.mark.parametrize("written, expected", [("in_service_month = 8", 8), ("", None)])
def test_the_case_names_the_month_its_changes_come_into_service(tmp_path, written, expected):
    import casebuilder as cb
    from models.case import load_case

    folder = cb.write_case(tmp_path / "case", case_toml=f'[case]\nname = "m"\ntime_zone = "UTC"\n{written}\n')
    case, problems = load_case(folder)
    assert case is not None, [str(p) for p in problems]
    assert case.settings.in_service_month == expected


@pytest.mark.parametrize("written", ["13", "0", "7.5", '"August"', "true"])
def test_a_month_that_is_not_one_to_twelve_is_an_error_naming_the_key(tmp_path, written):
    import casebuilder as cb
    from models.case import load_case

    folder = cb.write_case(tmp_path / "case", case_toml=f'[case]\nname = "m"\ntime_zone = "UTC"\nin_service_month = {written}\n')
    case, problems = load_case(folder)
    assert case is None
    found = [p for p in problems if p.column == "in_service_month"]
    assert found and found[0].severity == "error" and found[0].file == "case.toml" and "1 (January) to 12" in found[0].rule


def test_the_pack_says_when_the_changes_come_into_service_where_a_ratchet_reads_it(july_pump_case):
    from io import BytesIO

    from openpyxl import load_workbook

    from models.pack import content
    from models.pack.workbook import build_workbook

    case, result = july_pump_case
    moved = replace(case, settings=replace(case.settings, in_service_month=4))
    rows = {item: (value, note) for item, value, note in content.basis_rows(moved, result)}
    assert rows["Changes in service from"][0] == "the start of April"
    scope = content.select_scope(moved, result, assets=["P1"], plan=False)
    sheet = load_workbook(BytesIO(build_workbook(moved, result, scope)))["Assumptions"]
    cells = [[c.value for c in r] for r in sheet.iter_rows()]
    assert any(r[0] == "changes in service from" and str(r[1]).startswith("the start of April (") for r in cells)


def test_a_month_nothing_reads_is_warned(tmp_path):
    # the small case's sites have no tariff with a ratchet: the setting would change nothing
    import casebuilder as cb
    from models.case import load_case

    folder = cb.with_flat_tariff(cb.write_case(tmp_path / "case", case_toml='[case]\nname = "m"\ntime_zone = "Europe/Berlin"\n'
                                                                            "in_service_month = 8\n"))
    case, problems = load_case(folder)
    assert case is not None
    found = [p for p in problems if p.column == "in_service_month"]
    assert found and found[0].severity == "warning" and "changes nothing" in found[0].rule


def test_a_series_from_april_places_the_month_of_the_change_by_its_name():
    # billing-demand.md case D8, "The month of the change", on a typical year written from April to March: the
    # months are the same, shown in the series' order. August, 11-month look-back: April to June and August to
    # March read the July before the change (160 kW), July reads the months with the option (100 kW): 18 600.
    index = pd.date_range("2025-04-01", "2026-04-01", freq="h", tz="UTC", inclusive="left")
    t = _tariff(RATCHET)
    flat = np.full(len(index), 100.0)
    before = np.where(index.month == 7, 200.0, 100.0)
    first = bill(t, index, flat, 0 * flat, repeat_year=None, before_p_kw=before, before_q_kvar=0 * flat,
                 in_service_month=8)
    assert first["month"].iloc[0] == "2025-04"
    assert_allclose(first.groupby("month", sort=False)["quantity"].sum().to_numpy(), [160.0] * 3 + [100.0] + [160.0] * 8,
                    **EXACT)
    assert_allclose(first["amount"].sum(), 18_600.0, **EXACT)


@pytest.mark.parametrize("month", [0, 13, 8.5, True])
def test_bill_refuses_a_month_that_is_none(year, month):
    flat = np.full(len(year), 100.0)
    with pytest.raises(ValueError, match="in_service_month"):
        bill(_tariff(RATCHET), year, flat, 0 * flat, in_service_month=month)
