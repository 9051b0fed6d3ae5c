"""The Dask engine: the same result files as the local engine, on the demo case and a multi-site fleet.

Each site's physics runs as one task on the same code and the same analysis index as the local engine,
so the result tables must be byte-identical (CSV bytes compared, 10 significant digits), not merely close.
The clusters are local (no network): a LocalCluster of 2 worker processes started by the engine itself,
and one of 2 threads whose address is passed as a scheduler.
"""

from __future__ import annotations

import logging
import re
import sys
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

from models import scenario
from models.case import load_case
from models.distributed import run_distributed
from models.exports import (DEFAULTS_FILE, HARMONIC_SCREEN_FILE, MEASURE_FIRST_FILE, RUN_FILES, RUN_SETTINGS_FILE,
                            SCENARIOS_FILE, SPARES_FILE, VERIFIED_FILE, csv_bytes, run_tables)
from models.operation import site_partition

distributed = pytest.importorskip("distributed")

REPO = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(REPO / "benchmarks"))
from synthetic_fleet import write_fleet  # noqa: E402


@pytest.fixture(scope="module")
def cluster():
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=False, dashboard_address=":0",
                                  silence_logs=logging.ERROR) as local:
        yield local


@pytest.fixture(scope="module")
def fleet(tmp_path_factory):
    case, problems = load_case(write_fleet(tmp_path_factory.mktemp("fleet"), 12, n_sites=4, seed=11))
    assert case is not None, problems
    return case


@pytest.fixture(scope="module")
def fleet_local(fleet):
    return scenario.run(fleet, fleet.finance, with_risk=False)


def _assert_same_files(local, remote, case=None) -> None:
    a, b = run_tables(local, case), run_tables(remote, case)
    names = list(RUN_FILES) + ([RUN_SETTINGS_FILE, DEFAULTS_FILE, SCENARIOS_FILE, MEASURE_FIRST_FILE, HARMONIC_SCREEN_FILE,
                                VERIFIED_FILE, SPARES_FILE] if case is not None else [])
    assert list(a) == names == list(b)
    for name in names:
        assert csv_bytes(a[name]) == csv_bytes(b[name]), f"{name} differs between the engines"


def test_demo_case_identical_to_local_engine():
    case, _ = load_case(REPO / "data" / "demo")
    assumptions = replace(case.finance, monte_carlo_draws=200)
    stages_local, stages_dask = [], []
    local = scenario.run(case, assumptions, progress=stages_local.append)
    remote = run_distributed(case, assumptions, progress=stages_dask.append)  # its own LocalCluster of 2 processes
    _assert_same_files(local, remote, case)
    assert stages_dask == stages_local


def test_multi_site_fleet_identical_to_local_engine_on_a_given_scheduler(fleet, fleet_local, cluster):
    done = []
    remote = run_distributed(fleet, fleet.finance, scheduler=cluster.scheduler_address, with_risk=False,
                             site_progress=lambda site, n, total: done.append((site, n, total)))
    _assert_same_files(fleet_local, remote)
    sites = [s for s, _ in site_partition(fleet)]
    assert sorted(s for s, _, _ in done) == sorted(sites)
    assert [n for _, n, _ in done] == list(range(1, len(sites) + 1))
    assert {total for _, _, total in done} == {len(sites)}


def test_compact_store_gives_the_same_files(fleet, fleet_local, cluster):
    remote = run_distributed(fleet, fleet.finance, scheduler=cluster.scheduler_address, with_risk=False, dense=False)
    _assert_same_files(fleet_local, remote)


def test_error_in_a_worker_reaches_the_caller(fleet, cluster):
    sites = fleet.sites.copy()
    sites.loc[sites.index[1], "tariff_file"] = None
    broken = replace(fleet, sites=sites)
    with pytest.raises(ValueError, match="has no tariff_file"):
        run_distributed(broken, fleet.finance, scheduler=cluster.scheduler_address, with_risk=False)


def test_a_lost_worker_s_sites_are_sent_again(fleet, fleet_local):
    """A worker killed mid-run loses the sites sent to it (their data lives only there): they are sent
    again to a worker that lives, and the result files are still those of the local engine."""
    import os
    import signal

    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=":0",
                                  silence_logs=logging.CRITICAL) as local, distributed.Client(local) as client:
        killed: list[str] = []

        def kill_the_busiest_worker(site, n, total):
            if killed:
                return
            busy = client.processing()
            worker = max(busy, key=lambda w: len(busy[w]))
            if not busy[worker]:
                return
            nanny = next(n for n in local.workers.values() if n.worker_address == worker)
            os.kill(nanny.process.process.pid, signal.SIGKILL)  # the nanny starts a new worker
            killed.append(worker)

        remote = run_distributed(fleet, fleet.finance, scheduler=local.scheduler_address, with_risk=False,
                                 site_progress=kill_the_busiest_worker)
    assert killed, "no worker had a site left to lose when the first site came back"
    _assert_same_files(fleet_local, remote)


def test_sites_on_the_cluster_at_once_are_bounded(fleet, fleet_local, cluster, monkeypatch):
    """With one site per worker thread in flight (2 threads), the scheduler never holds more than two
    sites' tasks besides the one just come back."""
    from models import distributed as engine

    monkeypatch.setattr(engine, "IN_FLIGHT_PER_THREAD", 1)
    seen: list[int] = []
    with distributed.Client(cluster.scheduler_address) as client:
        def count(site, n, total):
            seen.append(client.run_on_scheduler(
                lambda dask_scheduler: sum(str(k).startswith("drivecase-site-physics") for k in dask_scheduler.tasks)))

        remote = run_distributed(fleet, fleet.finance, scheduler=cluster.scheduler_address, with_risk=False,
                                 site_progress=count)
    _assert_same_files(fleet_local, remote)
    assert len(seen) == len(site_partition(fleet)) and max(seen) <= 2 + 1, seen


def test_workers_send_their_curve_books_back_within_the_budget(fleet, fleet_local, cluster, monkeypatch):
    """Above the dense budget the workers send each site's curve books back with its results (the plan then
    reads its rows through them, as with the local engine); with no room for books, none comes back and
    the rows are recomputed. The result files are the local engine's either way."""
    from models import operation

    remote = run_distributed(fleet, fleet.finance, scheduler=cluster.scheduler_address, with_risk=False, dense=False)
    recompute = remote.physics.operation.p_kw._recompute
    n_sites = len(site_partition(fleet))
    assert all(recompute._booked(k) is not None for k in range(n_sites))
    assert recompute.books_bytes > 0
    _assert_same_files(fleet_local, remote)

    monkeypatch.setattr(operation, "KEPT_BOOKS_BUDGET_BYTES", 0)
    bare = run_distributed(fleet, fleet.finance, scheduler=cluster.scheduler_address, with_risk=False, dense=False)
    recompute = bare.physics.operation.p_kw._recompute
    assert recompute.books_bytes == 0 and all(recompute._booked(k) is None for k in range(n_sites))
    _assert_same_files(fleet_local, bare)


def test_the_runs_memory_budgets_reach_the_cluster(fleet, fleet_local, cluster, monkeypatch):
    """A run given budgets (``drivecase run --max-memory``) keeps what they allow on the caller's side and sends
    the block size of the curve tables with each site's task: the files are the local engine's."""
    from models import distributed as engine
    from models import operation
    from models.operation import case_index

    n_t = len(case_index(fleet))
    least = operation.MemoryBudgets(dense_bytes=0, today_in_memory_bytes=0, kept_rows_bytes=0, kept_books_bytes=0,
                                    curve_chunk_elements=2 * n_t)
    sent = []
    real = distributed.Client.submit

    def spy(self, func, *args, **kwargs):
        if func is engine._site_task:
            sent.append(args[-1])  # (_site_task's last argument: the curve-table block size)
        return real(self, func, *args, **kwargs)

    monkeypatch.setattr(distributed.Client, "submit", spy)
    remote = run_distributed(fleet, fleet.finance, scheduler=cluster.scheduler_address, with_risk=False,
                             budgets=least)
    assert len(sent) == len(site_partition(fleet)) and set(sent) == {2 * n_t}
    recompute = remote.physics.operation.p_kw._recompute
    assert recompute.books_bytes == 0 and recompute.rows_budget == 0
    assert isinstance(remote.physics.operation.p_kw._today, np.memmap)
    _assert_same_files(fleet_local, remote)


def test_a_worker_gone_while_a_site_is_sent_to_it_is_passed_over(fleet, fleet_local, cluster, monkeypatch):
    """Sending a site to a worker that has just left fails with a closed connection: the site goes to the
    next least busy worker instead, and the run gives the local engine's files."""
    from distributed.comm.core import CommClosedError

    real = distributed.Client.scatter
    failures = []

    def scatter_failing_once(self, *args, **kwargs):
        if not failures:
            failures.append(kwargs.get("workers"))
            raise CommClosedError("the worker left")
        return real(self, *args, **kwargs)

    monkeypatch.setattr(distributed.Client, "scatter", scatter_failing_once)
    remote = run_distributed(fleet, fleet.finance, scheduler=cluster.scheduler_address, with_risk=False)
    assert len(failures) == 1
    _assert_same_files(fleet_local, remote)


def test_a_scheduler_without_workers_is_waited_for_then_named(fleet, monkeypatch):
    """A scheduler with no worker: the run waits for one for FIRST_WORKER_WAIT_S, then stops with a
    message saying how to start one (the command line prints it, exit code 1; nothing is written)."""
    from models import distributed as engine

    monkeypatch.setattr(engine, "FIRST_WORKER_WAIT_S", 0.5)
    with distributed.LocalCluster(n_workers=0, processes=False, dashboard_address=":0",
                                  silence_logs=logging.ERROR) as empty:
        with pytest.raises(TimeoutError, match=r"no worker joined the scheduler within 0.5 s; start one .*"
                                               + re.escape(f"`dask worker {empty.scheduler_address}`")):
            run_distributed(fleet, fleet.finance, scheduler=empty.scheduler_address, with_risk=False)


def test_the_command_line_names_a_scheduler_without_workers(tmp_path, monkeypatch, capsys):
    from drivecase import cli
    from models import distributed as engine

    monkeypatch.setattr(engine, "FIRST_WORKER_WAIT_S", 0.5)
    out = tmp_path / "out"
    with distributed.LocalCluster(n_workers=0, processes=False, dashboard_address=":0",
                                  silence_logs=logging.ERROR) as empty:
        rc = cli.main(["run", str(REPO / "data" / "demo"), "--out", str(out), "--no-risk", "--quiet", "--engine", "dask",
                       "--scheduler", empty.scheduler_address])
    err = capsys.readouterr().err
    assert rc == 1
    assert f"could not work with the Dask scheduler at {empty.scheduler_address}: no worker joined" in err
    assert "Traceback" not in err and not out.exists()


def test_workers_that_join_after_the_start_take_the_sites(fleet, fleet_local):
    """Workers joining a scheduler after the run has started are waited for, then given sites as they
    come (the number of sites in flight follows the cluster's threads); the files are the local engine's."""
    import threading

    with distributed.LocalCluster(n_workers=0, threads_per_worker=1, processes=False, dashboard_address=":0",
                                  silence_logs=logging.ERROR) as late:
        timer = threading.Timer(1.0, late.scale, args=(2,))
        timer.start()
        try:
            remote = run_distributed(fleet, fleet.finance, scheduler=late.scheduler_address, with_risk=False)
        finally:
            timer.join()
    _assert_same_files(fleet_local, remote)


def test_a_tcp_scheduler_passes_the_address_check():
    # a real scheduler greets a new connection first (Dask's comm handshake), so the check before connecting lets
    # it through at once; a silent port is refused (tests/test_cli.py)
    from models.distributed import check_scheduler_address

    import socket

    with distributed.LocalCluster(n_workers=1, processes=False, protocol="tcp://", dashboard_address=":0") as local:
        assert check_scheduler_address(local.scheduler_address) is None
        assert check_scheduler_address(local.scheduler_address.replace("tcp://", "")) is None  # HOST:PORT means tcp
    with socket.socket() as silent:  # a port that accepts but never speaks first is refused
        silent.bind(("127.0.0.1", 0))
        silent.listen()
        with pytest.raises(ValueError, match="answers but is not a Dask scheduler"):
            check_scheduler_address(f"tcp://127.0.0.1:{silent.getsockname()[1]}", greeting_s=0.5)


def test_local_cluster_takes_a_worker_per_core_at_most_one_per_site(monkeypatch):
    from models import distributed as engine

    monkeypatch.setattr(engine.os, "sched_getaffinity", lambda _pid: set(range(16)), raising=False)
    assert engine.local_workers() == engine.MAX_LOCAL_WORKERS == 8  # 16 cores: capped
    assert engine.local_workers(n_sites=3) == 3  # a fourth worker would have no site to work
    monkeypatch.setattr(engine.os, "sched_getaffinity", lambda _pid: {0}, raising=False)
    assert engine.local_workers(n_sites=20) == 1
    assert engine.local_workers(n_sites=0) == 1


def test_a_site_whose_worker_keeps_dying_is_named_with_the_likely_cause(fleet, monkeypatch):
    # a worker given too little memory for any site (250 MB: the worker's own imports take most of it) is
    # restarted by its nanny each time it runs one; after the attempts the run says so in words
    import dask

    from models import distributed as engine

    monkeypatch.setattr(engine, "SITE_ATTEMPTS", 1)
    with dask.config.set({"distributed.scheduler.allowed-failures": 0}), \
            distributed.LocalCluster(n_workers=1, threads_per_worker=1, processes=True, memory_limit="250MB",
                                     dashboard_address=":0", silence_logs=logging.CRITICAL) as local:
        # (the worker may die as the site's data is sent to it, or as it runs the site)
        with pytest.raises(engine.SiteLost, match=r"lost with its worker (1 time|as its data was being sent): "
                                                  r".*run out of memory"):
            run_distributed(fleet, fleet.finance, scheduler=local.scheduler_address, with_risk=False)


def test_a_result_lost_to_the_clients_event_loop_error_is_fetched_again(fleet, fleet_local, cluster, monkeypatch):
    """A future whose worker died can fail to give its result with the client's own RuntimeError "... is bound
    to a different event loop" (seen once in CI under load): the site is sent again, and the result files are
    still those of the local engine."""
    failed: list[str] = []
    original = distributed.Future.result

    def once(self, *args, **kwargs):
        if not failed:
            failed.append(str(self.key))
            raise RuntimeError("<asyncio.locks.Event object at 0x0 [unset]> is bound to a different event loop")
        return original(self, *args, **kwargs)

    monkeypatch.setattr(distributed.Future, "result", once)
    said: list[str] = []
    remote = run_distributed(fleet, fleet.finance, scheduler=cluster.scheduler_address, with_risk=False,
                             notice=said.append)
    assert failed and failed[0].startswith("drivecase-site-physics")
    _assert_same_files(fleet_local, remote)
    # the site sent again is said in one line (the command prints it on the error stream)
    assert len(said) == 1 and re.fullmatch(r"site \S+: its result was lost \(its worker left or failed\); the site is "
                                           r"sent again \(attempt 2 of 3\)", said[0]), said


def test_another_runtime_error_of_a_site_is_not_swallowed(fleet, cluster, monkeypatch):
    def broken(self, *args, **kwargs):
        raise RuntimeError("a site's own failure")

    monkeypatch.setattr(distributed.Future, "result", broken)
    with pytest.raises(RuntimeError, match="a site's own failure"):
        run_distributed(fleet, fleet.finance, scheduler=cluster.scheduler_address, with_risk=False)


def test_the_month_changes_come_into_service_reaches_the_workers(fleet, fleet_local, cluster):
    # the synthetic fleet's ratchet tariffs read the months before a change: with the changes in service from
    # August the Dask engine prices the same first years as the local one
    moved = replace(fleet, settings=replace(fleet.settings, in_service_month=8))
    local = scenario.run(moved, moved.finance, with_risk=False)
    assert (local.results["ratchet_shortfall"].abs() > 0.5).any()  # (the fleet has ratchet sites)
    assert not np.allclose(local.results["ratchet_shortfall"], fleet_local.results["ratchet_shortfall"])  # (the month told)
    remote = run_distributed(moved, moved.finance, scheduler=cluster.scheduler_address, with_risk=False)
    _assert_same_files(local, remote)


def test_two_runs_on_one_scheduler_keep_their_own_results(fleet, fleet_local, cluster):
    """Two runs sharing a scheduler at the same time (two analysts on one cluster, two scenarios side by side):
    each gets the result files of its own case from the local engine, never the other's (each run's tasks have
    keys of their own)."""
    import threading

    lighter = replace(fleet, profiles={k: v * 0.9 for k, v in fleet.profiles.items()})
    lighter_local = scenario.run(lighter, lighter.finance, with_risk=False)
    results: dict[str, object] = {}
    errors: list[BaseException] = []

    def one(name, case):
        try:
            results[name] = run_distributed(case, case.finance, scheduler=cluster.scheduler_address, with_risk=False)
        except BaseException as exc:  # reported below
            errors.append(exc)

    threads = [threading.Thread(target=one, args=("fleet", fleet)), threading.Thread(target=one, args=("lighter", lighter))]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert not errors, errors
    _assert_same_files(fleet_local, results["fleet"])
    _assert_same_files(lighter_local, results["lighter"])
    assert not fleet_local.results["npv"].equals(lighter_local.results["npv"])  # the two cases differ


def test_the_task_keys_of_two_runs_differ(fleet, cluster, monkeypatch):
    keys: list[str] = []
    submit = distributed.Client.submit

    def recording(self, func, *args, key=None, **kwargs):
        keys.append(key)
        return submit(self, func, *args, key=key, **kwargs)

    monkeypatch.setattr(distributed.Client, "submit", recording)
    run_distributed(fleet, fleet.finance, scheduler=cluster.scheduler_address, with_risk=False)
    first = set(keys)
    keys.clear()
    run_distributed(fleet, fleet.finance, scheduler=cluster.scheduler_address, with_risk=False)
    assert first and keys and not first & set(keys)


def test_every_worker_gone_during_the_run_is_named_not_waited_on_for_ever(fleet, monkeypatch):
    """The last worker leaves after the first site comes back: the run stops with a message once the cluster
    has been without a worker for FIRST_WORKER_WAIT_S, as at the start."""
    from models import distributed as engine

    monkeypatch.setattr(engine, "FIRST_WORKER_WAIT_S", 1.0)
    monkeypatch.setattr(engine, "WORKER_CHECK_S", 0.2)
    with distributed.LocalCluster(n_workers=1, threads_per_worker=1, processes=False, dashboard_address=":0",
                                  silence_logs=logging.CRITICAL) as local:
        def retire(site, n, total):
            if n == 1:
                local.scale(0)

        import threading

        raised: list[BaseException] = []

        def run():
            try:
                run_distributed(fleet, fleet.finance, scheduler=local.scheduler_address, with_risk=False,
                                site_progress=retire)
            except BaseException as exc:  # asserted below
                raised.append(exc)

        worker = threading.Thread(target=run, daemon=True)  # (a run that waits for ever fails here, not hangs)
        worker.start()
        worker.join(timeout=60)
        assert not worker.is_alive(), "the run still waits for a worker"
        assert len(raised) == 1 and isinstance(raised[0], TimeoutError)
        assert re.search(r"every worker left the scheduler during the run and none joined within 1 s; start one .*"
                         + re.escape(f"`dask worker {local.scheduler_address}`"), str(raised[0]))


def _heaps_after_threads_allocate() -> int:
    """The C library's heaps (arenas) of this process once four new threads have allocated (glibc's malloc_info)."""
    import ctypes
    import re
    import tempfile
    import threading

    def work():
        [np.ones(100) for _ in range(100)]

    threads = [threading.Thread(target=work) for _ in range(4)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    libc = ctypes.CDLL("libc.so.6")
    libc.fopen.restype = ctypes.c_void_p
    with tempfile.NamedTemporaryFile("r", suffix=".xml") as out:
        handle = libc.fopen(out.name.encode(), b"w")
        libc.malloc_info(0, ctypes.c_void_p(handle))
        libc.fclose(ctypes.c_void_p(handle))
        return len(re.findall(r"<heap nr=", open(out.name).read()))


@pytest.mark.skipif(not __import__("models.memory", fromlist=["_glibc"])._glibc(), reason="glibc's heaps (Linux)")
@pytest.mark.parametrize("given", [None, "glibc.malloc.tcache_count=0"])
def test_the_local_clusters_workers_start_with_one_heap(monkeypatch, given):
    """A worker process of the cluster a run starts allocates from one heap (models.memory.one_heap) in all its
    threads, set by the glibc tunable at its start, a GLIBC_TUNABLES the user set kept beside it (glibc's own
    malloc_info counts the heaps); this process's environment is left as it was."""
    import os

    from models import distributed as engine

    if given is None:
        monkeypatch.delenv("GLIBC_TUNABLES", raising=False)
    else:
        monkeypatch.setenv("GLIBC_TUNABLES", given)
    before = dict(os.environ)
    client, local = engine._client(None, 1, True)
    try:
        started = dict(os.environ)  # (the nanny sets its pre-spawn variables in this process as it starts a worker)
        heaps = client.run(_heaps_after_threads_allocate)
    finally:
        client.close()
        local.close()
    assert list(heaps.values()) == [1]
    assert os.environ.get("GLIBC_TUNABLES") == given
    # (Dask marks this process as its workers' parent for their process titles, __DASK_PARENT_PID: its own, left)
    ours = lambda environ: {k: v for k, v in environ.items() if k != "__DASK_PARENT_PID"}  # noqa: E731
    assert ours(started) == ours(before)


def test_the_environment_a_nanny_changed_is_put_back(monkeypatch):
    # a nanny that starts its worker again sets its pre-spawn variables in this process anew: the run puts them back
    import os

    from models import distributed as engine

    monkeypatch.setenv("OMP_NUM_THREADS", "7")
    monkeypatch.delenv("MALLOC_TRIM_THRESHOLD_", raising=False)
    given = engine.spawn_environment({"GLIBC_TUNABLES": "x"})
    assert given["OMP_NUM_THREADS"] == "7" and given["MALLOC_TRIM_THRESHOLD_"] is None and "PYTHONHASHSEED" in given
    monkeypatch.setenv("OMP_NUM_THREADS", "1")
    monkeypatch.setenv("MALLOC_TRIM_THRESHOLD_", "65536")
    monkeypatch.setenv("SOMETHING_ELSE", "kept")
    engine.restore_environment(given)
    assert os.environ["OMP_NUM_THREADS"] == "7" and "MALLOC_TRIM_THRESHOLD_" not in os.environ
    assert os.environ["SOMETHING_ELSE"] == "kept"


def test_on_off_motors_give_the_same_files(fleet, cluster):
    # pumps and fans switched on and off (read at their running load, their banks evaluated as options, a drive
    # running them at their demand) give the local engine's files on the cluster, with every option's rows kept
    # or recomputed where asked for
    assets = fleet.assets.copy()
    centrifugal = np.flatnonzero(assets["load_type"].to_numpy(dtype=object) == "variable_torque")
    assert len(centrifugal) >= 3
    control = assets["speed_control"].to_numpy(dtype=object).copy()
    control[centrifugal] = "on_off"
    assets["speed_control"] = control
    running = np.full(len(assets), np.nan)
    running[centrifugal[0]] = 95.0
    assets["running_load_pct"] = running
    cycled = replace(fleet, assets=assets)
    local = scenario.run(cycled, cycled.finance, with_risk=False)
    assert (local.results["technology"] == "add_drive").any()
    for dense in (True, False):
        remote = run_distributed(cycled, cycled.finance, scheduler=cluster.scheduler_address, with_risk=False,
                                 dense=dense)
        _assert_same_files(local, remote)
