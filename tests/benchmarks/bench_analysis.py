"""Speed of the analysis core on a crowded full-HD frame, against baselines from the same run.

- Training targets (confidence maps + part affinity fields) for 30 synthetic people, 17 joints,
  19 limbs, 1920 x 1080 at stride 8: against the plain per-person loop over the whole grid
  (written here) and against a memory copy of arrays the size of the output.
- Grouping those 30 people back from their own maps: median wall time.
- OKS for 100 x 100 people: against pycocotools' ``COCOeval.computeOks`` on the same input.

All people are synthetic (tests/analysis/synth.py).
"""

from __future__ import annotations

import contextlib
import io
import math

import numpy as np

from app.analysis.association import group_people
from app.analysis.similarity import oks_matrix, person_area
from app.analysis.targets import confidence_maps, part_affinity_fields
from tests.analysis import synth
from tests.benchmarks import common

SIZE, STRIDE, SIGMA, LIMB_WIDTH = (1920, 1080), 8, 8.0, 8.0


def plain_targets(kp: np.ndarray, limbs: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The straightforward implementation: per person, per joint or limb, the whole grid."""
    width, height = SIZE
    rows, cols = math.ceil(height / STRIDE), math.ceil(width / STRIDE)
    ys = (np.arange(rows) * STRIDE + (STRIDE - 1) / 2)[:, None]
    xs = (np.arange(cols) * STRIDE + (STRIDE - 1) / 2)[None, :]
    maps = np.zeros((kp.shape[1], rows, cols))
    for person in kp:
        for j, (x, y, v) in enumerate(person):
            if v > 0:
                g = np.exp(-((xs - x) ** 2 + (ys - y) ** 2) / SIGMA**2)
                np.maximum(maps[j], g, out=maps[j])
    fields = np.zeros((len(limbs), 2, rows, cols))
    for c, (j1, j2) in enumerate(limbs):
        count = np.zeros((rows, cols))
        for person in kp:
            (x1, y1, v1), (x2, y2, v2) = person[j1], person[j2]
            norm = math.hypot(x2 - x1, y2 - y1) if v1 > 0 and v2 > 0 else 0.0
            if norm == 0:
                continue
            ux, uy = (x2 - x1) / norm, (y2 - y1) / norm
            along = ux * (xs - x1) + uy * (ys - y1)
            across = np.abs(ux * (ys - y1) - uy * (xs - x1))
            on = (along >= 0) & (along <= norm) & (across <= LIMB_WIDTH)
            fields[c, 0] += on * ux
            fields[c, 1] += on * uy
            count += on
        fields[c] /= np.maximum(count, 1)
    return maps.astype(np.float32), fields.astype(np.float32)


def _crowd() -> np.ndarray:
    rng = np.random.default_rng(0)
    people = synth.crowd(rng, 30, SIZE, (220, 420), min_gap=0.25, margin=4)
    return synth.hide_ends(rng, people, 0.2)


def _targets_rows(kp: np.ndarray) -> list[dict]:
    limbs = synth.LIMBS

    def ours() -> tuple[np.ndarray, np.ndarray]:
        return (confidence_maps(kp, SIZE, STRIDE, SIGMA),
                part_affinity_fields(kp, limbs, SIZE, STRIDE, LIMB_WIDTH))

    maps, fields = ours()
    plain_maps, plain_fields = plain_targets(kp, limbs)
    agree = (np.abs(maps - plain_maps).max() <= 1e-3
             and np.abs(fields - plain_fields).max() <= 1e-5)
    t_ours = common.median_seconds(ours, repeat=25)
    t_plain = common.median_seconds(lambda: plain_targets(kp, limbs), repeat=3, warmup=1)
    t_copy = common.median_seconds(lambda: (np.copy(maps), np.copy(fields)), repeat=25)
    speedup = t_plain / t_ours
    versus_copy = t_ours / t_copy
    shape = f"{maps.shape} + {fields.shape} float32"
    return [
        common.row(
            "targets: speed-up over plain loop", speedup, "x", ">= 50x", speedup >= 50,
            f"ours {t_ours * 1e3:.2f} ms, plain per-person loop {t_plain * 1e3:.1f} ms "
            f"(30 people, {shape}); outputs agree: {agree}",
        ),
        common.row(
            "targets: time / memory copy", versus_copy, "x", "<= 10x", versus_copy <= 10,
            f"ours {t_ours * 1e3:.2f} ms, np.copy of both outputs {t_copy * 1e3:.3f} ms",
        ),
    ]


def _grouping_row(kp: np.ndarray) -> dict:
    maps = confidence_maps(kp, SIZE, STRIDE, SIGMA)
    fields = part_affinity_fields(kp, synth.LIMBS, SIZE, STRIDE, LIMB_WIDTH)
    people = group_people(maps, fields, synth.LIMBS, stride=STRIDE)
    t = common.median_seconds(lambda: group_people(maps, fields, synth.LIMBS, stride=STRIDE))
    return common.row(
        "grouping: 30 people, 1920x1080 / 8", t * 1e3, "ms", "<= 30 ms", t <= 0.030,
        f"median of 15 runs; {len(people)} people found from their own maps",
    )


def _oks_row() -> dict:
    from pycocotools.coco import COCO
    from pycocotools.cocoeval import COCOeval

    rng = np.random.default_rng(1)
    ref = synth.crowd(rng, 100, SIZE, (100, 400))
    ref = synth.hide_ends(rng, ref, 0.3)
    ref[..., :2] = np.nan_to_num(ref[..., :2])
    pred = ref[rng.permutation(100)].copy()
    pred[..., :2] += rng.normal(0, 5, pred[..., :2].shape)
    pred[..., 2] = 1.0
    areas = person_area(ref)
    boxes = np.zeros((100, 4))
    gt = COCO()
    gt.dataset = {
        "images": [{"id": 1, "width": SIZE[0], "height": SIZE[1], "file_name": "bench.png"}],
        "categories": [{"id": 1, "name": "person", "keypoints": list(synth.SKELETON.joints),
                        "skeleton": []}],
        "annotations": [
            {"id": j + 1, "image_id": 1, "category_id": 1, "iscrowd": 0,
             "keypoints": r.ravel().tolist(), "num_keypoints": int((r[:, 2] > 0).sum()),
             "area": float(areas[j]), "bbox": boxes[j].tolist()}
            for j, r in enumerate(ref)
        ],
    }
    with contextlib.redirect_stdout(io.StringIO()):
        gt.createIndex()
        dt = gt.loadRes([
            {"image_id": 1, "category_id": 1, "keypoints": p.ravel().tolist(),
             "score": 1.0 - i / 200} for i, p in enumerate(pred)
        ])
        ev = COCOeval(gt, dt, "keypoints")
    ev.params.imgIds = [1]
    ev.params.maxDets = [100]
    ev._prepare()
    want = np.asarray(ev.computeOks(1, 1))
    got = oks_matrix(pred, ref, areas, synth.SIGMAS, boxes)
    agree = bool(np.allclose(got, want, rtol=1e-12, atol=1e-15))
    t_ours = common.median_seconds(lambda: oks_matrix(pred, ref, areas, synth.SIGMAS, boxes),
                                   repeat=51, warmup=3)
    t_coco = common.median_seconds(lambda: ev.computeOks(1, 1), repeat=5, warmup=1)
    ratio = t_coco / t_ours
    return common.row(
        "oks_matrix 100x100: speed-up over pycocotools", ratio, "x", ">= 150x", ratio >= 150,
        f"ours {t_ours * 1e3:.3f} ms, pycocotools computeOks {t_coco * 1e3:.1f} ms; "
        f"equal: {agree}",
    )


def run() -> list[dict]:
    kp = _crowd()
    return [*_targets_rows(kp), _grouping_row(kp), _oks_row()]
