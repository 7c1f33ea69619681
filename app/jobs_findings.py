"""Jobs on findings: compute and keep them, accept their fixes in bulk, dismiss them.

Shared by the command line and (later) the app. Findings are derived data: triage computes and
stores them beside its scores (:func:`app.jobs_analysis.run_triage`), each frame's with the
digest of the labels they came from, so that a frame whose labels (or dismissals) changed since
is recomputed when its findings are next read. Accepting a fix applies its edits as one ledger
group credited to the project's author; dismissing a finding is a
:class:`~app.model.edits.DismissFinding` edit. Both can be undone.

Once a project's people are linked into tracks (:mod:`app.jobs_tracks`), the findings over
time (:mod:`app.analysis.triage.temporal`) join each frame's findings. They are computed when
read, from the whole sequence, and never stored; a fix of theirs that names several frames is
applied as one action over all of them (:meth:`~app.store.project.Project.apply_batch`).
"""

from __future__ import annotations

import logging
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

from app.analysis.kinds import ALL_KINDS
from app.analysis.triage.findings import (
    Finding,
    frame_findings,
    labels_digest,
    placed_by_people,
)
from app.analysis.triage.temporal import (
    TIME_KINDS,
    TrackedFrame,
    frames_read,
    sequence_findings,
    tracks_only,
)
from app.errors import BadInput, EditRefused, NotFound
from app.model.edits import DismissFinding, EditGroup
from app.model.labels import Frame, FrameLabels, Person
from app.model.skeleton import Skeleton
from app.model.targets import StateTarget
from app.progress import Progress
from app.store.project import Project

log = logging.getLogger(__name__)

#: Rounds of accepting: after each, the frames that changed are triaged again and the fixes
#: that are still proposed (those an earlier fix of the round kept back) are accepted next.
ACCEPT_ROUNDS = 3


def findings_of_frame(project: Project, frame: Frame, labels: FrameLabels | None = None,
                      maps: Any = None, triage: Any = None) -> list[Finding]:
    """One frame's findings computed now from its labels, scores, maps and dismissals.

    ``maps`` default to the frame's stored network maps; ``triage`` (its
    :class:`~app.analysis.triage.FrameTriage`) is computed when not given.
    """
    from app.jobs_analysis import load_maps

    labels = labels or project.labels(frame.id)
    if maps is None:
        maps = load_maps(project, frame)
    return findings_from_labels(frame, labels, project.skeleton, maps, triage)


def findings_from_labels(frame: Frame, labels: FrameLabels, skeleton: Skeleton, maps: Any,
                         triage: Any = None) -> list[Finding]:
    """One frame's findings from what :func:`findings_of_frame` reads from the project (no
    project needed: triage's worker processes call it); weighed by how the frame's
    auto-labels were grouped (``frame.grouping``)."""
    return frame_findings(
        frame.id, {p.id: p.keypoints for p in labels.people.values()}, skeleton,
        scores={p.id: p.scores for p in labels.people.values()}, maps=maps,
        image_size=(frame.width, frame.height) if frame.width > 0 else None, triage=triage,
        dismissed=labels.dismissed, placed=placed_by_people(labels), grouping=frame.grouping)


def current_findings(project: Project, frame_ids: Iterable[int] | None = None,
                     progress: Progress | None = None,
                     workers: int = 1) -> dict[int, list[Finding]]:
    """Every (or the given) frame's findings, worst first, as they stand now.

    Stored findings are used where the frame's labels and dismissals are those they were
    computed from; the other frames are triaged again (and stored, unless the project is
    read-only), in ``workers`` processes (:func:`app.jobs_analysis.run_triage`). A project
    without any triage result is triaged first.
    """
    from app.jobs_analysis import run_triage

    frames = [f for f in project.frames() if frame_ids is None or f.id in set(frame_ids)]
    stored = project.findings()
    digests = project.findings_digests()
    stale = [f for f in frames
             if f.id not in stored or digests.get(f.id) != labels_digest(project.labels(f.id))]
    fresh: dict[int, list[Finding]] = {}
    if stale:
        if project.read_only:
            for f in stale:
                fresh[f.id] = findings_of_frame(project, f)
        else:
            for fid, verdict in run_triage(project, progress, frame_ids=[f.id for f in stale],
                                           workers=workers).items():
                fresh[fid] = verdict.findings
    out = {f.id: fresh[f.id] if f.id in fresh else
           [Finding.from_dict(d) for d in stored.get(f.id, [])] for f in frames}
    for fid, more in time_findings(project, out).items():
        out[fid] = sorted(out[fid] + more, key=finding_order)
    return out


def finding_order(f: Finding) -> tuple[float, int, str]:
    """A frame's findings, worst first: by worth, then kind (:data:`ALL_KINDS`), then id."""
    return (-f.worth, ALL_KINDS.index(f.kind), f.id)


def time_findings(project: Project, frame_ids: Iterable[int] | None = None,
                  instead: Mapping[int, Sequence[Person]] | None = None
                  ) -> dict[int, list[Finding]]:
    """The findings over time of the sequences that hold the given frames (None: all), for
    those frames; empty until someone in the project is on a track.

    Given frames, only the frames their findings read are read from the project (their
    sequence's frames within :data:`~app.analysis.triage.temporal.REACH` whole, the later
    ones for their tracks: :func:`~app.analysis.triage.temporal.frames_read`), and the
    findings are those of the whole computation. ``instead`` gives some frames' people to
    read in place of the project's (a change of their joints not applied yet, which keeps
    every person and track: the walk reads ahead what an accept would leave).
    """
    from app.jobs_tracks import project_sequences

    if frame_ids is None:
        return _all_time_findings(project)
    wanted = set(frame_ids)
    tracks = project.tracks_by_frame()
    if not tracks:
        return {}
    k = project.skeleton.num_joints
    out: dict[int, list[Finding]] = {}
    for seq in project_sequences(project):
        asked = wanted & set(seq.frame_ids)
        if not asked:
            continue
        whole, later = frames_read(seq.frame_ids, asked)
        people = project.people_of_frames(whole)
        if instead:
            people.update({fid: list(v) for fid, v in instead.items() if fid in people})
        dismissed = project.dismissed_of_frames(asked)
        whole_set, read = set(whole), set(whole) | set(later)
        frames = [_tracked(fid, people, dismissed) if fid in whole_set else
                  tracks_only(fid, tracks.get(fid, {}), k)
                  for fid in seq.frame_ids if fid in read]
        for fid, found in sequence_findings(frames, project.skeleton, at=asked).items():
            if fid in asked:
                out[fid] = found
    return out


def _all_time_findings(project: Project) -> dict[int, list[Finding]]:
    """:func:`time_findings` of every frame, from every frame's people."""
    from app.jobs_tracks import project_sequences

    if not project.tracks_by_frame():
        return {}
    people = project.people_by_frame()
    dismissed = project.dismissed()
    out: dict[int, list[Finding]] = {}
    for seq in project_sequences(project):
        frames = [_tracked(fid, people, dismissed) for fid in seq.frame_ids]
        out.update(sequence_findings(frames, project.skeleton))
    return out


def _tracked(fid: int, people: Mapping[int, Sequence[Person]],
             dismissed: Mapping[int, Iterable[str]]) -> TrackedFrame:
    """A frame as the findings over time read it: its people's joints and tracks, and the
    findings dismissed there."""
    here = people.get(fid, ())
    return TrackedFrame(fid, {p.id: p.keypoints for p in here},
                        {p.id: p.track for p in here if p.track is not None},
                        frozenset(dismissed.get(fid, ())))


def parse_kinds(text: str | None, where: str = "--kinds") -> set[str] | None:
    """``all`` (None), or a comma-separated list of kinds of finding.

    Examples
    --------
    >>> sorted(parse_kinds("duplicate, split"))
    ['duplicate', 'split']
    >>> parse_kinds("all") is None
    True
    """
    if text is None or text.strip().lower() == "all":
        return None
    kinds = {k.strip().lower() for k in text.split(",") if k.strip()}
    unknown = sorted(kinds - set(ALL_KINDS))
    if unknown or not kinds:
        raise BadInput(f"{', '.join(unknown) or 'nothing'} is not a kind of finding; one of "
                       f"{', '.join(ALL_KINDS)} or 'all'", where=where)
    return kinds


@dataclass
class Accepted:
    """What :func:`accept_fixes` did (or, for a dry run, would do)."""

    fixes: list[Finding] = field(default_factory=list)
    #: Fixes left for a later round because an earlier fix changed one of their people.
    held_back: int = 0
    #: Fixes the store refused (the labels had moved on); nothing of them was applied.
    refused: int = 0
    #: With carrying: the batches taken (one action each) and the frames they changed.
    carried: int = 0
    carried_frames: int = 0

    @property
    def frames(self) -> list[int]:
        return sorted({f.frame_id for f in self.fixes})


def select_fixes(findings: Sequence[Finding], kinds: set[str] | None = None,
                 min_confidence: float = 0.0,
                 busy: Iterable[int] = ()) -> tuple[list[Finding], int]:
    """The fixes of one frame to accept together, and how many were held back.

    Notes
    -----
    Fixes go in the order of :data:`ALL_KINDS` (whole people first, then sides, owners,
    visibility, additions, then the kinds over time), most confident first within a kind; a
    fix about a person an earlier chosen fix changes (or one of ``busy``) waits for the next
    round, when the frame's findings are computed again from the changed labels.
    """
    ready = [f for f in findings if f.fix is not None and f.confidence >= min_confidence
             and (kinds is None or f.kind in kinds)]
    ready.sort(key=lambda f: (ALL_KINDS.index(f.kind), -f.confidence, f.id))
    chosen: list[Finding] = []
    busy = set(busy)
    held = 0
    for f in ready:
        if busy & set(f.people):
            held += 1
            continue
        busy.update(f.people)
        chosen.append(f)
    return chosen, held


def accept_fixes(project: Project, kinds: set[str] | None = None, min_confidence: float = 0.0,
                 frame_ids: Iterable[int] | None = None, dry_run: bool = False,
                 progress: Progress | None = None, carry: bool = False) -> Accepted:
    """Apply the proposed fixes of the given kinds, each as one ledger group.

    Parameters
    ----------
    project
        The project (writable unless ``dry_run``).
    kinds
        Only fixes of these kinds (None: all).
    min_confidence
        Only fixes at least this confident.
    frame_ids
        Only these frames (None: all).
    dry_run
        List what would be accepted in the first round and change nothing.
    progress
        Told about each frame.
    carry
        Carry each fix of one frame to the frames around it where the same tracks show the
        same error (:func:`app.jobs_tracks.propose_carry`), as one more action; not with
        ``dry_run``.

    Returns
    -------
    Accepted

    Notes
    -----
    Each fix is all or nothing: its edits go in as one :class:`~app.model.edits.EditGroup`,
    which the store refuses whole when the labels have moved on. Per frame the fixes are
    chosen by :func:`select_fixes`; after a round the changed frames are triaged again and up
    to :data:`ACCEPT_ROUNDS` rounds accept what is still proposed. A project without triage
    results is triaged first. A carried batch changes people of other frames: their own fixes
    wait for the next round, computed from the labels as carried.
    """
    from app.jobs_analysis import run_triage

    progress = progress or Progress()
    wanted = None if frame_ids is None else set(frame_ids)
    found = current_findings(project, wanted, progress)
    out = Accepted()
    todo = sorted(found)
    for _ in range(1 if dry_run else ACCEPT_ROUNDS):
        changed = []
        out.held_back = 0
        # People a fix over several frames changed in frames after its own (a flip swapped
        # back): a frame's own fix about them waits for the next round.
        claimed: set[int] = set()
        for n, fid in enumerate(todo):
            progress.step(n, len(todo), "accepting fixes")
            chosen, held = select_fixes(found.get(fid, []), kinds, min_confidence, claimed)
            out.held_back += held
            for finding in chosen:
                if dry_run:
                    out.fixes.append(finding)
                    continue
                try:
                    applied = _apply_fix(project, finding)
                except EditRefused as exc:
                    log.warning("fix of finding %s not applied: %s", finding.id, exc)
                    out.refused += 1
                    continue
                out.fixes.append(finding)
                claimed.update(finding.people)
                frames = fix_frames(finding)
                if carry and len(frames) == 1:
                    frames += _carry_fix(project, fid, applied, claimed, out)
                for frame in frames:
                    if frame not in changed:
                        changed.append(frame)
        progress.step(len(todo), len(todo), "accepting fixes")
        if dry_run or not changed:
            break
        again = run_triage(project, frame_ids=changed)
        found = {fid: verdict.findings for fid, verdict in again.items()}
        todo = changed
    return out


def _carry_fix(project: Project, frame_id: int, applied: Any, claimed: set[int],
               out: Accepted) -> list[int]:
    """Carry a fix just applied in ``frame_id`` and take the batch; the frames it changed
    (their people join ``claimed``). A frame in no sequence carries nothing."""
    from app.jobs_tracks import propose_carry, take_batch

    changes = [c for c in applied.changes if not isinstance(c.target, StateTarget)]
    try:
        # The fix alone (each fix of the frame is carried in turn, as it is accepted), as
        # far as all of it shows: the batch is taken unseen, without a person to trim it.
        batch = propose_carry(project, frame_id, changes, whole_person=False)
    except BadInput:
        return []
    if not batch.edits:
        return []
    try:
        taken = take_batch(project, batch)
    except EditRefused as exc:
        log.warning("carrying the fix of frame %s not done: %s", frame_id, exc)
        return []
    out.carried += 1
    out.carried_frames += len(batch.edits)
    claimed.update(int(c.target.person) for c in taken.changes
                   if getattr(c.target, "person", None) is not None)
    return [g.frame_id for g in batch.edits]


def accept_finding(project: Project, finding: Finding) -> Any:
    """Apply one finding's fix as one ledger group credited to the project's author.

    Returns the store's :class:`~app.store.project.Applied`.

    Raises
    ------
    EditRefused
        When the finding has no fix, or is no longer current: its frame's labels or
        dismissals changed since its findings were computed (read them again with
        :func:`current_findings`); nothing is applied.
    """
    if finding.fix is None:
        raise EditRefused(f"finding {finding.id} proposes no fix")
    if finding.kind in TIME_KINDS:
        now = time_findings(project, [finding.frame_id]).get(finding.frame_id, [])
        current = any(f.id == finding.id and f.fingerprint == finding.fingerprint
                      and f.fix == finding.fix for f in now)
    else:
        labels = project.labels(finding.frame_id)
        stored = project.findings(finding.frame_id).get(finding.frame_id, [])
        current = project.findings_digests().get(finding.frame_id) == labels_digest(
            labels) and any(d.get("id") == finding.id and d.get("fingerprint") ==
                            finding.fingerprint for d in stored)
    if not current:
        raise EditRefused(f"frame {finding.frame_id} changed since finding {finding.id} was "
                          "found; read the findings again")
    return _apply_fix(project, finding)


def accept_label(finding_id: str, edits: Sequence[Any]) -> str:
    """The ledger's summary of an accepted fix: its edits' own summaries, which name people by
    stable id (the ledger shows them with the tags of the day, see
    :func:`app.model.naming.ledger_text`); a fix's own summary names them by the tags they had
    when it was found."""
    return f"accept finding {finding_id}: " + "; ".join(e.summary() for e in edits)


def fix_frames(finding: Finding) -> list[int]:
    """The frames a finding's fix changes (its own first)."""
    assert finding.fix is not None
    others = sorted({e.frame_id for e in finding.fix.edits} - {finding.frame_id})
    return [finding.frame_id, *others]


def _apply_fix(project: Project, finding: Finding) -> Any:
    """Apply a finding's fix as one action: one frame's edits as one group, a fix over
    several frames as one batch."""
    assert finding.fix is not None
    summary = accept_label(finding.id, finding.fix.edits)
    if len(fix_frames(finding)) > 1:
        return project.apply_batch(finding.fix.edits, summary, action="AcceptFinding")
    return project.apply(EditGroup(finding.frame_id, finding.fix.edits, summary))


def find_finding(project: Project, finding_id: str) -> Finding:
    """A current finding by its id (the ids :func:`current_findings` gives)."""
    for found in current_findings(project).values():
        for f in found:
            if f.id == finding_id:
                return f
    raise NotFound(f"no current finding {finding_id!r}; list them with `posewright findings`")


def dismiss(project: Project, finding_ids: Iterable[str]) -> list[Finding]:
    """Record each finding as not a problem (one undoable ledger edit each).

    A dismissed finding is not raised again while the labels it was about stay the same.
    """
    wanted = [str(i).strip() for i in finding_ids if str(i).strip()]
    current = {f.id: f for found in current_findings(project).values() for f in found}
    missing = [i for i in wanted if i not in current]
    if missing:
        raise NotFound(f"no current finding {missing[0]!r}; list them with "
                       "`posewright findings`")
    done = []
    for i in wanted:
        f = current[i]
        project.apply(DismissFinding(f.frame_id, f.fingerprint, f.kind, f.id, f.text))
        done.append(f)
    if done and not project.read_only:
        current_findings(project, {f.frame_id for f in done})
    return done
