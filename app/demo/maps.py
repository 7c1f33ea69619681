"""Simulated network output: confidence maps and part affinity fields with a crowd's errors.

A real bottom-up estimator run on a crowded picture does not output the clean training targets
of its labels. Its peaks wander for joints it cannot see, and are weaker there; it places some
hidden joints at a confident but invented spot; it mistakes left for right on people seen from
behind or side-on; it answers a hand, elbow or ankle at a neighbour's (the peak there, and
the field of the limb leading there, so the grouping gives the joint the neighbour's place);
it misses joints of
people mostly hidden or small, sometimes whole people; it sees a faint second copy of someone
or loses the link between someone's shoulders and hips; its fields weaken where limbs are
covered and blend where people overlap. We simulate that by drawing the ordinary targets
(:func:`app.analysis.targets.confidence_maps` and
:func:`app.analysis.targets.part_affinity_fields`) from *perturbed* poses, one person at a time,
with per-joint peak heights and per-limb field gains, then adding a little smooth noise near the
people. The constants below set the rates; they were tuned so that grouping these maps with
:func:`app.analysis.association.group_people` makes the crowd errors at a realistic rate (the
figures are in the docstring of :mod:`app.demo`).

Errors that last
----------------
On video a network's crowd errors are not drawn afresh each frame: the picture barely changes
from one frame to the next, so the same two dancers' wrists stay swapped, and the same hidden
knee stays at the same invented spot, for as long as the dancers stay tangled. Each error kind
below is therefore a *run*: it starts on a frame, lasts a number of frames and is then drawn
afresh. :class:`ErrorRuns` carries the runs in progress from frame to frame, keyed by the
dancer's track id (and the joint, and for a neighbour's hand the neighbour's track id).

- Onset is tied to what causes the error: a hidden joint (its occlusion), a neighbour's joint
  within reach, a back or a side turned to the camera, a covered hip, a mostly hidden or small
  dancer. The *share* of frames showing an error under that cause is the calibrated rate of
  the constants below (the same rates as when each frame was drawn alone).
- A run's length is geometric, ``P(L = n) = q (1 - q)^(n - 1)`` for ``n = 1, 2, ...``, with
  mean ``1 / q`` given per kind in :data:`MEAN_RUN`: the run length of a two-state chain that
  clears with the same chance every frame, the simplest model of an error that persists, and
  memoryless, so a sequence can start anywhere.
- A run is the same error on every frame it lasts: the same joint, answered at the same
  neighbour's joint (the neighbour kept by track id, the place following that neighbour), an
  invented spot at the same place on the body (moving with it), the same echo offset.
- A run ends early when its cause goes: the joint comes into view, the neighbour moves away,
  the dancer turns. Otherwise runs are independent of each other.
- Between runs an error starts with the chance ``h = s / (m (1 - s) + s)`` per frame, for a
  share ``s`` and a mean run ``m``: with runs of mean ``m`` separated by waits of mean
  ``(1 - h) / h`` frames, the share of frames in a run is ``m h / (m h + 1 - h) = s``. A
  dancer seen for the first time starts in a run with chance ``s`` (the chain's stationary
  state; by memorylessness the rest of that run is again geometric with mean ``m``).

The mean runs are our choice, about half a second of footage: the dance moves four frames to
a count, and at a moderate tempo of two counts a second a frame lasts about an eighth of a
second. A back seen from behind stays a back for longer (6 frames), a crossing step crosses
the legs for about a count (3).

The network's answer to each joint and limb of a dancer is held too: the offset of a peak
from the joint (its jitter), the peak's height, whether a joint is missed, and how strongly
each limb's field shows are drawn per dancer and joint (or limb) and kept for a run of frames
(geometric, mean :data:`MEAN_RUN` ``["held"]`` = 4 frames, half a second, as above) before
being drawn afresh (:meth:`ErrorRuns.hold`). The picture barely changes from one frame to the
next, and neither does a network's confidence in it; drawn afresh every frame, these values
made the grouping pair the peaks of two overlapping dancers one way on one frame and another
way on the next, so that a hidden wrist put on a neighbour's wrist came and went frame by
frame instead of staying there while the dancers stayed tangled. On any one frame each held
value is distributed as a fresh draw is, so the share of frames showing each error, the
calibrated rates below, is unchanged.

What the runs become in the labels. The grouping of these maps does not keep an error for as
long as the network holds it: the dancers move between frames, and a held wrong peak wins
the grouping on some frames and loses to the right one on others. On demo seeds 61-66 a wrong
labelled joint (:func:`app.demo.evaluate.judge_joints`) is wrong again on the next frame, on
the same dancer, in 28-51 % of cases, and its runs last 1.4-2.0 frames on average, against
the 4 frames the network holds each error; a dancer with a wrong joint has some wrong joint on
the next frame in 70-81 % of cases (``python -m app.demo.carrying --persistence``). On seeds
81-86: 41-62 % wrong again on the next frame, runs of 1.7-2.6 frames, 67-80 %. That is
what bounds carrying a correction forward (the README's "Sequences"). We have measured no real
network on real footage, so whether a real model's labelled errors last longer is not known
here; the mean runs were chosen before carrying was measured and were not changed to meet its
goal. As a check only (the demo is not generated so): with every mean run doubled, seeds
61-63 gave wrong joints wrong again on the next frame in 53-62 % of cases, runs of 2.1-2.5
frames, and carrying per person then saved 33.4 % of the actions (measured before the
whole-frame batch and the taking judged in actions; with them the held-out seeds 81-86 as
generated give 23.3 %).

Where the labels' flicker comes from (checked 3 December on seeds 61-63, 24 frames each, by
simulating each frame again from the same true poses and grouping the maps as the demo does,
with the network's runs recorded alongside). Of the 1,993 wrong labelled joints whose dancer is
seen on the next frame, 720 (36 %) come with none of that dancer's simulated errors in
progress: mostly hidden joints (three in four) given a neighbour's same joint where two
overlapping dancers' peaks and fields compete; they make about half of the wrong joints that
are not wrong again on the next frame (499 of 1,026). Of the other half, half are runs that end
(the joint comes into view, the dancer turns) and most of the rest belong to a lost dancer's
faint peaks, grouped on one frame and not on the next. Nothing that the simulation draws afresh
per frame explains the flicker. With every draw held for the whole sequence (each joint's and
limb's answer never drawn again, no noise in the maps, a lost dancer's faintness and an echo's
heights kept for their run: more than any network would hold), a wrong joint is wrong again on
the next frame in 36-57 % of cases on seeds 61-66 (46.5 % on average, against 28-51 % and 44.8
% as generated) and its runs last 1.6-2.3 frames (against 1.4-2.0). Letting the held answers
and the noise drift smoothly instead (a first-order autoregression with the correlation
``exp(-1/4)`` a frame) gave 35-53 % (44.7 %). What changes the grouping's mind is the motion
itself, however small: with every draw held and no noise, a picture repeated unchanged keeps 80
% of those wrong joints wrong on the next frame (the rest where the repeated picture jumps
ahead), but the same frozen picture moved rigidly by 3 pixels a frame (under half a grid cell;
the dancers' joints move about 2 % of a stature, some 6 pixels, from one frame to the next)
keeps 59 %: mostly the contested peak goes to the neighbour's labelled person instead (the
limb's matching pairs the other way), else it is no longer found as a peak. A real network's
output moves with the picture as the simulated one does, so its grouping would meet the same
near ties; the simulation was therefore left as it is, and what would make the labels' errors
last is on the grouping's side (deciding a near tie as on the frame before), not the network's.
That is ``import-maps --frame-before`` (``previous`` of
:func:`app.analysis.association.group_people`: each limb's candidate pair whose two ends lie
within 12 pixels of the two ends of one person grouped on the frame before weighs 0.2 more in
the pairing; first tried outside the app). On seeds 61-66 a wrong joint is then wrong again on
the next frame in 51-64 % of cases (56.6 % in all), its runs last 2.0-2.7 frames, the
frame-by-frame actions fall from 2,257 to 2,112 and carrying saves 33.2 % of them (26.8 %
with each frame grouped alone); on the held-out seeds 91-96, 61.8 % and 34.2 % (README
"Sequences"). It is not yet the default, so the demo's auto-labels are still grouped frame by
frame.

The error model is our own (no published source); it is meant to look like network output to
the grouping and to a person reading the maps, not to reproduce a particular network.
"""

from __future__ import annotations

import io
import zipfile
from dataclasses import dataclass, field
from pathlib import Path

import cv2
import numpy as np

from app.analysis.targets import confidence_maps, grid_shape, part_affinity_fields
from app.model.skeleton import Skeleton

# Per-joint position jitter, as a fraction of the person's height in pixels: the base, and what
# full occlusion adds.
_JITTER = 0.003
_JITTER_OCCLUDED = 0.006
# Share of frames on which an occluded joint is placed at an invented spot, times its
# occlusion.
_INVENT = 0.03
# Chance that a joint is missed: base, and times occlusion squared.
_MISS = 0.002
_MISS_OCCLUDED = 0.02
# Shares of left-right confusion: the whole body of someone seen from behind, the legs of
# someone side-on (the crossing step makes legs hard to tell apart).
_FLIP_BODY = 0.15
_FLIP_LEGS = 0.06
# Share per wrist, elbow and ankle of the network answering it at a neighbour's joint of the
# other side (its peak there, and the field of the limb that ends at it leading there), while
# that joint is within reach (linked arms and crossing legs invite it).
_SPURIOUS = 0.02
# Share of frames on which the fields joining shoulders to hips fail (more so when the hips are
# covered): the person falls apart into an upper and a lower body.
_SPLIT = 0.015
# Share of frames with a faint second copy of someone's upper body (a person found twice).
_ECHO = 0.08
# People shorter than this many pixels, or with most joints hidden, are often missed.
_SMALL = 150.0

#: Mean length in frames of a run of each error kind (see the module docstring).
MEAN_RUN: dict[str, float] = {
    "lost": 4.0,
    "flip-body": 6.0,
    "flip-legs": 3.0,
    "invent": 4.0,
    "spurious": 4.0,
    "split": 3.0,
    "echo": 3.0,
    "held": 4.0,
}

_FACE = (0, 1, 2, 3, 4)
_CHAINS = {7: (5, 9), 8: (6, 10), 13: (11, 15), 14: (12, 16)}
_ENDS = {9: (7, 5), 10: (8, 6), 15: (13, 11), 16: (14, 12)}
_ARMS = (5, 7, 9, 6, 8, 10)
_LEGS = (11, 13, 15, 12, 14, 16)
_SPURIOUS_JOINTS = (7, 8, 9, 10, 15, 16)


def _trunk_limbs(limbs: np.ndarray) -> np.ndarray:
    """Mask of the limbs joining a shoulder to a hip."""
    ends = np.sort(limbs, axis=1)
    return np.isin(ends[:, 0], (5, 6)) & np.isin(ends[:, 1], (11, 12))


@dataclass(frozen=True)
class NetworkPerson:
    """One person as the simulated network sees them.

    Attributes
    ----------
    keypoints
        ``(K, 3)`` perturbed ``x, y, v`` (``v > 0`` where the network has a peak).
    peak
        ``(K,)`` peak heights in [0, 1].
    field_gain
        ``(L,)`` how strongly each limb's field shows, in [0, 1].
    sigma, limb_width
        Spread of the peaks and half-width of the fields, image pixels.
    """

    keypoints: np.ndarray
    peak: np.ndarray
    field_gain: np.ndarray
    sigma: float
    limb_width: float


@dataclass
class ErrorRuns:
    """The simulated network's errors in progress, carried from one frame to the next.

    Each entry holds the frames a run has still to last after the current one (0: no run),
    and what the run needs to look the same on every frame. Keys are track ids (and joints).

    Attributes
    ----------
    seen
        Track ids met so far (a dancer met for the first time starts in the chain's
        stationary state).
    left
        ``(track id, kind) -> frames left`` for the per-dancer kinds ``lost``, ``flip-body``,
        ``flip-legs``, ``split`` and ``echo``.
    invent
        ``track id -> ((K,) frames left, (K, 3) the draws that place each invented spot)``.
    echo_shift
        ``track id -> (2,)`` the echo's offset, in units of the person's height.
    spurious
        ``(track id, joint) -> (frames left, the neighbour's track id)``.
    held
        ``key -> ((N,) frames left, (N, D) values)``: a dancer's draws held over frames
        (:meth:`hold`; key the track id for the joints, minus it for the limbs).

    Examples
    --------
    >>> runs = ErrorRuns()
    >>> len(runs.seen), runs.left
    (0, {})
    """

    seen: set[int] = field(default_factory=set)
    left: dict[tuple[int, str], int] = field(default_factory=dict)
    invent: dict[int, tuple[np.ndarray, np.ndarray]] = field(default_factory=dict)
    echo_shift: dict[int, np.ndarray] = field(default_factory=dict)
    spurious: dict[tuple[int, int], tuple[int, int]] = field(default_factory=dict)
    held: dict[int, tuple[np.ndarray, np.ndarray]] = field(default_factory=dict)

    def hold(self, key: int, draws: np.ndarray, fresh: bool,
             rng: np.random.Generator) -> np.ndarray:
        """Hold a dancer's draws (one row per joint or limb) over runs of frames.

        ``draws`` are this frame's fresh draws; a row whose hold has run out (or that is met
        for the first time) takes them and is held for a geometric number of frames of mean
        ``MEAN_RUN["held"]``; the other rows keep the values they hold. Each row's value on
        any frame is therefore distributed as one fresh draw is. Consumes one geometric draw
        per row.
        """
        length = rng.geometric(1.0 / MEAN_RUN["held"], len(draws))
        left, values = self.held.get(key, (np.zeros(len(draws), np.int64), draws))
        renew = (left <= 0) | fresh
        values = np.where(renew[:, None], draws, values)
        self.held[key] = (np.where(renew, length, left) - 1, values)
        return values

    def step(self, key: tuple[int, str], share: float, fresh: bool,
             rng: np.random.Generator) -> int:
        """Advance one per-dancer run by a frame; the frames it lasts from this one (0: none)."""
        active = int(run_lengths(self.left.get(key, 0), share, MEAN_RUN[key[1]], fresh, rng))
        self.left[key] = max(active - 1, 0)
        return active


def run_lengths(left: np.ndarray | int, share: np.ndarray | float, mean: float, fresh: bool,
                rng: np.random.Generator) -> np.ndarray:
    """Advance error runs by one frame.

    Parameters
    ----------
    left
        Frames each run has still to last after the previous frame (0: not in a run).
    share
        Share of frames in a run while the error's cause holds, in [0, 1]; 0 where the cause
        is gone, which ends a run.
    mean
        Mean run length in frames (at least 1).
    fresh
        True on a dancer's first frame: start in a run with chance ``share``.
    rng
        Random source (one uniform and one geometric draw per entry, in this order).

    Returns
    -------
    numpy.ndarray
        Frames each run lasts counting this one (0: no error on this frame), the shape of
        ``share``.

    Notes
    -----
    A run continues while frames are left and its cause holds. Otherwise one starts with the
    chance ``h = s / (m (1 - s) + s)`` (``s`` the share, ``m`` the mean; ``h = s`` when fresh)
    and lasts ``L ~ Geometric(1 / m)`` frames, ``L >= 1``. Runs of mean ``m`` separated by
    waits of mean ``(1 - h) / h`` fill the share ``m h / (m h + 1 - h) = s`` of the frames.

    References
    ----------
    The two-state chain and its geometric sojourn times: any text on Markov chains, e.g.
    Feller, "An Introduction to Probability Theory and Its Applications", vol. 1, Ch. XV (from
    memory). The use for a network's errors is ours.

    Examples
    --------
    >>> rng = np.random.default_rng(0)
    >>> run_lengths(np.array([3, 0, 2]), np.array([0.5, 0.0, 0.0]), 4.0, False, rng).tolist()
    [3, 0, 0]
    """
    share = np.clip(np.asarray(share, dtype=np.float64), 0.0, 1.0)
    onset = share if fresh else share / (mean * (1.0 - share) + share + 1e-12)
    start = rng.random(share.shape) < onset
    length = rng.geometric(1.0 / mean, share.shape)
    active = np.where(np.asarray(left) > 0, left, np.where(start, length, 0))
    return np.where(share > 0, active, 0).astype(np.int64)


def _guess(kp: np.ndarray, j: int, height: float, draw: np.ndarray) -> np.ndarray:
    """An invented but plausible position for hidden joint ``j`` given the others.

    ``draw`` is ``(3,)``: two standard normal values and one uniform in [0, 1), kept for a
    run so that the invented spot sits at the same place relative to the body on every frame.
    """
    if j in _CHAINS:
        a, b = _CHAINS[j]
        return 0.5 * (kp[a, :2] + kp[b, :2]) + draw[:2] * (0.04 * height)
    if j in _ENDS:
        mid, root = _ENDS[j]
        step = kp[mid, :2] - kp[root, :2]
        return kp[mid, :2] + step * (0.7 + 0.4 * draw[2])
    if j in _FACE:
        shown = [f for f in _FACE if f != j and kp[f, 2] > 0]
        centre = kp[shown, :2].mean(axis=0) if shown else kp[j, :2]
        return centre + draw[:2] * (0.02 * height)
    # Shoulders and hips: a torso-length away from the other end of the trunk, same side.
    other = {5: 11, 6: 12, 11: 5, 12: 6}[j]
    up = -1.0 if j in (5, 6) else 1.0
    return kp[other, :2] + np.array([draw[0] * 0.03 * height, up * 0.28 * height])


def perceive(keypoints: np.ndarray, occlusion: np.ndarray, height: np.ndarray,
             facing: np.ndarray, skeleton: Skeleton, rng: np.random.Generator,
             track_ids: np.ndarray | None = None, runs: ErrorRuns | None = None
             ) -> list[NetworkPerson]:
    """Turn true poses into the people a crowd-confused network would respond to.

    Parameters
    ----------
    keypoints
        ``(P, K, 3)`` true ``x, y, v`` in image pixels.
    occlusion
        ``(P, K)`` share of a small disc round each joint covered by something nearer.
    height
        ``(P,)`` projected stature of each person, pixels.
    facing
        ``(P,)`` cosine between each person's chest direction and the direction to the camera.
    skeleton
        The joint layout (flip pairs and limbs).
    rng
        Random source (consumed in a fixed order, so results are reproducible).
    track_ids
        ``(P,)`` which dancer each row is (default ``1..P``): the key of the error runs.
    runs
        The error runs of the previous frames of the same sequence, advanced in place; a
        fresh :class:`ErrorRuns` (a sequence's first frame) when not given.

    Returns
    -------
    list of NetworkPerson
        One per true person, then any echoes (faint duplicates).

    Notes
    -----
    Per person, in order: whole-person loss (small or mostly hidden people), left-right
    confusion, per-joint jitter ``N(0, (0.003 + 0.006 occ) h)`` per axis, invented spots for hidden
    joints, peak heights (``U(0.75, 1)(1 - 0.35 occ)`` for visible joints, ``U(0.3, 0.75)
    (1 - 0.4 occ)`` for hidden ones, ``U(0.75, 1)`` for invented spots: a confident guess),
    missed joints; per limb, a field gain
    ``U(0.7, 1)(1 - 0.6 max occ)`` of its ends, halved when an end was missed. Loss, left-right
    confusion, invented spots, the split trunk, the echo and a joint answered at a neighbour's
    are runs
    (:func:`run_lengths`, see the module docstring) with the module's constants as shares.

    References
    ----------
    None: the error model is ours, calibrated against
    :func:`app.analysis.association.group_people` (see :mod:`app.demo`).

    Examples
    --------
    A dancer seen from behind has left and right swapped (``x``) on runs of frames:

    >>> from app.model.skeleton import coco_body
    >>> body = np.zeros((1, 17, 3))
    >>> body[0, :, 0], body[0, :, 1], body[0, :, 2] = np.arange(17) * 10.0, 300.0, 2
    >>> runs, rng = ErrorRuns(), np.random.default_rng(6)
    >>> swapped = [perceive(body, np.zeros((1, 17)), np.array([400.0]), np.array([-1.0]),
    ...                     coco_body(), rng, runs=runs)[0].keypoints[5, 0] > 55
    ...            for _ in range(40)]
    >>> "".join("x" if s else "." for s in swapped)
    '.....xxxxxxxxxxxxxxxxxx.................'
    """
    runs = ErrorRuns() if runs is None else runs
    out: list[NetworkPerson] = []
    extras: list[NetworkPerson] = []
    num_people, num_joints = keypoints.shape[:2]
    tracks = (np.arange(1, num_people + 1) if track_ids is None
              else np.asarray(track_ids, dtype=np.int64))
    limbs = skeleton.limb_array
    flip = skeleton.flip_index
    for p in range(num_people):
        tid = int(tracks[p])
        fresh = tid not in runs.seen
        runs.seen.add(tid)
        kp = keypoints[p].copy()
        occ = occlusion[p].copy()
        labelled = kp[:, 2] > 0
        h = float(height[p])
        hidden = float(np.mean(kp[labelled, 2] == 1)) if labelled.any() else 1.0
        lose = np.clip(1.6 * (hidden - 0.6), 0, 0.8) + (0.3 if h < _SMALL else 0.0)
        lost = runs.step((tid, "lost"), float(lose), fresh, rng) > 0
        flip_body = runs.step((tid, "flip-body"), _FLIP_BODY if facing[p] < -0.3 else 0.0,
                              fresh, rng) > 0
        flip_legs = runs.step((tid, "flip-legs"),
                              _FLIP_LEGS if abs(facing[p]) < 0.45 else 0.0, fresh, rng) > 0
        if flip_body:
            kp, occ = kp[flip], occ[flip]
        elif flip_legs:
            legs = np.array(_LEGS)
            swapped = flip[legs]
            kp[legs], occ[legs] = kp[swapped], occ[swapped]
        labelled = kp[:, 2] > 0
        # The network's answer to each joint and limb (the offset of its peak, how high the
        # peak is, whether it is missed, how strong the field is) is held over runs of frames.
        held = runs.hold(tid, np.column_stack([
            rng.normal(size=(num_joints, 2)), rng.random((num_joints, 3))]), fresh, rng)
        held_gain = runs.hold(-tid, rng.random((len(limbs), 1)), fresh, rng)[:, 0]
        noise = held[:, :2] * (h * (_JITTER + _JITTER_OCCLUDED * occ))[:, None]
        kp[:, :2] += noise * labelled[:, None]
        invented = _invent(runs, tid, kp, occ, h, fresh, rng)
        visible = kp[:, 2] == 2
        peak = np.where(visible, (0.75 + 0.25 * held[:, 2]) * (1 - 0.35 * occ),
                        (0.3 + 0.45 * held[:, 2]) * (1 - 0.4 * occ))
        # An invented spot is a confident guess: the network answers as if it saw the joint.
        peak = np.where(invented, 0.75 + 0.25 * held[:, 3], peak)
        missed = held[:, 4] < _MISS + _MISS_OCCLUDED * occ**2
        if lost:
            peak *= rng.uniform(0.1, 0.35)
        end_occ = np.maximum(occ[limbs[:, 0]], occ[limbs[:, 1]])
        gain = (0.7 + 0.3 * held_gain) * (1 - 0.6 * end_occ)
        gain *= np.where(missed[limbs[:, 0]] | missed[limbs[:, 1]], 0.5, 1.0)
        if lost:
            gain *= 0.3
        if runs.step((tid, "split"), _SPLIT * (1 + 2 * occ[[11, 12]].mean()), fresh, rng):
            gain[_trunk_limbs(limbs)] = 0.0
        peak = np.where(missed | ~labelled, 0.0, peak)
        sigma = float(np.clip(0.03 * h, 5.0, 12.0))
        width = float(np.clip(0.035 * h, 6.0, 14.0))
        for joint, other in _taken(runs, keypoints, tracks, p, kp, labelled, h, fresh, flip,
                                   rng):
            # The network answers this joint at the neighbour's: its peak and the field of
            # the limb that ends there lead to the neighbour's joint of the other side.
            kp[joint, :2] = keypoints[other, flip[joint], :2]
            peak[joint] = max(peak[joint], 0.75 + 0.25 * held[joint, 3])
        out.append(NetworkPerson(kp, peak, gain, sigma, width))

        shift = rng.normal(0, 0.08, 2)
        echo_share = _ECHO if not lost and h > 2 * _SMALL else 0.0
        if runs.step((tid, "echo"), echo_share, fresh, rng):
            # A second, fainter response to the upper body, shifted: the person found twice.
            shift = runs.echo_shift.setdefault(tid, shift)
            echo = kp.copy()
            echo[:, :2] += shift * h
            upper = np.zeros(num_joints, bool)
            upper[list(_FACE) + list(_ARMS) + [11, 12]] = True
            extras.append(NetworkPerson(
                echo, np.where(upper & labelled, rng.uniform(0.4, 0.7, num_joints), 0.0),
                np.where(upper[limbs[:, 0]] & upper[limbs[:, 1]], 0.6, 0.0), sigma, width))
        else:
            runs.echo_shift.pop(tid, None)
    return out + extras


def _invent(runs: ErrorRuns, tid: int, kp: np.ndarray, occ: np.ndarray, h: float,
            fresh: bool, rng: np.random.Generator) -> np.ndarray:
    """Move the hidden joints that are in an invented-spot run there (``kp`` in place);
    return which joints were moved."""
    num_joints = len(kp)
    left, draws = runs.invent.get(tid, (np.zeros(num_joints, np.int64),
                                        np.zeros((num_joints, 3))))
    active = run_lengths(left, np.where(kp[:, 2] == 1, _INVENT * occ, 0.0), MEAN_RUN["invent"],
                         fresh, rng)
    new = np.column_stack([rng.normal(size=(num_joints, 2)), rng.random(num_joints)])
    draws = np.where(((active > 0) & (left == 0))[:, None], new, draws)
    runs.invent[tid] = (np.maximum(active - 1, 0), draws)
    for j in np.flatnonzero(active):
        kp[j, :2] = _guess(kp, int(j), h, draws[j])
    return active > 0


def _taken(runs: ErrorRuns, keypoints: np.ndarray, tracks: np.ndarray, p: int,
           kp: np.ndarray, labelled: np.ndarray, h: float, fresh: bool, flip: np.ndarray,
           rng: np.random.Generator) -> list[tuple[int, int]]:
    """Person ``p``'s wrists, elbows and ankles that the network answers at a neighbour's
    joint of the other side, in runs that last while that neighbour's joint stays within
    reach: ``(joint, the neighbour's row)`` for each run in progress."""
    tid = int(tracks[p])
    reach = 0.35 * h
    out = []
    for joint in _SPURIOUS_JOINTS:
        theirs = int(flip[joint])
        left, neighbour = runs.spurious.get((tid, joint), (0, 0))
        other = None
        if left:
            rows = np.flatnonzero(tracks == neighbour)
            if len(rows) and _reaches(keypoints[rows[0], theirs], kp[joint, :2], reach):
                other = int(rows[0])
        if other is None:
            # The tangled neighbour moved away (or there was none): a new run may start.
            left = 0
            other = _nearest_other(keypoints, p, theirs, kp[joint, :2], reach)
        share = _SPURIOUS if labelled[joint] and other is not None else 0.0
        active = int(run_lengths(left, share, MEAN_RUN["spurious"], fresh, rng))
        runs.spurious[(tid, joint)] = (max(active - 1, 0),
                                       -1 if other is None else int(tracks[other]))
        if active and other is not None:
            out.append((joint, other))
    return out


def _reaches(point: np.ndarray, near: np.ndarray, radius: float) -> bool:
    """Whether a labelled ``(x, y, v)`` point lies within ``radius`` of ``near``."""
    return bool(point[2] > 0 and np.hypot(*(point[:2] - near)) <= radius)


def _nearest_other(keypoints: np.ndarray, p: int, joint: int, near: np.ndarray,
                   radius: float) -> int | None:
    """Row of the person other than ``p`` whose labelled ``joint`` lies closest to ``near``,
    if within ``radius``."""
    d = np.hypot(*(keypoints[:, joint, :2] - near).T)
    d[keypoints[:, joint, 2] <= 0] = np.inf
    d[p] = np.inf
    if len(d) == 0 or not np.isfinite(d.min()):
        return None
    k = int(np.argmin(d))
    return k if d[k] <= radius else None


def draw(people: list[NetworkPerson], skeleton: Skeleton, image_size: tuple[int, int],
         stride: int, rng: np.random.Generator) -> tuple[np.ndarray, np.ndarray]:
    """Confidence maps and fields of the perceived people, with mild noise near them.

    Parameters
    ----------
    people
        From :func:`perceive`.
    skeleton
        The joint layout.
    image_size
        ``(width, height)`` in pixels.
    stride
        Image pixels per grid cell.
    rng
        Random source for the noise.

    Returns
    -------
    confidence, fields
        ``(K, H, W)`` and ``(L, 2, H, W)`` float16 with ``H = ceil(height / stride)`` and
        ``W = ceil(width / stride)``.

    Notes
    -----
    Confidence: ``S_j = max_k a_jk G_jk`` where ``G_jk`` is person ``k``'s target map of joint
    ``j`` and ``a_jk`` its peak height. Fields: ``L_c = sum_k g_ck F_ck / n_c`` where ``F_ck``
    is person ``k``'s target field of limb ``c``, ``g_ck`` its gain and ``n_c`` the number of
    people whose limb covers the cell (the blend of Cao et al.'s Eq. 9). Noise: Gaussian noise
    smoothed over about two cells, kept near the people, its positive part added to the
    confidence maps and small noise added to the fields on the limbs. Values are rounded to
    multiples of 1/256 and magnitudes below 0.01 set to zero, so the files compress well.

    References
    ----------
    Cao et al., "Realtime Multi-Person 2D Pose Estimation using Part Affinity Fields",
    CVPR 2017, Sec. 2.2-2.3 (the target maps and the averaging of overlapping fields).
    """
    limbs = skeleton.limb_array
    rows, cols = grid_shape(image_size, stride)
    num_joints = skeleton.num_joints
    conf = np.zeros((num_joints, rows, cols), np.float32)
    total = np.zeros((len(limbs), 2, rows, cols), np.float32)
    count = np.zeros((len(limbs), rows, cols), np.float32)
    near = np.zeros((rows, cols), np.float32)
    for person in people:
        kp = person.keypoints.copy()
        kp[:, 2] = np.where(person.peak > 0, 2, 0)
        if kp[:, 2].any():
            maps = confidence_maps(kp[None], image_size, stride, person.sigma)
            np.maximum(conf, maps * person.peak[:, None, None].astype(np.float32), out=conf)
        drawn = person.keypoints.copy()
        drawn[:, 2] = np.where(person.keypoints[:, 2] > 0, 2, 0)
        if person.field_gain.any():
            fields = part_affinity_fields(drawn[None], limbs, image_size, stride,
                                          person.limb_width)
            covered = np.any(fields != 0, axis=1) & (person.field_gain[:, None, None] > 0)
            total += fields * person.field_gain[:, None, None, None].astype(np.float32)
            count += covered
            near = np.maximum(near, covered.any(axis=0))
    fields = total / np.maximum(count, 1)[:, None]
    near = np.maximum(near, (conf > 0.05).any(axis=0))
    around = _blur(near, 3.0) > 0.05

    noise = _blur_stack(rng.normal(size=(num_joints, rows, cols)).astype(np.float32), 1.2)
    noise = np.clip(noise * 0.04, 0, None) * around
    conf = np.clip(conf + noise, 0, 1)
    on_limb = count > 0
    jitter = rng.normal(0, 0.04, size=fields.shape).astype(np.float32)
    fields = fields + jitter * on_limb[:, None]
    return _tidy(conf), _tidy(fields)


def _blur(a: np.ndarray, sigma: float) -> np.ndarray:
    return cv2.GaussianBlur(a.astype(np.float32), (0, 0), sigma)


def _blur_stack(a: np.ndarray, sigma: float) -> np.ndarray:
    out = np.empty_like(a)
    for i in range(len(a)):
        out[i] = _blur(a[i], sigma) * (sigma * 2.5)
    return out


def _tidy(a: np.ndarray) -> np.ndarray:
    q = np.round(a * 256) / 256
    q[np.abs(q) < 0.01] = 0
    return q.astype(np.float16)


def save_maps(path: str | Path, confidence: np.ndarray, fields: np.ndarray,
              stride: int) -> None:
    """Write one image's maps as ``.npz`` with the same bytes every time.

    ``np.savez_compressed`` stamps the current time into the archive; this writes the same
    members (``confidence_maps``, ``pafs``, ``stride``) with a fixed time stamp, so equal arrays
    give equal files. ``np.load(path, allow_pickle=False)`` reads it.

    Examples
    --------
    >>> import tempfile, os
    >>> d = tempfile.mkdtemp()
    >>> save_maps(os.path.join(d, "a.npz"), np.zeros((17, 2, 3), np.float16),
    ...           np.zeros((19, 2, 2, 3), np.float16), 8)
    >>> with np.load(os.path.join(d, "a.npz"), allow_pickle=False) as f:
    ...     sorted(f.files), int(f["stride"])
    (['confidence_maps', 'pafs', 'stride'], 8)
    """
    members = {"confidence_maps": confidence, "pafs": fields,
               "stride": np.array(stride, dtype=np.int64)}
    with zipfile.ZipFile(path, "w", compression=zipfile.ZIP_DEFLATED) as archive:
        for name, array in members.items():
            buffer = io.BytesIO()
            np.lib.format.write_array(buffer, np.asarray(array), allow_pickle=False)
            info = zipfile.ZipInfo(f"{name}.npy", date_time=(1980, 1, 1, 0, 0, 0))
            info.compress_type = zipfile.ZIP_DEFLATED
            archive.writestr(info, buffer.getvalue(), compresslevel=9)
