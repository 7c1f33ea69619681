"""Hosted projects: eight annotator processes editing one project on a local PostgreSQL server
at once, and one writer's edit on SQLite and on PostgreSQL side by side.

The server is a throwaway cluster (tests/pg.py) with fsync on, as a real server runs. Each
annotator makes 500 moves of random joints, mostly on its own frame and one in five on a
colleague's, each planned from the labels it read just before (compare and set), so some are
refused as conflicts. Acknowledged means ``apply`` returned: the edit is committed. Afterwards
the ledger is checked: every acknowledged edit is there (none lost), and every move of a joint
was planned from the value the previous move left (no silent overwrite). Labels are synthetic.
"""

from __future__ import annotations

import json
import os
import statistics
import subprocess
import sys
import tempfile
import textwrap
import time
from pathlib import Path

from tests import synthetic
from tests.benchmarks.common import median_seconds, row

ROOT = Path(__file__).resolve().parents[2]
ANNOTATORS, EDITS = 8, 500

_ANNOTATOR = textwrap.dedent("""
    import json, random, sys, time
    sys.path.insert(0, {root!r})
    from app.errors import ChangedMeanwhile
    from app.model import MoveJoint
    from app.store import Project

    me, frames, people = {me}, {frames!r}, {people!r}
    rng = random.Random(me)
    p = Project.open({url!r}, author=f"annotator{{me}}")
    sys.stdin.readline()  # everyone starts together
    took, done, refused = [], [], 0
    for n in range({edits}):
        frame = frames[me % len(frames)] if rng.random() < 0.8 else rng.choice(frames)
        pid = rng.choice(people[str(frame)])
        joint = rng.randrange(17)
        value = float(me * 100000 + n)
        seen = p.labels(frame)
        t0 = time.perf_counter()
        try:
            p.apply(MoveJoint(frame, pid, joint, value, value), seen=seen)
        except ChangedMeanwhile:
            refused += 1
        else:
            done.append(value)
        took.append(time.perf_counter() - t0)
    p.close()
    print(json.dumps({{"took": took, "done": done, "refused": refused}}))
""")


def _labelled(folder: Path) -> Path:
    from app.jobs import import_coco, new_project

    images = folder / "images"
    synthetic.write_images(images, ANNOTATORS)
    coco = folder / "labels.json"
    coco.write_text(json.dumps(synthetic.coco_dataset(sorted(p.name for p in images.iterdir()))))
    with new_project(folder / "proj", images=images, author="bench") as p:
        import_coco(p, coco)
    return folder / "proj"


def _team(server, folder: Path) -> list[dict]:
    from app.store import Project
    from app.store.hosting import host

    url = server.new_database()
    host(folder, url)
    with Project.open(url, author="bench") as p:
        frames = [f.id for f in p.frames()]
        people = {str(f): [q.id for q in p.people(f)] for f in frames}
    children = [subprocess.Popen(
        [sys.executable, "-c", _ANNOTATOR.format(root=str(ROOT), me=k, frames=frames,
                                                 people=people, url=url, edits=EDITS)],
        stdin=subprocess.PIPE, stdout=subprocess.PIPE, text=True) for k in range(ANNOTATORS)]
    time.sleep(2.0)  # let every annotator connect before the clock starts
    load = os.getloadavg()[0]
    t0 = time.perf_counter()
    for child in children:
        child.stdin.write("go\n")
        child.stdin.flush()
    results = [json.loads(child.communicate()[0]) for child in children]
    wall = time.perf_counter() - t0
    took = sorted(t for r in results for t in r["took"])
    done = {v for r in results for v in r["done"]}
    refused = sum(r["refused"] for r in results)
    with Project.open(url, author="checker") as p:
        moves = [e for e in reversed(p.history()) if e.kind == "edit" and e.action == "MoveJoint"]
    recorded = {m.after[0] for m in moves}
    lost = len(done - recorded)
    last: dict[tuple[int | None, object], object] = {}
    overwrites = 0
    for m in moves:
        key = (m.frame_id, m.target)
        if key in last and m.before != last[key]:
            overwrites += 1
        last[key] = m.after
    p95 = took[int(0.95 * (len(took) - 1))]
    median = statistics.median(took)
    total = ANNOTATORS * EDITS
    return [
        row(f"{ANNOTATORS} annotators x {EDITS} edits: throughput", total / wall, "edits/s",
            "report", True, f"{len(done)} acknowledged, {refused} refused as conflicts, "
                            f"{wall:.1f} s wall, PostgreSQL fsync on; load average "
                            f"{load:.1f} on {os.cpu_count()} cores when it started"),
        row("time to acknowledge an edit (median)", median * 1e3, "ms", "report", True),
        row("time to acknowledge an edit (95th percentile)", p95 * 1e3, "ms", "<= 20 ms",
            p95 <= 0.020, f"over {len(took)} edits, while {ANNOTATORS} annotators edit"),
        row("acknowledged edits lost", lost, "edits", "0", lost == 0,
            "every acknowledged value is in the ledger"),
        row("silent overwrites", overwrites, "edits", "0", overwrites == 0,
            "every move planned from the value the previous move of that joint left"),
    ]


def _single_writer(server, folder: Path) -> list[dict]:
    from app.model import MoveJoint
    from app.store import Project
    from app.store.hosting import host

    url = server.new_database()
    host(folder, url)
    times = {}
    for name, place in (("SQLite", folder), ("PostgreSQL", url)):
        with Project.open(place, author="bench") as p:
            frame = p.frames()[0].id
            pid = p.people(frame)[0].id
            n = [0]

            def edit(p=p, frame=frame, pid=pid, n=n) -> None:
                n[0] += 1
                p.apply(MoveJoint(frame, pid, n[0] % 17, float(n[0]), 5.0))

            times[name] = median_seconds(edit, repeat=200, warmup=10)
    ratio = times["PostgreSQL"] / times["SQLite"]
    return [
        row("one writer's edit, SQLite folder (median)", times["SQLite"] * 1e3, "ms",
            "<= 5 ms", times["SQLite"] <= 5e-3, "WAL + synchronous=FULL"),
        row("one writer's edit, PostgreSQL (median)", times["PostgreSQL"] * 1e3, "ms",
            "<= 20 ms", times["PostgreSQL"] <= 0.020,
            f"{ratio:.2f}x the SQLite edit; local server over a Unix socket, fsync on"),
    ]


def run() -> list[dict]:
    from tests import pg

    if pg.pg_bin() is None:
        print("bench_hosted: PostgreSQL is not installed; skipped", file=sys.stderr)
        return []
    server = pg.Server(fsync=True)
    try:
        with tempfile.TemporaryDirectory() as tmp:
            folder = _labelled(Path(tmp))
            return _single_writer(server, folder) + _team(server, folder)
    finally:
        server.stop()
