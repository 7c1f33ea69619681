"""What Posewright must know about a user's ONNX pose model: the pre-labelling config.

A model is described by one JSON file (validated with pydantic; unknown fields are refused so a
typo never passes silently). Example, for a model that takes a 368 x 368 RGB input scaled to
[0, 1], outputs 18 confidence-map channels (the 17 joints of the project in its own order and a
background channel last) and 19 part affinity fields with x and y interleaved, at stride 8
(``assets/prelabel-config.example.json`` holds a complete one)::

    {
      "description": "our bottom-up model, epoch 40",
      "input_width": 368, "input_height": 368, "resize": "letterbox", "pad_value": 0,
      "channel_order": "rgb", "mean": [0, 0, 0], "scale": 0.00392156862745098,
      "outputs": {"confidence_maps": "heatmaps", "pafs": "fields"},
      "stride": 8,
      "joint_order": ["nose", "left_eye", ..., "right_ankle", null],
      "limb_order": [["left_ankle", "left_knee"], ..., null],
      "paf_layout": "xy-interleaved",
      "extra_scales": [0.75, 1.25],
      "grouping": {"min_parts": 4}
    }

Fields
------
``input_width``, ``input_height``
    The network input in pixels (``input_width`` is not used with ``resize: "fit-height"``).
``resize``
    How a frame becomes the input. ``"stretch"``: scaled to the input size, aspect ratio not
    kept. ``"letterbox"`` (default): scaled by one factor to fit inside the input, centred, the
    rest filled with ``pad_value``. ``"fit-height"``: scaled to ``input_height`` rows keeping
    the aspect ratio; the width is rounded up to a multiple of ``stride`` and padded on the
    right (for fully convolutional models that take any width).
``pad_value``
    Pixel value (0-255, before normalisation) of the padding.
``channel_order``
    ``"rgb"`` or ``"bgr"``: the order of the three input channels. The layout is always NCHW.
``mean``, ``scale``
    Normalisation: ``input = (pixel - mean) * scale`` per channel, ``pixel`` in 0-255, both in
    the order of ``channel_order``; ``scale`` is one number or three.
``input_name``
    The input to feed (default: the model's only input).
``outputs``
    ``confidence_maps`` and ``pafs``: each an output name, an index into the model's outputs,
    or ``{"output": name or index, "channels": [first, stop]}`` to take channels
    ``first .. stop - 1`` of one output (for a model that concatenates both).
``stride``
    Network input pixels per output cell. An output is ``floor`` or ``ceil`` of the input size
    over the stride; cell ``(r, c)`` stands for the input point
    ``(c * stride + (stride - 1) / 2, r * stride + (stride - 1) / 2)`` (the grid of cell
    centres of :mod:`app.analysis.targets`).
``joint_order``
    One entry per confidence-map channel, in the model's order: the project joint it holds, or
    ``null`` for a channel to skip (a background channel, a joint the project does not have).
    Project joints that no channel holds get an empty map.
``limb_order``
    One entry per part affinity field, in the model's order: ``[joint_a, joint_b]`` (the field
    points from ``joint_a`` to ``joint_b``) or ``null`` to skip it. A field whose pair is a
    project limb the other way round is negated; project limbs no field covers stay empty, and
    a model limb that is not a project limb is skipped.
``paf_layout``
    ``"xy-interleaved"`` (default): channels ``2c`` and ``2c + 1`` are the x and y components of
    field ``c``. ``"x-then-y"``: channels ``0 .. L-1`` are the x components of the ``L`` fields
    and ``L .. 2L-1`` their y components.
``extra_scales``
    Further input scales to run and average with scale 1 (for example ``[0.5, 1.5]``); each
    input side is the configured one times the scale, rounded.
``map_stride``
    Image pixels per cell of the maps kept in the project (default: the model's stride in
    image pixels at scale 1, rounded).
``grouping``
    Settings passed to :func:`app.analysis.association.group_people` (``peak_threshold``,
    ``num_samples``, ``sample_threshold``, ``min_support``, ``min_limb_score``,
    ``max_limb_length``, ``min_parts``, ``min_mean_score``, ``matching``).
``description``
    Free text for the person who keeps the file.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Any, Literal

import numpy as np
from pydantic import BaseModel, ConfigDict, Field, ValidationError, model_validator

from app.errors import BadInput
from app.fileio import read_json
from app.model.skeleton import Skeleton

__all__ = [
    "ChannelMap",
    "GroupingSettings",
    "OutputChannels",
    "PrelabelConfig",
    "config_from_dict",
    "default_config",
    "load_config",
    "resolve_channels",
]

_Strict = ConfigDict(extra="forbid")


class OutputChannels(BaseModel):
    """A channel range ``[first, stop)`` of one model output."""

    model_config = _Strict
    output: str | int
    channels: tuple[int, int] | None = None

    @model_validator(mode="after")
    def _range(self) -> OutputChannels:
        if self.channels is not None:
            first, stop = self.channels
            if not 0 <= first < stop:
                raise ValueError(f"channels [{first}, {stop}] is not a range first < stop, "
                                 "first >= 0")
        return self


class Outputs(BaseModel):
    model_config = _Strict
    confidence_maps: str | int | OutputChannels
    pafs: str | int | OutputChannels


class GroupingSettings(BaseModel):
    """Keyword arguments of :func:`app.analysis.association.group_people`."""

    model_config = _Strict
    peak_threshold: float = Field(0.1, ge=0, le=1, allow_inf_nan=False)
    num_samples: int = Field(10, ge=1, le=100)
    sample_threshold: float = Field(0.05, ge=-1, le=1, allow_inf_nan=False)
    min_support: float = Field(0.8, ge=0, le=1, allow_inf_nan=False)
    min_limb_score: float = Field(0.0, allow_inf_nan=False)
    max_limb_length: float | None = Field(None, gt=0, allow_inf_nan=False)
    min_parts: int = Field(4, ge=1)
    min_mean_score: float = Field(0.4, ge=0, allow_inf_nan=False)
    matching: Literal["optimal", "greedy"] = "optimal"



class PrelabelConfig(BaseModel):
    """How to feed a pose model and read its outputs (the fields are in the module docstring).

    Examples
    --------
    >>> cfg = PrelabelConfig.model_validate({
    ...     "input_width": 64, "input_height": 48, "stride": 4,
    ...     "outputs": {"confidence_maps": 0, "pafs": 1},
    ...     "joint_order": ["nose", None], "limb_order": []})
    >>> cfg.resize, cfg.channel_order, cfg.scale_triple()
    ('letterbox', 'rgb', (1.0, 1.0, 1.0))
    """

    model_config = _Strict
    description: str = ""
    input_name: str | None = None
    input_width: int | None = Field(None, ge=8, le=8192)
    input_height: int = Field(ge=8, le=8192)
    resize: Literal["stretch", "letterbox", "fit-height"] = "letterbox"
    pad_value: float = Field(0.0, ge=0, le=255, allow_inf_nan=False)
    channel_order: Literal["rgb", "bgr"] = "rgb"
    mean: tuple[float, float, float] = (0.0, 0.0, 0.0)
    scale: float | tuple[float, float, float] = 1.0
    outputs: Outputs
    stride: int = Field(ge=1, le=256)
    joint_order: list[str | None] = Field(min_length=1, max_length=1024)
    limb_order: list[tuple[str, str] | None] = Field(default_factory=list, max_length=1024)
    paf_layout: Literal["xy-interleaved", "x-then-y"] = "xy-interleaved"
    extra_scales: list[float] = Field(default_factory=list, max_length=8)
    map_stride: int | None = Field(None, ge=1, le=256)
    grouping: GroupingSettings = Field(default_factory=lambda: GroupingSettings.model_validate({}))

    @model_validator(mode="after")
    def _consistent(self) -> PrelabelConfig:
        if self.resize == "fit-height":
            if self.input_width is not None:
                raise ValueError("input_width is not used with resize 'fit-height'; remove it")
        elif self.input_width is None:
            raise ValueError(f"input_width is required with resize {self.resize!r}")
        for n, s in enumerate(self.extra_scales):
            if not (np.isfinite(s) and 0.1 <= s <= 4.0):
                raise ValueError(f"extra_scales.{n}: {s} is not between 0.1 and 4")
        for value in (*self.mean, *self.scale_triple()):
            if not np.isfinite(value):
                raise ValueError("mean and scale must be finite numbers")
        if not all(s != 0 for s in self.scale_triple()):
            raise ValueError("scale must not be 0")
        named = [j for j in self.joint_order if j is not None]
        if len(set(named)) != len(named):
            twice = next(j for j in named if named.count(j) > 1)
            raise ValueError(f"joint_order names {twice!r} twice")
        return self

    def scale_triple(self) -> tuple[float, float, float]:
        """``scale`` as one number per channel."""
        if isinstance(self.scale, tuple):
            return self.scale
        return (float(self.scale),) * 3

    def scales(self) -> list[float]:
        """Every input scale the model runs at: 1, then the extra ones."""
        return [1.0, *self.extra_scales]


def config_from_dict(data: Any, where: str = "config") -> PrelabelConfig:
    """Validate a config given as a dict; :class:`BadInput` names ``where`` and the field."""
    try:
        return PrelabelConfig.model_validate(data)
    except ValidationError as exc:
        raise BadInput(_describe(exc), where=where) from None


_UNION_TAGS = {"str", "int", "float", "none", "bool"}


def _describe(exc: ValidationError) -> str:
    """One line for the most telling error: a failed check of a value beats "not a string"
    from the other branches of a union, whose tags are left out of the field's path."""
    errors = exc.errors()
    err = next((e for e in errors if not str(e["type"]).endswith("_type")), errors[0])
    path = [p for p in err["loc"]
            if not (isinstance(p, str) and (p in _UNION_TAGS or "[" in p or "(" in p))]
    msg = str(err["msg"]).removeprefix("Value error, ")
    if err["type"] == "missing" and path and isinstance(path[-1], int):
        msg = f"item {path.pop()} is missing (too few items)"
    loc = ".".join(str(p) for p in path)
    return f"field {loc}: {msg}" if loc else msg


def load_config(path: str | Path) -> PrelabelConfig:
    """Read and validate a config file.

    Raises
    ------
    BadInput
        When the file cannot be read, is not JSON, or a field is wrong (the message names the
        file and the field).
    """
    return config_from_dict(read_json(path, "the config"), where=str(path))


def default_config(skeleton: Skeleton) -> PrelabelConfig:
    """The config used when none is given: a 368 x 368 letterboxed RGB input scaled to [0, 1],
    outputs 0 (confidence maps) and 1 (fields) at stride 8, channels in the project's joint
    and limb order, x and y interleaved."""
    return PrelabelConfig.model_validate({
        "description": "built-in default",
        "input_width": 368, "input_height": 368, "resize": "letterbox", "channel_order": "rgb",
        "mean": (0.0, 0.0, 0.0), "scale": 1.0 / 255.0,
        "outputs": {"confidence_maps": 0, "pafs": 1}, "stride": 8,
        "joint_order": list(skeleton.joints),
        "limb_order": [(skeleton.joints[a], skeleton.joints[b]) for a, b in skeleton.limbs],
    })


@dataclass(frozen=True)
class ChannelMap:
    """Where each project joint and limb comes from in the model's outputs.

    ``joint_source[j]``: the confidence-map channel of project joint ``j`` (-1: none).
    ``limb_source[c]``: the model field of project limb ``c`` (-1: none); ``limb_sign[c]`` is
    -1 where the model's field points the other way.
    """

    joint_source: np.ndarray  # (K,) int64
    limb_source: np.ndarray  # (L,) int64
    limb_sign: np.ndarray  # (L,) float32
    model_joints: int
    model_limbs: int

    @property
    def missing_joints(self) -> list[int]:
        return [int(j) for j in np.flatnonzero(self.joint_source < 0)]

    @property
    def missing_limbs(self) -> list[int]:
        return [int(c) for c in np.flatnonzero(self.limb_source < 0)]


def resolve_channels(config: PrelabelConfig, skeleton: Skeleton,
                     where: str = "config") -> ChannelMap:
    """Map the model's channels onto the project's skeleton.

    Raises
    ------
    BadInput
        When ``joint_order`` or ``limb_order`` names a joint the skeleton does not have, or
        two model fields claim the same project limb.

    Examples
    --------
    >>> from app.model.skeleton import coco_body
    >>> sk = coco_body()
    >>> cfg = default_config(sk).model_copy(update={
    ...     "joint_order": [None, "left_eye", "nose"],
    ...     "limb_order": [("left_eye", "nose"), ("nose", "right_eye")]})
    >>> m = resolve_channels(cfg, sk)
    >>> m.joint_source[:3].tolist(), m.missing_joints[:2]
    ([2, 1, -1], [2, 3])
    >>> int(m.limb_source[sk.limbs.index((0, 1))]), float(m.limb_sign[sk.limbs.index((0, 1))])
    (0, -1.0)
    """
    joints = np.full(skeleton.num_joints, -1, dtype=np.int64)
    for channel, name in enumerate(config.joint_order):
        if name is None:
            continue
        if name not in skeleton.joints:
            raise BadInput(f"field joint_order.{channel}: the project's skeleton "
                           f"{skeleton.name!r} has no joint {name!r}", where=where,
                           hint="use null for a channel the project does not use")
        joints[skeleton.index(name)] = channel
    limb_index = {pair: c for c, pair in enumerate(skeleton.limbs)}
    limbs = np.full(len(skeleton.limbs), -1, dtype=np.int64)
    sign = np.ones(len(skeleton.limbs), dtype=np.float32)
    for field, pair in enumerate(config.limb_order):
        if pair is None:
            continue
        ends = []
        for end in pair:
            if end not in skeleton.joints:
                raise BadInput(f"field limb_order.{field}: the project's skeleton "
                               f"{skeleton.name!r} has no joint {end!r}", where=where,
                               hint="use null for a field the project does not use")
            ends.append(skeleton.index(end))
        a, b = ends
        if (a, b) in limb_index:
            c, s = limb_index[(a, b)], 1.0
        elif (b, a) in limb_index:
            c, s = limb_index[(b, a)], -1.0
        else:
            continue  # not a limb of the project: nothing to store it in
        if limbs[c] >= 0:
            raise BadInput(f"field limb_order.{field}: limb {pair[0]}-{pair[1]} is also field "
                           f"{int(limbs[c])}", where=where)
        limbs[c], sign[c] = field, s
    return ChannelMap(joints, limbs, sign, len(config.joint_order), len(config.limb_order))
