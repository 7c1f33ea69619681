"""The trial signs of app.demo.weights (app/demo/trial_signs.py) on synthetic maps.

The maps are the training targets of two synthetic bodies (app.analysis.targets, the
published definitions of Cao et al., CVPR 2017: a limb's field is its unit direction from its
first joint to its second), so a limb labelled the wrong way round meets a field running
against it, and the grouping of these maps finds the two bodies as drawn.
"""

from __future__ import annotations

from types import SimpleNamespace

import numpy as np
import pytest

from app.analysis.association import group_people
from app.analysis.targets import confidence_maps, part_affinity_fields
from app.analysis.triage.model_evidence import FieldMemo
from app.demo.trial_signs import HELD_FULL, held_tie, opposed_field
from app.demo.weights import KINDS, Judged, fit_weights, measure
from app.model.skeleton import coco_body

SK = coco_body()
#: A synthetic upright body (x, y), about 100 pixels tall.
BODY = np.array([[50, 20], [52, 18], [48, 18], [55, 19], [45, 19], [60, 35], [40, 35],
                 [63, 55], [37, 55], [64, 72], [36, 72], [56, 68], [44, 68], [57, 95],
                 [43, 95], [57, 120], [43, 120]], dtype=np.float64)
SIZE = (240, 160)


def _frame(people: dict[int, np.ndarray]) -> SimpleNamespace:
    """A stand-in for app.demo.calibrate.DemoFrame: the labels ``people`` and the maps of the
    two bodies drawn at x + 20 and x + 130."""
    truth = np.zeros((2, 17, 3))
    for i, dx in enumerate((20.0, 130.0)):
        truth[i, :, :2] = BODY + np.array([dx, 10.0])
        truth[i, :, 2] = 2
    limbs = np.asarray(SK.limbs)
    maps = SimpleNamespace(confidence_maps=confidence_maps(truth, SIZE, 4, 3.0),
                           pafs=part_affinity_fields(truth, limbs, SIZE, 4, 3.0), stride=4)
    labels = SimpleNamespace(skeleton=SK, people={
        p: SimpleNamespace(keypoints=kp) for p, kp in people.items()})
    return SimpleNamespace(labels=labels, maps=FieldMemo(maps))


def _grouped() -> dict[int, np.ndarray]:
    """The people the maps group into, as labels (``v = 2`` where found)."""
    frame = _frame({})
    maps = frame.maps.maps
    found = group_people(maps.confidence_maps, maps.pafs, np.asarray(SK.limbs), stride=4)
    assert len(found) == 2
    out = {}
    for p, person in enumerate(sorted(found, key=lambda f: f[0, 0]), start=1):
        kp = person.copy()
        kp[:, 2] = np.where(person[:, 2] > 0, 2, 0)
        out[p] = kp
    return out


def test_held_tie_counts_joints_the_grouping_alone_places_elsewhere() -> None:
    people = _grouped()
    assert held_tie(_frame(people)) == {1: 0.0, 2: 0.0}
    moved = {p: kp.copy() for p, kp in people.items()}
    moved[2][9, :2] += (0.0, 25.0)          # a wrist 25 pixels off
    assert held_tie(_frame(moved)) == {1: 0.0, 2: pytest.approx(1 / HELD_FULL)}


def test_opposed_field_counts_limbs_labelled_against_the_field() -> None:
    people = _grouped()
    assert opposed_field(_frame(people)) == {1: 0.0, 2: 0.0}
    swapped = {p: kp.copy() for p, kp in people.items()}
    swapped[1][[7, 9]] = swapped[1][[9, 7]]   # left elbow and wrist exchanged
    signs = opposed_field(_frame(swapped))
    assert signs[1] > 0 and signs[2] == 0.0


def test_a_frame_without_maps_gives_nothing() -> None:
    frame = _frame({1: np.zeros((17, 3))})
    frame.maps = None
    assert held_tie(frame) == {1: 0.0} and opposed_field(frame) == {1: 0.0}


def test_fit_weights_takes_an_extra_kind() -> None:
    """Synthetic people whose wrongness follows only the extra column (a logistic model with
    weight 6, prior -3): the fit gives the extra kind its weight and the others none;
    ``measure`` counts a kind the weights lack as 0."""
    rng = np.random.default_rng(1)
    kinds = (*KINDS, "trial")
    x = np.zeros((3000, len(kinds)))
    x[:, -1] = rng.uniform(0, 1, 3000)
    y = rng.uniform(size=3000) < 1 / (1 + np.exp(-(-3.0 + 6.0 * x[:, -1])))
    judged = Judged(x, y, kinds)
    prior, weights = fit_weights(judged)
    assert abs(weights["trial"] - 6.0) <= 1.0 and -3.8 < prior < -2.2
    assert measure(judged, prior, {k: w for k, w in weights.items() if k != "trial"}).flagged \
        == measure(Judged(x, y, kinds), prior, dict.fromkeys(kinds, 0.0)).flagged
