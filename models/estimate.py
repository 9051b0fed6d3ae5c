"""How long a run will take and how much memory it will need, estimated before it starts.

The estimate multiplies the size of the work (assets x options x steps, and assets alone for the
finance stages) by per-element costs measured by ``benchmarks/bench_fleet.py`` on the reference machine
(2 cores, 24 GiB, see docs/performance.md, "Fleet benchmark"), and builds the memory peak from the
arrays the run keeps (docs/scale.md, "Memory model"). It is a planning figure for a large run, good to
about a factor of two: other work on the machine, a slower CPU, tariffs with more clauses or tighter
budgets (a longer plan search) move it.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

from models.io import available_bytes  # noqa: F401 (the machine's free memory, read here as models.estimate's)
from models.operation import (CHUNK_ELEMENTS, PHYSICS_THREADS, MemoryBudgets, case_index, default_budgets,
                              interval_bytes, options_with_baseline, site_partition)
from models.wording import counted

#: Machines stage per asset-option-step [s], one thread: 8.9 s of wall time for 10,000 assets x 11 options x
#: 8,760 steps with two site threads (bench_fleet, local engine, 2026-12-04 night, 44.8 s end to end, load average
#: 1.2 on the 2-core reference machine, its numpy pass 96.6 ms: a slow state of the host; the machines stage has
#: not changed since, docs/performance.md), times the two threads' gain 1.45. On a fast state of the host (numpy
#: pass 37-41 ms) the stage took 5.2-5.5 s: the estimate is then high by that much.
MACHINES_S_PER_ELEMENT = 8.9 * 1.45 / (10_000 * 11 * 8760)
#: Site-bill attribution per asset-option-step [s], one thread: 6.3 s of wall time, same run, times 1.45 (4.4-4.6 s
#: on the fast state).
SITE_BILLS_S_PER_ELEMENT = 6.3 * 1.45 / (10_000 * 11 * 8760)
#: Finance and the plan's monthly bills per asset [s]: 4.3 s per 10,000 assets (3.2 s finance and 1.1 s
#: bills in the 50.3 s run above; budgets per motor as the demo's: the plan's bills read the chosen options'
#: rows through the sites' kept curve books). The end of life and the Monte Carlo (4.2 s) run beside the
#: plan, which takes longer, and are counted within it.
ECONOMICS_S_PER_ASSET = 4.3 / 10_000
#: Exact fleet plan [s]: 14.7 s for 10,000 assets (same run: the first solve, the check of the exact and
#: the rank-order plans' reactive projects beside the rest of each plan, the second solve); 28.2 s for
#: 5,000 assets in the same session (the solver's search varies from fleet to fleet); with the tight
#: budgets of a small plant on a large fleet each solve stops at its 60 s limit (models.plan.plan_exact),
#: so the estimate is capped at two limits and the check.
PLAN_S_PER_ASSET = 14.7 / 10_000
PLAN_MAX_S = 130.0
#: Exact fleet plan of up to 1,000 assets [s per asset]: 16.8 s for 1,000 assets (same session; a fleet of
#: that size is solved without a core programme, its proof takes longer per asset), the least a larger
#: fleet is given too.
PLAN_SMALL_S_PER_ASSET = 16.8 / 1_000
#: Each exact plan's own set-up and proof beyond its assets [s]: the demo's four plans (its own and its three named
#: scenarios', each with its reactive check) took about 9 s for 82 assets (2026-12-05, the Intel host of
#: docs/performance.md, "2026-12-05, night"; 0.3-7 s a plan), 2.25 s a plan, of which its 82 assets at
#: :data:`PLAN_SMALL_S_PER_ASSET` account for 1.38 s.
PLAN_FIXED_S = 9.0 / 4 - 82 * PLAN_SMALL_S_PER_ASSET
#: Reading and validating a case [s per asset] and [s per interval of its profiles]: the benchmark's 10,000-asset
#: fleet took 1.9 s with 400 shared hourly profiles (3.5 million intervals; docs/performance.md "2026-12-04, last")
#: and 24.4 s with a profile per motor at 15-minute steps (350.4 million intervals, the Parquet table read batch
#: by batch; benchmarks/bench_fleet.py --step-minutes 15 --assets-per-profile 1, docs/performance.md "2026-12-04,
#: after the last"): (24.4 - 1.9) s over the 346.9 million intervals more, and the rest per asset. The hourly
#: fleet with a profile per motor (87.6 million intervals) took 7.3 s in the same round, 7.4 s by these figures.
LOAD_S_PER_PROFILE_INTERVAL = (24.4 - 1.9) / (350.4e6 - 3.504e6)
LOAD_S_PER_ASSET = (1.9 - LOAD_S_PER_PROFILE_INTERVAL * 3.504e6) / 10_000
#: A loaded profile's memory per interval [bytes] when the case's own is not known: its value and its
#: timestamp, 8 bytes each (profiles on one grid share their timestamps, models.case: a case's profiles are
#: counted as they are held, :attr:`_RunSize.profile_bytes`).
PROFILE_BYTES_PER_INTERVAL = 16
#: Imports and writing the result files [s]: ``drivecase check`` of the demo took 1.35 s (imports, and reading the
#: case, which :data:`LOAD_S_PER_ASSET` counts apart: about 0.1 s) and the writing of its result files about 0.8 s
#: (2026-12-05, the Intel host of docs/performance.md, "2026-12-05, night").
FIXED_S = 2.0
#: Resident memory of the interpreter, libraries and a loaded case before the analysis [bytes] (the
#: remainder of the 1,000-asset peak of 1,930 MiB once the arrays below are counted).
BASE_BYTES = 250 * 2**20
#: Temporaries of the machine models per asset-step of one block [bytes]: about 40 float64 arrays of the
#: block's size live at once (common to the physics peak of both benchmark sizes, docs/scale.md).
BLOCK_TEMP_BYTES_PER_ELEMENT = 40 * 8
#: A block of a run above the dense budget, per asset-step [bytes]: it keeps its options as curve tables
#: (:data:`models.operation.CURVE_CHUNK_ELEMENTS` asset-steps a block) and holds today's power, the reference
#: load, the grid's cells and positions and the models' temporaries, about 60 bytes per asset-step
#: (models.operation); 70 here, as the peaks of 2,000-asset fleets on 15-minute profiles (4.77 GiB for 3.81
#: estimated before the curve blocks were counted, measured with the process and its children's resident
#: memory summed) came out above the 60.
CURVE_BLOCK_BYTES_PER_ELEMENT = 70
#: Resident memory of a Dask worker process before its first site [bytes]: the interpreter with numpy,
#: pandas, numba and this package's models loaded, about 0.3 GiB idle after a task (measured on a local
#: cluster of 2 workers, 500-2,000-asset fleets).
WORKER_BASE_BYTES = 300 * 2**20
#: Economics per asset-option [bytes]: cash flows by component and year, metrics, LCC and plan tables,
#: and the plan's bills (fitted to the economics peaks of the benchmark, docs/scale.md; a run keeps freed
#: memory for reuse, models.memory, so the peak is the high-water mark of its largest stage; refitted to the
#: 3,908 MiB of the 10,000-asset run with the plan's reactive check, which holds a site's plan rows per thread;
#: the 5,057 MiB of the 34.6 s run above is this plus the plans' rows kept, below).
ECONOMICS_BYTES_PER_PAIR = 20 * 1024
#: Curve books kept per asset-step by the local engine above the dense budget [bytes] (tables, grid cells
#: and positions, rows of their own): 2.06 GiB for the benchmark's 10,000 assets x 11 options x 8,760 steps
#: (docs/scale.md, memory model), held from each site's physics to the end of the run within
#: :data:`models.operation.KEPT_BOOKS_BUDGET_BYTES`.
BOOK_BYTES_PER_ASSET_STEP = 2.06 * 2**30 / (10_000 * 8760)
#: Time a run spends recomputing the plan's rows of sites whose curve books it does not keep, per asset-step
#: of those sites [s]: 5.5 s more in the plan and its bills for the 10,000-asset fleet run with no books kept
#: (benchmarks/bench_fleet.py, docs/performance.md "2026-12-04, night": plan +4.5 s, bills +1.0 s).
UNBOOKED_S_PER_ASSET_STEP = 5.5 / (10_000 * 8760)
#: Share of today's per-interval rows the plan's check and bills read, the rows kept for them [-]: the exact
#: plan of the 10,000-asset benchmark fleet chose about 6,000 of its 10,000 assets (docs/scale.md, memory
#: model: 0.8 GiB of rows), so a budget of 1 GiB keeps every row read.
PLAN_ROWS_SHARE = 0.6
#: Time a run spends recomputing again, at each reading, the plan's rows it does not keep [s per GiB of kW and
#: kVAr rows not kept]: the 10,000-asset fleet with no curve books and no rows kept took 43.6 s in the plan and
#: 3.3 s in its bills, against 24.6 and 1.8 s with no books and 1 GiB of rows kept, which kept every row read
#: (benchmarks/bench_fleet.py, docs/performance.md "2026-12-04: a run within a memory limit"): 20.5 s for the
#: 0.78 GiB of rows read (0.6 x 1.31 GiB) no longer kept. That run also had smaller curve-table blocks and
#: today's power in a mapped file, which the plan reads too: a planning figure.
UNKEPT_S_PER_GIB = (43.6 + 3.3 - 24.6 - 1.8) / (PLAN_ROWS_SHARE * 10_000 * 8760 * 16 / 2**30)
#: Speed-up of the physics per extra site thread [-]: two threads ran the 10,000-asset fleet's physics
#: 1.45x as fast as one (12.4 s against 18.0 s, same machine; the threads hand the interpreter lock to
#: each other thousands of times per site, docs/performance.md).
THREAD_GAIN = 0.45
#: Cost of the physics on a Dask worker, as a multiple of one local thread's [-]: a local cluster of two
#: workers ran the 10,000-asset fleet's physics in 33.6 and 37.4 s against 18.6 and 21.7 s for the local
#: engine's two threads, run in turn on the same machine in the same hour (benchmarks/bench_fleet.py, evening
#: of 2026-12-02: the workers share the 2 cores with the process that sends the sites and gathers them, and
#: each site's inputs, results and curve books travel between processes). Two workers: 35.5 / 20.15 = 1.76
#: times the two threads' time, that is 1.76 x 2 / (1 + THREAD_GAIN) = 2.43 times one thread's per worker.
#: Workers on machines of their own should do better; the estimate keeps the figure measured.
DASK_WORKER_COST = 1.76 * 2 / (1 + THREAD_GAIN)


@dataclass(frozen=True)
class Estimate:
    """Estimated wall time and peak memory of a run.

    Attributes
    ----------
    seconds : float
        Wall time of ``drivecase run`` with the engine asked for [s].
    peak_bytes : int
        Peak resident memory [bytes].
    note : str
        One line for the user: the size of the work, the two figures, and what the run keeps in memory.
    """

    seconds: float
    peak_bytes: int
    note: str


def estimate_run(case, workers: int = 1, threads: int | None = None, workers_here: bool = True,
                 dask: bool | None = None, budgets: MemoryBudgets | None = None) -> Estimate:
    """Estimate the wall time and peak memory of a run from the size of the case.

    Parameters
    ----------
    case : models.case.Case
        A validated case.
    workers : int
        Dask workers the physics is spread over (1 = the local engine), >= 1. Sites run in parallel, so
        the physics time divides by at most the number of sites.
    threads : int, optional
        Sites worked at once by the local engine (default :data:`models.operation.PHYSICS_THREADS`;
        ignored with Dask workers); each holds one site's blocks.
    workers_here : bool
        The Dask workers run on this machine (a local cluster): their memory counts in the peak. With a
        scheduler elsewhere (False) the peak is this machine's, and the note gives each worker's need.
    dask : bool, optional
        The Dask engine (default: when ``workers`` > 1); a Dask run of one worker is not the local engine.
    budgets : models.operation.MemoryBudgets, optional
        What the run keeps in memory (default :func:`models.operation.default_budgets`).

    Returns
    -------
    Estimate

    Notes
    -----
    t = t_fixed + n_a n_o n_t (c_machines + c_bills) / s + n_a (c_load + c_economics)
    + (1 + n_scen) t_plan + n_scen n_a c_economics, t_plan = min(n_a c_plan, t_plan,max), for the case's
    n_scen named scenarios (each runs the economics and its own plan), with s = min(workers, n_sites) / d on Dask (d =
    :data:`DASK_WORKER_COST`) and 1 + g (k - 1) for k local site threads (g = :data:`THREAD_GAIN`), and
    the constants of this module (measured by
    ``benchmarks/bench_fleet.py`` with one thread), with the case's profiles read at
    :data:`LOAD_S_PER_PROFILE_INTERVAL`. Peak = base + the profiles (as held) +
    per-interval store (every option when
    it fits :data:`models.operation.DENSE_INTERVAL_BUDGET_BYTES`, else today's motors, at most
    :data:`models.operation.TODAY_IN_MEMORY_BUDGET_BYTES`, the rest in a temporary file) + the curve books
    a run keeps above the dense budget (:data:`BOOK_BYTES_PER_ASSET_STEP`, at most
    :data:`models.operation.KEPT_BOOKS_BUDGET_BYTES`) + the larger of
    the physics (per thread: the largest site's today's power and loads, one block's per-option arrays and
    temporaries, or above the dense budget one curve block, :data:`CURVE_BLOCK_BYTES_PER_ELEMENT`) and the
    economics (one site's meter arrays, the per-asset-option tables, the rows kept and, where a site's books
    are not kept, one block of every option recomputed with its temporaries per thread of the plan's bills:
    0.5 GiB with two threads on an hourly year, for 0.33 and 0.48 GiB measured above the rest at 10,000
    assets without books, docs/performance.md "2026-12-04: a run within a memory limit"). On Dask the physics runs in the
    workers: each holds :data:`WORKER_BASE_BYTES` and one site's physics (and, on a dense run, the site's
    every-option power it sends back), counted in the peak when the workers are on this machine (a local
    cluster is closed before the economics). Reading the case, over before the estimate is made, is not
    counted: a profile table is checked against the free memory before it is read (:mod:`models.io`).
    """
    return _estimate(_RunSize.of(case), workers, threads, workers_here, dask, budgets)


@dataclass(frozen=True)
class _RunSize:
    """The sizes an estimate is made of: assets, options (today's included), steps, sites, the largest site, and
    the intervals of the case's profiles."""

    n_a: int
    n_o: int
    n_t: int
    n_sites: int
    largest: int
    profile_intervals: int = 0
    #: memory the profiles hold [bytes] (None: :data:`PROFILE_BYTES_PER_INTERVAL` per interval)
    profile_bytes: int | None = None
    #: the case's named scenarios (scenarios.toml): each runs the economics and solves a plan of its own
    n_scenarios: int = 0

    @classmethod
    def of(cls, case) -> "_RunSize":
        sites = site_partition(case)
        profiles = getattr(case, "profiles", {})
        indexes = {id(series.index): series.index for series in profiles.values()}  # (shared by profiles on a grid)
        held = sum(series.to_numpy().nbytes for series in profiles.values()) + sum(
            index.nbytes for index in indexes.values())
        return cls(len(case.assets), len(options_with_baseline(case.options)), len(case_index(case)), len(sites),
                   max((len(rows) for _, rows in sites), default=0),
                   sum(len(series) for series in profiles.values()), int(held),
                   len(getattr(case, "scenarios", ()) or ()))


def _dense_block_bytes(n_assets: int, n_o: int, n_t: int) -> int:
    """A block of every option per interval with the models' temporaries [bytes]."""
    return interval_bytes(n_assets, n_o, n_t) + BLOCK_TEMP_BYTES_PER_ELEMENT * n_assets * n_t


def _estimate(size: _RunSize, workers: int, threads: int | None, workers_here: bool, dask: bool | None,
              budgets: MemoryBudgets | None) -> Estimate:
    """:func:`estimate_run` of a case of ``size``."""
    if workers < 1:
        raise ValueError("workers must be >= 1")
    b = default_budgets() if budgets is None else budgets
    n_a, n_o, n_t, largest = size.n_a, size.n_o, size.n_t, size.largest
    elements = n_a * n_o * n_t
    dask = workers > 1 if dask is None else bool(dask)
    local_threads = max(1, min(int(threads or PHYSICS_THREADS), max(size.n_sites, 1)))  # (the economics' too)
    if dask:
        parallel, at_once = float(min(int(workers), max(size.n_sites, 1))) / DASK_WORKER_COST, 1
    else:
        at_once = local_threads
        parallel = 1.0 + THREAD_GAIN * (at_once - 1)
    plan_s = min(max(n_a * PLAN_S_PER_ASSET, min(n_a, 1_000) * PLAN_SMALL_S_PER_ASSET) + PLAN_FIXED_S, PLAN_MAX_S)
    # each named scenario: the economics and a plan of its own (the run's plan's time, not its risk)
    scenarios_s = size.n_scenarios * (n_a * ECONOMICS_S_PER_ASSET + plan_s)
    seconds = (FIXED_S + elements * (MACHINES_S_PER_ELEMENT + SITE_BILLS_S_PER_ELEMENT) / parallel
               + n_a * (LOAD_S_PER_ASSET + ECONOMICS_S_PER_ASSET) + size.profile_intervals * LOAD_S_PER_PROFILE_INTERVAL
               + plan_s + scenarios_s)
    dense = interval_bytes(n_a, n_o, n_t) <= b.dense_bytes
    today = interval_bytes(n_a, 1, n_t)
    spilled = not dense and today > b.today_in_memory_bytes
    # above its budget today's power lives in a mapped file the system may write out: counted at the budget
    store = interval_bytes(n_a, n_o, n_t) if dense else min(today, b.today_in_memory_bytes)
    site_bytes = interval_bytes(largest, 1, n_t) + 8 * largest * n_t  # the site's today's power and its loads
    dense_block = _dense_block_bytes(min(largest, max(1, CHUNK_ELEMENTS // max(n_t, 1))), n_o, n_t)
    if dense:
        block = dense_block
    else:
        block_assets = min(largest, max(1, b.curve_chunk_elements // max(n_t, 1)))
        block = CURVE_BLOCK_BYTES_PER_ELEMENT * block_assets * n_t
    per_site = site_bytes + block
    physics_peak = 0 if dask else at_once * per_site
    worker_bytes = 0
    if dask:  # each worker: its interpreter and one site's physics, and on a dense run the site's options
        worker_bytes = WORKER_BASE_BYTES + per_site + (interval_bytes(largest, n_o, n_t) if dense else 0)
    # above the dense budget the run keeps the sites' curve books (the plan reads its rows through them; the
    # Dask workers send theirs back) as far as their budget allows; rows of the sites beyond it are recomputed
    # and kept while the plan's reactive check and its bills read them (at most one row per asset, within the
    # rows' budget)
    want_books = 0 if dense else BOOK_BYTES_PER_ASSET_STEP * n_a * n_t
    books = min(want_books, b.kept_books_bytes)
    unbooked = 1.0 - (books / want_books if want_books else 0.0)
    kept_rows = 0 if dense else min(b.kept_rows_bytes, unbooked * today)
    if not dense:  # the rows of sites without books are recomputed where the plan and its bills read them, and
        # the plan's chosen rows beyond those kept again on each reading
        seconds += UNBOOKED_S_PER_ASSET_STEP * unbooked * n_a * n_t
        unkept = max(PLAN_ROWS_SHARE * unbooked * today - b.kept_rows_bytes, 0.0)
        seconds += UNKEPT_S_PER_GIB * unkept / 2**30
    economics_peak = interval_bytes(largest, 1, n_t) + ECONOMICS_BYTES_PER_PAIR * n_a * n_o + kept_rows
    if not dense and unbooked > 0:  # a block of every option recomputed, per thread of the plan's bills, where they
        # read a site without books
        economics_peak += local_threads * dense_block
    n_workers = min(int(workers), max(size.n_sites, 1)) if dask else 0
    if n_workers and workers_here:  # the workers hold their sites' physics; they are closed before the economics
        physics_peak = n_workers * worker_bytes
    profiles = (PROFILE_BYTES_PER_INTERVAL * size.profile_intervals if size.profile_bytes is None
                else size.profile_bytes)  # (a profile per motor: 0.65 GiB at 10,000 hourly, on one grid)
    peak = BASE_BYTES + profiles + store + books + max(physics_peak, economics_peak)
    kept = ("every option's per-interval power in memory" if dense else
            "today's motors' per-interval power in memory, and each option's power as a compact table per motor "
            "(the rest is recomputed site by site where a plan needs it)" if books else
            "today's motors' per-interval power in memory (each option's is recomputed site by site where a plan "
            "needs it)")
    if spilled:
        kept += f", in a temporary file of {today / 2**30:.1f} GiB"
    engine = (f" with {counted(n_workers, 'Dask worker')}{' on this machine' if workers_here else ''}" if n_workers else "")
    peak_text = f"{peak / 2**30:.1f} GiB peak" + ("" if workers_here or not n_workers else " on this machine")
    if n_workers:
        peak_text += f" (each worker about {worker_bytes / 2**30:.1f} GiB"
        peak_text += ", counted)" if workers_here else ")"
    scenarios = (f" (the plans of its {counted(size.n_scenarios, 'named scenario')} included)" if size.n_scenarios
                 else "")
    note = (f"{n_a:,} assets x {n_o} options x {n_t:,} steps on {counted(size.n_sites, 'site')}{engine}: about "
            f"{_duration(seconds)}{scenarios} and {peak_text}; keeps {kept}.")
    return Estimate(float(seconds), int(peak), note)


def _duration(seconds: float) -> str:
    if seconds < 90:
        return f"{seconds:.0f} s"
    if seconds < 5400:
        return f"{seconds / 60:.0f} min"
    return f"{seconds / 3600:.1f} h"


#: Margin a memory limit keeps above the estimated peak [-]: the resident peak of fleets of 1,000-10,000 assets
#: was measured from 7 % below to 8 % above the estimate (docs/performance.md, "2026-12-04: a run within a
#: memory limit"), so budgets are fitted to the limit divided by this.
ESTIMATE_MARGIN = 1.15
#: Share of the memory the machine has available that a run plans to use when not told otherwise [-]
#: (the rest left to the system and the programs open beside it; common practice, not measured).
AVAILABLE_SHARE = 0.8


@dataclass(frozen=True)
class MemoryPlan:
    """The budgets a run is given, and why.

    Attributes
    ----------
    budgets : models.operation.MemoryBudgets
        What the run keeps (the defaults, or less to fit the limit).
    estimate : Estimate
        The run's estimate with these budgets.
    limit_bytes : int or None
        The peak the budgets were fitted to [bytes] (None: the defaults, unlimited).
    fits : bool
        The estimated peak, with :data:`ESTIMATE_MARGIN`, is within ``limit_bytes`` (always True without a
        limit).
    given_up : tuple of str
        What the run keeps less of than with the defaults, in words (empty: nothing).
    why : str
        Where the limit comes from, in words ("" without a limit).
    """

    budgets: MemoryBudgets
    estimate: Estimate
    limit_bytes: int | None
    fits: bool
    given_up: tuple[str, ...]
    why: str = ""

    @property
    def least_limit_bytes(self) -> int:
        """The least limit these budgets fit [bytes]: the estimated peak with :data:`ESTIMATE_MARGIN`."""
        return int(math.ceil(self.estimate.peak_bytes * ESTIMATE_MARGIN))

    @property
    def note(self) -> str:
        """One line for the user when the run keeps less than the defaults or may not fit ("" otherwise)."""
        if self.limit_bytes is None or (self.fits and not self.given_up):
            return ""
        head = f"Memory: within {_gib(self.limit_bytes)}" + (f" ({self.why})" if self.why else "")
        if not self.fits:
            return (f"{head}, the run needs at least about {_gib(self.least_limit_bytes)} (the interpreter, one "
                    "site's machines per thread and the per-asset results); it keeps the least it can, and the system "
                    "may slow down or stop it.")
        return (f"{head}, the run keeps less in memory and recomputes more: " + "; ".join(self.given_up) + ". "
                "The numbers are the same; the run is slower.")


def budgets_within(case, limit_bytes: int, workers: int = 1, threads: int | None = None, workers_here: bool = True,
                   dask: bool | None = None) -> MemoryPlan:
    """The largest budgets whose estimated peak, with :data:`ESTIMATE_MARGIN`, stays within ``limit_bytes``.

    Parameters
    ----------
    case : models.case.Case
    limit_bytes : int
        The peak memory the run may reach on this machine [bytes], > 0 (Dask workers elsewhere are not
        counted).
    workers, threads, workers_here, dask
        As in :func:`estimate_run`.

    Returns
    -------
    MemoryPlan
        ``fits`` False when even the least the run can keep is estimated above the limit (the budgets are
        then that least).

    Notes
    -----
    The defaults are kept when they fit. Else the run gives up, in this order: every option's per-interval
    power (recomputed site by site where it is read, from the same curve tables: the same numbers); the
    sites' curve books, all of them (a site is read through its books only when all
    of them are kept, so a share of the budget keeps whole sites only, which the estimate does not follow:
    their rows are recomputed where the plan reads them, slower, the same numbers); and, dearest in time, the
    plan's rows kept while it is checked, as far as needed (found by bisection: the peak grows with that
    budget). A step that would not lower the peak is not taken (without books, a block of every option is
    recomputed per thread, which on a small fleet outweighs its books). Today's per-interval power, the
    interpreter, one site's physics per thread (its curve-table blocks: smaller ones lowered the estimate
    but not the measured peak, which the economics set once the run keeps its freed memory for reuse) and
    the economics' tables are not budgets: they set the least a run needs (today's power goes to a mapped
    file only above :data:`models.operation.TODAY_IN_MEMORY_BUDGET_BYTES`, and its pages count in the
    resident memory while they are read).
    """
    if limit_bytes <= 0:
        raise ValueError("the memory limit must be > 0 bytes")
    return _budgets_within(_RunSize.of(case), limit_bytes, workers, threads, workers_here, dask)


def _budgets_within(size: _RunSize, limit_bytes: int, workers: int, threads: int | None, workers_here: bool,
                    dask: bool | None) -> MemoryPlan:
    """:func:`budgets_within` for a run of ``size``."""
    target = int(limit_bytes / ESTIMATE_MARGIN)  # (the estimate's own error kept in hand)

    def peak(b: MemoryBudgets) -> int:
        return _estimate(size, workers, threads, workers_here, dask, b).peak_bytes

    b = default_budgets()
    given_up: list[str] = []
    for name, words in (("dense_bytes", "every option's per-interval power"),
                        ("kept_books_bytes", "the sites' curve books")):
        fewer = replace(b, **{name: 0})
        if peak(b) > target and getattr(b, name) > 0 and peak(fewer) < peak(b):
            b = fewer
            given_up.append(words)
    if peak(b) > target and b.kept_rows_bytes > 0 and peak(replace(b, kept_rows_bytes=0)) < peak(b):
        low, high = 0, b.kept_rows_bytes  # peak(high) exceeds the target; peak(low) may too
        if peak(replace(b, kept_rows_bytes=0)) <= target:
            while high - low > 1:
                mid = (low + high) // 2
                low, high = (mid, high) if peak(replace(b, kept_rows_bytes=mid)) <= target else (low, mid)
        given_up.append(f"plan rows kept ({_gib(b.kept_rows_bytes)} -> {_gib(low)})")
        b = replace(b, kept_rows_bytes=int(low))
    est = _estimate(size, workers, threads, workers_here, dask, b)
    return MemoryPlan(b, est, int(limit_bytes), est.peak_bytes <= target, tuple(given_up))


def memory_plan(case, max_bytes: int | None = None, free_bytes: int | None = None, workers: int = 1,
                threads: int | None = None, workers_here: bool = True, dask: bool | None = None) -> MemoryPlan:
    """The budgets of a run: within ``max_bytes`` when asked, else within :data:`AVAILABLE_SHARE` of the
    machine's free memory (the defaults when they fit it).

    Parameters
    ----------
    case : models.case.Case
    max_bytes : int, optional
        The peak the user allows on this machine [bytes], >= 1.
    free_bytes : int, optional
        Memory available on the machine [bytes]; default :func:`available_bytes`.
    workers, threads, workers_here, dask
        As in :func:`estimate_run`.

    Returns
    -------
    MemoryPlan
        With ``limit_bytes`` None when the run keeps the defaults because they fit the free memory.
    """
    if max_bytes is not None:
        return replace(budgets_within(case, int(max_bytes), workers, threads, workers_here, dask), why="as asked")
    free = available_bytes() if free_bytes is None else int(free_bytes)
    room = max(1, int(AVAILABLE_SHARE * free))
    plan = budgets_within(case, room, workers, threads, workers_here, dask)
    if plan.fits and not plan.given_up:
        return replace(plan, limit_bytes=None)
    return replace(plan, why=f"{AVAILABLE_SHARE:.0%} of the {_gib(free)} this machine has free")


def _gib(n_bytes: float) -> str:
    """A size in GiB to three significant digits (0.6, 1.45, 12.3, 0.00488 GiB)."""
    return f"{n_bytes / 2**30:.3g} GiB"
