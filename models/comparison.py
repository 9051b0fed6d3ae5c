"""Scenarios side by side: the fleet plan's headline under several sets of finance assumptions.

A scenario is a name and the finance assumptions that differ from the case's own (a lower discount rate,
dearer electricity, a larger budget). Each is run through the economics of the same physics (the machines
and the bills do not change with the finance assumptions) and its plan summed into a headline: capital,
yearly saving as the plan counts it, plan NPV, CO2 avoided and projects. :func:`compare` sets the
headlines side by side with each one's difference from the first (the case as written).

The scenarios a case carries are ``[[scenarios]]`` tables in its ``scenarios.toml`` (or rows of a workbook's
``scenarios`` sheet): each a ``name`` and the finance keys it changes (docs/case-format.md, "Scenarios").
"""

from __future__ import annotations

import difflib
import math
import weakref
from collections.abc import Sequence
from dataclasses import replace
from typing import Any

import pandas as pd

from models.io import BLANK_HEADER_KEY, SHEET_ROW_KEY
from models.problems import Problem, error, warning
from models.wording import counted

#: The case's own assumptions, as the first row of every comparison is named.
BASE_NAME = "Case as written"
#: A run made under other assumptions than the case's own (a pack from edited assumptions), as its row is named.
RUN_NAME = "Assumptions of this run"
#: Longest scenario name [characters] (it heads a column of the report and a row of the tables).
MAX_NAME_CHARS = 60
#: The headline figures compared, with their words (each also compared as a difference from the first row).
HEADLINE_COLUMNS: tuple[tuple[str, str], ...] = (
    ("plan_capital", "Plan capital"),
    ("yearly_saving_per_yr", "Plan yearly saving, as the plan counts it"),
    ("plan_npv", "Plan NPV"),
    ("co2_avoided_t_per_yr", "CO2 avoided [t/yr]"),
    ("projects", "Projects in the plan"),
)
#: The assumptions shown beside each headline, with their words.
ASSUMPTION_COLUMNS: tuple[tuple[str, str], ...] = (
    ("discount_rate_pct", "Discount rate [%/yr]"),
    ("escalation_energy_pct", "Energy price escalation [%/yr]"),
    ("horizon_yr", "Horizon [yr]"),
    ("energy_price_level_pct", "Electricity price level [%]"),
    ("capital_cost_level_pct", "Capital cost level [%]"),
    ("budget_total", "Capital budget, all plan years"),
    ("replacement_mode", "Replacement timing"),
)


def plan_headline(result) -> dict[str, float]:
    """The exact plan's headline: capital, yearly saving as the plan counts it, NPV, CO2 avoided, projects.

    Parameters
    ----------
    result : models.scenario.ScenarioResult

    Returns
    -------
    dict
        ``plan_capital`` [currency], ``yearly_saving_per_yr`` [currency/yr] (a reactive project at the share of
        its bill saving it adds beside the plan's other projects, as the plan NPV counts it),
        ``plan_npv`` [currency, at plan start], ``co2_avoided_t_per_yr`` [t/yr], ``projects`` [-].
    """
    from models.pack.content import plan_yearly_saving
    from models.plan import project_labels

    res, plan = result.results, result.plan
    chosen = res.set_index(project_labels(res)).reindex(project_labels(plan)) if len(plan) else res.iloc[0:0]
    saving = float(plan_yearly_saving(result, chosen.assign(in_plan=True)).sum()) if len(chosen) else 0.0
    return {
        "plan_capital": float(plan["capital"].sum()) if len(plan) else 0.0,
        "yearly_saving_per_yr": saving,
        "plan_npv": float(plan["npv_at_plan_start"].sum()) if len(plan) else 0.0,
        "co2_avoided_t_per_yr": float(chosen["co2_avoided_t_per_yr"].sum()) if len(chosen) else 0.0,
        "projects": int(len(plan)),
    }


def assumption_summary(assumptions) -> dict[str, Any]:
    """The assumptions a comparison shows beside each headline (percentages 0-100, the budget summed;
    ``budget_total`` is NaN where there is no limit)."""
    budget = tuple(assumptions.budget_per_yr or ())
    return {
        "discount_rate_pct": 100.0 * float(assumptions.discount_rate_frac),
        "escalation_energy_pct": 100.0 * float(assumptions.escalation_energy_frac),
        "horizon_yr": int(assumptions.horizon_yr),
        "energy_price_level_pct": 100.0 * float(assumptions.energy_price_factor),
        "capital_cost_level_pct": 100.0 * float(assumptions.capital_cost_factor),
        "budget_total": float(sum(budget)) if budget else math.nan,
        "replacement_mode": str(assumptions.replacement_mode).replace("_", " "),
    }


def compare(rows: Sequence[tuple[str, Any, dict[str, float]]]) -> pd.DataFrame:
    """Set scenario headlines side by side, each with its difference from the first.

    Parameters
    ----------
    rows : sequence of (name, assumptions, headline)
        In order; the first is the reference (usually the case as written, :data:`BASE_NAME`). ``headline``
        as :func:`plan_headline` returns it.

    Returns
    -------
    pandas.DataFrame
        One row per scenario: ``scenario``, the :data:`ASSUMPTION_COLUMNS`, the :data:`HEADLINE_COLUMNS` and
        for each headline figure ``<column>_change``, its value less the first row's (0 in the first row).

    Examples
    --------
    >>> from models.finance import FinanceAssumptions
    >>> a, b = FinanceAssumptions(), FinanceAssumptions(discount_rate_frac=0.06)
    >>> h = {"plan_capital": 100.0, "yearly_saving_per_yr": 30.0, "plan_npv": 50.0, "co2_avoided_t_per_yr": 2.0,
    ...      "projects": 3}
    >>> t = compare([("Case as written", a, h), ("Cheaper money", b, {**h, "plan_npv": 65.0})])
    >>> t[["scenario", "discount_rate_pct", "plan_npv", "plan_npv_change"]].values.tolist()
    [['Case as written', 8.0, 50.0, 0.0], ['Cheaper money', 6.0, 65.0, 15.0]]
    """
    records = []
    for name, assumptions, headline in rows:
        records.append({"scenario": str(name), **assumption_summary(assumptions),
                        **{key: headline[key] for key, _ in HEADLINE_COLUMNS}})
    frame = pd.DataFrame.from_records(records, columns=["scenario"] + [k for k, _ in ASSUMPTION_COLUMNS]
                                      + [k for k, _ in HEADLINE_COLUMNS])
    for key, _ in HEADLINE_COLUMNS:
        first = frame[key].iloc[0] if len(frame) else 0.0
        frame[f"{key}_change"] = frame[key] - first
    return frame


#: The last result's comparison with its case's scenarios (computed once, whoever asks: files, report,
#: workbook): (weak reference to the result, the case, the table).
_LAST: dict[str, tuple] = {}


def case_scenarios(case, result, plan_settings=None, progress=None) -> pd.DataFrame:
    """The case as written (``result``) beside each of the case's named scenarios, run on its physics.

    Parameters
    ----------
    case : models.case.Case
        Its ``scenarios`` are run (none: the table holds the case's own row alone).
    result : models.scenario.ScenarioResult
        The run of the case's own assumptions; its physics serve every scenario.
    plan_settings : models.scenario.PlanSettings, optional
        How far each scenario's exact plan is proven (default: as the run's own plan was,
        :data:`models.scenario.PRECISE_PLAN` where it does not say).
    progress : callable, optional
        Called with a short text ("scenario 2 of 3: Cheaper money") before each plan is solved (each may take
        up to the plan's time limit).

    Returns
    -------
    pandas.DataFrame
        :func:`compare` of the rows, the case's own first (named :data:`BASE_NAME`); where ``result`` was run
        under other assumptions than the case's own (a seed or a number of draws aside), its row follows,
        named :data:`RUN_NAME`, and every change is from the case's own.
    """
    from models import scenario

    settings = plan_settings or (result.plan_status or {}).get("settings") or scenario.PRECISE_PLAN
    kept = _LAST.get("last")
    if kept is not None and kept[0]() is result and kept[1]() is case and kept[2] == settings:
        return kept[3].copy()
    own = case.finance
    # a run under its own seed or number of draws is still the case as written (the plan does not draw)
    if replace(result.assumptions, monte_carlo_seed=own.monte_carlo_seed, monte_carlo_draws=own.monte_carlo_draws) == own:
        rows = [(BASE_NAME, result.assumptions, plan_headline(result))]
    else:  # a run under edited assumptions: the case's own first, then this run's, then the scenarios
        if progress is not None:
            progress(f"the case as written ({BASE_NAME})")
        base = scenario.economics(case, result.physics, own, with_risk=False, plan_settings=settings)
        rows = [(BASE_NAME, own, plan_headline(base)), (RUN_NAME, result.assumptions, plan_headline(result))]
    named = list(getattr(case, "scenarios", ()))
    for k, (name, assumptions) in enumerate(named):
        if progress is not None:
            progress(f"scenario {k + 1} of {len(named)}: {name}")
        other = scenario.economics(case, result.physics, assumptions, with_risk=False, plan_settings=settings)
        rows.append((name, assumptions, plan_headline(other)))
    table = compare(rows)
    _LAST["last"] = (weakref.ref(result), weakref.ref(case), settings, table)
    return table.copy()


def finance_checks(assumptions, source: str) -> list[Problem]:
    """The checks of a set of finance assumptions beyond each key's own range: capital budgets of 0 in every
    plan year, and budget years past the horizon (warnings)."""
    from models.plan import plan_beyond_horizon_text
    from models.problems import warning

    out: list[Problem] = []
    budget = list(assumptions.budget_per_yr or ())
    if budget and not any(b > 0 for b in budget):
        out.append(warning(source, None, "budget_per_yr", budget,
                           "every plan year's capital budget is 0: the plan buys only projects that need no capital",
                           "give the budget of each plan year, or leave budget_per_yr out for no limit"))
    if budget:
        beyond = plan_beyond_horizon_text(len(budget), assumptions.horizon_yr)
        if beyond:
            out.append(warning(source, None, "budget_per_yr", budget, beyond,
                               f"horizon_yr = {len(budget)} or more, or {counted(assumptions.horizon_yr, 'budget year')}"))
    return out


def _finance_keys() -> tuple[str, ...]:
    """The keys a finance file may hold (docs/finance.md)."""
    from dataclasses import fields

    from models.finance import FinanceAssumptions

    return tuple(f.name for f in fields(FinanceAssumptions))


def read_scenarios(tables: Any, base: dict, source: str, prefix: str = "scenarios") -> tuple[list[tuple[str, Any]], list[Problem]]:
    """Read a case's scenarios: each a ``name`` and the finance keys it changes from the case's own.

    Parameters
    ----------
    tables : list of dict
        The ``[[scenarios]]`` tables (or a workbook sheet's rows as dicts), in order.
    base : dict
        The case's own finance keys as read (each scenario starts from them).
    source : str
        The file the scenarios are in, as the user sees it.
    prefix : str
        How the problems name an entry: ``scenarios[n].<key>``, counted from 1.

    Returns
    -------
    (list of (str, FinanceAssumptions), list of Problem)
        The scenarios that are valid, in order, and every problem (an invalid scenario is an error naming
        its entry and key; it is left out).
    """
    from models.finance import FinanceAssumptions

    problems: list[Problem] = []
    if not isinstance(tables, list) or not all(isinstance(t, dict) for t in tables):
        return [], [error(source, None, prefix, None, "scenarios must be tables, one per scenario",
                          '[[scenarios]]\nname = "Cheaper money"\ndiscount_rate_frac = 0.06')]
    out: list[tuple[str, Any]] = []
    seen: dict[str, int] = {}
    base_assumptions, base_found = FinanceAssumptions.from_dict(dict(base), source=source)
    base_found = base_found + (finance_checks(base_assumptions, source) if base_assumptions is not None else [])
    base_problems = {(p.column, p.rule) for p in base_found}
    for i, table in enumerate(tables, start=1):
        at = f"{prefix}[{i}]"
        for letter, value in table.get(BLANK_HEADER_KEY, []):
            problems.append(error(source, None, f"{at} (column {letter})", value,
                                  "a value under a blank header cell: no finance key says what it changes",
                                  "write the finance key it changes in the header row, or clear the cell"))
        # (a workbook row's number: named below; its blank-header cells: just reported)
        table = {k: v for k, v in table.items() if k not in (SHEET_ROW_KEY, BLANK_HEADER_KEY)}
        name = table.get("name")
        if name is not None and not isinstance(name, str):
            problems.append(error(source, None, f"{at}.name", name, "a scenario's name must be text",
                                  f'write it as text: in quotes in a TOML file (name = "{name}"), or a cell formatted '
                                  "as text on a sheet"))
            continue
        if not isinstance(name, str) or not name.strip():
            problems.append(error(source, None, f"{at}.name", name, "a scenario needs a name",
                                  'e.g. name = "Dearer electricity"'))
            continue
        name = name.strip()
        if len(name) > MAX_NAME_CHARS:
            problems.append(error(source, None, f"{at}.name", name, f"a scenario's name is at most {MAX_NAME_CHARS} "
                                  "characters", "shorten it; a longer description goes in a # comment"))
            continue
        if any(ord(ch) < 32 or ord(ch) == 127 for ch in name):
            problems.append(error(source, None, f"{at}.name", name, "a scenario's name is one line of text: it holds a "
                                  "line break, tab or other control character", "write it on one line"))
            continue
        folded = _folded(name)
        reserved = {_folded(n): n for n in (BASE_NAME, RUN_NAME)}
        if name in seen or folded in reserved:
            problems.append(error(source, None, f"{at}.name", name,
                                  f"duplicate scenario name (also {prefix}[{seen[name]}])" if name in seen
                                  else f"'{reserved[folded]}' names a row of every comparison",
                                  "give each scenario a name of its own"))
            continue
        alike = next((other for other in seen if _folded(other) == folded), None)
        if alike is not None:
            problems.append(warning(source, None, f"{at}.name", name,
                                    f"the name differs from {prefix}[{seen[alike]}]'s ('{alike}') only in capitals or "
                                    "spaces: the two rows will be hard to tell apart",
                                    "give each scenario a name of its own"))
        seen[name] = i
        changes = {k: v for k, v in table.items() if k != "name"}
        if not changes:
            problems.append(error(source, None, at, name, "the scenario changes no assumption",
                                  "add the finance keys it changes, e.g. discount_rate_frac = 0.06"))
            continue
        known = set(_finance_keys())
        unknown = [k for k in changes if k not in known]
        for k in unknown:
            close = difflib.get_close_matches(str(k), sorted(known), n=1, cutoff=0.6)
            problems.append(error(source, None, f"{at}.{k}", changes[k],
                                  "unknown finance key: the scenario would not change what it means to",
                                  f"did you mean '{close[0]}'?" if close else "the keys are listed in docs/finance.md"))
        if "currency" in changes:
            problems.append(error(source, None, f"{at}.currency", changes["currency"],
                                  "a scenario cannot change the currency: one case prices everything in one",
                                  "leave currency out of the scenario"))
            continue
        if unknown:
            continue
        assumptions, found = FinanceAssumptions.from_dict({**base, **changes}, source=source)
        found = found + (finance_checks(assumptions, source) if assumptions is not None else [])
        for p in found:
            # the scenario's own problems: of a key it sets, or one the case's own keys alone do not raise (a
            # rate set against the case's inflation); the case's own are reported with the case
            if p.column in changes or (p.column, p.rule) not in base_problems:
                column = f"{at}.{p.column}" if p.column else at
                problems.append(Problem(p.severity, p.file, p.row, column, p.value, p.rule, p.hint))
        if assumptions is None:
            continue
        out.append((name, assumptions))
    if any(table.get(SHEET_ROW_KEY) is not None for table in tables):
        # a workbook sheet's scenarios: each problem names its scenario's row
        rows = {f"{prefix}[{i}]": t.get(SHEET_ROW_KEY) for i, t in enumerate(tables, start=1)}
        problems = [replace(p, row=rows.get(_entry(p.column, prefix), p.row)) if p.row is None else p for p in problems]
    return out, problems


def _folded(name: str) -> str:
    """A scenario's name as compared for look-alikes: no capitals, single spaces."""
    return " ".join(name.casefold().split())


def _entry(column: str | None, prefix: str) -> str | None:
    """The entry (``scenarios[3]``) a problem's column names, or None."""
    if not column or not column.startswith(prefix + "["):
        return None
    return column[:column.index("]") + 1]
