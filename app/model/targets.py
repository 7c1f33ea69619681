"""What a change touches: small typed values, one class per kind of target.

Every :class:`~app.model.edits.Change` names its target with one of these, and the store's
ledger keeps it in structured columns (``target_kind``, ``person_id``, ``joint``, ``item_id``,
``target_key``; see :func:`to_columns`), so a question such as "who last changed joint 9 of
person 12" is one indexed lookup. Each target also has a short text, the one the ledger has
always shown (``person:12/joint:9``, ``state``, ``note:3``), which :func:`parse_target` reads
back.

Targets and the values their changes carry (all JSON-ready):

- :class:`PersonTarget`: the whole person (:meth:`app.model.labels.Person.to_value`) or
  ``None`` when absent.
- :class:`JointTarget`: ``[x, y, v, score, source]`` of one joint of an existing person.
- :class:`TrackTarget`: ``[track id or None, who set it]`` of one existing person.
- :class:`StateTarget`: the frame's state, a :class:`~app.model.labels.FrameState` value.
- :class:`NoteTarget`: a note's value or ``None``.
- :class:`RegionTarget`: an ignore region's value or ``None``.
- :class:`KeptTarget`: the sorted joints of the reviewer's version settled as ours.
- :class:`DismissalTarget`: a finding dismissed as not a problem (``{"kind", "finding",
  "text", "author", "time"}``) or ``None``, keyed by the fingerprint of the labels it was
  about.
- :class:`RecordTarget`: what a bulk ledger entry (an import, a packet) was about, such as
  ``file:labels.json``; it carries a count summary, never labels, and is never undone.

Examples
--------
>>> str(JointTarget(12, 9)), parse_target("person:12/joint:9")
('person:12/joint:9', JointTarget(person=12, joint=9))
>>> to_columns(NoteTarget(3)), from_columns("note", None, None, 3, None)
(('note', None, None, 3, None), NoteTarget(note=3))
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import ClassVar

from app.errors import PosewrightError


@dataclass(frozen=True)
class PersonTarget:
    """A whole person."""

    person: int
    kind: ClassVar[str] = "person"

    def __str__(self) -> str:
        return f"person:{self.person}"


@dataclass(frozen=True)
class JointTarget:
    """One joint of one person."""

    person: int
    joint: int
    kind: ClassVar[str] = "joint"

    def __str__(self) -> str:
        return f"person:{self.person}/joint:{self.joint}"


@dataclass(frozen=True)
class TrackTarget:
    """The track label of one person (who they are across the frames of a sequence)."""

    person: int
    kind: ClassVar[str] = "track"

    def __str__(self) -> str:
        return f"person:{self.person}/track"


@dataclass(frozen=True)
class StateTarget:
    """The frame's state in the correction loop."""

    kind: ClassVar[str] = "state"

    def __str__(self) -> str:
        return "state"


@dataclass(frozen=True)
class NoteTarget:
    """One note of the frame's thread."""

    note: int
    kind: ClassVar[str] = "note"

    def __str__(self) -> str:
        return f"note:{self.note}"


@dataclass(frozen=True)
class RegionTarget:
    """One ignore region."""

    region: int
    kind: ClassVar[str] = "region"

    def __str__(self) -> str:
        return f"region:{self.region}"


@dataclass(frozen=True)
class KeptTarget:
    """The joints of one reviewer's version that were settled by keeping ours."""

    alternative: int
    kind: ClassVar[str] = "kept"

    def __str__(self) -> str:
        return f"kept:{self.alternative}"


@dataclass(frozen=True)
class DismissalTarget:
    """A finding dismissed as not a problem, by the fingerprint of the labels it was about."""

    key: str
    kind: ClassVar[str] = "dismissal"

    def __str__(self) -> str:
        return f"dismissal:{self.key}"


@dataclass(frozen=True)
class RecordTarget:
    """What a bulk ledger entry was about (``file:labels.json``, ``packet:ID``, ``project``)."""

    what: str
    kind: ClassVar[str] = "record"

    def __str__(self) -> str:
        return self.what


Target = (PersonTarget | JointTarget | TrackTarget | StateTarget | NoteTarget | RegionTarget
          | KeptTarget | DismissalTarget | RecordTarget)

#: The targets whose value is keyed by one integer id, by kind.
_BY_ITEM: dict[str, type[NoteTarget] | type[RegionTarget] | type[KeptTarget]] = {
    "note": NoteTarget, "region": RegionTarget, "kept": KeptTarget}

Columns = tuple[str, int | None, int | None, int | None, str | None]


def to_columns(target: Target) -> Columns:
    """``(target_kind, person_id, joint, item_id, target_key)`` as the ledger stores them."""
    if isinstance(target, JointTarget):
        return ("joint", target.person, target.joint, None, None)
    if isinstance(target, PersonTarget):
        return ("person", target.person, None, None, None)
    if isinstance(target, TrackTarget):
        return ("track", target.person, None, None, None)
    if isinstance(target, StateTarget):
        return ("state", None, None, None, None)
    if isinstance(target, NoteTarget):
        return ("note", None, None, target.note, None)
    if isinstance(target, RegionTarget):
        return ("region", None, None, target.region, None)
    if isinstance(target, KeptTarget):
        return ("kept", None, None, target.alternative, None)
    if isinstance(target, DismissalTarget):
        return ("dismissal", None, None, None, target.key)
    return ("record", None, None, None, target.what)


def from_columns(kind: str, person: int | None, joint: int | None, item: int | None,
                 key: str | None) -> Target:
    """The target that :func:`to_columns` stored."""
    if kind == "joint" and person is not None and joint is not None:
        return JointTarget(int(person), int(joint))
    if kind == "person" and person is not None:
        return PersonTarget(int(person))
    if kind == "track" and person is not None:
        return TrackTarget(int(person))
    if kind == "state":
        return StateTarget()
    if kind in _BY_ITEM and item is not None:
        return _BY_ITEM[kind](int(item))
    if kind == "dismissal" and key:
        return DismissalTarget(key)
    if kind == "record":
        return RecordTarget(key or "")
    raise PosewrightError(f"ledger target of kind {kind!r} is incomplete")


def parse_target(text: str) -> Target:
    """Read the text of a change's target (the ledger's text before schema 4)."""
    if text == "state":
        return StateTarget()
    parts = text.split("/")
    kind, _, ident = parts[0].partition(":")
    if kind == "person" and parts[1:] == ["track"] and ident.isdigit():
        return TrackTarget(int(ident))
    if kind == "person" and len(parts) == 2 and ident.isdigit():
        return JointTarget(int(ident), int(parts[1].partition(":")[2]))
    if kind == "person" and ident.isdigit():
        return PersonTarget(int(ident))
    if kind in _BY_ITEM and ident.isdigit():
        return _BY_ITEM[kind](int(ident))
    if kind == "dismissal" and ident:
        return DismissalTarget(ident)
    return RecordTarget(text)
