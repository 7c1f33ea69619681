"""Image sizes from headers, the pixel limit, and Exif orientation.

Every image here is synthetic: drawn by the test, or a header crafted byte by byte after the
PNG specification (ISO/IEC 15948, IHDR chunk) and the JPEG standard (ITU-T T.81, SOF0 and SOS
segments), claiming a size no pixel data backs.
"""

import struct
import zlib

import cv2
import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from PIL import Image, ImageOps

from app.errors import BadInput, NotFound
from app.formats import images
from app.formats.images import (
    decode_image,
    max_pixels,
    probe_image,
    read_image,
    set_max_megapixels,
    unreadable_status,
)


def png_header(width: int, height: int) -> bytes:
    """A PNG whose IHDR claims ``width x height`` RGB pixels, with one tiny IDAT (ISO/IEC
    15948: signature, then length, type, data and CRC-32 of each chunk)."""

    def chunk(kind: bytes, data: bytes) -> bytes:
        return (struct.pack(">I", len(data)) + kind + data
                + struct.pack(">I", zlib.crc32(kind + data) & 0xFFFFFFFF))

    ihdr = struct.pack(">IIBBBBB", width, height, 8, 2, 0, 0, 0)
    return (b"\x89PNG\r\n\x1a\n" + chunk(b"IHDR", ihdr) + chunk(b"IDAT", zlib.compress(b"\0" * 64))
            + chunk(b"IEND", b""))


def jpeg_header(width: int, height: int) -> bytes:
    """A baseline JPEG whose SOF0 claims ``width x height`` with three components, followed by
    a scan header and a few bytes of nothing (ITU-T T.81, Annex B)."""
    sof = b"\xff\xc0" + struct.pack(">HBHHB", 17, 8, height, width, 3) + bytes(
        [1, 0x22, 0, 2, 0x11, 1, 3, 0x11, 1])
    sos = b"\xff\xda" + struct.pack(">HB", 12, 3) + bytes([1, 0, 2, 0x11, 3, 0x11, 0, 63, 0])
    return b"\xff\xd8" + sof + sos + bytes(16) + b"\xff\xd9"


@pytest.fixture
def no_decoding(monkeypatch):
    """Fail the test if anything asks OpenCV to decode."""
    def refuse(*args, **kwargs):
        raise AssertionError("an image was decoded")

    monkeypatch.setattr(images.cv2, "imdecode", refuse)


@pytest.mark.parametrize("make, suffix", [(png_header, ".png"), (jpeg_header, ".jpg")])
def test_a_header_claiming_40000_squared_is_refused_without_decoding(tmp_path, make, suffix,
                                                                     no_decoding):
    """A few dozen bytes claiming 1.6 gigapixels: registered as oversized with the header's
    size, refused in one line that states the limit, never decoded (OpenCV would raise on
    it: its own cap is 2^30 pixels)."""
    path = tmp_path / f"huge{suffix}"
    path.write_bytes(make(40000, 40000))
    assert path.stat().st_size < 200
    info = probe_image(path)
    assert (info.width, info.height, info.status) == (40000, 40000, "oversized")
    assert "over the limit of 100 megapixels" in info.reason
    with pytest.raises(BadInput, match=r"1600 megapixels.*limit of 100 megapixels") as exc:
        read_image(path)
    assert "\n" not in str(exc.value) and str(path) in str(exc.value)
    assert decode_image(path) is None
    assert unreadable_status(path) == "oversized"


def test_the_pixel_limit_is_settable(tmp_path, monkeypatch):
    """The option wins over the environment, the environment over the default."""
    path = tmp_path / "a.png"
    cv2.imwrite(str(path), np.zeros((300, 400, 3), np.uint8))  # 0.12 megapixels
    assert max_pixels() == 100_000_000
    monkeypatch.setenv("POSEWRIGHT_MAX_MEGAPIXELS", "0.1")
    assert probe_image(path).status == "oversized"
    set_max_megapixels(0.2)
    try:
        assert probe_image(path).status == "ok" and read_image(path).shape == (300, 400, 3)
    finally:
        set_max_megapixels(None)
    monkeypatch.setenv("POSEWRIGHT_MAX_MEGAPIXELS", "lots")
    with pytest.raises(BadInput, match="POSEWRIGHT_MAX_MEGAPIXELS: 'lots' is not a number"):
        max_pixels()
    with pytest.raises(BadInput, match="--max-megapixels"):
        set_max_megapixels(0)


def test_missing_broken_and_lying_files(tmp_path):
    """A missing file, a file that is not an image, and one whose header promises more
    pixels than its data holds."""
    assert probe_image(tmp_path / "none.png").status == "missing"
    with pytest.raises(NotFound):
        read_image(tmp_path / "none.png")
    junk = tmp_path / "junk.jpg"
    junk.write_bytes(b"\x89PNG not really")
    assert (probe_image(junk).status, probe_image(junk).width) == ("corrupt", 0)
    lying = tmp_path / "lying.png"
    lying.write_bytes(png_header(64, 48))
    assert probe_image(lying).status == "ok"
    with pytest.raises(BadInput, match=r"lying\.png"):
        read_image(lying)
    assert unreadable_status(lying) == "corrupt"


def _pattern() -> np.ndarray:
    """A 24 x 40 RGB picture with a bright block near its top-left corner (synthetic)."""
    rgb = np.full((24, 40, 3), 60, np.uint8)
    rgb[2:8, 3:12] = (250, 200, 30)
    rgb[16:, 30:] = (20, 90, 240)
    return rgb


@pytest.mark.parametrize("fmt, suffix, lossless", [("PNG", ".png", True),
                                                   ("WEBP", ".webp", True),
                                                   ("JPEG", ".jpg", False)])
@pytest.mark.parametrize("orientation", range(1, 9))
def test_exif_orientation_matches_pillows_exif_transpose(tmp_path, fmt, suffix, lossless,
                                                         orientation):
    """Size and pixels follow the Exif Orientation tag as Pillow's ``ImageOps.exif_transpose``
    applies it (the reference: Pillow, implementing the Exif standard's eight cases); the size
    comes from the header alone and equals the decoded size."""
    exif = Image.Exif()
    exif[0x0112] = orientation
    path = tmp_path / f"o{orientation}{suffix}"
    extra = {"lossless": True} if fmt == "WEBP" else {}
    Image.fromarray(_pattern()).save(path, fmt, exif=exif.tobytes(), **extra)
    with Image.open(path) as stored:
        reference = np.asarray(ImageOps.exif_transpose(stored).convert("RGB"))[:, :, ::-1]
    info = probe_image(path)
    assert (info.height, info.width) == reference.shape[:2]
    got = read_image(path)
    assert got.shape == reference.shape
    diff = np.abs(got.astype(int) - reference.astype(int))
    assert diff.max() == 0 if lossless else diff.mean() < 3


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow,
                                                                 HealthCheck.function_scoped_fixture])
@given(prefix=st.sampled_from([b"\x89PNG\r\n\x1a\n", b"\xff\xd8\xff", b"RIFF", b"II*\x00",
                               b"BM"]),
       body=st.binary(max_size=300))
def test_hostile_bytes_never_raise_out_of_probe_or_decode(tmp_path, prefix, body):
    """Random bytes behind an image signature: unreadable, never an exception (synthetic,
    hypothesis)."""
    path = tmp_path / "x.img"
    path.write_bytes(prefix + body)
    info = probe_image(path)
    assert info.status in ("ok", "corrupt", "oversized")
    image = decode_image(path)
    assert image is None or image.shape[:2] == (info.height, info.width)
