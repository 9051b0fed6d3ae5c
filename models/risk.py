"""Uncertainty: one-at-a-time sensitivity (tornado), break-even values and a seeded Monte Carlo on NPV.

Nothing here knows the physics. The tornado and break-even functions take any callable that maps a dict
of input values to an array of NPVs. The Monte Carlo draws a set of fleet-wide factors (energy price,
escalation, running hours, load, discount rate, capital cost, new machines' losses within their efficiency
tolerance) from documented distributions with numpy's PCG64 generator, then re-prices the per-component
cash flows of :mod:`models.cashflows` for every draw: each component is multiplied by its factors (savings
by price, hours and load; capital by the capital multiplier), escalating components are re-escalated, the
tax on savings is recomputed, and the yearly net flow is re-discounted at the drawn rate. Work is vectorised over
(draws, projects, years) in chunks of draws that bound memory. The summary gives P10/P50/P90 of NPV and
payback and the probability that the NPV is positive, per project.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from typing import Any, Callable, Literal, Mapping

import numpy as np
import pandas as pd
from numpy.random import PCG64, Generator
from scipy.optimize import brentq

from models.cashflows import CAPITAL_COMPONENTS, TAXABLE_COMPONENTS
from models.finance import DISCOUNT_RATE_DRAW_SPREAD_FRAC, FinanceAssumptions, PaybackResult, simple_payback

DistributionKind = Literal["normal", "lognormal", "triangular", "uniform", "fixed"]


# ---------------------------------------------------------------------------------------------------
# One-at-a-time sensitivity
# ---------------------------------------------------------------------------------------------------
#: How a tornado variable and its low and high values read on a page or in a report.
TORNADO_LABELS = {
    "energy_price_mult": "Electricity price (x{low:g} to x{high:g})",
    "hours_mult": "Running hours (x{low:g} to x{high:g})",
    "load_mult": "Shaft load (x{low:g} to x{high:g})",
    "capital_mult": "Capital cost (x{low:g} to x{high:g})",
    "discount_rate_delta_frac": "Discount rate ({low_pct:+g} to {high_pct:+g} points)",
    "escalation_delta_frac": "Price escalation ({low_pct:+g} to {high_pct:+g} points/yr)",
    "loss_band_delta_frac": "New machines' losses ({low_pct:+g} to {high_pct:+g} % of the IEC tolerance band)",
}


def tornado_label(variable: str, low: float, high: float) -> str:
    """A tornado bar's label, e.g. "Discount rate (-2 to +2 points)" (an unknown variable as its name)."""
    template = TORNADO_LABELS.get(str(variable))
    if template is None:
        return f"{variable} ({low:g} to {high:g})"
    return template.format(low=low, high=high, low_pct=low * 100, high_pct=high * 100)


def tornado(npv_function: Callable[[dict[str, float]], Any], base: Mapping[str, float],
            ranges: Mapping[str, tuple[float, float]], reduce: Callable[[np.ndarray], float] = np.sum
            ) -> pd.DataFrame:
    """Return one-at-a-time sensitivity rows sorted by swing, for a tornado chart.

    Parameters
    ----------
    npv_function : callable
        Maps a dict of input values (multipliers or values, the keys of ``base``) to NPVs (array or
        float) [currency].
    base : mapping of str to float
        Base value of every input.
    ranges : mapping of str to (float, float)
        Low and high value of each input to vary; keys must be in ``base``.
    reduce : callable
        Turns the NPV array into one number [currency]; default sum over projects (fleet NPV). Pass
        e.g. ``lambda v: v[3]`` for one project.

    Returns
    -------
    pandas.DataFrame
        Columns ``variable``, ``low_value``, ``high_value``, ``npv_at_low``, ``npv_at_high``, ``base_npv``
        [currency] and ``swing`` = |npv_at_high - npv_at_low| [currency], largest swing first.

    Notes
    -----
    Each input moves to its low and high value with all others at base (one-at-a-time sensitivity);
    bars sorted by swing give the tornado diagram [1]. Interactions between inputs are not shown: use
    the Monte Carlo for those.

    References
    ----------
    .. [1] R. T. Clemen, *Making Hard Decisions: An Introduction to Decision Analysis*, 2nd ed. Belmont,
       CA: Duxbury, 1996, ch. 5.

    Examples
    --------
    >>> f = lambda v: v["price"] * 100.0 - v["capex"]
    >>> rows = tornado(f, {"price": 1.0, "capex": 50.0}, {"price": (0.8, 1.2), "capex": (40.0, 70.0)})
    >>> rows["variable"].tolist(), rows["swing"].tolist()
    (['price', 'capex'], [40.0, 30.0])
    """
    unknown = [name for name in ranges if name not in base]
    if unknown:
        raise ValueError(f"ranges names inputs missing from base: {unknown}")
    base_value = float(reduce(np.asarray(npv_function(dict(base)), dtype=float)))
    rows = []
    for name, (low, high) in ranges.items():
        at_low = float(reduce(np.asarray(npv_function({**base, name: low}), dtype=float)))
        at_high = float(reduce(np.asarray(npv_function({**base, name: high}), dtype=float)))
        rows.append({"variable": name, "low_value": float(low), "high_value": float(high), "npv_at_low": at_low,
                     "npv_at_high": at_high, "base_npv": base_value, "swing": abs(at_high - at_low)})
    frame = pd.DataFrame(rows, columns=["variable", "low_value", "high_value", "npv_at_low", "npv_at_high",
                                        "base_npv", "swing"])
    frame["variable"] = frame["variable"].astype("str")
    return frame.sort_values("swing", ascending=False, kind="stable").reset_index(drop=True)


def break_even(npv_function: Callable[[dict[str, float]], Any], base: Mapping[str, float], variable: str,
               low: float, high: float, reduce: Callable[[np.ndarray], float] = np.sum) -> float | None:
    """Return the value of one input at which the NPV is zero, all others at base.

    Parameters
    ----------
    npv_function, base, reduce
        As in :func:`tornado`.
    variable : str
        The input to solve for (a key of ``base``).
    low, high : float
        Search interval of the input.

    Returns
    -------
    float or None
        The break-even value, or None when the NPV does not change sign between ``low`` and ``high``.

    Notes
    -----
    Brent's method [1] on g(v) = reduce(npv_function(base with variable = v)).

    References
    ----------
    .. [1] R. P. Brent, *Algorithms for Minimization without Derivatives*. Englewood Cliffs, NJ:
       Prentice-Hall, 1973, ch. 4.

    Examples
    --------
    >>> round(break_even(lambda v: v["hours"] * 0.5 - 1000.0, {"hours": 4000.0}, "hours", 0.0, 8760.0), 6)
    2000.0
    """
    if variable not in base:
        raise ValueError(f"{variable!r} is not an input in base")

    def g(value: float) -> float:
        return float(reduce(np.asarray(npv_function({**base, variable: value}), dtype=float)))

    g_low, g_high = g(low), g(high)
    if g_low == 0.0:
        return float(low)
    if g_high == 0.0:
        return float(high)
    if np.sign(g_low) == np.sign(g_high):
        return None
    return float(brentq(g, low, high, xtol=1e-12 * max(1.0, abs(low), abs(high)), rtol=1e-12))


# ---------------------------------------------------------------------------------------------------
# Distributions and draws
# ---------------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class Distribution:
    """A probability distribution of one uncertain factor.

    Attributes
    ----------
    kind : {"normal", "lognormal", "triangular", "uniform", "fixed"}
        Family.
    a, b, c : float
        Parameters: normal (mean a, standard deviation b); lognormal (median a > 0, standard deviation
        of the log b); triangular (low a, mode b, high c); uniform (low a, high b); fixed (value a).
    source : str
        Where the numbers come from (common practice, a standard's tolerance...).
    """

    kind: DistributionKind
    a: float
    b: float = 0.0
    c: float = 0.0
    source: str = ""

    def __post_init__(self) -> None:
        ok = {
            "normal": self.b >= 0,
            "lognormal": self.a > 0 and self.b >= 0,
            "triangular": self.a <= self.b <= self.c and self.a < self.c,
            "uniform": self.a <= self.b,
            "fixed": True,
        }.get(self.kind)
        if ok is None:
            raise ValueError(f"unknown distribution kind {self.kind!r}")
        if not ok:
            raise ValueError(f"invalid parameters for a {self.kind} distribution: a={self.a}, b={self.b}, c={self.c}")

    def draw(self, rng: Generator, n: int) -> np.ndarray:
        """Return ``n`` draws from ``rng``."""
        if self.kind == "normal":
            return rng.normal(self.a, self.b, n)
        if self.kind == "lognormal":
            return rng.lognormal(np.log(self.a), self.b, n)
        if self.kind == "triangular":
            return rng.triangular(self.a, self.b, self.c, n)
        if self.kind == "uniform":
            return rng.uniform(self.a, self.b, n)
        return np.full(n, float(self.a))

    @property
    def mean(self) -> float:
        """Expected value of the distribution."""
        if self.kind in ("normal", "fixed"):
            return float(self.a)
        if self.kind == "lognormal":
            return float(self.a * np.exp(0.5 * self.b ** 2))
        if self.kind == "triangular":
            return (self.a + self.b + self.c) / 3.0
        return 0.5 * (self.a + self.b)


#: The factor that places each new machine's losses within the IEC 60034-1 tolerance on its declared
#: efficiency: -1 = the declared losses less the band, 0 = as declared, +1 = the band above (the most a
#: machine may lose and still meet its declared efficiency) [frac of the band].
LOSS_BAND_FACTOR = "loss_band_delta_frac"
#: The flow the Monte Carlo adds to the cash flows for it: the energy savings the new machine would lose if
#: its losses were the whole band above its declared losses (negative when the option installs a new
#: machine), so that the draw's flows are the savings plus ``loss_band_delta_frac`` times it.
LOSS_BAND_COMPONENT = "loss_band"

#: Default factor distributions, drawn in this order. All are common practice (editable), except the new
#: machines' losses, drawn across the IEC 60034-1 tolerance on efficiency (:data:`LOSS_BAND_FACTOR`).
DEFAULT_FACTORS: dict[str, Distribution] = {
    "energy_price_mult": Distribution("lognormal", 1.0, 0.15, source="common practice: price level +/-15 % (1 sigma)"),
    "escalation_delta_frac": Distribution("normal", 0.0, 0.01, source="common practice: +/-1 %/yr on escalation"),
    "hours_mult": Distribution("triangular", 0.8, 1.0, 1.1, source="common practice: logged hours often below estimates"),
    "load_mult": Distribution("triangular", 0.85, 1.0, 1.15, source="common practice: +/-15 % on estimated load"),
    "discount_rate_delta_frac": Distribution("triangular", -DISCOUNT_RATE_DRAW_SPREAD_FRAC, 0.0,
                                             DISCOUNT_RATE_DRAW_SPREAD_FRAC, source="common practice: +/-2 points"),
    "capital_mult": Distribution("triangular", 0.9, 1.0, 1.3, source="common practice: quotes -10 %, overruns +30 %"),
    "loss_band_delta_frac": Distribution(
        "triangular", -1.0, 0.0, 1.0,
        source="assumption: a new machine's losses fall either side of its declared value, by at most the "
               "IEC 60034-1 tolerance (15 % of losses up to 150 kW, 10 % above; from memory)"),
}


def draw_factors(n_draws: int, seed: int, distributions: Mapping[str, Distribution] = DEFAULT_FACTORS
                 ) -> dict[str, np.ndarray]:
    """Draw every factor ``n_draws`` times from a seeded PCG64 generator.

    Parameters
    ----------
    n_draws : int
        Number of draws, >= 1.
    seed : int
        Seed, >= 0; the same seed and distributions give the same draws.
    distributions : mapping of str to Distribution
        Factors to draw, in order (the order fixes which random numbers each factor gets).

    Returns
    -------
    dict of str to numpy.ndarray
        One array of shape (n_draws,) per factor, in the distributions' units.

    Notes
    -----
    numpy's ``Generator(PCG64(seed))`` [1]; factors are independent.

    References
    ----------
    .. [1] M. E. O'Neill, "PCG: A family of simple fast space-efficient statistically good algorithms for
       random number generation," Harvey Mudd College, Tech. Rep. HMC-CS-2014-0905, 2014.

    Examples
    --------
    >>> a = draw_factors(3, seed=7)["capital_mult"]
    >>> b = draw_factors(3, seed=7)["capital_mult"]
    >>> bool((a == b).all())
    True
    """
    if int(n_draws) != n_draws or n_draws < 1:
        raise ValueError("n_draws must be a whole number >= 1")
    if int(seed) != seed or seed < 0:
        raise ValueError("seed must be a whole number >= 0")
    rng = Generator(PCG64(int(seed)))
    return {name: dist.draw(rng, int(n_draws)) for name, dist in distributions.items()}


# ---------------------------------------------------------------------------------------------------
# Monte Carlo re-pricing of component cash flows
# ---------------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class ComponentResponse:
    """How one cash-flow component responds to the drawn factors.

    Attributes
    ----------
    multipliers : tuple of str
        Names of the factors (draws or extra multipliers) whose product scales the component.
    escalation_delta : str or None
        Name of an additive escalation factor [frac/yr]; the component's year-t amount is scaled by
        ((1 + e0 + delta) / (1 + e0))^t.
    base_escalation_frac : float
        The escalation e0 the flows were built with [frac/yr].
    taxable : bool
        The component is taxed as operating income; with a tax rate its after-tax value is recomputed.
    """

    multipliers: tuple[str, ...] = ()
    escalation_delta: str | None = None
    base_escalation_frac: float = 0.0
    taxable: bool = False


def default_response(assumptions: FinanceAssumptions) -> dict[str, ComponentResponse]:
    """Return the default response of each :data:`models.cashflows.COMPONENTS` entry to the factors.

    Parameters
    ----------
    assumptions : FinanceAssumptions
        The assumptions the flows were built with (for the base escalation of each component).

    Returns
    -------
    dict of str to ComponentResponse
        Capital-like components (capital, baseline credit, mid-life items, residual value, depreciation
        shield) scale with ``capital_mult``; energy savings with price, hours and load; demand savings
        with price and load; reactive savings with price and hours; energy, demand and reactive savings
        follow ``escalation_delta_frac``; fixed-charge and maintenance savings and incentives do not
        change. :data:`LOSS_BAND_COMPONENT` (the energy the new machines' losses would cost at the top of
        their tolerance band, a flow the Monte Carlo adds to the cash flows) responds as the energy savings
        do, times ``loss_band_delta_frac``.
    """
    taxable = set(TAXABLE_COMPONENTS)
    out = {name: ComponentResponse(("capital_mult",), taxable=name in taxable) for name in CAPITAL_COMPONENTS}
    out["incentive"] = ComponentResponse()
    for name in ("baseline_credit", "residual", "tax_depreciation"):
        out[name] = ComponentResponse(("capital_mult",))
    out["midlife"] = ComponentResponse(("capital_mult",), taxable=True)
    bill = {"savings_energy": ("energy", ("energy_price_mult", "hours_mult", "load_mult")),
            "savings_demand": ("demand", ("energy_price_mult", "load_mult")),
            "savings_reactive": ("reactive", ("energy_price_mult", "hours_mult"))}
    for name, (component, factors) in bill.items():
        out[name] = ComponentResponse(factors, "escalation_delta_frac", assumptions.escalation_frac(component),
                                      taxable=True)
    energy = out["savings_energy"]
    out[LOSS_BAND_COMPONENT] = replace(energy, multipliers=(LOSS_BAND_FACTOR,) + energy.multipliers)
    out["savings_fixed"] = ComponentResponse(taxable=True)
    out["savings_maintenance"] = ComponentResponse(taxable=True)
    out["tax_savings"] = ComponentResponse()
    return out


@dataclass(frozen=True)
class MonteCarloResult:
    """NPV and payback of every project under every draw.

    Attributes
    ----------
    project_id : numpy.ndarray
        Project labels, shape (n_projects,).
    npv : numpy.ndarray
        NPV [currency], shape (n_draws, n_projects).
    payback_yr : numpy.ndarray
        Simple payback [yr], shape (n_draws, n_projects); ``inf`` when not within the horizon.
    discount_rate_frac : numpy.ndarray
        Discount rate of each draw [frac/yr], shape (n_draws,).
    """

    project_id: np.ndarray
    npv: np.ndarray = field(repr=False)
    payback_yr: np.ndarray = field(repr=False)
    discount_rate_frac: np.ndarray = field(repr=False)

    def summary(self, target_payback_yr: float | None = None) -> pd.DataFrame:
        """Return P10/P50/P90 of NPV and payback, the mean NPV with its standard error and P(NPV > 0).

        Parameters
        ----------
        target_payback_yr : float, optional
            Also report the probability that the payback is at most this many years [yr].

        Returns
        -------
        pandas.DataFrame
            One row per project (index ``project_id``): ``npv_p10``, ``npv_p50``, ``npv_p90``,
            ``npv_mean``, ``npv_standard_error`` [currency], ``prob_npv_positive_frac`` [-],
            ``payback_p10_yr``, ``payback_p50_yr``, ``payback_p90_yr`` [yr] (``inf`` = not within the
            horizon) and, with a target, ``prob_payback_within_target_frac`` [-].

        Notes
        -----
        Pxx is the xx-th percentile: 10 % of the draws fall below P10. NPV percentiles interpolate
        linearly between draws; payback percentiles take the draw value at the percentile (the
        "inverted CDF" rule), so that an ``inf`` payback never turns into NaN. The standard error of the
        mean is s / sqrt(n).
        """
        n = self.npv.shape[0]
        p10, p50, p90 = np.percentile(self.npv, [10, 50, 90], axis=0)
        pb = np.percentile(self.payback_yr, [10, 50, 90], axis=0, method="inverted_cdf")
        std = self.npv.std(axis=0, ddof=1) if n > 1 else np.zeros(self.npv.shape[1])
        frame = pd.DataFrame({
            "npv_p10": p10, "npv_p50": p50, "npv_p90": p90,
            "npv_mean": self.npv.mean(axis=0), "npv_standard_error": std / np.sqrt(n),
            "prob_npv_positive_frac": (self.npv > 0).mean(axis=0),
            "payback_p10_yr": pb[0], "payback_p50_yr": pb[1], "payback_p90_yr": pb[2],
        }, index=pd.Index(self.project_id, name="project_id", dtype="str"))
        if target_payback_yr is not None:
            frame["prob_payback_within_target_frac"] = (self.payback_yr <= target_payback_yr).mean(axis=0)
        return frame


def _multiplier(names: tuple[str, ...], factors: Mapping[str, np.ndarray], draws: slice, n_projects: int
                ) -> np.ndarray:
    """Product of the named factors for a chunk of draws, shape (draws, 1) or (draws, n_projects)."""
    out = np.ones((draws.stop - draws.start, 1))
    for name in names:
        if name not in factors:
            raise ValueError(f"factor {name!r} is neither drawn nor given as an extra multiplier")
        value = np.asarray(factors[name], dtype=float)[draws]
        out = out * (value[:, None] if value.ndim == 1 else value)
    return out


def monte_carlo(
    amounts: np.ndarray,
    component_names: tuple[str, ...],
    factors: Mapping[str, np.ndarray],
    response: Mapping[str, ComponentResponse],
    discount_rate_frac: float,
    *,
    project_id: Any = None,
    rate_delta: str | None = "discount_rate_delta_frac",
    tax_rate_frac: float = 0.0,
    tax_component: str = "tax_savings",
    max_chunk_elements: int = 4_000_000,
    payback_leaves_out: tuple[str, ...] = ("residual",),
    paybacks: bool = True,
) -> MonteCarloResult:
    """Re-price per-component cash flows under every draw and return NPV and payback per project.

    Parameters
    ----------
    amounts : numpy.ndarray
        Cash flows by component, shape (n_projects, n_years + 1, n_components) [currency], e.g.
        :attr:`models.cashflows.CashFlows.amounts`.
    component_names : tuple of str
        Names of the last axis of ``amounts``.
    factors : mapping of str to numpy.ndarray
        Drawn factors (:func:`draw_factors`), each shape (n_draws,), plus any extra per-project
        multipliers of shape (n_draws, n_projects).
    response : mapping of str to ComponentResponse
        How each component responds (:func:`default_response`); components not listed are unchanged.
    discount_rate_frac : float
        Base discount rate [frac/yr].
    project_id : sequence of str, optional
        Labels for the summary.
    rate_delta : str or None
        Name of the additive discount-rate factor [frac/yr]; None keeps the base rate.
    tax_rate_frac : float
        Tax rate the flows were built with [frac]; when > 0 the tax on savings is recomputed from the
        re-priced taxable components and ``tax_component`` is ignored.
    tax_component : str
        Name of the tax-on-savings component.
    max_chunk_elements : int
        Largest (draws x projects x years) block held in memory at once.
    payback_leaves_out : tuple of str
        Components the payback does not count (the residual value at the horizon's end: a book value,
        not cash), as the deterministic paybacks of :func:`models.scenario.economics`.
    paybacks : bool
        Compute the paybacks (False: NPVs only, the paybacks NaN).

    Returns
    -------
    MonteCarloResult
        NPV and simple payback, shape (n_draws, n_projects).

    Notes
    -----
    For draw k, project i and year t, the flow is the linear recombination
    CF_kit = sum_c m_kc (or m_kic) g_kct w_c F_itc, with m the product of the component's factors,
    g_kct = ((1 + e_c + delta_k)/(1 + e_c))^t for escalating components, and w_c = 1 - tau for taxable
    components (the tax on savings, -tau x taxable savings, is linear in them), and the NPV is
    sum_t CF_kit / (1 + d + delta_d,k)^t. This is exact for flows linear in the factors; the incentive
    (capped) is held fixed. Monte Carlo error falls as 1/sqrt(n_draws) [1].

    References
    ----------
    .. [1] D. Vose, *Risk Analysis: A Quantitative Guide*, 3rd ed. Chichester: Wiley, 2008, ch. 7.
    """
    amounts = np.asarray(amounts, dtype=float)
    if amounts.ndim != 3 or amounts.shape[2] != len(component_names):
        raise ValueError("amounts must have shape (n_projects, n_years + 1, len(component_names))")
    if not np.all(np.isfinite(amounts)):
        raise ValueError("amounts must be finite")
    if discount_rate_frac <= -1:
        raise ValueError("discount_rate_frac must be > -1")
    if not factors:
        raise ValueError("factors must hold at least one drawn factor")
    n_draws = {np.asarray(v).shape[0] for v in factors.values()}
    if len(n_draws) != 1:
        raise ValueError("every factor must have the same number of draws")
    n_draws = n_draws.pop()
    n, width, _ = amounts.shape
    t = np.arange(width, dtype=float)
    chunk = max(1, int(max_chunk_elements // max(1, n * width)))
    if rate_delta is not None and rate_delta not in factors:
        raise ValueError(f"rate factor {rate_delta!r} is not among the factors")
    rate = discount_rate_frac + (np.asarray(factors[rate_delta], dtype=float) if rate_delta else np.zeros(n_draws))
    if np.any(rate <= -1):
        raise ValueError(f"the discount rate {discount_rate_frac:g} drawn {float(np.min(rate - discount_rate_frac)):+g} "
                         "reaches -100 % or below, which has no present value: give a discount rate further above -1 "
                         "(finance assumptions, discount_rate_frac), or run without the uncertainty")
    npv_out = np.empty((n_draws, n))
    payback_out = np.empty((n_draws, n)) if paybacks else np.full((n_draws, n), np.nan)
    active = [c for c in range(len(component_names)) if np.any(amounts[:, :, c])
              and not (tax_rate_frac > 0 and component_names[c] == tax_component)]
    # components that respond alike (same factors, escalation and tax weight) are summed once: the
    # recombination is linear, so each group costs one pass per chunk instead of one per component
    groups: dict[tuple, np.ndarray] = {}
    for c in active:
        rule = response.get(component_names[c], ComponentResponse())
        for name in rule.multipliers:
            if name not in factors:
                raise ValueError(f"factor {name!r} is neither drawn nor given as an extra multiplier")
        if rule.escalation_delta is not None and rule.escalation_delta not in factors:
            raise ValueError(f"factor {rule.escalation_delta!r} is not among the factors")
        key = (tuple(rule.multipliers), rule.escalation_delta,
               float(rule.base_escalation_frac) if rule.escalation_delta is not None else 0.0,
               bool(rule.taxable and tax_rate_frac > 0), component_names[c] in payback_leaves_out)
        groups[key] = groups[key] + amounts[:, :, c] if key in groups else amounts[:, :, c].copy()
    keys = list(groups)
    bases = np.stack([groups[k] for k in keys]) if keys else np.zeros((0, n, width))
    for start in range(0, n_draws, chunk):
        draws = slice(start, min(n_draws, start + chunk))
        size = draws.stop - draws.start
        # coefficient of each group by draw and year: its factors times its escalation growth
        coef = np.ones((len(keys), size, width))
        per_project: list[tuple[int, np.ndarray]] = []
        for g, (multipliers, escalation_delta, base_escalation, taxed, _left_out) in enumerate(keys):
            weight = _multiplier(multipliers, factors, draws, n)
            if taxed:
                weight = weight * (1.0 - tax_rate_frac)
            if escalation_delta is not None:
                delta = np.asarray(factors[escalation_delta], dtype=float)[draws]
                coef[g] = np.power((1.0 + base_escalation + delta[:, None]) / (1.0 + base_escalation), t[None, :])
            if weight.shape[1] == 1:
                coef[g] *= weight
            else:
                per_project.append((g, weight))
        shared = [g for g in range(len(keys)) if g not in {g_ for g_, _ in per_project}]
        flows = np.einsum("gdt,gnt->dnt", coef[shared], bases[shared]) if shared else np.zeros((size, n, width))
        for g, weight in per_project:
            flows += weight[:, :, None] * bases[g][None, :, :] * coef[g][:, None, :]
        discount = np.power(1.0 + rate[draws, None], -t[None, :])
        npv_out[draws] = np.einsum("dnt,dt->dn", flows, discount)
        if not paybacks:
            continue
        weights = dict(per_project)
        for g, key in enumerate(keys):  # the components the payback leaves out, taken off the flows
            if key[4]:
                flows -= (weights[g][:, :, None] * bases[g][None, :, :] * coef[g][:, None, :] if g in weights
                          else np.einsum("dt,nt->dnt", coef[g], bases[g]))
        payback: PaybackResult = simple_payback(flows, overwrite=True)  # flows are not used after this
        payback_out[draws] = payback.payback_yr
    ids = np.arange(n).astype(str) if project_id is None else np.asarray(project_id, dtype=object).astype(str)
    return MonteCarloResult(project_id=ids, npv=npv_out, payback_yr=payback_out, discount_rate_frac=rate)


def base_factors(names) -> dict[str, float]:
    """Each factor at its base: 0 for an additive ``*_delta_frac``, 1 for a multiplier.

    Examples
    --------
    >>> base_factors(["hours_mult", "discount_rate_delta_frac"])
    {'hours_mult': 1.0, 'discount_rate_delta_frac': 0.0}
    """
    return {name: (0.0 if name.endswith("_delta_frac") else 1.0) for name in names}


#: The factors each project's break-even is found for (:func:`break_even_multipliers`): the multiplier on the
#: electricity prices, the running hours, the shaft load and the capital at which its NPV is zero.
BREAK_EVEN_FACTORS: tuple[str, ...] = ("energy_price_mult", "hours_mult", "load_mult", "capital_mult")


def break_even_multipliers(amounts: np.ndarray, component_names: tuple[str, ...],
                           response: Mapping[str, ComponentResponse], discount_rate_frac: float, *,
                           tax_rate_frac: float = 0.0, base: Mapping[str, float] | None = None,
                           factors: tuple[str, ...] = BREAK_EVEN_FACTORS) -> dict[str, np.ndarray]:
    """Each project's break-even multiplier of each factor: the value at which its NPV is zero, the others at base.

    The re-pricing of :func:`monte_carlo` is linear in a multiplier factor, NPV(m) = NPV(0) + m (NPV(1) - NPV(0)),
    so the break-even is m* = NPV(0) / (NPV(0) - NPV(1)), from two prices of the flows (the factor at 0 and at
    its base of 1). One call prices them all: a draw at base, then one per factor at 0.

    Parameters
    ----------
    amounts, component_names, response, discount_rate_frac, tax_rate_frac
        As :func:`monte_carlo`.
    base : mapping of str to float, optional
        Every factor's base value (default 1 for a multiplier, 0 for a ``*_delta_frac``, for the factors the
        responses name and the discount rate's).
    factors : tuple of str
        The multiplier factors to find break-evens of.

    Returns
    -------
    dict of str to numpy.ndarray
        Per factor, shape (n_projects,): m* >= 0, or NaN where the NPV does not cross zero at a multiplier of 0
        or more (the factor does not move it, or it stays on one side).

    Examples
    --------
    A project of capital 1,000 in year 0 and energy savings of 150 a year for 10 years at 5 %: NPV(price x m) =
    -1000 + 150 m a(10, 5 %), a = 7.721735; zero at m = 1000 / (150 x 7.721735) = 0.863364; the capital may rise
    to 150 x 7.721735 / 1000 = 1.15826 times itself (hand calculation).

    >>> amounts = np.zeros((1, 11, 2)); amounts[0, 0, 0] = -1000.0; amounts[0, 1:, 1] = 150.0
    >>> names = ("capital", "savings_energy")
    >>> resp = {"capital": ComponentResponse(("capital_mult",)),
    ...         "savings_energy": ComponentResponse(("energy_price_mult", "hours_mult"))}
    >>> m = break_even_multipliers(amounts, names, resp, 0.05)
    >>> round(float(m["energy_price_mult"][0]), 6), round(float(m["capital_mult"][0]), 6), bool(np.isnan(m["load_mult"][0]))
    (0.863364, 1.15826, True)
    """
    amounts = np.asarray(amounts, dtype=float)
    names = set()
    for rule in response.values():
        names.update(rule.multipliers)
        if rule.escalation_delta is not None:
            names.add(rule.escalation_delta)
    names.add("discount_rate_delta_frac")
    start = base_factors(names)
    start.update(base or {})
    draws = {name: np.full(1 + len(factors), float(value)) for name, value in start.items()}
    for k, factor in enumerate(factors):
        if factor in draws:
            draws[factor][1 + k] = 0.0
    npv = monte_carlo(amounts, component_names, draws, response, discount_rate_frac, tax_rate_frac=tax_rate_frac,
                      paybacks=False).npv
    out = {}
    scale = np.maximum(np.abs(amounts).sum(axis=(1, 2)), 1.0)
    for k, factor in enumerate(factors):
        at_one, at_zero = npv[0], npv[1 + k]
        slope = at_one - at_zero
        moves = (np.abs(slope) > 1e-9 * scale) & (factor in draws)
        with np.errstate(divide="ignore", invalid="ignore"):
            m = np.where(moves, -at_zero / np.where(moves, slope, 1.0), np.nan)
        out[factor] = np.where(m >= 0.0, m, np.nan)
    return out


def break_even_words(row: Mapping[str, Any], year_h: float = 8760.0, brief: bool = False) -> str:
    """A project's break-evens in a short sentence ("" where none is within reach): where its NPV crosses zero.

    ``row`` is a results row (``break_even_price_mult``, ``break_even_running_h_per_yr``, ``break_even_load_mult``,
    ``break_even_capital_mult`` and ``running_h_per_yr``). Each bound holds with the other inputs as modelled. A
    multiplier is said as a share of today's value (83 %), or as so many times it from 10 times up.
    ``brief`` leaves out the load and today's hours, in fewer words (a one-page decision record).

    Examples
    --------
    >>> row = {"break_even_price_mult": 0.83, "break_even_running_h_per_yr": 7076.0, "running_h_per_yr": 8760.0,
    ...        "break_even_load_mult": 0.83, "break_even_capital_mult": 1.2}
    >>> break_even_words(row)
    'Its NPV falls to zero, each input alone, at 83 % of the electricity prices, 7,076 h/yr (8,760 today), 83 % of the shaft load or 120 % of the capital.'
    >>> break_even_words(row, brief=True)
    'NPV zero (each alone) at 83 % of prices, 7,076 h/yr or 120 % of capital.'
    >>> break_even_words({**row, "break_even_running_h_per_yr": float("nan"), "break_even_load_mult": float("nan"),
    ...                   "break_even_capital_mult": 19.1})
    'Its NPV falls to zero, each input alone, at 83 % of the electricity prices or 19.1 times the capital.'
    """
    def value(name: str) -> float:
        v = float(row.get(name, float("nan")))
        return v if np.isfinite(v) else float("nan")

    def of(mult: float, what: str) -> str:
        return f"{mult:.3g} times {what}" if mult >= 10.0 else f"{100.0 * mult:.0f} % of {what}"

    price, hours, load, capital = (value(f"break_even_{n}") for n in ("price_mult", "running_h_per_yr", "load_mult",
                                                                       "capital_mult"))
    parts = []
    if price == price:
        parts.append(of(price, "prices" if brief else "the electricity prices"))
    if hours == hours and hours <= year_h:
        parts.append(f"{hours:,.0f} h/yr" + ("" if brief else f" ({value('running_h_per_yr'):,.0f} today)"))
    if load == load and not brief:
        parts.append(of(load, "the shaft load"))
    if capital == capital:
        parts.append(of(capital, "capital" if brief else "the capital"))
    if not parts:
        return ""
    listed = parts[0] if len(parts) == 1 else ", ".join(parts[:-1]) + " or " + parts[-1]
    return ("NPV zero (each alone) at " if brief else "Its NPV falls to zero, each input alone, at ") + listed + "."


# ---------------------------------------------------------------------------------------------------
# A portfolio of projects started in different years
# ---------------------------------------------------------------------------------------------------
def portfolio_npv(npv: np.ndarray, discount_rate_frac: np.ndarray, start_yr: Any, offset: Any = 0.0) -> np.ndarray:
    """Return the NPV of a portfolio at its start, one value per draw, its projects starting in later years.

    Parameters
    ----------
    npv : numpy.ndarray
        Each project's NPV at its own start, shape (n_draws, n_projects) [currency]
        (:attr:`MonteCarloResult.npv`).
    discount_rate_frac : numpy.ndarray
        Discount rate of each draw [frac/yr], shape (n_draws,), each > -1
        (:attr:`MonteCarloResult.discount_rate_frac`).
    start_yr : array_like of int
        Years from the portfolio's start to each project's start, shape (n_projects,), >= 0.
    offset : array_like of float
        Added to each project's NPV in every draw before the delay [currency], shape (n_projects,) or a
        scalar; e.g. a fixed correction the portfolio makes to a project's value (default 0).

    Returns
    -------
    numpy.ndarray
        Portfolio NPV of each draw [currency], shape (n_draws,).

    Notes
    -----
    V_k = sum_i (NPV_ki + o_i) (1 + r_k)^-s_i: a project started s_i years into the portfolio is the
    same project later, its own NPV discounted by the delay at the draw's rate [1]. The draws' shared
    factors make the projects' NPVs of one draw add up (no independence is assumed between projects).

    References
    ----------
    .. [1] R. A. Brealey, S. C. Myers and F. Allen, *Principles of Corporate Finance*, 10th ed. New York:
       McGraw-Hill, 2011, ch. 6 (choosing when to invest).

    Examples
    --------
    >>> portfolio_npv(np.array([[100.0, 110.0]]), np.array([0.10]), [0, 1])
    array([200.])
    """
    values = np.asarray(npv, dtype=float)
    if values.ndim != 2:
        raise ValueError("npv must have shape (n_draws, n_projects)")
    rate = np.asarray(discount_rate_frac, dtype=float).reshape(-1)
    if rate.shape[0] != values.shape[0]:
        raise ValueError("discount_rate_frac must hold one rate per draw")
    if np.any(rate <= -1):
        raise ValueError("every discount rate must be > -1")
    start = np.asarray(start_yr, dtype=float).reshape(-1)
    if start.shape[0] != values.shape[1]:
        raise ValueError("start_yr must hold one year per project")
    if np.any(start < 0) or not np.all(np.isfinite(start)):
        raise ValueError("start_yr must be finite and >= 0")
    delay = np.power(1.0 + rate[:, None], -start[None, :])
    return ((values + np.asarray(offset, dtype=float)) * delay).sum(axis=1)


def distribution_summary(values: Any) -> dict[str, float]:
    """Return P10, P50, P90, mean, its standard error and P(value > 0) of a set of drawn NPVs.

    Parameters
    ----------
    values : array_like
        One NPV per draw [currency], at least one.

    Returns
    -------
    dict
        ``npv_p10``, ``npv_p50``, ``npv_p90``, ``npv_mean``, ``npv_standard_error`` [currency] and
        ``prob_npv_positive_frac`` [-], as :meth:`MonteCarloResult.summary` states them per project.

    Examples
    --------
    >>> s = distribution_summary([-10.0, 0.0, 10.0, 20.0, 30.0])
    >>> s["npv_p50"], s["prob_npv_positive_frac"]
    (10.0, 0.6)
    """
    v = np.asarray(values, dtype=float).reshape(-1)
    if v.size == 0:
        raise ValueError("no draws to summarise")
    p10, p50, p90 = np.percentile(v, [10, 50, 90])
    std = v.std(ddof=1) if v.size > 1 else 0.0
    return {"npv_p10": float(p10), "npv_p50": float(p50), "npv_p90": float(p90), "npv_mean": float(v.mean()),
            "npv_standard_error": float(std / np.sqrt(v.size)), "prob_npv_positive_frac": float((v > 0).mean())}
