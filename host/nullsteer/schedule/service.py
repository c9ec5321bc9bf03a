"""The long-running service: carry out the station's ``[[rule]]`` schedule on its boards.

The schedule itself (sun events, presets, which action is in force) comes from the pure
functions of :mod:`nullsteer.schedule.rules` and :mod:`nullsteer.station.presets`; this module adds
time, boards and logging:

* **catch-up** — at start, every device gets the action in force now (the latest one at
  or before now), so a host that was off during a sunset still ends up right;
* **one line per action and device** on the ``nullsteer.schedule.service`` logger;
* **dry run** — log what would be done; no link is opened, nothing is sent;
* **time shift** — a virtual clock starting at ``start`` and running ``speed`` times
  faster than real time (``speed`` 0: jump from one action to the next without
  waiting), so a day can be shown in seconds; ``days`` stops the service after that
  much virtual time;
* **several devices** (an antenna farm): one controller per device, each opened on first
  use; a device that cannot be reached is retried every ``retry_s`` with the action in
  force at that moment (boards keep their state, so nothing is lost meanwhile).

Targets with ``ohms`` are sent as the nearest ladder setting by ratio from the board's
own table (:func:`nullsteer.protocol.wire.nearest_by_ratio`); ``open`` keeps the present setting.
"""

from __future__ import annotations

import datetime as dt
import logging
import time
from collections.abc import Callable
from dataclasses import dataclass

from nullsteer.station.config import Station
from nullsteer.board.commands import target_fields
from nullsteer.board.controller import Controller
from nullsteer.board.devices import Device, parse_devices
from nullsteer.errors import BoardError, ConfigError, LinkError
from nullsteer.board.links import open_link
from nullsteer.station.presets import Target
from nullsteer.schedule.rules import Action, in_force, parse_schedule, plan

log = logging.getLogger("nullsteer.schedule.service")

HORIZON = dt.timedelta(days=1)  # how far ahead the plan is computed at a time


@dataclass(frozen=True)
class ServiceOptions:
    """How the service runs.

    Attributes
    ----------
    dry_run : bool
        Log the actions, open no link, send nothing.
    start : datetime or None
        Virtual start time (aware); None for the real time now.
    speed : float
        Virtual seconds per real second (1: real time; 0: do not wait at all).
    days : float or None
        Stop after this much virtual time, days; None runs until interrupted.
    freq_hz : float or None
        Receive frequency, Hz, for per-band presets (None: each preset's default).
    retry_s : float
        Virtual seconds between attempts on an unreachable device.
    """

    dry_run: bool = False
    start: dt.datetime | None = None
    speed: float = 1.0
    days: float | None = None
    freq_hz: float | None = None
    retry_s: float = 60.0


class VirtualClock:
    """Aware time that starts at ``start`` and runs ``speed`` times real time.

    Parameters
    ----------
    start : datetime
        Aware start time.
    speed : float
        Virtual seconds per real second; 0 jumps (``sleep_until`` returns at once and
        moves the clock to the wanted time).
    monotonic, sleep : callable
        Real time source and sleep, seconds (injected in tests).
    """

    def __init__(self, start: dt.datetime, speed: float,
                 monotonic: Callable[[], float] = time.monotonic,
                 sleep: Callable[[float], None] = time.sleep) -> None:
        if start.tzinfo is None:
            raise ValueError("start must be an aware datetime")
        if speed < 0:
            raise ValueError("speed must be >= 0")
        self.start = start
        self.speed = speed
        self._monotonic = monotonic
        self._sleep = sleep
        self._t0 = monotonic()
        self._jumped = dt.timedelta(0)

    def now(self) -> dt.datetime:
        real = dt.timedelta(seconds=(self._monotonic() - self._t0) * self.speed)
        return self.start + real + self._jumped

    def sleep_until(self, when: dt.datetime, limit_s: float = 1.0) -> None:
        """Wait toward ``when`` (at most ``limit_s`` real seconds at a time)."""
        left_s = (when - self.now()).total_seconds()  # aware: UTC difference, DST-safe
        if left_s <= 0:
            return
        if self.speed == 0:
            self._jumped += dt.timedelta(seconds=left_s)
            return
        self._sleep(min(left_s / self.speed, limit_s))


class DeviceRunner:
    """One device of the station: its controller, opened on first use."""

    def __init__(self, device: Device, opener: Callable[[Device], Controller] | None = None
                 ) -> None:
        self.device = device
        self._opener = opener or open_controller
        self.controller: Controller | None = None
        self.pending: Action | None = None  # an action not carried out yet

    def apply(self, target: Target) -> str:
        """Put the board in ``target``; returns a short note for the log line."""
        if self.controller is None:
            self.controller = self._opener(self.device)
            warning = self.controller.firmware_mismatch()
            if warning:
                log.warning("%s: %s", self.device.id, warning)
        c = self.controller
        try:
            status = c.status()
            fed_end, mask, open_, note = target_fields(target, status, c.table())
            after = c.set_state(fed_end, mask, open_)
        except LinkError:
            self.close()
            raise
        changed = "changed" if after.changed else "unchanged"
        return f"{note}, {changed}"

    def close(self) -> None:
        if self.controller is not None:
            try:
                self.controller.close()
            except Exception:  # noqa: BLE001 - closing a broken link must not fail
                pass
            self.controller = None


def open_controller(device: Device) -> Controller:
    """A controller for ``device`` over its link URL."""
    options: dict[str, object] = {}
    if device.board_config is not None:
        options["board_config"] = str(device.board_config)
    link = open_link(device.link, **options)
    return Controller(link, timeout_s=device.timeout_s, retries=device.retries, key=device.key)


def action_line(action: Action, device_id: str, outcome: str) -> str:
    """The one log line of an action on one device."""
    return (f"{action.when.isoformat(timespec='seconds')} rule {action.rule_index} "
            f"({action.basis}) preset {action.preset} -> {device_id}: "
            f"{action.target.describe()}: {outcome}")


class Service:
    """Runs the schedule of ``station`` (see the module docstring).

    Parameters
    ----------
    station : Station
        The loaded station file (``[site]``, ``[presets]``, ``[[rule]]``, ``[[device]]``).
    options : ServiceOptions
        Dry run, time shift, frequency.
    opener : callable, optional
        ``opener(device) -> Controller`` (default: open the device's link URL).
    clock : VirtualClock, optional
        Injected clock (default: from ``options``).
    """

    def __init__(self, station: Station, options: ServiceOptions,
                 opener: Callable[[Device], Controller] | None = None,
                 clock: VirtualClock | None = None) -> None:
        self.sched = parse_schedule(station)
        self.options = options
        devices = parse_devices(station)
        if not devices:
            raise ConfigError("device", "the station file has no [[device]] entry")
        self.runners = {d.id: DeviceRunner(d, opener) for d in devices}
        zone = self.sched.site.tz
        start = options.start or dt.datetime.now(zone)
        self.clock = clock or VirtualClock(start.astimezone(zone), options.speed)
        self.lines: list[str] = []
        self.applied = 0
        self._next_retry = self.clock.now()

    def _emit(self, line: str) -> None:
        self.lines.append(line)
        log.info("%s", line)

    def carry_out(self, action: Action, device_ids: tuple[str, ...] | None = None,
                  note: str = "") -> None:
        """Apply ``action`` to its devices (or ``device_ids``), one log line each."""
        for dev_id in device_ids or action.device_ids:
            runner = self.runners.get(dev_id)
            if runner is None:
                continue
            if self.options.dry_run:
                self._emit(action_line(action, dev_id, note + "dry run, nothing sent"))
                self.applied += 1
                continue
            try:
                outcome = runner.apply(action.target)
                runner.pending = None
                self.applied += 1
            except (LinkError, BoardError, ConfigError) as exc:
                runner.pending = action
                outcome = f"FAILED ({exc}); retrying in {self.options.retry_s:g} s"
            self._emit(action_line(action, dev_id, note + outcome))

    def catch_up(self) -> None:
        """Give every device the action in force now."""
        now = self.clock.now()
        for dev_id in self.runners:
            action = in_force(self.sched, now, dev_id, self.options.freq_hz)
            if action is None:
                self._emit(f"{now.isoformat(timespec='seconds')} {dev_id}: no rule in force")
                continue
            self.carry_out(action, (dev_id,), f"catch-up at {now.isoformat(timespec='seconds')}, ")

    def _retry_pending(self) -> None:
        now = self.clock.now()
        for dev_id, runner in self.runners.items():
            if runner.pending is not None:
                action = in_force(self.sched, now, dev_id, self.options.freq_hz) or runner.pending
                self.carry_out(action, (dev_id,), "retry, ")

    def _wait_until(self, when: dt.datetime, should_stop: Callable[[], bool]) -> None:
        """Sleep until ``when``, retrying unreachable devices on the way."""
        while self.clock.now() < when and not should_stop():
            pending = any(r.pending for r in self.runners.values())
            if pending and self.clock.now() >= self._next_retry:
                self._retry_pending()
                self._next_retry = self.clock.now() + dt.timedelta(seconds=self.options.retry_s)
            self.clock.sleep_until(min(when, self._next_retry) if pending else when)

    def run(self, should_stop: Callable[[], bool] = lambda: False) -> int:
        """Catch up, then carry out actions as their time comes; returns an exit code."""
        start = self.clock.now()
        end = start + dt.timedelta(days=self.options.days) if self.options.days else None
        self._next_retry = start + dt.timedelta(seconds=self.options.retry_s)
        self.catch_up()
        cursor = start
        try:
            while not should_stop() and (end is None or cursor < end):
                horizon = cursor + HORIZON if end is None else min(cursor + HORIZON, end)
                window = plan(self.sched, cursor, horizon, self.options.freq_hz)
                for action in window.actions:
                    if action.when <= start:  # already applied by the catch-up
                        continue
                    self._wait_until(action.when, should_stop)
                    if should_stop():
                        break
                    self.carry_out(action)
                self._wait_until(horizon, should_stop)
                cursor = horizon
        finally:
            for runner in self.runners.values():
                runner.close()
        return 0
