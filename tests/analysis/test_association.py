"""Peak finding, the PAF line integral and grouping, checked against outside references.

Sources: Cao, Simon, Wei, Sheikh, "Realtime Multi-Person 2D Pose Estimation using Part Affinity
Fields", CVPR 2017 (Sec. 2.2 Gaussian confidence maps, Sec. 2.4 the line integral Eq. 10-11);
scipy.ndimage.map_coordinates(order=1) as the external bilinear interpolation; the truth people
that the maps were drawn from, compared by pycocotools-equal OKS (app.analysis.similarity, itself
checked against pycocotools in test_similarity.py). All scenes are synthetic
(tests/analysis/synth.py); random generators have fixed seeds.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import ndimage

from app.analysis.association import (
    find_peaks,
    group_people,
    limb_scores,
    match_limb,
    spanning_tree,
)
from app.analysis.similarity import match_people, person_area
from app.analysis.targets import confidence_maps, part_affinity_fields
from app.errors import BadInput
from tests.analysis import synth

SIZE, STRIDE, SIGMA, WIDTH = (1920, 1080), 8, 8.0, 8.0


def draw(truth, rng=None, noise=0.0, jitter=0.0, size=SIZE, stride=STRIDE):
    """Maps drawn from (optionally jittered) truth, plus optional Gaussian noise."""
    drawn = truth.copy()
    if jitter:
        drawn[..., :2] += rng.uniform(-jitter, jitter, drawn[..., :2].shape)
    maps = confidence_maps(drawn, size, stride, SIGMA)
    fields = part_affinity_fields(drawn, synth.LIMBS, size, stride, WIDTH)
    if noise:
        maps = maps + rng.normal(0, noise, maps.shape).astype(np.float32)
        fields = fields + rng.normal(0, noise, fields.shape).astype(np.float32)
    return maps, fields


def crowd_scene(seed, n=30, gap=0.25, p_hidden=0.2):
    """Synthetic crowd wholly in frame; only wrists and ankles are ever unlabeled, so every
    person's labelled joints stay linked by labelled limbs (else no PAF can join them)."""
    rng = np.random.default_rng(seed)
    truth = synth.crowd(rng, n, SIZE, (220, 420), min_gap=gap, margin=4)
    return rng, synth.hide_ends(rng, truth, p_hidden)


def recovered(truth, people, threshold=0.9):
    """How many truth people have a predicted person at OKS >= threshold (one to one)."""
    if not people:
        return 0
    areas = person_area(truth)
    return len(match_people(np.stack(people), truth, areas, synth.SIGMAS, threshold))


# --- peaks -------------------------------------------------------------------------------

@pytest.mark.parametrize("stride, sigma", [(1, 1.5), (4, 4.0), (8, 8.0), (8, 12.0)])
def test_find_peaks_recovers_sub_cell_positions(stride, sigma):
    """Gaussian peaks drawn by the Eq. 7 formula (Cao et al. 2017) at random sub-pixel
    positions are found to far better than a cell; the log-parabola through three samples of a
    Gaussian is exact (from memory), so only float32 rounding and the 1e-3 cut remain."""
    rng = np.random.default_rng(stride)
    size = (40 * stride, 30 * stride)
    people = np.zeros((6, 3, 3))
    for p in range(6):  # people on a coarse lattice so same-type peaks stay apart
        people[p, :, 0] = (p % 3) * 12 * stride + rng.uniform(5, 8, 3) * stride
        people[p, :, 1] = (p // 3) * 14 * stride + rng.uniform(5, 8, 3) * stride
        people[p, :, 2] = 2
    maps = confidence_maps(people, size, stride, sigma)
    peaks = find_peaks(maps, threshold=0.1, stride=stride)
    offset = (stride - 1) / 2
    nearest_cell = np.round((people[..., :2] - offset) / stride) * stride + offset
    coarse = np.hypot(*(nearest_cell - people[..., :2]).transpose(2, 0, 1)).max()
    for j in range(3):
        assert peaks[j].shape == (6, 3)
        d = np.hypot(peaks[j][:, None, 0] - people[None, :, j, 0],
                     peaks[j][:, None, 1] - people[None, :, j, 1])
        err = d.min(axis=1)
        assert err.max() < 0.01 * stride + 0.005
        assert err.max() < 0.1 * coarse  # far better than the cell centres
        assert np.all(peaks[j][:, 2] > 0.5)
        assert np.all(np.diff(peaks[j][:, 2]) <= 0)  # highest score first


def test_find_peaks_plateaus_thresholds_and_edges():
    """3x3 non-maximum suppression (Cao et al. 2017 Sec. 2.4): a plateau gives one peak, values
    at or below the threshold give none, a peak on the grid edge stays on its cell (synthetic
    maps written by hand)."""
    maps = np.zeros((3, 5, 6))
    maps[0, 2, 2:4] = 0.7          # a two-cell plateau
    maps[1, 1, 1] = 0.1            # exactly the threshold
    maps[2, 0, 5] = 0.9            # a corner
    maps[2, 4, 0] = 0.3
    peaks = find_peaks(maps, threshold=0.1, stride=1)
    assert peaks[0].shape == (1, 3) and peaks[0][0, 1] == 2.0
    assert peaks[1].shape == (0, 3)
    np.testing.assert_allclose(peaks[2], [[5.0, 0.0, 0.9], [0.0, 4.0, 0.3]])
    with pytest.raises(BadInput):
        find_peaks(np.zeros((5, 6)))


# --- line integral ----------------------------------------------------------------------

def test_limb_scores_on_a_constant_field():
    """Eq. 10-11 of Cao et al. 2017 on a constant field c: E = c . (d2 - d1) / |d2 - d1|,
    worked by hand, for every pair at once (synthetic points, stride 4)."""
    c = np.array([0.6, -0.8])
    field = np.empty((2, 20, 30))
    field[0], field[1] = c
    starts = np.array([[10.0, 10.0], [50.0, 40.0], [5.5, 70.2]])
    ends = np.array([[90.0, 10.0], [50.0, 0.0], [10.0, 10.0], [61.0, 25.0]])
    mean, support = limb_scores(field, starts, ends, stride=4)
    d = ends[None] - starts[:, None]
    norm = np.linalg.norm(d, axis=-1)
    want = np.where(norm > 0, (d @ c) / np.where(norm > 0, norm, 1), 0.0)
    np.testing.assert_allclose(mean, want, atol=1e-12)
    np.testing.assert_array_equal(support, (want > 0.05).astype(float))
    assert mean.shape == support.shape == (3, 4)


def test_limb_scores_on_a_drawn_limb_by_hand():
    """A horizontal limb drawn by part_affinity_fields (Cao et al. 2017 Eq. 8-9): a segment
    along it scores E = 1; one that runs half past its end has 5 of its 10 samples on the limb
    (u = 0, 1/9, ..., 4/9), so E = 0.5 by hand."""
    person = np.array([[[10.0, 20.0, 2], [50.0, 20.0, 2]]])
    field = part_affinity_fields(person, [(0, 1)], (100, 40), 1, 3.0)[0]
    mean, support = limb_scores(field, [[10.0, 20.0], [30.0, 20.0]], [[50.0, 20.0], [70.0, 20.0]])
    assert mean[0, 0] == pytest.approx(1.0)
    assert mean[1, 1] == pytest.approx(0.5)
    assert support[1, 1] == pytest.approx(0.5)
    assert mean[1, 0] == pytest.approx(1.0)  # (30, 20) -> (50, 20) lies on the limb too
    reverse, _ = limb_scores(field, [[50.0, 20.0]], [[10.0, 20.0]])
    assert reverse[0, 0] == pytest.approx(-1.0)


@pytest.mark.parametrize("stride", [1, 4, 8])
def test_limb_scores_equal_scipy_bilinear_sampling(stride):
    """The samples are bilinear reads of the field: scipy.ndimage.map_coordinates(order=1,
    mode="nearest") at p(u) = (1 - u) d1 + u d2, u = 0, 1/9, ..., 1 (10 samples), dotted with
    the unit direction and averaged (Eq. 11 of Cao et al. 2017). Fields drawn from a synthetic
    crowd; some points lie beyond the grid."""
    rng = np.random.default_rng(stride)
    size = (37 * stride, 23 * stride)
    truth = synth.crowd(rng, 5, size, (10 * stride, 20 * stride))
    fields = part_affinity_fields(truth, synth.LIMBS, size, stride, 1.5 * stride)
    starts = rng.uniform(-10, np.array(size) + 10, (7, 2))
    ends = rng.uniform(-10, np.array(size) + 10, (6, 2))
    for c in (0, 7, 12):
        mean, support = limb_scores(fields[c], starts, ends, stride=stride)
        for i in range(len(starts)):
            for j in range(len(ends)):
                d1, d2 = starts[i], ends[j]
                unit = (d2 - d1) / np.linalg.norm(d2 - d1)
                u = np.linspace(0, 1, 10)[:, None]
                pts = (1 - u) * d1 + u * d2
                grid = (pts - (stride - 1) / 2) / stride
                coords = [grid[:, 1], grid[:, 0]]
                fx = ndimage.map_coordinates(fields[c, 0].astype(float), coords, order=1,
                                             mode="nearest")
                fy = ndimage.map_coordinates(fields[c, 1].astype(float), coords, order=1,
                                             mode="nearest")
                dots = fx * unit[0] + fy * unit[1]
                assert mean[i, j] == pytest.approx(dots.mean(), abs=1e-9)
                assert support[i, j] == pytest.approx((dots > 0.05).mean())


# --- tree and matching ------------------------------------------------------------------

def test_spanning_tree_of_the_coco_skeleton():
    """A spanning tree of a connected graph has K - 1 edges, reaches every joint and has no
    cycle (graph theory, common practice, no source); breadth-first order puts a reached joint
    on every limb after the first; the COCO limb graph is from app.model.skeleton."""
    tree, extra = spanning_tree(17, synth.LIMBS)
    assert len(tree) == 16 and len(extra) == 3
    assert sorted([*tree.tolist(), *extra.tolist()]) == list(range(19))
    reached = set(synth.LIMBS[tree[0]].tolist())
    for c in tree[1:]:
        a, b = synth.LIMBS[c].tolist()
        assert (a in reached) != (b in reached)
        reached |= {a, b}
    assert reached == set(range(17))
    assert synth.LIMBS[tree[0]].tolist()[0] == 5  # rooted at the left shoulder (degree 4)
    forest, rest = spanning_tree(6, [(0, 1), (1, 2), (2, 0), (3, 4)])
    assert forest.tolist() == [0, 2, 3] and rest.tolist() == [1]


def test_match_limb_uses_each_part_once():
    """Both matchers give a one-to-one pairing of valid candidates; the optimal one has the
    largest total (scipy.optimize.linear_sum_assignment, checked by brute force here)."""
    import itertools

    rng = np.random.default_rng(4)
    for _ in range(30):
        scores = rng.uniform(0, 1, (4, 5))
        valid = rng.random((4, 5)) < 0.6
        for method in ("greedy", "optimal"):
            pairs = match_limb(scores, valid, method)
            assert len({a for a, _ in pairs}) == len(pairs) == len({b for _, b in pairs})
            assert all(valid[a, b] for a, b in pairs)
        best = max(
            sum(scores[i, p] for i, p in enumerate(perm) if valid[i, p])
            for perm in itertools.permutations(range(5), 4)
        )
        got = sum(scores[a, b] for a, b in match_limb(scores, valid, "optimal"))
        assert got == pytest.approx(best)
    with pytest.raises(BadInput):
        match_limb(scores, valid, "fastest")


# --- grouping ---------------------------------------------------------------------------

@pytest.mark.parametrize("seed", range(4))
def test_grouping_recovers_a_clean_crowd_of_thirty(seed):
    """Thirty synthetic people drawn by confidence_maps + part_affinity_fields are grouped back:
    nearly every truth person has a match at OKS >= 0.9 and no people are invented."""
    _, truth = crowd_scene(seed)
    maps, fields = draw(truth)
    people = group_people(maps, fields, synth.LIMBS, stride=STRIDE)
    assert 29 <= recovered(truth, people) <= 30
    assert len(people) <= 31
    for p in people:
        assert p.shape == (17, 3)
        missing = np.isnan(p[:, 0])
        assert np.all(p[missing, 2] == 0) and np.all(p[~missing, 2] > 0)
    totals = [np.nansum(p[:, 2]) for p in people]
    assert totals[0] >= totals[-1]


@pytest.mark.parametrize("seed", range(3))
def test_grouping_survives_noise_and_jitter(seed):
    """The same synthetic crowds with Gaussian noise (sd 0.02) on every map value and the drawn
    joints jittered by up to 2 pixels: still nearly everyone at OKS >= 0.9."""
    rng, truth = crowd_scene(100 + seed)
    maps, fields = draw(truth, rng, noise=0.02, jitter=2.0)
    people = group_people(maps, fields, synth.LIMBS, stride=STRIDE)
    assert recovered(truth, people) >= 28
    assert len(people) <= 32


def test_grouping_separates_people_side_by_side():
    """Pairs of synthetic people whose hips are only 0.1 to 0.2 of a body height apart
    sideways (and 0.1 apart in height, one standing a step behind), so torsos, arms and legs
    overlap: over six scenes of four pairs, each person comes out once and nearly all at
    OKS >= 0.9. (With no height difference the hip and shoulder limbs of the two lie on one line
    and the fields cannot tell the pairings apart; see group_people's Notes.)"""
    total = 0
    for seed in range(9, 15):
        rng = np.random.default_rng(seed)
        truth = []
        for k, offset in enumerate([0.10, 0.13, 0.16, 0.20]):
            stature = 300.0
            x, y = 250 + 420 * k, 540
            truth.append(synth.person(rng, (x, y), stature))
            truth.append(synth.person(rng, (x + offset * stature, y - 0.1 * stature),
                                      stature * 0.95))
        truth = np.stack(truth)
        maps, fields = draw(truth)
        people = group_people(maps, fields, synth.LIMBS, stride=STRIDE)
        assert len(people) == 8
        total += recovered(truth, people)
    assert total >= 46


def test_grouping_one_person_and_none():
    """One synthetic person (several draws) gives exactly one person at OKS >= 0.95; empty
    maps and maps of pure noise (sd 0.02) give nobody."""
    rng = np.random.default_rng(21)
    for _ in range(5):
        truth = synth.crowd(rng, 1, SIZE, (150, 600), margin=4)
        maps, fields = draw(truth)
        people = group_people(maps, fields, synth.LIMBS, stride=STRIDE)
        assert len(people) == 1
        assert recovered(truth, people, 0.95) == 1
    maps, fields = draw(np.zeros((0, 17, 3)))
    assert group_people(maps, fields, synth.LIMBS, stride=STRIDE) == []
    maps, fields = draw(np.zeros((0, 17, 3)), rng, noise=0.02)
    assert group_people(maps, fields, synth.LIMBS, stride=STRIDE) == []


def test_extra_limbs_rejoin_a_person_split_at_the_root():
    """With the left shoulder (the tree's root) unlabeled, the tree alone would leave the lower
    body, right arm and head in separate pieces; the extra limbs (right shoulder to right hip,
    eye to eye) join them again. Only the left elbow and wrist, linked to the body by the left
    shoulder alone, are lost (synthetic person; the COCO limb graph)."""
    truth = synth.person(np.random.default_rng(2), (900, 500), 400)[None]
    truth[0, 5] = (np.nan, np.nan, 0)
    maps, fields = draw(truth)
    people = group_people(maps, fields, synth.LIMBS, stride=STRIDE)
    assert len(people) == 1
    found = np.nonzero(people[0][:, 2] > 0)[0].tolist()
    assert found == [j for j in range(17) if j not in (5, 7, 9)]


def test_grouping_is_deterministic_and_checks_its_input():
    """Same maps, same people in the same order (common practice, no source)."""
    rng, truth = crowd_scene(7, n=12)
    maps, fields = draw(truth, rng, noise=0.02, jitter=1.0)
    first = group_people(maps, fields, synth.LIMBS, stride=STRIDE)
    second = group_people(maps.copy(), fields.copy(), synth.LIMBS, stride=STRIDE)
    assert len(first) == len(second) > 0
    for a, b in zip(first, second, strict=True):
        np.testing.assert_array_equal(a, b)
    with pytest.raises(BadInput, match="fields"):
        group_people(maps, fields[:5], synth.LIMBS, stride=STRIDE)
    with pytest.raises(BadInput, match="matching"):
        group_people(maps, fields, synth.LIMBS, stride=STRIDE, matching="fastest")


def test_default_matching_is_not_worse_than_the_alternative():
    """Greedy (Cao et al. 2017 Sec. 2.4) against optimal assignment
    (scipy.optimize.linear_sum_assignment) per limb, on 20 synthetic crowds of 30 people packed
    closely (hips at least 0.12 of the tallest stature apart), Gaussian noise sd 0.02, jitter
    up to 2 px. The default must recover at least as many people at OKS >= 0.9; the figures
    are those quoted in group_people's docstring."""
    counts = {"greedy": 0, "optimal": 0}
    for seed in range(20):
        rng, truth = crowd_scene(1000 + seed, gap=0.12)
        maps, fields = draw(truth, rng, noise=0.02, jitter=2.0)
        for method in counts:
            people = group_people(maps, fields, synth.LIMBS, stride=STRIDE, matching=method)
            counts[method] += recovered(truth, people)
    default = group_people.__kwdefaults__["matching"]
    other = "greedy" if default == "optimal" else "optimal"
    print(counts)
    assert counts[default] >= counts[other]
    assert counts[default] >= 0.9 * 600


def _near_tie(weight):
    """Two synthetic three-joint people whose first limbs could pair either way: the fields
    hold the true limbs and, ``weight`` times as strong, the first limbs crossed (drawn with
    the Cao et al. 2017 target formulas), so the crossed pairing may score a little higher."""
    limbs = [(0, 1), (1, 2)]
    true = np.array([[[20, 16, 2], [60, 18, 2], [88, 10, 2]],
                     [[20, 40, 2], [60, 36, 2], [88, 46, 2]]], float)
    crossed = true.copy()
    crossed[[0, 1], 0] = true[[1, 0], 0]
    size, stride = (96, 64), 2
    maps = confidence_maps(true, size, stride, 3.0)
    fields = part_affinity_fields(true, limbs, size, stride, 3.0)
    fields[0] += weight * part_affinity_fields(crossed, limbs, size, stride, 3.0)[0]
    return maps, fields, limbs, true, crossed


def _pairings(people):
    """The people as sets of rounded joint positions, in no order."""
    return sorted(tuple(map(tuple, p[:, :2].round().astype(int).tolist())) for p in people)


def test_the_frame_before_decides_a_near_tie_but_not_a_clear_choice():
    """With the people of the frame before (moved 3 px, as dancers move), a near tie between
    pairings is decided as on that frame, either way; a pairing the fields clearly prefer is
    kept whatever came before; people further than the radius change nothing. The bonus and
    radius are our own choice (no published source); the scene is synthetic."""
    kw = {"stride": 2, "min_parts": 2, "min_mean_score": 0.0}
    maps, fields, limbs, true, crossed = _near_tie(1.5)
    alone = group_people(maps, fields, limbs, **kw)
    assert _pairings(alone) == _pairings(crossed)  # the fields alone slightly prefer crossed
    moved = true.copy()
    moved[..., :2] += 3.0
    assert _pairings(group_people(maps, fields, limbs, previous=moved, **kw)) == _pairings(true)
    assert _pairings(group_people(maps, fields, limbs, previous=crossed + np.array([3.0, -2.0, 0]),
                                  **kw)) == _pairings(crossed)
    far = true.copy()
    far[..., 0] += 30.0
    assert _pairings(group_people(maps, fields, limbs, previous=far, **kw)) == _pairings(crossed)
    maps, fields, limbs, true, crossed = _near_tie(2.0)
    assert _pairings(group_people(maps, fields, limbs, previous=true, **kw)) == \
        _pairings(crossed)


def test_without_a_frame_before_grouping_is_unchanged():
    """previous=None, no people before, people before with no joint near, or a zero bonus:
    the very same arrays (the grouping of a frame alone is what it always was)."""
    rng, truth = crowd_scene(5, n=12)
    maps, fields = draw(truth, rng, noise=0.02, jitter=2.0)
    plain = group_people(maps, fields, synth.LIMBS, stride=STRIDE)
    assert len(plain) >= 10
    shifted = [p + np.array([0.0, 5000.0, 0.0]) for p in plain]
    for kw in ({"previous": None}, {"previous": []}, {"previous": shifted},
               {"previous": truth, "prior_bonus": 0.0}):
        again = group_people(maps, fields, synth.LIMBS, stride=STRIDE, **kw)
        assert len(again) == len(plain)
        for a, b in zip(again, plain, strict=True):
            assert a.tobytes() == b.tobytes()
    with pytest.raises(BadInput):
        group_people(maps, fields, synth.LIMBS, stride=STRIDE, previous=[np.zeros((3, 3))])
