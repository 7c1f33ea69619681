"""Plain events for the session's objects: callbacks by name, no Qt."""

from __future__ import annotations

from collections import defaultdict
from collections.abc import Callable
from typing import Any


class Events:
    """Plain events: callbacks by name, called in the order they were connected.

    Examples
    --------
    >>> seen = []
    >>> ev = Events(); ev.connect("stop", seen.append); ev.emit("stop", 3); seen
    [3]
    """

    def __init__(self) -> None:
        self._subscribers: dict[str, list[Callable[..., Any]]] = defaultdict(list)

    def connect(self, name: str, fn: Callable[..., Any]) -> None:
        """Call ``fn(*args)`` on every ``emit(name, *args)`` from now on."""
        self._subscribers[name].append(fn)

    def emit(self, name: str, *args: Any) -> None:
        """Tell every subscriber of ``name``, in the order they connected."""
        for fn in list(self._subscribers.get(name, ())):
            fn(*args)
