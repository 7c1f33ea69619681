"""What the window says about the session, without Qt: the selection line of Owners and its
note on the candidate owners, what a
disputed frame's versions say about it, the strips over the Canvas (a dispute, region mode, a
review) and the status bar's counts.

Each function returns text (Qt rich text where the window shows it as such: ``<b>`` and
``<span>`` only) from the session's state and a few plain values; the window puts it in its
widgets. Counts go through :func:`app.wording.count`, people and joints are named through the
session's :class:`app.model.naming.Names`. Tests read the words without a window
(tests/session/test_status.py).
"""

from __future__ import annotations

import html
from collections.abc import Mapping, Sequence
from typing import TYPE_CHECKING

import numpy as np

from app.model.labels import FrameState
from app.session.owners import FIT_MEANING
from app.session.settling import describe_difference
from app.session.view import WHOLE_PERSON
from app.wording import DECISION_WORDS, count, plural

if TYPE_CHECKING:
    from app.session.session import Session
    from app.session.walk import Stop

#: A joint's visibility as the annotator reads it (the COCO values 0, 1, 2).
VISIBILITY_WORDS = {0: "unlabelled", 1: "occluded", 2: "visible"}

#: A frame's state as the Worklist and the status bar say it.
STATE_WORDS = {
    FrameState.UNTOUCHED: "untouched",
    FrameState.CORRECTED: "corrected",
    FrameState.DISPUTED: "disputed",
    FrameState.SIGNED_OFF: "signed off",
}


def selection_text(session: Session) -> str:
    """Owners' line about the selection: the person, or the joint with where it is, its
    visibility, model score, author and whether triage flagged it."""
    sel = session.selection
    pid = sel.person
    if pid is None:
        return "Nothing selected."
    names = session.names
    view = session.view
    person = view.person(pid)
    head = f"<b>{names.person(pid, with_id=True)}</b>" + (
        "" if names.tag(pid) is not None or person is not None
        else " (not in the version shown)")
    joints = sel.joints
    if not joints or person is None:
        labelled = 0 if person is None else person.num_labelled
        return f"{head}: {count(labelled, 'labelled joint')}"
    if len(joints) > 1:
        return f"{head}: {count(len(joints), 'joint')} selected"
    j = joints[0][1]
    x, y, v = person.keypoints[j]
    name = names.joint(j)
    if not np.isfinite([x, y]).all():
        return f"{head} \u00b7 {name}: not placed (P places it at the pointer)"
    score = person.scores[j]
    extra = f", model score {score:.2f}" if np.isfinite(score) else ""
    flags = view.flags.get(pid, ())
    flag = ", <b>flagged by triage</b>" if j in flags or WHOLE_PERSON in flags else ""
    return (f"{head} \u00b7 {name} \u00b7 {VISIBILITY_WORDS[int(v)]} at ({x:.1f}, {y:.1f})"
            f"{extra}, by {person.sources[j] or 'unknown'}{flag}")


def owners_note(session: Session) -> str:
    """Owners' note under the selection: what the ranking of the selected joint's owners
    says (:attr:`app.session.session.Session.owner_ranking`) and how to read and use it; a
    hint when nothing is selected; "" for several joints or no ranking."""
    ranking = session.owner_ranking
    if ranking is None or len(session.selection.joints) != 1:
        return ("Select a joint to see who it could belong to."
                if session.selection.joint is None else "")
    return (f"<b>{html.escape(ranking.verdict)}</b><br>"
            f"<span style='color:#555'>{html.escape(FIT_MEANING)}; click a row "
            "beside the joint or press its tag number to give the joint</span>")


def difference_text(session: Session) -> str:
    """What mine and the reviewer's version say about the selection ("" if they agree)."""
    d = session.dispute
    joint = session.selection.joint
    pid = session.selection.person
    if d is None or pid is None:
        return ""
    if joint is not None:
        found = d.joint(*joint)
        if found is not None:
            return describe_difference(found[1], found[0].reviewer)
        return ""
    person = d.person(pid)
    if person is None:
        return ""
    if person.alternative.kind == "deleted-there":
        return f"{person.reviewer} deleted this person; it was edited here since"
    if person.alternative.kind == "deleted-here":
        return f"deleted here; {person.reviewer} kept editing this person"
    n = len(person.joints)
    return f"{count(n, 'joint')} {plural(n, 'differs', 'differ')} from {person.reviewer}'s"


def dispute_strip(session: Session, state: FrameState | None,
                  review: bool = False) -> tuple[str, str]:
    """The dispute strip's one short line, and the full sentence for its tooltip (the keys are
    on the strip's buttons, so the line need not say them); empty unless the frame shown
    (in ``state``) is disputed in the main project."""
    if review or state is not FrameState.DISPUTED:
        return "", ""
    d = session.dispute
    if d is None:
        return ("<b>Disputed</b> \u00b7 no open differences \u00b7 Shift+Return settles it",
                "No open differences with a reviewer's version: Shift+Return settles the "
                "frame (marks it corrected)")
    joints, people = len(d.joints), len(d.people)
    if session.view.showing_theirs:
        return (f"<b>{d.who}'s version</b> (read-only) \u00b7 squares: "
                f"{count(joints, 'joint')} that {plural(joints, 'differs', 'differ')} "
                "\u00b7 dashed lines lead to mine",
                f"Showing {d.who}'s version (read-only): squares mark "
                f"{count(joints, 'joint')} that {plural(joints, 'differs', 'differ')}; "
                "dashed lines lead to mine. A takes the reviewer's, K keeps mine, "
                "B shows mine")
    return (f"<b>Disputed</b> \u00b7 {d.who} differs on {count(joints, 'joint')} of "
            f"{count(people, 'person')} \u00b7 squares: mine, dashed lines: {d.who}'s",
            f"{d.who}'s review differs on {count(joints, 'joint')} of "
            f"{count(people, 'person')}: white squares mark mine, dashed lines lead to "
            f"{d.who}'s. A takes the reviewer's, K keeps mine (Shift: the person, "
            "Ctrl+Shift: the frame)")


def region_strip(region_mode: bool, regions: int, drafting: bool = False,
                 selected: int | None = None) -> str:
    """The region strip's line: what the mouse does in region mode ("" outside it), given
    how many ``regions`` the frame has, whether a polygon is being drawn and the region
    selected.

    Examples
    --------
    >>> region_strip(False, 2)
    ''
    >>> region_strip(True, 1, selected=4).split(" \u00b7 ")[-1]
    '1 ignore region in this frame'
    """
    if not region_mode:
        return ""
    held = f"{count(regions, 'ignore regions')} in this frame"
    if drafting:
        return ("<b>Drawing a polygon</b>: click the next corner \u00b7 Return or a double "
                "click closes it \u00b7 Backspace takes back a corner \u00b7 Esc cancels")
    if selected is not None:
        return (f"<b>Region {selected}</b> selected: drag a corner to reshape it, drag inside "
                "to move it \u00b7 Del deletes it \u00b7 Esc lets go \u00b7 " + held)
    return ("<b>Region mode</b>: drag a rectangle, or click the corners of a polygon "
            "\u00b7 click a region to select it \u00b7 training ignores these areas "
            "\u00b7 " + held)


def review_strip(packet: str, decision: str | None) -> tuple[str, str]:
    """The review strip's line and tooltip: the packet reviewed and the decision on the frame
    shown (one of :data:`app.wording.DECISION_WORDS`' keys, or None)."""
    words = DECISION_WORDS[decision] if decision else None
    word = f"<b>{words}</b>" if words else "none yet"
    return (f"<b>Reviewing</b> {packet} \u00b7 decision: {word}",
            f"Reviewing {packet}: your decision on this frame is "
            f"{words or 'none yet'}. Ctrl+1 looks right, "
            "Ctrl+2 queries it, Ctrl+3 makes it ready for training; the same key again "
            "withdraws")


def people_text(people: int, regions: int) -> str:
    """The status bar's people (ours) and ignore regions of the frame.

    >>> people_text(3, 0), people_text(1, 2)
    ('3 people', '1 person \u00b7 2 ignore regions')
    """
    return count(people, "people") + (f" \u00b7 {count(regions, 'ignore regions')}"
                                      if regions else "")


def flags_text(flags: Mapping[int, frozenset[int]], stops: Sequence[Stop] | None) -> str:
    """The status bar's flagged people and, once the frame's stops are read, its open
    findings (:func:`stops_text`)."""
    flagged = sum(1 for v in flags.values() if v)
    return ((f"flags on {count(flagged, 'people')}" if flagged else "no flags")
            + ("" if stops is None else stops_text(stops)))


def stops_text(stops: Sequence[Stop]) -> str:
    """The frame's open findings for the status bar, and the walk's stops when findings are
    grouped (a frame's hidden-joint and invented-spot fixes are one stop), so the count of
    findings and the card's "stop 4 of 11" agree."""
    found = sum(len(s.findings) for s in stops)
    text = f" \u00b7 {count(found, 'open findings')}"
    if len(stops) != found:
        text += f" at {count(len(stops), 'stops')}"
    return text


def state_text(state: FrameState | None, review: bool = False,
               decision: str | None = None) -> str:
    """The status bar's frame state, and in a review the decision on it.

    >>> state_text(FrameState.DISPUTED), state_text(FrameState.CORRECTED, True, "ready")
    ('disputed', 'corrected \u00b7 decision: ready for training')
    """
    if state is None:
        return ""
    text = STATE_WORDS[state]
    if review:
        text += f" \u00b7 decision: {DECISION_WORDS[decision] if decision else 'none'}"
    return text
