"""Station keys and the ``nullsteer model`` command: parsing, errors, JSON shape."""

import json
import subprocess
import sys
from pathlib import Path

import pytest

from nullsteer.antenna.specs import (parse_antenna, parse_band, parse_elevations_deg,
                                     parse_feed, parse_ground)
from nullsteer.antenna.ports import LoopModel
from nullsteer.cli import main
from nullsteer.station.config import load_station
from nullsteer.errors import ConfigError

EXAMPLE = Path(__file__).resolve().parents[1] / "examples" / "station.toml"


def test_example_station_parses():
    st = load_station(EXAMPLE)
    ant = parse_antenna(st.section("antenna"))
    band = parse_band(st.section("band"))
    assert ant.end_a_bearing_deg == 65.0
    assert band.elevation_span_deg == (10.0, 60.0)
    assert parse_feed(st.section("feed")).coax is not None
    assert parse_ground(st.section("ground")).permittivity == 13.0


@pytest.mark.parametrize("table,key", [
    ({"shape": "rectangle", "length_m": 8, "height_m": 6, "bottom_m": 7}, "antenna.bottom_m"),
    ({"shape": "rectangle", "length_m": 8, "height_m": 6, "bottom_m": 1, "hieght_m": 3},
     "antenna.hieght_m"),
    ({"shape": "triangle", "length_m": 8, "base_height_m": 2, "apex_height_m": 9,
      "end_a_corner": "apex", "end_b_corner": "apex"}, "antenna.end_b_corner"),
    ({"shape": "polylines", "polylines": [[[0, 0, 1], [1, 0, 1]]], "closed": [True],
      "end_a_point_m": [0, 0, 1], "end_b_point_m": [1, 0, 1]}, "antenna.polylines[0]"),
    ({"shape": "blob"}, "antenna.shape"),
])
def test_bad_antenna_keys(table, key):
    with pytest.raises(ConfigError) as exc:
        parse_antenna(table)
    assert exc.value.key == key


def test_polyline_port_must_be_a_vertex():
    spec = parse_antenna({"shape": "polylines",
                          "polylines": [[[0, 0, 1], [4, 0, 1], [4, 0, 3], [0, 0, 3]]],
                          "end_a_point_m": [4, 0, 2.2], "end_b_point_m": [0, 0, 1]})
    with pytest.raises(ConfigError) as exc:
        LoopModel(spec, parse_ground({"kind": "perfect"})).solve([3.6e6])
    assert exc.value.key == "antenna.end_a_point_m"


def test_triangle_pennant_null_direction():
    # Common practice: the terminated pennant nulls toward its terminated corner.
    spec = parse_antenna({"shape": "triangle", "length_m": 8.0, "base_height_m": 6.0,
                          "apex_height_m": 1.5, "apex_offset_m": 4.0, "end_a_corner": "apex",
                          "end_b_corner": "base_b", "end_a_bearing_deg": 0.0})
    sol = LoopModel(spec, parse_ground({"kind": "real"})).solve([1.83e6])
    r = sol.optimum_termination_ohm("A", 20.0)
    assert 200 < r[0] < 3000
    assert sol.fb_db(r, "A", 20.0)[0] > 20.0


def test_elevations():
    assert parse_elevations_deg([10, 20], "k") == (10.0, 15.0, 20.0)
    assert parse_elevations_deg("10:30:10", "k") == (10.0, 20.0, 30.0)
    with pytest.raises(ConfigError):
        parse_elevations_deg(0, "k")


def test_cli_json(capsys):
    code = main(["model", "--length", "8.84", "--height", "6.1", "--bottom", "1.83",
                 "--wire-mm", "1.63", "--freq", "1.8:2.0:0.1", "--elevation", "20", "--json"])
    assert code == 0
    rep = json.loads(capsys.readouterr().out)
    assert len(rep["frequencies"]) == 3
    row = rep["frequencies"][0]
    for key in ("freq_mhz", "r_opt_ohm", "fb_db", "feed_impedance_ohm", "rdf_db"):
        assert key in row
    lo, hi = rep["needed_range_ohm"]
    assert lo <= row["r_opt_ohm"] <= hi
    assert row["fb_db"] > 30


def test_cli_config_table(capsys):
    assert main(["model", "--config", str(EXAMPLE)]) == 0
    out = capsys.readouterr().out
    assert "needed termination range" in out


@pytest.mark.parametrize("argv,flag", [
    (["--length", "-3"], "--length"),
    (["--length", "8", "--freq", "abc"], "--freq"),
    (["--length", "8", "--elevation", "95"], "--elevation"),
    (["--length", "8", "--ground", "real", "--sigma", "-1"], "--sigma"),
    (["--config", str(EXAMPLE), "--length", "8"], "--length"),
])
def test_cli_bad_values_exit_2(argv, flag):
    code = "import sys; from nullsteer.cli import main; sys.exit(main(sys.argv[1:]))"
    proc = subprocess.run([sys.executable, "-c", code, "model", *argv],
                          capture_output=True, text=True)
    assert proc.returncode == 2
    assert flag in proc.stderr and len(proc.stderr.strip().splitlines()) == 1
