"""A disputed frame as the window shows it: the reviewer's version beside ours, the marks on
the joints that differ, the order to walk them in, and the words for each difference.

Built on :mod:`app.review.settle` (which finds the differences and makes the settling edits);
no Qt here. :meth:`app.session.session.Session.read_dispute` hands a :class:`Dispute`'s
versions and marks to the view (:meth:`app.session.view.View.set_dispute`), which the Canvas
draws; the window routes the settling actions to the back end.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from app.model.labels import Person
from app.review.settle import JointDifference, PersonDifference, differences, theirs_labels
from app.session.view import Marks
from app.store import Project

__all__ = ["Dispute", "describe_difference", "load_dispute", "step_difference"]

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
