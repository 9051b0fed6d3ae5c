"""The whole analysis on a Dask cluster: the physics partitioned by site, the economics once.

A site's meter and tariff are independent of every other site's, so the slow part of a run (the
machines on every option and the bill change of every asset-option, :func:`models.scenario.site_physics`)
runs as one task per site, on a sub-case holding that site's assets, profiles, capacitor banks and
tariff (:func:`models.operation.site_case`). The results are merged back into the asset register's
order and the economics (cash flows, metrics, plan, end of life, risk, bills) runs once on the merged
physics, in this process. Each task runs exactly the code the local engine runs for that site, on the
same analysis index, so the result tables are identical to :func:`models.scenario.run`'s.

Without a scheduler address a :class:`distributed.LocalCluster` of worker processes is started on this
machine and closed afterwards; with an address (``tcp://host:8786``) the run connects to that
scheduler, whose workers must have this package installed (``pip install -e .[scale]``).
Only our own plain data goes to the workers (the case dataclass and numpy arrays).
"""

from __future__ import annotations

import logging
import os
import threading
import time
import uuid
from typing import Callable

from models import finance
from models.estimate import BOOK_BYTES_PER_ASSET_STEP
from models.memory import retained_memory, worker_environment
from models.operation import MemoryBudgets, case_index, site_case
from models.scenario import PRECISE_PLAN, PhysicsMerger, PlanSettings, ScenarioResult, economics, site_physics
from models.wording import counted

#: Worker processes of the local cluster on the 2-core reference machine (one per core).
LOCAL_WORKERS = 2
#: At most this many local workers, however many cores (each holds a site's blocks in memory).
MAX_LOCAL_WORKERS = 8


def local_workers(n_sites: int | None = None) -> int:
    """Return the worker processes of a local cluster: one per core this process may use, at most
    :data:`MAX_LOCAL_WORKERS` and (given ``n_sites``) at most one per site, at least one."""
    try:
        cores = len(os.sched_getaffinity(0))
    except AttributeError:  # (not on every platform)
        cores = os.cpu_count() or LOCAL_WORKERS
    n = min(max(cores, 1), MAX_LOCAL_WORKERS)
    return max(1, min(n, n_sites)) if n_sites is not None else n


def _site_task(sub_case, index, cost: float, chunk_assets, today_only: bool, with_books: bool,
               curve_elements: int | None = None):
    """One site's physics on a worker (:func:`models.scenario.site_physics`), its freed memory kept for reuse
    while it runs (:func:`models.memory.retained_memory`): (op, part, its blocks' curve books or None)."""
    books = [] if with_books else None
    with retained_memory():
        op, part = site_physics(sub_case, index, cost, chunk_assets, None, today_only, books=books,
                                curve_elements=curve_elements)
    return op, part, books


#: Site tasks kept on the cluster per worker thread: one running and one whose data is already there, so a
#: worker never waits for its next site's data; the rest of the sites stay with the caller until then.
IN_FLIGHT_PER_THREAD = 2
#: Times a site is sent again after the worker holding it was lost (a worker's death, not an error of
#: the analysis, which is raised at once).
SITE_ATTEMPTS = 3
#: Seconds a run on a given scheduler waits for its first worker before it gives up with a message: a
#: cluster whose workers are still starting is waited for; one with none coming is not waited on forever.
FIRST_WORKER_WAIT_S = 60.0


class SiteLost(RuntimeError):
    """A site's task lost with its worker :data:`SITE_ATTEMPTS` times (a worker that keeps dying on it)."""


def _site_lost(case, site_id: str, when: str) -> SiteLost:
    """The error of a site lost with its worker (``when``: how often, or at which step), in words."""
    n_assets = int((case.assets["site_id"].astype(str) == str(site_id)).sum())
    return SiteLost(
        f"the task of site {site_id} ({counted(n_assets, 'motor')}) was lost with its worker {when}: a Dask worker "
        "that dies while it works has most often run out of memory. Give each worker more memory (`dask worker "
        "ADDRESS --memory-limit 8GB`, or fewer workers per machine; the estimate printed before a large run gives "
        "the memory a run needs) and look in the workers' logs for the cause")


def _least_busy_worker(client) -> str | None:
    """The address of the worker with the fewest tasks per thread, or None while the cluster has none."""
    threads = client.nthreads()
    if not threads:
        return None
    busy = client.processing()
    return min(threads, key=lambda w: (len(busy.get(w, ())) / max(threads[w], 1), w))


def _site_results(client, case, partition, index, cost: float, chunk_assets, today_only: bool,
                  books_wanted: Callable[[str, int], bool] = lambda _site, _n: False,
                  curve_elements: int | None = None, notice: Callable[[str], None] | None = None):
    """Run each site's task and yield (site_id, op, part, books, number done) as the sites come back.

    ``books_wanted(site_id, n_assets)`` says, as a site is sent, whether its curve books are to come back
    with it (else its books are None); ``curve_elements`` is the block size of its curve tables
    (:attr:`models.operation.MemoryBudgets.curve_chunk_elements`, default the workers' own); ``notice`` is
    told, in words, of each site sent again after its result was lost.

    Each site's sub-case goes straight from the caller to the worker that will run it
    (``Client.scatter(direct=True)``), not through the scheduler inside the task: a site's profiles are
    tens of MB, which the scheduler would otherwise hold and pass on. At most
    :data:`IN_FLIGHT_PER_THREAD` sites per worker thread are on the cluster at once, so the memory they
    take is bounded whatever the fleet's size; the next site goes to the least busy worker as one
    comes back. A site whose worker was lost (its data with it) is sent again, up to
    :data:`SITE_ATTEMPTS` times (then :class:`SiteLost` is raised, in words), and so is a site whose
    worker left as it was being sent (to the next least busy one); an error raised by the analysis
    itself reaches the caller unchanged.
    """
    from collections import deque
    from concurrent.futures import CancelledError

    from distributed.scheduler import KilledWorker

    waiting = deque(enumerate(site_id for site_id, _ in partition))
    attempts: dict[str, int] = {}
    launched: dict = {}
    # task keys of this run alone: two runs sharing a scheduler must never take each other's results
    run_token = uuid.uuid4().hex
    if waiting and not client.nthreads():
        _wait_for_a_worker(client)

    def window() -> int:
        """Sites on the cluster at once: as many per worker thread as the cluster has now (workers may come
        and go during a run)."""
        return max(1, IN_FLIGHT_PER_THREAD * sum(client.nthreads().values()))

    def launch(k: int, site_id: str):
        attempts[site_id] = attempts.get(site_id, 0) + 1
        sub_case = site_case(case, site_id)
        key = f"drivecase-site-physics-{run_token}-{k}-{attempts[site_id]}"
        args = (index, cost, chunk_assets, today_only, books_wanted(site_id, len(sub_case.assets)), curve_elements)
        future = None
        for tries_left in range(SITE_ATTEMPTS - 1, -1, -1):
            worker = _least_busy_worker(client)
            if worker is None:  # no worker yet: the scheduler holds the task and its data until one joins
                future = client.submit(_site_task, sub_case, *args, key=key, pure=False)
                break
            try:
                data = client.scatter(sub_case, direct=True, hash=False, workers=[worker])
            except (OSError, ValueError) as exc:  # the worker left between the choice and the sending
                # (CommClosedError is an OSError; the scheduler says "No valid workers found" once it knows)
                if isinstance(exc, ValueError) and "no valid workers" not in str(exc).lower():
                    raise
                if not tries_left:
                    raise _site_lost(case, site_id, "as its data was being sent") from None
                continue
            future = client.submit(_site_task, data, *args, key=key, pure=False, workers=[worker])
            break
        launched[future] = (k, site_id)
        return future

    for _ in range(min(window(), len(waiting))):
        launch(*waiting.popleft())
    done = 0
    for future in _each_as_done(client, launched):
        k, site_id = launched.pop(future)
        try:
            op, part, books = future.result()
        except (KilledWorker, CancelledError, RuntimeError) as exc:
            # (a future whose worker died can also fail to give its result with the client's own "bound to a
            # different event loop" error: its state was reset from another thread; the site is sent again)
            if isinstance(exc, RuntimeError) and "event loop" not in str(exc):
                raise
            if attempts[site_id] >= SITE_ATTEMPTS:
                raise _site_lost(case, site_id, counted(SITE_ATTEMPTS, "time")) from None
            if notice is not None:
                notice(f"site {site_id}: its result was lost (its worker left or failed); the site is sent again "
                       f"(attempt {attempts[site_id] + 1} of {SITE_ATTEMPTS})")
            waiting.appendleft((k, site_id))
        else:
            done += 1
            yield site_id, op, part, books, done
            del op, part, books
        finally:
            future.release()
        while waiting and len(launched) < window():
            launch(*waiting.popleft())


#: Seconds between looks at the cluster while a run waits for its sites (whether any worker is left).
WORKER_CHECK_S = 2.0


def _each_as_done(client, launched: dict):
    """Yield the futures of ``launched`` as they finish, while the caller may add to it; raise
    :class:`TimeoutError`, in words, when the cluster has had no worker for :data:`FIRST_WORKER_WAIT_S`
    (every worker left during the run and none joined: the scheduler would hold the sites for ever).

    The futures are watched through their own client (several runs, each with its client, may share one
    process and one scheduler)."""
    from distributed import as_completed

    watched = as_completed(loop=client.loop)
    seen: set = set()
    alone_since = None
    last_look = time.monotonic()
    while launched:
        for future in list(launched):
            if future not in seen:
                seen.add(future)
                watched.add(future)
        if watched.has_ready():
            alone_since = None
            for future in watched.next_batch(block=False):
                if future in launched:
                    yield future
            continue
        time.sleep(POLL_S)
        if time.monotonic() - last_look < WORKER_CHECK_S:
            continue
        last_look = time.monotonic()
        if client.nthreads():
            alone_since = None
            continue
        alone_since = alone_since if alone_since is not None else last_look
        if last_look - alone_since >= FIRST_WORKER_WAIT_S:
            address = getattr(client.scheduler, "address", None) or "ADDRESS"
            raise TimeoutError(
                f"every worker left the scheduler during the run and none joined within {FIRST_WORKER_WAIT_S:g} s; "
                f"start one on each machine with `dask worker {address}` and run again (a worker that dies "
                "while it works has most often run out of memory: see the estimate printed before a large "
                "run)")


#: Seconds between looks for finished sites while a run waits for them.
POLL_S = 0.02


def _wait_for_a_worker(client) -> None:
    """Wait up to :data:`FIRST_WORKER_WAIT_S` for the scheduler's first worker.

    Raises
    ------
    TimeoutError
        Naming the wait and how to start a worker, when none has joined by then.
    """
    try:
        client.wait_for_workers(1, timeout=FIRST_WORKER_WAIT_S)
    except TimeoutError:
        address = getattr(client.scheduler, "address", None) or "ADDRESS"
        raise TimeoutError(f"no worker joined the scheduler within {FIRST_WORKER_WAIT_S:g} s; start one on each "
                           f"machine with `dask worker {address}` (with this package installed there) and run "
                           f"again") from None


#: Seconds to wait for a TCP connection to a scheduler, and then for its first bytes (a Dask scheduler speaks
#: first on a new connection: its handshake).
PROBE_CONNECT_S = 10.0
PROBE_GREETING_S = 5.0
#: The address schemes a scheduler is reached by (the Dask dashboard's http address is not one); only tcp and
#: tls addresses are probed before connecting.
SCHEDULER_SCHEMES = ("tcp", "tls", "inproc", "ucx", "ws", "wss")


def check_scheduler_address(address: str, connect_s: float = PROBE_CONNECT_S,
                            greeting_s: float = PROBE_GREETING_S) -> None:
    """Raise ValueError with a plain message when ``address`` is not a Dask scheduler one can reach.

    The address is ``tcp://HOST:PORT`` (or ``HOST:PORT``, or ``tls://``). A TCP address is probed once: the
    connection must open within ``connect_s`` seconds and, as a Dask scheduler greets a new connection
    first, send bytes within ``greeting_s`` seconds; a server that stays silent (the dashboard's web port,
    8787 by default) is not a scheduler. Without this a client can wait on such a port indefinitely.
    """
    import socket
    from urllib.parse import urlsplit

    text = str(address).strip()
    form = "give --scheduler as tcp://HOST:PORT (the scheduler's port, 8786 by default)"
    scheme, rest = (text.split("://", 1) + [""])[:2] if "://" in text else ("tcp", text)
    if scheme in ("http", "https"):
        raise ValueError(f"{text} is a web address, such as the Dask dashboard's, not the scheduler's; {form}")
    if scheme not in SCHEDULER_SCHEMES:
        raise ValueError(f"{text}: unknown address scheme '{scheme}'; {form}")
    if scheme not in ("tcp", "tls"):
        return  # in-process and other transports: no socket to probe
    parts = urlsplit(f"//{rest}")
    try:
        host, port = parts.hostname, parts.port
    except ValueError:
        host, port = None, None
    if not host or port is None or parts.path not in ("", "/"):
        raise ValueError(f"{text} is not a scheduler address; {form}")
    try:
        sock = socket.create_connection((host, port), timeout=connect_s)
    except socket.gaierror:
        raise ValueError(f"host '{host}' of {text} is not found (check the name, or give its IP address)") from None
    except ConnectionRefusedError:
        raise ValueError(f"nothing listens at {host}:{port}: is the scheduler started (dask scheduler) and is it "
                         "its port?") from None
    except (TimeoutError, OSError) as exc:
        raise ValueError(f"could not connect to {host}:{port} within {connect_s:g} s ({exc.__class__.__name__}); "
                         "check the address and any firewall between here and the scheduler") from None
    try:
        if scheme == "tcp":
            sock.settimeout(greeting_s)
            try:
                greeting = sock.recv(1)
            except (TimeoutError, OSError):
                greeting = b""
            if not greeting:
                raise ValueError(f"{host}:{port} answers but is not a Dask scheduler (the dashboard's port? the "
                                 f"scheduler's is 8786 by default); {form}")
    finally:
        sock.close()


def _client(scheduler: str | None, n_workers: int, processes: bool):
    """Return (client, cluster or None): a client of the given scheduler (checked first,
    :func:`check_scheduler_address`), or of a new local cluster."""
    from distributed import Client

    if scheduler:
        check_scheduler_address(scheduler)
        return Client(scheduler), None
    import signal

    # the workers' processes start with Ctrl+C ignored (an ignored signal stays ignored in a child): a Ctrl+C at
    # the terminal reaches the whole process group, and the run, not each worker, is to stop and close them
    quiet = processes and threading.current_thread() is threading.main_thread()
    before = signal.signal(signal.SIGINT, signal.SIG_IGN) if quiet else None
    try:
        with _CLUSTER_START:
            cluster = _local_cluster(n_workers, processes)
    finally:
        if quiet:
            signal.signal(signal.SIGINT, before)
    return Client(cluster), cluster


#: One local cluster starts at a time: its workers' environment passes through this process's (below).
_CLUSTER_START = threading.Lock()


def _local_cluster(n_workers: int, processes: bool):
    """A local cluster whose worker processes start with one heap for their threads (models.memory.one_heap), as the
    command has: a ``GLIBC_TUNABLES`` set by the user is kept, with one heap added. Dask's nannies pass
    ``distributed.nanny.pre-spawn-environ`` on through this process's environment, whose value wins over the
    setting's: both are set while the workers start, and this process's environment is put back as it was after
    (every variable of the setting, which the nannies set in it too: :func:`spawn_environment`,
    :func:`restore_environment`)."""
    import dask
    from distributed import LocalCluster

    environ = dict(dask.config.get("distributed.nanny.pre-spawn-environ", {}) or {})
    heap = worker_environment({k: str(v) for k, v in {**environ, **os.environ}.items()})
    given = spawn_environment(heap)
    try:
        os.environ.update(heap)
        with dask.config.set({"distributed.nanny.pre-spawn-environ": {**environ, **heap}}):
            return LocalCluster(n_workers=n_workers, threads_per_worker=1, processes=processes,
                                dashboard_address=":0", silence_logs=logging.CRITICAL)
    finally:
        restore_environment(given)


def spawn_environment(extra=()) -> dict[str, str | None]:
    """This process's values (None: unset) of the variables a Dask nanny sets in it as it starts a worker (the names
    of ``distributed.nanny.pre-spawn-environ``, and ``PYTHONHASHSEED``, which it adds) and of ``extra``'s names: what
    :func:`restore_environment` puts back."""
    import dask

    names = set(dask.config.get("distributed.nanny.pre-spawn-environ", {}) or {}) | {"PYTHONHASHSEED"} | set(extra)
    return {name: os.environ.get(name) for name in sorted(names)}


def restore_environment(given: dict[str, str | None]) -> None:
    """Put the variables of ``given`` back in this process's environment (None: unset) after a local cluster's
    workers started, or were started again by their nannies."""
    for name, value in given.items():
        if value is None:
            os.environ.pop(name, None)
        elif os.environ.get(name) != value:
            os.environ[name] = value


def run_distributed(case, assumptions: finance.FinanceAssumptions, scheduler: str | None = None,
                    progress: Callable[[str], None] | None = None, with_risk: bool = True, *,
                    site_progress: Callable[[str, int, int], None] | None = None, n_workers: int | None = None,
                    processes: bool = True, chunk_assets: int | None = None,
                    dense: bool | None = None, plan_settings: PlanSettings = PRECISE_PLAN,
                    timer: dict | None = None, budgets: MemoryBudgets | None = None,
                    notice: Callable[[str], None] | None = None) -> ScenarioResult:
    """Run the whole analysis with the physics of each site as one Dask task.

    Parameters
    ----------
    case : models.case.Case
        A validated case.
    assumptions : models.finance.FinanceAssumptions
        Finance assumptions.
    scheduler : str, optional
        Address of a running Dask scheduler (e.g. ``tcp://10.0.0.5:8786``); default: start a local
        cluster of ``n_workers`` worker processes and close it at the end.
    progress : callable, optional
        Called with each stage name, as :func:`models.scenario.run` does ("machines", "site bills" when the
        first site is back, then the economics stages).
    with_risk : bool
        Include the tornado and Monte Carlo.
    site_progress : callable, optional
        Called as ``site_progress(site_id, done, total)`` as each site's task completes.
    n_workers : int, optional
        Workers of the local cluster (ignored with ``scheduler``); default :func:`local_workers` (one per
        core, at most one per site).
    processes : bool
        Local cluster of processes (True) or threads (False).
    chunk_assets, dense, budgets
        As in :func:`models.scenario.physics` (the budgets' block size of curve tables is the workers').
    plan_settings, timer
        As in :func:`models.scenario.economics`.
    notice : callable, optional
        Called with one line in words for each site sent again after its result was lost with its worker.

    Returns
    -------
    models.scenario.ScenarioResult
        The same result as :func:`models.scenario.run` with the same arguments.

    Raises
    ------
    ValueError
        As :func:`models.scenario.run` (raised in a worker, re-raised here).
    """
    step = progress or (lambda _msg: None)
    step("machines")
    cost = float(assumptions.capacitor_cost_per_kvar)
    index = case_index(case)
    merger = PhysicsMerger(case, index, cost, chunk_assets, dense, budgets)
    today_only = not merger.ops.dense
    recompute = merger.ops.recompute
    n_steps = len(index)
    books_asked = {}  # site -> bytes of books foreseen for it, while they are on their way

    def books_wanted(site_id: str, n_assets: int) -> bool:
        """Whether a site's curve books, as foreseen, fit the budget beside those kept and on their way."""
        if recompute is None:
            return False
        foreseen = int(BOOK_BYTES_PER_ASSET_STEP * n_assets * n_steps)
        if recompute.books_bytes + sum(books_asked.values()) + foreseen > recompute.books_budget:
            return False
        books_asked[site_id] = foreseen
        return True

    if n_workers is None:
        n_workers = local_workers(len(merger.partition))
    with _CLUSTER_START:  # (no other local cluster is starting: its passing values are not taken for this one's)
        given = spawn_environment(worker_environment(dict(os.environ)))
    client, cluster = _client(scheduler, n_workers, processes)
    try:
        results = _site_results(client, case, merger.partition, index, cost, chunk_assets, today_only, books_wanted,
                                merger.budgets.curve_chunk_elements, notice)
        for site_id, op, part, books, done in results:
            if done == 1:
                step("site bills")
            merger.add(site_id, op, part)
            books_asked.pop(site_id, None)
            for rows, arrays in books or ():  # read again by the plan, not recomputed (as the local engine)
                recompute.keep_arrays(site_id, rows, arrays)
            del op, part, books
            if site_progress is not None:
                site_progress(site_id, done, len(merger.partition))
    finally:
        client.close()
        if cluster is not None:
            cluster.close()
            with _CLUSTER_START:
                restore_environment(given)  # (as a nanny that started its worker again left it)
    return economics(case, merger.result(), assumptions, progress, with_risk, plan_settings, timer=timer)
