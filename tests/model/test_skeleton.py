import json

import numpy as np
import pytest

from app.errors import BadInput
from app.model.skeleton import Side, coco_body, load_skeleton, skeleton_from_dict


def test_coco_sigmas_equal_pycocotools():
    """Source: pycocotools' ``cocoeval.Params(iouType='keypoints').kpt_oks_sigmas``."""
    from pycocotools.cocoeval import Params

    ref = Params(iouType="keypoints").kpt_oks_sigmas
    np.testing.assert_allclose(coco_body().sigma_array, ref, rtol=0, atol=1e-12)


def test_coco_layout_counts_and_sides():
    """COCO person category: 17 keypoints, 19 limbs (from memory of the COCO 2017 files)."""
    sk = coco_body()
    assert sk.num_joints == 17 and len(sk.limbs) == 19
    assert sk.sides[0] is Side.CENTRE
    assert sk.sides[sk.index("left_knee")] is Side.LEFT
    assert sk.sides[sk.index("right_knee")] is Side.RIGHT


def test_flip_index_swaps_named_pairs():
    sk = coco_body()
    flip = sk.flip_index
    for name in sk.joints:
        other = sk.joints[flip[sk.index(name)]]
        if name.startswith("left_"):
            assert other == "right_" + name[5:]
        elif name.startswith("right_"):
            assert other == "left_" + name[6:]
        else:
            assert other == name
    np.testing.assert_array_equal(flip[flip], np.arange(17))


def test_custom_skeleton_from_json(tmp_path):
    path = tmp_path / "sk.json"
    path.write_text(json.dumps({
        "name": "arms",
        "joints": [{"name": "neck", "sigma": 0.05},
                   {"name": "left_hand", "sigma": 0.06}, {"name": "right_hand", "sigma": 0.06}],
        "limbs": [["neck", "left_hand"], [0, 2]],
    }))
    sk = load_skeleton(path)
    assert sk.limbs == ((0, 1), (0, 2))
    assert sk.flip_pairs == ((1, 2),)
    assert skeleton_from_dict(sk.to_dict()) == sk


@pytest.mark.parametrize("data, words", [
    ({"name": "x", "joints": []}, "joints"),
    ({"name": "x", "joints": [{"name": "a", "sigma": 0.1}, {"name": "a", "sigma": 0.1}]},
     "twice"),
    ({"name": "x", "joints": [{"name": "a", "sigma": -1}]}, "joints.0.sigma"),
    ({"name": "x", "joints": [{"name": "a", "sigma": 0.1}], "limbs": [["a", "b"]]},
     "unknown joint 'b'"),
    ({"name": "x", "joints": [{"name": "a", "sigma": 0.1}], "limbs": [["a", "a"]]}, "itself"),
    ({"name": "x", "joints": [{"name": "left_a", "sigma": 0.1}]}, "no right partner"),
    ({"name": "x", "joints": [{"name": "a", "sigma": 0.1, "colour": "red"}]}, "colour"),
])
def test_bad_skeletons_are_refused_with_the_field(data, words):
    with pytest.raises(BadInput) as err:
        skeleton_from_dict(data, where="sk.json")
    assert words in str(err.value) and "sk.json" in str(err.value)


def test_unreadable_skeleton_file(tmp_path):
    path = tmp_path / "sk.json"
    path.write_text("{ not json")
    with pytest.raises(BadInput, match="not valid JSON"):
        load_skeleton(path)
