"""Whole jobs shared by the command line and the app: make a project and register its images
or video frames (intake), open (building a project from its sources when needed), import and
export labels, mend numbers JSON cannot hold.

Each job takes an optional :class:`~app.progress.Progress` so the app can show progress and
cancel it from a worker thread; every job that writes is all-or-nothing.

What leaves the project follows one rule, for the COCO export and the training targets alike
(:func:`choose_frames`): the frames in :data:`EXPORT_STATES` (corrected and signed off: the
frames a person has checked) unless other states are asked for, and never a frame whose image
cannot be read (its size is unknown and training could not load it). :func:`export_warnings`
words what an export should tell its user about the rest.

The image, video and COCO readers (OpenCV, Pillow, pydantic's models of the COCO file) are
imported by the jobs that use them, not with this module: opening a project needs none of
them, and a batch command that only opens one (``import-maps``, ``triage``, ``targets``)
starts 0.1-0.2 s of CPU sooner without them (3 December 2026).
"""

from __future__ import annotations

import itertools
import json
import logging
import os
import shutil
import tempfile
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, replace
from pathlib import Path
from typing import TYPE_CHECKING, Any, ClassVar

from app.errors import BadInput
from app.fileio import json_ready, read_json, write_json_atomic
from app.model.edits import Change, Restore
from app.model.labels import Frame, FrameState, Region
from app.model.skeleton import Skeleton, skeleton_from_dict
from app.model.targets import PersonTarget, RegionTarget
from app.progress import Progress
from app.store import NewFrame
from app.store.project import DB_NAME, VIDEO_FRAMES, Project, relative_path
from app.wording import count

if TYPE_CHECKING:
    from app.formats.images import ImageInfo

log = logging.getLogger(__name__)

#: The states an export takes unless told otherwise: the frames a person has checked.
EXPORT_STATES: tuple[FrameState, ...] = (FrameState.CORRECTED, FrameState.SIGNED_OFF)

SOURCES_NAME = "project-sources.json"
SOURCES_FORMAT = "posewright-project-sources"


def new_project(folder: str | Path, images: str | Path | None = None,
                skeleton: Skeleton | None = None, author: str | None = None,
                progress: Progress | None = None) -> Project:
    """Make a new project in ``folder`` and open it for editing.

    ``images``, if given, is a folder whose images are registered (recursively, sorted by
    relative path, ids 1, 2, ...), each with the size its header gives; unreadable images are
    registered and marked. The project appears complete or not at all.
    """
    folder = Path(folder)
    frames: list[NewFrame] = []
    images_dir = Path(images) if images is not None else None
    if images_dir is not None:
        from app.formats.images import find_images

        if (folder / DB_NAME).exists():
            raise BadInput("a project already exists here", where=str(folder))
        if not images_dir.is_dir():
            raise BadInput("not a folder of images", where=str(images_dir))
        frames = _new_frames(folder, images_dir, _probe_all(find_images(images_dir), progress))
    return Project.create(folder, skeleton=skeleton, author=author, frames=frames,
                          images_root=images_dir)


def add_images(project: Project, images: str | Path,
               progress: Progress | None = None) -> list[Frame]:
    """Register the images under ``images`` that the project does not have yet."""
    images_dir = Path(images)
    if not images_dir.is_dir():
        raise BadInput("not a folder of images", where=str(images_dir))
    from app.formats.images import find_images

    known = {Path(f.path) for f in project.frames()}
    new = [p for p in find_images(images_dir)
           if Path(relative_path(p, project.folder)) not in known]
    infos = _probe_all(new, progress)
    return project.add_frames(_new_frames(project.folder, images_dir, infos),
                              images_root=images_dir)


def add_video_frames(project: Project, video: str | Path, every: int = 1,
                     start: float | None = None, end: float | None = None,
                     progress: Progress | None = None) -> list[Frame]:
    """Extract frames of ``video`` into ``frames/<video stem>/`` of the project's folder and
    register them with their index in the video and their time in seconds (see
    :mod:`app.formats.video` for ``every``, ``start`` and ``end``). ``file_name`` is
    ``<video stem>/<index>.jpg``.

    Frames the project already has (the same file) are not added again, so another range
    of the same video can be added later; a different video with the same name is refused.
    All or nothing: after a bad video, a failure or a cancel no file is left behind and no
    frame is registered.
    """
    from app.formats.video import extract_frames, probe_video

    project.check_writable()
    info = probe_video(video)
    stem = Path(video).stem.lstrip(".") or "video"
    rel_dir = f"{VIDEO_FRAMES}/{stem}"
    videos = json.loads(project.meta("videos") or "{}")
    if rel_dir in videos and videos[rel_dir]["fingerprint"] != info.fingerprint:
        raise BadInput(f"the project has frames of another video named {stem!r} in "
                       f"{rel_dir}", where=str(video), hint="rename the video to add it")
    root = project.folder / VIDEO_FRAMES
    target = root / stem
    made_root, made_target = not root.exists(), not target.exists()
    root.mkdir(exist_ok=True)
    staging = Path(tempfile.mkdtemp(prefix=f".{stem}.", suffix=".partial", dir=root))
    moved: list[Path] = []
    try:
        extracted = extract_frames(info.path, staging, every, start, end, progress)
        known = {f.path for f in project.frames()}
        target.mkdir(exist_ok=True)
        rows = []
        for vf in extracted:
            final = target / vf.path.name
            rel = relative_path(final, project.folder)
            if rel in known:
                continue
            os.replace(vf.path, final)
            moved.append(final)
            rows.append(NewFrame(rel, f"{stem}/{final.name}", vf.width, vf.height,
                                 video_index=vf.index, timestamp=vf.timestamp))
        videos[rel_dir] = {"source": str(info.path.resolve()), "fingerprint": info.fingerprint}
        added = project.add_frames(rows, images_root=project.folder / VIDEO_FRAMES,
                                   settings={"videos": json.dumps(videos)})
    except BaseException:
        for path in moved:
            path.unlink(missing_ok=True)
        shutil.rmtree(staging, ignore_errors=True)
        for made, folder in ((made_target, target), (made_root, root)):
            if made and folder.is_dir() and not any(folder.iterdir()):
                folder.rmdir()
        raise
    shutil.rmtree(staging, ignore_errors=True)
    return added


def _probe_all(paths: Sequence[Path], progress: Progress | None) -> list[ImageInfo]:
    from app.formats.images import probe_image

    progress = progress or Progress()
    infos = []
    for i, p in enumerate(paths):
        progress.step(i, len(paths), "reading images")
        info = probe_image(p)
        if info.status != "ok":
            log.warning("%s: image is %s (%s); registered and marked", p, info.status,
                        info.reason)
        infos.append(info)
    progress.step(len(paths), len(paths), "reading images")
    return infos


def _new_frames(folder: Path, images_dir: Path, infos: Sequence[ImageInfo]) -> list[NewFrame]:
    return [NewFrame(relative_path(info.path, folder),
                     info.path.relative_to(images_dir).as_posix(), info.width, info.height,
                     info.status) for info in infos]


def open_project(place: str | Path, author: str | None = None, read_only: bool = False,
                 progress: Progress | None = None,
                 images: str | Path | None = None) -> Project:
    """Open a project (a folder, or a hosted project's URL); a folder that holds only project
    sources (``project-sources.json``, as the demo does) is first built into a project.
    ``images``: the images root on this machine, for a hosted project."""
    from app.store.hosted import is_database_url

    if is_database_url(str(place)):
        return Project.open(place, author=author, read_only=read_only, images=images)
    folder = Path(place)
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
        project = new_project(folder, images=images, skeleton=skeleton, author=author,
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

    The file is read piece by piece (:func:`app.formats.coco.stream_coco`) and written in
    batches inside one transaction, so memory stays bounded whatever its size and a problem
    in its last record still leaves the project as it was. Returns counts of what was added.
    See :mod:`app.formats.coco` for the rules.
    """
    progress = progress or Progress()
    name = Path(path).name
    try:
        total = max(1, Path(path).stat().st_size)
    except OSError:
        total = 1
    from app.formats import coco

    parts = coco.stream_coco(path, project.skeleton, project.frames())
    progress.step(0, total, "reading labels")
    first = next(parts)  # the images and categories checked, before anything is written
    with project.bulk("ImportCoco", f"import {first.kind} {name}", f"file:{name}") as b:
        if first.kind == "dataset":
            b.rekey_frames(first.rekey)
            for image_id, file_name in first.file_names.items():
                b.set_file_name(image_id, file_name)
            for image_id, extra in first.image_extra.items():
                b.set_frame_extra(image_id, extra)
        extra: dict[str, Any] = {}
        frames: set[int] = set()
        for part in itertools.chain([first], parts):
            progress.step(min(total - 1, part.read), total, "importing labels")
            extra.update(part.dataset_extra)
            if part.category is not None:
                b.set_meta("coco_category", json.dumps(part.category))
            if first.kind == "dataset":
                ids = [p.id for _, p in part.people]
                clash = b.existing_person_ids(ids)
                if clash:
                    raise BadInput(
                        f"annotation id {min(clash)} is already in the project",
                        where=part.path, hint="was this file imported before?")
                b.reserve_person_ids(ids)
                b.add_people(part.people)
                b.regions.add(part.regions)
                b.count("ignore regions", len(part.regions))
            else:
                start = b.allocate_person_ids(len(part.people))
                b.add_people((f, replace(p, id=start + n))
                             for n, (f, p) in enumerate(part.people))
            frames.update(f for f, _ in part.people)
        # Labels from elsewhere: how they were grouped is not known (triage's default weights).
        b.set_grouping(sorted(frames), None)
        if first.kind == "dataset":
            if extra:
                b.set_meta("coco_dataset_extra", json.dumps(extra))
            b.count("frames", len(first.file_names))
    progress.step(total, total, "importing labels")
    return b.stats


@dataclass(frozen=True)
class ExportChoice:
    """The frames an export writes (``frames``), those of the chosen states it cannot write
    (``unreadable``: the image cannot be read) and how many it leaves out by their state."""

    frames: list[Frame]
    unreadable: list[Frame]
    left_out: int

    def counts(self) -> dict[str, int]:
        """``left_out``, ``unreadable``, and how many written frames are ``untouched`` and
        ``disputed`` (the frames :func:`export_warnings` warns about)."""
        return {"left_out": self.left_out, "unreadable": len(self.unreadable),
                "untouched": sum(f.state is FrameState.UNTOUCHED for f in self.frames),
                "disputed": sum(f.state is FrameState.DISPUTED for f in self.frames)}


def choose_frames(project: Project,
                  states: Sequence[FrameState] | None = EXPORT_STATES) -> ExportChoice:
    """The frames an export takes: those in ``states`` (None: every state) whose image can be
    read.

    Examples
    --------
    >>> import tempfile
    >>> with Project.create(tempfile.mkdtemp()) as p:
    ...     choose_frames(p).counts()
    {'left_out': 0, 'unreadable': 0, 'untouched': 0, 'disputed': 0}
    """
    frames = project.frames()
    wanted = set(FrameState) if states is None else set(states)
    chosen = [f for f in frames if f.state in wanted]
    readable, unreadable = [], []
    for f in chosen:  # one pass: a search of the readable list for each frame was quadratic
        (readable if f.status == "ok" and f.width > 0 and f.height > 0 else unreadable).append(f)
    return ExportChoice(readable, unreadable, len(frames) - len(chosen))


def export_warnings(counts: Mapping[str, int]) -> list[str]:
    """What an export should warn its user about, one line each: frames it could not write,
    and frames it wrote that nobody has checked (untouched) or that are in dispute.

    Examples
    --------
    >>> export_warnings({"unreadable": 1, "untouched": 2, "disputed": 1, "left_out": 0})
    ['1 frame not exported: its image cannot be read', 'the export holds 2 untouched frames \
and 1 disputed frame: labels nobody has checked or still in dispute']
    """
    lines = []
    if counts.get("unreadable"):
        n = counts["unreadable"]
        lines.append(f"{count(n, 'frame')} not exported: "
                     + ("its image cannot be read" if n == 1 else "their images cannot be read"))
    held = [count(counts[k], f"{k} frame") for k in ("untouched", "disputed") if counts.get(k)]
    if held:
        lines.append("the export holds " + " and ".join(held)
                     + ": labels nobody has checked or still in dispute")
    return lines


def left_out_note(counts: Mapping[str, int]) -> str:
    """How many frames an export left out by their state ("" if none).

    Examples
    --------
    >>> left_out_note({"left_out": 3})
    '3 frames left out by their state'
    """
    n = counts.get("left_out", 0)
    return f"{count(n, 'frames')} left out by their state" if n else ""


def export_coco(project: Project, out: str | Path,
                states: Sequence[FrameState] | None = EXPORT_STATES) -> dict[str, int]:
    """Write the project's labels as a COCO keypoints dataset to ``out`` (atomically).

    Parameters
    ----------
    project
        The project.
    out
        The JSON file to write.
    states
        The frames to take, by state (None: every state). Frames whose image cannot be read
        are never written (see :func:`choose_frames`).

    Returns
    -------
    dict
        ``images`` and ``people`` written, and :meth:`ExportChoice.counts`.

    Notes
    -----
    A non-finite number kept from an import made before such numbers were refused is written
    as :func:`app.formats.coco.json_ready_dataset` says, with a warning naming the record and
    how to mend the project (:func:`mend_numbers`).
    """
    from app.formats import coco

    choice = choose_frames(project, states)
    frames = choice.frames
    people = project.people_by_frame()
    category = json.loads(project.meta("coco_category") or "null") or \
        project.skeleton.coco_category()
    dataset = coco.dataset(
        frames, people, category,
        regions=project.regions_by_frame(),
        image_extra=project.frame_extras(),
        dataset_extra=json.loads(project.meta("coco_dataset_extra") or "{}"),
    )
    dataset, notes = coco.json_ready_dataset(dataset)
    for note in notes:
        log.warning("%s: %s; `posewright mend %s` mends the project", out, note, project.folder)
    write_json_atomic(out, dataset)
    n_people = sum(len(people.get(f.id, ())) for f in frames)
    return {"images": len(frames), "people": n_people, **choice.counts()}


@dataclass(frozen=True)
class MendNumbers(Restore):
    """Replace non-finite numbers in the fields a person or region keeps from an import: an
    undoable edit that leaves the frame's state alone (no label a person drew changes)."""

    changes_labels: ClassVar[bool] = False
    label: str = "mend numbers that JSON cannot hold"


def mend_numbers(project: Project) -> list[str]:
    """Replace the NaN and infinite numbers that the project keeps from an import made before
    they were refused, so that exports write what the project holds.

    A person's ``bbox`` or ``area`` that is not finite is dropped, so exports compute it from
    the joints (as for a person that did not come from a file); any other such field of a
    person, crowd region, image, category or the dataset becomes ``null``. People and regions
    are mended by one undoable :class:`MendNumbers` edit per frame, the image, category and
    dataset fields in one transaction with one ``MendNumbers`` ledger entry. Running it again
    finds nothing to do.

    Returns
    -------
    list of str
        One line per field mended, e.g. ``frame 100: person 5002: field area: dropped``.
    """
    notes: list[str] = []
    edits: dict[int, list[Change]] = {}
    for frame_id, persons in project.people_by_frame().items():
        for p in persons:
            extra, found = json_ready(dict(p.extra))
            for path in found:
                if path[0] in ("bbox", "area"):
                    extra.pop(path[0], None)
                notes.append(f"frame {frame_id}: person #{p.id}: {_field(path)}: "
                             + ("dropped" if path[0] in ("bbox", "area") else "null"))
            if found:
                edits.setdefault(frame_id, []).append(Change(
                    PersonTarget(p.id), p.to_value(), replace(p, extra=extra).to_value()))
    for frame_id, rows in project.regions_by_frame().items():
        for rid, polygons, extra in rows:
            clean, found = json_ready(extra)
            notes += [f"frame {frame_id}: region {rid}: {_field(path)}: null"
                      for path in found]
            if found:
                before = Region(rid, frame_id, polygons, extra).to_value()
                edits.setdefault(frame_id, []).append(Change(
                    RegionTarget(rid), before, {**before, "extra": clean}))
    for frame_id, changes in sorted(edits.items()):
        project.apply(MendNumbers(frame_id, tuple(changes)))
    in_edits = len(notes)
    frames: dict[int, dict[str, Any]] = {}
    for frame_id, extra in project.frame_extras().items():
        clean, found = json_ready(extra)
        if found:
            frames[frame_id] = clean
            notes += [f"image {frame_id}: {_field(path)}: null" for path in found]
    meta: dict[str, str] = {}
    for key, name in (("coco_category", "category"), ("coco_dataset_extra", "dataset")):
        value = json.loads(project.meta(key) or "null")
        clean, found = json_ready(value)
        if found:
            meta[key] = json.dumps(clean)
            notes += [f"{name}: {_field(path)}: null" for path in found]
    if frames or meta:
        with project.bulk("MendNumbers", "mend numbers that JSON cannot hold", "project") as b:
            for frame_id, extra in frames.items():
                b.set_frame_extra(frame_id, extra)
            for key, text in meta.items():
                b.set_meta(key, text)
            b.count("fields mended", len(notes) - in_edits)
    return notes


def _field(path: Sequence[str | int]) -> str:
    return "field " + ".".join(str(p) for p in path)


def summary(project: Project) -> dict[str, Any]:
    """What a person wants to know on opening a project."""
    counts = project.counts()
    return {
        "project": project.location,
        "name": project.meta("name") or project.folder.name,
        "skeleton": project.skeleton.name,
        "joints": project.skeleton.num_joints,
        **counts,
        "read_only": project.read_only_reason,
    }
