"""OKS, matching and per-joint disagreement against pycocotools and scipy.

External references: pycocotools' ``COCOeval.computeOks`` (the COCO keypoint evaluation code,
run on an in-memory COCO object built from the same people) and
``scipy.optimize.linear_sum_assignment``. All people are synthetic (tests/analysis/synth.py and
random numbers drawn here).
"""

from __future__ import annotations

import contextlib
import io
import itertools

import numpy as np
import pytest
from pycocotools.coco import COCO
from pycocotools.cocoeval import COCOeval

from app.analysis.similarity import (
    joint_disagreement,
    match_people,
    oks,
    oks_matrix,
    person_area,
)
from app.errors import BadInput
from tests.analysis import synth


def pycocotools_oks(predicted, reference, areas, boxes, sigmas):
    """``COCOeval.computeOks`` for one image: ious[i, j] is detection i against truth j."""
    names = [f"j{i}" for i in range(reference.shape[1])]
    gt = COCO()
    gt.dataset = {
        "images": [{"id": 1, "width": 2000, "height": 2000, "file_name": "synthetic.png"}],
        "categories": [{"id": 1, "name": "person", "keypoints": names, "skeleton": []}],
        "annotations": [
            {
                "id": j + 1, "image_id": 1, "category_id": 1, "iscrowd": 0,
                "keypoints": np.nan_to_num(ref).ravel().tolist(),
                "num_keypoints": int((ref[:, 2] > 0).sum()),
                "area": float(areas[j]), "bbox": [float(b) for b in boxes[j]],
            }
            for j, ref in enumerate(reference)
        ],
    }
    with contextlib.redirect_stdout(io.StringIO()):
        gt.createIndex()
        dt = gt.loadRes([
            {"image_id": 1, "category_id": 1, "keypoints": p.ravel().tolist(),
             "score": 1.0 - 0.5 * i / len(predicted)}  # descending: keeps our order
            for i, p in enumerate(predicted)
        ])
        ev = COCOeval(gt, dt, "keypoints")
    ev.params.imgIds = [1]
    ev.params.kpt_oks_sigmas = np.asarray(sigmas)
    ev.params.maxDets = [len(predicted) + 1]
    ev._prepare()
    return np.asarray(ev.computeOks(1, 1))


def random_case(rng, n, m):
    """Synthetic: references are plausible people with some joints unlabeled (v=0, positions
    kept or zeroed) and some with none labelled; predictions are noisy copies and strangers."""
    ref = synth.crowd(rng, m, (640, 480), (60, 300))
    ref[..., 2] = rng.choice([0, 1, 2], size=ref.shape[:2], p=[0.25, 0.25, 0.5])
    filler = (ref[..., 2] == 0) & (rng.random(ref.shape[:2]) < 0.5)
    ref[filler, :2] = 0.0  # the usual filler of COCO files for v=0
    if m > 1:
        ref[0, :, 2] = 0  # a reference with no labelled joint
    boxes = np.c_[rng.uniform(0, 500, (m, 2)), rng.uniform(5, 150, (m, 2))]
    areas = rng.uniform(0, 3e4, m)
    areas[rng.random(m) < 0.1] = 0.0
    picks = rng.integers(0, m, n)
    pred = ref[picks].copy()
    pred[..., :2] += rng.normal(0, rng.uniform(0.5, 20), size=(n, 17, 2))
    pred[..., 2] = rng.uniform(0, 1, (n, 17))
    strangers = rng.random(n) < 0.3
    pred[strangers, :, :2] = rng.uniform(-200, 800, (strangers.sum(), 17, 2))
    return pred, ref, areas, boxes


@pytest.mark.parametrize("seed", range(12))
def test_oks_matrix_equals_pycocotools(seed):
    """pycocotools COCOeval.computeOks, on synthetic crowds including v=0 joints, a reference
    with no labelled joint (pycocotools' enlarged-box rule) and zero areas."""
    rng = np.random.default_rng(seed)
    n, m = int(rng.integers(1, 25)), int(rng.integers(2, 25))
    pred, ref, areas, boxes = random_case(rng, n, m)
    want = pycocotools_oks(pred, ref, areas, boxes, synth.SIGMAS)
    got = oks_matrix(pred, ref, areas, synth.SIGMAS, boxes)
    assert got.shape == want.shape == (n, m)
    np.testing.assert_allclose(got, want, rtol=1e-12, atol=1e-15)
    assert np.ptp(want) > 0.1  # the case has both close and distant pairs
    for i, j in itertools.product(range(min(n, 4)), range(min(m, 4))):
        assert oks(pred[i], ref[j], areas[j], synth.SIGMAS, boxes[j]) == pytest.approx(
            want[i, j], rel=1e-12, abs=1e-15)


def test_oks_matrix_equals_pycocotools_across_chunks_and_far_pairs():
    """pycocotools COCOeval.computeOks on a synthetic crowd large enough to be computed in
    several chunks of references, spread over a wide frame so that most pairs are far apart
    (terms that underflow in pycocotools must come out 0 here too), called twice so that the
    second call reuses the scratch buffers of the first."""
    rng = np.random.default_rng(99)
    ref = synth.crowd(rng, 90, (6000, 1500), (40, 300))
    ref = synth.hide_ends(rng, ref, 0.3)
    ref[..., :2] = np.nan_to_num(ref[..., :2])
    pred = ref[rng.permutation(90)[:50]].copy()
    pred[..., :2] += rng.normal(0, 4, pred[..., :2].shape)
    areas = person_area(ref)
    boxes = np.zeros((90, 4))
    want = pycocotools_oks(pred, ref, areas, boxes, synth.SIGMAS)
    assert (want == 0).mean() > 0.3 and (want > 0.5).sum() >= 45
    for _ in range(2):
        got = oks_matrix(pred, ref, areas, synth.SIGMAS, boxes)
        np.testing.assert_allclose(got, want, rtol=1e-12, atol=1e-300)
        assert (got[want == 0] == 0).all()


def test_oks_of_a_reference_without_labelled_joints_uses_the_enlarged_box():
    """pycocotools COCOeval.computeOks: with no labelled reference joint, distances are taken to
    the box enlarged to [x - w, x + 2w] x [y - h, y + 2h] (synthetic person)."""
    ref = np.zeros((1, 17, 3))
    box = np.array([[100.0, 100.0, 50.0, 80.0]])
    inside = np.full((1, 17, 3), 0.0)
    inside[0, :, :2] = (60.0, 250.0)  # within [50, 200] x [20, 260]
    outside = inside.copy()
    outside[0, :, 0] = 40.0  # 10 px left of the enlarged box
    for pred in (inside, outside):
        want = pycocotools_oks(pred, ref, [400.0], box, synth.SIGMAS)
        np.testing.assert_allclose(oks_matrix(pred, ref, [400.0], synth.SIGMAS, box), want)
    assert oks(inside[0], ref[0], 400.0, synth.SIGMAS, box[0]) == pytest.approx(1.0)
    assert oks(outside[0], ref[0], 400.0, synth.SIGMAS, box[0]) < 0.9
    assert oks(inside[0], ref[0], 400.0, synth.SIGMAS) == 0.0  # no box: nothing locates it


def test_missing_predicted_joints_count_as_far_away():
    """A NaN predicted joint adds 0 to the OKS sum (our documented extension of pycocotools,
    which has no missing detections): it equals moving that joint very far away."""
    rng = np.random.default_rng(5)
    ref = synth.person(rng, (200, 200), 150)
    pred = ref.copy()
    pred[3, :2] = np.nan
    far = ref.copy()
    far[3, :2] = 1e9
    area = person_area(ref)
    assert oks(pred, ref, area, synth.SIGMAS) == pytest.approx(16 / 17)
    assert oks(pred, ref, area, synth.SIGMAS) == oks(far, ref, area, synth.SIGMAS)


def test_match_people_is_the_optimal_assignment():
    """scipy.optimize.linear_sum_assignment on the OKS table (and a brute-force search over all
    pairings on small synthetic cases): the pairing maximises the summed OKS of pairs at or above
    the threshold."""
    rng = np.random.default_rng(2)
    for _ in range(20):
        n, m = int(rng.integers(1, 5)), int(rng.integers(1, 5))
        pred, ref, areas, boxes = random_case(rng, n, max(m, 2))
        ref, areas, boxes = ref[1:], areas[1:], boxes[1:]  # keep references with joints
        areas = np.maximum(areas, 1000.0)
        table = oks_matrix(pred, ref, areas, synth.SIGMAS)
        got = match_people(pred, ref, areas, synth.SIGMAS, threshold=0.3)
        best = 0.0
        for perm in itertools.permutations(range(max(len(pred), len(ref)))):
            total = sum(table[i, j] for i, j in enumerate(perm)
                        if i < len(pred) and j < len(ref) and table[i, j] >= 0.3)
            best = max(best, total)
        assert sum(s for _, _, s in got) == pytest.approx(best)
        assert all(s >= 0.3 for _, _, s in got)
        assert len({i for i, _, _ in got}) == len(got) == len({j for _, j, _ in got})
        assert [i for i, _, _ in got] == sorted(i for i, _, _ in got)


def test_joint_disagreement_and_person_area():
    """Per-joint distance over scale and the tight labelled box (common practice, no source);
    synthetic numbers worked by hand."""
    a = np.array([[0.0, 0.0, 2], [6.0, 8.0, 1], [1.0, 1.0, 0], [np.nan, np.nan, 0]])
    b = np.array([[3.0, 4.0, 2], [6.0, 8.0, 2], [1.0, 1.0, 2], [0.0, 0.0, 2]])
    np.testing.assert_allclose(joint_disagreement(a, b, 5.0), [1.0, 0.0, np.nan, np.nan])
    assert person_area(a) == 48.0
    assert person_area(b) == 48.0
    assert person_area(np.zeros((4, 3))) == 0.0
    np.testing.assert_allclose(person_area(np.stack([a, b, np.zeros((4, 3))])), [48, 48, 0])
    with pytest.raises(BadInput):
        joint_disagreement(a, b[:2], 1.0)
    with pytest.raises(BadInput):
        oks_matrix(a[None], b[None], [1.0, 2.0], [0.1] * 4)
