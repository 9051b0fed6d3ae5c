"""Starting the dashboard: ``drivecase serve [CASE] [--port P] [--host H] [--debug] [--no-browser]``.

:func:`serve` loads the case (the demo case when none is given), refuses a case with errors (the problem
list is printed, exit status 1), warns when the address makes the dashboard reachable from other
computers, prints the address, opens a browser tab only when asked and when one can be opened, and runs
until interrupted. The physics of the case start in the background so the first page comes sooner.
"""

from __future__ import annotations

import ipaddress
import logging
import os
import socket
import sys
import threading
import time
import webbrowser
from pathlib import Path

from models import io as case_io
from models.wording import counted

LOOPBACK_NAMES = ("localhost", "localhost.localdomain", "ip6-localhost")


def is_loopback(host: str) -> bool:
    """True when ``host`` only accepts connections from this computer (127.0.0.0/8, ::1, localhost)."""
    text = str(host or "").strip().strip("[]").lower()
    if text in LOOPBACK_NAMES:
        return True
    try:
        return ipaddress.ip_address(text).is_loopback
    except ValueError:
        return False


def network_warning(host: str) -> str | None:
    """The warning to print for a non-loopback address, or None on loopback."""
    if is_loopback(host):
        return None
    where = "every network interface" if str(host).strip() in ("0.0.0.0", "::", "[::]") else f"address {host}"
    return (f"WARNING: listening on {where}: the dashboard is reachable from the network and has no login. "
            "Anyone who can reach this port can see and upload cases. Use the default 127.0.0.1 unless you trust "
            "the network.")


def url_for(host: str, port: int) -> str:
    """The address to print (IPv6 literals in brackets)."""
    text = str(host).strip()
    if ":" in text and not text.startswith("["):
        text = f"[{text}]"
    return f"http://{text}:{port}"


def can_open_browser() -> bool:
    """True when a graphical browser can plausibly be opened (never on a headless Linux session)."""
    if sys.platform.startswith(("win", "darwin")):
        return True
    return bool(os.environ.get("DISPLAY") or os.environ.get("WAYLAND_DISPLAY"))


def _open_browser_later(url: str, delay_s: float = 1.5) -> None:
    def go() -> None:
        try:
            webbrowser.open_new_tab(url)
        except Exception:  # a missing or broken browser must never stop the server
            pass

    timer = threading.Timer(delay_s, go)
    timer.daemon = True
    timer.start()


def port_in_use(host: str, port: int) -> str | None:
    """Why ``host:port`` cannot be listened on (e.g. another program holds it), or None when it can.

    A socket is bound and closed at once, with the address reuse the server itself asks for, so a port
    left in TIME_WAIT by a previous run is free and one another server listens on is not."""
    try:
        infos = socket.getaddrinfo(host, port, type=socket.SOCK_STREAM)
    except (OSError, UnicodeError) as exc:
        return f"the address {host!r} cannot be resolved ({exc})"
    family, _, _, _, address = infos[0]
    with socket.socket(family, socket.SOCK_STREAM) as probe:
        probe.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)
        try:
            probe.bind(address)
        except OSError as exc:
            return exc.strerror or str(exc)
    return None


def _print_problems(problems) -> None:
    errors = [p for p in problems if p.severity == "error"]
    warnings = [p for p in problems if p.severity == "warning"]
    print(f"Problems: {counted(len(errors), 'error')}, {counted(len(warnings), 'warning')}")
    for p in errors + warnings:
        print(f"  {p}")


#: A case whose analysis is estimated above this many seconds is announced when the dashboard starts, and its
#: end said (the pages wait for it).
WARM_NOTICE_S = 20.0


def warm_case(engine, entry, notice_s: float = WARM_NOTICE_S) -> None:
    """Run the case's analysis ahead of its first page.

    Parameters
    ----------
    engine : dashboard.services.Engine
        The server's engine: its physics, then the case's own result (assumptions as given, plan proven,
        risk included: what the first page asks for).
    entry : dashboard.services.CaseEntry
        The case served (its ``key`` and ``case``).
    notice_s : float
        A case estimated above this many seconds is announced on the output with its estimate, and its end
        said [s].

    Notes
    -----
    A failure is said on the error stream (and shown again on the first page that needs it).
    """
    from models.estimate import estimate_run

    t0 = time.monotonic()
    said = False
    try:
        estimate = estimate_run(entry.case)
        said = estimate.seconds > notice_s
        if said:
            print(f"Analysing the case in the background ({estimate.note.rstrip('.')}); its pages fill in when it "
                  "is done.", flush=True)
        engine.physics(entry.key)
        engine.result(entry.key, entry.case.finance, with_risk=True, precise=True)
    except Exception as exc:
        print(f"drivecase serve: the analysis of the case failed: {exc}", file=sys.stderr)
        return
    if said:
        print(f"Analysis done in {time.monotonic() - t0:.0f} s.", flush=True)


def serve(case_path: str | Path | None = None, host: str = "127.0.0.1", port: int = 8050, debug: bool = False,
          open_browser: bool = True) -> int:
    """Serve the dashboard on a case until interrupted.

    Parameters
    ----------
    case_path : str or pathlib.Path or None
        Case folder or ``.xlsx`` workbook; None serves the demo case.
    host : str
        Address to bind; 127.0.0.1 (this computer only) by default. Any other address prints a warning.
    port : int
        TCP port.
    debug : bool
        Dash debug mode (development only).
    open_browser : bool
        Open a browser tab once the server is up, when a browser can be opened.

    Returns
    -------
    int
        0 after a normal stop, 1 when the case has errors or the address cannot be bound.
    """
    from dashboard import services

    path = Path(case_path) if case_path is not None else case_io.DEMO_DIR
    engine = services.use_engine(services.Engine())
    entry, problems = engine.set_default_case(path)
    if entry is None:
        print(f"drivecase serve: the case {path} cannot be opened.")
        _print_problems(problems)
        return 1
    unpriced = [str(r.site_id) for r in entry.case.sites.itertuples(index=False)
                if r.tariff_file is None or r.tariff_file not in entry.case.tariffs]
    if unpriced:  # every page prices the sites' bills: a case that cannot be priced would show empty pages
        print(f"drivecase serve: the case {path} cannot be priced: no tariff for "
              f"{'site' if len(unpriced) == 1 else 'sites'} {', '.join(unpriced)} "
              "(sites.csv, column tariff_file; docs/tariffs.md).", file=sys.stderr)
        _print_problems(problems)
        return 1
    warnings = [p for p in problems if p.severity == "warning"]
    if warnings:
        print(f"Case read with {counted(len(warnings), 'warning')}; {'it is' if len(warnings) == 1 else 'they are'} listed on the 'Case & assumptions' page.")
    warning = network_warning(host)
    if warning:
        print(warning)
    busy = port_in_use(host, port)
    if busy and busy.startswith("the address "):  # (no port to blame: the host itself is not this machine's)
        print(f"drivecase serve: cannot listen on {url_for(host, port)}: {busy}; give --host an address of this "
              "computer (127.0.0.1 for this computer only)", file=sys.stderr)
        return 1
    if busy:
        print(f"drivecase serve: cannot listen on {url_for(host, port)}: {busy}. Another program (perhaps another "
              f"drivecase serve) uses the port; stop it or choose another with --port.", file=sys.stderr)
        return 1
    if debug:
        print("WARNING: debug mode is on: the web framework's debugger can run code sent from the browser. "
              "Use it only while developing, on 127.0.0.1.")

    url = url_for(host, port)
    print(f"Dashboard on {url} (case '{entry.name}'; press Ctrl+C to stop)")
    print("Planning estimates only, not a design. Electrical work must be done by qualified persons under local "
          "codes and the utility's rules; confirm ratings with the manufacturers.")
    sys.stdout.flush()  # the address and the cautions now, also when the output goes to a file or a pipe
    threading.Thread(target=warm_case, args=(engine, entry), name="drivecase-physics", daemon=True).start()
    from dashboard.app import app
    if open_browser and can_open_browser():
        _open_browser_later(url if host.strip() not in ("0.0.0.0", "::") else url_for("127.0.0.1", port))
    if not debug:  # one line per request is noise for a local tool; errors still show
        logging.getLogger("werkzeug").setLevel(logging.WARNING)
    try:
        app.run(host=host, port=port, debug=debug, use_reloader=False, dev_tools_hot_reload=False)
    except KeyboardInterrupt:
        pass
    except OSError as exc:
        print(f"drivecase serve: cannot listen on {url}: {exc.strerror or exc}", file=sys.stderr)
        return 1
    except SystemExit:  # the server gave up (its own message is printed above)
        print(f"drivecase serve: cannot listen on {url}.", file=sys.stderr)
        return 1
    print("Dashboard stopped.")
    return 0
