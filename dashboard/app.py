"""The dashboard shell: the Dash app, navigation from the page registry, the shared stores and the footer.

No formulas and no data here. Pages live in ``dashboard/pages`` and register themselves; the case and
the assumptions of each browser tab are kept as keys in session storage (see :mod:`dashboard.services`).
"""

from __future__ import annotations

import dash
from dash import ALL, Dash, Input, Output, callback, dcc, html

from dashboard import components, services

#: Largest request body the server accepts: an upload at the size limit, base64-encoded, with headroom
#: so that oversized uploads up to twice the limit get a readable message instead of a refusal [bytes].
MAX_REQUEST_BYTES = services.MAX_UPLOAD_BYTES * 3

CASE_LABEL = "app-case-label"
NAV_LINK = "app-nav"
#: A space no line break may fall on.
NO_BREAK = "\u00a0"

app = Dash(__name__, use_pages=True, pages_folder="", title="drivecase", update_title=None,
           suppress_callback_exceptions=True)
server = app.server
server.config["MAX_CONTENT_LENGTH"] = MAX_REQUEST_BYTES

# The pages register themselves on import. They are imported here under their package name (Dash's own
# folder scan would import them a second time as a top-level ``pages`` package).
from dashboard.pages import asset, fleet, inputs, plan, risk, site  # noqa: E402,F401


def navigation() -> html.Nav:
    """Links to every registered page, in registry order."""
    return html.Nav([dcc.Link(page["name"], href=page["relative_path"], id={"type": NAV_LINK, "path": page["path"]},
                              className="nav-link") for page in dash.page_registry.values()], className="nav")


def layout() -> html.Div:
    """The shell around every page."""
    return html.Div([
        dcc.Location(id=components.LOCATION, refresh="callback-nav"),
        dcc.Store(id=components.SESSION_STORE, storage_type="session"),
        dcc.Store(id=components.EDITS_STORE, storage_type="session"),
        dcc.Store(id=components.UPLOAD_STORE, storage_type="session"),
        dcc.Store(id=components.LAST_ASSET_STORE, storage_type="session"),
        dcc.Store(id=components.SCENARIOS_STORE, storage_type="session"),
        html.Header([
            html.Div([html.Span("drivecase", className="brand"),
                      html.Span("motor fleet: keep, rewind or replace", className="brand-sub")], className="brand-box"),
            navigation(),
            html.Div(id=CASE_LABEL, className="case-label"),
        ], className="topbar"),
        html.Main(dash.page_container, className="content"),
        components.footer(),
    ], className="shell")


app.layout = layout


@callback(Output({"type": NAV_LINK, "path": ALL}, "className"), Input(components.LOCATION, "pathname"),
          Input({"type": NAV_LINK, "path": ALL}, "id"))
def highlight_navigation(pathname, ids):
    """Mark the link of the page on show."""
    here = pathname or "/"
    return ["nav-link active" if i["path"] == here else "nav-link" for i in ids]


@callback(Output(CASE_LABEL, "children"), Input(components.SESSION_STORE, "data"), Input(components.EDITS_STORE, "data"))
def show_case(session, edits):
    """Name the tab's case and the assumptions in force: the discount rate, the horizon and the budget (its
    total and years) always, and every other assumption where it differs from the case's own file (so two
    scenarios' screens can be told apart)."""
    v = services.view(session, edits)
    a = v.assumptions
    budget = ("no budget limit" if not a.budget_per_yr else
              # (no line break inside an amount: "EUR 650.0 k" stays on one line when the bar wraps)
              f"budget {len(a.budget_per_yr)} yr, "
              f"{components.fmt_money(sum(a.budget_per_yr), v.currency).replace(' ', NO_BREAK)} in all")
    terms = [v.currency, f"ratings in {v.power_unit}", f"discount {a.discount_rate_frac * 100:g} %", f"{a.horizon_yr} yr",
             budget, *services.assumption_differences(v)]
    parts = [html.Strong(v.entry.name), html.Span(" (invented)" if v.case.settings.mark_invented else ""),
             html.Span("".join(f" · {t}" for t in terms))]
    return parts
