"""Auto-null through the real firmware (MicroPython) with the virtual receiver; failures.

Checks: the search ends on a setting within 1 dB of the exhaustive best (the minimum over
every setting of the virtual receiver's unfaded level: an exhaustive search) in <= 12
switchings; a bad measurement command exits 5 and leaves the board in its state from
before the search; an unreachable board exits 3.
"""

from __future__ import annotations

import json
import math
import sys
from pathlib import Path

import numpy as np
import pytest

from nullsteer.cli import main
from nullsteer.station.config import load_station
from nullsteer.reception.noise import external_noise_figure_db
from nullsteer.reception.virtual import Fading, SimScenario, VirtualReceiver

ROOT = Path(__file__).resolve().parents[1]
BOARD = ROOT / "examples" / "board-sim.json"


@pytest.fixture(scope="module")
def board():
    from nullsteer.sim import SimBoard

    b = SimBoard(BOARD)
    b.start()
    yield b
    b.stop()


@pytest.fixture()
def station_file(tmp_path):
    text = (ROOT / "examples" / "station.toml").read_text()
    text = text.replace('board = "board-sim.json"', f'board = "{BOARD}"')
    p = tmp_path / "station.toml"
    p.write_text(text)
    return p


def _run(capsys, *argv):
    code = main(list(argv))
    out = capsys.readouterr()
    return code, out.out, out.err


def test_autonull_through_firmware_matches_exhaustive(board, station_file, capsys):
    from nullsteer.reception.autonull_run import (build_virtual_receiver, solve_station_model,
                                        table_termination)

    code, out, err = _run(capsys, "autonull", "--config", str(station_file), "--link", board.url,
                          "--freq", "1.83", "--null-bearing", "248", "--dwell", "0.02",
                          "--interval", "0.01", "--json", "--save-preset", "auto-west")
    assert code == 0, err
    res = json.loads(out)
    assert res["switchings"] <= 12
    assert board.state() == ("A", res["best_mask"], False)  # the relays really are there
    st = load_station(station_file)
    table = json.loads(BOARD.read_text())["ladder"]["table"]
    rx = build_virtual_receiver(st, solve_station_model(st, [1.83e6]), table_termination(table))
    truth = {m: rx.level_dbm(1.83e6, "A", m, False, faded=False) for m, _ in table}
    assert truth[res["best_mask"]] - min(truth.values()) <= 1.0
    assert res["null_db"] < -10
    # the preset was written for 160 m and the file still loads
    from nullsteer.station.presets import parse_presets, resolve_target

    presets = parse_presets(load_station(station_file))
    assert resolve_target(presets["auto-west"], 1.83e6).ohms == pytest.approx(res["best_ohms"])


def test_bad_command_exits_5_and_restores(board, station_file, capsys):
    from nullsteer.board.controller import Controller, FedEnd
    from nullsteer.board.links import open_link

    with Controller(open_link(board.url)) as ctl:
        ctl.set_state(FedEnd.B, 17, False)
    code, out, err = _run(capsys, "autonull", "--config", str(station_file), "--link", board.url,
                          "--freq", "1.83", "--fed-end", "A", "--dwell", "0",
                          "--source", "command", "--command",
                          f"{sys.executable} -c \"print('S9')\"")
    assert code == 5
    assert "expected one level" in err and "put back" in err
    errors = [ln for ln in err.splitlines() if ln.startswith("nullsteer: error:")]
    assert len(errors) == 1
    assert board.state() == ("B", 17, False)


def test_unreachable_board_exits_3(station_file, capsys):
    code, _, err = _run(capsys, "autonull", "--config", str(station_file),
                        "--link", "serial:///dev/nonexistent-nullsteer", "--freq", "1.83")
    assert code == 3 and "nonexistent" in err


class _Lossless:
    """A lossless antenna (eta = 1, 0 dBi average) that receives nothing directional."""

    def received_power_w(self, *a):
        return np.zeros(0)

    def average_gain_dbi(self, *a):
        return 0.0


def test_receiver_noise_floor_is_p372():
    # ITU-R P.372 eq. 6: Pn = Fa + 10 log10(b) - 204 dBW for a lossless antenna; with a
    # noiseless receiver (F = 1) the reading is exactly that, in dBm (+30)
    rx = VirtualReceiver(_Lossless(), SimScenario(()), lambda m, f: 900.0,
                         bandwidth_hz=2400.0, system_noise_factor=1.0)
    fa = external_noise_figure_db(3.6e6, "rural")
    expected = fa + 10 * math.log10(2400.0) - 204.0 + 30.0
    assert rx.level_dbm(3.6e6, "A", 0, False, faded=False) == pytest.approx(expected, abs=1e-9)


def test_fading_statistics():
    # Gauss-Markov process: stationary std = sigma, lag correlation exp(-dt/tau)
    # (definition of the first-order Gauss-Markov / Ornstein-Uhlenbeck process); the
    # Rician part has unit mean power (Rician fading, K-factor definition)
    f = Fading([3.0] * 400, tau_s=10.0, rician_k_db=60.0, seed=3)
    x0 = f.state_db.copy()
    f.gains(0.0)
    f.gains(5.0)
    x1 = f.state_db.copy()
    assert np.std(x0) == pytest.approx(3.0, rel=0.15)
    assert np.corrcoef(x0, x1)[0, 1] == pytest.approx(math.exp(-0.5), abs=0.08)
    g = Fading([0.0] * 20000, tau_s=10.0, rician_k_db=3.0, seed=4).gains(0.0)
    assert np.mean(g) == pytest.approx(1.0, abs=0.03)
