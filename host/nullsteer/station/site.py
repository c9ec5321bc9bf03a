"""The listening site: ``[site]`` of the station file, and IANA time-zone lookup.

Keys of ``[site]``:

``lat_deg``
    Latitude in degrees, north positive, -90..90 (required).
``lon_deg``
    Longitude in degrees, east positive, -180..180 (required).
``timezone``
    IANA zone name such as ``"Europe/Dublin"`` (default ``"UTC"``). Scheduled times
    written as ``"HH:MM"`` are wall-clock times in this zone.
``name``, ``callsign``
    Free text for reports (default empty).
"""

from __future__ import annotations

import zoneinfo
from dataclasses import dataclass
from typing import Any

from nullsteer.station.config import Station, check_unknown, get_float, get_str
from nullsteer.errors import ConfigError

SITE_KEYS = frozenset({"lat_deg", "lon_deg", "timezone", "name", "callsign"})


@dataclass(frozen=True)
class Site:
    """Where the antenna is.

    Attributes
    ----------
    lat_deg, lon_deg : float
        Geographic latitude (north positive) and longitude (east positive), degrees.
    timezone : str
        IANA zone name.
    name, callsign : str
        Free text for reports.
    """

    lat_deg: float
    lon_deg: float
    timezone: str = "UTC"
    name: str = ""
    callsign: str = ""

    @property
    def tz(self) -> zoneinfo.ZoneInfo:
        """The site's zone as a :class:`zoneinfo.ZoneInfo`."""
        return get_zone(self.timezone, "site.timezone")


def get_zone(name: str, key: str) -> zoneinfo.ZoneInfo:
    """Look up an IANA zone; an unknown or malformed name raises ConfigError naming ``key``.

    Parameters
    ----------
    name : str
        Zone name, e.g. ``"America/New_York"`` or ``"UTC"``.
    key : str
        Config key or command-line flag to name in the error.
    """
    try:
        return zoneinfo.ZoneInfo(name)
    except (zoneinfo.ZoneInfoNotFoundError, ValueError, OSError):
        raise ConfigError(key, f"unknown time zone {name!r} (expected an IANA name such as "
                               "'Europe/Dublin')") from None


def read_lat_lon(table: dict[str, Any], where: str) -> tuple[float, float]:
    """Read ``lat_deg`` (-90..90) and ``lon_deg`` (-180..180) from ``table``.

    Parameters
    ----------
    table : dict
        The TOML table holding the two keys.
    where : str
        Dotted name of the table, used in error messages (e.g. ``"rule[1].where"``).
    """
    lat = get_float(table, "lat_deg", where, minimum=-90.0, maximum=90.0)
    lon = get_float(table, "lon_deg", where, minimum=-180.0, maximum=180.0)
    return lat, lon


def parse_site(station: Station) -> Site:
    """Parse ``[site]`` (required) into a :class:`Site`; bad keys raise ConfigError."""
    table = station.section("site", required=True)
    check_unknown(table, SITE_KEYS, "site")
    lat, lon = read_lat_lon(table, "site")
    tz_name = get_str(table, "timezone", "site", default="UTC")
    get_zone(tz_name, "site.timezone")
    return Site(lat_deg=lat, lon_deg=lon, timezone=tz_name,
                name=get_str(table, "name", "site", default=""),
                callsign=get_str(table, "callsign", "site", default=""))
