"""Work in flight beside its destination: claimed while it is written, swept once abandoned.

Whole-file and whole-folder writes go to a temporary name beside their destination
(``NAME.<8 random characters>.tmp`` for a file, ``NAME.<8 random characters>.partial`` for a
folder, as :func:`tempfile.mkstemp` and :func:`tempfile.mkdtemp` make them) and are renamed
over it at the end, so a reader never sees half of one. A process killed before the rename
leaves its temporary behind. While it works, the writer holds an advisory lock (``flock``) on
its temporary, which the system drops when the writer dies, however it dies; the next write to
the same destination removes every temporary that no live process holds and says so in one
log line. Another process writing the same destination at the same time keeps its own.

On systems without ``flock`` nothing can tell an abandoned temporary from a live one, so
nothing is removed there.

Examples
--------
>>> import tempfile
>>> folder = Path(tempfile.mkdtemp())
>>> _ = (folder / "labels.json.k3x9q0ab.tmp").write_text("{")   # left by a killed writer
>>> [p.name for p in sweep(folder / "labels.json", ".tmp")]
['labels.json.k3x9q0ab.tmp']
"""

from __future__ import annotations

import logging
import os
import re
import shutil
from pathlib import Path
from types import TracebackType

try:
    import fcntl
except ImportError:  # Windows
    fcntl = None  # type: ignore[assignment]

log = logging.getLogger(__name__)

__all__ = ["Claim", "sweep"]

# tempfile's random part: eight of these characters.
_RANDOM = r"[a-z0-9_]{8}"


class Claim:
    """Hold an advisory lock on ``path`` (a file or a folder) until :meth:`release`, or the
    end of a ``with`` block, or the death of this process."""

    def __init__(self, path: str | Path):
        self._fd: int | None = None
        if fcntl is None:
            return
        self._fd = os.open(path, os.O_RDONLY)
        try:
            fcntl.flock(self._fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError:
            # Taken between its creation and here by a sweep that believed it abandoned: the
            # temporary is being removed, and the write will fail on its own.
            self.release()

    def release(self) -> None:
        if self._fd is not None:
            os.close(self._fd)
            self._fd = None

    def __enter__(self) -> Claim:
        return self

    def __exit__(self, kind: type[BaseException] | None, exc: BaseException | None,
                 tb: TracebackType | None) -> None:
        self.release()


def sweep(destination: str | Path, suffix: str) -> list[Path]:
    """Remove the abandoned temporaries of ``destination`` (``NAME.<random><suffix>`` beside
    it, that no live process holds); returns them.

    Parameters
    ----------
    destination
        The file or folder that a write is about to replace.
    suffix
        ``".tmp"`` for files, ``".partial"`` for folders.
    """
    destination = Path(destination)
    folder = destination.parent if str(destination.parent) else Path(".")
    if fcntl is None or not folder.is_dir():
        return []
    pattern = re.compile(re.escape(destination.name) + r"\." + _RANDOM + re.escape(suffix))
    removed = []
    with os.scandir(folder) as entries:
        candidates = sorted(Path(e.path) for e in entries if pattern.fullmatch(e.name))
    for path in candidates:
        if _remove_if_abandoned(path):
            removed.append(path)
    if removed:
        log.warning("removed what an interrupted run left beside %s: %s", destination,
                    ", ".join(p.name for p in removed))
    return removed


def _remove_if_abandoned(path: Path) -> bool:
    assert fcntl is not None
    try:
        fd = os.open(path, os.O_RDONLY | getattr(os, "O_NOFOLLOW", 0))
    except OSError:
        return False  # gone already, or not ours to open
    try:
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError:
            return False  # a live writer holds it
        if path.is_dir() and not path.is_symlink():
            shutil.rmtree(path, ignore_errors=True)
        else:
            path.unlink(missing_ok=True)
        return True
    finally:
        os.close(fd)
