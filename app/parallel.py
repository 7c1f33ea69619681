"""Run one function over many items on several processes, with the results in order.

Batch jobs (triage, training targets, pre-labelling, importing maps) spend their time on
per-frame numerical work that holds Python's lock, so threads do not help; worker processes
do. The workers only compute (and, for files of their own, write): they return arrays and
results to the one process that has the project open, which stores them, so the store keeps a
single writer and every job stays all or nothing. Results come back in the order of the
items, whatever the number of workers, so a job's output is the same with one worker or
many.

One worker runs everything in the calling process, without a pool. With more, the first
items still run here, timed (see :data:`_PROBE_SECONDS`); once the items left would outlast
starting a pool (see :data:`POOL_START_SECONDS`), a thread of this process starts one of
``workers - 1`` processes while this process goes on with the items, and as soon as the pool
has answered, the items are shared: the pool gets a few at a time (:data:`_POOL_AHEAD` per
process), this process computes the next ones itself while it waits, and once no item is
left it takes back those the pool has not started (or, when the pool has queued them where
they can no longer be cancelled, computes them in their place and lets the pool's copy go,
:func:`_take_over`), so nobody waits at the end; the results still come out in order. So
N workers are this process and N - 1 others, starting them costs the job no time of its
own, and a job that ends before the pool is up simply ends (the pool, once up, is stopped by
its thread).
The log tells at debug level where a job ran and when the pool was up.

Workers are started by a fork server (a fresh interpreter that forks them, so the threads
of the app or of a database pool are never copied) where the system has one, else spawned.
The fork server imports :data:`PRELOAD` (the batch jobs' modules, hence the app, numpy and
OpenCV) once, when this process starts its first pool (or, for a job of so many items that
a pool pays whatever they take, as soon as the job starts, or earlier, when the command
calls :func:`head_start`: :data:`_LEAST_ITEM_SECONDS`; such a job asks for its pool once two
items have run, without timing them for :data:`_PROBE_SECONDS`);
every worker is then a fork of it that imports nothing more, so a later pool is up in a
fraction of a second. A command, which runs one job and ends, has its server import only what
that job's function needs where :data:`ONLY_FOR` names it (``import-maps``: numpy and the
grouping, not the model, the store or OpenCV). A command that can tell its job's first items
before it opens the project hands them to a pool at once (:func:`early_pool`): the job then
takes that pool and those of its results whose items are equal to its own first ones.
"""

from __future__ import annotations

import itertools
import logging
import multiprocessing
import os
import threading
import time
from collections import deque
from collections.abc import Callable, Generator, Iterable, Iterator
from concurrent.futures import FIRST_COMPLETED, Future, ProcessPoolExecutor, wait
from typing import Any, TypeVar

from app.errors import BadInput
from app.progress import Progress

__all__ = ["ONLY_FOR", "POOL_START_SECONDS", "PRELOAD", "PRELOAD_FOR", "WORKERS_ENV",
           "check_workers", "default_workers", "drop_early", "early_pool", "head_start",
           "keep_freed_memory", "ordered_map"]

log = logging.getLogger(__name__)

#: Environment variable giving the number of workers when ``--workers`` does not.
WORKERS_ENV = "POSEWRIGHT_WORKERS"

T = TypeVar("T")
R = TypeVar("R")

#: What a process's first pool costs before its first result, in seconds: the fork server
#: starting and importing :data:`PRELOAD`. From asking for a pool of one to its first result
#: (a function of the batch jobs' module): 0.80-1.25 s at load 7.7 (2 December 2026), as
#: before the preload (0.80-0.94 s, when each worker imported the app itself). A pool pays
#: when the items left take twice this (:func:`_pool_pays`): 96 frames of maps (16 ms each)
#: stay here, 96 frames of training targets (about 30 ms each) and of triage go to a pool.
POOL_START_SECONDS = 1.0

#: What a pool costs to start once this process's fork server is up, in seconds: the fork
#: server forks a worker that imports nothing. From asking for a pool of one to that worker's
#: first result, 0.01-0.03 s at load 7.7 (2 December 2026; a first pool: 0.80-1.25 s, and
#: before the fork server preloaded the app, 0.66-0.79 s for every pool after the first).
_WARM_START_SECONDS = 0.1

#: Modules the fork server imports once, before it forks any worker, so that no worker
#: imports the app again: those whose functions the batch jobs hand to the workers. The
#: server only imports, so no thread of the app or of a database pool is ever copied into a
#: worker; numpy and OpenCV start native thread pools on import (one thread each here),
#: which, as in any fork of a numpy process (common practice), the libraries handle at fork.
PRELOAD = ("app.jobs_analysis", "app.inference.prelabel", "app.map_runs")

#: What the fork server imports besides :data:`PRELOAD` when the job that starts it hands
#: the workers this function (by module and name): the modules the function imports when
#: first called. Triage's take 0.5 s to import, which a job of maps or targets does not need.
PRELOAD_FOR = {
    "app.jobs_analysis._triage_one": ("app.jobs_findings", "app.analysis.triage",
                                      "app.analysis.triage.findings",
                                      "app.analysis.triage.model_evidence"),
}

#: What the fork server of a command that runs only this job (by its function's module and
#: name) imports, in place of :data:`PRELOAD` and :data:`PRELOAD_FOR`: the command's process
#: ends with the job, so its server need not serve another. Its worker then starts on the
#: job sooner and takes less CPU from the command, which is importing the store meanwhile:
#: ``import-maps``'s function imports numpy and the grouping alone (0.15 s of CPU against
#: 0.5 s for :data:`PRELOAD`, 3 December 2026). Used by :func:`head_start` only; a server
#: started in the window's process always imports :data:`PRELOAD`.
ONLY_FOR = {
    "app.map_runs.group_runs": ("app.parallel", "app.map_runs"),
}

#: The least an item of a batch job takes, in seconds, for judging by their number alone,
#: before any is timed: reading and grouping one demo frame's maps, the cheapest item of the
#: batch jobs, takes 16 ms on a quiet machine; half that, to be safe. A job of so many items
#: that they would repay a pool even at this pace has its fork server started at once
#: (:func:`_start_server`), while its first items are timed, rather than after.
_LEAST_ITEM_SECONDS = 0.008

#: How long the first items run in this process, timed, before a pool is considered, in
#: seconds. Two items at least are timed and the first is left out of the estimate when
#: there are more, since it pays for imports and caches the others reuse.
_PROBE_SECONDS = 0.2

#: How long to wait for a result before looking at the cancel request again, in seconds.
_POLL_SECONDS = 0.1

#: Items each pool process holds at most (the one it computes and those queued for it). More
#: than two, so that a process whose turn comes late (another program took the core) still
#: finds work when it runs again; the items it has not started when the others run out are
#: taken back and computed here (:func:`_alongside`), so a deep queue costs no wait at the
#: end. Items and results cross by pickle, a few kilobytes each (0.25 ms for a frame of
#: triage), so a few more in flight cost nothing measurable.
_POOL_AHEAD = 4

#: Results this process computes ahead of the next one to yield, per worker, besides twice
#: the items the pool holds: its own items wait for the pool's earlier ones, so that the
#: results come out in order, and while the pool works through its queue this process
#: computes about as many.
_HERE_AHEAD = 4


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
                here: tuple[Callable[..., Any], tuple[Any, ...]] | None = None,
                sharing: Callable[[], Any] | None = None, reads_only: bool = False
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
        results are the same either way); a job so large that they would at any pace
        (:data:`_LEAST_ITEM_SECONDS`) goes to the pool after two items.
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
    sharing
        Called in this process when it asks for a pool, before the pool starts (pre-labelling
        gives OpenCV's second thread back to the cores then, see
        :func:`app.inference.prelabel.prelabel`: the pool's start, and then its workers, need
        that core); not called when no pool is asked for.
    reads_only
        Whether ``fn`` does nothing but return its result (it writes no file): then, once no
        item is left, this process may compute an item the pool has queued but not started
        while the pool's copy still runs later, its result thrown away (:func:`_take_over`;
        ``import-maps`` says so, training targets and pre-labelling, which write files, do
        not).

    Notes
    -----
    At most :data:`_POOL_AHEAD` items per pool process are in flight and
    :data:`_HERE_AHEAD` per worker computed here ahead of the next result, so a long job
    holds only a few results that the caller has not taken yet. An error raised by ``fn``
    is raised again here, for the first item (in order) that raised it; nothing after it is
    yielded.

    Examples
    --------
    >>> list(ordered_map(abs, [-2, 3, -5]))
    [2, 3, 5]
    """
    progress = progress or Progress()
    if total is None:
        total = len(items)  # type: ignore[arg-type]
    initargs = tuple(initargs)
    if _early is not None:
        early = (_take_early(fn, iter(items), workers)
                 if initializer is None and here is None else drop_early())
        if early is not None:
            log.debug("%s: %d of %d items handed to the pool before the job", label or "job",
                      len(early[1]), total)
            yield from _alongside(fn, early[2], 0, total, workers, progress, label, None, (),
                                  early=(early[0], early[1]), reads_only=reads_only)
            return
    # So many items that a pool pays whatever they take: the fork server starts now, and the
    # pool once two items have run here (not after timing them for _PROBE_SECONDS).
    large = _pays_at_any_pace(total, workers)
    if large:
        _start_server(fn)
    t0 = time.perf_counter()
    if here is not None:
        here[0](*here[1])
    elif initializer is not None:
        initializer(*initargs)
    start_cost = _start_cost() + (time.perf_counter() - t0)  # workers set up too
    upcoming = iter(items)
    done = 0
    first = 0.0  # the time of the first item
    t0 = time.perf_counter()
    while done < total:
        if workers > 1 and done >= 2:
            spent = time.perf_counter() - t0
            paid = large and min(workers, total - done) > 1
            if paid or (spent >= _PROBE_SECONDS and _pool_pays(
                    (spent - first) / (done - 1), total - done, workers, start_cost)):
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
    yield from _alongside(fn, upcoming, done, total, min(workers, total - done), progress,
                          label, initializer, initargs, sharing, reads_only=reads_only)


def _pool_pays(per_item: float, left: int, workers: int, start_cost: float) -> bool:
    """Whether a pool started now, while this process goes on with the items, pays: the
    ``left`` items of ``per_item`` seconds each must take at least twice the pool's
    ``start_cost``, and there must be more than one to share.

    The pool starts on a thread of this process and this process keeps working meanwhile,
    so the start costs the job little time of its own; but the start takes CPU (the fork
    server importing the app), which on a busy machine is taken from this process, and the
    workers only save a share of what is left once they are up. Twice the start leaves at
    least half the work to share.

    Examples
    --------
    >>> _pool_pays(0.016, 94, 2, 1.0)  # 96 frames of maps, first pool: 1.5 s of work left
    False
    >>> _pool_pays(0.03, 94, 2, 1.0)  # 96 frames of training targets, first pool: 2.8 s
    True
    >>> _pool_pays(0.016, 94, 2, 0.1)  # 96 frames of maps, the fork server already up
    True
    """
    if min(workers, left) <= 1:
        return False
    return left * per_item > 2.0 * start_cost


_END = object()


#: glibc's ``mallopt`` parameters (``malloc.h``) and what :func:`keep_freed_memory` sets: blocks
#: up to 32 MB (glibc's largest mmap threshold on 64-bit systems) come from the heap, and up to
#: 512 MB freed at its top stay there.
_M_TRIM_THRESHOLD, _M_MMAP_THRESHOLD = -1, -3
_MMAP_THRESHOLD_BYTES = 32 << 20
_TRIM_THRESHOLD_BYTES = 512 << 20


def keep_freed_memory() -> bool:
    """Let this process reuse the memory it frees instead of handing it back to the system at
    once; whether the C library allowed it (glibc's ``mallopt``; elsewhere nothing changes).

    A frame's arrays are a few megabytes (the maps read or computed, their float32 copies),
    which glibc maps afresh for each frame and unmaps when freed, so every frame faults its
    pages in again: 1.2-1.5 s of system time in 480 frames of ``import-maps`` (of 8-9 s), 2.8 s
    of ``prelabel``, and, with two processes faulting at once, a frame of maps took 15-16 ms
    of CPU in place of 13 ms alone. Kept, they are reused: 0.2-0.4 s of system time, and
    12.5-13.4 ms a frame of maps with two processes, as with one (3 December 2026, load 4-5;
    glibc's ``MALLOC_MMAP_THRESHOLD_`` and ``MALLOC_TRIM_THRESHOLD_`` variables do the same
    from outside, common practice for numerical batch work). For processes that end with
    their job only (a batch command, a worker): the memory stays with the process until it
    ends, so the window does not call it for itself.
    """
    try:
        import ctypes

        mallopt = ctypes.CDLL(None).mallopt
    except (AttributeError, OSError):  # not glibc (or no C library to ask)
        return False
    mallopt.argtypes = (ctypes.c_int, ctypes.c_int)
    mallopt.restype = ctypes.c_int
    return bool(mallopt(_M_MMAP_THRESHOLD, _MMAP_THRESHOLD_BYTES)
                and mallopt(_M_TRIM_THRESHOLD, _TRIM_THRESHOLD_BYTES))


def _start_worker(initializer: Callable[..., Any] | None, initargs: tuple[Any, ...]) -> None:
    """Set up a worker process: its memory kept (:func:`keep_freed_memory`), then the job's
    ``initializer``."""
    keep_freed_memory()
    if initializer is not None:
        initializer(*initargs)


def _ready() -> int:
    """Nothing, run once by each new worker so that the pool counts as up once it returns."""
    return os.getpid()


def _name(fn: Callable[..., Any] | str | None) -> str:
    """``module.qualname`` of a function (a name given as text stays as it is)."""
    if isinstance(fn, str):
        return fn
    return f"{getattr(fn, '__module__', '')}.{getattr(fn, '__qualname__', '')}"


def _context(fn: Callable[..., Any] | str | None = None,
             only: bool = False) -> multiprocessing.context.BaseContext:
    """The fork server's context, with :data:`PRELOAD` (and what :data:`PRELOAD_FOR` adds
    for ``fn``, a function or its ``module.qualname``) imported by the server when it starts
    (only the server pays the imports; each worker forks from it with them done), else
    spawn's. With ``only`` (a command that runs this job alone), what :data:`ONLY_FOR` gives
    for ``fn``, if it gives anything, in their place. The list counts only when the server
    starts: a pool started later, once it is up, forks from it as it is."""
    if "forkserver" not in multiprocessing.get_all_start_methods():
        return multiprocessing.get_context("spawn")
    context = multiprocessing.get_context("forkserver")
    name = _name(fn)
    modules = ONLY_FOR.get(name) if only else None
    context.set_forkserver_preload(list(modules or (*PRELOAD, *PRELOAD_FOR.get(name, ()))))
    return context


def _here(fn: Callable[[T], R], item: T) -> Future[R]:
    """``fn(item)`` computed in this process, as a finished future (its error kept in it, to
    be raised again at its turn, after the earlier results)."""
    here: Future[R] = Future()
    try:
        here.set_result(fn(item))
    except Exception as exc:
        here.set_exception(exc)
    return here


def _take_back(pending: deque[tuple[Future[R], bool, T]], fn: Callable[[T], R]) -> bool:
    """Compute here the last item of ``pending`` that the pool has not started, if any (its
    future is cancelled on the pool first, so it runs once); whether there was one.

    Run when no items are left to take: this process would otherwise wait while the pool
    works through its queue, so the job ends when the last item does, not :data:`_POOL_AHEAD`
    items later. The item's place in the order is kept, so the results are the same.
    """
    for n in range(len(pending) - 1, -1, -1):
        future, remote, item = pending[n]
        if remote and future.cancel():
            pending[n] = (_here(fn, item), False, item)
            return True
    return False


def _take_over(pending: deque[tuple[Future[R], bool, T]], fn: Callable[[T], R],
               processes: int) -> bool:
    """Compute here the last item of ``pending`` still on the pool while it holds more
    unfinished items than its ``processes`` can run at once (so that item has not started);
    whether there was one.

    Run when no items are left to take and none the pool holds can be cancelled: a
    :class:`~concurrent.futures.ProcessPoolExecutor` moves each process's next item or two
    to its processes' queue, where they can no longer be cancelled, so with items of a
    quarter of a second (runs of frames grouped with the frame before) this process would
    otherwise wait up to two items while the pool works through them. The pool still
    computes it later, and its result is thrown away; the item's place in the order is
    kept, and the result is the same function of the same item, so the output is too.
    """
    unfinished = [n for n, (future, remote, _) in enumerate(pending)
                  if remote and not future.done()]
    if len(unfinished) <= processes:
        return False
    n = unfinished[-1]
    pending[n] = (_here(fn, pending[n][2]), False, pending[n][2])
    return True


class _Pool:
    """A process pool started on a thread of its own, so the caller keeps working meanwhile.

    Each process is warmed by one call of :func:`_ready` (which waits for its
    ``initializer`` too); :attr:`up` is set once they have all answered, or once starting
    failed (:attr:`error`), in which case the caller does the work itself.
    """

    def __init__(self, workers: int, initializer: Callable[..., Any] | None,
                 initargs: tuple[Any, ...], fn: Callable[..., Any] | str | None = None,
                 then: Callable[[_Pool], Any] | None = None):
        self.workers = workers
        self._then = then  # given this pool on its start thread once up, if the start went well
        self.executor: ProcessPoolExecutor | None = None
        self.error: BaseException | None = None
        self.up = threading.Event()
        self.seconds = 0.0  # from the request to the last warm-up answer
        self._lock = threading.Lock()
        self._dropped = False
        self._t0 = time.perf_counter()
        self._thread = threading.Thread(target=self._start, args=(initializer, initargs, fn),
                                        name="posewright-pool-start")
        self._thread.start()
        if not _START_ALONGSIDE:
            self._thread.join()

    def _start(self, initializer: Callable[..., Any] | None, initargs: tuple[Any, ...],
               fn: Callable[..., Any] | str | None) -> None:
        global _server_since
        try:
            self.executor = ProcessPoolExecutor(self.workers, mp_context=_context(fn),
                                                initializer=_start_worker,
                                                initargs=(initializer, initargs))
            warm = [self.executor.submit(_ready) for _ in range(self.workers)]
            if _server_since is None:
                _server_since = self._t0
            for future in warm:
                future.result()
        except BaseException as exc:  # told to the caller, who then works alone
            self.error = exc
        with self._lock:
            self.seconds = time.perf_counter() - self._t0
            self.up.set()
            dropped = self._dropped
        if dropped:
            self._shutdown()
        elif self.error is None and self._then is not None:
            self._then(self)

    def close(self, wait: bool = True) -> None:
        """Stop the workers (items not started are dropped, running ones end; without
        ``wait``, this returns before they have); a pool still starting is stopped by its
        own thread once up, so this never waits for a start."""
        with self._lock:
            if not self.up.is_set():
                self._dropped = True
                return
        self._shutdown(wait)

    def _shutdown(self, wait: bool = True) -> None:
        if self.executor is not None:
            self.executor.shutdown(wait=wait, cancel_futures=True)


#: Whether the caller works while the pool starts; tests turn it off so that the pool is up
#: before the first item is shared out, whatever the machine's load.
_START_ALONGSIDE = True

#: When this process started its fork server (``time.perf_counter()``), if it has: the server
#: lives as long as the process, and is up about :data:`POOL_START_SECONDS` after its start.
_server_since: float | None = None


def head_start(job: str, items: int, workers: int) -> bool:
    """Start this process's fork server now for a job that will hand ``job`` (the
    ``module.qualname`` of its function) about ``items`` items on ``workers`` workers, when
    so many items would repay a pool even at the least an item takes
    (:data:`_LEAST_ITEM_SECONDS`), the rule :func:`ordered_map` applies when it starts;
    whether the job is that large (the server then starts, unless it is up already).

    A command calls it as soon as it knows the job's size, before it imports the job or
    reads the project: the server's imports (about a second of one core) then run beside the
    command's own, rather than after them, and its pool answers that much sooner. Changes no
    result: the job runs as it would without it.

    Examples
    --------
    >>> head_start("app.map_runs.group_runs", 10, 2)  # too few items to pay
    False
    >>> head_start("app.map_runs.group_runs", 10_000, 1)  # one worker: never a pool
    False
    """
    large = _pays_at_any_pace(items, workers)
    if large:
        _start_server(job, only=True)
    return large


class _Early:
    """A pool started by :func:`early_pool` and the futures of the items handed to it."""

    def __init__(self, fn: Callable[..., Any], items: list[Any], workers: int):
        self.fn = fn
        self.items = items
        self.sent: list[Future[Any]] = []
        self._lock = threading.Lock()
        self._taken = False
        self.pool = _Pool(workers - 1, None, (), fn, then=self._send)

    def _send(self, pool: _Pool) -> None:
        """Keep ``pool``, now up, busy with the items (on its start thread): at most
        :data:`_POOL_AHEAD` per process in flight, as a job keeps it, until a job or
        :func:`drop_early` takes the pool or no item is left."""
        ahead = _POOL_AHEAD * pool.workers
        while True:
            with self._lock:
                if self._taken or pool.executor is None:
                    return
                flight = [f for f in self.sent[-ahead:] if not f.done()]
                try:
                    while len(flight) < ahead and len(self.sent) < len(self.items):
                        flight.append(pool.executor.submit(self.fn, self.items[len(self.sent)]))
                        self.sent.append(flight[-1])
                except RuntimeError:  # the pool is being shut down
                    return
                if len(self.sent) == len(self.items):
                    return
            wait(flight[:1], timeout=_POLL_SECONDS, return_when=FIRST_COMPLETED)

    def take(self) -> list[tuple[Future[Any], Any]]:
        """The items handed to the pool so far with their futures; none are handed after."""
        with self._lock:
            self._taken = True
            return list(zip(self.sent, self.items, strict=False))


#: The pool :func:`early_pool` started and that no job has taken yet.
_early: _Early | None = None


def early_pool(fn: Callable[[T], R], items: Iterable[T], workers: int) -> bool:
    """Start a pool of ``workers - 1`` processes now and hand it ``items``, the first items of
    a job that will call :func:`ordered_map` with ``fn`` soon (the first ones it would
    compute); whether a pool was started (one worker: none). The pool gets them a few at a time,
    as a job's pool does, until the job takes it.

    A command that can tell its job's first items before it opens the project (``import-maps``
    reads them with :mod:`sqlite3` alone, :func:`app.store.peek.map_frames_hint`) calls it
    after :func:`head_start`, so the second core computes them while the command imports the
    store and opens the project, instead of waiting for it. :func:`ordered_map` then takes the
    pool and those results for as many of its items as are equal to these, in order, and
    computes anything else as usual (a first item that differs, and every item after it, is
    computed again), so the results are the same with or without. Give enough for what the
    command takes to reach the job (the pool idles once it has computed them all); call
    :func:`drop_early` when the job may not run (an error on the way), so the pool stops.
    """
    global _early
    drop_early()
    if workers <= 1:
        return False
    _early = _Early(fn, list(items), workers)
    return True


def drop_early() -> None:
    """Stop the pool of :func:`early_pool` if no job has taken it (nothing otherwise)."""
    global _early
    early, _early = _early, None
    if early is not None:
        early.take()
        for future in early.sent:
            future.cancel()
        early.pool.close()


def _take_early(fn: Callable[[T], R], upcoming: Iterator[T], workers: int
                ) -> tuple[_Pool, list[tuple[Future[R], bool, T]], Iterator[T]] | None:
    """The pool of :func:`early_pool` if it was started for ``fn`` on ``workers`` workers,
    with the futures of the first items of ``upcoming`` that are equal to those handed to it,
    and the rest of ``upcoming``; None (and that pool stopped) otherwise."""
    global _early
    early = _early
    if early is None or early.fn is not fn or early.pool.workers != workers - 1:
        drop_early()
        return None
    _early = None
    pending: list[tuple[Future[R], bool, T]] = []
    sent = early.take()
    for n, (future, given) in enumerate(sent):
        item = next(upcoming, _END)
        if item is _END or not _same(item, given):
            for later, _ in sent[n:]:
                later.cancel()  # one already running ends, and is thrown away
            if item is not _END:
                upcoming = itertools.chain([item], upcoming)  # type: ignore[list-item]
            break
        pending.append((future, True, item))  # type: ignore[arg-type]
    return early.pool, pending, upcoming


def _same(a: Any, b: Any) -> bool:
    """Whether two items are equal (items holding arrays count as different)."""
    try:
        return bool(a == b)
    except Exception:  # an array's truth is ambiguous: computed again
        return False


def _pays_at_any_pace(items: int, workers: int) -> bool:
    """Whether a pool repays its start on ``items`` items even at the least an item takes
    (:data:`_LEAST_ITEM_SECONDS`)."""
    return workers > 1 and items * _LEAST_ITEM_SECONDS > 2.0 * _start_cost()


def _start_server(fn: Callable[..., Any] | str, only: bool = False) -> None:
    """Start this process's fork server now, with what ``fn`` (a function or its
    ``module.qualname``) needs preloaded (see :func:`_context`; ``only``: for a process that
    runs this job alone), unless it is already up; a pool started later forks its workers
    from it. Spawning the server takes a few milliseconds here; its imports run in its own
    process, on another core while this one works."""
    global _server_since
    if _server_since is not None:
        return
    try:
        context = _context(fn, only)
        if context.get_start_method() != "forkserver":
            return
        from multiprocessing import forkserver

        forkserver.ensure_running()
    except Exception as exc:  # the pool tries again when it starts, and says so
        log.debug("the fork server did not start early: %s", exc)
        return
    _server_since = time.perf_counter()


def _start_cost() -> float:
    """What a pool started now would take to answer, by what this process has done before:
    the rest of its fork server's start, or at least :data:`_WARM_START_SECONDS`."""
    if _server_since is None:
        return POOL_START_SECONDS
    return max(_WARM_START_SECONDS, POOL_START_SECONDS - (time.perf_counter() - _server_since))


def _alongside(fn: Callable[[T], R], upcoming: Iterator[T], done: int, total: int, workers: int,
               progress: Progress, label: str, initializer: Callable[..., Any] | None,
               initargs: tuple[Any, ...], sharing: Callable[[], Any] | None = None,
               early: tuple[_Pool, list[tuple[Future[R], bool, T]]] | None = None,
               reads_only: bool = False) -> Iterator[R]:
    """The items left in ``upcoming`` (``done`` of ``total`` already taken): this process
    calls ``sharing`` and goes on with them while a pool of ``workers - 1`` processes starts,
    then shares them with it, so ``workers`` processes compute in all. ``early``: the pool
    that :func:`early_pool` started and the futures of the first items, handed to it before
    the job began (``upcoming`` then starts after them). ``reads_only``: as for
    :func:`ordered_map`."""
    if early is not None:
        pool, sent = early
        yield from _shared(fn, upcoming, done, total, progress, label, pool, deque(sent),
                           reads_only)
        return
    if sharing is not None:
        # Now, not once the pool is up: the fork server's imports and the workers' set-up
        # run on the cores this process would otherwise keep busy with threads of its own
        # (with pre-labelling's second OpenCV thread, the pool took longer to come up).
        sharing()
    pool = _Pool(workers - 1, initializer, initargs, fn)
    yield from _shared(fn, upcoming, done, total, progress, label, pool, deque(), reads_only)


def _shared(fn: Callable[[T], R], upcoming: Iterator[T], done: int, total: int,
            progress: Progress, label: str, pool: _Pool,
            pending: deque[tuple[Future[R], bool, T]], reads_only: bool = False
            ) -> Iterator[R]:
    """The items left in ``upcoming``, shared between this process and ``pool`` (up or
    starting) once it is up, after those in ``pending``: in the items' order, the result to
    come, whether the pool computes it, and the item (so that an item the pool has not
    started can be taken back). The pool is closed at the end. ``reads_only``: as for
    :func:`ordered_map`."""
    workers = pool.workers + 1
    on_pool = sum(remote for _, remote, _ in pending)
    told = False
    # Results computed here and not yet yielded, at most: those computed while the pool
    # works through its queue, twice over, and a few more.
    ahead = _HERE_AHEAD * workers + 2 * _POOL_AHEAD * (workers - 1)
    exhausted = False
    overtaken = False  # whether items the pool holds were computed here in their place
    try:
        while True:
            if pool.up.is_set() and pool.error is None and pool.executor is not None:
                if not told:
                    told = True
                    log.debug("%s: pool of %d up after %.2f s, at item %d of %d", label or "job",
                              pool.workers, pool.seconds, done + len(pending), total)
                while not exhausted and on_pool < _POOL_AHEAD * pool.workers:
                    item = next(upcoming, _END)
                    if item is _END:
                        exhausted = True
                        break
                    pending.append((pool.executor.submit(fn, item), True, item))
                    on_pool += 1
            elif pool.up.is_set() and not told:
                told = True
                log.warning("%s: the worker processes did not start (%s); going on in this one",
                            label or "job", pool.error)
            if pending and pending[0][0].done():
                head, remote, _ = pending.popleft()
                on_pool -= remote
                progress.step(done, total, label)
                result = head.result()
                done += 1
                yield result
                continue
            if not exhausted and len(pending) - on_pool < ahead:
                if progress.cancelled:
                    progress.step(done, total, label)  # raises Cancelled
                item = next(upcoming, _END)
                if item is _END:
                    exhausted = True
                    continue
                pending.append((_here(fn, item), False, item))
                continue
            if exhausted and on_pool and (
                    _take_back(pending, fn)
                    or (reads_only and _take_over(pending, fn, pool.workers))):
                on_pool -= 1
                overtaken = overtaken or reads_only
                if progress.cancelled:
                    progress.step(done, total, label)  # raises Cancelled
                continue
            if not pending:
                return
            wait([pending[0][0]], timeout=_POLL_SECONDS, return_when=FIRST_COMPLETED)
            if progress.cancelled:
                progress.step(done, total, label)  # raises Cancelled
    finally:
        # An item taken over may still run on the pool: its result is not needed, so the job
        # does not wait for it (the pool's processes end once it is done).
        pool.close(wait=not overtaken)
