"""Skeletons: joint names and sides, limbs, OKS sigmas and left-right flip pairs.

The default is the 17-joint COCO body layout with its 19-limb skeleton and the per-joint OKS
sigmas published with the COCO keypoint evaluation. Custom skeletons are read from a JSON file
of our own shape, validated with pydantic::

    {
      "name": "upper body",
      "joints": [
        {"name": "nose", "side": "centre", "sigma": 0.026},
        {"name": "left_shoulder", "sigma": 0.079},
        {"name": "right_shoulder", "sigma": 0.079}
      ],
      "limbs": [["left_shoulder", "right_shoulder"], ["nose", "left_shoulder"]]
    }

``side`` may be omitted when the name starts with ``left_`` or ``right_`` (``centre``
otherwise). Limbs name their two joints (or give 0-based indices). Flip pairs are derived:
``left_<part>`` pairs with ``right_<part>``; a sided joint without a partner is refused because
swapping sides would be undefined for it.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from enum import Enum
from functools import cached_property
from pathlib import Path
from typing import Any

import numpy as np
from pydantic import BaseModel, ConfigDict, Field, ValidationError, field_validator

from app.errors import BadInput
from app.fileio import read_json


class Side(str, Enum):
    """Which side of the body a joint belongs to."""

    LEFT = "left"
    RIGHT = "right"
    CENTRE = "centre"


#: COCO person keypoints, in the order of the COCO 2017 ``person_keypoints_*.json`` category
#: record (from memory; the same order as pycocotools' evaluation sigmas below).
COCO_JOINTS: tuple[str, ...] = (
    "nose", "left_eye", "right_eye", "left_ear", "right_ear",
    "left_shoulder", "right_shoulder", "left_elbow", "right_elbow",
    "left_wrist", "right_wrist", "left_hip", "right_hip",
    "left_knee", "right_knee", "left_ankle", "right_ankle",
)

#: The 19 limbs of the COCO person category's ``skeleton`` field, 1-based as in the file
#: (from memory of the COCO 2017 annotation files).
COCO_SKELETON_1BASED: tuple[tuple[int, int], ...] = (
    (16, 14), (14, 12), (17, 15), (15, 13), (12, 13), (6, 12), (7, 13), (6, 7), (6, 8),
    (7, 9), (8, 10), (9, 11), (2, 3), (1, 2), (1, 3), (2, 4), (3, 5), (4, 6), (5, 7),
)

#: Per-joint OKS sigmas of the COCO keypoint evaluation: ``kpt_oks_sigmas`` in pycocotools'
#: ``cocoeval.Params.setKpParams`` (tests compare against the installed pycocotools).
COCO_SIGMAS: tuple[float, ...] = (
    0.026, 0.025, 0.025, 0.035, 0.035, 0.079, 0.079, 0.072, 0.072,
    0.062, 0.062, 0.107, 0.107, 0.087, 0.087, 0.089, 0.089,
)


@dataclass(frozen=True)
class Skeleton:
    """A joint layout: names, sides, limbs (0-based index pairs) and OKS sigmas.

    Examples
    --------
    >>> sk = coco_body()
    >>> sk.num_joints, len(sk.limbs)
    (17, 19)
    >>> sk.joints[sk.flip_index[5]]
    'right_shoulder'
    """

    name: str
    joints: tuple[str, ...]
    sides: tuple[Side, ...]
    limbs: tuple[tuple[int, int], ...]
    sigmas: tuple[float, ...]
    _index: dict[str, int] = field(init=False, repr=False, compare=False)

    def __post_init__(self) -> None:
        object.__setattr__(self, "_index", {n: i for i, n in enumerate(self.joints)})

    @property
    def num_joints(self) -> int:
        return len(self.joints)

    def index(self, joint: str | int) -> int:
        """The index of a joint given by name or index; :class:`BadInput` if unknown."""
        if isinstance(joint, (int, np.integer)):
            if 0 <= int(joint) < self.num_joints:
                return int(joint)
            raise BadInput(f"joint index {joint} is outside 0..{self.num_joints - 1}")
        try:
            return self._index[joint]
        except KeyError:
            raise BadInput(f"unknown joint {joint!r} for skeleton {self.name!r}") from None

    @cached_property
    def flip_index(self) -> np.ndarray:
        """``(K,)`` int array: the joint each joint becomes when left and right are swapped."""
        perm = np.arange(self.num_joints)
        for a, b in self.flip_pairs:
            perm[a], perm[b] = b, a
        return perm

    @cached_property
    def flip_pairs(self) -> tuple[tuple[int, int], ...]:
        """Pairs ``(left, right)`` of joint indices derived from ``left_*`` / ``right_*`` names."""
        return _flip_pairs(self.joints, self.sides)

    @property
    def sigma_array(self) -> np.ndarray:
        return np.asarray(self.sigmas, dtype=np.float64)

    @property
    def limb_array(self) -> np.ndarray:
        """``(L, 2)`` int array of limbs, 0-based."""
        return np.asarray(self.limbs, dtype=np.int64).reshape(-1, 2)

    def limb_names(self) -> list[str]:
        return [f"{self.joints[a]}-{self.joints[b]}" for a, b in self.limbs]

    def to_dict(self) -> dict[str, Any]:
        """The skeleton in the JSON shape :func:`load_skeleton` reads."""
        return {
            "name": self.name,
            "joints": [
                {"name": n, "side": s.value, "sigma": sg}
                for n, s, sg in zip(self.joints, self.sides, self.sigmas)
            ],
            "limbs": [[self.joints[a], self.joints[b]] for a, b in self.limbs],
        }

    def coco_category(self, category_id: int = 1, name: str = "person") -> dict[str, Any]:
        """A COCO keypoints category record for this skeleton (skeleton 1-based)."""
        return {
            "id": category_id,
            "name": name,
            "supercategory": name,
            "keypoints": list(self.joints),
            "skeleton": [[a + 1, b + 1] for a, b in self.limbs],
        }


def side_of(name: str) -> Side:
    """The side a joint name implies: ``left_*`` is left, ``right_*`` is right, else centre."""
    low = name.lower()
    if low.startswith("left_"):
        return Side.LEFT
    if low.startswith("right_"):
        return Side.RIGHT
    return Side.CENTRE


def _flip_pairs(joints: Sequence[str], sides: Sequence[Side]) -> tuple[tuple[int, int], ...]:
    index = {n.lower(): i for i, n in enumerate(joints)}
    pairs = []
    for i, (name, side) in enumerate(zip(joints, sides)):
        if side is not Side.LEFT:
            continue
        low = name.lower()
        partner = index.get("right_" + low[5:]) if low.startswith("left_") else None
        if partner is None or sides[partner] is not Side.RIGHT:
            raise BadInput(
                f"left joint {name!r} has no right partner",
                hint="name the pair left_<part> and right_<part>, or make the joint centre",
            )
        pairs.append((i, partner))
    rights = {b for _, b in pairs}
    for i, side in enumerate(sides):
        if side is Side.RIGHT and i not in rights:
            raise BadInput(
                f"right joint {joints[i]!r} has no left partner",
                hint="name the pair left_<part> and right_<part>, or make the joint centre",
            )
    return tuple(pairs)


def coco_body() -> Skeleton:
    """The default skeleton: 17 COCO body joints, the 19 COCO limbs, the COCO OKS sigmas."""
    return Skeleton(
        name="coco-body-17",
        joints=COCO_JOINTS,
        sides=tuple(side_of(n) for n in COCO_JOINTS),
        limbs=tuple((a - 1, b - 1) for a, b in COCO_SKELETON_1BASED),
        sigmas=COCO_SIGMAS,
    )


class _JointSpec(BaseModel):
    model_config = ConfigDict(extra="forbid")
    name: str = Field(min_length=1, max_length=64)
    side: Side | None = None
    sigma: float = Field(gt=0, le=10, allow_inf_nan=False)


class _SkeletonSpec(BaseModel):
    model_config = ConfigDict(extra="forbid")
    name: str = Field(min_length=1, max_length=128)
    joints: list[_JointSpec] = Field(min_length=1, max_length=512)
    limbs: list[tuple[str | int, str | int]] = Field(default_factory=list)

    @field_validator("joints")
    @classmethod
    def _unique(cls, joints: list[_JointSpec]) -> list[_JointSpec]:
        seen: set[str] = set()
        for j in joints:
            if j.name in seen:
                raise ValueError(f"joint name {j.name!r} appears twice")
            seen.add(j.name)
        return joints


def skeleton_from_dict(data: Any, where: str = "skeleton") -> Skeleton:
    """Validate a skeleton given as a dict (the JSON shape in this module's docstring)."""
    try:
        spec = _SkeletonSpec.model_validate(data)
    except ValidationError as exc:
        err = exc.errors()[0]
        loc = ".".join(str(p) for p in err["loc"])
        raise BadInput(f"field {loc}: {err['msg']}", where=where) from None
    joints = tuple(j.name for j in spec.joints)
    sides = tuple(j.side if j.side is not None else side_of(j.name) for j in spec.joints)
    index = {n: i for i, n in enumerate(joints)}
    limbs: list[tuple[int, int]] = []
    for n, (a, b) in enumerate(spec.limbs):
        ends = []
        for end in (a, b):
            if isinstance(end, int):
                if not 0 <= end < len(joints):
                    raise BadInput(f"field limbs.{n}: joint index {end} out of range", where=where)
                ends.append(end)
            elif end in index:
                ends.append(index[end])
            else:
                raise BadInput(f"field limbs.{n}: unknown joint {end!r}", where=where)
        if ends[0] == ends[1]:
            raise BadInput(f"field limbs.{n}: a limb joins a joint to itself", where=where)
        pair = (ends[0], ends[1])
        if pair in limbs or pair[::-1] in limbs:
            raise BadInput(f"field limbs.{n}: limb {a}-{b} is listed twice", where=where)
        limbs.append(pair)
    try:
        skeleton = Skeleton(
            name=spec.name,
            joints=joints,
            sides=sides,
            limbs=tuple(limbs),
            sigmas=tuple(j.sigma for j in spec.joints),
        )
        _ = skeleton.flip_pairs
    except BadInput as exc:
        raise BadInput(exc.what, where=where, hint=exc.hint) from None
    return skeleton


def load_skeleton(path: str | Path) -> Skeleton:
    """Read and validate a custom skeleton JSON file.

    Raises
    ------
    BadInput
        When the file cannot be read or does not describe a valid skeleton; the message names
        the file and the field.
    """
    return skeleton_from_dict(read_json(path, "the skeleton"), where=str(path))
