"""Video in: frames extracted with OpenCV (``cv2.VideoCapture``) into image files.

A frame keeps its place in the video: ``index`` counts decoded frames from 0, and
``timestamp`` (seconds) is ``index / fps`` when the container reports a frame rate, else the
decoder's position (``CAP_PROP_POS_MSEC``) when the frame was read. The frame rate is used
first because it is exact and the same on every platform, while the reported position depends
on the backend and the container. Frames are read in order (no seeking: seeking in compressed
video lands on key frames on some backends, which would give the wrong index).

Files are written as ``<index:06d>.jpg`` (JPEG quality 95) or ``.png``; the caller chooses
the folder (the project uses ``frames/<video stem>/``).
"""

from __future__ import annotations

import logging
import math
import re
from dataclasses import dataclass
from pathlib import Path

import cv2

from app.errors import BadInput
from app.progress import Progress
from app.wording import count

log = logging.getLogger(__name__)

__all__ = ["JPEG_QUALITY", "VideoFrame", "VideoInfo", "extract_frames", "parse_time",
           "probe_video"]

#: Quality of extracted JPEG frames (0-100): high, so labels are placed on what the camera saw.
JPEG_QUALITY = 95


@dataclass(frozen=True)
class VideoInfo:
    """What the container says about a video (``frame_count`` 0 when it does not say)."""

    path: Path
    width: int
    height: int
    fps: float
    frame_count: int

    @property
    def fingerprint(self) -> dict[str, float | int]:
        """Facts that tell two videos apart without reading them whole."""
        return {"bytes": self.path.stat().st_size, "width": self.width, "height": self.height,
                "fps": round(self.fps, 6), "frames": self.frame_count}


@dataclass(frozen=True)
class VideoFrame:
    """One extracted frame: its file, index in the video, time (s) and size."""

    path: Path
    index: int
    timestamp: float
    width: int
    height: int


def parse_time(text: str, where: str = "time") -> float:
    """Seconds from ``"12.5"``, ``"1:02.5"`` (minutes:seconds) or ``"1:00:02"``.

    Examples
    --------
    >>> parse_time("75"), parse_time("1:15.5"), parse_time("1:00:02")
    (75.0, 75.5, 3602.0)
    """
    value = text.strip()
    if not re.fullmatch(r"(\d+:){0,2}\d+(\.\d*)?", value):
        raise BadInput(f"{text!r} is not a time", where=where,
                       hint="give seconds (12.5), minutes:seconds (1:02.5) or h:mm:ss")
    seconds = 0.0
    for part in value.split(":"):
        seconds = seconds * 60 + float(part)
    return seconds


def probe_video(path: str | Path) -> VideoInfo:
    """Open a video and decode its first frame.

    Raises
    ------
    BadInput
        When the file does not exist or OpenCV cannot decode a frame of it.
    """
    path = Path(path)
    if not path.is_file():
        raise BadInput("no such video file", where=str(path))
    cap = _open(path)
    try:
        ok, image = cap.read()
        if not ok or image is None:
            raise BadInput("OpenCV cannot decode a frame of this video", where=str(path),
                           hint="if it is a video, re-encode it, for example to H.264 in .mp4")
        fps = float(cap.get(cv2.CAP_PROP_FPS) or 0.0)
        count = int(cap.get(cv2.CAP_PROP_FRAME_COUNT) or 0)
    finally:
        cap.release()
    fps = fps if math.isfinite(fps) and fps > 0 else 0.0
    return VideoInfo(path, int(image.shape[1]), int(image.shape[0]), fps, max(count, 0))


def extract_frames(video: str | Path, out_dir: str | Path, every: int = 1,
                   start: float | None = None, end: float | None = None,
                   progress: Progress | None = None, suffix: str = ".jpg") -> list[VideoFrame]:
    """Decode ``video`` and write the chosen frames into ``out_dir``.

    Parameters
    ----------
    video
        The video file.
    out_dir
        An existing folder; files are named ``<index:06d><suffix>``.
    every
        Keep every ``every``-th frame: the first frame at or after ``start``, then every
        ``every``-th after it.
    start, end
        Keep frames with ``start <= timestamp < end`` (seconds; None: from the beginning, to
        the end).
    progress
        Progress per decoded frame; cancelling stops the work.
    suffix
        ``".jpg"`` (quality :data:`JPEG_QUALITY`) or ``".png"``.

    Returns
    -------
    list of VideoFrame
        In video order.

    Raises
    ------
    BadInput
        An unreadable video, a bad ``every``/``start``/``end``, or no frame in the range. On
        any failure or cancel the files written so far are removed.

    Examples
    --------
    >>> import tempfile, numpy as np
    >>> folder = Path(tempfile.mkdtemp())
    >>> writer = cv2.VideoWriter(str(folder / "clip.avi"), cv2.VideoWriter_fourcc(*"MJPG"),
    ...                          5.0, (32, 24))
    >>> for i in range(8):
    ...     _ = writer.write(np.full((24, 32, 3), 30 * i, np.uint8))
    >>> writer.release()
    >>> [(f.path.name, f.index, f.timestamp)
    ...  for f in extract_frames(folder / "clip.avi", folder, every=3, start=0.2)]
    [('000001.jpg', 1, 0.2), ('000004.jpg', 4, 0.8), ('000007.jpg', 7, 1.4)]
    """
    if not (isinstance(every, int) and every >= 1):
        raise BadInput(f"every {every} must be a whole number of frames, 1 or more",
                       where="--every")
    if start is not None and not (math.isfinite(start) and start >= 0):
        raise BadInput(f"start {start} must be a time of 0 s or later", where="--start")
    if end is not None and not (math.isfinite(end) and end > (start or 0.0)):
        raise BadInput(f"end {end} must come after start {start or 0.0}", where="--end")
    if suffix not in (".jpg", ".png"):
        raise BadInput(f"frames are written as .jpg or .png, not {suffix}", where="suffix")
    info = probe_video(video)
    progress = progress or Progress()
    out = Path(out_dir)
    params = [cv2.IMWRITE_JPEG_QUALITY, JPEG_QUALITY] if suffix == ".jpg" else []
    begin = start or 0.0
    total = info.frame_count
    if total and end is not None and info.fps:
        total = min(total, math.ceil(end * info.fps))
    written: list[VideoFrame] = []
    cap = _open(info.path)
    try:
        index = -1
        first: int | None = None
        while True:
            progress.step(index + 1, max(total, index + 1), "extracting video frames")
            if not cap.grab():
                break
            index += 1
            seconds = index / info.fps if info.fps else cap.get(cv2.CAP_PROP_POS_MSEC) / 1000.0
            if end is not None and seconds >= end:
                break
            if seconds < begin:
                continue
            if first is None:
                first = index
            if (index - first) % every:
                continue
            ok, image = cap.retrieve()
            if not ok or image is None:
                log.warning("%s: frame %d could not be decoded; skipped", info.path, index)
                continue
            path = out / f"{index:06d}{suffix}"
            ok, data = cv2.imencode(suffix, image, params)
            if not ok:
                raise BadInput(f"cannot encode frame {index} as {suffix}", where=str(path))
            _write_bytes(path, data.tobytes())
            written.append(VideoFrame(path, index, float(seconds), int(image.shape[1]),
                                      int(image.shape[0])))
        progress.step(index + 1, index + 1, "extracting video frames")
        if not written:
            raise BadInput(f"no frame between {begin:g} s and "
                           f"{'the end' if end is None else f'{end:g} s'} "
                           f"(the video has {count(index + 1, 'frame')}"
                           + (f", {(index + 1) / info.fps:.2f} s" if info.fps else "") + ")",
                           where=str(info.path))
    except BaseException:
        for frame in written:
            frame.path.unlink(missing_ok=True)
        raise
    finally:
        cap.release()
    return written


def _write_bytes(path: Path, data: bytes) -> None:
    """Write a frame's file; a full disk raises OSError with its errno and the file name
    (``ndarray.tofile`` reports only the counts of bytes)."""
    try:
        with open(path, "wb") as fh:
            fh.write(data)
    except OSError as exc:
        raise OSError(exc.errno, exc.strerror, str(path)) from None


def _open(path: Path) -> cv2.VideoCapture:
    cap = cv2.VideoCapture(str(path), cv2.CAP_ANY)
    if not cap.isOpened():
        cap.release()
        raise BadInput("OpenCV cannot open this video", where=str(path),
                       hint="if it is a video, re-encode it, for example to H.264 in .mp4")
    return cap

