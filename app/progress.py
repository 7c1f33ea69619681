"""Progress reporting and cancellation for long work, shared by the CLI and the app.

Long work (registering images, imports, triage, exports) calls :meth:`Progress.step` as it goes.
The command line prints the steps on stderr; the app forwards them to a progress bar from its
worker thread. Setting the cancel event makes the next ``step`` raise
:class:`~app.errors.Cancelled`; the work then rolls back, so a cancelled import leaves nothing.
"""

from __future__ import annotations

import threading
from collections.abc import Callable

from app.errors import Cancelled


class Progress:
    """Forward ``(done, total, label)`` to a callback and honour a cancel request.

    Examples
    --------
    >>> seen = []
    >>> p = Progress(lambda done, total, label: seen.append((done, total)))
    >>> p.step(1, 4, "frames"); seen
    [(1, 4)]
    >>> p.cancel(); p.step(2, 4, "frames")
    Traceback (most recent call last):
    ...
    app.errors.Cancelled: cancelled during frames
    """

    def __init__(self, callback: Callable[[int, int, str], None] | None = None,
                 cancel_event: threading.Event | None = None):
        self._callback = callback
        self._cancel = cancel_event or threading.Event()

    def step(self, done: int, total: int, label: str = "") -> None:
        if self._cancel.is_set():
            raise Cancelled(f"cancelled during {label}" if label else "cancelled")
        if self._callback is not None:
            self._callback(done, total, label)

    def cancel(self) -> None:
        self._cancel.set()

    @property
    def cancelled(self) -> bool:
        return self._cancel.is_set()
