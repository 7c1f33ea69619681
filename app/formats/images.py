"""Images on disk: finding them, reading their size, decoding them (OpenCV).

Decoding follows OpenCV's defaults, including the EXIF orientation of JPEG files, so sizes and
pixels agree everywhere the project looks at an image.
"""

from __future__ import annotations

import logging
import os
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path

import cv2
import numpy as np

log = logging.getLogger(__name__)

#: File name endings registered as images (lower case).
IMAGE_SUFFIXES = (".jpg", ".jpeg", ".png", ".bmp", ".tif", ".tiff", ".webp")

#: Larger than any camera makes today; a bigger size means a broken header or a hostile file.
MAX_SIDE = 65_536


@dataclass(frozen=True)
class ImageInfo:
    """What registration learns about one image file."""

    path: Path
    width: int
    height: int
    status: str  # "ok", "missing" or "corrupt"


def find_images(folder: str | Path) -> list[Path]:
    """Every image file under ``folder`` (recursively), sorted by relative path."""
    folder = Path(folder)
    return sorted(_walk(folder), key=lambda p: p.relative_to(folder).as_posix())


def _walk(folder: Path) -> Iterator[Path]:
    for root, dirs, files in os.walk(folder):
        dirs[:] = sorted(d for d in dirs if not d.startswith("."))
        for name in files:
            if not name.startswith(".") and name.lower().endswith(IMAGE_SUFFIXES):
                yield Path(root) / name


def probe_image(path: str | Path) -> ImageInfo:
    """Decode ``path`` once to learn its size; never raises for a bad file.

    Returns status ``"missing"`` when the file does not exist and ``"corrupt"`` when OpenCV
    cannot decode it (width and height are then 0).
    """
    path = Path(path)
    if not path.is_file():
        return ImageInfo(path, 0, 0, "missing")
    image = decode_image(path)
    if image is None:
        return ImageInfo(path, 0, 0, "corrupt")
    h, w = image.shape[:2]
    return ImageInfo(path, int(w), int(h), "ok")


def decode_image(path: str | Path) -> np.ndarray | None:
    """The image as an ``(H, W, 3)`` uint8 BGR array, or ``None`` if it cannot be read."""
    try:
        data = np.fromfile(str(path), dtype=np.uint8)
    except OSError as exc:
        log.warning("cannot read image %s: %s", path, exc)
        return None
    if data.size == 0:
        return None
    image = cv2.imdecode(data, cv2.IMREAD_COLOR)
    if image is None or image.ndim != 3:
        return None
    return image
