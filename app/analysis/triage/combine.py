"""Combination of evidence: reasons, the weights they carry, and each person's suspicion.

A check returns :class:`Reason` records; each carries ``evidence = WEIGHTS[kind] * strength``
in log-odds. Evidence adds over kinds (each kind once, at its strongest reason), so that
several faint signs can together flag a person that no single sign would::

    suspicion = 1 / (1 + exp(-(PRIOR + sum over kinds of max WEIGHTS[kind] * strength)))

How ``PRIOR`` and ``WEIGHTS`` were fitted is told in :mod:`app.analysis.triage`.

References
----------
I. J. Good, "Probability and the Weighing of Evidence", Griffin, 1950 (weights of evidence as
log-odds that add; from memory).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

#: A person is flagged at this suspicion (chosen on the calibration seeds, see the module
#: docstring: the highest of 1/2, 1/3, 1/4 and 1/5 at which every one of them had at least
#: 90 % of its wrong people flagged). Read as costs: a miss, which teaches the network the
#: error, is taken to cost four times a needless look at a right label.
FLAG_AT = 1.0 / 5.0
#: Log-odds that a person is wrong before any evidence (fitted, see the module docstring).
PRIOR = -4.1
#: Evidence of each kind at full strength, in log-odds (fitted, see the module docstring;
#: capped at 8 in the fit: no single sign is taken as more certain than 98 %).
WEIGHTS: dict[str, float] = {
    "missing-joints": 7.0,
    "stretched-limb": 2.5,
    "short-legs": 8.0,
    "tilted-torso": 8.0,
    "off-ground": 2.0,
    "mirrored": 5.5,
    "crossed-sides": 4.5,
    "duplicate": 0.0,
    "tangled": 3.5,
    "split": 7.5,
    "weak-limb": 0.5,
    "low-score": 0.5,
    "invented": 4.0,
    "held-tie": 1.5,
    "opposed-field": 1.5,
    "neighbour-face": 0.0,
    "far-side": 4.5,
    "long-legs": 0.0,
}
#: The frame's score adds this times its crowd index.
CROWD_WEIGHT = 0.5
#: Reasons weaker than this are dropped, so that the list shows signs rather than noise (the
#: evidence lost is at most ``0.05 * 8 = 0.4`` in log-odds).
MIN_STRENGTH = 0.05
#: Frame-level reason shown from this crowd index on.
CROWDED_FROM = 0.5


@dataclass(frozen=True)
class Reason:
    """One piece of evidence that a person (or the frame) is labelled wrong.

    ``strength`` in [0, 1] says how far the measurement lies into its range; ``evidence`` is
    ``WEIGHTS[kind] * strength`` in log-odds; ``weight`` is the suspicion this reason alone
    gives, ``1 / (1 + exp(-(PRIOR + evidence)))`` (for the frame-level ``crowded``, the crowd
    index, at most 1). ``other`` is the other person a reason about a pair names.
    """

    kind: str
    text: str
    person: int | None
    joints: tuple[int, ...] = ()
    weight: float = 0.0
    strength: float = 0.0
    evidence: float = 0.0
    other: int | None = None

    def to_dict(self) -> dict[str, Any]:
        out = {"kind": self.kind, "text": self.text, "person": self.person,
               "joints": list(self.joints), "weight": round(float(self.weight), 4),
               "evidence": round(float(self.evidence), 4)}
        if self.other is not None:
            out["other"] = self.other
        return out


@dataclass
class FrameTriage:
    """The verdict on one frame."""

    score: float
    reasons: list[Reason]
    suspicion: dict[int, float] = field(default_factory=dict)
    crowd_index: float = 0.0
    #: The frame's findings (:class:`app.analysis.triage.findings.Finding`), when computed.
    findings: list[Any] = field(default_factory=list)

    @property
    def flagged(self) -> list[int]:
        """Ids of the people whose suspicion reaches :data:`FLAG_AT`, most suspicious first."""
        return sorted((p for p, s in self.suspicion.items() if s >= FLAG_AT),
                      key=lambda p: -self.suspicion[p])


def ramp(x: float, lo: float, hi: float) -> float:
    """0 at ``lo``, 1 at ``hi`` (either order), linear between, clipped."""
    return float(np.clip((x - lo) / (hi - lo), 0.0, 1.0))


def sigmoid(x: float) -> float:
    return 1.0 / (1.0 + math.exp(-x))


def make_reason(kind: str, text: str, pid: int, joints: Any, strength: float,
                other: int | None = None) -> Reason:
    """A reason of ``kind`` about person ``pid`` with its evidence and weight filled in."""
    evidence = WEIGHTS[kind] * strength
    return Reason(kind, text, pid, tuple(int(j) for j in joints),
                  sigmoid(PRIOR + evidence), strength, evidence, other)


def combine(reasons: list[Reason], people: Any) -> dict[int, float]:
    """Each person's suspicion from their reasons.

    Parameters
    ----------
    reasons
        The frame's reasons (frame-level ones, with no person, are ignored).
    people
        The ids of the frame's people (an iterable of ints).

    Returns
    -------
    dict
        Person id -> suspicion in (0, 1).

    Notes
    -----
    ``suspicion = 1 / (1 + exp(-(PRIOR + sum over kinds of the largest evidence of that
    kind))``: log-odds of independent signs add; several reasons of one kind (two stretched
    limbs) are one sign, counted at its strongest.

    References
    ----------
    I. J. Good, "Probability and the Weighing of Evidence", Griffin, 1950 (weights of
    evidence as log-odds that add; from memory).

    Examples
    --------
    >>> r = [Reason("stretched-limb", "", 1, evidence=3.0), Reason("stretched-limb", "", 1,
    ...      evidence=4.0), Reason("tangled", "", 1, evidence=1.0)]
    >>> {p: round(s, 3) for p, s in combine(r, [1, 2]).items()}   # PRIOR + 4 + 1, PRIOR
    {1: 0.711, 2: 0.016}
    """
    best: dict[int, dict[str, float]] = {int(p): {} for p in people}
    for r in reasons:
        if r.person in best:
            kinds = best[r.person]
            kinds[r.kind] = max(kinds.get(r.kind, 0.0), r.evidence)
    return {p: sigmoid(PRIOR + sum(kinds.values())) for p, kinds in best.items()}


def stored_suspicion(reasons: Any) -> dict[int, float]:
    """Each person's suspicion from a frame's reasons as stored (:meth:`Reason.to_dict`).

    Parameters
    ----------
    reasons
        A list of dicts with ``kind``, ``person`` and ``evidence`` (what
        :func:`app.jobs_analysis.run_triage` keeps in the project).

    Returns
    -------
    dict
        Person id -> suspicion, for every person named by a reason; a person is flagged when
        it reaches :data:`FLAG_AT`. People without reasons are at ``1 / (1 + exp(-PRIOR))``.

    Notes
    -----
    The same combination as :func:`combine`; stored evidence is rounded to 4 decimals.

    Examples
    --------
    >>> stored = [{"kind": "off-ground", "person": 3, "evidence": 4.0, "weight": 0.42},
    ...           {"kind": "tangled", "person": 3, "evidence": 1.0, "weight": 0.04},
    ...           {"kind": "crowded", "person": None, "evidence": 0.0, "weight": 0.8}]
    >>> {p: round(v, 3) for p, v in stored_suspicion(stored).items()}
    {3: 0.711}
    """
    rebuilt = [Reason(str(r.get("kind", "")), "", int(r["person"]),
                      evidence=float(r.get("evidence") or 0.0))
               for r in reasons or () if r.get("person") is not None]
    return combine(rebuilt, sorted({r.person for r in rebuilt if r.person is not None}))
