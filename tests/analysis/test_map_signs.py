"""Triage's reasons read from the maps and the neighbours (held-tie, opposed-field,
neighbour-face, long-legs) on synthetic maps and bodies, and fitting a trial sign as an extra kind.

The maps are the training targets of two synthetic bodies (app.analysis.targets, the
published definitions of Cao et al., CVPR 2017: a limb's field is its unit direction from its
first joint to its second), so a limb labelled the wrong way round meets a field running
against it (a negative line integral E, Sec. 2.4), and the grouping of these maps finds the two
bodies as drawn. The bodies are invented for the test.
"""

from __future__ import annotations

from types import SimpleNamespace

import numpy as np
import pytest

from app.analysis.association import group_people
from app.analysis.targets import confidence_maps, part_affinity_fields
from app.analysis.triage import triage_frame
from app.analysis.triage.model_evidence import HELD_FULL, FieldMemo
from app.demo.weights import KINDS, Judged, fit_weights, measure
from app.model.skeleton import coco_body

SK = coco_body()
#: A synthetic upright body (x, y), about 100 pixels tall.
BODY = np.array([[50, 20], [52, 18], [48, 18], [55, 19], [45, 19], [60, 35], [40, 35],
                 [63, 55], [37, 55], [64, 72], [36, 72], [56, 68], [44, 68], [57, 95],
                 [43, 95], [57, 120], [43, 120]], dtype=np.float64)
SIZE = (240, 160)


def _maps() -> FieldMemo:
    """The maps of the two bodies drawn at x + 20 and x + 130, stride 4."""
    truth = np.zeros((2, 17, 3))
    for i, dx in enumerate((20.0, 130.0)):
        truth[i, :, :2] = BODY + np.array([dx, 10.0])
        truth[i, :, 2] = 2
    limbs = np.asarray(SK.limbs)
    return FieldMemo(SimpleNamespace(confidence_maps=confidence_maps(truth, SIZE, 4, 3.0),
                                     pafs=part_affinity_fields(truth, limbs, SIZE, 4, 3.0),
                                     stride=4))


MAPS = _maps()


def _grouped() -> dict[int, np.ndarray]:
    """The people the maps group into, as labels (``v = 2`` where found)."""
    maps = MAPS.maps
    found = group_people(maps.confidence_maps, maps.pafs, np.asarray(SK.limbs), stride=4)
    assert len(found) == 2
    out = {}
    for p, person in enumerate(sorted(found, key=lambda f: f[0, 0]), start=1):
        kp = person.copy()
        kp[:, 2] = np.where(person[:, 2] > 0, 2, 0)
        out[p] = kp
    return out


def _strengths(people: dict[int, np.ndarray], kind: str, **kw: object) -> dict[int, float]:
    verdict = triage_frame(people, SK, maps=MAPS, **kw)  # type: ignore[arg-type]
    out = dict.fromkeys(people, 0.0)
    for r in verdict.reasons:
        if r.kind == kind and r.person is not None:
            out[r.person] = max(out[r.person], r.strength)
    return out


def test_held_tie_counts_joints_the_grouping_alone_places_elsewhere() -> None:
    people = _grouped()
    assert _strengths(people, "held-tie") == {1: 0.0, 2: 0.0}   # the grouping's own labels
    moved = {p: kp.copy() for p, kp in people.items()}
    moved[2][9, :2] += (0.0, 25.0)          # a wrist 25 pixels off
    assert _strengths(moved, "held-tie") == {1: 0.0, 2: pytest.approx(1 / HELD_FULL)}
    # a joint a person placed is theirs, not the grouping's question
    assert _strengths(moved, "held-tie", placed={2: frozenset({9})}) == {1: 0.0, 2: 0.0}
    # labels of another origin (every joint 3 pixels off the maps' peaks, as a person's
    # clicks or an import would be) are not the grouping's: nothing to say of them
    drawn = {p: kp + np.array([3.0, 0.0, 0.0]) for p, kp in people.items()}
    assert _strengths(drawn, "held-tie") == {1: 0.0, 2: 0.0}


def test_held_tie_is_not_computed_for_labels_recorded_as_grouped_alone(monkeypatch) -> None:
    """Labels recorded as grouped each frame alone are the maps' grouping alone, which
    held-tie compares them with: triage does not group the maps alone for them (a moved wrist
    that held-tie would name otherwise, as a person's edit it did not see, stays unnamed);
    with no record, or grouped with the frame before, it does (our own rule)."""
    import app.analysis.triage.frame as frame_module

    calls = []
    real = frame_module.grouped_alone
    monkeypatch.setattr(frame_module, "grouped_alone",
                        lambda *args: calls.append(1) or real(*args))
    moved = {p: kp.copy() for p, kp in _grouped().items()}
    moved[2][9, :2] += (0.0, 25.0)
    for grouping, computed in (("alone", False), (None, True), ("frame-before", True)):
        calls.clear()
        memo = FieldMemo(MAPS.maps)   # fresh: nothing grouped yet
        verdict = triage_frame(moved, SK, maps=memo, grouping=grouping)
        held = [r for r in verdict.reasons if r.kind == "held-tie"]
        assert (len(calls), memo._alone is not None, bool(held)) == (computed,) * 3, grouping


def test_opposed_field_counts_limbs_labelled_against_the_field() -> None:
    people = _grouped()
    assert _strengths(people, "opposed-field") == {1: 0.0, 2: 0.0}
    swapped = {p: kp.copy() for p, kp in people.items()}
    swapped[1][[7, 9]] = swapped[1][[9, 7]]   # left elbow and wrist exchanged
    signs = _strengths(swapped, "opposed-field")
    assert signs[1] > 0 and signs[2] == 0.0


def test_neighbour_face_finds_an_eye_and_ear_on_the_next_face() -> None:
    """Two heads 20 pixels apart: person 1's right eye and ear drawn on person 2's face."""
    first = np.zeros((17, 3))
    first[:, :2], first[:, 2] = BODY, 2
    second = first.copy()
    second[:, 0] += 20
    assert _strengths({1: first, 2: second}, "neighbour-face") == {1: 0.0, 2: 0.0}
    wrong = first.copy()
    wrong[[2, 4], 0] += 20
    verdict = triage_frame({1: wrong, 2: second}, SK)
    found = [r for r in verdict.reasons if r.kind == "neighbour-face"]
    assert [(r.person, r.joints, r.other) for r in found] == [(1, (2, 4), 2)]
    assert "person 2's nose" in found[0].text


def test_long_legs_finds_the_knees_and_ankles_of_the_person_below() -> None:
    """Three synthetic bodies side by side (invented for the test; our own heuristic, no
    published source): person 1's knees and ankles drawn 20 and 40 pixels lower, as the legs
    of someone standing below would be, make its legs 1.7 times the others' for the torso."""
    people = {}
    for p in (1, 2, 3):
        body = np.zeros((17, 3))
        body[:, :2], body[:, 2] = BODY + np.array([60.0 * p, 0.0]), 2
        people[p] = body
    assert _strengths(people, "long-legs") == {1: 0.0, 2: 0.0, 3: 0.0}
    people[1][[13, 14], 1] += 20
    people[1][[15, 16], 1] += 40
    verdict = triage_frame(people, SK)
    found = [r for r in verdict.reasons if r.kind == "long-legs"]
    assert [(r.person, r.joints, r.strength) for r in found] == [(1, (13, 14, 15, 16), 1.0)]
    assert "knees and ankles" in found[0].text
    # With fewer than two others to compare with, the sign stays silent.
    assert _strengths({1: people[1], 2: people[2]}, "long-legs") == {1: 0.0, 2: 0.0}


def test_a_frame_without_maps_gives_no_map_signs() -> None:
    swapped = {p: kp.copy() for p, kp in _grouped().items()}
    swapped[1][[7, 9]] = swapped[1][[9, 7]]
    kinds = {r.kind for r in triage_frame(swapped, SK).reasons}
    assert not kinds & {"held-tie", "opposed-field"}


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
