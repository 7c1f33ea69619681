"""How many frames a folder project holds (and, for ``import-maps``, which), read before the
rest of the store is imported.

A batch command asks for its workers' fork server as soon as it knows the job is large
(:func:`app.parallel.head_start`), so that the server's imports run beside its own. Opening the
project first means importing the store, the model, numpy, pydantic and OpenCV (0.3-0.5 s of
CPU); this module imports only :mod:`sqlite3`, so ``prelabel`` and ``triage`` know their size
within a tenth of a second of their start, and ``import-maps`` hands its pool the first
frames to group before it opens the project (:func:`map_frames_hint`). Hints only: the
project is opened as usual afterwards (locks, recovery, checks), and anything unexpected here
gives None, never an error.
"""

from __future__ import annotations

import contextlib
import json
import sqlite3
from collections.abc import Iterator
from pathlib import Path
from typing import Any

__all__ = ["frame_count_hint", "map_frames_hint"]

#: :data:`app.store.project.DB_NAME`, which this module must not import
#: (``tests/store/test_peek.py`` checks that the two agree).
DB_NAME = "project.db"


def frame_count_hint(place: str | Path) -> int | None:
    """The number of frames of the folder project at ``place``, read-only; None for a project
    on a server, a folder without a project, or a database that does not answer at once."""
    try:
        with _reading(place) as con:
            row = con.execute("SELECT count(*) FROM frames").fetchone()
    except (sqlite3.Error, OSError, ValueError):
        return None
    return int(row[0]) if row and isinstance(row[0], int) else None


#: A frame as :func:`map_frames_hint` reads it: id, file name, width, height, status, path and
#: index in its video (None for an image): what a frame's sequence and place in it need
#: (:mod:`app.model.sequences`).
FrameRow = tuple[int, str, int, int, str, str, "int | None"]


def map_frames_hint(place: str | Path
                    ) -> tuple[dict[str, Any], list[FrameRow], set[int], str | None] | None:
    """What ``import-maps`` needs to tell its first items before it opens the folder project
    at ``place`` (:func:`app.parallel.early_pool`), read-only: the skeleton as stored (the
    shape of :meth:`app.model.skeleton.Skeleton.to_dict`), every frame by id, the ids of
    the frames that have people, and the folders marked not a sequence as stored (the
    setting :data:`app.model.sequences.NOT_SEQUENCES`; None when unset); None as for
    :func:`frame_count_hint`. A guess only: the job checks its items against the project it
    opens."""
    try:
        with _reading(place) as con:
            row = con.execute("SELECT value FROM meta WHERE key = 'skeleton'").fetchone()
            frames: list[FrameRow] = [
                (int(r[0]), str(r[1]), int(r[2]), int(r[3]), str(r[4]), str(r[5]),
                 None if r[6] is None else int(r[6])) for r in con.execute(
                    "SELECT id, file_name, width, height, status, path, video_index FROM frames "
                    "ORDER BY id")]
            people = {int(r[0]) for r in con.execute("SELECT DISTINCT frame_id FROM people")}
            marked = con.execute("SELECT value FROM meta WHERE key = 'not_sequences'").fetchone()
        skeleton = json.loads(row[0]) if row else None
    except (sqlite3.Error, OSError, ValueError, TypeError):
        return None
    if not isinstance(skeleton, dict):
        return None
    return skeleton, frames, people, None if marked is None else str(marked[0])


@contextlib.contextmanager
def _reading(place: str | Path) -> Iterator[sqlite3.Connection]:
    """The folder project's database at ``place``, read-only, waiting at most a tenth of a
    second for a lock (OSError when there is none)."""
    db = Path(place) / DB_NAME
    if not db.is_file():
        raise FileNotFoundError(db)
    uri = f"{db.resolve().as_uri()}?mode=ro"
    with contextlib.closing(sqlite3.connect(uri, uri=True, timeout=0.1)) as con:
        yield con
