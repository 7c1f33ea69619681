"""Confidence of a proposed fix: the probability that applying it makes the labels more right.

Per kind, ``confidence = 1 / (1 + exp(-(a + b * strength)))``, a logistic regression of
"the fix helped" on the finding's strength, fitted (:func:`fit_logistic`) on the demo seeds
named in its ``fitted_on`` by :mod:`app.demo.calibrate`. A fix *helped* when, applied alone to
the labels it was proposed for, it removed at least as many wrong labelled joints as it added
and lost no correct ones, and changed at least one of the two counts (a change of visibility
alone helped when the true visibility agrees); "correct" and "wrong" are judged against the
demo's true poses by :func:`app.demo.evaluate.judge_joints`.

The coefficients of :data:`SHIPPED` were fitted on both scenarios together: dance seeds 1-8
and choir seeds 1-8, 12 frames each, generated with the current error model and grouped
frame by frame, after triage's weights had been fitted again on the same seeds (the
wrong-owner, split and crossed-sides fixes judge hypotheses by triage's weighted evidence,
so the calibration follows the weights). The last fit, on 3 December 2026, followed the
change of ``missing-joints`` (a joint whose limb the network's field does not show counts
half) and its new weights; only ``crossed-sides``, ``split`` and ``wrong-owner`` moved
(6,350 fixes tried); ``missed-person`` keeps its earlier coefficients (the fit seeds have
fewer than 8 of its fixes, proposed only for a complete body). ``missing-joint`` alone was
fitted again the same day on the same seeds, after a faint peak whose limb's field runs the
other way stopped being offered (``AGAINST_BELOW`` in :mod:`app.analysis.triage.fixes`):
143 fixes, 115 helped (19 of 35 on the dance, 96 of 108 on the choir; before, 19 of 45 and
96 of 117); every other kind's fit on those seeds gave its coefficients below unchanged.
``invented`` alone was fitted again after it stopped unlabelling a hidden shoulder, elbow,
hip or face joint (``GUESSED_PARTS`` in :mod:`app.analysis.triage.fixes`): 6,069 fixes on
the same seeds, the other kinds' coefficients unchanged; its proposed fixes there helped 47 %
of the time on the dance (165) and 91 % on the choir (1,792), against 38 % (248) and 86 %
(1,867) before.
``shared-spot`` was added later the same day and only its coefficients fitted, on the same
seeds (201 fixes; a kind's proposals, each judged alone, do not depend on the other kinds).
Accepting every proposed fix on seeds that took part in no fit (12 frames each) removed
62.5 %, 48.5 % and 44.9 % of the wrong labelled joints on choir seeds 41-43, and 35.7 %,
47.4 % and 49.8 % on the fresh choir seeds 44-46 (measured once), while the correct ones
rose by 0.0-3.4 %; on the dance, 43.9 % on the shipped demo (553 to 310; correct +3.8 %;
44.1 % since the later rounds of accepting leave alone the joints an accepted fix placed or
unlabelled), 38.9-46.6 % on seeds 41-43 and 23.8 %, 65.5 % and 52.7 % on the fresh seeds
44-46, below the dance's goal of half on most. The fit before (2 December, the same seeds)
gave within 2.4 points of these on every choir seed and the shipped demo. The README's "Two
scenarios" section has the table, its "Findings" section the per-kind and reliability
tables.

Since ``import-maps`` groups each sequence with the frame before by default (3 December 2026,
afternoon), every kind but ``missed-person`` was fitted again on the same seeds grouped that
way, triage weighing them by its frame-before weights (6,029 fixes tried; ``missed-person``
keeps its coefficients, too few of its fixes there). That fit moved ``duplicate``,
``mirrored``, ``hidden`` and ``wrong-owner`` most. One calibration serves both groupings:
labels grouped each frame alone (``--each-frame-alone``, pre-labelling, a folder marked not
a sequence) are judged by it too. Accepting every fix, grouped with the frame before: the
shipped demo 430 wrong joints to 233 (45.8 %; correct +2.7 %), dance seeds 41-43 51.8 %,
40.5 %, 58.1 % (+2.6 %, +5.0 %, +8.6 %), choir seeds 41-43 70.4 %, 42.6 %, 47.9 % (+6.1 %,
-0.3 %, +1.8 %); 12 frames each but the shipped demo's 24. Grouped each frame alone, the
same calibration removes 48.5 % on the shipped demo (+4.4 %) and 46.6 %, 38.8 %, 47.7 % on
dance seeds 41-43, against 43.9 %, 46.6 %, 38.8 %, 44.3 % with the fit grouped alone.
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np

#: A kind without coefficients (too rare in the fit) gets this confidence, below
#: :data:`PROPOSE_AT`: without evidence that its fixes help, none is proposed.
UNFITTED = (-2.0, 0.0)
#: A fix is proposed (and accepted by ``--accept``) from this confidence on: when it is more
#: likely to make the labels more right than not.
PROPOSE_AT = 0.5


@dataclass(frozen=True)
class Calibration:
    """Per kind ``(a, b)`` of ``confidence = 1 / (1 + exp(-(a + b * strength)))``, the
    confidence from which a fix is proposed, and the demo seeds it was fitted on."""

    coefficients: Mapping[str, tuple[float, float]] = field(default_factory=dict)
    propose_at: float = PROPOSE_AT
    fitted_on: tuple[str, ...] = ()

    def confidence(self, kind: str, strength: float) -> float:
        """The probability that a fix of ``kind`` at ``strength`` helps.

        Examples
        --------
        >>> round(Calibration({"split": (-1.0, 2.0)}).confidence("split", 1.0), 3)
        0.731
        """
        a, b = self.coefficients.get(kind, UNFITTED)
        return 1.0 / (1.0 + math.exp(-(a + b * float(strength))))


#: The calibration the findings use, fitted by :mod:`app.demo.calibrate` on the seeds named.
SHIPPED = Calibration({
    "crossed-sides": (-2.131, -0.885),
    "duplicate": (-3.064, 9.892),
    "hidden": (3.985, 2.029),
    "invented": (0.498, 3.07),
    "mirrored": (-1.421, 7.683),
    "missed-person": (5.532, 0.841),
    "missing-joint": (1.573, -0.056),
    "phantom": (7.08, -5.272),
    "shared-spot": (1.395, 6.14),
    "split": (-2.899, 6.205),
    "wrong-owner": (1.128, -0.251),
}, PROPOSE_AT, tuple(f"{scene} {seed}" for scene in ("dance", "choir") for seed in range(1, 9)))


def confidence(kind: str, strength: float) -> float:
    """:meth:`Calibration.confidence` of the shipped calibration.

    Examples
    --------
    >>> 0.0 < confidence("duplicate", 1.0) < 1.0
    True
    """
    return SHIPPED.confidence(kind, strength)


def fit_logistic(x: Any, y: Any, ridge: float = 1e-2, iterations: int = 50) -> tuple[float, float]:
    """Maximum-likelihood ``(a, b)`` of ``P(y) = 1 / (1 + exp(-(a + b x)))``.

    Parameters
    ----------
    x
        ``(n,)`` strengths.
    y
        ``(n,)`` 0 or 1: whether each fix helped.
    ridge
        A small L2 penalty on ``a`` and ``b`` that keeps them finite when the classes
        separate.
    iterations
        Newton steps (iteratively reweighted least squares).

    Returns
    -------
    tuple of float

    Notes
    -----
    Newton's method on the penalised log-likelihood: with ``X = [1, x]``, ``p`` the current
    probabilities and ``W = diag(p (1 - p))``, ``theta += (X^T W X + ridge I)^-1 (X^T (y - p)
    - ridge theta)``.

    References
    ----------
    T. Hastie, R. Tibshirani, J. Friedman, "The Elements of Statistical Learning", 2nd ed.,
    Springer, 2009, Sec. 4.4.1 (fitting logistic regression by iteratively reweighted least
    squares; from memory).

    Examples
    --------
    >>> x = np.array([0.1, 0.2, 0.3, 0.7, 0.8, 0.9, 0.5, 0.5])
    >>> y = np.array([0, 0, 0, 1, 1, 1, 0, 1])
    >>> a, b = fit_logistic(x, y)
    >>> b > 0 and abs(a + 0.5 * b) < 0.5
    True
    """
    xs = np.asarray(x, dtype=np.float64).reshape(-1)
    ys = np.asarray(y, dtype=np.float64).reshape(-1)
    design = np.column_stack([np.ones_like(xs), xs])
    theta = np.zeros(2)
    for _ in range(iterations):
        p = 1.0 / (1.0 + np.exp(-design @ theta))
        w = p * (1.0 - p)
        hessian = design.T @ (design * w[:, None]) + ridge * np.eye(2)
        gradient = design.T @ (ys - p) - ridge * theta
        step = np.linalg.solve(hessian, gradient)
        theta += step
        if np.abs(step).max() < 1e-10:
            break
    return float(theta[0]), float(theta[1])


def reliability_table(predicted: Any, helped: Any,
                      edges: Any = (0.0, 0.5, 0.6, 0.7, 0.8, 0.9, 1.0)) -> list[dict[str, Any]]:
    """Predicted confidence against the observed share of fixes that helped, per bin.

    Parameters
    ----------
    predicted
        ``(n,)`` confidences.
    helped
        ``(n,)`` whether each fix helped.
    edges
        Bin edges; the last bin includes its upper edge.

    Returns
    -------
    list of dict
        Per non-empty bin: ``low``, ``high``, ``fixes``, ``mean_confidence``, ``helped``
        (the observed share).

    Notes
    -----
    A calibrated confidence has ``helped`` close to ``mean_confidence`` in every bin (the
    reliability diagram). Common practice, no source.

    Examples
    --------
    >>> reliability_table([0.55, 0.65, 0.95, 0.92], [1, 0, 1, 1], edges=(0.0, 0.9, 1.0))
    [{'low': 0.0, 'high': 0.9, 'fixes': 2, 'mean_confidence': 0.6, 'helped': 0.5}, \
{'low': 0.9, 'high': 1.0, 'fixes': 2, 'mean_confidence': 0.935, 'helped': 1.0}]
    """
    p = np.asarray(predicted, dtype=np.float64).reshape(-1)
    y = np.asarray(helped, dtype=np.float64).reshape(-1)
    bounds = list(edges)
    out = []
    for n, (lo, hi) in enumerate(itertools.pairwise(bounds)):
        last = n == len(bounds) - 2
        inside = (p >= lo) & ((p <= hi) if last else (p < hi))
        if not inside.any():
            continue
        out.append({"low": float(lo), "high": float(hi), "fixes": int(inside.sum()),
                    "mean_confidence": round(float(p[inside].mean()), 4),
                    "helped": round(float(y[inside].mean()), 4)})
    return out
