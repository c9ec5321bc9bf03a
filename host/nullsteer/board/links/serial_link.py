"""Serial transport through pyserial.

URL forms:

* ``serial:///dev/ttyUSB0?baud=115200`` — a local port (``serial://COM3`` on Windows);
  options ``baud`` (default 115200), ``rtscts`` and ``dsrdtr`` (0/1).
* ``socket://host:port`` and ``rfc2217://host:port`` — handed to pyserial's own URL
  handlers (a serial-to-network adaptor at the antenna).

Lines are assembled from the byte stream; anything longer than the protocol's maximum
line is discarded up to the next newline (the board does the same).
"""

from __future__ import annotations

import time
from urllib.parse import urlsplit

import serial

from nullsteer.protocol import wire
from nullsteer.errors import ConfigError, LinkError, redacted
from nullsteer.board.links import query_options

DEFAULT_BAUD = 115200


class SerialLink:
    """A line link over a pyserial port object (anything with read/write/close)."""

    def __init__(self, port: serial.SerialBase, url: str) -> None:
        self.url = url
        self._port = port
        self._buffer = bytearray()
        self._discarding = False

    def write_line(self, line: bytes) -> None:
        try:
            self._port.write(line)
            self._port.flush()
        except (serial.SerialException, OSError) as exc:
            raise LinkError(f"{self.url}: write failed: {exc}") from None

    def read_line(self, timeout_s: float) -> bytes | None:
        deadline = time.monotonic() + timeout_s
        while True:
            line = self._take_line()
            if line is not None:
                return line
            remaining = deadline - time.monotonic()
            if remaining <= 0:
                return None
            self._port.timeout = min(remaining, 0.05)
            try:
                chunk = self._port.read(max(1, self._port.in_waiting))
            except (serial.SerialException, OSError) as exc:
                raise LinkError(f"{self.url}: read failed: {exc}") from None
            if chunk:
                self._buffer.extend(chunk)

    def _take_line(self) -> bytes | None:
        while True:
            nl = self._buffer.find(b"\n")
            if nl < 0:
                if len(self._buffer) > wire.MAX_LINE:
                    self._buffer.clear()
                    self._discarding = True
                return None
            line = bytes(self._buffer[: nl + 1])
            del self._buffer[: nl + 1]
            if self._discarding:
                self._discarding = False
                continue
            return line

    def close(self) -> None:
        try:
            self._port.close()
        except (serial.SerialException, OSError):
            pass


def _flag(options: dict[str, str], key: str) -> bool:
    value = options.get(key, "0")
    if value not in ("0", "1"):
        raise ConfigError("--link", f"option {key} must be 0 or 1, got {value!r}")
    return value == "1"


def open_url(url: str, **_: object) -> SerialLink:
    """Open ``url`` (see the module docstring); errors name the URL."""
    parts = urlsplit(url)
    options = query_options(url)
    try:
        baud = int(options.get("baud", DEFAULT_BAUD))
    except ValueError:
        raise ConfigError("--link", f"baud must be a whole number, got {options['baud']!r}") from None
    if baud <= 0:
        raise ConfigError("--link", f"baud must be > 0, got {baud}")
    try:
        if parts.scheme == "serial":
            device = (parts.netloc + parts.path) or ""
            if not device:
                raise ConfigError("--link", f"no port in {redacted(url)!r} (e.g. serial:///dev/ttyUSB0)")
            port = serial.Serial(device, baudrate=baud, timeout=0.05,
                                 rtscts=_flag(options, "rtscts"), dsrdtr=_flag(options, "dsrdtr"))
        else:
            port = serial.serial_for_url(url.split("?")[0], baudrate=baud, timeout=0.05)
    except (serial.SerialException, OSError, ValueError) as exc:
        raise LinkError(f"cannot open {redacted(url)}: {exc}") from None
    return SerialLink(port, url)
