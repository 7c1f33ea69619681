"""Worklist: frames by suspicion, next/previous frame keys, filters, frame states.

Data: the synthetic project of tests/ui/conftest.py (invented for these tests), whose triage
scores are 0.2, 0.9, 0.5 for frames 1-3 and none for frame 4; the expected order is by score,
highest first, unscored last (our own rule).
"""

from __future__ import annotations

import numpy as np
from PySide6.QtCore import Qt

from app.model.labels import FrameState
from tests.ui.conftest import WAIT_MS, person_id, screen_point


def test_frames_are_ordered_by_suspicion(window):
    assert window.worklist.ordered_ids() == [2, 3, 1, 4]
    assert window.frame_id == 2, "the window opens on the most suspicious frame"
    model = window.worklist_model
    assert [model.index(r, 1).data() for r in range(4)] == ["0.90", "0.50", "0.20", ""]


def test_next_and_previous_suspicious_frame_by_keys(qtbot, window):
    seen = [window.frame_id]
    for _ in range(3):
        qtbot.keyClick(window.canvas, Qt.Key.Key_Space)
        seen.append(window.frame_id)
    assert seen == [2, 3, 1, 4]
    qtbot.keyClick(window.canvas, Qt.Key.Key_Space)
    assert window.frame_id == 4, "past the end it stays on the last frame"
    qtbot.keyClick(window.canvas, Qt.Key.Key_PageUp)
    assert window.frame_id == 1
    qtbot.keyClick(window.canvas, Qt.Key.Key_Space, Qt.KeyboardModifier.ShiftModifier)
    assert window.frame_id == 3
    assert window.status_frame.text().startswith("frame 2 of 4")


def test_clicking_a_row_shows_the_frame(qtbot, window):
    view = window.worklist.view
    rect = view.visualRect(view.model().index(2, 0))
    qtbot.mouseClick(view.viewport(), Qt.MouseButton.LeftButton, pos=rect.center())
    assert window.frame_id == 1
    assert window.canvas.frame.id == 1


def test_editing_marks_the_frame_corrected_and_the_row_shows_it(qtbot, window, ui_project):
    pid = person_id(window, 2)
    qtbot.mouseClick(window.canvas, Qt.MouseButton.LeftButton, pos=screen_point(window, pid, 0))
    qtbot.keyClick(window.canvas, Qt.Key.Key_O)
    assert ui_project.frame(2).state is FrameState.CORRECTED
    assert window.worklist_model.index(0, 2).data() == "corrected"
    assert window.worklist_model.index(0, 0).data().splitlines()[1] == \
        "stretched limb \u00b7 crowded", "the second line says why the frame is suspicious"


def test_disputed_and_signed_off_are_set_by_hand(qtbot, window, ui_project):
    qtbot.keyClick(window.canvas, Qt.Key.Key_D)
    assert ui_project.frame(2).state is FrameState.UNTOUCHED, "D alone (a habit) does nothing"
    qtbot.keyClick(window.canvas, Qt.Key.Key_D, Qt.KeyboardModifier.ControlModifier)
    assert ui_project.frame(2).state is FrameState.DISPUTED
    assert window.worklist_model.index(0, 2).data() == "disputed"
    qtbot.keyClick(window.canvas, Qt.Key.Key_Return, Qt.KeyboardModifier.ControlModifier)
    assert ui_project.frame(2).state is FrameState.SIGNED_OFF
    qtbot.keyClick(window.canvas, Qt.Key.Key_Return, Qt.KeyboardModifier.ControlModifier)
    assert ui_project.frame(2).state is FrameState.CORRECTED


def test_filter_by_state_and_by_reason(qtbot, window, ui_project):
    qtbot.keyClick(window.canvas, Qt.Key.Key_D, Qt.KeyboardModifier.ControlModifier)  # disputed
    panel = window.worklist
    panel.state_filter.setCurrentIndex(panel.state_filter.findData("disputed"))
    assert panel.ordered_ids() == [2]
    panel.state_filter.setCurrentIndex(0)
    panel.reason_filter.setCurrentIndex(panel.reason_filter.findData("low-score"))
    assert panel.ordered_ids() == [3]
    assert panel.count.text() == "1 of 4 frames"
    # Next frame walks the filtered list.
    window.show_frame(3)
    qtbot.keyClick(window.canvas, Qt.Key.Key_Space)
    assert window.frame_id == 3


def test_triage_results_arriving_reorder_the_worklist(qtbot, window, ui_project):
    ui_project.store_triage({4: (5.0, [])})
    qtbot.waitUntil(lambda: window.worklist.ordered_ids()[0] == 4, timeout=WAIT_MS)
    assert window.frame_id == 2, "the current frame stays"


def test_counts_of_one_read_in_the_singular(qtbot, tmp_path):
    """A one-frame project: the Worklist says "1 frame", and the status bar counts the frame's
    people and flags, one of them singular once the others are deleted. Synthetic project."""
    from app.model import DeletePerson
    from tests.ui.conftest import make_project, show_window

    project = make_project(tmp_path, frames=1)
    w = show_window(qtbot, project)
    try:
        assert w.worklist.count.text() == "1 frame"
        assert w.status_people.text() == "3 people"
        for person in project.people(1)[::2]:  # the flagged one (the second) stays
            w.apply(DeletePerson(1, person.id))
        qtbot.waitUntil(lambda: w.status_people.text() == "1 person", timeout=5000)
        assert w.status_flags.text() == "flags on 1 person"
    finally:
        w.shutdown()
        project.close()


def test_a_large_worklist_reads_only_the_rows_in_view(qtbot, tmp_path):
    """5,000 synthetic frames (registered without images; every other frame triaged with
    random scores, seed 0): the Worklist reads the page in view, then only the last page when
    the view scrolls to the end, and its rows follow one sort in Python of every frame (most
    suspicious first, then the frames never triaged by id: a plain sort, common practice).
    Filtering asks the store again and reads one page; Ctrl+End walks to the last row."""
    from app.store import NewFrame, Project
    from app.ui.models import KeyRole, WorklistModel
    from app.ui.panels import WorklistPanel

    n = 5000
    project = Project.create(tmp_path / "big", author="ana")
    with project.bulk("Test", "register synthetic frames", "test") as b:
        b.frames.insert([NewFrame(f"images/f{i}.jpg", f"f{i}.jpg", 64, 48) for i in range(n)],
                        first_id=1)
    rng = np.random.default_rng(0)
    scores = {fid: float(rng.random()) for fid in range(1, n + 1, 2)}
    project.store_triage({fid: (s, [{"kind": "weak-limb" if fid % 3 == 0 else "crowded",
                                     "person": None}]) for fid, s in scores.items()})
    want = sorted(range(1, n + 1), key=lambda f: (f not in scores, -scores.get(f, 0.0), f))
    model = WorklistModel(project)
    panel = WorklistPanel(model)
    qtbot.addWidget(panel)
    chosen: list[int] = []
    panel.frameChosen.connect(chosen.append)
    try:
        panel.resize(360, 500)
        panel.show()
        qtbot.waitExposed(panel)
        panel.view.viewport().grab()  # paints the rows in view, now
        assert model.rowCount() == n and panel.count.text() == "5000 frames"
        assert model.fetched == [(0, model.PAGE)], "only the first page was read"
        assert [model.index(r, 0).data(KeyRole) for r in range(5)] == want[:5]

        panel.view.scrollToBottom()
        panel.view.viewport().grab()
        assert [first for first, _ in model.fetched] == [0, n - model.PAGE]
        assert model.index(n - 1, 0).data(KeyRole) == want[-1] == n
        assert model.index(n - 1, 1).data() == "", "never triaged: no score"

        panel.view.setFocus()
        ctrl = Qt.KeyboardModifier.ControlModifier
        qtbot.keyClick(panel.view, Qt.Key.Key_Home, ctrl)
        assert chosen[-1] == want[0]
        qtbot.keyClick(panel.view, Qt.Key.Key_Down)
        assert chosen[-1] == want[1]
        qtbot.keyClick(panel.view, Qt.Key.Key_End, ctrl)
        assert chosen[-1] == n, "Ctrl+End reaches the last frame"
        assert panel.neighbour(want[0], 1) == want[1]
        assert panel.neighbour(n, -1) == want[-2]

        panel.reason_filter.setCurrentIndex(panel.reason_filter.findData("weak-limb"))
        weak = [f for f in want if f in scores and f % 3 == 0]
        panel.view.viewport().grab()
        assert model.rowCount() == len(weak)
        assert panel.count.text() == f"{len(weak)} of 5000 frames"
        assert [first for first, _ in model.fetched] == [0]
        assert model.index(0, 0).data(KeyRole) == weak[0]
        assert panel.ordered_ids() == weak
        assert model.row_of(weak[-1]) == len(weak) - 1 and model.row_of(2) is None
    finally:
        project.close()
