"""One value kept for the last object it was made from, while that object lives.

A pack, the result files and the dashboard ask several times for the same derived table of one result (a
cash-flow index, the sites' maximum demands, a plan's harmonic screen). :class:`KeptForLast` keeps the last
such value beside a weak reference to the object it was made from (and, where it depends on another object,
that one too), and lets go of it when that object is collected, so a long-lived process (the dashboard)
holds no table of a result that is gone.
"""

from __future__ import annotations

import threading
import weakref
from typing import Any, Callable

__all__ = ["KeptForLast"]


class KeptForLast:
    """The last value :meth:`get` made, for the owner (and the ``beside`` object) it was made for.

    Examples
    --------
    >>> class Owner:
    ...     pass
    >>> kept, made = KeptForLast(), []
    >>> owner = Owner()
    >>> kept.get(owner, lambda: made.append(1) or "table"), kept.get(owner, lambda: made.append(2) or "again")
    ('table', 'table')
    >>> made
    [1]
    >>> del owner  # collected: the value goes with it
    >>> kept.holds()
    False
    """

    def __init__(self) -> None:
        self._last: tuple | None = None
        self._lock = threading.Lock()

    def get(self, owner: Any, make: Callable[[], Any], beside: Any = None) -> Any:
        """The value kept for ``owner`` and ``beside``, or ``make()``'s, then kept for them.

        Parameters
        ----------
        owner : object
            What the value is made from (weakly referenced: the value goes when it is collected).
        make : callable
            Makes the value, with no argument, when none is kept for these objects.
        beside : object, optional
            A second object the value depends on, compared by identity (held while the value is kept).

        Returns
        -------
        object
            The value.
        """
        last = self._last
        if last is not None and last[0]() is owner and last[1] is beside:
            return last[2]
        value = make()
        ref = weakref.ref(owner)
        with self._lock:
            self._last = (ref, beside, value)
        weakref.finalize(owner, self._forget, ref)
        return value

    def holds(self) -> bool:
        """Whether a value is kept."""
        return self._last is not None

    def _forget(self, ref) -> None:
        """Let go of the value of an owner that is gone (not of one made for another owner after it)."""
        with self._lock:
            if self._last is not None and self._last[0] is ref:
                self._last = None
