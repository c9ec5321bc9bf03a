"""Predicted null loss against F/B computed directly from the solved loop, the F/B
ceiling, and the station entry point (committed board block = what the designer gives)."""

import json
from pathlib import Path

import numpy as np
import pytest

from nullsteer.station.config import load_station
from nullsteer.errors import ConfigError
from nullsteer.ladder import (LadderValues, Parasitics, board_ladder_block, evaluate,
                              get_topology, parse_ladder, predicted_null_loss)
from nullsteer.ladder.station import design_for_station, solve_station

EXAMPLES = Path(__file__).parents[1] / "examples"
IDEAL = Parasitics(0.0, 0.0)
ELEV = [10.0, 35.0, 60.0]


@pytest.fixture(scope="module")
def solution():
    from nullsteer.antenna.ports import LoopModel
    from nullsteer.antenna.specs import parse_antenna, parse_feed, parse_ground
    st = load_station(EXAMPLES / "station.toml")
    model = LoopModel(parse_antenna(st.section("antenna")), parse_ground(st.section("ground")),
                      parse_feed(st.section("feed")))
    return model.solve(np.array([1.83e6, 1.95e6]))


def _two_settings(lo, hi):
    # A hand-made table: base lo and base + (hi - lo), exact parts, ideal contacts.
    return evaluate(get_topology("series-shorting"), LadderValues(lo, (hi - lo,)), lo, hi, 0.0,
                    IDEAL, "E24")


def test_loss_is_the_definition_recomputed(solution):
    # Definition check, not an outside value: for each frequency, elevation and end, pick
    # the nearer of the two settings by ratio and take F/B(optimum) - F/B(setting) with the
    # model's own fb_db, both capped at the ceiling (definition in
    # nullsteer.ladder.nullloss). The F/B physics itself is checked against outside values
    # in test_antenna_loop.py; the ceiling's bound in test_needed_range.py.
    d = _two_settings(900.0, 1400.0)
    ceiling = 25.0
    got = predicted_null_loss(d, solution, ELEV, ceiling_db=ceiling)
    for fe in ("A", "B"):
        r_opt = solution.optimum_termination_ohm(fe, ELEV, each=True)
        for i in range(solution.freqs_hz.size):
            for j, e in enumerate(ELEV):
                r = r_opt[i, j]
                s = 900.0 if abs(np.log(r / 900.0)) <= abs(np.log(r / 1400.0)) else 1400.0
                fb_opt = float(np.ravel(solution.fb_db(r, fe, e, freq_index=[i]))[0])
                fb_set = float(np.ravel(solution.fb_db(s, fe, e, freq_index=[i]))[0])
                assert got.raw_loss_db[fe][i, j] == pytest.approx(fb_opt - fb_set, abs=1e-9)
                assert got.loss_db[fe][i, j] == pytest.approx(
                    min(fb_opt, ceiling) - min(fb_set, ceiling), abs=1e-9)
    assert got.worst_db <= got.worst_raw_db
    assert got.worst_db <= ceiling


def test_a_setting_at_the_exact_optimum_loses_nothing(solution):
    # Property: if a setting equals the optimum at (f, elevation, end), the loss there is 0.
    r = float(solution.optimum_termination_ohm("A", [35.0], each=True)[0, 0])
    d = _two_settings(r, 1.6 * r)
    got = predicted_null_loss(d, solution, [35.0], fed_ends=("A",))
    assert got.raw_loss_db["A"][0, 0] == pytest.approx(0.0, abs=1e-9)
    assert got.loss_db["A"][0, 0] == pytest.approx(0.0, abs=1e-9)


def test_ceiling_key_is_read_and_checked():
    assert parse_ladder({"null_depth_ceiling_db": 24.0}).null_depth_ceiling_db == 24.0
    assert parse_ladder({}).null_depth_ceiling_db == 30.0
    with pytest.raises(ConfigError) as exc:
        parse_ladder({"null_depth_ceiling_db": -3})
    assert exc.value.key == "ladder.null_depth_ceiling_db"
    with pytest.raises(ConfigError) as exc:
        parse_ladder({"search_node_budget": 0})
    assert exc.value.key == "ladder.search_node_budget"


def test_committed_board_block_is_what_the_designer_gives():
    # examples/board-sim.json carries the ladder of examples/station.toml; they must agree.
    st = load_station(EXAMPLES / "station.toml")
    sd = design_for_station(st)
    board = json.loads((EXAMPLES / "board-sim.json").read_text())
    assert board["ladder"] == json.loads(json.dumps(board_ladder_block(sd.design)))
    ladder_relays = [r for r in board["relays"] if r["role"] == "ladder"]
    assert len(ladder_relays) == sd.design.relays
    assert sd.null_loss is not None and sd.null_loss.worst_db <= sd.null_loss_goal_db


def test_auto_picks_the_fewest_relays_meeting_the_null_loss_goal(tmp_path):
    st_path = tmp_path / "station.toml"
    text = (EXAMPLES / "station.toml").read_text().replace("relays = 7 ", 'relays = "auto" ')
    text = text.replace('freqs_mhz = "1.8:2.0:0.05"', "freqs_mhz = [1.83, 1.95]")
    st_path.write_text(text)
    st = load_station(st_path)
    sol, need, el = solve_station(st)
    sd = design_for_station(st, sol, need)
    counts = [n for n, _ in sd.auto_trials]
    assert counts == list(range(1, sd.design.relays + 1))
    assert sd.auto_trials[-1][1] <= 3.0
    assert all(w > 3.0 for _, w in sd.auto_trials[:-1])
