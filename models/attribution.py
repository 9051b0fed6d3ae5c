"""Savings attribution at the site meter: per asset option, per plan, and the power-factor economics.

Scope: an asset option changes one asset's kW and kVAr profile; its saving is the change in the site's
bill when only that asset changes, with the rest of the site (other assets, base load, capacitor
banks, whose automatic controllers respond) as it was (:func:`option_savings`). A plan changes several
assets together; its saving is priced in one go and the difference from the sum of its options'
single savings is reported as one ``interaction`` row, so nothing is counted twice
(:func:`plan_savings`). Reactive power gets its own accounts: the site's kVAr balance before and after
(:func:`reactive_balance`), the part of each saving that comes from the kVAr change alone, the
capacitor bank that would buy the same reactive saving (:func:`equivalent_capacitor_bank_q_kvar`) so a
synchronous or permanent-magnet option is judged against the cheap alternative, and the saturation
curve of the reactive saving against leading kVAr supplied (:func:`reactive_saving_sweep`). Savings
are positive when the bill falls (``docs/conventions.md``).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np
import pandas as pd

from models import billing
from models.billing import _CHUNK_ELEMENTS, interval_hours
from models.site import Site, SiteMeter
from models.tariff import Tariff

__all__ = [
    "PlanSavings",
    "equivalent_capacitor_bank_q_kvar",
    "option_savings",
    "plan_savings",
    "reactive_balance",
    "reactive_saving_sweep",
    "saving_by_category",
]


def _category(line_item: str) -> str:
    return line_item.split(":", 1)[0]


def saving_by_category(baseline: pd.DataFrame, changed: pd.DataFrame) -> pd.DataFrame:
    """Return the saving (baseline − changed) per line-item category, one row per scenario.

    Parameters
    ----------
    baseline : pandas.DataFrame
        :func:`~models.billing.bill_many` output with one row (the baseline) [currency].
    changed : pandas.DataFrame
        :func:`~models.billing.bill_many` output with one row per scenario [currency].

    Returns
    -------
    pandas.DataFrame
        Columns ``saving_<category>`` for each category present and ``saving`` (the total) [currency],
        positive when the bill falls.
    """
    items = [c for c in changed.columns if c != "total"]
    diff = baseline[items].to_numpy()[0][None, :] - changed[items].to_numpy()
    cats = list(dict.fromkeys(_category(c) for c in items))
    out = pd.DataFrame(index=changed.index)
    for cat in cats:
        cols = [i for i, c in enumerate(items) if _category(c) == cat]
        out[f"saving_{cat}"] = diff[:, cols].sum(axis=1)
    out["saving"] = baseline["total"].to_numpy()[0] - changed["total"].to_numpy()
    return out


def _totals(x, name: str) -> np.ndarray:
    a = np.asarray(x, dtype=float)
    if a.ndim == 2:
        a = a.sum(axis=0)
    if a.ndim != 1:
        raise ValueError(f"{name} must be (n_steps,) totals or (n_assets, n_steps); got shape {a.shape}")
    return a


def _deltas(x, n_steps: int, name: str) -> np.ndarray:
    a = np.asarray(x, dtype=float)
    if a.ndim == 1:
        a = a[None, :]
    if a.ndim != 2 or a.shape[1] != n_steps:
        raise ValueError(f"{name} must have shape (n_options, {n_steps}); got {np.shape(x)}")
    return a


def _bill_scenarios(tariff, index, site, p0, q0, dp, dq, *, base_p_kw_profile, interval_h, repeat_year,
                    calendar=None) -> pd.DataFrame:
    """Bill the site with asset totals p0 + dp[s], q0 + dq[s] for every scenario s, in memory-bounded blocks
    (``calendar``: the tariff's calendar over the index, when the caller already holds it)."""
    n = dp.shape[0]
    h = interval_h if interval_h is not None else interval_hours(index)
    chunk = max(1, _CHUNK_ELEMENTS // max(len(p0), 1))
    frames = []
    flags: list = []
    lagging, leading = [], []
    cal = calendar  # else built once, at the first block (after its meter, as bill_many would)
    for start in range(0, n, chunk):
        meter = site.meter_from_totals(p0 + dp[start : start + chunk], q0 + dq[start : start + chunk], base_p_kw_profile=base_p_kw_profile)
        cal = cal if cal is not None else billing._calendar(tariff, index, interval_h, wrap=repeat_year is not False)
        f = billing._bill_many_on(cal, tariff, meter.p_kw, meter.q_kvar, repeat_year)
        flags.extend(f.attrs["flags"])
        q = np.asarray(meter.q_kvar, dtype=float)
        lagging.append(np.maximum(q, 0.0).sum(axis=-1) * h)
        leading.append(np.maximum(-q, 0.0).sum(axis=-1) * h)
        frames.append(f)
    out = pd.concat(frames, ignore_index=True)
    out.attrs["flags"] = flags
    out.attrs["lagging_kvarh"] = np.concatenate(lagging)
    out.attrs["leading_kvarh"] = np.concatenate(leading)
    return out


def _scenario_inputs(assets_p_kw, assets_q_kvar, delta_p_kw, delta_q_kvar):
    """The assets' totals and the scenarios' changes as arrays, checked: (p0, q0, dp, dq)."""
    p0 = _totals(assets_p_kw, "assets_p_kw")
    q0 = _totals(assets_q_kvar, "assets_q_kvar")
    dp = _deltas(delta_p_kw, len(p0), "delta_p_kw")
    dq = _deltas(delta_q_kvar, len(p0), "delta_q_kvar")
    if dp.shape != dq.shape:
        raise ValueError(f"delta_p_kw and delta_q_kvar differ in shape: {dp.shape} vs {dq.shape}")
    return p0, q0, dp, dq


def bill_calendar(tariff: Tariff, index: pd.DatetimeIndex, interval_h: float | None = None,
                  repeat_year: bool | None = None):
    """The tariff's calendar over the index (periods, months, demand windows) as :func:`scenario_bills`
    builds it for ``repeat_year``, to hand back to it when the same site is priced many times."""
    return billing._calendar(tariff, index, interval_h, wrap=repeat_year is not False)


def scenario_bills(tariff: Tariff, index: pd.DatetimeIndex, assets_p_kw, assets_q_kvar, delta_p_kw, delta_q_kvar, *,
                   site: Site = Site(), base_p_kw_profile=None, interval_h: float | None = None,
                   repeat_year: bool | None = None, calendar=None) -> np.ndarray:
    """Total bill of the site for each scenario of changes [currency], shape (n_scenarios,).

    Scenario s is the assets' totals plus ``delta_*[s]`` (as in :func:`option_savings`, which it is the
    bill part of: one bill per scenario, nothing else). ``calendar`` is the tariff's calendar over the
    index (:func:`bill_calendar`), for a caller that prices the same site many times.
    """
    p0, q0, dp, dq = _scenario_inputs(assets_p_kw, assets_q_kvar, delta_p_kw, delta_q_kvar)
    frame = _bill_scenarios(tariff, index, site, p0, q0, dp, dq, base_p_kw_profile=base_p_kw_profile,
                            interval_h=interval_h, repeat_year=repeat_year, calendar=calendar)
    return frame["total"].to_numpy(dtype=float)


def option_savings(
    tariff: Tariff,
    index: pd.DatetimeIndex,
    assets_p_kw,
    assets_q_kvar,
    delta_p_kw,
    delta_q_kvar,
    *,
    site: Site = Site(),
    option_names: Sequence[str] | None = None,
    capacitor_cost_per_kvar: float | None = None,
    base_p_kw_profile=None,
    interval_h: float | None = None,
    repeat_year: bool | None = None,
) -> pd.DataFrame:
    """Return each asset option's bill saving when only that asset changes.

    Parameters
    ----------
    tariff : Tariff
        The site's tariff.
    index : pandas.DatetimeIndex
        Tz-aware interval start times.
    assets_p_kw : array_like, shape (n_steps,) or (n_assets, n_steps)
        Baseline active power of the assets [kW] (summed over assets when 2-D).
    assets_q_kvar : array_like, same shape
        Baseline reactive power of the assets [kVAr], positive lagging.
    delta_p_kw : array_like, shape (n_options, n_steps)
        Change of the one asset's kW under each option (new − old) [kW].
    delta_q_kvar : array_like, shape (n_options, n_steps)
        Change of the one asset's kVAr under each option (new − old) [kVAr]; negative = less lagging.
    site : Site
        Base load and existing capacitor banks; automatic banks re-switch in every scenario.
    option_names : sequence of str, optional
        Labels; default ``option 0``, ``option 1``, ...
    capacitor_cost_per_kvar : float, optional
        Installed cost of an automatic capacitor bank [currency/kVAr], an input assumption. When given,
        the equivalent bank size and cost are reported.
    base_p_kw_profile : array_like, optional
        Base-load profile [kW] replacing ``site.base_p_kw``.
    interval_h, repeat_year
        As in :func:`models.billing.bill`; ``repeat_year`` defaults to None here (a series of
        exactly 12 billing months is billed as a typical year repeated).

    Returns
    -------
    pandas.DataFrame
        Indexed by option name: ``baseline_bill``, ``option_bill``, ``saving`` and ``saving_<category>``
        [currency over the series]; ``reactive_saving`` (the saving when only the option's kVAr
        change is applied) and ``other_saving`` (= saving − reactive_saving) [currency];
        ``max_q_reduction_kvar`` (largest kVAr reduction in any interval) [kVAr];
        ``lagging_kvarh_change`` and ``leading_kvarh_change`` (the site meter's kVArh registers, after −
        before, banks re-switched) [kVArh]; ``flags`` (line items
        flagged with the option in place, e.g. a leading-kVArh ban); and, with a capacitor cost,
        ``equivalent_bank_q_kvar`` [kVAr] and ``equivalent_bank_cost`` [currency].

    Notes
    -----
    saving_j = B(base) − B(base + Δ_j); reactive_saving_j = B(base) − B(base + (0, ΔQ_j)), where B is
    the bill of the site meter built from the asset totals by ``site`` (IEEE Std 1459-2010 quantities).
    The split is exact for tariffs whose charges separate into kW-only and kVAr-dependent parts and a
    convention otherwise (kVA demand and kVAh energy mix both): ``other_saving`` then carries the
    cross term. Savings of different options are not additive; use :func:`plan_savings` for a set.
    """
    if capacitor_cost_per_kvar is not None and not capacitor_cost_per_kvar >= 0.0:
        raise ValueError("capacitor_cost_per_kvar must be >= 0")
    p0, q0, dp, dq = _scenario_inputs(assets_p_kw, assets_q_kvar, delta_p_kw, delta_q_kvar)
    n = dp.shape[0]
    names = list(option_names) if option_names is not None else [f"option {i}" for i in range(n)]
    if len(names) != n:
        raise ValueError(f"{len(names)} option names for {n} options")
    kw = dict(base_p_kw_profile=base_p_kw_profile, interval_h=interval_h, repeat_year=repeat_year)
    zeros = np.zeros((1, len(p0)))
    base = _bill_scenarios(tariff, index, site, p0, q0, zeros, zeros, **kw)
    full = _bill_scenarios(tariff, index, site, p0, q0, dp, dq, **kw)
    reactive_only = _bill_scenarios(tariff, index, site, p0, q0, np.zeros_like(dq), dq, **kw)
    out = saving_by_category(base, full)
    out.insert(0, "option_bill", full["total"].to_numpy())
    out.insert(0, "baseline_bill", float(base["total"].iloc[0]))
    out["reactive_saving"] = float(base["total"].iloc[0]) - reactive_only["total"].to_numpy()
    out["other_saving"] = out["saving"] - out["reactive_saving"]
    out["max_q_reduction_kvar"] = np.maximum((-dq).max(axis=1), 0.0)
    out["lagging_kvarh_change"] = full.attrs["lagging_kvarh"] - base.attrs["lagging_kvarh"][0]
    out["leading_kvarh_change"] = full.attrs["leading_kvarh"] - base.attrs["leading_kvarh"][0]
    out["flags"] = full.attrs["flags"]
    if capacitor_cost_per_kvar is not None:
        q_bank = equivalent_capacitor_bank_q_kvar(
            tariff, index, p0, q0, out["reactive_saving"].to_numpy(), site=site, **kw
        )
        out["equivalent_bank_q_kvar"] = q_bank
        out["equivalent_bank_cost"] = q_bank * capacitor_cost_per_kvar
    out.index = pd.Index(names, name="option")
    return out


@dataclass(frozen=True, eq=False)
class PlanSavings:
    """Savings of a plan of several asset changes, attributed without double counting.

    Attributes
    ----------
    by_option : pandas.DataFrame
        Rows: each option's single saving, then ``interaction`` (plan − sum of singles), then ``plan``.
        Columns ``saving_<category>`` and ``saving`` [currency]. The option rows plus ``interaction``
        add up to ``plan`` exactly.
    reactive_balance : pandas.DataFrame
        The site's reactive accounts before and after the plan, and the change
        (see :func:`reactive_balance`).
    baseline_bill : float
        Bill without the plan [currency].
    plan_bill : float
        Bill with every change of the plan [currency].
    plan_reactive_saving : float
        Saving of the plan's kVAr changes alone [currency].
    equivalent_bank_q_kvar : float or None
        Capacitor bank buying the same reactive saving [kVAr] (when a capacitor cost was given).
    equivalent_bank_cost : float or None
        Its cost [currency].
    flags : list of str
        Line items flagged with the plan in place.
    """

    by_option: pd.DataFrame
    reactive_balance: pd.DataFrame
    baseline_bill: float
    plan_bill: float
    plan_reactive_saving: float
    equivalent_bank_q_kvar: float | None
    equivalent_bank_cost: float | None
    flags: list


def plan_savings(
    tariff: Tariff,
    index: pd.DatetimeIndex,
    assets_p_kw,
    assets_q_kvar,
    delta_p_kw,
    delta_q_kvar,
    *,
    site: Site = Site(),
    option_names: Sequence[str] | None = None,
    asset_ids: Sequence[object] | None = None,
    capacitor_cost_per_kvar: float | None = None,
    base_p_kw_profile=None,
    interval_h: float | None = None,
    repeat_year: bool | None = None,
) -> PlanSavings:
    """Return a plan's bill saving, each option's single saving and their interaction.

    Parameters
    ----------
    tariff, index, assets_p_kw, assets_q_kvar, site, base_p_kw_profile, interval_h, repeat_year
        As in :func:`option_savings`.
    delta_p_kw, delta_q_kvar : array_like, shape (n_options, n_steps)
        The changes in the plan, one row per changed asset [kW], [kVAr].
    option_names : sequence of str, optional
        Row labels.
    asset_ids : sequence, optional
        The asset each row changes; two rows for one asset are refused (alternatives for one asset
        cannot both be in a plan).
    capacitor_cost_per_kvar : float, optional
        Installed cost of a capacitor bank [currency/kVAr], for the equivalent-bank comparison.

    Returns
    -------
    PlanSavings

    Raises
    ------
    ValueError
        If ``asset_ids`` repeats an asset, or as in :func:`option_savings`.

    Notes
    -----
    interaction = S(all) − Σ_j S(j), with S the saving of :func:`option_savings`. Interaction is
    negative when options compete for the same saving (two motors both relieving one reactive
    allowance that saturates, or the same demand peak) and positive when one enables another (e.g.
    a ratchet released only when both peaks fall).
    """
    if asset_ids is not None:
        ids = list(asset_ids)
        dup = sorted({str(a) for a in ids if ids.count(a) > 1})
        if dup:
            raise ValueError(f"a plan can change each asset once; repeated asset ids: {', '.join(dup)}")
    p0 = _totals(assets_p_kw, "assets_p_kw")
    q0 = _totals(assets_q_kvar, "assets_q_kvar")
    dp = _deltas(delta_p_kw, len(p0), "delta_p_kw")
    dq = _deltas(delta_q_kvar, len(p0), "delta_q_kvar")
    if asset_ids is not None and len(asset_ids) != dp.shape[0]:
        raise ValueError(f"{len(asset_ids)} asset ids for {dp.shape[0]} plan rows")
    singles = option_savings(
        tariff, index, p0, q0, dp, dq, site=site, option_names=option_names,
        base_p_kw_profile=base_p_kw_profile, interval_h=interval_h, repeat_year=repeat_year,
    )
    kw = dict(base_p_kw_profile=base_p_kw_profile, interval_h=interval_h, repeat_year=repeat_year)
    zeros = np.zeros((1, len(p0)))
    base = _bill_scenarios(tariff, index, site, p0, q0, zeros, zeros, **kw)
    plan_dp, plan_dq = dp.sum(axis=0, keepdims=True), dq.sum(axis=0, keepdims=True)
    plan = _bill_scenarios(tariff, index, site, p0, q0, plan_dp, plan_dq, **kw)
    plan_q = _bill_scenarios(tariff, index, site, p0, q0, np.zeros_like(plan_dq), plan_dq, **kw)
    plan_row = saving_by_category(base, plan)
    cols = list(plan_row.columns)
    single_rows = singles[[c for c in cols if c in singles.columns]].reindex(columns=cols, fill_value=0.0)
    interaction = plan_row.to_numpy()[0] - single_rows.to_numpy().sum(axis=0)
    by_option = pd.concat(
        [
            single_rows,
            pd.DataFrame([interaction], columns=cols, index=["interaction"]),
            pd.DataFrame(plan_row.to_numpy(), columns=cols, index=["plan"]),
        ]
    )
    by_option.index.name = "row"
    plan_reactive = float(base["total"].iloc[0] - plan_q["total"].iloc[0])
    bank_q = bank_cost = None
    if capacitor_cost_per_kvar is not None:
        if not capacitor_cost_per_kvar >= 0.0:
            raise ValueError("capacitor_cost_per_kvar must be >= 0")
        bank_q = float(equivalent_capacitor_bank_q_kvar(tariff, index, p0, q0, np.array([plan_reactive]), site=site, **kw)[0])
        bank_cost = bank_q * capacitor_cost_per_kvar
    h = interval_h if interval_h is not None else interval_hours(index)
    before = reactive_balance(site.meter_from_totals(p0, q0, base_p_kw_profile=base_p_kw_profile), h)
    after = reactive_balance(site.meter_from_totals(p0 + plan_dp[0], q0 + plan_dq[0], base_p_kw_profile=base_p_kw_profile), h)
    balance = pd.DataFrame({"before": before, "after": after})
    balance["change"] = balance["after"] - balance["before"]
    return PlanSavings(
        by_option=by_option,
        reactive_balance=balance,
        baseline_bill=float(base["total"].iloc[0]),
        plan_bill=float(plan["total"].iloc[0]),
        plan_reactive_saving=plan_reactive,
        equivalent_bank_q_kvar=bank_q,
        equivalent_bank_cost=bank_cost,
        flags=plan.attrs["flags"][0],
    )


def reactive_balance(meter: SiteMeter, interval_h: float) -> pd.Series:
    """Return the site's reactive accounts over a meter series.

    Parameters
    ----------
    meter : SiteMeter
        One site meter series (1-D).
    interval_h : float
        Interval length [h], > 0.

    Returns
    -------
    pandas.Series
        ``energy_kwh`` (import), ``lagging_kvarh``, ``leading_kvarh``, ``capacitor_kvarh`` (supplied by
        the banks, >= 0), ``average_power_factor`` (kWh / sqrt(kWh² + lagging kVArh²), 1.0 with no
        energy), ``max_lagging_q_kvar``, ``max_leading_q_kvar`` (>= 0), ``leading_intervals_frac``
        (share of intervals with Q < 0).

    Notes
    -----
    Lagging and leading kVArh are registered separately, as a four-quadrant meter does.

    Examples
    --------
    >>> from models.site import site_meter
    >>> m = site_meter(np.array([100.0, 100.0]), np.array([75.0, -10.0]))
    >>> float(reactive_balance(m, 0.5)["lagging_kvarh"])
    37.5
    """
    if not interval_h > 0.0:
        raise ValueError("interval_h must be > 0")
    p = np.asarray(meter.p_kw, dtype=float)
    q = np.asarray(meter.q_kvar, dtype=float)
    cap = np.asarray(meter.capacitor_q_kvar, dtype=float)
    if p.ndim != 1:
        raise ValueError("reactive_balance takes one meter series (1-D)")
    kwh = float(np.maximum(p, 0.0).sum() * interval_h)
    lag = float(np.maximum(q, 0.0).sum() * interval_h)
    lead = float(np.maximum(-q, 0.0).sum() * interval_h)
    s = np.hypot(kwh, lag)
    return pd.Series(
        {
            "energy_kwh": kwh,
            "lagging_kvarh": lag,
            "leading_kvarh": lead,
            "capacitor_kvarh": float(-cap.sum() * interval_h),
            "average_power_factor": kwh / s if s > 0.0 else 1.0,
            "max_lagging_q_kvar": float(max(0.0, q.max(initial=0.0))),
            "max_leading_q_kvar": float(max(0.0, -q.min(initial=0.0))),
            "leading_intervals_frac": float(np.mean(q < 0.0)) if q.size else 0.0,
        }
    )


def _ideal_bank_bills(tariff, index, meter: SiteMeter, sizes_q_kvar: np.ndarray, interval_h, repeat_year) -> pd.DataFrame:
    """Bill the site with an extra ideal automatic bank of each size (removes min(size, Q⁺) per interval).

    The kW are the same for every size: the bill engine prices them once (one row for all scenarios),
    and one calendar serves every block of sizes.
    """
    p = np.asarray(meter.p_kw, dtype=float)
    q = np.asarray(meter.q_kvar, dtype=float)
    sizes = np.asarray(sizes_q_kvar, dtype=float)
    cal = billing._calendar(tariff, index, interval_h, wrap=repeat_year is not False)
    p_row = billing._as_2d(p, cal.n_steps, "p_kw_2d")
    q_row = billing._as_2d(q, cal.n_steps, "q_kvar_2d")
    billing._check_repeat(cal, repeat_year)
    chunk = max(1, _CHUNK_ELEMENTS // max(len(p), 1))
    frames = []
    for start in range(0, len(sizes), chunk):
        qc = np.clip(q_row, 0.0, sizes[start : start + chunk, None])
        np.subtract(q_row, qc, out=qc)
        frames.append(billing._priced(tariff, cal, p_row, qc, repeat_year))
    return pd.concat(frames, ignore_index=True)


#: A claimed reactive saving this close to the ideal bank's largest saving (relative) is that saving: the
#: two are sums of the same bill items in different orders, equal but for rounding.
PLATEAU_RTOL = 1e-9


def equivalent_capacitor_bank_q_kvar(
    tariff: Tariff,
    index: pd.DatetimeIndex,
    assets_p_kw,
    assets_q_kvar,
    reactive_saving,
    *,
    site: Site = Site(),
    n_grid: int = 256,
    base_p_kw_profile=None,
    interval_h: float | None = None,
    repeat_year: bool | None = None,
) -> np.ndarray:
    """Return the size of the capacitor bank that saves as much as a claimed reactive saving.

    Parameters
    ----------
    tariff, index, assets_p_kw, assets_q_kvar, site, base_p_kw_profile, interval_h, repeat_year
        The baseline site, as in :func:`option_savings`.
    reactive_saving : float or array_like
        Reactive savings to match [currency over the series].
    n_grid : int
        Number of steps of the bank-size grid, >= 2.

    Returns
    -------
    ndarray
        Bank size per saving [kVAr], >= 0; 0 for a saving <= 0.

    Notes
    -----
    Sizing rule (ours). The alternative is an automatically switched bank, added at the meter after
    the existing banks, with fine steps and a controller that never makes the site lead: in every
    interval it removes min(Q_c, max(Q_t, 0)) of the site's lagging kVAr. Its reactive saving R(Q_c) is
    non-decreasing in the rating Q_c and stops growing at Q_c = max_t Q_t⁺ (the site is then at unity
    power factor in every interval). The equivalent bank is the smallest Q_c with R(Q_c) >= the claimed
    saving, i.e. the kVAr reduction needed at the critical interval — the interval whose reactive
    power sets the charge (the demand-peak window for kVA or PF-adjusted demand, the heaviest
    intervals for a kVArh allowance). R is evaluated on a grid of ``n_grid`` + 1 sizes from 0 to
    max_t Q_t⁺ and interpolated linearly, so sizes are exact to within max_t Q_t⁺ / n_grid. A saving
    equal to the curve's plateau R(max) within rounding (a relative 1e-9: a saving that removes the whole
    charge, summed in another order) is reached where the plateau starts; a saving above it by more
    (possible only through kW-side cross terms) returns max_t Q_t⁺.
    Compensation needed between two power factors is Q_c = P (tan φ1 − tan φ2) (IEEE Std 1036-2010).
    """
    if n_grid < 2:
        raise ValueError("n_grid must be >= 2")
    p0 = _totals(assets_p_kw, "assets_p_kw")
    q0 = _totals(assets_q_kvar, "assets_q_kvar")
    target = np.atleast_1d(np.asarray(reactive_saving, dtype=float))
    meter = site.meter_from_totals(p0, q0, base_p_kw_profile=base_p_kw_profile)
    q_max = float(np.max(np.maximum(np.asarray(meter.q_kvar, dtype=float), 0.0), initial=0.0))
    out = np.zeros_like(target)
    if q_max <= 0.0 or not np.any(target > 0.0):
        return out
    sizes = np.linspace(0.0, q_max, n_grid + 1)
    totals = _ideal_bank_bills(tariff, index, meter, sizes, interval_h, repeat_year)["total"].to_numpy()
    curve = np.maximum.accumulate(totals[0] - totals)
    top = float(curve[-1])
    for i, t in enumerate(target):
        if t <= 0.0:
            continue
        if top < t <= top + PLATEAU_RTOL * max(abs(top), abs(t)):
            t = top  # the whole charge removed: the same saving as the plateau, summed in another order
        j = int(np.searchsorted(curve, t, side="left"))
        if j >= len(curve):
            out[i] = q_max
        elif j == 0:
            out[i] = 0.0
        else:
            c0, c1 = curve[j - 1], curve[j]
            frac = (t - c0) / (c1 - c0) if c1 > c0 else 1.0
            out[i] = sizes[j - 1] + frac * (sizes[j] - sizes[j - 1])
    return out


def reactive_saving_sweep(
    tariff: Tariff,
    index: pd.DatetimeIndex,
    assets_p_kw,
    assets_q_kvar,
    supplied_q_kvar,
    *,
    site: Site = Site(),
    base_p_kw_profile=None,
    interval_h: float | None = None,
    repeat_year: bool | None = None,
) -> pd.DataFrame:
    """Return the bill saving as a function of a constant leading kVAr supplied on the site.

    Parameters
    ----------
    tariff, index, assets_p_kw, assets_q_kvar, site, base_p_kw_profile, interval_h, repeat_year
        The baseline site, as in :func:`option_savings`.
    supplied_q_kvar : array_like, shape (n_points,)
        Leading kVAr supplied in every interval by a source among the assets (e.g. an over-excited
        synchronous motor) [kVAr], >= 0.

    Returns
    -------
    pandas.DataFrame
        Columns ``supplied_q_kvar`` [kVAr], ``bill`` [currency], ``saving`` and ``saving_<category>``
        [currency], ``leading_kvarh`` (site leading energy) [kVArh] and ``flags``.

    Notes
    -----
    The supply enters with the assets (Q_assets − Q_s), so existing automatic banks switch out as
    it grows. The saving flattens once the site is past the tariff's threshold (reactive allowance
    met, PF target reached, kVA equal to kW); with a leading-kVArh charge it falls again once the site
    leads. This saturation is why kVAr supply rarely pays for itself beyond the threshold.
    """
    p0 = _totals(assets_p_kw, "assets_p_kw")
    q0 = _totals(assets_q_kvar, "assets_q_kvar")
    qs = np.asarray(supplied_q_kvar, dtype=float).reshape(-1)
    if np.any(qs < 0.0):
        raise ValueError("supplied_q_kvar must be >= 0 (leading kVAr supplied, as a positive number)")
    kw = dict(base_p_kw_profile=base_p_kw_profile, interval_h=interval_h, repeat_year=repeat_year)
    zeros = np.zeros((1, len(p0)))
    base = _bill_scenarios(tariff, index, site, p0, q0, zeros, zeros, **kw)
    dq = -np.broadcast_to(qs[:, None], (len(qs), len(p0)))
    sweep = _bill_scenarios(tariff, index, site, p0, q0, np.zeros_like(dq), dq, **kw)
    out = saving_by_category(base, sweep)
    out.insert(0, "bill", sweep["total"].to_numpy())
    out.insert(0, "supplied_q_kvar", qs)
    h = interval_h if interval_h is not None else interval_hours(index)
    meter = site.meter_from_totals(p0, q0[None, :] - qs[:, None], base_p_kw_profile=base_p_kw_profile)
    out["leading_kvarh"] = np.maximum(-np.asarray(meter.q_kvar), 0.0).sum(axis=1) * h
    out["flags"] = sweep.attrs["flags"]
    return out
