"""``nullsteer schedule``: list the coming preset changes of a station file.

Shows what is in force at the start, every planned action of the window (site-local
times) and the rule-days skipped because the sun does not rise or set there.
"""

from __future__ import annotations

import argparse
import datetime as dt

from nullsteer.cli.common import add_json_flag, print_json
from nullsteer.station.config import load_station
from nullsteer.errors import ConfigError
from nullsteer.schedule.rules import Action, Plan, Schedule, in_force, parse_schedule, plan
from nullsteer.schedule.sun import check_date

_MAX_DAYS = 366


def register(subparsers: argparse._SubParsersAction) -> None:
    p = subparsers.add_parser("schedule", help="list the coming preset changes",
                              description=__doc__.splitlines()[0])
    p.add_argument("--config", required=True, metavar="FILE", help="station TOML file")
    p.add_argument("--days", default="7", metavar="N",
                   help=f"length of the window in days (1..{_MAX_DAYS}, default 7)")
    p.add_argument("--from", dest="start", metavar="ISO-DATETIME",
                   help="start of the window, e.g. 2026-03-28T18:00 (site-local unless an "
                        "offset is given; a bare date means local midnight; default now)")
    p.add_argument("--freq-mhz", metavar="MHZ",
                   help="receive frequency for per-band presets (default: preset defaults)")
    add_json_flag(p)
    p.set_defaults(func=run)


def _days(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        raise ConfigError("--days", f"must be a whole number of days, got {text!r}") from None
    if not 1 <= value <= _MAX_DAYS:
        raise ConfigError("--days", f"must be within 1..{_MAX_DAYS}, got {value}")
    return value


def _start(text: str | None, zone: dt.tzinfo) -> dt.datetime:
    if text is None:
        return dt.datetime.now(zone).replace(microsecond=0)
    try:
        value = dt.datetime.fromisoformat(text)
    except ValueError:
        raise ConfigError("--from", f"must be an ISO 8601 date or date-time, got {text!r}") from None
    check_date(value.date(), "--from")
    return value.replace(tzinfo=zone) if value.tzinfo is None else value.astimezone(zone)


def _freq_hz(text: str | None) -> float | None:
    if text is None:
        return None
    try:
        value = float(text)
    except ValueError:
        raise ConfigError("--freq-mhz", f"must be a number of MHz, got {text!r}") from None
    if not 0.01 <= value <= 1000.0:
        raise ConfigError("--freq-mhz", f"must be within 0.01..1000 MHz, got {text}")
    return value * 1e6


def _stamp(when: dt.datetime) -> str:
    return f"{when:%a %Y-%m-%d %H:%M} {when.tzname() or ''}"


def format_text(sched: Schedule, result: Plan, current: Action | None) -> str:
    """The plan as a table for people."""
    site = sched.site
    title = ", ".join(x for x in (site.name, site.callsign) if x) or "station"
    lines = [f"Schedule for {title} ({site.timezone})",
             f"from {_stamp(result.start)} to {_stamp(result.end)}"]
    if current is not None:
        lines.append(f"in force at start: {current.preset} ({current.target.describe()}) "
                     f"since {_stamp(current.when)}, rule {current.rule_index}: {current.basis}")
    else:
        lines.append("in force at start: nothing (no rule fired in the look-back)")
    if result.actions:
        lines.append(f"{'when':<24}  {'rule':>4}  {'preset':<12} {'target':<24} "
                     f"{'devices':<16} basis")
        for a in result.actions:
            devices = ",".join(a.device_ids) or "-"
            lines.append(f"{_stamp(a.when):<24}  {a.rule_index:>4}  {a.preset:<12} "
                         f"{a.target.describe():<24} {devices:<16} {a.basis}")
    else:
        lines.append("no actions in this window")
    if result.skipped:
        lines.append("skipped:")
        for s in result.skipped:
            lines.append(f"  {s.date.isoformat()}  rule {s.rule_index} ({s.preset}): {s.reason}")
    return "\n".join(lines)


def run(args: argparse.Namespace) -> int:
    days = _days(args.days)
    freq_hz = _freq_hz(args.freq_mhz)
    sched = parse_schedule(load_station(args.config))
    zone = sched.site.tz
    start = _start(args.start, zone)
    # Add whole local days on the wall clock, then normalise (a DST change keeps midnight
    # at midnight); the window length itself is measured in UTC by the planner.
    end = dt.datetime.combine(start.date() + dt.timedelta(days=days), start.time(), zone)
    end = end.astimezone(dt.timezone.utc).astimezone(zone)
    result = plan(sched, start, end, freq_hz)
    current = in_force(sched, start - dt.timedelta(microseconds=1), freq_hz=freq_hz)
    if args.json:
        print_json({"site": {"name": sched.site.name, "callsign": sched.site.callsign,
                             "lat_deg": sched.site.lat_deg, "lon_deg": sched.site.lon_deg,
                             "timezone": sched.site.timezone},
                    "from": start.isoformat(), "to": end.isoformat(),
                    "in_force": current, "actions": result.actions,
                    "skipped": result.skipped})
    else:
        print(format_text(sched, result, current))
    return 0
