"""Run every ``bench_*.py`` here, print one table and write ``bench-results.json``.

Each benchmark module exposes ``run() -> list[dict]``; a row has ``name``, ``value``, ``unit``,
``target`` (the goal in words, e.g. "<= 5 ms" or ">= 50x"), ``ok`` (whether the goal is met) and
an optional ``detail`` (the baseline and how it was measured). Figures are ratios against a
baseline measured in the same run wherever one exists. Timings never fail the run; they are
reported, and ``ok`` says whether the target was met.

Usage: ``python -m tests.benchmarks.run [NAME_FILTER ...]``
"""

from __future__ import annotations

import importlib
import json
import platform
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent


def _modules(filters: list[str]) -> list[str]:
    names = sorted(p.stem for p in HERE.glob("bench_*.py"))
    if filters:
        names = [n for n in names if any(f in n for f in filters)]
    return names


def main(argv: list[str] | None = None) -> int:
    filters = list(sys.argv[1:] if argv is None else argv)
    rows: list[dict] = []
    for name in _modules(filters):
        module = importlib.import_module(f"tests.benchmarks.{name}")
        start = time.perf_counter()
        got = module.run()
        for row in got:
            row.setdefault("detail", "")
            row["module"] = name
        rows.extend(got)
        print(f"[{name}: {time.perf_counter() - start:.1f} s]", file=sys.stderr)
    width = max((len(r["name"]) for r in rows), default=10)
    print(f"{'benchmark':<{width}}  {'value':>12}  {'unit':<6}  {'target':<14}  met")
    for r in rows:
        print(
            f"{r['name']:<{width}}  {r['value']:>12.3f}  {r['unit']:<6}  {r['target']:<14}  "
            f"{'yes' if r['ok'] else 'NO'}"
        )
        if r["detail"]:
            print(f"{'':<{width}}    {r['detail']}")
    out = {
        "machine": {"python": platform.python_version(), "platform": platform.platform()},
        "time": time.strftime("%Y-%m-%dT%H:%M:%S"),
        "results": rows,
    }
    Path("bench-results.json").write_text(json.dumps(out, indent=2) + "\n")
    return 0


if __name__ == "__main__":
    sys.exit(main())
