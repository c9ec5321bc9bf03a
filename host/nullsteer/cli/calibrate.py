"""``nullsteer calibrate``: rebuild the ladder table from measured resistor values.

``nullsteer calibrate --config station.toml --resistors parts.csv --settings readings.csv``
fits the parts of the device's ladder (its board config) to the readings, flags a part
that is probably the wrong value and a setting that points to a wiring or relay fault,
rebuilds the table, re-predicts the null loss with the antenna model, writes the board
config and loads the new table into the running board (``--no-load``: files only).
"""

from __future__ import annotations

import argparse
import json
import math
from typing import Any

from nullsteer.cli.common import add_board_options, add_json_flag, connect, print_json
from nullsteer.errors import ConfigError
from nullsteer.ladder import design_from_board_block, evaluate, parse_ladder, write_board_ladder
from nullsteer.ladder.calibrate import calibrate, read_csv
from nullsteer.ladder.eseries import get_series
from nullsteer.station.config import load_station


def register(subparsers: Any) -> None:
    p = subparsers.add_parser("calibrate", help="rebuild the ladder table from measured values",
                              description=__doc__.splitlines()[0])
    add_board_options(p)
    p.add_argument("--resistors", metavar="FILE", help="CSV ref,ohms: each part as measured")
    p.add_argument("--settings", metavar="FILE", help="CSV mask,ohms: the bench test's readings")
    p.add_argument("--board-config", metavar="FILE",
                   help="board config to read the ladder from and write the table to "
                        "(default: the device's board file)")
    p.add_argument("--no-load", action="store_true", help="do not load the table into the board")
    p.add_argument("--no-model", action="store_true", help="do not re-predict the null loss")
    add_json_flag(p)
    p.set_defaults(func=run)


def _board_file(args: argparse.Namespace, station: Any) -> str:
    if args.board_config:
        return str(args.board_config)
    from nullsteer.board.devices import parse_devices, pick_device
    dev = pick_device(parse_devices(station), args.device)
    if dev.board_config is None:
        raise ConfigError("--board-config", f"device {dev.id!r} names no board file; give one")
    return str(dev.board_config)


def run(args: argparse.Namespace) -> int:
    if not args.config:
        raise ConfigError("--config", "give the station file")
    if not (args.resistors or args.settings):
        raise ConfigError("--resistors/--settings", "give at least one file of measurements")
    station = load_station(args.config)
    spec = parse_ladder(station.section("ladder"))
    board_path = _board_file(args, station)
    try:
        with open(board_path, encoding="utf-8") as f:
            board = json.load(f)
    except (OSError, ValueError) as exc:
        raise ConfigError("--board-config", f"cannot read {board_path}: {exc}") from None
    if not isinstance(board, dict) or not isinstance(board.get("ladder"), dict):
        raise ConfigError("--board-config", f"{board_path} has no ladder block")
    series = get_series(spec.series, "ladder.series")
    tol = series.tolerance_pct if spec.tolerance_pct is None else spec.tolerance_pct
    built = design_from_board_block(board["ladder"], spec.parasitics, series.name, tol)
    solution = elevations = None
    lo, hi = built.r_min_ohm, built.r_max_ohm
    if spec.range_ohm is not None:
        lo, hi = spec.range_ohm
    if not args.no_model:
        from nullsteer.ladder.station import solve_station
        solution, needed, elevations = solve_station(station)
        if spec.range_ohm is None and math.isfinite(needed.hi_ohm):
            lo, hi = float(needed.lo_ohm), float(needed.hi_ohm)
    if spec.remote is not None:
        lo, hi = lo / spec.remote.transformer_ratio, hi / spec.remote.transformer_ratio
    nominal = evaluate(built.topo, built.values, lo, hi, tol, spec.parasitics, series.name)
    cal = calibrate(nominal, read_csv(args.resistors, "ref", "--resistors") if args.resistors else None,
                    read_csv(args.settings, "mask", "--settings") if args.settings else None)
    out: dict = cal.to_json()
    if solution is not None:
        from nullsteer.ladder.nullloss import predicted_null_loss
        for name, d in (("null_loss_nominal", nominal), ("null_loss", cal.design)):
            out[name] = predicted_null_loss(d, solution, elevations, remote=spec.remote,
                                            ceiling_db=spec.null_depth_ceiling_db).to_json()
    write_board_ladder(cal.design, board_path)
    out["board_config"] = board_path
    rows = [(s.mask, s.ohms) for s in cal.design.settings]
    if not args.no_load:
        with connect(args) as ctl:
            ctl.load_table(rows)
            out["board_table_rows"] = ctl.info(refresh=True).table_entries
    if args.json:
        print_json(out)
    else:
        print(_human(cal, out))
    return 0


def _human(cal: Any, out: dict) -> str:
    lines = ["Fitted parts (ohms): " + ", ".join(f"{r} {v:.2f}" for r, v in cal.fitted_ohm.items())]
    for p in cal.wrong_parts:
        lines.append(f"  {p.ref}: {p.fitted_ohm:.1f} ohm is {p.off_pct:+.1f} % off its nominal "
                     f"{p.nominal_ohm:g}: probably the wrong value fitted")
    for s in cal.faulty_settings:
        lines.append(f"  mask {s.mask}: reads {s.measured_ohm:.1f} ohm, the parts give "
                     f"{s.predicted_ohm:.1f}: a wiring or relay fault (left out of the table)")
    lines.append(f"worst error with the measured values {out['worst_case_error_pct']:.2f} % "
                 f"(nominal build with tolerance: {out['nominal_design_worst_case_pct']:.2f} %)")
    if "null_loss" in out:
        lines.append(f"predicted null loss {out['null_loss']['worst_db']:.2f} dB "
                     f"(nominal build: {out['null_loss_nominal']['worst_db']:.2f} dB)")
    lines.append(f"table of {out['table_rows']} settings written to {out['board_config']}")
    if "board_table_rows" in out:
        lines.append(f"loaded into the board: it now holds {out['board_table_rows']} settings")
    return "\n".join(lines)
