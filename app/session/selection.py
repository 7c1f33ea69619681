"""What the annotator has selected in the frame on screen, without Qt.

The Canvas shows it and turns clicks and keys into these calls; the window's actions read it.

Examples
--------
>>> s = Selection()
>>> s.select_joint(4, 9); s.select_joint(4, 7, add=True); s.joints, s.joint, s.person
([(4, 9), (4, 7)], (4, 7), 4)
>>> s.select_joint(4, 9, add=True); s.joints           # again: taken out
[(4, 7)]
>>> s.keep_only({5}), s.joints, s.person                # person 4 left the frame
(True, [], None)
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field


@dataclass
class Selection:
    """Selected joints ``(person id, joint)`` in the order picked, and the selected person
    (the owner of the last joint, or a person picked alone)."""

    joints: list[tuple[int, int]] = field(default_factory=list)
    person: int | None = None

    @property
    def joint(self) -> tuple[int, int] | None:
        """The joint selected last: the one single-joint actions work on."""
        return self.joints[-1] if self.joints else None

    def select_joint(self, person_id: int, joint: int, add: bool = False) -> None:
        """Select one joint; with ``add``, add it to the selection or take it out."""
        pair = (int(person_id), int(joint))
        if add:
            if pair in self.joints:
                self.joints.remove(pair)
            else:
                self.joints.append(pair)
        else:
            self.joints = [pair]
        self.person = self.joints[-1][0] if self.joints else int(person_id)

    def select_joints(self, pairs: Sequence[tuple[int, int]]) -> None:
        """Select these joints at once (the person of the last)."""
        if pairs:
            self.joints = [(int(p), int(j)) for p, j in pairs]
            self.person = self.joints[-1][0]

    def select_person(self, person_id: int | None) -> None:
        """Select a person alone (None: nothing)."""
        self.joints = []
        self.person = person_id

    def keep_only(self, person_ids: Iterable[int]) -> bool:
        """Forget what belongs to people no longer shown; True when that changed anything."""
        ids = set(person_ids)
        joints = [(p, j) for p, j in self.joints if p in ids]
        person = self.person if self.person in ids else None
        changed = joints != self.joints or person != self.person
        self.joints, self.person = joints, person
        return changed

    def cycled(self, step: int, num_joints: int) -> tuple[int, int] | None:
        """The selected person's next (``step`` 1) or previous (-1) joint after the one
        selected, placed or not (the first or last when none is); None without a person.

        Examples
        --------
        >>> s = Selection(); s.select_person(3); s.cycled(1, 17), s.cycled(-1, 17)
        ((3, 0), (3, 16))
        >>> s.select_joint(3, 16); s.cycled(1, 17)
        (3, 0)
        """
        if self.person is None:
            return None
        current = next((j for p, j in reversed(self.joints) if p == self.person), None)
        j = (0 if step > 0 else num_joints - 1) if current is None \
            else (current + step) % num_joints
        return self.person, j
