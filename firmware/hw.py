"""Board assembly: build the hardware objects from the board config and run the link.

This is the only firmware module that touches ``machine``; it is imported there by
:func:`run`, so the builders below also work under CPython with an injected fake.
"""

import gc
import sys
import time

import link_serial
from app import App
from relays import ROLE_OPEN, GpioDriver, RelayBank
from store import StateStore

try:
    from typing import TYPE_CHECKING
except ImportError:  # MicroPython
    TYPE_CHECKING = False
if TYPE_CHECKING:
    from typing import Any
    from boardcfg import BoardConfig

DEFAULT_CONFIG = "board.json"
ENV_CONFIG = "NULLSTEER_BOARD"
ENV_PTY = "NULLSTEER_PTY"
WDT_SLICE_MS = 100


class Clock:
    """Milliseconds from ``time.ticks_ms`` (MicroPython) or ``time.monotonic`` (CPython)."""

    def ticks_ms(self) -> int:
        ticks = getattr(time, "ticks_ms", None)
        if ticks is not None:
            return ticks()
        return int(getattr(time, "monotonic")() * 1000)

    def ticks_diff(self, a: int, b: int) -> int:
        diff = getattr(time, "ticks_diff", None)
        if diff is not None:
            return diff(a, b)
        return a - b

    def sleep_ms(self, ms: int) -> None:
        sleep = getattr(time, "sleep_ms", None)
        if sleep is not None:
            sleep(ms)
        else:
            time.sleep(ms / 1000)


class NoWatchdog:
    """Stands in where the board has no watchdog (or it is switched off)."""

    def feed(self) -> None:
        pass


def make_watchdog(machine: "Any", timeout_ms: int) -> "Any":
    """``machine.WDT(timeout=...)`` when configured and present, else :class:`NoWatchdog`."""
    wdt_class = getattr(machine, "WDT", None)
    if timeout_ms <= 0 or wdt_class is None:
        return NoWatchdog()
    return wdt_class(timeout=timeout_ms)


def feeding_sleep(clock: "Any", wdt: "Any") -> "Any":
    """A ``sleep_ms`` that feeds the watchdog at least every WDT_SLICE_MS."""

    def sleep_ms(ms: int) -> None:
        while ms > 0:
            step = ms if ms < WDT_SLICE_MS else WDT_SLICE_MS
            clock.sleep_ms(step)
            wdt.feed()
            ms -= step

    return sleep_ms


def heap_in_use() -> int:
    """Bytes of heap in use after a collection (0 where the port cannot tell)."""
    gc.collect()
    alloc = getattr(gc, "mem_alloc", None)
    return alloc() if alloc is not None else 0


def build_app(cfg: "BoardConfig", machine: "Any", clock: "Any", wdt: "Any",
              fs: "Any" = None) -> App:
    """Pins (all de-energised), driver, bank, store and app for ``cfg``; ``clock`` has
    ``ticks_ms``, ``ticks_diff`` and ``sleep_ms``; ``fs`` is the store's file access."""
    sleep = feeding_sleep(clock, wdt)
    driver = None
    if cfg.driver["kind"] != "gpio" or cfg.driver["reset_pins"] is not None:
        from drivers import build_driver  # loaded only by boards that need it
        driver = build_driver(cfg.driver, cfg.pins, cfg.active_low, machine, sleep)
    if driver is None:  # plain GPIO, one pin per relay
        pins = []
        for k in range(len(cfg.relays)):
            off_level = 1 if cfg.active_low[k] else 0
            pins.append(machine.Pin(cfg.pins[k], machine.Pin.OUT, value=off_level))
        driver = GpioDriver(pins, cfg.active_low)
    bank = RelayBank(cfg.relays, driver, sleep, cfg.protect_ladder)
    has_open = any(r.role == ROLE_OPEN for r in cfg.relays)
    store = StateStore(cfg.state_file, cfg.bits, has_open, fs, cfg.write_pause_ms, sleep)
    return App(cfg, bank, store, clock, heap_in_use)


def open_port(link: dict, machine: "Any", clock: Clock) -> "Any":
    """The serial port the link config names (a pty path may come from NULLSTEER_PTY)."""
    port = link["port"]
    if port == "uart":
        import port_uart
        return port_uart.UartPort(machine, clock.sleep_ms, link["id"], link["baud"],
                                  link.get("tx"), link.get("rx"), link.get("de_pin"))
    if port == "pty":
        import port_pty
        path = _getenv(ENV_PTY) or link.get("path")
        if not path:
            raise ValueError("link.path: no pty path (set %s)" % ENV_PTY)
        return port_pty.PtyPort(path)
    import port_stdio
    return port_stdio.StdioPort()


def _getenv(name: str) -> "str | None":
    import os
    getenv = getattr(os, "getenv", None)
    return getenv(name) if getenv is not None else None


def _load_config(path: str) -> "BoardConfig":
    """Read the board file, then unload the reader (it is not needed after boot)."""
    import boardcfg
    try:
        cfg = boardcfg.load_board(path)
    except boardcfg.BoardConfigError as exc:
        print("nullsteer: board config:", exc)
        raise SystemExit(2)
    del boardcfg
    sys.modules.pop("boardcfg", None)
    sys.modules.pop("drivercfg", None)
    return cfg


def run(config_path: "str | None" = None) -> None:
    """Boot the board and serve requests for ever."""
    import machine
    path = config_path or _getenv(ENV_CONFIG) or DEFAULT_CONFIG
    cfg = _load_config(path)
    clock = Clock()
    wdt = make_watchdog(machine, cfg.watchdog_ms)
    app = build_app(cfg, machine, clock, wdt)
    port = open_port(cfg.link, machine, clock)
    mqtt = None
    if cfg.mqtt is not None:  # an MQTT board: the broker link runs beside the serial port
        import mqtt_link
        try:
            mqtt = mqtt_link.parse_mqtt(cfg.mqtt, cfg.bits)
        except ValueError as exc:
            print("nullsteer: board config:", exc)
            raise SystemExit(2)
        cfg.mqtt = None  # the checked copy is all that is needed from here on
    port.write(app.boot())
    if mqtt is not None:
        mqtt_link.serve(app, mqtt, wdt.feed, clock, port)
    else:
        link_serial.serve(port, app, wdt.feed)
