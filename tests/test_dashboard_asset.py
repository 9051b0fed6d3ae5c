"""The asset page: its address, one colour per option, cautions, ratings, defaults and grid columns.

Page callbacks and their helpers called directly on a copy of the demo case cut to three motors (their
rows of data/demo/assets.csv, unchanged).
"""

from __future__ import annotations

import pytest
from dash import no_update

from dashboard import app as _shell  # noqa: F401 - the app first: pages register on it
from dashboard import components as ui
from dashboard import figures, services
from dashboard.pages import asset, fleet
from test_dashboard_services import small_case_engine

#: Demo motors used here (data/demo/assets.csv): HRW-D01 0.75 kW dosing pump, HRW-P01 250 kW pump, KGQ-F01 132 kW fan.
IDS = ("HRW-D01", "HRW-P01", "KGQ-F01")


@pytest.fixture(scope="module")
def three_motors(tmp_path_factory):
    return small_case_engine(tmp_path_factory, "three", IDS)


@pytest.fixture(autouse=True)
def engine(three_motors, monkeypatch):
    monkeypatch.setattr(services, "_ENGINE", three_motors)
    return three_motors


def test_the_address_follows_the_chosen_asset():
    # from the Fleet page the address is /asset?id=KGQ-F01; picking HRW-D01 must give ?id=HRW-D01
    assert asset.address("HRW-D01") == ("?id=HRW-D01", "HRW-D01")  # (and the tab's last asset)
    assert asset.address("A B/1") == ("?id=A%20B%2F1", "A B/1")  # quoted as the Fleet page's link quotes it
    assert asset.address(None) == (no_update, no_update)  # nothing chosen yet: the address stays
    # the address is never an input of the pick (no loop): the dropdown follows the request only
    options, value = asset.choose("KGQ-F01", None)
    assert value == "KGQ-F01"


def test_the_asset_link_opens_the_asset_the_tab_showed_last():
    # User report: the navigation's "Asset" link always opened the first asset, not the one under discussion.
    # With no asset in the address the page opens on the tab's last asset (if the case has it), else the first.
    options, value = asset.choose(None, None, "KGQ-F01")
    ids = [o["value"] for o in options]
    assert value == "KGQ-F01"
    assert asset.choose(None, None, "NO-SUCH")[1] == ids[0]
    assert asset.choose(None, None, None)[1] == ids[0]
    assert asset.choose("HRW-D01", None, "KGQ-F01")[1] == "HRW-D01"  # an address that names one wins


class TestCautions:
    # the line-start screen's caution as models/operation.py writes it, its reasons joined by "; " inside brackets
    SCREEN = ("line-start screen: confirm with the supplier (load inertia above 5 x rotor inertia (voltage-dip "
              "derated); start load torque above 0.5 x rated torque (voltage-dip derated))")

    def test_a_caution_with_reasons_in_brackets_stays_whole(self):
        assert services.split_cautions(self.SCREEN) == [self.SCREEN]

    def test_cautions_of_one_project_split_at_the_top_level(self):
        # two cautions of one project, joined by models.scenario._flags_by_project with "; "
        text = self.SCREEN + "; profile scaled to the mean load"
        assert services.split_cautions(text) == [self.SCREEN, "profile scaled to the mean load"]
        assert services.split_cautions("") == [] and services.split_cautions(None) == []


class TestNumbers:
    def test_ratings_keep_their_precision(self):
        # ratings of data/demo/assets.csv: 0.75, 1.1, 7.5, 250, 1600 kW; 37.2849936 kW is 50 hp (NIST SP 811 B.9)
        assert [ui.fmt_rating(x, "kW") for x in (0.75, 1.1, 7.5, 250.0, 1600.0, 37.2849936)] == [
            "0.75 kW", "1.1 kW", "7.5 kW", "250 kW", "1,600 kW", "37.28 kW"]
        assert ui.fmt_rating(float("nan"), "kW") == "-"

    def test_the_summary_shows_a_small_rating_as_rated(self):
        out = asset.update("HRW-D01", None, None)
        assert "0.75 kW" in str(out[0])  # the demo's assets.csv row HRW-D01: 0.75 kW

    def test_the_fleet_rating_column_keeps_the_precision(self):
        rating = next(c for c in fleet.table_columns("EUR", "kW") if c["field"] == "rating")
        # d3 ",.2~f": up to 2 decimals, trailing zeros dropped (0.75, 1.1, 250), as ui.fmt_rating
        assert "d3.format(',.2~f')" in rating["valueFormatter"]["function"]

    def test_defaults_rounded_by_quantity(self):
        # hand rounding of values the defaults table held as raw floats
        assert services.default_text("rated_power_factor", 0.878603) == "0.879"  # power factor: 3 decimals
        assert services.default_text("rated_speed_rpm", 981.555) == "982"  # speed: whole rpm
        assert services.default_text("rated_speed_rpm", 1434.11) == "1434"
        assert services.default_text("rated_efficiency_pct", 81.64) == "81.6"  # percent: 1 decimal (0.816 as fraction)
        assert services.default_text("static_head_frac", 0.3) == "0.3"  # trailing zeros dropped
        assert services.default_text("rewind_count", 0.0) == "0"
        assert services.default_text("start_duty", "light") == "light"  # text as it is

    def test_the_defaults_grid_shows_no_raw_floats(self):
        rows = {r["column"]: r["value"] for r in asset.update("HRW-D01", None, None)[7]}
        # regression, not validation: the demo fills HRW-D01's speed with 1434.11 rpm and its efficiency with
        # 81.64 % (shown so before); rounded to whole rpm and one decimal of a percent
        assert rows["rated_speed_rpm"] == "1434" and rows["rated_efficiency_pct"] == "81.6"

    def test_the_defaults_grid_names_each_field_in_words(self):
        # user report: the grid showed raw names (rated_efficiency_pct); it shows the asset register's own
        # words for the column (its description in data/schema/assets.csv, as the template's comment line
        # gives it) with the unit, and the column's heading in the register on hover
        out = asset.update("HRW-D01", None, None)
        fields = {r["column"]: r["field"] for r in out[7]}
        assert fields["rated_efficiency_pct"] == "Nameplate full-load efficiency [%]"
        assert fields["rated_speed_rpm"] == "Nameplate full-load speed [rpm]"
        columns = out[8]
        assert columns[0]["field"] == "field" and columns[0]["headerName"] == "Field"
        assert columns[0]["tooltipField"] == "column"
        assert "column" not in {c["field"] for c in columns}  # the raw name is no column of its own


def test_one_colour_per_option_across_the_asset_charts():
    # KGQ-F01: the cash-flow chart leaves out "Keep as is" (no capital); each option must keep the colour it has
    # on the efficiency chart and the speed chart
    keys = services.option_colour_keys(services.view(None, None))
    assert keys[0] == "keep" and keys[:4] == ["keep", "rewind", "ie3", "ie4"]  # data/defaults/options.csv order
    out = asset.update("KGQ-F01", None, None)
    cash, performance, speed = out[4], out[5], out[6]
    cash_colour = {t.name: t.line.color for t in cash.data if t.mode == "lines"}
    efficiency_colour = {t.name: t.line.color for t in performance.data if t.yaxis == "y" and t.showlegend is not False}
    # (the speed chart lists the options down its side, long names wrapped at spaces)
    speed_colour = {name.replace("<br>", " "): c for name, c in zip(speed.data[0].y, speed.data[0].marker.color)}
    assert "Keep as is" not in cash_colour and len(cash_colour) >= 2
    assert all(cash_colour[name] == efficiency_colour[name] == speed_colour[name] for name in cash_colour)
    colours = figures.option_colour_map(keys)
    assert efficiency_colour["Keep as is"] == colours["keep"]


class TestGridColumns:
    def test_long_option_texts_wrap_and_have_tooltips(self):
        cols = {c["field"]: c for c in asset.option_columns("EUR")}
        for field in ("label", "technology", "speed_remedy"):
            assert cols[field]["tooltipField"] == field and cols[field]["wrapText"] and cols[field]["autoHeight"]
        # the cautions stay on screen (pinned right), counted, their text in the tooltip
        assert cols["cautions_count"]["pinned"] == "right" and cols["cautions_count"]["tooltipField"] == "flags"

    def test_the_options_fit_a_1366_px_window_and_show_every_row(self):
        # the narrowest widths add up to what a 1366 px window leaves the grid: 1366 - 2 x 24 px of page
        # padding (style.css .content) - 15 px page scrollbar - 2 px borders = 1301 px (the grid is as tall as
        # its rows, so it has no vertical scrollbar of its own)
        cols = asset.option_columns("EUR")
        assert sum(c["minWidth"] for c in cols) <= 1366 - 2 * 24 - 15 - 2
        assert {c["field"] for c in cols} == set(asset.OPTION_WIDTHS_PX)
        # only the option's name and its cautions are pinned
        assert [c["field"] for c in cols if c.get("pinned")] == ["label", "cautions_count"]
        # no fixed height: every option row shows (the demo's HRW-P11 has eight; a fixed 500 px hid the eighth)
        grid = next(c for c in asset.layout()._traverse() if getattr(c, "id", None) == asset.OPTIONS)
        assert grid.dashGridOptions["domLayout"] == "autoHeight" and grid.style["height"] == "auto"

    def test_what_the_plan_buys_can_be_read(self):
        cols = {c["field"]: c for c in fleet.table_columns("EUR", "kW")}
        for field in ("plan_option", "best_option"):
            assert cols[field]["tooltipField"] == field and cols[field]["wrapText"] and cols[field]["autoHeight"]

    def test_validation_messages_can_be_read_whole(self):
        from dashboard import components

        cols = {c["field"]: c for c in components.problem_columns()}
        # the value refused, the rule and the hint wrap at the text's own line height, the whole text in a tooltip
        for field in ("value", "rule", "hint"):
            c = cols[field]
            assert c["tooltipField"] == field and c["wrapText"] and c["autoHeight"]
            assert c["cellStyle"]["lineHeight"] == "1.4"


def test_the_performance_note_speaks_of_a_throttle_only_where_a_drive_would_replace_one():
    # KGQ-F01 is damper controlled (throttled) and a drive is among its options: the note says the drive runs a
    # lower load; HRW-D01 is already on a drive (no throttle to replace): the note says only what the curves are
    # drawn against (data/demo/assets.csv, speed_control)
    throttled = asset.update("KGQ-F01", None, None)[12]
    on_drive = asset.update("HRW-D01", None, None)[12]
    assert throttled.startswith("Against today's shaft load.") and "replaces the throttle" in throttled
    assert on_drive == "Against today's shaft load."


def test_the_asset_page_says_what_was_measured_after_the_project(tmp_path_factory, monkeypatch):
    """A case with a verification table: the Asset page's summary carries the asset's row of
    models.verification.verify_savings (hand calculation V1 of docs/derivations/savings-verification.md: 900 kWh
    avoided over 14 days, the baseline adjusted by production)."""
    from test_dashboard_services import write_small_case

    folder = write_small_case(tmp_path_factory.mktemp("cases") / "verified", IDS)
    (folder / "verification.csv").write_text(
        "asset_id,option_id,period,start_date,end_date,energy_kwh,running_h,production\n"
        "HRW-P01,ie4,baseline,2026-01-05,2026-01-18,12000,,40000\n"
        "HRW-P01,ie4,reporting,2026-03-02,2026-03-15,12600,,45000\n", encoding="utf-8")
    eng = services.Engine(upload_root=tmp_path_factory.mktemp("uploads"))
    entry, problems = eng.set_default_case(folder)
    assert entry is not None, problems
    monkeypatch.setattr(services, "_ENGINE", eng)
    summary = asset.update("HRW-P01", None, None)[0]
    said = [c for c in summary if getattr(c, "id", None) == "asset-verified"]
    assert len(said) == 1
    assert said[0].children.startswith("Measured after New IE4 induction motor: 900 kWh avoided over 14 days "
                                       "(the baseline adjusted by production)")
    assert not [c for c in asset.update("KGQ-F01", None, None)[0] if getattr(c, "id", None) == "asset-verified"]


def test_the_end_of_life_says_what_spares_its_group_needs():
    """The end-of-life text names the motor's group of interchangeable motors and its spares, from
    models.spares.spares_table (the same row as spares.csv)."""
    from models.spares import spares_table

    children = asset.end_of_life("HRW-P01", None, None)[1]
    said = [c for c in children if getattr(c, "id", None) == "asset-spares"]
    assert len(said) == 1
    view = services.view(None, None)
    table = spares_table(view.case, view.result())
    row = table[table["asset_ids"].str.split(" ").map(lambda ids: "HRW-P01" in ids)].iloc[0]
    assert f"({row['group']})" in said[0].children and f"about {row['failures_per_yr']:.2f} times a year" in said[0].children
    assert f"{int(row['spares_for_target'])} spare" in said[0].children


def test_the_asset_choice_says_where_the_best_option_breaks_even():
    """The choice line names the best option's break-evens (results' break_even_* columns, in the words of
    models.risk.break_even_words)."""
    from models.risk import break_even_words

    view = services.view(None, None)
    res = view.result().results
    top = res[(res["asset_id"] == "HRW-P01") & res["best_for_asset"]].iloc[0]
    words = break_even_words(top)
    assert words
    summary = asset.update("HRW-P01", None, None)[0]
    choice = [c for c in summary if getattr(c, "id", None) == "asset-choice"][0].children
    assert choice.endswith(f"{top['label']}: {words}")
