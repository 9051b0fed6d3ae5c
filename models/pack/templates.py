"""HTML templates of the report and the decision records (Jinja2, autoescaped).

Every value reaches the page through Jinja2's autoescaping; only the plotly.js bundle and the chart
fragments that plotly itself writes (its JSON escapes ``<``) are marked safe. The pages load nothing
from the network: no CDN, no web fonts, no external links.
"""

from __future__ import annotations

import functools

import jinja2

#: Shared style sheet: screen and print (A4).
BASE_CSS = """
:root { --ink:#1d2733; --muted:#5b6773; --line:#d5dbe3; --accent:#0b5394; --good:#1f7a3a; --bad:#b3261e; --soft:#f3f6f9; }
* { box-sizing: border-box; }
body { font-family: -apple-system, "Segoe UI", Helvetica, Arial, sans-serif; color: var(--ink); margin: 0;
       background: #fff; font-size: 14px; line-height: 1.45; }
main { max-width: 1120px; margin: 0 auto; padding: 24px 28px 60px; }
h1 { font-size: 26px; margin: 0 0 4px; }
h2 { font-size: 20px; margin: 34px 0 10px; padding-bottom: 4px; border-bottom: 2px solid var(--accent); }
h3 { font-size: 16px; margin: 20px 0 6px; }
p.lead { color: var(--muted); margin: 0 0 14px; }
.banner { background: #fff4ce; border: 1px solid #e6c200; padding: 6px 10px; margin: 10px 0; font-weight: 600; }
.cards { display: grid; grid-template-columns: repeat(5, 1fr); gap: 10px; margin: 12px 0 16px; }
.card { border: 1px solid var(--line); border-radius: 6px; padding: 10px 12px; background: var(--soft); }
.card .label { font-size: 12px; color: var(--muted); text-transform: uppercase; letter-spacing: .03em; }
.card .value { font-size: 22px; font-weight: 700; margin: 2px 0; }
.card .note { font-size: 12px; color: var(--muted); }
table { border-collapse: collapse; width: 100%; margin: 6px 0 14px; font-size: 12.5px; }
th, td { border-bottom: 1px solid var(--line); padding: 4px 6px; text-align: left; vertical-align: top; }
th { background: var(--soft); font-weight: 600; }
td.num, th.num { text-align: right; font-variant-numeric: tabular-nums; }
td.num { white-space: nowrap; }
tr.pick td { background: #e7f1e9; font-weight: 600; }
td.pick { background: #e7f1e9; font-weight: 700; }
td.neg { color: var(--bad); }
td.na { color: #a0a8b0; }
td.id { white-space: nowrap; }
.small { font-size: 12px; color: var(--muted); }
.figure { margin: 8px 0 18px; break-inside: avoid; page-break-inside: avoid; }
ul.cautions li { margin-bottom: 4px; }
.cols { display: grid; grid-template-columns: 1fr 1fr; gap: 18px; }
.toc { columns: 2; font-size: 13px; }
.toc a { color: var(--accent); text-decoration: none; }
footer { margin-top: 40px; font-size: 12px; color: var(--muted); }
/* one column per option: the option names wrap and the columns share the width, so the table fits the page */
table.matrix { table-layout: fixed; }
table.matrix th { white-space: normal; overflow-wrap: anywhere; hyphens: auto; font-size: 11px; }
table.matrix td.num { white-space: normal; overflow-wrap: anywhere; }
table.matrix th:first-child, table.matrix td:first-child { width: 11%; }
@page { size: A4; margin: 14mm 12mm; }
@media print {
  body { font-size: 10.5px; }
  main { max-width: none; padding: 0; }
  h2 { break-before: page; page-break-before: always; font-size: 16px; }
  h2.first { break-before: auto; page-break-before: auto; }
  table { font-size: 9.5px; }
  table.matrix, table.matrix th { font-size: 8px; }
  tr, .card { break-inside: avoid; page-break-inside: avoid; }
  .cards { grid-template-columns: repeat(5, 1fr); gap: 6px; }
  .card { padding: 6px 8px; }
  .card .value { font-size: 15px; }
  .card .label, .card .note, .small, p.lead { font-size: 9px; }
  h1 { font-size: 19px; }
  .toc { display: none; }
  a { color: inherit; text-decoration: none; }
}
"""

_MACROS = """{%- macro table(headers, rows, numeric=(), cls="") -%}
<table{% if cls %} class="{{ cls }}"{% endif %}>
<thead><tr>{% for h in headers %}<th{% if loop.index0 in numeric %} class="num"{% endif %}>{{ h }}</th>{% endfor %}</tr></thead>
<tbody>
{%- for row in rows %}
<tr{% if row.pick %} class="pick"{% endif %}>{% for cell in row.cells %}<td{% if cell.cls %} class="{{ cell.cls }}"{% endif %}>{{ cell.text }}</td>{% endfor %}</tr>
{%- else %}
<tr><td colspan="{{ headers|length }}" class="na">none</td></tr>
{%- endfor %}
</tbody>
</table>
{%- endmacro -%}
"""

REPORT = _MACROS + """<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>Capital request: {{ case_name }}</title>
<style>{{ css }}</style>
<script>{{ plotlyjs }}</script>
</head>
<body>
<main>
<h1>Capital request: {{ case_name }}</h1>
<p class="lead">{{ description }}</p>
{% if invented %}<div class="banner">Invented demo data: every name, site and number in this case is made up.</div>{% endif %}
<p class="small">Scope: {{ scope_text }}. Amounts in {{ currency }}; discount rate {{ discount_text }}, horizon {{ horizon }} years. Planning estimates only (see the cautions).</p>

<nav class="toc">
{% for anchor, title in sections %}<div><a href="#{{ anchor }}">{{ loop.index }}. {{ title }}</a></div>{% endfor %}
</nav>

<h2 id="summary" class="first">1. Executive summary</h2>
<div class="cards">
{% for c in cards %}<div class="card"><div class="label">{{ c.label }}</div><div class="value">{{ c.value }}</div><div class="note">{{ c.note }}</div></div>{% endfor %}
</div>
<p>{{ summary_text }}</p>
<h3>Decision per asset</h3>
{{ table(decision_headers, decision_rows, decision_numeric) }}
<p class="small">{{ measures_text }}</p>

<h2 id="scope">2. Scope and assets</h2>
{{ table(asset_headers, asset_rows, asset_numeric) }}

<h2 id="options">3. Options compared</h2>
<p class="small">NPV of each option over keeping today's motor ({{ currency }}); the recommended option is shaded; a dash means the option does not apply. Full tables per asset are in the appendix and the workbook ('Results').{{ failed_note }}</p>
{{ table(matrix_headers, matrix_rows, matrix_numeric, "matrix") }}

<h2 id="savings">4. Savings by component</h2>
<p class="small">A bill saving is the change of the site's whole bill ({{ currency }}, base-year prices) when the project is made, its taxes and levies included: each tax or levy line of the tariff is spread over the charges it is levied on, in proportion.</p>
<div class="figure">{{ figures.waterfall }}</div>
<div class="figure">{{ figures.by_project }}</div>

<h2 id="cashflow">5. Cash flow</h2>
<div class="figure">{{ figures.cumulative }}</div>
<p class="small">Net flows of the recommended projects by plan year ({{ currency }}), each project from its own plan year, as the plan counts them: a reactive project (capacitor, wound-field machine) at the share of its bill saving it adds beside the plan's other projects{% if flow_note %} ({{ flow_note }}){% endif %}. The last cumulative discounted value is the NPV of section 1.</p>
{{ table(flow_headers, flow_rows, flow_numeric) }}
{% if financed_rows %}<p class="small">The same plan's flows to the owner under its financing ({{ currency }}). {{ financed_note }} The plan, its ranking and every other figure of this report are on the cash basis.</p>
{{ table(financed_headers, financed_rows, financed_numeric) }}{% endif %}

<h2 id="risk">6. Sensitivity and Monte Carlo</h2>
<p class="small">{{ tornado_note }}</p>
<div class="figure">{{ figures.tornado }}</div>
<div class="figure">{{ figures.monte_carlo }}</div>
{% if plan_npv_note %}<p>{{ plan_npv_note }}</p>
{% endif %}<p class="small">{{ mc_note }}</p>
{{ table(mc_headers, mc_rows, mc_numeric) }}

<h2 id="plan">7. Fleet plan by year</h2>
<div class="figure">{{ figures.plan }}</div>
{{ table(plan_headers, plan_rows, plan_numeric) }}
<p class="small">{{ plan_note }}</p>
{% if scenario_rows %}<h3>The plan under the case's scenarios</h3>
<p class="small">Each scenario changes only the finance assumptions it names (the case's scenarios.toml); the machines and the bills are the same. Each row is the whole fleet's exact plan under it.</p>
{{ table(scenario_headers, scenario_rows, scenario_numeric) }}
{% endif %}<h3>Monthly bills before and after</h3>
<div class="figure">{{ figures.bills }}</div>

<h2 id="register">8. Risks and assumptions register</h2>
{{ table(register_headers, register_rows) }}
<h3>Finance assumptions</h3>
{{ table(finance_headers, finance_rows) }}
<h3>Case basis: rules, year and tariffs</h3>
{{ table(basis_headers, basis_rows) }}

<h2 id="mv">9. Measurement and verification plan</h2>
<p>{{ mv_text }}</p>
{{ table(mv_protocol_headers, mv_protocol_rows) }}
<h3>Modelled baselines to compare with the measurements</h3>
<p class="small">Mean kW over running hours; power factor energy-weighted (kWh over kVAh) at the motor terminals; speed is the running-hour mean.</p>
{{ table(mv_headers, mv_rows, mv_numeric) }}
{% if verified_rows %}
<h3>Savings measured so far</h3>
<p class="small">The energy measured on each motor before its project and after it (the case's verification table), the baseline set to the reporting period's production, running hours or days (IPMVP's avoided energy), beside the model's prediction for the same conditions. A ratio adjustment through zero: a full IPMVP report fits a regression over several baseline intervals and states its uncertainty.</p>
{{ table(verified_headers, verified_rows, verified_numeric) }}
{% endif %}

<h2 id="emissions">10. Emissions</h2>
<p>{{ emissions_text }}</p>
{{ table(emission_headers, emission_rows, emission_numeric) }}

<h2 id="cautions">11. Cautions</h2>
<ul class="cautions">{% for c in cautions %}<li>{{ c }}</li>{% endfor %}</ul>
<h3>Harmonic screen by site</h3>
<p class="small">Each site's drives (rated input) and capacitors today and with the plan, against IEEE 519-2014's limits. {{ harmonic_note }}</p>
{{ table(harmonic_headers, harmonic_rows, harmonic_numeric) }}

<h2 id="appendix">12. Appendix: options per asset, decision records and files</h2>
<p class="small">IRR is the discount rate at which an option's NPV over keeping today's motor is zero. "none": no such rate exists (the savings never repay the capital, or there is no capital); "(several)": the flows change sign more than once and several rates solve it (the one closest to zero is shown); a negative IRR means the savings do not even repay the capital undiscounted. {{ measures_text }}</p>
{% for a in appendix %}
<h3>{{ a.title }}</h3>
{{ table(appendix_headers, a.rows, appendix_numeric) }}
{% endfor %}
<h3>Files of this pack</h3>
<ul>{% for f in files %}<li>{{ f }}</li>{% endfor %}</ul>
<footer>Prepared with drivecase from the case "{{ case_name }}". Planning estimates: see the cautions above.</footer>
</main>
</body>
</html>
"""

DECISION_CSS = """
:root { --ink:#1d2733; --muted:#5b6773; --line:#cfd6df; --accent:#0b5394; --soft:#f3f6f9; }
* { box-sizing: border-box; }
body { font-family: -apple-system, "Segoe UI", Helvetica, Arial, sans-serif; color: var(--ink); margin: 0; font-size: 12px; line-height: 1.35; }
main { max-width: 190mm; margin: 0 auto; padding: 10mm 0; }
h1 { font-size: 18px; margin: 0 0 2px; }
h2 { font-size: 13px; margin: 10px 0 4px; color: var(--accent); border-bottom: 1px solid var(--line); padding-bottom: 2px; }
p { margin: 3px 0; }
.muted { color: var(--muted); }
.banner { background: #fff4ce; border: 1px solid #e6c200; padding: 3px 8px; font-weight: 600; margin: 4px 0; }
table { border-collapse: collapse; width: 100%; font-size: 11px; }
th, td { border-bottom: 1px solid var(--line); padding: 2px 4px; text-align: left; vertical-align: top; }
th { background: var(--soft); }
td.num, th.num { text-align: right; font-variant-numeric: tabular-nums; }
td.num { white-space: nowrap; }
tr.pick td { background: #e7f1e9; font-weight: 700; }
.plate { display: grid; grid-template-columns: repeat(4, 1fr); gap: 1px 10px; }
.plate div span { color: var(--muted); }
.plate em { color: #8a6d00; font-style: normal; font-size: 10px; }
.decision { border: 2px solid var(--accent); padding: 5px 8px; margin: 6px 0; }
.decision strong { font-size: 13px; }
ul { margin: 2px 0 2px 16px; padding: 0; }
li { margin: 1px 0; }
.sign { display: grid; grid-template-columns: repeat(3, 1fr); gap: 10px; margin-top: 6px; }
.sign > div { border: 1px solid var(--line); padding: 4px 6px; height: 25mm; }
.sign .line { color: var(--muted); margin-top: 3px; }
@page { size: A4; margin: 10mm; }
@media print {
  main { padding: 0; max-width: none; } body { font-size: 10px; line-height: 1.3; } table { font-size: 9px; }
  h2 { margin: 6px 0 3px; } .sign > div { height: 17mm; } th, td { padding: 1px 4px; }
}
"""

DECISION = _MACROS + """<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<title>Decision record: {{ asset_id }}</title>
<style>{{ css }}</style>
</head>
<body>
<main>
<h1>Repair-or-replace decision record: {{ asset_id }}</h1>
<p class="muted">{{ description }} · site {{ site }} · case "{{ case_name }}" · amounts in {{ currency }}, NPV at {{ discount_text }} over {{ horizon }} years</p>
{% if invented %}<div class="banner">Invented demo data.</div>{% endif %}

<h2>Asset</h2>
<div class="plate">
{% for label, value, defaulted in nameplate %}<div><span>{{ label }}:</span> {{ value }}{% if defaulted %} <em>(default)</em>{% endif %}</div>{% endfor %}
</div>
<p class="muted">(default) = not given in the case; filled from class, size or application defaults (see the workbook's 'Data quality' sheet).</p>

<h2>Options compared ({{ options_basis }})</h2>
{{ table(option_headers, option_rows, option_numeric) }}

<h2>End-of-life strategies (expected present cost over the horizon)</h2>
{% if eol_rows %}{{ table(eol_headers, eol_rows, eol_numeric) }}<p class="muted">{{ eol_note }}</p>{% else %}<p>{{ eol_note }}</p>{% endif %}

<div class="decision">
<strong>Recommended: {{ recommended }}</strong>
<ul>{% for r in reasons %}<li>{{ r }}</li>{% endfor %}</ul>
</div>

{% if data_notes %}<h2>Notes on the data</h2>
<ul>{% for c in data_notes %}<li>{{ c }}</li>{% endfor %}</ul>
{% endif %}<h2>Cautions</h2>
<ul>{% for c in cautions %}<li>{{ c }}</li>{% endfor %}</ul>

<h2>Sign-off</h2>
<p>Decision: ☐ approve the recommended option &nbsp; ☐ approve another option: ____________ &nbsp; ☐ defer</p>
<div class="sign">
{% for role in ("Prepared by", "Checked by (engineering)", "Approved by (budget holder)") %}
<div><strong>{{ role }}</strong><div class="line">Name: </div><div class="line">Signature: </div><div class="line">Date: </div></div>
{% endfor %}
</div>
</main>
</body>
</html>
"""

_ENV = jinja2.Environment(autoescape=True, undefined=jinja2.StrictUndefined, trim_blocks=False)


@functools.lru_cache(maxsize=8)
def _compiled(template: str) -> jinja2.Template:
    return _ENV.from_string(template)


def render(template: str, **values) -> str:
    """Render one of this module's templates with autoescaping."""
    return _compiled(template).render(**values)
