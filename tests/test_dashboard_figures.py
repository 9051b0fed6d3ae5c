"""Figure builders: hand-made tables in, the expected traces, values and axis titles (with units) out.

Inputs are written out here, so every expected number is either an input or a unit conversion by
definition (1 MWh = 1000 kWh, 1 % = 0.01).
"""

from __future__ import annotations

import ast
from pathlib import Path

import numpy as np
import pandas as pd
import plotly.graph_objects as go
import pytest

from dashboard import figures

FIGURES_SOURCE = Path(figures.__file__)


def titles(fig: go.Figure) -> dict[str, str]:
    """Axis name -> title text of every axis of a figure."""
    layout = fig.to_plotly_json()["layout"]
    return {k: (v.get("title") or {}).get("text", "") for k, v in layout.items()
            if k.startswith(("xaxis", "yaxis")) and isinstance(v, dict)}


def test_figures_module_never_fetches_data():
    """figures.py imports plotly, numpy and pandas only: no engine, no services, no files."""
    tree = ast.parse(FIGURES_SOURCE.read_text(encoding="utf-8"))
    imported = {(n.module or "") if isinstance(n, ast.ImportFrom) else a.name
                for n in ast.walk(tree) if isinstance(n, (ast.Import, ast.ImportFrom))
                for a in (n.names if isinstance(n, ast.Import) else [n])}
    roots = {name.split(".")[0] for name in imported}
    assert roots <= {"__future__", "numpy", "pandas", "plotly"}


class TestAbatement:
    frame = pd.DataFrame({"project_id": ["A/x", "B/y", "C/z"], "asset_id": ["A", "B", "C"],
                          "abatement_cost_per_t": [-120.0, -10.0, 45.0], "co2_avoided_t_per_yr": [2.0, 5.0, 1.0],
                          "bar_start_t_per_yr": [0.0, 2.0, 7.0]})

    def test_widths_are_tonnes_and_heights_cost_per_tonne(self):
        fig = figures.abatement_curve(self.frame, "EUR")
        bar = fig.data[0]
        assert bar.type == "bar"
        np.testing.assert_allclose(bar.width, [2.0, 5.0, 1.0])      # the tonnes per year given
        np.testing.assert_allclose(bar.x, [1.0, 4.5, 7.5])          # bar start + half its width
        np.testing.assert_allclose(bar.y, [-120.0, -10.0, 45.0])
        assert list(bar.marker.color) == [figures.GAIN, figures.GAIN, figures.COST]

    def test_axis_titles_carry_units(self):
        t = titles(figures.abatement_curve(self.frame, "USD"))
        assert t["xaxis"] == "CO2 avoided, cumulative [t/yr]" and t["yaxis"] == "Cost of abatement [USD/t CO2]"

    def test_the_title_says_which_option_of_each_asset_is_drawn(self):
        # the bars are, per asset, the highest-NPV option among those that avoid CO2 (models.plan.abatement_curve),
        # not the asset's best option, which may avoid none
        title = figures.abatement_curve(self.frame, "EUR").layout.title
        assert title.text == "Abatement cost curve (below zero: saves money)"
        assert title.subtitle.text == "each asset's highest-NPV option that avoids CO2"
        assert "best option" not in title.text + title.subtitle.text

    def test_a_sliver_of_a_bar_does_not_set_the_axis(self):
        # hand: bars of 2, 5 and 1 t/yr set the axis (-120 to 45, padded 8 % of 165 = 13.2); a 0.001 t/yr
        # project at 9,500 EUR/t runs off it and is noted
        frame = pd.concat([self.frame, pd.DataFrame({
            "project_id": ["D/x"], "asset_id": ["D"], "abatement_cost_per_t": [9500.0],
            "co2_avoided_t_per_yr": [0.001], "bar_start_t_per_yr": [8.0]})], ignore_index=True)
        fig = figures.abatement_curve(frame, "EUR")
        np.testing.assert_allclose(fig.layout.yaxis.range, [-133.2, 58.2])
        assert "1 narrow bar runs off the axis (to 9,500 EUR/t)" in fig.layout.annotations[-1].text
        # no sliver: the same span, every bar on it and no note
        plain = figures.abatement_curve(self.frame, "EUR")
        np.testing.assert_allclose(plain.layout.yaxis.range, [-133.2, 58.2])
        assert not plain.layout.annotations

    def test_a_side_of_narrow_bars_only_is_drawn_not_cut_to_a_sliver(self):
        # the demo's shape (user report at 1440 px: the axis stopped just above 0, the costly bars up to about
        # 8,700 EUR/t were a sliver): wide bars all save money, the few that cost avoid almost no CO2. Hand: the
        # tonnes sum to 1,000 + 700 + 2 + 0.15 + 0.06 = 1,702.21 t/yr; 0.2 % of it is 3.4 t/yr, so only the -3,100
        # and -700 bars are wide; the axis spans -3,100 to 8,700 padded 8 % of 11,800 = 944: [-4,044, 9,644]
        frame = pd.DataFrame({"project_id": list("ABCDE"), "asset_id": list("ABCDE"),
                              "abatement_cost_per_t": [-3100.0, -700.0, 120.0, 6800.0, 8700.0],
                              "co2_avoided_t_per_yr": [1000.0, 700.0, 2.0, 0.15, 0.06],
                              "bar_start_t_per_yr": [0.0, 1000.0, 1700.0, 1702.0, 1702.15]})
        fig = figures.abatement_curve(frame, "EUR")
        lo, hi = fig.layout.yaxis.range
        assert hi >= 8700.0 and lo <= -3100.0
        np.testing.assert_allclose([lo, hi], [-4044.0, 9644.0])
        assert not fig.layout.annotations  # no bar runs off the axis
        # the three narrow costly bars (a fraction of a pixel wide) are drawn as stems from zero to their cost,
        # at their bars' centres (1,700 + 2 / 2 = 1,701; 1,702.075; 1,702.18), each with its bar's hover
        (stems,) = [t for t in fig.data if t.name == "narrow bars"]
        assert stems.line.color == figures.COST and stems.showlegend is False
        np.testing.assert_allclose(np.asarray(stems.x, dtype=float).reshape(3, 3)[:, :2],
                                   [[1701.0, 1701.0], [1702.075, 1702.075], [1702.18, 1702.18]])
        np.testing.assert_allclose(np.asarray(stems.y, dtype=float).reshape(3, 3)[:, :2],
                                   [[0.0, 120.0], [0.0, 6800.0], [0.0, 8700.0]])
        assert stems.hovertext[1].startswith("C<br>120 EUR/t")
        # the horizontal axis stays on the tonnes (0 to 1,702.21, padded 0.5 %), not padded for the stems' dots
        np.testing.assert_allclose(fig.layout.xaxis.range, [0.0, 1702.21 * 1.005])
        # no white edge on a narrow bar (it turned the bar a paler shade, one the legend did not explain)
        np.testing.assert_allclose(fig.data[0].marker.line.width, [0.5, 0.5, 0.0, 0.0, 0.0])

    def test_the_two_shades_are_keyed_in_the_legend(self):
        fig = figures.abatement_curve(self.frame, "EUR")
        assert fig.layout.showlegend is True and fig.data[0].showlegend is False
        shown = [t for t in fig.data if t.showlegend is not False]
        assert {t.name: t.marker.color for t in shown} == {"below zero: saves money": figures.GAIN,
                                                             "above zero: costs money": figures.COST}
        assert all(t.hoverinfo == "skip" and list(t.x) == [None] for t in shown)  # no data of their own
        # only the shades drawn are keyed
        saving = figures.abatement_curve(self.frame.iloc[:2], "EUR")
        assert [t.name for t in saving.data if t.showlegend is not False] == ["below zero: saves money"]

    def test_empty_says_so(self):
        fig = figures.abatement_curve(self.frame.iloc[0:0], "EUR")
        assert not fig.data and "No option" in fig.layout.annotations[0].text


class TestAsset:
    def test_lcc_stack(self):
        lcc = pd.DataFrame({"label": ["Keep"] * 4 + ["New"] * 4,
                            "component": ["capital", "residual", "running", "maintenance"] * 2,
                            "pv": [0.0, 0.0, 900.0, 50.0, 300.0, -40.0, 700.0, 40.0]})
        fig = figures.lcc_stack(lcc, "EUR")
        assert [t.name for t in fig.data] == ["capital", "residual", "running", "maintenance"]
        assert fig.layout.barmode == "relative"  # the residual credit stacks below zero
        np.testing.assert_allclose(fig.data[1].y, [0.0, -40.0])
        assert titles(fig)["yaxis"] == "Present value [EUR]"

    def test_cumulative_cash_marks_payback(self):
        curves = pd.DataFrame({"label": ["New"] * 3 + ["Drive"] * 3, "year": [0, 1, 2] * 2,
                               "cumulative_pv": [-100.0, -20.0, 60.0, -50.0, -60.0, -70.0],
                               "payback_yr": [1.25] * 3 + [np.nan] * 3})
        fig = figures.cumulative_cash(curves, "GBP")
        lines = [t for t in fig.data if t.mode == "lines"]
        assert [t.name for t in lines] == ["New", "Drive"]
        marks = [t for t in fig.data if t.mode == "markers"]
        assert len(marks) == 1 and list(marks[0].x) == [1.25] and list(marks[0].y) == [0.0]  # only the option that pays back
        t = titles(fig)
        assert t["xaxis"] == "Year [yr]" and t["yaxis"] == "Cumulative present value [GBP]"

    def test_performance_three_panels_with_units(self):
        load = np.array([25.0, 50.0, 100.0])
        curves = pd.concat([pd.DataFrame({"label": name, "load_pct": load, "efficiency_frac": eff, "power_factor": pf})
                            for name, eff, pf in (("Keep", [0.8, 0.88, 0.9], [0.5, 0.7, 0.85]),
                                                  ("PM", [0.9, 0.94, 0.95], [0.9, 0.95, 0.96]))])
        hours = pd.DataFrame({"load_from_pct": [40.0, 50.0], "load_to_pct": [50.0, 60.0], "hours_per_yr": [1000.0, 3000.0]})
        fig = figures.performance(curves, hours, "shaft load (interval profile)")
        assert len(fig.data) == 2 * 2 + 1 + 1  # efficiency and power factor per option, the lagging key, the hours
        np.testing.assert_allclose(fig.data[0].y, [80.0, 88.0, 90.0])  # fraction shown in percent
        bar = fig.data[-1]
        np.testing.assert_allclose(bar.x, [45.0, 55.0])
        np.testing.assert_allclose(bar.y, [1000.0, 3000.0])
        t = titles(fig)
        assert t["yaxis"] == "Efficiency [%]" and t["yaxis2"] == "Power factor [-]" and t["yaxis3"] == "Hours [h/yr]"
        assert t["xaxis3"].startswith("Today's shaft load [% of rating]")

    def test_leading_power_factor_is_told_apart(self):
        # a wound-field machine supplying kVAr (negative q) at part load, lagging above: two dashes, the sense hovered
        load = np.array([25.0, 50.0, 100.0])
        curves = pd.DataFrame({"label": "WF", "load_pct": load, "efficiency_frac": [0.9, 0.94, 0.96],
                               "power_factor": [0.6, 0.8, 0.95], "q_kvar": [-30.0, -10.0, 5.0]})
        fig = figures.performance(curves, None, "shaft load")
        pf = [t for t in fig.data if t.yaxis == "y2" and t.showlegend is False]
        assert [t.line.dash for t in pf] == ["dot", "dash"]
        lag, lead = pf
        np.testing.assert_allclose(np.asarray(lag.y, dtype=float), [np.nan, np.nan, 0.95])
        np.testing.assert_allclose(np.asarray(lead.y, dtype=float), [0.6, 0.8, np.nan])
        assert "lagging" in lag.hovertemplate and "leading" in lead.hovertemplate

    def test_line_style_key_is_in_the_legend_not_the_axis_title(self):
        # the two-line axis title ran into the neighbouring titles: one line on the axis, the styles in the legend
        curves = pd.DataFrame({"label": "WF", "load_pct": [25.0, 100.0], "efficiency_frac": [0.9, 0.96],
                               "power_factor": [0.6, 0.95], "q_kvar": [-30.0, 5.0]})
        fig = figures.performance(curves, None, "shaft load")
        assert titles(fig)["yaxis2"] == "Power factor [-]"
        key = {t.name: t.line.dash for t in fig.data if t.legendgroup and t.legendgroup.startswith("pf-")}
        assert key == {"dotted: power factor lagging": "dot", "dashed: power factor leading": "dash"}
        # a machine that never leads gets no key for the leading style
        lagging_only = figures.performance(curves.assign(q_kvar=[30.0, 5.0]), None, "shaft load")
        assert [t.name for t in lagging_only.data if t.legendgroup == "pf-leading"] == []

    def test_one_colour_per_option_on_every_chart(self):
        # the cash-flow chart leaves out today's motor (no capital): with the page's one map, each option keeps the
        # colour it has on the efficiency chart instead of taking its neighbour's
        colours = figures.option_colour_map(["keep", "ie4", "pm_drive"])  # the catalogue's order, today's first
        assert colours == {"keep": figures.OPTION_COLOURS[0], "ie4": figures.OPTION_COLOURS[1],
                           "pm_drive": figures.OPTION_COLOURS[2]}
        cash = pd.DataFrame({"option_id": ["ie4"] * 2 + ["pm_drive"] * 2, "label": ["IE4"] * 2 + ["PM drive"] * 2,
                             "year": [0, 1] * 2, "cumulative_pv": [-100.0, 20.0, -300.0, 50.0],
                             "payback_yr": [0.8] * 2 + [np.nan] * 2})
        curves = pd.DataFrame({"option_id": ["keep", "ie4", "pm_drive"], "label": ["Keep", "IE4", "PM drive"],
                               "load_pct": [50.0] * 3, "efficiency_frac": [0.9, 0.93, 0.95], "power_factor": [0.8, 0.82, 0.9]})
        options = pd.DataFrame({"option_id": ["keep", "ie4", "pm_drive"], "label": ["Keep", "IE4", "PM drive"],
                                "today": [True, False, False], "speed_remedy_id": ["none", "none", "speed_control"],
                                "speed_remedy": ["none", "none", "set by a drive (held, or lowered to the duty)"],
                                "mean_speed_rpm": [1490.0, 1494.0, 1300.0], "energy_kwh_per_yr": [1e5, 9.8e4, 7e4]})
        line = {t.name: t.line.color for t in figures.cumulative_cash(cash, "EUR", colours).data if t.mode == "lines"}
        eff = {t.name: t.line.color for t in figures.performance(curves, None, "shaft load", colours).data
               if t.yaxis == "y" and t.showlegend is not False}
        bars = figures.speed_energy(options, colours).data[0]
        assert line == {"IE4": colours["ie4"], "PM drive": colours["pm_drive"]}
        assert eff == {"Keep": colours["keep"], "IE4": colours["ie4"], "PM drive": colours["pm_drive"]}
        assert list(bars.marker.color) == [colours["keep"], colours["ie4"], colours["pm_drive"]]

    def test_speed_energy_by_remedy(self):
        from models.options import speed_remedy_name

        remedy = ["none", "none", "trim_or_pulley", "speed_control"]
        options = pd.DataFrame({"label": ["Keep", "LSPM", "LSPM + trim", "Drive"], "speed_remedy_id": remedy,
                                "speed_remedy": [speed_remedy_name(r) for r in remedy],
                                "mean_speed_rpm": [1470.0, 1500.0, 1470.0, 1300.0],
                                "energy_kwh_per_yr": [100000.0, 104000.0, 95000.0, 70000.0]})
        fig = figures.speed_energy(options)
        energy = [t for t in fig.data if t.xaxis == "x2"]  # options down the side, values across
        got = {y: x for t in energy for x, y in zip(t.x, t.y)}
        assert got == pytest.approx({"Keep": 100.0, "LSPM": 104.0, "LSPM + trim": 95.0, "Drive": 70.0})  # MWh/yr
        assert {t.name for t in fig.data if t.showlegend is not False} == {
            "none (the load follows the speed)", "impeller trim or pulley", "set by a drive (held, or lowered to the duty)"}
        # each remedy its own hatching (the catalogue's code picks it, not the name shown); the colour is the option's
        assert list(fig.data[0].marker.pattern.shape) == ["", "", "/", "x"]
        assert len(set(fig.data[0].marker.color)) == 4
        # one background colour for the hatching (left unset, plotly.js reads the bars' colour list there and
        # warns "Invalid color specifier" in the browser's console for each bar)
        assert all(isinstance(t.marker.pattern.bgcolor, str) for t in fig.data[:2])
        # the legend's keys hatch finer than the bars (at the bars' spacing a 12 px swatch shows one faint line, or
        # none, and reads as an empty box), each with its remedy's shape
        keys = {t.name: t.marker.pattern for t in fig.data if t.showlegend is not False}
        assert {p.shape for p in keys.values()} == {"", "/", "x"}
        assert all(p.size == figures.LEGEND_HATCH_PX < 8 for p in keys.values())
        t = titles(fig)
        assert t["xaxis"] == "Speed change [rpm]" and t["xaxis2"] == "Energy [MWh/yr]"
        # a long option name is wrapped, not written over its neighbours (user report: overlapping labels)
        long = figures.speed_energy(options.assign(label=["Keep as is", "Line-start PM motor",
                                                           "Line-start PM motor + impeller trim or pulley", "Drive"]))
        assert list(long.data[0].y)[2] == "Line-start PM motor +<br>impeller trim or pulley"

    def test_speed_change_against_today_from_zero(self):
        # a 4-pole fan at 1,490 rpm: a lower-slip motor at 1,496 rpm (+6 rpm, +0.40 %), a drive at 1,200 rpm
        # (-290 rpm); hand calculation: 1496 - 1490 = 6, 6 / 1490 = 0.403 %, 1200 - 1490 = -290
        options = pd.DataFrame({"option_id": ["keep", "ie4", "drive"], "label": ["Keep", "IE4", "Drive"],
                                "today": [True, False, False], "speed_remedy_id": ["none", "none", "speed_control"],
                                "speed_remedy": ["none", "none", "set by a drive (held, or lowered to the duty)"],
                                "mean_speed_rpm": [1490.0, 1496.0, 1200.0], "energy_kwh_per_yr": [1e5, 1.01e5, 6e4]})
        fig = figures.speed_energy(options)
        speed = fig.data[0]
        np.testing.assert_allclose(np.asarray(speed.x, dtype=float), [0.0, 6.0, -290.0], atol=1e-9)  # exact differences
        assert speed.orientation == "h"
        assert fig.layout.xaxis.range is None  # the axis is not cut: the bars start at the zero line
        assert any(s.type == "line" and s.x0 == 0 and s.x1 == 0 for s in fig.layout.shapes)
        assert "mean 1,496.0 rpm; today 1,490.0 rpm" in speed.customdata[1] and "+6.0 rpm (+0.40 %)" in speed.customdata[1]
        # no option changes the speed: said in words over the empty panel
        same = figures.speed_energy(options.assign(mean_speed_rpm=1490.0))
        assert "every option runs at today's 1,490 rpm" in same.layout.annotations[-1].text
        # the hatching has one colour (an array there is refused by the browser's chart library: black hatching)
        for bar in fig.data[:2]:
            assert isinstance(bar.marker.pattern.fgcolor, str)


class TestSite:
    index = pd.date_range("2025-03-03", periods=4, freq="h", tz="Europe/Berlin")
    before = pd.DataFrame({"p_kw": [100.0, 120.0, 90.0, 80.0], "q_kvar": [60.0, 70.0, 50.0, 40.0],
                           "power_factor": [0.86, 0.86, 0.87, 0.89]}, index=index)
    after = pd.DataFrame({"p_kw": [90.0, 100.0, 80.0, 70.0], "q_kvar": [10.0, -5.0, 0.0, 5.0],
                          "power_factor": [0.99, 0.998, 1.0, 0.997]}, index=index)

    def test_meter_week(self):
        fig = figures.meter_week({"before": self.before, "after": self.after})
        assert len(fig.data) == 6
        assert [t.name for t in fig.data if t.showlegend] == ["today", "with the plan"]
        np.testing.assert_allclose(fig.data[4].y, [10.0, -5.0, 0.0, 5.0])  # leading kVAr stays negative
        # local wall-clock time on the axis: 00:00 in Berlin, not 23:00 UTC the day before
        assert pd.Timestamp(fig.data[0].x[0]) == pd.Timestamp("2025-03-03 00:00")
        t = titles(fig)
        assert t["yaxis"] == "Active [kW]" and t["yaxis2"] == "Reactive [kVAr]" and t["yaxis3"] == "Power factor [-]"
        assert fig.layout.title.text.endswith("(power factor leading where kVAr < 0)")
        # the power factor's sense follows the kVAr's sign (after: 10, -5, 0, 5 kVAr)
        assert list(fig.data[5].customdata) == ["lagging", "leading", "lagging", "lagging"]
        assert "%{customdata}" in fig.data[5].hovertemplate

    def test_pf_duration(self):
        curve = pd.DataFrame({"scenario": ["before"] * 2 + ["after"] * 2, "hours": [1.0, 2.0] * 2,
                              "power_factor": [0.8, 0.9, 0.95, 0.99]})
        fig = figures.pf_duration(curve)
        assert [t.name for t in fig.data] == ["today", "with the plan"]
        # every hour is on the curve, leading ones too (unsigned), and the axis says so, as the meter chart beside
        # it says "leading where kVAr < 0"
        assert titles(fig) == {"xaxis": "Hours of the year at or below [h]",
                               "yaxis": "Power factor [-]<br>unsigned: leading hours included"}
        # hours the site leads are named in the legend (the curve's power factor is unsigned)
        fig = figures.pf_duration(curve.assign(leading_h=[0.0, 0.0, 120.0, 120.0]))
        assert [t.name for t in fig.data] == ["today", "with the plan (leading 120 h)"]

    def test_monthly_bills_side_by_side_and_stacked(self):
        bills = pd.DataFrame({"month": ["2025-01", "2025-01", "2025-01", "2025-01"],
                              "category": ["energy", "demand", "energy", "demand"],
                              "amount": [1000.0, 300.0, 800.0, 250.0], "scenario": ["before", "before", "after", "after"]})
        fig = figures.monthly_bills(bills, "EUR")
        assert [t.name for t in fig.data] == ["energy", "demand"]
        assert fig.layout.barmode == "relative"
        energy = fig.data[0]
        assert [list(energy.x[0]), list(energy.x[1])] == [["2025-01", "2025-01"], ["today", "plan"]]
        np.testing.assert_allclose(energy.y, [1000.0, 800.0])
        assert titles(fig)["yaxis"] == "Bill [EUR/month]"

    def test_reactive_balance(self):
        balance = pd.DataFrame({"scenario": ["before", "before", "after", "after"],
                                "source": ["Capacitor banks", "Net at the meter"] * 2, "q_kvar": [-150.0, 400.0, -150.0, -20.0]})
        fig = figures.reactive_balance(balance)
        np.testing.assert_allclose(fig.data[1].y, [-150.0, -20.0])
        assert titles(fig)["yaxis"] == "Mean reactive power [kVAr]" and "leading" in fig.layout.title.text


class TestPlanAndRisk:
    by_year = pd.DataFrame({"plan": ["exact", "exact", "rank_order", "rank_order"], "start_yr": [0, 1, 0, 1],
                            "capital": [90.0, 40.0, 80.0, 45.0], "budget": [100.0, 50.0, 100.0, 50.0]})

    def test_plan_by_year_with_budget(self):
        fig = figures.plan_by_year(self.by_year, "EUR")
        assert [t.name for t in fig.data] == ["exact plan", "rank by profitability index", "budget"]
        assert fig.layout.yaxis.rangemode == "nonnegative"  # a plan buying nothing does not show negative capital
        np.testing.assert_allclose(fig.data[2].y, [100.0, 50.0])
        assert titles(fig) == {"xaxis": "Plan year", "yaxis": "Capital [EUR]"}

    def test_plan_years_named_by_their_budget_year(self):
        # with the budget (fiscal) year of each plan year, the bars and the budget marks name it beside the plan year
        named = self.by_year.assign(budget_year=["FY2028", "FY2029", "FY2028", "FY2029"])
        fig = figures.plan_by_year(named, "EUR")
        assert [list(t.x) for t in fig.data] == [["Year 0 (FY2028)", "Year 1 (FY2029)"]] * 3
        assert list(figures.plan_by_year(self.by_year, "EUR").data[0].x) == ["Year 0", "Year 1"]

    def test_plan_by_year_without_budget_draws_no_budget_line(self):
        fig = figures.plan_by_year(self.by_year.assign(budget=np.nan), "EUR")
        assert "budget" not in [t.name for t in fig.data]

    def test_plan_comparison(self):
        fig = figures.plan_comparison(pd.Series({"npv_exact": 1000.0, "npv_greedy": 950.0, "projects_exact": 3.0,
                                                 "projects_greedy": 4.0}), "EUR")
        np.testing.assert_allclose(fig.data[0].y, [1000.0, 950.0])
        assert "4 projects" in fig.data[0].text[1] and titles(fig)["yaxis"] == "NPV at plan start [EUR]"

    def test_plan_comparison_of_two_empty_plans_says_so(self):
        fig = figures.plan_comparison(pd.Series({"npv_exact": 0.0, "npv_greedy": 0.0, "projects_exact": 0,
                                                 "projects_greedy": 0}), "EUR")
        assert not fig.data and "Neither plan holds a project" in fig.layout.annotations[0].text

    def test_tornado_bars_start_at_the_base(self):
        rows = pd.DataFrame({"label": ["Capital", "Energy price"], "npv_at_low": [110.0, 60.0],
                             "npv_at_high": [90.0, 140.0], "base_npv": [100.0, 100.0], "swing": [20.0, 80.0]})
        fig = figures.tornado(rows, "EUR")
        low, high = fig.data
        np.testing.assert_allclose(low.base, [100.0, 100.0])
        np.testing.assert_allclose(np.asarray(low.x) + 100.0, [110.0, 60.0])
        np.testing.assert_allclose(np.asarray(high.x) + 100.0, [90.0, 140.0])
        assert titles(fig)["xaxis"] == ("Fleet NPV of the best options [EUR]<br>centre: best options, no budget,<br>"
                                        "NPV EUR 100")
        # a fleet-sized centre value in the cards' short form, so the line still fits a half-width panel at
        # 1366 px (user report: "... 8,424,191" cut off); 8,424,191 / 1e6 = 8.42 by hand
        big = figures.tornado(rows.assign(base_npv=8424191.0), "EUR")
        assert titles(big)["xaxis"].endswith("no budget,<br>NPV EUR 8.42 M")
        for f in (fig, big):
            assert max(len(line) for line in titles(f)["xaxis"].split("<br>")) <= 60  # fits a half-width panel
        assert not fig.layout.annotations  # nothing written over the legend

    def test_risk_ranges_top_n(self):
        rows = pd.DataFrame({"project_id": [f"A{i}/x" for i in range(30)],
                             "npv_p10": np.arange(30.0), "npv_p50": np.arange(30.0) + 5, "npv_p90": np.arange(30.0) + 9})
        fig = figures.risk_ranges(rows, "EUR", top=10)
        bar, p50 = fig.data
        assert len(bar.y) == 10
        np.testing.assert_allclose(bar.x, [9.0] * 10)   # P90 - P10 of the inputs
        assert titles(fig)["xaxis"] == "NPV [EUR]"
        named = rows.assign(asset_id=[f"A{i}" for i in range(30)], label="Add a drive")
        assert list(figures.risk_ranges(named, "EUR", top=2).data[0].y) == ["A1: Add a drive", "A0: Add a drive"]  # first two rows, largest at the top

    def test_fleet_npv_histogram_marks_percentiles(self):
        draws = np.arange(1.0, 101.0)  # 1..100
        fig = figures.fleet_npv_histogram(draws, "EUR")
        assert len(fig.data) == 1 and len(fig.data[0].x) == 100
        marks = sorted(shape.x0 for shape in fig.layout.shapes)
        # numpy percentile, linear rule, by hand: P10 = 1 + 0.1 * 99 = 10.9, P50 = 50.5, P90 = 90.1
        np.testing.assert_allclose(marks, [10.9, 50.5, 90.1])
        # the marks' labels in three significant figures (user report: "P10 6,770,098" too many digits)
        assert [a.text for a in fig.layout.annotations] == ["P10 EUR 11", "P50 EUR 50", "P90 EUR 90"]
        fleet = figures.fleet_npv_histogram(draws * 1e5, "EUR")  # P10 = 1.09e6, P50 = 5.05e6, P90 = 9.01e6 by hand
        assert [a.text for a in fleet.layout.annotations] == ["P10 EUR 1.09 M", "P50 EUR 5.05 M", "P90 EUR 9.01 M"]
        assert "P(NPV > 0) = 100 %" in fig.layout.title.text and titles(fig)["xaxis"] == "Fleet NPV [EUR]"

    def test_plan_npv_histogram_and_tornado_name_the_plan(self):
        draws = np.linspace(-1.0, 9.0, 101)
        fig = figures.fleet_npv_histogram(draws, "EUR", scope="plan")
        assert fig.layout.title.text.startswith("Plan NPV over 101 draws") and "under the budget" in fig.layout.title.text
        rows = pd.DataFrame({"label": ["a"], "npv_at_low": [1.0], "npv_at_high": [3.0], "base_npv": [2.0], "swing": [2.0]})
        assert "centre: the plan under the budget,<br>NPV EUR 2" in figures.tornado(rows, "EUR", scope="plan").layout.xaxis.title.text
        assert "centre: best options, no budget" in figures.tornado(rows, "EUR").layout.xaxis.title.text
        ranges = pd.DataFrame({"project_id": ["A/x"], "npv_p10": [1.0], "npv_p50": [2.0], "npv_p90": [3.0]})
        assert "own start" in figures.risk_ranges(ranges, "EUR", scope="plan").layout.xaxis.title.text
        assert figures.risk_ranges(ranges, "EUR").layout.xaxis.title.text == "NPV [EUR]"

    def test_fleet_npv_histogram_empty(self):
        assert not figures.fleet_npv_histogram(np.zeros(0), "EUR").data

    @pytest.mark.parametrize("builder", [figures.tornado, figures.risk_ranges])
    def test_empty(self, builder):
        assert not builder(pd.DataFrame(), "EUR").data


def test_uncertainty_table_shows_probabilities_in_per_cent():
    """P(NPV > 0) and P(payback <= 3 yr) are held as fractions (0-1) and shown in whole per cent (user report:
    "P(NPV > 0) [-] 1.00"); the formatter multiplies by 100 (0.973 -> 97, by hand)."""
    from dashboard import app  # noqa: F401  (the pages register themselves with the app)
    from dashboard.pages import risk

    cols = {c["field"]: c for c in risk.columns("EUR")}
    for field, header in (("prob_npv_positive_frac", "P(NPV > 0) [%]"),
                          ("prob_payback_within_target_frac", "P(simple payback <= 3 yr) [%]")):
        assert cols[field]["headerName"] == header
        assert "d3.format(',.0f')(100 * params.value)" in cols[field]["valueFormatter"]["function"]


def test_option_colours_stay_apart():
    """The eleven options of the default catalogue get colours at least 55 apart in RGB (Euclidean, 0-255 per
    channel; computed by hand from the hex codes: the closest pair, #cc6677 and #aa4499, is 59 apart).
    A user could not tell 'Rewind' from 'Add a drive' with the earlier palette (#237a87 / #3e9c8c: 44)."""
    import itertools

    def rgb(code: str) -> tuple[int, int, int]:
        return tuple(int(code[i:i + 2], 16) for i in (1, 3, 5))

    colours = figures.OPTION_COLOURS[:11]
    assert len(set(colours)) == 11
    closest = min(sum((a - b) ** 2 for a, b in zip(rgb(x), rgb(y))) ** 0.5 for x, y in itertools.combinations(colours, 2))
    assert closest >= 55


@pytest.mark.parametrize("name, title", [("exact plan", "Plan NPV: the exact plan against rank order"),
                                         ("best plan found", "Plan NPV: the best plan found against rank order")])
def test_plan_comparison_title_reads_as_english(name, title):
    """The title names the plan once, whatever the plan is called (user report: "best plan found plan")."""
    fig = figures.plan_comparison(pd.Series({"npv_exact": 2.0, "npv_greedy": 1.0, "projects_exact": 2, "projects_greedy": 1}), "EUR",
                                  exact_name=name)
    assert fig.layout.title.text == title


def test_abatement_hover_names_asset_and_option_in_words():
    """The hover names a bar as the tables do ("A1: PM motor on a drive"), not by the internal project key
    (user report: "HRW-P21/pm_drive"); without labels it falls back to the key."""
    frame = pd.DataFrame({"project_id": ["A1/pm_drive"], "asset_id": ["A1"], "option_id": ["pm_drive"],
                          "abatement_cost_per_t": [-100.0], "co2_avoided_t_per_yr": [5.0], "bar_start_t_per_yr": [0.0]})
    named = figures.abatement_curve(frame.assign(label="PM motor on a drive"), "EUR")
    assert named.data[0].hovertext[0].startswith("A1: PM motor on a drive<br>")
    assert figures.abatement_curve(frame, "EUR").data[0].hovertext[0].startswith("A1/pm_drive<br>")


def test_cards_and_labels_write_money_alike():
    """The cards (components.fmt_money) and the figures' labels (figures.money_short) share one short form;
    values worked by hand: 1,250,000 / 1e6 = 1.25 M, 48,213 / 1e3 = 48.2 k."""
    from dashboard import components

    assert components.fmt_money(1.25e6, "EUR") == figures.money_short(1.25e6, "EUR") == "EUR 1.25 M"
    assert components.fmt_money(48213.0, "EUR") == "EUR 48.2 k" and components.fmt_money(950.0, "EUR") == "EUR 950"
    assert components.fmt_money(None, "EUR") == "-" and components.fmt_money(float("nan"), "EUR") == "-"
    assert components.fmt_money(1.25e6, "EUR", compact=False) == "EUR 1,250,000"


class TestEndOfLife:
    """One asset's end-of-life strategies: inputs written out, labels worked by hand (1,000 < 1e4: whole units)."""

    strategies = pd.DataFrame({"label": ["Replace now", "Replace at failure", "Rewind at failure"],
                               "cost_pv": [1000.0, 900.0, 25000.0], "cheapest": [False, True, False]})

    def test_one_horizontal_bar_per_strategy_the_cheapest_marked_in_words_and_colour(self):
        fig = figures.end_of_life_costs(self.strategies, "EUR")
        bar = fig.data[0]
        assert len(fig.data) == 1 and bar.type == "bar" and bar.orientation == "h"
        assert list(bar.y) == ["Replace now", "Replace at failure", "Rewind at failure"]
        np.testing.assert_allclose(bar.x, [1000.0, 900.0, 25000.0])
        assert list(bar.marker.color) == [figures.BEFORE, figures.AFTER, figures.BEFORE]
        assert list(bar.text) == ["EUR 1,000", "EUR 900 · cheapest", "EUR 25.0 k"]  # 25,000 / 1e3 = 25.0 k
        assert fig.layout.yaxis.autorange == "reversed"  # first strategy on top

    def test_axis_title_carries_the_currency(self):
        assert titles(figures.end_of_life_costs(self.strategies, "USD"))["xaxis"] == "Expected present cost [USD]"

    def test_nothing_to_draw_says_why(self):
        fig = figures.end_of_life_costs(self.strategies.iloc[0:0], "EUR", "Not available: no rewind option.")
        assert not fig.data and fig.layout.annotations[0].text == "Not available: no rewind option."
        assert figures.end_of_life_costs(None, "EUR").layout.annotations[0].text == "No end-of-life comparison."


def test_the_lcc_figure_draws_every_component_the_engine_writes():
    from models.scenario import LCC_COMPONENTS

    assert tuple(figures.LCC_COLOURS) == LCC_COMPONENTS


def test_energy_against_bills_draws_each_billed_month_in_mwh():
    # two hand-written months: billed 1,200 and 1,000 MWh, modelled 1,100 and 1,050 MWh; only energy rows are drawn
    months = pd.DataFrame({"site_id": ["S"] * 3, "month": ["2024-02", "2024-01", "2024-01"],
                           "quantity": ["energy_kwh", "energy_kwh", "amount"], "unit": ["kWh", "kWh", "currency"],
                           "modelled": [1.05e6, 1.1e6, 5.0], "billed": [1.0e6, 1.2e6, 6.0], "difference_pct": [5.0, -8.3, -16.7]})
    fig = figures.energy_against_bills(months)
    billed, modelled = fig.data
    assert list(billed.x) == ["2024-01", "2024-02"] and list(billed.y) == [1200.0, 1000.0]
    assert list(modelled.y) == [1100.0, 1050.0]
    empty = figures.energy_against_bills(months.iloc[0:0])
    assert not empty.data and "No bills in the case" in empty.layout.annotations[0].text


# ---------------------------------------------------------------------------------------------------
# Audit at 1440 x 900 and 1024 x 768 (demo case): clipped text, hidden data, number formats
# ---------------------------------------------------------------------------------------------------
#: The end-of-life message of the demo's KGQ-CR01 (1,600 kW), the one the audit found cut at both ends.
LONG_MESSAGE = ("No end-of-life comparison for KGQ-CR01: no new induction motor of the catalogue fits it, so there "
                "is no replacement to compare.")


def annotation_lines(fig: go.Figure) -> list[str]:
    """Every line of every annotation of a figure."""
    return [line for a in fig.layout.annotations for line in (a.text or "").split("<br>")]


class TestMessageFigure:
    def test_a_long_message_is_wrapped_whole(self):
        fig = figures.message_figure(LONG_MESSAGE)
        (note,) = fig.layout.annotations
        lines = note.text.split("<br>")
        assert len(lines) >= 2 and max(map(len, lines)) <= figures.MESSAGE_LINE_CHARS == 60
        assert note.text.replace("<br>", " ") == LONG_MESSAGE  # nothing lost: breaks at spaces only
        assert figures.message_figure("Choose an asset.").layout.annotations[0].text == "Choose an asset."

    def test_no_axis_grid_or_zero_line_is_drawn(self):
        fig = figures.message_figure(LONG_MESSAGE)
        assert not fig.data
        for axis in (fig.layout.xaxis, fig.layout.yaxis):
            assert axis.visible is False and axis.showgrid is False and axis.zeroline is False
            assert axis.showline is False and axis.showticklabels is False
        # no axes to make room for: the text is centred on the whole panel
        assert fig.layout.margin.l == fig.layout.margin.r

    def test_many_lines_raise_the_height(self):
        # 6 lines of 20 px each and 48 px of margins: 168 px, under the 220 asked; 16 lines need 368
        assert figures.message_figure("word " * 60, height=220).layout.height == 220
        tall = figures.message_figure(" ".join(["a" * 55] * 16), height=220)
        assert tall.layout.annotations[0].text.count("<br>") == 15 and tall.layout.height == 48 + 20 * 17

    @pytest.mark.parametrize("build", [
        lambda: figures.end_of_life_costs(None, "EUR", LONG_MESSAGE),
        lambda: figures.plan_comparison(pd.Series({"npv_exact": 0.0, "npv_greedy": 0.0, "projects_exact": 0,
                                                   "projects_greedy": 0}), "EUR"),
        lambda: figures.abatement_curve(pd.DataFrame(), "EUR"),
        lambda: figures.lcc_stack(pd.DataFrame(), "EUR"),
        lambda: figures.cumulative_cash(pd.DataFrame(), "EUR"),
        lambda: figures.speed_energy(pd.DataFrame()),
        lambda: figures.monthly_bills(pd.DataFrame(), "EUR"),
        lambda: figures.energy_against_bills(pd.DataFrame()),
        lambda: figures.tornado(pd.DataFrame(), "EUR"),
        lambda: figures.risk_ranges(pd.DataFrame(), "EUR"),
        lambda: figures.fleet_npv_histogram(np.zeros(0), "EUR"),
    ], ids=["end_of_life", "plan_comparison", "abatement", "lcc", "cash", "speed", "bills", "energy_bills", "tornado",
            "risk_ranges", "histogram"])
    def test_every_empty_chart_says_why_in_lines_that_fit(self, build):
        fig = build()
        assert not fig.data and fig.layout.annotations
        assert max(map(len, annotation_lines(fig))) <= figures.MESSAGE_LINE_CHARS
        assert fig.layout.xaxis.visible is False and fig.layout.yaxis.visible is False


def test_end_of_life_without_a_comparison_is_not_cut():
    """KGQ-CR01: "comparison for KGQ-CR01: ... there is no repla" was all a 1,600 kW asset's panel showed."""
    fig = figures.end_of_life_costs(pd.DataFrame(columns=["label", "cost_pv", "cheapest"]), "EUR", LONG_MESSAGE)
    lines = annotation_lines(fig)
    assert lines[0].startswith("No end-of-life comparison for KGQ-CR01") and lines[-1].endswith("to compare.")
    assert max(map(len, lines)) <= 60


class TestTornadoTitleFits:
    # the demo's labels (models.risk.TORNADO_LABELS), the longest 63 characters
    rows = pd.DataFrame({"label": ["Capital cost (x0.8 to x1.2)",
                                   "New machines' losses (-100 to +100 % of the IEC tolerance band)",
                                   "Electricity price (x0.8 to x1.2)"],
                         "npv_at_low": [9.1e6, 8.0e6, 6.2e6], "npv_at_high": [7.5e6, 8.6e6, 10.4e6],
                         "base_npv": [8312224.0] * 3, "swing": [1.6e6, 0.6e6, 4.2e6]})

    @pytest.mark.parametrize("scope, centre", [("plan", "centre: the plan under the budget,"),
                                               ("best", "centre: best options, no budget,")])
    def test_the_centre_value_has_a_line_of_its_own(self, scope, centre):
        # user report at 1440 px: "centre: the plan under the budget, EUR 8" (the end cut off); 8,312,224 / 1e6 =
        # 8.31 M by hand
        fig = figures.tornado(self.rows, "EUR", scope)
        lines = titles(fig)["xaxis"].split("<br>")
        assert lines[1:] == [centre, "NPV EUR 8.31 M"]
        assert max(map(len, lines)) <= 36  # about 230 px at 12 px: inside the narrowest half-width plot area
        assert fig.layout.margin.b >= 100  # room for the ticks and three title lines

    def test_long_labels_are_wrapped_to_leave_the_bars_room(self):
        fig = figures.tornado(self.rows, "EUR")
        labels = list(fig.data[0].y)
        assert labels[1] == "New machines' losses (-100 to +100 %<br>of the IEC tolerance band)"
        assert max(len(line) for label in labels for line in label.split("<br>")) <= figures.TORNADO_LABEL_CHARS
        assert labels[0] == "Capital cost (x0.8 to x1.2)"


class TestEfficiencyWithoutOutput:
    """A fan throttled by a damper today (the demo's KGQ-F01): a drive slows it instead, and below about 38 % of
    today's shaft load the slowed fan moves no air against its system's pressure (shaft_p_kw 0, the drive's own
    losses still drawn). The engine's efficiency there is 0: drawn as a line along zero it read as a broken model."""

    load = np.array([25.0, 35.0, 37.5, 50.0, 100.0])
    curves = pd.concat([
        pd.DataFrame({"option_id": "keep", "label": "Keep as is", "load_pct": load,
                      "shaft_p_kw": [33.0, 46.2, 49.5, 66.0, 132.0], "p_in_kw": [36.4, 49.9, 53.3, 70.3, 140.0],
                      "efficiency_frac": [0.906, 0.925, 0.929, 0.938, 0.943], "power_factor": [0.6, 0.7, 0.72, 0.8, 0.86]}),
        pd.DataFrame({"option_id": "pm_drive", "label": "PM motor on a drive", "load_pct": load,
                      "shaft_p_kw": [0.0, 0.0, 0.0009, 1.84, 60.0], "p_in_kw": [0.52, 0.52, 0.524, 2.65, 63.0],
                      "efficiency_frac": [0.0, 0.0, 0.0017, 0.694, 0.952], "power_factor": [0.9, 0.9, 0.9, 0.93, 0.96]}),
    ])  # (index 0-4 twice, as pandas.concat leaves it)

    def efficiency(self, fig: go.Figure) -> dict[str, np.ndarray]:
        return {t.name: np.asarray(t.y, dtype=float) for t in fig.data if t.yaxis == "y" and t.showlegend is not False}

    def test_no_efficiency_is_drawn_where_no_flow_is_delivered(self):
        eff = self.efficiency(figures.performance(self.curves, None, "shaft load"))
        drive = eff["PM motor on a drive"]
        assert np.isnan(drive[:2]).all()  # 25 and 35 %: no output, a gap
        np.testing.assert_allclose(drive[2:], [0.17, 69.4, 95.2])  # 0.0017, 0.694, 0.952 in per cent
        assert not (drive == 0.0).any()
        np.testing.assert_allclose(eff["Keep as is"], [90.6, 92.5, 92.9, 93.8, 94.3])  # delivers at every load

    def test_a_note_says_below_which_load_no_flow_is_delivered(self):
        fig = figures.performance(self.curves, None, "shaft load")
        (note,) = fig.layout.annotations
        assert note.text == "no flow delivered<br>below 38 % load"  # the first load it delivers at: 37.5 %
        assert (note.xref, note.yref) == ("x domain", "y domain")  # in the efficiency panel
        assert "PM motor on a drive" in note.hovertext

    def test_without_the_shaft_power_a_zero_efficiency_is_no_output(self):
        eff = self.efficiency(figures.performance(self.curves.drop(columns="shaft_p_kw"), None, "shaft load"))
        assert np.isnan(eff["PM motor on a drive"][:2]).all()

    def test_every_load_delivering_draws_no_note(self):
        keep = self.curves[self.curves["option_id"] == "keep"]
        fig = figures.performance(keep, None, "shaft load")
        assert not fig.layout.annotations and not np.isnan(self.efficiency(fig)["Keep as is"]).any()

    def test_options_that_start_at_different_loads_give_the_span(self):
        other = self.curves[self.curves["option_id"] == "pm_drive"].assign(
            option_id="add_drive", label="Add a drive", shaft_p_kw=[0.0, 0.0, 0.0, 1.5, 58.0],
            efficiency_frac=[0.0, 0.0, 0.0, 0.5, 0.93])
        fig = figures.performance(pd.concat([self.curves, other]), None, "shaft load")
        assert fig.layout.annotations[0].text == "no flow delivered<br>below 38-50 % load"


class TestNumberFormats:
    """Money on bars and markers in the cards' short form ("EUR 8.31 M"), never full digits ("EUR 8,312,224"),
    and a space before the per cent sign ("88 %"), as the project writes them."""

    #: Full-digit money, either side of the currency: "EUR 8,312,224" or "8,312,224 EUR".
    FULL_DIGITS = r"([A-Z]{3} -?\d{1,3}(,\d{3})+)|(\d{1,3}(,\d{3})+ [A-Z]{3})"

    @staticmethod
    def strings(fig: go.Figure) -> list[str]:
        """The text a reader can see on a figure or in its hovers."""
        out = []

        def walk(value):
            if isinstance(value, str):
                out.append(value)
            elif isinstance(value, dict):
                for v in value.values():
                    walk(v)
            elif isinstance(value, (list, tuple, np.ndarray)):
                for v in value:
                    walk(v)

        data = fig.to_plotly_json()
        walk(data["data"])
        walk({k: v for k, v in data["layout"].items() if k != "template"})
        return out

    def figures_with_money(self) -> list[go.Figure]:
        big = 8312224.0
        return [
            figures.plan_comparison(pd.Series({"npv_exact": big, "npv_greedy": 7.9e6, "projects_exact": 12,
                                               "projects_greedy": 11}), "EUR"),
            figures.plan_by_year(pd.DataFrame({"plan": ["exact", "rank_order"], "start_yr": [0, 0],
                                               "capital": [big, 2.5e5], "budget": [9e6, 9e6]}), "EUR"),
            figures.tornado(TestTornadoTitleFits.rows, "EUR"),
            figures.risk_ranges(pd.DataFrame({"project_id": ["A/x"], "npv_p10": [1.2e6], "npv_p50": [big],
                                              "npv_p90": [9.9e6]}), "EUR"),
            figures.lcc_stack(pd.DataFrame({"label": ["Keep"], "component": ["running"], "pv": [big]}), "EUR"),
            figures.cumulative_cash(pd.DataFrame({"label": ["New"] * 2, "year": [0, 1], "cumulative_pv": [-big, 2.5e5],
                                                  "payback_yr": [np.nan] * 2}), "EUR"),
            figures.monthly_bills(pd.DataFrame({"month": ["2025-01"], "category": ["energy"], "amount": [312224.0],
                                                "scenario": ["before"]}), "EUR"),
            figures.end_of_life_costs(pd.DataFrame({"label": ["Replace now"], "cost_pv": [big], "cheapest": [True]}), "EUR"),
        ]

    def test_plan_bars_are_labelled_in_the_short_form(self):
        # user report: "EUR 8,312,224" on the plan bar; 8,312,224 / 1e6 = 8.31 M, 7,900,000 / 1e6 = 7.90 M by hand
        fig = figures.plan_comparison(pd.Series({"npv_exact": 8312224.0, "npv_greedy": 7.9e6, "projects_exact": 12,
                                                 "projects_greedy": 11}), "EUR")
        assert list(fig.data[0].text) == ["EUR 8.31 M<br>12 projects", "EUR 7.90 M<br>11 projects"]
        assert list(fig.data[0].customdata) == ["EUR 8.31 M", "EUR 7.90 M"]

    def test_no_money_in_full_digits(self):
        import re

        for fig in self.figures_with_money():
            found = [s for s in self.strings(fig) if re.search(self.FULL_DIGITS, s)]
            assert not found, (fig.layout.title.text, found)

    def test_hovers_of_bars_and_markers_say_the_short_form(self):
        # 250,000 / 1e3 = 250.0 k; 1,200,000 / 1e6 = 1.20 M by hand
        plan = figures.plan_by_year(pd.DataFrame({"plan": ["exact"], "start_yr": [0], "capital": [2.5e5],
                                                  "budget": [1.2e6]}), "EUR")
        assert list(plan.data[0].customdata) == ["EUR 250.0 k"] and "%{customdata}" in plan.data[0].hovertemplate
        assert list(plan.data[-1].customdata) == ["EUR 1.20 M"]
        ranges = figures.risk_ranges(pd.DataFrame({"project_id": ["A/x"], "npv_p10": [1.2e6], "npv_p50": [2.5e5],
                                                   "npv_p90": [8312224.0]}), "EUR")
        assert [list(r) for r in ranges.data[0].customdata] == [["EUR 1.20 M", "EUR 8.31 M"]]
        assert list(ranges.data[1].customdata) == ["EUR 250.0 k"]

    def test_per_cent_is_written_with_a_space(self):
        import re

        histogram = figures.fleet_npv_histogram(np.linspace(-1.0, 9.0, 101), "EUR")
        # 90 of the 101 draws are above 0 (0.1 to 9.0): 90 / 101 = 89.1 % by hand
        assert "P(NPV > 0) = 89 %" in histogram.layout.title.text
        curves = TestEfficiencyWithoutOutput.curves
        for fig in (histogram, figures.performance(curves, None, "shaft load"), *self.figures_with_money()):
            assert not [s for s in self.strings(fig) if re.search(r"\d%", s)]
