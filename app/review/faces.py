"""A general-purpose face detector, the last net under blurred packet images.

The detector is OpenCV's cascade classifier with the Haar cascades that the
``opencv-python-headless`` wheel ships in ``cv2.data.haarcascades`` (the 4.x series; OpenCV 5
moved the cascade classifier out of its main modules, hence the ``<5`` bound in
pyproject.toml): ``haarcascade_frontalface_default.xml`` for faces turned to the camera and
``haarcascade_profileface.xml``, run on the image and on its mirror image, for faces seen side
on. Why these: they are already a dependency (nothing to download, no model file of our own),
run on the CPU in a fraction of a second per frame, and are general-purpose detectors trained on
photographs of faces rather than on our labels. They see no face from behind and miss small,
tilted or covered faces; that is why they come after the labels and the network maps, not
instead of them.

References
----------
P. Viola, M. Jones, "Rapid Object Detection using a Boosted Cascade of Simple Features",
CVPR 2001 (the detector); the cascade files are the ones OpenCV distributes.
"""

from __future__ import annotations

import logging
from functools import lru_cache
from pathlib import Path

import cv2
import numpy as np

__all__ = ["FaceDetector", "face_detector"]

log = logging.getLogger(__name__)

#: The cascade files, by what they find.
CASCADES = {"frontal": "haarcascade_frontalface_default.xml",
            "profile": "haarcascade_profileface.xml"}


class FaceDetector:
    """Faces in an image as boxes, from OpenCV's bundled Haar cascades.

    Parameters
    ----------
    folder
        Where the cascade files are (default ``cv2.data.haarcascades``).
    min_neighbours
        How many overlapping raw detections a face needs (OpenCV's ``minNeighbors``; higher
        finds fewer false faces and misses more real ones). 4 is a little more eager than
        OpenCV's documented example value of 5: a false face only costs a blurred patch.
    """

    def __init__(self, folder: str | Path | None = None, min_neighbours: int = 4):
        root = Path(folder if folder is not None
                    else cv2.data.haarcascades)  # type: ignore[attr-defined]
        self._cascades = {}
        for kind, name in CASCADES.items():
            cascade = cv2.CascadeClassifier(str(root / name))
            if cascade.empty():
                raise FileNotFoundError(f"{root / name}: the face cascade does not load")
            self._cascades[kind] = cascade
        self.min_neighbours = min_neighbours

    def __call__(self, image: np.ndarray, min_size: int = 12) -> np.ndarray:
        """Face boxes in ``image``.

        Parameters
        ----------
        image
            ``(H, W, 3)`` BGR or ``(H, W)`` grey uint8.
        min_size
            Smallest face side looked for, in pixels.

        Returns
        -------
        numpy.ndarray
            ``(N, 4)`` float64 ``x, y, width, height`` of each face box, in image pixels
            (``x, y`` the box's top-left pixel centre).

        Notes
        -----
        The image is turned grey and its histogram equalised (OpenCV's documented preparation
        for these cascades), then scanned at scales 1.1 apart. Profile faces are looked for on
        the image and on its mirror image (the cascade knows one side only); boxes found in
        the mirror are mirrored back.
        """
        grey = image if image.ndim == 2 else cv2.cvtColor(image, cv2.COLOR_BGR2GRAY)
        grey = cv2.equalizeHist(grey)
        width = grey.shape[1]
        size = (int(min_size), int(min_size))
        found = []
        for kind, cascade in self._cascades.items():
            for mirrored in ((False, True) if kind == "profile" else (False,)):
                scan = grey[:, ::-1] if mirrored else grey
                raw = cascade.detectMultiScale(np.ascontiguousarray(scan), scaleFactor=1.1,
                                               minNeighbors=self.min_neighbours, minSize=size)
                boxes = np.asarray(raw, dtype=np.float64).reshape(-1, 4)
                if mirrored:
                    boxes[:, 0] = width - boxes[:, 0] - boxes[:, 2]
                found.append(boxes)
        return np.concatenate(found, axis=0)


@lru_cache(maxsize=1)
def face_detector() -> FaceDetector | None:
    """The shared detector, or None (with a warning) when this OpenCV has no cascades."""
    try:
        return FaceDetector()
    except (AttributeError, FileNotFoundError, cv2.error) as exc:
        log.warning("no face detector: %s (install opencv-python-headless<5, whose wheel "
                    "ships the Haar cascades)", exc)
        return None
