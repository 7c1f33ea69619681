"""Settling a disputed frame joint by joint, person by person, or whole: the pure API the
Canvas will call. Rules are our own (no source); the labels are synthetic.
"""

from __future__ import annotations

import numpy as np
import pytest

from app.errors import EditRefused
from app.model.edits import DeletePerson, MoveJoint
from app.model.labels import FrameState
from app.model.targets import JointTarget, PersonTarget
from app.review.merge import merge_packet
from app.review.settle import (
    differences,
    keep_ours,
    settle_frame,
    take_theirs,
    take_theirs_edit,
    theirs_labels,
)
from tests.review.conftest import review, send


@pytest.fixture
def disputed(labelled, tmp_path):
    """A frame where ours and bea's disagree on joints 3 and 4 of person A, and bea deleted
    person B whom we edited."""
    frame = labelled.frames()[0]
    a, b = labelled.people(frame.id)[:2]
    packet = send(labelled, tmp_path / "p.zip")
    labelled.apply(MoveJoint(frame.id, a.id, 3, 30.0, 30.0))
    labelled.apply(MoveJoint(frame.id, a.id, 4, 40.0, 40.0))
    labelled.apply(MoveJoint(frame.id, b.id, 0, 1.0, 1.0))

    def edit(r):
        r.apply(MoveJoint(frame.id, a.id, 3, 33.0, 33.0))
        r.apply(MoveJoint(frame.id, a.id, 4, 44.0, 44.0))
        r.apply(DeletePerson(frame.id, b.id))

    merge_packet(labelled, review(packet, edit))
    assert labelled.frame(frame.id).state is FrameState.DISPUTED
    return labelled, frame.id, a.id, b.id


def _joints(project, fid):
    return {d.person_id: [j.joint for j in d.joints] for d in differences(project, fid)}


def test_differences_list_each_person_and_joint(disputed):
    project, fid, a, b = disputed
    diffs = {d.person_id: d for d in differences(project, fid)}
    assert set(diffs) == {a, b}
    assert [(j.joint, j.name, j.ours, j.theirs) for j in diffs[a].joints] == [
        (3, "left_ear", (30.0, 30.0, 2), (33.0, 33.0, 2)),
        (4, "right_ear", (40.0, 40.0, 2), (44.0, 44.0, 2))]
    assert diffs[b].alternative.kind == "deleted-there" and diffs[b].theirs is None
    assert all(j.theirs is None for j in diffs[b].joints)
    view = theirs_labels(project, fid)
    assert b not in view.people and view.people[a].keypoints[3, :2].tolist() == [33.0, 33.0]


def test_take_one_joint_is_one_undo_step(disputed):
    project, fid, a, _ = disputed
    applied = take_theirs(project, fid, a, 3)
    assert len(applied.changes) == 1 and applied.group_id is not None
    assert project.people(fid)[0].keypoints[3, :2].tolist() == [33.0, 33.0]
    assert _joints(project, fid)[a] == [4]
    assert project.history(limit=1)[0].author == "ana"  # whoever settles
    project.undo()
    assert _joints(project, fid)[a] == [3, 4]


def test_take_a_person_and_the_whole_frame(disputed):
    project, fid, a, b = disputed
    take_theirs(project, fid, a)
    assert a not in _joints(project, fid)
    applied = take_theirs(project, fid)  # what is left: B's deletion
    assert [c.target for c in applied.changes] == [PersonTarget(b)]
    assert b not in {p.id for p in project.people(fid)}
    assert differences(project, fid) == []
    project.undo()
    assert b in {p.id for p in project.people(fid)}


def test_the_whole_frame_in_one_step(disputed):
    project, fid, a, b = disputed
    edit = take_theirs_edit(project, fid)
    assert [c.target for c in edit.changes] == [JointTarget(a, 3), JointTarget(a, 4),
                                                PersonTarget(b)]
    group = project.apply(edit).group_id
    assert differences(project, fid) == []
    assert len([e for e in project.history(frame_id=fid) if e.group_id == group]) == 3
    project.undo()
    assert _joints(project, fid)[a] == [3, 4] and b in _joints(project, fid)


def test_keep_ours_settles_without_changing_labels(disputed):
    project, fid, a, b = disputed
    before = {p.id: p.keypoints.copy() for p in project.people(fid)}
    assert keep_ours(project, fid, a, 4) == 1
    assert _joints(project, fid)[a] == [3]
    assert keep_ours(project, fid, b) > 0 and b not in _joints(project, fid)
    after = {p.id: p.keypoints for p in project.people(fid)}
    assert all(np.array_equal(before[k], after[k], equal_nan=True) for k in before)
    assert keep_ours(project, fid, a, 4) == 0


def test_settling_ends_the_dispute_and_undo_brings_it_back(disputed):
    project, fid, a, b = disputed
    settle_frame(project, fid, FrameState.SIGNED_OFF)
    assert project.frame(fid).state is FrameState.SIGNED_OFF and differences(project, fid) == []
    project.undo()
    assert set(_joints(project, fid)) == {a, b}
    with pytest.raises(EditRefused):
        settle_frame(project, fid, FrameState.DISPUTED)


def test_refusals(disputed):
    project, fid, a, b = disputed
    with pytest.raises(EditRefused, match="take the whole person"):
        take_theirs(project, fid, b, 0)
    with pytest.raises(EditRefused, match="has no reviewer's version"):
        take_theirs(project, fid, 999_999)
    take_theirs(project, fid, a, 3)
    with pytest.raises(EditRefused, match="nothing differs"):
        take_theirs(project, fid, a, 3)


def test_a_person_we_deleted_comes_back_with_its_id(labelled, tmp_path):
    frame = labelled.frames()[0]
    victim = labelled.people(frame.id)[2]
    packet = send(labelled, tmp_path / "p.zip")
    labelled.apply(DeletePerson(frame.id, victim.id))
    merge_packet(labelled, review(packet, lambda r: r.apply(
        MoveJoint(frame.id, victim.id, 0, 2.0, 2.0))))
    (diff,) = differences(labelled, frame.id)
    assert diff.alternative.kind == "deleted-here" and diff.ours is None
    take_theirs(labelled, frame.id, victim.id)
    back = next(p for p in labelled.people(frame.id) if p.id == victim.id)
    assert back.keypoints[0, :2].tolist() == [2.0, 2.0]


def test_two_reviews_of_one_person_are_chosen_between(labelled, tmp_path):
    frame = labelled.frames()[0]
    a = labelled.people(frame.id)[0]
    first = send(labelled, tmp_path / "one.zip")
    second = send(labelled, tmp_path / "two.zip")
    labelled.apply(MoveJoint(frame.id, a.id, 3, 30.0, 30.0))
    merge_packet(labelled, review(first, lambda r: r.apply(
        MoveJoint(frame.id, a.id, 3, 33.0, 33.0))))
    merge_packet(labelled, review(second, lambda r: r.apply(
        MoveJoint(frame.id, a.id, 3, 34.0, 34.0)), reviewer="cleo"))
    diffs = differences(labelled, frame.id)
    assert sorted(d.reviewer for d in diffs) == ["bea", "cleo"]
    with pytest.raises(EditRefused, match="more than one review"):
        take_theirs(labelled, frame.id, a.id)
    cleo = next(d.alternative.id for d in diffs if d.reviewer == "cleo")
    take_theirs(labelled, frame.id, a.id, alternative=cleo)
    now = next(p for p in labelled.people(frame.id) if p.id == a.id)
    assert now.keypoints[3, :2].tolist() == [34.0, 34.0]
    assert [d.reviewer for d in differences(labelled, frame.id)] == ["bea"]
