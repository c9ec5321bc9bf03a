"""rtltcp:// against an in-test server speaking the rtl_tcp protocol, streaming synthetic
8-bit IQ of known tone and noise power; auto-null through the package's stand-in fed by
the virtual receiver.

Sources: the rtl_tcp wire format (rtl_tcp.c of the open-source rtl-sdr project, as
summarised in ../shared/PITFALLS.md: header ``RTL0`` + u32 BE tuner type + u32 BE gain
count, commands ``struct.pack(">BI", cmd, value)`` with 1 = frequency, 2 = sample rate,
3 = gain mode, 4 = gain in tenths of dB, 9 = direct sampling, 5 = ppm); the closed-form
power of a complex tone (A^2) and of white noise in a band (density x bandwidth), with
u8 quantisation noise q^2/12 per component (Widrow's model; common practice).
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest

from nullsteer.cli import main
from nullsteer.errors import MeasurementError
from nullsteer.reception.receivers import open_receiver
from receiver_support import RtlTcpServer

RATE = 240_000.0
TONE_HZ = 20_000.0           # where the signal sits relative to the tuned centre
TONE_DBFS = -20.0
NOISE_SIGMA2 = (2.0 / 127.5) ** 2   # two LSB of noise over the whole band
Q = 1 / 127.5


def synthetic_u8(seconds: float = 1.0, seed: int = 9) -> bytes:
    n = int(RATE * seconds)
    t = np.arange(n) / RATE
    rng = np.random.default_rng(seed)
    x = 10 ** (TONE_DBFS / 20) * np.exp(2j * np.pi * TONE_HZ * t)
    x = x + math.sqrt(NOISE_SIGMA2 / 2) * (rng.standard_normal(n) + 1j * rng.standard_normal(n))
    inter = np.empty(2 * n)
    inter[0::2], inter[1::2] = x.real, x.imag
    return np.clip(np.round(127.5 + 127.5 * inter), 0, 255).astype(np.uint8).tobytes()


@pytest.fixture(scope="module")
def server():
    s = RtlTcpServer(synthetic_u8(), RATE)
    yield s
    s.stop()


QUERY = f"freq_mhz=1.83&rate={RATE:.0f}&gain=20&offset_khz={TONE_HZ / 1e3:g}&duration_s=0.1"


def test_handshake_sends_the_documented_commands(server):
    server.commands.clear()
    with open_receiver(server.url(QUERY + "&ppm=-3")) as rx:
        rx.read()
        assert rx.tuner_type == 5 and rx.gain_steps == 29  # from the 12-byte header
    cmds = dict(server.commands)
    assert cmds[2] == 240_000                      # sample rate
    assert cmds[1] == 1_830_000 - 20_000           # centre = freq - offset, Hz
    assert cmds[9] == 2                            # direct sampling (Q) below 24 MHz
    assert cmds[3] == 1 and cmds[4] == 200         # manual gain, 20.0 dB in tenths
    assert cmds[5] == 2 ** 32 - 3                  # -3 ppm as a two's-complement u32
    server.commands.clear()
    with open_receiver(server.url(f"freq_mhz=100&rate={RATE:.0f}")) as rx:
        rx.read()
    cmds = dict(server.commands)
    assert cmds[9] == 0 and cmds[3] == 0           # tuner range: no direct sampling; AGC


def test_carrier_level_is_the_tone_power(server):
    with open_receiver(server.url(QUERY)) as rx:
        r = rx.read()
    assert r.unit == "dBFS"
    assert r.level_db == pytest.approx(TONE_DBFS, abs=0.2)
    assert 0 < r.spread_db < 0.2


def test_channel_level_adds_tone_and_noise(server):
    b = 24_000.0
    with open_receiver(server.url(QUERY), mode="channel", bandwidth_hz=b) as rx:
        r = rx.read()
    density = (NOISE_SIGMA2 + 2 * Q * Q / 12) / RATE
    expect = 10 * math.log10(10 ** (TONE_DBFS / 10) + density * b)
    assert r.level_db == pytest.approx(expect, abs=3 * r.spread_db + 0.1)
    # the noise alone, in a channel away from the tone
    with open_receiver(server.url(QUERY.replace("offset_khz=20", "offset_khz=-60")),
                       mode="channel", bandwidth_hz=b) as rx:
        r = rx.read()
    assert r.level_db == pytest.approx(10 * math.log10(density * b), abs=3 * r.spread_db + 0.2)


def test_reconnects_after_a_drop_and_refuses_a_wrong_server():
    s = RtlTcpServer(synthetic_u8(0.5), RATE, drop_after_bytes=20_000)
    try:
        with open_receiver(s.url(QUERY)) as rx:
            assert rx.read().level_db == pytest.approx(TONE_DBFS, abs=0.3)
            assert rx.reconnects == 1 and s.connections == 2
    finally:
        s.stop()
    s = RtlTcpServer(b"\x80" * 1000, RATE, magic=b"HTTP")
    try:
        with open_receiver(s.url(QUERY)) as rx, pytest.raises(MeasurementError, match="not an rtl_tcp"):
            rx.read()
    finally:
        s.stop()


@pytest.mark.parametrize("query, key", [
    ("rate=240000", "--freq"),
    ("freq_mhz=1.83&gain=loud", "--receiver gain"),
    ("freq_mhz=1.83&direct=3", "--receiver direct"),
    ("freq_mhz=1.83&rate=240000&offset_khz=200", "--receiver offset_khz"),
    ("freq_mhz=1.83&mode=wide", "--receiver mode"),
])
def test_bad_options_exit_2_naming_them(capsys, query, key):
    assert main(["level", "--receiver", f"rtltcp://127.0.0.1:1?{query}"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and key in err


@pytest.mark.slow
def test_autonull_through_the_iq_standin_fed_by_the_virtual_receiver(tmp_path, capsys):
    from nullsteer.reception.autonull_run import (build_virtual_receiver, solve_station_model,
                                                  table_termination)
    from nullsteer.reception.receivers.standin import IqStandIn, virtual_scene
    from nullsteer.sim import SimBoard
    from nullsteer.station.config import load_station

    root = Path(__file__).resolve().parents[1]
    board_json = root / "examples" / "board-sim.json"
    text = (root / "examples" / "station.toml").read_text()
    station_file = tmp_path / "station.toml"
    station_file.write_text(text.replace('board = "board-sim.json"', f'board = "{board_json}"'))
    st = load_station(station_file)
    table = json.loads(board_json.read_text())["ladder"]["table"]
    rx = build_virtual_receiver(st, solve_station_model(st, [1.83e6]), table_termination(table))
    board = SimBoard(board_json)
    board.start()
    try:
        with IqStandIn(virtual_scene(rx, 1.83e6, board.state, gain_db=50.0)) as standin:
            url = standin.url + "?rate=240000&gain=30&offset_khz=20&duration_s=0.05"
            code = main(["autonull", "--link", board.url, "--config", str(station_file),
                         "--freq", "1.83", "--fed-end", "A", "--receiver", url,
                         "--dwell", "0.05", "--interval", "0.01", "--json"])
            captured = capsys.readouterr()
            assert code == 0, captured.err
            res = json.loads(captured.out)
            assert standin.direct == 2 and standin.centre_hz == 1.81e6
    finally:
        board.stop()
    assert res["unit"] == "dBFS" and res["switchings"] <= 12
    truth = {m: rx.level_dbm(1.83e6, "A", m, False, faded=False) for m, _ in table}
    assert truth[res["best_mask"]] - min(truth.values()) <= 1.0  # exhaustive best
    assert res["significant"] is True and res["null_db"] < -10


@pytest.mark.slow
def test_loopback_iq_receiver_of_the_simulator(capsys):
    # sim://?iq=1: the virtual receiver through synthetic 8-bit IQ and the Welch estimator,
    # no socket; the demo interferer sits on the reversed fed end's main lobe, so the
    # null against it must be deep and significant (same scenario as the stand-in test)
    root = Path(__file__).resolve().parents[1]
    code = main(["autonull", "--link", "sim://", "--config", str(root / "examples" / "station.toml"),
                 "--freq", "1.83", "--fed-end", "A", "--receiver", "sim://?iq=1&gain_db=50",
                 "--dwell", "0.02", "--interval", "0.01", "--json"])
    captured = capsys.readouterr()
    assert code == 0, captured.err
    res = json.loads(captured.out)
    assert res["unit"] == "dBFS" and res["source"] == "sim://?iq=1&gain_db=50"
    assert res["significant"] is True and res["null_db"] < -10
