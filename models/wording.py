"""Words for messages and reports: counts ("1 project", "3 projects", not "project(s)") and amounts of money."""

from __future__ import annotations


def counted(n: int, singular: str, plural: str | None = None) -> str:
    """Return ``n`` followed by the noun in the number it takes.

    Parameters
    ----------
    n : int
        The count.
    singular : str
        The noun for one (may be several words: ``"reactive project"``).
    plural : str, optional
        The noun for any other count; default ``singular + "s"``.

    Examples
    --------
    >>> counted(1, "project"), counted(3, "project"), counted(0, "site"), counted(2, "asset of a site", "assets of a site")
    ('1 project', '3 projects', '0 sites', '2 assets of a site')
    >>> counted(12_500, "warning")
    '12,500 warnings'
    """
    n = int(n)
    return f"{n:,} {singular if n == 1 else (plural or singular + 's')}"


def money_text(value: float | None, currency: str) -> str:
    """Return an amount of money for a sentence or a table cell: the currency code, then the whole amount with
    thousands separators (``EUR 6,081,596``); ``-`` when the amount is missing or not finite.

    The report, the workbook's sentences and the dashboard write every amount this way; figures write theirs
    in three significant figures with the same code first (``EUR 6.08 M``), and rates keep the code in their
    unit (``60 EUR/kVAr``).

    Examples
    --------
    >>> money_text(6081596.4, "EUR"), money_text(-950.0, "USD"), money_text(float("nan"), "EUR"), money_text(None, "EUR")
    ('EUR 6,081,596', 'USD -950', '-', '-')
    """
    if value is None:
        return "-"
    v = float(value)
    if v != v or v in (float("inf"), float("-inf")):
        return "-"
    return f"{currency} {v:,.0f}"


#: Each bill line item's category (the part before the colon of ``models.billing.bill``'s ``line_item``) in words.
LINE_ITEM_CATEGORIES = {"fixed": "Fixed charge", "energy": "Energy",
                        "pf energy": "Power-factor adjustment of energy", "demand": "Demand charge",
                        "pf adjustment": "Power-factor adjustment of demand", "ratchet": "Demand ratchet",
                        "excess": "Demand above the contracted capacity",
                        "coincident": "Demand at the system's peak times",
                        "reactive demand": "Reactive demand (kVAr)",
                        "reactive": "Reactive energy (lagging)", "leading": "Reactive energy (leading)", "tax": "Tax"}


def line_item_text(line_item: str) -> str:
    """Return a bill line item (``"<category>:<name>"``, as :func:`models.billing.bill` writes it) in words: the
    category's name, then the tariff's own name of the clause; an unknown category is kept as it is.

    Examples
    --------
    >>> line_item_text("tax:VAT"), line_item_text("demand:capacity"), line_item_text("reactive:excess kvarh")
    ('Tax: VAT', 'Demand charge: capacity', 'Reactive energy (lagging): excess kvarh')
    >>> line_item_text("other"), line_item_text("fixed:")
    ('other', 'Fixed charge')
    """
    category, _, name = str(line_item).partition(":")
    if category not in LINE_ITEM_CATEGORIES:
        return str(line_item)
    words = LINE_ITEM_CATEGORIES[category]
    return f"{words}: {name}" if name else words


MONTH_NAMES = ("January", "February", "March", "April", "May", "June", "July", "August", "September", "October",
               "November", "December")


def in_service_text(in_service_month: int | None, first_month: int | None = None) -> str:
    """Return the month a case's changes are taken to come into service, for a sentence.

    Parameters
    ----------
    in_service_month : int or None
        The case's ``in_service_month`` (1-12), or None when it gives none.
    first_month : int, optional
        The month (1-12) the load profiles start in: the month taken when the case gives none.

    Examples
    --------
    >>> in_service_text(8), in_service_text(None, 1), in_service_text(None)
    ('August', "January (the analysis year's first month)", "the analysis year's first month")
    """
    if in_service_month is not None:
        return MONTH_NAMES[int(in_service_month) - 1]
    if first_month is None:
        return "the analysis year's first month"
    return f"{MONTH_NAMES[int(first_month) - 1]} (the analysis year's first month)"


#: What the simple payback of a project is, in words (the command line's tables and the pack say the same).
PAYBACK_TEXT = ("Simple payback: years from the outlay until the project's own cash flow (after the tax rate of the "
                "assumptions, where one is set) is back at zero, with the spend a failure of today's motor would force "
                "credited (docs/finance.md); not capital / yearly saving.")
