"""Fleet overview: headline figures of the plan, the ranked asset table and the abatement cost curve."""

from __future__ import annotations

from urllib.parse import quote

import dash
from dash import Input, Output, State, callback, dcc, html, no_update

from dashboard import components as ui
from dashboard import figures, services


SITE_FILTER = "fleet-site-filter"
APPLICATION_FILTER = "fleet-application-filter"
TABLE = "fleet-table"
ABATEMENT = "fleet-abatement"
NOTICE = "fleet-notice"
COUNT = "fleet-count"
HEADLINE = "fleet"


def layout(**_query):
    return html.Div([
        ui.page_header("Fleet overview",
                       "The best option for every motor and what the budgeted plan buys. Click a row to open the asset."),
        ui.notice(NOTICE),
        ui.headline_cards(HEADLINE),
        html.P("The cards are the budgeted plan for the whole fleet (plan year 0 is the first year of spending); "
               "the filters below narrow the table only.", className="page-intro"),
        html.Div([
            html.Div([html.Label("Site", htmlFor=SITE_FILTER),
                      dcc.Dropdown(id=SITE_FILTER, multi=True, placeholder="all sites")], className="filter"),
            html.Div([html.Label("Application", htmlFor=APPLICATION_FILTER),
                      dcc.Dropdown(id=APPLICATION_FILTER, multi=True, placeholder="all applications")], className="filter"),
            html.Div(id=COUNT, className="filter-count"),
        ], className="filters"),
        ui.data_grid(TABLE, height=460, empty_text="No asset matches the filters", getRowId="params.data.asset_id"),
        html.Div(ui.graph(ABATEMENT), className="panel"),
    ])


dash.register_page(__name__, path="/", name="Fleet", title="Fleet overview · drivecase", order=0, layout=layout)


def table_columns(currency: str, power_unit: str) -> list[dict]:
    """Columns of the ranked asset table."""
    return [ui.number_col("rank", "#", maxWidth=70, pinned="left"),
            ui.text_col("asset_id", "Asset", pinned="left", cellClass="link-cell"),
            ui.text_col("site_id", "Site", maxWidth=100), ui.text_col("application", "Application", minWidth=140),
            ui.rating_col("rating", f"Rating [{services.power_label(power_unit)}]"),
            ui.long_text_col("best_option", "Best option (before the budget)", minWidth=200),
            ui.number_col("capital", f"Capital [{currency}]"), ui.number_col("npv", f"NPV [{currency}]"),
            # blank where nothing is spent; said in words where the option does not pay back within the horizon
            ui.number_col("discounted_payback_yr", "Disc. payback [yr]", 1, valueFormatter={
                "function": "(params.value == null || !isFinite(params.value)) ? "
                            "((params.data && params.data.capital > 0) ? 'not within the horizon' : '') : "
                            "d3.format(',.1f')(params.value)"}),
            ui.number_col("saving_per_yr", f"Saving [{currency}/yr]", headerTooltip=ui.SAVING_NOTE),
            ui.number_col("co2_avoided_t_per_yr", "CO2 avoided [t/yr]", 1),
            ui.long_text_col("plan_option", "The plan buys", minWidth=220),
            ui.number_col("plan_year", "Plan year", maxWidth=110),
            ui.number_col("plan_capital", f"Plan capital [{currency}]"),
            ui.number_col("data_quality_pct", "Data quality [%]")]


@callback(
    Output(f"{HEADLINE}-headline-capital", "children"), Output(f"{HEADLINE}-headline-saving", "children"),
    Output(f"{HEADLINE}-headline-npv", "children"), Output(f"{HEADLINE}-headline-co2", "children"),
    Output(TABLE, "rowData"), Output(TABLE, "columnDefs"), Output(COUNT, "children"), Output(ABATEMENT, "figure"),
    Output(SITE_FILTER, "options"), Output(APPLICATION_FILTER, "options"), Output(NOTICE, "children"),
    Input(ui.SESSION_STORE, "data"), Input(ui.EDITS_STORE, "data"),
    Input(SITE_FILTER, "value"), Input(APPLICATION_FILTER, "value"),
)
def update(session, edits, sites, applications):
    """Headline, table, curve and filter choices for the tab's case and assumptions."""
    view = services.view(session, edits)
    result = view.result()
    cards = ui.headline_values(services.headline(result), view.currency)
    table = services.ranked_assets(view, result, sites, applications)
    site_choices, application_choices = services.filter_choices(view)
    count = f"{len(table)} of {len(view.case.assets)} assets"
    return (*cards, table.to_dict("records"), table_columns(view.currency, view.power_unit), count,
            figures.abatement_curve(result.abatement, view.currency), site_choices, application_choices,
            " ".join(text for text in (view.notice, services.plan_notice(result)) if text))


@callback(Output(COUNT, "children", allow_duplicate=True), Input(TABLE, "virtualRowData"),
          State(ui.SESSION_STORE, "data"), prevent_initial_call=True)
def count_shown(shown, session):
    """The count follows the grid's own column filters too (the rows it shows after them)."""
    if shown is None:
        return no_update
    return f"{len(shown)} of {len(services.view(session, None).case.assets)} assets"


@callback(Output(ui.LOCATION, "href"), Input(TABLE, "cellClicked"), prevent_initial_call=True)
def open_asset(cell):
    """Open the asset page for the clicked row."""
    if not cell or not cell.get("rowId"):
        return no_update
    return f"/asset?id={quote(str(cell['rowId']), safe='')}"
