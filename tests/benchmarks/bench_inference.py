"""Speed of pre-labelling, video extraction and export checking, against baselines from the
same run.

- Pre-labelling one 1920 x 1080 frame through a synthetic convolutional model (random weights,
  368 x 368 letterboxed input, 19 maps and 38 field channels at stride 8, built here with the
  onnx package): the whole per-frame path of :class:`app.inference.network.PoseNetwork`
  (preprocess, run, map, resample to the frame's grid) against the model's bare
  ``net.forward`` on a ready input.
- Extracting every frame of a synthetic 640 x 480 Motion-JPEG clip as JPEG files against
  decoding it with ``cv2.VideoCapture.read`` alone.
- ``check_targets`` on a 1920 x 1080 export against ``np.load`` of the same arrays.

Models, videos and exports are synthetic.
"""

from __future__ import annotations

import json
import shutil
import tempfile
from pathlib import Path

import cv2
import numpy as np
import onnx
from onnx import TensorProto, helper, numpy_helper

from app.inference.config import config_from_dict
from app.inference.geometry import input_geometry, prepare_input
from app.inference.network import PoseNetwork
from app.model.skeleton import coco_body
from tests.benchmarks import common

SK = coco_body()


def _model(path: Path) -> Path:
    """Three stride-2 3 x 3 convolutions (32, 64, 64 channels) and a 1 x 1 head of 57."""
    rng = np.random.default_rng(0)
    nodes, inits, prev, channels = [], [], "input", 3
    for n, out in enumerate((32, 64, 64)):
        w = rng.normal(0, 0.1, (out, channels, 3, 3)).astype(np.float32)
        inits.append(numpy_helper.from_array(w, f"w{n}"))
        nodes += [helper.make_node("Conv", [prev, f"w{n}"], [f"c{n}"], kernel_shape=[3, 3],
                                   strides=[2, 2], pads=[1, 1, 1, 1]),
                  helper.make_node("Relu", [f"c{n}"], [f"r{n}"])]
        prev, channels = f"r{n}", out
    inits += [numpy_helper.from_array(rng.normal(0, 0.05, (57, 64, 1, 1)).astype(np.float32),
                                      "head"),
              numpy_helper.from_array(np.array([19, 38], np.int64), "split")]
    nodes += [helper.make_node("Conv", [prev, "head"], ["out"], kernel_shape=[1, 1]),
              helper.make_node("Split", ["out", "split"], ["maps", "fields"], axis=1)]
    graph = helper.make_graph(
        nodes, "bench",
        [helper.make_tensor_value_info("input", TensorProto.FLOAT, [1, 3, 368, 368])],
        [helper.make_tensor_value_info("maps", TensorProto.FLOAT, [1, 19, 46, 46]),
         helper.make_tensor_value_info("fields", TensorProto.FLOAT, [1, 38, 46, 46])], inits)
    model = helper.make_model(graph, opset_imports=[helper.make_opsetid("", 13)])
    model.ir_version = 8
    onnx.save(model, str(path))
    return path


def _prelabel_row(tmp: Path) -> dict:
    example = json.loads((Path(__file__).resolve().parents[2] / "assets"
                          / "prelabel-config.example.json").read_text())
    example["outputs"] = {"confidence_maps": "maps", "pafs": "fields"}
    example["limb_order"] = example["limb_order"][:19]
    cfg = config_from_dict(example)
    net = PoseNetwork(_model(tmp / "bench.onnx"), cfg, SK)
    frame = np.random.default_rng(1).integers(0, 255, (1080, 1920, 3), dtype=np.uint8)
    blob = prepare_input(frame, input_geometry((1920, 1080), cfg), cfg)
    raw = net._net  # the bare OpenCV network, for the baseline

    def bare() -> object:
        raw.setInput(blob)
        return raw.forward(["maps", "fields"])

    t_ours = common.median_seconds(lambda: net.maps(frame), repeat=15)
    t_bare = common.median_seconds(bare, repeat=15)
    ratio = t_ours / t_bare
    return common.row(
        "prelabel: frame path / bare forward", ratio, "x", "<= 2x", ratio <= 2,
        f"ours {t_ours * 1e3:.1f} ms per 1920x1080 frame (maps {net.maps(frame).stride} px "
        f"cells), bare net.forward {t_bare * 1e3:.1f} ms (368x368, synthetic 4-layer model)")


def _video_row(tmp: Path) -> dict:
    from app.formats.video import extract_frames

    clip = tmp / "clip.avi"
    writer = cv2.VideoWriter(str(clip), cv2.VideoWriter_fourcc(*"MJPG"), 25.0, (640, 480))
    rng = np.random.default_rng(2)
    base = rng.integers(0, 255, (480, 640, 3), dtype=np.uint8)
    for i in range(50):
        writer.write(np.roll(base, 7 * i, axis=1))
    writer.release()

    def ours() -> None:
        out = Path(tempfile.mkdtemp(dir=tmp))
        extract_frames(clip, out)
        shutil.rmtree(out)

    def decode() -> None:
        cap = cv2.VideoCapture(str(clip))
        while cap.read()[0]:
            pass
        cap.release()

    t_ours = common.median_seconds(ours, repeat=5, warmup=1)
    t_decode = common.median_seconds(decode, repeat=5, warmup=1)
    ratio = t_ours / t_decode
    return common.row(
        "video: extract / decode only", ratio, "x", "<= 6x", ratio <= 6,
        f"ours {50 / t_ours:.0f} frames/s writing JPEG q95, decode alone "
        f"{50 / t_decode:.0f} frames/s (640x480 Motion JPEG, 50 frames)")


def _check_row(tmp: Path) -> dict:
    from app.jobs_analysis import TARGETS_FORMAT, TARGETS_VERSION, check_targets

    out = tmp / "targets"
    out.mkdir()
    rng = np.random.default_rng(3)
    h, w = 135, 240
    frames = []
    for n in range(10):
        np.savez_compressed(out / f"{n}.npz",
                            confidence_maps=rng.random((17, h, w)).astype(np.float16),
                            pafs=(rng.random((19, 2, h, w)) * 0.7).astype(np.float16),
                            loss_mask=np.ones((55, h, w), np.float16))
        frames.append({"id": n, "targets": f"{n}.npz", "width": 1920, "height": 1080,
                       "grid": [h, w]})
    (out / "manifest.json").write_text(json.dumps({
        "format": TARGETS_FORMAT, "version": TARGETS_VERSION, "skeleton": SK.to_dict(),
        "parameters": {"stride": 8, "dtype": "float16"}, "frames": frames}))

    def load() -> None:
        for n in range(10):
            with np.load(out / f"{n}.npz") as npz:
                for key in npz.files:
                    npz[key]

    assert check_targets(out).problems == []
    t_ours = common.median_seconds(lambda: check_targets(out), repeat=5, warmup=1)
    t_load = common.median_seconds(load, repeat=5, warmup=1)
    ratio = t_ours / t_load
    return common.row(
        "targets --check / np.load", ratio, "x", "<= 3x", ratio <= 3,
        f"ours {t_ours * 1e3 / 10:.1f} ms per frame, np.load of the arrays "
        f"{t_load * 1e3 / 10:.1f} ms (1920x1080 at stride 8, float16)")


def run() -> list[dict]:
    tmp = Path(tempfile.mkdtemp(prefix="bench-inference-"))
    try:
        return [_prelabel_row(tmp), _video_row(tmp), _check_row(tmp)]
    finally:
        shutil.rmtree(tmp, ignore_errors=True)
