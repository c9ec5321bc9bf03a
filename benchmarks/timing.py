"""One way to print a latency sample in the benchmarks: median, spread, extremes."""

from __future__ import annotations

import statistics


def summary(name: str, ms: list[float], width: int = 28) -> str:
    """``name  median … ms  p5 …  p95 …  max …  stdev …  (n=…)`` for samples in ms."""
    q = statistics.quantiles(ms, n=20)
    return (f"{name:<{width}} median {statistics.median(ms):7.2f} ms   p5 {q[0]:7.2f}   "
            f"p95 {q[-1]:7.2f}   max {max(ms):7.2f}   stdev {statistics.stdev(ms):5.2f}"
            f"   (n={len(ms)})")
