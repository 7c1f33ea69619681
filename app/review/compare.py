"""Comparing two sets of labels over the same images: two projects, two COCO files, or one of
each.

Frames are paired by file name. In each frame the people of B are paired one to one with the
people of A by OKS, A being the reference (its visibility decides which joints count and its
area scales the distances), with the optimal assignment of
:func:`app.analysis.similarity.match_people`. People with no labelled joint carry no label and
are left out.

Per frame: the mean OKS, the people left unpaired on each side, and the joints that disagree.
Per joint type: how often the two agree and by how much they differ.
"""

from __future__ import annotations

import csv
import io
import math
from collections.abc import Mapping, Sequence
from dataclasses import asdict, dataclass, field
from pathlib import Path, PurePosixPath
from typing import Any

import numpy as np

from app.analysis.similarity import match_people, person_area
from app.errors import BadInput, NotFound
from app.fileio import atomic_write, read_json
from app.formats.coco import read_coco
from app.model.edits import AddNote, SetFrameState
from app.model.labels import Frame, FrameState, Person
from app.model.skeleton import Skeleton, coco_body
from app.store import Project
from app.store.hosted import is_database_url
from app.store.project import DB_NAME
from app.wording import count

__all__ = [
    "Comparison", "FrameComparison", "JointRow", "LabelSet", "compare", "compare_frame",
    "joint_similarity", "load_labels", "mark_disputed", "reference_area", "write_csv",
]

#: Least OKS for two people to be paired (lower than COCO's 0.5, so that a person with a few
#: wrong joints is still compared joint by joint rather than reported twice as unpaired).
MATCH_OKS = 0.2
#: A joint labelled on both sides disagrees when its own keypoint similarity is below this.
JOINT_SIMILARITY = 0.5


@dataclass(frozen=True)
class LabelSet:
    """Labels to compare: per image file name, the frame id and its people."""

    source: str
    kind: str  # "project" or "coco"
    skeleton: Skeleton | None
    frames: Mapping[str, tuple[int, Sequence[Person]]]


def _norm(name: str) -> str:
    return PurePosixPath(name.replace("\\", "/")).as_posix().removeprefix("./")


def load_labels(path: str | Path, skeleton: Skeleton | None = None) -> LabelSet:
    """Read a project folder (read-only) or a COCO keypoints dataset file.

    ``skeleton`` is needed for a COCO file whose category is not the 17-joint COCO body (its
    OKS sigmas are not in the file).
    """
    if is_database_url(str(path)) or Path(path).is_dir():
        if not is_database_url(str(path)) and not (Path(path) / DB_NAME).is_file():
            raise NotFound(f"{path}: no project here (no {DB_NAME})")
        with Project.open(path, read_only=True) as project:
            people = project.people_by_frame()
            labelled = {_norm(f.file_name): (f.id, people.get(f.id, []))
                        for f in project.frames()}
            return LabelSet(project.location, "project", project.skeleton, labelled)
    path = Path(path)
    where = str(path)
    data = read_json(path)
    if not (isinstance(data, dict) and isinstance(data.get("images"), list)):
        raise BadInput("not a COCO keypoints dataset (images, annotations, categories)",
                       where=where, hint="compare needs file names; a results list has none")
    skeleton = skeleton or _coco_skeleton(data, where)
    frames = []
    for i, img in enumerate(data["images"]):
        if not (isinstance(img, dict) and isinstance(img.get("id"), int)
                and isinstance(img.get("file_name"), str)):
            raise BadInput(f"images[{i}]: needs an integer id and a file_name", where=where)
        w, h = img.get("width"), img.get("height")
        frames.append(Frame(img["id"], img["file_name"], img["file_name"],
                            w if isinstance(w, int) else 0, h if isinstance(h, int) else 0))
    plan = read_coco(path, skeleton, frames)
    by_id: dict[int, list[Person]] = {}
    for frame_id, person in plan.people:
        by_id.setdefault(frame_id, []).append(person)
    out = {}
    for f in frames:
        name = _norm(f.file_name)
        if name in out:
            raise BadInput(f"file name {f.file_name!r} appears twice", where=where)
        out[name] = (f.id, by_id.get(f.id, []))
    return LabelSet(where, "coco", skeleton, out)


def _coco_skeleton(data: Mapping[str, Any], where: str) -> Skeleton:
    cats = data.get("categories")
    names = cats[0].get("keypoints") if isinstance(cats, list) and cats \
        and isinstance(cats[0], dict) else None
    body = coco_body()
    if names == list(body.joints):
        return body
    raise BadInput("the category is not the 17-joint COCO body, so its OKS sigmas are unknown",
                   where=where, hint="compare it with a project of that skeleton, or give "
                                     "--skeleton FILE.json")


# ---------------------------------------------------------------------- the comparison

def reference_area(person: Person) -> float:
    """The reference person's area for OKS: the COCO ``area`` it came with, else the box
    around its labelled joints (:func:`app.analysis.similarity.person_area`)."""
    area = person.extra.get("area")
    if isinstance(area, (int, float)) and not isinstance(area, bool) and area > 0:
        return float(area)
    return float(person_area(person.keypoints))


def joint_similarity(a: np.ndarray, b: np.ndarray, area: float,
                     sigmas: np.ndarray) -> np.ndarray:
    """Per-joint keypoint similarity of B's person against A's (the terms OKS averages).

    Parameters
    ----------
    a, b
        ``(K, 3)`` ``x, y, v``; ``a`` is the reference.
    area
        The reference's area, square pixels.
    sigmas
        ``(K,)`` OKS sigmas.

    Returns
    -------
    numpy.ndarray
        ``(K,)`` ``exp(-d^2 / (2 area (2 sigma)^2))``, NaN where either side is unlabeled.

    Notes
    -----
    The term of COCO's OKS for one joint (``e_i`` of :func:`app.analysis.similarity.oks_matrix`
    with its ``eps``), so that OKS is the mean of these over A's labelled joints when B
    labels them all.

    References
    ----------
    COCO keypoint evaluation, "Object Keypoint Similarity"; ``pycocotools.cocoeval``.

    Examples
    --------
    >>> a = np.array([[0.0, 0.0, 2], [10.0, 0.0, 2]])
    >>> b = np.array([[3.0, 4.0, 2], [10.0, 0.0, 0]])
    >>> joint_similarity(a, b, 100.0, np.array([0.5, 0.5])).round(4)
    array([0.8825,    nan])
    """
    d2 = (a[:, 0] - b[:, 0]) ** 2 + (a[:, 1] - b[:, 1]) ** 2
    e = d2 / (2 * sigmas) ** 2 / (area + np.spacing(1)) / 2
    both = (a[:, 2] > 0) & (b[:, 2] > 0)
    with np.errstate(invalid="ignore", over="ignore"):
        return np.where(both, np.exp(-e), np.nan)


@dataclass
class FrameComparison:
    """One image compared: pairs ``(person A, person B, OKS)``, the unpaired people, the mean
    OKS and the disagreeing joints ``(person A, person B, joint, name, reason)``."""

    file_name: str
    frame_a: int
    frame_b: int
    people_a: int
    people_b: int
    pairs: list[tuple[int, int, float]] = field(default_factory=list)
    unpaired_a: list[int] = field(default_factory=list)
    unpaired_b: list[int] = field(default_factory=list)
    mean_oks: float = 1.0
    disagreements: list[tuple[int, int, int, str, str]] = field(default_factory=list)


@dataclass
class JointRow:
    """How one joint type compares over all paired people."""

    joint: int
    name: str
    compared: int = 0  # pairs where either side labels the joint
    both: int = 0  # ... where both do
    one_side: int = 0
    agree: int = 0
    mean_error: float = math.nan  # mean of d / sqrt(area) where both label it
    mean_similarity: float = math.nan

    @property
    def agreement(self) -> float:
        return self.agree / self.compared if self.compared else math.nan


@dataclass
class Comparison:
    """The result of :func:`compare`."""

    a: str
    b: str
    frames: list[FrameComparison]
    joints: list[JointRow]
    only_a: list[str]
    only_b: list[str]

    @property
    def mean_oks(self) -> float:
        return float(np.mean([f.mean_oks for f in self.frames])) if self.frames else math.nan

    def below(self, threshold: float) -> list[FrameComparison]:
        return [f for f in self.frames if f.mean_oks < threshold]

    def to_dict(self) -> dict[str, Any]:
        joints = []
        for row in self.joints:
            d = asdict(row)
            d["agreement"] = row.agreement
            joints.append(d)
        return {"a": self.a, "b": self.b, "mean_oks": self.mean_oks,
                "frames": [asdict(f) for f in self.frames], "joints": joints,
                "only_a": self.only_a, "only_b": self.only_b}


def compare_frame(people_a: Sequence[Person], people_b: Sequence[Person], sigmas: np.ndarray,
                  names: Sequence[str], match_oks: float = MATCH_OKS,
                  joint_threshold: float = JOINT_SIMILARITY,
                  ) -> tuple[FrameComparison, list[tuple[int, np.ndarray, np.ndarray]]]:
    """Compare the people of one image; A is the reference.

    Parameters
    ----------
    people_a, people_b
        The image's people on each side.
    sigmas
        ``(K,)`` OKS sigmas.
    names
        Joint names, for the disagreements.
    match_oks
        Least OKS for a pair.
    joint_threshold
        Least keypoint similarity for a joint labelled on both sides to agree.

    Returns
    -------
    tuple
        The :class:`FrameComparison` (file and frame fields left blank) and, per pair, the
        joint index arrays needed for the per-joint table: ``(pair index, similarity (K,),
        normalised error (K,))``.

    Notes
    -----
    Mean OKS of the frame: ``sum of the pairs' OKS / (pairs + unpaired A + unpaired B)``, so an
    unpaired person on either side counts as a pair with OKS 0; 1 when neither side has
    anyone. A joint of a pair disagrees when exactly one side labels it, or when both do and
    its keypoint similarity (:func:`joint_similarity`) is below ``joint_threshold`` (0.5: the
    joint alone would fail COCO's loosest OKS threshold). Normalised error is
    ``d / sqrt(area)`` (common practice, no source). A joint unlabeled in B counts as missing
    (0 in the OKS sum; pycocotools sees it at (0, 0), which gives the same 0 unless A's joint
    lies within a few pixels of the image corner).
    """
    a = [p for p in people_a if p.num_labelled]
    b = [p for p in people_b if p.num_labelled]
    out = FrameComparison("", 0, 0, len(a), len(b))
    details: list[tuple[int, np.ndarray, np.ndarray]] = []
    if a and b:
        ref = np.stack([p.keypoints for p in a])
        pred = np.stack([p.keypoints for p in b])
        pred = np.where((pred[:, :, 2:] > 0), pred, np.nan)
        areas = np.array([reference_area(p) for p in a])
        for i, j, score in match_people(pred, ref, areas, sigmas, threshold=match_oks):
            pa, pb = a[j], b[i]
            out.pairs.append((pa.id, pb.id, score))
            sim = joint_similarity(pa.keypoints, pb.keypoints, areas[j], sigmas)
            d = np.hypot(*(pa.keypoints[:, :2] - pb.keypoints[:, :2]).T)
            err = np.where(np.isnan(sim), np.nan, d / math.sqrt(max(areas[j], 1e-12)))
            la, lb = pa.labelled, pb.labelled
            for k in np.flatnonzero(la ^ lb).tolist():
                side = "A" if la[k] else "B"
                out.disagreements.append((pa.id, pb.id, k, names[k], f"labelled in {side} only"))
            for k in np.flatnonzero(la & lb & (sim < joint_threshold)).tolist():
                out.disagreements.append((pa.id, pb.id, k, names[k],
                                          f"{err[k]:.2f} of the person's scale apart"))
            out.disagreements.sort(key=lambda t: (t[0], t[2]))
            details.append((len(out.pairs) - 1, sim, err))
    paired_a = {p[0] for p in out.pairs}
    paired_b = {p[1] for p in out.pairs}
    out.unpaired_a = [p.id for p in a if p.id not in paired_a]
    out.unpaired_b = [p.id for p in b if p.id not in paired_b]
    n = len(out.pairs) + len(out.unpaired_a) + len(out.unpaired_b)
    out.mean_oks = sum(p[2] for p in out.pairs) / n if n else 1.0
    return out, details


def compare(a: LabelSet, b: LabelSet, skeleton: Skeleton | None = None,
            match_oks: float = MATCH_OKS,
            joint_threshold: float = JOINT_SIMILARITY) -> Comparison:
    """Compare two label sets over the images they share (see the module docstring).

    Parameters
    ----------
    a, b
        The label sets (:func:`load_labels`); A is the reference.
    skeleton
        Joint names and OKS sigmas; default A's, else B's.
    match_oks, joint_threshold
        As for :func:`compare_frame`.

    Returns
    -------
    Comparison
        Per image and per joint type, plus the file names found on one side only.

    Raises
    ------
    BadInput
        When the two use different joints, no skeleton is known, or they share no image.
    """
    skeleton = skeleton or a.skeleton or b.skeleton
    if skeleton is None:
        raise BadInput("no skeleton for the comparison", where=a.source)
    for side in (a, b):
        if side.skeleton is not None and side.skeleton.joints != skeleton.joints:
            raise BadInput("the joints differ from the other side's", where=side.source)
    common = sorted(set(a.frames) & set(b.frames))
    if not common:
        raise BadInput("the two share no image file name", where=b.source,
                       hint="compare labels of the same images")
    sigmas = skeleton.sigma_array
    names = skeleton.joints
    k = skeleton.num_joints
    sims: list[np.ndarray] = []
    errs: list[np.ndarray] = []
    labelled: list[tuple[np.ndarray, np.ndarray]] = []
    frames = []
    for name in common:
        fa, people_a = a.frames[name]
        fb, people_b = b.frames[name]
        fc, details = compare_frame(people_a, people_b, sigmas, names, match_oks,
                                    joint_threshold)
        fc.file_name, fc.frame_a, fc.frame_b = name, fa, fb
        frames.append(fc)
        by_id_a = {p.id: p for p in people_a}
        by_id_b = {p.id: p for p in people_b}
        for index, sim, err in details:
            pa, pb = fc.pairs[index][0], fc.pairs[index][1]
            sims.append(sim)
            errs.append(err)
            labelled.append((by_id_a[pa].labelled, by_id_b[pb].labelled))
    joints = [JointRow(j, names[j]) for j in range(k)]
    if sims:
        sim = np.stack(sims)
        err = np.stack(errs)
        la = np.stack([x for x, _ in labelled])
        lb = np.stack([y for _, y in labelled])
        either, both = la | lb, la & lb
        agree = both & (np.nan_to_num(sim, nan=0.0) >= joint_threshold)
        for j, row in enumerate(joints):
            row.compared = int(either[:, j].sum())
            row.both = int(both[:, j].sum())
            row.one_side = row.compared - row.both
            row.agree = int(agree[:, j].sum())
            if row.both:
                row.mean_error = float(np.nanmean(err[both[:, j], j]))
                row.mean_similarity = float(np.nanmean(sim[both[:, j], j]))
    return Comparison(a.source, b.source, frames, joints,
                      sorted(set(a.frames) - set(b.frames)),
                      sorted(set(b.frames) - set(a.frames)))


# ---------------------------------------------------------------------- acting on it

def mark_disputed(project: Project, comparison: Comparison, threshold: float,
                  other: str) -> list[int]:
    """Mark the frames of ``project`` (side A) whose mean OKS is below ``threshold`` disputed.

    Each frame that changes state gets two edits: the state, and a note saying why (the mean
    OKS against ``other``, the unpaired people and the disagreeing joints). Frames already
    disputed are left as they are. Returns the frame ids marked.
    """
    marked = []
    for fc in comparison.below(threshold):
        applied = project.apply(SetFrameState(fc.frame_a, FrameState.DISPUTED))
        if applied.group_id is None:
            continue
        marked.append(fc.frame_a)
        project.apply(AddNote(fc.frame_a, _note(fc, other)))
    return marked


def _note(fc: FrameComparison, other: str) -> str:
    parts = [f"compared with {other}: mean OKS {fc.mean_oks:.2f}"]
    if fc.unpaired_a or fc.unpaired_b:
        parts.append(f"{count(len(fc.unpaired_a), 'person')} here and "
                     f"{len(fc.unpaired_b)} there without a counterpart")
    if fc.disagreements:
        joints = ", ".join(f"{name} of person {pa}" for pa, _, _, name, _ in
                           fc.disagreements[:8])
        more = len(fc.disagreements) - 8
        parts.append("joints that disagree: " + joints + (f" and {more} more" if more > 0
                                                          else ""))
    return "; ".join(parts)


CSV_COLUMNS = ("file_name", "frame_a", "frame_b", "people_a", "people_b", "pairs",
               "unpaired_a", "unpaired_b", "mean_oks", "disagreeing_joints", "details")


def write_csv(comparison: Comparison, out: str | Path) -> None:
    """One row per compared image (columns :data:`CSV_COLUMNS`), written atomically.
    ``details`` lists the disagreeing joints as ``personA/personB:joint``, ``;``-separated."""
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(CSV_COLUMNS)
    for f in comparison.frames:
        writer.writerow([
            f.file_name, f.frame_a, f.frame_b, f.people_a, f.people_b, len(f.pairs),
            len(f.unpaired_a), len(f.unpaired_b), f"{f.mean_oks:.6f}", len(f.disagreements),
            ";".join(f"{pa}/{pb}:{name}" for pa, pb, _, name, _ in f.disagreements),
        ])
    with atomic_write(out, "w", encoding="utf-8", newline="") as fh:
        fh.write(buffer.getvalue())
