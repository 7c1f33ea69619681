"""From a frame to the network input and from the network's output grid back to the frame.

Coordinates are those of the labels (:mod:`app.model.labels`): pixels, x to the right, y down,
integer values on pixel centres. Resizing an image of ``w`` columns to ``w'`` columns by OpenCV
maps the image point ``x`` to ``(x + 0.5) * w' / w - 0.5`` (pixel centres aligned, the
convention of ``cv2.resize``); a letterbox then shifts it by the left padding. The network's
output cell ``(r, c)`` stands for the input point ``(c * S + (S - 1) / 2, r * S + (S - 1) / 2)``
at stride ``S``, and the maps kept in the project use the same rule on the image at their own
stride (the grid of cell centres of :mod:`app.analysis.targets`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import cv2
import numpy as np

from app.analysis.targets import cell_centres, grid_shape
from app.inference.config import PrelabelConfig

__all__ = [
    "InputGeometry",
    "fields_to_image",
    "input_geometry",
    "interpolation_matrix",
    "kept_map_stride",
    "prepare_input",
    "resample_to_grid",
]


@dataclass(frozen=True)
class InputGeometry:
    """Where a frame sits in the network input.

    The frame is resized to ``content_width x content_height`` pixels and placed with its
    top-left pixel at ``(offset_x, offset_y)`` of an ``input_width x input_height`` input.
    ``scale_x = content_width / frame width`` and likewise ``scale_y``.
    """

    input_width: int
    input_height: int
    content_width: int
    content_height: int
    offset_x: int
    offset_y: int
    scale_x: float
    scale_y: float

    def to_input(self, points: np.ndarray) -> np.ndarray:
        """``(n, 2)`` image points -> input points: ``q = (p + 0.5) * scale - 0.5 + offset``.

        Examples
        --------
        >>> g = input_geometry((200, 100), _letterbox(100, 100))
        >>> g.to_input(np.array([[0.0, 0.0], [199.0, 99.0]])).tolist()
        [[-0.25, 24.75], [99.25, 74.25]]
        """
        p = np.asarray(points, dtype=np.float64)
        scale = np.array([self.scale_x, self.scale_y])
        offset = np.array([self.offset_x, self.offset_y], dtype=np.float64)
        return (p + 0.5) * scale - 0.5 + offset


def _letterbox(width: int, height: int) -> PrelabelConfig:
    """A minimal letterbox config (for the examples)."""
    return PrelabelConfig.model_validate({
        "input_width": width, "input_height": height, "stride": 4,
        "outputs": {"confidence_maps": 0, "pafs": 1}, "joint_order": ["nose"]})


def input_geometry(image_size: tuple[int, int], config: PrelabelConfig,
                   scale: float = 1.0) -> InputGeometry:
    """Place a frame of ``image_size = (width, height)`` in the network input at ``scale``.

    Parameters
    ----------
    image_size
        ``(width, height)`` of the frame in pixels.
    config
        Gives the input size, the resize rule and the stride.
    scale
        Multiplies the configured input size (1 for the base run; rounded to whole pixels).

    Returns
    -------
    InputGeometry

    Notes
    -----
    - ``stretch``: the content is the whole input, ``round(s * input_width) x
      round(s * input_height)``.
    - ``letterbox``: one factor ``f = min(W / w, H / h)`` for both axes; the content is
      ``round(f w) x round(f h)`` (at most the input), centred with the padding split evenly
      (the extra pixel of an odd split on the right or bottom).
    - ``fit-height``: ``H = round(s * input_height)``, ``f = H / h``; the content is
      ``round(f w)`` wide and the input width is that rounded up to a multiple of the stride,
      padded on the right.

    Examples
    --------
    >>> g = input_geometry((1920, 1080), _letterbox(368, 368))
    >>> g.content_width, g.content_height, g.offset_x, g.offset_y
    (368, 207, 0, 80)
    """
    width, height = int(image_size[0]), int(image_size[1])
    if width <= 0 or height <= 0:
        raise ValueError(f"image size {width}x{height} is empty")
    in_h = max(1, round(scale * config.input_height))
    if config.resize == "fit-height":
        f = in_h / height
        cw, ch = max(1, round(f * width)), in_h
        in_w = max(config.stride, math.ceil(cw / config.stride) * config.stride)
        ox = oy = 0
    else:
        assert config.input_width is not None  # the config's validator makes sure
        in_w = max(1, round(scale * config.input_width))
        if config.resize == "stretch":
            cw, ch, ox, oy = in_w, in_h, 0, 0
        else:
            f = min(in_w / width, in_h / height)
            cw = min(in_w, max(1, round(f * width)))
            ch = min(in_h, max(1, round(f * height)))
            ox, oy = (in_w - cw) // 2, (in_h - ch) // 2
    return InputGeometry(in_w, in_h, cw, ch, ox, oy, cw / width, ch / height)


def prepare_input(image: np.ndarray, geometry: InputGeometry,
                  config: PrelabelConfig) -> np.ndarray:
    """The network input for one frame: ``(1, 3, H, W)`` float32, NCHW.

    Parameters
    ----------
    image
        ``(h, w, 3)`` uint8 BGR, as OpenCV decodes it.
    geometry
        From :func:`input_geometry` for this image's size.
    config
        Gives the channel order, ``mean``, ``scale`` and ``pad_value``.

    Returns
    -------
    numpy.ndarray

    Notes
    -----
    The frame is resized to the content size (``cv2.INTER_AREA`` when shrinking, which averages
    the source pixels under each target pixel; ``cv2.INTER_LINEAR`` when enlarging), placed on
    a canvas of ``pad_value``, put in ``channel_order``, then
    ``input = (pixel - mean) * scale`` per channel.

    Examples
    --------
    >>> cfg = _letterbox(16, 8).model_copy(update={"mean": (10.0, 20.0, 30.0), "scale": 0.5})
    >>> image = np.zeros((8, 16, 3), np.uint8); image[..., 0] = 100     # blue
    >>> blob = prepare_input(image, input_geometry((16, 8), cfg), cfg)
    >>> blob.shape, blob[0, :, 0, 0].tolist()                           # R, G, B
    ((1, 3, 8, 16), [-5.0, -10.0, 35.0])
    """
    g = geometry
    shrink = g.content_width < image.shape[1] or g.content_height < image.shape[0]
    if (g.content_width, g.content_height) == (image.shape[1], image.shape[0]):
        content = image
    else:
        content = cv2.resize(image, (g.content_width, g.content_height),
                             interpolation=cv2.INTER_AREA if shrink else cv2.INTER_LINEAR)
    canvas = np.full((g.input_height, g.input_width, 3), config.pad_value, dtype=np.float32)
    canvas[g.offset_y : g.offset_y + g.content_height,
           g.offset_x : g.offset_x + g.content_width] = content
    if config.channel_order == "rgb":
        canvas = canvas[:, :, ::-1]
    mean = np.asarray(config.mean, dtype=np.float32)
    scale = np.asarray(config.scale_triple(), dtype=np.float32)
    blob = (canvas - mean) * scale
    return np.ascontiguousarray(blob.transpose(2, 0, 1)[None], dtype=np.float32)


def interpolation_matrix(coords: np.ndarray, size: int) -> np.ndarray:
    """Linear interpolation as a matrix: row ``i`` reads a length-``size`` signal at
    ``coords[i]`` (in sample units; beyond the ends the end value is taken).

    Parameters
    ----------
    coords
        ``(n,)`` float positions.
    size
        Length of the signal.

    Returns
    -------
    numpy.ndarray
        ``(n, size)`` float64; each row holds at most two non-zero weights summing to 1.

    Notes
    -----
    ``t = clip(x, 0, size - 1)``, ``i = floor(t)``; the weights are ``1 - (t - i)`` at ``i``
    and ``t - i`` at ``i + 1``. Applying one matrix per axis, ``Wy @ M @ Wx.T``, is bilinear
    interpolation of the map ``M`` (common practice, no source).

    Examples
    --------
    >>> interpolation_matrix(np.array([-1.0, 0.25, 2.0]), 3).tolist()
    [[1.0, 0.0, 0.0], [0.75, 0.25, 0.0], [0.0, 0.0, 1.0]]
    """
    t = np.clip(np.asarray(coords, dtype=np.float64), 0.0, size - 1)
    i = np.minimum(np.floor(t).astype(np.int64), max(size - 2, 0))
    frac = t - i
    out = np.zeros((t.size, size))
    rows = np.arange(t.size)
    if size == 1:
        out[:, 0] = 1.0
        return out
    out[rows, i] = 1.0 - frac
    out[rows, i + 1] += frac
    return out


def resample_to_grid(maps: np.ndarray, geometry: InputGeometry, model_stride: int,
                     image_size: tuple[int, int], map_stride: int) -> np.ndarray:
    """Read the network's output grid at the cells of the frame's map grid.

    Parameters
    ----------
    maps
        ``(C, h, w)`` on the network's output grid.
    geometry
        Where the frame sat in the input.
    model_stride
        Input pixels per output cell.
    image_size
        ``(width, height)`` of the frame.
    map_stride
        Image pixels per cell of the result.

    Returns
    -------
    numpy.ndarray
        ``(C, H, W)`` float32 with ``H = ceil(height / map_stride)``, ``W = ceil(width /
        map_stride)``.

    Notes
    -----
    Cell ``(R, C)`` of the result stands for the image point
    ``P = (C s + (s - 1) / 2, R s + (s - 1) / 2)`` (``s = map_stride``); its input point is
    ``q = (P + 0.5) * scale - 0.5 + offset`` (undoing the resize and the letterbox padding), and
    its position on the output grid is ``(q - (S - 1) / 2) / S`` (``S = model_stride``). The
    maps are read there bilinearly (:func:`interpolation_matrix`), the edge value beyond the
    last cell centre.

    Examples
    --------
    >>> cfg = _letterbox(8, 8)
    >>> g = input_geometry((16, 8), cfg)    # content 8 x 4 at offset (0, 2): cells at y = 0.5
    >>> out_grid = np.zeros((1, 2, 2)); out_grid[0, 0, 1] = 1.0
    >>> resample_to_grid(out_grid, g, 4, (16, 8), 8).round(3).tolist()
    [[[0.0, 0.5]]]
    """
    height, width = grid_shape(image_size, map_stride)
    xs = cell_centres(width, map_stride)
    ys = cell_centres(height, map_stride)
    qx = (xs + 0.5) * geometry.scale_x - 0.5 + geometry.offset_x
    qy = (ys + 0.5) * geometry.scale_y - 0.5 + geometry.offset_y
    half = (model_stride - 1) / 2.0
    wx = interpolation_matrix((qx - half) / model_stride, maps.shape[2])
    wy = interpolation_matrix((qy - half) / model_stride, maps.shape[1])
    out = np.matmul(np.matmul(wy, maps.astype(np.float64)), wx.T)
    return out.astype(np.float32)


def fields_to_image(pafs: np.ndarray, geometry: InputGeometry) -> np.ndarray:
    """Turn part affinity vectors measured in the network input into image directions.

    Parameters
    ----------
    pafs
        ``(L, 2, h, w)``: x and y components in input pixels' axes.
    geometry
        Where the frame sat in the input (only the scale factors matter).

    Returns
    -------
    numpy.ndarray
        ``(L, 2, h, w)`` float32: each vector turned to the image direction it stands for,
        its length kept.

    Notes
    -----
    A displacement ``d`` in the image is ``(d_x scale_x, d_y scale_y)`` in the input, so a field
    vector ``v`` in the input points along ``(v_x / scale_x, v_y / scale_y)`` in the image. The
    length is kept (a unit vector on a limb stays a unit vector; an average stays the same
    length), so with equal scales (letterbox) nothing changes.

    Examples
    --------
    >>> g = InputGeometry(10, 10, 10, 10, 0, 0, 1.0, 0.5)   # the image was squashed vertically
    >>> v = np.zeros((1, 2, 1, 1)); v[0, :, 0, 0] = [np.sqrt(0.5), np.sqrt(0.5)]
    >>> fields_to_image(v, g)[0, :, 0, 0].round(4).tolist()
    [0.4472, 0.8944]
    """
    if math.isclose(geometry.scale_x, geometry.scale_y, rel_tol=1e-12):
        return pafs.astype(np.float32, copy=False)
    vx = pafs[:, 0].astype(np.float64) / geometry.scale_x
    vy = pafs[:, 1].astype(np.float64) / geometry.scale_y
    length = np.hypot(pafs[:, 0], pafs[:, 1])
    turned = np.hypot(vx, vy)
    with np.errstate(invalid="ignore", divide="ignore"):
        factor = np.where(turned > 0, length / turned, 0.0)
    return np.stack([vx * factor, vy * factor], axis=1).astype(np.float32)


def kept_map_stride(image_size: tuple[int, int], config: PrelabelConfig) -> int:
    """Image pixels per cell of the maps kept for a frame of ``image_size = (width, height)``:
    the config's ``map_stride``, else the model's stride in image pixels at scale 1, rounded
    (between 1 and 256).

    Examples
    --------
    >>> kept_map_stride((1920, 1080), _letterbox(368, 368))  # 4 input px = 20.9 image px
    21
    """
    if config.map_stride is not None:
        return config.map_stride
    g = input_geometry(image_size, config)
    cells = config.stride / max(g.scale_x, g.scale_y)
    return int(min(256, max(1, round(cells))))
