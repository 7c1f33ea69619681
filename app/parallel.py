"""Run one function over many items on several processes, with the results in order.

Batch jobs (triage, training targets, pre-labelling, importing maps) spend their time on
per-frame numerical work that holds Python's lock, so threads do not help; worker processes
do. The workers only compute (and, for files of their own, write): they return arrays and
results to the one process that has the project open, which stores them, so the store keeps a
single writer and every job stays all or nothing. Results come back in the order of the
items, whatever the number of workers, so a job's output is the same with one worker or
many.

One worker runs everything in the calling process, without a pool. Workers are started by a
fork server (a fresh interpreter that forks them, so the threads of the app or of a database
pool are never copied) where the system has one, else spawned.
"""

from __future__ import annotations

import multiprocessing
import os
from collections import deque
from collections.abc import Callable, Iterable, Iterator
from concurrent.futures import FIRST_COMPLETED, Future, ProcessPoolExecutor, wait
from typing import Any, TypeVar

from app.errors import BadInput
from app.progress import Progress

__all__ = ["WORKERS_ENV", "check_workers", "default_workers", "ordered_map"]

#: Environment variable giving the number of workers when ``--workers`` does not.
WORKERS_ENV = "POSEWRIGHT_WORKERS"

T = TypeVar("T")
R = TypeVar("R")

#: How long to wait for a result before looking at the cancel request again, in seconds.
_POLL_SECONDS = 0.1


def default_workers() -> int:
    """The number of cores this process may run on (at least 1).

    Examples
    --------
    >>> default_workers() >= 1
    True
    """
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except (AttributeError, OSError):  # not on Linux
        return max(1, os.cpu_count() or 1)


def check_workers(workers: int | None) -> int:
    """``workers`` checked; None: ``$POSEWRIGHT_WORKERS``, else :func:`default_workers`.

    Raises
    ------
    BadInput
        When it is not a whole number of at least 1.

    Examples
    --------
    >>> check_workers(3)
    3
    >>> check_workers(0)
    Traceback (most recent call last):
    ...
    app.errors.BadInput: --workers: 0 workers: give at least 1
    """
    if workers is None:
        text = os.environ.get(WORKERS_ENV, "").strip()
        if not text:
            return default_workers()
        try:
            workers = int(text)
        except ValueError:
            raise BadInput(f"{text!r} is not a whole number", where=WORKERS_ENV) from None
    if isinstance(workers, bool) or not isinstance(workers, int) or workers < 1:
        raise BadInput(f"{workers} workers: give at least 1", where="--workers")
    return workers


def ordered_map(fn: Callable[[T], R], items: Iterable[T], workers: int = 1,
                progress: Progress | None = None, label: str = "",
                initializer: Callable[..., Any] | None = None,
                initargs: Iterable[Any] = (), total: int | None = None) -> Iterator[R]:
    """``fn(item)`` for every item, yielded in the order of ``items``.

    Parameters
    ----------
    fn
        A module-level function (workers import it by name); it must not write the project.
    items
        What to run it on; each item and each result crosses to and from a worker by pickle.
        Taken lazily, a few ahead of the results, so a generator that reads each frame's
        labels only when its turn comes keeps memory flat.
    workers
        Processes to use; 1 runs in this process.
    progress
        Told ``(n, len(items), label)`` before the n-th result is taken; a cancel request
        stops the work within a tenth of a second of the longest item (items not yet started
        are dropped, running ones end and are thrown away) by raising
        :class:`~app.errors.Cancelled` from the generator.
    initializer, initargs
        Called once in each worker before its first item (and once here with one worker), to
        set up what every item needs (a loaded model, a pixel limit).
    total
        The number of items, for the progress (default ``len(items)``).

    Notes
    -----
    At most two items per worker are in flight, so a long job holds only a few results that
    the caller has not taken yet. An error raised by ``fn`` is raised again here, for the
    first item (in order) that raised it; nothing after it is yielded.

    Examples
    --------
    >>> list(ordered_map(abs, [-2, 3, -5]))
    [2, 3, 5]
    """
    progress = progress or Progress()
    if total is None:
        total = len(items)  # type: ignore[arg-type]
    if workers <= 1 or total <= 1:
        if initializer is not None:
            initializer(*initargs)
        for n, item in enumerate(items):
            progress.step(n, total, label)
            yield fn(item)
        return
    context = multiprocessing.get_context(
        "forkserver" if "forkserver" in multiprocessing.get_all_start_methods() else "spawn")
    pool = ProcessPoolExecutor(min(workers, total), mp_context=context,
                               initializer=initializer, initargs=tuple(initargs))
    pending: deque[Future[R]] = deque()
    upcoming = iter(items)
    try:
        for item in upcoming:
            pending.append(pool.submit(fn, item))
            if len(pending) >= 2 * workers:
                break
        for n in range(total):
            progress.step(n, total, label)
            head = pending.popleft()
            while not wait([head], timeout=_POLL_SECONDS, return_when=FIRST_COMPLETED).done:
                if progress.cancelled:
                    progress.step(n, total, label)  # raises Cancelled
            result = head.result()
            for item in upcoming:
                pending.append(pool.submit(fn, item))
                break
            yield result
    finally:
        pool.shutdown(wait=True, cancel_futures=True)
