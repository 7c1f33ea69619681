"""The work ``import-maps`` hands to its workers: read runs of frames' network maps and group
their people (:func:`app.analysis.association.group_people`).

Imports numpy, the grouping and the maps reader and nothing else of the app (no pydantic, no
model, no store, no OpenCV): a command that imports maps starts its fork server with this
module alone (:data:`app.parallel.ONLY_FOR`), which takes about a third of the CPU of
importing :mod:`app.jobs_analysis` (0.15 against 0.5 s, 3 December 2026), so its worker is
grouping frames while the command is still importing the store. Items and results are
therefore plain numbers and arrays: :func:`app.jobs_analysis.import_maps` builds them from
the project's frames and turns the results into people.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from app.analysis.association import group_people
from app.formats.maps import read_map_arrays

__all__ = ["Found", "Runs", "found_person", "group_runs"]

#: Runs of frames to group, each in order: the skeleton's number of joints, its limbs as
#: pairs of joint indices, then the runs, each a list of frames: the maps file, the image's
#: width and height, and the frame's people's ``(K, 3)`` keypoints when it keeps them (None:
#: group it). The first frame of each run is grouped without a frame before.
Runs = tuple[int, Sequence[tuple[int, int]],
             list[list[tuple[str, int, int, "list[np.ndarray] | None"]]]]

#: The people grouped in one frame, stacked (three arrays cross between processes faster than
#: two per person): ``(P, K, 3)`` keypoints and ``(P, K)`` scores as :func:`found_person`
#: gives them, and the P people's scores.
Found = tuple[np.ndarray, np.ndarray, list[float]]


def group_runs(item: Runs) -> list[tuple[int, Found | None]]:
    """Read the maps of runs of frames and group, in order, those without people, each with
    the frame before's people (in its run) as ``previous``: per frame, runs one after the
    other, the stride and the people found (None for a frame that keeps its people); run in
    a worker process.

    Examples
    --------
    >>> import os, tempfile
    >>> path = os.path.join(tempfile.mkdtemp(), "f.npz")
    >>> np.savez(path, stride=np.array(8), confidence_maps=np.zeros((2, 3, 4), np.float32),
    ...          pafs=np.zeros((1, 2, 3, 4), np.float32))
    >>> [(stride, found[0].shape) for stride, found in
    ...  group_runs((2, [(0, 1)], [[(path, 32, 24, None)], [(path, 32, 24, None)]]))]
    [(8, (0, 2, 3)), (8, (0, 2, 3))]
    """
    joints, limbs, runs = item
    out: list[tuple[int, Found | None]] = []
    for run in runs:
        before: list[np.ndarray] | None = None
        for path, width, height, people in run:
            maps = read_map_arrays(path, joints, len(limbs), (width, height))
            if people is not None:
                out.append((maps.stride, None))
                before = people
                continue
            found = group_people(maps.confidence_maps, maps.pafs, limbs, stride=maps.stride,
                                 previous=before)
            each = [found_person(f, joints) for f in found]
            out.append((maps.stride, (
                np.stack([kp for kp, _, _ in each]) if each else np.zeros((0, joints, 3)),
                np.stack([sc for _, sc, _ in each]) if each else np.zeros((0, joints)),
                [score for _, _, score in each])))
            before = found
    return out


def found_person(found: np.ndarray, k: int) -> tuple[np.ndarray, np.ndarray, float]:
    """A grouped person's ``(K, 3)`` rows of ``x, y, score`` (score 0: not found) as
    keypoints, scores and the person's score."""
    kp = np.full((k, 3), np.nan)
    on = found[:, 2] > 0
    kp[:, 2] = 0
    kp[on, :2] = found[on, :2]
    kp[on, 2] = 2
    scores = np.where(on, found[:, 2], np.nan)
    return kp, scores, float(found[on, 2].mean()) if on.any() else 0.0
