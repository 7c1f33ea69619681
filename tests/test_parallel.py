"""Batch jobs on several worker processes give what one process gives.

``import-maps``, ``triage`` (with its findings) and ``targets`` run on the synthetic maps of
tests/cli/test_analysis_commands.py (people drawn with the Cao et al. 2017 target formulas; no
real data), once with one worker and once with two, and must store and write the same
numbers. Pre-labelling is checked the same way in tests/inference/test_prelabel.py. Each pool
costs a second or so to start, so the jobs share one test. Jobs this small would run in the
calling process (a pool would not pay), so the tests that check the pool tell ``ordered_map``
that a pool costs nothing to start.
"""

from __future__ import annotations

import importlib
import json
import os
import subprocess
import sys
import threading

import numpy as np
import pytest

from app.cli import main
from app.errors import BadInput, Cancelled
from app.model import MoveJoint
from app.parallel import check_workers, ordered_map
from app.progress import Progress
from app.store import Project
from tests.cli.test_analysis_commands import SK, maps_dir  # noqa: F401  (a fixture)


def _cube(n: int) -> int:
    if n == 7:
        raise BadInput("seven is refused", where="item 7", hint="give another number")
    return n**3


def _pid(_item) -> int:
    return os.getpid()


def _snapshot(proj):
    """Every person, triage score, reason and finding the project holds, in a fixed order."""
    with Project.open(proj) as p:
        frames = p.frames()
        people = {f.id: [(q.id, q.keypoints.tolist(), q.scores.tolist()) for q in p.people(f.id)]
                  for f in frames}
        triage = {f.id: f.suspicion for f in frames}
        findings = p.findings()
    return people, triage, findings


def test_two_workers_store_and_write_what_one_does(tmp_path, image_dir, maps_dir, capsys,  # noqa: F811
                                                   free_pool, monkeypatch):
    """... and each command tells app.parallel the job's size and function before it starts
    the job (head_start), by a name that is the function the job hands to its workers."""
    from app import cli, map_runs, parallel

    folder, _ = maps_dir
    # The six frames are one sequence: with --frame-before, runs of two frames (each grouped
    # with the frame before but the first) make three items for the workers.
    monkeypatch.setattr(map_runs, "GROUPING_RUN", 2)
    told = []
    monkeypatch.setattr(cli, "head_start",
                        lambda job, items, workers: told.append((job, items, workers))
                        or parallel.head_start(job, items, workers))
    outputs = []
    for workers in ("1", "2"):
        proj = tmp_path / f"p{workers}"
        assert main(["new", str(proj), "--images", str(image_dir), "-q"]) == 0
        assert main(["import-maps", str(proj), str(folder), "-q", "--workers", workers,
                     "--frame-before"]) == 0
        with Project.open(proj, author="ana") as p:
            f = p.frames()[1]
            q = p.people(f.id)[0]
            x, y = q.keypoints[SK.index("left_ankle"), :2]
            p.apply(MoveJoint(f.id, q.id, SK.index("left_ankle"), x + 150.0, y))
        capsys.readouterr()
        assert main(["triage", str(proj), "-q", "--json", "--workers", workers]) == 0
        ranked = json.loads(capsys.readouterr().out)
        out = tmp_path / f"targets{workers}"
        assert main(["targets", str(proj), str(out), "--states", "all", "-q",
                     "--workers", workers]) == 0
        manifest = json.loads((out / "manifest.json").read_text())
        arrays = {}
        for entry in manifest["frames"]:
            with np.load(out / entry["targets"], allow_pickle=False) as npz:
                arrays[entry["id"]] = {k: npz[k] for k in npz.files}
        for volatile in ("created", "project_id"):
            manifest.pop(volatile)
        outputs.append((_snapshot(proj), ranked, manifest, arrays))
    frames = len(list(image_dir.iterdir()))
    for job, items, workers in told:
        module, _, name = job.rpartition(".")
        assert module in parallel.PRELOAD and callable(getattr(importlib.import_module(module),
                                                               name))
        assert items == frames and workers in (1, 2)
    assert sorted({job.rpartition(".")[2] for job, _, _ in told}) == [
        "_triage_one", "_write_targets", "group_runs"]
    (people1, triage1, findings1), ranked1, manifest1, arrays1 = outputs[0]
    (people2, triage2, findings2), ranked2, manifest2, arrays2 = outputs[1]
    assert sum(len(v) for v in people1.values()) >= 12
    assert ranked1[0]["reasons"]  # the stretched ankle gives triage something to say
    assert people1 == people2 and triage1 == triage2 and findings1 == findings2
    assert ranked1 == ranked2
    assert manifest1 == manifest2
    assert arrays1.keys() == arrays2.keys()
    for fid, got in arrays2.items():
        for key, value in got.items():
            np.testing.assert_array_equal(value, arrays1[fid][key])


def test_results_come_in_order_and_errors_keep_their_place(free_pool):
    """Order of the items whatever the finishing order; an error of a worker is raised again
    here with its message intact, after every earlier result."""
    got = list(ordered_map(_cube, range(7), workers=2))
    assert got == [n**3 for n in range(7)]
    taken = []
    with pytest.raises(BadInput) as raised:
        for value in ordered_map(_cube, range(12), workers=2, total=12):
            taken.append(value)
    assert taken == [n**3 for n in range(7)]
    assert str(raised.value) == "item 7: seven is refused (give another number)"
    assert raised.value.where == "item 7"


def test_cancel_stops_the_workers(free_pool):
    """A cancel request set while results come in raises Cancelled at the next result."""
    stop = threading.Event()
    seen = []

    def tell(done, total, label):
        seen.append(done)
        if done == 3:
            stop.set()

    with pytest.raises(Cancelled):
        list(ordered_map(_cube, range(100), workers=2, progress=Progress(tell, stop),
                         label="cubes"))
    assert seen[:4] == [0, 1, 2, 3] and max(seen) == 3


def test_a_short_job_stays_in_this_process():
    """Forty instant items save less on two workers than a pool costs to start: all run
    here (common practice: do not pay a pool's start-up for a job shorter than it)."""
    assert set(ordered_map(_pid, range(40), workers=2)) == {os.getpid()}


def test_a_long_job_moves_to_the_workers_after_the_first_items(free_pool, monkeypatch):
    """When a pool pays, the first items (timed here) run in this process and the rest are
    shared between it and the pool's one process (two workers: this one and one more), the
    pool's first four before any run here, still in order. (Instant items: this process
    would take back or over at the end those the pool has not started, which other tests
    check, so here it does not.)"""
    from app import parallel

    monkeypatch.setattr(parallel, "_take_back", lambda pending, fn: False)
    monkeypatch.setattr(parallel, "_take_over", lambda pending, fn, processes: False)
    shared = []
    pids = list(ordered_map(_pid, range(20), workers=2, sharing=lambda: shared.append(1)))
    assert pids[:2] == [os.getpid()] * 2
    assert os.getpid() not in pids[2:6]
    assert len(set(pids)) == 2
    assert shared == [1]  # told once, when the pool was asked for
    assert list(ordered_map(abs, range(20), workers=1, sharing=lambda: shared.append(2))) \
        == list(range(20))
    assert shared == [1]  # no pool, nothing shared


def test_sharing_is_called_before_the_pool_starts(free_pool, monkeypatch):
    """``sharing`` runs when this process asks for its pool, before the pool's start (the
    fork server's imports, the workers' set-up) needs the cores: pre-labelling drops
    OpenCV's second thread then, not once the pool is up."""
    from app import parallel

    order = []
    real = parallel._Pool

    def pool(*args, **kwargs):
        order.append("pool")
        return real(*args, **kwargs)

    monkeypatch.setattr(parallel, "_Pool", pool)
    assert list(ordered_map(abs, range(-10, 10), workers=2,
                            sharing=lambda: order.append("sharing"))) == list(range(10, 0, -1)) \
        + list(range(10))
    assert order == ["sharing", "pool"]


def test_worker_counts_are_checked(monkeypatch):
    monkeypatch.setenv("POSEWRIGHT_WORKERS", "3")
    assert check_workers(None) == 3
    monkeypatch.setenv("POSEWRIGHT_WORKERS", "many")
    with pytest.raises(BadInput, match="POSEWRIGHT_WORKERS"):
        check_workers(None)
    monkeypatch.delenv("POSEWRIGHT_WORKERS")
    assert check_workers(None) >= 1


def test_the_fork_server_preloads_every_batch_jobs_module():
    """Each function the batch jobs hand to the workers lives in a module the fork server
    imports before forking them, so no worker imports the app again."""
    from app.inference.prelabel import _prelabel_one
    from app.jobs_analysis import _triage_one, _write_targets
    from app.map_runs import group_runs
    from app.parallel import ONLY_FOR, PRELOAD, PRELOAD_FOR

    for fn in (group_runs, _triage_one, _write_targets, _prelabel_one):
        assert fn.__module__ in PRELOAD
    for modules in (*PRELOAD_FOR.values(), *ONLY_FOR.values()):  # each name imports
        for name in modules:
            importlib.import_module(name)
    for job, modules in ONLY_FOR.items():  # a command's server alone has the job's module
        assert job.rpartition(".")[0] in modules


def test_a_cancel_while_the_pool_starts_stops_at_once(monkeypatch):
    """A cancel request that comes while the pool is still starting (or just up: either way)
    raises Cancelled at the next item; the pool's own thread stops it once it is up."""
    from app import parallel

    monkeypatch.setattr(parallel, "POOL_START_SECONDS", 0.0)
    monkeypatch.setattr(parallel, "_WARM_START_SECONDS", 0.0)
    monkeypatch.setattr(parallel, "_PROBE_SECONDS", 0.0)
    stop = threading.Event()
    seen = []

    def tell(done, total, label):
        seen.append(done)
        if done == 3:
            stop.set()

    with pytest.raises(Cancelled):
        list(ordered_map(_cube, range(100), workers=2, progress=Progress(tell, stop)))
    assert seen[:4] == [0, 1, 2, 3] and max(seen) == 3


def test_a_pool_that_cannot_start_leaves_the_work_here(free_pool, monkeypatch, caplog):
    """When the worker processes cannot be started, this process does every item, in order,
    and says so in the log."""
    from app import parallel

    def refuse(fn=None):
        raise OSError("no processes to be had")

    monkeypatch.setattr(parallel, "_context", refuse)
    assert list(ordered_map(_pid, range(10), workers=2)) == [os.getpid()] * 10
    assert "did not start" in caplog.text


def test_items_the_pool_has_not_started_are_taken_back_in_their_place():
    """Once no item is left to hand out, this process computes the last queued item that
    the pool has not started (its future cancelled there first, as concurrent.futures
    allows only before a call starts), in the same place of the order; a running one stays;
    an error is kept for its turn."""
    from collections import deque
    from concurrent.futures import Future

    from app.parallel import _take_back

    running, queued, later = Future(), Future(), Future()
    assert running.set_running_or_notify_cancel()  # what the pool does when a call starts
    done_here = Future()
    done_here.set_result(1)
    pending = deque([(running, True, 2), (done_here, False, 1), (queued, True, 3),
                     (later, True, 4)])
    assert _take_back(pending, _cube)
    assert later.cancelled() and not queued.cancelled()
    assert [remote for _, remote, _ in pending] == [True, False, True, False]
    assert pending[3][0].result() == 64
    assert _take_back(pending, _cube) and queued.cancelled()
    assert pending[2][0].result() == 27
    assert not _take_back(pending, _cube)  # only the running one is on the pool
    seven = deque([(Future(), True, 7)])
    assert _take_back(seven, _cube)
    with pytest.raises(BadInput, match="seven is refused"):  # raised at its turn
        seven[0][0].result()


def test_a_command_starts_the_fork_server_as_soon_as_it_knows_the_jobs_size(monkeypatch):
    """head_start, by the same rule as ordered_map: enough items on more than one worker
    start the fork server at once (with the job's function's modules preloaded), once."""
    from multiprocessing import forkserver

    from app import parallel

    asked = []
    monkeypatch.setattr(parallel, "_server_since", None)
    monkeypatch.setattr(forkserver, "ensure_running",
                        lambda: asked.append(set(forkserver._forkserver._preload_modules)))
    many = int(2 * parallel.POOL_START_SECONDS / parallel._LEAST_ITEM_SECONDS) + 1
    job = "app.jobs_analysis._triage_one"
    assert not parallel.head_start(job, many - 1, 2) and not parallel.head_start(job, many, 1)
    assert asked == []
    assert parallel.head_start(job, many, 2) and len(asked) == 1
    assert {*parallel.PRELOAD, *parallel.PRELOAD_FOR[job]} <= asked[0]
    parallel.head_start(job, many, 2)
    assert len(asked) == 1  # once per process
    # A command that runs only import-maps: its server imports that job's module alone.
    monkeypatch.setattr(parallel, "_server_since", None)
    assert parallel.head_start("app.map_runs.group_runs", many, 2) and len(asked) == 2
    assert asked[1] == set(parallel.ONLY_FOR["app.map_runs.group_runs"])


def test_import_maps_workers_import_neither_the_model_nor_opencv():
    """What import-maps' workers import (app.map_runs, the server's only preload for that
    command) holds no pydantic, model, store or OpenCV, and the command's own job module
    (app.jobs_analysis, with app.jobs) no OpenCV or Pillow: both start sooner (app/parallel.py
    ONLY_FOR, app/jobs.py)."""
    code = ("import sys; import app.map_runs; "
            "print(sorted({m.split('.')[0] for m in sys.modules} & {'pydantic', 'cv2', 'PIL'}),"
            " sorted(m for m in sys.modules if m.startswith(('app.model', 'app.store')))); "
            "import app.jobs_analysis; "
            "print(sorted({m.split('.')[0] for m in sys.modules} & {'cv2', 'PIL'}))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True)
    assert out.stdout.split() == ["[]", "[]", "[]"]


def test_so_many_items_start_the_fork_server_before_any_is_timed(monkeypatch):
    """Enough items to repay a pool even at the least an item takes: the fork server is
    asked for at once (its imports run while the first items are timed); fewer: not until
    the timing says a pool pays (here never: the items are instant)."""
    from multiprocessing import forkserver

    from app import parallel

    asked = []
    monkeypatch.setattr(parallel, "_server_since", None)
    monkeypatch.setattr(forkserver, "ensure_running", lambda: asked.append(1))
    many = int(2 * parallel.POOL_START_SECONDS / parallel._LEAST_ITEM_SECONDS) + 1
    assert list(ordered_map(abs, range(many - 1), workers=2)) == list(range(many - 1))
    assert asked == []
    assert list(ordered_map(abs, range(many), workers=1)) == list(range(many))
    assert asked == []
    assert list(ordered_map(abs, range(many), workers=2)) == list(range(many))
    assert asked == [1] and parallel._server_since is not None
    list(ordered_map(abs, range(many), workers=2))
    assert asked == [1]  # once per process


def test_a_job_that_pays_at_any_pace_shares_its_items_after_two(monkeypatch):
    """Items enough to repay a pool even at the least an item takes are shared out after two
    have run here, however long the timing would otherwise last; fewer items wait for the
    timing (here never over, so they all run here). The pool itself is not started: the
    test records where the items would be shared."""
    from app import parallel

    switched = []

    def alongside(fn, upcoming, done, total, *rest, **named):
        switched.append(done)
        yield from map(fn, upcoming)

    monkeypatch.setattr(parallel, "_alongside", alongside)
    monkeypatch.setattr(parallel, "_start_server", lambda fn: None)
    # A first pool's start, fixed: not read from _server_since, which a pool thread of an
    # earlier test in this process may still set while this one runs.
    cost = parallel.POOL_START_SECONDS
    monkeypatch.setattr(parallel, "_start_cost", lambda: cost)
    monkeypatch.setattr(parallel, "_PROBE_SECONDS", 3600.0)
    many = int(2 * cost / parallel._LEAST_ITEM_SECONDS) + 1
    assert list(ordered_map(abs, range(many), workers=2)) == list(range(many))
    assert switched == [2]
    assert list(ordered_map(abs, range(many - 1), workers=2)) == list(range(many - 1))
    assert switched == [2]


def test_a_batch_process_keeps_the_memory_it_frees():
    """glibc accepts the thresholds keep_freed_memory asks for (its mallopt answers 1 when a
    value is within the documented range: the mmap threshold at most 32 MB on 64-bit
    systems); another C library is left alone and answers False."""
    import platform

    from app.parallel import keep_freed_memory

    if platform.libc_ver()[0] != "glibc":
        assert keep_freed_memory() in (True, False)
        return
    assert keep_freed_memory() is True


def test_items_handed_to_a_pool_before_the_job_are_taken_if_equal(free_pool, monkeypatch):
    """early_pool: the job takes the pool's results for its first items that are equal to
    those handed early, in order, and computes the first that differs and the rest itself or
    on the pool as usual; a job of another function drops the early pool. The results are
    what one process gives."""
    from app import parallel

    taken = []
    take = parallel._take_early
    monkeypatch.setattr(parallel, "_take_early", lambda *a: taken.append(take(*a)) or taken[-1])
    assert parallel.early_pool(_cube, [1, 2, 5, 4], 2)
    assert list(ordered_map(_cube, [1, 2, 3, 4, 6], workers=2)) == [1, 8, 27, 64, 216]
    assert parallel._early is None
    assert [item for _, _, item in taken[0][1]] == [1, 2]  # taken up to the first that differs
    assert parallel.early_pool(_pid, [0, 1], 2)
    assert list(ordered_map(_cube, [1, 2, 3], workers=2)) == [1, 8, 27]
    assert parallel._early is None
    assert not parallel.early_pool(_cube, [1, 2], 1)  # one worker: no pool
    assert parallel.early_pool(_cube, [1, 2], 2)
    parallel.drop_early()
    assert parallel._early is None


@pytest.mark.parametrize("grouping", ["--each-frame-alone", "--frame-before"])
def test_import_maps_with_frames_handed_early_stores_what_one_worker_does(
        tmp_path, image_dir, maps_dir, free_pool, monkeypatch, grouping):  # noqa: F811
    """The command hands its pool the first items (read with sqlite3 alone, before it opens
    the project) and the job takes those results: the people stored are those of one worker.
    Grouped each frame alone, an item is a frame; grouped with the frame before (the default),
    a run of consecutive frames of the sequence, here runs of two (runs are independent of
    each other). (Our own rule; the synthetic frames of tests/cli/test_analysis_commands.py.)"""
    from app import cli, map_runs, parallel

    folder, _ = maps_dir
    monkeypatch.setattr(cli, "head_start", lambda job, items, workers: workers > 1)
    monkeypatch.setattr(map_runs, "FIRST_ITEMS", 3)
    monkeypatch.setattr(map_runs, "GROUPING_RUN", 2)
    taken = []
    take = parallel._take_early
    monkeypatch.setattr(parallel, "_take_early", lambda *a: taken.append(take(*a)) or taken[-1])
    snapshots = []
    for workers in ("1", "2"):
        proj = tmp_path / f"p{workers}"
        assert main(["new", str(proj), "--images", str(image_dir), "-q"]) == 0
        assert main(["import-maps", str(proj), str(folder), "-q", "--workers", workers,
                     grouping]) == 0
        snapshots.append(_snapshot(proj)[0])
    assert len(taken) == 1 and len(taken[0][1]) == 3  # the three early items were taken
    frames = [[f for run in item[2] for f, *_ in run] for _, _, item in taken[0][1]]
    assert [len(f) for f in frames] == ([1, 1, 1] if grouping == "--each-frame-alone"
                                        else [2, 2, 2])
    assert sum(len(v) for v in snapshots[0].values()) >= 12
    assert snapshots[0] == snapshots[1]


def test_the_first_runs_told_before_the_project_opens_are_the_jobs(
        tmp_path, image_dir, maps_dir, monkeypatch):  # noqa: F811
    """Grouped with the frame before, the items told from the hint
    (app.store.peek.map_frames_hint) are the job's first items, in the sequence's order
    (natural file-name order, app/model/sequences.py), and stop before the first item that
    holds a frame with people (its people are the next frame's frame before, not in the
    hint); a folder marked not a sequence makes each frame a run of its own. (Our own rule;
    the synthetic frames of tests/cli/test_analysis_commands.py.)"""
    from app import jobs_analysis, map_runs
    from app.jobs_analysis import import_maps
    from app.model.labels import AUTO, Person
    from app.model.sequences import NOT_SEQUENCES
    from app.store.peek import map_frames_hint

    folder, _ = maps_dir
    monkeypatch.setattr(map_runs, "GROUPING_RUN", 2)
    handed = []
    monkeypatch.setattr(jobs_analysis, "ordered_map",
                        lambda fn, items, *a, **k: handed.append(list(items)) or map(fn, items))
    proj = tmp_path / "p"
    assert main(["new", str(proj), "--images", str(image_dir), "-q"]) == 0
    told = map_runs.first_items(*map_frames_hint(proj), folder, frame_before=True)
    with Project.open(proj, author="ana") as p:
        import_maps(p, folder, frame_before=True)
        assert told == handed[0] and len(told) == 3
    proj = tmp_path / "q"
    assert main(["new", str(proj), "--images", str(image_dir), "-q"]) == 0
    with Project.open(proj, author="ana") as p:
        frames = [f.id for f in p.frames()]
        k = p.skeleton.num_joints
        with p.bulk("Test", "a person", "test") as b:
            b.add_people([(frames[3], Person(b.allocate_person_ids(1), np.zeros((k, 3)),
                                             np.full(k, np.nan), (AUTO,) * k, 0.5))])
    told = map_runs.first_items(*map_frames_hint(proj), folder, frame_before=True)
    assert [[f for run in item[2] for f, *_ in run] for item in told] == [
        [str(folder / n) for n in sorted(os.listdir(folder))[:2]]]
    with Project.open(proj, author="ana") as p:
        p.set_meta(NOT_SEQUENCES, '[""]')
    told = map_runs.first_items(*map_frames_hint(proj), folder, frame_before=True)
    assert [[len(run) for run in item[2]] for item in told] == [[1], [1], [1]]  # runs of one


def test_at_the_end_this_process_takes_over_the_items_the_pool_has_not_started(
        free_pool, monkeypatch):
    """Once no item is left, this process computes the last item the pool holds while the
    pool holds more unfinished items than it has processes (that one has not started: the
    pool runs them in order), keeping its place in the order; never one the pool may be
    running, and only for a function that writes nothing (``reads_only``), since the pool's
    copy still runs. (Our own rule; futures of concurrent.futures stand in for the pool's.)"""
    from collections import deque
    from concurrent.futures import Future

    from app import parallel

    finished: Future = Future()
    finished.set_result(-1)
    pending = deque([(Future(), True, 2), (finished, True, 3), (Future(), False, 4),
                     (Future(), True, 5)])
    assert parallel._take_over(pending, _cube, processes=1)
    assert [(remote, item) for _, remote, item in pending] == [
        (True, 2), (True, 3), (False, 4), (False, 5)]
    assert pending[3][0].result() == 125
    assert not parallel._take_over(pending, _cube, processes=1)  # item 2 may be running
    assert not parallel._take_over(deque([(Future(), True, 2), (Future(), True, 3)]), _cube,
                                   processes=2)
    asked = []
    monkeypatch.setattr(parallel, "_take_over", lambda *a: asked.append(a) and False)
    assert list(ordered_map(_cube, range(7), workers=2)) == [n**3 for n in range(7)]
    assert not asked  # a job's function may write files: never computed twice
