"""Frames extracted from a video, with their index and time. The videos are synthetic: written
by the test with OpenCV's VideoWriter (Motion JPEG in .avi, which needs no extra codec), each
frame a flat grey whose level encodes its index, so an extracted file can be traced back to the
frame it came from. Expected times are index / fps, the rule app/formats/video.py documents."""

from pathlib import Path

import cv2
import numpy as np
import pytest

from app.errors import BadInput, Cancelled
from app.formats.video import extract_frames, parse_time, probe_video
from app.progress import Progress

FPS, COUNT, SIZE = 10.0, 25, (64, 48)


def write_video(path: Path, count: int = COUNT, fps: float = FPS) -> Path:
    """A synthetic Motion-JPEG video: frame i is grey level 10 * i."""
    writer = cv2.VideoWriter(str(path), cv2.VideoWriter_fourcc(*"MJPG"), fps, SIZE)
    assert writer.isOpened()
    for i in range(count):
        writer.write(np.full((SIZE[1], SIZE[0], 3), 10 * i, np.uint8))
    writer.release()
    return path


def _level(path: Path) -> int:
    """The index a grey level stands for (Motion JPEG shifts flat greys by a few levels)."""
    image = cv2.imread(str(path))
    return round(float(image.mean()) / 10)


@pytest.fixture
def video(tmp_path):
    return write_video(tmp_path / "clip.avi")


def test_probe_reads_size_rate_and_length(video):
    info = probe_video(video)
    assert (info.width, info.height, info.fps, info.frame_count) == (64, 48, FPS, COUNT)


def test_every_frame_in_order_with_index_and_time(video, tmp_path):
    out = tmp_path / "out"
    out.mkdir()
    frames = extract_frames(video, out, suffix=".png")
    assert [f.index for f in frames] == list(range(COUNT))
    assert [f.timestamp for f in frames] == pytest.approx([i / FPS for i in range(COUNT)])
    assert [f.path.name for f in frames[:2]] == ["000000.png", "000001.png"]
    assert [_level(f.path) for f in frames] == list(range(COUNT))
    assert all((f.width, f.height) == SIZE for f in frames)


@pytest.mark.parametrize("every, start, end, want", [
    (5, None, None, [0, 5, 10, 15, 20]),
    (1, 1.0, 1.5, [10, 11, 12, 13, 14]),           # start included, end excluded
    (4, 0.55, None, [6, 10, 14, 18, 22]),          # first frame at or after start, then every 4
    (3, None, 0.7, [0, 3, 6]),
])
def test_every_start_and_end(video, tmp_path, every, start, end, want):
    out = tmp_path / "out"
    out.mkdir()
    frames = extract_frames(video, out, every=every, start=start, end=end)
    assert [f.index for f in frames] == want
    assert [_level(f.path) for f in frames] == want
    assert sorted(p.name for p in out.iterdir()) == [f"{i:06d}.jpg" for i in want]


@pytest.mark.parametrize("kwargs, words", [
    ({"every": 0}, "--every: every 0 must be a whole number"),
    ({"start": -1.0}, "--start: start -1.0 must be a time of 0 s or later"),
    ({"start": 2.0, "end": 1.0}, "--end: end 1.0 must come after start 2.0"),
    ({"start": 9.0}, "no frame between 9 s and the end (the video has 25 frames, 2.50 s)"),
])
def test_bad_ranges_are_refused(video, tmp_path, kwargs, words):
    with pytest.raises(BadInput) as err:
        extract_frames(video, tmp_path, **kwargs)
    assert words in str(err.value)


def test_a_file_that_is_not_a_video_is_refused(tmp_path):
    junk = tmp_path / "junk.avi"
    junk.write_bytes(b"\x00junk" * 500)
    for path, words in ((junk, "OpenCV cannot"), (tmp_path / "none.mp4", "no such video file")):
        with pytest.raises(BadInput) as err:
            extract_frames(path, tmp_path)
        assert str(err.value).startswith(f"{path}: {words}")
    assert [p.name for p in tmp_path.iterdir()] == ["junk.avi"]


def test_cancel_leaves_no_file(video, tmp_path):
    out = tmp_path / "out"
    out.mkdir()
    progress = Progress(lambda done, total, label: done == 12 and progress.cancel())
    with pytest.raises(Cancelled):
        extract_frames(video, out, progress=progress)
    assert list(out.iterdir()) == []


def test_times():
    assert parse_time("12.5") == 12.5
    assert parse_time("2:03") == 123.0 and parse_time("1:02:03.5") == 3723.5
    with pytest.raises(BadInput, match="'1m' is not a time"):
        parse_time("1m", "--start")
