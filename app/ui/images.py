"""Decoding frames off the UI thread, prefetching neighbours, and a memory-bounded image cache.

Decoding (OpenCV, through :func:`app.formats.images.decode_image`) runs in a
:class:`~PySide6.QtCore.QThreadPool`; results come back to the UI thread through a queued
signal. Decoded frames are kept as 32-bit ``B, G, R, 255`` arrays, which is the memory layout
of ``QImage.Format_RGB32`` on little-endian machines, so the Canvas wraps them without a copy
and Qt paints them on its fast path. The cache evicts the least recently used frames once the
decoded bytes exceed its bound.
"""

from __future__ import annotations

import ctypes
import logging
import sys
import threading
from collections import OrderedDict
from dataclasses import dataclass
from pathlib import Path

import cv2
import numpy as np
from PySide6.QtCore import QObject, QRunnable, QThreadPool, Signal
from PySide6.QtGui import QImage

from app.formats.images import decode_image, probe_image, unreadable_status

log = logging.getLogger(__name__)

#: Default bound of the decoded-image cache: some seventeen 1920 x 1080 frames (with their
#: shrunk copies), and small enough that the whole app stays well under half a gigabyte with
#: the cache full.
DEFAULT_CACHE_BYTES = 192 * 2**20


@dataclass(frozen=True)
class Decoded:
    """One decoded frame: ``pixels`` ``(H, W, 4)`` uint8 ``B, G, R, 255`` and a ``QImage``
    (``Format_RGB32``) that shares their memory; optionally a copy already shrunk for the
    Canvas's zoom (``scale`` < 1), made by area averaging on the decoding thread."""

    frame_id: int
    pixels: np.ndarray
    image: QImage
    scale: float = 1.0
    scaled: np.ndarray | None = None
    scaled_image: QImage | None = None
    #: False when the shrunk copy was made quickly (bilinear) and is still to be refined.
    refined: bool = True
    #: ``pixels`` are the image at 1/``reduction`` of its size (a JPEG decoded reduced while
    #: the annotator waits; :meth:`ImageLoader.refine` decodes it whole), from ``source``.
    reduction: int = 1
    source: Path | None = None

    @property
    def nbytes(self) -> int:
        return int(self.pixels.nbytes) + (0 if self.scaled is None else int(self.scaled.nbytes))


def qimage_view(pixels: np.ndarray) -> QImage:
    """A ``QImage`` over ``(H, W, 4)`` uint8 ``B, G, R, A`` pixels, sharing their memory.

    The caller keeps ``pixels`` alive as long as the image is used.

    Examples
    --------
    >>> px = np.zeros((2, 3, 4), np.uint8); px[..., 2] = 255; px[..., 3] = 255
    >>> qimage_view(px).pixelColor(1, 1).name()
    '#ff0000'
    """
    if sys.byteorder != "little":  # pragma: no cover - no big-endian desktops in use
        raise RuntimeError("32-bit pixel layout assumes a little-endian machine")
    pixels = np.ascontiguousarray(pixels)
    h, w = pixels.shape[:2]
    return QImage(pixels.data, w, h, int(pixels.strides[0]), QImage.Format.Format_RGB32)


def to_display(bgr: np.ndarray) -> np.ndarray:
    """``(H, W, 3)`` BGR (as OpenCV decodes) to ``(H, W, 4)`` ``B, G, R, 255``.

    Examples
    --------
    >>> to_display(np.zeros((1, 1, 3), np.uint8)).tolist()
    [[[0, 0, 0, 255]]]
    """
    return cv2.cvtColor(bgr, cv2.COLOR_BGR2BGRA)


def shrink(pixels: np.ndarray, scale: float, fast: bool = False) -> np.ndarray:
    """``pixels`` shrunk by ``scale`` (< 1): area averaging, so fine patterns such as costume
    stripes do not alias, or bilinear when ``fast`` (ten times quicker, for zooming).

    Examples
    --------
    >>> shrink(np.zeros((100, 200, 4), np.uint8), 0.5).shape
    (50, 100, 4)
    """
    h, w = pixels.shape[:2]
    size = (max(1, round(w * scale)), max(1, round(h * scale)))
    return cv2.resize(pixels, size, interpolation=cv2.INTER_LINEAR if fast else cv2.INTER_AREA)


#: OpenCV's flags for decoding a JPEG at 1/k of its size (libjpeg scales while it decodes,
#: so a quarter-size decode costs a fraction of a whole one), largest reduction first.
_REDUCED = ((8, cv2.IMREAD_REDUCED_COLOR_8), (4, cv2.IMREAD_REDUCED_COLOR_4),
            (2, cv2.IMREAD_REDUCED_COLOR_2))


def reduction_for(scale: float | None) -> int:
    """The largest JPEG reduction (8, 4 or 2; 1 for none) that still leaves at least one
    decoded pixel per screen pixel at ``scale``.

    Examples
    --------
    >>> [reduction_for(s) for s in (1.0, 0.6, 0.5, 0.3, 0.25, 0.1, None)]
    [1, 1, 2, 2, 4, 8, 1]
    """
    if scale is None:
        return 1
    return next((k for k, _ in _REDUCED if scale * k <= 1.0 + 1e-9), 1)


def decode_reduced(path: str | Path, reduction: int) -> np.ndarray | None:
    """A JPEG decoded at 1/``reduction`` of its size, ``(ceil(H / r), ceil(W / r), 3)`` BGR,
    or None when that does not apply (not a JPEG, turned by Exif, not readable): the caller
    then decodes it whole.

    Examples
    --------
    >>> decode_reduced("no-such-file.jpg", 4) is None
    True
    """
    flag = dict(_REDUCED).get(reduction)
    path = Path(path)
    if flag is None or path.suffix.lower() not in (".jpg", ".jpeg"):
        return None
    info = probe_image(path)
    if info.status != "ok" or info.orientation != 1:
        return None
    try:
        image = cv2.imdecode(np.fromfile(str(path), dtype=np.uint8), flag)
    except (OSError, cv2.error):
        return None
    want = (-(-info.height // reduction), -(-info.width // reduction))
    if image is None or image.ndim != 3 or image.shape[:2] != want:
        return None
    return image


def decode_for_display(frame_id: int, path: str | Path, scale: float | None = None,
                       fast: bool = False) -> Decoded | None:
    """Decode an image file for the Canvas (and shrink a copy to ``scale`` if < 1; quickly
    when ``fast``), or None when it cannot be read.

    When ``fast`` (the annotator waits) and the zoom shows the image at half its size or
    less, a JPEG is decoded reduced (:func:`decode_reduced`): enough pixels for the screen at
    a fraction of the time; :meth:`ImageLoader.refine` decodes it whole once it is shown."""
    k = reduction_for(scale) if fast else 1
    if k > 1 and scale is not None:
        small = decode_reduced(path, k)
        if small is not None:
            pixels = to_display(small)
            image = qimage_view(pixels)
            shrunk, shrunk_image = pixels, image
            if scale * k < 0.999:
                shrunk = shrink(pixels, scale * k, fast=True)
                shrunk_image = qimage_view(shrunk)
            return Decoded(frame_id, pixels, image, scale, shrunk, shrunk_image, refined=False,
                           reduction=k, source=Path(path))
    bgr = decode_image(path)
    if bgr is None:
        return None
    pixels = to_display(bgr)
    return with_shrunk_copy(Decoded(frame_id, pixels, qimage_view(pixels)), scale, fast)


def with_shrunk_copy(item: Decoded, scale: float | None, fast: bool = False) -> Decoded:
    """``item`` with a copy shrunk to ``scale`` (none when ``scale`` is None or >= 1)."""
    if scale is None or scale >= 0.999:
        return Decoded(item.frame_id, item.pixels, item.image)
    small = shrink(item.pixels, scale, fast=fast)
    return Decoded(item.frame_id, item.pixels, item.image, scale, small, qimage_view(small),
                   refined=not fast)


class ImageCache:
    """Decoded frames, least recently used evicted first once over ``max_bytes``.

    Examples
    --------
    >>> cache = ImageCache(max_bytes=100)
    >>> for i in range(3):
    ...     px = np.zeros((1, 10, 4), np.uint8)   # 40 bytes each
    ...     cache.put(Decoded(i, px, qimage_view(px)))
    >>> sorted(cache.keys()), cache.nbytes
    ([1, 2], 80)
    """

    def __init__(self, max_bytes: int = DEFAULT_CACHE_BYTES):
        self.max_bytes = int(max_bytes)
        self._items: OrderedDict[int, Decoded] = OrderedDict()
        self._bytes = 0
        self._lock = threading.Lock()

    @property
    def nbytes(self) -> int:
        return self._bytes

    def keys(self) -> list[int]:
        with self._lock:
            return list(self._items)

    def __contains__(self, frame_id: object) -> bool:
        return frame_id in self._items

    def get(self, frame_id: int) -> Decoded | None:
        with self._lock:
            item = self._items.get(frame_id)
            if item is not None:
                self._items.move_to_end(frame_id)
            return item

    def put(self, item: Decoded) -> None:
        """Keep ``item`` (as the most recent); evict older items beyond the bound. The newest
        item stays even when it alone is larger than the bound."""
        with self._lock:
            old = self._items.pop(item.frame_id, None)
            if old is not None:
                self._bytes -= old.nbytes
            self._items[item.frame_id] = item
            self._bytes += item.nbytes
            while self._bytes > self.max_bytes and len(self._items) > 1:
                _, gone = self._items.popitem(last=False)
                self._bytes -= gone.nbytes

    def clear(self) -> None:
        with self._lock:
            self._items.clear()
            self._bytes = 0


_M_MMAP_THRESHOLD = -3  # glibc's mallopt parameter number
_pinned = False


def pin_mmap_threshold(nbytes: int = 1 << 20) -> bool:
    """Make every allocation of ``nbytes`` or more (every decoded frame) its own memory
    mapping, handed back to the system when the cache evicts it. True if it was set.

    Notes
    -----
    glibc raises its mmap threshold each time a large mapped block is freed, so that later
    frame buffers come from the heaps of the decoding threads, where freed space is kept;
    resident memory then creeps well above the cache's bound. Setting the threshold fixes it
    (and turns the raising off). Linux with glibc only; elsewhere nothing is done.

    References
    ----------
    The GNU C Library manual, "Memory Allocation Tunables" (``M_MMAP_THRESHOLD``), and
    ``mallopt(3)``.

    Examples
    --------
    >>> pin_mmap_threshold() in (True, False)
    True
    """
    global _pinned
    if _pinned:
        return True
    if not sys.platform.startswith("linux"):
        return False
    try:
        libc = ctypes.CDLL("libc.so.6")
        _pinned = bool(libc.mallopt(_M_MMAP_THRESHOLD, int(nbytes)))
    except (OSError, AttributeError):
        return False
    return _pinned


class _Sink(QObject):
    """Lives on the UI thread; workers emit through it, so delivery is queued to the UI."""

    done = Signal(int, object, str)
    refined = Signal(int, object, object)


class _DecodeTask(QRunnable):
    def __init__(self, frame_id: int, path: Path, scale: float | None, fast: bool,
                 sink: _Sink):
        super().__init__()
        self._frame_id = frame_id
        self._path = path
        self._scale = scale
        self._fast = fast
        self._sink = sink

    def run(self) -> None:
        try:
            decoded = decode_for_display(self._frame_id, self._path, self._scale, self._fast)
        except Exception:  # a worker must always report back, whatever the file does
            log.exception("decoding %s failed", self._path)
            decoded = None
        status = "ok" if decoded is not None else unreadable_status(self._path)
        self._sink.done.emit(self._frame_id, decoded, status)


class _RefineTask(QRunnable):
    def __init__(self, item: Decoded, scale: float, sink: _Sink):
        super().__init__()
        self._item = item
        self._scale = scale
        self._sink = sink

    def run(self) -> None:
        item = self._item
        try:
            if item.reduction > 1 and item.source is not None:
                better = decode_for_display(item.frame_id, item.source, self._scale)
            else:
                better = with_shrunk_copy(item, self._scale)
        except Exception:  # keep the quick copy; nothing is lost
            log.exception("refining frame %s failed", item.frame_id)
            return
        if better is not None:
            self._sink.refined.emit(item.frame_id, item, better)


class ImageLoader(QObject):
    """Decode frames in a thread pool into an :class:`ImageCache`.

    ``ready(frame_id)`` is emitted on the UI thread when a frame is in the cache;
    ``failed(frame_id, status)`` when its file is ``missing``, ``oversized`` or ``corrupt``;
    ``refined(frame_id)`` when its quickly shrunk copy has been replaced by a better one.

    A frame asked for *urgently* (the one the annotator waits for) is shrunk quickly (bilinear),
    and a JPEG shown at half its size or less is decoded reduced; either can be
    :meth:`refine`-d once shown. Prefetched frames are decoded whole and area-averaged at once.
    """

    ready = Signal(int)
    failed = Signal(int, str)
    refined = Signal(int)

    def __init__(self, cache: ImageCache | None = None, threads: int = 2,
                 parent: QObject | None = None):
        super().__init__(parent)
        pin_mmap_threshold()
        self.cache = cache or ImageCache()
        self._pool = QThreadPool(self)
        self._pool.setMaxThreadCount(max(1, threads))
        self._pending: set[int] = set()
        self._queued: dict[int, _DecodeTask] = {}
        #: The Canvas's zoom; decoded frames come with a copy shrunk to it (when < 1).
        self.display_scale: float | None = None
        self._sink = _Sink(self)
        self._sink.done.connect(self._finished)
        self._sink.refined.connect(self._refined)

    def request(self, frame_id: int, path: str | Path, urgent: bool = False) -> Decoded | None:
        """The decoded frame if cached; otherwise schedule it (``urgent`` jumps the queue)
        and return None; ``ready`` follows."""
        item = self.cache.get(frame_id)
        if item is not None:
            return item
        if urgent:
            # The annotator waits for this one: withdraw prefetches that have not started.
            for fid, task in list(self._queued.items()):
                if fid != frame_id and self._pool.tryTake(task):
                    self._pending.discard(fid)
                    del self._queued[fid]
        if frame_id not in self._pending:
            self._pending.add(frame_id)
            task = _DecodeTask(frame_id, Path(path), self.display_scale, urgent, self._sink)
            if not urgent:
                # Kept (not deleted by the pool when done) until it reports back, so that it
                # can be withdrawn safely while it waits.
                task.setAutoDelete(False)
                self._queued[frame_id] = task
            self._pool.start(task, 10 if urgent else 0)
        return None

    def idle(self) -> bool:
        """Nothing scheduled or running."""
        return not self._pending and self._pool.activeThreadCount() == 0

    def refine(self, frame_id: int) -> None:
        """Replace a quickly shrunk copy by an area-averaged one, and a reduced decode by the
        whole image, in the background."""
        item = self.cache.get(frame_id)
        if item is None or item.refined or (item.scaled is None and item.reduction == 1):
            return
        self._pool.start(_RefineTask(item, item.scale, self._sink), 5)

    def is_pending(self, frame_id: int) -> bool:
        return frame_id in self._pending

    def wait(self, msecs: int = -1) -> bool:
        """Block until every scheduled decode has finished (for shutdown and benchmarks)."""
        return self._pool.waitForDone(msecs)

    def shutdown(self) -> None:
        self._pool.clear()
        self._pool.waitForDone()

    def _refined(self, frame_id: int, was: Decoded, better: Decoded) -> None:
        current = self.cache.get(frame_id)
        if current is not None and current.pixels is was.pixels:
            self.cache.put(better)
            self.refined.emit(frame_id)

    def _finished(self, frame_id: int, decoded: Decoded | None, status: str) -> None:
        self._pending.discard(frame_id)
        self._queued.pop(frame_id, None)
        if decoded is None:
            self.failed.emit(frame_id, status)
            return
        self.cache.put(decoded)
        self.ready.emit(frame_id)
