"""Synthetic test data (invented for the tests, not from any real source).

Plausible-looking COCO-17 people at random places, and COCO datasets built from them.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import cv2
import numpy as np

from app.model.skeleton import coco_body

# A standing person, 17 COCO joints, in units of stature, origin at the feet centre, y up.
_TEMPLATE = np.array([
    [0.00, 0.94], [-0.02, 0.96], [0.02, 0.96], [-0.05, 0.95], [0.05, 0.95],
    [-0.13, 0.82], [0.13, 0.82], [-0.16, 0.63], [0.16, 0.63], [-0.17, 0.48], [0.17, 0.48],
    [-0.08, 0.52], [0.08, 0.52], [-0.09, 0.28], [0.09, 0.28], [-0.09, 0.04], [0.09, 0.04],
])


def person(rng: np.random.Generator, width: int, height: int, p_unlabeled: float = 0.15,
           p_occluded: float = 0.2) -> np.ndarray:
    """One synthetic person ``(17, 3)`` inside a ``width x height`` image."""
    stature = rng.uniform(0.25, 0.6) * height
    foot = np.array([rng.uniform(0.1, 0.9) * width, rng.uniform(0.6, 0.95) * height])
    xy = foot + _TEMPLATE * [stature, -stature] + rng.normal(0, 0.02 * stature, (17, 2))
    v = np.where(rng.random(17) < p_occluded, 1, 2)
    v[rng.random(17) < p_unlabeled] = 0
    kp = np.column_stack([np.round(xy, 2), v]).astype(np.float64)
    kp[v == 0, :2] = 0
    return kp


def write_images(folder: Path, n: int, width: int = 320, height: int = 240) -> list[str]:
    """``n`` small synthetic JPEG images; returns their file names."""
    folder.mkdir(parents=True, exist_ok=True)
    names = []
    for i in range(n):
        name = f"frame_{i:04d}.jpg"
        img = np.full((height, width, 3), 40 + 10 * (i % 10), np.uint8)
        cv2.imwrite(str(folder / name), img)
        names.append(name)
    return names


def coco_dataset(names: list[str], people_per_image: int = 3, seed: int = 0,
                 width: int = 320, height: int = 240, first_image_id: int = 100,
                 first_annotation_id: int = 5000) -> dict[str, Any]:
    """A synthetic COCO keypoints dataset over the images ``names``."""
    rng = np.random.default_rng(seed)
    images, annotations = [], []
    aid = first_annotation_id
    for i, name in enumerate(names):
        image_id = first_image_id + 7 * i  # deliberately not 1, 2, 3...
        images.append({"id": image_id, "file_name": name, "width": width, "height": height})
        for _ in range(people_per_image):
            kp = person(rng, width, height)
            on = kp[:, 2] > 0
            if not on.any():
                continue
            x0, y0 = kp[on, :2].min(axis=0)
            x1, y1 = kp[on, :2].max(axis=0)
            annotations.append({
                "id": aid, "image_id": image_id, "category_id": 1,
                "keypoints": [float(v) if k % 3 < 2 else int(v)
                              for k, v in enumerate(kp.ravel())],
                "num_keypoints": int(on.sum()),
                "bbox": [float(x0) - 5, float(y0) - 5, float(x1 - x0) + 10, float(y1 - y0) + 10],
                "area": float((x1 - x0 + 10) * (y1 - y0 + 10)) * 0.6,
                "iscrowd": 0,
            })
            aid += 1
    return {"info": {"description": "synthetic test data"}, "images": images,
            "annotations": annotations, "categories": [coco_body().coco_category()]}
