"""How well a blurred review packet hides the demo's people, measured against its true poses.

A visible true head is a dancer with at least one face joint (nose, eyes, ears) that the truth
labels visible (``v = 2``). Its *true face box* is the box around those visible face joints,
widened on every side by a quarter of a head's width (``0.025 H``, H the dancer's stature
from the true torso, :func:`app.analysis.anthropometry.person_scale`, else the height of the
dancer's box in the truth). The head is blurred when at least :data:`CHANGED` of the box's
pixels differ between the image the packet carries and the original. Also measured: the
share of each frame's pixels that the blur changed (a blur of the whole frame would hide
every head and show nothing).

Run it on demos generated into a cache folder (each seed once, about half a minute)::

    python -m app.demo.blurcheck 41-43 --cache /tmp/demos [--images blurred-heads]

The README's review section shows the figures; the acceptance test
``tests/demo/test_blurcheck.py`` measures a short demo of a seed not used anywhere else.
"""

from __future__ import annotations

import argparse
import tempfile
import zipfile
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import cv2
import numpy as np

from app.analysis.anthropometry import person_scale
from app.fileio import read_json
from app.model.skeleton import Skeleton, coco_body

__all__ = ["CHANGED", "BlurFigures", "changed_share", "face_boxes", "measure_demo"]

#: Least share of a true face box's pixels that must change for the head to count as blurred.
CHANGED = 0.9

FACE_JOINTS = ("nose", "left_eye", "right_eye", "left_ear", "right_ear")


def face_boxes(truth: np.ndarray, boxes: np.ndarray, skeleton: Skeleton) -> np.ndarray:
    """The true face box of each dancer with a visible face joint.

    Parameters
    ----------
    truth
        ``(M, K, 3)`` true ``x, y, v``.
    boxes
        ``(M, 4)`` the truth's ``bbox`` (x, y, width, height of the visible pixels).
    skeleton
        The joint layout.

    Returns
    -------
    numpy.ndarray
        ``(M, 4)`` ``x0, y0, x1, y1`` in image pixels; NaN where no face joint is visible.

    Examples
    --------
    >>> kp = np.zeros((1, 17, 3)); kp[0, 1] = (100, 50, 2); kp[0, 2] = (110, 50, 2)
    >>> face_boxes(kp, np.array([[80.0, 40.0, 60.0, 200.0]]), coco_body())
    array([[ 95.,  45., 115.,  55.]])
    """
    index = {n: i for i, n in enumerate(skeleton.joints)}
    face = [index[n] for n in FACE_JOINTS if n in index]
    out = np.full((len(truth), 4), np.nan)
    for m, kp in enumerate(np.asarray(truth, dtype=np.float64)):
        seen = [j for j in face if kp[j, 2] == 2]
        if not seen:
            continue
        stature = person_scale(kp, skeleton)
        if not (np.isfinite(stature) and stature > 0):
            stature = float(boxes[m][3])
        margin = 0.025 * stature
        xy = kp[seen, :2]
        out[m] = (*(xy.min(axis=0) - margin), *(xy.max(axis=0) + margin))
    return out


def changed_share(original: np.ndarray, sent: np.ndarray, boxes: np.ndarray) -> np.ndarray:
    """``(M,)`` the share of each box's pixels (centres inside, clipped to the image) that
    differ in any channel; NaN for a NaN box or one wholly outside the image.

    Examples
    --------
    >>> a = np.zeros((10, 10, 3), np.uint8); b = a.copy(); b[:5] = 9
    >>> changed_share(a, b, np.array([[0.0, 0.0, 9.0, 9.0], [0.0, 0.0, 9.0, 4.0]]))
    array([0.5, 1. ])
    """
    h, w = original.shape[:2]
    differs = (original != sent).reshape(h, w, -1).any(axis=2)
    out = np.full(len(boxes), np.nan)
    for m, (x0, y0, x1, y1) in enumerate(np.asarray(boxes, dtype=np.float64)):
        if not np.isfinite([x0, y0, x1, y1]).all():
            continue
        c0, r0 = max(0, int(np.ceil(x0))), max(0, int(np.ceil(y0)))
        c1, r1 = min(w - 1, int(np.floor(x1))), min(h - 1, int(np.floor(y1)))
        if c0 <= c1 and r0 <= r1:
            out[m] = float(differs[r0:r1 + 1, c0:c1 + 1].mean())
    return out


@dataclass(frozen=True)
class BlurFigures:
    """One demo's figures: visible heads, how many were blurred, the least share changed of a
    head's box, and the share of each frame's pixels blurred."""

    seed: int | None
    frames: int
    heads: int
    blurred: int
    least_changed: float
    frame_shares: tuple[float, ...]
    missed: tuple[tuple[int, int], ...]  # (frame id, track id) of heads left sharp

    @property
    def worst_frame_share(self) -> float:
        return max(self.frame_shares, default=0.0)

    @property
    def mean_frame_share(self) -> float:
        return float(np.mean(self.frame_shares)) if self.frame_shares else 0.0

    def line(self) -> str:
        return (f"seed {self.seed}: {self.blurred} of {self.heads} visible heads blurred "
                f"(least share of a face box changed {self.least_changed:.2f}); pixels "
                f"blurred per frame {self.mean_frame_share:.1%} on average, at most "
                f"{self.worst_frame_share:.1%}")


def measure_demo(folder: str | Path, images: str = "blurred-heads",
                 packet: str | Path | None = None) -> BlurFigures:
    """Export a packet of every frame of a demo and measure its images against the truth.

    Parameters
    ----------
    folder
        A generated demo (``posewright demo DIR``); its project is built when missing.
    images
        ``blurred-heads`` or ``blurred-people``.
    packet
        Where the packet is written and kept (default: a temporary file, removed).
    """
    from app.formats.images import read_image
    from app.jobs import open_project
    from app.review.packet import export_packet

    folder = Path(folder)
    sources = read_json(folder / "project-sources.json", "the demo's sources")
    truth = read_json(folder / "truth.json", "the demo's truth")
    skeleton = coco_body()
    k = skeleton.num_joints
    by_name = {im["file_name"]: im["id"] for im in truth["images"]}
    people: dict[int, list[dict[str, Any]]] = {im["id"]: [] for im in truth["images"]}
    for ann in truth["annotations"]:
        people[ann["image_id"]].append(ann)
    heads = blurred = 0
    least = 1.0
    shares, missed = [], []
    with tempfile.TemporaryDirectory() as tmp:
        packet = Path(packet) if packet is not None else Path(tmp) / "packet.zip"
        with open_project(folder) as project:
            frames = project.frames()
            export_packet(project, packet, frames, images=images)
            originals = {f.id: read_image(project.image_path(f)) for f in frames}
        with zipfile.ZipFile(packet) as z:
            for frame in frames:
                sent = cv2.imdecode(np.frombuffer(z.read(f"images/{frame.id}.png"), np.uint8),
                                    cv2.IMREAD_COLOR)
                original = originals[frame.id]
                shares.append(float((sent != original).any(axis=2).mean()))
                anns = people[by_name[frame.file_name]]
                kp = np.array([a["keypoints"] for a in anns], float).reshape(-1, k, 3)
                boxes = face_boxes(kp, np.array([a["bbox"] for a in anns], float).reshape(-1, 4),
                                   skeleton)
                share = changed_share(original, sent, boxes)
                for a, s in zip(anns, share):
                    if np.isnan(s):
                        continue
                    heads += 1
                    least = min(least, float(s))
                    if s >= CHANGED:
                        blurred += 1
                    else:
                        missed.append((frame.id, int(a.get("track_id", -1))))
    return BlurFigures(sources.get("seed"), len(shares), heads, blurred, least, tuple(shares),
                       tuple(missed))


def _seeds(text: str) -> list[int]:
    out: list[int] = []
    for part in text.split(","):
        a, _, b = part.partition("-")
        out += list(range(int(a), int(b or a) + 1))
    return out


def main(argv: list[str] | None = None) -> int:
    from app.demo import generate

    parser = argparse.ArgumentParser(prog="python -m app.demo.blurcheck",
                                     description="measure blurred packets on demo seeds")
    parser.add_argument("seeds", help="e.g. 41-43 or 2,41")
    parser.add_argument("--cache", required=True, help="folder of generated demos (s<seed>/)")
    parser.add_argument("--images", default="blurred-heads",
                        choices=("blurred-heads", "blurred-people"))
    args = parser.parse_args(argv)
    for seed in _seeds(args.seeds):
        folder = Path(args.cache) / f"s{seed}"
        if not (folder / "project-sources.json").is_file():
            generate(folder, seed=seed)
        figures = measure_demo(folder, args.images)
        print(figures.line(), flush=True)
        for frame_id, track in figures.missed:
            print(f"  sharp: frame {frame_id}, dancer {track}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
