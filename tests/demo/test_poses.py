"""The body model and the dance: proportions, feet on the floor, joined hands, smooth motion."""

from __future__ import annotations

import numpy as np
import pytest

from app.analysis.anthropometry import limb_fractions
from app.demo.poses import (
    NUM_BODY_JOINTS,
    STATURE_FRACTIONS,
    P,
    facing_camera,
)
from app.demo.scene import make_scene, poses_at
from app.model.skeleton import coco_body

FRAMES = (0, 5, 11, 17, 23, 24)


@pytest.fixture(scope="module")
def scene_poses():
    scene = make_scene(11)
    return scene, {f: poses_at(scene, f) for f in FRAMES}


def test_table_is_consistent() -> None:
    """Drillis and Contini's fractions as tabulated in Winter, "Biomechanics and Motor Control
    of Human Movement" (our copy is from memory): landmark heights differ by the segment
    lengths (shoulder - elbow = upper arm, elbow - wrist = forearm, hip - knee = thigh,
    knee - ankle = shank) to within 0.005 of stature."""
    f = STATURE_FRACTIONS
    assert f["shoulder_height"] - f["elbow_height"] == pytest.approx(f["upper_arm"], abs=0.005)
    assert f["elbow_height"] - f["wrist_height"] == pytest.approx(f["forearm"], abs=0.005)
    assert f["hip_height"] - f["knee_height"] == pytest.approx(f["thigh"], abs=0.005)
    assert f["knee_height"] - f["ankle_height"] == pytest.approx(f["shank"], abs=0.005)


def test_table_agrees_with_the_triage_table() -> None:
    """The demo's bodies and the triage's expected limb lengths use the same Drillis and
    Contini fractions (both written from memory of Winter's figure; they must not drift
    apart, or the demo would teach triage the wrong proportions)."""
    skeleton = coco_body()
    expected = limb_fractions(skeleton)
    ours = {"upper_arm": ("shoulder", "elbow"), "forearm": ("elbow", "wrist"),
            "thigh": ("hip", "knee"), "shank": ("knee", "ankle")}
    for name, (a, b) in ours.items():
        for side in ("left", "right"):
            pair = {skeleton.index(f"{side}_{a}"), skeleton.index(f"{side}_{b}")}
            limb = next(i for i, ends in enumerate(skeleton.limbs) if set(ends) == pair)
            assert expected[limb] == pytest.approx(STATURE_FRACTIONS[name])


def test_limbs_have_the_table_lengths(scene_poses) -> None:
    """Every arm and leg segment of every dancer in every frame is its table fraction of the
    dancer's stature (Drillis and Contini via Winter, from memory), whatever the pose."""
    _, frames = scene_poses
    segments = {
        ("shoulder", "elbow"): "upper_arm", ("elbow", "wrist"): "forearm",
        ("hip", "knee"): "thigh", ("knee", "ankle"): "shank",
    }
    for poses in frames.values():
        for pose in poses:
            for side in ("left", "right"):
                for (a, b), name in segments.items():
                    length = np.linalg.norm(pose.points[P[f"{side}_{a}"]]
                                            - pose.points[P[f"{side}_{b}"]])
                    assert length == pytest.approx(STATURE_FRACTIONS[name] * pose.stature,
                                                   rel=1e-6)
            shoulders = np.linalg.norm(pose.points[P["left_shoulder"]]
                                       - pose.points[P["right_shoulder"]])
            assert shoulders < STATURE_FRACTIONS["shoulder_width"] * pose.stature


def test_dancers_stand_on_the_floor(scene_poses) -> None:
    """No foot goes through the floor, at least one foot of everyone is planted, and heads are
    about a stature high (knees bend a little in the dance). Common practice, no source."""
    _, frames = scene_poses
    for poses in frames.values():
        for pose in poses:
            h = pose.stature
            ankles = pose.points[[P["left_ankle"], P["right_ankle"]], 2]
            assert ankles.min() == pytest.approx(STATURE_FRACTIONS["ankle_height"] * h,
                                                 abs=0.03 * h)
            feet = pose.points[[P["left_heel"], P["right_heel"], P["left_toe"],
                                P["right_toe"]], 2]
            assert feet.min() > -0.02
            assert 0.9 * h < pose.points[P["head"], 2] + 0.065 * h < 1.02 * h


def test_neighbours_hold_hands(scene_poses) -> None:
    """On each ring a dancer's right wrist meets the next dancer's left wrist (within a hand's
    breadth), or for the inner ring rests on the neighbour's shoulder. Our choreography."""
    scene, frames = scene_poses
    place = {(b.ring, b.slot): i for i, b in enumerate(scene.bodies)}
    for poses in frames.values():
        for (ring, slot), i in place.items():
            j = place[(ring, (slot + 1) % scene.rings[ring].size)]
            wrist = poses[i].points[P["right_wrist"]]
            if scene.rings[ring].hold == "raised":
                target = poses[j].points[P["left_wrist"]]
                assert np.linalg.norm(wrist - target) < 0.12
            else:
                target = poses[j].points[P["left_shoulder"]]
                assert np.linalg.norm(wrist - target) < 0.25


def test_motion_is_continuous(scene_poses) -> None:
    """Between consecutive frames (8 per second) no joint jumps: the trunk and head move at
    most 0.15 m and a swinging foot at most 0.3 m (about 2.4 m/s), also across the end of the
    phrase (frame 23 to 24). Common practice, no source."""
    scene, frames = scene_poses
    trunk = [P["pelvis"], P["neck"], P["nose"], P["left_hip"], P["right_shoulder"]]
    pairs = [(frames[23], frames[24])]
    pairs += [(poses_at(scene, f), poses_at(scene, f + 1)) for f in range(0, 23, 2)]
    for before, after in pairs:
        for pa, pb in zip(before, after):
            step = np.linalg.norm(pa.points - pb.points, axis=1)
            assert step[:NUM_BODY_JOINTS].max() < 0.3
            assert step[trunk].max() < 0.15


def test_the_ring_shows_fronts_backs_and_sides(scene_poses) -> None:
    """The camera sees some dancers from the front, some from behind and some side-on, so
    left and right cross in the picture (cosine of the chest's direction to the camera)."""
    scene, frames = scene_poses
    facing = np.array([facing_camera(p, scene.camera.centre) for p in frames[0]])
    assert facing.max() > 0.8 and facing.min() < -0.8
    assert (np.abs(facing) < 0.5).any()
