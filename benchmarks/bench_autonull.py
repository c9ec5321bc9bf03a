"""Auto-null against an exhaustive sweep over seeded scenarios (printed, not asserted).

Each scenario puts an invented interferer near the rear null (bearing within +-25 deg of
the null, elevation 10-60 deg, random strength) and one or two other stations, with
seeded slow fading and scintillation, on the demo station's loop, ground and ladder table
(examples/board-sim.json). The search starts from the model's predicted optimum over the
band's elevation span (not the interferer's own elevation, which a user does not know).

For speed the virtual receiver is driven directly with a virtual clock (no firmware, no
sleeping); the CLI and the tests run the same search through the firmware.

Scored on the *true* (unfaded) level of the setting each method ends on, against the
true best of all settings ("exhaustive best"):

* autonull   - the search, every switching counted (reference reading, probes, final);
* sweep      - reading every setting once with the same fading and averaging.
"""

from __future__ import annotations

import json
import sys
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "host"))

from nullsteer.reception.autonull import Switcher, run_autonull  # noqa: E402
from nullsteer.reception.autonull_run import (predicted_optimum_ohm, solve_station_model,  # noqa: E402
                                    station_elevations_deg, table_termination)
from nullsteer.station.bearing import null_bearing_deg  # noqa: E402
from nullsteer.station.config import load_station, parse_freqs_mhz  # noqa: E402
from nullsteer.reception.measure import Meter  # noqa: E402
from nullsteer.reception.noise import NoiseCategory  # noqa: E402
from nullsteer.reception.virtual import (ModelResponse, SimScenario, SimStation,  # noqa: E402
                                    VirtualClock, VirtualReceiver)

N_SCENARIOS = 60
GOAL_DB, GOAL_SWITCHINGS = 1.0, 12


class _Read:
    """Source reading the receiver at the state the switcher last applied."""

    name = "bench"

    def __init__(self, rx: VirtualReceiver, freq_hz: float) -> None:
        self.rx, self.freq_hz, self.state = rx, freq_hz, ("A", 0, False)

    def apply(self, fe: str, mask: int, open_: bool) -> None:
        self.state = (fe, mask, open_)

    def read_db(self) -> float:
        return self.rx.level_dbm(self.freq_hz, *self.state)


def scenario(k: int, freqs_hz: np.ndarray, end_a: float) -> tuple[float, str, SimScenario]:
    rng = np.random.default_rng(1000 + k)
    f = float(rng.choice(freqs_hz))
    fe = str(rng.choice(["A", "B"]))
    null = null_bearing_deg(fe, end_a)
    sts = [SimStation("Q0INT", "interferer", f, (null + rng.uniform(-25, 25)) % 360,
                      rng.uniform(10, 60), rng.uniform(30, 50))]
    for j in range(int(rng.integers(1, 3))):
        sts.append(SimStation(f"Q0W{j}", "wanted", f, (null + 180 + rng.uniform(-60, 60)) % 360,
                              rng.uniform(5, 40), rng.uniform(0, 25)))
    sc = SimScenario(tuple(sts), seed=k, fading_sigma_db=float(rng.uniform(1, 3)),
                     fading_tau_s=60.0, rician_k_db=float(rng.uniform(10, 20)), read_noise_db=0.2)
    return f, fe, sc


def main() -> int:
    station = load_station(ROOT / "examples" / "station.toml")
    board = json.loads((ROOT / "examples" / "board-sim.json").read_text())
    table = [(int(m), float(r)) for m, r in board["ladder"]["table"]]
    freqs = np.array(parse_freqs_mhz(station.section("band")["freqs_mhz"], "band")) * 1e6
    t0 = time.perf_counter()
    sol = solve_station_model(station, freqs)
    t_solve = time.perf_counter() - t0
    els = station_elevations_deg(station)
    end_a = float(station.section("antenna")["end_a_bearing_deg"])
    term = table_termination(table)
    rows = []
    t0 = time.perf_counter()
    for k in range(N_SCENARIOS):
        f, fe, sc = scenario(k, freqs, end_a)
        fi = int(np.argmin(np.abs(sol.freqs_hz - f)))
        start = predicted_optimum_ohm(sol, fe, els, fi)
        clock = VirtualClock()
        rx = VirtualReceiver(ModelResponse(sol), sc, term, NoiseCategory.RURAL, 500.0,
                             10 ** 1.2, clock=clock.now)
        truth = {m: rx.level_dbm(f, fe, m, False, faded=False) for m, _ in table}
        best_true = min(truth.values())
        src = _Read(rx, f)
        meter = Meter(src, dwell_s=0.3, reads=3, interval_s=0.1, sleep=clock.sleep)
        sw = Switcher(src.apply, current=("A", 0, False))
        res = run_autonull(table, sw, meter.measure_db, fe, f, start)
        sweep = {}
        for m, _ in table:
            src.apply(fe, m, False)
            sweep[m] = meter.measure_db()
        sweep_pick = min(sweep, key=sweep.__getitem__)
        rows.append((k, f / 1e6, fe, start, res.best_ohms, truth[res.best_mask] - best_true,
                     res.switchings, truth[sweep_pick] - best_true,
                     min(truth, key=truth.__getitem__), res.null_db))
    t_run = time.perf_counter() - t0
    print(f"model solve ({len(freqs)} frequencies): {t_solve * 1e3:.1f} ms; "
          f"{N_SCENARIOS} scenarios (search + 128-setting sweep each): {t_run:.2f} s")
    print(f"{'#':>3} {'MHz':>6} {'end':>3} {'start_ohm':>9} {'found_ohm':>9} "
          f"{'autonull_dB':>11} {'switch':>6} {'sweep_dB':>8} {'null_dB':>8}")
    for k, f, fe, st, found, d, sw, ds, _, nd in rows:
        print(f"{k:>3} {f:>6.3f} {fe:>3} {st:>9.0f} {found:>9.0f} {d:>11.2f} {sw:>6d} "
              f"{ds:>8.2f} {nd:>8.1f}")
    d = np.array([r[5] for r in rows])
    s = np.array([r[6] for r in rows])
    ds = np.array([r[7] for r in rows])
    print()
    print("level above the exhaustive best (true, unfaded), dB:")
    print(f"{'':12} {'mean':>6} {'median':>6} {'p90':>6} {'worst':>6} {'<=1 dB':>7} {'switchings':>16}")
    print(f"{'autonull':12} {d.mean():6.2f} {np.median(d):6.2f} {np.percentile(d, 90):6.2f} "
          f"{d.max():6.2f} {np.mean(d <= GOAL_DB) * 100:6.0f}% "
          f"{f'mean {s.mean():.1f}, max {s.max()}':>16}")
    print(f"{'sweep (128)':12} {ds.mean():6.2f} {np.median(ds):6.2f} {np.percentile(ds, 90):6.2f} "
          f"{ds.max():6.2f} {np.mean(ds <= GOAL_DB) * 100:6.0f}% {f'{len(table)} each':>16}")
    ok = d.max() <= GOAL_DB and s.max() <= GOAL_SWITCHINGS
    print(f"goal (within {GOAL_DB:g} dB in <= {GOAL_SWITCHINGS} switchings, every scenario): "
          f"{'met' if ok else 'NOT met'}; switchings ratio sweep/autonull = "
          f"{len(table) / s.mean():.1f}x")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
