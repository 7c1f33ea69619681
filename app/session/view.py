"""What the Canvas shows of a frame, without Qt: its people in tag order, their flags and
colours, and the Canvas's modes.

The Canvas is a view of a :class:`View` plus gestures: it paints what the view holds and turns
clicks and keys into the view's calls (and the selection's, :mod:`app.session.selection`);
the window reads and sets the modes here. Events (:class:`app.session.events.Events`):
``people()`` when the people shown changed, ``mode()`` when a mode did.

The modes:

- *region mode*: the mouse works on ignore regions instead of joints;
- *pick*: the next click on a person picks them for an action (``"merge"``); entering region
  mode leaves it;
- *focus*: the selected person is shown in full and everyone else dimmed.

Examples
--------
>>> from app.model.labels import Person
>>> v = View(); seen = []
>>> v.events.connect("mode", lambda: seen.append(v.modes()))
>>> v.set_pick("merge"); v.set_region_mode(True)
True
>>> seen[-1], len(seen)
({'region': True, 'pick': None, 'focus': False}, 2)
>>> a, b = Person.blank(4, 17), Person.blank(9, 17)
>>> a.keypoints[0] = (0, 0, 2); b.keypoints[0] = (5, 5, 2)
>>> v.show([a, b], {}); v.colours, v.number_of(9), v.person(4) is a
({4: 0, 9: 1}, 2, True)
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any, Protocol

import numpy as np

from app.session.events import Events

#: How many people colours the Canvas has (the Okabe and Ito palette without black,
#: :data:`app.ui.overlay.PERSON_COLOURS`; tests/ui/test_overlay.py checks they agree).
PALETTE_SIZE = 7

#: What a pick waits for: ``"merge"`` (the person to merge the selected one into).
PICKS = ("merge",)


class _PersonLike(Protocol):
    id: int
    keypoints: np.ndarray


def assign_colours(people: Sequence[_PersonLike], keep: Mapping[int, int] | None = None,
                   n_colours: int = PALETTE_SIZE) -> dict[int, int]:
    """Give each person a palette index so that people close together differ in colour.

    Parameters
    ----------
    people
        The frame's people in tag order.
    keep
        Indices to keep (people already on screen keep their colour while the frame is
        edited); only the others are assigned.
    n_colours
        How many colours the palette has.

    Returns
    -------
    dict
        Person id to an index into the palette (:data:`app.ui.overlay.PERSON_COLOURS`).

    Notes
    -----
    Greedy in tag order. The distance between two people is the gap between the boxes around
    their placed joints (0 when the boxes overlap), ties broken by the distance between the box
    centres. Each person takes the colour whose nearest holder is farthest away (an unused
    colour first, the lowest index among equals), so with seven people or fewer everyone differs
    and in a crowd the repeats land far apart. Common practice for map colouring, no source.

    Examples
    --------
    >>> from app.model.labels import Person
    >>> far, near = Person.blank(1, 17), Person.blank(2, 17)
    >>> far.keypoints[0] = (0, 0, 2); near.keypoints[0] = (5, 5, 2)
    >>> assign_colours([far, near])
    {1: 0, 2: 1}
    """
    n = len(people)
    if n == 0:
        return {}
    xy = np.stack([p.keypoints[:, :2] for p in people])
    placed = np.isfinite(xy).all(axis=2, keepdims=True)
    with np.errstate(invalid="ignore"):
        lo = np.where(placed, xy, np.inf).min(axis=1)
        hi = np.where(placed, xy, -np.inf).max(axis=1)
    boxes = np.hstack([lo, hi])
    boxes[~placed.any(axis=1)[:, 0]] = np.nan
    # Pairwise box gap and centre distance, as whole arrays; unknown boxes are infinitely far.
    lo, hi = boxes[:, None, :2], boxes[:, None, 2:]
    gap_xy = np.maximum(np.maximum(lo - boxes[None, :, 2:], boxes[None, :, :2] - hi), 0)
    centres = (boxes[:, :2] + boxes[:, 2:]) / 2
    gap = np.hypot(gap_xy[..., 0], gap_xy[..., 1])
    centre = np.hypot(*(centres[:, None, :] - centres[None, :, :]).transpose(2, 0, 1))
    gap = np.where(np.isnan(gap), np.inf, gap)
    centre = np.where(np.isnan(centre), np.inf, centre)
    colour = np.full(n, -1)
    keep = keep or {}
    for i, p in enumerate(people):
        if p.id in keep:
            colour[i] = int(keep[p.id]) % n_colours
    for i in range(n):
        if colour[i] >= 0:
            continue
        held = np.flatnonzero(colour >= 0)
        # For each colour, its nearest holder (by gap, ties by centre distance) ...
        best = np.full((n_colours, 2), np.inf)
        if len(held):
            order = np.lexsort((centre[i, held], gap[i, held], colour[held]))
            ranked = held[order]
            first = np.ones(len(ranked), dtype=bool)
            first[1:] = colour[ranked][1:] != colour[ranked][:-1]
            winners = ranked[first]
            best[colour[winners]] = np.column_stack([gap[i, winners], centre[i, winners]])
        # ... and the colour whose nearest holder is farthest wins (lowest index among equals).
        order = np.lexsort((np.arange(n_colours), -best[:, 1], -best[:, 0]))
        colour[i] = int(order[0])
    return {p.id: int(colour[i]) for i, p in enumerate(people)}


class View:
    """The people the Canvas shows (ours, or the reviewer's version of a disputed frame),
    their triage flags and colours, and its modes."""

    def __init__(self, palette_size: int = PALETTE_SIZE) -> None:
        self.events = Events()
        self.palette_size = palette_size
        #: The people shown, in tag order (a person's tag is its place here, from 1).
        self.people: list[Any] = []
        #: Person id -> flagged joints (``app.ui.overlay.WHOLE_PERSON`` for the whole body).
        self.flags: dict[int, frozenset[int]] = {}
        #: Person id -> palette index; kept while the frame is edited so colours do not jump.
        self.colours: dict[int, int] = {}
        self.region_mode = False
        self.pick: str | None = None
        self.focus = False

    # ------------------------------------------------------------------ people

    def show(self, people: Sequence[Any], flags: Mapping[int, frozenset[int]],
             keep_colours: bool = True) -> None:
        """Show these people; those already shown keep their colours unless
        ``keep_colours`` is False (another frame)."""
        self.people = list(people)
        self.flags = dict(flags)
        ids = {p.id for p in self.people}
        keep = {p: c for p, c in self.colours.items() if p in ids} if keep_colours else {}
        self.colours = assign_colours(self.people, keep, self.palette_size)
        self.events.emit("people")

    def person(self, person_id: int) -> Any | None:
        """The person shown with this id, or None."""
        return next((p for p in self.people if p.id == person_id), None)

    def number_of(self, person_id: int) -> int | None:
        """The tag number of a person shown (1-based), or None."""
        return next((n + 1 for n, p in enumerate(self.people) if p.id == person_id), None)

    # ------------------------------------------------------------------ modes

    def modes(self) -> dict[str, Any]:
        """The modes as plain values."""
        return {"region": self.region_mode, "pick": self.pick, "focus": self.focus}

    def set_region_mode(self, on: bool) -> bool:
        """Enter or leave region mode (entering leaves a pick); True when it changed."""
        on = bool(on)
        if on == self.region_mode:
            return False
        self.region_mode = on
        if on:
            self.pick = None
        self.events.emit("mode")
        return True

    def set_pick(self, pick: str | None) -> None:
        """Wait for a click on a person (one of :data:`PICKS`), or stop waiting (None)."""
        if pick is not None and pick not in PICKS:
            raise ValueError(f"unknown pick {pick!r}")
        if pick != self.pick:
            self.pick = pick
            self.events.emit("mode")

    def set_focus(self, on: bool) -> None:
        """Show the selected person in full and dim the others (or stop)."""
        if bool(on) != self.focus:
            self.focus = bool(on)
            self.events.emit("mode")
