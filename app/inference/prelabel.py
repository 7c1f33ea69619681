"""Pre-labelling: run a user's ONNX model over the project's frames and keep what it finds.

For each selected frame the model's maps (:class:`~app.inference.network.PoseNetwork`) are
grouped into people with :func:`app.analysis.association.group_people` and stored as
auto-labels (per-joint scores, provenance ``auto``); the maps are kept in the project
(``maps/prelabel-<run id>/<frame id>.npz``, float16) for triage and owner suggestions. Frames
that already have people keep them (a correction is never overwritten); their maps are still
kept.

All or nothing: each run writes its maps into a folder of its own beside the earlier runs'
(:meth:`app.store.Project.new_map_run`), and the people, the frames' map rows and the run's
record land in one transaction at the end; the maps the run replaces are deleted only after
that commit. A model that fails on frame 900, a cancel or a crash at any moment changes
nothing, and the maps on disk are always those the database names (a kill -9 at the wrong
moment is settled by the next open, see :mod:`app.store.recovery`).

Before the model is even loaded, the config's planned tensors are checked against the memory
budget (:mod:`app.inference.budget`).
"""

from __future__ import annotations

import contextlib
import hashlib
import json
import logging
import os
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import cv2
import numpy as np

from app.analysis.association import group_people
from app.errors import BadInput, NotFound
from app.formats.images import max_pixels, read_image, set_max_megapixels
from app.inference.budget import check_budget
from app.inference.config import PrelabelConfig, default_config, load_config
from app.inference.network import PoseNetwork
from app.jobs_analysis import _auto_person
from app.model.labels import GROUPED_ALONE, Frame, FrameState, Person
from app.model.skeleton import Skeleton
from app.parallel import default_workers, ordered_map
from app.progress import Progress
from app.store.project import Project

log = logging.getLogger(__name__)

__all__ = ["RUN_KIND", "find_config", "parse_frames", "prelabel"]

#: Each run keeps its maps in ``maps/<RUN_KIND>-<run id>/`` of the project folder.
RUN_KIND = "prelabel"


def parse_frames(text: str, frames: Sequence[Frame]) -> list[Frame]:
    """The frames named by ``text``: ids and ranges (``"1,2,5-9"``), ``"untouched"`` or
    ``"all"``.

    Raises
    ------
    BadInput
        When the text is not such a list or names a frame the project does not have.

    Examples
    --------
    >>> fs = [Frame(i, f"{i}.png", f"{i}.png", 8, 8) for i in (1, 2, 3, 7)]
    >>> [f.id for f in parse_frames("1, 3-7", fs)]
    [1, 3, 7]
    """
    spec = text.strip().lower()
    if spec == "all":
        return list(frames)
    if spec == "untouched":
        return [f for f in frames if f.state is FrameState.UNTOUCHED]
    by_id = {f.id: f for f in frames}
    wanted: set[int] = set()
    for part in (p.strip() for p in spec.split(",")):
        first, dash, last = part.partition("-")
        try:
            lo = int(first)
            hi = int(last) if dash else lo
        except ValueError:
            raise BadInput(f"{part!r} is not a frame id or a range like 5-9", where="--frames",
                           hint="give ids and ranges (1,2,5-9), 'untouched' or 'all'") from None
        if hi < lo:
            raise BadInput(f"the range {part} is empty", where="--frames")
        if dash:
            inside = {i for i in by_id if lo <= i <= hi}
            if not inside:
                raise BadInput(f"the project has no frame in {part}", where="--frames")
            wanted |= inside
        elif lo not in by_id:
            raise BadInput(f"the project has no frame {lo}", where="--frames")
        else:
            wanted.add(lo)
    return [f for f in frames if f.id in wanted]


def find_config(model: str | Path, config: str | Path | None,
                project: Project) -> tuple[PrelabelConfig, str]:
    """The config to use and how to name it: ``config`` when given, else ``<model>.json``
    beside the model when it exists, else :func:`~app.inference.config.default_config`."""
    if config is not None:
        return load_config(config), str(config)
    beside = Path(model).with_suffix(".json")
    if beside.is_file():
        return load_config(beside), str(beside)
    return default_config(project.skeleton), "built-in config (no --config given)"


def prelabel(project: Project, model: str | Path, config: str | Path | None = None,
             frames: Sequence[int] | None = None,
             progress: Progress | None = None, workers: int = 1) -> dict[str, Any]:
    """Run ``model`` over the frames and store auto-labels and maps, all or nothing.

    Parameters
    ----------
    project
        Open for editing.
    model
        The ``.onnx`` file.
    config
        The config file (see :mod:`app.inference.config`); default: ``<model>.json`` beside
        the model, else the built-in default.
    frames
        Frame ids (default: every frame). Frames whose image is missing or unreadable are
        skipped and counted.
    progress
        Progress per frame; cancelling leaves the project unchanged.
    workers
        Processes that each load the model and run it on frames, write their maps and group
        them (:mod:`app.parallel`); this one stores the people. The result is the same
        whatever the number. The job keeps to that many cores: each process runs OpenCV
        (the model, the image's resizing) on one thread, except this one while it works
        alone (a short job, or before it asks for a pool), which takes ``workers`` threads
        (at most one a core) and gives them back when it asks for the pool, whose start
        needs the other core (:func:`app.parallel.ordered_map`'s ``sharing``). On two cores
        a second thread saved one process 7-19 % of its time (480 frames, seven pairs at
        load 2-5: 13.7-19.0 s against 15.9-22.5 s), a second process 33-48 %.

    Returns
    -------
    dict
        Counts: ``frames`` run, ``people`` added, ``frames grouped``, ``frames kept`` (they had
        people already), ``unreadable`` (skipped).

    Raises
    ------
    BadInput
        The model does not load, the config is wrong or would need more memory than the
        budget, or the outputs do not fit the config (nothing is written).
    """
    progress = progress or Progress()
    cfg, where = find_config(model, config, project)
    every = project.frames()
    if frames is not None:
        wanted = {int(i) for i in frames}
        missing = wanted - {f.id for f in every}
        if missing:
            raise NotFound(f"the project has no frame {min(missing)}")
        every = [f for f in every if f.id in wanted]
    # Frames registered over the pixel limit run once the limit is raised above them.
    limit = max_pixels()
    sizes = [(f.width, f.height) for f in every
             if f.status == "ok" or (f.status == "oversized" and f.width * f.height <= limit)]
    check_budget(cfg, sizes, project.skeleton.num_joints, len(project.skeleton.limbs),
                 where=where)
    network = PoseNetwork(model, cfg, project.skeleton, config_where=where)
    if not every:
        return {"frames": 0, "unreadable": 0}
    has_people = set(project.people_by_frame())
    grouping = cfg.grouping.model_dump()
    run = project.new_map_run(RUN_KIND)
    items = [(frame, str(project.image_path(frame)), str(run / f"{frame.id}.npz"),
              frame.id not in has_people, grouping) for frame in every]
    # A worker loads the model and runs OpenCV on one thread; frames run here (one worker,
    # or a job too short for a pool) use the network already loaded, on a thread a worker.
    start_args = (model, cfg, project.skeleton, where, limit)
    threads = cv2.getNumThreads()  # this process's, given back at the end
    alone = min(workers, default_workers())
    try:
        found: list[tuple[int, Person]] = []
        strides: dict[int, int] = {}
        unreadable = kept = 0
        # closing: no worker may still be writing maps when a failure drops the run.
        with contextlib.closing(ordered_map(_prelabel_one, items, workers, progress,
                                            "pre-labelling", _start_worker, start_args,
                                            here=(_use_network, (network, alone)),
                                            sharing=_one_thread)) as results:
            for frame, (stride, people) in zip(every, results, strict=True):
                if stride is None:
                    unreadable += 1
                    continue
                strides[frame.id] = stride
                if frame.id in has_people:
                    kept += 1
                found.extend((frame.id, person) for person in people)
        progress.step(len(every), len(every), "pre-labelling")
        _sync_folder(run)
        stats = _store(project, Path(model), cfg, run, strides, found, kept,
                       [f for f in strides if f not in has_people])
    finally:
        _use_network(None, threads)
        project.drop_map_run(run)
    stats["unreadable"] = unreadable
    return stats


#: The model of this process: the caller's with one worker, loaded by each worker process.
_network: PoseNetwork | None = None


def _use_network(network: PoseNetwork | None, threads: int | None = None) -> None:
    """Make ``network`` this process's model and, when given, run OpenCV on ``threads``."""
    global _network
    _network = network
    if threads is not None:
        cv2.setNumThreads(threads)


def _one_thread() -> None:
    """OpenCV on one thread in this process: run when it asks for a pool."""
    cv2.setNumThreads(1)


def _start_worker(model: str | Path, cfg: PrelabelConfig, skeleton: Skeleton, where: str,
                  pixel_limit: int) -> None:
    """Set up a worker process: the caller's pixel limit, OpenCV on one thread (one worker a
    core, see :func:`prelabel`), and the model."""
    set_max_megapixels(pixel_limit / 1e6)
    _use_network(PoseNetwork(model, cfg, skeleton, config_where=where), 1)


def _prelabel_one(item: tuple[Frame, str, str, bool, dict[str, Any]]
                  ) -> tuple[int | None, list[Person]]:
    """Run the model on one frame, write its maps and group them (when ``group``): the
    stride and the people found (without ids), or ``(None, [])`` when the image does not
    read. Run in a worker process (:func:`prelabel`)."""
    frame, image_path, maps_path, group, grouping = item
    if _network is None:
        raise RuntimeError("pre-labelling worker without a model")
    try:
        if frame.status in ("missing", "corrupt"):
            raise BadInput(f"the image is {frame.status}", where=frame.path)
        image = read_image(image_path)
    except (BadInput, NotFound) as exc:
        log.warning("frame %s: %s; skipped", frame.id, exc)
        return None, []
    maps = _network.maps(image, where=f"frame {frame.id}")
    _write_maps(Path(maps_path), maps.confidence_maps, maps.pafs, maps.stride)
    if not group:
        return maps.stride, []
    k = _network.skeleton.num_joints
    people = group_people(maps.confidence_maps, maps.pafs, _network.skeleton.limb_array,
                          stride=maps.stride, **grouping)
    return maps.stride, [_auto_person(person, k) for person in people]


def _write_maps(path: Path, confidence_maps: np.ndarray, pafs: np.ndarray, stride: int) -> None:
    """One frame's maps as float16, on disk (fsynced) before the run's commit names them."""
    with open(path, "wb") as fh:
        np.savez_compressed(fh, confidence_maps=confidence_maps.astype(np.float16),
                            pafs=pafs.astype(np.float16), stride=np.int64(stride))
        fh.flush()
        os.fsync(fh.fileno())


def _sync_folder(folder: Path) -> None:
    """Make the folder's new entries durable (where the system allows opening a folder)."""
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass  # some systems cannot sync a folder; the files themselves are synced
    finally:
        os.close(fd)


def _store(project: Project, model: Path, cfg: PrelabelConfig, run: Path,
           strides: dict[int, int], found: list[tuple[int, Person]],
           kept: int, grouped: Sequence[int]) -> dict[str, Any]:
    """One transaction: the people, each frame's maps row pointing into the run's folder,
    the run's record (which names the folder) and, for the frames ``grouped`` here, that
    their auto-labels were grouped each frame alone (:attr:`Frame.grouping`)."""
    record = {"model": str(model.resolve()), "model_sha256": _sha256(model),
              "config": cfg.model_dump(mode="json"),
              "maps": run.relative_to(project.folder).as_posix() if strides else None}
    with project.bulk("Prelabel", f"pre-label with {model.name}",
                      f"model:{model.name}") as b:
        first = b.allocate_person_ids(len(found))
        b.add_people((f, _with_id(p, first + n)) for n, (f, p) in enumerate(found))
        for frame_id, stride in strides.items():
            b.set_maps(frame_id, run / f"{frame_id}.npz", stride)
        b.set_grouping(grouped, GROUPED_ALONE)
        b.set_meta("last_prelabel", json.dumps(record))
        b.count("frames", len(strides))
        b.count("frames grouped", len({f for f, _ in found}))
        b.count("frames kept", kept)
    return dict(b.stats)


def _with_id(p: Person, pid: int) -> Person:
    return Person(pid, p.keypoints, p.scores, p.sources, p.score, p.extra)


def _sha256(path: Path) -> str:
    digest = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()
