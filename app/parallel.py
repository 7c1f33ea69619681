"""Run one function over many items on several processes, with the results in order.

Batch jobs (triage, training targets, pre-labelling, importing maps) spend their time on
per-frame numerical work that holds Python's lock, so threads do not help; worker processes
do. The workers only compute (and, for files of their own, write): they return arrays and
results to the one process that has the project open, which stores them, so the store keeps a
single writer and every job stays all or nothing. Results come back in the order of the
items, whatever the number of workers, so a job's output is the same with one worker or
many.

One worker runs everything in the calling process, without a pool. So does a short job:
starting a pool costs a second or more (the fork server and each worker import the app), more
than a job of a few seconds saves on two cores. The first items run here, timed, and the rest
go to a pool only once the time the other workers would save on them exceeds that start-up
cost (see :data:`POOL_START_SECONDS`), which the log tells at debug level. Workers are started by a
fork server (a fresh interpreter that forks them, so the threads of the app or of a database
pool are never copied) where the system has one, else spawned.
"""

from __future__ import annotations

import logging
import multiprocessing
import os
import time
from collections import deque
from collections.abc import Callable, Generator, Iterable, Iterator
from concurrent.futures import FIRST_COMPLETED, Future, ProcessPoolExecutor, wait
from typing import Any, TypeVar

from app.errors import BadInput
from app.progress import Progress

__all__ = ["POOL_START_SECONDS", "WORKERS_ENV", "check_workers", "default_workers", "ordered_map"]

log = logging.getLogger(__name__)

#: Environment variable giving the number of workers when ``--workers`` does not.
WORKERS_ENV = "POSEWRIGHT_WORKERS"

T = TypeVar("T")
R = TypeVar("R")

#: What starting a pool costs before its first result, in seconds: the workers importing the
#: app (and, for a process's first pool, the fork server starting). Measured on the 2-core
#: development machine with ``ordered_map`` over six trivial items on two workers: 0.74-0.84 s
#: quiet (load 1.4, fork server already up), 1.6-2.5 s for a first pool at load 3. One second
#: sits between: 96 frames of maps (16 ms each, 0.75 s to save) stay here, 96 frames of
#: training targets (28 ms each, 1.3 s to save) go to the workers.
POOL_START_SECONDS = 1.0

#: How long the first items run in this process, timed, before a pool is considered, in
#: seconds. Two items at least are timed and the first is left out of the estimate when
#: there are more, since it pays for imports and caches the others reuse.
_PROBE_SECONDS = 0.2

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
                initargs: Iterable[Any] = (), total: int | None = None,
                here: tuple[Callable[..., Any], tuple[Any, ...]] | None = None
                ) -> Generator[R, None, None]:
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
        Processes to use at most; 1 runs in this process. With more, the first items still
        run here, timed for at least :data:`_PROBE_SECONDS`, and the rest go to a pool only
        when the workers would save more than :data:`POOL_START_SECONDS` on them (the
        results are the same either way).
    progress
        Told ``(n, len(items), label)`` before the n-th result is taken; a cancel request
        stops the work within a tenth of a second of the longest item (items not yet started
        are dropped, running ones end and are thrown away) by raising
        :class:`~app.errors.Cancelled` from the generator.
    initializer, initargs
        Called once in each worker before its first item, and once here unless ``here``
        is given, to set up what every item needs (a loaded model, a pixel limit); its time
        here is added to the pool's start-up cost, since every worker pays it again.
    total
        The number of items, for the progress (default ``len(items)``).
    here
        A function and its arguments that set this process up for the items run here,
        instead of ``initializer`` (which may, say, load a model this process already has, or
        share out threads it should keep).

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
    initargs = tuple(initargs)
    t0 = time.perf_counter()
    if here is not None:
        here[0](*here[1])
    elif initializer is not None:
        initializer(*initargs)
    start_cost = POOL_START_SECONDS + (time.perf_counter() - t0)  # workers set up too
    upcoming = iter(items)
    done = 0
    first = 0.0  # the time of the first item
    t0 = time.perf_counter()
    while done < total:
        if workers > 1 and done >= 2:
            spent = time.perf_counter() - t0
            if spent >= _PROBE_SECONDS and _pool_pays(
                    (spent - first) / (done - 1), total - done, workers, start_cost):
                log.debug("%s: %d of %d items on %d workers after %.2f s here", label or "job",
                          total - done, total, min(workers, total - done), spent)
                break
        item = next(upcoming, _END)
        if item is _END:
            return
        progress.step(done, total, label)
        yield fn(item)  # type: ignore[arg-type]
        done += 1
        if done == 1:
            first = time.perf_counter() - t0
    else:
        if workers > 1:
            log.debug("%s: all %d items here, a pool would not pay", label or "job", total)
        return
    yield from _pooled(fn, upcoming, done, total, min(workers, total - done), progress, label,
                       initializer, initargs)


def _pool_pays(per_item: float, left: int, workers: int, start_cost: float) -> bool:
    """Whether ``left`` items of ``per_item`` seconds each end sooner on ``workers`` pool
    processes than here, the pool's ``start_cost`` included.

    Examples
    --------
    >>> _pool_pays(0.016, 94, 2, 1.0)  # 96 frames of maps: 0.75 s saved, 1 s to start
    False
    >>> _pool_pays(0.2, 94, 2, 1.0)  # 96 frames of triage: 9.4 s saved
    True
    """
    workers = min(workers, left)
    if workers <= 1:
        return False
    return left * per_item * (1.0 - 1.0 / workers) > start_cost


_END = object()


def _pooled(fn: Callable[[T], R], upcoming: Iterator[T], done: int, total: int, workers: int,
            progress: Progress, label: str, initializer: Callable[..., Any] | None,
            initargs: tuple[Any, ...]) -> Iterator[R]:
    """The items left in ``upcoming`` (``done`` of ``total`` already taken) on a pool."""
    context = multiprocessing.get_context(
        "forkserver" if "forkserver" in multiprocessing.get_all_start_methods() else "spawn")
    pool = ProcessPoolExecutor(workers, mp_context=context,
                               initializer=initializer, initargs=initargs)
    pending: deque[Future[R]] = deque()
    try:
        for item in upcoming:
            pending.append(pool.submit(fn, item))
            if len(pending) >= 2 * workers:
                break
        for n in range(done, total):
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
