"""Long work off the UI thread: a worker thread, a progress dialog, and Cancel; and the
session's quiet background work (:class:`Background`: no dialog, results on the UI thread).

A job is a function ``fn(progress) -> result`` from :mod:`app.jobs` or
:mod:`app.jobs_analysis`. It runs in a :class:`~PySide6.QtCore.QThread`; its
:class:`~app.progress.Progress` forwards steps to the dialog through a queued signal, and Cancel
sets the progress's cancel event, so the job stops at its next step and rolls back. The result
or the error comes back to the UI thread by signal. The store object is thread-safe (its calls
are serialised), so the job works on the same :class:`~app.store.Project` as the window.
"""

from __future__ import annotations

import logging
import threading
from collections import OrderedDict
from collections.abc import Callable
from typing import Any

from PySide6.QtCore import (
    QCoreApplication,
    QEvent,
    QObject,
    QRunnable,
    Qt,
    QThread,
    QThreadPool,
    Signal,
)
from PySide6.QtWidgets import QProgressDialog, QWidget

from app.errors import Cancelled, PosewrightError
from app.progress import Progress

log = logging.getLogger(__name__)


class Job(QThread):
    """Run ``fn(progress)`` on a worker thread.

    Progress reaches the UI thread coalesced: however often the work steps, at most one
    update waits in the event queue, and it carries the latest step when the UI thread
    takes it (``progressed``). A job stepping every millisecond on a loaded machine would
    otherwise queue updates faster than the dialog draws them, and its end (and a cancel's
    report) would wait behind all of them.
    """

    progressed = Signal(int, int, str)
    succeeded = Signal(object)
    failed = Signal(object)
    _stepped = Signal()

    def __init__(self, fn: Callable[[Progress], Any], parent: QObject | None = None):
        super().__init__(parent)
        self._fn = fn
        self.cancel_event = threading.Event()
        self._lock = threading.Lock()
        self._latest: tuple[int, int, str] | None = None
        # The Job lives on the UI thread: a queued call of its own slot runs there.
        self._stepped.connect(self._show_latest, Qt.ConnectionType.QueuedConnection)

    def _step(self, done: int, total: int, label: str) -> None:
        """On the worker: keep the latest step; post an update unless one is waiting."""
        with self._lock:
            waiting = self._latest is not None
            self._latest = (int(done), int(total), label)
        if not waiting:
            self._stepped.emit()

    def _show_latest(self) -> None:
        with self._lock:
            latest, self._latest = self._latest, None
        if latest is not None:
            self.progressed.emit(*latest)

    def run(self) -> None:
        progress = Progress(self._step, self.cancel_event)
        try:
            result = self._fn(progress)
        except PosewrightError as exc:
            self.failed.emit(exc)
        except Exception as exc:  # report, never lose the worker silently
            log.exception("background job failed")
            self.failed.emit(exc)
        else:
            self.succeeded.emit(result)

    def cancel(self) -> None:
        self.cancel_event.set()


class _Task(QRunnable):
    def __init__(self, runner: Background, job: Callable[[], Any],
                 deliver: Callable[[Any], None]):
        super().__init__()
        self._runner, self._job, self._deliver = runner, job, deliver

    def run(self) -> None:
        try:
            result = self._job()
        except Exception:  # report, never lose the worker silently
            log.exception("background work failed")
            result = None
        self._runner.finished.emit(self._deliver, result)


_LATER = QEvent.Type(QEvent.registerEventType())


class _Later(QEvent):
    """Runs ``fn()`` once the event loop reaches it (see :func:`after_paint`)."""

    def __init__(self, fn: Callable[[], None]):
        super().__init__(_LATER)
        self.fn = fn


def after_paint(receiver: QObject, fn: Callable[[], None]) -> None:
    """Call ``fn()`` on ``receiver``'s thread once the event loop turns again, after the
    events already posted, Qt's repaint requests among them (it is posted below their low
    priority). ``receiver.event`` must run a :class:`_Later` (:func:`run_later`)."""
    QCoreApplication.postEvent(receiver, _Later(fn), Qt.EventPriority.LowEventPriority.value - 1)


def run_later(event: QEvent) -> bool:
    """Run a :class:`_Later` event's function; False for any other event."""
    if isinstance(event, _Later):
        event.fn()
        return True
    return event.type() == _LATER


class Background(QObject):
    """The session's background runner (:data:`app.session.session.Background`): jobs run
    one at a time on a worker thread, in the order given, and each result is delivered on
    the UI thread by a queued signal. ``delivered`` tells when a result has been handed
    over (tests wait on it, never on a time)."""

    finished = Signal(object, object)
    delivered = Signal()

    def __init__(self, parent: QObject | None = None):
        super().__init__(parent)
        self._pool = QThreadPool(self)
        self._pool.setMaxThreadCount(1)
        self.finished.connect(self._hand_over, Qt.ConnectionType.QueuedConnection)
        self._queued = 0
        self._closed = False

    def __call__(self, job: Callable[[], Any], deliver: Callable[[Any], None]) -> None:
        """Run ``job()`` on the worker; call ``deliver(result)`` on the UI thread after.

        The job starts once the event loop turns again, after the events already posted
        (the repaint that shows the walk's next finding among them): a worker running
        Python shares the interpreter's lock with this thread, and started at once it
        would slow the very step that asked for it."""
        if not self._closed:
            self._queued += 1
            after_paint(self, lambda: self._start(_Task(self, job, deliver)))

    def _start(self, task: _Task) -> None:
        self._queued -= 1
        if not self._closed:
            self._pool.start(task)

    def event(self, event: QEvent) -> bool:
        return run_later(event) or super().event(event)

    def _hand_over(self, deliver: Callable[[Any], None], result: Any) -> None:
        if not self._closed:
            deliver(result)
        self.delivered.emit()

    def idle(self) -> bool:
        """True when no job is queued or running."""
        return self._queued == 0 and self._pool.activeThreadCount() == 0

    def shutdown(self) -> None:
        """Take no more jobs and wait for the one running (results are no longer delivered)."""
        self._closed = True
        self._pool.clear()
        self._pool.waitForDone()


def run_job(parent: QWidget, title: str, fn: Callable[[Progress], Any],
            on_done: Callable[[Any], None], on_error: Callable[[BaseException], None]) -> Job:
    """Start ``fn`` on a worker with a window-modal progress dialog that can cancel it.

    ``on_done(result)`` or ``on_error(error)`` runs on the UI thread afterwards; a cancelled
    job reports :class:`~app.errors.Cancelled` to ``on_error``.
    """
    dialog = QProgressDialog(title, "Cancel", 0, 0, parent)
    dialog.setWindowTitle("Posewright")
    dialog.setWindowModality(Qt.WindowModality.WindowModal)
    dialog.setMinimumDuration(400)
    dialog.setAutoClose(False)
    dialog.setAutoReset(False)
    job = Job(fn, parent)

    def show(done: int, total: int, label: str) -> None:
        dialog.setMaximum(max(total, 0))
        dialog.setValue(min(done, total) if total else 0)
        if label:
            dialog.setLabelText(f"{title}: {label}")

    def finish() -> None:
        dialog.close()
        dialog.deleteLater()
        job.deleteLater()

    job.progressed.connect(show)
    dialog.canceled.connect(job.cancel)
    job.succeeded.connect(on_done)
    job.failed.connect(on_error)
    job.finished.connect(finish)
    job.start()
    return job


def describe_error(exc: BaseException) -> str:
    """One line for the status bar or a message box."""
    if isinstance(exc, Cancelled):
        return f"{exc}; nothing was changed"
    if isinstance(exc, PosewrightError):
        return str(exc)
    return f"unexpected error: {exc!r}"


class _Fetch(QRunnable):
    def __init__(self, shelf: MapsShelf, frame_id: int, generation: int,
                 read: Callable[[], Any]):
        super().__init__()
        self._shelf, self._frame_id, self._generation, self._read = \
            shelf, frame_id, generation, read

    def run(self) -> None:
        try:
            maps = self._read()
        except Exception:  # the frame's maps are read again when asked for
            log.exception("reading the maps of frame %s ahead failed", self._frame_id)
            return
        self._shelf.fetched.emit(self._frame_id, self._generation, maps)


class MapsShelf(QObject):
    """The network maps of the last few frames the window showed or will show: the Owners
    ranking reads them on the UI thread, and a frame's maps file takes some 20 ms to read.
    :meth:`ahead` reads a frame's maps on a worker (the frame the walk goes to next) and
    the result lands on the UI thread; :meth:`clear` forgets them all (new maps were
    imported), and a read under way then lands nowhere."""

    fetched = Signal(int, int, object)

    def __init__(self, keep: int = 4, parent: QObject | None = None):
        super().__init__(parent)
        self._keep = keep
        self._held: OrderedDict[int, Any] = OrderedDict()
        self._asked: set[int] = set()
        self._generation = 0
        self._pool = QThreadPool(self)
        self._pool.setMaxThreadCount(1)
        self.fetched.connect(self._land, Qt.ConnectionType.QueuedConnection)

    def get(self, frame_id: int, read: Callable[[], Any]) -> Any:
        """The frame's maps, read now with ``read()`` unless held."""
        if frame_id in self._held:
            self._held.move_to_end(frame_id)
            return self._held[frame_id]
        maps = read()
        self._put(frame_id, maps)
        return maps

    def wants(self, frame_id: int) -> bool:
        """Whether the frame's maps are neither held nor being read."""
        return frame_id not in self._held and frame_id not in self._asked

    def ahead(self, frame_id: int, read: Callable[[], Any]) -> None:
        """Read the frame's maps on the worker, unless held or asked for already; the read
        starts after the repaint under way (:func:`after_paint`)."""
        if not self.wants(frame_id):
            return
        self._asked.add(frame_id)
        task = _Fetch(self, frame_id, self._generation, read)
        after_paint(self, lambda: self._pool.start(task))

    def event(self, event: QEvent) -> bool:
        return run_later(event) or super().event(event)

    def clear(self) -> None:
        self._held.clear()
        self._asked.clear()
        self._generation += 1

    def shutdown(self) -> None:
        self._generation += 1
        self._pool.clear()
        self._pool.waitForDone()

    def _land(self, frame_id: int, generation: int, maps: Any) -> None:
        self._asked.discard(frame_id)
        if generation == self._generation and frame_id not in self._held:
            self._put(frame_id, maps)

    def _put(self, frame_id: int, maps: Any) -> None:
        self._held[frame_id] = maps
        while len(self._held) > self._keep:
            self._held.popitem(last=False)
