"""Board commands: ``status``, ``info``, ``set``, ``flip``, ``selftest`` and ``sim``."""

from __future__ import annotations

import argparse
import signal
import sys
import threading

from nullsteer.board import commands
from nullsteer.board.commands import Wish
from nullsteer.station.bearing import null_bearing_deg
from nullsteer.cli.common import add_board_options, add_json_flag, connect, positive_float, print_json
from nullsteer.station.config import get_float, load_station
from nullsteer.station.presets import Preset, parse_presets
from nullsteer.board.controller import BoardStatus, Controller, FedEnd
from nullsteer.errors import ConfigError


def _mask(text: str) -> int:
    try:
        value = int(text, 0)
    except ValueError:
        raise argparse.ArgumentTypeError(f"--mask must be a whole number (e.g. 45 or 0x2d), got {text!r}") from None
    if value < 0:
        raise argparse.ArgumentTypeError(f"--mask must be >= 0, got {text!r}")
    return value


def _fed_end(text: str) -> FedEnd:
    if text.upper() not in ("A", "B"):
        raise argparse.ArgumentTypeError(f"--fed-end must be A or B, got {text!r}")
    return FedEnd(text.upper())


def _bearing(text: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"--null-bearing must be degrees, got {text!r}") from None
    if not 0.0 <= value <= 360.0:
        raise argparse.ArgumentTypeError(f"--null-bearing must be 0..360 degrees, got {text!r}")
    return value


def end_a_bearing(config_path: str | None, flag: str) -> float:
    """``[antenna].end_a_bearing_deg`` of the station file (needed to turn bearings into ends)."""
    if not config_path:
        raise ConfigError(flag, "needs --config (the loop's end_a_bearing_deg)")
    station = load_station(config_path)
    return get_float(station.section("antenna", required=True), "end_a_bearing_deg", "antenna",
                     minimum=0.0, maximum=360.0)


def describe(status: BoardStatus, end_a_deg: float | None = None,
             presets: list[str] | None = None) -> str:
    """One human line for a board state (with the presets it matches, when known)."""
    s = status.state
    term = "open (no termination)" if s.open else "shorted (closed loop: figure-8)" if s.short else (
        f"{s.ohms:.1f} ohm (mask {s.mask})" if s.ohms is not None else f"mask {s.mask}")
    text = f"fed end {s.fed_end.value}, termination {term}"
    if end_a_deg is not None and not (s.open or s.short):
        text += f", null toward {null_bearing_deg(s.fed_end.value, end_a_deg):.0f} deg"
    if presets is not None:
        text += f"; preset {' / '.join(presets)}" if presets else "; no preset"
    if status.changed is not None:
        text += "" if status.changed else " (already so: no relay moved)"
    return text


def _station_presets(args: argparse.Namespace) -> dict[str, Preset]:
    """The station file's presets (empty without --config)."""
    if not getattr(args, "config", None):
        return {}
    return parse_presets(load_station(args.config))


def _presets_now(ctl: Controller, args: argparse.Namespace, state) -> list[str] | None:
    """Presets the board is in now; None without a station file to say."""
    presets = _station_presets(args)
    if not presets:
        return None
    return commands.presets_now(ctl, presets, state)


def _print_status(args: argparse.Namespace, status: BoardStatus, extra: dict | None = None,
                  notes: list[str] | None = None, presets: list[str] | None = None) -> None:
    end_a = None
    if getattr(args, "config", None):
        try:
            end_a = end_a_bearing(args.config, "--config")
        except ConfigError:
            end_a = None
    for warning in (extra or {}).get("warnings", []):
        sys.stderr.write(f"nullsteer: warning: {warning}\n")
    if args.json:
        out = status.to_json()
        if end_a is not None and not status.state.open:
            out["null_bearing_deg"] = null_bearing_deg(status.state.fed_end.value, end_a)
        if presets is not None:
            out["presets"] = presets
        out.update(extra or {})
        if notes:
            out["note"] = "\n".join(notes)
        print_json(out)
    else:
        for line in notes or []:
            print(line)
        print(describe(status, end_a, presets))


def run_status(args: argparse.Namespace) -> int:
    with connect(args) as ctl:
        status = ctl.status()
        presets = _presets_now(ctl, args, status.state)
    _print_status(args, status, presets=presets)
    return 0


def run_info(args: argparse.Namespace) -> int:
    with connect(args) as ctl:
        info = ctl.info()
        table = ctl.table() if info.table_entries else []
        warning = ctl.firmware_mismatch()
        presets = _presets_now(ctl, args, ctl.status().state) if args.config else None
    if warning:
        sys.stderr.write(f"nullsteer: warning: {warning}\n")
    if args.json:
        out = info.to_json()
        out["firmware_warning"] = warning
        out["table"] = [{"mask": m, "ohms": r} for m, r in table]
        if presets is not None:
            out["presets"] = presets
        print_json(out)
    else:
        print(f"board {info.board}, firmware {info.firmware}, protocol {info.protocol}")
        print(f"{info.bits} ladder relays; roles: {', '.join(info.roles)}")
        if table:
            print(f"ladder table: {len(table)} settings, {table[0][1]:.1f} .. {table[-1][1]:.1f} ohm")
        else:
            print("no ladder table loaded (settings by mask only)")
        if presets is not None:
            print(f"preset in force: {' / '.join(presets) if presets else 'none'}")
    return 0


def run_set(args: argparse.Namespace) -> int:
    short = True if getattr(args, "short", False) else None
    wish = Wish(fed_end=args.fed_end, null_bearing_deg=args.null_bearing, mask=args.mask,
                ohms=args.ohms, open=args.open, short=short)
    if args.preset is not None:
        if not wish.is_empty():
            raise ConfigError("--preset", "a preset is a whole state: give it alone "
                                          "(with --freq for its band)")
        if not args.config:
            raise ConfigError("--preset", "needs --config (the station file's [presets])")
        preset = commands.find_preset(_station_presets(args), args.preset)
    elif args.freq is not None:
        raise ConfigError("--freq", "is used with --preset only")
    elif wish.is_empty():
        raise ConfigError("set", "say what to set: --preset, --fed-end/--null-bearing "
                                 "and/or --mask/--ohms/--open")
    end_a = (end_a_bearing(args.config, "--null-bearing")
             if args.null_bearing is not None else None)
    with connect(args) as ctl:
        if args.preset is not None:
            done = commands.apply_preset(ctl, preset, None if args.freq is None
                                         else args.freq * 1e6)
        else:
            done = commands.apply_wish(ctl, wish, end_a)
        presets = _presets_now(ctl, args, done.status.state)
    _print_status(args, done.status, done.extra, done.notes, presets)
    return 0


def run_flip(args: argparse.Namespace) -> int:
    with connect(args) as ctl:
        status = ctl.flip()
        presets = _presets_now(ctl, args, status.state)
    _print_status(args, status, presets=presets)
    return 0


def selftest_summary(result: dict[str, str]) -> tuple[str, bool]:
    """A human line for a TEST reply, and whether the read-back found a fault."""
    readback = result.get("rb", "none")
    text = (f"self-test: {result.get('relays', '?')} relays stepped in {result.get('ms', '?')} ms, "
            "receiver protected throughout; ")
    if readback == "ok":
        text += "read-back ok"
    elif readback == "fail":
        text += (f"read-back FAILED for {result.get('bad', '?').replace(',', ', ')} "
                 "(check their coil drivers and wiring)")
    else:
        text += "read-back not available on this driver"
    return text, readback == "fail"


def selftest_fields(result: dict[str, str]) -> dict[str, object]:
    """A TEST reply's fields with numbers as numbers, for ``--json``."""
    typed: dict[str, object] = {}
    for key, value in result.items():
        if key in ("relays", "ms", "mask"):
            typed[key] = int(value)
        elif key == "ohms":
            typed[key] = float(value)
        elif key in ("open", "short"):
            typed[key] = value == "1"
        elif key == "bad":
            typed[key] = [name for name in value.split(",") if name]
        else:
            typed[key] = value
    return typed


def run_selftest(args: argparse.Namespace) -> int:
    if not 0 <= args.dwell_ms <= 2000:
        raise ConfigError("--dwell-ms", f"must be 0..2000 ms, got {args.dwell_ms}")
    with connect(args) as ctl:
        result = ctl.self_test(dwell_ms=args.dwell_ms)
    text, failed = selftest_summary(result)
    if args.json:
        print_json({**selftest_fields(result), "readback_failed": failed})
    else:
        print(text)
    return 6 if failed else 0


def run_sim(args: argparse.Namespace) -> int:
    from nullsteer.sim import DEFAULT_BOARD_CONFIG, SimBoard

    board = SimBoard(args.board or DEFAULT_BOARD_CONFIG, state_dir=args.state_dir)
    board.start()
    stop = threading.Event()
    for sig in (signal.SIGINT, signal.SIGTERM):
        signal.signal(sig, lambda *_: stop.set())
    try:
        print(f"link: {board.url}", flush=True)
        print(f"board config: {args.board or DEFAULT_BOARD_CONFIG}", flush=True)
        print("simulated board running; Ctrl-C stops it", file=sys.stderr, flush=True)
        while not stop.wait(0.5):
            pass
    finally:
        board.stop()
    return 0


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("status", help="show the board's relay state")
    add_board_options(p)
    add_json_flag(p)
    p.set_defaults(func=run_status)

    p = sub.add_parser("info", help="show firmware, relay roles and the ladder table")
    add_board_options(p)
    add_json_flag(p)
    p.set_defaults(func=run_info)

    p = sub.add_parser("set", help="put the board in a state (absolute, idempotent)")
    add_board_options(p)
    end = p.add_mutually_exclusive_group()
    end.add_argument("--fed-end", type=_fed_end, help="end feeding the receiver: A or B")
    end.add_argument("--null-bearing", type=_bearing, metavar="DEG",
                     help="wanted null bearing; picks the fed end (needs --config)")
    term = p.add_mutually_exclusive_group()
    term.add_argument("--mask", type=_mask, help="ladder relay mask (bit i = relay i)")
    term.add_argument("--ohms", type=positive_float("--ohms"),
                      help="wanted termination; the nearest ladder setting by ratio is used")
    term.add_argument("--open", action="store_true", help="disconnect the termination (no rear null)")
    p.add_argument("--preset", metavar="NAME", help="a preset of the station file (needs --config)")
    p.add_argument("--freq", type=positive_float("--freq"), metavar="MHZ",
                   help="with --preset: the receive frequency choosing its band setting")
    term.add_argument("--short", action="store_true",
                      help="short the termination (closed loop, figure-8; needs a short relay)")
    add_json_flag(p)
    p.set_defaults(func=run_set)

    p = sub.add_parser("flip", help="swap fed and terminated ends (reverse the null)")
    add_board_options(p)
    add_json_flag(p)
    p.set_defaults(func=run_flip)

    p = sub.add_parser("selftest", help="step every relay with the receiver protected")
    add_board_options(p)
    p.add_argument("--dwell-ms", type=int, default=50, help="time each relay is held (ms)")
    add_json_flag(p)
    p.set_defaults(func=run_selftest)

    p = sub.add_parser("sim", help="run a simulated board and print its link URL")
    p.add_argument("--board", metavar="FILE", help="board config JSON (default: the demo board)")
    p.add_argument("--state-dir", metavar="DIR", help="keep the board's state here")
    p.set_defaults(func=run_sim)
