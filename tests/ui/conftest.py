"""Fixtures for the desktop app tests: a small synthetic project (invented for these tests) and a
main window over it, offscreen, with the person's settings kept in a temporary folder."""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
from PySide6.QtCore import QPoint, QSettings

from app.jobs import new_project
from app.model.labels import AUTO, Person
from app.store import Project
from tests import synthetic

WIDTH, HEIGHT = 320, 240

# A standing person, 17 COCO joints, in units of stature, feet centre at the origin, y up
# (synthetic, the same shape as tests/synthetic.py's template).
TEMPLATE = np.array([
    [0.00, 0.94], [-0.02, 0.96], [0.02, 0.96], [-0.05, 0.95], [0.05, 0.95],
    [-0.13, 0.82], [0.13, 0.82], [-0.16, 0.63], [0.16, 0.63], [-0.17, 0.48], [0.17, 0.48],
    [-0.08, 0.52], [0.08, 0.52], [-0.09, 0.28], [0.09, 0.28], [-0.09, 0.04], [0.09, 0.04],
])

#: Where the synthetic people stand: feet centre x, y and stature (image pixels). Far enough
#: apart that their joints never come within a click of each other's.
PLACES = [(70.0, 220.0, 150.0), (160.0, 220.0, 150.0), (250.0, 220.0, 150.0)]

#: The longest a UI test waits for work in the background (decoding, jobs, queued signals), in
#: ms. A safety net only: every wait ends as soon as its condition holds, so a loaded machine
#: makes a test slower, never red.
WAIT_MS = 120_000

#: Triage scores of frames 1..4 (None: frame 4 has no triage), so the Worklist order is 2, 3, 1, 4.
SUSPICION = {1: 0.2, 2: 0.9, 3: 0.5}


def person_keypoints(feet_x: float, feet_y: float, stature: float) -> np.ndarray:
    """A synthetic upright person ``(17, 3)``, all joints visible."""
    xy = np.array([feet_x, feet_y]) + TEMPLATE * [stature, -stature]
    return np.column_stack([np.round(xy, 2), np.full(17, 2.0)])


def frame_people() -> list[np.ndarray]:
    """The three people of every frame: person A (tag 1) has its left knee (13) unlabeled and
    its right elbow (8) occluded; B and C are fully visible."""
    people = [person_keypoints(*p) for p in PLACES]
    people[0][13, 2] = 0
    people[0][8, 2] = 1
    return people


@pytest.fixture(autouse=True)
def _own_settings(tmp_path: Path, monkeypatch: pytest.MonkeyPatch):
    """Keep the person's QSettings (author, layout) out of the real home folder."""
    folder = tmp_path / "settings"
    folder.mkdir()
    monkeypatch.setenv("XDG_CONFIG_HOME", str(folder))
    QSettings.setPath(QSettings.Format.IniFormat, QSettings.Scope.UserScope, str(folder))
    yield


def make_project(folder: Path, frames: int = 4, author: str = "ana") -> Project:
    """A project of ``frames`` synthetic 320 x 240 images with three auto-labelled people each
    (written in one bulk import, so every frame starts untouched; the unlabeled knee keeps the
    position the model guessed), and triage scores for frames 1-3."""
    images = folder / "images"
    synthetic.write_images(images, frames, WIDTH, HEIGHT)
    project = new_project(folder / "proj", images=images, author=author)
    with project.bulk("ImportTest", "synthetic people", "test") as b:
        first = b.allocate_person_ids(3 * frames)
        rows = []
        for f in range(frames):
            for k, kp in enumerate(frame_people()):
                person = Person.blank(first + 3 * f + k, 17, AUTO)
                rows.append((f + 1, replace(person, keypoints=kp,
                                            scores=np.full(17, 0.8))))
        b.add_people(rows)
    results = {}
    for fid, score in SUSPICION.items():
        if fid > frames:
            continue
        pid = project.people(fid)[1].id
        results[fid] = (score, [
            {"kind": "stretched-limb", "text": f"left forearm of person {pid} too long",
             "person": pid, "joints": [7, 9], "weight": 0.9},
            {"kind": "crowded", "text": "crowded frame", "person": None, "joints": [],
             "weight": 0.3},
        ] + ([{"kind": "low-score", "text": "unsure model", "person": pid, "joints": [],
               "weight": 0.6}] if fid == 3 else []))
    project.store_triage(results)
    return project


@pytest.fixture
def ui_project(tmp_path: Path):
    project = make_project(tmp_path)
    yield project
    project.close()


class StatusLog:
    """Every message a window's status bar has shown, kept after the bar clears it.

    A message times out after a few seconds, and on a loaded machine a test that waits for
    background work can read the bar after that; the log does not forget.
    ``"text" in log`` asks whether any message so far contained ``text``.
    """

    def __init__(self, window):
        self.lines: list[str] = []
        window.statusBar().messageChanged.connect(self._shown)

    def _shown(self, text: str) -> None:
        if text:
            self.lines.append(text)

    def __contains__(self, fragment: str) -> bool:
        return any(fragment in line for line in self.lines)

    def __repr__(self) -> str:
        return f"StatusLog({self.lines!r})"

    @property
    def last(self) -> str:
        """The latest message (even if the bar has cleared it since)."""
        return self.lines[-1] if self.lines else ""


def wait_for_image(qtbot, window) -> None:
    """Wait until the Canvas has painted the current frame's decoded image."""
    def painted() -> None:
        window.canvas.repaint()
        assert window.canvas.painted_frame == window.frame_id

    qtbot.waitUntil(painted, timeout=WAIT_MS)


def show_window(qtbot, project: Project, **options):
    """A main window over ``project`` (``options`` go to the window), shown and active, its
    image painted; ``window.status_log`` is its :class:`StatusLog`."""
    from app.ui.window import MainWindow

    w = MainWindow(project, **options)
    w.status_log = StatusLog(w)
    qtbot.addWidget(w)
    w.resize(1200, 800)
    w.show()
    qtbot.waitExposed(w)
    w.activateWindow()
    w.canvas.setFocus()
    wait_for_image(qtbot, w)
    return w


@pytest.fixture
def window(qtbot, ui_project: Project):
    """The main window over :func:`ui_project`, shown and active, image painted."""
    w = show_window(qtbot, ui_project)
    yield w
    w.shutdown()


def screen_point(window, person_id: int, joint: int) -> QPoint:
    """Where a joint is on the Canvas, through the Canvas's own image-to-screen mapping."""
    person = next(p for p in window.canvas.people if p.id == person_id)
    pos = window.canvas.image_to_screen(*person.keypoints[joint, :2])
    return pos.toPoint()


def person_id(window, tag: int) -> int:
    """The id of the person whose tag shows ``tag`` in the current frame."""
    return window.canvas.people[tag - 1].id
