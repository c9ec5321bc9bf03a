"""Board commands: ``status``, ``info``, ``set``, ``flip``, ``selftest`` and ``sim``."""

from __future__ import annotations

import argparse
import signal
import sys
import threading

from nullsteer.protocol import wire
from nullsteer.station.bearing import fed_end_for_null, null_bearing_deg
from nullsteer.cli.common import add_board_options, add_json_flag, connect, positive_float, print_json
from nullsteer.station.config import get_float, load_station
from nullsteer.board.controller import BoardStatus, Controller, FedEnd
from nullsteer.errors import ConfigError

#: A wanted ohms value further than this ratio from every setting is refused.
MAX_OHMS_RATIO = 2.0


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


def describe(status: BoardStatus, end_a_deg: float | None = None) -> str:
    """One human line for a board state."""
    s = status.state
    term = "open (no termination)" if s.open else "shorted (closed loop: figure-8)" if s.short else (
        f"{s.ohms:.1f} ohm (mask {s.mask})" if s.ohms is not None else f"mask {s.mask}")
    text = f"fed end {s.fed_end.value}, termination {term}"
    if end_a_deg is not None and not (s.open or s.short):
        text += f", null toward {null_bearing_deg(s.fed_end.value, end_a_deg):.0f} deg"
    if status.changed is not None:
        text += "" if status.changed else " (already so: no relay moved)"
    return text


def _print_status(args: argparse.Namespace, status: BoardStatus, extra: dict | None = None) -> None:
    end_a = None
    if getattr(args, "config", None):
        try:
            end_a = end_a_bearing(args.config, "--config")
        except ConfigError:
            end_a = None
    if args.json:
        out = status.to_json()
        if end_a is not None and not status.state.open:
            out["null_bearing_deg"] = null_bearing_deg(status.state.fed_end.value, end_a)
        out.update(extra or {})
        print_json(out)
    else:
        for key, value in (extra or {}).items():
            if key == "note":
                print(value)
        print(describe(status, end_a))


def run_status(args: argparse.Namespace) -> int:
    with connect(args) as ctl:
        status = ctl.status()
    _print_status(args, status)
    return 0


def run_info(args: argparse.Namespace) -> int:
    with connect(args) as ctl:
        info = ctl.info()
        table = ctl.table() if info.table_entries else []
        warning = ctl.firmware_mismatch()
    if warning:
        sys.stderr.write(f"nullsteer: warning: {warning}\n")
    if args.json:
        out = info.to_json()
        out["firmware_warning"] = warning
        out["table"] = [{"mask": m, "ohms": r} for m, r in table]
        print_json(out)
    else:
        print(f"board {info.board}, firmware {info.firmware}, protocol {info.protocol}")
        print(f"{info.bits} ladder relays; roles: {', '.join(info.roles)}")
        if table:
            print(f"ladder table: {len(table)} settings, {table[0][1]:.1f} .. {table[-1][1]:.1f} ohm")
        else:
            print("no ladder table loaded (settings by mask only)")
    return 0


def choose_mask_for_ohms(ctl: Controller, ohms: float) -> tuple[int, float, float]:
    """(mask, setting ohms, error %) of the board's setting nearest ``ohms`` by ratio."""
    table = ctl.table()
    if not table:
        raise ConfigError("--ohms", "the board has no ladder table; write one with "
                                    "'nullsteer ladder --board-config FILE' and reload the board")
    lo, hi = table[0][1], table[-1][1]
    if not lo / MAX_OHMS_RATIO <= ohms <= hi * MAX_OHMS_RATIO:
        raise ConfigError("--ohms", f"{ohms:g} ohm is far outside the ladder's {lo:.0f}..{hi:.0f} ohm")
    found = wire.nearest_by_ratio(table, ohms)
    assert found is not None
    return found


def run_set(args: argparse.Namespace) -> int:
    if args.mask is None and args.ohms is None and not args.open and not args.short \
            and args.fed_end is None and args.null_bearing is None:
        raise ConfigError("set", "say what to set: --fed-end/--null-bearing and/or "
                                 "--mask/--ohms/--open/--short")
    if args.ohms is not None and not args.ohms > 0:
        raise ConfigError("--ohms", f"must be > 0, got {args.ohms:g}")
    wanted_end = args.fed_end
    note = None
    if args.null_bearing is not None:
        end_a = end_a_bearing(args.config, "--null-bearing")
        end, miss = fed_end_for_null(args.null_bearing, end_a)
        wanted_end = end
        note = (f"null toward {args.null_bearing:.0f} deg: feeding end {end} "
                f"(null at {null_bearing_deg(end, end_a):.0f} deg, {miss:.0f} deg off)")
    extra: dict = {}
    with connect(args) as ctl:
        now = ctl.status().state
        end = wanted_end or now.fed_end
        mask, open_, short = now.mask, now.open, now.short
        if args.mask is not None or args.ohms is not None or args.open:
            short = False
        if args.mask is not None:
            mask, open_ = args.mask, False
        if args.ohms is not None:
            mask, r_set, err = choose_mask_for_ohms(ctl, args.ohms)
            open_ = False
            extra = {"wanted_ohms": args.ohms, "error_pct": round(err, 2)}
            note = ((note + "\n") if note else "") + (
                f"nearest setting to {args.ohms:g} ohm: mask {mask} = {r_set:.1f} ohm ({err:+.1f} %)")
        if args.open:
            open_ = True
        if args.short:
            open_, short = False, True
        status = ctl.set_state(end, mask, open_, short)
    if note:
        extra["note"] = note
    _print_status(args, status, extra)
    return 0


def run_flip(args: argparse.Namespace) -> int:
    with connect(args) as ctl:
        status = ctl.flip()
    _print_status(args, status)
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


def run_selftest(args: argparse.Namespace) -> int:
    if not 0 <= args.dwell_ms <= 2000:
        raise ConfigError("--dwell-ms", f"must be 0..2000 ms, got {args.dwell_ms}")
    with connect(args) as ctl:
        result = ctl.self_test(dwell_ms=args.dwell_ms)
    text, failed = selftest_summary(result)
    if args.json:
        print_json({**result, "readback_failed": failed})
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
