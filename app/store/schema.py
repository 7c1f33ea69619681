"""The SQLite schema of a project and its forward migrations.

The schema version lives in ``PRAGMA user_version``. Each migration takes the database from
version ``n - 1`` to ``n`` inside one transaction; opening an older project applies the missing
ones in order, opening a newer one is refused (nothing is changed).

Layout:

- ``meta``: key/value facts about the project (its id, skeleton, COCO category, images folder,
  and which folders of map runs the ``maps`` rows may name, see :mod:`app.store.recovery`).
- ``frames``: one row per image; ``path`` relative to the project folder (or absolute),
  ``file_name`` as it appears in COCO files, ``state`` in the correction loop, ``status`` of
  the image file (ok / missing / corrupt / oversized).
- ``people``: one row per person; ``keypoints`` is the ``(K, 3)`` float64 array ``x, y, v`` as
  little-endian bytes (exact round trip of any JSON number), ``scores`` the ``(K,)`` float64
  model scores (NULL when none), ``sources`` a JSON list of per-joint provenance (NULL when every
  joint has the person's ``origin``), ``extra`` the imported fields kept for round trip.
- ``ledger``: append-only; one row per atomic change, a ``group_id`` per user action.
- ``undo_stack`` / ``redo_stack``: the groups that undo and redo act on next, kept in the
  database so that undo survives a restart.
- ``notes``: the review thread of each frame.
- ``triage`` (v2): each frame's suspicion score and its reasons (a JSON list), from
  ``posewright triage``.
- ``maps`` (v2): where each frame's network maps (``.npz``) are, relative to the project folder,
  and their stride.
- ``regions``: ignore regions (people too small or too packed to label), polygons in image
  pixels (``polygons``: a JSON list of flat ``[x0, y0, x1, y1, ...]`` lists); imported from
  and exported to COCO crowd annotations (``iscrowd: 1``).
- ``packets`` (v3): review packets this project sent out (``direction`` ``exported``, with
  the SHA-256 of the base labels it sent) and returns it merged (``merged``, with the SHA-256
  of the returned labels and decisions, so merging the same return again changes nothing),
  the frames, the reviewer, a JSON ``report`` and, for returns, the reviewer's ledger rows
  (``audit``).
- ``alternatives`` (v3): the reviewer's version of a person whose merge conflicted
  (``theirs``, a person value, NULL when the reviewer deleted the person; ``base`` likewise),
  kept for settling; ``kind`` is ``joints``, ``deleted-here`` or ``deleted-there``; ``kept``
  lists the joints settled by keeping ours; ``retired`` is set when a later merge of a frame
  that was no longer disputed replaced them.
- ``review_decisions`` (v3): in a project opened from a review packet, the reviewer's
  decision on each frame (agree, needs-change, signed-off), who made it and when.
"""

from __future__ import annotations

import sqlite3

SCHEMA_VERSION = 3

_V1 = """
CREATE TABLE meta (
    key   TEXT PRIMARY KEY,
    value TEXT NOT NULL
);
CREATE TABLE frames (
    id          INTEGER PRIMARY KEY,
    path        TEXT NOT NULL UNIQUE,
    file_name   TEXT NOT NULL,
    width       INTEGER NOT NULL,
    height      INTEGER NOT NULL,
    state       TEXT NOT NULL DEFAULT 'untouched',
    status      TEXT NOT NULL DEFAULT 'ok',
    video_index INTEGER,
    timestamp   REAL,
    extra       TEXT
);
CREATE INDEX frames_file_name ON frames(file_name);
CREATE TABLE people (
    id        INTEGER PRIMARY KEY,
    frame_id  INTEGER NOT NULL REFERENCES frames(id) ON UPDATE CASCADE,
    keypoints BLOB NOT NULL,
    scores    BLOB,
    sources   TEXT,
    origin    TEXT NOT NULL,
    score     REAL,
    extra     TEXT
);
CREATE INDEX people_frame ON people(frame_id);
CREATE TABLE ledger (
    seq      INTEGER PRIMARY KEY,
    group_id INTEGER NOT NULL,
    kind     TEXT NOT NULL,
    action   TEXT NOT NULL,
    summary  TEXT NOT NULL DEFAULT '',
    author   TEXT NOT NULL,
    time     REAL NOT NULL,
    frame_id INTEGER,
    target   TEXT NOT NULL,
    before   TEXT,
    after    TEXT,
    reverts  INTEGER
);
CREATE INDEX ledger_frame ON ledger(frame_id, seq);
CREATE INDEX ledger_group ON ledger(group_id);
CREATE TABLE undo_stack (pos INTEGER PRIMARY KEY, group_id INTEGER NOT NULL);
CREATE TABLE redo_stack (pos INTEGER PRIMARY KEY, group_id INTEGER NOT NULL);
CREATE TABLE notes (
    id        INTEGER PRIMARY KEY,
    frame_id  INTEGER NOT NULL REFERENCES frames(id) ON UPDATE CASCADE,
    person_id INTEGER,
    author    TEXT NOT NULL,
    time      REAL NOT NULL,
    text      TEXT NOT NULL
);
CREATE INDEX notes_frame ON notes(frame_id);
CREATE TABLE regions (
    id       INTEGER PRIMARY KEY,
    frame_id INTEGER NOT NULL REFERENCES frames(id) ON UPDATE CASCADE,
    polygons TEXT NOT NULL,
    extra    TEXT
);
CREATE INDEX regions_frame ON regions(frame_id);
"""

# Version 2: derived data kept for the Worklist and the Owners panel. Neither is part of the
# labels, so neither goes through the ledger; both can be recomputed at any time.
_V2 = """
CREATE TABLE triage (
    frame_id INTEGER PRIMARY KEY REFERENCES frames(id) ON UPDATE CASCADE,
    score    REAL NOT NULL,
    reasons  TEXT NOT NULL,
    computed REAL NOT NULL
);
CREATE TABLE maps (
    frame_id INTEGER PRIMARY KEY REFERENCES frames(id) ON UPDATE CASCADE,
    path     TEXT NOT NULL,
    stride   INTEGER NOT NULL
);
"""

# Version 3: review packets (app/review). Packets and alternatives are written in the same
# transactions as the ledger rows that report them; decisions live only in review projects.
# IF NOT EXISTS, so that a database whose version number was set back while it kept these
# tables (as tests/store does to stand in for an old project) still migrates.
_V3 = """
CREATE TABLE IF NOT EXISTS packets (
    packet_id TEXT NOT NULL,
    direction TEXT NOT NULL,
    sha256    TEXT NOT NULL,
    reviewer  TEXT NOT NULL DEFAULT '',
    time      REAL NOT NULL,
    frames    TEXT NOT NULL,
    report    TEXT,
    audit     TEXT,
    PRIMARY KEY (packet_id, direction, sha256)
);
CREATE TABLE IF NOT EXISTS alternatives (
    id        INTEGER PRIMARY KEY,
    frame_id  INTEGER NOT NULL REFERENCES frames(id) ON UPDATE CASCADE,
    person_id INTEGER NOT NULL,
    packet_id TEXT NOT NULL,
    reviewer  TEXT NOT NULL,
    created   REAL NOT NULL,
    kind      TEXT NOT NULL,
    base      TEXT,
    theirs    TEXT,
    kept      TEXT NOT NULL DEFAULT '[]',
    retired   REAL,
    UNIQUE (packet_id, frame_id, person_id)
);
CREATE INDEX IF NOT EXISTS alternatives_frame ON alternatives(frame_id);
CREATE TABLE IF NOT EXISTS review_decisions (
    frame_id INTEGER PRIMARY KEY REFERENCES frames(id) ON UPDATE CASCADE,
    decision TEXT NOT NULL,
    author   TEXT NOT NULL,
    time     REAL NOT NULL
);
"""

#: ``MIGRATIONS[n]`` takes the schema from version ``n - 1`` to ``n``.
MIGRATIONS: dict[int, str] = {1: _V1, 2: _V2, 3: _V3}


def schema_version(conn: sqlite3.Connection) -> int:
    return int(conn.execute("PRAGMA user_version").fetchone()[0])


def migrate(conn: sqlite3.Connection, target: int = SCHEMA_VERSION) -> int:
    """Apply the missing migrations up to ``target``, each in its own transaction.

    Returns the version reached. The connection must be in autocommit mode
    (``isolation_level=None``).
    """
    version = schema_version(conn)
    for n in range(version + 1, target + 1):
        conn.execute("BEGIN IMMEDIATE")
        try:
            for statement in _statements(MIGRATIONS[n]):
                conn.execute(statement)
            conn.execute(f"PRAGMA user_version = {n}")
            conn.execute("COMMIT")
        except BaseException:
            if conn.in_transaction:  # SQLite may have rolled back already (a full disk)
                conn.execute("ROLLBACK")
            raise
        version = n
    return version


def _statements(script: str) -> list[str]:
    return [s.strip() for s in script.split(";") if s.strip()]
