"""Claims on frames: in a hosted project, which frame each annotator is working on.

A claim is taken when an annotator opens a frame and renewed by their activity on it; it runs
out :data:`CLAIM_SECONDS` after the last renewal. Each annotator holds at most one claim.
Times are the database server's, so that clients whose clocks disagree still agree on which
claims stand.
"""

from __future__ import annotations

from dataclasses import dataclass

from app.store.db import Tx

#: How long a claim stands without activity (common practice for "someone is on this": a few
#: minutes; no source).
CLAIM_SECONDS = 300.0


@dataclass(frozen=True)
class Claim:
    """Annotator ``author`` is working on frame ``frame_id`` until ``expires`` (seconds since
    the epoch, server time)."""

    frame_id: int
    author: str
    expires: float


class ClaimsGateway:
    def __init__(self, tx: Tx):
        self._tx = tx

    def _now(self) -> float:
        return float(self._tx.value("SELECT extract(epoch FROM clock_timestamp())"))

    def standing(self) -> dict[int, Claim]:
        """The claims that have not run out, by frame id."""
        now = self._now()
        return {r[0]: Claim(r[0], r[1], float(r[2])) for r in self._tx.rows(
            "SELECT frame_id, author, expires FROM claims WHERE expires > ?", (now,))}

    def take(self, frame_id: int, author: str, seconds: float = CLAIM_SECONDS) -> Claim | None:
        """Claim ``frame_id`` for ``author`` (giving up their other claims) unless another
        annotator's claim on it stands; returns the claim that stands on the frame now."""
        now = self._now()
        self._tx.run("DELETE FROM claims WHERE author = ? AND frame_id != ?",
                     (author, int(frame_id)))
        self._tx.run(
            "INSERT INTO claims (frame_id, author, expires) VALUES (?, ?, ?) "
            "ON CONFLICT (frame_id) DO UPDATE SET author = excluded.author, "
            "expires = excluded.expires WHERE claims.author = excluded.author "
            "OR claims.expires <= ?", (int(frame_id), author, now + seconds, now))
        row = self._tx.row("SELECT frame_id, author, expires FROM claims WHERE frame_id = ?",
                           (int(frame_id),))
        return None if row is None else Claim(row[0], row[1], float(row[2]))

    def renew(self, frame_id: int, author: str, seconds: float = CLAIM_SECONDS) -> None:
        """Extend ``author``'s claim on ``frame_id``, if they hold it (an edit's transaction
        does this; it touches no other claim, so two editors never wait on each other in a
        circle)."""
        self._tx.run("UPDATE claims SET expires = extract(epoch FROM clock_timestamp()) + ? "
                     "WHERE frame_id = ? AND author = ?", (seconds, int(frame_id), author))

    def release(self, author: str) -> list[int]:
        """Give up ``author``'s claims; returns the frames they were on."""
        frames = [r[0] for r in self._tx.rows("SELECT frame_id FROM claims WHERE author = ?",
                                              (author,))]
        self._tx.run("DELETE FROM claims WHERE author = ?", (author,))
        return frames
