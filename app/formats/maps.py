"""Network maps in: one ``.npz`` per image with what a bottom-up estimator outputs.

Keys: ``confidence_maps`` ``(K, H, W)``, ``pafs`` ``(L, 2, H, W)`` (x channel, then y) and
``stride`` (image pixels per grid cell, an integer). The grid is the one of the training
targets (:mod:`app.analysis.targets`): ``H = ceil(height / stride)``,
``W = ceil(width / stride)``, cell ``(r, c)`` standing for the image point
``(c * stride + (stride - 1) / 2, r * stride + (stride - 1) / 2)``. Files are read by
:func:`read_npz`: never a pickle, and a file whose arrays would inflate past :data:`MAX_BYTES`,
or whose headers declare more than the file holds, is refused before anything is decompressed
or allocated.

This module imports numpy and nothing of the app's model (its types only for the checker), so
that ``import-maps``'s workers, which read maps and nothing else, start without pydantic or
the model (:mod:`app.map_runs`).
"""

from __future__ import annotations

import math
import zipfile
from dataclasses import dataclass
from pathlib import Path, PurePosixPath
from typing import TYPE_CHECKING

import numpy as np

from app.errors import BadInput
from app.wording import count

if TYPE_CHECKING:
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
    return read_map_arrays(path, skeleton.num_joints, len(skeleton.limbs), image_size)


def read_map_arrays(path: str | Path, joints: int, limbs: int,
                    image_size: tuple[int, int]) -> NetworkMaps:
    """:func:`read_maps` for a skeleton of ``joints`` joints and ``limbs`` limbs, given as
    numbers (a worker that has not imported the model calls this one)."""
    path = Path(path)
    where = str(path)
    arrays = read_npz(path)
    missing = [k for k in ("confidence_maps", "pafs", "stride") if k not in arrays]
    if missing:
        raise BadInput(f"key {missing[0]} is missing (keys: {', '.join(arrays)})", where=where)
    cmaps, pafs, stride_arr = arrays["confidence_maps"], arrays["pafs"], arrays["stride"]
    if stride_arr.shape not in ((), (1,)) or not np.issubdtype(stride_arr.dtype, np.number):
        raise BadInput("key stride: must be one integer", where=where)
    stride_value = float(stride_arr.reshape(-1)[0])
    if not stride_value.is_integer() or not 1 <= stride_value <= 256:
        raise BadInput(f"key stride: {stride_value:g} is not an integer between 1 and 256",
                       where=where)
    stride = int(stride_value)
    width, height = image_size
    grid = (math.ceil(height / stride), math.ceil(width / stride))
    k, n_limbs = joints, limbs
    for key, arr, want in (("confidence_maps", cmaps, (k, *grid)),
                           ("pafs", pafs, (n_limbs, 2, *grid))):
        if not np.issubdtype(arr.dtype, np.floating):
            raise BadInput(f"key {key}: dtype {arr.dtype} is not floating point", where=where)
        if arr.shape != want:
            raise BadInput(
                f"key {key}: shape {arr.shape}, expected {want} for {count(k, 'joint')}, "
                f"{count(n_limbs, 'limb')} and a {width}x{height} image at stride {stride}",
                where=where)
        if not np.isfinite(arr).all():
            raise BadInput(f"key {key}: holds values that are not finite numbers", where=where)
    return NetworkMaps(cmaps.astype(np.float32, copy=False), pafs.astype(np.float32, copy=False),
                       stride)


def read_npz(path: str | Path, max_bytes: int = MAX_BYTES) -> dict[str, np.ndarray]:
    """Every array of an ``.npz`` file by key, read without pickles and without trusting the
    sizes the file declares.

    Each member must be a ``.npy`` array (``KEY.npy``, format version 1 or 2) of a plain dtype
    (no Python objects), and its header may declare no more data than the member holds; the
    members together may inflate to at most ``max_bytes``. Everything is checked before an
    array is allocated, so a header declaring a huge shape costs nothing.

    Raises
    ------
    BadInput
        Naming the file and, where it is about one, the member.

    Examples
    --------
    >>> import os, tempfile
    >>> path = os.path.join(tempfile.mkdtemp(), "m.npz")
    >>> np.savez(path, stride=np.array(8), pafs=np.zeros((1, 2, 3, 4), np.float32))
    >>> {k: v.shape for k, v in read_npz(path).items()}
    {'stride': (), 'pafs': (1, 2, 3, 4)}
    """
    where = str(path)
    arrays: dict[str, np.ndarray] = {}
    try:
        with zipfile.ZipFile(path) as zf:
            infos = zf.infolist()
            total = sum(info.file_size for info in infos)
            if total > max_bytes:
                raise BadInput(f"the arrays would take {total / 2**30:.1f} GiB; refused",
                               where=where)
            for info in infos:
                _check_member(zf, info, where)
                with zf.open(info) as fh:
                    arrays[info.filename[:-len(".npy")]] = np.lib.format.read_array(
                        fh, allow_pickle=False)
    except BadInput:
        raise
    except (OSError, ValueError, EOFError, zipfile.BadZipFile, KeyError) as exc:
        raise BadInput(f"not a readable .npz of arrays ({exc})", where=where) from None
    return arrays


def _check_member(zf: zipfile.ZipFile, info: zipfile.ZipInfo, where: str) -> None:
    """Refuse a member that is not a ``.npy`` array of a plain dtype whose data fits in it."""
    name = info.filename
    if not name.endswith(".npy"):
        raise BadInput(f"member {name!r} is not a .npy array", where=where)
    with zf.open(info) as fh:
        version = np.lib.format.read_magic(fh)
        if version == (1, 0):
            shape, _, dtype = np.lib.format.read_array_header_1_0(fh)
        elif version == (2, 0):
            shape, _, dtype = np.lib.format.read_array_header_2_0(fh)
        else:
            raise BadInput(f"member {name!r}: .npy format version {version} is not read",
                           where=where, hint="save it with numpy.savez")
        header = fh.tell()
    if dtype.hasobject:
        raise BadInput(f"member {name!r}: holds Python objects, which are never loaded",
                       where=where)
    declared = math.prod(shape) * dtype.itemsize
    if declared > info.file_size - header:
        raise BadInput(f"member {name!r}: its header declares {declared:,} bytes of shape "
                       f"{shape}, but it holds {info.file_size - header:,}", where=where)


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
