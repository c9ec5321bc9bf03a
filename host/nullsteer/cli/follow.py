"""``nullsteer follow``: the termination follows the receiver's frequency.

Polls the receiver (``rigctl://``: its ``get_freq``); on a retune applies the preset
saved for that band (``autonull --save-preset`` records the band), else the antenna
model's optimum at that frequency for the fed end. ``--preset NAME`` looks only in that
preset; ``--rules`` takes the preset of the schedule rule in force now (so rules choose
the direction and follow chooses the band's termination; a rule that fires while
following takes effect at the next poll). One log line per change, ``--json`` lines.
"""

from __future__ import annotations

import argparse
import json
import sys
import time

from nullsteer.cli.common import (add_board_options, add_json_flag, add_receiver_option, connect,
                                  positive_float, receiver_url)
from nullsteer.errors import ConfigError


def register(subparsers: argparse._SubParsersAction) -> None:
    p = subparsers.add_parser("follow", help="retune the termination as the receiver retunes",
                              description=__doc__.splitlines()[0])
    add_board_options(p)
    add_receiver_option(p)
    g = p.add_mutually_exclusive_group()
    g.add_argument("--fed-end", choices=("A", "B", "a", "b"),
                   help="fed end when no preset gives one (default A)")
    g.add_argument("--null-bearing", type=float, metavar="DEG",
                   help="compass bearing to null (picks the fed end)")
    p.add_argument("--preset", metavar="NAME", help="take band settings from this preset only")
    p.add_argument("--rules", action="store_true",
                   help="take the preset of the schedule rule in force now")
    p.add_argument("--poll", type=positive_float("--poll"), default=1.0, metavar="S",
                   help="seconds between frequency polls (default 1)")
    p.add_argument("--min-step-khz", type=positive_float("--min-step-khz"), default=1.0,
                   metavar="KHZ", help="smallest move counted as a retune (default 1 kHz)")
    p.add_argument("--polls", type=int, metavar="N", help="stop after N polls (default: run on)")
    add_json_flag(p)
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    import datetime as dt

    from nullsteer.antenna.station import solve_station_model, station_elevations_deg
    from nullsteer.board.controller import FedEnd
    from nullsteer.reception.autonull_run import band_of, predicted_optimum_ohm
    from nullsteer.reception.follow import Follower, FollowOptions, follow
    from nullsteer.reception.receivers import open_receiver
    from nullsteer.schedule.rules import in_force
    from nullsteer.schedule.service import target_fields
    from nullsteer.station.bearing import fed_end_for_null
    from nullsteer.station.config import load_station
    from nullsteer.station.presets import parse_presets

    if not args.config:
        raise ConfigError("--config", "follow needs the station file (presets, antenna model)")
    if args.polls is not None and args.polls < 1:
        raise ConfigError("--polls", f"must be >= 1, got {args.polls}")
    station = load_station(args.config)
    presets = parse_presets(station)
    if args.preset is not None and args.preset not in presets:
        raise ConfigError("--preset", f"no preset {args.preset!r} in {args.config}")
    if args.preset is not None and args.rules:
        raise ConfigError("--rules", "give either --preset or --rules")
    if args.null_bearing is not None:
        end_a = float(station.section("antenna").get("end_a_bearing_deg", 0.0))
        fed_end = str(fed_end_for_null(args.null_bearing, end_a)[0].value)
    else:
        fed_end = str((args.fed_end or "A").upper())
    url = receiver_url(args)
    if not url:
        raise ConfigError("--receiver", "no receiver given: use --receiver URL or a device's "
                                        "receiver key")
    elevations = station_elevations_deg(station)
    optima: dict[tuple[float, str], float] = {}

    def model_optimum(freq_hz: float, fe: str) -> float:
        key = (round(freq_hz, -3), fe)
        if key not in optima:
            optima[key] = predicted_optimum_ohm(solve_station_model(station, [key[0]]), fe,
                                                elevations)
        return optima[key]

    rule_preset = None
    if args.rules:
        def rule_preset() -> str | None:
            action = in_force(station, dt.datetime.now(dt.timezone.utc), args.device)
            return None if action is None else action.preset

    follower = Follower(presets, fed_end, model_optimum, preset=args.preset,
                        rule_preset=rule_preset, band_of=band_of)
    rx = open_receiver(url)
    if rx.name != "rigctl":
        rx.close()
        raise ConfigError("--receiver", f"follow needs a receiver that reports its frequency "
                                        f"(rigctl://), not {url.split(':', 1)[0]}:")

    def emit(event: dict) -> None:
        if args.json:
            sys.stdout.write(json.dumps(event) + "\n")
        elif event["kind"] == "change":
            state = "open" if event["open"] else f"{event['ohms']:.0f} ohm"
            sys.stdout.write(f"{event['time']} {event['freq_mhz']:.4f} MHz"
                             f"{' (' + event['band'] + ')' if event['band'] else ''}: "
                             f"fed {event['fed_end']}, {state} ({event['basis']}) -> "
                             f"{event['board']}\n")
        else:
            sys.stdout.write(f"{event['time']} receiver: {event['error']} (polling on)\n")
        sys.stdout.flush()

    try:
        with connect(args) as ctl:
            def apply(target) -> tuple:  # noqa: ANN001 - a Target
                status = ctl.status()
                fe, mask, open_, note = target_fields(target, status, ctl.table())
                ctl.set_state(FedEnd(fe.value), mask, open_)
                return (fe.value, mask, open_), note

            if not args.json:
                sys.stderr.write(f"following {rx.url} (poll {args.poll:g} s)\n")
            follow(rx, follower, apply, emit,
                   FollowOptions(args.poll, args.min_step_khz * 1e3, args.polls), time.sleep)
    finally:
        rx.close()
    return 0
