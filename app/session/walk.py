"""The walk: from one problem to the next, across frames in Worklist order.

A :class:`Stop` is one place the walk stops at: a finding (with its proposed fix, if any), a
person's card of several fixes that agree (:func:`person_cards`, taken with one key and
trimmed before: :meth:`Stop.refocus`, :meth:`Stop.leave_out`), a frame's group of one kind's
fixes, or, in a project whose frames have no findings, one of triage's reasons about a
person. A
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
from dataclasses import dataclass, replace

from app.analysis.triage.calibration import PROPOSE_AT
from app.analysis.triage.findings import Finding, Fix, FixPreview
from app.model.edits import (
    DeletePerson,
    MergePeople,
    MoveJoint,
    NewPerson,
    ReassignJoint,
    SetVisibility,
    SplitPerson,
    SwapSides,
)
from app.model.naming import join_words
from app.wording import count


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
        The finding, when the stop is one (None for a triage reason or a group).
    group
        Several findings shown on one card (see :func:`group_findings`): the fixes taken
        together (``parts``) and notes that propose none.
    parts
        The findings whose fixes the stop takes together, as one undo step (a person's card,
        a frame's hidden joints); empty: the stop's fix is ``finding``'s alone.
    left_out
        The ids of the parts the annotator left out before taking the card
        (:meth:`Stop.leave_out`): their fixes are not taken.
    focus
        The part under focus (an index into ``parts``; None: the card as a whole), which
        :meth:`Stop.leave_out` leaves out or puts back.
    rounds
        Per part, the round of :func:`fold` that added it (0: found on the labels as they
        are; empty: all 0). A part of round ``r`` was found on the labels the parts of the
        rounds before it leave, so it is taken only while none of those is left out.
    merged
        The keys (as found) of the frame's other stops that :func:`fold` took into this
        card, because a fix exposed by the two cards' fixes together reads both cards'
        people; those stops are not shown apart.
    riders
        The ids of the parts that ride on this stop (:func:`ride`): fixes that only mark
        joints occluded, which nobody has to judge on a stop of their own. They are parts
        like the others (listed, previewed, taken by the same key, left out or dismissed one
        by one under focus); dismissing the whole card leaves them for the frame's next
        stop (:meth:`own`).
    """

    frame_id: int
    key: str
    person_id: int | None
    joints: tuple[int, ...]
    text: str
    finding: Finding | None = None
    group: tuple[Finding, ...] = ()
    parts: tuple[Finding, ...] = ()
    left_out: frozenset[str] = frozenset()
    focus: int | None = None
    rounds: tuple[int, ...] = ()
    merged: tuple[str, ...] = ()
    riders: tuple[str, ...] = ()

    @property
    def fix(self) -> Fix | None:
        """The proposed fix (the parts' fixes not left out, as one), or None."""
        if self.parts:
            return _joined(self.taken)
        if self.group and self.finding is None:
            return _joined(self.group)
        return None if self.finding is None else self.finding.fix

    @property
    def taken(self) -> tuple[Finding, ...]:
        """The parts whose fixes accepting the stop applies: not left out, and not found
        after a part left out (a part folded in round ``r`` follows every part of the
        rounds before it, :func:`fold`).

        Examples
        --------
        >>> s = Stop(1, "k", 2, (), "t", parts=_demo_parts(3), rounds=(0, 0, 1))
        >>> [f.id for f in s.refocus(1).leave_out().taken]    # leave out p0: p2 follows it
        ['p1']
        >>> [f.id for f in s.refocus(-1).leave_out().taken]   # leave out p2 alone
        ['p0', 'p1']
        """
        rounds = self.rounds or (0,) * len(self.parts)
        out = [r for f, r in zip(self.parts, rounds) if f.id in self.left_out]
        upto = min(out) if out else None
        return tuple(f for f, r in zip(self.parts, rounds) if f.id not in self.left_out
                     and (upto is None or r <= upto))

    @property
    def own(self) -> tuple[Finding, ...]:
        """The findings the stop is about, without its riders (:func:`ride`): what
        dismissing the whole card dismisses."""
        return tuple(f for f in self.findings if f.id not in self.riders)

    @property
    def focused(self) -> Finding | None:
        """The part under focus, or None."""
        return None if self.focus is None else self.parts[self.focus]

    def refocus(self, step: int) -> Stop:
        """The stop with the focus on the next (``step`` 1) or previous (-1) part, through
        "the card as a whole" (None) between the last part and the first.

        Examples
        --------
        >>> s = Stop(1, "k", 2, (), "t", parts=_demo_parts(2))
        >>> [s := s.refocus(1) for _ in range(3)][-1].focus is None, s.refocus(-1).focus
        (True, 1)
        """
        if len(self.parts) < 2:
            return self
        spots = [None, *range(len(self.parts))]
        at = spots.index(self.focus)
        return replace(self, focus=spots[(at + step) % len(spots)])

    def leave_out(self) -> Stop:
        """The stop with the part under focus left out (or put back when it was left out);
        unchanged without a focus.

        Examples
        --------
        >>> s = Stop(1, "k", 2, (), "t", parts=_demo_parts(2)).refocus(1).leave_out()
        >>> sorted(s.left_out), [f.id for f in s.taken], s.fix.summary
        (['p0'], ['p1'], 'fix p1')
        >>> s.leave_out().fix.summary
        '2 fixes: fix p0; fix p1'
        """
        part = self.focused
        if part is None:
            return self
        return replace(self, left_out=self.left_out ^ {part.id})

    @property
    def findings(self) -> tuple[Finding, ...]:
        """The findings the stop stands for (none for a triage reason)."""
        return self.group or (() if self.finding is None else (self.finding,))

    @property
    def people(self) -> tuple[int, ...]:
        """Every person the stop is about (the fix's people for a finding)."""
        if self.findings:
            return tuple(sorted({p for f in self.findings for p in f.people}))
        return () if self.person_id is None else (self.person_id,)


#: Kinds found joint by joint without a fix, and how a person's several are said at once.
PER_PERSON_KINDS = {"invented": "lie inside nearer people's bodies yet the model scores "
                                "them as seen: invented spots"}

#: Kinds whose fixes mend a joint a nearer person hides, by its visibility alone: many per
#: frame, each worth little alone (:attr:`Finding.worth`); a frame's are one stop, judged
#: together from their preview and accepted as one undo step. ``hidden`` marks a joint
#: occluded where it is; ``invented`` unlabels a joint placed at an invented spot.
GROUPED_KINDS = ("hidden", "invented")

#: The key of a frame's stop that holds its :data:`GROUPED_KINDS` fixes.
COVERED_KEY = "G:covered"

#: The key of a frame's one stop that holds both its :data:`GROUPED_KINDS` and its
#: :data:`GAP_KINDS` fixes (:func:`group_findings`).
JOINTS_KEY = "G:joints"

#: At most this many people's fixes are written out on the grouped stop's card.
GROUP_SHOWN = 4

#: Kinds whose fixes mend one joint from the same track's frames around
#: (:mod:`app.analysis.triage.temporal`): ``joint-gap`` places a joint left unlabelled here
#: where they agree it is, ``jumping-joint`` puts back (or unlabels) a joint that jumps away
#: and comes back. One joint each, many per frame in a video; a frame's are one stop
#: (:data:`GAP_KEY`), accepted as one undo step, unless they join a person's card.
GAP_KINDS = ("joint-gap", "jumping-joint")

#: The key of a frame's stop that holds its :data:`GAP_KINDS` fixes.
GAP_KEY = "G:gaps"


#: A fix joins a card from this confidence on; one below stays a stop of its own, judged
#: alone (ours: every proposed fix is at least :data:`PROPOSE_AT` sure, so all join today;
#: raise it to keep the less sure ones apart).
TOGETHER_AT = PROPOSE_AT

#: At most this many people on one card (ours: a card stays readable; a fix that would link
#: more stays a stop of its own).
CARD_PEOPLE = 4

#: At most this many parts of a card are listed one a line; the rest are counted.
CARD_LINES = 6

#: In a footprint, the whole person (a deletion, a merge, sides swapped).
WHOLE = -1


def footprint(fix: Fix) -> frozenset[tuple[int, int]] | None:
    """The ``(person id, joint)`` pairs a fix's edits change (joint :data:`WHOLE`: the whole
    person); None when the fix cannot join a card: it spans several frames (along a track),
    or holds an edit whose reach is not read here.

    Examples
    --------
    >>> from app.model.edits import DeletePerson, ReassignJoint
    >>> sorted(footprint(Fix("", (ReassignJoint(1, 4, 9, 7),), FixPreview())))
    [(4, 9), (7, 9)]
    >>> footprint(Fix("", (DeletePerson(1, 4), DeletePerson(2, 4)), FixPreview())) is None
    True
    """
    if len({e.frame_id for e in fix.edits}) > 1:
        return None
    out: set[tuple[int, int]] = set()
    for e in fix.edits:
        if isinstance(e, (MoveJoint, SetVisibility)):
            out.add((e.person_id, e.joint))
        elif isinstance(e, ReassignJoint):
            out |= {(e.person_id, e.joint), (e.to_person_id, e.joint)}
        elif isinstance(e, SplitPerson):
            out |= {(e.person_id, int(j)) for j in e.joints}
        elif isinstance(e, (DeletePerson, SwapSides)):
            out.add((e.person_id, WHOLE))
        elif isinstance(e, MergePeople):
            out |= {(e.person_id, WHOLE), (e.other_id, WHOLE)}
        elif not isinstance(e, NewPerson):
            return None
    return frozenset(out)


def conflict(a: frozenset[tuple[int, int]] | set[tuple[int, int]],
             b: frozenset[tuple[int, int]] | set[tuple[int, int]]) -> bool:
    """Whether two footprints (:func:`footprint`) touch the same joint, or one touches a
    person the other changes whole: their fixes would move a joint two ways.

    Examples
    --------
    >>> conflict({(4, 9)}, {(4, 10)}), conflict({(4, 9)}, {(4, 9)}), conflict({(4, -1)}, {(4, 2)})
    (False, True, True)
    """
    if a & b:
        return True
    whole_a = {p for p, j in a if j == WHOLE}
    whole_b = {p for p, j in b if j == WHOLE}
    return bool(whole_a & {p for p, _ in b} or whole_b & {p for p, _ in a})


def person_cards(frame_id: int, found: Sequence[Finding]) -> tuple[list[Stop], list[Finding]]:
    """A frame's fixes gathered per person: every fix about a person (and the people it
    gives joints to or takes them from) that does not conflict with the ones before it
    (:func:`conflict`) joins one card, taken with one key as one undo step. The card holds
    first the fixes of the person's own kinds, worst first, then their hidden, invented and
    joint-gap fixes (which otherwise go to the frame's stop of them). A fix below
    :data:`TOGETHER_AT`, along a track, in conflict, or linking more than
    :data:`CARD_PEOPLE` people stays a stop of its own. Returns the cards of two or more
    fixes and ``found`` with each card's members but the first taken out (the card goes
    where its first member was).

    Examples
    --------
    >>> from app.model.edits import ReassignJoint, SetVisibility
    >>> def f(i, kind, person, edit):
    ...     fix = Fix(f"fix {i}", (edit,), FixPreview())
    ...     return Finding(i, 1, kind, person, person, (edit.joint,), ("x",), f"t{i}", (), 1.0,
    ...                    0.9, fix, (person,), i)
    >>> found = [f("a", "wrong-owner", 3, ReassignJoint(1, 3, 9, 5)),
    ...          f("b", "mirrored", 8, SetVisibility(1, 8, 2, 0)),
    ...          f("c", "missing-joint", 5, SetVisibility(1, 5, 10, 2)),
    ...          f("d", "hidden", 3, SetVisibility(1, 3, 13, 1)),
    ...          f("e", "hidden", 3, SetVisibility(1, 3, 9, 1))]     # moves a wrist two ways
    >>> cards, rest = person_cards(1, found)
    >>> [[m.id for m in c.parts] for c in cards], [m.id for m in rest]
    ([['a', 'c', 'd']], ['a', 'b', 'e'])
    """
    index = {f.id: n for n, f in enumerate(found)}
    prints = {f.id: footprint(f.fix) for f in found if f.fix is not None}
    late_kinds = GROUPED_KINDS + GAP_KINDS
    cards: list[list[Finding]] = []
    covers: list[set[tuple[int, int]]] = []
    owner: dict[int, int] = {}
    for late in (False, True):
        for f in found:
            fp = prints.get(f.id)
            if fp is None or f.confidence < TOGETHER_AT or (f.kind in late_kinds) != late:
                continue
            # Linked by whom the fix changes (not by whom the finding reads, e.g. a hider).
            people = {p for p, _ in fp}
            if f.person_id is not None:
                people.add(f.person_id)
            at = sorted({owner[p] for p in people if p in owner})
            if not at:
                if late:
                    continue  # nobody's card: it stays with the frame's stop of its kind
                cards.append([f])
                covers.append(set(fp))
                for p in people:
                    owner[p] = len(cards) - 1
                continue
            cover = set().union(*(covers[i] for i in at))
            joined = people | {p for p, c in owner.items() if c in at}
            if conflict(cover, fp) or len(joined) > CARD_PEOPLE:
                continue
            keep = at[0]
            for i in at[1:]:
                cards[keep] += cards[i]
                cards[i] = []
            cards[keep].append(f)
            covers[keep] = cover | fp
            for p in joined:
                owner[p] = keep
    out: list[Stop] = []
    rest = list(found)
    for members in cards:
        if len(members) < 2:
            continue
        members.sort(key=lambda m: index[m.id])
        parts = tuple(members)
        rest = [f for f in rest if f not in parts[1:]]
        joints = tuple(dict.fromkeys(j for m in parts if m.person_id == parts[0].person_id
                                     for j in m.joints))
        out.append(Stop(frame_id, "C:" + "+".join(m.id for m in parts), parts[0].person_id,
                        joints, card_text(parts), parts[0], parts, parts))
    return out, rest


#: At most this many rounds of :func:`fold` (ours: each round finds the frame's problems
#: once more; three reach every consequence the demo shows, and bound the worker's time).
FOLD_ROUNDS = 3


def fold_hosts(stops: Sequence[Stop | None]) -> list[int]:
    """Which stops :func:`fold` applies together (indices into ``stops``): every stop with a
    fix about a person (a card, or a lone fix) or a frame's group of one kind's fixes
    (:data:`COVERED_KEY`, :data:`GAP_KEY`), in one frame, whose footprint does not conflict
    with the ones before it (:func:`conflict`).

    Examples
    --------
    >>> from app.model.edits import SetVisibility
    >>> def s(key, person, joint):
    ...     fix = Fix("f", (SetVisibility(1, person, joint, 1),), FixPreview())
    ...     f = Finding(key, 1, "k", person, person, (joint,), ("x",), "t", (), 1.0, 0.9, fix,
    ...                 (person,), key)
    ...     return Stop(1, key, person, (joint,), "t", f)
    >>> fold_hosts([s("a", 3, 9), s("b", 3, 9), s("c", 4, 9), Stop(1, "n", 5, (), "note")])
    [0, 2]
    """
    out: list[int] = []
    cover: set[tuple[int, int]] = set()
    for i, s in enumerate(stops):
        fix = None if s is None else s.fix
        if s is None or fix is None or not fix.edits or (
                s.person_id is None and not _is_group(s)) or any(
                isinstance(e, (NewPerson, SplitPerson)) for e in fix.edits):
            continue  # about nobody yet, or it makes a person (its id is the store's)
        fp = footprint(fix)
        if fp is None or conflict(cover, fp):
            continue
        out.append(i)
        cover |= fp
    return out


def fold(stops: Sequence[Stop], find: Callable[[tuple], Sequence[Finding]],
         rounds: int = FOLD_ROUNDS, known: Sequence[Finding] = (),
         places: bool = False) -> list[Stop]:
    """Finish people in one card: the frame's problems found again on its labels with the
    fixes of every host (:func:`fold_hosts`) applied (``find(edits)``: the findings of the
    labels those edits leave; ``known``: findings found before besides the stops'), and
    each new fix that only a host's own fix exposed joins
    that host's card, as a part of this round (:attr:`Stop.rounds`); repeated while new
    fixes appear, at most ``rounds`` times.

    A new finding joins a host when: its id and fingerprint were not found before; it has a
    fix of one frame at or above :data:`TOGETHER_AT`; the people it reads or changes
    include one the host's fix changes and none another host's fix changes (it follows
    from that host's fix alone); its fix conflicts (:func:`conflict`) neither with another
    fix folded in the same round nor with any other stop's (it may change again a joint the
    card's fixes changed: it comes after them in the card's one undo step); and a person's
    card links at most :data:`CARD_PEOPLE` people (a frame's group of one kind's fixes is
    a host too, without that bound). A new finding that follows from two person hosts'
    fixes together (it reads or changes people of both, e.g. a joint one person's fix
    leaves inside the body of a person another fix moved) merges the two into one card
    when they link at most :data:`CARD_PEOPLE` people together and its fix conflicts with
    no other stop's: the later host's parts follow the earlier's (same rounds), then the new
    fix, and the later host is not shown apart (:attr:`Stop.merged`; with ``places`` the
    list keeps its length, None where a stop was merged). Every other
    new finding is left for the frame's recompute after the accept (shown then, as
    before); nothing found before is dropped.

    Examples
    --------
    A synthetic person 3 whose wrist, once given back, shows their elbow unlabelled:

    >>> from app.model.edits import MoveJoint, SetVisibility
    >>> def f(key, person, joint, edit, people=None):
    ...     return Finding(key, 1, "k", person, person, (joint,), ("x",), f"t{key}", (),
    ...                    1.0, 0.9, Fix(f"fix {key}", (edit,), FixPreview()),
    ...                    people or (person,), key)
    >>> a = f("a", 3, 9, MoveJoint(1, 3, 9, 5.0, 5.0))
    >>> b = f("b", 3, 7, SetVisibility(1, 3, 7, 2))
    >>> def find(edits):  # the elbow shows once the wrist moved
    ...     return [b] if any(isinstance(e, MoveJoint) for e in edits) else []
    >>> out = fold([Stop(1, "a", 3, (9,), "ta", a)], find)
    >>> out[0].key, [p.id for p in out[0].parts], out[0].rounds, out[0].fix.summary
    ('a+b', ['a', 'b'], (0, 1), '2 fixes: fix a; fix b')

    Person 5's knee, once person 3's wrist moved, lies inside person 3's body: a finding
    about both people's fixes merges their two cards.

    >>> c = f("c", 5, 13, MoveJoint(1, 5, 13, 6.0, 6.0))
    >>> d = f("d", 5, 13, SetVisibility(1, 5, 13, 1), people=(5, 3))
    >>> out = fold([Stop(1, "a", 3, (9,), "ta", a), Stop(1, "c", 5, (13,), "tc", c)],
    ...            lambda edits: [d], places=True)
    >>> out[0].key, [p.id for p in out[0].parts], out[0].rounds, out[0].merged, out[1]
    ('a+c+d', ['a', 'c', 'd'], (0, 0, 1), ('c',), None)
    """
    held: list[Stop | None] = list(stops)
    found_keys = [s.key for s in stops]
    seen = {x for f in (*(f for s in stops for f in s.findings), *known)
            for x in (f.id, f.fingerprint)}
    for r in range(1, rounds + 1):
        hosts = fold_hosts(held)
        if not hosts:
            break
        edits = tuple(e for i in hosts for e in held[i].fix.edits)  # type: ignore[union-attr]
        found = find(edits)
        covers = {i: set(footprint(held[i].fix) or ()) for i in hosts}  # type: ignore[union-attr,arg-type]
        changed_by = {p: i for i in hosts for p, _ in covers[i]}
        elsewhere = [(i, footprint(f.fix)) for i, s in enumerate(held) if s is not None
                     for f in (s.taken if s.parts else s.findings) if f.fix is not None]
        more: dict[int, list[Finding]] = {}
        added: dict[int, set[tuple[int, int]]] = {}
        into: dict[int, int] = {}  # a host merged this round -> the host it joined

        def root(i: int, into: dict[int, int] = into) -> int:
            while i in into:
                i = into[i]
            return i

        for f in found:
            if f.id in seen or f.fingerprint in seen:
                continue
            seen |= {f.id, f.fingerprint}
            fp = None if f.fix is None or f.confidence < TOGETHER_AT else footprint(f.fix)
            if not fp:
                continue
            people = {p for p, _ in fp} | set(f.people) | (
                set() if f.person_id is None else {f.person_id})
            owners = {root(changed_by[p]) for p in people if p in changed_by}
            both = sorted(owners)
            if len(both) == 2 and not any(_is_group(held[i]) for i in both):  # type: ignore[arg-type]
                i, j = both
                linked = {p for p, _ in covers[i] | covers[j] | fp}
                if len(linked) > CARD_PEOPLE or conflict(
                        added.get(i, set()) | added.get(j, set()), fp) or any(
                        root(k) not in both and o is not None and conflict(o, fp)
                        for k, o in elsewhere):
                    continue
                into[j] = i
                covers[i] |= covers.pop(j)
                added[i] = added.get(i, set()) | added.pop(j, set())
                more[i] = more.get(i, []) + more.pop(j, [])
                owners = {i}
            if len(owners) != 1:
                continue
            i = owners.pop()
            if not _is_group(held[i]) and len(  # type: ignore[arg-type]
                    {p for p, _ in covers[i]} | {p for p, _ in fp}) > CARD_PEOPLE:
                continue  # a frame's group holds many people by design
            # It may change again a joint the card's fixes change (it was found on the labels
            # they leave and comes after them in the card's one group), not one another
            # fix of this round or another stop changes.
            if conflict(added.get(i, set()), fp) or any(
                    root(j) != i and o is not None and conflict(o, fp) for j, o in elsewhere):
                continue
            added.setdefault(i, set()).update(fp)
            more.setdefault(i, []).append(f)
        if not more and not into:
            break
        for h in sorted({root(j) for j in into}):
            js = sorted(j for j in into if root(j) == h)
            held[h] = _merged(held[h], [held[j] for j in js],  # type: ignore[arg-type,misc]
                              tuple(found_keys[j] for j in js))
            for j in js:
                held[j] = None
        for i, extra in more.items():
            held[i] = _folded(held[i], tuple(extra), r)  # type: ignore[arg-type]
    return held if places else [s for s in held if s is not None]  # type: ignore[return-value]


def folded_ahead(stops: Sequence[Stop], folds: dict[str, Stop | None]) -> list[Stop]:
    """A frame's stops as found, with the cards :func:`fold` made of them ahead (``folds``:
    the key of a stop as found -> its card, None where it was merged into another card). A
    card that merged stops is used only when every stop it took in is still found as it
    was (a stop whose key changed meanwhile, e.g. findings over time read again, is shown
    as found, and so is the card's first stop), and a stop merged away is dropped only
    when that card is used: every finding stays on exactly one stop.

    Examples
    --------
    >>> a, b, c = (Stop(1, k, 3, (), k) for k in "abc")
    >>> ab = Stop(1, "a+b", 3, (), "ab", merged=("b",))
    >>> [s.key for s in folded_ahead([a, b, c], {"a": ab, "b": None})]
    ['a+b', 'c']
    >>> [s.key for s in folded_ahead([a, c], {"a": ab, "b": None})]   # b is not found now
    ['a', 'c']
    """
    keys = {s.key for s in stops}
    cards = {s.key: folds.get(s.key, s) for s in stops}
    for key, card in cards.items():
        if card is not None and card.merged and not set(card.merged) <= keys:
            cards[key] = None  # shown as found, below
    taken = {k for card in cards.values() if card is not None for k in card.merged}
    out = []
    for s in stops:
        if s.key in taken:
            continue
        card = cards[s.key]
        out.append(s if card is None else card)
    return out


def _merged(s: Stop, others: Sequence[Stop], keys: tuple[str, ...]) -> Stop:
    """A host of :func:`fold` with other hosts of its frame merged into it (``keys``: theirs
    as found): their parts follow its own, each keeping its round, and their notes too."""
    stops = (s, *others)
    parts = tuple(p for x in stops for p in (x.parts or ((x.finding,) if x.finding else ())))
    rounds = tuple(r for x in stops for r in (x.rounds or (0,) * len(
        x.parts or ((x.finding,) if x.finding else ()))))

    def tail(x: Stop) -> str:
        own = x.parts or ((x.finding,) if x.finding else ())
        head = card_text(own) if len(own) > 1 else (own[0].text if own else "")
        return x.text[len(head):] if x.text.startswith(head) else ""

    return replace(s, key="+".join(x.key for x in stops), text=card_text(parts) + "".join(
        tail(x) for x in stops), finding=parts[0], group=tuple(
        f for x in stops for f in x.findings), parts=parts, rounds=rounds,
        left_out=frozenset().union(*(x.left_out for x in stops)), focus=None,
        merged=s.merged + tuple(y for x, k in zip(others, keys) for y in (k, *x.merged)))


def _is_group(s: Stop) -> bool:
    """A frame's stop of one kind's fixes (:data:`COVERED_KEY`, :data:`GAP_KEY`)."""
    return s.key.split("+", 1)[0] in (COVERED_KEY, GAP_KEY, JOINTS_KEY)


def _folded(s: Stop, more: tuple[Finding, ...], r: int) -> Stop:
    """A stop with parts of fold round ``r`` added (a lone fix becomes a card)."""
    parts = s.parts or ((s.finding,) if s.finding is not None else ())
    rounds = (s.rounds or (0,) * len(parts)) + (r,) * len(more)
    new = parts + more
    if _is_group(s):
        said = "; ".join(m.fix.summary for m in more if m.fix is not None)
        return replace(s, key=s.key + "+" + "+".join(m.id for m in more),
                       text=f"{s.text}; then {count(len(more), 'fix', 'fixes')} they "
                            f"expose: {said}", group=s.findings + more, parts=new,
                       rounds=rounds)
    head = card_text(parts) if len(parts) > 1 else (parts[0].text if parts else "")
    tail = s.text[len(head):] if s.text.startswith(head) else ""
    joints = tuple(dict.fromkeys(s.joints + tuple(j for m in more if m.person_id == s.person_id
                                                  for j in m.joints)))
    return replace(s, key=s.key + "+" + "+".join(m.id for m in more), joints=joints,
                   text=card_text(new) + tail, finding=new[0], group=s.findings + more,
                   parts=new, rounds=rounds)


def card_text(parts: Sequence[Finding]) -> str:
    """A person's card in one sentence: its first finding's, then what the other fixes do.

    Examples
    --------
    >>> def f(i, summary):
    ...     return Finding(i, 1, "k", 3, 3, (), (), f"person 3's {i} is odd", (), 1.0, 0.9,
    ...                    Fix(summary, (), FixPreview()), (3,), i)
    >>> card_text([f("a", "give it to person 5"), f("b", "mark it occluded")])
    "person 3's a is odd; with it, 2 fixes together: mark it occluded"
    """
    said = [p.fix.summary for p in parts[1:CARD_LINES] if p.fix is not None]
    more = len(parts) - 1 - len(said)
    return (f"{parts[0].text}; with it, {count(len(parts), 'fix', 'fixes')} together: "
            + "; ".join(said) + (f"; and {count(more, 'more fix', 'more fixes')}"
                                 if more > 0 else ""))


def card_lines(stop: Stop) -> list[tuple[str, bool, bool]]:
    """A card's parts one a line, as the Canvas lists them: ``(text, left out, under
    focus)``; the text is the fix in tag numbers and joint names, and how sure it is. At
    most :data:`CARD_LINES` lines, the last counting the rest (and keeping the focus).

    Examples
    --------
    >>> s = Stop(1, "k", 2, (), "t", parts=_demo_parts(2)).refocus(1).leave_out()
    >>> card_lines(s)
    [('fix p0 (90% sure)', True, True), ('fix p1 (90% sure)', False, False)]
    """
    if len(stop.parts) < 2:
        return []
    taken = {id(p) for p in stop.taken}
    lines = [(f"{p.fix.summary if p.fix else p.text} ({p.confidence:.0%} sure)",
              id(p) not in taken, n == stop.focus) for n, p in enumerate(stop.parts)]
    if len(lines) <= CARD_LINES:
        return lines
    rest = lines[CARD_LINES - 1:]
    off = sum(o for _, o, _ in rest)
    text = (f"and {count(len(rest), 'more fix', 'more fixes')}"
            + (f" ({off} left out)" if off else ""))
    return [*lines[:CARD_LINES - 1], (text, off == len(rest), any(c for *_, c in rest))]


def _demo_parts(n: int) -> tuple[Finding, ...]:
    """Synthetic parts for the examples."""
    return tuple(Finding(f"p{i}", 1, "k", 2, 2, (i,), ("x",), f"t{i}", (), 1.0, 0.9,
                         Fix(f"fix p{i}", (), FixPreview()), (2,), f"p{i}")
                 for i in range(n))


def group_findings(frame_id: int, found: Sequence[Finding]) -> list[Stop]:
    """A frame's findings as stops, worst first: a person's fixes that agree are one card
    (:func:`person_cards`); two or more of the :data:`GROUPED_KINDS` with fixes left off
    the cards become one stop (:data:`COVERED_KEY`), and two or more of the
    :data:`GAP_KINDS` another (:data:`GAP_KEY`), after the people's stops: when a card
    taken before touched the group's people, the group is read again after it with what
    it exposed (:meth:`app.session.Session.accept`), rather than taken first and followed
    by a second group at the frame's end.

    Examples
    --------
    >>> from app.analysis.triage.findings import FixPreview
    >>> def f(i, kind, person):
    ...     fix = Fix(f"mark person {person}'s knees occluded", (), FixPreview())
    ...     return Finding(i, 1, kind, person, person, (13, 14), ("left knee", "right knee"),
    ...                    "t", (), 1.0, 0.9, fix, (person,), i)
    >>> [s.key for s in group_findings(1, [f("a", "split", 1), f("b", "hidden", 2),
    ...                                    f("c", "duplicate", 3), f("d", "invented", 4)])]
    ['a', 'c', 'G:covered']
    """
    stops, found = person_cards(frame_id, found)
    heads = {id(c.parts[0]) for c in stops}
    kinds_of = {COVERED_KEY: GROUPED_KINDS, GAP_KEY: GAP_KINDS}
    loose = {key: tuple(f for f in found if f.kind in kinds and f.fix is not None
                        and id(f) not in heads) for key, kinds in kinds_of.items()}
    both = _joints_group(loose[COVERED_KEY], loose[GAP_KEY])
    order = {id(f): n for n, f in enumerate(found)}
    for key, members, say in (
            ((JOINTS_KEY, both, joints_text),) if both else
            ((COVERED_KEY, loose[COVERED_KEY], covered_text),
             (GAP_KEY, loose[GAP_KEY], gap_text))):
        members = tuple(sorted(members, key=lambda f: order[id(f)]))
        if len(members) >= 2:
            found = [f for f in found if f not in members or f is members[0]]
            stops.append(Stop(frame_id, key, None, (), say(members), None, members,
                              members))
    by_person: dict[int, list[Finding]] = {}
    for f in found:
        if f.kind in PER_PERSON_KINDS and f.fix is None and f.person_id is not None:
            by_person.setdefault(f.person_id, []).append(f)
    for pid, items in by_person.items():
        if len(items) < 2:
            continue
        members = tuple(items)
        found = [f for f in found if f not in members or f is members[0]]
        joints = tuple(j for m in members for j in m.joints)
        names = join_words([n for m in members for n in m.joint_names])
        text = (f"person {members[0].tag}'s {names} {PER_PERSON_KINDS[members[0].kind]} "
                f"({count(len(members), 'findings')})")
        stops.append(Stop(frame_id, f"G:{members[0].kind}:{pid}", pid, joints, text, None,
                          members))
    out = []
    for f in found:
        grouped = next((g for g in stops if g.findings[0] is f), None)
        out.append(grouped or Stop(f.frame_id, f.id, f.person_id, f.joints, f.text, f))
    # The frame's groups come after its people's cards (see above).
    out = [s for s in out if not _is_group(s)] + [s for s in out if _is_group(s)]
    return _frame_notes(_with_notes(out))


def occluding_only(fix: Fix | None) -> bool:
    """Whether a fix does nothing but mark labelled joints occluded (COCO ``v`` 2 to 1): the
    joints stay where they are and stay labelled, so it changes neither what training
    learns from them nor whether their person is wrong, by either count of
    :mod:`app.demo.evaluate` (both read a labelled joint alike, whatever its visibility).

    Examples
    --------
    >>> from app.model.edits import SetVisibility
    >>> occluding_only(Fix("", (SetVisibility(1, 3, 13, 1),), FixPreview()))
    True
    >>> occluding_only(Fix("", (SetVisibility(1, 3, 13, 0),), FixPreview()))
    False
    """
    return fix is not None and bool(fix.edits) and all(
        isinstance(e, SetVisibility) and e.v == 1 for e in fix.edits)


#: Kinds whose stops may ride on another stop of their frame (:func:`ride`): ``hidden``
#: marks joints a nearer person hides occluded where they are.
RIDING_KINDS = ("hidden",)


def can_ride(s: Stop) -> bool:
    """A stop that may ride on another (:func:`ride`): its fixes are all of
    :data:`RIDING_KINDS` and only mark joints occluded, as found (no fold round, nothing
    merged into it, nothing riding on it)."""
    return (occluding_only(s.fix) and not s.riders and not s.merged
            and not any(s.rounds) and bool(s.parts or s.finding)
            and all(f.kind in RIDING_KINDS for f in s.findings if f.fix is not None))


def ride(stops: Sequence[Stop]) -> list[Stop]:
    """A frame's stops with each stop whose fix only marks joints occluded
    (:func:`occluding_only`: the frame's group of hidden joints, or one person's) riding on
    the frame's last other stop with a fix whose fix it does not conflict with
    (:func:`conflict`): that card lists its fixes after its own, previews them with its
    own, and the same key takes them all as one undo step. Such a fix changes nothing the
    annotator has to weigh against the card's (no joint moves, none is unlabelled), so it
    costs no key of its own. A frame with no other stop with a fix keeps it as a stop of its
    own, at the end as before. Nothing is dropped: the rider's findings are the card's
    (:attr:`Stop.riders`), reached by the same steps, counted on the same frame; leaving
    one out or dismissing it works under focus as for any part, and dismissing the whole
    card leaves the riders for the frame's next stop.

    Examples
    --------
    >>> from app.model.edits import ReassignJoint, SetVisibility
    >>> def f(key, kind, person, edit):
    ...     return Finding(key, 1, kind, person, person, (edit.joint,), ("x",), f"t{key}", (),
    ...                    1.0, 0.9, Fix(f"fix {key}", (edit,), FixPreview()), (person,), key)
    >>> owner = f("a", "wrong-owner", 3, ReassignJoint(1, 3, 9, 5))
    >>> hid = [f("h", "hidden", 7, SetVisibility(1, 7, 13, 1)),
    ...        f("k", "hidden", 8, SetVisibility(1, 8, 14, 1))]
    >>> out = ride(group_findings(1, [owner, *hid]))
    >>> [(s.key, [p.id for p in s.parts], s.riders) for s in out]
    [('a&G:covered', ['a', 'h', 'k'], ('h', 'k'))]
    >>> out[0].fix.summary, [f.id for f in out[0].own]
    ('3 fixes: fix a; fix h; fix k', ['a'])
    >>> [s.key for s in ride(group_findings(1, hid))]     # nothing else on the frame
    ['G:covered']
    """
    out = list(stops)
    for rider in [s for s in out if can_ride(s)]:
        fp = footprint(rider.fix)  # type: ignore[arg-type]
        if fp is None:
            continue
        for h in range(len(out) - 1, -1, -1):
            host = out[h]
            if host is rider or host.fix is None or can_ride(host):
                continue
            hp = footprint(host.fix)
            if hp is None or conflict(hp, fp) or not (host.parts or host.finding):
                continue
            out[h] = _carrying(host, rider)
            out.remove(rider)
            break
    return out


#: Between a card's own sentence and its riders' (:func:`ride`).
RIDERS_SAID = "; taken with it, "


def _carrying(host: Stop, rider: Stop) -> Stop:
    """A stop with a rider's fixes and notes after its own (:func:`ride`)."""
    own = host.parts or ((host.finding,) if host.finding is not None else ())
    rparts = rider.parts or ((rider.finding,) if rider.finding is not None else ())
    return replace(host, key=f"{host.key}&{rider.key}", text=host.text + RIDERS_SAID + rider.text,
                   finding=own[0] if host.finding is None else host.finding,
                   group=host.findings + rider.findings, parts=own + rparts,
                   rounds=(host.rounds or (0,) * len(own)) + (0,) * len(rparts),
                   left_out=host.left_out | rider.left_out, focus=None,
                   riders=host.riders + tuple(f.id for f in rider.findings))


def _joints_group(covered: Sequence[Finding], gaps: Sequence[Finding]) -> tuple[Finding, ...]:
    """A frame's hidden/invented fixes and its joint-gap fixes left off the cards as one
    group, when it has both and no fix of one conflicts with a fix of the other
    (:func:`conflict`: a joint the frames around place that a nearer body hides, say);
    else none.

    Examples
    --------
    >>> from app.model.edits import MoveJoint, SetVisibility
    >>> def f(i, kind, person, edit):
    ...     return Finding(i, 1, kind, person, person, (edit.joint,), ("x",), "t", (), 1.0,
    ...                    0.9, Fix("f", (edit,), FixPreview()), (person,), i)
    >>> hid = f("h", "hidden", 2, SetVisibility(1, 2, 13, 1))
    >>> gap = f("g", "joint-gap", 5, MoveJoint(1, 5, 9, 3.0, 4.0))
    >>> [m.id for m in _joints_group([hid], [gap])]
    ['h', 'g']
    >>> _joints_group([hid], [f("x", "joint-gap", 2, MoveJoint(1, 2, 13, 3.0, 4.0))])
    ()
    """
    if not covered or not gaps:
        return ()
    prints = [footprint(f.fix) for f in (*covered, *gaps) if f.fix is not None]
    if any(p is None for p in prints):
        return ()
    one = set().union(*prints[:len(covered)])
    other = set().union(*prints[len(covered):])
    return () if conflict(one, other) else (*covered, *gaps)


def joints_text(members: Sequence[Finding]) -> str:
    """The sentence of a frame's one stop of joints mended one by one: those a nearer
    person hides (:func:`covered_text`), then those the frames around mend
    (:func:`gap_text`)."""
    covered = [m for m in members if m.kind in GROUPED_KINDS]
    gaps = [m for m in members if m.kind in GAP_KINDS]
    return f"{covered_text(covered)}; and {gap_text(gaps)}"


def covered_text(members: Sequence[Finding]) -> str:
    """The grouped stop's sentence: how many joints, on how many people, and each person's
    fixes by tag and joint names (the fixes' own summaries, :mod:`app.model.naming`).

    Examples
    --------
    >>> from app.analysis.triage.findings import FixPreview
    >>> def f(kind, person, joints, summary):
    ...     fix = Fix(summary, (), FixPreview())
    ...     return Finding("x", 1, kind, person, person, joints, (), "t", (), 1.0, 0.9, fix,
    ...                    (person,), "x")
    >>> covered_text([f("hidden", 2, (13, 14), "mark person 2's knees occluded"),
    ...               f("invented", 5, (9,), "mark person 5's left wrist unlabelled")])
    "nearer people hide 3 joints of 2 people (2 to mark occluded, 1 invented spot to \
unlabel): person 2's knees occluded; person 5's left wrist unlabelled"
    """
    hidden = sum(len(m.joints) for m in members if m.kind == "hidden")
    invented = sum(len(m.joints) for m in members if m.kind == "invented")
    people = {m.person_id for m in members}
    parts = []
    if hidden:
        parts.append(f"{hidden} to mark occluded")
    if invented:
        parts.append(f"{count(invented, 'invented spot')} to unlabel")
    said = [m.fix.summary.removeprefix("mark ") for m in members[:GROUP_SHOWN] if m.fix]
    more = len(members) - len(said)
    return (f"nearer people hide {count(hidden + invented, 'joint')} of "
            f"{count(len(people), 'person', 'people')} ({', '.join(parts)}): "
            + "; ".join(said) + (f"; and {count(more, 'more fix', 'more fixes')}"
                                 if more > 0 else ""))


def gap_text(members: Sequence[Finding]) -> str:
    """The sentence of a frame's stop of joints the frames around mend: how many, on how
    many people, and each person's joints by tag and name (a joint that jumps marked so).

    Examples
    --------
    >>> from app.analysis.triage.findings import FixPreview
    >>> def f(person, joint, kind="joint-gap"):
    ...     return Finding("x", 1, kind, person, person, (9,), (joint,), "t", (), 1.0,
    ...                    0.7, Fix("place", (), FixPreview()), (person,), "x")
    >>> import textwrap
    >>> print(textwrap.fill(gap_text([f(2, "left wrist"), f(2, "left elbow"),
    ...                               f(5, "right knee")]), 80))
    the frames around place 3 joints unlabelled here, of 2 people: person 2's left
    wrist and left elbow; person 5's right knee
    >>> print(textwrap.fill(gap_text([f(2, "left wrist"), f(5, "nose", "jumping-joint")]), 80))
    the frames around mend 2 joints of 2 people (1 unlabelled here, 1 that jumps):
    person 2's left wrist; person 5's nose (jumps)
    """
    by: dict[int | None, list[str]] = {}
    for m in members:
        mark = " (jumps)" if m.kind == "jumping-joint" else ""
        by.setdefault(m.tag, []).extend(n + mark for n in m.joint_names)
    said = [f"person {tag}'s {join_words(names)}" for tag, names in
            list(by.items())[:GROUP_SHOWN]]
    more = sum(len(v) for v in list(by.values())[GROUP_SHOWN:])
    jumps = sum(m.kind == "jumping-joint" for m in members)
    people = count(len(by), 'person', 'people')
    if not jumps:
        head = (f"the frames around place {count(len(members), 'joint')} unlabelled here, "
                f"of {people}")
    else:
        head = (f"the frames around mend {count(len(members), 'joint')} of {people} "
                f"({len(members) - jumps} unlabelled here, {jumps} that "
                f"{'jumps' if jumps == 1 else 'jump'})")
    return (head + ": " + "; ".join(said)
            + (f"; and {count(more, 'more joint')}" if more else ""))


def group_action(fix: Fix) -> str:
    """What a grouped stop's fix does, in a few words, from its preview.

    Examples
    --------
    >>> from app.analysis.triage.findings import FixPreview
    >>> group_action(Fix("", (), FixPreview(unlabeled=((2, 9),), occluded=((1, 13), (1, 14)))))
    'mark 2 joints occluded and unlabel 1 joint'
    """
    p = fix.preview
    parts = []
    if p.placed:
        parts.append(f"place {count(len(p.placed), 'joint')}")
    if p.occluded:
        parts.append(f"mark {count(len(p.occluded), 'joint')} occluded")
    if p.unlabeled:
        parts.append(f"unlabel {count(len(p.unlabeled), 'joint')}")
    return " and ".join(parts) or fix.summary


#: At most this many notes' sentences are written out on a person's stop.
NOTES_SHOWN = 2


def _with_notes(stops: list[Stop]) -> list[Stop]:
    """Gather a person's stops without a fix into one place, read on one card: on that
    person's first stop with a fix (not a frame-wide group) as notes, else on their first
    stop without one. One key passes them all.

    A note proposes nothing to accept, so it costs the annotator a look, not a key of its
    own; the fix it rides with is unchanged (a stop never carries two fixes, which could
    disagree).

    Examples
    --------
    >>> from app.analysis.triage.findings import FixPreview
    >>> def f(i, kind, person, fix=True):
    ...     x = Fix(f"give it to person {person + 1}", (), FixPreview()) if fix else None
    ...     return Finding(i, 1, kind, person, person, (9,), ("left wrist",), f"t{i}", (),
    ...                    1.0, 0.9, x, (person,), i)
    >>> out = group_findings(1, [f("a", "wrong-owner", 1), f("b", "mirrored", 2, False),
    ...                          f("c", "missing-joint", 1, False), f("d", "invented", 2, False)])
    >>> [(s.key, [m.id for m in s.findings]) for s in out]
    [('P:a', ['a', 'c']), ('P:b', ['b', 'd'])]
    >>> out[0].fix.summary, out[0].text, out[1].fix, out[1].text
    ('give it to person 2', 'ta; also tc', None, 'tb; also td')
    """
    host: dict[int, int] = {}
    for i, s in enumerate(stops):
        if s.fix is not None and s.finding is not None and s.person_id is not None:
            host.setdefault(s.person_id, i)
            for m in s.parts:  # a card hosts the notes of every person it mends
                if m.person_id is not None:
                    host.setdefault(m.person_id, i)
    for i, s in enumerate(stops):
        if s.fix is None and s.findings and s.person_id is not None:
            host.setdefault(s.person_id, i)
    notes: dict[int, list[Stop]] = {}
    keep: list[int] = []
    for i, s in enumerate(stops):
        at = host.get(s.person_id) if s.person_id is not None else None
        if s.fix is None and s.findings and at is not None and at != i:
            notes.setdefault(at, []).append(s)
        else:
            keep.append(i)
    out = []
    for i in keep:
        s, extra = stops[i], notes.get(i)
        if not extra:
            out.append(s)
            continue
        said = [n.text for n in extra[:NOTES_SHOWN]]
        more = sum(len(n.findings) for n in extra[NOTES_SHOWN:])
        text = s.text + "; also " + "; ".join(said) + (
            f"; and {count(more, 'more finding')} about this person" if more else "")
        members = s.findings + tuple(m for n in extra for m in n.findings)
        joints = tuple(dict.fromkeys(s.joints + tuple(j for n in extra for j in n.joints)))
        out.append(replace(s, key=f"P:{s.key}", joints=joints, text=text, group=members))
    return out


#: A finding without a fix is *weak* below this confidence (a fix of its kind would more
#: likely not help, :data:`app.analysis.triage.calibration.PROPOSE_AT`).
WEAK_BELOW = PROPOSE_AT


def _frame_notes(stops: list[Stop]) -> list[Stop]:
    """The frame's notes left without a card of their person's fix (:func:`_with_notes`)
    cost at most one key together: weak ones (every finding below :data:`WEAK_BELOW`) ride
    on the frame's last stop with a fix, after its sentence ("also on this frame, no fix:
    ..."); the others (a missed person's partial body, a sure finding nobody could build a
    fix for), and the weak ones of a frame without a fix, share one card of notes where the
    first of them was, when there are two or more. Nothing is dropped: every finding stays
    on a card (and in the Worklist's counts), and I dismisses a card's findings together.

    The rider's fix is the host's alone; its key says which findings it holds, so a card
    with a note raised after the walk passed the host is shown again.

    Examples
    --------
    >>> from app.analysis.triage.findings import FixPreview
    >>> def f(i, kind, person, fix=True, sure=0.9):
    ...     x = Fix(f"give it to person {person + 1}", (), FixPreview()) if fix else None
    ...     return Finding(i, 1, kind, person, person, (9,), ("left wrist",), f"t{i}", (),
    ...                    1.0, sure, x, (person,), i)
    >>> out = group_findings(1, [f("a", "wrong-owner", 1), f("b", "mirrored", 2, False, 0.2),
    ...                          f("c", "mirrored", 3, False, 0.3)])
    >>> [(s.key, [m.id for m in s.findings], s.fix.summary) for s in out]
    [('a|b,c', ['a', 'b', 'c'], 'give it to person 2')]
    >>> out[0].text
    'ta; also on this frame, no fix proposed: tb; tc'
    >>> out = group_findings(1, [f("m", "missed-person", None, False, 1.0),
    ...                          f("b", "mirrored", 2, False, 0.2)])
    >>> [(s.key, s.person_id, s.fix, s.text) for s in out]
    [('N:m,b', None, None, '2 findings without a fix on this frame: tm; tb')]
    """
    hosts = [i for i, s in enumerate(stops) if s.fix is not None]
    loose = [i for i, s in enumerate(stops) if s.fix is None and s.findings]
    if not loose:
        return stops
    riders = [i for i in loose if all(f.confidence < WEAK_BELOW for f in stops[i].findings)
              ] if hosts else []
    own = [i for i in loose if i not in riders]
    if len(own) < 2:
        own = []
    changed: dict[int, Stop] = {}
    if riders:
        at = hosts[-1]
        host, extra = stops[at], [stops[i] for i in riders]
        members = tuple(m for n in extra for m in n.findings)
        text = host.text + "; also on this frame, no fix proposed: " + _said(extra)
        changed[at] = replace(host, key=f"{host.key}|{','.join(m.id for m in members)}",
                              text=text, group=host.findings + members)
    if own:
        extra = [stops[i] for i in own]
        members = tuple(m for n in extra for m in n.findings)
        text = (f"{count(len(members), 'finding')} without a fix on this frame: "
                + _said(extra, NOTES_SHOWN + 1))
        changed[own[0]] = Stop(extra[0].frame_id, f"N:{','.join(m.id for m in members)}",
                               None, (), text, None, members)
    gone = set(riders) | set(own[1:])
    return [changed.get(i, s) for i, s in enumerate(stops) if i not in gone]


def _said(notes: Sequence[Stop], shown: int = NOTES_SHOWN) -> str:
    said = [n.text for n in notes[:shown]]
    more = sum(len(n.findings) for n in notes[shown:])
    return "; ".join(said) + (f"; and {count(more, 'more finding')}" if more else "")


def _joined(findings: Sequence[Finding]) -> Fix | None:
    fixes = [f.fix for f in findings if f.fix is not None]
    if not fixes:
        return None
    if len(fixes) == 1:
        return fixes[0]
    p = [x.preview for x in fixes]
    preview = FixPreview(
        tuple(v for x in p for v in x.placed), tuple(v for x in p for v in x.unlabeled),
        tuple(v for x in p for v in x.occluded), tuple(v for x in p for v in x.deleted),
        tuple(v for x in p for v in x.merged), tuple(v for x in p for v in x.created))
    return Fix(f"{count(len(fixes), 'fixes')}: " + "; ".join(x.summary for x in fixes),
               tuple(e for x in fixes for e in x.edits), preview)


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

    def revisit(self, frame_id: int) -> bool:
        """Come back to a frame the walk has left, after the last frame of its order (the
        frame's findings changed after the walk left it); False when the walk is there, or
        the frame is not in its order.

        Examples
        --------
        >>> stops = {7: [Stop(7, "a", 1, (), "one")], 3: [Stop(3, "c", 5, (), "three")]}
        >>> walk = Walk(lambda: [7, 3], lambda f: stops[f])
        >>> walk.step(1, 7).key, walk.step(1, 7).key
        ('a', 'c')
        >>> stops[7] = [Stop(7, "z", 1, (), "came later")]
        >>> walk.revisit(7), walk.step(1, 3).key
        (True, 'z')
        """
        order = self._snapshot
        if order is None or frame_id not in order or (
                self.current is not None and self.current.frame_id == frame_id):
            return False
        order.remove(frame_id)
        order.append(frame_id)
        return True

    def following(self, frame_id: int) -> int | None:
        """The frame after ``frame_id`` in the walk's order (None: the last, or not in it,
        or no walk yet).

        Examples
        --------
        >>> walk = Walk(lambda: [7, 3], lambda f: [Stop(f, "a", 1, (), "one")])
        >>> walk.following(7), walk.step(1, 7).key, walk.following(7), walk.following(3)
        (None, 'a', 3, None)
        """
        order = self._snapshot
        if order is None or frame_id not in order:
            return None
        at = order.index(frame_id) + 1
        return order[at] if at < len(order) else None

    def forget(self) -> None:
        """Let the next step start from the frame on screen (in the same order)."""
        self.current = None
        self._index = 0

    def restart(self) -> None:
        """Start again from the frame on screen, in the order the Worklist shows now."""
        self.forget()
        self._snapshot = None
