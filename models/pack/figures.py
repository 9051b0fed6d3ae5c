"""Charts of the capital-request report: pure result -> plotly figure functions.

Every function takes finished tables and returns a :class:`plotly.graph_objects.Figure`; none reads data.
User text (asset and option ids) is HTML-escaped before it goes into a figure, because plotly.js reads a
few HTML tags inside labels.
"""

from __future__ import annotations

import html

import numpy as np
import pandas as pd
import plotly.graph_objects as go
from plotly.subplots import make_subplots

from models.pack import content
from models.risk import tornado_label
from models.wording import money_text

#: Colours of the report (colour-blind-safe qualitative set).
COLOURS = {"energy": "#0072B2", "demand": "#E69F00", "reactive": "#009E73", "fixed": "#CC79A7",
           "maintenance": "#56B4E9", "total": "#333333", "negative": "#D55E00", "before": "#999999",
           "after": "#0072B2", "exact": "#0072B2", "rank": "#E69F00", "budget": "#D55E00"}
_COMPONENT_COLOURS = dict(zip(content.SAVING_COLUMNS, ("energy", "demand", "reactive", "fixed", "maintenance")))


def esc(text: object) -> str:
    """Escape user text for a plotly label."""
    return html.escape(str(text), quote=False)


def _layout(fig: go.Figure, title: str, height: int = 380) -> go.Figure:
    fig.update_layout(title={"text": title, "x": 0.0, "font": {"size": 15}}, height=height,
                      margin={"l": 70, "r": 20, "t": 50, "b": 50}, template="plotly_white",
                      font={"family": "Helvetica, Arial, sans-serif", "size": 12},
                      legend={"orientation": "h", "y": -0.18})
    return fig


def savings_waterfall(chosen: pd.DataFrame, currency: str) -> go.Figure:
    """Waterfall of the recommended projects' yearly saving by component [currency/yr]."""
    names = list(content.SAVING_COLUMNS.values())
    values = [float(chosen[c].sum()) for c in content.SAVING_COLUMNS]
    fig = go.Figure(go.Waterfall(
        x=names + ["Total"], y=values + [sum(values)], measure=["relative"] * len(values) + ["total"],
        text=[f"{v:,.0f}" for v in values + [sum(values)]], textposition="outside",
        connector={"line": {"color": "#bbbbbb"}},
        increasing={"marker": {"color": COLOURS["energy"]}}, decreasing={"marker": {"color": COLOURS["negative"]}},
        totals={"marker": {"color": COLOURS["total"]}}))
    fig.update_yaxes(title_text=f"saving [{esc(currency)}/yr]")
    return _layout(fig, "Yearly saving by component (recommended projects, base-year prices)")


def savings_by_project(chosen: pd.DataFrame, currency: str, limit: int = 20) -> go.Figure:
    """Stacked bars of each recommended project's yearly saving by component (the largest ``limit``)."""
    frame = chosen.assign(_total=content.yearly_saving(chosen)).sort_values("_total", ascending=True).tail(limit)
    names = frame["label"] if "label" in frame else frame["option_id"]
    labels = [f"{esc(a)}: {esc(n)}" for a, n in zip(frame["asset_id"], names)]
    fig = go.Figure()
    for column, name in content.SAVING_COLUMNS.items():
        fig.add_trace(go.Bar(y=labels, x=frame[column], name=name, orientation="h",
                             marker_color=COLOURS[_COMPONENT_COLOURS[column]]))
    fig.update_layout(barmode="relative")
    fig.update_xaxes(title_text=f"saving [{esc(currency)}/yr]")
    title = "Yearly saving by project and component"
    if len(chosen) > limit:
        title += f" (largest {limit} of {len(chosen)})"
    return _layout(fig, title, height=max(320, 60 + 22 * len(frame)))


def cumulative_cash_flow(portfolio: pd.DataFrame, currency: str) -> go.Figure:
    """Yearly net flow (bars) and cumulative, undiscounted and discounted (lines), of the recommended projects."""
    fig = go.Figure()
    fig.add_trace(go.Bar(x=portfolio["year"], y=portfolio["net"], name="net cash flow",
                         marker_color=np.where(portfolio["net"] < 0, COLOURS["negative"], COLOURS["maintenance"])))
    fig.add_trace(go.Scatter(x=portfolio["year"], y=portfolio["cumulative"], name="cumulative", mode="lines+markers",
                             line={"color": COLOURS["total"]}))
    fig.add_trace(go.Scatter(x=portfolio["year"], y=portfolio["cumulative_discounted"], name="cumulative, discounted",
                             mode="lines+markers", line={"color": COLOURS["energy"], "dash": "dash"}))
    fig.add_hline(y=0, line={"color": "#888888", "width": 1})
    fig.update_xaxes(title_text="plan year (0 = investment)", dtick=1)
    fig.update_yaxes(title_text=f"[{esc(currency)}]")
    return _layout(fig, "Cumulative cash flow of the recommended projects")


def tornado(rows: pd.DataFrame, currency: str, plan: bool = False) -> go.Figure:
    """Tornado of a total NPV, each variable at its low and high value, one at a time: the exact plan's at its
    start (``plan``) or the fleet NPV of every asset's best option."""
    fig = go.Figure()
    if rows.empty:
        return _layout(fig, "Sensitivity: not computed for this run")
    frame = rows.sort_values("swing", ascending=True)
    base = float(frame["base_npv"].iloc[0])
    labels = [esc(tornado_label(v, lo, hi)) for v, lo, hi in zip(frame["variable"], frame["low_value"], frame["high_value"])]
    fig.add_trace(go.Bar(y=labels, x=frame["npv_at_low"] - base, base=base, orientation="h", name="low value",
                         marker_color=COLOURS["negative"]))
    fig.add_trace(go.Bar(y=labels, x=frame["npv_at_high"] - base, base=base, orientation="h", name="high value",
                         marker_color=COLOURS["energy"]))
    centre, axis, title = (("the plan under the budget", "plan NPV at its start", "Sensitivity of the plan's NPV")
                           if plan else ("best option of every asset, no budget", "fleet NPV of the best options",
                                         "Sensitivity of the fleet NPV"))
    fig.add_vline(x=base, line={"color": "#333333", "width": 1}, annotation_text=f"{centre}: {base:,.0f}",
                  annotation_position="top")
    fig.update_layout(barmode="overlay")
    fig.update_xaxes(title_text=f"{axis} [{esc(currency)}]")
    return _layout(fig, f"{title} (one variable at a time)", height=340)


def plan_npv_draws(draws: np.ndarray, summary: dict[str, float], currency: str) -> go.Figure:
    """Monte Carlo distribution of the plan's NPV at its start: one value per draw, P10, P50 and P90 marked.

    Parameters
    ----------
    draws : numpy.ndarray
        The plan's NPV at its start in each draw [currency], shape (n_draws,).
    summary : dict
        :func:`models.risk.distribution_summary` of ``draws`` (``npv_p10``, ``npv_p50``, ``npv_p90``,
        ``prob_npv_positive_frac``).
    currency : str
    """
    draws = np.asarray(draws, dtype=float).reshape(-1)
    fig = go.Figure()
    if draws.size == 0:
        return _layout(fig, "Monte Carlo: the plan was not simulated")
    fig.add_trace(go.Histogram(x=draws, nbinsx=40, name="draws", marker_color="#b9d3ea"))
    # labels left of P10 and right of P50 and P90, so that close percentiles do not print over each other
    for key, name, dash, side in (("npv_p10", "P10", "dot", "top left"), ("npv_p50", "P50", "solid", "top right"),
                                  ("npv_p90", "P90", "dot", "top right")):
        fig.add_vline(x=summary[key], line={"color": COLOURS["total"], "width": 2, "dash": dash},
                      annotation_text=f"{name} {esc(money_text(summary[key], currency))}", annotation_position=side)
    if draws.min() < 0 < draws.max():
        fig.add_vline(x=0, line={"color": "#888888", "width": 1})
    # a margin each side, so the first x tick does not sit in the corner on the y axis's "0"
    lo, hi = float(draws.min()), float(draws.max())
    pad = 0.04 * (hi - lo) if hi > lo else max(abs(hi), 1.0) * 0.05
    fig.update_xaxes(title_text=f"plan NPV at its start [{esc(currency)}]", range=[lo - pad, hi + pad])
    fig.update_yaxes(title_text="draws")
    title = (f"Monte Carlo: the plan's NPV over {draws.size:,} draws, "
             f"P(NPV > 0) = {content.chance_text(summary['prob_npv_positive_frac'])}")
    return _layout(fig, title, height=340)


def monte_carlo(rows: pd.DataFrame, currency: str, limit: int = 25) -> go.Figure:
    """P10-P90 range and P50 of each project's NPV from the Monte Carlo (each asset's best option: a result
    without the plan's Monte Carlo)."""
    fig = go.Figure()
    if rows.empty:
        return _layout(fig, "Monte Carlo: no recommended project was simulated")
    frame = rows.sort_values("npv_p50", ascending=True).tail(limit)
    labels = [esc(p) for p in frame["project_id"]]
    fig.add_trace(go.Bar(y=labels, x=frame["npv_p90"] - frame["npv_p10"], base=frame["npv_p10"], orientation="h",
                         name="P10 to P90", marker_color="#b9d3ea"))
    fig.add_trace(go.Scatter(y=labels, x=frame["npv_p50"], mode="markers", name="P50",
                             marker={"color": COLOURS["total"], "size": 9, "symbol": "diamond"}))
    fig.add_vline(x=0, line={"color": "#888888", "width": 1})
    fig.update_xaxes(title_text=f"NPV [{esc(currency)}]")
    title = "Monte Carlo NPV range per project"
    if len(rows) > limit:
        title += f" (largest {limit} of {len(rows)})"
    return _layout(fig, title, height=max(300, 80 + 24 * len(frame)))


def plan_by_year(exact: np.ndarray, rank: np.ndarray, budgets: tuple[float, ...], currency: str) -> go.Figure:
    """Capital spent per plan year of the exact and rank-order plans (one value per plan year from 0, the
    year it is spent: :func:`models.plan.plan_capital_spent`), with the budget."""
    years = list(range(max(len(exact), len(rank), len(budgets))))
    fig = go.Figure()
    for spent, name, colour in ((exact, "exact plan", COLOURS["exact"]), (rank, "rank-order plan", COLOURS["rank"])):
        by_year = np.zeros(len(years))
        by_year[:len(spent)] = spent
        fig.add_trace(go.Bar(x=[str(y) for y in years], y=by_year, name=name, marker_color=colour))
    if budgets:
        fig.add_trace(go.Scatter(x=[str(y) for y in range(len(budgets))], y=list(budgets), mode="markers", name="budget",
                                 marker={"symbol": "line-ew-open", "size": 40, "line": {"width": 3},
                                         "color": COLOURS["budget"]}))
    fig.update_layout(barmode="group")
    fig.update_xaxes(title_text="plan year", type="category")
    fig.update_yaxes(title_text=f"capital [{esc(currency)}]")
    return _layout(fig, "Fleet plan: capital spent per plan year")


def bills_before_after(bills: pd.DataFrame, currency: str) -> go.Figure:
    """Monthly bill of each site before and after the exact plan."""
    if bills.empty:
        return _layout(go.Figure(), "Monthly bills: none")
    totals = bills.groupby(["site_id", "month", "scenario"], sort=True)["amount"].sum().reset_index()
    sites = list(dict.fromkeys(totals["site_id"]))
    fig = make_subplots(rows=len(sites), cols=1, shared_xaxes=False, vertical_spacing=0.12,
                        subplot_titles=[esc(s) for s in sites])
    for k, site in enumerate(sites):
        part = totals[totals["site_id"] == site]
        for scenario, name in (("baseline", "before"), ("plan", "after")):
            rows = part[part["scenario"] == scenario]
            fig.add_trace(go.Bar(x=rows["month"], y=rows["amount"], name=name, marker_color=COLOURS[name],
                                 showlegend=k == 0, legendgroup=name), row=k + 1, col=1)
        fig.update_yaxes(title_text=f"[{esc(currency)}]", row=k + 1, col=1)
        fig.update_xaxes(type="category", row=k + 1, col=1)
    fig.update_layout(barmode="group")
    return _layout(fig, "Monthly bill per site, before and after the plan", height=260 * len(sites) + 80)
