"""Rules and the schedule: which preset to put on which device, and when.

Each ``[[rule]]`` of the station file names a moment and a preset::

    [[rule]]
    at = "sunset"            # sunrise | sunset | dawn | dusk | "HH:MM" (site-local clock)
    offset_min = -30         # minutes added to that moment (-720..720, default 0)
    where = { lat_deg = 40.1, lon_deg = -75.3 }   # optional: a far region's sun event
    days = ["sat", "sun"]    # optional: site-local weekday of the action
    preset = "dx-west"       # must be defined in [presets]
    device = "flag-ne"       # optional: a [[device]] id, or a list of ids; default all

``dawn``/``dusk`` are civil dawn/dusk. Sun events are those of the site, or of
``where`` (greyline toward a far region); either way every crossing of the sun is used
exactly once, in time order (see :func:`nullsteer.schedule.sun.solar_day_events`). When the sun
does not cross on a day (polar day or night at the place), the rule is skipped for
that day and the skip is returned with its reason (and logged at INFO level).

Time handling: a ``"HH:MM"`` rule is a wall-clock time in the site's zone, so ``07:00``
stays at 07:00 local across a DST change. A time that does not exist on the day of a
spring-forward change (inside the gap) is moved forward by the gap (01:30 becomes 02:30
where clocks jump 01:00 -> 02:00); an ambiguous autumn time takes its first occurrence.
Offsets are real durations, added in UTC. Actions carry aware datetimes in the site zone.
"""

from __future__ import annotations

import datetime as dt
import logging
import re
from collections.abc import Iterable
from dataclasses import dataclass
from typing import Any

from nullsteer.station.config import Station, get_str
from nullsteer.errors import ConfigError
from nullsteer.station.presets import Preset, Target, parse_presets, resolve_target
from nullsteer.station.schema import REQUIRED, Key, Kind, Section
from nullsteer.station.site import PLACE, Site, parse_site, read_lat_lon
from nullsteer.schedule.solar import solar_noon_minutes, utc_instant
from nullsteer.schedule.sun import SunEvent, missing_reason, solar_day_events

log = logging.getLogger(__name__)

WEEKDAYS = ("mon", "tue", "wed", "thu", "fri", "sat", "sun")
_HHMM = re.compile(r"^([01]?\d|2[0-3]):([0-5]\d)$")
_MAX_OFFSET_MIN = 720.0
RULE = Section("rule", "One scheduled action: at a sun event (at the site, or at a far region "
               "given by `where`) or a fixed site-local time, put the devices in a preset. "
               "The rule in force now is applied when the service starts.", (
    Key("at", Kind.STRING, "`sunrise`, `sunset`, `dawn` (civil), `dusk` (civil) or a "
        "site-local time `HH:MM`.", default=REQUIRED),
    Key("offset_min", Kind.NUMBER, "Minutes added to the moment (negative: before).", "min",
        0.0, -_MAX_OFFSET_MIN, _MAX_OFFSET_MIN),
    Key("where", Kind.TABLE, "Far region for the sun event: `{ lat_deg = ..., lon_deg = ... }` "
        "(see `rule.where`); default the site."),
    Key("days", Kind.LIST, "Site-local weekdays the rule acts on, e.g. `[\"sat\", \"sun\"]` "
        f"({', '.join(WEEKDAYS)}); default every day."),
    Key("preset", Kind.STRING, "Name of a preset of `[presets]`.", default=REQUIRED),
    Key("device", Kind.ANY, "Device id or list of ids of `[[device]]`; default all devices."),
), form="array")
_UTC = dt.timezone.utc
#: How far :func:`in_force` looks back: first a few days, then (polar sites, where sun
#: rules may pause for months) up to a little over a year.
LOOKBACK_DAYS = (3, 400)


@dataclass(frozen=True)
class Rule:
    """One parsed ``[[rule]]``.

    Attributes
    ----------
    index : int
        Position in the file, counting from 0 (``rule[0]`` in error messages).
    event : SunEvent or None
        Sun event the rule follows; None for a fixed clock time.
    clock : datetime.time or None
        Site-local clock time for a fixed-time rule.
    offset_min : float
        Minutes added to the moment (a real duration).
    where : tuple of (lat_deg, lon_deg) or None
        Place of the sun event; None for the site.
    weekdays : frozenset of int or None
        Site-local weekdays (0 = Monday) on which the action may happen; None = every day.
    preset : str
        Preset name.
    devices : tuple of str
        Device ids the action goes to.
    """

    index: int
    event: SunEvent | None
    clock: dt.time | None
    offset_min: float
    where: tuple[float, float] | None
    weekdays: frozenset[int] | None
    preset: str
    devices: tuple[str, ...]

    def describe(self) -> str:
        """Short text such as ``"sunset -30 min"`` or ``"sunrise at 40.10 N, 75.30 W"``."""
        base = self.event.value if self.event else f"{self.clock:%H:%M} local"
        if self.where:
            lat, lon = self.where
            base += (f" at {abs(lat):.2f} {'N' if lat >= 0 else 'S'}, "
                     f"{abs(lon):.2f} {'E' if lon >= 0 else 'W'}")
        if self.offset_min:
            base += f" {self.offset_min:+g} min"
        return base


@dataclass(frozen=True)
class Schedule:
    """Everything :func:`plan` needs, parsed once from a station file."""

    site: Site
    presets: dict[str, Preset]
    rules: tuple[Rule, ...]
    device_ids: tuple[str, ...]


@dataclass(frozen=True)
class Action:
    """A planned preset change.

    Attributes
    ----------
    when : datetime
        Aware, in the site's zone.
    rule_index : int
        The rule that produced it.
    preset : str
        Preset name.
    device_ids : tuple of str
        Devices to set.
    target : Target
        The absolute state (resolved at the frequency given to :func:`plan`).
    basis : str
        What the time follows, e.g. ``"sunset -30 min"``.
    """

    when: dt.datetime
    rule_index: int
    preset: str
    device_ids: tuple[str, ...]
    target: Target
    basis: str

    def to_json(self) -> dict[str, Any]:
        return {"when": self.when.isoformat(), "rule": self.rule_index, "preset": self.preset,
                "devices": list(self.device_ids), "target": self.target.to_json(),
                "basis": self.basis}


@dataclass(frozen=True)
class Skipped:
    """A day on which a sun rule does not fire.

    Attributes
    ----------
    date : datetime.date
        Site-local date (of the solar noon of that solar day at the rule's place).
    rule_index : int
        The rule.
    preset : str
        Its preset.
    reason : str
        Why, e.g. ``"sunset: sun stays below the horizon all day (polar night)"``.
    """

    date: dt.date
    rule_index: int
    preset: str
    reason: str

    def to_json(self) -> dict[str, Any]:
        return {"date": self.date.isoformat(), "rule": self.rule_index, "preset": self.preset,
                "reason": self.reason}


@dataclass(frozen=True)
class Plan:
    """Result of :func:`plan`: the actions in time order and the skipped rule-days."""

    start: dt.datetime
    end: dt.datetime
    actions: list[Action]
    skipped: list[Skipped]


def _device_ids(station: Station) -> tuple[str, ...]:
    return tuple(get_str(dev, "id", f"device[{i}]") for i, dev in enumerate(station.array("device")))


def _parse_at(table: dict[str, Any], where: str) -> tuple[SunEvent | None, dt.time | None]:
    text = RULE.get(table, "at", where)
    if text in {e.value for e in SunEvent}:
        return SunEvent(text), None
    m = _HHMM.match(text)
    if not m:
        raise ConfigError(f"{where}.at", "must be sunrise, sunset, dawn, dusk or a time "
                                         f"HH:MM, got {text!r}")
    return None, dt.time(int(m.group(1)), int(m.group(2)))


def _parse_days(value: Any, key: str) -> frozenset[int]:
    if not isinstance(value, list) or not value:
        raise ConfigError(key, f"must be a non-empty list such as [\"sat\", \"sun\"], got {value!r}")
    days = set()
    for v in value:
        if not isinstance(v, str) or v.lower() not in WEEKDAYS:
            raise ConfigError(key, f"unknown weekday {v!r} (expected {', '.join(WEEKDAYS)})")
        days.add(WEEKDAYS.index(v.lower()))
    return frozenset(days)


def _parse_devices(value: Any, key: str, known: tuple[str, ...]) -> tuple[str, ...]:
    ids = [value] if isinstance(value, str) else value
    if not isinstance(ids, list) or not ids or not all(isinstance(v, str) for v in ids):
        raise ConfigError(key, f"must be a device id or a list of ids, got {value!r}")
    for v in ids:
        if v not in known:
            defined = ", ".join(known) if known else "none"
            raise ConfigError(key, f"unknown device {v!r} (defined in [[device]]: {defined})")
    return tuple(dict.fromkeys(ids))


def parse_rule(index: int, table: dict[str, Any], presets: dict[str, Preset],
               device_ids: tuple[str, ...]) -> Rule:
    """Parse the ``index``-th ``[[rule]]``; errors name ``rule[index].<key>``."""
    where = f"rule[{index}]"
    RULE.check(table, where)
    event, clock = _parse_at(table, where)
    offset = RULE.get(table, "offset_min", where)
    place = None
    if "where" in table:
        if event is None:
            raise ConfigError(f"{where}.where", "only applies to sun events (at = sunrise, ...)")
        if not isinstance(table["where"], dict):
            raise ConfigError(f"{where}.where", "must be a table { lat_deg = ..., lon_deg = ... }")
        PLACE.check(table["where"], f"{where}.where")
        place = read_lat_lon(table["where"], f"{where}.where")
    weekdays = _parse_days(table["days"], f"{where}.days") if "days" in table else None
    preset = RULE.get(table, "preset", where)
    if preset not in presets:
        defined = ", ".join(presets) if presets else "none"
        raise ConfigError(f"{where}.preset", f"unknown preset {preset!r} (defined: {defined})")
    devices = (_parse_devices(table["device"], f"{where}.device", device_ids)
               if "device" in table else device_ids)
    return Rule(index, event, clock, offset, place, weekdays, preset, devices)


def parse_schedule(station: Station) -> Schedule:
    """Parse ``[site]``, ``[presets]``, the ``[[device]]`` ids and every ``[[rule]]``."""
    site = parse_site(station)
    presets = parse_presets(station)
    device_ids = _device_ids(station)
    rules = tuple(parse_rule(i, t, presets, device_ids) for i, t in enumerate(station.array("rule")))
    return Schedule(site, presets, rules, device_ids)


def _sun_moments(rule: Rule, site: Site, lo: dt.datetime, hi: dt.datetime
                 ) -> Iterable[tuple[dt.datetime, str | None]]:
    """(UTC instant, None) per crossing, or (nominal instant, reason) per missing one."""
    assert rule.event is not None
    lat, lon = rule.where or (site.lat_deg, site.lon_deg)
    first = lo.astimezone(_UTC).date().toordinal() - 2
    n = hi.astimezone(_UTC).date().toordinal() + 2 - first
    noons = solar_noon_minutes(lon, range(first, first + n))
    for item, noon_min in zip(solar_day_events(lat, lon, first, n, rule.event), noons):
        if item.when is not None:
            yield item.when, None
        else:
            reason = f"{rule.event.value}: {missing_reason(rule.event, item.state)}"
            yield utc_instant(item.day_ordinal, noon_min), reason


def _clock_moments(rule: Rule, zone: dt.tzinfo, lo: dt.datetime, hi: dt.datetime
                   ) -> Iterable[tuple[dt.datetime, str | None]]:
    assert rule.clock is not None
    day = lo.astimezone(zone).date() - dt.timedelta(days=1)
    last = hi.astimezone(zone).date() + dt.timedelta(days=1)
    while day <= last:
        # fold=0: first occurrence of an ambiguous time; a time in a spring gap comes out
        # shifted forward by the gap once normalised through UTC.
        yield dt.datetime.combine(day, rule.clock, zone).astimezone(_UTC), None
        day += dt.timedelta(days=1)


def _rule_plan(rule: Rule, sched: Schedule, start: dt.datetime, end: dt.datetime,
               freq_hz: float | None) -> tuple[list[Action], list[Skipped]]:
    zone = sched.site.tz
    offset = dt.timedelta(minutes=rule.offset_min)
    lo, hi = start - offset, end - offset
    moments = (_sun_moments(rule, sched.site, lo, hi) if rule.event
               else _clock_moments(rule, zone, lo, hi))
    target = resolve_target(sched.presets[rule.preset], freq_hz)
    actions, skipped = [], []
    for base, reason in moments:
        when = (base + offset).astimezone(zone)
        if not start <= when < end:
            continue
        if rule.weekdays is not None and when.weekday() not in rule.weekdays:
            continue
        if reason is None:
            actions.append(Action(when, rule.index, rule.preset, rule.devices, target,
                                  rule.describe()))
        else:
            skipped.append(Skipped(base.astimezone(zone).date(), rule.index, rule.preset,
                                   reason))
    return actions, skipped


def _as_schedule(source: Station | Schedule) -> Schedule:
    return source if isinstance(source, Schedule) else parse_schedule(source)


def _check_aware(value: dt.datetime, name: str) -> None:
    if value.tzinfo is None or value.utcoffset() is None:
        raise ValueError(f"{name} must be an aware datetime (with a time zone)")


def plan(source: Station | Schedule, start: dt.datetime, end: dt.datetime,
         freq_hz: float | None = None) -> Plan:
    """All actions with ``start <= when < end``, in time order, plus the skipped days.

    Parameters
    ----------
    source : Station or Schedule
        A loaded station file, or a :class:`Schedule` parsed from one.
    start, end : datetime
        Aware datetimes bounding the window (``end`` excluded).
    freq_hz : float or None
        Receive frequency, Hz, for per-band presets; None uses each preset's default.
    """
    _check_aware(start, "start")
    _check_aware(end, "end")
    sched = _as_schedule(source)
    actions: list[Action] = []
    skipped: list[Skipped] = []
    for rule in sched.rules:
        rule_actions, rule_skips = _rule_plan(rule, sched, start, end, freq_hz)
        actions += rule_actions
        skipped += rule_skips
    actions.sort(key=lambda x: (x.when.timestamp(), x.rule_index))
    skipped.sort(key=lambda x: (x.date, x.rule_index))
    for skip in skipped:
        log.info("rule %d (%s) skipped on %s: %s", skip.rule_index, skip.preset, skip.date,
                 skip.reason)
    return Plan(start, end, actions, skipped)


def in_force(source: Station | Schedule, now: dt.datetime, device: str | None = None,
             freq_hz: float | None = None) -> Action | None:
    """The latest action at or before ``now`` (what should be set when starting up).

    Parameters
    ----------
    source : Station or Schedule
        Station file or parsed schedule.
    now : datetime
        Aware datetime.
    device : str or None
        Only actions that include this device id; None for any action.
    freq_hz : float or None
        Receive frequency, Hz, for per-band presets.

    Returns
    -------
    Action or None
        None when no rule fired within the look-back (:data:`LOOKBACK_DAYS`). Of two
        actions at the same instant the later rule wins (it is applied last).
    """
    _check_aware(now, "now")
    sched = _as_schedule(source)
    for days in LOOKBACK_DAYS:
        window = plan(sched, now - dt.timedelta(days=days), now + dt.timedelta(microseconds=1),
                      freq_hz)
        found = [a for a in window.actions if device is None or device in a.device_ids]
        if found:
            return found[-1]
    return None


def in_force_by_device(source: Station | Schedule, now: dt.datetime,
                       freq_hz: float | None = None) -> dict[str, Action | None]:
    """:func:`in_force` for each ``[[device]]`` id."""
    sched = _as_schedule(source)
    return {dev: in_force(sched, now, dev, freq_hz) for dev in sched.device_ids}
