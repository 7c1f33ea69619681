"""Blurred heads: where the ellipses go, and that only they change.

Head proportions are from memory of Winter, "Biomechanics and Motor Control of Human
Movement", Fig. 4.1 (after Drillis and Contini 1966); the check that the blur removes fine
detail (high-frequency energy) is common practice, no source. Images and people are synthetic.
"""

from __future__ import annotations

import cv2
import numpy as np
import pytest

from app.model.skeleton import coco_body
from app.review.blur import blur_frame, head_ellipses

SK = coco_body()


def _person(**joints: tuple[float, float]) -> np.ndarray:
    kp = np.zeros((17, 3))
    for name, (x, y) in joints.items():
        kp[SK.index(name)] = (x, y, 2)
    return kp


UPRIGHT = _person(nose=(200, 80), left_eye=(205, 75), right_eye=(195, 75),
                  left_shoulder=(226, 120), right_shoulder=(174, 120),
                  left_hip=(219, 178), right_hip=(181, 178))


def test_ellipse_from_face_joints_sized_by_the_torso():
    """Shoulders 52 px apart are 0.259 of stature: H = 200.8 px; hips give a similar H."""
    (cx, cy, ax, ay), = head_ellipses([UPRIGHT], SK, (400, 300))
    stature = 52 / 0.259
    assert cx == pytest.approx(200.0)
    assert cy == pytest.approx(np.mean([80, 75, 75]) - 0.02 * stature, abs=0.5)
    assert ax == pytest.approx(0.085 * stature, rel=0.02)
    assert ay == pytest.approx(0.115 * stature, rel=0.02)


def test_without_face_joints_the_head_sits_above_the_shoulders_away_from_the_hips():
    upright = _person(left_shoulder=(226, 120), right_shoulder=(174, 120),
                      left_hip=(219, 178), right_hip=(181, 178))
    upside_down = _person(left_shoulder=(174, 180), right_shoulder=(226, 180),
                          left_hip=(181, 122), right_hip=(219, 122))
    (ux, uy, *_), (dx, dy, *_) = head_ellipses([upright, upside_down], SK, (400, 300))
    assert ux == pytest.approx(200) and uy < 120 - 15
    assert dx == pytest.approx(200) and dy > 180 + 15


def test_a_person_with_no_labelled_joint_is_counted_and_left_alone():
    img = np.random.default_rng(0).integers(0, 256, (120, 160, 3), np.uint8)
    out, plan = blur_frame(img, [np.zeros((17, 3))], SK)
    assert plan.unplaced == 1 and np.array_equal(out, img)


def test_only_pixels_inside_the_ellipses_change_and_fine_detail_is_gone():
    rng = np.random.default_rng(1)
    img = rng.integers(0, 256, (300, 400, 3), np.uint8)
    second = UPRIGHT + np.array([120.0, 10.0, 0.0])  # a second person to the right
    out, plan = blur_frame(img, [UPRIGHT, second], SK)
    missed = plan.unplaced
    ellipses = head_ellipses([UPRIGHT, second], SK, (400, 300))
    yy, xx = np.mgrid[:300, :400]
    inside = np.zeros((300, 400), bool)
    for cx, cy, ax, ay in ellipses:
        inside |= ((xx - cx) / ax) ** 2 + ((yy - cy) / ay) ** 2 <= 1
    assert missed == 0 and inside.sum() > 1000
    assert np.array_equal(out[~inside], img[~inside])
    before = cv2.Laplacian(img, cv2.CV_64F)[inside].var()
    after = cv2.Laplacian(out, cv2.CV_64F)[inside].var()
    assert after < 0.01 * before


def test_a_head_partly_outside_the_image_is_clipped():
    img = np.random.default_rng(2).integers(0, 256, (100, 100, 3), np.uint8)
    kp = _person(nose=(2, 3), left_shoulder=(20, 40), right_shoulder=(-20, 40))
    out, _ = blur_frame(img, [kp], SK)
    assert out.shape == img.shape and (out[:5, :5] != img[:5, :5]).any()
    assert np.array_equal(out[60:], img[60:])
