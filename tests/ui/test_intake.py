"""Pre-labelling, images and video from the Project menu: the real actions, their forms, the
worker with progress, and the store afterwards.

Data: synthetic. The ONNX model is a colour-dot model built in the test
(tests/inference/onnx_models.py, no trained weights) over frames with coloured blobs where the
joints are (tests/inference/test_network.py); the video is written by OpenCV's VideoWriter
(Motion JPEG, as tests/formats/test_video.py does). Grouping is Cao et al., "Realtime
Multi-Person 2D Pose Estimation using Part Affinity Fields", CVPR 2017, Sec. 2.4, through
app.analysis.association. A frame's time is its index divided by the declared frame rate
(app/formats/video.py).
"""

from __future__ import annotations

import cv2
import pytest
from PySide6.QtCore import Qt
from PySide6.QtWidgets import QDialog, QFileDialog, QMessageBox

from app.jobs import new_project
from app.ui.keys import KEYS, sequences
from app.ui.models import KeyRole
from tests.formats.test_video import FPS, write_video
from tests.inference.onnx_models import colour_dot_model
from tests.inference.test_network import FIELDS, MAPS_FROM, SK, _config, _people_at
from tests.ui.conftest import WAIT_MS, show_window

XS = ([30.3, 80.7, 131.2], [25.0, 95.0])


def _press(widget, name):
    from PySide6.QtTest import QTest

    QTest.keySequence(widget, sequences(next(k for k in KEYS if k.name == name))[0])


@pytest.fixture
def dots(qtbot, tmp_path):
    """Two synthetic frames (3 and 2 blob people), a colour-dot model and its config, and
    the window over a project of those frames, none labelled yet."""
    images = tmp_path / "images"
    images.mkdir()
    for n, xs in enumerate(XS):
        cv2.imwrite(str(images / f"f{n}.png"), _people_at(xs)[1])
    model = colour_dot_model(tmp_path / "dots.onnx", MAPS_FROM, FIELDS, stride=4,
                             channel_order="bgr", mean=(10, 20, 30), scale=(0.5, 0.25, 0.125))
    config = tmp_path / "dots-config.json"
    config.write_text(_config().model_dump_json())
    project = new_project(tmp_path / "proj", images=images, skeleton=SK, author="ana")
    window = show_window(qtbot, project)
    yield window, project, model, config
    window.shutdown()
    project.close()


def _prelabel_form(window, model, config):
    _press(window.canvas, "prelabel")
    dialog = window.findChild(QDialog, "PrelabelDialog")
    assert dialog is not None and dialog.isVisible()
    dialog.model.set_text(str(model))
    dialog.config.set_text(str(config))
    return dialog


def test_prelabel_from_the_menu_runs_in_the_worker_and_fills_the_frames(qtbot, dots):
    window, project, model, config = dots
    dialog = _prelabel_form(window, model, config)
    dialog.accept()
    qtbot.waitUntil(lambda: "pre-labelled" in window.status_log, timeout=WAIT_MS)
    found = {f.file_name: len(project.people(f.id)) for f in project.frames()}
    assert found == {"f0.png": 3, "f1.png": 2}
    assert all(project.maps_path(f.id) is not None for f in project.frames())
    assert "5 people found" in window.status_log
    assert len(window.canvas.people) == found[window.canvas.frame.file_name], \
        "the Canvas shows the new people"


def test_a_model_that_does_not_fit_its_config_says_so_and_changes_nothing(qtbot, dots,
                                                                          tmp_path):
    window, project, model, _ = dots
    wrong = tmp_path / "wrong.json"
    wrong.write_text(_config(outputs={"confidence_maps": "maps", "pafs": "field"})
                     .model_dump_json())
    before = project.counts()
    _prelabel_form(window, model, wrong).accept()

    def error_shown():
        boxes = [b for b in window.findChildren(QMessageBox) if b.isVisible()]
        assert boxes and "no output 'maps'" in boxes[0].text()

    qtbot.waitUntil(error_shown, timeout=WAIT_MS)
    assert project.counts() == before
    assert not (project.folder / "maps").exists()


def test_the_form_refuses_a_missing_model_file(qtbot, dots, tmp_path):
    window, _, _, config = dots
    dialog = _prelabel_form(window, tmp_path / "absent.onnx", config)
    dialog.accept()
    assert dialog.isVisible() and "No such model file" in dialog.problem.text()
    dialog.reject()


def test_add_video_frames_with_their_index_and_time(qtbot, window, ui_project, tmp_path):
    video = write_video(tmp_path / "clip.avi", count=10)
    before = len(ui_project.frames())
    _press(window.canvas, "add_video")
    dialog = window.findChild(QDialog, "VideoDialog")
    dialog.video.set_text(str(video))
    dialog.every.setValue(3)
    dialog.accept()
    qtbot.waitUntil(lambda: len(ui_project.frames()) == before + 4, timeout=WAIT_MS)
    added = [f for f in ui_project.frames() if f.video_index is not None]
    assert [f.video_index for f in added] == [0, 3, 6, 9]
    assert [f.timestamp for f in added] == pytest.approx([i / FPS for i in (0, 3, 6, 9)])

    third = added[1]
    qtbot.waitUntil(lambda: window.frame_id == added[0].id, timeout=WAIT_MS)
    window.show_frame(third.id)
    assert "video frame 3 at 0:00.30" in window.status_frame.text()
    model = window.worklist_model
    tip = model.index(model.row_of(third.id), 0).data(Qt.ItemDataRole.ToolTipRole)
    assert "video frame 3 at 0:00.30" in tip
    assert model.index(model.row_of(third.id), 0).data(KeyRole) == third.id


def test_the_video_form_refuses_an_end_before_the_start(qtbot, window, tmp_path):
    video = write_video(tmp_path / "clip.avi", count=3)
    _press(window.canvas, "add_video")
    dialog = window.findChild(QDialog, "VideoDialog")
    dialog.video.set_text(str(video))
    dialog.start.setText("0:02")
    dialog.end.setText("1.5")
    dialog.accept()
    assert dialog.isVisible() and "after the start" in dialog.problem.text()
    dialog.start.setText("soon")
    dialog.accept()
    assert "not a time" in dialog.problem.text()
    dialog.reject()


def test_add_images_of_a_folder(qtbot, window, ui_project, tmp_path, monkeypatch):
    from tests import synthetic

    folder = tmp_path / "more"
    synthetic.write_images(folder, 2)
    before = len(ui_project.frames())
    monkeypatch.setattr(QFileDialog, "getExistingDirectory", lambda *a, **k: str(folder))
    _press(window.canvas, "add_images")
    qtbot.waitUntil(lambda: len(ui_project.frames()) == before + 2, timeout=WAIT_MS)
    qtbot.waitUntil(lambda: window.worklist_model.rowCount() == before + 2, timeout=WAIT_MS)
    # The report comes when the job ends, after the Worklist heard of the frames.
    qtbot.waitUntil(lambda: "added 2 frames" in window.status_log, timeout=WAIT_MS)
