"""The walk's cursor: next and previous across frames in the given order, empty frames
skipped, and a stop that goes away leaves the cursor where the next one takes its place.

Data: invented stops (synthetic); the expected orders are our own rule (module docstring of
app/session/walk.py), no outside source.
"""

from __future__ import annotations

from app.session.walk import Stop, Walk


def _stops():
    return {5: [Stop(5, "a", 1, (), "a"), Stop(5, "b", 2, (), "b")], 8: [],
            2: [Stop(2, "c", 3, (), "c"), Stop(2, "d", 3, (), "d")]}


def test_forward_crosses_frames_in_the_given_order_and_skips_frames_without_stops():
    stops = _stops()
    walk = Walk(lambda: [5, 8, 2], lambda f: stops[f])
    keys, shown = [], 5
    while (stop := walk.step(1, shown)) is not None:
        keys.append(stop.key)
        shown = stop.frame_id
    assert keys == ["a", "b", "c", "d"]
    assert walk.current.key == "d", "at the end the cursor stays on the last stop"


def test_backward_from_a_frame_starts_at_the_stop_before_it():
    stops = _stops()
    walk = Walk(lambda: [5, 8, 2], lambda f: stops[f])
    assert walk.step(-1, 8).key == "b", "frame 8 has none: the last of frame 5"
    assert walk.step(-1, 5).key == "a"
    assert walk.step(-1, 5) is None


def test_a_stop_that_went_away_is_replaced_by_the_next():
    stops = _stops()
    walk = Walk(lambda: [5, 8, 2], lambda f: stops[f])
    walk.step(1, 5)
    stops[5] = [s for s in stops[5] if s.key != "a"]  # accepted: it is gone
    assert walk.step(1, 5).key == "b"
    stops[5] = []
    assert walk.step(1, 5).key == "c"


def test_going_to_another_frame_by_hand_restarts_the_walk_there():
    stops = _stops()
    walk = Walk(lambda: [5, 8, 2], lambda f: stops[f])
    walk.step(1, 5)
    assert walk.step(1, 2).key == "c"
