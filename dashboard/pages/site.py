"""Site meter: kW, kVAr and power factor before and with the plan, bills by line item, the reactive balance, the
harmonic screen."""

from __future__ import annotations

from urllib.parse import quote

import dash
from dash import Input, Output, State, callback, dcc, html

from dashboard import components as ui
from dashboard import figures, services
from models.bill_savings import banned_caution, banned_quantities
from models.case import coarse_demand_profiles, demand_window_text
from models.harmonics import SCREEN_CAUTION


PICK = "site-pick"
REQUEST = "site-request"
ADDRESS = "site-address"
WEEK = "site-week"
READY = "site-ready"
WEEK_FIGURE = "site-week-figure"
DURATION = "site-pf-duration"
BILLS = "site-bills"
REACTIVE = "site-reactive"
SUMMARY = "site-summary"
BILL_FIT = "site-bill-fit"
NOTICE = "site-notice"
HARMONICS = "site-harmonics"

#: What a cell of the harmonic screen says where the screen has no value to give: no drive, no worst harmonic.
NO_VALUE = "\u2013"
#: Cell and header padding of the harmonic screen's grid, each side [px] (the grid's own is 16 px), as the
#: Fleet table's: its ten columns fit a 1440 px window.
PADDING_PX = 8
#: Narrowest width of each column of the harmonic screen's grid [px]: each header's longest word fits on its
#: line (headers wrap between words, never inside one) and each cell's text whole; the whole grid fits a
#: 1440 px window (wider windows share out the rest in proportion, the finding taking the most); below that
#: it scrolls sideways inside its panel, the scenario pinned left and the finding next to it, in view.
HARMONIC_WIDTHS_PX = {"scenario": 100, "finding": 300, "drive_kva": 90, "short_circuit_kva": 125,
                      "voltage_thd_pct": 115, "worst_harmonic": 100, "worst_harmonic_pct": 115, "current_tdd_pct": 115,
                      "capacitor_kvar_max": 120, "resonance_order_low": 115}
#: Width the finding starts from [px]: it takes the larger share of a wide window.
FINDING_WIDTH_PX = 400


def _against_limit(limit_field: str, decimals: int = 1, blank: str = "") -> dict:
    """A cell formatter writing the row's value with its limit (``limit_field`` of the same row) beside it:
    ``1.3 (limit 5)``; ``blank`` where the value is missing.

    The grid evaluates the text with the names ``params`` and ``d3`` only (no ``isFinite``: an unknown name
    makes the whole formatter fail, and the cell shows the raw number); the rows carry None, never NaN or an
    infinity (:func:`dashboard.services.harmonic_screen`).
    """
    limit = f"params.data.{limit_field}"
    return {"function": f"params.value == null ? '{blank}' : d3.format(',.{decimals}f')(params.value) + "
                        f"((params.data && {limit} != null) ? ' (limit ' + d3.format(',.1~f')({limit}) + ')' : '')"}


def harmonic_columns() -> list[dict]:
    """Columns of the harmonic screen's grid (rows of :func:`screen_rows`).

    The finding, the screen's verdict, comes right after the scenario and wraps to as many lines as it needs;
    each limit is written in its value's cell (``26.1 (limit 15)``, wrapped rather than cut where the column is
    narrow) rather than in a column of its own. Each column starts from its width in :data:`HARMONIC_WIDTHS_PX`,
    never narrower.
    """
    at_bus = "against IEEE 519-2014's limit for the bus voltage"
    columns = [ui.text_col("scenario", "Scenario", pinned="left", maxWidth=120),
               ui.long_text_col("finding", "Finding"),
               ui.number_col("drive_kva", "Drives [kVA]"),
               ui.number_col("short_circuit_kva", "Short-circuit power [kVA]"),
               ui.number_col("voltage_thd_pct", "Voltage THD [%]",
                             valueFormatter=_against_limit("voltage_thd_limit_pct"), **ui.WRAPPED_NUMBER,
                             headerTooltip=f"The voltage's total harmonic distortion at the bus, {at_bus}."),
               ui.number_col("worst_harmonic", "Worst harmonic", valueFormatter={
                   "function": f"params.value == null ? '{NO_VALUE}' : d3.format(',.0f')(params.value)"},
                             headerTooltip=f"The harmonic order with the highest voltage at the bus ({NO_VALUE}: "
                                           "no drives)."),
               ui.number_col("worst_harmonic_pct", "Its voltage [%]",
                             valueFormatter=_against_limit("harmonic_limit_pct", blank=NO_VALUE), **ui.WRAPPED_NUMBER,
                             headerTooltip=f"The worst harmonic's voltage at the bus, {at_bus}."),
               ui.number_col("current_tdd_pct", "Current TDD [%]",
                             valueFormatter=_against_limit("current_tdd_limit_pct"), **ui.WRAPPED_NUMBER,
                             headerTooltip="The drives' harmonic current as a share of the maximum demand current, "
                                           "against IEEE 519-2014's limit for the supply's short-circuit ratio."),
               ui.number_col("capacitor_kvar_max", "Capacitors, most [kVAr]"),
               ui.number_col("resonance_order_low", "Resonance order, lowest", 1)]
    padding = {"paddingLeft": f"{PADDING_PX}px", "paddingRight": f"{PADDING_PX}px"}
    for column in columns:
        # the grid shares the window out in proportion to these widths, never below the narrowest
        column["minWidth"] = HARMONIC_WIDTHS_PX[column["field"]]
        column["width"] = FINDING_WIDTH_PX if column["field"] == "finding" else column["minWidth"]
        column["cellStyle"] = column.get("cellStyle", {}) | padding
        column["headerStyle"] = padding
        column |= {"wrapHeaderText": True, "autoHeaderHeight": True}  # between words: each fits its column
    return columns


#: Columns of the harmonic screen's grid (rows of :func:`screen_rows`).
HARMONIC_COLUMNS = harmonic_columns()


def screen_rows(rows: list[dict]) -> list[dict]:
    """The harmonic screen's rows (:func:`dashboard.services.harmonic_screen`) as its grid shows them.

    Parameters
    ----------
    rows : list of dict
        One row per scenario, with ``drive_kva``, ``worst_harmonic`` and ``worst_harmonic_pct``.

    Returns
    -------
    list of dict
        The same rows; where a row has no drives (``drive_kva`` 0 or missing) it has no worst harmonic, so its
        order and voltage are blank (the grid writes :data:`NO_VALUE`) rather than the screen's placeholder order.
    """
    return [row if (row.get("drive_kva") or 0) > 0 else row | {"worst_harmonic": None, "worst_harmonic_pct": None}
            for row in rows]


def layout(site=None, **_query):
    return html.Div([
        dcc.Store(id=READY, data=True),
        dcc.Store(id=REQUEST, data=site),
        dcc.Store(id=ADDRESS),
        ui.page_header("Site meter", "What the utility meter sees today and with the plan in place: power, reactive "
                                     "power, power factor and the monthly bill."),
        ui.notice(NOTICE),
        html.Div([
            html.Div([html.Label("Site", htmlFor=PICK), dcc.Dropdown(id=PICK, clearable=False)], className="filter"),
            html.Div([html.Label("Week", htmlFor=WEEK),
                      dcc.Dropdown(id=WEEK, placeholder="week of today's peak demand")], className="filter wide"),
        ], className="filters"),
        html.Div(id=SUMMARY, className="asset-summary"),
        html.Div(ui.graph(WEEK_FIGURE), className="panel"),
        html.Div([html.Div(ui.graph(DURATION), className="panel half"), html.Div(ui.graph(REACTIVE), className="panel half")],
                 className="row"),
        html.Div(ui.graph(BILLS), className="panel"),
        html.Div([ui.graph(BILL_FIT),
                  html.P("The site's own bills (bill_history.csv of the case) beside today's fleet as modelled: a "
                         "baseline far off the bills is to be questioned before its savings are.",
                         className="page-intro")], className="panel"),
        html.Div([html.H4("Harmonic screen: today and with the plan"),
                  ui.data_grid(HARMONICS, height="auto", rowData=None, columnDefs=HARMONIC_COLUMNS,
                               empty_text="No harmonic screen for this site", dashGridOptions={"domLayout": "autoHeight"}),
                  html.P("Drives at their motors' rated input against IEEE 519-2014's limits, from the transformer and "
                         "supply in sites.csv (transformer_kva, transformer_impedance_pct, supply_fault_kva). "
                         + SCREEN_CAUTION, className="small caution")], className="panel"),
    ])


dash.register_page(__name__, path="/site", name="Site meter", title="Site meter · drivecase", order=2, layout=layout)


@callback(Output(PICK, "options"), Output(PICK, "value"), Output(WEEK, "options"),
          Input(READY, "data"), Input(ui.SESSION_STORE, "data"), State(REQUEST, "data"), State(PICK, "value"))
def choose(_ready, session, requested, current):
    """List the case's sites and the weeks of its analysis year; keep the site on screen, else the one the
    address asks for (``?site=KGQ``), else the first."""
    view = services.view(session, None)
    sites = services.site_options(view)
    ids = [s["value"] for s in sites]
    kept = next((s for s in (current, requested) if s in ids), ids[0] if ids else None)
    return sites, kept, services.week_starts(view)


@callback(Output(ADDRESS, "data"), Input(PICK, "value"))
def address(site_id):
    """The address's query for the site on screen: a reload or a bookmark shows that site."""
    return f"?site={quote(str(site_id), safe='')}" if site_id else dash.no_update


ui.address_follows(ADDRESS, "/site")


@callback(Output(WEEK_FIGURE, "figure"), Output(DURATION, "figure"), Output(REACTIVE, "figure"), Output(BILLS, "figure"),
          Output(SUMMARY, "children"), Output(NOTICE, "children"), Output(BILL_FIT, "figure"), Output(HARMONICS, "rowData"),
          Input(PICK, "value"), Input(WEEK, "value"), Input(ui.SESSION_STORE, "data"), Input(ui.EDITS_STORE, "data"),
          State(REQUEST, "data"))
def update(site_id, week, session, edits, requested=None):
    """Meter, duration curve, reactive balance and bills of the chosen site."""
    view = services.view(session, edits)
    result = view.result()
    meters = services.site_meters(view, result)
    notice = view.notice
    if requested and str(requested) not in meters:  # an address naming a site the case does not have
        notice = " ".join(x for x in (notice, f"The case has no site '{requested}'; showing {site_id or 'none'}.") if x)
    if site_id not in meters:
        empty = figures.message_figure("Choose a site.")
        return empty, empty, empty, empty, "", notice, empty, []
    site = meters[site_id]
    interval_h = float(view.physics().operation.interval_h)
    before, after = site["before"], site["after"]
    bills = services.monthly_bills(result, site_id)
    total_before = bills.loc[bills["scenario"] == "before", "amount"].sum()
    total_after = bills.loc[bills["scenario"] == "after", "amount"].sum()
    now, then = services.meter_summary(before, interval_h), services.meter_summary(after, interval_h)
    summary = [html.Span(f"Peak demand {now['peak_kw']:,.0f} kW / {now['peak_kva']:,.0f} kVA today, "
                         f"{then['peak_kw']:,.0f} kW / {then['peak_kva']:,.0f} kVA with the plan · "
                         f"average power factor (kWh over kVAh) {now['average_power_factor']:.3f} today, "
                         f"{then['average_power_factor']:.3f} with the plan · yearly bill "
                         f"{ui.fmt_money(total_before, view.currency)} today, "
                         f"{ui.fmt_money(total_after, view.currency)} with the plan"),
               html.Br(),
               html.Span(f"The plan's projects at this site, each priced alone against today's bill, save "
                         f"{ui.fmt_money(services.plan_bill_saving_alone(result, site_id), view.currency)} /yr "
                         "(the headline adds these, with maintenance); together at the meter the bill falls by "
                         f"{ui.fmt_money(total_before - total_after, view.currency)} /yr: demand peaks that coincide "
                         "and reactive value that saturates make the whole differ from the sum of its parts.",
                         className="small")]
    case = view.case
    coarse = coarse_demand_profiles(case.sites, case.assets, case.tariffs, case.profile_info).get(str(site_id))
    if coarse is not None:  # the case check's warning, where the figures it concerns are shown
        summary += [html.Br(), html.Span("Caution: " + demand_window_text(*coarse) + ".", className="small caution")]
    fit = services.site_calibration_text(view, site_id)
    if fit:  # the model of today's fleet beside the bills the case gives (docs/calibration.md)
        summary += [html.Br(), html.Span("Today's fleet as modelled against the site's bills (bill history; monthly "
                                         "criteria |NMBE| <= 5 %, CV(RMSE) <= 15 %; NMBE above 0: the model reads below the "
                                         "bills): " + "; ".join(fit) + ".",
                                         className="small", id="site-calibration")]
    for line in banned_quantities(result.bills[result.bills["site_id"] == site_id]).itertuples(index=False):
        summary += [html.Br(), html.Span("Caution: " + banned_caution(line) + ".", className="small caution")]
    return (figures.meter_week(services.week_slice(site, week)),
            figures.pf_duration(services.pf_duration(site, interval_h)),
            figures.reactive_balance(services.reactive_balance(view, result, site_id, site)),
            figures.monthly_bills(bills, view.currency), summary, notice,
            figures.energy_against_bills(services.site_bill_months(view, site_id)),
            screen_rows(services.harmonic_screen(view, result, site_id)))
