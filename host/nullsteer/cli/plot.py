"""``nullsteer plot KIND`` and ``nullsteer report``: pictures and the HTML report."""

from __future__ import annotations

import argparse
import json

from nullsteer.cli.common import positive_float
from nullsteer.errors import ConfigError


def register(subparsers: argparse._SubParsersAction) -> None:
    from nullsteer.report.plots import KINDS

    p = subparsers.add_parser("plot", help="draw a pattern, F/B or needed-range picture",
                              description="Draw one picture (PNG or SVG by the file suffix).")
    p.add_argument("kind", choices=KINDS, metavar="KIND", help=", ".join(KINDS))
    p.add_argument("--config", required=True, metavar="FILE", help="station file (TOML)")
    p.add_argument("-o", "--output", required=True, metavar="FILE", help="file.png or file.svg")
    p.add_argument("--freq", type=positive_float("--freq"), metavar="MHZ",
                   help="frequency (default the middle of [band])")
    p.add_argument("--elevation", type=float, metavar="DEG", help="elevation for azimuth/F-B")
    p.add_argument("--ohms", type=positive_float("--ohms"), help="termination (default optimum)")
    p.add_argument("--fed-end", choices=("A", "B"), default="A",
                   help="end feeding the receiver (default A)")
    p.add_argument("--autonull", metavar="FILE", help="auto-null JSON output (for KIND path)")
    p.set_defaults(func=run_plot)

    r = subparsers.add_parser("report", help="write an HTML report with the pictures",
                              description="Write one HTML page: pictures, ladder, parts, noise.")
    r.add_argument("--config", required=True, metavar="FILE", help="station file (TOML)")
    r.add_argument("-o", "--output", required=True, metavar="DIR", help="folder to write")
    r.add_argument("--fed-end", choices=("A", "B"), default="A",
                   help="end feeding the receiver (default A)")
    r.add_argument("--autonull", metavar="FILE", help="auto-null JSON output to include")
    r.set_defaults(func=run_report)


def _autonull(path: str | None):
    if path is None:
        return None
    try:
        with open(path, encoding="utf-8") as f:
            data = json.load(f)
    except OSError as exc:
        raise ConfigError("--autonull", f"cannot read {path}: {exc.strerror}") from None
    except ValueError as exc:
        raise ConfigError("--autonull", f"{path} is not JSON: {exc}") from None
    if not isinstance(data, dict) or "path" not in data:
        raise ConfigError("--autonull", f"{path} is not the JSON of 'nullsteer autonull --json'")
    return data


def run_plot(args: argparse.Namespace) -> int:
    from nullsteer.station.config import load_station
    from nullsteer.report.plots import save_figure, station_figure, station_plot_data
    from nullsteer.report.builder import board_ladder

    station = load_station(args.config)
    table = [(int(m), float(o)) for m, o in board_ladder(station).get("table", [])]
    freqs = [args.freq * 1e6] if args.freq else None
    data = station_plot_data(station, args.fed_end, freqs if args.kind != "range" else None, table)
    fig = station_figure(args.kind, data, args.freq * 1e6 if args.freq else None,
                         args.elevation, args.ohms, _autonull(args.autonull))
    print(save_figure(fig, args.output))
    return 0


def run_report(args: argparse.Namespace) -> int:
    from nullsteer.station.config import load_station
    from nullsteer.report.builder import write_report

    page = write_report(load_station(args.config), args.output, args.fed_end,
                        _autonull(args.autonull))
    print(page)
    return 0
