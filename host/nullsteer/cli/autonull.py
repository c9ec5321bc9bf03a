"""``nullsteer autonull``: find the deepest null on a real signal by measurement.

``null_db`` in the output is the best level minus the reference reading: with
``--reference reversed`` (default) the same setting with the fed ends swapped, i.e. the
signal on the main lobe (a measured front-to-back on that signal); with ``open`` the
open termination (disconnected); ``none`` skips it (one switching fewer).

Levels come from ``--receiver URL`` (``rigctl://``, ``rtltcp://``, ``iqwav:``, ``sim://``,
or the device's ``receiver`` key) or from ``--source`` (``sim``, ``command``, ``manual``).
After the search, ``--confirm N`` ABBA blocks (best, reference, reference, best) of fresh
readings give the null depth with a 95 % confidence interval, and say plainly when no
setting is distinguishable from the reference.
"""

from __future__ import annotations

import argparse
import math
import sys

from nullsteer.cli.common import (add_board_options, add_json_flag, add_receiver_option, connect,
                                  positive_float, print_json, receiver_url)
from nullsteer.errors import ConfigError


def register(subparsers: argparse._SubParsersAction) -> None:
    p = subparsers.add_parser("autonull", help="find the deepest null by measurement",
                              description=__doc__.splitlines()[0])
    add_board_options(p)
    p.add_argument("--freq", type=positive_float("--freq"), required=True, metavar="MHZ",
                   help="frequency of the signal to null, MHz")
    g = p.add_mutually_exclusive_group()
    g.add_argument("--fed-end", choices=("A", "B", "a", "b"), help="end to feed during the search")
    g.add_argument("--null-bearing", type=float, metavar="DEG",
                   help="compass bearing of the signal to null (picks the fed end)")
    p.add_argument("--source", choices=("sim", "command", "manual"), default=None,
                   help="where levels come from, instead of --receiver (default sim: the "
                        "virtual receiver)")
    add_receiver_option(p)
    p.add_argument("--command", metavar="CMD",
                   help="for --source command: a command printing one level in dB")
    p.add_argument("--command-timeout", type=positive_float("--command-timeout"), default=10.0,
                   metavar="S", help="longest wait for one reading (default 10 s)")
    p.add_argument("--dwell", type=float, default=0.3, metavar="S",
                   help="wait after each switching before reading (default 0.3 s)")
    p.add_argument("--reads", type=int, default=3, metavar="N",
                   help="readings averaged per setting (default 3; manual: 1)")
    p.add_argument("--interval", type=float, default=0.1, metavar="S",
                   help="wait between readings (default 0.1 s)")
    p.add_argument("--reference", choices=("reversed", "open", "none"), default="reversed",
                   help="what null_db is relative to (default reversed)")
    p.add_argument("--max-switchings", type=int, default=12, metavar="N",
                   help="switching budget, reference and final move included (default 12)")
    p.add_argument("--confirm", type=int, default=1, metavar="N",
                   help="ABBA blocks of fresh readings for the significance check, 2 "
                        "switchings each (default 1; 0: none)")
    p.add_argument("--start-ohms", type=positive_float("--start-ohms"), metavar="OHM",
                   help="start here instead of the model's predicted optimum")
    p.add_argument("--save-preset", metavar="NAME",
                   help="record the result as preset NAME for this band in --config")
    add_json_flag(p)
    p.set_defaults(func=run)


def _progress(quiet: bool, budget: int):
    def show(kind: str, probe, level_db) -> None:
        if quiet:
            return
        if kind == "reference":
            sys.stderr.write(f"  reference          {level_db:8.2f} dB\n")
        elif kind.startswith("confirm"):
            what = "best" if kind == "confirm-best" else "reference"
            sys.stderr.write(f"  confirm {what:<10} {level_db:8.2f} dB\n")
        elif kind == "probe":
            sys.stderr.write(f"  {probe.order:2d}/{budget:<2d} mask {probe.mask:4d} {probe.ohms:7.0f} ohm "
                             f"{probe.level_db:8.2f} dB  ({probe.phase})\n")
        else:
            sys.stderr.write(f"  final              {level_db:8.2f} dB\n")
        sys.stderr.flush()
    return show


def run(args: argparse.Namespace) -> int:
    from nullsteer.reception.autonull import Reference
    from nullsteer.reception.autonull_run import (autonull_on_controller, board_state_reader,
                                        build_virtual_receiver, predicted_optimum_ohm,
                                        save_band_preset, solve_station_model,
                                        station_elevations_deg, board_termination)
    from nullsteer.station.bearing import fed_end_for_null
    from nullsteer.station.config import load_station
    from nullsteer.reception.measure import CommandSource, ManualSource, Meter, Source
    from nullsteer.reception.receivers import open_receiver

    freq_hz = args.freq * 1e6
    if args.source and args.receiver:
        raise ConfigError("--receiver", "give either --receiver or --source, not both")
    if args.confirm < 0:
        raise ConfigError("--confirm", f"must be >= 0, got {args.confirm}")
    rx_url = None if args.source else receiver_url(args)
    if rx_url is not None and rx_url.startswith("sim:"):
        rx_url, args.source = (rx_url if "?" in rx_url else None), "sim"
    args.source = args.source or ("receiver" if rx_url else "sim")
    if args.reads < 1:
        raise ConfigError("--reads", f"must be >= 1, got {args.reads}")
    if args.max_switchings < 3:
        raise ConfigError("--max-switchings", f"must be >= 3, got {args.max_switchings}")
    if args.source == "command" and not args.command:
        raise ConfigError("--command", "is required with --source command")
    if args.save_preset and not args.config:
        raise ConfigError("--save-preset", "needs --config (the station file to write)")
    station = load_station(args.config) if args.config else None
    if station is None and (args.source == "sim" or args.start_ohms is None or args.null_bearing is not None):
        raise ConfigError("--config", "a station file is needed for the antenna model "
                                      "(or give --start-ohms and --fed-end with a non-sim source)")
    if args.null_bearing is not None:
        end_a = float(station.section("antenna").get("end_a_bearing_deg", 0.0))  # type: ignore[union-attr]
        end = fed_end_for_null(args.null_bearing, end_a)[0]
        fed_end = str(getattr(end, "value", end))  # a str or a str-valued enum
    else:
        fed_end = str((args.fed_end or "A").upper())
    solution = solve_station_model(station, [freq_hz]) if station is not None else None
    start = args.start_ohms
    if start is None:
        start = predicted_optimum_ohm(solution, fed_end,
                                      station_elevations_deg(station))  # type: ignore[arg-type]
    with connect(args) as ctl:
        table = ctl.table()
        if not math.isfinite(start):
            start = max(r for _, r in table)
        source: Source
        reads = args.reads
        notes: list[str] = []
        if args.source == "sim":
            from nullsteer.board.devices import parse_devices

            boards = [d.board_config for d in parse_devices(station)  # type: ignore[arg-type]
                      if d.board_config is not None and (not args.device or d.id == args.device)]
            rx = build_virtual_receiver(station, solution,  # type: ignore[arg-type]
                                        board_termination(boards[0] if boards else None, table))
            source = open_receiver(rx_url or "sim://", freq_hz=freq_hz, virtual=rx,
                                   board_state=board_state_reader(ctl))
        elif args.source == "receiver":
            source = open_receiver(str(rx_url), freq_hz=freq_hz)
            notes += _tuning_notes(source, freq_hz)
        elif args.source == "command":
            source = CommandSource(args.command, timeout_s=args.command_timeout)
        else:
            source = ManualSource()
            reads = 1 if args.reads == 3 else args.reads
        meter = Meter(source, dwell_s=args.dwell, reads=reads, interval_s=args.interval)
        if not args.json:
            what = getattr(source, "url", args.source)
            sys.stderr.write(f"auto-null at {args.freq:g} MHz, fed end {fed_end}, start "
                             f"{start:.0f} ohm, source {what}\n")
        try:
            result = autonull_on_controller(ctl, meter, freq_hz, fed_end, start,
                                            Reference(args.reference), args.max_switchings,
                                            progress=_progress(args.json, args.max_switchings),
                                            confirm_blocks=args.confirm)
        finally:
            close = getattr(source, "close", None)
            if close is not None:
                close()
    result.notes[:0] = notes
    out = result.to_json()
    out["source"] = getattr(source, "url", args.source)
    out["unit"] = getattr(source, "unit", "dB")
    if args.save_preset:
        out["preset"] = {"name": args.save_preset,
                         "band": save_band_preset(args.config, args.save_preset, fed_end,
                                                  result.best_ohms, freq_hz)}
    if args.json:
        print_json(out)
        return 0
    unit = out["unit"]
    extra = f" (+{result.confirm_switchings} to confirm)" if result.confirm_switchings else ""
    print(f"best: fed end {fed_end}, mask {result.best_mask} ({result.best_ohms:.0f} ohm), "
          f"level {result.best_level_db:.1f} {unit}; {result.switchings} switchings{extra}")
    if result.significance is not None:
        print(f"{result.significance.describe()} (reference: {args.reference})")
    elif result.null_db is not None:
        print(f"null {result.null_db:+.1f} dB vs {args.reference} (not confirmed: --confirm 0)")
    for note in result.notes:
        if result.significance is None or note != result.significance.describe():
            print(f"note: {note}")
    if args.save_preset:
        print(f"saved preset {args.save_preset!r} for {out['preset']['band']} in {args.config}")
    return 0


def _tuning_notes(receiver, freq_hz: float) -> list[str]:  # noqa: ANN001 - a Receiver
    """A note when a rig reports a frequency far from ``--freq`` (it is not retuned)."""
    if getattr(receiver, "name", "") != "rigctl":
        return []
    tuned = receiver.freq_hz()
    if tuned is not None and abs(tuned - freq_hz) > 5e3:
        return [f"the radio is tuned to {tuned / 1e6:.4f} MHz, not {freq_hz / 1e6:g} MHz"]
    return []
