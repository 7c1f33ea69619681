"""Fit triage's prior and weights on demo rehearsals of both scenarios, and measure triage.

Triage combines its evidence in log-odds (:mod:`app.analysis.triage.combine`)::

    suspicion = 1 / (1 + exp(-(PRIOR + sum over kinds of WEIGHTS[kind] * strength)))

with each kind counted once, at its strongest reason. :func:`fit_weights` fits ``PRIOR`` and
``WEIGHTS`` by logistic regression of "the person is wrong" on those strongest strengths over
the people of the demos given (weights bounded to ``[0, MAX_WEIGHT]``: evidence never speaks
*for* a label, and no single sign is taken as surer than about 98 %), then rounds the prior to
0.1 and the weights to 0.5, as the shipped figures are. A person is wrong when no one-to-one
pairing with the true poses reaches OKS 0.8 (:func:`app.demo.evaluate.wrong_people`, which
``tests/analysis/test_triage.py`` checks against pycocotools).

:func:`measure` gives recall and precision of the flagged people (suspicion at least
``FLAG_AT``) on demos kept out of the fit.

Seeds are written as for :mod:`app.demo.calibrate`, each list optionally after a scene name:
``1-8,choir:1-8`` is dance seeds 1 to 8 and choir seeds 1 to 8. Run::

    python -m app.demo.weights --fit 1-8,choir:1-8 --measure choir:21-23 --cache DIR

``--frame-before`` measures demos grouped with the frame before (``import-maps
--frame-before``; give a cache of its own, as for :mod:`app.demo.calibrate`) with the weights
of that grouping (``FRAME_BEFORE_PRIOR``, ``FRAME_BEFORE_WEIGHTS`` and ``FRAME_BEFORE_FLAG_AT``
of :mod:`app.analysis.triage.combine`, which a fit with it prints), and
``--trial-signs NAME,...`` adds signs that triage does not have yet
(:mod:`app.demo.trial_signs`; none at present: those tried last are triage's reasons now) as
extra kinds, fitted and measured with the others.

Each scenario's demos are synthetic (:mod:`app.demo`, :mod:`app.demo.choir`).
"""

from __future__ import annotations

import argparse
import sys
from collections.abc import Iterable, Sequence
from dataclasses import dataclass

import numpy as np
from scipy.optimize import minimize

from app.analysis.triage.combine import FLAG_AT, PRIOR, WEIGHTS, weight_set
from app.demo.calibrate import DemoFrame, _view, demo_folder, demo_frames, parse_demos
from app.demo.evaluate import add_grouping_flags, use_grouping, wrong_people
from app.demo.trial_signs import TRIAL_SIGNS
from app.model.labels import GROUPED_ALONE, GROUPED_FRAME_BEFORE

#: Upper bound of a fitted weight (log-odds): at most about 98 % from one sign alone.
MAX_WEIGHT = 8.0
#: The evidence kinds fitted, in a fixed order (the keys of the shipped weights).
KINDS: tuple[str, ...] = tuple(WEIGHTS)


@dataclass
class Judged:
    """The people of some frames: each one's strongest strength per kind (the columns, named
    by ``kinds``) and whether it is wrong against the truth."""

    strengths: np.ndarray
    wrong: np.ndarray
    kinds: tuple[str, ...] = KINDS

    def __add__(self, other: Judged) -> Judged:
        return Judged(np.concatenate([self.strengths, other.strengths]),
                      np.concatenate([self.wrong, other.wrong]), self.kinds)


def judge(frames: Iterable[DemoFrame], trial: Sequence[str] = ()) -> Judged:
    """Triage each frame's labels and judge each person against the frame's truth; each sign
    named in ``trial`` (:data:`app.demo.trial_signs.TRIAL_SIGNS`) adds a column."""
    rows: list[np.ndarray] = []
    wrong: list[bool] = []
    for frame in frames:
        labels = frame.labels
        pids = sorted(labels.people)
        if not pids:
            continue
        verdict = _view(frame, labels, labels.skeleton).triage
        best = {p: np.zeros(len(KINDS)) for p in pids}
        for r in verdict.reasons:
            if r.person in best and r.kind in KINDS:
                k = KINDS.index(r.kind)
                best[r.person][k] = max(best[r.person][k], r.strength)
        signs = [TRIAL_SIGNS[name](frame) for name in trial]
        kps = [labels.people[p].keypoints for p in pids]
        truth = list(frame.truth)
        judged = wrong_people(kps, truth, list(frame.areas), labels.skeleton.sigma_array)
        rows += [np.concatenate([best[p], [sign[p] for sign in signs]]) for p in pids]
        wrong += [bool(w) for w in judged]
    kinds = KINDS + tuple(trial)
    return Judged(np.array(rows).reshape(-1, len(kinds)), np.array(wrong, dtype=bool), kinds)


def fit_weights(judged: Judged, max_weight: float = MAX_WEIGHT,
                ridge: float = 1e-3) -> tuple[float, dict[str, float]]:
    """Maximum-likelihood ``(PRIOR, WEIGHTS)`` with the weights bounded to ``[0, max_weight]``,
    rounded (prior to 0.1, weights to 0.5), one weight per kind of ``judged.kinds``.

    Notes
    -----
    The negative log-likelihood of a logistic regression, ``sum log(1 + exp(z)) - y z`` with
    ``z = prior + x . w``, plus a small ridge on the weights, minimised by L-BFGS-B with its
    gradient (``scipy.optimize.minimize``); the bounds keep every weight a weight *against*
    the label. Logistic regression: T. Hastie, R. Tibshirani, J. Friedman, "The Elements of
    Statistical Learning", 2nd ed., Sec. 4.4 (from memory).

    Examples
    --------
    >>> rng = np.random.default_rng(0)
    >>> x = rng.uniform(0, 1, (4000, len(KINDS)))
    >>> truth = np.zeros(len(KINDS)); truth[0] = 6.0
    >>> y = rng.uniform(size=4000) < 1 / (1 + np.exp(-(-3.0 + x @ truth)))
    >>> prior, w = fit_weights(Judged(x, y))
    >>> -4.2 < prior < -2.8, abs(w[KINDS[0]] - 6.0) <= 1.0, w[KINDS[1]] <= 0.5
    (True, True, True)
    """
    x = judged.strengths
    y = judged.wrong.astype(np.float64)

    def loss(theta: np.ndarray) -> tuple[float, np.ndarray]:
        z = theta[0] + x @ theta[1:]
        p = 1.0 / (1.0 + np.exp(-z))
        nll = float(np.sum(np.logaddexp(0.0, z) - y * z)) + ridge * float(theta[1:] @ theta[1:])
        grad = np.concatenate([[np.sum(p - y)], x.T @ (p - y) + 2 * ridge * theta[1:]])
        return nll, grad

    kinds = judged.kinds
    start = np.concatenate([[PRIOR], [WEIGHTS.get(k, 0.0) for k in kinds]])
    bounds = [(None, None)] + [(0.0, max_weight)] * len(kinds)
    # Tight tolerances: with the defaults L-BFGS-B stopped early from some starting points
    # (the shipped weights), on the example below at a prior of -5.9 instead of -3.6.
    result = minimize(loss, start, jac=True, method="L-BFGS-B", bounds=bounds,
                      options={"ftol": 1e-14, "gtol": 1e-9, "maxiter": 10000})
    prior = round(float(result.x[0]), 1)
    weights = {k: round(float(w) * 2) / 2 for k, w in zip(kinds, result.x[1:])}
    return prior, weights


@dataclass(frozen=True)
class Recall:
    """Triage against the truth on some demos."""

    people: int
    wrong: int
    flagged: int
    hits: int

    @property
    def recall(self) -> float:
        return self.hits / max(self.wrong, 1)

    @property
    def precision(self) -> float:
        return self.hits / max(self.flagged, 1)


def measure(judged: Judged, prior: float = PRIOR, weights: dict[str, float] | None = None,
            flag_at: float = FLAG_AT) -> Recall:
    """Recall and precision of the people flagged at ``flag_at`` by ``prior`` and
    ``weights`` (default: the shipped ones; a kind they lack weighs 0)."""
    w = np.array([(weights or WEIGHTS).get(k, 0.0) for k in judged.kinds])
    z = prior + judged.strengths @ w
    flagged = 1.0 / (1.0 + np.exp(-z)) >= flag_at
    return Recall(len(flagged), int(judged.wrong.sum()), int(flagged.sum()),
                  int((flagged & judged.wrong).sum()))


#: The flagging thresholds considered (suspicion), from the highest.
FLAG_CANDIDATES: tuple[float, ...] = (1 / 2, 1 / 3, 1 / 4, 1 / 5)
#: The least recall every fitted demo must reach at the chosen threshold.
LEAST_RECALL = 0.9


def choose_flag_at(judged: dict[str, Judged], prior: float, weights: dict[str, float],
                   least: float = LEAST_RECALL) -> float:
    """The highest of :data:`FLAG_CANDIDATES` at which every demo's recall reaches
    ``least`` (else the lowest candidate): a miss teaches the network the error, a needless
    look costs a glance, so recall comes first and precision decides among the rest."""
    for flag_at in FLAG_CANDIDATES:
        if all(measure(j, prior, weights, flag_at).recall >= least for j in judged.values()):
            return flag_at
    return FLAG_CANDIDATES[-1]


def _judged(cache: str, demos: Sequence[tuple[str, int]],
            frames: int | None = None, trial: Sequence[str] = ()) -> dict[str, Judged]:
    """:func:`judge` of each demo, generated into ``cache`` the first time."""
    out = {}
    for scene, seed in demos:
        name = f"{scene} seed {seed}"
        out[name] = judge(demo_frames(demo_folder(cache, seed, scene, frames)), trial)
        print(f"{name}: judged", file=sys.stderr, flush=True)
    return out


def main(argv: Sequence[str] | None = None) -> int:
    """The command line: fit on some demos, print the prior, the weights and the threshold,
    and measure on others."""
    parser = argparse.ArgumentParser(
        prog="python -m app.demo.weights",
        description="fit triage's prior and weights on demo seeds and measure on others")
    parser.add_argument("--fit", metavar="SEEDS", default="",
                        help="demos to fit on, e.g. 1-8,choir:1-8; none: the shipped weights")
    parser.add_argument("--measure", metavar="SEEDS", default="",
                        help="demos to measure on, e.g. 20-22,choir:21-23")
    parser.add_argument("--cache", metavar="DIR", required=True,
                        help="where generated demos are kept")
    parser.add_argument("--fit-frames", metavar="N", type=int, default=12,
                        help="frames of each demo generated to fit on (default 12; demos to "
                             "measure on have the usual 24)")
    add_grouping_flags(parser)
    parser.add_argument("--trial-signs", metavar="NAMES", default="",
                        help="signs triage does not have yet, fitted and measured as extra "
                             f"kinds: any of {', '.join(TRIAL_SIGNS) or '(none at present)'}, "
                             "separated by commas")
    args = parser.parse_args(argv)
    frame_before = use_grouping(args)
    trial = [name for name in args.trial_signs.split(",") if name]
    unknown = [name for name in trial if name not in TRIAL_SIGNS]
    if unknown:
        parser.error(f"no trial sign {unknown[0]!r} (there are "
                     f"{', '.join(TRIAL_SIGNS) or 'none at present'})")
    # The weights of the grouping measured (its own set with --frame-before: no need to
    # put them in WEIGHTS to measure them), and the start of a fit.
    shipped = weight_set(GROUPED_FRAME_BEFORE if frame_before else GROUPED_ALONE)
    prior, weights, flag_at = shipped.prior, dict(shipped.weights), shipped.flag_at
    if args.fit:
        fitted = _judged(args.cache, parse_demos(args.fit), args.fit_frames, trial)
        pooled = sum(list(fitted.values())[1:], next(iter(fitted.values())))
        prior, weights = fit_weights(pooled)
        name = "FRAME_BEFORE_" if frame_before else ""
        print(f"{name}PRIOR = {prior}")
        print(f"{name}WEIGHTS = {{")
        for k in pooled.kinds:
            print(f"    {k!r}: {weights[k]},")
        print("}")
        for flag_at in FLAG_CANDIDATES:
            for name, j in fitted.items():
                r = measure(j, prior, weights, flag_at)
                print(f"fit {name}, flagged from {flag_at:.2f}: recall {r.recall:.3f}, "
                      f"precision {r.precision:.3f}")
        flag_at = choose_flag_at(fitted, prior, weights)
        print(f"{name}FLAG_AT = {flag_at:.3f} (every fitted demo at recall {LEAST_RECALL} or more, "
              "else the lowest)")
    if args.measure:
        print("| demo | people | wrong | flagged | recall | precision |")
        print("|---|---:|---:|---:|---:|---:|")
        for name, j in _judged(args.cache, parse_demos(args.measure), trial=trial).items():
            r = measure(j, prior, weights, flag_at)
            print(f"| {name} | {r.people} | {r.wrong} | {r.flagged} | {r.recall:.3f} "
                  f"| {r.precision:.3f} |")
    return 0


if __name__ == "__main__":
    sys.exit(main())
