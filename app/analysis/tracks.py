"""Tracks: the same person across the frames of a sequence.

The people of each frame are linked to the people of the frames before by optimal assignment on
a similarity that asks how well a person fits where a track is expected to be: COCO object
keypoint similarity (OKS) between the person and the track's pose *predicted* for this frame
from its motion so far. A track that found no one for a few frames (the person hidden behind a
neighbour, or missed by the model) stays open and can be taken up again: the gap is bridged.

Arrays in, track ids out: the people of frame ``t`` are an ``(N_t, K, 3)`` array and their
track ids an ``(N_t,)`` array. :func:`link_accuracy` measures a linking against known
identities.

How well it links
-----------------
Measured by :func:`app.demo.evaluate.linking_accuracy` on the synthetic rehearsal of
:func:`app.demo.generate` (24 frames, 15 dancers, two rings circling in opposite directions):
the share of consecutive-frame links that join the same true dancer, on the true poses and on
the people grouped from the demo's simulated maps (each paired to a dancer by OKS >= 0.5; the
links of people paired with no one are not judged), and the share of the dancers' own links
made (recall). The defaults were set on seeds 1-3 (true poses 1.000, grouped people 0.980,
recall 0.958); they barely matter there (``min_similarity`` 0.1-0.35, ``max_gap`` 1-6 and
``smoothing`` 0.3-1 all gave 0.980-0.985). On demos not looked at before:

======================  ==========  ==============  ======
demo                    true poses  grouped people  recall
======================  ==========  ==============  ======
shipped (seed 1966)     1.000       0.993           0.965
seed 12                 1.000       0.966           0.955
seed 13                 1.000       0.977           0.941
seed 14                 1.000       0.990           0.983
seed 15                 1.000       0.987           0.974
seed 16                 1.000       0.988           0.965
======================  ==========  ==============  ======

(recall of the grouped people; every true link was made on the true poses). On the demo
regenerated with the network's errors held over runs of frames (:mod:`app.demo.maps`), and
seeds generated after that change:

======================  ==========  ==============  ======
demo                    true poses  grouped people  recall
======================  ==========  ==============  ======
shipped (seed 1966)     1.000       0.993           0.985
seed 31                 1.000       0.990           0.990
seed 32                 1.000       0.981           0.951
seed 33                 1.000       0.984           0.968
======================  ==========  ==============  ======

Each of the 27 wrong links of grouped people on the six demos of the first table joins two
dancers whose boxes overlap (IoU 0.1-0.8, median about 0.4), and in each at least one of its
two people matches its dancer at an OKS of about 0.65 or less: a grouped person mixing both
bodies, paired with one dancer in one frame and with the other in the next.

References
----------
Object keypoint similarity: the COCO keypoint evaluation (``pycocotools``). Optimal assignment:
``scipy.optimize.linear_sum_assignment`` (Crouse, IEEE TAES 52(4), 2016). Constant-velocity
prediction and matching recently seen tracks first: N. Wojke, A. Bewley, D. Paulus, "Simple
Online and Realtime Tracking with a Deep Association Metric", ICIP 2017 (the matching cascade).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy.optimize import linear_sum_assignment

from app.analysis.similarity import oks_matrix
from app.errors import BadInput

__all__ = ["LinkAccuracy", "link_accuracy", "link_tracks"]

#: Frames a track may miss and still be taken up again.
MAX_GAP = 3
#: Least similarity (OKS against the predicted pose) for a person to continue a track.
MIN_SIMILARITY = 0.2
#: Weight of the newest observed velocity in the track's running velocity (exponential
#: smoothing; the rest is the velocity before).
SMOOTHING = 0.6


def link_tracks(frames: Sequence[Any], sigmas: Any, areas: Sequence[Any] | None = None, *,
                max_gap: int = MAX_GAP, min_similarity: float = MIN_SIMILARITY,
                smoothing: float = SMOOTHING,
                given: Sequence[Any] | None = None) -> list[np.ndarray]:
    """Link the people of consecutive frames into tracks.

    Parameters
    ----------
    frames
        One ``(N_t, K, 3)`` array per frame, in the sequence's order: ``x, y`` in image pixels
        and a third column that is positive where the joint is labelled (COCO visibility, or a
        model's score). A joint with a NaN position counts as unlabelled.
    sigmas
        ``(K,)`` per-joint OKS sigmas.
    areas
        Optional, one ``(N_t,)`` array per frame: each person's area in square pixels (COCO
        ``area``). Without it the area of the box round a track's predicted joints stands in
        (:func:`app.analysis.similarity.person_area`).
    max_gap
        Frames a track may miss and still be continued (default 3).
    min_similarity
        Least OKS between a person and a track's predicted pose for the person to continue the
        track (default 0.2); otherwise the person starts a new track.
    smoothing
        Weight in (0, 1] of the newest velocity in a track's running velocity (default 0.6).
    given
        Optional, one ``(N_t,)`` int array per frame: a track id someone chose for the person
        (0 or more), or -1 where the linking is free to choose. People with a given track keep
        it and carry that track's motion on; the others are linked around them.

    Returns
    -------
    list of numpy.ndarray
        One ``(N_t,)`` int64 array per frame: each person's track id, numbered from 1 in the
        order the tracks start (after the highest given id, when some are given). Two people
        of one frame never share a track that the linking chose.

    Notes
    -----
    Each track keeps, per joint, its last position and the frame it was seen in, and a
    velocity ``u`` (pixels per frame) of the whole body. For frame ``t`` its predicted joint
    ``j`` is ``x_j + u (t - t_j)``; joints not seen for more than ``max_gap + 1`` frames are left
    out of the prediction.

    The similarity of person ``d`` to track ``k`` is the OKS of ``d`` against the predicted
    pose of ``k`` (the track is the reference: its predicted joints are the ones that count),
    ``OKS = sum_j exp(-d_j^2 / (2 A (2 sigma_j)^2)) / #joints``, with ``A`` the person's
    area (or the predicted pose's box area). Tracks are matched in order of how recently they
    were seen, most recent first (the matching cascade of Wojke et al. 2017): the tracks last
    seen in the previous frame are paired with the frame's people by optimal assignment
    maximising the summed similarity over pairs that reach ``min_similarity``, then the tracks
    that missed one frame with the people left over, and so on up to ``max_gap`` missed
    frames. People left over start new tracks.

    When a person continues a track, the joints the person has replace the track's; the
    velocity observed, the median over joints of ``(x_new - x_old) / (t - t_old)`` (the
    median keeps a joint given to a neighbour from dragging the body along), is smoothed into
    the track's: ``u <- smoothing * u_observed + (1 - smoothing) * u`` (on a track's second
    observation, ``u = u_observed``).

    References
    ----------
    COCO keypoint evaluation (OKS); ``scipy.optimize.linear_sum_assignment``; N. Wojke,
    A. Bewley, D. Paulus, "Simple Online and Realtime Tracking with a Deep Association
    Metric", ICIP 2017 (constant-velocity prediction, the matching cascade).

    Examples
    --------
    Two people walk towards each other along one line and pass (synthetic): at the crossing
    their poses coincide, and only their motion says who is who afterwards.

    >>> pose = np.array([[0.0, -40.0, 2], [-10.0, 0.0, 2], [10.0, 0.0, 2]])
    >>> frames = [np.stack([pose + [10.0 * t, 0, 0], pose + [100.0 - 10.0 * t, 0, 0]])
    ...           for t in range(11)]
    >>> ids = link_tracks(frames, [0.1, 0.1, 0.1], [np.full(2, 1600.0)] * 11)
    >>> [int(i[0]) for i in ids]
    [1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 1]
    """
    sig = np.asarray(sigmas, dtype=np.float64).reshape(-1)
    people = [_frame(f, len(sig), t) for t, f in enumerate(frames)]
    areas_given = None if areas is None else [np.asarray(a, dtype=np.float64).reshape(-1)
                                              for a in areas]
    if areas_given is not None and [len(a) for a in areas_given] != [len(p) for p in people]:
        raise BadInput("areas do not give one area per person of each frame", where="areas")
    if max_gap < 0 or not 0 < smoothing <= 1:
        raise BadInput(f"max_gap {max_gap} or smoothing {smoothing} out of range",
                       where="link_tracks", hint="max_gap >= 0, 0 < smoothing <= 1")
    fixed = [np.full(len(p), -1, dtype=np.int64) for p in people] if given is None else \
        [np.asarray(g, dtype=np.int64).reshape(-1) for g in given]
    if [len(g) for g in fixed] != [len(p) for p in people]:
        raise BadInput("given does not give one track (or -1) per person of each frame",
                       where="given")
    state = _Tracks(len(sig))
    by_given: dict[int, int] = {}
    out = []
    for t, dets in enumerate(people):
        ids = np.zeros(len(dets), dtype=np.int64)
        det_area = None if areas_given is None else areas_given[t]
        chosen = np.flatnonzero(fixed[t] >= 0)
        for i in chosen:
            g = int(fixed[t][i])
            area = None if det_area is None else det_area[[i]]
            if g in by_given:
                state.update(np.array([by_given[g]]), dets[[i]], t, smoothing, area)
            else:
                by_given[g] = int(state.start(dets[[i]], t, area)[0])
            ids[i] = by_given[g] + 1
        live = np.flatnonzero(t - state.last_seen[:state.count] <= max_gap + 1)
        if len(chosen):
            busy = [by_given[int(g)] for g in fixed[t][chosen]]
            live = live[~np.isin(live, busy)]
        free = fixed[t] < 0
        if len(live) and free.any():
            similarity = _similarity(state, live, dets, det_area, sig, t, max_gap)
            age = t - state.last_seen[live]
            for a in np.unique(age):
                rows = np.flatnonzero(age == a)
                cols = np.flatnonzero(free)
                if len(cols) == 0:
                    break
                table = similarity[np.ix_(rows, cols)]
                weight = np.where(table >= min_similarity, table, 0.0)
                r, c = linear_sum_assignment(weight, maximize=True)
                keep = table[r, c] >= min_similarity
                tracks, taken = live[rows[r[keep]]], cols[c[keep]]
                state.update(tracks, dets[taken], t, smoothing,
                             None if det_area is None else det_area[taken])
                ids[taken] = tracks + 1
                free[taken] = False
        new = np.flatnonzero(free)
        ids[new] = state.start(dets[new], t, None if det_area is None else det_area[new]) + 1
        out.append(ids)
    if by_given:
        # Internal track k prints as its given id, or as the next free id in start order.
        names = np.zeros(state.count, dtype=np.int64)
        for g, k in by_given.items():
            names[k] = g
        auto = np.setdiff1d(np.arange(state.count), list(by_given.values()))
        names[auto] = max(by_given) + 1 + np.arange(len(auto))
        out = [names[ids - 1] for ids in out]
    return out


def _frame(value: Any, num_joints: int, t: int) -> np.ndarray:
    arr = np.asarray(value, dtype=np.float64)
    if arr.size == 0:
        return np.zeros((0, num_joints, 3))
    if arr.ndim != 3 or arr.shape[1:] != (num_joints, 3):
        raise BadInput(f"frame {t}: people have shape {arr.shape}", where=f"frames[{t}]",
                       hint=f"give (N, {num_joints}, 3) x, y, v per frame")
    return arr


def _similarity(state: _Tracks, live: np.ndarray, dets: np.ndarray, det_area: Any,
                sigmas: np.ndarray, t: int, max_gap: int) -> np.ndarray:
    """``(len(live), N)`` OKS of each person against each live track's predicted pose."""
    since = t - state.seen[live]
    fresh = state.known[live] & (since <= max_gap + 1)
    xy = state.pos[live] + state.vel[live][:, None, :] * since[..., None]
    reference = np.concatenate([xy, np.where(fresh, 2.0, 0.0)[..., None]], axis=2)
    area = state.area[live] if det_area is not None else _box_area(xy, fresh)
    candidates = np.where(_labelled(dets)[..., None], dets, np.nan)
    return oks_matrix(candidates, reference, area, sigmas).T


def _labelled(people: np.ndarray) -> np.ndarray:
    return np.isfinite(people[..., :2]).all(axis=-1) & (people[..., 2] > 0)


class _Tracks:
    """Every track's state as arrays indexed by track (grown by doubling)."""

    def __init__(self, num_joints: int, capacity: int = 64):
        self.count = 0
        self.pos = np.zeros((capacity, num_joints, 2))
        self.seen = np.zeros((capacity, num_joints), dtype=np.int64)
        self.known = np.zeros((capacity, num_joints), dtype=bool)
        self.vel = np.zeros((capacity, 2))
        self.moved = np.zeros(capacity, dtype=bool)
        self.last_seen = np.full(capacity, np.iinfo(np.int64).min // 2, dtype=np.int64)
        self.area = np.zeros(capacity)

    def start(self, dets: np.ndarray, t: int, area: np.ndarray | None) -> np.ndarray:
        """Open one track per person of ``dets``; their indices."""
        n = len(dets)
        while self.count + n > len(self.last_seen):
            self._grow()
        idx = np.arange(self.count, self.count + n)
        self.count += n
        labelled = _labelled(dets)
        self.pos[idx] = np.where(labelled[..., None], dets[..., :2], 0.0)
        self.seen[idx] = t
        self.known[idx] = labelled
        self.vel[idx] = 0.0
        self.moved[idx] = False
        self.last_seen[idx] = t
        if area is not None:
            self.area[idx] = area
        return idx

    def update(self, idx: np.ndarray, dets: np.ndarray, t: int, smoothing: float,
               area: np.ndarray | None) -> None:
        """Continue tracks ``idx`` with the people ``dets`` found in frame ``t``."""
        if len(idx) == 0:
            return
        labelled = _labelled(dets)
        both = labelled & self.known[idx]
        steps = np.maximum(t - self.seen[idx], 1)[..., None]
        observed = np.where(both[..., None], (dets[..., :2] - self.pos[idx]) / steps, np.nan)
        has = both.any(axis=1)
        median = _median_over_joints(observed, both.sum(axis=1))
        blend = np.where(self.moved[idx], smoothing, 1.0)[:, None]
        self.vel[idx] = np.where(has[:, None], blend * median + (1 - blend) * self.vel[idx],
                                 self.vel[idx])
        self.moved[idx] |= has
        self.pos[idx] = np.where(labelled[..., None], dets[..., :2], self.pos[idx])
        self.seen[idx] = np.where(labelled, t, self.seen[idx])
        self.known[idx] |= labelled
        self.last_seen[idx] = t
        if area is not None:
            self.area[idx] = area

    def _grow(self) -> None:
        for name in ("pos", "seen", "known", "vel", "moved", "last_seen", "area"):
            old = getattr(self, name)
            fill = np.iinfo(np.int64).min // 2 if name == "last_seen" else 0
            grown = np.full((2 * len(old), *old.shape[1:]), fill, dtype=old.dtype)
            grown[:len(old)] = old
            setattr(self, name, grown)


def _median_over_joints(values: np.ndarray, counts: np.ndarray) -> np.ndarray:
    """``(n, 2)`` median over axis 1 of ``(n, K, 2)`` values with NaN where missing (0 where
    all are); ``counts`` ``(n,)`` says how many are not NaN. Sorting puts NaN last."""
    ordered = np.sort(values, axis=1)
    rows = np.arange(len(values))
    lo, hi = np.maximum((counts - 1) // 2, 0), np.minimum(counts // 2, values.shape[1] - 1)
    pick = 0.5 * (ordered[rows, lo] + ordered[rows, hi])
    return np.where(counts[:, None] > 0, pick, 0.0)


def _box_area(xy: np.ndarray, labelled: np.ndarray) -> np.ndarray:
    """``(n,)`` area of the box round each person's labelled joints (as
    :func:`app.analysis.similarity.person_area`), from ``(n, K, 2)`` and ``(n, K)``."""
    some = np.asarray(labelled.any(axis=1))
    top = np.where(labelled[..., None], xy, -np.inf).max(axis=1)
    bottom = np.where(labelled[..., None], xy, np.inf).min(axis=1)
    return np.where(some, np.prod(np.where(some[:, None], top - bottom, 0.0), axis=1), 0.0)


@dataclass(frozen=True)
class LinkAccuracy:
    """How well a linking joins the same people from one frame to the next.

    Attributes
    ----------
    links
        Links made between consecutive frames (a person and the person of the next frame with
        the same track id).
    judged
        Links whose two people both have a known identity.
    right
        Judged links that join the same identity.
    true_links
        Identities present, known, in two consecutive frames (the links a perfect linking
        makes; the right links are the ones of these it made).
    """

    links: int
    judged: int
    right: int
    true_links: int

    @property
    def accuracy(self) -> float:
        """Share of the judged links that join the same identity (1 when none was judged)."""
        return self.right / self.judged if self.judged else 1.0

    @property
    def recall(self) -> float:
        """Share of the true links that the linking made (1 when there were none)."""
        return self.right / self.true_links if self.true_links else 1.0

    def __add__(self, other: LinkAccuracy) -> LinkAccuracy:
        return LinkAccuracy(self.links + other.links, self.judged + other.judged,
                            self.right + other.right, self.true_links + other.true_links)


def link_accuracy(track_ids: Sequence[Any], identities: Sequence[Any]) -> LinkAccuracy:
    """Count the consecutive-frame links of a linking that join the same known identity.

    Parameters
    ----------
    track_ids
        One ``(N_t,)`` array per frame: the linking's track ids.
    identities
        One ``(N_t,)`` array per frame, for the same people: who each person really is; a
        negative value where unknown (such a person's links are not judged).

    Returns
    -------
    LinkAccuracy
        ``accuracy``: right links over judged links; ``recall``: true links made over true
        links.

    Notes
    -----
    Only frames ``t`` and ``t + 1`` are compared: a track bridging a gap makes no
    consecutive-frame link over it. An identity exchange between two tracks makes two wrong
    links.

    Examples
    --------
    Two people, their track ids exchanged between the second and third frame:

    >>> ids = [np.array([1, 2]), np.array([1, 2]), np.array([2, 1])]
    >>> who = [np.array([7, 8]), np.array([7, 8]), np.array([7, 8])]
    >>> score = link_accuracy(ids, who)
    >>> score.judged, score.right, score.accuracy, score.recall
    (4, 2, 0.5, 0.5)
    """
    ids = [np.asarray(i, dtype=np.int64).reshape(-1) for i in track_ids]
    who = [np.asarray(w, dtype=np.int64).reshape(-1) for w in identities]
    if len(ids) != len(who) or any(len(a) != len(b) for a, b in zip(ids, who, strict=True)):
        raise BadInput("track ids and identities do not cover the same people",
                       where="identities")
    total = LinkAccuracy(0, 0, 0, 0)
    for t in range(len(ids) - 1):
        same = ids[t][:, None] == ids[t + 1][None, :]
        known = (who[t][:, None] >= 0) & (who[t + 1][None, :] >= 0)
        truly = known & (who[t][:, None] == who[t + 1][None, :])
        total += LinkAccuracy(int(same.sum()), int((same & known).sum()),
                              int((same & truly).sum()), int(truly.sum()))
    return total
