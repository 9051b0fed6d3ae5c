"""What the capital-request pack says: the scope, the recommended projects and the tables every file shares.

The workbook, the HTML report and the decision records all draw from the functions here, so the three
show the same numbers. Everything is computed from a finished :class:`models.scenario.ScenarioResult`
and its case; nothing here reads or writes files.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, fields
from typing import Any

import numpy as np
import pandas as pd

from models import finance, wording
from models.bill_savings import REACTIVE_TECHNOLOGIES
from models.cashflows import COMPONENTS
from models.io import column_title
from models.kept import KeptForLast
from models.plan import LOW_DATA_QUALITY_PCT
from models.risk import distribution_summary
from models.wording import counted, in_service_text, money_text

#: The cautions every file of the pack shows, in plain words.
#: What to do about a defaulted input, where reading the nameplate is not the answer (risk register).
DEFAULTED_INPUT_ACTIONS = {
    "efficiency_class": "Give the nameplate efficiency (a NEMA nameplate's nominal efficiency) or the IE class, "
                        "then re-run.",
    "rated_efficiency_pct": "Read the nameplate efficiency (a NEMA nameplate's nominal efficiency) or measure, then "
                            "re-run.",
    "static_head_frac": "Take the static share of the head from the system's design (pumps and fans on a drive), "
                        "then re-run.",
    "load_type": "Say whether the load is centrifugal (variable torque) or constant torque, then re-run.",
    "rewind_count": "Take the number of past rewinds from the maintenance records or the repair shop, then re-run.",
    "rewind_loss_pct_points": "Ask the repair shop for its core-loss test before and after the rewind (or its "
                              "practice), then re-run.",
    "start_duty": "Give the starts per hour and the driven load's inertia from the process or the maintenance "
                  "records, then re-run.",
    "criticality": "Say how much of the process stops when the motor stops (operations), then re-run.",
    "machine_type": "Read the nameplate (induction or synchronous), then re-run.",
    "speed_control": "Say how the flow or speed is controlled today (fixed, throttle or damper, drive), then re-run.",
}
CAUTIONS: tuple[str, ...] = (
    "Planning estimates only, not a design: confirm ratings, frame sizes and prices with the manufacturers "
    "and suppliers before ordering.",
    "All electrical work by qualified persons under lockout/tagout, arc-flash rules and the local electrical "
    "codes; agree metering, reactive-power and export matters with the utility under its rules.",
    "Permanent-magnet motors generate voltage at their terminals whenever the shaft turns (a windmilling pump "
    "or fan), even when isolated: lock the shaft or prove dead before touching the terminals.",
    "Capacitors store charge after disconnection: discharge and prove dead before work. Never connect "
    "capacitors on a drive output or between a soft starter and its motor; size motor-terminal capacitors "
    "below the motor's no-load magnetising kVAr to avoid self-excitation.",
    "A faster machine (lower slip, synchronous speed, a drive set above the old speed) raises pump and fan "
    "power roughly with the cube of speed and can overload the driven machine: re-check process limits.",
    "Drives inject harmonics and stress motor insulation and bearings: check voltage distortion limits, use "
    "inverter-duty motors and bearing-current mitigation.",
)

#: Cautions of the whole request, in the report's cautions beside :data:`CAUTIONS` (the decision records name
#: those of their own option).
REQUEST_CAUTIONS: tuple[str, ...] = (
    "A wound-field synchronous motor's start (its damper winding's heating, the torsional pulsation through the "
    "coupling) needs the maker's study; a line-start PM motor's magnets can be weakened by a fault or a start "
    "under a deep voltage dip: confirm their withstand with the supplier.",
    "A pump turned faster needs its NPSH margin at the new speed; a fan, its pressure and structural limits.",
    "Drives and capacitor banks on one network can resonate at a harmonic: a harmonic study decides whether the "
    "banks need detuning reactors.",
    "A motor in a hazardous (Ex) area must be replaced by one certified for that area, its drive and protection "
    "as well.",
)

#: Friendly names of the cash-flow components (docs/finance.md explains each one).
COMPONENT_LABELS: dict[str, str] = {
    "capital_equipment": "Capital: equipment, remedy and capacitors",
    "capital_drive": "Capital: drive",
    "capital_installation": "Capital: installation",
    "capital_engineering": "Capital: engineering",
    "capital_contingency": "Capital: contingency",
    "incentive": "Incentive",
    "baseline_credit": "Avoided must-spend (credit)",
    "midlife": "Mid-life item",
    "savings_energy": "Saving: energy",
    "savings_demand": "Saving: demand",
    "savings_reactive": "Saving: reactive",
    "savings_fixed": "Saving: fixed charges",
    "savings_maintenance": "Saving: maintenance",
    "residual": "Residual value at horizon end",
    "tax_savings": "Tax on savings",
    "tax_depreciation": "Depreciation tax shield",
}

#: Yearly saving components of results.csv and their labels.
SAVING_COLUMNS: dict[str, str] = {
    "saving_energy_per_yr": "Energy",
    "saving_demand_per_yr": "Demand",
    "saving_reactive_per_yr": "Reactive",
    "saving_fixed_per_yr": "Fixed charges",
    "saving_maintenance_per_yr": "Maintenance",
}

#: Unit and meaning of every finance assumption (one table, in models.finance).
FINANCE_FIELDS = finance.FIELD_NOTES

#: Plain name of every finance assumption, for readers of the report (the workbook keeps the keys of
#: finance.toml, which its formulas and its editors use).
FINANCE_LABELS: dict[str, str] = {
    "currency": "Currency", "discount_rate_frac": "Discount rate", "rate_basis": "Rate basis",
    "inflation_frac": "Inflation", "horizon_yr": "Study period", "escalation_energy_frac": "Energy price escalation",
    "escalation_demand_frac": "Demand charge escalation", "escalation_reactive_frac": "Reactive charge escalation",
    "escalation_fixed_frac": "Fixed charge escalation", "escalation_maintenance_frac": "Maintenance cost escalation",
    "grid_co2_kg_per_kwh": "Grid emission factor", "grid_co2_decline_frac": "Grid emission factor decline",
    "incentive_per_kwh_saved": "Incentive per kWh saved", "incentive_capital_share_frac": "Incentive share of capital",
    "incentive_max": "Incentive cap per project", "tax_rate_frac": "Profit tax rate",
    "depreciation_yr": "Tax depreciation period", "replacement_mode": "Replacement timing",
    "downtime_cost_per_h": "Downtime cost", "capacitor_cost_per_kvar": "Capacitor bank cost",
    "energy_price_factor": "Electricity price level", "capital_cost_factor": "Capital cost level",
    "budget_per_yr": "Capital budget per plan year", "monte_carlo_draws": "Monte Carlo draws",
    "monte_carlo_seed": "Monte Carlo seed",
}

#: Technologies that put the motor on a drive (speed changes, so the M&V logs a whole duty cycle).
DRIVE_TECHNOLOGIES = ("pm_drive", "reluctance_drive", "add_drive")


@dataclass(frozen=True)
class Scope:
    """The assets and projects a pack covers.

    Attributes
    ----------
    mode : {"plan", "assets", "plan and assets"}
        How the scope was chosen.
    asset_ids : tuple of str
        Assets in scope, in case order.
    projects : pandas.DataFrame
        One row per project in scope (an asset x option that is not today's motor): the columns of
        ``result.results`` plus ``plan_start_yr`` (plan year, 0 outside the plan), ``in_plan`` and
        ``recommended`` (bool).
    recommended : pandas.DataFrame
        One row per asset in scope: the recommended option (the exact plan's choice, else the highest-NPV
        option, which may be today's motor), with the ``result.results`` columns, ``plan_start_yr``,
        ``in_plan``, ``keep_option_id``, ``reason`` (a sentence), ``reason_short``, and ``plan_npv`` and
        ``plan_npv_at_start`` [currency]: the plan's NPV of the project (a reactive project kept at the share
        of its saving it adds beside the rest of the plan counts that share), at its own start and at the
        plan's; outside the plan, its own NPV.
    """

    mode: str
    asset_ids: tuple[str, ...]
    projects: pd.DataFrame
    recommended: pd.DataFrame

    @property
    def chosen(self) -> pd.DataFrame:
        """Recommended projects that spend capital (today's motor left out)."""
        rec = self.recommended
        return rec[rec["option_id"] != rec["keep_option_id"]].reset_index(drop=True)


def keep_option_ids(result) -> pd.Series:
    """Return today's-motor option id of each asset (the first option of its rows), indexed by asset id."""
    return result.results.groupby("asset_id", sort=False)["option_id"].first()


def has_budget(result) -> bool:
    """Whether the run's plan had a capital limit (an empty ``budget_per_yr`` is none)."""
    return bool(len(getattr(result.assumptions, "budget_per_yr", ()) or ()))


def select_scope(case, result, assets: list[str] | None = None, plan: bool = True) -> Scope:
    """Choose what a pack covers: given assets (all their options), the exact plan's projects, or both.

    Parameters
    ----------
    case : models.case.Case
    result : models.scenario.ScenarioResult
    assets : list of str or None
        Asset ids; each one brings all its options into scope.
    plan : bool
        Bring the exact fleet plan's projects into scope.

    Returns
    -------
    Scope

    Raises
    ------
    ValueError
        For unknown asset ids, or when nothing is selected.
    """
    res = result.results
    known = list(case.assets["asset_id"])
    keep = keep_option_ids(result)
    wanted: list[str] = []
    if assets:
        unknown = [a for a in assets if a not in set(known)]
        if unknown:
            from models.problems import unknown_ids_hint

            raise ValueError(f"unknown asset{'s' if len(unknown) != 1 else ''}: {', '.join(map(str, unknown))}" + unknown_ids_hint(unknown, known))
        wanted = list(dict.fromkeys(str(a) for a in assets))
    if not wanted and not plan:
        raise ValueError("nothing to report: give asset ids or ask for the plan")
    plan_rows = result.plan if plan else result.plan.iloc[0:0]
    plan_key = dict(zip(plan_rows["asset_id"] + "/" + plan_rows["option_id"], plan_rows["start_yr"].astype(int)))
    fleet_choice = dict(zip(result.plan["asset_id"], result.plan["option_id"]))
    fleet_start = dict(zip(result.plan["asset_id"], result.plan["start_yr"].astype(int)))
    # the plan's NPV of a project (a reactive project kept at the share it adds beside the rest of the plan
    # counts that share), at the plan's start; a project outside the plan starts at once, at its own NPV
    plan_npv = dict(zip(result.plan["asset_id"] + "/" + result.plan["option_id"], result.plan["npv"].astype(float)))
    plan_npv_start = dict(zip(result.plan["asset_id"] + "/" + result.plan["option_id"],
                              result.plan["npv_at_plan_start"].astype(float)))
    status = result.plan_status or {}
    taken = set(status.get("withdrawn", ())) | set(status.get("set_aside", ()))  # value taken by the rest of the plan
    budgeted = has_budget(result)
    in_scope = set(wanted) | set(plan_rows["asset_id"])
    asset_ids = tuple(a for a in known if a in in_scope)

    key = res["asset_id"] + "/" + res["option_id"]
    not_keep = res["option_id"].to_numpy() != keep.reindex(res["asset_id"]).to_numpy()
    take = not_keep & (res["asset_id"].isin(wanted).to_numpy() | key.isin(list(plan_key)).to_numpy())
    projects = res[take].copy()
    projects["in_plan"] = [fleet_choice.get(a) == o for a, o in zip(projects["asset_id"], projects["option_id"])]
    projects["plan_start_yr"] = [fleet_start.get(a, 0) if p else 0 for a, p in zip(projects["asset_id"], projects["in_plan"])]

    rec_rows = []
    for asset_id in asset_ids:
        rows = res[res["asset_id"] == asset_id]
        if asset_id in fleet_choice:
            pick = rows[rows["option_id"] == fleet_choice[asset_id]].iloc[0].copy()
            start = fleet_start[asset_id]
            best = bool(pick["best_for_asset"])
            top = rows[rows["best_for_asset"]].iloc[0]
            if best:
                why, short_why = " (highest NPV of its options)", "highest NPV"
            elif f"{asset_id}/{top['option_id']}" in taken:
                why = (f" (its highest-NPV option priced alone, {top['label']}, is a reactive project whose value the "
                       "rest of the plan at this site already takes)")
                short_why = "top NPV option's value taken by the rest of the plan"
            elif not budgeted:
                why = (f" (its highest-NPV option priced alone, {top['label']}, adds less than that beside the rest of "
                       "the plan: projects at one site share its reactive charges and demand peaks)")
                short_why = "top NPV option shares its saving with the rest of the plan"
            elif str(top.get("technology", "")) in REACTIVE_TECHNOLOGIES:
                why = (f" (its highest-NPV option priced alone, {top['label']}, is a reactive project that adds less "
                       "than that beside the rest of the plan at this site)")
                short_why = "top NPV option shares its saving with the rest of the plan"
            else:
                why, short_why = (" (the plan trades some NPV for capital that fits the budget)",
                                  "fits the budget better than the top NPV")
            reason = (f"chosen by the {'budget-constrained ' if budgeted else ''}fleet plan for plan year {start}"
                      + why)
            short = f"plan year {start}; " + short_why
            pick["in_plan"], pick["plan_start_yr"] = True, start
        else:
            pick = rows[rows["best_for_asset"]].iloc[0].copy()
            failed = bool(pick.get("failed", False))
            if f"{asset_id}/{pick['option_id']}" in taken:
                # its best option's value is taken by the rest of the plan: the best of the others is what it can
                # still earn (today's motor when none has a positive NPV; for a motor that has failed, the
                # least that puts it back in service, at NPV zero)
                free = rows[~(asset_id + "/" + rows["option_id"]).isin(list(taken))]
                free = (free[free["option_id"] != keep[asset_id]] if failed
                        else free[(free["npv"] > 0) | (free["option_id"] == keep[asset_id])])
                if len(free):
                    pick = free.sort_values("npv", ascending=False, kind="stable").iloc[0].copy()
            if pick["option_id"] == keep[asset_id] and failed:
                reason = "it has failed, and the catalogue offers nothing that fits it"
                short = "failed; no option fits"
            elif pick["option_id"] == keep[asset_id] and not bool(pick["best_for_asset"]):
                # the options worth more than today's motor priced alone are all reactive projects whose value the
                # rest of the plan takes: keeping today's motor is what is left, not what is best alone
                top = rows[rows["best_for_asset"]].iloc[0]
                reason = (f"keep today's motor (not in the fleet plan: its highest-NPV option priced alone, "
                          f"{top['label']}, is a reactive project whose value the rest of the plan at this site "
                          "already takes, as is every other option worth more than today's motor)")
                short = "today's motor: the plan's other projects take its options' reactive value"
            elif pick["option_id"] == keep[asset_id]:
                reason = "no option beats keeping today's motor on NPV"
                short = "nothing beats today's motor"
            elif failed and float(pick["npv"]) <= FAILED_NPV_TOL * max(1.0, float(pick["capital"])):
                better = rows[(rows["npv"] > FAILED_NPV_TOL * np.maximum(1.0, rows["capital"]))
                              & (rows["option_id"] != pick["option_id"])]
                reason = ("it has failed: the least that puts it back in service now, against which every option is "
                          "counted; " + ("none beats it on NPV" if better.empty else
                                         "the options worth more priced alone add that value only beside the rest of "
                                         "the plan at this site, which already takes it"))
                short = "failed; least that puts it back in service"
            elif float(pick["npv"]) > 0 and not bool(pick["best_for_asset"]):
                top = rows[rows["best_for_asset"]].iloc[0]
                reason = (f"highest NPV of the options the rest of the plan leaves it (not in the fleet plan; its "
                          f"highest-NPV option priced alone, {top['label']}, is a reactive project whose value the "
                          "rest of the plan at this site already takes)")
                short = "best option left once the plan's other projects take its reactive value; outside the plan"
            elif float(pick["npv"]) > 0 and not budgeted:
                reason = ("highest NPV of its options (not in the fleet plan: beside the rest of the plan at this "
                          "site it adds less than priced alone)")
                short = "highest NPV alone; outside the plan"
            elif float(pick["npv"]) > 0:
                reason = "highest NPV of its options (not in the fleet plan: the budget is spent on better projects)"
                short = "highest NPV; outside the budgeted plan"
            else:
                reason = "highest NPV of its options"
                short = "highest NPV"
            pick["in_plan"], pick["plan_start_yr"] = False, 0
        pick["reason"] = reason
        pick["reason_short"] = short
        pick["keep_option_id"] = keep[asset_id]
        label = f"{asset_id}/{pick['option_id']}"
        pick["plan_npv"] = plan_npv.get(label, float(pick["npv"])) if pick["in_plan"] else float(pick["npv"])
        pick["plan_npv_at_start"] = plan_npv_start.get(label, float(pick["npv"])) if pick["in_plan"] else float(pick["npv"])
        rec_rows.append(pick)
    recommended = pd.DataFrame(rec_rows).reset_index(drop=True) if rec_rows else res.iloc[0:0].assign(
        in_plan=[], plan_start_yr=[], reason=[], reason_short=[], keep_option_id=[], plan_npv=[], plan_npv_at_start=[])
    rec_key = set(recommended["asset_id"] + "/" + recommended["option_id"])
    projects["recommended"] = (projects["asset_id"] + "/" + projects["option_id"]).isin(list(rec_key)).to_numpy()
    order = {a: i for i, a in enumerate(asset_ids)}
    projects = projects.assign(_o=projects["asset_id"].map(order)).sort_values(["_o"], kind="stable").drop(columns="_o")
    if wanted and plan:
        mode = "plan and assets"
    elif wanted:
        mode = "assets"
    else:
        mode = "plan"
    return Scope(mode=mode, asset_ids=asset_ids, projects=projects.reset_index(drop=True), recommended=recommended)


# ---------------------------------------------------------------------------------------------------
# Cash flows
# ---------------------------------------------------------------------------------------------------
#: The cash-flow frame last indexed by project, and its index (:func:`_flows_by_project`): a pack reads one
#: project after another, and scanning the whole frame for each took time of order projects x rows.
_FLOW_INDEX = KeptForLast()


def _flows_by_project(cf: pd.DataFrame) -> tuple[dict, np.ndarray, np.ndarray, np.ndarray]:
    """The row positions of each (asset_id, option_id) in a cash-flow frame, with its component names (one per
    row, each name one shared object), years and amounts as arrays; built once per frame and reused while the
    frame lives (the index goes with it)."""
    def index() -> tuple[dict, np.ndarray, np.ndarray, np.ndarray]:
        rows = {(str(a), str(o)): idx for (a, o), idx in
                cf.groupby(["asset_id", "option_id"], sort=False, observed=True).indices.items()} if len(cf) else {}
        codes, names = pd.factorize(cf["component"])
        components = np.asarray([str(n) for n in names], dtype=object)[codes] if len(cf) else np.zeros(0, dtype=object)
        return rows, components, cf["year"].to_numpy().astype(int), cf["amount"].to_numpy(dtype=float)

    return _FLOW_INDEX.get(cf, index)


def project_flow_table(result, asset_id: str, option_id: str) -> pd.DataFrame:
    """Return one project's flows as a component x year table (zero-filled) [currency].

    Rows are the components with a non-zero flow, in the engine's component order; columns are years
    0..horizon. The column sums are the engine's net flows (zero components add nothing).
    """
    horizon = int(result.assumptions.horizon_yr)
    rows, components_all, years_all, amounts_all = _flows_by_project(result.cashflows)
    pick = rows.get((str(asset_id), str(option_id)), np.zeros(0, dtype=np.intp))
    components = components_all[pick]
    years = years_all[pick]
    amounts = amounts_all[pick]
    names = [c for c in COMPONENTS if c in set(components)]
    position = {c: k for k, c in enumerate(names)}
    grid = np.zeros((len(names), horizon + 1))
    np.add.at(grid, (np.array([position[c] for c in components], dtype=int), years), amounts)
    return pd.DataFrame(grid, index=pd.Index(names, name="component"), columns=range(horizon + 1))


def net_flows(result, asset_id: str, option_id: str) -> np.ndarray:
    """Return one project's net flow per year 0..horizon [currency]."""
    table = project_flow_table(result, asset_id, option_id)
    horizon = int(result.assumptions.horizon_yr)
    return table.sum(axis=0).to_numpy(dtype=float) if len(table) else np.zeros(horizon + 1)


def plan_credit_share(result, asset_id: str, option_id: str) -> float | None:
    """The share of its own bill saving a reactive project of the exact plan is credited with beside the rest
    of the plan (its plan NPV counts that share only), or None for a project counted at its own saving."""
    share = ((result.plan_status or {}).get("repriced") or {}).get(f"{asset_id}/{option_id}")
    return None if share is None else float(share)


def plan_flows(result, asset_id: str, option_id: str) -> np.ndarray:
    """One project's net flow per year 0..horizon as the plan counts it [currency]: its own flows, less
    (1 - r) x its bill-saving flows after tax, (1 - r) (1 - tax rate) x bill saving, for a reactive project credited
    the share r (:func:`plan_credit_share`), so that its discounted sum is the project's plan NPV (the engine
    takes off (1 - r) x the present value of its bill saving after tax)."""
    from models.reactive_plan import BILL_SAVING_COMPONENTS

    flows = net_flows(result, asset_id, option_id)
    share = plan_credit_share(result, asset_id, option_id)
    if share is None:
        return flows
    table = project_flow_table(result, asset_id, option_id)
    bill = table.loc[[c for c in table.index if c in BILL_SAVING_COMPONENTS]].sum(axis=0).to_numpy(dtype=float)
    return flows - (1.0 - share) * (1.0 - float(result.assumptions.tax_rate_frac)) * bill


def portfolio_flows(result, projects: pd.DataFrame) -> pd.DataFrame:
    """Return the yearly net flow of a set of projects, each shifted to its plan start year, each counted as
    the plan counts it (:func:`plan_flows`): the discounted flows add up to the projects' plan NPVs.

    Returns
    -------
    pandas.DataFrame
        year (plan year) [yr], net, cumulative, discounted, cumulative_discounted [currency].
    """
    d = float(result.assumptions.discount_rate_frac)
    horizon = int(result.assumptions.horizon_yr)
    last = horizon + (int(projects["plan_start_yr"].max()) if len(projects) else 0)
    total = np.zeros(last + 1)
    for r in projects.itertuples(index=False):
        start = int(r.plan_start_yr)
        total[start:start + horizon + 1] += plan_flows(result, r.asset_id, r.option_id)
    years = np.arange(last + 1)
    disc = total / (1.0 + d) ** years
    return pd.DataFrame({"year": years, "net": total, "cumulative": np.cumsum(total), "discounted": disc,
                         "cumulative_discounted": np.cumsum(disc)})


@dataclass(frozen=True)
class Headline:
    """The executive summary's numbers for the recommended projects in scope.

    Attributes
    ----------
    n_projects : int
    capital : float
        Capital of the recommended projects [currency].
    yearly_saving : float
        Bill and maintenance saving per year at base-year prices [currency/yr].
    npv : float
        NPV at the start of plan year 0 [currency].
    payback_yr : float
        Simple payback of the combined flows [yr] (``inf`` when not within the flows).
    co2_t_per_yr : float
        First-year CO2 avoided [t/yr].
    energy_saved_kwh_per_yr : float
        Energy saved per year [kWh/yr].
    """

    n_projects: int
    capital: float
    yearly_saving: float
    npv: float
    payback_yr: float
    co2_t_per_yr: float
    energy_saved_kwh_per_yr: float


def yearly_saving(frame: pd.DataFrame) -> pd.Series:
    """Return bill saving plus maintenance saving per year of each row [currency/yr]."""
    return frame["bill_saving_per_yr"] + frame["saving_maintenance_per_yr"]


def plan_yearly_saving(result, frame: pd.DataFrame) -> pd.Series:
    """Bill plus maintenance saving per year of each row as the plan counts it [currency/yr]: a reactive project
    of the plan credited the share r of its bill saving (:func:`plan_credit_share`) counts r x its bill saving,
    on the same basis as its plan NPV and the portfolio's flows; other rows their own saving."""
    return yearly_saving(plan_counted(result, frame, paybacks=False))


#: Relative tolerance [-] below which a failed motor's pick is its least repair (NPV zero against itself, to
#: rounding): the capital times this.
FAILED_NPV_TOL = 1e-9


#: The saving columns that are bill savings (what a reactive project's plan share scales).
BILL_SAVING_COLUMNS = ("saving_energy_per_yr", "saving_demand_per_yr", "saving_reactive_per_yr", "saving_fixed_per_yr",
                       "bill_saving_per_yr")


def failed_motor_texts(result, currency: str) -> list[tuple[str, str]]:
    """For each motor the asset register marks as failed: (asset id, what to do with it in one sentence):
    what the plan buys for it, or that its repair or replacement is not in the plan's capital; the least that
    puts it back in service; and which of a rewind now or a new motor now costs least over the study period
    (the end-of-life comparison)."""
    from models.end_of_life import STRATEGY_NAMES
    from models.plan import option_labels
    from models.scenario import REPLACING_TECHNOLOGIES, least_repair

    res = result.results
    if "failed" not in res:
        return []
    failed = list(dict.fromkeys(res.loc[res["failed"].astype(bool), "asset_id"].astype(str)))
    plan = result.plan.set_index(result.plan["asset_id"].astype(str)) if len(result.plan) else None
    eol = result.end_of_life
    eol = eol.set_index(eol["asset_id"].astype(str)) if eol is not None and len(eol) else None
    labels = option_labels(res)
    tech = res.set_index(["asset_id", "option_id"])["technology"]
    out = []
    for asset_id in failed:
        parts = []
        if plan is not None and asset_id in plan.index:
            p = plan.loc[asset_id]
            parts.append(f"the plan buys {labels.get(p['option_id'], p['option_id'])} in plan year {int(p['start_yr'])} "
                         f"({money_text(float(p['capital']), currency)})")
            replaced = str(tech.get((asset_id, p["option_id"]), "")) in REPLACING_TECHNOLOGIES
        else:
            parts.append("the plan buys nothing for it")
            replaced = False
        if not replaced:
            parts.append("its repair or replacement is not in the plan's capital: book it at once")
        least = least_repair(res, asset_id)
        if least is not None:
            parts.append(f"the cheapest outlay that puts it back in service is {least['label']} "
                         f"({money_text(float(least['capital']), currency)})")
        if eol is not None and asset_id in eol.index:
            e = eol.loc[asset_id]
            now = {"replace_now": "a new motor now", "rewind_at_failure": "a rewind now"}.get(
                str(e["best_strategy"]), STRATEGY_NAMES.get(str(e["best_strategy"]), str(e["best_strategy"])))
            parts.append(f"over the study period {now} costs least, by {money_text(float(e['advantage_over_next']), currency)} "
                         "in present cost (end_of_life.csv)")
        out.append((asset_id, "; ".join(parts) + "."))
    return out


def plan_counted(result, frame: pd.DataFrame, paybacks: bool = True) -> pd.DataFrame:
    """``frame`` with each reactive project of the plan's bill savings as the plan counts them: the share r
    (:func:`plan_credit_share`) of each bill component, and (with ``paybacks``) its paybacks on those flows; other
    rows, and the maintenance saving, unchanged.

    Its rows then add up to :func:`plan_yearly_saving` and to the headline's yearly saving, component by
    component."""
    share = [plan_credit_share(result, a, o) if bool(p) else None
             for a, o, p in zip(frame["asset_id"], frame["option_id"],
                                frame["in_plan"] if "in_plan" in frame else [False] * len(frame))]
    factor = np.array([1.0 if x is None else x for x in share], dtype=float)
    out = frame.copy()
    for column in BILL_SAVING_COLUMNS:
        if column in out:
            out[column] = out[column].to_numpy(dtype=float) * factor
    # the paybacks of a project counted at a share: of the flows the plan counts (:func:`plan_flows`), the
    # residual value left out as the engine's paybacks leave it
    d = float(result.assumptions.discount_rate_frac)
    for i in np.flatnonzero([x is not None and paybacks for x in share]):
        a, o = str(frame["asset_id"].iloc[i]), str(frame["option_id"].iloc[i])
        table = project_flow_table(result, a, o)
        paying = plan_flows(result, a, o) - (table.loc["residual"].to_numpy(dtype=float) if "residual" in table.index else 0.0)
        for basis, pay in (("simple", finance.simple_payback(paying)), ("discounted", finance.discounted_payback(paying, d))):
            if f"{basis}_payback_yr" in out:
                out.iloc[i, out.columns.get_loc(f"{basis}_payback_yr")] = float(pay.payback_yr)
            if f"{basis}_payback_lost_again" in out:
                out.iloc[i, out.columns.get_loc(f"{basis}_payback_lost_again")] = bool(pay.lost_again)
    return out


def headline(result, scope: Scope) -> Headline:
    """Return the executive summary's headline numbers for the recommended projects."""
    chosen = scope.chosen
    flows = portfolio_flows(result, chosen)
    payback = float(finance.simple_payback(flows["net"].to_numpy()).payback_yr) if len(chosen) else math.inf
    # the plan's NPV of each project at the plan's start (what the decision table shows, row by row)
    npv_start = float(chosen["plan_npv_at_start"].sum()) if len(chosen) else 0.0
    return Headline(n_projects=len(chosen), capital=float(chosen["capital"].sum()),
                    yearly_saving=float(plan_yearly_saving(result, chosen).sum()) if len(chosen) else 0.0,
                    npv=npv_start, payback_yr=payback,
                    co2_t_per_yr=float(chosen["co2_avoided_t_per_yr"].sum()),
                    energy_saved_kwh_per_yr=float(chosen["energy_saved_kwh_per_yr"].sum()))


# ---------------------------------------------------------------------------------------------------
# Measurement and verification
# ---------------------------------------------------------------------------------------------------
def _power_factor(p_kwh: np.ndarray, q_kvarh: np.ndarray) -> np.ndarray:
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(p_kwh > 0, p_kwh / np.hypot(p_kwh, q_kvarh), np.nan)


def mv_plan(result, projects: pd.DataFrame, case=None) -> pd.DataFrame:
    """Return the measurement-and-verification plan of each project: what to log, for how long, baselines.

    With ``case``, a motor switched on and off (``speed_control`` ``on_off``) gets no expected mean kW after a
    project that changes how long it runs (any but a terminal capacitor: a drive may run it at its demand, a
    faster motor moves the amount in less time), and its measure says to compare energy over the same production.

    Returns
    -------
    pandas.DataFrame
        asset_id, option_id, ipmvp_option ("A" or "B"), duration_weeks [week], measure (text),
        baseline_energy_kwh_per_yr, baseline_mean_p_kw, baseline_power_factor, baseline_speed_rpm,
        running_h_per_yr, expected_energy_kwh_per_yr, expected_mean_p_kw, expected_power_factor,
        expected_speed_rpm.

    Notes
    -----
    Mean kW is the running-hour mean: kWh / running hours. The power factor is energy-weighted,
    kWh / sqrt(kWh^2 + kVArh^2) with the net (lagging - leading) kVArh at the motor terminals. IPMVP
    Option A (key parameter measured, hours logged) suits a like-for-like swap at unchanged duty; Option B
    (all parameters metered) suits a speed-control change whose kW follows the process [1].

    References
    ----------
    .. [1] Efficiency Valuation Organization, "International Performance Measurement and Verification
       Protocol: Core Concepts," EVO 10000-1:2022.
    """
    op = result.physics.operation
    res = result.results.set_index(["asset_id", "option_id"])
    keep = keep_option_ids(result)
    cycled = set()
    if case is not None and "speed_control" in case.assets:
        cycled = set(case.assets.loc[case.assets["speed_control"].astype(str) == "on_off", "asset_id"].astype(str))
    rows = []
    for r in projects.itertuples(index=False):
        i = op.asset_position(r.asset_id)
        o = op.option_position(r.option_id)
        keep_o = 0
        # a motor that has failed cannot be logged before the change: the baseline of an option that replaces it
        # is the modelled least repair; an add-on's, the motor as modelled (repaired, as before it failed)
        row_ = res.loc[(r.asset_id, r.option_id)]
        failed_now = bool(row_.get("failed", False))
        base_id = str(row_.get("must_spend_option_id", "") or "") if failed_now else ""
        if base_id:
            keep_o = op.option_position(base_id)
        hours = float(op.running_h[i])
        kwh = op.energy_kwh[i, [keep_o, o]]
        kvarh = op.lagging_kvarh[i, [keep_o, o]] - op.leading_kvarh[i, [keep_o, o]]
        pf = _power_factor(kwh, kvarh)
        mean_kw = kwh / hours if hours > 0 else np.array([np.nan, np.nan])
        tech = str(r.technology)
        option = "B" if tech in DRIVE_TECHNOLOGIES or tech == "wound_field" else "A"
        # a whole duty cycle for metered savings; two weeks when only the key parameter is measured
        weeks = 4 if option == "B" else 2
        what = ["true kW (3-phase power analyser, 1-15 min averages)", "power factor and kVAr",
                "running hours (logger on the contactor or current)"]
        what.append("shaft speed (optical tachometer) to confirm slip and speed change")
        if tech in DRIVE_TECHNOLOGIES:
            what.append("process variable (flow or pressure) to normalise for production")
        if tech == "capacitor":
            what = ["kVAr and power factor at the motor and at the site meter", "kVArh on the bill before and after",
                    "running hours"]
        if tech == "wound_field":
            what.append("field current and site power factor (over-excitation setpoint)")
        measure = "; ".join(what)
        running_changes = str(r.asset_id) in cycled and tech != "capacitor"
        if running_changes:  # its running hours change with the project: the mean kW while running is not comparable
            mean_kw = np.array([mean_kw[0], np.nan])
            measure += ("; switched on and off: compare energy over the same production (m3, t), not mean kW, "
                        "since the project changes how long it runs")
        if failed_now:
            baseline = (f"the modelled {res.loc[(r.asset_id, base_id), 'label']}" if base_id
                        else "the motor as modelled, repaired")
            measure = f"after the change only (the motor has failed: the baseline is {baseline}): " + measure
        rows.append({
            "asset_id": r.asset_id, "option_id": r.option_id, "ipmvp_option": option, "duration_weeks": weeks,
            "measure": measure,
            "running_h_per_yr": hours,
            "baseline_energy_kwh_per_yr": float(kwh[0]), "baseline_mean_p_kw": float(mean_kw[0]),
            "baseline_power_factor": float(pf[0]),
            "baseline_speed_rpm": float(res.loc[(r.asset_id, base_id or keep[r.asset_id]), "mean_speed_rpm"]),
            "expected_energy_kwh_per_yr": float(kwh[1]), "expected_mean_p_kw": float(mean_kw[1]),
            "expected_power_factor": float(pf[1]), "expected_speed_rpm": float(r.mean_speed_rpm),
        })
    columns = ["asset_id", "option_id", "ipmvp_option", "duration_weeks", "measure",
               "running_h_per_yr", "baseline_energy_kwh_per_yr", "baseline_mean_p_kw", "baseline_power_factor",
               "baseline_speed_rpm", "expected_energy_kwh_per_yr", "expected_mean_p_kw", "expected_power_factor",
               "expected_speed_rpm"]
    return pd.DataFrame(rows, columns=columns)


# ---------------------------------------------------------------------------------------------------
# Assumptions, data quality and the risk register
# ---------------------------------------------------------------------------------------------------
def in_service_words(case, result) -> str:
    """The month the case's changes are taken to come into service, in words (its ``in_service_month``, else the
    analysis year's first month, January): where a demand ratchet still reads the months before a change, the month
    moves the first years' savings (docs/finance.md, section 4)."""
    op = getattr(getattr(result, "physics", None), "operation", None)
    first = int(op.index[0].month) if op is not None and len(op.index) else None
    return in_service_text(getattr(case.settings, "in_service_month", None), first)


def basis_rows(case, result) -> list[tuple[str, str, str]]:
    """What the pack's figures rest on besides the finance assumptions: (item, value, note) rows for the
    region and purchase date the efficiency rules are read on, the analysis year of the load data and bills,
    and each site's tariff."""
    s = case.settings
    rows = [("Region (minimum-efficiency rules)", str(s.region),
             "as the case declares it" if getattr(s, "region_declared", True) else
             "not declared in the case: the default region was taken"),
            ("Purchase date (rules read on)", str(s.purchase_date),
             "as the case gives it" if getattr(s, "purchase_date_declared", True) else
             "the day of the run (the case gives none): a run on another day can read other rules")]
    from models.case import sites_have_ratchet

    if sites_have_ratchet(getattr(case, "tariffs", {}) or {}, case.sites):
        rows.append(("Changes in service from", f"the start of {in_service_words(case, result)}",
                     "a demand ratchet still reads the months before a change: the first years' savings depend on "
                     "the month (case setting in_service_month)"))
    year = analysis_year(result)
    if year is not None:
        rows.append(("Analysis year", str(year), "the year of the load data and of the bills priced; plan year 0 "
                                                 "starts at the purchase date"))
    tariffs = getattr(case, "tariffs", {}) or {}
    for site in case.sites.itertuples(index=False):
        file = getattr(site, "tariff_file", None)
        tariff = tariffs.get(file) if isinstance(file, str) else None
        name = str(getattr(tariff, "name", "") or "") if tariff is not None else ""
        site_name = str(getattr(site, "site_name", "") or "")
        rows.append((f"Tariff of site {site.site_id}" + (f" ({site_name})" if site_name else ""),
                     name or (str(file) if isinstance(file, str) else "none"),
                     f"file {file}" if isinstance(file, str) else "no tariff file named"))
    for site_id, lines in bills_fit(case, result).items():
        verdicts = [f"{text.split(':')[0]}: {verdict}" for verdict, text in lines]  # each quantity's own
        rows.append((f"Today's fleet against the bills of site {site_id}", "; ".join(verdicts),
                     "; ".join(text for _, text in lines) + " (docs/calibration.md)"))
    return rows


def bills_fit(case, result) -> dict[str, list[tuple[str, str]]]:
    """Each site's fit of today's fleet as modelled to the bills the case gives (``bill_history``): per site,
    (verdict, sentence) per quantity billed, energy first (:mod:`models.calibration`); empty without bills."""
    from models import calibration

    op = getattr(getattr(result, "physics", None), "operation", None)
    history = getattr(case, "bill_history", None)
    if op is None or history is None or history.empty:
        return {}
    # one pack asks several times (basis, register, workbook): the sites' meters are made once per result
    def fit() -> dict[str, list[tuple[str, str]]]:
        _, summary = calibration.calibrate(case, op)
        out: dict[str, list[tuple[str, str]]] = {}
        for row in summary.to_dict("records"):
            verdict = ("within the monthly criteria" if row["within_criteria"] else
                       "too few months to judge" if not np.isfinite(row["nmbe_pct"]) else "outside the monthly criteria")
            out.setdefault(str(row["site_id"]), []).append((verdict, calibration.summary_text(row)))
        return out

    return _BILLS_FIT.get(result, fit, beside=case)


#: The last :func:`bills_fit`, kept while its result lives (its case held beside it until then).
_BILLS_FIT = KeptForLast()


def finance_rows(assumptions: finance.FinanceAssumptions, currency: str | None = None) -> list[dict[str, Any]]:
    """Return one row per finance assumption: key, label (plain words), value, unit, meaning, and whether it
    is the program default. With ``currency`` the units name it ("EUR/h") instead of "currency"."""
    default = finance.FinanceAssumptions()
    out = []
    for f in fields(assumptions):
        value = getattr(assumptions, f.name)
        unit, meaning = FINANCE_FIELDS.get(f.name, ("", ""))
        if currency:
            unit = re.sub(r"\bcurrency\b", str(currency), unit)
        out.append({"key": f.name, "label": FINANCE_LABELS.get(f.name, f.name), "value": value, "unit": unit,
                    "meaning": meaning, "program_default": value == getattr(default, f.name)})
    return out


def shown_as_percent(value, unit: str) -> tuple[object, str]:
    """A fraction (unit ``frac`` or ``frac/yr``) as a percentage for readers: (value x 100, ``%`` or ``%/yr``);
    any other value and unit as they are.

    Examples
    --------
    >>> shown_as_percent(0.08, "frac/yr")
    (8.0, '%/yr')
    >>> shown_as_percent(15, "yr")
    (15, 'yr')
    """
    if unit.startswith("frac") and isinstance(value, (int, float)) and not isinstance(value, bool):
        return round(100.0 * float(value), 10), "%" + unit[len("frac"):]
    return value, unit


def scope_flags(result, asset_ids: tuple[str, ...]) -> pd.DataFrame:
    """Return the machine models' flags (asset_id, option_id, flag) of the assets in scope."""
    flags = result.physics.operation.flags
    if flags.empty:
        return pd.DataFrame(columns=["asset_id", "option_id", "flag"])
    return flags[flags["asset_id"].isin(list(asset_ids))].reset_index(drop=True)


def scope_defaults(case, asset_ids: tuple[str, ...]) -> pd.DataFrame:
    """Return every defaulted input (asset_id, column, value, basis) of the assets in scope."""
    d = case.defaults
    if d is None or d.empty:
        return pd.DataFrame(columns=["asset_id", "column", "value", "basis"])
    return d[d["asset_id"].isin(list(asset_ids))].reset_index(drop=True)


def asset_list_text(ids: list[str], limit: int = 8) -> str:
    """Return up to ``limit`` ids joined by commas, then 'and N more'."""
    ids = list(dict.fromkeys(ids))
    text = ", ".join(ids[:limit])
    return text + (f" and {len(ids) - limit} more" if len(ids) > limit else "")


#: The factors the Monte Carlo draws, in words (docs/finance.md, section 7).
DRAWN_FACTORS_TEXT = (
    "hours, load, prices and their escalation, the discount rate, capital and the new machines' losses within their "
    "efficiency tolerance")


@dataclass(frozen=True)
class Uncertainty:
    """The tornado and Monte Carlo a pack shows for its recommended projects.

    Attributes
    ----------
    of_plan : bool
        True: the exact plan's under the budget (``result.plan_tornado``, ``result.plan_risk``,
        ``result.plan_npv_draws``); False: each asset's best option with no budget (``result.tornado``,
        ``result.risk``), for a result without the plan's uncertainty.
    tornado : pandas.DataFrame
        One-at-a-time sensitivity rows (columns of ``result.tornado``); empty without risk.
    projects : pandas.DataFrame
        Monte Carlo summary rows of the recommended projects in scope that were simulated (columns of
        ``result.plan_risk``, with ``start_yr``, or of ``result.risk``).
    plan_npv : dict or None
        :func:`models.risk.distribution_summary` of the plan's NPV at its start over the draws [currency];
        None when not ``of_plan`` or without draws.
    n_draws : int
        Draws of the plan's NPV (0 when ``plan_npv`` is None).
    n_asked : int
        Recommended projects in scope.
    n_plan : int
        Projects of the whole fleet plan.
    n_plan_in_scope : int
        Projects of the fleet plan among the recommended projects in scope.
    plan_empty : bool
        The run had risk but the plan holds no project under the budget (so no uncertainty of its own).
    """

    of_plan: bool
    tornado: pd.DataFrame
    projects: pd.DataFrame
    plan_npv: dict[str, float] | None
    n_draws: int
    n_asked: int
    n_plan: int
    n_plan_in_scope: int
    plan_empty: bool = False

    @property
    def whole_plan(self) -> bool:
        """The recommended projects in scope are exactly the fleet plan's (the plan's NPV is then theirs)."""
        return self.n_plan_in_scope == self.n_plan == self.n_asked


def uncertainty(result, scope: Scope) -> Uncertainty:
    """Return the tornado and Monte Carlo a pack shows: the exact plan's, else (an older result, run with risk
    before the plan's uncertainty was kept) each asset's best option's.

    Parameters
    ----------
    result : models.scenario.ScenarioResult
    scope : Scope
        Its recommended projects (``scope.chosen``) are the ones whose Monte Carlo rows are kept.

    Returns
    -------
    Uncertainty
    """
    chosen = set(scope.chosen["asset_id"] + "/" + scope.chosen["option_id"])
    plan_keys = set(result.plan["asset_id"] + "/" + result.plan["option_id"])
    of_plan = not result.plan_risk.empty and "project_id" in result.plan_risk
    table = result.plan_risk if of_plan else result.risk
    if not table.empty and "project_id" in table:
        table = table[table["project_id"].isin(list(chosen))].reset_index(drop=True)
    draws = np.asarray(result.plan_npv_draws, dtype=float).reshape(-1)
    plan_npv = distribution_summary(draws) if of_plan and draws.size else None
    return Uncertainty(of_plan=of_plan, tornado=result.plan_tornado if of_plan else result.tornado, projects=table,
                       plan_npv=plan_npv, n_draws=int(draws.size) if plan_npv else 0, n_asked=len(chosen),
                       n_plan=len(plan_keys), n_plan_in_scope=len(plan_keys & chosen),
                       plan_empty=result.plan.empty and (len(result.fleet_npv_draws) > 0 or not result.risk.empty))


def whole_plan_text(u: Uncertainty) -> str:
    """Say that the plan's figures are the whole fleet plan's when the pack covers other projects; else ''."""
    if u.whole_plan:
        return ""
    if u.n_plan_in_scope == u.n_plan:
        return f" (the fleet plan's {counted(u.n_plan, 'project')} only, not this pack's other recommended projects)"
    return (f" (the whole fleet plan, not only this pack's scope: {counted(u.n_plan, 'project')}, "
            f"{u.n_plan_in_scope} of them in this pack)")


def tornado_text(u: Uncertainty) -> str:
    """One sentence on what the tornado varies and on which NPV."""
    if not u.of_plan:
        return (("The plan holds no project under this budget, so it has no uncertainty of its own. " if u.plan_empty
                 else "")
                + "The tornado varies one input at a time on the fleet NPV of every asset's best option (the whole "
                  "fleet, not only this pack's scope).")
    return ("The tornado varies one input at a time on the NPV of the exact plan under the budget, at the plan's start"
            f"{whole_plan_text(u)}.")


def plan_npv_text(u: Uncertainty, currency: str) -> str:
    """The plan's NPV P10/P50/P90 and P(plan NPV > 0) over the draws, in a sentence; '' without them."""
    if u.plan_npv is None:
        return ""
    s = u.plan_npv
    whose = "the plan's NPV at its start" if u.whole_plan else "the whole fleet plan's NPV at its start"
    return (f"Over {u.n_draws:,} Monte Carlo draws ({DRAWN_FACTORS_TEXT}), {whose} has P10 {money(s['npv_p10'], currency)}, P50 {money(s['npv_p50'], currency)} and "
            f"P90 {money(s['npv_p90'], currency)}; P(plan NPV > 0) = {chance_text(s['prob_npv_positive_frac'])}. "
            "(P10 is the value 10 % of the draws fall below, P50 the median, P90 the value 90 % fall below.)")


def monte_carlo_text(u: Uncertainty) -> str:
    """What the per-project Monte Carlo table shows, in words."""
    if not u.of_plan and u.plan_empty:
        return "No project to simulate: the plan holds none under this budget."
    if not u.of_plan:
        return (f"{len(u.projects)} of the {counted(u.n_asked, 'recommended project')} "
                f"{'was' if len(u.projects) == 1 else 'were'} simulated: the Monte Carlo draws hours, "
                "load, prices and capital for each asset's highest-NPV option; plan choices that trade NPV for budget "
                "are not simulated.")
    text = ("Each project of the plan in this pack: its NPV at its own start (its plan year, as in the plan), at the "
            "value the plan gives it (a reactive project counts only the share of its saving the rest of the plan "
            "leaves it), under the same draws.")
    outside = u.n_asked - u.n_plan_in_scope
    if outside:
        text += (f" {outside} of the {counted(u.n_asked, 'recommended project')} {'is' if outside == 1 else 'are'} outside the "
                 "fleet plan and not simulated.")
    return text



def plan_bill_savings_apart_and_together(result) -> tuple[float, float | None]:
    """The plan's yearly bill saving counted project by project, and with the whole plan on the sites' bills.

    Project by project, each at its own saving priced alone (a reactive project at the share of its saving the
    plan credits it), as the headline saving adds them; together, the sites' bills with every project of the plan
    in place (None where the run did not price them). Both [currency/yr]; (0, None) without a plan.
    """
    from models.scenario import plan_bill_saving_per_yr

    if not len(result.plan):
        return 0.0, None
    pairs = list(zip(result.plan["asset_id"], result.plan["option_id"]))
    own = result.results.set_index(["asset_id", "option_id"])["bill_saving_per_yr"].reindex(pairs).to_numpy(dtype=float)
    credited = np.array([1.0 if share is None else share for share in (plan_credit_share(result, a_id, o_id)
                                                                       for a_id, o_id in pairs)])
    return float(np.nansum(own * credited)), plan_bill_saving_per_yr(result.bills)


def replace_now_beside_plan(result) -> pd.DataFrame:
    """The plan's assets whose project keeps today's motor while the end-of-life comparison finds replacing the
    motor now cheaper: asset_id, new_option_id and the new motor's capital [currency] (empty without any)."""
    from models.scenario import REPLACING_TECHNOLOGIES

    eol, plan = result.end_of_life, result.plan
    columns = ["asset_id", "new_option_id", "capital"]
    if eol is None or eol.empty or not len(plan) or "best_strategy" not in eol:
        return pd.DataFrame(columns=columns)
    res = result.results.set_index(["asset_id", "option_id"])
    kept = [a for a, o in zip(plan["asset_id"], plan["option_id"])
            if str(res.loc[(a, o), "technology"]) not in REPLACING_TECHNOLOGIES]
    now = eol[(eol["best_strategy"] == "replace_now") & eol["asset_id"].isin(kept) & ~eol["failed"].astype(bool)]
    capital = [float(res["capital"].get((a, o), np.nan)) for a, o in zip(now["asset_id"], now["new_option_id"])]
    return pd.DataFrame({"asset_id": now["asset_id"].to_numpy(), "new_option_id": now["new_option_id"].to_numpy(),
                         "capital": capital}, columns=columns)


def plan_tax_savings_per_yr(result) -> dict[str, float]:
    """Each tax line's fall on the sites' bills with the whole plan in place [currency/yr], by tax name (the
    tariffs' ``tax:<name>`` lines), largest first; empty without the plan's bills or any tax line.

    The savings are those of the bills as the tariffs write them, taxes included: a business that reclaims a tax
    (VAT, for most) saves that much less.
    """
    bills = result.bills
    if bills is None or not len(bills) or "scenario" not in bills:
        return {}
    taxes = bills[bills["line_item"].astype(str).str.startswith("tax:")]
    if taxes.empty:
        return {}
    by = taxes.groupby([taxes["line_item"].astype(str).str[4:], "scenario"])["amount"].sum().unstack("scenario")
    if "baseline" not in by or "plan" not in by:
        return {}
    fall = (by["baseline"].fillna(0.0) - by["plan"].fillna(0.0)).sort_values(ascending=False)
    return {str(name): float(value) for name, value in fall.items() if abs(value) > 0.005}


def taxes_text(result, currency: str) -> str:
    """A sentence saying which taxes the bill savings hold and how much ("" without any).

    Examples
    --------
    >>> class R:
    ...     bills = pd.DataFrame({"line_item": ["tax:VAT", "tax:VAT", "energy:all", "energy:all"],
    ...                           "scenario": ["baseline", "plan", "baseline", "plan"], "amount": [19.0, 9.5, 100.0, 50.0]})
    >>> taxes_text(R(), "EUR")[:86]
    "The bill savings include the tariffs' taxes: of the bills' yearly fall with the plan, "
    >>> taxes_text(R(), "EUR")[86:]
    'EUR 10 is VAT. A business that reclaims a tax (VAT, for most) saves that much less: leave it out of the tariff to see the savings and NPVs without it.'
    """
    fall = plan_tax_savings_per_yr(result)
    if not fall:
        return ""
    parts = [f"{money(value, currency)}{' is' if k == 0 else ''} {name}" for k, (name, value) in enumerate(fall.items())]
    listed = parts[0] if len(parts) == 1 else ", ".join(parts[:-1]) + " and " + parts[-1]
    return (f"The bill savings include the tariffs' taxes: of the bills' yearly fall with the plan, {listed}. "
            "A business that reclaims a tax (VAT, for most) saves that much less: leave it out of the tariff to see "
            "the savings and NPVs without it.")


def risk_register(case, result, scope: Scope) -> pd.DataFrame:
    """Return the risks and assumptions register: category, item, detail, assets, response.

    Rows come from the finance assumptions, the options catalogue, the defaulted inputs, the machine
    models' flags, data quality and the Monte Carlo summary (the plan's, see :func:`uncertainty`), for the
    assets and projects in scope.
    """
    a = result.assumptions
    rows: list[dict[str, str]] = []

    def add(category: str, item: str, detail: str, assets: str, response: str) -> None:
        rows.append({"category": category, "item": item, "detail": detail, "assets": assets, "response": response})

    add("assumption", "Discount rate and horizon",
        f"{a.discount_rate_frac:.1%} per year ({a.rate_basis}) over {a.horizon_yr} years", "all",
        "Use the company's hurdle rate; see the tornado for the NPV swing of +/- 2 points.")
    add("assumption", "Energy price escalation",
        f"energy {a.escalation_energy_frac:.1%}/yr, demand {a.escalation_demand_frac:.1%}/yr, "
        f"reactive {a.escalation_reactive_frac:.1%}/yr ({a.rate_basis})", "all",
        "Run low/base/high price cases; keep real or nominal consistent with the discount rate.")
    add("assumption", "Grid emission factor",
        f"{a.grid_co2_kg_per_kwh:g} kg CO2/kWh in the base year, declining {a.grid_co2_decline_frac:.1%}/yr", "all",
        "State whether the factor is location- or market-based and average or marginal.")
    fall = plan_tax_savings_per_yr(result) if scope.mode != "assets" else {}
    if fall:
        add("assumption", "Taxes in the savings",
            "; ".join(f"{name}: {money(value, case.settings.currency)} a year of the plan's bill saving"
                      for name, value in fall.items()), "all",
            "A business that reclaims a tax (VAT, for most) saves that much less: take it out of the tariff's taxes "
            "and run again before approval.")
    add("assumption", "Replacement timing", a.replacement_mode.replace("_", " "), "all",
        "Replace-now projects assume an outage window in the plan year; book it with operations.")
    from models.financing import percent_text

    if str(getattr(a, "financing", "cash")) == "loan":
        add("assumption", "Financing", f"loan: {percent_text(a.loan_share_frac)} of the capital at "
            f"{percent_text(a.loan_rate_frac)} a year (nominal) over {int(a.loan_term_yr)} years", "all",
            "The lender's terms decide the owner's view (section 5); the plan and its metrics are on the cash basis.")
    elif str(getattr(a, "financing", "cash")) == "lease":
        add("assumption", "Financing", f"lease: each first purchase over {int(a.lease_term_yr)} years at "
            f"{percent_text(a.lease_rate_frac)} a year (nominal), bought out "
            + (f"at {percent_text(a.lease_buyout_frac)} of its price" if a.lease_buyout_frac > 0 else "for a nominal price"),
            "all",
            "The lessor's terms (the rate, the buyout, who claims the incentive and the depreciation, the lease's "
            "treatment in the accounts) decide the owner's view (section 5); the plan and its metrics are on the "
            "cash basis.")
    elif str(getattr(a, "financing", "cash")) == "shared_savings":
        add("assumption", "Financing", f"energy-service company: {percent_text(a.shared_savings_share_frac)} of the "
            f"savings for {int(a.shared_savings_term_yr)} years", "all",
            "The contract's terms (who keeps the depreciation, the equipment at its end, a guarantee of savings) "
            "decide the owner's view (section 5); the plan and its metrics are on the cash basis.")
    assets = case.assets[case.assets["asset_id"].isin(list(scope.asset_ids))]
    if a.downtime_cost_per_h == 0:
        # only the in-scope assets without their own downtime cost take a placeholder
        own_cost = (pd.to_numeric(assets["downtime_cost_per_h"], errors="coerce") if "downtime_cost_per_h" in assets
                    else pd.Series(np.nan, index=assets.index))
        placeholder = list(assets.loc[own_cost.isna().to_numpy(), "asset_id"])
        if placeholder:
            add("assumption", "Downtime cost", "no case-wide downtime cost set; placeholders by criticality are used "
                "for the end-of-life comparison of motors without their own",
                "all" if len(placeholder) == len(assets) else asset_list_text(placeholder),
                "Set the downtime cost per hour per asset (asset register) or case-wide (finance assumptions).")
    if "illustrative" in case.options.columns and case.options["illustrative"].fillna(False).astype(bool).any():
        from models.options import ILLUSTRATIVE_PRICES_CURRENCY, ILLUSTRATIVE_PRICES_YEAR

        add("assumption", "Capital costs", "the options catalogue prices are illustrative cost curves, not quotes "
            f"(the shipped catalogue's: {ILLUSTRATIVE_PRICES_CURRENCY} at {ILLUSTRATIVE_PRICES_YEAR} prices)",
            "all", "Replace them with supplier quotes before approval; contingency covers part of the spread.")
    level = float(getattr(a, "capital_cost_factor", 1.0))
    add("assumption", "Price year", f"savings at {prices_year_words(result)}; capital at the options catalogue's "
        "prices, taken to be of the same year" + (f", times the capital cost level {level:g}" if level != 1.0 else ""),
        "all", "Quotes of another year: bring them to the analysis year's prices before the run ("
        + ("a real analysis keeps every later year's flow in the analysis year's money)" if a.rate_basis == "real"
           else "a nominal analysis inflates later years' flows from there)"))
    defaults = scope_defaults(case, scope.asset_ids)
    if not defaults.empty:
        for (column, basis), grp in defaults.groupby(["column", "basis"], sort=True):
            # the reader's words for the field; the register's column name beside the basis, to find it in the file
            add("defaulted input", column_title("assets", str(column)),
                f"{basis} ({counted(len(grp), 'asset')}; asset register column {column})",
                asset_list_text(list(grp["asset_id"])),
                DEFAULTED_INPUT_ACTIONS.get(str(column), "Read the nameplate or measure, then re-run."))
    # motors that have failed need a way back into service whatever the plan; one the plan does not take is
    # money the request does not yet hold
    res = result.results
    if "failed" in res:
        # a pack of the plan speaks for the fleet: every failed motor, those the plan leaves out above all
        pool = assets if scope.mode == "assets" else case.assets
        failed_now = set(res.loc[res["failed"].astype(bool), "asset_id"])
        failed_ids = [a_id for a_id in pool["asset_id"] if a_id in failed_now]
        # a plan project that replaces the motor puts it back in service; an add-on (drive, capacitor) needs the
        # repair besides, which the plan does not hold
        from models.scenario import REPLACING_TECHNOLOGIES as REPLACING

        replacing = set()
        if len(result.plan):
            tech = res.set_index(["asset_id", "option_id"])["technology"]
            replacing = {a_id for a_id, o_id in zip(result.plan["asset_id"], result.plan["option_id"])
                         if str(tech.get((a_id, o_id), "")) in REPLACING}
        outside = [a_id for a_id in failed_ids if a_id not in replacing]
        if failed_ids:
            one = len(failed_ids) == 1
            detail = (f"{counted(len(failed_ids), 'motor')} of the asset register {'has' if one else 'have'} failed: "
                      "each option is counted against the least that puts the motor back in service now")
            if outside:
                single = len(outside) == 1
                detail += (f"; of which {asset_list_text(outside)} {'has' if single else 'have'} no project in the "
                           f"plan that replaces the motor, so {'its' if single else 'their'} repair or replacement is "
                           "not in the plan's capital")
            add("assumption", "Motors that have failed", detail, asset_list_text(failed_ids),
                "Book the repair or the replacement at once, and confirm the outage's hours with the repair shop or "
                "the supplier.")
    # the headline's yearly saving adds the plan's projects priced one by one (a reactive one at the share the
    # plan credits it): where they save less together on the sites' bills, the register says by how much
    if scope.mode != "assets" and len(result.plan):
        apart, together = plan_bill_savings_apart_and_together(result)
        gap = apart - together if together is not None else 0.0
        if gap > 0.005 * max(abs(apart), 1.0):
            currency = case.settings.currency
            add("model", "Projects priced one by one",
                f"the plan's projects save {money(apart, currency)} a year on the bills counted one by one (a reactive "
                f"project at the share of its saving the plan credits it), the sites' bills with the whole plan in "
                f"place fall by {money(together, currency)}: {money(gap, currency)} a year ({gap / apart:.1%}) of the "
                "headline saving rests on projects that share demand peaks, ratchets or allowances", "plan",
                "Read the workbook's Bills sheet; before approval, take the plan's saving from the whole-plan bills "
                "where the gap matters (it lowers the NPV by about its present value).")
    # a model of today's fleet off the site's own bills: a baseline to question before its savings are
    in_scope_sites = set(assets["site_id"].astype(str))
    fits = bills_fit(case, result)
    if fits:
        from models.case import coarse_demand_profiles as _coarse

        coarse_sites = set(_coarse(case.sites, case.assets, getattr(case, "tariffs", {}) or {},
                                   getattr(case, "profile_info", None)))
    for site_id, lines in sorted(fits.items()):
        off = [text for verdict, text in lines if verdict == "outside the monthly criteria"]
        if any(text.startswith("peak demand") for text in off) and site_id in coarse_sites:
            # a model of hourly profiles reads a lower peak than a bill's shorter demand windows
            off.append("the site's profiles are coarser than its demand window, which lowers the modelled peak "
                       "(the demand-window row)")
        if off and site_id in in_scope_sites:
            add("data", f"Model off the bills at site {site_id}", "; ".join(off),
                asset_list_text(list(assets.loc[assets["site_id"].astype(str) == site_id, "asset_id"])) or "all",
                "Check the site's base load, the running hours and the loads of the largest motors against the "
                "bills before relying on the savings.")
    # a demand ratchet that still bills today's peaks in a recommended project's first year in service
    rec = scope.recommended
    if "ratchet_shortfall" in result.results and len(rec):
        short = (result.results.set_index(["asset_id", "option_id"])["ratchet_shortfall"]
                 .reindex(pd.MultiIndex.from_arrays([rec["asset_id"], rec["option_id"]])).fillna(0.0))
        held = short[short.to_numpy(dtype=float) > 0.5]
        if len(held):
            ids = [str(a_id) for a_id, _ in held.index]
            add("assumption", "Demand ratchet holds back the first savings",
                f"while the site's ratchet still bills today's peaks (the first year in service, longer for a "
                f"look-back over 12 months), {counted(len(held), 'recommended project')} {'saves' if len(held) == 1 else 'save'} "
                f"{money(float(held.sum()), case.settings.currency)} less than the yearly savings shown (each priced "
                f"alone, in service from the start of {in_service_words(case, result)}; counted in the NPVs and "
                "paybacks within the horizon)", asset_list_text(ids),
                "Tell the approvers that the demand saving shows in full on the bills only once today's peaks leave "
                "the ratchet's look-back; the month the change comes into service moves it (the case setting "
                "in_service_month: a change made just before the month of today's peak holds back least); confirm the "
                "ratchet's terms with the utility.")
    # the assets whose decision stands to gain most from measuring them first (value of information)
    from models.information import measure_first_of

    worth = measure_first_of(case, result)
    worth = worth[worth["asset_id"].isin(list(assets["asset_id"])) & (worth["value_of_measuring"] > 1.0)].head(5)
    if len(worth):
        cur = case.settings.currency
        add("data quality", "Worth measuring before deciding",
            "; ".join(f"{a} up to {money(float(v), cur)}" for a, v in zip(worth["asset_id"], worth["value_of_measuring"]))
            + ": the expected value of knowing their loads and nameplates before deciding (docs/finance.md, section 8), "
            "an upper bound on what logging each is worth", asset_list_text(list(worth["asset_id"])),
            "Log kW, power factor and hours for 1-4 weeks where that costs less than the value shown; the others' "
            "decisions are clear enough as modelled.")
    low = assets[assets["data_quality_pct"] < LOW_DATA_QUALITY_PCT]
    if len(low):
        add("data quality", "Low data-quality score", f"{counted(len(low), 'asset')} below {LOW_DATA_QUALITY_PCT:.0f} % of nameplate fields known",
            asset_list_text(list(low["asset_id"])), "Measure these first: kW, PF, speed and hours over 1-4 weeks.")
    # a site whose demand charge takes shorter windows than its motors' profiles resolve: its demand savings
    # are understated (the case check's warning, carried to the register)
    from models.case import coarse_demand_profiles, demand_window_text

    coarse = coarse_demand_profiles(case.sites, case.assets, getattr(case, "tariffs", {}) or {},
                                    getattr(case, "profile_info", None))
    info = getattr(case, "profile_info", None)
    resolution = (dict(zip(info["profile_id"], info["resolution_min"])) if isinstance(info, pd.DataFrame)
                  and not info.empty else {})
    for site_id, (window, resolutions, n) in sorted(coarse.items()):
        # the in-scope motors of the site whose own profile is coarser than the window (not every motor of it)
        at_site = assets[assets["site_id"].astype(str) == site_id]
        profile = at_site["profile_id"] if "profile_id" in at_site else pd.Series(index=at_site.index, dtype=object)
        coarse_ids = [a_id for a_id, pid in zip(at_site["asset_id"], profile)
                      if isinstance(pid, str) and float(resolution.get(pid, 0) or 0) > window]
        if coarse_ids:
            # counted and resolved as the motors listed: the pack's, not every motor of the site
            own = sorted({int(resolution[pid]) for pid in profile
                          if isinstance(pid, str) and float(resolution.get(pid, 0) or 0) > window})
            words = demand_window_text(window, own, len(coarse_ids),
                                       "of the site in this pack" if len(coarse_ids) < n else "of the site")
            add("data", f"Demand window at site {site_id}", words[:1].upper() + words[1:],
                asset_list_text(coarse_ids),
                f"Give {window}-min profiles (or log the site's demand at {window} min) before relying on the "
                "demand saving; the energy saving is not affected.")
    flags = scope_flags(result, scope.asset_ids)
    if not flags.empty:
        chosen = set(scope.recommended["asset_id"] + "/" + scope.recommended["option_id"])
        relevant = flags[(flags["option_id"] == "") | (flags["asset_id"] + "/" + flags["option_id"]).isin(list(chosen))]
        for (text, no_option), grp in relevant.groupby([relevant["flag"], relevant["option_id"] == ""], sort=True):
            title = text.split(":")[0][:60] if ":" in text else "model note"
            if no_option:  # a note on the asset's data (e.g. no interval data), not on an option
                add("data", title, text, asset_list_text(list(grp["asset_id"])),
                    "Log the load (kW, power factor, running hours) for 1-4 weeks to replace the assumption.")
            else:
                add("engineering flag", title, text, asset_list_text(list(grp["asset_id"])),
                    "Check with the supplier or on site before ordering.")
    u = uncertainty(result, scope)
    if not u.projects.empty and "prob_npv_positive_frac" in u.projects:
        weak = u.projects[u.projects["prob_npv_positive_frac"] < 0.9]
        if len(weak):
            detail = (f"{counted(len(weak), 'project')} of the plan with P(NPV > 0) below 90 % in the plan's Monte Carlo "
                      "(at its plan year, at the value the plan gives it)" if u.of_plan else
                      f"{counted(len(weak), 'recommended project')} with P(NPV > 0) below 90 % in the Monte Carlo")
            add("uncertainty", "NPV may be negative", detail, asset_list_text([p.rsplit("/", 1)[0] for p in weak["project_id"]]),
                "Measure the load and hours before committing; consider replace-at-failure.")
    return pd.DataFrame(rows, columns=["category", "item", "detail", "assets", "response"])


#: The fleet plan's harmonic screen of the last plan asked for (each decision record reads its site's row).
_SCREEN = KeptForLast()


def plan_harmonic_screen(case, result) -> pd.DataFrame:
    """:func:`models.harmonics.site_screen` of the fleet plan, made once per plan frame and case while they live."""
    from models.harmonics import site_screen

    return _SCREEN.get(result.plan, lambda: site_screen(case, result.physics.operation,
                                                         result.plan[["asset_id", "option_id"]]), beside=case)


def harmonic_screen(case, result, scope: Scope | None = None) -> pd.DataFrame:
    """The harmonic screen (:func:`models.harmonics.site_screen`) of the sites of the assets in scope, today and
    with the fleet plan, the scope's recommended projects in place of the plan's on their assets."""
    from models.harmonics import site_screen

    if scope is None:
        return plan_harmonic_screen(case, result)
    projects = result.plan[["asset_id", "option_id"]]
    chosen = scope.chosen[["asset_id", "option_id"]]
    projects = pd.concat([projects[~projects["asset_id"].isin(chosen["asset_id"])], chosen], ignore_index=True)
    sites = set(case.assets.loc[case.assets["asset_id"].isin(list(scope.asset_ids)), "site_id"].astype(str))
    table = site_screen(case, result.physics.operation, projects)
    return table[table["site_id"].isin(sites)].reset_index(drop=True)


def technology_cautions(technology: str, speed_change_rpm: float) -> list[str]:
    """Return the cautions that apply to one option's technology and speed change."""
    out = []
    if technology in ("line_start_pm", "pm_drive"):
        out.append(CAUTIONS[2])
    if technology == "line_start_pm":
        out.append("Line-start PM motors can fail to pull into step under high inertia, heavy start load or a "
                   "voltage dip: confirm the start with the supplier.")
    if technology == "capacitor":
        out.append(CAUTIONS[3])
    if technology == "add_drive":  # the motor's own insulation and bearings: the models' caution, worded for its age
        out.append("Drives inject harmonics: check voltage distortion limits.")
    elif technology in DRIVE_TECHNOLOGIES:
        out.append(CAUTIONS[5])
    if technology == "wound_field":
        out.append("Synchronous motors need loss-of-excitation and pull-out protection, and over-excitation raises "
                   "site voltage: coordinate the reactive export with the utility.")
    if speed_change_rpm > 1.0:
        out.append(f"Runs about {speed_change_rpm:.0f} rpm faster than today: " + CAUTIONS[4])
    return out


# ---------------------------------------------------------------------------------------------------
# Formatting shared by the report and the decision records
# ---------------------------------------------------------------------------------------------------
def money(value: float, currency: str) -> str:
    """Format an amount as every amount of the pack and the dashboard: ``EUR 6,081,596``
    (:func:`models.wording.money_text`)."""
    return money_text(value, currency)


def analysis_year(result) -> int | None:
    """The analysis year: the year of the load data and of the bills priced (None where the run holds no machines)."""
    from models.scenario import analysis_year as year_of

    op = getattr(getattr(result, "physics", None), "operation", None)
    return year_of(op) if op is not None and len(op.index) else None


def prices_year_words(result) -> str:
    """The prices the yearly savings are at, in words: those of the analysis year ("base-year prices" where the
    run holds no machines)."""
    year = analysis_year(result)
    return "base-year prices" if year is None else f"{year} prices (the analysis year's)"


def chance_text(frac: float) -> str:
    """A probability in whole per cent that never rounds a near-certainty to certainty (or a slim chance to nil).

    Examples
    --------
    >>> chance_text(0.996), chance_text(1.0), chance_text(0.004), chance_text(0.0), chance_text(0.874)
    ('> 99 %', '100 %', '< 1 %', '0 %', '87 %')
    """
    if not np.isfinite(frac):
        return "-"
    if 0.99 < frac < 1.0:
        return "> 99 %"
    if 0.0 < frac < 0.01:
        return "< 1 %"
    return f"{100 * frac:.0f} %"


def years_text(value: float, horizon_yr: int, within: bool = False, lost_again: bool = False) -> str:
    """Format a payback [yr]; ``inf`` reads as not within the horizon. With ``within`` the text follows
    "pays back": "in 2.5 yr" or "not within 15 yr". With ``lost_again`` (the cumulative flow ends the horizon
    below zero again, :class:`models.finance.PaybackResult`) a finite payback says so.

    Examples
    --------
    >>> years_text(2.5, 15), years_text(float("inf"), 15), years_text(2.5, 15, within=True)
    ('2.5 yr', 'not within 15 yr', 'in 2.5 yr')
    >>> years_text(2.5, 15, lost_again=True)
    '2.5 yr, then lost again'
    """
    if value is None or np.isnan(value):
        return "-"
    if not np.isfinite(value):
        return f"not within {horizon_yr} yr"
    text = f"in {value:.1f} yr" if within else f"{value:.1f} yr"
    return text + (", then lost again" if lost_again else "")


def rate_text(value: float, status: str = "unique") -> str:
    """Format an IRR or other rate [frac] as percent; missing or infinite rates read as 'none'."""
    if value is None or not np.isfinite(value):
        return "none"
    text = f"{value * 100:.1f} %"
    return text + " (several)" if status == "multiple" else text


def plan_year_names(case, result, n_years: int) -> list[str]:
    """The budget (fiscal) year of each of plan years 0 .. n_years - 1 (:func:`models.finance.budget_year_names` on
    the case's purchase date and the assumptions' ``fiscal_year_start_month``), [] when the case names none."""
    from models.finance import budget_year_names

    return budget_year_names(case.settings.purchase_date, int(getattr(result.assumptions, "fiscal_year_start_month", 0)),
                             n_years)


def plan_year_text(year, names: list[str]) -> str:
    """A plan year as the pack's tables write it: ``"0"``, or ``"0 (FY2028)"`` with its budget year's name.

    >>> plan_year_text(1, ["FY2028", "FY2029"]), plan_year_text(1, []), plan_year_text(3, ["FY2028"])
    ('1 (FY2029)', '1', '3')
    """
    y = int(year)
    return f"{y} ({names[y]})" if 0 <= y < len(names) else str(y)


#: How the pack counts a plan's capital by plan year, in words.
PLAN_SPEND_TEXT = ("Capital is counted in the plan year it is spent, as the budgets count it: a motor replaced when "
                   "it fails is bought in the year it is expected to fail; \"later\" is what is spent after the "
                   "budgeted years (replacements at failure, repeat purchases within the horizon).")


def measures_text(assumptions) -> str:
    """What the pack's money figures are: the payback's definition and, with a tax rate, which figures are after
    tax (NPV, IRR and paybacks) and which before it (the yearly savings)."""
    tax = float(getattr(assumptions, "tax_rate_frac", 0.0) or 0.0)
    if tax > 0:
        return (f"{wording.PAYBACK_TEXT} NPV, IRR and paybacks are after the tax rate of the assumptions "
                f"({100 * tax:.1f} % on the savings, with the depreciation shield); the yearly savings are before tax.")
    return f"{wording.PAYBACK_TEXT} No tax rate is set: every figure is before tax."
