"""Triage: which people of a frame are probably labelled wrong, and why, in words.

Each check looks for one way crowds break auto-labels and returns :class:`Reason` records:
a kind, a sentence a person can read, the person and the joints concerned, and a weight in
[0, 1] (how strongly the evidence alone says "this person is wrong").

==================  ==========================================================================
kind                evidence
==================  ==========================================================================
``weak-limb``       the model's own field hardly supports a labelled limb (line integral ``E``
                    of Cao et al. 2017, needs maps)
``stretched-limb``  a limb longer than a body can project at the person's torso scale
``crossed-sides``   left and right cross relative to the rest of the body
``duplicate``       the same body found twice (high OKS between two people)
``split``           one body cut in two (two partial people that fit together)
``missing-joints``  joints a body of this size should show are absent
``low-score``       the model was unsure of the person's joints
``crowded``         frame level: the crowd index of Li et al. (CVPR 2019)
==================  ==========================================================================

Combination (documented weights):

- a person's suspicion is the noisy-or of their reasons' weights,
  ``s = 1 - prod(1 - w_i)``; a person is *flagged* when ``s >= FLAG_AT`` (0.5);
- a frame's score is the expected number of wrong people, ``sum_p s_p``, plus
  ``CROWD_WEIGHT * crowd_index`` (0.5), so that among frames with the same evidence the more
  crowded one, where errors hide, comes first.

The thresholds below were set from the principles stated beside each, then checked on the
synthetic demo (see tests/analysis/test_triage.py for the measured figures); they are defaults,
not truths.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from app.analysis.anthropometry import limb_fractions, person_scale
from app.analysis.association import limb_scores
from app.analysis.similarity import oks
from app.model.skeleton import Skeleton

FLAG_AT = 0.5
CROWD_WEIGHT = 0.5

#: A limb may look up to this many times its expected length before it counts as stretched
#: (no body projects a limb longer than it is; 10 % individual variation and a rough scale).
STRETCH_FROM = 1.35
#: ... and is certainly wrong at this ratio.
STRETCH_SURE = 1.9
#: Field support below this is weak (a correct, visible limb integrates to about 0.7-1).
WEAK_E = 0.3
#: OKS between two people of one frame above which they are one body found twice.
DUPLICATE_OKS = 0.5
#: Mean joint score below this is low (peaks of a confident network are near 1).
LOW_SCORE = 0.45


@dataclass(frozen=True)
class Reason:
    """One piece of evidence that a person (or the frame) is labelled wrong."""

    kind: str
    text: str
    person: int | None
    joints: tuple[int, ...] = ()
    weight: float = 0.0

    def to_dict(self) -> dict[str, Any]:
        return {"kind": self.kind, "text": self.text, "person": self.person,
                "joints": list(self.joints), "weight": round(float(self.weight), 4)}


@dataclass
class FrameTriage:
    """The verdict on one frame."""

    score: float
    reasons: list[Reason]
    suspicion: dict[int, float] = field(default_factory=dict)
    crowd_index: float = 0.0

    @property
    def flagged(self) -> list[int]:
        """Ids of the people whose suspicion reaches :data:`FLAG_AT`, most suspicious first."""
        return sorted((p for p, s in self.suspicion.items() if s >= FLAG_AT),
                      key=lambda p: -self.suspicion[p])


def _ramp(x: float, lo: float, hi: float) -> float:
    return float(np.clip((x - lo) / (hi - lo), 0.0, 1.0))


def stretched_limbs(pid: int, kp: np.ndarray, skeleton: Skeleton,
                    fractions: np.ndarray) -> list[Reason]:
    """Limbs longer than the person's torso scale allows (see module table)."""
    scale = person_scale(kp, skeleton)
    if not np.isfinite(scale) or scale <= 0:
        return []
    out = []
    for c, (a, b) in enumerate(skeleton.limbs):
        if not (kp[a, 2] > 0 and kp[b, 2] > 0 and np.isfinite(fractions[c])):
            continue
        ratio = float(np.hypot(*(kp[a, :2] - kp[b, :2]))) / (fractions[c] * scale)
        if ratio > STRETCH_FROM:
            out.append(Reason(
                "stretched-limb",
                f"{skeleton.joints[a]}-{skeleton.joints[b]} is {ratio:.1f}x as long as this "
                "body's torso allows",
                pid, (a, b), 0.5 + 0.5 * _ramp(ratio, STRETCH_FROM, STRETCH_SURE)))
    return out


def weak_limbs(pid: int, kp: np.ndarray, skeleton: Skeleton, maps: Any) -> list[Reason]:
    """Labelled limbs the model's own part affinity field hardly supports."""
    out = []
    for c, (a, b) in enumerate(skeleton.limbs):
        if not (kp[a, 2] > 0 and kp[b, 2] > 0):
            continue
        if np.allclose(kp[a, :2], kp[b, :2]):
            continue
        mean, _ = limb_scores(maps.pafs[c], kp[a, :2][None], kp[b, :2][None], maps.stride)
        e = float(mean[0, 0])
        if e < WEAK_E:
            out.append(Reason(
                "weak-limb",
                f"the model's field hardly supports {skeleton.joints[a]}-{skeleton.joints[b]} "
                f"(E = {e:.2f})",
                pid, (a, b), 0.35 + 0.45 * _ramp(-e, -WEAK_E, 0.1)))
    return out


def _pairs(skeleton: Skeleton, *parts: str) -> list[tuple[int, int]]:
    idx = {n: i for i, n in enumerate(skeleton.joints)}
    return [(idx["left_" + p], idx["right_" + p]) for p in parts
            if "left_" + p in idx and "right_" + p in idx]


def crossed_sides(pid: int, kp: np.ndarray, skeleton: Skeleton, maps: Any = None) -> list[Reason]:
    """Left and right that disagree with the rest of the body.

    The torso's up direction ``u`` (hip centre to shoulder centre) and each left-right pair's
    ``d = right - left`` give ``cross(u, d)``; its sign says which way the body faces. Shoulders,
    hips and the face must agree (no one twists more than a quarter turn between them); a pair
    that disagrees with a clear majority of the others, by a clear margin, is crossed. Arms and
    legs are checked along their chains instead (an elbow nearer the other shoulder *and* the
    other elbow nearer this shoulder), since dancers do cross their legs.
    """
    out: list[Reason] = []
    scale = person_scale(kp, skeleton)
    if not np.isfinite(scale):
        return out
    on = kp[:, 2] > 0
    core = _pairs(skeleton, "shoulder", "hip")
    face = _pairs(skeleton, "eye", "ear")
    if len(core) != 2:
        return out
    (ls, rs), (lh, rh) = core
    if not on[[ls, rs, lh, rh]].all():
        return out
    up = (kp[ls, :2] + kp[rs, :2]) / 2 - (kp[lh, :2] + kp[rh, :2]) / 2
    norm = float(np.hypot(*up))
    if norm < 1e-6:
        return out
    up /= norm
    signs: dict[tuple[int, int], float] = {}
    for a, b in core + face:
        if on[a] and on[b]:
            d = kp[b, :2] - kp[a, :2]
            signs[(a, b)] = float(up[0] * d[1] - up[1] * d[0]) / scale
    margin = 0.04  # of stature: a pair seen edge-on (person in profile) says nothing
    clear = {k: v for k, v in signs.items() if abs(v) > margin}
    if len(clear) >= 2:
        total = sum(np.sign(v) for v in clear.values())
        for (a, b), v in clear.items():
            others = total - np.sign(v)
            if np.sign(v) != np.sign(others) and abs(others) >= 1:
                part = skeleton.joints[a][5:]
                out.append(Reason("crossed-sides",
                                  f"left and right {part} are the other way round from the rest "
                                  "of the body", pid, (a, b), 0.75))
    for parent, child in (("shoulder", "elbow"), ("elbow", "wrist"), ("hip", "knee"),
                          ("knee", "ankle")):
        pp = _pairs(skeleton, parent, child)
        if len(pp) != 2:
            continue
        (lp, rp), (lc, rc) = pp
        if not on[[lp, rp, lc, rc]].all():
            continue
        same = np.hypot(*(kp[lp, :2] - kp[lc, :2])) + np.hypot(*(kp[rp, :2] - kp[rc, :2]))
        swap = np.hypot(*(kp[lp, :2] - kp[rc, :2])) + np.hypot(*(kp[rp, :2] - kp[lc, :2]))
        left, right = _limb_index(skeleton, lp, lc), _limb_index(skeleton, rp, rc)
        if maps is not None and left is not None and right is not None:
            # Each side's own field, read once along the labelled pairing and once crossed.
            e_same = _e(maps, left, kp[lp], kp[lc]) + _e(maps, right, kp[rp], kp[rc])
            e_swap = _e(maps, left, kp[lp], kp[rc]) + _e(maps, right, kp[rp], kp[lc])
            if e_swap > e_same + 0.5:
                out.append(Reason("crossed-sides",
                                  f"the model's field joins each {child} to the other side's "
                                  f"{parent}", pid, (lc, rc), 0.8))
                continue
        if swap < 0.6 * same and same > 0.15 * scale:
            out.append(Reason("crossed-sides",
                              f"each {child} sits by the other side's {parent}", pid, (lc, rc),
                              0.6))
    return out


def _limb_index(skeleton: Skeleton, a: int, b: int) -> tuple[int, bool] | None:
    """The limb joining joints a and b, and whether its field points from a to b."""
    for c, (p, q) in enumerate(skeleton.limbs):
        if (p, q) == (a, b):
            return c, True
        if (p, q) == (b, a):
            return c, False
    return None


def _e(maps: Any, limb: tuple[int, bool], first: np.ndarray, second: np.ndarray) -> float:
    """E of a connection first -> second along the field of ``limb`` (its direction kept)."""
    c, forward = limb
    start, end = (first, second) if forward else (second, first)
    mean, _ = limb_scores(maps.pafs[c], start[None, :2], end[None, :2], maps.stride)
    return max(float(mean[0, 0]), 0.0)


def missing_joints(pid: int, kp: np.ndarray, skeleton: Skeleton,
                   image_size: tuple[int, int] | None) -> list[Reason]:
    """Joints absent from a person whose torso is there.

    A labelled torso means the body is in view; limbs and face that the model found nothing
    for are either hidden (and an annotator should mark them occluded where their place is
    known) or given to someone else. Joints that would lie outside the image are not counted:
    a missing joint's expected place is its labelled neighbour's place (within one limb), so
    neighbours within one limb length of the border are skipped.
    """
    scale = person_scale(kp, skeleton)
    if not np.isfinite(scale):
        return []
    on = kp[:, 2] > 0
    missing = np.flatnonzero(~on)
    if image_size is not None and missing.size:
        w, h = image_size
        reach = 0.3 * scale
        keep = []
        for j in missing.tolist():
            near = [o for a, b in skeleton.limbs for o in ((b,) if a == j else (a,) if b == j
                                                           else ()) if on[o]]
            if any(kp[o, 0] < reach or kp[o, 0] > w - reach or kp[o, 1] > h - reach
                   for o in near):
                continue
            keep.append(j)
        missing = np.asarray(keep, dtype=np.int64)
    n = int(missing.size)
    if n < 2:
        return []
    names = ", ".join(skeleton.joints[j] for j in missing[:4]) + (" ..." if n > 4 else "")
    return [Reason("missing-joints", f"{n} joints missing on a body in view ({names})", pid,
                   tuple(int(j) for j in missing), 0.3 + 0.6 * _ramp(n, 2, 5))]


def low_scores(pid: int, kp: np.ndarray, scores: np.ndarray | None) -> list[Reason]:
    """People whose labelled joints the model scored low on average."""
    if scores is None:
        return []
    on = (kp[:, 2] > 0) & np.isfinite(scores)
    if not on.any():
        return []
    mean = float(scores[on].mean())
    if mean >= LOW_SCORE:
        return []
    weakest = tuple(int(j) for j in np.flatnonzero(on & (scores < LOW_SCORE)))
    return [Reason("low-score", f"the model scored this person's joints {mean:.2f} on average",
                   pid, weakest, 0.3 + 0.5 * _ramp(-mean, -LOW_SCORE, -0.15))]


def duplicates_and_splits(people: Mapping[int, np.ndarray], skeleton: Skeleton,
                          fractions: np.ndarray,
                          scores: Mapping[int, np.ndarray] | None = None) -> list[Reason]:
    """Pairs of people that are really one body: found twice, or cut in two."""
    out: list[Reason] = []
    ids = list(people)
    sigmas = skeleton.sigma_array
    for i, p in enumerate(ids):
        for q in ids[i + 1:]:
            a, b = people[p], people[q]
            on_a, on_b = a[:, 2] > 0, b[:, 2] > 0
            if not on_a.any() or not on_b.any():
                continue
            both = on_a & on_b
            if both.sum() >= 2:
                ref, other = (a, b) if on_a.sum() >= on_b.sum() else (b, a)
                area = _area(ref)
                sim = oks(other, ref, area, sigmas) if area > 0 else 0.0
                if sim >= DUPLICATE_OKS:
                    weaker = q if _strength(b, scores, q) <= _strength(a, scores, p) else p
                    keeper = p if weaker == q else q
                    out.append(Reason("duplicate",
                                      f"the same body as person {keeper} (OKS {sim:.2f})",
                                      weaker, tuple(int(j) for j in np.flatnonzero(both)),
                                      0.5 + 0.4 * _ramp(sim, DUPLICATE_OKS, 0.9)))
                continue
            link = _split_link(a, b, skeleton, fractions)
            if link is not None:
                j1, j2 = link
                for pid, j in ((p, j1), (q, j2)):
                    mate = q if pid == p else p
                    out.append(Reason("split",
                                      f"looks like the rest of person {mate}'s body (joined at "
                                      f"{skeleton.joints[j1]}-{skeleton.joints[j2]})", pid, (j,),
                                      0.7))
    return out


def _area(kp: np.ndarray) -> float:
    on = kp[:, 2] > 0
    if on.sum() < 2:
        return 0.0
    span = kp[on, :2].max(axis=0) - kp[on, :2].min(axis=0)
    return float(span[0] * span[1])


def _strength(kp: np.ndarray, scores: Mapping[int, np.ndarray] | None, pid: int) -> float:
    on = kp[:, 2] > 0
    if scores is not None and pid in scores and np.isfinite(scores[pid][on]).any():
        return float(np.nansum(scores[pid][on]))
    return float(on.sum())


def _split_link(a: np.ndarray, b: np.ndarray, skeleton: Skeleton,
                fractions: np.ndarray) -> tuple[int, int] | None:
    """A limb joining a labelled joint of ``a`` to one of ``b`` at a plausible length, when
    the two have disjoint joint types and their union stays within one body's proportions."""
    union = np.where((a[:, 2] > 0)[:, None], a, b)
    scale = person_scale(union, skeleton)
    if not np.isfinite(scale):
        return None
    on_a, on_b = a[:, 2] > 0, b[:, 2] > 0
    best = None
    for c, (j1, j2) in enumerate(skeleton.limbs):
        if not np.isfinite(fractions[c]):
            continue
        for x, y in ((j1, j2), (j2, j1)):
            if on_a[x] and on_b[y]:
                ratio = np.hypot(*(a[x, :2] - b[y, :2])) / (fractions[c] * scale)
                if ratio <= 1.2 and (best is None or ratio < best[0]):
                    best = (ratio, x, y)
    if best is None:
        return None
    if stretched_limbs(-1, union, skeleton, fractions):
        return None
    return int(best[1]), int(best[2])


def crowd_index(people: Mapping[int, np.ndarray]) -> float:
    """The crowd index of Li et al. (CVPR 2019): the mean over people of (joints of others
    inside the person's box) / (the person's own joints).

    Examples
    --------
    >>> a = np.array([[0., 0, 2], [10, 10, 2]]); b = np.array([[5., 5, 2], [20, 20, 2]])
    >>> crowd_index({1: a, 2: b})
    0.5
    """
    boxes, counts, points = {}, {}, []
    for pid, kp in people.items():
        on = kp[:, 2] > 0
        if on.sum() < 2:
            continue
        boxes[pid] = (kp[on, :2].min(axis=0), kp[on, :2].max(axis=0))
        counts[pid] = int(on.sum())
        points.append((pid, kp[on, :2]))
    if not boxes:
        return 0.0
    ratios = []
    for pid, (lo, hi) in boxes.items():
        others = [xy for q, xy in points if q != pid]
        if not others:
            ratios.append(0.0)
            continue
        xy = np.concatenate(others)
        inside = ((xy >= lo) & (xy <= hi)).all(axis=1).sum()
        ratios.append(float(inside) / counts[pid])
    return float(np.mean(ratios))


def triage_frame(
    people: Mapping[int, Any],
    skeleton: Skeleton,
    scores: Mapping[int, Any] | None = None,
    maps: Any = None,
    image_size: tuple[int, int] | None = None,
) -> FrameTriage:
    """Every check on one frame; the frame's score, its reasons and each person's suspicion.

    Parameters
    ----------
    people
        Person id -> ``(K, 3)`` ``x, y, v`` (image pixels).
    skeleton
        The project's skeleton.
    scores
        Person id -> ``(K,)`` model score per joint (NaN where none), optional.
    maps
        Optional network maps (``.pafs`` ``(L, 2, H, W)``, ``.stride``) for the field checks.
    image_size
        ``(width, height)``, so that joints beyond the border are not counted missing.

    Returns
    -------
    FrameTriage

    Examples
    --------
    >>> from app.model.skeleton import coco_body
    >>> sk = coco_body()
    >>> body = np.zeros((17, 3)); body[:, 2] = 2
    >>> body[:, :2] = [[50, 20], [52, 18], [48, 18], [55, 19], [45, 19], [60, 35], [40, 35],
    ...                [63, 55], [37, 55], [64, 72], [36, 72], [56, 68], [44, 68], [57, 95],
    ...                [43, 95], [57, 120], [43, 120]]
    >>> triage_frame({1: body}, sk).flagged
    []
    >>> wrong = body.copy(); wrong[9, :2] = (160, 72)      # left wrist on a neighbour
    >>> t = triage_frame({1: wrong}, sk)
    >>> t.flagged, [r.kind for r in t.reasons]
    ([1], ['stretched-limb'])
    """
    arrays = {int(p): np.asarray(v, dtype=np.float64) for p, v in people.items()}
    score_arrays = None if scores is None else \
        {int(p): np.asarray(v, dtype=np.float64) for p, v in scores.items()}
    fractions = limb_fractions(skeleton)
    reasons: list[Reason] = []
    for pid, kp in arrays.items():
        if not (kp[:, 2] > 0).any():
            continue
        reasons += stretched_limbs(pid, kp, skeleton, fractions)
        if maps is not None:
            reasons += weak_limbs(pid, kp, skeleton, maps)
        reasons += crossed_sides(pid, kp, skeleton, maps)
        reasons += missing_joints(pid, kp, skeleton, image_size)
        reasons += low_scores(pid, kp, None if score_arrays is None else score_arrays.get(pid))
    reasons += duplicates_and_splits(arrays, skeleton, fractions, score_arrays)
    suspicion = {pid: 0.0 for pid in arrays}
    keep = {pid: 1.0 for pid in arrays}
    for r in reasons:
        if r.person in keep:
            keep[r.person] *= 1.0 - r.weight
    for pid in arrays:
        suspicion[pid] = 1.0 - keep[pid]
    ci = crowd_index(arrays)
    if ci > 0.5:
        reasons.append(Reason("crowded", f"crowded frame (crowd index {ci:.2f})", None, (),
                              min(ci, 1.0)))
    score = float(sum(suspicion.values()) + CROWD_WEIGHT * ci)
    reasons.sort(key=lambda r: (-r.weight, r.person if r.person is not None else -1))
    return FrameTriage(score, reasons, suspicion, ci)
