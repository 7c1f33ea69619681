"""Blurring heads in a frame before it leaves the project in a review packet.

Each person gets an ellipse around the head, placed from the face joints when any is
labelled and otherwise from the top of the torso, and sized from the person's own scale. Pixels
inside any ellipse are replaced by a strong Gaussian blur of the image; every pixel outside all
ellipses is left exactly as it was.
"""

from __future__ import annotations

from collections.abc import Sequence

import cv2
import numpy as np

from app.analysis.anthropometry import person_scale
from app.model.skeleton import Skeleton

__all__ = ["blur_heads", "head_ellipses"]

FACE_JOINTS = ("nose", "left_eye", "right_eye", "left_ear", "right_ear")

#: Ellipse half-width and half-height as fractions of stature H (see :func:`head_ellipses`).
HALF_WIDTH = 0.085
HALF_HEIGHT = 0.115
#: How far above the face landmarks' mean the head's centre lies, and above the shoulders.
FACE_LIFT = 0.02
NECK_LIFT = 0.117
#: Shoulder width as a fraction of stature (the torso table of app.analysis.anthropometry).
SHOULDER_WIDTH = 0.259


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
    0.1 H wide), else the larger side of the box around the labelled joints.

    The head is about 0.13 H from chin to crown and 0.1 H wide (chin to crown from memory of
    Winter, "Biomechanics and Motor Control of Human Movement", Fig. 4.1, after Drillis and
    Contini 1966; the width common practice, no source). The ellipse is larger than the head,
    ``0.085 H`` by ``0.115 H`` half-axes, to cover hair and labels a few pixels off. Its centre
    is the mean of the labelled face joints lifted by ``0.02 H`` (eyes and ears lie near the
    middle of the head, the nose a little below). With no face joint labelled, the centre is
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
    w, h = image_size
    floor = max(3.0, 0.02 * min(w, h))
    index = {n: i for i, n in enumerate(skeleton.joints)}
    face = [index[n] for n in FACE_JOINTS if n in index]
    shoulders = [index[n] for n in ("left_shoulder", "right_shoulder") if n in index]
    hips = [index[n] for n in ("left_hip", "right_hip") if n in index]
    out = np.full((len(people), 4), np.nan)
    for n, person in enumerate(people):
        kp = np.asarray(person, dtype=np.float64)
        on = (kp[:, 2] > 0) & np.isfinite(kp[:, :2]).all(axis=1)
        if not on.any():
            continue
        stature = _stature(kp, on, face, skeleton)
        face_on = [j for j in face if on[j]]
        shoulders_on = [j for j in shoulders if on[j]]
        if face_on:
            centre = kp[face_on, :2].mean(axis=0) - [0.0, FACE_LIFT * stature]
        elif shoulders_on:
            centre = _above_shoulders(kp, shoulders_on, [j for j in hips if on[j]], stature)
        else:
            xy = kp[on, :2]
            centre = np.array([xy[:, 0].mean(), xy[:, 1].min() - NECK_LIFT * stature])
        out[n] = (*centre, max(floor, HALF_WIDTH * stature), max(floor, HALF_HEIGHT * stature))
    return out


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


def blur_heads(image: np.ndarray, people: Sequence[np.ndarray],
               skeleton: Skeleton) -> tuple[np.ndarray, int]:
    """A copy of ``image`` with every person's head blurred.

    Parameters
    ----------
    image
        ``(H, W, 3)`` (or ``(H, W)``) uint8.
    people
        ``(K, 3)`` ``x, y, v`` arrays in the image's pixels.
    skeleton
        The joint layout.

    Returns
    -------
    tuple of (numpy.ndarray, int)
        The blurred copy (same shape and dtype) and how many people had no labelled joint
        and so could not be placed.

    Notes
    -----
    Inside an ellipse of :func:`head_ellipses` with smaller half-axis ``r`` the pixels become
    a Gaussian blur of the image with ``sigma = r / 2`` (OpenCV ``GaussianBlur``, kernel of
    6 sigma, reflected border): features smaller than about a quarter of a head -- eyes, mouth,
    the line of a nose -- are gone. A pixel centre ``(x, y)`` is inside when
    ``((x - cx) / half_width)^2 + ((y - cy) / half_height)^2 <= 1``. The blur is computed on
    the ellipse's box widened by 3 sigma, so what lies just outside an ellipse feeds the blur
    but is never changed.

    Examples
    --------
    >>> from app.model.skeleton import coco_body
    >>> img = np.random.default_rng(0).integers(0, 256, (120, 160, 3), dtype=np.uint8)
    >>> kp = np.zeros((17, 3)); kp[0] = (80, 40, 2); kp[[5, 6]] = [[60, 70, 2], [100, 70, 2]]
    >>> out, missed = blur_heads(img, [kp], coco_body())
    >>> bool((out[110:] == img[110:]).all()), bool((out[40, 80] != img[40, 80]).any()), missed
    (True, True, 0)
    """
    out = image.copy()
    h, w = image.shape[:2]
    ellipses = head_ellipses(people, skeleton, (w, h))
    missed = int(np.isnan(ellipses[:, 0]).sum())
    for cx, cy, ax, ay in ellipses[~np.isnan(ellipses[:, 0])]:
        sigma = min(ax, ay) / 2
        pad = 3 * sigma
        x0, x1 = int(max(0, np.floor(cx - ax - pad))), int(min(w, np.ceil(cx + ax + pad) + 1))
        y0, y1 = int(max(0, np.floor(cy - ay - pad))), int(min(h, np.ceil(cy + ay + pad) + 1))
        if x0 >= x1 or y0 >= y1:
            continue  # the head lies wholly outside the image
        window = out[y0:y1, x0:x1]
        blurred = cv2.GaussianBlur(window, (0, 0), sigmaX=sigma, sigmaY=sigma,
                                   borderType=cv2.BORDER_REFLECT)
        ys, xs = np.ogrid[y0:y1, x0:x1]
        inside = ((xs - cx) / ax) ** 2 + ((ys - cy) / ay) ** 2 <= 1.0
        window[inside] = blurred[inside]
    return out, missed
