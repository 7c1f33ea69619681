"""Reading and writing whole files safely: JSON read with clear errors, atomic writes.

An atomic write goes to a temporary file in the destination's folder, is flushed and fsynced,
and only then renamed over the destination; a reader never sees half a file and a failure
leaves the old file as it was. The temporary is claimed while it is written, and temporaries of
the same destination that a killed process left are removed first (:mod:`app.workfiles`).
"""

from __future__ import annotations

import json
import os
import tempfile
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import IO, Any

from app.errors import BadInput, NotFound
from app.workfiles import Claim, sweep


def read_json(path: str | Path, what: str = "the file") -> Any:
    """Parse a JSON file; :class:`BadInput` naming the file when it is unreadable or not JSON.

    Examples
    --------
    >>> read_json("/nonexistent/x.json")
    Traceback (most recent call last):
    ...
    app.errors.BadInput: /nonexistent/x.json: cannot read the file (No such file or directory)
    """
    path = Path(path)
    try:
        return json.loads(path.read_text(encoding="utf-8"))
    except OSError as exc:
        raise BadInput(f"cannot read {what} ({exc.strerror})", where=str(path)) from None
    except (json.JSONDecodeError, UnicodeDecodeError) as exc:
        raise BadInput(f"{what} is not valid JSON ({exc})", where=str(path),
                       hint="is the file complete?") from None


@contextmanager
def atomic_write(path: str | Path, mode: str = "wb", **open_args: Any) -> Iterator[IO[Any]]:
    """Yield a file to write ``path``'s new content into; it replaces ``path`` only when the
    block succeeds (see the module docstring)."""
    path = Path(path)
    folder = path.parent if str(path.parent) else Path(".")
    if not folder.is_dir():
        raise NotFound(f"{path}: the folder {folder} does not exist")
    sweep(path, ".tmp")
    try:
        fd, tmp = tempfile.mkstemp(prefix=path.name + ".", suffix=".tmp", dir=folder)
    except OSError as exc:
        raise BadInput(f"cannot write here ({exc.strerror})", where=str(path)) from None
    try:
        with Claim(tmp):
            with os.fdopen(fd, mode, **open_args) as fh:
                yield fh
                fh.flush()
                os.fsync(fh.fileno())
            os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


def write_json_atomic(path: str | Path, data: Any) -> None:
    """Write ``data`` as compact JSON to ``path`` atomically (NaN refused)."""
    with atomic_write(path, "w", encoding="utf-8") as fh:
        json.dump(data, fh, separators=(",", ":"), allow_nan=False)
