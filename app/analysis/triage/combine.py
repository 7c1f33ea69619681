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

from app.model.labels import GROUPED_ALONE, GROUPED_FRAME_BEFORE

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
#: How a frame's auto-labels were grouped (:attr:`app.model.labels.Frame.grouping`, written
#: by ``import-maps`` and ``prelabel``): each frame alone, or each sequence in order with the
#: frame before (``import-maps --frame-before``). Labels with no record (imported, drawn by
#: hand, or from a project made before the record) are weighed as grouped alone.
ALONE = GROUPED_ALONE
FRAME_BEFORE = GROUPED_FRAME_BEFORE

#: The weights of labels grouped with the frame before: fitted on demos grouped that way
#: (the sixth refit, 3 December 2026, dance and choir seeds 1-8, 12 frames; DEVELOPERS.md
#: "The demo"), as ``PRIOR``, ``WEIGHTS`` and ``FLAG_AT`` are on demos grouped alone. Their
#: errors differ: the frame before fills in joints that the grouping alone leaves out and
#: keeps a wrong pairing over several frames (``held-tie`` speaks only here).
FRAME_BEFORE_FLAG_AT = 1.0 / 5.0
FRAME_BEFORE_PRIOR = -4.8
FRAME_BEFORE_WEIGHTS: dict[str, float] = {
    "missing-joints": 7.0,
    "stretched-limb": 0.5,
    "short-legs": 8.0,
    "tilted-torso": 8.0,
    "off-ground": 4.5,
    "mirrored": 5.0,
    "crossed-sides": 4.5,
    "duplicate": 7.0,
    "tangled": 2.5,
    "split": 8.0,
    "weak-limb": 0.5,
    "low-score": 1.0,
    "invented": 2.5,
    "held-tie": 1.5,
    "opposed-field": 2.5,
    "neighbour-face": 3.0,
    "far-side": 4.5,
    "long-legs": 4.0,
}


@dataclass(frozen=True)
class WeightSet:
    """The prior, the weights and the flagging threshold triage weighs one kind of label by."""

    prior: float
    weights: dict[str, float]
    flag_at: float

    def evidence(self, kind: str, strength: float) -> float:
        """``weights[kind] * strength`` (a kind the set lacks weighs 0)."""
        return self.weights.get(kind, 0.0) * strength


def weight_set(grouping: str | None = None) -> WeightSet:
    """The weights for labels grouped ``grouping`` (:data:`ALONE`, :data:`FRAME_BEFORE`, or
    None: no record, weighed as grouped alone). The module's constants are read at each call.

    >>> weight_set().prior == PRIOR, weight_set(FRAME_BEFORE).prior == FRAME_BEFORE_PRIOR
    (True, True)
    """
    if grouping == FRAME_BEFORE:
        return WeightSet(FRAME_BEFORE_PRIOR, FRAME_BEFORE_WEIGHTS, FRAME_BEFORE_FLAG_AT)
    return WeightSet(PRIOR, WEIGHTS, FLAG_AT)


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
    #: How the frame's labels were grouped (:data:`ALONE`, :data:`FRAME_BEFORE`, None: no
    #: record), which chose the weights (:func:`weight_set`).
    grouping: str | None = None

    @property
    def weights(self) -> WeightSet:
        """The weights this verdict was weighed by."""
        return weight_set(self.grouping)

    @property
    def flagged(self) -> list[int]:
        """Ids of the people whose suspicion reaches the weight set's ``flag_at``
        (:data:`FLAG_AT` for labels grouped alone), most suspicious first."""
        flag_at = self.weights.flag_at
        return sorted((p for p, s in self.suspicion.items() if s >= flag_at),
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


def reweigh(reasons: list[Reason], weights: WeightSet) -> list[Reason]:
    """``reasons`` (made with the default weights by :func:`make_reason`) with their evidence
    and weight taken from ``weights`` instead; frame-level reasons are kept as they are.

    >>> r = make_reason("duplicate", "", 1, (), 0.5)
    >>> r.evidence, reweigh([r], weight_set(FRAME_BEFORE))[0].evidence
    (0.0, 3.5)
    """
    out = []
    for r in reasons:
        if r.person is None:
            out.append(r)
            continue
        evidence = weights.evidence(r.kind, r.strength)
        out.append(Reason(r.kind, r.text, r.person, r.joints,
                          sigmoid(weights.prior + evidence), r.strength, evidence, r.other))
    return out


def combine(reasons: list[Reason], people: Any, prior: float | None = None) -> dict[int, float]:
    """Each person's suspicion from their reasons.

    Parameters
    ----------
    reasons
        The frame's reasons (frame-level ones, with no person, are ignored).
    people
        The ids of the frame's people (an iterable of ints).
    prior
        The log-odds before any evidence (default :data:`PRIOR`; :func:`weight_set` gives
        the one of each grouping).

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
    start = PRIOR if prior is None else prior
    return {p: sigmoid(start + sum(kinds.values())) for p, kinds in best.items()}


def stored_suspicion(reasons: Any, grouping: str | None = None) -> dict[int, float]:
    """Each person's suspicion from a frame's reasons as stored (:meth:`Reason.to_dict`).

    Parameters
    ----------
    reasons
        A list of dicts with ``kind``, ``person`` and ``evidence`` (what
        :func:`app.jobs_analysis.run_triage` keeps in the project).
    grouping
        How the frame's labels were grouped (:attr:`app.model.labels.Frame.grouping`): the
        stored evidence was weighed by that grouping's weights, and so is the prior.

    Returns
    -------
    dict
        Person id -> suspicion, for every person named by a reason; a person is flagged when
        it reaches the weight set's ``flag_at`` (:data:`FLAG_AT` grouped alone). People
        without reasons are at ``1 / (1 + exp(-PRIOR))``.

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
    return combine(rebuilt, sorted({r.person for r in rebuilt if r.person is not None}),
                   weight_set(grouping).prior)
