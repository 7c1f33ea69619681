"""Findings over time on synthetic sequences (tests/sequences.py: dancers walking side by
side, every joint labelled, each dancer one track) with one known problem put in by hand:
an identity exchange, a jumping joint, a gap, a flipped stretch. Each test asserts where the
finding is, the track ids and the proposed edits. Data synthetic."""

import numpy as np
import pytest

from app.analysis.triage.temporal import TrackedFrame, sequence_findings
from app.model.edits import INTERPOLATED, MoveJoint, NewPerson, SetTrack, SetVisibility, SwapSides
from app.model.skeleton import coco_body
from tests import sequences

SKELETON = coco_body()
LEFT_WRIST = 9


def _frames(people, tracks=None, missing=()):
    """TrackedFrames with frame ids 1.., person ids ``pid(t, p)``, dancer p on track p + 1
    unless ``tracks[t][p]`` says otherwise; ``(t, p)`` in ``missing`` left out."""
    out = []
    for t, frame in enumerate(people):
        here = {sequences.pid(t, p): kp for p, kp in enumerate(frame) if (t, p) not in missing}
        track = {sequences.pid(t, p): (p + 1 if tracks is None else tracks[t][p])
                 for p in range(len(frame)) if (t, p) not in missing}
        out.append(TrackedFrame(t + 1, here, track))
    return out


def _all(found):
    return [f for fs in found.values() for f in fs]


def test_a_clean_sequence_has_no_findings():
    assert sequence_findings(_frames(sequences.dancers()), SKELETON) == {}


def test_an_identity_exchange_is_found_where_it_happens_and_exchanged_back_from_there():
    people = sequences.dancers()
    tracks = [[1, 2, 3]] * 6 + [[2, 1, 3]] * 6  # dancers 0 and 1 exchange tracks at index 6
    (finding,) = _all(sequence_findings(_frames(people, tracks), SKELETON))
    assert (finding.kind, finding.frame_id) == ("exchanged-tracks", 7)
    assert set(finding.people) == {sequences.pid(6, 0), sequences.pid(6, 1)}
    assert finding.fix is not None and finding.confidence >= 0.5
    expected = {SetTrack(t + 1, sequences.pid(t, p), p + 1) for t in range(6, 12)
                for p in (0, 1)}
    assert set(finding.fix.edits) == expected


def test_a_joint_that_jumps_and_comes_back_is_put_where_the_frames_around_put_it():
    people = sequences.dancers()
    true_place = people[5, 1, LEFT_WRIST, :2].copy()
    people[5, 1, LEFT_WRIST, 0] += 60.0  # 0.4 of a body, for one frame
    (finding,) = _all(sequence_findings(_frames(people), SKELETON))
    assert (finding.kind, finding.frame_id, finding.joints) == ("jumping-joint", 6,
                                                                (LEFT_WRIST,))
    (edit,) = finding.fix.edits
    assert isinstance(edit, MoveJoint) and (edit.person_id, edit.joint) == \
        (sequences.pid(5, 1), LEFT_WRIST)
    assert np.hypot(edit.x - true_place[0], edit.y - true_place[1]) < 2.0


def test_a_jumping_joint_whose_neighbours_disagree_is_marked_unlabeled():
    people = sequences.dancers()
    people[5, 1, LEFT_WRIST, 0] += 60.0
    people[6:, 1, LEFT_WRIST, 1] -= 20.0  # the arm is raised from the next frame on
    (finding,) = _all(sequence_findings(_frames(people), SKELETON))
    assert finding.kind == "jumping-joint" and finding.frame_id == 6
    assert finding.fix.edits == (SetVisibility(6, sequences.pid(5, 1), LEFT_WRIST, 0),)


@pytest.mark.parametrize("gap", [(7,), (7, 8)])
def test_a_track_missing_for_a_frame_or_two_is_filled_with_an_interpolated_person(gap):
    people = sequences.dancers()
    found = sequence_findings(_frames(people, missing={(t, 2) for t in gap}), SKELETON)
    assert sorted(found) == [t + 1 for t in gap]
    for t in gap:
        (finding,) = found[t + 1]
        assert finding.kind == "missing-frames" and finding.person_id is None
        (edit,) = finding.fix.edits
        assert isinstance(edit, NewPerson) and (edit.frame_id, edit.track, edit.source) == \
            (t + 1, 3, INTERPOLATED)
        placed = np.array(edit.keypoints)
        assert np.abs(placed[:, :2] - people[t, 2, :, :2]).max() < 3.0
        assert (placed[:, 2] == 2).all()


def test_left_and_right_flipped_for_a_stretch_are_swapped_back_there_only():
    people = sequences.dancers()
    flip = SKELETON.flip_index
    people[3:6, 0] = people[3:6, 0][:, flip]  # frames 4-6 flipped, frame 7 flips back
    (finding,) = _all(sequence_findings(_frames(people), SKELETON))
    assert (finding.kind, finding.frame_id) == ("flipped-stretch", 4)
    assert finding.fix.edits == tuple(SwapSides(t + 1, sequences.pid(t, 0)) for t in (3, 4, 5))


def test_a_dismissed_finding_over_time_is_not_raised_again():
    people = sequences.dancers()
    people[5, 1, LEFT_WRIST, 0] += 60.0
    frames = _frames(people)
    (finding,) = _all(sequence_findings(frames, SKELETON))
    frames[5] = TrackedFrame(6, frames[5].people, frames[5].tracks,
                             frozenset({finding.fingerprint}))
    assert sequence_findings(frames, SKELETON) == {}


def test_a_joint_unlabelled_here_is_placed_where_the_frames_around_put_it():
    """A hidden joint unlabelled in one frame of a track that labels it around: placed at
    the two nearest frames' joint carried along with the body (for dancers walking at a
    steady pace, the true place), occluded when they label it occluded."""
    people = sequences.dancers()
    true_place = people[5, 1, LEFT_WRIST, :2].copy()
    people[5, 1, LEFT_WRIST] = (0.0, 0.0, 0)
    people[4, 1, LEFT_WRIST, 2] = 1  # occluded in the frame before
    (finding,) = _all(sequence_findings(_frames(people), SKELETON))
    assert (finding.kind, finding.frame_id, finding.joints) == ("joint-gap", 6, (LEFT_WRIST,))
    move, occlude = finding.fix.edits
    assert isinstance(move, MoveJoint) and (move.person_id, move.joint) == \
        (sequences.pid(5, 1), LEFT_WRIST)
    assert np.hypot(move.x - true_place[0], move.y - true_place[1]) < 2.0
    assert occlude == SetVisibility(6, sequences.pid(5, 1), LEFT_WRIST, 1)
    assert finding.confidence >= 0.5 and "frames 5 and 7 of track 2" in finding.text


def test_a_joint_unlabelled_where_the_frames_around_disagree_stays_unlabelled():
    """The nearest frames put the joint 0.13 of a body apart (more than AGREE): nothing is
    proposed; the joint stays unlabelled, which training ignores (synthetic)."""
    people = sequences.dancers()
    people[5, 1, LEFT_WRIST] = (0.0, 0.0, 0)
    people[6:, 1, LEFT_WRIST, 1] -= 20.0
    assert sequence_findings(_frames(people), SKELETON) == {}


def test_findings_asked_for_at_some_frames_are_those_of_the_whole_sequence_there():
    """``at`` builds only the findings at the frames asked for, the same as computed for
    the whole sequence (a gap, a jump and an unlabelled joint put in by hand)."""
    people = sequences.dancers()
    people[5, 1, LEFT_WRIST] = (0.0, 0.0, 0)
    people[8, 0, LEFT_WRIST, 0] += 60.0
    frames = _frames(people, missing={(3, 2)})
    whole = sequence_findings(frames, SKELETON)
    assert {6, 9, 4} <= set(whole)
    for fid in whole:
        assert sequence_findings(frames, SKELETON, at=[fid]) == {fid: whole[fid]}
