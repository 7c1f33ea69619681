"""Counting wrong grouped people, against pycocotools' OKS and scipy's assignment."""

from __future__ import annotations

import json
from dataclasses import dataclass
from itertools import pairwise
from pathlib import Path

import numpy as np
import pytest
from pycocotools.coco import COCO
from pycocotools.cocoeval import COCOeval
from scipy.optimize import linear_sum_assignment

from app.analysis.association import group_people
from app.analysis.similarity import match_people
from app.demo.evaluate import KS_CORRECT, wrong_for_training, wrong_people
from app.model.skeleton import coco_body

SIGMAS = coco_body().sigma_array


def _pycocotools_oks(auto: np.ndarray, truth: np.ndarray, areas: np.ndarray) -> np.ndarray:
    """``(A, T)`` OKS computed by pycocotools' COCOeval.computeOks."""
    gt = COCO()
    gt.dataset = {
        "images": [{"id": 1, "width": 640, "height": 480}],
        "categories": [{"id": 1, "name": "person"}],
        "annotations": [
            {"id": i + 1, "image_id": 1, "category_id": 1, "iscrowd": 0,
             "keypoints": t.ravel().tolist(), "num_keypoints": int((t[:, 2] > 0).sum()),
             "area": float(a), "bbox": [0.0, 0.0, 10.0, 10.0]}
            for i, (t, a) in enumerate(zip(truth, areas))
        ],
    }
    gt.createIndex()
    # Scores fall with the index so that pycocotools keeps our order.
    dt = gt.loadRes([{"image_id": 1, "category_id": 1, "keypoints": a.ravel().tolist(),
                      "score": 1.0 - 0.01 * i} for i, a in enumerate(auto)])
    ev = COCOeval(gt, dt, "keypoints")
    ev.params.kpt_oks_sigmas = SIGMAS
    ev.params.imgIds = [1]
    ev._prepare()
    return np.asarray(ev.computeOks(1, 1))


def test_agrees_with_pycocotools_and_scipy() -> None:
    """A grouped person is right exactly when it belongs to a one-to-one pairing, maximising
    summed OKS over pairs with OKS >= 0.8 (OKS by pycocotools' computeOks, assignment by
    scipy.optimize.linear_sum_assignment). Synthetic people: some exact, some jittered, one
    with left and right swapped, one duplicated, one phantom."""
    rng = np.random.default_rng(9)
    flip = coco_body().flip_index
    truth = np.zeros((6, 17, 3))
    truth[:, :, :2] = rng.uniform(50, 150, (6, 17, 2)) + (np.arange(6) * 80)[:, None, None]
    truth[:, :, 2] = rng.choice([1, 2], size=(6, 17))
    areas = rng.uniform(2000, 8000, 6)
    auto = truth.copy()
    auto[:, :, :2] += rng.normal(0, 1.5, (6, 17, 2))
    auto[2, :, :2] += rng.normal(0, 12, (17, 2))
    auto[3] = auto[3][flip]
    twice = truth[1:2] + np.array([1.0, 0.5, 0.0])
    phantom = truth[:1] + np.array([400.0, 300.0, 0.0])
    auto = np.concatenate([auto, twice, phantom])
    auto[:, :, 2] = 1
    oks = _pycocotools_oks(auto, truth, areas)
    weight = np.where(oks >= 0.8, oks, 0.0)
    rows, cols = linear_sum_assignment(weight, maximize=True)
    expected = np.ones(len(auto), bool)
    expected[[r for r, c in zip(rows, cols) if oks[r, c] >= 0.8]] = False
    got = wrong_people(auto, truth, areas, SIGMAS)
    np.testing.assert_array_equal(got, expected)
    assert 2 <= got.sum() <= 5


def test_wrong_for_training_follows_the_loss_mask_rule() -> None:
    """The count of people wrong as training sees them: an occluded true joint (COCO v=1)
    left unlabelled is masked out of the loss and not wrong; a visible one (v=2) left
    unlabelled is; a labelled joint farther than per-joint similarity 0.5 is, that
    similarity checked against pycocotools' computeOks on a one-joint truth (where OKS is
    that joint's similarity). Synthetic people; the rule is the product's (unlabel what
    cannot be seen), the loss mask after Cao et al., CVPR 2017."""
    rng = np.random.default_rng(3)
    truth = np.zeros((2, 17, 3))
    truth[:, :, :2] = rng.uniform(50, 150, (2, 17, 2)) + np.array([[[0.0, 0.0]], [[300.0, 0.0]]])
    truth[:, :, 2] = 2
    hidden = [9, 10, 15, 16]
    truth[1, hidden, 2] = 1  # the second person's wrists and ankles are occluded
    areas = np.array([6000.0, 6000.0])
    right = truth.copy()
    occluded_unlabelled = truth[1].copy()
    occluded_unlabelled[hidden] = (0.0, 0.0, 0)
    visible_unlabelled = truth[0].copy()
    visible_unlabelled[9] = (0.0, 0.0, 0)
    far = truth[0].copy()
    # A shift whose similarity for the left wrist (sigma 0.062) is just under 0.5:
    # ks = exp(-d^2 / (2 area (2 sigma)^2)) < 0.5 when d^2 > 2 ln 2 area (2 sigma)^2.
    d = 1.05 * np.sqrt(2 * np.log(2) * areas[0] * (2 * SIGMAS[9]) ** 2)
    far[9, 0] += d
    one = np.zeros((1, 17, 3))
    one[0, 9] = truth[0, 9]
    ks = _pycocotools_oks(far[None], one, areas[:1])[0, 0]
    assert ks < KS_CORRECT < _pycocotools_oks(truth[:1], one, areas[:1])[0, 0]

    def verdict(person, other):
        return wrong_for_training(np.stack([person, other]), truth, areas, SIGMAS).tolist()

    assert verdict(right[0], right[1]) == [False, False]
    assert verdict(right[0], occluded_unlabelled) == [False, False]
    assert verdict(visible_unlabelled, right[1]) == [True, False]
    assert verdict(far, right[1]) == [True, False]
    strict = np.where(occluded_unlabelled[:, 2:] > 0, occluded_unlabelled, np.nan)
    assert wrong_people(np.stack([right[0], strict]), truth, areas, SIGMAS).tolist() == [
        False, True], "the strict count (OKS 13/17 < 0.8) counts the unlabelled joints as missed"
    twice = np.stack([right[0], right[1], right[1] + np.array([1.0, 0.0, 0.0])])
    assert wrong_for_training(twice, truth, areas, SIGMAS).tolist() == [False, False, True]


def test_empty_sides() -> None:
    """No truth: every grouped person is wrong; nobody grouped: nothing to flag."""
    person = np.zeros((1, 17, 3))
    assert wrong_people(person, np.zeros((0, 17, 3)), [], SIGMAS).tolist() == [True]
    assert wrong_people(np.zeros((0, 17, 3)), person, [100.0], SIGMAS).shape == (0,)


@dataclass
class _Grouped:
    """The shipped demo grouped frame by frame: per frame the grouped people, the true people,
    their areas and track ids."""

    auto: list[np.ndarray]
    truth: list[np.ndarray]
    areas: list[np.ndarray]
    tracks: list[np.ndarray]


@pytest.fixture(scope="module")
def grouped(shipped: Path) -> _Grouped:
    truth = json.loads((shipped / "truth.json").read_text())
    per_image: dict[int, list[dict]] = {im["id"]: [] for im in truth["images"]}
    for ann in truth["annotations"]:
        per_image[ann["image_id"]].append(ann)
    limbs = coco_body().limb_array
    out = _Grouped([], [], [], [])
    for image in truth["images"]:
        anns = per_image[image["id"]]
        stem = Path(image["file_name"]).stem
        with np.load(shipped / "maps" / f"{stem}.npz", allow_pickle=False) as npz:
            found = group_people(npz["confidence_maps"], npz["pafs"], limbs,
                                 stride=int(npz["stride"]))
        out.auto.append(np.array(found).reshape(-1, 17, 3))
        out.truth.append(np.array([np.reshape(a["keypoints"], (17, 3)) for a in anns], float))
        out.areas.append(np.array([a["area"] for a in anns], float))
        out.tracks.append(np.array([a["track_id"] for a in anns]))
    return out


def test_grouping_the_shipped_maps_makes_crowd_errors(grouped: _Grouped) -> None:
    """Grouping the shipped maps with app.analysis.association.group_people gets most dancers
    right but not all: between 15% and 45% of the grouped people are wrong (OKS < 0.8 or
    unmatched), the rate the simulation was tuned for (our brief: 20-40% on the shipped
    demo, with margin for changes in the grouping)."""
    found = wrong = dancers = 0
    for auto, people, areas in zip(grouped.auto, grouped.truth, grouped.areas):
        found += len(auto)
        dancers += len(people)
        wrong += int(wrong_people(auto, people, areas, SIGMAS).sum())
    assert 0.8 * dancers <= found <= 1.2 * dancers
    assert 0.15 <= wrong / found <= 0.45


def test_the_shipped_demos_errors_last_over_frames(grouped: _Grouped) -> None:
    """A network's crowd errors persist while the dancers stay tangled, and so do the demo's:
    of the dancers not labelled right in one frame (no grouped person paired with them at
    OKS >= 0.8, pairing as in wrong_people: OKS as pycocotools computes it, scipy's optimal
    assignment), at least 45 % are still not right in the next frame, at least 1.5 times the
    share of dancers not right in any frame. Measured when written: 0.50 against 0.27; the
    same scene with every frame's errors drawn afresh gave 0.33 against 0.24 (our brief)."""
    bad: list[dict[int, bool]] = []
    for auto, people, areas, tracks in zip(grouped.auto, grouped.truth, grouped.areas,
                                           grouped.tracks):
        right = {int(tracks[j]) for _, j, _ in match_people(auto, people, areas, SIGMAS,
                                                            threshold=0.8)}
        bad.append({int(t): int(t) not in right for t in tracks})
    then = [now[t] for now in bad[:-1] for t in now]
    still = [nxt[t] for now, nxt in pairwise(bad) for t in now if now[t] and t in nxt]
    assert len(still) >= 50
    assert np.mean(still) >= 0.45
    assert np.mean(still) >= 1.5 * np.mean(then)
