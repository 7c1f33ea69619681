"""How many frames a folder project holds, read before the rest of the store is imported.

A batch command asks for its workers' fork server as soon as it knows the job is large
(:func:`app.parallel.head_start`), so that the server's imports run beside its own. Opening the
project first means importing the store, the model, numpy, pydantic and OpenCV (0.3-0.5 s of
CPU); this module imports only :mod:`sqlite3`, so ``prelabel`` and ``triage`` know their size
within a tenth of a second of their start. A count only: the project is opened as usual
afterwards (locks, recovery, checks), and anything unexpected here gives None, never an error.
"""

from __future__ import annotations

import contextlib
import sqlite3
from pathlib import Path

__all__ = ["frame_count_hint"]

#: :data:`app.store.project.DB_NAME`, which this module must not import
#: (``tests/store/test_peek.py`` checks that the two agree).
DB_NAME = "project.db"


def frame_count_hint(place: str | Path) -> int | None:
    """The number of frames of the folder project at ``place``, read-only; None for a project
    on a server, a folder without a project, or a database that does not answer at once."""
    db = Path(place) / DB_NAME
    try:
        if not db.is_file():
            return None
        uri = f"{db.resolve().as_uri()}?mode=ro"
        with contextlib.closing(sqlite3.connect(uri, uri=True, timeout=0.1)) as con:
            row = con.execute("SELECT count(*) FROM frames").fetchone()
    except (sqlite3.Error, OSError, ValueError):
        return None
    return int(row[0]) if row and isinstance(row[0], int) else None
