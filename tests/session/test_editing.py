"""The editing intents on the session without a window (app/session/editing.py): several
joints marked in one undo step, joints split off into a new person that stays selected, a
refused merge that changes nothing and says why, swapping sides and deleting, giving a joint
to another person by tag, stepping through the people. The window's keys and clicks reach
these intents in tests/ui/test_owners.py (end to end, a smaller set).

Data: three synthetic upright people on frame 1 (invented; the shape of tests/synthetic.py's
template). The visibility values follow the COCO keypoints format (v = 2 visible, 1 occluded,
0 unlabelled); the edit rules are our own (app/model/edits.py); one action, one undo step is
the command pattern's rule (common practice, no source).
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest

from app.model.edits import AddNote, MoveJoint, SetFrameState
from app.model.labels import AUTO, FrameState, Person
from app.session import Session
from app.session.status import owners_note


@pytest.fixture
def session(project):
    """A session on frame 1 with people of tags 1, 2, 3 standing apart, every joint visible;
    it reads the frame again on the project's change notice, as the window does."""
    with project.bulk("ImportTest", "synthetic people", "test") as b:
        first = b.allocate_person_ids(3)
        rows = []
        for n in range(3):
            kp = np.column_stack([40.0 + 90 * n + np.arange(17.0), np.arange(17.0) * 10 + 20,
                                  np.full(17, 2.0)])
            rows.append((1, replace(Person.blank(first + n, 17, AUTO), keypoints=kp)))
        b.add_people(rows)
    s = Session(project)
    s.open_frame(1)
    project.subscribe(lambda kind, ids: s.reload_frame() if s.frame_id in ids else None)
    s.said = []
    s.events.connect("message", lambda text, *_: s.said.append(text))
    return s


def _people(s):
    return {p.id: p for p in s.project.people(s.frame_id)}


def _groups(project):
    return len({e.group_id for e in project.history()})


def test_several_selected_joints_change_in_one_undo_step(session):
    s = session
    pid = s.people[1].id
    for j in (5, 6, 11):
        s.selection.select_joint(pid, j, add=True)
    n = _groups(s.project)
    s.editing.set_visibility(1)
    assert _people(s)[pid].keypoints[[5, 6, 11], 2].tolist() == [1] * 3
    assert _groups(s.project) == n + 1
    s.project.undo()
    assert _people(s)[pid].keypoints[[5, 6, 11], 2].tolist() == [2] * 3
    s.selection.select_person(None)
    s.editing.set_visibility(0)
    assert s.said[-1] == "select a joint first"


def test_split_selected_joints_into_a_new_person_who_stays_selected(session):
    s = session
    pid = s.people[2].id
    s.selection.select_joint(pid, 9)
    s.selection.select_joint(pid, 7, add=True)
    moved = []
    s.events.connect("selection", lambda: moved.append(list(s.selection.joints)))
    before = set(_people(s))
    s.editing.split_person()
    after = _people(s)
    (new,) = set(after) - before
    assert after[new].keypoints[[7, 9], 2].tolist() == [2, 2]
    assert int(after[new].keypoints[:, 2].astype(bool).sum()) == 2
    assert after[pid].keypoints[[7, 9], 2].tolist() == [0, 0]
    assert moved == [[(new, 9), (new, 7)]], "one selection event, on the new person"
    assert s.view.person(new) is not None, "the view shows them"


def test_a_refused_merge_changes_nothing_and_says_why(session):
    s = session
    keep, other = s.people[0].id, s.people[1].id
    s.selection.select_person(keep)
    n = len(s.project.history())
    s.editing.start_merge()
    assert s.view.pick == "merge" and s.said[-1].startswith("merge: click the person")
    s.view.set_pick(None)
    s.editing.merge_with(other)
    assert len(s.project.history()) == n
    assert {keep, other} <= set(_people(s))
    assert "both have" in s.said[-1]
    s.editing.merge_with(keep)
    assert s.said[-1] == "that is the same person; merge cancelled"


def test_swap_sides_and_delete_person(session):
    s = session
    pid = s.people[1].id
    s.selection.select_joint(pid, 5)
    before = _people(s)[pid].keypoints.copy()
    s.editing.swap_sides()
    after = _people(s)[pid].keypoints
    np.testing.assert_array_equal(after[5], before[6])
    np.testing.assert_array_equal(after[6], before[5])
    s.editing.delete_person()
    assert pid not in _people(s) and s.view.person(pid) is None
    assert s.selection.person is None, "the deleted person is no longer selected"


def test_give_by_tag_and_step_through_the_people(session):
    s = session
    a, b, c = (p.id for p in s.people)
    s.editing.step_person(-1)
    assert s.selection.person == c, "backwards from nothing: the last person"
    s.editing.step_person(1)
    assert s.selection.person == a
    s.selection.select_joint(a, 3)
    s.editing.give_to_number(4)
    assert s.said[-1] == "there is no person 4 in this frame"
    was = _people(s)[a].keypoints[3].copy()
    s.editing.give_to_number(2)
    np.testing.assert_array_equal(_people(s)[b].keypoints[3], was)
    assert s.selection.joints == [(b, 3)], "the selection follows the joint"
    s.editing.give_to(b)
    assert s.said[-1] == "the selected joint already belongs to person 2"


def test_the_reviewers_version_is_not_edited_but_takes_notes(session):
    """While the reviewer's version shows, an edit of the labels is refused with a word
    why; a note and the frame's state are still taken (our rule, README "Settling a disputed
    frame")."""
    s = session
    s.view.set_dispute(list(s.people), {}, {}, "bea")
    assert s.view.show_theirs(True)
    why = s.refuses(MoveJoint(1, s.people[0].id, 0, 5.0, 5.0))
    assert why == "showing bea's version, which is not edited here: B goes back to mine"
    assert s.refuses(AddNote(1, "looks odd")) is None
    assert s.refuses(SetFrameState(1, FrameState.DISPUTED)) is None
    s.view.show_theirs(False)
    assert s.refuses(MoveJoint(1, s.people[0].id, 0, 5.0, 5.0)) is None


def test_a_person_chosen_in_owners_is_merged_while_a_merge_waits(session):
    s = session
    a, b, _c = (p.id for p in s.people)
    s.editing.choose_person(b)
    assert s.selection.person == b and not s.selection.joints
    s.selection.select_person(a)
    s.editing.start_merge()
    assert s.editing.cancel_pick() and s.view.pick is None and s.said[-1] == "merge cancelled"
    assert not s.editing.cancel_pick()
    s.editing.start_merge()
    n = len(s.project.history())
    s.editing.choose_person(b)
    assert s.view.pick is None and len(s.project.history()) == n, "refused: both have joints"
    assert s.selection.person == a


def test_owners_are_ranked_for_one_joint_and_the_note_says_so(session):
    """The ranking itself is tested in tests/session/test_owners.py; here, when the session
    ranks and what Owners' note says (our wording)."""
    s = session
    a = s.people[0].id
    assert s.rank_owners() is None
    assert owners_note(s) == "Select a joint to see who it could belong to."
    s.selection.select_joint(a, 9)
    ranking = s.rank_owners()
    assert ranking is s.owner_ranking and ranking.owner.person_id == a
    assert owners_note(s).startswith(f"<b>{ranking.verdict}</b>")
    s.selection.select_joint(a, 7, add=True)
    assert owners_note(s) == "", "no note for several joints"
    s.selection.select_joint(a, 9)
    best = s.rank_owners().best.person_id  # the first candidate after the owner
    s.editing.give_to_best()
    assert s.selection.joints == [(best, 9)], "given, and the selection follows"
    s.selection.select_person(None)
    s.rank_owners()
    s.editing.give_to_best()
    assert s.said[-1] == "no suggestion for the selection"
    s.view.set_dispute(list(s.people), {}, {}, "bea")
    s.view.show_theirs(True)
    assert s.rank_owners() is None, "not on the reviewer's version"


def test_a_typed_tag_waits_for_a_second_digit_only_when_one_could_follow(session):
    s = session
    a, b, _c = (p.id for p in s.people)
    assert not s.editing.type_digit("2")
    assert s.said[-1] == "select a joint first, then press the number of its owner"
    s.selection.select_joint(a, 4)
    assert not s.editing.type_digit("2"), "three people: 2 cannot grow, given at once"
    assert s.selection.joints == [(b, 4)] and s.editing.typed == ""
    crowd = [Person.blank(900 + n, 17) for n in range(12)]
    s.view.show(crowd, {})  # a view of twelve (stand-ins): tag 1 may become 10 to 12
    s.selection.select_joint(900, 0)
    assert s.editing.type_digit("1") and s.editing.typed == "1"
    assert s.said[-1] == "give to person 1\u2026"
    s.editing.cancel_typing()
    assert s.editing.typed == ""


def test_undo_and_redo_say_what_they_did_and_ask_for_the_frame_they_changed(session):
    s = session
    pid = s.people[0].id
    shown = []
    s.events.connect("show", shown.append)
    s.selection.select_joint(pid, 2)
    s.editing.set_visibility(1)
    assert s.undo() is not None and s.said[-1].startswith("undone: ")
    assert shown == [], "the frame changed is the one shown"
    assert s.redo() is not None and s.said[-1].startswith("redone: ")
    s.project.undo()
    s.open_frame(2)  # the annotator moved on to another frame
    s.redo()
    assert shown == [1]
    s.redo()
    assert s.said[-1] == "nothing to redo"
