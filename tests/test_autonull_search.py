"""The auto-null search, scored against an exhaustive sweep of the same table.

The reference is the minimum over every setting (a plain exhaustive search: a fact, not
a tuned value). Null curves come from the reflection-coefficient shape of a resistive
termination around its optimum, |(R - R0)/(R + R0)|^2 plus a floor (common practice:
the leaking signal's power grows as the square of the termination error), and from the
project's antenna model through the virtual receiver.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from nullsteer.reception.autonull import Reference, Switcher, run_autonull, search_null
from nullsteer.errors import ConfigError

OHMS = 390.0 * np.exp(np.linspace(0.0, math.log(2600 / 390), 128))
TABLE = [(i * 3 + 1, float(r)) for i, r in enumerate(OHMS)]  # masks not equal to indices


def curve(r0, floor):
    return lambda r: 10 * math.log10(((r - r0) / (r + r0)) ** 2 + floor)


@pytest.mark.parametrize("seed", range(40))
def test_within_1db_of_exhaustive_in_budget(seed):
    rng = np.random.default_rng(seed)
    r0 = rng.uniform(420, 2500)
    f = curve(r0, 10 ** rng.uniform(-4, -2))
    by_mask = dict(TABLE)
    noisy = lambda m: f(by_mask[m]) + rng.normal(0.0, 0.3)
    res = search_null(TABLE, noisy, start_ohm=r0 * rng.uniform(0.7, 1.4), max_probes=10)
    exhaustive = min(f(r) for _, r in TABLE)
    assert f(res.best_ohms) - exhaustive <= 1.0
    assert res.visited <= 10
    # never switches to the same setting twice
    assert len({p.mask for p in res.probes}) == len(res.probes)


def test_ends_on_lowest_reading_and_reports_path():
    f = curve(900.0, 1e-4)
    by_mask = dict(TABLE)
    res = search_null(TABLE, lambda m: f(by_mask[m]), start_ohm=500.0, max_probes=10)
    assert res.best_level_db == min(p.level_db for p in res.probes)
    assert res.probes[0].phase == "start"
    assert abs(math.log(res.best_ohms / 900.0)) < math.log(1.02)


def test_optimum_beyond_the_table_ends_at_the_edge():
    f = curve(5000.0, 1e-5)
    by_mask = dict(TABLE)
    res = search_null(TABLE, lambda m: f(by_mask[m]), start_ohm=800.0, max_probes=10)
    assert res.best_ohms == pytest.approx(OHMS[-1])


def test_run_counts_every_switching_and_returns_to_best():
    f = curve(1100.0, 1e-4)
    by_mask = dict(TABLE)
    state = {"s": ("A", 1, False)}
    applied = []

    def apply(fe, mask, open_):
        applied.append((fe, mask, open_))
        state["s"] = (fe, mask, open_)

    def read():
        fe, mask, open_ = state["s"]
        if open_ or fe == "B":  # reference: no null toward the signal
            return 0.0
        return f(by_mask[mask])

    sw = Switcher(apply, current=("A", 1, False))
    res = run_autonull(TABLE, sw, read, "A", 1.83e6, 1000.0, Reference.REVERSED,
                       max_switchings=12)
    assert res.switchings == len(applied) <= 12
    assert state["s"] == ("A", res.best_mask, False)
    assert applied[0][0] == "B"  # the reference is the reversed reading
    assert res.null_db == pytest.approx(res.best_level_db - 0.0)
    assert res.null_db < -20


def test_bad_inputs():
    with pytest.raises(ConfigError):
        search_null([], lambda m: 0.0, 900.0)
    with pytest.raises(ConfigError):
        search_null(TABLE, lambda m: 0.0, -5.0)
    with pytest.raises(ConfigError):
        run_autonull(TABLE, Switcher(lambda *a: None), lambda: 0.0, "C", 1e6, 900.0)
