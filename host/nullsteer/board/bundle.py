"""The files a board needs (a *bundle*), and putting them on the board with mpremote.

A bundle is a folder holding exactly what goes onto the board's file system:

* the firmware modules the board's configuration uses (``firmware/``): the core
  (``main.py hw.py app.py relays.py drivercfg.py drivers.py boardcfg.py store.py
  link_serial.py``), the
  one serial port module its link names (``port_stdio.py`` or ``port_uart.py``) and, for
  an MQTT board, ``mqtt_client.py mqtt_link.py net.py`` with ``discovery.py``;
* ``wire.py``, copied from ``host/nullsteer/protocol/wire.py`` (the one protocol codec);
* ``board.json``: the device's board file (pins, roles, relay driver) with the ladder
  block, the board side of the link, the MQTT block (broker, device id, signing key,
  presets) and the ``[firmware]`` settings of the station file filled in, checked with
  the firmware's own readers before anything is written;
* ``MANIFEST.json`` (stays on the host): firmware version, device, and the SHA-256 and
  size of every file, so ``deploy --bundle`` refuses a bundle edited after it was made.

``board.json`` may hold secrets (MQTT password, signing key): its files are written
readable by their owner only, and a folder the bundle creates is owner-only too (an
existing folder keeps its mode). ``--json`` output never shows the secrets.

TLS (``mqtts://``): the board checks the broker's certificate against the URL's
``ca=`` certificate, copied onto the board as ``ca.der`` (MicroPython's TLS reads DER),
and the broker's name against the URL's host. A ``mqtts://`` URL without ``ca=`` is
refused unless it says ``insecure=1``: a board that does not check the broker would give
its MQTT password to any server that answers.

Putting a bundle on a board: :mod:`nullsteer.board.deploy`.

Station file keys read here: ``[firmware]``, described in :data:`FIRMWARE`.
"""

from __future__ import annotations

import hashlib
import json
import os
import re
import sys
import tempfile
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from nullsteer.station.config import Station
from nullsteer.station.schema import Key, Kind, Section
from nullsteer.board.devices import Device
from nullsteer.sim.firmware import check_board_config
from nullsteer.errors import ConfigError

CORE_MODULES = ("hw.py", "app.py", "relays.py", "drivercfg.py", "drivers.py", "boardcfg.py",
                "store.py", "link_serial.py")
PORT_MODULES = {"stdio": "port_stdio.py", "uart": "port_uart.py"}
MQTT_MODULES = ("mqtt_client.py", "mqtt_link.py", "net.py")
BOARD_FILE = "board.json"
MANIFEST = "MANIFEST.json"
CA_FILE = "ca.der"
#: a file name on the board: one flat name that cannot leave the bundle's folder
_BOARD_NAME = re.compile(r"^[A-Za-z0-9_][A-Za-z0-9_.-]{0,63}$")
#: board.json keys that hold secrets (never printed)
SECRET_KEYS = (("mqtt", "password"), ("mqtt", "key_hex"), ("mqtt", "wifi", "password"))
ENTRY = "main.py"
_PIN = "pin number or name (default: the port's own)"
FIRMWARE = Section("firmware", """What `nullsteer firmware bundle` fills into the board's
config besides the board file (all optional).""", (
    Key("board_port", Kind.STRING, "Board side of a serial link when the board file names "
        "the simulator's pty: `stdio` (USB) or `uart`.", default="stdio",
        choices=tuple(PORT_MODULES)),
    Key("uart_id", Kind.INTEGER, "UART number.", default=0, minimum=0, maximum=15),
    Key("baud", Kind.INTEGER, "UART speed.", "baud", 115200, 300, 3000000),
    Key("tx_pin", Kind.ANY, f"UART transmit {_PIN}."),
    Key("rx_pin", Kind.ANY, f"UART receive {_PIN}."),
    Key("de_pin", Kind.ANY, "RS-485 driver-enable pin (high while sending)."),
    Key("watchdog_ms", Kind.INTEGER, "Overrides the board file's watchdog: 0 off, else at "
        "least 500.", "ms", None, 0, 600000),
    Key("wifi_ssid", Kind.STRING, "Wi-Fi network of an MQTT board."),
    Key("wifi_password_env", Kind.STRING, "Environment variable holding the Wi-Fi password "
        "(never the password itself in the file)."),
))
FIRMWARE_KEYS = FIRMWARE.names
_FW_VERSION = re.compile(r'^FW_VERSION\s*=\s*"([^"]+)"', re.MULTILINE)
_VERSION = re.compile(r"^(\d+)\.(\d+)\.(\d+)")


@dataclass(frozen=True)
class BundleFile:
    """One file for the board: its ``name`` on the board and its bytes."""

    name: str
    data: bytes

    @property
    def sha256(self) -> str:
        return hashlib.sha256(self.data).hexdigest()


@dataclass(frozen=True)
class Bundle:
    """Everything a board needs; ``files`` in copy order (``main.py`` last)."""

    device_id: str
    firmware_version: str
    board_config: dict[str, Any]
    files: tuple[BundleFile, ...]

    def manifest(self) -> dict[str, Any]:
        return {"device": self.device_id, "firmware": self.firmware_version,
                "files": [{"name": f.name, "bytes": len(f.data), "sha256": f.sha256}
                          for f in self.files]}


# --- firmware version -------------------------------------------------------------------
def firmware_version(firmware: Path | None = None) -> str:
    """The version the firmware in this package reports (``FW_VERSION`` of app.py)."""
    from nullsteer.sim.firmware import firmware_dir
    text = ((firmware or firmware_dir()) / "app.py").read_text()
    found = _FW_VERSION.search(text)
    if found is None:
        raise ConfigError("firmware/app.py", "no FW_VERSION = \"x.y.z\" line")
    return found.group(1)


def check_firmware_version(reported: str | None, expected: str) -> str | None:
    """Compare the board's ``fw=`` (from INFO or STATUS) with the host's firmware.

    Parameters
    ----------
    reported : str or None
        What the board said (None or ``"?"``: it did not say).
    expected : str
        :func:`firmware_version` of this host's package.

    Returns
    -------
    str or None
        None when they agree (same major and minor number: the protocol and the board
        config schema are the same; a different patch number only fixes bugs); otherwise
        one line saying what differs and how to bring the board up to date.
    """
    fix = "update it with 'nullsteer firmware deploy --port PORT --config STATION'"
    if not reported or reported == "?":
        return f"the board did not report its firmware version (expected {expected}); {fix}"
    got, want = _VERSION.match(reported), _VERSION.match(expected)
    if got is None:
        return f"the board reports an unreadable firmware version {reported!r} " \
               f"(expected {expected}); {fix}"
    if want is None:
        raise ValueError(f"expected version {expected!r} is not x.y.z")
    if got.group(1, 2) == want.group(1, 2):
        return None
    older = tuple(map(int, got.groups())) < tuple(map(int, want.groups()))
    return (f"the board runs firmware {reported}, this host expects {expected} "
            f"({'older' if older else 'newer'} firmware on the board); "
            + (fix if older else "update the host package or deploy this host's firmware"))


# --- board config -----------------------------------------------------------------------
@dataclass(frozen=True)
class FirmwareSettings:
    """The ``[firmware]`` section of the station file (see the module docstring)."""

    board_port: str = "stdio"
    uart_id: int = 0
    baud: int = 115200
    tx_pin: int | str | None = None
    rx_pin: int | str | None = None
    de_pin: int | str | None = None
    watchdog_ms: int | None = None
    wifi_ssid: str | None = None
    wifi_password: str | None = None


def _pin_key(table: dict[str, Any], key: str) -> int | str | None:
    value = table.get(key)
    if value is None:
        return None
    if isinstance(value, bool) or not isinstance(value, (int, str)) or value == "":
        raise ConfigError(f"firmware.{key}", f"must be a pin number or name, got {value!r}")
    return value


def parse_firmware_settings(station: Station) -> FirmwareSettings:
    """Read ``[firmware]``; bad values raise ConfigError naming the key."""
    t = station.section("firmware")
    FIRMWARE.check(t, "firmware")
    wd = FIRMWARE.get(t, "watchdog_ms", "firmware")
    if wd is not None:
        if 0 < wd < 500:
            raise ConfigError("firmware.watchdog_ms", f"use 0 (off) or at least 500, got {wd}")
    password = None
    if "wifi_password_env" in t:
        name = FIRMWARE.get(t, "wifi_password_env", "firmware")
        if name not in os.environ:
            raise ConfigError("firmware.wifi_password_env", f"environment variable {name} is not set")
        password = os.environ[name]
    return FirmwareSettings(
        board_port=FIRMWARE.get(t, "board_port", "firmware"),
        uart_id=FIRMWARE.get(t, "uart_id", "firmware"),
        baud=FIRMWARE.get(t, "baud", "firmware"),
        tx_pin=_pin_key(t, "tx_pin"), rx_pin=_pin_key(t, "rx_pin"), de_pin=_pin_key(t, "de_pin"),
        watchdog_ms=wd, wifi_ssid=FIRMWARE.get(t, "wifi_ssid", "firmware"),
        wifi_password=password)


def board_link(existing: dict[str, Any] | None, fw: FirmwareSettings) -> dict[str, Any]:
    """The board side of the serial link: the board file's own, unless it is the
    simulator's pty (or absent), then the ``[firmware]`` choice."""
    if isinstance(existing, dict) and existing.get("port") in PORT_MODULES:
        return dict(existing)
    if fw.board_port == "stdio":
        return {"kind": "serial", "port": "stdio"}
    link: dict[str, Any] = {"kind": "serial", "port": "uart", "id": fw.uart_id, "baud": fw.baud}
    for key, value in (("tx", fw.tx_pin), ("rx", fw.rx_pin), ("de_pin", fw.de_pin)):
        if value is not None:
            link[key] = value
    return link


def board_presets(station: Station) -> dict[str, dict[str, Any]]:
    """The station's presets in the board's form (fed end, ohms or open; per-band
    overrides stay on the host)."""
    from nullsteer.station.presets import parse_presets
    out: dict[str, dict[str, Any]] = {}
    for name, p in parse_presets(station).items():
        entry: dict[str, Any] = {"end": p.fed_end.value, "open": p.open}
        if p.ohms is not None and not p.open:
            entry["ohms"] = p.ohms
        out[name] = entry
    return out


def broker_ca_der(device: Device) -> bytes | None:
    """The CA certificate (DER) named by the ``ca=`` of an ``mqtts://`` link, else None."""
    from nullsteer.board.links.mqtt_link import parse_url
    url = parse_url(device.link)
    if not url["tls"] or not url["ca"]:
        return None
    where = f"device {device.id}.link ca="
    try:
        data = Path(url["ca"]).read_bytes()
    except OSError as exc:
        raise ConfigError(where, f"cannot read {url['ca']}: {exc.strerror}") from None
    if data[:1] == b"\x30":  # already DER (an ASN.1 SEQUENCE)
        return data
    import ssl
    try:
        return ssl.PEM_cert_to_DER_cert(data.decode("ascii"))
    except (ValueError, UnicodeDecodeError):
        raise ConfigError(where, f"{url['ca']} is not a PEM or DER certificate") from None


def mqtt_block(device: Device, station: Station, fw: FirmwareSettings) -> dict[str, Any]:
    """The board's ``"mqtt"`` block for a device linked by ``mqtt://`` or ``mqtts://``."""
    from nullsteer.board.links.mqtt_link import parse_url
    url = parse_url(device.link)
    block: dict[str, Any] = {"host": url["host"], "port": url["port"], "tls": url["tls"],
                             "id": url["device"], "base": url["base"],
                             "keepalive_s": url["keepalive"], "name": device.id}
    if url["tls"]:
        if url["ca"]:
            block["ca_file"] = CA_FILE
            block["server_hostname"] = url["host"]
        elif url["insecure"]:
            block["insecure"] = True
        else:
            raise ConfigError(f"device {device.id}.link",
                              "mqtts:// without ca=: the board could not check the broker's "
                              "certificate and would hand its password to any server; add "
                              "ca=<CA certificate file> to the URL, or insecure=1 to accept "
                              "an unchecked broker")
    for key in ("user", "password"):
        if url[key] is not None:
            block[key] = url[key]
    if device.key is not None:
        block["key_hex"] = device.key.hex()
    bearing = station.section("antenna").get("end_a_bearing_deg")
    if isinstance(bearing, (int, float)) and not isinstance(bearing, bool):
        block["end_a_bearing_deg"] = float(bearing)
    presets = board_presets(station)
    if presets:
        block["presets"] = presets
    if fw.wifi_ssid is not None:
        block["wifi"] = {"ssid": fw.wifi_ssid}
        if fw.wifi_password is not None:
            block["wifi"]["password"] = fw.wifi_password
    return block


def is_mqtt(device: Device) -> bool:
    return device.link.split("://", 1)[0] in ("mqtt", "mqtts")


def read_board_file(device: Device) -> dict[str, Any]:
    if device.board_config is None:
        raise ConfigError(f"device {device.id}.board",
                          "the device needs a board file (pins, roles) to bundle")
    from nullsteer.sim.board import read_board_config
    return read_board_config(device.board_config)


def designed_ladder_block(station: Station) -> dict[str, Any]:
    """The designer's ladder block for the station's ``[ladder]`` section."""
    if not station.section("ladder"):
        raise ConfigError("ladder", f"the station file {station.path} has no [ladder] section "
                                    "to design the ladder from")
    from nullsteer.ladder import board_ladder_block
    from nullsteer.ladder.station import design_for_station
    return board_ladder_block(design_for_station(station))


def assemble_board_config(station: Station, device: Device,
                          ladder: dict[str, Any] | None) -> dict[str, Any]:
    """The board.json of ``device``: its board file with the ladder block, link, MQTT
    block and ``[firmware]`` settings filled in, checked by the firmware's readers.

    Parameters
    ----------
    ladder : dict or None
        The ladder block from the designer; None keeps the board file's own.
    """
    fw = parse_firmware_settings(station)
    config = read_board_file(device)
    if ladder is not None:
        bits = sum(1 for r in config.get("relays", []) if isinstance(r, dict)
                   and r.get("role") == "ladder")
        if len(ladder["resistors_ohm"]) != bits:
            raise ConfigError(f"device {device.id}.board",
                              f"the board file has {bits} ladder relays but the designed "
                              f"ladder has {len(ladder['resistors_ohm'])} ([ladder] relays): "
                              "make them agree")
        config["ladder"] = ladder
    if "ladder" not in config:
        raise ConfigError(f"device {device.id}.board",
                          "no ladder table: write one with 'nullsteer ladder --config "
                          "STATION --board-config FILE'")
    config["link"] = board_link(config.get("link"), fw)
    if fw.watchdog_ms is not None:
        config["watchdog_ms"] = fw.watchdog_ms
    config.pop("test_write_pause_ms", None)  # a test hook, never on a real board
    if is_mqtt(device):
        config["mqtt"] = mqtt_block(device, station, fw)
    else:
        config.pop("mqtt", None)
    check_board_config(config)
    return config


# --- bundle -----------------------------------------------------------------------------
def module_names(config: dict[str, Any]) -> list[str]:
    """Firmware files this board config needs, in copy order (the entry point last)."""
    names = list(CORE_MODULES) + [PORT_MODULES[config["link"]["port"]]]
    if "mqtt" in config:
        names += list(MQTT_MODULES)
    return names


def make_bundle(station: Station, device: Device, ladder: dict[str, Any] | None = None,
                firmware: Path | None = None) -> Bundle:
    """Collect the files for ``device`` (nothing is written; see :func:`write_bundle`)."""
    from nullsteer.protocol import discovery, wire
    from nullsteer.sim.firmware import firmware_dir
    folder = firmware or firmware_dir()
    config = assemble_board_config(station, device, ladder)
    files = [BundleFile(name, (folder / name).read_bytes()) for name in module_names(config)]
    files.append(BundleFile("wire.py", Path(wire.__file__).read_bytes()))
    if "mqtt" in config:
        files.append(BundleFile("discovery.py", Path(discovery.__file__).read_bytes()))
        ca = broker_ca_der(device)
        if ca is not None:
            files.append(BundleFile(CA_FILE, ca))
    entry = (folder / ENTRY).read_bytes()
    files.append(BundleFile(BOARD_FILE, (json.dumps(config, indent=1) + "\n").encode()))
    files.append(BundleFile(ENTRY, entry))
    return Bundle(device.id, firmware_version(folder), config, tuple(files))


def _write_private(path: Path, data: bytes) -> None:
    """Write ``path`` readable by its owner only, from the first byte on."""
    fd = os.open(path, os.O_WRONLY | os.O_CREAT | os.O_TRUNC, 0o600)
    with os.fdopen(fd, "wb") as f:
        os.fchmod(f.fileno(), 0o600)  # a file that was there before keeps no wider mode
        f.write(data)


def write_bundle(bundle: Bundle, out_dir: Path) -> list[Path]:
    """Write the bundle's files and MANIFEST.json into ``out_dir``, each owner-only
    (board.json may hold a password or key). A folder made here is owner-only; an
    existing one keeps its mode. Files of the folder not in the bundle are left alone.
    Returns the written paths."""
    if not out_dir.is_dir():
        out_dir.parent.mkdir(parents=True, exist_ok=True)
        out_dir.mkdir(mode=0o700)
    written = []
    for f in bundle.files:
        path = out_dir / board_name(f.name, "bundle")
        _write_private(path, f.data)
        written.append(path)
    manifest = out_dir / MANIFEST
    _write_private(manifest, (json.dumps(bundle.manifest(), indent=1) + "\n").encode())
    written.append(manifest)
    return written


def board_name(name: object, where: str) -> str:
    """``name`` if it is a plain file name for the board's folder (no ``/``, ``\\``,
    ``..``, leading dot or absolute path), else ConfigError naming ``where``."""
    if not isinstance(name, str) or not _BOARD_NAME.match(name) or ".." in name:
        raise ConfigError(where, f"file name {name!r} is not a plain name inside the bundle")
    return name


def public_config(config: dict[str, Any]) -> dict[str, Any]:
    """``config`` without its secrets (:data:`SECRET_KEYS`), for printing."""
    out = json.loads(json.dumps(config))
    for path in SECRET_KEYS:
        holder = out
        for key in path[:-1]:
            holder = holder.get(key) if isinstance(holder, dict) else None
        if isinstance(holder, dict):
            holder.pop(path[-1], None)
    return out


def read_bundle(folder: Path) -> Bundle:
    """Read a bundle folder back, checking every file against its manifest."""
    try:
        manifest = json.loads((folder / MANIFEST).read_text())
        entries = manifest["files"]
        files = []
        for e in entries:
            board_name(e["name"], f"--bundle {folder / MANIFEST}")
            data = (folder / e["name"]).read_bytes()
            if hashlib.sha256(data).hexdigest() != e["sha256"]:
                raise ConfigError(f"--bundle {folder / e['name']}",
                                  "changed since the bundle was made (SHA-256 differs); "
                                  "make the bundle again")
            files.append(BundleFile(e["name"], data))
        config = json.loads((folder / BOARD_FILE).read_text())
        return Bundle(manifest["device"], manifest["firmware"], config, tuple(files))
    except OSError as exc:
        raise ConfigError("--bundle", f"cannot read {exc.filename}: {exc.strerror}") from None
    except (KeyError, TypeError, ValueError) as exc:
        raise ConfigError("--bundle", f"{folder / MANIFEST} is not a bundle manifest ({exc})") from None


def staged_folder(bundle: Bundle) -> Path:
    """A temporary folder holding ``bundle`` (for a deploy straight from --config)."""
    folder = Path(tempfile.mkdtemp(prefix="nullsteer-bundle-"))
    write_bundle(bundle, folder)
    return folder
