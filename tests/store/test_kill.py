"""Kill -9 at random moments never corrupts the project and never loses a reported edit; kill
-9 during pre-labelling leaves the maps of exactly one run, the one the database names."""

import json
import os
import random
import shutil
import signal
import sqlite3
import subprocess
import sys
import textwrap
import time

import cv2
import numpy as np
import pytest

from app.jobs import new_project
from app.model import JointTarget, NewPerson
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
    with new_project(folder, images=image_dir, author="setup") as p:
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
                     if e.kind == "edit" and isinstance(e.target, JointTarget)}
            missing = reported - moved
            assert not missing, f"edits reported done but lost: {sorted(missing)[:5]}"
            # The stored labels equal the newest ledger value of each joint.
            newest = {}
            for e in reversed(p.history()):
                if isinstance(e.target, JointTarget):
                    newest[(e.frame_id, e.target)] = e.after
            for (frame_id, target), after in newest.items():
                person = next(q for q in p.people(frame_id) if q.id == target.person)
                assert person.joint_value(target.joint)[:3] == after[:3]
    assert len(reported) > 30


PRELABEL_CHILD = textwrap.dedent("""
    import contextlib, os, signal, sys
    sys.path.insert(0, {root!r})
    import numpy
    from app.inference.prelabel import prelabel
    from app.store import Project
    from app.store import project as store

    def die():
        os.kill(os.getpid(), signal.SIGKILL)

    def on_call(n, original):
        calls = []

        def wrapper(*args, **kwargs):
            calls.append(1)
            if len(calls) == n:
                die()
            return original(*args, **kwargs)
        return wrapper

    point = {point!r}
    if point == "writing the maps":
        numpy.savez_compressed = on_call(2, numpy.savez_compressed)
    elif point == "recording the run":
        store.Bulk.set_maps = on_call(2, store.Bulk.set_maps)
    else:  # right after the run's transaction commits, before anything else
        original = store.Project._write

        @contextlib.contextmanager
        def transaction(self, *args, **kwargs):
            with original(self, *args, **kwargs) as tx:
                yield tx
            die()
        store.Project._write = transaction
    project = Project.open({folder!r}, author="child")
    prelabel(project, {model!r}, {config!r})
""")


def _maps_on_disk(folder):
    """Every map file under the project's ``maps/`` folder, and any staging folder."""
    return sorted(p for p in (folder / "maps").rglob("*")
                  if p.suffix == ".npz" or p.name.startswith(".staging"))


def _maps_named(project):
    """Each frame's maps as the database names them, read back: ``{frame: (cm, paf)}``."""
    out = {}
    for f in project.frames():
        path, _ = project.maps_path(f.id)
        with np.load(path) as npz:
            out[f.id] = (npz["confidence_maps"].copy(), npz["pafs"].copy())
    return out


@pytest.mark.slow
@pytest.mark.parametrize("point, survivor", [("writing the maps", "first"),
                                             ("recording the run", "first"),
                                             ("after the commit", "second")])
def test_sigkill_during_prelabel_leaves_exactly_the_run_the_database_names(
        tmp_path, caplog, point, survivor):
    """A second pre-labelling run (another config: an extra scale, so other maps) is killed
    with SIGKILL while it writes its maps, inside the transaction that records it, or right
    after that transaction commits. After the next open the maps on disk are exactly one
    complete run, file for file, the one the database names (the first run unless the second
    committed), nothing is stranded, and the open says in one line what it cleaned up.
    Frames, models and configs are synthetic (tests/inference/onnx_models.py)."""
    from app.inference.prelabel import prelabel
    from tests.inference.onnx_models import colour_dot_model
    from tests.inference.test_network import FIELDS, MAPS_FROM, SK, _config, _people_at

    images = tmp_path / "images"
    images.mkdir()
    for n, xs in enumerate(([30.3, 80.7, 131.2], [25.0, 95.0], [40.0, 75.0, 110.0])):
        cv2.imwrite(str(images / f"f{n}.png"), _people_at(xs)[1])
    model = colour_dot_model(tmp_path / "dots.onnx", MAPS_FROM, FIELDS, stride=4,
                             channel_order="bgr", mean=(10, 20, 30), scale=(0.5, 0.25, 0.125))
    first, second = tmp_path / "first.json", tmp_path / "second.json"
    first.write_text(_config().model_dump_json())
    second.write_text(_config(extra_scales=[1.5]).model_dump_json())
    base = tmp_path / "base"
    with new_project(base, images=images, skeleton=SK, author="setup") as p:
        prelabel(p, model, first)
        expected = {"first": _maps_named(p)}
    shutil.copytree(base, tmp_path / "clean")
    with Project.open(tmp_path / "clean") as p:
        prelabel(p, model, second)
        expected["second"] = _maps_named(p)
    assert not np.array_equal(expected["first"][1][0], expected["second"][1][0])

    folder = tmp_path / "killed"
    shutil.copytree(base, folder)
    script = PRELABEL_CHILD.format(root=ROOT, folder=str(folder), model=str(model),
                                   config=str(second), point=point)
    child = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True)
    assert child.returncode == -signal.SIGKILL, child.stderr

    caplog.clear()
    with Project.open(folder, author="checker") as p:
        assert not p.read_only
        record = json.loads(p.meta("last_prelabel"))
        assert record["config"]["extra_scales"] == ([] if survivor == "first" else [1.5])
        named = _maps_named(p)
        for frame_id, (cm, paf) in expected[survivor].items():
            np.testing.assert_array_equal(named[frame_id][0], cm)
            np.testing.assert_array_equal(named[frame_id][1], paf)
        assert _maps_on_disk(folder) == sorted(p.maps_path(f.id)[0] for f in p.frames())
        assert p.counts()["people"] == 8
    said = [r.getMessage() for r in caplog.records if "interrupted run" in r.getMessage()]
    assert len(said) == 1 and "\n" not in said[0], said
    assert "project.holder.json" in said[0]
    with Project.open(folder) as p:
        assert p.recovered == ()
