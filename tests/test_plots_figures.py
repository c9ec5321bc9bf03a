"""Pictures: compass orientation of polar plots, files written, clear errors.

Compass convention (common practice for bearings): north up, bearings clockwise; checked
by where matplotlib places a 90 deg (east) point on the rendered axes.
"""

from __future__ import annotations

import json
from html.parser import HTMLParser
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
    for part in ("azimuth.svg", "path.svg", "Parts (power rating", "P.372", "wire-wound",
                 "Geometry", "Model", "Coming schedule"):
        assert part in page
    assert main(["plot", "path", "--config", str(st), "-o", str(tmp_path / "x.png")]) == 2
    assert "auto-null result" in capsys.readouterr().err


class _Tables(HTMLParser):
    """Every <table> of a page as {first header: rows of cell texts} (stdlib parser)."""

    def __init__(self):
        super().__init__()
        self.tables, self._row, self._cell = [], None, None

    def handle_starttag(self, tag, attrs):
        if tag == "table":
            self.tables.append([])
        elif tag == "tr":
            self._row = []
        elif tag in ("td", "th"):
            self._cell = ""

    def handle_endtag(self, tag):
        if tag in ("td", "th") and self._row is not None:
            self._row.append(self._cell.strip())
            self._cell = None
        elif tag == "tr" and self._row is not None:
            self.tables[-1].append(self._row)
            self._row = None

    def handle_data(self, data):
        if self._cell is not None:
            self._cell += data


def _page_tables(path):
    parser = _Tables()
    parser.feed(path.read_text(encoding="utf-8"))
    return {t[0][0] + "|" + t[0][1]: t for t in parser.tables}


def test_report_tables_agree_with_the_board_file_and_with_physics(tmp_path):
    import datetime as dt

    from nullsteer.report.builder import write_report
    from nullsteer.station.config import load_station

    st = _station(tmp_path)
    start = dt.datetime(2026, 12, 2, 12, 0, tzinfo=dt.timezone.utc)
    page = write_report(load_station(st), tmp_path / "rep", now=start)
    tables = _page_tables(page)
    board = json.loads((ROOT / "examples" / "board-sim.json").read_text())["ladder"]
    # settings: ascending, spanning the board file's table, "step to next" = the next
    # setting's ratio (the CLI's meaning), recomputed here by hand from the ohms column
    rows = tables["mask|hex"][1:]
    ohms = [float(r[2]) for r in rows]
    assert ohms == sorted(ohms) and len(rows) == len(board["table"])
    assert ohms[0] == pytest.approx(min(r for _, r in board["table"]), abs=0.05)
    assert ohms[-1] == pytest.approx(max(r for _, r in board["table"]), abs=0.05)
    for (a, b), row in zip(zip(ohms, ohms[1:]), rows):
        assert float(row[3]) == pytest.approx((b / a - 1) * 100, abs=0.02)
    assert rows[-1][3] == ""
    # parts: the base first (as `nullsteer ladder` lists them), then the board file's
    # resistors in bit order
    parts = tables["part|value"][1:]
    assert parts[0][0] == "R0" and parts[0][4] == "base"
    assert [p[0] for p in parts[1:]] == [f"R{i + 1}" for i in range(len(board["resistors_ohm"]))]
    # geometry as written in the station file
    geo = dict(tuple(r) for r in tables["key|value"][1:])
    assert geo["antenna.length_m"] == "8.5" and geo["ground.kind"] == '"real"'
    # model: a passive receive chain cannot give the receiver more than the loop's own
    # gain (transducer gain <= 1: power conservation), and every row has an optimum
    model = tables["MHz|R_opt Ω"][1:]
    assert len(model) == 5
    for r in model:
        assert float(r[6]) <= float(r[5]) and float(r[1]) > 0
    # schedule: two days of actions from the given start, in time order
    when = [r[0].split(" ", 1)[1] for r in tables["when|preset"][1:]]  # drop the weekday
    assert when and when == sorted(when)
