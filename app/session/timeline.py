"""The timeline under the Canvas, without Qt: the selected person's track over the frames of
its sequence, and the extent of a correction carried along it.

:class:`Timeline` answers one question for the view: given the frame shown and the person
selected in it, which cells to draw and what each one says. A cell is one frame of the
person's sequence (:mod:`app.model.sequences`), and says

- whether the person's track has someone there (``person_id``; None: the track is absent,
  a gap or a frame before it starts or after it ends);
- how many open findings are about that someone (``findings``): the findings stored beside
  triage (what the Worklist counts), read only while they were computed from the frame's
  labels as they are now; findings over time are computed when asked for
  (:func:`app.jobs_findings.time_findings`) and not stored, so they are not counted here;
- whether the Ledger holds an edit in effect of that someone there (``corrected``): of their
  joints, of the person, or of their track, by anyone; an edit undone no longer counts,
  imports and linking (bulk work) never do;
- whether it is the frame shown (``current``);
- its part in the carried batch just proposed or taken (``batch``, see :class:`CarryMarks`).

A long sequence is shown through a window of ``span`` cells (the view says how many fit),
centred on the frame shown and shifted by :meth:`Timeline.scroll`; the window never runs past
either end. What each frame says is read once and kept until the store says the frame
changed (:meth:`Timeline.forget`), so stepping along a track reads only the frames that come
into view.

Examples
--------
The roles of a carried batch, backward and forward of the corrected frame 5 (synthetic):

>>> from app.analysis.carry import CarriedBatch
>>> from app.model.edits import EditGroup
>>> batch = CarriedBatch(5, (EditGroup(4, ()), EditGroup(6, ()), EditGroup(7, ())),
...                      last_forward=7, last_backward=4, stopped_forward=8,
...                      stopped_backward=None)
>>> marks = CarryMarks(); marks.show(batch, taken=False)
>>> sorted(marks.roles().items())
[(4, 'last'), (5, 'origin'), (6, 'carried'), (7, 'last'), (8, 'stop')]
>>> sorted(marks.worklist_marks())
[4, 7]
"""

from __future__ import annotations

import logging
from collections import abc
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass, field

from app.analysis.carry import MAX_FRAMES, CarriedBatch, carry_changes
from app.analysis.triage.findings import labels_digest
from app.errors import PosewrightError
from app.model.edits import Change
from app.model.labels import FrameLabels
from app.model.naming import person_text, tags
from app.model.sequences import NOT_SEQUENCES, parse_not_sequences, sequences
from app.model.sequences import Sequence as FrameSequence
from app.model.targets import StateTarget
from app.store.project import LedgerEntry, Project
from app.wording import count

log = logging.getLogger(__name__)

#: Cells shown when the view does not say how many fit.
SPAN = 41

#: What each role of a carried batch means, as the view's tooltips say it.
ROLE_TEXT = {
    "origin": "the correction carried from here",
    "carried": "the correction carried here",
    "last": "the carried correction ends here",
    "stop": "the error is absent here: carrying stopped",
}


@dataclass(frozen=True)
class Cell:
    """One frame of the track's sequence, as the timeline shows it (see the module
    docstring for what each field means)."""

    frame_id: int
    place: int
    person_id: int | None
    findings: int
    corrected: bool
    current: bool
    batch: str = ""
    #: The person's number tag in that frame (:mod:`app.model.naming`).
    tag: int | None = None

    @property
    def present(self) -> bool:
        """Whether the track has someone in this frame."""
        return self.person_id is not None

    def describe(self, length: int) -> str:
        """What the cell says, as its tooltip.

        Examples
        --------
        >>> for part in Cell(7, 7, 7001, 2, True, False, "last", tag=2).describe(12).split(
        ...         " \u00b7 "):
        ...     print(part)
        frame 7 (7 of 12): person 2 (#7001)
        2 open findings
        corrected
        the carried correction ends here
        >>> Cell(10, 10, None, 0, False, True).describe(12)
        'frame 10 (10 of 12, shown): the track has no one here'
        """
        head = f"frame {self.frame_id} ({self.place} of {length}" + \
            (", shown)" if self.current else ")")
        if self.person_id is None:
            parts = [f"{head}: the track has no one here"]
        else:
            parts = [f"{head}: {person_text(self.tag, self.person_id)}"]
            if self.findings:
                parts.append(count(self.findings, "open finding"))
            if self.corrected:
                parts.append("corrected")
        if self.batch:
            parts.append(ROLE_TEXT[self.batch])
        return " \u00b7 ".join(parts)


@dataclass(frozen=True)
class TrackStrip:
    """What the timeline shows for one person of one frame.

    Attributes
    ----------
    track
        The person's track.
    sequence
        The sequence's key (its folder).
    length
        How many frames the sequence has.
    cells
        The cells in view, in sequence order.
    taken
        Whether the batch marked is taken (False: only proposed).
    text
        One line that sums it up (the view's caption and tooltip).
    """

    track: int
    sequence: str
    length: int
    cells: tuple[Cell, ...]
    taken: bool
    text: str

    @property
    def current(self) -> Cell | None:
        """The cell of the frame shown."""
        return next((c for c in self.cells if c.current), None)

    def cell_of(self, frame_id: int) -> Cell | None:
        """The cell of a frame, if it is in view."""
        return next((c for c in self.cells if c.frame_id == frame_id), None)

    def more_before(self) -> bool:
        """Whether frames of the sequence lie before the window."""
        return bool(self.cells) and self.cells[0].place > 1

    def more_after(self) -> bool:
        """Whether frames of the sequence lie after the window."""
        return bool(self.cells) and self.cells[-1].place < self.length


@dataclass
class CarryMarks:
    """The carried batch the annotator last saw: proposed after a correction, or taken.

    Roles by frame: ``origin`` (the corrected frame), ``carried`` (a frame the batch changes),
    ``last`` (the last frame it changes in one direction: where it ends), ``stop`` (the first
    frame beyond it where the error is absent).
    """

    batch: CarriedBatch | None = None
    taken: bool = False

    def show(self, batch: CarriedBatch | None, taken: bool) -> None:
        """Mark ``batch`` (None, or one that changes no frame, clears the marks)."""
        self.batch = batch if batch is not None and batch.edits else None
        self.taken = taken and self.batch is not None

    def clear(self) -> None:
        """Forget the batch (its correction was taken back, or it no longer applies)."""
        self.batch, self.taken = None, False

    def roles(self) -> dict[int, str]:
        """Frame id -> role, for every frame the batch concerns."""
        b = self.batch
        if b is None:
            return {}
        out = {g.frame_id: "carried" for g in b.edits}
        for f in (b.last_forward, b.last_backward):
            if f is not None:
                out[f] = "last"
        for f in (b.stopped_forward, b.stopped_backward):
            if f is not None:
                out.setdefault(f, "stop")
        out[b.origin] = "origin"
        return out

    def worklist_marks(self) -> dict[int, str]:
        """The frames where the batch ends (its ``last`` frames), the Worklist's marks."""
        return {f: r for f, r in self.roles().items() if r == "last"}

    def text(self) -> str:
        """One line for the status bar ("" without a batch)."""
        b = self.batch
        if b is None:
            return ""
        ends = sorted({f for f in (b.last_backward, b.last_forward) if f is not None})
        head = ("carried" if self.taken else "can carry (Ctrl+Shift+C)") + \
            f" the correction of frame {b.origin} to {count(len(b.edits), 'frame')}"
        return head + f", ending at frame {' and '.join(map(str, ends))}"


@dataclass
class _FrameRow:
    """What one frame says about its people: their tracks, their open findings, who the
    Ledger shows corrected."""

    tracks: dict[int, int] = field(default_factory=dict)
    findings: dict[int, int] = field(default_factory=dict)
    corrected: frozenset[int] = frozenset()
    tags: dict[int, int] = field(default_factory=dict)


class Timeline:
    """The timeline's state over one project (see the module docstring).

    Parameters
    ----------
    project
        The open project.
    """

    def __init__(self, project: Project):
        self.project = project
        #: The carried batch marked.
        self.carry = CarryMarks()
        #: How far the window is shifted from centring on the frame shown (cells).
        self.offset = 0
        self._sequences: dict[int, FrameSequence] | None = None
        self._rows: dict[int, _FrameRow] = {}
        self._centre: tuple[int, int | None] | None = None
        self._proposal = 0

    # ------------------------------------------------------------------ changes

    def forget(self, frame_ids: Iterable[int]) -> None:
        """The labels, findings or Ledger of these frames changed: read them again."""
        for fid in frame_ids:
            self._rows.pop(int(fid), None)

    def forget_all(self) -> None:
        """Frames were added, imported or triaged: read everything again."""
        self._sequences = None
        self._rows.clear()

    def scroll(self, cells: int) -> None:
        """Shift the window by ``cells`` (negative: towards the start); the next
        :meth:`strip` keeps it inside the sequence."""
        self.offset += int(cells)

    # ------------------------------------------------------------------ reading

    def sequence_of(self, frame_id: int) -> FrameSequence | None:
        """The sequence that holds a frame (None: its folder is not a sequence)."""
        if self._sequences is None:
            seqs = sequences(self.project.frames(),
                             parse_not_sequences(self.project.meta(NOT_SEQUENCES)))
            self._sequences = {fid: s for s in seqs for fid in s.frame_ids}
        return self._sequences.get(int(frame_id))

    def _row(self, frame_id: int) -> _FrameRow:
        row = self._rows.get(frame_id)
        if row is None:
            row = self._rows[frame_id] = self._read_row(frame_id)
        return row

    def _read_row(self, frame_id: int) -> _FrameRow:
        try:
            labels = self.project.labels(frame_id)
        except PosewrightError:
            log.exception("reading frame %s for the timeline failed", frame_id)
            return _FrameRow()
        tracks = {p.id: p.track for p in labels.people.values() if p.track is not None}
        findings: dict[int, int] = {}
        digest = self.project.findings_digests(frame_id).get(frame_id)
        if digest is not None and digest == labels_digest(labels):
            for d in self.project.findings(frame_id).get(frame_id, []):
                about = {int(p) for p in d.get("people") or ()}
                if d.get("person_id") is not None:
                    about.add(int(d["person_id"]))
                for pid in about:
                    findings[pid] = findings.get(pid, 0) + 1
        return _FrameRow(tracks, findings, corrected_people(self.project.history(frame_id)),
                         tags(sorted(labels.people)))

    def strip(self, frame_id: int | None, person_id: int | None,
              span: int = SPAN, track: int | None = None) -> TrackStrip | None:
        """The cells for ``person_id``'s track around ``frame_id`` (or for ``track``, when
        no one is selected: the track followed into a frame where it has no one); None when
        no one is selected and no track given, the person is on no track, or the frame
        belongs to no sequence. Choosing another frame or track centres the window again."""
        if frame_id is None or (person_id is None and track is None):
            return None
        seq = self.sequence_of(frame_id)
        if seq is None:
            return None
        if person_id is not None:
            track = self._row(frame_id).tracks.get(person_id)
        if track is None:
            return None
        if self._centre != (frame_id, track):
            self._centre, self.offset = (frame_id, track), 0
        ids = seq.frame_ids
        at = ids.index(frame_id)
        span = max(1, min(int(span), len(ids)))
        start = min(max(at - span // 2 + self.offset, 0), len(ids) - span)
        self.offset = start - (at - span // 2)
        roles = self.carry.roles()
        cells = []
        for k in range(start, start + span):
            fid = ids[k]
            row = self._row(fid)
            there = next((pid for pid, t in row.tracks.items() if t == track), None)
            cells.append(Cell(fid, k + 1, there,
                              row.findings.get(there, 0) if there is not None else 0,
                              there is not None and there in row.corrected, fid == frame_id,
                              roles.get(fid, ""), row.tags.get(there) if there else None))
        return TrackStrip(track, seq.key, len(ids), tuple(cells), self.carry.taken,
                          self._text(track, at + 1, len(ids), cells))

    def _text(self, track: int, place: int, length: int, cells: Sequence[Cell]) -> str:
        found = sum(1 for c in cells if c.findings)
        fixed = sum(1 for c in cells if c.corrected)
        absent = sum(1 for c in cells if not c.present)
        parts = [f"track {track}: frame {place} of {length}"]
        if found:
            parts.append(f"findings in {count(found, 'frame')}")
        if fixed:
            parts.append(f"corrected in {count(fixed, 'frame')}")
        if absent:
            parts.append(f"absent from {count(absent, 'frame')}")
        if self.carry.batch is not None:
            parts.append(self.carry.text())
        return " \u00b7 ".join(parts)

    # ------------------------------------------------------------------ carrying

    def propose(self, frame_id: int, changes: Sequence[Change],
                max_frames: int = MAX_FRAMES) -> CarriedBatch | None:
        """Carry a correction just made in ``frame_id`` (its changes, as applied) to the
        frames around it, nothing changed, and mark the batch as proposed; None (and no
        marks) when the frame is in no sequence or the correction shows nowhere else. What is
        carried is the whole correction of the people it touched in that frame, each joint as
        far as its own error lasts (:func:`app.jobs_tracks.person_changes`). What
        :meth:`propose_work`, :meth:`begin_proposal` and :meth:`offer` do in turn."""
        work = self.propose_work(frame_id, changes, max_frames)
        if work is None:
            return None
        token = self.begin_proposal()
        self.offer(token, work())
        return self.carry.batch

    def propose_work(self, frame_id: int, changes: Sequence[Change],
                     max_frames: int = MAX_FRAMES) -> Callable[[], CarriedBatch] | None:
        """The work of proposing, to run on any thread (it reads the project and changes
        nothing); None, with the marks cleared, when there is nothing to carry: the frame is
        in no sequence, or the people corrected are on no track. The work reads only the
        frames the batch reaches (``max_frames`` each way); the frame's state is not carried
        (as :func:`app.jobs_tracks.last_correction` leaves it out)."""
        seq = self.sequence_of(frame_id)
        changes = [c for c in changes if not isinstance(c.target, StateTarget)]
        touched = {getattr(c.target, "person", None) for c in changes} - {None}
        if seq is None or not touched & set(self._row(frame_id).tracks):
            self.drop_carry()
            return None
        ids = seq.frame_ids
        at = ids.index(frame_id)
        lo, hi = max(0, at - max_frames - 1), min(len(ids), at + max_frames + 2)
        window = ids[lo:hi]
        project = self.project

        def work() -> CarriedBatch:
            # The person's whole correction in this frame, each joint as far as its error
            # lasts (as app.jobs_tracks.propose_carry does).
            from app.jobs_tracks import person_changes

            whole = person_changes(project, frame_id, touched) or changes
            return carry_changes(whole, _LazyLabels(project, window), at - lo, max_frames,
                                 each_joint=True)

        return work

    def begin_proposal(self) -> int:
        """A token for a proposal about to be worked out; a later one, or a change
        (:meth:`drop_carry`), makes it stale."""
        self._proposal += 1
        return self._proposal

    def offer(self, token: int, batch: CarriedBatch | None) -> bool:
        """Mark a proposed batch, unless its token is stale (the labels changed since it was
        begun); returns whether it was marked."""
        if token != self._proposal:
            return False
        self.carry.show(batch, taken=False)
        return True

    def drop_carry(self) -> None:
        """The labels changed: clear the marks, and make any proposal under way stale."""
        self._proposal += 1
        self.carry.clear()


class _LazyLabels(abc.Sequence):  # type: ignore[type-arg]
    """A sequence's frames' labels, read when first asked for: carrying walks out from the
    corrected frame and stops at the first frame without the error."""

    def __init__(self, project: Project, frame_ids: Sequence[int]):
        self._project = project
        self._ids = list(frame_ids)
        self._read: dict[int, FrameLabels] = {}

    def __len__(self) -> int:
        return len(self._ids)

    def __getitem__(self, k):  # type: ignore[no-untyped-def]
        if isinstance(k, slice):
            return [self[i] for i in range(*k.indices(len(self)))]
        if k < 0:
            k += len(self)
        if not 0 <= k < len(self):
            raise IndexError(k)
        if k not in self._read:
            self._read[k] = self._project.labels(self._ids[k])
        return self._read[k]


def corrected_people(entries: Iterable[LedgerEntry]) -> frozenset[int]:
    """The people whose labels or track an edit in effect changed, from one frame's Ledger
    entries (newest first, as :meth:`app.store.project.Project.history` gives them).

    An ``edit`` or ``redo`` group is in effect until an ``undo`` reverts it; imports and
    reviews' bulk records are not edits of a person.

    Examples
    --------
    >>> from app.model.targets import JointTarget, StateTarget
    >>> def row(seq, group, kind, target, reverts=None):
    ...     return LedgerEntry(seq, group, kind, "", "", "ana", 0.0, 1, target, None, None,
    ...                        reverts)
    >>> rows = [row(1, 1, "edit", JointTarget(7, 0)), row(2, 2, "edit", JointTarget(8, 3)),
    ...         row(3, 3, "undo", JointTarget(8, 3), reverts=2),
    ...         row(4, 4, "edit", StateTarget())]
    >>> sorted(corrected_people(reversed(rows)))
    [7]
    """
    live: dict[int, set[int]] = {}
    for e in sorted(entries, key=lambda e: e.seq):
        if e.kind in ("edit", "redo"):
            person = getattr(e.target, "person", None)
            people = live.setdefault(e.group_id, set())
            if person is not None:
                people.add(int(person))
        elif e.kind == "undo" and e.reverts is not None:
            live.pop(e.reverts, None)
    return frozenset(p for people in live.values() for p in people)
