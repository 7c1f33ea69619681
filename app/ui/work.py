"""Long work off the UI thread: a worker thread, a progress dialog, and Cancel.

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
from collections.abc import Callable
from typing import Any

from PySide6.QtCore import QObject, Qt, QThread, Signal
from PySide6.QtWidgets import QProgressDialog, QWidget

from app.errors import Cancelled, PosewrightError
from app.progress import Progress

log = logging.getLogger(__name__)


class Job(QThread):
    """Run ``fn(progress)`` on a worker thread."""

    progressed = Signal(int, int, str)
    succeeded = Signal(object)
    failed = Signal(object)

    def __init__(self, fn: Callable[[Progress], Any], parent: QObject | None = None):
        super().__init__(parent)
        self._fn = fn
        self.cancel_event = threading.Event()

    def run(self) -> None:
        progress = Progress(lambda d, t, label: self.progressed.emit(int(d), int(t), label),
                            self.cancel_event)
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
