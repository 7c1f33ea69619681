"""Pre-labelling: run a user's ONNX model over the project's frames and keep what it finds.

For each selected frame the model's maps (:class:`~app.inference.network.PoseNetwork`) are
grouped into people with :func:`app.analysis.association.group_people` and stored as
auto-labels (per-joint scores, provenance ``auto``); the maps are kept in the project
(``maps/prelabel/<frame id>.npz``, float16) for triage and owner suggestions. Frames that
already have people keep them (a correction is never overwritten); their maps are still kept.

All or nothing: the maps are written to a staging folder first and everything lands in one
transaction at the end, so a model that fails on frame 900, a cancel or a crash changes
nothing.
"""

from __future__ import annotations

import hashlib
import json
import logging
import os
import shutil
import tempfile
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import numpy as np

from app.analysis.association import group_people
from app.errors import BadInput, NotFound
from app.formats.images import decode_image
from app.inference.config import PrelabelConfig, default_config, load_config
from app.inference.network import PoseNetwork
from app.jobs_analysis import _auto_person
from app.model.labels import Frame, FrameState, Person
from app.progress import Progress
from app.store.project import Project

log = logging.getLogger(__name__)

__all__ = ["MAPS_FOLDER", "find_config", "parse_frames", "prelabel"]

#: Where the maps of pre-labelled frames are kept, relative to the project folder.
MAPS_FOLDER = Path("maps") / "prelabel"


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
             progress: Progress | None = None) -> dict[str, Any]:
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

    Returns
    -------
    dict
        Counts: ``frames`` run, ``people`` added, ``frames grouped``, ``frames kept`` (they had
        people already), ``unreadable`` (skipped).

    Raises
    ------
    BadInput
        The model does not load, the config is wrong, or the outputs do not fit the config
        (nothing is written).
    """
    progress = progress or Progress()
    cfg, where = find_config(model, config, project)
    network = PoseNetwork(model, cfg, project.skeleton, config_where=where)
    every = project.frames()
    if frames is not None:
        wanted = {int(i) for i in frames}
        missing = wanted - {f.id for f in every}
        if missing:
            raise NotFound(f"the project has no frame {min(missing)}")
        every = [f for f in every if f.id in wanted]
    if not every:
        return {"frames": 0, "unreadable": 0}
    has_people = set(project.people_by_frame())
    k = project.skeleton.num_joints
    limbs = project.skeleton.limb_array
    grouping = cfg.grouping.model_dump()
    maps_dir = project.folder / MAPS_FOLDER
    made = [d for d in (maps_dir, maps_dir.parent) if not d.exists()]
    maps_dir.mkdir(parents=True, exist_ok=True)
    staging = Path(tempfile.mkdtemp(prefix=".staging-", dir=maps_dir))
    try:
        found: list[tuple[int, Person]] = []
        strides: dict[int, int] = {}
        unreadable = kept = 0
        for n, frame in enumerate(every):
            progress.step(n, len(every), "pre-labelling")
            image = decode_image(project.image_path(frame)) if frame.status == "ok" else None
            if image is None:
                log.warning("frame %s: image %s is not readable; skipped", frame.id, frame.path)
                unreadable += 1
                continue
            maps = network.maps(image, where=f"frame {frame.id}")
            np.savez_compressed(staging / f"{frame.id}.npz",
                                confidence_maps=maps.confidence_maps.astype(np.float16),
                                pafs=maps.pafs.astype(np.float16),
                                stride=np.int64(maps.stride))
            strides[frame.id] = maps.stride
            if frame.id in has_people:
                kept += 1
                continue
            for person in group_people(maps.confidence_maps, maps.pafs, limbs,
                                       stride=maps.stride, **grouping):
                found.append((frame.id, _auto_person(person, k)))
        progress.step(len(every), len(every), "pre-labelling")
        stats = _store(project, Path(model), cfg, staging, maps_dir, strides, found,
                       kept)
    except BaseException:
        shutil.rmtree(staging, ignore_errors=True)
        for folder in made:
            if not any(folder.iterdir()):
                folder.rmdir()
        raise
    shutil.rmtree(staging, ignore_errors=True)
    stats["unreadable"] = unreadable
    return stats


def _store(project: Project, model: Path, cfg: PrelabelConfig, staging: Path, maps_dir: Path,
           strides: dict[int, int], found: list[tuple[int, Person]],
           kept: int) -> dict[str, Any]:
    """One transaction: people, map locations and the run's record; the map files are swapped
    in before the commit and swapped back if it does not happen."""
    swapped: list[tuple[Path, Path | None]] = []  # (final path, previous file moved aside)
    aside = staging / "previous"
    aside.mkdir()
    record = {"model": str(model.resolve()), "model_sha256": _sha256(model),
              "config": cfg.model_dump(mode="json")}
    try:
        with project.bulk("Prelabel", f"pre-label with {model.name}",
                          f"model:{model.name}") as b:
            first = b.allocate_person_ids(len(found))
            b.add_people((f, _with_id(p, first + n)) for n, (f, p) in enumerate(found))
            for frame_id, stride in strides.items():
                final = maps_dir / f"{frame_id}.npz"
                previous = None
                if final.exists():
                    previous = aside / final.name
                    os.replace(final, previous)
                swapped.append((final, previous))
                os.replace(staging / final.name, final)
                b.set_maps(frame_id, final, stride)
            b.set_meta("last_prelabel", json.dumps(record))
            b.count("frames", len(strides))
            b.count("frames grouped", len({f for f, _ in found}))
            b.count("frames kept", kept)
    except BaseException:
        for final, previous in reversed(swapped):
            final.unlink(missing_ok=True)
            if previous is not None:
                os.replace(previous, final)
        raise
    return dict(b.stats)


def _with_id(p: Person, pid: int) -> Person:
    return Person(pid, p.keypoints, p.scores, p.sources, p.score, p.extra)


def _sha256(path: Path) -> str:
    digest = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()
