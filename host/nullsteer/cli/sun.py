"""``nullsteer sun``: the day's civil dawn, sunrise, sunset and civil dusk at a place.

For greyline planning at the site or at a far region: give the place and the zone the
times should be shown in (the site's own zone, or the far region's).
"""

from __future__ import annotations

import argparse
import datetime as dt
import math

from nullsteer.cli.common import add_json_flag, print_json
from nullsteer.errors import ConfigError
from nullsteer.station.site import get_zone
from nullsteer.schedule.solar import SolarMethod
from nullsteer.schedule.sun import SunEvent, SunEvents, check_date, sun_events

_LABELS = {SunEvent.DAWN: "civil dawn", SunEvent.SUNRISE: "sunrise",
           SunEvent.SUNSET: "sunset", SunEvent.DUSK: "civil dusk"}


def register(subparsers: argparse._SubParsersAction) -> None:
    p = subparsers.add_parser("sun", help="sun events of a day at a place (greyline planning)",
                              description=__doc__.splitlines()[0])
    p.add_argument("--lat", required=True, metavar="DEG", help="latitude, degrees north (-90..90)")
    p.add_argument("--lon", required=True, metavar="DEG",
                   help="longitude, degrees east (-180..180; west is negative)")
    p.add_argument("--date", metavar="YYYY-MM-DD", help="local date (default: today in --tz)")
    p.add_argument("--tz", default="UTC", metavar="ZONE",
                   help="IANA time zone of the date and the times shown (default UTC)")
    p.add_argument("--method", default=SolarMethod.MEEUS.value,
                   choices=[m.value for m in SolarMethod],
                   help="source of declination and equation of time (default %(default)s)")
    add_json_flag(p)
    p.set_defaults(func=run)


def _degrees(text: str, flag: str, limit: float) -> float:
    try:
        value = float(text)
    except ValueError:
        raise ConfigError(flag, f"must be a number of degrees, got {text!r}") from None
    if not (math.isfinite(value) and -limit <= value <= limit):
        raise ConfigError(flag, f"must be within -{limit:g}..{limit:g} degrees, got {text}")
    return value


def _date(text: str | None, zone: dt.tzinfo) -> dt.date:
    if text is None:
        return dt.datetime.now(zone).date()
    try:
        date = dt.date.fromisoformat(text)
    except ValueError:
        raise ConfigError("--date", f"must be a date YYYY-MM-DD, got {text!r}") from None
    return check_date(date, "--date")


def _hm(seconds: float) -> str:
    minutes = round(seconds / 60.0)
    return f"{minutes // 60} h {minutes % 60:02d} min"


def format_text(ev: SunEvents) -> str:
    """The events as aligned lines: local time, UTC time, or the reason for none."""
    ns = "N" if ev.lat_deg >= 0 else "S"
    ew = "E" if ev.lon_deg >= 0 else "W"
    lines = [f"Sun on {ev.date.isoformat()} at {abs(ev.lat_deg):.3f} {ns}, "
             f"{abs(ev.lon_deg):.3f} {ew} (times in {ev.timezone})"]

    def row(label: str, when: dt.datetime | None, why: str | None = None) -> str:
        if when is None:
            return f"  {label:<12} none: {why}"
        utc = when.astimezone(dt.timezone.utc)
        return (f"  {label:<12} {when:%H:%M} {when.tzname() or ''}".ljust(26)
                + f"({utc:%H:%M} UTC)")

    for kind in (SunEvent.DAWN, SunEvent.SUNRISE):
        lines.append(row(_LABELS[kind], ev.get(kind), ev.reason(kind)))
    lines.append(row("solar noon", ev.solar_noon))
    for kind in (SunEvent.SUNSET, SunEvent.DUSK):
        lines.append(row(_LABELS[kind], ev.get(kind), ev.reason(kind)))
    lines.append(f"  {'day length':<12} {_hm(ev.day_length_s)}")
    return "\n".join(lines)


def run(args: argparse.Namespace) -> int:
    lat = _degrees(args.lat, "--lat", 90.0)
    lon = _degrees(args.lon, "--lon", 180.0)
    zone = get_zone(args.tz, "--tz")
    date = _date(args.date, zone)
    events = sun_events(lat, lon, date, zone, SolarMethod(args.method))
    if args.json:
        out = events.to_json()
        out["method"] = args.method
        print_json(out)
    else:
        print(format_text(events))
    return 0
