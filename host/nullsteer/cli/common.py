"""Small helpers shared by the command modules: JSON output and argument types."""

from __future__ import annotations

import argparse
import json
import math
import sys
from typing import Any

from nullsteer.errors import ConfigError


def add_json_flag(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--json", action="store_true", help="print machine-readable JSON")


def print_json(obj: Any) -> None:
    """Print ``obj`` as indented JSON on stdout (numpy scalars are converted).

    Numbers that are not finite (an undefined ratio, a null of infinite depth) are
    written as ``null``: RFC 8259 §6 has no NaN or Infinity, so ``--json`` output is
    always valid JSON.
    """
    json.dump(finite_json(obj), sys.stdout, indent=2, allow_nan=False)
    sys.stdout.write("\n")


def finite_json(obj: Any) -> Any:
    """``obj`` with numpy values made plain and non-finite floats made None."""
    if isinstance(obj, dict):
        return {str(k): finite_json(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [finite_json(v) for v in obj]
    if isinstance(obj, float):
        return obj if math.isfinite(obj) else None
    if obj is None or isinstance(obj, (str, int, bool)):
        return obj
    return finite_json(_json_default(obj))


def _json_default(value: Any) -> Any:
    import numpy as np

    if isinstance(value, np.generic):
        return value.item()
    if isinstance(value, np.ndarray):
        return value.tolist()
    if hasattr(value, "to_json"):
        return value.to_json()
    raise TypeError(f"not JSON serialisable: {type(value).__name__}")


def positive_float(flag: str):
    """argparse type: a finite float > 0; the error names ``flag``."""

    def parse(text: str) -> float:
        try:
            value = float(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"{flag} must be a number, got {text!r}") from None
        if not value > 0 or value == float("inf"):
            raise argparse.ArgumentTypeError(f"{flag} must be > 0, got {text!r}")
        return value

    return parse


def require(condition: bool, key: str, message: str) -> None:
    """Raise :class:`ConfigError` (exit 2) naming ``key`` unless ``condition``."""
    if not condition:
        raise ConfigError(key, message)


def add_board_options(parser: argparse.ArgumentParser) -> None:
    """--link / --config / --device / --timeout, shared by every command that talks to a board."""
    parser.add_argument("--link", metavar="URL",
                        help="board URL (serial:///dev/ttyUSB0, sim://, mqtt://host/id); "
                             "default $NULLSTEER_LINK or the device in --config")
    parser.add_argument("--config", metavar="FILE", help="station file (TOML)")
    parser.add_argument("--device", metavar="ID", help="device id from the station file")
    parser.add_argument("--timeout", type=positive_float("--timeout"), default=None,
                        metavar="S", help="reply timeout in seconds (default 1)")


def connect(args: argparse.Namespace):
    """A :class:`~nullsteer.board.controller.Controller` for the board the arguments name.

    Precedence: ``--link``, then ``$NULLSTEER_LINK``, then the ``[[device]]`` of
    ``--config`` (``--device`` picks one of several).
    """
    import os

    from nullsteer.station.config import load_station
    from nullsteer.board.controller import Controller
    from nullsteer.board.devices import parse_devices, pick_device
    from nullsteer.board.links import open_link

    url = args.link or os.environ.get("NULLSTEER_LINK")
    device = None
    if getattr(args, "config", None):
        station = load_station(args.config)
        devices = parse_devices(station)
        if devices and (not url or args.device):
            device = pick_device(devices, args.device)
            url = url if args.link else device.link
    if not url:
        raise ConfigError("--link", "no board given: use --link URL, set NULLSTEER_LINK, "
                                    "or --config with a [[device]] entry")
    options = {}
    if device is not None and device.board_config is not None:
        options["board_config"] = str(device.board_config)
    link = open_link(url, **options)
    timeout = args.timeout or (device.timeout_s if device else 1.0)
    return Controller(link, timeout_s=timeout, retries=device.retries if device else 2,
                      key=device.key if device else None)


def add_receiver_option(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--receiver", metavar="URL",
                        help="receiver URL: rigctl://HOST:PORT, rtltcp://HOST:PORT?freq_mhz=..., "
                             "iqwav:FILE, sim:// (default: the device's receiver key)")


def receiver_url(args: argparse.Namespace) -> str | None:
    """``--receiver``, else the ``receiver`` key of the ``[[device]]`` that ``--config``
    and ``--device`` name (None when neither gives one)."""
    if getattr(args, "receiver", None):
        return str(args.receiver)
    if not getattr(args, "config", None):
        return None
    from nullsteer.board.devices import parse_devices
    from nullsteer.station.config import load_station

    devices = parse_devices(load_station(args.config))
    if args.device:
        devices = [d for d in devices if d.id == args.device]
    found = [d.receiver for d in devices if d.receiver]
    return found[0] if len(found) == 1 or (found and args.device) else None
