"""Track linking: speed on a long synthetic sequence, accuracy on it and on the shipped demo.

- Linking 1,000 frames of 20 synthetic walkers (tests/analysis/synth.py) with
  :func:`app.analysis.tracks.link_tracks`: median wall time against a plain baseline measured
  in the same run (per consecutive pair of frames, OKS of every person against every person of
  the frame before and one optimal assignment: the least any OKS linking does), and the CPU
  time (the machine may be shared).
- The issue's measure, the share of consecutive-frame links that join the same person
  (:func:`app.analysis.tracks.link_accuracy`), on those walkers and on the shipped demo's true
  poses and grouped people (:func:`app.demo.evaluate.linking_accuracy`).
"""

from __future__ import annotations

import time
from itertools import pairwise
from pathlib import Path

import numpy as np
from scipy.optimize import linear_sum_assignment

from app.analysis.similarity import oks_matrix
from app.analysis.tracks import link_accuracy, link_tracks
from app.demo.evaluate import demo_sequence, linking_accuracy
from tests.analysis import synth
from tests.benchmarks import common

DEMO = Path(__file__).resolve().parents[2] / "demo_project"
FRAMES, PEOPLE = 1000, 20


def _plain(frames: list[np.ndarray]) -> None:
    area = np.full(PEOPLE, 0.25 * 260.0**2)
    for before, now in pairwise(frames):
        linear_sum_assignment(oks_matrix(now, before, area, synth.SIGMAS), maximize=True)


def _cpu_seconds(fn) -> float:
    start = time.process_time()
    fn()
    return time.process_time() - start


def run() -> list[dict]:
    frames, who = synth.walkers(np.random.default_rng(0), PEOPLE, FRAMES, (1920, 1080))
    t_ours = common.median_seconds(lambda: link_tracks(frames, synth.SIGMAS), repeat=3,
                                   warmup=1)
    t_plain = common.median_seconds(lambda: _plain(frames), repeat=3, warmup=1)
    cpu = _cpu_seconds(lambda: link_tracks(frames, synth.SIGMAS))
    walkers = link_accuracy(link_tracks(frames, synth.SIGMAS), who)
    rows = [
        common.row(f"link tracks, {FRAMES} frames x {PEOPLE} people", t_ours, "s", "<= 2 s",
                   t_ours <= 2.0, f"CPU {cpu:.2f} s; plain OKS + assignment per frame pair "
                   f"{t_plain:.2f} s ({t_ours / t_plain:.1f}x of it)"),
        common.row("linking accuracy, synthetic walkers", 100 * walkers.accuracy, "%",
                   ">= 99 %", walkers.accuracy >= 0.99,
                   f"{walkers.right} of {walkers.judged} links right; "
                   f"{100 * walkers.recall:.1f} % of the true links made"),
    ]
    if (DEMO / "truth.json").exists():
        truth, auto = linking_accuracy(demo_sequence(DEMO), synth.SIGMAS)
        for name, score, goal in (("true poses", truth, 0.99), ("auto-labels", auto, 0.95)):
            rows.append(common.row(
                f"linking accuracy, shipped demo, {name}", 100 * score.accuracy, "%",
                f">= {100 * goal:.0f} %", score.accuracy >= goal,
                f"{score.right} of {score.judged} judged links right ({score.links} made); "
                f"{100 * score.recall:.1f} % of {score.true_links} true links made"))
    return rows
