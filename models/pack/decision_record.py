"""One-page repair-or-replace decision record per asset (printable HTML, A4).

The record shows the asset's nameplate and age, every option with its capital, yearly saving, NPV and
payback, the expected present cost of the end-of-life strategies (replace now, replace at failure,
rewind at failure), the recommended choice with its reasons and cautions, and a sign-off block.
"""

from __future__ import annotations

import math
import re

import pandas as pd
from markupsafe import Markup

from models.case import power_label, rating_in_unit
from models.defaults import QUALITY_PENALTY_PCT
from models.end_of_life import COST_COLUMNS, STRATEGY_NAMES, failure_law_caution, rewind_life_note
from models.information import measure_first_of, value_of_measuring_option
from models.options import DRIVE_TECHNOLOGIES, technology_name
from models.pack import content, templates
from models.pack.report_html import cell, num, row
from models.plan import option_labels
from models.risk import break_even_words
from models.scenario import END_OF_LIFE_LEFT_OUT, REPLACING_TECHNOLOGIES, end_of_life_left_out, least_repair





def _defaulted_words(columns) -> str:
    """The defaulted fields beside the data-quality score ("" without any); where the score counts none of them
    (a score of 100 % beside defaulted fields) it says so.

    Examples
    --------
    >>> _defaulted_words(["rated_power_factor", "machine_type"])
    ' (defaulted: rated power factor, machine type)'
    >>> _defaulted_words(["machine_type"])
    ' (defaulted, not scored: machine type)'
    """
    names = list(dict.fromkeys(str(c) for c in columns))
    if not names:
        return ""
    scored = any(QUALITY_PENALTY_PCT.get(c, 0.0) > 0 for c in names)
    return f" (defaulted{'' if scored else ', not scored'}: {', '.join(_field_words(c) for c in names)})"


def _field_words(column: str) -> str:
    """A register column in short words ("rewind_loss_pct_points" -> "rewind loss"), for a record's one line.

    Examples
    --------
    >>> [_field_words(c) for c in ("machine_type", "rewind_loss_pct_points", "rated_efficiency_pct", "operating_h_per_yr")]
    ['machine type', 'rewind loss', 'rated efficiency', 'operating hours']
    """
    words = re.sub(r"_(pct_points|pct|frac|kw|rpm|v|hz)$", "", str(column))
    words = re.sub(r"_h_per_yr$", "_hours", words)
    return words.replace("_", " ")

def record_file_name(asset_id: str, taken: set[str] | None = None) -> str:
    """Return a safe file name for an asset's record: letters, digits, '-', '_' and '.', never hidden or a path.

    Examples
    --------
    >>> record_file_name("../P 101")
    'P_101.html'
    """
    stem = re.sub(r"[^A-Za-z0-9_.-]+", "_", str(asset_id)).strip("._") or "asset"
    stem = stem[:80]
    name = f"{stem}.html"
    k = 2
    while taken is not None and name.lower() in taken:
        name = f"{stem}-{k}.html"
        k += 1
    return name


def _value(x, fmt: str = "{}", missing: str = "unknown") -> str:
    if x is None or (isinstance(x, float) and math.isnan(x)) or x is pd.NA or x == "":
        return missing
    return fmt.format(x)


def record_context(case, result, scope: content.Scope, asset_id: str) -> dict:
    """Return what one asset's decision record shows (plain values; the template escapes them)."""
    s = case.settings
    a = result.assumptions
    cur = s.currency
    horizon = int(a.horizon_yr)
    x = case.assets.set_index("asset_id").loc[asset_id]
    res = result.results[result.results["asset_id"] == asset_id]
    keep_id = content.keep_option_ids(result)[asset_id]
    rec = scope.recommended.set_index("asset_id").loc[asset_id]
    failed = bool(res["failed"].iloc[0]) if "failed" in res and len(res) else False
    year = content.analysis_year(result)
    installed = x["year_installed"]
    age = (year - int(installed) if year is not None and isinstance(installed, (int, float))
           and not math.isnan(installed) else None)
    defaulted = content.scope_defaults(case, (asset_id,))
    filled = set(defaulted["column"])
    area = str(x.get("hazardous_area", "none") or "none")  # (a classified area only: none, or blank, says nothing)
    plate = [
        ("Rated power", "rated_p_kw", _value(float(x["rated_p_kw"]), "{:,.1f} kW") if power_label(s.power_unit) == "kW"
         else _value(float(rating_in_unit(float(x["rated_p_kw"]), "hp")), "{:,.1f} hp") + f" ({float(x['rated_p_kw']):,.1f} kW)"),
        ("Poles", "poles", _value(x["poles"], "{:.0f}")),
        ("Voltage", "rated_v_v", _value(x["rated_v_v"], "{:,.0f} V")),
        ("Frequency", "supply_f_hz", _value(x["supply_f_hz"], "{:.0f} Hz")),
        ("Efficiency class", "efficiency_class", _value(x["efficiency_class"])),
        ("Rated efficiency", "rated_efficiency_pct", _value(x["rated_efficiency_pct"], "{:.1f} %")),
        ("Rated power factor", "rated_power_factor", _value(x["rated_power_factor"], "{:.2f}")),
        ("Rated speed", "rated_speed_rpm", _value(x["rated_speed_rpm"], "{:,.0f} rpm")),
        ("Installed", "year_installed", _value(installed, "{:.0f}")), ("Age", "year_installed", _value(age, "{} yr")),
        ("Rewinds", "rewind_count", _value(x["rewind_count"], "{:.0f}")),
        ("Application", "application", _value(x["application"])),
        ("Speed control", "speed_control", _value(x["speed_control"])),
        ("Criticality", "criticality", _value(x["criticality"])),
        *([("Hazardous area", "hazardous_area", area.replace("_", " "))] if area not in ("none", "nan") else []),
        *([("State", "failed", "failed, out of service")] if failed else []),
        ("Running hours", "operating_h_per_yr", _value(float(res["running_h_per_yr"].iloc[0]), "{:,.0f} h/yr")),
        ("Data quality", "", _value(x["data_quality_pct"], "{:.0f} %") + _defaulted_words(defaulted["column"])),
    ]
    nameplate = [(label, value, column in filled) for label, column, value in plate]
    rec_key = f"{asset_id}/{rec['option_id']}"
    option_rows = []
    for r in res.itertuples(index=False):
        is_keep = r.option_id == keep_id
        option_rows.append(row([
            cell(r.label), cell(technology_name(r.technology)),
            num(r.capital), num(r.bill_saving_per_yr + r.saving_maintenance_per_yr), num(r.npv),
            cell("-" if is_keep else content.rate_text(r.irr_frac, r.irr_status), "num"),
            cell("-" if is_keep else content.years_text(r.simple_payback_yr, horizon,
                                                        lost_again=bool(getattr(r, "simple_payback_lost_again", False))),
                 "num"),
            num(r.co2_avoided_t_per_yr, "{:,.1f}")], pick=f"{r.asset_id}/{r.option_id}" == rec_key))

    labels = option_labels(result.results)
    eol = result.end_of_life
    eol_rows, eol_note = [], ""
    best_strategy = None
    if not eol.empty and asset_id in set(eol["asset_id"]):
        e = eol.set_index("asset_id").loc[asset_id]
        best_strategy = str(e["best_strategy"])
        # a motor that has failed is replaced or rewound now: two ways back into service, not three strategies
        names = {"replace_now": "replace it now", "rewind_at_failure": "rewind it now"} if failed else STRATEGY_NAMES
        for key, column in COST_COLUMNS.items():
            if key in names:
                eol_rows.append(row([cell(names[key]), num(float(e[column]))], pick=key == best_strategy))
        if failed:
            eol_note = (f"New motor compared: {labels.get(e['new_option_id'], e['new_option_id'])}. The motor has failed: "
                        "replacing and rewinding are both priced now, each with the outage until the motor runs again "
                        "(replacing now and at failure are then the same).")
        else:
            eol_note = (f"New motor compared: {labels.get(e['new_option_id'], e['new_option_id'])}. Probability that today's motor fails within "
                        f"{horizon} years: {float(e['failure_probability_in_horizon_frac']):.0%}; mean residual life "
                        f"{float(e['mean_residual_life_yr']):.1f} yr. "
                        + " ".join(t for t in (rewind_life_note(x["rewind_count"]), failure_law_caution(brief=True)) if t))
    else:
        why = end_of_life_left_out(result, asset_id) or "no_catalogue"
        reason = END_OF_LIFE_LEFT_OUT[why]
        eol_note = f"Not compared: {reason}."

    is_keep = rec["option_id"] == keep_id
    reason = str(rec["reason"])
    reasons = [reason[:1].upper() + reason[1:] + "."]
    least = ""
    if failed:
        # the asset's least repair, named on each of its replacing options (an add-on recommended names none)
        must = least_repair(result.results, asset_id)
        name = str(must["label"]) if must is not None else ""
        name = name[:1].lower() + name[1:] if name[1:2].islower() else name  # "rewind", "new IE3 induction motor"
        least = (f"{name} ({content.money(float(must['capital']), cur)})" if must is not None
                 else "a rewind or a new motor")
        reasons.append(f"This motor has failed (asset register). The least that puts it back in service now is {least}: "
                       "each option that replaces the motor is credited with that capital, and from year 1 its "
                       "saving is counted over that machine's, not over today's motor; a drive or a capacitor added "
                       "needs the motor repaired first, a cost of the base case too.")
    if not is_keep:
        own_npv, plan_npv = float(rec["npv"]), float(rec["plan_npv"])
        saving = content.money(float(rec['bill_saving_per_yr'] + rec['saving_maintenance_per_yr']), cur)
        payback = content.years_text(float(rec['simple_payback_yr']), horizon,
                                     lost_again=bool(rec.get('simple_payback_lost_again', False)))
        if failed:
            over = ("over it" if rec["technology"] in REPLACING_TECHNOLOGIES
                    else "against today's bill, the motor repaired")
            reasons.append(f"NPV {content.money(own_npv, cur)} at {a.discount_rate_frac:.1%} and payback {payback}, "
                           f"priced alone against the least that puts it back in service; capital "
                           f"{content.money(float(rec['capital']), cur)}, saving {saving}/yr {over}.")
        else:
            reasons.append(f"NPV {content.money(own_npv, cur)} at {a.discount_rate_frac:.1%}, capital "
                           f"{content.money(float(rec['capital']), cur)}, saving {saving}/yr, payback {payback}, each "
                           "priced alone against today's bill.")
        npv_said = len(reasons) - 1  # (the sentence the plan's own figure may be added to)
        short = float(rec.get("ratchet_shortfall", 0.0))
        if short > 0.5:
            reasons.append(f"While the site's demand ratchet still bills today's peaks (the first year in service, "
                           f"longer for a look-back over 12 months) it saves {content.money(short, cur)} less in all "
                           "than the yearly saving shows, in service from the start of "
                           f"{content.in_service_words(case, result)}; the NPV counts it where it falls within the "
                           "horizon.")
        if abs(plan_npv - own_npv) > 0.5:
            start = int(rec.get("plan_start_yr", 0) or 0)
            at_start = float(rec.get("plan_npv_at_start", plan_npv))
            # (the report's decision table gives it at the plan's start: discounted the plan years before its own)
            basis = (f" at its own start (plan year {start}; {content.money(at_start, cur)} at the plan's start, as "
                     "the report's decision table gives it)" if start > 0 and abs(at_start - plan_npv) > 0.5 else "")
            reasons.append(f"Beside the rest of the plan it adds only part of that saving: the plan counts an NPV of "
                           f"{content.money(plan_npv, cur)}{basis} for it.")
        elif rec.get("in_plan", False) and int(rec.get("plan_start_yr", 0) or 0) > 0:
            # the report's decision table gives the NPV at the plan's start (discounted the plan years before its own)
            start = int(rec.get("plan_start_yr", 0) or 0)
            at_start = float(rec.get("plan_npv_at_start", own_npv))
            if abs(at_start - own_npv) > 0.5:
                reasons[npv_said] = reasons[npv_said][:-1] + (f"; {content.money(at_start, cur)} at the plan's start "
                                                              f"(plan year {start} discounted), as the report's table "
                                                              "gives it.")
        # how far the inputs may move before it stops paying, after the NPV's sentence (a record is one page)
        even = break_even_words(rec, brief=True)
        if even:
            reasons[npv_said] += " " + even
        others = res[(res["option_id"] != rec["option_id"]) & (res["option_id"] != keep_id)].sort_values("npv", ascending=False)
        if len(others):
            o = others.iloc[0]
            status = result.plan_status or {}
            taken = set(status.get("withdrawn", ())) | set(status.get("set_aside", ()))
            note = ""
            if float(o["npv"]) > own_npv:
                budget = content.has_budget(result)
                note = ("; its value priced alone is already taken by the rest of the plan at this site"
                        if f"{asset_id}/{o['option_id']}" in taken else
                        "; the plan prefers the option above for the budget or beside the rest of the plan at this site"
                        if budget else
                        "; beside the rest of the plan at this site it adds less than priced alone (projects share "
                        "the site's reactive charges and demand peaks)")
            reasons.append(f"Best other option: {o['label']} (NPV {content.money(float(o['npv']), cur)}{note}).")
    if best_strategy:
        new_id = eol.set_index("asset_id").loc[asset_id, "new_option_id"]
        eol_row = eol.set_index("asset_id").loc[asset_id]
        outage, placeholder = "", False
        if "downtime_cost_per_h" in eol_row.index and math.isfinite(float(eol_row["downtime_cost_per_h"])):
            basis = str(eol_row.get("downtime_cost_basis", ""))
            placeholder = basis.startswith("default") and float(eol_row["downtime_cost_per_h"]) > 0
            hours = ""
            if "new_lead_time_h" in eol_row.index:
                hours_from = str(eol_row.get("lead_time_basis", "size class"))
                hours = (f" for {float(eol_row['new_lead_time_h']):.0f} h to a new motor or "
                         f"{float(eol_row['rewind_lead_time_h']):.0f} h to a rewound one (hours: {hours_from})")
            outage = (f"; a failure's outage priced at {content.money(float(eol_row['downtime_cost_per_h']), cur)}/h"
                      f" ({basis}){hours}")
        if failed:
            text = (f"For the motor itself, now that it has failed ({labels.get(new_id, new_id)} vs rewind, the outage "
                    f"counted): cheaper to {'replace it now' if best_strategy == 'replace_now' else 'rewind it now'}, by "
                    f"{content.money(float(eol_row['advantage_over_next']), cur)}{outage}.")
            text += (f" The options' NPVs above leave the outage out ({float(eol_row['new_lead_time_h']):.0f} h to "
                     f"a new motor, {float(eol_row['rewind_lead_time_h']):.0f} h to a rewound one"
                     + ("; a new machine of another kind may take longer" if rec["technology"] not in
                        ("rewind", "induction") and rec["technology"] in REPLACING_TECHNOLOGIES else "") + ")")
            if best_strategy == "replace_now" and rec["technology"] == "rewind":
                text += ": with it counted, a new motor beats the rewind."
            elif best_strategy == "rewind_at_failure" and rec["technology"] in REPLACING_TECHNOLOGIES \
                    and rec["technology"] != "rewind":
                sooner = float(eol_row["rewind_lead_time_h"]) < float(eol_row["new_lead_time_h"])
                text += (": with it counted, the rewind costs less than a new motor"
                         + ("; it is back in service sooner: weigh the recommended machine's longer outage before "
                            "ordering it." if sooner else "."))
            else:
                text += "."
        else:
            text = (f"A separate decision, for the motor itself ({labels.get(new_id, new_id)} vs rewind): cheapest to "
                    f"{STRATEGY_NAMES[best_strategy]}, by {content.money(float(eol_row['advantage_over_next']), cur)}{outage}.")
            if outage and float(a.downtime_cost_per_h) == 0 and float(eol_row["downtime_cost_per_h"]) > 0:
                # two bases on one page: say which counts an outage
                text += " (The NPVs above count no outage.)"
        if best_strategy == "replace_now" and rec["technology"] not in REPLACING_TECHNOLOGIES:
            new_capital = res.loc[res["option_id"] == new_id, "capital"]
            text += (" Replacing it now is not in this request and would need its own capital"
                     + (f" ({content.money(float(new_capital.iloc[0]), cur)})." if len(new_capital) else "."))
        if placeholder:
            text += " The outage cost is a placeholder that can decide this: give the motor's own."
        reasons.append(text)
    if failed and not bool(rec.get("in_plan", False)):
        reasons.append("Not in the fleet plan: the motor needs a way back into service at once whatever the plan, "
                       f"so book {content.money(float(rec['capital']), cur) if not is_keep else 'its repair'} for it "
                       "on its own.")
    elif failed and rec["technology"] not in REPLACING_TECHNOLOGIES and not is_keep:
        reasons.append(f"This option ({rec['label']}) needs the motor back in service first, which this request does "
                       f"not hold: book that on its own, at once ({least} is the least repair"
                       + ("; the comparison above says whether a new motor costs less once the outage is counted)."
                          if best_strategy else ")."))
    if float(rec["must_spend_capital"]) > 0 and not is_keep and not failed:  # a failed motor's is said above
        reasons.append(f"Credited: the {content.money(float(rec['must_spend_capital']), cur)} a failure would force anyway "
                       f"(the cheaper of a rewind and the cheapest new motor the regional efficiency rules allow).")
    cautions, data_notes = [], []
    flags = content.scope_flags(result, (asset_id,))
    if not flags.empty:  # notes on the asset's data (no option) apart from the cautions of the option chosen
        data_notes += list(flags.loc[flags["option_id"] == "", "flag"])
        cautions += list(flags.loc[flags["option_id"] == rec["option_id"], "flag"])
    worth = measure_first_of(case, result)
    worth = worth[worth["asset_id"].astype(str) == str(asset_id)]
    w = worth.iloc[0] if len(worth) else None
    if not is_keep and w is not None and str(w["option_id"]) != str(rec["option_id"]):
        # the note speaks of the option this record recommends, not of the highest NPV priced alone
        w = value_of_measuring_option(case, result, asset_id, str(rec["option_id"]))
    if w is not None and float(w["value_of_measuring"]) > 1.0:
        data_notes.append(f"Measuring it first is worth up to {content.money(float(w['value_of_measuring']), cur)}: "
                          f"the NPV of {w['label']} ({content.money(float(w['npv']), cur)}) rests on "
                          f"{w['uncertain_inputs']}. Log kW, power factor and hours for 1-4 weeks where that costs less.")
    if not is_keep:
        keep_speed = float(res.loc[res["option_id"] == keep_id, "mean_speed_rpm"].iloc[0])
        cautions += content.technology_cautions(str(rec["technology"]), float(rec["mean_speed_rpm"]) - keep_speed)
    if not is_keep and (str(rec["technology"]) in DRIVE_TECHNOLOGIES or str(rec["technology"]) == "capacitor"):
        # a drive or a capacitor changes the site's harmonics: the fleet plan's screen of its site, in place of the
        # drive caution's general words on distortion (a record is one page)
        screen = content.plan_harmonic_screen(case, result)
        mine = screen[screen["site_id"] == str(x["site_id"])].set_index("scenario")["finding"].astype(str)
        found = {k: not v.startswith(("within", "no drives", "not screened")) for k, v in mine.items()}
        if found.get("plan", False):
            when = "today and with the plan" if found.get("today", False) else "with the plan"
            finding = mine.get("plan", "")
            what = [name for name, word in (("voltage distortion", "voltage distortion"),
                                            ("current distortion", "current distortion"), ("a resonance", "resonate"))
                    if word in finding]
            what_text = (", ".join(what[:-1]) + " and " + what[-1] if len(what) > 1 else what[0] if what
                         else "distortion past IEEE 519 or a resonance")
            said = (f"site {x['site_id']}'s harmonic screen finds {what_text} {when} "
                    "(harmonic_screen.csv), to study and mitigate first")
            general = [k for k, c in enumerate(cautions) if "check voltage distortion limits" in c]
            for k in general:
                cautions[k] = cautions[k].replace("check voltage distortion limits", said)
            if not general:
                cautions.append("Harmonics: " + said + ".")
    if is_keep and area not in ("none", "nan"):  # kept as it is, the motor stays in its area: its Ex care goes on
        cautions.append(f"hazardous area ({area.replace('_', ' ')}): a motor kept in service there keeps its "
                        "inspections under IEC 60079-17 by a competent person, and any repair is done to "
                        "IEC 60079-19")
    cautions += [content.CAUTIONS[0], content.CAUTIONS[1]]
    return {
        "asset_id": asset_id, "description": _value(x["description"], missing=""), "site": x["site_id"],
        "case_name": s.name, "currency": cur, "invented": bool(s.invented),
        "discount_text": f"{a.discount_rate_frac:.1%} ({a.rate_basis})", "horizon": horizon, "nameplate": nameplate,
        "option_headers": ["Option", "Technology", f"Capital [{cur}]", f"Saving [{cur}/yr]", f"NPV [{cur}]", "IRR",
                           "Simple payback [yr]", "CO2 [t/yr]"],
        "option_rows": option_rows, "option_numeric": (2, 3, 4, 5, 6, 7),
        "eol_headers": ["Strategy", f"Expected present cost [{cur}]"], "eol_rows": eol_rows, "eol_numeric": (1,),
        "eol_note": eol_note,
        "options_basis": ("increment over the least that puts the failed motor back in service now; keeping it as "
                          "it is would leave it stopped" if failed else "increment over keeping today's motor"),
        "recommended": ("nothing fits; the motor has failed" if is_keep and failed else "keep today's motor" if is_keep
                        else str(rec["label"])),
        "reasons": reasons, "cautions": list(dict.fromkeys(cautions)), "data_notes": list(dict.fromkeys(data_notes)),
    }


def render_decision_record(case, result, scope: content.Scope, asset_id: str) -> str:
    """Render one asset's one-page decision record as a complete HTML document.

    Parameters
    ----------
    case : models.case.Case
    result : models.scenario.ScenarioResult
    scope : models.pack.content.Scope
        The asset must be in ``scope.asset_ids``.
    asset_id : str

    Returns
    -------
    str

    Raises
    ------
    ValueError
        When the asset is not in scope.
    """
    if asset_id not in scope.asset_ids:
        raise ValueError(f"asset '{asset_id}' is not in the pack's scope")
    values = record_context(case, result, scope, asset_id)
    return templates.render(templates.DECISION, css=Markup(templates.DECISION_CSS), **values)
