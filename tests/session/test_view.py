"""What the Canvas shows, on the session without a window: the people in tag order, colours
that stay put while a frame is edited, and the modes (region, pick, focus) with their events.

Data: invented people (synthetic). That near people differ in colour is the greedy
map-colouring rule of app/session/view.py (common practice, no source).
"""

from __future__ import annotations

import numpy as np
import pytest

from app.model.labels import Person
from app.session.view import PALETTE_SIZE, View


def _people(xs):
    out = []
    for n, x in enumerate(xs):
        p = Person.blank(10 + n, 17)
        p.keypoints[:5] = np.column_stack([np.full(5, x), np.arange(5.0) * 10, np.full(5, 2)])
        out.append(p)
    return out


def test_people_shown_in_tag_order_with_near_people_apart_in_colour():
    v = View()
    people = _people([0, 30, 60, 90, 120, 150, 180])
    v.show(people, {})
    assert [v.number_of(p.id) for p in people] == list(range(1, 8))
    assert sorted(v.colours.values()) == list(range(PALETTE_SIZE)), "seven people, all apart"


def test_colours_stay_while_the_frame_is_edited_and_start_again_on_another_frame():
    v = View()
    people = _people([0, 30, 60])
    v.show(people, {})
    before = dict(v.colours)
    v.show(people[1:], {})  # the first person deleted: the others keep theirs
    assert v.colours == {p: c for p, c in before.items() if p != people[0].id}
    v.show(list(reversed(people)), {}, keep_colours=False)
    assert v.colours[people[2].id] == 0, "another frame: the first tag takes the first colour"


def test_modes_and_their_events():
    v = View()
    heard = []
    v.events.connect("mode", lambda: heard.append(v.modes()))
    v.set_pick("merge")
    v.set_pick("merge")  # no change, no event
    assert v.set_region_mode(True) and v.pick is None, "region mode leaves a pick"
    assert not v.set_region_mode(True)
    v.set_focus(True)
    assert heard == [{"region": False, "pick": "merge", "focus": False},
                     {"region": True, "pick": None, "focus": False},
                     {"region": True, "pick": None, "focus": True}]
    with pytest.raises(ValueError):
        v.set_pick("lasso")


def test_the_session_holds_the_view_the_canvas_shows(project):
    from app.session import Session

    s = Session(project)
    assert isinstance(s.view, View) and s.view.people == [] and not s.view.region_mode


def test_what_else_is_drawn_is_the_views_and_says_so_once():
    v = View()
    heard = []
    v.events.connect("mode", lambda: heard.append((v.show_unlabeled, v.show_tags)))
    assert (v.show_unlabeled, v.show_tags, v.show_blurred) == (False, True, True)
    v.set_shown("unlabeled", True)
    v.set_shown("unlabeled", True)
    v.set_shown("tags", False)
    assert heard == [(True, True), (True, False)], "one event per change"
    with pytest.raises(ValueError):
        v.set_shown("faces", True)
