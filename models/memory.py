"""Keep freed memory in the process while a large analysis runs, instead of handing it back page by page.

A site's machines and bills allocate and free many arrays of tens of megabytes. By default the C
allocator (glibc) serves each of them with a fresh memory mapping and unmaps it when numpy frees it, so
the next site's arrays fault their pages in again; numpy also asks the kernel for transparent huge pages
on such arrays, whose faults are dearer still. Where faulting a page is slow (as on the virtual reference
machine of docs/performance.md), that first touch cost several times the arithmetic: on a 10,000-asset
fleet it was up to a third of the machines stage.

:func:`retained_memory` sets the allocator, for the span of a run, to serve large arrays from its heap
and to keep freed memory for the next ones (glibc's ``mallopt`` [1]: no memory mappings, no trimming), and
turns numpy's huge-page advice off; on the way out it restores them and hands the free memory back
(``malloc_trim``). Numbers are unchanged: only where the bytes live changes. Elsewhere than Linux with
glibc the allocator is left as it is.

That alone does not hold in worker threads. glibc gives each thread an arena of its own, whose heaps are at
most 64 MiB: a larger array asked for in a worker thread is served by a fresh mapping whatever the settings
above, and unmapped when freed. On hourly data a site's arrays stay below that; on 15-minute data most are
above it (500 assets x 35,040 steps x 8 bytes = 140 MB), and the plan's check of a 10,000-asset fleet then
faulted 32 million pages (69 s of system time, docs/performance.md). :func:`one_heap` makes every thread
allocate from the main heap (``mallopt(M_ARENA_MAX, 1)`` [1]), where the settings above hold. It cannot be
undone and binds only threads that have not allocated yet, so the front ends (the ``drivecase`` command,
the Dask workers a run starts, :func:`worker_environment`) set it for their whole process before anything
else runs.

References
----------
.. [1] The GNU C Library Reference Manual, "Malloc Tunable Parameters" (``mallopt``: M_MMAP_MAX,
   M_TRIM_THRESHOLD, M_TOP_PAD, M_ARENA_MAX), "Memory Allocation Tunables" (``glibc.malloc.arena_max``) and
   "Summary of Malloc-Related Functions" (``malloc_trim``).
"""

from __future__ import annotations

import ctypes
import ctypes.util
import functools
import platform
import os
import threading
from contextlib import contextmanager

# (numpy is imported where used: one_heap must run before a library that starts threads is imported)

# glibc's mallopt parameter numbers (malloc.h)
_M_TRIM_THRESHOLD = -1
_M_TOP_PAD = -2
_M_MMAP_MAX = -4
_M_ARENA_MAX = -8

#: The glibc tunable that gives a new process one heap for all its threads (as :func:`one_heap` does for a
#: running one); read by the system's loader when a process starts (glibc's "Tunables" [1]).
ONE_HEAP_TUNABLE = "glibc.malloc.arena_max=1"

#: While retained: no trimming below this much free memory at the heap's top [bytes] (mallopt takes an int).
RETAINED_TRIM_THRESHOLD_BYTES = 2**31 - 1
#: While retained: extra memory asked for each time the heap grows [bytes].
RETAINED_TOP_PAD_BYTES = 64 * 2**20
#: glibc's defaults, restored afterwards (mallopt(3): 128 KiB trim threshold and top pad, 65,536 mappings).
_DEFAULTS = {_M_TRIM_THRESHOLD: 128 * 1024, _M_TOP_PAD: 128 * 1024, _M_MMAP_MAX: 65536}

_lock = threading.Lock()
_depth = 0
_saved_hugepage: bool | None = None


def _glibc():
    """The C library when it is glibc with ``mallopt`` and ``malloc_trim``, else None."""
    if platform.system() != "Linux" or platform.libc_ver()[0] != "glibc":
        return None
    try:
        lib = ctypes.CDLL(ctypes.util.find_library("c") or "libc.so.6")
    except OSError:
        return None
    return lib if hasattr(lib, "mallopt") and hasattr(lib, "malloc_trim") else None


def one_heap() -> bool:
    """Make every thread of this process allocate from the main heap from now on; return whether it was set.

    Call it first thing in a process (before numpy, pandas or a thread pool is imported or started): a
    thread that has allocated already keeps its own arena. It cannot be undone. Elsewhere than Linux with
    glibc it does nothing and returns False. See the module's notes for why a run needs it.

    The ``drivecase`` command calls it on import of :mod:`drivecase.cli`, before pandas; a script of its own
    would start ``import models.memory; models.memory.one_heap()`` before its other imports.
    """
    lib = _glibc()
    return lib is not None and bool(lib.mallopt(_M_ARENA_MAX, 1))


def worker_environment(environ: dict | None = None) -> dict[str, str]:
    """Environment variables to start a worker process with so that it has one heap (:func:`one_heap`).

    Parameters
    ----------
    environ : dict, optional
        The environment the worker inherits (default ``os.environ``): a ``GLIBC_TUNABLES`` already set is
        kept, with one heap added unless it sets the number of arenas itself.

    Returns
    -------
    dict of str to str
        ``{"GLIBC_TUNABLES": ...}``, or empty where the allocator is not glibc's.
    """
    if _glibc() is None:
        return {}
    given = (os.environ if environ is None else environ).get("GLIBC_TUNABLES", "")
    if "glibc.malloc.arena_max=" in given:
        return {"GLIBC_TUNABLES": given}
    return {"GLIBC_TUNABLES": f"{given}:{ONE_HEAP_TUNABLE}" if given else ONE_HEAP_TUNABLE}


def _set_hugepage(on: bool) -> bool | None:
    """Turn numpy's huge-page advice on or off; return the previous setting (None where numpy has none)."""
    import numpy as np

    setter = getattr(getattr(getattr(np, "_core", None), "multiarray", None), "_set_madvise_hugepage", None)
    return None if setter is None else bool(setter(on))


def _enter(lib) -> None:
    global _saved_hugepage
    if lib is not None:
        lib.mallopt(_M_MMAP_MAX, 0)
        lib.mallopt(_M_TRIM_THRESHOLD, RETAINED_TRIM_THRESHOLD_BYTES)
        lib.mallopt(_M_TOP_PAD, RETAINED_TOP_PAD_BYTES)
    _saved_hugepage = _set_hugepage(False)


def _leave(lib) -> None:
    global _saved_hugepage
    if _saved_hugepage is not None:
        _set_hugepage(_saved_hugepage)
    _saved_hugepage = None
    if lib is not None:
        for param, value in _DEFAULTS.items():
            lib.mallopt(param, value)
        lib.malloc_trim(0)


@contextmanager
def retained_memory(enabled: bool = True):
    """Within the block, freed memory stays in the process for the next arrays (see the module's notes).

    Re-entrant and thread-safe: the settings are made by the outermost block and restored when the last
    block, in any thread, ends. With ``enabled`` False the block changes nothing.

    Examples
    --------
    >>> import numpy as np
    >>> with retained_memory():
    ...     x = np.ones(10).sum()
    >>> float(x)
    10.0
    """
    global _depth
    if not enabled:
        yield
        return
    lib = _glibc()
    with _lock:
        if _depth == 0:
            _enter(lib)
        _depth += 1
    try:
        yield
    finally:
        with _lock:
            _depth -= 1
            if _depth == 0:
                _leave(lib)


def retaining_memory(function):
    """Decorate a run's entry point so that it runs within :func:`retained_memory`."""

    @functools.wraps(function)
    def wrapper(*args, **kwargs):
        with retained_memory():
            return function(*args, **kwargs)

    return wrapper
