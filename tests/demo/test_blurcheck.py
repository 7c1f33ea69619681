"""Acceptance of issue 17 on a demo seed used nowhere else (44, two frames): every visible true
head (a true face joint with v = 2) has its true face box changed in the packet's image, and
at most 15 % of a frame's pixels are blurred. The truth is the demo's own (synthetic, invented
for Posewright); the measure is app/demo/blurcheck.py. The blur was tuned on seeds 2, 43, 46,
51, 52 and on the share of seed 74, never on 44; the README's review section gives the figures
of the other seeds. The cases behind each change (a head known by one ear, a person turned side
on, shoulders the labels miss, face-sum noise among legs) have fast synthetic tests in
tests/review/test_blur.py, so this one stays at two frames.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from app.demo import generate
from app.demo.blurcheck import CHANGED, changed_share, face_boxes, measure_demo
from app.model.skeleton import coco_body
from app.review.packet import read_packet

SEED = 44


@pytest.mark.slow
def test_every_visible_head_of_an_unseen_seed_is_blurred_and_little_else(tmp_path: Path):
    demo = tmp_path / "demo"
    generate(demo, seed=SEED, frames=2)
    figures = measure_demo(demo, packet=tmp_path / "packet.zip")
    assert figures.heads >= 20 and figures.frames == 2
    assert figures.blurred == figures.heads, figures.missed
    assert 0.01 < figures.worst_frame_share <= 0.15

    packet = read_packet(tmp_path / "packet.zip")
    assert packet.images == "blurred-heads"
    for frame in packet.manifest["frames"]:
        blur = frame["blur"]
        assert blur["sources"][:2] == ["labels", "maps"] and blur["risk"] is None
        assert blur["share"] == pytest.approx(figures.frame_shares[frame["id"] - 1], abs=0.02)
        placed = {s for region in blur["regions"] for s in region["sources"]}
        assert {"labels", "maps"} <= placed


def test_the_measure_counts_a_head_left_sharp():
    """Synthetic: one face box untouched, one blurred (the measure can fail)."""
    kp = np.zeros((2, 17, 3))
    kp[0, [0, 1, 2]] = [[20, 20, 2], [17, 17, 2], [23, 17, 2]]
    kp[1, [0, 1, 2]] = [[60, 20, 2], [57, 17, 2], [63, 17, 2]]
    boxes = face_boxes(kp, np.array([[0, 0, 40, 200.0], [40, 0, 40, 200.0]]), coco_body())
    before = np.zeros((40, 80, 3), np.uint8)
    after = before.copy()
    after[:, 40:] = 7
    share = changed_share(before, after, boxes)
    assert share[0] == 0.0 and share[1] == 1.0 >= CHANGED
