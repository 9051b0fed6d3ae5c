"""Reusable UI builders and the ids the shell shares with the pages.

Pages import the shared store ids from here (never the app object). Number formatting for cards and
grids lives here too: money in the case currency, ratings in kW or hp as the case chooses.
"""

from __future__ import annotations

import math

import dash_ag_grid as dag
from dash import Input, clientside_callback, dcc, html

from dashboard import figures
from models.wording import money_text

#: The session's case: {"session": id, "case": key}. Browser session storage: one per tab.
SESSION_STORE = "app-session"
#: The session's assumption edits: {"case": key, "discount_rate_pct": ..., ...}. Session storage.
EDITS_STORE = "app-edits"
#: Location used by callbacks to navigate (e.g. from the fleet table to one asset).
LOCATION = "app-location"
#: The tab's last refused upload: {"message": str, "problems": [rows]}, or None once an upload is accepted.
#: Session storage, so the refusal is shown again when the tab comes back to the Case & assumptions page.
UPLOAD_STORE = "app-upload"
#: The asset the tab last showed on the Asset page: the page opens on it when the address names none (the
#: navigation link). Session storage.
LAST_ASSET_STORE = "app-last-asset"
#: The scenarios kept in this tab: [{"name": str, "edits": the EDITS_STORE dict they were kept from}]. Session
#: storage; compared beside the case's own scenarios on the Case & assumptions page.
SCENARIOS_STORE = "app-scenarios"

#: Cautions shown in the footer of every page.
CAUTIONS: tuple[str, ...] = (
    "Planning estimates only, not a design: confirm ratings, prices and savings with suppliers before committing money.",
    "Electrical work must be done by qualified persons under lockout/tagout and arc-flash rules, local codes and "
    "the utility's rules.",
    "A permanent-magnet motor generates voltage whenever its shaft turns, even when disconnected.",
    "Capacitors hold their charge after disconnection and never belong on a drive's output.",
    "A faster machine can overload a pump or fan: check the driven load before a replacement.",
)


# ---------------------------------------------------------------------------------------------------
# Numbers
# ---------------------------------------------------------------------------------------------------
def _finite(value) -> bool:
    try:
        return math.isfinite(float(value))
    except (TypeError, ValueError):
        return False


def fmt_money(value, currency: str, compact: bool = True) -> str:
    """Money for a card: ``EUR 1.25 M``, ``EUR 48.2 k`` or ``EUR 950`` (``-`` when not finite)."""
    if not _finite(value):
        return "-"
    return figures.money_short(value, currency) if compact else money_text(value, currency)


def fmt_number(value, decimals: int = 0, unit: str = "") -> str:
    """A plain number with thousands separators and an optional unit."""
    if not _finite(value):
        return "-"
    text = f"{float(value):,.{decimals}f}"
    return f"{text} {unit}".strip()


#: What a "Saving" column of the dashboard adds up (the report's and the workbook's "Saving" too).
SAVING_NOTE = ("Yearly saving at base-year prices: the site's bill (taxes and levies included) plus maintenance; "
               "the command line's and results.csv's bill saving leave maintenance out.")
#: Most decimals a rating is shown with (0.75 kW, 1.1 kW, 7.5 kW, 250 kW; 1.01 hp).
RATING_DECIMALS = 2


def fmt_rating(value, unit: str = "") -> str:
    """A motor rating with the precision it carries: up to :data:`RATING_DECIMALS` decimals, trailing zeros
    dropped (``0.75 kW``, ``7.5 kW``, ``1,600 kW``; ``-`` when not finite)."""
    if not _finite(value):
        return "-"
    text = f"{float(value):,.{RATING_DECIMALS}f}".rstrip("0").rstrip(".")
    return f"{text} {unit}".strip()


# ---------------------------------------------------------------------------------------------------
# Layout pieces
# ---------------------------------------------------------------------------------------------------
def page_header(title: str, intro: str) -> html.Div:
    """Title and one-paragraph explanation of a page."""
    return html.Div([html.H2(title), html.P(intro, className="page-intro")], className="page-header")


def notice(component_id: str) -> html.Div:
    """A place for messages (fallbacks, refused edits); empty until a callback fills it."""
    return html.Div(id=component_id, className="notice", role="status")


def message_class(ok: bool) -> str:
    """Class of a status line for what became of an action (an upload, a save).

    Parameters
    ----------
    ok : bool
        True when the action was carried out, False when it was refused.

    Returns
    -------
    str
        ``"form-message accepted"`` (accent colours) or ``"form-message refused"`` (warning colours and,
        for a refusal alone, a bar at its left: see ``assets/style.css``).

    Notes
    -----
    The look only repeats what the words say: every status line says what happened ("Loaded", "Saved",
    "Not saved", "... the previous case stays loaded"), and a refusal is marked by a bar as well as by
    colour, so nothing rests on colour alone.
    """
    return "form-message accepted" if ok else "form-message refused"


def card(label: str, value_id: str, note_id: str | None = None, placeholder: str = "-") -> html.Div:
    """One headline card: label, value (filled by a callback; ``placeholder`` until then) and an optional note."""
    children = [html.Div(label, className="card-label"), html.Div(placeholder, id=value_id, className="card-value")]
    if note_id:
        children.append(html.Div("", id=note_id, className="card-note"))
    return html.Div(children, className="card")


HEADLINE_FIELDS = (("capital", "Plan capital"), ("saving", "Plan yearly saving, as the plan counts it"), ("npv", "Plan NPV"),
                   ("co2", "Plan CO2 avoided"))


def headline_cards(prefix: str, placeholder: str = "-") -> html.Div:
    """The four headline cards with ids ``<prefix>-headline-capital|saving|npv|co2``, each saying ``placeholder``
    until its callback fills it."""
    return html.Div([card(label, f"{prefix}-headline-{key}", placeholder=placeholder) for key, label in HEADLINE_FIELDS],
                    className="cards")


def headline_values(numbers: dict, currency: str) -> list[str]:
    """Card texts in :data:`HEADLINE_FIELDS` order, from :func:`dashboard.services.headline`."""
    return [fmt_money(numbers["plan_capital"], currency), fmt_money(numbers["yearly_saving_per_yr"], currency) + " /yr",
            fmt_money(numbers["plan_npv"], currency), fmt_number(numbers["co2_avoided_t_per_yr"], 0, "t/yr")]


#: The charts' mode bar: no logo, and no button that sends a chart's data (a client's assets and money) to a
#: chart-sharing service outside this machine; to share, export the files or the pack.
GRAPH_CONFIG = {"displaylogo": False, "showSendToCloud": False, "showEditInChartStudio": False,
                "modeBarButtonsToRemove": ["sendChartToCloud", "sendDataToCloud", "editInChartStudio"]}


def graph(component_id: str, height: int | None = None) -> dcc.Loading:
    """A plotly graph in a loading wrapper, with the mode bar trimmed (:data:`GRAPH_CONFIG`)."""
    extra = {"style": {"height": f"{height}px"}} if height else {}
    return dcc.Loading(dcc.Graph(id=component_id, config=dict(GRAPH_CONFIG), **extra), type="dot", delay_show=400)


def address_follows(store_id: str, path: str) -> None:
    """Rewrite the browser's address query in place from ``store_id``'s data while the page at ``path`` shows.

    ``dcc.Location`` would push a history entry per pick and, with callback navigation, render the page anew;
    replacing the entry in place does neither, and a reload or a bookmark then shows what was on screen.
    """
    clientside_callback(
        """function (search) {
            if (search && window.location.pathname.endsWith("%s") && window.location.search !== search) {
                window.history.replaceState(window.history.state, "", window.location.pathname + search + window.location.hash);
            }
        }""" % path,
        Input(store_id, "data"),
    )


def footer() -> html.Footer:
    """The cautions shown on every page."""
    return html.Footer([html.Div("Before acting on these figures", className="footer-title"),
                        html.Ul([html.Li(text) for text in CAUTIONS])], className="cautions", id="app-cautions")


def budget_ids(prefix: str, years: int) -> list[str]:
    """Ids of the budget inputs of plan years 0..years-1: ``<prefix>-0``, ``<prefix>-1``..."""
    return [f"{prefix}-{k}" for k in range(years)]


def budget_inputs(prefix: str, years: int) -> html.Div:
    """Capital budget inputs for plan years 0..years-1 (ids from :func:`budget_ids`); each year's label has the
    id ``<input id>-label``, for a callback to write the case's currency into it (:func:`budget_labels`)."""
    return html.Div([
        html.Div([html.Label(f"Year {k}", htmlFor=component_id, id=f"{component_id}-label"),
                  dcc.Input(id=component_id, type="text", inputMode="decimal", debounce=True,
                            placeholder="no limit" if k == 0 else "", className="budget-input")],
                 className="budget-year")
        for k, component_id in enumerate(budget_ids(prefix, years))], className="budget-row")


def budget_labels(currency: str, years: int) -> list[str]:
    """The budget fields' labels with the case's currency: ``Year 0 [EUR]``, ..."""
    return [f"Year {k} [{currency}]" for k in range(years)]


def budget_values(budget: list, years: int) -> list:
    """Texts of the budget inputs (plan years 0..years-1) for a budget list; None = blank.

    The inputs are text fields: Dash 4's number input does not report a field emptied after a
    callback filled it, and an emptied year must be able to end the budget.
    """
    return [f"{float(budget[k]):.12g}" if k < len(budget) else None for k in range(years)]


# ---------------------------------------------------------------------------------------------------
# Grids
# ---------------------------------------------------------------------------------------------------
def _formatter(spec: str) -> dict:
    return {"function": f"(params.value == null || !isFinite(params.value)) ? '' : d3.format('{spec}')(params.value)"}


def text_col(field: str, header: str, **extra) -> dict:
    """A text column."""
    return {"field": field, "headerName": header, **extra}


def number_col(field: str, header: str, decimals: int = 0, **extra) -> dict:
    """A right-aligned number column with thousands separators."""
    return {"field": field, "headerName": header, "type": "rightAligned", "filter": "agNumberColumnFilter",
            "valueFormatter": _formatter(f",.{decimals}f"), **extra}


def rating_col(field: str, header: str, **extra) -> dict:
    """A right-aligned rating column shown as :func:`fmt_rating` shows it (d3's ``~`` drops trailing zeros)."""
    return number_col(field, header, **extra) | {"valueFormatter": _formatter(f",.{RATING_DECIMALS}~f")}


#: A number cell whose value may be said in words ("not within the horizon"): wrapped, not cut.
WRAPPED_NUMBER = {"wrapText": True, "autoHeight": True,
                  "cellStyle": {"lineHeight": "1.4", "paddingTop": "10px", "paddingBottom": "10px", "wordBreak": "normal"}}
#: The discounted payback as every grid writes it: one decimal; "not within the horizon" where the row spends
#: capital and is not paid back within the horizon (no finite payback); blank where nothing is spent.
#: A row with a positive NPV and no payback: its NPV rests on the residual value at the horizon's end, which
#: the paybacks leave out (docs/finance.md), and the cell says so. A payback whose cumulative flow falls below
#: zero again by the horizon's end (a later outlay) says that too (``payback_lost_again``).
PAYBACK_TEXT = {"function": "(params.value == null || !isFinite(params.value)) ? "
                            "((params.data && params.data.capital > 0) ? ((params.data.npv > 0) ? "
                            "'not within the horizon (its NPV counts the residual value)' : 'not within the horizon') "
                            ": '') : d3.format(',.1f')(params.value) + ((params.data && params.data.payback_lost_again) ? "
                            "' (then lost again by the horizon\\'s end)' : '')"}
#: What the payback column counts, as its header's tooltip says it.
PAYBACK_TOOLTIP = ("From the first outlay to the year the discounted cumulative flow is back to zero, without the "
                   "residual value at the horizon's end (a book value, not cash). NPV and IRR count that value, so a "
                   "project can show a positive NPV and no payback within the horizon. A later outlay can take the "
                   "cumulative flow below zero again: the cell then says the payback is lost again.")


def payback_col(field: str = "discounted_payback_yr", header: str = "Disc. payback [yr]", **extra) -> dict:
    """The discounted payback column [yr] of a grid whose rows also hold ``capital`` (see :data:`PAYBACK_TEXT`).

    The Fleet table and the Asset page's options grid use the same column, so an option that spends capital
    and never pays back reads the same on both.
    """
    return number_col(field, header, 1, valueFormatter=PAYBACK_TEXT, **WRAPPED_NUMBER,
                      **({"headerTooltip": PAYBACK_TOOLTIP} | extra))


def long_text_col(field: str, header: str, **extra) -> dict:
    """A text column whose cells wrap to as many lines as they need, the whole text also in a tooltip."""
    # wrapped lines at the text's own line height (the grid's default is one row's height per line)
    style = {"lineHeight": "1.4", "paddingTop": "10px", "paddingBottom": "10px", "wordBreak": "normal"}
    return text_col(field, header, **{"tooltipField": field, "wrapText": True, "autoHeight": True, "cellStyle": style,
                                      **extra})


def data_grid(component_id: str, height: int | str = 420, empty_text: str = "Nothing to show",
              loading_text: str = "Loading…", **extra) -> dag.AgGrid:
    """A sortable, filterable, resizable grid (rows and columns filled by a callback); ``empty_text`` is
    what it says with no rows.

    ``height`` is in px, or a CSS length (``"min(460px, 60vh)"``). Pass ``rowData=None`` for a grid whose
    rows are not there yet: it then says ``loading_text`` until a callback gives it rows, and ``empty_text``
    only once it has been given none. Tab and Shift+Tab leave the grid for the next or previous element of
    the page (the arrow keys move between cells), so a keyboard user is never held inside a grid.
    """
    # the grid's own wording for no rows (plain text; an HTML overlay template would be code the grid runs)
    options = {"animateRows": False, "tooltipShowDelay": 300,
               "localeText": {"noRowsToShow": empty_text, "loadingOoo": loading_text},
               # false = the grid does not move focus itself, the browser moves it out of the grid
               "tabToNextCell": {"function": "false"}, "tabToNextHeader": {"function": "false"}}
    options.update(extra.pop("dashGridOptions", {}))
    extra.setdefault("columnDefs", [])
    extra.setdefault("rowData", [])
    css_height = f"{height}px" if isinstance(height, (int, float)) else str(height)
    return dag.AgGrid(id=component_id,
                      defaultColDef={"sortable": True, "resizable": True, "filter": True, "minWidth": 110,
                                     "wrapHeaderText": True, "autoHeaderHeight": True},
                      columnSize="responsiveSizeToFit", dashGridOptions=options,
                      style={"height": css_height, "width": "100%"}, className="grid", **extra)


def scenario_columns(currency: str) -> list[dict]:
    """Columns of the scenario comparison grid (rows of :func:`models.comparison.compare`)."""
    # the scenario's name, the plan's NPV change and its projects (what the grid is for) stay in view while the
    # rest scrolls sideways (13 columns outgrow a projector's width); headers wrap between words, so each column
    # is at least as wide as its longest word
    return [long_text_col("scenario", "Scenario", minWidth=180, flex=2, pinned="left"),
            number_col("plan_npv_change", f"NPV change [{currency}]", 0, pinned="left", minWidth=115, maxWidth=150,
                       headerTooltip=f"The plan's NPV less the plan's NPV under the case as written [{currency}]"),
            number_col("projects", "Projects", 0, pinned="left", minWidth=110, maxWidth=120,
                       headerTooltip="Projects in the plan"),
            number_col("discount_rate_pct", "Discount rate [%]", 1, maxWidth=120),
            number_col("escalation_energy_pct", "Energy price escalation [%/yr]", 1, minWidth=130, maxWidth=150),
            number_col("horizon_yr", "Horizon [yr]", 0, maxWidth=100),
            number_col("energy_price_level_pct", "Electricity price level [%]", 0, maxWidth=130),
            number_col("capital_cost_level_pct", "Capital cost level [%]", 0, maxWidth=120),
            number_col("budget_total", f"Budget, all plan years [{currency}]", 0, valueFormatter={
                "function": "(params.value == null || !isFinite(params.value)) ? 'no limit' : d3.format(',.0f')(params.value)"}),
            long_text_col("replacement_mode", "Replacement timing", minWidth=150),
            number_col("plan_capital", f"Plan capital [{currency}]", 0),
            number_col("yearly_saving_per_yr", f"Plan saving [{currency}/yr]", 0),
            number_col("plan_npv", f"Plan NPV [{currency}]", 0)]


def problem_columns() -> list[dict]:
    """Columns of the validation-message grid: file, row, column, value, rule, hint."""
    return [text_col("severity", "Severity", maxWidth=110), text_col("file", "File"),
            number_col("row", "Row", maxWidth=90), text_col("column", "Column"), long_text_col("value", "Value"),
            long_text_col("rule", "Rule", flex=2), long_text_col("hint", "Hint", flex=2)]


def kept_filter(component_id: str, options: list, placeholder: str, case_key: str) -> dcc.Dropdown:
    """A multi-choice filter whose choice is kept for the tab's session, one choice per case.

    Make it with its ``options`` (in a callback that renders it), never before them: Dash puts a kept value
    back as the component is made, and a dropdown made before its options would drop a value they do not
    hold yet. ``case_key`` keeps one case's choice from being put on another case's filter.
    """
    return dcc.Dropdown(id=component_id, options=options, multi=True, placeholder=placeholder,
                        persistence=str(case_key), persistence_type="session")
