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

from collections.abc import Iterable, Mapping, Sequence
from pathlib import Path
from typing import Any

import numpy as np

from app.analysis.association import group_people
from app.errors import BadInput
from app.formats.maps import match_map_files, read_map_arrays

__all__ = ["FRAME_BEFORE", "GROUPING_RUN", "PACK_FRAMES", "Found", "Runs", "first_items",
           "found_person", "group_runs", "grouping_runs", "map_items", "pack_runs", "packed_runs"]

#: Frames of one sequence grouped in order, each with the frame before as a prior, go to
#: the workers in runs of at most this many consecutive frames; the first frame of a run is
#: grouped without one. Fixed, so the auto-labels are the same whatever the number of workers
#: (triage's frame-before weights were fitted on these runs). Kept here, not in
#: :mod:`app.jobs_analysis`, so that the command can tell its first items before it imports
#: the job (:func:`first_items`); everything that groups reads it here.
GROUPING_RUN = 16

#: Whether :func:`app.jobs_analysis.import_maps` groups the frames of a sequence with the
#: frame before by default (``import-maps --each-frame-alone`` asks for each frame alone,
#: ``--frame-before`` for this; kept here for the same reason as :data:`GROUPING_RUN`). On
#: since 3 December 2026: grouped so, the labels of a video hold fewer wrong joints, their
#: errors last as a model's do, and carrying a correction forward spares 35.0 % of the
#: actions on fresh dance seeds 116-121 (29.2 % grouped alone; issue 14 asks 30 %); triage
#: weighs such frames by weights fitted on demos grouped this way (the frame-before set of
#: :mod:`app.analysis.triage.combine`), which keep issue 3's goals on the shipped demo but
#: leave a few more of the dance's wrong people unflagged on fresh seeds (README
#: "Sequences", DEVELOPERS.md "The demo").
FRAME_BEFORE = True

#: Frames of maps at most in one item handed to the workers, in runs grouped alone or in
#: order (see :func:`pack_runs`); fixed, so the results are the same whatever the workers.
PACK_FRAMES = 4

#: How many items :func:`first_items` gives at most (grouped alone, the first two a frame
#: each, then up to :data:`PACK_FRAMES`; grouped with the frame before, a run of up to
#: :data:`GROUPING_RUN` frames each): the pool computes them a few at a time until the job
#: takes it, which the command reaches 0.3-0.5 s after its start on a quiet machine and
#: 1.5 s at load 5 (3 December 2026), so 40-130 frames in; far more than that, to keep the
#: pool busy however long opening the project takes (the items are a few numbers and a file
#: name each).
FIRST_ITEMS = 1000

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


def map_items(joints: int, limbs: Iterable[Sequence[int]], packs: list[list[list[int]]],
              files: Mapping[int, str | Path], sizes: Mapping[int, tuple[int, int]],
              kept: Mapping[int, list[np.ndarray]]) -> list[Runs]:
    """The items :func:`group_runs` takes for ``packs`` of runs of frame ids (see
    :func:`pack_runs`): each frame's maps file, its image's width and height, and the
    keypoints of the people of the frames that keep theirs (``kept``; any other frame is
    grouped)."""
    pairs = [(int(a), int(b)) for a, b in limbs]
    return [(joints, pairs,
             [[(str(files[f]), sizes[f][0], sizes[f][1], kept.get(f)) for f in run]
              for run in pack])
            for pack in packs]


def first_items(skeleton: dict[str, Any],
                frames: Sequence[tuple[int, str, int, int, str, str, int | None]],
                with_people: set[int], not_sequences: str | None, folder: str | Path,
                frame_before: bool = False, count: int | None = None) -> list[Runs]:
    """The first ``count`` (default :data:`FIRST_ITEMS`) items that
    :func:`app.jobs_analysis.import_maps` hands its workers, grouping each frame alone or,
    with ``frame_before``, each sequence in runs of :data:`GROUPING_RUN` frames
    (:func:`grouping_runs`), told from :func:`app.store.peek.map_frames_hint` (the stored
    skeleton, the frames, those with people, the folders marked not a sequence) before the
    project is open; none when anything does not fit, since the job tells its own items
    anyway and computes again any that differ (:func:`app.parallel.early_pool`). With
    ``frame_before`` they stop before the first item holding a frame that has people: such a
    frame is the frame before of the next one, and its people are not in the hint."""
    try:
        names = [str(j["name"]) for j in skeleton["joints"]]
        index = {n: i for i, n in enumerate(names)}
        limbs = [tuple(end if isinstance(end, int) else index[end] for end in limb)
                 for limb in skeleton["limbs"]]
        files = match_map_files(folder, [_Named(f) for f in frames])  # type: ignore[misc]
        if frame_before:
            from app.model.sequences import parse_not_sequences, sequences

            marked = parse_not_sequences(not_sequences)
            runs = grouping_runs([s.frame_ids for s in sequences(
                [_Named(f) for f in frames], marked)], files)  # type: ignore[misc]
        else:
            runs = [[f] for f in sorted(files)]
    except (BadInput, KeyError, TypeError, ValueError, OSError):
        return []
    rows = {f[0]: f for f in frames}
    if any(rows[f][4] != "ok" for f in files):
        return []  # the job stops on it
    packs = packed_runs(runs)[:FIRST_ITEMS if count is None else count]
    if frame_before:
        kept = next((n for n, pack in enumerate(packs)
                     if any(f in with_people for run in pack for f in run)), len(packs))
        packs = packs[:kept]
    return map_items(len(names), limbs, packs, files, {f: (rows[f][2], rows[f][3]) for f in files},
                     {f: [] for f in with_people})


class _Named:
    """A frame as :func:`match_map_files` and :func:`app.model.sequences.sequences` read it:
    its id, file name, path and index in its video, from a row of
    :func:`app.store.peek.map_frames_hint`."""

    def __init__(self, row: tuple[int, str, int, int, str, str, int | None]):
        self.id = row[0]
        self.file_name = row[1]
        self.path = row[5]
        self.video_index = row[6]


def grouping_runs(sequences: Sequence[Sequence[int]], files: Mapping[int, Any],
                  length: int | None = None) -> list[list[int]]:
    """The frames with maps (``files``) cut into runs grouped in order (see
    :func:`app.jobs_analysis.import_maps`): consecutive frames of one sequence, at most
    ``length`` (default :data:`GROUPING_RUN`), then every other frame alone, by id.

    >>> grouping_runs([(5, 1, 2, 3, 4)], dict.fromkeys([1, 2, 4, 5, 9]), length=2)
    [[5, 1], [2], [4], [9]]
    """
    length = GROUPING_RUN if length is None else length
    runs: list[list[int]] = []
    placed: set[int] = set()
    for frame_ids in sequences:
        run: list[int] = []
        for f in frame_ids:
            if f not in files or len(run) == length:
                if run:
                    runs.append(run)
                run = []
            if f in files:
                run.append(f)
                placed.add(f)
        if run:
            runs.append(run)
    runs.extend([f] for f in sorted(files) if f not in placed)
    return runs


def packed_runs(runs: list[list[int]]) -> list[list[list[int]]]:
    """The items :func:`app.jobs_analysis.import_maps` hands the workers for ``runs``, by
    :func:`pack_runs`, the longest runs first (in their order among equals): the results are
    kept by frame, so the order changes no auto-label, and the items that end the job are
    the shortest, so that the process that finishes first waits the least for the other.

    >>> packed_runs([[1], [2, 3], [4, 5, 6], [7]])
    [[[4, 5, 6]], [[2, 3]], [[1]], [[7]]]
    """
    return pack_runs(sorted(runs, key=len, reverse=True))


def pack_runs(runs: list[list[int]], frames: int | None = None,
              alone: int = 2) -> list[list[list[int]]]:
    """``runs`` (see :func:`grouping_runs`) packed into the items
    :func:`app.jobs_analysis.import_maps` hands the workers: consecutive runs of at most
    ``frames`` frames in all (default :data:`PACK_FRAMES`; a longer run is an item of its own),
    but the first ``alone`` runs and those of the last ``2 * frames`` frames each alone. Fixed,
    whatever the number of workers, so the results are the same.

    A frame of maps takes about 11-12 ms of CPU on a quiet machine, and each item crossing to
    a worker and back cost the calling process about 0.6 ms of its threads' time besides
    (traced at load 2-3, 3 December 2026): four frames an item cost a quarter of that. The
    first items stay single, since :func:`app.parallel.ordered_map` asks for the pool once
    two have run, and so do the last ones, so that the process that finishes first waits at
    most one frame for the other.

    >>> pack_runs([[1], [2], [3], [4], [5], [6], [7], [8], [9], [10, 11, 12], [13]], 2)
    [[[1]], [[2]], [[3], [4]], [[5], [6]], [[7], [8]], [[9]], [[10, 11, 12]], [[13]]]
    """
    frames = PACK_FRAMES if frames is None else frames
    total = sum(len(r) for r in runs)
    packs: list[list[list[int]]] = []
    size = 0
    seen = 0
    for n, run in enumerate(runs):
        single = n < alone or seen + len(run) > total - 2 * frames
        seen += len(run)
        if single or not packs or size + len(run) > frames:
            packs.append([run])
            size = frames if single else len(run)  # nothing joins a run kept alone
        else:
            packs[-1].append(run)
            size += len(run)
    return packs
