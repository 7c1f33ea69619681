"""Simulated network maps: errors that grow with occlusion, network-like values, stable files."""

from __future__ import annotations

import zipfile
from pathlib import Path

import numpy as np

from app.analysis.targets import confidence_maps
from app.demo.maps import draw, perceive, save_maps
from app.model.skeleton import coco_body

SKELETON = coco_body()


def _crowd(n: int, rng: np.random.Generator) -> np.ndarray:
    """Synthetic standing people (invented for the test), 300 px tall, side by side."""
    base = np.array([
        [0, -140], [-5, -145], [5, -145], [-12, -140], [12, -140], [-30, -105], [30, -105],
        [-38, -55], [38, -55], [-40, -10], [40, -10], [-20, 0], [20, 0], [-20, 75], [20, 75],
        [-20, 150], [20, 150],
    ], float)
    people = np.zeros((n, 17, 3))
    for p in range(n):
        people[p, :, :2] = base + np.array([100 + 110 * (p % 10), 200 + 300 * (p // 10)])
        people[p, :, :2] += rng.normal(0, 2, (17, 2))
        people[p, :, 2] = 2
    return people


def test_hidden_joints_wander_further_and_answer_weaker() -> None:
    """Joints covered by something else are placed less precisely and with lower peaks than
    visible ones (our error model; synthetic people)."""
    rng = np.random.default_rng(5)
    truth = _crowd(20, rng)
    hidden = truth.copy()
    hidden[:, :, 2] = 1
    height, facing = np.full(20, 300.0), np.ones(20)
    seen_clear = perceive(truth, np.zeros((20, 17)), height, facing, SKELETON,
                          np.random.default_rng(1))[:20]
    seen_hidden = perceive(hidden, np.ones((20, 17)), height, facing, SKELETON,
                           np.random.default_rng(1))[:20]
    err_clear = np.concatenate([np.hypot(*(s.keypoints[:, :2] - t[:, :2]).T)
                                for s, t in zip(seen_clear, truth)])
    err_hidden = np.concatenate([np.hypot(*(s.keypoints[:, :2] - t[:, :2]).T)
                                 for s, t in zip(seen_hidden, truth)])
    assert np.median(err_hidden) > 2 * np.median(err_clear)
    peak_clear = np.concatenate([s.peak[s.peak > 0] for s in seen_clear])
    peak_hidden = np.concatenate([s.peak[s.peak > 0] for s in seen_hidden])
    assert peak_hidden.mean() < peak_clear.mean() - 0.2
    assert peak_clear.min() >= 0.75 * 0.65 and peak_clear.max() <= 1.0


def test_maps_look_like_a_network_answer() -> None:
    """Peaks sit on the visible joints with heights between 0.5 and 1, values stay in [0, 1],
    and the maps are empty away from the people. The per-person maps are those of
    app.analysis.targets (Cao et al. 2017, Eq. 7)."""
    rng = np.random.default_rng(2)
    truth = _crowd(3, rng)
    seen = perceive(truth, np.zeros((3, 17)), np.full(3, 300.0), np.ones(3), SKELETON,
                    np.random.default_rng(3))
    conf, fields = draw(seen, SKELETON, (1280, 720), 8, np.random.default_rng(4))
    assert conf.dtype == np.float16 and fields.dtype == np.float16
    assert conf.shape == (17, 90, 160) and fields.shape == (19, 2, 90, 160)
    assert conf.min() >= 0.0 and conf.max() <= 1.0
    # The strongest answer of each joint type is near one of the true joints.
    for j in range(17):
        r, c = np.unravel_index(np.argmax(conf[j]), conf[j].shape)
        point = np.array([c * 8 + 3.5, r * 8 + 3.5])
        nearest = np.hypot(*(truth[:, j, :2] - point).T).min()
        assert nearest < 12.0
        assert 0.5 <= float(conf[j, r, c]) <= 1.0
    # Far from everyone (the right half of the picture) nothing answers.
    assert not conf[:, :, 60:].any() and not fields[..., 60:].any()
    clean = confidence_maps(truth, (1280, 720), 8, 9.0).max(axis=0)
    assert ((conf.max(axis=0) > 0.3) <= (clean > 0.05)).all()


def test_map_files_are_byte_stable(tmp_path: Path) -> None:
    """Equal arrays give equal files (fixed zip time stamps), readable without pickles
    (numpy's npz format)."""
    conf = np.random.default_rng(0).random((17, 9, 16)).astype(np.float16)
    fields = np.zeros((19, 2, 9, 16), np.float16)
    save_maps(tmp_path / "a.npz", conf, fields, 8)
    save_maps(tmp_path / "b.npz", conf, fields, 8)
    assert (tmp_path / "a.npz").read_bytes() == (tmp_path / "b.npz").read_bytes()
    with zipfile.ZipFile(tmp_path / "a.npz") as archive:
        assert {i.date_time for i in archive.infolist()} == {(1980, 1, 1, 0, 0, 0)}
    with np.load(tmp_path / "a.npz", allow_pickle=False) as npz:
        np.testing.assert_array_equal(npz["confidence_maps"], conf)
        assert int(npz["stride"]) == 8
