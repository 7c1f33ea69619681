"""Counting annotator actions with and without carrying corrections forward, on a synthetic
sequence (tests/sequences.py) whose one error lasts four frames: two dancers' left wrists
exchanged. Truth is judged by :func:`app.demo.evaluate.judge_joints` (COCO per-joint
similarity, pycocotools' formula). Data synthetic."""

import numpy as np

from app.demo.carrying import WHY, _helps, count_actions, next_action, why_not_carried
from app.model.edits import EditGroup, MoveJoint, ReassignJoint
from app.model.labels import FrameLabels, Person
from app.model.skeleton import coco_body
from tests import sequences

WRIST = 9


def _labels(people):
    return [FrameLabels(t + 1, coco_body(), {
        sequences.pid(t, p): Person(sequences.pid(t, p), people[t, p].copy(),
                                    np.full(17, np.nan), ("auto",) * 17)
        for p in range(people.shape[1])}) for t in range(len(people))]


def test_an_error_that_lasts_four_frames_takes_four_actions_or_two_with_carrying():
    truth = sequences.dancers()
    wrong = truth.copy()
    for t in range(3, 7):
        wrong[t, [0, 1], WRIST] = wrong[t, [1, 0], WRIST]
    areas = [np.full(3, 0.5 * 150.0**2)] * 12
    frames = _labels(wrong)
    first = next_action(frames[3], truth[3], areas[3])
    assert isinstance(first, ReassignJoint) and first.joint == WRIST
    count = count_actions(frames, list(truth), areas, "synthetic")
    assert count.wrong_before == 8
    assert (count.frame_by_frame, count.repeated) == (4, 3)
    assert (count.corrections, count.batches, count.carried_frames) == (1, 1, 3)
    assert count.carrying == 2 and count.saved == 0.5
    assert count.wrong_left_frame_by_frame == count.wrong_left_carrying == 0


def test_nothing_wrong_takes_no_action():
    truth = sequences.dancers(frames=4)
    count = count_actions(_labels(truth), list(truth), [np.full(3, 0.5 * 150.0**2)] * 4)
    assert (count.frame_by_frame, count.carrying, count.wrong_before) == (0, 0, 0)


def test_why_an_action_is_carried_or_not():
    """The exchange of frames 4-7 is carried from frames 4, 5 and 6 to the next; from frame
    7 it is not, the error being absent in frame 8 (and the dancers right there)."""
    truth = sequences.dancers(frames=9)
    wrong = truth.copy()
    for t in range(3, 7):
        wrong[t, [0, 1], WRIST] = wrong[t, [1, 0], WRIST]
    areas = [np.full(3, 0.5 * 150.0**2)] * 9
    why = why_not_carried(_labels(wrong), list(truth), areas)
    assert why == {("give", WHY[0]): 3, ("give", WHY[3]): 1}


def test_a_persons_corrections_carried_as_one_batch_each_joint_as_far_as_its_error_lasts():
    """Dancer 0's wrist exchanged in frames 4-7 and its elbow dragged off in frames 4-5
    (synthetic): six actions frame by frame (two, two, one, one); per person, the two of
    frame 4 and one batch over frames 5-7 (three); per action, the wrist's batch over
    frames 5-7 is taken, but the elbow's batch of one frame spares nothing and is left, so
    the elbow is dragged again in frame 5 (four)."""
    truth = sequences.dancers(frames=9)
    wrong = truth.copy()
    for t in range(3, 7):
        wrong[t, [0, 1], WRIST] = wrong[t, [1, 0], WRIST]
    wrong[3:5, 0, 7, 0] -= 30.0
    areas = [np.full(3, 0.5 * 150.0**2)] * 9
    person = count_actions(_labels(wrong), list(truth), areas, "synthetic")
    action = count_actions(_labels(wrong), list(truth), areas, "synthetic", per="action")
    assert person.frame_by_frame == action.frame_by_frame == 6
    assert (person.corrections, person.batches, person.carried_frames) == (2, 1, 3)
    assert (action.corrections, action.batches, action.carried_frames) == (3, 1, 3)
    assert person.wrong_left_carrying == action.wrong_left_carrying == 0


def test_two_people_wrong_for_two_frames_are_carried_together_by_the_frames_batch():
    """Dancer 0's elbow and dancer 2's knee dragged off in frames 4-5 (synthetic): four
    actions frame by frame; per person, each batch reaches one frame and spares one action,
    no more than its key costs, and is left alone (four); the frame's batch after them
    carries both to frame 5 with one key (two corrections and one batch: three)."""
    truth = sequences.dancers(frames=8)
    wrong = truth.copy()
    wrong[3:5, 0, 7, 0] -= 30.0
    wrong[3:5, 2, 13, 1] += 30.0
    areas = [np.full(3, 0.5 * 150.0**2)] * 8
    alone = count_actions(_labels(wrong), list(truth), areas, frame_batch=False)
    both = count_actions(_labels(wrong), list(truth), areas)
    assert alone.frame_by_frame == both.frame_by_frame == 4
    assert (alone.corrections, alone.batches, alone.carrying) == (4, 0, 4)
    assert (both.corrections, both.batches, both.carried_frames, both.carrying) == (2, 1, 1, 3)
    assert both.wrong_left_carrying == 0


def test_a_carried_frame_is_taken_when_it_spares_actions_though_as_many_joints_stay_wrong():
    """Dancer 0's elbow and knee off by 30 px (two drags) and a carried group that sets them
    right but exchanges dancers 1's and 2's left wrists (synthetic): two wrong joints before
    and after, but one action after (a joint given back hands the other back too) against
    two, so it helps when judged in actions (the measure's own count) and not by the earlier
    rule, which asks for fewer wrong joints."""
    truth = sequences.dancers(frames=1)
    wrong = truth.copy()
    for j in (7, 13):
        wrong[0, 0, j, 0] -= 30.0
    frame = _labels(wrong)[0]
    fid, a, b, c = (frame.frame_id, *(sequences.pid(0, p) for p in range(3)))
    edits = [MoveJoint(fid, a, j, *map(float, truth[0, 0, j, :2])) for j in (7, 13)]
    edits.append(ReassignJoint(fid, b, WRIST, c))
    group = EditGroup(fid, tuple(edits), "carried")
    areas = np.full(3, 0.5 * 150.0**2)
    assert _helps(group, frame, truth[0], areas, "actions") is not None
    assert _helps(group, frame, truth[0], areas, "joints") is None
