"""The boards a station drives: the ``[[device]]`` entries of the station file.

Their keys are described once in :data:`DEVICE` (type, default, range), which also
writes their part of ``docs/station-file.md``.
"""

from __future__ import annotations

import os
import re
import stat
import sys
from dataclasses import dataclass
from pathlib import Path
from urllib.parse import parse_qsl, urlencode, urlsplit

from nullsteer.errors import ConfigError, redacted
from nullsteer.station.config import Station
from nullsteer.station.schema import REQUIRED, Key, Kind, Section

_ID = re.compile(r"^[A-Za-z0-9_-]{1,32}$")

DEVICE = Section("device", """One board the station drives (`--device ID` picks it when
there are several). Relative paths are taken relative to the station file.""", (
    Key("id", Kind.STRING, "Short name: 1-32 letters, digits, `-` or `_` (also used in MQTT "
        "topics).", default=REQUIRED),
    Key("link", Kind.STRING, "Transport URL: `serial:///dev/ttyUSB0`, `mqtt://` or "
        "`mqtts://` broker URL, `sim://` (a simulated board; a relative `state=DIR` keeps "
        "its relay state between commands).", default=REQUIRED),
    Key("board", Kind.STRING, "The board config JSON (pins, roles, ladder table)."),
    Key("key_file", Kind.STRING, "File holding the shared signing key (hex, >= 16 bytes); "
        "refused when others may write it, a warning when others may read it (`chmod 600`)."),
    Key("key_env", Kind.STRING, "Instead of `key_file`: environment variable holding the key "
        "(hex)."),
    Key("timeout_s", Kind.NUMBER, "Reply timeout.", "s", 1.0, 0.01, 600.0),
    Key("retries", Kind.INTEGER, "Extra attempts after a timeout or a damaged reply.",
        default=2, minimum=0, maximum=20),
    Key("receiver", Kind.STRING, "Receiver heard through this antenna, a URL: "
        "`rigctl://HOST:PORT`, `rtltcp://HOST:PORT?...`, `iqwav:PATH`, `sim://`."),
), form="array")


@dataclass(frozen=True)
class Device:
    """One board of the station."""

    id: str
    link: str
    board_config: Path | None
    key: bytes | None
    timeout_s: float
    retries: int
    receiver: str | None = None


def _read_key(text: str, where: str) -> bytes:
    text = text.strip()
    try:
        key = bytes.fromhex(text)
    except ValueError:
        raise ConfigError(where, "signing key must be hex digits") from None
    if len(key) < 16:
        raise ConfigError(where, f"signing key must be at least 16 bytes, got {len(key)}")
    return key


def _resolve_sim_state(station: Station, link: str) -> str:
    """``link`` with a relative ``state=`` folder of a ``sim://`` URL made absolute."""
    parts = urlsplit(link)
    if parts.scheme != "sim":
        return link
    query = parse_qsl(parts.query, keep_blank_values=True)
    fixed = [(k, str(station.resolve(v).resolve()) if k == "state" and v else v) for k, v in query]
    return f"sim://{parts.netloc}{parts.path}" + (f"?{urlencode(fixed, safe='/')}" if fixed else "")


def check_key_file(path: Path, where: str) -> None:
    """Refuse a key file that group or others may write; warn when they may read it
    (POSIX permission bits; not checked where the system has none)."""
    if os.name != "posix":
        return
    try:
        mode = stat.S_IMODE(path.stat().st_mode)
    except OSError:
        return  # reading it reports the problem
    if mode & (stat.S_IWGRP | stat.S_IWOTH):
        raise ConfigError(where, f"{path} is writable by others (mode {mode:04o}): anyone "
                                 "able to change it can drive the board; chmod 600 it")
    if mode & (stat.S_IRGRP | stat.S_IROTH):
        sys.stderr.write(f"nullsteer: warning: {where}: {path} is readable by others "
                         f"(mode {mode:04o}); chmod 600 it\n")


def parse_device(station: Station, table: dict, index: int) -> Device:
    where = f"device[{index}]"
    DEVICE.check(table, where)
    dev_id = DEVICE.get(table, "id", where)
    if not _ID.match(dev_id):
        raise ConfigError(f"{where}.id", f"use 1-32 letters, digits, '-' or '_', got {dev_id!r}")
    link = DEVICE.get(table, "link", where)
    if "://" not in link:
        raise ConfigError(f"{where}.link", f"expected a URL such as serial:///dev/ttyUSB0, got {redacted(link)!r}")
    link = _resolve_sim_state(station, link)
    board = DEVICE.get(table, "board", where)
    board_path = station.resolve(board) if board is not None else None
    key = None
    if "key_file" in table:
        path = station.resolve(DEVICE.get(table, "key_file", where))
        check_key_file(path, f"{where}.key_file")
        try:
            key = _read_key(path.read_text(), f"{where}.key_file")
        except OSError as exc:
            raise ConfigError(f"{where}.key_file", f"cannot read {path}: {exc.strerror}") from None
    elif "key_env" in table:
        name = DEVICE.get(table, "key_env", where)
        if name not in os.environ:
            raise ConfigError(f"{where}.key_env", f"environment variable {name} is not set")
        key = _read_key(os.environ[name], f"{where}.key_env")
    receiver = DEVICE.get(table, "receiver", where)
    if receiver is not None:
        if ":" not in receiver:
            raise ConfigError(f"{where}.receiver", "expected a URL such as "
                                                   f"rigctl://127.0.0.1:4532, got {receiver!r}")
    return Device(id=dev_id, link=link, board_config=board_path, key=key, receiver=receiver,
                  timeout_s=DEVICE.get(table, "timeout_s", where),
                  retries=DEVICE.get(table, "retries", where))


def parse_devices(station: Station) -> list[Device]:
    """All ``[[device]]`` entries; ids must be unique."""
    devices = [parse_device(station, t, i) for i, t in enumerate(station.array("device"))]
    seen: set[str] = set()
    for d in devices:
        if d.id in seen:
            raise ConfigError("device.id", f"duplicate id {d.id!r}")
        seen.add(d.id)
    return devices


def pick_device(devices: list[Device], wanted: str | None) -> Device:
    """The device named ``wanted``, or the only one when ``wanted`` is None."""
    if not devices:
        raise ConfigError("device", "the station file has no [[device]] entry")
    if wanted is None:
        if len(devices) > 1:
            raise ConfigError("--device", "several devices in the file: name one "
                                          f"({', '.join(d.id for d in devices)})")
        return devices[0]
    for d in devices:
        if d.id == wanted:
            return d
    raise ConfigError("--device", f"no device {wanted!r} (have {', '.join(d.id for d in devices)})")
