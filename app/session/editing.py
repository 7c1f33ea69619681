"""What the editing keys do to the frame shown, without Qt: give joints to a person, mark
their visibility, place one, add, split, merge, swap or delete a person, mark the frame, step
through its people.

Each intent reads the session's selection, builds the edit (:mod:`app.model.edits`), applies
it through the session's ``apply`` (the window's, which refuses edits while the reviewer's
version is shown and reports errors; else the project's), says what happened through the
session's ``message`` event and moves the selection after the edit through the session's
``selection`` event (the Canvas repaints on it). The people shown are read again by whoever
hears the project's change notice (the window; a test calls
:meth:`app.session.session.Session.reload_frame`). Tests: tests/session/test_editing.py.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

from app.errors import EditRefused
from app.model.edits import (
    DeletePerson,
    Edit,
    EditGroup,
    MergePeople,
    MoveJoint,
    NewPerson,
    ReassignJoint,
    SetFrameState,
    SetVisibility,
    SplitPerson,
    SwapSides,
)
from app.model.labels import FrameState
from app.session.owners import swap_warning
from app.session.status import STATE_WORDS, VISIBILITY_WORDS
from app.wording import count

if TYPE_CHECKING:
    from app.session.session import Session


#: How long a typed tag waits for another digit when the frame has ten people or more (ms):
#: the window's timer then calls :meth:`Editing.commit_typed`.
TAG_WAIT_MS = 700


class Editing:
    """The editing intents over one session (``session.editing``)."""

    def __init__(self, session: Session):
        self.session = session
        #: The digits of a tag typed so far (a joint is given to that person once typed).
        self.typed = ""

    # ------------------------------------------------------------------ helpers

    def _say(self, text: str, *how_long: int) -> None:
        """Tell the annotator (``how_long``: the window's time in ms; 0 until replaced)."""
        self.session.events.emit("message", text, *how_long)

    def _apply(self, edit: Edit) -> Any:
        """Apply through the session; a refusal is said, and gives None."""
        try:
            return self.session._apply(edit)
        except EditRefused as exc:
            self._say(f"not done: {exc}")
            return None

    # ------------------------------------------------------------------ joints

    def give_to(self, target: int) -> None:
        """Give the selected joint(s) to person ``target``; the selection follows them, and
        giving a joint to someone who has it on the other side says they were exchanged."""
        s = self.session
        frame_id, joints = s.frame_id, list(s.selection.joints)
        if frame_id is None or not joints:
            self._say("select a joint first (click it on the Canvas)")
            return
        edits = [ReassignJoint(frame_id, p, j, target) for p, j in joints if p != target]
        if not edits:
            self._say(f"the selected joint already belongs to {s.names.person(target)}")
            return
        # The group's summary is its edits' (ids and joint indices): the Ledger names them.
        edit: Edit = edits[0] if len(edits) == 1 else EditGroup(frame_id, tuple(edits))
        swaps = swap_warning(s.view.people, joints, target, s.skeleton)
        if self._apply(edit) is not None:
            if swaps:
                self._say(f"swapped: {swaps.split(': ', 1)[0]}, so the two were exchanged "
                          "(Ctrl+Z takes it back)")
            s.select_joints([(target, e.joint) for e in edits])

    def type_digit(self, digit: str) -> bool:
        """A digit of the tag of the person to give the selected joints to. True while
        another digit could still name a person (tag 1 of a frame of twelve: 1 or 10 to 12);
        the window waits :data:`TAG_WAIT_MS` for it, then calls :meth:`commit_typed`. Else
        the joints are given at once (False)."""
        s = self.session
        if not s.selection.joints:
            self._say("select a joint first, then press the number of its owner")
            return False
        self.typed += digit
        value = int(self.typed)
        if value * 10 <= len(s.view.people) and len(self.typed) < 3:
            self._say(f"give to person {value}\u2026", TAG_WAIT_MS)
            return True
        self.commit_typed()
        return False

    def commit_typed(self) -> None:
        """Give the selected joints to the person whose tag was typed (if any)."""
        typed, self.typed = self.typed, ""
        if typed:
            self.give_to_number(int(typed))

    def cancel_typing(self) -> None:
        """Forget a tag being typed."""
        self.typed = ""

    def give_to_number(self, number: int) -> None:
        """Give the selected joint(s) to the person tagged ``number`` (from 1)."""
        people = self.session.view.people
        if not 1 <= number <= len(people):
            self._say(f"there is no person {number} in this frame")
            return
        self.give_to(people[number - 1].id)

    def give_to_best(self) -> None:
        """Give the selected joint to the best candidate Owners ranks
        (:attr:`app.session.session.Session.owner_ranking`)."""
        ranking = self.session.owner_ranking
        best = None if ranking is None else ranking.best
        if best is None:
            self._say("no suggestion for the selection")
            return
        self.give_to(best.person_id)

    def set_visibility(self, v: int) -> None:
        """Mark the selected joints visible (2), occluded (1) or unlabelled (0): one edit."""
        s = self.session
        frame_id, joints = s.frame_id, s.selection.joints
        if frame_id is None or not joints:
            self._say("select a joint first")
            return
        edits = [SetVisibility(frame_id, p, j, v) for p, j in joints]
        edit: Edit = edits[0] if len(edits) == 1 else EditGroup(
            frame_id, tuple(edits), f"mark {count(len(edits), 'joint')} {VISIBILITY_WORDS[v]}")
        self._apply(edit)

    def place_joint(self, xy: tuple[float, float] | None) -> None:
        """Put the selected joint at ``xy`` (image pixels: where the pointer is; None when
        it is off the image)."""
        s = self.session
        joint = s.selection.joint
        if s.frame_id is None or joint is None:
            self._say("select a joint first (Tab walks a person's joints)")
            return
        if xy is None:
            self._say("point at the place on the Canvas, then press P")
            return
        self._apply(MoveJoint(s.frame_id, joint[0], joint[1], round(xy[0], 2), round(xy[1], 2)))

    # ------------------------------------------------------------------ people

    def new_person(self) -> None:
        """A new empty person, selected; with joints selected, split them off instead."""
        s = self.session
        if s.frame_id is None:
            return
        if not s.selection.joints:
            done = self._apply(NewPerson(s.frame_id))
            if done is not None:
                s.select_person(done.edit.person_id)
            return
        self.split_person()

    def split_person(self) -> None:
        """Split the selected joints (of one person) off into a new person; they stay
        selected, on the new person."""
        s = self.session
        frame_id, joints = s.frame_id, list(s.selection.joints)
        if frame_id is None or not joints:
            self._say("select the joints to split off (Ctrl+click adds joints)")
            return
        owners = {p for p, _ in joints}
        if len(owners) != 1:
            self._say("the selected joints belong to different people; select joints of "
                      "one person")
            return
        pid = owners.pop()
        done = self._apply(SplitPerson(frame_id, pid, tuple(j for _, j in joints)))
        if done is not None:
            new_id = done.edit.new_person_id
            s.select_joints([(new_id, j) for _, j in joints])

    def swap_sides(self) -> None:
        """Exchange the selected person's left and right joints."""
        s = self.session
        if s.frame_id is None or s.selection.person is None:
            self._say("select a person first")
            return
        self._apply(SwapSides(s.frame_id, s.selection.person))

    def start_merge(self) -> None:
        """Wait for a click on the person to merge into the selected one (the view's pick)."""
        s = self.session
        pid = s.selection.person
        if s.frame_id is None or pid is None:
            self._say("select the person to keep first, then press M")
            return
        s.view.set_pick("merge")
        self._say(f"merge: click the person (on the Canvas or in Owners) to merge into "
                  f"{s.names.person(pid, with_id=True)}; Esc cancels", 0)

    def merge_with(self, other: int) -> None:
        """Merge person ``other`` into the selected one, which stays selected."""
        s = self.session
        keep = s.selection.person
        if s.frame_id is None or keep is None:
            return
        if other == keep:
            self._say("that is the same person; merge cancelled")
            return
        if self._apply(MergePeople(s.frame_id, keep, other)) is not None:
            s.select_person(keep)

    def choose_person(self, person_id: int) -> None:
        """A person chosen outside the Canvas (a row of Owners): the one to merge while a
        merge waits for it, else selected alone (unless already so)."""
        s = self.session
        if s.view.pick == "merge":
            s.view.set_pick(None)
            self.merge_with(person_id)
            return
        if person_id != s.selection.person or s.selection.joints:
            s.select_person(person_id)

    def cancel_pick(self) -> bool:
        """Esc while a merge waits for a person: stop waiting (True), else nothing (False)."""
        if self.session.view.pick is None:
            return False
        self.session.view.set_pick(None)
        self._say("merge cancelled")
        return True

    def delete_person(self) -> None:
        """Delete the selected person."""
        s = self.session
        if s.frame_id is None or s.selection.person is None:
            self._say("select a person first")
            return
        self._apply(DeletePerson(s.frame_id, s.selection.person))

    def step_person(self, step: int) -> None:
        """Select the next (1) or previous (-1) person shown, in tag order, wrapping."""
        s = self.session
        people = s.view.people
        if not people:
            return
        ids = [p.id for p in people]
        pid = s.selection.person
        i = ids.index(pid) if pid in ids else (-1 if step > 0 else 0)
        s.select_person(ids[(i + step) % len(ids)])

    # ------------------------------------------------------------------ the frame

    def toggle_state(self, state: FrameState) -> None:
        """Mark the frame ``state`` (disputed, signed off), or corrected if it is already."""
        s = self.session
        if s.frame_id is None:
            return
        now = s.project.frame(s.frame_id).state
        target = FrameState.CORRECTED if now is state else state
        if self._apply(SetFrameState(s.frame_id, target)) is not None:
            self._say(f"frame marked {STATE_WORDS[target]}")
