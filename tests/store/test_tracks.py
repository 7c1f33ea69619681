"""Tracks in the store: written whole by linking, edited (set, joined, split) as ledger edits
that undo and redo, on a folder project and on a server. Data synthetic."""

import sqlite3

import pytest

from app.errors import EditRefused
from app.jobs import import_coco, new_project
from app.model import FrameState, NewPerson, SetTrack, TrackTarget
from app.model.tracks import join_tracks, split_track
from app.store import Project
from app.store.schema import SCHEMA_VERSION
from tests.conftest import place


def _tracks(project):
    return {p.id: (p.track, p.track_source) for ps in project.people_by_frame().values()
            for p in ps}


def _sequence(project):
    return {f.id: project.people(f.id) for f in project.frames()}


def _linked(project, coco_file):
    """Import three people per frame and put person n of every frame on track n + 1."""
    import_coco(project, coco_file)
    rows = [(p.id, n + 1, "auto") for ps in project.people_by_frame().values()
            for n, p in enumerate(ps)]
    assert project.set_tracks(rows, "link 6 frames") == 18
    return project


def test_linking_writes_tracks_as_bulk_work_that_survives_reopening(project, coco_file):
    _linked(project, coco_file)
    before = _tracks(project)
    assert sorted({t for t, _ in before.values()}) == [1, 2, 3]
    assert {s for _, s in before.values()} == {"auto"}
    assert not project.can_undo()  # bulk work, like an import
    assert all(f.state is FrameState.UNTOUCHED for f in project.frames())
    where = place(project)
    project.close()
    with Project.open(where, author="ana") as again:
        assert _tracks(again) == before


def test_set_track_is_an_edit_that_undoes_and_redoes(project, coco_file):
    _linked(project, coco_file)
    before = _tracks(project)
    frame = project.frames()[1].id
    person = project.people(frame)[0]
    applied = project.apply(SetTrack(frame, person.id, 7))
    assert [c.target for c in applied.changes] == [TrackTarget(person.id)]
    assert _tracks(project)[person.id] == (7, "ana")
    assert project.frame(frame).state is FrameState.UNTOUCHED  # a track is not a training label
    entry = project.history(limit=1)[0]
    assert (entry.target, entry.before, entry.after) == (TrackTarget(person.id), [1, "auto"],
                                                         [7, "ana"])
    project.undo()
    assert _tracks(project) == before
    project.redo()
    assert _tracks(project)[person.id] == (7, "ana")


def test_join_and_split_are_one_undo_step_each_over_many_frames(project, coco_file):
    _linked(project, coco_file)
    before = _tracks(project)
    # Split track 2 from frame 4 on: three frames' people move to track 9 in one action.
    fourth = project.frames()[3].id
    project.apply_batch(split_track(_sequence(project), 2, fourth, 9), "split track 2")
    after_split = _tracks(project)
    assert sum(t == 9 for t, _ in after_split.values()) == 3
    assert sum(t == 2 for t, _ in after_split.values()) == 3
    # Joining them back is one more action; undo takes back exactly one of each.
    project.apply_batch(join_tracks(_sequence(project), 2, 9), "join tracks 2 and 9")
    assert {pid: t for pid, (t, _) in _tracks(project).items()} == \
        {pid: t for pid, (t, _) in before.items()}
    project.undo()
    assert _tracks(project) == after_split
    project.undo()
    assert _tracks(project) == before
    project.redo()
    assert _tracks(project) == after_split


def test_a_join_that_would_put_two_people_of_a_frame_on_one_track_is_refused(project,
                                                                             coco_file):
    _linked(project, coco_file)
    with pytest.raises(EditRefused, match="both have someone in frame"):
        join_tracks(_sequence(project), 1, 2)


def test_a_batch_is_refused_whole(project, coco_file):
    _linked(project, coco_file)
    before = _tracks(project)
    first, second = (f.id for f in project.frames()[:2])
    person = project.people(first)[0]
    with pytest.raises(EditRefused):
        project.apply_batch([SetTrack(first, person.id, 5), SetTrack(second, 999999, 5)],
                            "bad")
    assert _tracks(project) == before


@pytest.mark.folder_only
def test_a_schema_5_project_gains_tracks(tmp_path, image_dir):
    """A project written at schema 5 (before tracks) opens, migrates to 6 and takes tracks."""
    with new_project(tmp_path / "old", images=image_dir, author="ana") as p:
        pid = p.apply(NewPerson(1)).edit.person_id
    conn = sqlite3.connect(tmp_path / "old" / "project.db", isolation_level=None)
    conn.execute("DROP INDEX people_track")
    conn.execute("ALTER TABLE people DROP COLUMN track")
    conn.execute("ALTER TABLE people DROP COLUMN track_source")
    conn.execute("PRAGMA user_version = 5")
    conn.close()
    with Project.open(tmp_path / "old", author="ana") as p:
        assert p.people(1)[0].track is None
        p.apply(SetTrack(1, pid, 3))
        assert (p.people(1)[0].track, p.people(1)[0].track_source) == (3, "ana")
    conn = sqlite3.connect(tmp_path / "old" / "project.db")
    assert conn.execute("PRAGMA user_version").fetchone()[0] == SCHEMA_VERSION >= 6
    conn.close()
