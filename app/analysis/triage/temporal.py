"""Findings over time: problems that show only when a track is followed across frames.

Once the people of a sequence are linked into tracks (:mod:`app.analysis.tracks`), four
problems show that no single frame reveals. Each becomes a :class:`~app.analysis.triage.
findings.Finding` of the same form as a frame's findings, at the frame where it starts, with
a proposed fix:

``exchanged-tracks``
    Two tracks exchange identities between two frames: each person of the later frame fits
    where the *other* track was heading far better than where its own was. Fix: exchange the
    two tracks back from that frame on (edits over every later frame of the sequence).
``jumping-joint``
    A joint jumps much further than the body moves and comes back in the next frame. Fix:
    place it where the neighbouring frames put it (moved along with the body), or mark it
    unlabeled when the neighbours do not agree on where that is.
``missing-frames``
    A track is missing in one or two frames between frames that have it. Fix: a new person
    on that track, its joints interpolated from the neighbours, with the provenance
    ``interpolated`` (:data:`app.model.edits.INTERPOLATED`) until someone checks them.
``flipped-stretch``
    Left and right flip for a few frames (at most :data:`MAX_FLIP`) and flip back. Fix: swap
    the person's sides in every frame of the stretch.
``joint-gap``
    A joint is unlabelled here (often a hidden joint, or an invented spot that was
    unlabelled) while the same track labels it in the frames around: the two nearest such
    frames within :data:`GAP_REACH`, each carried along with the body (the median motion
    of the joints both frames label). Fix, when the two agree within :data:`AGREE` of the
    body: place the joint between them, with the lower of their two visibilities (a joint
    hidden around stays occluded). When they do not agree nothing is raised: the joint
    stays unlabelled, which training ignores. Strength: how well they agree (1 when they
    put it at one spot, 0 at :data:`AGREE` apart).

Fixes of the first and last kinds name more than one frame; the store applies them as one
action (:meth:`app.store.project.Project.apply_batch`).

Body motion from one frame to the next is the median over joints of their displacement (a
joint given to a neighbour does not drag it along); a body's size is the longer side of the
box round its labelled joints.

Confidence: these kinds are not calibrated on the demo yet; their confidence is set by hand
from their strength (:data:`CONFIDENCE`), chosen on the synthetic sequences of the tests, so
that a clear case is proposed (at least 0.5) and a marginal one is listed without a fix only
when its strength is low.

References
----------
Object keypoint similarity as in the COCO keypoint evaluation (``pycocotools``); constant
velocity prediction, as in the linking (:mod:`app.analysis.tracks`).
"""

from __future__ import annotations

import hashlib
import itertools
import json
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from app.analysis.kinds import TIME_KINDS as _TIME_KINDS
from app.analysis.similarity import oks_matrix
from app.analysis.triage.findings import Finding, Fix, FixPreview, _labels, fingerprint, preview
from app.model.edits import (
    INTERPOLATED,
    DismissFinding,
    Edit,
    EditGroup,
    MoveJoint,
    NewPerson,
    ReassignJoint,
    SetTrack,
    SetVisibility,
    SwapSides,
)
from app.model.naming import Names
from app.model.skeleton import Skeleton
from app.wording import count

#: The kinds of finding over time, in the order their fixes are accepted (named in
#: :mod:`app.analysis.kinds`).
TIME_KINDS = _TIME_KINDS
#: Exchanged tracks: how much more the exchanged pairing must score than the kept one
#: (summed OKS of the two people against the two tracks' predicted poses).
EXCHANGE_GAIN = 0.4
#: A jump: the joint's move against the body's, in and out, each at least this share of the
#: body's size.
JUMP = 0.2
#: The neighbours agree on where a jumping joint belongs within this share of the body.
AGREE = 0.08
#: A flip: swapping sides brings the side joints closer to the frame before by at least this
#: share of the body (mean over the side joints).
FLIP = 0.05
#: The longest stretch of flipped frames found (a longer one is likelier a turn).
MAX_FLIP = 5
#: The most frames a track may miss for the gap to be filled.
MAX_MISSING = 2
#: A joint gap is filled from the nearest frames at most this far (in frames) on either side.
GAP_REACH = 3
#: A person already in a missing frame where the interpolated one would go (OKS at least
#: this) means the track is not missing there, only unlinked.
PRESENT_OKS = 0.5
#: Confidence by kind: ``(at strength 0, at strength 1)``, linear in between (set by hand).
CONFIDENCE: dict[str, tuple[float, float]] = {
    "exchanged-tracks": (0.55, 0.95), "flipped-stretch": (0.5, 0.9),
    "missing-frames": (0.55, 0.8), "jumping-joint": (0.5, 0.9), "joint-gap": (0.5, 0.8)}


@dataclass(frozen=True)
class TrackedFrame:
    """One frame of a sequence: its people ``(K, 3)`` ``x, y, v`` by id (in the project's
    order, which the tags follow) and each linked person's track."""

    frame_id: int
    people: Mapping[int, np.ndarray]
    tracks: Mapping[int, int]
    dismissed: frozenset[str] = field(default_factory=frozenset)


def sequence_findings(frames: Sequence[TrackedFrame], skeleton: Skeleton,
                      kinds: Iterable[str] | None = None,
                      at: Iterable[int] | None = None) -> dict[int, list[Finding]]:
    """The findings over time of one sequence, by the frame each is found at.

    Parameters
    ----------
    frames
        The sequence's frames in order.
    skeleton
        The project's skeleton (sigmas, flip pairs, joint names).
    kinds
        Only these kinds (default all of :data:`TIME_KINDS`).
    at
        Only the findings found at these frame ids (default every frame's); the others are
        not built, which is most of the cost, and those asked for are the same either way.

    Returns
    -------
    dict
        Frame id -> its findings over time (frames without any are left out); a finding
        dismissed in its frame is left out.
    """
    wanted = set(TIME_KINDS if kinds is None else kinds)
    seq = _Sequence(frames, skeleton, at)
    found: list[Finding] = []
    if "exchanged-tracks" in wanted:
        found += seq.exchanges()
    flipped: set[tuple[int, int]] = set()
    if "flipped-stretch" in wanted:
        more, flipped = seq.flips()
        found += more
    if "missing-frames" in wanted:
        found += seq.gaps()
    if "jumping-joint" in wanted:
        found += seq.jumps(flipped)
    if "joint-gap" in wanted:
        found += seq.joint_gaps()
    out: dict[int, list[Finding]] = {}
    dismissed = {f.frame_id: f.dismissed for f in frames}
    for f in found:
        if f.fingerprint not in dismissed.get(f.frame_id, frozenset()):
            out.setdefault(f.frame_id, []).append(f)
    return out


#: How far, in frames of its sequence, an edit that only places, hides or swaps joints of
#: people already there (:data:`JOINT_EDITS`) can change findings over time: a flipped
#: stretch reads up to :data:`MAX_FLIP` frames on, and a jump at frame ``i`` is not raised
#: where a stretch covers ``i``, which depends on the frames up to :data:`MAX_FLIP` either
#: side; a joint gap reads :data:`GAP_REACH` frames either side, missing frames
#: ``MAX_MISSING + 1``, exchanged tracks the two frames before.
REACH = max(MAX_FLIP, GAP_REACH, MAX_MISSING + 1, 2)
#: Edits that keep every person and their track: which person is on which track in which
#: frame, which an exchange's fix reads over the whole sequence, stays as it was.
JOINT_EDITS = (MoveJoint, SetVisibility, SwapSides, ReassignJoint)


def within_reach(sequences: Iterable[Sequence[int]], edits: Iterable[Edit]) -> set[int]:
    """The frames whose findings over time ``edits`` may change: for an edit of
    :data:`JOINT_EDITS`, the frames of its sequence at most :data:`REACH` frames away; for a
    dismissal its own frame (a frame's dismissals filter only its own findings); for any
    other edit (a person added, deleted, merged or split, a track set) every frame of its
    sequence. Sequences do not read each other; an edited frame is always in the result.

    ``sequences`` are the frame ids of each sequence in order
    (:func:`app.jobs_tracks.project_sequences`).

    Examples
    --------
    >>> sorted(within_reach([list(range(1, 21))], [MoveJoint(10, 7, 3, 1.0, 2.0)]))
    [5, 6, 7, 8, 9, 10, 11, 12, 13, 14, 15]
    >>> len(within_reach([list(range(1, 21)), [30, 31]], [SetTrack(10, 7, 2)]))
    20
    """
    flat: list[Edit] = []
    todo = list(edits)
    while todo:
        e = todo.pop()
        if isinstance(e, EditGroup):
            todo += e.edits
        else:
            flat.append(e)
    where: dict[int, tuple[list[int], int]] = {}
    for seq in sequences:
        ids = list(seq)
        for n, fid in enumerate(ids):
            where[fid] = (ids, n)
    out: set[int] = set()
    for e in flat:
        out.add(e.frame_id)
        if e.frame_id not in where or isinstance(e, DismissFinding):
            continue
        ids, n = where[e.frame_id]
        if isinstance(e, JOINT_EDITS):
            out.update(ids[max(n - REACH, 0):n + REACH + 1])
        else:
            out.update(ids)
    return out


def frames_read(ids: Sequence[int], at: Iterable[int]) -> tuple[list[int], list[int]]:
    """Which frames of a sequence (``ids``, in order) :func:`sequence_findings` reads to
    build the findings at the frames ``at``: ``(read whole, read for their tracks alone)``.

    The findings at a frame read the people of the frames of its sequence at most
    :data:`REACH` away (see :data:`REACH`), read whole; an exchange's fix also re-links
    the two tracks in every later frame, for which the frame's people and their tracks are
    read, not their joints (:func:`tracks_only`). Earlier frames are not read. Given the
    frames from the first of either list on, in order, the tracks-only ones as
    :func:`tracks_only`, ``sequence_findings(..., at=at)`` gives the same findings as over
    the whole sequence (tested on synthetic sequences).

    Examples
    --------
    >>> whole, tracks = frames_read(list(range(1, 21)), [10])
    >>> whole, tracks
    ([5, 6, 7, 8, 9, 10, 11, 12, 13, 14, 15], [16, 17, 18, 19, 20])
    """
    ids = list(ids)
    asked = set(at)
    whole: set[int] = set()
    first = None
    for n, fid in enumerate(ids):
        if fid in asked:
            whole.update(ids[max(n - REACH, 0):n + REACH + 1])
            first = n if first is None else first
    if first is None:
        return [], []
    later = [f for f in ids[first:] if f not in whole]
    return [f for f in ids if f in whole], later


def tracks_only(frame_id: int, tracks: Mapping[int, int], num_joints: int) -> TrackedFrame:
    """A frame read for its tracks alone (:func:`frames_read`): each person on a track
    with no joint labelled."""
    empty = np.zeros((num_joints, 3))
    return TrackedFrame(frame_id, {p: empty for p in tracks}, dict(tracks))


def _confidence(kind: str, strength: float) -> float:
    lo, hi = CONFIDENCE[kind]
    return round(lo + (hi - lo) * float(np.clip(strength, 0.0, 1.0)), 4)


def _size(kp: np.ndarray) -> float:
    on = (kp[:, 2] > 0) & np.isfinite(kp[:, :2]).all(axis=1)
    if on.sum() < 2:
        return 0.0
    span = kp[on, :2].max(axis=0) - kp[on, :2].min(axis=0)
    return float(span.max())


def _motion(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Median displacement ``(2,)`` from ``a`` to ``b`` over joints labelled in both."""
    both = (a[:, 2] > 0) & (b[:, 2] > 0)
    if not both.any():
        return np.zeros(2)
    d = b[both, :2] - a[both, :2]
    if np.isnan(d).any():
        return np.median(d, axis=0)
    # np.median(d, axis=0) without its overhead, the very same operations: the same
    # partition, then the middle row, or the two middle rows' sum halved (its mean).
    n = len(d)
    h = n // 2
    if n % 2:
        part = np.partition(d, [h, -1], axis=0)
        return part[h] / 1
    part = np.partition(d, [h - 1, h, -1], axis=0)
    return (part[h - 1] + part[h]) / 2


def _flip_gain(prev: np.ndarray, now: np.ndarray, flip: np.ndarray,
               side: np.ndarray) -> float | None:
    """How much nearer to ``prev`` the side joints of ``now`` lie swapped than as they are,
    after taking out the body's motion, in shares of the body (None: too few side joints
    labelled in both, or no body)."""
    size = _size(now)
    if size <= 0:
        return None
    moved = now.copy()
    moved[:, :2] -= _motion(prev, now)
    flipped = moved[flip]
    ok = side & (prev[:, 2] > 0) & (moved[:, 2] > 0) & (flipped[:, 2] > 0)
    if ok.sum() < 4:
        return None
    keep = np.linalg.norm(moved[ok, :2] - prev[ok, :2], axis=1).mean()
    swap = np.linalg.norm(flipped[ok, :2] - prev[ok, :2], axis=1).mean()
    return float((keep - swap) / size)


#: Edits that read and change only the person they name (a fix's preview needs no other).
_ONE_PERSON = (MoveJoint, SetVisibility, SwapSides, SetTrack)

#: :func:`_flip_gain` by the exact bytes of its two poses and the flip pairs: the flipped
#: stretch check reads every pair of neighbouring frames of every track, and between two
#: calls (the walk's steps) all but the few an edit touched are the same. Forgotten whole
#: when it holds :data:`_FLIP_MEMO_SIZE` entries.
_FLIP_MEMO: dict[bytes, float | None] = {}
_FLIP_MEMO_SIZE = 200_000


def _flip_gain_memo(prev: np.ndarray, now: np.ndarray, flip: np.ndarray,
                    side: np.ndarray) -> float | None:
    """:func:`_flip_gain`, remembered: the same bytes in give the very same float out."""
    key = b"".join((prev.dtype.str.encode(), str(prev.shape).encode(), prev.tobytes(),
                    now.tobytes(), flip.tobytes()))
    try:
        return _FLIP_MEMO[key]
    except KeyError:
        pass
    if len(_FLIP_MEMO) >= _FLIP_MEMO_SIZE:
        _FLIP_MEMO.clear()
    out = _FLIP_MEMO[key] = _flip_gain(prev, now, flip, side)
    return out


class _Sequence:
    def __init__(self, frames: Sequence[TrackedFrame], skeleton: Skeleton,
                 at: Iterable[int] | None = None):
        self.frames = list(frames)
        wanted = None if at is None else set(at)
        #: Whether findings at each index are built (:func:`sequence_findings`' ``at``).
        self.wanted = [wanted is None or f.frame_id in wanted for f in self.frames]
        self.skeleton = skeleton
        self.sigmas = np.asarray(skeleton.sigmas, dtype=np.float64)
        #: track -> {index in the sequence: person id}
        self.tracks: dict[int, dict[int, int]] = {}
        for i, f in enumerate(self.frames):
            for pid, t in f.tracks.items():
                if pid in f.people:
                    self.tracks.setdefault(int(t), {})[i] = int(pid)

    # ------------------------------------------------------------------ helpers

    def kp(self, i: int, pid: int) -> np.ndarray:
        return np.asarray(self.frames[i].people[pid], dtype=np.float64)

    def finding(self, i: int, kind: str, pid: int | None, joints: Sequence[int], text: str,
                evidence: Sequence[tuple[str, float]], strength: float, edits: Sequence[Edit],
                people: Sequence[int], place: Any, summary: str) -> Finding:
        frame = self.frames[i]
        names = Names.of_frame(self.skeleton, frame.people)
        arrays = {p: np.asarray(v, dtype=np.float64) for p, v in frame.people.items()}
        here = [e for e in edits if e.frame_id == frame.frame_id]
        shown: Mapping[int, np.ndarray] = arrays
        if all(isinstance(e, _ONE_PERSON) for e in here):
            # These edits read and change their own person alone: the preview of the frame
            # is that of those people (the others show no difference; same order).
            named = {e.person_id for e in here}  # type: ignore[attr-defined]
            shown = {p: v for p, v in arrays.items() if p in named}
        effect = preview(_labels(frame.frame_id, self.skeleton, shown, None), here) \
            if here else FixPreview()
        conf = _confidence(kind, strength)
        fix = Fix(summary, tuple(edits), effect) if edits and conf >= 0.5 else None
        touched = sorted({int(p) for p in people})
        joints = [int(j) for j in joints]
        key = json.dumps([frame.frame_id, kind, pid, joints, touched])
        return Finding(
            "F" + hashlib.sha256(key.encode()).hexdigest()[:10], frame.frame_id, kind, pid,
            None if pid is None else names.tag(pid), tuple(int(j) for j in joints),
            tuple(names.joint(j) for j in joints), text,
            tuple((k, round(float(v), 4)) for k, v in evidence), round(float(strength), 4),
            conf, fix, tuple(touched),
            fingerprint(kind, arrays, [p for p in touched if p in arrays], [place, touched]))

    def names(self, i: int) -> Names:
        return Names.of_frame(self.skeleton, self.frames[i].people)

    # ------------------------------------------------------------------ exchanged tracks

    def exchanges(self) -> list[Finding]:
        out = []
        for i in range(1, len(self.frames)):
            if not self.wanted[i]:
                continue
            both = sorted(t for t, at in self.tracks.items() if i in at and i - 1 in at)
            if len(both) < 2:
                continue
            predicted, actual, areas = [], [], []
            for t in both:
                at = self.tracks[t]
                last = self.kp(i - 1, at[i - 1])
                step = _motion(self.kp(i - 2, at[i - 2]), last) if i - 2 in at else np.zeros(2)
                guess = last.copy()
                guess[:, :2] += step
                predicted.append(guess)
                actual.append(self.kp(i, at[i]))
                areas.append(max(_size(guess), 1.0) ** 2 * 0.5)
            sim = oks_matrix(np.stack(actual), np.stack(predicted), np.array(areas),
                             self.sigmas)  # [person of track a, track b's prediction]
            keep = np.diag(sim)
            gain = sim + sim.T - keep[:, None] - keep[None, :]
            np.fill_diagonal(gain, -np.inf)
            used: set[int] = set()
            for flat in np.argsort(-gain, axis=None):
                a, b = np.unravel_index(flat, gain.shape)
                if a >= b or gain[a, b] < EXCHANGE_GAIN:
                    if gain[a, b] < EXCHANGE_GAIN:
                        break
                    continue
                if a in used or b in used or sim[a, b] <= keep[a] or sim[b, a] <= keep[b]:
                    continue
                used |= {int(a), int(b)}
                out.append(self._exchange(i, both[a], both[b], float(gain[a, b]),
                                          float(keep[a] + keep[b]),
                                          float(sim[a, b] + sim[b, a])))
        return out

    def _exchange(self, i: int, ta: int, tb: int, gain: float, kept: float,
                  exchanged: float) -> Finding:
        swap = {ta: tb, tb: ta}
        edits: list[Edit] = []
        for t in (ta, tb):
            for k, pid in sorted(self.tracks[t].items()):
                if k >= i:
                    edits.append(SetTrack(self.frames[k].frame_id, pid, swap[t]))
        pa, pb = self.tracks[ta][i], self.tracks[tb][i]
        names = self.names(i)
        text = (f"{names.person(pa)} and {names.person(pb)} exchange tracks {ta} and {tb} "
                f"here: each fits where the other track was heading (OKS {exchanged:.2f} in "
                f"all against {kept:.2f} as linked)")
        later = len({e.frame_id for e in edits})
        return self.finding(
            i, "exchanged-tracks", pa, (), text,
            (("oks as linked", kept), ("oks exchanged", exchanged)),
            min((gain - EXCHANGE_GAIN) / 1.0, 1.0), edits, (pa, pb),
            [ta, tb], f"exchange tracks {ta} and {tb} from here on ({count(later, 'frame')})")

    # ------------------------------------------------------------------ flipped stretch

    def flips(self) -> tuple[list[Finding], set[tuple[int, int]]]:
        flip = np.asarray(self.skeleton.flip_index)
        side = flip != np.arange(len(flip))
        out, covered = [], set()
        for t, at in sorted(self.tracks.items()):
            idx = sorted(at)
            rel: dict[int, float] = {}  # i -> how much better flipped against frame i - 1
            for i in idx:
                if i - 1 not in at:
                    continue
                r = _flip_gain_memo(self.kp(i - 1, at[i - 1]), self.kp(i, at[i]), flip, side)
                if r is not None:
                    rel[i] = r
            starts = [i for i, r in rel.items() if r > FLIP]
            for s in starts:
                ends = [e for e in starts if s < e <= s + MAX_FLIP]
                if not ends or any(k not in at for k in range(s - 1, ends[0] + 1)):
                    continue
                e = ends[0] - 1  # the stretch is s..e; frame e + 1 flips back
                stretch = range(s, e + 1)
                if any((t, k) in covered for k in stretch):
                    continue
                covered |= {(t, k) for k in stretch}
                if self.wanted[s]:
                    out.append(self._flip(t, s, e, rel[s], rel[e + 1]))
        return out, covered

    def _flip(self, t: int, s: int, e: int, into: float, back: float) -> Finding:
        at = self.tracks[t]
        pid = at[s]
        edits = [SwapSides(self.frames[k].frame_id, at[k]) for k in range(s, e + 1)]
        n = e - s + 1
        names = self.names(s)
        joints = [j for j, f in enumerate(self.skeleton.flip_index) if f != j]
        text = (f"{names.person(pid)} (track {t}) has left and right flipped for "
                f"{count(n, 'frame')} and back: swapped, the side joints lie "
                f"{into:.2f} and {back:.2f} of a body nearer the frames around")
        return self.finding(s, "flipped-stretch", pid, joints, text,
                            (("nearer flipped in", into), ("nearer flipped back", back)),
                            min(min(into, back) / (4 * FLIP), 1.0), edits,
                            [at[k] for k in range(s, e + 1)], [t, n],
                            f"swap the sides of track {t} in {count(n, 'frame')}")

    # ------------------------------------------------------------------ missing frames

    def gaps(self) -> list[Finding]:
        out = []
        for t, at in sorted(self.tracks.items()):
            idx = sorted(at)
            for i0, i1 in itertools.pairwise(idx):
                if not 2 <= i1 - i0 <= MAX_MISSING + 1:
                    continue
                a, b = self.kp(i0, at[i0]), self.kp(i1, at[i1])
                both = (a[:, 2] > 0) & (b[:, 2] > 0)
                if both.sum() < 3:
                    continue
                for m in range(i0 + 1, i1):
                    if not self.wanted[m]:
                        continue
                    w = (m - i0) / (i1 - i0)
                    kp = np.zeros_like(a)
                    kp[:, :2] = np.nan
                    kp[both, :2] = (1 - w) * a[both, :2] + w * b[both, :2]
                    kp[both, 2] = np.minimum(a[both, 2], b[both, 2])
                    if self._present(m, kp):
                        continue
                    out.append(self._gap(t, m, i0, i1, kp, int(both.sum())))
        return out

    def _present(self, m: int, kp: np.ndarray) -> bool:
        people = self.frames[m].people
        if not people:
            return False
        others = np.stack([np.asarray(p, dtype=np.float64) for p in people.values()])
        area = np.array([max(_size(kp), 1.0) ** 2 * 0.5])
        return bool(oks_matrix(others, kp[None], area, self.sigmas).max() >= PRESENT_OKS)

    def _gap(self, t: int, m: int, i0: int, i1: int, kp: np.ndarray, joints: int) -> Finding:
        f0, f1 = self.frames[i0].frame_id, self.frames[i1].frame_id
        frame = self.frames[m].frame_id
        rows = tuple((float(x), float(y), int(v)) if v > 0 else (float("nan"), float("nan"), 0)
                     for x, y, v in kp)
        edits = [NewPerson(frame, keypoints=rows, source=INTERPOLATED, track=t)]
        text = (f"track {t} is missing here between frames {f0} and {f1}: a person "
                f"interpolated from them ({count(joints, 'joint')}), to check")
        missing = i1 - i0 - 1
        return self.finding(m, "missing-frames", None, np.flatnonzero(kp[:, 2] > 0).tolist(),
                            text, (("frames missing", missing), ("joints", joints)),
                            joints / len(kp) * (1.0 if missing == 1 else 0.7), edits,
                            (self.tracks[t][i0], self.tracks[t][i1]), [t, f0, f1],
                            f"add track {t}'s person interpolated from frames {f0} and {f1}")

    # ------------------------------------------------------------------ jumping joints

    def jumps(self, skip: set[tuple[int, int]]) -> list[Finding]:
        out = []
        for t, at in sorted(self.tracks.items()):
            for i in sorted(at):
                if i - 1 not in at or i + 1 not in at or (t, i) in skip or not self.wanted[i]:
                    continue
                before, now, after = (self.kp(k, at[k]) for k in (i - 1, i, i + 1))
                size = _size(now)
                if size <= 0:
                    continue
                u_in, u_out = _motion(before, now), _motion(now, after)
                on = (before[:, 2] > 0) & (now[:, 2] > 0) & (after[:, 2] > 0)
                e_in = now[:, :2] - before[:, :2] - u_in
                e_out = after[:, :2] - now[:, :2] - u_out
                n_in, n_out = np.linalg.norm(e_in, axis=1), np.linalg.norm(e_out, axis=1)
                back = -(e_in * e_out).sum(axis=1) / np.maximum(n_in * n_out, 1e-9)
                jumped = on & (n_in > JUMP * size) & (n_out > JUMP * size) & (back > 0.5)
                for j in np.flatnonzero(jumped).tolist():
                    from_before = before[j, :2] + u_in
                    from_after = after[j, :2] - u_out
                    out.append(self._jump(t, i, j, size, float(min(n_in[j], n_out[j])),
                                          from_before, from_after))
        return out

    def _jump(self, t: int, i: int, j: int, size: float, jump: float, from_before: np.ndarray,
              from_after: np.ndarray) -> Finding:
        pid = self.tracks[t][i]
        frame = self.frames[i].frame_id
        apart = float(np.linalg.norm(from_before - from_after)) / size
        names = self.names(i)
        joint = names.joint(j)
        if apart <= AGREE:
            x, y = (0.5 * (from_before + from_after)).tolist()
            edits: list[Edit] = [MoveJoint(frame, pid, j, x, y)]
            fix = f"place {names.person(pid)}'s {joint} where the frames around put it"
        else:
            edits = [SetVisibility(frame, pid, j, 0)]
            fix = f"mark {names.person(pid)}'s {joint} unlabelled"
        text = (f"{names.person(pid)}'s {joint} jumps {jump / size:.2f} of a body away from "
                f"where the body moves and comes back; the frames around "
                f"{'agree' if apart <= AGREE else 'do not agree'} where it is "
                f"({apart:.2f} of a body apart)")
        return self.finding(i, "jumping-joint", pid, (j,), text,
                            (("jump", jump / size), ("neighbours apart", apart)),
                            min((jump / size - JUMP) / (2 * JUMP), 1.0), edits, (pid,),
                            [t, j], fix)

    # ------------------------------------------------------------------ joint gaps

    def joint_gaps(self) -> list[Finding]:
        out = []
        for t, at in sorted(self.tracks.items()):
            for i in sorted(at):
                if not self.wanted[i]:
                    continue
                now = self.kp(i, at[i])
                size = _size(now)
                if size <= 0 or (now[:, 2] > 0).sum() < 3:
                    continue
                for j in np.flatnonzero(now[:, 2] <= 0).tolist():
                    near = self._carried(at, i, j, now)
                    if len(near) == 2 and np.linalg.norm(near[0][1] - near[1][1]) <= \
                            AGREE * size:  # frames that disagree: it stays unlabelled
                        out.append(self._joint_gap(t, i, j, size, near))
        return out

    def _carried(self, at: Mapping[int, int], i: int, j: int,
                 now: np.ndarray) -> list[tuple[int, np.ndarray, int]]:
        """The two nearest frames of the track within :data:`GAP_REACH` that label joint
        ``j`` (nearer first, the earlier first at equal distance), each as ``(index, the
        joint carried here along with the body, its visibility)``."""
        near: list[tuple[int, np.ndarray, int]] = []
        for d in range(1, GAP_REACH + 1):
            for k in (i - d, i + d):
                if k not in at or len(near) == 2:
                    continue
                other = self.kp(k, at[k])
                both = (other[:, 2] > 0) & (now[:, 2] > 0)
                if other[j, 2] <= 0 or both.sum() < 3 or not np.isfinite(other[j, :2]).all():
                    continue
                near.append((k, other[j, :2] + _motion(other, now), int(other[j, 2])))
        return near

    def _joint_gap(self, t: int, i: int, j: int, size: float,
                   near: Sequence[tuple[int, np.ndarray, int]]) -> Finding:
        pid = self.tracks[t][i]
        frame = self.frames[i].frame_id
        (ka, a, va), (kb, b, vb) = near
        apart = float(np.linalg.norm(a - b)) / size
        names = self.names(i)
        joint = names.joint(j)
        fa, fb = self.frames[ka].frame_id, self.frames[kb].frame_id
        x, y = (0.5 * (a + b)).tolist()
        v = min(va, vb)
        edits: list[Edit] = [MoveJoint(frame, pid, j, x, y)]
        if v == 1:
            edits.append(SetVisibility(frame, pid, j, 1))
        how = "occluded" if v == 1 else "visible"
        whose = f"{names.person(pid)}'s {joint}"
        fix = f"place {whose} where the frames around put it ({how})"
        text = (f"{whose}: unlabelled here, but frames {fa} and {fb} of track {t} label it and "
                f"agree where it is ({apart:.2f} of a body apart)")
        return self.finding(i, "joint-gap", pid, (j,), text,
                            (("neighbours apart", apart), ("frames away", abs(ka - kb))),
                            float(np.clip(1.0 - apart / AGREE, 0.0, 1.0)), edits, (pid,),
                            [t, j], fix)
