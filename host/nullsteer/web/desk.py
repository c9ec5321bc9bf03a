"""The service behind the page: one controller per device, live state, commands, events.

A :class:`Desk` reads the station file once (devices, presets, schedule, the loop's
orientation; bad values stop the service with the key named), opens each device's link
and keeps a :class:`DeviceDesk` per board. Every command goes through
:mod:`nullsteer.board.commands`, the same code the command line uses, under the device's
lock, so the page, a schedule and a second browser never interleave requests on one link.

State reaches the pages as events on an :class:`EventBus` (the server streams them as
server-sent events): after every command at once, and from a poller that reads
``STATUS`` every ``poll_s`` seconds (sooner for an MQTT board, whose retained state
wakes it), so a change made elsewhere (command line, schedule service, hub) shows up too.
The station file is re-read when it changes, so a preset saved by an auto-null appears.
"""

from __future__ import annotations

import datetime as dt
import logging
import math
import queue
import threading
import time
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from nullsteer.board import commands
from nullsteer.board.commands import Outcome, Wish
from nullsteer.board.controller import BoardStatus, Controller, status_from_fields
from nullsteer.board.devices import Device, parse_devices
from nullsteer.errors import BoardError, ConfigError, LinkError, NullsteerError
from nullsteer.station.bearing import FedEnd, fed_end_for_null, null_bearing_deg
from nullsteer.station.config import Station, get_float, load_station
from nullsteer.station.presets import Preset, parse_presets

log = logging.getLogger("nullsteer.web")

#: Keys of a snapshot that do not make an event on their own (they change every poll).
_QUIET = frozenset({"uptime_s", "heap_bytes", "updated"})


class Busy(NullsteerError):
    """The device is busy with a longer job (an auto-null run): the command is refused."""

    exit_code = 4


class UnknownDevice(ConfigError):
    """No device of that id in the station file."""


class EventBus:
    """Fan-out of ``(event, data)`` pairs to every subscriber's bounded queue."""

    def __init__(self, depth: int = 256) -> None:
        self._subs: list[queue.Queue[tuple[str, Any] | None]] = []
        self._lock = threading.Lock()
        self.depth = depth

    def subscribe(self) -> queue.Queue[tuple[str, Any] | None]:
        q: queue.Queue[tuple[str, Any] | None] = queue.Queue(self.depth)
        with self._lock:
            self._subs.append(q)
        return q

    def unsubscribe(self, q: queue.Queue[tuple[str, Any] | None]) -> None:
        with self._lock:
            if q in self._subs:
                self._subs.remove(q)

    def publish(self, event: str, data: Any) -> None:
        with self._lock:
            subs = list(self._subs)
        for q in subs:
            try:
                q.put_nowait((event, data))
            except queue.Full:  # a stalled page: it reloads the state when it reconnects
                pass

    def close(self) -> None:
        with self._lock:
            subs, self._subs = self._subs, []
        for q in subs:
            try:
                q.put_nowait(None)
            except queue.Full:
                pass

    @property
    def subscribers(self) -> int:
        with self._lock:
            return len(self._subs)


Opener = Callable[[Device], Controller]


def default_opener(device: Device) -> Controller:
    from nullsteer.schedule.service import open_controller

    return open_controller(device)


@dataclass
class DeviceDesk:
    """One board as the service sees it."""

    device: Device
    lock: threading.Lock = field(default_factory=threading.Lock)
    wake: threading.Event = field(default_factory=threading.Event)
    controller: Controller | None = None
    snapshot: dict[str, Any] | None = None
    error: str | None = None
    busy: str | None = None
    has_short: bool = False
    autonull: dict[str, Any] | None = None


def _now_iso() -> str:
    return dt.datetime.now(dt.timezone.utc).isoformat(timespec="milliseconds")


class Desk:
    """The station's boards behind the page (see the module docstring).

    Parameters
    ----------
    station_path : path
        The station file.
    opener : callable
        ``opener(device) -> Controller`` (default: the device's link URL).
    poll_s : float
        Seconds between ``STATUS`` reads of each board.
    autonull_command : str or None
        A command printing one level in dB, for auto-null on a real receiver; None uses
        the station's virtual receiver (``[[sim.station]]``).
    page_url : str or None
        Where the page is reachable; given to MQTT boards for their hub discovery.
    """

    def __init__(self, station_path: str | Path, opener: Opener = default_opener,
                 poll_s: float = 2.0, autonull_command: str | None = None,
                 page_url: str | None = None, autonull_dwell_s: float = 0.05) -> None:
        self.station_path = Path(station_path)
        self.opener = opener
        self.poll_s = poll_s
        self.autonull_command = autonull_command
        self.autonull_dwell_s = autonull_dwell_s
        self.page_url = page_url
        self.events = EventBus()
        self._stop = threading.Event()
        self._threads: list[threading.Thread] = []
        self._models: dict[int, Any] = {}
        self._model_lock = threading.Lock()
        self._load_station()
        devices = parse_devices(self.station)
        if not devices:
            raise ConfigError("device", "the station file has no [[device]] entry")
        self.devices = {d.id: DeviceDesk(d) for d in devices}

    # -- station file -----------------------------------------------------------------
    def _load_station(self) -> None:
        from nullsteer.antenna.station import station_elevations_deg, station_loop
        from nullsteer.schedule.rules import parse_schedule

        station = load_station(self.station_path)
        antenna = station.section("antenna", required=True)
        self.end_a: float | None = None
        if "end_a_bearing_deg" in antenna:
            self.end_a = get_float(antenna, "end_a_bearing_deg", "antenna",
                                   minimum=0.0, maximum=360.0)
        self.presets: dict[str, Preset] = parse_presets(station)
        self.schedule = parse_schedule(station)
        loop = station_loop(station)
        freqs = [float(f) for f in loop.band.freqs_hz]
        self.band_hz = (min(freqs), max(freqs))
        self.default_freq_hz = freqs[len(freqs) // 2]
        els = station_elevations_deg(station)
        self.elevation_deg = float((els[0] + els[-1]) / 2.0)
        self.station: Station = station
        self._mtime = self._file_mtime()

    def _file_mtime(self) -> float:
        try:
            return self.station_path.stat().st_mtime
        except OSError:
            return 0.0

    def reload_if_changed(self) -> bool:
        """Re-read the station file when it changed on disk (presets saved elsewhere)."""
        if self._file_mtime() == self._mtime:
            return False
        try:
            self._load_station()
        except NullsteerError as exc:
            log.warning("station file changed but does not load (%s); keeping the old one", exc)
            self._mtime = self._file_mtime()
            return False
        self.events.publish("station", self.station_json())
        for dd in self.devices.values():
            dd.wake.set()
        return True

    def station_json(self) -> dict[str, Any]:
        site = self.station.section("site")
        return {
            "site": {"name": site.get("name"), "callsign": site.get("callsign")},
            "end_a_bearing_deg": self.end_a,
            "band_mhz": [self.band_hz[0] / 1e6, self.band_hz[1] / 1e6],
            "default_freq_mhz": self.default_freq_hz / 1e6,
            "presets": [self.preset_json(p) for p in sorted(self.presets.values(),
                                                            key=lambda p: p.name)],
            "devices": [d for d in self.devices],
            "autonull_source": "command" if self.autonull_command else "sim",
            "autonull_freq_mhz": self.autonull_freq_hz() / 1e6,
        }

    def autonull_freq_hz(self) -> float:
        """Where the page offers to auto-null: the loudest simulated station's frequency
        when the virtual receiver is the source, else the band's middle."""
        from nullsteer.reception.virtual import parse_scenario

        if self.autonull_command is None:
            stations = parse_scenario(self.station).stations
            if stations:
                return float(max(stations, key=lambda s: s.field_dbuv_per_m).freq_hz)
        return self.default_freq_hz

    def preset_json(self, p: Preset) -> dict[str, Any]:
        out: dict[str, Any] = {"name": p.name, "fed_end": p.fed_end.value, "ohms": p.ohms,
                               "open": p.open, "bands": [b.label for b in p.bands]}
        if self.end_a is not None and not p.open:
            out["null_bearing_deg"] = null_bearing_deg(p.fed_end, self.end_a)
        return out

    # -- life cycle -------------------------------------------------------------------
    def start(self) -> Desk:
        """First read of every board (failures are shown, not fatal), then the pollers."""
        for dd in self.devices.values():
            self.refresh(dd)
            t = threading.Thread(target=self._poll, args=(dd,), daemon=True,
                                 name=f"nullsteer-poll-{dd.device.id}")
            t.start()
            self._threads.append(t)
        return self

    def stop(self) -> None:
        self._stop.set()
        for dd in self.devices.values():
            dd.wake.set()
        for t in self._threads:
            t.join(timeout=5)
        self.events.close()
        for dd in self.devices.values():
            with dd.lock:
                self._close(dd)

    def _close(self, dd: DeviceDesk) -> None:
        ctl, dd.controller = dd.controller, None
        if ctl is None:
            return
        pub = getattr(ctl.link, "publish_page_url", None)
        try:
            if pub is not None and self.page_url:
                pub("")
            ctl.close()
        except Exception:  # noqa: BLE001 - closing a broken link must not fail
            pass

    def _poll(self, dd: DeviceDesk) -> None:
        while not self._stop.is_set():
            dd.wake.wait(self.poll_s)
            dd.wake.clear()
            if self._stop.is_set():
                return
            self.reload_if_changed()
            if dd.busy is None:
                self.refresh(dd, blocking=False)

    # -- reading ----------------------------------------------------------------------
    def device(self, dev_id: str) -> DeviceDesk:
        dd = self.devices.get(dev_id)
        if dd is None:
            raise UnknownDevice("device", f"no device {dev_id!r} (have "
                                          f"{', '.join(self.devices)})")
        return dd

    def _controller(self, dd: DeviceDesk) -> Controller:
        if dd.controller is None:
            ctl = self.opener(dd.device)
            dd.controller = ctl
            hooks = getattr(ctl.link, "on_state", None)
            if isinstance(hooks, list):  # an MQTT board: its retained state wakes us
                hooks.append(lambda _doc: dd.wake.set())
            pub = getattr(ctl.link, "publish_page_url", None)
            if pub is not None and self.page_url:
                pub(self.page_url)
        return dd.controller

    def _read_status(self, ctl: Controller, dd: DeviceDesk) -> tuple[BoardStatus, bool | None]:
        """STATUS, and the shorted state when the board reports one (else None)."""
        fields = ctl.request("STATUS")
        dd.has_short = "short" in fields
        return status_from_fields(fields), (fields["short"] == "1" if dd.has_short else None)

    def refresh(self, dd: DeviceDesk, blocking: bool = True) -> dict[str, Any] | None:
        """Read the board now and publish its snapshot if anything changed."""
        if not dd.lock.acquire(blocking):
            return dd.snapshot
        try:
            try:
                ctl = self._controller(dd)
                ctl.info()
                ctl.table()
                status, short = self._read_status(ctl, dd)
                dd.error = None
                snap = self._snapshot(dd, ctl, status, short)
            except (LinkError, BoardError, OSError) as exc:
                dd.error = str(exc)
                self._close(dd)
                snap = self._snapshot(dd, None, None)
            except ConfigError as exc:
                dd.error = str(exc)
                snap = self._snapshot(dd, None, None)
        finally:
            dd.lock.release()
        self._publish(dd, snap)
        return snap

    def _publish(self, dd: DeviceDesk, snap: dict[str, Any]) -> None:
        old = dd.snapshot
        dd.snapshot = snap
        if old is None or {k: v for k, v in old.items() if k not in _QUIET} != \
                {k: v for k, v in snap.items() if k not in _QUIET}:
            self.events.publish("device", snap)

    def _snapshot(self, dd: DeviceDesk, ctl: Controller | None, status: BoardStatus | None,
                  short: bool | None = None) -> dict[str, Any]:
        out: dict[str, Any] = {"id": dd.device.id, "available": status is not None,
                               "error": dd.error, "busy": dd.busy, "updated": _now_iso()}
        if status is None or ctl is None:
            prev = dd.snapshot or {}
            for key in ("table", "roles", "bits", "firmware"):
                if key in prev:
                    out[key] = prev[key]
            return out
        s = status.state
        info = ctl.info()
        out.update({
            "fed_end": s.fed_end.value, "mask": s.mask, "open": s.open, "ohms": s.ohms,
            "null_bearing_deg": (None if self.end_a is None or s.open
                                 else null_bearing_deg(s.fed_end, self.end_a)),
            "presets": commands.presets_now(ctl, self.presets, s),
            "firmware": status.firmware, "boots": status.boots,
            "uptime_s": status.uptime_s, "heap_bytes": status.heap_bytes,
            "bits": info.bits, "roles": list(info.roles),
            "table": [[m, r] for m, r in ctl.table()],
        })
        if short is not None:
            out["short"] = short
        return out

    def device_json(self, dev_id: str) -> dict[str, Any]:
        dd = self.device(dev_id)
        return dd.snapshot or self.refresh(dd) or {}

    # -- commands ---------------------------------------------------------------------
    def _run(self, dev_id: str, job: Callable[[Controller], Outcome]) -> dict[str, Any]:
        dd = self.device(dev_id)
        if dd.busy:
            raise Busy(f"{dev_id} is busy ({dd.busy}); try again when it has finished")
        if not dd.lock.acquire(timeout=10.0):
            raise Busy(f"{dev_id} is busy with another command")
        try:
            if dd.busy:
                raise Busy(f"{dev_id} is busy ({dd.busy}); try again when it has finished")
            ctl = self._controller(dd)
            try:
                done = job(ctl)
                status, short = self._read_status(ctl, dd)
            except LinkError as exc:
                dd.error = str(exc)
                self._close(dd)
                snap = self._snapshot(dd, None, None)
                self._publish(dd, snap)
                raise
            dd.error = None
            snap = self._snapshot(dd, ctl, status, short)
        finally:
            dd.lock.release()
        self._publish(dd, snap)
        return {"ok": True, "notes": done.notes, **done.extra, "device": snap}

    def flip(self, dev_id: str) -> dict[str, Any]:
        return self._run(dev_id, commands.flip)

    def preset(self, dev_id: str, name: str, freq_hz: float | None = None) -> dict[str, Any]:
        preset = commands.find_preset(self.presets, name, _api_name)
        return self._run(dev_id, lambda ctl: commands.apply_preset(ctl, preset, freq_hz))

    def set(self, dev_id: str, wish: Wish) -> dict[str, Any]:
        dd = self.device(dev_id)
        if wish.short is not None and not dd.has_short:
            raise ConfigError("short", "this board reports no shorted state")

        return self._run(dev_id, lambda ctl: commands.apply_wish(ctl, wish, self.end_a,
                                                                 _api_name))

    # -- pattern and schedule ---------------------------------------------------------
    def model(self, freq_hz: float) -> Any:
        """The loop's solved model at ``freq_hz`` (cached per kHz)."""
        from nullsteer.antenna.station import solve_station_model

        key = int(round(freq_hz / 1e3))
        with self._model_lock:
            if key not in self._models:
                if len(self._models) > 16:
                    self._models.clear()
                self._models[key] = solve_station_model(self.station, [key * 1e3])
            return self._models[key]

    def check_freq(self, freq_mhz: Any, key: str = "freq_mhz") -> float:
        """A frequency from the API, hertz: a number within 0.1..30 MHz."""
        if isinstance(freq_mhz, bool) or not isinstance(freq_mhz, (int, float)) or \
                not math.isfinite(freq_mhz) or not 0.1 <= freq_mhz <= 30.0:
            raise ConfigError(key, f"must be a number of MHz within 0.1..30, got {freq_mhz!r}")
        return float(freq_mhz) * 1e6

    def pattern(self, dev_id: str, freq_hz: float | None = None) -> dict[str, Any]:
        from nullsteer.web.pattern import pattern_cut, pattern_svg

        snap = self.device_json(dev_id)
        if not snap.get("available"):
            raise LinkError(f"{dev_id}: no state to draw ({snap.get('error')})")
        f = freq_hz or self.default_freq_hz
        ohms = 0.0 if snap.get("short") else (math.inf if snap["open"] else float(snap["ohms"]))
        cut = pattern_cut(self.model(f), 0, snap["fed_end"], ohms, self.elevation_deg)
        out = cut.summary()
        out["svg"] = pattern_svg(cut, snap.get("null_bearing_deg"))
        out["state"] = {k: snap.get(k) for k in ("fed_end", "mask", "open", "ohms")}
        return out

    def next_actions(self, dev_id: str, count: int = 5, days: float = 2.0) -> list[dict[str, Any]]:
        from nullsteer.schedule.rules import plan

        self.device(dev_id)
        now = dt.datetime.now(dt.timezone.utc)
        acts = plan(self.schedule, now, now + dt.timedelta(days=days)).actions
        out = []
        for a in acts:
            if dev_id in a.device_ids:
                out.append({"when": a.when.isoformat(timespec="minutes"), "preset": a.preset,
                            "basis": a.basis, "target": a.target.describe()})
            if len(out) >= count:
                break
        return out

    # -- auto-null --------------------------------------------------------------------
    def start_autonull(self, dev_id: str, freq_hz: float, fed_end: FedEnd | None,
                       null_bearing: float | None, save_preset: str | None) -> dict[str, Any]:
        """Start an auto-null run in the background; its probes arrive as events."""
        from nullsteer.reception.virtual import parse_scenario

        dd = self.device(dev_id)
        if self.autonull_command is None and not parse_scenario(self.station).stations:
            raise ConfigError("autonull", "no measurement source: the station file has no "
                                          "[[sim.station]] and serve has no --autonull-command")
        if null_bearing is not None:
            if self.end_a is None:
                raise ConfigError("null_bearing_deg", "needs antenna.end_a_bearing_deg")
            fed_end = fed_end_for_null(null_bearing, self.end_a)[0]
        fe = (fed_end or FedEnd.A).value
        if save_preset is not None:
            import re

            if not re.match(r"^[A-Za-z0-9_-]{1,40}$", save_preset):
                raise ConfigError("save_preset", "use 1-40 letters, digits, '-' or '_'")
        if not dd.lock.acquire(timeout=10.0):
            raise Busy(f"{dev_id} is busy with another command")
        try:
            if dd.busy:
                raise Busy(f"{dev_id} is busy ({dd.busy})")
            dd.busy = "auto-null"
        finally:
            dd.lock.release()
        run = {"device": dev_id, "freq_mhz": freq_hz / 1e6, "fed_end": fe,
               "probes": [], "state": "running", "started": _now_iso()}
        dd.autonull = run
        self.events.publish("autonull", {"device": dev_id, "kind": "start", "run": run})
        t = threading.Thread(target=self._autonull, args=(dd, freq_hz, fe, save_preset),
                             daemon=True, name=f"nullsteer-autonull-{dev_id}")
        t.start()
        return {"ok": True, "run": run}

    def _autonull(self, dd: DeviceDesk, freq_hz: float, fe: str, save_preset: str | None) -> None:
        from nullsteer.reception.autonull_run import (autonull_on_controller,
                                                      predicted_optimum_ohm, save_band_preset,
                                                      station_sim_meter)
        from nullsteer.antenna.station import station_elevations_deg
        from nullsteer.reception.measure import CommandSource, Meter

        run = dd.autonull or {}
        dev_id = dd.device.id

        def progress(kind: str, probe: Any, level_db: float | None) -> None:
            item = {"kind": kind, "level_db": None if level_db is None else round(level_db, 2)}
            if probe is not None:
                item["probe"] = probe.to_json()
            run["probes"].append(item)
            self.events.publish("autonull", {"device": dev_id, **item})

        try:
            with dd.lock:
                ctl = self._controller(dd)
                solution = self.model(freq_hz)
                start = predicted_optimum_ohm(solution, fe, station_elevations_deg(self.station))
                if not math.isfinite(start):
                    start = max(r for _, r in ctl.table())
                if self.autonull_command:
                    meter = Meter(CommandSource(self.autonull_command, timeout_s=10.0),
                                  dwell_s=0.3, reads=3)
                else:
                    meter = station_sim_meter(self.station, solution, ctl, freq_hz,
                                              dd.device.board_config, self.autonull_dwell_s)
                result = autonull_on_controller(ctl, meter, freq_hz, fe, start,
                                                progress=progress)
            run["result"] = result.to_json()
            run["state"] = "done"
            if save_preset:
                band = save_band_preset(self.station_path, save_preset, fe, result.best_ohms,
                                        freq_hz)
                run["saved"] = f"preset {save_preset} ({band})"
                self.reload_if_changed()
        except NullsteerError as exc:
            run["state"] = "failed"
            run["error"] = str(exc)
        except Exception as exc:  # noqa: BLE001 - a failed run is shown, the service lives on
            log.exception("auto-null on %s failed", dev_id)
            run["state"] = "failed"
            run["error"] = f"internal error: {exc}"
        finally:
            dd.busy = None
        self.refresh(dd)  # the board's state first, so a page reading on "done" sees it
        self.events.publish("autonull", {"device": dev_id, "kind": run["state"], "run": run})


def _api_name(key: str) -> str:
    """The JSON API's spelling of a command key (``null_bearing`` -> ``null_bearing_deg``)."""
    return {"null_bearing": "null_bearing_deg", "preset": "name"}.get(key, key)
