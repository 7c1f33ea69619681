"""Signs tried for triage before they become its reasons: measured, not (yet) in triage.

:func:`app.demo.weights.judge` can add each sign of :data:`TRIAL_SIGNS` as an extra column
(``python -m app.demo.weights --trial-signs NAME,...``), so that it is fitted and measured
like triage's own kinds without touching triage. A sign is a function of one
:class:`app.demo.calibrate.DemoFrame` giving each person of the frame a strength in [0, 1]
(0 where it cannot tell, for example without maps).

The signs tried here on demos grouped with the frame before on 3 December 2026 are triage's
reasons now: ``held-tie`` (:func:`app.analysis.triage.model_evidence.held_tie`),
``opposed-field`` (:func:`app.analysis.triage.model_evidence.opposed_field`) and
``neighbour-face`` (:func:`app.analysis.triage.crowd.neighbour_face`), so the list below is
empty until the next sign is tried. The demos the signs are measured on are synthetic
(:mod:`app.demo`).
"""

from __future__ import annotations

from collections.abc import Callable
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from app.demo.calibrate import DemoFrame

#: The signs :func:`app.demo.weights.judge` can add, by name (none at present).
TRIAL_SIGNS: dict[str, Callable[[DemoFrame], dict[int, float]]] = {}
