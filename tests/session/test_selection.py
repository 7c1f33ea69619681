"""The selection without a window: joints in the order picked, the person of the last one,
Tab's order over a person's joints, and what is forgotten when people leave the frame.

Data: invented ids (synthetic); the rules are our own (app/session/selection.py), common
practice of list selection in desktop editors, no source.
"""

from __future__ import annotations

from app.session.selection import Selection


def test_adding_and_taking_out_joints_keeps_the_person_of_the_last_one():
    s = Selection()
    s.select_joint(4, 9)
    s.select_joint(6, 5, add=True)
    assert s.joints == [(4, 9), (6, 5)] and s.person == 6 and s.joint == (6, 5)
    s.select_joint(6, 5, add=True)
    assert s.joints == [(4, 9)] and s.person == 4


def test_tab_walks_the_persons_joints_and_wraps():
    s = Selection()
    s.select_person(3)
    assert s.cycled(1, 17) == (3, 0)
    s.select_joint(3, 16)
    assert s.cycled(1, 17) == (3, 0) and s.cycled(-1, 17) == (3, 15)
    assert Selection().cycled(1, 17) is None, "no person, no joint to go to"


def test_people_who_left_the_frame_leave_the_selection():
    s = Selection()
    s.select_joints([(4, 9), (5, 9)])
    assert not s.keep_only({4, 5})
    assert s.keep_only({4}) and s.joints == [(4, 9)] and s.person is None
