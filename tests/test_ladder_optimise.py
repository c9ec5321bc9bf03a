"""The optimiser equals an exhaustive search over the same candidates (the outside
reference: enumeration with no bounds cannot miss the optimum)."""

import math

import numpy as np
import pytest

from ladder_reference import brute_force_pct

from nullsteer.ladder import (Candidates, TOPOLOGIES, binary_weighted, branch_and_bound,
                              exhaustive_best)
from nullsteer.ladder.coverage import worst_case_error_pct, worst_log_error
from nullsteer.ladder.eseries import SERIES


def _cands(series, lo, hi, shunt_hi=None):
    v = tuple(SERIES[series].values_ohm(lo, hi))
    return Candidates(v, v, tuple(SERIES[series].values_ohm(lo, shunt_hi or hi)))


CASES = [  # (topology, relays, range, series, candidate window)
    ("series-shorting", 2, (400, 2500), "E24", (10, 2500)),
    ("series-shorting", 3, (400, 2500), "E12", (10, 2500)),
    ("series-shorting", 4, (600, 1500), "E12", (10, 1500)),
    ("series-shorting", 5, (400, 2500), "E12", (22, 2200)),
    # wide ranges with small bases: base + the small sums start below the range
    ("series-shorting", 4, (300, 3000), "E12", (10, 3000)),
    ("series-shorting", 5, (300, 3000), "E12", (27, 2700)),
    ("series-shunt", 2, (400, 2500), "E12", (10, 10000)),
    ("series-shunt", 3, (300, 3000), "E12", (33, 6800)),
    ("series-shunt", 4, (300, 3000), "E12", (22, 6800)),
    ("series-twin-shunt", 3, (400, 2500), "E12", (33, 10000)),
    ("series-twin-shunt", 4, (300, 3000), "E12", (56, 6800)),
    ("series-split-shunt", 3, (400, 2500), "E12", (33, 10000)),
    ("series-split-shunt", 3, (300, 3000), "E12", (56, 6800)),
]


@pytest.mark.parametrize("topo,relays,rng,series,window", CASES)
def test_branch_and_bound_equals_exhaustive(topo, relays, rng, series, window):
    # Exhaustive enumeration of every base x shunt x chain multiset is the reference
    # (a search with no bounds cannot miss the optimum).
    t = TOPOLOGIES[topo]
    cands = _cands(series, window[0], min(window[1], rng[1]), window[1])
    bnb = branch_and_bound(t, *rng, relays, cands, time_budget_s=None)
    ex = exhaustive_best(t, *rng, relays, cands)
    assert bnb.proven
    assert bnb.log_error == pytest.approx(ex.log_error, abs=1e-12)
    # and the reported error is that of the reported values
    assert bnb.log_error == pytest.approx(
        worst_log_error(t.ideal_settings_ohm(bnb.values), *rng), abs=1e-15)


def test_wide_range_six_relays_no_false_proof():
    # 300-3000 ohm, E12, 6 relays: the search once claimed "proven optimal" at 6.143 %
    # while a build from its own list scores 5.973 %. Reference: exhaustive enumeration
    # over a reduced E12 list (IEC 60063 values) that contains that build.
    t = TOPOLOGIES["series-shorting"]
    v = (33.0, 39, 47, 56, 100, 150, 220, 270, 330, 390, 560, 680, 1500)
    cands = Candidates(v, v, ())
    ex = exhaustive_best(t, 300, 3000, 6, cands)
    bnb = branch_and_bound(t, 300, 3000, 6, cands, time_budget_s=None)
    assert bnb.proven
    assert bnb.log_error == pytest.approx(ex.log_error, abs=1e-12)
    assert (math.exp(ex.log_error) - 1) * 100 < 6.0      # the better build is in this list


def test_optimum_beats_binary_weighting():
    # Binary weighting with rounded values is one point of the search space, so the
    # optimum can only be as good or better (here strictly, as E24 rounding is coarse).
    t = TOPOLOGIES["series-shorting"]
    cands = _cands("E24", 1, 2500)
    for n in (3, 4, 5):
        assert branch_and_bound(t, 400, 2500, n, cands, time_budget_s=None).log_error < \
            binary_weighted(t, 400, 2500, n, cands).log_error


def test_worst_case_with_tolerance_for_the_boards_rule():
    # Brute force over a dense grid of wanted R: the board picks the nominal setting
    # nearest R by ratio (the codec's nearest_index, the board's own rule), and that
    # setting may be built anywhere in [s(1-t), s(1+t)]; maximise over R.
    from nullsteer.protocol.wire import nearest_index
    rng = np.random.default_rng(1)
    s = np.sort(rng.uniform(300, 3000, 40))
    lo, hi, t = 400.0, 2500.0, 0.05
    r = np.geomspace(lo, hi, 20001)
    table = list(s)
    chosen = np.array([s[nearest_index(table, float(x))] for x in r])
    ratio = np.maximum(chosen * (1 + t) / r, r / (chosen * (1 - t)))
    brute = math.log(ratio.max())
    exact = math.log(1 + worst_case_error_pct(s, lo, hi, 5.0) / 100)
    step = math.log(hi / lo) / (r.size - 1)          # the grid can miss the peak by a step
    assert brute - 1e-12 <= exact <= brute + step


def test_worst_step_counts_only_the_range():
    # Hand count: settings 300, 500, 1000, 3000 over 400..2500 ohm: the in-range steps
    # are 500/400, 1000/500 and 2500/1000 (the straddling pairs clipped): 150 %.
    from nullsteer.ladder.coverage import worst_step_pct
    assert worst_step_pct(np.array([300.0, 500, 1000, 3000]), 400, 2500) == pytest.approx(150.0)
    assert worst_step_pct(np.array([100.0, 5000.0]), 400, 2500) == pytest.approx(525.0)


def test_worst_error_matches_dense_sampling():
    s = np.array([390.0, 470, 560, 820, 1000, 1500, 2200])
    r = np.geomspace(400, 2500, 100001)
    dense = np.abs(np.log(s[:, None] / r)).min(axis=0).max()
    step = math.log(2500 / 400) / (r.size - 1)
    assert dense - 1e-12 <= worst_log_error(s, 400, 2500) <= dense + step
    assert math.isclose(worst_log_error(np.array([1000.0]), 1000, 1000 * math.e ** 2), 2.0)


def _random_cases(seed=2026, count=8):
    # Seeded random small problems: both topologies, E12 and E24, a tolerance shift
    # (coverage.tolerance_shift) applied to the range as design_ladder does.
    from nullsteer.ladder.coverage import tolerance_shift
    rng = np.random.default_rng(seed)
    out = []
    for i in range(count):
        topo = ("series-shorting", "series-shunt", "series-twin-shunt", "series-split-shunt")[i % 4]
        series = ("E12", "E24")[(i // 4) % 2]
        relays = int(rng.integers(2, 5)) if topo == "series-shorting" else (
            int(rng.integers(2, 4)) if topo == "series-shunt" else 3)
        lo = float(rng.uniform(200, 1200))
        hi = lo * float(rng.uniform(1.5, 6.0))
        shift, _ = tolerance_shift(float(rng.choice([1.0, 5.0, 10.0])))
        out.append((topo, relays, lo * shift, hi * shift, series))
    return out


@pytest.mark.parametrize("topo,relays,lo,hi,series", _random_cases())
def test_random_small_cases_equal_exhaustive(topo, relays, lo, hi, series):
    # Reference: exhaustive enumeration (no bounds, so it cannot miss the optimum).
    t = TOPOLOGIES[topo]
    top = hi if topo == "series-shorting" else 4 * hi
    cands = _cands(series, lo / 8, hi, top)
    if t.shunt_relays == 2:
        cands = Candidates(cands.chain_ohm, cands.base_ohm, cands.shunt_ohm[::2])
    bnb = branch_and_bound(t, lo, hi, relays, cands, time_budget_s=None)
    ex = exhaustive_best(t, lo, hi, relays, cands)
    assert bnb.proven
    assert bnb.log_error == pytest.approx(ex.log_error, abs=1e-12)


def test_search_is_deterministic_and_budget_limited():
    # Same inputs, same design; a budget too small to finish says so (not proven).
    t = TOPOLOGIES["series-shorting"]
    cands = _cands("E24", 10, 2500)
    a = branch_and_bound(t, 400, 2500, 5, cands, node_budget=50, time_budget_s=None)
    b = branch_and_bound(t, 400, 2500, 5, cands, node_budget=50, time_budget_s=None)
    assert a == b and not a.proven and a.nodes == 51
    full = branch_and_bound(t, 400, 2500, 5, cands, time_budget_s=None)
    assert full.proven and full.log_error <= a.log_error


def test_time_budget_stops_and_says_so():
    # A tiny clock budget on a large case: the best build so far, marked not proven.
    t = TOPOLOGIES["series-shunt"]
    from nullsteer.ladder import default_candidates
    cands = default_candidates(SERIES["E24"], 400, 2500, 8)
    r = branch_and_bound(t, 400, 2500, 8, cands, time_budget_s=0.2)
    assert not r.proven and r.tuples_done < r.tuples_total
    assert r.log_error == pytest.approx(worst_log_error(t.ideal_settings_ohm(r.values), 400, 2500))
