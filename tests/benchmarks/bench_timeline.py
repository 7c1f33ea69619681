"""The timeline under the Canvas (app/session/timeline.py) on a long synthetic sequence.

300 frames of 20 synthetic walkers (tests/analysis/synth.py, invented), imported into a
folder project and linked into tracks; then, for one walker in the middle frame:

- the first strip of 41 cells (every frame of the window read: labels, stored findings, the
  Ledger), what selecting a person costs the first time;
- the strip one frame further along the track, as Alt+Right shows it (the frames are kept);
- proposing to carry a correction (a side swap of that walker, as the app does after each
  correction): the part on the UI thread (which frames to read) and the rest, on a worker
  thread (reading the frames and carrying; the walkers keep their pose, so the swap carries
  to the limit, 50 frames each way: the worst case), and the strip after it.

Wall times are medians; the machine may be shared. No goal was set by the issue; 100 ms is
ours for what follows a key press.
"""

from __future__ import annotations

import json
import tempfile
import time
from pathlib import Path

import numpy as np

from app.jobs import import_coco, new_project
from app.jobs_tracks import link_project
from app.model import SwapSides
from app.model.skeleton import coco_body
from app.session.timeline import Timeline
from tests import synthetic
from tests.analysis import synth
from tests.benchmarks import common

FRAMES, PEOPLE, SPAN = 300, 20, 41
SIZE = (1280, 720)


def _project(folder: Path):
    frames, _ = synth.walkers(np.random.default_rng(3), PEOPLE, FRAMES, SIZE)
    images = folder / "images"
    names = synthetic.write_images(images, FRAMES, *SIZE)
    project = new_project(folder / "proj", images=images, author="bench")
    ds = {"images": [{"id": t + 1, "file_name": n, "width": SIZE[0], "height": SIZE[1]}
                     for t, n in enumerate(names)],
          "annotations": [], "categories": [coco_body().coco_category()]}
    for t, people in enumerate(frames):
        for p, kp in enumerate(people):
            flat = [float(v) if k % 3 < 2 else int(v) for k, v in enumerate(kp.ravel())]
            ds["annotations"].append({"id": 100 * (t + 1) + p, "image_id": t + 1,
                                      "category_id": 1, "keypoints": flat, "iscrowd": 0})
    (folder / "labels.json").write_text(json.dumps(ds))
    import_coco(project, folder / "labels.json")
    link_project(project)
    return project


def _once(fn) -> float:
    t0 = time.perf_counter()
    fn()
    return time.perf_counter() - t0


def run() -> list[dict]:
    with tempfile.TemporaryDirectory(prefix="posewright-timeline-bench-") as tmp:
        project = _project(Path(tmp))
        with project:
            ids = [f.id for f in project.frames()]
            mid = ids[len(ids) // 2]
            person = project.people(mid)[0].id
            firsts = []
            for _ in range(3):
                timeline = Timeline(project)
                firsts.append(_once(lambda t=timeline: t.strip(mid, person, SPAN)))
            first = float(np.median(firsts))
            nxt = ids[len(ids) // 2 + 1]
            there = next(p.id for p in project.people(nxt)
                         if p.track == project.people(mid)[0].track)
            step = common.median_seconds(lambda: timeline.strip(nxt, there, SPAN), repeat=9)
            proposes, afters, starts = [], [], []
            for _ in range(5):
                applied = project.apply(SwapSides(mid, person))
                timeline.forget([mid])
                t0 = time.perf_counter()
                work = timeline.propose_work(mid, applied.changes)
                starts.append(time.perf_counter() - t0)
                proposes.append(_once(work))
                afters.append(_once(lambda: timeline.strip(mid, person, SPAN)))
                project.undo()
                timeline.forget([mid])
    where = f"{FRAMES} frames x {PEOPLE} synthetic walkers, a window of {SPAN} cells"
    ms = {k: 1000 * float(np.median(v)) for k, v in
          (("first", [first]), ("step", [step]), ("propose", proposes), ("after", afters),
           ("start", starts))}
    return [
        common.row("timeline: first strip of a track", ms["first"], "ms", "<= 100 ms (ours)",
                   ms["first"] <= 100, f"{where}; every frame of the window read"),
        common.row("timeline: strip one frame along the track", ms["step"], "ms",
                   "<= 100 ms (ours)", ms["step"] <= 100, "the frames of the window kept"),
        common.row("timeline: propose carrying, on the UI thread", ms["start"], "ms",
                   "<= 100 ms (ours)", ms["start"] <= 100,
                   f"a side swap of one walker; then the strip {ms['after']:.1f} ms"),
        common.row("timeline: propose carrying, on a worker thread", ms["propose"], "ms",
                   "none (off the UI thread)", True,
                   "carried to 100 frames, the most a batch reaches"),
    ]
