"""Carrying a correction to the frames that show the same error, on a synthetic sequence
(tests/sequences.py) with one error that lasts frames 4 to 7: dancer 0's and dancer 1's left
wrists exchanged. Data synthetic."""

import json

import numpy as np
import pytest

from app.analysis.carry import carry_changes
from app.cli import main
from app.jobs_tracks import link_project, propose_carry, sequence_labels, take_batch
from app.model import ReassignJoint, SwapSides
from app.model.skeleton import coco_body
from app.store import Project
from tests import sequences
from tests.sequences import pid

WRIST = 9
WRONG = range(3, 7)  # frame indices 3-6 (frame ids 4-7) hold the exchange


def _people():
    people = sequences.dancers()
    for t in WRONG:
        people[t, [0, 1], WRIST] = people[t, [1, 0], WRIST]
    return people


@pytest.fixture
def walk(tmp_path):
    project, _ = sequences.make_project(tmp_path, _people())
    link_project(project)
    yield project
    project.close()


def _wrists(project):
    return {t: [q.keypoints[WRIST, :2] for q in sorted(project.people(t + 1), key=lambda q: q.id)]
            for t in range(12)}


def test_a_correction_is_carried_both_ways_and_stops_where_the_error_is_absent(walk):
    applied = walk.apply(ReassignJoint(6, pid(5, 0), WRIST, pid(5, 1)))
    batch = propose_carry(walk, 6, applied.changes)
    assert [g.frame_id for g in batch.edits] == [5, 4, 7]
    assert (batch.last_backward, batch.stopped_backward) == (4, 3)
    assert (batch.last_forward, batch.stopped_forward) == (7, 8)
    before = _wrists(walk)
    take_batch(walk, batch)
    truth = sequences.dancers()
    for t in range(12):
        for p in range(3):
            assert np.allclose(_wrists(walk)[t][p], truth[t, p, WRIST, :2]), (t, p)
    walk.undo()  # the batch is one undo step
    assert all(np.allclose(a, b) for t in range(12)
               for a, b in zip(_wrists(walk)[t], before[t], strict=True))


def test_a_trimmed_batch_takes_only_the_frames_up_to_where_it_is_cut(walk):
    applied = walk.apply(ReassignJoint(5, pid(4, 0), WRIST, pid(4, 1)))
    batch = propose_carry(walk, 5, applied.changes)
    assert [g.frame_id for g in batch.edits] == [4, 6, 7]
    assert [g.frame_id for g in batch.until(6).edits] == [4, 6]
    assert [g.frame_id for g in batch.until(4).edits] == [4, 6, 7]


def test_a_correction_where_nothing_around_shows_the_error_carries_nothing(tmp_path):
    """A dancer flipped left-right in one frame only: swapping it back there carries to no
    other frame (the frames around hold the dancer unflipped, unlike the frame before its
    correction)."""
    people = sequences.dancers()
    people[9, 2] = people[9, 2][coco_body().flip_index]
    project, _ = sequences.make_project(tmp_path, people)
    with project:
        link_project(project)
        applied = project.apply(SwapSides(10, pid(9, 2)))
        batch = propose_carry(project, 10, applied.changes)
    assert batch.edits == () and batch.stopped_forward == 11 and batch.stopped_backward == 9


def test_a_side_swap_is_carried_over_the_frames_that_show_it(tmp_path):
    """A dancer flipped for frames 5-8: swapping it back in frame 6 carries to 5, 7 and 8."""
    people = sequences.dancers()
    people[4:8, 2] = people[4:8, 2][:, coco_body().flip_index]
    project, _ = sequences.make_project(tmp_path, people)
    with project:
        link_project(project)
        applied = project.apply(SwapSides(6, pid(5, 2)))
        batch = propose_carry(project, 6, applied.changes)
    assert [g.frame_id for g in batch.edits] == [5, 7, 8]
    assert (batch.stopped_backward, batch.stopped_forward) == (4, 9)


def test_carry_from_the_command_line(walk, capsys):
    walk.apply(ReassignJoint(6, pid(5, 0), WRIST, pid(5, 1)))
    where = str(walk.folder)
    walk.close()
    assert main(["carry", where, "--dry-run", "--json", "-q"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert (out["frames"], out["stopped_forward"], out["applied"]) == ([5, 4, 7], 8, None)
    assert main(["carry", where, "-q"]) == 0
    assert "carried the correction of frame 6 to 3 frames (5, 4, 7)" in capsys.readouterr().out
    with Project.open(where) as p:
        assert np.allclose(_wrists(p)[3][0], sequences.dancers()[3, 0, WRIST, :2])


def test_carrying_needs_tracks():
    """Without tracks nothing can be followed: the batch is empty (pure function)."""
    from app.model.edits import ReassignJoint as Give
    from app.model.labels import FrameLabels, Person
    from app.model.skeleton import coco_body

    people = _people()
    frames = [FrameLabels(t + 1, coco_body(), {
        pid(t, p): Person(pid(t, p), people[t, p].copy(), np.full(17, np.nan), ("auto",) * 17)
        for p in range(3)}) for t in range(12)]
    frames[4], changes = Give(5, pid(4, 0), WRIST, pid(4, 1)).apply(frames[4])
    assert carry_changes(changes, frames, 4).edits == ()
    _ = sequence_labels  # the job reads the same frames from a project
