"""Sequences: which frames follow one another, so that people can be followed across them.

A *sequence* is the frames of one video, in the order of their index in it, or the images of
one folder, in the natural order of their file names (``frame_2`` before ``frame_10``). A
folder of unrelated photographs is not a sequence: the project setting
:data:`NOT_SEQUENCES` lists such folders (``posewright track PROJECT --not-a-sequence
FOLDER``), and their frames are never linked.

Examples
--------
>>> from app.model.labels import Frame
>>> frames = [Frame(1, "img/a/f10.jpg", "a/f10.jpg", 9, 9),
...           Frame(2, "img/a/f2.jpg", "a/f2.jpg", 9, 9), Frame(3, "img/b/x.jpg", "b/x.jpg", 9, 9)]
>>> [(s.key, s.frame_ids) for s in sequences(frames)]
[('a', (2, 1)), ('b', (3,))]
>>> [(s.key, s.frame_ids) for s in sequences(frames, not_sequences={"a"})]
[('b', (3,))]
"""

from __future__ import annotations

import json
import re
from collections.abc import Collection, Iterable
from dataclasses import dataclass
from pathlib import PurePosixPath

from app.model.labels import Frame

#: The project setting (a JSON list of folder keys) naming folders that are not sequences.
NOT_SEQUENCES = "not_sequences"


@dataclass(frozen=True)
class Sequence:
    """The frames of one video or image folder, in order.

    Attributes
    ----------
    key
        The folder the frames are in: for a video the folder its frames were extracted to
        (``frames/<video name>``), for images the folder of their file names relative to the
        images folder (``""`` for the images folder itself).
    frame_ids
        The frames in order.
    video
        Whether the frames came from a video.
    """

    key: str
    frame_ids: tuple[int, ...]
    video: bool = False


def natural_key(name: str) -> tuple[tuple[int, int | str], ...]:
    """A sort key that orders the digits in a name by their value.

    Examples
    --------
    >>> sorted(["f10.jpg", "f2.jpg", "F1.jpg"], key=natural_key)
    ['F1.jpg', 'f2.jpg', 'f10.jpg']
    """
    parts = re.split(r"(\d+)", name.lower())
    return tuple((0, int(p)) if p.isdigit() else (1, p) for p in parts if p)


def sequence_key(frame: Frame) -> str:
    """The folder that makes ``frame``'s sequence (see :class:`Sequence`)."""
    if frame.video_index is not None:
        return str(PurePosixPath(frame.path.replace("\\", "/")).parent)
    parent = str(PurePosixPath(frame.file_name.replace("\\", "/")).parent)
    return "" if parent == "." else parent


def sequences(frames: Iterable[Frame], not_sequences: Collection[str] = ()) -> list[Sequence]:
    """The project's sequences, by key; frames in folders named in ``not_sequences`` are left
    out (they belong to no sequence)."""
    groups: dict[tuple[str, bool], list[Frame]] = {}
    for f in frames:
        key = sequence_key(f)
        if key in not_sequences:
            continue
        groups.setdefault((key, f.video_index is not None), []).append(f)
    out = []
    for (key, video), members in sorted(groups.items()):
        if video:
            members.sort(key=lambda f: (f.video_index, f.id))
        else:
            members.sort(key=lambda f: (natural_key(PurePosixPath(f.file_name).name), f.id))
        out.append(Sequence(key, tuple(f.id for f in members), video))
    return out


def parse_not_sequences(text: str | None) -> set[str]:
    """The folders the project setting :data:`NOT_SEQUENCES` names (empty when unset)."""
    if not text:
        return set()
    value = json.loads(text)
    return {str(v) for v in value} if isinstance(value, list) else set()
