"""Yearly cash flows of each project (one asset x one option), split by component, for a whole fleet.

A project's flows are incremental: what changes when the option replaces the existing asset, compared
with keeping it and paying the "must-spend" (a rewind or the cheapest replacement the regulations still
allow) when it fails. :func:`build_cash_flows` turns per-project arrays (capital by component, savings by
bill component, lives, mid-life items, the existing asset's remaining life) and the case's
:class:`~models.finance.FinanceAssumptions` into a 3-D array (project, year, component) with named
components; every step is vectorised over projects. The result gives the net flow per year for the
metrics in :mod:`models.finance`, the capital spend per year for :mod:`models.plan`, and the
per-component arrays that :mod:`models.risk` recombines under Monte Carlo draws.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from models.finance import FinanceAssumptions

#: Capital components, in the order they appear in the component axis.
CAPITAL_COMPONENTS: tuple[str, ...] = (
    "capital_equipment",
    "capital_drive",
    "capital_installation",
    "capital_engineering",
    "capital_contingency",
)
#: Operational savings components (positive = saved), escalated at their own price escalation.
SAVINGS_COMPONENTS: tuple[str, ...] = (
    "savings_energy",
    "savings_demand",
    "savings_reactive",
    "savings_fixed",
    "savings_maintenance",
)
#: Every component of the cash-flow array, in axis order. See docs/finance.md for each one's meaning.
COMPONENTS: tuple[str, ...] = CAPITAL_COMPONENTS + (
    "incentive",
    "baseline_credit",
    "midlife",
) + SAVINGS_COMPONENTS + (
    "residual",
    "tax_savings",
    "tax_depreciation",
)
#: Components on the investment side of the savings-to-investment ratio (the rest are savings).
INVESTMENT_COMPONENTS: tuple[str, ...] = CAPITAL_COMPONENTS + (
    "incentive", "baseline_credit", "midlife", "residual", "tax_depreciation")
#: Components that are taxed as operating income (or deducted as operating cost) when a tax rate is set.
TAXABLE_COMPONENTS: tuple[str, ...] = SAVINGS_COMPONENTS + ("midlife",)

_ESCALATION_OF = {
    "savings_energy": "energy",
    "savings_demand": "demand",
    "savings_reactive": "reactive",
    "savings_fixed": "fixed",
    "savings_maintenance": "maintenance",
}


def _column(values: Any, n: int, name: str, *, default: float | None = None, minimum: float | None = None,
            positive: bool = False) -> np.ndarray:
    """Broadcast one per-project input to shape (n,) as float, checking it."""
    if values is None:
        if default is None:
            raise ValueError(f"{name} is required")
        values = default
    array = np.broadcast_to(np.asarray(values, dtype=float), (n,)).copy()
    if np.any(np.isnan(array)):
        raise ValueError(f"{name} must not contain NaN")
    if minimum is not None and np.any(array < minimum):
        raise ValueError(f"{name} must be >= {minimum:g}")
    if positive and np.any(array <= 0):
        raise ValueError(f"{name} must be > 0")
    return array


#: Fields of :class:`ProjectInputs` whose last axis is the savings components (one row per project, or one
#: row for all).
_PER_COMPONENT_FIELDS = ("baseline_savings_per_yr", "ratchet_shortfall", "baseline_ratchet_shortfall")


@dataclass(frozen=True)
class ProjectInputs:
    """Per-project inputs of the cash-flow builder: one entry per project (asset x option).

    All money is at base-year (year 0) prices in the case currency, on the basis (real or nominal) of
    the finance assumptions. Scalars broadcast to every project.

    Attributes
    ----------
    project_id : sequence of str
        Project labels (e.g. ``"P-101/IE4"``), unique.
    capex_equipment, capex_drive, capex_installation, capex_engineering, capex_contingency : array_like
        Capital of the option by component, paid at each purchase [currency], >= 0.
    savings_energy_per_yr, savings_demand_per_yr, savings_reactive_per_yr, savings_fixed_per_yr : array_like
        Yearly bill savings by component against the base-case asset, at base-year prices
        [currency/yr]; positive = the bill falls.
    savings_maintenance_per_yr : array_like
        Yearly maintenance cost of the base case minus that of the option [currency/yr].
    energy_saved_kwh_per_yr : array_like
        Energy saved per year [kWh/yr], for per-kWh incentives (and emissions elsewhere). Default 0.
    option_life_yr : array_like
        Service life of the option [yr], > 0; rounded to whole years (at least 1).
    baseline_capex : array_like
        Must-spend capital of the base case when the existing asset fails [currency], >= 0. Default 0.
    baseline_life_yr : array_like or None
        Service life of the must-spend item [yr], > 0. Default: ``option_life_yr``.
    existing_remaining_life_yr : array_like
        Expected years until the existing asset fails [yr], >= 0 (``inf`` = not within the horizon,
        the default). Rounded to whole years.
    midlife_cost : array_like
        Cost of a mid-life item of the option (bearings, drive capacitors) [currency], >= 0. Default 0.
    midlife_year_yr : array_like
        Years after each purchase when the mid-life item falls due [yr]; 0 = none (default).
    incentive : array_like
        Incentive granted to the project on top of the rule in the assumptions [currency], >= 0.
    replace_at_failure : array_like of bool or None
        Per-project timing; None follows ``assumptions.replacement_mode``.
    baseline_savings_per_yr : array_like or None
        Savings of the must-spend item against the existing asset, per component [currency/yr], shape
        (n_projects, 5) in :data:`SAVINGS_COMPONENTS` order (a new motor bought at failure saves too):
        from the failure year on, the base case runs it, so the option's savings over the base case are
        its own less these. None (the default) = 0.
    ratchet_shortfall : array_like or None
        How much less than its yearly savings the option saves in each of its first years in service, per
        component [currency], shape (n_projects, K, 5) (years 1..K in service, :data:`SAVINGS_COMPONENTS`
        order) or (n_projects, 5) for the first year alone, at base-year prices: a demand ratchet still
        billing the peaks of before the change. None (the default) = 0.
    baseline_ratchet_shortfall : array_like or None
        The same of the must-spend item in the base case's first years with it (its savings are
        ``baseline_savings_per_yr``). None (the default) = 0.
    """

    project_id: Any
    capex_equipment: Any = 0.0
    capex_drive: Any = 0.0
    capex_installation: Any = 0.0
    capex_engineering: Any = 0.0
    capex_contingency: Any = 0.0
    savings_energy_per_yr: Any = 0.0
    savings_demand_per_yr: Any = 0.0
    savings_reactive_per_yr: Any = 0.0
    savings_fixed_per_yr: Any = 0.0
    savings_maintenance_per_yr: Any = 0.0
    energy_saved_kwh_per_yr: Any = 0.0
    option_life_yr: Any = 20.0
    baseline_capex: Any = 0.0
    baseline_life_yr: Any = None
    existing_remaining_life_yr: Any = np.inf
    midlife_cost: Any = 0.0
    midlife_year_yr: Any = 0.0
    incentive: Any = 0.0
    replace_at_failure: Any = None
    baseline_savings_per_yr: Any = None
    ratchet_shortfall: Any = None
    baseline_ratchet_shortfall: Any = None

    @property
    def n_projects(self) -> int:
        """Number of projects."""
        return len(np.atleast_1d(np.asarray(self.project_id, dtype=object)))

    def take(self, rows: Any) -> "ProjectInputs":
        """Return the inputs of the projects ``rows`` (positions), in that order.

        Every per-project array is taken along its first axis; a value given once for all projects (a
        scalar, or None) stays as it is.

        Examples
        --------
        >>> p = ProjectInputs(project_id=["A", "B", "C"], savings_energy_per_yr=[1.0, 2.0, 3.0], option_life_yr=15.0)
        >>> q = p.take([2, 0])
        >>> q.project_id.tolist(), q.savings_energy_per_yr.tolist(), q.option_life_yr
        (['C', 'A'], [3.0, 1.0], 15.0)
        """
        n = self.n_projects
        rows = np.asarray(rows, dtype=np.intp)
        values = {}
        for name in self.__dataclass_fields__:
            value = getattr(self, name)
            # a per-component field given once for all projects is 1-D (its components): per project it is 2-D
            least = 2 if name in _PER_COMPONENT_FIELDS else 1
            if value is not None and np.ndim(value) >= least and len(value) == n:
                value = np.asarray(value)[rows]
            values[name] = value
        return ProjectInputs(**values)


@dataclass(frozen=True)
class CashFlows:
    """Cash flows of a fleet of projects by year and component.

    Attributes
    ----------
    project_id : numpy.ndarray
        Project labels, shape (n_projects,).
    component_names : tuple of str
        Names of the last axis of ``amounts`` (see :data:`COMPONENTS` and docs/finance.md).
    amounts : numpy.ndarray
        Flows [currency], shape (n_projects, horizon_yr + 1, n_components); negative = money out,
        year 0 = investment (undiscounted), year t at the end of year t.
    horizon_yr : int
        Last year [yr].
    start_year : numpy.ndarray
        Year of the option's first purchase per project [yr] (0, or the expected failure year);
        ``horizon_yr`` or more when nothing happens within the horizon.
    """

    project_id: np.ndarray
    component_names: tuple[str, ...]
    amounts: np.ndarray = field(repr=False)
    horizon_yr: int
    start_year: np.ndarray

    def component(self, name: str) -> np.ndarray:
        """Return one component's flows, shape (n_projects, horizon_yr + 1) [currency]."""
        if name not in self.component_names:
            raise ValueError(f"unknown component {name!r}; known: {self.component_names}")
        return self.amounts[:, :, self.component_names.index(name)]

    def net(self) -> np.ndarray:
        """Return the net flow per project and year, shape (n_projects, horizon_yr + 1) [currency]."""
        return self.amounts.sum(axis=-1)

    def sum_of(self, names: tuple[str, ...]) -> np.ndarray:
        """Return the sum of the named components, shape (n_projects, horizon_yr + 1) [currency]."""
        index = [self.component_names.index(name) for name in names]
        return self.amounts[:, :, index].sum(axis=-1)

    def capital_spend_by_year(self) -> np.ndarray:
        """Return the gross capital spent per project and year (positive), before incentives and credits.

        Returns
        -------
        numpy.ndarray
            Shape (n_projects, horizon_yr + 1) [currency], >= 0: the amount a capital budget must cover.
        """
        return -self.sum_of(CAPITAL_COMPONENTS)

    def savings_and_investment(self) -> tuple[np.ndarray, np.ndarray]:
        """Return the savings-side and investment-side flows for the savings-to-investment ratio.

        Returns
        -------
        tuple of numpy.ndarray
            ``(savings, investment)``, each (n_projects, horizon_yr + 1) [currency]: savings are the
            operating savings after tax on them; investment holds capital, incentives, the baseline
            credit, mid-life items, residual value and the depreciation tax shield.
        """
        savings = tuple(name for name in self.component_names if name not in INVESTMENT_COMPONENTS)
        return self.sum_of(savings), self.sum_of(INVESTMENT_COMPONENTS)

    def to_frame(self, drop_zero: bool = False) -> pd.DataFrame:
        """Return the flows as a long table with columns project, year, component, amount.

        Parameters
        ----------
        drop_zero : bool
            Leave out rows whose amount is exactly 0 (keeps the table small for big fleets).

        Returns
        -------
        pandas.DataFrame
            Columns ``project`` and ``component`` (categorical text), ``year`` (int) [yr] and ``amount``
            [currency].
        """
        n, years, k = self.amounts.shape
        amount = self.amounts.reshape(-1)
        keep = amount != 0.0 if drop_zero else np.ones(amount.size, dtype=bool)
        flat = np.flatnonzero(keep)
        project = pd.Categorical.from_codes(flat // (years * k), categories=pd.Index(
            np.asarray(self.project_id).astype(str), dtype="str"))
        component = pd.Categorical.from_codes(flat % k, categories=pd.Index(list(self.component_names), dtype="str"))
        return pd.DataFrame({"project": project, "year": (flat // k) % years, "component": component,
                             "amount": amount[flat]})


def incentive_amount(capital: Any, energy_saved_kwh_per_yr: Any, incentive_per_kwh_saved: float,
                     incentive_capital_share_frac: float, incentive_max: float) -> np.ndarray:
    """Return the incentive a project earns under a per-kWh and share-of-capital rule with a cap.

    Parameters
    ----------
    capital : array_like
        Capital of the project's first purchase [currency], >= 0.
    energy_saved_kwh_per_yr : array_like
        Energy saved in year 1 [kWh/yr]; negative savings earn nothing.
    incentive_per_kwh_saved : float
        Incentive per kWh saved in year 1 [currency/kWh], >= 0.
    incentive_capital_share_frac : float
        Incentive as a share of capital [frac], 0..1.
    incentive_max : float
        Cap per project [currency]; ``inf`` = no cap.

    Returns
    -------
    numpy.ndarray
        Incentive [currency], >= 0.

    Notes
    -----
    I = min(I_max, rate x max(E_saved, 0) + share x capital). Utility rebate programs commonly pay per
    first-year kWh saved or a share of project cost, capped per project (common practice).

    Examples
    --------
    >>> incentive_amount(10_000.0, 20_000.0, 0.05, 0.1, 1_500.0).item()
    1500.0
    """
    capital = np.asarray(capital, dtype=float)
    energy = np.maximum(np.asarray(energy_saved_kwh_per_yr, dtype=float), 0.0)
    return np.minimum(incentive_max, incentive_per_kwh_saved * energy + incentive_capital_share_frac * capital)


def _chain(t: np.ndarray, start: np.ndarray, life: np.ndarray, horizon: int) -> np.ndarray:
    """Purchase indicator (n, H + 1): purchases at start, start + L, ... while before the horizon end."""
    since = t[None, :] - start[:, None]
    return (since >= 0) & (since % life[:, None] == 0) & (t[None, :] < horizon)


def _residual_fraction(start: np.ndarray, life: np.ndarray, horizon: int) -> np.ndarray:
    """Share of the last purchase's life left at the horizon end (straight line); 0 without purchase."""
    bought = start < horizon
    last = start + life * np.floor((horizon - 1 - start) / life)
    return np.where(bought, (last + life - horizon) / life, 0.0)


def _depreciation(purchase_value: np.ndarray, years: int) -> np.ndarray:
    """Straight-line depreciation (n, H + 1) of purchases (value booked at the purchase year) over ``years``.

    Each purchase p depreciates value/years in years p + 1 .. p + years; what falls after the horizon is
    lost (the residual value is not taxed, see docs/finance.md).
    """
    n, width = purchase_value.shape
    cumulative = np.concatenate([np.zeros((n, 1)), np.cumsum(purchase_value, axis=1)], axis=1)
    t = np.arange(width)
    upper = np.clip(t, 0, width)          # purchases at years < t
    lower = np.clip(t - years, 0, width)  # ... and >= t - years
    return (cumulative[:, upper] - cumulative[:, lower]) / years


def build_cash_flows(projects: ProjectInputs, assumptions: FinanceAssumptions) -> CashFlows:
    """Build the yearly cash flows of every project by component.

    Parameters
    ----------
    projects : ProjectInputs
        Per-project arrays (capital, savings, lives, mid-life items, base case).
    assumptions : FinanceAssumptions
        Horizon, escalation per component, inflation and rate basis, incentive rule, tax rate and
        depreciation period, replacement mode.

    Returns
    -------
    CashFlows
        Flows of shape (n_projects, horizon_yr + 1, len(COMPONENTS)) [currency].

    Raises
    ------
    ValueError
        For negative capital, non-positive lives, NaN inputs or duplicate project labels.

    Notes
    -----
    Timing (years are whole; flows at year end, year 0 undiscounted):

    * First purchase year s = 0 for "replace_now", s = f for "replace_at_failure", where f is the
      existing asset's remaining life rounded to a whole year. Repeat purchases at s + kL while < H
      (option life L, horizon H). Capital is at base-year prices times the general price index
      P_t = (1 + i)^t when the basis is nominal (P_t = 1 when real).
    * Base case: the must-spend item is bought at f + kL_b while < H and credited (positive) as
      "baseline_credit": the option makes it unnecessary. Setting the must-spend to the cheapest
      allowed replacement makes the capital counted the increment over it [1], [2].
    * Savings of bill component c in year t (s < t <= H) are S_c (1 + e_c)^t, base-year prices
      escalated from year 0 (the convention of the NIST UPV* factor [1]); from the failure year on
      (t > f) the base case runs the must-spend item, so its own savings B_c (1 + e_c)^t are taken off.
      In its k-th year in service (t = s + k, k = 1..K) the option saves D_{c,k} (1 + e_c)^t less (a demand
      ratchet still billing the peaks of before), and in the base case's k-th year with its must-spend
      item (t = f + k) that item saves D'_{c,k} (1 + e_c)^t less, which the option's increment gains.
    * The mid-life item falls m years after each purchase (if m < L and within the horizon), priced
      like capital.
    * Residual value at H: straight line on the remaining life of the last purchase, for the option
      (positive) minus the base case (negative), priced at P_H [1].
    * Incentive: at s, ``incentive`` plus min(cap, rate x kWh saved + share x first capital).
    * With a tax rate tau: tax on savings = -tau x (savings + mid-life items); depreciation shield =
      tau x (straight-line depreciation of the option's purchases - that of the avoided must-spend
      purchases) [3]. Incentives are not taxed and do not reduce the depreciable base; the residual value
      is not taxed (simplifications; see docs/finance.md).

    References
    ----------
    .. [1] S. K. Fuller and S. R. Petersen, "Life-Cycle Costing Manual for the Federal Energy Management
       Program," NIST Handbook 135, 1995 ed., National Institute of Standards and Technology, 1996.
    .. [2] U.S. Code of Federal Regulations, Title 10, Part 436, Subpart A, "Methodology and procedures for
       life cycle cost analyses."
    .. [3] R. A. Brealey, S. C. Myers and F. Allen, *Principles of Corporate Finance*, 10th ed.
       New York: McGraw-Hill, 2011, ch. 6.

    Examples
    --------
    A 1,000 option saving 300 a year on energy over 4 years, life 10 years:

    >>> from models.finance import FinanceAssumptions
    >>> a = FinanceAssumptions(horizon_yr=4)
    >>> p = ProjectInputs(project_id=["M1/IE4"], capex_equipment=1000.0, savings_energy_per_yr=300.0,
    ...                   option_life_yr=10.0)
    >>> build_cash_flows(p, a).net().round(2).tolist()
    [[-1000.0, 300.0, 300.0, 300.0, 900.0]]
    """
    ids = np.atleast_1d(np.asarray(projects.project_id, dtype=object))
    n = ids.size
    if len(set(ids.tolist())) != n:
        raise ValueError("project_id labels must be unique")
    H = int(assumptions.horizon_yr)
    t = np.arange(H + 1)

    capex = np.stack([_column(getattr(projects, name.replace("capital_", "capex_")), n, name, minimum=0.0)
                      for name in CAPITAL_COMPONENTS], axis=1)
    capex_total = capex.sum(axis=1)
    savings = {name: _column(getattr(projects, f"{name}_per_yr"), n, f"{name}_per_yr")
               for name in SAVINGS_COMPONENTS}
    for name, values in savings.items():
        if not np.all(np.isfinite(values)):
            raise ValueError(f"{name}_per_yr must be finite")
    energy_kwh = _column(projects.energy_saved_kwh_per_yr, n, "energy_saved_kwh_per_yr")
    life = np.maximum(1, np.rint(_column(projects.option_life_yr, n, "option_life_yr", positive=True)))
    if not np.all(np.isfinite(life)):
        raise ValueError("option_life_yr must be finite")
    baseline_life_raw = projects.option_life_yr if projects.baseline_life_yr is None else projects.baseline_life_yr
    baseline_life = np.maximum(1, np.rint(_column(baseline_life_raw, n, "baseline_life_yr", positive=True)))
    if not np.all(np.isfinite(baseline_life)):
        raise ValueError("baseline_life_yr must be finite")
    baseline_capex = _column(projects.baseline_capex, n, "baseline_capex", minimum=0.0)
    remaining = _column(projects.existing_remaining_life_yr, n, "existing_remaining_life_yr", minimum=0.0)
    failure = np.where(np.isfinite(remaining), np.rint(np.minimum(remaining, H + 1.0)), H + 1.0)
    midlife_cost = _column(projects.midlife_cost, n, "midlife_cost", minimum=0.0)
    midlife_year = np.rint(_column(projects.midlife_year_yr, n, "midlife_year_yr", minimum=0.0))
    extra_incentive = _column(projects.incentive, n, "incentive", minimum=0.0)
    for name, values in (("capex", capex), ("baseline_capex", baseline_capex), ("midlife_cost", midlife_cost),
                         ("energy_saved_kwh_per_yr", energy_kwh), ("incentive", extra_incentive)):
        if not np.all(np.isfinite(values)):
            raise ValueError(f"{name} must be finite")

    if projects.replace_at_failure is None:
        at_failure = np.full(n, assumptions.replacement_mode == "replace_at_failure")
    else:
        at_failure = np.broadcast_to(np.asarray(projects.replace_at_failure, dtype=bool), (n,))
    start = np.where(at_failure, failure, 0.0)

    inflation = assumptions.inflation_frac if assumptions.rate_basis == "nominal" else 0.0
    price_index = np.power(1.0 + inflation, t.astype(float))

    out = np.zeros((n, H + 1, len(COMPONENTS)))
    col = {name: i for i, name in enumerate(COMPONENTS)}

    option_buy = _chain(t, start, life, H)
    baseline_buy = _chain(t, failure, baseline_life, H)
    option_value = option_buy * price_index[None, :]      # price index at each purchase
    baseline_value = baseline_buy * price_index[None, :]
    for j, name in enumerate(CAPITAL_COMPONENTS):
        out[:, :, col[name]] = -capex[:, j, None] * option_value
    out[:, :, col["baseline_credit"]] = baseline_capex[:, None] * baseline_value

    first_buy = (t[None, :] == start[:, None]) & (start[:, None] < H)
    rule = incentive_amount(capex_total, energy_kwh, assumptions.incentive_per_kwh_saved,
                            assumptions.incentive_capital_share_frac, assumptions.incentive_max)
    out[:, :, col["incentive"]] = (rule + extra_incentive)[:, None] * first_buy

    has_midlife = (midlife_year >= 1) & (midlife_year < life)
    since = t[None, :] - midlife_year[:, None] - start[:, None]
    midlife_due = (has_midlife[:, None] & (since >= 0) & (since % life[:, None] == 0)
                   & (t[None, :] - midlife_year[:, None] < H))
    out[:, :, col["midlife"]] = -midlife_cost[:, None] * midlife_due * price_index[None, :]

    active = (t[None, :] > start[:, None])
    baseline_savings = (np.zeros((n, len(SAVINGS_COMPONENTS))) if projects.baseline_savings_per_yr is None
                        else np.broadcast_to(np.asarray(projects.baseline_savings_per_yr, dtype=float),
                                             (n, len(SAVINGS_COMPONENTS))))
    if not np.all(np.isfinite(baseline_savings)):
        raise ValueError("baseline_savings_per_yr must be finite")
    replaced = active & (t[None, :] > failure[:, None])  # the base case runs the must-spend item from then on
    # each year's shortfall in the project's years: (n, H + 1, 5), the option's less the base case's
    by_year = np.zeros((n, H + 1, len(SAVINGS_COMPONENTS)))
    for value, name, when, sign in ((projects.ratchet_shortfall, "ratchet_shortfall", start, -1.0),
                                    (projects.baseline_ratchet_shortfall, "baseline_ratchet_shortfall", failure, 1.0)):
        if value is None:
            continue
        value = np.asarray(value, dtype=float)
        value = value[:, None, :] if value.ndim == 2 else value
        value = np.broadcast_to(value, (n, value.shape[1], len(SAVINGS_COMPONENTS)))
        if not np.all(np.isfinite(value)):
            raise ValueError(f"{name} must be finite")
        for k in range(value.shape[1]):  # year k + 1 in service: t = when + k + 1, inside the horizon
            year = when + k + 1
            inside = np.flatnonzero(year <= H)
            by_year[inside, year[inside].astype(int), :] += sign * value[inside, k, :]
    for k, name in enumerate(SAVINGS_COMPONENTS):
        growth = np.power(1.0 + assumptions.escalation_frac(_ESCALATION_OF[name]), t.astype(float))
        out[:, :, col[name]] = (savings[name][:, None] * active
                                - baseline_savings[:, k][:, None] * replaced
                                + by_year[:, :, k]) * growth[None, :]

    residual = (capex_total * _residual_fraction(start, life, H)
                - baseline_capex * _residual_fraction(failure, baseline_life, H)) * price_index[H]
    out[:, H, col["residual"]] += residual

    tau = assumptions.tax_rate_frac
    if tau > 0:
        taxable = out[:, :, [col[name] for name in TAXABLE_COMPONENTS]].sum(axis=-1)
        out[:, :, col["tax_savings"]] = -tau * taxable
        years = int(assumptions.depreciation_yr)
        shield = (_depreciation(capex_total[:, None] * option_value, years)
                  - _depreciation(baseline_capex[:, None] * baseline_value, years))
        out[:, :, col["tax_depreciation"]] = tau * shield

    out += 0.0  # turn -0.0 (zero capital times -1) into 0.0
    return CashFlows(project_id=ids.astype(str), component_names=COMPONENTS, amounts=out, horizon_yr=H,
                     start_year=start.astype(int))
