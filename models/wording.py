"""Counts in words for messages and reports ("1 project", "3 projects"), instead of "project(s)"."""

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
