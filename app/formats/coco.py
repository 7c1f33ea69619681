"""COCO keypoints JSON, in and out.

Two forms are read (the COCO keypoints standard, https://cocodataset.org/#format-data):

- a **dataset**: ``{"images": [...], "annotations": [...], "categories": [...]}``;
- a **results list**: ``[{"image_id", "category_id", "keypoints", "score"}, ...]`` (model output).

Reading is strict and all-or-nothing: the first problem stops the import with a
:class:`~app.errors.BadInput` naming the file, the record and the field. Checked: valid JSON
(:func:`app.fileio.parse_json`: every number finite, anywhere in the file, and nesting within
limits), the shape of every record (pydantic), ids within the integers every JSON reader holds
exactly (:data:`app.fileio.JsonId`), ``3 * K`` keypoint values for the project's skeleton,
visibility in {0, 1, 2}, ``iscrowd`` 0 or 1, unique ids, known image and category ids, image
sizes between 1 and 65,536 pixels, keypoints within one image size of the image.

Conventions decided here:

- Dataset annotations are labels (provenance ``"import"``); an annotation that carries a
  ``score`` is model output and is stored as an auto-label with that score.
- In a results list the third keypoint value is visibility when every such value in the file is
  0, 1 or 2; otherwise it is read as the model's per-joint score in [0, 1] (a common practice of
  detectors, no source), stored as the joint's score, with ``v = 2`` where the score is above 0
  and ``v = 0`` where it is 0.
- ``v = 0`` joints keep no position (COCO writes 0, 0 for them).
- Crowd annotations (``iscrowd: 1``) are ignore regions, not people.
- ``track_id`` (a whole number from 0 up), when present, is the person's track: who they are
  across the frames of a sequence. It is written back for every person on a track.

Writing produces a dataset. Image ids, file names, the category record and every annotation
field we do not compute are written back as they were read. Computed fields:
``num_keypoints`` is the number of joints with ``v > 0``; ``bbox`` and ``area`` are the
imported ones when the person came from a file (they describe the person's outline, which
moving joints does not change), otherwise ``bbox`` is the tight box ``[x, y, w, h]`` around the
labelled joints and ``area`` is ``w * h`` (common practice for keypoint-only labels, no source).
A project imported before non-finite numbers were refused may hold one in a field kept for the
round trip; :func:`json_ready_dataset` writes it as ``null``, or, for a person's ``bbox`` and
``area``, computes them as for a new person, and says where.
"""

from __future__ import annotations

import json
import math
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path, PurePosixPath
from typing import Any

import numpy as np
from pydantic import (
    BaseModel,
    ConfigDict,
    Field,
    StrictFloat,
    StrictInt,
    StrictStr,
    TypeAdapter,
    ValidationError,
)

from app.errors import BadInput
from app.fileio import MAX_ID, JsonId, describe, json_ready, read_json
from app.formats.images import MAX_SIDE
from app.model.labels import AUTO, IMPORTED, Frame, Person
from app.model.skeleton import Skeleton

Number = StrictInt | StrictFloat


class _Image(BaseModel):
    model_config = ConfigDict(extra="allow")
    id: JsonId
    file_name: StrictStr = Field(min_length=1)
    width: StrictInt | None = None
    height: StrictInt | None = None


class _Annotation(BaseModel):
    model_config = ConfigDict(extra="allow")
    id: JsonId
    image_id: JsonId
    category_id: JsonId
    keypoints: list[Number] = Field(default_factory=list)
    iscrowd: StrictInt = 0
    score: Number | None = None


class _Category(BaseModel):
    model_config = ConfigDict(extra="allow")
    id: JsonId
    name: StrictStr
    keypoints: list[StrictStr] = Field(default_factory=list)
    skeleton: list[tuple[StrictInt, StrictInt]] = Field(default_factory=list)


class _Dataset(BaseModel):
    model_config = ConfigDict(extra="allow")
    images: list[_Image]
    annotations: list[_Annotation]
    categories: list[_Category]


class _Result(BaseModel):
    model_config = ConfigDict(extra="allow")
    image_id: JsonId
    category_id: JsonId
    keypoints: list[Number]
    score: Number


_DATASET = TypeAdapter(_Dataset)
_RESULTS = TypeAdapter(list[_Result])


@dataclass
class CocoImport:
    """A validated COCO file, matched against the project's frames, ready to write.

    ``frame_ids`` maps each COCO image id to the project frame it matched; ``rekey`` gives the
    frame ids that must change so that frames carry the COCO image ids; ``people`` are
    ``(frame_id, Person)`` with frame ids *after* rekeying; ``regions`` are ignore regions
    ``(frame_id, polygons, extra)``.
    """

    kind: str
    path: str
    frame_ids: dict[int, int] = field(default_factory=dict)
    rekey: dict[int, int] = field(default_factory=dict)
    file_names: dict[int, str] = field(default_factory=dict)
    image_extra: dict[int, dict[str, Any]] = field(default_factory=dict)
    people: list[tuple[int, Person]] = field(default_factory=list)
    regions: list[tuple[int, list[list[float]], dict[str, Any]]] = field(default_factory=list)
    category: dict[str, Any] | None = None
    dataset_extra: dict[str, Any] = field(default_factory=dict)
    fresh_people: int = 0  # people that need ids from the project (results lists)


def read_coco(path: str | Path, skeleton: Skeleton, frames: Sequence[Frame]) -> CocoImport:
    """Read and validate a COCO keypoints file against the project's skeleton and frames.

    Nothing is written; the returned :class:`CocoImport` says what an import would do.

    Raises
    ------
    BadInput
        On the first problem, naming the file, the record and the field.
    """
    path = Path(path)
    where = str(path)
    data = read_json(path, root="results")
    if isinstance(data, list):
        return _read_results(data, where, skeleton, frames)
    if isinstance(data, dict) and "annotations" in data:
        return _read_dataset(data, where, skeleton, frames)
    raise BadInput("neither a COCO dataset (images, annotations, categories) nor a results list",
                   where=where)


def _validation_error(exc: ValidationError, data: Any, where: str, root: str = "") -> BadInput:
    err = exc.errors(include_url=False)[0]
    place = describe(tuple(err["loc"]), data, root, field="record")
    msg = err["msg"][:1].lower() + err["msg"][1:]
    if err.get("type") in ("int_type", "float_type", "int_parsing", "float_parsing",
                           "less_than_equal", "greater_than_equal"):
        msg = f"{msg}, got {err.get('input')!r}"
    return BadInput(f"{place}: {msg}", where=where)


def _check_keypoints(values: Sequence[float], k: int, where: str, record: str,
                     visibility: bool = True) -> np.ndarray:
    if len(values) != 3 * k:
        raise BadInput(
            f"{record}: field keypoints: {len(values)} values, the project's skeleton needs "
            f"{3 * k} (x, y, v for {k} joints)", where=where)
    kp = np.asarray(values, dtype=np.float64).reshape(k, 3)
    if visibility:
        bad = ~np.isin(kp[:, 2], (0, 1, 2))
        if bad.any():
            j = int(np.flatnonzero(bad)[0])
            raise BadInput(
                f"{record}: field keypoints: visibility {kp[j, 2]:g} of joint {j} is not one "
                "of 0, 1, 2", where=where)
    return kp


def _check_range(kp: np.ndarray, frame: Frame, where: str, record: str) -> None:
    if frame.width <= 0 or frame.height <= 0:
        return
    on = kp[:, 2] > 0
    w, h = frame.width, frame.height
    out = on & ((kp[:, 0] < -w) | (kp[:, 0] > 2 * w) | (kp[:, 1] < -h) | (kp[:, 1] > 2 * h))
    if out.any():
        j = int(np.flatnonzero(out)[0])
        raise BadInput(
            f"{record}: field keypoints: joint {j} at ({kp[j, 0]:g}, {kp[j, 1]:g}) is far "
            f"outside the {w}x{h} image", where=where)


def _keypoint_block(values: Sequence[Sequence[float]], k: int, where: str,
                    records: Sequence[str], frames: Sequence[Frame],
                    visibility: bool = True) -> np.ndarray:
    """All keypoint lists as one ``(N, K, 3)`` array, checked at once; ``v = 0`` joints get NaN
    positions. On a problem the first offending record is checked alone for its message."""
    n = len(values)
    lengths = np.fromiter((len(v) for v in values), dtype=np.int64, count=n)
    for i in np.flatnonzero(lengths != 3 * k)[:1]:
        _check_keypoints(values[i], k, where, records[i], visibility)
    block = np.array(values, dtype=np.float64).reshape(n, k, 3)
    if visibility:
        for i in np.flatnonzero(~np.isin(block[:, :, 2], (0, 1, 2)).all(axis=1))[:1]:
            _check_keypoints(values[i], k, where, records[i], visibility)
    sizes = np.array([(f.width, f.height) if f.status == "ok" and f.width > 0 else (np.inf, np.inf)
                      for f in frames], dtype=np.float64).reshape(n, 2)
    w, h = sizes[:, :1], sizes[:, 1:]
    on = block[:, :, 2] > 0
    x, y = block[:, :, 0], block[:, :, 1]
    far = on & ((x < -w) | (x > 2 * w) | (y < -h) | (y > 2 * h))
    for i in np.flatnonzero(far.any(axis=1))[:1]:
        _check_range(block[i], frames[i], where, records[i])
    block[~on] = np.where(np.arange(3) == 2, block[~on], np.nan)
    return block


def _unique(ids: Iterable[int], what: str, where: str) -> None:
    seen: set[int] = set()
    for i in ids:
        if i in seen:
            raise BadInput(f"{what} id {i} appears twice", where=where)
        seen.add(i)


def _check_category(cat: _Category, skeleton: Skeleton, where: str, i: int) -> None:
    record = f"categories[{i}] (id {cat.id})"
    if len(cat.keypoints) != skeleton.num_joints:
        raise BadInput(
            f"{record}: field keypoints: {len(cat.keypoints)} joints, the project's skeleton "
            f"has {skeleton.num_joints}", where=where)
    for j, (a, b) in enumerate(zip(cat.keypoints, skeleton.joints)):
        if a != b:
            raise BadInput(
                f"{record}: field keypoints: joint {j} is {a!r} here and {b!r} in the project's "
                "skeleton", where=where, hint="import into a project made with this skeleton")
    for n, (end1, end2) in enumerate(cat.skeleton):
        if not (1 <= end1 <= len(cat.keypoints) and 1 <= end2 <= len(cat.keypoints)):
            raise BadInput(f"{record}: field skeleton.{n}: joint numbers are 1-based and must "
                           f"lie in 1..{len(cat.keypoints)}", where=where)


def _match_frames(images: Sequence[_Image], frames: Sequence[Frame],
                  where: str) -> dict[int, Frame]:
    by_name = {f.file_name: f for f in frames}
    by_base: dict[str, list[Frame]] = {}
    for f in frames:
        by_base.setdefault(PurePosixPath(f.file_name).name, []).append(f)
    matched: dict[int, Frame] = {}
    used: dict[int, int] = {}
    for i, img in enumerate(images):
        record = f"images[{i}] (id {img.id})"
        name = PurePosixPath(img.file_name.replace("\\", "/")).as_posix()
        frame = by_name.get(name)
        if frame is None:
            candidates = by_base.get(PurePosixPath(name).name, [])
            if len(candidates) > 1:
                raise BadInput(
                    f"{record}: field file_name: {img.file_name!r} matches {len(candidates)} "
                    "project images by base name", where=where,
                    hint="use file names relative to the project's images folder")
            frame = candidates[0] if candidates else None
        if frame is None:
            raise BadInput(f"{record}: field file_name: {img.file_name!r} is not in the project",
                           where=where, hint="register the images first (posewright new/add)")
        if frame.id in used:
            raise BadInput(f"{record}: field file_name: {img.file_name!r} is the same project "
                           f"image as image id {used[frame.id]}", where=where)
        used[frame.id] = img.id
        for side, got, have in (("width", img.width, frame.width),
                                ("height", img.height, frame.height)):
            if got is None:
                continue
            if not 1 <= got <= MAX_SIDE:
                raise BadInput(f"{record}: field {side}: {got} is not a plausible image size",
                               where=where)
            if frame.status == "ok" and got != have:
                raise BadInput(
                    f"{record}: field {side}: {got} here, but the image on disk is "
                    f"{frame.width}x{frame.height}", where=where)
        matched[img.id] = frame
    return matched


def _rekey(matched: Mapping[int, Frame], frames: Sequence[Frame]) -> dict[int, int]:
    """Old -> new frame ids so that matched frames carry their COCO image ids. Unmatched frames
    whose id a COCO image claims move to fresh ids above every other."""
    mapping = {f.id: image_id for image_id, f in matched.items()}
    claimed = set(mapping.values())
    top = max([f.id for f in frames] + list(claimed) + [0])
    for f in frames:
        if f.id not in mapping and f.id in claimed:
            top += 1
            mapping[f.id] = top
    return {o: n for o, n in mapping.items() if o != n}


def _read_dataset(data: dict[str, Any], where: str, skeleton: Skeleton,
                  frames: Sequence[Frame]) -> CocoImport:
    try:
        ds = _DATASET.validate_python(data)
    except ValidationError as exc:
        raise _validation_error(exc, data, where) from None
    _unique((im.id for im in ds.images), "image", where)
    _unique((a.id for a in ds.annotations), "annotation", where)
    _unique((c.id for c in ds.categories), "category", where)
    cats = {}
    for i, c in enumerate(ds.categories):
        _check_category(c, skeleton, where, i)
        cats[c.id] = c
    if not cats:
        raise BadInput("field categories: no category", where=where)
    matched = _match_frames(ds.images, frames, where)
    rekey = _rekey(matched, frames)
    out = CocoImport("dataset", where, rekey=rekey)
    for img in ds.images:
        out.frame_ids[img.id] = img.id
        out.file_names[img.id] = img.file_name
        extra = {k: v for k, v in (img.model_extra or {}).items()}
        if extra:
            out.image_extra[img.id] = extra
    k = skeleton.num_joints
    raw_annotations = data["annotations"]
    labels: list[tuple[int, _Annotation, dict[str, Any]]] = []
    for i, a in enumerate(ds.annotations):
        record = f"annotations[{i}] (id {a.id})"
        if a.image_id not in matched:
            raise BadInput(f"{record}: field image_id: no image with id {a.image_id}",
                           where=where)
        if a.category_id not in cats:
            raise BadInput(f"{record}: field category_id: no category with id {a.category_id}",
                           where=where)
        if a.iscrowd not in (0, 1):
            raise BadInput(f"{record}: field iscrowd: {a.iscrowd} is not 0 (a person) or 1 "
                           "(a crowd region)", where=where)
        if a.iscrowd:
            kept = {key: v for key, v in raw_annotations[i].items() if key != "image_id"}
            out.regions.append(
                (a.image_id, _crowd_polygons(raw_annotations[i], where, record), kept))
            continue
        extra = {key: v for key, v in raw_annotations[i].items()
                 if key not in ("id", "image_id", "keypoints", "score", "num_keypoints")}
        labels.append((i, a, extra))
    block = _keypoint_block(
        [a.keypoints for _, a, _ in labels], k, where,
        [f"annotations[{i}] (id {a.id})" for i, a, _ in labels],
        [matched[a.image_id] for _, a, _ in labels])
    no_scores = np.full(k, np.nan)
    for (i, a, extra), kp in zip(labels, block):
        source = AUTO if a.score is not None else IMPORTED
        track = _track_id(extra, where, f"annotations[{i}] (id {a.id})")
        person = Person(a.id, kp, no_scores, (source,) * k,
                        None if a.score is None else float(a.score), extra, track,
                        "" if track is None else IMPORTED)
        out.people.append((a.image_id, person))
    cat = next(iter(cats.values()))
    out.category = {key: v for key, v in data["categories"][0].items()}
    out.category["id"] = cat.id
    out.dataset_extra = {key: v for key, v in data.items()
                         if key not in ("images", "annotations", "categories")}
    return out


def _crowd_polygons(raw: Mapping[str, Any], where: str, record: str) -> list[list[float]]:
    seg = raw.get("segmentation")
    polys: list[list[float]] = []
    if isinstance(seg, list):
        for n, poly in enumerate(seg):
            ok = (isinstance(poly, list) and len(poly) >= 6 and len(poly) % 2 == 0 and
                  all(isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v)
                      for v in poly))
            if not ok:
                raise BadInput(f"{record}: field segmentation.{n}: a polygon needs an even "
                               "number (at least 6) of finite coordinates", where=where)
            polys.append([float(v) for v in poly])
    if not polys:
        # Run-length masks are kept verbatim for export; the region drawn is their bbox.
        bbox = raw.get("bbox")
        if not (isinstance(bbox, list) and len(bbox) == 4 and
                all(isinstance(v, (int, float)) and math.isfinite(v) for v in bbox)):
            raise BadInput(f"{record}: field bbox: a crowd annotation without polygons needs a "
                           "bbox [x, y, w, h]", where=where)
        x, y, w, h = (float(v) for v in bbox)
        polys.append([x, y, x + w, y, x + w, y + h, x, y + h])
    return polys


def _read_results(data: list[Any], where: str, skeleton: Skeleton,
                  frames: Sequence[Frame]) -> CocoImport:
    try:
        results = _RESULTS.validate_python(data)
    except ValidationError as exc:
        raise _validation_error(exc, data, where, root="results") from None
    k = skeleton.num_joints
    by_id = {f.id: f for f in frames}
    out = CocoImport("results", where)
    for i, r in enumerate(results):
        record = f"results[{i}]"
        if r.image_id not in by_id:
            raise BadInput(f"{record}: field image_id: no project frame with id {r.image_id}",
                           where=where, hint="import the dataset with these image ids first")
    block = _keypoint_block([r.keypoints for r in results], k, where,
                            [f"results[{i}]" for i in range(len(results))],
                            [by_id[r.image_id] for r in results], visibility=False)
    third = block[:, :, 2]
    as_visibility = bool(np.isin(third, (0, 1, 2)).all())
    outside = ((third < 0) | (third > 1)).any(axis=1)
    if not as_visibility and outside.any():
        raise BadInput(
            f"results[{int(np.flatnonzero(outside)[0])}]: field keypoints: third values must all "
            "be visibility (0, 1, 2) or all be scores in [0, 1]", where=where)
    for i, (r, kp) in enumerate(zip(results, block)):
        if as_visibility:
            scores = np.where(kp[:, 2] > 0, float(r.score), np.nan)
        else:
            scores = kp[:, 2].copy()
            kp[:, 2] = np.where(scores > 0, 2, 0)
        extra = {key: v for key, v in data[i].items()
                 if key not in ("image_id", "keypoints", "score", "id")}
        track = _track_id(extra, where, f"results[{i}]")
        out.people.append((r.image_id, Person(0, kp, scores, (AUTO,) * k, float(r.score),
                                              extra, track, "" if track is None else IMPORTED)))
    out.fresh_people = len(out.people)
    return out


def _track_id(extra: dict[str, Any], where: str, record: str) -> int | None:
    """Take ``track_id`` out of an annotation's kept fields: the person's track (who they are
    across a sequence's frames), a whole number from 0 up, or absent."""
    if "track_id" not in extra:
        return None
    value = extra.pop("track_id")
    if value is None:
        return None
    if isinstance(value, bool) or not isinstance(value, int) or not 0 <= value <= MAX_ID:
        raise BadInput(f"{record}: field track_id: {value!r} is not a whole number from 0 to "
                       f"{MAX_ID}", where=where)
    return int(value)


# ---------------------------------------------------------------------- writing

def person_box(keypoints: np.ndarray) -> list[float]:
    """Tight ``[x, y, w, h]`` around the labelled joints (zeros when none is labelled).

    Examples
    --------
    >>> person_box(np.array([[10., 20., 2], [30., 25., 1], [np.nan, np.nan, 0]]))
    [10.0, 20.0, 20.0, 5.0]
    """
    on = keypoints[:, 2] > 0
    if not on.any():
        return [0.0, 0.0, 0.0, 0.0]
    xy = keypoints[on, :2]
    x0, y0 = xy.min(axis=0)
    x1, y1 = xy.max(axis=0)
    return [float(x0), float(y0), float(x1 - x0), float(y1 - y0)]


def _clean_number(v: float) -> float | int:
    return int(v) if float(v).is_integer() else float(v)


def annotation(person: Person, image_id: int, category_id: int) -> dict[str, Any]:
    """One COCO annotation for a person (see the module docstring for computed fields)."""
    kp = person.keypoints
    flat: list[float | int] = []
    for x, y, v in kp:
        if v > 0:
            flat += [_clean_number(x), _clean_number(y), int(v)]
        else:
            flat += [0, 0, 0]
    extra = dict(person.extra)
    ann: dict[str, Any] = {"id": person.id, "image_id": image_id,
                           "category_id": extra.pop("category_id", category_id)}
    ann["keypoints"] = flat
    ann["num_keypoints"] = int(np.count_nonzero(kp[:, 2] > 0))
    if "bbox" not in extra:
        extra["bbox"] = [round(b, 2) for b in person_box(kp)]
    if "area" not in extra:
        box = extra["bbox"]
        if not (isinstance(box, list) and len(box) == 4 and
                all(isinstance(b, (int, float)) and not isinstance(b, bool) for b in box)):
            box = person_box(kp)  # an imported box kept as it came, but not one to measure
        extra["area"] = round(box[2] * box[3], 2)
    extra.setdefault("iscrowd", 0)
    ann.update(extra)
    if person.track is not None:
        ann["track_id"] = int(person.track)
    if person.score is not None:
        ann["score"] = person.score
    return ann


def dataset(
    frames: Sequence[Frame],
    people: Mapping[int, Sequence[Person]],
    category: Mapping[str, Any],
    regions: Mapping[int, Sequence[tuple[int, list[list[float]], Mapping[str, Any]]]] = {},
    image_extra: Mapping[int, Mapping[str, Any]] = {},
    dataset_extra: Mapping[str, Any] = {},
) -> dict[str, Any]:
    """A COCO keypoints dataset for ``frames`` and their people (and ignore regions)."""
    cat_id = int(category["id"])
    images, annotations = [], []
    for f in frames:
        image = {"id": f.id, "file_name": f.file_name, "width": f.width, "height": f.height}
        image.update(image_extra.get(f.id, {}))
        images.append(image)
        for p in people.get(f.id, ()):
            annotations.append(annotation(p, f.id, cat_id))
        for region_id, polygons, extra in regions.get(f.id, ()):
            annotations.append(crowd_annotation(region_id, f.id, cat_id, polygons, extra))
    out: dict[str, Any] = dict(dataset_extra)
    out.update({"images": images, "annotations": annotations, "categories": [dict(category)]})
    return out


def json_ready_dataset(ds: Mapping[str, Any]) -> tuple[dict[str, Any], list[str]]:
    """``ds`` (a :func:`dataset`) with its non-finite numbers mended, and where each was.

    A person's ``bbox`` that is not finite becomes the tight box around the labelled joints,
    an ``area`` that is not finite the box's width times height (as for a person that did not
    come from a file); any other non-finite number becomes ``null``.

    Returns
    -------
    dataset, notes
        The mended dataset (``ds`` itself when there was nothing to mend) and one line per
        field mended: ``annotations[3] (id 5002): field area: Infinity, written as 1650.5``.

    Examples
    --------
    >>> ann = {"id": 7, "keypoints": [10, 20, 2, 30, 25, 1], "bbox": [0, 0, 9, float("inf")],
    ...        "area": float("nan"), "note": float("inf")}
    >>> clean, notes = json_ready_dataset({"annotations": [ann]})
    >>> clean["annotations"][0]["bbox"], clean["annotations"][0]["area"]
    ([10.0, 20.0, 20.0, 5.0], 100.0)
    >>> for note in notes:
    ...     print(note)
    annotations[0] (id 7): field area: NaN, written as 100.0
    annotations[0] (id 7): field note: Infinity, written as null
    annotations[0] (id 7): field bbox.3: Infinity, written as [10.0, 20.0, 20.0, 5.0]
    """
    clean, paths = json_ready(ds)
    boxed = sorted({path[:3] for path in paths if len(path) > 2 and path[0] == "annotations"
                    and path[2] in ("bbox", "area")
                    and not clean["annotations"][path[1]].get("iscrowd")},
                   key=lambda p: p[2] != "bbox")  # the box first: the area follows from it
    for _, i, key in boxed:
        ann = clean["annotations"][i]
        if key == "bbox":
            kp = np.asarray(ann.get("keypoints") or [], dtype=np.float64).reshape(-1, 3)
            ann["bbox"] = [round(b, 2) for b in person_box(kp)]
        else:
            box = ann.get("bbox")
            ann["area"] = round(box[2] * box[3], 2) if isinstance(box, list) and len(box) == 4 \
                and None not in box else None
    notes = []
    for path in paths:
        value: Any = ds
        for step in path:
            value = value[step]
        written = json.dumps(clean["annotations"][path[1]][path[2]]) if path[:3] in boxed \
            else "null"
        token = "NaN" if value != value else ("-Infinity" if value < 0 else "Infinity")
        notes.append(f"{describe(path, ds)}: {token}, written as {written}")
    return clean, notes


def crowd_annotation(region_id: int, image_id: int, category_id: int,
                     polygons: Sequence[Sequence[float]],
                     extra: Mapping[str, Any]) -> dict[str, Any]:
    """A COCO crowd annotation (``iscrowd: 1``) for an ignore region."""
    ann = {"id": int(extra.get("id", region_id)), "image_id": image_id,
           "category_id": int(extra.get("category_id", category_id)),
           "iscrowd": 1, "num_keypoints": 0}
    k_extra = {k: v for k, v in extra.items() if k not in ("id", "image_id", "category_id")}
    if "segmentation" not in k_extra:
        k_extra["segmentation"] = [list(p) for p in polygons]
    if "bbox" not in k_extra:
        xs = np.concatenate([np.asarray(p[0::2]) for p in polygons])
        ys = np.concatenate([np.asarray(p[1::2]) for p in polygons])
        k_extra["bbox"] = [float(xs.min()), float(ys.min()), float(np.ptp(xs)), float(np.ptp(ys))]
    k_extra.setdefault("area", float(_polygons_area(polygons)))
    ann.update(k_extra)
    ann["iscrowd"] = 1
    return ann


def _polygons_area(polygons: Sequence[Sequence[float]]) -> float:
    total = 0.0
    for p in polygons:
        x = np.asarray(p[0::2], dtype=np.float64)
        y = np.asarray(p[1::2], dtype=np.float64)
        total += 0.5 * abs(float(np.dot(x, np.roll(y, -1)) - np.dot(y, np.roll(x, -1))))
    return total
