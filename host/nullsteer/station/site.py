"""The listening site: ``[site]`` of the station file, and IANA time-zone lookup.

The keys are described once, in :data:`SITE` (and in ``docs/station-file.md``, generated
from it).
"""

from __future__ import annotations

import zoneinfo
from dataclasses import dataclass
from typing import Any

from nullsteer.errors import ConfigError
from nullsteer.station.config import Station
from nullsteer.station.schema import REQUIRED, Key, Kind, Section

_LAT = Key("lat_deg", Kind.NUMBER, "Latitude, north positive.", "deg", REQUIRED, -90.0, 90.0)
_LON = Key("lon_deg", Kind.NUMBER, "Longitude, east positive.", "deg", REQUIRED, -180.0, 180.0)
SITE = Section("site", "Where the antenna is. Required.", (
    _LAT, _LON,
    Key("timezone", Kind.STRING, "IANA zone name such as `Europe/Dublin`; rule times written "
        "`HH:MM` are wall-clock times in this zone.", default="UTC"),
    Key("name", Kind.STRING, "Free text for reports.", default=""),
    Key("callsign", Kind.STRING, "Free text for reports.", default=""),
))
#: A place given inline, e.g. a rule's ``where = { lat_deg = ..., lon_deg = ... }``.
PLACE = Section("rule.where", "A far region whose sun events a rule follows (greyline): "
                "`where = { lat_deg = 40.1, lon_deg = -75.3 }`.", (_LAT, _LON), form="entry")


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
    return PLACE.get(table, "lat_deg", where), PLACE.get(table, "lon_deg", where)


def parse_site(station: Station) -> Site:
    """Parse ``[site]`` (required) into a :class:`Site`; bad keys raise ConfigError."""
    table = station.section("site", required=True)
    SITE.check(table, "site")
    lat, lon = read_lat_lon(table, "site")
    tz_name = SITE.get(table, "timezone", "site")
    get_zone(tz_name, "site.timezone")
    return Site(lat_deg=lat, lon_deg=lon, timezone=tz_name,
                name=SITE.get(table, "name", "site"), callsign=SITE.get(table, "callsign", "site"))
