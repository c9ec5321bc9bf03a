"""Pictures: compass orientation of polar plots, files written, clear errors.

Compass convention (common practice for bearings): north up, bearings clockwise; checked
by where matplotlib places a 90 deg (east) point on the rendered axes.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from nullsteer.cli import main
from nullsteer.errors import ConfigError

pytest.importorskip("matplotlib")

from nullsteer.report.plots import azimuth_figure, path_figure, save_figure  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]


def test_polar_plot_is_north_up_clockwise(tmp_path):
    az = np.arange(0.0, 360.0, 1.0)
    fig = azimuth_figure(az, {"A": np.cos(np.radians(az)) * 10 - 30}, 20.0, 1.83e6, 245.0)
    ax = fig.axes[0]
    to_px = ax.transData.transform
    centre = to_px((0.0, 0.0))
    east = to_px((np.radians(90.0), 10.0)) - centre
    north = to_px((np.radians(0.0), 10.0)) - centre
    assert east[0] > 0 and abs(east[1]) < 1e-6 * abs(east[0]) + 1e-6  # 90 deg is to the right
    assert north[1] > 0 and abs(north[0]) < 1e-6 * abs(north[1]) + 1e-6  # 0 deg is up
    assert ax.get_legend() is not None
    out = save_figure(fig, tmp_path / "az.svg")
    assert out.read_text().lstrip().startswith("<?xml")


def test_path_figure_labels(tmp_path):
    path = [{"order": i + 1, "ohms": r, "level_db": l}
            for i, (r, l) in enumerate([(1000, -90), (1300, -95), (1200, -97)])]
    fig = path_figure(path, 1.83e6, reference_db=-70.0)
    ax = fig.axes[0]
    assert "Ω" in ax.get_xlabel() and "dB" in ax.get_ylabel()
    save_figure(fig, tmp_path / "p.png")
    assert (tmp_path / "p.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature (PNG spec §5.2)
    with pytest.raises(ConfigError):
        save_figure(fig, tmp_path / "p.pdf")


def _station(tmp_path):
    board = ROOT / "examples" / "board-sim.json"
    text = (ROOT / "examples" / "station.toml").read_text()
    p = tmp_path / "station.toml"
    p.write_text(text.replace('board = "board-sim.json"', f'board = "{board}"'))
    return p


def test_plot_and_report_commands(tmp_path, capsys):
    st = _station(tmp_path)
    assert main(["plot", "fb", "--config", str(st), "-o", str(tmp_path / "fb.png"),
                 "--freq", "1.83"]) == 0
    assert (tmp_path / "fb.png").stat().st_size > 10_000
    an = {"freq_mhz": 1.83, "fed_end": "A", "best_mask": 1, "best_ohms": 1200.0,
          "null_db": -20.0, "reference": "reversed", "reference_level_db": -70.0,
          "switchings": 9, "path": [{"order": 1, "ohms": 1200.0, "level_db": -90.0}]}
    (tmp_path / "an.json").write_text(json.dumps(an))
    assert main(["report", "--config", str(st), "-o", str(tmp_path / "rep"),
                 "--autonull", str(tmp_path / "an.json")]) == 0
    page = (tmp_path / "rep" / "index.html").read_text()
    for part in ("azimuth.svg", "path.svg", "Parts list", "P.372", "wire-wound"):
        assert part in page
    assert main(["plot", "path", "--config", str(st), "-o", str(tmp_path / "x.png")]) == 2
    assert "auto-null result" in capsys.readouterr().err
