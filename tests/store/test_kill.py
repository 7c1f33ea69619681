"""Kill -9 at random moments never corrupts the project and never loses a reported edit."""

import os
import random
import signal
import sqlite3
import subprocess
import sys
import textwrap
import time

import pytest

from app.model import NewPerson
from app.store import Project

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))

CHILD = textwrap.dedent("""
    import sys
    sys.path.insert(0, {root!r})
    from app.model import MoveJoint
    from app.store import Project
    p = Project.open({folder!r}, author="child")
    people = {{f.id: p.people(f.id)[0].id for f in p.frames()}}
    n = int(sys.argv[1])
    print("ready", flush=True)
    while True:
        n += 1
        frame = 1 + n % len(people)
        p.apply(MoveJoint(frame, people[frame], n % 17, float(n), float(n % 97)))
        print("moved", n, flush=True)
        if n % 7 == 0:
            p.undo()
            print("undone", n, flush=True)
""")


@pytest.mark.slow
def test_sigkill_at_random_moments(tmp_path, image_dir):
    folder = tmp_path / "proj"
    with Project.create(folder, images=image_dir, author="setup") as p:
        for f in p.frames():
            p.apply(NewPerson(f.id, None, tuple((10.0, 10.0, 2) for _ in range(17))))
    script = CHILD.format(root=ROOT, folder=str(folder))
    rng = random.Random(20261201)
    reported: set[int] = set()
    n = 0
    for _ in range(30):
        child = subprocess.Popen([sys.executable, "-c", script, str(n)],
                                 stdout=subprocess.PIPE, text=True)
        assert child.stdout.readline().strip() == "ready"
        deadline = time.monotonic() + rng.uniform(0.02, 0.4)
        while time.monotonic() < deadline:
            line = child.stdout.readline().split()
            if line and line[0] == "moved":
                reported.add(int(line[1]))
                n = max(n, int(line[1]))
        os.kill(child.pid, signal.SIGKILL)
        # Edits the child reported but we had not read yet still count; a line cut short by
        # the kill (the last piece, with no newline) was never a complete report.
        for line in child.stdout.read().split("\n")[:-1]:
            if line.startswith("moved "):
                reported.add(int(line.split()[1]))
                n = max(n, int(line.split()[1]))
        child.wait()
        n += 1000  # fresh values for the next round
        with sqlite3.connect(folder / "project.db") as conn:
            assert conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
        with Project.open(folder, author="checker") as p:
            assert not p.read_only
            moved = {int(e.after[0]) for e in p.history()
                     if e.kind == "edit" and e.target.endswith(tuple(f"joint:{j}"
                                                                      for j in range(17)))}
            missing = reported - moved
            assert not missing, f"edits reported done but lost: {sorted(missing)[:5]}"
            # The stored labels equal the newest ledger value of each joint.
            newest = {}
            for e in reversed(p.history()):
                if "/joint:" in e.target:
                    newest[(e.frame_id, e.target)] = e.after
            for (frame_id, target), after in newest.items():
                pid, j = int(target.split("/")[0][7:]), int(target.split(":")[-1])
                person = next(q for q in p.people(frame_id) if q.id == pid)
                assert person.joint_value(j)[:3] == after[:3]
    assert len(reported) > 30
