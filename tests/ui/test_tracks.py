"""Stepping along a track and carrying a correction from the window's keys (pytest-qt,
offscreen). Data: the synthetic project of tests/ui/conftest.py (invented for these tests),
whose three people stand in the same places in every frame."""

from __future__ import annotations

from PySide6.QtCore import Qt

from app.jobs_tracks import link_project
from app.model import SwapSides
from tests.ui.conftest import WAIT_MS, person_id


def test_alt_arrows_step_along_the_selected_track_and_ctrl_shift_c_carries(qtbot, window):
    project = window.project
    link_project(project)
    window.show_frame(1)
    pid = person_id(window, 2)
    track = next(p.track for p in window.canvas.people if p.id == pid)
    window.canvas.select_person(pid)
    qtbot.keyClick(window.canvas, Qt.Key.Key_Right, Qt.KeyboardModifier.AltModifier)
    qtbot.waitUntil(lambda: window.frame_id == 2, timeout=WAIT_MS)
    chosen = window.canvas.selected_person
    assert chosen != pid and next(p.track for p in window.canvas.people
                                  if p.id == chosen) == track
    assert f"track {track}: frame 2 of 4" in window.status_log
    # A side swap here shows the same way in every other frame (the people stand still):
    # carrying it is one more action over the three other frames.
    window.apply(SwapSides(2, chosen))
    qtbot.keyClick(window.canvas, Qt.Key.Key_C, Qt.KeyboardModifier.ControlModifier
                   | Qt.KeyboardModifier.ShiftModifier)
    qtbot.waitUntil(lambda: "carried the correction of frame 2 to 3 frames" in
                    window.status_log, timeout=WAIT_MS)
    swapped = [p for f in (1, 3, 4) for p in project.people(f) if p.track == track]
    assert all(p.sources[5] == "ana" for p in swapped)
    project.undo()
    assert all(p.sources[5] == "auto" for f in (1, 3, 4) for p in project.people(f)
               if p.track == track)
    # Another person swapped too: Ctrl+Alt+C carries both of the frame's corrections, one
    # action over the three other frames.
    other = next(p for p in window.canvas.people if p.id != chosen)
    window.apply(SwapSides(2, other.id))
    qtbot.keyClick(window.canvas, Qt.Key.Key_C, Qt.KeyboardModifier.ControlModifier
                   | Qt.KeyboardModifier.AltModifier)
    qtbot.waitUntil(lambda: "carried the corrections of frame 2 to 3 frames" in
                    window.status_log, timeout=WAIT_MS)
    assert all(p.sources[5] == "ana" for f in (1, 3, 4) for p in project.people(f)
               if p.track in (track, other.track))
