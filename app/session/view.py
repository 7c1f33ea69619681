"""What the Canvas shows of a frame, without Qt: its people in tag order, their flags and
colours, the Canvas's modes, and on a disputed frame which version is shown.

The Canvas is a view of a :class:`View` plus gestures: it paints what the view holds and turns
clicks and keys into the view's calls (and the selection's, :mod:`app.session.selection`);
the window reads and sets the modes here. Events (:class:`app.session.events.Events`):
``people()`` when the people shown changed (another frame, an edit, the other version of a
disputed frame), ``mode()`` when a mode did, ``dispute()`` when a disputed frame's marks, its
reviewer or the version shown did.

A *disputed* frame has two versions: ours (the project's labels) and the reviewer's
(:attr:`View.theirs`, read by :meth:`app.session.session.Session.read_dispute`). The view
holds both with their difference marks, shows ours unless asked for the reviewer's
(:meth:`View.show_theirs`), and shows ours again by itself when the dispute goes away.

The modes:

- *region mode*: the mouse works on ignore regions instead of joints (the frame's regions
  and the one selected are the view's: :meth:`View.set_regions`; leaving drops the
  selection); it and the reviewer's version exclude each other (entering one leaves the
  other);
- *pick*: the next click on a person picks them for an action (``"merge"``); entering region
  mode leaves it;
- *focus*: the selected person is shown in full and everyone else dimmed;
- what else is drawn: joints not labelled, the tags, a review packet's blurred regions
  (:meth:`View.set_shown`).

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

A disputed frame: the reviewer moved person 9's first joint.

>>> b2 = Person.blank(9, 17); b2.keypoints[0] = (8, 5, 2)
>>> v.set_dispute([a, b2], {(9, 0): (8.0, 5.0)}, {(9, 0): (5.0, 5.0)}, "bea")
>>> v.show_theirs(True), v.person(9) is b2, v.marks, v.ours[1] is b
(True, True, {(9, 0): (5.0, 5.0)}, True)
>>> v.set_dispute(None); v.showing_theirs, v.person(9) is b, v.marks
(False, True, {})
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any, Protocol

import numpy as np

from app.session.events import Events

#: How many people colours the Canvas has (the Okabe and Ito palette without black,
#: :data:`app.ui.overlay.PERSON_COLOURS`; tests/ui/test_overlay.py checks they agree).
PALETTE_SIZE = 7

#: The joint index that stands for "the whole person" in :attr:`View.flags` (and in the
#: painter's flags, :attr:`app.ui.overlay.OverlayStyle.flags`).
WHOLE_PERSON = -1

#: What the Canvas can draw or not besides the people (:meth:`View.set_shown`).
SHOWN = ("unlabeled", "tags", "blurred")

#: What a pick waits for: ``"merge"`` (the person to merge the selected one into).
PICKS = ("merge",)

#: Difference marks of a disputed frame: ``(person id, joint)`` of a joint that differs ->
#: where the other version has it (image pixels), None when it is not labelled there.
Marks = dict[tuple[int, int], tuple[float, float] | None]


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
    their triage flags and colours, its modes, and a disputed frame's two versions."""

    def __init__(self, palette_size: int = PALETTE_SIZE) -> None:
        self.events = Events()
        self.palette_size = palette_size
        #: The people shown, in tag order (a person's tag is its place here, from 1).
        self.people: list[Any] = []
        #: Person id -> flagged joints (:data:`WHOLE_PERSON` for the whole body).
        self.flags: dict[int, frozenset[int]] = {}
        #: Person id -> palette index; kept while the frame is edited so colours do not jump.
        self.colours: dict[int, int] = {}
        self.region_mode = False
        #: The frame's ignore regions ``(id, polygons)`` in image pixels
        #: (:meth:`set_regions`), and the one selected in region mode.
        self.regions: list[tuple[int, Any]] = []
        self.selected_region: int | None = None
        self.pick: str | None = None
        self.focus = False
        #: What else is drawn (:data:`SHOWN`, :meth:`set_shown`): joints not labelled (at
        #: their remembered place), the people's tags, a review packet's blurred regions.
        self.show_unlabeled = False
        self.show_tags = True
        self.show_blurred = True
        #: Our people of the frame, in tag order (what :attr:`people` holds unless the
        #: reviewer's version is shown).
        self.ours: list[Any] = []
        #: A disputed frame: the reviewer's people (in our tag order; someone they deleted is
        #: an empty placeholder, so tags stay put), None when the frame is not in dispute.
        self.theirs: list[Any] | None = None
        #: The marks on our joints that differ (where the reviewer has each) ...
        self.ours_marks: Marks = {}
        #: ... and on the reviewer's (where we have each).
        self.theirs_marks: Marks = {}
        #: Who reviewed it, as a sentence names them ("" when not in dispute).
        self.reviewer = ""
        #: Whether the reviewer's version is the one shown (read-only: nothing is edited).
        self.showing_theirs = False

    # ------------------------------------------------------------------ people

    def open(self, people: Sequence[Any], flags: Mapping[int, frozenset[int]]) -> None:
        """Another frame: its people, colours given anew, no regions (until
        :meth:`set_regions`), no dispute (until :meth:`set_dispute`), ours shown."""
        disputed = self.theirs is not None or bool(self.ours_marks)
        self.regions, self.selected_region = [], None
        self.theirs, self.ours_marks, self.theirs_marks = None, {}, {}
        self.reviewer, self.showing_theirs = "", False
        self.show(people, flags, keep_colours=False)
        if disputed:
            self.events.emit("dispute")

    def show(self, people: Sequence[Any], flags: Mapping[int, frozenset[int]],
             keep_colours: bool = True) -> None:
        """Our people of the frame (after an edit): shown unless the reviewer's version is;
        those already shown keep their colours unless ``keep_colours`` is False."""
        self.ours = list(people)
        self.flags = dict(flags)
        self._present(keep_colours)

    def _present(self, keep_colours: bool = True) -> None:
        """Show ours, or the reviewer's version when asked."""
        shown = self.theirs if self.showing_theirs and self.theirs is not None else self.ours
        self.people = list(shown)
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
        """Enter or leave region mode; True when it changed. Entering leaves a pick, and
        shows ours if the reviewer's version was shown (regions are drawn on ours)."""
        on = bool(on)
        if on == self.region_mode:
            return False
        if on and self.showing_theirs:
            self.show_theirs(False)
        self.region_mode = on
        if on:
            self.pick = None
        else:
            self.selected_region = None
        self.events.emit("mode")
        return True

    def set_regions(self, regions: Sequence[tuple[int, Any]]) -> bool:
        """The frame's ignore regions ``(id, polygons)`` (after any change); the selected one
        stays selected while it is there. True when the selected one went away.

        >>> v = View(); v.set_regions([(3, [[0, 0, 4, 0, 4, 4]])]); v.selected_region = 3
        False
        >>> v.set_regions([]), v.selected_region
        (True, None)
        """
        self.regions = [(int(r), tuple(tuple(float(x) for x in p) for p in polys))
                        for r, polys in regions]
        if self.selected_region is not None and \
                self.selected_region not in {r for r, _ in self.regions}:
            self.selected_region = None
            return True
        return False

    def set_pick(self, pick: str | None) -> None:
        """Wait for a click on a person (one of :data:`PICKS`), or stop waiting (None)."""
        if pick is not None and pick not in PICKS:
            raise ValueError(f"unknown pick {pick!r}")
        if pick != self.pick:
            self.pick = pick
            self.events.emit("mode")

    def set_shown(self, what: str, on: bool) -> None:
        """Draw ``what`` (one of :data:`SHOWN`) or stop drawing it; a ``mode`` event when it
        changed."""
        if what not in SHOWN:
            raise ValueError(f"unknown thing to show {what!r}")
        name = f"show_{what}"
        if bool(on) != getattr(self, name):
            setattr(self, name, bool(on))
            self.events.emit("mode")

    def set_focus(self, on: bool) -> None:
        """Show the selected person in full and dim the others (or stop)."""
        if bool(on) != self.focus:
            self.focus = bool(on)
            self.events.emit("mode")

    # ------------------------------------------------------------------ a disputed frame

    def set_dispute(self, theirs: Sequence[Any] | None, ours_marks: Marks | None = None,
                    theirs_marks: Marks | None = None, reviewer: str = "") -> None:
        """The differences of the frame shown (after any change), or None for ``theirs`` when
        it is not in dispute.

        Parameters
        ----------
        theirs
            The reviewer's people in our tag order, then anyone only they have
            (:attr:`app.session.settling.Dispute.theirs`); None: no dispute.
        ours_marks, theirs_marks
            The marks on each version (:data:`Marks`).
        reviewer
            Who reviewed it, as a sentence names them.

        While the reviewer's version is shown, their new people are shown; when the dispute
        went away, ours come back.
        """
        self.theirs = None if theirs is None else list(theirs)
        self.ours_marks = dict(ours_marks or {})
        self.theirs_marks = dict(theirs_marks or {})
        self.reviewer = reviewer
        if self.showing_theirs:
            # Their people changed, or they are gone (then ours come back).
            self.showing_theirs = self.theirs is not None
            self._present()
        self.events.emit("dispute")

    @property
    def has_theirs(self) -> bool:
        """Whether the frame shown has a reviewer's version to show."""
        return self.theirs is not None

    @property
    def marks(self) -> Marks:
        """The difference marks on the version shown."""
        return dict(self.theirs_marks if self.showing_theirs else self.ours_marks)

    def show_theirs(self, on: bool) -> bool:
        """Show the reviewer's version (or ours again); False when there is none to show.
        Showing theirs leaves region mode (their version is read-only)."""
        if on and self.region_mode:
            self.set_region_mode(False)
        on = bool(on) and self.theirs is not None
        if on != self.showing_theirs:
            self.showing_theirs = on
            self._present()
            self.events.emit("dispute")
        return on
