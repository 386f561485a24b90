"""One check's memo: the single cache object, owned by the check that creates it.

Everything the check computes more than once on the same immutable input is kept here, in
named stores, for the duration of that check and no longer: the sparse engine of a network
(ordering and value map), its load-free copy, bank-off scans shared by the detuned re-checks
(on a large network a table of the bank-off solves at every order any variant asked for,
:class:`resonance.assessment.curves.OrderTable`), fundamental load-flow sessions and their solved
voltages, the IEC 60909 cross-check and the re-check studies of design variants.  No module keeps
a cache of its own.

:func:`resonance.pipeline.run_check` creates one :class:`Memo` and makes it the running
check's (:meth:`Memo.active`); a study called on its own gets one for its duration
(:func:`scope`).  Outside any check :func:`remember` just computes.  Keys are the inputs
themselves (the network arrays and plant model by identity, their frozen settings by value):
the stored values are never changed by their users (an order table only grows: a value once
solved stays as it is).
"""

from __future__ import annotations

import contextvars
from contextlib import contextmanager
from typing import Any, Callable, Iterator

__all__ = ["Memo", "remember", "current", "scope"]

_CURRENT: "contextvars.ContextVar[Memo | None]" = contextvars.ContextVar("resonance_memo", default=None)


class Memo:
    """Named stores of one check's intermediate results [unitless]."""

    def __init__(self) -> None:
        self._stores: dict[str, dict] = {}
        self.hits = 0
        self.misses = 0

    def get(self, store: str, key: Any, make: Callable[[], Any]) -> Any:
        """The value under ``key`` in ``store``, made by ``make()`` the first time."""
        s = self._stores.setdefault(store, {})
        if key in s:
            self.hits += 1
            return s[key]
        self.misses += 1
        value = s[key] = make()
        return value

    def sizes(self) -> dict[str, int]:
        """Entries per store [unitless]."""
        return {k: len(v) for k, v in self._stores.items()}

    @contextmanager
    def active(self) -> Iterator["Memo"]:
        """Make this the running check's memo for the duration of the ``with`` block."""
        token = _CURRENT.set(self)
        try:
            yield self
        finally:
            _CURRENT.reset(token)


def current() -> Memo | None:
    """The running check's memo, or None outside a check."""
    return _CURRENT.get()


def remember(store: str, key: Any, make: Callable[[], Any]) -> Any:
    """``make()`` memoised in the running check's memo (computed afresh outside a check)."""
    m = _CURRENT.get()
    return make() if m is None else m.get(store, key, make)


@contextmanager
def scope() -> Iterator[Memo]:
    """The running check's memo, or a new one for the duration of the block."""
    m = _CURRENT.get()
    if m is not None:
        yield m
        return
    m = Memo()
    with m.active():
        yield m
