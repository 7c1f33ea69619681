"""Every key and mouse gesture of the app, in one table.

The main window builds its actions from :data:`KEYS`, the shortcut sheet (F1) lists it, and the
README's key table is checked against it by a test, so the three never disagree. Standard
actions (undo, redo, zoom, open, quit) use the platform's own keys through
:class:`~PySide6.QtGui.QKeySequence.StandardKey`, plus the keys the README promises on every
platform (Ctrl+Y and Ctrl+Shift+Z redo, Ctrl+Q quits).

The standard keys differ by keyboard scheme: Quit is Ctrl+Q on Linux desktops and macOS but
has no key on Windows, Redo is Ctrl+Shift+Z on Linux but also Ctrl+Y on Windows. So a key
listed explicitly may be the platform's own as well; :func:`sequences` drops such repeats,
because Qt fires neither binding of a key bound twice ("Ambiguous shortcut overload").
"""

from __future__ import annotations

import html
from dataclasses import dataclass

from PySide6.QtGui import QKeySequence

StandardKey = QKeySequence.StandardKey


@dataclass(frozen=True)
class Key:
    """One entry of the key table.

    ``name`` names the window's action (empty for gestures the Canvas handles itself);
    ``keys`` are key sequences in portable text or standard keys; ``gesture`` describes a
    mouse gesture or a key family instead of ``keys``.
    """

    group: str
    name: str
    text: str
    help: str
    keys: tuple[str | QKeySequence.StandardKey, ...] = ()
    gesture: str = ""


def _digits() -> tuple[Key, ...]:
    return tuple(
        Key("Joints", f"give_{n}", f"Give to person {n}",
            f"Give the selected joints to person {n}", (str(n),))
        for n in range(1, 10)
    )


KEYS: tuple[Key, ...] = (
    # Frames
    Key("Frames", "next_frame", "Next frame", "Next frame in the Worklist (most suspicious first)",
        ("Space", "PgDown")),
    Key("Frames", "prev_frame", "Previous frame", "Previous frame in the Worklist",
        ("Shift+Space", "PgUp")),
    Key("Frames", "mark_disputed", "Mark disputed",
        "Mark the frame disputed; again: back to corrected", ("Ctrl+D",)),
    Key("Frames", "sign_off", "Sign off", "Sign the frame off; again: back to corrected",
        ("Ctrl+Return",)),
    Key("Frames", "next_in_track", "Next frame of the track",
        "The next frame of the selected person's track, the same person selected",
        ("Alt+Right",)),
    Key("Frames", "prev_in_track", "Previous frame of the track",
        "The previous frame of the selected person's track, the same person selected",
        ("Alt+Left",)),
    Key("Frames", "carry_forward", "Carry the correction",
        "Carry your newest correction to the frames around it where the same tracks show "
        "the same error (one undo step)", ("Ctrl+Shift+C",)),
    Key("Frames", "carry_frame", "Carry the frame's corrections",
        "Carry every correction of the frame, of every person, to the frames around it where "
        "the same tracks show the same error (one undo step)", ("Ctrl+Alt+C",)),
    Key("Frames", "write_note", "Write a note",
        "Write a note in this frame's thread: Return adds it, Esc keeps it as a draft; either "
        "way the keys go back to the Canvas", ("C",)),
    # The walk through the findings
    Key("Walk", "next_finding", "Next finding",
        "Walk to the next finding (across frames in Worklist order); skips the one shown",
        ("W",)),
    Key("Walk", "prev_finding", "Previous finding", "Walk back to the previous finding",
        ("Shift+W",)),
    Key("Walk", "accept_fix", "Accept the fix",
        "Accept the shown finding's proposed fix (one undo step), then walk on", ("Y",)),
    Key("Walk", "dismiss_finding", "Not a problem",
        "Dismiss the shown finding as not a problem (undoable), then walk on; with a fix of "
        "the card under focus, that finding alone", ("I",)),
    Key("Walk", "next_part", "Next fix of the card",
        "Put the focus on the next fix of a card of several (Shift: the previous), through "
        "the card as a whole", ("E",)),
    Key("Walk", "prev_part", "Previous fix of the card",
        "Put the focus on the previous fix of a card of several", ("Shift+E",)),
    Key("Walk", "leave_out_part", "Leave the fix out",
        "Leave the fix under focus out of the card, or put it back: Y takes the others",
        ("D",)),
    # Selection
    Key("Selection", "", "", "Select a joint; on a limb or a tag, select the person",
        gesture="Click"),
    Key("Selection", "", "", "Add a joint to the selection, or take it out",
        gesture="Ctrl+Click"),
    Key("Selection", "", "", "Move the joint (one edit, on release)", gesture="Drag a joint"),
    Key("Selection", "", "", "Next / previous joint of the selected person",
        gesture="Tab / Shift+Tab"),
    Key("Selection", "next_person", "Next person", "Select the next person", ("]",)),
    Key("Selection", "prev_person", "Previous person", "Select the previous person", ("[",)),
    Key("Selection", "clear_selection", "Clear selection",
        "Clear the selection; cancel a merge in progress", ("Esc",)),
    # Joints
    *_digits(),
    Key("Joints", "", "", "Person 10 and up: type both digits quickly",
        gesture="Two digits"),
    Key("Joints", "give_best", "Give to the top suggestion",
        "Give the selected joint to the best-ranked other person listed beside it", ("G",)),
    Key("Joints", "mark_visible", "Mark visible", "Mark the selected joints visible", ("V",)),
    Key("Joints", "mark_occluded", "Mark occluded",
        "Mark the selected joints occluded (position known, hidden)", ("O",)),
    Key("Joints", "mark_unlabeled", "Mark unlabelled",
        "Mark the selected joints unlabelled (position remembered, not trained on)",
        ("U", "Del")),
    Key("Joints", "place_joint", "Place at pointer",
        "Place the selected joint where the mouse pointer is", ("P",)),
    Key("Joints", "", "", "Nudge the selected joint by 1 image pixel (Shift: 10), one edit "
        "per press", gesture="Arrow keys"),
    # People
    Key("People", "new_person", "New person from joint",
        "New person from the selected joints; with nothing selected, an empty person",
        ("N",)),
    Key("People", "split_person", "Split off selected joints",
        "Split the selected joints off their person into a new person", ("X",)),
    Key("People", "swap_sides", "Swap left and right",
        "Swap the left and right joints of the selected person", ("S",)),
    Key("People", "merge_people", "Merge people\u2026",
        "Merge: then click the person to merge into the selected one", ("M",)),
    Key("People", "delete_person", "Delete person", "Delete the selected person",
        ("Shift+Del",)),
    # View
    Key("View", "focus_mode", "Focus mode", "Dim everyone but the selected person", ("F",)),
    Key("View", "show_unlabeled", "Show unlabelled joints",
        "Show unlabelled joints as hollow crosses where they were", ("H",)),
    Key("View", "show_tags", "Show number tags", "Show or hide the number tags", ("T",)),
    Key("View", "fit", "Fit", "Fit the image to the Canvas", ("0",)),
    Key("View", "actual_size", "Actual pixels (1:1)", "One image pixel per screen pixel",
        ("Ctrl+0",)),
    Key("View", "zoom_in", "Zoom in", "Zoom in", (StandardKey.ZoomIn,)),
    Key("View", "zoom_out", "Zoom out", "Zoom out", (StandardKey.ZoomOut,)),
    Key("View", "", "", "Zoom at the pointer", gesture="Wheel"),
    Key("View", "", "", "Pan", gesture="Drag empty space, or middle/right drag"),
    # Ignore regions
    Key("Regions", "region_mode", "Ignore regions",
        "Region mode: draw, select, reshape and delete ignore regions; again: leave it",
        ("R",)),
    Key("Regions", "", "", "Draw a rectangular ignore region", gesture="Drag (region mode)"),
    Key("Regions", "", "", "Draw a polygon: click its corners, then Return or double-click "
        "to close it", gesture="Click corners, Return"),
    Key("Regions", "", "", "Take back the last corner of the polygon being drawn",
        gesture="Backspace"),
    Key("Regions", "", "", "Select the region; drag a corner to reshape it, or drag inside "
        "it to move it (one edit, on release)", gesture="Click inside a region"),
    Key("Regions", "", "", "Delete the selected region", gesture="Del (region mode)"),
    Key("Regions", "", "", "Cancel the polygon being drawn; again: leave region mode",
        gesture="Esc (region mode)"),
    # Settling a disputed frame
    Key("Settling", "show_theirs", "Show the reviewer's version",
        "Flip the Canvas between my labels and the reviewer's version of a disputed frame",
        ("B",)),
    Key("Settling", "next_difference", "Next difference",
        "Select the next joint where mine and the reviewer's version differ", ("J",)),
    Key("Settling", "prev_difference", "Previous difference",
        "Select the previous joint where mine and the reviewer's version differ",
        ("Shift+J",)),
    Key("Settling", "take_theirs_joint", "Take the reviewer's: joint",
        "Take the reviewer's version of the selected joint", ("A",)),
    Key("Settling", "take_theirs_person", "Take the reviewer's: person",
        "Take the reviewer's version of the selected person", ("Shift+A",)),
    Key("Settling", "take_theirs_frame", "Take the reviewer's: whole frame",
        "Take the reviewer's version of every difference in the frame", ("Ctrl+Shift+A",)),
    Key("Settling", "keep_ours_joint", "Keep mine: joint",
        "Keep my version of the selected joint",
        ("K",)),
    Key("Settling", "keep_ours_person", "Keep mine: person",
        "Keep my version of the selected person", ("Shift+K",)),
    Key("Settling", "keep_ours_frame", "Keep mine: whole frame",
        "Keep my version of every difference in the frame", ("Ctrl+Shift+K",)),
    Key("Settling", "settle_frame", "Settle the frame",
        "End the dispute: mark the frame corrected (open differences keep mine)",
        ("Shift+Return",)),
    # Reviewing a packet
    Key("Review", "decide_agree", "Looks right",
        "Reviewing a packet: the frame's labels look right; again: withdraw",
        ("Ctrl+1",)),
    Key("Review", "decide_needs_change", "Query",
        "Reviewing a packet: query the frame's labels (it comes back disputed); again: "
        "withdraw", ("Ctrl+2",)),
    Key("Review", "decide_signed_off", "Ready for training",
        "Reviewing a packet: the frame is ready for training (it comes back signed off); "
        "again: withdraw", ("Ctrl+3",)),
    Key("Review", "show_blurred", "Show blurred regions",
        "Reviewing a packet: outline where the packet's image was blurred, captioned with "
        "what placed each region (labels, maps, detector)", ("L",)),
    Key("Review", "return_packet", "Send the packet back\u2026",
        "Reviewing a packet: write FILE-returned.zip to send back", ("Ctrl+Shift+R",)),
    # Ledger
    Key("Ledger", "undo", "Undo", "Undo the last edit (any frame; the Canvas follows)",
        (StandardKey.Undo,)),
    Key("Ledger", "redo", "Redo", "Redo", (StandardKey.Redo, "Ctrl+Y", "Ctrl+Shift+Z")),
    # Project
    Key("Project", "open_project", "Open project\u2026", "Open another project",
        (StandardKey.Open,)),
    Key("Project", "import_labels", "Import labels\u2026", "Import COCO keypoints labels",
        ("Ctrl+I",)),
    Key("Project", "import_maps", "Import network maps\u2026",
        "Import network maps (one .npz per image)", ("Ctrl+Shift+I",)),
    Key("Project", "run_triage", "Run triage", "Rank the frames by suspicion", ("Ctrl+T",)),
    Key("Project", "export_labels", "Export labels\u2026", "Export a COCO keypoints dataset",
        ("Ctrl+E",)),
    Key("Project", "export_targets", "Export training targets\u2026",
        "Export confidence maps, part affinity fields and loss masks", ("Ctrl+Shift+E",)),
    Key("Project", "add_images", "Add images\u2026",
        "Add the images of a folder that the project does not have yet", ("Ctrl+Shift+F",)),
    Key("Project", "add_video", "Add video\u2026",
        "Add frames of a video (every N-th, from a start to an end time)", ("Ctrl+Shift+V",)),
    Key("Project", "prelabel", "Pre-label with a model\u2026",
        "Run an ONNX pose model on the CPU; frames that have people keep them",
        ("Ctrl+Shift+L",)),
    Key("Project", "export_packet", "Send frames for review\u2026",
        "Write a review packet (zip) for a colleague", ("Ctrl+Shift+P",)),
    Key("Project", "merge_packet", "Merge a packet sent back\u2026",
        "Merge a review packet a colleague sent back, joint by joint", ("Ctrl+Shift+M",)),
    Key("Project", "shortcuts", "Shortcut sheet", "This sheet", ("F1",)),
    Key("Project", "quit", "Quit", "Close the window", (StandardKey.Quit, "Ctrl+Q")),
)


def sequences(key: Key) -> list[QKeySequence]:
    """The key sequences of an entry, each once: standard keys expanded for this platform
    (which needs a Qt application: a headless one is started if there is none), then the
    entry's own keys that the platform does not bind already.

    Examples
    --------
    >>> [s.toString() for s in sequences(next(k for k in KEYS if k.name == "mark_unlabeled"))]
    ['U', 'Del']
    """
    if any(isinstance(k, QKeySequence.StandardKey) for k in key.keys):
        from app.ui.render import gui_application

        gui_application()
    found: list[QKeySequence] = []
    for k in key.keys:
        if isinstance(k, QKeySequence.StandardKey):
            found.extend(_standard_bindings(k))
        else:
            found.append(QKeySequence(k))
    unique: dict[str, QKeySequence] = {}
    for seq in found:
        unique.setdefault(seq.toString(QKeySequence.SequenceFormat.PortableText), seq)
    return list(unique.values())


def _standard_bindings(key: QKeySequence.StandardKey) -> list[QKeySequence]:
    """The keys this platform's keyboard scheme binds to a standard key."""
    return list(QKeySequence.keyBindings(key))


def key_text(key: Key) -> str:
    """How the sheet shows an entry's keys, e.g. ``"U, Del"`` or ``"Click"``.

    Examples
    --------
    >>> key_text(next(k for k in KEYS if k.name == "mark_unlabeled"))
    'U, Del'
    """
    if key.gesture:
        return key.gesture
    texts = [s.toString(QKeySequence.SequenceFormat.NativeText) for s in sequences(key)]
    return ", ".join(dict.fromkeys(t for t in texts if t))


def sheet_html() -> str:
    """The shortcut sheet as an HTML table, one section per group."""
    parts = ["<h2>Posewright keys</h2>"]
    group = None
    for key in KEYS:
        if key.group != group:
            if group is not None:
                parts.append("</table>")
            group = key.group
            parts.append(f"<h3>{html.escape(group)}</h3>"
                         "<table cellspacing='0' cellpadding='3'>")
        parts.append(f"<tr><td width='190'><b>{html.escape(key_text(key))}</b></td>"
                     f"<td>{html.escape(key.help)}</td></tr>")
    parts.append("</table>")
    return "\n".join(parts)
