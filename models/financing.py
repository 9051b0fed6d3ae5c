"""Financing the plan: the owner's yearly cash flows when the capital is borrowed, leased, or paid by an
energy-service company against a share of the savings.

Every decision metric of drivecase (NPV, IRR, payback, the plan and its budgets) is on the cash basis: the
investment's own merit, whoever pays for it. A capital request also asks how the money is found. This
module turns the plan's cash flows (as :func:`models.pack.content.portfolio_flows` counts them, each
project from its plan year) into the owner's flows under the finance assumptions' ``financing``:

``loan``
    A share of every year's capital is borrowed at a nominal rate and repaid in equal yearly payments
    (an annuity) over the term, the first a year after the draw [1]. The interest is deducted from
    profit at the profit tax rate. A loan still owed at the end of the study period is repaid then (as a
    residual value is counted then). With a real analysis (``rate_basis = "real"``) the draws are turned
    into money of their year and the fixed payments back into base-year money with the inflation rate.
``lease``
    A lessor buys each project's first purchase (its capital that year) and receives its incentive and takes its
    tax depreciation, as the owner of the equipment during the lease (a true lease for tax). The owner pays equal
    yearly payments over the term, in arrears (the first a year after the purchase), that with the buyout price
    at the end return the lessor's purchase less the incentive at the lease's implicit rate [1]; the payments
    are an operating expense, deducted from profit at the profit tax rate; at the end the owner buys the
    equipment at the buyout price, a share of that net amount (its residual value at the end of the study
    period is then the owner's). Payments still owed
    and the buyout of a lease running past the study period are settled in its last year, discounted at the
    lease's rate. With a real analysis the purchase is in money of its year and the fixed payments are brought
    back to base-year money, as a loan's.
``shared_savings``
    An energy-service company buys each project's first purchase (its capital that year, less the
    incentive, which the company receives) and takes its tax depreciation (the owner, given the equipment
    at no cost when the contract ends, has none to depreciate); for the contract's years after that
    purchase it is paid a share of the project's operating savings after tax (as the plan counts them).
    The owner keeps the rest of the savings and pays mid-life work and later purchases; the equipment passes
    to it at the contract's end, so the residual value at the end of the study period is the owner's.
``cash``
    The owner pays: the financed flows are the cash flows.

References
----------
.. [1] W. G. Sullivan, E. M. Wicks and C. P. Koelling, *Engineering Economy*, 17th ed. Pearson, 2019,
   ch. 4 (capital recovery factor; loan repayment schedules, the interest and principal of each payment).
.. [2] numpy-financial, ``pmt`` and ``ipmt`` (the payment and its interest of an annuity, ``pmt`` with a future
   value for a lease's payment before its buyout), the reference of the tests.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from models.cashflows import CAPITAL_COMPONENTS, SAVINGS_COMPONENTS, _depreciation
from models.finance import capital_recovery_factor

__all__ = ["FINANCED_COLUMNS", "loan_schedule", "lease_schedule", "plan_financing", "financing_summary", "financing_text", "percent_text",
           "plan_financing_words"]

#: Columns of :func:`plan_financing`, each [currency] but ``year``.
FINANCED_COLUMNS: tuple[str, ...] = (
    "year", "cash_net", "loan_proceeds", "loan_repayment", "interest_tax_shield", "company_capital",
    "company_incentive_and_depreciation", "company_savings_share", "lease_payment", "lease_tax_shield", "lease_buyout",
    "financed_net", "cumulative_cash",
    "cumulative_financed", "discounted_financed",
)


def loan_schedule(draws, share_frac: float, rate_frac: float, term_yr: int, index=None):
    """Borrow a share of each year's draw and repay it in equal yearly payments.

    Parameters
    ----------
    draws : array_like, shape (..., n_years)
        Capital spent in each year [currency of the analysis basis], >= 0.
    share_frac : float
        Share of each draw borrowed [frac], 0-1.
    rate_frac : float
        Nominal interest rate [frac/yr].
    term_yr : int
        Equal payments after each draw [yr], >= 1: in years t + 1 .. t + term of a draw in year t.
    index : array_like, shape (n_years,), optional
        Price index of each year (money of year t = base-year money x index[t]): the draws are borrowed in
        money of their year and the payments, fixed in money, are brought back to base-year money. Default
        all ones (a nominal analysis).

    Returns
    -------
    tuple of numpy.ndarray
        ``(proceeds, repayment, interest)``, each shaped as ``draws`` [currency of the analysis basis]:
        the money borrowed (positive), the payments (negative; the balance still owed after the last year is
        repaid in it) and the interest inside them (positive).

    Notes
    -----
    Payment A = B x CRF(r, n) with CRF = r (1 + r)^n / ((1 + r)^n - 1) (1/n at r = 0); each year's interest
    is the balance owed times r, the rest of A repays the balance [1].

    Examples
    --------
    100,000 borrowed at 6 % over 5 years: 23,739.64 a year; the first year's interest 6,000.00.

    >>> p, a, i = loan_schedule([100_000.0, 0, 0, 0, 0, 0], 1.0, 0.06, 5)
    >>> round(float(-a[1]), 2), round(float(i[1]), 2), round(float(-a.sum()), 2)
    (23739.64, 6000.0, 118698.2)
    """
    d = np.asarray(draws, dtype=float)
    n = d.shape[-1]
    g = np.ones(n) if index is None else np.asarray(index, dtype=float)
    borrowed = share_frac * d * g  # money of each draw's year
    proceeds = borrowed / g
    payment = np.zeros_like(d)
    interest = np.zeros_like(d)
    crf = float(capital_recovery_factor(rate_frac, term_yr)) if rate_frac != 0.0 else 1.0 / term_yr
    for t in range(n):
        balance = borrowed[..., t].copy()
        if not np.any(balance):
            continue
        a = balance * crf
        for k in range(1, term_yr + 1):
            year = t + k
            if year >= n:  # the balance still owed is repaid in the study period's last year
                payment[..., n - 1] += balance
                break
            owed = balance * rate_frac
            interest[..., year] += owed
            payment[..., year] += a if k < term_yr else balance + owed  # (the last one clears the rounding)
            balance = balance + owed - a
    return proceeds, -payment / g, interest / g


def lease_schedule(purchases, rate_frac: float, term_yr: int, buyout_frac: float, index=None):
    """Equal yearly lease payments and the buyout of each year's purchase by a lessor.

    Parameters
    ----------
    purchases : array_like, shape (n_years,)
        The lessor's purchase in each year [currency of the analysis basis], >= 0.
    rate_frac : float
        The lease's implicit nominal interest rate [frac/yr].
    term_yr : int
        Equal payments after each purchase [yr], >= 1: in years t + 1 .. t + term of a purchase in year t.
    buyout_frac : float
        The owner's price for the equipment at the lease's end, a share of the purchase [frac], 0-1, paid in
        year t + term.
    index : array_like, shape (n_years,), optional
        Price index of each year, as :func:`loan_schedule`'s. Default all ones (a nominal analysis).

    Returns
    -------
    tuple of numpy.ndarray
        ``(payments, buyout)``, each shaped (n_years,) [currency of the analysis basis], negative (money out):
        the lease payments and the buyout. Payments and a buyout falling after the last year are settled in
        it at their present value at the lease's rate (the payments' part in ``payments``).

    Notes
    -----
    The lessor's purchase C is returned by the payments A and the buyout B = b C at the rate r:
    C = A (1 - (1 + r)^-n) / r + B (1 + r)^-n, so A = (C - B (1 + r)^-n) CRF(r, n) [1] (``numpy_financial.pmt``
    with ``fv = B``).

    Examples
    --------
    100,000 leased at 7 % over 5 years with a 10 % buyout: 22,650.16 a year, then 10,000.00.

    >>> a, b = lease_schedule([100_000.0, 0, 0, 0, 0, 0], 0.07, 5, 0.10)
    >>> round(float(-a[1]), 2), round(float(-a.sum()), 2), round(float(-b[5]), 2)
    (22650.16, 113250.81, 10000.0)
    """
    c = np.asarray(purchases, dtype=float)
    n = len(c)
    g = np.ones(n) if index is None else np.asarray(index, dtype=float)
    leased = c * g  # money of each purchase's year
    payments = np.zeros(n)
    buyout = np.zeros(n)
    v = (1.0 + rate_frac) ** -term_yr
    crf = float(capital_recovery_factor(rate_frac, term_yr)) if rate_frac != 0.0 else 1.0 / term_yr
    for t in np.flatnonzero(leased):
        b = buyout_frac * leased[t]
        a = (leased[t] - b * v) * crf
        for k in range(1, term_yr + 1):
            year = t + k
            if year >= n:  # the payments still owed and the buyout, settled in the last year at their value then
                ahead = np.arange(k, term_yr + 1) - (n - 1 - t)
                payments[n - 1] += a * float(np.sum((1.0 + rate_frac) ** -ahead.astype(float)))
                buyout[n - 1] += b * (1.0 + rate_frac) ** -float(t + term_yr - (n - 1))
                break
            payments[year] += a
            if k == term_yr:
                buyout[year] += b
    return -payments / g, -buyout / g


def _table(result, asset_id: str, option_id: str) -> tuple[pd.DataFrame, np.ndarray, np.ndarray]:
    """A project's flow table, its net flows as the plan counts them, and its operating savings after tax as the
    plan counts them (the plan's credit taken off the savings; the tax on mid-life work left out)."""
    from models.pack import content

    table = content.project_flow_table(result, asset_id, option_id)
    counted = content.plan_flows(result, asset_id, option_id)
    own = table.sum(axis=0).to_numpy(dtype=float) if len(table) else np.zeros_like(counted)
    savings_rows = [c for c in table.index if c in SAVINGS_COMPONENTS]
    savings = table.loc[savings_rows].sum(axis=0).to_numpy(dtype=float) if savings_rows else np.zeros_like(counted)
    after_tax = (1.0 - float(result.assumptions.tax_rate_frac)) * savings
    return table, counted, after_tax - (own - counted)


def _row(table: pd.DataFrame, names, width: int) -> np.ndarray:
    rows = [c for c in table.index if c in names]
    return table.loc[rows].sum(axis=0).to_numpy(dtype=float) if rows else np.zeros(width)


def _company(table: pd.DataFrame, savings: np.ndarray, share_frac: float, term_yr: int, tax_rate_frac: float,
             depreciation_yr: int) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """One project's flows under a shared-savings contract (or a lease), the owner's change: (capital the company
    pays, the incentive and depreciation shield it keeps, the savings share it is paid, the incentive it
    receives)."""
    width = len(savings)
    capital = _row(table, CAPITAL_COMPONENTS, width)  # negative: money out
    spent = np.flatnonzero(capital < 0.0)
    zero = np.zeros(width)
    if not len(spent):
        return zero, zero, zero, zero
    t0 = int(spent[0])
    paid = zero.copy()
    paid[t0] = -capital[t0]  # the company's purchase: money the owner no longer spends
    incentive = zero.copy()
    incentive[t0] = _row(table, ("incentive",), width)[t0]
    kept = -incentive.copy()
    if tax_rate_frac > 0.0:  # the depreciation of the company's purchase is the company's
        purchase = zero.copy()
        purchase[t0] = -capital[t0]
        kept -= tax_rate_frac * _depreciation(purchase[None, :], int(depreciation_yr))[0]
    end = t0 + int(term_yr)
    years = np.arange(width)
    share = np.where((years > t0) & (years <= end), share_frac, 0.0)
    return paid, kept, -share * savings, incentive


def plan_financing(result) -> pd.DataFrame:
    """The plan's yearly cash flows to the owner, in cash and under the assumptions' financing.

    Parameters
    ----------
    result : models.scenario.ScenarioResult

    Returns
    -------
    pandas.DataFrame
        One row per plan year 0 .. horizon + the last plan start (:data:`FINANCED_COLUMNS`) [currency]:
        the plan's net flows as it counts them (``cash_net``, whose discounted sum is the plan's NPV), the
        loan's proceeds, repayments and interest tax shield, the energy-service company's (or lessor's)
        capital, the incentive and depreciation shield it keeps (negative), the savings share it is paid after
        the owner's tax (negative), the lease's payments (negative), their tax shield and its buyout
        (negative), the owner's net flows, both cumulative, and the owner's flows discounted at the
        discount rate.
    """
    a = result.assumptions
    horizon = int(a.horizon_yr)
    plan = result.plan
    starts = plan["start_yr"].astype(int).to_numpy() if len(plan) else np.zeros(0, dtype=int)
    last = horizon + (int(starts.max()) if len(starts) else 0)
    width = last + 1
    cash = np.zeros(width)
    capital = np.zeros(width)
    company = np.zeros((3, width))
    incentive = np.zeros(width)
    kind = str(getattr(a, "financing", "cash"))
    for asset_id, option_id, start in zip(plan["asset_id"].astype(str), plan["option_id"].astype(str), starts):
        table, counted, savings = _table(result, asset_id, option_id)
        cash[start:start + horizon + 1] += counted
        capital[start:start + horizon + 1] += -_row(table, CAPITAL_COMPONENTS, horizon + 1)
        if kind in ("shared_savings", "lease"):  # the company (or lessor) buys the first purchase
            share = float(a.shared_savings_share_frac) if kind == "shared_savings" else 0.0
            parts = _company(table, savings, share, int(a.shared_savings_term_yr),
                             float(a.tax_rate_frac), int(a.depreciation_yr))
            for k in range(3):
                company[k, start:start + horizon + 1] += parts[k]
            incentive[start:start + horizon + 1] += parts[3]
    years = np.arange(width)
    zero = np.zeros(width)
    proceeds = repayment = shield = payment = payment_shield = buyout = zero
    index = (1.0 + float(a.inflation_frac)) ** years if a.rate_basis == "real" else None
    if kind == "loan":
        proceeds, repayment, interest = loan_schedule(np.maximum(capital, 0.0), float(a.loan_share_frac),
                                                      float(a.loan_rate_frac), int(a.loan_term_yr), index)
        shield = float(a.tax_rate_frac) * interest
    elif kind == "lease":
        # the lessor finances its purchase less the incentive it receives
        payment, buyout = lease_schedule(np.maximum(company[0] - incentive, 0.0), float(a.lease_rate_frac),
                                         int(a.lease_term_yr), float(a.lease_buyout_frac), index)
        payment_shield = -float(a.tax_rate_frac) * payment
    financed = cash + proceeds + repayment + shield + company.sum(axis=0) + payment + payment_shield + buyout
    d = float(a.discount_rate_frac)
    return pd.DataFrame({
        "year": years, "cash_net": cash, "loan_proceeds": proceeds, "loan_repayment": repayment,
        "interest_tax_shield": shield, "company_capital": company[0], "company_incentive_and_depreciation": company[1],
        "company_savings_share": company[2], "lease_payment": payment, "lease_tax_shield": payment_shield,
        "lease_buyout": buyout, "financed_net": financed, "cumulative_cash": np.cumsum(cash),
        "cumulative_financed": np.cumsum(financed), "discounted_financed": financed / (1.0 + d) ** years,
    }, columns=list(FINANCED_COLUMNS))


def financing_summary(table: pd.DataFrame, discount_rate_frac: float) -> dict[str, float]:
    """The figures a capital request quotes from :func:`plan_financing`'s table.

    Returns
    -------
    dict
        ``npv_cash`` and ``npv_financed`` (the owner's flows discounted at the discount rate) [currency];
        ``lowest_cash`` and ``lowest_financed`` (the lowest cumulative position: the most the owner is out of
        pocket) [currency]; ``years_negative_financed`` (years whose financed net flow is below zero);
        ``first_year_financed`` (the financed net flow of plan year 1) [currency].
    """
    discount = (1.0 + float(discount_rate_frac)) ** table["year"].to_numpy(dtype=float)
    cash = table["cash_net"].to_numpy(dtype=float)
    financed = table["financed_net"].to_numpy(dtype=float)
    return {
        "npv_cash": float((cash / discount).sum()), "npv_financed": float((financed / discount).sum()),
        "lowest_cash": float(min(0.0, np.cumsum(cash).min())), "lowest_financed": float(min(0.0, np.cumsum(financed).min())),
        "years_negative_financed": int((financed < -0.5).sum()),
        "first_year_financed": float(financed[1]) if len(financed) > 1 else 0.0,
    }


def plan_financing_words(result, table: pd.DataFrame | None = None) -> str:
    """The plan's financing in words (:func:`financing_text` of :func:`plan_financing`'s table, or of ``table``
    where the caller holds it), or "" for a plan paid in cash or one that buys nothing: what the run, the
    report, the workbook and the dashboard say."""
    a = result.assumptions
    if not len(result.plan) or str(getattr(a, "financing", "cash")) == "cash":
        return ""
    table = plan_financing(result) if table is None else table
    return financing_text(a, financing_summary(table, float(a.discount_rate_frac)), str(a.currency))


def percent_text(frac: float) -> str:
    """A share or a rate of a financing as the texts and the register write it (four significant digits).

    Examples
    --------
    >>> percent_text(0.875), percent_text(0.06125), percent_text(0.995), percent_text(1.0)
    ('87.5 %', '6.125 %', '99.5 %', '100 %')
    """
    return f"{100.0 * float(frac):.4g} %"


def financing_text(assumptions, summary: dict[str, float], currency: str) -> str:
    """The financing of the plan in words, for the report's summary, the run, the workbook and the dashboard
    ("" for cash); the sentences end with a full stop."""
    from models.wording import money_text

    kind = str(getattr(assumptions, "financing", "cash"))
    if kind == "cash":
        return ""
    pct = percent_text

    if kind == "loan":
        how = (f"With {pct(assumptions.loan_share_frac)} of the capital borrowed at {pct(assumptions.loan_rate_frac)} "
               f"a year (nominal) and repaid over {int(assumptions.loan_term_yr)} years")
    elif kind == "lease":
        buyout = float(assumptions.lease_buyout_frac)
        how = (f"With each project's first purchase leased over {int(assumptions.lease_term_yr)} years at "
               f"{pct(assumptions.lease_rate_frac)} a year (nominal) and bought out "
               + (f"at {pct(buyout)} of its price" if buyout > 0.0 else "for a nominal price"))
    else:
        how = (f"With an energy-service company paying each project's first purchase against "
               f"{pct(assumptions.shared_savings_share_frac)} of its savings for "
               f"{int(assumptions.shared_savings_term_yr)} years")
    negative = int(summary["years_negative_financed"])
    lowest = -summary["lowest_financed"]
    low = (f"its running total of net flows falls to {money_text(-lowest, currency)} at its lowest" if lowest >= 0.5
           else "its running total of net flows never falls below zero")
    owed = {"loan": " The repayments are owed whatever the savings turn out to be.",
            "lease": " The lease payments are owed whatever the savings turn out to be."}.get(kind, "")
    return (f"{how}, the owner's NPV of the plan is {money_text(summary['npv_financed'], currency)} "
            f"(paid in cash: {money_text(summary['npv_cash'], currency)}) and, on the expected savings, {low} "
            f"(paid in cash: {money_text(min(0.0, summary['lowest_cash']), currency)}); "
            + ("its net flow is never negative in a year." if negative == 0 else
               f"its net flow is negative in {negative} year{'s' if negative != 1 else ''}.")
            + owed + " The plan, its ranking and every other figure are on the cash basis.")
