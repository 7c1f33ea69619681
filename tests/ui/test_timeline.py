"""The timeline under the Canvas (pytest-qt, offscreen): it shows the selected person's track,
a click on a cell goes there, a correction's carried batch is marked on it and in the
Worklist. Data: the synthetic project of tests/ui/conftest.py (invented for these tests),
whose three people stand in the same places in its four frames."""

from __future__ import annotations

from PySide6.QtCore import QPoint, Qt

from app.jobs_tracks import link_project
from app.model import SwapSides
from app.ui.models import MarkRole
from tests.ui.conftest import WAIT_MS, person_id


def _track(window, pid):
    return next(p.track for p in window.canvas.people if p.id == pid)


def _linked(window):
    link_project(window.project)
    window.show_frame(1)
    pid = person_id(window, 2)
    window.canvas.select_person(pid)
    return pid


def test_the_timeline_follows_the_selected_person_and_a_click_goes_to_a_frame(qtbot, window):
    strip = window.track_timeline
    assert strip.strip is None and "select a person" in strip.hint
    pid = _linked(window)
    track = _track(window, pid)
    qtbot.waitUntil(lambda: strip.strip is not None, timeout=WAIT_MS)
    assert strip.strip.track == track and [c.frame_id for c in strip.strip.cells] == [1, 2, 3, 4]
    assert strip.strip.current.frame_id == 1 and all(c.present for c in strip.strip.cells)
    qtbot.mouseClick(strip, Qt.MouseButton.LeftButton,
                     pos=strip.cell_rect(2).center().toPoint())
    qtbot.waitUntil(lambda: window.frame_id == 3, timeout=WAIT_MS)
    chosen = window.canvas.selected_person
    assert chosen is not None and _track(window, chosen) == track
    assert strip.strip.current.frame_id == 3
    # Alt+Left steps back along the track; the timeline moves with it.
    qtbot.keyClick(window.canvas, Qt.Key.Key_Left, Qt.KeyboardModifier.AltModifier)
    qtbot.waitUntil(lambda: window.frame_id == 2, timeout=WAIT_MS)
    assert strip.strip.current.frame_id == 2
    window.canvas.clear_selection()
    # With no one selected the track last shown stays (a frame where it has no one).
    assert strip.strip is not None and strip.strip.track == track
    # A click left of the cells (the caption) chooses nothing.
    qtbot.mouseClick(strip, Qt.MouseButton.LeftButton, pos=QPoint(20, 10))
    assert window.frame_id == 2


def test_a_correction_marks_its_carried_batch_on_the_timeline_and_the_worklist(qtbot, window):
    pid = _linked(window)
    window.show_frame(2)
    chosen = next(p.id for p in window.canvas.people
                  if p.track == _track_of(window.project, 1, pid))
    window.canvas.select_person(chosen)
    window.apply(SwapSides(2, chosen))
    # The proposal's thread starts only once the event loop turns again, after the repaint
    # that shows the edit (a thread running Python beside the UI thread would slow it).
    assert window._jobs and not any(j.isRunning() or j.isFinished() for j in window._jobs)
    strip = window.track_timeline
    qtbot.waitUntil(lambda: strip.strip is not None and any(c.batch for c in strip.strip.cells),
                    timeout=WAIT_MS)
    roles = {c.frame_id: c.batch for c in strip.strip.cells}
    assert roles == {1: "last", 2: "origin", 3: "carried", 4: "last"} and not strip.strip.taken
    assert "can carry (Ctrl+Shift+C) the correction of frame 2 to 3 frames" in \
        window.status_log
    model = window.worklist_model
    marked = {model.data(model.index(model.row_of(f), 0), MarkRole) for f in (1, 4)}
    assert marked == {"last"}
    assert "carry ends" in model.data(model.index(model.row_of(4), 0))
    assert "the carried correction ends on this frame" in \
        model.data(model.index(model.row_of(4), 0), Qt.ItemDataRole.ToolTipRole)
    assert model.data(model.index(model.row_of(3), 0), MarkRole) is None
    qtbot.keyClick(window.canvas, Qt.Key.Key_C, Qt.KeyboardModifier.ControlModifier
                   | Qt.KeyboardModifier.ShiftModifier)
    qtbot.waitUntil(lambda: strip.strip is not None and strip.strip.taken, timeout=WAIT_MS)
    assert [c.frame_id for c in strip.strip.cells if c.corrected] == [1, 2, 3, 4]
    # Undo is a change of the labels: the marks go.
    window.undo()
    qtbot.waitUntil(lambda: not any(c.batch for c in strip.strip.cells), timeout=WAIT_MS)
    assert model.data(model.index(model.row_of(4), 0), MarkRole) is None


def _track_of(project, frame_id, pid):
    return next(p.track for p in project.people(frame_id) if p.id == pid)
