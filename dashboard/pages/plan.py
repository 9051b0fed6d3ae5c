"""Capital plan: yearly budgets, the projects chosen by year, and the exact plan against rank order."""

from __future__ import annotations

import dash
from dash import Input, Output, State, callback, dcc, html, no_update

from dashboard import components as ui
from dashboard import figures, services
from models.plan import LOW_DATA_QUALITY_PCT
from models.wording import counted


READY = "plan-ready"
BUDGET = "plan-budget"
BUDGET_IDS = ui.budget_ids(BUDGET, services.BUDGET_YEARS)
#: The budget fields' labels ("Year 0 [EUR]"): the case's currency is the tab's, so a callback writes them.
BUDGET_LABEL_IDS = [f"{i}-label" for i in BUDGET_IDS]
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
PROVING = "plan-proving"
PROVE_TEXT = "Prove the plan to 0.01 %"
#: Said beside the disabled button while the plan is being proved.
PROVING_TEXT = "Proving the plan… (to 0.01 %: up to a minute on a large case)"
PACK_TEXT = "Download the capital-request pack (.zip)"
PACK_BUILDING_TEXT = "Building the pack…"
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
                  html.Span(id=PROVING, role="status", className="proving"),
                  html.Button(PROVE_TEXT, id=PROVE, className="button secondary")],
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
                  html.Button(PACK_TEXT, id=PACK_BUTTON, className="button"),
                  dcc.Loading(html.Div(id=PACK_STATUS, className="form-message", role="status"), type="dot"),
                  dcc.Download(id=PACK)], className="panel"),
    ])


dash.register_page(__name__, path="/plan", name="Capital plan", title="Capital plan · drivecase", order=3, layout=layout)


@callback([Output(i, "value") for i in BUDGET_IDS], [Output(i, "children") for i in BUDGET_LABEL_IDS],
          Input(READY, "data"), Input(ui.SESSION_STORE, "data"), State(ui.EDITS_STORE, "data"), )
def fill(_ready, session, edits):
    """Show the budget in force, and its unit, when the page opens or the case changes."""
    view = services.view(session, edits)
    return [*ui.budget_values(services.assumption_form(view.assumptions)["budget_per_yr"], services.BUDGET_YEARS),
            *ui.budget_labels(view.currency, services.BUDGET_YEARS)]


@callback(Output(ui.EDITS_STORE, "data", allow_duplicate=True), Output(BUDGET_MESSAGE, "children"),
          Output(BUDGET_MESSAGE, "className"), [Input(i, "value") for i in BUDGET_IDS], State(ui.EDITS_STORE, "data"), State(ui.SESSION_STORE, "data"),
          prevent_initial_call=True)
def edit(*args):
    """Check the budget and store it as the tab's edit (the economics re-run; the physics do not)."""
    values, (edits, session) = list(args[:len(BUDGET_IDS)]), args[len(BUDGET_IDS):]
    view = services.view(session, edits)
    budget, problem = services.parse_budget(values, view.currency)
    if problem:
        return no_update, "Not applied: " + problem, ui.message_class(False)
    new, problem = services.edit_assumptions(view.key, view.entry.case.finance, edits, budget_per_yr=budget)
    if new is None:
        return no_update, problem, ui.message_class(False)
    # the text names what was refused ("Not applied: ..."), or is empty
    return ((new if services.edits_change(view, new) else no_update), problem,
            ui.message_class(False) if problem else "form-message")


def project_columns(currency: str) -> list[dict]:
    return [ui.text_col("asset_id", "Asset"), ui.long_text_col("label", "Option", minWidth=220),
            ui.number_col("start_yr", "Plan year", maxWidth=120), ui.number_col("capital", f"Capital [{currency}]"),
            ui.number_col("npv", f"NPV at its start [{currency}]", headerTooltip=PLAN_NPV_NOTE),
            ui.number_col("npv_at_plan_start", f"NPV at plan start [{currency}]"),
            ui.number_col("data_quality_pct", "Data quality [%]", maxWidth=130,
                          headerTooltip="share of the asset's nameplate fields known (the rest filled with defaults)")]


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
    later = tables["capital_later"]["exact"]
    if later > 0.005:  # motors replaced when they fail after the plan years, repeat purchases in the horizon
        spend += f" · later: {ui.fmt_money(later, c)} (after the budgeted years)"
    name = services.plan_name(result)
    summary = [html.Span(f"{name[:1].upper() + name[1:]}: {len(tables['exact'])} projects, NPV {ui.fmt_money(comparison.get('npv_exact'), c)}; "
                         f"rank order: {len(tables['rank_order'])} projects, NPV {ui.fmt_money(comparison.get('npv_greedy'), c)} "
                         f"(shortfall {ui.fmt_money(comparison.get('shortfall'), c)}). "),
               html.Span(f"Capital {spend}.", id="plan-spend")]
    n_low, share_low = tables["low_quality"]
    if n_low:  # what an approver would ask first: how much of the plan rests on defaulted nameplates
        summary += [html.Br(), html.Span(
            f"Caution: {counted(n_low, 'project')} of the plan ({share_low:.0%} of its NPV) rest on assets whose data "
            f"quality is below {LOW_DATA_QUALITY_PCT:.0f} %: read their nameplates and log their loads before the "
            "money is approved.", className="small caution", id="plan-low-quality")]
    harmonics = services.plan_harmonic_text(view, result)
    if harmonics:  # a plan past the harmonic limits: its mitigation is not in the figures above
        summary += [html.Br(), html.Span("Caution: " + harmonics + " The Site meter page has the screen.",
                                         className="small caution", id="plan-harmonics")]
    financing = services.plan_financing_text(result)
    if financing:  # the owner's view under the case's loan or energy-service contract
        summary += [html.Br(), html.Span(financing, className="small", id="plan-financing")]
    diff_columns = [ui.text_col("plan", "Only in")] + project_columns(c)[:4] + [project_columns(c)[5]]
    return (figures.plan_by_year(by_year, c, name), figures.plan_comparison(comparison, c, name),
            tables["exact"].to_dict("records"), project_columns(c),
            tables["differences"].to_dict("records"), diff_columns, summary, view.notice,
            services.plan_solve_text(result), services.plan_is_proven(result), f"Chosen projects ({name})")


@callback(Output(PROVED, "data"), Output(SOLVE_STATUS, "children", allow_duplicate=True), Input(PROVE, "n_clicks"),
          State(ui.SESSION_STORE, "data"), State(ui.EDITS_STORE, "data"),
          # while it runs: the button is off and says so, the line beside it says what is going on, and the
          # status line (an output here, so its loading dot spins) no longer shows the live plan's bound
          running=[(Output(PROVE, "disabled"), True, False), (Output(PROVE, "children"), "Proving…", PROVE_TEXT),
                   (Output(PROVING, "children"), PROVING_TEXT, "")],
          prevent_initial_call=True)
def prove(clicks, session, edits):
    """Solve the tab's plan to the full-run precision; the page then shows the proved plan (the status line is
    written again by :func:`update`)."""
    if not clicks:  # the page mounting is not a click
        return no_update
    services.view(session, edits).result(precise=True)
    return clicks, no_update


@callback(Output(PACK, "data"), Output(PACK_STATUS, "children"), Output(PACK_STATUS, "className"),
          Input(PACK_BUTTON, "n_clicks"),
          State(ui.SESSION_STORE, "data"), State(ui.EDITS_STORE, "data"),
          running=[(Output(PACK_BUTTON, "disabled"), True, False),
                   (Output(PACK_BUTTON, "children"), PACK_BUILDING_TEXT, PACK_TEXT)],
          prevent_initial_call=True)
def pack(_clicks, session, edits):
    """Write the capital-request pack for the tab's case, plan and assumptions, and send it zipped."""
    if not _clicks:  # the page mounting is not a click
        return no_update, no_update, no_update
    view_ = services.view(session, edits)
    try:
        data = services.pack_zip_bytes(view_)
    except ValueError as exc:
        return no_update, f"The pack could not be written: {exc}", ui.message_class(False)
    return (dcc.send_bytes(data, "drivecase-capital-request-pack.zip"), "Pack ready: see your downloads.",
            ui.message_class(True))
