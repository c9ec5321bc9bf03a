"""Sun events against published almanac values and against astral (test-only reference).

Sources:
- The USNO sunrise/sunset algorithm (Nautical Almanac Office, *Almanac for Computers*,
  1990: the published step-by-step method with the 90°50' zenith), written out below
  from its published steps and used only here; Washington DC 2002-03-20 gives
  11:11:58 / 23:19:48 UTC (the 23:21 sunset once quoted from memory does not reproduce).
- astral 3.2 (independent implementation of the NOAA solar calculator), used only here.
  astral needs the local date *and* tzinfo (a bare date is a UTC date) and raises
  ValueError when the event does not happen.
"""

from __future__ import annotations

import datetime as dt
import math
import zoneinfo

import pytest
from astral import Observer
from astral import sun as asun

from nullsteer.schedule.solar import SolarMethod
from nullsteer.schedule.sun import SunEvent, sun_events, sun_events_for_dates

UTC = dt.timezone.utc


def minutes_apart(a: dt.datetime, b: dt.datetime) -> float:
    return abs((a - b).total_seconds()) / 60.0


def astral_event(event: SunEvent, obs: Observer, date: dt.date, tz: dt.tzinfo) -> dt.datetime | None:
    fn = {SunEvent.DAWN: asun.dawn, SunEvent.SUNRISE: asun.sunrise,
          SunEvent.SUNSET: asun.sunset, SunEvent.DUSK: asun.dusk}[event]
    try:
        return fn(obs, date, tzinfo=tz)
    except ValueError:
        return None


# --- published values --------------------------------------------------------------

def usno_event_utc_hours(lat_deg: float, lon_deg: float, date: dt.date, rising: bool,
                         zenith_deg: float = 90.0 + 50.0 / 60.0) -> float:
    """The USNO almanac algorithm (Almanac for Computers, 1990), step by step."""
    day = date.timetuple().tm_yday
    lng_hour = lon_deg / 15.0
    t = day + ((6.0 if rising else 18.0) - lng_hour) / 24.0
    m = 0.9856 * t - 3.289                                  # mean anomaly, deg
    sun_lon = (m + 1.916 * math.sin(math.radians(m)) + 0.020 * math.sin(math.radians(2 * m))
               + 282.634) % 360.0                           # true longitude, deg
    ra = math.degrees(math.atan(0.91764 * math.tan(math.radians(sun_lon)))) % 360.0
    ra = (ra + (math.floor(sun_lon / 90.0) - math.floor(ra / 90.0)) * 90.0) / 15.0
    sin_dec = 0.39782 * math.sin(math.radians(sun_lon))
    cos_dec = math.cos(math.asin(sin_dec))
    cos_h = ((math.cos(math.radians(zenith_deg)) - sin_dec * math.sin(math.radians(lat_deg)))
             / (cos_dec * math.cos(math.radians(lat_deg))))
    h = math.degrees(math.acos(cos_h))
    h = (360.0 - h if rising else h) / 15.0
    local_mean = h + ra - 0.06571 * t - 6.622
    return (local_mean - lng_hour) % 24.0


def test_usno_algorithm_as_written_reproduces_its_washington_case():
    # The algorithm above for Washington DC, 38.9 N 77.0 W, 2002-03-20: 11:11:58 and
    # 23:19:48 UTC (REFERENCES.md, corrected value), to the second.
    rise = usno_event_utc_hours(38.9, -77.0, dt.date(2002, 3, 20), True)
    sset = usno_event_utc_hours(38.9, -77.0, dt.date(2002, 3, 20), False)
    assert rise * 3600 == pytest.approx(11 * 3600 + 11 * 60 + 58, abs=1.0)
    assert sset * 3600 == pytest.approx(23 * 3600 + 19 * 60 + 48, abs=1.0)


# Tolerances from the methods' accuracy: the USNO algorithm is good to about a minute
# (its published claim, from memory) and Meeus's low-precision solar coordinates to well
# under that, so Meeus is held to 1 min; NOAA's fractional-year series is coarser (its
# declination is off by up to ~0.02° near the equinoxes, from memory), 2 min.
SUN_TOLERANCE_MIN = {SolarMethod.MEEUS: 1.0, SolarMethod.FRACTIONAL_YEAR: 2.0}


@pytest.mark.parametrize("method", list(SolarMethod))
@pytest.mark.parametrize("lat, lon, date", [
    (38.9, -77.0, dt.date(2002, 3, 20)),    # the Washington case
    (38.9, -77.0, dt.date(2002, 6, 21)),
    (-33.9, 18.4, dt.date(2011, 9, 1)),
    (51.5, -0.13, dt.date(2015, 12, 1)),
])
def test_sunrise_sunset_against_the_usno_algorithm(method, lat, lon, date):
    ev = sun_events(lat, lon, date, UTC, method)
    base = dt.datetime.combine(date, dt.time(), UTC)
    for got, rising in ((ev.sunrise, True), (ev.sunset, False)):
        hours = usno_event_utc_hours(lat, lon, date, rising)
        want = base + dt.timedelta(hours=hours)
        if abs((got - want).total_seconds()) > 12 * 3600:   # the UTC day wraps
            want += dt.timedelta(days=1 if got > want else -1)
        assert minutes_apart(got, want) <= SUN_TOLERANCE_MIN[method], (rising, got, want)


def test_london_2015_12_01():
    # astral's published test data [pub], London 51.5085 N 0.1257 W, 2015-12-01:
    # sunrise 07:43, sunset 15:55 UTC, +-2 min. Asked in Europe/London (GMT that day).
    ev = sun_events(51.5085, -0.1257, dt.date(2015, 12, 1), "Europe/London")
    assert ev.sunrise.utcoffset() == dt.timedelta(0)
    assert minutes_apart(ev.sunrise, dt.datetime(2015, 12, 1, 7, 43, tzinfo=UTC)) <= 2.0
    assert minutes_apart(ev.sunset, dt.datetime(2015, 12, 1, 15, 55, tzinfo=UTC)) <= 2.0


# --- against astral: mid latitudes -------------------------------------------------

MID_SITES = [  # (lat, lon, zone): invented points near real places, zones from tzdata
    (0.0, 0.0, "UTC"),
    (38.9, -77.0, "America/New_York"),
    (53.4, -7.9, "Europe/Dublin"),
    (-33.9, 151.2, "Australia/Sydney"),
    (35.7, 139.7, "Asia/Tokyo"),
    (21.3, -157.8, "Pacific/Honolulu"),
    (-41.3, 174.8, "Pacific/Auckland"),
    (-54.8, -68.3, "America/Argentina/Ushuaia"),
    (1.9, -157.4, "Pacific/Kiritimati"),      # UTC+14: local date far from the UTC date
]
DATES = [dt.date(2023, 1, 1) + dt.timedelta(days=k) for k in range(0, 3 * 365, 11)]


@pytest.mark.parametrize("lat,lon,zone", MID_SITES)
def test_all_events_match_astral_mid_latitudes(lat, lon, zone):
    # astral [reference library]: every event within +-2 min, for |lat| <= 55 deg,
    # and the same local date (DST-correct via zoneinfo in both). Higher up, civil
    # twilight near the solstice skims -6 deg and astral's single-pass times drift
    # (59.9 N: 2.1 min, with astral's own zenith at its time 0.055 deg off): see the
    # geometric check below.
    tz = zoneinfo.ZoneInfo(zone)
    obs = Observer(lat, lon)
    checked = 0
    for ours in sun_events_for_dates(lat, lon, DATES, tz):
        for event in SunEvent:
            ref = astral_event(event, obs, ours.date, tz)
            mine = ours.get(event)
            assert (ref is None) == (mine is None), (ours.date, event)
            if ref is None:
                continue
            assert mine.date() == ours.date
            assert mine.utcoffset() == ref.utcoffset()
            assert minutes_apart(mine, ref) <= 2.0, (ours.date, event, mine, ref)
            checked += 1
    assert checked > 0.9 * 4 * len(DATES)


@pytest.mark.parametrize("lat,lon,zone", MID_SITES[:7])
def test_sunrise_sunset_within_one_minute_below_56_deg(lat, lon, zone):
    # astral [reference library]: the accuracy claimed in nullsteer.schedule.solar (about a minute).
    tz = zoneinfo.ZoneInfo(zone)
    obs = Observer(lat, lon)
    for ours in sun_events_for_dates(lat, lon, DATES, tz):
        assert minutes_apart(ours.sunrise, asun.sunrise(obs, ours.date, tzinfo=tz)) <= 1.0
        assert minutes_apart(ours.sunset, asun.sunset(obs, ours.date, tzinfo=tz)) <= 1.0


def test_fractional_year_series_within_five_minutes():
    # astral [reference library]: the NOAA GML fractional-year series is coarser
    # (declination off by up to ~0.5 deg near the equinoxes, see nullsteer.schedule.solar);
    # at 53.4 N it stays within 5 min.
    tz = zoneinfo.ZoneInfo("Europe/Dublin")
    obs = Observer(53.4, -7.9)
    for ours in sun_events_for_dates(53.4, -7.9, DATES, tz, SolarMethod.FRACTIONAL_YEAR):
        assert minutes_apart(ours.sunrise, asun.sunrise(obs, ours.date, tzinfo=tz)) <= 5.0
        assert minutes_apart(ours.sunset, asun.sunset(obs, ours.date, tzinfo=tz)) <= 5.0


def test_solar_noon_and_day_length_match_astral():
    # astral [reference library]: solar noon +-1 min; day length = astral sunset - sunrise
    # +-2 min (durations from UTC instants, not wall clocks).
    tz = zoneinfo.ZoneInfo("America/New_York")
    obs = Observer(38.9, -77.0)
    for ours in sun_events_for_dates(38.9, -77.0, DATES, tz):
        assert minutes_apart(ours.solar_noon, asun.noon(obs, ours.date, tzinfo=tz)) <= 1.0
        rise = asun.sunrise(obs, ours.date, tzinfo=tz)
        set_ = asun.sunset(obs, ours.date, tzinfo=tz)
        ref_s = set_.timestamp() - rise.timestamp()
        assert abs(ours.day_length_s - ref_s) <= 120.0


# --- high latitudes ----------------------------------------------------------------

HIGH_SITES = [(59.9, 10.7, "Europe/Oslo"), (64.1, -21.9, "Atlantic/Reykjavik"), (66.5, 25.7, "Europe/Helsinki"),
              (69.65, 18.96, "Europe/Oslo"), (78.2, 15.6, "Arctic/Longyearbyen"),
              (-77.8, 166.7, "Antarctica/McMurdo")]
YEAR = [dt.date(2024, 1, 1) + dt.timedelta(days=k) for k in range(366)]


@pytest.mark.parametrize("lat,lon,zone", HIGH_SITES)
def test_high_latitude_events_are_real_crossings(lat, lon, zone):
    # astral [reference library], sun position: near polar transitions event *times*
    # are ill-conditioned (the sun skims the horizon) and astral's own date search gives
    # up on some days, so check the geometry instead. At every event we report, astral's
    # geometric zenith angle is the event's (90.833 or 96 deg) within 0.01 deg; on a day
    # we call polar, the sun's extreme zenith at solar noon/midnight is on the stated
    # side of it (margin 0.01 deg).
    tz = zoneinfo.ZoneInfo(zone)
    obs = Observer(lat, lon)
    events_seen = polar_seen = 0
    for ours in sun_events_for_dates(lat, lon, YEAR, tz):
        for event in SunEvent:
            when = ours.get(event)
            if when is not None:
                assert when.date() == ours.date
                z = asun.zenith(obs, when, with_refraction=False)
                assert abs(z - event.zenith_deg) < 0.01, (ours.date, event, z)
                events_seen += 1
                continue
            reason = ours.reason(event)
            midnight = ours.solar_noon + dt.timedelta(hours=-12 if event.rising else 12)
            if "stays below" in reason:
                assert asun.zenith(obs, ours.solar_noon, with_refraction=False) > event.zenith_deg - 0.01
                polar_seen += 1
            elif "stays above" in reason:
                assert asun.zenith(obs, midnight, with_refraction=False) < event.zenith_deg + 0.01
                polar_seen += 1
            else:
                assert "on this local date" in reason
    assert events_seen > 300
    if abs(lat) > 63.0:  # beyond ~63.5 deg civil twilight lasts all night near the solstice
        assert polar_seen > 0


@pytest.mark.parametrize("lat,lon,zone", HIGH_SITES[:4])
def test_high_latitude_times_match_astral_away_from_transitions(lat, lon, zone):
    # astral [reference library]: +-2 min on the days where both find the event and the
    # sun crosses the horizon steeply enough (day length between 4 and 20 h).
    tz = zoneinfo.ZoneInfo(zone)
    obs = Observer(lat, lon)
    compared = 0
    for ours in sun_events_for_dates(lat, lon, YEAR, tz):
        if not 4 * 3600 <= ours.day_length_s <= 20 * 3600:
            continue
        for event in (SunEvent.SUNRISE, SunEvent.SUNSET):
            ref = astral_event(event, obs, ours.date, tz)
            assert ref is not None and ours.get(event) is not None
            assert minutes_apart(ours.get(event), ref) <= 2.0, (ours.date, event)
            compared += 1
    assert compared > 200


@pytest.mark.parametrize("day, side, name, length_s", [
    # Common practice / astral: at 78.2 N on the December solstice the sun stays more
    # than 6 deg below the horizon (noon elevation 90 - 78.2 - 23.4 = -11.6 deg) ...
    (dt.date(2024, 12, 21), "stays below", "polar night", 0.0),
    # ... and on the June solstice it stays up (midnight elevation 23.4 - 11.8 = +11.6
    # deg). astral raises ValueError for every event in both cases.
    (dt.date(2024, 6, 21), "stays above", "polar day", 86400.0),
])
def test_polar_night_and_day_78n(day, side, name, length_s):
    tz = zoneinfo.ZoneInfo("Arctic/Longyearbyen")
    ev = sun_events(78.2, 15.6, day, tz)
    for event in SunEvent:
        assert ev.get(event) is None
        assert side in ev.reason(event)
        assert astral_event(event, Observer(78.2, 15.6), day, tz) is None
    assert name in ev.reason(SunEvent.SUNRISE) and name in ev.reason(SunEvent.SUNSET)
    assert ev.day_length_s == length_s


def test_white_night_60n_has_sunset_but_no_dusk():
    # Common practice (white nights) / astral: at 65 N on the June solstice the sun's
    # midnight elevation is 23.4 - 25 = -1.6 deg: it sets, but never sinks to -6 deg.
    tz = zoneinfo.ZoneInfo("Europe/Helsinki")
    day = dt.date(2024, 6, 21)
    ev = sun_events(65.0, 25.5, day, tz)
    assert ev.sunset is not None and ev.sunrise is not None
    assert ev.dusk is None and "civil twilight all night" in ev.reason(SunEvent.DUSK)
    assert astral_event(SunEvent.DUSK, Observer(65.0, 25.5), day, tz) is None


# --- local dates and DST -----------------------------------------------------------

def test_dst_change_dublin_local_times():
    # astral [reference library] + tzdata: on 2024-03-31 Irish clocks go forward at
    # 01:00 UTC; that day's sunrise is reported with the summer offset +01:00 and
    # matches astral, the day before has +00:00.
    tz = zoneinfo.ZoneInfo("Europe/Dublin")
    obs = Observer(53.4, -7.9)
    before, after = sun_events_for_dates(53.4, -7.9, [dt.date(2024, 3, 30), dt.date(2024, 3, 31)], tz)
    assert before.sunrise.utcoffset() == dt.timedelta(0)
    assert after.sunrise.utcoffset() == dt.timedelta(hours=1)
    for ev in (before, after):
        assert minutes_apart(ev.sunrise, asun.sunrise(obs, ev.date, tzinfo=tz)) <= 2.0
    # the wall clock jumps by about an hour, the real interval by about a day
    wall = (after.sunrise.hour * 60 + after.sunrise.minute) - (before.sunrise.hour * 60 + before.sunrise.minute)
    assert 55 <= wall <= 60
    real = (after.sunrise.timestamp() - before.sunrise.timestamp()) / 60.0
    assert 1436 <= real <= 1440


def test_far_region_in_site_zone_falls_on_requested_date():
    # astral [reference library]: Tokyo's sunrise seen from Dublin happens the evening
    # before by Irish clocks; each Irish date gets the sunrise that falls on it.
    tz = zoneinfo.ZoneInfo("Europe/Dublin")
    obs = Observer(35.7, 139.7)
    for ours in sun_events_for_dates(35.7, 139.7, DATES[:40], tz):
        ref = asun.sunrise(obs, ours.date, tzinfo=tz)
        assert ours.sunrise.date() == ours.date == ref.date()
        assert ours.sunrise.hour >= 18
        assert minutes_apart(ours.sunrise, ref) <= 2.0


def test_latitude_out_of_range_rejected():
    # Geographic fact: latitude is within -90..90 deg.
    with pytest.raises(ValueError):
        sun_events(90.5, 0.0, dt.date(2024, 1, 1), UTC)
