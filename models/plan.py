"""Fleet plan under a capital budget per year, and the marginal abatement cost curve.

Each asset takes at most one of its options (or none), and each chosen project starts in one of the plan
years; its capital falls in the years it is spent, shifted by the start year, and its NPV is discounted
by the delay. :func:`plan_exact` maximises the total NPV under the yearly budgets as a 0-1 integer
programme solved by HiGHS (through its Python interface ``highspy``); :func:`plan_greedy` is the common
"rank by profitability index and fund until the money runs out" rule; :func:`compare_plans` says how
much NPV the simple rule leaves on the table. :func:`abatement_curve` sorts one best option per asset by
its cost per tonne of CO2 for a marginal abatement cost curve.
"""

from __future__ import annotations

import contextlib
import os
import sys
import time
from dataclasses import dataclass, field
from typing import Any, Mapping

import highspy
import numba
import numpy as np
import pandas as pd
from scipy.sparse import coo_array

#: Assets whose choice the first plan's improvement step re-opens on fleets larger than this (the core of
#: the problem, picked by the linear relaxation's reduced costs; see :func:`_core_plan`). Measured on the
#: benchmark's fleets (budgets per motor as the demo's, proven to 0.01 %): 10,000 assets 2.3-7.6 s with
#: 1,000 against 4.5-16.6 s with 2,000 over four solver seeds, 5,000 assets 6.5 s against 12 s; the plans
#: were proven within the same gap. A tuning choice of this tool.
CORE_ASSETS = 1000
#: The linear relaxation of a plan of at least this many columns (projects x start years) is solved by the
#: interior-point method with crossover to a vertex, as the simplex method would end (a vertex optimum,
#: its reduced costs); smaller ones by the simplex method. Measured on the benchmark's 10,000-asset fleet
#: (61,000-64,000 columns, 9,000-9,500 rows): 1.2-1.6 s against 3.1-3.5 s, the same optimum to 1e-15
#: relative. A tuning choice of this tool.
INTERIOR_POINT_MIN_COLUMNS = 20_000

_CHOSEN_COLUMNS = ["project_id", "asset_id", "start_yr", "npv", "npv_at_plan_start", "capital_in_plan_years"]


def _new_solver() -> "highspy.Highs":
    """A HiGHS solver with its log off (the library's banner was spent at import, see below)."""
    solver = highspy.Highs()
    solver.setOptionValue("output_flag", False)
    return solver


@contextlib.contextmanager
def _silenced_stdout_fd():
    """Point file descriptor 1 at the null device for the block; nothing to do without a real stdout."""
    try:
        sys.stdout.flush()
        saved = os.dup(1)
    except (OSError, ValueError, AttributeError):  # no real stdout (closed, captured, or None)
        yield
        return
    try:
        with open(os.devnull, "wb") as null:
            os.dup2(null.fileno(), 1)
            yield
    finally:
        os.dup2(saved, 1)
        os.close(saved)


# The solver library prints a banner ("Running HiGHS ...") from native code straight to file descriptor 1 when
# the process makes its first solver, before any option can turn it off; later solvers print nothing. That first
# solver is made here, once, at import, with file descriptor 1 on the null device for the microseconds it takes:
# at import, before a front starts threads or prints, so no solve later touches the process's output and no
# line another thread prints while a plan is solved (a server's address, a progress line) is lost.
with _silenced_stdout_fd():
    highspy.Highs()


@dataclass(frozen=True)
class FleetPlan:
    """A fleet plan: which project starts when, and what it spends.

    Attributes
    ----------
    chosen : pandas.DataFrame
        One row per chosen project: ``project_id``, ``asset_id``, ``start_yr`` [yr] (plan year of the
        start), ``npv`` [currency] (at its own start), ``npv_at_plan_start`` [currency] (discounted to
        plan year 0), ``capital_in_plan_years`` [currency] (spent within the plan years).
    spend_by_year : numpy.ndarray
        Capital spent in each plan year [currency], shape (n_plan_years,).
    budget_per_yr : numpy.ndarray
        The budgets [currency] (``inf`` for an unconstrained plan).
    total_npv : float
        Sum of ``npv_at_plan_start`` [currency].
    method : str
        "exact" or "greedy".
    status : str
        "optimal", "time_limit" (best plan found when the solver stopped), "unconstrained" (no budget
        given), "empty" (no project with a positive NPV) or "failed" (solver error; no project chosen).
    message : str
        Plain-words note on the status.
    selection : numpy.ndarray
        0-1 matrix x[i, s] (project i starts in plan year s), shape (n_projects, n_plan_years).
    gap_frac : float
        Proven relative gap between the plan's NPV and the best NPV any plan could reach [frac]; 0 for
        a plan proven optimal, NaN when no bound is known (greedy plans, solver failures).
    """

    chosen: pd.DataFrame
    spend_by_year: np.ndarray
    budget_per_yr: np.ndarray
    total_npv: float
    method: str
    status: str
    message: str = ""
    selection: np.ndarray = field(default=None, repr=False)
    gap_frac: float = float("nan")


def _prepare(project_id: Any, asset_id: Any, npv_value: Any, capital_by_year: Any, budget_per_yr: Any,
             discount_rate_frac: float, latest_start_yr: Any = None) -> dict[str, Any]:
    """Check and align the plan inputs."""
    projects = np.atleast_1d(np.asarray(project_id, dtype=object)).astype(str)
    assets = np.atleast_1d(np.asarray(asset_id, dtype=object)).astype(str)
    value = np.atleast_1d(np.asarray(npv_value, dtype=float))
    n = projects.size
    if assets.size != n or value.size != n:
        raise ValueError("project_id, asset_id and npv must have one entry per project")
    if len(set(projects.tolist())) != n:
        raise ValueError("project_id labels must be unique")
    if not np.all(np.isfinite(value)):
        raise ValueError("npv must be finite")
    capital = np.asarray(capital_by_year, dtype=float)
    if capital.ndim == 1 or capital.size == 0:
        capital = capital.reshape(n, -1) if capital.size else np.zeros((n, 1))
    if capital.ndim != 2 or capital.shape[0] != n:
        raise ValueError("capital_by_year must have shape (n_projects,) or (n_projects, n_years + 1)")
    if not np.all(np.isfinite(capital)):
        raise ValueError("capital_by_year must be finite")
    if discount_rate_frac <= -1:
        raise ValueError("discount_rate_frac must be > -1")
    if budget_per_yr is None or np.size(budget_per_yr) == 0:
        budget = np.array([np.inf])
        unconstrained = True
    else:
        budget = np.atleast_1d(np.asarray(budget_per_yr, dtype=float))
        if np.any(np.isnan(budget)) or np.any(budget < 0):
            raise ValueError("budget_per_yr must hold numbers >= 0 (inf = no limit that year)")
        unconstrained = bool(np.all(np.isinf(budget)))
    years = budget.size
    # spend[i, s, y]: capital of project i in plan year y when it starts in plan year s.
    spend = np.zeros((n, years, years))
    for s in range(years):
        width = min(years - s, capital.shape[1])
        spend[:, s, s:s + width] = capital[:, :width]
    delay = np.power(1.0 + discount_rate_frac, -np.arange(years, dtype=float))
    # open[i, s]: project i may start in plan year s (a motor that has failed cannot wait: year 0 only)
    if latest_start_yr is None:
        open_ = np.ones((n, years), dtype=bool)
    else:
        latest = np.broadcast_to(np.asarray(latest_start_yr, dtype=float), (n,))
        if np.any(np.isnan(latest)) or np.any(latest < 0):
            raise ValueError("latest_start_yr must hold numbers >= 0")
        open_ = np.arange(years)[None, :] <= latest[:, None]
    return dict(projects=projects, assets=assets, value=value, capital=capital, budget=budget,
                unconstrained=unconstrained, spend=spend, delay=delay, n=n, years=years, rate=float(discount_rate_frac),
                open=open_)


def _result(data: dict[str, Any], x: np.ndarray, method: str, status: str, message: str,
            gap_frac: float = float("nan")) -> FleetPlan:
    """Build the :class:`FleetPlan` of a 0-1 selection x[i, s]."""
    chosen_i, chosen_s = np.nonzero(x)
    npv_plan = data["value"][chosen_i] * data["delay"][chosen_s]
    spend = data["spend"][chosen_i, chosen_s, :]
    chosen = pd.DataFrame({
        "project_id": pd.Series(data["projects"][chosen_i], dtype="str"),
        "asset_id": pd.Series(data["assets"][chosen_i], dtype="str"),
        "start_yr": chosen_s.astype(int),
        "npv": data["value"][chosen_i],
        "npv_at_plan_start": npv_plan,
        "capital_in_plan_years": spend.sum(axis=1),
    }, columns=_CHOSEN_COLUMNS)
    return FleetPlan(chosen=chosen, spend_by_year=spend.sum(axis=0) if chosen_i.size else np.zeros(data["years"]),
                     budget_per_yr=data["budget"], total_npv=float(npv_plan.sum()), method=method, status=status,
                     message=message, selection=x, gap_frac=gap_frac)


def _unconstrained(data: dict[str, Any], method: str) -> FleetPlan:
    """Best positive-NPV option per asset, all starting in year 0."""
    x = np.zeros((data["n"], data["years"]), dtype=bool)
    frame = pd.DataFrame({"asset": data["assets"], "value": data["value"], "i": np.arange(data["n"])})
    frame = frame[frame["value"] > 0]
    if len(frame):
        best = frame.sort_values(["asset", "value", "i"], ascending=[True, False, True]).groupby("asset").head(1)
        x[best["i"].to_numpy(), 0] = True
    status = "unconstrained" if x.any() else "empty"
    return _result(data, x, method, status, "no budget limit: the best positive-NPV option of each asset"
                   if x.any() else "no project has a positive NPV", 0.0)


def plan_exact(project_id: Any, asset_id: Any, npv: Any, capital_by_year: Any, budget_per_yr: Any,
               discount_rate_frac: float, *, time_limit_s: float = 60.0, mip_rel_gap: float = 1e-4,
               start: Mapping[str, int] | None = None, latest_start_yr: Any = None) -> FleetPlan:
    """Choose at most one option per asset and a start year to maximise total NPV under yearly budgets.

    Parameters
    ----------
    project_id : sequence of str
        Project labels (asset x option), unique, shape (n,).
    asset_id : sequence of str
        Asset of each project; projects of one asset exclude each other.
    npv : array_like
        NPV of each project if it starts in plan year 0 [currency].
    capital_by_year : array_like
        Capital each project spends, shape (n,) (all in its start year) or (n, n_years + 1) by year after
        its start (e.g. :meth:`models.cashflows.CashFlows.capital_spend_by_year`) [currency].
    budget_per_yr : array_like or None
        Capital budget of plan years 0, 1, ... [currency], >= 0; ``inf`` = no limit that year. None or
        empty = no limit at all (best positive-NPV option of each asset, started in year 0).
    discount_rate_frac : float
        Discount rate [frac/yr], > -1, for the delay of a project started in a later plan year.
    time_limit_s : float
        Solver time limit [s], > 0; on reaching it the best plan found is returned with status
        "time_limit" and its proven gap.
    mip_rel_gap : float
        Relative optimality gap at which the solver stops [frac], >= 0; the default 1e-4 (the solver's
        own) proves the plan within 0.01 % of the best possible NPV. Use 0 for a proof of optimality
        (slower on large fleets with tight budgets); an interactive screen may accept 1e-3.
    start : mapping of str to int, optional
        A plan to start from, e.g. the plan of a neighbouring set of assumptions: project label -> plan
        start year. Labels that are not candidates, repeat an asset or fall outside the plan years are
        dropped, projects are dropped (lowest NPV per unit of capital first) until the budgets hold, and
        budget left over is filled in profitability-index order. The best of it, the
        profitability-index plan (:func:`plan_greedy`) and the linear relaxation's whole projects
        (filled the same way) is the solver's first plan. A start changes how fast the solver proves
        its answer, never the gap it proves.
    latest_start_yr : array_like, optional
        The latest plan year each project may start in, shape (n,), >= 0 (default: any plan year). A
        project of a motor that has failed takes 0: it puts the motor back in service now, or not at all.

    Returns
    -------
    FleetPlan
        The chosen projects, the spend per plan year, the total NPV (at plan start) and the proven gap.

    Raises
    ------
    ValueError
        For mismatched lengths, duplicate project labels, NaN values, negative budgets or solver limits.

    Notes
    -----
    Binary x_{i,s} = 1 when project i starts in plan year s (s = 0..Y-1). The 0-1 programme [1], [2]:

        maximise   sum_{i,s} NPV_i (1 + d)^(-s) x_{i,s}
        subject to sum_{i in a, s} x_{i,s} <= 1                       for each asset a,
                   sum_{i,s <= y} K_{i, y-s} x_{i,s} <= B_y             for each plan year y,

    and x_{i,s} = 0 for s beyond project i's latest start (``latest_start_yr``), where K_{i,k} is the
    capital project i spends k years after its start. A delayed project is the same
    project shifted in time: its savings, lives and horizon move with it, so its NPV at plan start is
    its own NPV discounted by the delay (the fleet's horizon effectively extends by the delay). Capital
    spent after the last plan year is not budgeted. Projects with NPV <= 0 are never chosen. The
    problem is a multiple-choice, multi-dimensional knapsack. Its linear relaxation (0 <= x <= 1) is
    solved first: its NPV bounds every plan's, and a first plan within ``mip_rel_gap`` of it is returned
    as proven. On fleets of more than :data:`CORE_ASSETS` assets the first plan is improved by solving
    the core of the problem (:func:`_core_plan`) before that test. Otherwise branch and bound in HiGHS
    [3] runs from the first plan until the gap between the best plan found and the best bound is below
    ``mip_rel_gap``. ``time_limit_s`` covers all of these steps.

    References
    ----------
    .. [1] H. M. Weingartner, *Mathematical Programming and the Analysis of Capital Budgeting Problems*.
       Englewood Cliffs, NJ: Prentice-Hall, 1963.
    .. [2] S. Martello and P. Toth, *Knapsack Problems: Algorithms and Computer Implementations*.
       Chichester: Wiley, 1990.
    .. [3] Q. Huangfu and J. A. J. Hall, "Parallelizing the dual revised simplex method," *Math. Prog.
       Comp.*, vol. 10, pp. 119-142, 2018.

    Examples
    --------
    Two assets, a budget of 100 in one year: the two small projects beat the big one.

    >>> plan = plan_exact(["a/1", "a/2", "b/1"], ["a", "a", "b"], [60.0, 90.0, 50.0],
    ...                   [50.0, 100.0, 50.0], [100.0], 0.08)
    >>> plan.chosen["project_id"].tolist(), plan.total_npv
    (['a/1', 'b/1'], 110.0)
    """
    if not (np.isfinite(time_limit_s) and time_limit_s > 0):
        raise ValueError(f"time_limit_s must be a positive number of seconds, got {time_limit_s!r}")
    if not (np.isfinite(mip_rel_gap) and mip_rel_gap >= 0):
        raise ValueError(f"mip_rel_gap must be >= 0, got {mip_rel_gap!r}")
    data = _prepare(project_id, asset_id, npv, capital_by_year, budget_per_yr, discount_rate_frac, latest_start_yr)
    if data["unconstrained"] or data["n"] == 0:
        return _unconstrained(data, "exact")
    n, years = data["n"], data["years"]
    candidates = np.flatnonzero((data["value"] > 0) & ~_dominated(data))
    x = np.zeros((n, years), dtype=bool)
    if candidates.size == 0:
        return _result(data, x, "exact", "empty", "no project has a positive NPV", 0.0)
    m = candidates.size
    worth = data["value"][candidates, None] * data["delay"][None, :]
    variable = np.arange(m * years).reshape(m, years)

    _, asset_row = np.unique(data["assets"][candidates], return_inverse=True)
    n_assets = asset_row.max() + 1
    rows = [np.repeat(asset_row, years)]
    cols = [variable.ravel()]
    vals = [np.ones(m * years)]
    spend = data["spend"][candidates]  # (m, s, y)
    finite = np.flatnonzero(np.isfinite(data["budget"]))
    for k, y in enumerate(finite):
        i, s = np.nonzero(spend[:, :, y])
        rows.append(np.full(i.size, n_assets + k))
        cols.append(variable[i, s])
        vals.append(spend[i, s, y])
    matrix = coo_array((np.concatenate(vals), (np.concatenate(rows), np.concatenate(cols))),
                       shape=(n_assets + finite.size, m * years)).tocsc()
    matrix.sort_indices()
    upper = np.concatenate([np.ones(n_assets), data["budget"][finite]])

    model = highspy.HighsLp()
    model.num_col_, model.num_row_ = m * years, n_assets + finite.size
    model.col_cost_ = -worth.ravel()  # HiGHS minimises
    model.col_lower_, model.col_upper_ = np.zeros(m * years), data["open"][candidates].ravel().astype(float)
    model.row_lower_, model.row_upper_ = np.full(upper.size, -highspy.kHighsInf), upper
    model.a_matrix_.format_ = highspy.MatrixFormat.kColwise
    model.a_matrix_.start_, model.a_matrix_.index_, model.a_matrix_.value_ = matrix.indptr, matrix.indices, matrix.data

    # first plans: the profitability-index plan, the given start (repaired, then filled) and the LP
    # relaxation's whole projects (filled); the best of them is the solver's first incumbent
    deadline = time.perf_counter() + float(time_limit_s)
    starts = [_greedy_selection(data)]
    if start:
        starts.append(_greedy_selection(data, _repair(data, _selection_from(data, start))))
    relaxed = _relaxation(model, time_limit_s)
    if relaxed is not None:
        whole = np.zeros((n, years), dtype=bool)
        whole[candidates] = (relaxed.x > 1.0 - 1e-9).reshape(m, years)
        starts.append(_greedy_selection(data, _repair(data, whole)))

    def plan_value(x_: np.ndarray) -> float:
        return float((x_ * data["value"][:, None] * data["delay"][None, :]).sum())

    first = max(starts, key=plan_value)
    if relaxed is not None and mip_rel_gap > 0 and asset_row.max() + 1 > CORE_ASSETS:
        core = _core_plan(model, relaxed, asset_row, years, mip_rel_gap, 0.5 * (deadline - time.perf_counter()))
        if core is not None:
            x_core = np.zeros((n, years), dtype=bool)
            x_core[candidates] = core.reshape(m, years)
            first = max((first, x_core), key=plan_value)
    if relaxed is not None:
        # the relaxation's optimum bounds every plan's NPV: a first plan close enough to it is proven
        bound_gap = _relative_gap(relaxed.npv, plan_value(first))
        if bound_gap <= mip_rel_gap:
            status, message = _proven(first, bound_gap, mip_rel_gap)
            return _result(data, first, "exact", status, message, bound_gap)

    solver = _new_solver()
    for name, value in (("time_limit", max(deadline - time.perf_counter(), 1e-3)),
                        ("mip_rel_gap", float(mip_rel_gap)), ("random_seed", 0)):
        solver.setOptionValue(name, value)
    model.integrality_ = [highspy.HighsVarType.kInteger] * (m * years)
    solver.passModel(model)
    if first.any():
        incumbent = highspy.HighsSolution()
        incumbent.col_value = first[candidates].astype(float).ravel().tolist()
        incumbent.value_valid = True
        solver.setSolution(incumbent)
    solver.run()
    status_code = solver.getModelStatus()
    info = solver.getInfo()
    found = info.primal_solution_status != 0  # 0: no feasible point known
    if not found:
        return _result(data, x, "exact", "failed",
                       f"solver stopped without a plan: {solver.modelStatusToString(status_code)}")
    x[candidates] = (np.asarray(solver.getSolution().col_value) > 0.5).reshape(m, years)
    gap = float(info.mip_gap) if np.isfinite(info.mip_gap) else float("nan")
    if status_code == highspy.HighsModelStatus.kOptimal:
        status, message = _proven(x, gap, mip_rel_gap)
    else:
        status = "time_limit"
        why = ("its time limit was reached" if status_code == highspy.HighsModelStatus.kTimeLimit
               else "it was interrupted" if status_code == highspy.HighsModelStatus.kInterrupt
               else "it stopped before a proof")
        message = (f"best plan found before the search stopped ({why}); "
                   f"within {gap * 100:.3g} % of the best possible NPV")
    return _result(data, x, "exact", status, message, max(gap, 0.0) if np.isfinite(gap) else gap)


def _dominated(data: dict[str, Any]) -> np.ndarray:
    """Projects another option of the same asset beats outright (bool, (n,)): no plan needs them.

    Project i is dominated by project j of the same asset when NPV_j >= NPV_i and j spends no more than i
    in every year after its start, with at least one of these strict. Swapping i for j (same start year)
    keeps every budget and does not lower the plan's NPV, so removing i leaves the best plan's NPV as it
    was [1, Sec. 11.2] while the solver has fewer columns to branch on.

    References
    ----------
    .. [1] H. Kellerer, U. Pferschy and D. Pisinger, *Knapsack Problems*. Berlin: Springer, 2004.
    """
    value, capital, assets = data["value"], data["capital"], data["assets"]
    n = value.size
    if n == 0:
        return np.zeros(0, dtype=bool)
    _, asset_row = np.unique(assets, return_inverse=True)
    order = np.argsort(asset_row, kind="stable")
    counts = np.bincount(asset_row)
    slot = np.empty(n, dtype=np.intp)
    slot[order] = np.arange(n) - np.repeat(np.cumsum(counts) - counts, counts)
    width = int(counts.max())
    v = np.full((counts.size, width), -np.inf)
    c = np.full((counts.size, width, capital.shape[1]), np.inf)
    v[asset_row, slot] = value
    c[asset_row, slot] = capital
    # [a, i, j]: j (same asset a) is at least as good as i in value and in every year's capital
    no_worse = (v[:, None, :] >= v[:, :, None]) & (c[:, None, :, :] <= c[:, :, None, :]).all(axis=3)
    better = (v[:, None, :] > v[:, :, None]) | (c[:, None, :, :] < c[:, :, None, :]).any(axis=3)
    beaten = (no_worse & better).any(axis=2)
    return beaten[asset_row, slot]


@dataclass(frozen=True)
class _Relaxed:
    """The plan's linear relaxation at its optimum: x (0..1 per column), reduced costs (of the
    minimised form) and the NPV it reaches [currency], a bound on every plan's NPV."""

    x: np.ndarray
    reduced_cost: np.ndarray
    npv: float


def _relaxation(model: "highspy.HighsLp", time_limit_s: float) -> _Relaxed | None:
    """Solve the plan's linear relaxation (0 <= x <= 1); None when it has no optimal solution in time."""
    solver = _new_solver()
    solver.setOptionValue("time_limit", float(time_limit_s))
    if model.num_col_ >= INTERIOR_POINT_MIN_COLUMNS:
        solver.setOptionValue("solver", "ipm")
        solver.setOptionValue("run_crossover", "on")
    solver.passModel(model)
    solver.run()
    if solver.getModelStatus() != highspy.HighsModelStatus.kOptimal:
        return None
    solution = solver.getSolution()
    return _Relaxed(np.asarray(solution.col_value, dtype=float), np.asarray(solution.col_dual, dtype=float),
                    -float(solver.getInfo().objective_function_value))


def _relative_gap(bound: float, value: float) -> float:
    """(bound - value) / |value| [frac], >= 0; 0 when both are 0, inf when only the value is."""
    if bound - value <= 1e-12 * max(abs(bound), 1.0):
        return 0.0
    return (bound - value) / abs(value) if value != 0 else float("inf")


def _proven(x: np.ndarray, gap_frac: float, mip_rel_gap: float) -> tuple[str, str]:
    """Status and message of a plan proven within ``gap_frac`` of the best possible NPV."""
    if not x.any():
        return "empty", "no project fits the budget"
    if mip_rel_gap == 0 or gap_frac <= 1e-9:
        return "optimal", "optimal plan"
    return "optimal", f"plan proven within {max(gap_frac, 0.0) * 100:.3g} % of the best possible NPV"


def _core_plan(model: "highspy.HighsLp", relaxed: _Relaxed, asset_row: np.ndarray, years: int,
               mip_rel_gap: float, time_limit_s: float) -> np.ndarray | None:
    """A plan that re-opens only the core of the problem: 0-1 per column, or None when none is found.

    The relaxation's optimum is nearly whole (at most one fractional asset per budget year); what the
    best plan changes from it lies among the choices whose reduced cost is close to zero. The
    :data:`CORE_ASSETS` assets owning the columns of smallest reduced cost (and every asset with a
    fractional column) keep all their options free; every other asset keeps the relaxation's whole
    choice. The smaller programme is solved by the same solver until its plan is within a little less
    than ``mip_rel_gap`` of the relaxation's NPV, or for ``time_limit_s``. This is the core idea of
    knapsack algorithms [1]; the plan it gives is feasible for the whole problem and is only a first
    plan: how far it is from the best is judged against the whole relaxation.

    References
    ----------
    .. [1] H. Kellerer, U. Pferschy and D. Pisinger, *Knapsack Problems*. Berlin: Springer, 2004,
       Sec. 5.4 (the core concept) and Sec. 11.2 (multiple-choice knapsack).
    """
    if time_limit_s <= 0:
        return None
    x_lp = relaxed.x
    column_asset = np.repeat(asset_row, years)
    fractional = (x_lp > 1e-9) & (x_lp < 1.0 - 1e-9)
    nearest = np.argsort(np.abs(relaxed.reduced_cost), kind="stable")[:CORE_ASSETS]
    core = np.zeros(asset_row.max() + 1, dtype=bool)
    core[column_asset[nearest]] = True
    core[column_asset[fractional]] = True
    fixed = ~core[column_asset]
    held = np.where(x_lp > 1.0 - 1e-9, 1.0, 0.0)
    sub = highspy.HighsLp()
    sub.num_col_, sub.num_row_ = model.num_col_, model.num_row_
    sub.col_cost_ = model.col_cost_
    sub.col_lower_ = np.where(fixed, held, 0.0)
    sub.col_upper_ = np.where(fixed, held, np.asarray(model.col_upper_, dtype=float))
    sub.row_lower_, sub.row_upper_ = model.row_lower_, model.row_upper_
    sub.a_matrix_ = model.a_matrix_
    sub.integrality_ = [highspy.HighsVarType.kInteger] * model.num_col_
    solver = _new_solver()
    for name, value in (("time_limit", float(time_limit_s)), ("mip_rel_gap", 0.0),
                        ("mip_abs_gap", 0.9 * mip_rel_gap * abs(relaxed.npv)), ("random_seed", 0)):
        solver.setOptionValue(name, value)
    solver.passModel(sub)
    solver.run()
    if solver.getInfo().primal_solution_status == 0:
        return None
    return np.asarray(solver.getSolution().col_value) > 0.5


def _selection_from(data: dict[str, Any], start: Mapping[str, int]) -> np.ndarray:
    """0-1 matrix of a start plan given as project label -> start year (labels unknown here dropped)."""
    x = np.zeros((data["n"], data["years"]), dtype=bool)
    where = {label: i for i, label in enumerate(data["projects"].tolist())}
    taken: set[str] = set()
    for label, year in sorted(start.items(), key=lambda kv: str(kv[0])):
        i = where.get(str(label))
        try:
            s = int(year)
        except (TypeError, ValueError):
            continue
        if (i is None or not 0 <= s < data["years"] or data["value"][i] <= 0 or data["assets"][i] in taken
                or not data["open"][i, s]):
            continue
        x[i, s] = True
        taken.add(data["assets"][i])
    return x


def _repair(data: dict[str, Any], x: np.ndarray) -> np.ndarray:
    """Drop projects from a plan, lowest NPV per unit of capital first, until every budget holds."""
    x = x.copy()
    spend = np.einsum("is,isy->y", x.astype(float), data["spend"])
    tolerance = 1e-9 * np.maximum(1.0, np.where(np.isfinite(data["budget"]), data["budget"], 0.0))
    if np.all(spend <= data["budget"] + tolerance):
        return x
    chosen_i, chosen_s = np.nonzero(x)
    capital = data["spend"][chosen_i, chosen_s].sum(axis=1)
    ratio = data["value"][chosen_i] / np.where(capital > 0, capital, np.inf)
    for k in np.lexsort((chosen_i, ratio)):
        if np.all(spend <= data["budget"] + tolerance):
            break
        spend = spend - data["spend"][chosen_i[k], chosen_s[k]]
        x[chosen_i[k], chosen_s[k]] = False
    return x


def _greedy_selection(data: dict[str, Any], x: np.ndarray | None = None) -> np.ndarray:
    """0-1 matrix of the profitability-index plan (see :func:`plan_greedy`), filled on top of ``x``
    (a plan within the budgets) when one is given."""
    n, years = data["n"], data["years"]
    capital = data["capital"]
    discount = np.power(1.0 + data["rate"], -np.arange(capital.shape[1], dtype=float))
    capital_pv = capital @ discount
    value = data["value"]
    with np.errstate(divide="ignore", invalid="ignore"):
        pi = np.where(capital_pv > 0, value / np.where(capital_pv > 0, capital_pv, 1.0), np.inf)
    order = np.lexsort((-value, -pi))
    x = np.zeros((n, years), dtype=bool) if x is None else x.copy()
    left = data["budget"] - np.einsum("is,isy->y", x.astype(float), data["spend"])
    _, asset_code = np.unique(data["assets"], return_inverse=True)
    taken = np.zeros(int(asset_code.max()) + 1 if n else 0, dtype=bool)
    taken[asset_code[np.flatnonzero(x.any(axis=1))]] = True
    tolerance = 1e-9 * np.maximum(1.0, np.where(np.isfinite(data["budget"]), data["budget"], 0.0))
    _greedy_fill(order, np.asarray(value, dtype=float), asset_code.astype(np.intp),
                 np.ascontiguousarray(data["spend"], dtype=float), np.asarray(left, dtype=float).copy(),
                 np.asarray(tolerance, dtype=float), x, taken, np.ascontiguousarray(data["open"]))
    return x


@numba.njit(nogil=True, cache=True)
def _greedy_fill(order, value, asset_code, spend, left, tolerance, x, taken, open_):  # pragma: no cover - compiled
    """In ``order``, start each project whose asset has none yet, with value > 0, in the earliest plan
    year open to it (``open_``) whose spend fits every year's budget left (``left`` and ``x``, ``taken``
    updated in place)."""
    years, n_y = spend.shape[1], spend.shape[2]
    for i in order:
        if value[i] <= 0 or taken[asset_code[i]]:
            continue
        for s in range(years):
            if not open_[i, s]:
                continue
            fits = True
            for y in range(n_y):
                if not spend[i, s, y] <= left[y] + tolerance[y]:
                    fits = False
                    break
            if fits:
                for y in range(n_y):
                    left[y] = left[y] - spend[i, s, y]
                x[i, s] = True
                taken[asset_code[i]] = True
                break


def plan_greedy(project_id: Any, asset_id: Any, npv: Any, capital_by_year: Any, budget_per_yr: Any,
                discount_rate_frac: float, latest_start_yr: Any = None) -> FleetPlan:
    """Fund projects in order of profitability index while the yearly budgets allow.

    Parameters
    ----------
    project_id, asset_id, npv, capital_by_year, budget_per_yr, discount_rate_frac, latest_start_yr
        As in :func:`plan_exact`.

    Returns
    -------
    FleetPlan
        The greedy plan (method "greedy").

    Notes
    -----
    Projects with NPV > 0 are ranked by PI = NPV / PV(capital) (ties: larger NPV first). In that order,
    a project whose asset has no project yet is started in the earliest plan year in which all its
    capital fits the budgets left; otherwise it is skipped. This is the textbook capital-rationing rule
    [1]; it is optimal for one budget year when projects are divisible, not in general.

    References
    ----------
    .. [1] R. A. Brealey, S. C. Myers and F. Allen, *Principles of Corporate Finance*, 10th ed.
       New York: McGraw-Hill, 2011, ch. 5.

    Examples
    --------
    >>> plan = plan_greedy(["a/1", "a/2", "b/1"], ["a", "a", "b"], [60.0, 90.0, 50.0],
    ...                    [50.0, 100.0, 50.0], [100.0], 0.08)
    >>> plan.chosen["project_id"].tolist()
    ['a/1', 'b/1']
    """
    data = _prepare(project_id, asset_id, npv, capital_by_year, budget_per_yr, discount_rate_frac, latest_start_yr)
    if data["unconstrained"] or data["n"] == 0:
        return _unconstrained(data, "greedy")
    x = _greedy_selection(data)
    status = "optimal" if x.any() else "empty"
    message = "greedy plan by profitability index" if x.any() else "no project fits the budget"
    return _result(data, x, "greedy", status, message)


def compare_plans(exact: FleetPlan, greedy: FleetPlan) -> pd.Series:
    """Return how much NPV the greedy plan leaves on the table compared with the exact one.

    Parameters
    ----------
    exact, greedy : FleetPlan
        Plans of the same projects and budgets.

    Returns
    -------
    pandas.Series
        ``npv_exact``, ``npv_greedy``, ``shortfall`` [currency] (>= 0 when the exact plan is optimal),
        ``shortfall_frac`` [frac of the exact NPV; 0 when that is 0], ``projects_exact``,
        ``projects_greedy`` [-].
    """
    shortfall = exact.total_npv - greedy.total_npv
    frac = shortfall / exact.total_npv if exact.total_npv > 0 else 0.0
    return pd.Series({"npv_exact": exact.total_npv, "npv_greedy": greedy.total_npv, "shortfall": shortfall,
                      "shortfall_frac": frac, "projects_exact": float(len(exact.chosen)),
                      "projects_greedy": float(len(greedy.chosen))})


def abatement_curve(project_id: Any, asset_id: Any, npv: Any, co2_avoided_t_per_yr: Any,
                    abatement_cost_per_t: Any) -> pd.DataFrame:
    """Return the data of a marginal abatement cost curve, one best option per asset.

    Parameters
    ----------
    project_id, asset_id : sequence of str
        Project labels and their assets, shape (n,).
    npv : array_like
        NPV of each project [currency].
    co2_avoided_t_per_yr : array_like
        Average CO2 avoided per year [t/yr] (the bar width).
    abatement_cost_per_t : array_like
        Levelised cost per tonne avoided [currency/t] (the bar height; negative = the project pays), e.g.
        from :func:`models.finance.abatement_cost_per_t`.

    Returns
    -------
    pandas.DataFrame
        One row per asset with some CO2 avoided, sorted by ``abatement_cost_per_t`` ascending:
        ``project_id``, ``asset_id``, ``abatement_cost_per_t`` [currency/t], ``co2_avoided_t_per_yr``
        [t/yr], ``bar_start_t_per_yr`` and ``cumulative_co2_avoided_t_per_yr`` [t/yr] (left and right
        edge of the bar), ``npv`` [currency].

    Notes
    -----
    The options of one asset exclude each other, so each asset contributes the option with the largest
    NPV among those that avoid CO2 (the one the plan would pick without a budget). Bars are sorted by
    cost per tonne and stacked along the tonnes axis [1].

    References
    ----------
    .. [1] A. K. Meier, "Supply curves of conserved energy," Lawrence Berkeley Laboratory, Rep. LBL-14686,
       1982.

    Examples
    --------
    >>> curve = abatement_curve(["a/1", "a/2", "b/1"], ["a", "a", "b"], [10.0, 30.0, -5.0],
    ...                         [2.0, 1.0, 4.0], [-5.0, -30.0, 1.25])
    >>> curve["project_id"].tolist(), curve["cumulative_co2_avoided_t_per_yr"].tolist()
    (['a/2', 'b/1'], [1.0, 5.0])
    """
    frame = pd.DataFrame({
        "project_id": pd.Series(np.atleast_1d(np.asarray(project_id, dtype=object)).astype(str), dtype="str"),
        "asset_id": pd.Series(np.atleast_1d(np.asarray(asset_id, dtype=object)).astype(str), dtype="str"),
        "abatement_cost_per_t": np.atleast_1d(np.asarray(abatement_cost_per_t, dtype=float)),
        "co2_avoided_t_per_yr": np.atleast_1d(np.asarray(co2_avoided_t_per_yr, dtype=float)),
        "npv": np.atleast_1d(np.asarray(npv, dtype=float)),
    })
    if frame[["abatement_cost_per_t", "co2_avoided_t_per_yr", "npv"]].isna().any().any():
        raise ValueError("npv, co2_avoided_t_per_yr and abatement_cost_per_t must not be NaN")
    frame = frame[(frame["co2_avoided_t_per_yr"] > 0) & np.isfinite(frame["abatement_cost_per_t"])]
    frame = frame.sort_values(["asset_id", "npv"], ascending=[True, False], kind="stable").groupby("asset_id").head(1)
    frame = frame.sort_values(["abatement_cost_per_t", "project_id"], kind="stable").reset_index(drop=True)
    cumulative = frame["co2_avoided_t_per_yr"].cumsum()
    frame["bar_start_t_per_yr"] = cumulative - frame["co2_avoided_t_per_yr"]
    frame["cumulative_co2_avoided_t_per_yr"] = cumulative
    return frame[["project_id", "asset_id", "abatement_cost_per_t", "co2_avoided_t_per_yr",
                  "bar_start_t_per_yr", "cumulative_co2_avoided_t_per_yr", "npv"]]


#: Data-quality score [%] below which a project's figures rest mostly on defaults: its nameplate and load are
#: to be checked before the money is approved (common practice: about a third of the fields defaulted).
LOW_DATA_QUALITY_PCT = 70.0


def low_data_quality(plan: pd.DataFrame, data_quality_pct: Mapping[str, float],
                     threshold_pct: float = LOW_DATA_QUALITY_PCT) -> tuple[int, float]:
    """How much of a plan rests on assets of low data quality.

    Parameters
    ----------
    plan : pandas.DataFrame
        The plan's projects: asset_id and npv_at_plan_start [currency].
    data_quality_pct : mapping of str to float
        Each asset's data-quality score [%], 0-100 (share of its nameplate fields known).
    threshold_pct : float
        Scores below it count as low (default :data:`LOW_DATA_QUALITY_PCT`).

    Returns
    -------
    (int, float)
        The number of the plan's projects on such assets, and their share of the plan's positive NPV at
        plan start [-], 0-1 (0 for an empty plan or one of no positive NPV).

    Examples
    --------
    >>> plan = pd.DataFrame({"asset_id": ["A", "B", "C"], "npv_at_plan_start": [600.0, 300.0, 100.0]})
    >>> low_data_quality(plan, {"A": 55.0, "B": 90.0, "C": 69.9})
    (2, 0.7)
    """
    if plan is None or not len(plan):
        return 0, 0.0
    score = plan["asset_id"].map(lambda a: data_quality_pct.get(a, np.nan)).to_numpy(dtype=float)
    low = score < float(threshold_pct)
    npv = np.maximum(plan["npv_at_plan_start"].to_numpy(dtype=float), 0.0)
    total = float(npv.sum())
    return int(low.sum()), (float(npv[low].sum()) / total if total > 0 else 0.0)


def plan_beyond_horizon_text(n_plan_years: int, horizon_yr: int) -> str:
    """A caution when the plan's budget years run to or past the study horizon ("" otherwise).

    A project started in plan year s is valued over its own horizon from its start; a plan year at or
    beyond the horizon starts projects after the study period the rest of the case is read over.

    Examples
    --------
    >>> plan_beyond_horizon_text(3, 15)
    ''
    >>> plan_beyond_horizon_text(3, 1)[:60]
    'the plan has 3 budget years but the study horizon is 1 year:'
    """
    n, h = int(n_plan_years), int(horizon_yr)
    if n <= h:
        return ""
    return (f"the plan has {n} budget years but the study horizon is {h} year{'s' if h != 1 else ''}: projects "
            f"started in plan year {h} or later begin after the study period, and each is valued over {h} "
            f"year{'s' if h != 1 else ''} from its own start; lengthen the horizon or shorten the budget list")


def project_labels(frame: pd.DataFrame) -> pd.Series:
    """The project label "asset/option" of each row of a table with ``asset_id`` and ``option_id``
    (the labels the plan and the cash flows use)."""
    return frame["asset_id"].astype(str) + "/" + frame["option_id"].astype(str)


def capital_in_budget_years(plan_frame: pd.DataFrame, results: pd.DataFrame, capital_spend_by_year: np.ndarray,
                            n_years: int) -> tuple[float, float]:
    """The plan's gross capital spent within its first ``n_years`` plan years, and after them [currency].

    Parameters
    ----------
    plan_frame : pandas.DataFrame
        A plan (asset_id, option_id, start_yr).
    results : pandas.DataFrame
        The per-project results whose rows ``capital_spend_by_year`` follows (asset_id, option_id).
    capital_spend_by_year : numpy.ndarray
        Gross capital by project and project year [currency] (:meth:`models.cashflows.CashFlows.capital_spend_by_year`).
    n_years : int
        Plan years the budgets cover.

    Examples
    --------
    >>> res = pd.DataFrame({"asset_id": ["A", "B"], "option_id": ["x", "x"]})
    >>> plan = pd.DataFrame({"asset_id": ["B"], "option_id": ["x"], "start_yr": [1]})
    >>> capital_in_budget_years(plan, res, np.array([[5.0, 0, 0], [2.0, 3.0, 4.0]]), 2)
    (2.0, 7.0)
    """
    by_year, after = plan_spend_by_year(plan_frame, results, capital_spend_by_year, n_years)
    return float(by_year.sum()), after


def plan_spend_by_year(plan_frame: pd.DataFrame, results: pd.DataFrame, capital_spend_by_year: np.ndarray,
                       n_years: int) -> tuple[np.ndarray, float]:
    """A plan's gross capital in each of its first ``n_years`` plan years, and after them [currency].

    A project started in plan year s spends its k-th project year's capital in plan year s + k, as
    :func:`plan_exact` counts it against the budgets. Parameters as :func:`capital_in_budget_years`.

    Examples
    --------
    >>> res = pd.DataFrame({"asset_id": ["A", "B"], "option_id": ["x", "x"]})
    >>> plan = pd.DataFrame({"asset_id": ["A", "B"], "option_id": ["x", "x"], "start_yr": [0, 1]})
    >>> by_year, after = plan_spend_by_year(plan, res, np.array([[5.0, 1.0, 0], [2.0, 3.0, 4.0]]), 2)
    >>> by_year.tolist(), after
    ([5.0, 3.0], 7.0)
    """
    if plan_frame.empty:
        return np.zeros(int(n_years)), 0.0
    spend = np.asarray(capital_spend_by_year, dtype=float)[_result_rows(plan_frame, results)]
    year = plan_frame["start_yr"].to_numpy(dtype=int)[:, None] + np.arange(spend.shape[1])[None, :]
    inside = (year >= 0) & (year < n_years)
    by_year = np.bincount(year[inside], weights=spend[inside], minlength=int(n_years))[:int(n_years)]
    return by_year, float(spend.sum() - by_year.sum())


def _result_rows(plan_frame: pd.DataFrame, results: pd.DataFrame) -> np.ndarray:
    """The row of ``results`` of each project of ``plan_frame`` (by its "asset/option" label)."""
    rows = pd.Index(project_labels(results)).get_indexer(project_labels(plan_frame))
    if (rows < 0).any():
        raise ValueError("the plan holds a project the results do not")
    return rows


def plan_purchase_yr(plan_frame: pd.DataFrame, results: pd.DataFrame,
                     capital_spend_by_year: np.ndarray | None) -> np.ndarray:
    """The plan year each plan project's capital is first spent (its purchase), shape (len(plan_frame),).

    A project started in plan year s whose first capital falls in its project year k is bought in plan
    year s + k: a motor replaced when it fails is bought the year it is expected to fail, not the year its
    project enters the plan. A project without capital, or without the capital by project year
    (``capital_spend_by_year`` None), counts its start year.

    Examples
    --------
    >>> res = pd.DataFrame({"asset_id": ["A", "B"], "option_id": ["x", "x"]})
    >>> plan = pd.DataFrame({"asset_id": ["A", "B"], "option_id": ["x", "x"], "start_yr": [1, 2]})
    >>> plan_purchase_yr(plan, res, np.array([[0.0, 0.0, 5.0], [2.0, 0.0, 0.0]])).tolist()
    [3, 2]
    """
    start = plan_frame["start_yr"].to_numpy(dtype=int) if len(plan_frame) else np.zeros(0, dtype=int)
    if capital_spend_by_year is None or not len(plan_frame):
        return start
    paid = np.asarray(capital_spend_by_year, dtype=float)[_result_rows(plan_frame, results)] > 0.005  # (half a cent: a rounding residue is no outlay)
    first = np.where(paid.any(axis=1), paid.argmax(axis=1), 0)
    return start + first


def plan_capital_spent(plan_frame: pd.DataFrame, results: pd.DataFrame, capital_spend_by_year: np.ndarray | None,
                       n_years: int) -> tuple[np.ndarray, float]:
    """A plan's gross capital spent in each of its first ``n_years`` plan years, and after them [currency].

    As :func:`plan_spend_by_year` (the year the budgets count it: a motor replaced when it fails is bought
    in the plan year it is expected to fail, not the year its project enters the plan; repeat purchases
    within the horizon fall after the plan years). Without the capital by project year
    (``capital_spend_by_year`` None) each project's ``capital`` counts in its start year.

    Examples
    --------
    >>> res = pd.DataFrame({"asset_id": ["A"], "option_id": ["x"]})
    >>> plan = pd.DataFrame({"asset_id": ["A"], "option_id": ["x"], "start_yr": [0], "capital": [5.0]})
    >>> by_year, later = plan_capital_spent(plan, res, np.array([[0.0, 0.0, 5.0]]), 2)
    >>> by_year.tolist(), later
    ([0.0, 0.0], 5.0)
    >>> by_year, later = plan_capital_spent(plan, res, None, 2)
    >>> by_year.tolist(), later
    ([5.0, 0.0], 0.0)
    """
    n_years = int(n_years)
    if plan_frame is None or plan_frame.empty:
        return np.zeros(n_years), 0.0
    if capital_spend_by_year is not None:
        return plan_spend_by_year(plan_frame, results, capital_spend_by_year, n_years)
    start = plan_frame["start_yr"].to_numpy(dtype=int)
    capital = plan_frame["capital"].to_numpy(dtype=float)
    inside = (start >= 0) & (start < n_years)
    return (np.bincount(start[inside], weights=capital[inside], minlength=n_years)[:n_years],
            float(capital[~inside].sum()))


def option_labels(frame: pd.DataFrame) -> dict[str, str]:
    """Option id -> the option's label in the options catalogue, from a table of projects with ``option_id``
    and ``label`` (e.g. the per-project results)."""
    first = frame.drop_duplicates("option_id")
    return dict(zip(first["option_id"].astype(str), first["label"].astype(str)))


def project_name(project_id: str, labels: Mapping[str, str]) -> str:
    """A project as a reader knows it, "asset: option label", from its project label "asset/option".

    Parameters
    ----------
    project_id : str
        The project label (:func:`project_labels`); the option id is what follows its last "/".
    labels : mapping of str to str
        Option id -> label (:func:`option_labels`).

    Returns
    -------
    str
        "asset: label"; the project label as it is when its option has no label in ``labels``.

    Examples
    --------
    >>> project_name("HRW-A01/capacitor", {"capacitor": "Motor-terminal capacitor"})
    'HRW-A01: Motor-terminal capacitor'
    >>> project_name("HRW-A01/wfsm", {})
    'HRW-A01/wfsm'
    """
    asset_id, _, option_id = str(project_id).rpartition("/")
    return f"{asset_id}: {labels[option_id]}" if asset_id and option_id in labels else str(project_id)


def plan_choice(op, plan_frame: pd.DataFrame) -> np.ndarray:
    """Option position of every asset under a plan (0 = today's motor), by index lookup (no per-row scan)."""
    choice = np.zeros(len(op.asset_ids), dtype=int)
    if len(plan_frame):
        assets = pd.Index(op.asset_ids.astype(str)).get_indexer(plan_frame["asset_id"].astype(str))
        options = pd.Index(op.option_ids.astype(str)).get_indexer(plan_frame["option_id"].astype(str))
        if (assets < 0).any() or (options < 0).any():
            raise ValueError("the plan names an asset or option the operating result does not hold")
        choice[assets] = options
    return choice
