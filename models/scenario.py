"""The one orchestrator: case -> machines -> site meters and bills -> cash flows -> metrics -> plan and risk.

:func:`run` takes a validated case and its finance assumptions and returns a :class:`ScenarioResult`
whose tables carry units in their column names. The physics (operating result and bill savings) is the
slow part and can be computed once and reused with other finance assumptions through
:func:`physics` and :func:`economics`, which is how the dashboard re-prices live.
"""

from __future__ import annotations

import threading
import time
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field, replace
from typing import Callable

import numpy as np
import pandas as pd

from models import cashflows as cf
from models import efficiency_classes, end_of_life, finance, induction, plan, reactive_plan, risk
from models.bill_savings import (RATCHET_YEARS, SAVING_COMPONENTS, BillSavings, SiteSavings, meter_and_bills,
                                 site_setups)
from models.case import usual_supply_hz
from models.memory import retaining_memory
from models.operation import (LOSS_KINDS, PHYSICS_THREADS, MemoryBudgets, OperatingResult, _BlockBuffers, _Merger,
                              _SiteRecompute, default_budgets, kept_rows,
                              options_with_baseline, case_index, interval_bytes, site_blocks, site_case, site_partition)
from models.options import NEW_MACHINE_TECHNOLOGIES, capital_cost
from models.plan import plan_choice, project_labels
from models.regulations import class_rank, minimum_class

#: Technologies that replace today's motor (and so avoid the spend its failure would force).
REPLACING_TECHNOLOGIES = ("rewind", "induction", "line_start_pm", "pm_drive", "reluctance_drive", "wound_field")
#: Life-cycle cost components (``lcc.csv``), in stacking order.
LCC_COMPONENTS = ("capital", "residual", "running", "maintenance", "tax")
#: Technologies added to today's motor, which stays in service (and keeps its own maintenance).
ADD_ON_TECHNOLOGIES = ("add_drive", "capacitor")
#: Planning horizon of the fleet plan when the budget list is empty [yr].
DEFAULT_PLAN_YEARS = 3
#: Downtime cost by criticality when neither the asset nor the finance assumptions give one
#: [currency/h] (common practice placeholders; set real figures per site).
DOWNTIME_COST_BY_CRITICALITY = {"low": 0.0, "medium": 200.0, "high": 2000.0}
#: The simple payback the Monte Carlo counts the chance of reaching [yr]: industrial energy projects are often
#: asked to pay back within about 3 years (common practice, from memory; not a rule of any standard).
PAYBACK_TARGET_YR = 3.0
#: Tornado ranges (low, high) of the one-at-a-time sensitivity (common practice).
TORNADO_RANGES = {
    "energy_price_mult": (0.8, 1.2), "hours_mult": (0.8, 1.1), "load_mult": (0.85, 1.15),
    "capital_mult": (0.9, 1.3), "discount_rate_delta_frac": (-0.02, 0.02), "escalation_delta_frac": (-0.01, 0.01),
    # the new machines' losses from the declared less the tolerance band to the declared plus it
    risk.LOSS_BAND_FACTOR: (-1.0, 1.0),
}


#: The results' break-even columns (:func:`models.risk.break_even_multipliers`): the electricity price multiplier,
#: the running hours a year, the shaft load multiplier and the capital multiplier at which the project's NPV is zero.
BREAK_EVEN_COLUMNS: tuple[str, ...] = ("break_even_price_mult", "break_even_running_h_per_yr", "break_even_load_mult",
                                       "break_even_capital_mult")

#: Progress note of a run with risk once the risk is done and the fleet plan, solved beside it, is not
#: yet: a note on the stage "risk", not a stage of its own.
PLAN_FINISHING = "fleet plan (finishing)"


@dataclass(frozen=True)
class PlanSettings:
    """How hard the exact fleet plan is solved (see :func:`models.plan.plan_exact`).

    Attributes
    ----------
    time_limit_s : float
        Solver time limit [s], > 0.
    gap_frac : float
        Relative gap at which the solver stops [frac], >= 0.
    start : tuple of (str, int)
        A plan to start from: (project label "asset/option", plan start year) pairs, e.g. the plan of
        the assumptions edited just before. It speeds the proof, never loosens it.
    """

    time_limit_s: float = 60.0
    gap_frac: float = 1e-4
    start: tuple[tuple[str, int], ...] = ()


#: The setting of a full run (command line, pack): the solver's own 0.01 % gap, a minute at most.
PRECISE_PLAN = PlanSettings()
#: The setting of a live edit on screen: a 0.1 % gap or 0.05 s, whichever comes first; the plan's
#: status then says how close it is proven (common practice for interactive optimisation).
LIVE_PLAN = PlanSettings(time_limit_s=0.05, gap_frac=1e-3)


@dataclass(frozen=True)
class Physics:
    """The slow, finance-independent part of a run: machines and bill savings."""

    operation: OperatingResult
    savings: BillSavings
    capacitor_cost_per_kvar: float


@dataclass(frozen=True)
class ScenarioResult:
    """Everything a run produces.

    Attributes
    ----------
    physics : Physics
    assumptions : models.finance.FinanceAssumptions
    results : pandas.DataFrame
        One row per applicable asset x option (today's motor included, with zero increments): energy,
        savings by component [currency/yr], capital [currency], NPV, IRR, MIRR, paybacks, LCC, SIR,
        AIRR, EAC, cost of saved energy, CO2, abatement cost, flags.
    cashflows : pandas.DataFrame
        asset_id, option_id, year, component, amount [currency] (non-zero rows).
    lcc : pandas.DataFrame
        asset_id, option_id, component, pv [currency]: life-cycle cost stacked by component.
    plan : pandas.DataFrame
        The exact plan: asset_id, option_id, start_year, capital, npv.
    plan_greedy : pandas.DataFrame
        The rank-by-profitability-index plan, same columns.
    plan_comparison : pandas.Series
        Exact vs greedy totals and the shortfall.
    abatement : pandas.DataFrame
        Marginal abatement cost curve data (one best option per asset).
    end_of_life : pandas.DataFrame
        Expected PV cost of replace-now / replace-at-failure / rewind-at-failure per asset.
    fleet_rules : pandas.DataFrame
        Repair-or-replace policy rows in plain words.
    tornado : pandas.DataFrame
        One-at-a-time sensitivity of the fleet NPV of the best options.
    risk : pandas.DataFrame
        Monte Carlo summary per project (P10/P50/P90 of NPV and payback, P(NPV > 0)).
    bills : pandas.DataFrame
        site_id, month, scenario (baseline or plan), line_item, amount [currency].
    plan_status : dict
        How far the exact plan is proven: ``status`` ("optimal", "time_limit", "unconstrained", "empty"
        or "failed", see :class:`models.plan.FleetPlan`; or "kept", a live budget edit's plan kept from the
        edit before, :func:`_kept_if_better`), ``message`` (plain words), ``gap_frac``
        (proven relative gap to the best possible plan NPV [frac]; NaN when unknown), ``settings``
        (:class:`PlanSettings` used).
    fleet_npv_draws : numpy.ndarray
        Monte Carlo: the fleet NPV of the best option of every asset, one value per draw [currency],
        shape (n_draws,); empty without risk.
    plan_tornado : pandas.DataFrame
        One-at-a-time sensitivity of the exact plan's NPV at the plan's start (the columns of
        ``tornado``); empty without risk or without a plan.
    plan_risk : pandas.DataFrame
        Monte Carlo summary per project of the exact plan (the columns of ``risk`` and ``start_yr``, the
        NPVs at each project's own start with the plan's correction of its value).
    plan_npv_draws : numpy.ndarray
        Monte Carlo: the exact plan's NPV at its start, one value per draw [currency], shape (n_draws,),
        the same draws as ``fleet_npv_draws``; empty without risk or without a plan.
    capital_spend_by_year : numpy.ndarray
        Capital of each row of ``results`` by year after its start [currency], shape (n_rows, horizon + 1),
        what a new budget needs to plan again.
    bill_saving_pv : numpy.ndarray
        Present value of each row's bill savings (energy, demand, reactive and fixed charges, after tax on
        them) [currency], shape (n_rows,): what the plan takes off a reactive project's NPV for the share
        of its saving the rest of the plan already takes (:mod:`models.reactive_plan`).
    cash_flows : models.cashflows.CashFlows or None
        The rows' cash flows by component, what the Monte Carlo re-prices.
    loss_band : models.cashflows.ProjectInputs or None
        Per row, the energy savings its new machine would lose a year at the top of its efficiency's
        tolerance band (and the base case's must-spend machine likewise), with the row's timing: the
        Monte Carlo's flow for ``loss_band_delta_frac`` (:func:`_loss_band_cost_per_yr`).
    """

    physics: Physics
    assumptions: finance.FinanceAssumptions
    results: pd.DataFrame
    cashflows: pd.DataFrame
    lcc: pd.DataFrame
    plan: pd.DataFrame
    plan_greedy: pd.DataFrame
    plan_comparison: pd.Series
    abatement: pd.DataFrame
    end_of_life: pd.DataFrame
    fleet_rules: pd.DataFrame
    tornado: pd.DataFrame
    risk: pd.DataFrame
    bills: pd.DataFrame
    plan_status: dict = field(default_factory=dict)
    fleet_npv_draws: np.ndarray = field(default_factory=lambda: np.zeros(0), repr=False)
    capital_spend_by_year: np.ndarray | None = field(default=None, repr=False)
    bill_saving_pv: np.ndarray | None = field(default=None, repr=False)
    plan_tornado: pd.DataFrame = field(default_factory=pd.DataFrame, repr=False)
    plan_risk: pd.DataFrame = field(default_factory=pd.DataFrame, repr=False)
    plan_npv_draws: np.ndarray = field(default_factory=lambda: np.zeros(0), repr=False)
    cash_flows: cf.CashFlows | None = field(default=None, repr=False)
    loss_band: cf.ProjectInputs | None = field(default=None, repr=False)


def site_physics(case, index: pd.DatetimeIndex, capacitor_cost_per_kvar: float, chunk_assets: int | None = None,
                 timer: dict | None = None, today_only: bool = False,
                 into: tuple | None = None, buffers=None, books: list | None = None,
                 curve_elements: int | None = None) -> tuple[OperatingResult | None, dict]:
    """Machines and bill savings of a one-site case (:func:`models.operation.site_case`).

    Parameters
    ----------
    case : models.case.Case
        One site's case.
    index : pandas.DatetimeIndex
        The whole case's analysis index (:func:`models.operation.case_index`).
    capacitor_cost_per_kvar : float
        Installed cost of a capacitor bank [currency/kVAr].
    chunk_assets : int, optional
        Block size of the machine models [assets] (:func:`models.operation.asset_blocks`).
    timer : dict, optional
        Wall time is added under ``"machines"`` and ``"site bills"`` [s].
    today_only : bool
        Return today's motors only in the per-interval arrays (shape (1, n, n_steps)); what a fleet too
        large to keep every option per interval needs, and a smaller message from a worker.
    into : (merger, numpy.ndarray), optional
        A fleet's gatherer and the fleet positions of this site's assets: each block goes straight into
        the fleet's arrays (no site-sized copy in between) and the operating result returned is None.
    buffers : models.operation._BlockBuffers, optional
        Block memory to reuse (e.g. from the previous site of the same thread); default fresh.
    books : list, optional
        Each block's curve book is appended to it as (site-local rows, ``CurveBook.arrays()``), for a
        caller that keeps them elsewhere (:meth:`models.operation._SiteRecompute.keep_arrays`).
    curve_elements : int, optional
        Asset-steps of a block that keeps its options as curve tables (default
        :data:`models.operation.CURVE_CHUNK_ELEMENTS`; :attr:`models.operation.MemoryBudgets.curve_chunk_elements`).

    Returns
    -------
    (OperatingResult or None, dict)
        The site's operating result and its :func:`models.bill_savings.site_savings` arrays.
    """
    t_machines = t_bills = 0.0
    t0 = time.perf_counter()
    site_id = str(case.assets["site_id"].iloc[0])
    setup = site_setups(case, index)[site_id]
    merger, positions = into if into is not None else (_Merger(len(case.assets), len(index), dense=not today_only), None)
    # today's motors straight into the fleet's rows when the site's positions are consecutive
    today_out = merger.today_rows(positions, len(options_with_baseline(case.options))) if positions is not None else None
    acc = None
    for rows, block, totals in site_blocks(case, index, chunk_assets, today_out=today_out, curves=True,
                                           buffers=buffers, curve_elements=curve_elements):
        t1 = time.perf_counter()
        t_machines += t1 - t0
        if acc is None:
            acc = SiteSavings(setup, index, block.interval_h, totals[0], totals[1], len(case.assets), block.technologies)
        acc.add(rows, block.p_kw, block.q_kvar, block.applies, block.curves)
        merger.add(rows if positions is None else positions[rows], block)
        if merger.recompute is not None and block.curves is not None:  # read again by the plan, not recomputed
            merger.recompute.keep_book(site_id, rows, block.curves)
        if books is not None and block.curves is not None:
            books.append((np.asarray(rows, dtype=np.intp), block.curves.arrays()))
        del block
        t0 = time.perf_counter()
        t_bills += t0 - t1
    op = merger.result() if into is None else None
    part = acc.result(capacitor_cost_per_kvar)
    t_bills += time.perf_counter() - t0
    if timer is not None:
        timer["machines"] = timer.get("machines", 0.0) + t_machines
        timer["site bills"] = timer.get("site bills", 0.0) + t_bills
    return op, part


class PhysicsMerger:
    """Gathers the per-site physics (any order) into one :class:`Physics` in the asset register's order.

    Memory: one site's dense arrays at a time, plus the fleet's per-interval arrays when they fit
    the dense budget (else today's motors only, the other options being recomputed by site when indexed;
    see :class:`models.operation.SiteIntervalStore`), within ``budgets`` (default
    :func:`models.operation.default_budgets`).
    """

    def __init__(self, case, index: pd.DatetimeIndex, capacitor_cost_per_kvar: float, chunk_assets: int | None = None,
                 dense: bool | None = None, budgets: MemoryBudgets | None = None):
        self.case, self.index, self.cost = case, index, float(capacitor_cost_per_kvar)
        self.budgets = budgets = default_budgets() if budgets is None else budgets
        self.partition = site_partition(case)
        n_a, n_o = len(case.assets), len(options_with_baseline(case.options))
        if dense is None:
            dense = interval_bytes(n_a, n_o, len(index)) <= budgets.dense_bytes
        recompute = None if dense else _SiteRecompute(case, index, chunk_assets, budgets.kept_books_bytes,
                                                      budgets.kept_rows_bytes)
        self.ops = _Merger(n_a, len(index), dense=dense, recompute=recompute,
                           today_in_memory_bytes=budgets.today_in_memory_bytes)
        self.arrays = {"saving": np.zeros((n_a, n_o, len(SAVING_COMPONENTS))), "reactive_saving": np.zeros((n_a, n_o)),
                       "equivalent_bank_q_kvar": np.full((n_a, n_o), np.nan),
                       "equivalent_bank_cost": np.full((n_a, n_o), np.nan),
                       "ratchet_shortfall": np.zeros((n_a, n_o, RATCHET_YEARS, len(SAVING_COMPONENTS)))}
        self.rows = dict(self.partition)

    def add(self, site_id: str, op: OperatingResult | None, part: dict) -> None:
        """Take a site's results (``op`` None when :func:`site_physics` wrote into :attr:`ops` itself)."""
        rows = self.rows[site_id]
        if op is not None:
            self.ops.add(rows, op)
        for name, values in part.items():
            self.arrays[name][rows] = values

    def result(self) -> Physics:
        op = self.ops.result()
        _, baseline_bills = meter_and_bills(self.case, op, np.zeros(len(op.asset_ids), dtype=int))
        a = self.arrays
        savings = BillSavings(SAVING_COMPONENTS, a["saving"], a["reactive_saving"], a["equivalent_bank_q_kvar"],
                              a["equivalent_bank_cost"], baseline_bills, a["ratchet_shortfall"])
        return Physics(op, savings, self.cost)


@retaining_memory
def physics(case, capacitor_cost_per_kvar: float, progress: Callable[[str], None] | None = None, *,
            chunk_assets: int | None = None, dense: bool | None = None, timer: dict | None = None,
            threads: int | None = None, budgets: MemoryBudgets | None = None) -> Physics:
    """Run the machines on every option and price each asset-option on its site's bill.

    Parameters
    ----------
    case : models.case.Case
    capacitor_cost_per_kvar : float
        Installed cost of a capacitor bank [currency/kVAr].
    progress : callable, optional
        Called with "machines", then "site bills" once the first site reaches its bills (the two run
        site by site, interleaved).
    chunk_assets : int, optional
        Block size of the machine models [assets]; default from :data:`models.operation.CHUNK_ELEMENTS`.
    dense : bool, optional
        Keep every option's per-interval power (see :func:`models.operation.operate`).
    timer : dict, optional
        Wall time of the machines and of the site bills is added under those names [s]; with several
        threads each stage's share of the physics' wall time.
    threads : int, optional
        Sites worked at once in this process (default :data:`PHYSICS_THREADS`, at most the number of
        sites); the array work releases the interpreter lock, so two threads use two cores.
    budgets : models.operation.MemoryBudgets, optional
        What the run keeps in memory (default :func:`models.operation.default_budgets`).

    Notes
    -----
    Site by site (:func:`site_physics`): a site's meter and tariff are independent of the others', so
    memory holds one site's per-option arrays per thread at a time, and the Dask engine
    (:mod:`models.distributed`) runs the same function per site on its workers. Sites write disjoint
    rows and are gathered in register order, so the result does not depend on the number of threads.
    """
    step = progress or (lambda _msg: None)
    step("machines")
    index = case_index(case)
    merger = PhysicsMerger(case, index, capacitor_cost_per_kvar, chunk_assets, dense, budgets)
    n_threads = max(1, min(int(threads or PHYSICS_THREADS), len(merger.partition)))
    gather = _LockedGather(merger.ops)
    t0 = time.perf_counter()
    stage_times: list[dict] = []

    per_thread = threading.local()  # each thread's block memory, reused from site to site during this run

    def one_site(site_id: str) -> dict:
        site_timer: dict = {}
        if getattr(per_thread, "buffers", None) is None:
            per_thread.buffers = _BlockBuffers()
        _, part = site_physics(site_case(case, site_id), index, capacitor_cost_per_kvar, chunk_assets, site_timer,
                               not merger.ops.dense, into=(gather, np.asarray(merger.rows[site_id])),
                               buffers=per_thread.buffers, curve_elements=merger.budgets.curve_chunk_elements)
        stage_times.append(site_timer)
        return part

    if n_threads == 1:
        for k, (site_id, _) in enumerate(merger.partition):
            part = one_site(site_id)
            if k == 0:
                step("site bills")
            merger.add(site_id, None, part)
    else:
        with ThreadPoolExecutor(max_workers=n_threads, thread_name_prefix="drivecase-site") as pool:
            futures = [(site_id, pool.submit(one_site, site_id)) for site_id, _ in merger.partition]
            for k, (site_id, future) in enumerate(futures):  # gathered in register order
                part = future.result()
                if k == 0:
                    step("site bills")
                merger.add(site_id, None, part)
    if timer is not None:
        _add_stage_times(timer, stage_times, time.perf_counter() - t0, n_threads)
    return merger.result()


class _LockedGather:
    """The fleet's gatherer shared by site threads: one block is added at a time."""

    def __init__(self, merger):
        self.merger, self.lock = merger, threading.Lock()

    def add(self, rows, block) -> None:
        with self.lock:
            self.merger.add(rows, block)

    def today_rows(self, rows, n_options: int):
        """:meth:`models.operation._Merger.today_rows` (the views are written by the site's thread alone)."""
        with self.lock:
            return self.merger.today_rows(rows, n_options)

    @property
    def recompute(self):
        """The gatherer's recomputation of other options (None for a dense fleet); it keeps its own lock."""
        return self.merger.recompute


def _add_stage_times(timer: dict, stage_times: list[dict], wall_s: float, n_threads: int) -> None:
    """Add each stage's time to ``timer``: as measured with one thread, else its share of the wall time."""
    total = {name: sum(t.get(name, 0.0) for t in stage_times) for name in ("machines", "site bills")}
    busy = sum(total.values())
    for name, value in total.items():
        share = value if n_threads == 1 or busy <= 0 else wall_s * value / busy
        timer[name] = timer.get(name, 0.0) + share


# ---------------------------------------------------------------------------------------------------
# Projects
# ---------------------------------------------------------------------------------------------------
def analysis_year(op: OperatingResult) -> int:
    """The analysis year of a run's machines: the year of its load data and of the bills priced."""
    return int(op.index[len(op.index) // 2].year)


def _must_spend(case, options: pd.DataFrame, capital_total: np.ndarray, applies: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Capital that must be spent anyway when today's motor fails: the cheaper of a rewind and the
    cheapest new induction motor the regional rules allow. Returns (capex, life_yr, option position)."""
    a = case.assets
    tech = options["technology"].to_numpy(dtype=object)
    min_class = minimum_class(case.settings.region, a["rated_p_kw"].to_numpy(dtype=float), a["poles"].to_numpy(dtype=float),
                              case.settings.purchase_date, a["rated_v_v"].to_numpy(dtype=float))
    allowed_new = (tech[None, :] == "induction") & (class_rank(options["efficiency_class"].to_numpy(dtype=object))[None, :]
                                                     >= class_rank(min_class)[:, None])
    allowed = applies & (allowed_new | (tech[None, :] == "rewind"))
    cost = np.where(allowed, capital_total, np.inf)
    pos = np.argmin(cost, axis=1)
    capex = cost[np.arange(len(a)), pos]
    capex = np.where(np.isfinite(capex), capex, 0.0)
    life = options["life_yr"].to_numpy(dtype=float)[pos]
    return capex, life, pos


def _maintenance_per_yr(options: pd.DataFrame, rated_p_kw: np.ndarray) -> np.ndarray:
    """Yearly maintenance of every asset under every option [currency/yr], (n_assets, n_options).

    The catalogue's ``maintenance_cost_per_kw_yr`` times the rating; an add-on (a drive or a capacitor added
    to today's motor, :data:`ADD_ON_TECHNOLOGIES`) is maintained on top of today's motor, which stays in
    service, so today's maintenance (the first option's) is added to its own.
    """
    maint = options["maintenance_cost_per_kw_yr"].to_numpy(dtype=float)[None, :] * rated_p_kw[:, None]
    add_on = np.isin(options["technology"].to_numpy(dtype=object), ADD_ON_TECHNOLOGIES)
    maint[:, add_on] += maint[:, [0]]
    return maint


def failed_assets(assets: pd.DataFrame) -> np.ndarray:
    """True where the asset register says the motor has failed and is out of service (its optional ``failed``
    column; blank or absent = running), one per row of ``assets``."""
    if "failed" not in assets:
        return np.zeros(len(assets), dtype=bool)
    return assets["failed"].map(lambda v: v is True or v == 1).to_numpy(dtype=bool)


def least_repair(results: pd.DataFrame, asset_id: str) -> pd.Series | None:
    """The result row of the least that puts an asset's motor back in service (the must-spend option its
    replacing options name in ``must_spend_option_id``), or None where none is named."""
    rows = results[results["asset_id"].astype(str) == str(asset_id)]
    named = [m for m in rows.get("must_spend_option_id", pd.Series(dtype=object)) if isinstance(m, str) and m]
    hit = rows[rows["option_id"].astype(str) == named[0]] if named else rows.iloc[0:0]
    return hit.iloc[0] if len(hit) else None


def _remaining_life(case, year: int) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Age, Weibull parameters and mean residual life of today's motors (0 for a motor that has failed: the
    spend its failure forces falls now)."""
    a = case.assets
    rated = a["rated_p_kw"].to_numpy(dtype=float)
    shape, scale = end_of_life.life_class_parameters(rated)
    installed = a["year_installed"].to_numpy(dtype=float)
    # unknown year: assume the motor is at half its characteristic life (common practice placeholder)
    age = np.where(np.isnan(installed), 0.5 * scale, np.maximum(year - installed, 0.0))
    # each rewind shortens the expected life (repaired motors fail sooner; common practice: 10 % per rewind)
    scale_eff = scale * (end_of_life.LIFE_KEPT_PER_REWIND_FRAC ** a["rewind_count"].to_numpy(dtype=float))
    residual = end_of_life.mean_residual_life_yr(age, shape, scale_eff)
    return age, shape, scale_eff, np.where(failed_assets(a), 0.0, residual)


@retaining_memory
def economics(case, phys: Physics, assumptions: finance.FinanceAssumptions,
              progress: Callable[[str], None] | None = None, with_risk: bool = True,
              plan_settings: PlanSettings = PRECISE_PLAN, previous: ScenarioResult | None = None,
              timer: dict | None = None) -> ScenarioResult:
    """Turn the physics into cash flows, metrics, the fleet plan, end-of-life strategy and risk.

    ``plan_settings`` bounds the exact plan's solve (:data:`PRECISE_PLAN` by default, :data:`LIVE_PLAN`
    for a screen that must answer an edit at once); ``plan_status`` of the result says what was proven.
    ``previous`` is a result of the same physics: when the assumptions differ from its own only in the
    budget, everything but the plan and the bills is taken from it (the budget moves nothing else).

    With ``with_risk`` the fleet plan is solved in a second thread while the end-of-life strategy and
    the risk run (none of them reads another's results, and the solver releases the interpreter lock),
    so the progress reports "fleet plan", "end of life" and "risk" as each starts, then
    :data:`PLAN_FINISHING` while it waits for the plan (a note, not a stage of its own), then "bills" once
    the plan is ready; ``timer`` (optional) receives each one's own wall time under those names [s].
    """
    step = progress or (lambda _msg: None)
    if _only_budget_differs(previous, phys, assumptions, with_risk):
        return _replan(case, previous, assumptions, plan_settings, step)
    op, sav = phys.operation, phys.savings
    a = case.assets
    options = _options_in_order(case, op)
    n_a, n_o = len(op.asset_ids), len(op.option_ids)
    d = float(assumptions.discount_rate_frac)
    horizon = int(assumptions.horizon_yr)
    year = analysis_year(op)
    rated = a["rated_p_kw"].to_numpy(dtype=float)

    sav = _at_price_levels(sav, float(assumptions.energy_price_factor), float(assumptions.capital_cost_factor),
                           case.settings.currency)
    step("cash flows")
    capex = capital_cost(options, rated, op.capacitor_q_kvar)
    if assumptions.capital_cost_factor != 1.0:
        capex = replace(capex, amount=capex.amount * float(assumptions.capital_cost_factor))
    comp = {name: capex.amount[..., k] for k, name in enumerate(capex.components)}
    must_capex, must_life, must_pos = _must_spend(case, options, capex.total, op.applies)
    age, shape, scale, residual_life = _remaining_life(case, year)
    maint = _maintenance_per_yr(options, rated)
    maint_saving = maint[:, [0]] - maint
    midlife_base = np.where(comp["drive"] > 0, comp["drive"], comp["equipment"])
    midlife = options["midlife_cost_frac"].to_numpy(dtype=float)[None, :] * midlife_base
    midyear = np.broadcast_to(options["midlife_year"].to_numpy(dtype=float)[None, :], (n_a, n_o))
    life = np.broadcast_to(options["life_yr"].to_numpy(dtype=float)[None, :], (n_a, n_o))
    energy_saved = op.energy_kwh[:, [0]] - op.energy_kwh

    rows, cols = np.nonzero(op.applies)
    project_ids = np.array([f"{op.asset_ids[i]}/{op.option_ids[o]}" for i, o in zip(rows, cols)], dtype=object)
    is_keep = cols == 0
    # only options that replace today's motor avoid the spend its failure would force; a drive or a
    # capacitor added to the running motor leaves that spend where it was (it cancels out)
    replaces = np.isin(op.technologies[cols], REPLACING_TECHNOLOGIES)
    # a motor that has failed: an option that replaces it saves over the least that puts it back in service
    # (the must-spend item), as its cash flows count from year 1; that item itself saves nothing over itself
    failed_rows = failed_assets(a)[rows]
    over_least = failed_rows & replaces & (must_capex[rows] > 0)
    least_pos = must_pos[rows]
    is_least = over_least & (cols == least_pos)
    saving_rc = sav.saving[rows, cols, :] - np.where(over_least[:, None], sav.saving[rows, least_pos, :], 0.0)
    maint_rc = maint_saving[rows, cols] - np.where(over_least, maint_saving[rows, least_pos], 0.0)
    energy_rc = energy_saved[rows, cols] - np.where(over_least, energy_saved[rows, least_pos], 0.0)
    short = sav.shortfall  # (asset, option, year in service, component)
    short_rc = short[rows, cols] - np.where(over_least[:, None, None], short[rows, least_pos], 0.0)
    no_maintenance = np.zeros(short.shape[2:3] + (1,))  # (the ratchet moves bills only)
    inputs = cf.ProjectInputs(
        project_id=project_ids,
        capex_equipment=(comp["equipment"] + comp["remedy"] + comp["capacitor"])[rows, cols],
        capex_drive=comp["drive"][rows, cols],
        capex_installation=comp["installation"][rows, cols],
        capex_engineering=comp["engineering"][rows, cols],
        capex_contingency=comp["contingency"][rows, cols],
        savings_energy_per_yr=sav.saving[rows, cols, 0],
        savings_demand_per_yr=sav.saving[rows, cols, 1],
        savings_reactive_per_yr=sav.saving[rows, cols, 2],
        savings_fixed_per_yr=sav.saving[rows, cols, 3],
        savings_maintenance_per_yr=maint_saving[rows, cols],
        energy_saved_kwh_per_yr=energy_rc,
        option_life_yr=life[rows, cols],
        baseline_capex=np.where(replaces, must_capex[rows], 0.0),
        baseline_life_yr=must_life[rows],
        existing_remaining_life_yr=np.where(replaces, residual_life[rows], np.inf),
        midlife_cost=midlife[rows, cols],
        midlife_year_yr=midyear[rows, cols],
        # a drive or a capacitor added to the running motor does not wait for it to fail: with replacement at
        # failure, only the options that replace today's motor are bought then
        replace_at_failure=replaces & (assumptions.replacement_mode == "replace_at_failure"),
        # from the failure on, the base case runs the must-spend item (a rewound or a new motor), whose own
        # savings against today's motor are no longer the option's to claim
        baseline_savings_per_yr=np.where(
            (replaces & (must_capex[rows] > 0))[:, None],
            np.column_stack([sav.saving[rows, must_pos[rows], k] for k in range(4)] + [maint_saving[rows, must_pos[rows]]]),
            0.0),
        # a demand ratchet still bills today's peaks in the first year after a change (the option's, and the
        # must-spend item's in the base case)
        ratchet_shortfall=np.concatenate([short[rows, cols], np.broadcast_to(no_maintenance, (len(rows),) + no_maintenance.shape)],
                                         axis=2),
        baseline_ratchet_shortfall=np.where(
            (replaces & (must_capex[rows] > 0))[:, None, None],
            np.concatenate([short[rows, must_pos[rows]],
                            np.broadcast_to(no_maintenance, (len(rows),) + no_maintenance.shape)], axis=2), 0.0),
    )
    flows = cf.build_cash_flows(inputs, assumptions)
    band_cost = _loss_band_cost_per_yr(op, sav, rated, energy_saved)
    loss_band = cf.ProjectInputs(
        project_id=project_ids, option_life_yr=inputs.option_life_yr,
        baseline_life_yr=inputs.baseline_life_yr, existing_remaining_life_yr=inputs.existing_remaining_life_yr,
        replace_at_failure=inputs.replace_at_failure,
        # the option's machine at the top of its band (as the savings: the option's own against today's motor)
        savings_energy_per_yr=np.where(is_keep | is_least, 0.0, -band_cost[rows, cols]),
        # from the failure on (at once for a motor that has failed), the base case's must-spend item, a new
        # machine too, at the top of its own band
        baseline_savings_per_yr=np.column_stack(
            [np.where(replaces & (must_capex[rows] > 0) & ~(is_keep | is_least), -band_cost[rows, must_pos[rows]], 0.0)]
            + [np.zeros(len(rows))] * (len(cf.SAVINGS_COMPONENTS) - 1)))
    # today's motor is the reference: its increment is zero by definition (as is the least that puts a failed
    # motor back in service, over itself: its flows cancel to rounding)
    amounts = flows.amounts.copy()
    amounts[is_keep | is_least] = 0.0
    flows = replace(flows, amounts=amounts)
    net = flows.net()

    step("metrics")
    npv_v = finance.npv(net, d)
    irr_res = finance.irr(net)
    mirr_v = finance.mirr(net, d, d)
    # the paybacks leave out the value the option still has at the horizon's end (a book value, not cash), so
    # that a shorter study does not shorten them
    paying = net - flows.component("residual")
    simple = finance.simple_payback(paying)
    disc = finance.discounted_payback(paying, d)
    savings_flows, investment_flows = flows.savings_and_investment()
    sir = finance.savings_to_investment_ratio(savings_flows, investment_flows, d)
    # no adjusted rate where the savings' present value is not positive (the formula's -100 % means nothing)
    airr = np.where(np.asarray(sir, dtype=float) > 0.0, finance.airr(sir, d, horizon), np.nan)
    capital_spend = flows.capital_spend_by_year()
    bill_pv = ((flows.sum_of(reactive_plan.BILL_SAVING_COMPONENTS) * finance.discount_factors(d, horizon)[None, :])
               .sum(axis=1) * (1.0 - float(assumptions.tax_rate_frac)))
    capital_pv = (capital_spend * finance.discount_factors(d, horizon)[None, :]).sum(axis=1)
    co2_by_year = finance.co2_avoided_t(energy_rc, assumptions.grid_co2_kg_per_kwh,
                                        assumptions.grid_co2_decline_frac, horizon)
    co2_by_year = np.asarray(co2_by_year, dtype=float).reshape(len(rows), -1)
    abatement = np.where(np.abs(energy_rc) > 1e-9,
                         finance.abatement_cost_per_t(npv_v, co2_by_year, d), np.nan)
    cse = np.where(energy_rc > 1e-9,
                   finance.cost_of_saved_energy_per_mwh(np.maximum(capital_pv, 0.0),
                                                        np.maximum(energy_rc, 1e-9) / 1000.0, d, horizon),
                   np.nan)
    lcc_frame, lcc_total = _life_cycle_costs(case, op, sav, flows, rows, cols, d, horizon, maint, project_ids, assumptions)
    eac = finance.equivalent_annual_cost(lcc_total, d, horizon)
    flag_text = _flags_by_project(op, rows, cols)
    results = pd.DataFrame({
        "asset_id": op.asset_ids[rows], "site_id": op.site_ids[rows], "option_id": op.option_ids[cols],
        "technology": op.technologies[cols], "label": options["label"].to_numpy(dtype=object)[cols],
        "rated_p_kw": rated[rows], "running_h_per_yr": op.running_h[rows],
        "energy_kwh_per_yr": op.energy_kwh[rows, cols], "energy_saved_kwh_per_yr": energy_rc,
        "mean_speed_rpm": op.mean_speed_rpm[rows, cols],
        "saving_energy_per_yr": saving_rc[:, 0], "saving_demand_per_yr": saving_rc[:, 1],
        "saving_reactive_per_yr": saving_rc[:, 2], "saving_fixed_per_yr": saving_rc[:, 3],
        "saving_maintenance_per_yr": maint_rc,
        "bill_saving_per_yr": np.where(over_least, saving_rc.sum(axis=1), sav.total[rows, cols]),
        "ratchet_shortfall": np.where(over_least, short_rc.sum(axis=(1, 2)), short[rows, cols].sum(axis=(1, 2))) + 0.0,
        "capital": np.where(is_keep, 0.0, capex.total[rows, cols]),
        "must_spend_capital": np.where(replaces, must_capex[rows], 0.0),
        "must_spend_option_id": pd.array(np.where(replaces & (must_capex[rows] > 0), op.option_ids[must_pos[rows]],
                                                  "").astype(str), dtype="str"),
        "existing_remaining_life_yr": residual_life[rows],
        "npv": npv_v, "irr_frac": np.asarray(irr_res.irr_frac, dtype=float), "irr_status": np.asarray(irr_res.status),
        "mirr_frac": mirr_v,
        "simple_payback_yr": np.asarray(simple.payback_yr, dtype=float),
        "discounted_payback_yr": np.asarray(disc.payback_yr, dtype=float),
        "payback_within_horizon": np.asarray(disc.within_horizon, dtype=bool),
        "simple_payback_lost_again": np.asarray(simple.lost_again, dtype=bool),
        "discounted_payback_lost_again": np.asarray(disc.lost_again, dtype=bool),
        "life_cycle_cost": lcc_total, "equivalent_annual_cost": eac,
        "sir": sir, "airr_frac": airr,
        "profitability_index": np.where(capital_pv > 0, npv_v / np.where(capital_pv > 0, capital_pv, 1.0), np.nan),
        "cost_of_saved_energy_per_mwh": cse,
        "co2_avoided_t_per_yr": co2_by_year[:, 1] if co2_by_year.shape[1] > 1 else 0.0,
        "abatement_cost_per_t": abatement,
        "equivalent_capacitor_q_kvar": sav.equivalent_bank_q_kvar[rows, cols],
        "equivalent_capacitor_cost": sav.equivalent_bank_cost[rows, cols],
        "capacitor_q_kvar": op.capacitor_q_kvar[rows, cols],
        "flags": flag_text,
        "failed": failed_assets(a)[rows],
    })
    nothing = is_keep | is_least  # nothing invested over the reference
    results.loc[nothing, ["irr_frac", "mirr_frac", "sir", "airr_frac", "profitability_index"]] = np.nan
    results.loc[nothing, "irr_status"] = "none"
    # keeping today's motor invests nothing: no payback to state (blank), and none within the horizon
    results.loc[nothing, ["simple_payback_yr", "discounted_payback_yr"]] = np.nan
    results.loc[nothing, ["payback_within_horizon", "simple_payback_lost_again", "discounted_payback_lost_again"]] = False
    # where each project's NPV crosses zero, each factor alone (the re-pricing the tornado and the Monte Carlo use)
    even = risk.break_even_multipliers(flows.amounts, flows.component_names, risk.default_response(assumptions), d,
                                       tax_rate_frac=assumptions.tax_rate_frac)
    results["break_even_price_mult"] = even["energy_price_mult"]
    hours = even["hours_mult"] * op.running_h[rows]  # (more hours than the analysis year holds: none within reach)
    results["break_even_running_h_per_yr"] = np.where(hours <= len(op.index) * op.interval_h, hours, np.nan)
    results["break_even_load_mult"] = even["load_mult"]
    results["break_even_capital_mult"] = even["capital_mult"]
    results.loc[nothing, list(BREAK_EVEN_COLUMNS)] = np.nan
    results["best_for_asset"] = _best_flags(results, str(op.option_ids[0]))
    cash = flows.to_frame(drop_zero=True)
    code = cash["project"].cat.codes.to_numpy()  # the project's row in rows/cols (no text splitting)
    # labels made once per project and gathered per row (a text array of every row costs ten times more)
    cash = pd.DataFrame({"asset_id": pd.array(op.asset_ids[rows].astype(str), dtype="str").take(code),
                         "option_id": pd.array(op.option_ids[cols].astype(str), dtype="str").take(code),
                         "year": cash["year"].astype(int), "component": cash["component"], "amount": cash["amount"]})

    own = timer if timer is not None else {}

    def timed(name: str, work: Callable, *args):
        t0 = time.perf_counter()
        try:
            return work(*args)
        finally:
            own[name] = own.get(name, 0.0) + time.perf_counter() - t0

    def plan_now():
        return timed("fleet plan", _plan_with_interactions, case, op, results, capital_spend, project_ids, assumptions, d,
                     plan_settings, bill_pv)

    def eol_now():
        return (_end_of_life(case, op, sav, options, capex.total, age, shape, scale, assumptions, d, horizon),
                _fleet_rules(case, options, assumptions, d, horizon, sav, op))

    step("fleet plan")
    tornado_rows = pd.DataFrame()
    risk_rows = pd.DataFrame()
    fleet_draws = np.zeros(0)
    # the plan's check of its reactive projects and the plan's bills read the same rows: recomputed once
    with kept_rows(op):
        if with_risk:  # the plan beside the end of life and the risk, which do not read it
            pool = ThreadPoolExecutor(max_workers=1, thread_name_prefix="drivecase-plan")
            try:
                planned = pool.submit(plan_now)
                step("end of life")
                eol, rules = timed("end of life", eol_now)
                step("risk")
                tornado_rows, risk_rows, fleet_draws, drawn = timed("risk", _risk, flows, assumptions, results, d,
                                                                    loss_band)
                step(PLAN_FINISHING)  # what a long run is waiting for once the risk is done
                plan_frames = planned.result()
            except KeyboardInterrupt:
                # (Ctrl+C: the user is not kept waiting for the solver's search, which cannot be stopped and whose
                # result would be thrown away; the command's process leaves without it)
                pool.shutdown(wait=False, cancel_futures=True)
                raise
            except BaseException:
                pool.shutdown(wait=True)  # (an error beside the plan waits for it, so nothing reads the rows after)
                raise
            pool.shutdown(wait=True)
            plan_risk = timed("risk", _plan_risk, flows, assumptions, results, plan_frames[0], d, drawn, bill_pv,
                              loss_band)
            del drawn  # the best projects' draws: read by the plan's Monte Carlo only
        else:
            plan_frames = plan_now()
            step("end of life")
            eol, rules = timed("end of life", eol_now)
            plan_risk = (pd.DataFrame(), pd.DataFrame(), np.zeros(0))

        step("bills")
        bills = timed("bills", _bills, case, op, plan_frames[0], sav.baseline_bills,
                      float(assumptions.energy_price_factor))
    return ScenarioResult(phys, assumptions, results, cash, lcc_frame, plan_frames[0], plan_frames[1], plan_frames[2],
                          plan_frames[3], eol, rules, tornado_rows, risk_rows, bills, plan_frames[4], fleet_draws,
                          capital_spend, bill_pv, *plan_risk, cash_flows=flows, loss_band=loss_band)


def with_risk(result: ScenarioResult) -> ScenarioResult:
    """Return a result run without risk with its uncertainty added, its plan kept as it is.

    The tornado and Monte Carlo of each asset's best option and of the result's own plan
    (:func:`economics` with ``with_risk`` gives the same for the plan it solves): a front that showed a
    plan first and its uncertainty later analyses the plan it showed, not a plan solved again.
    """
    if result.cash_flows is None:
        raise ValueError("the result keeps no cash flows to re-price: run economics again with risk")
    d = float(result.assumptions.discount_rate_frac)
    tornado_rows, risk_rows, draws, drawn = _risk(result.cash_flows, result.assumptions, result.results, d,
                                                  result.loss_band)
    plan_tornado, plan_risk, plan_draws = _plan_risk(result.cash_flows, result.assumptions, result.results,
                                                     result.plan, d, drawn, result.bill_saving_pv, result.loss_band)
    return replace(result, tornado=tornado_rows, risk=risk_rows, fleet_npv_draws=draws, plan_tornado=plan_tornado,
                   plan_risk=plan_risk, plan_npv_draws=plan_draws)


def _only_budget_differs(previous, phys: Physics, assumptions, with_risk: bool) -> bool:
    """True when ``previous`` can serve everything but the plan: same physics, same assumptions but the
    budget, and risk results when they are asked for."""
    if previous is None or previous.physics is not phys or previous.capital_spend_by_year is None:
        return False
    if with_risk and previous.tornado.empty and previous.risk.empty and previous.fleet_npv_draws.size == 0:
        return False
    return replace(previous.assumptions, budget_per_yr=assumptions.budget_per_yr) == assumptions


def _replan(case, previous: ScenarioResult, assumptions, settings: PlanSettings, step) -> ScenarioResult:
    """A result under a new budget: the previous result with the plan and the plan's bills redone."""
    results = previous.results
    project_ids = project_labels(results).to_numpy(dtype=object)
    step("fleet plan")
    op = previous.physics.operation
    with kept_rows(op):  # the plan's reactive check and its bills read the same rows
        plan_frames = _plan_with_interactions(case, op, results, previous.capital_spend_by_year, project_ids,
                                              assumptions, float(assumptions.discount_rate_frac), settings,
                                              previous.bill_saving_pv)
        plan_frames = _kept_if_better(previous, plan_frames, assumptions, settings)
        step("bills")
        base = previous.bills[previous.bills["scenario"] == "baseline"].drop(columns="scenario")
        bills = _bills(case, op, plan_frames[0], base, float(assumptions.energy_price_factor))
        plan_risk = (pd.DataFrame(), pd.DataFrame(), np.zeros(0))
        if previous.fleet_npv_draws.size or not previous.risk.empty:  # the previous result was run with risk
            plan_risk = _plan_risk(previous.cash_flows, assumptions, results, plan_frames[0],
                                   float(assumptions.discount_rate_frac), bill_saving_pv=previous.bill_saving_pv,
                                   loss_band=previous.loss_band)
    return replace(previous, assumptions=assumptions, plan=plan_frames[0], plan_greedy=plan_frames[1],
                   plan_comparison=plan_frames[2], abatement=plan_frames[3], bills=bills, plan_status=plan_frames[4],
                   plan_tornado=plan_risk[0], plan_risk=plan_risk[1], plan_npv_draws=plan_risk[2])


#: Said of a live plan kept from the edit before (its status message).
KEPT_PLAN_TEXT = ("the plan before this edit, still within every budget, is better than the plan found in a live "
                  "solve's time, so it is kept; prove the plan for the best under the new budgets")


def _fits_budgets(plan_frame: pd.DataFrame, results: pd.DataFrame, capital_spend: np.ndarray, budget_per_yr) -> bool:
    """Whether a plan (its projects and start years) spends within every plan year's budget
    (:func:`models.plan.plan_spend_by_year`); a start outside the plan years does not fit."""
    budgets = np.asarray(list(budget_per_yr), dtype=float)
    if not budgets.size or not len(plan_frame):
        return True
    starts = plan_frame["start_yr"].to_numpy(dtype=int)
    if (starts >= budgets.size).any() or (starts < 0).any():
        return False
    try:
        spend, _ = plan.plan_spend_by_year(plan_frame, results, capital_spend, budgets.size)
    except ValueError:  # a project the results no longer hold
        return False
    return bool((spend <= budgets * (1 + 1e-12) + 1e-6).all())


def _kept_if_better(previous: ScenarioResult, plan_frames: tuple, assumptions, settings: PlanSettings) -> tuple:
    """The plan before a budget edit instead of a bounded solve's plan, when it still fits every budget and
    its NPV is higher: a live solve stopped by its time limit can end below a plan that a larger budget
    still allows, and a budget raised must never show a worse plan. A solve to the precise setting is kept
    as solved (the plan the pack and the command line give)."""
    if settings.time_limit_s >= PRECISE_PLAN.time_limit_s or previous.plan is None:
        return plan_frames
    before = float(previous.plan_comparison.get("npv_exact", np.nan)) if previous.plan_comparison is not None else np.nan
    now = float(plan_frames[2].get("npv_exact", np.nan))
    if not (np.isfinite(before) and np.isfinite(now) and before > now + 1e-6 * max(1.0, abs(now))):
        return plan_frames
    if not _fits_budgets(previous.plan, previous.results, previous.capital_spend_by_year, assumptions.budget_per_yr):
        return plan_frames
    comparison = plan_frames[2].copy()  # (as models.plan.compare_plans gives it, with the kept plan as the exact one)
    comparison["npv_exact"] = before
    comparison["shortfall"] = before - float(comparison["npv_greedy"])
    comparison["shortfall_frac"] = comparison["shortfall"] / before if before > 0 else 0.0
    comparison["projects_exact"] = float(len(previous.plan))
    # (how far the kept plan is from the best under the new budgets is not known: no gap)
    status = {**(previous.plan_status or {}), "status": "kept", "message": KEPT_PLAN_TEXT, "settings": settings,
              "gap_frac": float("nan"),
              # (the rank-order plan is the new one: its shares are the new check's)
              "repriced_greedy": (plan_frames[4] or {}).get("repriced_greedy", {})}
    return (previous.plan, plan_frames[1], comparison, plan_frames[3], status) + tuple(plan_frames[5:])


def run(case, assumptions: finance.FinanceAssumptions, progress: Callable[[str], None] | None = None,
        with_risk: bool = True, plan_settings: PlanSettings = PRECISE_PLAN,
        budgets: MemoryBudgets | None = None) -> ScenarioResult:
    """Run the whole analysis of a case.

    Parameters
    ----------
    case : models.case.Case
        A validated case.
    assumptions : models.finance.FinanceAssumptions
        Finance assumptions (discount rate, horizon, escalation, budgets...).
    progress : callable, optional
        Called with the name of each stage as it starts.
    with_risk : bool
        Include the tornado and Monte Carlo.
    plan_settings : PlanSettings
        How hard the exact fleet plan is solved (default :data:`PRECISE_PLAN`).
    budgets : models.operation.MemoryBudgets, optional
        What the run keeps in memory (default :func:`models.operation.default_budgets`; a smaller machine's
        from :func:`models.estimate.budgets_within`).

    Returns
    -------
    ScenarioResult
    """
    phys = physics(case, float(assumptions.capacitor_cost_per_kvar), progress, budgets=budgets)
    return economics(case, phys, assumptions, progress, with_risk, plan_settings)


# ---------------------------------------------------------------------------------------------------
# Pieces
# ---------------------------------------------------------------------------------------------------
def _bill_lines_at_price_level(lines: pd.DataFrame, factor: float, currency: str) -> pd.DataFrame:
    """Bill lines with every charge multiplied by ``factor``: a charge's rate scales, except a tax's,
    whose base (the quantity, in ``currency``) scales instead; every amount scales."""
    if factor == 1.0 or lines.empty:
        return lines
    out = lines.copy()
    in_money = (out["unit"].astype(str) == str(currency)).to_numpy()
    out["quantity"] = np.where(in_money, out["quantity"].to_numpy(dtype=float) * factor, out["quantity"].to_numpy(dtype=float))
    out["rate"] = np.where(in_money, out["rate"].to_numpy(dtype=float), out["rate"].to_numpy(dtype=float) * factor)
    out["amount"] = out["amount"].to_numpy(dtype=float) * factor
    return out


def _at_price_levels(sav: BillSavings, price_factor: float, capital_factor: float, currency: str) -> BillSavings:
    """Bill savings with every tariff charge multiplied by ``price_factor``.

    Bills are linear in the tariff's charges (each line is quantity x rate, taxes a share of other
    lines), so scaling every charge scales every bill and every saving by the same factor; the
    equivalent capacitor bank keeps its kVAr (its saving scales too) and its cost follows the capital.
    """
    if price_factor == 1.0 and capital_factor == 1.0:
        return sav
    return replace(sav, saving=sav.saving * price_factor, reactive_saving=sav.reactive_saving * price_factor,
                   ratchet_shortfall=sav.shortfall * price_factor,
                   equivalent_bank_cost=sav.equivalent_bank_cost * capital_factor,
                   baseline_bills=_bill_lines_at_price_level(sav.baseline_bills, price_factor, currency))


def _options_in_order(case, op: OperatingResult) -> pd.DataFrame:
    options = options_with_baseline(case.options)
    if list(options["option_id"]) != list(op.option_ids):
        raise ValueError("the operating result was computed with another options catalogue than the case's")
    return options


def _best_flags(results: pd.DataFrame, keep_option_id: str = "keep") -> np.ndarray:
    """True on the option with the highest NPV of each asset (today's motor when nothing beats it).

    A motor that has failed (``failed``) cannot be kept as it is: its best option is the best of the others
    (at least the least that puts it back in service, whose NPV is zero against it), today's motor only
    where the catalogue offers it nothing else."""
    npv = results["npv"].to_numpy(dtype=float)
    if "failed" in results:
        others = results.groupby("asset_id", sort=False)["option_id"].transform("size").to_numpy() > 1
        barred = results["failed"].to_numpy(dtype=bool) & others & (results["option_id"].to_numpy() == keep_option_id)
        npv = np.where(barred, -np.inf, npv)
    best = pd.Series(npv, index=results.index).groupby(results["asset_id"].to_numpy(), sort=False).idxmax()
    flags = np.zeros(len(results), dtype=bool)
    flags[best.to_numpy()] = True
    return flags


def _flags_by_project(op: OperatingResult, rows: np.ndarray, cols: np.ndarray) -> np.ndarray:
    if op.flags.empty:
        return np.full(len(rows), "", dtype=object)
    by_key: dict[tuple[str, str], list[str]] = {}
    for r in op.flags.itertuples(index=False):
        by_key.setdefault((r.asset_id, r.option_id), []).append(r.flag)
    out = []
    for i, o in zip(rows, cols):
        texts = by_key.get((op.asset_ids[i], op.option_ids[o]), []) + (by_key.get((op.asset_ids[i], ""), []) if o == 0 else [])
        out.append("; ".join(texts))
    return np.array(out, dtype=object)


def _life_cycle_costs(case, op, sav, flows, rows, cols, d, horizon, maint, project_ids, assumptions):
    """Life-cycle cost of every asset-option, stacked by component (:data:`LCC_COMPONENTS`), consistent with
    the NPV.

    Notes
    -----
    Today's motor's running cost is its share of the site bill (its input energy times the site meter's
    bill per kWh, :func:`_mean_bill_per_kwh`) and its maintenance, both escalated and discounted over the
    horizon. An option's running and maintenance costs are today's less the savings its cash flows carry
    (with their timing: a replacement bought at failure saves from then on, and over a base case that has
    bought its must-spend item, that item's savings less), and its capital, residual and tax components are
    its cash flows' own (the tax on its savings and the depreciation shield of its increment; today's costs
    are before tax). So LCC(keep) - LCC(option) is the option's NPV exactly (the NIST Handbook 135
    convention for comparing alternatives).
    """
    price = _mean_bill_per_kwh(op, sav.baseline_bills)
    years = np.arange(horizon + 1)
    disc = 1.0 / (1.0 + d) ** years

    def upv_star(component: str) -> float:
        e = assumptions.escalation_frac(component)
        return float((((1.0 + e) / (1.0 + d)) ** years[1:]).sum())

    names = flows.component_names
    amounts = flows.amounts

    def pv_of(selected) -> np.ndarray:
        ks = [k for k, n in enumerate(names) if selected(n)]
        return (amounts[:, :, ks].sum(axis=2) * disc[None, :]).sum(axis=1)

    # today's running cost escalates with energy; the option's savings as its cash flows carry them
    running_keep = op.energy_kwh[rows, 0] * price[rows]
    pv_running = running_keep * upv_star("energy") - pv_of(lambda n: n in reactive_plan.BILL_SAVING_COMPONENTS)
    pv_maint = maint[rows, 0] * upv_star("maintenance") - pv_of(lambda n: n == "savings_maintenance")
    pv_capital = -pv_of(lambda n: n.startswith("capital") or n in ("midlife", "baseline_credit", "incentive"))
    pv_residual = -pv_of(lambda n: n == "residual")
    pv_tax = -pv_of(lambda n: n.startswith("tax_"))
    parts = np.column_stack([pv_capital, pv_residual, pv_running, pv_maint, pv_tax])
    frame = pd.DataFrame({
        "asset_id": np.repeat(op.asset_ids[rows], len(LCC_COMPONENTS)),
        "option_id": np.repeat(op.option_ids[cols], len(LCC_COMPONENTS)),
        "component": np.tile(LCC_COMPONENTS, len(rows)),
        "pv": parts.ravel(),
    })
    return frame, parts.sum(axis=1)


def _plan_with_interactions(case, op, results, capital_spend, project_ids, assumptions, d, settings: PlanSettings,
                            bill_saving_pv=None):
    """:func:`_plan`, with the plan's reactive projects checked beside the rest of it
    (:func:`models.reactive_plan.plan_without_idle_reactive`)."""
    last: dict = {}  # the exact plan last solved, kept when a round changes the rank-order plan only

    def solve(exclude, solve_settings, npv=None, greedy=None, exact_again=True):
        return _plan(results, capital_spend, project_ids, assumptions, d, solve_settings, exclude=exclude, npv=npv,
                     greedy=greedy, exact=None if exact_again else last.get("exact"), solved=last)

    return reactive_plan.plan_without_idle_reactive(solve, case, op, results, project_ids, settings,
                                                     float(assumptions.energy_price_factor), bill_saving_pv)


def _plan(results, capital_spend, project_ids, assumptions, d, settings: PlanSettings, exclude=(), npv=None,
          greedy=None, exact=None, solved: dict | None = None):
    """The exact and the rank-order plans, their comparison, the abatement curve and the status.

    ``exclude`` and ``npv`` (project labels left out, each row's NPV) shape the exact plan; ``greedy`` =
    (exclude, npv) shapes the rank-order plan on its own (default: the exact plan's), so each plan's
    check of its interactions changes that plan only. ``exact`` (a :class:`models.plan.FleetPlan` solved
    before) is taken as the exact plan instead of solving it again; ``solved`` (a dict) receives the
    exact plan under ``"exact"``.
    """
    budgets = list(assumptions.budget_per_yr) or None
    n_years = len(budgets) if budgets else DEFAULT_PLAN_YEARS
    capital_by_year = capital_spend[:, :n_years] if capital_spend.shape[1] >= n_years else capital_spend
    not_today = (results["option_id"] != results.groupby("asset_id")["option_id"].transform("first")).to_numpy()
    labels = pd.Index(project_ids)

    def inputs(left_out, values):
        values = results["npv"].to_numpy() if values is None else np.asarray(values, dtype=float)
        candidates = not_today & (values > 0)
        if len(left_out):
            # by hash (numpy's isin compares text labels one left-out label at a time: seconds at 10,000 assets)
            candidates &= ~labels.isin(list(left_out))
        sel = np.flatnonzero(candidates)
        return project_ids[sel], results["asset_id"].to_numpy()[sel], values[sel], capital_by_year[sel]

    # a motor that has failed cannot wait for a later plan year: its project starts in year 0 or not at all
    failed = results["failed"].to_numpy(dtype=bool) if "failed" in results else np.zeros(len(results), dtype=bool)
    latest_all = np.where(failed, 0.0, np.inf)

    def latest(left_out, values):
        if not failed.any():
            return None
        values = results["npv"].to_numpy() if values is None else np.asarray(values, dtype=float)
        candidates = not_today & (values > 0)
        if len(left_out):
            candidates &= ~labels.isin(list(left_out))
        return latest_all[candidates]

    args = inputs(exclude, npv)
    if exact is None:
        exact = plan.plan_exact(*args, budgets, d, time_limit_s=settings.time_limit_s, mip_rel_gap=settings.gap_frac,
                                start=dict(settings.start) or None, latest_start_yr=latest(exclude, npv))
    if solved is not None:
        solved["exact"] = exact
    greedy_args = (exclude, npv) if greedy is None else greedy
    greedy = plan.plan_greedy(*inputs(*greedy_args), budgets, d, latest_start_yr=latest(*greedy_args))
    comparison = plan.compare_plans(exact, greedy)
    # the abatement curve takes every option that avoids CO2, whatever its NPV (costly measures too)
    co2 = results["co2_avoided_t_per_yr"].to_numpy(dtype=float)
    cost_t = results["abatement_cost_per_t"].to_numpy(dtype=float)
    macc = np.flatnonzero((results["capital"].to_numpy() > 0) & (co2 > 1e-9) & np.isfinite(cost_t))
    curve = plan.abatement_curve(project_ids[macc], results["asset_id"].to_numpy()[macc], results["npv"].to_numpy()[macc],
                                 co2[macc], cost_t[macc])
    status = {"status": exact.status, "message": exact.message, "gap_frac": float(exact.gap_frac), "settings": settings,
              "withdrawn": (), "set_aside": ()}
    return _plan_frame(exact, results), _plan_frame(greedy, results), comparison, curve, status


def _plan_frame(fleet_plan, results: pd.DataFrame) -> pd.DataFrame:
    frame = fleet_plan.chosen
    columns = ["asset_id", "option_id", "start_yr", "capital", "npv", "npv_at_plan_start"]
    if frame.empty:
        return pd.DataFrame(columns=columns)
    rows = pd.Index(project_labels(results)).get_indexer(frame["project_id"])
    frame = frame.assign(asset_id=results["asset_id"].to_numpy()[rows], option_id=results["option_id"].to_numpy()[rows],
                         capital=results["capital"].to_numpy()[rows])
    return frame[columns].reset_index(drop=True)


def _end_of_life(case, op, sav, options, capex_total, age, shape, scale, assumptions, d, horizon):
    a = case.assets
    tech = options["technology"].to_numpy(dtype=object)
    n_a = len(a)
    rewind = np.flatnonzero(tech == "rewind")
    new_candidates = np.flatnonzero(tech == "induction")
    if not len(rewind) or not len(new_candidates):
        return pd.DataFrame()
    r = rewind[0]
    new_pos = np.where(op.applies[:, new_candidates], capex_total[:, new_candidates], np.inf).argmin(axis=1)
    new_o = new_candidates[new_pos]
    rows = np.arange(n_a)
    price = _mean_bill_per_kwh(op, sav.baseline_bills)
    running_old = op.energy_kwh[:, 0] * price
    downtime = a["downtime_cost_per_h"].to_numpy(dtype=float)
    criticality = a["criticality"].astype(str).to_numpy(dtype=object)
    default_dt = a["criticality"].map(DOWNTIME_COST_BY_CRITICALITY).to_numpy(dtype=float)
    given = ~np.isnan(downtime)
    from_finance = assumptions.downtime_cost_per_h > 0
    basis = np.where(given, "asset register",
                     "finance assumptions" if from_finance
                     else np.array([f"default for a {c}-criticality motor" for c in criticality], dtype=object))
    downtime = np.where(given, downtime, assumptions.downtime_cost_per_h if from_finance else default_dt)
    spare = (a["spare_on_hand"].map(lambda v: v is True or v == 1).to_numpy(dtype=bool) if "spare_on_hand" in a
             else np.zeros(n_a, dtype=bool))
    new_lead_h, rewind_lead_h = end_of_life.outage_hours(a["rated_p_kw"].to_numpy(dtype=float), spare)
    # the register's own hours, where given, over the size class's (or the spare's fitting)
    bases = []
    for column, hours in (("new_lead_time_h", new_lead_h), ("rewind_lead_time_h", rewind_lead_h)):
        own = a[column].to_numpy(dtype=float) if column in a else np.full(n_a, np.nan)
        given_h = ~np.isnan(own)
        hours[given_h] = own[given_h]
        bases.append(np.where(given_h, "asset register", np.where(spare, "spare on hand", "size class")))
    hours_basis = np.where(bases[0] == bases[1], bases[0],
                           np.char.add(np.char.add(bases[0], " (new), "), np.char.add(bases[1], " (rewound)")))
    frame = end_of_life.strategy_costs(
        age, shape, scale, capex_total[rows, new_o], capex_total[rows, r], running_old,
        running_old - sav.total[rows, new_o], running_old - sav.total[rows, r],
        downtime_cost_per_h=downtime, new_lead_time_h=new_lead_h, rewind_lead_time_h=rewind_lead_h,
        new_life_yr=options["life_yr"].to_numpy(dtype=float)[new_o], rewind_life_yr=float(options["life_yr"].iloc[r]),
        discount_rate_frac=d, horizon_yr=horizon, escalation_frac=assumptions.escalation_energy_frac,
        asset_id=op.asset_ids)
    failed = failed_assets(a)
    if failed.any():
        # a motor that has failed is rewound or replaced now, the outage counted either way: the certain failure
        # of the comparison above, at year 0 (replacing now and at failure are then the same)
        f = np.flatnonzero(failed)
        now = end_of_life.failed_motor_costs(
            capex_total[f, new_o[f]], capex_total[f, r], running_old[f] - sav.total[f, new_o[f]],
            running_old[f] - sav.total[f, r], downtime_cost_per_h=downtime[f], new_lead_time_h=new_lead_h[f],
            rewind_lead_time_h=rewind_lead_h[f], new_life_yr=options["life_yr"].to_numpy(dtype=float)[new_o[f]],
            rewind_life_yr=float(options["life_yr"].iloc[r]), discount_rate_frac=d, horizon_yr=horizon,
            escalation_frac=assumptions.escalation_energy_frac)
        replace_pv, rewind_pv = now["cost_replace"].to_numpy(), now["cost_rewind"].to_numpy()
        columns = ["failure_probability_in_horizon_frac", "mean_residual_life_yr", "cost_replace_now",
                   "cost_replace_at_failure", "cost_rewind_at_failure", "advantage_over_next"]
        frame.iloc[f, [frame.columns.get_loc(c) for c in columns]] = np.column_stack(
            [np.ones(len(f)), np.zeros(len(f)), replace_pv, replace_pv, rewind_pv, np.abs(replace_pv - rewind_pv)])
        best = frame["best_strategy"].to_numpy(dtype=object).copy()
        best[f] = np.where(now["best"].to_numpy() == "replace", "replace_now", "rewind_at_failure")
        frame["best_strategy"] = pd.array(best.astype(str), dtype="str")
    frame.insert(0, "failed", failed)
    frame.insert(0, "new_option_id", op.option_ids[new_o])
    frame.insert(0, "age_yr", age)
    # what each failure's outage is priced at, and where that figure comes from (a default can carry the answer)
    frame["downtime_cost_per_h"] = downtime
    frame["downtime_cost_basis"] = pd.array(np.asarray(basis, dtype=object).astype(str), dtype="str")
    frame["new_lead_time_h"] = new_lead_h
    frame["rewind_lead_time_h"] = rewind_lead_h
    frame["lead_time_basis"] = pd.array(hours_basis.astype(str), dtype="str")
    frame.index.name = "asset_id"
    # a motor for which no new induction motor is offered has no replacement to compare (none is named); one
    # that never runs in the analysis year (a spare, a stand-by) stops nothing when it fails
    compared = op.applies[:, new_candidates].any(axis=1) & (np.asarray(op.running_h, dtype=float) > 0)
    return frame.reset_index()[compared].reset_index(drop=True)


#: Why a motor has no end-of-life comparison (:func:`end_of_life_left_out`), in plain words.
END_OF_LIFE_LEFT_OUT = {
    "idle": ("it does not run in the analysis year (a spare or a stand-by motor): its failure stops nothing, so "
             "replacing it now is not compared with replacing or rewinding it at failure"),
    "no_new_motor": ("no new induction motor of the catalogue fits it, so there is no replacement to compare: add one of "
                     "its size to the options catalogue, priced from a maker's quote, and a repairer's rewind price, to "
                     "compare them"),
    "no_catalogue": "the comparison needs a rewind option and a new induction motor option in the catalogue",
}


def _asset_row(result, asset_id: str) -> tuple[OperatingResult | None, int | None]:
    """A result's machine results and an asset's row in them (None where either is missing)."""
    op = getattr(getattr(result, "physics", None), "operation", None)
    if op is None:
        return None, None
    where = np.flatnonzero(np.asarray(op.asset_ids, dtype=object).astype(str) == str(asset_id))
    return op, (int(where[0]) if len(where) else None)


def options_left_out(result, asset_id: str) -> list[tuple[str, int]]:
    """Why the catalogue's options (today's motor aside) do not apply to an asset: each reason with the
    number of options it leaves out, commonest first; empty when some option applies or the asset is unknown."""
    op, i = _asset_row(result, asset_id)
    if i is None or op.applies[i, 1:].any():
        return []
    reasons = pd.Series(np.asarray(op.reason, dtype=object)[i, 1:]).replace("", "not applicable")
    counts = reasons.value_counts(sort=True)
    return [(str(r), int(n)) for r, n in counts.items()]


def end_of_life_left_out(result, asset_id: str) -> str:
    """Why an asset of a result has no row in its end-of-life comparison ("" when it has one or is unknown):
    a key of :data:`END_OF_LIFE_LEFT_OUT`."""
    eol = getattr(result, "end_of_life", None)
    if eol is not None and len(eol) and (eol["asset_id"].astype(str) == str(asset_id)).any():
        return ""
    op, i = _asset_row(result, asset_id)
    if i is None:
        return ""
    tech = np.asarray(op.technologies, dtype=object)
    if not ((tech == "rewind").any() and (tech == "induction").any()):
        return "no_catalogue"
    if not op.applies[i, tech == "induction"].any():
        return "no_new_motor"
    if not float(op.running_h[i]) > 0:
        return "idle"
    return ""


def _policy_new_motor(case, induction: pd.DataFrame, sizes_kw: np.ndarray, f_hz: int) -> tuple[np.ndarray, np.ndarray]:
    """Capital [currency] and full-load efficiency [frac] of the new motor the policy's replacement buys at
    each size: the catalogue's first new induction motor, or, where the case region's rules ask more of a
    new 4-pole motor of that size (EU: IE4 at 75-200 kW), the catalogue's least class that meets them (the
    best it offers if none does). Efficiency as for every new catalogue motor: the class floor less the
    catalogue margin (:func:`models.defaults.catalogue_efficiency_pct`)."""
    from models.defaults import catalogue_efficiency_pct
    from models.efficiency_classes import min_efficiency_pct

    ranks = class_rank(induction["efficiency_class"].to_numpy(dtype=object))
    needed = class_rank(minimum_class(case.settings.region, sizes_kw, np.full(len(sizes_kw), 4.0),
                                      case.settings.purchase_date))
    first = ranks[0]
    # per size: the first row if it meets the rule, else the first row of the least class that does
    meets = ranks[None, :] >= np.maximum(needed, first)[:, None]
    least = np.where(meets, ranks[None, :], 99)
    pick = np.where(meets.any(axis=1), np.argmin(least, axis=1), int(np.argmax(ranks)))
    pick = np.where(needed <= first, 0, pick)
    capex = np.empty(len(sizes_kw))
    eff = np.empty(len(sizes_kw))
    for j in np.unique(pick):
        at = pick == j
        row = induction.iloc[int(j)]
        capex[at] = capital_cost(pd.DataFrame([row]), sizes_kw).total[at, 0]
        eff[at] = catalogue_efficiency_pct(min_efficiency_pct(sizes_kw[at], 4, f_hz, row["efficiency_class"])) / 100.0
    return capex, eff


def _fleet_rules(case, options, assumptions, d, horizon, sav, op):
    tech = options["technology"].to_numpy(dtype=object)
    if not ((tech == "rewind").any() and (tech == "induction").any()):
        return pd.DataFrame()
    unit = "hp" if str(case.settings.power_unit).lower() == "hp" else "kW"
    rated = case.assets["rated_p_kw"].to_numpy(dtype=float)
    sizes = end_of_life.policy_sizes_kw(float(np.nanmax(rated)) if np.isfinite(rated).any() else 0.0, unit)
    hours = np.array([1000, 2000, 4000, 6000, 8000])
    # the fleet's usual supply frequency: the 50 Hz or the 60 Hz class tables (4-pole, the commonest)
    f_hz = usual_supply_hz(case.assets["supply_f_hz"])
    new_capex, eff_new = _policy_new_motor(case, options[tech == "induction"], sizes, f_hz)
    rewind_row = options[tech == "rewind"].iloc[0]
    cost = lambda row: capital_cost(pd.DataFrame([row]), sizes).total[:, 0]  # noqa: E731
    from models.efficiency_classes import min_efficiency_pct

    # a rewound motor: an IE2 motor less one rewind's loss, the fleet's median (0.1 point by default)
    loss = (pd.to_numeric(case.assets["rewind_loss_pct_points"], errors="coerce").median()
            if "rewind_loss_pct_points" in case.assets else np.nan)
    loss = float(loss) if np.isfinite(loss) else induction.DEFAULT_REWIND_LOSS_PCT_POINTS
    eff_rewound = min_efficiency_pct(sizes, 4, f_hz, "IE2") / 100.0 - loss / 100.0
    price = float((sav.baseline_bills["amount"].sum()) / max(op.energy_kwh[:, 0].sum(), 1.0))
    return end_of_life.fleet_rules(sizes, hours, new_capex=new_capex, rewind_capex=cost(rewind_row),
                                   efficiency_new_frac=eff_new, efficiency_rewound_frac=eff_rewound, price_per_kwh=price,
                                   downtime_cost_per_h=assumptions.downtime_cost_per_h,
                                   new_lead_time_h=end_of_life.outage_hours(sizes)[0],
                                   rewind_lead_time_h=end_of_life.outage_hours(sizes)[1], discount_rate_frac=d,
                                   horizon_yr=horizon, escalation_frac=assumptions.escalation_energy_frac,
                                   power_unit=unit)


def _loss_band_cost_per_yr(op: OperatingResult, sav: BillSavings, rated_p_kw: np.ndarray,
                           energy_saved_kwh: np.ndarray) -> np.ndarray:
    """Per asset and option, the energy savings lost in a year if the option's new machine had the most losses
    its efficiency's tolerance allows [currency/yr], shape (n_assets, n_options): 0 where the option puts no
    new machine in service (:data:`models.options.NEW_MACHINE_TECHNOLOGIES`: a rewound motor and today's
    motor with a drive or a capacitor added have no declared efficiency of a new machine).

    The machine's declared losses in the year (its own and, for a wound-field machine, its excitation's; a
    drive's losses have a standard of their own and are left out) times the share of them the IEC 60034-1
    tolerance allows above them at the same output, x / eta' at the machine's yearly efficiency eta (shaft
    energy over shaft energy plus those losses;
    :func:`models.efficiency_classes.efficiency_tolerance_losses_frac`), priced at the site's mean price of
    the energy the run saves: the energy savings over the kWh saved of the site's options that save both
    (the energy charges with their taxes, at the times of use the motors run). A site with no such option
    takes the fleet's mean; a fleet with none, the mean price per kWh of the energy lines of today's bills
    (their taxes left out).
    """
    kinds = list(LOSS_KINDS)
    declared = op.losses_kwh[:, :, kinds.index("motor")] + op.losses_kwh[:, :, kinds.index("excitation")]
    new = np.isin(op.technologies.astype(str), NEW_MACHINE_TECHNOLOGIES)[None, :] & op.applies
    saving = sav.saving[:, :, 0]
    both = op.applies & (saving > 0) & (energy_saved_kwh > 0)
    both[:, 0] = False
    codes, sites = pd.factorize(pd.Series(op.site_ids).astype(str))
    money = np.bincount(codes, weights=np.where(both, saving, 0.0).sum(axis=1), minlength=len(sites))
    kwh = np.bincount(codes, weights=np.where(both, energy_saved_kwh, 0.0).sum(axis=1), minlength=len(sites))
    fleet = money.sum() / kwh.sum() if kwh.sum() > 0 else _mean_energy_price_of_bills(sav.baseline_bills)
    price = np.where(kwh > 0, money / np.where(kwh > 0, kwh, 1.0), fleet)[codes]
    declared = np.where(new, declared, 0.0)
    shaft = np.where(new, op.shaft_energy_kwh, 0.0)
    with np.errstate(invalid="ignore", divide="ignore"):
        eta = np.where(shaft + declared > 0, shaft / np.where(shaft + declared > 0, shaft + declared, 1.0), 1.0)
    band = efficiency_classes.efficiency_tolerance_losses_frac(np.asarray(rated_p_kw, dtype=float)[:, None], eta)
    return np.where(new & (declared > 0), band * declared * price[:, None], 0.0)


def _mean_energy_price_of_bills(bills: pd.DataFrame | None) -> float:
    """The mean price per kWh of the energy lines ("energy:...", in kWh) of a bill table [currency/kWh]; 0
    without any."""
    if bills is None or not len(bills) or not {"line_item", "unit", "quantity", "amount"} <= set(bills.columns):
        return 0.0
    energy = _energy_lines(bills)
    kwh = float(energy["quantity"].sum())
    return float(energy["amount"].sum()) / kwh if kwh > 0 else 0.0


def _risk(flows, assumptions, results, d, loss_band=None):
    """Tornado of the fleet NPV of each asset's best option, a seeded Monte Carlo per best project, and
    the fleet NPV of each draw (the projects' NPVs of one draw share that draw's factors, so they add); the
    fourth value is the Monte Carlo's draws of those rows ((rows, MonteCarloResult), or None), which the
    plan's Monte Carlo reads for the projects it shares with them."""
    best = np.flatnonzero(results["best_for_asset"].to_numpy() & (results["capital"].to_numpy() > 0))
    return _risk_of_rows(flows, assumptions, best, d, loss_band=loss_band)


def _risk_of_rows(flows, assumptions, rows: np.ndarray, d: float, start_yr=None, offset=None, known=None,
                  bill_share=None, loss_band=None):
    """Tornado, Monte Carlo summary per project and portfolio NPV per draw of the projects ``rows`` (rows
    of ``flows``), each started ``start_yr`` years into the portfolio with ``offset`` added to its NPV
    (:func:`models.risk.portfolio_npv`; default: all at once, nothing added), and (rows, the Monte Carlo's
    :class:`models.risk.MonteCarloResult`) or None without projects.

    ``known`` = (rows, MonteCarloResult) of an earlier Monte Carlo of the same flows under the same
    assumptions (the same seeded draws): the projects it holds are taken from it instead of drawn again
    (each project's draws depend on its own flows and the draws' factors only).

    ``bill_share``: per project, the share of its bill savings (:data:`models.reactive_plan.BILL_SAVING_COMPONENTS`)
    it keeps (default 1 for all): a project kept below 1 is drawn with those savings scaled, so the part the
    rest of a plan takes moves with each draw's prices, rates and tax like the savings themselves.

    ``loss_band``: :attr:`ScenarioResult.loss_band` of the rows of ``flows``; its flows (the energy savings
    lost at the top of each new machine's tolerance band) join the re-priced components as
    :data:`models.risk.LOSS_BAND_COMPONENT`, scaled by the draw's ``loss_band_delta_frac``. None leaves
    the tolerance out.
    """
    if not len(rows):
        return pd.DataFrame(), pd.DataFrame(), np.zeros(0), None
    rows = np.asarray(rows, dtype=np.intp)
    start = np.zeros(len(rows)) if start_yr is None else np.asarray(start_yr, dtype=float)
    add = np.zeros(len(rows)) if offset is None else np.asarray(offset, dtype=float)
    names = flows.component_names
    response = risk.default_response(assumptions)
    base = risk.base_factors(TORNADO_RANGES)

    amounts = flows.amounts[rows]
    if loss_band is not None:
        band = cf.build_cash_flows(loss_band.take(rows), assumptions).component("savings_energy")
        amounts = np.concatenate([amounts, band[:, :, None]], axis=2)
        names = tuple(names) + (risk.LOSS_BAND_COMPONENT,)
    shared = np.ones(len(rows)) if bill_share is None else np.asarray(bill_share, dtype=float)
    scaled = np.flatnonzero(shared != 1.0)
    if len(scaled):
        # (the loss band is the project's own machine's: the rest of the plan takes none of it)
        bill_columns = [names.index(name) for name in reactive_plan.BILL_SAVING_COMPONENTS if name in names]
        amounts = amounts.copy()
        amounts[np.ix_(scaled, np.arange(amounts.shape[1]), bill_columns)] *= shared[scaled, None, None]

    def portfolio(values: dict[str, float]) -> float:
        factors = {k: np.array([float(v)]) for k, v in values.items()}
        out = risk.monte_carlo(amounts, names, factors, response, d, tax_rate_frac=assumptions.tax_rate_frac)
        return float(risk.portfolio_npv(out.npv, out.discount_rate_frac, start, add)[0])

    ranges = TORNADO_RANGES
    if risk.LOSS_BAND_COMPONENT not in names or not np.any(amounts[:, :, names.index(risk.LOSS_BAND_COMPONENT)]):
        # no project puts a new machine in service: the band moves nothing, and a bar of nil is not shown
        ranges = {k: v for k, v in TORNADO_RANGES.items() if k != risk.LOSS_BAND_FACTOR}
    tornado_rows = risk.tornado(portfolio, base, ranges)
    factors = risk.draw_factors(int(assumptions.monte_carlo_draws), int(assumptions.monte_carlo_seed))
    held = np.full(len(rows), -1)
    if known is not None:
        held = pd.Index(np.asarray(known[0], dtype=np.intp)).get_indexer(rows)
        held[scaled] = -1  # their flows are not the earlier Monte Carlo's
    fresh = np.flatnonzero(held < 0)
    mc = None
    if len(fresh):
        mc = risk.monte_carlo(amounts if len(fresh) == len(rows) else amounts[fresh], names, factors, response, d,
                              tax_rate_frac=assumptions.tax_rate_frac)
    if len(fresh) == len(rows):
        npv, payback, rate = mc.npv, mc.payback_yr, mc.discount_rate_frac
    else:
        earlier = known[1]
        npv = np.empty((earlier.npv.shape[0], len(rows)))
        payback = np.empty_like(npv)
        taken = np.flatnonzero(held >= 0)
        npv[:, taken], payback[:, taken] = earlier.npv[:, held[taken]], earlier.payback_yr[:, held[taken]]
        if mc is not None:
            npv[:, fresh], payback[:, fresh] = mc.npv, mc.payback_yr
        rate = earlier.discount_rate_frac
    mc = risk.MonteCarloResult(project_id=np.asarray(flows.project_id[rows], dtype=object).astype(str), npv=npv,
                               payback_yr=payback, discount_rate_frac=rate)
    draws = risk.portfolio_npv(mc.npv, mc.discount_rate_frac, start, add)
    summary = (replace(mc, npv=mc.npv + add[None, :]) if np.any(add != 0.0) else mc).summary(target_payback_yr=PAYBACK_TARGET_YR)
    summary = summary.reset_index() if "project" not in summary.columns else summary
    return tornado_rows, summary, np.asarray(draws, dtype=float), (rows, mc)


def _plan_risk(flows, assumptions, results, plan_frame: pd.DataFrame, d: float, known=None, bill_saving_pv=None,
               loss_band=None):
    """Tornado, Monte Carlo summary per project and plan NPV per draw (at the plan's start) of the exact plan.

    Each project keeps the value the plan gave it: its NPV less the share of its bill saving the rest of
    the plan already takes (:mod:`models.reactive_plan`, NPV - (1 - r) x its bill savings' present value).
    With ``bill_saving_pv`` (:attr:`ScenarioResult.bill_saving_pv`, per row of ``results``) such a project
    is drawn with its bill savings scaled by r, so the correction moves with each draw's prices, rates and
    tax; without it, or where the bill savings' present value is nil, the correction is held at its base
    value in every draw. A project started in a later plan year is discounted by its delay at the draw's
    rate. ``known``: an earlier Monte Carlo of the same run (:func:`_risk_of_rows`), whose projects are not
    drawn again.
    """
    if flows is None or plan_frame is None or plan_frame.empty:
        return pd.DataFrame(), pd.DataFrame(), np.zeros(0)
    labels = pd.Index(project_labels(results))
    rows = labels.get_indexer(project_labels(plan_frame))
    if np.any(rows < 0):
        raise ValueError("a project of the plan is missing from the results")
    offset = plan_frame["npv"].to_numpy(dtype=float) - results["npv"].to_numpy(dtype=float)[rows]
    offset = np.where(np.abs(offset) > 1e-9 * np.maximum(1.0, np.abs(plan_frame["npv"].to_numpy(dtype=float))),
                      offset, 0.0)
    share = np.ones(len(rows))
    if bill_saving_pv is not None:
        pv = np.asarray(bill_saving_pv, dtype=float)[rows]
        by_share = (offset != 0.0) & (np.abs(pv) > 1e-9 * np.maximum(1.0, np.abs(offset)))
        share[by_share] = 1.0 + offset[by_share] / pv[by_share]  # offset = -(1 - r) x PV
        offset = np.where(by_share, 0.0, offset)
    start = plan_frame["start_yr"].to_numpy(dtype=float)
    tornado_rows, summary, draws, _ = _risk_of_rows(flows, assumptions, rows, d, start, offset, known, share,
                                                    loss_band)
    if not summary.empty:
        summary.insert(1, "start_yr", plan_frame["start_yr"].to_numpy(dtype=int))
    return tornado_rows, summary, draws


def _energy_lines(bills: pd.DataFrame) -> pd.DataFrame:
    """The energy lines of a bill table billed per kWh ("energy:...", not a kVAh-billed energy)."""
    return bills[bills["line_item"].astype(str).str.startswith("energy:") & (bills["unit"].astype(str) == "kWh")]


def _mean_bill_per_kwh(op, baseline_bills: pd.DataFrame) -> np.ndarray:
    """Each asset's site bill per kWh of the site meter [currency/kWh] (the running-cost share rule: a motor
    bears the bill in proportion to its kWh, beside the site's other loads).

    The meter's kWh are those its energy lines bill; a tariff without energy lines in kWh falls back on
    today's motors' kWh. A site with no kWh at all gives 0 (nothing runs, nothing to share)."""
    site_total = baseline_bills.groupby("site_id")["amount"].sum()
    motors_kwh = pd.Series(op.energy_kwh[:, 0]).groupby(op.site_ids).sum().reindex(site_total.index).fillna(0.0)
    energy_lines = _energy_lines(baseline_bills)
    meter_kwh = energy_lines.groupby("site_id")["quantity"].sum().reindex(site_total.index).fillna(0.0)
    kwh = meter_kwh.where(meter_kwh > 0, motors_kwh)
    price = (site_total / kwh.where(kwh > 0)).fillna(0.0)
    return price.reindex(op.site_ids).to_numpy(dtype=float)


def plan_bill_saving_per_yr(bills: pd.DataFrame | None) -> float | None:
    """Today's bills less the plan's, summed over sites and months [currency/yr]; None without both.

    The saving the sites' meters show with the whole plan in place, which can fall short of the projects'
    savings priced one by one (they share demand peaks, ratchets and reactive allowances).
    """
    if bills is None or not len(bills) or "scenario" not in bills:
        return None
    totals = bills.groupby("scenario")["amount"].sum()
    if "baseline" not in totals or "plan" not in totals:
        return None
    return float(totals["baseline"] - totals["plan"])


def _bills(case, op, plan_frame: pd.DataFrame, base: pd.DataFrame, price_factor: float = 1.0) -> pd.DataFrame:
    """Monthly bills of today's fleet (computed with the physics) and of the fleet with the exact plan.

    ``base`` is already at the price level; the plan's bills are brought to it here.
    """
    setups = site_setups(case, op.index)
    choice = plan_choice(op, plan_frame)
    _, after = meter_and_bills(case, op, choice, setups, threads=PHYSICS_THREADS)
    after = _bill_lines_at_price_level(after, price_factor, case.settings.currency)
    return pd.concat([base.assign(scenario="baseline"), after.assign(scenario="plan")], ignore_index=True)
