"""A user's ONNX pose model, run on the CPU through OpenCV's DNN module.

:class:`PoseNetwork` loads the model once, then turns each frame into the project's network
maps: confidence maps ``(K, H, W)`` and part affinity fields ``(L, 2, H, W)`` on the frame's
map grid, in the project's joint and limb order, averaged over the configured scales. These
are the maps that :func:`app.analysis.association.group_people` groups, that triage and owner
suggestions read, and that :mod:`app.formats.maps` stores.

OpenCV 5 note: ``cv2.dnn.readNetFromONNX`` takes an ``engine`` argument; the default
(``ENGINE_AUTO``) tries the new graph engine first and falls back to the classic one. The new
engine runs on the CPU only and warns when a target is set, so the target is set only on
OpenCV 4, where ``DNN_TARGET_CPU`` is also the default.
"""

from __future__ import annotations

import logging
import math
import re
from pathlib import Path

import cv2
import numpy as np

from app.errors import BadInput
from app.formats.maps import NetworkMaps
from app.inference.config import OutputChannels, PrelabelConfig, resolve_channels
from app.inference.geometry import (
    InputGeometry,
    fields_to_image,
    input_geometry,
    kept_map_stride,
    prepare_input,
    resample_to_grid,
)
from app.model.skeleton import Skeleton
from app.wording import count, plural

log = logging.getLogger(__name__)

__all__ = ["PoseNetwork"]


def onnx_output_names(path: str | Path) -> list[str] | None:
    """The graph's output names in the order the ONNX file declares them, or None if the file
    cannot be read that far.

    Notes
    -----
    Reads just enough of the protocol-buffer encoding (ModelProto field 7 ``graph``,
    GraphProto field 12 ``output``, ValueInfoProto field 1 ``name``; ONNX ``onnx.proto``),
    skipping every other field by its length, so no ONNX package is needed at run time.
    """
    try:
        data = memoryview(Path(path).read_bytes())
        graph = _fields(data, 7)
        if not graph:
            return None
        return [bytes(_fields(value, 1)[0]).decode("utf-8")
                for value in _fields(graph[0], 12)]
    except (OSError, ValueError, IndexError, UnicodeDecodeError):
        return None


def _varint(data: memoryview, i: int) -> tuple[int, int]:
    value = shift = 0
    while True:
        byte = data[i]
        i += 1
        value |= (byte & 0x7F) << shift
        if byte < 0x80:
            return value, i
        shift += 7
        if shift > 63:
            raise ValueError("varint too long")


def _fields(data: memoryview, number: int) -> list[memoryview]:
    """Every length-delimited field ``number`` of one protocol-buffer message."""
    out, i = [], 0
    while i < len(data):
        key, i = _varint(data, i)
        wire = key & 7
        if wire == 0:
            _, i = _varint(data, i)
        elif wire == 1:
            i += 8
        elif wire == 5:
            i += 4
        elif wire == 2:
            size, i = _varint(data, i)
            if i + size > len(data):
                raise ValueError("truncated field")
            if key >> 3 == number:
                out.append(data[i:i + size])
            i += size
        else:
            raise ValueError(f"unsupported wire type {wire}")
    return out


class PoseNetwork:
    """Load an ONNX model for pre-labelling.

    Parameters
    ----------
    model
        The ``.onnx`` file.
    config
        How to feed it and read it (see :mod:`app.inference.config`).
    skeleton
        The project's skeleton, onto which the outputs are mapped.
    config_where
        How error messages name the config (its file name).

    Raises
    ------
    BadInput
        When the model does not load, an output named in the config does not exist, or the
        config names joints the skeleton does not have. Outputs whose shape does not fit the
        config are found on the first frame (:meth:`maps`).
    """

    def __init__(self, model: str | Path, config: PrelabelConfig, skeleton: Skeleton,
                 config_where: str = "config"):
        self.model = Path(model)
        self.config = config
        self.skeleton = skeleton
        self._where = config_where
        self.channels = resolve_channels(config, skeleton, where=config_where)
        self._net = _load(self.model)
        names = [str(n) for n in self._net.getUnconnectedOutLayersNames()]
        # OpenCV 4 lists outputs sorted, OpenCV 5 in the model's order; an index in the config
        # means the model's own order, so read that from the file when it can be read.
        declared = onnx_output_names(self.model)
        if declared is not None and sorted(declared) == sorted(names):
            names = declared
        self.output_names = names
        self._cm = self._output(config.outputs.confidence_maps, names, "confidence_maps")
        self._paf = self._output(config.outputs.pafs, names, "pafs")
        self._fetch = list(dict.fromkeys([self._cm[0], self._paf[0]]))
        for j in self.channels.missing_joints:
            log.info("no model channel for joint %s: its map stays empty",
                     skeleton.joints[j])
        for c in self.channels.missing_limbs:
            log.info("no model field for limb %s: its field stays empty",
                     skeleton.limb_names()[c])

    def _output(self, ref: str | int | OutputChannels, names: list[str],
                key: str) -> tuple[str, tuple[int, int] | None]:
        field = f"outputs.{key}"
        channels = None
        if isinstance(ref, OutputChannels):
            channels = ref.channels
            field += ".output"
            ref = ref.output
        if isinstance(ref, int):
            if not 0 <= ref < len(names):
                raise BadInput(f"field {field}: the model has {len(names)} outputs "
                               f"({', '.join(names)}); there is no output {ref}",
                               where=self._where)
            return names[ref], channels
        if ref not in names:
            raise BadInput(f"field {field}: the model has no output {ref!r} (its outputs: "
                           f"{', '.join(names)})", where=self._where)
        return ref, channels

    def map_stride(self, image_size: tuple[int, int]) -> int:
        """Image pixels per cell of the maps kept for a frame of this size: the config's
        ``map_stride``, else the model's stride in image pixels at scale 1, rounded."""
        return kept_map_stride(image_size, self.config)

    def maps(self, image: np.ndarray, where: str = "") -> NetworkMaps:
        """The network maps of one frame, in the project's order, on its map grid.

        Parameters
        ----------
        image
            ``(h, w, 3)`` uint8 BGR.
        where
            Names the frame in error messages.

        Returns
        -------
        NetworkMaps
            float32 maps averaged over the scales, and their stride in image pixels.

        Notes
        -----
        For every scale: the frame is placed in the input (:func:`input_geometry`,
        :func:`prepare_input`), the model runs, its channels are picked and reordered to the
        skeleton (fields the model has the other way round are negated), the field vectors
        are turned to image directions (:func:`fields_to_image`) and everything is read at the
        frame's map grid (:func:`resample_to_grid`). The result is the mean over the scales.
        """
        size = (int(image.shape[1]), int(image.shape[0]))
        stride = self.map_stride(size)
        cm_sum: np.ndarray | None = None
        paf_sum: np.ndarray | None = None
        scales = self.config.scales()
        for scale in scales:
            geometry = input_geometry(size, self.config, scale)
            cm, paf = self._run(prepare_input(image, geometry, self.config), geometry, where)
            h, w = cm.shape[1:]
            fields = fields_to_image(paf, geometry)
            cm_grid = resample_to_grid(cm, geometry, self.config.stride, size, stride)
            paf_grid = resample_to_grid(fields.reshape(-1, h, w), geometry, self.config.stride,
                                        size, stride).reshape(paf.shape[0], 2,
                                                              *cm_grid.shape[1:])
            cm_sum = cm_grid if cm_sum is None else cm_sum + cm_grid
            paf_sum = paf_grid if paf_sum is None else paf_sum + paf_grid
        assert cm_sum is not None and paf_sum is not None
        n = np.float32(len(scales))
        return NetworkMaps(cm_sum / n, paf_sum / n, stride)

    def _run(self, blob: np.ndarray, geometry: InputGeometry,
             where: str) -> tuple[np.ndarray, np.ndarray]:
        """Forward one input; the project-ordered ``(K, h, w)`` maps and ``(L, 2, h, w)``
        fields on the output grid."""
        try:
            if self.config.input_name is None:
                self._net.setInput(blob)
            else:
                self._net.setInput(blob, self.config.input_name)
            outs = self._net.forward(self._fetch)
        except cv2.error as exc:
            raise BadInput(f"the model failed on a {geometry.input_width}x"
                           f"{geometry.input_height} input{' (' + where + ')' if where else ''}: "
                           f"{_cv_message(exc)}", where=str(self.model),
                           hint="check input_name, input_width and input_height in the "
                                "config") from None
        by_name = dict(zip(self._fetch, outs))
        cfg = self.config
        cm = self._channels(by_name[self._cm[0]], self._cm, "confidence_maps")
        paf = self._channels(by_name[self._paf[0]], self._paf, "pafs")
        if cm.shape[0] != len(cfg.joint_order):
            raise BadInput(f"field joint_order: {count(len(cfg.joint_order), 'entry')}, but "
                           f"the confidence maps have {count(cm.shape[0], 'channel')}",
                           where=self._where,
                           hint="give one entry (a joint name or null) per channel")
        if paf.shape[0] != 2 * len(cfg.limb_order):
            raise BadInput(f"field limb_order: {count(len(cfg.limb_order), 'entry')} "
                           f"{plural(len(cfg.limb_order), 'needs', 'need')} "
                           f"{count(2 * len(cfg.limb_order), 'field channel')}, but the model "
                           f"gives {paf.shape[0]}", where=self._where,
                           hint="give one entry (a joint pair or null) per field")
        if cm.shape[1:] != paf.shape[1:]:
            raise BadInput(f"field outputs: the confidence maps are {cm.shape[1]}x{cm.shape[2]} "
                           f"cells but the fields {paf.shape[1]}x{paf.shape[2]}",
                           where=self._where)
        h, w = cm.shape[1:]
        s = cfg.stride
        fits_h = h in (geometry.input_height // s, math.ceil(geometry.input_height / s))
        fits_w = w in (geometry.input_width // s, math.ceil(geometry.input_width / s))
        if not (fits_h and fits_w):
            raise BadInput(f"field stride: the outputs are {h}x{w} cells for a "
                           f"{geometry.input_width}x{geometry.input_height} input, which does "
                           f"not fit stride {s} (expected "
                           f"{math.ceil(geometry.input_height / s)}x"
                           f"{math.ceil(geometry.input_width / s)} cells)", where=self._where)
        if not (np.isfinite(cm).all() and np.isfinite(paf).all()):
            raise BadInput(f"the model's outputs hold values that are not finite numbers"
                           f"{' (' + where + ')' if where else ''}", where=str(self.model))
        chan = self.channels
        out_cm = np.zeros((self.skeleton.num_joints, h, w), dtype=np.float32)
        has = chan.joint_source >= 0
        out_cm[has] = cm[chan.joint_source[has]]
        if cfg.paf_layout == "xy-interleaved":
            fields = paf.reshape(-1, 2, h, w)
        else:
            fields = paf.reshape(2, -1, h, w).transpose(1, 0, 2, 3)
        out_paf = np.zeros((len(self.skeleton.limbs), 2, h, w), dtype=np.float32)
        has = chan.limb_source >= 0
        out_paf[has] = fields[chan.limb_source[has]] * chan.limb_sign[has, None, None, None]
        return out_cm, out_paf

    def _channels(self, arr: np.ndarray, ref: tuple[str, tuple[int, int] | None],
                  key: str) -> np.ndarray:
        name, channels = ref
        arr = np.asarray(arr)
        if arr.ndim != 4 or arr.shape[0] != 1:
            raise BadInput(f"field outputs.{key}: output {name!r} has shape {tuple(arr.shape)}, "
                           "expected (1, channels, height, width) (layout NCHW, one image)",
                           where=self._where)
        arr = arr[0]
        if channels is not None:
            first, stop = channels
            if stop > arr.shape[0]:
                raise BadInput(f"field outputs.{key}.channels: [{first}, {stop}] reaches past "
                               f"the {count(arr.shape[0], 'channel')} of output {name!r}",
                               where=self._where)
            arr = arr[first:stop]
        return arr.astype(np.float32, copy=False)


def _load(model: Path) -> cv2.dnn.Net:
    if not model.is_file():
        raise BadInput("no such model file", where=str(model))
    try:
        net = cv2.dnn.readNetFromONNX(str(model))
    except cv2.error as exc:
        raise BadInput(f"OpenCV cannot load the model: {_cv_message(exc)}", where=str(model),
                       hint="give an ONNX file whose operators OpenCV's DNN module supports"
                       ) from None
    if net.empty():
        raise BadInput("OpenCV loaded an empty network", where=str(model))
    net.setPreferableBackend(cv2.dnn.DNN_BACKEND_OPENCV)
    if int(cv2.__version__.split(".")[0]) < 5:
        net.setPreferableTarget(cv2.dnn.DNN_TARGET_CPU)
    return net


_CV_ERROR = re.compile(r"error: \(-?\d+:[^)]*\)\s*(.*?)(?:\s+in function\b.*)?$")


def _cv_message(exc: cv2.error) -> str:
    """The useful part of an OpenCV error: its message, without the source location."""
    text = " ".join(str(exc).split())
    found = _CV_ERROR.search(text)
    return (found.group(1) if found and found.group(1) else text)[:300]
