"""Reading a zip archive that came from someone else, without trusting it.

Every check runs on the archive's directory before a single byte is inflated, and the
members are then read (never extracted by name) with their sizes and SHA-256 checked as they
stream. The archive is refused, with one line naming the zip and the member, when it:

- cannot be read as a zip at all (truncated, not a zip, a broken directory);
- has a member name that is absolute (``/x``, ``C:x``), holds a ``..`` or empty component,
  a backslash, a control character or a NUL, or repeats another member's name;
- has a member that is not a regular file (a symbolic link, a device, a folder entry);
- is encrypted or uses a compression other than stored or deflate;
- inflates past ``max_total`` bytes altogether, or has a member larger than ``max_ratio``
  times its compressed size (the mark of a zip bomb; members under ``ratio_floor`` bytes are
  exempt, since a small file of repeated text compresses very well and harms no one);
- fails its CRC while it is read.

Notes
-----
Python's :mod:`zipfile` stops a member at the size the directory declares, so the declared
sizes bound what reading can produce; the bounds are checked against those sizes before
reading and the running count is checked again while reading.

References
----------
The zip layout: PKWARE, "APPNOTE.TXT - .ZIP File Format Specification", sections 4.3 and
4.4 (local headers, central directory, external attributes: the high 16 bits hold the Unix
mode, whose file type says whether an entry is a symbolic link).
"""

from __future__ import annotations

import hashlib
import re
import stat
import zipfile
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path
from typing import IO

from app.errors import BadInput

#: Refuse archives that would inflate past this many bytes (4 GiB).
MAX_TOTAL = 4 << 30
#: Refuse members that inflate more than this many times their compressed size...
MAX_RATIO = 200
#: ...unless they inflate to less than this (1 MiB).
RATIO_FLOOR = 1 << 20

_CHUNK = 1 << 20
_ALLOWED_METHODS = (zipfile.ZIP_STORED, zipfile.ZIP_DEFLATED)
_DRIVE = re.compile(r"^[A-Za-z]:")
_CONTROL = re.compile(r"[\x00-\x1f\x7f]")


@dataclass(frozen=True)
class Limits:
    """The bounds :func:`check_archive` enforces (tests shrink them)."""

    max_total: int = MAX_TOTAL
    max_ratio: float = MAX_RATIO
    ratio_floor: int = RATIO_FLOOR


DEFAULT_LIMITS = Limits()


def check_name(name: str, where: str) -> str:
    """``name`` if it is a safe relative member name, else :class:`BadInput`.

    A safe name is relative, uses ``/`` only, and has no empty, ``.`` or ``..`` component,
    no drive letter and no control character.

    Examples
    --------
    >>> check_name("images/3.png", "p.zip")
    'images/3.png'
    >>> check_name("../x", "p.zip")
    Traceback (most recent call last):
    ...
    app.errors.BadInput: p.zip: member '../x': the name leaves the packet's folder
    """
    member = f"{where}: member {name!r}"
    if not name or _CONTROL.search(name):
        raise BadInput("the name is empty or holds a control character", where=member)
    if "\\" in name:
        raise BadInput("the name holds a backslash", where=member)
    if name.startswith("/") or _DRIVE.match(name):
        raise BadInput("the name is an absolute path", where=member)
    parts = name.split("/")
    if any(p == ".." for p in parts):
        raise BadInput("the name leaves the packet's folder", where=member)
    if any(p in ("", ".") for p in parts):
        raise BadInput("the name has an empty or '.' component", where=member)
    return name


def _file_type(info: zipfile.ZipInfo) -> int:
    return stat.S_IFMT(info.external_attr >> 16)


def check_archive(archive: zipfile.ZipFile, where: str,
                  limits: Limits | None = None) -> dict[str, zipfile.ZipInfo]:
    """Check every entry of an open archive; returns the entries by name.

    Raises
    ------
    BadInput
        On the first entry that breaks a rule of the module docstring.
    """
    limits = limits or DEFAULT_LIMITS
    entries: dict[str, zipfile.ZipInfo] = {}
    total = 0
    for info in archive.infolist():
        name = info.orig_filename
        if name != info.filename:  # zipfile cut the name at a NUL or changed a separator
            raise BadInput("the name holds a NUL or a separator of another system",
                           where=f"{where}: member {name!r}")
        check_name(name, where)
        member = f"{where}: member {name!r}"
        if name in entries:
            raise BadInput("the name appears twice", where=member)
        kind = _file_type(info)
        if kind == stat.S_IFLNK:
            raise BadInput("the member is a symbolic link", where=member)
        if info.is_dir() or (kind and kind != stat.S_IFREG):
            raise BadInput("the member is not a regular file", where=member)
        if info.flag_bits & 0x1:
            raise BadInput("the member is encrypted", where=member)
        if info.compress_type not in _ALLOWED_METHODS:
            raise BadInput(f"compression method {info.compress_type} is not stored or deflate",
                           where=member)
        size = info.file_size
        if size >= limits.ratio_floor and size > limits.max_ratio * max(info.compress_size, 1):
            raise BadInput(
                f"the member inflates {size / max(info.compress_size, 1):.0f} times "
                f"(more than {limits.max_ratio:g}); refused as a zip bomb", where=member)
        total += size
        if total > limits.max_total:
            raise BadInput(f"the archive inflates past {limits.max_total} bytes; refused",
                           where=member)
        entries[name] = info
    return entries


def open_archive(path: str | Path) -> zipfile.ZipFile:
    """Open ``path`` as a zip; :class:`BadInput` (one line) when it is not a readable zip."""
    where = str(path)
    try:
        return zipfile.ZipFile(path, "r")
    except FileNotFoundError:
        raise BadInput("no such file", where=where) from None
    except (zipfile.BadZipFile, zipfile.LargeZipFile, OSError, ValueError, EOFError) as exc:
        raise BadInput(f"not a readable zip archive ({exc})", where=where,
                       hint="is the file complete?") from None


def stream_member(archive: zipfile.ZipFile, info: zipfile.ZipInfo,
                  where: str) -> Iterator[bytes]:
    """The member's bytes in chunks, CRC checked; never more than its declared size."""
    member = f"{where}: member {info.filename!r}"
    seen = 0
    try:
        with archive.open(info, "r") as fh:
            while True:
                chunk = fh.read(_CHUNK)
                if not chunk:
                    break
                seen += len(chunk)
                if seen > info.file_size:
                    raise BadInput("the member is longer than the archive says", where=member)
                yield chunk
    except (zipfile.BadZipFile, OSError, EOFError, ValueError, NotImplementedError) as exc:
        raise BadInput(f"the member cannot be read ({exc})", where=member,
                       hint="the archive is damaged or was altered") from None
    if seen != info.file_size:
        raise BadInput("the member is shorter than the archive says", where=member)


def read_member(archive: zipfile.ZipFile, info: zipfile.ZipInfo, where: str,
                sha256: str | None = None, limit: int | None = None) -> bytes:
    """The whole member, checked against ``sha256`` (hex) when given."""
    if limit is not None and info.file_size > limit:
        raise BadInput(f"the member is {info.file_size} bytes, more than {limit} allowed",
                       where=f"{where}: member {info.filename!r}")
    digest = hashlib.sha256()
    parts = []
    for chunk in stream_member(archive, info, where):
        digest.update(chunk)
        parts.append(chunk)
    check_digest(digest.hexdigest(), sha256, info, where)
    return b"".join(parts)


def hash_member(archive: zipfile.ZipFile, info: zipfile.ZipInfo, where: str) -> str:
    """The member's SHA-256 (hex), read in chunks."""
    digest = hashlib.sha256()
    for chunk in stream_member(archive, info, where):
        digest.update(chunk)
    return digest.hexdigest()


def copy_member(archive: zipfile.ZipFile, info: zipfile.ZipInfo, where: str,
                out: IO[bytes], sha256: str) -> None:
    """Write the member to ``out``, checking its SHA-256 once the last byte is in."""
    digest = hashlib.sha256()
    for chunk in stream_member(archive, info, where):
        digest.update(chunk)
        out.write(chunk)
    check_digest(digest.hexdigest(), sha256, info, where)


def check_digest(got: str, expected: str | None, info: zipfile.ZipInfo, where: str) -> None:
    """:class:`BadInput` naming the member when ``got`` is not the ``expected`` SHA-256."""
    if expected is not None and got != expected:
        raise BadInput("the member's SHA-256 does not match the manifest",
                       where=f"{where}: member {info.filename!r}",
                       hint="the packet was altered or damaged; ask for it again")
