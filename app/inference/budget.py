"""How much memory a pre-labelling config plans to use, checked before anything runs.

A config fixes the size of every tensor pre-labelling makes: the network input at each scale,
the model's outputs at its stride, and the maps on each frame's grid. :func:`planned_bytes`
adds them up from the config and the frame sizes alone (no model is loaded, no image decoded)
and :func:`check_budget` refuses a config whose plan exceeds the memory budget, so a config
that would need tens of gigabytes fails in one line instead of being killed by the system.

The budget is :data:`DEFAULT_BUDGET_MB` megabytes (2^20 bytes) unless set with
``--memory-budget-mb`` or ``$POSEWRIGHT_MEMORY_BUDGET_MB``. It bounds Posewright's own arrays;
the model's working memory inside OpenCV (its intermediate layers) comes on top and depends on
the model, which is why the default leaves room for it on a machine with 8 GB.
"""

from __future__ import annotations

import math
import os
from collections.abc import Iterable
from dataclasses import dataclass

from app.analysis.targets import grid_shape
from app.errors import BadInput
from app.inference.config import PrelabelConfig
from app.inference.geometry import input_geometry, kept_map_stride

__all__ = ["DEFAULT_BUDGET_MB", "Plan", "budget_bytes", "check_budget", "planned_bytes",
           "set_budget_mb"]

#: The default memory budget of a pre-labelling run, in megabytes (2^20 bytes).
DEFAULT_BUDGET_MB = 2048

#: The environment variable that sets the budget (in megabytes).
BUDGET_ENV = "POSEWRIGHT_MEMORY_BUDGET_MB"

_MB = 1 << 20
_budget_mb: float | None = None  # set by set_budget_mb (the command line's option)


@dataclass(frozen=True)
class Plan:
    """The largest memory need of a run: ``total`` bytes, reached for a ``frame_size``
    ``(width, height)`` frame at input ``scale``, whose network input is ``input_size``
    ``(width, height)``."""

    total: int
    frame_size: tuple[int, int]
    scale: float
    input_size: tuple[int, int]


def set_budget_mb(megabytes: float | None) -> None:
    """Set the budget for this process (None: back to the environment or the default)."""
    global _budget_mb
    if megabytes is not None:
        _check_mb(megabytes, "--memory-budget-mb")
    _budget_mb = megabytes


def budget_bytes() -> int:
    """The budget in bytes: :func:`set_budget_mb`, else ``$POSEWRIGHT_MEMORY_BUDGET_MB``, else
    :data:`DEFAULT_BUDGET_MB`.

    Examples
    --------
    >>> set_budget_mb(512); budget_bytes()
    536870912
    >>> set_budget_mb(None)
    """
    megabytes = _budget_mb
    if megabytes is None:
        text = os.environ.get(BUDGET_ENV, "").strip()
        if not text:
            megabytes = DEFAULT_BUDGET_MB
        else:
            try:
                megabytes = float(text)
            except ValueError:
                raise BadInput(f"{text!r} is not a number of megabytes", where=BUDGET_ENV
                               ) from None
            _check_mb(megabytes, BUDGET_ENV)
    return int(megabytes * _MB)


def _check_mb(value: float, where: str) -> None:
    # The budget is kept in bytes: a value whose byte count overflows a float is refused too.
    if not (math.isfinite(value * _MB) and value > 0):
        raise BadInput(f"{value} is not a positive number of megabytes", where=where)


def planned_bytes(config: PrelabelConfig, frame_sizes: Iterable[tuple[int, int]],
                  num_joints: int, num_limbs: int) -> Plan:
    """The largest memory one frame of the run needs, from the config and the frame sizes.

    Parameters
    ----------
    config
        The pre-labelling config (input size, resize rule, stride, scales, channel lists).
    frame_sizes
        ``(width, height)`` of the frames to run on.
    num_joints, num_limbs
        ``K`` and ``L`` of the project's skeleton (the maps kept per frame).

    Returns
    -------
    Plan
        The peak and where it is reached (a frame size of 0 x 0 when there is no frame).

    Notes
    -----
    With float32 (4 bytes) throughout, for a ``w x h`` frame at scale ``s`` whose network
    input is ``W_s x H_s`` and output grid ``ceil(H_s / S) x ceil(W_s / S)`` at the model's
    stride ``S``, and ``C`` map channels and ``F`` fields in the config's lists:

    - input: ``3 * 3 W_s H_s * 4`` (the padded canvas, its normalised copy and the NCHW
      tensor, as :func:`app.inference.geometry.prepare_input` makes them);
    - outputs: ``2 * (C + 2 F) * ceil(H_s / S) * ceil(W_s / S) * 4`` (the model's and the
      copy in the project's order);
    - per frame: the decoded image ``3 w h`` bytes and the maps on the frame's grid at the map
      stride, a running sum and one scale's, ``2 * (K + 2 L) * g_h * g_w * 4``.

    Scales run one after another, so the peak is the per-frame part plus the largest scale.

    Examples
    --------
    >>> cfg = PrelabelConfig.model_validate({
    ...     "input_width": 8192, "input_height": 8192, "stride": 8, "extra_scales": [4],
    ...     "outputs": {"confidence_maps": 0, "pafs": 1}, "joint_order": ["nose"]})
    >>> plan = planned_bytes(cfg, [(1920, 1080)], num_joints=17, num_limbs=19)
    >>> plan.scale, plan.input_size, round(plan.total / 2**30, 1)
    (4.0, (32768, 32768), 36.3)
    """
    channels = len(config.joint_order) + 2 * len(config.limb_order)
    kept = num_joints + 2 * num_limbs
    best = Plan(0, (0, 0), 1.0, (0, 0))
    for size in sorted(set(frame_sizes)):
        width, height = size
        if width <= 0 or height <= 0:
            continue
        gh, gw = grid_shape(size, kept_map_stride(size, config))
        frame = 3 * width * height + 2 * kept * gh * gw * 4
        for scale in config.scales():
            g = input_geometry(size, config, scale)
            oh = -(-g.input_height // config.stride)
            ow = -(-g.input_width // config.stride)
            need = (frame + 9 * g.input_width * g.input_height * 4
                    + 2 * channels * oh * ow * 4)
            if need > best.total:
                best = Plan(need, size, scale, (g.input_width, g.input_height))
    return best


def check_budget(config: PrelabelConfig, frame_sizes: Iterable[tuple[int, int]],
                 num_joints: int, num_limbs: int, where: str = "config") -> Plan:
    """:func:`planned_bytes`, refused when over :func:`budget_bytes`.

    Raises
    ------
    BadInput
        One line naming the config, the field to change (``extra_scales`` when an extra
        scale makes the peak, else the input size), the planned and the allowed size.
    """
    plan = planned_bytes(config, frame_sizes, num_joints, num_limbs)
    budget = budget_bytes()
    if plan.total <= budget:
        return plan
    field = "extra_scales" if plan.scale != 1.0 else "input_height"
    raise BadInput(
        f"field {field}: the run would need {plan.total / _MB:,.0f} MB of tensors (a "
        f"{plan.frame_size[0]}x{plan.frame_size[1]} frame at scale {plan.scale:g} makes a "
        f"{plan.input_size[0]}x{plan.input_size[1]} input), over the memory budget of "
        f"{budget / _MB:,.0f} MB", where=where,
        hint=f"use a smaller input or fewer extra scales, or raise the budget with "
             f"--memory-budget-mb or {BUDGET_ENV}")
