"""The walk: from one problem to the next, across frames in Worklist order.

A :class:`Stop` is one place the walk stops at: a finding (with its proposed fix, if any), or,
in a project whose frames have no findings, one of triage's reasons about a person. A
:class:`Walk` is the cursor: :meth:`Walk.step` goes to the next (or previous) stop, within the
frame first and then through the frames in the order the Worklist shows them. The stops of a
frame come from a function the owner of the walk gives (:class:`app.session.Session` reads
them from the project), so the walk itself knows nothing of the store.

When the stop under the cursor goes away (its fix was accepted, or it was dismissed), the
cursor keeps its place in the frame's list: the next step forward lands on the stop that came
after it.

Examples
--------
Synthetic stops in two frames (frame 7 shown first in the Worklist, then frame 3):

>>> stops = {7: [Stop(7, "a", 1, (9,), "one"), Stop(7, "b", 2, (), "two")],
...          3: [Stop(3, "c", 5, (0,), "three")]}
>>> walk = Walk(lambda: [7, 3], lambda f: stops[f])
>>> [walk.step(1, 7).key for _ in range(3)], walk.step(1, 3)
(['a', 'b', 'c'], None)
>>> walk.step(-1, 3).key
'b'
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass

from app.analysis.triage.findings import Finding, Fix


@dataclass(frozen=True)
class Stop:
    """One place the walk stops at.

    Attributes
    ----------
    frame_id
        The frame.
    key
        Unique within the frame: the finding's id, or ``R<n>`` for triage's n-th reason.
    person_id
        The person concerned (None for one nobody labelled yet, e.g. a missed person).
    joints
        The joints concerned (skeleton indices; empty for the whole person).
    text
        One sentence naming the person by tag and the joints by name.
    finding
        The finding, when the stop is one (None for a triage reason).
    """

    frame_id: int
    key: str
    person_id: int | None
    joints: tuple[int, ...]
    text: str
    finding: Finding | None = None

    @property
    def fix(self) -> Fix | None:
        """The proposed fix, or None."""
        return None if self.finding is None else self.finding.fix

    @property
    def people(self) -> tuple[int, ...]:
        """Every person the stop is about (the fix's people for a finding)."""
        if self.finding is not None:
            return self.finding.people
        return () if self.person_id is None else (self.person_id,)


class Walk:
    """A cursor over the stops of every frame.

    Parameters
    ----------
    order
        Gives the frame ids in the order the Worklist shows them (filters applied).
    stops
        Gives one frame's stops, worst first.
    """

    def __init__(self, order: Callable[[], Sequence[int]],
                 stops: Callable[[int], Sequence[Stop]]):
        self._order = order
        self._stops = stops
        self.current: Stop | None = None
        self._snapshot: list[int] | None = None
        #: Where the cursor is in its frame's list (kept when its stop goes away).
        self._index = 0

    def step(self, step: int, shown: int | None) -> Stop | None:
        """Go to the next (``step`` 1) or previous (-1) stop and return it; None at the end
        (the cursor then stays where it was).

        ``shown`` is the frame on screen: when the annotator has gone to another frame than
        the cursor's, the walk starts there (at its first stop going forward, at the stop
        before it going back).
        """
        moved_by_hand = self.current is not None and self.current.frame_id != shown
        if self._snapshot is None or moved_by_hand:
            # The order is taken once per walk: frames that get corrected sink in the
            # Worklist, and following them there would skip the frames they pass.
            self._snapshot = list(self._order())
        order = self._snapshot
        if not order:
            return None
        if self.current is not None and self.current.frame_id == shown:
            frame = shown
            keys = [s.key for s in self._stops(frame)]
            if self.current.key in keys:
                index = keys.index(self.current.key) + step
            else:  # gone: the next one forward is the one that took its place
                index = self._index if step > 0 else self._index - 1
        else:
            frame = shown if shown in order else order[0 if step > 0 else -1]
            index = 0 if step > 0 else -1
            if step < 0 and frame in order:
                # Going back from a frame: its own stops come first, from its last.
                index = len(self._stops(frame)) - 1
        for _ in range(len(order) + 1):
            found = list(self._stops(frame))
            if 0 <= index < len(found):
                self.current, self._index = found[index], index
                return self.current
            at = order.index(frame) if frame in order else -1
            nxt = at + (1 if step > 0 else -1)
            if not 0 <= nxt < len(order):
                return None
            frame = order[nxt]
            index = 0 if step > 0 else len(self._stops(frame)) - 1
        return None

    def forget(self) -> None:
        """Let the next step start from the frame on screen (in the same order)."""
        self.current = None
        self._index = 0

    def restart(self) -> None:
        """Start again from the frame on screen, in the order the Worklist shows now."""
        self.forget()
        self._snapshot = None
