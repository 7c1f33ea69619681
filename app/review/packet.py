"""Review packets: our own zip format for sending frames to a colleague and getting them back.

A packet is a zip archive holding:

``manifest.json``
    ``{"format": "posewright-review-packet", "version": 1, "packet_id", "project_id",
    "skeleton", "created", "exported_by", "reviewer", "images": "none" | "full" |
    "blurred-heads" | "blurred-people", "frames": [{"id", "file_name", "width", "height",
    "state", "base_seq", "image", "blur", "grouping"}], "members": {name: sha256}}``.
    ``base_seq`` is the newest ledger entry touching the frame when the packet was made (0
    when none); ``image`` is ``images/<id>.<ext>`` or null. ``members`` lists every other
    member with its SHA-256; a member not listed is refused.

    ``grouping`` (optional) is how the frame's auto-labels were grouped
    (:attr:`app.model.labels.Frame.grouping`): ``"alone"`` or ``"frame-before"``; absent
    when the frame records none (and in packets written before the field existed, which
    still open: like ``blur`` it was added within version 1, as an optional field). The
    reviewer's project records it on its frames, so its triage weighs each frame by the
    weights of that grouping (:func:`app.analysis.triage.combine.weight_set`).

    ``blur`` (blurred images only, else absent) records where the image was blurred and what
    placed each region, for a reviewer's tool to show and an audit to check: ``{"sources":
    [what was there to look with: "labels", "maps", "detector"], "share": fraction of the
    image's pixels blurred, "risk": null or why people may stay recognisable ("2 people may
    be unblurred: no maps"), "regions": [{"sources": [what placed it], "people": [ids of the
    labelled people whose labels placed it], "box": [x0, y0, x1, y1], "sigma": the Gaussian's
    standard deviation in pixels, "ellipses": [[cx, cy, half_width, half_height]],
    "polygons": [[[x, y], ...]]}]}`` in image pixels; a region is the union of its ellipses
    and polygons (see :mod:`app.review.blur`).
``labels.json``
    The labels at the base: ``{"frames": [{"id", "people": [{"id", ...person value}],
    "notes": [{"id", "author", "time", "text", "person"}]}]}`` (person values as
    :meth:`app.model.labels.Person.to_value` writes them).
``images/<id>.<ext>``
    Optional: the original image file (``full``) or a PNG with every head blurred
    (``blurred-heads``) or every person blurred whole (``blurred-people``), see
    :mod:`app.review.blur`.

A returned packet (``FILE-returned.zip``) carries the same manifest plus a ``returned``
section (``reviewer``, ``time``, ``decisions``: ``[{"frame", "decision", "author", "time"}]``,
``base_sha256``), the same ``labels.json``, no images, and ``returned.json``: the reviewer's
final labels ``{"frames": [{"id", "state", "people", "notes"}], "ledger": [rows]}``.

The SHA-256 sums find damage and careless edits; they are not a signature (anyone can
recompute them). The base labels are also checked against the sum the project recorded when
it exported the packet, when it could record one.

Every name of a person a packet carries (``exported_by``, ``reviewer``, the authors of
decisions, notes and ledger rows, the provenance of each joint) must be printable text of at
most :data:`app.safetext.MAX_NAME` characters, and packet and project ids letters, digits and
``-._``: a packet is text from someone else's computer, and these end up in the ledger and
on a terminal (see :mod:`app.safetext`).
"""

from __future__ import annotations

import hashlib
import json
import logging
import math
import os
import time
import uuid
import zipfile
from collections.abc import Iterator, Mapping, Sequence
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path
from typing import Annotated, Any, Literal

import cv2
import numpy as np
from pydantic import (
    AfterValidator,
    BaseModel,
    ConfigDict,
    Field,
    StrictFloat,
    StrictInt,
    StrictStr,
    TypeAdapter,
    ValidationError,
)
from pydantic_core import PydanticCustomError

from app.errors import BadInput, NotFound, PosewrightError
from app.fileio import MAX_ID, JsonId, atomic_write, describe, json_ready, parse_json
from app.formats.images import IMAGE_SUFFIXES, MAX_SIDE, read_image
from app.formats.maps import NetworkMaps, read_maps
from app.model.labels import GROUPINGS, Frame, FrameState, Note, Person
from app.model.records import DECISIONS, OLD_DECISIONS, FrameDecision, PacketRecord
from app.model.skeleton import Skeleton, skeleton_from_dict
from app.progress import Progress
from app.review import DEFAULT_IMAGES, IMAGE_MODES, safezip
from app.review.blur import SOURCES, BlurPlan, blur_frame, place_regions
from app.review.faces import face_detector
from app.safetext import check_name, name_problem
from app.store import Project
from app.wording import count

log = logging.getLogger(__name__)

FORMAT = "posewright-review-packet"
VERSION = 1

MANIFEST = "manifest.json"
LABELS = "labels.json"
RETURNED = "returned.json"
#: Optional member: triage's scores, reasons and findings of the frames sent, so that the
#: reviewer sees why each frame was sent.
TRIAGE = "triage.json"

#: Largest manifest and largest JSON member read into memory.
MAX_MANIFEST = 64 << 20
MAX_JSON = 512 << 20

Number = StrictInt | StrictFloat
ImageMode = Literal["none", "full", "blurred-heads", "blurred-people"]
#: A decision as a returned packet holds it: today's, or as version 0.1.0 wrote it.
Decision = Literal["looks-right", "query", "ready", "agree", "needs-change", "signed-off"]
#: How a frame's auto-labels were grouped, as a manifest's frame entry may record it: the
#: values of :data:`app.model.labels.GROUPINGS`.
Grouping = Literal["alone", "frame-before"]


# ---------------------------------------------------------------------- what a packet holds

@dataclass(frozen=True)
class PacketFrame:
    """One frame as the manifest lists it."""

    id: int
    file_name: str
    width: int
    height: int
    state: FrameState
    base_seq: int
    image: str | None
    #: How the frame's auto-labels were grouped (:attr:`app.model.labels.Frame.grouping`);
    #: None when the packet records nothing.
    grouping: str | None = None


@dataclass(frozen=True)
class FrameContent:
    """One frame's people and notes in a packet (at the base, or as the reviewer left them)."""

    frame_id: int
    people: Mapping[int, Person]
    notes: Mapping[int, Note]
    state: FrameState | None = None


@dataclass(frozen=True)
class ReturnedPart:
    """What a returned packet adds: who returned it, their decisions and final labels."""

    reviewer: str
    time: float
    decisions: Mapping[int, FrameDecision]
    final: Mapping[int, FrameContent]
    ledger: Sequence[Mapping[str, Any]]


@dataclass(frozen=True)
class Packet:
    """A packet read from disk, every member checked (images are checked, not loaded)."""

    path: Path
    packet_id: str
    project_id: str
    skeleton: Skeleton
    images: str
    reviewer: str | None
    exported_by: str
    created: float
    frames: Sequence[PacketFrame]
    base: Mapping[int, FrameContent]
    members: Mapping[str, str]
    manifest: Mapping[str, Any]
    base_json: bytes = field(repr=False)
    #: Per frame, triage's score, reasons and findings as the sender had them (may be empty).
    triage: Mapping[int, tuple[float | None, list[dict[str, Any]], list[dict[str, Any]]]] = \
        field(default_factory=dict)
    #: What a merge remembers to merge a return once: for a returned packet the SHA-256 of
    #: ``returned.json`` and the decisions (so returning an unchanged review again gives the
    #: same sum), otherwise of ``manifest.json``.
    sha256: str = ""
    returned: ReturnedPart | None = None

    @property
    def base_sha256(self) -> str:
        return hashlib.sha256(self.base_json).hexdigest()


def parse_decision(text: str) -> str:
    """A decision from a relaxed spelling ("Looks right", "looks_right"); the words of
    version 0.1.0 ("agree", "needs-change", "signed-off") are read as today's.

    Examples
    --------
    >>> parse_decision("Looks right"), parse_decision("Signed off")
    ('looks-right', 'ready')
    """
    norm = text.strip().lower().replace("_", "-").replace(" ", "-")
    norm = OLD_DECISIONS.get(norm, norm)
    if norm not in DECISIONS:
        raise BadInput(f"unknown decision {text!r}; one of " + ", ".join(DECISIONS),
                       where="decision")
    return norm


# ---------------------------------------------------------------------- validation models

class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid")


def _name(value: str) -> str:
    problem = name_problem(value)
    if problem is not None:
        raise PydanticCustomError("name", "{problem}", {"problem": problem})
    return value


#: A person's name (author, reviewer, a joint's provenance): see :mod:`app.safetext`.
Name = Annotated[StrictStr, AfterValidator(_name)]
#: Someone who must be named: a name that is not empty.
Someone = Annotated[StrictStr, Field(min_length=1), AfterValidator(_name)]
#: A packet's or a project's id: we write UUIDs; letters, digits and ``-._`` are accepted.
Ident = Annotated[StrictStr, Field(pattern=r"^[0-9A-Za-z._-]{1,64}$")]


class _RegionModel(_Strict):
    sources: list[Literal["labels", "maps", "detector"]]
    people: list[JsonId]
    box: list[Number] = Field(min_length=4, max_length=4)
    sigma: Number
    ellipses: list[list[Number]]
    polygons: list[list[list[Number]]]


class _BlurModel(_Strict):
    sources: list[Literal["labels", "maps", "detector"]]
    share: Number
    risk: StrictStr | None
    regions: list[_RegionModel]


class _FrameModel(_Strict):
    id: JsonId
    file_name: StrictStr = Field(min_length=1)
    width: StrictInt = Field(ge=0, le=MAX_SIDE)
    height: StrictInt = Field(ge=0, le=MAX_SIDE)
    state: StrictStr
    base_seq: StrictInt = Field(ge=0, le=MAX_ID)
    image: StrictStr | None
    blur: _BlurModel | None = None
    grouping: Grouping | None = None


class _DecisionModel(_Strict):
    frame: JsonId
    decision: Decision
    author: Someone
    time: Number


class _ReturnedModel(_Strict):
    reviewer: Someone
    time: Number
    decisions: list[_DecisionModel]
    base_sha256: StrictStr = Field(pattern=r"^[0-9a-f]{64}$")


class _TriageFrameModel(_Strict):
    id: JsonId
    score: Number | None
    reasons: list[dict[str, Any]]
    findings: list[dict[str, Any]]


class _TriageModel(_Strict):
    frames: list[_TriageFrameModel]


_TRIAGE = TypeAdapter(_TriageModel)


class _ManifestModel(_Strict):
    format: Literal["posewright-review-packet"]
    version: StrictInt
    packet_id: Ident
    project_id: Ident
    skeleton: dict[str, Any]
    created: Number
    exported_by: Someone
    reviewer: Someone | None
    images: ImageMode
    frames: list[_FrameModel] = Field(min_length=1)
    members: dict[StrictStr, StrictStr]
    returned: _ReturnedModel | None = None


class _PersonModel(_Strict):
    id: JsonId
    keypoints: list[tuple[Number | None, Number | None, StrictInt]]
    scores: list[Number | None]
    sources: list[Name]
    score: Number | None = None
    extra: dict[str, Any] = Field(default_factory=dict)
    #: ``[track id, who set it]`` (:meth:`app.model.labels.Person.to_value`), absent when the
    #: person is on no track.
    track: tuple[Annotated[StrictInt, Field(ge=0, le=MAX_ID)], Name] | None = None


class _NoteModel(_Strict):
    id: JsonId
    author: Name
    time: Number
    text: StrictStr
    person: JsonId | None = None


class _FrameLabelsModel(_Strict):
    id: JsonId
    people: list[_PersonModel]
    notes: list[_NoteModel]
    state: StrictStr | None = None


class _LedgerRowModel(_Strict):
    seq: JsonId
    group_id: JsonId
    kind: StrictStr
    action: StrictStr
    summary: StrictStr
    author: Someone
    time: Number
    frame_id: JsonId | None
    target: StrictStr
    before: Any = None
    after: Any = None
    reverts: JsonId | None = None


class _LabelsModel(_Strict):
    frames: list[_FrameLabelsModel]


class _ReturnedLabelsModel(_Strict):
    frames: list[_FrameLabelsModel]
    ledger: list[_LedgerRowModel]


_MANIFEST = TypeAdapter(_ManifestModel)
_LABELS = TypeAdapter(_LabelsModel)
_RETURNED_LABELS = TypeAdapter(_ReturnedLabelsModel)


def _validate(adapter: TypeAdapter[Any], data: Any, where: str) -> Any:
    try:
        return adapter.validate_python(data)
    except ValidationError as exc:
        err = exc.errors(include_url=False)[0]
        loc = ".".join(str(p) for p in err["loc"]) or "record"
        raise BadInput(f"field {loc}: {err['msg'][:1].lower()}{err['msg'][1:]}",
                       where=where) from None


# ---------------------------------------------------------------------- reading

def read_packet(path: str | Path, returned: bool | None = None,
                limits: safezip.Limits = safezip.DEFAULT_LIMITS) -> Packet:
    """Read and check a packet; nothing is extracted or written.

    Parameters
    ----------
    path
        The zip file.
    returned
        ``True`` to require a returned packet, ``False`` to require one not yet returned,
        ``None`` to accept either.
    limits
        Bounds on the archive's size (:class:`app.review.safezip.Limits`).

    Returns
    -------
    Packet
        The manifest, the base labels and (for a return) the reviewer's part, all checked.

    Raises
    ------
    BadInput
        One line naming the zip and the member for anything wrong: see
        :mod:`app.review.safezip` for the archive rules; besides, a missing or unknown member,
        a SHA-256 that does not match, a manifest or labels file of the wrong shape, a person
        whose joints do not fit the skeleton.
    """
    path = Path(path)
    where = str(path)
    with safezip.open_archive(path) as archive:
        entries = safezip.check_archive(archive, where, limits)
        if MANIFEST not in entries:
            raise BadInput(f"no {MANIFEST}; not a review packet", where=where)
        raw_manifest = safezip.read_member(archive, entries[MANIFEST], where,
                                           limit=MAX_MANIFEST)
        mwhere = f"{where}: member {MANIFEST!r}"
        data = parse_json(raw_manifest, mwhere, "the member")
        if isinstance(data, dict) and data.get("format") == FORMAT \
                and data.get("version") != VERSION:
            raise BadInput(f"packet version {data.get('version')!r}; this Posewright reads "
                           f"version {VERSION}", where=mwhere, hint="update Posewright")
        manifest = _validate(_MANIFEST, data, mwhere)
        skeleton = skeleton_from_dict(manifest.skeleton, where=mwhere + ": skeleton")
        frames = _frames(manifest, mwhere)
        expected = {LABELS} | {f.image for f in frames if f.image} | \
            ({TRIAGE} & set(manifest.members))
        if manifest.returned is not None:
            expected = {LABELS, RETURNED}
        _check_members(manifest.members, set(entries) - {MANIFEST}, expected, where)
        if returned is True and manifest.returned is None:
            raise BadInput("this packet has not been sent back yet", where=where,
                           hint="merge the FILE-returned.zip the reviewer sends back")
        if returned is False and manifest.returned is not None:
            raise BadInput("this packet was reviewed and sent back already", where=where,
                           hint="merge it with `posewright packet merge PROJECT FILE`")
        for name in sorted(set(entries) - {MANIFEST, LABELS, RETURNED}):
            safezip.check_digest(safezip.hash_member(archive, entries[name], where),
                                 manifest.members[name], entries[name], where)
        base_json = safezip.read_member(archive, entries[LABELS], where,
                                        manifest.members[LABELS], MAX_JSON)
        ids = [f.id for f in frames]
        base = _frame_contents(base_json, _LABELS, f"{where}: member {LABELS!r}", skeleton,
                               ids)[0]
        triage = {}
        if TRIAGE in manifest.members and manifest.returned is None:
            raw = safezip.read_member(archive, entries[TRIAGE], where,
                                      manifest.members[TRIAGE], MAX_JSON)
            triage = _triage(raw, f"{where}: member {TRIAGE!r}", set(ids))
        part = None
        digest = hashlib.sha256(raw_manifest).hexdigest()
        if manifest.returned is not None:
            if hashlib.sha256(base_json).hexdigest() != manifest.returned.base_sha256:
                raise BadInput("the base labels differ from those the reviewer started from",
                               where=f"{where}: member {LABELS!r}")
            raw = safezip.read_member(archive, entries[RETURNED], where,
                                      manifest.members[RETURNED], MAX_JSON)
            final, ledger = _frame_contents(raw, _RETURNED_LABELS,
                                            f"{where}: member {RETURNED!r}", skeleton, ids)
            decisions = {}
            for d in manifest.returned.decisions:
                if d.frame not in base:
                    raise BadInput(f"field returned.decisions: frame {d.frame} is not in the "
                                   "packet", where=mwhere)
                decisions[d.frame] = FrameDecision(d.frame, d.decision, d.author, float(d.time))
            part = ReturnedPart(manifest.returned.reviewer, float(manifest.returned.time),
                                decisions, final, ledger)
            content = hashlib.sha256(raw)
            content.update(json.dumps(data["returned"]["decisions"], sort_keys=True).encode())
            digest = content.hexdigest()
    return Packet(
        path=path, packet_id=manifest.packet_id, project_id=manifest.project_id,
        skeleton=skeleton, images=manifest.images, reviewer=manifest.reviewer,
        exported_by=manifest.exported_by, created=float(manifest.created), frames=frames,
        base=base, members=dict(manifest.members), manifest=data, base_json=base_json,
        sha256=digest, returned=part, triage=triage,
    )


def _triage(raw: bytes, where: str, ids: set[int]) -> dict[int, tuple[float | None,
                                                                     list[dict[str, Any]],
                                                                     list[dict[str, Any]]]]:
    """The triage member: each frame's score, reasons and findings, every finding readable."""
    from app.analysis.triage.findings import Finding

    model = _validate(_TRIAGE, parse_json(raw, where, "the member"), where)
    out = {}
    for i, f in enumerate(model.frames):
        if f.id not in ids:
            raise BadInput(f"field frames.{i}.id: frame {f.id} is not in the packet",
                           where=where)
        for n, d in enumerate(f.findings):
            try:
                Finding.from_dict(d)
            except (KeyError, TypeError, ValueError, PosewrightError) as exc:
                raise BadInput(f"field frames.{i}.findings.{n}: not a finding ({exc})",
                               where=where) from None
        out[f.id] = (None if f.score is None else float(f.score), list(f.reasons),
                     list(f.findings))
    return out


def _frames(manifest: _ManifestModel, where: str) -> list[PacketFrame]:
    frames = []
    seen: set[int] = set()
    for i, f in enumerate(manifest.frames):
        record = f"field frames.{i}"
        if f.id in seen:
            raise BadInput(f"{record}.id: frame {f.id} appears twice", where=where)
        seen.add(f.id)
        try:
            state = FrameState(f.state)
        except ValueError:
            raise BadInput(f"{record}.state: unknown frame state {f.state!r}",
                           where=where) from None
        if f.image is not None:
            safezip.check_name(f.image, where)
            stem, dot, ext = f.image.removeprefix("images/").partition(".")
            if not (f.image.startswith("images/") and stem == str(f.id) and dot
                    and "." + ext in IMAGE_SUFFIXES):
                raise BadInput(f"{record}.image: {f.image!r} is not images/{f.id}.<image "
                               "suffix>", where=where)
        frames.append(PacketFrame(f.id, f.file_name, f.width, f.height, state, f.base_seq,
                                  f.image, f.grouping))
    return frames


def _check_members(listed: Mapping[str, str], present: set[str], expected: set[str],
                   where: str) -> None:
    for name, digest in listed.items():
        safezip.check_name(name, where)
        if len(digest) != 64 or any(c not in "0123456789abcdef" for c in digest):
            raise BadInput(f"field members: {name!r} has no SHA-256", where=where)
    unlisted = sorted(present - set(listed))
    if unlisted:
        raise BadInput("the member is not listed in the manifest",
                       where=f"{where}: member {unlisted[0]!r}",
                       hint="the packet was altered; ask for it again")
    absent = sorted(set(listed) - present)
    if absent:
        raise BadInput("the manifest lists it but the archive lacks it",
                       where=f"{where}: member {absent[0]!r}")
    misplaced = sorted(set(listed) ^ expected)
    if misplaced:
        raise BadInput("the member does not belong in this kind of packet",
                       where=f"{where}: member {misplaced[0]!r}")


def _frame_contents(raw: bytes, adapter: TypeAdapter[Any], where: str, skeleton: Skeleton,
                    frame_ids: Sequence[int]) -> tuple[dict[int, FrameContent], list[Any]]:
    data = _validate(adapter, parse_json(raw, where, "the member"), where)
    k = skeleton.num_joints
    out: dict[int, FrameContent] = {}
    person_ids: set[int] = set()
    for i, fl in enumerate(data.frames):
        record = f"frames.{i} (frame {fl.id})"
        if fl.id in out:
            raise BadInput(f"{record}: the frame appears twice", where=where)
        people = {}
        for n, pm in enumerate(fl.people):
            prec = f"{record}: people.{n} (person {pm.id})"
            if pm.id in person_ids:
                raise BadInput(f"{prec}: the person id appears twice", where=where)
            person_ids.add(pm.id)
            people[pm.id] = _person(pm, k, prec, where)
        notes = {}
        for nm in fl.notes:
            if nm.id in notes:
                raise BadInput(f"{record}: note {nm.id} appears twice", where=where)
            notes[nm.id] = Note(nm.id, fl.id, nm.author, float(nm.time), nm.text, nm.person)
        state = None
        if fl.state is not None:
            try:
                state = FrameState(fl.state)
            except ValueError:
                raise BadInput(f"{record}: field state: unknown frame state {fl.state!r}",
                               where=where) from None
        out[fl.id] = FrameContent(fl.id, people, notes, state)
    if set(out) != set(frame_ids):
        missing = sorted(set(frame_ids) - set(out)) or sorted(set(out) - set(frame_ids))
        raise BadInput(f"frames do not match the manifest (frame {missing[0]})", where=where)
    ledger = [row.model_dump() for row in getattr(data, "ledger", [])]
    return out, ledger


def _person(pm: _PersonModel, k: int, record: str, where: str) -> Person:
    if len(pm.keypoints) != k or len(pm.scores) != k or len(pm.sources) != k:
        raise BadInput(f"{record}: field keypoints: the skeleton has {count(k, 'joint')}",
                       where=where)
    for j, (x, y, v) in enumerate(pm.keypoints):
        if v not in (0, 1, 2):
            raise BadInput(f"{record}: field keypoints.{j}: visibility {v} is not one of 0, 1, 2",
                           where=where)
        if v > 0 and (x is None or y is None or not math.isfinite(x) or not math.isfinite(y)):
            raise BadInput(f"{record}: field keypoints.{j}: a labelled joint needs a position",
                           where=where)
        if x is not None and y is not None and not (abs(x) < 1e7 and abs(y) < 1e7):
            raise BadInput(f"{record}: field keypoints.{j}: position far outside any image",
                           where=where)
    return Person.from_value(pm.id, pm.model_dump())


# ---------------------------------------------------------------------- writing

def select_frames(project: Project, spec: str) -> list[Frame]:
    """The frames a ``--frames`` value names: a frame state (``disputed``, ``untouched``...),
    or a comma-separated list of frame ids (or file names).

    Examples
    --------
    >>> import tempfile
    >>> with Project.create(tempfile.mkdtemp()) as p:
    ...     select_frames(p, "disputed")
    []
    """
    text = spec.strip()
    try:
        state = FrameState.parse(text)
    except ValueError:
        state = None
    if state is not None:
        return [f for f in project.frames() if f.state is state]
    items = [s.strip() for s in text.split(",") if s.strip()]
    if not items:
        raise BadInput("no frames named", where="--frames",
                       hint="give a state (disputed, untouched, ...) or frame ids 3,7,12")
    frames: dict[int, Frame] = {}
    for item in items:
        try:
            frame = project.find_frame(item)
        except NotFound as exc:
            raise BadInput(str(exc), where="--frames") from None
        frames[frame.id] = frame
    return sorted(frames.values(), key=lambda f: f.id)


#: How each blurred image mode names what it blurs (:data:`app.review.blur.MODES`).
BLUR_MODES = {"blurred-heads": "heads", "blurred-people": "people"}


def blur_risks(project: Project, frames: Sequence[Frame], images: str = DEFAULT_IMAGES,
               progress: Progress | None = None) -> list[str]:
    """One line per frame whose blurred image may leave someone recognisable, e.g.
    ``"frame 12: 2 people may be unblurred: no maps"``; none unless ``images`` blurs.

    A frame is at risk when it has no network maps (see :meth:`app.review.blur.BlurPlan.risk`):
    its labels may miss people, and only the face detector looks for them. Frames whose image
    is registered unreadable are left out. The lines come from the labels and the project's
    record of maps alone (no image is decoded), so the command line and the app's send dialog
    show them before anything is written; :func:`export_packet` refuses a blurred packet with
    such frames unless told to accept the risk.
    """
    if images not in BLUR_MODES:
        return []
    progress = progress or Progress()
    lines = []
    for n, frame in enumerate(frames):
        progress.step(n, len(frames), "looking for people the blur may miss")
        if frame.status != "ok" or project.maps_path(frame.id) is not None:
            continue
        people = list(project.labels(frame.id).people.values())
        plan = place_regions([p.keypoints for p in people], project.skeleton,
                             (frame.width, frame.height), mode=BLUR_MODES[images])
        risk = plan.risk()
        if risk:
            lines.append(f"frame {frame.id}: {risk}")
    progress.step(len(frames), len(frames), "looking for people the blur may miss")
    return lines


def export_packet(project: Project, out: str | Path, frames: Sequence[Frame],
                  images: str = DEFAULT_IMAGES, reviewer: str | None = None,
                  progress: Progress | None = None,
                  accept_risk: bool = False) -> dict[str, Any]:
    """Write a review packet for ``frames`` to ``out`` (atomically).

    Parameters
    ----------
    project
        The project; when it is open for editing the packet is recorded in it (so that the
        return can be checked against what was sent).
    out
        The zip file to write.
    frames
        The frames to send (see :func:`select_frames`).
    images
        ``blurred-heads`` (the default, :data:`app.review.DEFAULT_IMAGES`),
        ``blurred-people`` (every person blurred whole), ``full`` (the image files as they
        are) or ``none``.
    reviewer
        Who is to review (written in the manifest; the reviewer's name when they open it).
    progress
        Progress and cancel.
    accept_risk
        Send blurred images even of frames where people may stay recognisable (see
        :func:`blur_risks`); without it such a packet is refused and nothing is written.

    Returns
    -------
    dict
        ``packet_id``, ``frames``, ``people``, ``images`` (how many images went in),
        ``missing_images`` (frames sent without their image: missing, marked unreadable, or
        no longer decoding), ``outside_images`` (sent without it because the image file,
        links followed, lies outside the images folder), ``unplaced_heads`` (labelled people
        with no labelled joint), ``risks`` (the lines of :func:`blur_risks` for the frames
        sent), ``regions`` (blurred regions, by what placed them: ``labels``, ``maps``,
        ``detector``) and ``detector`` (whether the face detector was there).

    Raises
    ------
    BadInput
        For a blurred packet with frames at risk, unless ``accept_risk``: naming the first
        frame and the option.

    Notes
    -----
    An image travels only when it decodes, and only from inside the images folder it was
    registered under: a link is followed, and an image it leads to outside that folder stays
    home (a link in an images folder must not carry another file into a packet). An image is
    decoded as everywhere else in Posewright (pixel limit, Exif orientation), so the heads
    blurred are where the labels put them. Blurred images are placed from the labels, the
    frame's network maps when the project keeps them, and a face detector
    (:mod:`app.review.blur`); the manifest records each region and its sources.
    """
    if images not in IMAGE_MODES:
        raise BadInput(f"images {images!r} is not one of " + ", ".join(IMAGE_MODES),
                       where="--images")
    if not frames:
        raise BadInput("no frames to send", where="--frames",
                       hint="choose frames by state (disputed, untouched) or by id")
    if reviewer is not None:
        check_name(reviewer, "--reviewer")
    check_name(project.author, "--author")
    progress = progress or Progress()
    out = Path(out)
    packet_id = str(uuid.uuid4())
    stats: dict[str, Any] = {"packet_id": packet_id, "frames": len(frames), "people": 0,
                             "images": 0, "missing_images": 0, "outside_images": 0,
                             "unplaced_heads": 0, "risks": [],
                             "regions": {source: 0 for source in SOURCES},
                             "detector": face_detector() is not None}
    entries, base_frames = [], []
    with atomic_zip(out) as archive:
        members: dict[str, str] = {}
        for n, frame in enumerate(frames):
            progress.step(n, len(frames), "writing the packet")
            labels = project.labels(frame.id)
            people = list(labels.people.values())
            stats["people"] += len(people)
            image, plan = None, None
            if images != "none":
                image, plan = _write_image(archive, project, frame, images, members, stats)
            history = project.history(frame_id=frame.id, limit=1)
            entry = {"id": frame.id, "file_name": frame.file_name, "width": frame.width,
                     "height": frame.height, "state": frame.state.value,
                     "base_seq": history[0].seq if history else 0, "image": image}
            if frame.grouping in GROUPINGS:
                entry["grouping"] = frame.grouping
            if plan is not None:
                entry["blur"] = _blur_record(plan)
                risk = plan.risk()
                if risk:
                    stats["risks"].append(f"frame {frame.id}: {risk}")
                    if not accept_risk:
                        raise BadInput(f"frame {frame.id}: {risk}; refused: a blurred image "
                                       "must hide everyone", where="--images",
                                       hint="add maps (import-maps, prelabel), send "
                                            "--images none, or pass --accept-risk")
            entries.append(entry)
            base_frames.append({
                "id": frame.id,
                "people": [{"id": p.id, **p.to_value()} for p in people],
                "notes": [{"id": note.id, **note.to_value()} for note in labels.notes.values()],
            })
        base_json = dumps_json({"frames": base_frames})
        members[LABELS] = write_member(archive, LABELS, base_json)
        triaged = _triage_of(project, frames)
        if triaged:
            members[TRIAGE] = write_member(archive, TRIAGE, dumps_json({"frames": triaged}))
        manifest = {
            "format": FORMAT, "version": VERSION, "packet_id": packet_id,
            "project_id": project.project_id, "skeleton": project.skeleton.to_dict(),
            "created": time.time(), "exported_by": project.author, "reviewer": reviewer,
            "images": images, "frames": entries, "members": members,
        }
        write_member(archive, MANIFEST, dumps_json(manifest))
        progress.step(len(frames), len(frames), "writing the packet")
        if project.read_only:
            log.warning("%s is read-only; packet %s is not recorded in it, so when it comes "
                        "back it cannot be checked against what was sent", project.location,
                        packet_id)
            return stats
        record = {k: v for k, v in stats.items() if k != "packet_id"}
        with project.bulk("ExportPacket",
                          f"send {count(len(frames), 'frame')} for review"
                          + (f" by {reviewer}" if reviewer else "") + f" (images {images})",
                          f"packet:{packet_id}", kind="review") as b:
            b.packets.add(PacketRecord(packet_id, "exported", hashlib.sha256(base_json).hexdigest(),
                                       reviewer or "", manifest["created"],
                                       tuple(f.id for f in frames), record))
            b.stats.update({k: v for k, v in record.items()
                            if isinstance(v, int) and not isinstance(v, bool)})
    return stats


def _triage_of(project: Project, frames: Sequence[Frame]) -> list[dict[str, Any]]:
    """The frames' triage (score and reasons) and stored findings, for the reviewer."""
    found = project.findings()
    out = []
    for frame in frames:
        triage = project.triage(frame.id)
        if triage is None and frame.id not in found:
            continue
        score, reasons = triage if triage is not None else (None, [])
        out.append({"id": frame.id, "score": score, "reasons": list(reasons),
                    # A fix's unlabelled joints are NaN: null in JSON, by design, so not
                    # warned of as the stray non-finite numbers of an old import are.
                    "findings": [json_ready(f)[0] for f in found.get(frame.id, [])]})
    return out


def _write_image(archive: zipfile.ZipFile, project: Project, frame: Frame, mode: str,
                 members: dict[str, str],
                 stats: dict[str, Any]) -> tuple[str | None, BlurPlan | None]:
    source = _image_source(project, frame)
    if isinstance(source, _Unsent):
        log.warning("frame %s: %s; sent without it", frame.id, source.reason)
        stats[source.counter] += 1
        return None, None
    real, pixels = source
    plan = None
    if mode == "full":
        name = f"images/{frame.id}{Path(frame.path).suffix.lower()}"
        data = real.read_bytes()
    else:
        blurred, plan = _blur(project, frame, pixels, mode)
        stats["unplaced_heads"] += plan.unplaced
        for region in plan.regions:
            for s in region.sources:
                stats["regions"][s] += 1
        ok, encoded = cv2.imencode(".png", blurred)
        if not ok:
            raise BadInput("cannot encode the blurred image", where=str(project.image_path(frame)))
        name, data = f"images/{frame.id}.png", np.asarray(encoded).tobytes()
    members[name] = write_member(archive, name, data, zipfile.ZIP_STORED)
    stats["images"] += 1
    return name, plan


def _blur(project: Project, frame: Frame, pixels: np.ndarray,
          mode: str) -> tuple[np.ndarray, BlurPlan]:
    """The frame's image blurred from its labels, its maps and the face detector."""
    people = list(project.labels(frame.id).people.values())
    return blur_frame(pixels, [p.keypoints for p in people], project.skeleton,
                      ids=[p.id for p in people], maps=_frame_maps(project, frame),
                      detector=face_detector(), mode=BLUR_MODES[mode])


def _frame_maps(project: Project, frame: Frame) -> NetworkMaps | None:
    """The network maps kept with the frame, or None (with a warning when they no longer
    read)."""
    where = project.maps_path(frame.id)
    if where is None:
        return None
    try:
        return read_maps(where[0], project.skeleton, (frame.width, frame.height))
    except BadInput as exc:
        log.warning("maps of frame %s are not usable: %s", frame.id, exc)
        return None


def _blur_record(plan: BlurPlan) -> dict[str, Any]:
    """What the manifest records of a frame's blur (see the module's docstring)."""
    there = {"labels": True, "maps": plan.maps, "detector": plan.detector}
    return {"sources": [s for s in SOURCES if there[s]], "share": round(plan.share, 4),
            "risk": plan.risk(), "regions": [r.to_value() for r in plan.regions]}


@dataclass(frozen=True)
class _Unsent:
    """Why an image stays home, and which count of the export's report it adds to."""

    counter: str
    reason: str


def _image_source(project: Project, frame: Frame) -> tuple[Path, np.ndarray] | _Unsent:
    """A frame's image file, links followed, and its pixels; or why it cannot travel.

    Only an image registered as readable, whose file lies inside the images folder it was
    registered under (:func:`_image_root`) and which decodes now
    (:func:`app.formats.images.read_image`: within the pixel limit, turned as its Exif
    orientation says, as everywhere else) is sent.
    """
    path = Path(os.path.abspath(project.image_path(frame)))
    if frame.status != "ok" or path.suffix.lower() not in IMAGE_SUFFIXES:
        what = frame.status if frame.status != "ok" else "not named as an image"
        return _Unsent("missing_images", f"image {path} is {what}")
    root = _image_root(project, frame, path)
    try:
        real = path.resolve(strict=True)
        inside = real.is_relative_to(root.resolve(strict=True))
    except OSError as exc:
        return _Unsent("missing_images", f"image {path} cannot be read "
                                         f"({exc.strerror or exc})")
    if not inside:
        return _Unsent("outside_images", f"image {path} leads outside the images folder "
                                         f"{root}, to {real}")
    try:
        return real, read_image(real)
    except (BadInput, NotFound) as exc:
        return _Unsent("missing_images", f"image {path} does not decode ({exc})")


def _image_root(project: Project, frame: Frame, path: Path) -> Path:
    """The folder a frame's image was registered under, links not followed: the project's
    images folder when the image lies in it, else the folder its ``file_name`` is relative to
    (images added from another folder, video frames), else the image's own folder."""
    images_root = project.images_root
    if images_root is not None:
        root = Path(os.path.abspath(images_root))
        if path.is_relative_to(root):
            return root
    parts = Path(frame.file_name).parts
    if parts and ".." not in parts and path.parts[-len(parts):] == parts:
        return Path(*path.parts[: -len(parts)])
    return path.parent


def dumps_json(data: Any) -> bytes:
    """Compact JSON for a member; a non-finite number (kept from an import made before such
    numbers were refused) is written as null, with a warning."""
    clean, found = json_ready(data)
    for path in found:
        log.warning("%s: not a finite number; written to the packet as null", describe(path, data))
    return json.dumps(clean, separators=(",", ":"), allow_nan=False).encode("utf-8")


def write_member(archive: zipfile.ZipFile, name: str, data: bytes,
                  method: int = zipfile.ZIP_DEFLATED) -> str:
    info = zipfile.ZipInfo(name, date_time=time.localtime()[:6])
    info.compress_type = method
    info.external_attr = 0o100644 << 16  # a regular file, rw-r--r--
    archive.writestr(info, data)
    return hashlib.sha256(data).hexdigest()


@contextmanager
def atomic_zip(out: Path) -> Iterator[zipfile.ZipFile]:
    """A zip written to a temporary file beside ``out`` and renamed over it only when the
    block succeeds, so ``out`` is never half written."""
    with atomic_write(out, "wb") as fh, zipfile.ZipFile(fh, "w") as archive:
        yield archive
