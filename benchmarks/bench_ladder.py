"""Ladder optimiser figures: worst error and time per topology at the default budget,
beside exhaustive search where that is feasible, and the demo ladder after calibration.

Run: .venv/bin/python benchmarks/bench_ladder.py [time_budget_s]
Prints, for 6/7/8 relays, E24, 400-2500 and 1030-1889 ohm and every topology: the time,
nodes, shunt tuples finished, whether the search finished, and the nominal worst error
(ideal contacts) beside plain binary weighting. Exhaustive search is run on reduced
candidate lists (it visits every build). No assertions.
"""

from __future__ import annotations

import itertools
import math
import sys
import time

from nullsteer.ladder import (Candidates, TOPOLOGIES, binary_weighted, branch_and_bound,
                              default_candidates, exhaustive_best)
from nullsteer.ladder.optimise import DEFAULT_TIME_BUDGET_S
from nullsteer.ladder.eseries import SERIES


def pct(h: float) -> float:
    return (math.exp(h) - 1) * 100


def main() -> None:
    budget = float(sys.argv[1]) if len(sys.argv) > 1 else DEFAULT_TIME_BUDGET_S
    print(f"nominal worst error (ideal contacts), E24, time budget {budget:g} s")
    print(f"{'range':>10} {'topology':19} {'n':>2} {'time s':>7} {'nodes':>7} {'tuples':>11} "
          f"{'proven':>6} {'worst %':>8} {'binary %':>9}")
    for (lo, hi), name, n in itertools.product(((400.0, 2500.0), (1030.0, 1889.0)), TOPOLOGIES,
                                               (6, 7, 8)):
        t = TOPOLOGIES[name]
        cands = default_candidates(SERIES["E24"], lo, hi, n)
        t0 = time.perf_counter()
        r = branch_and_bound(t, lo, hi, n, cands, time_budget_s=budget)
        dt = time.perf_counter() - t0
        b = binary_weighted(t, lo, hi, n, cands)
        print(f"{lo:4.0f}-{hi:4.0f} {name:19} {n:2d} {dt:7.2f} {r.nodes:7d} "
              f"{r.tuples_done:5d}/{r.tuples_total:<5d} {str(r.proven):>6} {pct(r.log_error):8.3f} "
              f"{pct(b.log_error):9.3f}", flush=True)
    print("\nbeside exhaustive search (reduced E12 lists, no clock):")
    small = [("series-shorting", 5, (400.0, 2500.0), (22.0, 2200.0), None),
             ("series-shorting", 6, (300.0, 3000.0), None,
              (33.0, 39, 47, 56, 100, 150, 220, 270, 330, 390, 560, 680, 1500)),
             ("series-shunt", 4, (300.0, 3000.0), (22.0, 6800.0), None),
             ("series-twin-shunt", 4, (300.0, 3000.0), (56.0, 6800.0), None)]
    for name, n, (lo, hi), window, values in small:
        t = TOPOLOGIES[name]
        v = values or tuple(SERIES["E12"].values_ohm(window[0], min(window[1], hi)))
        shunts = () if not t.shunt_relays else tuple(SERIES["E12"].values_ohm(v[0], 6800.0))
        c = Candidates(tuple(float(x) for x in v), tuple(float(x) for x in v), shunts)
        t0 = time.perf_counter()
        r = branch_and_bound(t, lo, hi, n, c, time_budget_s=None)
        t1 = time.perf_counter()
        e = exhaustive_best(t, lo, hi, n, c)
        t2 = time.perf_counter()
        print(f"  {name:19} {n} relays {lo:.0f}-{hi:.0f}: bnb {t1 - t0:6.2f} s {pct(r.log_error):.3f} % "
              f"(proven {r.proven}), exhaustive {t2 - t1:6.2f} s {pct(e.log_error):.3f} % "
              f"({e.nodes} settings sets)", flush=True)
    _calibration()


def _calibration() -> None:
    """The demo ladder built with parts off by up to their 1 % tolerance, then calibrated."""
    import json
    from pathlib import Path

    import numpy as np

    from nullsteer.ladder import design_from_board_block
    from nullsteer.ladder.calibrate import calibrate, part_refs
    from nullsteer.ladder.design import dc_settings, evaluate
    from nullsteer.ladder.topology import LadderValues

    board = json.loads((Path(__file__).parents[1] / "examples" / "board-sim.json").read_text())
    nom = design_from_board_block(board["ladder"], tolerance_pct=1.0)
    nom = evaluate(nom.topo, nom.values, 1030.0, 1889.0, 1.0, nom.parasitics, nom.series)
    rng = np.random.default_rng(7)
    k = len(part_refs(nom))
    s = 1.0 + rng.uniform(-0.01, 0.01, k)
    v = nom.values
    real = LadderValues(v.base_ohm * s[0], tuple(c * f for c, f in zip(v.chain_ohm, s[1:])))
    readings = dc_settings(nom.topo, real, nom.parasitics)
    real_table = evaluate(nom.topo, real, 1030.0, 1889.0, 0.0, nom.parasitics, nom.series)
    # the nominal table on the real build: the board picks by nominal values
    from nullsteer.protocol.wire import nearest_index
    r = np.geomspace(1030.0, 1889.0, 20001)
    nominal_ohm = [st.ohms for st in nom.settings]
    masks = [st.mask for st in nom.settings]
    picked = np.array([readings[masks[nearest_index(nominal_ohm, float(x))]] for x in r])
    uncal = (np.exp(np.abs(np.log(picked / r)).max()) - 1) * 100
    cal = calibrate(nom, None, [(str(m), float(o)) for m, o in enumerate(readings)])
    print(f"\ndemo ladder (1030-1889 ohm, parts within ±1 %): nominal table on the real parts "
          f"{uncal:.3f} % worst; calibrated {cal.design.worst_case_error_pct:.3f} %; the real "
          f"settings' own quantisation error {real_table.nominal_error_pct:.3f} %; "
          f"tolerance worst case of the nominal design {nom.worst_case_error_pct:.3f} %")


if __name__ == "__main__":
    main()
