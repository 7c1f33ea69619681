"""Hosted projects on a real PostgreSQL server (a throwaway cluster, tests/pg.py): several
annotators at once, compare-and-set, per-author undo, claims, live updates, a killed client,
a restarted server, a read-only role, credentials, and hosting itself.

Labels are synthetic (tests/synthetic.py); "ana", "bea" and "cy" are invented names.
"""

from __future__ import annotations

import json
import logging
import os
import signal
import subprocess
import sys
import textwrap
import threading
import time
from pathlib import Path

import pytest

from app.errors import BadInput, ChangedMeanwhile, NotFound, ReadOnly, StorageFailed
from app.jobs import export_coco, import_coco, new_project
from app.model import JointTarget, MoveJoint, SetVisibility
from app.store import Project
from app.store.hosted import is_database_url, redact
from app.store.hosting import host
from tests import pg

ROOT = str(Path(__file__).resolve().parents[2])
#: A safety net for waits on other threads and processes, never a measured time.
WAIT_S = 30.0


@pytest.fixture
def hosted(tmp_path, image_dir, coco_file, pg_url):
    """A labelled folder project (6 frames x 3 people) hosted at a fresh database: the URL."""
    with new_project(tmp_path / "proj", images=image_dir, author="ana") as p:
        import_coco(p, coco_file)
    host(tmp_path / "proj", pg_url)
    return pg_url


def _first(project):
    frame = project.frames()[0].id
    return frame, project.people(frame)[0].id


def test_an_edit_planned_from_what_was_seen_is_refused_when_a_colleague_changed_it(hosted):
    """Compare and set: both annotators saw the wrist at one place; the first move wins, the
    second is refused naming who moved it and when, and nothing of either is lost."""
    with Project.open(hosted, author="ana") as ana, Project.open(hosted, author="bea") as bea:
        frame, pid = _first(ana)
        seen_a, seen_b = ana.labels(frame), bea.labels(frame)
        ana.apply(MoveJoint(frame, pid, 9, 50.0, 60.0), seen=seen_a)
        with pytest.raises(ChangedMeanwhile, match=r"person 1 \(#\d+\)'s left wrist was changed "
                                                   r"by ana at \d{4}-\d\d-\d\d \d\d:\d\d:\d\d"):
            bea.apply(MoveJoint(frame, pid, 9, 70.0, 80.0), seen=seen_b)
        # Another joint of the same person still holds what bea saw: that edit goes through.
        bea.apply(MoveJoint(frame, pid, 10, 71.0, 81.0), seen=seen_b)
        person = {p.id: p for p in ana.people(frame)}[pid]
        assert person.keypoints[9, :2].tolist() == [50.0, 60.0]
        assert person.keypoints[10, :2].tolist() == [71.0, 81.0]
        assert [e.author for e in ana.history(frame_id=frame, limit=2)] == ["bea", "ana"]


def test_undo_is_per_author_and_refused_after_a_colleague_changed_the_same_joint(hosted):
    with Project.open(hosted, author="ana") as ana, Project.open(hosted, author="bea") as bea:
        frame, pid = _first(ana)
        ana.apply(MoveJoint(frame, pid, 3, 10.0, 10.0))
        assert not bea.can_undo() and bea.undo() is None  # bea has done nothing
        bea.apply(MoveJoint(frame, pid, 3, 20.0, 20.0))
        with pytest.raises(ChangedMeanwhile, match=r"cannot undo 'move person 1 \(#\d+\)'s "
                                                   r"left ear.*person 1 \(#\d+\)'s left ear "
                                                   r"was changed by bea"):
            ana.undo()
        assert ana.people(frame)[0].keypoints[3, :2].tolist() == [20.0, 20.0]
        assert bea.undo() is not None  # bea's own undo is hers to make
        assert ana.people(frame)[0].keypoints[3, :2].tolist() == [10.0, 10.0]
        assert ana.undo() is not None  # now nothing stands in the way
        assert ana.history(limit=1)[0].kind == "undo"


def test_other_annotators_changes_reach_the_listeners(hosted):
    """LISTEN/NOTIFY: bea's project hears ana's edit and claim (the wait is a safety net,
    the latency is measured in tests/benchmarks/bench_hosted.py)."""
    with Project.open(hosted, author="ana") as ana, Project.open(hosted, author="bea") as bea:
        heard: list[tuple[str, frozenset[int]]] = []
        got = threading.Event()

        def listener(kind, frames):
            heard.append((kind, frames))
            got.set()

        bea.subscribe(listener)
        frame, pid = _first(ana)
        ana.apply(MoveJoint(frame, pid, 5, 1.0, 2.0))
        assert got.wait(WAIT_S)
        deadline = time.monotonic() + WAIT_S
        while ("edit", frozenset({frame})) not in heard and time.monotonic() < deadline:
            time.sleep(0.01)
        assert ("edit", frozenset({frame})) in heard
        # Only others' changes arrive through the database; one's own arrive directly, once.
        mine: list[str] = []
        ana.subscribe(lambda kind, frames: mine.append(kind))
        ana.apply(MoveJoint(frame, pid, 5, 3.0, 4.0))
        time.sleep(0.5)
        assert mine == ["edit"]


def test_claims_mark_the_frame_someone_works_on_and_run_out(hosted):
    with Project.open(hosted, author="ana") as ana, Project.open(hosted, author="bea") as bea:
        frames = [f.id for f in ana.frames()]
        assert ana.claim(frames[0]).author == "ana"
        # bea cannot take a standing claim; she sees ana's.
        assert bea.claim(frames[0]).author == "ana"
        assert {f: c.author for f, c in bea.claims().items()} == {frames[0]: "ana"}
        # An edit renews one's own claim; a claim that ran out can be taken.
        ana.apply(SetVisibility(frames[0], ana.people(frames[0])[0].id, 0, 1))
        with ana.db.write() as tx:
            tx.claims.take(frames[0], "ana", seconds=0.0)
        assert bea.claims() == {}
        assert bea.claim(frames[0]).author == "bea"
        ana.claim(frames[1])
        ana.release_claim()
        assert set(bea.claims()) == {frames[0]}


def test_how_auto_labels_were_grouped_is_copied_written_and_read_back(tmp_path, image_dir,
                                                                       pg_url):
    """Frame.grouping (schema v9) goes with the project to the server, and a hosted
    project writes and reads it like a folder one, after reopening (synthetic frames)."""
    with new_project(tmp_path / "proj", images=image_dir, author="ana") as p:
        ids = [f.id for f in p.frames()]
        with p.bulk("Test", "record groupings", "test") as b:
            b.set_grouping(ids[:2], "frame-before")
            b.set_grouping(ids[2:4], "alone")
    host(tmp_path / "proj", pg_url)
    with Project.open(pg_url, author="ana") as p:
        assert [f.grouping for f in p.frames()] == ["frame-before"] * 2 + ["alone"] * 2 + \
            [None] * 2
        with p.bulk("Test", "record groupings", "test") as b:
            b.set_grouping(ids[:1], None)
            b.set_grouping(ids[4:], "alone")
    with Project.open(pg_url, author="ana") as p:
        assert p.groupings() == {ids[1]: "frame-before", ids[2]: "alone", ids[3]: "alone",
                                 ids[4]: "alone", ids[5]: "alone"}
        assert p.frame(ids[1]).grouping == "frame-before"


def test_a_read_only_role_opens_the_project_read_only_and_says_so(hosted, pg_server):
    dbname = hosted.rpartition("/")[2]
    pg_server.admin("CREATE ROLE reader LOGIN")
    pg_server.admin("GRANT SELECT ON ALL TABLES IN SCHEMA public TO reader", dbname)
    with Project.open(pg_server.url(dbname, user="reader"), author="cy") as p:
        assert p.read_only and "reader may only read" in p.read_only_reason
        frame, pid = _first(p)
        with pytest.raises(ReadOnly, match="read-only"):
            p.apply(MoveJoint(frame, pid, 1, 2.0, 3.0))
        assert len(p.frames()) == 6 and p.claims() == {}


def test_host_refuses_a_database_that_is_not_empty_and_writes_nothing(hosted, tmp_path):
    with pytest.raises(BadInput, match="not empty"):
        host(tmp_path / "proj", hosted)
    with Project.open(hosted, author="ana") as p:
        assert p.counts()["people"] == 18


def test_host_refuses_a_project_open_for_editing_elsewhere(tmp_path, image_dir, pg_url):
    code = textwrap.dedent(f"""
        import sys, time
        sys.path.insert(0, {ROOT!r})
        from app.store import Project
        p = Project.open({str(tmp_path / 'proj')!r}, author="bea")
        print("held", flush=True)
        time.sleep(60)
    """)
    new_project(tmp_path / "proj", images=image_dir, author="ana").close()
    child = subprocess.Popen([sys.executable, "-c", code], stdout=subprocess.PIPE, text=True)
    try:
        assert child.stdout.readline().strip() == "held"
        with pytest.raises(BadInput, match="open for editing by bea"):
            host(tmp_path / "proj", pg_url)
    finally:
        child.kill()
        child.wait()
    with pytest.raises(NotFound):  # nothing was written
        Project.open(pg_url, author="ana")


def test_an_empty_database_is_no_project(pg_url):
    with pytest.raises(NotFound, match="posewright host"):
        Project.open(pg_url, author="ana")


def test_the_demo_hosted_exports_exactly_what_the_folder_exports(tmp_path, pg_url):
    """The demo rehearsal (synthetic) hosted: the COCO export is byte for byte the folder's,
    and so is the triage stored with it."""
    from app.demo import DEFAULT_SEED, generate
    from app.jobs import open_project

    generate(tmp_path / "demo", seed=DEFAULT_SEED, frames=2)
    with open_project(tmp_path / "demo", author="ana") as folder:
        export_coco(folder, tmp_path / "folder.json", states=None)
        triage = folder.triage_all()
    host(tmp_path / "demo", pg_url)
    with Project.open(pg_url, author="ana") as hosted:
        export_coco(hosted, tmp_path / "hosted.json", states=None)
        assert hosted.triage_all() == triage
        frame = hosted.frames()[0]
        assert hosted.image_path(frame).is_file() and hosted.maps_path(frame.id)[0].is_file()
    assert (tmp_path / "hosted.json").read_bytes() == (tmp_path / "folder.json").read_bytes()


def test_passwords_are_never_written_anywhere(tmp_path, image_dir, coco_file, pg_server,
                                              caplog):
    """The role must give a password (SCRAM); the URL carries it, yet no record, ledger entry,
    log line or error message holds it. Password and role are made up (tests/pg.py)."""
    with new_project(tmp_path / "proj", images=image_dir, author="ana") as p:
        import_coco(p, coco_file)
    url = pg_server.new_database()
    secret_url = pg_server.url(url.rpartition("/")[2], user=pg.PASSWORD_ROLE,
                               password=pg.PASSWORD)
    caplog.set_level(logging.DEBUG)
    host(tmp_path / "proj", secret_url)
    with Project.open(secret_url, author="ana") as p:
        frame, pid = _first(p)
        p.apply(MoveJoint(frame, pid, 2, 5.0, 5.0))
        texts = [json.dumps(p.settings()), json.dumps([e.to_dict() for e in p.history()]),
                 p.location, p.read_only_reason or ""]
    wrong = secret_url.replace(pg.PASSWORD, "not-the-" + pg.PASSWORD)
    with pytest.raises(StorageFailed) as refused:
        Project.open(wrong, author="ana")
    texts += [str(refused.value), redact(wrong), caplog.text]
    assert "password authentication failed" in str(refused.value)
    assert not [t for t in texts if pg.PASSWORD in t]
    # libpq's own places work too: the password from PGPASSWORD, none in the URL.
    os.environ["PGPASSWORD"] = pg.PASSWORD
    try:
        plain = pg_server.url(url.rpartition("/")[2], user=pg.PASSWORD_ROLE)
        with Project.open(plain, author="ana") as p:
            assert not p.read_only
    finally:
        del os.environ["PGPASSWORD"]


def test_urls_and_keyword_strings_name_databases():
    assert is_database_url("postgres://h/db") and is_database_url("host=h dbname=db")
    assert not is_database_url("rehearsal") and not is_database_url("./postgresql")
    assert redact("host=h port=5433 dbname=d user=u password=p sslmode=verify-full") == \
        "postgresql://u@h:5433/d?sslmode=verify-full"


_CLIENT = textwrap.dedent("""
    import sys
    sys.path.insert(0, {root!r})
    from app.errors import ChangedMeanwhile
    from app.model import MoveJoint
    from app.store import Project

    p = Project.open({url!r}, author={author!r})
    frame, pid = {frame}, {pid}
    for n in range({count}):
        seen = p.labels(frame)
        x = float({base} + n)
        try:
            p.apply(MoveJoint(frame, pid, n % 3, x, x), seen=seen)
        except ChangedMeanwhile:
            print("refused", x, flush=True)
        else:
            print("done", x, flush=True)
    p.close()
""")


def _acknowledged(lines):
    return {float(line.split()[1]) for line in lines if line.startswith("done ")}


def test_concurrent_writers_on_the_same_joints_lose_nothing(hosted):
    """Four annotator processes move the same three joints of one person as fast as they
    can, each edit planned from what its annotator had just read. Every acknowledged edit is in
    the ledger, each joint holds the newest acknowledged value, and every refusal was a real
    conflict: the ledger shows someone else's change in between (synthetic values)."""
    with Project.open(hosted, author="setup") as p:
        frame, pid = _first(p)
    children = [subprocess.Popen(
        [sys.executable, "-c", _CLIENT.format(root=ROOT, url=hosted, author=f"w{k}",
                                              frame=frame, pid=pid, count=40,
                                              base=10_000 * (k + 1))],
        stdout=subprocess.PIPE, text=True) for k in range(4)]
    outputs = [c.communicate(timeout=300)[0].splitlines() for c in children]
    assert all(c.returncode == 0 for c in children)
    done = set().union(*(_acknowledged(lines) for lines in outputs))
    refused = sum(line.startswith("refused") for lines in outputs for line in lines)
    assert len(done) + refused == 160 and done
    with Project.open(hosted, author="checker") as p:
        moves = [e for e in reversed(p.history(frame_id=frame))
                 if isinstance(e.target, JointTarget) and e.kind == "edit"]
        assert {m.after[0] for m in moves} == done  # none lost, none invented
        # Compare and set: each move was planned from the value the one before it left.
        last: dict[int, object] = {}
        for m in moves:
            if m.target.joint in last:
                assert m.before == last[m.target.joint]
            last[m.target.joint] = m.after
        person = {q.id: q for q in p.people(frame)}[pid]
        for j, value in last.items():
            assert person.joint_value(j)[:3] == value[:3]


def test_a_client_killed_mid_edit_loses_only_the_edit_in_flight(hosted):
    """kill -9 of an annotator's process while it edits: every edit it reported done is in
    the project, and the project takes edits at once afterwards (its locks went with it)."""
    with Project.open(hosted, author="setup") as p:
        frame, pid = _first(p)
    child = subprocess.Popen(
        [sys.executable, "-c", _CLIENT.format(root=ROOT, url=hosted, author="doomed",
                                              frame=frame, pid=pid, count=100_000,
                                              base=1000)],
        stdout=subprocess.PIPE, text=True)
    seen = []
    while len(seen) < 25:
        line = child.stdout.readline()
        assert line, "the client ended before it was killed"
        seen.append(line)
    os.kill(child.pid, signal.SIGKILL)
    rest = child.stdout.read().split("\n")[:-1]  # a line cut short was never a report
    child.wait()
    done = _acknowledged(seen + rest)
    with Project.open(hosted, author="checker") as p:
        recorded = {e.after[0] for e in p.history(frame_id=frame)
                    if e.author == "doomed" and e.kind == "edit"}
        assert done <= recorded and len(recorded - done) <= 1
        p.apply(MoveJoint(frame, pid, 0, 1.0, 1.0))  # nothing is left locked


@pytest.mark.slow
def test_a_restarted_server_keeps_every_acknowledged_edit_and_the_client_reconnects(
        tmp_path, image_dir, coco_file):
    """The server is stopped and started again (pg_ctl restart) under an open project:
    acknowledged edits are all there, an edit while it is down is refused in one line, and
    afterwards the same project object edits again and hears others again."""
    server = pg.Server(fsync=True)
    try:
        with new_project(tmp_path / "proj", images=image_dir, author="ana") as p:
            import_coco(p, coco_file)
        url = server.new_database()
        host(tmp_path / "proj", url)
        with Project.open(url, author="ana") as ana:
            frame, pid = _first(ana)
            for n in range(5):
                ana.apply(MoveJoint(frame, pid, n, float(n), 1.0))
            server.restart(mode="immediate")
            ana.apply(MoveJoint(frame, pid, 6, 6.0, 1.0))  # a fresh connection from the pool
            server._run("pg_ctl", "-D", str(server.data), "-m", "fast", "-w", "stop")
            with pytest.raises(StorageFailed, match="cannot reach the database server"):
                ana.apply(MoveJoint(frame, pid, 7, 7.0, 1.0))
            server.start()
            heard = threading.Event()
            ana.subscribe(lambda kind, frames: heard.set())
            ana.apply(MoveJoint(frame, pid, 8, 8.0, 1.0))
            with Project.open(url, author="bea") as bea:
                bea.apply(MoveJoint(frame, pid, 9, 9.0, 1.0))
            assert heard.wait(WAIT_S)
            person = {q.id: q for q in ana.people(frame)}[pid]
            assert [person.keypoints[j, 0] for j in (0, 1, 2, 3, 4, 6, 8, 9)] == \
                [0.0, 1.0, 2.0, 3.0, 4.0, 6.0, 8.0, 9.0]
            assert person.keypoints[7, 0] != 7.0
    finally:
        server.stop()


def test_the_command_line_hosts_and_takes_the_url_wherever_it_takes_a_project(
        tmp_path, image_dir, coco_file, pg_server, capsys):
    from app.cli import main

    proj = tmp_path / "proj"
    assert main(["new", str(proj), "--images", str(image_dir), "-q"]) == 0
    assert main(["import", str(proj), str(coco_file), "-q"]) == 0
    url = pg_server.new_database()
    secret = pg_server.url(url.rpartition("/")[2], password="never-shown")
    capsys.readouterr()
    assert main(["host", str(proj), secret, "-q"]) == 0
    out = capsys.readouterr().out
    assert out.startswith(f"hosted {proj} at postgresql://") and "never-shown" not in out
    assert main(["summary", url, "--json", "--images", str(image_dir)]) == 0
    summary = json.loads(capsys.readouterr().out)
    assert summary["people"] == 18 and summary["project"] == redact(url)
    for place, name in ((str(proj), "folder.json"), (url, "hosted.json")):
        assert main(["export", place, "--out", str(tmp_path / name), "--states", "all"]) == 0
    assert (tmp_path / "folder.json").read_bytes() == (tmp_path / "hosted.json").read_bytes()
    capsys.readouterr()
    assert main(["host", str(proj), url]) == 2  # not empty any more: one line, status 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "not empty" in err and "Traceback" not in err
