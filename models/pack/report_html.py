"""The capital-request report: one self-contained HTML page (plotly.js embedded once, no network).

:func:`render_report` returns the page as text. plotly.js is inlined once in ``<head>`` and each chart
is a fragment written with ``include_plotlyjs=False`` and a fixed element id, so the same run gives
the same page. All user text is escaped by the template engine.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
import pandas as pd
import plotly.io as pio
from markupsafe import Markup
from plotly.offline import get_plotlyjs

from models.case import power_label, rating_in_unit
from models.pack import content, figures, templates
from models.plan import option_labels, plan_capital_spent, plan_purchase_yr
from models.reactive_plan import withdrawn_text
from models.wording import counted

#: Sections of the report: (anchor, title).
SECTIONS: tuple[tuple[str, str], ...] = (
    ("summary", "Executive summary"), ("scope", "Scope and assets"), ("options", "Options compared"),
    ("savings", "Savings by component"), ("cashflow", "Cash flow"), ("risk", "Sensitivity and Monte Carlo"),
    ("plan", "Fleet plan by year"), ("register", "Risks and assumptions register"),
    ("mv", "Measurement and verification plan"), ("emissions", "Emissions"), ("cautions", "Cautions"),
    ("appendix", "Appendix"),
)


def cell(text: Any, cls: str = "") -> dict[str, str]:
    """One table cell: its text and CSS class."""
    return {"text": "" if text is None else str(text), "cls": cls}


def rating_text(value: float) -> str:
    """A motor rating as a nameplate gives it, without trailing zeros: two decimals below 10 (0.75, 7.5), one above
    (100.6 hp for 75 kW, as the decision records write it; 250).

    >>> rating_text(0.75), rating_text(7.5), rating_text(100.58), rating_text(1250.0)
    ('0.75', '7.5', '100.6', '1,250')
    """
    return f"{value:,.{2 if abs(value) < 10 else 1}f}".rstrip("0").rstrip(".")


def num(value: float, fmt: str = "{:,.0f}", suffix: str = "", signed: bool = True) -> dict[str, str]:
    """A right-aligned numeric cell; missing values show a dash, negatives in red unless ``signed`` is False."""
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        return cell("-", "num na")
    text = fmt.format(value)
    if text.startswith("-") and not any(ch in "123456789" for ch in text):  # a rounded zero reads 0, not -0
        text, value = text[1:], 0.0
    return cell(text + suffix, "num neg" if (signed and value < 0) else "num")


def row(cells: list[dict[str, str]], pick: bool = False) -> dict[str, Any]:
    """One table row."""
    return {"cells": cells, "pick": pick}


def chart(fig, name: str) -> Markup:
    """Return a chart fragment (plotly writes its own JSON with ``<`` escaped)."""
    return Markup(pio.to_html(fig, full_html=False, include_plotlyjs=False, div_id=f"chart-{name}",
                              config={"displaylogo": False, "responsive": True, "showSendToCloud": False,
                                      "modeBarButtonsToRemove": ["sendChartToCloud", "sendDataToCloud"]}, default_width="100%"))


def _payback_cell(value: float, horizon: int, lost_again: bool = False) -> dict[str, str]:
    text = content.years_text(value, horizon, lost_again=bool(lost_again))
    return cell(text, "num" if math.isfinite(value) else "num na")


def _option_rows(frame: pd.DataFrame, cur: str, horizon: int, recommended: set[str]) -> list[dict[str, Any]]:
    rows = []
    for r in frame.itertuples(index=False):
        rows.append(row([cell(r.label), num(r.capital), num(r.bill_saving_per_yr + r.saving_maintenance_per_yr),
                         num(r.npv), cell(content.rate_text(r.irr_frac, r.irr_status), "num"),
                         _payback_cell(r.simple_payback_yr, horizon, getattr(r, "simple_payback_lost_again", False)),
                         num(r.co2_avoided_t_per_yr, "{:,.1f}"),
                         cell(r.flags or "", "small")],
                        pick=f"{r.asset_id}/{r.option_id}" in recommended))
    return rows


def _financed_context(result, financed, cur: str, names: list[str] | None = None) -> dict[str, Any]:
    """The report's table of the plan's flows to the owner under its financing (empty for cash); ``names`` the
    budget year of each plan year, where the case names them."""
    if financed is None:
        return {"financed_headers": [], "financed_rows": [], "financed_numeric": (), "financed_note": ""}
    kind = str(result.assumptions.financing)
    loan = kind == "loan"
    parts = {"loan": (("loan_proceeds", "Borrowed"), ("loan_repayment", "Repaid"),
                      ("interest_tax_shield", "Interest tax shield")),
             "lease": (("company_capital", "Capital paid by the lessor"),
                       ("company_incentive_and_depreciation", "Incentive and depreciation shield kept by it"),
                       ("lease_payment", "Lease payments"), ("lease_tax_shield", "Their tax shield"),
                       ("lease_buyout", "Buyout"))}.get(
        kind, (("company_capital", "Capital paid by the company"),
               ("company_incentive_and_depreciation", "Incentive and depreciation shield kept by it"),
               ("company_savings_share", "Savings share paid to it, after tax")))
    headers = ["Plan year", f"Cash net [{cur}]"] + [f"{t} [{cur}]" for _, t in parts] + [
        f"Financed net [{cur}]", f"Cumulative financed [{cur}]"]
    rows = [row([cell(content.plan_year_text(r["year"], names or []), "num"), num(r["cash_net"])] + [num(r[k]) for k, _ in parts]
                + [num(r["financed_net"]), num(r["cumulative_financed"])])
            for r in financed.to_dict("records")]
    note = ("Repayments are the loan's equal yearly payments, in base-year money where the analysis is real; a "
            "balance still owed at the end is repaid in the last year." if loan else
            "The lessor buys each project's first purchase and keeps its incentive and depreciation shield; the owner "
            "pays the lease's equal yearly payments (deducted from profit), in base-year money where the analysis is "
            "real, then buys the equipment out at the buyout price; payments still owed and a buyout after the study "
            "period are settled in its last year; the owner pays mid-life work and later purchases." if kind == "lease" else
            "The company buys each project's first purchase and keeps its incentive and depreciation shield; the "
            "owner pays mid-life work and later purchases, and the equipment is the owner's once the contract ends.")
    note += " Positive: money to the owner; negative: money out."
    return {"financed_headers": headers, "financed_rows": rows, "financed_numeric": tuple(range(len(headers))),
            "financed_note": note}


def report_context(case, result, scope: content.Scope, files: list[str]) -> dict[str, Any]:
    """Return everything the report template shows (plain values; the template escapes them)."""
    s = case.settings
    a = result.assumptions
    cur = s.currency
    horizon = int(a.horizon_yr)
    h = content.headline(result, scope)
    # reactive projects of the plan at the share of their saving the plan counts: rows and charts add up to
    # the headline
    chosen = content.plan_counted(result, scope.chosen)
    rec = content.plan_counted(result, scope.recommended)
    rec_keys = set(rec["asset_id"] + "/" + rec["option_id"])
    assets = case.assets.set_index("asset_id")

    cards = [
        {"label": "Capital", "value": content.money(h.capital, cur), "note": counted(h.n_projects, "project")},
        {"label": "Yearly saving", "value": content.money(h.yearly_saving, cur),
         "note": f"bill and maintenance, {content.prices_year_words(result)}, as the plan counts them"},
        {"label": "NPV", "value": content.money(h.npv, cur),
         "note": (f"at {a.discount_rate_frac:.1%}, each project over {horizon} yr from its own start, at the plan start"
                  if len(result.plan) and int(result.plan["start_yr"].max()) > 0 and scope.mode != "assets"
                  else f"at {a.discount_rate_frac:.1%} over {horizon} yr, plan start")},
        {"label": "Payback", "value": content.years_text(h.payback_yr, horizon) if h.n_projects else "-",
         "note": "simple, combined cash flow" if h.n_projects else "no project"},
        {"label": "CO2 avoided", "value": f"{h.co2_t_per_yr:,.1f} t/yr", "note": f"first year, at {a.grid_co2_kg_per_kwh * (1 - a.grid_co2_decline_frac):.4g} kg/kWh "
                                                                         f"({a.grid_co2_kg_per_kwh:g} less {a.grid_co2_decline_frac:.1%})"},
    ]
    keep_count = int((rec["option_id"] == rec["keep_option_id"]).sum())
    if h.n_projects == 0:
        # which of the two it is: positive-NPV projects the budget leaves out, or none worth buying
        res_all = result.results
        status = result.plan_status or {}
        taken = set(status.get("withdrawn", ())) | set(status.get("set_aside", ()))  # left out for their value
        worth = res_all[(res_all["capital"] > 0) & (res_all["npv"] > 0)
                        & ~(res_all["asset_id"] + "/" + res_all["option_id"]).isin(list(taken))]
        worth = worth.loc[worth.groupby("asset_id")["npv"].idxmax()] if len(worth) else worth
        if len(worth) and content.has_budget(result) and scope.mode != "assets":
            summary = (f"No project is recommended: the budget buys none of the {counted(len(worth), 'asset')} whose "
                       f"best option pays (together {content.money(float(worth['capital'].sum()), cur)} of capital and "
                       f"{content.money(float(worth['npv'].sum()), cur)} of NPV, each priced alone; results.csv lists "
                       "them). A larger budget would buy them.")
        else:
            summary = (f"No project is recommended on {counted(len(scope.asset_ids), 'asset')}: no option beats "
                       "keeping today's motor.")
    else:
        one = h.n_projects == 1
        # the headline payback is the combined cash flow's: the projects of later plan years can take much longer
        slowest = float(pd.to_numeric(chosen["simple_payback_yr"], errors="coerce").replace(np.inf, np.nan).max()) \
            if not one and "simple_payback_yr" in chosen else float("nan")
        slowest_text = (f" on their combined cash flow (the slowest project alone in "
                        f"{content.years_text(slowest, horizon)}: the decision table)"
                        if np.isfinite(slowest) and np.isfinite(h.payback_yr) and slowest > h.payback_yr + 1.0 else "")
        summary = (f"{counted(h.n_projects, 'project')} on {counted(len(scope.asset_ids), 'asset')} "
                   f"{'is' if one else 'are'} recommended for "
                   f"{content.money(h.capital, cur)} of capital. {'It saves' if one else 'They save'} about "
                   f"{content.money(h.yearly_saving, cur)} a year ({h.energy_saved_kwh_per_yr / 1000:,.0f} MWh/yr), "
                   f"{'pays' if one else 'pay'} back {content.years_text(h.payback_yr, horizon, within=True)}"
                   f"{slowest_text} and "
                   f"{'adds' if one else 'add'} {content.money(h.npv, cur)} of value at a discount rate of "
                   f"{a.discount_rate_frac:.1%}.")
    if h.n_projects and content.has_budget(result) and "in_plan" in chosen:
        outside = chosen.loc[~chosen["in_plan"].astype(bool)]
        if len(outside) and float(outside["capital"].sum()) > 0:
            summary += (f" Of that capital, {content.money(float(outside['capital'].sum()), cur)} "
                        f"({counted(len(outside), 'project')}) lies outside the budgeted plan: it needs money beyond "
                        "the plan's budgets (the decision table's plan year reads '-').")
    if h.n_projects and scope.mode != "assets" and len(result.plan):
        by_year, later_capital = plan_capital_spent(result.plan, result.results, result.capital_spend_by_year,
                                                    len(a.budget_per_yr))
        # what the plan spends over the study period beyond its projects' first purchases: items bought again
        again = float(by_year.sum()) + float(later_capital) - float(result.plan["capital"].sum())
        if again > 0.005:
            summary += (f" Over the study period the plan also spends {content.money(again, cur)} on buying items "
                        "again at the end of their lives (in the plan-by-year table's 'later' row, after the budgeted "
                        "years).")
    if keep_count:
        summary += f" For {counted(keep_count, 'asset')} no option beats keeping today's motor."
    alone, together = content.plan_bill_savings_apart_and_together(result)
    if scope.mode != "assets" and together is not None and len(result.plan) and alone - together > 0.005 * max(abs(alone), 1.0):
        summary += (f" With the whole plan in place the sites' bills fall by {content.money(together, cur)} a year, less "
                    f"than the {content.money(alone, cur)} its projects save on the bills counted one by one (a "
                    "reactive project at the share of its saving the plan credits it), as the headline saving and the "
                    "NPV count them: they share demand peaks, ratchets and reactive allowances (the Bills sheet of the "
                    f"workbook). The {content.money(alone - together, cur)} a year between the two would lower the "
                    "NPV by about its present value (the register of assumptions).")
    drawn = content.uncertainty(result, scope) if h.n_projects and scope.mode != "assets" else None
    if drawn is not None and drawn.plan_npv is not None:
        d = drawn.plan_npv
        summary += (f" The NPV of {content.money(h.npv, cur)} is the base case's: the Monte Carlo of the plan's "
                    f"uncertain inputs ({drawn.n_draws:,} draws) gives a median of {content.money(d['npv_p50'], cur)}, with 80 % of the draws between "
                    f"{content.money(d['npv_p10'], cur)} and {content.money(d['npv_p90'], cur)} (section 6).")
    follow_on = content.replace_now_beside_plan(result)
    if scope.mode != "assets" and len(follow_on):
        summary += (f" For {counted(len(follow_on), 'asset')} whose plan project keeps today's motor (a drive or a "
                    "capacitor added), the end-of-life comparison, which prices a failure's outage, finds replacing "
                    f"the motor now cheaper: that would need {content.money(float(follow_on['capital'].sum()), cur)} "
                    "of capital this request does not hold (each decision record says so; the outage costs are "
                    "placeholders where the case gives none).")
    taxes = content.taxes_text(result, cur) if scope.mode != "assets" and len(result.plan) else ""
    if taxes:
        summary += " " + taxes
    if scope.mode != "assets" and len(result.plan):  # a plan past the harmonic limits says so where it is decided
        from models.harmonics import plan_screen_text

        in_scope = set(case.assets.loc[case.assets["asset_id"].isin(list(scope.asset_ids)), "site_id"].astype(str))
        screened = plan_screen_text(content.plan_harmonic_screen(case, result), in_scope)
        if screened:
            number = 1 + [anchor for anchor, _ in SECTIONS].index("cautions")  # the screen's table, under the cautions
            summary += f" {screened} Section {number} tables the screen."
    financed = None
    if scope.mode != "assets" and len(result.plan) and str(getattr(result.assumptions, "financing", "cash")) != "cash":
        from models.financing import plan_financing, plan_financing_words

        financed = plan_financing(result)
        summary += " " + plan_financing_words(result, financed) + " Section 5 tables it year by year."

    # the plan's NPV at the plan's start (a project started in plan year k is discounted k more years): the
    # column then adds up to the headline NPV; a project outside the plan would start at once (its own NPV)
    # a motor replaced when it fails is bought after its project enters the plan: the year it is bought beside
    bought = dict(zip(result.plan["asset_id"], plan_purchase_yr(result.plan, result.results,
                                                                  result.capital_spend_by_year))) if len(result.plan) else {}
    decision_rows = []
    for r in rec.itertuples(index=False):
        is_keep = r.option_id == r.keep_option_id
        npv_start = float(r.plan_npv_at_start)
        year = int(r.plan_start_yr)
        later = int(bought.get(r.asset_id, year))
        decision_rows.append(row([
            cell(r.asset_id, "id"), cell(assets.loc[r.asset_id, "description"] or ""), cell(r.label),
            cell((f"{year}, bought {later}" if later > year else year) if r.in_plan else "-", "num"),
            num(0.0 if is_keep else r.capital), num(0.0 if is_keep else r.bill_saving_per_yr + r.saving_maintenance_per_yr),
            num(0.0 if is_keep else npv_start),
            cell("-", "num na") if is_keep else _payback_cell(r.simple_payback_yr, horizon,
                                                              getattr(r, "simple_payback_lost_again", False)),
            num(0.0 if is_keep else r.co2_avoided_t_per_yr, "{:,.1f}"), cell(r.reason_short, "small")]))
    if len(decision_rows) > 1:  # the capital, saving and NPV the summary gives, as the columns' sums
        taken = rec[rec["option_id"] != rec["keep_option_id"]]
        decision_rows.append(row([
            cell("Total", "id"), cell(""), cell(counted(len(taken), "project")), cell(""),
            num(float(taken["capital"].sum())),
            num(float((taken["bill_saving_per_yr"] + taken["saving_maintenance_per_yr"]).sum())),
            num(float(taken["plan_npv_at_start"].sum())), cell(""),
            num(float(taken["co2_avoided_t_per_yr"].sum()), "{:,.1f}"), cell("")], pick=True))

    asset_rows = []
    for asset_id in scope.asset_ids:
        x = assets.loc[asset_id]
        asset_rows.append(row([
            cell(asset_id, "id"), cell(x["description"] or ""), cell(x["site_id"]), cell(x["application"] or ""),
            cell(rating_text(float(rating_in_unit(float(x["rated_p_kw"]), s.power_unit))), "num"),
            num(float(x["poles"]), "{:.0f}"), cell(x["efficiency_class"] or ""),
            num(float(x["year_installed"]), "{:.0f}"), num(float(x["rewind_count"]), "{:.0f}"),
            cell(x["speed_control"] or ""), cell(x["criticality"] or ""), num(float(x["data_quality_pct"]), "{:.0f}", " %")]))

    res = result.results[result.results["asset_id"].isin(list(scope.asset_ids))]
    keep_ids = content.keep_option_ids(result)
    option_ids = [o for o in dict.fromkeys(res["option_id"]) if o not in set(keep_ids)]
    labels = option_labels(result.results)  # every option of the catalogue the run priced, as it names them
    npv = res.set_index(["asset_id", "option_id"])["npv"]
    failed_ids = set(res.loc[res["failed"].astype(bool), "asset_id"]) if "failed" in res else set()
    matrix_rows = []
    for asset_id in scope.asset_ids:
        cells = [cell(f"{asset_id} (failed)" if asset_id in failed_ids else asset_id, "id")]
        for o in option_ids:
            if (asset_id, o) in npv.index:
                c = num(float(npv[(asset_id, o)]))
                if f"{asset_id}/{o}" in rec_keys:
                    c["cls"] += " pick"
                cells.append(c)
            else:
                cells.append(cell("-", "num na"))
        matrix_rows.append(row(cells))

    flows = content.portfolio_flows(result, chosen)
    credited = [content.plan_credit_share(result, r.asset_id, r.option_id) for r in chosen.itertuples(index=False)]
    credited = [x for x in credited if x is not None]
    share_text = (f"{min(credited):.0%}" if credited and f"{min(credited):.0%}" == f"{max(credited):.0%}"
                  else f"{min(credited):.0%}-{max(credited):.0%}" if credited else "")
    flow_note = (f"{counted(len(credited), 'reactive project')} credited {share_text} of "
                 f"{'its' if len(credited) == 1 else 'their'} own bill saving; the workbook's cash-flow blocks show "
                 "each project priced alone") if credited else ""
    flow_rows = [row([cell(int(r.year), "num"), num(r.net), num(r.cumulative), num(r.discounted), num(r.cumulative_discounted)])
                 for r in flows.itertuples(index=False)]

    # the uncertainty of what the pack asks money for: the exact plan's (its tornado, its NPV per draw, its projects
    # at their plan year); a result without it falls back to each asset's best option, saying so
    unc = content.uncertainty(result, scope)
    mc = unc.projects

    def project_text(asset_id: str, option_id: str) -> str:
        return f"{asset_id}: {labels.get(option_id, option_id)}"

    mc_rows = [row([cell(project_text(*str(r.project_id).rsplit("/", 1)) if "/" in str(r.project_id) else r.project_id, "id")]
                   + ([cell(int(r.start_yr), "num")] if unc.of_plan else [])
                   + [num(r.npv_p10), num(r.npv_p50), num(r.npv_p90),
                      cell(content.chance_text(float(r.prob_npv_positive_frac)), "num"), num(r.payback_p10_yr, "{:.1f}"),
                      num(r.payback_p50_yr, "{:.1f}"), num(r.payback_p90_yr, "{:.1f}")]) for r in mc.itertuples(index=False)]
    mc_headers = (["Project"] + (["Plan year"] if unc.of_plan else [])
                  + [f"NPV P10 [{cur}]", f"NPV P50 [{cur}]", f"NPV P90 [{cur}]", "P(NPV > 0)", "Payback P10 [yr]",
                     "Payback P50 [yr]", "Payback P90 [yr]"])

    budgets = tuple(a.budget_per_yr)
    plan_rows = []
    years = sorted(set(result.plan["start_yr"].astype(int)) | set(result.plan_greedy["start_yr"].astype(int)) | set(range(len(budgets))))
    n_plan_years = (max(years) + 1) if years else 0
    spent = {name: plan_capital_spent(frame, result.results, result.capital_spend_by_year, n_plan_years)
             for name, frame in (("exact", result.plan), ("greedy", result.plan_greedy))}
    names = content.plan_year_names(case, result, n_plan_years)
    for year in years:
        e = result.plan[result.plan["start_yr"].astype(int) == year]
        g = result.plan_greedy[result.plan_greedy["start_yr"].astype(int) == year]
        plan_rows.append(row([cell(content.plan_year_text(year, names), "num"), num(budgets[year]) if year < len(budgets) else cell("no limit", "num na"),
                              num(float(spent["exact"][0][year])), cell(len(e), "num"),
                              num(float(e["npv_at_plan_start"].sum())), num(float(spent["greedy"][0][year])),
                              cell(len(g), "num"), num(float(g["npv_at_plan_start"].sum()))]))
    if spent["exact"][1] > 0.005 or spent["greedy"][1] > 0.005:  # replacements at failure, repeat purchases
        plan_rows.append(row([cell("later", "num"), cell("not budgeted", "num na"), num(spent["exact"][1]), cell(""),
                              cell(""), num(spent["greedy"][1]), cell(""), cell("")]))
    if len(plan_rows) > 1:  # the plans' totals, later spend included (as the workbook's Plan sheet)
        later = spent["exact"][1] > 0.005 or spent["greedy"][1] > 0.005
        # (with later spend the total is not comparable with the budgets' sum: its budget cell is left blank)
        plan_rows.append(row([cell("Total, later included" if later else "Total", "num"),
                              cell("") if later else num(float(sum(budgets))) if budgets else cell("no limit", "num na"),
                              num(float(spent["exact"][0].sum() + spent["exact"][1])), cell(len(result.plan), "num"),
                              num(float(result.plan["npv_at_plan_start"].sum())),
                              num(float(spent["greedy"][0].sum() + spent["greedy"][1])), cell(len(result.plan_greedy), "num"),
                              num(float(result.plan_greedy["npv_at_plan_start"].sum()))]))
    comp = result.plan_comparison
    withdrawn = withdrawn_text(result.plan_status, labels=labels)
    plan_note = (f"Exact plan NPV {content.money(float(comp.get('npv_exact', np.nan)), cur)} vs rank-order "
                 f"{content.money(float(comp.get('npv_greedy', np.nan)), cur)}: ranking the projects by NPV per unit of "
                 "capital (profitability index) leaves "
                 f"{content.money(float(comp.get('shortfall', np.nan)), cur)} on the table. {content.PLAN_SPEND_TEXT} "
                 f"The fleet plan covers the whole case; "
                 f"this pack covers {counted(len(scope.asset_ids), 'asset')}."
                 + (f" Exact plan: {result.plan_status['message']}." if (result.plan_status or {}).get("message") else "")
                 + (" (The reactive check withdraws from the search the reactive projects that add almost nothing "
                    "beside the rest of the plan: a capacitor where another project already corrects the site.)"
                    if "reactive check" in str((result.plan_status or {}).get("message", "")) else "")
                 + (" " + withdrawn if withdrawn else ""))

    register = content.risk_register(case, result, scope)
    register_rows = [row([cell(r.category), cell(r.item), cell(r.detail), cell(r.assets, "small"), cell(r.response, "small")])
                     for r in register.itertuples(index=False)]
    finance_rows = []
    for item in content.finance_rows(a, cur):
        value = item["value"]
        if isinstance(value, float) and math.isinf(value):
            value = "no cap"
        elif isinstance(value, tuple):
            value = ", ".join(f"{v:,.0f}" for v in value) or "no limit"
        value, unit = content.shown_as_percent(value, item["unit"])
        if isinstance(value, str):  # replace_now -> "replace now"
            value = value.replace("_", " ")
        finance_rows.append(row([cell(item["label"]), cell(value), cell(unit), cell(item["meaning"]),
                                 cell("same as the program default" if item["program_default"] else "differs from the program default",
                                      "small")]))

    mv = content.mv_plan(result, chosen, case)
    mv_protocol_rows = []
    for (option, weeks, measure), grp in mv.groupby(["ipmvp_option", "duration_weeks", "measure"], sort=True):
        projects = [project_text(a_, o_) for a_, o_ in zip(grp["asset_id"], grp["option_id"])]
        logging = (f"{weeks} weeks after" if measure.startswith("after the change only")
                   else f"{weeks} weeks before and {weeks} after")
        mv_protocol_rows.append(row([cell(f"Option {option}"), cell(logging), cell(measure),
                                     cell(content.asset_list_text(projects, 12), "small")]))
    mv_rows = [row([cell(project_text(r.asset_id, r.option_id), "id"), cell(f"{r.ipmvp_option}, {r.duration_weeks} wk"),
                    num(r.baseline_energy_kwh_per_yr), num(r.baseline_mean_p_kw, "{:,.1f}"),
                    num(r.baseline_power_factor, "{:.2f}"), num(r.baseline_speed_rpm, "{:,.0f}"), num(r.running_h_per_yr),
                    num(r.expected_energy_kwh_per_yr), num(r.expected_mean_p_kw, "{:,.1f}"), num(r.expected_power_factor, "{:.2f}"),
                    num(r.expected_speed_rpm, "{:,.0f}")]) for r in mv.itertuples(index=False)]
    mv_text = ("Log each recommended project before and after the change with the same instruments and at the same "
               "production: IPMVP Option A (key parameter measured: kW and PF, hours logged) for a like-for-like swap at "
               "unchanged duty, two weeks each side; Option B (all parameters metered) for a change in speed control, a "
               "full duty cycle of about four weeks each side. Compare with the modelled baselines below; a measured "
               "baseline more than about 10 % away from the model calls for a re-run before the purchase order. A motor "
               "that has failed is logged after the change only, against the modelled baseline. Once installed, give "
               "each project's measurements in the case's verification table: the run then sets the energy it avoided "
               "beside the prediction (savings_verified.csv).")

    em_rows = [row([cell(project_text(r.asset_id, r.option_id)), num(r.energy_saved_kwh_per_yr), num(r.co2_avoided_t_per_yr, "{:,.2f}"),
                    num(r.abatement_cost_per_t, "{:,.0f}", signed=False)]) for r in chosen.itertuples(index=False)]
    em_rows.append(row([cell("Total"), num(h.energy_saved_kwh_per_yr), num(h.co2_t_per_yr, "{:,.2f}"), cell("")], pick=True))
    emissions_text = (f"CO2 avoided in the first year at a grid emission factor of {a.grid_co2_kg_per_kwh:g} kg CO2 per kWh "
                      f"(the case's base-year factor, declining {a.grid_co2_decline_frac:.1%} a year; state whether it is "
                      f"location- or market-based and average or marginal). Tonnes in the first year of savings = kWh saved x "
                      f"factor x (1 - decline) / 1000 ({a.grid_co2_kg_per_kwh * (1 - a.grid_co2_decline_frac):.4g} kg per kWh); only "
                      f"electricity saved at the meter counts. Total: {h.co2_t_per_yr:,.1f} t CO2 per year.")

    appendix = []
    for asset_id in scope.asset_ids:
        frame = res[(res["asset_id"] == asset_id) & (res["option_id"] != keep_ids[asset_id])]
        appendix.append({"title": f"{asset_id}: {assets.loc[asset_id, 'description'] or ''}"
                                  + (" (failed: NPVs over the least that puts it back in service now)"
                                     if asset_id in failed_ids else ""),
                         "rows": _option_rows(frame, cur, horizon, rec_keys)})

    figs = {
        "waterfall": chart(figures.savings_waterfall(chosen, cur), "waterfall"),
        "by_project": chart(figures.savings_by_project(chosen, cur), "by-project"),
        "cumulative": chart(figures.cumulative_cash_flow(flows, cur), "cumulative"),
        "tornado": chart(figures.tornado(unc.tornado, cur, plan=unc.of_plan), "tornado"),
        "monte_carlo": chart(figures.plan_npv_draws(result.plan_npv_draws, unc.plan_npv, cur) if unc.plan_npv is not None
                             else figures.monte_carlo(mc, cur), "monte-carlo"),
        "plan": chart(figures.plan_by_year(spent["exact"][0], spent["greedy"][0], budgets, cur), "plan"),
        "bills": chart(figures.bills_before_after(result.bills, cur), "bills"),
    }
    assets_text = counted(len(scope.asset_ids), "asset")
    scope_text = {"plan": f"the exact fleet plan ({counted(len(scope.projects), 'project')} on {assets_text})",
                  "assets": f"{counted(len(scope.asset_ids), 'requested asset')}, every option compared",
                  "plan and assets": f"the exact fleet plan and {assets_text}"}[scope.mode]
    return {
        "case_name": s.name, "description": getattr(s, "description", "") or "", "invented": bool(s.invented),
        "currency": cur, "scope_text": scope_text, "discount_text": f"{a.discount_rate_frac:.1%} ({a.rate_basis})",
        "horizon": horizon, "sections": SECTIONS, "cards": cards, "summary_text": summary,
        "decision_headers": ["Asset", "Description", "Recommended", "Plan year", f"Capital [{cur}]",
                             f"Saving [{cur}/yr]", f"NPV at plan start [{cur}]", "Simple payback [yr]", "CO2 [t/yr]", "Why"],
        "decision_rows": decision_rows, "decision_numeric": (3, 4, 5, 6, 7, 8),
        "measures_text": content.measures_text(a) + (
            " A plan year read \"n, bought m\": the project enters the plan in year n and today's motor, replaced when it "
            "fails, is bought in plan year m, the year its capital is spent (as section 7 counts it)."
            if any(bought.get(a_id, 0) > int(y) for a_id, y in zip(result.plan["asset_id"], result.plan["start_yr"]))
            else ""),
        "asset_headers": ["Asset", "Description", "Site", "Application", power_label(s.power_unit), "Poles", "Class", "Installed", "Rewinds",
                          "Control", "Criticality", "Data quality"],
        "asset_rows": asset_rows, "asset_numeric": (4, 5, 7, 8, 11),
        "failed_note": (" For a motor marked (failed), each NPV is over the least that puts it back in service now "
                        "(a rewind or the cheapest new motor the rules allow), not over keeping it."
                        if failed_ids else ""),
        "matrix_headers": ["Asset"] + [labels.get(o, o) for o in option_ids], "matrix_rows": matrix_rows,
        "matrix_numeric": tuple(range(1, len(option_ids) + 1)),
        "flow_headers": ["Plan year", f"Net [{cur}]", f"Cumulative [{cur}]", f"Discounted [{cur}]",
                         f"Cumulative discounted [{cur}]"], "flow_rows": flow_rows,
        "flow_note": flow_note,
        "flow_numeric": (0, 1, 2, 3, 4),
        **_financed_context(result, financed, cur,
                            content.plan_year_names(case, result, len(financed)) if financed is not None else None),
        "tornado_note": content.tornado_text(unc), "plan_npv_note": content.plan_npv_text(unc, cur),
        "mc_headers": mc_headers, "mc_rows": mc_rows, "mc_note": content.monte_carlo_text(unc),
        "mc_numeric": tuple(range(1, len(mc_headers))),
        "plan_headers": ["Plan year", f"Budget [{cur}]", f"Exact: capital spent [{cur}]", "projects started",
                         f"NPV at plan start [{cur}]", f"Rank-order: capital spent [{cur}]", "projects started",
                         f"NPV at plan start [{cur}]"],
        "plan_rows": plan_rows, "plan_numeric": tuple(range(8)), "plan_note": plan_note,
        **_scenario_context(case, result, cur),
        "register_headers": ["Category", "Item", "Detail", "Assets", "Response"], "register_rows": register_rows,
        "finance_headers": ["Assumption", "Value", "Unit", "Meaning", "Source"], "finance_rows": finance_rows,
        "basis_headers": ["Basis", "Value", "Note"],
        "basis_rows": [row([cell(item), cell(value), cell(note, "small")]) for item, value, note in content.basis_rows(case, result)],
        "mv_text": mv_text,
        "mv_protocol_headers": ["IPMVP", "Logging", "What to measure", "Projects"], "mv_protocol_rows": mv_protocol_rows,
        "mv_headers": ["Project", "IPMVP", "Baseline kWh/yr", "Baseline mean kW", "Baseline PF", "Baseline rpm",
                       "Running h/yr", "Expected kWh/yr", "Expected mean kW", "Expected PF", "Expected rpm"],
        "mv_rows": mv_rows, "mv_numeric": tuple(range(2, 11)),
        "emissions_text": emissions_text,
        "emission_headers": ["Project", "Energy saved kWh/yr", "CO2 avoided t/yr (first year)",
                             f"Abatement cost {cur}/t (-NPV per discounted t over the horizon)"],
        "emission_rows": em_rows, "emission_numeric": (1, 2, 3),
        "cautions": list(content.CAUTIONS) + list(content.REQUEST_CAUTIONS),
        **_harmonic_context(case, result, scope),
        **_verified_context(case, result, scope, cur),
        "appendix": appendix,
        "appendix_headers": ["Option", f"Capital [{cur}]", f"Saving [{cur}/yr]", f"NPV [{cur}]", "IRR",
                             "Simple payback [yr]", "CO2 [t/yr]", "Flags"],
        "appendix_numeric": (1, 2, 3, 4, 5, 6),
        "files": files, "figures": figs,
    }


def _verified_context(case, result, scope: content.Scope, cur: str) -> dict[str, Any]:
    """The savings measured after the projects of the assets in scope, beside their predictions (section 9)."""
    from models.verification import verify_savings

    table = verify_savings(case, result)
    table = table[table["asset_id"].isin(list(scope.asset_ids))]
    labels = option_labels(result.results)
    rows = []
    for r in table.to_dict("records"):
        rows.append(row([cell(f"{r['asset_id']}: {labels.get(r['option_id'], r['option_id'])}"), cell(r["basis"]),
                         num(r["adjusted_baseline_kwh"], signed=False), num(r["reporting_kwh"], signed=False),
                         num(r["avoided_kwh"]), num(r["predicted_avoided_kwh"]),
                         num(r["realisation_pct"], "{:.0f}", signed=False), num(r["verified_value"]),
                         cell(r["finding"], "small")]))
    return {"verified_rows": rows, "verified_numeric": (2, 3, 4, 5, 6, 7),
            "verified_headers": ["Project", "Baseline adjusted by", "Adjusted baseline [kWh]", "Measured after [kWh]",
                                 "Avoided [kWh]", "Predicted [kWh]", "Of the prediction [%]", f"Value [{cur}]",
                                 "Finding"]}


def _order_span(low: float, high: float) -> str:
    """A resonance's range of orders to one decimal ("18.7", or "7.2-9.7")."""
    lo, hi = f"{low:.1f}", f"{high:.1f}"
    return lo if lo == hi else f"{lo}-{hi}"


def _harmonic_context(case, result, scope: content.Scope) -> dict[str, Any]:
    """The harmonic screen of the sites in scope, today and with the plan (section 11)."""
    from models.harmonics import SCREEN_CAUTION, ordinal

    table = content.harmonic_screen(case, result, scope)
    rows = []
    for r in table.to_dict("records"):
        screened = r["short_circuit_kva"] == r["short_circuit_kva"]
        rows.append(row([cell(r["site_id"]), cell(r["scenario"]), num(r["drive_kva"], signed=False),
                         num(r["short_circuit_kva"], signed=False) if screened else cell("not given"),
                         cell(f"{r['voltage_thd_pct']:.1f} / {r['voltage_thd_limit_pct']:g}" if screened else ""),
                         cell(f"{ordinal(int(r['worst_harmonic']))}: {r['worst_harmonic_pct']:.1f} / "
                              f"{r['harmonic_limit_pct']:g}" if screened and r["worst_harmonic"] else
                              "no drives" if screened else ""),
                         cell(f"{r['current_tdd_pct']:.1f} / {r['current_tdd_limit_pct']:g}"
                              if np.isfinite(r["current_tdd_pct"]) and np.isfinite(r["current_tdd_limit_pct"])
                              else f"{r['current_tdd_pct']:.1f} / none (above 161 kV)" if np.isfinite(r["current_tdd_pct"])
                              else ""),
                         cell(f"{r['capacitor_kvar_min']:,.0f}-{r['capacitor_kvar_max']:,.0f}"
                              if r["capacitor_kvar_max"] != r["capacitor_kvar_min"] else f"{r['capacitor_kvar_max']:,.0f}"),
                         cell(_order_span(r["resonance_order_low"], r["resonance_order_high"])
                              if screened and r["capacitor_kvar_max"] > 0 else ""),
                         cell(r["finding"], "small")]))
    return {"harmonic_rows": rows, "harmonic_note": SCREEN_CAUTION, "harmonic_numeric": (2, 3, 4, 5, 6, 7, 8),
            "harmonic_headers": ["Site", "Scenario", "Drives [kVA]", "Short-circuit power [kVA]",
                                 "Voltage THD / limit [%]", "Worst harmonic / limit [%]", "Current TDD / limit [%]",
                                 "Capacitors [kVAr]", "Resonance order", "Finding"]}


def _scenario_context(case, result, cur: str) -> dict[str, Any]:
    """The fleet plan under each named scenario of the case beside the case as written (none: no rows)."""
    if not getattr(case, "scenarios", ()):
        return {"scenario_rows": [], "scenario_headers": [], "scenario_numeric": ()}
    from models.comparison import case_scenarios

    table = case_scenarios(case, result)
    rows = []
    for r in table.to_dict("records"):
        budget = r["budget_total"]
        rows.append(row([cell(r["scenario"]), num(r["discount_rate_pct"], "{:.1f}", signed=False),
                         num(r["energy_price_level_pct"], "{:.0f}", signed=False),
                         num(r["capital_cost_level_pct"], "{:.0f}", signed=False),
                         cell("no limit") if budget != budget else num(budget, signed=False),
                         cell(r["replacement_mode"]), num(r["plan_capital"], signed=False),
                         num(r["yearly_saving_per_yr"]), num(r["plan_npv"]), num(r["plan_npv_change"]),
                         num(r["projects"], "{:.0f}", signed=False)]))
    return {"scenario_rows": rows, "scenario_numeric": (1, 2, 3, 4, 6, 7, 8, 9, 10),
            "scenario_headers": ["Scenario", "Discount rate [%]", "Electricity price level [%]", "Capital cost level [%]",
                                 f"Budget, all plan years [{cur}]", "Replacement timing", f"Plan capital [{cur}]",
                                 f"Plan saving [{cur}/yr]", f"Plan NPV [{cur}]", f"NPV change from the case [{cur}]",
                                 "Projects"]}


def render_report(case, result, scope: content.Scope, files: list[str] | None = None) -> str:
    """Render the capital-request report.

    Parameters
    ----------
    case : models.case.Case
    result : models.scenario.ScenarioResult
    scope : models.pack.content.Scope
    files : list of str, optional
        Names of the pack's other files, listed in the appendix.

    Returns
    -------
    str
        A complete HTML document with plotly.js inlined once; it loads nothing from the network.
    """
    values = report_context(case, result, scope, list(files or []))
    return templates.render(templates.REPORT, css=Markup(templates.BASE_CSS), plotlyjs=Markup(get_plotlyjs()), **values)
