"""``nullsteer model`` guards: budget, finite JSON, warnings, --termination, soil presets."""

import json
import subprocess
import sys

import pytest

from nullsteer.antenna.specs import parse_antenna, parse_ground
from nullsteer.cli import main
from nullsteer.errors import ConfigError

RUN = "import sys; from nullsteer.cli import main; sys.exit(main(sys.argv[1:]))"


def _strict(text: str) -> dict:
    # RFC 8259 JSON has no NaN or Infinity: refuse them
    def bad(name):
        raise ValueError(f"not JSON: {name}")
    return json.loads(text, parse_constant=bad)


def _model(*argv):
    return subprocess.run([sys.executable, "-c", RUN, "model", *argv], capture_output=True,
                          text=True, timeout=120)


def test_huge_model_is_refused_before_filling():
    # A loop at 1 GHz needs thousands of unknowns and a far-field grid of many GB: one
    # line naming --freq and the limit, exit 2 (usage/config; project convention).
    proc = _model("--length", "8", "--freq", "1000")
    assert proc.returncode == 2
    lines = proc.stderr.strip().splitlines()
    assert len(lines) == 1 and "--freq" in lines[0] and "budget" in lines[0]


def test_air_ground_json_is_finite(capsys):
    assert main(["model", "--length", "8", "--ground", "real", "--sigma", "0", "--eps", "1",
                 "--freq", "1.83", "--json"]) == 0
    rep = _strict(capsys.readouterr().out)
    assert rep["frequencies"][0]["r_opt_ohm"] > 0
    assert isinstance(rep["warnings"], list)


def test_done_when_command_is_passive_and_finite():
    proc = _model("--length", "7.3", "--height", "2.1", "--bottom", "0", "--wire-mm", "1.6",
                  "--ground", "real", "--sigma", "0.005", "--eps", "13",
                  "--freq", "1.0:2.0:0.1", "--json")
    assert proc.returncode == 0, proc.stderr
    rep = _strict(proc.stdout)
    lo, hi = rep["needed_range_ohm"]
    assert lo is not None and hi is not None and 0 < lo <= hi
    assert not any("passive" in w for w in rep["warnings"])
    assert len(rep["frequencies"]) == 11


def test_termination_states(capsys):
    # Shorted, a small loop is a figure-8 with F/B ≈ 0 dB (Balanis §5.2); at its own
    # optimum the terminated loop gives the optimum's F/B (same two-port algebra).
    base = ["model", "--length", "8", "--height", "6", "--bottom", "1.8", "--freq", "1.83",
            "--elevation", "20", "--json"]
    assert main(base) == 0
    opt = _strict(capsys.readouterr().out)
    row = opt["frequencies"][0]
    assert main(base + ["--termination", "short"]) == 0
    short = _strict(capsys.readouterr().out)
    assert short["termination"] == {"kind": "short", "ohm": 0.0}
    assert abs(short["frequencies"][0]["fb_db"]) < 1.0
    assert main(base + ["--termination", "open"]) == 0
    op = _strict(capsys.readouterr().out)
    assert op["termination"]["kind"] == "open" and op["termination"]["ohm"] is None
    assert main(base + ["--termination", f"{row['r_opt_ohm']:.6f}"]) == 0
    at = _strict(capsys.readouterr().out)["frequencies"][0]
    assert at["fb_db"] == pytest.approx(row["fb_db"], abs=0.1)
    assert at["fb_db"] > 20.0 > short["frequencies"][0]["fb_db"]


def test_large_loop_warns_about_single_null():
    # A loop 0.7 λ long cannot put one deep null to the rear (common practice: flags and
    # pennants are kept well under λ/2); F/B at the optimum is ≤ 3 dB.
    proc = _model("--length", "30", "--height", "10", "--bottom", "1", "--freq", "7",
                  "--json")
    assert proc.returncode == 0
    rep = _strict(proc.stdout)
    assert any("too large for a single rear null at 7 MHz" in w for w in rep["warnings"])
    assert "too large for a single rear null" in proc.stderr


@pytest.mark.parametrize("argv,flag", [
    (["--length", "8", "--soil", "wet-ground", "--sigma", "0.01"], "--sigma"),
    (["--length", "8", "--termination", "lots"], "--termination"),
    (["--length", "8", "--termination", "-5"], "--termination"),
])
def test_bad_flags_exit_2(argv, flag):
    proc = _model(*argv)
    assert proc.returncode == 2
    assert flag in proc.stderr and len(proc.stderr.strip().splitlines()) == 1


def test_station_keys():
    g = parse_ground({"kind": "real", "preset": "sea-water"})
    assert g.conductivity_s_per_m > 1.0 and g.permittivity > 50   # ITU-R P.527, from memory
    spec = parse_antenna({"shape": "rectangle", "length_m": 8, "height_m": 6, "bottom_m": 1,
                          "termination": "open"})
    assert spec.termination_ohm == float("inf")
    for table, key in [
        ({"kind": "real", "preset": "swamp"}, "ground.preset"),
        ({"kind": "perfect", "preset": "wet-ground"}, "ground.preset"),
    ]:
        with pytest.raises(ConfigError) as exc:
            parse_ground(table)
        assert exc.value.key == key
    poly = {"shape": "polylines", "polylines": [[[0, 0, 0], [0, 0, 5]]], "closed": [False],
            "end_a_point_m": [0, 0, 0], "end_b_point_m": [0, 0, 5]}
    for extra, key in [({"stake_ohm": 10}, "antenna.stake_ohm"),
                       ({"ground_points_m": [[0, 0, 1]]}, "antenna.ground_points_m[0]"),
                       ({"ground_points_m": [[3, 0, 0]]}, "antenna.ground_points_m[0]")]:
        with pytest.raises(ConfigError) as exc:
            parse_antenna({**poly, **extra})
        assert exc.value.key == key
