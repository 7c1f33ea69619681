"""Network maps in: one ``.npz`` per image with what a bottom-up estimator outputs.

Keys: ``confidence_maps`` ``(K, H, W)``, ``pafs`` ``(L, 2, H, W)`` (x channel, then y) and
``stride`` (image pixels per grid cell, an integer). The grid is the one of the training
targets (:mod:`app.analysis.targets`): ``H = ceil(height / stride)``,
``W = ceil(width / stride)``, cell ``(r, c)`` standing for the image point
``(c * stride + (stride - 1) / 2, r * stride + (stride - 1) / 2)``. Files are read with
``allow_pickle=False`` always, and a file whose arrays would inflate past :data:`MAX_BYTES` is
refused before anything is decompressed.
"""

from __future__ import annotations

import math
import zipfile
from dataclasses import dataclass
from pathlib import Path, PurePosixPath

import numpy as np

from app.errors import BadInput
from app.model.labels import Frame
from app.model.skeleton import Skeleton

#: Largest uncompressed size of one file's arrays (2 GiB).
MAX_BYTES = 2 * 2**30


@dataclass(frozen=True)
class NetworkMaps:
    """One image's network output, as float32 arrays."""

    confidence_maps: np.ndarray  # (K, H, W)
    pafs: np.ndarray  # (L, 2, H, W)
    stride: int


def read_maps(path: str | Path, skeleton: Skeleton, image_size: tuple[int, int]) -> NetworkMaps:
    """Read and validate one maps file for an image of ``image_size = (width, height)``.

    Raises
    ------
    BadInput
        Naming the file and the key when the file is unreadable, a key is missing, a shape does
        not fit the skeleton or the image, the stride is not a positive integer, or a value is
        not finite.
    """
    path = Path(path)
    where = str(path)
    try:
        with zipfile.ZipFile(path) as zf:
            total = sum(info.file_size for info in zf.infolist())
        if total > MAX_BYTES:
            raise BadInput(f"the arrays would take {total / 2**30:.1f} GiB; refused", where=where)
        with np.load(path, allow_pickle=False) as npz:
            missing = [k for k in ("confidence_maps", "pafs", "stride") if k not in npz.files]
            if missing:
                raise BadInput(f"key {missing[0]} is missing (keys: {', '.join(npz.files)})",
                               where=where)
            cmaps = npz["confidence_maps"]
            pafs = npz["pafs"]
            stride_arr = npz["stride"]
    except BadInput:
        raise
    except (OSError, ValueError, EOFError, zipfile.BadZipFile, KeyError) as exc:
        raise BadInput(f"not a readable .npz of arrays ({exc})", where=where) from None
    if stride_arr.shape not in ((), (1,)) or not np.issubdtype(stride_arr.dtype, np.number):
        raise BadInput("key stride: must be one integer", where=where)
    stride_value = float(stride_arr.reshape(-1)[0])
    if not stride_value.is_integer() or not 1 <= stride_value <= 256:
        raise BadInput(f"key stride: {stride_value:g} is not an integer between 1 and 256",
                       where=where)
    stride = int(stride_value)
    width, height = image_size
    grid = (math.ceil(height / stride), math.ceil(width / stride))
    k, n_limbs = skeleton.num_joints, len(skeleton.limbs)
    for key, arr, want in (("confidence_maps", cmaps, (k, *grid)),
                           ("pafs", pafs, (n_limbs, 2, *grid))):
        if not np.issubdtype(arr.dtype, np.floating):
            raise BadInput(f"key {key}: dtype {arr.dtype} is not floating point", where=where)
        if arr.shape != want:
            raise BadInput(
                f"key {key}: shape {arr.shape}, expected {want} for {k} joints, {n_limbs} limbs "
                f"and a {width}x{height} image at stride {stride}", where=where)
        if not np.isfinite(arr).all():
            raise BadInput(f"key {key}: holds values that are not finite numbers", where=where)
    return NetworkMaps(cmaps.astype(np.float32, copy=False), pafs.astype(np.float32, copy=False),
                       stride)


def match_map_files(folder: str | Path, frames: list[Frame]) -> dict[int, Path]:
    """Frame id -> maps file: ``<folder>/<file name without suffix>.npz``, else a unique
    ``<base name>.npz`` anywhere under ``folder``.

    Raises
    ------
    BadInput
        When ``folder`` is not a folder, or a ``.npz`` file under it belongs to no frame (or to
        several), so that nothing is imported against the wrong image.
    """
    folder = Path(folder)
    if not folder.is_dir():
        raise BadInput("not a folder of .npz maps", where=str(folder))
    files = sorted(folder.rglob("*.npz"))
    by_rel = {p.relative_to(folder).with_suffix("").as_posix(): p for p in files}
    by_stem: dict[str, list[Frame]] = {}
    for f in frames:
        by_stem.setdefault(PurePosixPath(f.file_name).stem, []).append(f)
    out: dict[int, Path] = {}
    claimed: dict[Path, int] = {}
    for f in frames:
        rel = PurePosixPath(f.file_name).with_suffix("").as_posix()
        path = by_rel.get(rel)
        if path is None:
            candidates = [p for p in files if p.stem == PurePosixPath(f.file_name).stem]
            if len(candidates) == 1 and len(by_stem[PurePosixPath(f.file_name).stem]) == 1:
                path = candidates[0]
        if path is not None:
            out[f.id] = path
            claimed[path] = f.id
    for p in files:
        if p not in claimed:
            raise BadInput("matches no image of the project", where=str(p),
                           hint="name each file after its image, e.g. frame_0001.npz")
    return out
