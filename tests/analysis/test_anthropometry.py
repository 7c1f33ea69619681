"""Body proportions for triage against the Drillis and Contini (1966) table as tabulated in
Winter, "Biomechanics and Motor Control of Human Movement", Fig. 4.1 (from memory): segment
lengths and landmark heights are two columns of one table and must agree. People are synthetic
(tests/analysis/synth.py, invented)."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.sparse.csgraph import floyd_warshall

from app.analysis.anthropometry import (
    LANDMARK_HEIGHTS,
    SEGMENT_FRACTIONS,
    limb_fractions,
    person_scale,
    reach_matrix,
)
from app.model.skeleton import coco_body
from tests.analysis.synth import person

SK = coco_body()


def _seg(a: str, b: str) -> float:
    return SEGMENT_FRACTIONS[frozenset((a, b))]


def test_segment_lengths_agree_with_landmark_heights():
    """Upper arm = shoulder - elbow height, forearm = elbow - wrist, thigh = hip - knee,
    shank = knee - ankle, torso side = shoulder - hip (Winter's table, within 0.005)."""
    h = LANDMARK_HEIGHTS
    assert _seg("left_shoulder", "left_elbow") == pytest.approx(h["shoulder"] - h["elbow"],
                                                                abs=0.005)
    assert _seg("left_elbow", "left_wrist") == pytest.approx(h["elbow"] - h["wrist"], abs=0.005)
    assert _seg("left_hip", "left_knee") == pytest.approx(h["hip"] - h["knee"], abs=0.005)
    assert _seg("left_knee", "left_ankle") == pytest.approx(h["knee"] - h["ankle"], abs=0.005)
    assert _seg("left_shoulder", "left_hip") == pytest.approx(h["shoulder"] - h["hip"],
                                                              abs=0.005)


def test_reach_is_the_chain_of_segments():
    """The longest reach between two joints is the shortest chain of table segments, checked
    against scipy's Floyd-Warshall on the limb graph; shoulder to ankle is the standing
    shoulder height above the ankle (0.818 - 0.039 of stature)."""
    reach = reach_matrix(SK)
    graph = np.full((17, 17), np.inf)
    np.fill_diagonal(graph, 0.0)
    for (a, b), f in zip(SK.limbs, limb_fractions(SK)):
        graph[a, b] = graph[b, a] = f
    assert np.allclose(reach, floyd_warshall(graph))
    i, j = SK.index("right_shoulder"), SK.index("right_ankle")
    assert reach[i, j] == pytest.approx(LANDMARK_HEIGHTS["shoulder"] - LANDMARK_HEIGHTS["ankle"],
                                        abs=0.005)
    assert (reach >= 0).all() and np.allclose(reach, reach.T)


def test_torso_scale_of_a_table_body_is_its_stature():
    """A synthetic body built from the table's proportions, turned to the camera or away,
    has a torso scale within 1 % of its stature; turned side on (widths foreshortened to a
    third) it still has, from the sides of its torso."""
    rng = np.random.default_rng(2)
    for stature in (150.0, 300.0, 480.0):
        body = person(rng, (500.0, 500.0), stature)
        assert person_scale(body, SK) == pytest.approx(stature, rel=0.01)
        side_on = body.copy()
        centre = side_on[:, 0].mean()
        side_on[:, 0] = centre + (side_on[:, 0] - centre) / 3.0
        assert person_scale(side_on, SK) == pytest.approx(stature, rel=0.05)
