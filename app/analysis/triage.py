"""Triage: which people of a frame are probably labelled wrong, and why, in words.

Each check looks for one way crowds break auto-labels and returns :class:`Reason` records: a
kind, a sentence a person can read, the person and the joints concerned, a *strength* in
[0, 1] (how far the measurement lies into the range where it counts) and the *evidence* it
carries: ``WEIGHTS[kind] * strength``, in log-odds.

===================  =========================================================================
kind                 evidence
===================  =========================================================================
``missing-joints``   joints that should be in the picture are not labelled, so the label's OKS
                     has a ceiling below what a right label reaches
``stretched-limb``   two joints farther apart than the body's segments between them can reach
                     at the person's torso scale (adjacent joints: a limb; others: a chain)
``short-legs``       shoulders to ankles span far less than an upright body of this torso does
                     (the legs are usually a smaller, farther person's)
``tilted-torso``     the hips sit far to the side of the shoulders
``off-ground``       the feet stand where, on the floor the frame's people share, a body of
                     a clearly different size would stand (Hoiem et al. 2006)
``mirrored``         the labels say the body faces the camera, the model's scores say its face
                     is hidden: seen from behind, left and right swapped
``crossed-sides``    one left-right pair, or one arm or leg, crosses the rest of the body
``duplicate``        the weaker of two people whose joints nearly coincide: found twice
``tangled``          a person whose joints nearly coincide with another's: parts may be swapped
``split``            one body cut in two (two partial people that fit together)
``weak-limb``        the model's own field supports this person's limbs less than it supports
                     the other people's in the frame (line integral ``E`` of Cao et al. 2017)
``low-score``        the model scored this person's joints lower than the frame's other people
``crowded``          frame level: the crowd index of Li et al. (CVPR 2019)
===================  =========================================================================

Combination: evidence adds in log-odds, each kind once (at its strongest reason), so that
several faint signs can together flag a person that no single sign would::

    suspicion = 1 / (1 + exp(-(PRIOR + sum over kinds of max WEIGHTS[kind] * strength)))

A person is *flagged* when ``suspicion >= FLAG_AT``. A reason's ``weight`` (what the app shows
and uses to halo joints) is the suspicion that reason alone would give. A frame's score is the
expected number of wrong people, ``sum_p suspicion_p``, plus ``CROWD_WEIGHT * crowd_index``
(0.5), so that among frames with the same evidence the more crowded one comes first.

The thresholds of each check come from the principle stated beside it (mostly the body
proportions of :mod:`app.analysis.anthropometry`). ``PRIOR`` and ``WEIGHTS`` were fitted by
logistic regression of "wrong" on the strongest strength of each kind (weights constrained to
[0, 8]; then the prior rounded to 0.1 and the weights to 0.5) over the synthetic demo
generated with seeds 1, 2, 3 and 4 (:func:`app.demo.generate`, 24 frames each, 1457 people,
617 of them wrong by the acceptance measure of ``tests/analysis/test_triage.py``), when the
demo drew its simulated network errors afresh for every frame. ``FLAG_AT`` is the largest of
1/2, 1/3, 1/4 and 1/5 at which every calibration seed had at least 90 % of its wrong people
flagged (at 1/2, seed 4 had 88 %). Since then the demo's errors last over frames, as a
network's do on video (:mod:`app.demo.maps`); with the weights unchanged, triage measures on
the regenerated demos (recall, precision):

======================  ======  =========
demo                    recall  precision
======================  ======  =========
shipped (seed 1966)     0.967   0.796
seed 5                  0.959   0.928
seed 6                  0.897   0.812
seed 7                  0.899   0.748
seed 8                  0.958   0.760
seed 9                  0.959   0.831
seed 10                 0.931   0.840
seed 11                 0.938   0.855
======================  ======  =========

(calibration seeds 1-4: recall 0.905-0.960, precision 0.856-0.914; with errors drawn per
frame the table read 0.945/0.819 for the shipped demo and recall 0.897-0.978, precision
0.776-0.905 for seeds 5-11). The checks and their thresholds were chosen while looking at
the shipped demo and seeds 1-8, so only seeds 9, 10 and 11, generated once they were
settled, are truly unseen. These are defaults for crowds of upright people on one floor, not
truths.

References
----------
The weight-of-evidence reading of log-odds that add: I. J. Good, "Probability and the Weighing
of Evidence", Griffin, 1950 (from memory). Part affinity fields and ``E``: Z. Cao et al.,
"Realtime Multi-Person 2D Pose Estimation using Part Affinity Fields", CVPR 2017. Crowd index:
J. Li et al., "CrowdPose: Efficient Crowded Scenes Pose Estimation and a New Benchmark",
CVPR 2019. OKS: the COCO keypoint evaluation.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from scipy.stats import theilslopes

from app.analysis.anthropometry import (
    LANDMARK_HEIGHTS,
    limb_fractions,
    person_scale,
    reach_matrix,
)
from app.analysis.association import limb_scores
from app.model.skeleton import Skeleton

#: A person is flagged at this suspicion (chosen on the calibration seeds, see the module
#: docstring). Read as costs: a miss, which teaches the network the error, is taken to cost
#: twice a needless look at a right label.
FLAG_AT = 1.0 / 3.0
#: Log-odds that a person is wrong before any evidence (fitted, see the module docstring).
PRIOR = -4.3
#: Evidence of each kind at full strength, in log-odds (fitted, see the module docstring;
#: capped at 8 in the fit: no single sign is taken as more certain than 98 %).
WEIGHTS: dict[str, float] = {
    "missing-joints": 6.0,
    "stretched-limb": 5.5,
    "short-legs": 3.0,
    "tilted-torso": 8.0,
    "off-ground": 7.0,
    "mirrored": 8.0,
    "crossed-sides": 2.5,
    "duplicate": 4.0,
    "tangled": 4.0,
    "split": 3.5,
    "weak-limb": 3.0,
    "low-score": 0.5,
}
#: The frame's score adds this times its crowd index.
CROWD_WEIGHT = 0.5

#: The OKS a label must reach to count as right (the acceptance measure of issue 3).
OKS_RIGHT = 0.8
#: Missing joints: the mean similarity the labelled joints would need, ``OKS_RIGHT * expected /
#: labelled``, counts from ``OKS_RIGHT`` (nothing missing) and is sure at 1 (unreachable); one
#: of 17 missing needs 0.85, two 0.91, three 0.97.
NEED_FROM, NEED_SURE = 0.8, 1.0
#: Stretch: distance / reach counts from 1.2 (people differ by about 10 % and the torso scale
#: is rough) and is sure at 1.8.
STRETCH_FROM, STRETCH_SURE = 1.2, 1.8
#: Short legs: the shoulder-to-ankle drop over the upright span (``0.779`` of stature) counts
#: below 0.82 (knees bend, a leg lifts) and is sure at 0.65.
SPAN_FROM, SPAN_SURE = 0.82, 0.65
#: Tilted torso: sideways offset of the hip centre from the shoulder centre, as a fraction of
#: stature, counts from 0.05 (a lean of about 10 degrees) and is sure at 0.2.
TILT_FROM, TILT_SURE = 0.05, 0.2
#: Mirrored: the body faces the camera when ``cross(up, left - right shoulder) / stature``
#: exceeds this (two fifths of the shoulder width, 0.259, seen square on: turned less than
#: about 65 degrees from the camera); its face should then score about as well as its ears and
#: shoulders: a face score ratio below 0.9 counts, below 0.5 is sure.
FRONT_MARGIN = 0.1
FACE_FROM, FACE_SURE = 0.9, 0.5
#: Two people whose shared joints lie a median of less than this fraction of stature apart
#: are tangled (0.15: sure at 0.05); below 0.1 the weaker is a duplicate (sure at 0.04).
TANGLE_FROM, TANGLE_SURE = 0.15, 0.05
DUPLICATE_FROM, DUPLICATE_SURE = 0.10, 0.04
#: Weak limbs: the mean shortfall of the person's ``E`` below the frame's typical ``E`` for
#: each limb counts from 0 and is sure at 0.12; a single limb below by more is named.
WEAK_FROM, WEAK_SURE = 0.0, 0.12
#: Low scores: the person's mean joint score below the frame's median person counts from 0 and
#: is sure at 0.15; with fewer than three people, below the absolute ``LOW_SCORE``.
LOW_FROM, LOW_SURE = 0.0, 0.15
LOW_SCORE = 0.45
#: Off the ground: ``|ln(scale / scale the frame's floor predicts at the feet)|`` counts from
#: 0.2 (people differ in stature by about 5 % and torso scales are rough) and is sure at 0.5;
#: the floor is fitted when at least ``GROUND_PEOPLE`` people show torso and ankles.
GROUND_FROM, GROUND_SURE = 0.2, 0.5
GROUND_PEOPLE = 5
#: Reasons weaker than this are dropped, so that the list shows signs rather than noise (the
#: evidence lost is at most ``0.05 * 8 = 0.4`` in log-odds).
MIN_STRENGTH = 0.05
#: Frame-level reason shown from this crowd index on.
CROWDED_FROM = 0.5

#: Upright span from shoulders to ankles, as a fraction of stature.
_SHOULDER_TO_ANKLE = LANDMARK_HEIGHTS["shoulder"] - LANDMARK_HEIGHTS["ankle"]


@dataclass(frozen=True)
class Reason:
    """One piece of evidence that a person (or the frame) is labelled wrong.

    ``strength`` in [0, 1] says how far the measurement lies into its range; ``evidence`` is
    ``WEIGHTS[kind] * strength`` in log-odds; ``weight`` is the suspicion this reason alone
    gives, ``1 / (1 + exp(-(PRIOR + evidence)))`` (for the frame-level ``crowded``, the crowd
    index, at most 1).
    """

    kind: str
    text: str
    person: int | None
    joints: tuple[int, ...] = ()
    weight: float = 0.0
    strength: float = 0.0
    evidence: float = 0.0

    def to_dict(self) -> dict[str, Any]:
        return {"kind": self.kind, "text": self.text, "person": self.person,
                "joints": list(self.joints), "weight": round(float(self.weight), 4),
                "evidence": round(float(self.evidence), 4)}


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
    """0 at ``lo``, 1 at ``hi`` (either order), linear between, clipped."""
    return float(np.clip((x - lo) / (hi - lo), 0.0, 1.0))


def _sigmoid(x: float) -> float:
    return 1.0 / (1.0 + math.exp(-x))


def _reason(kind: str, text: str, pid: int, joints: Any, strength: float) -> Reason:
    evidence = WEIGHTS[kind] * strength
    return Reason(kind, text, pid, tuple(int(j) for j in joints),
                  _sigmoid(PRIOR + evidence), strength, evidence)


def _pair_index(skeleton: Skeleton, *parts: str) -> list[tuple[int, int]]:
    """``(left, right)`` joint indices of the named parts the skeleton has."""
    idx = {n: i for i, n in enumerate(skeleton.joints)}
    return [(idx["left_" + p], idx["right_" + p]) for p in parts
            if "left_" + p in idx and "right_" + p in idx]


def body_scale(kp: np.ndarray, skeleton: Skeleton, fractions: np.ndarray) -> float:
    """The person's stature in pixels, from the torso or else from any labelled limb.

    Parameters
    ----------
    kp
        ``(K, 3)`` ``x, y, v``.
    skeleton
        The project's skeleton.
    fractions
        ``(L,)`` :func:`app.analysis.anthropometry.limb_fractions` of the skeleton.

    Returns
    -------
    float
        :func:`app.analysis.anthropometry.person_scale` when the torso gives one; otherwise
        ``max over labelled limbs of length / fraction``; NaN when neither exists.

    Notes
    -----
    A projection only shortens, so the least foreshortened limb gives a lower bound of the
    stature; for a fragment without a torso (an arm, a leg) that is the best available.

    References
    ----------
    Segment fractions: Drillis and Contini (1966) via Winter, Fig. 4.1 (from memory).

    Examples
    --------
    >>> from app.model.skeleton import coco_body
    >>> sk = coco_body()
    >>> arm = np.zeros((17, 3)); arm[[7, 9], :] = [[100, 100, 2], [100, 146, 2]]  # a forearm
    >>> round(body_scale(arm, sk, limb_fractions(sk)), 1)
    315.1
    """
    scale = person_scale(kp, skeleton)
    if np.isfinite(scale) and scale > 0:
        return float(scale)
    best = float("nan")
    on = kp[:, 2] > 0
    for c, (a, b) in enumerate(skeleton.limbs):
        if on[a] and on[b] and np.isfinite(fractions[c]):
            est = float(np.hypot(*(kp[a, :2] - kp[b, :2]))) / fractions[c]
            if est > 0 and not est <= best:
                best = est
    return float(best)


# ------------------------------------------------------------------------- one person

def missing_joints(pid: int, kp: np.ndarray, skeleton: Skeleton,
                   image_size: tuple[int, int] | None, scale: float,
                   reach: np.ndarray | None = None) -> list[Reason]:
    """Joints that should be in the picture but are not labelled.

    Parameters
    ----------
    pid
        The person's id.
    kp
        ``(K, 3)`` ``x, y, v``.
    skeleton
        The project's skeleton.
    image_size
        ``(width, height)``; None counts every missing joint as in the picture.
    scale
        The person's stature in pixels (:func:`body_scale`); NaN counts every missing joint.
    reach
        :func:`app.analysis.anthropometry.reach_matrix` of the skeleton (computed if None).

    Returns
    -------
    list of Reason
        At most one ``missing-joints`` reason naming the missing joints in the picture.

    Notes
    -----
    A missing joint ``j`` is *in the picture* when the labelled joint ``k`` nearest to it along
    the limbs (least ``reach[j, k]``) lies at least ``reach[j, k] * scale`` from every border:
    wherever the chain from ``k`` points, ``j`` cannot leave the image. A joint in the picture
    must be labelled (as occluded when hidden), and OKS counts it as 0 while it is not. With
    ``n`` joints labelled and ``m`` missing in the picture, even perfect labels reach at most
    ``n / (n + m)``; to reach ``OKS_RIGHT`` the labelled joints would need a mean similarity of
    ``need = OKS_RIGHT * (n + m) / n``. The strength is ``need`` ramped from ``NEED_FROM``
    (``OKS_RIGHT``: nothing missing) to ``NEED_SURE`` (1: the label cannot be right); one of
    17 missing gives 0.25, two 0.53, three 0.86, four 1.

    References
    ----------
    OKS as the COCO keypoint evaluation defines it (see :mod:`app.analysis.similarity`).

    Examples
    --------
    >>> from app.model.skeleton import coco_body
    >>> sk = coco_body()
    >>> kp = np.zeros((17, 3)); kp[:13] = (500, 300, 2)
    >>> kp[:, 0] += np.arange(17) * 10       # distinct positions; ankles, knees missing
    >>> r = missing_joints(1, kp, sk, (1280, 720), scale=300.0)
    >>> r[0].kind, r[0].joints, round(r[0].strength, 2)
    ('missing-joints', (13, 14, 15, 16), 1.0)
    >>> missing_joints(1, kp, sk, (1280, 350), scale=300.0)   # they may be below the image
    []
    """
    on = kp[:, 2] > 0
    n = int(on.sum())
    if n == 0:
        return []
    if reach is None:
        reach = reach_matrix(skeleton)
    labelled = np.flatnonzero(on)
    inside = []
    for j in np.flatnonzero(~on).tolist():
        if image_size is None or not np.isfinite(scale):
            inside.append(j)
            continue
        k = int(labelled[np.argmin(reach[j, labelled])])
        if not np.isfinite(reach[j, k]):
            continue
        r = reach[j, k] * scale
        x, y = kp[k, :2]
        w, h = image_size
        if r <= x <= w - 1 - r and r <= y <= h - 1 - r:
            inside.append(j)
    m = len(inside)
    if m == 0:
        return []
    need = OKS_RIGHT * (n + m) / n
    strength = _ramp(need, NEED_FROM, NEED_SURE)
    if strength <= 0:
        return []
    names = ", ".join(skeleton.joints[j] for j in inside[:4]) + (" ..." if m > 4 else "")
    return [_reason("missing-joints",
                    f"{m} joint{'s' if m > 1 else ''} in the picture not labelled ({names}); "
                    f"the label can score at most OKS {n / (n + m):.2f}",
                    pid, inside, strength)]


def stretched_limbs(pid: int, kp: np.ndarray, skeleton: Skeleton, scale: float,
                    reach: np.ndarray | None = None) -> list[Reason]:
    """Joints farther apart than the body's segments between them can reach.

    Parameters
    ----------
    pid
        The person's id.
    kp
        ``(K, 3)`` ``x, y, v``.
    skeleton
        The project's skeleton.
    scale
        The person's stature in pixels from the torso (:func:`person_scale`).
    reach
        :func:`app.analysis.anthropometry.reach_matrix` of the skeleton (computed if None).

    Returns
    -------
    list of Reason
        One ``stretched-limb`` reason per stretched limb, and one for the most stretched pair
        of joints that no limb joins directly, unless a stretched limb already names one of
        its two joints.

    Notes
    -----
    ``ratio = |x_a - x_b| / (reach[a, b] * scale)``; a projection only shortens, so a ratio
    well above 1 means a joint belongs to someone else. Strength: ``ratio`` ramped from
    ``STRETCH_FROM`` (1.2) to ``STRETCH_SURE`` (1.8).

    References
    ----------
    Drillis and Contini (1966) via Winter, Fig. 4.1 (segment lengths, from memory).

    Examples
    --------
    >>> from app.model.skeleton import coco_body
    >>> sk = coco_body()
    >>> kp = np.zeros((17, 3)); kp[[5, 7], :] = [[100, 100, 2], [100, 190, 2]]
    >>> [(r.kind, r.joints, round(r.strength, 2)) for r in stretched_limbs(1, kp, sk, 300.0)]
    [('stretched-limb', (5, 7), 0.69)]
    """
    if not (np.isfinite(scale) and scale > 0):
        return []
    if reach is None:
        reach = reach_matrix(skeleton)
    on = np.flatnonzero(kp[:, 2] > 0)
    if on.size < 2:
        return []
    xy = kp[on, :2]
    dist = np.hypot(xy[:, None, 0] - xy[None, :, 0], xy[:, None, 1] - xy[None, :, 1])
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = dist / (reach[np.ix_(on, on)] * scale)
    ratio = np.where(np.isfinite(ratio), ratio, 0.0)
    out = []
    adjacent = np.zeros((kp.shape[0], kp.shape[0]), dtype=bool)
    for a, b in skeleton.limbs:
        adjacent[a, b] = adjacent[b, a] = True
    bad_limbs: set[int] = set()
    row = {int(j): i for i, j in enumerate(on)}
    for a, b in skeleton.limbs:
        if a in row and b in row:
            r = float(ratio[row[a], row[b]])
            if r > STRETCH_FROM:
                bad_limbs.update((a, b))
                out.append(_reason(
                    "stretched-limb",
                    f"{skeleton.joints[a]}-{skeleton.joints[b]} is {r:.1f}x as long as this "
                    "body's torso allows", pid, (a, b), _ramp(r, STRETCH_FROM, STRETCH_SURE)))
    chains = np.where(adjacent[np.ix_(on, on)], 0.0, np.triu(ratio, 1))
    i, j = np.unravel_index(int(np.argmax(chains)), chains.shape)
    r = float(chains[i, j])
    a, b = int(on[i]), int(on[j])
    if r > STRETCH_FROM and not ({a, b} & bad_limbs):
        out.append(_reason(
            "stretched-limb",
            f"{skeleton.joints[a]} and {skeleton.joints[b]} are {r:.1f}x as far apart as the "
            "limbs between them reach on this body", pid, (a, b),
            _ramp(r, STRETCH_FROM, STRETCH_SURE)))
    return out


def _centre(kp: np.ndarray, pairs: list[tuple[int, int]]) -> np.ndarray | None:
    """Mean position of the labelled joints among ``pairs`` (both sides), or None."""
    idx = [j for pair in pairs for j in pair if kp[j, 2] > 0]
    return kp[idx, :2].mean(axis=0) if idx else None


def upright_body(pid: int, kp: np.ndarray, skeleton: Skeleton, scale: float) -> list[Reason]:
    """Upper and lower body that do not stand as one upright person.

    Parameters
    ----------
    pid
        The person's id.
    kp
        ``(K, 3)`` ``x, y, v``.
    skeleton
        Needs ``left_/right_`` shoulders and hips (and ankles for ``short-legs``).
    scale
        The person's stature in pixels from the torso (:func:`person_scale`).

    Returns
    -------
    list of Reason
        ``short-legs`` and ``tilted-torso`` reasons.

    Notes
    -----
    Upright, the shoulders stand ``0.818 - 0.039 = 0.779`` of stature above the ankles
    (:data:`app.analysis.anthropometry.LANDMARK_HEIGHTS`). ``span = (mean ankle y - mean
    shoulder y) / (0.779 * scale)``, image y down; bent knees, a lifted leg and a camera far
    above shorten it, which is why it counts only from ``SPAN_FROM`` (0.82, sure at 0.65).
    Much shorter, the legs are usually those of a person farther away (smaller in the image)
    whom the grouping joined to this torso. ``tilt = |x(hip centre) - x(shoulder centre)| /
    scale`` ramped from ``TILT_FROM`` (0.05) to ``TILT_SURE`` (0.2): a torso leaning sideways
    by more than a few degrees is rare in a standing crowd, and hips beside the shoulders are
    usually a neighbour's. Both assume people stand upright in the image, as in a dance,
    sports or street crowd; they mislead on people lying, sitting or bending sideways.

    References
    ----------
    Landmark heights: Drillis and Contini (1966) via Winter, Fig. 4.1 (from memory).

    Examples
    --------
    >>> from app.model.skeleton import coco_body
    >>> sk = coco_body()
    >>> kp = np.zeros((17, 3)); kp[:, 2] = 2
    >>> kp[[5, 6, 11, 12, 15, 16], :2] = [[110, 100], [90, 100], [108, 129], [92, 129],
    ...                                    [108, 150], [92, 150]]   # ankles far too high
    >>> [(r.kind, round(r.strength, 2)) for r in upright_body(1, kp, sk, 100.0)]
    [('short-legs', 1.0)]
    """
    if not (np.isfinite(scale) and scale > 0):
        return []
    out = []
    shoulders = _pair_index(skeleton, "shoulder")
    hips = _pair_index(skeleton, "hip")
    ankles = _pair_index(skeleton, "ankle")
    top = _centre(kp, shoulders)
    bottom = _centre(kp, ankles)
    if top is not None and bottom is not None:
        span = float(bottom[1] - top[1]) / (_SHOULDER_TO_ANKLE * scale)
        strength = _ramp(span, SPAN_FROM, SPAN_SURE)
        if strength > 0:
            joints = [j for pair in shoulders + ankles for j in pair if kp[j, 2] > 0]
            out.append(_reason("short-legs",
                               f"shoulders to ankles span {span:.2f} of what an upright body "
                               "with this torso spans; are the legs another person's?",
                               pid, joints, strength))
    if shoulders and hips and (kp[list(shoulders[0] + hips[0]), 2] > 0).all():
        s_mid = kp[list(shoulders[0]), :2].mean(axis=0)
        h_mid = kp[list(hips[0]), :2].mean(axis=0)
        tilt = abs(float(h_mid[0] - s_mid[0])) / scale
        strength = _ramp(tilt, TILT_FROM, TILT_SURE)
        if strength > 0:
            out.append(_reason("tilted-torso",
                               f"the hips sit {tilt:.2f} of a body height beside the shoulders",
                               pid, shoulders[0] + hips[0], strength))
    return out


def _feet_y(kp: np.ndarray, skeleton: Skeleton) -> float:
    """Image row of the lower labelled ankle, NaN without one."""
    ankles = [j for pair in _pair_index(skeleton, "ankle") for j in pair if kp[j, 2] > 0]
    return float(kp[ankles, 1].max()) if ankles else float("nan")


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
        ``(slope, intercept)``; None with fewer than ``GROUND_PEOPLE`` usable people or a
        slope that is not positive (people nearer the camera stand lower and look larger).

    Notes
    -----
    For people of about one stature standing on one floor, seen by a camera with little
    roll, a person's height in the image is proportional to how far their feet stand below
    the horizon: ``h = k (y_feet - y_horizon)``, a straight line in ``y_feet``. The line is
    fitted with the Theil-Sen estimator (slope: the median of the pairwise slopes; intercept:
    the median of ``scale - slope * feet_y``; ``scipy.stats.theilslopes(..., method="joint")``),
    which a minority of wrongly labelled people cannot pull.

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
    """
    ok = np.isfinite(feet_y) & np.isfinite(scales)
    if ok.sum() < GROUND_PEOPLE:
        return None
    slope, intercept, _, _ = theilslopes(scales[ok], feet_y[ok], method="joint")
    if not slope > 0:
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
    feet = _feet_y(kp, skeleton)
    expected = line[0] * feet + line[1]
    if not (np.isfinite(feet) and expected > 0):
        return []
    r = math.log(scale / expected)
    strength = _ramp(abs(r), GROUND_FROM, GROUND_SURE)
    if strength <= 0:
        return []
    ankles = [j for pair in _pair_index(skeleton, "ankle") for j in pair if kp[j, 2] > 0]
    size = "larger" if r > 0 else "smaller"
    return [_reason("off-ground",
                    f"the torso is {abs(math.exp(r) - 1):.0%} {size} than a body standing at "
                    "these feet on the frame's floor; are the legs another person's?",
                    pid, ankles, strength)]


def _facing(kp: np.ndarray, skeleton: Skeleton, scale: float) -> float:
    """``cross(up, left shoulder - right shoulder) / scale``: positive when the body faces the
    camera (its left on the image's right), NaN when it cannot be told."""
    shoulders = _pair_index(skeleton, "shoulder")
    hips = _pair_index(skeleton, "hip")
    if not shoulders or not (kp[list(shoulders[0]), 2] > 0).all():
        return float("nan")
    ls, rs = shoulders[0]
    up = np.array([0.0, -1.0])
    if hips and (kp[list(hips[0]), 2] > 0).all():
        axis = kp[[ls, rs], :2].mean(axis=0) - kp[list(hips[0]), :2].mean(axis=0)
        norm = float(np.hypot(*axis))
        if norm > 0:
            up = axis / norm
    d = kp[ls, :2] - kp[rs, :2]
    return float(up[0] * d[1] - up[1] * d[0]) / scale


def mirrored(pid: int, kp: np.ndarray, skeleton: Skeleton, scores: np.ndarray | None,
             scale: float) -> list[Reason]:
    """A body labelled as facing the camera whose face the model hardly sees.

    Parameters
    ----------
    pid
        The person's id.
    kp
        ``(K, 3)`` ``x, y, v``.
    skeleton
        Needs ``left_/right_`` shoulders, eyes or a ``nose``, and ears or shoulders.
    scores
        ``(K,)`` model score per joint (NaN where none), or None (no check).
    scale
        The person's stature in pixels.

    Returns
    -------
    list of Reason
        At most one ``mirrored`` reason naming every labelled left or right joint.

    Notes
    -----
    A network that sees a person from behind often takes the back for a front and labels
    every joint on the wrong side; the geometry then is that of a body facing the camera, and
    nothing in it is crossed. What gives it away is the face: seen from behind, the nose and
    eyes are hidden while the ears and shoulders are not. Facing: ``cross(up, left shoulder -
    right shoulder) / scale > FRONT_MARGIN`` (``up`` from the hip centre to the shoulder
    centre). Face ratio ``q = mean score(nose, eyes) / mean score(ears, shoulders)``; strength
    ``q`` ramped from ``FACE_FROM`` (0.9) to ``FACE_SURE`` (0.5). The reverse (labelled as seen
    from behind, face confidently seen) is not flagged: a face turned sideways shows too.
    Common practice, no source.

    Examples
    --------
    >>> from app.model.skeleton import coco_body
    >>> sk = coco_body()
    >>> kp = np.zeros((17, 3)); kp[:, 2] = 2
    >>> kp[:, 0] = [100, 104, 96, 108, 92, 113, 87, 115, 85, 116, 84, 110, 90, 110, 90, 110, 90]
    >>> kp[:, 1] = [60, 57, 57, 58, 58, 72, 72, 90, 90, 105, 105, 101, 101, 125, 125, 150, 150]
    >>> seen = np.full(17, 0.9)
    >>> mirrored(1, kp, sk, seen, 100.0)
    []
    >>> hidden = seen.copy(); hidden[:3] = 0.4          # nose and eyes barely seen
    >>> [(r.kind, round(r.strength, 2)) for r in mirrored(1, kp, sk, hidden, 100.0)]
    [('mirrored', 1.0)]
    """
    if scores is None or not (np.isfinite(scale) and scale > 0):
        return []
    if not _facing(kp, skeleton, scale) > FRONT_MARGIN:
        return []
    idx = {n: i for i, n in enumerate(skeleton.joints)}
    face = [idx[n] for n in ("nose", "left_eye", "right_eye") if n in idx]
    rest = [j for pair in _pair_index(skeleton, "ear", "shoulder") for j in pair]
    on = (kp[:, 2] > 0) & np.isfinite(scores)
    face = [j for j in face if on[j]]
    rest = [j for j in rest if on[j]]
    if not face or not rest:
        return []
    reference = float(np.mean(scores[rest]))
    if reference <= 0:
        return []
    q = float(np.mean(scores[face])) / reference
    strength = _ramp(q, FACE_FROM, FACE_SURE)
    if strength <= 0:
        return []
    sided = [j for pair in skeleton.flip_pairs for j in pair if kp[j, 2] > 0]
    return [_reason("mirrored",
                    f"labelled as facing the camera, but the model sees the face at {q:.2f} of "
                    "the ears and shoulders: seen from behind, left and right swapped?",
                    pid, sorted(sided), strength)]


def crossed_sides(pid: int, kp: np.ndarray, skeleton: Skeleton, scale: float,
                  maps: Any = None) -> list[Reason]:
    """Left and right that disagree with the rest of the body.

    Parameters
    ----------
    pid
        The person's id.
    kp
        ``(K, 3)`` ``x, y, v``.
    skeleton
        Needs ``left_/right_`` shoulders and hips.
    scale
        The person's stature in pixels.
    maps
        Optional network maps (``.pafs``, ``.stride``) for the field comparison of arms and
        legs.

    Returns
    -------
    list of Reason
        ``crossed-sides`` reasons, each with strength 1.

    Notes
    -----
    The torso's up direction ``u`` (hip centre to shoulder centre) and each left-right pair's
    ``d = right - left`` give ``cross(u, d) / scale``; its sign says which way the body faces.
    Shoulders, hips and the face must agree (no one twists more than a quarter turn between
    them); a pair clear of edge-on (0.04 of stature) that disagrees with a clear majority of
    the others is crossed. Arms and legs are checked along their chains: with maps, each
    side's own field read along the crossed pairing beats the labelled pairing by more than
    0.5 in summed ``E``; without, the crossed pairing is shorter by 40 %. Common practice, no
    source.

    Examples
    --------
    >>> from app.model.skeleton import coco_body
    >>> sk = coco_body()
    >>> kp = np.zeros((17, 3)); kp[:, 2] = 2
    >>> kp[:, 0] = [100, 104, 96, 108, 92, 113, 87, 115, 85, 116, 84, 110, 90, 110, 90, 110, 90]
    >>> kp[:, 1] = [60, 57, 57, 58, 58, 72, 72, 90, 90, 105, 105, 101, 101, 125, 125, 150, 150]
    >>> crossed_sides(1, kp, sk, 100.0)
    []
    >>> kp[[11, 12]] = kp[[12, 11]]                       # hips swapped
    >>> [(r.kind, r.joints) for r in crossed_sides(1, kp, sk, 100.0)]
    [('crossed-sides', (11, 12))]
    """
    out: list[Reason] = []
    if not (np.isfinite(scale) and scale > 0):
        return out
    on = kp[:, 2] > 0
    core = _pair_index(skeleton, "shoulder", "hip")
    face = _pair_index(skeleton, "eye", "ear")
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
                out.append(_reason("crossed-sides",
                                   f"left and right {part} are the other way round from the "
                                   "rest of the body", pid, (a, b), 1.0))
    for parent, child in (("shoulder", "elbow"), ("elbow", "wrist"), ("hip", "knee"),
                          ("knee", "ankle")):
        pp = _pair_index(skeleton, parent, child)
        if len(pp) != 2:
            continue
        (lp, rp), (lc, rc) = pp
        if not on[[lp, rp, lc, rc]].all():
            continue
        same = np.hypot(*(kp[lp, :2] - kp[lc, :2])) + np.hypot(*(kp[rp, :2] - kp[rc, :2]))
        swap = np.hypot(*(kp[lp, :2] - kp[rc, :2])) + np.hypot(*(kp[rp, :2] - kp[lc, :2]))
        left, right = _limb_index(skeleton, lp, lc), _limb_index(skeleton, rp, rc)
        if maps is not None and left is not None and right is not None:
            e_same = _e(maps, left, kp[lp], kp[lc]) + _e(maps, right, kp[rp], kp[rc])
            e_swap = _e(maps, left, kp[lp], kp[rc]) + _e(maps, right, kp[rp], kp[lc])
            if e_swap > e_same + 0.5:
                out.append(_reason("crossed-sides",
                                   f"the model's field joins each {child} to the other side's "
                                   f"{parent}", pid, (lc, rc), 1.0))
                continue
        if swap < 0.6 * same and same > 0.15 * scale:
            out.append(_reason("crossed-sides",
                               f"each {child} sits by the other side's {parent}", pid,
                               (lc, rc), 1.0))
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
    strength = _ramp(shortfall, WEAK_FROM, WEAK_SURE)
    if strength <= 0:
        return []
    limbs = [c for c in np.flatnonzero(ok & (gap > WEAK_SURE)).tolist()]
    joints = sorted({j for c in limbs for j in skeleton.limbs[c]})
    names = ", ".join(skeleton.limb_names()[c] for c in limbs[:3]) + \
        (" ..." if len(limbs) > 3 else "")
    return [_reason("weak-limb",
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
    strength = _ramp(reference - mean, LOW_FROM, LOW_SURE)
    if strength <= 0:
        return []
    weakest = np.flatnonzero(on & (scores < reference))
    return [_reason("low-score", f"the model scored this person's joints {mean:.2f} on average "
                    f"(the frame's people: {reference:.2f})", pid, weakest, strength)]


# ------------------------------------------------------------------------- pairs

def duplicates_and_splits(people: Mapping[int, np.ndarray], skeleton: Skeleton,
                          scales: Mapping[int, float],
                          scores: Mapping[int, np.ndarray] | None = None) -> list[Reason]:
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

    Returns
    -------
    list of Reason
        ``tangled`` for both of a close pair, ``duplicate`` for its weaker member, ``split``
        for both halves of a body cut in two.

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
                strength = _ramp(d, TANGLE_FROM, TANGLE_SURE)
                if strength > 0:
                    for pid, mate in ((p, q), (q, p)):
                        out.append(_reason("tangled",
                                           f"its joints lie a median {d:.2f} of a body height "
                                           f"from person {mate}'s: parts may be swapped "
                                           "between them", pid, shared, strength))
                strength = _ramp(d, DUPLICATE_FROM, DUPLICATE_SURE)
                if strength > 0:
                    weaker = q if _strength(b, scores, q) <= _strength(a, scores, p) else p
                    keeper = p if weaker == q else q
                    out.append(_reason("duplicate",
                                       f"the same body as person {keeper}, found twice "
                                       f"(joints a median {d:.2f} of a body height apart)",
                                       weaker, shared, strength))
                continue
            if both.any():
                continue
            link = _split_link(a, b, skeleton, fractions)
            if link is not None:
                j1, j2 = link
                for pid, j in ((p, j1), (q, j2)):
                    mate = q if pid == p else p
                    out.append(_reason("split",
                                       f"looks like the rest of person {mate}'s body (joined "
                                       f"at {skeleton.joints[j1]}-{skeleton.joints[j2]})",
                                       pid, (j,), 1.0))
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


# ------------------------------------------------------------------------- the frame

def combine(reasons: list[Reason], people: Any) -> dict[int, float]:
    """Each person's suspicion from their reasons.

    Parameters
    ----------
    reasons
        The frame's reasons (frame-level ones, with no person, are ignored).
    people
        The ids of the frame's people (an iterable of ints).

    Returns
    -------
    dict
        Person id -> suspicion in (0, 1).

    Notes
    -----
    ``suspicion = 1 / (1 + exp(-(PRIOR + sum over kinds of the largest evidence of that
    kind))``: log-odds of independent signs add; several reasons of one kind (two stretched
    limbs) are one sign, counted at its strongest.

    References
    ----------
    I. J. Good, "Probability and the Weighing of Evidence", Griffin, 1950 (weights of
    evidence as log-odds that add; from memory).

    Examples
    --------
    >>> r = [Reason("stretched-limb", "", 1, evidence=3.0), Reason("stretched-limb", "", 1,
    ...      evidence=4.0), Reason("tangled", "", 1, evidence=1.0)]
    >>> {p: round(s, 3) for p, s in combine(r, [1, 2]).items()}   # PRIOR + 4 + 1, PRIOR
    {1: 0.668, 2: 0.013}
    """
    best: dict[int, dict[str, float]] = {int(p): {} for p in people}
    for r in reasons:
        if r.person in best:
            kinds = best[r.person]
            kinds[r.kind] = max(kinds.get(r.kind, 0.0), r.evidence)
    return {p: _sigmoid(PRIOR + sum(kinds.values())) for p, kinds in best.items()}


def stored_suspicion(reasons: Any) -> dict[int, float]:
    """Each person's suspicion from a frame's reasons as stored (:meth:`Reason.to_dict`).

    Parameters
    ----------
    reasons
        A list of dicts with ``kind``, ``person`` and ``evidence`` (what
        :func:`app.jobs_analysis.run_triage` keeps in the project).

    Returns
    -------
    dict
        Person id -> suspicion, for every person named by a reason; a person is flagged when
        it reaches :data:`FLAG_AT`. People without reasons are at ``1 / (1 + exp(-PRIOR))``.

    Notes
    -----
    The same combination as :func:`combine`; stored evidence is rounded to 4 decimals.

    Examples
    --------
    >>> stored = [{"kind": "off-ground", "person": 3, "evidence": 4.0, "weight": 0.42},
    ...           {"kind": "tangled", "person": 3, "evidence": 1.0, "weight": 0.04},
    ...           {"kind": "crowded", "person": None, "evidence": 0.0, "weight": 0.8}]
    >>> {p: round(v, 3) for p, v in stored_suspicion(stored).items()}
    {3: 0.668}
    """
    rebuilt = [Reason(str(r.get("kind", "")), "", int(r["person"]),
                      evidence=float(r.get("evidence") or 0.0))
               for r in reasons or () if r.get("person") is not None]
    return combine(rebuilt, sorted({r.person for r in rebuilt if r.person is not None}))


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

    Notes
    -----
    See the module docstring for the checks and how they combine.

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
    >>> t.flagged, sorted({r.kind for r in t.reasons})
    ([1], ['stretched-limb'])
    """
    arrays = {int(p): np.asarray(v, dtype=np.float64) for p, v in people.items()}
    score_arrays = None if scores is None else \
        {int(p): np.asarray(v, dtype=np.float64) for p, v in scores.items()}
    fractions = limb_fractions(skeleton)
    reach = reach_matrix(skeleton)
    present = [p for p, kp in arrays.items() if (kp[:, 2] > 0).any()]
    torso = {p: person_scale(arrays[p], skeleton) for p in present}
    scales = {p: body_scale(arrays[p], skeleton, fractions) for p in present}
    support = typical = None
    if maps is not None and present:
        support = limb_support(np.stack([arrays[p] for p in present]), skeleton, maps)
        typical = typical_support(support)
    line = ground_line(np.array([_feet_y(arrays[p], skeleton) for p in present]),
                       np.array([torso[p] for p in present]))
    typical_score = None
    if score_arrays is not None:
        means = [float(np.nanmean(score_arrays[p][(arrays[p][:, 2] > 0)]))
                 for p in present if p in score_arrays
                 and np.isfinite(score_arrays[p][arrays[p][:, 2] > 0]).any()]
        if len(means) >= 3:
            typical_score = float(np.median(means))
    reasons: list[Reason] = []
    for n, pid in enumerate(present):
        kp = arrays[pid]
        own = None if score_arrays is None else score_arrays.get(pid)
        reasons += missing_joints(pid, kp, skeleton, image_size, scales[pid], reach)
        reasons += stretched_limbs(pid, kp, skeleton, torso[pid], reach)
        reasons += upright_body(pid, kp, skeleton, torso[pid])
        reasons += off_ground(pid, kp, skeleton, torso[pid], line)
        reasons += mirrored(pid, kp, skeleton, own, torso[pid])
        reasons += crossed_sides(pid, kp, skeleton, torso[pid], maps)
        if support is not None and typical is not None:
            reasons += weak_limbs(pid, kp, skeleton, support[n], typical)
        reasons += low_scores(pid, kp, own, typical_score)
    reasons += duplicates_and_splits({p: arrays[p] for p in present}, skeleton, scales,
                                     score_arrays)
    reasons = [r for r in reasons if r.strength >= MIN_STRENGTH]
    suspicion = combine(reasons, arrays)
    ci = crowd_index(arrays)
    if ci > CROWDED_FROM:
        reasons.append(Reason("crowded", f"crowded frame (crowd index {ci:.2f})", None, (),
                              min(ci, 1.0), min(ci, 1.0), 0.0))
    score = float(sum(suspicion.values()) + CROWD_WEIGHT * ci)
    reasons.sort(key=lambda r: (-r.weight, r.person if r.person is not None else -1))
    return FrameTriage(score, reasons, suspicion, ci)
