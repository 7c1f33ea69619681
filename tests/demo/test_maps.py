"""Simulated network maps: errors that grow with occlusion and last while their cause does,
network-like values, stable files."""

from __future__ import annotations

import zipfile
from pathlib import Path

import numpy as np
import pytest
from scipy import stats

from app.analysis.targets import confidence_maps
from app.demo import maps
from app.demo.maps import MEAN_RUN, ErrorRuns, draw, perceive, run_lengths, save_maps
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


def _runs_of(active: np.ndarray, last_start: int) -> np.ndarray:
    """Lengths of the runs of True along axis 1 of a ``(chains, frames)`` bool array that start
    after the first frame and before ``last_start`` (so that a run's length is not cut short by
    the end of the sequence, given enough frames after ``last_start``)."""
    lengths = []
    for row in active:
        edges = np.flatnonzero(np.diff(np.concatenate([[0], row.astype(int), [0]])))
        starts, ends = edges[::2], edges[1::2]
        inside = (starts > 0) & (starts < last_start)
        lengths.extend((ends - starts)[inside])
    return np.asarray(lengths)


@pytest.mark.parametrize("share, mean", [(0.15, 6.0), (0.03, 4.0), (0.6, 3.0)])
def test_runs_fill_the_stated_share_with_geometric_lengths(share: float, mean: float) -> None:
    """Many independent chains (synthetic): from the first frame on, the share of frames in a
    run is the stated share (a chain started in its stationary state stays there). Runs last
    Geometric(q = 1 / mean) frames; a run that ends is followed at once by another with the
    onset chance h, so the error *shows* for Geometric(q (1 - h)) frames, mean
    ``mean / (1 - h)`` (a geometric number of geometric runs). Checked with scipy.stats.geom,
    chi-square goodness of fit at the 0.1 % level (Feller, vol. 1, Ch. XV, from memory, for
    the two-state chain)."""
    rng = np.random.default_rng(11)
    # Runs starting up to frame 100 have 20 mean lengths to end in: none is cut short in
    # practice (a chance of exp(-20) each).
    chains, frames = 4000, 100 + int(20 * mean / (1 - share))
    left = np.zeros(chains, np.int64)
    active = np.zeros((chains, frames), bool)
    for f in range(frames):
        now = run_lengths(left, np.full(chains, share), mean, f == 0, rng)
        active[:, f] = now > 0
        left = np.maximum(now - 1, 0)
    assert active[:, 0].mean() == pytest.approx(share, abs=4 * np.sqrt(share / chains))
    assert active.mean() == pytest.approx(share, rel=0.05)
    lengths = _runs_of(active, 100)
    onset = share / (mean * (1 - share) + share)
    assert lengths.mean() == pytest.approx(mean / (1 - onset), rel=0.05)
    cut = int(3 * mean)
    observed = np.bincount(np.minimum(lengths, cut), minlength=cut + 1)[1:]
    law = stats.geom((1 - onset) / mean)
    expected = np.append(law.pmf(np.arange(1, cut)), law.sf(cut - 1)) * len(lengths)
    assert stats.chisquare(observed, expected).pvalue > 1e-3


def test_a_run_ends_when_its_cause_goes() -> None:
    """A run in progress ends on the first frame whose share is 0 (the joint comes into view,
    the neighbour moves away), whatever frames it had left (our error model)."""
    rng = np.random.default_rng(0)
    now = run_lengths(np.array([5, 5, 0]), np.array([0.2, 0.0, 0.0]), 4.0, False, rng)
    assert now.tolist()[:2] == [5, 0] and now[2] == 0


def _behind(frames: int, facing_of: np.ndarray, seed: int = 2) -> np.ndarray:
    """Whether each of 20 synthetic dancers had left and right swapped, frame by frame."""
    rng = np.random.default_rng(seed)
    truth = _crowd(20, np.random.default_rng(1))
    runs = ErrorRuns()
    flipped = np.zeros((20, frames), bool)
    for f in range(frames):
        seen = perceive(truth, np.zeros((20, 17)), np.full(20, 300.0), facing_of[:, f],
                        SKELETON, rng, np.arange(101, 121), runs)[:20]
        # Left shoulder drawn where the right one is: the body is seen mirrored.
        flipped[:, f] = [np.hypot(*(s.keypoints[5, :2] - t[6, :2])) < 10
                         for s, t in zip(seen, truth)]
    return flipped


def test_a_dancer_seen_from_behind_stays_mirrored_for_a_run() -> None:
    """Twenty synthetic dancers with their backs to the camera for 150 frames: the body is
    mirrored on about maps._FLIP_BODY of the frames, in runs of mean MEAN_RUN["flip-body"]
    (not frame by frame: a frame-by-frame draw would give runs of mean 1 / (1 - share), about
    1.2); turned to the camera, the mirroring stops at once (our error model)."""
    frames = 150
    facing = np.full((20, frames), -1.0)
    facing[:, 100:] = 1.0
    flipped = _behind(frames, facing)
    share = flipped[:, :100].mean()
    assert share == pytest.approx(maps._FLIP_BODY, abs=0.04)
    lengths = _runs_of(flipped[:, :100], 70)
    assert len(lengths) > 20
    assert lengths.mean() == pytest.approx(MEAN_RUN["flip-body"], rel=0.3)
    assert not flipped[:, 100:].any()


def test_an_invented_spot_stays_put_on_the_body(monkeypatch: pytest.MonkeyPatch) -> None:
    """While a hidden joint's invented-spot run lasts, the spot keeps its place relative to the
    body: moving the whole (synthetic) person moves the spot with it, up to the peak jitter
    (our error model; the share raised so that the test sees many runs)."""
    monkeypatch.setattr(maps, "_INVENT", 0.5)
    truth = _crowd(1, np.random.default_rng(4))
    # The left wrist is hidden, its forearm raised: a guess that carries on the upper arm's
    # line down lands far from it.
    truth[0, 9] = (*(truth[0, 7, :2] + (35.0, -30.0)), 1)
    occ = np.zeros((1, 17))
    occ[0, 9] = 1.0
    rng, runs = np.random.default_rng(8), ErrorRuns()
    offsets, left = [], []
    for f in range(200):
        moved = truth.copy()
        moved[0, :, 0] += 7.0 * f
        seen = perceive(moved, occ, np.array([300.0]), np.ones(1), SKELETON, rng,
                        np.array([5]), runs)[0]
        offsets.append(seen.keypoints[9, :2] - moved[0, 9, :2])
        left.append(int(runs.invent[5][0][9]))
    offsets_a = np.array(offsets)
    # Consecutive frames of one run: the frame before still had frames left.
    same = [f for f in range(1, 200) if left[f - 1] > 0]
    moved_apart = [np.hypot(*(offsets_a[f] - offsets_a[f - 1])) for f in same]
    assert len(same) >= 30
    # Jitter of a hidden joint: N(0, 0.009 * 300) per axis, so the difference of two frames'
    # offsets stays below about 5 sigma * sqrt(2) = 19 px; a redrawn guess moves by tens.
    assert max(moved_apart) < 19.0
    invented = np.hypot(*offsets_a.T) > 20.0
    assert 0.3 < invented.mean() < 0.7


def test_a_neighbours_hand_answers_while_the_pair_stays_tangled(
        monkeypatch: pytest.MonkeyPatch) -> None:
    """Two synthetic dancers hold hands for 40 frames, then part: one's right wrist is
    answered at the other's left hand in runs, always that same joint at that same
    neighbour's hand (moving with the neighbour), and never once they are apart (our error
    model; the share raised so that the test sees runs)."""
    monkeypatch.setattr(maps, "_SPURIOUS", 0.4)
    truth = _crowd(2, np.random.default_rng(6))
    rng, runs = np.random.default_rng(3), ErrorRuns()
    taken = []
    for f in range(60):
        pair = truth.copy()
        gap = 0.0 if f < 40 else 300.0
        pair[1, :, 0] = pair[0, :, 0] + 40.0 + 0.5 * f + gap  # 0's right wrist near 1's left
        seen = perceive(pair, np.zeros((2, 17)), np.full(2, 300.0), np.ones(2), SKELETON,
                        rng, np.array([1, 2]), runs)
        assert len(seen) >= 2
        at_hand = np.hypot(*(seen[0].keypoints[10, :2] - pair[1, 9, :2])) < 1e-9
        if at_hand:
            assert runs.spurious[(1, 10)][1] == 2
        taken.append(bool(at_hand))
    together = np.array(taken[:40])
    assert not any(taken[40:])
    assert together.any() and (together[1:] & together[:-1]).sum() >= 3


def test_a_dancers_network_answer_is_held_over_runs_of_frames() -> None:
    """The draws behind a dancer's peaks and fields (:meth:`ErrorRuns.hold`) keep their values
    for runs of geometric length with mean ``MEAN_RUN["held"]`` and, on any one frame, are
    distributed as one fresh draw is: uniform on [0, 1) by scipy's Kolmogorov-Smirnov test
    (our error model; the test's draws are synthetic)."""
    rng, runs = np.random.default_rng(11), ErrorRuns()
    rows, frames = 200, 400
    seen = np.array([runs.hold(3, rng.random((rows, 1)), f == 0, rng)[:, 0]
                     for f in range(frames)])
    changed = seen[1:] != seen[:-1]
    # Runs: the frames between changes of a row.
    assert abs(frames * rows / (changed.sum() + rows) - MEAN_RUN["held"]) < 0.2
    assert stats.kstest(seen[frames // 2], "uniform").pvalue > 0.01
    # Another key (another dancer) is held apart.
    other = runs.hold(4, np.zeros((rows, 1)), False, rng)
    assert not other.any()
