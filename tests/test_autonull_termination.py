"""The simulator's termination: the board's ladder block turned back into impedances.

Checks: at low frequency every setting equals the board table's DC value (the table is
written from the same design: they must agree), and at upper HF the open contacts'
capacitance shows (1 pF is about 5.3 kΩ of reactance at 30 MHz, REFERENCES.md
"Relays", data-sheet range), so kΩ settings come out lower in magnitude and capacitive.
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from nullsteer.reception.autonull_run import board_termination, ladder_termination, table_termination
from nullsteer.errors import ConfigError

BOARD = Path(__file__).parents[1] / "examples" / "board-sim.json"


def block() -> dict:
    return json.loads(BOARD.read_text())["ladder"]


def test_low_frequency_matches_the_board_table():
    b = block()
    term = ladder_termination(b)
    for mask, ohms in b["table"]:
        z = term(mask, 1e3)
        assert z.real == pytest.approx(ohms, abs=0.06)  # table rounded to 0.1 ohm
        assert abs(z.imag) < 1e-3 * ohms


def test_open_contact_capacitance_shows_at_upper_hf():
    b = block()
    term = ladder_termination(b)
    top_mask, top_ohms = max(b["table"], key=lambda row: row[1])
    z_hf = term(top_mask, 30e6)
    assert z_hf.imag < 0                       # capacitive
    assert abs(z_hf) < top_ohms                # the contacts' capacitance shunts it
    assert abs(term(top_mask, 1.8e6) - top_ohms) < 0.02 * top_ohms  # negligible on 160 m


def test_board_termination_falls_back_to_the_table(tmp_path):
    cfg = tmp_path / "board.json"
    cfg.write_text(json.dumps({"ladder": {"table": [[0, 100.0], [1, 200.0]]}}))
    term = board_termination(cfg, [(0, 100.0), (1, 200.0)])
    assert term(1, 30e6) == 200.0
    assert table_termination([(0, 100.0)])(0, 1e6) == 100.0
    with pytest.raises(ConfigError, match="--mask"):
        term(7, 1e6)
    assert board_termination(BOARD, [])(0, 1e3).real == pytest.approx(block()["table"][0][1], abs=0.06)
