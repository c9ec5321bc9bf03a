"""``follow``: the termination follows the receiver's frequency; the ``receiver`` key.

The order of choice is the one the issue specifies (a preset saved for the band, else
the model's optimum for the fed end; schedule rules pick the preset). Band edges are
those of :data:`nullsteer.station.presets.BAND_EDGES_MHZ` (ITU region plans, common
practice). The end-to-end run uses the real rigctld (dummy rig) and the real firmware
under MicroPython.
"""

from __future__ import annotations

import json
import threading
import tomllib
from pathlib import Path

import pytest

from nullsteer.board.devices import parse_devices
from nullsteer.cli import main
from nullsteer.errors import ConfigError, MeasurementError
from nullsteer.reception.autonull_run import band_of
from nullsteer.reception.follow import Follower, FollowOptions, follow
from nullsteer.station.config import Station
from nullsteer.station.presets import parse_presets
from receiver_support import rigctld  # noqa: F401 - fixture

ROOT = Path(__file__).resolve().parents[1]

PRESETS = """
[antenna]
end_a_bearing_deg = 65.0
[presets]
dx-east = { fed_end = "B", ohms = 1300.0, bands = { "80m" = { ohms = 1111.0 } } }
auto-west = { fed_end = "A", ohms = 1250.0, bands = { "160m" = { ohms = 1222.0 }, "40m" = { open = true } } }
figure8 = { open = true }
"""


def _follower(**kw):
    presets = parse_presets(Station(path=Path("x.toml"), raw=tomllib.loads(PRESETS)))
    return Follower(presets, kw.pop("fed_end", "A"), lambda f, fe: 900.0 + f / 1e4,
                    band_of=band_of, **kw)


@pytest.mark.parametrize("kw, freq_mhz, expect", [
    ({}, 1.83, ("A", 1222.0, False, "preset auto-west, 160m setting")),
    ({}, 7.05, ("A", None, True, "preset auto-west, 40m setting")),
    ({}, 3.6, ("A", 1260.0, False, "model optimum")),          # no A preset for 80 m
    ({"fed_end": "B"}, 3.6, ("B", 1111.0, False, "preset dx-east, 80m setting")),
    ({"preset": "dx-east"}, 1.83, ("B", 1083.0, False, "preset dx-east: no 160m setting, model optimum")),
    ({"preset": "figure8"}, 1.83, ("A", None, True, "preset figure8")),
    ({"rule_preset": lambda: "dx-east"}, 3.6, ("B", 1111.0, False, "rule preset dx-east, 80m setting")),
    ({"rule_preset": lambda: None}, 1.83, ("A", 1222.0, False, "preset auto-west, 160m setting")),
])
def test_decisions_follow_the_documented_order(kw, freq_mhz, expect):
    d = _follower(**kw).decide(freq_mhz * 1e6)
    assert (d.target.fed_end.value, d.target.ohms, d.target.open, d.basis) == expect


class _Rx:
    def __init__(self, freqs):
        self.freqs = list(freqs)

    def freq_hz(self):
        f = self.freqs.pop(0)
        if f == "down":
            raise MeasurementError("rigctld went away")
        return f


def test_one_event_per_change_and_one_per_outage():
    events, applied = [], []

    def apply(target):
        applied.append(target)
        return (target.fed_end.value, target.ohms, target.open), "ok"

    rx = _Rx([1.83e6, 1.8305e6, 1.84e6, "down", "down", 1.84e6, 3.6e6, 3.6e6])
    n = follow(rx, _follower(), apply, events.append, FollowOptions(0, 1000.0, 8), lambda s: None)
    kinds = [e["kind"] for e in events]
    # 1.8305 MHz is within 1 kHz: no retune; 1.84 MHz: same 160 m preset, no change
    assert kinds == ["change", "receiver", "change"] and n == 2
    assert [e["band"] for e in events if e["kind"] == "change"] == ["160m", "80m"]
    assert len(applied) == 2


def test_receiver_key_of_a_device(tmp_path):
    def devices(extra):
        raw = tomllib.loads(f'[[device]]\nid = "d1"\nlink = "sim://"\n{extra}')
        return parse_devices(Station(path=tmp_path / "s.toml", raw=raw))

    assert devices('receiver = "rigctl://127.0.0.1:4532"')[0].receiver == "rigctl://127.0.0.1:4532"
    assert devices("")[0].receiver is None
    with pytest.raises(ConfigError) as exc:
        devices('receiver = "radio"')
    assert exc.value.key == "device[0].receiver"


@pytest.mark.slow
def test_follow_retunes_a_real_board_from_rigctld(rigctld, tmp_path, capsys):  # noqa: F811
    text = (ROOT / "examples" / "station.toml").read_text()
    text = text.replace('board = "board-sim.json"',
                        f'board = "{ROOT / "examples" / "board-sim.json"}"\n'
                        f'receiver = "{rigctld.url}"')
    old = 'dx-east   = { fed_end = "A", ohms = 1300.0 }'
    assert old in text
    text = text.replace(old, 'dx-east   = { fed_end = "A", ohms = 1300.0, '
                             'bands = { "80m" = { ohms = 1000.0 } } }')
    station = tmp_path / "station.toml"
    station.write_text(text)
    assert rigctld.raw("F 1830000") == "RPRT 0"
    retune = threading.Timer(2.0, lambda: rigctld.raw("F 3600000"))
    retune.start()
    try:
        code = main(["follow", "--config", str(station), "--fed-end", "A", "--poll", "0.25",
                     "--polls", "16", "--json"])
    finally:
        retune.cancel()
    captured = capsys.readouterr()
    assert code == 0, captured.err
    events = [json.loads(line) for line in captured.out.splitlines()]
    assert [(e["band"], e["basis"]) for e in events] == [
        ("160m", "model optimum"), ("80m", "preset dx-east, 80m setting")]
    assert events[1]["ohms"] == 1000.0 and "mask" in events[1]["board"]


def test_follow_refuses_a_receiver_without_a_frequency(tmp_path, capsys):
    import wave

    rec = tmp_path / "rec.wav"
    with wave.open(str(rec), "wb") as w:
        w.setnchannels(2)
        w.setsampwidth(2)
        w.setframerate(48000)
        w.writeframes(bytes(4 * 48000))
    assert main(["follow", "--config", str(ROOT / "examples" / "station.toml"),
                 "--receiver", f"iqwav:{rec}"]) == 2
    assert "reports its frequency" in capsys.readouterr().err


@pytest.mark.slow
def test_follow_with_rules_takes_the_preset_in_force(rigctld, capsys):  # noqa: F811
    # the demo file's rules alternate dx-east / dx-west (no per-band settings): which one
    # is in force depends on the hour, either way its fed end and the model decide
    assert rigctld.raw("F 1830000") == "RPRT 0"
    code = main(["follow", "--config", str(ROOT / "examples" / "station.toml"), "--link", "sim://",
                 "--receiver", rigctld.url, "--rules", "--poll", "0.1", "--polls", "3", "--json"])
    captured = capsys.readouterr()
    assert code == 0, captured.err
    (event,) = [json.loads(line) for line in captured.out.splitlines()]
    assert event["basis"] in ("rule preset dx-west: no 160m setting, model optimum",
                              "rule preset dx-east: no 160m setting, model optimum")
    assert event["fed_end"] == ("A" if "dx-east" in event["basis"] else "B")
