"""The plan financed: a loan's schedule, a lease and an energy-service company's share, against hand calculations.

Sources: docs/derivations/finance-financing.md (cases F1-F5), numpy_financial's ``pmt`` and ``ipmt`` as the
reference of the annuity. Tolerances: 0.005 on amounts written to the cent, 1e-9 relative on identities.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import numpy_financial as npf
import pytest
from numpy.testing import assert_allclose

from models import scenario
from models.finance import FinanceAssumptions
from models.financing import financing_summary, financing_text, lease_schedule, loan_schedule, plan_financing

from test_scenario import _one_asset_case


class TestLoanSchedule:
    def test_annuity_and_its_interest_are_numpy_financial_s(self):
        # case F1: 100,000 at 6 % over 5 years
        proceeds, repaid, interest = loan_schedule(np.array([100_000.0, 0, 0, 0, 0, 0]), 1.0, 0.06, 5)
        payment = npf.pmt(0.06, 5, -100_000.0)  # reference
        assert_allclose(proceeds, [100_000.0, 0, 0, 0, 0, 0], atol=1e-9)
        assert_allclose(-repaid[1:], np.full(5, payment), rtol=1e-12)
        assert_allclose(interest[1:], [npf.ipmt(0.06, k, 5, -100_000.0) for k in range(1, 6)], rtol=1e-12)
        # hand calculation, case F1: 23,739.64 a year, first interest 6,000.00, last 1,343.75; 118,698.20 in all
        assert_allclose([-repaid[1], interest[1], interest[5], -repaid.sum()], [23_739.64, 6_000.0, 1_343.75, 118_698.20],
                        atol=0.005)

    def test_a_share_borrowed_and_draws_of_several_years(self):
        # a loan is linear in its draws: 80 % of 100,000 in year 0 and 80 % of 50,000 in year 1
        _, repaid, _ = loan_schedule(np.array([[100_000.0, 50_000.0, 0, 0, 0, 0, 0]]), 0.8, 0.06, 5)
        one = npf.pmt(0.06, 5, -80_000.0)
        two = npf.pmt(0.06, 5, -40_000.0)
        assert_allclose(-repaid[0], [0.0, one, one + two, one + two, one + two, one + two, two], rtol=1e-12)

    def test_a_real_analysis_borrows_money_of_the_year_and_deflates_the_payments(self):
        # case F2: 50,000 (base-year money) in year 2, inflation 2 %: 11,637.08 in year 3 ... 10,750.86 in year 7
        index = 1.02 ** np.arange(8)
        proceeds, repaid, _ = loan_schedule(np.array([0, 0, 50_000.0, 0, 0, 0, 0, 0]), 1.0, 0.06, 5, index)
        assert_allclose(proceeds[2], 50_000.0, rtol=1e-12)
        assert_allclose(-repaid[3:], [11_637.08, 11_408.90, 11_185.20, 10_965.88, 10_750.86], atol=0.005)

    def test_a_balance_still_owed_is_repaid_in_the_last_year(self):
        # case F3: drawn in year 3 of flows to year 5: 23,739.64 in year 4, 23,739.64 + 63,456.34 in year 5
        _, repaid, _ = loan_schedule(np.array([0, 0, 0, 100_000.0, 0, 0]), 1.0, 0.06, 5)
        assert_allclose(-repaid[4:], [23_739.64, 87_195.98], atol=0.005)
        assert_allclose(-repaid.sum(), 23_739.64 + 87_195.98, atol=0.01)

    def test_a_loan_at_no_interest_repays_equal_shares(self):
        _, repaid, interest = loan_schedule(np.array([1_000.0, 0, 0, 0, 0]), 1.0, 0.0, 4)
        assert_allclose(-repaid, [0.0, 250.0, 250.0, 250.0, 250.0], atol=1e-9)
        assert_allclose(interest, 0.0, atol=0)


class TestLeaseSchedule:
    def test_payments_and_buyout_are_numpy_financial_s(self):
        # case F5: 100,000 leased at 7 % over 5 years, bought out at 10 %: pmt(0.07, 5, -100,000, fv=10,000)
        payments, buyout = lease_schedule(np.array([100_000.0, 0, 0, 0, 0, 0, 0]), 0.07, 5, 0.10)
        payment = npf.pmt(0.07, 5, -100_000.0, 10_000.0)  # reference
        assert_allclose(-payments[1:6], np.full(5, payment), rtol=1e-12)
        assert_allclose(payments[[0, 6]], 0.0, atol=0)
        assert_allclose(-buyout, [0, 0, 0, 0, 0, 10_000.0, 0], atol=1e-9)
        # hand calculation, case F5: 22,650.16 a year
        assert_allclose(-payments[1], 22_650.16, atol=0.005)

    def test_a_lease_past_the_study_period_is_settled_in_its_last_year(self):
        # case F5: the same lease in flows to year 3: 22,650.16 in years 1 and 2; in year 3 that payment and the two
        # still owed, discounted at 7 % (63,602.07), and the buyout two years early (8,734.39)
        payments, buyout = lease_schedule(np.array([100_000.0, 0, 0, 0]), 0.07, 5, 0.10)
        assert_allclose(-payments, [0.0, 22_650.16, 22_650.16, 63_602.07], atol=0.005)
        assert_allclose(-buyout, [0.0, 0.0, 0.0, 8_734.39], atol=0.005)

    def test_a_real_analysis_leases_money_of_the_year_and_deflates_the_payments(self):
        # the lease is fixed in money of the purchase's year (2 % inflation, bought in year 1): its payments in base-year
        # money are pmt x 1.02 / 1.02^k
        index = 1.02 ** np.arange(7)
        payments, _ = lease_schedule(np.array([0, 50_000.0, 0, 0, 0, 0, 0]), 0.07, 5, 0.0, index)
        k = np.arange(2, 7)
        assert_allclose(-payments[2:], npf.pmt(0.07, 5, -50_000.0 * 1.02) / 1.02 ** k, rtol=1e-12)


@pytest.fixture(scope="module")
def one(tmp_path_factory):
    case = _one_asset_case(tmp_path_factory.mktemp("fin"))
    phys = scenario.physics(case, float(case.finance.capacitor_cost_per_kvar))
    return case, phys


def _run(one, **changes):
    case, phys = one
    return scenario.economics(case, phys, replace(case.finance, **changes), with_risk=False)


def test_cash_is_the_plan_s_own_flows(one):
    result = _run(one)
    table = plan_financing(result)
    assert len(result.plan) == 1
    assert_allclose(table["financed_net"], table["cash_net"], rtol=0, atol=0)
    summary = financing_summary(table, float(result.assumptions.discount_rate_frac))
    # the cash net's discounted sum is the plan's NPV (each project at the plan's start)
    assert_allclose(summary["npv_cash"], float(result.plan["npv_at_plan_start"].sum()), rtol=1e-9)
    assert summary["npv_financed"] == summary["npv_cash"]
    assert financing_text(result.assumptions, summary, "EUR") == ""


def test_a_loan_on_the_one_motor_case(one):
    # the one-motor case is real at 3 %, inflation 2 % (the default): the capital C of year 0 is borrowed whole at
    # 6 % nominal over 5 years and each payment pmt(0.06, 5, -C) is deflated by 1.02^k (case F2's rule); profit tax
    # 25 %: the interest's shield is 0.25 x ipmt / 1.02^k
    result = _run(one, financing="loan", loan_share_frac=1.0, loan_rate_frac=0.06, loan_term_yr=5, tax_rate_frac=0.25)
    table = plan_financing(result)
    capital = float(result.plan["capital"].iloc[0])
    assert capital > 0
    k = np.arange(1, 6)
    assert_allclose(table["loan_proceeds"].iloc[0], capital, rtol=1e-12)
    assert_allclose(-table["loan_repayment"].iloc[1:6], npf.pmt(0.06, 5, -capital) / 1.02 ** k, rtol=1e-10)
    assert_allclose(table["interest_tax_shield"].iloc[1:6], 0.25 * npf.ipmt(0.06, k, 5, -capital) / 1.02 ** k, rtol=1e-10)
    assert_allclose(table["loan_repayment"].iloc[6:], 0.0, atol=0)
    # the owner pays nothing in year 0 and the financed net is the cash net plus the loan's flows
    assert_allclose(table["financed_net"].iloc[0], 0.0, atol=1e-6)
    parts = table["loan_proceeds"] + table["loan_repayment"] + table["interest_tax_shield"]
    assert_allclose(table["financed_net"], table["cash_net"] + parts, rtol=1e-12)
    summary = financing_summary(table, 0.03)
    assert summary["lowest_financed"] == 0.0 and summary["lowest_cash"] < 0.0
    text = financing_text(result.assumptions, summary, "EUR")
    assert text.startswith("With 100 % of the capital borrowed at 6 % a year (nominal) and repaid over 5 years")
    assert "its running total of net flows never falls below zero" in text and "cash basis" in text
    assert "The repayments are owed whatever the savings turn out to be." in text


def test_an_energy_service_company_on_the_one_motor_case(one):
    # case F4's rule: the company buys (year 0 nets to 0) and takes half of the savings after tax for 4 years; with
    # no profit tax and nothing else in those years the owner keeps half of each year's cash flow, then all of it
    result = _run(one, financing="shared_savings", shared_savings_share_frac=0.5, shared_savings_term_yr=4)
    table = plan_financing(result)
    cash, financed = table["cash_net"].to_numpy(), table["financed_net"].to_numpy()
    assert cash[0] < 0.0 and abs(financed[0]) < 1e-6
    assert_allclose(financed[1:5], 0.5 * cash[1:5], rtol=1e-12)
    assert_allclose(financed[5:], cash[5:], rtol=1e-12)
    assert_allclose(table["company_capital"].iloc[0], -cash[0], rtol=1e-12)


def test_a_lease_on_the_one_motor_case(one):
    # the lessor buys (year 0 nets to 0) and keeps the depreciation shield; the owner pays pmt(0.07, 4, -C, fv=0.1 C)
    # in money of year 0, deflated by 1.02^k (a real analysis), deducts it at 25 %, and buys out at 10 % of C in year
    # 4; it keeps all the savings (case F5's rule)
    result = _run(one, financing="lease", lease_rate_frac=0.07, lease_term_yr=4, lease_buyout_frac=0.1,
                  tax_rate_frac=0.25, depreciation_yr=5)
    table = plan_financing(result)
    capital = float(table["company_capital"].iloc[0])
    assert capital > 0
    assert abs(table["financed_net"].iloc[0]) < 1e-6
    k = np.arange(1, 5)
    payment = npf.pmt(0.07, 4, -capital, 0.1 * capital) / 1.02 ** k  # reference
    assert_allclose(-table["lease_payment"].iloc[1:5], payment, rtol=1e-12)
    assert_allclose(table["lease_tax_shield"].iloc[1:5], 0.25 * payment, rtol=1e-12)
    assert_allclose(-table["lease_buyout"].iloc[4], 0.1 * capital / 1.02 ** 4, rtol=1e-12)
    assert_allclose(table[["lease_payment", "lease_buyout", "company_savings_share"]].iloc[5:], 0.0, atol=0)
    parts = table[["company_capital", "company_incentive_and_depreciation", "lease_payment", "lease_tax_shield",
                   "lease_buyout"]].sum(axis=1)
    assert_allclose(table["financed_net"], table["cash_net"] + parts, rtol=1e-12)
    text = financing_text(result.assumptions, financing_summary(table, 0.03), "EUR")
    assert text.startswith("With each project's first purchase leased over 4 years at 7 % a year (nominal) and bought "
                           "out at 10 % of its price")
    assert "The lease payments are owed whatever the savings turn out to be." in text


def test_a_lease_finances_the_purchase_less_the_incentive_the_lessor_receives(one):
    # 20 % of the first purchase's capital as an incentive, received by the lessor: the lease's payments return
    # C - I at its rate, with the buyout a share of C - I (case F5's rule); a nominal analysis here (nothing deflated)
    result = _run(one, financing="lease", lease_rate_frac=0.07, lease_term_yr=4, lease_buyout_frac=0.1,
                  incentive_capital_share_frac=0.2, rate_basis="nominal", inflation_frac=0.0)
    table = plan_financing(result)
    capital = float(table["company_capital"].iloc[0])
    kept = -float(table["company_incentive_and_depreciation"].iloc[0])
    assert_allclose(kept, 0.2 * capital, rtol=1e-9)
    net = capital - kept
    assert_allclose(-table["lease_payment"].iloc[1:5], npf.pmt(0.07, 4, -net, 0.1 * net), rtol=1e-12)  # reference
    assert_allclose(-table["lease_buyout"].iloc[4], 0.1 * net, rtol=1e-12)


def test_a_nominal_buyout_under_a_profit_tax_is_warned():
    # a lease bought out for (almost) nothing is usually taxed as a purchase on credit, which a loan models
    got, problems = FinanceAssumptions.from_dict({"financing": "lease", "lease_buyout_frac": 0.0, "tax_rate_frac": 0.25},
                                                 "finance.toml")
    assert got is not None and [p.column for p in problems if p.severity == "warning"] == ["lease_buyout_frac"]
    _, problems = FinanceAssumptions.from_dict({"financing": "lease", "lease_buyout_frac": 0.0}, "finance.toml")
    assert problems == []


def _contract(one, share_frac: float, term_yr: int):
    """The one-motor plan under an energy-service contract, 25 % profit tax, 5-year depreciation: the financed
    table and the plan project's flow table (component x year)."""
    from models.pack import content

    result = _run(one, financing="shared_savings", shared_savings_share_frac=share_frac,
                  shared_savings_term_yr=term_yr, tax_rate_frac=0.25, depreciation_yr=5)
    r = result.plan.iloc[0]
    return plan_financing(result), content.project_flow_table(result, r["asset_id"], r["option_id"])


def test_the_company_takes_the_depreciation_of_its_purchase(one):
    # with a profit tax the depreciation tax shield of the company's purchase is the company's: in the contract's
    # years the owner keeps (1 - share) x the savings after tax and no shield (case F4, last paragraph)
    table, flows = _contract(one, 0.5, 4)
    assert "tax_depreciation" in flows.index and flows.loc["tax_depreciation"].iloc[1] > 0
    savings = flows.loc[[c for c in flows.index if c.startswith("savings_") or c == "tax_savings"]].sum(axis=0)
    assert_allclose(table["financed_net"].iloc[1:5], 0.5 * savings.iloc[1:5].to_numpy(), rtol=1e-9)


def test_finance_keys_are_checked():
    ok, problems = FinanceAssumptions.from_dict({"financing": "loan", "loan_share_frac": 0.8, "loan_rate_frac": 0.055,
                                                 "loan_term_yr": 7}, "finance.toml")
    assert ok is not None and not problems and ok.loan_term_yr == 7 and ok.financing == "loan"
    for data, key, rule in (({"financing": "leasing"}, "financing", "must be 'cash', 'loan', 'lease' or 'shared_savings'"),
                            ({"lease_buyout_frac": 1.5}, "lease_buyout_frac", "fraction from 0 to 1"),
                            ({"lease_term_yr": 0}, "lease_term_yr", "between 1 and"),
                            ({"lease_rate_frac": 7}, "lease_rate_frac", "above -0.5 and at most 1"),
                            ({"loan_share_frac": 1.2}, "loan_share_frac", "fraction from 0 to 1"),
                            ({"shared_savings_share_frac": -0.1}, "shared_savings_share_frac", "fraction from 0 to 1"),
                            ({"loan_term_yr": 0}, "loan_term_yr", "between 1 and"),
                            ({"loan_term_yr": 2.5}, "loan_term_yr", "whole number"),
                            ({"loan_rate_frac": 6}, "loan_rate_frac", "above -0.5 and at most 1")):
        got, problems = FinanceAssumptions.from_dict(data, "finance.toml")
        assert got is None and any(p.column == key and rule in p.rule for p in problems), (data, [str(p) for p in problems])
    got, problems = FinanceAssumptions.from_dict({"financing": "loan", "loan_rate_frac": 0.45}, "finance.toml")
    assert got is not None and [p.column for p in problems if p.severity == "warning"] == ["loan_rate_frac"]


def test_run_writes_the_table_and_says_the_financing(tmp_path, capsys):
    import pandas as pd

    from drivecase.cli import main

    case = _one_asset_case(tmp_path / "case")
    finance = tmp_path / "case" / "finance.toml"
    finance.write_text(finance.read_text(encoding="utf-8") + 'financing = "loan"\nloan_rate_frac = 0.05\n'
                       "loan_term_yr = 4\n", encoding="utf-8")
    out = tmp_path / "out"
    assert main(["run", str(tmp_path / "case"), "--out", str(out), "--no-risk", "--quiet"]) == 0
    said = capsys.readouterr().out
    assert "Financing: With 100 % of the capital borrowed at 5 % a year (nominal) and repaid over 4 years" in said
    table = pd.read_csv(out / "financing.csv")
    assert list(table.columns)[:3] == ["year", "cash_net", "loan_proceeds"]
    assert (table["loan_repayment"].iloc[1:5] < 0).all() and (table["loan_repayment"].iloc[5:] == 0).all()
    assert case is not None


def test_the_company_takes_no_residual_and_no_share_of_the_mid_life_tax(one):
    # the one-motor case under a contract as long as the study period (10 years): the residual value at its end is
    # the owner's (the equipment passes to it, docs/finance.md section 9), and the share is of the operating
    # savings after tax only: with a 25 % tax and no mid-life work, 0.6 x 0.75 x the savings of each contract year
    table, flows = _contract(one, 0.6, 10)
    savings = flows.loc[[c for c in flows.index if c.startswith("savings_")]].sum(axis=0).to_numpy()
    assert_allclose(-table["company_savings_share"].iloc[1:11].to_numpy(), 0.6 * 0.75 * savings[1:11], rtol=1e-12)
    assert_allclose(table["company_incentive_and_depreciation"].iloc[10], 0.0, atol=1e-9)  # (the shield ended in year 5)


def test_a_term_longer_than_the_study_period_and_terms_of_another_financing_are_warned():
    got, problems = FinanceAssumptions.from_dict({"financing": "loan", "horizon_yr": 10, "loan_term_yr": 15,
                                                  "shared_savings_term_yr": 4}, "finance.toml")
    assert got is not None
    warned = {p.column: p.rule for p in problems if p.severity == "warning"}
    assert "longer than the study period (10 years)" in warned["loan_term_yr"]
    assert warned["shared_savings_term_yr"] == "not read: financing is 'loan'"
    _, problems = FinanceAssumptions.from_dict({"loan_rate_frac": 0.05}, "finance.toml")
    assert [p.rule for p in problems] == ["not read: financing is 'cash'"]
    # the defaults, as a new case's finance.toml writes them, say nothing
    _, problems = FinanceAssumptions.from_dict({"loan_rate_frac": 0.06, "shared_savings_term_yr": 7}, "finance.toml")
    assert problems == []
