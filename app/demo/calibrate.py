"""Calibrate and measure the findings on demo rehearsals: seeds in, tables out.

Every figure about findings comes from here: the coefficients of
:mod:`app.analysis.triage.calibration`, the reliability table, the accept-all figure and the
per-kind table of the README, the acceptance test and ``make bench``. A labelled joint is
correct or wrong by :func:`app.demo.evaluate.judge_joints` against the demo's true poses.

- :func:`fix_effects`: every fix the proposers make, applied alone to the labels it was
  proposed for: how many wrong joints it removed and correct joints it gained.
- :func:`fit_calibration`: per kind, a logistic regression of "helped" on strength.
- :func:`accept_all`: every proposed fix accepted as ``posewright findings --accept all``
  does (same selection, same rounds), the labels judged before and after.
- :func:`reliability`: predicted confidence against the observed share that helped.

A fix *helped* when it made more labelled joints right than wrong: ``removed + gained > 0``,
``removed`` the drop in wrong labelled joints and ``gained`` the rise in correct ones (so a
fix that removes three wrong joints and one correct joint helped; one that trades a correct
joint for a wrong one did not). A fix that only marks joints occluded changes neither count;
it helped when the truth marks more of those joints occluded than visible.

Run ``python -m app.demo.calibrate --calibrate 1-8 --measure 20-22 --cache DIR``; demos are
generated into the cache folder once (about 30 s each) and reused.
"""

from __future__ import annotations

import argparse
import json
import logging
import sys
from collections import Counter
from collections.abc import Iterable, Sequence
from dataclasses import asdict, dataclass, field, replace
from pathlib import Path
from typing import Any

import numpy as np

from app.analysis.triage.calibration import (
    PROPOSE_AT,
    SHIPPED,
    Calibration,
    fit_logistic,
    reliability_table,
)
from app.analysis.triage.findings import frame_findings, placed_by_people
from app.analysis.triage.fixes import KINDS, FrameView, propose
from app.analysis.triage.frame import triage_frame
from app.analysis.triage.model_evidence import FieldMemo
from app.demo.evaluate import JointTally, add_grouping_flags, judge_joints, use_grouping
from app.errors import EditRefused
from app.fileio import read_json
from app.model.edits import Edit, EditGroup, SetVisibility, needs_person_id, with_person_id
from app.model.labels import Frame, FrameLabels
from app.model.skeleton import Skeleton
from app.wording import count

log = logging.getLogger(__name__)

#: Fewer fixes of a kind than this in the calibration seeds, and the kind is not fitted.
MIN_FIXES = 8


@dataclass
class DemoFrame:
    """One frame of a demo with what the findings need and the truth to judge them by."""

    frame: Frame
    labels: FrameLabels
    #: The network maps, remembering the line integrals asked of them (every fix tried on
    #: the frame asks again).
    maps: FieldMemo | None
    truth: np.ndarray
    areas: np.ndarray


@dataclass(frozen=True)
class FixEffect:
    """One fix applied alone to the labels it was proposed for."""

    demo: str
    frame_id: int
    kind: str
    strength: float
    removed: int
    gained: int
    visibility_only: bool

    @property
    def helped(self) -> bool:
        return self.removed + self.gained > 0


@dataclass
class AcceptFigure:
    """Every proposed fix accepted: the labels before and after, and per kind the fixes,
    how many helped (judged when applied) and the wrong joints they removed."""

    demo: str
    before: JointTally = field(default_factory=JointTally)
    after: JointTally = field(default_factory=JointTally)
    fixes: Counter = field(default_factory=Counter)
    helped: Counter = field(default_factory=Counter)
    removed: Counter = field(default_factory=Counter)

    @property
    def removed_share(self) -> float:
        return (self.before.wrong - self.after.wrong) / max(self.before.wrong, 1)

    @property
    def correct_change(self) -> float:
        return (self.after.correct - self.before.correct) / max(self.before.correct, 1)

    def __add__(self, other: AcceptFigure) -> AcceptFigure:
        def total(a: Counter, b: Counter) -> Counter:
            out = Counter(a)
            out.update(b)  # unlike ``a + b``, keeps negative counts (fixes that add joints)
            return out

        return AcceptFigure(f"{self.demo}+{other.demo}", self.before + other.before,
                            self.after + other.after, total(self.fixes, other.fixes),
                            total(self.helped, other.helped), total(self.removed, other.removed))

    def to_dict(self) -> dict[str, Any]:
        return {"demo": self.demo, "before": asdict(self.before), "after": asdict(self.after),
                "removed_share": round(self.removed_share, 4),
                "correct_change": round(self.correct_change, 4),
                "per_kind": {k: {"fixes": self.fixes[k], "helped": self.helped[k],
                                 "removed": self.removed[k]} for k in KINDS if self.fixes[k]}}


def demo_frames(folder: str | Path) -> list[DemoFrame]:
    """A demo folder's frames with their auto-labels (grouped from its maps) and true poses.

    The project is built in ``folder`` the first time (images and maps imported, no triage),
    grouped as ``import-maps`` groups by default (:data:`app.map_runs.FRAME_BEFORE`, which
    the demo tools' ``--frame-before`` and ``--each-frame-alone`` set); each frame's
    ``grouping`` is the one its project records, and a frame without a record (a project
    built before the record existed) is taken as grouped that default way, so that triage
    weighs it by that grouping's weights.
    """
    from app import map_runs
    from app.jobs import SOURCES_NAME, new_project
    from app.jobs_analysis import import_maps, load_maps
    from app.model.labels import GROUPED_ALONE, GROUPED_FRAME_BEFORE
    from app.model.skeleton import skeleton_from_dict
    from app.store.project import DB_NAME, Project

    folder = Path(folder)
    sources = read_json(folder / SOURCES_NAME, "the project sources")
    if not (folder / DB_NAME).exists():
        skeleton = skeleton_from_dict(sources["skeleton"])
        with new_project(folder, images=folder / sources["images"],
                         skeleton=skeleton) as project:
            import_maps(project, folder / sources["maps"])
    truth = read_json(folder / sources["truth"], "the true poses")
    image_of = {im["file_name"]: im["id"] for im in truth["images"]}
    by_image: dict[int, list[dict[str, Any]]] = {}
    for ann in truth["annotations"]:
        by_image.setdefault(ann["image_id"], []).append(ann)
    out = []
    with Project.open(folder, read_only=True) as project:
        k = project.skeleton.num_joints
        for f in project.frames():
            if f.grouping is None:
                f = replace(f, grouping=GROUPED_FRAME_BEFORE if map_runs.FRAME_BEFORE
                              else GROUPED_ALONE)
            anns = by_image.get(image_of[Path(f.file_name).name], [])
            maps = load_maps(project, f)
            out.append(DemoFrame(
                f, project.labels(f.id), None if maps is None else FieldMemo(maps),
                np.array([np.reshape(a["keypoints"], (k, 3)) for a in anns],
                         dtype=np.float64).reshape(-1, k, 3),
                np.array([a["area"] for a in anns], dtype=np.float64)))
    return out


def _tally(labels: FrameLabels, frame: DemoFrame) -> JointTally:
    people = [labels.people[p].keypoints for p in sorted(labels.people)]
    k = labels.num_joints
    verdict = judge_joints(np.array(people).reshape(-1, k, 3), frame.truth, frame.areas,
                           labels.skeleton.sigma_array)
    return JointTally(int((verdict == 1).sum()), int((verdict == -1).sum()))


def _apply(labels: FrameLabels, edits: Sequence[Edit]) -> FrameLabels:
    """The labels after ``edits``, new people numbered after the highest id."""
    fresh = max([*labels.people, 0]) + 1
    group: Edit = EditGroup(labels.frame_id, tuple(edits))
    while needs_person_id(group):
        group = with_person_id(group, fresh)
        fresh += 1
    return group.apply(labels)[0]


def _occluded_right(labels: FrameLabels, edits: Sequence[Edit], frame: DemoFrame) -> int:
    """For edits that mark joints occluded: joints the truth marks occluded minus those it
    marks visible (each judged at the true joint nearest to the label)."""
    score = 0
    for e in edits:
        assert isinstance(e, SetVisibility)
        xy = labels.people[e.person_id].keypoints[e.joint, :2]
        if not len(frame.truth):
            continue
        nearest = int(np.argmin(np.hypot(*(frame.truth[:, e.joint, :2] - xy).T)))
        score += 1 if frame.truth[nearest, e.joint, 2] == 1 else -1
    return score


def _view(frame: DemoFrame, labels: FrameLabels, skeleton: Skeleton) -> FrameView:
    people = {p: x.keypoints for p, x in labels.people.items()}
    scores = {p: x.scores for p, x in labels.people.items()}
    size = (frame.frame.width, frame.frame.height)
    verdict = triage_frame(people, skeleton, scores, frame.maps, size,
                           grouping=frame.frame.grouping)
    return FrameView(frame.frame.id, people, skeleton, scores, frame.maps, size, verdict)


def fix_effects(frames: Iterable[DemoFrame], demo: str = "") -> list[FixEffect]:
    """Every fix the proposers make on each frame, applied alone and judged."""
    out = []
    for frame in frames:
        labels = frame.labels
        before = _tally(labels, frame)
        for p in propose(_view(frame, labels, labels.skeleton)):
            if not p.edits:
                continue
            try:
                after_labels = _apply(labels, p.edits)
            except EditRefused as exc:
                log.warning("fix of %s on frame %s refused: %s", p.kind, frame.frame.id, exc)
                continue
            visibility_only = all(isinstance(e, SetVisibility) and e.v == 1 for e in p.edits)
            if visibility_only:
                removed, gained = _occluded_right(labels, p.edits, frame), 0
            else:
                after = _tally(after_labels, frame)
                removed, gained = before.wrong - after.wrong, after.correct - before.correct
            out.append(FixEffect(demo, frame.frame.id, p.kind, float(p.strength), removed,
                                 gained, visibility_only))
    return out


def fit_calibration(effects: Sequence[FixEffect], fitted_on: Sequence[str] = (),
                    propose_at: float = PROPOSE_AT) -> Calibration:
    """Per kind, :func:`~app.analysis.triage.calibration.fit_logistic` of helped on strength
    (kinds with fewer than :data:`MIN_FIXES` fixes are left out and propose nothing)."""
    coefficients = {}
    for kind in KINDS:
        mine = [e for e in effects if e.kind == kind]
        if len(mine) < MIN_FIXES:
            continue
        a, b = fit_logistic([e.strength for e in mine], [e.helped for e in mine])
        coefficients[kind] = (round(a, 3), round(b, 3))
    return Calibration(coefficients, propose_at, tuple(str(s) for s in fitted_on))


def reliability(effects: Sequence[FixEffect], calibration: Calibration,
                edges: Sequence[float] = (0.0, 0.2, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9, 1.0),
                ) -> list[dict[str, Any]]:
    """Predicted confidence of each fix against whether it helped, in bins."""
    predicted = [calibration.confidence(e.kind, e.strength) for e in effects]
    return reliability_table(predicted, [e.helped for e in effects], edges)


def accept_all(frames: Iterable[DemoFrame], calibration: Calibration = SHIPPED,
               demo: str = "", rounds: int | None = None) -> AcceptFigure:
    """Accept every proposed fix as ``posewright findings --accept all`` does.

    Per frame: the findings with ``calibration``, the fixes chosen by
    :func:`app.jobs_findings.select_fixes`, each applied as one group (refused ones skipped),
    then the findings again from the changed labels, for the same number of rounds as the
    command (:data:`app.jobs_findings.ACCEPT_ROUNDS`). Each applied fix is judged on the
    labels it was applied to.
    """
    from app.jobs_findings import ACCEPT_ROUNDS, select_fixes

    figure = AcceptFigure(demo)
    for frame in frames:
        labels = frame.labels
        figure.before += _tally(labels, frame)
        for _ in range(ACCEPT_ROUNDS if rounds is None else rounds):
            view = _view(frame, labels, labels.skeleton)
            found = frame_findings(frame.frame.id, view.people, labels.skeleton, view.scores,
                                   frame.maps, view.image_size, view.triage,
                                   labels.dismissed, calibration=calibration,
                                   placed=placed_by_people(labels))
            chosen, _ = select_fixes(found)
            if not chosen:
                break
            for finding in chosen:
                assert finding.fix is not None
                before = _tally(labels, frame)
                try:
                    after_labels = _apply(labels, finding.fix.edits)
                except EditRefused:
                    continue
                if all(isinstance(e, SetVisibility) and e.v == 1 for e in finding.fix.edits):
                    helped = _occluded_right(labels, finding.fix.edits, frame) > 0
                    removed = 0
                else:
                    after = _tally(after_labels, frame)
                    removed = before.wrong - after.wrong
                    helped = removed + after.correct - before.correct > 0
                labels = after_labels
                figure.fixes[finding.kind] += 1
                figure.helped[finding.kind] += int(helped)
                figure.removed[finding.kind] += removed
        figure.after += _tally(labels, frame)
    return figure


def demo_folder(cache: str | Path, seed: int | None, scene: str = "dance",
                frames: int | None = None) -> Path:
    """The demo of ``seed`` in the cache folder, generated the first time (None: the shipped
    ``demo_project``, copied without its database); ``scene`` ``"choir"`` for the choir on
    risers (:mod:`app.demo.choir`); ``frames`` for fewer frames than the default (a folder
    already in the cache is used as it is)."""
    import shutil

    from app.demo import generate

    cache = Path(cache)
    if seed is None:
        folder = cache / "shipped"
        if not folder.exists():
            shipped = Path(__file__).resolve().parents[2] / "demo_project"
            shutil.copytree(shipped, folder, ignore=shutil.ignore_patterns("project.*"))
        return folder
    folder = cache / (f"seed-{seed}" if scene == "dance" else f"{scene}-seed-{seed}")
    if not (folder / "truth.json").exists():
        generate(folder, seed=seed, scene=scene, **({"frames": frames} if frames else {}))
    return folder


def _seeds(text: str) -> list[int]:
    out: list[int] = []
    for part in text.split(","):
        first, dash, last = part.strip().partition("-")
        out += list(range(int(first), int(last) + 1)) if dash else [int(first)]
    return out


def parse_demos(text: str, scene: str = "dance") -> list[tuple[str, int]]:
    """``(scene, seed)`` pairs from text such as ``1-8,choir:1-8``: each comma-separated part
    a seed or a range of seeds, after ``SCENE:`` for a scene other than ``scene``; a scene
    named holds for the parts that follow until another is named.

    Examples
    --------
    >>> parse_demos("1-2,choir:5,7")
    [('dance', 1), ('dance', 2), ('choir', 5), ('choir', 7)]
    """
    out: list[tuple[str, int]] = []
    for part in text.split(","):
        name, colon, seeds = part.strip().rpartition(":")
        if colon:
            scene = name.strip()
        out += [(scene, s) for s in _seeds(seeds)]
    return out


def format_table(figures: Sequence[AcceptFigure]) -> str:
    """The accept-all figure per demo and the per-kind table of their sum, as Markdown."""
    lines = ["| demo | wrong before | wrong after | removed | correct before | correct after "
             "| change |", "|---|---:|---:|---:|---:|---:|---:|"]
    rows = [*figures, sum(figures[1:], figures[0])] if len(figures) > 1 else list(figures)
    for f in rows:
        lines.append(f"| {f.demo} | {f.before.wrong} | {f.after.wrong} | "
                     f"{f.removed_share:.1%} | {f.before.correct} | {f.after.correct} | "
                     f"{f.correct_change:+.1%} |")
    if figures:
        total = sum(figures[1:], figures[0])
        lines += ["", "| kind | fixes | helped | precision | wrong joints removed |",
                  "|---|---:|---:|---:|---:|"]
        for k in KINDS:
            if total.fixes[k]:
                lines.append(f"| {k} | {total.fixes[k]} | {total.helped[k]} | "
                             f"{total.helped[k] / total.fixes[k]:.2f} | {total.removed[k]} |")
    return "\n".join(lines)


def format_reliability(rows: Sequence[dict[str, Any]]) -> str:
    """:func:`reliability` as a Markdown table."""
    lines = ["| confidence | fixes | mean confidence | helped |", "|---|---:|---:|---:|"]
    for r in rows:
        lines.append(f"| {r['low']:.1f}-{r['high']:.1f} | {r['fixes']} | "
                     f"{r['mean_confidence']:.2f} | {r['helped']:.2f} |")
    return "\n".join(lines)


def main(argv: Sequence[str] | None = None) -> int:
    parser = argparse.ArgumentParser(
        prog="python -m app.demo.calibrate",
        description="fit the findings' confidence on some demo seeds and measure on others")
    parser.add_argument("--calibrate", metavar="SEEDS", default="",
                        help="demos to fit the confidence on (e.g. 1-8,choir:1-8: dance "
                             "seeds 1-8 and choir seeds 1-8); none: use the shipped "
                             "calibration")
    parser.add_argument("--measure", metavar="SEEDS", default="",
                        help="seeds to measure on (e.g. 20-22); the reliability table is "
                             "measured on them")
    parser.add_argument("--shipped", action="store_true", help="also measure the shipped demo")
    parser.add_argument("--scene", choices=("dance", "choir"), default="dance",
                        help="the scenario of the seeds to measure (default: the dance)")
    parser.add_argument("--cache", metavar="DIR", required=True,
                        help="where generated demos are kept")
    parser.add_argument("--calibrate-frames", metavar="N", type=int, default=None,
                        help="frames of each demo generated to fit on (default: the usual 24)")
    parser.add_argument("--json", metavar="FILE", help="write every figure to FILE")
    add_grouping_flags(parser)
    args = parser.parse_args(argv)
    logging.basicConfig(level=logging.WARNING)
    use_grouping(args)
    calibration = SHIPPED
    report: dict[str, Any] = {}
    if args.calibrate:
        fit_demos = parse_demos(args.calibrate)
        effects = []
        for scene, seed in fit_demos:
            effects += fix_effects(demo_frames(demo_folder(args.cache, seed, scene,
                                                              args.calibrate_frames)),
                                   f"{scene} seed {seed}")
            print(f"{scene} seed {seed}: {count(len(effects), 'fix')} so far", file=sys.stderr,
                  flush=True)
        calibration = fit_calibration(effects, [f"{scene} {seed}" for scene, seed in fit_demos])
        report["calibration"] = {"coefficients": dict(calibration.coefficients),
                                 "fitted_on": list(calibration.fitted_on),
                                 "propose_at": calibration.propose_at}
        print("coefficients (a, b):")
        for kind, ab in sorted(calibration.coefficients.items()):
            print(f"    {kind!r}: {ab},")
    label = "seed" if args.scene == "dance" else f"{args.scene} seed"
    demos: list[tuple[str, int | None]] = [(f"{label} {s}", s) for s in _seeds(args.measure)] \
        if args.measure else []
    if args.shipped:
        demos.insert(0, ("shipped", None))
    figures, held_out = [], []
    for name, seed in demos:
        frames = demo_frames(demo_folder(args.cache, seed,
                                         "dance" if seed is None else args.scene))
        figures.append(accept_all(frames, calibration, name))
        if seed is not None:
            held_out += fix_effects(frames, name)
        print(f"{name}: measured", file=sys.stderr, flush=True)
    if figures:
        print(format_table(figures))
        rows = reliability(held_out, calibration)
        print()
        print(format_reliability(rows))
        report["accept_all"] = [f.to_dict() for f in figures]
        report["reliability"] = rows
    if args.json:
        Path(args.json).write_text(json.dumps(report, indent=1) + "\n", encoding="utf-8")
    return 0


if __name__ == "__main__":
    sys.exit(main())
