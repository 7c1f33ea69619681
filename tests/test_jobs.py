"""Intake: registering the frames of a video is all or nothing, a cancel or a failure leaves
neither files nor rows behind (the video is synthetic, written by tests/formats/test_video.py)."""

import pytest

from app.errors import Cancelled
from app.jobs import add_video_frames
from app.progress import Progress
from app.store import Project
from app.store.meta import MetaGateway
from tests.formats.test_video import write_video


def test_cancel_or_failure_leaves_no_frame_and_no_file(tmp_path, monkeypatch):
    video = write_video(tmp_path / "clip.avi")
    with Project.create(tmp_path / "p", author="ana") as p:
        progress = Progress(lambda done, total, label: done == 10 and progress.cancel())
        with pytest.raises(Cancelled):
            add_video_frames(p, video, progress=progress)
        assert p.frames() == [] and not (p.folder / "frames").exists()

        def fail(self, values):
            raise OSError("disk full")

        monkeypatch.setattr(MetaGateway, "set_many", fail)
        with pytest.raises(OSError):
            add_video_frames(p, video, every=5)
        monkeypatch.undo()
        assert p.frames() == [] and not (p.folder / "frames").exists()
        added = add_video_frames(p, video, every=5)
        assert [f.video_index for f in added] == [0, 5, 10, 15, 20]
        assert [f.id for f in added] == [1, 2, 3, 4, 5]


def test_video_frames_follow_the_images_already_there(project, tmp_path):
    """Ids continue after the images; the images folder stays the COCO root."""
    root = project.images_root
    added = add_video_frames(project, write_video(tmp_path / "clip.avi", count=4))
    assert [f.id for f in added] == [7, 8, 9, 10]
    assert project.images_root == root
    assert [f.timestamp for f in added] == [0.0, 0.1, 0.2, 0.3]
