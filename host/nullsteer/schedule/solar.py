"""Solar declination, equation of time and rise/set hour angles, vectorised over days.

Two published ways of getting the sun's declination and the equation of time are
offered (:class:`SolarMethod`); both then use the same event equations of the NOAA
Global Monitoring Laboratory's "General Solar Position Calculations":

    cos(ha) = (cos z - sin(lat) sin(decl)) / (cos(lat) cos(decl))
    t_event = 720 - 4*(lon +/- ha) - eqtime     minutes after 00:00 UTC, lon east positive

with the zenith angle ``z`` = 90.833 deg for sunrise/sunset (refraction at the horizon
plus the solar semi-diameter) and 96 deg for civil dawn/dusk. Because declination and
equation of time depend on the instant, the event time is found at solar noon first
and then re-evaluated at the event itself (two refinements).

``SolarMethod.FRACTIONAL_YEAR``
    The NOAA GML page's own short Fourier series in the fractional year
    ``gamma = 2 pi / N (day_of_year - 1 + (hour - 12)/24)``. It does not follow the
    leap-year phase of the seasons, so near the equinoxes its declination can be off by
    up to about 0.5 deg; at 50-55 deg latitude that moves sunrise/sunset by 3-4 minutes.
``SolarMethod.MEEUS`` (default)
    The formulas behind NOAA GML's Solar Calculator, from J. Meeus, *Astronomical
    Algorithms* (2nd ed., 1998), ch. 25 (low-accuracy solar coordinates: mean longitude,
    mean anomaly, equation of centre, apparent longitude, obliquity) and ch. 28
    (equation of time). Declination is good to about 0.01 deg for 1900-2100, giving
    event times within about a minute outside the polar regions. UT is used for TT
    (Delta T of about a minute changes the results by well under a second).

A "solar day" is numbered by the UTC date ``d`` whose 00:00 UTC the event minutes are
counted from; its solar noon is near ``12:00 - lon/15 h`` UTC of ``d`` and its events lie
on either side of that noon, so consecutive UTC dates give consecutive events, none
missed and none twice (minutes may fall outside 0..1440 for large |lon|).
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Sequence
from enum import IntEnum, StrEnum

import numpy as np

#: Zenith angle of the sun's centre at sunrise/sunset, degrees (NOAA GML).
ZENITH_SUNRISE_DEG = 90.833
#: Zenith angle at civil dawn/dusk, degrees (sun centre 6 deg below the horizon).
ZENITH_CIVIL_DEG = 96.0

_UNIX_EPOCH_ORDINAL = dt.date(1970, 1, 1).toordinal()
#: Julian Day at 00:00 UTC of the day with proleptic Gregorian ordinal 0.
_JD_OF_ORDINAL_0 = 1721424.5
_JD_J2000 = 2451545.0


class SolarMethod(StrEnum):
    """Source of declination and equation of time (see the module docstring)."""

    MEEUS = "meeus"
    FRACTIONAL_YEAR = "fractional-year"


class SunState(IntEnum):
    """Outcome of one event on one solar day."""

    CROSSES = 0        #: the sun crosses the zenith angle: the event happens
    STAYS_ABOVE = 1    #: the sun stays above it all day (polar day / all-night twilight)
    STAYS_BELOW = -1   #: the sun stays below it all day (polar night)


Days = Sequence[int] | np.ndarray


def fractional_year_rad(day_ordinal: Days, minutes_utc: np.ndarray) -> np.ndarray:
    """NOAA fractional year gamma (rad) at ``minutes_utc`` after 00:00 UTC of each day.

    Parameters
    ----------
    day_ordinal : array of int
        UTC dates as proleptic Gregorian ordinals (``datetime.date.toordinal()``).
    minutes_utc : array of float
        Minutes after 00:00 UTC of each date.
    """
    days = (np.asarray(day_ordinal, dtype=np.int64) - _UNIX_EPOCH_ORDINAL).astype("datetime64[D]")
    years = days.astype("datetime64[Y]")
    first = years.astype("datetime64[D]")
    day_of_year = (days - first).astype(np.int64) + 1
    year_len = ((years + 1).astype("datetime64[D]") - first).astype(np.int64)
    hour = np.asarray(minutes_utc, dtype=float) / 60.0
    return 2.0 * np.pi / year_len * (day_of_year - 1 + (hour - 12.0) / 24.0)


def _series_decl_eqtime(gamma: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """NOAA GML fractional-year series: declination (rad), equation of time (min)."""
    g = gamma
    eqtime = 229.18 * (0.000075 + 0.001868 * np.cos(g) - 0.032077 * np.sin(g)
                       - 0.014615 * np.cos(2 * g) - 0.040849 * np.sin(2 * g))
    decl = (0.006918 - 0.399912 * np.cos(g) + 0.070257 * np.sin(g)
            - 0.006758 * np.cos(2 * g) + 0.000907 * np.sin(2 * g)
            - 0.002697 * np.cos(3 * g) + 0.00148 * np.sin(3 * g))
    return decl, eqtime


def _meeus_decl_eqtime(jd: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Meeus ch. 25/28: declination (rad), equation of time (min) at Julian Day ``jd``."""
    t = (jd - _JD_J2000) / 36525.0                          # Julian centuries from J2000
    mean_long = np.radians((280.46646 + t * (36000.76983 + 0.0003032 * t)) % 360.0)
    anomaly = np.radians(357.52911 + t * (35999.05029 - 0.0001537 * t))
    ecc = 0.016708634 - t * (0.000042037 + 0.0000001267 * t)
    centre_deg = ((1.914602 - t * (0.004817 + 0.000014 * t)) * np.sin(anomaly)
                  + (0.019993 - 0.000101 * t) * np.sin(2 * anomaly)
                  + 0.000289 * np.sin(3 * anomaly))
    node = np.radians(125.04 - 1934.136 * t)
    app_long = mean_long + np.radians(centre_deg - 0.00569 - 0.00478 * np.sin(node))
    eps0_deg = 23.0 + (26.0 + (21.448 - t * (46.815 + t * (0.00059 - 0.001813 * t))) / 60.0) / 60.0
    eps = np.radians(eps0_deg + 0.00256 * np.cos(node))
    decl = np.arcsin(np.sin(eps) * np.sin(app_long))
    y = np.tan(eps / 2.0) ** 2
    e_rad = (y * np.sin(2 * mean_long) - 2 * ecc * np.sin(anomaly)
             + 4 * ecc * y * np.sin(anomaly) * np.cos(2 * mean_long)
             - 0.5 * y * y * np.sin(4 * mean_long) - 1.25 * ecc * ecc * np.sin(2 * anomaly))
    return decl, 4.0 * np.degrees(e_rad)


def declination_eqtime(day_ordinal: Days, minutes_utc: np.ndarray,
                       method: SolarMethod = SolarMethod.MEEUS) -> tuple[np.ndarray, np.ndarray]:
    """Solar declination (rad) and equation of time (min) at the given UTC instants.

    Parameters
    ----------
    day_ordinal : array of int
        UTC dates as ordinals.
    minutes_utc : array of float
        Minutes after 00:00 UTC of each date (any real value).
    method : SolarMethod
        Which published formulas to use.
    """
    minutes = np.asarray(minutes_utc, dtype=float)
    if SolarMethod(method) == SolarMethod.FRACTIONAL_YEAR:
        return _series_decl_eqtime(fractional_year_rad(day_ordinal, minutes))
    jd = np.asarray(day_ordinal, dtype=float) + _JD_OF_ORDINAL_0 + minutes / 1440.0
    return _meeus_decl_eqtime(jd)


def solar_noon_minutes(lon_deg: float, day_ordinal: Days,
                       method: SolarMethod = SolarMethod.MEEUS) -> np.ndarray:
    """Solar noon of each solar day, minutes after 00:00 UTC: ``720 - 4 lon - eqtime``.

    Parameters
    ----------
    lon_deg : float
        Longitude, degrees, east positive.
    day_ordinal : array of int
        Solar days as UTC-date ordinals.
    method : SolarMethod
        Which published formulas to use.
    """
    ords = np.asarray(day_ordinal, dtype=np.int64)
    minutes = np.full(ords.shape, 720.0 - 4.0 * lon_deg)
    for _ in range(2):
        minutes = 720.0 - 4.0 * lon_deg - declination_eqtime(ords, minutes, method)[1]
    return minutes


def event_minutes(lat_deg: float, lon_deg: float, day_ordinal: Days, zenith_deg: float,
                  rising: bool, method: SolarMethod = SolarMethod.MEEUS,
                  refinements: int = 2) -> tuple[np.ndarray, np.ndarray]:
    """Time at which the sun's centre crosses ``zenith_deg`` on each solar day.

    Parameters
    ----------
    lat_deg, lon_deg : float
        Observer latitude (north positive, -90..90) and longitude (east positive), deg.
    day_ordinal : array of int
        Solar days as UTC-date ordinals.
    zenith_deg : float
        Zenith angle of the event (:data:`ZENITH_SUNRISE_DEG`, :data:`ZENITH_CIVIL_DEG`).
    rising : bool
        True for the morning crossing, False for the evening one.
    method : SolarMethod
        Which published formulas to use.
    refinements : int
        How often declination and equation of time are re-evaluated at the event time
        found so far (after two the change is far below a second).

    Returns
    -------
    minutes : ndarray of float
        Minutes after 00:00 UTC of each date; NaN where the event does not happen.
    state : ndarray of int
        :class:`SunState` per day, evaluated at the (would-be) event time.
    """
    ords = np.asarray(day_ordinal, dtype=np.int64)
    lat = np.radians(lat_deg)
    sign = 1.0 if rising else -1.0
    minutes = solar_noon_minutes(lon_deg, ords, method)
    cos_z = np.cos(np.radians(zenith_deg))
    for _ in range(refinements + 1):
        decl, eqtime = declination_eqtime(ords, minutes, method)
        cos_ha = (cos_z - np.sin(lat) * np.sin(decl)) / (np.cos(lat) * np.cos(decl))
        ha_deg = np.degrees(np.arccos(np.clip(cos_ha, -1.0, 1.0)))
        minutes = 720.0 - 4.0 * (lon_deg + sign * ha_deg) - eqtime
    state = np.where(cos_ha > 1.0, int(SunState.STAYS_BELOW),
                     np.where(cos_ha < -1.0, int(SunState.STAYS_ABOVE), int(SunState.CROSSES)))
    return np.where(state == int(SunState.CROSSES), minutes, np.nan), state


def utc_instant(day_ordinal: int, minutes_utc: float) -> dt.datetime:
    """Aware UTC datetime ``minutes_utc`` after 00:00 UTC of the day, to the second."""
    base = dt.datetime.combine(dt.date.fromordinal(int(day_ordinal)), dt.time(), dt.timezone.utc)
    return base + dt.timedelta(seconds=round(float(minutes_utc) * 60.0))
