"""Training targets against the published formulas, written out plainly here.

Source: Cao, Simon, Wei, Sheikh, "Realtime Multi-Person 2D Pose Estimation using Part Affinity
Fields", CVPR 2017: Sec. 2.2 (confidence maps, Eq. 6-7) and Sec. 2.3 (part affinity fields,
Eq. 8-9). The reference implementations below loop over people and grid cells one at a time, on
the grid of cell centres (app/analysis/targets.py). All poses are synthetic
(tests/analysis/synth.py).
"""

from __future__ import annotations

import math

import cv2
import numpy as np
import pytest

from app.analysis.targets import (
    CUTOFF,
    confidence_maps,
    grid_shape,
    loss_mask,
    part_affinity_fields,
    rasterize_regions,
)
from app.errors import BadInput
from tests.analysis import synth


def reference_maps(kp, image_size, stride, sigma):
    """Eq. 7 of Cao et al. cell by cell: the max over labelled people of the Gaussian."""
    w, h = image_size
    rows, cols = math.ceil(h / stride), math.ceil(w / stride)
    out = np.zeros((kp.shape[1], rows, cols))
    for j in range(kp.shape[1]):
        for r in range(rows):
            for c in range(cols):
                px, py = c * stride + (stride - 1) / 2, r * stride + (stride - 1) / 2
                best = 0.0
                for person in kp:
                    x, y, v = person[j]
                    if v > 0:
                        best = max(best, math.exp(-((px - x) ** 2 + (py - y) ** 2) / sigma**2))
                out[j, r, c] = best
    return out


def reference_pafs(kp, limbs, image_size, stride, width):
    """Eq. 8-9 of Cao et al. cell by cell: the mean unit vector over the people covering it."""
    w, h = image_size
    rows, cols = math.ceil(h / stride), math.ceil(w / stride)
    out = np.zeros((len(limbs), 2, rows, cols))
    for li, (j1, j2) in enumerate(limbs):
        for r in range(rows):
            for c in range(cols):
                px, py = c * stride + (stride - 1) / 2, r * stride + (stride - 1) / 2
                vectors = []
                for person in kp:
                    x1, y1, v1 = person[j1]
                    x2, y2, v2 = person[j2]
                    if v1 <= 0 or v2 <= 0:
                        continue
                    norm = math.hypot(x2 - x1, y2 - y1)
                    if norm == 0:
                        continue
                    ux, uy = (x2 - x1) / norm, (y2 - y1) / norm
                    dx, dy = px - x1, py - y1
                    along = ux * dx + uy * dy
                    across = abs(ux * dy - uy * dx)
                    if 0 <= along <= norm and across <= width:
                        vectors.append((ux, uy))
                if vectors:
                    out[li, 0, r, c] = sum(v[0] for v in vectors) / len(vectors)
                    out[li, 1, r, c] = sum(v[1] for v in vectors) / len(vectors)
    return out


def scene(seed, image_size, n, stature, p_unlabelled=0.2):
    rng = np.random.default_rng(seed)
    people = synth.crowd(rng, n, image_size, stature)
    return synth.hide(rng, people, p_unlabelled)


CASES = [
    # (seed, image size, stride, people, stature range in pixels, sigma, limb width)
    (1, (37, 23), 1, 4, (14, 30), 1.5, 1.0),
    (2, (37, 23), 4, 6, (14, 30), 2.0, 2.0),
    (3, (61, 45), 4, 7, (20, 50), 3.0, 2.5),
    (4, (83, 67), 8, 9, (30, 70), 6.0, 5.0),
    (5, (29, 41), 1, 5, (20, 40), 1.0, 0.8),
]


@pytest.mark.parametrize("seed, size, stride, n, stature, sigma, width", CASES)
def test_confidence_maps_match_the_formula(seed, size, stride, n, stature, sigma, width):
    """Cao et al. 2017 Eq. 7 on synthetic crowds with v=0 (some NaN) and v=1 joints."""
    kp = scene(seed, size, n, stature)
    got = confidence_maps(kp, size, stride, sigma)
    want = reference_maps(kp, size, stride, sigma)
    assert got.dtype == np.float32
    assert got.shape == want.shape == (17, *grid_shape(size, stride))
    assert np.abs(got - want).max() <= CUTOFF
    kept = want >= CUTOFF
    np.testing.assert_allclose(got[kept], want[kept], rtol=1e-6, atol=1e-7)
    assert kept.sum() > 50  # the case is not empty


def test_confidence_maps_use_only_labelled_joints_and_cut_only_small_values():
    """Eq. 7 of Cao et al.: a v=0 joint leaves no peak even with a position; tails below 1e-3
    are the only values cut (synthetic single joint, strides 1 and 8)."""
    kp = np.array([[[20.0, 10.0, 1], [20.0, 10.0, 0]], [[np.nan, np.nan, 0], [5.0, 5.0, 2]]])
    for stride in (1, 8):
        got = confidence_maps(kp, (48, 32), stride, 6.0)
        want = reference_maps(kp, (48, 32), stride, 6.0)
        assert np.abs(got - want).max() <= CUTOFF
        assert got[1].max() == pytest.approx(want[1].max(), rel=1e-6)
        cut = (got == 0) & (want > 0)
        assert cut.any() and want[cut].max() < CUTOFF
    assert confidence_maps(kp, (48, 32), 1, 6.0)[0, 10, 20] == pytest.approx(1.0)


@pytest.mark.parametrize("seed, size, stride, n, stature, sigma, width", CASES)
def test_part_affinity_fields_match_the_formula(seed, size, stride, n, stature, sigma, width):
    """Cao et al. 2017 Eq. 8-9 on synthetic crowds: overlapping people average their vectors."""
    kp = scene(seed, size, n, stature)
    limbs = synth.LIMBS
    got = part_affinity_fields(kp, limbs, size, stride, width)
    want = reference_pafs(kp, limbs, size, stride, width)
    assert got.dtype == np.float32
    assert got.shape == want.shape
    np.testing.assert_allclose(got, want, atol=1e-6)
    assert (np.abs(want) > 0).sum() > 20


def test_part_affinity_fields_with_coincident_ends_and_overlaps():
    """Cao et al. 2017 Sec. 2.3: a limb whose ends coincide counts for nothing; where two
    people's limbs overlap the field is their mean (synthetic people on integer positions)."""
    limbs = [(0, 1), (1, 2)]
    kp = np.array([
        [[3, 3, 2], [3, 3, 2], [12, 3, 2]],      # limb 0 has coincident ends
        [[3, 3, 2], [12, 12, 1], [12, 3, 0]],    # limb 1 has an unlabeled end
        [[3, 6, 2], [12, 3, 2], [np.nan, np.nan, 0]],
    ], dtype=float)
    for stride in (1, 4):
        got = part_affinity_fields(kp, limbs, (17, 15), stride, 1.5)
        want = reference_pafs(kp, limbs, (17, 15), stride, 1.5)
        np.testing.assert_allclose(got, want, atol=1e-6)
    got = part_affinity_fields(kp, limbs, (17, 15), 1, 1.5)
    # At (4, 4) the diagonal of person 1 and the rising limb of person 2 both pass.
    u1 = np.array([9.0, 9.0]) / math.hypot(9, 9)
    u2 = np.array([9.0, -3.0]) / math.hypot(9, 3)
    np.testing.assert_allclose(got[0, :, 5, 5], (u1 + u2) / 2, atol=1e-6)
    assert np.abs(got[1]).max() == pytest.approx(1.0)  # only person 0's limb 1 counts


@pytest.mark.parametrize("size, stride, sigma, width", [
    ((37, 23), 1, 50.0, 3.0), ((37, 23), 8, 30.0, 10.0), ((5, 3), 8, 2.0, 4.0),
    ((37, 23), 40, 3.0, 50.0),
])
def test_targets_with_wide_peaks_and_joints_outside_the_image(size, stride, sigma, width):
    """Eq. 7-9 of Cao et al. 2017 when the Gaussian is wider than the grid, the grid is a single
    cell, and joints lie outside the image (synthetic random points)."""
    rng = np.random.default_rng(stride)
    kp = np.zeros((3, 4, 3))
    kp[..., :2] = rng.uniform(-60, 100, (3, 4, 2))
    kp[..., 2] = 2
    limbs = [(0, 1), (2, 3), (1, 3)]
    got = confidence_maps(kp, size, stride, sigma)
    assert np.abs(got - reference_maps(kp, size, stride, sigma)).max() <= 1e-6
    np.testing.assert_allclose(part_affinity_fields(kp, limbs, size, stride, width),
                               reference_pafs(kp, limbs, size, stride, width), atol=1e-6)


def test_empty_frames_and_bad_input():
    """Shapes on a frame with no people; refusals name the field (common practice, no source)."""
    empty = np.zeros((0, 17, 3))
    assert confidence_maps(empty, (37, 23), 8, 2.0).shape == (17, 3, 5)
    assert not confidence_maps(empty, (37, 23), 8, 2.0).any()
    assert part_affinity_fields(empty, synth.LIMBS, (37, 23), 4, 2.0).shape == (19, 2, 6, 10)
    assert loss_mask(empty, synth.LIMBS, (37, 23), 4).shape == (17 + 38, 6, 10)
    bad = np.array([[[np.nan, 3.0, 2]]])
    with pytest.raises(BadInput, match="labelled joint"):
        confidence_maps(bad, (10, 10), 1, 1.0)
    with pytest.raises(BadInput, match="stride"):
        confidence_maps(empty, (10, 10), 0, 1.0)
    with pytest.raises(BadInput, match="limb"):
        part_affinity_fields(np.zeros((1, 3, 3)), [(0, 5)], (10, 10), 1, 1.0)


def test_rasterize_regions_agrees_with_opencv():
    """cv2.pointPolygonTest is the external reference for inside/outside of each cell centre
    (synthetic random star-shaped polygons; cells on an edge are skipped)."""
    rng = np.random.default_rng(7)
    size, stride = (53, 41), 4
    h, w = grid_shape(size, stride)
    for _ in range(20):
        n = rng.integers(3, 9)
        angles = np.sort(rng.uniform(0, 2 * np.pi, n))
        radii = rng.uniform(5, 25, n)
        centre = rng.uniform([0, 0], size)
        poly = centre + np.c_[radii * np.cos(angles), radii * np.sin(angles)]
        got = rasterize_regions([poly], size, stride)
        contour = poly.astype(np.float32).reshape(-1, 1, 2)
        for r in range(h):
            for c in range(w):
                pt = (c * stride + (stride - 1) / 2, r * stride + (stride - 1) / 2)
                side = cv2.pointPolygonTest(contour, pt, False)
                if side != 0:
                    assert got[r, c] == (side > 0)


def test_loss_mask_zeroes_ignore_regions_on_every_channel():
    """Our loss-mask rule (app/analysis/targets.loss_mask, after Cao et al. 2017 Sec. 2.1) on a
    crafted synthetic frame: a rectangle in pixels and the same cells as a grid mask agree."""
    kp = synth.person(np.random.default_rng(3), (40, 40), 50)[None]
    limbs = synth.LIMBS
    rect = [[(60.5, 4.5), (90.5, 4.5), (90.5, 30.5), (60.5, 30.5)]]
    mask = loss_mask(kp, limbs, (96, 64), 4, ignore=rect)
    region = rasterize_regions(rect, (96, 64), 4)
    assert region.sum() == 7 * 8  # rows 1..7, columns 15..22 have their centres inside
    assert not mask[:, region].any()
    assert mask[:, ~region].all()  # everyone is fully labelled: nothing else is masked
    grid = np.zeros(grid_shape((96, 64), 4), dtype=bool)
    grid[1:8, 15:23] = True
    np.testing.assert_array_equal(loss_mask(kp, limbs, (96, 64), 4, ignore=grid), mask)
    with pytest.raises(BadInput, match="grid"):
        loss_mask(kp, limbs, (96, 64), 4, ignore=np.zeros((3, 3), dtype=bool))


def test_loss_mask_zeroes_an_unlabeled_joint_around_its_person_only():
    """Our loss-mask rule (app/analysis/targets.loss_mask) on a crafted synthetic frame: the left
    wrist of the first person is unlabeled; its channel and the left forearm's PAF channels are 0
    inside that person's grown box and 1 elsewhere; every other channel is 1."""
    rng = np.random.default_rng(11)
    a = synth.person(rng, (50, 60), 60)
    b = synth.person(rng, (170, 60), 60)
    a[9] = (np.nan, np.nan, 0)  # left wrist
    kp = np.stack([a, b])
    limbs = synth.LIMBS
    size, stride = (224, 112), 2
    mask = loss_mask(kp, limbs, size, stride, box_margin=0.25, min_margin=6.0)
    forearm = [i for i, (j1, j2) in enumerate(limbs) if 9 in (j1, j2)]
    assert len(forearm) == 1
    masked = [9, 17 + 2 * forearm[0], 17 + 2 * forearm[0] + 1]
    labelled = a[a[:, 2] > 0, :2]
    lo, hi = labelled.min(0), labelled.max(0)
    grow = max(0.25 * (hi - lo).max(), 6.0)
    h, w = grid_shape(size, stride)
    ys = np.arange(h) * stride + (stride - 1) / 2
    xs = np.arange(w) * stride + (stride - 1) / 2
    inside = ((ys[:, None] >= lo[1] - grow) & (ys[:, None] <= hi[1] + grow)
              & (xs[None] >= lo[0] - grow) & (xs[None] <= hi[0] + grow))
    for ch in range(mask.shape[0]):
        if ch in masked:
            assert not mask[ch][inside].any()
            assert mask[ch][~inside].all()
        else:
            assert mask[ch].all()
    # the neighbour's own left wrist peak lies outside the box and keeps weight 1
    bx, by = b[9, :2]
    assert mask[9, int(by // stride), int(bx // stride)] == 1
