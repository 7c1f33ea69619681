"""Model-evidence checks: what the network's own output says about a person's labels.

With the network's maps, the line integral ``E`` of each labelled limb on its part affinity
field says how well the model supports it; the per-joint scores say how sure the model was of
each part. Both are compared with the frame's other people, so that the checks do not depend
on how strong a given network's outputs are.

References
----------
Z. Cao et al., "Realtime Multi-Person 2D Pose Estimation using Part Affinity Fields",
CVPR 2017, Sec. 2.4.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Any

import numpy as np

from app.analysis.association import group_people, limb_scores
from app.analysis.triage.combine import Reason, make_reason, ramp
from app.model.naming import Names, joint_name
from app.model.skeleton import Skeleton

#: Weak limbs: the mean shortfall of the person's ``E`` below the frame's typical ``E`` for
#: each limb counts from 0 and is sure at 0.12; a single limb below by more is named.
WEAK_FROM, WEAK_SURE = 0.0, 0.12
#: Low scores: the person's mean joint score below the frame's median person counts from 0 and
#: is sure at 0.15; with fewer than three people, below the absolute ``LOW_SCORE``.
LOW_FROM, LOW_SURE = 0.0, 0.15
LOW_SCORE = 0.45
#: Held tie: labelled joints that the maps grouped each frame alone place elsewhere, at which
#: the check is at full strength; a joint within ``SAME_SPOT`` pixels is the same.
HELD_FULL = 3
SAME_SPOT = 1.0
#: A person with fewer joints than this on a spot of the grouping alone is not that grouping's
#: (labels a person drew or imported from elsewhere): ``held-tie`` says nothing of it.
HELD_SHARED = 2
#: Opposed field: labelled limbs whose ``E`` is negative, at which the check is at full
#: strength (our choice).
OPPOSED_FULL = 2


def limb_index(skeleton: Skeleton, a: int, b: int) -> tuple[int, bool] | None:
    """The limb joining joints a and b, and whether its field points from a to b."""
    for c, (p, q) in enumerate(skeleton.limbs):
        if (p, q) == (a, b):
            return c, True
        if (p, q) == (b, a):
            return c, False
    return None


class FieldMemo:
    """Network maps that remember every line integral ``E`` they were asked for.

    Checks run many times on small variations of one frame's labels (the fixes try joints on
    other people) ask for the same limbs again and again; wrapped in a ``FieldMemo`` the maps
    compute each ``E`` once. It stands in for the maps wherever the checks take them.

    Examples
    --------
    >>> from types import SimpleNamespace
    >>> fields = np.zeros((1, 2, 10, 10)); fields[0, 0] = 1.0       # points along +x
    >>> memo = FieldMemo(SimpleNamespace(pafs=fields, stride=1))
    >>> memo.e(0, np.array([1.0, 1.0]), np.array([8.0, 1.0])), len(memo._known)
    (1.0, 1)
    """

    def __init__(self, maps: Any):
        self.maps = maps
        self.pafs = maps.pafs
        self.stride = maps.stride
        self.confidence_maps = getattr(maps, "confidence_maps", None)
        self._known: dict[tuple[Any, ...], float] = {}
        self._tables: dict[int, _LimbTable] = {}
        self._alone: list[np.ndarray] | None = None

    def alone(self, skeleton: Skeleton) -> list[np.ndarray] | None:
        """The people the maps give grouped on their own (:func:`grouped_alone`), computed
        once per frame (about 10 ms for a crowded frame); None without confidence maps."""
        if self._alone is None and self.confidence_maps is not None:
            self._alone = grouped_alone(self.maps, skeleton)
        return self._alone

    def e(self, limb: int, start: np.ndarray, end: np.ndarray) -> float:
        """``E`` of limb ``limb`` from ``start`` to ``end`` (image pixels), as
        :func:`app.analysis.association.limb_scores` computes it (to the last bit: see
        :func:`_segment_e`)."""
        ax, ay, bx, by = float(start[0]), float(start[1]), float(end[0]), float(end[1])
        key = (limb, round(ax, 3), round(ay, 3), round(bx, 3), round(by, 3))
        value = self._known.get(key)
        if value is None:
            table = self._tables.get(limb)
            if table is None:
                table = self._tables[limb] = _LimbTable(self.pafs[limb], self.stride)
            if math.isfinite(ax + ay + bx + by) and table.usable:
                value = _segment_e(table, ax, ay, bx, by)
            else:
                mean, _ = limb_scores(self.pafs[limb], np.array([[ax, ay]]),
                                      np.array([[bx, by]]), self.stride)
                value = float(mean[0, 0])
            self._known[key] = value
        return value


def grouped_alone(maps: Any, skeleton: Skeleton) -> list[np.ndarray] | None:
    """The people of one frame's maps grouped without the frame before: what ``import-maps``
    gives each frame alone (:func:`app.analysis.association.group_people`), ``(K, 3)`` rows
    of ``x, y, score`` in image pixels; None when the maps have no confidence maps. A
    :class:`FieldMemo` keeps it (:meth:`FieldMemo.alone`)."""
    if isinstance(maps, FieldMemo):
        return maps.alone(skeleton)
    heat = getattr(maps, "confidence_maps", None)
    if heat is None:
        return None
    return group_people(heat, maps.pafs, np.asarray(skeleton.limbs), stride=maps.stride)


#: The sample positions ``u`` of :func:`app.analysis.association.limb_scores` (10 samples).
_SAMPLES = np.linspace(0.0, 1.0, 10).tolist()


class _LimbTable:
    """One limb's field read as Python floats, for :func:`_segment_e`: each channel's values
    and the difference to the next cell of its row, computed in the field's own dtype as
    :func:`app.analysis.association._field_dots` computes it."""

    def __init__(self, field: Any, stride: int):
        field = np.asarray(field)
        self.usable = field.ndim == 3 and field.shape[0] == 2 and field.size > 0 \
            and field.dtype in (np.float16, np.float32, np.float64) and stride >= 1
        if not self.usable:
            return
        self.height, self.width = field.shape[1:]
        self.stride = stride
        self.step_y = self.width if self.height > 1 else 0
        # Read through memoryviews: an item comes out as a Python float, exactly, without
        # converting the whole field (most of its cells are never read).
        self.values: list[Any] = []
        self.next_x: list[Any] = []
        for ch in range(2):
            v = np.ascontiguousarray(field[ch]).reshape(-1)
            d = np.zeros_like(v)
            if self.width > 1:
                d[:-1] = v[1:] - v[:-1]
            if v.dtype == np.float16:  # no memoryview format: float32 holds each exactly
                v, d = v.astype(np.float32), d.astype(np.float32)
            self.values.append(v.data)
            self.next_x.append(d.data)


def _segment_e(t: _LimbTable, ax: float, ay: float, bx: float, by: float) -> float:
    """``E`` of one segment, in plain Python floats, with the very operations (and their
    order) of :func:`app.analysis.association.limb_scores` on a ``(1, 2)`` start and end:
    the same IEEE results, some six times faster than numpy on ten samples. The mean adds
    the samples as numpy's pairwise sum does for ten (eight partial sums paired, then the
    last two). ``tests/analysis/test_model_evidence.py`` checks the equality bit for bit."""
    dx, dy = bx - ax, by - ay
    norm = float(np.hypot(dx, dy))
    ux, uy = (dx / norm, dy / norm) if norm > 0 else (0.0, 0.0)
    s = t.stride
    off = (s - 1) / 2.0
    wm, hm = t.width - 1, t.height - 1
    xcap, ycap = max(t.width - 2, 0), max(t.height - 2, 0)
    width, step_y = t.width, t.step_y
    v0, v1 = t.values
    d0, d1 = t.next_x
    a = []
    for u in _SAMPLES:
        gx = (ax + u * dx - off) / s
        gx = 0.0 if gx < 0 else (wm if gx > wm else gx)
        gy = (ay + u * dy - off) / s
        gy = 0.0 if gy < 0 else (hm if gy > hm else gy)
        x0, y0 = min(int(gx), xcap), min(int(gy), ycap)
        fx, fy = gx - x0, gy - y0
        i00 = y0 * width + x0
        i10 = i00 + step_y
        top, bottom = v0[i00] + d0[i00] * fx, v0[i10] + d0[i10] * fx
        total = 0.0 + (top + (bottom - top) * fy) * ux
        top, bottom = v1[i00] + d1[i00] * fx, v1[i10] + d1[i10] * fx
        a.append(total + (top + (bottom - top) * fy) * uy)
    summed = ((a[0] + a[1]) + (a[2] + a[3])) + ((a[4] + a[5]) + (a[6] + a[7]))
    return (summed + a[8] + a[9]) / 10


def limb_e(maps: Any, limb: tuple[int, bool], first: np.ndarray, second: np.ndarray) -> float:
    """E of a connection first -> second along the field of ``limb`` (its direction kept)."""
    c, forward = limb
    start, end = (first, second) if forward else (second, first)
    if isinstance(maps, FieldMemo):
        return max(maps.e(c, start, end), 0.0)
    mean, _ = limb_scores(maps.pafs[c], start[None, :2], end[None, :2], maps.stride)
    return max(float(mean[0, 0]), 0.0)


def limb_support(people: np.ndarray, skeleton: Skeleton, maps: Any) -> np.ndarray:
    """``(P, L)`` the line integral ``E`` of each person's labelled limbs on the model's field.

    Parameters
    ----------
    people
        ``(P, K, 3)`` ``x, y, v``.
    skeleton
        The project's skeleton (limbs in the order of ``maps.pafs``).
    maps
        Network maps with ``.pafs`` ``(L, 2, H, W)`` and ``.stride``.

    Returns
    -------
    numpy.ndarray
        ``(P, L)`` float64; NaN where an end is unlabeled or both ends coincide.

    Notes
    -----
    ``E`` from :func:`app.analysis.association.limb_scores` (10 samples, bilinear), along the
    limb's own direction. All people's limb ``c`` are scored in one call.

    References
    ----------
    Cao et al., CVPR 2017, Sec. 2.4, Eq. 10-11.

    Examples
    --------
    >>> from types import SimpleNamespace
    >>> from app.model.skeleton import coco_body
    >>> sk = coco_body()
    >>> fields = np.zeros((19, 2, 20, 20)); fields[0, 1] = -1.0     # ankle -> knee points up
    >>> kp = np.zeros((1, 17, 3)); kp[0, [15, 13]] = [[50, 120, 2], [50, 60, 2]]
    >>> e = limb_support(kp, sk, SimpleNamespace(pafs=fields, stride=8))
    >>> float(e[0, 0]), bool(np.isnan(e[0, 1]))
    (1.0, True)
    """
    arr = np.asarray(people, dtype=np.float64).reshape(-1, skeleton.num_joints, 3)
    out = np.full((arr.shape[0], len(skeleton.limbs)), np.nan)
    if arr.shape[0] == 0:
        return out
    for c, (a, b) in enumerate(skeleton.limbs):
        ok = (arr[:, a, 2] > 0) & (arr[:, b, 2] > 0) & \
            np.any(arr[:, a, :2] != arr[:, b, :2], axis=1)
        rows = np.flatnonzero(ok)
        if rows.size == 0:
            continue
        if isinstance(maps, FieldMemo):
            out[rows, c] = [maps.e(c, arr[r, a], arr[r, b]) for r in rows.tolist()]
            continue
        mean, _ = limb_scores(maps.pafs[c], arr[rows, a, :2], arr[rows, b, :2], maps.stride)
        out[rows, c] = np.diagonal(mean)
    return out


def typical_support(support: np.ndarray) -> np.ndarray:
    """The frame's typical ``E`` of each limb.

    Parameters
    ----------
    support
        ``(P, L)`` from :func:`limb_support`.

    Returns
    -------
    numpy.ndarray
        ``(L,)``: per limb, the median ``E`` over the people who have it when at least three
        do; otherwise the median over all the frame's scored limbs when there are at least
        three; otherwise NaN.

    Notes
    -----
    The median of the frame's own people is the reference a limb is weak against: a
    minority of wrong people cannot move it. Common practice, no source.

    Examples
    --------
    >>> typical_support(np.array([[0.9, np.nan], [0.7, 0.2], [0.8, np.nan]])).tolist()
    [0.8, 0.7]
    """
    values = np.asarray(support, dtype=np.float64)
    finite = np.isfinite(values)
    count = finite.sum(axis=0)
    pooled = values[finite]
    fallback = float(np.median(pooled)) if pooled.size >= 3 else np.nan
    per_limb = np.full(values.shape[1], np.nan)
    for c in np.flatnonzero(count >= 3).tolist():
        per_limb[c] = float(np.median(values[finite[:, c], c]))
    return np.where(count >= 3, per_limb, fallback)


def weak_limbs(pid: int, kp: np.ndarray, skeleton: Skeleton, support: np.ndarray,
               typical: np.ndarray) -> list[Reason]:
    """A person whose limbs the model's own fields support less than the frame's others.

    Parameters
    ----------
    pid
        The person's id.
    kp
        ``(K, 3)`` ``x, y, v`` (joints named in the reason).
    skeleton
        The project's skeleton.
    support
        ``(L,)`` this person's ``E`` per limb (a row of :func:`limb_support`).
    typical
        ``(L,)`` the frame's typical ``E`` per limb (:func:`typical_support`).

    Returns
    -------
    list of Reason
        At most one ``weak-limb`` reason naming the ends of the limbs below the typical ``E``
        by more than ``WEAK_SURE``.

    Notes
    -----
    ``shortfall = mean over the person's scored limbs of (typical_c - E_c)``; strength:
    ``shortfall`` ramped from ``WEAK_FROM`` (0) to ``WEAK_SURE`` (0.12). Comparing with the
    frame's own people rather than an absolute ``E`` makes the check independent of how
    strong a given network's fields are; a body whose limbs the field does not carry is often
    assembled from parts of several people, or half hidden. Common practice, no source.

    References
    ----------
    ``E``: Cao et al., CVPR 2017, Sec. 2.4.

    Examples
    --------
    >>> from app.model.skeleton import coco_body
    >>> sk = coco_body()
    >>> kp = np.zeros((17, 3)); kp[:, 2] = 2
    >>> typical = np.full(19, 0.8)
    >>> support = typical.copy(); support[[0, 1]] = 0.0     # left leg unsupported
    >>> r = weak_limbs(1, kp, sk, support, typical)
    >>> r[0].kind, r[0].joints, round(r[0].strength, 2)
    ('weak-limb', (11, 13, 15), 0.7)
    """
    ok = np.isfinite(support) & np.isfinite(typical)
    if not ok.any():
        return []
    gap = typical - support
    shortfall = float(gap[ok].mean())
    strength = ramp(shortfall, WEAK_FROM, WEAK_SURE)
    if strength <= 0:
        return []
    limbs = [c for c in np.flatnonzero(ok & (gap > WEAK_SURE)).tolist()]
    joints = sorted({j for c in limbs for j in skeleton.limbs[c]})
    names = limbs_text(skeleton, limbs)
    return [make_reason("weak-limb",
                    f"the model's fields support this body {shortfall:.2f} less than the "
                    f"frame's others" + (f" (weakest: {names})" if limbs else ""),
                    pid, joints, strength)]


def low_scores(pid: int, kp: np.ndarray, scores: np.ndarray | None,
               typical: float | None = None) -> list[Reason]:
    """A person whose joints the model scored lower than the frame's other people.

    Parameters
    ----------
    pid
        The person's id.
    kp
        ``(K, 3)`` ``x, y, v``.
    scores
        ``(K,)`` model score per joint, NaN where none; None: no check.
    typical
        The frame's median of people's mean scores, or None (fewer than three people): then
        the absolute ``LOW_SCORE`` (0.45) stands in.

    Returns
    -------
    list of Reason
        At most one ``low-score`` reason naming the joints scored below the reference.

    Notes
    -----
    Strength: ``reference - mean score`` ramped from ``LOW_FROM`` (0) to ``LOW_SURE`` (0.15).
    Common practice, no source.

    Examples
    --------
    >>> kp = np.zeros((3, 3)); kp[:, 2] = 2
    >>> r = low_scores(1, kp, np.array([0.2, 0.3, 0.4]), typical=0.6)
    >>> r[0].kind, round(r[0].strength, 2), r[0].joints
    ('low-score', 1.0, (0, 1, 2))
    """
    if scores is None:
        return []
    on = (kp[:, 2] > 0) & np.isfinite(scores)
    if not on.any():
        return []
    mean = float(scores[on].mean())
    reference = LOW_SCORE if typical is None else float(typical)
    strength = ramp(reference - mean, LOW_FROM, LOW_SURE)
    if strength <= 0:
        return []
    weakest = np.flatnonzero(on & (scores < reference))
    return [make_reason("low-score", f"the model scored this person's joints {mean:.2f} on average "
                    f"(the frame's people: {reference:.2f})", pid, weakest, strength)]


def field_near(maps: Any, limb: int, at: np.ndarray, radius: float) -> float:
    """The longest vector of ``limb``'s part affinity field within ``radius`` of ``at``.

    Parameters
    ----------
    maps
        Network maps with ``pafs`` ``(L, 2, H, W)`` and ``stride``.
    limb
        The limb's index in the skeleton.
    at
        ``(x, y)`` in image pixels.
    radius
        Image pixels.

    Returns
    -------
    float
        The largest ``|(field_x, field_y)|`` over the grid cells whose centres lie within
        ``radius`` of ``at`` (the cell nearest ``at`` when none does); 0 off the grid. A limb
        the model sees carries unit vectors along it (Cao et al. 2017, Eq. 8), so its field
        near one end is close to 1; a limb it cannot see shows little.

    Examples
    --------
    >>> from types import SimpleNamespace
    >>> fields = np.zeros((1, 2, 10, 10)); fields[0, 0, 2, 3:8] = 1.0     # a limb along row 2
    >>> maps = SimpleNamespace(pafs=fields, stride=1)
    >>> on, off = np.array([3.0, 2.0]), np.array([3.0, 7.0])
    >>> field_near(maps, 0, on, 1.5), field_near(maps, 0, off, 1.5)
    (1.0, 0.0)
    """
    field = maps.pafs[limb]
    s = float(maps.stride)
    h, w = field.shape[1:]
    # cell (r, c) stands for the pixel (c * s + (s - 1) / 2, r * s + (s - 1) / 2)
    cx, cy = (float(at[0]) - (s - 1) / 2) / s, (float(at[1]) - (s - 1) / 2) / s
    rc = max(radius / s, 0.5)
    c0, c1 = max(int(np.floor(cx - rc)), 0), min(int(np.ceil(cx + rc)), w - 1)
    r0, r1 = max(int(np.floor(cy - rc)), 0), min(int(np.ceil(cy + rc)), h - 1)
    if c0 > c1 or r0 > r1:
        return 0.0
    rows, cols = np.mgrid[r0:r1 + 1, c0:c1 + 1]
    near = np.hypot(cols - cx, rows - cy) <= rc
    if not near.any():
        return 0.0
    patch = np.asarray(field[:, r0:r1 + 1, c0:c1 + 1], dtype=np.float64)
    return float(np.hypot(patch[0], patch[1])[near].max())


def elsewhere_alone(kp: np.ndarray, alone: list[np.ndarray],
                    skip: frozenset[int] = frozenset(), shared: int = 0) -> list[int]:
    """The labelled joints of ``kp`` that the maps grouped alone place elsewhere or not at
    all, on the person of ``alone`` who shares most of them (``skip``: joints left out);
    none when that person shares fewer than ``shared`` of them.

    Parameters
    ----------
    kp
        ``(K, 3)`` ``x, y, v`` (``v > 0`` labelled).
    alone
        People grouped alone (:func:`grouped_alone`), ``(K, 3)`` ``x, y, score``, score 0
        where missing.
    skip
        Joints not to count (a person placed them).

    Returns
    -------
    list of int
        The joints, in order.

    Examples
    --------
    >>> kp = np.array([[10.0, 10, 2], [20, 10, 2], [30, 10, 2], [0, 0, 0]])
    >>> same = np.array([[10.0, 10, 0.9], [20, 10, 0.9], [30, 10, 0.9], [40, 10, 0.9]])
    >>> elsewhere_alone(kp, [same])
    []
    >>> moved = same.copy(); moved[2, 0] = 45; moved[1, 2] = 0   # one elsewhere, one missing
    >>> elsewhere_alone(kp, [moved]), elsewhere_alone(kp, [moved], frozenset({2}))
    ([1, 2], [1])
    >>> elsewhere_alone(kp, []), elsewhere_alone(kp, [], shared=2)
    ([0, 1, 2], [])
    """
    on = kp[:, 2] > 0
    if skip:
        on[list(skip)] = False
    best = np.zeros(len(kp), dtype=bool)
    for person in alone:
        same = on & (person[:, 2] > 0) & \
            (np.hypot(person[:, 0] - kp[:, 0], person[:, 1] - kp[:, 1]) < SAME_SPOT)
        if int(same.sum()) > int(best.sum()):
            best = same
    if int(best.sum()) < shared:
        return []
    return np.flatnonzero(on & ~best).tolist()


def held_tie(pid: int, kp: np.ndarray, alone: list[np.ndarray] | None,
             placed: frozenset[int] = frozenset(), names: Names | None = None) -> list[Reason]:
    """Labelled joints that the model's maps, grouped for this frame alone, put elsewhere.

    Parameters
    ----------
    pid
        The person's id.
    kp
        ``(K, 3)`` ``x, y, v``.
    alone
        The frame's people grouped alone (:func:`grouped_alone`), or None (no check).
    placed
        Joints a person placed or marked: left alone (the grouping's word on them is not the
        question).
    names
        How the joints are named in the text.

    Returns
    -------
    list of Reason
        At most one ``held-tie`` reason naming those joints.

    Notes
    -----
    Our own heuristic, no published source. Grouped with the frame before
    (``import-maps --frame-before``), a joint whose two owners were nearly tied in this frame
    goes where the frame before had it; the joints this frame's maps alone would give another
    owner (or none) are those near ties, and a wrong label is most often made of them. The
    strength is their count over ``HELD_FULL`` (3), at most 1. Labels that are not that
    grouping's at all (fewer than ``HELD_SHARED`` joints on its spots: drawn by a person or
    imported from elsewhere, never within a pixel of the maps' peaks) get nothing. Under the
    default grouping
    (each frame alone) the auto-labels are that grouping, so the check is silent until a
    person's edit (whose joints it skips) or an import makes labels of another origin.

    Examples
    --------
    >>> kp = np.array([[10.0, 10, 2], [20, 10, 2], [30, 10, 2]])
    >>> alone = [np.array([[10.0, 10, 0.9], [20, 10, 0.9], [50, 10, 0.9]])]
    >>> r = held_tie(1, kp, alone)
    >>> r[0].kind, r[0].joints, round(r[0].strength, 3)
    ('held-tie', (2,), 0.333)
    >>> held_tie(1, kp, alone, frozenset({2})), held_tie(1, kp, None)
    ([], [])
    """
    if alone is None:
        return []
    joints = elsewhere_alone(kp, alone, placed, HELD_SHARED)
    if not joints:
        return []
    listed = names.joints(joints) if names is not None else \
        ", ".join(str(j) for j in joints)
    return [make_reason("held-tie",
                        f"{listed} nearly as likely elsewhere: the model's maps of this frame "
                        "alone group them differently", pid, joints,
                        ramp(len(joints), 0, HELD_FULL))]


def limbs_text(skeleton: Skeleton, limbs: Sequence[int], most: int = 3) -> str:
    """The first ``most`` limbs by their ends' names ("left elbow to left wrist, ..."),
    `` ...`` when there are more.

    Examples
    --------
    >>> from app.model.skeleton import coco_body
    >>> limbs_text(coco_body(), [0])
    'left ankle to left knee'
    """
    return ", ".join(f"{joint_name(skeleton, skeleton.limbs[c][0])} to "
                     f"{joint_name(skeleton, skeleton.limbs[c][1])}" for c in limbs[:most]) + \
        (" ..." if len(limbs) > most else "")


def opposed_field(pid: int, kp: np.ndarray, skeleton: Skeleton,
                  support: np.ndarray) -> list[Reason]:
    """Labelled limbs whose part affinity field runs the other way.

    Parameters
    ----------
    pid
        The person's id.
    kp
        ``(K, 3)`` ``x, y, v``.
    skeleton
        The project's skeleton.
    support
        ``(L,)`` the person's ``E`` per limb (a row of :func:`limb_support`, NaN where a limb
        is not labelled).

    Returns
    -------
    list of Reason
        At most one ``opposed-field`` reason naming the ends of those limbs.

    Notes
    -----
    ``E`` (Cao et al., CVPR 2017, Sec. 2.4) is the mean of the field along the limb dotted
    with the limb's direction; a negative ``E`` means the field runs from the second joint to
    the first: the ends are likely exchanged or one is someone else's. The strength is the
    count of such limbs over ``OPPOSED_FULL`` (2), at most 1 (our choice).

    Examples
    --------
    >>> from app.model.skeleton import coco_body
    >>> sk = coco_body()
    >>> kp = np.zeros((17, 3)); kp[:, 2] = 2
    >>> support = np.full(19, 0.8); support[0] = -0.3
    >>> r = opposed_field(1, kp, sk, support)
    >>> r[0].kind, r[0].joints, r[0].strength
    ('opposed-field', (13, 15), 0.5)
    """
    against = [c for c in np.flatnonzero(np.isfinite(support) & (support < 0)).tolist()]
    if not against:
        return []
    joints = sorted({j for c in against for j in skeleton.limbs[c]})
    listed = limbs_text(skeleton, against)
    return [make_reason("opposed-field",
                        f"the model's field runs against {listed}: ends likely exchanged or "
                        "someone else's", pid, joints, ramp(len(against), 0, OPPOSED_FULL))]
