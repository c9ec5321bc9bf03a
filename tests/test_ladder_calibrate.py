"""Calibration: measured parts -> fitted values -> table -> a running simulated board.

The "meter" here is the network itself with chosen part values (a build whose real
values are known): the fit must recover those values, flag a part fitted with the wrong
E24 value (off by more than its 1 % tolerance) and a setting whose reading does not fit
(a relay fault), and the board must then hold the rebuilt table, also after a restart.
"""

import json
import math
import shutil
from pathlib import Path

import numpy as np
import pytest

from nullsteer.cli import main
from nullsteer.ladder import design_from_board_block
from nullsteer.ladder.calibrate import calibrate, part_refs
from nullsteer.ladder.design import dc_settings
from nullsteer.ladder.topology import LadderValues
from nullsteer.sim import SimBoard

EXAMPLES = Path(__file__).parents[1] / "examples"


def _nominal():
    board = json.loads((EXAMPLES / "board-sim.json").read_text())
    return board, design_from_board_block(board["ladder"], tolerance_pct=1.0)


def _real(design, scale):
    v = design.values
    return LadderValues(v.base_ohm * scale[0], tuple(c * s for c, s in zip(v.chain_ohm, scale[1:])),
                        v.shunt_ohm)


def test_fit_recovers_the_parts_and_flags_wrong_part_and_fault():
    _, nom = _nominal()
    n = len(part_refs(nom))
    scale = np.linspace(0.992, 1.008, n)
    scale[3] = 1.10                                # R3 fitted 10 % off: a wrong value
    real = _real(nom, scale)
    readings = dc_settings(nom.topo, real, nom.parasitics)
    settings = [(str(m), float(r)) for m, r in enumerate(readings)]
    settings[5] = ("5", float(readings[5]) * 1.2)  # mask 5: a relay that did not switch
    cal = calibrate(nom, None, settings)
    for ref, want in zip(part_refs(nom), (real.base_ohm, *real.chain_ohm)):
        assert cal.fitted_ohm[ref] == pytest.approx(want, rel=1e-4)
    assert [p.ref for p in cal.wrong_parts] == ["R3"]
    assert [s.mask for s in cal.faulty_settings] == [5]
    assert 5 not in {s.mask for s in cal.design.settings}
    # with the real values known, the worst error is the quantisation of the real
    # settings alone (tolerance 0): nominal and worst case agree
    assert cal.design.worst_case_error_pct == pytest.approx(cal.design.nominal_error_pct, rel=1e-9)


def test_round_trip_csv_to_running_board(tmp_path, capsys):
    board_cfg, nom = _nominal()
    refs = part_refs(nom)
    scale = 1.0 + 0.006 * np.sin(np.arange(len(refs)))
    real = _real(nom, scale)
    parts = tmp_path / "parts.csv"
    parts.write_text("ref,ohms\n" + "".join(
        f"{r},{v:.3f}\n" for r, v in zip(refs, (real.base_ohm, *real.chain_ohm))))
    readings = dc_settings(nom.topo, real, nom.parasitics)
    sett = tmp_path / "settings.csv"
    sett.write_text("mask,ohms\n" + "".join(f"{m},{r:.2f}\n" for m, r in enumerate(readings)))
    station = tmp_path / "station.toml"
    shutil.copy(EXAMPLES / "station.toml", station)
    shutil.copy(EXAMPLES / "board-sim.json", tmp_path / "board-sim.json")
    state = tmp_path / "state"
    state.mkdir()
    with SimBoard(board_cfg, state_dir=state) as board:
        assert main(["calibrate", "--config", str(station), "--resistors", str(parts),
                     "--settings", str(sett), "--link", board.url, "--no-model", "--json"]) == 0
        out = json.loads(capsys.readouterr().out)
        assert out["wrong_parts"] == [] and out["faulty_settings"] == []
        assert main(["info", "--link", board.url, "--json"]) == 0
        info = json.loads(capsys.readouterr().out)
    written = json.loads((tmp_path / "board-sim.json").read_text())["ladder"]["table"]
    got = [(row["mask"], row["ohms"]) for row in info["table"]]
    assert got == [(m, pytest.approx(r, abs=0.051)) for m, r in written]
    # the board's table is the measured network, not the nominal one (one decimal)
    order = np.argsort(readings, kind="stable")
    assert [m for m, _ in got] == [int(m) for m in order]
    assert max(abs(r - readings[m]) for m, r in got) < 0.06
    # survives a power cut: a fresh boot from the same state directory holds it
    with SimBoard(board_cfg, state_dir=state) as board:
        assert main(["info", "--link", board.url, "--json"]) == 0
        again = json.loads(capsys.readouterr().out)
    assert again["table"] == info["table"]


def test_bad_csv_names_the_flag(tmp_path, capsys):
    bad = tmp_path / "s.csv"
    bad.write_text("mask,ohms\n3,abc\n")
    rc = main(["calibrate", "--config", str(EXAMPLES / "station.toml"), "--settings", str(bad),
               "--no-model", "--no-load", "--board-config", str(tmp_path / "none.json")])
    assert rc == 2
    assert "--board-config" in capsys.readouterr().err
    shutil.copy(EXAMPLES / "board-sim.json", tmp_path / "b.json")
    rc = main(["calibrate", "--config", str(EXAMPLES / "station.toml"), "--settings", str(bad),
               "--no-model", "--no-load", "--board-config", str(tmp_path / "b.json")])
    assert rc == 2
    err = capsys.readouterr().err
    assert "--settings" in err and "abc" in err and math.isfinite(1.0)
