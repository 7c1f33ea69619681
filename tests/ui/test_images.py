"""Decoding off the UI thread, prefetching and the memory-bounded cache.

Data: synthetic images (invented for these tests). The cache's bound is checked by plain byte
arithmetic: an RGB32 pixel takes 4 bytes (common practice, no source).
"""

from __future__ import annotations

import threading

import cv2
import numpy as np
from PySide6.QtCore import Qt, QThread

from app.ui.images import Decoded, ImageCache, ImageLoader, decode_for_display, qimage_view
from tests.ui.conftest import WAIT_MS


def _item(i, w=100, h=10):
    px = np.zeros((h, w, 4), np.uint8)
    return Decoded(i, px, qimage_view(px))


def test_cache_evicts_least_recently_used_beyond_the_byte_bound():
    cache = ImageCache(max_bytes=3 * 100 * 10 * 4)
    for i in range(3):
        cache.put(_item(i))
    assert cache.get(0) is not None  # 0 is now the most recent
    cache.put(_item(3))
    assert sorted(cache.keys()) == [0, 2, 3]
    assert cache.nbytes == 3 * 4000


def test_decode_matches_opencv_pixels(tmp_path):
    """The Canvas shows exactly what OpenCV decodes (reference: cv2.imread)."""
    rng = np.random.default_rng(3)
    img = rng.integers(0, 255, (24, 32, 3), dtype=np.uint8)
    path = tmp_path / "a.png"
    cv2.imwrite(str(path), img)
    decoded = decode_for_display(7, path)
    ref = cv2.imread(str(path))
    np.testing.assert_array_equal(decoded.pixels[..., :3], ref)
    x, y = 5, 9
    c = decoded.image.pixelColor(x, y)
    assert (c.blue(), c.green(), c.red()) == tuple(int(v) for v in ref[y, x])


def test_loader_decodes_off_the_ui_thread_and_reports_missing(qtbot, tmp_path, monkeypatch):
    cv2.imwrite(str(tmp_path / "b.png"), np.zeros((8, 8, 3), np.uint8))
    threads = []
    import app.ui.images as images

    real = images.decode_image

    def spy(path):
        threads.append(threading.get_ident())
        return real(path)

    monkeypatch.setattr(images, "decode_image", spy)
    loader = ImageLoader(ImageCache())
    assert loader.request(1, tmp_path / "b.png") is None
    with qtbot.waitSignal(loader.ready, timeout=WAIT_MS) as got:
        pass
    assert got.args == [1]
    assert threads and threads[0] != threading.get_ident()
    assert loader.request(1, tmp_path / "b.png") is not None, "now served from the cache"
    with qtbot.waitSignal(loader.failed, timeout=WAIT_MS) as missing:
        loader.request(2, tmp_path / "nope.png")
    assert missing.args == [2, "missing"]
    loader.shutdown()
    assert QThread.currentThread() is not None


def test_window_prefetches_the_next_frames(qtbot, window):
    ids = window.worklist.ordered_ids()
    qtbot.waitUntil(lambda: ids[1] in window.loader.cache and ids[2] in window.loader.cache,
                    timeout=WAIT_MS)
    qtbot.keyClick(window.canvas, Qt.Key.Key_Space)
    assert window.canvas.has_image, "a prefetched frame shows its image at once"


def test_urgent_frames_are_shrunk_quickly_then_refined(qtbot, tmp_path):
    """The copy shrunk for the Canvas ends up as OpenCV's area average (reference:
    cv2.resize with INTER_AREA on the decoded pixels)."""
    rng = np.random.default_rng(5)
    cv2.imwrite(str(tmp_path / "c.png"), rng.integers(0, 255, (90, 160, 3), dtype=np.uint8))
    loader = ImageLoader(ImageCache())
    loader.display_scale = 0.6
    with qtbot.waitSignal(loader.ready, timeout=WAIT_MS):
        loader.request(1, tmp_path / "c.png", urgent=True)
    quick = loader.cache.get(1)
    assert quick.scale == 0.6 and not quick.refined
    with qtbot.waitSignal(loader.refined, timeout=WAIT_MS):
        loader.refine(1)
    better = loader.cache.get(1)
    assert better.refined and better.pixels is quick.pixels
    ref = cv2.resize(cv2.cvtColor(cv2.imread(str(tmp_path / "c.png")), cv2.COLOR_BGR2BGRA),
                     (96, 54), interpolation=cv2.INTER_AREA)
    np.testing.assert_array_equal(better.scaled, ref)
    assert loader.cache.nbytes == better.nbytes
    loader.shutdown()


def test_an_urgent_frame_does_not_wait_behind_prefetches(qtbot, tmp_path, monkeypatch):
    """The one decoder is held busy on frame 1 until the urgent request is in (an event, not a
    pause, so the outcome does not depend on the machine's load)."""
    import app.ui.images as images

    for i in range(1, 5):
        cv2.imwrite(str(tmp_path / f"{i}.png"), np.full((8, 8, 3), i, np.uint8))
    real = images.decode_image
    started, release = threading.Event(), threading.Event()

    def slow_first(path):
        if path.name == "1.png":
            started.set()
            release.wait(WAIT_MS / 1000)
        return real(path)

    monkeypatch.setattr(images, "decode_image", slow_first)
    loader = ImageLoader(ImageCache(), threads=1)
    for i in (1, 2, 3):
        loader.request(i, tmp_path / f"{i}.png")
    assert started.wait(WAIT_MS / 1000)
    order = []
    loader.ready.connect(order.append)
    with qtbot.waitSignal(loader.ready, timeout=WAIT_MS, check_params_cb=lambda f: f == 4):
        loader.request(4, tmp_path / "4.png", urgent=True)
        release.set()
    assert not loader.is_pending(2) and not loader.is_pending(3), "queued prefetches withdrawn"
    assert 2 not in order and 3 not in order
    with qtbot.waitSignal(loader.ready, timeout=WAIT_MS, check_params_cb=lambda f: f == 2):
        loader.request(2, tmp_path / "2.png")  # and can be asked for again
    loader.shutdown()


def test_a_jpeg_shown_small_is_decoded_reduced_then_whole(qtbot, tmp_path):
    """At a quarter zoom the waited-for JPEG is first decoded at 1/4 (reference: OpenCV's
    own IMREAD_REDUCED_COLOR_4 of the same file; libjpeg's scaled decode is close to an area
    average of the whole image, common practice), and refining replaces it by the whole image
    shrunk by area averaging (reference: cv2.imread and cv2.resize INTER_AREA). A synthetic
    smooth image with an odd size (libjpeg rounds the reduced size up)."""
    yy, xx = np.mgrid[0:203, 0:322]
    img = np.stack([xx % 256, yy % 256, (xx + yy) // 3 % 256], axis=2).astype(np.uint8)
    path = tmp_path / "d.jpg"
    cv2.imwrite(str(path), img, [cv2.IMWRITE_JPEG_QUALITY, 95])
    loader = ImageLoader(ImageCache())
    loader.display_scale = 0.25
    with qtbot.waitSignal(loader.ready, timeout=WAIT_MS):
        loader.request(1, path, urgent=True)
    quick = loader.cache.get(1)
    assert quick.reduction == 4 and not quick.refined and quick.pixels.shape == (51, 81, 4)
    reduced = cv2.imread(str(path), cv2.IMREAD_REDUCED_COLOR_4)
    np.testing.assert_array_equal(quick.pixels[..., :3], reduced)
    whole = cv2.imread(str(path))
    area = cv2.resize(whole, (81, 51), interpolation=cv2.INTER_AREA)
    assert np.abs(quick.pixels[..., :3].astype(int) - area).mean() < 4
    with qtbot.waitSignal(loader.refined, timeout=WAIT_MS):
        loader.refine(1)
    better = loader.cache.get(1)
    assert better.reduction == 1 and better.refined
    np.testing.assert_array_equal(better.pixels[..., :3], whole)
    np.testing.assert_array_equal(
        better.scaled[..., :3], cv2.resize(whole, (80, 51), interpolation=cv2.INTER_AREA))
    # Prefetched frames, and PNGs, are decoded whole at once. The prefetch is awaited before
    # the urgent request: an urgent request withdraws prefetches that have not started yet,
    # which on a busy machine would be this one.
    with qtbot.waitSignal(loader.ready, timeout=WAIT_MS):
        loader.request(2, path)
    cv2.imwrite(str(tmp_path / "e.png"), img)
    with qtbot.waitSignal(loader.ready, timeout=WAIT_MS):
        loader.request(3, tmp_path / "e.png", urgent=True)
    assert loader.cache.get(2).reduction == 1 and loader.cache.get(3).reduction == 1
    loader.shutdown()
