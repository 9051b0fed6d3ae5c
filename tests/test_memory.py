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
