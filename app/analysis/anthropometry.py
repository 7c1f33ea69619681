"""How long a body's segments are, as fractions of stature, and a person's scale from their torso.

A 2D projection can only shorten a segment, so a labelled limb much longer than the person's
own scale allows is strong evidence of a wrong joint (usually one given to a neighbour). The
scale comes from the person's torso (shoulders and hips), not from their height in the image,
because in a crowd the legs or the head are often hidden or wrong.

Segment lengths are the proportions of Drillis and Contini (1966), as tabulated in
D. A. Winter, "Biomechanics and Motor Control of Human Movement", Fig. 4.1 (segment lengths as
fractions of body height H). The values below are written from memory of that figure; the
face distances (eyes, ears, nose) are not in the figure and are rough values from common
practice, no source.
"""

from __future__ import annotations

import numpy as np
from scipy.sparse.csgraph import shortest_path

from app.model.skeleton import Skeleton

#: Heights of body landmarks above the floor as fractions of stature, for a person standing
#: upright: Drillis and Contini (1966) as drawn in Winter's Fig. 4.1, from memory. Triage reads
#: from it how far the shoulders stand above the ankles (0.818 - 0.039 = 0.779 of stature).
LANDMARK_HEIGHTS: dict[str, float] = {
    "eye": 0.936,
    "chin": 0.870,
    "shoulder": 0.818,
    "elbow": 0.630,
    "hip": 0.530,
    "wrist": 0.485,
    "knee": 0.285,
    "ankle": 0.039,
}

#: Longest plausible length / stature of each limb, by the two joint names (order free). For
#: body segments that is the segment's length, from memory of Winter, Fig. 4.1 (Drillis and
#: Contini 1966); for the face see below.
SEGMENT_FRACTIONS: dict[frozenset[str], float] = {
    frozenset(("left_shoulder", "left_elbow")): 0.186,   # upper arm
    frozenset(("right_shoulder", "right_elbow")): 0.186,
    frozenset(("left_elbow", "left_wrist")): 0.146,      # forearm
    frozenset(("right_elbow", "right_wrist")): 0.146,
    frozenset(("left_hip", "left_knee")): 0.245,         # thigh
    frozenset(("right_hip", "right_knee")): 0.245,
    frozenset(("left_knee", "left_ankle")): 0.246,       # shank
    frozenset(("right_knee", "right_ankle")): 0.246,
    frozenset(("left_shoulder", "right_shoulder")): 0.259,  # shoulder width
    frozenset(("left_hip", "right_hip")): 0.191,         # hip width
    frozenset(("left_shoulder", "left_hip")): 0.288,     # shoulder height 0.818 - hip 0.530
    frozenset(("right_shoulder", "right_hip")): 0.288,
    # Face and neck: any two landmarks of one head lie within about a head's width (0.1 H),
    # an ear within about 0.15 H of its shoulder (common practice, no source). These are upper
    # bounds, not segment lengths: face landmarks are a few pixels apart, where detection
    # jitter alone would make a ratio to their true spacing meaningless.
    frozenset(("left_ear", "left_shoulder")): 0.15,
    frozenset(("right_ear", "right_shoulder")): 0.15,
    frozenset(("nose", "left_eye")): 0.1,
    frozenset(("nose", "right_eye")): 0.1,
    frozenset(("left_eye", "right_eye")): 0.1,
    frozenset(("left_eye", "left_ear")): 0.1,
    frozenset(("right_eye", "right_ear")): 0.1,
}

#: Segments whose length gives the person's scale (torso only).
TORSO: tuple[frozenset[str], ...] = (
    frozenset(("left_shoulder", "right_shoulder")),
    frozenset(("left_hip", "right_hip")),
    frozenset(("left_shoulder", "left_hip")),
    frozenset(("right_shoulder", "right_hip")),
)


def limb_fractions(skeleton: Skeleton) -> np.ndarray:
    """``(L,)`` expected length / stature of each limb of ``skeleton``; NaN where unknown.

    Examples
    --------
    >>> from app.model.skeleton import coco_body
    >>> f = limb_fractions(coco_body())
    >>> float(f[0])  # left_ankle-left_knee: the shank
    0.246
    """
    names = skeleton.joints
    return np.array([SEGMENT_FRACTIONS.get(frozenset((names[a], names[b])), np.nan)
                     for a, b in skeleton.limbs], dtype=np.float64)


def torso_pairs(skeleton: Skeleton) -> list[tuple[int, int, float]]:
    """The torso segments the skeleton has, as ``(joint a, joint b, fraction)``."""
    index = {n: i for i, n in enumerate(skeleton.joints)}
    out = []
    for seg in TORSO:
        a, b = sorted(seg)
        if a in index and b in index:
            out.append((index[a], index[b], SEGMENT_FRACTIONS[seg]))
    return out


def person_scale(keypoints: np.ndarray, skeleton: Skeleton) -> float:
    """The person's stature in image pixels implied by their torso, NaN if no torso segment
    is labelled.

    Parameters
    ----------
    keypoints
        ``(K, 3)`` ``x, y, v``.

    Notes
    -----
    Each labelled torso segment gives ``length / fraction``. Projection only shortens, so the
    largest estimate is the least foreshortened one -- but a wrong joint lengthens. The torso
    is read as two like pairs that foreshorten together: the widths (shoulders, hips: a turn
    about the vertical axis shortens both alike) and the sides (left and right shoulder to
    hip: a bow shortens both alike). Within a pair, estimates more than 1.5 times apart mean
    the longer holds a wrong joint, and the shorter is kept; otherwise the longer. The scale is
    the larger of the two pairs' estimates (a person seen side on has short widths but full
    sides; one bowing to the camera, the reverse).

    Examples
    --------
    >>> from app.model.skeleton import coco_body
    >>> kp = np.zeros((17, 3)); kp[[5, 6, 11, 12], 2] = 2
    >>> kp[5, :2], kp[6, :2] = (100, 100), (90, 100)       # seen nearly side on
    >>> kp[11, :2], kp[12, :2] = (98, 128.8), (91, 128.8)
    >>> round(person_scale(kp, coco_body()), 1)
    100.2
    >>> kp[11, :2] = (160, 128.8)                            # left hip on a neighbour
    >>> round(person_scale(kp, coco_body()), 1)
    100.1
    """
    kp = np.asarray(keypoints, dtype=np.float64)
    index = {n: i for i, n in enumerate(skeleton.joints)}
    estimates = []
    for pair in ((("left_shoulder", "right_shoulder"), ("left_hip", "right_hip")),
                 (("left_shoulder", "left_hip"), ("right_shoulder", "right_hip"))):
        values = []
        for a_name, b_name in pair:
            a, b = index.get(a_name), index.get(b_name)
            if a is None or b is None or not (kp[a, 2] > 0 and kp[b, 2] > 0):
                continue
            frac = SEGMENT_FRACTIONS[frozenset((a_name, b_name))]
            values.append(float(np.hypot(*(kp[a, :2] - kp[b, :2]))) / frac)
        if len(values) == 2 and max(values) > 1.5 * min(values):
            estimates.append(min(values))
        elif values:
            estimates.append(max(values))
    return max(estimates) if estimates else float("nan")


def reach_matrix(skeleton: Skeleton) -> np.ndarray:
    """``(K, K)`` the longest plausible distance between every two joints, as a fraction of
    stature: the shortest chain of limbs joining them, each at its :data:`SEGMENT_FRACTIONS`
    length. Infinite where no chain of known limbs joins the two; 0 on the diagonal.

    Notes
    -----
    Two joints of one body cannot lie farther apart than the segments between them laid end
    to end (the triangle inequality, applied along the chain), and a 2D projection only
    shortens. So ``|x_a - x_b| <= reach[a, b] * stature`` holds for every pair of a correctly
    labelled body, adjacent or not: a wrist farther from the hip than upper arm + forearm +
    the shoulder-hip side is on someone else. The chain lengths are the shortest paths of the
    limb graph (``scipy.sparse.csgraph.shortest_path``, Dijkstra).

    References
    ----------
    Segment lengths: Drillis and Contini (1966), via Winter, Fig. 4.1 (see the module
    docstring; from memory).

    Examples
    --------
    >>> from app.model.skeleton import coco_body
    >>> sk = coco_body()
    >>> reach = reach_matrix(sk)
    >>> round(float(reach[sk.index("left_hip"), sk.index("left_ankle")]), 3)  # thigh + shank
    0.491
    >>> round(float(reach[sk.index("left_shoulder"), sk.index("left_ankle")]), 3)
    0.779
    """
    k = skeleton.num_joints
    fractions = limb_fractions(skeleton)
    graph = np.zeros((k, k))
    for (a, b), f in zip(skeleton.limbs, fractions):
        if np.isfinite(f) and a != b:
            graph[a, b] = graph[b, a] = f
    return np.asarray(shortest_path(graph, method="D", directed=False), dtype=np.float64)
