"""``compare``: OKS per pair checked against pycocotools' ``COCOeval.computeOks`` on the same
people (A as ground truth, B as detections), the pairing against the optimum found by
scipy's ``linear_sum_assignment``, and the frame and joint summaries on hand-made cases.

All labels are synthetic (tests/synthetic.py and small arrays written here).
"""

from __future__ import annotations

import contextlib
import csv
import io
import json
from pathlib import Path

import numpy as np
import pytest
from pycocotools.coco import COCO
from pycocotools.cocoeval import COCOeval

from app.errors import BadInput
from app.model.labels import Person
from app.model.skeleton import coco_body
from app.review.compare import compare, compare_frame, load_labels, write_csv
from tests import synthetic
from tests.conftest import place

SK = coco_body()


def _perturbed(dataset: dict, seed: int) -> dict:
    """B: A's people with every joint moved by a few pixels, some unlabeled, one dropped and
    the annotation order shuffled (synthetic)."""
    rng = np.random.default_rng(seed)
    b = json.loads(json.dumps(dataset))
    anns = []
    for i, ann in enumerate(b["annotations"]):
        if i == 4:
            continue
        kp = np.array(ann["keypoints"], dtype=float).reshape(17, 3)
        on = kp[:, 2] > 0
        kp[on, :2] += rng.normal(0, 3 + 4 * (i % 3), (int(on.sum()), 2))
        drop = on & (rng.random(17) < 0.1)
        kp[drop] = 0
        ann["keypoints"] = [round(float(v), 3) if k % 3 < 2 else int(v)
                            for k, v in enumerate(kp.ravel())]
        ann["id"] += 100_000
        anns.append(ann)
    rng.shuffle(anns)
    b["annotations"] = anns
    return b


def _pycocotools_ious(a: dict, b: dict, image_id: int) -> tuple[np.ndarray, list, list]:
    """``computeOks`` for one image; rows follow B's annotations, columns A's."""
    gt = COCO()
    gt.dataset = json.loads(json.dumps(a))
    with contextlib.redirect_stdout(io.StringIO()):
        gt.createIndex()
        dts = [{"image_id": x["image_id"], "category_id": 1, "keypoints": x["keypoints"],
                "score": 1.0 - 1e-3 * n, "bid": x["id"]}
               for n, x in enumerate(y for y in b["annotations"] if y["image_id"] == image_id)]
        dt = gt.loadRes(dts)
        ev = COCOeval(gt, dt, "keypoints")
    ev.params.imgIds = [image_id]
    ev.params.maxDets = [100]
    ev._prepare()
    gts = [g["id"] for g in ev._gts[image_id, 1]]
    dets = [d["bid"] for d in ev._dts[image_id, 1]]
    return np.asarray(ev.computeOks(image_id, 1)), dets, gts


def test_pair_oks_equals_pycocotools(tmp_path):
    """Every paired OKS is pycocotools' computeOks of B's person against A's (to 1e-12)."""
    names = [f"f{i}.jpg" for i in range(5)]
    a = synthetic.coco_dataset(names, people_per_image=4, seed=11)
    b = _perturbed(a, 5)
    (tmp_path / "a.json").write_text(json.dumps(a))
    (tmp_path / "b.json").write_text(json.dumps(b))
    result = compare(load_labels(tmp_path / "a.json"), load_labels(tmp_path / "b.json"))
    assert len(result.frames) == 5
    checked = 0
    for fc in result.frames:
        ious, dets, gts = _pycocotools_ious(a, b, fc.frame_a)
        for pa, pb, score in fc.pairs:
            assert score == pytest.approx(ious[dets.index(pb), gts.index(pa)], abs=1e-12)
            checked += 1
    assert checked >= 15


def test_pairing_is_the_optimal_assignment(tmp_path):
    """The pairs maximise the summed OKS (scipy's linear_sum_assignment on pycocotools' OKS
    table, pairs below the threshold weighing 0)."""
    from scipy.optimize import linear_sum_assignment

    names = ["crowd.jpg"]
    a = synthetic.coco_dataset(names, people_per_image=6, seed=3)
    b = _perturbed(a, 9)
    (tmp_path / "a.json").write_text(json.dumps(a))
    (tmp_path / "b.json").write_text(json.dumps(b))
    (fc,) = compare(load_labels(tmp_path / "a.json"), load_labels(tmp_path / "b.json")).frames
    ious, _, _ = _pycocotools_ious(a, b, fc.frame_a)
    weight = np.where(ious >= 0.2, ious, 0)
    rows, cols = linear_sum_assignment(weight, maximize=True)
    best = weight[rows, cols].sum()
    assert sum(s for _, _, s in fc.pairs) == pytest.approx(best, abs=1e-9)


def _p(pid: int, kp: np.ndarray, area: float | None = 10_000.0) -> Person:
    extra = {} if area is None else {"area": area}
    return Person(pid, kp, np.full(17, np.nan), ("import",) * 17, None, extra)


def _standing(x0: float) -> np.ndarray:
    kp = np.zeros((17, 3))
    kp[:, 0] = x0 + np.arange(17) * 3.0
    kp[:, 1] = 50 + np.arange(17) * 10.0
    kp[:, 2] = 2
    return kp


def test_unpaired_people_count_as_zero_and_joints_that_disagree_are_named():
    a1, a2 = _standing(100), _standing(400)
    b1 = a1.copy()
    b1[SK.index("left_wrist"), :2] += 60  # far off
    b1[SK.index("nose")] = 0  # unlabeled in B only
    fc, _ = compare_frame([_p(1, a1), _p(2, a2)], [_p(11, b1)], SK.sigma_array, SK.joints)
    assert [(pa, pb) for pa, pb, _ in fc.pairs] == [(1, 11)]
    assert fc.unpaired_a == [2] and fc.unpaired_b == []
    assert fc.mean_oks == pytest.approx(fc.pairs[0][2] / 2)
    assert [(j, name) for _, _, j, name, _ in fc.disagreements] == [
        (0, "nose"), (9, "left_wrist")]
    assert fc.disagreements[0][4] == "labelled in A only"
    empty, _ = compare_frame([], [], SK.sigma_array, SK.joints)
    assert empty.mean_oks == 1.0


def test_per_joint_table(tmp_path):
    a = _standing(100)
    b = a.copy()
    b[SK.index("left_knee"), 0] += 50
    b[SK.index("right_ankle")] = 0
    set_a = _labelset("a", {"x.jpg": [_p(1, a)], "y.jpg": [_p(2, a)]})
    set_b = _labelset("b", {"x.jpg": [_p(5, b)], "y.jpg": [_p(6, a)]})
    result = compare(set_a, set_b)
    rows = {r.name: r for r in result.joints}
    assert rows["left_knee"].compared == 2 and rows["left_knee"].agreement == 0.5
    assert rows["left_knee"].mean_error == pytest.approx(50 / 100 / 2)
    assert rows["right_ankle"].one_side == 1 and rows["right_ankle"].agreement == 0.5
    assert rows["nose"].agreement == 1.0 and rows["nose"].mean_error == 0.0
    out = tmp_path / "c.csv"
    write_csv(result, out)
    table = list(csv.DictReader(out.open()))
    assert [r["file_name"] for r in table] == ["x.jpg", "y.jpg"]
    assert table[0]["disagreeing_joints"] == "2" and table[1]["mean_oks"] == "1.000000"


def _labelset(name, frames):
    from app.review.compare import LabelSet

    return LabelSet(name, "coco", SK,
                    {k: (i, people) for i, (k, people) in enumerate(frames.items())})


def test_project_against_coco_file_and_refusals(labelled, tmp_path, coco_file):
    result = compare(load_labels(place(labelled)), load_labels(coco_file))
    assert len(result.frames) == 6 and result.mean_oks == pytest.approx(1.0)
    results_list = tmp_path / "results.json"
    results_list.write_text("[]")
    with pytest.raises(BadInput, match="a results list has none"):
        load_labels(results_list)
    other = tmp_path / "other.json"
    other.write_text(json.dumps(synthetic.coco_dataset(["zzz.jpg"])))
    with pytest.raises(BadInput, match="share no image"):
        compare(load_labels(coco_file), load_labels(other))


def test_file_names_match_across_folders(tmp_path: Path):
    a = synthetic.coco_dataset(["./f0.jpg"])
    b = synthetic.coco_dataset(["f0.jpg"])
    (tmp_path / "a.json").write_text(json.dumps(a))
    (tmp_path / "b.json").write_text(json.dumps(b))
    assert len(compare(load_labels(tmp_path / "a.json"),
                       load_labels(tmp_path / "b.json")).frames) == 1
