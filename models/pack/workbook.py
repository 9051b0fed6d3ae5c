"""The capital-request workbook: assumptions, options compared, cash flows with live formulas, plan, bills.

:func:`build_workbook` returns the bytes of an .xlsx file (openpyxl). Each project in scope gets a block on
the "Cash flows" sheet: its yearly flows by component as the engine computed them, a net row that adds
them up with ``SUM``, cumulative and discounted rows, and live formulas for NPV, IRR and the simple and
discounted paybacks that reference the discount rate on the "Assumptions" sheet. The engine's own
figures sit beside each formula, and the "Checks" sheet compares the two, so a reviewer can audit every
number in a spreadsheet program without this tool (docs/pack.md explains the formulas).

Every text cell goes through :func:`put_text`, the one guard against formula injection: text is stored
as a string (never as a formula, whatever its first character) and text starting with ``=``, ``+``,
``-`` or ``@`` carries the quote-prefix style, so a spreadsheet keeps it as text even when edited.
"""

from __future__ import annotations

import io
import math
import re
import weakref
from typing import Any

import numpy as np
import pandas as pd
from openpyxl import Workbook
from openpyxl.cell.cell import ILLEGAL_CHARACTERS_RE, Cell
from openpyxl.styles import Alignment, Font, PatternFill
from openpyxl.utils import get_column_letter
from openpyxl.worksheet.worksheet import Worksheet

from models.case import default_value, power_label, rating_in_unit
from models.end_of_life import STRATEGY_NAMES, failure_law_caution
from models.exports import FORMULA_STARTS, plan_with_savings
from models.pack import content
from models.plan import option_labels, plan_capital_spent
from models.reactive_plan import withdrawn_text
from models.wording import counted, line_item_text

#: Sheet names, in workbook order.
SHEETS: tuple[str, ...] = ("Read me", "Assumptions", "Results", "Cash flows", "Checks", "Plan", "Financing", "Scenarios",
                           "Bills", "Harmonics", "Data quality", "End of life", "Risk")
#: Longest text a spreadsheet cell holds [characters].
MAX_CELL_TEXT = 32_767
#: Relative tolerance of the "Checks" sheet: workbook formula vs engine (0.01 %).
CHECK_REL_TOL = 1e-4

_BOLD = Font(bold=True)
_TITLE = Font(bold=True, size=14)
_HEADER_FILL = PatternFill("solid", fgColor="DDE4EE")
_BLOCK_FILL = PatternFill("solid", fgColor="F2F2F2")


# ---------------------------------------------------------------------------------------------------
# Cell writers: the only places that put values into the workbook
# ---------------------------------------------------------------------------------------------------
def put_text(ws: Worksheet, row: int, col: int, value: str) -> Cell:
    """Write text that can never become a formula.

    Parameters
    ----------
    ws : openpyxl.worksheet.worksheet.Worksheet
    row, col : int
        1-based cell position.
    value : str
        Any text (user input included).

    Returns
    -------
    openpyxl.cell.cell.Cell

    Notes
    -----
    openpyxl stores a string starting with "=" as a formula unless told otherwise, so the data type is
    forced to string after assignment. Control characters that XML cannot hold are dropped and the text
    is cut to the cell limit.
    """
    text = ILLEGAL_CHARACTERS_RE.sub("", str(value))[:MAX_CELL_TEXT]
    cell = ws.cell(row=row, column=col)
    cell.value = text
    cell.data_type = "s"
    if text.startswith(FORMULA_STARTS):
        cell.quotePrefix = True
    return cell


def put(ws: Worksheet, row: int, col: int, value: Any, number_format: str | None = None) -> Cell:
    """Write a value: text through :func:`put_text`, numbers as numbers, missing or infinite as blank."""
    if isinstance(value, str):
        return put_text(ws, row, col, value)
    cell = ws.cell(row=row, column=col)
    if value is None or value is pd.NA:
        return cell
    if isinstance(value, (bool, np.bool_)):
        cell.value = bool(value)
        return cell
    if isinstance(value, (int, np.integer)):
        cell.value = int(value)
    elif isinstance(value, (float, np.floating)):
        if not math.isfinite(float(value)):
            return cell
        cell.value = float(value)
    else:
        return put_text(ws, row, col, str(value))
    if number_format:
        cell.number_format = number_format
    return cell


def put_formula(ws: Worksheet, row: int, col: int, expression: str, number_format: str | None = None,
                value: Any = None) -> Cell:
    """Write a spreadsheet formula built by this module (never from user text).

    ``value`` is what the formula gives (a finite number, a bool or text; None when not known here): it is
    stored beside the formula as the cell's last computed value (:func:`with_cached_values`), for readers
    that show a file without recalculating it.
    """
    if not expression.startswith("="):
        raise ValueError(f"a formula starts with '=': {expression!r}")
    cell = ws.cell(row=row, column=col)
    cell.value = expression
    if number_format:
        cell.number_format = number_format
    if _cacheable(value):
        _CACHED.setdefault(ws, {})[cell.coordinate] = value
    return cell


#: Each worksheet's formula cells' computed values, by coordinate, until the workbook is saved.
_CACHED: "weakref.WeakKeyDictionary[Worksheet, dict[str, Any]]" = weakref.WeakKeyDictionary()


def _cacheable(value: Any) -> bool:
    """Whether a formula's value can be stored beside it: text, a bool or a finite number."""
    if isinstance(value, (str, bool, np.bool_)):
        return True
    return isinstance(value, (int, float, np.integer, np.floating)) and math.isfinite(float(value))


def _is_number(value: Any) -> bool:
    """A spreadsheet's ISNUMBER of a value computed here (text and None are not numbers)."""
    return isinstance(value, (int, float, np.integer, np.floating)) and not isinstance(value, (bool, np.bool_))


def _cached_xml(value: Any) -> tuple[str, str]:
    """The cell type attribute and the <v> content of a computed value."""
    from xml.sax.saxutils import escape

    if isinstance(value, (bool, np.bool_)):
        return ' t="b"', "1" if value else "0"
    if isinstance(value, str):
        return ' t="str"', escape(value)
    return "", repr(float(value))


def with_cached_values(data: bytes, book: Workbook) -> bytes:
    """Return the saved workbook ``data`` with each formula's computed value stored beside it.

    openpyxl saves formulas with an empty value, which a spreadsheet program fills when it opens the
    file (the workbook asks for a full recalculation on load), but which file previewers and readers of
    values show as blanks. The values recorded by :func:`put_formula` are written into the cells' ``<v>``
    elements (ECMA-376 Part 1, 18.3.1.4 and 18.3.1.96: ``t="str"`` for a formula's text result,
    ``t="b"`` for a bool); the formulas are unchanged.
    """
    import xml.etree.ElementTree as ET
    import zipfile

    main = "{http://schemas.openxmlformats.org/spreadsheetml/2006/main}"
    rel_ns = "{http://schemas.openxmlformats.org/officeDocument/2006/relationships}"
    source = zipfile.ZipFile(io.BytesIO(data))
    rels = {r.get("Id"): r.get("Target") for r in ET.fromstring(source.read("xl/_rels/workbook.xml.rels"))}
    paths = {}
    for sheet in ET.fromstring(source.read("xl/workbook.xml")).iter(f"{main}sheet"):
        target = rels[sheet.get(f"{rel_ns}id")]
        paths[sheet.get("name")] = target.lstrip("/") if target.startswith("/") else f"xl/{target}"
    values = {paths[ws.title]: _CACHED.get(ws, {}) for ws in book.worksheets}
    cell = re.compile(r'<c r="([A-Z]+[0-9]+)"([^>]*)><f>(.*?)</f><v\s*/></c>', re.S)

    def filled(cells: dict[str, Any]):
        def one(m: re.Match) -> str:
            if m.group(1) not in cells or " t=" in m.group(2):
                return m.group(0)
            kind, text = _cached_xml(cells[m.group(1)])
            return f'<c r="{m.group(1)}"{m.group(2)}{kind}><f>{m.group(3)}</f><v>{text}</v></c>'
        return one

    out = io.BytesIO()
    with zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED) as target:
        for item in source.infolist():
            body = source.read(item.filename)
            if values.get(item.filename):
                body = cell.sub(filled(values[item.filename]), body.decode("utf-8")).encode("utf-8")
            target.writestr(item, body)
    return out.getvalue()


def _ref(col: int, row: int, absolute: bool = False) -> str:
    letter = get_column_letter(col)
    return f"${letter}${row}" if absolute else f"{letter}{row}"


#: The mark a sheet's title takes when the case is invented (a sheet copied or printed alone keeps it).
INVENTED_TITLE_MARK = "INVENTED DEMO DATA · "


def _mark_every_sheet(book, settings) -> None:
    """Give every sheet the pack's standing footer (the case, the invented-data mark, the caution and the page)
    when printed, and, for an invented case, the mark at the head of its title (cell A1)."""
    from models.pack import pdf_footer

    # (an ampersand starts a field code in a header or footer: written twice it prints one)
    footer = pdf_footer(settings).replace("&", "&&")
    for ws in book.worksheets:
        ws.oddFooter.left.text = footer
        ws.oddFooter.left.size = 8
        ws.oddFooter.right.text = "&A · page &P of &N"
        ws.oddFooter.right.size = 8
        ws.evenFooter.left.text, ws.evenFooter.right.text = ws.oddFooter.left.text, ws.oddFooter.right.text
        title = ws["A1"].value
        if settings.invented and isinstance(title, str) and not title.upper().startswith("INVENTED"):
            ws["A1"].value = INVENTED_TITLE_MARK + title


def _sheet_ref(sheet: str, col: int, row: int) -> str:
    return f"'{sheet}'!{_ref(col, row, absolute=True)}"


class _Formats:
    """Number formats carrying the case currency."""

    def __init__(self, currency: str):
        code = re.sub(r"[^A-Za-z]", "", currency)[:8] or "CUR"
        self.currency = code
        self.money = f'#,##0 "{code}";-#,##0 "{code}"'
        self.money2 = f'#,##0.00 "{code}";-#,##0.00 "{code}"'
        self.frac = "0.0%"
        self.years = "0.00"
        self.number = "#,##0.00"
        self.whole = "#,##0"
        self.factor = "0.000000"


def _title(ws: Worksheet, text: str, row: int = 1) -> None:
    put_text(ws, row, 1, text).font = _TITLE


def _header(ws: Worksheet, row: int, labels: list[str], col: int = 1) -> None:
    for k, label in enumerate(labels):
        cell = put_text(ws, row, col + k, label)
        cell.font = _BOLD
        cell.fill = _HEADER_FILL
        cell.alignment = Alignment(wrap_text=True, vertical="top")


def _table(ws: Worksheet, top: int, frame: pd.DataFrame, columns: list[tuple[str, str, str | None]]) -> int:
    """Write a header and rows of ``frame``; columns are (frame column, header, number format). Return next free row."""
    _header(ws, top, [h for _, h, _ in columns])
    row = top + 1
    for values in frame.to_dict("records"):
        for k, (name, _, fmt) in enumerate(columns):
            put(ws, row, k + 1, values.get(name), fmt)
        row += 1
    if frame.empty:
        put_text(ws, row, 1, "(none)")
        row += 1
    return row + 1


def _widths(ws: Worksheet, widths: dict[int, float]) -> None:
    for col, width in widths.items():
        ws.column_dimensions[get_column_letter(col)].width = width


# ---------------------------------------------------------------------------------------------------
# Sheets
# ---------------------------------------------------------------------------------------------------
def _assumptions(ws: Worksheet, case, result, f: _Formats) -> dict[str, str]:
    """Write the assumptions sheet; return references to the cells formulas use."""
    _title(ws, "Assumptions")
    refs: dict[str, str] = {}
    s = case.settings
    op = result.physics.operation
    row = 3
    _header(ws, row, ["Case setting", "Value"])
    settings = [("name", s.name), ("description", getattr(s, "description", "") or ""), ("currency", s.currency),
                ("power unit shown", s.power_unit), ("time zone", s.time_zone), ("region (efficiency rules)", s.region),
                ("purchase date (rules read on)", (getattr(s, "purchase_date", "") or "")
                 + ("" if getattr(s, "purchase_date_declared", True) else " (the day of the run: the case gives none)")),
                ("invented demo data", "yes" if s.invented else "no"),
                ("analysis year", content.analysis_year(result)), ("interval [h]", float(op.interval_h)),
                ("assets in the case", len(case.assets)), ("options in the catalogue", len(case.options))]
    settings += [(item[:1].lower() + item[1:], f"{value} ({note})") for item, value, note in content.basis_rows(case, result)
                 if item.startswith(("Tariff of site", "Today's fleet against the bills", "Changes in service from"))]
    for k, (label, value) in enumerate(settings):
        put_text(ws, row + 1 + k, 1, label)
        put(ws, row + 1 + k, 2, value)
    row += len(settings) + 2

    _header(ws, row, ["Finance assumption", "Value", "Unit", "Meaning", "Same as the program default?",
                      "Live in this workbook?"])
    row += 1
    # the cells the workbook's formulas read; the others record the run (its flows were computed with them)
    live = {"discount_rate_frac": "yes: NPVs, discounted paybacks, the plan's NPVs of the projects in this pack and "
                                  "the checks recalculate"}
    recorded = "no: a record of the run; change it in the case and run again"
    for item in content.finance_rows(result.assumptions, f.currency):
        key, value = item["key"], item["value"]
        if key == "budget_per_yr":
            budgets = list(value)
            if not budgets:
                put_text(ws, row, 1, "budget_per_yr")
                put_text(ws, row, 2, "no limit")
                put_text(ws, row, 3, item["unit"])
                put_text(ws, row, 4, item["meaning"])
                put_text(ws, row, 5, "yes" if item["program_default"] else "no")
                put_text(ws, row, 6, recorded)
                row += 1
            for year, budget in enumerate(budgets):
                put_text(ws, row, 1, f"budget_per_yr, plan year {year}")
                put(ws, row, 2, float(budget), f.money)
                put_text(ws, row, 3, item["unit"])
                put_text(ws, row, 4, item["meaning"])
                put_text(ws, row, 5, "no")
                put_text(ws, row, 6, "yes: the Plan sheet's capital against the budget")
                refs[f"budget_{year}"] = _sheet_ref("Assumptions", 2, row)
                row += 1
            continue
        put_text(ws, row, 1, key)
        if isinstance(value, float) and math.isinf(value):
            put_text(ws, row, 2, "no cap")
        else:
            fmt = f.frac if key.endswith("_frac") else None
            put(ws, row, 2, value, fmt)
        unit = item["unit"]
        if key.endswith("_frac") and unit.startswith("frac"):  # the cell shows the fraction as a percentage
            unit = "%" + unit[len("frac"):] + " (the cell holds the fraction: 8 % is 0.08)"
        put_text(ws, row, 3, unit)
        put_text(ws, row, 4, item["meaning"])
        put_text(ws, row, 5, "yes" if item["program_default"] else "no")
        put_text(ws, row, 6, live.get(key, recorded))
        refs[key] = _sheet_ref("Assumptions", 2, row)
        row += 1
    row += 1

    put_text(ws, row, 1, "Options catalogue (capital = coefficient x rated kW ^ exponent, then the fractions)").font = _BOLD
    row += 1
    options = case.options.copy()
    row = _table(ws, row, options, [(c, c, None) for c in options.columns])

    put_text(ws, row, 1, "Cautions").font = _BOLD
    row += 1
    for text in content.CAUTIONS:
        put_text(ws, row, 1, text)
        row += 1
    _widths(ws, {1: 34, 2: 22, 3: 14, 4: 50, 5: 16, 6: 40})
    return refs


_RESULT_COLUMNS = [
    ("asset_id", "Asset", None), ("option_id", "Option", None), ("label", "Option label", None),
    ("technology", "Technology", None), ("recommended", "Recommended", None), ("in_plan", "In the exact plan", None),
    ("rated_p_kw", "Rated [kW]", "number"), ("running_h_per_yr", "Running [h/yr]", "whole"),
    ("energy_kwh_per_yr", "Energy [kWh/yr]", "whole"), ("energy_saved_kwh_per_yr", "Energy saved [kWh/yr]", "whole"),
    ("mean_speed_rpm", "Mean speed [rpm]", "whole"),
    ("saving_energy_per_yr", "Saving: energy [/yr]", "money"), ("saving_demand_per_yr", "Saving: demand [/yr]", "money"),
    ("saving_reactive_per_yr", "Saving: reactive [/yr]", "money"), ("saving_fixed_per_yr", "Saving: fixed [/yr]", "money"),
    ("saving_maintenance_per_yr", "Saving: maintenance [/yr]", "money"),
    ("bill_saving_per_yr", "Bill saving [/yr]", "money"),
    ("ratchet_shortfall", "Saved less while the demand ratchet bills today's peaks", "money"),
    ("capital", "Capital", "money"),
    ("must_spend_capital", "Must-spend capital avoided", "money"), ("npv", "NPV", "money"),
    ("irr_text", "IRR", "frac"), ("irr_status", "IRR status", None), ("mirr_frac", "MIRR", "frac"),
    ("simple_payback_text", "Simple payback [yr]", "years"),
    ("discounted_payback_text", "Discounted payback [yr]", "years"),
    ("simple_payback_lost_text", "Simple payback lost again by the horizon's end", None),
    ("discounted_payback_lost_text", "Discounted payback lost again by the horizon's end", None),
    ("life_cycle_cost", "Life-cycle cost", "money"), ("profitability_index", "Profitability index [-]", "number"),
    ("co2_avoided_t_per_yr", "CO2 avoided [t/yr]", "number"), ("abatement_cost_per_t", "Abatement cost [/t]", "money"),
    ("failed_text", "Motor has failed", None), ("flags", "Flags", None),
]


def _with_currency(header: str, currency: str) -> str:
    """A money column's header with its unit: "[/yr]" -> "[EUR/yr]", no unit -> "[EUR]"."""
    if "[/" in header:
        return header.replace("[/", f"[{currency}/")
    return f"{header} [{currency}]"


def _lower_first(label: str) -> str:
    """A label set after other words: its first letter lower case, but not an abbreviation's (CO2, NPV, IRR)."""
    first = label.split(" ", 1)[0]
    return label if len(first) > 1 and first[:2].isupper() or any(c.isdigit() for c in first) else label[:1].lower() + label[1:]


def _engine_payback(value: float) -> Any:
    if math.isnan(value):  # nothing invested (keep today's motor): no payback to state
        return "-"
    return value if math.isfinite(value) else "not within horizon"


def _engine_irr(value: float, status: str) -> Any:
    return value if (status != "none" and math.isfinite(value)) else "none"


def _results(ws: Worksheet, result, scope: content.Scope, f: _Formats, power_unit: str = "kW") -> None:
    _title(ws, "Options compared, per asset in scope (one row per asset x option; money per year at base-year prices)")
    put_text(ws, 2, 1, "Each option priced alone against today's bill (for a motor that has failed, against the least "
                       "that puts it back in service now). The Plan sheet counts a reactive project of the "
                       "plan at the share of its bill saving it adds beside the plan's other projects, and at its plan "
                       "year: its plan NPV can be lower than the NPV here.")
    res = result.results[result.results["asset_id"].isin(list(scope.asset_ids))].copy()
    order = {a: i for i, a in enumerate(scope.asset_ids)}
    res = res.assign(_o=res["asset_id"].map(order)).sort_values("_o", kind="stable").drop(columns="_o")
    rec = set(scope.recommended["asset_id"] + "/" + scope.recommended["option_id"])
    plan = set(result.plan["asset_id"] + "/" + result.plan["option_id"])
    key = res["asset_id"] + "/" + res["option_id"]
    # yes/no as the Plan sheet writes them (not a spreadsheet's TRUE/FALSE)
    res["recommended"] = np.where(key.isin(list(rec)).to_numpy(), "yes", "no")
    res["in_plan"] = np.where(key.isin(list(plan)).to_numpy(), "yes", "no")
    res["irr_text"] = [_engine_irr(v, s) for v, s in zip(res["irr_frac"], res["irr_status"])]
    res["simple_payback_text"] = [_engine_payback(v) for v in res["simple_payback_yr"]]
    res["discounted_payback_text"] = [_engine_payback(v) for v in res["discounted_payback_yr"]]
    # a payback reached, then lost to a later outlay (the cumulative flow ends the horizon below zero), per basis:
    # the simple one as the report and the records state it, the discounted one as the dashboard does
    for basis in ("simple", "discounted"):
        column = f"{basis}_payback_lost_again"
        lost = res[column].to_numpy(dtype=bool) if column in res else np.zeros(len(res), dtype=bool)
        res[f"{basis}_payback_lost_text"] = np.where(lost, "yes", "no")
    # a motor that has failed: its options' savings and NPVs are over the least that puts it back in service
    failed = res["failed"].to_numpy(dtype=bool) if "failed" in res else np.zeros(len(res), dtype=bool)
    res["failed_text"] = np.where(failed, "yes", "no")
    res["rated_p_kw"] = rating_in_unit(res["rated_p_kw"].to_numpy(dtype=float), power_unit)  # shown in the case's unit
    fmt = {"money": f.money, "frac": f.frac, "years": f.years, "number": f.number, "whole": f.whole, None: None}
    cols = [(c, _with_currency(h, f.currency) if k == "money" else
             (f"Rated [{power_label(power_unit)}]" if c == "rated_p_kw" else h), fmt[k]) for c, h, k in _RESULT_COLUMNS]
    _table(ws, 3, res, cols)
    ws.freeze_panes = "C4"
    _widths(ws, {1: 12, 2: 12, 3: 34, 4: 16} | {k: 14 for k in range(5, len(cols) + 1)} | {len(cols): 60})


def write_project_block(ws: Worksheet, row: int, title: str, table: pd.DataFrame, rate_ref: str,
                        engine: dict[str, Any], currency: str = "EUR", note: str = "",
                        rate_frac: float | None = None) -> tuple[int, dict[str, Any]]:
    """Write one project's cash-flow block with live formulas; return the next free row and the metric rows.

    Parameters
    ----------
    ws : openpyxl.worksheet.worksheet.Worksheet
    row : int
        First row of the block.
    title : str
        Block title (user text is allowed: it goes through :func:`put_text`).
    table : pandas.DataFrame
        Flows [currency]: one row per component (index = component name), columns = years 0..N.
    rate_ref : str
        Absolute reference of the discount-rate cell [frac/yr], e.g. ``'Assumptions'!$B$16``.
    engine : dict
        The engine's ``npv``, ``irr``, ``payback`` and ``discounted_payback`` shown beside the formulas
        (numbers, or the text ``"none"`` / ``"not within horizon"``).
    currency : str
        Currency code for the number formats.
    note : str
        Optional note beside the IRR search start.
    rate_frac : float, optional
        The discount rate in the cell ``rate_ref`` [frac/yr]. With it, each formula's value is stored
        beside it (:func:`put_formula`); the IRR's is the engine's (with several rates, a spreadsheet that
        recalculates may find another one from its search start).

    Returns
    -------
    tuple
        ``(next_row, rows)`` where ``rows`` maps "npv", "irr", "payback", "discounted_payback" and "net"
        to their row numbers (the formula is in column B, the engine's figure in column C), and
        ``rows["values"]`` the metrics' computed values (None where not stored).

    Notes
    -----
    With flows CF_t in columns B (t = 0) onwards and the rate d on the Assumptions sheet:

    * net row: ``=SUM`` of the component rows; the paybacks' rows leave out the residual value at the
      horizon's end (a book value, not cash): CF_t = net less the residual row; cumulative:
      S_t = S_{t-1} + CF_t;
    * NPV: ``=B_net + NPV(d, C_net:last_net)``: the spreadsheet NPV discounts its first value by one
      period, so year 0 stays outside and NPV = sum CF_t / (1 + d)^t [1];
    * IRR: ``=IRR(B_net:last_net, guess)``, "none" when the function finds no rate;
    * payback: from the first year t0 with S_t0 < 0 (the "year below zero" row's minimum) to the first
      year t with S_{t-1} < 0 <= S_t: (t - 1) - S_{t-1} / CF_t - t0 (flows taken to accrue evenly
      through the year); 0 when S is never below zero and some S_t > 0; the discounted payback does the
      same on CF_t / (1 + d)^t [1]. "not within horizon" when the cumulative flow does not come back to
      >= 0, or when there are no flows.

    References
    ----------
    .. [1] S. K. Fuller and S. R. Petersen, "Life-Cycle Costing Manual for the Federal Energy Management
       Program," NIST Handbook 135, 1995 ed., National Institute of Standards and Technology, 1996.
    """
    f = _Formats(currency)
    horizon = int(table.columns.max()) if len(table.columns) else 0
    first_col, last_col = 2, 2 + horizon
    put_text(ws, row, 1, title).font = _BOLD
    for col in range(1, last_col + 1):
        ws.cell(row=row, column=col).fill = _BLOCK_FILL
    year_row = row + 1
    put_text(ws, year_row, 1, "Project year").font = _BOLD
    for t in range(horizon + 1):
        put(ws, year_row, first_col + t, t).font = _BOLD
    comp_first = year_row + 1
    r = comp_first
    flows = np.zeros((len(table), horizon + 1))
    for k, (component, values) in enumerate(table.iterrows()):
        put_text(ws, r, 1, content.COMPONENT_LABELS.get(str(component), str(component)))
        for t in range(horizon + 1):
            flows[k, t] = float(values.get(t, 0.0))
            put(ws, r, first_col + t, flows[k, t], f.money2)
        r += 1
    comp_last = r - 1
    # what each formula gives, stored beside it (None: not known here, left for the spreadsheet)
    net_v = flows.sum(axis=0)
    components = [str(c) for c in table.index]
    residual_at = components.index("residual") if "residual" in components else None
    pay_v = net_v - flows[residual_at] if residual_at is not None else net_v  # the paybacks leave the residual out
    cum_v = np.cumsum(pay_v)
    known = rate_frac is not None
    factor_v = 1.0 / (1.0 + (rate_frac if known else 0.0)) ** np.arange(horizon + 1)
    disc_v = pay_v * factor_v
    dcum_v = np.cumsum(disc_v)

    def crossed(running: np.ndarray, flow: np.ndarray, t: int) -> Any:
        return t - 1 - running[t - 1] / flow[t] if running[t - 1] < 0 <= running[t] else ""

    def paid_back(running: np.ndarray, flow: np.ndarray) -> Any:
        """The payback formula's value: from the first year below zero to the first crossing back."""
        below = [t for t in range(horizon + 1) if running[t] < 0]
        if not below:
            return 0.0 if running.max() > 0 else "not within horizon"
        crossings = [v for v in (crossed(running, flow, t) for t in range(1, horizon + 1)) if _is_number(v)]
        return min(crossings) - below[0] if crossings else "not within horizon"
    net = r
    pay, cum, factor, disc, dcum = net + 1, net + 2, net + 3, net + 4, net + 5
    out, dout, cross, dcross = net + 6, net + 7, net + 8, net + 9
    labels = {net: "Net cash flow", pay: "Net cash flow without residual value (for the paybacks)",
              cum: "Cumulative, without residual value", factor: "Discount factor 1/(1+d)^t",
              disc: "Discounted, without residual value", dcum: "Cumulative discounted, without residual value",
              out: "Year below zero, simple", dout: "Year below zero, discounted",
              cross: "Payback crossing, simple [yr]", dcross: "Payback crossing, discounted [yr]"}
    for rr, label in labels.items():
        put_text(ws, rr, 1, label).font = _BOLD if rr == net else Font()
    for t in range(horizon + 1):
        c = first_col + t
        col = get_column_letter(c)
        prev = get_column_letter(c - 1)
        if comp_last >= comp_first:
            put_formula(ws, net, c, f"=SUM({col}{comp_first}:{col}{comp_last})", f.money2, net_v[t])
        else:
            put(ws, net, c, 0.0, f.money2)
        residual_ref = f"-{col}{comp_first + residual_at}" if residual_at is not None else ""
        put_formula(ws, pay, c, f"={col}{net}{residual_ref}", f.money2, pay_v[t])
        put_formula(ws, cum, c, f"={col}{pay}" if t == 0 else f"={prev}{cum}+{col}{pay}", f.money2, cum_v[t])
        put_formula(ws, factor, c, f"=1/(1+{rate_ref})^{col}${year_row}", f.factor, factor_v[t] if known else None)
        put_formula(ws, disc, c, f"={col}{pay}*{col}{factor}", f.money2, disc_v[t] if known else None)
        put_formula(ws, dcum, c, f"={col}{disc}" if t == 0 else f"={prev}{dcum}+{col}{disc}", f.money2,
                    dcum_v[t] if known else None)
        for target, running, values in ((out, cum, cum_v), (dout, dcum, dcum_v if known else None)):
            below = None if values is None else (t if values[t] < 0 else "")
            put_formula(ws, target, c, f'=IF({col}{running}<0,{col}${year_row},"")', None, below)
        if t == 0:
            continue  # (a crossing back to zero needs a year before it)
        for target, running, flow, computed in ((cross, cum, pay, crossed(cum_v, pay_v, t)),
                                                (dcross, dcum, disc, crossed(dcum_v, disc_v, t) if known else None)):
            expr = (f'=IF(AND({prev}{running}<0,{col}{running}>=0),'
                    f'{col}${year_row}-1-{prev}{running}/{col}{flow},"")')
            put_formula(ws, target, c, expr, f.years, computed)
    net_range = f"{_ref(first_col, net)}:{_ref(last_col, net)}"
    later = f"{_ref(first_col + 1, net)}:{_ref(last_col, net)}" if horizon >= 1 else None
    m = dcross + 2
    _header(ws, m, ["Metric", "Workbook formula", "Engine", "Difference"])
    guess = m + 5
    npv_expr = f"={_ref(first_col, net)}+NPV({rate_ref},{later})" if later else f"={_ref(first_col, net)}"
    def payback_formula(below_row: int, running_row: int, cross_row: int) -> str:
        below = f"{_ref(first_col, below_row)}:{_ref(last_col, below_row)}"
        running = f"{_ref(first_col, running_row)}:{_ref(last_col, running_row)}"
        crossing = f"{_ref(first_col, cross_row)}:{_ref(last_col, cross_row)}"
        return (f'=IF(COUNT({below})=0,IF(MAX({running})>0,0,"not within horizon"),'
                f'IF(COUNT({crossing})=0,"not within horizon",MIN({crossing})-MIN({below})))')

    metrics = {
        "npv": (m + 1, "NPV at the discount rate", npv_expr, f.money2),
        "irr": (m + 2, "IRR", f'=IFERROR(IRR({net_range},{_ref(2, guess)}),"none")', f.frac),
        "payback": (m + 3, "Simple payback [yr]", payback_formula(out, cum, cross), f.years),
        "discounted_payback": (m + 4, "Discounted payback [yr]", payback_formula(dout, dcum, dcross), f.years),
    }
    computed = {
        "npv": float(net_v[0] + ((net_v[1:] * factor_v[1:]).sum() if horizon >= 1 else 0.0)) if known else None,
        # the engine's rate, a root of the same flows (with several, the one closest to 0, as the block's note says;
        # a spreadsheet that recalculates may find another from its search start)
        "irr": engine.get("irr"),
        "payback": paid_back(cum_v, pay_v),
        "discounted_payback": paid_back(dcum_v, disc_v) if known else None,
    }
    rows = {"net": net, "factor": factor, "first_col": first_col, "last_col": last_col,
            "components": {c: comp_first + k for k, c in enumerate(components)}}
    for name, (mr, label, expr, fmt) in metrics.items():
        put_text(ws, mr, 1, label)
        put_formula(ws, mr, 2, expr, fmt, computed[name])
        put(ws, mr, 3, engine.get(name), fmt)
        workbook_v, engine_v = computed[name], engine.get(name)
        # rounded to a millionth: a difference of rounding (1e-10) reads 0, not "-0.00"
        difference = (round(workbook_v - engine_v, 6) + 0.0 if _is_number(workbook_v) and _is_number(engine_v)
                      else "" if workbook_v is not None else None)
        put_formula(ws, mr, 4, f'=IF(AND(ISNUMBER(B{mr}),ISNUMBER(C{mr})),ROUND(B{mr}-C{mr},6),"")', fmt, difference)
        rows[name] = mr
    rows["values"] = computed
    put_text(ws, guess, 1, "IRR search start (year-1 flow / investment)")
    if horizon >= 1:
        start = net_v[1] / -net_v[0] if net_v[0] < 0 and net_v[1] > 0 else 0.1
        put_formula(ws, guess, 2, f"=IF(AND({_ref(first_col, net)}<0,{_ref(first_col + 1, net)}>0),"
                                  f"{_ref(first_col + 1, net)}/-{_ref(first_col, net)},0.1)", f.frac, start)
    else:
        put(ws, guess, 2, 0.1, f.frac)
    if note:
        put_text(ws, guess, 3, note)
    return guess + 3, rows


def _cash_flow_blocks(ws: Worksheet, result, scope: content.Scope, refs: dict[str, str], currency: str) -> list[dict]:
    """Write one block per project; return the cells of its metrics for the checks sheet."""
    _title(ws, "Yearly cash flows by component, with live formulas for NPV, IRR and paybacks")
    put_text(ws, 2, 1, "Year 0 = investment, later flows at each year end; negative = money out. The discount rate "
                       "is read from the Assumptions sheet. Project years count from the project's own start.")
    horizon = int(result.assumptions.horizon_yr)
    out = []
    row = 4
    for p in scope.projects.itertuples(index=False):
        table = content.project_flow_table(result, p.asset_id, p.option_id)
        title = f"{p.asset_id} / {p.option_id}: {p.label}"
        if p.in_plan:
            title += f" (exact plan, plan year {int(p.plan_start_yr)})"
        engine = {"npv": float(p.npv), "irr": _engine_irr(float(p.irr_frac), str(p.irr_status)),
                  "payback": _engine_payback(float(p.simple_payback_yr)),
                  "discounted_payback": _engine_payback(float(p.discounted_payback_yr))}
        note = ("the flows have several IRRs: the engine reports the one closest to 0"
                if str(p.irr_status) == "multiple" else "")
        share = content.plan_credit_share(result, p.asset_id, p.option_id) if p.in_plan else None
        if share is not None:  # the block is the project alone; the plan counts a share of its bill saving
            note = "; ".join(x for x in (note, f"priced alone here; in the plan it is credited {share:.0%} of its bill "
                                               "saving, what it adds beside the plan's other projects (Plan sheet)") if x)
        row_next, rows = write_project_block(ws, row, title, table.reindex(columns=range(horizon + 1), fill_value=0.0),
                                             refs["discount_rate_frac"], engine, currency, note,
                                             rate_frac=float(result.assumptions.discount_rate_frac))
        cells = {"asset_id": p.asset_id, "option_id": p.option_id, "label": p.label, "recommended": bool(p.recommended),
                 "factor_row": rows["factor"], "first_col": rows["first_col"], "last_col": rows["last_col"],
                 "component_rows": rows["components"]}
        for name in ("npv", "irr", "payback", "discounted_payback"):
            cells[name] = _sheet_ref("Cash flows", 2, rows[name])
            cells[f"{name}_engine"] = _sheet_ref("Cash flows", 3, rows[name])
            cells[f"{name}_value"] = rows["values"][name]  # what the formula gives (None: left to the spreadsheet)
            cells[f"{name}_engine_value"] = engine[name]
        out.append(cells)
        row = row_next
    ws.freeze_panes = "B4"
    _widths(ws, {1: 42} | {c: 13 for c in range(2, 3 + horizon)})
    return out


def _match(workbook: str, engine: str) -> str:
    """Spreadsheet test: both numbers within the relative tolerance, or both the same text."""
    return (f"IF(ISNUMBER({workbook}),IF(ISNUMBER({engine}),ABS({workbook}-{engine})<={CHECK_REL_TOL}*MAX(1,ABS({engine})),"
            f"FALSE),{workbook}={engine})")


def _matches(workbook: Any, engine: Any) -> bool | None:
    """What :func:`_match` gives for two computed values (None when either is not known here)."""
    if workbook is None or engine is None:
        return None
    if _is_number(workbook):
        return _is_number(engine) and abs(workbook - engine) <= CHECK_REL_TOL * max(1.0, abs(engine))
    return not _is_number(engine) and str(workbook).lower() == str(engine).lower()  # (spreadsheet text = is caseless)


def _checks(ws: Worksheet, blocks: list[dict], f: _Formats) -> None:
    _title(ws, "Checks: the workbook's formulas against the engine's figures")
    put_text(ws, 2, 1, f"OK when every formula matches the engine within {CHECK_REL_TOL:.2%} of the engine's figure, "
                       f"or within {CHECK_REL_TOL:g} where that figure is below 1 (currency units, years or fractions); "
                       "'none' and 'not within horizon' must match as text.")
    headers = ["Asset", "Option", "Label", "Recommended", f"NPV (workbook) [{f.currency}]", f"NPV (engine) [{f.currency}]",
               "IRR (workbook) [-]", "IRR (engine) [-]", "Simple payback (workbook) [yr]", "Simple payback (engine) [yr]",
               "Discounted payback (workbook) [yr]", "Discounted payback (engine) [yr]", "Status"]
    _header(ws, 4, headers)
    row = 5
    for b in blocks:
        put_text(ws, row, 1, b["asset_id"])
        put_text(ws, row, 2, b["option_id"])
        put_text(ws, row, 3, str(b["label"]))
        put_text(ws, row, 4, "yes" if b["recommended"] else "no")  # (as the other sheets write it, not TRUE/FALSE)
        pairs, matches = [], []
        for k, (name, fmt) in enumerate((("npv", f.money2), ("irr", f.frac), ("payback", f.years),
                                         ("discounted_payback", f.years))):
            c = 5 + 2 * k
            put_formula(ws, row, c, f"={b[name]}", fmt, b.get(f"{name}_value"))
            put_formula(ws, row, c + 1, f"={b[name + '_engine']}", fmt, b.get(f"{name}_engine_value"))
            pairs.append(_match(_ref(c, row), _ref(c + 1, row)))
            matches.append(_matches(b.get(f"{name}_value"), b.get(f"{name}_engine_value")))
        status = None if None in matches else ("OK" if all(matches) else "CHECK")
        put_formula(ws, row, 13, f'=IF(AND({",".join(pairs)}),"OK","CHECK")', value=status)
        row += 1
    if not blocks:
        put_text(ws, row, 1, "(no projects in scope)")
    ws.freeze_panes = "C5"
    _widths(ws, {1: 12, 2: 12, 3: 34} | {c: 15 for c in range(4, 14)})


def _plan_npv_formula(block: dict, share: float | None, tax_rate_frac: float = 0.0) -> str:
    """The formula of a plan project's NPV at its own start from its block on 'Cash flows': the block's NPV,
    less (1 - r) x the present value of its bill-saving rows after tax (x (1 - the tax rate), the tax of the
    block's own tax row on them) for a reactive project credited the share r of its bill saving (what it adds
    beside the plan's other projects; r is the engine's, from the plan)."""
    from models.reactive_plan import BILL_SAVING_COMPONENTS

    expr = f"={block['npv']}"
    if share is None:
        return expr
    first, last, factor = get_column_letter(block["first_col"]), get_column_letter(block["last_col"]), block["factor_row"]
    present = [f"SUMPRODUCT('Cash flows'!{first}{r}:{last}{r},'Cash flows'!{first}{factor}:{last}{factor})"
               for c, r in block["component_rows"].items() if c in BILL_SAVING_COMPONENTS]
    kept = f"(1-{share!r})" if not tax_rate_frac else f"(1-{share!r})*(1-{float(tax_rate_frac)!r})"
    return expr + (f"-{kept}*({'+'.join(present)})" if present else "")


def _plan(ws: Worksheet, result, scope: content.Scope, refs: dict[str, str], f: _Formats,
          blocks: list[dict] | None = None, case=None) -> None:
    """The Plan sheet; with ``case``, the budget year of each plan year where it names them
    (:func:`models.pack.content.plan_year_names`, a column of its own beside the table by year)."""
    _title(ws, "Fleet plan by year: exact (integer programme) and rank-order (by profitability index)")
    put_text(ws, 2, 1, "NPV at its own start and at the plan's start: formulas on the project's block of 'Cash flows' "
                       "where this pack holds one (they follow the discount rate on 'Assumptions'); the engine's "
                       "figures at the run's rate for a project outside the pack, so a plan's total after a rate "
                       "change mixes the two unless the pack holds the whole plan.")
    block_of = {(b["asset_id"], b["option_id"]): b for b in blocks or ()}
    rate = refs["discount_rate_frac"]
    rate_v = float(result.assumptions.discount_rate_frac)
    in_scope = set(scope.projects["asset_id"] + "/" + scope.projects["option_id"])
    row = 3
    ranges = {}
    by_year: dict[str, dict[int, list[float]]] = {}  # plan -> year -> [capital, projects, NPV at plan start (formula)]
    cur = f.currency
    for name, frame in (("Exact plan", result.plan), ("Rank-order plan", result.plan_greedy)):
        put_text(ws, row, 1, name).font = _BOLD
        row += 1
        _header(ws, row, ["Plan year", "Asset", "Option", "Label", f"Capital [{cur}]", f"NPV at its own start [{cur}]",
                          f"NPV at plan start (engine) [{cur}]", f"NPV at plan start (formula) [{cur}]", "In this pack",
                          f"Yearly saving as the plan counts it [{cur}/yr]"])
        first = row + 1
        labels = result.results.set_index(["asset_id", "option_id"])["label"]
        # bill and maintenance saving per year, a reactive project of the exact plan at its credited share
        # (plan.csv's saving_counted_per_yr; summed, the Read me's yearly saving)
        shares = (result.plan_status or {}).get("repriced" if name == "Exact plan" else "repriced_greedy")
        counted_saving = plan_with_savings(frame, result.results, shares).set_index(
            ["asset_id", "option_id"])["saving_counted_per_yr"] if len(frame) else pd.Series(dtype=float)
        sums = by_year.setdefault(name, {})
        for r in frame.sort_values(["start_yr", "asset_id"], kind="stable").itertuples(index=False):
            row += 1
            put(ws, row, 1, int(r.start_yr))
            put_text(ws, row, 2, r.asset_id)
            put_text(ws, row, 3, r.option_id)
            put_text(ws, row, 4, str(labels.get((r.asset_id, r.option_id), "")))
            put(ws, row, 5, float(r.capital), f.money)
            block = block_of.get((r.asset_id, r.option_id))
            # a reactive project at the share its plan credits it with (the engine's); a project the plan counts at
            # its own NPV (the block's); otherwise the engine's figure
            share = (shares or {}).get(f"{r.asset_id}/{r.option_id}")
            share = None if share is None else float(share)
            alone = block is not None and abs(float(r.npv) - float(block["npv_engine_value"])) <= 1e-6 * max(1.0, abs(float(r.npv)))
            at_start = float(r.npv) / (1.0 + rate_v) ** int(r.start_yr)
            if block is not None and (share is not None or alone):
                put_formula(ws, row, 6, _plan_npv_formula(block, share, float(result.assumptions.tax_rate_frac)),
                            f.money, float(r.npv))
                put_formula(ws, row, 8, f"=F{row}/(1+{rate})^A{row}", f.money, at_start)
            else:
                # the engine's figure at the run's rate, discounted to the plan's start at that rate too (a rate
                # changed on 'Assumptions' would otherwise discount a figure computed at another)
                put(ws, row, 6, float(r.npv), f.money)
                put(ws, row, 8, at_start, f.money)
            put(ws, row, 7, float(r.npv_at_plan_start), f.money)
            year_sums = sums.setdefault(int(r.start_yr), [0.0, 0, 0.0])
            year_sums[0] += float(r.capital)
            year_sums[1] += 1
            year_sums[2] += at_start
            put_text(ws, row, 9, "yes" if f"{r.asset_id}/{r.option_id}" in in_scope else "no")
            put(ws, row, 10, float(counted_saving.get((r.asset_id, r.option_id), np.nan)), f.money)
        last = max(row, first)
        ranges[name] = (first, last)
        row += 2
    years = sorted(set(result.plan["start_yr"].astype(int)) | set(result.plan_greedy["start_yr"].astype(int))
                   | set(range(len(result.assumptions.budget_per_yr))))
    n_plan_years = (max(years) + 1) if years else 0
    names = content.plan_year_names(case, result, n_plan_years) if case is not None else []
    put_text(ws, row, 1, "By plan year").font = _BOLD
    row += 1
    put_text(ws, row, 2, content.PLAN_SPEND_TEXT)
    row += 1
    _header(ws, row, ["Plan year", f"Budget [{cur}]", f"Exact: capital spent (engine) [{cur}]", "Exact: projects started",
                      f"Exact: NPV at plan start [{cur}]", f"Rank-order: capital spent (engine) [{cur}]",
                      "Rank-order: projects started", f"Rank-order: NPV at plan start [{cur}]",
                      f"Exact: budget left [{cur}]"] + (["Budget year"] if names else []))
    top = row + 1
    budgets = list(result.assumptions.budget_per_yr)
    spent = {name: plan_capital_spent(frame, result.results, result.capital_spend_by_year, n_plan_years)
             for name, frame in (("Exact plan", result.plan), ("Rank-order plan", result.plan_greedy))}
    totals = np.zeros(9)
    for year in years:
        row += 1
        put(ws, row, 1, int(year))
        budget = refs.get(f"budget_{year}")
        if budget:
            put_formula(ws, row, 2, f"={budget}", f.money, budgets[year] if year < len(budgets) else None)
        else:
            put_text(ws, row, 2, "no limit")
        for k, name in enumerate(("Exact plan", "Rank-order plan")):
            a, b = ranges[name]
            base = 3 + 3 * k
            _, count, at_start = by_year[name].get(int(year), [0.0, 0, 0.0])
            capital = float(spent[name][0][int(year)])
            put(ws, row, base, capital, f.money)
            put_formula(ws, row, base + 1, f"=COUNTIF($A${a}:$A${b},A{row})", value=count)
            put_formula(ws, row, base + 2, f"=SUMIF($A${a}:$A${b},A{row},$H${a}:$H${b})", f.money, at_start)
            totals[base:base + 3] += (capital, count, at_start)
        left = (budgets[year] - float(spent["Exact plan"][0][int(year)])
                if budget and year < len(budgets) else "" if not budget else None)
        put_formula(ws, row, 9, f'=IF(ISNUMBER(B{row}),B{row}-C{row},"")', f.money, left)
        if names and int(year) < len(names):
            put_text(ws, row, 10, names[int(year)])
    if spent["Exact plan"][1] > 0.005 or spent["Rank-order plan"][1] > 0.005:
        row += 1
        put_text(ws, row, 1, "later")
        put_text(ws, row, 2, "not budgeted")
        for k, name in enumerate(("Exact plan", "Rank-order plan")):
            put(ws, row, 3 + 3 * k, float(spent[name][1]), f.money)
            totals[3 + 3 * k] += float(spent[name][1])
    if years:
        row += 1
        later_row = spent["Exact plan"][1] > 0.005 or spent["Rank-order plan"][1] > 0.005
        put_text(ws, row, 1, "Total, later included" if later_row else "Total").font = _BOLD
        for c in (3, 4, 5, 6, 7, 8):
            col = get_column_letter(c)
            put_formula(ws, row, c, f"=SUM({col}{top}:{col}{row - 1})", f.whole if c in (4, 7) else f.money,
                        int(totals[c]) if c in (4, 7) else float(totals[c]))
    row += 2
    put_text(ws, row, 1, "Exact vs rank-order (engine)").font = _BOLD
    labels = {"npv_exact": (f"Exact plan NPV [{f.currency}]", f.money),
              "npv_greedy": (f"Rank-order plan NPV [{f.currency}]", f.money),
              "shortfall": (f"Rank-order plan's shortfall [{f.currency}]", f.money),
              "shortfall_frac": ("Rank-order plan's shortfall [share of the exact NPV]", f.frac),
              "projects_exact": ("Projects in the exact plan", f.whole),
              "projects_greedy": ("Projects in the rank-order plan", f.whole)}
    for k, (key, value) in enumerate(result.plan_comparison.items()):
        label, number_format = labels.get(str(key), (str(key), f.money))
        put_text(ws, row + 1 + k, 1, label)
        put(ws, row + 1 + k, 2, float(value), number_format)
    status = result.plan_status or {}
    if status.get("message"):  # how far the exact plan is proven, as the report and the terminal say it
        row += 2 + len(result.plan_comparison)
        put_text(ws, row, 1, "Exact plan's proof").font = _BOLD
        withdrawn = withdrawn_text(status, labels=option_labels(result.results))
        put_text(ws, row, 2, f"{status['message']}." + (f" {withdrawn}" if withdrawn else ""))
    ws.freeze_panes = "A5"  # (the title, the note, the plan's name and its header row)
    _widths(ws, {1: 12, 2: 14, 3: 14, 4: 34, 5: 16, 6: 18, 7: 20, 8: 20, 9: 16, 10: 12})


def _financing(ws: Worksheet, result, f: _Formats, case=None) -> None:
    """The exact plan's yearly flows to the owner, in cash and under the case's financing
    (:func:`models.financing.plan_financing`); the financed net and its running sum are formulas of the row;
    with ``case``, the budget year of each plan year in a column of its own where the case names them."""
    from models.financing import plan_financing, plan_financing_words

    _title(ws, "The exact plan's cash flows to the owner, in cash and under the case's financing")
    table = plan_financing(result)
    names = content.plan_year_names(case, result, len(table)) if case is not None else []
    text = plan_financing_words(result, table)
    if not text:
        text = ("Financing: cash (finance.toml's financing key): the owner pays every project's capital, so the "
                "financed columns are zero and the financed net is the cash net."
                if str(getattr(result.assumptions, "financing", "cash")) == "cash" else
                "The plan buys nothing under these budgets: there is nothing to finance.")
    put_text(ws, 2, 1, text)
    put_text(ws, 3, 1, "Each project from its plan year, as the plan counts it (the cash net's discounted sum is the plan's "
             "NPV). The plan, its ranking and every metric are on the cash basis. Positive: money to the owner; "
             "negative: money out.")
    cols = [("cash_net", "Cash net"), ("loan_proceeds", "Loan borrowed"), ("loan_repayment", "Loan repaid"),
            ("interest_tax_shield", "Interest tax shield"), ("company_capital", "Capital paid by the company or lessor"),
            ("company_incentive_and_depreciation", "Incentive and depreciation shield kept by the company or lessor"),
            ("company_savings_share", "Savings share paid to the company, after tax"),
            ("lease_payment", "Lease payments"), ("lease_tax_shield", "Lease payments' tax shield"),
            ("lease_buyout", "Lease buyout")]
    row = 5
    _header(ws, row, ["Plan year"] + [f"{h} [{f.currency}]" for _, h in cols]
            + [f"Financed net [{f.currency}]", f"Cumulative financed [{f.currency}]"] + (["Budget year"] if names else []))
    last = get_column_letter(1 + len(cols))
    net_col, cum_col = 2 + len(cols), 3 + len(cols)
    total = 0.0
    for r in table.to_dict("records"):
        row += 1
        put(ws, row, 1, int(r["year"]), "0")
        for k, (name, _) in enumerate(cols):
            put(ws, row, 2 + k, float(r[name]), f.money)
        total += float(r["financed_net"])
        put_formula(ws, row, net_col, f"=SUM(B{row}:{last}{row})", f.money, float(r["financed_net"]))
        net = get_column_letter(net_col)
        put_formula(ws, row, cum_col, f"=SUM({net}$6:{net}{row})", f.money, total)
        if names and int(r["year"]) < len(names):
            put_text(ws, row, cum_col + 1, names[int(r["year"])])
    ws.freeze_panes = "B6"
    _widths(ws, {1: 10, **{c: 16 for c in range(2, cum_col + 1)}})


def _bills(ws: Worksheet, result, f: _Formats) -> None:
    _title(ws, "Monthly bills before (today's fleet) and after (the exact fleet plan in place)")
    put_text(ws, 2, 1, "'After' prices the whole exact plan, whatever the scope of this pack.")
    bills = result.bills
    row = 4
    _header(ws, row, ["Site", "Month", f"Before [{f.currency}/month]", f"After [{f.currency}/month]",
                      f"Saving [{f.currency}/month]"])
    top = row + 1
    if not bills.empty:
        pivot = bills.pivot_table(index=["site_id", "month"], columns="scenario", values="amount", aggfunc="sum",
                                  sort=True).reset_index()
        sums = np.zeros(6)  # by column (C, D, E at 3, 4, 5)
        for r in pivot.itertuples(index=False):
            row += 1
            put_text(ws, row, 1, str(r.site_id))
            put_text(ws, row, 2, str(r.month))
            before, after = float(getattr(r, "baseline", 0.0)), float(getattr(r, "plan", 0.0))
            put(ws, row, 3, before, f.money)
            put(ws, row, 4, after, f.money)
            put_formula(ws, row, 5, f"=C{row}-D{row}", f.money, before - after)
            sums += (0.0, 0.0, 0.0, before, after, before - after)
        row += 1
        put_text(ws, row, 1, "Total").font = _BOLD
        for c in (3, 4, 5):
            col = get_column_letter(c)
            put_formula(ws, row, c, f"=SUM({col}{top}:{col}{row - 1})", f.money, float(sums[c]))
    row += 3
    put_text(ws, row, 1, "Bill line items").font = _BOLD
    cols = [("site_id", "Site", None), ("month", "Month", None), ("scenario", "Scenario", None),
            ("line_item_text", "Line item", None), ("quantity", "Quantity", f.number), ("unit", "Unit", None),
            ("rate", f"Rate [{f.currency} per unit]", "0.0000"), ("amount", f"Amount [{f.currency}]", f.money2),
            ("line_item", "Tariff clause", None)]
    # the line item in words, its tariff code (category:name) kept last to trace it to the tariff file
    frame = (bills.assign(scenario=bills["scenario"].map({"baseline": "before", "plan": "after"}),
                          line_item_text=[line_item_text(v) for v in bills["line_item"]])
             if not bills.empty else bills.assign(line_item_text=pd.Series(dtype=object)))
    _table(ws, row + 1, frame, cols)
    ws.freeze_panes = "A5"
    _widths(ws, {1: 12, 2: 12, 3: 16, 4: 40, 5: 16, 6: 10, 7: 10, 8: 16, 9: 24})


def _data_quality(ws: Worksheet, case, result, scope: content.Scope) -> None:
    _title(ws, "Data quality: defaulted inputs, model flags and input problems (assets in scope)")
    assets = case.assets[case.assets["asset_id"].isin(list(scope.asset_ids))]
    defaults = content.scope_defaults(case, scope.asset_ids)
    counts = defaults.groupby("asset_id").size() if not defaults.empty else pd.Series(dtype=int)
    assets = assets.assign(n_defaulted=assets["asset_id"].map(counts).fillna(0).astype(int),
                           rated_p_kw=rating_in_unit(assets["rated_p_kw"].to_numpy(dtype=float), case.settings.power_unit))
    row = 3
    put_text(ws, row, 1, "Assets").font = _BOLD
    row = _table(ws, row + 1, assets, [("asset_id", "Asset", None), ("description", "Description", None),
                                       ("site_id", "Site", None),
                                       ("rated_p_kw", f"Rated [{power_label(case.settings.power_unit)}]", "#,##0.00"),
                                       ("data_quality_pct", "Data quality [%]", "0"),
                                       ("n_defaulted", "Defaulted fields", "0")])
    put_text(ws, row, 1, "Every defaulted input").font = _BOLD
    row = _table(ws, row + 1, defaults.assign(value=[default_value(v) for v in defaults["value"]])
                 if not defaults.empty else defaults,
                 [("asset_id", "Asset", None), ("column", "Field", None), ("value", "Value used", None),
                  ("basis", "Basis", None)])
    put_text(ws, row, 1, "Flags raised by the machine models").font = _BOLD
    row = _table(ws, row + 1, content.scope_flags(result, scope.asset_ids),
                 [("asset_id", "Asset", None), ("option_id", "Option (blank = the asset)", None), ("flag", "Flag", None)])
    put_text(ws, row, 1, "Problems found in the case files").font = _BOLD
    problems = pd.DataFrame([{"severity": p.severity, "file": p.file, "row": p.row, "column": p.column or "",
                              "value": "" if p.value is None else str(p.value), "rule": p.rule, "hint": p.hint}
                             for p in (case.problems or [])],
                            columns=["severity", "file", "row", "column", "value", "rule", "hint"])
    _table(ws, row + 1, problems, [(c, c.capitalize(), None) for c in problems.columns])
    _widths(ws, {1: 14, 2: 34, 3: 24, 4: 60, 5: 16, 6: 50, 7: 40})


def _end_of_life(ws: Worksheet, result, scope: content.Scope, f: _Formats, case_power_unit: str = "kW",
                 case=None) -> None:
    _title(ws, "End of life: expected present cost of replace now, replace at failure and rewind at failure")
    eol = result.end_of_life
    row = 3
    if eol.empty:
        put_text(ws, row, 1, "Not available: the options catalogue needs a rewind and a new induction motor option.")
        row += 2
    else:
        frame = eol[eol["asset_id"].isin(list(scope.asset_ids))]
        labels = option_labels(result.results)
        frame = frame.assign(new_option_id=frame["new_option_id"].map(lambda o: labels.get(o, o)),
                             best_strategy=frame["best_strategy"].map(lambda b: STRATEGY_NAMES.get(b, b)))
        if "failed" in frame:  # a motor that has failed: its costs are of replacing or rewinding it now
            now = {"replace now": "replace it now", "rewind at failure": "rewind it now"}
            frame = frame.assign(best_strategy=[now.get(b, b) if bool(x) else b
                                                for b, x in zip(frame["best_strategy"], frame["failed"])],
                                 failed=frame["failed"].map(lambda v: "yes" if bool(v) else "no"))
        cols = [("asset_id", "Asset", None), ("age_yr", "Age [yr]", "0"), ("new_option_id", "New motor option", None)]
        cols += [("failed", "Has failed", None)] if "failed" in frame else []
        cols += [("failure_probability_in_horizon_frac", "Failure probability in horizon [%]", f.frac),
                 ("mean_residual_life_yr", "Mean residual life [yr]", f.years),
                 ("cost_replace_now", f"Replace now [{f.currency}]", f.money),
                 ("cost_replace_at_failure", f"Replace at failure [{f.currency}]", f.money),
                 ("cost_rewind_at_failure", f"Rewind at failure [{f.currency}]", f.money), ("best_strategy", "Cheapest", None),
                 ("advantage_over_next", f"Advantage over the next [{f.currency}]", f.money)]
        if "downtime_cost_per_h" in frame:  # what an outage is priced at, and where that figure comes from
            cols += [("downtime_cost_per_h", f"Outage cost [{f.currency}/h]", f.money),
                     ("downtime_cost_basis", "Outage cost from", None)]
        if "new_lead_time_h" in frame:  # the outage's hours: the register's, the size class's or a spare's fitting
            cols += [("new_lead_time_h", "Outage to a new motor [h]", "0"),
                     ("rewind_lead_time_h", "Outage to a rewound motor [h]", "0")]
            if "lead_time_basis" in frame:
                cols += [("lead_time_basis", "Outage hours from", None)]
        row = _table(ws, row, frame, cols)
        put_text(ws, row, 1, failure_law_caution(power_unit=case_power_unit))
        row += 2
    put_text(ws, row, 1, "Repair-or-replace policy for the fleet").font = _BOLD
    rules = result.fleet_rules
    unit = power_label(case_power_unit)
    if unit == "hp" and not rules.empty:  # the sentences already give the case's unit
        rules = rules.assign(**{c: rating_in_unit(rules[c], unit).round(2) for c in ("min_rated_p_kw", "max_rated_p_kw")})
    if "decision" in rules:  # in words, as the dashboard names them
        from models.end_of_life import DECISION_NAMES

        rules = rules.assign(decision=rules["decision"].map(lambda d: DECISION_NAMES.get(d, d)))
    headers = {"min_rated_p_kw": f"From rating [{unit}]", "max_rated_p_kw": f"To rating [{unit}]",
               "min_hours_to_replace_h_per_yr": "Replace rather than rewind from [h/yr]", "decision": "Decision", "rule": "Rule"}
    row = _table(ws, row + 1, rules, [(c, headers.get(c, c), None) for c in rules.columns])
    if case is not None:
        _spares(ws, row, case, result, scope, f)
    _widths(ws, {1: 14, 2: 10, 3: 16, 4: 18, 5: 18, 6: 16, 7: 18, 8: 18, 9: 20, 10: 18, 11: 14, 12: 30})


def _spares(ws: Worksheet, row: int, case, result, scope: content.Scope, f: _Formats) -> None:
    """The spares of the groups of interchangeable motors the scope's assets belong to (models.spares)."""
    from models.spares import SPARE_UPKEEP_FRAC, TARGET_FILL_FRAC, spares_table

    put_text(ws, row, 1, "Spares for groups of interchangeable motors").font = _BOLD
    table = spares_table(case, result)
    mine = set(scope.asset_ids)
    table = table[[bool(mine & set(ids.split(" "))) for ids in table["asset_ids"]]]
    put_text(ws, row + 1, 1, f"A rotating pool: a failed motor is swapped for a spare and rewound to become the next. "
             f"Spares for {100 * TARGET_FILL_FRAC:g} % of failures to find one, and the number that costs least with the "
             f"downtime it avoids against holding the spares (their price x (discount rate + {100 * SPARE_UPKEEP_FRAC:g} % "
             "upkeep) a year). Motors of one group must also share frame, mounting and shaft: confirm on site.")
    cols = [("group", "Group", None), ("motors", "Motors", "0"), ("asset_ids", "Assets", None),
            ("failures_per_yr", "Failures a year", "0.000"), ("rewind_turnaround_h", "Rewind turnaround [h]", "0"),
            ("outage_without_spare_h", "Outage without a spare [h]", "0"),
            ("spares_for_target", f"Spares for {100 * TARGET_FILL_FRAC:g} %", "0"), ("economic_spares", "Economic spares", "0"),
            ("fill_at_economic_frac", "Their fill rate", f.frac), ("spare_price", f"Spare price [{f.currency}]", f.money),
            ("downtime_cost_without_per_yr", f"Downtime without spares [{f.currency}/yr]", f.money),
            ("saving_at_economic_per_yr", f"Saving with the economic spares [{f.currency}/yr]", f.money)]
    _table(ws, row + 3, table, cols)


def _risk(ws: Worksheet, case, result, scope: content.Scope, f: _Formats) -> None:
    from models.scenario import PAYBACK_TARGET_YR

    _title(ws, "Sensitivity, Monte Carlo and the risks and assumptions register")
    # the exact plan's uncertainty (what the pack asks money for); a result without it: each asset's best option's
    unc = content.uncertainty(result, scope)
    row = 3
    heading = ("One-at-a-time sensitivity of the exact plan's NPV at its start" + content.whole_plan_text(unc)
               if unc.of_plan else "One-at-a-time sensitivity of the fleet NPV of each asset's best option")
    put_text(ws, row, 1, heading).font = _BOLD
    cols = [("variable", "Variable", None), ("low_value", "Low", f.number), ("high_value", "High", f.number),
            ("npv_at_low", "NPV at low", f.money), ("npv_at_high", "NPV at high", f.money),
            ("base_npv", "Base NPV", f.money), ("swing", "Swing", f.money)]
    tornado = unc.tornado
    if not tornado.empty:
        from models.risk import tornado_label

        tornado = tornado.assign(variable=[tornado_label(v, lo, hi) for v, lo, hi in
                                           zip(tornado["variable"], tornado["low_value"], tornado["high_value"])])
    row = _table(ws, row + 1, tornado, cols)
    if unc.plan_npv is not None:
        put_text(ws, row, 1, f"Monte Carlo of the plan's NPV at its start over {unc.n_draws:,} draws"
                 + content.whole_plan_text(unc)).font = _BOLD
        summary = pd.DataFrame([unc.plan_npv])
        row = _table(ws, row + 1, summary,
                     [("npv_p10", "NPV P10", f.money), ("npv_p50", "NPV P50", f.money), ("npv_p90", "NPV P90", f.money),
                      ("npv_mean", "Mean", f.money), ("npv_standard_error", "Standard error of the mean", f.money),
                      ("prob_npv_positive_frac", "P(NPV > 0)", f.frac)])
    if unc.of_plan:
        put_text(ws, row, 1, "Monte Carlo per project of the plan in scope (NPV at its own start, P10/P50/P90)").font = _BOLD
    else:
        put_text(ws, row, 1, "Monte Carlo per project in scope (P10/P50/P90)").font = _BOLD
    put_text(ws, row + 1, 1, content.monte_carlo_text(unc))
    labels = option_labels(result.results)
    projects = unc.projects
    if not projects.empty and "project_id" in projects:  # the option as the catalogue names it, beside its key
        parts = projects["project_id"].astype(str).str.rsplit("/", n=1)
        projects = projects.assign(asset=parts.str[0], option_label=[labels.get(o, o) for o in parts.str[-1]])
    cols = ([("asset", "Asset", None), ("option_label", "Option", None)]
            + ([("start_yr", "Plan year", "0")] if unc.of_plan else [])
            + [("npv_p10", "NPV P10", f.money), ("npv_p50", "NPV P50", f.money),
               ("npv_p90", "NPV P90", f.money), ("prob_npv_positive_frac", "P(NPV > 0)", f.frac),
               ("payback_p10_yr", "Simple payback P10 [yr]", f.years), ("payback_p50_yr", "Simple payback P50 [yr]", f.years),
               ("payback_p90_yr", "Simple payback P90 [yr]", f.years),
               ("prob_payback_within_target_frac", f"P(simple payback within {PAYBACK_TARGET_YR:g} yr)", f.frac)])
    row = _table(ws, row + 2, projects, cols)
    put_text(ws, row, 1, "Risks and assumptions register").font = _BOLD
    register = content.risk_register(case, result, scope)
    _table(ws, row + 1, register, [("category", "Category", None), ("item", "Item", None), ("detail", "Detail", None),
                                   ("assets", "Assets", None), ("response", "Response", None)])
    _widths(ws, {1: 24, 2: 28, 3: 50, 4: 30, 5: 50, 6: 16, 7: 16, 8: 16, 9: 18, 10: 18, 11: 18})


def _scenarios(ws: Worksheet, case, result, f: _Formats) -> None:
    """The fleet plan under each named scenario of the case (scenarios.toml) beside the case as written."""
    from models.comparison import ASSUMPTION_COLUMNS, HEADLINE_COLUMNS, case_scenarios

    _title(ws, "Scenarios: the fleet plan under each set of finance assumptions")
    table = case_scenarios(case, result)
    row = 3
    put_text(ws, row, 1, "Each scenario changes only the finance assumptions it names (the case's scenarios.toml); the "
             "machines and the bills are the same. The plan is the whole fleet's exact plan, whatever the pack's scope.")
    row += 2
    money = {"plan_capital", "yearly_saving_per_yr", "plan_npv", "budget_total"}
    fmt = {**{k: (f.money if k in money else "0.0") for k, _ in HEADLINE_COLUMNS + ASSUMPTION_COLUMNS},
           "horizon_yr": "0", "projects": "0", "replacement_mode": None}
    unit = {k: f" [{f.currency}]" if k in money else "" for k, _ in HEADLINE_COLUMNS + ASSUMPTION_COLUMNS}
    unit["yearly_saving_per_yr"] = f" [{f.currency}/yr]"
    cols = [("scenario", "Scenario", None)]
    cols += [(k, label + unit[k], fmt[k]) for k, label in ASSUMPTION_COLUMNS]
    cols += [(k, label + unit[k], fmt[k]) for k, label in HEADLINE_COLUMNS]
    cols += [(f"{k}_change", f"Change: {_lower_first(label)}{unit[k]}", fmt[k]) for k, label in HEADLINE_COLUMNS]
    row = _table(ws, row, table, cols)
    if len(table) == 1:
        put_text(ws, row, 1, "The case names no scenario: write them in scenarios.toml (docs/case-format.md, "
                 "\"Scenarios\") or a workbook's scenarios sheet.")
        row += 1
    put_text(ws, row, 1, "A blank capital budget is no limit. Changes are the scenario's figure less the case's.")
    _widths(ws, {1: 34, **{k: 16 for k in range(2, len(cols) + 1)}})


def _harmonics(ws: Worksheet, case, result, scope: content.Scope) -> None:
    """The harmonic screen of the sites in scope, today and with the plan (models.harmonics.site_screen)."""
    from models.harmonics import SCREEN_CAUTION

    _title(ws, "Harmonics: a first screen of each site's distortion and capacitor resonance")
    put_text(ws, 3, 1, "Drives at their motors' rated input; the limits are IEEE 519-2014's (Table 1 for the voltage at "
             "the motors' bus, Table 2 for the current at the point of common coupling). " + SCREEN_CAUTION)
    table = content.harmonic_screen(case, result, scope)
    cols = [("site_id", "Site", None), ("scenario", "Scenario", None), ("drive_kva", "Drives [kVA]", "#,##0"),
            ("transformer_kva", "Transformer [kVA]", "#,##0"), ("transformer_impedance_pct", "Impedance [%]", "0.0"),
            ("impedance_basis", "Impedance from", None), ("short_circuit_kva", "Short-circuit power at the bus [kVA]", "#,##0"),
            ("pcc_short_circuit_kva", "Short-circuit power where the current limits apply [kVA]", "#,##0"),
            ("max_demand_kva", "Maximum demand [kVA]", "#,##0"), ("bus_v_v", "Bus [V]", "#,##0"),
            ("voltage_thd_pct", "Voltage THD [%]", "0.00"), ("voltage_thd_limit_pct", "Limit [%]", "0.0"),
            ("worst_harmonic", "Worst harmonic", "0"), ("worst_harmonic_pct", "Its voltage [%]", "0.00"),
            ("harmonic_limit_pct", "Limit [%]", "0.0"), ("current_tdd_pct", "Current TDD [%]", "0.00"),
            ("current_tdd_limit_pct", "Limit [%]", "0.0"), ("capacitor_kvar_min", "Capacitors, least [kVAr]", "#,##0"),
            ("capacitor_kvar_max", "Capacitors, most [kVAr]", "#,##0"),
            ("resonance_order_low", "Resonance order, lowest", "0.0"),
            ("resonance_order_high", "Resonance order, highest", "0.0"),
            ("resonant_harmonic", "Tuned to harmonic (0 none)", "0"), ("front_ends", "Drives by front end", None),
            ("finding", "Finding", None)]
    _table(ws, 5, table, cols)  # (missing and infinite values are written blank)
    _widths(ws, {1: 10, 2: 10, **{k: 13 for k in range(3, len(cols))}, len(cols): 90})


def _read_me(ws: Worksheet, case, result, scope: content.Scope, f: _Formats) -> None:
    s = case.settings
    h = content.headline(result, scope)
    cur = s.currency
    _title(ws, f"Capital request workbook: {s.name}")
    lines = [
        f"Scope: {scope.mode}; {counted(len(scope.asset_ids), 'asset')}, {counted(len(scope.projects), 'project')} with "
        "workbook formulas, "
        f"{h.n_projects} recommended.",
        f"Recommended projects: capital {content.money(h.capital, cur)}, yearly saving {content.money(h.yearly_saving, cur)}, "
        f"NPV at plan start {content.money(h.npv, cur)}, payback {content.years_text(h.payback_yr, result.assumptions.horizon_yr)}, "
        f"CO2 avoided {h.co2_t_per_yr:,.1f} t/yr.",
        "All amounts in " + cur + "; every finance assumption is on the Assumptions sheet, whose last column says which "
        "the formulas read (the discount rate and the budgets); the others record the run.",
    ]
    if s.invented:
        lines.insert(0, "INVENTED DEMO DATA: every name and number in this case is made up.")
    row = 3
    for text in lines:
        put_text(ws, row, 1, text)
        row += 1
    row += 1
    put_text(ws, row, 1, "Sheets").font = _BOLD
    guide = {
        "Assumptions": "case settings, every finance assumption, the options catalogue, cautions",
        "Results": "every option of every asset in scope, compared (savings by component, capital, NPV, IRR, paybacks, CO2)",
        "Cash flows": "per project: yearly flows by component and live formulas for NPV, IRR and paybacks",
        "Checks": "each formula's value beside the engine's, with an OK/CHECK status",
        "Plan": "exact and rank-order fleet plans, capital per plan year against the budget",
        "Financing": "the exact plan's yearly flows to the owner in cash and under the case's financing (loan, lease or "
                     "energy-service company)",
        "Scenarios": "the fleet plan under each named scenario of the case beside the case as written",
        "Bills": "monthly bills before and after the plan, with line items",
        "Harmonics": "each site's harmonic distortion and capacitor resonance today and with the plan (a first screen "
                     "to IEEE 519, not a study)",
        "Data quality": "defaulted inputs, model flags and input problems",
        "End of life": "replace now vs at failure vs rewind, and the repair-or-replace policy",
        "Risk": "the plan's tornado and Monte Carlo, and the risks and assumptions register",
    }
    for k, (sheet, text) in enumerate(guide.items()):
        put_text(ws, row + 1 + k, 1, sheet)
        put_text(ws, row + 1 + k, 2, text)
    row += len(guide) + 2
    put_text(ws, row, 1, "How to audit").font = _BOLD
    audit = [
        "1. On 'Cash flows', each net row is =SUM of the component rows above it; the components are the engine's flows.",
        "2. NPV = year-0 flow + NPV(rate, years 1..N): spreadsheet NPV discounts its first value, so year 0 stays outside.",
        "3. IRR = IRR(years 0..N); simple payback = from the first year the cumulative row (without residual value) "
        "is below zero to the year it turns >= 0, interpolated inside that year.",
        "4. Change the discount rate on 'Assumptions' and every NPV and discounted payback recalculates, and so do the "
        "'Plan' sheet's NPVs of the projects this pack holds.",
        "5. 'Checks' shows OK when every formula matches the engine within 0.01 %.",
    ]
    for k, text in enumerate(audit):
        put_text(ws, row + 1 + k, 1, text)
    row += len(audit) + 2
    put_text(ws, row, 1, "Cautions").font = _BOLD
    for k, text in enumerate(content.CAUTIONS):
        put_text(ws, row + 1 + k, 1, text)
    _widths(ws, {1: 28, 2: 100})


def build_workbook(case, result, scope: content.Scope) -> bytes:
    """Build the capital-request workbook.

    Parameters
    ----------
    case : models.case.Case
    result : models.scenario.ScenarioResult
    scope : models.pack.content.Scope
        What the pack covers (see :func:`models.pack.content.select_scope`).

    Returns
    -------
    bytes
        The .xlsx file. Sheets: see :data:`SHEETS`.
    """
    f = _Formats(case.settings.currency)
    book = Workbook()
    sheets = {name: (book.active if k == 0 else book.create_sheet()) for k, name in enumerate(SHEETS)}
    for name, ws in sheets.items():
        ws.title = name
    refs = _assumptions(sheets["Assumptions"], case, result, f)
    _results(sheets["Results"], result, scope, f, case.settings.power_unit)
    blocks = _cash_flow_blocks(sheets["Cash flows"], result, scope, refs, case.settings.currency)
    _checks(sheets["Checks"], blocks, f)
    _plan(sheets["Plan"], result, scope, refs, f, blocks, case=case)
    _financing(sheets["Financing"], result, f, case=case)
    _scenarios(sheets["Scenarios"], case, result, f)
    _bills(sheets["Bills"], result, f)
    _harmonics(sheets["Harmonics"], case, result, scope)
    _data_quality(sheets["Data quality"], case, result, scope)
    _end_of_life(sheets["End of life"], result, scope, f, case.settings.power_unit, case=case)
    _risk(sheets["Risk"], case, result, scope, f)
    _read_me(sheets["Read me"], case, result, scope, f)
    _mark_every_sheet(book, case.settings)
    buffer = io.BytesIO()
    book.save(buffer)
    try:
        return with_cached_values(buffer.getvalue(), book)
    finally:
        for ws in book.worksheets:
            _CACHED.pop(ws, None)
