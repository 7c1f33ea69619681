"""What the window says about the session, read without a window (app/session/status.py):
Owners' selection line, a disputed frame's strip and the differences on the selection, the
status bar's counts.

Counts follow app.wording.count (tests/test_words.py); people and joints are named by
app/model/naming.py (tag, then stable id; COCO joint names, the open COCO keypoints
standard). The sentences are our own wording; the people, ids and reviewer ("bea") are
invented (synthetic).
"""

from __future__ import annotations

from types import SimpleNamespace

from app.model.labels import FrameState, Person
from app.model.naming import Names
from app.model.skeleton import coco_body
from app.session.selection import Selection
from app.session.status import (
    difference_text,
    dispute_strip,
    flags_text,
    selection_text,
    state_text,
    stops_text,
)
from app.session.view import WHOLE_PERSON, View
from app.session.walk import Stop


def _session(dispute=None):
    """People 40 (tag 1, right wrist visible at (12, 34), model score 0.75, by ana; its left
    wrist unplaced) and 41 (tag 2, flagged as a whole)."""
    a, b = Person.blank(40, 17, "ana"), Person.blank(41, 17)
    a.keypoints[10] = (12.0, 34.0, 2)
    a.scores[10] = 0.75
    b.keypoints[0] = (50.0, 50.0, 1)
    view = View()
    view.show([a, b], {41: frozenset({WHOLE_PERSON})})
    return SimpleNamespace(selection=Selection(), view=view, dispute=dispute,
                           names=Names.of_frame(coco_body(), [40, 41]))


def test_the_selection_line_names_the_person_and_the_joint():
    s = _session()
    assert selection_text(s) == "Nothing selected."
    s.selection.select_person(40)
    assert selection_text(s) == "<b>person 1 (#40)</b>: 1 labelled joint"
    s.selection.select_joint(40, 10)
    assert selection_text(s) == ("<b>person 1 (#40)</b> \u00b7 right wrist \u00b7 visible at "
                                 "(12.0, 34.0), model score 0.75, by ana")
    s.selection.select_joint(40, 9, add=True)
    assert selection_text(s) == "<b>person 1 (#40)</b>: 2 joints selected"
    s.selection.select_joint(40, 9)
    assert selection_text(s).endswith("left wrist: not placed (P places it at the pointer)")
    s.selection.select_joint(41, 0)
    assert selection_text(s).endswith("occluded at (50.0, 50.0), by unknown, "
                                      "<b>flagged by triage</b>")
    s.selection.select_person(99)
    assert selection_text(s) == "<b>person #99</b> (not in the version shown): 0 labelled joints"


def test_the_dispute_strip_counts_the_differences_on_the_version_shown():
    d = SimpleNamespace(joints=((40, 9), (40, 10)), people=("one difference",), who="bea")
    s = _session(dispute=d)
    assert dispute_strip(s, FrameState.CORRECTED) == ("", "")
    assert dispute_strip(s, FrameState.DISPUTED, review=True) == ("", "")
    line, tip = dispute_strip(s, FrameState.DISPUTED)
    assert line.startswith("<b>Disputed</b> \u00b7 bea differs on 2 joints of 1 person")
    assert "A takes the reviewer's, K keeps mine" in tip
    s.view.set_dispute([], {}, {}, "bea")
    s.view.show_theirs(True)
    line, tip = dispute_strip(s, FrameState.DISPUTED)
    assert line.startswith("<b>bea's version</b> (read-only) \u00b7 squares: 2 joints that "
                           "differ")
    s.dispute = None
    assert "no open differences" in dispute_strip(s, FrameState.DISPUTED)[0]


def test_what_the_versions_say_about_a_person_selected():
    def person(kind, n):
        return SimpleNamespace(alternative=SimpleNamespace(kind=kind), reviewer="bea",
                               joints=(None,) * n)

    found = {40: person("moved", 1), 41: person("deleted-there", 3)}
    d = SimpleNamespace(person=found.get, joint=lambda pid, j: None)
    s = _session(dispute=d)
    assert difference_text(s) == ""
    s.selection.select_person(40)
    assert difference_text(s) == "1 joint differs from bea's"
    s.selection.select_person(41)
    assert difference_text(s) == "bea deleted this person; it was edited here since"
    s.selection.select_joint(41, 0)
    assert difference_text(s) == "", "a joint on which the versions agree"


def test_the_status_bar_counts_flags_findings_and_stops():
    finding = SimpleNamespace(id="f1")
    one = Stop(1, "a", 40, (), "t", group=(finding, SimpleNamespace(id="f2")))
    two = Stop(1, "b", 41, (), "t", finding=finding)
    assert stops_text([one, two]) == " \u00b7 3 open findings at 2 stops"
    assert stops_text([two]) == " \u00b7 1 open finding"
    assert flags_text({40: frozenset(), 41: frozenset({3})}, None) == "flags on 1 person"
    assert flags_text({}, []) == "no flags \u00b7 0 open findings"
    assert state_text(None) == "" and state_text(FrameState.SIGNED_OFF, True) == \
        "signed off \u00b7 decision: none"
