"""Opening a large project in the main window until its Worklist shows its first rows: time and
peak memory, for 100,000 and 1,000,000 frames, pages kept to one state (SQLite and
PostgreSQL) and the page queries on PostgreSQL.

Synthetic data only: frames registered without images (the window reports the first one
missing), half of them triaged with random scores (seed 0) and one or two reasons each.

Each opening runs in a process of its own (its peak resident set is its own: ``VmHWM``). The
baseline, in the same run and in a process of its own, is what the Worklist read before it
fetched only the rows in view: every frame, every triage result and every frame's findings
count, without Qt or a window.

Usage: ``python -m tests.benchmarks.run worklist``; ``POSEWRIGHT_BENCH_FRAMES=100000`` leaves
the million out.
"""

from __future__ import annotations

import os
import subprocess
import sys
import tempfile
import textwrap
from pathlib import Path

import numpy as np

from tests.benchmarks.common import median_seconds, row

ROOT = Path(__file__).resolve().parents[2]

_PEAK = """
def peak_mb():
    status = dict(line.split(":", 1) for line in open("/proc/self/status"))
    return int(status["VmHWM"].split()[0]) / 1024
"""

_OPEN_WINDOW = _PEAK + textwrap.dedent("""
    import os, sys, time
    os.environ["QT_QPA_PLATFORM"] = "offscreen"
    os.environ["XDG_CONFIG_HOME"] = {settings!r}
    sys.path.insert(0, {root!r})
    from PySide6.QtWidgets import QApplication
    app = QApplication(["bench"])
    from app.store import Project
    from app.ui.window import MainWindow
    t0, c0 = time.perf_counter(), time.process_time()
    p = Project.open({folder!r}, author="bench")
    w = MainWindow(p, restore_layout=False)
    w.resize(1600, 1000)
    w.show()
    deadline = time.monotonic() + 60
    while not (w.worklist_model.fetched and w.frame_id is not None) and \\
            time.monotonic() < deadline:
        app.processEvents()
    w.worklist.view.viewport().repaint()
    took, cpu = time.perf_counter() - t0, time.process_time() - c0
    print(took, peak_mb(), w.worklist_model.rowCount(), len(w.worklist_model.fetched), cpu)
    w.shutdown()
    p.close()
""")

_EAGER_READS = _PEAK + textwrap.dedent("""
    import sys, time
    sys.path.insert(0, {root!r})
    from app.store import Project
    t0 = time.perf_counter()
    p = Project.open({folder!r}, author="bench")
    frames, triage, found = p.frames(), p.triage_all(), p.finding_counts()
    took = time.perf_counter() - t0
    print(took, peak_mb(), len(frames))
    p.close()
""")


def make_large_project(folder: Path, n_frames: int, seed: int = 0) -> None:
    """A project of ``n_frames`` registered frames (no images), every other one triaged with a
    random score and a reason or two (synthetic)."""
    from app.store import NewFrame, Project

    rng = np.random.default_rng(seed)
    with Project.create(folder, author="bench") as p:
        with p.bulk("Bench", "register synthetic frames", "bench") as b:
            for lo in range(0, n_frames, 100_000):
                hi = min(n_frames, lo + 100_000)
                b.frames.insert([NewFrame(f"images/f{i:07d}.jpg", f"f{i:07d}.jpg", 1920, 1080)
                                 for i in range(lo, hi)], first_id=lo + 1)
        for lo in range(1, n_frames + 1, 200_000):
            ids = range(lo, min(n_frames + 1, lo + 200_000), 2)
            scores = rng.random(len(ids))
            p.store_triage({fid: (float(s), [
                {"kind": "stretched-limb", "person": None, "weight": 0.9}] + (
                [{"kind": "crowded", "person": None, "weight": 0.3}] if fid % 3 else []))
                for fid, s in zip(ids, scores, strict=True)})


def _child(code: str) -> list[str]:
    return subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          check=True).stdout.split()


def _load() -> str:
    return f"load {os.getloadavg()[0]:.1f}"


def _bench_open(tmp: Path, n_frames: int, goal_s: float, goal_mb: float | None) -> list[dict]:
    folder = tmp / f"frames-{n_frames}"
    make_large_project(folder, n_frames)
    out = _child(_OPEN_WINDOW.format(root=str(ROOT), folder=str(folder),
                                     settings=str(tmp / "settings")))
    took, peak, rows, pages = float(out[0]), float(out[1]), int(out[2]), int(out[3])
    cpu = float(out[4])
    base = _child(_EAGER_READS.format(root=str(ROOT), folder=str(folder)))
    base_took, base_peak = float(base[0]), float(base[1])
    label = f"{n_frames:,}"
    result = [row(f"open a {label}-frame project, Worklist shown", took, "s",
                  f"<= {goal_s:g} s", took <= goal_s,
                  f"{rows:,} rows, {pages} pages of 100 read; CPU time of the process "
                  f"{cpu:.2f} s; the reads of a Worklist that "
                  f"held every frame (frames, triage, findings counts, no window): "
                  f"{base_took:.2f} s; {_load()}")]
    if goal_mb is not None:
        result.append(row(f"open a {label}-frame project, Worklist shown: peak memory", peak,
                          "MB", f"<= {goal_mb:g} MB", peak <= goal_mb,
                          f"peak RSS of the process, Qt and imports included; the eager "
                          f"reads alone peak at {base_peak:.0f} MB"))
    return result


def _state_pages(p: object, where: str) -> list[dict]:
    """A page of the frames kept to one state (untouched: nearly all), at the top and 25,000
    down, against the page at the same place with no filter (the baseline, same run)."""
    from app.model.labels import FrameState
    from app.store.frames import FrameQuery

    rows = []
    for offset in (0, 25_000):
        q = FrameQuery(states=(FrameState.UNTOUCHED,), offset=offset, limit=100)
        took = median_seconds(lambda q=q: p.worklist_page(q), repeat=10, warmup=2)
        base = median_seconds(
            lambda o=offset: p.worklist_page(FrameQuery(offset=o, limit=100)), repeat=10,
            warmup=2)
        rows.append(row(f"Worklist page kept to 'untouched' at offset {offset:,} of 100k "
                        f"frames, {where} (median)", took * 1e3, "ms", "<= 16 ms",
                        took <= 16e-3, f"the same page with no filter {base * 1e3:.1f} ms; "
                        f"{_load()}"))
    return rows


def _bench_folder_pages(tmp: Path) -> list[dict]:
    """Worklist pages kept to one state in a folder project (SQLite) of 100,000 frames."""
    from app.store import Project

    folder = tmp / "frames-100000"
    if not folder.exists():
        make_large_project(folder, 100_000)
    with Project.open(folder, author="bench") as p:
        return _state_pages(p, "SQLite")


def _bench_hosted_pages(tmp: Path) -> list[dict]:
    """Worklist pages of 100,000 frames hosted on a throwaway PostgreSQL (tests/pg.py)."""
    from app.store import Project
    from app.store.frames import FrameQuery
    from app.store.hosting import host
    from tests import pg

    if pg.pg_bin() is None:
        print("bench_worklist: PostgreSQL is not installed; pages not measured there",
              file=sys.stderr)
        return []
    folder = tmp / "frames-100000"
    if not folder.exists():
        make_large_project(folder, 100_000)
    server = pg.Server()
    try:
        url = server.new_database()
        host(folder, url)
        rows = []
        with Project.open(url, author="bench") as p:
            for offset in (0, 25_000):
                q = FrameQuery(offset=offset, limit=100)
                took = median_seconds(lambda q=q: p.worklist_page(q), repeat=10, warmup=2)
                base = median_seconds(
                    lambda o=offset: p.frame_page(FrameQuery(order="id", offset=o, limit=100)),
                    repeat=10, warmup=2)
                rows.append(row(f"Worklist page at offset {offset:,} of 100k frames, "
                                "PostgreSQL (median)", took * 1e3, "ms", "<= 16 ms",
                                took <= 16e-3, f"frames, triage and findings counts of the "
                                f"page; a page of frames by id alone {base * 1e3:.1f} ms; "
                                f"{_load()}"))
            count = median_seconds(lambda: p.frame_count(FrameQuery(reason="crowded")),
                                   repeat=10, warmup=2)
            rows.append(row("count of one reason kind's frames of 100k, PostgreSQL (median)",
                            count * 1e3, "ms", "<= 50 ms", count <= 50e-3, _load()))
            rows += _state_pages(p, "PostgreSQL")
        return rows
    finally:
        server.stop()


def run() -> list[dict]:
    sizes = [int(s) for s in os.environ.get("POSEWRIGHT_BENCH_FRAMES",
                                            "100000,1000000").split(",")]
    goals = {100_000: (0.5, None), 1_000_000: (2.0, 400.0)}
    with tempfile.TemporaryDirectory() as tmp:
        tmp_path = Path(tmp)
        rows: list[dict] = []
        for n in sizes:
            goal_s, goal_mb = goals.get(n, (2.0, 400.0))
            rows += _bench_open(tmp_path, n, goal_s, goal_mb)
        rows += _bench_folder_pages(tmp_path)
        rows += _bench_hosted_pages(tmp_path)
        return rows
