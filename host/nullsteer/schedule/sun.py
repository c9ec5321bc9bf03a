"""Sun events of a local calendar date: civil dawn, sunrise, sunset, civil dusk.

The solar arithmetic (NOAA GML event equations, vectorised over days) is in
:mod:`nullsteer.schedule.solar`. This module turns solar days into the events of a *local*
calendar date in an IANA zone, DST-correct via :mod:`zoneinfo`: the event returned for
a date is the one whose local date is that date, preferring the one of the solar day
whose solar noon is nearest local noon (so a date holding two dusks, one just after
00:00 and one just before 24:00, reports the evening one).

When the sun does not cross the event's zenith angle that day the event is None, and
the reason says whether the sun stays above or below (polar day / polar night, or the
white nights in which civil twilight lasts all night).
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Iterable, Mapping
from dataclasses import dataclass
from enum import StrEnum
from typing import Any

import numpy as np

from nullsteer.errors import ConfigError
from nullsteer.station.site import get_zone
from nullsteer.schedule.solar import (ZENITH_CIVIL_DEG, ZENITH_SUNRISE_DEG, SolarMethod, SunState,
                             event_minutes, solar_noon_minutes, utc_instant)


class SunEvent(StrEnum):
    """The four events of a day, in their order within the day."""

    DAWN = "dawn"
    SUNRISE = "sunrise"
    SUNSET = "sunset"
    DUSK = "dusk"

    @property
    def zenith_deg(self) -> float:
        """Zenith angle of the sun's centre at this event, degrees."""
        return ZENITH_CIVIL_DEG if self in (SunEvent.DAWN, SunEvent.DUSK) else ZENITH_SUNRISE_DEG

    @property
    def rising(self) -> bool:
        """True for the morning events (dawn, sunrise)."""
        return self in (SunEvent.DAWN, SunEvent.SUNRISE)


@dataclass(frozen=True)
class SolarDayEvent:
    """One event on one solar day: ``when`` (UTC) or None, and the :class:`SunState`."""

    day_ordinal: int
    event: SunEvent
    when: dt.datetime | None
    state: SunState


#: Years in which dates are taken: the span over which the default method (Meeus' low-accuracy
#: solar coordinates, see :mod:`nullsteer.schedule.solar`) states its accuracy.
VALID_YEARS = (1900, 2100)


def check_date(date: dt.date, key: str) -> dt.date:
    """``date`` unchanged, or a ConfigError naming ``key`` outside :data:`VALID_YEARS`."""
    lo, hi = VALID_YEARS
    if not lo <= date.year <= hi:
        raise ConfigError(key, f"the sun's position is computed for the years {lo}..{hi}, "
                               f"got {date.isoformat()}")
    return date


def solar_day_events(lat_deg: float, lon_deg: float, first_ordinal: int, n_days: int,
                     event: SunEvent, method: SolarMethod = SolarMethod.MEEUS
                     ) -> list[SolarDayEvent]:
    """``event`` on ``n_days`` consecutive solar days from UTC date ``first_ordinal``.

    This is the sequence a scheduler wants: every crossing exactly once, in order,
    with the polar days/nights in between marked by their state.

    Parameters
    ----------
    lat_deg, lon_deg : float
        Place, degrees (north / east positive).
    first_ordinal : int
        First solar day, as the ordinal of a UTC date.
    n_days : int
        Number of consecutive solar days.
    event : SunEvent
        Which event.
    method : SolarMethod
        Source of declination and equation of time.
    """
    ords = np.arange(first_ordinal, first_ordinal + n_days, dtype=np.int64)
    minutes, state = event_minutes(lat_deg, lon_deg, ords, event.zenith_deg, event.rising, method)
    return [SolarDayEvent(int(o), event, None if s else utc_instant(int(o), m), SunState(int(s)))
            for o, m, s in zip(ords, minutes, state)]


def missing_reason(event: SunEvent, state: SunState) -> str:
    """Human-readable reason why ``event`` does not happen on a day in ``state``."""
    above = state == SunState.STAYS_ABOVE
    if event.zenith_deg == ZENITH_SUNRISE_DEG:
        return ("sun stays above the horizon all day (polar day)" if above
                else "sun stays below the horizon all day (polar night)")
    return ("sun stays above -6 deg elevation all night (civil twilight all night)" if above
            else "sun stays below -6 deg elevation all day (no civil twilight)")


@dataclass(frozen=True)
class SunEvents:
    """The sun events of one local calendar date at one place.

    Attributes
    ----------
    date : datetime.date
        The local calendar date (in ``timezone``).
    lat_deg, lon_deg : float
        The place, degrees (north / east positive).
    timezone : str
        Zone the times are expressed in.
    dawn, sunrise, sunset, dusk : datetime or None
        Aware datetimes in ``timezone``; None when the event does not happen on ``date``.
    solar_noon : datetime
        Solar noon of the solar day centred on ``date``.
    day_length_s : float
        Sunrise to sunset of that solar day, seconds (86400 in polar day, 0 in polar
        night).
    reasons : Mapping[SunEvent, str]
        Why each missing event is missing.
    """

    date: dt.date
    lat_deg: float
    lon_deg: float
    timezone: str
    dawn: dt.datetime | None
    sunrise: dt.datetime | None
    sunset: dt.datetime | None
    dusk: dt.datetime | None
    solar_noon: dt.datetime
    day_length_s: float
    reasons: Mapping[SunEvent, str]

    def get(self, event: SunEvent | str) -> dt.datetime | None:
        """The time of ``event`` (a :class:`SunEvent` or its name), or None."""
        return getattr(self, SunEvent(event).value)

    def reason(self, event: SunEvent | str) -> str | None:
        """Why ``event`` is missing, or None if it happens."""
        return self.reasons.get(SunEvent(event))

    def to_json(self) -> dict[str, Any]:
        """Plain JSON form: ISO 8601 times with offset, null for missing events."""
        out: dict[str, Any] = {"date": self.date.isoformat(), "lat_deg": self.lat_deg,
                               "lon_deg": self.lon_deg, "timezone": self.timezone}
        for ev in SunEvent:
            when = self.get(ev)
            out[ev.value] = when.isoformat() if when else None
        out["solar_noon"] = self.solar_noon.isoformat()
        out["day_length_s"] = round(self.day_length_s)
        out["reasons"] = {ev.value: text for ev, text in self.reasons.items()}
        return out


def _as_tz(tz: dt.tzinfo | str) -> tuple[dt.tzinfo, str]:
    if isinstance(tz, str):
        return get_zone(tz, "tz"), tz
    return tz, str(getattr(tz, "key", None) or tz)


def sun_events_for_dates(lat_deg: float, lon_deg: float, dates: Iterable[dt.date],
                         tz: dt.tzinfo | str, method: SolarMethod = SolarMethod.MEEUS
                         ) -> list[SunEvents]:
    """:func:`sun_events` for many local dates at one place, computed in one pass.

    Parameters
    ----------
    lat_deg, lon_deg : float
        Place, degrees (north / east positive).
    dates : iterable of datetime.date
        Local calendar dates in ``tz``.
    tz : tzinfo or str
        Zone of the dates and of the returned times (IANA name or tzinfo).
    method : SolarMethod
        Source of declination and equation of time.
    """
    zone, zone_name = _as_tz(tz)
    wanted = list(dates)
    if not wanted:
        return []
    # Events of solar day d lie within d-0.5 .. d+1.5 UTC days; local dates are within
    # 14 h of UTC, so solar days lo-2 .. hi+2 cover every event of every wanted date.
    lo = min(wanted).toordinal() - 2
    n = max(wanted).toordinal() + 3 - lo
    ords = np.arange(lo, lo + n, dtype=np.int64)
    noon_min = solar_noon_minutes(lon_deg, ords, method)
    noon_ts = np.array([utc_instant(int(o), m).timestamp() for o, m in zip(ords, noon_min)])
    per_event = {ev: solar_day_events(lat_deg, lon_deg, lo, n, ev, method) for ev in SunEvent}
    local = {ev: [(item.when.astimezone(zone) if item.when else None) for item in items]
             for ev, items in per_event.items()}
    results = []
    for date in wanted:
        # The solar day "of" a local date: the one whose solar noon is nearest local noon.
        target = dt.datetime.combine(date, dt.time(12), zone).timestamp()
        k = int(np.argmin(np.abs(noon_ts - target)))
        times: dict[SunEvent, dt.datetime | None] = {}
        reasons: dict[SunEvent, str] = {}
        for ev in SunEvent:
            near = [local[ev][i] for i in (k, k - 1, k + 1) if 0 <= i < n]
            on_date = [t for t in near if t is not None and t.date() == date]
            times[ev] = on_date[0] if on_date else None
            if not on_date:
                state = per_event[ev][k].state
                if state == SunState.CROSSES:
                    reasons[ev] = (f"no {ev.value} on this local date "
                                   "(it falls just before or after it)")
                else:
                    reasons[ev] = missing_reason(ev, state)
        rise, set_ = per_event[SunEvent.SUNRISE][k], per_event[SunEvent.SUNSET][k]
        if rise.when is not None and set_.when is not None:
            day_s = (set_.when - rise.when).total_seconds()
        elif SunState.STAYS_ABOVE in (rise.state, set_.state):
            day_s = 86400.0
        else:
            day_s = 0.0
        noon = dt.datetime.fromtimestamp(float(noon_ts[k]), zone)
        results.append(SunEvents(date=date, lat_deg=lat_deg, lon_deg=lon_deg,
                                 timezone=zone_name, dawn=times[SunEvent.DAWN],
                                 sunrise=times[SunEvent.SUNRISE], sunset=times[SunEvent.SUNSET],
                                 dusk=times[SunEvent.DUSK], solar_noon=noon,
                                 day_length_s=day_s, reasons=reasons))
    return results


def sun_events(lat_deg: float, lon_deg: float, date: dt.date, tz: dt.tzinfo | str,
               method: SolarMethod = SolarMethod.MEEUS) -> SunEvents:
    """Civil dawn, sunrise, sunset and civil dusk on the local date ``date`` in ``tz``.

    Parameters
    ----------
    lat_deg : float
        Latitude, degrees, north positive (-90..90).
    lon_deg : float
        Longitude, degrees, east positive.
    date : datetime.date
        Local calendar date in ``tz``; each returned event falls on this date there.
    tz : tzinfo or str
        Zone (IANA name or tzinfo) of ``date`` and of the returned times.
    method : SolarMethod
        Source of declination and equation of time (default: Meeus, see
        :mod:`nullsteer.schedule.solar`).

    Returns
    -------
    SunEvents
        Missing events are None and ``reasons`` says why.
    """
    if not -90.0 <= lat_deg <= 90.0:
        raise ValueError(f"lat_deg must be within -90..90, got {lat_deg}")
    return sun_events_for_dates(lat_deg, lon_deg, [date], tz, method)[0]
