"""Simulated network output: confidence maps and part affinity fields with a crowd's errors.

A real bottom-up estimator run on a crowded picture does not output the clean training targets
of its labels. Its peaks wander for joints it cannot see, and are weaker there; it places some
hidden joints at a confident but invented spot; it mistakes left for right on people seen from
behind or side-on; it answers to a neighbour's hand in the wrong channel; it misses joints of
people mostly hidden or small, sometimes whole people; it sees a faint second copy of someone
or loses the link between someone's shoulders and hips; its fields weaken where limbs are
covered and blend where people overlap. We simulate that by drawing the ordinary targets
(:func:`app.analysis.targets.confidence_maps` and
:func:`app.analysis.targets.part_affinity_fields`) from *perturbed* poses, one person at a time,
with per-joint peak heights and per-limb field gains, then adding a little smooth noise near the
people. The constants below set the rates; they were tuned so that grouping these maps with
:func:`app.analysis.association.group_people` makes the crowd errors at a realistic rate (the
figures are in the docstring of :mod:`app.demo`).

The error model is our own (no published source); it is meant to look like network output to
the grouping and to a person reading the maps, not to reproduce a particular network.
"""

from __future__ import annotations

import io
import zipfile
from dataclasses import dataclass
from pathlib import Path

import cv2
import numpy as np

from app.analysis.targets import confidence_maps, grid_shape, part_affinity_fields
from app.model.skeleton import Skeleton

# Per-joint position jitter, as a fraction of the person's height in pixels: the base, and what
# full occlusion adds.
_JITTER = 0.003
_JITTER_OCCLUDED = 0.006
# Chance that an occluded joint is placed at an invented spot, times its occlusion.
_INVENT = 0.03
# Chance that a joint is missed: base, and times occlusion squared.
_MISS = 0.002
_MISS_OCCLUDED = 0.02
# Chances of left-right confusion: the whole body of someone seen from behind, the legs of
# someone side-on (the crossing step makes legs hard to tell apart).
_FLIP_BODY = 0.15
_FLIP_LEGS = 0.06
# Chance per wrist, elbow and ankle of an extra peak in its channel at a neighbour's joint of the
# other side (linked arms and crossing legs invite it).
_SPURIOUS = 0.02
# Chance that the fields joining shoulders to hips fail (more so when the hips are covered):
# the person falls apart into an upper and a lower body.
_SPLIT = 0.015
# Chance of a faint second copy of someone's upper body (a person found twice).
_ECHO = 0.08
# People shorter than this many pixels, or with most joints hidden, are often missed.
_SMALL = 150.0

_FACE = (0, 1, 2, 3, 4)
_CHAINS = {7: (5, 9), 8: (6, 10), 13: (11, 15), 14: (12, 16)}
_ENDS = {9: (7, 5), 10: (8, 6), 15: (13, 11), 16: (14, 12)}
_ARMS = (5, 7, 9, 6, 8, 10)


def _trunk_limbs(limbs: np.ndarray) -> np.ndarray:
    """Mask of the limbs joining a shoulder to a hip."""
    ends = np.sort(limbs, axis=1)
    return np.isin(ends[:, 0], (5, 6)) & np.isin(ends[:, 1], (11, 12))
_LEGS = (11, 13, 15, 12, 14, 16)


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


def _guess(kp: np.ndarray, j: int, height: float, rng: np.random.Generator) -> np.ndarray:
    """An invented but plausible position for hidden joint ``j`` given the others."""
    if j in _CHAINS:
        a, b = _CHAINS[j]
        bend = rng.normal(0, 0.04 * height, 2)
        return 0.5 * (kp[a, :2] + kp[b, :2]) + bend
    if j in _ENDS:
        mid, root = _ENDS[j]
        step = kp[mid, :2] - kp[root, :2]
        return kp[mid, :2] + step * rng.uniform(0.7, 1.1)
    if j in _FACE:
        shown = [f for f in _FACE if f != j and kp[f, 2] > 0]
        centre = kp[shown, :2].mean(axis=0) if shown else kp[j, :2]
        return centre + rng.normal(0, 0.02 * height, 2)
    # Shoulders and hips: a torso-length away from the other end of the trunk, same side.
    other = {5: 11, 6: 12, 11: 5, 12: 6}[j]
    up = -1.0 if j in (5, 6) else 1.0
    return kp[other, :2] + np.array([rng.normal(0, 0.03 * height), up * 0.28 * height])


def perceive(keypoints: np.ndarray, occlusion: np.ndarray, height: np.ndarray,
             facing: np.ndarray, skeleton: Skeleton, rng: np.random.Generator
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

    Returns
    -------
    list of NetworkPerson
        One per true person, then any echoes (faint duplicates) and spurious single peaks.

    Notes
    -----
    Per person, in order: whole-person loss (small or mostly hidden people), left-right
    confusion, per-joint jitter ``N(0, (0.003 + 0.006 occ) h)`` per axis, invented spots for hidden
    joints, peak heights (``U(0.75, 1)(1 - 0.35 occ)`` for visible joints, ``U(0.3, 0.75)
    (1 - 0.4 occ)`` for hidden ones, ``U(0.75, 1)`` for invented spots: a confident guess),
    missed joints; per limb, a field gain
    ``U(0.7, 1)(1 - 0.6 max occ)`` of its ends, halved when an end was missed. The rates are
    the module's constants.

    References
    ----------
    None: the error model is ours, calibrated against
    :func:`app.analysis.association.group_people` (see :mod:`app.demo`).
    """
    out: list[NetworkPerson] = []
    extras: list[NetworkPerson] = []
    num_people, num_joints = keypoints.shape[:2]
    limbs = skeleton.limb_array
    flip = skeleton.flip_index
    for p in range(num_people):
        kp = keypoints[p].copy()
        occ = occlusion[p].copy()
        labelled = kp[:, 2] > 0
        h = float(height[p])
        hidden = float(np.mean(kp[labelled, 2] == 1)) if labelled.any() else 1.0
        lose = np.clip(1.6 * (hidden - 0.6), 0, 0.8) + (0.3 if h < _SMALL else 0.0)
        lost = rng.random() < lose
        if facing[p] < -0.3 and rng.random() < _FLIP_BODY:
            kp, occ = kp[flip], occ[flip]
        elif abs(facing[p]) < 0.45 and rng.random() < _FLIP_LEGS:
            legs = np.array(_LEGS)
            swapped = flip[legs]
            kp[legs], occ[legs] = kp[swapped], occ[swapped]
        labelled = kp[:, 2] > 0
        noise = rng.normal(size=(num_joints, 2)) * (h * (_JITTER + _JITTER_OCCLUDED * occ))[:, None]
        kp[:, :2] += noise * labelled[:, None]
        invent = rng.random(num_joints) < _INVENT * occ
        invented = np.zeros(num_joints, dtype=bool)
        for j in np.flatnonzero(invent & (kp[:, 2] == 1)):
            kp[j, :2] = _guess(kp, int(j), h, rng)
            invented[j] = True
        visible = kp[:, 2] == 2
        peak = np.where(visible, rng.uniform(0.75, 1.0, num_joints) * (1 - 0.35 * occ),
                        rng.uniform(0.3, 0.75, num_joints) * (1 - 0.4 * occ))
        # An invented spot is a confident guess: the network answers as if it saw the joint.
        peak = np.where(invented, rng.uniform(0.75, 1.0, num_joints), peak)
        missed = rng.random(num_joints) < _MISS + _MISS_OCCLUDED * occ**2
        if lost:
            peak *= rng.uniform(0.1, 0.35)
        end_occ = np.maximum(occ[limbs[:, 0]], occ[limbs[:, 1]])
        gain = rng.uniform(0.7, 1.0, len(limbs)) * (1 - 0.6 * end_occ)
        gain *= np.where(missed[limbs[:, 0]] | missed[limbs[:, 1]], 0.5, 1.0)
        if lost:
            gain *= 0.3
        if rng.random() < _SPLIT * (1 + 2 * occ[[11, 12]].mean()):
            gain[_trunk_limbs(limbs)] = 0.0
        peak = np.where(missed | ~labelled, 0.0, peak)
        sigma = float(np.clip(0.03 * h, 5.0, 12.0))
        width = float(np.clip(0.035 * h, 6.0, 14.0))
        out.append(NetworkPerson(kp, peak, gain, sigma, width))

        if not lost and h > 2 * _SMALL and rng.random() < _ECHO:
            # A second, fainter response to the upper body, shifted: the person found twice.
            echo = kp.copy()
            echo[:, :2] += rng.normal(0, 0.08 * h, 2)
            upper = np.zeros(num_joints, bool)
            upper[list(_FACE) + list(_ARMS) + [11, 12]] = True
            extras.append(NetworkPerson(
                echo, np.where(upper & labelled, rng.uniform(0.4, 0.7, num_joints), 0.0),
                np.where(upper[limbs[:, 0]] & upper[limbs[:, 1]], 0.6, 0.0), sigma, width))
        for joint in (7, 8, 9, 10, 15, 16):
            if not labelled[joint] or rng.random() >= _SPURIOUS:
                continue
            other = _nearest_other(keypoints, p, int(flip[joint]), kp[joint, :2], 0.35 * h)
            if other is None:
                continue
            fake = np.zeros((num_joints, 3))
            fake[joint] = (*other, 2)
            amp = np.zeros(num_joints)
            amp[joint] = rng.uniform(0.35, 0.7)
            extras.append(NetworkPerson(fake, amp, np.zeros(len(limbs)), sigma, width))
    return out + extras


def _nearest_other(keypoints: np.ndarray, p: int, joint: int, near: np.ndarray,
                   radius: float) -> np.ndarray | None:
    """Position of the closest other person's ``joint`` within ``radius`` of ``near``."""
    cand = np.delete(keypoints[:, joint], p, axis=0)
    cand = cand[cand[:, 2] > 0]
    if len(cand) == 0:
        return None
    d = np.hypot(*(cand[:, :2] - near).T)
    k = int(np.argmin(d))
    return cand[k, :2].copy() if d[k] <= radius else None


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
