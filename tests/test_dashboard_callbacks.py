"""Page callbacks called directly: thin wrappers that parse input, call services and return figures and rows."""

from __future__ import annotations

import plotly.graph_objects as go
import numpy as np
import pandas as pd
import pytest
from dash import no_update

from dashboard import app as shell
from dashboard import figures, services
from models import scenario
from dashboard.pages import asset, fleet, inputs, plan, risk, site
from test_dashboard_services import SMALL_IDS, csv_bytes, data_url, demo_rows, small_case_engine


@pytest.fixture(scope="module")
def small_engine(tmp_path_factory):
    return small_case_engine(tmp_path_factory, "small")


@pytest.fixture(autouse=True)
def engine(small_engine, monkeypatch):
    monkeypatch.setattr(services, "_ENGINE", small_engine)
    return small_engine


def test_every_page_renders_on_the_case(engine):
    outputs = [fleet.update(None, None, None, None), asset.update("HRW-V01", None, None),
               asset.end_of_life("HRW-V01", None, None), site.update("KGQ", None, None, None),
               plan.update(True, None, None), risk.update(True, None, None, "plan"), inputs.preview(True, None, None)]
    figures = [x for out in outputs for x in out if isinstance(x, go.Figure)]
    # fleet, asset (and its end of life), site (with the energy beside its bills: the demo's copy gives them), plan,
    # uncertainty (tornado, fleet NPV, ranges)
    assert len(figures) == 1 + 4 + 1 + 5 + 2 + 3
    assert all(f.data for f in figures)


def test_fleet_filters_and_navigation(engine):
    out = fleet.update(None, None, ["HRW"], None)
    rows, count = out[4], out[6]
    assert {r["site_id"] for r in rows} == {"HRW"} and count.endswith(f"of {len(SMALL_IDS)} assets")
    assert fleet.open_asset({"rowId": "HRW-P01", "colId": "npv"}) == "/asset?id=HRW-P01"
    assert fleet.open_asset({"rowId": "A B/1"}) == "/asset?id=A%20B%2F1"
    assert fleet.open_asset(None) is no_update


def test_fleet_headline_follows_the_discount_rate(engine):
    at_8 = fleet.update(None, None, None, None)[2]
    at_3 = fleet.update(None, {"case": engine.default_key, "discount_rate_pct": 3.0}, None, None)[2]
    assert at_8 != at_3


def test_asset_choice(engine):
    options, value = asset.choose("KGQ-F01", None)
    assert value == "KGQ-F01" and len(options) == len(SMALL_IDS)
    assert asset.choose("NO-SUCH", None)[1] == options[0]["value"]
    out = asset.update("NO-SUCH", None, None)
    assert "Choose" in out[3].layout.annotations[0].text


def test_upload_bad_keeps_case_and_lists_rows(engine):
    header, rows = demo_rows()
    rows[0][header.index("rated_p_kw")] = "-3"
    before = {"session": None, "case": None}
    session, message, problems, contents, *_ = inputs.upload([data_url(csv_bytes(header, rows))], ["assets.csv"], ["keep"],
                                                             before)
    assert session["case"] is None and "previous case stays loaded" in message
    assert any(p["row"] == 2 and p["column"] == "rated_p_kw" for p in problems)
    assert contents is None  # cleared, so the same file can be uploaded again


def test_upload_good_switches_the_tab(engine):
    header, rows = demo_rows()
    session, message, problems, *_ = inputs.upload([data_url(csv_bytes(header, rows[:3]))], ["assets.csv"], ["keep"], None)
    assert session["case"] and session["case"] != engine.default_key and message.startswith("Loaded")
    assert "edits made before the upload no longer apply" in message
    assert len(services.view(session, None).case.assets) == 3


def test_upload_of_another_kind_of_file_says_why(engine):
    # the upload field filters nothing in the browser: the server refuses a text file with a message
    session, message, problems, *_ = inputs.upload([data_url(b"notes")], ["notes.txt"], [], None)
    assert session["case"] is None and "refused" in message.lower() and problems


def bad_and_good_assets() -> tuple[str, str]:
    """Two uploads of assets.csv: the demo's seven small motors with the first rated -3 kW (refused: spreadsheet
    row 2), and the three after it as they are (accepted)."""
    header, rows = demo_rows()
    good = data_url(csv_bytes(header, rows[1:4]))
    rows[0][header.index("rated_p_kw")] = "-3"
    return data_url(csv_bytes(header, rows)), good


def test_a_refused_upload_looks_apart_from_an_accepted_one(engine):
    # the status line's class: warning colours and a bar for a refusal, the accent for a load; the words lead with
    # what happened either way, so the difference does not rest on colour alone
    bad, good = bad_and_good_assets()
    _, message, _, _, status_class, _ = inputs.upload([bad], ["assets.csv"], ["keep"], None)
    assert status_class == "form-message refused" and message.endswith("the previous case stays loaded.")
    _, message, _, _, status_class, _ = inputs.upload([good], ["assets.csv"], ["keep"], None)
    assert status_class == "form-message accepted" and message.startswith("Loaded")


def test_a_refused_upload_is_shown_again_when_the_page_opens(engine):
    bad, good = bad_and_good_assets()
    session, message, problems, _, _, kept = inputs.upload([bad], ["assets.csv"], ["keep"], None)
    assert any(p["row"] == 2 and p["column"] == "rated_p_kw" for p in problems)
    # back on the page in the same tab: the refusal and its rows as the upload showed them
    assert inputs.listed(True, session, kept) == (problems, message, "form-message refused")
    # an accepted upload clears it: the page then opens on the warnings of the tab's case, with no status
    session, message, _, _, _, kept = inputs.upload([good], ["assets.csv"], ["keep"], session)
    assert kept is None and message.startswith("Loaded")
    rows, status, status_class = inputs.listed(True, session, kept)
    assert status is no_update and status_class is no_update
    assert not any(r["column"] == "rated_p_kw" for r in rows)
    # what session storage holds is the browser's: anything else than a kept refusal is ignored
    assert inputs.listed(True, session, {"message": 3, "problems": "x"})[1:] == (no_update, no_update)


def test_assumption_form_and_edits(engine):
    values = inputs.fill(True, None, None)
    # data/demo/finance.toml: 8 %, 1 %/yr, 15 yr; no price-level keys, so the tariffs and catalogue as written (100 %)
    assert values[:5] == ("8", "1", "15", "100", "100")  # text fields (see test_a_blank_assumption_field_is_refused_by_name)
    assert list(values[5:5 + services.BUDGET_YEARS]) == ["250000", "250000", "150000", None, None, None]
    stored, message, look = inputs.edit(6.0, 1.0, 15, 100.0, 100.0, 250000.0, 250000.0, 150000.0, None, None, None, None, None)
    assert stored["discount_rate_pct"] == 6.0 and message == "" and look == "form-message"
    unchanged, _, _ = inputs.edit(8.0, 1.0, 15, 100.0, 100.0, 250000.0, 250000.0, 150000.0, None, None, None, None, None)
    assert unchanged is no_update  # the form only repeats the assumptions in force
    refused, message, look = inputs.edit(8.0, 1.0, 0, 100.0, 100.0, 250000.0, 250000.0, 150000.0, None, None, None, None, None)
    assert refused is no_update and "horizon" in message.lower()
    assert look == "form-message refused"  # set apart from a caution or nothing (components.message_class)
    refused, message, look = inputs.edit(8.0, 1.0, 15, 0.0, 100.0, 250000.0, 250000.0, 150000.0, None, None, None, None, None)
    assert refused is no_update and "Electricity price level: must lie between 1 and" in message
    assert inputs.reset(1, None) == values[:5 + services.BUDGET_YEARS]


def test_one_refused_field_does_not_hold_back_the_others(engine):
    # a blank budget year 1 before a filled year 2, a horizon of 2.5 years and a discount rate of 0 %: the rate
    # applies; the horizon and the budget are refused, each named, and keep the values in force (the demo's
    # finance.toml: horizon 15 years, budgets 250000, 250000, 150000)
    stored, message, look = inputs.edit(0.0, 1.0, 2.5, 100.0, 100.0, 250000.0, None, 150000.0, None, None, None, None, None)
    assert stored["discount_rate_pct"] == 0.0
    assert "horizon_yr" not in stored and "budget_per_yr" not in stored
    assert message.startswith("Not applied: Year 1 is blank") and "Horizon: must be a whole number" in message
    assert message.endswith("The other values are applied.") and look == "form-message refused"
    view = services.view(None, stored)
    assert view.assumptions.discount_rate_frac == 0.0 and view.assumptions.horizon_yr == 15
    assert view.assumptions.budget_per_yr == (250000.0, 250000.0, 150000.0)


#: The form's five assumption fields as the page names them (dashboard/pages/inputs.py labels, without units).
FIELD_NAMES = ("Discount rate", "Energy price escalation", "Horizon", "Electricity price level", "Capital cost level")
#: The demo's assumptions as the text fields show them (data/demo/finance.toml: 8 %, 1 %/yr, 15 yr; no price-level
#: keys, so 100 %) and its budgets 250000, 250000, 150000.
DEMO_FORM = ("8", "1", "15", "100", "100")
DEMO_BUDGET = ("250000", "250000", "150000", None, None, None)


def test_a_blank_assumption_field_is_refused_by_name(engine):
    # Dash 4's number input does not report a field emptied after a callback filled it (the assumptions stayed
    # with no message, and Save said "Nothing to save"): the fields are text fields, which do
    layout = {getattr(c, "id", None): c for c in inputs.layout()._traverse()}
    for field in (inputs.DISCOUNT, inputs.ESCALATION, inputs.HORIZON, inputs.PRICE_LEVEL, inputs.CAPITAL_LEVEL):
        assert layout[field].type == "text" and layout[field].debounce is True, field
    # a blank field reaches the callback as "" (None before the page first filled it); either is refused by
    # name, the other fields apply and, as they repeat the values in force, nothing changes
    for k, name in enumerate(FIELD_NAMES):
        for blank in ("", "   ", None):
            form = DEMO_FORM[:k] + (blank,) + DEMO_FORM[k + 1:]
            stored, message, look = inputs.edit(*form, *DEMO_BUDGET, None, None)
            assert stored is no_update and look == "form-message refused"
            assert message.startswith(f"Not applied: {name}: enter a number. It stays at ")
            assert message.endswith(". The other values are applied.")
            # and the save says why it writes nothing, instead of "Nothing to save"
            assert inputs.save(1, *form, *DEMO_BUDGET, None, None, None)[2].startswith(
                f"Not saved: {name}: enter a number.")


def test_assumption_fields_read_numbers_as_typed(engine):
    # spaces, a trailing % on a percent field and thousands grouped by commas, as the budget fields take them
    stored, message, look = inputs.edit(" 6.5 % ", "1%", "15", "1,000", "100", *DEMO_BUDGET, None, None)
    assert message == "" and look == "form-message"
    assert stored["discount_rate_pct"] == 6.5 and stored["escalation_energy_pct"] == 1.0
    assert stored["energy_price_level_pct"] == 1000.0
    # text that is no number is refused as a blank is; a horizon takes no percent sign
    stored, message, _ = inputs.edit("six", "1", "15 %", "100", "100", *DEMO_BUDGET, None, None)
    assert stored is no_update
    assert message == ("Not applied: Discount rate: enter a number. It stays at 8 %/yr. Horizon: enter a number. "
                       "It stays at 15 yr. The other values are applied.")  # (data/demo/finance.toml: 8 %, 15 yr)
    assert services.typed_number("8,5", percent=True) == "8,5"  # a decimal comma is not guessed at: refused
    assert inputs.number_text(1.5) == "1.5" and inputs.number_text(15) == "15" and inputs.number_text(None) is None


def test_a_caution_on_an_applied_value_stays_beside_a_refusal(engine):
    # horizon 12.5 (refused) and discount rate -3 % (applied): the message names the refusal and keeps the
    # caution on the negative rate in force
    stored, message, look = inputs.edit("-3", "1", "12.5", "100", "100", *DEMO_BUDGET, None, None)
    assert stored["discount_rate_pct"] == -3.0 and "horizon_yr" not in stored
    assert message.startswith("Not applied: Horizon: must be a whole number of years from 1 to 100. It stays at 15 yr. "
                              "The other values are applied. A negative discount rate values future savings")
    assert "Applied." not in message and look == "form-message refused"
    # alone, the caution keeps its own words and the plain look
    stored, message, look = inputs.edit("-3", "1", "15", "100", "100", *DEMO_BUDGET, None, None)
    assert message.startswith("Applied. A negative discount rate") and look == "form-message"
    # a refusal with no caution is the refusal alone
    assert inputs.form_message("Not applied: Horizon: x.", "") == "Not applied: Horizon: x."


def test_price_levels_reach_the_economics(engine):
    dear, message, look = inputs.edit(8.0, 1.0, 15, 120.0, 100.0, 250000.0, 250000.0, 150000.0, None, None, None, None, None)
    assert message == "" and dear["energy_price_level_pct"] == 120.0
    base = services.view(None, None).result().results
    scaled = services.view(None, dear).result().results
    # bills are linear in every tariff charge (docs/finance.md): 120 % of the prices, 1.2 x every bill saving
    assert np.allclose(scaled["bill_saving_per_yr"].to_numpy(), 1.2 * base["bill_saving_per_yr"].to_numpy(), rtol=1e-9)
    assert np.allclose(scaled["capital"].to_numpy(), base["capital"].to_numpy(), rtol=1e-12)


def test_plan_budget_edit(engine):
    stored, message, look = plan.edit(100.0, None, 5.0, None, None, None, None, None)
    assert stored is no_update and "Year 1 is blank" in message and look == "form-message refused"
    stored, message, look = plan.edit(-1.0, None, None, None, None, None, None, None)
    assert stored is no_update and "zero or more" in message
    stored, message, look = plan.edit(30000.0, 10000.0, None, None, None, None, None, None)
    assert stored["budget_per_yr"] == [30000.0, 10000.0] and message == "" and look == "form-message"
    assert plan.fill(True, None, stored)[:3] == ["30000", "10000", None]
    stored, _, _ = plan.edit("30,000", " 10 000 ", "", None, None, None, None, None)  # as typed in the text fields
    assert stored["budget_per_yr"] == [30000.0, 10000.0]


def test_template_download(engine):
    sent = inputs.template(1)
    assert sent["filename"] == "drivecase-blank-case.xlsx" and sent["base64"]


def test_shell(engine):
    label = shell.show_case(None, None)
    assert "discount 8 %" in label[2].children
    classes = shell.highlight_navigation("/plan", [{"path": "/"}, {"path": "/plan"}])
    assert classes == ["nav-link", "nav-link active"]


def test_prove_runs_only_on_a_click(engine):
    assert plan.prove(None, None, None) is no_update  # the page mounting is not a click
    assert plan.prove(1, None, None)[0] == 1  # and the status line waits for the page's update
    proved = services.view(None, None).result()
    assert proved.plan_status["settings"] == services.scenario.PRECISE_PLAN  # the proved result now serves the page


def test_uncertainty_page_says_why_when_the_risk_cannot_run(engine, monkeypatch):
    # e.g. a finance.toml whose discount rate leaves the +/-2-point draws at or below -100 %: a message, not an error
    def refuse(self, with_risk=False, precise=False):
        raise ValueError("a drawn discount rate is <= -1; narrow the discount-rate distribution")

    monkeypatch.setattr(services.View, "result", refuse)
    out = risk.update(True, None, None, "plan")
    assert "cannot run under these assumptions" in str(out[4]) and out[2] == []
    assert all(isinstance(f, go.Figure) for f in (out[0], out[1], out[6]))


def test_uncertainty_page_analyses_the_plan_or_the_best_options(engine):
    # the plan (what the capital request asks for) by default, the best options with no budget on request;
    # the figures and the summary name what they add up
    v = services.view(None, None)
    result = v.result(with_risk=True)
    plan_out, best_out = risk.update(True, None, None, "plan"), risk.update(True, None, None, "best")
    assert {r["project_id"] for r in plan_out[2]} == set(result.plan["asset_id"] + "/" + result.plan["option_id"])
    assert {r["project_id"] for r in best_out[2]} == set(result.risk["project_id"])
    assert any(c["field"] == "start_yr" for c in plan_out[3]) and not any(c["field"] == "start_yr" for c in best_out[3])
    assert "capital plan" in str(plan_out[4]) and "best option" in str(best_out[4])
    assert plan_out[6].layout.title.text.startswith("Plan NPV") and best_out[6].layout.title.text.startswith("Fleet NPV")
    assert "Plan NPV" in plan_out[0].layout.xaxis.title.text
    # an unknown scope (e.g. a stale stored value) falls back to the plan
    assert risk.update(True, None, None, "nonsense")[2] == plan_out[2]


def test_case_warnings_are_listed_when_the_inputs_page_opens(engine, monkeypatch):
    # the problems grid shows the warnings the case was read with (not only an upload's)
    from types import SimpleNamespace

    from models.problems import warning

    read_with = (warning("assets.csv", None, "static_head_frac", None, "static_head_frac is blank", "give it"),)
    monkeypatch.setattr(services, "view", lambda session, edits: SimpleNamespace(
        entry=SimpleNamespace(case=SimpleNamespace(problems=read_with))))
    rows, status, _ = inputs.listed(True, None, None)
    assert status is no_update  # no upload kept for the tab: the status line stays as the page drew it
    assert len(rows) == 1 and rows[0]["rule"] == "static_head_frac is blank" and rows[0]["severity"] == "warning"


def test_an_unknown_asset_in_the_address_is_said(engine):
    # /asset?id=NOPE: the first asset is shown, and the page says the requested one does not exist
    first = services.asset_choices(services.view(None, None))[0]["value"]
    options, value = asset.choose("NOPE", None)
    assert value == first
    out = asset.update(value, None, None, "NOPE")
    assert f"The case has no asset 'NOPE'; showing {first}." in str(out[11])
    assert "has no asset" not in str(asset.update(value, None, None, first)[11])


def test_weeks_start_with_the_first_days_of_data(engine):
    # the analysis year 2025 starts on a Wednesday (1 Jan 2025): its first days are a choice of their own
    view = services.view(None, None)
    weeks = services.week_starts(view)
    index = view.physics().operation.index
    assert weeks[0]["value"] == index[0].isoformat() and weeks[0]["label"] == "First days, from Wed 1 Jan"
    assert weeks[1]["label"] == "Week of Mon 6 Jan"
    # no label holds the year (the analysis year), so a typed "20 Oct" matches that week alone
    assert [w["label"] for w in weeks if "20" in w["label"] and "Oct" in w["label"]] == ["Week of Mon 20 Oct"]
    # a peak in those days is shown from the first day (not from the Monday before the data)
    import pandas as pd

    meters = {"before": pd.DataFrame({"p_kw": [5.0] + [1.0] * (len(index) - 1)}, index=index)}
    assert services.peak_week(meters) == index[0].isoformat()


def test_weeks_across_a_clock_change_keep_seven_local_days():
    # Europe/Berlin (EU summer-time rule, Directive 2000/84/EC): clocks go forward on 30 Mar 2025 and back on
    # 26 Oct 2025, so the weeks from Mon 24 Mar and Mon 20 Oct hold 167 and 169 hours, Monday 00:00 to Sunday 23:00
    index = pd.date_range("2025-01-01", "2026-01-01", freq="h", inclusive="left", tz="Europe/Berlin")
    frame = pd.DataFrame({"p_kw": 1.0, "q_kvar": 0.5, "power_factor": 0.9}, index=index)
    for start, hours in (("2025-03-24T00:00:00+01:00", 167), ("2025-10-20T00:00:00+02:00", 169)):
        week = services.week_slice({"before": frame}, start)["before"]
        assert len(week) == hours
        assert (week.index[0].strftime("%a %H:%M"), week.index[-1].strftime("%a %H:%M")) == ("Mon 00:00", "Sun 23:00")
    # the repeated 02:00 of 26 Oct is not drawn back over itself: the line breaks once there
    fig = figures.meter_week(services.week_slice({"before": frame}, "2025-10-20T00:00:00+02:00"))
    kw = fig.data[0]
    assert sum(v is None or v != v for v in kw.y) == 1
    assert "kW" in kw.hovertemplate and "kVAr" in fig.data[1].hovertemplate


def test_site_summary_reads_kva_and_the_billed_power_factor(engine):
    # hand calculation: p = 100, 100 kW and q = 75, -10 kVAr over 1 h intervals: peak kVA = hypot(100, 75) = 125;
    # average power factor = kWh / sqrt(kWh^2 + lagging kVArh^2) = 200 / sqrt(200^2 + 75^2) = 200 / 213.600 = 0.936329
    frame = pd.DataFrame({"p_kw": [100.0, 100.0], "q_kvar": [75.0, -10.0]})
    got = services.meter_summary(frame, 1.0)
    assert got["peak_kw"] == 100.0 and got["peak_kva"] == pytest.approx(125.0, abs=1e-12)
    assert got["average_power_factor"] == pytest.approx(0.936329, abs=5e-7)
    text = site.update("KGQ", None, None, None)[4][0].children  # a site priced on kVA demand: both peaks named
    assert " kVA today" in text and "average power factor (kWh over kVAh)" in text


def test_fleet_site_filter_names_the_sites(engine):
    # the small case is cut from the demo: its site HRW is "Haldane Ridge Water Treatment Works" (data/demo/sites.csv)
    sites = fleet.filters(None)[0].options
    assert {"label": "HRW: Haldane Ridge Water Treatment Works", "value": "HRW"} in sites


def test_fleet_filters_keep_the_tabs_choice_per_case(engine):
    # made with their choices, so Dash can put the tab's kept choice back (a dropdown made before its
    # choices drops a kept value they do not hold); kept in the tab's session storage, one choice per case
    for dropdown in fleet.filters(None):
        assert dropdown.options and dropdown.multi
        assert dropdown.persistence == engine.default_key and dropdown.persistence_type == "session"
    # the layout's stand-ins have no choices: the table waits for the filters rather than showing every asset
    from dash.exceptions import PreventUpdate

    with pytest.raises(PreventUpdate):
        fleet.update(None, None, None, None, None)


def test_fleet_count_follows_the_grids_own_filters(engine):
    # a column filter in the grid leaves fewer rows shown: the count says so
    rows = fleet.update(None, None, None, None)[4]
    assert fleet.count_shown(rows[:2], None, rows) == f"2 of {len(SMALL_IDS)} assets"
    assert fleet.count_shown(None, None, rows) is no_update
    # filters that match nothing, once the results are there: "0 of n"
    assert fleet.count_shown([], None, []) == f"0 of {len(SMALL_IDS)} assets"


def test_the_abatement_curve_says_which_option_of_each_asset_it_draws(engine):
    # per asset, the highest-NPV option among those that avoid CO2 (models.plan.abatement_curve), which can
    # differ from the table's best option: the figure's title and the words under it say so
    out = fleet.update(None, None, None, None)
    assert "each asset's highest-NPV option that avoids CO2" in out[7].layout.title.subtitle.text
    texts = [c.children for c in fleet.layout()._traverse() if isinstance(getattr(c, "children", None), str)]
    assert any(t.startswith("One bar per asset: of its options that avoid CO2, the one with the highest NPV.")
               for t in texts)


def test_fleet_says_the_case_is_computed_until_its_results_arrive(engine):
    # before the page's callback has given the grid its rows (rowData None: the results are still being
    # computed) the grid reports no rows shown; the count keeps saying why instead of "0 of n assets"
    assert fleet.count_shown([], None, None) is no_update
    page = fleet.layout()
    count = next(c for c in page._traverse() if getattr(c, "id", None) == fleet.COUNT)
    grid = next(c for c in page._traverse() if getattr(c, "id", None) == fleet.TABLE)
    assert count.children == "Computing the case…"
    assert grid.rowData is None
    assert grid.dashGridOptions["localeText"] == {"noRowsToShow": "No asset matches the filters",
                                                  "loadingOoo": "Computing the case…"}


def test_every_grid_lets_tab_leave_it(engine):
    # Tab and Shift+Tab go to the next or previous element of the page, not cell by cell (AG Grid's
    # tabToNextCell/tabToNextHeader returning false hand the key to the browser)
    from dashboard import components as ui

    for grid in (ui.data_grid("g"), ui.data_grid("h", dashGridOptions={"rowHeight": 30}),
                 next(c for c in fleet.layout()._traverse() if getattr(c, "id", None) == fleet.TABLE)):
        assert grid.dashGridOptions["tabToNextCell"] == {"function": "false"}
        assert grid.dashGridOptions["tabToNextHeader"] == {"function": "false"}


def test_fleet_columns_fit_a_1366_px_window(engine):
    # the narrowest widths add up to what a 1366 px window leaves the table: 1366 - 2 x 24 px of page
    # padding (style.css .content) - 15 px page scrollbar - 15 px grid scrollbar - 2 px borders = 1286 px
    columns = fleet.update(None, None, None, None)[5]
    assert sum(c["minWidth"] for c in columns) <= 1366 - 2 * 24 - 15 - 15 - 2
    assert {c["field"] for c in columns} == set(fleet.WIDTHS_PX)


def test_prove_button_is_off_once_the_plan_is_proven(engine):
    # the case's own assumptions are solved to the full run's precision: nothing left to prove
    from types import SimpleNamespace

    out = plan.update(True, None, None)
    assert out[-2] is True and out[-1] == "Chosen projects (exact plan)"
    npv = next(c for c in out[3] if c["field"] == "npv")  # the column says why a reactive project's NPV is lower
    assert "share of its bill saving" in npv["headerTooltip"]
    live = SimpleNamespace(plan_status={"status": "time_limit", "gap_frac": 0.002})
    loose = SimpleNamespace(plan_status={"status": "optimal", "gap_frac": 0.0009})
    proven = SimpleNamespace(plan_status={"status": "optimal", "gap_frac": 0.00005})
    assert [services.plan_is_proven(r) for r in (live, loose, proven)] == [False, False, True]
    # a plan not proven to the full run's precision is not called exact (the solver may not have found the best)
    assert [services.plan_name(r) for r in (live, loose, proven)] == ["best plan found", "best plan found", "exact plan"]
    assert services.plan_solve_text(SimpleNamespace(plan_status={"status": "time_limit", "gap_frac": 0.23,
                                                                 "settings": scenario.LIVE_PLAN})).startswith(
        "Best plan found in the")
    fig = figures.plan_comparison(pd.Series({"npv_exact": 1.0, "npv_greedy": 0.5}), "EUR", "best plan found")
    assert list(fig.data[0].x) == ["best plan found", "rank by profitability index"]


def test_saving_columns_say_what_they_add_up(engine):
    for columns in (fleet.update(None, None, None, None)[5], asset.option_columns("EUR")):
        saving = next(c for c in columns if c["field"] == "saving_per_yr")
        assert "plus maintenance" in saving["headerTooltip"]


def test_fleet_payback_says_when_it_is_beyond_the_horizon(engine):
    # a blank discounted payback reads "not within the horizon" where capital is spent, blank where none is
    columns = fleet.update(None, None, None, None)[5]
    payback = next(c for c in columns if c["field"] == "discounted_payback_yr")
    code = payback["valueFormatter"]["function"]
    assert "not within the horizon" in code and "params.data.capital > 0" in code
    # a positive NPV with no payback rests on the residual value, which the paybacks leave out: the cell and the
    # header's tooltip say so (user report: "IRR above our hurdle, but it never pays back")
    assert "params.data.npv > 0" in code and "its NPV counts the residual value" in code
    assert "without the residual value" in payback["headerTooltip"]
    # the Asset page's options grid writes it the same way (it left the cell blank, as for "Keep as is")
    asset_payback = next(c for c in asset.update("HRW-V01", None, None)[2] if c["field"] == "discounted_payback_yr")
    assert asset_payback["valueFormatter"] == payback["valueFormatter"] and asset_payback["wrapText"]
    # and its rows give the formatter what it reads: capital spent and no payback within the horizon
    rows = asset.update("HRW-V01", None, None)[1]
    assert all("capital" in r and "discounted_payback_yr" in r for r in rows)


def test_the_site_page_keeps_the_site_on_screen_else_the_addressed_one(engine):
    # the small case holds the demo's sites HRW and KGQ (data/demo/sites.csv), HRW first
    ids = [o["value"] for o in site.choose(True, None, None, None)[0]]
    assert ids[0] == "HRW" and "KGQ" in ids
    assert site.choose(True, None, None, None)[1] == "HRW"  # nothing asked: the first site
    assert site.choose(True, None, "KGQ", None)[1] == "KGQ"  # a reload or bookmark of /site?site=KGQ
    assert site.choose(True, None, "KGQ", "HRW")[1] == "HRW"  # picked since: the pick stays on a new session
    assert site.choose(True, None, "NO-SUCH", None)[1] == "HRW"  # an address naming no site of the case
    assert site.address("KGQ") == "?site=KGQ" and site.address("A B/1") == "?site=A%20B%2F1"
    assert site.address(None) is no_update


def test_the_pack_status_says_and_shows_whether_it_was_written(engine, monkeypatch):
    # the pack itself is tested in tests/test_pack_*.py; here only what the status line says and how it looks
    monkeypatch.setattr(services, "pack_zip_bytes", lambda view_: b"PK")
    sent, text, look = plan.pack(1, None, None)
    assert sent["filename"] == "drivecase-capital-request-pack.zip" and text.startswith("Pack ready")
    assert look == "form-message accepted"

    def fails(view_):
        raise ValueError("no plan to write")

    monkeypatch.setattr(services, "pack_zip_bytes", fails)
    sent, text, look = plan.pack(1, None, None)
    assert sent is no_update and text == "The pack could not be written: no plan to write"
    assert look == "form-message refused"


def test_budget_fields_name_the_currency_and_refuse_absurd_amounts(engine):
    currency = services.view(None, None).currency
    # each budget field's label carries the case's currency, on both pages
    labels = [f"Year {k} [{currency}]" for k in range(services.BUDGET_YEARS)]
    assert plan.fill(True, None, None)[services.BUDGET_YEARS:] == labels
    assert list(inputs.fill(True, None, None)[5 + services.BUDGET_YEARS:]) == labels
    # 1e99 is a number but no budget: refused, naming the field, the value as typed and the rule
    stored, message, look = plan.edit("1e99", None, None, None, None, None, None, None)
    assert stored is no_update and look == "form-message refused"
    assert message.startswith(f"Not applied: Year 0 budget [{currency}]: 1e99 is above")
    assert f"{currency} 1,000,000,000,000 a year" in message
    stored, message, _ = plan.edit("100", "-5", None, None, None, None, None, None)
    assert stored is no_update and f"Year 1 budget [{currency}]: -5 is below zero" in message
    # the same on the Case & assumptions page; the other fields still apply
    stored, message, look = inputs.edit(6.0, 1.0, 15, 100.0, 100.0, "1e99", None, None, None, None, None, None, None)
    assert stored["discount_rate_pct"] == 6.0 and "budget_per_yr" not in stored
    assert f"Year 0 budget [{currency}]: 1e99 is above" in message and look == "form-message refused"
    # and nothing of it is saved
    out = inputs.save(1, 8.0, 1.0, 15, 100.0, 100.0, "inf", None, None, None, None, None, None, None, None)
    assert out[2].startswith(f"Not saved: Year 0 budget [{currency}]: 'inf' is not an amount")


def test_top_bar_names_every_assumption_that_differs_from_the_case(engine):
    currency = services.view(None, None).currency
    own = shell.show_case(None, None)[2].children
    # data/demo/finance.toml: 8 %, 15 years, budgets 250000 + 250000 + 150000 = 650000 over 3 years
    # (a no-break space inside the amount: it never wraps over two lines)
    assert own.endswith(f"discount 8 % · 15 yr · budget 3 yr, {currency}\u00a0650.0\u00a0k in all")
    edits = {"case": engine.default_key, "energy_price_level_pct": 120.0, "escalation_energy_pct": 2.0,
             "capital_cost_level_pct": 90.0, "budget_per_yr": [100000.0]}
    edited = shell.show_case(None, edits)[2].children
    assert edited.endswith(f"discount 8 % · 15 yr · budget 1 yr, {currency}\u00a0100.0\u00a0k in all · electricity price 120 % · "
                           "escalation 2 %/yr · capital cost 90 %")
    # the same values as the case's file are not named
    same = shell.show_case(None, {"case": engine.default_key, "escalation_energy_pct": 1.0})[2].children
    assert same == own


def test_an_upload_lacking_a_table_says_so_first(engine):
    header, rows = demo_rows()
    # assets.csv alone, the current case's other files not kept: the sites table is missing, and every asset's
    # site is then unknown too
    _, message, problems, _, status_class, kept = inputs.upload([data_url(csv_bytes(header, rows))], ["assets.csv"], [],
                                                                None)
    assert status_class == "form-message refused"
    assert message.startswith("The upload lacks the required table 'sites' (sites.csv)")
    assert message.endswith("the previous case stays loaded.")
    first = problems[0]
    assert first["rule"] == "the required table 'sites' is missing" and first["file"] == "sites.csv"
    assert any(p["rule"].startswith("unknown site_id") for p in problems[1:])
    # the hint points at the page's own template button, not the command line
    assert "Download a blank case workbook" in first["hint"] and "drivecase new" not in first["hint"]
    assert kept["problems"][0] == first and kept["message"] == message


def test_the_prove_and_pack_buttons_say_they_are_busy():
    # Dash sets these props in the browser while the callback runs, and puts them back after
    def running(callback_id):
        spec = next(c for c in dash_callback_list() if c["output"].startswith(callback_id))
        return spec["running"]

    prove = running(f"..{plan.PROVED}.data")
    assert prove["running"][f"{plan.PROVE}.disabled"] is True and prove["runningOff"][f"{plan.PROVE}.disabled"] is False
    assert prove["running"][f"{plan.PROVING}.children"].startswith("Proving the plan")
    pack = running(f"..{plan.PACK}.data")
    assert pack["running"][f"{plan.PACK_BUTTON}.disabled"] is True
    assert pack["running"][f"{plan.PACK_BUTTON}.children"] == "Building the pack…"


def dash_callback_list():
    """Every callback declared: those still in Dash's global list and those the app has taken over (once a
    server has started, earlier in the same test run, the app holds them and the global list is empty)."""
    from dash._callback import GLOBAL_CALLBACK_LIST

    return list(GLOBAL_CALLBACK_LIST) + list(shell.app._callback_list)


def test_asset_end_of_life_matches_the_engines_frame(engine):
    # the numbers worked from the engine's own row, in plain Python: the lowest of the three costs and its gap
    # to the second lowest
    result = services.view(None, None).result()
    row = result.end_of_life.set_index("asset_id").loc["HRW-P01"]
    costs = {"Replace now": row["cost_replace_now"], "Replace at failure": row["cost_replace_at_failure"],
             "Rewind at failure": row["cost_rewind_at_failure"]}
    ranked = sorted(costs.items(), key=lambda kv: kv[1])
    fig, text, rules, columns, scope = asset.end_of_life("HRW-P01", None, None)
    bar = fig.data[0]
    assert list(bar.y) == list(costs) and list(bar.x) == list(costs.values())
    marked = [y for y, t in zip(bar.y, bar.text) if t.endswith("cheapest")]
    assert marked == [ranked[0][0]]
    assert ranked[0][0].lower().replace(" ", "_") == row["best_strategy"]  # the pack's choice too
    sentence, caution = text[0].children, text[1].children
    assert f"is to {ranked[0][0].lower()}: an expected present cost of EUR {ranked[0][1]:,.0f}" in sentence
    assert f"EUR {ranked[1][1] - ranked[0][1]:,.0f} less than the next cheapest ({ranked[1][0].lower()})" in sentence
    assert f"{row['age_yr']:.0f} years old" in sentence
    assert f"is {row['failure_probability_in_horizon_frac'] * 100:.0f} %" in sentence
    assert "not a forecast" in caution
    # the policy: one grid row per engine row, readable headers, no infinite hours sent to the browser
    assert len(rules) == len(result.fleet_rules) > 0
    assert [c["headerName"] for c in columns][:3] == ["From rating [kW]", "To rating [kW]",
                                                      "Replace rather than rewind from [h/yr]"]
    assert not any(np.isinf(r["min_hours_to_replace_h_per_yr"]) for r in rules)
    # and what the policy covers: its sizes, the motors left to their own comparison, how it prices an outage
    top = float(result.fleet_rules["max_rated_p_kw"].max())
    rated = services.view(None, None).case.assets["rated_p_kw"]
    assert f"to {top:,g} kW" in scope and "not at each motor's own" in scope
    assert ((rated > top).sum() == 0) == ("larger and" not in scope)


def test_asset_end_of_life_says_why_when_the_engine_has_none(engine, monkeypatch):
    # a catalogue without a rewind or a new induction option: the engine's frames are empty
    from dataclasses import replace

    result = services.view(None, None).result()
    empty = replace(result, end_of_life=pd.DataFrame(), fleet_rules=pd.DataFrame())
    monkeypatch.setattr(services.View, "result", lambda self, *a, **k: empty)
    fig, text, rules, _, scope = asset.end_of_life("HRW-P01", None, None)
    assert not fig.data and fig.layout.annotations[0].text.replace("<br>", " ") == services.END_OF_LIFE_UNAVAILABLE
    assert [p.children for p in text] == [services.END_OF_LIFE_UNAVAILABLE] and rules == [] and scope == ""
    # no asset chosen yet: the policy grid is left saying it is computing, not "not available"
    fig, _, rules, columns, _ = asset.end_of_life(None, None, None)
    assert "Choose" in fig.layout.annotations[0].text and rules is no_update and columns is no_update


def test_a_refused_field_says_the_value_that_stays_in_force(engine):
    # User report: with -5 % applied, a refused 150 % left the field at 150 and the message did not say that
    # -5 % was still the rate in use
    base = services.view(None, None)
    key = base.key
    edits, message = services.edit_assumptions(key, base.assumptions, {"case": key, "discount_rate_pct": -5.0},
                                               discount_rate_pct="150")
    assert "Discount rate: must lie between -20 and 100 %/yr" in message and "It stays at -5 %/yr." in message


def test_scenarios_side_by_side_keep_and_clear(engine):
    # the case's own scenarios (the demo's scenarios.toml, copied with the small case) beside the case as written,
    # then the tab's assumptions kept under a name, compared, and cleared
    from models.comparison import BASE_NAME

    rows, columns = inputs.scenarios(True, None, None)
    assert [r["scenario"] for r in rows] == [BASE_NAME, "Cheaper money", "Dearer electricity, larger budget",
                                             "Wait for failures"]
    assert rows[0]["plan_npv_change"] == 0.0 and rows[1]["plan_npv_change"] > 0  # (6 % against 8 %)
    assert any(c["field"] == "plan_npv_change" for c in columns)
    # the case's own assumptions cannot be kept: nothing is changed yet
    kept, message, _ = inputs.keep_scenario(1, "Same", None, None, None)
    assert kept is no_update and message.startswith("Not kept: these are the case's own assumptions")
    edits = {"case": engine.default_key, "discount_rate_pct": 10.0}
    for name, refusal in (("", "give these assumptions a name"), ("Cheaper money", "already names a scenario"),
                          (BASE_NAME, "already names a scenario"),
                          # capitals and spaces aside, as the case reader compares names
                          ("cheaper  MONEY", "reads as 'Cheaper money', a scenario of this case"),
                          (BASE_NAME.lower(), f"reads as '{BASE_NAME}'")):
        kept, message, _ = inputs.keep_scenario(1, name, None, edits, None)
        assert kept is no_update and refusal in message
    kept, message, _ = inputs.keep_scenario(1, " Dearer money ", None, edits, None)
    assert kept == [{"name": "Dearer money", "edits": edits}] and message.startswith("Kept 'Dearer money'")
    rows, _ = inputs.scenarios(True, None, kept)
    mine = rows[-1]
    assert mine["scenario"] == "Dearer money (kept in this tab)" and mine["discount_rate_pct"] == pytest.approx(10.0)
    assert mine["plan_npv_change"] < 0  # a dearer discount rate lowers the value of the same savings
    # a name kept once is not taken twice; a kept scenario of another case is left out
    again, message, _ = inputs.keep_scenario(1, "Dearer money", kept, edits, None)
    assert again is no_update and "already names a scenario" in message
    other = kept + [{"name": "Elsewhere", "edits": {"case": "another-case", "discount_rate_pct": 4.0}}]
    assert [r["scenario"] for r in inputs.scenarios(True, None, other)[0]][-1] == "Dearer money (kept in this tab)"
    cleared, message, _ = inputs.clear_scenarios(1)
    assert cleared == [] and "cleared" in message


def test_the_case_s_scenarios_read_as_in_the_scenarios_file(engine):
    # the dashboard's rows of the case's own scenarios are those drivecase run writes (the plan proven alike)
    from models.comparison import case_scenarios

    view = services.view(None, None)
    result = scenario.economics(view.case, engine.physics(view.key), view.case.finance, with_risk=False)
    expected = case_scenarios(view.case, result)
    rows = pd.DataFrame(inputs.scenarios(True, None, None)[0])
    assert rows["scenario"].tolist() == expected["scenario"].tolist()
    assert rows["plan_npv"].to_numpy() == pytest.approx(expected["plan_npv"].to_numpy(), rel=1e-9)


def test_a_large_fleet_s_scenarios_are_bounded_as_live_edits(engine, monkeypatch):
    # services.PROVEN_SCENARIO_ASSETS: above it the page asks each scenario's plan as a live edit (a proof can take
    # up to a minute per plan there); at or below it, proven as the pack's
    asks = []
    real = engine.result
    monkeypatch.setattr(engine, "result", lambda key, a, **kw: asks.append(kw.get("precise")) or real(key, a, **kw))
    inputs.scenarios(True, None, None)
    assert asks and all(asks)
    asks.clear()
    monkeypatch.setattr(services, "PROVEN_SCENARIO_ASSETS", 1)
    inputs.scenarios(True, None, None)
    assert asks and not any(asks)


def test_an_address_naming_an_unknown_site_is_told_so(engine):
    # the asset page already names an unknown asset in the address; the site page did not, and showed another
    # site without a word
    assert "The case has no site 'NOPE'; showing KGQ." in site.update("KGQ", None, None, None, "NOPE")[5]
    assert "no site" not in (site.update("KGQ", None, None, None, "KGQ")[5] or "")


def test_the_fleet_table_keeps_its_sort_for_the_tab(engine):
    # the browser keeps the columns sorted (fleet.KEEP_SORT_JS, tested in the browser suite); they are put back on
    # the columns when the table is drawn again (after Back from an asset); an unknown column is passed over
    kept = [{"colId": "rating", "sort": "asc", "sortIndex": 0}, {"colId": "capital", "sort": "desc", "sortIndex": 1}]
    columns = fleet.sorted_columns(fleet.table_columns("EUR", "kW"), kept + [{"colId": "gone", "sort": "asc"}])
    by_field = {c["field"]: c for c in columns}
    assert (by_field["rating"]["sort"], by_field["rating"]["sortIndex"]) == ("asc", 0)
    assert (by_field["capital"]["sort"], by_field["capital"]["sortIndex"]) == ("desc", 1)
    assert "sort" not in by_field["npv"]
    assert fleet.sorted_columns(fleet.table_columns("EUR", "kW"), None) == fleet.table_columns("EUR", "kW")
    # the page's callback takes the kept sort
    assert {c["field"]: c.get("sort") for c in fleet.update(None, None, None, None, (), kept)[5]}["rating"] == "asc"


def test_a_plan_past_the_harmonic_limits_is_said_on_the_fleet_plan_and_asset_pages(engine):
    # an invariant of our design: the sites whose plan row of the harmonic screen passes a limit (the screen's numbers:
    # hand cases H1-H6) are named on the pages where the plan is decided, and only where they are
    from models.harmonics import screen_flags

    view = services.view(None, None)
    result = view.result()
    screen = services._screen_table(view, result)
    plan_rows = screen[screen["scenario"] == "plan"]
    flagged = set(plan_rows.loc[screen_flags(plan_rows)["any"], "site_id"].astype(str))
    assert flagged, "the demo's copy was expected to have a site past a harmonic limit with the plan"
    text = services.plan_harmonic_text(view, result)
    assert all(f"site {s} (" in text for s in flagged)
    summary = plan.update(True, None, None)[6]
    said = [x for x in summary if getattr(x, "id", None) == "plan-harmonics"]
    assert len(said) == 1 and text in said[0].children
    # the Fleet page's notice line names the sites in one sentence (its table stays on the first screen)
    notice = fleet.update(None, None, None, None)[-1]
    assert services.plan_harmonic_text(view, result, brief=True) in notice and text not in notice
    assert all(f"site {s} " in notice or f"sites {s} " in notice or f" and {s} " in notice for s in flagged)
    assets = view.case.assets
    at_flagged = assets.loc[assets["site_id"].astype(str).isin(flagged), "asset_id"]
    elsewhere = assets.loc[~assets["site_id"].astype(str).isin(flagged), "asset_id"]
    with_drive = [a for a in at_flagged if services.asset_harmonic_text(view, result, a)]
    assert with_drive
    ids = [getattr(x, "id", None) for x in asset.update(with_drive[0], None, None)[0]]
    assert "asset-harmonics" in ids
    assert all(not services.asset_harmonic_text(view, result, a) for a in elsewhere)


def test_the_fleet_cards_say_the_case_is_computing_until_filled():
    # docs/dashboard.md, Fleet: until the tab's results are there the cards say "Computing the case…"
    def texts(component):
        children = getattr(component, "children", None)
        if isinstance(children, str):
            yield getattr(component, "id", None), children
        for child in children if isinstance(children, list) else ([children] if children is not None else []):
            if not isinstance(child, str):
                yield from texts(child)

    said = dict((i, t) for i, t in texts(fleet.layout()) if i)
    assert all(said[f"{fleet.HEADLINE}-headline-{k}"] == "Computing the case…" for k in ("capital", "saving", "npv", "co2"))
