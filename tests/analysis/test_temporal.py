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


def _plain_flip_gain(prev, now):
    """The flipped-stretch measure written out plainly, as the check computed it before it
    was remembered (a reference for :func:`temporal._flip_gain_memo`)."""
    flip = np.asarray(SKELETON.flip_index)
    side = flip != np.arange(len(flip))
    on = (now[:, 2] > 0) & np.isfinite(now[:, :2]).all(axis=1)
    if on.sum() < 2:
        return None
    size = float((now[on, :2].max(axis=0) - now[on, :2].min(axis=0)).max())
    if size <= 0:
        return None
    both = (prev[:, 2] > 0) & (now[:, 2] > 0)
    motion = np.median(now[both, :2] - prev[both, :2], axis=0) if both.any() else np.zeros(2)
    moved = now.copy()
    moved[:, :2] -= motion
    flipped = moved[flip]
    ok = side & (prev[:, 2] > 0) & (moved[:, 2] > 0) & (flipped[:, 2] > 0)
    if ok.sum() < 4:
        return None
    keep = np.linalg.norm(moved[ok, :2] - prev[ok, :2], axis=1).mean()
    swap = np.linalg.norm(flipped[ok, :2] - prev[ok, :2], axis=1).mean()
    return (keep - swap) / size


def test_the_remembered_flip_measure_is_the_plain_one_bit_for_bit():
    """The flipped-stretch check remembers its measure per pair of poses (by their bytes);
    asked cold and again warm it gives the very float the plain computation gives, and None
    where too few side joints are labelled. Synthetic dancers, a flipped stretch and some
    joints unlabelled put in by hand."""
    from app.analysis.triage import temporal

    people = sequences.dancers(frames=8, n=2, seed=3)
    people[2:4, 0] = people[2:4, 0][:, SKELETON.flip_index]
    people[5, 1, 3:, 2] = 0  # too few side joints left: no measure
    people[6, 0, [1, 3, 9], 2] = 0
    flip = np.asarray(SKELETON.flip_index)
    side = flip != np.arange(len(flip))
    temporal._FLIP_MEMO.clear()
    seen = []
    for _ in ("cold", "warm"):
        for t in range(1, len(people)):
            for p in range(people.shape[1]):
                prev, now = people[t - 1, p].copy(), people[t, p].copy()
                got = temporal._flip_gain_memo(prev, now, flip, side)
                want = _plain_flip_gain(prev, now)
                assert (got is None) == (want is None)
                if want is not None:
                    assert got == float(want)
                seen.append(got)
    assert any(g is None for g in seen) and any(g is not None and g > temporal.FLIP
                                                for g in seen)


def test_a_fix_previewed_on_its_own_people_is_the_preview_over_the_whole_frame():
    """A finding over time previews its fix on the people its edits name alone; that
    preview is the one over all the frame's people (``findings.preview``). Synthetic: a
    flipped stretch, a jump and an unlabelled joint put in by hand."""
    from app.analysis.triage.findings import _labels, preview

    people = sequences.dancers()
    people[3:5, 0] = people[3:5, 0][:, SKELETON.flip_index]
    people[5, 1, LEFT_WRIST] = (0.0, 0.0, 0)
    people[8, 2, LEFT_WRIST, 0] += 60.0
    frames = _frames(people)
    found = [f for f in _all(sequence_findings(frames, SKELETON)) if f.fix is not None]
    assert {f.kind for f in found} >= {"flipped-stretch", "joint-gap", "jumping-joint"}
    for f in found:
        frame = frames[f.frame_id - 1]
        arrays = {p: np.asarray(v, dtype=np.float64) for p, v in frame.people.items()}
        here = [e for e in f.fix.edits if e.frame_id == f.frame_id]
        whole = preview(_labels(f.frame_id, SKELETON, arrays, None), here)
        assert repr(f.fix.preview) == repr(whole)  # repr: NaN in both reads the same


def test_an_edit_of_joints_changes_no_finding_over_time_beyond_its_reach():
    """``within_reach`` bounds where an edit of joints can change the findings over time:
    edits put in one at a time (a joint moved far, hidden, the sides swapped) on a sequence
    with a flipped stretch, a jump, a gap and an unlabelled joint; every frame whose
    findings differ from before lies within the reach of the edited frame. Synthetic; the
    edits are drawn at random (seed 5)."""
    from app.analysis.triage.temporal import within_reach
    from app.model.edits import MoveJoint

    people = sequences.dancers(frames=16)
    people[4:6, 0] = people[4:6, 0][:, SKELETON.flip_index]
    people[9, 1, LEFT_WRIST] = (0.0, 0.0, 0)
    people[11, 2, LEFT_WRIST, 0] += 60.0
    missing = {(13, 1)}
    before = {k: repr(v) for k, v in sequence_findings(_frames(people, missing=missing),
                                                        SKELETON).items()}
    ids = list(range(1, len(people) + 1))
    rng = np.random.default_rng(5)
    moved = 0
    for _ in range(12):
        t, p, j = int(rng.integers(len(people))), int(rng.integers(3)), int(rng.integers(17))
        edited = people.copy()
        how = rng.integers(3)
        if how == 0:
            edited[t, p, j, :2] += rng.normal(0, 40, 2)
        elif how == 1:
            edited[t, p, j, 2] = 0
        else:
            edited[t, p] = edited[t, p][SKELETON.flip_index]
        after = {k: repr(v) for k, v in sequence_findings(_frames(edited, missing=missing),
                                                           SKELETON).items()}
        changed = {k for k in set(before) | set(after) if before.get(k) != after.get(k)}
        reach = within_reach([ids], [MoveJoint(t + 1, sequences.pid(t, p), j, 0.0, 0.0)])
        assert changed <= reach, (t, p, j, how)
        moved += bool(changed)
    assert moved >= 3, "the edits change some findings"


def test_the_body_motion_is_numpys_median_bit_for_bit():
    """``_motion`` takes the median over joints by the partition ``np.median`` uses; on
    random poses (ties and NaN included, odd and even counts of joints) the bytes equal
    ``np.median``'s. Synthetic, seed 2."""
    from app.analysis.triage.temporal import _motion

    rng = np.random.default_rng(2)
    for trial in range(300):
        a = rng.normal(300, 100, (17, 3))
        b = a + rng.normal(0, 5, (17, 3))
        if trial % 3 == 0:  # ties
            a[:, :2], b[:, :2] = np.round(a[:, :2] / 4), np.round(b[:, :2] / 4)
        a[:, 2], b[:, 2] = rng.integers(0, 3, 17), rng.integers(0, 3, 17)
        if trial % 50 == 1:
            b[3, 0] = np.nan
        both = (a[:, 2] > 0) & (b[:, 2] > 0)
        want = np.median(b[both, :2] - a[both, :2], axis=0) if both.any() else np.zeros(2)
        assert _motion(a, b).tobytes() == want.tobytes()


def _read_as_planned(frames, at):
    """The frames ``sequence_findings(..., at=at)`` is given when only those
    :func:`temporal.frames_read` names are read: the whole ones as they are, the later ones
    for their tracks alone, the earlier ones left out."""
    from app.analysis.triage.temporal import frames_read, tracks_only

    whole, later = frames_read([f.frame_id for f in frames], at)
    return [f if f.frame_id in whole else tracks_only(f.frame_id, f.tracks, 17)
            for f in frames if f.frame_id in set(whole) | set(later)]


def test_the_findings_at_a_frame_read_from_its_reach_alone_are_those_of_the_whole_sequence():
    """The step of the walk reads only the frames within ``REACH`` of the frame asked for
    whole, and the later frames' tracks (an exchange's fix re-links them): the findings at
    every frame, and at random sets of frames, equal those computed over the whole sequence
    (repr: every field, NaN included). Synthetic 24 frames with every kind put in by hand
    (an exchange, a flipped stretch of ``MAX_FLIP`` frames, a jump, a missing frame, an
    unlabelled joint); the sets are drawn at random (seed 3). A reach of 4 fails it."""
    people = sequences.dancers(frames=24)
    people[3:8, 0] = people[3:8, 0][:, SKELETON.flip_index]  # the longest stretch found
    people[9, 1, LEFT_WRIST] = (0.0, 0.0, 0)
    people[11, 2, LEFT_WRIST, 0] += 60.0
    people[19, 0, LEFT_WRIST, 0] += 60.0
    tracks = [[1, 2, 3]] * 16 + [[2, 1, 3]] * 8  # dancers 0 and 1 exchange at index 16
    frames = _frames(people, tracks, missing={(13, 1)})
    whole = sequence_findings(frames, SKELETON)
    kinds = {f.kind for f in _all(whole)}
    assert kinds == {"exchanged-tracks", "flipped-stretch", "jumping-joint", "missing-frames",
                     "joint-gap"}, kinds
    assert len(frames) > 2 * 5 + 1 + 5, "the reach leaves frames out on both sides"
    for fid in range(1, 25):
        got = sequence_findings(_read_as_planned(frames, [fid]), SKELETON, at=[fid])
        assert repr(got) == repr({k: v for k, v in whole.items() if k == fid}), fid
    rng = np.random.default_rng(3)
    for _ in range(4):
        at = {int(x) for x in rng.choice(np.arange(1, 25), size=3, replace=False)}
        got = sequence_findings(_read_as_planned(frames, at), SKELETON, at=at)
        assert repr(got) == repr({k: v for k, v in whole.items() if k in at}), at
