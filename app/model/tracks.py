"""Track edits over a sequence: join two tracks, split one, as batches of
:class:`~app.model.edits.SetTrack` edits that the store applies as one undo step
(:meth:`app.store.project.Project.apply_batch`).

``people`` maps each frame of the sequence, in order, to its people.

Examples
--------
>>> import numpy as np
>>> from app.model.labels import Person
>>> def p(pid, track):
...     return Person(pid, np.zeros((1, 3)), np.zeros(1), ("auto",), track=track,
...                   track_source="auto")
>>> seq = {1: [p(11, 1), p(12, 2)], 2: [p(21, 1)], 3: [p(31, 3)]}
>>> [(e.frame_id, e.person_id, e.track) for e in join_tracks(seq, 1, 3)]
[(3, 31, 1)]
>>> [(e.frame_id, e.person_id, e.track) for e in split_track(seq, 1, 2, new_track=4)]
[(2, 21, 4)]
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping, Sequence

from app.errors import EditRefused
from app.model.edits import SetTrack
from app.model.labels import Person


def join_tracks(people: Mapping[int, Sequence[Person]], keep: int, other: int) -> list[SetTrack]:
    """Put every person of track ``other`` on track ``keep`` (the same person, linked apart).

    Raises
    ------
    EditRefused
        When a frame has people of both tracks (two people of one frame are never one person;
        split one of them off first), or ``other`` has no one.
    """
    if keep == other:
        raise EditRefused(f"track {keep} cannot be joined with itself")
    edits, both = [], []
    for fid, persons in people.items():
        tracks = {p.track for p in persons}
        if keep in tracks and other in tracks:
            both.append(fid)
        edits += [SetTrack(fid, p.id, keep) for p in persons if p.track == other]
    if both:
        raise EditRefused(f"tracks {keep} and {other} both have someone in frame "
                          f"{both[0]}{' and others' if len(both) > 1 else ''}; take one of "
                          "them off its track there first")
    if not edits:
        raise EditRefused(f"track {other} has no one in this sequence")
    return edits


def split_track(people: Mapping[int, Sequence[Person]], track: int, from_frame: int,
                new_track: int) -> list[SetTrack]:
    """Put the people of ``track`` in ``from_frame`` and every frame after it (in the order of
    ``people``) on ``new_track``: the track followed someone else from there on."""
    order = list(people)
    if from_frame not in people:
        raise EditRefused(f"frame {from_frame} is not in the sequence")
    edits = [SetTrack(fid, p.id, new_track) for fid in order[order.index(from_frame):]
             for p in people[fid] if p.track == track]
    if not edits:
        raise EditRefused(f"track {track} has no one from frame {from_frame} on")
    return edits


def exchange_tracks(people: Mapping[int, Sequence[Person]], a: int, b: int,
                    from_frame: int) -> list[SetTrack]:
    """Exchange tracks ``a`` and ``b`` in ``from_frame`` and every frame after it: the two
    people's identities were exchanged there."""
    order = list(people)
    if from_frame not in people:
        raise EditRefused(f"frame {from_frame} is not in the sequence")
    swap = {a: b, b: a}
    edits = [SetTrack(fid, p.id, swap[p.track]) for fid in order[order.index(from_frame):]
             for p in people[fid] if p.track in swap]
    if not edits:
        raise EditRefused(f"tracks {a} and {b} have no one from frame {from_frame} on")
    return edits


def next_track(people: Iterable[Person]) -> int:
    """A track id no one has (one more than the highest)."""
    return max((p.track for p in people if p.track is not None), default=0) + 1
