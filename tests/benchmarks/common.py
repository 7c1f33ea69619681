"""Small helpers shared by the benchmarks: repeatable timing and resident memory."""

from __future__ import annotations

import resource
import statistics
import time
from collections.abc import Callable


def median_seconds(fn: Callable[[], object], repeat: int = 15, warmup: int = 2) -> float:
    """Median wall time of ``fn()`` over ``repeat`` runs after ``warmup`` runs."""
    for _ in range(warmup):
        fn()
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return statistics.median(times)


def peak_rss_mb() -> float:
    """Peak resident set size of this process so far, in MiB (Linux reports KiB)."""
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


def current_rss_mb() -> float:
    """Current resident set size in MiB, from /proc (Linux)."""
    with open("/proc/self/statm") as f:
        pages = int(f.read().split()[1])
    return pages * resource.getpagesize() / 2**20


def row(name: str, value: float, unit: str, target: str, ok: bool, detail: str = "") -> dict:
    return {"name": name, "value": float(value), "unit": unit, "target": target, "ok": bool(ok),
            "detail": detail}
