"""One family of errors for everything Posewright refuses to do.

Every error carries a message that says what is wrong, where (file, record, field) and, when
there is one, what to do about it. The command line prints ``str(error)`` as one line and exits
with status 2; the desktop app shows it in a dialog.
"""

from __future__ import annotations


class PosewrightError(Exception):
    """Base of every error Posewright raises on purpose."""

    exit_status = 2


class BadInput(PosewrightError):
    """Input that cannot be used: a malformed file, a wrong field, an impossible value.

    Parameters
    ----------
    what
        What is wrong, in a sentence fragment ("visibility 3 is not one of 0, 1, 2").
    where
        The file, and where useful the record and field ("labels.json: annotations[12]
        (id 4410): field keypoints").
    hint
        What to do about it, if there is something useful to say.
    """

    def __init__(self, what: str, where: str | None = None, hint: str | None = None):
        self.what = what
        self.where = where
        self.hint = hint
        text = f"{where}: {what}" if where else what
        if hint:
            text = f"{text} ({hint})"
        super().__init__(text)

    def __reduce__(self) -> tuple[type, tuple[str, str | None, str | None]]:
        # Raised in a worker process and raised again in the one that waits for it.
        return (type(self), (self.what, self.where, self.hint))


class UnsupportedFormat(BadInput):
    """A file that is well formed but not one Posewright can read."""


class NotFound(PosewrightError):
    """A project, frame, person or file that does not exist."""


class ProjectLocked(PosewrightError):
    """The project is open for editing in another process; this one is read-only."""


class ReadOnly(PosewrightError):
    """An edit was attempted on a project opened read-only."""


class EditRefused(PosewrightError):
    """An edit that would make the labels inconsistent, refused with the reason."""


class ChangedMeanwhile(EditRefused):
    """An edit, undo or redo refused because what it would change no longer holds the value it
    was planned from: someone (or something) changed it in between. ``frame_id`` and
    ``target`` name what changed, so the store can say who changed it and when."""

    def __init__(self, message: str, frame_id: int | None = None, target: object = None):
        super().__init__(message)
        self.frame_id = frame_id
        self.target = target


class StorageFailed(PosewrightError):
    """The disk, the database or the database server refused to read or write (a full disk,
    an I/O error, a server that cannot be reached); the action in flight was not kept."""


class Cancelled(PosewrightError):
    """Long work stopped on request; nothing of it was kept."""
