"""One asset: every option side by side, life-cycle cost, cash flow, part-load behaviour, speed effect, end of life,
data quality."""

from __future__ import annotations

from urllib.parse import quote

import dash
from dash import Input, Output, State, callback, dcc, html

from dashboard import components as ui
from dashboard import figures, services


PICK = "asset-pick"
REQUEST = "asset-request"
ADDRESS = "asset-address"
SUMMARY = "asset-summary"
OPTIONS = "asset-options"
LCC = "asset-lcc"
CASH = "asset-cash"
PERFORMANCE = "asset-performance"
PERFORMANCE_NOTE = "asset-performance-note"
SPEED = "asset-speed"
DEFAULTS = "asset-defaults"
FLAGS = "asset-flags"
NOTICE = "asset-notice"
END_OF_LIFE = "asset-end-of-life"
END_OF_LIFE_TEXT = "asset-end-of-life-text"
FLEET_RULES = "asset-fleet-rules"
FLEET_RULES_SCOPE = "asset-fleet-rules-scope"


def layout(id=None, **_query):  # noqa: A002 - the URL parameter is called id
    return html.Div([
        dcc.Store(id=REQUEST, data=id),
        dcc.Store(id=ADDRESS),
        ui.page_header("Asset", "Every option for one motor, side by side, and how sure the inputs are."),
        ui.notice(NOTICE),
        html.Div([html.Label("Asset", htmlFor=PICK), dcc.Dropdown(id=PICK, clearable=False, placeholder="choose an asset")],
                 className="filter wide"),
        html.Div(id=SUMMARY, className="asset-summary"),
        html.H3("Options"),
        # as tall as its rows (an asset has a handful of options, each row as tall as its wrapped texts)
        ui.data_grid(OPTIONS, height="auto", getRowId="params.data.option_id",
                     dashGridOptions={"domLayout": "autoHeight"},
                     rowClassRules={"best-option": "params.data.best"}),
        html.Div([html.Div(ui.graph(LCC), className="panel half"),
                  html.Div([ui.graph(CASH), html.P("Each line is an option against keeping today's motor (against the "
                                                   "least repair, for a motor marked as failed); the diamond "
                                                   "marks its discounted payback, where the line crosses zero.",
                                                   className="page-intro")], className="panel half")],
                 className="row"),
        html.Div([html.Div([ui.graph(PERFORMANCE),
                            html.P(id=PERFORMANCE_NOTE, className="page-intro")],
                           className="panel half"),
                  html.Div([html.H3("Speed change and its remedies"),
                            html.P("A lower-slip or synchronous machine turns a centrifugal load faster and so draws "
                                   "more power. An impeller trim or a pulley change takes the extra flow and power "
                                   "back (the motor itself still turns faster, as shown). A drive sets the speed: it holds today's "
                                   "speed, or, where it replaces a throttle or a damper, lowers it to what the duty needs. "
                                   "A constant-torque load (a conveyor, a positive-displacement machine) turned faster "
                                   "does the same work in less time: its energy is kept, its kW while running rises.",
                                   className="page-intro"),
                            ui.graph(SPEED)], className="panel half")], className="row"),
        html.H3("At end of life"),
        html.P("What today's motor costs if it is replaced now, replaced when it fails, or rewound when it fails: "
               "capital, running cost and expected downtime over the study period, each year weighted by the "
               "chance that the motor fails in it. For a motor marked as failed: what rewinding or replacing it now "
               "costs, the outage until it runs again included.", className="page-intro"),
        html.Div([html.Div(ui.graph(END_OF_LIFE), className="panel half"),
                  html.Div(dcc.Loading(html.Div("Computing the case…", id=END_OF_LIFE_TEXT), type="dot",
                                       delay_show=400), className="panel half")], className="row"),
        html.H4("Repair-or-replace policy for the fleet"),
        html.P("For a motor of the case that has just failed: rewind it, or replace it with a new induction motor, "
               "by size and running hours. Standard ratings are priced from the catalogue at 75 % load and the "
               "case's mean price per kWh; the hours are steps of a grid (1,000 to 8,000 h/yr), not exact "
               "break-evens.", className="page-intro"),
        html.P(id=FLEET_RULES_SCOPE, className="page-intro"),
        # (grids of a few rows of long wrapped text: as tall as their rows, so no row is cut)
        ui.data_grid(FLEET_RULES, height="auto", rowData=None, empty_text=services.END_OF_LIFE_UNAVAILABLE,
                     loading_text="Computing the case…", dashGridOptions={"domLayout": "autoHeight"}),
        html.H3("Data quality"),
        html.Div([html.Div([html.H4("Fields filled with defaults"),
                            ui.data_grid(DEFAULTS, height="auto", empty_text="No field of this asset was filled with a default",
                                         dashGridOptions={"domLayout": "autoHeight"})], className="half"),
                  html.Div([html.H4("Cautions raised by the models"),
                            ui.data_grid(FLAGS, height="auto", empty_text="No cautions for this asset",
                                         dashGridOptions={"domLayout": "autoHeight"})], className="half")],
                 className="row"),
    ])


dash.register_page(__name__, path="/asset", name="Asset", title="Asset · drivecase", order=1, layout=layout)


@callback(Output(PICK, "options"), Output(PICK, "value"), Input(REQUEST, "data"), Input(ui.SESSION_STORE, "data"),
          State(ui.LAST_ASSET_STORE, "data"))
def choose(requested, session, last=None):
    """List the case's assets; keep the requested one when it exists, else the one the tab showed last (the
    navigation link names none), else the first asset."""
    view = services.view(session, None)
    choices = services.asset_choices(view)
    ids = [c["value"] for c in choices]
    if requested in ids:
        return choices, requested
    return choices, last if (not requested and last in ids) else (ids[0] if ids else None)


@callback(Output(ADDRESS, "data"), Output(ui.LAST_ASSET_STORE, "data"), Input(PICK, "value"))
def address(asset_id):
    """The address's query for the asset on screen (``?id=KGQ-F01``): a reload or a bookmark shows that asset;
    and the tab's last asset, which the page opens on when the address names none.

    The browser's address is rewritten in place (below), so a pick adds no history entry and the page is not
    rendered again; nothing here feeds back into the dropdown.
    """
    if not asset_id:
        return dash.no_update, dash.no_update
    return f"?id={quote(str(asset_id), safe='')}", str(asset_id)


ui.address_follows(ADDRESS, "/asset")

#: Cautions of an option, as its grid cell counts them (the text in the tooltip and in the grid below).
CAUTION_COUNT = {"function": "params.value > 0 ? params.value + (params.value == 1 ? ' caution' : ' cautions') : ''"}


#: Narrowest width of each column of the options grid [px]: the whole grid fits a 1366 px window (wider
#: windows share out the rest in proportion); below that it scrolls sideways inside itself, the option's
#: name pinned left and its cautions pinned right. Headers wrap, long texts wrap.
OPTION_WIDTHS_PX = {"label": 170, "technology": 116, "speed_remedy": 126, "capital": 92, "saving_per_yr": 92,
                    "npv": 100, "irr_pct": 72, "discounted_payback_yr": 90, "energy_mwh_per_yr": 100,
                    "mean_speed_rpm": 80, "life_cycle_cost": 104, "cautions_count": 96}


def option_columns(currency: str) -> list[dict]:
    """Columns of the options grid: long names wrap (and show in a tooltip); the cautions stay in view,
    pinned right and counted, their text in the tooltip and in the grid of cautions below. Each column
    starts from its width in :data:`OPTION_WIDTHS_PX`; the discounted payback is written as on the Fleet
    page (:func:`dashboard.components.payback_col`)."""
    columns = [ui.long_text_col("label", "Option", pinned="left"),
               ui.long_text_col("technology", "Technology"),
               ui.long_text_col("speed_remedy", "Speed remedy"),
               ui.number_col("capital", f"Capital [{currency}]"),
               ui.number_col("saving_per_yr", f"Saving [{currency}/yr]", headerTooltip=ui.SAVING_NOTE),
               ui.number_col("npv", f"NPV [{currency}]"),
               ui.number_col("irr_pct", "IRR [%]", 1), ui.payback_col(),
               ui.number_col("energy_mwh_per_yr", "Energy [MWh/yr]", 1), ui.number_col("mean_speed_rpm", "Mean speed [rpm]", 0),
               ui.number_col("life_cycle_cost", f"Life-cycle cost [{currency}]"),
               ui.number_col("cautions_count", "Cautions", pinned="right", maxWidth=130, filter=False,
                             tooltipField="flags", valueFormatter=CAUTION_COUNT)]
    for column in columns:
        # the grid shares the window out in proportion to these widths, never below them
        column["minWidth"] = column["width"] = OPTION_WIDTHS_PX[column["field"]]
    return columns


@callback(
    Output(SUMMARY, "children"), Output(OPTIONS, "rowData"), Output(OPTIONS, "columnDefs"), Output(LCC, "figure"),
    Output(CASH, "figure"), Output(PERFORMANCE, "figure"), Output(SPEED, "figure"), Output(DEFAULTS, "rowData"),
    Output(DEFAULTS, "columnDefs"), Output(FLAGS, "rowData"), Output(FLAGS, "columnDefs"), Output(NOTICE, "children"),
    Output(PERFORMANCE_NOTE, "children"), Input(PICK, "value"), Input(ui.SESSION_STORE, "data"), Input(ui.EDITS_STORE, "data"), State(REQUEST, "data"),
)
def update(asset_id, session, edits, requested=None):
    """Everything about the chosen asset under the tab's assumptions."""
    view = services.view(session, edits)
    ids = set(view.case.assets["asset_id"])
    notice = view.notice
    if requested and str(requested) not in ids:  # an address naming an asset the case does not have
        notice = " ".join(x for x in (notice, f"The case has no asset '{requested}'; showing {asset_id or 'none'}.") if x)
    if asset_id not in ids:
        empty = figures.message_figure("Choose an asset.")
        return ("", [], [], empty, empty, empty, empty, [], [], [], [], notice, "")
    result = view.result()
    asset = view.case.assets.set_index("asset_id").loc[asset_id]
    options = services.asset_options(view, result, asset_id)
    colours = figures.option_colour_map(services.option_colour_keys(view))  # one colour per option on every chart
    score, defaults, flags = services.asset_quality(view, result, asset_id)
    rating = services.rating_in_unit(float(asset["rated_p_kw"]), view.power_unit)
    summary = [html.Strong(f"{asset_id}: {asset['description'] or ''}"),
               html.Span(f" · site {asset['site_id']} · {asset['application']} · "
                         f"{ui.fmt_rating(rating, services.power_label(view.power_unit))} · "
                         f"{asset['speed_control']} speed control · data quality {score:.0f} %")]
    choice = services.asset_choice_text(result, asset_id, view.currency)
    if choice:  # the answer the owner of this motor came for, as the fleet table gives it
        summary.append(html.Div(choice, id="asset-choice"))
    no_option = services.no_option_text(result, asset_id)
    if no_option:  # only today's motor is offered: say why, rather than leave "Keep as is" unexplained
        summary.append(html.Div(no_option, className="small caution", id="asset-no-option"))
    failed = services.failed_text(result, asset_id, view.currency)
    if failed:
        summary.append(html.Div(failed, className="small caution", id="asset-failed"))
    ratchet = services.ratchet_text(result, asset_id, view.currency, services.in_service(view, result))
    if ratchet:
        summary.append(html.Div(ratchet, className="small", id="asset-ratchet"))
    measure = services.measure_text(view, result, asset_id)
    if measure:
        summary.append(html.Div(measure, className="small", id="asset-measure"))
    verified = services.verified_text(view, result, asset_id)
    if verified:  # the savings measured after its project (the case's verification table)
        summary.append(html.Div(verified, className="small", id="asset-verified"))
    harmonics = services.asset_harmonic_text(view, result, asset_id)
    if harmonics:  # its site with the plan's drives and capacitors passes a harmonic limit
        summary.append(html.Div(harmonics, className="small caution", id="asset-harmonics"))
    hours, basis = services.asset_load_hours(view, asset_id)
    return (summary, options.to_dict("records"), option_columns(view.currency),
            figures.lcc_stack(services.asset_lcc(result, asset_id), view.currency),
            figures.cumulative_cash(services.asset_cumulative_cash(view, result, asset_id), view.currency, colours),
            figures.performance(services.asset_performance(view, asset_id), hours, basis, colours),
            figures.speed_energy(options, colours),
            defaults.to_dict("records"),
            # the field in words; its column heading in the asset register shows on hover
            [ui.long_text_col("field", "Field", tooltipField="column",
                              headerTooltip="Hover a field for its column heading in the asset register"),
             ui.text_col("value", "Value used"),
             ui.long_text_col("basis", "Basis", flex=2),
             ui.text_col("score_effect", "Data quality", maxWidth=120,
                         headerTooltip="points the default takes off the asset's data-quality score (some fields "
                                       "are not scored: the model's result depends little on them)")],
            flags.to_dict("records"),
            [ui.long_text_col("option", "Option"), ui.long_text_col("flag", "Caution", flex=3)],
            notice, services.performance_note(view, result, asset_id))


def fleet_rule_columns(power_unit: str = "kW") -> list[dict]:
    """Columns of the repair-or-replace policy grid (the pack's workbook headers), ratings in the case's unit."""
    unit = services.power_label(power_unit)
    return [ui.rating_col("from_rating", f"From rating [{unit}]", maxWidth=150),
            ui.rating_col("to_rating", f"To rating [{unit}]", maxWidth=150),
            ui.number_col("min_hours_to_replace_h_per_yr", "Replace rather than rewind from [h/yr]", minWidth=170,
                          maxWidth=220),
            ui.long_text_col("decision", "Decision", minWidth=180),
            ui.long_text_col("rule", "Rule", flex=3, minWidth=320)]


@callback(
    Output(END_OF_LIFE, "figure"), Output(END_OF_LIFE_TEXT, "children"), Output(FLEET_RULES, "rowData"),
    Output(FLEET_RULES, "columnDefs"), Output(FLEET_RULES_SCOPE, "children"),
    Input(PICK, "value"), Input(ui.SESSION_STORE, "data"), Input(ui.EDITS_STORE, "data"),
)
def end_of_life(asset_id, session, edits):
    """The chosen asset's end-of-life strategies and the fleet's repair-or-replace policy.

    Before an asset is chosen the policy grid keeps its "Computing the case…" (no rows would read as "not
    available").
    """
    view = services.view(session, edits)
    if asset_id not in set(view.case.assets["asset_id"]):
        return figures.message_figure("Choose an asset.", height=220), "", dash.no_update, dash.no_update, dash.no_update
    result = view.result()
    eol = services.asset_end_of_life(view, result, asset_id)
    if eol.message:
        text = [html.P(eol.message)]
    else:
        text = [html.P(eol.text), html.P(eol.caution, className="page-intro")]
    spare = services.spares_text(view, result, asset_id)
    if spare:  # the spares of its group of interchangeable motors (a rotating pool)
        text.append(html.P(spare, id="asset-spares"))
    return (figures.end_of_life_costs(eol.strategies, view.currency, eol.message), text,
            services.fleet_rule_rows(result, view.power_unit).to_dict("records"), fleet_rule_columns(view.power_unit),
            services.fleet_rules_scope_text(result, view.case.assets["rated_p_kw"], view.currency, view.power_unit))
