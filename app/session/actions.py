"""Which of the app's actions can be used now, and which toggles are on, without Qt.

The window has one action per entry of the key table (:mod:`app.ui.keys`, by name); after
anything that could change them it asks :func:`action_states` and only copies the answer into
its actions. The rules read the session (the frame shown, the selection, the walk's stop, the
modes and the dispute of :class:`app.session.view.View`) and a few facts the session does not
hold (:class:`Circumstances`: the project's, the review's and Owners'). Tests call it without a
window (tests/session/test_actions.py).

The rules, in words:

- *editing* needs a writable project and a frame shown; the joint actions (give, mark, place,
  split) need a joint selected, the person actions (swap sides, merge, delete) a person;
  "give to the best" needs Owners to have a best candidate for the selection;
- the walk steps once a frame is shown; accepting needs the walk's stop to be on the frame
  shown and to propose a fix, dismissing needs it to be a finding (not a triage reason);
- undo and redo follow the project's stacks; importing and triage need a writable project;
  adding frames, pre-labelling and merging a packet also need the main project (not a review);
  sending frames for review needs frames;
- region mode needs a frame; on a disputed frame, the reviewer's version can be shown when
  there is one, the differences walked when there are open ones, a joint's or a person's taken
  or kept when the selection is on one that differs, and the frame settled while it is
  disputed (not by the reviewer);
- reviewing a packet, the decisions need a writable packet and a frame, and the one made is
  checked; sending it back and showing where it was blurred belong to the review only.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING

from app.model.labels import FrameState

if TYPE_CHECKING:
    from app.session.session import Session

#: The review decisions as the actions are named (the names kept from 0.1.0, see
#: DEVELOPERS.md "Vocabulary") and as they are stored.
DECISION_ACTIONS = (("decide_agree", "looks-right"), ("decide_needs_change", "query"),
                    ("decide_signed_off", "ready"))


@dataclass(frozen=True)
class Circumstances:
    """What the rules read besides the session.

    Attributes
    ----------
    read_only
        The project cannot be written (another editor holds it, or it was opened so).
    review
        The project is a review packet opened by its reviewer.
    can_undo, can_redo
        The project's undo and redo stacks are not empty.
    has_frames
        The project has frames (something to send for review).
    best_owner
        Owners has a best candidate owner for the selected joint.
    frame_state
        The state of the frame shown (None: no frame).
    decision
        The reviewer's decision on the frame shown (review only; None: none yet).
    """

    read_only: bool = False
    review: bool = False
    can_undo: bool = False
    can_redo: bool = False
    has_frames: bool = True
    best_owner: bool = False
    frame_state: FrameState | None = None
    decision: str | None = None


@dataclass
class ActionStates:
    """Action name -> enabled, and for the toggles the window sets, action name -> checked."""

    enabled: dict[str, bool] = field(default_factory=dict)
    checked: dict[str, bool] = field(default_factory=dict)

    def on(self) -> set[str]:
        """The names of the enabled actions."""
        return {name for name, e in self.enabled.items() if e}


def action_states(session: Session, c: Circumstances) -> ActionStates:
    """Which actions can be used now and which toggles are on (the rules are in the module
    docstring).

    Examples
    --------
    >>> from types import SimpleNamespace
    >>> from app.session.selection import Selection
    >>> from app.session.view import View
    >>> s = SimpleNamespace(frame_id=1, selection=Selection(), current=None, view=View(),
    ...                     dispute=None)
    >>> s.selection.select_joint(4, 9)
    >>> states = action_states(s, Circumstances(can_undo=True))
    >>> sorted(n for n in states.on() if n.startswith(("give_", "mark_", "undo", "redo")))
    ... # doctest: +NORMALIZE_WHITESPACE
    ['give_1', 'give_2', 'give_3', 'give_4', 'give_5', 'give_6', 'give_7', 'give_8',
     'give_9', 'mark_disputed', 'mark_occluded', 'mark_unlabeled', 'mark_visible', 'undo']
    >>> action_states(s, Circumstances(read_only=True)).enabled["give_1"]
    False
    """
    e: dict[str, bool] = {}
    writable = not c.read_only
    shown = session.frame_id is not None
    editable = writable and shown
    sel = session.selection
    joints = bool(sel.joints)
    person = sel.person is not None
    for n in range(1, 10):
        e[f"give_{n}"] = editable and joints
    for name in ("mark_visible", "mark_occluded", "mark_unlabeled", "place_joint",
                 "split_person"):
        e[name] = editable and joints
    e["give_best"] = editable and joints and c.best_owner
    for name in ("next_finding", "prev_finding"):
        e[name] = shown
    stop = session.current
    here = stop is not None and stop.frame_id == session.frame_id
    e["accept_fix"] = editable and here and stop.fix is not None
    e["dismiss_finding"] = editable and here and bool(stop.findings)
    card = here and len(stop.parts) > 1
    for name in ("next_part", "prev_part", "leave_out_part"):
        e[name] = editable and card
    e["new_person"] = editable
    for name in ("swap_sides", "merge_people", "delete_person"):
        e[name] = editable and person
    for name in ("mark_disputed", "sign_off", "write_note"):
        e[name] = editable
    e["undo"] = writable and c.can_undo
    e["redo"] = writable and c.can_redo
    for name in ("import_labels", "import_maps", "run_triage"):
        e[name] = writable
    for name in ("add_images", "add_video", "prelabel", "merge_packet"):
        e[name] = writable and not c.review
    e["export_packet"] = not c.review and c.has_frames
    e["region_mode"] = shown
    view = session.view
    checked = {"region_mode": view.region_mode, "show_theirs": view.showing_theirs}

    # A disputed frame.
    d = session.dispute
    joint = sel.joint
    e["show_theirs"] = view.has_theirs
    for name in ("next_difference", "prev_difference"):
        e[name] = d is not None
    on_joint = d is not None and joint is not None and d.joint(*joint) is not None
    on_person = d is not None and sel.person is not None and d.person(sel.person) is not None
    for side in ("take_theirs", "keep_ours"):
        e[f"{side}_joint"] = writable and on_joint
        e[f"{side}_person"] = writable and on_person
        e[f"{side}_frame"] = writable and d is not None
    e["settle_frame"] = writable and not c.review and c.frame_state is FrameState.DISPUTED

    # Reviewing a packet.
    for name, value in DECISION_ACTIONS:
        e[name] = c.review and writable and shown
        checked[name] = c.decision == value
    e["return_packet"] = c.review
    e["show_blurred"] = c.review
    return ActionStates(e, checked)
