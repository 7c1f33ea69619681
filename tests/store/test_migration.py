"""An older folder project opens and migrates forward: its ledger's text targets become
structured columns, its history reads the same, and its undo stack still works.

The old project is written here as Posewright wrote schema 3 (the table definitions below are
copied from that version's schema module); its rows are synthetic.
"""

import json
import sqlite3

import numpy as np

from app.jobs import export_coco
from app.model import JointTarget, MoveJoint, PersonTarget, RecordTarget, StateTarget
from app.model.skeleton import coco_body
from app.store import Project
from app.store.schema import SCHEMA_VERSION

SCHEMA_3 = """
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


def _old_project(folder):
    """A schema-3 project: one frame, one person placed by hand, then moved and undone
    once, as the ledger of that version recorded it (text targets, one shared stack)."""
    folder.mkdir()
    conn = sqlite3.connect(folder / "project.db", isolation_level=None)
    conn.executescript(SCHEMA_3)
    conn.execute("PRAGMA user_version = 3")
    skeleton = coco_body()
    meta = {"project_id": "old-1", "created": "1.0", "skeleton": json.dumps(skeleton.to_dict()),
            "images_root": "", "next_person_id": "2", "next_note_id": "1",
            "next_group_id": "5"}
    conn.executemany("INSERT INTO meta VALUES (?, ?)", meta.items())
    conn.execute("INSERT INTO frames (id, path, file_name, width, height, state) "
                 "VALUES (1, 'a.jpg', 'a.jpg', 100, 80, 'corrected')")
    kp = np.zeros((17, 3))
    kp[:, 0], kp[:, 1], kp[:, 2] = np.arange(17.0), 5.0, 2
    kp[9, :2] = (40.0, 30.0)
    conn.execute("INSERT INTO people VALUES (1, 1, ?, NULL, NULL, 'ana', NULL, NULL)",
                 (kp.astype("<f8").tobytes(),))
    joint_before = [9.0, 5.0, 2, None, "ana"]
    joint_after = [40.0, 30.0, 2, None, "ana"]
    person = {"keypoints": [[float(j), 5.0, 2] for j in range(17)], "scores": [None] * 17,
              "sources": ["ana"] * 17, "score": None, "extra": {}}
    rows = [
        (1, 1, "import", "ImportCoco", "import dataset labels.json", "ana", 10.0, None,
         "file:labels.json", None, json.dumps({"people": 0})),
        (2, 2, "edit", "NewPerson", "new person 1", "ana", 11.0, 1, "person:1",
         "null", json.dumps(person)),
        (3, 2, "edit", "NewPerson", "new person 1", "ana", 11.0, 1, "state",
         json.dumps("untouched"), json.dumps("corrected")),
        (4, 3, "edit", "MoveJoint", "move joint 9", "ana", 12.0, 1, "person:1/joint:9",
         json.dumps(joint_before), json.dumps(joint_after)),
    ]
    conn.executemany("INSERT INTO ledger (seq, group_id, kind, action, summary, author, time, "
                     "frame_id, target, before, after) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)",
                     rows)
    conn.executemany("INSERT INTO undo_stack (group_id) VALUES (?)", [(2,), (3,)])
    conn.close()


def test_a_schema_3_project_migrates_its_ledger_to_structured_targets(tmp_path):
    folder = tmp_path / "old"
    _old_project(folder)
    # opened read-only it is not migrated, and its frames still read (no grouping recorded)
    with Project.open(folder, read_only=True) as p:
        assert p.frames() and all(f.grouping is None for f in p.frames())
        assert p.groupings() == {}
    with Project.open(folder, author="ben") as p:
        entries = list(reversed(p.history()))
        assert [e.target for e in entries] == [
            RecordTarget("file:labels.json"), PersonTarget(1), StateTarget(),
            JointTarget(1, 9)]
        assert [str(e.target) for e in entries] == [
            "file:labels.json", "person:1", "state", "person:1/joint:9"]
        assert entries[3].before[:2] == [9.0, 5.0] and entries[3].after[:2] == [40.0, 30.0]
        # The old shared stack still undoes the move, whoever opens the project.
        assert p.undo() is not None
        assert p.people(1)[0].keypoints[9, :2].tolist() == [9.0, 5.0]
        p.apply(MoveJoint(1, 1, 9, 41.0, 31.0))
        assert p.history(limit=1)[0].target == JointTarget(1, 9)
        export_coco(p, tmp_path / "out.json", states=None)
        # schema 9: no frame of an old project records how its labels were grouped
        assert [f.grouping for f in p.frames()] == [None] * len(p.frames())
    conn = sqlite3.connect(folder / "project.db")
    columns = [r[1] for r in conn.execute("PRAGMA table_info(ledger)")]
    assert conn.execute("PRAGMA user_version").fetchone()[0] == SCHEMA_VERSION
    conn.close()
    assert "target" not in columns and {"target_kind", "person_id", "joint"} <= set(columns)
