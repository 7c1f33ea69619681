"""From network maps to people: peak finding, the PAF line integral and grouping.

The input is what a bottom-up estimator outputs (or what :mod:`app.analysis.targets` draws):
``(K, H, W)`` confidence maps and ``(L, 2, H, W)`` part affinity fields on the target grid,
where grid cell ``(r, c)`` stands for the image point ``(c * s + (s - 1) / 2, r * s + (s - 1) / 2)``
for stride ``s``. Every position going in or out of this module is in image pixels.

References
----------
Z. Cao, T. Simon, S.-E. Wei, Y. Sheikh, "Realtime Multi-Person 2D Pose Estimation using Part
Affinity Fields", CVPR 2017, Sec. 2.4 (multi-person parsing using PAFs).
"""

from __future__ import annotations

import logging
from collections import deque
from collections.abc import Sequence
from typing import Any

import numpy as np

from app.analysis.assignment import linear_sum_assignment
from app.errors import BadInput

log = logging.getLogger(__name__)

__all__ = [
    "MATCHING_METHODS",
    "PRIOR_BONUS",
    "PRIOR_RADIUS",
    "find_peaks",
    "group_people",
    "limb_scores",
    "match_limb",
    "spanning_tree",
]

#: How candidate connections of one limb are paired: see :func:`match_limb`.
MATCHING_METHODS = ("greedy", "optimal")

#: How much higher a candidate connection weighs in the pairing of its limb when both of its
#: ends lie near the two ends of one person of the frame before (``previous`` of
#: :func:`group_people`). Our own choice, no published source: set on the development demo
#: seeds 61-66 (see ``group_people``'s Notes), in the units of the connection score (a line
#: integral of a unit field, at most 1).
PRIOR_BONUS = 0.2

#: How near, in image pixels, a part must lie to the same joint of a person of the frame
#: before for the bonus to apply. Our own choice with :data:`PRIOR_BONUS`, same seeds.
PRIOR_RADIUS = 12.0


def find_peaks(
    confidence_maps: Any, threshold: float = 0.1, stride: int = 1
) -> list[np.ndarray]:
    """Local maxima of each confidence map, refined below the cell, in image pixels.

    Parameters
    ----------
    confidence_maps
        ``(K, H, W)`` float maps.
    threshold
        A peak must be strictly above this value (default 0.1).
    stride
        Image pixels per grid cell.

    Returns
    -------
    list of numpy.ndarray
        ``K`` arrays ``(n_j, 3)`` float64 ``x, y, score``, highest score first; ``score`` is the
        map's value at the peak cell.

    Notes
    -----
    Non-maximum suppression over the 3 x 3 neighbourhood, vectorised over the cells above the
    threshold: a cell is a peak when it is greater than its neighbours before it in raster
    order and not less than those after it, so a plateau of equal cells gives one peak.

    Refinement: along x and along y separately, a parabola through the logarithms of the three
    values (left, centre, right) has its vertex at
    ``delta = (ln l - ln r) / (2 (ln l - 2 ln c + ln r))`` cells from the centre. A Gaussian peak
    is a parabola in the log domain, so for an isolated peak of the shape
    :func:`app.analysis.targets.confidence_maps` draws this is exact up to rounding. Where a
    neighbour is zero (cut, or off the grid on one side) the parabola goes through the values
    themselves; on the grid's edge the position stays at the cell. ``delta`` is kept within
    half a cell. Cell ``(r + dy, c + dx)`` maps to image point
    ``((c + dx) * s + (s - 1) / 2, (r + dy) * s + (s - 1) / 2)``.

    References
    ----------
    Cao et al., CVPR 2017, Sec. 2.4 (part candidates by non-maximum suppression). Three-point
    Gaussian (log-parabola) peak interpolation: common practice, no source.

    Examples
    --------
    >>> from app.analysis.targets import confidence_maps
    >>> maps = confidence_maps(np.array([[[13.3, 9.6, 2]]]), (32, 24), stride=4, sigma=5.0)
    >>> find_peaks(maps, stride=4)[0].round(3)
    array([[13.3  ,  9.6  ,  0.998]])
    """
    maps = np.asarray(confidence_maps)
    if maps.dtype.kind != "f":
        maps = maps.astype(np.float64)
    if maps.ndim != 3:
        raise BadInput(f"confidence maps have shape {maps.shape}", where="confidence_maps",
                       hint="give (K, H, W)")
    num, height, width = maps.shape
    flat = maps.reshape(-1)
    cand = np.flatnonzero(flat > threshold)
    k, rc = np.divmod(cand, height * width)
    r, c = np.divmod(rc, width)
    centre = flat[cand].astype(np.float64)
    peak = np.ones(cand.size, dtype=bool)
    for dr, dc, strict in (
        (-1, -1, True), (-1, 0, True), (-1, 1, True), (0, -1, True),
        (0, 1, False), (1, -1, False), (1, 0, False), (1, 1, False),
    ):
        rr, cc = r + dr, c + dc
        inside = (rr >= 0) & (rr < height) & (cc >= 0) & (cc < width)
        other = np.full(cand.size, -np.inf)
        other[inside] = flat[cand[inside] + dr * width + dc]
        peak &= centre > other if strict else centre >= other
    k, r, c, cand, centre = k[peak], r[peak], c[peak], cand[peak], centre[peak]

    dx = _vertex(flat, cand, c, width, 1)
    dy = _vertex(flat, cand, r, height, width)
    x = (c + dx) * stride + (stride - 1) / 2.0
    y = (r + dy) * stride + (stride - 1) / 2.0
    order = np.lexsort((cand, -centre, k))
    k, x, y, centre = k[order], x[order], y[order], centre[order]
    bounds = np.searchsorted(k, np.arange(num + 1))
    table = np.stack([x, y, centre], axis=1)
    return [table[bounds[j] : bounds[j + 1]] for j in range(num)]


def limb_scores(
    pafs_c: Any,
    starts: Any,
    ends: Any,
    stride: int = 1,
    num_samples: int = 10,
    threshold: float = 0.05,
) -> tuple[np.ndarray, np.ndarray]:
    """How well the field of one limb supports each candidate connection start -> end.

    Parameters
    ----------
    pafs_c
        ``(2, H, W)``: the x and y channels of the limb's part affinity field.
    starts
        ``(n1, 2)`` candidate positions of the limb's first joint, image pixels.
    ends
        ``(n2, 2)`` candidate positions of its second joint, image pixels.
    stride
        Image pixels per grid cell.
    num_samples
        Points sampled along each candidate segment (default 10).
    threshold
        A sample counts as supporting when its dot product exceeds this (default 0.05).

    Returns
    -------
    mean : numpy.ndarray
        ``(n1, n2)`` float64: the approximated line integral ``E``; 0 where start and end
        coincide.
    support : numpy.ndarray
        ``(n1, n2)`` float64: the fraction of the samples above ``threshold``.

    Notes
    -----
    ``E = integral_0^1 L_c(p(u)) . (d2 - d1) / ||d2 - d1|| du`` with ``p(u) = (1 - u) d1 + u d2``,
    approximated by the mean over ``num_samples`` (default 10) evenly spaced ``u`` from 0 to 1,
    both ends included. The field is read between cells by bilinear interpolation; an image
    point ``p`` sits at grid coordinate ``(p - (s - 1) / 2) / s``, and points beyond the grid
    take the value of the nearest edge cell. All ``n1 x n2`` pairs are scored at once.

    References
    ----------
    Cao et al., CVPR 2017, Sec. 2.4, Eq. 10-11.

    Examples
    --------
    >>> field = np.zeros((2, 6, 8)); field[0] = 1.0     # points along +x everywhere
    >>> mean, support = limb_scores(field, [[1.0, 1.0]], [[6.0, 1.0], [1.0, 5.0]])
    >>> mean.tolist(), support.tolist()
    ([[1.0, 0.0]], [[1.0, 0.0]])
    """
    field = np.asarray(pafs_c)
    if field.ndim != 3 or field.shape[0] != 2:
        raise BadInput(f"the field has shape {field.shape}", where="pafs_c",
                       hint="give one limb's (2, H, W) field")
    a = np.asarray(starts, dtype=np.float64).reshape(-1, 2)
    b = np.asarray(ends, dtype=np.float64).reshape(-1, 2)
    if num_samples < 1:
        raise BadInput(f"num_samples = {num_samples} must be at least 1", where="num_samples")
    n1, n2 = a.shape[0], b.shape[0]
    dots = _field_dots(field, np.repeat(a, n2, axis=0), np.tile(b, (n1, 1)),
                       np.linspace(0.0, 1.0, num_samples), stride)
    mean = dots.mean(axis=1).reshape(n1, n2)
    support = (dots > threshold).mean(axis=1).reshape(n1, n2)
    return mean, support


def _field_dots(
    field: np.ndarray, a: np.ndarray, b: np.ndarray, u: np.ndarray, stride: int
) -> np.ndarray:
    """``(m, S)``: the field, read bilinearly at ``a + u (b - a)``, dotted with ``b - a``'s
    unit vector (0 where ``a == b``). ``a``, ``b`` are ``(m, 2)`` image points."""
    height, width = field.shape[1:]
    d = b - a
    norm = np.hypot(d[:, 0], d[:, 1])
    with np.errstate(invalid="ignore", divide="ignore"):
        unit = np.where(norm[:, None] > 0, d / norm[:, None], 0.0)
    offset = (stride - 1) / 2.0
    gx = np.clip((a[:, 0, None] + u * d[:, 0, None] - offset) / stride, 0, width - 1)
    gy = np.clip((a[:, 1, None] + u * d[:, 1, None] - offset) / stride, 0, height - 1)
    x0 = np.minimum(gx.astype(np.int64), max(width - 2, 0))  # gx >= 0: truncation is floor
    y0 = np.minimum(gy.astype(np.int64), max(height - 2, 0))
    fx, fy = gx - x0, gy - y0
    step_x = 1 if width > 1 else 0
    step_y = width if height > 1 else 0
    i00 = y0 * width + x0
    i10 = i00 + step_y
    total = np.zeros(gx.shape)
    for ch in range(2):
        v = field[ch].reshape(-1)
        top = v[i00] + (v[i00 + step_x] - v[i00]) * fx
        bottom = v[i10] + (v[i10 + step_x] - v[i10]) * fx
        total += (top + (bottom - top) * fy) * unit[:, ch, None]
    return total


def match_limb(
    scores: np.ndarray, valid: np.ndarray, method: str = "optimal"
) -> list[tuple[int, int]]:
    """Pair candidates of one limb so that no part is used twice.

    Parameters
    ----------
    scores
        ``(n1, n2)`` connection scores.
    valid
        ``(n1, n2)`` bool: which candidates passed the tests.
    method
        ``"greedy"``: take valid candidates from the highest score down, skipping any that
        reuses a part (Cao et al., CVPR 2017, Sec. 2.4). ``"optimal"``: the pairing that
        maximises the summed score of valid candidates (``scipy.optimize.linear_sum_assignment``
        with invalid candidates weighing 0).

    Returns
    -------
    list of (int, int)
        ``(start index, end index)`` pairs, in the order they were taken (greedy) or by start
        index (optimal).

    Examples
    --------
    >>> s = np.array([[0.9, 0.8], [0.85, 0.1]])
    >>> match_limb(s, s > 0.05, "greedy"), match_limb(s, s > 0.05, "optimal")
    ([(0, 0), (1, 1)], [(0, 1), (1, 0)])
    """
    if method == "greedy":
        i, j = np.nonzero(valid)
        order = np.argsort(-scores[i, j], kind="stable")
        used_a: set[int] = set()
        used_b: set[int] = set()
        pairs = []
        limit = min(scores.shape)
        for a, b in zip(i[order].tolist(), j[order].tolist(), strict=True):
            if a in used_a or b in used_b:
                continue
            used_a.add(a)
            used_b.add(b)
            pairs.append((a, b))
            if len(pairs) == limit:
                break
        return pairs
    if method == "optimal":
        if not valid.any():
            return []
        rows, cols = linear_sum_assignment(np.where(valid, scores, 0.0), maximize=True)
        return [(int(a), int(b)) for a, b in zip(rows, cols, strict=True) if valid[a, b]]
    raise BadInput(f"unknown matching method {method!r}", where="matching",
                   hint="one of " + ", ".join(MATCHING_METHODS))


def spanning_tree(num_joints: int, limbs: Any) -> tuple[np.ndarray, np.ndarray]:
    """Split a skeleton's limbs into a spanning tree (forest) and the remaining limbs.

    Parameters
    ----------
    num_joints
        ``K``.
    limbs
        ``(L, 2)`` 0-based joint index pairs; the graph may have cycles or be disconnected.

    Returns
    -------
    tree : numpy.ndarray
        Indices into ``limbs`` of the tree limbs, in breadth-first order: every tree limb after
        the first of its component has exactly one joint already reached by the limbs before it.
    extra : numpy.ndarray
        Indices of the other limbs (those closing cycles), ascending.

    Notes
    -----
    Breadth-first search from the joint with the most limbs (the lowest index among equals;
    in the COCO body that is the left shoulder), taking each joint's limbs in list order; each
    further component starts the same way. Why: breadth-first search gives every joint the
    fewest links to the root, so a part the detector misses cuts off as few others as possible,
    and the best-connected joints are on the torso, the largest and most reliably seen parts.
    The limbs left out are not thrown away: grouping uses them as extra evidence.

    References
    ----------
    Breadth-first search (common practice, no source); assembling along a tree follows Cao et
    al., CVPR 2017, Sec. 2.4.

    Examples
    --------
    >>> tree, extra = spanning_tree(4, [(0, 1), (1, 2), (2, 0), (2, 3)])
    >>> tree.tolist(), extra.tolist()
    ([1, 2, 3], [0])
    >>> tree, extra = spanning_tree(4, [(0, 1), (1, 2), (2, 0), (2, 3), (3, 1)])
    >>> tree.tolist(), extra.tolist()
    ([0, 1, 4], [2, 3])
    """
    pairs = np.asarray(limbs, dtype=np.int64).reshape(-1, 2)
    if pairs.size and (pairs.min() < 0 or pairs.max() >= num_joints):
        raise BadInput(f"a limb names a joint outside 0..{num_joints - 1}", where="limbs")
    touching: list[list[int]] = [[] for _ in range(num_joints)]
    for n, (a, b) in enumerate(pairs.tolist()):
        touching[a].append(n)
        touching[b].append(n)
    degree = np.array([len(t) for t in touching])
    reached = np.zeros(num_joints, dtype=bool)
    tree: list[int] = []
    for root in np.argsort(-degree, kind="stable").tolist():
        if reached[root] or degree[root] == 0:
            continue
        reached[root] = True
        queue = deque([root])
        while queue:
            joint = queue.popleft()
            for n in touching[joint]:
                a, b = pairs[n]
                other = int(b if a == joint else a)
                if not reached[other]:
                    reached[other] = True
                    tree.append(n)
                    queue.append(other)
    in_tree = np.zeros(len(pairs), dtype=bool)
    in_tree[tree] = True
    return np.asarray(tree, dtype=np.int64), np.nonzero(~in_tree)[0]


def group_people(
    confidence_maps: Any,
    pafs: Any,
    limbs: Any,
    stride: int = 1,
    *,
    peak_threshold: float = 0.1,
    num_samples: int = 10,
    sample_threshold: float = 0.05,
    min_support: float = 0.8,
    min_limb_score: float = 0.0,
    max_limb_length: float | None = None,
    min_parts: int = 4,
    min_mean_score: float = 0.4,
    matching: str = "optimal",
    previous: Sequence[Any] | None = None,
    prior_bonus: float = PRIOR_BONUS,
    prior_radius: float = PRIOR_RADIUS,
) -> list[np.ndarray]:
    """Assemble detected parts into people using the part affinity fields.

    Parameters
    ----------
    confidence_maps
        ``(K, H, W)`` confidence maps.
    pafs
        ``(L, 2, H, W)`` part affinity fields, one per limb (x channel, then y).
    limbs
        ``(L, 2)`` 0-based joint index pairs; the fields point from the first joint to the
        second. Cycles are allowed (the COCO skeleton has them).
    stride
        Image pixels per grid cell.
    peak_threshold
        Least confidence of a part candidate (default 0.1).
    num_samples
        Samples of the line integral (default 10, see :func:`limb_scores`).
    sample_threshold
        A sample supports a connection when its dot product exceeds this (default 0.05).
    min_support
        Least fraction of supporting samples for a connection (default 0.8).
    min_limb_score
        A connection's score (see Notes) must exceed this (default 0).
    max_limb_length
        Connections longer than this many image pixels are penalised (default: half the image
        height, ``H * stride / 2``).
    min_parts
        People with fewer parts are dropped (default 4).
    min_mean_score
        People whose score per part is lower are dropped (default 0.4).
    matching
        How each limb's candidates are paired: ``"optimal"`` (default) or ``"greedy"``; see
        :func:`match_limb` and the Notes for why optimal is the default.
    previous
        The people of the frame before in a sequence, when grouping frames in order: ``(K, 3)``
        arrays ``x, y, s`` in image pixels, a joint counting as there where ``s > 0`` (the
        ``score`` column this function returns, or a visibility flag). Near ties in the
        pairing are then decided as on that frame (Notes, step 3). None (default): every
        frame is grouped alone, exactly as without this argument.
    prior_bonus
        What a connection matching a person of ``previous`` adds to its weight in the pairing
        (default :data:`PRIOR_BONUS`, 0.2).
    prior_radius
        How near, in image pixels, both ends must lie to that person's two joints (default
        :data:`PRIOR_RADIUS`, 12).

    Returns
    -------
    list of numpy.ndarray
        One ``(K, 3)`` float64 array ``x, y, score`` per person, image pixels; a missing joint
        is ``NaN, NaN, 0``; ``score`` is the part's confidence. Sorted by the person's total
        score, highest first (ties keep the order of assembly, which is deterministic).

    Notes
    -----
    1. Parts: :func:`find_peaks`.
    2. Connections: for every limb and every pair of candidates of its two joints,
       ``E`` and the supporting fraction from :func:`limb_scores`; the connection score is
       ``E + min(max_limb_length / ||d2 - d1|| - 1, 0)`` (the distance prior of Cao et al.'s
       released code, from memory). A candidate counts when its score exceeds
       ``min_limb_score`` and at least ``min_support`` of the samples support it. (For
       speed, the few samples whose failure alone would rule a pair out are scored for every
       pair first, and the rest only for pairs still in the running; the result is the same.)
    3. Per limb, candidates are paired one to one (:func:`match_limb`). With ``previous``,
       a valid candidate whose start lies within ``prior_radius`` of the limb's first joint
       and whose end lies within ``prior_radius`` of its second joint of one and the same
       person of the frame before weighs ``prior_bonus`` more in the pairing (only there: the
       connection keeps its own score in steps 4-6, and no candidate is made valid by it).
    4. Assembly along the spanning tree of :func:`spanning_tree`, limbs in breadth-first order:
       a connection whose parent-side part already belongs to a person gives that person the
       child-side part; otherwise it starts a new person.
    5. The remaining limbs are extra evidence: a connection inside one person adds its score
       to that person; one between two people with no joint type in common merges them (a
       person split by a missed part on the tree path is joined again); one from a person to
       a free part of a type the person lacks attaches that part; one between two people that
       share a joint type is rejected.
    6. A person's score is the sum of their parts' confidences and their connections' scores
       (tree and confirming extra limbs). People with fewer than ``min_parts`` parts or a
       score per part below ``min_mean_score`` are dropped.

    The defaults (peak threshold 0.1, sample threshold 0.05, 80 % support, connection score
    above 0, at least 4 parts, score per part at least 0.4) are those of Cao et al.'s released
    code, from memory; its score per part is likewise (part confidences + connection scores)
    divided by the number of parts.

    Greedy or optimal pairing (step 3), measured by
    ``tests/analysis/test_association.py::test_default_matching_is_not_worse_than_the_alternative``:
    20 synthetic crowds of 30 people in 1920 x 1080 at stride 8 (hips at least 0.12 of the
    tallest stature apart, so bodies overlap), maps drawn by :mod:`app.analysis.targets`
    (sigma 8, limb width 8). People recovered at OKS >= 0.9 out of 600: clean maps, greedy 562
    and optimal 577; with Gaussian noise of sd 0.02 on every value and joints jittered by up to
    2 pixels, greedy 554 and optimal 582. Both invent almost nobody (600-601 people returned).
    Where bodies overlap, a wrong connection running through two people's overlapping fields
    can score a little higher than either true one; greedy takes it first and strands both
    true partners, while the assignment weighs the two true connections together and keeps
    them. Optimal assignment is therefore the default; it costs about the same time.

    Grouping frames in order with the frame before (``previous``): where dancers overlap, a
    wrong connection can score nearly as high as the true one, and motion of a few pixels
    flips such a near tie from frame to frame, so an error comes and goes instead of lasting
    while the dancers stay tangled (see :mod:`app.demo.maps`). The bonus makes the pairing
    keep the frame before's choice unless the fields clearly favour another. The bonus 0.2
    and radius 12 px are our own choice (no published source), set on the development demo
    seeds 61-66: there a wrong labelled joint is wrong again on the next frame in 56.6 % of
    cases (44.8 % grouped frame by frame), and the annotator actions to fix every wrong joint
    frame by frame fall from 2,257 to 2,112 (fewer wrong joints); on the held-out seeds 91-96,
    61.8 % (51.6 %) and 2,266 -> 1,969 (README "Sequences", ``import-maps --frame-before``). A
    wrong choice is carried on as much as a right one; the first frame of a sequence, or of a
    run of frames grouped apart, has no frame before.

    Limitations: two parts of one type closer than about a grid cell give a single peak, so
    one person loses that part and the parts beyond it. Parts are joined only through labelled
    or detected limbs: a person whose detected parts do not form one connected piece of the
    limb graph comes out as several pieces, those with fewer than ``min_parts`` parts dropped.
    When two people stand so that the same limb of both lies on one line and their bands
    overlap (shoulders or hips of two people side by side at the same height, overlapping),
    the fields support the crossed pairing as much as the true one and either may be chosen.

    References
    ----------
    Cao et al., "Realtime Multi-Person 2D Pose Estimation using Part Affinity Fields",
    CVPR 2017, Sec. 2.4.

    Examples
    --------
    >>> from app.analysis.targets import confidence_maps, part_affinity_fields
    >>> limbs = [(0, 1), (1, 2), (2, 3)]
    >>> truth = np.array([[[10, 10, 2], [10, 30, 2], [10, 50, 2], [30, 50, 2]],
    ...                   [[60, 10, 2], [60, 30, 2], [60, 50, 2], [40, 50, 2]]], float)
    >>> maps = confidence_maps(truth, (80, 64), 4, 4.0)
    >>> fields = part_affinity_fields(truth, limbs, (80, 64), 4, 4.0)
    >>> people = group_people(maps, fields, limbs, stride=4)
    >>> len(people), sorted(round(float(p[0, 0]), 1) for p in people)
    (2, [10.0, 60.0])
    """
    maps = np.asarray(confidence_maps)
    fields = np.asarray(pafs)
    pairs = np.asarray(limbs, dtype=np.int64).reshape(-1, 2)
    if maps.ndim != 3:
        raise BadInput(f"confidence maps have shape {maps.shape}", where="confidence_maps",
                       hint="give (K, H, W)")
    num_joints, height, width = maps.shape
    if fields.shape != (pairs.shape[0], 2, height, width):
        raise BadInput(
            f"fields have shape {fields.shape}, expected {(pairs.shape[0], 2, height, width)}",
            where="pafs", hint="give (L, 2, H, W) on the confidence maps' grid, one per limb",
        )
    if matching not in MATCHING_METHODS:
        raise BadInput(f"unknown matching method {matching!r}", where="matching",
                       hint="one of " + ", ".join(MATCHING_METHODS))
    if num_samples < 1:
        raise BadInput(f"num_samples = {num_samples} must be at least 1", where="num_samples")
    longest = height * stride / 2.0 if max_limb_length is None else float(max_limb_length)
    tree, extra = spanning_tree(num_joints, pairs)
    peaks = find_peaks(maps, threshold=peak_threshold, stride=stride)

    before = _previous_people(previous, num_joints)
    u = np.linspace(0.0, 1.0, num_samples)
    screen, rest, need = _screening(num_samples, min_support)
    connections: list[list[tuple[int, int, float]]] = []
    for c, (j1, j2) in enumerate(pairs.tolist()):
        a, b = peaks[j1], peaks[j2]
        if len(a) == 0 or len(b) == 0 or need > num_samples:
            connections.append([])
            continue
        ia = np.repeat(np.arange(len(a)), len(b))
        ib = np.tile(np.arange(len(b)), len(a))
        length = np.hypot(b[ib, 0] - a[ia, 0], b[ib, 1] - a[ia, 1])
        keep = length > 0
        first = _field_dots(fields[c], a[ia, :2], b[ib, :2], u[screen], stride)
        if need > 0:
            keep &= (first > sample_threshold).any(axis=1)
        first = first[keep]
        ia, ib, length = ia[keep], ib[keep], length[keep]
        dots = np.concatenate(
            [first, _field_dots(fields[c], a[ia, :2], b[ib, :2], u[rest], stride)], axis=1
        )
        with np.errstate(divide="ignore"):
            score = dots.mean(axis=1) + np.minimum(longest / length - 1.0, 0.0)
        support = (dots > sample_threshold).sum(axis=1)
        ok = (score > min_limb_score) & (support >= need)
        table = np.zeros((len(a), len(b)))
        valid = np.zeros((len(a), len(b)), dtype=bool)
        table[ia[ok], ib[ok]] = score[ok]
        valid[ia[ok], ib[ok]] = True
        weights = table
        if before is not None and valid.any():
            bonus = _prior_bonus(a, b, before[:, j1], before[:, j2], prior_radius)
            if bonus is not None:
                weights = table + np.where(valid & bonus, prior_bonus, 0.0)
        connections.append(
            [(p, q, float(table[p, q])) for p, q in match_limb(weights, valid, matching)]
        )

    people = _assemble(num_joints, pairs, tree, extra, connections, [len(p) for p in peaks])
    out: list[tuple[float, int, np.ndarray]] = []
    for n, (members, link_score) in enumerate(people):
        found = np.nonzero(members >= 0)[0]
        if found.size < min_parts:
            continue
        person = np.full((num_joints, 3), np.nan)
        person[:, 2] = 0.0
        for j in found.tolist():
            person[j] = peaks[j][members[j]]
        total = float(person[found, 2].sum()) + link_score
        if total / found.size < min_mean_score:
            continue
        out.append((total, n, person))
    out.sort(key=lambda t: (-t[0], t[1]))
    log.debug("grouped %d people from %d parts", len(out), sum(len(p) for p in peaks))
    return [p for _, _, p in out]


def _assemble(
    num_joints: int,
    pairs: np.ndarray,
    tree: np.ndarray,
    extra: np.ndarray,
    connections: list[list[tuple[int, int, float]]],
    num_peaks: list[int],
) -> list[tuple[np.ndarray, float]]:
    """Join connections into people: along the tree first, then with the extra limbs."""
    members: list[np.ndarray] = []  # per person: (K,) peak index per joint, -1 when missing
    scores: list[float] = []
    alive: list[bool] = []
    owner = [np.full(n, -1, dtype=np.int64) for n in num_peaks]

    def new_person() -> int:
        members.append(np.full(num_joints, -1, dtype=np.int64))
        scores.append(0.0)
        alive.append(True)
        return len(members) - 1

    def give(who: int, joint: int, peak: int) -> None:
        members[who][joint] = peak
        owner[joint][peak] = who

    reached = np.zeros(num_joints, dtype=bool)
    for c in tree.tolist():
        j1, j2 = pairs[c].tolist()
        flip = reached[j2] and not reached[j1]
        parent, child = (j2, j1) if flip else (j1, j2)
        reached[j1] = reached[j2] = True
        for p, q, s in connections[c]:
            top, bottom = (q, p) if flip else (p, q)
            who = int(owner[parent][top])
            if who < 0:
                who = new_person()
                give(who, parent, top)
            if members[who][child] >= 0 or owner[child][bottom] >= 0:
                continue
            give(who, child, bottom)
            scores[who] += s

    for c in extra.tolist():
        j1, j2 = pairs[c].tolist()
        for p, q, s in connections[c]:
            a, b = int(owner[j1][p]), int(owner[j2][q])
            if a >= 0 and a == b:
                scores[a] += s
            elif a >= 0 and b >= 0:
                if ((members[a] >= 0) & (members[b] >= 0)).any():
                    continue  # both have a part of one type: the connection is rejected
                for j in np.nonzero(members[b] >= 0)[0].tolist():
                    give(a, j, int(members[b][j]))
                scores[a] += scores[b] + s
                alive[b] = False
            elif a >= 0:
                if members[a][j2] < 0:
                    give(a, j2, q)
                    scores[a] += s
            elif b >= 0:
                if members[b][j1] < 0:
                    give(b, j1, p)
                    scores[b] += s
            else:
                who = new_person()
                give(who, j1, p)
                give(who, j2, q)
                scores[who] += s
    return [(m, s) for m, s, keep in zip(members, scores, alive, strict=True) if keep]


def _previous_people(previous: Sequence[Any] | None, num_joints: int) -> np.ndarray | None:
    """``previous`` of :func:`group_people` as one ``(M, K, 3)`` array, None when empty."""
    if previous is None or len(previous) == 0:
        return None
    before = np.asarray([np.asarray(p, dtype=np.float64) for p in previous])
    if before.ndim != 3 or before.shape[1:] != (num_joints, 3):
        raise BadInput(f"the people of the frame before have shape {before.shape}",
                       where="previous", hint=f"give ({num_joints}, 3) arrays x, y, score")
    return before


def _prior_bonus(a: np.ndarray, b: np.ndarray, first: np.ndarray, second: np.ndarray,
                 radius: float) -> np.ndarray | None:
    """``(n1, n2)`` bool: candidate ``a[p] -> b[q]`` has both ends within ``radius`` of the
    two joints (``first``, ``second``: ``(M, 3)``) of one person of the frame before; None
    when no such person has both joints."""
    both = (first[:, 2] > 0) & (second[:, 2] > 0)
    if not both.any():
        return None
    first, second = first[both, :2], second[both, :2]
    near_a = np.hypot(a[:, None, 0] - first[None, :, 0], a[:, None, 1] - first[None, :, 1])
    near_b = np.hypot(b[:, None, 0] - second[None, :, 0], b[:, None, 1] - second[None, :, 1])
    hits = (near_a < radius).astype(np.int64) @ (near_b < radius).astype(np.int64).T
    return hits > 0


def _screening(num_samples: int, min_support: float) -> tuple[np.ndarray, np.ndarray, int]:
    """Which samples to score first, the others, and how many must support a connection.

    With ``need`` supporting samples required, ``num_samples - need + 1`` failing samples
    rule a connection out, so those are scored for every pair and the rest only for pairs
    with at least one of them supporting. The outcome is the same as scoring everything.
    """
    counts = np.arange(num_samples + 1)
    enough = counts[counts / num_samples >= min_support]
    need = int(enough[0]) if enough.size else num_samples + 1
    n_screen = num_samples - need + 1
    if need == 0 or n_screen >= num_samples - 1:
        return np.arange(num_samples), np.arange(0), need
    screen = 1 + np.round(np.linspace(0, num_samples - 3, n_screen)).astype(np.int64)
    return screen, np.setdiff1d(np.arange(num_samples), screen), need


def _vertex(flat: np.ndarray, cand: np.ndarray, pos: np.ndarray, n: int, step: int) -> np.ndarray:
    """Sub-cell offset of each peak along one axis (see :func:`find_peaks`)."""
    delta = np.zeros(cand.size)
    inner = (pos > 0) & (pos < n - 1)
    idx = cand[inner]
    left, mid, right = (flat[i].astype(np.float64) for i in (idx - step, idx, idx + step))
    positive = (left > 0) & (right > 0) & (mid > 0)
    with np.errstate(divide="ignore", invalid="ignore"):
        ll = np.log(np.where(positive, left, 1.0))
        lm = np.log(np.where(positive, mid, 1.0))
        lr = np.log(np.where(positive, right, 1.0))
        left = np.where(positive, ll, left)
        mid = np.where(positive, lm, mid)
        right = np.where(positive, lr, right)
        curve = left - 2 * mid + right
        shift = np.where(curve < 0, 0.5 * (left - right) / curve, 0.0)
    delta[inner] = np.clip(np.nan_to_num(shift), -0.5, 0.5)
    return delta
