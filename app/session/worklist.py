"""The Worklist's words, without Qt: the reason kinds that tell frames apart, and the compact
per-person summary of a frame's reasons (the kinds' names are :mod:`app.wording`'s)."""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

from app.model.naming import Names, person_text
from app.wording import count, reason_label


def separating_kinds(kinds: Sequence[frozenset[str]]) -> list[tuple[str, int]]:
    """The kinds found in some frames but not all, with their frame counts, most frequent
    first.

    Examples
    --------
    >>> separating_kinds([frozenset({"crowded", "weak"}), frozenset({"crowded"})])
    [('weak', 1)]
    """
    counts: dict[str, int] = {}
    for ks in kinds:
        for k in ks:
            counts[k] = counts.get(k, 0) + 1
    return separating_counts(counts, len(kinds))


def separating_counts(counts: Mapping[str, int], frames: int) -> list[tuple[str, int]]:
    """Of the frame counts per kind (as the store counts them) among ``frames`` frames, the
    kinds found in some frames but not all, most frequent first.

    Examples
    --------
    >>> separating_counts({"crowded": 2, "weak": 1, "none": 0}, 2)
    [('weak', 1)]
    """
    kept = {k: n for k, n in counts.items() if 0 < n < frames}
    return sorted(kept.items(), key=lambda kv: (-kv[1], kv[0]))


#: Lines a Worklist tooltip gives to people (the rest are counted on one more line).
TIP_PEOPLE = 7


def people_summary(reasons: Sequence[dict[str, Any]], names: Names | None) -> str:
    """A compact tooltip: one line per person (most suspicious first, at most
    :data:`TIP_PEOPLE`), their reasons' kinds; then one line for the frame's own reasons.

    Examples
    --------
    >>> from app.model.skeleton import coco_body
    >>> print(people_summary([{"kind": "weak-limb", "person": 8, "weight": 0.3},
    ...                       {"kind": "mirrored", "person": 8, "weight": 0.9},
    ...                       {"kind": "crowded", "person": None}],
    ...                      Names.of_frame(coco_body(), [3, 8])))
    person 2 (#8): mirrored, weak limb
    the frame: crowded
    """
    by_person: dict[int, list[tuple[float, str]]] = {}
    frame_kinds: list[str] = []
    for r in reasons:
        kind = reason_label(r.get("kind", ""))
        if r.get("person") is None:
            if kind not in frame_kinds:
                frame_kinds.append(kind)
            continue
        by_person.setdefault(int(r["person"]), []).append((float(r.get("weight") or 0.0), kind))
    ranked = sorted(by_person.items(), key=lambda kv: (-sum(w for w, _ in kv[1]), kv[0]))
    lines = []
    for pid, items in ranked[:TIP_PEOPLE]:
        kinds = list(dict.fromkeys(k for _, k in sorted(items, key=lambda x: -x[0])))
        who = names.person(pid, with_id=True) if names is not None else person_text(None, pid)
        lines.append(f"{who}: {', '.join(kinds)}")
    if len(ranked) > TIP_PEOPLE:
        lines.append(f"and {count(len(ranked) - TIP_PEOPLE, 'more people')}")
    if frame_kinds:
        lines.append("the frame: " + ", ".join(frame_kinds))
    return "\n".join(lines)
