"""The schema of a project, described once, and its forward migrations, for both databases.

Tables are described as data (:class:`Table`, :class:`Col`) and rendered for SQLite or
PostgreSQL by :func:`render` (the column kinds map to each database's types in
:mod:`app.store.db`). ``MIGRATIONS[n]`` takes a database from version ``n - 1`` to ``n``; a
folder project applies the missing ones on opening, each in its own transaction, and a hosted
project is made by applying all of them in the transaction that copies the project in
(:mod:`app.store.hosting`). A database of a newer version is refused, with nothing changed.

The version lives in ``PRAGMA user_version`` (SQLite) or in the ``meta`` row
``schema_version`` (PostgreSQL).

Layout:

- ``meta``: key/value facts about the project (its id, skeleton, COCO category, images folder,
  counters, and which folders of map runs the ``maps`` rows may name, see
  :mod:`app.store.recovery`).
- ``frames``: one row per image; ``path`` relative to the project folder (or absolute; for a
  hosted project, relative to the images root), ``file_name`` as it appears in COCO files,
  ``state`` in the correction loop, ``status`` of the image file (ok / missing / corrupt /
  oversized); ``grouping`` (v9) how the frame's auto-labels were grouped from the network's
  maps (``alone`` by ``import-maps`` and ``prelabel``, ``frame-before`` by ``import-maps
  --frame-before``; NULL when unknown: labels imported from COCO or drawn by hand), which
  chooses triage's weights.
- ``people``: one row per person; ``keypoints`` is the ``(K, 3)`` float64 array ``x, y, v`` as
  little-endian bytes (exact round trip of any JSON number), ``scores`` the ``(K,)`` float64
  model scores (NULL when none), ``sources`` a JSON list of per-joint provenance (NULL when every
  joint has the person's ``origin``), ``extra`` the imported fields kept for round trip;
  ``track`` (v6) the person's track in its sequence (NULL when not linked) and
  ``track_source`` who set it (``auto``, ``import`` or an author), see
  :class:`app.model.labels.Person`.
- ``ledger``: append-only; one row per atomic change, a ``group_id`` per user action. The
  change's target is in structured columns (v4): ``target_kind`` (person, joint, track, state,
  note, region, kept, dismissal, record), ``person_id``, ``joint``, ``item_id`` (note, region
  or reviewer's version) and ``target_key`` (what a bulk entry was about), see
  :mod:`app.model.targets`.
- ``undo_stack`` / ``redo_stack``: the groups that undo and redo act on next, kept in the
  database so that undo survives a restart; ``author`` (v4) owns the entry: empty in a folder
  project (one stack for whoever edits it), the annotator in a hosted project (each undoes
  their own actions).
- ``notes``: the review thread of each frame.
- ``triage`` (v2): each frame's suspicion score and its reasons (a JSON list), from
  ``posewright triage``; ``state`` (v8) the frame's state again, kept equal to it, so that
  the Worklist kept to one state walks an index (``triage_state_rank``).
- ``triage_kinds`` (v7): one row per frame and kind of reason its triage found, with the
  frame's score again, so that the Worklist filters by kind and counts the frames of each kind
  through an index (rewritten with the frame's ``triage`` row; derived, like it).
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
  decision on each frame (looks-right, query, ready; version 0.1.0 wrote agree,
  needs-change, signed-off, read as those), who made it and when.
- ``claims`` (v4): in a hosted project, the frame each annotator is working on and when the
  claim runs out (seconds since the epoch, server time).
- ``findings`` (v5): each frame's findings from the last triage, worst first (``position``),
  each a JSON object (:meth:`app.analysis.triage.findings.Finding.to_dict`); beside them in
  ``findings_state`` the digest of the labels they were computed from
  (:func:`app.analysis.triage.findings.labels_digest`), so that stale ones are recomputed.
  Derived data, replaced whenever triage runs, never in the ledger.
- ``dismissals`` (v5): findings dismissed as not a problem, keyed by the fingerprint of the
  labels they were about (``value``: kind, finding id, text, author, time). Written only by
  :class:`app.model.edits.DismissFinding` edits, so every dismissal is in the ledger and undo
  takes it back.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

from app.model.targets import parse_target, to_columns
from app.store.db import SQLITE, Dialect, Tx
from app.store.derived import kind_rows


@dataclass(frozen=True)
class Col:
    """A column: ``kind`` is ``key`` (an integer primary key we assign), ``serial`` (an
    integer primary key the database assigns when none is given), ``int``, ``real``, ``text``
    or ``blob``."""

    name: str
    kind: str
    null: bool = True
    default: str | None = None
    ref: str | None = None


@dataclass(frozen=True)
class Table:
    name: str
    cols: tuple[Col, ...]
    key: tuple[str, ...] = ()
    unique: tuple[tuple[str, ...], ...] = ()


@dataclass(frozen=True)
class Index:
    name: str
    table: str
    cols: tuple[str, ...]


def _c(name: str, kind: str, null: bool = True, default: str | None = None,
       ref: str | None = None) -> Col:
    return Col(name, kind, null, default, ref)


_FRAME_REF = "frames(id)"

META = Table("meta", (_c("key", "text", False), _c("value", "text", False)), key=("key",))
FRAMES = Table("frames", (
    _c("id", "key"), _c("path", "text", False), _c("file_name", "text", False),
    _c("width", "int", False), _c("height", "int", False),
    _c("state", "text", False, "'untouched'"), _c("status", "text", False, "'ok'"),
    _c("video_index", "int"), _c("timestamp", "real"), _c("extra", "text")),
    unique=(("path",),))
PEOPLE = Table("people", (
    _c("id", "key"), _c("frame_id", "int", False, ref=_FRAME_REF),
    _c("keypoints", "blob", False), _c("scores", "blob"), _c("sources", "text"),
    _c("origin", "text", False), _c("score", "real"), _c("extra", "text")))
LEDGER_V1 = Table("ledger", (
    _c("seq", "serial"), _c("group_id", "int", False), _c("kind", "text", False),
    _c("action", "text", False), _c("summary", "text", False, "''"),
    _c("author", "text", False), _c("time", "real", False), _c("frame_id", "int"),
    _c("target", "text", False), _c("before", "text"), _c("after", "text"),
    _c("reverts", "int")))
LEDGER = Table("ledger", (
    _c("seq", "serial"), _c("group_id", "int", False), _c("kind", "text", False),
    _c("action", "text", False), _c("summary", "text", False, "''"),
    _c("author", "text", False), _c("time", "real", False), _c("frame_id", "int"),
    _c("target_kind", "text", False), _c("person_id", "int"), _c("joint", "int"),
    _c("item_id", "int"), _c("target_key", "text"),
    _c("before", "text"), _c("after", "text"), _c("reverts", "int")))
UNDO = Table("undo_stack", (_c("pos", "serial"), _c("group_id", "int", False)))
REDO = Table("redo_stack", (_c("pos", "serial"), _c("group_id", "int", False)))
NOTES = Table("notes", (
    _c("id", "key"), _c("frame_id", "int", False, ref=_FRAME_REF), _c("person_id", "int"),
    _c("author", "text", False), _c("time", "real", False), _c("text", "text", False)))
REGIONS = Table("regions", (
    _c("id", "serial"), _c("frame_id", "int", False, ref=_FRAME_REF),
    _c("polygons", "text", False), _c("extra", "text")))
TRIAGE = Table("triage", (
    _c("frame_id", "int", False, ref=_FRAME_REF), _c("score", "real", False),
    _c("reasons", "text", False), _c("computed", "real", False)), key=("frame_id",))
TRIAGE_KINDS = Table("triage_kinds", (
    _c("frame_id", "int", False, ref=_FRAME_REF), _c("kind", "text", False),
    _c("score", "real", False)), key=("frame_id", "kind"))
MAPS = Table("maps", (
    _c("frame_id", "int", False, ref=_FRAME_REF), _c("path", "text", False),
    _c("stride", "int", False)), key=("frame_id",))
PACKETS = Table("packets", (
    _c("packet_id", "text", False), _c("direction", "text", False),
    _c("sha256", "text", False), _c("reviewer", "text", False, "''"),
    _c("time", "real", False), _c("frames", "text", False), _c("report", "text"),
    _c("audit", "text")), key=("packet_id", "direction", "sha256"))
ALTERNATIVES = Table("alternatives", (
    _c("id", "serial"), _c("frame_id", "int", False, ref=_FRAME_REF),
    _c("person_id", "int", False), _c("packet_id", "text", False),
    _c("reviewer", "text", False), _c("created", "real", False), _c("kind", "text", False),
    _c("base", "text"), _c("theirs", "text"), _c("kept", "text", False, "'[]'"),
    _c("retired", "real")), unique=(("packet_id", "frame_id", "person_id"),))
DECISIONS = Table("review_decisions", (
    _c("frame_id", "int", False, ref=_FRAME_REF), _c("decision", "text", False),
    _c("author", "text", False), _c("time", "real", False)), key=("frame_id",))
CLAIMS = Table("claims", (
    _c("frame_id", "int", False, ref=_FRAME_REF), _c("author", "text", False),
    _c("expires", "real", False)), key=("frame_id",))
FINDINGS = Table("findings", (
    _c("frame_id", "int", False, ref=_FRAME_REF), _c("position", "int", False),
    _c("id", "text", False), _c("kind", "text", False), _c("person_id", "int"),
    _c("confidence", "real", False), _c("data", "text", False)),
    key=("frame_id", "position"))
FINDINGS_STATE = Table("findings_state", (
    _c("frame_id", "int", False, ref=_FRAME_REF), _c("digest", "text", False),
    _c("computed", "real", False)), key=("frame_id",))
DISMISSALS = Table("dismissals", (
    _c("key", "text", False), _c("frame_id", "int", False, ref=_FRAME_REF),
    _c("value", "text", False)), key=("key",))

#: The tables of the current schema whose ``frame_id`` column names a frame (besides
#: ``frames.id``), for giving frames new ids.
FRAME_COLUMNS = ("people", "ledger", "notes", "regions", "triage", "maps", "alternatives",
                 "review_decisions", "claims", "findings", "findings_state", "dismissals",
                 "triage_kinds")


# ---------------------------------------------------------------------- migration steps

Step = Callable[[Tx], None]


def render_table(table: Table, dialect: Dialect, if_not_exists: bool = False,
                 name: str | None = None) -> str:
    """``CREATE TABLE`` for ``table`` in ``dialect``."""
    parts = []
    for col in table.cols:
        text = f"{col.name} {dialect.type_name(col.kind)}"
        if not col.null:
            text += " NOT NULL"
        if col.default is not None:
            text += f" DEFAULT {col.default}"
        if col.ref is not None:
            text += f" REFERENCES {col.ref} ON UPDATE CASCADE"
        parts.append(text)
    if table.key:
        parts.append(f"PRIMARY KEY ({', '.join(table.key)})")
    parts += [f"UNIQUE ({', '.join(u)})" for u in table.unique]
    exists = "IF NOT EXISTS " if if_not_exists else ""
    return f"CREATE TABLE {exists}{name or table.name} (\n    " + ",\n    ".join(parts) + "\n)"


def _create(*tables: Table, if_not_exists: bool = False) -> Step:
    def step(tx: Tx) -> None:
        for table in tables:
            tx.run(render_table(table, tx.dialect, if_not_exists))
    return step


def _index(*indexes: Index) -> Step:
    def step(tx: Tx) -> None:
        for ix in indexes:
            tx.run(f"CREATE INDEX IF NOT EXISTS {ix.name} ON {ix.table}({', '.join(ix.cols)})")
    return step


def columns(tx: Tx, table: str) -> list[str]:
    """The column names of ``table`` as the database has them."""
    if tx.hosted:
        return [r[0] for r in tx.rows(
            "SELECT column_name FROM information_schema.columns WHERE table_schema = "
            "current_schema() AND table_name = ? ORDER BY ordinal_position", (table,))]
    return [r[1] for r in tx.rows(f"PRAGMA table_info({table})")]


def _structured_ledger(tx: Tx) -> None:
    """Version 4: the ledger's text targets become structured columns (parsed once here;
    rebuilt as a new table, the portable way to drop a column)."""
    if "target_kind" in columns(tx, "ledger"):
        return  # a database whose version was set back (tests stand in for old projects)
    tx.run(render_table(LEDGER, tx.dialect, name="ledger_v4"))
    rows = tx.rows("SELECT seq, group_id, kind, action, summary, author, time, frame_id, "
                   "target, before, after, reverts FROM ledger ORDER BY seq")
    tx.run_many(
        "INSERT INTO ledger_v4 (seq, group_id, kind, action, summary, author, time, frame_id, "
        "target_kind, person_id, joint, item_id, target_key, before, after, reverts) "
        "VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)",
        [(*r[:8], *to_columns(parse_target(r[8])), *r[9:]) for r in rows])
    tx.run("DROP TABLE ledger")
    tx.run("ALTER TABLE ledger_v4 RENAME TO ledger")
    if tx.hosted and rows:
        tx.run("SELECT setval(pg_get_serial_sequence('ledger', 'seq'), ?)",
               (max(r[0] for r in rows),))


def _stack_owners(tx: Tx) -> None:
    for table in ("undo_stack", "redo_stack"):
        if "author" not in columns(tx, table):
            tx.run(f"ALTER TABLE {table} ADD COLUMN author TEXT NOT NULL DEFAULT ''")


def _counters(tx: Tx) -> None:
    """PostgreSQL hands out ids from sequences, so that annotators never wait on each other
    for one (a folder project keeps its counters in ``meta``)."""
    if not tx.hosted:
        return
    for name in ("person_ids", "note_ids", "group_ids"):
        tx.run(f"CREATE SEQUENCE IF NOT EXISTS {name}")


_V1 = [
    _create(META, FRAMES),
    _index(Index("frames_file_name", "frames", ("file_name",))),
    _create(PEOPLE),
    _index(Index("people_frame", "people", ("frame_id",))),
    _create(LEDGER_V1),
    _index(Index("ledger_frame", "ledger", ("frame_id", "seq")),
           Index("ledger_group", "ledger", ("group_id",))),
    _create(UNDO, REDO, NOTES),
    _index(Index("notes_frame", "notes", ("frame_id",))),
    _create(REGIONS),
    _index(Index("regions_frame", "regions", ("frame_id",))),
]
# Version 2: derived data kept for the Worklist and the Owners panel. Neither is part of the
# labels, so neither goes through the ledger; both can be recomputed at any time.
_V2 = [_create(TRIAGE, MAPS)]
# Version 3: review packets (app/review). Packets and alternatives are written in the same
# transactions as the ledger rows that report them; decisions live only in review projects.
# IF NOT EXISTS, so that a database whose version number was set back while it kept these
# tables (as tests/store does to stand in for an old project) still migrates.
_V3 = [
    _create(PACKETS, ALTERNATIVES, if_not_exists=True),
    _index(Index("alternatives_frame", "alternatives", ("frame_id",))),
    _create(DECISIONS, if_not_exists=True),
]
# Version 4: one schema for both databases: structured ledger targets, undo stacks per author,
# claims on frames, ids from sequences on a server, and the indexes a lazily fetching
# Worklist sorts and filters with.
_V4 = [
    _structured_ledger,
    _index(Index("ledger_frame", "ledger", ("frame_id", "seq")),
           Index("ledger_group", "ledger", ("group_id",)),
           Index("ledger_target", "ledger", ("frame_id", "target_kind", "person_id", "joint"))),
    _stack_owners,
    _create(CLAIMS, if_not_exists=True),
    _index(Index("frames_state", "frames", ("state",)),
           Index("triage_score", "triage", ("score",))),
    _counters,
]

# Version 5: findings with proposed fixes (derived, like triage) and their dismissals
# (written by edits, so in the ledger).
_V5 = [
    _create(FINDINGS, FINDINGS_STATE, DISMISSALS, if_not_exists=True),
    _index(Index("dismissals_frame", "dismissals", ("frame_id",))),
]


def _track_columns(tx: Tx) -> None:
    have = columns(tx, "people")
    if "track" not in have:
        tx.run("ALTER TABLE people ADD COLUMN track " + tx.dialect.type_name("int"))
    if "track_source" not in have:
        tx.run("ALTER TABLE people ADD COLUMN track_source " + tx.dialect.type_name("text"))


# Version 6: sequences. A person's track (who they are across a sequence's frames) is a label
# of its own, changed by edits (so in the ledger) or written whole by linking.
_V6 = [
    _track_columns,
    _index(Index("people_track", "people", ("track",))),
]



def _fill_triage_kinds(tx: Tx) -> None:
    """Version 7: the kinds of every stored triage result, read once from its reasons."""
    tx.run("DELETE FROM triage_kinds")
    tx.run_many("INSERT INTO triage_kinds (frame_id, kind, score) VALUES (?, ?, ?)",
                kind_rows(tx.rows("SELECT frame_id, score, reasons FROM triage")))


# Version 7: a Worklist that reads only the rows in view filters by reason kind and counts the
# frames of each kind in the database. Its order (score descending, then frame id) is the
# order of two indexes, so that both databases walk a page straight off them, with no sort.
_V7 = [
    _create(TRIAGE_KINDS, if_not_exists=True),
    _index(Index("triage_kinds_rank", "triage_kinds", ("kind", "score DESC", "frame_id")),
           Index("triage_rank", "triage", ("score DESC", "frame_id"))),
    _fill_triage_kinds,
]



def _triage_state(tx: Tx) -> None:
    """Version 8: each triage row keeps its frame's state."""
    if "state" not in columns(tx, "triage"):
        tx.run("ALTER TABLE triage ADD COLUMN state " + tx.dialect.type_name("text")
               + " NOT NULL DEFAULT 'untouched'")
    tx.run("UPDATE triage SET state = (SELECT state FROM frames WHERE frames.id = "
           "triage.frame_id)")


# Version 8: the Worklist kept to one state walks that state's triaged frames in suspicion
# order off an index, rather than joining the frames and sorting nearly all of them.
_V8 = [
    _triage_state,
    _index(Index("triage_state_rank", "triage", ("state", "score DESC", "frame_id"))),
]


def _grouping_column(tx: Tx) -> None:
    """Version 9: each frame records how its auto-labels were grouped (NULL: no record)."""
    if "grouping" not in columns(tx, "frames"):
        tx.run("ALTER TABLE frames ADD COLUMN grouping " + tx.dialect.type_name("text"))


# Version 9: triage weighs labels grouped each frame alone and labels grouped with the frame
# before by different weights, and skips what cannot speak on the former.
_V9: list[Step] = [_grouping_column]

#: ``MIGRATIONS[n]`` takes the schema from version ``n - 1`` to ``n``.
MIGRATIONS: dict[int, list[Step]] = {1: _V1, 2: _V2, 3: _V3, 4: _V4, 5: _V5, 6: _V6, 7: _V7,
                                     8: _V8, 9: _V9}
SCHEMA_VERSION = max(MIGRATIONS)


def schema_version(tx: Tx) -> int:
    """The version of the database's schema (0 for an empty database)."""
    if not tx.hosted:
        return int(tx.value("PRAGMA user_version", default=0))
    if tx.value("SELECT to_regclass('meta')") is None:
        return 0
    return int(tx.value("SELECT value FROM meta WHERE key = 'schema_version'", default=0))


def set_version(tx: Tx, version: int) -> None:
    if tx.hosted:
        tx.run("INSERT INTO meta (key, value) VALUES ('schema_version', ?) ON CONFLICT (key) "
               "DO UPDATE SET value = excluded.value", (str(version),))
    else:
        tx.run(f"PRAGMA user_version = {int(version)}")


def apply_migration(tx: Tx, n: int) -> None:
    """Take the schema from version ``n - 1`` to ``n`` inside the transaction ``tx``."""
    for step in MIGRATIONS[n]:
        step(tx)
    set_version(tx, n)


def migrate_sqlite(conn: object, target: int = SCHEMA_VERSION) -> int:
    """Apply the missing migrations of a folder project up to ``target``, each in its own
    ``BEGIN IMMEDIATE`` transaction; returns the version reached. ``conn`` is an SQLite
    connection in autocommit mode."""
    import sqlite3

    assert isinstance(conn, sqlite3.Connection)
    cursor = conn.cursor()
    tx = Tx(cursor, SQLITE, writing=True)
    try:
        version = schema_version(tx)
        for n in range(version + 1, target + 1):
            conn.execute("BEGIN IMMEDIATE")
            try:
                apply_migration(tx, n)
                conn.execute("COMMIT")
            except BaseException:
                if conn.in_transaction:  # SQLite may have rolled back already (a full disk)
                    conn.execute("ROLLBACK")
                raise
            version = n
    finally:
        cursor.close()
    return version
