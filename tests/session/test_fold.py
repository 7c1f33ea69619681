"""A person finished in one card: the fixes a card's own fixes expose are folded into it
(app/session/walk.py, ``fold``), trimmed with their dependencies, and taken with one key as
one undo step.

The people and findings are synthetic (invented here): a person whose left wrist, once given
back, shows their left elbow wrong, a second problem that appears only after the first fix.
That the later fix depends on the earlier one (it was found on the labels the earlier leaves)
is this module's own rule; one action, one undo step is the command pattern's (common
practice, no source).
"""

from __future__ import annotations

from app.analysis.triage.findings import Finding, Fix, FixPreview, labels_digest
from app.model.edits import SetVisibility
from app.session import Session
from app.session.walk import Stop, card_lines, fold
from tests.analysis.synth import store_duplicate_and_split


def _finding(fid, pid, key, joint, v, sure=0.9, people=None):
    fix = Fix(f"mark {key}", (SetVisibility(fid, pid, joint, v),),
              FixPreview(occluded=((pid, joint),) if v == 1 else ()))
    return Finding(key, fid, "wrong-owner", pid, 1, (joint,), ("joint",), f"t{key}", (), 1.0,
                   sure, fix, people or (pid,), key * 2)


def _exposes(after_edits, then):
    """A finder (synthetic): ``then`` appears once an edit in ``after_edits`` is applied."""
    def find(edits):
        return list(then) if set(after_edits) <= set(edits) else []
    return find


def test_a_fix_exposed_by_the_first_joins_its_card_round_by_round():
    a = _finding(1, 3, "a", 9, 1)
    b = _finding(1, 3, "b", 7, 1)   # appears once a is applied
    c = _finding(1, 3, "c", 5, 1)   # appears once b is applied too
    other = _finding(1, 4, "d", 9, 1)

    def find(edits):
        out = [other]
        if a.fix.edits[0] in edits:
            out.append(b)
        if b.fix.edits[0] in edits:
            out.append(c)
        return out

    stops = [Stop(1, "a", 3, (9,), "ta", a), Stop(1, "d", 4, (9,), "td", other)]
    out = fold(stops, find)
    assert [p.id for p in out[0].parts] == ["a", "b", "c"] and out[0].rounds == (0, 1, 2)
    assert [e.joint for e in out[0].fix.edits] == [9, 7, 5], "in the order found"
    assert out[1] is stops[1], "another person's stop, found before, stays as it was"


def test_a_new_fix_too_unsure_or_conflicting_stays_out():
    a = _finding(1, 3, "a", 9, 1)
    d = _finding(1, 4, "d", 9, 1)
    unsure = _finding(1, 3, "u", 6, 1, sure=0.01)
    e = _finding(1, 3, "e", 9, 0)       # a stop of its own (it moves a's wrist another way)
    clash = _finding(1, 3, "x", 9, 1)   # the wrist stop e changes too
    e_stop = Stop(1, "e", 3, (9,), "te", e)
    stops = [Stop(1, "a", 3, (9,), "ta", a), Stop(1, "d", 4, (9,), "td", d), e_stop]
    out = fold(stops, _exposes([a.fix.edits[0]], [unsure, clash]))
    assert out == stops


def test_a_fix_two_cards_expose_together_merges_them_into_one():
    """A fix that reads both hosts' people (person 3's fix leaves a joint of person 4's
    inside person 3's body) follows from neither alone: the two cards become one, the
    later's parts after the earlier's, then the new fix; one key instead of three stops."""
    a = _finding(1, 3, "a", 9, 1)
    d = _finding(1, 4, "d", 9, 1)
    shared = _finding(1, 3, "s", 7, 1, people=(3, 4))  # reads person 4, whom d changes
    e_stop = Stop(1, "e", 3, (9,), "te", _finding(1, 3, "e", 9, 0))
    stops = [Stop(1, "a", 3, (9,), "ta", a), Stop(1, "d", 4, (9,), "td", d), e_stop]
    out = fold(stops, _exposes([a.fix.edits[0]], [shared]), places=True)
    card = out[0]
    assert out[1:] == [None, e_stop], "d is on the card now; e (a conflict) stays apart"
    assert [p.id for p in card.parts] == ["a", "d", "s"] and card.rounds == (0, 0, 1)
    assert card.merged == ("d",) and card.key == "a+d+s"
    assert [f.id for f in card.findings] == ["a", "d", "s"], "every finding stays on a card"
    trimmed = card.refocus(2).leave_out()  # leave out d: s was found on the labels d leaves
    assert [f.id for f in trimmed.taken] == ["a"]


def test_two_cards_stay_apart_when_together_they_would_link_too_many_people():
    """CARD_PEOPLE (4) people at most on a card, counted by whom the fixes change."""
    one = tuple(_finding(1, p, f"h{p}", 9, 1) for p in (3, 5, 6))
    two = tuple(_finding(1, p, f"h{p}", 9, 1) for p in (4, 7))
    stops = [Stop(1, "c1", 3, (9,), "t", one[0], one, one),
             Stop(1, "c2", 4, (9,), "t", two[0], two, two)]
    shared = _finding(1, 3, "s", 7, 1, people=(3, 4))
    assert fold(stops, _exposes([one[0].fix.edits[0]], [shared])) == stops


def test_a_new_fix_may_change_again_a_joint_the_card_changed():
    """Found on the labels the card leaves, it follows the card's fix in one group."""
    a = _finding(1, 3, "a", 9, 2)
    again = _finding(1, 3, "g", 9, 1)   # the wrist, placed, is then found hidden
    out = fold([Stop(1, "a", 3, (9,), "ta", a)], _exposes([a.fix.edits[0]], [again]))
    assert [e.v for e in out[0].fix.edits] == [2, 1]


def test_leaving_out_an_early_fix_drops_the_fixes_found_after_it():
    a = _finding(1, 3, "a", 9, 1)
    b = _finding(1, 3, "b", 7, 1)
    card = fold([Stop(1, "a", 3, (9,), "ta", a)], _exposes([a.fix.edits[0]], [b]))[0]
    trimmed = card.refocus(1).leave_out()
    assert trimmed.taken == () and trimmed.fix is None, "b was found on a's labels"
    assert [out for _, out, _ in card_lines(trimmed)] == [True, True], "both shown left out"
    late = card.refocus(-1).leave_out()
    assert [f.id for f in late.taken] == ["a"], "leaving out the later one keeps the first"


def test_a_folded_card_is_taken_with_one_key_as_one_undo_step(project, monkeypatch):
    """On a real project: the walk folds the next frame's card ahead (here at once, no
    worker), shows it with both fixes, and one accept applies both as one ledger group that
    one undo takes back."""
    import app.jobs_findings as jobs

    store_duplicate_and_split(project)
    f0, f1 = [f.id for f in project.frames()[:2]]
    first = project.people(f1)[0].id
    a = _finding(f1, first, "Fa", 9, 1)
    b = _finding(f1, first, "Fb", 7, 1)
    lead = _finding(f0, project.people(f0)[0].id, "F0", 9, 1)
    project.store_findings({fid: (labels_digest(project.labels(fid)), [f.to_dict()])
                            for fid, f in ((f0, lead), (f1, a))})

    def after(project_, frame, labels):  # b shows once a's wrist is occluded
        person = labels.people[first]
        return [b] if frame.id == f1 and int(person.keypoints[9][2]) == 1 else []

    monkeypatch.setattr(jobs, "findings_of_frame", after)
    s = Session(project, order=lambda: [f0, f1])
    s.open_frame(f0)
    assert s.step(1).key == "F0"
    s.open_frame(f1)
    card = s.step(1)
    assert card.frame_id == f1 and [p.id for p in card.parts] == ["Fa", "Fb"]
    groups = len({e.group_id for e in project.history()})
    s.accept()
    v = {j: int(project.labels(f1).people[first].keypoints[j][2]) for j in (7, 9)}
    assert v == {7: 1, 9: 1}
    assert len({e.group_id for e in project.history()}) == groups + 1, "one ledger group"
    project.undo()
    v = {j: int(project.labels(f1).people[first].keypoints[j][2]) for j in (7, 9)}
    assert v == {7: 2, 9: 2}, "one undo step takes both back"


def test_a_finding_known_before_is_not_taken_for_one_a_fix_exposed():
    """Findings over time read apart from the stops (``known``) are not new."""
    a = _finding(1, 3, "a", 9, 1)
    b = _finding(1, 3, "b", 7, 1)
    out = fold([Stop(1, "a", 3, (9,), "ta", a)], _exposes([a.fix.edits[0]], [b]), known=[b])
    assert out[0].parts == ()
