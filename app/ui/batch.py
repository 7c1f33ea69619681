"""Several edits of one frame as one user action: one transaction, one ledger group, one undo
step (the macro form of the command pattern).

The Canvas and Owners use it when an action covers several selected joints, such as giving
three joints to person 4 or marking them all occluded. It only composes the model's own edits;
the store applies it like any other.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import ClassVar

from app.errors import EditRefused
from app.model.edits import Change, Edit, EditContext, needs_person_id
from app.model.labels import FrameLabels


@dataclass(frozen=True)
class Batch(Edit):
    """Apply ``edits`` (all of frame ``frame_id``) in order, as one edit.

    Notes
    -----
    Each edit plans against the labels the previous ones produced, so the changes compose;
    if any edit is refused the whole batch is refused and nothing changes.

    Examples
    --------
    >>> from app.model.labels import Person
    >>> from app.model.skeleton import coco_body
    >>> from app.model.edits import SetVisibility
    >>> p = Person.blank(1, 17); p.keypoints[[5, 6]] = (10, 10, 2)
    >>> labels = FrameLabels(3, coco_body(), {1: p})
    >>> new, changes = Batch(3, (SetVisibility(3, 1, 5, 1), SetVisibility(3, 1, 6, 1)),
    ...                      "mark 2 joints occluded").apply(labels)
    >>> new.people[1].keypoints[[5, 6], 2].tolist(), len(changes)
    ([1.0, 1.0], 2)
    """

    frame_id: int
    edits: tuple[Edit, ...]
    label: str = "batch"
    changes_labels: ClassVar[bool] = True

    def plan(self, labels: FrameLabels, ctx: EditContext) -> list[Change]:
        staged = labels
        changes: list[Change] = []
        for edit in self.edits:
            if edit.frame_id != self.frame_id or needs_person_id(edit):
                raise EditRefused("a batch holds edits of its own frame that need no new ids")
            staged, planned = edit.apply(staged, ctx)
            changes.extend(planned)
        return changes

    def summary(self) -> str:
        return self.label
