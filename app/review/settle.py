"""Settling a disputed frame: ours against the reviewer's kept version, joint by joint.

When a merge meets a conflict it keeps ours in the frame and the reviewer's version of the
person as an *alternative* (:mod:`app.review.merge`). While the frame is disputed, this module
lists where the two differ and makes the edits that settle them:

- :func:`differences` -- per person and joint, ours against theirs (what the Canvas marks);
- :func:`theirs_labels` -- the frame as the reviewer would have it (to draw side by side);
- :func:`take_theirs_edit` / :func:`take_theirs` -- the reviewer's version of one joint, one
  person or the whole frame, as **one** edit (one undo step, credited to whoever settles);
- :func:`keep_ours` -- settle a joint, a person or the frame by keeping ours (labels do not
  change; the choice is recorded with the alternative, and in the ledger);
- :func:`settle_frame` -- end the dispute by setting the frame's state (an edit).

Alternatives show only while their frame is disputed, so undoing :func:`settle_frame` brings
them back. Nothing here imports Qt; the desktop app wires these functions to the Canvas.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, replace

import numpy as np

from app.errors import EditRefused
from app.model.edits import Change, KeepOurs, Restore, SetFrameState
from app.model.labels import FrameLabels, FrameState, Person
from app.model.naming import Names
from app.model.records import Alternative
from app.model.targets import JointTarget, PersonTarget
from app.review.merge import same_joints
from app.store import Applied, Project

__all__ = [
    "Alternative", "JointDifference", "PersonDifference", "TakeTheirs", "alternatives",
    "differences", "keep_ours", "person_differences", "settle_frame", "take_theirs",
    "take_theirs_changes", "take_theirs_edit", "theirs_labels",
]


@dataclass(frozen=True)
class JointDifference:
    """One joint on which ours and theirs differ: ``(x, y, v)`` on each side (None for a
    person absent on that side; NaN positions for a joint never placed)."""

    joint: int
    name: str
    ours: tuple[float, float, int] | None
    theirs: tuple[float, float, int] | None


@dataclass(frozen=True)
class PersonDifference:
    """How ours and one alternative differ on one person (``joints`` never empty)."""

    alternative: Alternative
    ours: Person | None
    theirs: Person | None
    joints: tuple[JointDifference, ...]

    @property
    def person_id(self) -> int:
        return self.alternative.person_id

    @property
    def reviewer(self) -> str:
        return self.alternative.reviewer


@dataclass(frozen=True)
class TakeTheirs(Restore):
    """Take the reviewer's version (of a joint, a person or a frame), applied verbatim; refused
    if the frame changed since the edit was made."""


# ---------------------------------------------------------------------- reading

def alternatives(project: Project, frame_id: int) -> list[Alternative]:
    """The alternatives in play for a frame: none unless the frame is disputed."""
    if project.frame(frame_id).state is not FrameState.DISPUTED:
        return []
    return project.alternatives(frame_id)


def person_differences(ours: Person | None, alternative: Alternative,
                       names: Sequence[str]) -> tuple[JointDifference, ...]:
    """Where ``ours`` and the alternative differ, joint by joint (kept joints left out).

    Parameters
    ----------
    ours
        The person in the project now (None if absent).
    alternative
        The reviewer's version.
    names
        Joint names of the skeleton.

    Returns
    -------
    tuple of JointDifference
        Joints whose labels differ (:func:`app.review.merge.same_joints`); when the person is
        absent on one side, every joint labelled on the other.

    Examples
    --------
    >>> kp = np.array([[1.0, 1.0, 2], [5.0, 5.0, 2]])
    >>> ours = Person(3, kp, np.full(2, np.nan), ("ana", "ana"))
    >>> theirs = ours.with_joint(1, [6.0, 5.0, 2, None, "bea"])
    >>> alt = Alternative(1, 9, 3, "p", "bea", "joints", ours, theirs, frozenset(), 0.0)
    >>> [(d.joint, d.ours, d.theirs) for d in person_differences(ours, alt, ["a", "b"])]
    [(1, (5.0, 5.0, 2), (6.0, 5.0, 2))]
    """
    theirs = alternative.theirs
    if ours is None and theirs is None:
        return ()
    if ours is None or theirs is None:
        present = theirs if ours is None else ours
        assert present is not None
        differ = present.keypoints[:, 2] > 0
    else:
        differ = ~same_joints(ours.keypoints, theirs.keypoints)
    return tuple(
        JointDifference(j, names[j], _xyv(ours, j), _xyv(theirs, j))
        for j in np.flatnonzero(differ).tolist() if j not in alternative.kept
    )


def _xyv(person: Person | None, j: int) -> tuple[float, float, int] | None:
    if person is None:
        return None
    x, y, v = person.keypoints[j]
    return float(x), float(y), int(v)


def differences(project: Project, frame_id: int) -> list[PersonDifference]:
    """Every person of a disputed frame on which ours and a reviewer's version still differ.

    Returns
    -------
    list of PersonDifference
        By person id; empty when the frame is not disputed or everything is settled.
    """
    labels = project.labels(frame_id)
    names = project.skeleton.joints
    out = []
    for alt in alternatives(project, frame_id):
        ours = labels.people.get(alt.person_id)
        joints = person_differences(ours, alt, names)
        if joints:
            out.append(PersonDifference(alt, ours, alt.theirs, joints))
    return out


def theirs_labels(project: Project, frame_id: int) -> FrameLabels:
    """The frame as the reviewers would have it: ours, with each alternative's person in place
    (and people they deleted removed). The Canvas can draw it beside, or instead of, ours."""
    labels = project.labels(frame_id)
    people = dict(labels.people)
    for alt in alternatives(project, frame_id):
        if alt.theirs is None:
            people.pop(alt.person_id, None)
        else:
            people[alt.person_id] = alt.theirs
    return replace(labels, people=people)


# ---------------------------------------------------------------------- taking theirs

def take_theirs_changes(labels: FrameLabels, alts: Sequence[Alternative],
                        person_id: int | None = None,
                        joint: int | None = None) -> list[Change]:
    """The changes that make ``labels`` take the reviewers' version (pure).

    Parameters
    ----------
    labels
        The frame now.
    alts
        Its alternatives (:func:`alternatives`), or just the ones to take from.
    person_id
        Only this person (default: every person with an alternative).
    joint
        Only this joint of ``person_id``.

    Returns
    -------
    list of Change
        Joint changes (``joint`` or ``joints`` alternatives) or whole-person changes (a
        person absent on one side); empty when nothing differs.

    Raises
    ------
    EditRefused
        A joint without a person; a person with no alternative, or with two from different
        reviews (pass only the one to take in ``alts``); a single joint of a person that one
        side deleted (take the whole person).

    Examples
    --------
    >>> from app.model.skeleton import coco_body
    >>> kp = np.zeros((17, 3)); kp[0] = (5, 5, 2)
    >>> ours = Person(3, kp, np.full(17, np.nan), ("ana",) * 17)
    >>> theirs = ours.with_joint(0, [6.0, 5.0, 2, None, "bea"])
    >>> alt = Alternative(1, 9, 3, "p", "bea", "joints", ours, theirs, frozenset(), 0.0)
    >>> [c.after for c in take_theirs_changes(FrameLabels(9, coco_body(), {3: ours}), [alt])]
    [[6.0, 5.0, 2, None, 'bea']]
    """
    if joint is not None and person_id is None:
        raise EditRefused("name the person whose joint to take")
    names = Names.of_frame(labels.skeleton, sorted(labels.people))
    chosen = [a for a in alts if person_id is None or a.person_id == person_id]
    if person_id is not None and not chosen:
        raise EditRefused(f"frame {labels.frame_id}: {names.person(person_id, with_id=True)} "
                          "has no reviewer's version to take")
    by_person: dict[int, Alternative] = {}
    for alt in chosen:
        if alt.person_id in by_person:
            raise EditRefused(f"frame {labels.frame_id}: "
                              f"{names.person(alt.person_id, with_id=True)} has versions "
                              "from more than one review; take one of them")
        by_person[alt.person_id] = alt
    changes: list[Change] = []
    for pid, alt in sorted(by_person.items()):
        ours = labels.people.get(pid)
        theirs = alt.theirs
        if ours is None or theirs is None:
            if joint is not None:
                raise EditRefused(f"{names.person(pid, with_id=True)} is deleted on one side; "
                                  "take the whole person")
            if not person_differences(ours, alt, labels.skeleton.joints):
                continue
            changes.append(Change(PersonTarget(pid), None if ours is None else ours.to_value(),
                                  None if theirs is None else theirs.to_value()))
            continue
        for d in person_differences(ours, alt, labels.skeleton.joints):
            if joint is None or d.joint == joint:
                changes.append(Change(JointTarget(pid, d.joint), ours.joint_value(d.joint),
                                      theirs.joint_value(d.joint)))
    return changes


def take_theirs_edit(project: Project, frame_id: int, person_id: int | None = None,
                     joint: int | None = None, alternative: int | None = None) -> TakeTheirs:
    """One edit taking the reviewer's version of a joint, a person, or (with neither) every
    person of the frame that still differs. ``alternative`` (an :attr:`Alternative.id`)
    chooses between two reviews of the same person.

    Raises
    ------
    EditRefused
        When nothing differs there (or see :func:`take_theirs_changes`).
    """
    labels = project.labels(frame_id)
    alts = [a for a in alternatives(project, frame_id)
            if alternative is None or a.id == alternative]
    changes = take_theirs_changes(labels, alts, person_id, joint)
    if not changes:
        raise EditRefused(f"frame {frame_id}: nothing differs from the reviewer's version there")
    reviewers = sorted({a.reviewer for a in alts
                        if person_id is None or a.person_id == person_id})
    what = ("the frame" if person_id is None else
            f"person {person_id}" if joint is None else
            f"joint {joint} of person {person_id}")  # the ledger's form: ledger_names reads it
    return TakeTheirs(frame_id, tuple(changes),
                      label=f"take {', '.join(reviewers)}'s version of {what}")


def take_theirs(project: Project, frame_id: int, person_id: int | None = None,
                joint: int | None = None, alternative: int | None = None) -> Applied:
    """Apply :func:`take_theirs_edit` (one undo step, credited to the project's author)."""
    return project.apply(take_theirs_edit(project, frame_id, person_id, joint, alternative))


# ---------------------------------------------------------------------- keeping ours, settling

def keep_ours(project: Project, frame_id: int, person_id: int | None = None,
              joint: int | None = None) -> int:
    """Settle a joint, a person or (with neither) the whole frame by keeping ours.

    The labels do not change; the alternatives remember the kept joints, so they no longer
    show as differences. The choice is one :class:`~app.model.edits.KeepOurs` edit: in the
    ledger and on the undo stack. Returns how many differing joints were settled (0: nothing
    differed there).
    """
    if joint is not None and person_id is None:
        raise EditRefused("name the person whose joint to keep")
    labels = project.labels(frame_id)
    updates = []
    settled = 0
    for alt in alternatives(project, frame_id):
        if person_id is not None and alt.person_id != person_id:
            continue
        differ = [d.joint for d in person_differences(labels.people.get(alt.person_id), alt,
                                                      labels.skeleton.joints)]
        if joint is not None:
            differ = [j for j in differ if j == joint]
        if not differ:
            continue
        kept = set(differ)
        if alt.kind != "joints":
            kept = set(range(labels.num_joints))  # a person-level choice
        updates.append((alt.id, tuple(sorted(kept))))
        settled += len(differ)
    if not updates:
        return 0
    project.apply(KeepOurs(frame_id, tuple(updates)))
    return settled


def settle_frame(project: Project, frame_id: int,
                 state: FrameState = FrameState.CORRECTED) -> Applied:
    """End a frame's dispute by setting its state (an edit; undo makes it disputed again).

    Differences still open are settled as the labels stand (ours). Refused for
    ``disputed``.
    """
    state = FrameState(state)
    if state is FrameState.DISPUTED:
        raise EditRefused("settling a frame gives it a state other than disputed")
    return project.apply(SetFrameState(frame_id, state))
