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
import re
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
    node = data
    keyed = len(path) > 1 and isinstance(path[0], str) and isinstance(path[1], int) \
        and isinstance(data, dict)
    if keyed:
        node = data.get(path[0])
    at = 1 if keyed else 0
    item = None
    if len(path) > at and isinstance(path[at], int):
        i = int(path[at])
        item = node[i] if isinstance(node, list) and 0 <= i < len(node) else None
    return describe_item(path, item, root if isinstance(data, list) else "", field)


def describe_item(path: Path_, item: Any, root: str = "", field: str = "") -> str:
    """:func:`describe` for a reader that holds only the record ``path`` goes through
    (``item``: the value at ``path[:2]`` in a top-level object, at ``path[:1]`` in a top-level
    list named ``root``).

    Examples
    --------
    >>> describe_item(("annotations", 7, "area"), {"id": 12, "area": 1})
    'annotations[7] (id 12): field area'
    >>> describe_item((3,), {"id": 2}, root="results", field="record")
    'results[3] (id 2): field record'
    """
    rest = list(path)
    record = root
    if not root and len(rest) > 1 and isinstance(rest[0], str) and isinstance(rest[1], int):
        record = str(rest.pop(0))
    if rest and isinstance(rest[0], int):
        i = int(rest.pop(0))
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


def _scan(data: Any, first_only: bool, at: Path_ = ()) -> list[tuple[Path_, float | None]]:
    """Places in ``data`` (found at ``at`` in its file) that hold a non-finite number
    ``(path, value)`` or that nest too deeply ``(path, None)``. Iterative, so any nesting is
    safe to scan."""
    found: list[tuple[Path_, float | None]] = []
    isfinite = math.isfinite
    if isinstance(data, float) and not isfinite(data):
        return [(at, data)]
    stack: list[tuple[Any, Path_]] = [(data, at)]
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


def _plainly_finite(value: Any) -> bool:
    """Whether a value is plainly free of non-finite numbers: a scalar, or a list or object
    whose members are scalars or lists of numbers with a finite sum (as most records of a
    keypoints file are). False leaves it to :func:`_scan` (it may still be fine).

    Examples
    --------
    >>> _plainly_finite({"id": 3, "keypoints": [1.5, 2, 2], "name": "x"})
    True
    >>> _plainly_finite({"keypoints": [1.5, float("nan")]}), _plainly_finite([[1], [2]])
    (False, True)
    """
    kind = type(value)
    if kind is dict:
        members = value.values()
    elif kind is list:
        members = value
    else:
        return kind is not float or math.isfinite(value)
    isfinite = math.isfinite
    for v in members:
        kind = type(v)
        if kind is list:
            try:
                if not isfinite(sum(v)):
                    return False
            except (TypeError, OverflowError):  # not all numbers, or an integer beyond any
                return False                     # float: the full scan looks
        elif kind is float:
            if not isfinite(v):
                return False
        elif kind is dict:
            return False
    return True


class JsonStream:
    """Read a large JSON file piece by piece, with the checks of :func:`parse_json`.

    A top-level object is read key by key (:meth:`members`), and any value either whole
    (:meth:`value`) or, when it is an array, item by item (:meth:`items`); so is a top-level
    array. Each value is parsed by Python's own JSON reader, the one :func:`parse_json` uses,
    from a window of the file that moves on as it is read, so memory stays within about the
    largest single item whatever the size of the file, and the same text is accepted and
    refused with the same messages (a syntax error names the line, column and character in
    the whole file). Every value read is checked for non-finite numbers and nesting as a whole
    file is, and the problem is named by record and field (:func:`describe_item`).

    Examples
    --------
    >>> import io
    >>> s = JsonStream(io.StringIO('{"info": {"v": 1}, "annotations": [{"id": 4}, {"id": 5}]}'))
    >>> for key in s.members():
    ...     print(key, s.value(key) if key != "annotations" else list(s.items(key)))
    info {'v': 1}
    annotations [{'id': 4}, {'id': 5}]
    """

    #: Characters read at a time.
    CHUNK = 1 << 20
    _WS = re.compile(r"[ \t\n\r]*")

    def __init__(self, source: str | Path | IO[str], what: str = "the file", root: str = ""):
        self.what = what
        self.root = root
        if isinstance(source, (str, Path)):
            self.where = str(source)
            try:
                self._fh: IO[str] = open(source, encoding="utf-8", newline="")  # noqa: SIM115
            except OSError as exc:
                raise BadInput(f"cannot read {what} ({exc.strerror})", where=self.where) \
                    from None
        else:
            self.where = getattr(source, "name", "the file")
            self._fh = source
        self._buf = ""
        self._pos = 0  # where reading goes on, in _buf
        self._offset = 0  # characters of the file before _buf
        self._line = 1  # line of the file where _buf starts
        self._column = 0  # characters of that line before _buf
        self._eof = False
        self._decoder = json.JSONDecoder()
        self._started = False

    def close(self) -> None:
        self._fh.close()

    def __enter__(self) -> JsonStream:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    @property
    def done(self) -> int:
        """Characters read so far (for progress)."""
        return self._offset + self._pos

    def _more(self) -> bool:
        """Read the next chunk, dropping what has been read; False at the end of the file."""
        if self._eof:
            return False
        try:
            text = self._fh.read(self.CHUNK)
        except UnicodeDecodeError as exc:
            raise BadInput(f"{self.what} is not valid JSON ({exc})", where=self.where,
                           hint="is the file complete?") from None
        except OSError as exc:
            raise BadInput(f"cannot read {self.what} ({exc.strerror})", where=self.where) \
                from None
        if not self._started:
            self._started = True
            if text.startswith("\ufeff"):
                raise self._syntax("Unexpected UTF-8 BOM (decode using utf-8-sig)", 0, text)
        if not text:
            self._eof = True
            return False
        gone = self._buf[: self._pos]
        lines = gone.count("\n")
        if lines:
            self._line += lines
            self._column = len(gone) - gone.rfind("\n") - 1
        else:
            self._column += len(gone)
        self._offset += self._pos
        self._buf = self._buf[self._pos:] + text
        self._pos = 0
        return True

    def _syntax(self, msg: str, pos: int, buf: str | None = None) -> BadInput:
        """The error :func:`parse_json` gives for a syntax error at ``pos`` of the window."""
        before = (self._buf if buf is None else buf)[:pos]
        lines = before.count("\n")
        line = self._line + lines
        column = pos - before.rfind("\n") if lines else self._column + pos + 1
        return BadInput(f"{self.what} is not valid JSON ({msg}: line {line} column {column} "
                        f"(char {self._offset + pos}))", where=self.where,
                        hint="is the file complete?")

    def _next(self) -> str:
        """The next character that is not white space ("" at the end of the file)."""
        while True:
            buf, pos = self._buf, self._pos
            if pos < len(buf):
                c = buf[pos]
                if c not in " \t\n\r":  # mostly so: no white space between a file's items
                    return c
                self._pos = pos = self._WS.match(buf, pos).end()  # type: ignore[union-attr]
                if pos < len(buf):
                    return buf[pos]
            if not self._more():
                return ""

    def _decode(self) -> Any:
        self._next()
        while True:
            try:
                value, end = self._decoder.raw_decode(self._buf, self._pos)
            except json.JSONDecodeError as exc:
                # Cut off by the window's end rather than wrong: read on and try again.
                if (exc.pos >= len(self._buf) - 16 or exc.msg.startswith("Unterminated")) \
                        and self._more():
                    continue
                raise self._syntax(exc.msg, exc.pos) from None
            except RecursionError:
                raise BadInput(f"{self.what} is nested too deeply (more than {MAX_DEPTH} "
                               "levels of arrays and objects)", where=self.where) from None
            except ValueError as exc:  # e.g. an integer of more digits than Python converts
                raise BadInput(f"{self.what} is not valid JSON ({exc})", where=self.where,
                               hint="is the file complete?") from None
            if end > len(self._buf) - 8 and self._more():
                continue  # a number cut at the window's end ("12", "1.", "1e") may go on
            self._pos = end
            return value

    def _check(self, value: Any, at: Path_) -> None:
        # The value itself, not its text: every non-finite number (NaN, Infinity, an exponent
        # or a run of digits past a double's range) is a non-finite float once read, and a
        # list of numbers is summed in one C call. A search of the text for what may read as
        # one took longer than parsing it (58 against 64 us for a 17-joint annotation).
        if len(at) + 2 < MAX_DEPTH and _plainly_finite(value):
            return
        problem = _scan(value, first_only=True, at=at)
        if problem:
            path, bad = problem[0]
            record = value  # the item of the top-level array, or of a top-level key's array
            for key in path[len(at): 1 if self.root else 2]:
                ok = (isinstance(record, list) and isinstance(key, int)) \
                    or (isinstance(record, dict) and key in record)
                record = record[key] if ok else None
            place = describe_item(path, record, self.root)
            if bad is None:
                raise BadInput(f"{place}: nested more than {MAX_DEPTH} levels deep",
                               where=self.where)
            raise BadInput(f"{place}: {_non_finite(bad)}", where=self.where)

    def kind(self) -> str:
        """``object``, ``array`` or ``value``: what the file holds at its top level."""
        c = self._next()
        if not c:
            raise self._syntax("Expecting value", self._pos)
        if c != "[":
            self.root = ""  # names only a top-level array's items
        return {"{": "object", "[": "array"}.get(c, "value")

    def value(self, *at: str | int) -> Any:
        """The next value, whole, checked; ``at`` is where it is in the file (for messages)."""
        value = self._decode()
        self._check(value, at)
        return value

    def members(self) -> Iterator[str]:
        """The keys of the top-level object; read each key's value before asking for the
        next (:meth:`value` or :meth:`items`)."""
        self._next()
        self._pos += 1
        c = self._next()
        if c == "}":
            self._pos += 1
            self._end()
            return
        while True:
            if c != '"':
                raise self._syntax("Expecting property name enclosed in double quotes",
                                   self._pos)
            key = self._decode()
            if self._next() != ":":
                raise self._syntax("Expecting ':' delimiter", self._pos)
            self._pos += 1
            yield key
            c = self._next()
            if c == ",":
                self._pos += 1
                c = self._next()
                continue
            if c == "}":
                self._pos += 1
                self._end()
                return
            raise self._syntax("Expecting ',' delimiter", self._pos)

    def items(self, *at: str) -> Iterator[Any]:
        """The items of the array that comes next (the top level, or the value of key
        ``at``), each checked (ask :meth:`is_array` first)."""
        self._next()
        self._pos += 1
        c = self._next()
        n = 0
        if c == "]":
            self._pos += 1
            if not at:
                self._end()
            return
        while True:
            if not c:
                raise self._syntax("Expecting value", self._pos)
            item = self._decode()
            self._check(item, (*at, n))
            yield item
            n += 1
            c = self._next()
            if c == ",":
                self._pos += 1
                c = self._next()
                continue
            if c == "]":
                self._pos += 1
                if not at:
                    self._end()
                return
            raise self._syntax("Expecting ',' delimiter", self._pos)

    def is_array(self) -> bool:
        """Whether the value that comes next is an array."""
        return self._next() == "["

    def _end(self) -> None:
        if self._next():
            raise self._syntax("Extra data", self._pos)


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
