"""Edit operations: behaviour of each, and the algebra (apply then invert gives the start)."""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from app.errors import EditRefused
from app.model import (
    AddNote,
    AddRegion,
    DeletePerson,
    DeleteRegion,
    DismissFinding,
    EditContext,
    EditGroup,
    FrameLabels,
    FrameState,
    MergePeople,
    MoveJoint,
    NewPerson,
    Person,
    ReassignJoint,
    ReshapeRegion,
    SetFrameState,
    SetVisibility,
    SplitPerson,
    SwapSides,
    coco_body,
    edit_from_value,
    edit_to_value,
)

SK = coco_body()
CTX = EditContext(author="ana", time=1000.0)


def _person(pid, xy0, v=2, labelled=None):
    kp = np.full((17, 3), np.nan)
    kp[:, 2] = 0
    for j in labelled if labelled is not None else range(17):
        kp[j] = (xy0[0] + j, xy0[1] + 2 * j, v)
    return Person(pid, kp, np.full(17, 0.5), ("auto",) * 17)


def _frame(*people, state=FrameState.UNTOUCHED):
    return FrameLabels(1, SK, {p.id: p for p in people}, state, {})


def test_move_joint_places_and_labels():
    labels = _frame(_person(1, (10, 10), labelled=[0]))
    new, changes = MoveJoint(1, 1, 5, 40.5, 60.25).apply(labels, CTX)
    assert new.people[1].keypoints[5].tolist() == [40.5, 60.25, 2]
    assert new.people[1].sources[5] == "ana"
    assert labels.people[1].keypoints[5, 2] == 0  # input untouched
    assert len(changes) == 1


def test_set_visibility_keeps_position_and_refuses_without_one():
    labels = _frame(_person(1, (10, 10), labelled=[0]))
    new, _ = SetVisibility(1, 1, 0, 0).apply(labels, CTX)
    assert new.people[1].keypoints[0, 2] == 0
    assert new.people[1].keypoints[0, 0] == 10  # remembered, not exported
    back, _ = SetVisibility(1, 1, 0, 1).apply(new, CTX)
    assert back.people[1].keypoints[0].tolist() == [10, 10, 1]
    with pytest.raises(EditRefused, match="no position"):
        SetVisibility(1, 1, 3, 2).apply(labels, CTX)
    with pytest.raises(EditRefused, match="not one of"):
        SetVisibility(1, 1, 0, 3).apply(labels, CTX)


def test_reassign_moves_or_swaps():
    a = _person(1, (10, 10))
    b = _person(2, (100, 100), labelled=[0, 1])
    labels = _frame(a, b)
    moved, _ = ReassignJoint(1, 1, 9, 2).apply(labels, CTX)
    assert moved.people[2].keypoints[9].tolist() == a.keypoints[9].tolist()
    assert moved.people[1].keypoints[9, 2] == 0
    swapped, _ = ReassignJoint(1, 1, 0, 2).apply(labels, CTX)
    assert swapped.people[2].keypoints[0].tolist() == a.keypoints[0].tolist()
    assert swapped.people[1].keypoints[0].tolist() == b.keypoints[0].tolist()


def test_merge_refuses_overlap_and_merges_disjoint():
    a = _person(1, (10, 10), labelled=range(0, 9))
    b = _person(2, (100, 100), labelled=range(8, 17))
    with pytest.raises(EditRefused, match="both have joint"):
        MergePeople(1, 1, 2).apply(_frame(a, b), CTX)
    b2 = _person(2, (100, 100), labelled=range(9, 17))
    merged, _ = MergePeople(1, 1, 2).apply(_frame(a, b2), CTX)
    assert list(merged.people) == [1]
    assert merged.people[1].num_labelled == 17


def test_split_moves_chosen_joints_to_a_new_person():
    labels = _frame(_person(1, (10, 10)))
    new, _ = SplitPerson(1, 1, (11, 12, 13), new_person_id=7).apply(labels, CTX)
    assert new.people[7].num_labelled == 3 and new.people[1].num_labelled == 14
    np.testing.assert_array_equal(new.people[7].keypoints[11], labels.people[1].keypoints[11])


def test_swap_sides_uses_flip_pairs():
    labels = _frame(_person(1, (10, 10)))
    new, _ = SwapSides(1, 1).apply(labels, CTX)
    np.testing.assert_array_equal(new.people[1].keypoints[SK.index("left_wrist")],
                                  labels.people[1].keypoints[SK.index("right_wrist")])
    np.testing.assert_array_equal(new.people[1].keypoints[0], labels.people[1].keypoints[0])


def test_state_and_note():
    labels = _frame(_person(1, (10, 10)))
    new, _ = SetFrameState(1, FrameState.DISPUTED).apply(labels, CTX)
    assert new.state is FrameState.DISPUTED
    assert SetFrameState(1, FrameState.DISPUTED).apply(new, CTX)[1] == []
    noted, _ = AddNote(1, "left wrist is the neighbour's", person_id=1, note_id=3).apply(
        labels, CTX)
    assert noted.notes[3].author == "ana" and noted.notes[3].person_id == 1
    with pytest.raises(EditRefused):
        AddNote(1, "   ", note_id=4).apply(labels, CTX)


def test_unknown_person_is_refused():
    with pytest.raises(EditRefused, match="no person #9"):
        DeletePerson(1, 9).apply(_frame(), CTX)


# ---------------------------------------------------------------- the algebra, property-based

def _edit_from(choice, labels):
    """Turn drawn numbers into an edit that fits the current labels (synthetic)."""
    kind, a, b, c, x, y = choice
    ids = sorted(labels.people)
    pid = ids[a % len(ids)] if ids else None
    other = ids[b % len(ids)] if ids else None
    j = c % 17
    new_id = max(ids, default=0) + 1
    options = [
        lambda: NewPerson(1, new_id),
        lambda: NewPerson(1, new_id, tuple((x + k, y + k, 2) for k in range(17))),
        lambda: MoveJoint(1, pid, j, x, y),
        lambda: SetVisibility(1, pid, j, b % 3),
        lambda: ReassignJoint(1, pid, j, other),
        lambda: DeletePerson(1, pid),
        lambda: MergePeople(1, pid, other),
        lambda: SplitPerson(1, pid, (j, (j + 3) % 17), new_id),
        lambda: SwapSides(1, pid),
        lambda: SetFrameState(1, list(FrameState)[b % 4]),
        lambda: AddNote(1, f"note {a}", None, 100 + a),
        lambda: AddRegion(1, ((x, y, x + 5, y, x, y + 5),), 200 + a),
        lambda: DeleteRegion(1, 200 + b),
        lambda: ReshapeRegion(1, 200 + b, ((x, y, x + 7, y, x, y + 3),)),
        lambda: DismissFinding(1, f"key{b % 3}", "duplicate", f"F{a}"),
        lambda: EditGroup(1, (MoveJoint(1, pid, j, x, y), SetVisibility(1, pid, j, a % 3),
                              ReassignJoint(1, pid, (j + 1) % 17, other))),
    ]
    return options[kind % len(options)]()


choices = st.lists(st.tuples(*(st.integers(0, 50),) * 4,
                             st.floats(-50, 500), st.floats(-50, 500)), max_size=25)


@settings(max_examples=150, deadline=None)
@given(choices)
def test_any_edit_sequence_inverted_in_reverse_gives_the_start(seq):
    """Synthetic random edit sequences; refused edits must leave the labels unchanged."""
    start = _frame(_person(1, (10, 10)), _person(2, (50, 20), labelled=[0, 5, 9]))
    labels, inverses = start, []
    for choice in seq:
        try:
            edit = _edit_from(choice, labels)
            inverse = edit.invert(labels, CTX)
            labels, _ = edit.apply(labels, CTX)
        except EditRefused:
            continue
        inverses.append(inverse)
    for inverse in reversed(inverses):
        labels, _ = inverse.apply(labels, CTX)
    assert labels.same_as(start)


def test_a_group_is_planned_in_order_and_refused_whole():
    """Each edit of a group sees the labels the ones before it leave; a refused edit refuses
    the whole group, the labels unchanged."""
    labels = _frame(_person(1, (10, 10)), _person(2, (50, 20), labelled=[0]))
    group = EditGroup(1, (MoveJoint(1, 1, 9, 5.0, 6.0), ReassignJoint(1, 1, 9, 2)))
    new, changes = group.apply(labels, CTX)
    assert new.people[2].keypoints[9].tolist() == [5.0, 6.0, 2]
    assert new.people[1].keypoints[9, 2] == 0
    assert len(changes) == 3
    refused = EditGroup(1, (MoveJoint(1, 1, 9, 5.0, 6.0), ReassignJoint(1, 2, 9, 1)))
    with pytest.raises(EditRefused):
        refused.apply(labels, CTX)
    with pytest.raises(EditRefused):
        EditGroup(1, (MoveJoint(2, 1, 9, 5.0, 6.0),)).apply(labels, CTX)


def test_a_dismissal_records_who_and_is_undone_by_its_inverse():
    labels = _frame(_person(1, (10, 10)))
    edit = DismissFinding(1, "abc123", "duplicate", "F1", "person 1 is found twice")
    new, _ = edit.apply(labels, CTX)
    assert new.dismissed["abc123"] == {"kind": "duplicate", "finding": "F1",
                                       "text": "person 1 is found twice", "author": "ana",
                                       "time": 1000.0}
    assert edit.apply(new, CTX)[1] == []  # dismissing again changes nothing
    back, _ = edit.invert(labels, CTX).apply(new, CTX)
    assert back.same_as(labels)


def test_edits_round_trip_through_their_values():
    """The edits a fix is made of survive the JSON the store keeps them in."""
    import json

    edits = [MoveJoint(3, 12, 9, 40.5, 60.25), SetVisibility(3, 12, 9, 0),
             ReassignJoint(3, 12, 9, 14), NewPerson(3, None, ((1.0, 2.0, 2),) * 17),
             DeletePerson(3, 12), MergePeople(3, 12, 14), SplitPerson(3, 12, (1, 2)),
             SwapSides(3, 12), SetFrameState(3, FrameState.CORRECTED),
             DismissFinding(3, "k", "split", "F2", "t"),
             EditGroup(3, (MoveJoint(3, 12, 9, 1.0, 2.0), DeletePerson(3, 14)), "fix")]
    for edit in edits:
        assert edit_from_value(json.loads(json.dumps(edit_to_value(edit)))) == edit
    with pytest.raises(EditRefused):
        edit_to_value(AddNote(3, "a note"))
    with pytest.raises(EditRefused):
        edit_from_value({"op": "Nothing"})


def test_a_new_persons_unlabelled_joints_survive_json_null():
    """JSON (RFC 8259) has no NaN: a packet writes a fix's unlabelled joints as null, and
    they read back as NaN."""
    import json

    from app.fileio import json_ready

    kp = ((1.0, 2.0, 2),) + ((float("nan"), float("nan"), 0),) * 16
    value, found = json_ready(edit_to_value(NewPerson(3, None, kp)))
    assert len(found) == 32
    back = edit_from_value(json.loads(json.dumps(value, allow_nan=False)))
    assert isinstance(back, NewPerson) and back.keypoints is not None
    assert back.keypoints[0] == (1.0, 2.0, 2)
    assert all(np.isnan(x) and np.isnan(y) and v == 0 for x, y, v in back.keypoints[1:])
