"""Whole jobs shared by the command line and the app: open (building a project from its
sources when needed), import and export labels.

Each job takes an optional :class:`~app.progress.Progress` so the app can show progress and
cancel it from a worker thread; every job that writes is all-or-nothing.
"""

from __future__ import annotations

import json
import logging
from collections.abc import Sequence
from dataclasses import replace
from pathlib import Path
from typing import Any

from app.errors import BadInput
from app.fileio import read_json, write_json_atomic
from app.formats import coco
from app.model.labels import FrameState
from app.model.skeleton import skeleton_from_dict
from app.progress import Progress
from app.store.project import DB_NAME, Project

log = logging.getLogger(__name__)

SOURCES_NAME = "project-sources.json"
SOURCES_FORMAT = "posewright-project-sources"


def open_project(folder: str | Path, author: str | None = None, read_only: bool = False,
                 progress: Progress | None = None) -> Project:
    """Open a project; a folder that holds only project sources (``project-sources.json``,
    as the demo does) is first built into a project."""
    folder = Path(folder)
    if not (folder / DB_NAME).exists() and (folder / SOURCES_NAME).is_file():
        build_from_sources(folder, author=author, progress=progress)
    return Project.open(folder, author=author, read_only=read_only)


def build_from_sources(folder: Path, author: str | None = None,
                       progress: Progress | None = None) -> None:
    """Build ``project.db`` in ``folder`` from the sources its ``project-sources.json`` names.

    The sources file is ``{"format": "posewright-project-sources", "version": 1,
    "images": "images", "maps": "maps", "skeleton": {...}}``: the images are registered with
    the skeleton; network maps, when named, are imported and grouped into auto-labels.
    """
    where = str(folder / SOURCES_NAME)
    sources = read_json(folder / SOURCES_NAME, "the project sources")
    if not isinstance(sources, dict) or sources.get("format") != SOURCES_FORMAT:
        raise BadInput(f"field format: expected {SOURCES_FORMAT!r}", where=where)
    skeleton = skeleton_from_dict(sources.get("skeleton"), where=where + ": skeleton") \
        if sources.get("skeleton") else None
    images = folder / str(sources.get("images", "images"))
    log.info("building the project in %s from its sources", folder)
    try:
        project = Project.create(folder, images=images, skeleton=skeleton, author=author,
                                 progress=progress)
    except BadInput:
        if (folder / DB_NAME).exists():  # another process built it first
            return
        raise
    with project:
        if sources.get("name"):
            project.set_meta("name", str(sources["name"]))
        maps = sources.get("maps")
        if maps:
            from app.jobs_analysis import import_maps, run_triage

            import_maps(project, folder / str(maps), progress=progress)
            run_triage(project, progress=progress)


def import_coco(project: Project, path: str | Path,
                progress: Progress | None = None) -> dict[str, Any]:
    """Import a COCO keypoints file (dataset or results list), all or nothing.

    Returns counts of what was added. See :mod:`app.formats.coco` for the rules.
    """
    progress = progress or Progress()
    progress.step(0, 3, "reading labels")
    plan = coco.read_coco(path, project.skeleton, project.frames())
    progress.step(1, 3, "checking labels")
    name = Path(path).name
    with project.bulk("ImportCoco", f"import {plan.kind} {name}", f"file:{name}") as b:
        if plan.kind == "dataset":
            ids = [p.id for _, p in plan.people]
            clash = b.existing_person_ids(ids)
            if clash:
                raise BadInput(
                    f"annotation id {min(clash)} is already in the project", where=plan.path,
                    hint="was this file imported before?")
            b.rekey_frames(plan.rekey)
            for image_id, file_name in plan.file_names.items():
                b.set_file_name(image_id, file_name)
            for image_id, extra in plan.image_extra.items():
                b.execute("UPDATE frames SET extra = ? WHERE id = ?",
                          (json.dumps(extra), image_id))
            if plan.category is not None:
                b.set_meta("coco_category", json.dumps(plan.category))
            if plan.dataset_extra:
                b.set_meta("coco_dataset_extra", json.dumps(plan.dataset_extra))
            b.reserve_person_ids(ids)
            progress.step(2, 3, "writing labels")
            b.add_people(plan.people)
            b.executemany(
                "INSERT INTO regions (frame_id, polygons, extra) VALUES (?, ?, ?)",
                [(f, json.dumps(polys), json.dumps(extra)) for f, polys, extra in plan.regions])
            b.count("frames", len(plan.file_names))
            b.count("ignore regions", len(plan.regions))
        else:
            progress.step(2, 3, "writing labels")
            first = b.allocate_person_ids(len(plan.people))
            b.add_people((f, replace(p, id=first + n)) for n, (f, p) in enumerate(plan.people))
    progress.step(3, 3, "writing labels")
    return b.stats


def export_coco(project: Project, out: str | Path,
                states: Sequence[FrameState] | None = None) -> dict[str, int]:
    """Write the project's labels as a COCO keypoints dataset to ``out`` (atomically).

    ``states``, when given, keeps only frames in those states.
    """
    frames = project.frames()
    if states is not None:
        frames = [f for f in frames if f.state in set(states)]
    people = project.people_by_frame()
    category = json.loads(project.meta("coco_category") or "null") or \
        project.skeleton.coco_category()
    dataset = coco.dataset(
        frames, people, category,
        regions=project.regions_by_frame(),
        image_extra=project.frame_extras(),
        dataset_extra=json.loads(project.meta("coco_dataset_extra") or "{}"),
    )
    write_json_atomic(out, dataset)
    n_people = sum(len(people.get(f.id, ())) for f in frames)
    return {"images": len(frames), "people": n_people}


def summary(project: Project) -> dict[str, Any]:
    """What a person wants to know on opening a project."""
    counts = project.counts()
    return {
        "project": str(project.folder),
        "name": project.meta("name") or project.folder.name,
        "skeleton": project.skeleton.name,
        "joints": project.skeleton.num_joints,
        **counts,
        "read_only": project.read_only_reason,
    }
