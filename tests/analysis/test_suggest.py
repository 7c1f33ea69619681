"""Owner suggestions on crafted scenes (synthetic), with and without the model's fields."""

import numpy as np

from app.analysis.suggest import candidate_owners
from app.analysis.targets import part_affinity_fields
from app.formats.maps import NetworkMaps
from app.model.skeleton import coco_body
from tests.analysis.synth import person

SK = coco_body()
LW = SK.index("left_wrist")
LE = SK.index("left_elbow")


def _two_people_side_by_side(gap: float = 120.0, stature: float = 300.0):
    rng = np.random.default_rng(3)
    a = person(rng, (300.0, 400.0), stature)
    b = person(rng, (300.0 + gap, 400.0), stature)
    return a, b


def test_without_maps_the_right_person_wins():
    """A left wrist placed at B's true left wrist goes to B, not to A, on limb lengths alone."""
    a, b = _two_people_side_by_side(gap=220.0)
    people = {1: a.copy(), 2: b.copy()}
    xy = b[LW, :2].copy()
    people[2][LW, 2] = 0
    ranked = candidate_owners(people, LW, xy, SK)
    assert [c.person_id for c in ranked] == [2, 1]
    assert ranked[0].score > 0.9 and ranked[1].score < ranked[0].score


def test_with_maps_the_field_settles_an_equidistant_joint():
    """Both elbows are equally far from the wrist; only the field (drawn by our target
    functions from the true poses, Cao et al. 2017 Sec. 2.3) says whose forearm it ends. When
    the two wrists trade owners in the poses the field is drawn from, the same wrist goes to
    the other person: the field, not the geometry, decides."""
    a = np.zeros((17, 3))
    b = np.zeros((17, 3))
    torso = np.array([[0, 0], [-52, 0], [0, 58], [-38, 58]], dtype=float)  # shoulders, hips
    for kp, x0 in ((a, 100.0), (b, 180.0)):
        kp[[5, 6, 11, 12], :2] = torso + np.array([x0, 100.0])
        kp[[5, 6, 11, 12], 2] = 2
    a[LE] = (100.0, 150.0, 2)
    b[LE] = (180.0, 150.0, 2)
    wrist = np.array([140.0, 180.0])  # 50 px from both elbows
    other = np.array([220.0, 190.0])
    people = {1: a, 2: b}

    def fields(wrist_a, wrist_b):
        truth_a, truth_b = a.copy(), b.copy()
        truth_a[LW] = (*wrist_a, 2)
        truth_b[LW] = (*wrist_b, 2)
        pafs = part_affinity_fields(np.stack([truth_a, truth_b]), SK.limbs, (400, 300), 4, 6.0)
        return NetworkMaps(np.zeros((17, 75, 100), np.float32), pafs, 4)

    with_maps = candidate_owners(people, LW, wrist, SK, maps=fields(wrist, other))
    assert with_maps[0].person_id == 1
    assert with_maps[0].score > 0.8 and with_maps[1].score < 0.2
    traded = candidate_owners(people, LW, wrist, SK, maps=fields(other, wrist))
    assert traded[0].person_id == 2
    # The traded forearms cross, and where they cross the field is their average.
    assert traded[0].score > 2 * traded[1].score


def test_exclude_and_people_without_neighbours():
    a, b = _two_people_side_by_side()
    c = np.zeros((17, 3))
    c[0] = (10.0, 10.0, 2)  # only a nose: cannot take a wrist
    ranked = candidate_owners({1: a, 2: b, 3: c}, LW, a[LW, :2], SK, exclude=2)
    assert [r.person_id for r in ranked] == [1, 3]
    assert ranked[-1].score == 0.0


def test_a_receiver_that_has_the_joint_is_marked_as_a_swap():
    _, b = _two_people_side_by_side(gap=220.0)
    ranked = candidate_owners({2: b}, LW, b[LW, :2], SK)
    assert "swaps with its own" in ranked[0].reason and ranked[0].score <= 0.8
