"""How people and joints are named in text, the same way everywhere.

On the Canvas every person of a frame carries a number *tag*: the 1-based position of the
person in the frame's people list, in the order the project returns them (by person id, see
:meth:`app.store.Project.people`). The tag is what an annotator sees and types (key 5 gives
the selected joint to person 5); the person *id* is stable across frames, edits and files and
is what the ledger and the files record. Text written for people names a person by tag first
and, where it must be unambiguous beyond the frame, adds the id: ``person 5 (#49)``.

Joints are written with the skeleton's joint names made readable: ``left_wrist`` becomes
``left wrist``. Findings, triage reasons, and any other text about a frame's people use
:class:`Names` so that the wording is one.

Examples
--------
>>> from app.model.skeleton import coco_body
>>> names = Names.of_frame(coco_body(), [12, 49, 7])
>>> names.tag(49), names.person(49), names.person(49, with_id=True)
(2, 'person 2', 'person 2 (#49)')
>>> names.whose(7, 9), names.joints([9, 7, 5])
("person 3's left wrist", 'left wrist, left elbow and left shoulder')
"""

from __future__ import annotations

import re
from collections.abc import Iterable, Sequence
from dataclasses import dataclass

from app.model.skeleton import Skeleton


def tags(person_ids: Iterable[int]) -> dict[int, int]:
    """Each person's tag: the 1-based position in the frame's people list.

    Parameters
    ----------
    person_ids
        The frame's person ids in the order the project lists them (by id).

    Returns
    -------
    dict
        Person id -> tag.

    Examples
    --------
    >>> tags([3, 8, 21])
    {3: 1, 8: 2, 21: 3}
    """
    return {int(pid): n + 1 for n, pid in enumerate(person_ids)}


def joint_name(skeleton: Skeleton, joint: int) -> str:
    """A joint's name as text: the skeleton's name with underscores as spaces.

    Examples
    --------
    >>> from app.model.skeleton import coco_body
    >>> joint_name(coco_body(), 9)
    'left wrist'
    """
    return skeleton.joints[int(joint)].replace("_", " ")


def person_text(tag: int | None, person_id: int | None = None) -> str:
    """A person as text: ``person 5``, or ``person 5 (#49)`` with the stable id.

    A person without a tag (not in the frame's list) is written by id alone: ``person #49``.

    Examples
    --------
    >>> person_text(5), person_text(5, 49), person_text(None, 49)
    ('person 5', 'person 5 (#49)', 'person #49')
    """
    if tag is None:
        return f"person #{person_id}"
    return f"person {tag}" if person_id is None else f"person {tag} (#{person_id})"


def join_words(words: Sequence[str]) -> str:
    """``a``, ``a and b``, ``a, b and c``.

    Examples
    --------
    >>> join_words(["nose"]), join_words(["a", "b", "c"])
    ('nose', 'a, b and c')
    """
    items = list(words)
    if len(items) <= 1:
        return "".join(items)
    return ", ".join(items[:-1]) + " and " + items[-1]


def _plural(noun: str) -> str:
    """English plural of a joint's name, by the regular rules (``hip`` -> ``hips``)."""
    if noun.endswith(("s", "x", "ch", "sh")):
        return noun + "es"
    if noun.endswith("y") and noun[-2:-1] not in ("a", "e", "i", "o", "u"):
        return noun[:-1] + "ies"
    return noun + "s"


@dataclass(frozen=True)
class Names:
    """The names of one frame's people and of the skeleton's joints.

    Attributes
    ----------
    skeleton
        Gives the joint names.
    order
        The frame's person ids in list order (tags 1, 2, ...).
    """

    skeleton: Skeleton
    order: tuple[int, ...]

    @staticmethod
    def of_frame(skeleton: Skeleton, person_ids: Iterable[int]) -> Names:
        """Names for a frame whose people are listed in this order (the project's, by id)."""
        return Names(skeleton, tuple(int(p) for p in person_ids))

    def tag(self, person_id: int) -> int | None:
        """The person's tag, or None when the person is not in the frame."""
        try:
            return self.order.index(int(person_id)) + 1
        except ValueError:
            return None

    def person(self, person_id: int, with_id: bool = False) -> str:
        """``person 5``, or ``person 5 (#49)`` with ``with_id``."""
        tag = self.tag(person_id)
        return person_text(tag, int(person_id) if with_id or tag is None else None)

    def joint(self, joint: int) -> str:
        """``left wrist``."""
        return joint_name(self.skeleton, joint)

    def joints(self, joints: Iterable[int]) -> str:
        """Several joints in the given order: ``left wrist, left elbow and left shoulder``;
        a joint named with both of its sides is written once, in the plural (``hips``).

        Examples
        --------
        >>> from app.model.skeleton import coco_body
        >>> Names.of_frame(coco_body(), []).joints([11, 12, 13, 14, 15])
        'hips, knees and left ankle'
        """
        chosen = [int(j) for j in joints]
        flip = self.skeleton.flip_index
        words, done = [], set()
        for j in chosen:
            if j in done:
                continue
            mate = int(flip[j])
            if mate != j and mate in chosen:
                done.add(mate)
                words.append(_plural(self.skeleton.joints[j].split("_", 1)[1].replace("_", " ")))
            else:
                words.append(self.joint(j))
        return join_words(words)

    def whose(self, person_id: int, joint: int) -> str:
        """``person 3's left wrist``."""
        return f"{self.person(person_id)}'s {self.joint(joint)}"


#: How the edits' ledger summaries name people and joints (``app.model.edits``: by stable id
#: and joint index), and how a person is written with a tag and an id.
_LEDGER_NAMES = re.compile(r"\bjoints? (\[[\d, ]*\]|\d+) of person (\d+)"
                           r"|\bperson (?:\d+ )?\(#(\d+)\)|\bperson #(\d+)|\bperson (\d+)\b")


def ledger_names(summary: str, names: Names) -> str:
    """A ledger summary as people read it: each person by tag and stable number, each joint
    by name.

    The edits record people by stable id and joints by index (``give joint 9 of person 49
    to person 7``), so that the ledger stays true whatever happens to the frame's list; this
    writes them with the tags the frame shows now.

    Examples
    --------
    >>> from app.model.skeleton import coco_body
    >>> names = Names.of_frame(coco_body(), [7, 49])
    >>> ledger_names("give joint 9 of person 49 to person 7", names)
    "give person 2 (#49)'s left wrist to person 1 (#7)"
    >>> ledger_names("split joints [11, 12] of person 49 into a new person", names)
    "split person 2 (#49)'s hips into a new person"
    >>> ledger_names("delete person 3 (#80)", names)
    'delete person #80'
    """
    def named(m: re.Match[str]) -> str:
        if m.group(1) is not None:
            joints = [int(x) for x in re.findall(r"\d+", m.group(1))]
            pid = int(m.group(2))
            if any(j >= names.skeleton.num_joints for j in joints):
                return m.group(0)
            return f"{names.person(pid, with_id=True)}'s {names.joints(joints)}"
        pid = int(next(g for g in m.groups()[2:] if g is not None))
        return names.person(pid, with_id=True)

    return _LEDGER_NAMES.sub(named, summary)
