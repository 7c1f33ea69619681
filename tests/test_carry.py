"""Carrying a correction to the frames that show the same error, on a synthetic sequence
(tests/sequences.py) with one error that lasts frames 4 to 7: dancer 0's and dancer 1's left
wrists exchanged. Data synthetic."""

import json

import numpy as np
import pytest

from app.analysis import carry
from app.analysis.carry import by_person, carry_changes
from app.cli import main
from app.jobs_tracks import (
    frame_changes,
    link_project,
    person_changes,
    propose_carry,
    sequence_labels,
    take_batch,
)
from app.model import MoveJoint, ReassignJoint, SwapSides
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


ELBOW = 7


def _one_person_two_errors():
    """Dancer 0's left wrist exchanged with dancer 1's in frames 4-7 (indices 3-6), and its
    left elbow dragged a fifth of a body to the left in frames 4-5 only (synthetic)."""
    people = _people()
    people[3:5, 0, ELBOW, 0] -= 30.0
    return people


def _correct_frame_4(frames):
    """Both of dancer 0's errors corrected in frame 4: the wrist given back, the elbow put
    back; the frame's changes, in order."""
    truth = sequences.dancers()
    made = []
    for edit in (ReassignJoint(4, pid(3, 1), WRIST, pid(3, 0)),
                 MoveJoint(4, pid(3, 0), ELBOW, *truth[3, 0, ELBOW, :2])):
        frames[3], changes = edit.apply(frames[3])
        made.extend(changes)
    return made


def test_a_persons_corrections_are_one_relation_carried_each_joint_as_far_as_it_lasts():
    """Per person: one batch holds the elbow for frame 5 only (its error ends there) and the
    wrist for frames 5-7; the batch stops at frame 8, where neither error shows. Carried as a
    whole instead, the correction stops at frame 6, where the elbow is already right."""
    frames = sequences.tracked_frames(_one_person_two_errors())
    made = _correct_frame_4(frames)
    relations = by_person(made)
    assert len(relations) == 1  # the wrist's giver is joined to dancer 0's relation
    whole = carry_changes(relations[0], frames, 3)
    assert ([g.frame_id for g in whole.edits], whole.stopped_forward) == ([5], 6)
    batch = carry_changes(relations[0], frames, 3, each_joint=True)
    assert [g.frame_id for g in batch.edits] == [5, 6, 7]
    assert (batch.last_forward, batch.stopped_forward, batch.stopped_backward) == (7, 8, 3)
    for group in batch.edits:
        k = group.frame_id - 1
        frames[k], _ = group.apply(frames[k])
    truth = sequences.dancers()
    for k in range(12):
        for p in range(3):
            # a dragged joint is carried moved along with the body (the dancers' joints
            # jitter by half a pixel): right within a few pixels
            assert np.allclose(frames[k].people[pid(k, p)].keypoints[:, :2],
                               truth[k, p, :, :2], atol=3.0), (k, p)
    edited = {(k, e.person_id, e.joint) for k, g in enumerate(batch.edits)
              for e in g.edits}
    assert (0, pid(4, 0), ELBOW) in edited and (1, pid(5, 0), ELBOW) not in edited


def test_each_joint_carrying_stops_at_the_first_frame_where_no_error_shows():
    """The wrist alone, each joint on its own (synthetic): still frames 5-7, stopped at 8,
    not carried on past the frame without the error to frame 9 where it is back (the
    default); stepping over one such frame (``gap=1``) still stops where the error is absent
    for two frames in a row (frames 8 and 9, back in 10)."""
    people = _one_person_two_errors()
    people[8, [0, 1], WRIST] = people[8, [1, 0], WRIST]  # the exchange again in frame 9
    frames = sequences.tracked_frames(people)
    frames[3], changes = ReassignJoint(4, pid(3, 1), WRIST, pid(3, 0)).apply(frames[3])
    batch = carry_changes(changes, frames, 3, each_joint=True)
    assert ([g.frame_id for g in batch.edits], batch.stopped_forward) == ([5, 6, 7], 8)
    people = _one_person_two_errors()
    people[9, [0, 1], WRIST] = people[9, [1, 0], WRIST]  # the exchange again in frame 10
    frames = sequences.tracked_frames(people)
    frames[3], changes = ReassignJoint(4, pid(3, 1), WRIST, pid(3, 0)).apply(frames[3])
    batch = carry_changes(changes, frames, 3, each_joint=True, gap=1)
    assert ([g.frame_id for g in batch.edits], batch.stopped_forward,
            batch.skipped) == ([5, 6, 7], 8, ())


def test_a_one_frame_gap_is_stepped_over_and_left_as_it_is():
    """The exchange absent in frame 8 only and back in frame 9 (a grouping's flicker;
    synthetic): the batch steps over frame 8, leaving it unchanged, gives the wrist back in
    frame 9 and stops at frame 10 where the error is gone for good; ``gap=0`` stops at 8;
    trimmed at frame 7 the gap is no longer inside the batch."""
    people = _one_person_two_errors()
    people[8, [0, 1], WRIST] = people[8, [1, 0], WRIST]  # the exchange again in frame 9
    frames = sequences.tracked_frames(people)
    frames[3], changes = ReassignJoint(4, pid(3, 1), WRIST, pid(3, 0)).apply(frames[3])
    batch = carry_changes(changes, frames, 3, each_joint=True, gap=1)
    assert ([g.frame_id for g in batch.edits], batch.stopped_forward, batch.skipped) == (
        [5, 6, 7, 9], 10, (8,))
    assert batch.until(7).skipped == ()
    truth = sequences.dancers()
    nine, _ = batch.edits[-1].apply(frames[8])
    assert np.allclose(nine.people[pid(8, 0)].keypoints[WRIST, :2], truth[8, 0, WRIST, :2])
    assert np.allclose(nine.people[pid(8, 1)].keypoints[WRIST, :2], truth[8, 1, WRIST, :2])
    none = carry_changes(changes, frames, 3, each_joint=True)  # the default stops there
    assert ([g.frame_id for g in none.edits], none.stopped_forward) == ([5, 6, 7], 8)


def test_the_carry_command_says_which_frames_it_steps_over(tmp_path, capsys):
    """The wrist exchange of frames 4-7 back in frame 9 (synthetic): ``carry`` names frame
    8, stepped over, in its sentence and its JSON."""
    people = _people()
    people[8, [0, 1], WRIST] = people[8, [1, 0], WRIST]
    project, _ = sequences.make_project(tmp_path, people)
    with project:
        link_project(project)
        project.apply(ReassignJoint(4, pid(3, 1), WRIST, pid(3, 0)))
        where = str(project.folder)
    assert main(["carry", where, "--dry-run", "--json", "-q"]) == 0
    out = json.loads(capsys.readouterr().out)  # by default the batch stops at frame 8
    assert (out["frames"], out["skipped"], out["stopped_forward"]) == ([5, 6, 7], [], 8)
    assert main(["carry", where, "--dry-run", "--json", "-q", "--step-over", "1"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert (out["frames"], out["skipped"], out["stopped_forward"]) == ([5, 6, 7, 9], [8], 10)
    assert main(["carry", where, "--dry-run", "--step-over", "1"]) == 0
    assert "stepping over 1 frame where the error is absent and back after (8)" in \
        capsys.readouterr().out


def test_each_joint_of_a_person_steps_over_its_own_gap(monkeypatch):
    """Dancer 0's wrist exchanged in frames 4-7 and its elbow dragged in frames 4-5 and 7,
    not 6 (synthetic): after both are corrected in frame 4, the person's batch stepping
    over one frame (``gap=1``) carries the elbow again to frame 7 while the wrist's error
    holds the batch open; carried as one walk (``APART`` off) the elbow ends at frame 6."""
    people = _one_person_two_errors()
    people[6, 0, ELBOW, 0] -= 30.0
    frames = sequences.tracked_frames(people)
    made = _correct_frame_4(frames)

    def edited(batch):
        return {(g.frame_id, e.joint) for g in batch.edits for e in g.edits
                if isinstance(e, MoveJoint) and e.person_id == pid(g.frame_id - 1, 0)}

    batch = carry_changes(made, frames, 3, each_joint=True, gap=1)
    assert ([g.frame_id for g in batch.edits], batch.stopped_forward) == ([5, 6, 7], 8)
    assert {(7, ELBOW), (7, WRIST), (5, ELBOW)} <= edited(batch)
    assert (6, ELBOW) not in edited(batch)
    monkeypatch.setattr(carry, "APART", False)
    joined = carry_changes(made, frames, 3, each_joint=True, gap=1)
    assert (7, ELBOW) not in edited(joined) and (7, WRIST) in edited(joined)


def test_people_corrected_apart_are_separate_relations():
    frames = sequences.tracked_frames(_one_person_two_errors())
    made = _correct_frame_4(frames)
    truth = sequences.dancers()
    frames[3], more = MoveJoint(4, pid(3, 2), 0, *(truth[3, 2, 0, :2] + 1)).apply(frames[3])
    assert [len(r) for r in by_person(made + more)] == [len(made), len(more)]


def test_the_app_carries_a_persons_whole_correction_in_the_frame(tmp_path):
    """In a project: after the wrist is given back and then the elbow put back in frame 4,
    the proposal from the newest correction (the elbow) carries both, each joint as far as
    its error lasts; an undone correction is no longer part of it; the earlier way (the
    action alone) stops where the elbow comes right."""
    project, _ = sequences.make_project(tmp_path, _one_person_two_errors())
    truth = sequences.dancers()
    with project:
        link_project(project)
        project.apply(ReassignJoint(4, pid(3, 1), WRIST, pid(3, 0)))
        elbow = project.apply(MoveJoint(4, pid(3, 0), ELBOW, *truth[3, 0, ELBOW, :2]))
        batch = propose_carry(project, 4, elbow.changes)
        assert ([g.frame_id for g in batch.edits], batch.stopped_forward) == ([5, 6, 7], 8)
        alone = propose_carry(project, 4, elbow.changes, whole_person=False)
        assert [g.frame_id for g in alone.edits] == [5]
        project.undo()  # the elbow
        project.apply(MoveJoint(4, pid(3, 2), 0, *truth[3, 2, 0, :2]))  # another person
        wrist = person_changes(project, 4, [pid(3, 0)])
        assert {(c.target.person, c.target.joint) for c in wrist} == {
            (pid(3, 0), WRIST), (pid(3, 1), WRIST)}


def test_the_whole_frame_is_carried_with_one_key(tmp_path, capsys):
    """Dancer 0's wrist exchanged in frames 4-7 and dancer 2's nose dragged off in frames 4-5
    (synthetic): after both are corrected in frame 4, the newest correction's person alone
    carries the nose to frame 5; the whole frame (``carry --whole-frame``, Ctrl+Alt+C)
    carries both, each as far as its error lasts, and stops at frame 8 where neither shows."""
    people = _people()
    people[3:5, 2, 0, 0] -= 30.0
    project, _ = sequences.make_project(tmp_path, people)
    truth = sequences.dancers()
    with project:
        link_project(project)
        project.apply(ReassignJoint(4, pid(3, 1), WRIST, pid(3, 0)))
        nose = project.apply(MoveJoint(4, pid(3, 2), 0, *truth[3, 2, 0, :2]))
        alone = propose_carry(project, 4, nose.changes)
        assert [g.frame_id for g in alone.edits] == [5]
        assert {c.target.person for c in frame_changes(project, 4)} == {
            pid(3, 0), pid(3, 1), pid(3, 2)}
        where = str(project.folder)
    assert main(["carry", where, "--whole-frame", "--dry-run", "--json", "-q"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert (out["frames"], out["stopped_forward"]) == ([5, 6, 7], 8)
    with Project.open(where) as p:
        batch = propose_carry(p, 4, nose.changes, whole_frame=True)
        take_batch(p, batch)
        for t in range(12):
            for d in range(3):
                assert np.allclose(p.labels(t + 1).people[pid(t, d)].keypoints[:, :2],
                                   truth[t, d, :, :2], atol=3.0), (t, d)


def _elbow_wrong_two_ways(shift: float):
    """Dancer 0's left elbow dragged 30 pixels to the left in frame 4 (index 3) and, in
    frame 5, ``shift`` pixels to the right of its place instead: wrong again, another way;
    right from frame 6 on (synthetic)."""
    people = sequences.dancers()
    people[3, 0, ELBOW, 0] -= 30.0
    people[4, 0, ELBOW, 0] += shift
    return people


def _drag_back_frame_4(frames):
    truth = sequences.dancers()
    frames[3], changes = MoveJoint(4, pid(3, 0), ELBOW, *truth[3, 0, ELBOW, :2]).apply(frames[3])
    return changes


def test_a_dragged_joint_wrong_again_another_way_is_carried_to_the_corrections_place():
    """The elbow 45 pixels right of its place in frame 5, farther from where the drag of
    frame 4 put it than half the drag's 30 pixels (``STRAY``), is the same error, the model's
    joint wrong again: carried there, to the drag's place moved with the body, and the batch
    stops at frame 6 where the elbow is right (synthetic)."""
    frames = sequences.tracked_frames(_elbow_wrong_two_ways(45.0))
    batch = carry_changes(_drag_back_frame_4(frames), frames, 3, each_joint=True)
    assert ([g.frame_id for g in batch.edits], batch.stopped_forward) == ([5], 6)
    five, _ = batch.edits[0].apply(frames[4])
    truth = sequences.dancers()
    assert np.allclose(five.people[pid(4, 0)].keypoints[ELBOW, :2], truth[4, 0, ELBOW, :2],
                       atol=3.0)


def test_a_dragged_joint_near_where_the_drag_put_it_is_not_the_same_error(monkeypatch):
    """Off by 12 pixels in frame 5, within half the drag's 30 pixels (and a tenth of the
    150-pixel body) of where the drag put it, on the other side of where the joint stood: a
    smaller error of its own, not carried; nor the 45 pixels with ``STRAY`` off
    (synthetic)."""
    frames = sequences.tracked_frames(_elbow_wrong_two_ways(12.0))
    batch = carry_changes(_drag_back_frame_4(frames), frames, 3, each_joint=True)
    assert (batch.edits, batch.stopped_forward) == ((), 5)
    monkeypatch.setattr(carry, "STRAY", 0.0)
    frames = sequences.tracked_frames(_elbow_wrong_two_ways(45.0))
    batch = carry_changes(_drag_back_frame_4(frames), frames, 3, each_joint=True)
    assert (batch.edits, batch.stopped_forward) == ((), 5)


def test_a_give_the_neighbour_no_longer_fits_places_the_joint_where_it_was_given(monkeypatch):
    """Dancer 0's and dancer 1's left wrists exchanged in frame 4; in frame 5 dancer 1's
    wrist is right again but dancer 0's still stands on it (synthetic). The give no longer
    fits frame 5 (dancer 1 does not hold dancer 0's wrist's place), so dancer 0's wrist is
    carried as a drag to where the give put it, moved with the body (``PLACE_GIVEN``), and
    dancer 1's, right, is left alone; the batch stops at frame 6. With ``PLACE_GIVEN`` off
    nothing is carried."""
    people = sequences.dancers()
    people[3, [0, 1], WRIST] = people[3, [1, 0], WRIST]
    people[4, 0, WRIST] = people[4, 1, WRIST]

    def carried():
        frames = sequences.tracked_frames(people)
        frames[3], changes = ReassignJoint(4, pid(3, 1), WRIST, pid(3, 0)).apply(frames[3])
        return frames, carry_changes(changes, frames, 3, each_joint=True)

    frames, batch = carried()
    assert ([g.frame_id for g in batch.edits], batch.stopped_forward) == ([5], 6)
    assert [(type(e), e.person_id) for e in batch.edits[0].edits] == [(MoveJoint, pid(4, 0))]
    five, _ = batch.edits[0].apply(frames[4])
    truth = sequences.dancers()
    for p in (0, 1):
        assert np.allclose(five.people[pid(4, p)].keypoints[WRIST, :2], truth[4, p, WRIST, :2],
                           atol=3.0)
    monkeypatch.setattr(carry, "PLACE_GIVEN", False)
    assert carried()[1].edits == ()
