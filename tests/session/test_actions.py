"""Which actions the app offers, decided on the session without a window
(app/session/actions.py): editing needs a writable project and a frame, the joint and person
actions a selection, the walk's accept a fix on the frame shown, settling a difference
selected, the decisions a review.

The rules are our own (README "Keys" and "Settling a disputed frame"; greying out what cannot
apply now is common practice, no source). The session, stop and dispute here are stand-ins
with invented ids (synthetic); the window's own wiring is tested end to end in tests/ui.
"""

from __future__ import annotations

from types import SimpleNamespace

from app.model.labels import FrameState
from app.session.actions import Circumstances, action_states
from app.session.selection import Selection
from app.session.view import View
from app.session.walk import Stop

JOINT_ACTIONS = {f"give_{n}" for n in range(1, 10)} | {
    "mark_visible", "mark_occluded", "mark_unlabeled", "place_joint", "split_person"}
PERSON_ACTIONS = {"swap_sides", "merge_people", "delete_person"}
SETTLING = {f"{side}_{what}" for side in ("take_theirs", "keep_ours")
            for what in ("joint", "person", "frame")}


def _session(frame_id=7, stop=None, dispute=None):
    return SimpleNamespace(frame_id=frame_id, selection=Selection(), current=stop,
                           view=View(), dispute=dispute)


class _Dispute:
    """Person 4's joint 9 differs from the reviewer's."""

    joints = ((4, 9),)

    def joint(self, pid, j):
        return ("person", "joint") if (pid, j) == (4, 9) else None

    def person(self, pid):
        return "person" if pid == 4 else None


def test_nothing_shown_offers_only_the_project_actions():
    on = action_states(_session(frame_id=None), Circumstances()).on()
    assert on == {"import_labels", "import_maps", "run_triage", "add_images", "add_video",
                  "prelabel", "merge_packet", "export_packet"}


def test_the_joint_and_person_actions_follow_the_selection():
    s = _session()
    on = action_states(s, Circumstances()).on()
    assert not (JOINT_ACTIONS | PERSON_ACTIONS) & on and "new_person" in on
    s.selection.select_person(4)
    on = action_states(s, Circumstances()).on()
    assert on >= PERSON_ACTIONS and not JOINT_ACTIONS & on
    s.selection.select_joint(4, 9)
    on = action_states(s, Circumstances()).on()
    assert on >= JOINT_ACTIONS | PERSON_ACTIONS and "give_best" not in on
    assert "give_best" in action_states(s, Circumstances(best_owner=True)).on()
    read_only = action_states(s, Circumstances(read_only=True, can_undo=True)).on()
    assert read_only == {"next_finding", "prev_finding", "region_mode", "export_packet"}


def test_a_triage_reason_can_be_neither_accepted_nor_dismissed():
    reason = Stop(7, "R0", 4, (9,), "person 1: a stretched limb")
    on = action_states(_session(stop=reason), Circumstances()).on()
    assert {"next_finding", "prev_finding"} <= on
    assert not {"accept_fix", "dismiss_finding"} & on
    elsewhere = action_states(_session(frame_id=8, stop=reason), Circumstances()).on()
    assert "accept_fix" not in elsewhere


def test_settling_needs_a_difference_selected_and_the_main_project():
    s = _session(dispute=_Dispute())
    disputed = Circumstances(frame_state=FrameState.DISPUTED)
    on = action_states(s, disputed).on()
    assert on & SETTLING == {"take_theirs_frame", "keep_ours_frame"}
    assert {"next_difference", "prev_difference", "settle_frame"} <= on
    s.selection.select_joint(4, 3)  # a joint that agrees, of the person who differs
    assert action_states(s, disputed).on() & SETTLING == SETTLING - {
        "take_theirs_joint", "keep_ours_joint"}
    s.selection.select_joint(4, 9)
    assert action_states(s, disputed).on() >= SETTLING
    assert "settle_frame" not in action_states(s, Circumstances(
        frame_state=FrameState.CORRECTED)).on()


def test_a_review_decides_and_sends_back_but_adds_no_frames():
    states = action_states(_session(), Circumstances(review=True, decision="query"))
    on = states.on()
    assert {"decide_agree", "decide_needs_change", "decide_signed_off", "return_packet",
            "show_blurred"} <= on
    assert not {"add_images", "prelabel", "merge_packet", "export_packet", "settle_frame"} & on
    assert [n for n, c in states.checked.items() if c] == ["decide_needs_change"]
    assert not {"decide_agree", "return_packet"} & action_states(_session(),
                                                                 Circumstances()).on()
