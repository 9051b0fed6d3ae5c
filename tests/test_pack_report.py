"""The capital-request report and decision records as files: contents, escaping, scope, safe writing.

Expected numbers come from the engine's result tables (the pack must show them), read directly in the
test; sections and cautions follow the capital-request checklist in docs/pack.md.
"""

from __future__ import annotations

import dataclasses
import html as htmllib
import re
import warnings

import numpy as np
import pandas as pd
import pytest
from plotly.offline import get_plotlyjs

from models import scenario
from models.pack import REPORT_NAME, WORKBOOK_NAME, PackWarning, write_pack
from models.pack.decision_record import record_file_name
from models.wording import counted
from test_pack_workbook import INJECTION_AT, INJECTION_HTML, INJECTION_HYPERLINK, build_case

ESCAPED_HTML = "&lt;script&gt;alert(1)&lt;/script&gt; &amp; &#34;pump&#34;"


@pytest.fixture(scope="module")
def small(tmp_path_factory):
    case = build_case(tmp_path_factory.mktemp("case"),
                      descriptions={"F1": INJECTION_HYPERLINK, "C1": INJECTION_AT, "P1": INJECTION_HTML})
    return case, scenario.run(case, case.finance, with_risk=True)


@pytest.fixture(scope="module")
def asset_pack(small, tmp_path_factory):
    case, result = small
    out = tmp_path_factory.mktemp("pack")
    paths = write_pack(case, result, out, assets=["P1", "F1", "C1"], plan=False)
    return out, paths


@pytest.fixture(scope="module")
def plan_pack(small, tmp_path_factory):
    case, result = small
    out = tmp_path_factory.mktemp("plan")
    paths = write_pack(case, result, out)
    return out, paths


def text(path) -> str:
    return path.read_text(encoding="utf-8")


def money(value: float) -> str:
    """The report's money format: currency code, then thousands separators, no decimals."""
    return f"EUR {value:,.0f}"


def without_plan_uncertainty(result):
    """The run as an older result: the best options' tornado and Monte Carlo, not the plan's."""
    return dataclasses.replace(result, plan_tornado=pd.DataFrame(), plan_risk=pd.DataFrame(),
                               plan_npv_draws=np.zeros(0))


def monte_carlo_table(ctx) -> list[dict[str, str]]:
    """Section 6's per-project table as {header: cell text} rows."""
    return [dict(zip(ctx["mc_headers"], (c["text"] for c in r["cells"]))) for r in ctx["mc_rows"]]


def project_name(result, asset_id: str, option_id: str) -> str:
    """How the report names a project: asset, then the option's label (result.results)."""
    res = result.results
    return f"{asset_id}: {res.loc[res['option_id'] == option_id, 'label'].iloc[0]}"


class TestFiles:
    def test_files_written(self, asset_pack):
        out, paths = asset_pack
        names = [p.relative_to(out).as_posix() for p in paths]
        assert names == [WORKBOOK_NAME, REPORT_NAME, "decision-records/P1.html", "decision-records/F1.html",
                         "decision-records/C1.html"]
        assert all(p.is_file() and p.stat().st_size > 0 for p in paths)

    def test_no_partial_files_left(self, asset_pack):
        out, _ = asset_pack
        assert not [p for p in out.rglob("*") if p.name.endswith(".part")]

    def test_plan_scope_covers_the_plan_assets(self, plan_pack, small):
        out, paths = plan_pack
        _, result = small
        records = sorted(p.stem for p in paths if p.parent.name == "decision-records")
        assert records == sorted(result.plan["asset_id"])

    def test_same_run_same_report(self, small, plan_pack, tmp_path):
        case, result = small
        write_pack(case, result, tmp_path)
        assert (tmp_path / REPORT_NAME).read_bytes() == (plan_pack[0] / REPORT_NAME).read_bytes()

    def test_unknown_asset_raises(self, small, tmp_path):
        case, result = small
        with pytest.raises(ValueError, match="unknown asset"):
            write_pack(case, result, tmp_path, assets=["NOPE"], plan=False)
        assert not list(tmp_path.iterdir())  # nothing written

    def test_record_file_names_stay_inside(self):
        assert record_file_name("../P 101") == "P_101.html"
        assert record_file_name("...") == "asset.html"
        assert record_file_name("P1", taken={"p1.html"}) == "P1-2.html"

    def test_odd_asset_id_written_inside_the_folder(self, tmp_path):
        case = build_case(tmp_path / "case", ids={"C1": "..C 1"})
        result = scenario.run(case, case.finance, with_risk=False)
        out = tmp_path / "out"
        paths = write_pack(case, result, out, assets=["..C 1"], plan=False)
        assert all(p.resolve().is_relative_to(out.resolve()) for p in paths)
        assert (out / "decision-records" / "C_1.html").is_file()

    def test_pdf_skipped_without_a_browser(self, small, tmp_path, monkeypatch):
        import models.pack.pdf as pdf

        case, result = small
        monkeypatch.setattr(pdf, "CHROMIUM_PATH", str(tmp_path / "no-such-browser"))
        notes: list[str] = []
        with pytest.warns(PackWarning, match="PDF skipped"):
            paths = write_pack(case, result, tmp_path / "out", pdf=True, messages=notes)
        assert not (tmp_path / "out" / "capital-request.pdf").exists()
        assert (tmp_path / "out" / REPORT_NAME) in paths and "no Chromium" in notes[0]


class TestReportIsSelfContained:
    def test_plotly_inlined_once(self, asset_pack):
        html = text(asset_pack[0] / REPORT_NAME)
        head = get_plotlyjs()[:400]  # the bundle's own banner, from the plotly package
        assert html.count(head) == 1
        assert html.index(head) < html.index("</head>")

    def test_no_external_reference(self, asset_pack):
        html = text(asset_pack[0] / REPORT_NAME)
        ours = html.replace(get_plotlyjs(), "")  # our own markup, charts and data
        assert not re.search(r"""(src|href)\s*=\s*["']?\s*(https?:)?//""", ours, re.I)
        assert not re.search(r"<script[^>]+src=", ours, re.I)
        assert "@import" not in ours and "url(" not in ours
        assert not re.search(r"<link[^>]+stylesheet", ours, re.I)

    def test_one_chart_div_per_figure(self, asset_pack):
        html = text(asset_pack[0] / REPORT_NAME)
        ids = re.findall(r'<div id="(chart-[a-z-]+)" class="plotly-graph-div"', html)
        assert len(ids) == len(set(ids)) == 7
        assert html.count("Plotly.newPlot(") == 7


class TestReportContents:
    def test_sections(self, asset_pack):
        html = text(asset_pack[0] / REPORT_NAME)
        # the capital-request checklist (docs/pack.md): every section present
        for heading in ("Executive summary", "Scope and assets", "Options compared", "Savings by component",
                        "Cash flow", "Sensitivity and Monte Carlo", "Fleet plan by year",
                        "Risks and assumptions register", "Measurement and verification plan", "Emissions", "Cautions"):
            assert re.search(rf"<h2[^>]*>\d+\. {heading}</h2>", html), heading

    def test_cautions(self, asset_pack):
        html = text(asset_pack[0] / REPORT_NAME)
        for phrase in ("Planning estimates only", "qualified persons", "local electrical codes", "the utility",
                       "generate voltage at their terminals whenever the shaft turns", "Capacitors store charge",
                       "never connect capacitors on a drive output".capitalize(), "torsional pulsation", "NPSH margin",
                       "detuning reactors", "hazardous (Ex) area"):
            assert phrase in html, phrase

    def test_savings_say_taxes_are_included_and_the_cash_flow_matches_the_headline(self, asset_pack):
        html = text(asset_pack[0] / REPORT_NAME)
        assert "its taxes and levies included" in html
        assert "The last cumulative discounted value is the NPV of section 1" in html
        assert '"(several)": the flows change sign more than once' in html.replace("&#34;", '"').replace("&quot;", '"')

    def test_appendix_names_options_by_label_not_by_id(self, asset_pack, small):
        case, _ = small
        html = text(asset_pack[0] / REPORT_NAME)
        appendix = html[html.index('id="appendix"'):]
        cells = set(re.findall(r"<td[^>]*>([^<]*)</td>", appendix))
        ids = set(case.options["option_id"].astype(str))
        assert not cells & ids, sorted(cells & ids)
        assert cells & set(case.options["label"].astype(str))

    def test_user_text_escaped(self, asset_pack):
        html = text(asset_pack[0] / REPORT_NAME)
        assert INJECTION_HTML not in html and "<script>alert(1)" not in html
        assert ESCAPED_HTML in html
        assert "=HYPERLINK(&#34;http://x&#34;,&#34;y&#34;)" in html

    def test_headline_capital_is_the_plan_capital(self, plan_pack, small):
        _, result = small
        html = text(plan_pack[0] / REPORT_NAME)
        # engine: the exact plan's capital, the whole of the plan-scope pack
        assert f'<div class="value">{money(result.plan["capital"].sum())}</div>' in html

    def test_headline_npv_is_the_plans_npv_with_repriced_projects(self, demo_run_physics):
        # the demo's plan keeps reactive projects at the share of their saving they add: the headline is the
        # plan's NPV at its start (plan.csv), not the projects' NPVs priced alone
        from models.pack import content

        case, phys = demo_run_physics
        result = scenario.economics(case, phys, case.finance, with_risk=False)
        repriced = (result.plan["npv"] - result.plan.merge(result.results, on=["asset_id", "option_id"],
                                                             suffixes=("", "_alone"))["npv_alone"]).abs() > 1.0
        assert repriced.any()
        scope = content.select_scope(case, result, None, True)
        h = content.headline(result, scope)
        assert h.npv == pytest.approx(result.plan["npv_at_plan_start"].sum(), rel=1e-12)
        # the cash-flow table of section 5 counts the projects as the plan does: its last cumulative discounted
        # value is the same NPV (plan.csv's npv_at_plan_start, an independent column of the plan); the plan's
        # status states each share to 6 decimals, so each repriced project may differ by up to 5e-7 x its bill
        # savings' present value (below 1 EUR on the demo)
        flows = content.portfolio_flows(result, scope.chosen)
        assert flows["cumulative_discounted"].iloc[-1] == pytest.approx(result.plan["npv_at_plan_start"].sum(),
                                                                         abs=1.0 * repriced.sum())
        # and a repriced project's own flows are the plan's NPV when discounted (numpy_financial.npv as reference)
        import numpy_financial as npf

        plan = result.plan[repriced.to_numpy()]
        for r in plan.itertuples(index=False):
            own = npf.npv(case.finance.discount_rate_frac, content.plan_flows(result, r.asset_id, r.option_id))
            assert own == pytest.approx(r.npv, abs=1.0)

    def test_decision_npv_column_adds_up_to_the_headline(self, small):
        # each planned project's NPV at the plan's start: the column's sum is the headline NPV (plan scope)
        from models.pack import content
        from models.pack.report_html import report_context

        case, result = small
        scope = content.select_scope(case, result, None, True)
        ctx = report_context(case, result, scope, [])
        col = ctx["decision_headers"].index("NPV at plan start [EUR]")
        rows = ctx["decision_rows"]
        assert rows[-1]["cells"][0]["text"] == "Total"  # the table's own total row, then the projects' rows
        values = [r["cells"][col]["text"] for r in rows[:-1]]
        total = sum(float(str(v).replace(",", "").replace(" EUR", "")) for v in values if str(v).strip() not in ("", "-"))
        assert total == pytest.approx(result.plan["npv_at_plan_start"].sum(), abs=0.5 * len(values) + 1e-9)
        shown = float(rows[-1]["cells"][col]["text"].replace(",", ""))
        assert shown == round(result.plan["npv_at_plan_start"].sum())

    def test_mv_baseline_figures(self, asset_pack, small):
        _, result = small
        html = text(asset_pack[0] / REPORT_NAME)
        r = result.results.set_index(["asset_id", "option_id"])
        # engine: today's motor's modelled energy is the M&V baseline of the recommended drive
        assert f"{r.loc[('P1', 'keep'), 'energy_kwh_per_yr']:,.0f}" in html
        assert "Option B" in html and "4 weeks before and 4 after" in html

    def test_finance_assumptions_in_words(self, asset_pack, small):
        # the approver reads labels and percentages, not finance.toml keys and fractions
        _, result = small
        html = text(asset_pack[0] / REPORT_NAME)
        rate_pct = 100 * result.assumptions.discount_rate_frac
        assert f"<td>Discount rate</td><td>{round(rate_pct, 10)}</td><td>%/yr</td>" in html.replace("\n", "").replace(" class=\"\"", "")
        assert "discount_rate_frac" not in html and "escalation_energy_frac" not in html

    def test_emissions_basis_stated(self, asset_pack, small):
        _, result = small
        html = text(asset_pack[0] / REPORT_NAME)
        assert f"{result.assumptions.grid_co2_kg_per_kwh:g} kg CO2 per kWh" in html
        assert "location- or market-based" in html
        # the stated rule gives the tonnes shown: kWh saved x factor x (1 - decline) / 1000 (hand rule, first year)
        a = result.assumptions
        assert "factor x (1 - decline) / 1000" in html
        rec = result.results[result.results["energy_saved_kwh_per_yr"].abs() > 1.0].iloc[0]
        expected = rec["energy_saved_kwh_per_yr"] * a.grid_co2_kg_per_kwh * (1 - a.grid_co2_decline_frac) / 1000
        assert rec["co2_avoided_t_per_yr"] == pytest.approx(expected, rel=1e-9)


class TestDecisionRecords:
    def expected_choice(self, result, asset_id: str) -> str:
        """The engine's choice: the exact plan's option, else the highest-NPV option."""
        plan = result.plan.set_index("asset_id")["option_id"]
        res = result.results[result.results["asset_id"] == asset_id]
        option = plan.get(asset_id) or res.loc[res["best_for_asset"], "option_id"].iloc[0]
        label = res.loc[res["option_id"] == option, "label"].iloc[0]
        return "keep today's motor" if option == "keep" else label

    def test_one_record_per_asset_with_the_recommendation(self, asset_pack, small):
        out, _ = asset_pack
        _, result = small
        for asset_id in ("P1", "F1", "C1"):
            html = text(out / "decision-records" / f"{asset_id}.html")
            assert f"decision record: {asset_id}</h1>" in html
            assert f"<strong>Recommended: {self.expected_choice(result, asset_id)}</strong>" in htmllib.unescape(html)

    def test_end_of_life_costs_and_sign_off(self, asset_pack, small):
        out, _ = asset_pack
        _, result = small
        eol = result.end_of_life.set_index("asset_id")
        html = text(out / "decision-records" / "C1.html")
        for column in ("cost_replace_now", "cost_replace_at_failure", "cost_rewind_at_failure"):
            assert f"{eol.loc['C1', column]:,.0f}" in html
        # C1 was rewound twice (tests/casebuilder.py): hand calculation 1 - 0.9^2 = 19 % shorter life (the common
        # practice 10 % per rewind), beside the failure law's caution
        words = htmllib.unescape(html)
        assert "Rewound 2 times: its failure law counts a life 19 % shorter than a motor never rewound." in words
        assert "not a forecast of when this motor will fail" in words and "10 % less life per past rewind" in words
        for role in ("Prepared by", "Checked by (engineering)", "Approved by (budget holder)", "Signature:", "Date:"):
            assert role in html

    def test_record_escapes_user_text(self, asset_pack):
        html = text(asset_pack[0] / "decision-records" / "P1.html")
        assert "<script>alert(1)" not in html and ESCAPED_HTML in html

    def test_data_notes_apart_from_the_cautions(self, small):
        # F1 has annual hours and a mean load, no profile (tests/casebuilder.py): its demand is a flat assumption,
        # a note on its data for the record and a "data" row of the risk register, not an engineering caution
        from models.pack import content
        from models.pack.decision_record import record_context

        case, result = small
        scope = content.select_scope(case, result, ["F1"], False)
        ctx = record_context(case, result, scope, "F1")
        assert any(n.startswith("no interval data") for n in ctx["data_notes"])
        assert not any(c.startswith("no interval data") for c in ctx["cautions"])
        register = content.risk_register(case, result, scope)
        row = register[register["detail"].str.startswith("no interval data")].iloc[0]
        assert row["category"] == "data" and "Log the load" in row["response"]

    def test_a_defaulted_class_asks_for_what_a_nameplate_shows(self, small):
        # a NEMA nameplate gives a nominal efficiency, not an IE class: the register asks for what it shows
        from models.pack import content

        case, result = small
        scope = content.select_scope(case, result, ["C1"], False)  # C1 gives no efficiency (tests/casebuilder.py)
        register = content.risk_register(case, result, scope)
        # the item in the reader's words (the schema's title), the column name in the detail to find it by
        rows = register[(register["category"] == "defaulted input")
                        & (register["item"] == "Nameplate full-load efficiency [%]")]
        assert len(rows) and "nominal efficiency" in rows["response"].iloc[0]
        assert "asset register column rated_efficiency_pct" in rows["detail"].iloc[0]
        assert not register["item"].str.fullmatch(r"[a-z_]+").any()  # no bare column key as an item

    def test_drive_caution_on_the_drive_record(self, asset_pack):
        html = text(asset_pack[0] / "decision-records" / "P1.html")
        # the recommended option puts today's motor on a drive: the models' caution on its winding and bearings
        # (IEC TS 60034-25 guidance, cited from memory) and the harmonics check
        assert "a qualified person to confirm its winding suits converter supply" in html
        assert "Drives inject harmonics" in html


class TestPlanUncertainty:
    """Section 6 shows the uncertainty of what the pack asks money for: the exact plan under the budget."""

    def test_plan_npv_percentiles_and_chance_of_a_positive_npv(self, plan_pack, small):
        _, result = small
        html = htmllib.unescape(text(plan_pack[0] / REPORT_NAME))
        draws = result.plan_npv_draws
        assert draws.size == 200  # monte_carlo_draws of the test case's finance.toml
        # numpy as the reference: linear-interpolation percentiles of the engine's draws of the plan's NPV
        p10, p90 = np.percentile(draws, [10, 90])
        share = np.mean(draws > 0)  # in whole per cent, a near-certainty never rounded to certainty
        chance = "> 99 %" if 0.99 < share < 1.0 else "< 1 %" if 0.0 < share < 0.01 else f"{100 * share:.0f} %"
        assert (f"has P10 {money(p10)}, P50 {money(np.median(draws))} and P90 {money(p90)}; "
                f"P(plan NPV > 0) = {chance}") in html
        # the best options' draws give another P50 (without a budget): the report does not show that one
        assert money(np.median(result.fleet_npv_draws)) != money(np.median(draws))
        assert f"P50 {money(np.median(result.fleet_npv_draws))}" not in html
        assert "plan choices that trade NPV for budget are not simulated" not in html

    def test_tornado_is_the_plans(self, plan_pack, small):
        _, result = small
        html = text(plan_pack[0] / REPORT_NAME)
        # the tornado's centre is the plan's NPV at its start (plan.csv's npv_at_plan_start, summed)
        assert f"the plan under the budget: {result.plan['npv_at_plan_start'].sum():,.0f}" in html
        assert "best option of every asset, no budget" not in html
        assert "on the NPV of the exact plan under the budget, at the plan&#39;s start." in html  # the whole plan

    def test_per_project_table_is_the_plans_projects_with_their_start_year(self, small):
        from models.pack import content
        from models.pack.report_html import report_context

        case, result = small
        scope = content.select_scope(case, result, None, True)
        rows = monte_carlo_table(report_context(case, result, scope, []))
        # engine: the exact plan (plan.csv), its projects and plan years; P50 from plan_risk.csv
        p50 = result.plan_risk.set_index("project_id")["npv_p50"]
        expected = [{"Project": project_name(result, a, o), "Plan year": str(int(y)),
                     "NPV P50 [EUR]": f"{p50[f'{a}/{o}']:,.0f}"}
                    for a, o, y in zip(result.plan["asset_id"], result.plan["option_id"], result.plan["start_yr"])]
        assert sorted(result.plan["start_yr"]) == [0, 1]  # one project waits for the second plan year
        assert [{k: r[k] for k in ("Project", "Plan year", "NPV P50 [EUR]")} for r in rows] == expected

    def test_scoped_pack_lists_only_its_plan_projects_and_says_whose_npv(self, small):
        from models.pack import content
        from models.pack.report_html import report_context

        case, result = small
        scope = content.select_scope(case, result, ["C1"], False)
        ctx = report_context(case, result, scope, [])
        c1 = result.plan[result.plan["asset_id"] == "C1"].iloc[0]  # engine: C1's project in the exact plan
        assert [(r["Project"], r["Plan year"]) for r in monte_carlo_table(ctx)] == [
            (project_name(result, "C1", c1["option_id"]), str(int(c1["start_yr"])))]
        whole = "the whole fleet plan, not only this pack's scope: 2 projects, 1 of them in this pack"
        assert whole in ctx["tornado_note"] and whole not in ctx["plan_npv_note"]  # said once, not twice in a row
        assert "the whole fleet plan's NPV at its start has P10" in ctx["plan_npv_note"]

    def test_register_reads_the_plans_monte_carlo(self, small):
        from models.pack import content

        case, result = small
        scope = content.select_scope(case, result, None, True)

        def weak_row(r):
            register = content.risk_register(case, r, scope)
            rows = register[register["item"] == "NPV may be negative"]
            return None if rows.empty else rows.iloc[0]

        # engine: the plan's projects with P(NPV > 0) below 90 % in plan_risk.csv
        weak = result.plan_risk.loc[result.plan_risk["prob_npv_positive_frac"] < 0.9, "project_id"]
        assert list(weak) == ["C1/ie3"]
        assert weak_row(result)["assets"] == "C1" and "in the plan's Monte Carlo" in weak_row(result)["detail"]
        # the plan's table, not the best options': a plan whose P1 project is doubtful puts P1 on the register
        doubtful = result.plan_risk.assign(prob_npv_positive_frac=[0.5 if p.startswith("P1/") else 0.95
                                                                   for p in result.plan_risk["project_id"]])
        assert weak_row(dataclasses.replace(result, plan_risk=doubtful))["assets"] == "P1"

    def test_fallback_to_the_best_options_without_the_plans_uncertainty(self, small, tmp_path):
        from models.pack import content
        from models.pack.report_html import report_context

        case, result = small
        older = without_plan_uncertainty(result)
        write_pack(case, older, tmp_path)
        html = htmllib.unescape(text(tmp_path / REPORT_NAME))
        assert "plan choices that trade NPV for budget are not simulated" in html
        assert "on the fleet NPV of every asset's best option" in html
        assert f"best option of every asset, no budget: {result.tornado['base_npv'].iloc[0]:,.0f}" in html
        assert "P(plan NPV > 0)" not in html
        scope = content.select_scope(case, older, None, True)
        ctx = report_context(case, older, scope, [])
        assert "Plan year" not in ctx["mc_headers"] and ctx["plan_npv_note"] == ""
        # engine: risk.csv's rows of the recommended projects
        chosen = set(scope.chosen["asset_id"] + "/" + scope.chosen["option_id"])
        expected = [project_name(result, *p.split("/")) for p in result.risk["project_id"] if p in chosen]
        assert [r["Project"] for r in monte_carlo_table(ctx)] == expected and expected


def test_no_warning_without_pdf(small, tmp_path):
    case, result = small
    with warnings.catch_warnings():
        warnings.simplefilter("error", PackWarning)
        written = write_pack(case, result, tmp_path, assets=["F1"], plan=False)
    assert written and all(path.is_file() for path in written)


def test_run_without_risk_and_an_empty_plan(small, tmp_path):
    """A run without the tornado and Monte Carlo, and a plan with no project, still give a readable pack."""
    import dataclasses

    case, result = small
    lean = scenario.economics(case, result.physics, case.finance, with_risk=False)
    empty = dataclasses.replace(lean, plan=lean.plan.iloc[0:0], plan_greedy=lean.plan_greedy.iloc[0:0])
    paths = write_pack(case, empty, tmp_path)
    assert [p.name for p in paths] == [WORKBOOK_NAME, REPORT_NAME]
    html = text(tmp_path / REPORT_NAME)
    assert "Sensitivity: not computed for this run" in html
    assert '<div class="value">EUR 0</div>' in html  # no capital asked for
    assert "No project is recommended" in html and "pay back not within" not in html


def test_a_rounded_zero_reads_zero():
    # -0.04 t at one decimal reads 0.0, not -0.0; a true negative keeps its sign and colour
    from models.pack.report_html import num

    assert num(-0.04, "{:,.1f}") == {"text": "0.0", "cls": "num"}
    assert num(-1.5, "{:,.1f}") == {"text": "-1.5", "cls": "num neg"}


def test_summary_says_what_the_sites_bills_show(demo_run_physics):
    # the demo plan's projects share peaks and allowances: the summary gives the sites' bills with the whole plan
    # (today's bills less the plan's, from the run's own bill table) beside the projects priced one by one
    from models.pack import content
    from models.pack.report_html import report_context

    case, phys = demo_run_physics
    result = scenario.economics(case, phys, case.finance, with_risk=False)
    scope = content.select_scope(case, result, None, True)
    summary = report_context(case, result, scope, [])["summary_text"]
    by = result.bills.groupby("scenario")["amount"].sum()
    assert f"the sites' bills fall by {content.money(by['baseline'] - by['plan'], case.settings.currency)} a year" in summary


def test_withdrawn_reactive_projects_are_named_as_a_reader_knows_them(small, tmp_path):
    # the plan's note names a left-out reactive project "asset: option label" (the catalogue's label), not by
    # its internal project label "asset/option"
    case, result = small
    row = result.results[result.results["option_id"] != result.results["option_id"].iloc[0]].iloc[0]
    status = {**(result.plan_status or {}), "withdrawn": (f"{row.asset_id}/{row.option_id}",)}
    paths = write_pack(case, dataclasses.replace(result, plan_status=status), tmp_path)
    report = htmllib.unescape(text(next(p for p in paths if p.name == REPORT_NAME)))
    assert f"{row.asset_id}: {row.label}" in report
    assert f"{row.asset_id}/{row.option_id}" not in report


def test_an_empty_plan_says_it_has_no_uncertainty_of_its_own(small):
    # a budget of nothing: the plan holds no project; the section says so instead of "0 of the 0 simulated"
    from models.pack import content
    from models.pack.report_html import report_context

    case, result = small
    empty = dataclasses.replace(result, plan=result.plan.iloc[:0], plan_tornado=pd.DataFrame(),
                                plan_risk=pd.DataFrame(), plan_npv_draws=np.zeros(0))
    ctx = report_context(case, empty, content.select_scope(case, empty, None, True), [])
    assert ctx["tornado_note"].startswith("The plan holds no project under this budget")
    assert ctx["mc_note"] == "No project to simulate: the plan holds none under this budget."


def test_a_case_in_hp_shows_ratings_in_hp(small, tmp_path):
    # C1 is rated 75 kW (tests/casebuilder.py): 75 / 0.745699872 = 100.576 hp (1 hp = 0.745699872 kW, NIST SP 811
    # B.9), so "100.6 hp (75.0 kW)" in its record and 100.6 in the report's asset table headed "hp"
    import dataclasses

    from openpyxl import load_workbook

    case, result = small
    in_hp = dataclasses.replace(case, settings=dataclasses.replace(case.settings, power_unit="hp"))
    write_pack(in_hp, result, tmp_path, assets=["C1"], plan=False)
    record = htmllib.unescape(text(tmp_path / "decision-records" / "C1.html"))
    assert "Rated power:</span> 100.6 hp (75.0 kW)" in record
    report = htmllib.unescape(text(tmp_path / REPORT_NAME))
    assert "<th>hp</th>" in report or '<th class="num">hp</th>' in report
    assert ">100.6<" in report
    book = load_workbook(tmp_path / WORKBOOK_NAME)
    header = [c.value for c in book["Results"][3]]
    column = header.index("Rated [hp]") + 1
    assert book["Results"].cell(4, column).value == pytest.approx(75.0 / 0.745699872, rel=1e-12)


def test_plan_draws_histogram_marks_percentiles_in_the_money_format_and_leaves_a_margin():
    # hand-made draws 100..1,000: the percentiles are labelled as every amount of the pack (code first), and the
    # x axis runs 4 % of the span (36) beyond each end, so its first tick is not in the corner on the y axis's 0
    from models.pack import figures as pack_figures

    draws = np.linspace(100.0, 1000.0, 10)
    summary = {"npv_p10": 190.0, "npv_p50": 550.0, "npv_p90": 910.0, "prob_npv_positive_frac": 1.0}
    fig = pack_figures.plan_npv_draws(draws, summary, "USD")
    texts = [a.text for a in fig.layout.annotations]
    assert texts == ["P10 USD 190", "P50 USD 550", "P90 USD 910"]
    assert list(fig.layout.xaxis.range) == pytest.approx([64.0, 1036.0])


class TestPackAgainInTheSameFolder:
    def test_the_earlier_packs_records_not_covered_are_removed_and_others_kept(self, small, tmp_path):
        case, result = small
        write_pack(case, result, tmp_path, assets=["P1", "C1"], plan=False)
        records = tmp_path / "decision-records"
        assert sorted(p.name for p in records.iterdir()) == ["C1.html", "P1.html"]
        mine = records / "my-notes.html"  # the user's own file, which no pack wrote
        mine.write_text("<p>mine</p>", encoding="utf-8")
        notes: list[str] = []
        written = write_pack(case, result, tmp_path, assets=["P1"], plan=False, messages=notes)
        assert sorted(p.name for p in records.iterdir()) == ["P1.html", "my-notes.html"]
        assert mine.read_text(encoding="utf-8") == "<p>mine</p>"
        assert "Removed 1 file of the earlier pack in this folder that this pack does not cover: " \
               "decision-records/C1.html." in notes
        assert any(n.startswith("The folder also holds 1 file this pack did not write") and "my-notes.html" in n
                   for n in notes)
        listed = (tmp_path / ".drivecase-pack").read_text(encoding="utf-8").split()
        assert sorted(listed) == sorted(p.relative_to(tmp_path).as_posix() for p in written)

    def test_a_list_naming_other_files_removes_nothing_of_them(self, small, tmp_path):
        # the list is only trusted for the names a pack writes: a case file or a path outside stays
        case, result = small
        outside = tmp_path / "assets.csv"
        outside.write_text("x", encoding="utf-8")
        out = tmp_path / "pack"
        out.mkdir()
        (out / "assets.csv").write_text("y", encoding="utf-8")
        (out / ".drivecase-pack").write_text("assets.csv\n../assets.csv\ndecision-records/../../assets.csv\n",
                                             encoding="utf-8")
        write_pack(case, result, out, assets=["P1"], plan=False)
        assert outside.read_text(encoding="utf-8") == "x" and (out / "assets.csv").read_text(encoding="utf-8") == "y"


def test_without_a_budget_the_plans_other_choice_is_not_put_down_to_the_budget(demo_run_physics):
    # With no capital limit (budget_per_yr empty) the plan leaves an asset's highest-NPV option only where that
    # option adds less beside the rest of the plan at its site (shared reactive charges and demand peaks); the
    # pack must not say the budget made the choice.
    from dataclasses import replace as replaced

    from models import scenario
    from models.pack.content import select_scope

    case, phys = demo_run_physics
    result = scenario.economics(case, phys, replaced(case.finance, budget_per_yr=()), with_risk=False)
    reasons = select_scope(case, result, plan=True).recommended
    # (the option priced alone either adds less beside the rest of the plan, or its whole value is taken by it)
    shared = reasons[reasons["reason_short"].str.contains("shares its saving with the rest of the plan|taken by the rest "
                                                          "of the plan")]
    assert len(shared) > 0  # the demo has such assets (eleven at the time of writing)
    assert not reasons["reason_short"].str.contains("budget").any()
    assert not reasons["reason"].str.contains("budget").any()


def test_an_asset_outside_the_plan_is_not_recommended_a_project_whose_value_the_plan_takes(demo_run_physics):
    # In the demo's plan the rest of a site takes the value of some assets' reactive projects (models.reactive_plan
    # withdraws them or sets them aside); for an asset outside the plan whose highest NPV priced alone is such a
    # project (KGQ-CR01's terminal capacitor in the demo), an asset pack recommends the best option the plan leaves
    # it and says why, rather than booking the reactive project's NPV in full.
    from models import scenario
    from models.pack.content import select_scope

    case, phys = demo_run_physics
    result = scenario.economics(case, phys, case.finance, with_risk=False)
    taken = set(result.plan_status.get("withdrawn", ())) | set(result.plan_status.get("set_aside", ()))
    r = result.results
    best = r.loc[r.groupby("asset_id")["npv"].idxmax()]
    outside = best[~best["asset_id"].isin(set(result.plan["asset_id"]))
                   & (best["asset_id"] + "/" + best["option_id"]).isin(taken)]
    assert len(outside), "the demo should have an asset outside the plan whose best option the plan takes"
    asset = str(outside["asset_id"].iloc[0])
    rec = select_scope(case, result, assets=[asset], plan=False).recommended.iloc[0]
    assert rec["option_id"] != outside["option_id"].iloc[0] and f"{asset}/{rec['option_id']}" not in taken
    assert "whose value the rest of the plan at this site already takes" in rec["reason"]


def test_end_of_life_advice_shows_the_outage_cost_it_rests_on(demo_run_physics):
    # the end-of-life strategy turns on what an hour of outage costs; the record and the workbook's End of life
    # sheet give that figure and where it comes from (the register, the finance assumptions or a default)
    from openpyxl import Workbook

    from models import scenario
    from models.pack import content
    from models.pack.decision_record import record_context
    from models.pack.workbook import _end_of_life, _Formats

    case, phys = demo_run_physics
    result = scenario.economics(case, phys, case.finance, with_risk=True)
    scope = content.select_scope(case, result, assets=["HRW-D01"], plan=False)
    context = record_context(case, result, scope, "HRW-D01")
    said = " ".join(str(v) for v in context.values())
    basis = result.end_of_life.set_index("asset_id").loc["HRW-D01", "downtime_cost_basis"]
    assert "a failure's outage priced at EUR" in said and str(basis) in said
    # HRW-D01 is a 0.75 kW pump (data/demo/assets.csv): the smallest outage class, 24 h to a new motor and 72 h
    # to a rewound one (models.end_of_life.OUTAGE_CLASSES, common practice)
    assert "for 24 h to a new motor or 72 h to a rewound one" in said
    if str(basis).startswith("default"):
        assert "The outage cost is a placeholder that can decide this: give the motor's own." in said
    ws = Workbook().active
    _end_of_life(ws, result, scope, _Formats("EUR"))
    heads = [c.value for c in ws[3]]
    assert "Outage cost [EUR/h]" in heads and "Outage cost from" in heads
    assert "Outage to a new motor [h]" in heads and "Outage to a rewound motor [h]" in heads


def test_the_headline_saving_counts_a_reactive_project_at_the_share_the_plan_credits(demo_run_physics):
    # KGQ-AC01's terminal capacitor is kept in the demo's plan at a share r of its own bill saving (its plan NPV
    # counts r only); the headline's yearly saving counts the same r x bill saving + maintenance saving, so it is
    # on the basis of the NPV and payback beside it (hand calculation from results.csv and plan_status)
    from models import scenario
    from models.pack.content import headline, select_scope

    case, phys = demo_run_physics
    result = scenario.economics(case, phys, case.finance, with_risk=False)
    share = result.plan_status["repriced"]["KGQ-AC01/capacitor"]
    assert 0 < share < 1
    row = result.results.set_index(["asset_id", "option_id"]).loc[("KGQ-AC01", "capacitor")]
    h = headline(result, select_scope(case, result, assets=["KGQ-AC01"], plan=False))
    assert h.n_projects == 1
    expected = share * row["bill_saving_per_yr"] + row["saving_maintenance_per_yr"]
    assert abs(h.yearly_saving - expected) <= 1e-9 * max(1.0, abs(expected))


def test_the_decision_table_and_the_saving_charts_add_up_to_the_headline_saving(demo_run_physics):
    # the decision table's savings, the waterfall's total and the headline card are one figure: each reactive
    # project of the plan counted at the share r of its bill saving the plan credits (plan_status), r x
    # bill saving + maintenance saving (hand calculation per row from results.csv); before, the table and the
    # charts counted such projects in full while the card did not (1,009,910 against 1,001,307 EUR/yr)
    from models import scenario
    from models.pack import figures
    from models.pack.content import headline, plan_counted, select_scope
    from models.pack.report_html import report_context

    case, phys = demo_run_physics
    result = scenario.economics(case, phys, case.finance, with_risk=False)
    scope = select_scope(case, result)
    h = headline(result, scope)
    repriced = result.plan_status["repriced"]
    assert repriced, "the demo's plan keeps reactive projects at a share"
    res = result.results.set_index(["asset_id", "option_id"])
    by_hand = 0.0
    for a, o in zip(scope.chosen["asset_id"], scope.chosen["option_id"]):
        r = res.loc[(a, o)]
        by_hand += repriced.get(f"{a}/{o}", 1.0) * r["bill_saving_per_yr"] + r["saving_maintenance_per_yr"]
    assert abs(h.yearly_saving - by_hand) <= 1e-6 * abs(by_hand)
    context = report_context(case, result, scope, [])
    column = context["decision_headers"].index(f"Saving [{case.settings.currency}/yr]")
    rows = context["decision_rows"][:-1]  # (the last row is the table's total)
    table = sum(float(r["cells"][column]["text"].replace(",", "")) for r in rows)
    assert abs(table - h.yearly_saving) <= 0.5 * len(rows)  # (each cell rounded to 1)
    total = context["decision_rows"][-1]["cells"]
    assert total[0]["text"] == "Total" and float(total[column]["text"].replace(",", "")) == round(h.yearly_saving)
    waterfall = figures.savings_waterfall(plan_counted(result, scope.chosen), case.settings.currency)
    assert abs(float(waterfall.data[0].y[-1]) - h.yearly_saving) <= 1e-6 * abs(h.yearly_saving)
    assert f'"{h.yearly_saving:,.0f}"' in str(context["figures"]["waterfall"])  # the report's chart, its total's label


def test_a_record_that_keeps_the_motor_says_replacing_it_now_is_a_separate_request(demo_run_physics):
    # a record whose recommended option keeps today's motor (a drive or a capacitor added) while the end-of-life
    # comparison finds replacing the motor now cheapest: two answers to two questions, said as such, with the
    # new motor's capital (results.csv) named as not in the request
    from models import scenario
    from models.pack import content
    from models.pack.decision_record import record_context

    case, phys = demo_run_physics
    result = scenario.economics(case, phys, case.finance, with_risk=False)
    scope = content.select_scope(case, result)
    eol = result.end_of_life.set_index("asset_id")
    rec = scope.recommended.set_index("asset_id")
    both = [a for a in rec.index if a in eol.index and eol.loc[a, "best_strategy"] == "replace_now"
            and rec.loc[a, "technology"] in ("add_drive", "capacitor")]
    assert both, "the demo has a motor kept with an add-on whose end of life says replace now"
    said = " ".join(str(v) for v in record_context(case, result, scope, both[0]).values())
    assert "A separate decision, for the motor itself" in said
    assert "Replacing it now is not in this request and would need its own capital" in said
    new_capital = result.results.set_index(["asset_id", "option_id"]).loc[(both[0], eol.loc[both[0], "new_option_id"]), "capital"]
    assert content.money(float(new_capital), case.settings.currency) in said


def test_the_reports_charts_offer_no_button_that_shares_them_outside():
    # the report's charts hold the client's figures: their mode bar has no button that uploads a chart to an
    # outside sharing service (plotly.js config keys showSendToCloud and modeBarButtonsToRemove)
    import plotly.graph_objects as go

    from models.pack.report_html import chart

    html = str(chart(go.Figure(go.Bar(x=[1], y=[2])), "t"))
    assert '"showSendToCloud": false' in html and '"sendChartToCloud"' in html and '"sendDataToCloud"' in html


def test_the_dashboards_saving_card_is_the_packs_headline_saving(demo_run_physics):
    # User report: the Fleet card said 1.03 M/yr ("projects priced alone") where the pack's headline said
    # 1,020,230/yr ("as the plan counts them") for the same proven plan. Both now count each reactive project
    # of the plan at the share of its bill saving the plan credits (the basis of the plan NPV beside them).
    from dashboard import services
    from models import scenario
    from models.pack.content import headline, select_scope

    case, phys = demo_run_physics
    result = scenario.economics(case, phys, case.finance, with_risk=False)
    card = services.headline(result)["yearly_saving_per_yr"]
    pack = headline(result, select_scope(case, result)).yearly_saving
    assert result.plan_status["repriced"]
    assert abs(card - pack) <= 1e-9 * abs(pack)


def test_a_pack_of_assets_says_what_capital_lies_outside_the_budgeted_plan(demo_run_physics):
    # User report: a pack of three demo assets asked for 47,437 of capital, 10,724 of it for projects outside the
    # budgeted plan (plan year "-"), without a word in the headline. The summary now names that part; the sum of
    # the capital of the recommended projects outside the plan is the expected figure (results.csv, plan.csv).
    from models import scenario
    from models.pack import content
    from models.pack.report_html import report_context

    case, phys = demo_run_physics
    result = scenario.economics(case, phys, case.finance, with_risk=False)
    planned = set(result.plan["asset_id"])
    best = result.results[result.results["best_for_asset"].to_numpy(dtype=bool)]
    paying = best[(best["capital"] > 0) & (best["npv"] > 0)]["asset_id"]
    outside_assets = [a for a in paying if a not in planned][:2]
    inside = [a for a in case.assets["asset_id"] if a in planned][:1]
    assert len(outside_assets) == 2 and inside, "the demo's budget leaves paying projects out"
    scope = content.select_scope(case, result, assets=inside + outside_assets, plan=False)
    chosen = scope.chosen
    outside = chosen.loc[~chosen["in_plan"].astype(bool), "capital"].sum()
    assert outside > 0
    summary = report_context(case, result, scope, [])["summary_text"]
    assert f"Of that capital, {content.money(float(outside), case.settings.currency)}" in summary
    assert "lies outside the budgeted plan" in summary
    plan_only = report_context(case, result, content.select_scope(case, result), [])["summary_text"]
    assert "outside the budgeted plan" not in plan_only


def test_a_zero_budget_pack_says_the_budget_buys_nothing_and_shows_no_payback(demo_run_physics):
    # User report: with budget_per_yr = [0] the pack said "the plan buys nothing under the budget, or no option
    # beats keeping today's motor" (which?) and its payback card read "not within 15 yr" for no project at all.
    # Expected: the paying projects the budget leaves out, counted and summed from results.csv (each asset's
    # best paying option), and a payback of "-".
    from dataclasses import replace

    from models import scenario
    from models.pack import content
    from models.pack.report_html import report_context

    case, phys = demo_run_physics
    result = scenario.economics(case, phys, replace(case.finance, budget_per_yr=(0.0,)), with_risk=False)
    assert result.plan.empty
    context = report_context(case, result, content.select_scope(case, result), [])
    res = result.results
    worth = res[(res["capital"] > 0) & (res["npv"] > 0)]
    worth = worth.loc[worth.groupby("asset_id")["npv"].idxmax()]
    summary = context["summary_text"]
    assert summary.startswith(f"No project is recommended: the budget buys none of the {len(worth)} assets whose best "
                              "option pays")
    assert content.money(float(worth["npv"].sum()), case.settings.currency) in summary
    payback = next(c for c in context["cards"] if c["label"] == "Payback")
    assert payback["value"] == "-" and payback["note"] == "no project"


def test_the_report_states_its_basis_and_the_demand_window_caveat(demo_run_physics):
    # User report: the report never named each site's tariff, the purchase date the rules were read on (and that
    # it defaulted to the day of the run), the region or the analysis year; the demo's warnings that demand
    # savings are understated (15-min demand windows, 60-min profiles) sat only in the workbook's Data quality.
    from models import scenario
    from models.case import coarse_demand_profiles
    from models.pack import content
    from models.pack.report_html import report_context

    case, phys = demo_run_physics
    result = scenario.economics(case, phys, case.finance, with_risk=False)
    scope = content.select_scope(case, result)
    context = report_context(case, result, scope, [])
    basis = {r["cells"][0]["text"]: (r["cells"][1]["text"], r["cells"][2]["text"]) for r in context["basis_rows"]}
    assert basis["Region (minimum-efficiency rules)"][0] == case.settings.region
    assert basis["Purchase date (rules read on)"][0] == case.settings.purchase_date
    assert not case.settings.purchase_date_declared  # data/demo/case.toml gives none: the day of the run is taken
    assert basis["Purchase date (rules read on)"][1].startswith("the day of the run (the case gives none)")
    assert basis["Analysis year"][0] == "2025"  # data/demo profiles are of 2025 (data/generate_demo.py)
    for site in case.sites.itertuples(index=False):
        key = next(k for k in basis if k.startswith(f"Tariff of site {site.site_id}"))
        assert basis[key] == (case.tariffs[site.tariff_file].name, f"file {site.tariff_file}")
    coarse = coarse_demand_profiles(case.sites, case.assets, case.tariffs, case.profile_info)
    assert coarse, "the demo's 60-min profiles meet 15-min demand windows"
    register = content.risk_register(case, result, scope)
    for site_id in coarse:
        rows = register[register["item"] == f"Demand window at site {site_id}"]
        assert len(rows) == 1 and "understates the demand peak and its savings" in rows["detail"].iloc[0]
        # the row names the site's motors in the pack's scope whose own profile is coarser than the window (not every
        # motor of the site, nor those without a profile); the text counts the motors listed,
        # "of the site in this pack" when fewer than the site's. The list is whole or "... and N more", so its
        # length is read from the text
        window, _, n = coarse[site_id]
        resolution = dict(zip(case.profile_info["profile_id"], case.profile_info["resolution_min"]))
        at_site = case.assets[case.assets["site_id"] == site_id]
        coarse_at_site = [a for a, pid in zip(at_site["asset_id"], at_site["profile_id"]) if resolution.get(pid, 0) > window]
        expected = [a for a in coarse_at_site if a in set(scope.asset_ids)]
        listed = rows["assets"].iloc[0]
        more = re.search(r"and (\d+) more", listed)
        named = [x.strip() for x in re.sub(r" and \d+ more$", "", listed).split(",")]
        assert set(named) <= set(expected) and len(named) + (int(more.group(1)) if more else 0) == len(expected)
        assert len(coarse_at_site) == n
        whose = "of the site in this pack" if len(expected) < n else "of the site"
        assert f"{counted(len(expected), 'motor')} {whose} {'has' if len(expected) == 1 else 'have'}" in rows["detail"].iloc[0]
    # a pack of one such motor of a site with more counts that one, as the pack's
    site_id = next(s for s, (_, _, n) in coarse.items() if n > 1)
    window = coarse[site_id][0]
    resolution = dict(zip(case.profile_info["profile_id"], case.profile_info["resolution_min"]))
    one = next(a for a, s, pid in zip(case.assets["asset_id"], case.assets["site_id"], case.assets["profile_id"])
               if s == site_id and resolution.get(pid, 0) > window)
    small = content.risk_register(case, result, content.select_scope(case, result, assets=[one], plan=False))
    row = small[small["item"] == f"Demand window at site {site_id}"].iloc[0]
    assert row["assets"] == one and "1 motor of the site in this pack has" in row["detail"]


def test_a_reactive_project_counted_at_a_share_states_the_payback_of_what_the_plan_counts(demo_run_physics):
    # KGQ-AC01's capacitor is kept in the demo's plan at a share r of its bill saving: the decision table shows
    # r x bill saving + maintenance saving, so its payback is that of the flows the plan counts. Hand estimate: capital
    # / counted first-year saving (the saving escalates, so the payback is a little shorter, never longer); the
    # stand-alone payback is shorter still
    from models import scenario
    from models.pack.content import plan_counted, select_scope, years_text
    from models.pack.report_html import report_context

    case, phys = demo_run_physics
    result = scenario.economics(case, phys, case.finance, with_risk=False)
    scope = select_scope(case, result)
    counted = plan_counted(result, scope.recommended).set_index(["asset_id", "option_id"]).loc[("KGQ-AC01", "capacitor")]
    alone = result.results.set_index(["asset_id", "option_id"]).loc[("KGQ-AC01", "capacitor")]
    estimate = counted["capital"] / (counted["bill_saving_per_yr"] + counted["saving_maintenance_per_yr"])
    assert 0.85 * estimate <= counted["simple_payback_yr"] <= estimate
    assert counted["simple_payback_yr"] > alone["simple_payback_yr"] + 0.1
    ctx = report_context(case, result, scope, [])
    col = next(k for k, h in enumerate(ctx["decision_headers"]) if "payback" in h.lower())
    row = next(r for r in ctx["decision_rows"] if r["cells"][0]["text"] == "KGQ-AC01")
    horizon = int(result.assumptions.horizon_yr)
    assert row["cells"][col]["text"] == years_text(counted["simple_payback_yr"], horizon)
    assert row["cells"][col]["text"] != years_text(alone["simple_payback_yr"], horizon)


def test_a_repriced_projects_plan_flows_discount_to_its_plan_npv_under_an_income_tax(demo_run_physics):
    # with a 25 % tax rate on savings the engine takes off (1 - r) x the present value of a reactive project's bill
    # saving after tax (numpy_financial.npv as reference of the flows' present value): the plan's flows of each
    # repriced project discount to its plan NPV, as they do without tax
    from dataclasses import replace

    import numpy_financial as npf

    from models import scenario
    from models.pack import content

    case, phys = demo_run_physics
    finance = replace(case.finance, tax_rate_frac=0.25)
    result = scenario.economics(case, phys, finance, with_risk=False)
    shares = result.plan_status.get("repriced") or {}
    assert shares
    plan = result.plan.set_index(["asset_id", "option_id"])
    for label in shares:
        asset_id, option_id = label.split("/")
        own = npf.npv(finance.discount_rate_frac, content.plan_flows(result, asset_id, option_id))
        assert own == pytest.approx(float(plan.loc[(asset_id, option_id), "npv"]), abs=1.0), label


def test_the_report_says_what_payback_is_and_which_figures_are_after_tax(small):
    # A reader dividing capital by the yearly saving gets another number than the payback shown: the report
    # says what the payback is, and, with a tax rate, that NPV, IRR and payback are after it and the savings
    # before it.
    from dataclasses import replace

    from models.pack import content
    from models.pack.report_html import report_context

    case, result = small
    scope = content.select_scope(case, result, None, True)
    untaxed = report_context(case, result, scope, [])["measures_text"]
    assert "not capital / yearly saving" in untaxed and "No tax rate is set: every figure is before tax" in untaxed
    taxed = report_context(case, replace(result, assumptions=replace(result.assumptions, tax_rate_frac=0.25)), scope,
                           [])["measures_text"]
    assert "after the tax rate of the assumptions (25.0 % on the savings" in taxed
    assert "the yearly savings are before tax" in taxed


def test_the_register_names_the_saving_the_plans_projects_share(demo_run_physics):
    # The headline's yearly saving adds the plan's projects priced one by one; the sites' bills with the whole
    # plan in place fall by less (shared demand peaks, ratchets, allowances). The register gives the gap:
    # cross-check of two paths, the bills table (baseline less plan) against the counted savings of the plan.
    from models import scenario
    from models.pack import content

    case, phys = demo_run_physics
    result = scenario.economics(case, phys, case.finance, with_risk=False)
    bills = result.bills.groupby("scenario")["amount"].sum()
    together = float(bills["baseline"] - bills["plan"])
    from models.exports import plan_with_savings

    rows = plan_with_savings(result.plan, result.results, result.plan_status.get("repriced"))  # plan.csv's columns
    maintenance = result.results.set_index(["asset_id", "option_id"])["saving_maintenance_per_yr"].reindex(
        list(zip(rows["asset_id"], rows["option_id"])))
    apart = float(rows["saving_counted_per_yr"].sum() - maintenance.sum())
    assert apart - together > 0.005 * apart  # the demo's plan shares peaks and allowances
    register = content.risk_register(case, result, content.select_scope(case, result, None, True))
    row = register[register["item"] == "Projects priced one by one"]
    assert len(row) == 1
    detail = row["detail"].iloc[0]
    assert content.money(apart, "EUR") in detail and content.money(together, "EUR") in detail
    assert content.money(apart - together, "EUR") in detail


def test_a_record_says_at_which_start_it_counts_the_plans_npv(demo_run_physics):
    # A reactive project credited a share of its saving and started after plan year 0: its record's "the plan counts
    # an NPV of X" is at the project's own start, while the report's decision table gives it at the plan's start;
    # the record names both (the second is the first discounted over the plan years before it).
    from models.pack.content import select_scope
    from models.pack.decision_record import record_context

    case, phys = demo_run_physics
    result = scenario.economics(case, phys, case.finance, with_risk=False)
    plan = result.plan.set_index("asset_id")
    own = result.results.set_index(["asset_id", "option_id"])["npv"]
    later = [a for a, r in plan.iterrows() if r["start_yr"] > 0 and abs(r["npv"] - own[(a, r["option_id"])]) > 0.5]
    assert later  # the demo's premise: a repriced project after plan year 0
    asset_id = later[0]
    scope = select_scope(case, result, assets=[asset_id], plan=False)
    said = " ".join(record_context(case, result, scope, asset_id)["reasons"])
    start = int(plan.loc[asset_id, "start_yr"])
    at_start = plan.loc[asset_id, "npv"] / (1 + case.finance.discount_rate_frac) ** start  # hand: discounted k years
    assert f"at its own start (plan year {start}; EUR {at_start:,.0f} at the plan's start" in said, said


def test_a_rating_reads_as_its_nameplate(demo_run_physics):
    # HRW-D01 is a 0.75 kW dosing pump (data/demo/assets.csv): the scope table says 0.75, not 0.8
    from models.pack.content import select_scope
    from models.pack.report_html import report_context

    case, phys = demo_run_physics
    result = scenario.economics(case, phys, case.finance, with_risk=False)
    ctx = report_context(case, result, select_scope(case, result, assets=["HRW-D01", "HRW-P01"], plan=False), [])
    ratings = {r["cells"][0]["text"]: r["cells"][4]["text"] for r in ctx["asset_rows"]}
    assert ratings == {"HRW-D01": "0.75", "HRW-P01": "250"}


def test_the_summary_tells_an_approver_the_taxes_the_repeat_purchases_and_the_follow_on_capital(demo_run_physics):
    # what an approver needs beside the headline, each figure from the run's own tables (hand sums below)
    from models import scenario
    from models.pack.content import plan_bill_savings_apart_and_together, select_scope
    from models.pack.report_html import report_context
    from models.scenario import REPLACING_TECHNOLOGIES

    case, phys = demo_run_physics
    result = scenario.economics(case, phys, case.finance, with_risk=False)
    context = report_context(case, result, select_scope(case, result), [])
    text = context["summary_text"]
    # the year whose prices the yearly saving is at: the demo's load data and bills are of 2025
    saving = next(c for c in context["cards"] if c["label"] == "Yearly saving")
    assert "2025 prices (the analysis year's)" in saving["note"]
    # taxes: the plan's fall of each tax line of the bills (baseline less plan), summed over sites and months
    bills = result.bills
    vat = bills[bills["line_item"] == "tax:VAT"].groupby("scenario")["amount"].sum()
    assert f"EUR {vat['baseline'] - vat['plan']:,.0f} is VAT" in text and "reclaims a tax" in text
    # the bills' gap is stated against the saving the register states (one basis)
    apart, together = plan_bill_savings_apart_and_together(result)
    assert f"less than the EUR {apart:,.0f} its projects save" in text and f"EUR {apart - together:,.0f} a year" in text
    # repeat purchases: what the plan spends over the study period beyond its projects' first capital
    spend = result.capital_spend_by_year
    rows = result.results.reset_index(drop=True)
    at = [int(rows.index[(rows["asset_id"] == a) & (rows["option_id"] == o)][0])
          for a, o in zip(result.plan["asset_id"], result.plan["option_id"])]
    again = float(spend[at].sum()) - float(result.plan["capital"].sum())
    assert again > 1.0 and f"also spends EUR {again:,.0f} on buying items again" in text
    # the motors the end-of-life comparison would replace now beside a plan project that keeps them
    eol = result.end_of_life.set_index("asset_id")
    res = result.results.set_index(["asset_id", "option_id"])
    kept = [a for a, o in zip(result.plan["asset_id"], result.plan["option_id"])
            if res.loc[(a, o), "technology"] not in REPLACING_TECHNOLOGIES and a in eol.index
            and eol.loc[a, "best_strategy"] == "replace_now" and not eol.loc[a, "failed"]]
    capital = sum(float(res.loc[(a, eol.loc[a, "new_option_id"]), "capital"]) for a in kept)
    assert kept and f"For {len(kept)} assets whose plan project keeps today's motor" in text
    assert f"would need EUR {capital:,.0f} of capital this request does not hold" in text


def test_a_record_of_a_later_plan_year_gives_the_reports_npv_and_says_the_outage_basis(demo_run_physics):
    # HRW-P11 starts in a later plan year: its record gives the NPV at the plan's start beside its own (its own NPV
    # discounted the plan years before it, as the report's decision table gives it); its end-of-life comparison
    # prices an outage the options' NPVs do not
    import re

    from models import scenario
    from models.pack.content import select_scope
    from models.pack.decision_record import render_decision_record

    case, phys = demo_run_physics
    result = scenario.economics(case, phys, case.finance, with_risk=False)
    plan = result.plan.set_index("asset_id")
    later = [a for a in plan.index if int(plan.loc[a, "start_yr"]) > 0
             and abs(float(plan.loc[a, "npv_at_plan_start"]) - float(plan.loc[a, "npv"])) > 0.5]
    asset = later[0]
    html = render_decision_record(case, result, select_scope(case, result), asset)
    text = re.sub(r"\s+", " ", re.sub("<[^>]+>", " ", html)).replace("&#39;", "'")
    at_start = float(plan.loc[asset, "npv_at_plan_start"])
    assert f"EUR {at_start:,.0f} at the plan's start (plan year {int(plan.loc[asset, 'start_yr'])} discounted)" in text
    # the demo's finance assumptions price no downtime; HRW-P01's end-of-life comparison prices 2,000 EUR/h
    assert float(case.finance.downtime_cost_per_h) == 0.0
    html = render_decision_record(case, result, select_scope(case, result), "HRW-P01")
    text = re.sub(r"\s+", " ", re.sub("<[^>]+>", " ", html)).replace("&#39;", "'")
    assert "outage priced at EUR 2,000/h" in text and "(The NPVs above count no outage.)" in text


def test_a_plan_past_the_harmonic_limits_is_said_in_the_summary(demo_run_physics):
    # an invariant of our design: every site whose plan row of the screen passes a limit is named in the executive
    # summary with its figures as the screen tables them (the screen's numbers: hand cases H1-H6), and that the
    # mitigation is not in the plan's capital
    from models import scenario
    from models.harmonics import screen_flags
    from models.pack.content import plan_harmonic_screen, select_scope
    from models.pack.report_html import report_context

    case, phys = demo_run_physics
    result = scenario.economics(case, phys, case.finance, with_risk=False)
    text = report_context(case, result, select_scope(case, result), [])["summary_text"]
    screen = plan_harmonic_screen(case, result)
    plan_rows = screen[screen["scenario"] == "plan"]
    flagged = plan_rows[screen_flags(plan_rows)["any"]]
    assert len(flagged), "the demo's plan was expected to pass a harmonic limit at a site"
    for r in flagged.itertuples(index=False):
        assert f"site {r.site_id} (" in text
        if r.voltage_thd_pct > r.voltage_thd_limit_pct:
            assert f"voltage THD {r.voltage_thd_pct:.1f} % against {r.voltage_thd_limit_pct:g} %" in text
    for r in plan_rows[~screen_flags(plan_rows)["any"]].itertuples(index=False):
        assert f"site {r.site_id} (" not in text
    assert "their cost is not in the plan's capital or NPV" in text and "Section 11 tables the screen." in text


def test_a_financed_plan_is_said_in_the_summary_and_tabled_in_the_cash_flow_section(demo_run_physics):
    # finance.toml's financing (a loan here): the summary gives the owner's NPV financed and in cash in the words
    # of models.financing.financing_text, and section 5 tables the plan's yearly flows to the owner, whose
    # columns add up to the financed net (the figures themselves: tests/test_financing.py)
    from dataclasses import replace

    from models.financing import financing_summary, financing_text, plan_financing
    from models.pack import content
    from models.pack.report_html import report_context

    case, phys = demo_run_physics
    a = replace(case.finance, financing="loan", loan_share_frac=0.8, loan_rate_frac=0.05, loan_term_yr=6)
    result = scenario.economics(case, phys, a, with_risk=False)
    ctx = report_context(case, result, content.select_scope(case, result, None, True), [])
    table = plan_financing(result)
    said = financing_text(a, financing_summary(table, a.discount_rate_frac), case.settings.currency)
    assert said and said in ctx["summary_text"]
    assert ctx["financed_headers"][:2] == ["Plan year", "Cash net [EUR]"] and len(ctx["financed_rows"]) == len(table)
    first = [c["text"] for c in ctx["financed_rows"][0]["cells"]]
    assert first[1] == f"{table['cash_net'].iloc[0]:,.0f}" and first[-2] == f"{table['financed_net'].iloc[0]:,.0f}"
    cash = report_context(case, scenario.economics(case, phys, case.finance, with_risk=False),
                          content.select_scope(case, result, None, True), [])
    assert cash["financed_rows"] == [] and "borrowed" not in cash["summary_text"]
    # a lease: the lessor's purchase, the payments, their shield and the buyout are the table's parts
    leased = scenario.economics(case, phys, replace(case.finance, financing="lease", lease_buyout_frac=0.05),
                                with_risk=False)
    ctx = report_context(case, leased, content.select_scope(case, leased, None, True), [])
    assert ctx["financed_headers"][2:7] == ["Capital paid by the lessor [EUR]",
                                           "Incentive and depreciation shield kept by it [EUR]", "Lease payments [EUR]",
                                           "Their tax shield [EUR]", "Buyout [EUR]"]
    assert "leased over 5 years at 7 % a year (nominal) and bought out at 5 % of its price" in ctx["summary_text"]


def test_a_record_names_the_hazardous_area_and_cautions_a_motor_kept_there(small):
    # the nameplate shows the area; a record that keeps today's motor says its Ex care goes on (IEC 60079-17
    # inspections, IEC 60079-19 repairs); one with no classified area says neither
    from models.pack import content
    from models.pack.decision_record import record_context

    case, result = small
    assets = case.assets.copy()
    assets["hazardous_area"] = "zone_2"
    zoned = dataclasses.replace(case, assets=assets)
    kept_any = False
    for asset_id in ("P1", "F1", "C1"):
        scope = content.select_scope(case, result, assets=[asset_id], plan=False)
        plain = record_context(case, result, scope, asset_id)
        ctx = record_context(zoned, result, scope, asset_id)
        assert ("Hazardous area", "zone 2", False) in ctx["nameplate"]
        assert not any(label == "Hazardous area" for label, _, _ in plain["nameplate"])
        kept = "keep today's motor" in str(ctx["recommended"])
        said = [c for c in ctx["cautions"] if c.startswith("hazardous area (zone 2): a motor kept in service")]
        assert len(said) == (1 if kept else 0), (asset_id, ctx["recommended"])
        assert not any("IEC 60079-17" in c for c in plain["cautions"])
        kept_any = kept_any or kept
    assert kept_any  # (F1's record keeps today's motor)


def test_the_plan_table_names_each_plan_year_by_its_budget_year(small, tmp_path):
    # fiscal_year_start_month = 4 with the motors bought on 15 June 2027: plan year 0 is the budget year from April
    # 2027 to March 2028, FY2028 (models.finance.budget_year_names); the report's table by plan year and the
    # workbook's Plan sheet name it, and without the key neither does
    from openpyxl import load_workbook

    from models.pack import content
    from models.pack.report_html import report_context

    case, result = small
    dated = dataclasses.replace(case, settings=dataclasses.replace(case.settings, purchase_date="2027-06-15"))
    named = scenario.economics(dated, result.physics, dataclasses.replace(result.assumptions, fiscal_year_start_month=4,
                                                                          budget_per_yr=(1e6, 1e6)), with_risk=False)
    ctx = report_context(dated, named, content.select_scope(dated, named, None, True), [])
    first = [[c["text"] for c in r["cells"]][0] for r in ctx["plan_rows"]]
    assert first[:2] == ["0 (FY2028)", "1 (FY2029)"]
    plain = report_context(case, result, content.select_scope(case, result, None, True), [])
    assert [[c["text"] for c in r["cells"]][0] for r in plain["plan_rows"]][0] == "0"
    write_pack(dated, named, tmp_path / "pack")
    ws = load_workbook(tmp_path / "pack" / WORKBOOK_NAME)["Plan"]
    header = next(r for r in range(1, ws.max_row + 1)
                  if ws.cell(r, 1).value == "Plan year" and str(ws.cell(r, 2).value).startswith("Budget ["))
    assert ws.cell(header, 10).value == "Budget year"
    assert [ws.cell(header + k, 10).value for k in (1, 2)] == ["FY2028", "FY2029"]
    assert [ws.cell(header + k, 1).value for k in (1, 2)] == [0, 1]  # (the plan years the sheet's formulas count by)
    # the financing tables too (a loan here)
    loan = scenario.economics(dated, result.physics, dataclasses.replace(named.assumptions, financing="loan"),
                              with_risk=False)
    ctx = report_context(dated, loan, content.select_scope(dated, loan, None, True), [])
    assert [[c["text"] for c in r["cells"]][0] for r in ctx["financed_rows"]][:2] == ["0 (FY2028)", "1 (FY2029)"]
    write_pack(dated, loan, tmp_path / "loan")
    ws = load_workbook(tmp_path / "loan" / WORKBOOK_NAME)["Financing"]
    last = ws.max_column
    assert ws.cell(5, last).value == "Budget year" and [ws.cell(6 + k, last).value for k in (0, 1)] == ["FY2028", "FY2029"]
    assert [ws.cell(6 + k, 1).value for k in (0, 1)] == [0, 1]


def test_the_cautions_carry_each_sites_harmonic_screen(demo_run_physics):
    # section 11 shows models.harmonics.site_screen's rows for the sites in scope (the demo's sites give their
    # transformers and fault levels), with the caution that the screen is not a study
    from models.harmonics import SCREEN_CAUTION, site_screen
    from models.pack import content
    from models.pack.report_html import render_report, report_context

    case, phys = demo_run_physics
    result = scenario.economics(case, phys, case.finance, with_risk=False)
    scope = content.select_scope(case, result, None, True)
    context = report_context(case, result, scope, [])
    expected = site_screen(case, phys.operation, result.plan)
    assert len(context["harmonic_rows"]) == len(expected) == 4  # two sites, today and with the plan
    shown = [[c["text"] for c in r["cells"]] for r in context["harmonic_rows"]]
    assert [s[:2] for s in shown] == expected[["site_id", "scenario"]].values.tolist()
    assert [s[-1] for s in shown] == expected["finding"].tolist()
    html = render_report(case, result, scope)
    assert "Harmonic screen by site" in html and "IEEE 519-2014" in html
    assert "A first screen, not a harmonic study" in html and SCREEN_CAUTION.split(":")[0] in html


def test_a_drive_projects_record_carries_its_sites_harmonic_finding(demo_run_physics):
    # the demo plan puts drives on site HRW, whose screen with the plan finds distortion past IEEE 519's limits
    # (harmonic_screen.csv): the decision record of each of its drive projects says so, the fleet plan's finding
    from models.options import DRIVE_TECHNOLOGIES
    from models.pack import content
    from models.pack.decision_record import record_context

    case, phys = demo_run_physics
    result = scenario.economics(case, phys, case.finance, with_risk=False)
    scope = content.select_scope(case, result, None, True)
    screen = content.plan_harmonic_screen(case, result).set_index(["site_id", "scenario"])
    finding = screen.loc[("HRW", "plan"), "finding"]
    assert "harmonic study" in finding
    rec = scope.recommended
    drives = rec[rec["technology"].isin(DRIVE_TECHNOLOGIES) & (rec["site_id"] == "HRW")]
    assert len(drives)
    cautions = record_context(case, result, scope, str(drives["asset_id"].iloc[0]))["cautions"]
    today = screen.loc[("HRW", "today"), "finding"]
    when = "today and with the plan" if "harmonic study" in today else "with the plan"
    # the record names what the screen finds with the plan (the demo's HRW: its voltage distortion among them)
    assert "voltage distortion about" in finding
    said = "site HRW's harmonic screen finds voltage distortion"
    assert any(said in c and f"{when} (harmonic_screen.csv)" in c for c in cautions)
    assert not any("check voltage distortion limits" in c for c in cautions)  # the general words give way to it
    lines = rec[~rec["technology"].isin(DRIVE_TECHNOLOGIES + ("capacitor",)) & (rec["option_id"] != rec["keep_option_id"])]
    if len(lines):
        other = record_context(case, result, scope, str(lines["asset_id"].iloc[0]))["cautions"]
        assert not any("harmonic_screen.csv" in c for c in other)


def test_a_records_reasons_say_where_its_project_breaks_even(demo_run_physics):
    from models.pack import content
    from models.pack.decision_record import record_context
    from models.risk import break_even_words

    case, phys = demo_run_physics
    result = scenario.economics(case, phys, case.finance, with_risk=False)
    scope = content.select_scope(case, result, None, True)
    rec = scope.recommended
    rec = rec[rec["option_id"] != rec["keep_option_id"]].iloc[0]
    words = break_even_words(rec, brief=True)
    assert words and float(rec["break_even_capital_mult"]) > 1.0 > float(rec["break_even_price_mult"])
    reasons = record_context(case, result, scope, str(rec["asset_id"]))["reasons"]
    assert any(r.startswith("NPV ") and r.endswith(" " + words) for r in reasons)
