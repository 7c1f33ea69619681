"""Jobs that need the analysis core: import network maps, triage, export training targets.

Shared by the command line and the app (which runs them off the UI thread with a
:class:`~app.progress.Progress`). Every job that writes is all-or-nothing.
"""

from __future__ import annotations

import contextlib
import json
import logging
import math
import os
import shutil
import tempfile
import threading
import time
from collections import OrderedDict
from collections.abc import Iterator, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from app import map_runs
from app.analysis.targets import confidence_maps, loss_mask, part_affinity_fields
from app.errors import BadInput, NotFound
from app.fileio import read_json
from app.formats.maps import NetworkMaps, match_map_files, read_maps, read_npz
from app.jobs import EXPORT_STATES, choose_frames
from app.map_runs import Found, found_person, group_runs, grouping_runs, map_items, packed_runs
from app.model.labels import (
    AUTO,
    GROUPED_ALONE,
    GROUPED_FRAME_BEFORE,
    Frame,
    FrameLabels,
    FrameState,
    Person,
)
from app.model.sequences import NOT_SEQUENCES, parse_not_sequences, sequences
from app.model.skeleton import Skeleton
from app.parallel import ordered_map
from app.progress import Progress
from app.store.project import Project
from app.workfiles import Claim, sweep

log = logging.getLogger(__name__)

TARGETS_FORMAT = "posewright-training-targets"
TARGETS_VERSION = 1


def import_maps(project: Project, folder: str | Path,
                progress: Progress | None = None, workers: int = 1,
                frame_before: bool | None = None) -> dict[str, int]:
    """Import one ``.npz`` of network maps per image from ``folder`` (see
    :mod:`app.formats.maps`), all or nothing.

    The maps are kept (their location is recorded) for triage and owner suggestions. Frames
    that have no people yet get auto-labels grouped from the maps with
    :func:`app.analysis.association.group_people`; frames that already have people keep them
    (re-importing maps never overwrites a correction). ``workers`` processes read and group
    the maps (:mod:`app.parallel`); this one stores them, with the same result whatever the
    number.

    With ``frame_before`` (default :data:`app.map_runs.FRAME_BEFORE`, on; ``import-maps
    --each-frame-alone`` turns it off), the frames of a sequence
    (:mod:`app.model.sequences`) are grouped in order, each with the people of the frame
    before it as ``previous``, so that near ties between overlapping people are decided as
    on that frame: the people just grouped there, or, where that frame keeps its people,
    those. They go to the workers in runs of :data:`app.map_runs.GROUPING_RUN` consecutive
    frames that have maps in ``folder``; the first frame of a run, a frame whose neighbour
    before it has no maps here, and a frame in no sequence (a folder marked not a sequence)
    are grouped without a frame before. Without it, every frame is grouped alone.

    Each frame grouped here records how (:attr:`app.model.labels.Frame.grouping`, for
    triage's weights): ``frame-before`` for the frames of a run of two or more, the run's
    first (grouped without a frame before) included, since triage's frame-before weights were
    fitted on whole runs; ``alone`` for every other frame. A frame that keeps its people keeps
    its record.
    """
    progress = progress or Progress()
    frames = {f.id: f for f in project.frames()}
    files = match_map_files(folder, list(frames.values()))
    has_people = project.frames_with_people()
    order = sorted(files.items())
    for frame_id, path in order:
        if frames[frame_id].status != "ok":
            raise BadInput(f"the image of frame {frame_id} is {frames[frame_id].status}; its "
                           "size is unknown", where=str(path))
    marked = parse_not_sequences(project.meta(NOT_SEQUENCES))
    in_order = map_runs.FRAME_BEFORE if frame_before is None else frame_before
    runs = grouping_runs([s.frame_ids for s in sequences(frames.values(), marked)]
                         if in_order else [], files)
    # A frame that keeps its people is not grouped; in order, they are the next frame's
    # frame before (read only then: alone, each frame is a run of its own).
    kept = project.people_of_frames(has_people & files.keys()) if in_order else {}
    # Plain numbers and arrays, so that the workers need not import the model (app.map_runs).
    k = project.skeleton.num_joints
    packs = packed_runs(runs)  # the longest runs first: the results are kept by frame
    items = map_items(k, project.skeleton.limbs, packs, files, {
        f: (frames[f].width, frames[f].height) for f in files},
        {f: [p.keypoints for p in kept.get(f, [])] for f in has_people & files.keys()})
    results: dict[int, tuple[int, Found | None]] = {}
    for pack, found in zip(packs, ordered_map(group_runs, items, workers, progress,
                                              "reading maps", reads_only=True), strict=True):
        results.update(zip((f for run in pack for f in run), found, strict=True))
    progress.step(len(packs), len(packs), "reading maps")
    grouped = [(frame_id, found) for frame_id, _ in order
               for found in _people_found(results[frame_id][1])]
    sources = (AUTO,) * k
    in_runs = {f for run in runs if len(run) > 1 for f in run}
    new = sorted(files.keys() - has_people)  # the frames grouped here (the rest keep theirs)
    with project.bulk("ImportMaps", f"import maps from {Path(folder).name}",
                      f"folder:{Path(folder).name}") as b:
        for frame_id, path in files.items():
            b.set_maps(frame_id, path, results[frame_id][0])
        b.set_grouping([f for f in new if f not in in_runs], GROUPED_ALONE)
        b.set_grouping([f for f in new if f in in_runs], GROUPED_FRAME_BEFORE)
        first = b.allocate_person_ids(len(grouped))
        b.add_people((f, Person(first + n, kp, scores, sources, score))
                     for n, (f, (kp, scores, score)) in enumerate(grouped))
        b.count("frames with maps", len(files))
        b.count("frames grouped", len({f for f, _ in grouped}))
    return b.stats


def _people_found(found: Found | None) -> Iterator[tuple[np.ndarray, np.ndarray, float]]:
    """Each person of a frame's :data:`~app.map_runs.Found`: keypoints, scores, score."""
    if found is not None:
        yield from zip(found[0], found[1], found[2], strict=True)


def _auto_person(found: np.ndarray, k: int) -> Person:
    """A person grouped from maps (``found``: ``(K, 3)`` rows of ``x, y, score``), without an
    id, its joints all :data:`~app.model.labels.AUTO`."""
    kp, scores, score = found_person(found, k)
    return Person(0, kp, scores, (AUTO,) * k, score)


def load_maps(project: Project, frame: Frame) -> NetworkMaps | None:
    """The frame's network maps if the project has them and they still read, else None."""
    where = project.maps_path(frame.id)
    return _usable_maps(None if where is None else where[0], frame, project.skeleton)


def _usable_maps(path: str | Path | None, frame: Frame, skeleton: Skeleton) -> NetworkMaps | None:
    """The maps in ``path`` for ``frame``, or None when there are none or they do not read."""
    if path is None or frame.status != "ok":
        return None
    try:
        return read_maps(path, skeleton, (frame.width, frame.height))
    except BadInput as exc:
        log.warning("maps of frame %s are not usable: %s", frame.id, exc)
        return None


# ---------------------------------------------------------------------- training targets

@dataclass(frozen=True)
class TargetSettings:
    """Every parameter of a training-target export (all in image pixels)."""

    stride: int = 8
    sigma: float = 7.0
    limb_width: float = 8.0
    dtype: str = "float32"
    box_margin: float = 0.25
    min_margin: float | None = None  # default: 3 * sigma

    def check(self) -> None:
        if not (isinstance(self.stride, int) and 1 <= self.stride <= 256):
            raise BadInput(f"stride {self.stride} must be an integer between 1 and 256",
                           where="--stride")
        for name in ("sigma", "limb_width"):
            value = getattr(self, name)
            if not (math.isfinite(value) and value > 0):
                raise BadInput(f"{name} {value} must be a positive number",
                               where="--" + name.replace("_", "-"))
        if self.dtype not in ("float16", "float32"):
            raise BadInput(f"dtype {self.dtype} is not float16 or float32", where="--dtype")


def export_targets(project: Project, out_dir: str | Path, settings: TargetSettings | None = None,
                   states: Sequence[FrameState] | None = EXPORT_STATES,
                   progress: Progress | None = None, workers: int = 1) -> dict[str, Any]:
    """Write training targets: one ``.npz`` per frame plus ``manifest.json``.

    Each ``.npz`` holds ``confidence_maps (K, H, W)``, ``pafs (L, 2, H, W)`` and
    ``loss_mask (K + 2L, H, W)`` (channel order: the K maps, then each limb's x and y field);
    the manifest holds every parameter, the skeleton and the frame list, so a training script
    needs nothing else. Image paths in it are relative to ``out_dir`` (each frame's ``image``,
    and ``images_root``, the project's images folder, to which ``file_name`` is relative).
    ``states`` picks the frames (None: all); a frame whose image cannot be read is never
    written but listed in the manifest's ``skipped`` (the rule of
    :func:`app.jobs.choose_frames`, shared with the COCO export). The folder appears complete
    or not at all: it is written beside ``out_dir`` (``OUT_DIR.<random>.partial``) and renamed
    at the end; such folders that a killed run left are removed first (:mod:`app.workfiles`).
    ``workers`` processes compute and write the frames' files (:mod:`app.parallel`), the same
    files whatever the number. Returns ``frames`` written, ``skipped``, ``out`` and
    :meth:`app.jobs.ExportChoice.counts`.
    """
    settings = settings or TargetSettings()
    settings.check()
    progress = progress or Progress()
    out = Path(out_dir)
    if out.exists() and (not out.is_dir() or any(out.iterdir())):
        raise BadInput("the folder exists and is not empty", where=str(out),
                       hint="choose a new folder for the export")
    parent = out.parent if str(out.parent) else Path(".")
    if not parent.is_dir():
        raise NotFound(f"{out}: the folder {parent} does not exist")
    choice = choose_frames(project, states)
    frames, skipped = choice.frames, choice.unreadable
    people = project.people_by_frame()
    regions = project.regions_by_frame()
    sk = project.skeleton
    limbs = sk.limb_array
    min_margin = settings.min_margin if settings.min_margin is not None else 3 * settings.sigma
    sweep(out, ".partial")
    work = Path(tempfile.mkdtemp(prefix=out.name + ".", suffix=".partial", dir=parent))
    claim = Claim(work)  # so that a later run can tell this folder from a killed run's
    entries = []
    empty = np.zeros((0, sk.num_joints, 3))

    def items() -> Iterator[tuple[Any, ...]]:
        for f in frames:
            kp = np.stack([p.keypoints for p in people[f.id]]) if people.get(f.id) else empty
            polys = [poly for _, polygons, _ in regions.get(f.id, []) for poly in polygons]
            yield (str(work / f"{f.id}.npz"), (f.width, f.height), kp, polys, limbs, settings,
                   min_margin)

    out_real = out.resolve()  # once, not for every frame
    try:
        # closing: no worker may still be writing when a failure removes the folder.
        with contextlib.closing(ordered_map(_write_targets, items(), workers, progress,
                                            "writing training targets",
                                            total=len(frames))) as grids:
            for f, grid in zip(frames, grids, strict=True):
                entries.append({"id": f.id, "file_name": f.file_name,
                                "image": _relative_to(project.image_path(f), out_real, True),
                                "width": f.width, "height": f.height, "state": f.state.value,
                                "targets": f"{f.id}.npz", "people": len(people.get(f.id, [])),
                                "grid": list(grid)})
        progress.step(len(frames), len(frames), "writing training targets")
        manifest = {
            "format": TARGETS_FORMAT,
            "version": TARGETS_VERSION,
            "created": time.strftime("%Y-%m-%dT%H:%M:%S%z"),
            "project_id": project.project_id,
            "parameters": {
                "stride": settings.stride, "sigma": settings.sigma,
                "limb_width": settings.limb_width, "dtype": settings.dtype,
                "loss_mask_box_margin": settings.box_margin, "loss_mask_min_margin": min_margin,
                "states": None if states is None else [s.value for s in states],
                "grid": "H = ceil(height / stride), W = ceil(width / stride); cell (r, c) "
                        "stands for the image point (c*stride + (stride-1)/2, "
                        "r*stride + (stride-1)/2)",
                "confidence_maps": "S_j(p) = max_k exp(-|p - x_jk|^2 / sigma^2) over people "
                                   "whose joint j is labelled (v > 0)",
                "pafs": "mean over the people covering p of the limb's unit vector; p is on "
                        "a limb when 0 <= u.(p - x1) <= |x2 - x1| and |u_perp.(p - x1)| <= "
                        "limb_width; channel order x then y",
                "loss_mask": "channels: K confidence maps, then x and y of each limb; 0 in "
                             "ignore regions and on an unlabelled joint's channels inside its "
                             "person's box",
            },
            "skeleton": sk.to_dict(),
            "images_root": None if project.images_root is None
            else _relative_to(project.images_root, out),
            "frames": entries,
            "skipped": [{"id": f.id, "file_name": f.file_name, "status": f.status}
                        for f in skipped],
        }
        with open(work / "manifest.json", "w", encoding="utf-8") as fh:
            json.dump(manifest, fh, indent=1, allow_nan=False)
            fh.flush()
            os.fsync(fh.fileno())
        if out.exists():
            out.rmdir()
        os.replace(work, out)
    except BaseException:
        shutil.rmtree(work, ignore_errors=True)
        raise
    finally:
        claim.release()
    return {"frames": len(entries), "skipped": len(skipped), "out": str(out),
            **choice.counts()}


def _write_targets(item: tuple[Any, ...]) -> tuple[int, int]:
    """Compute one frame's targets and write its ``.npz``; returns the grid ``(H, W)``. Run
    in a worker process (:func:`export_targets`)."""
    path, size, kp, polys, limbs, settings, min_margin = item
    dtype = np.float16 if settings.dtype == "float16" else np.float32
    cm = confidence_maps(kp, size, settings.stride, settings.sigma)
    paf = part_affinity_fields(kp, limbs, size, settings.stride, settings.limb_width)
    mask = loss_mask(kp, limbs, size, settings.stride, ignore=polys or None,
                     box_margin=settings.box_margin, min_margin=min_margin)
    np.savez_compressed(path, confidence_maps=cm.astype(dtype), pafs=paf.astype(dtype),
                        loss_mask=mask.astype(dtype))
    return cm.shape[1], cm.shape[2]


def _relative_to(path: Path, folder: Path, resolved: bool = False) -> str:
    """``path`` relative to ``folder`` (POSIX separators), so that the manifest names no home
    folder and survives moving the export together with the project; absolute only when no
    relative path exists (another drive). ``resolved``: ``folder`` is resolved already."""
    try:
        return Path(os.path.relpath(path.resolve(), folder if resolved else folder.resolve())
                    ).as_posix()
    except ValueError:
        return path.resolve().as_posix()


# ---------------------------------------------------------------------- triage

def run_triage(project: Project, progress: Progress | None = None,
               frame_ids: Sequence[int] | None = None,
               findings: bool = True, workers: int = 1) -> dict[int, Any]:
    """Triage every frame (or the given ones), store the scores and reasons and (unless
    ``findings`` is False) the findings with their proposed fixes, and return the
    :class:`~app.analysis.triage.FrameTriage` of each frame by id (its ``findings`` filled
    in).

    With ``workers`` above 1 the frames are triaged in that many processes (this one reads
    each frame's labels and stores every result, see :mod:`app.parallel`); the results are the
    same whatever the number.
    """
    progress = progress or Progress()
    wanted = None if frame_ids is None else set(frame_ids)
    frames = [f for f in project.frames() if wanted is None or f.id in wanted]
    skeleton = project.skeleton

    def items() -> Iterator[tuple[Frame, FrameLabels, str | None, Skeleton, bool]]:
        for f in frames:
            where = project.maps_path(f.id)
            yield (f, project.labels(f.id), None if where is None else str(where[0]),
                   skeleton, findings)

    results = {}
    digests = {}
    for f, (verdict, digest) in zip(
            frames, ordered_map(_triage_one, items(), workers, progress, "triage",
                                total=len(frames)), strict=True):
        results[f.id] = verdict
        digests[f.id] = digest
    progress.step(len(frames), len(frames), "triage")
    project.store_triage({fid: (t.score, [r.to_dict() for r in t.reasons])
                          for fid, t in results.items()})
    if findings:
        names = {f.id: f.file_name for f in frames}
        project.store_findings({fid: (digests[fid], [x.to_dict(names[fid])
                                                     for x in t.findings])
                                for fid, t in results.items()})
    return results


#: How many frames' maps (with their memo of line integrals) :func:`_memo_maps` keeps.
MEMO_FRAMES = 4
_memos: OrderedDict[tuple[Any, ...], Any] = OrderedDict()
_memos_lock = threading.Lock()


def _memo_maps(path: str | None, frame: Frame, skeleton: Skeleton) -> Any:
    """The frame's maps in a :class:`~app.analysis.triage.model_evidence.FieldMemo` (None
    without usable maps), kept for the last :data:`MEMO_FRAMES` frames of this process.

    Triage and the findings share the memo; and when a frame is triaged again after an edit
    (the walk recomputes its findings after every accept) the maps are not read again and
    every limb of a person the edit left alone is a line integral already known. The memo's
    values are those computed from the maps (the maps file is part of the key: a new file,
    or the same one rewritten, is read afresh), so the results are those of a fresh read."""
    from app.analysis.triage.model_evidence import FieldMemo

    if path is None or frame.status != "ok":
        return None
    try:
        stat = os.stat(path)
    except OSError:
        return _usable_maps(path, frame, skeleton)
    key = (str(path), stat.st_mtime_ns, stat.st_size, frame.width, frame.height,
           tuple(skeleton.joints), tuple(map(tuple, skeleton.limbs)))
    with _memos_lock:
        memo = _memos.get(key)
        if memo is not None:
            _memos.move_to_end(key)
            return memo
    maps = _usable_maps(path, frame, skeleton)
    if maps is None:
        return None
    memo = FieldMemo(maps)
    with _memos_lock:
        _memos[key] = memo
        while len(_memos) > MEMO_FRAMES:
            _memos.popitem(last=False)
    return memo


def _triage_one(item: tuple[Frame, FrameLabels, str | None, Skeleton, bool]) -> tuple[Any, str]:
    """One frame's verdict (with its findings when asked) and the digest of the labels it
    was computed from; run in a worker process (:func:`run_triage`)."""
    from app.analysis.triage import triage_frame
    from app.analysis.triage.findings import labels_digest, placed_by_people
    from app.jobs_findings import findings_from_labels

    frame, labels, maps_path, skeleton, findings = item
    ps = list(labels.people.values())
    maps = _memo_maps(maps_path, frame, skeleton)
    verdict = triage_frame(
        {p.id: p.keypoints for p in ps}, skeleton,
        scores={p.id: p.scores for p in ps}, maps=maps,
        image_size=(frame.width, frame.height) if frame.width > 0 else None,
        placed=placed_by_people(labels), grouping=frame.grouping)
    if findings:
        verdict.findings = findings_from_labels(frame, labels, skeleton, maps, verdict)
    return verdict, labels_digest(labels)


# ---------------------------------------------------------------------- checking an export

@dataclass(frozen=True)
class TargetsCheck:
    """What :func:`check_targets` found: how many frames it read and every problem, each
    naming the file (and the key) it is about."""

    frames: int
    problems: list[str]

    @property
    def ok(self) -> bool:
        return not self.problems


#: Slack for values stored as float16 (its spacing just below 1 is about 5e-4).
_CHECK_TOLERANCE = {"float16": 2e-3, "float32": 1e-5}


def check_targets(out_dir: str | Path, progress: Progress | None = None) -> TargetsCheck:
    """Re-read a training-target export and check it against its own manifest.

    Checks: the manifest is the export's format and version, its skeleton is valid and its
    parameters hold a known dtype and a stride; every frame entry names a file that exists;
    each file holds exactly ``confidence_maps (K, H, W)``, ``pafs (L, 2, H, W)`` and
    ``loss_mask (K + 2L, H, W)`` for the skeleton's ``K`` joints and ``L`` limbs and the grid
    ``H = ceil(height / stride)``, ``W = ceil(width / stride)`` of the frame's size, in the
    manifest's dtype; every value is finite; confidence maps lie in [0, 1]; each field vector
    is at most 1 long (both with a slack for float16 rounding); the loss mask is 0 or 1. A
    ``.npz`` file that no frame entry names is a problem too. Files are read with
    :func:`app.formats.maps.read_npz` (no pickles, no size taken on trust).
    """
    from app.model.skeleton import skeleton_from_dict

    progress = progress or Progress()
    out = Path(out_dir)
    where = out / "manifest.json"
    manifest = read_json(where, "the manifest")
    if not isinstance(manifest, dict) or manifest.get("format") != TARGETS_FORMAT:
        raise BadInput(f"field format: expected {TARGETS_FORMAT!r}", where=str(where))
    if manifest.get("version") != TARGETS_VERSION:
        raise BadInput(f"field version: {manifest.get('version')!r}, this Posewright reads "
                       f"version {TARGETS_VERSION}", where=str(where))
    skeleton = skeleton_from_dict(manifest.get("skeleton"), where=f"{where}: skeleton")
    params = manifest.get("parameters")
    if not isinstance(params, dict):
        raise BadInput("field parameters is missing", where=str(where))
    dtype, stride = params.get("dtype"), params.get("stride")
    if dtype not in _CHECK_TOLERANCE:
        raise BadInput(f"field parameters.dtype: {dtype!r} is not float16 or float32",
                       where=str(where))
    if not (isinstance(stride, int) and stride >= 1):
        raise BadInput(f"field parameters.stride: {stride!r} is not a positive integer",
                       where=str(where))
    frames = manifest.get("frames")
    if not isinstance(frames, list):
        raise BadInput("field frames is not a list", where=str(where))
    tol = _CHECK_TOLERANCE[dtype]
    k, n_limbs = skeleton.num_joints, len(skeleton.limbs)
    problems: list[str] = []
    named: set[str] = set()
    for n, entry in enumerate(frames):
        progress.step(n, len(frames), "checking training targets")
        record = f"{where}: frames[{n}]"
        try:
            name = str(entry["targets"])
            width, height = int(entry["width"]), int(entry["height"])
            grid = [int(v) for v in entry["grid"]]
        except (KeyError, TypeError, ValueError) as exc:
            problems.append(f"{record}: a field is missing or wrong ({exc})")
            continue
        if name in named:
            problems.append(f"{record}: file {name} is named by two frames")
            continue
        named.add(name)
        want = [math.ceil(height / stride), math.ceil(width / stride)]
        if grid != want:
            problems.append(f"{record}: field grid {grid}, expected {want} for a {width}x"
                            f"{height} image at stride {stride}")
        problems.extend(_check_target_file(out / name, (k, n_limbs, want[0], want[1]), dtype,
                                           tol))
    progress.step(len(frames), len(frames), "checking training targets")
    for extra in sorted(p.name for p in out.glob("*.npz")):
        if extra not in named:
            problems.append(f"{out / extra}: no frame of the manifest names this file")
    return TargetsCheck(len(frames), problems)


def _check_target_file(path: Path, shape: tuple[int, int, int, int], dtype: str,
                       tol: float) -> list[str]:
    k, n_limbs, h, w = shape
    expected = {"confidence_maps": (k, h, w), "pafs": (n_limbs, 2, h, w),
                "loss_mask": (k + 2 * n_limbs, h, w)}
    try:
        arrays = read_npz(path)
    except BadInput as exc:
        return [str(exc)]
    if set(arrays) != set(expected):
        return [f"{path}: keys {sorted(arrays)}, expected {sorted(expected)}"]
    problems = []
    for key, arr in arrays.items():
        if arr.shape != expected[key]:
            problems.append(f"{path}: key {key}: shape {arr.shape}, expected {expected[key]}")
        elif arr.dtype != np.dtype(dtype):
            problems.append(f"{path}: key {key}: dtype {arr.dtype}, the manifest says {dtype}")
        else:
            # numpy has no fast float16 loops: check in float32 (exact for float16 values).
            arrays[key] = arr = arr.astype(np.float32, copy=False)
            if not np.isfinite(arr).all():
                problems.append(f"{path}: key {key}: holds values that are not finite")
    if problems:
        return problems
    cm = arrays["confidence_maps"]
    if cm.size and (cm.min() < -tol or cm.max() > 1 + tol):
        problems.append(f"{path}: key confidence_maps: values from {cm.min():g} to "
                        f"{cm.max():g}, outside [0, 1]")
    paf = arrays["pafs"]
    squared = paf[:, 0] * paf[:, 0] + paf[:, 1] * paf[:, 1]
    if squared.size and squared.max() > (1 + tol) ** 2:
        problems.append(f"{path}: key pafs: a vector is {math.sqrt(squared.max()):.3g} long, "
                        "more than 1")
    mask = arrays["loss_mask"]
    if not ((mask == 0) | (mask == 1)).all():
        problems.append(f"{path}: key loss_mask: holds values other than 0 and 1")
    return problems
