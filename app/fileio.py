"""Reading and writing whole files safely: JSON read with clear errors, atomic writes.

Every JSON file Posewright reads goes through :func:`parse_json`, which refuses what the JSON
standard does not have or what would break later work, naming the file, the record and the
field: ``NaN`` and ``Infinity`` (Python's reader accepts them, and a number past the range of a
double such as ``1e309`` reads as Infinity), and nesting deeper than :data:`MAX_DEPTH`.
Everything written as JSON is checked the other way round: :func:`json_ready` turns the
non-finite numbers that a project made before these checks may hold into ``null`` and says
where they were.

An atomic write goes to a temporary file in the destination's folder, is flushed and fsynced,
and only then renamed over the destination; a reader never sees half a file and a failure
leaves the old file as it was. The temporary is claimed while it is written, and temporaries of
the same destination that a killed process left are removed first (:mod:`app.workfiles`).
"""

from __future__ import annotations

import json
import math
import os
import tempfile
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import IO, Annotated, Any

from pydantic import Field, StrictInt

from app.errors import BadInput, NotFound
from app.workfiles import Claim, sweep

#: Deepest nesting of arrays and objects accepted in a JSON file. The files Posewright reads
#: nest five or six levels; the limit keeps every later step (validation, storing, writing
#: back) far from Python's recursion limit.
MAX_DEPTH = 64

#: Largest magnitude of an id read from a file: the integers that every JSON reader holds
#: exactly (RFC 8259, section 6: -(2**53 - 1) to 2**53 - 1). It also keeps ids far inside
#: SQLite's 64-bit integers, with room for the ids derived from them.
MAX_ID = 2**53 - 1

#: An id in a JSON file, for pydantic models: an integer (not a bool) within :data:`MAX_ID`.
JsonId = Annotated[StrictInt, Field(ge=-MAX_ID, le=MAX_ID)]

Path_ = tuple[str | int, ...]


def parse_json(raw: bytes | str, where: str, what: str = "the file", root: str = "") -> Any:
    """Parse JSON text, refusing non-finite numbers and deep nesting.

    Parameters
    ----------
    raw
        The file's content (UTF-8 bytes, or text).
    where
        The file, for messages.
    what
        What the file is, for messages ("the config").
    root
        The name of the top level when it is a list ("results"), for messages.

    Returns
    -------
    Any
        The parsed value.

    Raises
    ------
    BadInput
        Not UTF-8 or not JSON; nested deeper than :data:`MAX_DEPTH`; a number that is NaN or
        infinite, named by record and field (see :func:`describe`).

    Examples
    --------
    >>> parse_json(b'{"images": [{"id": 4, "area": NaN}]}', "a.json")
    Traceback (most recent call last):
    ...
    app.errors.BadInput: a.json: images[0] (id 4): field area: NaN is not a finite number
    """
    try:
        data = json.loads(raw.decode("utf-8") if isinstance(raw, bytes) else raw)
    except RecursionError:
        raise BadInput(f"{what} is nested too deeply (more than {MAX_DEPTH} levels of arrays "
                       "and objects)", where=where) from None
    except (ValueError, UnicodeDecodeError) as exc:  # JSONDecodeError is a ValueError
        raise BadInput(f"{what} is not valid JSON ({exc})", where=where,
                       hint="is the file complete?") from None
    problem = _scan(data, first_only=True)
    if problem:
        path, value = problem[0]
        if value is None:
            raise BadInput(f"{describe(path, data, root)}: nested more than {MAX_DEPTH} levels "
                           "deep", where=where)
        raise BadInput(f"{describe(path, data, root)}: {_non_finite(value)}", where=where)
    return data


def read_json(path: str | Path, what: str = "the file", root: str = "") -> Any:
    """Read and parse a JSON file with :func:`parse_json`; :class:`BadInput` naming the file
    when it is unreadable.

    Examples
    --------
    >>> read_json("/nonexistent/x.json")
    Traceback (most recent call last):
    ...
    app.errors.BadInput: /nonexistent/x.json: cannot read the file (No such file or directory)
    """
    path = Path(path)
    try:
        raw = path.read_bytes()
    except OSError as exc:
        raise BadInput(f"cannot read {what} ({exc.strerror})", where=str(path)) from None
    return parse_json(raw, str(path), what, root)


def describe(path: Path_, data: Any, root: str = "", field: str = "") -> str:
    """Name the place ``path`` points to in ``data``: the record (a top-level list's item, with
    its id when it has one) and the field within it (``field`` when the path ends at the
    record).

    Examples
    --------
    >>> ds = {"annotations": [{"id": 5000, "bbox": [1, 2, 3, 4]}], "info": {"year": 1}}
    >>> describe(("annotations", 0, "bbox", 2), ds)
    'annotations[0] (id 5000): field bbox.2'
    >>> describe(("info", "year"), ds)
    'field info.year'
    >>> describe((3, "score"), [{}] * 4, root="results")
    'results[3]: field score'
    """
    rest = list(path)
    record = root if isinstance(data, list) else ""
    node = data
    if len(rest) > 1 and isinstance(rest[0], str) and isinstance(rest[1], int) \
            and isinstance(node, dict):
        record = str(rest.pop(0))
        node = node.get(record)
    if rest and isinstance(rest[0], int):
        i = int(rest.pop(0))
        item = node[i] if isinstance(node, list) and 0 <= i < len(node) else None
        ident = item.get("id") if isinstance(item, dict) else None
        record = f"{record}[{i}]" + (f" (id {ident})" if isinstance(ident, int) else "")
    name = ".".join(str(p) for p in rest) or field
    return ": ".join(part for part in (record, name and f"field {name}") if part) \
        or "the top level"


def json_ready(data: Any) -> tuple[Any, list[Path_]]:
    """``data`` with every NaN or infinite number replaced by ``None``, and where they were.

    When there is something to replace, the result is a copy made through JSON: tuples become
    lists and values JSON has no type for become their ``str``.

    Examples
    --------
    >>> json_ready({"area": float("inf"), "bbox": [1.0, float("nan")], "n": 2})
    ({'area': None, 'bbox': [1.0, None], 'n': 2}, [('area',), ('bbox', 1)])
    """
    found = [path for path, value in _scan(data, first_only=False) if value is not None]
    if not found:
        return data, []
    clean = json.loads(json.dumps(data, allow_nan=True, default=str),
                       parse_constant=lambda _name: None)
    return clean, found


def _non_finite(value: float) -> str:
    if math.isnan(value):
        return "NaN is not a finite number"
    return (f"{'-' if value < 0 else ''}Infinity is not a finite number (numbers past "
            "±1.8e308, such as 1e309, read as Infinity)")


def _scan(data: Any, first_only: bool) -> list[tuple[Path_, float | None]]:
    """Places in ``data`` that hold a non-finite number ``(path, value)`` or that nest too
    deeply ``(path, None)``. Iterative, so any nesting is safe to scan."""
    found: list[tuple[Path_, float | None]] = []
    isfinite = math.isfinite
    stack: list[tuple[Any, Path_]] = [(data, ())]
    while stack:
        node, path = stack.pop()
        if not isinstance(node, (list, tuple, dict)):
            continue
        if len(path) >= MAX_DEPTH:
            found.append((path, None))
            if first_only:
                return found
            continue
        if isinstance(node, dict):
            items: Any = node.items()
        else:
            try:  # a list of finite numbers (most of a keypoints file) in one C call
                if isfinite(sum(node)):
                    continue
            except (TypeError, OverflowError):
                pass
            items = enumerate(node)
        children = []
        for key, value in items:
            if isinstance(value, (list, tuple, dict)):
                children.append((value, (*path, key)))
            elif isinstance(value, float) and not isfinite(value):
                found.append(((*path, key), value))
                if first_only:
                    return found
        stack.extend(reversed(children))
    return found


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


def write_json_atomic(path: str | Path, data: Any, indent: int | None = None) -> None:
    """Write ``data`` as JSON to ``path`` atomically (compact unless ``indent`` is given).

    Raises
    ------
    BadInput
        When ``data`` holds a NaN or infinite number, naming where (mend it first with
        :func:`json_ready`).
    """
    found = _scan(data, first_only=True)
    path_, value = found[0] if found else ((), None)
    if value is not None:
        raise BadInput(f"{describe(path_, data)}: {_non_finite(value)}; nothing was written",
                       where=str(path))
    separators = (",", ":") if indent is None else None
    with atomic_write(path, "w", encoding="utf-8") as fh:
        json.dump(data, fh, separators=separators, indent=indent, allow_nan=False)
