"""Batch jobs on every core: ``import-maps``, ``triage`` and ``targets`` with two workers
against one, in the same run.

The frames are the shipped demo's (a synthetic rehearsal, 24 frames with their simulated
network maps) copied four times over, 96 frames. Each figure is the wall time with one worker
divided by the time with two (pool start-up included); on a machine shared with other work the
second core is not always free, so the detail gives both times and the load average. A job
whose items would not repay the pool's start runs in the calling process on "2 workers"
(app/parallel.py), so its figure is near 1x, or above it, since it runs second, warm.
"""

from __future__ import annotations

import os
import shutil
import tempfile
import time
from pathlib import Path

from app.jobs import new_project
from app.jobs_analysis import TargetSettings, export_targets, import_maps, run_triage
from tests.benchmarks import common

DEMO = Path(__file__).resolve().parents[2] / "demo_project"
COPIES = 4


def _frames(root: Path) -> tuple[Path, Path]:
    images, maps = root / "images", root / "maps"
    images.mkdir()
    maps.mkdir()
    for n in range(COPIES):
        for src in sorted((DEMO / "images").glob("*.jpg")):
            name = f"{src.stem}_{n}"
            shutil.copy(src, images / f"{name}.jpg")
            shutil.copy(DEMO / "maps" / f"{src.stem}.npz", maps / f"{name}.npz")
    return images, maps


def _timed(fn) -> float:
    t0 = time.perf_counter()
    fn()
    return time.perf_counter() - t0


def run() -> list[dict]:
    rows = []
    with tempfile.TemporaryDirectory() as tmp:
        root = Path(tmp)
        images, maps = _frames(root)
        times: dict[str, dict[int, float]] = {"import-maps": {}, "triage": {}, "targets": {}}
        for workers in (1, 2):
            with new_project(root / f"p{workers}", images=images, author="bench") as p:
                times["import-maps"][workers] = _timed(
                    lambda p=p, w=workers: import_maps(p, maps, workers=w))
                times["triage"][workers] = _timed(
                    lambda p=p, w=workers: run_triage(p, workers=w))
                times["targets"][workers] = _timed(
                    lambda p=p, w=workers: export_targets(
                        p, root / f"t{w}", TargetSettings(), states=None, workers=w))
        load = os.getloadavg()[0]
        frames = COPIES * len(list((DEMO / "images").glob("*.jpg")))
        for job, t in times.items():
            ratio = t[1] / t[2]
            rows.append(common.row(
                f"{job}: 2 workers vs 1, {frames} demo frames", ratio, "x", ">= 1.7x",
                ratio >= 1.7,
                f"1 worker {t[1]:.2f} s, 2 workers {t[2]:.2f} s (pool start included); "
                f"load average {load:.1f} on {os.cpu_count()} cores"))
    return rows
