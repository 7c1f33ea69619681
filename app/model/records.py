"""Review records kept beside the labels: packets sent and merged, the reviewer's versions of
disputed people, and the reviewer's decisions on frames. Plain data; the store keeps them
(:mod:`app.store.reviews`) and :mod:`app.review` gives them their meaning."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from app.model.labels import Person

#: A reviewer's decisions on a frame: the labels look right; the labels are queried (the
#: frame comes back disputed); the frame is ready for training (it comes back signed off).
#: None repeats the name of a frame state.
DECISIONS = ("looks-right", "query", "ready")
#: The decisions as version 0.1.0 wrote them into review projects and returned packets;
#: they are read as today's (see :class:`FrameDecision`).
OLD_DECISIONS = {"agree": "looks-right", "needs-change": "query", "signed-off": "ready"}


@dataclass(frozen=True)
class FrameDecision:
    """The reviewer's decision on a frame, one of :data:`DECISIONS` (an old spelling from
    :data:`OLD_DECISIONS` is read as today's).

    Examples
    --------
    >>> FrameDecision(3, "needs-change", "bea", 0.0).decision
    'query'
    """

    frame_id: int
    decision: str
    author: str
    time: float

    def __post_init__(self) -> None:
        object.__setattr__(self, "decision", OLD_DECISIONS.get(self.decision, self.decision))


@dataclass(frozen=True)
class Alternative:
    """The reviewer's version of one person of a disputed frame.

    ``theirs`` is None when the reviewer deleted the person; ``kind`` is ``joints`` (both
    changed joints differently), ``deleted-here`` (we deleted, they edited) or
    ``deleted-there`` (they deleted, we edited). ``kept`` are the joints settled by keeping
    ours.
    """

    id: int
    frame_id: int
    person_id: int
    packet_id: str
    reviewer: str
    kind: str
    base: Person | None
    theirs: Person | None
    kept: frozenset[int]
    created: float


@dataclass(frozen=True)
class PacketRecord:
    """A review packet this project sent (``direction`` ``exported``) or a return of one it
    merged (``merged``): the SHA-256 of its labels, the reviewer, when, its frames, a report
    (JSON-ready) and, for a return, the reviewer's ledger rows (``audit``)."""

    packet_id: str
    direction: str
    sha256: str
    reviewer: str
    time: float
    frames: tuple[int, ...]
    report: dict[str, Any]
    audit: tuple[dict[str, Any], ...] = ()
