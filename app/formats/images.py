"""Images on disk: finding them, reading their size from the header, decoding them (OpenCV).

Sizes come from the file's header, read with Pillow, which parses the header and stops before
the pixel data, so registering an image never decodes it. An image larger than the pixel limit
(:func:`max_pixels`, 100 megapixels unless set otherwise) is never decoded at all: it is
registered with status ``"oversized"`` and treated as unreadable everywhere.

Orientation: a JPEG, PNG or WebP file may say in its EXIF data (tag 0x0112, Orientation) that
it is to be shown rotated or mirrored. The header size and the decoded pixels both follow that
tag, with the eight cases of the Exif standard (JEITA CP-3451, the same table Pillow's
``ImageOps.exif_transpose`` applies), so sizes and pixels agree everywhere the project looks
at an image, whatever OpenCV version decodes it. TIFF files are turned by OpenCV's own TIFF
reader.

Examples
--------
>>> import tempfile
>>> folder = Path(tempfile.mkdtemp())
>>> _ = cv2.imwrite(str(folder / "a.png"), np.zeros((30, 40, 3), np.uint8))
>>> info = probe_image(folder / "a.png")
>>> info.width, info.height, info.status
(40, 30, 'ok')
>>> decode_image(folder / "a.png").shape
(30, 40, 3)
"""

from __future__ import annotations

import logging
import math
import os
import warnings
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path

import cv2
import numpy as np
from PIL import Image, UnidentifiedImageError

from app.errors import BadInput, NotFound

log = logging.getLogger(__name__)

# Pillow refuses to open (not just to decode) an image above about 179 megapixels, a guard for
# programs that decode with it. Posewright reads only headers with Pillow and applies its own
# limit, which the user can raise above Pillow's, before OpenCV decodes anything.
Image.MAX_IMAGE_PIXELS = None
# Pillow warns about damaged Exif blocks while it parses them; for a header reader the answer
# is simply "no orientation", so those warnings would only be noise on the user's terminal.
warnings.filterwarnings("ignore", category=UserWarning, module=r"PIL\.")

#: File name endings registered as images (lower case).
IMAGE_SUFFIXES = (".jpg", ".jpeg", ".png", ".bmp", ".tif", ".tiff", ".webp")

#: Larger than any camera makes today; a bigger size means a broken header or a hostile file.
MAX_SIDE = 65_536

#: The default pixel limit, in megapixels: well above any camera frame (an 8K UHD frame is 33
#: megapixels) and, decoded as 8-bit BGR, 300 MB of memory.
DEFAULT_MAX_MEGAPIXELS = 100.0

#: The environment variable that sets the pixel limit (in megapixels).
MAX_MEGAPIXELS_ENV = "POSEWRIGHT_MAX_MEGAPIXELS"

_max_megapixels: float | None = None  # set by set_max_megapixels (the command line's option)

#: Exif Orientation -> how the stored pixels become the picture as it is meant to be seen.
_ORIENTATIONS = {
    2: lambda a: a[:, ::-1],                    # mirrored left to right
    3: lambda a: a[::-1, ::-1],                 # turned 180 degrees
    4: lambda a: a[::-1],                       # mirrored top to bottom
    5: lambda a: a.swapaxes(0, 1),              # transposed
    6: lambda a: np.rot90(a, -1),               # turned 90 degrees clockwise
    7: lambda a: a[::-1, ::-1].swapaxes(0, 1),  # transposed the other way
    8: lambda a: np.rot90(a, 1),                # turned 90 degrees anticlockwise
}


@dataclass(frozen=True)
class ImageInfo:
    """What registration learns about one image file.

    ``status`` is ``"ok"``, ``"missing"``, ``"corrupt"`` (the header cannot be read; width and
    height are 0) or ``"oversized"`` (over the pixel limit; width and height are the header's).
    ``reason`` says why an image is not ok, in words; ``orientation`` is the Exif orientation
    (1 when the file has none) that the size already takes into account.
    """

    path: Path
    width: int
    height: int
    status: str
    reason: str = ""
    orientation: int = 1


def set_max_megapixels(megapixels: float | None) -> None:
    """Set the pixel limit for this process (None: back to the environment or the default).

    Raises
    ------
    BadInput
        When the value is not a positive number.
    """
    global _max_megapixels
    if megapixels is not None:
        _check_megapixels(megapixels, "--max-megapixels")
    _max_megapixels = megapixels


def max_pixels() -> int:
    """The largest image, in pixels, that Posewright decodes: :func:`set_max_megapixels`, else
    ``$POSEWRIGHT_MAX_MEGAPIXELS``, else :data:`DEFAULT_MAX_MEGAPIXELS`.

    Examples
    --------
    >>> set_max_megapixels(2.5); max_pixels()
    2500000
    >>> set_max_megapixels(None)
    """
    megapixels = _max_megapixels
    if megapixels is None:
        text = os.environ.get(MAX_MEGAPIXELS_ENV, "").strip()
        if not text:
            megapixels = DEFAULT_MAX_MEGAPIXELS
        else:
            try:
                megapixels = float(text)
            except ValueError:
                raise BadInput(f"{text!r} is not a number of megapixels",
                               where=MAX_MEGAPIXELS_ENV) from None
            _check_megapixels(megapixels, MAX_MEGAPIXELS_ENV)
    return int(megapixels * 1_000_000)


def _check_megapixels(value: float, where: str) -> None:
    # The limit is kept in pixels: a value whose pixel count overflows a float is refused too.
    if not (math.isfinite(value * 1_000_000) and value > 0):
        raise BadInput(f"{value} is not a positive number of megapixels", where=where)


def find_images(folder: str | Path) -> list[Path]:
    """Every image file under ``folder`` (recursively), sorted by relative path."""
    folder = Path(folder)
    return sorted(_walk(folder), key=lambda p: p.relative_to(folder).as_posix())


def _walk(folder: Path) -> Iterator[Path]:
    for root, dirs, files in os.walk(folder):
        dirs[:] = sorted(d for d in dirs if not d.startswith("."))
        for name in files:
            if not name.startswith(".") and name.lower().endswith(IMAGE_SUFFIXES):
                yield Path(root) / name


def probe_image(path: str | Path) -> ImageInfo:
    """Read ``path``'s size from its header, without decoding it; never raises for a bad file.

    Returns
    -------
    ImageInfo
        Status ``"missing"`` when the file does not exist, ``"corrupt"`` when its header cannot
        be read, ``"oversized"`` when it is over :func:`max_pixels`, else ``"ok"``.

    Notes
    -----
    A file whose header is sound but whose pixel data is damaged is ``"ok"`` here; decoding it
    later fails (:func:`read_image`), and the app marks it then.
    """
    path = Path(path)
    if not path.is_file():
        return ImageInfo(path, 0, 0, "missing", "no such file")
    try:
        with Image.open(path) as image:
            width, height = image.size
            orientation = _orientation(image)
    except UnidentifiedImageError:  # its message only repeats the path, which warnings name
        return ImageInfo(path, 0, 0, "corrupt", "not an image Posewright can read")
    # Any failure of the header parser on a damaged or hostile file (Pillow raises OSError,
    # SyntaxError, ValueError, struct.error and others) means the same thing: unreadable.
    except Exception as exc:
        return ImageInfo(path, 0, 0, "corrupt", f"not an image Posewright can read ({exc})")
    if orientation in (5, 6, 7, 8):
        width, height = height, width
    if width <= 0 or height <= 0:
        return ImageInfo(path, 0, 0, "corrupt", f"its header gives an empty size "
                                                f"{width} x {height}")
    limit = max_pixels()
    if width * height > limit:
        return ImageInfo(path, width, height, "oversized",
                         f"{width} x {height} pixels ({width * height / 1e6:.0f} megapixels) is "
                         f"over the limit of {limit / 1e6:g} megapixels (raise it with "
                         f"--max-megapixels or {MAX_MEGAPIXELS_ENV})", orientation)
    return ImageInfo(path, width, height, "ok", "", orientation)


def _orientation(image: Image.Image) -> int:
    """The Exif orientation (1 to 8) that the header gives, read without decoding.

    TIFF tags are parsed when the file opens; the Exif block of JPEG, PNG and WebP files is in
    ``info`` when it comes before the pixel data (``getexif`` would decode a PNG to look
    further, so it is not called).
    """
    if image.format == "TIFF":
        value = getattr(image, "tag_v2", {}).get(0x0112, 1)
    else:
        raw = image.info.get("exif")
        if not raw:
            return 1
        exif = Image.Exif()
        exif.load(raw)
        value = exif.get(0x0112, 1)
    return int(value) if isinstance(value, int) and 1 <= value <= 8 else 1


def read_image(path: str | Path) -> np.ndarray:
    """The image as an ``(H, W, 3)`` uint8 BGR array, turned as its Exif orientation says.

    The header is read first: an image over :func:`max_pixels` is refused before a byte of its
    pixel data is decoded.

    Raises
    ------
    NotFound
        When the file does not exist.
    BadInput
        When the file is over the pixel limit, is not an image, or does not decode to the size
        its header gives (the message names the file and says which).
    """
    info = probe_image(path)
    if info.status == "missing":
        raise NotFound(f"{path}: no such image file")
    if info.status != "ok":
        raise BadInput(info.reason, where=str(path))
    try:
        data = np.fromfile(str(path), dtype=np.uint8)
    except OSError as exc:
        raise BadInput(f"cannot read the image ({exc.strerror or exc})", where=str(path)) from None
    # OpenCV turns TIFF files itself; the other formats are turned here, the same way on
    # every OpenCV version (some versions turn PNG and WebP files, some do not).
    flags = cv2.IMREAD_COLOR
    if info.orientation != 1 and Path(path).suffix.lower() not in (".tif", ".tiff"):
        flags |= cv2.IMREAD_IGNORE_ORIENTATION
    try:
        image = cv2.imdecode(data, flags) if data.size else None
    except cv2.error as exc:
        raise BadInput(f"OpenCV cannot decode the image ({' '.join(str(exc).split())[:200]})",
                       where=str(path)) from None
    if image is None or image.ndim != 3:
        raise BadInput("the image data cannot be decoded (damaged or unsupported)",
                       where=str(path))
    if flags & cv2.IMREAD_IGNORE_ORIENTATION:
        image = np.ascontiguousarray(_ORIENTATIONS[info.orientation](image))
    if image.shape[:2] != (info.height, info.width):
        raise BadInput(f"the header gives {info.width} x {info.height} pixels but the image "
                       f"decodes to {image.shape[1]} x {image.shape[0]}", where=str(path))
    return image


def decode_image(path: str | Path) -> np.ndarray | None:
    """:func:`read_image`, or ``None`` if the image cannot be read (the reason is logged)."""
    try:
        return read_image(path)
    except (BadInput, NotFound) as exc:
        log.info("image not read: %s", exc)
        return None


def unreadable_status(path: str | Path) -> str:
    """Why an image that did not decode is unreadable: ``"missing"``, ``"oversized"`` or
    ``"corrupt"`` (the frame status to record)."""
    status = probe_image(path).status
    return status if status in ("missing", "oversized") else "corrupt"
