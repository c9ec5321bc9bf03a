"""``nullsteer set --preset NAME`` and the preset in force shown by ``status``/``info``.

Expected states come from the station file's presets and "nearest setting by ratio" as
the board protocol defines it (smallest |ln(R/R_k)|, firmware/PROTOCOL.md), computed here
independently with ``math``; band edges of 160 m are the region-2 plan, 1.8-2.0 MHz
(common practice).
"""

from __future__ import annotations

import json
import math

from nullsteer.cli import main
from web_support import board_table, station_file


def nearest(ohms: float) -> int:
    return min(board_table(), key=lambda row: abs(math.log(ohms / row[1])))[0]


def run(capsys, *args: str) -> tuple[int, str, str]:
    code = main(list(args))
    out, err = capsys.readouterr()
    return code, out, err


def test_set_preset_then_status_and_info_name_it(tmp_path, capsys):
    station = str(station_file(tmp_path))
    code, out, _ = run(capsys, "set", "--config", station, "--preset", "dx-west", "--json")
    doc = json.loads(out)
    assert code == 0 and (doc["fed_end"], doc["mask"], doc["open"]) == ("B", nearest(1300.0), False)
    assert doc["presets"] == ["dx-west"]
    code, out, _ = run(capsys, "status", "--config", station)
    assert code == 0 and "preset dx-west" in out and "null toward 65 deg" in out
    code, out, _ = run(capsys, "info", "--config", station)
    assert code == 0 and "preset in force: dx-west" in out
    code, out, _ = run(capsys, "flip", "--config", station, "--json")
    assert json.loads(out)["presets"] == ["dx-east"]  # dx-east = { fed_end = "A", ohms = 1300.0 }
    code, out, _ = run(capsys, "set", "--config", station, "--preset", "no-null", "--json")
    assert json.loads(out)["open"] is True and json.loads(out)["presets"] == ["no-null"]


def test_band_preset_takes_its_band_setting(tmp_path, capsys):
    station = station_file(tmp_path)
    station.write_text(station.read_text() + '\n[presets.night]\nfed_end = "A"\nohms = 1100.0\n'
                       'bands = { "160m" = { ohms = 1700.0 } }\n')
    code, out, _ = run(capsys, "set", "--config", str(station), "--preset", "night",
                       "--freq", "1.83", "--json")
    assert code == 0 and json.loads(out)["mask"] == nearest(1700.0)  # 1.83 MHz is in 160 m
    code, out, _ = run(capsys, "set", "--config", str(station), "--preset", "night",
                       "--freq", "3.6", "--json")
    assert code == 0 and json.loads(out)["mask"] == nearest(1100.0)  # no 80 m override
    assert json.loads(out)["presets"] == ["night"]


def test_bad_preset_requests_exit_2_and_move_nothing(tmp_path, capsys):
    station = str(station_file(tmp_path))
    _, before, _ = run(capsys, "status", "--config", station, "--json")
    for args, word in ((["--preset", "nope"], "no preset 'nope'"),
                       (["--preset", "dx-west", "--ohms", "900"], "--preset"),
                       (["--freq", "1.83", "--fed-end", "A"], "--freq")):
        code, out, err = run(capsys, "set", "--config", station, *args)
        assert code == 2 and word in err and err.count("\n") == 1
    _, after, _ = run(capsys, "status", "--config", station, "--json")
    keep = ("fed_end", "mask", "open")
    assert {k: json.loads(after)[k] for k in keep} == {k: json.loads(before)[k] for k in keep}
