"""A disputed frame as the window shows it: the reviewer's version beside ours, the marks on
the joints that differ, the order to walk them in, and the words for each difference.

Built on :mod:`app.review.settle` (which finds the differences and makes the settling edits);
no Qt here. :meth:`app.session.session.Session.read_dispute` hands a :class:`Dispute`'s
versions and marks to the view (:meth:`app.session.view.View.set_dispute`), which the Canvas
draws; :class:`Settling` turns the settling keys into the back end's calls (the window routes
its actions there).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from app.model.labels import FrameState, Person
from app.review.settle import JointDifference, PersonDifference, differences, theirs_labels
from app.session.view import Marks
from app.store import Project
from app.wording import count, plural

__all__ = ["Dispute", "Settling", "describe_difference", "following", "load_dispute",
           "step_difference"]

_WORD = {0: "unlabelled", 1: "occluded", 2: "visible"}


@dataclass(frozen=True)
class Dispute:
    """Where ours and the reviewers' versions of one frame still differ.

    ``theirs`` holds the reviewers' people in our tag order (a person they deleted is an empty
    placeholder, so tag numbers stay put when the Canvas flips), then anyone only they have.
    ``ours_marks`` maps each differing ``(person, joint)`` to where the reviewer has it and
    ``theirs_marks`` to where we have it (None when not labelled there). ``joints`` is the
    walking order: people in tag order, joints by index.
    """

    frame_id: int
    people: tuple[PersonDifference, ...]
    theirs: tuple[Person, ...]
    ours_marks: Marks
    theirs_marks: Marks
    joints: tuple[tuple[int, int], ...]

    @property
    def reviewers(self) -> tuple[str, ...]:
        return tuple(sorted({d.reviewer for d in self.people}))

    @property
    def who(self) -> str:
        """The reviewers, as a sentence names them."""
        names = self.reviewers
        return names[0] if len(names) == 1 else ", ".join(names[:-1]) + " and " + names[-1]

    def joint(self, person_id: int, joint: int) -> tuple[PersonDifference,
                                                         JointDifference] | None:
        """The difference at one joint, with its person's, or None if they agree there."""
        for d in self.people:
            if d.person_id == person_id:
                for jd in d.joints:
                    if jd.joint == joint:
                        return d, jd
        return None

    def person(self, person_id: int) -> PersonDifference | None:
        return next((d for d in self.people if d.person_id == person_id), None)


def _where(xyv: tuple[float, float, int] | None) -> tuple[float, float] | None:
    if xyv is None or xyv[2] <= 0 or not np.isfinite(xyv[:2]).all():
        return None
    return float(xyv[0]), float(xyv[1])


def load_dispute(project: Project, frame_id: int, ours: Sequence[Person]) -> Dispute | None:
    """The open differences of a frame, or None when it has none (not disputed, disputed by
    hand without a reviewer's version, or everything settled).

    Parameters
    ----------
    project
        The project (the main one, where returned packets were merged).
    frame_id
        The frame.
    ours
        Its people as the Canvas shows them, in tag order.
    """
    found = differences(project, frame_id)
    if not found:
        return None
    their_people = theirs_labels(project, frame_id).people
    k = project.skeleton.num_joints
    ours_ids = [p.id for p in ours]
    theirs = [their_people.get(pid) or Person.blank(pid, k) for pid in ours_ids]
    theirs += [p for pid, p in their_people.items() if pid not in set(ours_ids)]
    order = {pid: n for n, pid in enumerate(p.id for p in theirs)}
    ours_marks: Marks = {}
    theirs_marks: Marks = {}
    for d in found:
        for jd in d.joints:
            ours_marks[(d.person_id, jd.joint)] = _where(jd.theirs)
            theirs_marks[(d.person_id, jd.joint)] = _where(jd.ours)
    joints = tuple(sorted(ours_marks, key=lambda pj: (order.get(pj[0], len(order)), pj)))
    return Dispute(frame_id, tuple(found), tuple(theirs), ours_marks, theirs_marks, joints)


def step_difference(joints: Sequence[tuple[int, int]], current: tuple[int, int] | None,
                    step: int) -> tuple[int, int] | None:
    """The next (``step`` 1) or previous (-1) differing joint after ``current``, wrapping
    around; the first (or last) when ``current`` is not one of them.

    Examples
    --------
    >>> js = [(4, 1), (4, 9), (7, 0)]
    >>> step_difference(js, (4, 9), 1), step_difference(js, (7, 0), 1)
    ((7, 0), (4, 1))
    >>> step_difference(js, None, -1), step_difference([], None, 1) is None
    ((7, 0), True)
    """
    if not joints:
        return None
    joints = list(joints)
    if current in joints:
        return joints[(joints.index(current) + step) % len(joints)]
    return joints[0] if step > 0 else joints[-1]


def describe_difference(jd: JointDifference, reviewer: str) -> str:
    """One line for the Owners panel: mine and the reviewer's version of a joint.

    Examples
    --------
    >>> describe_difference(JointDifference(9, "left_wrist", (10.0, 20.0, 2),
    ...                                     (14.5, 20.0, 1)), "bea")
    'mine: visible at (10.0, 20.0) \u00b7 bea: occluded at (14.5, 20.0)'
    """
    return f"mine: {_side(jd.ours)} \u00b7 {reviewer}: {_side(jd.theirs)}"


def _side(xyv: tuple[float, float, int] | None) -> str:
    if xyv is None:
        return "person deleted"
    x, y, v = xyv
    if v <= 0:
        return "unlabelled"
    return f"{_WORD[int(v)]} at ({x:.1f}, {y:.1f})"


class Settling:
    """What the settling keys do on the session's disputed frame (``session.settling``):
    walk the differences, take the reviewer's version or keep mine of the selected joint,
    person or the whole frame (one undo step each), and settle the frame.

    Each back-end call runs through the session's ``attempt`` (the window's reports errors in
    a box; :meth:`app.session.session.Session.attempt` says refusals); the words go out as
    ``message`` events, the selection moves through ``selection`` and the joint to bring into
    view through ``reveal(x, y)``. After a take or a keep the frame's dispute must have been
    read again (the window does it on the project's change notice) before the next open
    difference is selected.
    """

    def __init__(self, session: Any):
        self.session = session

    def _say(self, text: str, *how_long: int) -> None:
        self.session.events.emit("message", text, *how_long)

    def step(self, step: int) -> None:
        """Select the next (1) or previous (-1) joint where mine and theirs differ."""
        d = self.session.dispute
        if d is None:
            self._say("no differences to walk in this frame")
            return
        target = step_difference(d.joints, self.session.selection.joint, step)
        if target is not None:
            self.select(target)

    def select(self, target: tuple[int, int]) -> None:
        """Select a differing joint and bring it into view (ours, or the other version's
        place if ours has no position for it)."""
        s = self.session
        s.select_joints([target])
        person = s.view.person(target[0])
        xy = None
        if person is not None and np.isfinite(person.keypoints[target[1], :2]).all():
            xy = tuple(person.keypoints[target[1], :2])
        elif s.view.marks.get(target) is not None:
            xy = s.view.marks[target]
        if xy is not None:
            s.events.emit("reveal", float(xy[0]), float(xy[1]))

    def scope(self, scope: str) -> tuple[int, int | None, int | None, str] | None:
        """The frame, person and joint a ``"joint"``, ``"person"`` or ``"frame"`` action
        settles, and how to name them; None (and a word why) when the selection does not
        fit."""
        s = self.session
        d = s.dispute
        if s.frame_id is None or d is None:
            self._say("this frame has no differences with a reviewer's version")
            return None
        if scope == "joint":
            joint = s.selection.joint
            if joint is None or d.joint(*joint) is None:
                self._say("select a joint that differs first (J walks them)")
                return None
            return s.frame_id, joint[0], joint[1], s.names.whose(joint[0], joint[1])
        if scope == "person":
            pid = s.selection.person
            if pid is None or d.person(pid) is None:
                self._say("select a person whose joints differ first")
                return None
            return s.frame_id, pid, None, s.names.person(pid, with_id=True)
        return s.frame_id, None, None, "the whole frame"

    def take_theirs(self, scope: str) -> None:
        """Take the reviewer's version of the selected joint, person, or the frame: one
        edit, one undo step."""
        from app.review.settle import take_theirs

        found = self.scope(scope)
        if found is None:
            return
        fid, pid, joint, what = found
        d = self.session.dispute
        who, was = d.who if d else "", self.current()
        ok, _ = self.session.attempt(lambda: take_theirs(self.session.project, fid, pid, joint))
        if ok:
            self.after(was, f"took {who}'s version of {what} (Ctrl+Z takes it back)")

    def keep_ours(self, scope: str) -> None:
        """Keep my version of the selected joint, person, or the frame (the labels stay;
        the choice is one undo step)."""
        from app.review.settle import keep_ours

        found = self.scope(scope)
        if found is None:
            return
        fid, pid, joint, what = found
        was = self.current()
        ok, settled = self.session.attempt(
            lambda: keep_ours(self.session.project, fid, pid, joint))
        if ok:
            self.after(was, f"kept mine for {what} ({count(settled, 'joint')}; "
                            "Ctrl+Z takes it back)")

    def current(self) -> tuple[int, int] | None:
        """The difference the selection is on: the joint selected, or the selected
        person's first differing joint."""
        s = self.session
        joint = s.selection.joint
        if joint is None and s.dispute is not None:
            pid = s.selection.person
            return next((pj for pj in s.dispute.joints if pj[0] == pid), None)
        return joint

    def after(self, was: tuple[int, int] | None, said: str) -> None:
        """After a take or a keep (the dispute read again): select the next open difference,
        or say that the frame can be settled."""
        s = self.session
        d = s.dispute
        if d is None:
            self._say(f"{said}; no differences left: Shift+Return settles the frame", 10000)
            return
        self._say(said)
        joint = s.selection.joint
        if joint is not None and d.joint(*joint) is not None:
            return
        self.select(following(was, d.joints))

    def settle(self) -> None:
        """End the dispute: the frame becomes corrected (undo makes it disputed again)."""
        from app.review.settle import settle_frame

        s = self.session
        if s.frame_id is None:
            return
        if s.project.frame(s.frame_id).state is not FrameState.DISPUTED:
            self._say("this frame is not disputed")
            return
        left = len(s.dispute.joints) if s.dispute is not None else 0
        fid = s.frame_id
        ok, _ = s.attempt(lambda: settle_frame(s.project, fid))
        if ok:
            self._say("settled: the frame is corrected" + (
                f"; {count(left, 'open difference')} {plural(left, 'keeps', 'keep')} mine"
                if left else "")
                + " (Ctrl+Z takes it back)")


def following(was: tuple[int, int] | None,
              joints: Sequence[tuple[int, int]]) -> tuple[int, int]:
    """The first open difference after ``was`` in walking order (wrapping around).

    >>> following((4, 9), [(4, 1), (4, 9), (7, 0)]), following((9, 9), [(4, 1), (7, 0)])
    ((7, 0), (4, 1))
    """
    if was is not None:
        later = [pj for pj in joints if pj > was]
        if later:
            return later[0]
    return joints[0]
