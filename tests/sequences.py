"""Synthetic sequences (invented for the tests): dancers walking across a few frames, made
into a project, with the errors over time the sequence checks look for put in by hand."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np

from app.jobs import import_coco, new_project
from app.model.skeleton import coco_body
from tests import synthetic

WIDTH, HEIGHT = 640, 480
#: A standing person, 17 COCO joints, in units of stature, origin at the feet centre, y up.
TEMPLATE = synthetic._TEMPLATE


def dancers(frames: int = 12, n: int = 3, stature: float = 150.0, step: float = 6.0,
            spacing: float = 140.0, seed: int = 0) -> np.ndarray:
    """``(frames, n, 17, 3)``: ``n`` dancers side by side walking right ``step`` pixels a
    frame (each joint jittering by 0.5 pixel), every joint labelled visible."""
    rng = np.random.default_rng(seed)
    out = np.zeros((frames, n, 17, 3))
    for t in range(frames):
        for p in range(n):
            foot = np.array([120.0 + spacing * p + step * t, 400.0])
            out[t, p, :, :2] = foot + TEMPLATE * [stature, -stature] + rng.normal(0, 0.5,
                                                                                   (17, 2))
    out[..., 2] = 2
    return out


def make_project(folder: Path, people: np.ndarray, author: str = "ana"):
    """A project over one image folder with one frame per ``people[t]`` (file names
    ``step_1.jpg`` ... ``step_12.jpg``, so that only natural order puts them in order); the
    people are imported with annotation ids ``1000 * (t + 1) + p``. Returns the open project
    and the frame ids in order."""
    images = folder / "images"
    names = synthetic.write_images(images, len(people), WIDTH, HEIGHT)
    renamed = []
    for t, name in enumerate(names):
        new = f"step_{t + 1}.jpg"
        (images / name).rename(images / new)
        renamed.append(new)
    project = new_project(folder / "proj", images=images, author=author)
    ds = {"images": [{"id": t + 1, "file_name": name, "width": WIDTH, "height": HEIGHT}
                     for t, name in enumerate(renamed)],
          "annotations": [], "categories": [coco_body().coco_category()]}
    for t, frame in enumerate(people):
        for p, kp in enumerate(frame):
            if np.isnan(kp[:, :2]).all():
                continue
            flat = [float(v) if k % 3 < 2 else int(v)
                    for k, v in enumerate(np.nan_to_num(kp).ravel())]
            ds["annotations"].append({"id": 1000 * (t + 1) + p, "image_id": t + 1,
                                      "category_id": 1, "keypoints": flat, "iscrowd": 0})
    path = folder / "labels.json"
    path.write_text(json.dumps(ds))
    import_coco(project, path)
    return project, list(range(1, len(people) + 1))


def pid(t: int, p: int) -> int:
    """The person id :func:`make_project` gives dancer ``p`` in frame index ``t``."""
    return 1000 * (t + 1) + p


def tracked_frames(people: np.ndarray) -> list:
    """The frames of ``people`` as in-memory labels (no project: fast), each dancer ``p`` on
    track ``p + 1`` with the person ids of :func:`make_project`."""
    from app.model.labels import FrameLabels, Person

    k = people.shape[2]
    return [FrameLabels(t + 1, coco_body(), {
        pid(t, p): Person(pid(t, p), people[t, p].copy(), np.full(k, np.nan), ("auto",) * k,
                          track=p + 1)
        for p in range(people.shape[1])}) for t in range(len(people))]
