"""The significance of a null: Student's t quantiles, Welch's interval, and auto-null on
pure noise (no null) against a real interferer (a null).

Sources:
* t quantiles t(0.975, dof): Abramowitz and Stegun, Table 26.10; the same values in the
  NIST/SEMATECH e-Handbook of Statistical Methods, section 1.3.6.7.2 (from memory:
  12.706, 4.303, 3.182, 2.776, 2.571, 2.228, 2.086, 2.042; 1.960 for the normal);
* a 95 % interval must contain the true difference in about 95 % of repeated trials
  (the definition of a confidence interval), checked by simulation with known truth.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from nullsteer.reception.autonull import Reference, Switcher, run_autonull
from nullsteer.reception.measure import Meter
from nullsteer.reception.significance import null_estimate, t_quantile

ROOT = Path(__file__).resolve().parents[1]


@pytest.mark.parametrize("dof, value", [(1, 12.706), (2, 4.303), (3, 3.182), (4, 2.776),
                                        (5, 2.571), (10, 2.228), (20, 2.086), (30, 2.042),
                                        (1e6, 1.960)])
def test_t_quantiles_match_the_published_table(dof, value):
    assert t_quantile(0.975, dof) == pytest.approx(value, abs=2e-3)
    assert t_quantile(0.025, dof) == pytest.approx(-value, abs=2e-3)  # symmetric


def test_t_quantiles_match_scipy_when_installed():
    stats = pytest.importorskip("scipy.stats")  # reference library, used only in tests
    for dof in (1, 2, 3, 6, 11, 29, 30, 47, 200):
        for p in (0.9, 0.975, 0.995):
            assert t_quantile(p, dof) == pytest.approx(stats.t.ppf(p, dof), abs=1e-6)


def test_interval_covers_the_truth_95_percent_of_the_time():
    rng = np.random.default_rng(4)
    trials, covered = 600, 0
    for _ in range(trials):
        cand = rng.normal(-3.0, 1.5, 6)   # true difference -3 dB, unequal scatter
        ref = rng.normal(0.0, 0.6, 6)
        e = null_estimate(list(cand), list(ref))
        covered += e.ci_low_db <= -3.0 <= e.ci_high_db
    assert 0.92 <= covered / trials <= 0.98


def test_identical_quantised_readings_keep_the_meter_resolution():
    # 6 dB S-meter steps (one S unit): readings all alike still carry 6/sqrt(12) dB each
    q = 6 / 12 ** 0.5
    e = null_estimate([-6.0] * 3, [0.0] * 3, [q] * 3, [q] * 3)
    assert e.ci_high_db > e.null_db > e.ci_low_db
    assert e.ci_high_db - e.ci_low_db == pytest.approx(2 * 1.96 * (2 * q * q / 3) ** 0.5, rel=1e-3)


class _Rig:
    """A source reading a virtual receiver at the state the switcher last applied."""

    name = "test"

    def __init__(self, rx, freq_hz):
        self.rx, self.freq_hz, self.state = rx, freq_hz, ("A", 0, False)

    def apply(self, fe, mask, open_):
        self.state = (fe, mask, open_)

    def read_db(self):
        return self.rx.level_dbm(self.freq_hz, *self.state)


def _scenario_run(stations, seed):
    from nullsteer.reception.autonull_run import (predicted_optimum_ohm, solve_station_model,
                                                  station_elevations_deg, table_termination)
    from nullsteer.reception.noise import NoiseCategory
    from nullsteer.reception.virtual import (ModelResponse, SimScenario, VirtualClock,
                                             VirtualReceiver)
    from nullsteer.station.config import load_station

    st = load_station(ROOT / "examples" / "station.toml")
    table = [(int(m), float(r)) for m, r in
             json.loads((ROOT / "examples" / "board-sim.json").read_text())["ladder"]["table"]]
    sol = solve_station_model(st, [1.83e6])
    clock = VirtualClock()
    sc = SimScenario(tuple(stations), seed=seed, fading_sigma_db=2.0, fading_tau_s=60.0,
                     rician_k_db=15.0, read_noise_db=0.5)
    rx = VirtualReceiver(ModelResponse(sol), sc, table_termination(table), NoiseCategory.RURAL,
                         500.0, 10 ** 1.2, clock=clock.now)
    src = _Rig(rx, 1.83e6)
    meter = Meter(src, dwell_s=0.3, reads=3, interval_s=0.1, sleep=clock.sleep)
    start = predicted_optimum_ohm(sol, "A", station_elevations_deg(st))
    return run_autonull(table, Switcher(src.apply), meter.measure_db, "A", 1.83e6, start,
                        Reference.REVERSED, confirm_blocks=2, measure=meter.measure)


def test_pure_noise_gives_no_significant_null_where_the_search_alone_would_claim_one():
    # no station in the passband: every setting hears the same noise (the loop's noise
    # efficiency hardly moves with the termination), so no setting can be a null
    results = [_scenario_run([], seed) for seed in range(12)]
    assert sum(r.significant for r in results) <= 2   # ~5 % false alarms allowed, and a bit
    assert all(abs(r.null_db) < 1.5 for r in results)
    # the search's own (selected) best reading is biased low on noise
    assert np.mean([r.search_null_db for r in results]) < np.mean([r.null_db for r in results])
    assert "no significant null" in next(r for r in results if not r.significant).notes[0]


def test_a_real_interferer_gives_a_significant_null():
    from nullsteer.reception.virtual import SimStation

    r = _scenario_run([SimStation("Q0INT", "interferer", 1.83e6, 248.0, 35.0, 42.0)], seed=3)
    assert r.significant and r.significance.ci_high_db < -10
    assert r.confirm_switchings == 4
