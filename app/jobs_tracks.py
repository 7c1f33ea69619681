"""Jobs on sequences and tracks, shared by the command line and the app.

:func:`link_project` links the people of every sequence of a project into tracks
(:func:`app.analysis.tracks.link_tracks`) and writes them as bulk work (one ledger record, like
an import), keeping every track someone set by hand or that came from a label file: those are
given to the linking, which links the other people around them. :func:`sequence_people` reads a
sequence's people in order, the form :mod:`app.model.tracks` edits and
:mod:`app.analysis.triage.temporal` checks take.

:func:`propose_carry` carries a correction to the frames around it that show the same error
(:mod:`app.analysis.carry`); :func:`take_batch` applies such a batch as one action.
"""

from __future__ import annotations

import json
import logging
from collections.abc import Iterable
from collections.abc import Sequence as Seq
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from app.analysis.carry import MAX_FRAMES, CarriedBatch, by_person, carry_changes
from app.analysis.tracks import link_tracks
from app.errors import BadInput
from app.model.edits import Change
from app.model.labels import AUTO, FrameLabels, Person
from app.model.sequences import NOT_SEQUENCES, Sequence, parse_not_sequences, sequences
from app.model.targets import StateTarget
from app.progress import Progress
from app.store.project import Project
from app.wording import count

log = logging.getLogger(__name__)


def project_sequences(project: Project) -> list[Sequence]:
    """The project's sequences (folders marked as not a sequence left out)."""
    return sequences(project.frames(), parse_not_sequences(project.meta(NOT_SEQUENCES)))


def sequence_people(project: Project, sequence: Sequence,
                    people: dict[int, list[Person]] | None = None) -> dict[int, list[Person]]:
    """Each frame of ``sequence``, in order, with its people."""
    people = project.people_by_frame() if people is None else people
    return {fid: people.get(fid, []) for fid in sequence.frame_ids}


def mark_not_sequence(project: Project, folders: Iterable[str],
                      not_sequence: bool = True) -> set[str]:
    """Record that folders (sequence keys) are not sequences, or are again; returns the
    folders marked now."""
    marked = parse_not_sequences(project.meta(NOT_SEQUENCES))
    folders = {f.strip().strip("/") for f in folders}
    known = {s.key for s in sequences(project.frames())}
    unknown = sorted(folders - known - marked)
    if unknown:
        raise BadInput(f"no folder of frames is called {unknown[0]!r}; one of "
                       + ", ".join(repr(k) for k in sorted(known)), where="--not-a-sequence")
    marked = marked | folders if not_sequence else marked - folders
    project.set_meta(NOT_SEQUENCES, json.dumps(sorted(marked)))
    return marked


@dataclass(frozen=True)
class TrackInfo:
    """One track: its id, its sequence, and its people frame by frame."""

    track: int
    sequence: str
    frames: tuple[int, ...]
    people: tuple[int, ...]
    edited: bool

    def to_dict(self) -> dict[str, Any]:
        return {"track": self.track, "sequence": self.sequence, "frames": list(self.frames),
                "people": list(self.people), "edited": self.edited}


@dataclass
class Linked:
    """What :func:`link_project` did."""

    sequences: int = 0
    frames: int = 0
    people: int = 0
    kept: int = 0
    links: int = 0
    tracks: list[TrackInfo] = field(default_factory=list)


def _kept(person: Person) -> bool:
    """Whether linking again keeps the person's track: someone set it, or a file gave it."""
    return person.track is not None and person.track_source not in ("", AUTO)


def link_project(project: Project, progress: Progress | None = None,
                 write: bool = True) -> Linked:
    """Link every sequence's people into tracks; keep the tracks someone set.

    Track ids are unique in the project: each sequence's new tracks are numbered after every
    track id already kept anywhere and after the tracks of the sequences before it. With
    ``write`` False nothing is written (what :func:`tracks_of` then reports is what is
    stored).
    """
    progress = progress or Progress()
    all_people = project.people_by_frame()
    seqs = project_sequences(project)
    sigmas = project.skeleton.sigmas
    out = Linked()
    next_free = 1 + max((p.track for ps in all_people.values() for p in ps
                         if _kept(p) and p.track is not None), default=0)
    rows: list[tuple[int, int | None, str]] = []
    for n, seq in enumerate(seqs):
        progress.step(n, len(seqs), "linking tracks")
        frames = sequence_people(project, seq, all_people)
        arrays = [np.stack([p.keypoints for p in ps]) if ps else
                  np.zeros((0, project.skeleton.num_joints, 3)) for ps in frames.values()]
        given = [np.array([p.track if _kept(p) else -1 for p in ps], dtype=np.int64)
                 for ps in frames.values()]
        # Ids the linking chooses go after every kept id; shift them past the ids used so far.
        floor = max((int(g.max()) for g in given if len(g)), default=-1)
        ids = link_tracks(arrays, sigmas, given=given)
        shift = next_free - (floor + 1) if floor >= 0 else next_free - 1
        top = next_free - 1
        for ps, chosen, g in zip(frames.values(), ids, given, strict=True):
            for p, t, keep in zip(ps, chosen.tolist(), g.tolist(), strict=True):
                if keep >= 0:
                    out.kept += 1
                    continue
                t = int(t) + shift
                top = max(top, t)
                rows.append((p.id, t, AUTO))
        next_free = top + 1
        out.sequences += 1
        out.frames += len(frames)
        out.people += sum(len(ps) for ps in frames.values())
    progress.step(len(seqs), len(seqs), "linking tracks")
    if write and rows:
        project.set_tracks(rows, f"link {count(len(rows), 'person')} of "
                                 f"{count(out.sequences, 'sequence')} into tracks")
    out.tracks = tracks_of(project) if write else []
    out.links = sum(len(t.frames) - 1 for t in out.tracks)
    return out


def tracks_of(project: Project) -> list[TrackInfo]:
    """Every track of the project, by id, with its frames in sequence order (consecutive
    frames of a track are the links; a track skipping frames has a gap there)."""
    all_people = project.people_by_frame()
    out: dict[int, dict[str, Any]] = {}
    for seq in project_sequences(project):
        for fid, ps in sequence_people(project, seq, all_people).items():
            for p in ps:
                if p.track is None:
                    continue
                t = out.setdefault(p.track, {"sequence": seq.key, "frames": [], "people": [],
                                             "edited": False})
                t["frames"].append(fid)
                t["people"].append(p.id)
                t["edited"] |= _kept(p)
    return [TrackInfo(k, v["sequence"], tuple(v["frames"]), tuple(v["people"]), v["edited"])
            for k, v in sorted(out.items())]


# ---------------------------------------------------------------------- carrying a correction


def sequence_labels(project: Project, frame_id: int) -> tuple[list[FrameLabels], int]:
    """The labels of every frame of ``frame_id``'s sequence, in order, and where
    ``frame_id`` is among them.

    Raises
    ------
    BadInput
        When the frame belongs to no sequence (its folder is marked as not a sequence).
    """
    for seq in project_sequences(project):
        if frame_id in seq.frame_ids:
            return [project.labels(f) for f in seq.frame_ids], seq.frame_ids.index(frame_id)
    raise BadInput(f"frame {frame_id} belongs to no sequence (its folder is marked as not "
                   "a sequence)", where="carry")


def propose_carry(project: Project, frame_id: int, changes: Seq[Change],
                  max_frames: int = MAX_FRAMES, whole_person: bool = True,
                  whole_frame: bool = False, step_over: int | None = None) -> CarriedBatch:
    """The batch that carries a correction of ``frame_id`` (its changes, as applied) to the
    frames around it that show the same error; nothing is changed. What the app calls after
    each correction, to show where the batch would end.

    With ``whole_person`` (the default) what is carried is every correction in effect of the
    people the correction touched in that frame (:func:`person_changes`), each joint as far
    as its own error lasts; else the correction alone, as far as all of it lasts. With
    ``whole_frame``, every correction in effect in that frame, of every person, each joint as
    far as its own error lasts (:func:`frame_changes`): errors that last one more frame on
    several people are taken with one key rather than one per person. ``step_over`` frames
    where the error is absent and back after are stepped over (default
    :data:`app.analysis.carry.GAP`, 0: the batch stops at the first frame without the
    error)."""
    if whole_frame:
        changes = frame_changes(project, frame_id) or list(changes)
    elif whole_person:
        touched = {getattr(c.target, "person", None) for c in changes} - {None}
        changes = person_changes(project, frame_id, touched) or list(changes)
    frames, at = sequence_labels(project, frame_id)
    return carry_changes(changes, frames, at, max_frames,
                         each_joint=whole_person or whole_frame, gap=step_over)


def frame_changes(project: Project, frame_id: int) -> list[Change]:
    """Every change in effect that the edits of ``frame_id`` made to its people's joints and
    to its people (deleted), one person after another (:func:`app.analysis.carry.by_person`),
    oldest first within each: the frame's whole correction, what ``carry --whole-frame``
    carries. Edits undone, carried batches and bulk work are left out, as in
    :func:`person_changes`."""
    return [c for relation in by_person(_live_changes(project, frame_id)) for c in relation]


def _live_changes(project: Project, frame_id: int) -> list[Change]:
    live: dict[int, list[Any]] = {}
    for e in sorted(project.history(frame_id), key=lambda e: e.seq):
        if e.kind in ("edit", "redo") and e.action not in ("Batch", "CarryForward"):
            live.setdefault(e.group_id, []).append(e)
        elif e.kind == "undo" and e.reverts is not None:
            live.pop(e.reverts, None)
    entries = sorted((e for group in live.values() for e in group), key=lambda e: e.seq)
    return [Change(e.target, e.before, e.after) for e in entries
            if not isinstance(e.target, StateTarget)]


def person_changes(project: Project, frame_id: int, people: Iterable[int]) -> list[Change]:
    """Every change in effect that the edits of ``frame_id`` made to ``people`` and to the
    people they exchanged joints with (:func:`app.analysis.carry.by_person`), oldest first:
    a person's whole correction in that frame, what carrying per person carries. Edits undone
    are left out, and so are carried batches (they came from another frame) and bulk work."""
    changes = _live_changes(project, frame_id)
    wanted = set(people)
    return [c for relation in by_person(changes)
            if wanted & {getattr(c.target, "person", None) for c in relation}
            for c in relation]


def last_correction(project: Project, group: int | None = None) -> tuple[int, int,
                                                                        list[Change]]:
    """``(group, frame, changes)`` of an action: ``group``, or the newest edit (on a server,
    the author's own newest; an undo or redo, a batch over several frames and bulk work are
    not corrections to carry)."""
    if group is None:
        newest = next((e for e in project.history(limit=2000)
                       if e.kind == "edit" and e.action not in ("Batch", "CarryForward")
                       and (not project.hosted or e.author == project.author)), None)
        if newest is None:
            raise BadInput(f"{project.author or 'you'} made no correction to carry yet",
                           where="carry")
        group = newest.group_id
    entries = project.action(group)
    frames = {e.frame_id for e in entries}
    if not entries or len(frames) != 1 or None in frames:
        raise BadInput(f"action {group} is not a correction of one frame", where="carry")
    frame = entries[0].frame_id
    assert frame is not None
    changes = [Change(e.target, e.before, e.after) for e in entries
               if not isinstance(e.target, StateTarget)]
    return group, frame, changes


def take_batch(project: Project, batch: CarriedBatch) -> Any:
    """Apply a carried batch as one action (one undo step); returns the store's
    :class:`~app.store.ledger.Applied` (its group None when the batch is empty)."""
    if not batch.edits:
        return None
    frames = len(batch.edits)
    return project.apply_batch(batch.edits, f"carry the correction of frame {batch.origin} to "
                               f"{count(frames, 'frame')}",
                               action="CarryForward")


def track_step(project: Project, frame_id: int, person_id: int,
               step: int) -> tuple[int, int, int, int] | None:
    """The frame before (``step`` -1) or after (1) ``frame_id`` in its sequence where
    ``person_id``'s track has someone: ``(frame id, person id there, its place in the track
    counting from 1, the track's length)``; None when there is none, or the person has no
    track. What the app's keys for stepping along a track call."""
    person = next((p for p in project.people(frame_id) if p.id == person_id), None)
    if person is None or person.track is None:
        return None
    seq = next((s for s in project_sequences(project) if frame_id in s.frame_ids), None)
    if seq is None:
        return None
    people = project.people_by_frame()
    on = [(f, p.id) for f in seq.frame_ids for p in people.get(f, []) if p.track == person.track]
    frames = [f for f, _ in on]
    here = frames.index(frame_id) if frame_id in frames else None
    if here is None or not 0 <= here + step < len(on):
        return None
    fid, pid = on[here + step]
    return fid, pid, here + step + 1, len(on)
