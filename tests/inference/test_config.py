"""The pre-labelling config: strict validation that names the field, and the mapping of model
channels onto the project's skeleton (common practice, no source; configs are synthetic)."""

import json
from pathlib import Path

import pytest

from app.errors import BadInput
from app.inference.config import (
    config_from_dict,
    default_config,
    load_config,
    resolve_channels,
)
from app.model import coco_body

SK = coco_body()
EXAMPLE = Path(__file__).resolve().parents[2] / "assets" / "prelabel-config.example.json"


def _good(**change):
    data = {"input_width": 64, "input_height": 48, "stride": 4,
            "outputs": {"confidence_maps": "heat", "pafs": {"output": 0, "channels": [3, 7]}},
            "joint_order": ["nose", None, "left_eye"],
            "limb_order": [["left_eye", "nose"], None]}
    data.update(change)
    return data


def test_the_documented_example_loads_and_covers_the_coco_skeleton():
    cfg = load_config(EXAMPLE)
    channels = resolve_channels(cfg, SK)
    assert channels.missing_joints == [] and channels.missing_limbs == []
    assert channels.model_joints == 19 and channels.model_limbs == 22
    # The example's fields point away from the chest: ankle-knee is read negated.
    ankle_knee = SK.limbs.index((SK.index("left_ankle"), SK.index("left_knee")))
    assert channels.limb_sign[ankle_knee] == -1
    assert cfg.joint_order[channels.joint_source[SK.index("left_wrist")]] == "left_wrist"


@pytest.mark.parametrize("change, words", [
    ({"colour_order": "rgb"}, "field colour_order: Extra inputs are not permitted"),
    ({"stride": 0}, "field stride:"),
    ({"resize": "squash"}, "field resize:"),
    ({"input_width": None}, "input_width is required with resize 'letterbox'"),
    ({"resize": "fit-height"}, "input_width is not used with resize 'fit-height'"),
    ({"mean": [1, 2]}, "field mean:"),
    ({"scale": 0}, "scale must not be 0"),
    ({"extra_scales": [0.5, 9.0]}, "extra_scales.1: 9.0 is not between 0.1 and 4"),
    ({"joint_order": ["nose", "nose"]}, "joint_order names 'nose' twice"),
    ({"joint_order": []}, "field joint_order:"),
    ({"limb_order": [["nose"]]}, "field limb_order.0:"),
    ({"outputs": {"confidence_maps": 0}}, "field outputs.pafs: Field required"),
    ({"outputs": {"confidence_maps": 0, "pafs": {"output": 0, "channels": [4, 2]}}},
     "channels [4, 2] is not a range"),
    ({"grouping": {"min_parts": 0}}, "field grouping.min_parts:"),
    ({"grouping": {"matching": "best"}}, "field grouping.matching:"),
])
def test_a_wrong_field_is_refused_with_its_name(tmp_path, change, words):
    path = tmp_path / "model.json"
    path.write_text(json.dumps(_good(**change)))
    with pytest.raises(BadInput) as err:
        load_config(path)
    assert str(err.value).startswith(f"{path}: ") and words in str(err.value)


def test_unreadable_files_are_refused(tmp_path):
    with pytest.raises(BadInput, match="cannot read the config"):
        load_config(tmp_path / "none.json")
    (tmp_path / "bad.json").write_text("{not json")
    with pytest.raises(BadInput, match="not valid JSON"):
        load_config(tmp_path / "bad.json")


def test_channels_map_onto_the_skeleton():
    cfg = config_from_dict(_good())
    m = resolve_channels(cfg, SK)
    assert m.joint_source[SK.index("nose")] == 0 and m.joint_source[SK.index("left_eye")] == 2
    assert (m.joint_source >= 0).sum() == 2 and m.model_joints == 3
    nose_eye = SK.limbs.index((SK.index("nose"), SK.index("left_eye")))
    assert m.limb_source[nose_eye] == 0 and m.limb_sign[nose_eye] == -1.0
    assert (m.limb_source >= 0).sum() == 1
    # A model limb that is not a project limb is skipped, not an error.
    cfg = config_from_dict(_good(limb_order=[["nose", "left_ankle"]]))
    assert (resolve_channels(cfg, SK).limb_source < 0).all()


@pytest.mark.parametrize("change, words", [
    ({"joint_order": ["nose", "neck"]}, "field joint_order.1: the project's skeleton "
                                        "'coco-body-17' has no joint 'neck'"),
    ({"limb_order": [["nose", "chin"]]}, "field limb_order.0: the project's skeleton "
                                         "'coco-body-17' has no joint 'chin'"),
    ({"limb_order": [["nose", "left_eye"], ["left_eye", "nose"]]},
     "field limb_order.1: limb left_eye-nose is also field 0"),
])
def test_names_the_skeleton_lacks_are_refused(change, words):
    with pytest.raises(BadInput) as err:
        resolve_channels(config_from_dict(_good(**change)), SK, where="m.json")
    assert str(err.value).startswith("m.json: ") and words in str(err.value)


def test_the_default_config_reads_channels_in_project_order():
    m = resolve_channels(default_config(SK), SK)
    assert m.joint_source.tolist() == list(range(17))
    assert m.limb_source.tolist() == list(range(19)) and (m.limb_sign == 1).all()
