"""Money over time: discount factors, NPV, IRR, MIRR, payback, LCC, SIR, AIRR and the finance assumptions.

Every metric works on a cash-flow array whose last axis is the year (year 0 = investment, undiscounted;
year t > 0 falls at the end of year t; negative = money out) and broadcasts over the leading axes, so one
call scores a whole fleet of projects. A 1-D array or a :class:`pandas.Series` is one project and gives a
float; a 2-D array gives one value per row; a :class:`pandas.DataFrame` (rows = projects, columns = years)
gives a :class:`pandas.Series` on the same index. Results are never NaN: where a metric has no value
(an IRR that does not exist, a payback beyond the horizon) the function returns a documented sentinel
(``+inf``/``-inf``) together with a flag. The module also holds :class:`FinanceAssumptions`, the frozen
parameter set read from the case's finance table, and the real/nominal (Fisher) conversions that keep the
discount rate and the price escalation rates on the same basis.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Callable, Literal

import numba
import numpy as np
import pandas as pd

from models.problems import Problem, error, warning

#: IRR status: exactly one rate r > -1 makes the NPV zero.
IRR_UNIQUE = "unique"
#: IRR status: no rate r > -1 makes the NPV zero (value is +inf or -inf, see :func:`irr`).
IRR_NONE = "none"
#: IRR status: more than one rate makes the NPV zero (value is the root closest to zero).
IRR_MULTIPLE = "multiple"

#: Bill components whose savings escalate with their own price escalation rate.
BILL_COMPONENTS: tuple[str, ...] = ("energy", "demand", "reactive", "fixed")
#: Components with an escalation rate in :class:`FinanceAssumptions` (bill components plus maintenance).
ESCALATING_COMPONENTS: tuple[str, ...] = BILL_COMPONENTS + ("maintenance",)

RateBasis = Literal["real", "nominal"]
ReplacementMode = Literal["replace_now", "replace_at_failure"]
RATE_BASES: tuple[str, ...] = ("real", "nominal")
REPLACEMENT_MODES: tuple[str, ...] = ("replace_now", "replace_at_failure")


# ---------------------------------------------------------------------------------------------------
# Input handling
# ---------------------------------------------------------------------------------------------------
def _flows(cash_flows: Any) -> tuple[np.ndarray, Callable[[np.ndarray, str], Any]]:
    """Return the flows as a float array (..., n_years + 1) and a function that restores the input kind."""
    if isinstance(cash_flows, pd.DataFrame):
        array = cash_flows.to_numpy(dtype=float)
        index = cash_flows.index

        def wrap(out: np.ndarray, name: str) -> Any:
            return pd.Series(out, index=index, name=name)
    elif isinstance(cash_flows, pd.Series):
        array = cash_flows.to_numpy(dtype=float)

        def wrap(out: np.ndarray, name: str) -> Any:
            return out.item() if out.dtype.kind != "U" else str(out)
    else:
        array = np.asarray(cash_flows, dtype=float)

        def wrap(out: np.ndarray, name: str) -> Any:
            if out.ndim == 0:
                return out.item() if out.dtype.kind != "U" else str(out)
            return out
    if array.ndim == 0:
        raise ValueError("cash_flows must have a year axis (last axis: year 0, 1, ..., n_years)")
    if array.shape[-1] == 0:
        raise ValueError("cash_flows must hold at least year 0 on its last axis")
    if not np.all(np.isfinite(array)):
        raise ValueError("cash_flows must be finite (no NaN or inf); fill missing years with 0")
    return array, wrap


def _rate(rate_frac: Any, name: str) -> np.ndarray:
    """Return a rate as a float array, raising when any value is at or below -1."""
    rate = np.asarray(rate_frac, dtype=float)
    if not np.all(np.isfinite(rate)):
        raise ValueError(f"{name} must be finite")
    if np.any(rate <= -1.0):
        raise ValueError(f"{name} must be greater than -1 (a fraction: 8 % is 0.08)")
    return rate


def _years(years: Any, name: str = "years") -> np.ndarray:
    """Return a number of years as a float array, raising on negative or non-finite values."""
    n = np.asarray(years, dtype=float)
    if np.any(~np.isfinite(n)) or np.any(n < 0):
        raise ValueError(f"{name} must be finite and >= 0")
    return n


def _restore(out: np.ndarray, like: Any) -> Any:
    """Return ``out`` as a float when every input was a scalar."""
    return out.item() if np.ndim(out) == 0 and not isinstance(like, np.ndarray) else out


# ---------------------------------------------------------------------------------------------------
# Discount factors (NIST Handbook 135)
# ---------------------------------------------------------------------------------------------------
def spv_factor(discount_rate_frac: Any, year: Any) -> Any:
    """Return the single present value factor of an amount paid at the end of a year.

    Parameters
    ----------
    discount_rate_frac : float or array_like
        Discount rate per year [frac], > -1.
    year : float or array_like
        Year of the payment counted from year 0 [yr], >= 0.

    Returns
    -------
    float or numpy.ndarray
        SPV factor [-], in (0, 1] for a positive rate.

    Notes
    -----
    SPV = 1 / (1 + d)^t, Eq. (D.2.1.1) of the discount-factor appendix in [1].

    References
    ----------
    .. [1] S. K. Fuller and S. R. Petersen, "Life-Cycle Costing Manual for the Federal Energy Management
       Program," NIST Handbook 135, 1995 ed., National Institute of Standards and Technology, 1996.

    Examples
    --------
    >>> round(spv_factor(0.03, 10), 6)
    0.744094
    """
    d = _rate(discount_rate_frac, "discount_rate_frac")
    t = _years(year, "year")
    return _restore(np.power(1.0 + d, -t), discount_rate_frac)


def upv_factor(discount_rate_frac: Any, years: Any) -> Any:
    """Return the uniform present value factor of a constant yearly amount.

    Parameters
    ----------
    discount_rate_frac : float or array_like
        Discount rate per year [frac], > -1.
    years : float or array_like
        Number of yearly payments, the first at the end of year 1 [yr], >= 0.

    Returns
    -------
    float or numpy.ndarray
        UPV factor [-]; equals ``years`` when the rate is zero.

    Notes
    -----
    UPV = [(1 + d)^n - 1] / [d (1 + d)^n], the sum of SPV(d, t) for t = 1..n [1]. The same number is
    the "equal-payment series present worth factor" of engineering-economy textbooks and what
    ``numpy_financial.pv(d, n, -1)`` returns.

    References
    ----------
    .. [1] S. K. Fuller and S. R. Petersen, "Life-Cycle Costing Manual for the Federal Energy Management
       Program," NIST Handbook 135, 1995 ed., National Institute of Standards and Technology, 1996.

    Examples
    --------
    >>> round(upv_factor(0.03, 10), 6)
    8.530203
    """
    d = _rate(discount_rate_frac, "discount_rate_frac")
    n = _years(years)
    with np.errstate(divide="ignore", invalid="ignore"):
        growth = np.power(1.0 + d, n)
        out = np.where(d == 0.0, n, (growth - 1.0) / (d * growth))
    return _restore(out, discount_rate_frac)


def upv_star_factor(discount_rate_frac: Any, escalation_frac: Any, years: Any) -> Any:
    """Return the modified uniform present value factor of a yearly amount that escalates.

    Parameters
    ----------
    discount_rate_frac : float or array_like
        Discount rate per year [frac], > -1.
    escalation_frac : float or array_like
        Escalation rate of the amount per year, same basis (real or nominal) as the discount rate
        [frac], > -1.
    years : float or array_like
        Number of yearly payments, the first at the end of year 1 [yr], >= 0.

    Returns
    -------
    float or numpy.ndarray
        UPV* factor [-]; equals ``years`` when the two rates are equal.

    Notes
    -----
    UPV* = [(1 + e) / (d - e)] [1 - ((1 + e) / (1 + d))^n] [1], the sum of ((1 + e)/(1 + d))^t for
    t = 1..n. The amount is stated at base-year (year 0) prices, so the payment at the end of year t is
    A0 (1 + e)^t. :mod:`models.cashflows` uses the same convention.

    References
    ----------
    .. [1] S. K. Fuller and S. R. Petersen, "Life-Cycle Costing Manual for the Federal Energy Management
       Program," NIST Handbook 135, 1995 ed., National Institute of Standards and Technology, 1996.

    Examples
    --------
    >>> round(upv_star_factor(0.03, 0.02, 20), 6)
    18.081229
    """
    d = _rate(discount_rate_frac, "discount_rate_frac")
    e = _rate(escalation_frac, "escalation_frac")
    n = _years(years)
    ratio = (1.0 + e) / (1.0 + d)
    with np.errstate(divide="ignore", invalid="ignore"):
        out = np.where(d == e, n, (1.0 + e) / (d - e) * (1.0 - np.power(ratio, n)))
    return _restore(out, discount_rate_frac)


def capital_recovery_factor(discount_rate_frac: Any, years: Any) -> Any:
    """Return the capital recovery factor that turns a present value into an equal yearly amount.

    Parameters
    ----------
    discount_rate_frac : float or array_like
        Discount rate per year [frac], > -1.
    years : float or array_like
        Number of yearly payments [yr], > 0.

    Returns
    -------
    float or numpy.ndarray
        CRF [1/yr]; 1/years at a zero rate.

    Notes
    -----
    CRF = d (1 + d)^n / [(1 + d)^n - 1] = 1 / UPV(d, n) [1].

    References
    ----------
    .. [1] S. K. Fuller and S. R. Petersen, "Life-Cycle Costing Manual for the Federal Energy Management
       Program," NIST Handbook 135, 1995 ed., National Institute of Standards and Technology, 1996.

    Examples
    --------
    >>> round(capital_recovery_factor(0.0, 4), 6)
    0.25
    """
    n = _years(years)
    if np.any(n <= 0):
        raise ValueError("years must be > 0 for a capital recovery factor")
    upv = np.asarray(upv_factor(discount_rate_frac, n))
    return _restore(1.0 / upv, discount_rate_frac)


def discount_factors(discount_rate_frac: Any, n_years: int) -> np.ndarray:
    """Return the SPV factors of years 0..n_years, broadcast over the shape of the rate.

    Parameters
    ----------
    discount_rate_frac : float or array_like
        Discount rate per year [frac], > -1.
    n_years : int
        Last year of the horizon [yr], >= 0.

    Returns
    -------
    numpy.ndarray
        Factors of shape ``np.shape(discount_rate_frac) + (n_years + 1,)`` [-]; year 0 is 1.
    """
    if int(n_years) != n_years or n_years < 0:
        raise ValueError("n_years must be a whole number >= 0")
    d = _rate(discount_rate_frac, "discount_rate_frac")
    t = np.arange(int(n_years) + 1, dtype=float)
    return np.power(1.0 + d[..., None], -t)


# ---------------------------------------------------------------------------------------------------
# Real and nominal rates (Fisher relation)
# ---------------------------------------------------------------------------------------------------
def nominal_rate_frac(real_rate_frac: Any, inflation_frac: Any) -> Any:
    """Return the nominal rate equivalent to a real rate at a given general inflation.

    Parameters
    ----------
    real_rate_frac : float or array_like
        Rate net of general inflation [frac/yr], > -1. Works for discount and escalation rates alike.
    inflation_frac : float or array_like
        General inflation [frac/yr], > -1.

    Returns
    -------
    float or numpy.ndarray
        Nominal rate [frac/yr].

    Notes
    -----
    (1 + n) = (1 + r)(1 + i), the Fisher relation [1], as used for discount rates in [2].

    References
    ----------
    .. [1] I. Fisher, *The Theory of Interest*. New York: Macmillan, 1930.
    .. [2] S. K. Fuller and S. R. Petersen, "Life-Cycle Costing Manual for the Federal Energy Management
       Program," NIST Handbook 135, 1995 ed., National Institute of Standards and Technology, 1996.

    Examples
    --------
    >>> round(nominal_rate_frac(0.05, 0.02), 6)
    0.071
    """
    r = _rate(real_rate_frac, "real_rate_frac")
    i = _rate(inflation_frac, "inflation_frac")
    return _restore((1.0 + r) * (1.0 + i) - 1.0, real_rate_frac)


def real_rate_frac(nominal_rate_frac: Any, inflation_frac: Any) -> Any:
    """Return the real rate equivalent to a nominal rate at a given general inflation.

    Parameters
    ----------
    nominal_rate_frac : float or array_like
        Rate including general inflation [frac/yr], > -1.
    inflation_frac : float or array_like
        General inflation [frac/yr], > -1.

    Returns
    -------
    float or numpy.ndarray
        Real rate [frac/yr].

    Notes
    -----
    r = (1 + n) / (1 + i) - 1, the Fisher relation [1]. Note r is not n - i; the difference matters at
    high inflation.

    References
    ----------
    .. [1] I. Fisher, *The Theory of Interest*. New York: Macmillan, 1930.

    Examples
    --------
    >>> round(real_rate_frac(0.071, 0.02), 6)
    0.05
    """
    n = _rate(nominal_rate_frac, "nominal_rate_frac")
    i = _rate(inflation_frac, "inflation_frac")
    return _restore((1.0 + n) / (1.0 + i) - 1.0, nominal_rate_frac)


# ---------------------------------------------------------------------------------------------------
# NPV, LCC
# ---------------------------------------------------------------------------------------------------
def npv(cash_flows: Any, discount_rate_frac: Any) -> Any:
    """Return the net present value of yearly cash flows.

    Parameters
    ----------
    cash_flows : array_like, pandas.Series or pandas.DataFrame
        Cash flows, last axis (or columns) = year 0..n_years; negative = money out [currency].
    discount_rate_frac : float or array_like
        Discount rate per year [frac], > -1; an array must broadcast against ``cash_flows.shape[:-1]``
        (shape (n_projects,) for one rate per project; (n_draws, 1) for one rate per draw of an
        (n_draws, n_projects, n_years + 1) array).

    Returns
    -------
    float, numpy.ndarray or pandas.Series
        NPV [currency], one per project.

    Notes
    -----
    NPV = sum_t CF_t / (1 + d)^t for t = 0..n [1]. Year 0 is not discounted.

    Warnings
    --------
    This equals ``numpy_financial.npv(d, values)`` (which also treats the first value as t = 0) but not a
    spreadsheet ``NPV(d, v0..vn)``, which discounts the first value by one period.

    References
    ----------
    .. [1] S. K. Fuller and S. R. Petersen, "Life-Cycle Costing Manual for the Federal Energy Management
       Program," NIST Handbook 135, 1995 ed., National Institute of Standards and Technology, 1996.

    Examples
    --------
    A motor swap costs 40,000 now and saves 5,000, 8,000, 12,000 and 30,000 over four years:

    >>> round(npv([-40_000, 5_000, 8_000, 12_000, 30_000], 0.08), 5)
    3065.22267
    """
    c, wrap = _flows(cash_flows)
    d = _rate(discount_rate_frac, "discount_rate_frac")
    factors = np.power(1.0 + d[..., None], -np.arange(c.shape[-1], dtype=float))
    return wrap(np.asarray((c * factors).sum(axis=-1)), "npv")


def life_cycle_cost(cash_flows: Any, discount_rate_frac: Any) -> Any:
    """Return the life-cycle cost: the present value of all costs of one alternative.

    Parameters
    ----------
    cash_flows : array_like, pandas.Series or pandas.DataFrame
        The alternative's own flows (investment, energy, maintenance, replacements negative; residual
        value positive), last axis = year 0..n_years [currency].
    discount_rate_frac : float or array_like
        Discount rate per year [frac], > -1.

    Returns
    -------
    float, numpy.ndarray or pandas.Series
        LCC [currency], positive for a net cost.

    Notes
    -----
    LCC = sum_t C_t / (1 + d)^t with costs counted positive and the residual value subtracted [1],
    i.e. LCC = -NPV of the flows in our sign convention.

    References
    ----------
    .. [1] S. K. Fuller and S. R. Petersen, "Life-Cycle Costing Manual for the Federal Energy Management
       Program," NIST Handbook 135, 1995 ed., National Institute of Standards and Technology, 1996.

    Examples
    --------
    >>> round(life_cycle_cost([-1000, -100, -100], 0.0), 6)
    1200.0
    """
    value = npv(cash_flows, discount_rate_frac)
    if isinstance(value, pd.Series):
        return (-value).rename("lcc")
    return -value


# ---------------------------------------------------------------------------------------------------
# IRR
# ---------------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class IrrResult:
    """Internal rate of return with a flag saying whether it exists and is unique.

    Attributes
    ----------
    irr_frac : float, numpy.ndarray or pandas.Series
        IRR per year [frac]. Never NaN: ``+inf`` when no rate makes the NPV zero and the NPV is positive
        at every rate, ``-inf`` when it is negative at every rate; for several roots, the one closest to 0.
    status : str, numpy.ndarray or pandas.Series
        ``"unique"``, ``"none"`` or ``"multiple"`` (see :data:`IRR_UNIQUE` and the others).
    """

    irr_frac: Any
    status: Any

    @property
    def is_unique(self) -> Any:
        """True where exactly one IRR exists (bool, array or Series like ``status``)."""
        if isinstance(self.status, pd.Series):
            return self.status == IRR_UNIQUE
        out = np.asarray(self.status) == IRR_UNIQUE
        return out.item() if out.ndim == 0 else out


def _log_sum_exp(log_terms: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Return log(sum(exp(a))) over the last axis and the softmax weights (rows have a finite term)."""
    top = np.max(log_terms, axis=-1, keepdims=True)
    scaled = np.exp(log_terms - top)
    total = scaled.sum(axis=-1, keepdims=True)
    return (top + np.log(total))[..., 0], scaled / total


def _h_and_slope(log_pos: np.ndarray, log_neg: np.ndarray, u: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Return h(u) = ln(PV of inflows) - ln(PV of outflows) at u = ln(1 + r), and dh/du."""
    t = np.arange(log_pos.shape[-1], dtype=float)
    lse_pos, w_pos = _log_sum_exp(log_pos - u[:, None] * t)
    lse_neg, w_neg = _log_sum_exp(log_neg - u[:, None] * t)
    return lse_pos - lse_neg, (w_neg * t).sum(-1) - (w_pos * t).sum(-1)


def _solve_u(c: np.ndarray, low: np.ndarray, high: np.ndarray, direction: np.ndarray,
             u0: np.ndarray) -> np.ndarray:
    """Find u = ln(1 + r) with NPV = 0 inside [low, high] by safeguarded Newton steps (vectorised).

    ``direction`` is +1 where h increases through the root (h(high) > 0), -1 where it decreases. Each
    row must hold exactly one simple root inside its bracket. Working in log space keeps the
    evaluation finite for rates near -1 and for very large rates.
    """
    with np.errstate(divide="ignore"):
        log_pos = np.log(np.where(c > 0, c, 0.0))
        log_neg = np.log(np.where(c < 0, -c, 0.0))
    u = np.asarray(u0, dtype=float).copy()
    active = np.arange(c.shape[0])
    h, slope = _h_and_slope(log_pos, log_neg, u)
    for _ in range(300):
        g = direction * h
        high = np.where(g > 0, u[active], high)
        low = np.where(g <= 0, u[active], low)
        with np.errstate(divide="ignore", invalid="ignore"):
            newton = u[active] - h / slope
        inside = np.isfinite(newton) & (newton > low) & (newton < high)
        u_new = np.where(inside, newton, 0.5 * (low + high))
        step = np.abs(u_new - u[active])
        u[active] = u_new
        # Newton converges quadratically: after a step below 1e-9 the error is far below 1e-15.
        keep = (step > 1e-9 * np.maximum(1.0, np.abs(u_new))) | ~inside
        keep &= (high - low) > 4e-16 * np.maximum(1.0, np.abs(u_new))
        if not keep.any():
            break
        active, low, high, direction = active[keep], low[keep], high[keep], direction[keep]
        h, slope = _h_and_slope(log_pos[active], log_neg[active], u[active])
    return u


def _irr_one_sign_change(c: np.ndarray) -> np.ndarray:
    """Solve the unique IRR of rows whose flows change sign exactly once.

    With u = ln(1 + r), h(u) = ln(PV of inflows) - ln(PV of outflows) is monotone with |h'(u)| >= 1
    when the flows change sign once (the mean time of the outflows and of the inflows differ by at
    least one year), so |u* - 0| <= |h(0)| brackets the root from the first evaluation.
    """
    with np.errstate(divide="ignore"):
        log_pos = np.log(np.where(c > 0, c, 0.0))
        log_neg = np.log(np.where(c < 0, -c, 0.0))
    zero = np.zeros(c.shape[0])
    h, slope = _h_and_slope(log_pos, log_neg, zero)
    width = np.abs(h) * (1.0 + 1e-9) + 1e-12
    return np.expm1(_solve_u(c, -width, width, np.sign(slope), zero))


def _sign_changes(matrix: np.ndarray, zero_tol: np.ndarray | float = 0.0) -> np.ndarray:
    """Count sign changes along the last axis, skipping entries with magnitude <= zero_tol."""
    sign = np.where(np.abs(matrix) > zero_tol, np.sign(matrix), 0.0)
    position = np.where(sign != 0, np.arange(matrix.shape[-1]), 0)
    filled = np.take_along_axis(sign, np.maximum.accumulate(position, axis=-1), axis=-1)
    return (filled[..., 1:] * filled[..., :-1] < 0).sum(axis=-1)


def _binomial_matrices(n: int) -> tuple[np.ndarray, np.ndarray]:
    """Return M_pos[t, k] = C(n - t, k) and M_neg[t, k] = C(t, k) for t, k = 0..n (float)."""
    pascal = np.zeros((n + 1, n + 1))
    pascal[:, 0] = 1.0
    for row in range(1, n + 1):
        pascal[row, 1:row + 1] = pascal[row - 1, :row] + pascal[row - 1, 1:row + 1]
    return pascal[::-1].copy(), pascal


def _positive_root_bound(coefficients: np.ndarray, zero_tol: np.ndarray) -> np.ndarray:
    """Cauchy bound 1 + max|b_k / b_m| on the positive roots of sum_k b_k y^k (b_m = last non-zero)."""
    significant = np.abs(coefficients) > zero_tol
    m = coefficients.shape[-1] - 1 - np.argmax(significant[:, ::-1], axis=1)
    lead = np.abs(np.take_along_axis(coefficients, m[:, None], axis=1))[:, 0]
    lower = np.arange(coefficients.shape[-1]) < m[:, None]
    ratio = np.where(lower, np.abs(coefficients), 0.0).max(axis=1) / lead
    return 1.0 + ratio


def _irr_polynomial(c: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Find every IRR of rows from polynomial roots (batched companion-matrix eigenvalues).

    Returns the root closest to zero, the count of distinct roots r > -1 and the NPV sign at r = 0.1
    (used when no root exists).
    """
    rows, width = c.shape
    value = np.zeros(rows)
    count = np.zeros(rows, dtype=int)
    nonzero = c != 0
    first = np.argmax(nonzero, axis=1)
    last = width - 1 - np.argmax(nonzero[:, ::-1], axis=1)
    degree = last - first
    for m in np.unique(degree):
        pick = np.flatnonzero(degree == m)
        if m == 0:
            continue
        idx = first[pick, None] + np.arange(m + 1)
        a = np.take_along_axis(c[pick], idx, axis=1)  # a[:, k] multiplies x^k, x = 1/(1+r)
        companion = np.zeros((pick.size, m, m))
        companion[:, 0, :] = -a[:, m - 1::-1] / a[:, m:m + 1]
        if m > 1:
            companion[:, np.arange(1, m), np.arange(m - 1)] = 1.0
        roots = np.linalg.eigvals(companion)
        real = np.abs(roots.imag) <= 1e-7 * np.maximum(1.0, np.abs(roots))
        x = np.where(real, roots.real, np.nan)
        x = np.where(x > 0, x, np.nan)
        for _ in range(3):  # Newton polish on the polynomial in x
            f = np.zeros_like(x)
            df = np.zeros_like(x)
            for k in range(m, -1, -1):
                df = df * x + f
                f = f * x + a[:, k:k + 1]
            with np.errstate(divide="ignore", invalid="ignore"):
                step = np.where(df != 0, f / np.where(df != 0, df, 1.0), 0.0)
            x_new = x - step
            x = np.where(x_new > 0, x_new, x)
        r = np.sort(1.0 / x - 1.0, axis=1)  # NaN last
        valid = np.isfinite(r)
        distinct = valid.copy()
        distinct[:, 1:] &= ~(np.abs(np.diff(r, axis=1)) <= 1e-9 * np.maximum(1.0, np.abs(r[:, 1:])))
        count[pick] = distinct.sum(axis=1)
        closest = np.argmin(np.where(valid, np.abs(r), np.inf), axis=1)
        value[pick] = np.where(valid.any(axis=1), r[np.arange(pick.size), closest], 0.0)
    t = np.arange(width, dtype=float)
    sign_at = np.sign((c * 1.1 ** -t).sum(-1))
    sign_at = np.where(sign_at == 0, np.sign(c.sum(-1)), sign_at)
    return value, count, sign_at


def _irr_several_sign_changes(c: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """IRR value and status of rows whose flows change sign more than once.

    Descartes' rule is applied on each side of r = 0 after a Taylor shift: the roots r > 0 are the
    positive roots of sum_t CF_t (1 + r)^(n - t) (the future-value polynomial), and the roots
    -1 < r < 0 are the positive roots y of sum_t CF_t (1 + y)^t with x = 1/(1 + r) = 1 + y. A side
    with 0 or 1 sign change has exactly that many roots, which are then solved in a bracket bounded by
    the Cauchy root bound. Rows with more sign changes on a side fall back to eigenvalues.
    """
    rows, width = c.shape
    n = width - 1
    m_pos, m_neg = _binomial_matrices(n)
    size = np.abs(c)
    b_pos, b_neg = c @ m_pos, c @ m_neg
    tol_pos = 64 * np.finfo(float).eps * (size @ m_pos)
    tol_neg = 64 * np.finfo(float).eps * (size @ m_neg)
    v_pos = _sign_changes(b_pos, tol_pos)
    v_neg = _sign_changes(b_neg, tol_neg)
    zero_root = np.abs(c.sum(axis=1)) <= 64 * np.finfo(float).eps * size.sum(axis=1)
    value = np.zeros(rows)
    status = np.full(rows, IRR_UNIQUE, dtype="<U8")
    exact = (v_pos <= 1) & (v_neg <= 1)
    total = v_pos + v_neg + zero_root
    with np.errstate(divide="ignore", invalid="ignore"):
        sign_at_zero = np.sign(c.sum(axis=1))
    # No root at all: NPV keeps the sign it has at r = 0.
    none = exact & (total == 0)
    value[none] = np.where(sign_at_zero[none] > 0, np.inf, -np.inf)
    status[none] = IRR_NONE
    status[exact & (total >= 2)] = IRR_MULTIPLE
    value[exact & zero_root] = 0.0
    roots_pos = np.full(rows, np.inf)
    roots_neg = np.full(rows, np.inf)
    for side, v, b, tol, roots in ((1.0, v_pos, b_pos, tol_pos, roots_pos),
                                   (-1.0, v_neg, b_neg, tol_neg, roots_neg)):
        solve = np.flatnonzero(exact & ~zero_root & (v == 1))
        if not solve.size:
            continue
        bound = np.log1p(2.0 * _positive_root_bound(b[solve], tol[solve]))
        low, high = (np.zeros(solve.size), bound) if side > 0 else (-bound, np.zeros(solve.size))
        # h at u = 0 has the sign of the undiscounted sum; on the root's far side the sign flips.
        direction = -side * sign_at_zero[solve]
        u0 = np.clip(side * np.log(1.1), low + 0.25 * (high - low), high - 0.25 * (high - low))
        roots[solve] = np.expm1(_solve_u(c[solve], low, high, direction, u0))
    found = exact & ~zero_root & (total >= 1)
    closest = np.where(np.abs(roots_pos) <= np.abs(roots_neg), roots_pos, roots_neg)
    value[found] = closest[found]
    fallback = np.flatnonzero(~exact)
    if fallback.size:
        closest_fb, count, sign_at = _irr_polynomial(c[fallback])
        value[fallback] = np.where(count >= 1, closest_fb, np.where(sign_at > 0, np.inf, -np.inf))
        status[fallback] = np.where(count == 1, IRR_UNIQUE, np.where(count == 0, IRR_NONE, IRR_MULTIPLE))
    return value, status


def irr(cash_flows: Any) -> IrrResult:
    """Return the internal rate of return of yearly cash flows, with a uniqueness flag.

    Parameters
    ----------
    cash_flows : array_like, pandas.Series or pandas.DataFrame
        Cash flows, last axis (or columns) = year 0..n_years; negative = money out [currency].

    Returns
    -------
    IrrResult
        ``irr_frac`` [frac/yr] and ``status`` per project, both of the input's kind. Never NaN:

        * ``status == "unique"``: exactly one rate r > -1 gives NPV = 0; ``irr_frac`` is that rate.
        * ``status == "none"``: no rate gives NPV = 0. ``irr_frac = +inf`` when the NPV is positive at
          every rate (e.g. only inflows), ``-inf`` when negative at every rate (e.g. only outflows).
          All-zero flows (nothing happens within the horizon) are also "none" with ``-inf``.
        * ``status == "multiple"``: several rates give NPV = 0 (flows that change sign more than once,
          e.g. a repeat purchase mid-horizon, can do this). ``irr_frac`` is the root closest to zero,
          the choice ``numpy_financial.irr`` makes; rank such projects by NPV or MIRR instead.

    Notes
    -----
    The IRR solves sum_t CF_t / (1 + r)^t = 0 [1]. By Descartes' rule of signs, the polynomial in
    x = 1/(1 + r) has at most as many positive roots as the flows have sign changes, with the same
    parity [2]: one sign change means exactly one IRR. Those rows (the usual "invest, then save" shape)
    are solved together by a safeguarded Newton iteration in ln(1 + r) on the log-ratio of discounted
    inflows to discounted outflows, whose slope is at least 1 in magnitude, so the root is bracketed from
    the first evaluation. Rows with several sign changes are solved from the eigenvalues of their
    companion matrices (batched), polished by Newton steps; distinct real roots with x > 0 are counted.
    Zero flows between non-zero ones are allowed; leading zeros (a deferred start) are handled. Flows
    smaller than 1e-12 of the row's largest are treated as zero.

    References
    ----------
    .. [1] R. A. Brealey, S. C. Myers and F. Allen, *Principles of Corporate Finance*, 10th ed.
       New York: McGraw-Hill, 2011, ch. 5.
    .. [2] C. J. Norstrom, "A sufficient condition for a unique nonnegative internal rate of return,"
       *J. Financial and Quantitative Analysis*, vol. 7, no. 3, pp. 1835-1839, 1972.

    Examples
    --------
    >>> result = irr([-100, 39, 59, 55, 20])
    >>> round(result.irr_frac, 10), result.status
    (0.2809484212, 'unique')
    >>> irr([-100, -5]).irr_frac
    -inf
    """
    c, wrap = _flows(cash_flows)
    shape = c.shape[:-1]
    flat = c.reshape(-1, c.shape[-1])
    # Flows below 1e-12 of a row's largest cannot move its NPV at working precision (typically residue of
    # a capital and a credit that cancel); as zeros they cannot fake extra sign changes.
    scale = np.max(np.abs(flat), axis=1, keepdims=True) if flat.size else np.zeros((0, 1))
    flat = np.where(np.abs(flat) <= 1e-12 * scale, 0.0, flat)
    rows = flat.shape[0]
    value = np.zeros(rows)
    status = np.full(rows, IRR_UNIQUE, dtype="<U8")
    changes = _sign_changes(flat)

    zero_change = changes == 0
    any_pos = (flat > 0).any(axis=1)
    any_neg = (flat < 0).any(axis=1)
    value[zero_change & any_pos] = np.inf
    value[zero_change & any_neg] = -np.inf
    status[zero_change] = IRR_NONE
    value[zero_change & ~any_pos & ~any_neg] = -np.inf  # nothing happens: no return is earned

    one = np.flatnonzero(changes == 1)
    if one.size:
        value[one] = _irr_one_sign_change(flat[one])

    several = np.flatnonzero(changes >= 2)
    if several.size:
        value[several], status[several] = _irr_several_sign_changes(flat[several])

    value = value.reshape(shape)
    status = status.reshape(shape)
    return IrrResult(irr_frac=wrap(value, "irr_frac"), status=wrap(status, "irr_status"))


def mirr(cash_flows: Any, finance_rate_frac: Any, reinvest_rate_frac: Any) -> Any:
    """Return the modified internal rate of return.

    Parameters
    ----------
    cash_flows : array_like, pandas.Series or pandas.DataFrame
        Cash flows, last axis = year 0..n_years with n_years >= 1; negative = money out [currency].
    finance_rate_frac : float or array_like
        Rate at which outflows are discounted to year 0 [frac/yr], > -1.
    reinvest_rate_frac : float or array_like
        Rate at which inflows are compounded to year n [frac/yr], > -1.

    Returns
    -------
    float, numpy.ndarray or pandas.Series
        MIRR [frac/yr]. Never NaN: ``+inf`` when there is no outflow but some inflow; ``-1.0`` when
        there is no inflow (all money lost), including all-zero flows.

    Notes
    -----
    MIRR = [FV_n(inflows at the reinvest rate) / PV_0(outflows at the finance rate)]^(1/n) - 1 [1].
    This is ``numpy_financial.mirr`` (n = number of values - 1). With finance = reinvest = d and all
    outflows in year 0 it equals the AIRR of NIST Handbook 135 / 10 CFR 436.22; see :func:`airr`.

    References
    ----------
    .. [1] R. A. Brealey, S. C. Myers and F. Allen, *Principles of Corporate Finance*, 10th ed.
       New York: McGraw-Hill, 2011, ch. 5.

    Examples
    --------
    >>> round(mirr([-1000, 100, 50, 10, 15], 0.34, 0.21), 12)
    -0.274227470827
    """
    c, wrap = _flows(cash_flows)
    n = c.shape[-1] - 1
    if n < 1:
        raise ValueError("mirr needs at least one year after year 0")
    f = _rate(finance_rate_frac, "finance_rate_frac")[..., None]
    re = _rate(reinvest_rate_frac, "reinvest_rate_frac")[..., None]
    t = np.arange(n + 1, dtype=float)
    pv_out = -(np.minimum(c, 0.0) * np.power(1.0 + f, -t)).sum(axis=-1)
    fv_in = (np.maximum(c, 0.0) * np.power(1.0 + re, n - t)).sum(axis=-1)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):  # a ratio beyond float range is +inf
        out = np.where(pv_out > 0, np.power(fv_in / np.where(pv_out > 0, pv_out, 1.0), 1.0 / n) - 1.0,
                       np.where(fv_in > 0, np.inf, -1.0))
    return wrap(np.asarray(out), "mirr_frac")


# ---------------------------------------------------------------------------------------------------
# Payback
# ---------------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class PaybackResult:
    """Payback time with a flag saying whether it falls within the horizon.

    Attributes
    ----------
    payback_yr : float, numpy.ndarray or pandas.Series
        Years from the first outlay (the first year the cumulative flow is below zero; year 0 for an
        investment made at once) until the cumulative flow is back at zero or above [yr]; ``np.inf`` when
        it does not come back within the horizon, or when there is no flow at all (never NaN); 0 when the
        cumulative flow is never below zero and some money comes in.
    within_horizon : bool, numpy.ndarray or pandas.Series
        True where the payback falls within the horizon.
    lost_again : bool, numpy.ndarray or pandas.Series
        True where the payback falls within the horizon but the cumulative flow ends the horizon below zero
        again (a later outlay, such as a repeat purchase, takes back more than came in): the payback stated
        is then the first crossing only.
    """

    payback_yr: Any
    within_horizon: Any
    lost_again: Any = False


def _payback(c: np.ndarray, wrap: Callable[[np.ndarray, str], Any], overwrite: bool = False) -> PaybackResult:
    """First crossing of the cumulative flow back to >= 0 after its first outlay, interpolated linearly inside
    the year and counted from that outlay.

    One compiled pass per row of the last axis (:func:`_payback_rows`); nothing is written to ``c``
    (``overwrite`` is accepted for callers that allow it)."""
    c = np.asarray(c, dtype=float)
    rows = np.ascontiguousarray(c).reshape(-1, c.shape[-1]) if c.ndim else c.reshape(1, 1)
    years = np.empty(rows.shape[0])
    within = np.empty(rows.shape[0], dtype=bool)
    _payback_rows(rows, years, within)
    # the cumulative flow at the horizon's end is the row's sum; below the kernel's tolerance it is lost again
    # (no temporary of the flows' size: Monte Carlo arrays can be large)
    if rows.shape[1]:
        scale = np.maximum(rows.max(axis=1), -rows.min(axis=1))
        lost = within & (rows.sum(axis=1) < -1e-12 * scale)
    else:
        lost = np.zeros(rows.shape[0], dtype=bool)
    shape = c.shape[:-1] if c.ndim else ()
    return PaybackResult(payback_yr=wrap(years.reshape(shape), "payback_yr"),
                         within_horizon=wrap(within.reshape(shape), "within_horizon"),
                         lost_again=wrap(lost.reshape(shape), "lost_again"))


@numba.njit(nogil=True, cache=True)
def _payback_rows(flows, years, within):  # pragma: no cover - compiled
    """Per row, with the running sum S_t = S_(t-1) + CF_t (in order, as numpy.cumsum) and the tolerance
    e = 1e-12 x the largest |CF|: the first outlay t0 is the first t with S_t < -e; the payback is then
    (t - 1) + clip(-S_(t-1) / (S_t - S_(t-1)), 0, 1) - t0 at the first t > t0 with S_t >= -e (the divisor 1
    where it is not positive). With no outlay it is 0 where some S_t > e. Otherwise (no flows, never back
    at zero, a NaN flow) inf and not within the horizon."""
    n, m = flows.shape
    for i in range(n):
        hi, lo, nan = -np.inf, np.inf, False
        for t in range(m):
            v = flows[i, t]
            if v != v:
                nan = True
            hi = max(hi, v)
            lo = min(lo, v)
        years[i], within[i] = np.inf, False
        if nan or m == 0:
            continue
        tolerance = -1e-12 * max(hi, -lo)
        total, before, outlay, money_in = 0.0, 0.0, -1, False
        for t in range(m):
            before = total
            total = flows[i, t] if t == 0 else total + flows[i, t]
            if outlay < 0:
                if total < tolerance:
                    outlay = t
                elif total > -tolerance:
                    money_in = True
                continue
            if total >= tolerance:
                within[i] = True
                flow = total - before
                part = -before / (flow if flow > 0.0 else 1.0)
                years[i] = (t - 1.0) + min(max(part, 0.0), 1.0) - outlay
                break
        if outlay < 0 and money_in:
            years[i], within[i] = 0.0, True


def simple_payback(cash_flows: Any, overwrite: bool = False) -> PaybackResult:
    """Return the simple (undiscounted) payback time.

    Parameters
    ----------
    cash_flows : array_like, pandas.Series or pandas.DataFrame
        Cash flows, last axis = year 0..n_years; negative = money out [currency].
    overwrite : bool
        Allow a float64 numpy array given as ``cash_flows`` to be overwritten with its running sum
        (saves a copy of a large array, e.g. Monte Carlo draws); other inputs are never changed.

    Returns
    -------
    PaybackResult
        ``payback_yr`` [yr] (``np.inf`` when not within the horizon) and ``within_horizon``.

    Notes
    -----
    The payback is the time from the first outlay to the first time the cumulative flow
    S_t = sum_{k<=t} CF_k is back at 0 [1]. The first outlay is the first year t0 with S_t0 < 0: year 0
    for an investment made at once, the failure year for a replacement that waits for it. When
    S_{t-1} < 0 <= S_t, the year's flow is taken to accrue evenly through year t, so the payback is
    (t - 1) + (-S_{t-1}) / CF_t - t0. Flows are otherwise booked at year end (see docs/conventions.md).
    A later outflow (a repeat purchase) that turns the cumulative flow negative again does not undo the
    first crossing; where the cumulative flow still ends the horizon below zero, ``lost_again`` says so. A cumulative flow never below zero pays back at once (0) when some money comes in;
    with no flow at all there is nothing to pay back (inf, not within the horizon). A small tolerance
    (1e-12 of the largest flow) absorbs rounding at exact break-even.

    References
    ----------
    .. [1] S. K. Fuller and S. R. Petersen, "Life-Cycle Costing Manual for the Federal Energy Management
       Program," NIST Handbook 135, 1995 ed., National Institute of Standards and Technology, 1996.

    Examples
    --------
    >>> simple_payback([-1000, 400, 400, 400]).payback_yr
    2.5
    >>> simple_payback([-1000, 100, 100]).payback_yr
    inf
    >>> r = simple_payback([-1000, 600, 600, -500])
    >>> round(float(r.payback_yr), 6), bool(r.lost_again)
    (1.666667, True)
    """
    c, wrap = _flows(cash_flows)
    return _payback(c, wrap, overwrite=overwrite and c is cash_flows and c.flags.writeable)


def discounted_payback(cash_flows: Any, discount_rate_frac: Any) -> PaybackResult:
    """Return the discounted payback time.

    Parameters
    ----------
    cash_flows : array_like, pandas.Series or pandas.DataFrame
        Cash flows, last axis = year 0..n_years; negative = money out [currency].
    discount_rate_frac : float or array_like
        Discount rate per year [frac], > -1; an array must broadcast against ``cash_flows.shape[:-1]``.

    Returns
    -------
    PaybackResult
        ``payback_yr`` [yr] (``np.inf`` when not within the horizon) and ``within_horizon``.

    Notes
    -----
    As :func:`simple_payback` applied to the discounted flows CF_t / (1 + d)^t [1]. For a positive rate
    and a single outlay at year 0 followed by inflows, it is never shorter than the simple payback.

    References
    ----------
    .. [1] S. K. Fuller and S. R. Petersen, "Life-Cycle Costing Manual for the Federal Energy Management
       Program," NIST Handbook 135, 1995 ed., National Institute of Standards and Technology, 1996.

    Examples
    --------
    >>> round(discounted_payback([-1000, 1100, 0], 0.10).payback_yr, 6)
    1.0
    """
    c, wrap = _flows(cash_flows)
    d = _rate(discount_rate_frac, "discount_rate_frac")
    discounted = c * np.power(1.0 + d[..., None], -np.arange(c.shape[-1], dtype=float))
    return _payback(discounted, wrap)


# ---------------------------------------------------------------------------------------------------
# SIR, AIRR, annualised metrics, profitability index
# ---------------------------------------------------------------------------------------------------
def savings_to_investment_ratio(savings_flows: Any, investment_flows: Any, discount_rate_frac: Any) -> Any:
    """Return the savings-to-investment ratio of a project against its base case.

    Parameters
    ----------
    savings_flows : array_like, pandas.Series or pandas.DataFrame
        Yearly operational savings (energy, demand, reactive, maintenance), positive = saved, last axis =
        year 0..n_years [currency].
    investment_flows : array_like, pandas.Series or pandas.DataFrame
        Incremental investment-related flows of the same shape: capital and replacements negative,
        residual (salvage) value positive [currency].
    discount_rate_frac : float or array_like
        Discount rate per year [frac], > -1.

    Returns
    -------
    float, numpy.ndarray or pandas.Series
        SIR [-]. Never NaN: ``+inf`` where the net investment PV is <= 0 and the savings PV is > 0; 0.0
        where both are <= 0.

    Notes
    -----
    SIR = PV(net savings) / PV(incremental investment - residual value) [1]. SIR > 1 is the same test as
    NPV > 0 when both use the same flows and rate.

    References
    ----------
    .. [1] S. K. Fuller and S. R. Petersen, "Life-Cycle Costing Manual for the Federal Energy Management
       Program," NIST Handbook 135, 1995 ed., National Institute of Standards and Technology, 1996.

    Examples
    --------
    >>> round(savings_to_investment_ratio([0, 600, 600], [-1000, 0, 0], 0.0), 6)
    1.2
    """
    savings = npv(savings_flows, discount_rate_frac)
    investment = npv(investment_flows, discount_rate_frac)
    s = np.asarray(savings, dtype=float)
    i = -np.asarray(investment, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        out = np.where(i > 0, s / np.where(i > 0, i, 1.0), np.where(s > 0, np.inf, 0.0))
    if isinstance(savings, pd.Series):
        return pd.Series(out, index=savings.index, name="sir")
    return out.item() if out.ndim == 0 else out


def airr(sir: Any, discount_rate_frac: Any, years: Any) -> Any:
    """Return the adjusted internal rate of return from the savings-to-investment ratio.

    Parameters
    ----------
    sir : float or array_like
        Savings-to-investment ratio [-] (``+inf`` allowed).
    discount_rate_frac : float or array_like
        Discount (and reinvestment) rate per year [frac], > -1.
    years : float or array_like
        Study period [yr], > 0.

    Returns
    -------
    float or numpy.ndarray
        AIRR [frac/yr]; ``+inf`` for an infinite SIR, ``-1.0`` for SIR <= 0.

    Notes
    -----
    AIRR = (1 + d) SIR^(1/n) - 1 [1]. 10 CFR 436.22 [2] defines the AIRR as the n-th root of the terminal
    value of the yearly savings compounded at the discount rate divided by the PV of the investment,
    minus 1, which reduces to this form. It equals the MIRR with finance = reinvest = d when all
    investment is at year 0.

    References
    ----------
    .. [1] S. K. Fuller and S. R. Petersen, "Life-Cycle Costing Manual for the Federal Energy Management
       Program," NIST Handbook 135, 1995 ed., National Institute of Standards and Technology, 1996.
    .. [2] U.S. Code of Federal Regulations, Title 10, Part 436, Sec. 436.22, "Adjusted internal rate of
       return."

    Examples
    --------
    >>> round(airr(1.0, 0.05, 10), 6)
    0.05
    """
    s = np.asarray(sir, dtype=float)
    d = _rate(discount_rate_frac, "discount_rate_frac")
    n = _years(years)
    if np.any(n <= 0):
        raise ValueError("years must be > 0 for an AIRR")
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        out = np.where(s <= 0, -1.0, (1.0 + d) * np.power(np.where(s > 0, s, 1.0), 1.0 / n) - 1.0)
    out = np.where(np.isposinf(s), np.inf, out)
    return _restore(out, sir)


def equivalent_annual_cost(present_value: Any, discount_rate_frac: Any, years: Any) -> Any:
    """Return the equal yearly amount over ``years`` with the same present value.

    Parameters
    ----------
    present_value : float or array_like
        Present value, e.g. a life-cycle cost [currency].
    discount_rate_frac : float or array_like
        Discount rate per year [frac], > -1.
    years : float or array_like
        Number of years [yr], > 0.

    Returns
    -------
    float or numpy.ndarray
        Equivalent annual amount [currency/yr], same sign as ``present_value``.

    Notes
    -----
    EAC = PV x CRF(d, n) [1].

    References
    ----------
    .. [1] S. K. Fuller and S. R. Petersen, "Life-Cycle Costing Manual for the Federal Energy Management
       Program," NIST Handbook 135, 1995 ed., National Institute of Standards and Technology, 1996.

    Examples
    --------
    >>> round(equivalent_annual_cost(1000.0, 0.0, 4), 6)
    250.0
    """
    pv = np.asarray(present_value, dtype=float)
    return _restore(pv * np.asarray(capital_recovery_factor(discount_rate_frac, years)), present_value)


def cost_of_saved_energy_per_mwh(net_cost_pv: Any, energy_saved_mwh_per_yr: Any, discount_rate_frac: Any,
                                 years: Any) -> Any:
    """Return the cost of saved (conserved) energy.

    Parameters
    ----------
    net_cost_pv : float or array_like
        Present value of the costs of the measure net of its non-energy benefits (positive = cost)
        [currency].
    energy_saved_mwh_per_yr : float or array_like
        Energy saved per year [MWh/yr].
    discount_rate_frac : float or array_like
        Discount rate per year [frac], > -1.
    years : float or array_like
        Life of the savings [yr], > 0.

    Returns
    -------
    float or numpy.ndarray
        Cost of saved energy [currency/MWh]; ``+inf`` where no energy is saved. Compare it with the energy
        price: below the price, the measure pays.

    Notes
    -----
    CSE = net_cost_pv x CRF(d, n) / E_saved [1].

    References
    ----------
    .. [1] A. K. Meier, "Supply curves of conserved energy," Lawrence Berkeley Laboratory, Rep. LBL-14686,
       1982.

    Examples
    --------
    >>> round(cost_of_saved_energy_per_mwh(1000.0, 10.0, 0.0, 4), 6)
    25.0
    """
    annual = np.asarray(equivalent_annual_cost(net_cost_pv, discount_rate_frac, years))
    energy = np.asarray(energy_saved_mwh_per_yr, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        out = np.where(energy > 0, annual / np.where(energy > 0, energy, 1.0), np.inf)
    return _restore(out, net_cost_pv)


def grid_co2_path_kg_per_kwh(grid_co2_kg_per_kwh: Any, decline_frac: Any, n_years: int) -> np.ndarray:
    """Return the grid emission factor for years 0..n_years along a constant yearly decline.

    Parameters
    ----------
    grid_co2_kg_per_kwh : float or array_like
        Emission factor in the base year (year 0) [kg/kWh], >= 0.
    decline_frac : float or array_like
        Yearly relative decline of the factor [frac/yr], < 1 (negative = rising).
    n_years : int
        Last year [yr].

    Returns
    -------
    numpy.ndarray
        Factor per year, shape ``broadcast(factor, decline) + (n_years + 1,)`` [kg/kWh].

    Notes
    -----
    f_t = f_0 (1 - delta)^t: the base-year convention used for every escalating amount in drivecase
    (compare the NIST UPV* factor).
    """
    f0 = np.asarray(grid_co2_kg_per_kwh, dtype=float)
    decline = np.asarray(decline_frac, dtype=float)
    if np.any(f0 < 0) or np.any(decline >= 1):
        raise ValueError("grid_co2_kg_per_kwh must be >= 0 and decline_frac < 1")
    t = np.arange(int(n_years) + 1, dtype=float)
    return f0[..., None] * np.power(1.0 - decline[..., None], t)


def co2_avoided_t(energy_saved_kwh_per_yr: Any, grid_co2_kg_per_kwh: Any, decline_frac: Any,
                  n_years: int) -> np.ndarray:
    """Return the CO2 avoided in each year 0..n_years.

    Parameters
    ----------
    energy_saved_kwh_per_yr : float or array_like
        Energy saved per year, one value per project [kWh/yr].
    grid_co2_kg_per_kwh : float or array_like
        Base-year grid emission factor [kg/kWh], >= 0 (state location- or market-based, average or
        marginal).
    decline_frac : float or array_like
        Yearly relative decline of the factor [frac/yr].
    n_years : int
        Last year of the horizon [yr].

    Returns
    -------
    numpy.ndarray
        Tonnes avoided per year, shape ``np.shape(energy) + (n_years + 1,)`` [t]; year 0 is 0.

    Notes
    -----
    m_t = E_saved x f_0 (1 - delta)^t / 1000 for t >= 1 (1 t = 1000 kg).

    Examples
    --------
    >>> co2_avoided_t(10_000.0, 0.5, 0.0, 2).tolist()
    [0.0, 5.0, 5.0]
    """
    energy = np.asarray(energy_saved_kwh_per_yr, dtype=float)
    factor = grid_co2_path_kg_per_kwh(grid_co2_kg_per_kwh, decline_frac, n_years)
    tonnes = energy[..., None] * factor / 1000.0
    tonnes[..., 0] = 0.0
    return tonnes


def abatement_cost_per_t(npv_value: Any, co2_avoided_t_by_year: Any, discount_rate_frac: Any) -> Any:
    """Return the levelised cost of each tonne of CO2 avoided (negative when the project pays).

    Parameters
    ----------
    npv_value : float or array_like
        NPV of the project [currency].
    co2_avoided_t_by_year : array_like
        Tonnes avoided per year, last axis = year 0..n_years [t] (see :func:`co2_avoided_t`).
    discount_rate_frac : float or array_like
        Discount rate per year [frac], > -1.

    Returns
    -------
    float or numpy.ndarray
        Abatement cost [currency/t]; ``+inf`` where nothing is avoided.

    Notes
    -----
    c = -NPV / sum_t m_t / (1 + d)^t. With constant tonnes m this is -NPV x CRF(d, n) / m, the annualised
    net cost per yearly tonne used for marginal abatement cost curves, in the same levelised form as the
    cost of saved energy [1].

    References
    ----------
    .. [1] A. K. Meier, "Supply curves of conserved energy," Lawrence Berkeley Laboratory, Rep. LBL-14686,
       1982.

    Examples
    --------
    >>> round(abatement_cost_per_t(-100.0, [0.0, 1.0, 1.0], 0.0), 6)
    50.0
    """
    value = np.asarray(npv_value, dtype=float)
    tonnes = np.asarray(co2_avoided_t_by_year, dtype=float)
    discounted = npv(tonnes, discount_rate_frac) if tonnes.ndim else float(tonnes)
    discounted = np.asarray(discounted, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        out = np.where(discounted > 0, -value / np.where(discounted > 0, discounted, 1.0), np.inf)
    return _restore(out, npv_value)


def profitability_index(npv_value: Any, capital_pv: Any) -> Any:
    """Return the profitability index: NPV per unit of capital.

    Parameters
    ----------
    npv_value : float or array_like
        NPV [currency].
    capital_pv : float or array_like
        Present value of the capital the project needs (positive) [currency].

    Returns
    -------
    float or numpy.ndarray
        PI [-]. Where the capital is <= 0: ``+inf`` for a positive NPV, ``-inf`` for a negative one, 0 for
        a zero NPV.

    Notes
    -----
    PI = NPV / PV(capital) [1] (some texts add 1; the ranking is the same). Ranking by PI is the classic
    greedy answer to capital rationing in a single period.

    References
    ----------
    .. [1] R. A. Brealey, S. C. Myers and F. Allen, *Principles of Corporate Finance*, 10th ed.
       New York: McGraw-Hill, 2011, ch. 5.

    Examples
    --------
    >>> profitability_index(50.0, 100.0)
    0.5
    """
    value = np.asarray(npv_value, dtype=float)
    capital = np.asarray(capital_pv, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        out = np.where(capital > 0, value / np.where(capital > 0, capital, 1.0), np.sign(value) * np.inf)
    out = np.where((capital <= 0) & (value == 0), 0.0, out)
    return _restore(out, npv_value)


# ---------------------------------------------------------------------------------------------------
# Finance assumptions (parameter set read from the case's finance table)
# ---------------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class FinanceAssumptions:
    """Finance assumptions of a case: rates, horizon, escalation, emissions, incentives, tax, budget.

    Every key, unit and default is listed in docs/finance.md. Defaults marked (M) there are common
    practice, not facts: set them for the site.

    Attributes
    ----------
    currency : str
        ISO 4217 code of every amount in the case.
    discount_rate_frac : float
        Discount rate [frac/yr] on ``rate_basis``, > -1.
    rate_basis : {"real", "nominal"}
        Whether the discount and escalation rates exclude ("real") or include ("nominal") inflation.
    inflation_frac : float
        General inflation [frac/yr], used only to convert between bases.
    horizon_yr : int
        Study period [yr], 1..100.
    escalation_energy_frac, escalation_demand_frac, escalation_reactive_frac, escalation_fixed_frac,
    escalation_maintenance_frac : float
        Yearly price escalation of each bill component and of maintenance [frac/yr], on ``rate_basis``.
    grid_co2_kg_per_kwh : float
        Base-year grid emission factor [kg/kWh].
    grid_co2_decline_frac : float
        Yearly relative decline of the emission factor [frac/yr].
    incentive_per_kwh_saved : float
        Incentive per kWh saved in year 1 [currency/kWh].
    incentive_capital_share_frac : float
        Incentive as a share of the project's capital [frac].
    incentive_max : float
        Cap on the incentive per project [currency]; ``inf`` = no cap.
    tax_rate_frac : float
        Profit tax rate [frac]; 0 = no tax effects.
    depreciation_yr : int
        Straight-line tax depreciation period [yr].
    replacement_mode : {"replace_now", "replace_at_failure"}
        When an option's capital is spent.
    downtime_cost_per_h : float
        Default cost of lost production per hour of unplanned stop [currency/h].
    capacitor_cost_per_kvar : float
        Installed cost of a capacitor bank [currency/kVAr]: what the kVAr of a leading machine (or any
        option's reactive saving) is compared with, as the bank that would give the same kVAr. The
        capacitor option's own capital comes from its row of the options catalogue.
    energy_price_factor : float
        Price level of the site's tariffs [-], > 0: every charge of every tariff is multiplied by it
        (1.0 = the tariffs as written; 1.2 = a 20 % dearer electricity scenario).
    capital_cost_factor : float
        Price level of the options' capital [-], > 0: every capital component (equipment, drive,
        installation, engineering, contingency, capacitor banks, rewinds) is multiplied by it.
    financing : {"cash", "loan", "lease", "shared_savings"}
        How the owner pays for the plan, for the financed view of its cash flows (:mod:`models.financing`);
        every decision metric and the plan itself stay on the cash basis.
    loan_share_frac : float
        Share of each year's capital borrowed [frac], 0-1 (``loan``).
    loan_rate_frac : float
        The loan's nominal interest rate [frac/yr] (``loan``), as lenders quote it.
    loan_term_yr : int
        Years of equal (annuity) repayments after each draw [yr] (``loan``).
    shared_savings_share_frac : float
        Share of the operating savings after tax paid to the energy-service company during its contract
        [frac], 0-1 (``shared_savings``).
    shared_savings_term_yr : int
        The contract's length after the company's purchase [yr] (``shared_savings``).
    lease_rate_frac : float
        The lease's implicit nominal interest rate [frac/yr] (``lease``): the rate at which the lessor recovers
        its purchase from the payments and the buyout.
    lease_term_yr : int
        Years of equal lease payments after the lessor's purchase [yr] (``lease``).
    lease_buyout_frac : float
        Price at which the owner buys the equipment at the lease's end, a share of the lessor's purchase
        [frac], 0-1 (``lease``); below 5 % with a profit tax it is warned: a lease with a nominal buyout is
        usually taxed as a purchase on credit, which ``loan`` models.
    budget_per_yr : tuple of float
        Capital budget of plan years 0, 1, ... [currency]; empty = no capital limit.
    fiscal_year_start_month : int
        The month (1-12) the owner's budget (fiscal) year starts in, to name each plan year by the budget year
        it falls in (:func:`budget_year_names`: plan year 0 is the one holding the case's purchase date); 0 (the
        default) names none.
    monte_carlo_draws : int
        Number of Monte Carlo draws.
    monte_carlo_seed : int
        Seed of the random generator (same seed, same draws).
    """

    currency: str = "EUR"
    discount_rate_frac: float = 0.08
    rate_basis: RateBasis = "real"
    inflation_frac: float = 0.02
    horizon_yr: int = 15
    escalation_energy_frac: float = 0.0
    escalation_demand_frac: float = 0.0
    escalation_reactive_frac: float = 0.0
    escalation_fixed_frac: float = 0.0
    escalation_maintenance_frac: float = 0.0
    grid_co2_kg_per_kwh: float = 0.48
    grid_co2_decline_frac: float = 0.0
    incentive_per_kwh_saved: float = 0.0
    incentive_capital_share_frac: float = 0.0
    incentive_max: float = math.inf
    tax_rate_frac: float = 0.0
    depreciation_yr: int = 10
    replacement_mode: ReplacementMode = "replace_now"
    downtime_cost_per_h: float = 0.0
    capacitor_cost_per_kvar: float = 30.0
    energy_price_factor: float = 1.0
    capital_cost_factor: float = 1.0
    financing: str = "cash"
    loan_share_frac: float = 1.0
    loan_rate_frac: float = 0.06
    loan_term_yr: int = 5
    shared_savings_share_frac: float = 0.5
    shared_savings_term_yr: int = 7
    lease_rate_frac: float = 0.07
    lease_term_yr: int = 5
    lease_buyout_frac: float = 0.1
    budget_per_yr: tuple[float, ...] = ()
    fiscal_year_start_month: int = 0
    monte_carlo_draws: int = 1000
    monte_carlo_seed: int = 12345

    def __post_init__(self) -> None:
        budget = self.budget_per_yr
        object.__setattr__(self, "budget_per_yr", tuple(float(b) for b in np.atleast_1d(budget))
                           if budget is not None else ())
        problems = [p for p in _check_assumptions(_as_dict(self), "FinanceAssumptions", "")
                    if p.severity == "error"]
        if problems:
            raise ValueError("; ".join(f"{p.column}: {p.rule}" for p in problems))

    def escalation_frac(self, component: str) -> float:
        """Return the escalation rate of one component ("energy", ..., "maintenance") [frac/yr]."""
        if component not in ESCALATING_COMPONENTS:
            raise ValueError(f"component must be one of {ESCALATING_COMPONENTS}, got {component!r}")
        return float(getattr(self, f"escalation_{component}_frac"))

    @property
    def real_discount_rate_frac(self) -> float:
        """Discount rate net of inflation [frac/yr] (Fisher relation)."""
        if self.rate_basis == "real":
            return self.discount_rate_frac
        return float(real_rate_frac(self.discount_rate_frac, self.inflation_frac))

    @property
    def nominal_discount_rate_frac(self) -> float:
        """Discount rate including inflation [frac/yr] (Fisher relation)."""
        if self.rate_basis == "nominal":
            return self.discount_rate_frac
        return float(nominal_rate_frac(self.discount_rate_frac, self.inflation_frac))

    def escalation_on_basis_frac(self, component: str, basis: RateBasis) -> float:
        """Return a component's escalation converted to ``basis`` with the Fisher relation [frac/yr]."""
        if basis not in RATE_BASES:
            raise ValueError(f"basis must be one of {RATE_BASES}, got {basis!r}")
        e = self.escalation_frac(component)
        if basis == self.rate_basis:
            return e
        if basis == "nominal":
            return float(nominal_rate_frac(e, self.inflation_frac))
        return float(real_rate_frac(e, self.inflation_frac))

    @classmethod
    def from_dict(cls, data: dict, source: str = "finance.toml") -> tuple["FinanceAssumptions | None",
                                                                               list[Problem]]:
        """Build the assumptions from a TOML table, collecting every problem.

        Parameters
        ----------
        data : dict
            The table as read (flat keys as in docs/finance.md). A dict holding a ``finance`` sub-table
            is unwrapped, and its keys are then reported as ``finance.<key>``.
        source : str
            File name as the user sees it, for the problem records.

        Returns
        -------
        tuple
            ``(FinanceAssumptions or None, problems)``; None when any problem is an error. Missing keys
            take their defaults; an unknown key gives a warning, an error where it looks like a key the table
            does not give (:data:`NEAR_MISS_CUTOFF`).
        """
        prefix = ""
        if isinstance(data, dict) and isinstance(data.get("finance"), dict) and len(data) == 1:
            data, prefix = data["finance"], "finance."
        if not isinstance(data, dict):
            return None, [error(source, None, None, data, "the finance table must be a table of key = value",
                                "write one 'key = value' per line, as in docs/finance.md")]
        problems: list[Problem] = []
        values = _as_dict(cls())
        for key, raw in data.items():
            if key not in values and isinstance(raw, dict):
                # a table of its own ([financ]): every key in it would be ignored and the defaults used silently
                problems.append(error(source, None, prefix + key, f"[{key}]",
                                      "unknown table: the keys under it would all be ignored",
                                      "write the keys at the top of the file, or under [finance]"
                                      + (" (is it a misspelling of [finance]?)" if key.lower().startswith("fin") else "")))
                continue
            if key not in values:
                import difflib

                absent = [k for k in values if k not in data]
                near = difflib.get_close_matches(str(key), absent, n=1, cutoff=NEAR_MISS_CUTOFF)
                if near:  # a misspelt key would drop what it holds: the run would use the default unsaid
                    problems.append(error(source, None, prefix + key, raw,
                                          f"unknown finance key: it looks like '{near[0]}', which the file does not "
                                          f"give (read so, the default {near[0]} = {_shown(values[near[0]])} would "
                                          "be used)", f"did you mean '{near[0]}'? Name it so (docs/finance.md)"))
                    continue
                close = difflib.get_close_matches(str(key), absent, n=1, cutoff=0.6)
                if close:
                    hint = (f"did you mean '{close[0]}'? Until it is named so, the default "
                            f"{close[0]} = {_shown(values[close[0]])} is used")
                else:
                    hint = "check the spelling against docs/finance.md"
                problems.append(warning(source, None, prefix + key, raw, "unknown finance key, ignored", hint))
                continue
            value, problem = _coerce(key, raw, values[key], source, prefix)
            if problem is not None:
                problems.append(problem)
            if problem is None or problem.severity != "error":  # (a warning keeps the value read)
                values[key] = value
        if any(p.severity == "error" for p in problems):
            return None, problems
        problems += _check_assumptions(values, source, prefix)
        defaults = _as_dict(cls())
        for key in [k for k in data if k in _FINANCING_KEYS and not k.startswith(f"{values['financing']}_")]:
            # a loan's terms set under shared savings or cash are not read (the defaults, as a new case's file
            # writes them, say nothing)
            if values["financing"] in FINANCING_KINDS and values[key] != defaults[key]:
                problems.append(warning(source, None, prefix + key, data[key],
                                        f"not read: financing is '{values['financing']}'",
                                        f"set financing = \"{_financing_of(key)}\" "
                                        "to use it, or leave the key out"))
        if any(p.severity == "error" for p in problems):
            return None, problems
        return cls(**values), problems


def budget_year_names(purchase_date: str, start_month: int, n_years: int) -> list[str]:
    """Name plan years 0 .. n_years - 1 by the budget (fiscal) year each falls in.

    Parameters
    ----------
    purchase_date : str
        The day the motors are bought, ``YYYY-MM-DD``: plan year 0 is the budget year holding it.
    start_month : int
        The month the budget year starts in, 1-12; 0 names none.
    n_years : int
        Plan years to name.

    Returns
    -------
    list of str
        Calendar years (``start_month`` 1) as the year itself, ``"2027"``; other budget years as ``"FY"`` and the
        calendar year they end in (common practice in many countries: the year from April 2027 to March 2028 is
        FY2028; some name a year by the one it starts in); [] when ``start_month`` is 0 or there is no date. A plan
        year runs from one anniversary of the purchase to the next and takes the name of the budget year it
        starts in, the one its capital is spent in.

    Examples
    --------
    >>> budget_year_names("2027-06-15", 4, 3), budget_year_names("2027-02-01", 4, 1)
    (['FY2028', 'FY2029', 'FY2030'], ['FY2027'])
    >>> budget_year_names("2027-06-15", 1, 2), budget_year_names("2027-06-15", 0, 2)
    (['2027', '2028'], [])
    """
    month = int(start_month)
    if month == 0 or n_years <= 0 or len(str(purchase_date)) < 7:  # (no date: no name)
        return []
    year, bought_in = int(str(purchase_date)[:4]), int(str(purchase_date)[5:7])
    if month == 1:
        return [str(year + k) for k in range(int(n_years))]
    ends = year + 1 if bought_in >= month else year  # the budget year holding the purchase ends in this year
    return [f"FY{ends + k}" for k in range(int(n_years))]


def _financing_of(key: str) -> str:
    """The financing whose term a key of :data:`_FINANCING_KEYS` is.

    >>> _financing_of("loan_rate_frac"), _financing_of("lease_buyout_frac"), _financing_of("shared_savings_term_yr")
    ('loan', 'lease', 'shared_savings')
    """
    return next(kind for kind in FINANCING_KINDS if key.startswith(f"{kind}_"))


def _as_dict(assumptions: FinanceAssumptions) -> dict[str, Any]:
    return {name: getattr(assumptions, name) for name in FinanceAssumptions.__dataclass_fields__}


#: How far either side of the case's discount rate the uncertainty draws it [frac/yr] (the widest of
#: models.risk's discount-rate distribution).
DISCOUNT_RATE_DRAW_SPREAD_FRAC = 0.02
#: How alike an unknown key and a key the table does not give must be (difflib's ratio) for the key to be
#: taken as misspelt, an error rather than a warning: 'discount_rate' for 'discount_rate_frac' is 0.84.
NEAR_MISS_CUTOFF = 0.75
#: The longest study period a case may ask for [yr] (and so the most plan years a budget may have).
MAX_HORIZON_YR = 100

_INTEGER_KEYS = ("horizon_yr", "depreciation_yr", "monte_carlo_draws", "monte_carlo_seed", "loan_term_yr",
                 "shared_savings_term_yr", "lease_term_yr", "fiscal_year_start_month")
#: The terms of a loan and of an energy-service contract (read only under their own ``financing``).
_FINANCING_KEYS = ("loan_share_frac", "loan_rate_frac", "loan_term_yr", "shared_savings_share_frac",
                   "shared_savings_term_yr", "lease_rate_frac", "lease_term_yr", "lease_buyout_frac")
#: How the owner may pay for the plan (:mod:`models.financing`): in cash, with a loan, or through an
#: energy-service company paid from the savings.
FINANCING_KINDS: tuple[str, ...] = ("cash", "loan", "lease", "shared_savings")
#: Unit and meaning of every finance assumption (docs/finance.md is the full reference).
FIELD_NOTES: dict[str, tuple[str, str]] = {
    "currency": ("ISO 4217", "currency of every amount"),
    "discount_rate_frac": ("frac/yr", "discount rate on the rate basis below"),
    "rate_basis": ("-", "real (excludes inflation) or nominal"),
    "inflation_frac": ("frac/yr", "general inflation, used only to convert between bases"),
    "horizon_yr": ("yr", "study period"),
    "escalation_energy_frac": ("frac/yr", "yearly escalation of energy prices"),
    "escalation_demand_frac": ("frac/yr", "yearly escalation of demand charges"),
    "escalation_reactive_frac": ("frac/yr", "yearly escalation of reactive charges"),
    "escalation_fixed_frac": ("frac/yr", "yearly escalation of fixed charges"),
    "escalation_maintenance_frac": ("frac/yr", "yearly escalation of maintenance costs"),
    "grid_co2_kg_per_kwh": ("kg/kWh", "base-year grid emission factor"),
    "grid_co2_decline_frac": ("frac/yr", "yearly relative decline of the grid factor"),
    "incentive_per_kwh_saved": ("currency/kWh", "incentive per first-year kWh saved"),
    "incentive_capital_share_frac": ("frac", "incentive as a share of capital"),
    "incentive_max": ("currency", "cap on the incentive per project"),
    "tax_rate_frac": ("frac", "profit tax rate (0 = no tax effects)"),
    "depreciation_yr": ("yr", "straight-line tax depreciation period"),
    "replacement_mode": ("-", "replace now, or replace when today's motor fails"),
    "downtime_cost_per_h": ("currency/h", "default cost of an unplanned stop per hour"),
    "capacitor_cost_per_kvar": ("currency/kVAr", "installed cost of a capacitor bank, the yardstick for a leading "
                                "machine's kVAr (the capacitor option's own price is its row of the options catalogue)"),
    "energy_price_factor": ("-", "price level of the tariffs (every charge multiplied; 1 = as written)"),
    "capital_cost_factor": ("-", "price level of the options' capital (every component multiplied; 1 = as written)"),
    "financing": ("-", "cash, loan, lease or shared_savings: the owner's financed view of the plan (the plan and its "
                  "metrics stay on the cash basis)"),
    "loan_share_frac": ("frac", "share of each year's capital borrowed (loan)"),
    "loan_rate_frac": ("frac/yr", "the loan's nominal interest rate (loan)"),
    "loan_term_yr": ("yr", "years of equal repayments after each draw (loan)"),
    "shared_savings_share_frac": ("frac", "share of the savings paid to the energy-service company (shared_savings)"),
    "shared_savings_term_yr": ("yr", "the energy-service contract's length (shared_savings)"),
    "lease_rate_frac": ("frac/yr", "the lease's implicit nominal interest rate (lease)"),
    "lease_term_yr": ("yr", "years of equal lease payments after the lessor's purchase (lease)"),
    "lease_buyout_frac": ("frac", "the owner's buyout price at the lease's end, a share of the amount leased (lease)"),
    "budget_per_yr": ("currency", "capital budget of each plan year (empty = no limit)"),
    "fiscal_year_start_month": ("-", "month the budget (fiscal) year starts in, to name the plan years by it (0 = none)"),
    "monte_carlo_draws": ("-", "number of Monte Carlo draws"),
    "monte_carlo_seed": ("-", "seed of the random draws"),
}


_TEXT_KEYS = ("currency", "rate_basis", "replacement_mode", "financing")


def _shown(value: Any) -> str:
    """A finance value as finance.toml writes it (for messages)."""
    if isinstance(value, tuple):
        return "[" + ", ".join(f"{v:g}" for v in value) + "]"
    if isinstance(value, float):
        return "no limit" if math.isinf(value) else f"{value:g}"
    return f'"{value}"' if isinstance(value, str) else str(value)


def finance_template() -> str:
    """The text of a finance.toml holding the program's defaults, one commented key per line (for a new case).

    The currency is left out: it defaults to the case's own.

    Examples
    --------
    >>> text = finance_template()
    >>> "discount_rate_frac = 0.08" in text, "budget_per_yr = []" in text, "currency =" in text
    (True, True, False)
    """
    from dataclasses import fields

    defaults = FinanceAssumptions()
    lines = ["# Finance assumptions of the case (docs/finance.md explains every key). These are the program's",
             "# defaults: write your organisation's. Fractions are written 0.08 for 8 %; money is in the case currency.",
             ""]
    for field_ in fields(defaults):
        if field_.name == "currency":
            continue
        value = getattr(defaults, field_.name)
        if isinstance(value, str):
            text = f'"{value}"'
        elif isinstance(value, tuple):
            text = "[" + ", ".join(f"{v:g}" for v in value) + "]"
        elif isinstance(value, float) and math.isinf(value):  # no limit: the key is left out, its line commented
            unit, meaning = FIELD_NOTES.get(field_.name, ("", ""))
            lines.append(f"# {field_.name} =   # {meaning or field_.name}: none unless a number is written here"
                         + (f" [{unit}]" if unit and unit != "-" else ""))
            continue
        else:
            text = repr(float(value)) if isinstance(value, float) else str(value)
        unit, meaning = FIELD_NOTES.get(field_.name, ("", ""))
        note = f"  # {meaning}" + (f" [{unit}]" if unit and unit != "-" else "") if meaning else ""
        lines.append(f"{field_.name} = {text}{note}")
    return "\n".join(lines) + "\n"


def _coerce(key: str, raw: Any, default: Any, source: str, prefix: str) -> tuple[Any, Problem | None]:
    """Convert one raw TOML value to the field's type, or return a problem."""
    column = prefix + key
    if key in _TEXT_KEYS:
        if not isinstance(raw, str):
            return None, error(source, None, column, raw, "must be text", f"write it in quotes, e.g. {key} = \"{default}\"")
        return raw.strip(), None
    if key == "budget_per_yr":
        if not isinstance(raw, (list, tuple)):  # one number: the budget of plan year 0 only, said so
            number = _number(raw)
            if number is None:
                return None, error(source, None, column, raw, "must be a list of numbers (one budget per plan year)",
                                   "write e.g. budget_per_yr = [50000, 50000, 30000]")
            return (number,), warning(source, None, column, raw, "one number is read as the budget of plan year 0 "
                                      "only (the plan then has one year)",
                                      f"for the same budget in several years write a list, e.g. budget_per_yr = "
                                      f"[{raw}, {raw}, {raw}]")
        items = raw
        out = []
        for item in items:
            number = _number(item)
            if number is None:
                return None, error(source, None, column, raw, "must be a list of numbers (one budget per plan year)",
                                   "write e.g. budget_per_yr = [50000, 50000, 30000]")
            out.append(number)
        return tuple(out), None
    number = _number(raw)
    if number is None:
        return None, error(source, None, column, raw, "must be a number",
                           "write a plain number; rates are fractions (8 % is 0.08)")
    if key in _INTEGER_KEYS:
        if not math.isfinite(number) or number != int(number):
            return None, error(source, None, column, raw, "must be a whole number", "drop the decimals")
        return int(number), None
    return number, None


def _number(raw: Any) -> float | None:
    if isinstance(raw, bool):
        return None
    if isinstance(raw, (int, float)):
        return float(raw)
    if isinstance(raw, str):
        try:
            return float(raw.strip())
        except ValueError:
            return None
    return None


#: The price and capital-cost levels accepted (1 = as written): a hundredth to a hundredfold; outside 0.2-5 a
#: level is warned as unusual.
PRICE_LEVEL_BOUNDS = (0.01, 100.0)


def _check_assumptions(values: dict[str, Any], source: str, prefix: str) -> list[Problem]:
    """Check ranges and choices of typed values; return errors and warnings."""
    out: list[Problem] = []

    def bad(key: str, rule: str, hint: str) -> None:
        out.append(error(source, None, prefix + key, values[key], rule, hint))

    def odd(key: str, rule: str, hint: str) -> None:
        out.append(warning(source, None, prefix + key, values[key], rule, hint))

    currency = values["currency"]
    if not (isinstance(currency, str) and len(currency) == 3 and currency.isalpha() and currency.isupper()):
        bad("currency", "must be a three-letter ISO 4217 code in capitals", "e.g. currency = \"EUR\"")
    if values["rate_basis"] not in RATE_BASES:
        bad("rate_basis", "must be 'real' or 'nominal'", "real excludes inflation, nominal includes it")
    if values["replacement_mode"] not in REPLACEMENT_MODES:
        bad("replacement_mode", "must be 'replace_now' or 'replace_at_failure'",
            "replace_now spends the capital in year 0; replace_at_failure at the expected failure year")
    for key in ("discount_rate_frac", "inflation_frac") + tuple(f"escalation_{c}_frac" for c in ESCALATING_COMPONENTS):
        v = values[key]
        if not math.isfinite(v) or v <= -1.0 or v > 1.0:
            bad(key, "must be a fraction between -1 and 1", "rates are fractions: 8 % is 0.08")
        elif key == "discount_rate_frac" and v - DISCOUNT_RATE_DRAW_SPREAD_FRAC <= -1.0:
            bad(key, f"must be above {DISCOUNT_RATE_DRAW_SPREAD_FRAC - 1.0:g}: the uncertainty draws the rate "
                f"{DISCOUNT_RATE_DRAW_SPREAD_FRAC * 100:g} points either side, and a rate of -100 % or below has no "
                "present value", "rates are fractions: 8 % is 0.08")
        elif key == "discount_rate_frac" and not (0.0 <= v <= 0.5):
            odd(key, "discount rate outside 0-0.5 is unusual", "check the value; 8 % is 0.08")
        elif key != "discount_rate_frac" and abs(v) > 0.2:
            odd(key, "a change of more than 20 % a year, up or down, is unusual", "check the value; 2 % is 0.02")
    h = values["horizon_yr"]
    if not 1 <= h <= MAX_HORIZON_YR:
        bad("horizon_yr", f"must be between 1 and {MAX_HORIZON_YR} years", "15-20 years suits most motor projects")
    if not (math.isfinite(values["grid_co2_kg_per_kwh"]) and 0.0 <= values["grid_co2_kg_per_kwh"] <= 2.0):
        bad("grid_co2_kg_per_kwh", "must be between 0 and 2 kg/kWh", "grid averages lie between about 0.02 and 1")
    if not (math.isfinite(values["grid_co2_decline_frac"]) and -0.5 <= values["grid_co2_decline_frac"] < 1.0):
        bad("grid_co2_decline_frac", "must be a fraction below 1", "e.g. 0.03 for a 3 % yearly decline")
    for key in ("incentive_per_kwh_saved", "downtime_cost_per_h", "capacitor_cost_per_kvar"):
        if not (math.isfinite(values[key]) and values[key] >= 0.0):
            bad(key, "must be a finite number >= 0", "use 0 when it does not apply")
    for key in ("energy_price_factor", "capital_cost_factor"):
        if not (math.isfinite(values[key]) and values[key] > 0.0):
            bad(key, "must be a number > 0 (1 = prices as written)", "e.g. 1.2 for prices 20 % higher")
        elif not PRICE_LEVEL_BOUNDS[0] <= values[key] <= PRICE_LEVEL_BOUNDS[1]:
            bad(key, f"must lie between {PRICE_LEVEL_BOUNDS[0]:g} and {PRICE_LEVEL_BOUNDS[1]:g} (1 = prices as "
                "written): a level beyond them is no price anyone pays", "e.g. 1.2 for prices 20 % higher")
        elif not 0.2 <= values[key] <= 5.0:
            odd(key, "a price level outside 0.2-5 is unusual", "1 = prices as written; 1.2 = 20 % higher")
    if not (values["incentive_max"] >= 0.0):
        bad("incentive_max", "must be >= 0 (inf = no cap)", "leave the key out for no cap")
    for key in ("incentive_capital_share_frac", "tax_rate_frac"):
        if not (math.isfinite(values[key]) and 0.0 <= values[key] < 1.0):
            bad(key, "must be a fraction from 0 up to (not including) 1", "e.g. 0.25 for 25 %")
    if values["financing"] not in FINANCING_KINDS:
        bad("financing", "must be 'cash', 'loan', 'lease' or 'shared_savings'",
            "cash: the owner pays; loan: a share borrowed and repaid in equal yearly payments; lease: a lessor buys and "
            "the owner pays equal yearly payments, then buys the equipment out; shared_savings: an "
            "energy-service company pays and takes a share of the savings for its contract's years")
    for key in ("loan_share_frac", "shared_savings_share_frac", "lease_buyout_frac"):
        if not (math.isfinite(values[key]) and 0.0 <= values[key] <= 1.0):
            bad(key, "must be a fraction from 0 to 1", "e.g. 0.8 for 80 %")
    for key, what in (("loan_rate_frac", "loan"), ("lease_rate_frac", "lease")):
        if not (math.isfinite(values[key]) and -0.5 < values[key] <= 1.0):
            bad(key, "must be a fraction above -0.5 and at most 1", "rates are fractions: 6 % is 0.06")
        elif not 0.0 <= values[key] <= 0.3:
            odd(key, f"a {what} rate outside 0-0.3 is unusual", "check the value; 6 % is 0.06")
    for key in ("loan_term_yr", "shared_savings_term_yr", "lease_term_yr"):
        if not 1 <= values[key] <= MAX_HORIZON_YR:
            bad(key, f"must be between 1 and {MAX_HORIZON_YR} years",
                "loans, leases and energy-service contracts run 3-15 years")
        elif values["financing"] == key.rsplit("_term_yr", 1)[0] and values[key] > values["horizon_yr"]:
            odd(key, f"longer than the study period ({values['horizon_yr']} years): "
                + {"loan": "a balance still owed at its end is counted as repaid then",
                   "lease": "the payments still owed and the buyout are counted as settled then",
                   "shared_savings": "the share is paid to the study period's end only"}[key.rsplit("_term_yr", 1)[0]],
                "check the term against horizon_yr")
    if (values["financing"] == "lease" and values["tax_rate_frac"] > 0.0
            and math.isfinite(values["lease_buyout_frac"]) and values["lease_buyout_frac"] < 0.05):
        odd("lease_buyout_frac", "a lease with a buyout below 5 % of the price is usually taxed as a purchase on "
            "credit (the owner depreciating the equipment and deducting the interest only), not as the true lease "
            "modelled here", "check the lease's tax treatment; financing = \"loan\" models a purchase on credit")
    if not 0 <= values["fiscal_year_start_month"] <= 12:
        bad("fiscal_year_start_month", "must be a month from 1 to 12, or 0 for none",
            "e.g. 4 for a budget year from April to March, 1 for calendar years")
    if not 1 <= values["depreciation_yr"] <= 100:
        bad("depreciation_yr", "must be between 1 and 100 years", "straight-line tax life, often 5-20 years")
    budget = values["budget_per_yr"]
    if any(not math.isfinite(b) and b != math.inf for b in budget) or any(b < 0 for b in budget):
        bad("budget_per_yr", "budgets must be numbers >= 0", "use a large number for an unconstrained year")
    if len(budget) > MAX_HORIZON_YR:  # (a plan year past every horizon buys nothing; the plan's arrays grow with its square)
        bad("budget_per_yr", f"has {len(budget):,} plan years: at most {MAX_HORIZON_YR}, the longest horizon",
            "give one budget per plan year within the horizon")
    if not 1 <= values["monte_carlo_draws"] <= 1_000_000:
        bad("monte_carlo_draws", "must be between 1 and 1,000,000", "1,000 draws is usually enough")
    if values["monte_carlo_seed"] < 0:
        bad("monte_carlo_seed", "must be a whole number >= 0", "any fixed number gives repeatable draws")
    if values["rate_basis"] == "nominal" and values["discount_rate_frac"] < values["inflation_frac"]:
        odd("discount_rate_frac", "nominal discount rate below inflation means a negative real rate",
            "check rate_basis: a real rate excludes inflation")
    return out
