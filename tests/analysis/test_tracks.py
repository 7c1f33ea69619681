"""Track linking against pycocotools' OKS and scipy's assignment, on synthetic sequences and
on the shipped demo.

External references: pycocotools' ``COCOeval.computeOks`` (through ``pycocotools_oks`` of
tests/analysis/test_similarity.py) and ``scipy.optimize.linear_sum_assignment``. People are
synthetic (tests/analysis/synth.py); the demo is our own invented rehearsal.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from scipy.optimize import linear_sum_assignment

from app.analysis.similarity import oks_matrix
from app.analysis.tracks import MIN_SIMILARITY, link_accuracy, link_tracks
from app.demo.evaluate import demo_sequence, linking_accuracy
from app.errors import BadInput
from tests.analysis import synth
from tests.analysis.test_similarity import pycocotools_oks

SIGMAS = synth.SIGMAS
DEMO = Path(__file__).resolve().parents[2] / "demo_project"


def _expected_ids(reference: np.ndarray, areas: np.ndarray, people: np.ndarray) -> np.ndarray:
    """Track ids the documented rule gives ``people`` when the tracks (ids 1..M, in order) are
    expected at ``reference``: pycocotools' OKS of each person against each expected pose,
    scipy's optimal assignment over pairs at MIN_SIMILARITY or more, new ids for the rest."""
    boxes = np.zeros((len(reference), 4))
    oks = pycocotools_oks(people, reference, areas, boxes, SIGMAS)  # (people, tracks)
    weight = np.where(oks >= MIN_SIMILARITY, oks, 0.0)
    ids = np.zeros(len(people), dtype=np.int64)
    for i, k in zip(*linear_sum_assignment(weight, maximize=True), strict=True):
        if oks[i, k] >= MIN_SIMILARITY:
            ids[i] = k + 1
    new = np.flatnonzero(ids == 0)
    ids[new] = len(reference) + 1 + np.arange(len(new))
    return ids


def _moving_crowd(seed: int, shift: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Synthetic: 12 people close together, each moving by up to ``shift`` times its stature
    in a direction of its own; two frames, rigid motion plus a little jitter, and an order to
    shuffle the second frame by."""
    rng = np.random.default_rng(seed)
    first = synth.crowd(rng, 12, (900, 700), (150, 220), min_gap=0.25)
    stature = np.ptp(first[..., 1], axis=1)
    step = rng.uniform(-shift, shift, (12, 2)) * stature[:, None]
    frames = np.stack([first + np.concatenate([step * t, np.zeros((12, 1))], axis=1)[:, None]
                       for t in range(2)])
    frames[..., :2] += rng.normal(0, 1.0, frames[..., :2].shape)
    areas = (0.5 * stature) ** 2
    return frames, areas, rng.permutation(12)


@pytest.mark.parametrize("seed", range(6))
def test_the_first_link_is_scipys_assignment_on_pycocotools_oks(seed: int) -> None:
    """On the second frame a track is expected where it was (no motion known yet): the ids are
    scipy's optimal assignment on pycocotools' OKS of each person against each track's pose,
    pairs below MIN_SIMILARITY refused. Synthetic crowds moving by up to 0.3 statures, in a
    shuffled order."""
    frames, areas, order = _moving_crowd(seed, 0.3)
    ids = link_tracks([frames[0], frames[1][order]], SIGMAS, [areas, areas[order]])
    np.testing.assert_array_equal(ids[0], np.arange(1, 13))
    np.testing.assert_array_equal(ids[1], _expected_ids(frames[0], areas, frames[1][order]))


def _converging_pairs(seed: int) -> tuple[np.ndarray, np.ndarray]:
    """Synthetic: five pairs of look-alike dancers (one body, a little jitter) far apart from
    the other pairs; in each pair the two walk head-on towards each other, 0.1 statures a
    frame each, starting 0.3 statures apart. Three frames ``(3, 10, 17, 3)`` and the areas."""
    rng = np.random.default_rng(seed)
    frames = np.zeros((3, 10, 17, 3))
    areas = np.zeros(10)
    for p in range(5):
        stature = rng.uniform(150, 220)
        body = synth.person(rng, (250.0 + 450.0 * (p % 3), 250.0 + 450.0 * (p // 3)), stature)
        heading = rng.uniform(0, 2 * np.pi)
        u = 0.1 * stature * np.array([np.cos(heading), np.sin(heading), 0.0])
        for t in range(3):
            frames[t, 2 * p] = body - 1.5 * u + t * u
            frames[t, 2 * p + 1] = body + 1.5 * u - t * u
        areas[2 * p:2 * p + 2] = (0.5 * stature) ** 2
    frames[..., :2] += rng.normal(0, 0.5, frames[..., :2].shape)
    return frames, areas


@pytest.mark.parametrize("seed", range(6))
def test_the_next_link_expects_each_track_where_its_motion_leads(seed: int) -> None:
    """On the third frame a track is expected at ``x1 + (x1 - x0)`` (constant velocity, the
    whole body's median step): the ids are scipy's assignment on pycocotools' OKS against
    those extrapolated poses. Synthetic pairs of look-alikes walking head-on towards each
    other: on the third frame each stands where the other stood on the second, so the last
    poses alone would exchange them; the motion keeps each on its track."""
    frames, areas = _converging_pairs(seed)
    order = np.random.default_rng(seed).permutation(10)
    ids = link_tracks([frames[0], frames[1], frames[2][order]], SIGMAS,
                      [areas, areas, areas[order]])
    np.testing.assert_array_equal(ids[1], np.arange(1, 11))
    step = np.median(frames[1, :, :, :2] - frames[0, :, :, :2], axis=1)
    expected_at = frames[1].copy()
    expected_at[..., :2] += step[:, None]
    np.testing.assert_array_equal(ids[2], _expected_ids(expected_at, areas, frames[2][order]))
    np.testing.assert_array_equal(ids[2], order + 1)
    # Against the last poses, everyone looks most like the other one of the pair.
    partner = np.arange(10) ^ 1
    still = oks_matrix(frames[2], frames[1], areas, SIGMAS)
    assert (still.argmax(axis=1) == partner).all()


def test_people_crossing_keep_their_tracks() -> None:
    """Two synthetic dancers walk towards each other on one line and pass through each
    other's place: at the crossing their poses coincide, and only their motion tells them
    apart afterwards. Both keep one track all along."""
    rng = np.random.default_rng(3)
    a, b = synth.person(rng, (200.0, 400.0), 250.0), synth.person(rng, (800.0, 400.0), 250.0)
    b[:, :2] += a[:, :2].mean(axis=0) - b[:, :2].mean(axis=0) + (600.0, 0.0)
    frames, who = [], []
    for t in range(31):
        pair = np.stack([a + np.array([20.0 * t, 0, 0]), b - np.array([20.0 * t, 0, 0])])
        pair[..., :2] += rng.normal(0, 1.5, pair[..., :2].shape)
        order = rng.permutation(2)
        frames.append(pair[order])
        who.append(order)
    ids = link_tracks(frames, SIGMAS)
    score = link_accuracy(ids, who)
    assert score.accuracy == 1.0 and score.recall == 1.0
    assert {int(i) for f in ids for i in f} == {1, 2}


def _walker_with_gap(hidden: range) -> tuple[list[np.ndarray], list[np.ndarray]]:
    """Synthetic: a dancer crossing the picture at 0.12 statures a frame with another standing
    by; the walker is missing from the frames in ``hidden``."""
    rng = np.random.default_rng(5)
    walker = synth.person(rng, (150.0, 400.0), 250.0)
    stander = synth.person(rng, (700.0, 150.0), 250.0)
    frames, who = [], []
    for t in range(16):
        people = [stander] + ([] if t in hidden else [walker + np.array([30.0 * t, 0, 0])])
        frames.append(np.stack(people))
        who.append(np.arange(len(people)))
    return frames, who


def test_a_gap_of_a_few_frames_is_bridged() -> None:
    """A dancer missing for three frames (MAX_GAP) comes back on the same track, found where
    the motion before the gap leads: the pose before the gap is too far from the one after
    for OKS alone (below MIN_SIMILARITY). Missing for four frames, the dancer starts a new
    track (synthetic)."""
    frames, _ = _walker_with_gap(range(6, 9))
    before, after = frames[5][1:], frames[9][1:]
    area = np.array([(0.5 * 250.0) ** 2])
    assert oks_matrix(after, before, area, SIGMAS)[0, 0] < MIN_SIMILARITY
    ids = link_tracks(frames, SIGMAS)
    walker = [int(f[1]) for f in ids if len(f) == 2]
    assert walker == [2] * len(walker) and len(walker) == 13
    assert all(int(f[0]) == 1 for f in ids)

    frames, _ = _walker_with_gap(range(6, 10))
    ids = link_tracks(frames, SIGMAS)
    walker = [int(f[1]) for f in ids if len(f) == 2]
    assert walker == [2] * 6 + [3] * 6


def test_an_identity_exchange_counts_as_two_wrong_links() -> None:
    """A linking that exchanges two dancers' tracks from one frame to the next makes two wrong
    links there; a person of unknown identity is not judged (the measure's definition: the
    share of consecutive-frame links that join the same dancer)."""
    who = [np.array([4, 9, -1])] * 4
    right = [np.array([1, 2, 3])] * 4
    exchanged = [np.array([1, 2, 3]), np.array([1, 2, 3]), np.array([2, 1, 3]),
                 np.array([2, 1, 3])]
    perfect = link_accuracy(right, who)
    assert (perfect.links, perfect.judged, perfect.right, perfect.true_links) == (9, 6, 6, 6)
    swapped = link_accuracy(exchanged, who)
    assert (swapped.judged, swapped.right) == (6, 4)
    assert swapped.accuracy == pytest.approx(4 / 6) and swapped.recall == pytest.approx(4 / 6)


def test_walkers_in_a_crowd_keep_their_tracks() -> None:
    """Forty synthetic walkers in a 1280 x 720 picture for 300 frames, 0.08 statures a frame
    (paths crossing often, order shuffled every frame): at least 99 % of the consecutive-frame
    links join the same walker and at least 99 % of the walkers' links are made; no two
    people of a frame share a track."""
    frames, who = synth.walkers(np.random.default_rng(8), 40, 300, (1280, 720), speed=0.08)
    ids = link_tracks(frames, SIGMAS)
    assert all(len(np.unique(f)) == len(f) for f in ids)
    score = link_accuracy(ids, who)
    assert score.accuracy >= 0.99 and score.recall >= 0.99


def test_empty_frames_and_bad_input() -> None:
    """Frames with nobody link to nothing; areas that do not fit the people and impossible
    options are refused with BadInput (the project's one error family)."""
    person = synth.person(np.random.default_rng(1), (300.0, 300.0), 200.0)[None]
    ids = link_tracks([person, np.zeros((0, 17, 3)), person], SIGMAS)
    assert [f.tolist() for f in ids] == [[1], [], [1]]
    with pytest.raises(BadInput):
        link_tracks([person, person], SIGMAS, [np.ones(1), np.ones(2)])
    with pytest.raises(BadInput):
        link_tracks([person], SIGMAS, smoothing=0.0)
    with pytest.raises(BadInput):
        link_tracks([np.zeros((1, 5, 3))], SIGMAS)


def test_tracks_link_the_shipped_demo() -> None:
    """The issue's measure on the shipped demo (synthetic; seed 1966, not used to choose the
    linking's defaults, which were set on seeds 1-3): the share of consecutive-frame links that
    join the same true dancer is at least 99 % on the true poses and at least 95 % on the
    people grouped from the demo's maps (paired to dancers by OKS >= 0.5 with scipy's optimal
    assignment); at least 90 % of the dancers' links are made. Measured when written: true
    poses 345 of 345 links right, all made; grouped people 299 of the 301 judged links right
    (0.993), which are 299 of the 310 true links (0.965)."""
    if not (DEMO / "truth.json").exists():
        pytest.fail("demo_project/ is missing: regenerate it with app.demo.generate")
    truth, auto = linking_accuracy(demo_sequence(DEMO), SIGMAS)
    print(f"true poses: {truth}\ngrouped people: {auto}")
    assert truth.accuracy >= 0.99 and truth.recall >= 0.99
    assert auto.accuracy >= 0.95 and auto.recall >= 0.9


def test_given_tracks_are_kept_and_the_rest_linked_around_them() -> None:
    """Tracks someone chose stay as chosen, and their motion carries on to the frames where
    the linking is free: two synthetic dancers crossing, the walker's track set to 40 in the
    first frame only, is 40 all along; the other's new ids start after the highest given."""
    rng = np.random.default_rng(3)
    a, b = synth.person(rng, (200.0, 400.0), 250.0), synth.person(rng, (800.0, 400.0), 250.0)
    frames = [np.stack([a + np.array([20.0 * t, 0, 0]), b - np.array([20.0 * t, 0, 0])])
              for t in range(31)]
    given = [np.array([40, -1])] + [np.array([-1, -1])] * 30
    ids = link_tracks(frames, SIGMAS, given=given)
    assert [tuple(int(i) for i in f) for f in ids] == [(40, 41)] * 31
    # A given track wins over what the linking would choose: the second dancer is put on
    # track 1 from frame 20 on (an edit); the walker keeps one track all along, and the
    # second dancer's frames before the edit stay one track of their own.
    given = [np.array([-1, -1])] * 20 + [np.array([-1, 1])] * 11
    ids = link_tracks(frames, SIGMAS, given=given)
    assert [int(f[1]) for f in ids[20:]] == [1] * 11
    assert len({int(f[0]) for f in ids}) == 1 and len({int(f[1]) for f in ids[:20]}) == 1
    assert len({int(ids[0][0]), int(ids[0][1]), 1}) == 3
    with pytest.raises(BadInput, match="given"):
        link_tracks(frames, SIGMAS, given=given[:3])
