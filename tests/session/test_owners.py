"""Owners of a selected joint: the current owner's fit beside the candidates', a reason each,
"nobody fits better", and the swap said before a give.

Data: synthetic bodies (tests/analysis/synth.py, invented). The ranking without maps follows
limb lengths against the torso with segment fractions from Drillis and Contini (1966) as
tabulated in Winter, "Biomechanics and Motor Control of Human Movement" (see
app/analysis/anthropometry.py).
"""

from __future__ import annotations

import numpy as np

from app.model.labels import Person
from app.model.skeleton import coco_body
from app.session.owners import rank_owners, swap_warning
from tests.analysis.synth import person


def _people():
    rng = np.random.default_rng(3)
    a = Person(1, person(rng, (100.0, 120.0), 120.0), np.full(17, 0.9), ("auto",) * 17)
    b = Person(2, person(rng, (260.0, 120.0), 120.0), np.full(17, 0.9), ("auto",) * 17)
    return a, b


def test_a_joint_on_its_own_body_has_nobody_fitting_better():
    a, b = _people()
    r = rank_owners([a, b], 1, 9, coco_body())
    assert r.owner.is_owner and r.owner.score > r.best.score
    assert r.better == () and r.verdict == "nobody fits better than the owner, person 1"


def test_a_wrist_at_the_neighbours_elbow_names_the_neighbour_with_its_own_reason():
    a, b = _people()
    a.keypoints[9, :2] = b.keypoints[7, :2] + (4.0, 10.0)  # far from a, at b's left elbow
    r = rank_owners([a, b], 1, 9, coco_body())
    assert r.best.person_id == 2 and r.better == (2,)
    assert r.verdict.startswith("person 2 fits better")
    assert r.best.swap, "person 2 has a left wrist already"
    assert "left elbow" in r.best.reason and "swap" in r.best.reason
    assert "left elbow" in r.owner.reason and "torso" in r.owner.reason


def test_the_swap_is_said_before_the_give():
    a, b = _people()
    said = swap_warning([a, b], [(1, 9)], 2, coco_body())
    assert said == "person 2 already has a left wrist: giving swaps it with person 1's"
    b.keypoints[9, 2] = 0
    assert swap_warning([a, b], [(1, 9)], 2, coco_body()) == ""
