"""Print the HTML report to PDF with a headless Chromium (optional).

Uses Playwright's sync API with the system Chromium. When Playwright or the browser is missing, or the
browser fails, :func:`print_pdf` returns ``None`` and a message instead of raising: the rest of the pack
never depends on the PDF.
"""

from __future__ import annotations

import asyncio
import os
from pathlib import Path

#: The browser executable (Debian's Chromium).
CHROMIUM_PATH = "/usr/bin/chromium"
#: Flags for a quiet, offline, headless print.
CHROMIUM_ARGS = ["--no-sandbox", "--disable-gpu", "--disable-background-networking", "--disable-component-update",
                 "--disable-sync", "--no-first-run"]
#: Longest wait for the charts to draw [ms].
RENDER_TIMEOUT_MS = 60_000


def footer_template(text: str) -> str:
    """The browser's page footer: ``text`` (escaped) and "page N of M", in small type.

    Examples
    --------
    >>> "Pump &amp; fan" in footer_template("Pump & fan")
    True
    """
    from html import escape

    return ('<div style="font-size:7px; width:100%; margin:0 12mm; color:#555; display:flex; '
            'justify-content:space-between; font-family:sans-serif;">'
            f'<span>{escape(text)}</span><span>page <span class="pageNumber"></span> of '
            '<span class="totalPages"></span></span></div>')


def pdf_bytes(html_path: Path, executable_path: str | None = None, footer: str = "") -> tuple[bytes | None, str]:
    """Return the PDF of an HTML file printed on A4, or ``(None, reason)`` when it cannot be printed.

    Parameters
    ----------
    html_path : pathlib.Path
        A self-contained HTML file (it is opened as a file:// URL; network requests are blocked).
    executable_path : str, optional
        Chromium executable; default :data:`CHROMIUM_PATH`.
    footer : str, optional
        Text printed at the foot of every page, beside the page number (:func:`footer_template`): what a
        reader of one page alone must still see.

    Returns
    -------
    tuple
        ``(pdf, message)``: the PDF bytes (or None) and a one-line message.
    """
    executable_path = executable_path or CHROMIUM_PATH
    if not os.path.exists(executable_path):
        return None, f"PDF skipped: no Chromium at {executable_path} (install the 'chromium' package)"
    try:
        from playwright.sync_api import Error as PlaywrightError
        from playwright.sync_api import sync_playwright
    except ImportError:
        return None, ("PDF skipped: Playwright is not installed (pip install -e '.[test]' in the project, as for the "
                      "browser tests)")
    try:
        asyncio.get_running_loop()
        return None, "PDF skipped: cannot drive the browser from inside a running asyncio loop"
    except RuntimeError:
        pass
    try:
        with sync_playwright() as p:
            browser = p.chromium.launch(executable_path=executable_path, args=CHROMIUM_ARGS)
            try:
                page = browser.new_page()
                # the report is self-contained: refuse anything that would leave the file
                page.route("**/*", lambda route: route.continue_() if route.request.url.startswith("file:")
                           else route.abort())
                page.goto(Path(html_path).resolve().as_uri(), wait_until="load", timeout=RENDER_TIMEOUT_MS)
                page.wait_for_function(
                    "() => Array.from(document.querySelectorAll('.plotly-graph-div'))"
                    ".every(d => d.querySelector('svg.main-svg'))", timeout=RENDER_TIMEOUT_MS)
                page.emulate_media(media="print")
                data = page.pdf(format="A4", print_background=True, prefer_css_page_size=True,
                                display_header_footer=True, header_template="<span></span>",
                                footer_template=footer_template(footer))
            finally:
                browser.close()
    except (PlaywrightError, OSError, RuntimeError) as exc:  # a browser problem must not sink the pack
        first = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
        return None, f"PDF skipped: the browser failed ({first})"
    return data, f"PDF printed with {executable_path}"
