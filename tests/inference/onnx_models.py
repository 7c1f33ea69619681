"""Small ONNX pose models built inside the tests with the ``onnx`` package (synthetic: no
trained weights, no downloaded files).

A *colour-dot model* reads joints off the colours of the input: every confidence-map channel is
one colour channel of the frame (in 0-1, the normalisation undone by a 1 x 1 convolution), every
field channel a constant, and an average pool of the stride's size takes the result to the
output grid. Draw a blob of a joint's colour at a point and the model's map of that joint has
its peak there, so where the maps come out tells whether preprocessing, output mapping and
geometry are right.
"""

from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path

import numpy as np
import onnx
from onnx import TensorProto, helper, numpy_helper

#: An opset OpenCV's ONNX importer reads.
OPSET = 13


def colour_dot_model(
    path: Path,
    maps_from: Sequence[int | float],
    fields: Sequence[float],
    stride: int,
    channel_order: str = "rgb",
    mean: Sequence[float] = (0.0, 0.0, 0.0),
    scale: Sequence[float] = (1.0, 1.0, 1.0),
    outputs: Sequence[tuple[str, int]] = (("heat", -1), ("field", -1)),
) -> Path:
    """Write a colour-dot model to ``path``.

    Parameters
    ----------
    maps_from
        One entry per confidence-map channel: ``"r"``/``"g"``/``"b"`` are given as colour
        indices 0, 1, 2 (red, green, blue of the frame) read through the normalisation; a float
        is a constant channel of that value.
    fields
        One constant per field channel (in the model's own layout).
    channel_order
        The order of the input's channels, as in the config.
    mean, scale
        The config's normalisation, which the model undoes.
    outputs
        ``(name, channel count)`` pairs splitting the ``len(maps_from) + len(fields)`` channels
        into named outputs (-1 for the natural split: maps, then fields); one pair gives one
        concatenated output.
    """
    n_maps, n_fields = len(maps_from), len(fields)
    total = n_maps + n_fields
    weight = np.zeros((total, 3, 1, 1), np.float32)
    bias = np.zeros(total, np.float32)
    input_channel = {"rgb": {0: 0, 1: 1, 2: 2}, "bgr": {0: 2, 1: 1, 2: 0}}[channel_order]
    for o, src in enumerate(maps_from):
        if isinstance(src, int):
            i = input_channel[src]
            # pixel / 255 = (input / scale + mean) / 255
            weight[o, i, 0, 0] = 1.0 / (255.0 * scale[i])
            bias[o] = mean[i] / 255.0
        else:
            bias[o] = float(src)
    bias[n_maps:] = np.asarray(fields, np.float32)
    nodes = [
        helper.make_node("Conv", ["input", "w", "b"], ["mixed"], kernel_shape=[1, 1]),
        helper.make_node("AveragePool", ["mixed"], ["pooled"], kernel_shape=[stride, stride],
                         strides=[stride, stride]),
    ]
    sizes = [n if n >= 0 else (n_maps if k == 0 else n_fields) for k, (_, n) in
             enumerate(outputs)]
    names = [name for name, _ in outputs]
    inits = [numpy_helper.from_array(weight, "w"), numpy_helper.from_array(bias, "b")]
    if len(outputs) == 1:
        nodes.append(helper.make_node("Identity", ["pooled"], [names[0]]))
    else:
        inits.append(numpy_helper.from_array(np.asarray(sizes, np.int64), "split"))
        nodes.append(helper.make_node("Split", ["pooled", "split"], names, axis=1))
    graph = helper.make_graph(
        nodes, "colour_dots",
        [helper.make_tensor_value_info("input", TensorProto.FLOAT, [1, 3, "height", "width"])],
        [helper.make_tensor_value_info(n, TensorProto.FLOAT, [1, s, "rows", "cols"])
         for n, s in zip(names, sizes)],
        inits)
    model = helper.make_model(graph, opset_imports=[helper.make_opsetid("", OPSET)])
    model.ir_version = 8
    onnx.checker.check_model(model)
    onnx.save(model, str(path))
    return path


def blob_image(width: int, height: int, dots: Sequence[tuple[float, float, int]],
               sigma: float, peak: float = 255.0) -> np.ndarray:
    """A black ``(height, width, 3)`` uint8 BGR image with a Gaussian blob of colour ``c``
    (0 red, 1 green, 2 blue) and standard deviation ``sigma`` at each ``(x, y, c)``."""
    ys, xs = np.mgrid[0:height, 0:width]
    out = np.zeros((height, width, 3))
    bgr = {0: 2, 1: 1, 2: 0}
    for x, y, c in dots:
        g = peak * np.exp(-((xs - x) ** 2 + (ys - y) ** 2) / (2 * sigma**2))
        out[:, :, bgr[c]] = np.maximum(out[:, :, bgr[c]], g)
    return np.clip(np.round(out), 0, 255).astype(np.uint8)
