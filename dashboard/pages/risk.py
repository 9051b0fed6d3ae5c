"""Uncertainty: the one-at-a-time tornado, the Monte Carlo total NPV and the range of each project, of the budgeted
plan or of each asset's best option."""

from __future__ import annotations

import dash
from dash import Input, Output, callback, dcc, html

from dashboard import components as ui
from dashboard import figures, services
from models import scenario


READY = "risk-ready"
TORNADO = "risk-tornado"
RANGES = "risk-ranges"
TABLE = "risk-table"
SUMMARY = "risk-summary"
NOTICE = "risk-notice"
FLEET = "risk-fleet"
SCOPE = "risk-scope"


def layout(**_query):
    return html.Div([
        dcc.Store(id=READY, data=True),
        ui.page_header("Uncertainty", "How far the answer moves when prices, hours, loads, capital, rates and the new "
                                      "machines' losses (within their efficiency tolerance) move: one input at a time "
                                      "(tornado), then all together in a seeded Monte Carlo."),
        ui.notice(NOTICE),
        html.Div([html.Label("Analyse", htmlFor=SCOPE),
                  dcc.RadioItems(id=SCOPE, options=[{"label": text, "value": key}
                                                    for key, text in services.RISK_SCOPES.items()],
                                 value="plan", inline=True, persistence=True, persistence_type="session")],
                 className="filter wide"),
        html.P("The capital plan is what the request asks for: its projects at the start years the budget gives "
               "them. Each asset's best option shows what the whole fleet could earn with no budget.",
               className="page-intro"),
        html.Div(id=SUMMARY, className="asset-summary"),
        html.Div([html.Div(ui.graph(TORNADO), className="panel half"), html.Div(ui.graph(FLEET), className="panel half")],
                 className="row"),
        html.Div(ui.graph(RANGES), className="panel"),
        html.H3("Monte Carlo summary per project"),
        ui.data_grid(TABLE, height=420),
    ])


dash.register_page(__name__, path="/risk", name="Uncertainty", title="Uncertainty · drivecase", order=4, layout=layout)


#: What the percentiles are, as the NPV columns' tooltips say it.
PERCENTILES = ("P10, P50 and P90: the values that 10 %, 50 % and 90 % of the Monte Carlo draws fall below "
               "(P50 is the median).")


def columns(currency: str, scope: str = "best") -> list[dict]:
    start = [ui.number_col("start_yr", "Plan year")] if scope == "plan" else []
    # a plan project's NPV at its own start (its plan year), not at the plan's start (the summary and the chart)
    basis = ("at the project's own start (its plan year); the summary line and the histogram discount the plan "
             "to its start" if scope == "plan" else "of each asset's best option, starting at once")
    tip = {"headerTooltip": f"NPV {basis}. {PERCENTILES}"}
    target = scenario.PAYBACK_TARGET_YR
    return [ui.text_col("asset_id", "Asset"), ui.long_text_col("label", "Option", minWidth=200), *start,
            ui.number_col("npv_p10", f"NPV P10 [{currency}]", **tip), ui.number_col("npv_p50", f"NPV P50 [{currency}]", **tip),
            ui.number_col("npv_p90", f"NPV P90 [{currency}]", **tip),
            percent_col("prob_npv_positive_frac", "P(NPV > 0) [%]"),
            ui.number_col("payback_p50_yr", "Simple payback P50 [yr]", 1,
                          headerTooltip="The median over the draws of the simple payback (undiscounted, from the first "
                                        "outlay, without the residual value); the other pages show the discounted one."),
            percent_col("prob_payback_within_target_frac", f"P(simple payback <= {target:g} yr) [%]") | {
                "headerTooltip": f"Share of the draws whose simple payback is {target:g} years or less: a target "
                                 "industrial energy projects are often asked to meet (common practice)."}]


def percent_col(field: str, header: str) -> dict:
    """A probability held as a fraction (0-1) shown in whole per cent (``0.973`` as ``97``)."""
    return ui.number_col(field, header) | {"valueFormatter": {"function": (
        "(params.value == null || !isFinite(params.value)) ? '' : d3.format(',.0f')(100 * params.value)")}}


@callback(Output(TORNADO, "figure"), Output(RANGES, "figure"), Output(TABLE, "rowData"), Output(TABLE, "columnDefs"),
          Output(SUMMARY, "children"), Output(NOTICE, "children"), Output(FLEET, "figure"),
          Input(READY, "data"), Input(ui.SESSION_STORE, "data"), Input(ui.EDITS_STORE, "data"), Input(SCOPE, "value"))
def update(_ready, session, edits, scope):
    """Tornado and Monte Carlo of the plan or of the best options under the tab's assumptions (computed on this
    page only, then cached)."""
    scope = scope if scope in services.RISK_SCOPES else "plan"
    view = services.view(session, edits)
    try:
        result = view.result(with_risk=True)
    except ValueError as exc:  # e.g. a discount rate whose drawn values reach -100 %
        empty = figures.message_figure("No uncertainty results under these assumptions.")
        message = html.Span(f"The tornado and Monte Carlo cannot run under these assumptions: {exc}. Change them on "
                            "the 'Case & assumptions' page.")
        return empty, empty, [], columns(view.currency, scope), message, view.notice, empty
    rows = services.risk_rows(result, scope)
    summary = html.Span(services.risk_summary_text(result, scope, view.currency))
    return (figures.tornado(services.tornado_rows(result, scope), view.currency, scope),
            figures.risk_ranges(rows, view.currency, scope=scope), rows.to_dict("records"), columns(view.currency, scope), summary,
            view.notice, figures.fleet_npv_histogram(services.npv_draws(result, scope), view.currency, scope))
