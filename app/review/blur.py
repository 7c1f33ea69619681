"""Blurring the people in a frame before it leaves the project in a review packet.

Auto-labels in a crowd are exactly what is wrong (a missed person, a head given to a
neighbour), so a blur placed from the labels alone cannot be trusted. Regions come from every
source of evidence, each recorded as a *source* of the region it places:

``labels``
    Every labelled person: an ellipse around the head placed from the face joints, else from
    the shoulders (:func:`head_ellipses`).
``maps``
    The network's confidence maps kept with the frame: every head-joint peak (nose, eyes, ears)
    that no labelled person owns, grouped into heads and sized from the local scale of the
    labelled people nearby or, away from them, from the frame's floor in perspective
    (:func:`map_head_ellipses`); and the peaks left once the bumps the labels explain are
    taken away, where a faint head lay on a labelled neighbour's slope
    (:func:`unexplained_peaks`).
``detector``
    A general-purpose face detector (:mod:`app.review.faces`) as the last net
    (:func:`face_ellipses`).

A detector's face and a head only the summed face maps show are judged against the band where
the frame's labelled heads lie (:func:`head_band`), not against the people nearest them, whose
size a wrong joint may double.

Pieces that overlap merge into one region, which remembers its sources
and the labelled people behind it; :func:`blur_regions` blurs the union of each region's
shapes. With ``mode="people"`` every person's whole region is blurred instead: the hull of a
person's labelled joints, of each person the maps group, and a body box under each face the
detector finds (:func:`place_regions`).

Without maps nothing but the detector can find a person the labels miss, and it finds only
faces turned to the camera: :class:`BlurPlan` says so (:meth:`BlurPlan.risk`).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import cv2
import numpy as np
from scipy.stats import theilslopes

from app.analysis.anthropometry import person_scale
from app.model.skeleton import Skeleton
from app.wording import count

__all__ = ["MODES", "SOURCES", "BlurPlan", "HeadBand", "Region", "Unexplained", "blur_frame",
           "blur_regions", "face_ellipses", "head_band", "head_ellipses", "label_head_ellipses",
           "local_stature", "map_head_ellipses", "place_regions", "region_mask",
           "shoulder_head_ellipses", "unexplained_peaks"]

#: What a blurred image hides: heads, or whole people.
MODES = ("heads", "people")
#: What may place a region, in the order they are tried.
SOURCES = ("labels", "maps", "detector")

FACE_JOINTS = ("nose", "left_eye", "right_eye", "left_ear", "right_ear")
#: The ears, left first (see :func:`_past_ears`).
EARS = ("left_ear", "right_ear")

#: Ellipse half-width and half-height as fractions of stature H (see :func:`head_ellipses`).
HALF_WIDTH = 0.085
HALF_HEIGHT = 0.115
#: How far above the face landmarks' mean the head's centre lies, and above the shoulders.
FACE_LIFT = 0.02
NECK_LIFT = 0.117
#: A head's width as a fraction of stature (common practice, no source; the ellipse above is
#: wider to hold hair and labels a few pixels off).
HEAD_WIDTH = 0.1
#: Margin around the face joints an ellipse holds, as a fraction of stature (half a head's
#: width).
REACH_MARGIN = 0.05
#: Shoulder width as a fraction of stature (the torso table of app.analysis.anthropometry).
SHOULDER_WIDTH = 0.259
#: Gaussian sigma of the blur as a fraction of stature: half the head ellipse's smaller
#: half-axis, about 0.42 of a head's width (see :func:`blur_regions`).
SIGMA = HALF_WIDTH / 2
#: A map peak is owned by a person whose joint of the same kind lies within this share of
#: the person's stature (half a head's width).
OWNED = 0.05
#: Head-joint peaks this close (share of the local stature) belong to one head: any two
#: landmarks of one head lie within about a head's width (app.analysis.anthropometry).
SAME_HEAD = 0.12
#: Face joints of one person this far apart (share of their stature) lie on two heads.
OTHER_HEAD = 0.2
#: Least confidence of a map peak that marks a head alone: the default of
#: app.analysis.association.find_peaks, the value grouping uses too.
PEAK_THRESHOLD = 0.1
#: Least peak of the sum of the face joints' maps that marks a head: a network that barely
#: sees a person still agrees with itself across channels, where the noise of one channel
#: does not, so the sum finds faint heads that no single channel shows above
#: :data:`PEAK_THRESHOLD` (tuned on demo seed 2, see app/demo/blurcheck.py).
HEAD_SUM = 0.2
#: A peak of the face sum is owned by a person with any face joint within this share of
#: their stature (the sum peaks between a head's landmarks).
OWNED_SUM = 0.08
#: Least value of a faint landmark: a local maximum of a face channel, once the labels' bumps
#: are taken away, that widens a head found by the face sum alone but never makes one (see
#: :meth:`Unexplained.extent`). Chosen on the misses of demo seeds 43 and 46: 0.05 let what
#: is left of labelled heads' bumps widen heads until 19 % of a frame was blurred; fresh
#: seeds measure it (app/demo/blurcheck.py).
FAINT = 0.07
#: Least and largest width (standard deviation, in cells) of a bump taken away as explained
#: by a label (see :func:`unexplained_peaks`).
BUMP_CELLS = (0.5, 4.0)
#: Stature assumed, as a share of the image height, when a frame has no labelled person.
DEFAULT_STATURE = 0.5
#: Widest plausible face box, as a fraction of the local stature: three heads' widths.
MAX_FACE = 0.3
#: How many robust spreads (1.4826 median absolute deviations, the standard deviation of a
#: normal sample) past the median of the labelled heads' sizes and heights a head may lie and
#: still be among them (see :func:`head_band`; three is the common outlier rule, no source).
BAND_SPREADS = 3.0
#: Two pieces merge when the overlap of their boxes covers this share of the smaller box.
MERGE_OVERLAP = 0.3
#: In ``people`` mode, how far a person's region reaches beyond their joints (share of
#: stature): more than half a torso's width, and clothes and feet reach past the joints (a
#: skirt's hem, a coat, the foot beyond the ankle).
BODY_MARGIN = 0.1


# ---------------------------------------------------------------------- what is blurred

@dataclass(frozen=True)
class Region:
    """One place blurred: the union of its shapes, and what placed it.

    ``ellipses`` is ``(n, 4)`` ``cx, cy, half_width, half_height`` (axis-aligned) and
    ``polygons`` a tuple of ``(m, 2)`` ``x, y`` arrays, all in image pixels; ``sigma`` the
    Gaussian blur's standard deviation in pixels; ``sources`` a subset of :data:`SOURCES`;
    ``people`` the ids of the labelled people whose labels placed a part of it.
    """

    ellipses: np.ndarray
    polygons: tuple[np.ndarray, ...]
    sigma: float
    sources: frozenset[str]
    people: frozenset[int] = frozenset()

    def bounds(self) -> tuple[float, float, float, float]:
        """``x0, y0, x1, y1``: the box around every shape (not clipped to the image)."""
        corners = [np.column_stack([e[:, 0] - e[:, 2], e[:, 1] - e[:, 3],
                                    e[:, 0] + e[:, 2], e[:, 1] + e[:, 3]])
                   for e in (self.ellipses,) if len(e)]
        corners += [np.concatenate([p.min(axis=0), p.max(axis=0)])[None] for p in self.polygons]
        box = np.concatenate(corners, axis=0)
        return (float(box[:, 0].min()), float(box[:, 1].min()), float(box[:, 2].max()),
                float(box[:, 3].max()))

    def to_value(self) -> dict[str, Any]:
        """The region as the packet's manifest records it (see :mod:`app.review.packet`)."""
        x0, y0, x1, y1 = self.bounds()
        return {
            "sources": [s for s in SOURCES if s in self.sources],
            "people": sorted(self.people),
            "box": [round(x0, 1), round(y0, 1), round(x1, 1), round(y1, 1)],
            "sigma": round(self.sigma, 2),
            "ellipses": np.round(self.ellipses, 1).tolist(),
            "polygons": [np.round(p, 1).tolist() for p in self.polygons],
        }


@dataclass(frozen=True)
class BlurPlan:
    """Where a frame is blurred and how far that can be trusted.

    ``unplaced``: labelled people with no labelled joint (nothing of the labels locates them).
    ``unsure``: without maps, labelled people whose head the labels only guess (no face joint
    labelled). ``maps`` and ``detector`` say whether those sources were there.
    ``share``: the fraction of the image's pixels inside a region.
    """

    regions: tuple[Region, ...]
    unplaced: int = 0
    unsure: int = 0
    maps: bool = False
    detector: bool = False
    share: float = 0.0
    size: tuple[int, int] = field(default=(0, 0))

    def risk(self) -> str | None:
        """Why people may stay recognisable, in a few words, or None.

        Without maps, a person the labels miss is found only by the face detector, which sees
        no face turned away or covered, so such a frame is always at risk; the people whose
        head the labels place by a guess (or not at all) are counted. A face the detector finds
        is blurred, but it clears no one: it may be another person's.

        Examples
        --------
        >>> BlurPlan((), unsure=2).risk()
        '2 people may be unblurred: no maps'
        >>> BlurPlan((), maps=True).risk() is None
        True
        """
        if self.maps:
            return None
        at_risk = self.unplaced + self.unsure
        if at_risk:
            return f"{count(at_risk, 'people')} may be unblurred: no maps"
        return "people the labels miss may be unblurred: no maps"


# ---------------------------------------------------------------------- heads from labels

def head_ellipses(people: Sequence[np.ndarray], skeleton: Skeleton,
                  image_size: tuple[int, int]) -> np.ndarray:
    """Where each person's head is, as an axis-aligned ellipse.

    Parameters
    ----------
    people
        ``(K, 3)`` ``x, y, v`` arrays, one per person.
    skeleton
        The joint layout (face joints and shoulders are found by name).
    image_size
        ``(width, height)`` in pixels; sets the smallest ellipse.

    Returns
    -------
    numpy.ndarray
        ``(N, 4)`` float64 ``cx, cy, half_width, half_height`` in image pixels; a row of NaN
        for a person with no labelled joint (nothing locates them).

    Notes
    -----
    Stature ``H`` is :func:`app.analysis.anthropometry.person_scale` (from the torso); without
    a labelled torso segment it is the spread of the face joints over 0.1 (a head is about
    0.1 H wide), else the larger side of the box around the labelled joints. With three or
    more people in the frame, ``H`` is kept between half and twice their median: a larger
    torso holds a joint of another person, a smaller one is a fragment of a person (the face
    joints are held whatever the scale, see below).

    Face joints more than ``0.2 H`` apart (H here at least the frame's median stature, as a
    small torso is the commoner error) are taken for two heads (a label given to a
    neighbour, a face put on the wrong copy of a person found twice; two heads side by side
    are about a shoulder width, 0.26 H, apart, while one head's landmarks lie within 0.1 H
    and a torso seen side on understates H): they are gathered as map peaks are
    (:func:`map_head_ellipses`), nose first, and the person's head is the group with the most
    joints; :func:`label_head_ellipses` gives the others too. Within one
    head, ``H`` is raised to the group's spread over 0.1, by at most half (a torso seen side
    on or bowing understates the scale; a wide spread is also a sign of wrong joints, which
    the held landmarks cover anyway).

    The head is about 0.13 H from chin to crown and 0.1 H wide (chin to crown from memory of
    Winter, "Biomechanics and Motor Control of Human Movement", Fig. 4.1, after Drillis and
    Contini 1966; the width common practice, no source). The ellipse is larger than the head,
    ``0.085 H`` by ``0.115 H`` half-axes, to cover hair and labels a few pixels off. Its centre
    is the mean of the labelled face joints lifted by ``0.02 H`` (eyes and ears lie near the
    middle of the head, the nose a little below), and each half-axis is widened where needed
    to hold every face joint of the group with a margin of ``0.05 H``. With no face joint
    labelled, the centre is
    ``0.117 H`` from the middle of the shoulders (shoulders at 0.818 H, the head's middle at
    about 0.935 H, Winter Fig. 4.1 from memory), perpendicular to the shoulder line, on the
    side away from the hips (image up when the hips are unlabeled); with one shoulder, straight
    up from it. Half-axes are at least 3 pixels and 2 % of the image's shorter side.

    Examples
    --------
    >>> from app.model.skeleton import coco_body
    >>> kp = np.zeros((17, 3))
    >>> kp[[1, 2], :] = [[95, 50, 2], [105, 50, 2]]          # two eyes, 10 px apart
    >>> kp[[5, 6], :] = [[74.1, 90, 2], [125.9, 90, 2]]      # shoulders 51.8 px: H = 200
    >>> head_ellipses([kp], coco_body(), (640, 480)).round(1)
    array([[100.,  46.,  17.,  23.]])
    """
    return label_head_ellipses(people, skeleton, image_size)[0]


def label_head_ellipses(people: Sequence[np.ndarray], skeleton: Skeleton,
                        image_size: tuple[int, int]
                        ) -> tuple[np.ndarray, list[tuple[int, np.ndarray]]]:
    """Every head the labels show: each person's (:func:`head_ellipses`), and the other heads
    their face joints lie on, as ``(person index, ellipse)`` pairs.

    Examples
    --------
    >>> from app.model.skeleton import coco_body
    >>> kp = np.zeros((17, 3))
    >>> kp[[0, 1, 2], :] = [[100, 50, 2], [95, 45, 2], [105, 45, 2]]    # a face
    >>> kp[[3], :] = [[200, 48, 2]]                     # a left ear of another, alone: the
    >>> # head reaches a head's width (20 px) on the right of it (see _past_ears)
    >>> kp[[5, 6], :] = [[74.1, 90, 2], [125.9, 90, 2]]                 # H = 200
    >>> main, extra = label_head_ellipses([kp], coco_body(), (640, 480))
    >>> main.round(1), [(n, e.round(1)) for n, e in extra]
    (array([[100. ,  42.7,  17. ,  23. ]]), [(0, array([206.5,  44. ,  23.5,  23. ]))])
    """
    floor = _floor(image_size)
    face = _indices(skeleton, FACE_JOINTS)
    shoulders = _indices(skeleton, ("left_shoulder", "right_shoulder"))
    hips = _indices(skeleton, ("left_hip", "right_hip"))
    out = np.full((len(people), 4), np.nan)
    extra: list[tuple[int, np.ndarray]] = []
    statures = _statures(people, skeleton)
    low, high = _bounds(statures)
    around, widths_only = _around_statures(people, statures, skeleton, image_size)
    for n, person in enumerate(people):
        kp = np.asarray(person, dtype=np.float64)
        on = _labelled(kp)
        if not on.any():
            continue
        stature = float(np.clip(statures[n], low, high))
        if widths_only[n] and np.isfinite(around[n]):
            stature = max(stature, float(around[n]))
        face_on = [j for j in face if on[j]]
        shoulders_on = [j for j in shoulders if on[j]]
        if face_on:
            xy = kp[face_on, :2]
            typical = high / 2 if np.isfinite(high) else stature  # the frame's median
            groups = _heads(xy, -np.arange(len(xy), dtype=np.float64),
                            np.full(len(xy), OTHER_HEAD * max(stature, typical)))
            groups.sort(key=len, reverse=True)  # stable: of equal groups, the nose's first
            lateral = _lateral(kp, on, skeleton)
            ellipses = [_group_ellipse(xy[g], stature, floor, beyond=_past_ears(
                [face_on[i] for i in g], xy[g], lateral, stature, skeleton),
                ceiling=around[n]) for g in groups]
            out[n] = ellipses[0]
            extra += [(n, e) for e in ellipses[1:]]
            if shoulders_on and set(face_on) <= set(_indices(skeleton, EARS)):
                # Ears alone (a back, a profile) are the labels a crowd gets wrong most
                # easily, and a far ear is often missing: the head is also placed from the
                # shoulders, as for a person with no face joint.
                centre = _above_shoulders(kp, shoulders_on, [j for j in hips if on[j]],
                                          stature)
                extra.append((n, np.array([*centre, max(floor, HALF_WIDTH * stature),
                                           max(floor, HALF_HEIGHT * stature)])))
            continue
        if shoulders_on:
            centre = _above_shoulders(kp, shoulders_on, [j for j in hips if on[j]], stature)
        else:
            xy = kp[on, :2]
            centre = np.array([xy[:, 0].mean(), xy[:, 1].min() - NECK_LIFT * stature])
        out[n] = (*centre, max(floor, HALF_WIDTH * stature), max(floor, HALF_HEIGHT * stature))
    return out, extra


def _group_ellipse(xy: np.ndarray, stature: float, floor: float,
                   extent: np.ndarray | None = None,
                   beyond: np.ndarray | None = None, ceiling: float = np.nan) -> np.ndarray:
    """The ellipse of one head from its landmarks (see :func:`head_ellipses`); ``extent``:
    faint landmarks (:meth:`Unexplained.extent`), which widen each half-axis to reach them
    with the margin but neither move the centre nor raise the scale; ``beyond``: where the
    rest of a head seen by its ears alone may reach (:func:`_past_ears`): the ellipse
    becomes the one inscribed in the box around the landmarks' ellipse and those points with
    the margin, so it keeps the landmarks' side and reaches the other. The landmarks' spread
    over 0.1 raises the scale up to half again, or up to ``ceiling`` (the stature of the
    people around, :func:`_around_statures`) when that is more."""
    if len(xy) >= 2:
        most = max(1.5 * stature, ceiling) if np.isfinite(ceiling) else 1.5 * stature
        stature = max(stature, min(float(np.ptp(xy, axis=0).max()) / 0.1, most))
    centre = xy.mean(axis=0) - [0.0, FACE_LIFT * stature]
    margin = REACH_MARGIN * stature
    reach = np.abs(xy - centre).max(axis=0) + margin
    axes = np.array([max(floor, HALF_WIDTH * stature, reach[0]),
                     max(floor, HALF_HEIGHT * stature, reach[1])])
    if extent is not None and len(extent):
        axes = np.maximum(axes, np.abs(extent - centre).max(axis=0) + margin)
    if beyond is not None and len(beyond):
        low = np.minimum(centre - axes, (beyond - margin).min(axis=0))
        high = np.maximum(centre + axes, (beyond + margin).max(axis=0))
        centre, axes = (low + high) / 2, (high - low) / 2
    return np.array([*centre, *axes])


def _lateral(kp: np.ndarray, on: np.ndarray, skeleton: Skeleton) -> np.ndarray | None:
    """The unit image direction from a person's left shoulder to their right one, or None
    when not both are labelled (or they coincide): the body's left-to-right axis, whichever
    way the person faces."""
    shoulders = _indices(skeleton, ("left_shoulder", "right_shoulder"))
    if len(shoulders) != 2 or not on[shoulders].all():
        return None
    left, right = shoulders
    along = kp[right, :2] - kp[left, :2]
    length = float(np.hypot(*along))
    return along / length if length > 0 else None


def _past_ears(joints: Sequence[int], xy: np.ndarray, lateral: np.ndarray | None,
               stature: float, skeleton: Skeleton) -> np.ndarray | None:
    """Where the rest of a head seen by one of its ears may reach, ``(n, 2)``, or None.

    An ear lies at the side of the head, so a head whose landmarks hold one ear and not the
    other (a back whose far ear is hidden or unlabelled, a face whose far ear the network
    missed, a profile) reaches up to a head's width, :data:`HEAD_WIDTH` of stature, past
    that ear: towards the other ear, i.e. along the body's left-to-right axis from the left
    ear and against it from the right one (``lateral``, from the shoulders; the head turns on
    the neck by less than a right angle, so it stays on that side). Without both shoulders,
    towards the mean of the head's other landmarks (the nose and eyes lie between the ears),
    and with none, either way along the image's rows. Both ears or none: None.

    Examples
    --------
    >>> from app.model.skeleton import coco_body
    >>> _past_ears([3], np.array([[100.0, 50.0]]), np.array([1.0, 0.0]), 200.0, coco_body())
    array([[120.,  50.]])
    >>> _past_ears([4], np.array([[100.0, 50.0]]), None, 200.0, coco_body())
    array([[ 80.,  50.],
           [120.,  50.]])
    >>> _past_ears([0, 4], np.array([[110.0, 60.0], [100.0, 60.0]]), None, 200.0, coco_body())
    array([[120.,  60.]])
    """
    ears = _indices(skeleton, EARS)
    held = [i for i, j in enumerate(joints) if j in ears]
    if len(held) != 1:
        return None
    ear = xy[held[0]]
    step = HEAD_WIDTH * stature
    if lateral is not None:
        sign = 1.0 if joints[held[0]] == ears[0] else -1.0
        return (ear + sign * step * lateral)[None]
    others = np.delete(np.asarray(xy, dtype=np.float64).reshape(-1, 2), held[0], axis=0)
    if len(others):
        towards = others.mean(axis=0) - ear
        length = float(np.hypot(*towards))
        if length > 0:
            return (ear + step * towards / length)[None]
    return ear + np.array([[-step, 0.0], [step, 0.0]])


def _statures(people: Sequence[np.ndarray], skeleton: Skeleton) -> np.ndarray:
    """``(N,)`` each person's stature (:func:`head_ellipses`), NaN with no labelled joint."""
    face = _indices(skeleton, FACE_JOINTS)
    out = np.full(len(people), np.nan)
    for n, person in enumerate(people):
        kp = np.asarray(person, dtype=np.float64)
        on = _labelled(kp)
        if on.any():
            out[n] = _stature(kp, on, face, skeleton)
    return out


def _around_statures(people: Sequence[np.ndarray], statures: np.ndarray, skeleton: Skeleton,
                     image_size: tuple[int, int]) -> tuple[np.ndarray, np.ndarray]:
    """``(N,)`` twice: the stature of the people around each person (:func:`local_stature`
    of the others, NaN with no one else or no labelled joint), and whether the person's own
    scale rests on the widths of the torso alone.

    A torso's widths (shoulders, hips) shorten as a person turns side on, and a dancer turns
    often; its sides (shoulder to hip) do not. When no side of the torso is labelled, the
    person's own scale is a lower bound of their stature (a projection only shortens), and
    the people around, who stand at about the same depth, tell it better: the head is sized
    by the larger of the two (:func:`head_ellipses`). The people around also bound how far a
    wide spread of face landmarks may raise a person's scale (a wrong hip or shoulder
    shrinks a torso, :func:`_group_ellipse`).
    """
    names = {n: i for i, n in enumerate(skeleton.joints)}
    sides = [(names[a], names[b]) for a, b in (("left_shoulder", "left_hip"),
                                               ("right_shoulder", "right_hip"))
             if a in names and b in names]
    around = np.full(len(people), np.nan)
    places = np.full((len(people), 2), np.nan)
    widths_only = np.zeros(len(people), dtype=bool)
    for n, person in enumerate(people):
        kp = np.asarray(person, dtype=np.float64)
        on = _labelled(kp)
        if on.any():
            places[n] = kp[on, :2].mean(axis=0)
            widths_only[n] = np.isfinite(statures[n]) and not any(on[a] and on[b]
                                                                  for a, b in sides)
    for n in np.flatnonzero(np.isfinite(places).all(axis=1)):
        others = np.arange(len(people)) != n
        if (np.isfinite(statures[others]) & (statures[others] > 0)).any():
            around[n] = local_stature(places[n][None], places[others], statures[others],
                                      image_size)[0]
    return around, widths_only


def _bounds(statures: np.ndarray) -> tuple[float, float]:
    """Half and twice the median of a frame's statures when three or more are known, else
    no bounds: a torso twice the size of the frame's typical one holds a wrong joint, one
    less than half of it is a fragment of a person or seen end on."""
    known = statures[np.isfinite(statures) & (statures > 0)]
    if len(known) < 3:
        return 0.0, np.inf
    median = float(np.median(known))
    return 0.5 * median, 2 * median


def _floor(size: tuple[int, int]) -> float:
    return max(3.0, 0.02 * min(size))


def _indices(skeleton: Skeleton, names: Sequence[str]) -> list[int]:
    index = {n: i for i, n in enumerate(skeleton.joints)}
    return [index[n] for n in names if n in index]


def _labelled(kp: np.ndarray) -> np.ndarray:
    return np.asarray((kp[:, 2] > 0) & np.isfinite(kp[:, :2]).all(axis=1))


def _stature(kp: np.ndarray, on: np.ndarray, face: list[int], skeleton: Skeleton) -> float:
    stature = person_scale(kp, skeleton)
    if np.isfinite(stature) and stature > 0:
        return float(stature)
    face_xy = kp[[j for j in face if on[j]], :2]
    if len(face_xy) >= 2:
        spread = float(np.ptp(face_xy, axis=0).max())
        if spread > 0:
            return spread / 0.1
    xy = kp[on, :2]
    return float(np.ptp(xy, axis=0).max()) if len(xy) >= 2 else 0.0


def _above_shoulders(kp: np.ndarray, shoulders: list[int], hips: list[int],
                     stature: float) -> np.ndarray:
    up = np.array([0.0, -1.0])
    if len(shoulders) == 2:
        a, b = kp[shoulders[0], :2], kp[shoulders[1], :2]
        along = b - a
        length = float(np.hypot(*along))
        if length > 0:
            normal = np.array([-along[1], along[0]]) / length
            if hips:
                away = (a + b) / 2 - kp[hips, :2].mean(axis=0)
                up = normal if normal @ away >= 0 else -normal
            else:
                up = normal if normal[1] <= 0 else -normal
        if stature <= 0:
            stature = length / SHOULDER_WIDTH
    base = kp[shoulders, :2].mean(axis=0)
    return np.asarray(base + up * NECK_LIFT * stature)


# ---------------------------------------------------------------------- heads from the maps

def local_stature(points: np.ndarray, centres: np.ndarray, statures: np.ndarray,
                  image_size: tuple[int, int]) -> np.ndarray:
    """The stature of a person standing at each point, from the labelled people around it.

    Parameters
    ----------
    points
        ``(n, 2)`` image points.
    centres
        ``(P, 2)`` the labelled people's head centres.
    statures
        ``(P,)`` their statures in pixels (NaN or 0 where unknown).
    image_size
        ``(width, height)``.

    Returns
    -------
    numpy.ndarray
        ``(n,)`` statures in pixels.

    Notes
    -----
    Near people: distances are counted in the statures of the people they lead to; the
    median stature of the people whose head lies within 1.5 of those statures of the point,
    and no farther than half a stature or 1.5 times the nearest one's distance (so a large
    person two bodies away does not size the head beside a small one). Else the floor:
    people stand on one floor, and in a perspective view of it a person's image size grows
    linearly with how far down the image they stand (for a
    level camera, ``H_image = f H / Z`` and ``y - y_horizon = f h_camera / Z``, so both are
    proportional to ``1 / Z``); a straight line fitted to stature against head height over the
    frame's people (at least three, spread over a tenth of the image height) by the
    Theil-Sen estimator (the median of the pairwise slopes, so a person with wrong joints does
    not tilt it; Sen 1968, ``scipy.stats.theilslopes``), clipped to half the smallest and twice
    the largest stature seen. Else the median of all, else
    :data:`DEFAULT_STATURE` of the image height. The pinhole relation is the standard
    perspective projection (common practice, no source).

    Examples
    --------
    >>> centres = np.array([[100.0, 100.0], [600.0, 300.0], [900.0, 500.0]])
    >>> local_stature(np.array([[110.0, 95.0], [300.0, 400.0]]), centres,
    ...               np.array([100.0, 200.0, 300.0]), (1280, 720)).round()
    array([100., 250.])
    """
    points = np.asarray(points, dtype=np.float64).reshape(-1, 2)
    known = np.isfinite(statures) & (np.asarray(statures) > 0) & np.isfinite(centres).all(axis=1)
    c, s = np.asarray(centres, dtype=np.float64)[known], np.asarray(statures, float)[known]
    out = np.full(len(points), DEFAULT_STATURE * image_size[1])
    if not len(s):
        return out
    out[:] = np.median(s)
    fit = None
    if len(s) >= 3 and np.ptp(c[:, 1]) >= 0.1 * image_size[1]:
        slope, intercept = theilslopes(s, c[:, 1])[:2]
        fit = (slope, intercept)
    d = np.hypot(points[:, None, 0] - c[None, :, 0], points[:, None, 1] - c[None, :, 1])
    r = d / s[None, :]
    for i in range(len(points)):
        near = r[i] <= min(1.5, max(0.5, 1.5 * r[i].min()))
        if near.any():
            out[i] = np.median(s[near])
        elif fit is not None:
            out[i] = np.clip(np.polyval(fit, points[i, 1]), 0.5 * s.min(), 2.0 * s.max())
    return out


@dataclass(frozen=True)
class HeadBand:
    """Where and how large the frame's labelled heads are (:func:`head_band`): the lowest
    place a head may lie (``bottom``, image y of a centre), the largest half-axes
    (``half_width``, ``half_height``) and a body's height (``body``), in pixels."""

    bottom: float
    half_width: float
    half_height: float
    body: float

    def below(self, y: float) -> bool:
        """Whether a head centred at image row ``y`` lies more than a body's height below
        the band (at the feet of the nearest row or lower: no head stands there)."""
        return y > self.bottom + self.body

    def shrink(self, ellipse: np.ndarray) -> np.ndarray:
        """The ellipse with each half-axis cut to the band's largest, same centre."""
        cx, cy, ax, ay = ellipse
        return np.array([cx, cy, min(ax, self.half_width), min(ay, self.half_height)])

    def too_big(self, ellipse: np.ndarray) -> bool:
        """Whether an ellipse is wider or taller than any head of the band."""
        return bool(ellipse[2] > self.half_width or ellipse[3] > self.half_height)


def head_band(heads: np.ndarray, statures: np.ndarray) -> HeadBand | None:
    """The band of image heights and sizes where a frame's labelled heads lie, or None with
    fewer than three placed heads.

    Parameters
    ----------
    heads
        ``(N, 4)`` the labelled people's head ellipses (:func:`head_ellipses`, NaN rows
        ignored).
    statures
        ``(N,)`` their statures in pixels (NaN or 0 where unknown).

    Notes
    -----
    Robust, so that a few wrong joints do not stretch it: each of the centres' image row
    and the two half-axes is bounded by its median plus :data:`BAND_SPREADS` robust spreads
    (1.4826 times the median absolute deviation, a normal sample's standard deviation;
    common practice, no source); a body's height is the median stature. A person the labels
    miss stands among the labelled ones on one floor, so their head lies in that band: the
    nearest people are no guide to it, as a wrong hip or shoulder may make them look twice
    their size (:func:`place_regions` and :func:`map_head_ellipses` judge the heads that only
    the detector or the summed face maps see against it).

    Examples
    --------
    >>> heads = np.array([[100.0, 200, 30, 40], [300, 210, 32, 42], [500, 190, 28, 38],
    ...                   [700, 205, 31, 41]])
    >>> b = head_band(heads, np.array([300.0, 320, 280, 310]))
    >>> [round(float(v), 1) for v in (b.bottom, b.half_width, b.half_height, b.body)]
    [224.7, 34.9, 44.9, 305.0]
    """
    heads = np.asarray(heads, dtype=np.float64).reshape(-1, 4)
    placed = np.isfinite(heads).all(axis=1)
    if placed.sum() < 3:
        return None
    h = heads[placed]
    known = np.asarray(statures, dtype=np.float64)
    known = known[np.isfinite(known) & (known > 0)]

    def upper(values: np.ndarray) -> float:
        median = float(np.median(values))
        return median + BAND_SPREADS * 1.4826 * float(np.median(np.abs(values - median)))

    body = float(np.median(known)) if len(known) else float(np.median(h[:, 3])) / HALF_HEIGHT
    return HeadBand(upper(h[:, 1]), upper(h[:, 2]), upper(h[:, 3]), body)


def map_head_ellipses(peaks: Sequence[np.ndarray], people: Sequence[np.ndarray],
                      skeleton: Skeleton, image_size: tuple[int, int],
                      head_peaks: np.ndarray | None = None,
                      unexplained: Unexplained | None = None) -> np.ndarray:
    """Heads the network sees that no labelled person owns, as ellipses.

    Parameters
    ----------
    peaks
        Per joint of the skeleton, ``(n_j, 3)`` ``x, y, score`` in image pixels
        (:func:`app.analysis.association.find_peaks`).
    people
        The labelled people, ``(K, 3)`` ``x, y, v`` each.
    skeleton
        The joint layout.
    image_size
        ``(width, height)``.
    head_peaks
        ``(n, 3)`` ``x, y, score``: peaks of the sum of the face joints' confidence maps
        above :data:`HEAD_SUM`, or None.
    unexplained
        What the labels leave unexplained in the maps (:func:`unexplained_peaks`), whose
        faint landmarks widen each head; None: the peaks alone set it.

    Returns
    -------
    numpy.ndarray
        ``(M, 4)`` ``cx, cy, half_width, half_height``, one per head.

    Notes
    -----
    A peak of a face joint (nose, eyes, ears) is owned when a labelled person has that joint
    within ``0.05 H`` of it (H the person's stature, half a head's width); a peak of the face
    sum when any labelled face joint lies within ``0.08 H``. Unowned peaks are gathered into
    heads, strongest first: a peak joins the first head whose first peak lies within
    ``0.12 H`` of it (H the local stature, :func:`local_stature`; any two landmarks of a head
    lie within about a head's width), else starts a head of its own, so a head never reaches
    along a chain of peaks. Each head gets the ellipse the labels
    would give it (:func:`head_ellipses`: centre the peaks' mean lifted by ``0.02 H``,
    half-axes ``0.085 H`` and ``0.115 H``, widened to hold every peak with a margin of
    ``0.05 H``). With ``unexplained``, the ellipse also holds the faint landmarks within
    ``0.12 H`` of the head's strongest peak (:meth:`Unexplained.extent`): the landmarks of a
    faint head, each too weak to be a peak, still show where the head reaches (a face seen
    side on spans from the nose to the far ear). Only a head found by the face sum alone is
    widened so (none of its landmarks a peak of its own channel): a head whose landmarks show
    on their own is placed by them. A head found by the face sum alone whose strongest peak
    lies within a labelled person's legs (the convex hull of their labelled hips, knees and
    ankles) is no head: people stand on one floor, so a visible head never lies among the
    legs of a person in front (in the demo such peaks are the sum of five channels' noise,
    and sized by the floor below the people's heads they blurred up to 5 % of a frame; a
    face the camera sees there is still the detector's). A head whose only landmark peak is
    an ear reaches a head's width past it on both sides (:func:`_past_ears`: nothing here
    says on which side of the ear the head lies). A head found by the face sum alone is
    also judged against the band of the labelled heads (:func:`head_band`, three or more
    placed): more than a body's height below it, it is dropped (no head stands there; in
    the demo such peaks lie among knees and ankles), and larger than any head of the band
    it is shrunk to the band's size (the floor's perspective below the heads, or neighbours
    made tall by a wrong joint, size it large). A head the labels miss stands among the
    labelled ones, inside the band, so this drops none.

    Examples
    --------
    >>> from app.model.skeleton import coco_body
    >>> peaks = [np.zeros((0, 3)) for _ in range(17)]
    >>> peaks[0] = np.array([[300.0, 120.0, 0.9]])            # a nose nobody has
    >>> map_head_ellipses(peaks, [], coco_body(), (640, 480)).round(1)
    array([[300. , 115.2,  20.4,  27.6]])
    """
    face = _indices(skeleton, FACE_JOINTS)
    found = [(j, p) for j in face for p in np.asarray(peaks[j]).reshape(-1, 3)]
    if head_peaks is not None:
        found += [(-1, p) for p in np.asarray(head_peaks).reshape(-1, 3)]
    if not found:
        return np.zeros((0, 4))
    kinds = np.array([j for j, _ in found])
    xy = np.array([p[:2] for _, p in found])
    score = np.array([p[2] for _, p in found])
    centres, statures = _people_scale(people, skeleton, image_size)
    owned = _owned(kinds, xy, people, statures, face)
    xy, score, kinds = xy[~owned], score[~owned], kinds[~owned]
    if not len(xy):
        return np.zeros((0, 4))
    scale = local_stature(xy, centres, statures, image_size)
    floor = _floor(image_size)
    out = []
    legs = _legs(people, skeleton)
    band = head_band(head_ellipses(people, skeleton, image_size), statures)
    for members in _heads(xy, score, SAME_HEAD * scale):
        seed = members[0]
        faint = not (kinds[members] >= 0).any()  # no landmark seen on its own
        if faint and any(cv2.pointPolygonTest(leg, (float(xy[seed, 0]), float(xy[seed, 1])),
                                              False) >= 0 for leg in legs):
            continue
        if faint and band is not None and band.below(float(xy[seed, 1])):
            continue
        extent = (unexplained.extent(xy[seed], SAME_HEAD * scale[seed])
                  if unexplained is not None and faint else None)
        stature = float(np.median(scale[members]))
        seen = members[kinds[members] >= 0]  # the peaks of a landmark's own channel
        beyond = _past_ears(kinds[seen].tolist(), xy[seen], None, stature, skeleton)
        ellipse = _group_ellipse(xy[members], stature, floor, extent, beyond)
        out.append(band.shrink(ellipse) if faint and band is not None else ellipse)
    return np.array(out, dtype=np.float64).reshape(-1, 4)


def shoulder_head_ellipses(peaks: Sequence[np.ndarray], people: Sequence[np.ndarray],
                           skeleton: Skeleton, image_size: tuple[int, int]) -> np.ndarray:
    """Heads above the shoulders the network sees and no labelled person owns, as ellipses.

    Parameters
    ----------
    peaks
        Per joint of the skeleton, ``(n_j, 3)`` ``x, y, score`` in image pixels.
    people
        The labelled people, ``(K, 3)`` ``x, y, v`` each.
    skeleton
        The joint layout.
    image_size
        ``(width, height)``.

    Returns
    -------
    numpy.ndarray
        ``(M, 4)`` ``cx, cy, half_width, half_height``.

    Notes
    -----
    A person the labels miss, seen from behind or with the face covered, may show no face
    landmark above even a faint threshold while the network still sees their shoulders. A
    shoulder peak is owned as a face peak is (:func:`map_head_ellipses`: the same joint of a
    labelled person within ``0.05 H``). Unowned left and right shoulders are paired, strongest
    first, when they lie at most one and a half shoulder widths (``1.5 * 0.259 H``, H the
    local stature, :func:`local_stature`) apart; a pair's head is placed as a labelled
    person's with no face joint (:func:`head_ellipses`: ``0.117 H`` above the middle of the
    shoulders, perpendicular to them, image up). A shoulder with no partner places nothing:
    in the demo such peaks are mostly the network's stray answers, and a head over each
    (reaching half a shoulder width either way, where the neck may be) blurred 16.9 % of a
    frame of demo seed 2 (the limit is 15 %, app/demo/blurcheck.py).

    Examples
    --------
    >>> from app.model.skeleton import coco_body
    >>> peaks = [np.zeros((0, 3)) for _ in range(17)]
    >>> peaks[5] = np.array([[326.0, 200.0, 0.5]]); peaks[6] = np.array([[274.0, 200.0, 0.5]])
    >>> shoulder_head_ellipses(peaks, [], coco_body(), (640, 480)).round(1)
    array([[300. , 171.9,  20.4,  27.6]])
    """
    shoulders = _indices(skeleton, ("left_shoulder", "right_shoulder"))
    if len(shoulders) != 2:
        return np.zeros((0, 4))
    centres, statures = _people_scale(people, skeleton, image_size)
    face = _indices(skeleton, FACE_JOINTS)
    found = []
    for j in shoulders:
        p = np.asarray(peaks[j], dtype=np.float64).reshape(-1, 3)
        found.append(p[~_owned(np.full(len(p), j), p[:, :2], people, statures, face)])
    left, right = found
    floor = _floor(image_size)
    if not len(left) or not len(right):
        return np.zeros((0, 4))
    scale_l = local_stature(left[:, :2], centres, statures, image_size)
    scale_r = local_stature(right[:, :2], centres, statures, image_size)
    free = np.ones(len(right), dtype=bool)
    out = []
    for i in np.argsort(-left[:, 2], kind="stable"):
        h = float(scale_l[i])
        d = np.hypot(*(right[:, :2] - left[i, :2]).T) if len(right) else np.zeros(0)
        near = np.flatnonzero(free & (d <= 1.5 * SHOULDER_WIDTH * h))
        if not len(near):
            continue
        k = near[np.argmax(right[near, 2])]
        free[k] = False
        pair = np.array([left[i, :2], right[k, :2]])
        h = float(np.mean([h, scale_r[k]]))
        centre = _above_shoulders(np.column_stack([pair, [2.0, 2.0]]), [0, 1], [], h)
        out.append([*centre, max(floor, HALF_WIDTH * h), max(floor, HALF_HEIGHT * h)])
    return np.array(out, dtype=np.float64).reshape(-1, 4)


def _legs(people: Sequence[np.ndarray], skeleton: Skeleton) -> list[np.ndarray]:
    """Each labelled person's legs: the convex hull of their labelled hips, knees and ankles
    (three at least), ``(m, 1, 2)`` float32 as OpenCV takes it."""
    legs = _indices(skeleton, ("left_hip", "right_hip", "left_knee", "right_knee",
                               "left_ankle", "right_ankle"))
    out = []
    for person in people:
        kp = np.asarray(person, dtype=np.float64)
        on = [j for j in legs if _labelled(kp)[j]]
        if len(on) >= 3:
            out.append(cv2.convexHull(kp[on, :2].astype(np.float32)))
    return out


def _owned(kinds: np.ndarray, xy: np.ndarray, people: Sequence[np.ndarray],
           statures: np.ndarray, face: list[int]) -> np.ndarray:
    """``(n,)`` bool: which peaks a labelled person owns (see :func:`map_head_ellipses`):
    a peak of joint ``j`` (``kinds >= 0``) when the person has ``j`` labelled within
    :data:`OWNED` of their stature, a peak of the face sum (``kinds == -1``) when any labelled
    face joint lies within :data:`OWNED_SUM`."""
    owned = np.zeros(len(xy), dtype=bool)
    for person, stature in zip(people, statures):
        kp = np.asarray(person, dtype=np.float64)
        on = _labelled(kp)
        if not np.isfinite(stature) or stature <= 0:
            continue
        face_xy = kp[[j for j in face if on[j]], :2].reshape(-1, 2)
        for i, j in enumerate(kinds):
            if j < 0:
                owned[i] |= bool(len(face_xy)) and bool(
                    (np.hypot(*(face_xy - xy[i]).T) <= OWNED_SUM * stature).any())
            elif on[j] and np.hypot(*(kp[j, :2] - xy[i])) <= OWNED * stature:
                owned[i] = True
    return owned


def _peak_width(grid: np.ndarray, r: int, c: int) -> float:
    """The standard deviation in cells of the bump at cell ``(r, c)``, from the second
    difference of the map's logarithm along each axis (a Gaussian's logarithm is a parabola
    whose second difference is ``-1 / sigma^2``); the narrower axis, as the wider is more
    often widened by a neighbour's bump; 1 cell where neither axis gives one, and kept
    within :data:`BUMP_CELLS`."""
    height, width = grid.shape
    found = []
    for dr, dc in ((0, 1), (1, 0)):
        if r >= dr and r + dr < height and c >= dc and c + dc < width:
            values = np.array([grid[r - dr, c - dc], grid[r, c], grid[r + dr, c + dc]])
            if (values > 0).all():
                d2 = float(np.log(values[0]) - 2 * np.log(values[1]) + np.log(values[2]))
                if d2 < 0:
                    found.append(float(np.sqrt(-1.0 / d2)))
    return float(np.clip(min(found, default=1.0), *BUMP_CELLS))


def unexplained_peaks(confidence_maps: np.ndarray, stride: int, peaks: Sequence[np.ndarray],
                      people: Sequence[np.ndarray], skeleton: Skeleton,
                      image_size: tuple[int, int]) -> Unexplained:
    """Head evidence that the labelled people's peaks hide: peaks of the face maps once the
    bumps the labels explain are taken away.

    Parameters
    ----------
    confidence_maps
        ``(K, rows, cols)`` the frame's maps (the grid of :mod:`app.analysis.targets`).
    stride
        Image pixels per cell.
    peaks
        Per joint, ``(n_j, 3)`` the maps' own peaks (:func:`app.analysis.association.find_peaks`
        above :data:`PEAK_THRESHOLD`).
    people
        The labelled people, ``(K, 3)`` ``x, y, v`` each.
    skeleton
        The joint layout.
    image_size
        ``(width, height)``.

    Returns
    -------
    Unexplained
        ``peaks``: per joint, the peaks above :data:`PEAK_THRESHOLD` of the face channels'
        residual that are not already among ``peaks`` (more than a cell from every one of
        them; empty for the other joints); ``head_peaks``: the peaks above :data:`HEAD_SUM` of
        the sum of the residual face channels, in image pixels, ``x, y, score``; ``faint``:
        the residual face channels' local maxima above :data:`FAINT` with no labelled face
        joint as near as a peak of the face sum's owner (:data:`OWNED_SUM`),
        ``(n, 2)`` image points (what widens a head found in the maps, see
        :meth:`Unexplained.extent`).

    Notes
    -----
    A faint head beside a labelled one is often no peak of its own: its bump lies on the
    slope of the neighbour's, so non-maximum suppression (which keeps one peak per hill)
    keeps only the neighbour's. Each peak a labelled person owns (:func:`map_head_ellipses`)
    is explained by that person: a Gaussian of the peak's height, centred on it, with the
    width the map shows there (:func:`_peak_width`), is taken away from its channel (a
    network's confidence map is trained towards such Gaussians, Cao et al. CVPR 2017,
    Sec. 2.2), and what remains is searched again. Explaining away a peak by the model of
    its own bump, rather than a disc around the labelled joint, keeps the evidence a few
    cells off.
    """
    from app.analysis.association import find_peaks

    face = _indices(skeleton, FACE_JOINTS)
    maps = np.asarray(confidence_maps, dtype=np.float64)
    rows, cols = maps.shape[1:]
    _, statures = _people_scale(people, skeleton, image_size)
    rr, cc = np.mgrid[0:rows, 0:cols]
    residual = maps[face].copy()
    for n, j in enumerate(face):
        found = np.asarray(peaks[j]).reshape(-1, 3)
        owned = _owned(np.full(len(found), j), found[:, :2], people, statures, face)
        for x, y, height in found[owned]:
            u, v = (x - (stride - 1) / 2) / stride, (y - (stride - 1) / 2) / stride
            r, c = int(np.clip(round(v), 0, rows - 1)), int(np.clip(round(u), 0, cols - 1))
            sigma = _peak_width(maps[j], r, c)
            residual[n] -= height * np.exp(-((cc - u) ** 2 + (rr - v) ** 2) / (2 * sigma ** 2))
    np.clip(residual, 0.0, None, out=residual)
    extra = [np.zeros((0, 3)) for _ in range(len(peaks))]
    for n, found in enumerate(find_peaks(residual, PEAK_THRESHOLD, stride)):
        known = np.asarray(peaks[face[n]]).reshape(-1, 3)
        if len(known) and len(found):
            d = np.hypot(found[:, None, 0] - known[None, :, 0],
                         found[:, None, 1] - known[None, :, 1])
            found = found[d.min(axis=1) > stride]
        extra[face[n]] = found
    faint = [np.zeros((0, 2))]  # a skeleton without face joints has no faint evidence
    for found in find_peaks(residual, FAINT, stride):
        # Weak evidence near a labelled face is most likely what is left of its bumps: any
        # labelled face joint owns it, as it owns a peak of the face sum.
        owned = _owned(np.full(len(found), -1), found[:, :2], people, statures, face)
        faint.append(found[~owned, :2])
    return Unexplained(extra, find_peaks(residual.sum(axis=0)[None], HEAD_SUM, stride)[0],
                       np.concatenate(faint).reshape(-1, 2))


@dataclass(frozen=True)
class Unexplained:
    """What :func:`unexplained_peaks` finds: extra peaks per joint, peaks of the residual
    face sum, and the faint landmarks no label owns."""

    peaks: list[np.ndarray]
    head_peaks: np.ndarray
    faint: np.ndarray

    def extent(self, xy: np.ndarray, reach: float) -> np.ndarray:
        """``(n, 2)`` the faint landmarks within ``reach`` pixels of a head's strongest
        evidence at ``xy``: a faint head's nose, eyes and far ear are each too weak to be a
        peak, yet show where the head reaches (a face seen side on spans from the nose to the
        far ear). They widen the head; being this weak, they never make one.

        Examples
        --------
        >>> u = Unexplained([], np.zeros((0, 3)), np.array([[10.0, 5.0], [60.0, 5.0]]))
        >>> u.extent(np.array([0.0, 0.0]), 20.0)
        array([[10.,  5.]])
        """
        near = np.hypot(self.faint[:, 0] - xy[0], self.faint[:, 1] - xy[1]) <= reach
        return self.faint[near]


def _people_scale(people: Sequence[np.ndarray], skeleton: Skeleton,
                  image_size: tuple[int, int]) -> tuple[np.ndarray, np.ndarray]:
    """Each labelled person's head centre and stature (NaN where nothing places them)."""
    centres = head_ellipses(people, skeleton, image_size)[:, :2].reshape(-1, 2)
    statures = _statures(people, skeleton)
    return centres, np.clip(statures, *_bounds(statures))


def _heads(xy: np.ndarray, score: np.ndarray, reach: np.ndarray) -> list[np.ndarray]:
    """Peaks gathered strongest first around the strongest peak of each head (no chains: a
    head never reaches past ``reach`` of its first peak)."""
    seeds: list[int] = []
    members: list[list[int]] = []
    for i in np.argsort(-score, kind="stable"):
        for k, seed in enumerate(seeds):
            if np.hypot(*(xy[i] - xy[seed])) <= reach[seed]:
                members[k].append(int(i))
                break
        else:
            seeds.append(int(i))
            members.append([int(i)])
    return [np.array(m) for m in members]


# ---------------------------------------------------------------------- heads from faces

def face_ellipses(boxes: np.ndarray) -> np.ndarray:
    """Head ellipses around face boxes of a detector.

    Parameters
    ----------
    boxes
        ``(N, 4)`` ``x, y, width, height`` (:class:`app.review.faces.FaceDetector`).

    Returns
    -------
    numpy.ndarray
        ``(N, 4)`` ``cx, cy, half_width, half_height``.

    Notes
    -----
    A frontal cascade's box spans about brows to chin and cheek to cheek (common practice, no
    source); the head reaches past it to the crown, the hair and the ears. The ellipse is
    centred a tenth of the box above its centre with half-axes 0.6 of the box's width and
    0.75 of its height: a head 1.2 boxes wide and 1.5 boxes tall.

    Examples
    --------
    >>> face_ellipses(np.array([[100.0, 50.0, 40.0, 40.0]]))
    array([[120.,  66.,  24.,  30.]])
    """
    b = np.asarray(boxes, dtype=np.float64).reshape(-1, 4)
    return np.column_stack([b[:, 0] + b[:, 2] / 2, b[:, 1] + 0.4 * b[:, 3],
                            0.6 * b[:, 2], 0.75 * b[:, 3]])


# ---------------------------------------------------------------------- whole people

def _ellipse_polygon(e: np.ndarray) -> np.ndarray:
    t = np.linspace(0, 2 * np.pi, 24, endpoint=False)
    return np.column_stack([e[0] + e[2] * np.cos(t), e[1] + e[3] * np.sin(t)])


def _body_polygon(kp: np.ndarray, head: np.ndarray, stature: float) -> np.ndarray | None:
    """The convex hull of a person's labelled joints, each widened to a disc of
    :data:`BODY_MARGIN` of their stature, and of their head ellipse."""
    on = _labelled(kp)
    parts = []
    if on.any() and stature > 0:
        t = np.linspace(0, 2 * np.pi, 12, endpoint=False)
        ring = BODY_MARGIN * stature * np.column_stack([np.cos(t), np.sin(t)])
        parts.append((kp[on, None, :2] + ring[None]).reshape(-1, 2))
    if np.isfinite(head).all():
        parts.append(_ellipse_polygon(head))
    if not parts:
        return None
    pts = np.concatenate(parts).astype(np.float32)
    return np.asarray(cv2.convexHull(pts).reshape(-1, 2), dtype=np.float64)


# ---------------------------------------------------------------------- all together

@dataclass(frozen=True)
class _Piece:
    ellipse: np.ndarray | None
    polygon: np.ndarray | None
    sigma: float
    source: str
    person: int | None

    def box(self) -> np.ndarray:
        if self.ellipse is not None:
            cx, cy, ax, ay = self.ellipse
            return np.array([cx - ax, cy - ay, cx + ax, cy + ay])
        assert self.polygon is not None
        return np.concatenate([self.polygon.min(axis=0), self.polygon.max(axis=0)])


def _merge(pieces: Sequence[_Piece]) -> tuple[Region, ...]:
    """Regions from pieces: pieces whose boxes overlap by at least :data:`MERGE_OVERLAP` of
    the smaller box (directly or through others) are one region, blurred with the largest of
    their sigmas, recording every source and person behind them."""
    if not pieces:
        return ()
    boxes = np.array([p.box() for p in pieces])
    ix = np.clip(np.minimum(boxes[:, None, 2], boxes[None, :, 2])
                 - np.maximum(boxes[:, None, 0], boxes[None, :, 0]), 0, None)
    iy = np.clip(np.minimum(boxes[:, None, 3], boxes[None, :, 3])
                 - np.maximum(boxes[:, None, 1], boxes[None, :, 1]), 0, None)
    area = (boxes[:, 2] - boxes[:, 0]) * (boxes[:, 3] - boxes[:, 1])
    smaller = np.maximum(np.minimum(area[:, None], area[None, :]), 1e-9)
    linked = ix * iy >= MERGE_OVERLAP * smaller
    n = len(pieces)
    label = np.arange(n)
    changed = True
    while changed:
        new = np.where(linked, label[None, :], n).min(axis=1)
        changed = bool((new != label).any())
        label = new
    regions = []
    for k in np.unique(label):
        group = [pieces[int(i)] for i in np.flatnonzero(label == k)]
        ellipses = [p.ellipse for p in group if p.ellipse is not None]
        regions.append(Region(
            ellipses=np.array(ellipses, dtype=np.float64).reshape(-1, 4),
            polygons=tuple(p.polygon for p in group if p.polygon is not None),
            sigma=max(p.sigma for p in group),
            sources=frozenset(p.source for p in group),
            people=frozenset(p.person for p in group if p.person is not None)))
    return tuple(regions)


def place_regions(people: Sequence[np.ndarray], skeleton: Skeleton,
                  image_size: tuple[int, int], *, ids: Sequence[int] | None = None,
                  peaks: Sequence[np.ndarray] | None = None,
                  head_peaks: np.ndarray | None = None,
                  unexplained: Unexplained | None = None,
                  map_people: Sequence[np.ndarray] | None = None,
                  faces: np.ndarray | None = None, mode: str = "heads") -> BlurPlan:
    """Where to blur a frame, from every source of evidence.

    Parameters
    ----------
    people
        The labelled people, ``(K, 3)`` ``x, y, v`` each.
    skeleton
        The joint layout.
    image_size
        ``(width, height)``.
    ids
        The people's ids (default: their positions), recorded in the regions.
    peaks
        The frame's confidence-map peaks per joint, image pixels
        (:func:`app.analysis.association.find_peaks`); None when the frame has no maps.
    head_peaks
        Peaks of the sum of the face joints' maps (see :func:`map_head_ellipses`).
    unexplained
        What the labels leave unexplained in the maps (:func:`unexplained_peaks`); sets the
        extent of the heads the maps find.
    map_people
        The people the maps group into (:func:`app.analysis.association.group_people`),
        ``(K, 3)`` ``x, y, score`` with NaN for a missing joint; read in ``people`` mode.
    faces
        ``(N, 4)`` face boxes ``x, y, width, height``; None when no detector ran.
    mode
        ``heads`` or ``people`` (:data:`MODES`).

    Returns
    -------
    BlurPlan
        The merged regions, and the counts that say how far they can be trusted.

    Notes
    -----
    Heads: :func:`head_ellipses` of the labels, :func:`map_head_ellipses` of the peaks,
    :func:`face_ellipses` of the faces; each blurred with ``sigma`` half its smaller half-axis.
    People: per labelled person and per person the maps group, the convex hull of the joints
    widened by :data:`BODY_MARGIN` of the person's stature and of the head ellipse; the head
    ellipses of unowned map peaks and of faces as for heads; under each face a body box
    three face-widths wide reaching eight face-heights down (a standing body is about 7.5
    heads tall, common practice, no source). A person's region is blurred with
    :data:`SIGMA` of their stature.

    A face box wider than :data:`MAX_FACE` of the local stature (:func:`local_stature`, when
    any labelled person gives a scale) is taken for a false detection and dropped, and so is
    one whose head ellipse is larger than any head of the frame's band of labelled heads or
    lies more than a body's height below it (:func:`head_band`: a wrong joint can make the
    people nearest a false face look twice their size, the band is robust to it).

    Without maps, a labelled person whose head the labels place by a guess (no face joint
    labelled) is counted in :attr:`BlurPlan.unsure`.
    """
    if mode not in MODES:
        raise ValueError(f"mode {mode!r} is not one of {MODES}")
    w, h = image_size
    ids = list(range(len(people))) if ids is None else list(ids)
    heads, extra_heads = label_head_ellipses(people, skeleton, image_size)
    _, statures = _people_scale(people, skeleton, image_size)
    face = _indices(skeleton, FACE_JOINTS)
    pieces: list[_Piece] = []
    unplaced = unsure = 0
    face_heads = face_ellipses(faces) if faces is not None else np.zeros((0, 4))
    for n, person in enumerate(people):
        kp = np.asarray(person, dtype=np.float64)
        head = heads[n]
        if not np.isfinite(head).all():
            unplaced += 1
            continue
        if peaks is None and not _labelled(kp)[face].any():
            unsure += 1
        if mode == "heads":
            pieces.append(_Piece(head, None, min(head[2], head[3]) / 2, "labels", ids[n]))
        else:
            stature = statures[n] if np.isfinite(statures[n]) else 2 * head[3] / HALF_HEIGHT
            polygon = _body_polygon(kp, head, stature)
            if polygon is not None:
                pieces.append(_Piece(None, polygon, SIGMA * stature, "labels", ids[n]))
    for n, e in extra_heads:
        pieces.append(_Piece(e, None, min(e[2], e[3]) / 2, "labels", ids[n]))
    if peaks is not None:
        for e in map_head_ellipses(peaks, people, skeleton, image_size, head_peaks,
                                   unexplained):
            pieces.append(_Piece(e, None, min(e[2], e[3]) / 2, "maps", None))
        for e in shoulder_head_ellipses(peaks, people, skeleton, image_size):
            pieces.append(_Piece(e, None, min(e[2], e[3]) / 2, "maps", None))
        if mode == "people":
            for kp in map_people or ():
                kp = np.asarray(kp, dtype=np.float64)
                as_labels = np.column_stack([kp[:, :2], np.isfinite(kp[:, :2]).all(axis=1)])
                head = head_ellipses([as_labels], skeleton, image_size)[0]
                on = _labelled(as_labels)
                if not on.any():
                    continue
                stature = _stature(as_labels, on, face, skeleton) or 2 * head[3] / HALF_HEIGHT
                polygon = _body_polygon(as_labels, head, stature)
                if polygon is not None:
                    pieces.append(_Piece(None, polygon, SIGMA * stature, "maps", None))
    boxes = np.asarray(faces if faces is not None else np.zeros((0, 4))).reshape(-1, 4)
    if len(boxes) and np.isfinite(statures).any():
        expected = local_stature(face_heads[:, :2], heads[:, :2], statures, image_size)
        plausible = boxes[:, 2] <= MAX_FACE * expected
        band = head_band(heads, statures)
        if band is not None:
            plausible &= np.array([not band.too_big(e) and not band.below(e[1])
                                   for e in face_heads], dtype=bool)
        boxes, face_heads = boxes[plausible], face_heads[plausible]
    for box, e in zip(boxes, face_heads):
        pieces.append(_Piece(e, None, min(e[2], e[3]) / 2, "detector", None))
        if mode == "people":
            x, y, bw, bh = box
            body = np.array([[x - bw, y - 0.5 * bh], [x + 2 * bw, y - 0.5 * bh],
                             [x + 2 * bw, y + 8 * bh], [x - bw, y + 8 * bh]])
            pieces.append(_Piece(None, body, min(e[2], e[3]) / 2, "detector", None))
    regions = _merge(pieces)
    share = float(region_mask(regions, (w, h)).mean()) if w and h else 0.0
    return BlurPlan(regions, unplaced, unsure, peaks is not None, faces is not None, share,
                    (w, h))


# ---------------------------------------------------------------------- pixels

def _shape_mask(region: Region, x0: int, y0: int, x1: int, y1: int) -> np.ndarray:
    """``(y1 - y0, x1 - x0)`` bool: which pixel centres of the window lie in the region."""
    ys, xs = np.ogrid[y0:y1, x0:x1]
    inside = np.zeros((y1 - y0, x1 - x0), dtype=bool)
    for cx, cy, ax, ay in region.ellipses:
        inside |= ((xs - cx) / ax) ** 2 + ((ys - cy) / ay) ** 2 <= 1.0
    if region.polygons:
        canvas = np.zeros(inside.shape, dtype=np.uint8)
        shift = 4  # sub-pixel vertices: 1/16 pixel
        for poly in region.polygons:
            pts = np.round((poly - [x0, y0]) * (1 << shift)).astype(np.int32)
            cv2.fillPoly(canvas, [pts], 1, lineType=cv2.LINE_8, shift=shift)
        inside |= canvas.astype(bool)
    return inside


def _window(region: Region, pad: float, size: tuple[int, int]) -> tuple[int, int, int, int]:
    w, h = size
    bx0, by0, bx1, by1 = region.bounds()
    return (int(max(0, np.floor(bx0 - pad))), int(max(0, np.floor(by0 - pad))),
            int(min(w, np.ceil(bx1 + pad) + 1)), int(min(h, np.ceil(by1 + pad) + 1)))


def region_mask(regions: Sequence[Region], image_size: tuple[int, int]) -> np.ndarray:
    """``(height, width)`` bool: the pixels :func:`blur_regions` changes may lie in.

    Examples
    --------
    >>> r = Region(np.array([[5.0, 5.0, 2.0, 2.0]]), (), 1.0, frozenset({"labels"}))
    >>> int(region_mask([r], (10, 10)).sum())
    13
    """
    w, h = image_size
    mask = np.zeros((h, w), dtype=bool)
    for region in regions:
        x0, y0, x1, y1 = _window(region, 0, (w, h))
        if x0 < x1 and y0 < y1:
            mask[y0:y1, x0:x1] |= _shape_mask(region, x0, y0, x1, y1)
    return mask


def blur_regions(image: np.ndarray, regions: Sequence[Region]) -> np.ndarray:
    """A copy of ``image`` with every region blurred and every other pixel as it was.

    Parameters
    ----------
    image
        ``(H, W, 3)`` (or ``(H, W)``) uint8.
    regions
        What to blur (:func:`place_regions`).

    Returns
    -------
    numpy.ndarray
        The blurred copy (same shape and dtype).

    Notes
    -----
    Inside a region the pixels become a Gaussian blur of the image (OpenCV ``GaussianBlur``,
    kernel of 6 sigma, reflected border) with the region's sigma: half the head ellipse's
    smaller half-axis, ``0.0425 H``, which is about 0.42 of a head's width (0.1 H). Why so
    strong: a Gaussian keeps a pattern of ``f`` cycles per face width by the factor
    ``exp(-2 pi^2 sigma^2 f^2)`` (its Fourier transform), which with ``sigma = 0.42`` face
    widths is 0.03 at 1 cycle, 1e-6 at 2 cycles and 1e-24 at 4; once the result is rounded
    to 8 bits nothing finer than about 1.5 cycles per face width is left to recover, while
    recognising a face takes detail of about 8 to 16 cycles per face width (Costen, Parker
    and Craw, "Effects of high-pass and low-pass spatial filtering on face identification",
    Perception & Psychophysics 58, 1996, from memory). A mere pixelation or a small kernel is
    known to be undone by matching against candidate faces; this leaves a patch of smooth
    colour the size of a head. The blur is computed on the region's box widened by 3 sigma, so
    what lies just outside a region feeds the blur but is never changed. A pixel centre is
    inside an ellipse when ``((x - cx) / half_width)^2 + ((y - cy) / half_height)^2 <= 1``.

    Examples
    --------
    >>> img = np.random.default_rng(0).integers(0, 256, (120, 160, 3), dtype=np.uint8)
    >>> r = Region(np.array([[80.0, 40.0, 15.0, 20.0]]), (), 7.5, frozenset({"labels"}))
    >>> out = blur_regions(img, [r])
    >>> bool((out[70:] == img[70:]).all()), bool((out[40, 80] != img[40, 80]).any())
    (True, True)
    """
    out = image.copy()
    h, w = image.shape[:2]
    for region in regions:
        sigma = max(region.sigma, 0.5)
        x0, y0, x1, y1 = _window(region, 3 * sigma, (w, h))
        if x0 >= x1 or y0 >= y1:
            continue  # the region lies wholly outside the image
        window = out[y0:y1, x0:x1]
        blurred = cv2.GaussianBlur(window, (0, 0), sigmaX=sigma, sigmaY=sigma,
                                   borderType=cv2.BORDER_REFLECT)
        inside = _shape_mask(region, x0, y0, x1, y1)
        window[inside] = blurred[inside]
    return out


def blur_frame(image: np.ndarray, people: Sequence[np.ndarray], skeleton: Skeleton, *,
               ids: Sequence[int] | None = None, maps: Any = None, detector: Any = None,
               mode: str = "heads") -> tuple[np.ndarray, BlurPlan]:
    """Blur a frame's heads (or whole people) from its labels, maps and a face detector.

    Parameters
    ----------
    image
        ``(H, W, 3)`` uint8 BGR.
    people
        The labelled people, ``(K, 3)`` ``x, y, v`` each, in the image's pixels.
    skeleton
        The joint layout.
    ids
        The people's ids, recorded in the regions.
    maps
        The frame's :class:`app.formats.maps.NetworkMaps`, or None.
    detector
        A callable ``(image, min_size) -> (N, 4) boxes`` such as
        :class:`app.review.faces.FaceDetector`, or None.
    mode
        ``heads`` or ``people``.

    Returns
    -------
    tuple of (numpy.ndarray, BlurPlan)
        The blurred copy and the plan it followed.

    Notes
    -----
    Peaks are found above :data:`PEAK_THRESHOLD` in each map and above :data:`HEAD_SUM` in
    the sum of the face joints' maps (:func:`map_head_ellipses`); in ``people`` mode the
    maps are also grouped into people (:func:`app.analysis.association.group_people`, its
    defaults). The detector
    looks for faces down to 2 % of the image's shorter side (at least 12 pixels).

    Examples
    --------
    >>> from app.model.skeleton import coco_body
    >>> img = np.random.default_rng(0).integers(0, 256, (120, 160, 3), dtype=np.uint8)
    >>> kp = np.zeros((17, 3)); kp[0] = (80, 40, 2); kp[[5, 6]] = [[60, 70, 2], [100, 70, 2]]
    >>> out, plan = blur_frame(img, [kp], coco_body())
    >>> bool((out[110:] == img[110:]).all()), [sorted(r.sources) for r in plan.regions]
    (True, [['labels']])
    """
    from app.analysis.association import find_peaks, group_people

    h, w = image.shape[:2]
    peaks = head_peaks = map_people = faces = unexplained = None
    if maps is not None:
        peaks = find_peaks(maps.confidence_maps, PEAK_THRESHOLD, maps.stride)
        face = _indices(skeleton, FACE_JOINTS)
        head_peaks = find_peaks(maps.confidence_maps[face].sum(axis=0)[None], HEAD_SUM,
                                maps.stride)[0]
        unexplained = unexplained_peaks(maps.confidence_maps, maps.stride, peaks, people,
                                        skeleton, (w, h))
        peaks = [np.concatenate([p, q]) for p, q in zip(peaks, unexplained.peaks)]
        head_peaks = np.concatenate([head_peaks, unexplained.head_peaks])
        if mode == "people":
            map_people = group_people(maps.confidence_maps, maps.pafs, skeleton.limb_array,
                                      stride=maps.stride)
    if detector is not None:
        faces = detector(image, max(12, int(0.02 * min(w, h))))
    plan = place_regions(people, skeleton, (w, h), ids=ids, peaks=peaks,
                         head_peaks=head_peaks, unexplained=unexplained,
                         map_people=map_people, faces=faces, mode=mode)
    return blur_regions(image, plan.regions), plan
