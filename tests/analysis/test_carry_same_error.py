"""Which errors carrying recognises as "the same error" in the frames around a correction
(:mod:`app.analysis.carry`), on small synthetic sequences built in memory (dancers walking
side by side, from tests/sequences.py; data synthetic)."""

import numpy as np

from app.analysis.carry import carry_changes
from app.model.edits import MoveJoint, ReassignJoint
from app.model.labels import FrameLabels, Person
from app.model.skeleton import coco_body
from tests import sequences

WRIST, OTHER_WRIST = 9, 10


def _frames(people: np.ndarray, tracks: np.ndarray) -> list[FrameLabels]:
    """One FrameLabels per frame, person ``p`` of frame ``t`` having id ``100 t + p`` and
    track ``tracks[t, p]``."""
    k = people.shape[2]
    return [FrameLabels(t + 1, coco_body(), {
        100 * t + p: Person(100 * t + p, people[t, p].copy(), np.full(k, np.nan),
                            ("auto",) * k, track=int(tracks[t, p]))
        for p in range(people.shape[1])}) for t in range(len(people))]


def _carry(frames: list[FrameLabels], at: int, edit):
    frames = list(frames)
    frames[at], changes = edit.apply(frames[at])
    return carry_changes(changes, frames, at)


def test_a_joint_on_a_neighbours_joint_is_followed_with_that_neighbour():
    """Dancer 0's left wrist stands on dancer 1's right wrist in frames 3-6 while dancer 1
    walks 35 pixels a frame faster (more than a tenth of a body: moved with dancer 0's body
    the wrong wrist would not stand where it stood). Dragged home in frame 4, the drag is
    carried to frames 3, 5 and 6, and stops at frames 2 and 7, where the wrist is right."""
    truth = sequences.dancers(frames=10, spacing=40.0)
    truth[:, 1, :, 0] += 35.0 * np.arange(10)[:, None]
    people = truth.copy()
    for t in range(2, 6):
        people[t, 0, WRIST] = people[t, 1, OTHER_WRIST]
    frames = _frames(people, np.tile([1, 2, 3], (10, 1)))
    x, y = truth[3, 0, WRIST, :2]
    batch = _carry(frames, 3, MoveJoint(4, 300, WRIST, float(x), float(y)))
    assert [e.frame_id for e in batch.edits] == [3, 5, 6]
    assert (batch.stopped_backward, batch.stopped_forward) == (2, 7)
    for group in batch.edits:
        t = group.frame_id - 1
        after, _ = group.apply(frames[t])
        assert np.hypot(*(after.people[100 * t].keypoints[WRIST, :2]
                          - truth[t, 0, WRIST, :2])) < 2.0


def test_a_correction_follows_a_person_whose_track_broke():
    """The linking lost dancer 0 from frame 6 on (a new track 7 there). A wrist exchange
    between dancers 0 and 1 in frames 4-7, given back in frame 4, is carried to frames 5, 6
    and 7 (6 and 7 on track 7, the person most like dancer 0), and stops at frame 8."""
    truth = sequences.dancers(frames=10)
    people = truth.copy()
    for t in range(3, 7):
        people[t, [0, 1], WRIST] = people[t, [1, 0], WRIST]
    tracks = np.tile([1, 2, 3], (10, 1))
    tracks[5:, 0] = 7
    frames = _frames(people, tracks)
    batch = _carry(frames, 3, ReassignJoint(4, 300, WRIST, 301))
    assert [e.frame_id for e in batch.edits] == [5, 6, 7]
    assert (batch.stopped_backward, batch.stopped_forward) == (3, 8)
    for group in batch.edits:
        t = group.frame_id - 1
        after, _ = group.apply(frames[t])
        for p in (0, 1):
            assert np.allclose(after.people[100 * t + p].keypoints[WRIST, :2],
                               truth[t, p, WRIST, :2])


def test_a_broken_track_is_not_followed_to_someone_else():
    """When the dancer is gone from the next frame, carrying does not take the most alike of
    the others (they keep their own tracks): the batch stops there."""
    truth = sequences.dancers(frames=6)
    people = truth.copy()
    for t in range(1, 4):
        people[t, [0, 1], WRIST] = people[t, [1, 0], WRIST]
    people[3, 0] = np.nan
    people[3, 0, :, 2] = 0
    frames = _frames(people, np.tile([1, 2, 3], (6, 1)))
    del frames[3].people[300]
    batch = _carry(frames, 1, ReassignJoint(2, 100, WRIST, 101))
    assert [e.frame_id for e in batch.edits] == [3]
    assert batch.stopped_forward == 4
