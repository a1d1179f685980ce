"""Values derived from a long-lived object (a library, its components table), remembered by
that object's identity.

A batch worker processes thousands of runs against the same library; tables derived from it
(name index, index table, neat-value estimators, per-component model inputs) are built once.
The entry keeps the object alive, so its ``id`` cannot be reused by another object while the
entry exists; an optional ``tag`` (e.g. the library checksum) must match as well. The objects
are not changed in place once loaded: a changed library is a new object.
"""
from __future__ import annotations

from typing import Any, Callable, Hashable


class ObjectMemo:
    """Remembered values per object and tag, at most ``size`` of them (then it starts again).

    >>> memo = ObjectMemo()
    >>> table = [1, 2, 3]
    >>> memo.get(table, lambda: sum(table)), memo.get(table, lambda: -1)
    (6, 6)
    >>> memo.get(table, lambda: -1, tag="other")
    -1
    """

    def __init__(self, size: int = 8) -> None:
        self.size = size
        self._entries: dict[tuple[int, Hashable], tuple[Any, Any]] = {}

    def get(self, obj: Any, build: Callable[[], Any], tag: Hashable = None) -> Any:
        """The value remembered for ``obj`` and ``tag`` (any hashable: a checksum, settings
        that change the value), else ``build()``, remembered."""
        key = (id(obj), tag)
        hit = self._entries.get(key)
        if hit is not None and hit[0] is obj:
            return hit[1]
        value = build()
        if len(self._entries) >= self.size:
            self._entries.clear()
        self._entries[key] = (obj, value)
        return value
