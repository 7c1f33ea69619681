"""Crowd checks: one person against the others of the frame.

People in a crowd often stand on one floor (a person's size in the image then follows from
where their feet stand; when it does not, the floor is not used), are not found twice, are
not cut in two, and the frame as a whole is more or less crowded. Each check returns
:class:`~app.analysis.triage.combine.Reason` records.

References
----------
D. Hoiem, A. A. Efros, M. Hebert, "Putting Objects in Perspective", CVPR 2006. J. Li et al.,
"CrowdPose: Efficient Crowded Scenes Pose Estimation and a New Benchmark", CVPR 2019.
"""

from __future__ import annotations

import math
from collections.abc import Mapping

import numpy as np
from scipy.stats import theilslopes

from app.analysis.anthropometry import limb_fractions, person_scale
from app.analysis.triage.body import feet_y, pair_index, stretched_limbs
from app.analysis.triage.combine import Reason, make_reason, ramp
from app.model.naming import Names
from app.model.skeleton import Skeleton

#: Two people whose shared joints lie a median of less than this fraction of stature apart
#: are tangled (0.15: sure at 0.05); below 0.1 the weaker is a duplicate (sure at 0.04).
TANGLE_FROM, TANGLE_SURE = 0.15, 0.05
DUPLICATE_FROM, DUPLICATE_SURE = 0.10, 0.04
#: Off the ground: ``|ln(scale / scale the frame's floor predicts at the feet)|`` counts from
#: 0.2 (people differ in stature by about 5 % and torso scales are rough) and is sure at 0.5;
#: the floor is fitted when at least ``GROUND_PEOPLE`` people show torso and ankles.
GROUND_FROM, GROUND_SURE = 0.2, 0.5
GROUND_PEOPLE = 5
#: One floor: the fitted floor must put at least this share of the people it was fitted on
#: within ``GROUND_FROM`` of their size; fewer, and they do not stand on one floor (risers,
#: a stage, stairs, people seated and standing), and the floor is not used.
GROUND_AGREE = 0.75


def ground_line(feet_y: np.ndarray, scales: np.ndarray) -> tuple[float, float] | None:
    """The frame's floor: ``scale = slope * feet_y + intercept`` fitted robustly, or None.

    Parameters
    ----------
    feet_y
        ``(P,)`` image row of each person's lower ankle (NaN where unknown).
    scales
        ``(P,)`` each person's stature in pixels from the torso (NaN where unknown).

    Returns
    -------
    tuple of float or None
        ``(slope, intercept)``; None with fewer than ``GROUND_PEOPLE`` usable people, a
        slope that is not positive (people nearer the camera stand lower and look larger), or
        people who do not stand on one floor.

    Notes
    -----
    For people of about one stature standing on one floor, seen by a camera with little
    roll, a person's height in the image is proportional to how far their feet stand below
    the horizon: ``h = k (y_feet - y_horizon)``, a straight line in ``y_feet``. The line is
    fitted with the Theil-Sen estimator (slope: the median of the pairwise slopes; intercept:
    the median of ``scale - slope * feet_y``; ``scipy.stats.theilslopes(..., method="joint")``),
    which a minority of wrongly labelled people cannot pull.

    The line stands for one floor only if it explains most people: a wrong label is the
    exception, so when fewer than ``GROUND_AGREE`` (3/4) of the people lie within
    ``GROUND_FROM`` of it (``|ln(scale / (slope feet_y + intercept))|``), they stand on
    several floor levels (risers, a stage, stairs) or do not stand at all (seated), and no
    floor is returned: :func:`off_ground` then says nothing rather than flag the people of
    every level but one.

    References
    ----------
    D. Hoiem, A. A. Efros, M. Hebert, "Putting Objects in Perspective", CVPR 2006 (object
    height against the image row of its base); P. K. Sen, "Estimates of the regression
    coefficient based on Kendall's tau", JASA 63, 1968.

    Examples
    --------
    >>> feet = np.array([400.0, 450, 500, 550, 600, 650])
    >>> scales = 0.8 * (feet - 200)
    >>> scales[2] = 500.0                                 # one outlier
    >>> [round(v, 2) for v in ground_line(feet, scales)]
    [0.8, -160.0]
    >>> risers = np.concatenate([scales[:3], 1.6 * scales[3:]])   # half of them a step up
    >>> ground_line(feet, risers) is None
    True
    """
    ok = np.isfinite(feet_y) & np.isfinite(scales)
    if ok.sum() < GROUND_PEOPLE:
        return None
    slope, intercept, _, _ = theilslopes(scales[ok], feet_y[ok], method="joint")
    if not slope > 0:
        return None
    expected = slope * feet_y[ok] + intercept
    with np.errstate(divide="ignore", invalid="ignore"):
        agree = np.abs(np.log(scales[ok] / expected)) <= GROUND_FROM
    if np.mean(agree & (expected > 0)) < GROUND_AGREE:
        return None
    return float(slope), float(intercept)


def off_ground(pid: int, kp: np.ndarray, skeleton: Skeleton, scale: float,
               line: tuple[float, float] | None) -> list[Reason]:
    """Feet where a body of this size would not stand, given the frame's floor.

    Parameters
    ----------
    pid
        The person's id.
    kp
        ``(K, 3)`` ``x, y, v``.
    skeleton
        Needs ``left_/right_ankle``.
    scale
        The person's stature in pixels from the torso.
    line
        The frame's floor from :func:`ground_line`, or None (no check).

    Returns
    -------
    list of Reason
        At most one ``off-ground`` reason naming the ankles.

    Notes
    -----
    ``r = ln(scale / (slope * feet_y + intercept))``; strength ``|r|`` ramped from
    ``GROUND_FROM`` (0.2) to ``GROUND_SURE`` (0.5). A torso far larger than its feet' place on
    the floor allows has usually been given the legs of someone farther away (and the reverse).
    It assumes people stand on one floor (not on a stage, stairs or a lifted partner's arms).

    References
    ----------
    Hoiem, Efros and Hebert, CVPR 2006 (see :func:`ground_line`).

    Examples
    --------
    >>> from app.model.skeleton import coco_body
    >>> kp = np.zeros((17, 3)); kp[[15, 16]] = [[100, 400, 2], [110, 398, 2]]
    >>> off_ground(1, kp, coco_body(), 165.0, (0.8, -160.0))      # the floor expects 160
    []
    >>> [round(r.strength, 2) for r in off_ground(1, kp, coco_body(), 250.0, (0.8, -160.0))]
    [0.82]
    """
    if line is None or not (np.isfinite(scale) and scale > 0):
        return []
    feet = feet_y(kp, skeleton)
    expected = line[0] * feet + line[1]
    if not (np.isfinite(feet) and expected > 0):
        return []
    r = math.log(scale / expected)
    strength = ramp(abs(r), GROUND_FROM, GROUND_SURE)
    if strength <= 0:
        return []
    ankles = [j for pair in pair_index(skeleton, "ankle") for j in pair if kp[j, 2] > 0]
    size = "larger" if r > 0 else "smaller"
    return [make_reason("off-ground",
                    f"the torso is {abs(math.exp(r) - 1):.0%} {size} than a body standing at "
                    "these feet on the frame's floor; are the legs another person's?",
                    pid, ankles, strength)]


def duplicates_and_splits(people: Mapping[int, np.ndarray], skeleton: Skeleton,
                          scales: Mapping[int, float],
                          scores: Mapping[int, np.ndarray] | None = None,
                          names: Names | None = None) -> list[Reason]:
    """Pairs of people that are really one body, or that share parts.

    Parameters
    ----------
    people
        Person id -> ``(K, 3)`` ``x, y, v``.
    skeleton
        The project's skeleton.
    scales
        Person id -> stature in pixels (:func:`body_scale`; NaN where unknown).
    scores
        Person id -> ``(K,)`` model scores, to tell the weaker of a duplicate pair.
    names
        How the frame's people are named in the text (default: tags in the order of
        ``people``).

    Returns
    -------
    list of Reason
        ``tangled`` for both of a close pair, ``duplicate`` for its weaker member, ``split``
        for both halves of a body cut in two; ``other`` is the other person of the pair.

    Notes
    -----
    For two people with at least three joint types labelled in both, ``d`` is the median
    distance between their like joints over the larger stature. A body found twice (an echo
    of the network, usually shifted by a tenth of a stature) or two bodies that swapped parts
    have a small ``d``; two people side by side or one behind the other differ by at least a
    shoulder width in most joints. ``tangled``: ``d`` ramped from ``TANGLE_FROM`` (0.15) to
    ``TANGLE_SURE`` (0.05), on both. ``duplicate``: ``d`` ramped from ``DUPLICATE_FROM`` (0.1)
    to ``DUPLICATE_SURE`` (0.04), on the weaker (lower summed joint score). Pairs with no
    joint type in common are a ``split`` when a limb joins them at a plausible length and
    their union stretches no limb (strength 1). The median distance is used rather than OKS,
    which falls to about 0.3 for a copy shifted by a tenth of a stature. Common practice, no
    source.

    Examples
    --------
    >>> from app.model.skeleton import coco_body
    >>> sk = coco_body()
    >>> a = np.zeros((17, 3)); a[:, 2] = 2; a[:, 0] = np.arange(17) * 7.0; a[:, 1] = 100
    >>> b = a.copy(); b[:, 0] += 6                        # the same body, shifted a little
    >>> r = duplicates_and_splits({1: a, 2: b}, sk, {1: 200.0, 2: 200.0},
    ...                           {1: np.full(17, 0.9), 2: np.full(17, 0.5)})
    >>> sorted((x.kind, x.person) for x in r)
    [('duplicate', 2), ('tangled', 1), ('tangled', 2)]
    """
    out: list[Reason] = []
    ids = list(people)
    names = names or Names.of_frame(skeleton, ids)
    fractions = limb_fractions(skeleton)
    for i, p in enumerate(ids):
        for q in ids[i + 1:]:
            a, b = people[p], people[q]
            on_a, on_b = a[:, 2] > 0, b[:, 2] > 0
            if not on_a.any() or not on_b.any():
                continue
            both = on_a & on_b
            if both.sum() >= 3:
                known = [v for v in (scales.get(p), scales.get(q)) if v and np.isfinite(v)]
                if not known:
                    continue
                scale = max(known)
                d = float(np.median(np.hypot(*(a[both, :2] - b[both, :2]).T))) / scale
                shared = tuple(int(j) for j in np.flatnonzero(both))
                strength = ramp(d, TANGLE_FROM, TANGLE_SURE)
                if strength > 0:
                    for pid, mate in ((p, q), (q, p)):
                        out.append(make_reason("tangled",
                                               f"its joints lie a median {d:.2f} of a body "
                                               f"height from {names.person(mate)}'s: parts may "
                                               "be swapped between them", pid, shared,
                                               strength, other=mate))
                strength = ramp(d, DUPLICATE_FROM, DUPLICATE_SURE)
                if strength > 0:
                    weaker = q if _strength(b, scores, q) <= _strength(a, scores, p) else p
                    keeper = p if weaker == q else q
                    out.append(make_reason("duplicate",
                                           f"the same body as {names.person(keeper)}, found "
                                           f"twice (joints a median {d:.2f} of a body height "
                                           "apart)", weaker, shared, strength, other=keeper))
                continue
            if both.any():
                continue
            link = _split_link(a, b, skeleton, fractions)
            if link is not None:
                j1, j2 = link
                for pid, j in ((p, j1), (q, j2)):
                    mate = q if pid == p else p
                    out.append(make_reason("split",
                                           f"looks like the rest of {names.person(mate)}'s "
                                           f"body (joined at {names.joint(j1)} to "
                                           f"{names.joint(j2)})", pid, (j,), 1.0, other=mate))
    return out


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
    if stretched_limbs(-1, union, skeleton, scale):
        return None
    return int(best[1]), int(best[2])


def crowd_index(people: Mapping[int, np.ndarray]) -> float:
    """The crowd index of Li et al. (CVPR 2019) over the people of one frame.

    Parameters
    ----------
    people
        Person id -> ``(K, 3)`` ``x, y, v``; people with fewer than two labelled joints have
        no box and are left out.

    Returns
    -------
    float
        0 for an empty frame.

    Notes
    -----
    ``CI = (1 / n) * sum_i N_b(i) / N_a(i)``: ``N_a(i)`` the labelled joints of person ``i``,
    ``N_b(i)`` the labelled joints of the other people that fall inside person ``i``'s box
    (here the tight box of ``i``'s labelled joints, borders included).

    References
    ----------
    J. Li, C. Wang, H. Zhu, Y. Mao, H.-S. Fang, C. Lu, "CrowdPose: Efficient Crowded Scenes
    Pose Estimation and a New Benchmark", CVPR 2019, Sec. 3 (crowd index).

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
