"""The plan's reactive projects priced beside the rest of the plan, and withdrawn where they add nothing.

Each project of a plan is priced alone against today's bill, but reactive savings do not add up: a
terminal capacitor bought to remove a kVArh charge is worth nothing once the plan's drives or another
bank have removed it. :func:`reactive_value_in_plan` prices, site by site, what the plan's reactive
projects (terminal capacitors, wound-field machines) add on top of the rest of the plan;
:func:`plan_without_idle_reactive` withdraws those that add (almost) nothing and solves the plan again.
The method is the tool's own (docs/finance.md, section 6); the bills are those of
:func:`models.attribution.scenario_bills`.
"""

from __future__ import annotations

from collections.abc import Mapping
from concurrent.futures import ThreadPoolExecutor
from dataclasses import replace

import numpy as np
import pandas as pd

from models import attribution
from models.bill_savings import REACTIVE_TECHNOLOGIES, _chosen_total, site_setups
from models.operation import PHYSICS_THREADS, SiteIntervalStore, kept_rows
from models.plan import plan_choice, project_labels, project_name
from models.wording import counted

#: A reactive project (terminal capacitor, wound-field machine) leaves the plan when, beside the rest of the plan,
#: it lowers its site's bill by less than this share of its saving priced alone: the rest of the plan already
#: takes the reactive charge it was bought to remove (a design choice of this tool).
PLAN_REACTIVE_MIN_SHARE = 0.05
#: A run of reactive projects that keeps less than this share of its own saving beside the rest of the plan is
#: split in halves and each half priced again, down to single projects.
PLAN_REACTIVE_SPLIT_SHARE = 0.9
#: A site's reactive projects are first priced in this many runs of consecutive projects.
PLAN_REACTIVE_RUNS = 16
#: The cash-flow components that are bill savings (the rest of a project's savings is its maintenance).
BILL_SAVING_COMPONENTS = ("savings_energy", "savings_demand", "savings_reactive", "savings_fixed")
#: Plans solved at most while reactive projects keep leaving (each round withdraws those of the round before):
#: the first plan is checked and solved again without what it withdrew and at the shares it priced; each new
#: plan is checked in turn and solved again only while a check withdraws more (a plan started from another,
#: e.g. a live edit's, may bring in reactive projects the first check never saw).
PLAN_INTERACTION_ROUNDS = 4


def reactive_value_in_plan(case, op, plan_frame: pd.DataFrame, results: pd.DataFrame,
                           price_factor: float = 1.0) -> pd.DataFrame:
    """What a plan's reactive projects add beside the rest of the plan, run by run.

    Parameters
    ----------
    case, op
        The case and its operating result.
    plan_frame : pandas.DataFrame
        The plan (asset_id, option_id, ...).
    results : pandas.DataFrame
        The per-project results (``bill_saving_per_yr`` and ``capital``, at the price levels).
    price_factor : float
        The electricity price level [-] (the tariffs' charges times this).

    Returns
    -------
    pandas.DataFrame
        One row per reactive project of the plan, per site in the order they were added: project_id
        ("asset/option"), site_id, run (the run of consecutive projects it was priced in),
        saving_alone_per_yr [currency/yr] (its own, priced alone against today's bill), and for its run
        run_saving_alone_per_yr (the run's own savings added up) and run_saving_in_plan_per_yr (what the
        run adds to the site's bill saving) [currency/yr].

    Notes
    -----
    Per site, the plan's other projects are in place first; the reactive projects (terminal capacitors,
    wound-field machines) are then added in order of saving per unit of capital (priced alone), and the
    bill is priced after each run of consecutive projects: S_k = B(rest) - B(rest + first k reactive
    projects), and a run (a, b] adds S_b - S_a. A site's projects are first split into
    :data:`PLAN_REACTIVE_RUNS` runs; a run that keeps less than :data:`PLAN_REACTIVE_SPLIT_SHARE` of its
    own savings is split in halves and priced again, down to single projects, so where the reactive value
    saturates each project's own addition is known, and elsewhere a bill is priced per run, not per
    project (:func:`models.attribution.scenario_bills`). The runs' additions add up to what the reactive
    projects save together. A capacitor whose kVAr the plan's drives or the banks before it already
    removed adds (almost) nothing, however much it saves alone.
    """
    return reactive_values_in_plans(case, op, [plan_frame], results, price_factor)[0]


def reactive_values_in_plans(case, op, plan_frames: list[pd.DataFrame], results: pd.DataFrame,
                             price_factor: float = 1.0) -> list[pd.DataFrame]:
    """:func:`reactive_value_in_plan` of several plans, each priced on its own, in one pass over the sites.

    A fleet too large to keep every option per interval recomputes a plan's rows site by site; plans that
    share most of their projects (the exact and the rank-order plan) have the rows of all of them
    recomputed together, once per site, and kept while each plan is priced (:func:`models.operation.kept_rows`).
    The frames returned are those :func:`reactive_value_in_plan` gives for each plan alone.
    """
    columns = ["project_id", "site_id", "run", "saving_alone_per_yr", "run_saving_alone_per_yr",
               "run_saving_in_plan_per_yr"]
    choices, reactives = [], []
    for plan_frame in plan_frames:
        choice = plan_choice(op, plan_frame) if len(plan_frame) else np.zeros(len(op.asset_ids), dtype=int)
        choices.append(choice)
        reactives.append((choice > 0) & np.isin(op.technologies[choice], REACTIVE_TECHNOLOGIES))
    if not any(r.any() for r in reactives):
        return [pd.DataFrame(columns=columns) for _ in plan_frames]
    by_project = results.set_index(project_labels(results))
    setups = site_setups(case, op.index)

    def one_plan(site_id: str, members: np.ndarray, choice: np.ndarray, reactive: np.ndarray) -> pd.DataFrame:
        own = members[reactive[members]]
        ids = np.array([f"{op.asset_ids[j]}/{op.option_ids[choice[j]]}" for j in own], dtype=object)
        alone = by_project["bill_saving_per_yr"].reindex(ids).to_numpy(dtype=float)
        capital = by_project["capital"].reindex(ids).to_numpy(dtype=float)
        order = np.lexsort((ids.astype(str), -alone / np.maximum(capital, 1e-9)))
        own, ids, alone = own[order], ids[order], alone[order]
        # the rest of the plan (its reactive projects' assets back to today's motors) as site totals, the rows
        # added in the members' order without gathering them; the reactive projects' changes, added up in order
        rest = np.where(reactive[members], 0, choice[members])
        rest_p, rest_q = _chosen_total(op.p_kw, rest, members), _chosen_total(op.q_kvar, rest, members)
        cum_p = np.cumsum(np.asarray(op.p_kw[choice[own], own], dtype=float) - np.asarray(op.p_kw[0, own], dtype=float),
                          axis=0)
        cum_q = np.cumsum(np.asarray(op.q_kvar[choice[own], own], dtype=float)
                          - np.asarray(op.q_kvar[0, own], dtype=float), axis=0)
        n_t = cum_p.shape[1]
        setup = setups[site_id]
        kw = dict(site=setup.site, base_p_kw_profile=setup.base_p_kw_profile, interval_h=op.interval_h,
                  calendar=attribution.bill_calendar(setup.tariff, op.index, op.interval_h))
        rest_bill = float(attribution.scenario_bills(setup.tariff, op.index, rest_p, rest_q, np.zeros((1, n_t)),
                                                     np.zeros((1, n_t)), **kw)[0])
        saved: dict[int, float] = {0: 0.0}  # S_k [currency/yr] by prefix length k

        def price(ks: list[int]) -> None:
            ks = [k for k in dict.fromkeys(ks) if k not in saved]
            if not ks:
                return
            at = np.asarray(ks) - 1
            bills = attribution.scenario_bills(setup.tariff, op.index, rest_p, rest_q, cum_p[at], cum_q[at], **kw)
            for k, bill_k in zip(ks, bills):
                saved[k] = (rest_bill - float(bill_k)) * price_factor

        n = len(own)
        edges = sorted(set(np.linspace(0, n, min(PLAN_REACTIVE_RUNS, n) + 1).round().astype(int).tolist()))
        price(edges[1:])
        runs = list(zip(edges[:-1], edges[1:]))
        final = []
        while runs:  # level by level: the halves of every run to split are priced in one call
            split = []
            for a, b in runs:
                own_sum = float(alone[a:b].sum())
                added = saved[b] - saved[a]
                if b - a > 1 and own_sum > 0.0 and added < PLAN_REACTIVE_SPLIT_SHARE * own_sum:
                    split.append((a, (a + b) // 2, b))
                else:
                    final.append((a, b, own_sum, added))
            price([mid for _, mid, _ in split])
            runs = [half for a, mid, b in split for half in ((a, mid), (mid, b))]
        final.sort()
        run_of = np.empty(n, dtype=int)
        run_alone = np.empty(n)
        run_added = np.empty(n)
        for r, (a, b, own_sum, added) in enumerate(final):
            run_of[a:b], run_alone[a:b], run_added[a:b] = r, own_sum, added
        return pd.DataFrame({"project_id": ids, "site_id": site_id, "run": run_of, "saving_alone_per_yr": alone,
                             "run_saving_alone_per_yr": run_alone, "run_saving_in_plan_per_yr": run_added})

    def one_site(site_id: str) -> list[pd.DataFrame | None]:
        members = np.flatnonzero(op.site_ids == site_id)
        priced = [i for i, reactive in enumerate(reactives) if reactive[members].any()]
        if len(priced) > 1 and isinstance(op.p_kw, SiteIntervalStore) and op.p_kw.recomputes(members):
            # the rows of every plan priced here recomputed together, kept, then read plan by plan
            pairs = np.unique(np.concatenate([np.stack([members, choices[i][members]], axis=1) for i in priced]), axis=0)
            pairs = pairs[pairs[:, 1] > 0]
            if len(pairs):
                op.p_kw[pairs[:, 1], pairs[:, 0]]
        return [one_plan(site_id, members, choices[i], reactives[i]) if i in priced else None
                for i in range(len(plan_frames))]

    sites = sorted(set().union(*(set(op.site_ids[reactive]) for reactive in reactives)))
    # sites at once in threads (each site's bills are its own; a large fleet recomputes the plans' rows per site)
    with kept_rows(op), ThreadPoolExecutor(max_workers=max(1, min(PHYSICS_THREADS, len(sites))),
                                           thread_name_prefix="drivecase-reactive") as pool:
        by_site = list(pool.map(one_site, sites))
    out = []
    for i in range(len(plan_frames)):
        frames = [site_frames[i] for site_frames in by_site if site_frames[i] is not None]
        out.append(pd.concat(frames, ignore_index=True) if frames else pd.DataFrame(columns=columns))
    return out


def withdrawn_text(status: dict | None, shown: int = 3, labels: Mapping[str, str] | None = None) -> str:
    """The reactive projects withdrawn from a plan, in words ("" when none), e.g. for a summary line.

    Parameters
    ----------
    status : dict or None
        The plan's status (its ``withdrawn``, ``set_aside`` and ``repriced`` projects by project label).
    shown : int
        How many withdrawn projects are named; the others are counted.
    labels : mapping of str to str, optional
        Option id -> the option's label in the catalogue (:func:`models.plan.option_labels` of the per-project
        results): each project is then named as a reader knows it, "HRW-A01: Motor-terminal capacitor"
        (:func:`models.plan.project_name`), not by its project label "HRW-A01/capacitor".
    """
    status = status or {}
    withdrawn = [project_name(p, labels or {}) for p in status.get("withdrawn", ())]
    aside, repriced = len(status.get("set_aside", ())), len(status.get("repriced", {}))
    parts = []
    if withdrawn:
        listed = ", ".join(withdrawn[:shown]) + (f" and {len(withdrawn) - shown} more" if len(withdrawn) > shown else "")
        one = len(withdrawn) == 1
        parts.append(f"{counted(len(withdrawn), 'reactive project')} left out of the plan: beside the rest of the plan "
                     f"{'it' if one else 'they'} would cut {'its' if one else 'their'} site's bill by less than "
                     f"{PLAN_REACTIVE_MIN_SHARE:.0%} of {'its' if one else 'their'} own saving ({listed})")
    if aside:
        parts.append(f"{counted(aside, 'other reactive option')} at the same sites, whose value the plan has taken, "
                     f"{'was' if aside == 1 else 'were'} set aside")
    if repriced:
        one = repriced == 1
        parts.append(f"{counted(repriced, 'reactive project')} kept in the plan at the share of {'its' if one else 'their'} "
                     f"saving {'it adds' if one else 'they add'} beside the rest of it ({'its' if one else 'their'} plan "
                     "NPV counts that share only)")
    return ("; ".join(parts) + ".") if parts else ""


def plan_without_idle_reactive(solve, case, op, results: pd.DataFrame, project_ids: np.ndarray, settings,
                               price_factor: float = 1.0, bill_saving_pv: np.ndarray | None = None):
    """Solve the plan, then withdraw the reactive projects worth (almost) nothing beside the rest of it
    (:func:`reactive_value_in_plan`, :data:`PLAN_REACTIVE_MIN_SHARE`), price the others at the share of
    their saving they add, and solve again; at a site where some were withdrawn (its reactive value is
    taken), its other reactive options are left out too, so the new plan does not buy their like. At most
    :data:`PLAN_INTERACTION_ROUNDS` solves: after the first check, a plan is solved again only while its
    check withdraws more. The status lists the withdrawn, the set-aside and the repriced projects.

    Parameters
    ----------
    solve : callable
        ``solve(exclude, settings, npv, greedy=(exclude, npv), exact_again=True)`` -> the plan's frames
        (plan, rank-order plan, comparison, abatement curve, status dict), leaving out the project labels
        in ``exclude``, with each row's NPV from ``npv`` (None: the results' own); ``greedy`` shapes the
        rank-order plan on its own, and ``exact_again=False`` keeps the exact plan last solved (a round
        whose check changed the rank-order plan only).
    case, op, results
        The case, its operating result and the per-project results.
    project_ids : numpy.ndarray of str
        The project label ("asset/option") of each row of ``results``.
    settings : models.scenario.PlanSettings
        How hard each plan is solved; the second starts from the first less what left it.
    price_factor : float
        The electricity price level [-].
    bill_saving_pv : numpy.ndarray, optional
        Present value of each row's bill savings [currency]. With it, a reactive project kept in the plan
        enters the second solve at NPV - (1 - r) x its bill savings' PV, r the share of its own saving
        its run adds beside the rest of the plan (clipped to 0-1); without it, at its own NPV.
    """
    withdrawn: set[str] = set()
    greedy_withdrawn: set[str] = set()
    frames = solve((), settings, None)
    reactive_options = np.isin(results["technology"].to_numpy(dtype=object), REACTIVE_TECHNOLOGIES)

    def checked(value: pd.DataFrame, already: set[str]):
        """(newly withdrawn, set aside, NPVs or None, repriced shares) from one plan's check
        (:func:`reactive_value_in_plan`'s frame ``value``)."""
        alone = value["run_saving_alone_per_yr"].to_numpy(dtype=float)
        worthless = (value["run_saving_in_plan_per_yr"].to_numpy(dtype=float)
                     < PLAN_REACTIVE_MIN_SHARE * np.maximum(alone, 0.0))
        fresh = set(value.loc[worthless, "project_id"]) - already
        npv, repriced = None, {}
        if bill_saving_pv is not None:
            share = np.clip(value["run_saving_in_plan_per_yr"].to_numpy(dtype=float) / np.where(alone > 0, alone, 1.0),
                            0.0, 1.0)
            partial = ~worthless & (alone > 0) & (share < 1.0 - 1e-9)
            if partial.any():
                rows = pd.Index(project_ids.astype(str)).get_indexer(value.loc[partial, "project_id"].astype(str))
                npv = results["npv"].to_numpy(dtype=float).copy()
                npv[rows] -= (1.0 - share[partial]) * np.asarray(bill_saving_pv, dtype=float)[rows]
                # (exact, not rounded: the pack's formulas and the plan's flows rebuild the NPVs from them)
                repriced = dict(zip(value.loc[partial, "project_id"].astype(str), share[partial].tolist()))
        taken = results["site_id"].isin(set(value.loc[worthless, "site_id"])).to_numpy() & reactive_options
        others = {str(x) for x in project_ids[taken]} - set(value.loc[~worthless, "project_id"]) - already - fresh
        return fresh, others, npv, repriced

    npv = g_npv = None
    g_shares: dict[str, float] = {}  # the rank-order plan's repriced shares, as ``repriced`` is the exact plan's
    set_aside: set[str] = set()
    g_set_aside: set[str] = set()
    exact_solves = 1
    for round_ in range(PLAN_INTERACTION_ROUNDS - 1):
        # the rank-order plan is checked on its own, so its result does not depend on how hard the exact plan
        # was solved (both priced in one pass over the sites)
        value, g_value = reactive_values_in_plans(case, op, [frames[0], frames[1]], results, price_factor)
        kept_npv, kept_g_npv = npv, g_npv
        fresh, others, npv, repriced = checked(value, withdrawn)
        g_fresh, g_others, g_npv, g_repriced = checked(g_value, greedy_withdrawn)
        if not fresh and not g_fresh and (round_ > 0 or (not repriced and not g_repriced)):
            break  # after the first round only a new withdrawal asks for another solve
        if round_ > 0:
            # a later round withdraws more and prices the shares of the plan it checked; where it priced none,
            # the shares the plan was solved at stay
            npv = kept_npv if npv is None else npv
            g_npv = kept_g_npv if g_npv is None else g_npv
            repriced = repriced or frames[4].get("repriced", {})
            g_repriced = g_repriced or g_shares
        withdrawn |= fresh
        greedy_withdrawn |= g_fresh
        set_aside |= others
        g_set_aside |= g_others
        left_out = withdrawn | set_aside
        first = frames[0]
        start = tuple((str(pid), int(yr)) for pid, yr in zip(project_labels(first), first["start_yr"])
                      if str(pid) not in left_out)  # the first plan less what left it: a head start for the proof
        # a later round whose check withdrew from the rank-order plan only leaves the exact plan as it was solved
        exact_again = round_ == 0 or bool(fresh)
        previous_status = frames[4]
        frames = solve(left_out, replace(settings, start=start), npv, greedy=(greedy_withdrawn | g_set_aside, g_npv),
                       exact_again=exact_again)
        if not exact_again:
            npv, repriced = kept_npv, previous_status.get("repriced", {})  # what the kept exact plan was solved at
        frames[4]["settings"] = settings
        # the repriced projects that the new plan holds (a project repriced may leave it at its lower NPV)
        in_plan = set(project_labels(frames[0]).astype(str))
        frames[4]["repriced"] = {label: share for label, share in repriced.items() if label in in_plan}
        g_shares = g_repriced
        in_greedy = set(project_labels(frames[1]).astype(str))
        frames[4]["repriced_greedy"] = {label: share for label, share in g_repriced.items() if label in in_greedy}
        frames[4]["withdrawn"] = tuple(sorted(withdrawn))
        frames[4]["set_aside"] = tuple(sorted(set_aside - withdrawn))
        exact_solves += exact_again
        frames[4]["solves"] = exact_solves  # of the exact plan
    left = withdrawn | set_aside
    if left and str(frames[4].get("message", "")).endswith("of the best possible NPV"):
        # the proof is over the projects the last solve was given: those the check left out are not in it
        frames[4]["message"] += (f" among the projects the reactive check left in the search "
                                 f"({counted(len(left), 'project')} withdrawn or set aside)")
    return frames
