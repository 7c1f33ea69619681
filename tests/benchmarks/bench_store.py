"""Store benchmarks: COCO import (whole and streamed, time and peak memory), edit and undo
latency, opening a large project and reading a page of its Worklist.

Synthetic data only (random people on blank frames; no image files are read).
"""

from __future__ import annotations

import json
import sqlite3
import subprocess
import sys
import tempfile
import textwrap
import time
from pathlib import Path

import numpy as np

from app.fileio import parse_json
from app.jobs import import_coco
from app.model import MoveJoint
from app.store import NewFrame, Project
from app.store.frames import FrameQuery
from tests.benchmarks.common import median_seconds, row

ROOT = Path(__file__).resolve().parents[2]


def _coco(n_frames: int, per_frame: int, seed: int = 0) -> dict:
    rng = np.random.default_rng(seed)
    images = [{"id": 1 + i, "file_name": f"f{i:06d}.jpg", "width": 1920, "height": 1080}
              for i in range(n_frames)]
    n = n_frames * per_frame
    xy = np.round(rng.uniform(0, 1900, (n, 17, 2)), 2)
    v = rng.integers(0, 3, (n, 17))
    anns = []
    for a in range(n):
        kp = np.column_stack([xy[a], v[a]])
        kp[v[a] == 0, :2] = 0
        flat = kp.ravel().tolist()
        flat[2::3] = [int(x) for x in flat[2::3]]
        anns.append({"id": 1 + a, "image_id": 1 + a // per_frame, "category_id": 1,
                     "keypoints": flat, "num_keypoints": int((v[a] > 0).sum()),
                     "bbox": [0, 0, 10, 10], "area": 100.0, "iscrowd": 0})
    from app.model import coco_body

    return {"images": images, "annotations": anns, "categories": [coco_body().coco_category()]}


def _project_with_frames(folder: Path, n_frames: int) -> Project:
    p = Project.create(folder, author="bench")
    with p.bulk("Bench", "register synthetic frames", "bench") as b:
        b.frames.insert([NewFrame(f"images/f{i:06d}.jpg", f"f{i:06d}.jpg", 1920, 1080)
                         for i in range(n_frames)], first_id=1)
    return p


def _baseline(path: Path, db: Path) -> float:
    """json.load plus a bare executemany of the same rows into an empty table."""
    t0 = time.perf_counter()
    data = json.loads(path.read_bytes())
    conn = sqlite3.connect(db, isolation_level=None)
    conn.execute("PRAGMA journal_mode = WAL")
    conn.execute("CREATE TABLE people (id INTEGER PRIMARY KEY, frame_id INTEGER, "
                 "keypoints BLOB, scores BLOB, sources TEXT, origin TEXT, score REAL, extra TEXT)")
    conn.execute("BEGIN")
    conn.executemany("INSERT INTO people VALUES (?, ?, ?, ?, ?, ?, ?, ?)",
                     ((a["id"], a["image_id"], json.dumps(a["keypoints"]), None, None, "import",
                       None, None) for a in data["annotations"]))
    conn.execute("COMMIT")
    conn.close()
    return time.perf_counter() - t0


def _bench_import(tmp: Path) -> list[dict]:
    data = _coco(10_000, 15)
    path = tmp / "big.json"
    path.write_text(json.dumps(data))
    base = _baseline(path, tmp / "baseline.db")
    with _project_with_frames(tmp / "imp", 10_000) as p:
        t0 = time.perf_counter()
        import_coco(p, path)
        took = time.perf_counter() - t0
    ratio = took / base
    raw = path.read_bytes()
    strict = median_seconds(lambda: parse_json(raw, "big.json"), repeat=5, warmup=1)
    plain = median_seconds(lambda: json.loads(raw), repeat=5, warmup=1)
    return [row("import 10k frames x 15 people (COCO)", ratio, "x", "<= 3x baseline",
                ratio <= 3.0, f"import {took:.2f} s; json.load + executemany {base:.2f} s"),
            row("strict JSON read of that file (no NaN, depth)", strict / plain, "x",
                "<= 1.5x json.loads", strict / plain <= 1.5,
                f"parse_json {strict:.2f} s; json.loads {plain:.2f} s; {len(raw) / 2**20:.0f} MiB")]


#: Streamed import: frames x people of the big file (1,000,000 people, about 300 MB).
STREAM_FRAMES, STREAM_PEOPLE = 100_000, 10

# The child's own peak (VmHWM): ru_maxrss would carry the peak of the benchmark process, which a
# child keeps across exec on Linux.
_PEAK = """
def peak_mb():
    status = dict(line.split(":", 1) for line in open("/proc/self/status"))
    return int(status["VmHWM"].split()[0]) / 1024
"""

_STREAM_IMPORT = _PEAK + """
import sys, time
sys.path.insert(0, {root!r})
from app.jobs import import_coco
from app.store import Project
with Project.open({folder!r}, author="bench") as p:
    t0 = time.perf_counter()
    import_coco(p, {path!r})
    took = time.perf_counter() - t0
print(took, peak_mb())
"""

_STREAM_BASELINE = _PEAK + """
import sys, time
sys.path.insert(0, {root!r})
from pathlib import Path
from tests.benchmarks.bench_store import _baseline
took = _baseline(Path({path!r}), Path({db!r}))
print(took, peak_mb())
"""


def _write_big_coco(path: Path, n_frames: int, per_frame: int, seed: int = 0) -> None:
    """The file of :func:`_coco`, written a thousand frames at a time (synthetic people)."""
    from app.model import coco_body

    with open(path, "w", encoding="utf-8") as fh:
        fh.write('{"images": ')
        fh.write(json.dumps([{"id": 1 + i, "file_name": f"f{i:06d}.jpg", "width": 1920,
                              "height": 1080} for i in range(n_frames)]))
        fh.write(', "annotations": [')
        for lo in range(0, n_frames, 1000):
            part = _coco(min(1000, n_frames - lo), per_frame, seed + lo)["annotations"]
            for a in part:
                a["id"] += lo * per_frame
                a["image_id"] += lo
            text = json.dumps(part)[1:-1]
            fh.write(("" if lo == 0 else ", ") + text)
        fh.write('], "categories": ' + json.dumps([coco_body().coco_category()]) + "}")


def _bench_stream(tmp: Path) -> list[dict]:
    path = tmp / "huge.json"
    _write_big_coco(path, STREAM_FRAMES, STREAM_PEOPLE)
    with _project_with_frames(tmp / "huge", STREAM_FRAMES):
        pass

    def child(code: str, **names: str) -> tuple[float, float]:
        out = subprocess.run([sys.executable, "-c", code.format(root=str(ROOT), **names)],
                             capture_output=True, text=True, check=True).stdout.split()
        return float(out[0]), float(out[1])

    took, rss = child(_STREAM_IMPORT, folder=str(tmp / "huge"), path=str(path))
    base, base_rss = child(_STREAM_BASELINE, path=str(path), db=str(tmp / "huge-base.db"))
    size = path.stat().st_size / 2**20
    people = STREAM_FRAMES * STREAM_PEOPLE
    return [
        row(f"import {people:,} people streamed: peak memory", rss, "MB", "<= 500 MB",
            rss <= 500, f"{size:.0f} MiB file; json.load + executemany peaks at "
                        f"{base_rss:.0f} MB (peak RSS of each process)"),
        row(f"import {people:,} people streamed: time / baseline", took / base, "x",
            "<= 2x baseline", took / base <= 2,
            f"import {took:.1f} s (all checks, one transaction); json.load + bare "
            f"executemany {base:.1f} s"),
    ]


def _bench_edits(tmp: Path) -> list[dict]:
    with _project_with_frames(tmp / "edit", 100) as p:
        from app.model import NewPerson

        pid = p.apply(NewPerson(1, None, tuple((10.0, 10.0, 2) for _ in range(17)))).edit.person_id
        n = [0]

        def edit() -> None:
            n[0] += 1
            p.apply(MoveJoint(1, pid, n[0] % 17, float(n[0]), 5.0))

        t_edit = median_seconds(edit, repeat=200, warmup=5)
        for _ in range(300):
            edit()
        t_undo = median_seconds(p.undo, repeat=200, warmup=5)
    return [
        row("edit applied and durable (median)", t_edit * 1e3, "ms", "<= 5 ms", t_edit <= 5e-3,
            "MoveJoint, WAL + synchronous=FULL, fsync per edit"),
        row("undo applied and durable (median)", t_undo * 1e3, "ms", "<= 5 ms", t_undo <= 5e-3),
    ]


_OPEN = textwrap.dedent("""
    import sys, time, resource
    sys.path.insert(0, {root!r})
    t0 = time.perf_counter()
    from app.store import Project
    t1 = time.perf_counter()
    p = Project.open({folder!r})
    frames = p.frames()
    t2 = time.perf_counter()
    rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(t2 - t1, rss, len(frames))
""")


#: The Worklist page in suspicion order as one query sorting the whole join (the baseline).
_ONE_SORT = ("SELECT frames.id FROM frames LEFT JOIN triage ON triage.frame_id = frames.id "
             "ORDER BY CASE WHEN triage.score IS NULL THEN 1 ELSE 0 END, triage.score DESC, "
             "frames.id LIMIT ? OFFSET ?")


def _bench_page(p: Project) -> list[dict]:
    """A 100-frame Worklist page of 100,000 frames (half of them triaged, random scores,
    seed 0) against the same page sorted in one query."""
    rng = np.random.default_rng(0)
    p.store_triage({fid: (float(s), []) for fid, s in
                    zip(range(1, 100_001, 2), rng.random(50_000), strict=True)})
    rows = []
    for offset in (0, 50_000):
        took = median_seconds(lambda o=offset: p.frame_page(FrameQuery(offset=o, limit=100)),
                              repeat=20, warmup=2)
        with p.db.read() as tx:
            base = median_seconds(lambda o=offset, tx=tx: tx.rows(_ONE_SORT, (100, o)),
                                  repeat=20, warmup=2)
            assert [r[0] for r in tx.rows(_ONE_SORT, (100, offset))] == [
                f.id for f in p.frame_page(FrameQuery(offset=offset, limit=100))]
        rows.append(row(f"Worklist page at offset {offset:,} of 100k frames (median)",
                        took * 1e3, "ms", "<= 16 ms", took <= 16e-3,
                        f"one query sorting every frame: {base * 1e3:.1f} ms (SQLite)"))
    return rows


def _bench_open(tmp: Path) -> list[dict]:
    folder = tmp / "large"
    with _project_with_frames(folder, 100_000) as p:
        pages = _bench_page(p)
    out = subprocess.run([sys.executable, "-c", _OPEN.format(root=str(ROOT), folder=str(folder))],
                         capture_output=True, text=True, check=True).stdout.split()
    took, rss, n = float(out[0]), float(out[1]), int(out[2])
    return [
        row("open 100k-frame project and list frames", took, "s", "<= 0.5 s", took <= 0.5,
            f"{n} frames"),
        row("resident memory after that open", rss, "MB", "<= 300 MB", rss <= 300,
            "peak RSS of the process, imports included"),
        *pages,
    ]


def run() -> list[dict]:
    with tempfile.TemporaryDirectory() as tmp:
        tmp_path = Path(tmp)
        return (_bench_edits(tmp_path) + _bench_open(tmp_path) + _bench_import(tmp_path)
                + _bench_stream(tmp_path))
