"""``posewright open --screenshot`` and ``posewright render``, the author prompt, and long work
off the UI thread (the key table: tests/ui/test_keys.py).

Data: the synthetic project of tests/ui/conftest.py (invented for these tests). Exit status 2
with one line on stderr for bad input is our own command-line convention (README, "Commands").
"""

from __future__ import annotations

import argparse
import threading

import cv2
import pytest

from app.cli import main
from app.errors import Cancelled
from app.ui import commands
from tests.ui.conftest import HEIGHT, WAIT_MS, WIDTH, make_project


@pytest.fixture
def closed_project(tmp_path):
    p = make_project(tmp_path)
    folder = p.folder
    p.close()
    return folder


def test_screenshot_renders_the_window_offscreen(qapp, closed_project, tmp_path):
    out = tmp_path / "window.png"
    assert main(["open", str(closed_project), "--author", "ana", "--screenshot", str(out)]) == 0
    img = cv2.imread(str(out))
    assert img.shape[:2] == (commands.SCREENSHOT_SIZE[1], commands.SCREENSHOT_SIZE[0])
    assert img.std() > 10, "a real picture of the window, not a blank"


def test_render_by_file_name_at_full_resolution(qapp, closed_project, tmp_path, capsys):
    out = tmp_path / "one.png"
    assert main(["render", str(closed_project), "--frame", "frame_0002.jpg",
                 "--out", str(out)]) == 0
    assert cv2.imread(str(out)).shape == (HEIGHT, WIDTH, 3)
    assert "frame 3" in capsys.readouterr().out


def test_render_refuses_an_unknown_person_in_one_line(qapp, closed_project, tmp_path, capsys):
    out = tmp_path / "x.png"
    assert main(["render", str(closed_project), "--frame", "2", "--out", str(out),
                 "--focus", "999999"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "no person 999999" in err[0]
    assert not out.exists(), "nothing written"


def test_render_refuses_a_non_png_output(qapp, closed_project, tmp_path, capsys):
    assert main(["render", str(closed_project), "--frame", "2", "--out",
                 str(tmp_path / "x.jpg")]) == 2
    assert ".png" in capsys.readouterr().err


def test_first_run_asks_the_author_once(qapp, monkeypatch):
    from PySide6.QtWidgets import QInputDialog

    asked = []

    def ask(*_a, **_k):
        asked.append(1)
        return "zoe", True

    monkeypatch.setattr(QInputDialog, "getText", ask)
    args = argparse.Namespace(author=None)
    assert commands._author(args, ask=True) == "zoe"
    assert commands._author(args, ask=True) == "zoe"
    assert asked == [1], "asked once, then remembered"
    assert commands._author(argparse.Namespace(author="kim"), ask=True) == "kim"


def test_a_build_without_a_name_says_whose_name_the_ledger_records(tmp_path, image_dir,
                                                                     monkeypatch, capsys):
    """Headless `make run` builds the demo from its sources with nobody asked for a name: the
    ledger takes the login name, and the command now says so. Synthetic project sources."""
    import json

    import numpy as np

    folder = tmp_path / "sources"
    (folder / "maps").mkdir(parents=True)
    for image in image_dir.iterdir():  # empty network maps: the import is in the ledger
        np.savez(folder / "maps" / f"{image.stem}.npz", stride=np.array(8),
                 confidence_maps=np.zeros((17, 30, 40), np.float32),
                 pafs=np.zeros((19, 2, 30, 40), np.float32))
    (folder / "project-sources.json").write_text(json.dumps(
        {"format": "posewright-project-sources", "version": 1, "images": str(image_dir),
         "maps": "maps"}))
    monkeypatch.delenv("POSEWRIGHT_AUTHOR", raising=False)
    monkeypatch.setenv("LOGNAME", "login-name")
    with commands._open(str(folder), None, quiet=True, with_dialog=False) as project:
        assert {e.author for e in project.history()} == {"login-name"}
    err = capsys.readouterr().err
    assert "ledger as by 'login-name', the login name; give --author NAME" in err
    assert err.count("\n") == 1


def test_long_work_runs_off_the_ui_thread_and_cancels(qtbot, window):
    ui_thread = threading.get_ident()
    ran_on = []
    started, never = threading.Event(), threading.Event()

    def job(progress):
        ran_on.append(threading.get_ident())
        started.set()
        # Runs until cancelled, however long the test takes to get there.
        while not never.wait(0.001):
            progress.step(0, 1, "waiting")
        return "finished"

    window.run_long("Testing", job)
    (running,) = window._jobs
    assert started.wait(WAIT_MS / 1000)
    running.cancel()
    qtbot.waitUntil(lambda: not window._jobs, timeout=WAIT_MS)
    qtbot.waitUntil(lambda: "cancelled" in window.status_log, timeout=WAIT_MS)
    assert ran_on and ran_on[0] != ui_thread


def test_progress_reaches_the_ui_coalesced_with_its_latest_step(qapp):
    """However often a job steps, at most one update waits for the UI thread, and it carries
    the latest step: a job stepping every millisecond must not bury its own end (and a
    cancel's report) under queued updates on a loaded machine. The UI thread here does not
    turn its event loop until the job has ended (``wait``), so nothing depends on timing."""
    from app.ui.work import Job

    def job(progress):
        for i in range(5000):
            progress.step(i, 5000, "frames")
        return "done"

    shown, results = [], []
    running = Job(job)
    running.progressed.connect(lambda d, t, label: shown.append((d, t, label)))
    running.succeeded.connect(results.append)
    running.start()
    assert running.wait(WAIT_MS)
    qapp.processEvents()
    assert shown == [(4999, 5000, "frames")]
    assert results == ["done"]


def test_an_import_in_the_background_reaches_the_worklist(qtbot, window, tmp_path):
    """A job's store notifications arrive on the UI thread (queued) and refresh the views."""
    from app.model.labels import AUTO, Person

    def job(progress):
        with window.project.bulk("ImportTest", "one more person", "test") as b:
            pid = b.allocate_person_ids(1)
            p = Person.blank(pid, 17, AUTO)
            p.keypoints[:, :2] = 30.0
            p.keypoints[:, 2] = 2
            b.add_people([(window.frame_id, p)])
        progress.step(1, 1, "done")
        return pid

    got = []
    window.run_long("Importing", job, got.append)
    qtbot.waitUntil(lambda: bool(got), timeout=WAIT_MS)
    qtbot.waitUntil(lambda: len(window.canvas.people) == 4, timeout=WAIT_MS)
    assert window.owners.people_model.rowCount() == 4


def test_cancelled_is_reported_not_raised(qtbot, window):
    def job(progress):
        raise Cancelled("cancelled during test")

    window.run_long("Testing", job)
    qtbot.waitUntil(lambda: "nothing was changed" in window.status_log,
                    timeout=WAIT_MS)
