"""A pinhole camera looking into the hall.

Pixel coordinates follow the project's convention: x to the right, y down, integer coordinates
on pixel centres, so the optical axis of a ``w x h`` image passes through ``((w-1)/2, (h-1)/2)``.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class Camera:
    """A pinhole camera: world-to-camera rotation, centre, focal length in pixels, image size.

    Camera axes follow the usual computer-vision convention: x to the right of the image,
    y down, z along the viewing direction.

    Examples
    --------
    >>> cam = Camera.looking_at((0.0, -5.0, 1.0), (0.0, 0.0, 1.0), focal=1000.0,
    ...                         size=(1280, 720))
    >>> cam.project(np.array([[0.0, 0.0, 1.0]]))
    array([[639.5, 359.5]])
    """

    rotation: np.ndarray
    centre: np.ndarray
    focal: float
    size: tuple[int, int]

    @staticmethod
    def looking_at(centre: tuple[float, float, float], target: tuple[float, float, float],
                   focal: float, size: tuple[int, int]) -> Camera:
        """A level camera (no roll) at ``centre`` aimed at ``target`` (world metres, z up)."""
        c = np.asarray(centre, dtype=float)
        z = np.asarray(target, dtype=float) - c
        z /= np.linalg.norm(z)
        x = np.cross(z, [0.0, 0.0, 1.0])
        x /= np.linalg.norm(x)
        y = np.cross(z, x)
        return Camera(np.vstack([x, y, z]), c, float(focal), size)

    @property
    def principal_point(self) -> np.ndarray:
        return np.array([(self.size[0] - 1) / 2.0, (self.size[1] - 1) / 2.0])

    def to_camera(self, points: np.ndarray) -> np.ndarray:
        """``(..., 3)`` world points to camera coordinates (z is the depth in metres)."""
        return (np.asarray(points, dtype=float) - self.centre) @ self.rotation.T

    def project(self, points: np.ndarray) -> np.ndarray:
        """``(..., 3)`` world points to ``(..., 2)`` pixel coordinates.

        Notes
        -----
        ``u = f X / Z + cx``, ``v = f Y / Z + cy`` with ``(X, Y, Z)`` in camera coordinates.

        References
        ----------
        The pinhole camera model: Hartley and Zisserman, "Multiple View Geometry in Computer
        Vision", 2nd ed., Sec. 6.1 (tests compare with OpenCV's ``projectPoints``).
        """
        pc = self.to_camera(points)
        z = np.maximum(pc[..., 2:3], 1e-6)
        return self.focal * pc[..., :2] / z + self.principal_point

    def rays(self, scale: int = 1) -> np.ndarray:
        """``(h*scale, w*scale, 3)`` world directions of the rays through every subpixel centre."""
        w, h = self.size
        xs = (np.arange(w * scale) + 0.5) / scale - 0.5
        ys = (np.arange(h * scale) + 0.5) / scale - 0.5
        u, v = np.meshgrid(xs, ys)
        cx, cy = self.principal_point
        d = np.stack([(u - cx) / self.focal, (v - cy) / self.focal, np.ones_like(u)], axis=-1)
        return d @ self.rotation
