"""Freed memory kept in the process during a run: the allocator settings made once, restored after.

The numbers a run gives must not depend on where its bytes live: the check is a run with and without the
setting, compared bit for bit (an invariant of our own design). The allocator's parameter numbers and
defaults are glibc's (mallopt(3), malloc.h).
"""

from __future__ import annotations

import dataclasses
import threading

import numpy as np
import pytest
from numpy.testing import assert_array_equal

from models import memory


class FakeLibc:
    def __init__(self):
        self.calls: list[tuple] = []

    def mallopt(self, param, value):
        self.calls.append(("mallopt", param, value))
        return 1

    def malloc_trim(self, pad):
        self.calls.append(("malloc_trim", pad))
        return 1


@pytest.fixture
def fake(monkeypatch):
    lib = FakeLibc()
    monkeypatch.setattr(memory, "_glibc", lambda: lib)
    return lib


class TestRetainedMemory:
    def test_set_on_the_way_in_and_restored_on_the_way_out(self, fake):
        with memory.retained_memory():
            inside = list(fake.calls)
        # glibc: M_MMAP_MAX = -4, M_TRIM_THRESHOLD = -1, M_TOP_PAD = -2 (malloc.h)
        assert ("mallopt", -4, 0) in inside
        assert ("mallopt", -1, memory.RETAINED_TRIM_THRESHOLD_BYTES) in inside
        after = fake.calls[len(inside):]
        # mallopt(3) defaults: 128 KiB trim threshold and top pad, 65,536 mappings
        assert {c for c in after if c[0] == "mallopt"} == {("mallopt", -1, 131072), ("mallopt", -2, 131072),
                                                           ("mallopt", -4, 65536)}
        assert after[-1] == ("malloc_trim", 0)

    def test_nested_and_threaded_blocks_set_once_and_restore_once(self, fake):
        barrier = threading.Barrier(3)
        release = threading.Event()

        def worker():
            with memory.retained_memory():
                barrier.wait()
                release.wait(5)

        threads = [threading.Thread(target=worker) for _ in range(2)]
        with memory.retained_memory():
            with memory.retained_memory():
                for t in threads:
                    t.start()
                barrier.wait()
            release.set()
            for t in threads:
                t.join()
            assert not any(c[0] == "malloc_trim" for c in fake.calls)  # the outer block still runs
        assert sum(c[0] == "malloc_trim" for c in fake.calls) == 1
        assert sum(c == ("mallopt", -4, 0) for c in fake.calls) == 1

    def test_restored_when_the_block_raises(self, fake):
        with pytest.raises(RuntimeError):
            with memory.retained_memory():
                raise RuntimeError("stop")
        assert fake.calls[-1] == ("malloc_trim", 0)
        assert memory._depth == 0

    def test_numpys_huge_page_advice_is_put_back(self):
        previous = memory._set_hugepage(True)  # a known state: on
        if previous is None:
            pytest.skip("this numpy has no huge-page advice")
        try:
            with memory.retained_memory():
                assert memory._set_hugepage(False) is False  # off inside (the setter returns what was set)
            assert memory._set_hugepage(True) is True  # on again after
        finally:
            memory._set_hugepage(previous)

    def test_disabled_changes_nothing(self, fake):
        with memory.retained_memory(enabled=False):
            pass
        assert fake.calls == []


def test_a_run_gives_the_same_bits_with_and_without_it(demo_case, monkeypatch):
    from models import scenario

    plain = monkeypatch.context()
    with plain as m:
        m.setattr(memory, "_glibc", lambda: None)
        m.setattr(memory, "_set_hugepage", lambda on: None)
        without = scenario.physics(demo_case, 30.0, threads=1)
    with_it = scenario.physics(demo_case, 30.0, threads=1)
    assert_array_equal(np.asarray(with_it.operation.p_kw), np.asarray(without.operation.p_kw))
    assert_array_equal(with_it.operation.energy_kwh, without.operation.energy_kwh)
    compared = 0
    for f in dataclasses.fields(with_it.savings):
        a = getattr(with_it.savings, f.name)
        if isinstance(a, np.ndarray) and a.dtype.kind == "f":
            assert_array_equal(a, getattr(without.savings, f.name))
            compared += 1
    assert compared >= 3


#: A worker thread allocates, frees and allocates again an array above glibc's 64 MiB thread heaps, within
#: retained_memory, and prints the minor page faults of each allocation's first write (its own thread's count).
_PROBE = """
import sys
if sys.argv[1] == "one_heap":
    from models.memory import one_heap
    assert one_heap()
elif sys.argv[1] == "command":
    import drivecase.cli  # the command sets one heap on import, before pandas
import resource, threading
import numpy as np
from models.memory import retained_memory

def faults(n):
    before = resource.getrusage(resource.RUSAGE_THREAD).ru_minflt
    a = np.empty(n)
    a.fill(1.0)
    del a
    return resource.getrusage(resource.RUSAGE_THREAD).ru_minflt - before

out = []
def work():
    with retained_memory():
        n = 100 * 2**20 // 8  # 100 MiB
        out.extend([faults(n), faults(n), faults(n)])
t = threading.Thread(target=work)
t.start()
t.join()
print(*out)
"""


@pytest.mark.skipif(memory._glibc() is None, reason="the heap settings are glibc's (Linux)")
class TestOneHeap:
    """Without one heap, every 100 MiB array of a worker thread is a fresh mapping: each first write faults
    its 25,600 pages (100 MiB / 4 KiB). With it, the second and third arrays reuse the first's memory."""

    def _faults(self, mode: str) -> list[int]:
        import subprocess
        import sys
        from pathlib import Path

        import os

        root = Path(__file__).resolve().parents[1]
        env = {k: v for k, v in os.environ.items() if k not in ("GLIBC_TUNABLES", "MALLOC_ARENA_MAX")}  # (glibc's own)
        done = subprocess.run([sys.executable, "-c", _PROBE, mode], cwd=root, capture_output=True, text=True,
                              check=True, timeout=120, env=env)
        return [int(v) for v in done.stdout.split()]

    def test_a_worker_thread_maps_large_arrays_afresh_by_default(self):
        first, second, third = self._faults("default")
        pages = 100 * 2**20 // 4096  # 25,600 (hand calculation: 100 MiB in 4 KiB pages)
        assert first >= 0.9 * pages
        assert second >= 0.9 * pages and third >= 0.9 * pages

    def test_one_heap_reuses_them(self):
        first, second, third = self._faults("one_heap")
        pages = 100 * 2**20 // 4096
        assert first >= 0.9 * pages  # the heap grows once
        assert second < 0.05 * pages and third < 0.05 * pages

    def test_the_command_sets_it_before_anything_else(self):
        first, second, third = self._faults("command")
        pages = 100 * 2**20 // 4096
        assert second < 0.05 * pages and third < 0.05 * pages


class TestWorkerEnvironment:
    def test_adds_one_heap_to_the_tunables_given(self, monkeypatch):
        monkeypatch.setattr(memory.platform, "system", lambda: "Linux")
        monkeypatch.setattr(memory.platform, "libc_ver", lambda: ("glibc", "2.36"))
        assert memory.worker_environment({}) == {"GLIBC_TUNABLES": "glibc.malloc.arena_max=1"}
        assert memory.worker_environment({"GLIBC_TUNABLES": "glibc.malloc.tcache_count=0"}) == {
            "GLIBC_TUNABLES": "glibc.malloc.tcache_count=0:glibc.malloc.arena_max=1"}

    def test_keeps_a_number_of_arenas_set_by_the_user(self, monkeypatch):
        monkeypatch.setattr(memory.platform, "system", lambda: "Linux")
        monkeypatch.setattr(memory.platform, "libc_ver", lambda: ("glibc", "2.36"))
        given = {"GLIBC_TUNABLES": "glibc.malloc.arena_max=4"}
        assert memory.worker_environment(given) == given

    def test_nothing_elsewhere_than_glibc(self, monkeypatch):
        monkeypatch.setattr(memory.platform, "system", lambda: "Darwin")
        assert memory.worker_environment({}) == {}
