"""Running ONNX models through OpenCV's DNN module, on colour-dot models built in the test
(tests/inference/onnx_models.py): the maps they give are known in advance, so loading,
preprocessing, output mapping, geometry and multi-scale averaging run for real and are checked
against numbers worked out by hand. Images and models are synthetic.

The grouping is Cao et al., "Realtime Multi-Person 2D Pose Estimation using Part Affinity
Fields", CVPR 2017, Sec. 2.4, through app.analysis.association.
"""

from pathlib import Path

import numpy as np
import pytest

from app.analysis.association import find_peaks, group_people
from app.errors import BadInput
from app.inference.config import config_from_dict
from app.inference.network import PoseNetwork
from app.model.skeleton import skeleton_from_dict
from tests.inference.onnx_models import blob_image, colour_dot_model

#: A synthetic skeleton: three joints the models see and one ("tip") they do not.
SK = skeleton_from_dict({
    "name": "synthetic-4",
    "joints": [{"name": n, "sigma": 0.05} for n in ("top", "middle", "bottom", "tip")],
    "limbs": [["top", "middle"], ["middle", "bottom"], ["bottom", "tip"]],
})
RED, GREEN, BLUE = 0, 1, 2

#: The model's channels: a background constant (skipped), then bottom (blue), top (red),
#: middle (green); its fields: middle->top (pointing up) and middle->bottom (pointing down),
#: laid out x, x, y, y.
MAPS_FROM = [0.9, BLUE, RED, GREEN]
FIELDS = [0.0, 0.0, -1.0, 1.0]


def _config(**change):
    data = {"input_width": 80, "input_height": 80, "resize": "letterbox", "stride": 4,
            "channel_order": "bgr", "mean": [10, 20, 30], "scale": [0.5, 0.25, 0.125],
            "outputs": {"confidence_maps": "heat", "pafs": "field"},
            "joint_order": [None, "bottom", "top", "middle"],
            "limb_order": [["middle", "top"], ["middle", "bottom"]], "paf_layout": "x-then-y",
            "grouping": {"min_parts": 2}}
    data.update(change)
    return config_from_dict(data)


@pytest.fixture
def model(tmp_path):
    return colour_dot_model(tmp_path / "dots.onnx", MAPS_FROM, FIELDS, stride=4,
                            channel_order="bgr", mean=(10, 20, 30), scale=(0.5, 0.25, 0.125))


def _people_at(xs, size=(160, 120), dy=(31.4, 62.2, 93.6)):
    """Upright synthetic people (top above middle above bottom) at the given x positions."""
    truth = np.array([[(x, dy[0]), (x + 2.0, dy[1]), (x + 1.0, dy[2])] for x in xs])
    dots = [(x, y, c) for person in truth for (x, y), c in zip(person, (RED, GREEN, BLUE))]
    return truth, blob_image(*size, dots, sigma=4.0)


def test_peaks_come_out_where_they_were_drawn_and_group_into_people(model):
    """Three synthetic people in a 160 x 120 frame letterboxed into 80 x 80 (the model's stride
    4 is 8 image pixels): every joint is found within a quarter of that stride of where it was
    drawn, the skipped background channel does not leak in, the unseen joint stays empty, and
    the grouping puts each person back together."""
    truth, image = _people_at([30.3, 80.7, 131.2])
    net = PoseNetwork(model, _config(), SK)
    maps = net.maps(image)
    assert maps.stride == 8 and maps.confidence_maps.shape == (4, 15, 20)
    assert maps.pafs.shape == (3, 2, 15, 20)
    assert float(maps.confidence_maps.max()) < 0.9   # not the background constant
    assert not maps.confidence_maps[3].any() and not maps.pafs[2].any()
    peaks = find_peaks(maps.confidence_maps, stride=maps.stride)
    for j in range(3):
        found = peaks[j][np.argsort(peaks[j][:, 0]), :2]
        np.testing.assert_allclose(found, truth[:, j], atol=2.0)
    people = group_people(maps.confidence_maps, maps.pafs, SK.limb_array, stride=maps.stride,
                          min_parts=2)
    assert len(people) == 3
    for person in people:
        n = int(np.argmin(np.abs(truth[:, 0, 0] - person[0, 0])))
        np.testing.assert_allclose(person[:3, :2], truth[n], atol=2.0)
        assert np.isnan(person[3, 0]) and person[3, 2] == 0


def test_fields_are_reordered_and_a_reversed_limb_is_negated(model):
    """The model's middle->top field points up; the project's limb is top->middle, so the
    stored field points down (+y) wherever the model's is defined. middle->bottom is read as
    is; bottom->tip has no model field and stays zero."""
    _, image = _people_at([80.0])
    maps = PoseNetwork(model, _config(), SK).maps(image)
    np.testing.assert_allclose(maps.pafs[0, 0], 0.0, atol=1e-6)
    np.testing.assert_allclose(maps.pafs[0, 1], 1.0, atol=1e-5)
    np.testing.assert_allclose(maps.pafs[1, 1], 1.0, atol=1e-5)
    assert not maps.pafs[2].any()


def test_interleaved_layout_and_one_concatenated_output(tmp_path):
    """The same maps from a model with one output holding maps then fields (x, y per field),
    read with channel ranges."""
    interleaved = [0.0, -1.0, 0.0, 1.0]
    path = colour_dot_model(tmp_path / "one.onnx", MAPS_FROM, interleaved, stride=4,
                            channel_order="bgr", mean=(10, 20, 30), scale=(0.5, 0.25, 0.125),
                            outputs=[("all", 8)])
    cfg = _config(outputs={"confidence_maps": {"output": "all", "channels": [0, 4]},
                           "pafs": {"output": 0, "channels": [4, 8]}},
                  paf_layout="xy-interleaved")
    _, image = _people_at([40.0, 110.0])
    maps = PoseNetwork(path, cfg, SK).maps(image)
    np.testing.assert_allclose(maps.pafs[0, 1], 1.0, atol=1e-5)
    np.testing.assert_allclose(maps.pafs[1, 1], 1.0, atol=1e-5)
    np.testing.assert_allclose(maps.pafs[:2, 0], 0.0, atol=1e-6)
    assert len(find_peaks(maps.confidence_maps, stride=maps.stride)[0]) == 2


def test_preprocessing_is_what_the_model_expects(tmp_path, model):
    """The colour-dot model undoes exactly the configured normalisation, so the top joint's
    map reads the red channel as a fraction of 255: a flat red frame of 204 gives 0.8. With
    the channel order or the normalisation wrong the map reads something else."""
    image = np.zeros((120, 160, 3), np.uint8)
    image[..., 2] = 204
    maps = PoseNetwork(model, _config(), SK).maps(image)
    top = maps.confidence_maps[0]
    np.testing.assert_allclose(top[4:-4, 4:-4], 0.8, atol=1e-4)
    assert abs(float(maps.confidence_maps[2].max())) < 1e-4       # blue is empty
    wrong_order = PoseNetwork(model, _config(channel_order="rgb"), SK).maps(image)
    assert abs(float(wrong_order.confidence_maps[0].max())) < 0.2
    wrong_mean = PoseNetwork(model, _config(mean=[0, 0, 0]), SK).maps(image)
    assert abs(float(wrong_mean.confidence_maps[0][6, 6]) - 0.8) > 0.05


@pytest.mark.parametrize("resize, size, config_size", [
    ("stretch", (200, 90), {"input_width": 80, "input_height": 48}),
    ("letterbox", (90, 160), {"input_width": 80, "input_height": 80}),
    ("fit-height", (230, 100), {"input_height": 56}),
])
def test_geometry_of_every_resize_rule(model, resize, size, config_size):
    """A joint drawn at p comes out at p within a quarter of the model's stride in image
    pixels, whatever the resize rule (synthetic frames of odd shapes)."""
    w, h = size
    xs = [0.25 * w, 0.5 * w, 0.75 * w]
    truth, image = _people_at(xs, size=size, dy=(0.25 * h, 0.5 * h, 0.75 * h))
    cfg = _config(resize=resize, **({"input_width": None} | config_size))
    net = PoseNetwork(model, cfg, SK)
    maps = net.maps(image)
    peaks = find_peaks(maps.confidence_maps, stride=maps.stride)
    image_stride = cfg.stride * max(w, h) / 80 if resize != "fit-height" else 4 * h / 56
    for j in range(3):
        found = peaks[j][np.argsort(peaks[j][:, 0]), :2]
        assert found.shape == (3, 2)
        np.testing.assert_allclose(found, truth[:, j], atol=image_stride / 4)


def test_extra_scales_average_the_runs(model):
    """With extra scale 2 the maps are the mean of the run at 80 x 80 and the run at
    160 x 160, both read at the same grid (worked out by running each alone)."""
    _, image = _people_at([30.0, 90.0, 130.0])
    both = PoseNetwork(model, _config(extra_scales=[2.0]), SK).maps(image)
    one = PoseNetwork(model, _config(), SK).maps(image)
    two = PoseNetwork(model, _config(input_width=160, input_height=160, map_stride=8),
                      SK).maps(image)
    assert both.stride == one.stride == two.stride == 8
    np.testing.assert_allclose(both.confidence_maps,
                               (one.confidence_maps + two.confidence_maps) / 2, atol=1e-5)
    np.testing.assert_allclose(both.pafs, (one.pafs + two.pafs) / 2, atol=1e-5)
    assert not np.allclose(one.confidence_maps, two.confidence_maps, atol=1e-2)


def test_a_model_that_does_not_load_is_refused(tmp_path):
    bad = tmp_path / "bad.onnx"
    bad.write_bytes(b"not a model at all" * 10)
    with pytest.raises(BadInput) as err:
        PoseNetwork(bad, _config(), SK)
    assert str(err.value).startswith(f"{bad}: OpenCV cannot load the model")
    with pytest.raises(BadInput, match="no such model file"):
        PoseNetwork(tmp_path / "none.onnx", _config(), SK)


@pytest.mark.parametrize("change, words", [
    ({"outputs": {"confidence_maps": "maps", "pafs": "field"}},
     "field outputs.confidence_maps: the model has no output 'maps' (its outputs: heat, field)"),
    ({"outputs": {"confidence_maps": 0, "pafs": 2}},
     "field outputs.pafs: the model has 2 outputs (heat, field); there is no output 2"),
    ({"joint_order": ["bottom", "top", "middle"]},
     "field joint_order: 3 entries, but the confidence maps have 4 channels"),
    ({"limb_order": [["middle", "top"]]},
     "field limb_order: 1 entry needs 2 field channels, but the model gives 4"),
    ({"stride": 8}, "field stride: the outputs are 20x20 cells for a 80x80 input, which does "
                    "not fit stride 8"),
    ({"outputs": {"confidence_maps": {"output": "heat", "channels": [0, 6]}, "pafs": 1}},
     "field outputs.confidence_maps.channels: [0, 6] reaches past the 4 channels"),
])
def test_outputs_that_do_not_fit_the_config_are_refused_naming_the_field(model, change, words):
    _, image = _people_at([80.0])
    with pytest.raises(BadInput) as err:
        PoseNetwork(model, _config(**change), SK, config_where="m.json").maps(image)
    assert str(err.value).startswith("m.json: ") and words in str(err.value)


def test_a_wrong_input_name_is_refused_naming_the_model(model):
    _, image = _people_at([80.0])
    net = PoseNetwork(model, _config(input_name="pixels"), SK)
    with pytest.raises(BadInput) as err:
        net.maps(image, where="frame 3")
    assert str(err.value).startswith(f"{Path(model)}: the model failed on a 80x80 input "
                                     "(frame 3)")
