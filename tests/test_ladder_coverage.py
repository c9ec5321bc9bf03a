"""Worst-case coverage error of a set of settings, against a brute-force evaluation.

The definition (nullsteer.ladder.coverage): for every wanted R in [lo, hi], the error of a
setting s is the ratio max(s/R, R/s); with resistor tolerance t the real value of a
setting lies anywhere in [s(1 − t), s(1 + t)] (series and parallel combinations of
resistors each within ±t stay within ±t: they are increasing and homogeneous of degree
one; common practice), so a setting's worst ratio for R is
max(s(1 + t)/R, R/(s(1 − t))); the user takes the setting whose worst ratio is smallest,
and the ladder's figure is the largest of those over the range. ladder_reference.py
evaluates that by brute force on a fine grid of R, with nothing from the closed form the
module uses.
"""

import math

import numpy as np
import pytest

from ladder_reference import brute_force_pct

from nullsteer.ladder.coverage import worst_case_error_pct, worst_step_pct


CASES = [
    # (settings, lo, hi, tolerance %): invented ladders
    ([500.0, 560.0, 620.0, 700.0, 780.0, 870.0, 960.0, 1070.0, 1200.0], 500, 1200, 1.0),
    ([400.0, 470.0, 560.0, 680.0, 820.0, 1000.0, 1200.0, 1500.0, 1800.0, 2200.0, 2700.0],
     400, 2500, 5.0),
    ([300.0, 330.0, 390.0, 470.0, 900.0, 1000.0], 320, 950, 0.0),   # a hole in the middle
    ([800.0, 900.0], 600, 1000, 2.0),                                # range overhangs below
]


@pytest.mark.parametrize("settings, lo, hi, tol", CASES)
def test_worst_case_error_matches_brute_force(settings, lo, hi, tol):
    # Grid of 2e5 points in log R: the sampled maximum is within ~1e-5 (relative) of the
    # true one, far below the 1e-3 % held here.
    got = worst_case_error_pct(np.array(settings), lo, hi, tol)
    assert got == pytest.approx(brute_force_pct(settings, lo, hi, tol), abs=1e-3)


def test_hand_worked_two_settings():
    # Two settings 900 and 1100 Ω over exactly [900, 1100], no tolerance: the worst R is
    # the geometric mean √(900·1100) = 994.99 Ω, error 1100/994.99 − 1 = 10.554 %.
    want = (1100.0 / math.sqrt(900.0 * 1100.0) - 1.0) * 100.0
    assert want == pytest.approx(10.554, abs=1e-3)
    assert worst_case_error_pct(np.array([900.0, 1100.0]), 900, 1100, 0.0) == \
        pytest.approx(want, rel=1e-12)
    # the step between them is 1100/900 − 1 = 22.2 %
    assert worst_step_pct(np.array([900.0, 1100.0]), 900, 1100) == \
        pytest.approx(100.0 * (1100 / 900 - 1), rel=1e-12)
