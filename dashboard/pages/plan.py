"""Capital plan: yearly budgets, the projects chosen by year, and the exact plan against rank order."""

from __future__ import annotations

import dash
from dash import Input, Output, State, callback, dcc, html, no_update

from dashboard import components as ui
from dashboard import figures, services


READY = "plan-ready"
BUDGET = "plan-budget"
BUDGET_IDS = ui.budget_ids(BUDGET, services.BUDGET_YEARS)
BUDGET_MESSAGE = "plan-budget-message"
BY_YEAR = "plan-by-year"
COMPARISON = "plan-comparison"
CHOSEN = "plan-chosen"
DIFFERENCES = "plan-differences"
SUMMARY = "plan-summary"
NOTICE = "plan-notice"
PACK_BUTTON = "plan-pack-button"
PACK = "plan-pack"
PACK_STATUS = "plan-pack-status"
SOLVE_STATUS = "plan-solve-status"
PROVE = "plan-prove"
PROVED = "plan-proved"
CHOSEN_HEADING = "plan-chosen-heading"
#: Why a reactive project's NPV here can be below its own NPV on the Asset page.
PLAN_NPV_NOTE = ("A reactive project (capacitor, wound-field machine) counts here at the share of its bill saving it adds "
                 "beside the plan's other projects (they share the site's reactive charge), so its NPV here can be below "
                 "its own NPV on the Asset page; the other projects count at their own NPV.")


def layout(**_query):
    return html.Div([
        dcc.Store(id=READY, data=True),
        dcc.Store(id=PROVED),
        ui.page_header("Capital plan", "The projects that give the most NPV within each year's capital budget, chosen "
                                       "by integer programming (exact once proven: the line under the budget says how "
                                       "far it is), beside the simpler rule of funding the best ratio of NPV to capital "
                                       "first."),
        ui.notice(NOTICE),
        html.Div([html.H3("Capital budget per plan year"),
                  html.P("Leave every year blank for no limit (then each asset gets its best option in year 0, except reactive "
                         "projects whose value the rest of the plan already takes). "
                         "Press Enter or leave the field to apply.", className="page-intro"),
                  ui.budget_inputs(BUDGET, services.BUDGET_YEARS),
                  html.Div(id=BUDGET_MESSAGE, className="form-message", role="alert")], className="panel form"),
        html.Div(id=SUMMARY, className="asset-summary"),
        html.Div([dcc.Loading(html.Span(id=SOLVE_STATUS, role="status"), type="dot"),
                  html.Button("Prove the plan to 0.01 %", id=PROVE, className="button secondary")],
                 className="solve-status"),
        html.Div([html.Div(ui.graph(BY_YEAR), className="panel half"), html.Div(ui.graph(COMPARISON), className="panel half")],
                 className="row"),
        html.H3("Chosen projects", id=CHOSEN_HEADING),
        html.P(PLAN_NPV_NOTE, className="page-intro"),
        ui.data_grid(CHOSEN, height=380, empty_text="The plan buys nothing under these budgets"),
        html.H3("Where the two plans differ"),
        ui.data_grid(DIFFERENCES, height=240, empty_text="The two plans choose the same projects"),
        html.Div([html.H3("Capital-request pack"),
                  html.P("An auditable workbook with live NPV, IRR and payback formulas, a self-contained report "
                         "and a one-page decision record per asset, for this plan and these assumptions.",
                         className="page-intro"),
                  html.Button("Download the capital-request pack (.zip)", id=PACK_BUTTON, className="button"),
                  dcc.Loading(html.Div(id=PACK_STATUS, className="form-message", role="status"), type="dot"),
                  dcc.Download(id=PACK)], className="panel"),
    ])


dash.register_page(__name__, path="/plan", name="Capital plan", title="Capital plan · drivecase", order=3, layout=layout)


@callback([Output(i, "value") for i in BUDGET_IDS], Input(READY, "data"), Input(ui.SESSION_STORE, "data"),
          State(ui.EDITS_STORE, "data"), )
def fill(_ready, session, edits):
    """Show the budget in force when the page opens or the case changes."""
    return ui.budget_values(services.assumption_form(services.view(session, edits).assumptions)["budget_per_yr"],
                            services.BUDGET_YEARS)


@callback(Output(ui.EDITS_STORE, "data", allow_duplicate=True), Output(BUDGET_MESSAGE, "children"),
          Output(BUDGET_MESSAGE, "className"), [Input(i, "value") for i in BUDGET_IDS], State(ui.EDITS_STORE, "data"), State(ui.SESSION_STORE, "data"),
          prevent_initial_call=True)
def edit(*args):
    """Check the budget and store it as the tab's edit (the economics re-run; the physics do not)."""
    values, (edits, session) = list(args[:len(BUDGET_IDS)]), args[len(BUDGET_IDS):]
    budget, problem = services.parse_budget(values)
    if problem:
        return no_update, "Not applied: " + problem, ui.message_class(False)
    view = services.view(session, edits)
    new, problem = services.edit_assumptions(view.key, view.entry.case.finance, edits, budget_per_yr=budget)
    if new is None:
        return no_update, problem, ui.message_class(False)
    # the text names what was refused ("Not applied: ..."), or is empty
    return ((new if services.edits_change(view, new) else no_update), problem,
            ui.message_class(False) if problem else "form-message")


def project_columns(currency: str) -> list[dict]:
    return [ui.text_col("asset_id", "Asset"), ui.long_text_col("label", "Option", minWidth=220),
            ui.number_col("start_yr", "Start year", maxWidth=120), ui.number_col("capital", f"Capital [{currency}]"),
            ui.number_col("npv", f"NPV at its start [{currency}]", headerTooltip=PLAN_NPV_NOTE),
            ui.number_col("npv_at_plan_start", f"NPV at plan start [{currency}]")]


@callback(Output(BY_YEAR, "figure"), Output(COMPARISON, "figure"), Output(CHOSEN, "rowData"), Output(CHOSEN, "columnDefs"),
          Output(DIFFERENCES, "rowData"), Output(DIFFERENCES, "columnDefs"), Output(SUMMARY, "children"),
          Output(NOTICE, "children"), Output(SOLVE_STATUS, "children"), Output(PROVE, "disabled"),
          Output(CHOSEN_HEADING, "children"),
          Input(READY, "data"), Input(ui.SESSION_STORE, "data"), Input(ui.EDITS_STORE, "data"), Input(PROVED, "data"))
def update(_ready, session, edits, _proved=None):
    """Plan figures and tables under the tab's budget and assumptions (the proved plan once there is one)."""
    view = services.view(session, edits)
    result = view.result()
    tables = services.plan_tables(view, result)
    c = view.currency
    comparison = result.plan_comparison
    by_year = tables["by_year"]
    exact = by_year[by_year["plan"] == "exact"]
    spend = " · ".join(f"year {int(r.start_yr)}: {ui.fmt_money(r.capital, c)}"
                       + (f" of {ui.fmt_money(r.budget, c)}" if r.budget == r.budget else "")
                       for r in exact.itertuples(index=False))
    name = services.plan_name(result)
    summary = [html.Span(f"{name[:1].upper() + name[1:]}: {len(tables['exact'])} projects, NPV {ui.fmt_money(comparison.get('npv_exact'), c)}; "
                         f"rank order: {len(tables['rank_order'])} projects, NPV {ui.fmt_money(comparison.get('npv_greedy'), c)} "
                         f"(shortfall {ui.fmt_money(comparison.get('shortfall'), c)}). "),
               html.Span(f"Capital {spend}.", id="plan-spend")]
    diff_columns = [ui.text_col("plan", "Only in")] + project_columns(c)[:4] + [project_columns(c)[5]]
    return (figures.plan_by_year(by_year, c, name), figures.plan_comparison(comparison, c, name),
            tables["exact"].to_dict("records"), project_columns(c),
            tables["differences"].to_dict("records"), diff_columns, summary, view.notice,
            services.plan_solve_text(result), services.plan_is_proven(result), f"Chosen projects ({name})")


@callback(Output(PROVED, "data"), Input(PROVE, "n_clicks"), State(ui.SESSION_STORE, "data"),
          State(ui.EDITS_STORE, "data"), prevent_initial_call=True)
def prove(clicks, session, edits):
    """Solve the tab's plan to the full-run precision; the page then shows the proved plan."""
    if not clicks:  # the page mounting is not a click
        return no_update
    services.view(session, edits).result(precise=True)
    return clicks


@callback(Output(PACK, "data"), Output(PACK_STATUS, "children"), Output(PACK_STATUS, "className"),
          Input(PACK_BUTTON, "n_clicks"),
          State(ui.SESSION_STORE, "data"), State(ui.EDITS_STORE, "data"), prevent_initial_call=True)
def pack(_clicks, session, edits):
    """Write the capital-request pack for the tab's case, plan and assumptions, and send it zipped."""
    view_ = services.view(session, edits)
    try:
        data = services.pack_zip_bytes(view_)
    except ValueError as exc:
        return no_update, f"The pack could not be written: {exc}", ui.message_class(False)
    return (dcc.send_bytes(data, "drivecase-capital-request-pack.zip"), "Pack ready: see your downloads.",
            ui.message_class(True))
