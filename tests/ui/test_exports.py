"""Project ▸ Export: the app exports what the command line exports by default (issue item 15:
corrected and signed-off frames, never a frame whose image cannot be read) and says what it
left out. Our own rule; the project is synthetic."""

from __future__ import annotations

import json

from PySide6.QtWidgets import QFileDialog, QMessageBox

from app.model.edits import SetFrameState
from app.model.labels import FrameState
from tests.ui.conftest import WAIT_MS


def test_export_labels_writes_checked_frames_and_says_what_it_left_out(qtbot, window,
                                                                       ui_project, tmp_path,
                                                                       monkeypatch):
    ui_project.apply(SetFrameState(2, FrameState.CORRECTED))
    ui_project.apply(SetFrameState(3, FrameState.DISPUTED))
    ui_project.apply(SetFrameState(4, FrameState.SIGNED_OFF))
    ui_project.mark_image_status(4, "corrupt")
    out = tmp_path / "labels.json"
    monkeypatch.setattr(QFileDialog, "getSaveFileName", lambda *a, **k: (str(out), ""))
    window.actions_by_name["export_labels"].trigger()
    qtbot.waitUntil(lambda: "wrote" in window.status_log, timeout=WAIT_MS)
    assert [i["id"] for i in json.loads(out.read_text())["images"]] == [2]
    assert "1 image, 3 people; 2 frames left out by their state" in window.status_log.last
    qtbot.waitUntil(lambda: any(b.objectName() == "InfoBox"
                                for b in window.findChildren(QMessageBox)), timeout=WAIT_MS)
    (box,) = [b for b in window.findChildren(QMessageBox) if b.objectName() == "InfoBox"]
    assert box.text() == "1 frame not exported: its image cannot be read."
    box.close()
