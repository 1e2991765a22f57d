"""Every result design_core keeps between calls, behind one object: ``MEMO``, with one ``clear()``.

What is kept, each in its own store of ``MEMO`` (at most ``size`` entries, the first kept
first out):

* ``profiles``: shaft profiles (``design_core.shaft_profile.shaft_profile``), keyed by ground
  model, diameter, top level, rules and integration controls; always built to the bottom of the
  ground model, so one profile is the same whichever toe asked for it first.
* ``curves``: the capacity curve of one pile geometry on the standard grid
  (``design_core.axial.pile_capacity_curve``), keyed by every input of the curve.
* ``points``: capacity values at toe levels asked for together (a project's toes), by the
  same key as ``curves``; values at a level are the same however many levels were asked.
* ``lateral``: a pile's lateral geometry and Winkler key, by every input they use.
* ``sections``: interaction curves of one section (``design_core.checks.members``).
* ``winkler``: Winkler unit responses of one lateral system (``design_core.lateral_springs``).
* ``shares``: the shares of one cap on one set of positions (``design_core.checks.capacity``).

Every key holds every input of the result it keeps (never an object's ``id()``), and a kept
result is the one a fresh computation gives: no output of design_core depends on whether a
result was kept. ``MEMO.clear()`` forgets them all (benchmarks of a first call; tests). Kept
arrays are read-only, as they are shared. Inputs that cannot be hashed are computed afresh
every time. Thread-safe: a lock guards each store (two threads may compute the same result
once each; both get equal values).
"""

from __future__ import annotations

import threading
from collections import OrderedDict
from typing import Any, Callable


class Store:
    """One kind of kept result: a bounded dictionary, the first kept first out. Reads take no
    lock (a dict read is atomic); writes and evictions hold one."""

    def __init__(self, name: str, size: int):
        self.name, self.size = name, size
        self._data: OrderedDict = OrderedDict()
        self._lock = threading.Lock()

    def get(self, key: Any, make: Callable[[], Any]) -> Any:
        """The kept value for ``key``, else ``make()`` kept and returned (unhashable keys: made
        every time)."""
        try:
            return self._data[key]
        except KeyError:
            pass
        except TypeError:
            return make()
        value = make()
        self.put(key, value)
        return value

    def find(self, key: Any) -> Any:
        """The kept value for ``key`` or None (nothing is made)."""
        try:
            return self._data.get(key)
        except TypeError:
            return None

    def put(self, key: Any, value: Any) -> None:
        """Keep ``value`` under ``key`` (the oldest entries leave beyond ``size``)."""
        with self._lock:
            self._data[key] = value
            while len(self._data) > self.size:
                self._data.popitem(last=False)

    def clear(self) -> None:
        """Forget every value of this store."""
        with self._lock:
            self._data.clear()

    def __len__(self) -> int:
        return len(self._data)


class Memo:
    """The stores of every kept result (see the module docstring)."""

    def __init__(self):
        self.profiles = Store("profiles", 1024)
        self.curves = Store("curves", 1024)
        self.points = Store("points", 1024)
        self.lateral = Store("lateral", 8192)
        self.sections = Store("sections", 256)
        self.winkler = Store("winkler", 4096)
        self.shares = Store("shares", 2048)

    def stores(self) -> tuple[Store, ...]:
        """Every store, in a fixed order."""
        return (self.profiles, self.curves, self.points, self.lateral, self.sections,
                self.winkler, self.shares)

    def clear(self) -> None:
        """Forget every kept result, so the next call works from nothing."""
        for store in self.stores():
            store.clear()

    def sizes(self) -> dict[str, int]:
        """How many results each store keeps now, by store name."""
        return {store.name: len(store) for store in self.stores()}


MEMO = Memo()
