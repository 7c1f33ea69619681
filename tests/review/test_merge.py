"""The three-way merge of a returned packet: the cases of issue 5, end to end and pure.

Rules under test are our own (the usual three-way rule of version control, common practice,
no source). Every label is synthetic; "ana" annotates, "bea" reviews.
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from app.errors import BadInput, PosewrightError
from app.jobs import new_project
from app.model.edits import (
    AddNote,
    DeletePerson,
    MoveJoint,
    NewPerson,
    ReassignJoint,
    SetFrameState,
    SetVisibility,
)
from app.model.labels import FrameLabels, FrameState, Person
from app.model.skeleton import coco_body
from app.review import merge as merge_module
from app.review.merge import merge_packet, plan_frame, same_joints
from app.review.packet import FrameContent
from app.review.settle import differences
from tests.review.conftest import review, send

SK = coco_body()


def _labels(project, frame_id):
    return {p.id: p.keypoints.copy() for p in project.people(frame_id)}


def _first(project):
    frame = project.frames()[0]
    people = project.people(frame.id)
    return frame.id, people


def _joint(kp: np.ndarray, j: int) -> list[float]:
    return kp[j].tolist()


def test_changes_one_side_made_are_taken_and_credited_to_the_reviewer(labelled, tmp_path):
    fid, people = _first(labelled)
    a, b = people[0].id, people[1].id
    labelled.apply(MoveJoint(fid, a, 5, 40.0, 41.0))  # ours only
    packet = send(labelled, tmp_path / "p.zip")
    labelled.apply(MoveJoint(fid, a, 6, 42.0, 43.0))  # ours only, after sending

    def edit(r):
        r.apply(MoveJoint(fid, b, 9, 100.0, 101.0))  # theirs only
        r.apply(SetVisibility(fid, b, 10, 0))

    returned = review(packet, edit)
    before = len(labelled.history())
    report = merge_packet(labelled, returned)
    now = _labels(labelled, fid)
    assert _joint(now[a], 5) == [40.0, 41.0, 2] and _joint(now[a], 6) == [42.0, 43.0, 2]
    assert _joint(now[b], 9)[:2] == [100.0, 101.0] and now[b][10, 2] == 0
    assert report.joints_taken == 2 and report.conflicts == []
    assert labelled.frame(fid).state is FrameState.CORRECTED
    merged = [e for e in labelled.history()[: len(labelled.history()) - before]
              if e.kind == "edit"]
    assert merged and {e.author for e in merged} == {"bea"}
    person_b = next(p for p in labelled.people(fid) if p.id == b)
    assert person_b.sources[9] == "bea"
    # each step is undoable: undo the merged joints
    assert labelled.undo() is not None
    assert _joint(_labels(labelled, fid)[b], 9)[:2] == _joint(people[1].keypoints, 9)[:2]


def test_both_sides_making_the_same_change_is_no_conflict(labelled, tmp_path):
    fid, people = _first(labelled)
    pid = people[0].id
    packet = send(labelled, tmp_path / "p.zip")
    labelled.apply(MoveJoint(fid, pid, 3, 70.0, 71.0))
    returned = review(packet, lambda r: r.apply(MoveJoint(fid, pid, 3, 70.0, 71.0)))
    report = merge_packet(labelled, returned)
    assert report.conflicts == [] and report.joints_taken == 0
    assert labelled.frame(fid).state is FrameState.CORRECTED


def test_different_changes_to_one_joint_conflict_and_both_versions_are_kept(labelled,
                                                                            tmp_path):
    fid, people = _first(labelled)
    pid = people[0].id
    packet = send(labelled, tmp_path / "p.zip")
    labelled.apply(MoveJoint(fid, pid, 7, 10.0, 10.0))

    def edit(r):
        r.apply(MoveJoint(fid, pid, 7, 90.0, 90.0))
        r.apply(MoveJoint(fid, pid, 8, 91.0, 92.0))  # no conflict: taken

    report = merge_packet(labelled, review(packet, edit))
    assert report.conflicts == [{"frame": fid, "person": pid, "kind": "joints", "joints": [7]}]
    assert labelled.frame(fid).state is FrameState.DISPUTED and report.disputed == [fid]
    now = _labels(labelled, fid)[pid]
    assert _joint(now, 7) == [10.0, 10.0, 2] and _joint(now, 8)[:2] == [91.0, 92.0]
    (diff,) = differences(labelled, fid)
    assert diff.person_id == pid and diff.reviewer == "bea"
    assert [(d.joint, d.ours, d.theirs) for d in diff.joints] == \
        [(7, (10.0, 10.0, 2), (90.0, 90.0, 2))]


@pytest.mark.parametrize("who_deletes", ["ours", "theirs"])
def test_deleting_against_editing_is_a_conflict(labelled, tmp_path, who_deletes):
    fid, people = _first(labelled)
    pid = people[1].id
    packet = send(labelled, tmp_path / "p.zip")
    if who_deletes == "ours":
        labelled.apply(DeletePerson(fid, pid))
        returned = review(packet, lambda r: r.apply(MoveJoint(fid, pid, 0, 5.0, 6.0)))
    else:
        labelled.apply(MoveJoint(fid, pid, 0, 5.0, 6.0))
        returned = review(packet, lambda r: r.apply(DeletePerson(fid, pid)))
    report = merge_packet(labelled, returned)
    kind = "deleted-here" if who_deletes == "ours" else "deleted-there"
    assert [(c["person"], c["kind"]) for c in report.conflicts] == [(pid, kind)]
    assert labelled.frame(fid).state is FrameState.DISPUTED
    present = pid in _labels(labelled, fid)
    assert present is (who_deletes == "theirs")  # ours stays until settled
    (diff,) = differences(labelled, fid)
    assert (diff.ours is None) is (who_deletes == "ours")
    assert (diff.theirs is None) is (who_deletes == "theirs")


def test_a_deletion_against_no_change_is_taken(labelled, tmp_path):
    fid, people = _first(labelled)
    pid = people[2].id
    returned = review(send(labelled, tmp_path / "p.zip"),
                      lambda r: r.apply(DeletePerson(fid, pid)))
    report = merge_packet(labelled, returned)
    assert report.people_deleted == 1 and pid not in _labels(labelled, fid)


def test_reassign_against_move(labelled, tmp_path):
    """Theirs gives person A's wrist to person B; ours moved A's wrist meanwhile. B's wrist
    comes over (only theirs changed it); A's wrist conflicts (both changed it differently)."""
    fid, people = _first(labelled)
    wrist = SK.index("left_wrist")
    giver = next(p for p in people if p.keypoints[wrist, 2] > 0)
    taker = next(p for p in people if p.id != giver.id)
    packet = send(labelled, tmp_path / "p.zip")
    labelled.apply(MoveJoint(fid, giver.id, wrist, 33.0, 44.0))
    returned = review(packet, lambda r: r.apply(ReassignJoint(fid, giver.id, wrist, taker.id)))
    report = merge_packet(labelled, returned)
    assert report.conflicts == [{"frame": fid, "person": giver.id, "kind": "joints",
                                 "joints": [wrist]}]
    now = _labels(labelled, fid)
    assert _joint(now[taker.id], wrist) == _joint(giver.keypoints, wrist)
    assert _joint(now[giver.id], wrist) == [33.0, 44.0, 2]


def test_notes_from_both_sides_are_kept_with_their_authors_and_times(labelled, tmp_path):
    fid, people = _first(labelled)
    labelled.apply(AddNote(fid, "is that the left wrist?"))
    packet = send(labelled, tmp_path / "p.zip")
    labelled.apply(AddNote(fid, "ours, written after sending"))
    noted = {}

    def edit(r):
        added = r.apply(NewPerson(fid, keypoints=tuple((60.0 + j, 70.0, 2) for j in range(17))))
        r.apply(AddNote(fid, "I added the dancer at the back", person_id=added.edit.person_id))
        noted.update({n.text: n for n in r.notes(fid)})

    report = merge_packet(labelled, review(packet, edit))
    notes = {n.text: n for n in labelled.notes(fid)}
    assert set(notes) == {"is that the left wrist?", "ours, written after sending",
                          "I added the dancer at the back"}
    theirs = notes["I added the dancer at the back"]
    assert theirs.author == "bea"
    assert theirs.time == noted["I added the dancer at the back"].time
    new_ids = {p.id for p in labelled.people(fid)} - {p.id for p in people}
    assert report.people_added == 1 and len(new_ids) == 1
    (new_id,) = new_ids
    assert new_id < 1_000_000_000 and theirs.person_id == new_id


def test_merging_the_same_packet_twice_changes_nothing_the_second_time(labelled, tmp_path):
    fid, people = _first(labelled)
    pid = people[0].id
    packet = send(labelled, tmp_path / "p.zip")
    labelled.apply(MoveJoint(fid, pid, 1, 1.0, 1.0))

    def edit(r):
        r.apply(MoveJoint(fid, pid, 1, 2.0, 2.0))
        r.apply(AddNote(fid, "second look"))
        r.apply(NewPerson(fid, keypoints=tuple((9.0, 9.0 + j, 1) for j in range(17))))

    returned = review(packet, edit, decisions={fid: "agree"})
    first = merge_packet(labelled, returned)
    assert not first.already_merged
    labels, ledger = _labels(labelled, fid), len(labelled.history())
    second = merge_packet(labelled, returned)
    assert second.already_merged and second.merged_at == pytest.approx(first.merged_at)
    assert len(labelled.history()) == ledger
    after = _labels(labelled, fid)
    assert after.keys() == labels.keys()
    assert all(np.array_equal(after[k], labels[k], equal_nan=True) for k in labels)
    again = review(packet)  # returned once more, unchanged: the same review
    assert merge_packet(labelled, again).already_merged
    assert len(labelled.history()) == ledger


def test_an_interrupted_merge_is_finished_by_merging_again(labelled, tmp_path, monkeypatch):
    """A crash after the frames were merged but before the packet was recorded: the second
    merge adds no second copy of the new person or the note."""
    fid, people = _first(labelled)

    def edit(r):
        r.apply(MoveJoint(fid, people[0].id, 2, 12.0, 13.0))
        r.apply(AddNote(fid, "one note"))
        r.apply(NewPerson(fid, keypoints=tuple((30.0, 30.0 + j, 2) for j in range(17))))

    returned = review(send(labelled, tmp_path / "p.zip"), edit)

    def crash(*args, **kwargs):
        raise PosewrightError("simulated crash")

    monkeypatch.setattr(merge_module, "_record", crash)
    with pytest.raises(PosewrightError):
        merge_packet(labelled, returned)
    monkeypatch.undo()
    report = merge_packet(labelled, returned)
    assert not report.already_merged and report.joints_taken == 0
    assert report.people_added == 0 and report.notes_added == 0
    assert len(labelled.people(fid)) == len(people) + 1
    assert [n.text for n in labelled.notes(fid)] == ["one note"]


@pytest.mark.parametrize("decision, disputed, changed_here, state", [
    ("ready", False, False, FrameState.SIGNED_OFF),
    ("ready", False, True, FrameState.CORRECTED),
    ("query", False, False, FrameState.DISPUTED),
    ("looks-right", False, False, FrameState.UNTOUCHED),
    ("looks-right", True, False, FrameState.CORRECTED),
    ("looks-right", True, True, FrameState.DISPUTED),
    # the words of version 0.1.0 mean the same
    ("signed-off", False, False, FrameState.SIGNED_OFF),
    ("needs-change", False, False, FrameState.DISPUTED),
    ("agree", True, False, FrameState.CORRECTED),
])
def test_decisions_set_the_frame_state(labelled, tmp_path, decision, disputed, changed_here,
                                       state):
    fid, people = _first(labelled)
    if disputed:
        labelled.apply(SetFrameState(fid, FrameState.DISPUTED))
    packet = send(labelled, tmp_path / "p.zip")
    if changed_here:
        labelled.apply(MoveJoint(fid, people[0].id, 0, 3.0, 3.0))
    report = merge_packet(labelled, review(packet, decisions={fid: decision}))
    assert labelled.frame(fid).state is state
    assert (fid in report.signed_off) is (state is FrameState.SIGNED_OFF)


# ---------------------------------------------------------------------- returning again

def _again(packet, edit=None, decisions=None, keep=None):
    """The reviewer reopens the same packet, edits more and returns it again; ``keep`` saves
    a copy of the return (the next one overwrites the file)."""
    returned = review(packet, edit, decisions)
    if keep is not None:
        keep.write_bytes(returned.read_bytes())
        return keep
    return returned


def test_a_later_return_by_the_same_reviewer_supersedes_the_earlier(labelled, tmp_path):
    """Issue item 5: bea's second return moves a joint she moved in her first, merged return,
    and adds an edit: both are taken, nothing is disputed. The base of her second return is
    her first, as merged (the usual rule of repeated merges in version control: the base
    moves to what was merged; common practice, no source)."""
    fid, people = _first(labelled)
    pid = people[0].id
    packet = send(labelled, tmp_path / "p.zip")
    first = merge_packet(labelled, _again(packet, lambda r: r.apply(
        MoveJoint(fid, pid, 7, 90.0, 90.0)), keep=tmp_path / "first.zip"))
    assert first.joints_taken == 1 and first.conflicts == []

    def more(r):
        r.apply(MoveJoint(fid, pid, 7, 95.0, 96.0))
        r.apply(MoveJoint(fid, pid, 8, 50.0, 51.0))

    second = merge_packet(labelled, _again(packet, more))
    assert second.conflicts == [] and second.joints_taken == 2
    now = _labels(labelled, fid)[pid]
    assert _joint(now, 7) == [95.0, 96.0, 2] and _joint(now, 8) == [50.0, 51.0, 2]
    assert labelled.frame(fid).state is FrameState.CORRECTED
    # merging the first return again is the repeat it is: nothing changes
    assert merge_packet(labelled, tmp_path / "first.zip").already_merged


def test_an_older_return_arriving_after_a_newer_one_is_refused(labelled, tmp_path):
    fid, people = _first(labelled)
    pid = people[0].id
    packet = send(labelled, tmp_path / "p.zip")
    older = _again(packet, lambda r: r.apply(MoveJoint(fid, pid, 7, 90.0, 90.0)),
                   keep=tmp_path / "older.zip")
    merge_packet(labelled, _again(packet, lambda r: r.apply(MoveJoint(fid, pid, 7, 95.0,
                                                                      95.0))))
    ledger = len(labelled.history())
    with pytest.raises(BadInput, match=r"that newer review, merged on .*, supersedes this one"):
        merge_packet(labelled, older)
    assert len(labelled.history()) == ledger
    assert _joint(_labels(labelled, fid)[pid], 7) == [95.0, 95.0, 2]


def test_a_change_made_here_between_two_returns_still_conflicts(labelled, tmp_path):
    """Issue item 5: what we changed at home after merging bea's first return meets her
    second return as "ours" against "theirs"; a joint she left alone since keeps ours."""
    fid, people = _first(labelled)
    pid = people[0].id
    packet = send(labelled, tmp_path / "p.zip")

    def first(r):
        r.apply(MoveJoint(fid, pid, 7, 90.0, 90.0))
        r.apply(MoveJoint(fid, pid, 9, 70.0, 70.0))

    merge_packet(labelled, _again(packet, first))
    labelled.apply(MoveJoint(fid, pid, 7, 10.0, 10.0))  # at home, after the first merge
    labelled.apply(MoveJoint(fid, pid, 9, 11.0, 11.0))
    report = merge_packet(labelled, _again(packet, lambda r: r.apply(
        MoveJoint(fid, pid, 7, 95.0, 95.0))))
    assert report.conflicts == [{"frame": fid, "person": pid, "kind": "joints", "joints": [7]}]
    assert labelled.frame(fid).state is FrameState.DISPUTED
    now = _labels(labelled, fid)[pid]
    assert _joint(now, 7) == [10.0, 10.0, 2] and _joint(now, 9) == [11.0, 11.0, 2]
    (diff,) = differences(labelled, fid)
    assert [(d.joint, d.theirs) for d in diff.joints] == [(7, (95.0, 95.0, 2))]


def test_a_person_the_reviewer_added_is_edited_by_the_next_return(labelled, tmp_path):
    """The person bea added comes over with a new id once; her later edit of that person
    lands on it, with no second copy and no conflict."""
    fid, people = _first(labelled)
    packet = send(labelled, tmp_path / "p.zip")
    added = {}

    def add(r):
        made = r.apply(NewPerson(fid, keypoints=tuple((60.0 + j, 70.0, 2) for j in range(17))))
        added["id"] = made.edit.person_id

    assert merge_packet(labelled, _again(packet, add)).people_added == 1
    (home,) = {p.id for p in labelled.people(fid)} - {p.id for p in people}
    second = merge_packet(labelled, _again(packet, lambda r: r.apply(
        MoveJoint(fid, added["id"], 0, 5.0, 6.0))))
    assert second.people_added == 0 and second.conflicts == [] and second.joints_taken == 1
    assert {p.id for p in labelled.people(fid)} == {p.id for p in people} | {home}
    assert _joint(_labels(labelled, fid)[home], 0) == [5.0, 6.0, 2]


@pytest.mark.parametrize("then, disputed_joints", [
    ("leaves it", [7]),          # her view stands: still disputed
    ("agrees with ours", []),    # she withdrew it
    ("insists anew", [7]),       # a new position of hers: disputed against it
])
def test_an_open_dispute_follows_the_reviewers_latest_word(labelled, tmp_path, then,
                                                           disputed_joints):
    fid, people = _first(labelled)
    pid = people[0].id
    packet = send(labelled, tmp_path / "p.zip")
    labelled.apply(MoveJoint(fid, pid, 7, 10.0, 10.0))
    first = merge_packet(labelled, _again(packet, lambda r: r.apply(
        MoveJoint(fid, pid, 7, 90.0, 90.0))))
    assert [c["joints"] for c in first.conflicts] == [[7]]
    position = {"leaves it": None, "agrees with ours": (10.0, 10.0),
                "insists anew": (80.0, 80.0)}[then]

    def second(r):
        r.apply(MoveJoint(fid, pid, 8, 50.0, 50.0))
        if position is not None:
            r.apply(MoveJoint(fid, pid, 7, *position))

    merge_packet(labelled, _again(packet, second))
    assert _joint(_labels(labelled, fid)[pid], 8) == [50.0, 50.0, 2]
    diffs = differences(labelled, fid)
    assert [d.joint for diff in diffs for d in diff.joints] == disputed_joints
    if then == "insists anew":
        assert diffs[0].joints[0].theirs == (80.0, 80.0, 2)


def test_a_settled_dispute_stays_settled_when_the_reviewer_returns_again(labelled, tmp_path):
    """We kept ours on the joint bea disputed and settled the frame; her next return, which
    does not touch that joint again, reopens nothing."""
    from app.review.settle import keep_ours, settle_frame

    fid, people = _first(labelled)
    pid = people[0].id
    packet = send(labelled, tmp_path / "p.zip")
    labelled.apply(MoveJoint(fid, pid, 7, 10.0, 10.0))
    merge_packet(labelled, _again(packet, lambda r: r.apply(
        MoveJoint(fid, pid, 7, 90.0, 90.0))))
    assert keep_ours(labelled, fid) == 1
    settle_frame(labelled, fid)
    report = merge_packet(labelled, _again(packet, lambda r: r.apply(
        MoveJoint(fid, pid, 8, 50.0, 50.0))))
    assert report.conflicts == [] and labelled.frame(fid).state is FrameState.CORRECTED
    assert _joint(_labels(labelled, fid)[pid], 7) == [10.0, 10.0, 2]


# ---------------------------------------------------------------------- pure plan properties

_K = 4


def _person(pid: int, kp: np.ndarray, who: str = "import") -> Person:
    return Person(pid, kp, np.full(len(kp), np.nan), (who,) * len(kp))


@st.composite
def _three_versions(draw):
    """Base, ours and theirs of one synthetic person: each side keeps, moves or unlabels each
    joint at random."""
    base = np.array([[10.0 * j, 5.0, 2] for j in range(_K)])

    def side(name):
        kp = base.copy()
        for j in range(_K):
            action = draw(st.sampled_from(["keep", "keep", "move", "unlabel"]), label=name)
            if action == "move":
                kp[j, :2] += draw(st.sampled_from([1.0, 2.0]), label=name)
            elif action == "unlabel":
                kp[j, 2] = 0
        return kp

    return base, side("ours"), side("theirs")


def _plan(base, ours, theirs):
    from app.model.skeleton import Side, Skeleton

    sk = Skeleton("four", tuple(f"j{j}" for j in range(_K)), (Side.CENTRE,) * _K, (),
                  (0.05,) * _K)
    return plan_frame(FrameContent(1, {7: _person(7, base)}, {}),
                      FrameLabels(1, sk, {7: _person(7, ours, "ana")}),
                      FrameContent(1, {7: _person(7, theirs, "bea")}, {}))


@settings(max_examples=150, deadline=None)
@given(_three_versions())
def test_plan_properties(versions):
    """Unchanged ours takes theirs whole; unchanged theirs changes nothing; conflicts are the
    same whichever side is called ours; applied changes leave ours where ours changed."""
    base, ours, theirs = versions
    plan = _plan(base, ours, theirs)
    swapped = _plan(base, theirs, ours)
    conflicted = set(plan.conflicts[0].joints) if plan.conflicts else set()
    assert conflicted == (set(swapped.conflicts[0].joints) if swapped.conflicts else set())
    merged = _person(7, ours)
    for change in plan.changes:
        merged = merged.with_joint(change.target.joint, change.after)
    if same_joints(ours, base).all():
        assert not conflicted and same_joints(merged.keypoints, theirs).all()
    if same_joints(theirs, base).all():
        assert plan.changes == [] and not conflicted
    ours_changed = ~same_joints(ours, base)
    assert same_joints(merged.keypoints, ours)[ours_changed].all()
    if conflicted:
        alt = plan.conflicts[0].theirs
        assert alt is not None
        differ = set(np.flatnonzero(~same_joints(merged.keypoints, alt.keypoints)).tolist())
        assert differ == conflicted


def test_a_schema_2_project_gains_the_review_tables(tmp_path, image_dir):
    """A project written before schema 3 opens, migrates, and can send a packet."""
    import sqlite3

    from app.store import Project
    from app.store.schema import SCHEMA_VERSION

    with new_project(tmp_path / "old", images=image_dir, author="ana"):
        pass
    db = tmp_path / "old" / "project.db"
    conn = sqlite3.connect(db, isolation_level=None)
    for table in ("packets", "alternatives", "review_decisions"):
        conn.execute(f"DROP TABLE {table}")
    conn.execute("PRAGMA user_version = 2")
    conn.close()
    with Project.open(tmp_path / "old") as p:
        send(p, tmp_path / "p.zip")
        assert len(p.packet_records(p.history()[0].target.what[len("packet:"):],
                                    "exported")) == 1
    conn = sqlite3.connect(db)
    assert conn.execute("PRAGMA user_version").fetchone()[0] == SCHEMA_VERSION >= 4
    conn.close()
