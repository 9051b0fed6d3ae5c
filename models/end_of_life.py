"""End-of-life strategy: replace now, replace at failure or rewind at failure, by expected present cost.

The existing motor's failure time follows a Weibull law by size class (editable shape and scale; the
defaults are common practice, not data). Given the motor's age, the conditional probability of failing
in each year of the horizon weights the cost of each strategy: capital (with repeat purchases and a
straight-line residual value at the horizon end), downtime (hours of lead time, or of a swap when a spare
is on hand, times a cost per hour) and running cost (energy at base-year prices, escalated). The result is
one row per asset with the expected present cost of each strategy and the cheapest. :func:`fleet_rules`
evaluates the same costs over a grid of sizes and running hours for a failed motor and turns the result
into a motor management policy ("replace rather than rewind below X kW when running more than Y h/yr").
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd
from scipy.special import gamma, gammaincc

from models.case import HP_TO_KW, power_label, rating_in_unit

#: Strategy names, in the column order of :func:`strategy_costs`.
STRATEGIES: tuple[str, ...] = ("replace_now", "replace_at_failure", "rewind_at_failure")

#: Each strategy in plain words, as every front names it.
STRATEGY_NAMES: dict[str, str] = {"replace_now": "replace now", "replace_at_failure": "replace at failure",
                                  "rewind_at_failure": "rewind at failure"}

#: Each repair-or-replace decision of :func:`fleet_rules` in plain words, as every front names it.
DECISION_NAMES: dict[str, str] = {"replace": "replace", "rewind": "rewind",
                                  "replace_above_hours": "replace from the hours shown, rewind below"}

#: The column of :func:`strategy_costs` holding each strategy's expected present cost.
COST_COLUMNS: dict[str, str] = {strategy: f"cost_{strategy}" for strategy in STRATEGIES}


@dataclass(frozen=True)
class LifeClass:
    """Weibull failure law of the motors up to a rated power.

    Attributes
    ----------
    max_rated_p_kw : float
        Upper end of the class, inclusive [kW]; ``inf`` for the largest class.
    shape : float
        Weibull shape beta [-], > 0 (beta > 1: wear-out, the hazard grows with age).
    scale_yr : float
        Weibull scale eta [yr], > 0 (63.2 % have failed by this age).
    label : str
        Plain-words description and source.
    """

    max_rated_p_kw: float
    shape: float
    scale_yr: float
    label: str

    def __post_init__(self) -> None:
        if not (self.shape > 0 and self.scale_yr > 0 and self.max_rated_p_kw > 0):
            raise ValueError("shape, scale_yr and max_rated_p_kw must be > 0")

    @property
    def mean_life_yr(self) -> float:
        """Mean life eta * Gamma(1 + 1/beta) [yr]."""
        return self.scale_yr * math.gamma(1.0 + 1.0 / self.shape)


#: Default failure laws by size class (common practice, editable). Scales are set so that the mean life
#: eta * Gamma(1.4) falls mid-range of the usual motor life bands (< 7.5 kW: 10-15 yr, 7.5-75 kW: 15-20
#: yr, > 75 kW: 20-30 yr); a shape of 2.5 is a typical wear-out value. Neither is from a failure database.
DEFAULT_LIFE_CLASSES: tuple[LifeClass, ...] = (
    LifeClass(7.5, 2.5, 14.0, "up to 7.5 kW: mean life 12.4 yr (common practice, 10-15 yr band)"),
    LifeClass(75.0, 2.5, 20.0, "7.5-75 kW: mean life 17.7 yr (common practice, 15-20 yr band)"),
    LifeClass(math.inf, 2.5, 28.0, "above 75 kW: mean life 24.8 yr (common practice, 20-30 yr band)"),
)


#: Outage after a failure by size class (common practice, from memory; not from outage records): upper end of
#: the class [kW] (inclusive), hours until a new motor runs, hours until a rewound one does [h]. Standard
#: motors up to about 37 kW are stocked by distributors and fitted the next day, a rewind takes a few days;
#: mid-size motors take days to deliver and a week to rewind; large motors are often made to order (weeks)
#: and their rewind takes about two weeks, so a plant short of a spare rewinds them.
OUTAGE_CLASSES: tuple[tuple[float, float, float], ...] = (
    (37.0, 24.0, 72.0),
    (200.0, 72.0, 168.0),
    (math.inf, 672.0, 336.0),
)


#: Hours to fit a spare kept on the shelf [h] (common practice, from memory): the outage of either at-failure
#: strategy when the asset register says a spare is on hand.
SPARE_SWAP_H = 8.0


def outage_hours(rated_p_kw: Any, spare_on_hand: Any = False) -> tuple[np.ndarray, np.ndarray]:
    """Hours stopped after a failure until a new motor runs, and until a rewound one does, by size [h].

    Parameters
    ----------
    rated_p_kw : array_like
        Rated power [kW].
    spare_on_hand : array_like of bool
        A spare is on the shelf: the outage is the spare's fitting, :data:`SPARE_SWAP_H`, for both.

    Returns
    -------
    tuple of numpy.ndarray
        (new_lead_time_h, rewind_lead_time_h), each of the shape of ``rated_p_kw``, from
        :data:`OUTAGE_CLASSES` (a rating on a class's upper end belongs to that class; a missing rating
        takes the middle class).

    Examples
    --------
    >>> new, rewind = outage_hours([7.5, 37.0, 90.0, 315.0])
    >>> new.tolist(), rewind.tolist()
    ([24.0, 24.0, 72.0, 672.0], [72.0, 72.0, 168.0, 336.0])
    >>> [h.tolist() for h in outage_hours([315.0, 315.0], [True, False])]
    [[8.0, 672.0], [8.0, 336.0]]
    """
    p = np.asarray(rated_p_kw, dtype=float)
    tops = np.array([c[0] for c in OUTAGE_CLASSES])
    k = np.searchsorted(tops, np.where(np.isfinite(p), p, tops[0] * 1.5), side="left")
    k = np.minimum(k, len(OUTAGE_CLASSES) - 1)
    new = np.array([c[1] for c in OUTAGE_CLASSES])[k]
    rewind = np.array([c[2] for c in OUTAGE_CLASSES])[k]
    spare = np.broadcast_to(np.asarray(spare_on_hand, dtype=bool), p.shape)
    return np.where(spare, SPARE_SWAP_H, new), np.where(spare, SPARE_SWAP_H, rewind)


#: Share of the failure law's scale a motor keeps per past rewind [frac]: each rewind shortens the expected life
#: by 10 % (common practice; repaired motors are reported to fail sooner than new ones, a rate from memory, not
#: from failure records).
LIFE_KEPT_PER_REWIND_FRAC = 0.9


#: Standard ratings a fleet's repair-or-replace policy is worked out on [kW] (common IEC ratings, our choice of
#: steps), up to 1,000 kW, the top of the efficiency class tables.
POLICY_SIZES_KW: tuple[float, ...] = (0.75, 2.2, 5.5, 11.0, 22.0, 37.0, 55.0, 90.0, 132.0, 200.0, 315.0, 500.0, 1000.0)
#: The same for a case rated in horsepower [hp] (common NEMA ratings), up to 1,250 hp (932 kW).
POLICY_SIZES_HP: tuple[float, ...] = (1.0, 3.0, 7.5, 15.0, 30.0, 50.0, 75.0, 125.0, 200.0, 300.0, 500.0, 800.0, 1250.0)
#: A policy always reaches this many grid sizes of each unit (to 315 kW, to 300 hp), whatever the fleet's
#: largest motor.
POLICY_MIN_SIZES: dict[str, int] = {"kW": 11, "hp": 10}


def policy_sizes_kw(largest_rated_kw: float, power_unit: str = "kW") -> np.ndarray:
    """Return the ratings a fleet's repair-or-replace policy is worked out on [kW].

    The standard ratings of the case's unit (:data:`POLICY_SIZES_KW` or :data:`POLICY_SIZES_HP`, converted
    to kW) up to 315 kW or 300 hp, and on up to the first rating at or above the fleet's largest motor, as far
    as the grid goes (the efficiency class tables end at 1,000 kW; a larger motor is left to its own
    comparison).

    Examples
    --------
    >>> [float(policy_sizes_kw(kw)[-1]) for kw in (55.0, 355.0, 1600.0)]
    [315.0, 500.0, 1000.0]
    >>> [round(float(x), 1) for x in policy_sizes_kw(50.0, "hp")[-2:]]  # 200 and 300 hp
    [149.1, 223.7]
    >>> round(float(policy_sizes_kw(400.0 * 0.745699872, "hp")[-1]), 1)  # 400 hp: up to 500 hp
    372.8
    """
    unit = power_label(power_unit)
    grid = np.asarray(POLICY_SIZES_HP, dtype=float) * HP_TO_KW if unit == "hp" else np.asarray(POLICY_SIZES_KW)
    largest = float(largest_rated_kw) if np.isfinite(largest_rated_kw) else 0.0
    reach = int(np.searchsorted(grid, largest * (1.0 - 1e-9), side="left")) + 1
    return grid[:min(max(reach, POLICY_MIN_SIZES[unit]), grid.size)]


def _positive(values: Any, name: str) -> np.ndarray:
    array = np.asarray(values, dtype=float)
    if np.any(~(array > 0)):
        raise ValueError(f"{name} must be > 0")
    return array


def _nonnegative(values: Any, name: str) -> np.ndarray:
    array = np.asarray(values, dtype=float)
    if np.any(~(array >= 0)):
        raise ValueError(f"{name} must be >= 0")
    return array


def life_class_parameters(rated_p_kw: Any, classes: tuple[LifeClass, ...] = DEFAULT_LIFE_CLASSES
                          ) -> tuple[np.ndarray, np.ndarray]:
    """Return the Weibull shape and scale of each motor's size class.

    Parameters
    ----------
    rated_p_kw : array_like
        Rated output power [kW], > 0.
    classes : tuple of LifeClass
        Classes sorted by ``max_rated_p_kw``; the last must reach ``inf``.

    Returns
    -------
    tuple of numpy.ndarray
        ``(shape, scale_yr)`` with the shape of ``rated_p_kw``.

    Examples
    --------
    >>> shape, scale = life_class_parameters([5.5, 200.0])
    >>> scale.tolist()
    [14.0, 28.0]
    """
    p = _positive(rated_p_kw, "rated_p_kw")
    bounds = np.array([c.max_rated_p_kw for c in classes])
    if np.any(np.diff(bounds) <= 0) or not np.isinf(bounds[-1]):
        raise ValueError("classes must be sorted by max_rated_p_kw and the last must be inf")
    index = np.searchsorted(bounds, p, side="left")
    shapes = np.array([c.shape for c in classes])
    scales = np.array([c.scale_yr for c in classes])
    return shapes[index], scales[index]


def weibull_survival(age_yr: Any, shape: Any, scale_yr: Any) -> np.ndarray:
    """Return the probability that a motor survives to a given age.

    Parameters
    ----------
    age_yr : array_like
        Age [yr], >= 0.
    shape : array_like
        Weibull shape beta [-], > 0.
    scale_yr : array_like
        Weibull scale eta [yr], > 0.

    Returns
    -------
    numpy.ndarray
        Survival R(t) [-], in (0, 1].

    Notes
    -----
    R(t) = exp[-(t / eta)^beta] [1], [2].

    References
    ----------
    .. [1] W. Weibull, "A statistical distribution function of wide applicability," *J. Appl. Mech.*,
       vol. 18, pp. 293-297, 1951.
    .. [2] C. E. Ebeling, *An Introduction to Reliability and Maintainability Engineering*. New York:
       McGraw-Hill, 1997, ch. 4.

    Examples
    --------
    >>> round(float(weibull_survival(10.0, 2.0, 10.0)), 6)
    0.367879
    """
    t = _nonnegative(age_yr, "age_yr")
    beta = _positive(shape, "shape")
    eta = _positive(scale_yr, "scale_yr")
    return np.exp(-np.power(t / eta, beta))


def conditional_failure_probability(age_yr: Any, within_yr: Any, shape: Any, scale_yr: Any) -> np.ndarray:
    """Return the probability that a motor now ``age_yr`` old fails within the next ``within_yr`` years.

    Parameters
    ----------
    age_yr : array_like
        Current age, the motor still running [yr], >= 0.
    within_yr : array_like
        Look-ahead period [yr], >= 0.
    shape : array_like
        Weibull shape beta [-], > 0.
    scale_yr : array_like
        Weibull scale eta [yr], > 0.

    Returns
    -------
    numpy.ndarray
        Conditional failure probability [-], 0..1.

    Notes
    -----
    F(x | a) = 1 - R(a + x) / R(a) = 1 - exp[(a / eta)^beta - ((a + x) / eta)^beta] [1], computed in the
    exponent so that very old motors (R(a) tiny) stay accurate.

    References
    ----------
    .. [1] C. E. Ebeling, *An Introduction to Reliability and Maintainability Engineering*. New York:
       McGraw-Hill, 1997, ch. 4.

    Examples
    --------
    >>> round(float(conditional_failure_probability(10.0, 5.0, 2.0, 10.0)), 6)
    0.713495
    """
    a = _nonnegative(age_yr, "age_yr")
    x = _nonnegative(within_yr, "within_yr")
    beta = _positive(shape, "shape")
    eta = _positive(scale_yr, "scale_yr")
    return -np.expm1(np.power(a / eta, beta) - np.power((a + x) / eta, beta))


def failure_year_probabilities(age_yr: Any, horizon_yr: int, shape: Any, scale_yr: Any) -> np.ndarray:
    """Return the probability that a running motor fails in each year 0..horizon_yr of the study.

    Parameters
    ----------
    age_yr : array_like
        Current age [yr], >= 0, one per asset.
    horizon_yr : int
        Last year [yr], >= 1.
    shape, scale_yr : array_like
        Weibull shape [-] and scale [yr], > 0.

    Returns
    -------
    numpy.ndarray
        Shape ``np.shape(age_yr) + (horizon_yr + 1,)`` [-]: entry t is P(fail during year t | running
        now); entry 0 is 0. One minus the row sum is the probability of surviving the horizon.

    Notes
    -----
    p_t = F(t | a) - F(t - 1 | a), with F from :func:`conditional_failure_probability`. A failure during
    year t is costed at the end of year t, like every other flow.
    """
    if int(horizon_yr) != horizon_yr or horizon_yr < 1:
        raise ValueError("horizon_yr must be a whole number >= 1")
    a = np.asarray(age_yr, dtype=float)[..., None]
    t = np.arange(int(horizon_yr) + 1, dtype=float)
    cumulative = conditional_failure_probability(a, t, np.asarray(shape, dtype=float)[..., None],
                                                 np.asarray(scale_yr, dtype=float)[..., None])
    out = np.diff(cumulative, axis=-1, prepend=0.0)
    out[..., 0] = 0.0
    return np.maximum(out, 0.0)


def mean_residual_life_yr(age_yr: Any, shape: Any, scale_yr: Any) -> np.ndarray:
    """Return the expected remaining life of a motor still running at ``age_yr``.

    Parameters
    ----------
    age_yr : array_like
        Current age [yr], >= 0.
    shape, scale_yr : array_like
        Weibull shape [-] and scale [yr], > 0.

    Returns
    -------
    numpy.ndarray
        Mean residual life [yr].

    Notes
    -----
    m(a) = (1 / R(a)) * integral_a^inf R(x) dx = eta Gamma(1 + 1/beta) Q(1/beta, (a/eta)^beta) / R(a),
    with Q the regularised upper incomplete gamma function [1]. At a = 0 it is the mean life.

    References
    ----------
    .. [1] C. E. Ebeling, *An Introduction to Reliability and Maintainability Engineering*. New York:
       McGraw-Hill, 1997, ch. 2.

    Examples
    --------
    >>> round(float(mean_residual_life_yr(0.0, 1.0, 10.0)), 6)
    10.0
    """
    a = _nonnegative(age_yr, "age_yr")
    beta = _positive(shape, "shape")
    eta = _positive(scale_yr, "scale_yr")
    z = np.power(a / eta, beta)
    with np.errstate(over="ignore", invalid="ignore"):
        out = eta * gamma(1.0 + 1.0 / beta) * gammaincc(1.0 / beta, z) * np.exp(z)
    # Far in the tail, R(a) underflows: use the asymptotic m(a) ~ eta^beta a^(1 - beta) / beta.
    tail = ~np.isfinite(out) | (z > 500)
    base = np.where(tail, a, 1.0)
    return np.where(tail, np.power(eta, beta) * np.power(base, 1.0 - beta) / beta, out)


# ---------------------------------------------------------------------------------------------------
# Strategy costs
# ---------------------------------------------------------------------------------------------------
def _weights(discount_rate_frac: float, escalation_frac: float, horizon: int) -> tuple[np.ndarray, np.ndarray]:
    """Discount factors SPV_t and cumulative escalated-discount sums W_t = sum_{k<=t} ((1+e)/(1+d))^k."""
    t = np.arange(horizon + 1, dtype=float)
    spv = np.power(1.0 + discount_rate_frac, -t)
    w = np.power((1.0 + escalation_frac) / (1.0 + discount_rate_frac), t)
    w[0] = 0.0
    return spv, np.cumsum(w)


def _event_cost_pv(event: np.ndarray, capex: np.ndarray, life: np.ndarray, downtime_cost: np.ndarray,
                   energy_after: np.ndarray, spv: np.ndarray, w_cum: np.ndarray) -> np.ndarray:
    """PV of an event at year ``event`` (n, K): purchase chain, residual, downtime, energy after the event.

    Purchases at event + k*life while <= H; the last one's straight-line residual is credited at H.
    """
    horizon = spv.size - 1
    total = downtime_cost * spv[event] + energy_after * (w_cum[horizon] - w_cum[event])
    n_max = int(np.ceil((horizon + 1) / max(1.0, float(np.min(life))))) + 1
    last = event.astype(float)
    for k in range(n_max):
        year = event + k * life
        due = year <= horizon
        total = total + np.where(due, capex * spv[np.minimum(year, horizon).astype(int)], 0.0)
        last = np.where(due, year, last)
    remaining = np.clip((last + life - horizon) / life, 0.0, 1.0)
    return total - capex * remaining * spv[horizon]


def strategy_costs(
    age_yr: Any,
    shape: Any,
    scale_yr: Any,
    new_capex: Any,
    rewind_capex: Any,
    energy_cost_existing_per_yr: Any,
    energy_cost_new_per_yr: Any,
    energy_cost_rewound_per_yr: Any,
    *,
    downtime_cost_per_h: Any = 0.0,
    new_lead_time_h: Any = 72.0,
    rewind_lead_time_h: Any = 168.0,
    planned_swap_h: Any = 0.0,
    spare_on_hand: Any = False,
    spare_swap_h: Any = 8.0,
    new_life_yr: Any = 20.0,
    rewind_life_yr: Any = 10.0,
    discount_rate_frac: float = 0.08,
    horizon_yr: int = 15,
    escalation_frac: float = 0.0,
    asset_id: Any = None,
) -> pd.DataFrame:
    """Return the expected present cost of replace-now, replace-at-failure and rewind-at-failure per asset.

    Parameters
    ----------
    age_yr : array_like
        Age of the running motor [yr], >= 0.
    shape, scale_yr : array_like
        Weibull shape [-] and scale [yr] of its failure law (see :func:`life_class_parameters`).
    new_capex : array_like
        Installed cost of the new motor [currency], >= 0.
    rewind_capex : array_like
        Cost of a rewind (with removal and refitting) [currency], >= 0.
    energy_cost_existing_per_yr, energy_cost_new_per_yr, energy_cost_rewound_per_yr : array_like
        Yearly running cost (energy, demand, reactive) of the existing, new and rewound motor at
        base-year prices [currency/yr].
    downtime_cost_per_h : array_like
        Cost of lost production per hour stopped [currency/h], >= 0.
    new_lead_time_h, rewind_lead_time_h : array_like
        Hours stopped after a failure until a new / rewound motor runs [h], >= 0.
    planned_swap_h : array_like
        Hours stopped for a planned replacement [h]; 0 when done in an outage window.
    spare_on_hand : array_like of bool
        A spare is on the shelf: after a failure the stop lasts ``spare_swap_h`` for both at-failure
        strategies (the failed motor is replaced or rewound to become the next spare).
    spare_swap_h : array_like
        Hours to fit the spare [h], >= 0.
    new_life_yr, rewind_life_yr : array_like
        Service life of a new motor and of a rewound one [yr], > 0 (repeated within the horizon).
    discount_rate_frac : float
        Discount rate [frac/yr].
    horizon_yr : int
        Study period [yr], >= 1.
    escalation_frac : float
        Yearly escalation of the running costs [frac/yr], same basis as the discount rate.
    asset_id : sequence of str, optional
        Index of the result.

    Returns
    -------
    pandas.DataFrame
        One row per asset: ``failure_probability_in_horizon_frac`` [-], ``mean_residual_life_yr`` [yr],
        ``cost_replace_now``, ``cost_replace_at_failure``, ``cost_rewind_at_failure`` [currency, PV],
        ``best_strategy`` and ``advantage_over_next`` [currency, PV, >= 0].

    Notes
    -----
    With p_t the probability of failure in year t (:func:`failure_year_probabilities`), q = 1 - sum p_t,
    W_t = sum_{k<=t} ((1 + e)/(1 + d))^k and C(tau) the PV of a purchase chain starting at tau less its
    residual value at H (straight line, NIST Handbook 135 [1]):

    * replace now: C_new(0) + h_planned D + E_new W_H;
    * replace at failure: sum_t p_t [C_new(t) + h_new D SPV_t + E_old W_t + E_new (W_H - W_t)] + q E_old W_H;
    * rewind at failure: the same with the rewind cost, life, lead time and running cost.

    One failure of the existing motor is modelled; the new or rewound machine is then assumed to last its
    life. The decision rule is the minimum expected present cost [2].

    References
    ----------
    .. [1] S. K. Fuller and S. R. Petersen, "Life-Cycle Costing Manual for the Federal Energy Management
       Program," NIST Handbook 135, 1995 ed., National Institute of Standards and Technology, 1996.
    .. [2] C. E. Ebeling, *An Introduction to Reliability and Maintainability Engineering*. New York:
       McGraw-Hill, 1997, ch. 10.
    """
    if int(horizon_yr) != horizon_yr or horizon_yr < 1:
        raise ValueError("horizon_yr must be a whole number >= 1")
    if discount_rate_frac <= -1 or escalation_frac <= -1:
        raise ValueError("discount_rate_frac and escalation_frac must be > -1")
    H = int(horizon_yr)
    arrays = np.broadcast_arrays(
        _nonnegative(age_yr, "age_yr"), _positive(shape, "shape"), _positive(scale_yr, "scale_yr"),
        _nonnegative(new_capex, "new_capex"), _nonnegative(rewind_capex, "rewind_capex"),
        np.asarray(energy_cost_existing_per_yr, dtype=float), np.asarray(energy_cost_new_per_yr, dtype=float),
        np.asarray(energy_cost_rewound_per_yr, dtype=float), _nonnegative(downtime_cost_per_h, "downtime_cost_per_h"),
        _nonnegative(new_lead_time_h, "new_lead_time_h"), _nonnegative(rewind_lead_time_h, "rewind_lead_time_h"),
        _nonnegative(planned_swap_h, "planned_swap_h"), np.asarray(spare_on_hand, dtype=bool),
        _nonnegative(spare_swap_h, "spare_swap_h"), _positive(new_life_yr, "new_life_yr"),
        _positive(rewind_life_yr, "rewind_life_yr"))
    (age, beta, eta, c_new, c_rw, e_old, e_new, e_rw, d_cost, lead_new, lead_rw, planned, spare, swap,
     life_new, life_rw) = (np.atleast_1d(a).astype(float) if a.dtype != bool else np.atleast_1d(a)
                           for a in arrays)
    n = age.size
    spv, w_cum = _weights(discount_rate_frac, escalation_frac, H)
    p = failure_year_probabilities(age, H, beta, eta)  # (n, H+1)
    survive = 1.0 - p.sum(axis=1)
    years = np.broadcast_to(np.arange(H + 1), (n, H + 1))
    col = (lambda x: x[:, None])

    now = _event_cost_pv(np.zeros((n, 1), dtype=int), col(c_new), col(np.rint(life_new)),
                         col(planned * d_cost), col(e_new), spv, w_cum)[:, 0]
    hours_new = np.where(spare, swap, lead_new)
    hours_rw = np.where(spare, swap, lead_rw)
    before = col(e_old) * w_cum[None, :]
    at_fail_new = _event_cost_pv(years, col(c_new), col(np.rint(life_new)), col(hours_new * d_cost),
                                 col(e_new), spv, w_cum) + before
    at_fail_rw = _event_cost_pv(years, col(c_rw), col(np.rint(np.maximum(life_rw, 1))), col(hours_rw * d_cost),
                                col(e_rw), spv, w_cum) + before
    keep_running = survive * e_old * w_cum[H]
    replace_fail = (p * at_fail_new).sum(axis=1) + keep_running
    rewind_fail = (p * at_fail_rw).sum(axis=1) + keep_running

    costs = np.stack([now, replace_fail, rewind_fail], axis=1)
    order = np.argsort(costs, axis=1, kind="stable")
    best = np.asarray(STRATEGIES)[order[:, 0]]
    ranked = np.take_along_axis(costs, order, axis=1)
    index = pd.Index(np.asarray(asset_id, dtype=object).astype(str) if asset_id is not None else np.arange(n),
                     name="asset_id")
    return pd.DataFrame({
        "failure_probability_in_horizon_frac": 1.0 - survive,
        "mean_residual_life_yr": mean_residual_life_yr(age, beta, eta),
        "cost_replace_now": now,
        "cost_replace_at_failure": replace_fail,
        "cost_rewind_at_failure": rewind_fail,
        "best_strategy": pd.Series(best, dtype="str").to_numpy(),
        "advantage_over_next": ranked[:, 1] - ranked[:, 0],
    }, index=index)


def failed_motor_costs(
    new_capex: Any,
    rewind_capex: Any,
    energy_cost_new_per_yr: Any,
    energy_cost_rewound_per_yr: Any,
    *,
    downtime_cost_per_h: Any = 0.0,
    new_lead_time_h: Any = 72.0,
    rewind_lead_time_h: Any = 168.0,
    new_life_yr: Any = 20.0,
    rewind_life_yr: Any = 10.0,
    discount_rate_frac: float = 0.08,
    horizon_yr: int = 15,
    escalation_frac: float = 0.0,
    asset_id: Any = None,
) -> pd.DataFrame:
    """Return the present cost of replacing and of rewinding a motor that has just failed.

    Parameters
    ----------
    new_capex, rewind_capex : array_like
        Installed cost of a new motor and of a rewind [currency], >= 0.
    energy_cost_new_per_yr, energy_cost_rewound_per_yr : array_like
        Yearly running cost of the new and of the rewound motor at base-year prices [currency/yr].
    downtime_cost_per_h : array_like
        Cost of lost production per hour stopped [currency/h], >= 0.
    new_lead_time_h, rewind_lead_time_h : array_like
        Hours stopped until the new / rewound motor runs [h], >= 0 (use the swap time when a spare is
        on hand).
    new_life_yr, rewind_life_yr : array_like
        Service life of each [yr], > 0 (repeated within the horizon).
    discount_rate_frac, horizon_yr, escalation_frac : float, int, float
        Discount rate [frac/yr], study period [yr] and running-cost escalation [frac/yr].
    asset_id : sequence of str, optional
        Index of the result.

    Returns
    -------
    pandas.DataFrame
        ``cost_replace``, ``cost_rewind`` [currency, PV] and ``best`` ("replace" or "rewind"; a tie
        goes to rewind, the cheaper outlay).

    Notes
    -----
    Each cost is C(0) + h_lead D + E W_H: the purchase chain at years 0, L, 2L, ... <= H less the
    straight-line residual value of the last purchase at H (NIST Handbook 135 [1]), the lead time times
    the downtime cost, and the running cost with W_H = sum_{t=1..H} ((1 + e)/(1 + d))^t.

    References
    ----------
    .. [1] S. K. Fuller and S. R. Petersen, "Life-Cycle Costing Manual for the Federal Energy Management
       Program," NIST Handbook 135, 1995 ed., National Institute of Standards and Technology, 1996.

    Examples
    --------
    >>> costs = failed_motor_costs(1000.0, 400.0, 900.0, 1000.0, discount_rate_frac=0.0, horizon_yr=10,
    ...                            new_life_yr=20.0, rewind_life_yr=10.0)
    >>> costs[["cost_replace", "cost_rewind"]].round(6).values.tolist()
    [[9500.0, 10400.0]]
    """
    if int(horizon_yr) != horizon_yr or horizon_yr < 1:
        raise ValueError("horizon_yr must be a whole number >= 1")
    if discount_rate_frac <= -1 or escalation_frac <= -1:
        raise ValueError("discount_rate_frac and escalation_frac must be > -1")
    arrays = [np.atleast_1d(a).astype(float) for a in np.broadcast_arrays(
        _nonnegative(new_capex, "new_capex"), _nonnegative(rewind_capex, "rewind_capex"),
        np.asarray(energy_cost_new_per_yr, dtype=float), np.asarray(energy_cost_rewound_per_yr, dtype=float),
        _nonnegative(downtime_cost_per_h, "downtime_cost_per_h"), _nonnegative(new_lead_time_h, "new_lead_time_h"),
        _nonnegative(rewind_lead_time_h, "rewind_lead_time_h"), _positive(new_life_yr, "new_life_yr"),
        _positive(rewind_life_yr, "rewind_life_yr"))]
    c_new, c_rw, e_new, e_rw, d_cost, lead_new, lead_rw, life_new, life_rw = (a[:, None] for a in arrays)
    spv, w_cum = _weights(discount_rate_frac, escalation_frac, int(horizon_yr))
    year0 = np.zeros(c_new.shape, dtype=int)
    replace = _event_cost_pv(year0, c_new, np.maximum(1, np.rint(life_new)), lead_new * d_cost, e_new,
                             spv, w_cum)[:, 0]
    rewind = _event_cost_pv(year0, c_rw, np.maximum(1, np.rint(life_rw)), lead_rw * d_cost, e_rw,
                            spv, w_cum)[:, 0]
    index = pd.Index(np.asarray(asset_id, dtype=object).astype(str) if asset_id is not None
                     else np.arange(replace.size), name="asset_id")
    return pd.DataFrame({"cost_replace": replace, "cost_rewind": rewind,
                         "best": pd.Series(np.where(replace < rewind, "replace", "rewind"), dtype="str").to_numpy()},
                        index=index)


def energy_cost_per_yr(rated_p_kw: Any, load_frac: Any, hours_per_yr: Any, efficiency_frac: Any,
                       price_per_kwh: Any) -> np.ndarray:
    """Return the yearly energy cost of a motor at a constant load.

    Parameters
    ----------
    rated_p_kw : array_like
        Rated output (shaft) power [kW], > 0.
    load_frac : array_like
        Shaft load as a fraction of rated power [frac], 0..1.5.
    hours_per_yr : array_like
        Running hours per year [h/yr], 0..8,760.
    efficiency_frac : array_like
        Efficiency at that load [frac], (0, 1].
    price_per_kwh : array_like
        Energy price [currency/kWh].

    Returns
    -------
    numpy.ndarray
        Cost [currency/yr].

    Notes
    -----
    C = P_rated x load x hours / efficiency x price (input power = shaft power / efficiency).

    Examples
    --------
    >>> round(float(energy_cost_per_yr(10.0, 0.75, 4000.0, 0.9, 0.15)), 6)
    5000.0
    """
    eff = np.asarray(efficiency_frac, dtype=float)
    if np.any(~((eff > 0) & (eff <= 1))):
        raise ValueError("efficiency_frac must be in (0, 1] (a fraction: 91 % is 0.91)")
    hours = np.asarray(hours_per_yr, dtype=float)
    if np.any((hours < 0) | (hours > 8784)):
        raise ValueError("hours_per_yr must be between 0 and 8,784")
    return (_positive(rated_p_kw, "rated_p_kw") * np.asarray(load_frac, dtype=float) * hours / eff
            * np.asarray(price_per_kwh, dtype=float))


def fleet_rules(
    rated_p_kw: Any,
    hours_per_yr: Any,
    *,
    new_capex: Any,
    rewind_capex: Any,
    efficiency_new_frac: Any,
    efficiency_rewound_frac: Any,
    price_per_kwh: float,
    load_frac: Any = 0.75,
    downtime_cost_per_h: Any = 0.0,
    new_lead_time_h: Any = 72.0,
    rewind_lead_time_h: Any = 168.0,
    new_life_yr: Any = 20.0,
    rewind_life_yr: Any = 10.0,
    discount_rate_frac: float = 0.08,
    horizon_yr: int = 15,
    escalation_frac: float = 0.0,
    power_unit: str = "kW",
) -> pd.DataFrame:
    """Derive a repair-or-replace policy for failed motors from a grid of sizes and running hours.

    Parameters
    ----------
    rated_p_kw : array_like
        Sizes of the grid [kW], ascending, shape (m,).
    hours_per_yr : array_like
        Running hours of the grid [h/yr], ascending, shape (k,).
    new_capex, rewind_capex : array_like
        Installed cost of a new motor and of a rewind at each size [currency], shape (m,) or scalar.
    efficiency_new_frac, efficiency_rewound_frac : array_like
        Efficiency of the new and of the rewound motor at each size [frac], shape (m,) or scalar.
    price_per_kwh : float
        Energy price [currency/kWh].
    load_frac : array_like
        Shaft load [frac of rated], shape (m,) or scalar.
    downtime_cost_per_h, new_lead_time_h, rewind_lead_time_h, new_life_yr, rewind_life_yr : array_like
        As in :func:`strategy_costs`, shape (m,) or scalar.
    discount_rate_frac, horizon_yr, escalation_frac : float, int, float
        As in :func:`strategy_costs`.
    power_unit : {"kW", "hp"}
        Unit the rules' sentences give the sizes in (the case's); the size columns stay in kW.

    Returns
    -------
    pandas.DataFrame
        One row per run of consecutive grid sizes sharing the same decision threshold, with
        ``min_rated_p_kw`` and ``max_rated_p_kw`` [kW] (the bands follow on: every row after the first starts
        above the row before's ``max_rated_p_kw``, which is its ``min_rated_p_kw``, so a motor between two
        grid sizes falls under the larger size's rule), ``min_hours_to_replace_h_per_yr`` [h/yr] (0 =
        replace at any grid hours, ``inf`` = rewind at every grid hours), ``decision`` and ``rule``
        (plain words). The thresholds are grid values: refine the grid for finer rules.

    Notes
    -----
    For a motor that has just failed, :func:`failed_motor_costs` gives the present cost of replacing and
    of rewinding for every size x hours pair. Replacing wins where its cost is lower. Because the
    running-cost gap grows linearly with hours, the winning side switches at most once along the hours
    axis.
    """
    sizes = _positive(rated_p_kw, "rated_p_kw").ravel()
    hours = _nonnegative(hours_per_yr, "hours_per_yr").ravel()
    if sizes.size == 0 or hours.size == 0:
        raise ValueError("rated_p_kw and hours_per_yr must not be empty")
    if np.any(np.diff(sizes) <= 0) or np.any(np.diff(hours) <= 0):
        raise ValueError("rated_p_kw and hours_per_yr must be strictly ascending")
    m = sizes.size
    size_grid = np.repeat(sizes, hours.size)
    hour_grid = np.tile(hours, m)

    def flat(values: Any, name: str) -> np.ndarray:
        return np.repeat(np.broadcast_to(np.asarray(values, dtype=float), (m,)), hours.size)

    load = flat(load_frac, "load_frac")
    e_new = energy_cost_per_yr(size_grid, load, hour_grid, flat(efficiency_new_frac, "efficiency_new_frac"),
                               price_per_kwh)
    e_rw = energy_cost_per_yr(size_grid, load, hour_grid, flat(efficiency_rewound_frac, "efficiency_rewound_frac"),
                              price_per_kwh)
    costs = failed_motor_costs(
        flat(new_capex, "new_capex"), flat(rewind_capex, "rewind_capex"), e_new, e_rw,
        downtime_cost_per_h=flat(downtime_cost_per_h, "downtime_cost_per_h"),
        new_lead_time_h=flat(new_lead_time_h, "new_lead_time_h"),
        rewind_lead_time_h=flat(rewind_lead_time_h, "rewind_lead_time_h"),
        new_life_yr=flat(new_life_yr, "new_life_yr"), rewind_life_yr=flat(rewind_life_yr, "rewind_life_yr"),
        discount_rate_frac=discount_rate_frac, horizon_yr=horizon_yr, escalation_frac=escalation_frac)
    replace_cost = costs["cost_replace"].to_numpy()
    rewind_cost = costs["cost_rewind"].to_numpy()
    replace_wins = (replace_cost < rewind_cost).reshape(m, hours.size)
    # Threshold: the lowest grid hours from which replacing wins at every higher grid hours.
    wins_from_here = np.flip(np.logical_and.accumulate(np.flip(replace_wins, axis=1), axis=1), axis=1)
    threshold = np.where(wins_from_here.any(axis=1), hours[np.argmax(wins_from_here, axis=1)], np.inf)
    threshold = np.where(wins_from_here[:, 0], 0.0, threshold)

    rows = []
    start = 0
    for i in range(1, m + 1):
        if i == m or threshold[i] != threshold[start]:
            # bands follow on: a row after the first starts above the last size of the row before, so a motor
            # between two grid sizes falls under the larger size's rule (the grid's resolution)
            rows.append(_rule_row(sizes[start] if not rows else sizes[start - 1], sizes[i - 1], threshold[start],
                                  hours[-1], power_unit, above=bool(rows)))
            start = i
    return pd.DataFrame(rows, columns=["min_rated_p_kw", "max_rated_p_kw", "min_hours_to_replace_h_per_yr",
                                       "decision", "rule"])


def _rule_row(low_kw: float, high_kw: float, threshold_h: float, max_hours_h: float,
              power_unit: str = "kW", above: bool = False) -> dict[str, Any]:
    """One policy row in plain words, its sizes in ``power_unit``; with ``above`` the band starts above
    ``low_kw`` (the last size of the row before), else at it."""
    unit = power_label(power_unit)
    low, high = (round(float(rating_in_unit(p_kw, unit)), 2) for p_kw in (low_kw, high_kw))
    if above:
        span = f"above {low:,g} {unit}, up to {high:,g} {unit}"
    else:
        span = "of " + (f"{low:,g} {unit}" if low_kw == high_kw else f"{low:,g}-{high:,g} {unit}")
    if threshold_h == 0.0:
        decision = "replace"
        rule = f"Motors {span}: replace rather than rewind, whatever the running hours."
    elif np.isinf(threshold_h):
        decision = "rewind"
        rule = f"Motors {span}: rewind rather than replace, up to {max_hours_h:,.0f} h/yr."
    else:
        decision = "replace_above_hours"
        rule = (f"Motors {span}: replace rather than rewind when running {threshold_h:,.0f} h/yr or more; "
                f"rewind below that.")
    return {"min_rated_p_kw": float(low_kw), "max_rated_p_kw": float(high_kw),
            "min_hours_to_replace_h_per_yr": float(threshold_h), "decision": decision, "rule": rule}


def rewind_life_note(rewind_count: float) -> str:
    """Return what a motor's past rewinds do to its failure law, in words ("" for a motor never rewound).

    Examples
    --------
    >>> rewind_life_note(2)
    'Rewound 2 times: its failure law counts a life 19 % shorter than a motor never rewound.'
    >>> rewind_life_note(0), rewind_life_note(float("nan"))
    ('', '')
    """
    n = float(rewind_count)
    if not n > 0:
        return ""
    cut_pct = 100.0 * (1.0 - LIFE_KEPT_PER_REWIND_FRAC ** n)
    times = "once" if n == 1 else f"{n:g} times"
    return f"Rewound {times}: its failure law counts a life {cut_pct:.0f} % shorter than a motor never rewound."


def failure_law_caution(classes: tuple[LifeClass, ...] = DEFAULT_LIFE_CLASSES, brief: bool = False,
                        power_unit: str = "kW") -> str:
    """Return the caution that goes with every end-of-life cost: expectations, not a forecast.

    Parameters
    ----------
    classes : tuple of LifeClass
        The failure laws the costs were weighted with, sorted by ``max_rated_p_kw``.
    brief : bool
        The short form for a one-page record: the same points without the mean life of each class.
    power_unit : {"kW", "hp"}
        Unit the size classes' bounds are given in (the case's).

    Returns
    -------
    str
        One sentence naming the mean life of each size class (not in the brief form) and the life cut per
        past rewind.

    Notes
    -----
    The costs of :func:`strategy_costs` are weighted by the probability of failing in each year, from a
    Weibull law per size class whose defaults come from common practice life bands, not from failure
    records; they say what the strategies cost on average over many motors like this one, not when this
    motor will fail.

    Examples
    --------
    >>> failure_law_caution()[:60]
    'Expected present costs over a failure-age distribution, not '
    >>> failure_law_caution(power_unit="hp").split("(mean life ")[1][:48]
    'up to 10.1 hp 12.4 yr, 10.1-100.6 hp 17.7 yr, ab'
    >>> failure_law_caution(brief=True)
    'Costs (capital, running, expected downtime) are expectations over common practice failure laws (10 % less life per past rewind), not a forecast of when this motor will fail.'
    """
    unit = power_label(power_unit)

    def shown(p_kw: float) -> str:
        return f"{round(float(rating_in_unit(p_kw, unit)), 1):g}" if unit == "hp" else f"{p_kw:g}"

    bands, low_kw = [], 0.0
    for c in classes:
        if math.isinf(c.max_rated_p_kw):
            span = f"above {shown(low_kw)} {unit}"
        elif low_kw == 0.0:
            span = f"up to {shown(c.max_rated_p_kw)} {unit}"
        else:
            span = f"{shown(low_kw)}-{shown(c.max_rated_p_kw)} {unit}"
        bands.append(f"{span} {c.mean_life_yr:.1f} yr")
        low_kw = c.max_rated_p_kw
    cut_pct = 100.0 * (1.0 - LIFE_KEPT_PER_REWIND_FRAC)
    if brief:
        return (f"Costs (capital, running, expected downtime) are expectations over common practice failure laws "
                f"({cut_pct:.0f} % less life per past rewind), not a forecast of when this motor will fail.")
    return ("Expected present costs over a failure-age distribution, not a forecast of when this motor will fail: "
            "each size class fails by a Weibull law set from common practice life bands, not from failure records "
            f"(mean life {', '.join(bands)}); each past rewind shortens a motor's expected life by {cut_pct:.0f} % "
            "(common practice).")
