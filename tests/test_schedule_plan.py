"""The schedule: rule times across DST, far regions, weekdays, polar skips, catch-up.

References: astral 3.2 (test-only) for sun events; the EU summer-time rule (Directive
2000/84/EC, Art. 1-2: clocks go forward on the last Sunday of March and back on the
last Sunday of October, both at 01:00 UTC) as encoded in tzdata for Europe/Dublin.
"""

from __future__ import annotations

import datetime as dt
import zoneinfo

import pytest
from astral import Observer
from astral import sun as asun

from nullsteer.station.config import load_station
from nullsteer.schedule.rules import in_force, in_force_by_device, parse_schedule, plan

DUBLIN = zoneinfo.ZoneInfo("Europe/Dublin")
SITE = '[site]\nlat_deg = 53.412\nlon_deg = -7.930\ntimezone = "Europe/Dublin"\n'
PRESETS = ('[presets]\nwest = { fed_end = "A", ohms = 900.0 }\n'
           'east = { fed_end = "B", ohms = 900.0 }\nfig8 = { open = true }\n')
DEVICES = '[[device]]\nid = "flag-ne"\n[[device]]\nid = "pennant-s"\n'


def make_station(tmp_path, rules: str, site: str = SITE):
    path = tmp_path / "station.toml"
    path.write_text(site + PRESETS + DEVICES + rules, encoding="utf-8")
    return load_station(path)


def local(*args) -> dt.datetime:
    return dt.datetime(*args, tzinfo=DUBLIN)


def test_fixed_time_rule_keeps_local_clock_across_both_dst_changes(tmp_path):
    # EU rule / tzdata: 2026-03-29 and 2026-10-25 are the change days in Dublin.
    st = make_station(tmp_path, '[[rule]]\nat = "07:00"\npreset = "east"\n')
    for first, change, hours in ((local(2026, 3, 27), dt.date(2026, 3, 29), 23),
                                 (local(2026, 10, 23), dt.date(2026, 10, 25), 25)):
        acts = plan(st, first, first + dt.timedelta(days=5)).actions
        assert len(acts) == 5
        assert all((a.when.hour, a.when.minute) == (7, 0) for a in acts)
        offsets = {a.when.date(): a.when.utcoffset() for a in acts}
        assert offsets[change - dt.timedelta(days=1)] != offsets[change]
        # real durations come from UTC instants: the change day is 23 h or 25 h long
        by_date = {a.when.date(): a.when for a in acts}
        span_s = by_date[change].timestamp() - by_date[change - dt.timedelta(days=1)].timestamp()
        assert span_s == hours * 3600


def test_time_in_spring_gap_moves_forward_by_the_gap(tmp_path):
    # tzdata: Dublin 2026-03-29 01:00 GMT -> 02:00 IST, so 01:30 does not exist that day;
    # documented behaviour: it becomes 02:30 IST (= 01:30 UTC).
    st = make_station(tmp_path, '[[rule]]\nat = "01:30"\npreset = "east"\n')
    acts = plan(st, local(2026, 3, 29), local(2026, 3, 30)).actions
    assert len(acts) == 1
    assert (acts[0].when.hour, acts[0].when.minute) == (2, 30)
    assert acts[0].when.astimezone(dt.timezone.utc).time() == dt.time(1, 30)


def test_sunset_rule_follows_the_sun_across_dst(tmp_path):
    # astral [reference library]: each action = astral's sunset (Dublin tz) - 30 min, +-2 min;
    # the wall-clock time jumps by about an hour on the change day, the sun does not.
    st = make_station(tmp_path, '[[rule]]\nat = "sunset"\noffset_min = -30\npreset = "west"\n')
    acts = plan(st, local(2026, 3, 26), local(2026, 4, 2)).actions
    assert len(acts) == 7
    obs = Observer(53.412, -7.930)
    for a in acts:
        ref = asun.sunset(obs, a.when.date(), tzinfo=DUBLIN) - dt.timedelta(minutes=30)
        assert abs((a.when - ref).total_seconds()) <= 120
        assert a.when.utcoffset() == ref.utcoffset()
    wall = {a.when.date(): a.when.hour * 60 + a.when.minute for a in acts}
    assert 58 <= wall[dt.date(2026, 3, 29)] - wall[dt.date(2026, 3, 28)] <= 63


def test_far_region_sunrise_rule(tmp_path):
    # astral [reference library]: a rule on the sunrise at 40.1 N 75.3 W fires at that
    # place's sunrise (shown on Dublin clocks), +-2 min, once per day.
    st = make_station(tmp_path, '[[rule]]\nat = "sunrise"\nwhere = { lat_deg = 40.1, '
                                'lon_deg = -75.3 }\npreset = "east"\n')
    acts = plan(st, local(2026, 1, 10), local(2026, 1, 20)).actions
    assert len(acts) == 10
    far = Observer(40.1, -75.3)
    ny = zoneinfo.ZoneInfo("America/New_York")
    for a in acts:
        ref = asun.sunrise(far, a.when.astimezone(ny).date(), tzinfo=ny)
        assert abs((a.when - ref).total_seconds()) <= 120
        assert a.when.utcoffset() == dt.timedelta(0)  # Dublin winter time
        assert a.basis.startswith("sunrise at 40.10 N, 75.30 W")


def test_far_region_east_of_site_keeps_one_action_per_solar_day(tmp_path):
    # astral [reference library]: Tokyo's sunrise is in the Irish evening; over 30 days
    # every one of its sunrises is planned once, none twice.
    st = make_station(tmp_path, '[[rule]]\nat = "sunrise"\nwhere = { lat_deg = 35.7, '
                                'lon_deg = 139.7 }\npreset = "east"\n')
    acts = plan(st, local(2026, 5, 1), local(2026, 5, 31)).actions
    tokyo = zoneinfo.ZoneInfo("Asia/Tokyo")
    dates = [a.when.astimezone(tokyo).date() for a in acts]
    assert len(dates) == len(set(dates)) == 30
    for a in acts:
        ref = asun.sunrise(Observer(35.7, 139.7), a.when.astimezone(tokyo).date(), tzinfo=tokyo)
        assert abs((a.when - ref).total_seconds()) <= 120


def test_weekday_filter_uses_local_weekday_of_the_action(tmp_path):
    # Gregorian calendar: 2026-03-28/29 and 2026-04-04/05 are Saturdays and Sundays.
    st = make_station(tmp_path, '[[rule]]\nat = "09:00"\ndays = ["sat", "sun"]\npreset = "east"\n'
                                '[[rule]]\nat = "23:50"\noffset_min = 20\ndays = ["tue"]\n'
                                'preset = "west"\n')
    acts = plan(st, local(2026, 3, 23), local(2026, 4, 6)).actions
    weekend = [a.when.date() for a in acts if a.rule_index == 0]
    assert weekend == [dt.date(2026, 3, 28), dt.date(2026, 3, 29),
                       dt.date(2026, 4, 4), dt.date(2026, 4, 5)]
    # 23:50 + 20 min lands at 00:10 the next day: the filter sees that day (Tuesday)
    late = [a.when for a in acts if a.rule_index == 1]
    assert [w.date() for w in late] == [dt.date(2026, 3, 24), dt.date(2026, 3, 31)]
    assert all((w.hour, w.minute) == (0, 10) for w in late)


POLAR_SITE = '[site]\nlat_deg = 78.2\nlon_deg = 15.6\ntimezone = "Arctic/Longyearbyen"\n'


def test_polar_night_skips_sun_rules_with_reason(tmp_path):
    # astral [reference library]: at 78.2 N in early December the sun does not rise
    # (astral raises ValueError); the fixed-time rule still fires every day.
    st = make_station(tmp_path, '[[rule]]\nat = "sunset"\npreset = "west"\n'
                                '[[rule]]\nat = "08:00"\npreset = "east"\n', site=POLAR_SITE)
    tz = zoneinfo.ZoneInfo("Arctic/Longyearbyen")
    start = dt.datetime(2026, 12, 1, tzinfo=tz)
    result = plan(st, start, start + dt.timedelta(days=7))
    assert [a.rule_index for a in result.actions] == [1] * 7
    skipped = [s for s in result.skipped if s.rule_index == 0]
    assert len(skipped) == 7
    for s in skipped:
        assert "polar night" in s.reason and s.reason.startswith("sunset:")
        with pytest.raises(ValueError):
            asun.sunset(Observer(78.2, 15.6), s.date, tzinfo=tz)


def test_catch_up_in_polar_night_finds_the_last_sunset(tmp_path):
    # astral [reference library], sun position: the in-force action on 2026-12-10 at
    # 78.2 N is the last sunset before the polar night (late October), weeks back; at its
    # time astral puts the sun's centre at the sunset zenith 90.833 deg (+-0.01 deg).
    st = make_station(tmp_path, '[[rule]]\nat = "sunset"\npreset = "west"\n', site=POLAR_SITE)
    tz = zoneinfo.ZoneInfo("Arctic/Longyearbyen")
    now = dt.datetime(2026, 12, 10, 12, 0, tzinfo=tz)
    act = in_force(st, now)
    assert act is not None and act.preset == "west"
    assert dt.datetime(2026, 10, 15, tzinfo=tz) < act.when < dt.datetime(2026, 11, 5, tzinfo=tz)
    z = asun.zenith(Observer(78.2, 15.6), act.when, with_refraction=False)
    assert abs(z - 90.833) < 0.01


def test_catch_up_picks_latest_action_at_or_before_now(tmp_path):
    # astral [reference library]: with a far-region sunrise rule (east) and a site sunset
    # rule (west), mid-afternoon the sunrise action is in force, late evening the sunset one.
    st = make_station(tmp_path, '[[rule]]\nat = "sunset"\noffset_min = -30\npreset = "west"\n'
                                '[[rule]]\nat = "sunrise"\nwhere = { lat_deg = 40.1, '
                                'lon_deg = -75.3 }\npreset = "east"\ndevice = "flag-ne"\n')
    obs = Observer(53.412, -7.930)
    day = dt.date(2026, 3, 27)
    afternoon = in_force(st, local(2026, 3, 27, 15, 0))
    ny = zoneinfo.ZoneInfo("America/New_York")
    far_rise = asun.sunrise(Observer(40.1, -75.3), day, tzinfo=ny)
    assert afternoon.preset == "east"
    assert abs((afternoon.when - far_rise).total_seconds()) <= 120
    evening = in_force(st, local(2026, 3, 27, 22, 0))
    sunset_30 = asun.sunset(obs, day, tzinfo=DUBLIN) - dt.timedelta(minutes=30)
    assert evening.preset == "west" and abs((evening.when - sunset_30).total_seconds()) <= 120
    # an action exactly at "now" is in force
    assert in_force(st, evening.when) == evening
    # per device: the pennant only gets the sunset rule
    per_dev = in_force_by_device(st, local(2026, 3, 27, 15, 0))
    assert per_dev["flag-ne"].preset == "east"
    assert per_dev["pennant-s"].preset == "west"
    assert per_dev["pennant-s"].when.date() == dt.date(2026, 3, 26)


def test_plan_window_is_half_open_and_sorted(tmp_path):
    # Interval convention (common practice): [start, end); actions in time order.
    st = make_station(tmp_path, '[[rule]]\nat = "07:00"\npreset = "east"\n'
                                '[[rule]]\nat = "sunset"\npreset = "west"\n')
    sched = parse_schedule(st)
    acts = plan(sched, local(2026, 6, 1, 7, 0), local(2026, 6, 3, 7, 0)).actions
    assert [a.rule_index for a in acts] == [0, 1, 0, 1]
    assert all(x.when < y.when for x, y in zip(acts, acts[1:]))
    assert all(a.device_ids == ("flag-ne", "pennant-s") for a in acts)


def test_naive_datetimes_rejected(tmp_path):
    # PITFALLS (time): naive datetimes are ambiguous; the planner wants aware ones.
    st = make_station(tmp_path, '[[rule]]\nat = "07:00"\npreset = "east"\n')
    with pytest.raises(ValueError):
        plan(st, dt.datetime(2026, 1, 1), dt.datetime(2026, 1, 2))
