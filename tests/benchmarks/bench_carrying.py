"""Carrying corrections forward: annotator actions to fix every wrong labelled joint, frame
by frame and with carrying each person's corrections (:mod:`app.demo.carrying`), on the
shipped demo and on demo seeds that no threshold was chosen on (:data:`UNSEEN`, generated
here); the time to carry one person's correction over a sequence."""

from __future__ import annotations

import shutil
import tempfile
import time
from pathlib import Path

from app.analysis.carry import by_person, carry_changes
from app.demo.calibrate import demo_folder
from app.demo.carrying import ActionCount, demo_count, next_action, with_tracks
from tests.benchmarks import common

#: Seeds the carrying was not developed or diagnosed on (see the README's "Sequences"):
#: 81-86 were first measured after the last change to the carrying and to its measure (61-66
#: and 31-33, the earlier held-out seeds, were looked at while the whole-frame batch and the
#: taking by actions were built).
UNSEEN = (81, 82, 83)


def _carry_speed(folder: Path) -> float:
    """Mean CPU seconds to carry one person's corrections (the oracle's, once a frame is
    fixed) over the sequence."""
    from app.demo.calibrate import demo_frames

    frames = demo_frames(folder)
    labels = with_tracks([f.labels for f in frames])
    spent, n = 0.0, 0
    for i, f in enumerate(frames):
        made = []
        while (edit := next_action(labels[i], f.truth, f.areas)) is not None:
            labels[i], changes = edit.apply(labels[i])
            made.extend(changes)
        for relation in by_person(made):
            start = time.process_time()
            carry_changes(relation, labels, i, each_joint=True)
            spent += time.process_time() - start
            n += 1
    return spent / max(n, 1)


def run() -> list[dict]:
    cache = Path(tempfile.mkdtemp(prefix="posewright-carry-bench-"))
    try:
        counts = [demo_count(demo_folder(cache, None), "shipped demo")]
        counts += [demo_count(demo_folder(cache, s), f"seed {s}") for s in UNSEEN]
        speed = _carry_speed(demo_folder(cache, None))
    finally:
        shutil.rmtree(cache, ignore_errors=True)
    rows = []
    unseen = ActionCount("unseen", *(sum(getattr(c, f) for c in counts[1:]) for f in (
        "wrong_before", "frame_by_frame", "carrying", "corrections", "batches",
        "carried_frames", "wrong_left_frame_by_frame", "wrong_left_carrying", "repeated")))
    for c in [counts[0], unseen]:
        name = "shipped demo" if c is counts[0] else f"seeds {UNSEEN[0]}-{UNSEEN[-1]}"
        rows.append(common.row(
            f"actions saved by carrying, {name}", 100 * c.saved, "%", ">= 30 %",
            c.saved >= 0.30,
            f"{c.carrying} actions with carrying ({c.corrections} corrections, {c.batches} "
            f"batches over {c.carried_frames} frames) against {c.frame_by_frame} frame by "
            f"frame, of which {c.repeated} repeat the frame before on the same tracks; "
            f"{c.wrong_before} wrong joints"))
    rows.append(common.row("carry one person's correction over a 24-frame demo",
                           1000 * speed, "ms", "-", True, "CPU time per person corrected, mean "
                           "over every person the oracle corrects"))
    return rows
