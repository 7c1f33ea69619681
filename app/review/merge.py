"""Merging a returned review packet: three ways per joint, base against ours now against theirs.

For each frame of the packet, each person and each joint, the *base* (the labels the packet
was made from), *ours* (the project now) and *theirs* (the reviewer's final labels) are
compared by their label: position and visibility of a labelled joint, or "unlabeled" (a
position remembered for an unlabeled joint, a score or a provenance is not a label).

- Only theirs changed the joint: theirs is taken (its position, visibility, score and
  provenance, so the joint is credited to the reviewer).
- Only ours changed it, or both changed it alike: ours stays.
- Both changed it, differently: a **conflict**. Ours stays; the reviewer's version of the
  person is kept as an *alternative* (see :mod:`app.review.settle`) and the frame becomes
  disputed.
- A person deleted on one side and changed on the other is a conflict of the whole person
  (``deleted-here``: we deleted, they edited; ``deleted-there``: the reverse). Deleted on one
  side and untouched on the other: the deletion is taken.
- People the reviewer added come over with fresh ids of the project; notes the reviewer added
  come over with their author and time. Notes are never removed.
- A person's **track** (who they are across the frames of a sequence, set by linking or by an
  edit: :class:`~app.model.edits.SetTrack`, joining, splitting or exchanging tracks) merges
  by the same rule, compared by track id: the reviewer's track is taken when only they changed
  it (credited to them), ours stays otherwise. Both changed it to different tracks: ours stays
  and the report lists a ``track`` conflict with both ids. Tracks are not what training sees,
  so that conflict does not make the frame disputed, and a track change alone does not keep a
  deletion from being taken nor counts as the frame changed here. A join or split in the
  reviewer's packet reaches the packet's frames only; the frames it did not carry keep their
  tracks.

The reviewer's decision on a frame: ``query`` makes it disputed; ``ready`` (for training)
signs it off when nothing conflicts and the frame has not changed here since the packet was
made (so what is signed off is exactly what the reviewer saw); ``looks-right`` on a disputed
frame, under the same two conditions, settles it as corrected, and changes no other state.
The words of version 0.1.0 (``needs-change``, ``signed-off``, ``agree``) mean the same.

**Returning again.** A reviewer may edit more and return the same packet again. A later return
of the same packet by the same reviewer supersedes their earlier one: its base is their
earlier return as merged, not the packet's base, so their own earlier change is not "ours"
against their newer "theirs". Precisely, per joint the base is the earlier return's label,
except on joints still in open dispute from that return, whose base stays the packet's (so
the dispute is judged again on the newer word: kept if they left it, dropped if they now
agree with ours, renewed if they moved it again). What changed here since, with the
reviewer's side unchanged, stays ours; changed on both sides, it conflicts. People the
reviewer added and the earlier merge brought over keep the ids they were given here. A return
older than one already merged from the same reviewer is refused. What a merge needs for this
(the reviewer's labels, the ids given, the return's time) is kept in the packet's record.

Every change is an ordinary edit through :meth:`Project.apply`, credited to the reviewer:
per frame one step for the joints and deletions, one per added person, one per note and one
for the state, each undoable. A last transaction records the alternatives and the packet
(with its SHA-256) and writes one ledger entry for the merge, so merging the same returned
packet again changes nothing. A merge cut short (a crash between frames) is finished by
merging again: frames already merged find both sides alike, notes and people already brought
over are recognised.
"""

from __future__ import annotations

import logging
import time
from collections.abc import Mapping, Sequence
from dataclasses import asdict, dataclass, field, replace
from pathlib import Path
from typing import Any

import numpy as np

from app.errors import BadInput, EditRefused, NotFound
from app.model.edits import AddNote, Change, EditContext, NewPerson, Restore, SetFrameState
from app.model.labels import FrameLabels, FrameState, Note, Person
from app.model.records import OLD_DECISIONS, PacketRecord
from app.model.targets import JointTarget, PersonTarget, TrackTarget
from app.progress import Progress
from app.review import safezip
from app.review.packet import FrameContent, Packet, read_packet
from app.store import Project
from app.wording import count

log = logging.getLogger(__name__)

#: Two coordinates closer than this (pixels) are the same label.
TOLERANCE = 1e-6

__all__ = [
    "Conflict", "FramePlan", "MergeReport", "MergeReview", "ReviewNote", "ReviewPerson",
    "merge_packet", "plan_frame", "same_joints",
]


def same_joints(a: np.ndarray, b: np.ndarray, tolerance: float = TOLERANCE) -> np.ndarray:
    """Which joints carry the same label in two versions of a person.

    Parameters
    ----------
    a, b
        ``(K, 3)`` ``x, y, v``.
    tolerance
        Largest coordinate difference, in pixels, still counted the same.

    Returns
    -------
    numpy.ndarray
        ``(K,)`` bool: same visibility, and for labelled joints the same position.

    Notes
    -----
    An unlabeled joint (``v = 0``) equals any other unlabeled joint whatever position it
    remembers: training and export ignore that position.

    Examples
    --------
    >>> a = np.array([[1.0, 2.0, 2], [5.0, 5.0, 0], [3.0, 3.0, 1]])
    >>> b = np.array([[1.0, 2.0, 2], [9.0, 9.0, 0], [3.0, 3.0, 2]])
    >>> same_joints(a, b)
    array([ True,  True, False])
    """
    va, vb = a[:, 2], b[:, 2]
    with np.errstate(invalid="ignore"):
        near = (np.abs(a[:, :2] - b[:, :2]) <= tolerance).all(axis=1)
    return (va == vb) & ((va == 0) | near)


# ---------------------------------------------------------------------- the plan (pure)

@dataclass(frozen=True)
class Conflict:
    """A person both sides changed differently (``joints``) or one deleted (``deleted-here``,
    ``deleted-there``). ``theirs`` is the reviewer's version to keep as the alternative (None
    when they deleted the person); for ``joints`` it is ours with the reviewer's conflicting
    joints, so that it differs from ours exactly on ``joints``."""

    frame_id: int
    person_id: int
    kind: str
    joints: tuple[int, ...]
    base: Person | None
    theirs: Person | None


@dataclass
class FramePlan:
    """What merging one frame does (see :func:`plan_frame`)."""

    frame_id: int
    changes: list[Change] = field(default_factory=list)
    new_people: list[Person] = field(default_factory=list)
    notes: list[Note] = field(default_factory=list)
    conflicts: list[Conflict] = field(default_factory=list)
    state: FrameState | None = None
    was_disputed: bool = False
    changed_here: bool = False
    joints_taken: int = 0
    tracks_taken: int = 0
    people_deleted: int = 0
    #: People of the reviewer's, by their id in the review, to their id here.
    person_ids: dict[int, int] = field(default_factory=dict)


def plan_frame(base: FrameContent, ours: FrameLabels, theirs: FrameContent,
               decision: str | None = None) -> FramePlan:
    """The three-way merge of one frame, as changes to make to ``ours``.

    Parameters
    ----------
    base
        The frame's people and notes when the packet was made.
    ours
        The frame in the project now.
    theirs
        The frame as the reviewer returned it.
    decision
        The reviewer's decision on the frame, if any.

    Returns
    -------
    FramePlan
        ``changes`` (joint changes and deletions, to apply as one step), ``new_people`` (the
        reviewer's, with the reviewer's ids; the store gives fresh ones), ``notes`` to add,
        ``conflicts`` and the frame ``state`` to set (None: leave it). Changes include the
        people's tracks taken from the reviewer (``track`` conflicts never dispute the
        frame).

    Notes
    -----
    Per joint, with ``S(a, b)`` the label equality of :func:`same_joints`: take theirs where
    ``S(ours, base) and not S(theirs, base)``; conflict where none of ``S(ours, base)``,
    ``S(theirs, base)``, ``S(ours, theirs)`` holds; keep ours otherwise. See the module
    docstring for people and notes (common practice of three-way merges, no source).

    Examples
    --------
    >>> from app.model.skeleton import coco_body
    >>> kp = np.zeros((17, 3)); kp[0] = (10, 10, 2)
    >>> p = Person(1, kp, np.full(17, np.nan), ("import",) * 17)
    >>> moved = p.with_joint(0, [12.0, 10.0, 2, None, "bea"])
    >>> base, theirs = FrameContent(5, {1: p}, {}), FrameContent(5, {1: moved}, {})
    >>> plan = plan_frame(base, FrameLabels(5, coco_body(), {1: p}), theirs)
    >>> [c.describe() for c in plan.changes], plan.conflicts
    (['person:1/joint:0'], [])
    """
    plan = FramePlan(ours.frame_id, was_disputed=ours.state is FrameState.DISPUTED)
    base_ids = set(base.people)
    for pid in sorted(base_ids | set(theirs.people)):
        b = base.people.get(pid)
        o = ours.people.get(pid)
        t = theirs.people.get(pid)
        if b is None:
            if t is not None:
                known = _already_added(t, ours, base_ids)
                if known is None:
                    plan.new_people.append(t)
                else:
                    plan.person_ids[t.id] = known
            continue
        if o is not None and (o.keypoints.shape != b.keypoints.shape
                              or not same_joints(o.keypoints, b.keypoints).all()):
            plan.changed_here = True
        if o is None and t is None:
            continue
        if o is None:
            if t is not None and not same_joints(t.keypoints, b.keypoints).all():
                plan.conflicts.append(Conflict(ours.frame_id, pid, "deleted-here",
                                               _changed(t, b), b, t))
            continue
        if t is None:
            if same_joints(o.keypoints, b.keypoints).all():
                plan.changes.append(Change(PersonTarget(pid), o.to_value(), None))
                plan.people_deleted += 1
            else:
                plan.conflicts.append(Conflict(ours.frame_id, pid, "deleted-there",
                                               _changed(o, b), b, None))
            continue
        _plan_person(plan, b, o, t)
    plan.changed_here |= any(pid not in ours.people for pid in base_ids)
    plan.changed_here |= any(pid not in base_ids for pid in ours.people)
    seen = {(n.author, n.time, n.text) for n in ours.notes.values()}
    for nid, note in sorted(theirs.notes.items()):
        if nid not in base.notes and (note.author, note.time, note.text) not in seen:
            plan.notes.append(note)
    decision = OLD_DECISIONS.get(decision or "", decision)
    if any(c.kind != "track" for c in plan.conflicts) or decision == "query":
        plan.state = FrameState.DISPUTED
    elif decision == "ready" and not plan.changed_here and not plan.conflicts:
        plan.state = FrameState.SIGNED_OFF
    elif decision == "looks-right" and plan.was_disputed and not plan.changed_here \
            and not plan.conflicts:
        plan.state = FrameState.CORRECTED
    if plan.state is ours.state:
        plan.state = None
    return plan


def _plan_person(plan: FramePlan, b: Person, o: Person, t: Person) -> None:
    ob = same_joints(o.keypoints, b.keypoints)
    tb = same_joints(t.keypoints, b.keypoints)
    ot = same_joints(o.keypoints, t.keypoints)
    take = ob & ~tb
    clash = ~ob & ~tb & ~ot
    merged = o
    for j in np.flatnonzero(take).tolist():
        after = t.joint_value(j)
        plan.changes.append(Change(JointTarget(o.id, j), o.joint_value(j), after))
        merged = merged.with_joint(j, after)
    plan.joints_taken += int(take.sum())
    if clash.any():
        alternative = merged
        for j in np.flatnonzero(clash).tolist():
            alternative = alternative.with_joint(j, t.joint_value(j))
        plan.conflicts.append(Conflict(plan.frame_id, o.id, "joints",
                                       tuple(np.flatnonzero(clash).tolist()), b, alternative))
    _plan_track(plan, b, o, t)


def _plan_track(plan: FramePlan, b: Person, o: Person, t: Person) -> None:
    """The person's track, three ways by track id (see the module docstring)."""
    if o.track == b.track and t.track != b.track:
        plan.changes.append(Change(TrackTarget(o.id), o.track_value(), t.track_value()))
        plan.tracks_taken += 1
    elif b.track not in (o.track, t.track) and o.track != t.track:
        plan.conflicts.append(Conflict(plan.frame_id, o.id, "track", (), b,
                                       o.with_track(t.track_value())))


def _changed(p: Person, b: Person) -> tuple[int, ...]:
    return tuple(np.flatnonzero(~same_joints(p.keypoints, b.keypoints)).tolist())


def _already_added(t: Person, ours: FrameLabels, base_ids: set[int]) -> int | None:
    """The id of a person of ours, new since the base, labelled exactly like ``t`` (brought
    over by an earlier, interrupted merge of the same packet), if there is one."""
    return next((pid for pid, p in ours.people.items()
                 if pid not in base_ids and p.keypoints.shape == t.keypoints.shape
                 and same_joints(p.keypoints, t.keypoints).all()), None)


# ---------------------------------------------------------------------- returning again

@dataclass(frozen=True)
class _Earlier:
    """The newest merged return of a packet by one reviewer: when it was returned and merged,
    the reviewer's labels in it, and the ids the merge gave the people they added."""

    returned: float
    merged: float
    labels: Mapping[int, FrameContent]
    person_ids: Mapping[int, Mapping[int, int]]


def _earlier_return(project: Project, packet_id: str, reviewer: str) -> _Earlier | None:
    for found in project.packet_records(packet_id, "merged", reviewer=reviewer):
        record, merged = found.report, found.time
        if "reviewer_labels" in record:
            labels = {int(fid): _content_from_record(int(fid), value)
                      for fid, value in record["reviewer_labels"].items()}
            ids = {int(fid): {int(r): int(h) for r, h in pairs.items()}
                   for fid, pairs in record["person_ids"].items()}
            return _Earlier(float(record["returned_time"]), float(merged), labels, ids)
    return None


def _content_to_record(content: FrameContent) -> dict[str, Any]:
    return {"people": [{"id": p.id, **p.to_value()} for p in content.people.values()],
            "notes": [{"id": n.id, **n.to_value()} for n in content.notes.values()]}


def _same_people(a: FrameContent, b: FrameContent) -> bool:
    return a.people.keys() == b.people.keys() and all(
        a.people[pid].same_as(b.people[pid]) for pid in a.people)


def _content_from_record(frame_id: int, value: Mapping[str, Any]) -> FrameContent:
    return FrameContent(
        frame_id, {p["id"]: Person.from_value(p["id"], p) for p in value["people"]},
        {n["id"]: Note.from_value(n["id"], frame_id, n) for n in value["notes"]})


def _renumbered(content: FrameContent, ids: Mapping[int, int]) -> FrameContent:
    """``content`` with the reviewer's people (and the notes about them) under their ids
    here."""
    if not ids:
        return content
    people = {ids.get(pid, pid): replace(p, id=ids.get(pid, pid))
              for pid, p in content.people.items()}
    notes = {nid: replace(n, person_id=ids.get(n.person_id, n.person_id))
             if n.person_id is not None else n for nid, n in content.notes.items()}
    return replace(content, people=people, notes=notes)


def _rebased(base: FrameContent, earlier: FrameContent,
             open_disputes: Mapping[int, frozenset[int] | None]) -> FrameContent:
    """The base of a later return: the reviewer's earlier return, except where a dispute it
    raised is still open (``open_disputes``: joints by person, None for the whole person),
    where the packet's base stays."""
    people: dict[int, Person] = {}
    for pid in sorted(set(base.people) | set(earlier.people)):
        b, e = base.people.get(pid), earlier.people.get(pid)
        person = e
        joints = open_disputes.get(pid, frozenset())
        if pid in open_disputes and (joints is None or b is None or e is None):
            person = b
        elif joints and b is not None and e is not None:
            person = e
            for j in sorted(joints):
                person = person.with_joint(j, b.joint_value(j))
        if person is not None:
            people[pid] = person
    return FrameContent(base.frame_id, people, {**base.notes, **earlier.notes})


def _open_disputes(project: Project, frame_id: int, packet_id: str,
                   reviewer: str) -> dict[int, frozenset[int] | None]:
    """Disputes the reviewer's earlier return of this packet raised in the frame that are still
    open: the differing joints by person, None where a whole person is disputed."""
    from app.review.settle import differences  # settle builds on this module

    return {d.person_id: None if d.ours is None or d.theirs is None
            else frozenset(jd.joint for jd in d.joints)
            for d in differences(project, frame_id)
            if d.alternative.packet_id == packet_id and d.alternative.reviewer == reviewer}


# ---------------------------------------------------------------------- edits of a merge

@dataclass(frozen=True)
class MergeReview(Restore):
    """The reviewer's joint changes and deletions in one frame, applied verbatim (refused if
    the frame moved on since the merge was planned)."""


@dataclass(frozen=True)
class ReviewPerson(NewPerson):
    """A person the reviewer added, brought over whole (joints, scores, provenance); the store
    gives the id."""

    value: Mapping[str, Any] | None = None
    label: str = ""

    def plan(self, labels: FrameLabels, ctx: EditContext) -> list[Change]:
        if self.person_id is None:
            raise EditRefused("a new person needs an id (the store assigns one)")
        if self.person_id in labels.people:
            raise EditRefused(f"person #{self.person_id} already exists")
        if self.value is None:
            raise EditRefused("no person to add")
        person = Person.from_value(self.person_id, self.value)
        if person.keypoints.shape != (labels.num_joints, 3):
            raise EditRefused(f"keypoints must be ({labels.num_joints}, 3)")
        return [Change(PersonTarget(person.id), None, person.to_value())]

    def summary(self) -> str:
        return self.label or f"new person {self.person_id}"


@dataclass(frozen=True)
class ReviewNote(AddNote):
    """A note the reviewer wrote, brought over with its own author and time."""

    note_author: str = ""
    note_time: float = 0.0

    def plan(self, labels: FrameLabels, ctx: EditContext) -> list[Change]:
        changes = super().plan(labels, ctx)
        value = dict(changes[0].after)
        value["author"] = self.note_author or ctx.author
        value["time"] = self.note_time or ctx.time
        return [replace(changes[0], after=value)]

    def summary(self) -> str:
        return f"add note by {self.note_author} from review"


# ---------------------------------------------------------------------- the whole merge

@dataclass
class MergeReport:
    """What :func:`merge_packet` did."""

    packet_id: str
    reviewer: str
    already_merged: bool = False
    base_checked: bool = False
    frames: int = 0
    joints_taken: int = 0
    tracks_taken: int = 0
    people_added: int = 0
    people_deleted: int = 0
    notes_added: int = 0
    conflicts: list[dict[str, Any]] = field(default_factory=list)
    disputed: list[int] = field(default_factory=list)
    signed_off: list[int] = field(default_factory=list)
    changed_here: list[int] = field(default_factory=list)
    merged_at: float | None = None

    def to_dict(self) -> dict[str, Any]:
        return asdict(self)


def merge_packet(project: Project, path: str | Path,
                 limits: safezip.Limits = safezip.DEFAULT_LIMITS,
                 progress: Progress | None = None) -> MergeReport:
    """Merge a returned review packet into ``project``.

    Parameters
    ----------
    project
        The project the packet was made from, open for editing.
    path
        The returned packet (``FILE-returned.zip``).
    limits
        Bounds on the archive (:class:`app.review.safezip.Limits`).
    progress
        Progress and cancel (a cancel between frames leaves the frames merged so far; merging
        again finishes the job).

    Returns
    -------
    MergeReport
        Counts, conflicts, and ``already_merged`` when this exact return was merged before
        (then nothing changed).

    Raises
    ------
    BadInput
        Before anything changes: a packet that is damaged, altered, unsafe, not returned,
        from another project or skeleton, whose base differs from what was sent, or that is
        older than a return of the same packet by the same reviewer merged already.

    Notes
    -----
    A later return of a packet by the reviewer whose earlier return was merged is merged
    against that earlier return (see "Returning again" in the module docstring).
    """
    packet = read_packet(path, returned=True, limits=limits)
    assert packet.returned is not None
    where = str(path)
    if packet.project_id != project.project_id:
        raise BadInput(f"the packet belongs to another project ({packet.project_id}, this "
                       f"one is {project.project_id})", where=where,
                       hint="merge it into the project it was exported from")
    if packet.skeleton.joints != project.skeleton.joints:
        raise BadInput("the packet's skeleton differs from the project's", where=where)
    reviewer = packet.returned.reviewer
    report = MergeReport(packet.packet_id, reviewer, frames=len(packet.frames))
    done = project.packet_records(packet.packet_id, "merged", sha256=packet.sha256)
    if done:
        report.already_merged, report.merged_at = True, done[0].time
        return report
    earlier = _earlier_return(project, packet.packet_id, reviewer)
    if earlier is not None and packet.returned.time < earlier.returned:
        merged = time.strftime("%Y-%m-%d %H:%M", time.localtime(earlier.merged))
        raise BadInput(f"{reviewer} sent this packet back again later: that newer review, "
                       f"merged on {merged}, supersedes this one", where=where,
                       hint="nothing to merge; merge the newest one only")
    sent = project.packet_records(packet.packet_id, "exported")
    if sent and sent[0].sha256 != packet.base_sha256:
        raise BadInput("the base labels differ from the ones this project sent",
                       where=f"{where}: member 'labels.json'",
                       hint="the packet was altered; ask the reviewer for it again")
    report.base_checked = bool(sent)
    if not sent:
        log.warning("packet %s was not recorded when it was sent; its base is not checked",
                    packet.packet_id)
    plans = []
    for frame in packet.frames:
        try:
            ours = project.labels(frame.id)
        except NotFound:
            raise BadInput(f"frame {frame.id} ({frame.file_name}) is not in the project",
                           where=where) from None
        decision = packet.returned.decisions.get(frame.id)
        base, theirs = packet.base[frame.id], packet.returned.final[frame.id]
        ids: Mapping[int, int] = {}
        if earlier is not None and frame.id in earlier.labels:
            ids = earlier.person_ids.get(frame.id, {})
            base = _rebased(base, _renumbered(earlier.labels[frame.id], ids),
                            _open_disputes(project, frame.id, packet.packet_id, reviewer))
            theirs = _renumbered(theirs, ids)
        plan = plan_frame(base, ours, theirs, decision.decision if decision else None)
        plan.person_ids.update(ids)
        plans.append(plan)
    progress = progress or Progress()
    for n, plan in enumerate(plans):
        progress.step(n, len(plans), "merging frames")
        _apply_plan(project, packet, plan, report)
    progress.step(len(plans), len(plans), "merging frames")
    _record(project, packet, plans, report, again=earlier is not None)
    return report


def _apply_plan(project: Project, packet: Packet, plan: FramePlan,
                report: MergeReport) -> None:
    reviewer = packet.returned.reviewer if packet.returned else ""
    fid = plan.frame_id
    if plan.changes:
        project.apply(MergeReview(fid, tuple(plan.changes),
                                  label=f"take {reviewer}'s review: "
                                        f"{count(plan.joints_taken, 'joint')}, "
                                        + (f"{count(plan.tracks_taken, 'track')}, "
                                           if plan.tracks_taken else "")
                                        + f"{count(plan.people_deleted, 'person')} deleted"),
                      author=reviewer)
    ids = plan.person_ids
    for person in plan.new_people:
        applied = project.apply(ReviewPerson(fid, value=person.to_value(),
                                             label=f"new person from {reviewer}'s review"),
                                author=reviewer)
        assert isinstance(applied.edit, ReviewPerson) and applied.edit.person_id is not None
        ids[person.id] = applied.edit.person_id
    present = {p.id for p in project.people(fid)}
    for note in plan.notes:
        pid = ids.get(note.person_id, note.person_id) if note.person_id is not None else None
        text = note.text
        if pid is not None and pid not in present:
            text, pid = f"(about person #{note.person_id}) {text}", None
        project.apply(ReviewNote(fid, text, person_id=pid, note_author=note.author,
                                 note_time=note.time), author=note.author or reviewer)
    if plan.state is not None:
        project.apply(SetFrameState(fid, plan.state), author=reviewer)
    report.joints_taken += plan.joints_taken
    report.tracks_taken += plan.tracks_taken
    report.people_deleted += plan.people_deleted
    report.people_added += len(plan.new_people)
    report.notes_added += len(plan.notes)
    if plan.changed_here:
        report.changed_here.append(fid)
    if plan.state is FrameState.DISPUTED:
        report.disputed.append(fid)
    if plan.state is FrameState.SIGNED_OFF:
        report.signed_off.append(fid)
    report.conflicts += [_conflict_record(c) for c in plan.conflicts]


def _conflict_record(c: Conflict) -> dict[str, Any]:
    """A conflict as the report lists it (a track conflict with both track ids)."""
    out: dict[str, Any] = {"frame": c.frame_id, "person": c.person_id, "kind": c.kind,
                           "joints": list(c.joints)}
    if c.kind == "track" and c.theirs is not None:
        out["theirs_track"] = c.theirs.track
    return out


def _record(project: Project, packet: Packet, plans: Sequence[FramePlan],
            report: MergeReport, again: bool = False) -> None:
    """Record the merge: alternatives for the conflicts, and the packet with what a later
    return of it needs (the reviewer's labels, the ids given to their people, the return's
    time). ``again``: the reviewer's earlier return of this packet was merged before; its
    alternatives are replaced by this return's."""
    assert packet.returned is not None
    now = time.time()
    report.merged_at = now
    summary = (f"merge review packet from {packet.returned.reviewer}: "
               f"{count(report.frames, 'frame')}, {count(report.joints_taken, 'joint')} taken, "
               f"{count(len(report.conflicts), 'conflict')}")
    # Frames the reviewer left as sent need no record: their base stays the packet's.
    record = {
        **report.to_dict(), "returned_time": packet.returned.time,
        "reviewer_labels": {str(fid): _content_to_record(c)
                            for fid, c in packet.returned.final.items()
                            if not _same_people(c, packet.base[fid])},
        "person_ids": {str(p.frame_id): {str(r): h for r, h in p.person_ids.items()}
                       for p in plans},
    }
    with project.bulk("MergePacket", summary, f"packet:{packet.packet_id}",
                      kind="review") as b:
        reviewer = packet.returned.reviewer
        for plan in plans:
            if again:
                b.alternatives.retire(plan.frame_id, now, packet_id=packet.packet_id,
                                      reviewer=reviewer)
            if any(c.kind != "track" for c in plan.conflicts) and not plan.was_disputed:
                b.alternatives.retire(plan.frame_id, now, other_packets_than=packet.packet_id)
            for c in plan.conflicts:
                if c.kind == "track":
                    continue  # ours stays; the report names it (the frame is not disputed)
                b.alternatives.put(c.frame_id, c.person_id, packet.packet_id, reviewer, now,
                                   c.kind, c.base, c.theirs)
        b.packets.add(PacketRecord(packet.packet_id, "merged", packet.sha256, reviewer, now,
                                   tuple(f.id for f in packet.frames), record,
                                   tuple(packet.returned.ledger)))
        b.stats.update({"frames": report.frames, "joints taken": report.joints_taken,
                        "conflicts": len(report.conflicts)})
