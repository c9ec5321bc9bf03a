"""Ladder optimiser figures: time, nodes, optimum vs exhaustive and vs binary weighting.

Run: .venv/bin/python benchmarks/bench_ladder.py [max_relays] [node_budget]
Prints, per relay count, the branch-and-bound time and nodes, whether it finished,
its worst-case error and that of plain binary weighting (same candidates), and for
small counts the exhaustive search's time and error. No assertions.
"""

from __future__ import annotations

import itertools
import math
import sys
import time

from nullsteer.ladder import (Candidates, TOPOLOGIES, binary_weighted, branch_and_bound,
                              default_candidates, exhaustive_best)
from nullsteer.ladder.eseries import SERIES


def pct(h: float) -> float:
    return (math.exp(h) - 1) * 100


def main() -> None:
    max_relays = int(sys.argv[1]) if len(sys.argv) > 1 else 8
    budget = int(sys.argv[2]) if len(sys.argv) > 2 else 200_000
    print("nominal worst error (ideal contacts); ranges: benchmark and the demo station's")
    print(f"{'range':>10} {'ser':>3} {'topology':16} {'n':>2} {'bnb s':>8} {'nodes':>9} "
          f"{'done':>5} {'bnb %':>7} {'binary %':>9} {'exh s':>7} {'exh %':>7}")
    for (lo, hi), es, name in itertools.product(((400.0, 2500.0), (1030.0, 1889.0)),
                                                ("E24", "E12"),
                                                ("series-shorting", "series-shunt")):
        t = TOPOLOGIES[name]
        for n in range(t.min_relays(), max_relays + 1):
            cands = default_candidates(SERIES[es], lo, hi, n)
            t0 = time.perf_counter()
            r = branch_and_bound(t, lo, hi, n, cands, node_budget=budget)
            dt = time.perf_counter() - t0
            b = binary_weighted(t, lo, hi, n, cands)
            ex_s = ex_p = ""
            if n <= 3:
                small = cands
                t0 = time.perf_counter()
                e = exhaustive_best(t, lo, hi, n, small)
                ex_s, ex_p = f"{time.perf_counter() - t0:7.2f}", f"{pct(e.log_error):7.3f}"
            print(f"{lo:4.0f}-{hi:4.0f} {es:>3} {name:16} {n:2d} {dt:8.3f} {r.nodes:9d} {str(r.proven):>5} "
                  f"{pct(r.log_error):7.3f} {pct(b.log_error):9.3f} {ex_s:>7} {ex_p:>7}",
                  flush=True)
    # a 5-relay exhaustive comparison on a reduced candidate window (E12 22..2200 ohm)
    v = tuple(SERIES["E12"].values_ohm(22, 2200))
    c = Candidates(v, v, v)
    t = TOPOLOGIES["series-shorting"]
    t0 = time.perf_counter()
    r = branch_and_bound(t, lo, hi, 5, c)
    t1 = time.perf_counter()
    e = exhaustive_best(t, lo, hi, 5, c)
    t2 = time.perf_counter()
    print(f"5 relays, E12 22..2200: bnb {t1 - t0:.3f} s {pct(r.log_error):.3f} %, "
          f"exhaustive {t2 - t1:.3f} s {pct(e.log_error):.3f} % ({e.nodes} builds), "
          f"speed-up {(t2 - t1) / (t1 - t0):.0f}x")


if __name__ == "__main__":
    main()
