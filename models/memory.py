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
(``malloc_trim``). The number of arenas is left alone: one shared arena measured no faster, and mallopt
cannot set it back to its default. Numbers are unchanged: only where the
bytes live changes. Elsewhere than Linux with glibc the allocator is left as it is.

References
----------
.. [1] The GNU C Library Reference Manual, "Malloc Tunable Parameters" (``mallopt``: M_MMAP_MAX,
   M_TRIM_THRESHOLD, M_TOP_PAD) and "Summary of Malloc-Related Functions" (``malloc_trim``).
"""

from __future__ import annotations

import ctypes
import ctypes.util
import functools
import platform
import threading
from contextlib import contextmanager

import numpy as np

# glibc's mallopt parameter numbers (malloc.h)
_M_TRIM_THRESHOLD = -1
_M_TOP_PAD = -2
_M_MMAP_MAX = -4

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


def _set_hugepage(on: bool) -> bool | None:
    """Turn numpy's huge-page advice on or off; return the previous setting (None where numpy has none)."""
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
