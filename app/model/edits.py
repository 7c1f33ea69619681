"""Edit operations: every change to labels is one of these, and each is one undo step.

An edit looks at one frame's :class:`~app.model.labels.FrameLabels` and plans a list of atomic
:class:`Change` records -- a target, its value before and its value after. Applying the changes
gives the new labels; applying their inverses in reverse order gives the old labels back, so
every edit can invert itself (the command pattern). The store writes the same changes to its
append-only ledger, which is why undo survives a restart.

Targets are small typed values (:mod:`app.model.targets`): :class:`PersonTarget`,
:class:`JointTarget`, :class:`TrackTarget`, :class:`StateTarget`, :class:`NoteTarget`,
:class:`RegionTarget`, :class:`KeptTarget` and :class:`DismissalTarget`; that module says
which value each carries.

Edits are refused with :class:`~app.errors.EditRefused` (and nothing changes) when they would
make the labels inconsistent; the message says why and what to do.
"""

from __future__ import annotations

import time as _time
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field, replace
from typing import Any, ClassVar

import numpy as np

from app.errors import ChangedMeanwhile, EditRefused
from app.model.labels import FrameLabels, FrameState, Note, Person, Region
from app.model.targets import (
    DismissalTarget,
    JointTarget,
    KeptTarget,
    NoteTarget,
    PersonTarget,
    RecordTarget,
    RegionTarget,
    StateTarget,
    Target,
    TrackTarget,
)
from app.wording import plural

#: The provenance of joints interpolated from neighbouring frames, not yet checked by anyone.
INTERPOLATED = "interpolated"

TARGET_TYPES = (PersonTarget, JointTarget, TrackTarget, StateTarget, NoteTarget, RegionTarget,
                KeptTarget, DismissalTarget, RecordTarget)


@dataclass(frozen=True)
class Change:
    """One atomic change: ``target`` goes from ``before`` to ``after``."""

    target: Target
    before: Any
    after: Any

    def __post_init__(self) -> None:
        if not isinstance(self.target, TARGET_TYPES):
            raise TypeError(f"a change's target must be one of app.model.targets' types, "
                            f"not {self.target!r}")

    def inverted(self) -> Change:
        return Change(self.target, self.after, self.before)

    def describe(self) -> str:
        """The target as text: ``person:12``, ``person:12/joint:9``, ``state``, ``note:3``."""
        return str(self.target)


@dataclass(frozen=True)
class EditContext:
    """Who makes an edit and when; used for provenance and note authorship."""

    author: str = ""
    time: float = field(default_factory=_time.time)


def _current(labels: FrameLabels, target: Target) -> Any:
    """The value ``target`` holds in ``labels`` now (None when absent)."""
    if isinstance(target, PersonTarget):
        p = labels.people.get(target.person)
        return None if p is None else p.to_value()
    if isinstance(target, JointTarget):
        return labels.person(target.person).joint_value(target.joint)
    if isinstance(target, TrackTarget):
        return labels.person(target.person).track_value()
    if isinstance(target, StateTarget):
        return labels.state.value
    if isinstance(target, NoteTarget):
        n = labels.notes.get(target.note)
        return None if n is None else n.to_value()
    if isinstance(target, RegionTarget):
        r = labels.regions.get(target.region)
        return None if r is None else r.to_value()
    if isinstance(target, KeptTarget):
        kept = labels.kept.get(target.alternative)
        return None if kept is None else sorted(kept)
    if isinstance(target, DismissalTarget):
        value = labels.dismissed.get(target.key)
        return None if value is None else dict(value)
    raise EditRefused(f"unknown change target {target!r}")


def current_value(labels: FrameLabels, target: Target) -> Any:
    """The value ``target`` holds in ``labels`` now; None when it is absent (a person, note or
    region that does not exist, or a joint of such a person)."""
    try:
        return _current(labels, target)
    except EditRefused:
        return None


def apply_changes(labels: FrameLabels, changes: Iterable[Change]) -> FrameLabels:
    """The labels after ``changes``, applied in order (the input is not modified)."""
    people = dict(labels.people)
    notes = dict(labels.notes)
    regions = dict(labels.regions)
    kept = dict(labels.kept)
    dismissed = dict(labels.dismissed)
    state = labels.state
    for ch in changes:
        t = ch.target
        if isinstance(t, PersonTarget):
            if ch.after is None:
                people.pop(t.person, None)
            else:
                people[t.person] = Person.from_value(t.person, ch.after)
        elif isinstance(t, JointTarget):
            if t.person not in people:
                raise EditRefused(f"frame {labels.frame_id} has no person {t.person}")
            people[t.person] = people[t.person].with_joint(t.joint, ch.after)
        elif isinstance(t, TrackTarget):
            if t.person not in people:
                raise EditRefused(f"frame {labels.frame_id} has no person {t.person}")
            people[t.person] = people[t.person].with_track(ch.after)
        elif isinstance(t, StateTarget):
            state = FrameState(ch.after)
        elif isinstance(t, NoteTarget):
            if ch.after is None:
                notes.pop(t.note, None)
            else:
                notes[t.note] = Note.from_value(t.note, labels.frame_id, ch.after)
        elif isinstance(t, RegionTarget):
            if ch.after is None:
                regions.pop(t.region, None)
            else:
                regions[t.region] = Region.from_value(t.region, labels.frame_id, ch.after)
        elif isinstance(t, KeptTarget):
            if ch.after is None:
                kept.pop(t.alternative, None)
            else:
                kept[t.alternative] = frozenset(int(j) for j in ch.after)
        elif isinstance(t, DismissalTarget):
            if ch.after is None:
                dismissed.pop(t.key, None)
            else:
                dismissed[t.key] = dict(ch.after)
        else:
            raise EditRefused(f"unknown change target {t!r}")
    return replace(labels, people=people, notes=notes, state=state, regions=regions, kept=kept,
                   dismissed=dismissed)


class Edit:
    """Base of all edit operations. Subclasses implement :meth:`plan`."""

    frame_id: int
    #: Whether the edit changes labels (people or joints), as opposed to state or notes.
    changes_labels: ClassVar[bool] = True

    def plan(self, labels: FrameLabels, ctx: EditContext) -> list[Change]:
        raise NotImplementedError

    def apply(
        self, labels: FrameLabels, ctx: EditContext | None = None
    ) -> tuple[FrameLabels, list[Change]]:
        """The new labels and the changes that lead there."""
        if labels.frame_id != self.frame_id:
            raise EditRefused(f"edit for frame {self.frame_id} applied to frame {labels.frame_id}")
        changes = self.plan(labels, ctx or EditContext())
        return apply_changes(labels, changes), changes

    def invert(self, labels: FrameLabels, ctx: EditContext | None = None) -> Restore:
        """An edit that undoes this one.

        ``labels`` are the labels *before* this edit; the returned edit, applied to the labels
        this one produced, gives ``labels`` back.
        """
        changes = self.plan(labels, ctx or EditContext())
        return Restore(self.frame_id, tuple(c.inverted() for c in reversed(changes)))

    def summary(self) -> str:
        """A short human-readable description for the ledger."""
        return type(self).__name__


def _joint_change(person: Person, j: int, after: list[Any]) -> Change:
    return Change(JointTarget(person.id, j), person.joint_value(j), after)


def _check_joint(labels: FrameLabels, person: Person, joint: int) -> int:
    if not 0 <= joint < labels.num_joints:
        raise EditRefused(f"joint index {joint} is outside 0..{labels.num_joints - 1}")
    return int(joint)


def _finite(x: float, what: str) -> float:
    x = float(x)
    if not np.isfinite(x):
        raise EditRefused(f"{what} must be a finite number, got {x}")
    return x


@dataclass(frozen=True)
class MoveJoint(Edit):
    """Place a joint at ``(x, y)`` image pixels. An unlabeled joint becomes visible (v=2)."""

    frame_id: int
    person_id: int
    joint: int
    x: float
    y: float

    def plan(self, labels: FrameLabels, ctx: EditContext) -> list[Change]:
        p = labels.person(self.person_id)
        j = _check_joint(labels, p, self.joint)
        x, y = _finite(self.x, "x"), _finite(self.y, "y")
        v = int(p.keypoints[j, 2]) or 2
        return [_joint_change(p, j, [x, y, v, p.joint_value(j)[3], ctx.author])]

    def summary(self) -> str:
        return f"move joint {self.joint} of person {self.person_id} to ({self.x:.1f}, {self.y:.1f})"


@dataclass(frozen=True)
class SetVisibility(Edit):
    """Set a joint's COCO visibility: 2 visible, 1 occluded, 0 unlabeled.

    Unlabeling keeps the joint's last position in store (not exported, not trained on) so that
    labelling it again is one step. A joint that never had a position cannot be made visible or
    occluded; place it with :class:`MoveJoint` first.
    """

    frame_id: int
    person_id: int
    joint: int
    v: int

    def plan(self, labels: FrameLabels, ctx: EditContext) -> list[Change]:
        if self.v not in (0, 1, 2):
            raise EditRefused(f"visibility {self.v} is not one of 0, 1, 2")
        p = labels.person(self.person_id)
        j = _check_joint(labels, p, self.joint)
        x, y, _, s, _src = p.joint_value(j)
        if self.v > 0 and (x is None or y is None):
            raise EditRefused(
                f"joint {j} of person {p.id} has no position; place it before marking it"
            )
        return [_joint_change(p, j, [x, y, int(self.v), s, ctx.author])]

    def summary(self) -> str:
        word = {0: "unlabelled", 1: "occluded", 2: "visible"}.get(self.v, str(self.v))
        return f"mark joint {self.joint} of person {self.person_id} {word}"


@dataclass(frozen=True)
class ReassignJoint(Edit):
    """Give a joint to another person of the same frame.

    The joint (position, visibility, score) moves to ``to_person_id`` and becomes unlabeled on
    its old owner. If the receiver already has that joint labelled, the two joints are swapped:
    the receiver's old joint goes to the giver, so no label is lost.
    """

    frame_id: int
    person_id: int
    joint: int
    to_person_id: int

    def plan(self, labels: FrameLabels, ctx: EditContext) -> list[Change]:
        giver = labels.person(self.person_id)
        taker = labels.person(self.to_person_id)
        j = _check_joint(labels, giver, self.joint)
        if giver.id == taker.id:
            raise EditRefused(f"joint {j} already belongs to person {giver.id}")
        if giver.keypoints[j, 2] <= 0:
            raise EditRefused(f"joint {j} of person {giver.id} is unlabelled; nothing to give")
        gx, gy, gv, gs, _ = giver.joint_value(j)
        tx, ty, tv, ts, _ = taker.joint_value(j)
        to_taker = [gx, gy, gv, gs, ctx.author]
        # The giver keeps its old position in store (unlabeled) unless it receives a swap.
        to_giver = [tx, ty, tv, ts, ctx.author] if tv > 0 else [gx, gy, 0, gs, ctx.author]
        return [_joint_change(giver, j, to_giver), _joint_change(taker, j, to_taker)]

    def summary(self) -> str:
        return f"give joint {self.joint} of person {self.person_id} to person {self.to_person_id}"


@dataclass(frozen=True)
class NewPerson(Edit):
    """Add a person, optionally with joints ``(K, 3)``; the store fills in a fresh id.

    ``source`` names the joints' provenance when it is not the author: a person interpolated
    from neighbouring frames is :data:`INTERPOLATED` until someone edits its joints, which is
    how it stays marked for checking. ``track`` puts the new person on a track.
    """

    frame_id: int
    person_id: int | None = None
    keypoints: tuple[tuple[float, float, int], ...] | None = None
    source: str | None = None
    track: int | None = None

    def plan(self, labels: FrameLabels, ctx: EditContext) -> list[Change]:
        if self.person_id is None:
            raise EditRefused("a new person needs an id (the store assigns one)")
        if self.person_id in labels.people:
            raise EditRefused(f"person {self.person_id} already exists")
        p = Person.blank(self.person_id, labels.num_joints, self.source or ctx.author)
        if self.track is not None:
            p = replace(p, track=int(self.track), track_source=ctx.author)
        if self.keypoints is not None:
            kp = np.asarray(self.keypoints, dtype=np.float64)
            if kp.shape != (labels.num_joints, 3):
                raise EditRefused(f"keypoints must be ({labels.num_joints}, 3), got {kp.shape}")
            if not np.isin(kp[:, 2], (0, 1, 2)).all():
                raise EditRefused("visibility must be 0, 1 or 2")
            if not np.isfinite(kp[kp[:, 2] > 0, :2]).all():
                raise EditRefused("labelled joints need finite positions")
            p = replace(p, keypoints=kp)
        return [Change(PersonTarget(p.id), None, p.to_value())]

    def summary(self) -> str:
        return f"new person {self.person_id}"


@dataclass(frozen=True)
class DeletePerson(Edit):
    """Remove a person and all of their joints."""

    frame_id: int
    person_id: int

    def plan(self, labels: FrameLabels, ctx: EditContext) -> list[Change]:
        p = labels.person(self.person_id)
        return [Change(PersonTarget(p.id), p.to_value(), None)]

    def summary(self) -> str:
        return f"delete person {self.person_id}"


@dataclass(frozen=True)
class MergePeople(Edit):
    """Merge ``other_id`` into ``person_id``: the other's labelled joints move over, the other
    person is deleted. Refused when both have the same joint labelled (the message names the
    joints), because one of the two labels would have to be thrown away silently."""

    frame_id: int
    person_id: int
    other_id: int

    def plan(self, labels: FrameLabels, ctx: EditContext) -> list[Change]:
        keep = labels.person(self.person_id)
        gone = labels.person(self.other_id)
        if keep.id == gone.id:
            raise EditRefused("cannot merge a person with themselves")
        both = np.flatnonzero(keep.labelled & gone.labelled)
        if both.size:
            raise EditRefused(
                f"person {keep.id} and person {gone.id} both have "
                f"{plural(both.size, 'joint')} {', '.join(map(str, both))} labelled; unlabel or "
                "reassign one of each first"
            )
        changes = []
        for j in np.flatnonzero(gone.labelled):
            x, y, v, s, _ = gone.joint_value(int(j))
            changes.append(_joint_change(keep, int(j), [x, y, v, s, ctx.author]))
        changes.append(Change(PersonTarget(gone.id), gone.to_value(), None))
        return changes

    def summary(self) -> str:
        return f"merge person {self.other_id} into person {self.person_id}"


@dataclass(frozen=True)
class SplitPerson(Edit):
    """Move the chosen joints of a person to a new person (the store fills in the new id)."""

    frame_id: int
    person_id: int
    joints: tuple[int, ...]
    new_person_id: int | None = None

    def plan(self, labels: FrameLabels, ctx: EditContext) -> list[Change]:
        p = labels.person(self.person_id)
        if self.new_person_id is None:
            raise EditRefused("a split needs an id for the new person (the store assigns one)")
        if self.new_person_id in labels.people:
            raise EditRefused(f"person {self.new_person_id} already exists")
        joints = sorted({_check_joint(labels, p, j) for j in self.joints})
        if not joints:
            raise EditRefused("choose at least one joint to split off")
        new = Person.blank(self.new_person_id, labels.num_joints, ctx.author)
        kp, scores, sources = new.keypoints.copy(), new.scores.copy(), list(new.sources)
        changes = []
        for j in joints:
            kp[j] = p.keypoints[j]
            scores[j] = p.scores[j]
            x, y, _, s, _ = p.joint_value(j)
            changes.append(_joint_change(p, j, [x, y, 0, s, ctx.author]))
        new = replace(new, keypoints=kp, scores=scores, sources=tuple(sources))
        return [Change(PersonTarget(new.id), None, new.to_value()), *changes]

    def summary(self) -> str:
        return f"split joints {list(self.joints)} of person {self.person_id} into a new person"


@dataclass(frozen=True)
class SwapSides(Edit):
    """Swap a person's left and right joints (the skeleton's flip pairs)."""

    frame_id: int
    person_id: int

    def plan(self, labels: FrameLabels, ctx: EditContext) -> list[Change]:
        p = labels.person(self.person_id)
        perm = labels.skeleton.flip_index
        changes = []
        for j, src in enumerate(perm.tolist()):
            if src != j:
                x, y, v, s, _ = p.joint_value(src)
                changes.append(_joint_change(p, j, [x, y, v, s, ctx.author]))
        return changes

    def summary(self) -> str:
        return f"swap left and right of person {self.person_id}"


@dataclass(frozen=True)
class SetTrack(Edit):
    """Put a person on a track (``track`` None takes them off every track).

    Tracks say who is who across the frames of a sequence; joining two tracks or splitting
    one is a batch of these over the frames concerned (:mod:`app.model.tracks`). A track set
    here is credited to the author, and linking again keeps it. Tracks are not what training
    sees, so setting one does not mark the frame corrected.
    """

    frame_id: int
    person_id: int
    track: int | None
    changes_labels: ClassVar[bool] = False

    def plan(self, labels: FrameLabels, ctx: EditContext) -> list[Change]:
        p = labels.person(self.person_id)
        if self.track is not None and int(self.track) < 0:
            raise EditRefused(f"track {self.track} is not a track id (0 or more)")
        after = [None if self.track is None else int(self.track),
                 "" if self.track is None else ctx.author]
        if same_value(p.track_value(), after):
            return []
        return [Change(TrackTarget(p.id), p.track_value(), after)]

    def summary(self) -> str:
        if self.track is None:
            return f"take person {self.person_id} off their track"
        return f"put person {self.person_id} on track {self.track}"


@dataclass(frozen=True)
class SetFrameState(Edit):
    """Set the frame's state: untouched, corrected, disputed or signed-off."""

    frame_id: int
    state: FrameState
    changes_labels: ClassVar[bool] = False

    def plan(self, labels: FrameLabels, ctx: EditContext) -> list[Change]:
        state = FrameState(self.state)
        if state == labels.state:
            return []
        return [Change(StateTarget(), labels.state.value, state.value)]

    def summary(self) -> str:
        return f"mark frame {FrameState(self.state).value}"


@dataclass(frozen=True)
class AddNote(Edit):
    """Add a note to the frame's thread (optionally about one person)."""

    frame_id: int
    text: str
    person_id: int | None = None
    note_id: int | None = None
    changes_labels: ClassVar[bool] = False

    def plan(self, labels: FrameLabels, ctx: EditContext) -> list[Change]:
        if self.note_id is None:
            raise EditRefused("a note needs an id (the store assigns one)")
        if self.note_id in labels.notes:
            raise EditRefused(f"note {self.note_id} already exists")
        if not self.text.strip():
            raise EditRefused("a note cannot be empty")
        if self.person_id is not None:
            labels.person(self.person_id)
        note = Note(self.note_id, self.frame_id, ctx.author, ctx.time, self.text, self.person_id)
        return [Change(NoteTarget(self.note_id), None, note.to_value())]

    def summary(self) -> str:
        return "add note"


def _polygons(polygons: Any) -> tuple[tuple[float, ...], ...]:
    out = []
    for n, poly in enumerate(polygons):
        flat = np.asarray(poly, dtype=np.float64).reshape(-1)
        if flat.size < 6 or flat.size % 2 or not np.isfinite(flat).all():
            raise EditRefused(f"region polygon {n} needs at least three finite (x, y) points")
        out.append(tuple(float(v) for v in flat))
    if not out:
        raise EditRefused("a region needs at least one polygon")
    return tuple(out)


@dataclass(frozen=True)
class AddRegion(Edit):
    """Add an ignore region (one or more polygons, flat ``[x0, y0, x1, y1, ...]`` in image
    pixels; the store fills in a fresh id). Training ignores everything inside it."""

    frame_id: int
    polygons: tuple[tuple[float, ...], ...]
    region_id: int | None = None

    def plan(self, labels: FrameLabels, ctx: EditContext) -> list[Change]:
        if self.region_id is None:
            raise EditRefused("a region needs an id (the store assigns one)")
        if self.region_id in labels.regions:
            raise EditRefused(f"region {self.region_id} already exists")
        region = Region(self.region_id, self.frame_id, _polygons(self.polygons))
        return [Change(RegionTarget(self.region_id), None, region.to_value())]

    def summary(self) -> str:
        return "add an ignore region"


@dataclass(frozen=True)
class ReshapeRegion(Edit):
    """Give an ignore region new polygons (its imported fields are kept)."""

    frame_id: int
    region_id: int
    polygons: tuple[tuple[float, ...], ...]

    def plan(self, labels: FrameLabels, ctx: EditContext) -> list[Change]:
        old = labels.regions.get(self.region_id)
        if old is None:
            raise EditRefused(f"frame {self.frame_id} has no region {self.region_id}")
        extra = {k: v for k, v in old.extra.items() if k not in ("segmentation", "bbox", "area")}
        new = Region(old.id, old.frame_id, _polygons(self.polygons), extra)
        if new == old:
            return []
        return [Change(RegionTarget(old.id), old.to_value(), new.to_value())]

    def summary(self) -> str:
        return f"reshape ignore region {self.region_id}"


@dataclass(frozen=True)
class DeleteRegion(Edit):
    """Remove an ignore region."""

    frame_id: int
    region_id: int

    def plan(self, labels: FrameLabels, ctx: EditContext) -> list[Change]:
        old = labels.regions.get(self.region_id)
        if old is None:
            raise EditRefused(f"frame {self.frame_id} has no region {self.region_id}")
        return [Change(RegionTarget(old.id), old.to_value(), None)]

    def summary(self) -> str:
        return f"delete ignore region {self.region_id}"


@dataclass(frozen=True)
class KeepOurs(Edit):
    """Settle differences of a disputed frame by keeping our version: the labels stay, and
    the named joints of each reviewer's version no longer count as open differences.

    ``choices`` pairs a reviewer's version (by id) with the joints kept as ours.
    """

    frame_id: int
    choices: tuple[tuple[int, tuple[int, ...]], ...]
    changes_labels: ClassVar[bool] = False

    def plan(self, labels: FrameLabels, ctx: EditContext) -> list[Change]:
        changes = []
        for alt, joints in self.choices:
            if alt not in labels.kept:
                raise EditRefused(f"frame {self.frame_id} has no reviewer's version {alt}")
            before = sorted(labels.kept[alt])
            after = sorted(set(before) | {int(j) for j in joints})
            if after != before:
                changes.append(Change(KeptTarget(alt), before, after))
        return changes

    def summary(self) -> str:
        return "keep mine"


@dataclass(frozen=True)
class DismissFinding(Edit):
    """Record that a finding is not a problem, so that it is not raised again while the labels
    it was about stay the same.

    ``key`` is the finding's fingerprint (a digest of its kind and of the labels it was about,
    see :func:`app.analysis.triage.findings.fingerprint`); ``finding`` its id and ``text`` its
    sentence, kept for the ledger. Undoing the dismissal raises the finding again.
    """

    frame_id: int
    key: str
    kind: str
    finding: str = ""
    text: str = ""
    changes_labels: ClassVar[bool] = False

    def plan(self, labels: FrameLabels, ctx: EditContext) -> list[Change]:
        if not self.key:
            raise EditRefused("a dismissal needs the finding's fingerprint")
        if self.key in labels.dismissed:
            return []
        value = {"kind": self.kind, "finding": self.finding, "text": self.text,
                 "author": ctx.author, "time": ctx.time}
        return [Change(DismissalTarget(self.key), None, value)]

    def summary(self) -> str:
        return f"dismiss finding {self.finding or self.key[:8]} ({self.kind}): not a problem"


@dataclass(frozen=True)
class EditGroup(Edit):
    """Several edits of one frame as one action: one ledger group, one undo step.

    The edits are planned in order, each on the labels the ones before it leave, and the
    group is refused as a whole (nothing changes) when any of them is refused. Edits that need
    a new person id get one each from the store before planning.
    """

    frame_id: int
    edits: tuple[Edit, ...]
    label: str = ""

    def plan(self, labels: FrameLabels, ctx: EditContext) -> list[Change]:
        staged = labels
        changes: list[Change] = []
        for edit in self.edits:
            if edit.frame_id != self.frame_id:
                raise EditRefused(f"a group for frame {self.frame_id} holds an edit for frame "
                                  f"{edit.frame_id}")
            staged, planned = edit.apply(staged, ctx)
            changes += planned
        return changes

    def summary(self) -> str:
        return self.label or "; ".join(e.summary() for e in self.edits)


@dataclass(frozen=True)
class Restore(Edit):
    """Apply recorded changes verbatim, checking that each target still holds ``before``.

    This is what undo, redo and "return to this point" apply; it is refused, with nothing
    changed, if the labels have moved on since the changes were recorded.
    """

    frame_id: int
    changes: tuple[Change, ...]
    label: str = "restore"

    def plan(self, labels: FrameLabels, ctx: EditContext) -> list[Change]:
        staged = labels
        for ch in self.changes:
            if not same_value(current_value(staged, ch.target), ch.before):
                raise ChangedMeanwhile(
                    f"frame {self.frame_id}: {ch.describe()} changed since it was recorded; "
                    "cannot restore it", frame_id=self.frame_id, target=ch.target)
            staged = apply_changes(staged, [ch])
        return list(self.changes)

    def summary(self) -> str:
        return self.label


def same_value(a: Any, b: Any) -> bool:
    """Equal JSON-ready values, NaN equal to NaN."""
    if isinstance(a, float) and isinstance(b, float):
        return a == b or (a != a and b != b)
    if isinstance(a, dict) and isinstance(b, dict):
        return a.keys() == b.keys() and all(same_value(a[k], b[k]) for k in a)
    if isinstance(a, (list, tuple)) and isinstance(b, (list, tuple)):
        return len(a) == len(b) and all(same_value(x, y) for x, y in zip(a, b))
    return bool(a == b)


def needs_person_id(edit: Edit) -> bool:
    """Whether the store must allocate a person id before planning this edit (for a group:
    before planning one of its edits)."""
    if isinstance(edit, EditGroup):
        return any(needs_person_id(e) for e in edit.edits)
    return (isinstance(edit, NewPerson) and edit.person_id is None) or (
        isinstance(edit, SplitPerson) and edit.new_person_id is None
    )


def with_person_id(edit: Edit, person_id: int) -> Edit:
    """The edit with ``person_id`` filled in (in a group: in its first edit that needs one)."""
    if isinstance(edit, EditGroup):
        edits = list(edit.edits)
        for n, e in enumerate(edits):
            if needs_person_id(e):
                edits[n] = with_person_id(e, person_id)
                break
        return replace(edit, edits=tuple(edits))
    if isinstance(edit, NewPerson):
        return replace(edit, person_id=person_id)
    if isinstance(edit, SplitPerson):
        return replace(edit, new_person_id=person_id)
    return edit


#: The edits a finding's fix is made of, by name (see :func:`edit_to_value`).
_SERIALISABLE: dict[str, type[Edit]] = {}


def edit_to_value(edit: Edit) -> dict[str, Any]:
    """A JSON-ready dict of an edit: ``{"op": class name, field: value, ...}``.

    Label edits, state, dismissal and group edits serialise; :func:`edit_from_value` reads
    them back.

    Examples
    --------
    >>> edit_to_value(ReassignJoint(3, 12, 9, 14))
    {'op': 'ReassignJoint', 'frame_id': 3, 'person_id': 12, 'joint': 9, 'to_person_id': 14}
    >>> edit_from_value(edit_to_value(SetVisibility(3, 12, 9, 0)))
    SetVisibility(frame_id=3, person_id=12, joint=9, v=0)
    """
    name = type(edit).__name__
    if name not in _SERIALISABLE:
        raise EditRefused(f"an edit of type {name} is not written out")
    out: dict[str, Any] = {"op": name}
    for key, value in edit.__dict__.items():
        if isinstance(edit, EditGroup) and key == "edits":
            out[key] = [edit_to_value(e) for e in value]
        elif isinstance(value, FrameState):
            out[key] = value.value
        elif isinstance(value, tuple):
            out[key] = _plain(value)
        else:
            out[key] = value
    return out


def edit_from_value(value: Any) -> Edit:
    """The edit :func:`edit_to_value` wrote.

    Raises
    ------
    EditRefused
        When ``value`` is not such a dict (an unknown ``op`` or fields).
    """
    if not isinstance(value, dict) or value.get("op") not in _SERIALISABLE:
        raise EditRefused(f"not an edit: {value!r}")
    cls = _SERIALISABLE[value["op"]]
    fields = {k: v for k, v in value.items() if k != "op"}
    if cls is EditGroup:
        fields["edits"] = tuple(edit_from_value(e) for e in fields.get("edits", ()))
    elif cls is NewPerson and fields.get("keypoints") is not None:
        # JSON has no NaN: an unlabelled joint's coordinates travel as null (a packet's
        # findings) and come back as NaN.
        fields["keypoints"] = tuple(tuple(float("nan") if x is None else x for x in row)
                                    for row in fields["keypoints"])
    elif cls is SplitPerson:
        fields["joints"] = tuple(fields.get("joints", ()))
    elif cls is SetFrameState:
        fields["state"] = FrameState(fields["state"])
    try:
        return cls(**fields)
    except TypeError as exc:
        raise EditRefused(f"not an edit of type {value['op']}: {exc}") from None


def _plain(value: Any) -> Any:
    if isinstance(value, (tuple, list)):
        return [_plain(v) for v in value]
    return value


_SERIALISABLE.update({cls.__name__: cls for cls in (
    MoveJoint, SetVisibility, ReassignJoint, NewPerson, DeletePerson, MergePeople,
    SplitPerson, SwapSides, SetTrack, SetFrameState, DismissFinding, EditGroup)})


def labels_changed(changes: Sequence[Change]) -> bool:
    """Whether any change touches what training sees: people, joints or ignore regions."""
    return any(isinstance(c.target, (PersonTarget, JointTarget, RegionTarget)) for c in changes)
