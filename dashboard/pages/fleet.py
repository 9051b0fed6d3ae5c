"""Fleet overview: headline figures of the plan, the ranked asset table and the abatement cost curve (per asset, its
highest-NPV option among those that avoid CO2)."""

from __future__ import annotations

from urllib.parse import quote

import dash
from dash import Input, Output, State, callback, clientside_callback, dcc, html, no_update
from dash.exceptions import PreventUpdate

from dashboard import components as ui
from dashboard import figures, services


SITE_FILTER = "fleet-site-filter"
APPLICATION_FILTER = "fleet-application-filter"
SITE_BOX = "fleet-site-box"
APPLICATION_BOX = "fleet-application-box"
TABLE = "fleet-table"
ABATEMENT = "fleet-abatement"
NOTICE = "fleet-notice"
COUNT = "fleet-count"
#: The table's sort, kept for the tab's session (an asset opened and the Back button bring the same order back).
SORT = "fleet-sort"
HEADLINE = "fleet"
#: What the page says while the tab's results are not there yet (a new case's models run for 4-20 s).
COMPUTING = "Computing the case…"
#: Which option of each asset the abatement curve draws (models.plan.abatement_curve).
ABATEMENT_NOTE = ("One bar per asset: of its options that avoid CO2, the one with the highest NPV. It can differ from "
                  "the asset's best option in the table above, which need not avoid any CO2.")
#: The table's height: at most 460 px, less on a short window, so its own horizontal scrollbar (when the
#: columns do not fit) shows within the first screen, a line of notice above the cards included (the plan's
#: harmonic screen, a case's note).
TABLE_HEIGHT = "clamp(280px, calc(100vh - 450px), 460px)"


#: How to reach and open the table's rows without a mouse (dashboard/assets/keyboard.js, components.data_grid).
KEYBOARD_HINT = ("Keyboard: Tab to the table, the arrow keys move between cells and rows, Enter opens the row's "
                 "asset, Tab leaves the table.")


def layout(**_query):
    return html.Div([
        ui.page_header("Fleet overview",
                       "The best option for every motor and what the budgeted plan buys. Click a row to open the asset."),
        ui.notice(NOTICE),
        # the cards say "-" until the results arrive: say why over them while the case is computed
        dcc.Loading(ui.headline_cards(HEADLINE, placeholder=COMPUTING), delay_show=400, overlay_style={"visibility": "visible", "opacity": 0.35},
                    custom_spinner=html.Div(COMPUTING, className="computing", role="status"),
                    target_components={f"{HEADLINE}-headline-capital": "children"}),
        html.P("The cards are the budgeted plan for the whole fleet (plan year 0 is the first year of spending); "
               "the filters below narrow the table only. In the table, the columns up to CO2 are each asset's best "
               "option before the budget and add up to more than the cards; the plan's own columns (what it buys, "
               "its year and capital) add up to the plan capital card, and the Capital plan page lists the plan's "
               "NPVs.", className="page-intro"),
        html.Div([
            # the filters are made with their choices by a callback (filters), so the tab's choice is put back
            html.Div([html.Label("Site", htmlFor=SITE_FILTER),
                      html.Div(dcc.Dropdown(id=SITE_FILTER, multi=True, placeholder="all sites", disabled=True),
                               id=SITE_BOX)], className="filter"),
            html.Div([html.Label("Application", htmlFor=APPLICATION_FILTER),
                      html.Div(dcc.Dropdown(id=APPLICATION_FILTER, multi=True, placeholder="all applications",
                                            disabled=True), id=APPLICATION_BOX)], className="filter"),
            # rowData None = results not there yet (the count and the grid say so), [] = no asset matches
            html.Div(COMPUTING, id=COUNT, className="filter-count", role="status"),
        ], className="filters"),
        dcc.Store(id=SORT, storage_type="session"),
        ui.data_grid(TABLE, height=TABLE_HEIGHT, empty_text="No asset matches the filters", loading_text=COMPUTING,
                     rowData=None, getRowId="params.data.asset_id",
                     # the columns are shared out with the vertical scrollbar's room already kept, so they do not
                     # overflow by its width once the rows arrive
                     dashGridOptions={"alwaysShowVerticalScroll": True}),
        html.P(KEYBOARD_HINT, className="keyboard-hint"),
        html.Div([ui.graph(ABATEMENT), html.P(ABATEMENT_NOTE, className="page-intro")], className="panel"),
    ])


dash.register_page(__name__, path="/", name="Fleet", title="Fleet overview · drivecase", order=0, layout=layout)


#: Narrowest width of each column [px]: the whole table fits a 1366 px window (wider windows share out
#: the rest); below that it scrolls sideways inside its own panel. Headers wrap, long texts wrap.
WIDTHS_PX = {"rank": 48, "asset_id": 96, "site_id": 64, "application": 106, "rating": 74, "best_option": 110,
             "capital": 84, "npv": 84, "discounted_payback_yr": 90, "saving_per_yr": 92, "co2_avoided_t_per_yr": 86,
             "plan_option": 110, "plan_year": 62, "plan_capital": 84, "data_quality_pct": 84}
#: Width the two option texts start from [px] (they get the larger share of a wide window).
WIDE_TEXT_PX = 200


def table_columns(currency: str, power_unit: str) -> list[dict]:
    """Columns of the ranked asset table."""
    columns = [ui.number_col("rank", "#", maxWidth=64, pinned="left"),
               ui.text_col("asset_id", "Asset", pinned="left", cellClass="link-cell"),
               ui.text_col("site_id", "Site", maxWidth=100), ui.text_col("application", "Application"),
               ui.rating_col("rating", f"Rating [{services.power_label(power_unit)}]"),
               ui.long_text_col("best_option", "Best option (before the budget)"),
               ui.number_col("capital", f"Capital [{currency}]"),
               ui.number_col("npv", f"NPV [{currency}]", headerTooltip="NPV of the asset's best option priced alone, "
                             "before the budget: the plan may buy another option or none (the Plan NPV card sums "
                             "the plan's projects at the plan's start)"),
               # blank where nothing is spent; said in words where the option does not pay back within the horizon
               ui.payback_col(),
               ui.number_col("saving_per_yr", f"Saving [{currency}/yr]", headerTooltip=ui.SAVING_NOTE),
               ui.number_col("co2_avoided_t_per_yr", "CO2 avoided [t/yr]", 1),
               ui.long_text_col("plan_option", "The plan buys"),
               ui.number_col("plan_year", "Plan year", maxWidth=100),
               ui.number_col("plan_capital", f"Plan capital [{currency}]"),
               ui.number_col("data_quality_pct", "Data quality [%]")]
    for column in columns:
        # the grid shares the window out in proportion to these widths, never below the narrowest
        column["minWidth"] = WIDTHS_PX[column["field"]]
        column["width"] = WIDE_TEXT_PX if column["field"] in ("best_option", "plan_option") else column["minWidth"]
    return columns


@callback(
    Output(f"{HEADLINE}-headline-capital", "children"), Output(f"{HEADLINE}-headline-saving", "children"),
    Output(f"{HEADLINE}-headline-npv", "children"), Output(f"{HEADLINE}-headline-co2", "children"),
    Output(TABLE, "rowData"), Output(TABLE, "columnDefs"), Output(COUNT, "children"), Output(ABATEMENT, "figure"),
    Output(NOTICE, "children"),
    Input(ui.SESSION_STORE, "data"), Input(ui.EDITS_STORE, "data"),
    Input(SITE_FILTER, "value"), Input(APPLICATION_FILTER, "value"), State(SITE_FILTER, "options"),
    State(SORT, "data"),
)
def update(session, edits, sites, applications, site_choices=(), sort=None):
    """Headline, table and curve for the tab's case and assumptions.

    Nothing until :func:`filters` has made the filters (the stand-ins in the layout have no choices): they may
    put back the tab's choice, and the table waits for it rather than showing every asset first.
    """
    if site_choices is None:
        raise PreventUpdate
    view = services.view(session, edits)
    result = view.result()
    cards = ui.headline_values(services.headline(result), view.currency)
    table = services.ranked_assets(view, result, sites, applications)
    count = f"{len(table)} of {len(view.case.assets)} assets"
    return (*cards, table.to_dict("records"), sorted_columns(table_columns(view.currency, view.power_unit), sort), count,
            figures.abatement_curve(services.with_option_labels(result.abatement, result), view.currency),
            " ".join(text for text in (view.notice, services.plan_notice(result),
                                       services.plan_harmonic_text(view, result, brief=True)) if text))


def sorted_columns(columns: list[dict], sort) -> list[dict]:
    """The table's columns with the tab's kept sort (:data:`KEEP_SORT_JS`) on them; unknown columns are passed over."""
    kept = {str(s.get("colId")): s for s in sort or () if isinstance(s, dict) and s.get("sort") in ("asc", "desc")}
    return [column | {"sort": kept[column["field"]]["sort"], "sortIndex": kept[column["field"]].get("sortIndex")}
            if column["field"] in kept else column for column in columns]


#: Keeps the columns the table is sorted by, in the browser (the grid reports its column state on every sort). In
#: the browser, not on the server: a user who sorts and at once opens an asset would otherwise leave the page
#: before the server's answer is stored, and Back would show the table unsorted. A grid without its rows yet
#: (the page just drawn again) reports its bare columns, not a sort of the user's: passed over, so the kept
#: sort is put back on the columns when the rows come (:func:`update`).
KEEP_SORT_JS = """function (state, rows) {
    if (!Array.isArray(state) || rows === null || rows === undefined) {
        return window.dash_clientside.no_update;
    }
    return state.filter(function (s) { return s && (s.sort === "asc" || s.sort === "desc"); })
                .map(function (s) { return {colId: s.colId, sort: s.sort, sortIndex: s.sortIndex}; });
}"""
clientside_callback(KEEP_SORT_JS, Output(SORT, "data"), Input(TABLE, "columnState"), State(TABLE, "rowData"),
                    prevent_initial_call=True)


@callback(Output(SITE_BOX, "children"), Output(APPLICATION_BOX, "children"), Input(ui.SESSION_STORE, "data"))
def filters(session):
    """The site and application filters with the tab's case's choices, each keeping the tab's choice for the
    session (the user opens an asset and comes back with the Back button: the table is as narrowed as before)."""
    view = services.view(session, None)
    site_choices, application_choices = services.filter_choices(view)
    return (ui.kept_filter(SITE_FILTER, site_choices, "all sites", view.key),
            ui.kept_filter(APPLICATION_FILTER, application_choices, "all applications", view.key))


@callback(Output(COUNT, "children", allow_duplicate=True), Input(TABLE, "virtualRowData"),
          State(ui.SESSION_STORE, "data"), State(TABLE, "rowData"), prevent_initial_call=True)
def count_shown(shown, session, rows=()):
    """The count follows the grid's own column filters too (the rows it shows after them).

    A grid not yet given its rows (``rowData`` None: the results are still being computed) reports no rows
    shown; the count then keeps saying the case is being computed rather than "0 of n assets".
    """
    if shown is None or rows is None:
        return no_update
    return f"{len(shown)} of {len(services.view(session, None).case.assets)} assets"


@callback(Output(ui.LOCATION, "href"), Input(TABLE, "cellClicked"), prevent_initial_call=True)
def open_asset(cell):
    """Open the asset page for the clicked row."""
    if not cell or not cell.get("rowId"):
        return no_update
    return f"/asset?id={quote(str(cell['rowId']), safe='')}"
