"""Needed termination range: the null-depth ceiling in the sensitivity figures.

What is checked and against what:

* a bound that follows from the definition (nullsteer.antenna.needed): with both F/B
  values capped at the ceiling C, no termination error can lose more than C dB, so every
  point of the loss curve is ≤ C and the slope ≤ C / ref_error_pct;
* the definition itself, recomputed here from F/B values (a definition check: it uses
  the model's F/B, whose physics is tested against outside values elsewhere);
* uncapped, the modelled optimum is an exact cancellation far deeper than any real null
  (common practice: measured nulls of terminated loops are some 20–35 dB), so the
  uncapped loss at 20 % error exceeds the ceiling; this is what the cap is for.
"""

import numpy as np
import pytest

from nullsteer.antenna.metrics import NULL_DEPTH_CEILING_DB
from nullsteer.antenna.needed import needed_range
from nullsteer.antenna.ports import LoopModel
from nullsteer.antenna.specs import parse_antenna, parse_ground

FT = 0.3048
FLAG = dict(shape="rectangle", length_m=29 * FT, height_m=20 * FT, bottom_m=6 * FT,
            wire_diameter_mm=1.628, end_a_bearing_deg=65.0)   # invented test loop


@pytest.fixture(scope="module")
def solution():
    return LoopModel(parse_antenna(FLAG), parse_ground({"kind": "real"})).solve(
        [1.8e6, 1.9e6, 2.0e6])


def test_ceiling_bounds_the_loss_curve(solution):
    nr = needed_range(solution, (10.0, 60.0))
    assert NULL_DEPTH_CEILING_DB == 30.0
    assert all(v <= NULL_DEPTH_CEILING_DB + 1e-9 for v in nr.loss_curve_db.values())
    assert nr.fb_loss_db_per_pct <= NULL_DEPTH_CEILING_DB / nr.ref_error_pct + 1e-9


def test_uncapped_model_null_is_deeper_than_the_ceiling(solution):
    capped = needed_range(solution, (10.0, 60.0))
    raw = needed_range(solution, (10.0, 60.0), ceiling_db=None)
    assert raw.loss_curve_db[20.0] > NULL_DEPTH_CEILING_DB
    assert raw.fb_loss_db_per_pct > capped.fb_loss_db_per_pct


def test_sensitivity_is_the_capped_definition(solution):
    # Definition check: worst over ends, elevations and frequencies of
    # (min(FB(r_opt), C) − min(worse of FB(r_opt·(1+e)), FB(r_opt/(1+e)), C)) / e%.
    el = [10.0, 35.0, 60.0]
    c, e = 30.0, 5.0
    nr = needed_range(solution, el, ref_error_pct=e, ceiling_db=c)
    worst = 0.0
    for fe in ("A", "B"):
        r = solution.optimum_termination_ohm(fe, el, each=True)
        for j, elev in enumerate(el):
            for i in range(solution.freqs_hz.size):
                def fb(x):
                    return float(np.ravel(solution.fb_db(x, fe, elev, freq_index=[i]))[0])
                r0 = float(r[i, j])
                lost = min(fb(r0), c) - min(fb(r0 * 1.05), fb(r0 / 1.05), c)
                worst = max(worst, lost)
    assert nr.fb_loss_db_per_pct == pytest.approx(worst / e, rel=1e-9)
