"""Findings: how much accepting every proposed fix cleans the demo, per kind, how well the
confidence is calibrated, and how long a frame's findings take.

- The accept-all figure (:func:`app.demo.calibrate.accept_all`) on the shipped demo and on
  demo seeds that neither the thresholds nor the calibration saw (:data:`UNSEEN`, generated
  into a temporary folder, about 30 s each): the share of wrong labelled joints removed and
  the change in correct ones, judged against the demos' true poses.
- Per kind, the fixes accepted, the share that helped and the wrong joints they removed.
- The reliability table on the unseen seeds: predicted confidence against the share of fixes
  that helped (each fix applied alone).
- Speed: a frame's findings (triage included) against triage alone, on the shipped demo, CPU
  seconds per frame (the machine may be shared), each frame weighed by how its project
  records its grouping (alone: the maps' grouping alone is not computed), as the app does.
"""

from __future__ import annotations

import shutil
import tempfile
import time
from pathlib import Path

from app.analysis.triage.calibration import SHIPPED
from app.analysis.triage.findings import frame_findings
from app.analysis.triage.frame import triage_frame
from app.demo.calibrate import accept_all, demo_folder, demo_frames, fix_effects, reliability
from tests.benchmarks import common

#: Seeds no threshold or calibration was chosen on (see the README's "Findings" section).
UNSEEN = (20, 21, 22)


def _speed(frames) -> tuple[float, float]:
    """CPU seconds per frame: triage alone, and triage with the findings."""
    start = time.process_time()
    for f in frames:
        people = {p: x.keypoints for p, x in f.labels.people.items()}
        scores = {p: x.scores for p, x in f.labels.people.items()}
        triage_frame(people, f.labels.skeleton, scores, f.maps, (f.frame.width, f.frame.height),
                     grouping=f.frame.grouping)
    triage = (time.process_time() - start) / len(frames)
    start = time.process_time()
    for f in frames:
        people = {p: x.keypoints for p, x in f.labels.people.items()}
        scores = {p: x.scores for p, x in f.labels.people.items()}
        frame_findings(f.frame.id, people, f.labels.skeleton, scores, f.maps,
                       (f.frame.width, f.frame.height), grouping=f.frame.grouping)
    return triage, (time.process_time() - start) / len(frames)


def run() -> list[dict]:
    rows = []
    cache = Path(tempfile.mkdtemp(prefix="posewright-findings-bench-"))
    try:
        shipped = demo_frames(demo_folder(cache, None))
        figures = [accept_all(shipped, SHIPPED, "shipped demo")]
        effects = []
        for seed in UNSEEN:
            frames = demo_frames(demo_folder(cache, seed))
            figures.append(accept_all(frames, SHIPPED, f"seed {seed}"))
            effects += fix_effects(frames, f"seed {seed}")
        triage, findings = _speed(shipped)
    finally:
        shutil.rmtree(cache, ignore_errors=True)
    for f in figures:
        detail = (f"wrong labelled joints {f.before.wrong} -> {f.after.wrong}, correct "
                  f"{f.before.correct} -> {f.after.correct} ({f.correct_change:+.1%})")
        rows.append(common.row(f"findings: accept all, wrong joints removed, {f.demo}",
                               100 * f.removed_share, "%", ">= 50 %",
                               f.removed_share >= 0.5, detail))
        rows.append(common.row(f"findings: accept all, correct joints change, {f.demo}",
                               100 * f.correct_change, "%", ">= -2 %",
                               f.correct_change >= -0.02))
    unseen = sum(figures[2:], figures[1])
    rows.append(common.row("findings: accept all, wrong joints removed, unseen seeds",
                           100 * unseen.removed_share, "%", ">= 50 %",
                           unseen.removed_share >= 0.5,
                           f"seeds {', '.join(map(str, UNSEEN))}: {unseen.before.wrong} -> "
                           f"{unseen.after.wrong} wrong, {unseen.before.correct} -> "
                           f"{unseen.after.correct} correct ({unseen.correct_change:+.1%})"))
    for kind, n in unseen.fixes.items():
        rows.append(common.row(f"findings: {kind} fixes that helped, unseen seeds",
                               unseen.helped[kind] / n, "share", ">= 0.5",
                               unseen.helped[kind] / n >= 0.5,
                               f"{n} fixes, {unseen.removed[kind]} wrong joints removed"))
    for b in reliability(effects, SHIPPED):
        rows.append(common.row(
            f"findings: confidence {b['low']:.1f}-{b['high']:.1f}, share that helped",
            b["helped"], "share", f"~ {b['mean_confidence']:.2f}",
            abs(b["helped"] - b["mean_confidence"]) <= 0.15,
            f"{b['fixes']} fixes on the unseen seeds, each applied alone"))
    rows.append(common.row("findings: a frame's findings (triage included), shipped demo",
                           findings, "s", "", True,
                           f"triage alone {triage:.3f} s per frame (CPU seconds)"))
    return rows
