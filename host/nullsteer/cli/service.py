"""``nullsteer service``: run the station's schedule on its boards (see nullsteer.schedule.service).

Examples::

    nullsteer service --config station.toml
    nullsteer service --config station.toml --dry-run --from 2026-06-21T00:00 --speed 0 --days 1
    nullsteer service --config station.toml --dry-run --from 2026-06-21T00:00 --speed 3600
"""

from __future__ import annotations

import argparse
import datetime as dt
import logging
import signal
import sys
from typing import Any

from nullsteer.cli.common import positive_float
from nullsteer.station.config import load_station
from nullsteer.errors import ConfigError
from nullsteer.schedule.service import Service, ServiceOptions
from nullsteer.schedule.sun import check_date
from nullsteer.station.site import parse_site


def _non_negative(flag: str) -> Any:
    def parse(text: str) -> float:
        try:
            value = float(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"{flag} must be a number, got {text!r}") from None
        if not 0 <= value < float("inf"):
            raise argparse.ArgumentTypeError(f"{flag} must be >= 0, got {text!r}")
        return value

    return parse


def register(subparsers: Any) -> None:
    p = subparsers.add_parser(
        "service", help="carry out the [[rule]] schedule on the boards (long-running)",
        description="Apply the rule in force now to every device, then each action as its "
                    "time comes; one log line per action and device.")
    p.add_argument("--config", required=True, metavar="FILE", help="station file (TOML)")
    p.add_argument("--dry-run", action="store_true",
                   help="log what would be done; open no link, send nothing")
    p.add_argument("--from", dest="start", metavar="ISO",
                   help="virtual start time, e.g. 2026-06-21T00:00 (site time unless an "
                        "offset is given); default now")
    p.add_argument("--speed", type=_non_negative("--speed"), default=1.0, metavar="X",
                   help="virtual seconds per real second (default 1; 0 = do not wait)")
    p.add_argument("--days", type=positive_float("--days"), default=None, metavar="N",
                   help="stop after N days of (virtual) time; default run until stopped")
    p.add_argument("--freq-mhz", type=positive_float("--freq-mhz"), default=None, metavar="F",
                   help="receive frequency for per-band presets")
    p.add_argument("--retry", type=positive_float("--retry"), default=60.0, metavar="S",
                   help="seconds between attempts on an unreachable device (default 60)")
    p.set_defaults(func=run)


def parse_start(text: str | None, zone: dt.tzinfo) -> dt.datetime | None:
    """``--from``: ISO 8601; a time without offset is taken in the site's zone."""
    if text is None:
        return None
    try:
        value = dt.datetime.fromisoformat(text)
    except ValueError:
        raise ConfigError("--from", f"expected an ISO date-time such as 2026-06-21T18:00, "
                                    f"got {text!r}") from None
    check_date(value.date(), "--from")
    return value.replace(tzinfo=zone) if value.tzinfo is None else value


def run(args: argparse.Namespace) -> int:
    station = load_station(args.config)
    zone = parse_site(station).tz
    if args.speed == 0 and args.days is None:
        raise ConfigError("--days", "--speed 0 jumps through time: give --days to end the run")
    options = ServiceOptions(dry_run=args.dry_run, start=parse_start(args.start, zone),
                             speed=args.speed, days=args.days,
                             freq_hz=args.freq_mhz * 1e6 if args.freq_mhz else None,
                             retry_s=args.retry)
    handler = logging.StreamHandler(sys.stdout)
    handler.setFormatter(logging.Formatter("%(message)s"))
    logger = logging.getLogger("nullsteer.schedule.service")
    logger.addHandler(handler)
    logger.setLevel(logging.INFO)
    logger.propagate = False
    service = Service(station, options)
    stopping = []
    previous = signal.signal(signal.SIGTERM, lambda *_: stopping.append(1))
    try:
        return service.run(lambda: bool(stopping))
    finally:
        signal.signal(signal.SIGTERM, previous)
        logger.removeHandler(handler)
