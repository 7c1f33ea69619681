"""The Worklist's words: the reason filter offers only kinds that tell frames apart, and a
frame's tooltip is a compact per-person summary of at most about ten lines.

Data: invented triage reasons (synthetic); the limits are the issue's own (common practice
for tooltips, no source).
"""

from __future__ import annotations

from app.model.naming import Names
from app.model.skeleton import coco_body
from app.session.worklist import TIP_PEOPLE, people_summary, separating_kinds


def test_a_kind_every_frame_has_is_not_offered_as_a_filter():
    frames = [frozenset({"crowded", "mirrored"}), frozenset({"crowded"}),
              frozenset({"crowded", "weak-limb", "mirrored"})]
    assert separating_kinds(frames) == [("mirrored", 2), ("weak-limb", 1)]


def test_the_tooltip_has_one_line_per_person_and_stays_short():
    reasons = [{"kind": k, "person": pid, "weight": 0.1 * pid}
               for pid in range(1, 21) for k in ("weak-limb", "off-ground")]
    reasons.append({"kind": "crowded", "person": None, "weight": 1.0})
    names = Names.of_frame(coco_body(), range(1, 21))
    lines = people_summary(reasons, names).splitlines()
    assert len(lines) <= 10
    assert lines[0].startswith("person 20 (#20): "), "the most suspicious person first"
    assert lines[TIP_PEOPLE] == f"and {20 - TIP_PEOPLE} more people"
    assert lines[-1] == "the frame: crowded"
