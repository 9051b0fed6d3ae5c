"""Case and assumptions: upload a case, see every validation message by row, get a blank template, edit assumptions."""

from __future__ import annotations

from pathlib import Path

import dash
from dash import Input, Output, State, callback, dcc, html, no_update

from dashboard import components as ui
from dashboard import services
from models import io as case_io
from models.wording import counted


READY = "inputs-ready"
UPLOAD = "inputs-upload"
#: What the upload's file input chooses, as a screen reader says it.
UPLOAD_INPUT_NAME = "Case files to upload: one workbook, or the case's CSV and TOML files"
KEEP_FILES = "inputs-keep-files"
STATUS = "inputs-status"
PROBLEMS = "inputs-problems"
TEMPLATE_BUTTON = "inputs-template-button"
TEMPLATE = "inputs-template"
DISCOUNT = "inputs-discount-rate"
ESCALATION = "inputs-escalation"
HORIZON = "inputs-horizon"
PRICE_LEVEL = "inputs-price-level"
CAPITAL_LEVEL = "inputs-capital-level"
BUDGET = "inputs-budget"
BUDGET_IDS = ui.budget_ids(BUDGET, services.BUDGET_YEARS)
#: The budget fields' labels ("Year 0 [EUR]"), written with the tab's case currency (see components.budget_inputs).
BUDGET_LABEL_IDS = [f"{i}-label" for i in BUDGET_IDS]
RESET = "inputs-reset"
FORM_MESSAGE = "inputs-form-message"
CASE = "inputs-case"
NOTICE = "inputs-notice"
HEADLINE = "inputs"
SAVE_BUTTON = "inputs-save"
SAVE_STATUS = "inputs-save-status"
SAVE_DOWNLOAD = "inputs-save-download"
#: The question the save asks before it writes the case's file (the browser's own OK / Cancel dialog).
SAVE_CONFIRM = "inputs-save-confirm"
SCENARIO_NAME = "inputs-scenario-name"
SCENARIO_KEEP = "inputs-scenario-keep"
SCENARIO_CLEAR = "inputs-scenario-clear"
SCENARIO_MESSAGE = "inputs-scenario-message"
SCENARIO_GRID = "inputs-scenarios"
#: Validation messages per page of their grid: the grid grows to its rows (each message read whole, wrapped),
#: and a long list goes on over pages rather than past the screen.
PROBLEMS_PER_PAGE = 10


def _number_field(component_id: str) -> dcc.Input:
    """A finance assumption's field: a text field read by :func:`dashboard.services.typed_number`.

    Not a number input: Dash 4's number input does not report a field emptied after a callback filled it (the
    assumptions would stay with no message), as for the budget fields (``components.budget_values``).
    """
    return dcc.Input(id=component_id, type="text", inputMode="decimal", debounce=True)


def layout(**_query):
    limit_mb = services.MAX_UPLOAD_BYTES / services.MB
    return html.Div([
        dcc.Store(id=READY, data=True),
        ui.page_header("Case and assumptions", "Load your own case, check it row by row, and change the finance "
                                               "assumptions. Every page follows what you set here, in this tab only."),
        ui.notice(NOTICE),
        html.Div(id=CASE, className="asset-summary"),
        html.Div([
            html.Div([
                html.H3("Upload a case"),
                # no accept filter: a file of another kind reaches the server, which says why it is refused
                # (the browser would drop it silently)
                # the area's hidden file input is named from data-label (dashboard/assets/keyboard.js)
                html.Div(dcc.Upload(id=UPLOAD, multiple=True,
                                    children=html.Div(["Drop files here or ", html.A("choose files")]), className="upload"),
                         **{"data-label": UPLOAD_INPUT_NAME}),
                html.P(f"One .xlsx workbook, or the case's files (assets.csv, sites.csv, capacitors.csv, duty.csv, "
                       f"profiles.csv or .parquet, options.csv, case.toml, finance.toml, scenarios.toml, tariff .toml files). Up to "
                       f"{limit_mb:.0f} MB per upload.", className="page-intro"),
                dcc.Checklist(id=KEEP_FILES, value=["keep"], options=[
                    {"label": " Keep the current case's other files (replace only the files uploaded)", "value": "keep"}]),
                dcc.Loading(html.Div(id=STATUS, className="form-message", role="status"), type="dot"),
                html.Button(services.TEMPLATE_BUTTON_TEXT, id=TEMPLATE_BUTTON, className="button"),
                dcc.Download(id=TEMPLATE),
            ], className="panel half"),
            html.Div([
                html.H3("Finance assumptions"),
                html.Div([
                    html.Div([html.Label("Discount rate [%/yr]", htmlFor=DISCOUNT),
                              _number_field(DISCOUNT)], className="field"),
                    html.Div([html.Label("Energy price escalation [%/yr]", htmlFor=ESCALATION),
                              _number_field(ESCALATION)], className="field"),
                    html.Div([html.Label("Horizon [yr]", htmlFor=HORIZON),
                              _number_field(HORIZON)], className="field"),
                    html.Div([html.Label("Electricity price level [% of the tariffs]", htmlFor=PRICE_LEVEL),
                              _number_field(PRICE_LEVEL)], className="field"),
                    html.Div([html.Label("Capital cost level [% of the catalogue]", htmlFor=CAPITAL_LEVEL),
                              _number_field(CAPITAL_LEVEL)], className="field"),
                ], className="fields"),
                html.Label("Capital budget per plan year (blank = no limit; in the case's currency)"),
                ui.budget_inputs(BUDGET, services.BUDGET_YEARS),
                html.Button("Back to the case's own assumptions", id=RESET, className="button secondary"),
                html.Div(id=FORM_MESSAGE, className="form-message", role="alert"),
                html.Button("Save these assumptions into the case", id=SAVE_BUTTON, className="button"),
                dcc.ConfirmDialog(id=SAVE_CONFIRM),
                dcc.Loading(html.Div(id=SAVE_STATUS, className="form-message", role="status"), type="dot"),
                dcc.Download(id=SAVE_DOWNLOAD),
                html.H4("With these assumptions"),
                ui.headline_cards(HEADLINE),
            ], className="panel half form"),
        ], className="row"),
        # right under the upload and the form: a refused upload's rows are read next to its status line
        html.H3("Validation messages", id="validation-messages"),
        # as tall as its rows, whose messages wrap to several lines; a long list goes on over pages
        ui.data_grid(PROBLEMS, height="auto", empty_text="No problems: the case was read as written",
                     columnDefs=ui.problem_columns(),
                     rowClassRules={"problem-error": "params.data.severity == 'error'",
                                    "problem-warning": "params.data.severity == 'warning'"},
                     dashGridOptions={"domLayout": "autoHeight", "pagination": True,
                                      "paginationPageSize": PROBLEMS_PER_PAGE,
                                      "paginationPageSizeSelector": [PROBLEMS_PER_PAGE, 25, 50, 100]}),
        html.Div([
            html.H3("Scenarios side by side"),
            html.P("The fleet plan under the case as written, under each scenario the case names (scenarios.toml) and "
                   "under the assumptions you keep here. Only the finance assumptions differ: the machines and the "
                   "bills are the same. Each plan is proven as the capital-request pack's (for a fleet of up to "
                   f"{services.PROVEN_SCENARIO_ASSETS:,} motors; a larger one's are bounded as a live edit's), so a "
                   "row kept from the assumptions above may show a plan NPV a little above the cards, whose plan is "
                   f"the live one (within {services.LIVE_PLAN_GAP_PCT:g} % of the best). Kept "
                   "scenarios stay with this tab; write them into scenarios.toml to keep them with the case.",
                   className="page-intro"),
            html.Div([
                html.Div([html.Label("Name of the assumptions above", htmlFor=SCENARIO_NAME),
                          dcc.Input(id=SCENARIO_NAME, type="text", maxLength=60, debounce=False)], className="field"),
                html.Button("Keep as a scenario", id=SCENARIO_KEEP, className="button"),
                html.Button("Clear the kept scenarios", id=SCENARIO_CLEAR, className="button secondary"),
            ], className="fields"),
            html.Div(id=SCENARIO_MESSAGE, className="form-message", role="status"),
            dcc.Loading(ui.data_grid(SCENARIO_GRID, height="auto", rowData=None, empty_text="No scenario to compare",
                                     dashGridOptions={"domLayout": "autoHeight"}), type="dot"),
        ], className="panel"),
    ])


dash.register_page(__name__, path="/inputs", name="Case & assumptions", title="Case and assumptions · drivecase", order=5,
                   layout=layout)


@callback(Output(ui.SESSION_STORE, "data"), Output(STATUS, "children"), Output(PROBLEMS, "rowData"),
          Output(UPLOAD, "contents"), Output(STATUS, "className"), Output(ui.UPLOAD_STORE, "data"),
          Input(UPLOAD, "contents"), State(UPLOAD, "filename"), State(KEEP_FILES, "value"), State(ui.SESSION_STORE, "data"),
          prevent_initial_call=True)
def upload(contents, names, keep, session):
    """Check and load an upload; a bad one leaves the tab's case as it was and is kept for the tab (the page
    shows it again when it opens, until the next upload)."""
    if not contents:
        return (no_update,) * 6
    session = session if isinstance(session, dict) else {}
    outcome = services.engine().accept_upload(session.get("session"), session.get("case"), names, contents,
                                              keep_other_files="keep" in (keep or []))
    new_session = {"session": outcome.session, "case": outcome.key if outcome.ok else session.get("case")}
    message = outcome.message
    if outcome.ok:
        message += " The assumptions below are now the uploaded case's own; edits made before the upload no longer apply."
    return (new_session, message, outcome.problems, None, ui.message_class(outcome.ok),
            services.refusal_to_keep(outcome))


@callback(Output(PROBLEMS, "rowData", allow_duplicate=True), Output(STATUS, "children", allow_duplicate=True),
          Output(STATUS, "className", allow_duplicate=True),
          Input(READY, "data"), State(ui.SESSION_STORE, "data"), State(ui.UPLOAD_STORE, "data"),
          prevent_initial_call="initial_duplicate")
def listed(_ready, session, kept):
    """What the page lists when it opens: the tab's last upload while it is a kept refusal (its message and
    rows), else the warnings the tab's case was read with and the status line as drawn."""
    refusal = services.kept_refusal(kept)
    if refusal is not None:
        return refusal["problems"], refusal["message"], ui.message_class(False)
    return services.case_problem_rows(services.view(session, None)), no_update, no_update


@callback(Output(TEMPLATE, "data"), Input(TEMPLATE_BUTTON, "n_clicks"), prevent_initial_call=True)
def template(_clicks):
    """Send a blank case workbook."""
    return dcc.send_bytes(services.blank_template_bytes(), "drivecase-blank-case.xlsx")


#: The form's fields in the order the callbacks take them, and whether each is in percent.
NUMBER_FIELDS = (("discount_rate_pct", True), ("escalation_energy_pct", True), ("horizon_yr", False),
                 ("energy_price_level_pct", True), ("capital_cost_level_pct", True))


def number_text(value) -> str | None:
    """A finance assumption as its text field shows it (``8``, ``1.5``, ``15``); None = blank."""
    return None if value is None else f"{float(value):.12g}"


def _form_values(assumptions) -> tuple:
    form = services.assumption_form(assumptions)
    return (*(number_text(form[name]) for name, _percent in NUMBER_FIELDS),
            *ui.budget_values(form["budget_per_yr"], services.BUDGET_YEARS))


@callback(Output(DISCOUNT, "value"), Output(ESCALATION, "value"), Output(HORIZON, "value"),
          Output(PRICE_LEVEL, "value"), Output(CAPITAL_LEVEL, "value"), [Output(i, "value") for i in BUDGET_IDS],
          [Output(i, "children") for i in BUDGET_LABEL_IDS],
          Input(READY, "data"), Input(ui.SESSION_STORE, "data"), State(ui.EDITS_STORE, "data"))
def fill(_ready, session, edits):
    """Show the assumptions in force, and the budget's unit, when the page opens or the case changes."""
    view = services.view(session, edits)
    return (*_form_values(view.assumptions), *ui.budget_labels(view.currency, services.BUDGET_YEARS))


@callback(Output(DISCOUNT, "value", allow_duplicate=True), Output(ESCALATION, "value", allow_duplicate=True),
          Output(HORIZON, "value", allow_duplicate=True), Output(PRICE_LEVEL, "value", allow_duplicate=True),
          Output(CAPITAL_LEVEL, "value", allow_duplicate=True), [Output(i, "value", allow_duplicate=True) for i in BUDGET_IDS],
          Input(RESET, "n_clicks"), State(ui.SESSION_STORE, "data"),
          prevent_initial_call=True)
def reset(_clicks, session):
    """Put the case's own assumptions back in the form (the edit callback then stores them)."""
    return _form_values(services.view(session, None).assumptions)


def _parse_form(discount, escalation, horizon, price_level, capital_level, *rest) -> tuple[dict | None, bool, str]:
    """The form as edits: (edits, whether they change the assumptions in force, what was refused or "").

    Each field is checked on its own: the valid ones make the edits, the refused ones are named (the edits
    are None when none is valid)."""
    budget_values, (edits, session) = list(rest[:len(BUDGET_IDS)]), rest[len(BUDGET_IDS):]
    view = services.view(session, edits)
    budget, budget_problem = services.parse_budget(budget_values, view.currency)
    # a blank field is None, and refused by name ("Discount rate: enter a number")
    fields = {name: services.typed_number(value, percent) for (name, percent), value
              in zip(NUMBER_FIELDS, (discount, escalation, horizon, price_level, capital_level))}
    if not budget_problem:
        fields["budget_per_yr"] = budget
    new, problem = services.edit_assumptions(view.key, view.entry.case.finance, edits,
                                             refused=(budget_problem,) if budget_problem else (), **fields)
    return new, new is not None and services.edits_change(view, new), problem


@callback(Output(ui.EDITS_STORE, "data", allow_duplicate=True), Output(FORM_MESSAGE, "children"),
          Output(FORM_MESSAGE, "className"), Input(DISCOUNT, "value"), Input(ESCALATION, "value"), Input(HORIZON, "value"), Input(PRICE_LEVEL, "value"),
          Input(CAPITAL_LEVEL, "value"), [Input(i, "value") for i in BUDGET_IDS], State(ui.EDITS_STORE, "data"),
          State(ui.SESSION_STORE, "data"), prevent_initial_call=True)
def edit(*form):
    """Check the form and store it as the tab's edits; only the economics re-run. An unusual but valid
    value (a negative discount rate) is applied with a caution."""
    new, changed, problem = _parse_form(*form)
    # the valid values apply even when another field is refused; the message names each refused one (set
    # apart as a refusal); a caution on an unusual value keeps the plain look when nothing is refused
    own = services.view(form[-1], None).entry.case.finance
    return (new if changed else no_update), form_message(problem, services.assumption_notes(new, own)), (
        ui.message_class(False) if problem else "form-message")


def form_message(problem: str, caution: str) -> str:
    """The form's message: what was refused, then the caution on a value applied (each may be "").

    A caution after a refusal drops its "Applied." (the refusal ends "The other values are applied.").
    """
    if problem and caution:
        return f"{problem} {caution.removeprefix('Applied. ')}"
    return problem or caution


@callback(Output(f"{HEADLINE}-headline-capital", "children"), Output(f"{HEADLINE}-headline-saving", "children"),
          Output(f"{HEADLINE}-headline-npv", "children"), Output(f"{HEADLINE}-headline-co2", "children"),
          Output(CASE, "children"), Output(NOTICE, "children"),
          Input(READY, "data"), Input(ui.SESSION_STORE, "data"), Input(ui.EDITS_STORE, "data"))
def preview(_ready, session, edits):
    """Headline figures under the assumptions in the form, and what case this tab holds."""
    view = services.view(session, edits)
    s = services.case_summary(view)
    case_line = [html.Strong(s["name"]), html.Span(" (invented demo data)" if s["mark_invented"] else ""),
                 html.Span(f" · {counted(s['assets'], 'asset')} · {counted(s['sites'], 'site')} · {s['currency']} · "
                           f"ratings in {s['power_unit']}"
                           f" · {'your upload' if s['origin'] == 'upload' else 'the case the server started with'}"
                           + (f" · {counted(s['warnings'], 'warning')} when read" if s["warnings"] else ""))]
    cards = ui.headline_values(services.headline(view.result()), view.currency)
    return (*cards, case_line, view.notice)


#: The form as the edit callback reads it (same fields, same order): the save parses the fields as they
#: are when it is confirmed, so a value typed and not yet applied with Enter is saved too.
SAVE_FORM = [State(DISCOUNT, "value"), State(ESCALATION, "value"), State(HORIZON, "value"), State(PRICE_LEVEL, "value"),
             State(CAPITAL_LEVEL, "value"), *[State(i, "value") for i in BUDGET_IDS],
             State(ui.EDITS_STORE, "data"), State(ui.SESSION_STORE, "data")]


def save_question(files, uploaded: bool) -> str:
    """What the save asks before it writes: the file it changes and where the file as it is now is kept.

    Parameters
    ----------
    files : str or pathlib.Path
        The tab's case: a folder or an ``.xlsx`` workbook; the file written and the versions folder are those
        :func:`models.io.save_target` finds (a folder's ``finance.toml``, or the workbook's finance sheet).
    uploaded : bool
        True for a tab's upload: the server's copy is written (named without the server's folder) and offered
        as a download.

    Returns
    -------
    str
        The question of the confirmation dialog (OK saves, Cancel writes nothing).
    """
    files = Path(files)
    found = case_io.save_target(files)
    target, versions, kind = found if found is not None else (
        (files, files.parent / f"{files.name}{case_io.WORKBOOK_VERSIONS_SUFFIX}", "workbook")
        if files.suffix.lower() == ".xlsx" else (files / "finance.toml", files / case_io.VERSIONS_DIR, "folder"))
    # an upload's folder on the server means nothing to its user: named from the case's own folder down
    base = (files.parent if kind == "workbook" else files) if uploaded else Path()

    def shown(path: Path) -> str:
        return str(path.relative_to(base)) if uploaded and path.is_relative_to(base) else str(path)

    kept = shown(versions / f"{target.stem}-<UTC time>{target.suffix}")
    written = f"the finance sheet of {shown(target)}" if kind == "workbook" else shown(target)
    if uploaded:
        written += " (the server's copy of your upload, offered as a download once saved)"
    return (f"Save the assumptions in the form into {written}? Only the values that differ from the case's are "
            f"rewritten, and the file as it is now is kept as {kept}. OK saves; Cancel writes nothing.")


@callback(Output(SAVE_CONFIRM, "displayed"), Output(SAVE_CONFIRM, "message"), Output(SAVE_CONFIRM, "submit_n_clicks"),
          Input(SAVE_BUTTON, "n_clicks"), *SAVE_FORM, State(SAVE_CONFIRM, "submit_n_clicks"), prevent_initial_call=True)
def ask_to_save(clicks, *form_and_confirmed):
    """Ask before the save writes the case's file, naming the file and where its previous version is kept.

    A save that would write nothing (a field of the form refused, or the tab's uploaded case no longer held)
    is not asked about: it goes straight to :func:`save`, which says why nothing is saved.
    """
    form, confirmed = form_and_confirmed[:-1], form_and_confirmed[-1]
    if not clicks:  # the page opening is not a click
        return no_update, no_update, no_update
    _edits, _changed, problem = _parse_form(*form)
    entry, dropped = services.session_entry(form[-1])
    if problem or dropped:
        return False, no_update, (confirmed or 0) + 1
    return True, save_question(entry.files, entry.origin == "upload"), no_update


@callback(Output(SAVE_STATUS, "children", allow_duplicate=True), Output(SAVE_STATUS, "className", allow_duplicate=True),
          Input(SAVE_CONFIRM, "cancel_n_clicks"), prevent_initial_call=True)
def save_cancelled(clicks):
    """Say that a save cancelled in its confirmation dialog wrote nothing."""
    if not clicks:
        return no_update, no_update
    return "Not saved: the save was cancelled; nothing was written.", "form-message"


@callback(Output(ui.SESSION_STORE, "data", allow_duplicate=True), Output(ui.EDITS_STORE, "data", allow_duplicate=True),
          Output(SAVE_STATUS, "children"), Output(SAVE_DOWNLOAD, "data"), Output(SAVE_STATUS, "className"),
          Output(ui.SCENARIOS_STORE, "data", allow_duplicate=True),
          Input(SAVE_CONFIRM, "submit_n_clicks"), *SAVE_FORM, State(ui.SCENARIOS_STORE, "data"),
          prevent_initial_call=True)
def save(clicks, *form_and_kept):
    """Write the assumptions in the form into the tab's case once the save is confirmed (:func:`ask_to_save`);
    say what was written and where the old file is kept. The tab's kept scenarios follow the case to its new
    contents."""
    form, kept = form_and_kept[:-1], form_and_kept[-1]
    if not clicks:  # the page opening is not a confirmed click (the renderer can fire this once as the page mounts)
        return (no_update,) * 6
    edits, changed, problem = _parse_form(*form)
    if problem:
        # nothing is saved while a field is refused (the save writes the whole form)
        refused = problem.removeprefix("Not applied: ").removesuffix(" The other values are applied.")
        return no_update, no_update, "Not saved: " + refused, no_update, ui.message_class(False), no_update
    outcome = services.save_tab_assumptions(form[-1], edits if changed else form[-2])
    download = (dcc.send_bytes(outcome.download, outcome.download_name) if outcome.download is not None
                else no_update)
    old_key = (form[-1] or {}).get("case") if isinstance(form[-1], dict) else None
    new_key = (outcome.session or {}).get("case") if isinstance(outcome.session, dict) else None
    moved = services.rekey_kept(kept, old_key, new_key) if outcome.ok and new_key else no_update
    return (outcome.session if outcome.session is not None else no_update, None if outcome.ok else no_update,
            outcome.message, download, ui.message_class(outcome.ok), moved)


@callback(Output(ui.SCENARIOS_STORE, "data"), Output(SCENARIO_MESSAGE, "children"), Output(SCENARIO_MESSAGE, "className"),
          Input(SCENARIO_KEEP, "n_clicks"), State(SCENARIO_NAME, "value"), State(ui.SCENARIOS_STORE, "data"),
          State(ui.EDITS_STORE, "data"), State(ui.SESSION_STORE, "data"), prevent_initial_call=True)
def keep_scenario(clicks, name, kept, edits, session):
    """Keep the assumptions in force as a named scenario of this tab."""
    if not clicks:
        return no_update, no_update, no_update
    new, message = services.keep_scenario(services.view(session, edits), kept, name, edits)
    return (new if new is not None else no_update), message, ui.message_class(new is not None)


@callback(Output(ui.SCENARIOS_STORE, "data", allow_duplicate=True), Output(SCENARIO_MESSAGE, "children", allow_duplicate=True),
          Output(SCENARIO_MESSAGE, "className", allow_duplicate=True),
          Input(SCENARIO_CLEAR, "n_clicks"), prevent_initial_call=True)
def clear_scenarios(clicks):
    """Forget the tab's kept scenarios (the case's own stay)."""
    if not clicks:
        return no_update, no_update, no_update
    return [], "The kept scenarios are cleared; the case's own remain.", "form-message"


@callback(Output(SCENARIO_GRID, "rowData"), Output(SCENARIO_GRID, "columnDefs"),
          Input(READY, "data"), Input(ui.SESSION_STORE, "data"), Input(ui.SCENARIOS_STORE, "data"))
def scenarios(_ready, session, kept):
    """The scenarios side by side: the case as written first, each with its plan's change from it."""
    view = services.view(session, None)
    return services.scenario_rows(view, kept).to_dict("records"), ui.scenario_columns(view.currency)

