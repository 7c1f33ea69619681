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
import sys
from collections.abc import Iterable, Iterator, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path, PurePosixPath
from typing import Any, NamedTuple

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
from app.fileio import MAX_ID, JsonId, JsonStream, describe, describe_item, json_ready
from app.formats.images import MAX_SIDE
from app.model.labels import AUTO, IMPORTED, Frame, Person
from app.model.skeleton import Skeleton
from app.wording import count

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


class _Result(BaseModel):
    model_config = ConfigDict(extra="allow")
    image_id: JsonId
    category_id: JsonId
    keypoints: list[Number]
    score: Number


_IMAGES = TypeAdapter(list[_Image])
_CATEGORIES = TypeAdapter(list[_Category])
_ANNOTATIONS = TypeAdapter(list[_Annotation])


class _Plain(NamedTuple):
    """An annotation that :func:`plain_annotations` found valid: the fields of
    :class:`_Annotation` that the import reads."""

    id: int
    image_id: int
    category_id: int
    keypoints: list[int | float]
    iscrowd: int
    score: int | float | None


def plain_annotations(raw: Sequence[Any]) -> list[_Plain] | None:
    """The annotations read as :class:`_Annotation` reads them, when every one of them is
    plainly valid (whole-number ids within :data:`~app.fileio.MAX_ID`, keypoints a list of
    numbers, ``iscrowd`` a whole number, ``score`` a number or null); else None, and pydantic
    names the problem. Ten times quicker than pydantic on a file's annotations: the types of
    all their keypoints are collected in one pass.

    Examples
    --------
    >>> plain_annotations([{"id": 1, "image_id": 2, "category_id": 1, "keypoints": [1, 2.5, 2]}])
    [_Plain(id=1, image_id=2, category_id=1, keypoints=[1, 2.5, 2], iscrowd=0, score=None)]
    >>> plain_annotations([{"id": True, "image_id": 2, "category_id": 1}]) is None
    True
    """
    out = []
    kinds: set[type] = set()
    for a in raw:
        if type(a) is not dict:
            return None
        i, im, c = a.get("id"), a.get("image_id"), a.get("category_id")
        kp = a.get("keypoints", [])
        crowd, score = a.get("iscrowd", 0), a.get("score")
        if type(i) is not int or type(im) is not int or type(c) is not int \
                or type(kp) is not list or type(crowd) is not int \
                or not (score is None or type(score) is int or type(score) is float) \
                or not (-MAX_ID <= i <= MAX_ID and -MAX_ID <= im <= MAX_ID
                        and -MAX_ID <= c <= MAX_ID):
            return None
        kinds.update(map(type, kp))
        out.append(_Plain(i, im, c, kp, crowd, score))
    return out if kinds <= {int, float} else None
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
    read: int = 0  # characters of the file read when this part was made (for progress)


#: Records validated and written together when a file is read piece by piece.
BATCH = 10_000


def read_coco(path: str | Path, skeleton: Skeleton, frames: Sequence[Frame]) -> CocoImport:
    """Read and validate a COCO keypoints file against the project's skeleton and frames.

    Nothing is written; the returned :class:`CocoImport` says what an import would do. (An
    import reads the file piece by piece instead, :func:`stream_coco`.)

    Raises
    ------
    BadInput
        On the first problem, naming the file, the record and the field.
    """
    plan: CocoImport | None = None
    for part in stream_coco(path, skeleton, frames):
        if plan is None:
            plan = part
        else:
            plan.people.extend(part.people)
            plan.regions.extend(part.regions)
            plan.dataset_extra.update(part.dataset_extra)
            plan.category = part.category or plan.category
    assert plan is not None  # stream_coco yields at least its first part
    plan.fresh_people = len(plan.people) if plan.kind == "results" else 0
    return plan


def stream_coco(path: str | Path, skeleton: Skeleton, frames: Sequence[Frame],
                batch: int | None = None) -> Iterator[CocoImport]:
    """Read and validate a COCO keypoints file piece by piece, for an import of any size.

    Yields :class:`CocoImport` parts: the first holds the frame matching (ids, file names)
    and a first batch of people; each later part holds up to ``batch`` (default
    :data:`BATCH`) people and ignore regions; the last holds the ``category`` and
    ``dataset_extra`` (the other top-level keys). Records are checked as
    :func:`read_coco` checks them, and the first problem raises :class:`BadInput` at the
    batch it is in, so a writer must keep everything in one transaction (all or nothing). A
    dataset is read once when its images come before its annotations (as COCO files are
    written), else twice; a results list is read twice (whether its third
    keypoint values are visibility or scores depends on all of them). Memory stays within a
    batch and the frame list, whatever the size of the file.
    """
    where = str(path)
    batch = batch or BATCH
    with JsonStream(path, root="results") as stream:
        top = stream.kind()
        if top == "array":
            yield from _stream_results(path, where, skeleton, frames, batch)
            return
        if top != "object":
            stream.value()
            raise BadInput("neither a COCO dataset (images, annotations, categories) nor a "
                           "results list", where=where)
        yield from _stream_dataset(stream, path, where, skeleton, frames, batch)


def _read_list(stream: JsonStream, key: str, adapter: TypeAdapter[Any], where: str) -> Any:
    value = stream.value(key)
    try:
        return adapter.validate_python(value), value
    except ValidationError as exc:
        err = exc.errors(include_url=False)[0]
        loc = (key, *err["loc"])
        place = describe(loc, {key: value}, field="record")
        raise _message(err, place, where) from None


def _stream_dataset(stream: JsonStream, path: str | Path, where: str, skeleton: Skeleton,
                    frames: Sequence[Frame], batch: int) -> Iterator[CocoImport]:
    head: dict[str, Any] = {}
    extra: dict[str, Any] = {}
    plan: _DatasetPlan | None = None
    seen = False
    for key in stream.members():
        if key in ("images", "categories"):
            head[key] = _read_list(stream, key, _IMAGES if key == "images" else _CATEGORIES,
                                   where)
            if key == "categories" and plan is not None:
                plan.set_categories(*head[key])
        elif key == "annotations":
            seen = True
            if not stream.is_array():
                _read_list(stream, key, _ANNOTATIONS, where)  # raises: not a list
            if "images" in head:
                plan = _DatasetPlan(where, skeleton, frames, head)
                yield from plan.annotations(stream, "annotations", batch)
            else:
                for _ in stream.items("annotations"):
                    pass  # read again once the images are known
        else:
            extra[key] = stream.value(key)
    if not seen:
        raise BadInput("neither a COCO dataset (images, annotations, categories) nor a "
                       "results list", where=where)
    for key in ("images", "categories"):
        if key not in head:
            raise BadInput(f"field {key}: field required", where=where)
    if plan is None:
        plan = _DatasetPlan(where, skeleton, frames, head)
        with JsonStream(path) as again:
            again.kind()
            for key in again.members():
                if key == "annotations":
                    yield from plan.annotations(again, "annotations", batch)
                else:
                    again.value(key)
    yield plan.tail(extra)


class _DatasetPlan:
    """A dataset's images (and categories, when they come first) checked and matched, then
    its annotations read in batches (:func:`stream_coco`). Categories that come after the
    annotations (as in COCO's own files) are checked when they come, and so are the
    annotations' category ids then."""

    def __init__(self, where: str, skeleton: Skeleton, frames: Sequence[Frame],
                 head: dict[str, Any]):
        self.where = where
        self.k = skeleton.num_joints
        self._skeleton = skeleton
        self._frames = frames
        self._head = head
        self.cats: dict[int, _Category] | None = None
        self.category: dict[str, Any] | None = None
        self.matched: dict[int, Frame] = {}
        self.first = CocoImport("dataset", where)
        self.ids: set[int] = set()
        #: Category ids of annotations read before the categories: the first record of each.
        self.pending: dict[int, str] = {}
        self.started = False

    def _check_head(self) -> None:
        """The checks of the images (and categories) against the project, made once the
        first annotations have the right shape (a misshapen record is named first, as when
        the whole file is checked at once)."""
        where = self.where
        images, _ = self._head["images"]
        _unique((im.id for im in images), "image", where)
        if "categories" in self._head:
            self.set_categories(*self._head["categories"])
        self.matched = _match_frames(images, self._frames, where)
        self.first.rekey = _rekey(self.matched, self._frames)
        for img in images:
            self.first.frame_ids[img.id] = img.id
            self.first.file_names[img.id] = img.file_name
            kept = dict(img.model_extra or {})
            if kept:
                self.first.image_extra[img.id] = kept

    def set_categories(self, categories: list[_Category], raw: list[Any]) -> None:
        where = self.where
        _unique((c.id for c in categories), "category", where)
        cats = {}
        for i, c in enumerate(categories):
            _check_category(c, self._skeleton, where, i)
            cats[c.id] = c
        if not cats:
            raise BadInput("field categories: no category", where=where)
        for cid, record in self.pending.items():
            if cid not in cats:
                raise BadInput(f"{record}: field category_id: no category with id {cid}",
                               where=where)
        self.cats = cats
        self.category = dict(raw[0])
        self.category["id"] = categories[0].id

    def annotations(self, stream: JsonStream, key: str, batch: int) -> Iterator[CocoImport]:
        raw: list[Any] = []
        start = 0
        for item in stream.items(key):
            raw.append(item)
            if len(raw) == batch:
                yield self._batch(raw, start, stream.done)
                start += len(raw)
                raw = []
        if raw or not self.started:
            yield self._batch(raw, start, stream.done)

    def tail(self, extra: dict[str, Any]) -> CocoImport:
        part = CocoImport("dataset", self.where, category=self.category)
        part.dataset_extra = extra
        return part

    def _batch(self, raw: list[Any], start: int, read: int) -> CocoImport:
        where = self.where
        try:
            anns: Sequence[_Plain | _Annotation] | None = plain_annotations(raw)
            if anns is None:
                anns = _ANNOTATIONS.validate_python(raw)
        except ValidationError as exc:
            err = exc.errors(include_url=False)[0]
            loc = list(err["loc"])
            loc[0] = int(loc[0]) + start
            raise _validation_error_at(err, ("annotations", *loc), raw[int(err["loc"][0])],
                                       where) from None
        if not self.started:
            self._check_head()
        out = self.first if not self.started else CocoImport("dataset", where)
        out.read = read
        self.started = True
        labels: list[tuple[int, _Plain | _Annotation, dict[str, Any]]] = []
        ids, matched, cats = self.ids, self.matched, self.cats
        kept_out = ("id", "image_id", "keypoints", "score", "num_keypoints")
        for n, a in enumerate(anns):
            # The record's name is written only for a message: most records have none.
            if a.id in ids:
                raise BadInput(f"annotation id {a.id} appears twice", where=where)
            ids.add(a.id)
            if a.image_id not in matched:
                raise BadInput(f"{_record(start + n, a.id)}: field image_id: no image with id "
                               f"{a.image_id}", where=where)
            if cats is None:
                if a.category_id not in self.pending:
                    self.pending[a.category_id] = _record(start + n, a.id)
            elif a.category_id not in cats:
                raise BadInput(f"{_record(start + n, a.id)}: field category_id: no category "
                               f"with id {a.category_id}", where=where)
            if a.iscrowd:
                if a.iscrowd != 1:
                    raise BadInput(f"{_record(start + n, a.id)}: field iscrowd: {a.iscrowd} is "
                                   "not 0 (a person) or 1 (a crowd region)", where=where)
                kept = {key: v for key, v in raw[n].items() if key != "image_id"}
                out.regions.append((a.image_id, _crowd_polygons(
                    raw[n], where, _record(start + n, a.id)), kept))
                continue
            extra = {key: v for key, v in raw[n].items() if key not in kept_out}
            labels.append((start + n, a, extra))
        k = self.k
        block = _keypoint_block(
            [a.keypoints for _, a, _ in labels], k, where,
            _Records([(i, a.id) for i, a, _ in labels]),
            [matched[a.image_id] for _, a, _ in labels])
        no_scores = np.full(k, np.nan)
        auto, imported = (AUTO,) * k, (IMPORTED,) * k
        for (i, a, extra), kp in zip(labels, block):
            track = _track_id(extra, where, _record(i, a.id)) if "track_id" in extra else None
            person = Person(a.id, kp, no_scores, imported if a.score is None else auto,
                            None if a.score is None else float(a.score), extra, track,
                            "" if track is None else IMPORTED)
            out.people.append((a.image_id, person))
        return out


def _record(i: int, annotation_id: int) -> str:
    """How a message names the ``i``-th annotation.

    Examples
    --------
    >>> _record(3, 17)
    'annotations[3] (id 17)'
    """
    return f"annotations[{i}] (id {annotation_id})"


class _Records(Sequence[str]):
    """The names of annotations ``(index, id)``, written when a message asks for one."""

    def __init__(self, items: Sequence[tuple[int, int]]):
        self._items = items

    def __len__(self) -> int:
        return len(self._items)

    def __getitem__(self, n):
        return _record(*self._items[n])


def _stream_results(path: str | Path, where: str, skeleton: Skeleton, frames: Sequence[Frame],
                    batch: int) -> Iterator[CocoImport]:
    k = skeleton.num_joints
    by_id = {f.id: f for f in frames}
    as_visibility = True
    outside: int | None = None
    # First pass: check every record and learn what the third keypoint values are.
    for start, _raw, _results, block, _read in _results_batches(path, where, k, by_id, batch):
        third = block[:, :, 2]
        as_visibility = as_visibility and bool(np.isin(third, (0, 1, 2)).all())
        if outside is None:
            bad = np.flatnonzero(((third < 0) | (third > 1)).any(axis=1))
            outside = start + int(bad[0]) if bad.size else None
    if not as_visibility and outside is not None:
        raise BadInput(f"results[{outside}]: field keypoints: third values must all be "
                       "visibility (0, 1, 2) or all be scores in [0, 1]", where=where)
    first = True
    for start, raw, results, block, read in _results_batches(path, where, k, by_id, batch):
        out = CocoImport("results", where, read=read)
        for n, (r, kp) in enumerate(zip(results, block)):
            if as_visibility:
                scores = np.where(kp[:, 2] > 0, float(r.score), np.nan)
            else:
                scores = kp[:, 2].copy()
                kp[:, 2] = np.where(scores > 0, 2, 0)
            extra = {key: v for key, v in raw[n].items()
                     if key not in ("image_id", "keypoints", "score", "id")}
            track = _track_id(extra, where, f"results[{start + n}]")
            out.people.append((r.image_id, Person(0, kp, scores, (AUTO,) * k, float(r.score),
                                                  extra, track,
                                                  "" if track is None else IMPORTED)))
        out.fresh_people = len(out.people)
        first = False
        yield out
    if first:
        yield CocoImport("results", where)


def _results_batches(path: str | Path, where: str, k: int, by_id: Mapping[int, Frame],
                     batch: int
                     ) -> Iterator[tuple[int, list[Any], list[_Result], np.ndarray, int]]:
    with JsonStream(path, root="results") as stream:
        stream.kind()
        raw: list[Any] = []
        start = 0
        for item in stream.items():
            raw.append(item)
            if len(raw) == batch:
                yield start, raw, *_check_results(raw, start, where, k, by_id), stream.done
                start += len(raw)
                raw = []
        if raw:
            yield start, raw, *_check_results(raw, start, where, k, by_id), stream.done


def _check_results(raw: list[Any], start: int, where: str, k: int,
                   by_id: Mapping[int, Frame]) -> tuple[list[_Result], np.ndarray]:
    try:
        results = _RESULTS.validate_python(raw)
    except ValidationError as exc:
        err = exc.errors(include_url=False)[0]
        loc = list(err["loc"])
        at = int(loc[0])
        loc[0] = at + start
        raise _validation_error_at(err, tuple(loc), raw[at], where, root="results") from None
    for n, r in enumerate(results):
        if r.image_id not in by_id:
            raise BadInput(f"results[{start + n}]: field image_id: no project frame with id "
                           f"{r.image_id}", where=where,
                           hint="import the dataset with these image ids first")
    block = _keypoint_block([r.keypoints for r in results], k, where,
                            [f"results[{start + n}]" for n in range(len(results))],
                            [by_id[r.image_id] for r in results], visibility=False)
    return results, block


def _validation_error(exc: ValidationError, data: Any, where: str, root: str = "") -> BadInput:
    err = exc.errors(include_url=False)[0]
    return _message(err, describe(tuple(err["loc"]), data, root, field="record"), where)


def _validation_error_at(err: Any, loc: tuple[Any, ...], item: Any, where: str,
                         root: str = "") -> BadInput:
    """:func:`_validation_error` for an error of one record of a batch, ``loc`` in the file."""
    return _message(err, describe_item(loc, item, root, field="record"), where)


def _message(err: Any, place: str, where: str) -> BadInput:
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
            f"{3 * k} (x, y, v for {count(k, 'joint')})", where=where)
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
    try:
        block = np.array(values, dtype=np.float64).reshape(n, k, 3)
    except OverflowError:  # an integer past a float's range (JSON allows any size)
        for i, row in enumerate(values):
            for j, x in enumerate(row):
                if isinstance(x, int) and abs(x) > sys.float_info.max:
                    raise BadInput(f"{records[i]}: field keypoints.{j}: an integer past "
                                   "±1.8e308 is too large for a coordinate", where=where
                                   ) from None
        raise
    if visibility:
        for i in np.flatnonzero(~np.isin(block[:, :, 2], (0, 1, 2)).all(axis=1))[:1]:
            _check_keypoints(values[i], k, where, records[i], visibility)
    sizes = np.array([(f.width, f.height) if f.status == "ok" and f.width > 0 else (np.inf, np.inf)
                      for f in frames], dtype=np.float64).reshape(n, 2)
    widths, heights = sizes[:, :1], sizes[:, 1:]
    on = block[:, :, 2] > 0
    xs, ys = block[:, :, 0], block[:, :, 1]
    far = on & ((xs < -widths) | (xs > 2 * widths) | (ys < -heights) | (ys > 2 * heights))
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
            f"{record}: field keypoints: {count(len(cat.keypoints), 'joint')}, the project's "
            f"skeleton has {skeleton.num_joints}", where=where)
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
                    f"{record}: field file_name: {img.file_name!r} matches "
                    f"{count(len(candidates), 'project image')} by base name", where=where,
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
