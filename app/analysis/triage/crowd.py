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
from app.model.naming import Names, joint_name
from app.model.skeleton import Skeleton
from app.wording import count

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


# ------------------------------------------------------------------ who hides whom

#: Upright, the ankles stand this fraction of stature below the shoulders (Drillis and Contini
#: landmark heights via Winter, Fig. 4.1, from memory: 0.818 - 0.039).
_SHOULDER_TO_ANKLE = 0.779
#: Half the width of a thigh or a shank, as a fraction of stature (a mid-thigh of about 0.1
#: of stature across, a calf a little less; from memory): the legs' capsules of :func:`covers`.
LEG_HALF_WIDTH = 0.045
#: A person counts as nearer than another when their feet stand this fraction of the
#: other's stature lower in the image.
NEARER_BY = 0.02


def stand_rows(people: Mapping[int, np.ndarray], skeleton: Skeleton,
               torso: Mapping[int, float],
               line: tuple[float, float] | None = None) -> dict[int, float]:
    """Where each person stands: the image row of their feet; lower (larger) is nearer.

    Parameters
    ----------
    people
        Person id -> ``(K, 3)`` ``x, y, v``.
    skeleton
        The project's skeleton.
    torso
        Person id -> stature in pixels from the torso (:func:`person_scale`; NaN where none).
    line
        The frame's floor (:func:`ground_line`), or None.

    Returns
    -------
    dict
        Person id -> row (NaN when it cannot be told).

    Notes
    -----
    The labelled ankles give the row, but a projection only shortens: ankles labelled farther
    below the shoulders than an upright body of this torso reaches (``0.779`` of stature) are
    not where the feet stand (a network guessing legs that the row in front hides tends to
    draw them too long). The row is therefore the smaller of the lower labelled ankle and the
    shoulders' row plus ``0.779 * torso``; seated or crouching people, whose ankles are
    higher, keep their ankles' row. Without ankles, the shoulders' estimate; without
    shoulders either, where the fitted floor puts the feet of a body of this torso.

    Examples
    --------
    >>> from app.model.skeleton import coco_body
    >>> kp = np.zeros((17, 3)); kp[[5, 6], :] = [[90, 100, 2], [110, 100, 2]]
    >>> kp[[15, 16], :] = [[95, 400, 2], [105, 395, 2]]       # ankles far too low
    >>> stand_rows({1: kp}, coco_body(), {1: 200.0})
    {1: 255.8}
    """
    shoulders = pair_index(skeleton, "shoulder")
    out = {}
    for p, kp in people.items():
        y = feet_y(kp, skeleton)
        scale = torso.get(p, float("nan"))
        top = [j for pair in shoulders for j in pair if kp[j, 2] > 0]
        if top and np.isfinite(scale) and scale > 0:
            upright = float(kp[top, 1].mean()) + _SHOULDER_TO_ANKLE * scale
            y = upright if not y <= upright else y
        if not np.isfinite(y) and line is not None and np.isfinite(scale):
            y = (scale - line[1]) / line[0]
        out[p] = float(y)
    return out


def body_regions(kp: np.ndarray, skeleton: Skeleton,
                 scale: float) -> list[tuple[np.ndarray, np.ndarray, float]]:
    """Capsules ``(a, b, radius)`` that the person's trunk and legs cover, image pixels.

    Notes
    -----
    The trunk: from the shoulder centre to the hip centre, as wide as 0.8 of the wider of the
    shoulders and the hips. Each labelled thigh and shank: ``LEG_HALF_WIDTH`` of stature
    about the segment. Arms and head are left out (they are thin, and often before the body
    rather than beside it).
    """
    out: list[tuple[np.ndarray, np.ndarray, float]] = []
    if not (np.isfinite(scale) and scale > 0):
        return out
    shoulders, hips = pair_index(skeleton, "shoulder"), pair_index(skeleton, "hip")
    for (ls, rs), (lh, rh) in zip(shoulders, hips):
        if (kp[[ls, rs, lh, rh], 2] > 0).all():
            top = kp[[ls, rs], :2].mean(axis=0)
            bottom = kp[[lh, rh], :2].mean(axis=0)
            half = 0.5 * max(np.hypot(*(kp[ls, :2] - kp[rs, :2])),
                             np.hypot(*(kp[lh, :2] - kp[rh, :2])))
            out.append((top, bottom, 0.8 * half))
    for parent, child in (("hip", "knee"), ("knee", "ankle")):
        for a, b in zip(*pair_index(skeleton, parent, child)):
            if kp[a, 2] > 0 and kp[b, 2] > 0:
                out.append((kp[a, :2], kp[b, :2], LEG_HALF_WIDTH * scale))
    return out


def _inside(points: np.ndarray, a: np.ndarray, b: np.ndarray, radius: float) -> np.ndarray:
    """``(n,)`` whether each point ``(n, 2)`` lies within ``radius`` of the segment a-b."""
    d = b - a
    t = np.clip((points - a) @ d / max(float(d @ d), 1e-9), 0.0, 1.0)
    return np.hypot(*(points - a - t[:, None] * d).T) < radius


def _one_body(a: np.ndarray, b: np.ndarray, scale: float) -> bool:
    """Whether two labels lie on one body (their like joints a median of less than
    ``TANGLE_FROM`` of stature apart): a body found twice does not hide itself."""
    both = (a[:, 2] > 0) & (b[:, 2] > 0)
    if both.sum() < 3 or not scale > 0:
        return False
    return float(np.median(np.hypot(*(a[both, :2] - b[both, :2]).T))) / scale < TANGLE_FROM


def covers(people: Mapping[int, np.ndarray], skeleton: Skeleton,
           scales: Mapping[int, float],
           rows: Mapping[int, float]) -> dict[int, list[tuple[int, int]]]:
    """Joints that a nearer person's body hides: person id -> ``[(joint, coverer), ...]``.

    Parameters
    ----------
    people
        Person id -> ``(K, 3)`` ``x, y, v``.
    skeleton
        The project's skeleton.
    scales
        Person id -> stature in pixels.
    rows
        Person id -> where they stand (:func:`stand_rows`).

    Notes
    -----
    A person standing lower in the image is nearer the camera (Hoiem et al. 2006; on risers
    too: each row stands both higher and farther). A labelled joint of a farther person (by
    more than ``NEARER_BY`` of their stature) inside the nearer one's :func:`body_regions`
    cannot be seen. Two labels of one body (like joints a median of less than ``TANGLE_FROM``
    of stature apart: found twice, or tangled) do not hide each other.

    Examples
    --------
    >>> from app.model.skeleton import coco_body
    >>> sk = coco_body()
    >>> front = np.zeros((17, 3)); front[[5, 6, 11, 12], :] = [[90, 100, 2], [110, 100, 2],
    ...     [92, 160, 2], [108, 160, 2]]
    >>> back = np.zeros((17, 3)); back[9] = (100, 130, 2)        # a wrist behind the trunk
    >>> covers({1: front, 2: back}, sk, {1: 200.0, 2: 200.0}, {1: 300.0, 2: 250.0})
    {2: [(9, 1)]}
    """
    regions = {p: body_regions(kp, skeleton, scales.get(p, float("nan")))
               for p, kp in people.items()}
    out: dict[int, list[tuple[int, int]]] = {}
    for p, kp in people.items():
        row = rows.get(p, float("nan"))
        scale = scales.get(p, float("nan"))
        if not (np.isfinite(row) and np.isfinite(scale)):
            continue
        nearer = [q for q in people if q != p and regions[q]
                  and rows.get(q, float("nan")) > row + NEARER_BY * scale
                  and not _one_body(kp, people[q], max(scale, scales.get(q, 0.0)))]
        joints = np.flatnonzero(kp[:, 2] > 0)
        cover = np.full(len(joints), -1)
        for q in nearer:
            for a, b, radius in regions[q]:
                inside = _inside(kp[joints, :2], a, b, radius) & (cover < 0)
                cover[inside] = q
        found = [(int(j), int(q)) for j, q in zip(joints.tolist(), cover.tolist()) if q >= 0]
        if found:
            out[p] = found
    return out


def typical_joint_score(people: Mapping[int, np.ndarray],
                        scores: Mapping[int, np.ndarray] | None) -> float:
    """The frame's median model score of a labelled joint (NaN without scores).

    Examples
    --------
    >>> kp = np.zeros((17, 3)); kp[:3, 2] = 2
    >>> typical_joint_score({1: kp}, {1: np.array([0.2, 0.8, 0.9] + [np.nan] * 14)})
    0.8
    """
    if scores is None:
        return float("nan")
    values = [scores[p][kp[:, 2] > 0] for p, kp in people.items() if p in scores]
    pooled = np.concatenate(values) if values else np.zeros(0)
    pooled = pooled[np.isfinite(pooled)]
    return float(np.median(pooled)) if pooled.size else float("nan")


#: Invented: a covered joint scored at least this fraction of the frame's typical score for a
#: labelled joint is a confident guess at a spot the model cannot see (sure at the second).
INVENTED_FROM, INVENTED_SURE = 0.85, 1.1
#: Invented joints a person needs for full strength (one wrong joint of 17 rarely makes a
#: label wrong by OKS; two or more usually do).
INVENTED_FULL = 2.0


def invented(pid: int, kp: np.ndarray, skeleton: Skeleton, covered: list[tuple[int, int]],
             scores: np.ndarray | None, typical: float,
             names: Names | None = None) -> list[Reason]:
    """Joints hidden by a nearer person that the model scores as confidently as seen joints.

    Parameters
    ----------
    pid
        The person's id.
    kp
        ``(K, 3)`` ``x, y, v``.
    skeleton
        The project's skeleton.
    covered
        ``[(joint, coverer), ...]`` of :func:`covers` for this person.
    scores
        ``(K,)`` model scores (NaN where none), or None (no check).
    typical
        :func:`typical_joint_score` of the frame.
    names
        How the frame's people are named in the text.

    Returns
    -------
    list of Reason
        At most one ``invented`` reason naming those joints.

    Notes
    -----
    A network scores what it sees; a joint behind someone nearer that it scores like the
    frame's typical labelled joint is a guess, usually at a wrong spot. Per covered joint
    labelled visible (one labelled occluded was placed knowing it is hidden),
    ``ratio = score / typical`` ramped from ``INVENTED_FROM`` (0.85) to ``INVENTED_SURE``
    (1.1); the strength is the sum over the covered joints over ``INVENTED_FULL`` (2), at
    most 1. When the scores say nothing (none, or no typical score), the check is silent.
    Common practice, no source.
    """
    if scores is None or not (np.isfinite(typical) and typical > 0) or not covered:
        return []
    ramps = {j: ramp(float(scores[j]) / typical, INVENTED_FROM, INVENTED_SURE)
             for j, _ in covered if np.isfinite(scores[j]) and kp[j, 2] == 2}
    confident = sorted(j for j, r in ramps.items() if r > 0)
    if not confident:
        return []
    strength = min(1.0, sum(ramps.values()) / INVENTED_FULL)
    by = sorted({q for j, q in covered if j in confident})
    who = ", ".join(names.person(q) for q in by) if names is not None else \
        count(len(by), "person", "people")
    listed = ", ".join(joint_name(skeleton, j) for j in confident)
    return [make_reason("invented",
                        f"{listed} behind {who}, who stands nearer, yet scored as if seen: "
                        "guessed, likely at a wrong spot", pid, confident, strength)]


#: Neighbour's face: one side's eye and ear count when both lie nearer another person's nose
#: than their own person's, by a ratio of their distances from 1 (a tie) to 1.5 (sure).
FACE_FROM, FACE_SURE = 1.0, 1.5
#: The face joints the check reads: the nose, and each side's eye and ear (COCO names).
_FACE_SIDES = (("left_eye", "left_ear"), ("right_eye", "right_ear"))


def neighbour_face(pid: int, kp: np.ndarray, skeleton: Skeleton,
                   people: Mapping[int, np.ndarray],
                   names: Names | None = None) -> list[Reason]:
    """One side's eye and ear labelled on another person's face.

    Parameters
    ----------
    pid
        The person's id.
    kp
        ``(K, 3)`` ``x, y, v``.
    skeleton
        The project's skeleton (silent unless it names a ``nose`` and each side's ``eye``
        and ``ear``, as COCO's does).
    people
        Every person of the frame, id -> ``(K, 3)`` (the person itself is skipped).
    names
        How people and joints are named in the text.

    Returns
    -------
    list of Reason
        At most one ``neighbour-face`` reason naming the side's eye and ear.

    Notes
    -----
    Our own heuristic, no published source. In a crowd a small head's eye and ear are found
    on the next face as easily as on their own. For each side with both its eye and ear
    labelled (and the person's nose), ``ratio`` is the smaller over the two joints of (the
    distance to the person's own nose) / (the distance to the nearest other labelled nose);
    above 1 both sit nearer someone else's nose. The strength is the larger side's ratio
    ramped from ``FACE_FROM`` (1) to ``FACE_SURE`` (1.5). Chosen on the frame-before fit
    demos (synthetic; dance and choir seeds 1-8): ratio above 1.2 for 3.9 % of the wrong
    people and 0.3 % of the right ones.

    Examples
    --------
    >>> from app.model.skeleton import coco_body
    >>> sk = coco_body()
    >>> me = np.zeros((17, 3)); me[:5] = [[50, 20, 2], [47, 17, 2], [53, 17, 2], [44, 18, 2],
    ...                                   [56, 18, 2]]
    >>> other = me.copy(); other[:, 0] += 16
    >>> neighbour_face(1, me, sk, {1: me, 2: other})
    []
    >>> wrong = me.copy(); wrong[[2, 4], 0] += 16          # right eye and ear on person 2
    >>> r = neighbour_face(1, wrong, sk, {1: wrong, 2: other})
    >>> r[0].kind, r[0].joints, r[0].strength
    ('neighbour-face', (2, 4), 1.0)
    """
    joints = skeleton.joints
    if "nose" not in joints or any(j not in joints for side in _FACE_SIDES for j in side):
        return []
    nose = joints.index("nose")
    if kp[nose, 2] <= 0:
        return []
    others = [(q, o[nose, :2]) for q, o in people.items() if q != pid and o[nose, 2] > 0]
    if not others:
        return []
    best: float = 0.0
    side: tuple[int, ...] = ()
    owner: int | None = None
    for eye, ear in _FACE_SIDES:
        pair = (joints.index(eye), joints.index(ear))
        if any(kp[j, 2] <= 0 for j in pair):
            continue
        ratio = math.inf
        near: int | None = None
        for j in pair:
            here = kp[j, :2]
            own = math.hypot(*(here - kp[nose, :2]))
            q, spot = min(others, key=lambda o: math.hypot(*(here - o[1])))
            ratio = min(ratio, own / max(math.hypot(*(here - spot)), 1e-6))
            near = q if near is None else near
        if ratio > best:
            best, side, owner = ratio, pair, near
    strength = ramp(best, FACE_FROM, FACE_SURE)
    if strength <= 0 or owner is None:
        return []
    listed = names.joints(side) if names is not None else ", ".join(str(j) for j in side)
    whose = names.person(owner) if names is not None else "another person"
    return [make_reason("neighbour-face",
                        f"{listed} nearer {whose}'s nose than this person's own: likely on "
                        "a neighbour's face", pid, side, strength, owner)]


#: Long legs: a person's legs over its torso against the frame's typical ratio count from
#: 1.15 times it and are sure at 1.4 (see :func:`long_legs`).
LEGS_FROM, LEGS_SURE = 1.15, 1.4
#: The frame's typical ratio needs this many other people with torso and a whole leg.
LEGS_OTHERS = 2
_LEG_SIDES = (("left_hip", "left_knee", "left_ankle"), ("right_hip", "right_knee", "right_ankle"))
_TORSO = ("left_shoulder", "right_shoulder", "left_hip", "right_hip")


def leg_ratio(kp: np.ndarray, skeleton: Skeleton) -> float | None:
    """The longer labelled leg (hip to knee plus knee to ankle) over the torso (shoulders'
    middle to hips' middle), or None without both shoulders, both hips and one whole leg.

    Examples
    --------
    >>> from app.model.skeleton import coco_body
    >>> sk = coco_body()
    >>> body = np.zeros((17, 3)); body[:, 2] = 2
    >>> body[[5, 6, 11, 12, 13, 14, 15, 16], :2] = [[60, 35], [40, 35], [56, 68], [44, 68],
    ...                                             [57, 95], [43, 95], [57, 120], [43, 120]]
    >>> round(leg_ratio(body, sk), 2)                   # (27 + 25) / 33
    1.58
    """
    joints = skeleton.joints
    if any(j not in joints for side in _LEG_SIDES for j in side) or \
            any(j not in joints for j in _TORSO):
        return None
    ls, rs, lh, rh = (joints.index(j) for j in _TORSO)
    if (kp[[ls, rs, lh, rh], 2] <= 0).any():
        return None
    torso = math.hypot(*(kp[[ls, rs], :2].mean(0) - kp[[lh, rh], :2].mean(0)))
    legs = []
    for hip, knee, ankle in (tuple(joints.index(j) for j in side) for side in _LEG_SIDES):
        if kp[knee, 2] > 0 and kp[ankle, 2] > 0:
            legs.append(math.hypot(*(kp[knee, :2] - kp[hip, :2]))
                        + math.hypot(*(kp[ankle, :2] - kp[knee, :2])))
    if not legs or torso <= 0:
        return None
    return max(legs) / torso


def long_legs(pid: int, kp: np.ndarray, skeleton: Skeleton,
              ratios: Mapping[int, float | None], names: Names | None = None) -> list[Reason]:
    """Legs far longer for the torso than the frame's other people's: another body's legs.

    Parameters
    ----------
    pid
        The person's id.
    kp
        ``(K, 3)`` ``x, y, v``.
    skeleton
        The project's skeleton (silent unless it names each side's shoulder, hip, knee and
        ankle, as COCO's does).
    ratios
        Every person of the frame, id -> :func:`leg_ratio` (None where it cannot be told).
    names
        How joints are named in the text.

    Returns
    -------
    list of Reason
        At most one ``long-legs`` reason naming the labelled knees and ankles.

    Notes
    -----
    Our own heuristic, no published source. When a body's own legs are hidden (behind the
    row in front, behind a neighbour), the grouping can give it the knees and ankles of the
    person below or beside it, which sit 30-70 px further: the legs come out longer for the
    torso than anyone's in the frame, though often not long enough for ``stretched-limb``,
    which reads each limb against the body's own scale. The frame's people share one
    build and one view, so the ratio is read against the median of the other people's
    (at least ``LEGS_OTHERS`` of them) and ramped from ``LEGS_FROM`` (1.15) to ``LEGS_SURE``
    (1.4). Chosen on the frame-before fit demos only (synthetic; dance and choir seeds 1-8,
    3 December 2026): on the choir, 32 of the 40 wrong people with a neighbour's legs that
    the fifth refit missed are above 1.2 (AUC 0.88 against the right people), and 111 of its
    1,707 right people; on the dance, which has few such people, it tells nothing (AUC 0.62
    on 10) and is above 1.2 for 8 of 973 right people.

    Examples
    --------
    >>> from app.model.skeleton import coco_body
    >>> sk = coco_body()
    >>> body = np.zeros((17, 3)); body[:, 2] = 2
    >>> body[[5, 6, 11, 12, 13, 14, 15, 16], :2] = [[60, 35], [40, 35], [56, 68], [44, 68],
    ...                                             [57, 95], [43, 95], [57, 120], [43, 120]]
    >>> long_legs(1, body, sk, {1: 1.58, 2: 1.6, 3: 1.55})
    []
    >>> r = long_legs(1, body, sk, {1: 2.2, 2: 1.6, 3: 1.55})
    >>> r[0].kind, r[0].joints, r[0].strength
    ('long-legs', (13, 14, 15, 16), 1.0)
    """
    mine = ratios.get(pid)
    others = [r for q, r in ratios.items() if q != pid and r is not None]
    if mine is None or len(others) < LEGS_OTHERS:
        return []
    typical = float(np.median(others))
    if typical <= 0:
        return []
    strength = ramp(mine / typical, LEGS_FROM, LEGS_SURE)
    if strength <= 0:
        return []
    joints = skeleton.joints
    legs = tuple(j for side in _LEG_SIDES for j in (joints.index(side[1]),
                 joints.index(side[2])) if kp[j, 2] > 0)
    legs = tuple(sorted(legs))
    listed = names.joints(legs) if names is not None else ", ".join(str(j) for j in legs)
    return [make_reason("long-legs",
                        f"{listed} {mine / typical:.2f} times as far below the hips, for the "
                        "torso, as the frame's other people's: likely another body's legs",
                        pid, legs, strength)]
