"""The optimiser equals an exhaustive search over the same candidates."""

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
    ("series-shunt", 2, (400, 2500), "E12", (10, 10000)),
    ("series-shunt", 3, (300, 3000), "E12", (33, 6800)),
]


@pytest.mark.parametrize("topo,relays,rng,series,window", CASES)
def test_branch_and_bound_equals_exhaustive(topo, relays, rng, series, window):
    # Exhaustive enumeration of every base x shunt x chain multiset is the reference
    # (a search with no bounds cannot miss the optimum).
    t = TOPOLOGIES[topo]
    cands = _cands(series, window[0], min(window[1], rng[1]), window[1])
    bnb = branch_and_bound(t, *rng, relays, cands)
    ex = exhaustive_best(t, *rng, relays, cands)
    assert bnb.proven
    assert bnb.log_error == pytest.approx(ex.log_error, abs=1e-12)
    # and the reported error is that of the reported values
    assert bnb.log_error == pytest.approx(
        worst_log_error(t.ideal_settings_ohm(bnb.values), *rng), abs=1e-15)


def test_optimum_beats_binary_weighting():
    # Binary weighting with rounded values is one point of the search space, so the
    # optimum can only be as good or better (here strictly, as E24 rounding is coarse).
    t = TOPOLOGIES["series-shorting"]
    cands = _cands("E24", 1, 2500)
    for n in (3, 4, 5):
        assert branch_and_bound(t, 400, 2500, n, cands).log_error < \
            binary_weighted(t, 400, 2500, n, cands).log_error


def test_worst_case_with_tolerance_matches_brute_force():
    # Direct check of the tolerance shift: for each wanted R, the best setting's worst
    # ratio over builds at ±t; maximised over a dense grid of R (tests/ladder_reference.py).
    rng = np.random.default_rng(1)
    s = np.sort(rng.uniform(300, 3000, 40))
    assert worst_case_error_pct(s, 400.0, 2500.0, 5.0) == pytest.approx(
        brute_force_pct(s, 400.0, 2500.0, 5.0), abs=1e-3)


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
        topo = ("series-shorting", "series-shunt")[i % 2]
        series = ("E12", "E24")[(i // 2) % 2]
        relays = int(rng.integers(2, 5 if topo == "series-shorting" else 4))
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
    cands = _cands(series, lo / 16, hi, top)
    bnb = branch_and_bound(t, lo, hi, relays, cands, node_budget=10**7)
    ex = exhaustive_best(t, lo, hi, relays, cands)
    assert bnb.proven
    assert bnb.log_error == pytest.approx(ex.log_error, abs=1e-12)


def test_search_is_deterministic_and_budget_limited():
    # Same inputs, same design; a budget too small to finish says so (not proven).
    t = TOPOLOGIES["series-shorting"]
    cands = _cands("E24", 10, 2500)
    a = branch_and_bound(t, 400, 2500, 5, cands, node_budget=50)
    b = branch_and_bound(t, 400, 2500, 5, cands, node_budget=50)
    assert a == b and not a.proven and a.nodes == 51
    full = branch_and_bound(t, 400, 2500, 5, cands)
    assert full.proven and full.log_error <= a.log_error
