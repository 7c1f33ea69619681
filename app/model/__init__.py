"""Plain data and edit operations: skeletons, people, frames, and the edits that change them."""

from app.model.edits import (
    AddNote,
    Change,
    DeletePerson,
    Edit,
    EditContext,
    MergePeople,
    MoveJoint,
    NewPerson,
    ReassignJoint,
    Restore,
    SetFrameState,
    SetVisibility,
    SplitPerson,
    SwapSides,
    apply_changes,
)
from app.model.labels import AUTO, IMPORTED, Frame, FrameLabels, FrameState, Note, Person
from app.model.skeleton import Side, Skeleton, coco_body, load_skeleton, skeleton_from_dict

__all__ = [
    "AUTO", "IMPORTED", "AddNote", "Change", "DeletePerson", "Edit", "EditContext", "Frame",
    "FrameLabels", "FrameState", "MergePeople", "MoveJoint", "NewPerson", "Note", "Person",
    "ReassignJoint", "Restore", "SetFrameState", "SetVisibility", "Side", "Skeleton",
    "SplitPerson", "SwapSides", "apply_changes", "coco_body", "load_skeleton",
    "skeleton_from_dict",
]
