"""The camera and the renderer against OpenCV's projection."""

from __future__ import annotations

import cv2
import numpy as np

from app.demo.camera import Camera
from app.demo.render import hall
from app.demo.scene import make_scene


def test_projection_matches_opencv() -> None:
    """Camera.project agrees with cv2.projectPoints for the same intrinsics and pose
    (external: OpenCV's pinhole model)."""
    cam = Camera.looking_at((0.7, -5.3, 2.25), (0.0, 0.25, 0.72), focal=1000.0,
                            size=(1280, 720))
    rng = np.random.default_rng(0)
    points = rng.uniform([-3, -2, 0], [3, 4, 2], size=(50, 3))
    k = np.array([[cam.focal, 0, cam.principal_point[0]],
                  [0, cam.focal, cam.principal_point[1]], [0, 0, 1]])
    rvec, _ = cv2.Rodrigues(cam.rotation)
    tvec = -cam.rotation @ cam.centre
    expected, _ = cv2.projectPoints(points, rvec, tvec, k, None)
    np.testing.assert_allclose(cam.project(points), expected.reshape(-1, 2), atol=1e-6)


def test_floor_boards_meet_at_the_vanishing_point() -> None:
    """Lines on the floor running away from the camera meet where the camera sees the
    direction (0, 1, 0), K R d (projective geometry, common practice)."""
    cam = make_scene(1).camera
    d = cam.rotation @ np.array([0.0, 1.0, 0.0])
    vanishing = cam.focal * d[:2] / d[2] + cam.principal_point
    far = cam.project(np.array([[-1.0, 1e6, 0.0], [1.0, 1e6, 0.0]]))
    np.testing.assert_allclose(far, np.tile(vanishing, (2, 1)), atol=0.01)


def test_hall_is_warm_and_in_range() -> None:
    """The empty hall is an evening picture: values in [0, 1], more red than blue overall
    (warm lamps). Our brief, no source."""
    background = hall(make_scene(1).camera)
    assert background.shape == (1440, 2560, 3)
    assert background.min() >= 0.0 and background.max() <= 1.0
    mean = background.reshape(-1, 3).mean(axis=0)
    assert mean[0] > mean[2]
