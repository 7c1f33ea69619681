"""The store: durable edits, undo and redo through the ledger, locking, migrations."""

import json
import os
import sqlite3
import subprocess
import sys
import textwrap
import time

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from app.errors import BadInput, EditRefused, NotFound, ReadOnly
from app.jobs import new_project
from app.model import (
    AddNote,
    AddRegion,
    DeletePerson,
    DeleteRegion,
    FrameState,
    JointTarget,
    MergePeople,
    MoveJoint,
    NewPerson,
    ReassignJoint,
    ReshapeRegion,
    SetFrameState,
    SetVisibility,
    SplitPerson,
    SwapSides,
)
from app.store import Project
from app.store.frames import FrameQuery, NewFrame
from app.store.schema import SCHEMA_VERSION
from tests.conftest import place

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))


def _snapshot(p):
    return {f.id: (p.labels(f.id), f.state) for f in p.frames()}


def _same(a, b):
    return a.keys() == b.keys() and all(a[k][0].same_as(b[k][0]) and a[k][1] == b[k][1]
                                        for k in a)


def test_create_registers_images_with_sizes(project, image_dir):
    frames = project.frames()
    assert [f.id for f in frames] == [1, 2, 3, 4, 5, 6]
    assert all((f.width, f.height, f.status) == (320, 240, "ok") for f in frames)
    assert frames[0].file_name == "frame_0000.jpg"
    assert project.image_path(frames[0]).resolve() == (image_dir / "frame_0000.jpg").resolve()


def test_corrupt_and_unreadable_images_are_marked_not_fatal(tmp_path, image_dir):
    (image_dir / "broken.png").write_bytes(b"\x89PNG not really")
    with new_project(tmp_path / "p2", images=image_dir) as p:
        broken = p.find_frame("broken.png")
        assert broken.status == "corrupt" and broken.width == 0


def test_create_refuses_existing_project(project, tmp_path):
    with pytest.raises(BadInput, match="already exists"):
        Project.create(tmp_path / "proj")


def test_open_missing_project_says_how_to_make_one(tmp_path):
    with pytest.raises(NotFound, match="posewright new"):
        Project.open(tmp_path)


def test_edits_survive_reopen_with_ledger(project, tmp_path):
    pid = project.apply(NewPerson(2)).edit.person_id
    project.apply(MoveJoint(2, pid, 9, 33.5, 44.0))
    project.apply(AddNote(2, "wrist belongs to the dancer behind"))
    before = _snapshot(project)
    ledger = project.history()
    project.close()
    with Project.open(place(project), author="ben") as again:
        assert _same(_snapshot(again), before)
        assert again.history() == ledger
        assert again.frame(2).state is FrameState.CORRECTED
        assert again.notes(2)[0].author == "ana"


def test_first_label_edit_marks_frame_corrected_in_the_same_undo_step(project):
    pid = project.apply(NewPerson(3)).edit.person_id
    assert project.frame(3).state is FrameState.CORRECTED
    project.undo()
    assert project.frame(3).state is FrameState.UNTOUCHED
    assert project.people(3) == []
    project.redo()
    assert project.frame(3).state is FrameState.CORRECTED
    assert [p.id for p in project.people(3)] == [pid]


def test_undo_and_redo_survive_restart(project, tmp_path):
    pid = project.apply(NewPerson(1, None, tuple((10.0 + j, 20.0, 2) for j in range(17)))
                        ).edit.person_id
    project.apply(MoveJoint(1, pid, 0, 99.0, 98.0))
    project.close()
    # A folder has one undo stack for whoever opens it; on a server each author has theirs.
    who = "ana" if project.hosted else None
    with Project.open(place(project), author=who) as p:
        assert p.undo() is not None
        assert p.people(1)[0].keypoints[0, :2].tolist() == [10.0, 20.0]
    with Project.open(place(project), author=who) as p:
        assert p.redo() is not None
        assert p.people(1)[0].keypoints[0, :2].tolist() == [99.0, 98.0]
        kinds = [e.kind for e in p.history()]
        assert kinds[:2] == ["redo", "undo"]  # nothing deleted, newest first


def test_new_edit_clears_redo(project):
    project.apply(NewPerson(1))
    project.undo()
    assert project.can_redo()
    project.apply(NewPerson(1))
    assert not project.can_redo()


def test_refused_edit_changes_nothing(project):
    before = _snapshot(project)
    n = len(project.history())
    with pytest.raises(EditRefused):
        project.apply(DeletePerson(1, 12345))
    assert _same(_snapshot(project), before) and len(project.history()) == n


def test_reassign_is_one_undo_step(project):
    a = project.apply(NewPerson(1, None, tuple((10.0 + j, 20.0, 2) for j in range(17))))
    b = project.apply(NewPerson(1))
    pa, pb = a.edit.person_id, b.edit.person_id
    project.apply(ReassignJoint(1, pa, 9, pb))
    people = {p.id: p for p in project.people(1)}
    assert people[pb].keypoints[9, 2] == 2 and people[pa].keypoints[9, 2] == 0
    project.undo()
    people = {p.id: p for p in project.people(1)}
    assert people[pa].keypoints[9, 2] == 2 and people[pb].keypoints[9, 2] == 0


def test_return_to_a_point_is_itself_undoable(project):
    pid = project.apply(NewPerson(1, None, tuple((10.0 + j, 20.0, 2) for j in range(17)))
                        ).edit.person_id
    point = project.history(limit=1)[0].seq
    project.apply(MoveJoint(1, pid, 0, 1.0, 1.0))
    project.apply(SwapSides(1, pid))
    moved = project.people(1)[0].keypoints.copy()
    project.return_to(point, frame_id=1)
    assert project.people(1)[0].keypoints[0, :2].tolist() == [10.0, 20.0]
    project.undo()
    np.testing.assert_array_equal(project.people(1)[0].keypoints, moved)


@pytest.mark.folder_only
def test_second_process_gets_read_only_and_is_told_why(project, tmp_path):
    code = textwrap.dedent(f"""
        import sys; sys.path.insert(0, {ROOT!r})
        from app.store import Project
        p = Project.open({str(tmp_path / 'proj')!r})
        print(p.read_only, p.read_only_reason)
    """)
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True).stdout
    assert out.startswith("True open for editing by ana")
    assert f"process {os.getpid()}" in out


@pytest.mark.folder_only
def test_read_only_refuses_edits_in_the_same_process(project, tmp_path):
    with Project.open(tmp_path / "proj") as second:
        assert second.read_only
        with pytest.raises(ReadOnly, match="read-only"):
            second.apply(NewPerson(1))
        assert [f.id for f in second.frames()] == [1, 2, 3, 4, 5, 6]


def test_crashed_holder_leaves_no_stale_lock(project, tmp_path):
    project.close()
    code = textwrap.dedent(f"""
        import sys, time; sys.path.insert(0, {ROOT!r})
        from app.store import Project
        p = Project.open({str(tmp_path / 'proj')!r})
        print("held", flush=True)
        time.sleep(60)
    """)
    child = subprocess.Popen([sys.executable, "-c", code], stdout=subprocess.PIPE, text=True)
    assert child.stdout.readline().strip() == "held"
    with Project.open(tmp_path / "proj") as p:
        assert p.read_only
    child.kill()
    child.wait()
    with Project.open(tmp_path / "proj") as p:
        assert not p.read_only


def test_newer_schema_is_refused_and_left_alone(project, tmp_path):
    project.close()
    db = tmp_path / "proj" / "project.db"
    conn = sqlite3.connect(db)
    conn.execute(f"PRAGMA user_version = {SCHEMA_VERSION + 1}")
    conn.commit()
    conn.close()
    with pytest.raises(BadInput, match="newer Posewright"):
        Project.open(tmp_path / "proj")
    with sqlite3.connect(db) as conn:
        assert conn.execute("PRAGMA user_version").fetchone()[0] == SCHEMA_VERSION + 1


@pytest.mark.folder_only
def test_durability_settings(project):
    """SQLite documentation: WAL with synchronous=FULL syncs the WAL at every commit."""
    conn = project.db.conn
    assert conn.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
    assert conn.execute("PRAGMA synchronous").fetchone()[0] == 2  # FULL


# ---------------------------------------------------------------- the algebra through the store

def _edit(choice, project, frame_id):
    kind, a, b, c, x, y = choice
    ids = [p.id for p in project.people(frame_id)]
    regions = [r[0] for r in project.regions(frame_id)]
    region = regions[c % len(regions)] if regions else 999
    pid = ids[a % len(ids)] if ids else 999
    other = ids[b % len(ids)] if ids else 999
    j = c % 17
    options = [
        lambda: NewPerson(frame_id, None, tuple((x + k, y + k, 1 + k % 2) for k in range(17))),
        lambda: MoveJoint(frame_id, pid, j, x, y),
        lambda: SetVisibility(frame_id, pid, j, b % 3),
        lambda: ReassignJoint(frame_id, pid, j, other),
        lambda: DeletePerson(frame_id, pid),
        lambda: MergePeople(frame_id, pid, other),
        lambda: SplitPerson(frame_id, pid, (j,)),
        lambda: SwapSides(frame_id, pid),
        lambda: SetFrameState(frame_id, list(FrameState)[b % 4]),
        lambda: AddNote(frame_id, f"note {a}", None),
        lambda: AddRegion(frame_id, ((x, y, x + 40, y, x + 40, y + 30),)),
        lambda: DeleteRegion(frame_id, region),
        lambda: ReshapeRegion(frame_id, region, ((x, y, x + 9, y + 2, x + 3, y + 8),)),
    ]
    return options[kind % len(options)]()


@settings(max_examples=25, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(st.lists(st.tuples(st.integers(0, 40), st.integers(0, 40), st.integers(0, 40),
                          st.integers(0, 40), st.floats(0, 300), st.floats(0, 200)),
                min_size=1, max_size=14),
       st.integers(1, 2))
def test_any_sequence_undo_all_gives_start_redo_all_gives_end(tmp_path_factory, image_dir,
                                                              seq, frame_id):
    """Synthetic random edit sequences through the real store on disk."""
    folder = tmp_path_factory.mktemp("algebra")
    with new_project(folder, images=image_dir, author="ana") as p:
        start = _snapshot(p)
        applied = 0
        for choice in seq:
            try:
                if p.apply(_edit(choice, p, frame_id)).group_id is not None:
                    applied += 1
            except EditRefused:
                pass
        end = _snapshot(p)
        ledger_end = p.history()
        for _ in range(applied):
            assert p.undo() is not None
        assert p.undo() is None
        assert _same(_snapshot(p), start)
        for _ in range(applied):
            assert p.redo() is not None
        assert _same(_snapshot(p), end)
        ledger = p.history()
        assert ledger[len(ledger) - len(ledger_end):] == ledger_end  # append-only
    with Project.open(folder) as again:
        assert _same(_snapshot(again), end)
        assert again.history() == ledger


def test_ledger_rows_record_author_time_target_before_after(project):
    t0 = time.time()
    pid = project.apply(NewPerson(1)).edit.person_id
    project.apply(MoveJoint(1, pid, 4, 5.0, 6.0))
    entry = project.history(limit=1)[0]
    assert entry.author == "ana" and entry.time >= t0 - 1
    assert entry.target == JointTarget(pid, 4) and str(entry.target) == f"person:{pid}/joint:4"
    assert entry.before[:3] == [None, None, 0] and entry.after[:3] == [5.0, 6.0, 2]
    assert json.loads(json.dumps(entry.after)) == entry.after


def test_worklist_pages_follow_one_sort_of_every_frame(project):
    """Pages of the Worklist in suspicion order, at any offset and with filters, are slices
    of every frame sorted in Python (most suspicious first, ties and frames never triaged by
    id; a plain sort, common practice), each with the triage result and findings count read
    on their own. Synthetic frames, scores and findings, with ties at 0 and 0.5."""
    project.add_frames([NewFrame(f"extra/{n}.jpg", f"{n}.jpg", 64, 48, status="missing")
                        for n in range(40)])
    ids = [f.id for f in project.frames()]
    rng = np.random.default_rng(0)
    scores = {}
    for fid in ids[::3] + ids[1::3]:  # a third of the frames never triaged
        scores[fid] = float(rng.choice([0.0, 0.5, rng.random()]))
    project.store_triage({fid: (s, [{"kind": "odd" if fid % 2 else "even"}])
                          for fid, s in scores.items()})
    for fid in ids[::4]:
        project.apply(SetFrameState(fid, FrameState.DISPUTED))
    project.apply(SetFrameState(ids[1], FrameState.DISPUTED))
    project.undo()  # a state set and taken back: the frame is untouched again everywhere
    project.store_findings({fid: (f"d{fid}", [{"id": f"F{k}", "kind": "split"}
                                              for k in range(fid % 3)]) for fid in ids[::5]})
    triage, found = project.triage_all(), project.finding_counts()

    def expected(keep):
        frames = [f for f in project.frames() if keep(f)]
        return [f.id for f in sorted(frames, key=lambda f: (f.suspicion is None,
                                                             -(f.suspicion or 0.0), f.id))]

    disputed = (FrameState.DISPUTED,)
    cases = [(FrameQuery(), lambda f: True),
             (FrameQuery(states=disputed), lambda f: f.state is FrameState.DISPUTED),
             (FrameQuery(states=(FrameState.UNTOUCHED,)),
              lambda f: f.state is FrameState.UNTOUCHED),
             (FrameQuery(reason="odd"), lambda f: f.id in scores and f.id % 2 == 1),
             (FrameQuery(states=disputed, reason="odd"),
              lambda f: f.state is FrameState.DISPUTED and f.id in scores and f.id % 2 == 1)]
    for query, keep in cases:
        want = expected(keep)
        assert len(want) >= 3, query
        assert [f.id for f in project.frame_page(query)] == want
        assert project.frame_ids(query) == want
        assert project.frame_count(query) == len(want)
        for offset in (0, 5, len([i for i in want if i in scores]) - 2, len(want) - 3, 100):
            page = FrameQuery(query.order, query.states, query.reason, offset, 7)
            assert [f.id for f in project.frame_page(page)] == want[offset:offset + 7]
            entries = project.worklist_page(page)
            assert [e.frame.id for e in entries] == want[offset:offset + 7]
            assert [(e.triage, e.findings) for e in entries] == \
                [(triage.get(e.frame.id), found.get(e.frame.id)) for e in entries]
        for fid in ids:
            assert project.frame_position(query, fid) == (want.index(fid) if fid in want
                                                          else None), fid
    assert project.frame_page(FrameQuery(states=(), limit=5)) == []
    assert project.frame_count(FrameQuery(states=())) == 0
    odd = sum(1 for f in scores if f % 2)
    assert project.reason_counts() == {"odd": odd, "even": len(scores) - odd}
    assert project.has_triage()


def test_older_project_is_migrated_forward(tmp_path, image_dir):
    """A project written at schema 1 opens with its labels and gains the newer tables."""
    with new_project(tmp_path / "old", images=image_dir, author="ana") as p:
        pid = p.apply(NewPerson(1)).edit.person_id
    db = tmp_path / "old" / "project.db"
    conn = sqlite3.connect(db, isolation_level=None)
    conn.execute("DROP TABLE triage")
    conn.execute("DROP TABLE maps")
    conn.execute("PRAGMA user_version = 1")
    conn.close()
    with Project.open(tmp_path / "old") as p:
        assert [q.id for q in p.people(1)] == [pid]
        assert p.triage(1) is None
        p.store_triage({1: (0.5, [{"kind": "test"}])})
        assert p.frame(1).suspicion == 0.5
    conn = sqlite3.connect(db)
    assert conn.execute("PRAGMA user_version").fetchone()[0] == SCHEMA_VERSION
    conn.close()


@pytest.mark.folder_only
def test_a_schema_6_project_gains_its_reason_kinds(tmp_path, image_dir):
    """A project written at schema 6 (before ``triage_kinds``) opens, migrates to 7 and
    filters and counts by reason kind from the triage results it had (synthetic reasons)."""
    with new_project(tmp_path / "old", images=image_dir, author="ana") as p:
        p.store_triage({1: (0.5, [{"kind": "crowded"}, {"kind": "weak-limb"}]),
                        2: (0.9, [{"kind": "crowded"}])})
    db = tmp_path / "old" / "project.db"
    conn = sqlite3.connect(db, isolation_level=None)
    conn.execute("DROP TABLE triage_kinds")
    conn.execute("PRAGMA user_version = 6")
    conn.close()
    with Project.open(tmp_path / "old", author="ana") as p:
        assert p.reason_counts() == {"crowded": 2, "weak-limb": 1}
        assert p.frame_ids(FrameQuery(reason="crowded")) == [2, 1]
    conn = sqlite3.connect(db)
    assert conn.execute("PRAGMA user_version").fetchone()[0] == SCHEMA_VERSION >= 7
    conn.close()


@pytest.mark.folder_only
def test_a_schema_7_project_keeps_each_frames_state_on_its_triage_row(tmp_path, image_dir):
    """A project written at schema 7 (triage rows without the frame's state) opens, migrates
    to 8 and keeps a state's frames in suspicion order (synthetic scores)."""
    with new_project(tmp_path / "old", images=image_dir, author="ana") as p:
        p.store_triage({1: (0.5, [{"kind": "crowded"}]), 2: (0.9, [{"kind": "crowded"}])})
        p.apply(SetFrameState(2, FrameState.DISPUTED))
    db = tmp_path / "old" / "project.db"
    conn = sqlite3.connect(db, isolation_level=None)
    conn.execute("DROP INDEX triage_state_rank")
    conn.execute("ALTER TABLE triage DROP COLUMN state")  # SQLite 3.35 or later
    conn.execute("PRAGMA user_version = 7")
    conn.close()
    with Project.open(tmp_path / "old", author="ana") as p:
        assert p.frame_ids(FrameQuery(states=(FrameState.DISPUTED,))) == [2]
        assert p.frame_ids(FrameQuery(states=(FrameState.UNTOUCHED,)))[0] == 1
    conn = sqlite3.connect(db)
    assert conn.execute("PRAGMA user_version").fetchone()[0] == SCHEMA_VERSION >= 8
    conn.close()


def test_a_schema_4_project_gains_findings_and_dismissals(tmp_path, image_dir):
    """A project written at schema 4 (before findings) opens with its ledger, migrates to
    schema 5, keeps findings as derived data and records a dismissal as an undoable edit."""
    from app.model import DismissFinding

    with new_project(tmp_path / "old", images=image_dir, author="ana") as p:
        pid = p.apply(NewPerson(1)).edit.person_id
    db = tmp_path / "old" / "project.db"
    conn = sqlite3.connect(db, isolation_level=None)
    for table in ("findings", "findings_state", "dismissals"):
        conn.execute(f"DROP TABLE {table}")
    conn.execute("PRAGMA user_version = 4")
    conn.close()
    with Project.open(tmp_path / "old", author="ana") as p:
        assert [q.id for q in p.people(1)] == [pid] and p.findings() == {}
        p.store_findings({1: ("digest", [{"id": "F1", "kind": "split", "person_id": pid,
                                          "confidence": 0.9}])})
        assert p.findings() == {1: [{"id": "F1", "kind": "split", "person_id": pid,
                                     "confidence": 0.9}]}
        p.apply(DismissFinding(1, "key", "split", "F1", "text"))
        assert p.labels(1).dismissed["key"]["author"] == "ana" and p.dismissed() == {1: {"key"}}
        p.undo()
        assert p.labels(1).dismissed == {} and p.dismissed() == {}
        assert str(p.history(limit=1)[0].target) == "dismissal:key"
    conn = sqlite3.connect(db)
    assert conn.execute("PRAGMA user_version").fetchone()[0] == SCHEMA_VERSION
    conn.close()


def test_finding_counts_agree_with_the_stored_findings(project):
    """The Worklist's per-frame count, read without the findings themselves, is what reading
    them gives: a frame computed with none counts 0, a frame never computed is absent."""
    project.store_findings({1: ("d1", [{"id": "F1", "kind": "split"},
                                       {"id": "F2", "kind": "hidden"}]),
                            2: ("d2", [])})
    assert project.finding_counts() == {1: 2, 2: 0}
    assert project.finding_counts() == {f: len(v) for f, v in project.findings().items()}
    project.store_findings({1: ("d3", [{"id": "F3", "kind": "split"}])})
    assert project.finding_counts() == {1: 1, 2: 0}


def test_ignore_regions_are_undoable_edits_and_export_as_crowd(project, tmp_path):
    """COCO keypoints format: an ignore region leaves as an ``iscrowd: 1`` annotation."""
    from app.jobs import export_coco

    rid = project.apply(AddRegion(2, ((10.0, 10.0, 60.0, 10.0, 60.0, 40.0, 10.0, 40.0),))
                        ).edit.region_id
    assert project.frame(2).state is FrameState.CORRECTED
    project.apply(ReshapeRegion(2, rid, ((10.0, 10.0, 90.0, 10.0, 50.0, 70.0),)))
    out = tmp_path / "out.json"
    export_coco(project, out)
    crowd = [a for a in json.loads(out.read_text())["annotations"] if a["iscrowd"]]
    assert crowd[0]["segmentation"] == [[10.0, 10.0, 90.0, 10.0, 50.0, 70.0]]
    assert crowd[0]["area"] == pytest.approx(0.5 * 80 * 60)
    project.undo()
    project.undo()
    assert project.regions(2) == [] and project.frame(2).state is FrameState.UNTOUCHED
    project.redo()
    assert project.regions(2)[0][0] == rid
