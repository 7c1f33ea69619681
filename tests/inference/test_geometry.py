"""Frame -> network input -> output grid -> frame: the geometry checked against OpenCV's own
resize and scipy's interpolation. All images are synthetic."""

import numpy as np
import pytest
from scipy import ndimage

from app.inference.config import config_from_dict
from app.inference.geometry import (
    fields_to_image,
    input_geometry,
    interpolation_matrix,
    prepare_input,
    resample_to_grid,
)


def _config(**fields):
    base = {"input_width": 96, "input_height": 64, "stride": 4,
            "outputs": {"confidence_maps": 0, "pafs": 1}, "joint_order": ["nose"]}
    if fields.get("resize") == "fit-height":
        base.pop("input_width")
    base.update(fields)
    return config_from_dict(base)


def _dot(width, height, x, y, sigma=2.0):
    ys, xs = np.mgrid[0:height, 0:width]
    g = 250 * np.exp(-((xs - x) ** 2 + (ys - y) ** 2) / (2 * sigma**2))
    return np.repeat(np.round(g).astype(np.uint8)[:, :, None], 3, axis=2)


def _centroid(channel):
    w = channel.astype(np.float64)
    ys, xs = np.mgrid[0 : w.shape[0], 0 : w.shape[1]]
    return float((w * xs).sum() / w.sum()), float((w * ys).sum() / w.sum())


@pytest.mark.parametrize("resize, size, point", [
    ("letterbox", (200, 100), (57.0, 31.0)),     # wide frame: padded above and below
    ("letterbox", (60, 150), (20.0, 101.0)),     # tall frame: padded left and right
    ("stretch", (200, 100), (150.0, 70.0)),
    ("fit-height", (300, 120), (211.0, 40.0)),
])
def test_a_point_of_the_frame_lands_where_to_input_says(resize, size, point):
    """Reference: OpenCV's cv2.resize itself. A blob drawn at p in the frame has its centroid
    at ``to_input(p)`` in the prepared input (within a tenth of an input pixel), for every
    resize rule; the padding holds the pad value."""
    cfg = _config(resize=resize, scale=1.0, pad_value=7.0)
    g = input_geometry(size, cfg)
    image = _dot(*size, *point, sigma=6.0)
    blob = prepare_input(image, g, cfg)
    assert blob.shape == (1, 3, g.input_height, g.input_width)
    content = blob[0, 0, g.offset_y : g.offset_y + g.content_height,
                   g.offset_x : g.offset_x + g.content_width]
    cx, cy = _centroid(content)
    want = g.to_input(np.array([point]))[0]
    assert cx + g.offset_x == pytest.approx(want[0], abs=0.1)
    assert cy + g.offset_y == pytest.approx(want[1], abs=0.1)
    padding = np.ones((g.input_height, g.input_width), bool)
    padding[g.offset_y : g.offset_y + g.content_height,
            g.offset_x : g.offset_x + g.content_width] = False
    assert np.all(blob[0, :, padding] == 7.0)


def test_letterbox_keeps_the_aspect_ratio_and_centres():
    g = input_geometry((1920, 1080), _config(input_width=368, input_height=368))
    assert (g.content_width, g.content_height) == (368, 207)
    assert (g.offset_x, g.offset_y) == (0, 80)
    assert g.scale_x == pytest.approx(g.scale_y, rel=3e-3)
    g = input_geometry((300, 120), _config(resize="fit-height", input_height=64, stride=8))
    assert (g.content_width, g.input_width, g.input_height) == (160, 160, 64)
    g = input_geometry((310, 120), _config(resize="fit-height", input_height=64, stride=8))
    assert (g.content_width, g.input_width) == (165, 168)  # rounded up to a multiple of 8
    g = input_geometry((200, 100), _config(), scale=1.5)
    assert (g.input_width, g.input_height) == (144, 96)


def test_normalisation_and_channel_order():
    """input = (pixel - mean) * scale per channel, in the configured channel order (common
    practice, no source); worked by hand on a three-colour synthetic image."""
    image = np.zeros((64, 96, 3), np.uint8)
    image[..., 0], image[..., 1], image[..., 2] = 10, 120, 250  # B, G, R
    rgb = _config(mean=[100, 110, 120], scale=[0.5, 0.25, 2.0], channel_order="rgb")
    bgr = _config(mean=[100, 110, 120], scale=[0.5, 0.25, 2.0], channel_order="bgr")
    g = input_geometry((96, 64), rgb)
    assert prepare_input(image, g, rgb)[0, :, 5, 5].tolist() == [(250 - 100) * 0.5,
                                                                 (120 - 110) * 0.25,
                                                                 (10 - 120) * 2.0]
    assert prepare_input(image, g, bgr)[0, :, 5, 5].tolist() == [(10 - 100) * 0.5,
                                                                 (120 - 110) * 0.25,
                                                                 (250 - 120) * 2.0]


def test_interpolation_matrix_agrees_with_scipy():
    """Reference: scipy.ndimage.map_coordinates with order=1 (linear) and mode='nearest'."""
    rng = np.random.default_rng(3)
    signal = rng.random(9)
    coords = rng.uniform(-2, 10, 40)
    want = ndimage.map_coordinates(signal, [coords], order=1, mode="nearest")
    np.testing.assert_allclose(interpolation_matrix(coords, 9) @ signal, want, atol=1e-12)
    np.testing.assert_allclose(interpolation_matrix(coords, 1) @ signal[:1], signal[0])


@pytest.mark.parametrize("resize", ["letterbox", "stretch"])
def test_resampling_to_the_frame_grid_agrees_with_scipy(resize):
    """Reference: scipy.ndimage.map_coordinates (bilinear, edge values kept) at the output
    grid positions worked out by hand from the grid of cell centres (DEVELOPERS.md,
    "Conventions") and the resize rule."""
    rng = np.random.default_rng(5)
    cfg = _config(resize=resize)
    size, model_stride, map_stride = (203, 117), 4, 5
    g = input_geometry(size, cfg)
    maps = rng.random((3, 16, 24))
    got = resample_to_grid(maps, g, model_stride, size, map_stride)
    assert got.shape == (3, 24, 41)  # ceil(117 / 5), ceil(203 / 5)
    rows, cols = np.mgrid[0:24, 0:41]
    px, py = cols * 5 + 2.0, rows * 5 + 2.0
    qx = (px + 0.5) * g.content_width / 203 - 0.5 + g.offset_x
    qy = (py + 0.5) * g.content_height / 117 - 0.5 + g.offset_y
    for c in range(3):
        want = ndimage.map_coordinates(maps[c], [(qy - 1.5) / 4, (qx - 1.5) / 4], order=1,
                                       mode="nearest")
        np.testing.assert_allclose(got[c], want, atol=1e-5)


def test_field_vectors_turn_back_to_image_directions():
    """A unit vector along an image direction d, measured in a stretched input, is
    (d_x s_x, d_y s_y) normalised; turned back it is d again, its length kept."""
    g = input_geometry((200, 100), _config(resize="stretch"))   # s_x = 0.48, s_y = 0.64
    angles = np.linspace(0, 2 * np.pi, 13)
    d = np.stack([np.cos(angles), np.sin(angles)])
    in_input = d * np.array([[g.scale_x], [g.scale_y]])
    in_input = 0.7 * in_input / np.linalg.norm(in_input, axis=0)
    back = fields_to_image(in_input.reshape(1, 2, 1, 13), g).reshape(2, 13)
    np.testing.assert_allclose(back, 0.7 * d, atol=1e-6)
    zero = fields_to_image(np.zeros((2, 2, 3, 3)), g)
    assert not zero.any()
