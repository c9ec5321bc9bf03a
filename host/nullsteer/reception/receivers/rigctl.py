"""``rigctl://HOST:PORT`` — a radio through Hamlib's network protocol (``rigctld``).

URL: ``rigctl://127.0.0.1:4532?timeout_s=2&reply=extended&resolution_db=1`` (default
port 4532, rigctld's).

``timeout_s``      longest wait for one reply, seconds (default 2)
``reply``          ``extended`` (default: commands sent with a ``+`` prefix, replies end
                   in ``RPRT n``, so their end is never guessed) or ``plain`` (one line)
``resolution_db``  the radio's meter step, dB (default 1: rigctld reports whole dB);
                   some radios report 6 dB steps (one S unit)

Commands used (Hamlib's rigctld text protocol): ``l STRENGTH`` (get_level; the signal
strength in dB relative to S9, so S9 reads 0 and S9+10 reads 10) and ``f``
(get_freq, hertz). A plain reply is the bare value (``-54``), an extended one is
``get_level: STRENGTH`` / ``-54`` / ``RPRT 0``; older versions put a label before the
value (``Level Value: -54``), which is accepted too. ``RPRT`` with a negative code is
the rig's error.

A timeout, a dropped connection or a reply that cannot be parsed closes the socket;
the command is tried once more on a new connection, then a
:class:`~nullsteer.errors.MeasurementError` (exit code 5) says what happened.

The level depends on the radio: its AGC (an AGC that is on compresses differences,
so set it off or slow), its preamplifier and attenuator, and its meter's resolution.
"""

from __future__ import annotations

import re
import socket
import time

from nullsteer.errors import MeasurementError
from nullsteer.reception.receivers.base import Reading, ReceiverUrl, quantisation_sigma_db

DEFAULT_PORT = 4532
_NUMBER = re.compile(r"^[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?$")
_RPRT = re.compile(r"^RPRT\s+(-?\d+)$")
_MAX_REPLY = 64 * 1024


class RigctlReceiver:
    """A rig behind ``rigctld``; see the module docstring."""

    name = "rigctl"
    unit = "dB rel S9"

    def __init__(self, host: str, port: int = DEFAULT_PORT, timeout_s: float = 2.0,
                 extended: bool = True, resolution_db: float = 1.0, url: str = "",
                 retries: int = 1) -> None:
        self.host, self.port = host or "127.0.0.1", port
        self.timeout_s = timeout_s
        self.extended = extended
        self.resolution_db = resolution_db
        self.retries = retries
        self.url = url or f"rigctl://{self.host}:{self.port}"
        self.reconnects = 0
        self._sock: socket.socket | None = None
        self._buf = b""

    # -- connection --------------------------------------------------------------
    def _connect(self) -> socket.socket:
        if self._sock is None:
            try:
                sock = socket.create_connection((self.host, self.port), timeout=self.timeout_s)
            except OSError as exc:
                raise MeasurementError(f"cannot reach rigctld at {self.host}:{self.port}: "
                                       f"{exc.strerror or exc}") from None
            sock.setsockopt(socket.IPPROTO_TCP, socket.TCP_NODELAY, 1)
            self._sock, self._buf = sock, b""
        return self._sock

    def close(self) -> None:
        if self._sock is not None:
            try:
                self._sock.close()
            finally:
                self._sock, self._buf = None, b""

    def __enter__(self) -> RigctlReceiver:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def _line(self, sock: socket.socket, deadline: float) -> str:
        while b"\n" not in self._buf:
            left = deadline - time.monotonic()
            if left <= 0:
                raise TimeoutError
            sock.settimeout(left)
            chunk = sock.recv(4096)
            if not chunk:
                raise ConnectionResetError("rigctld closed the connection")
            self._buf += chunk
            if len(self._buf) > _MAX_REPLY:
                raise _Garbled("reply too long without a line end")
        line, _, self._buf = self._buf.partition(b"\n")
        return line.decode("utf-8", "replace").strip()

    def _exchange(self, command: str) -> list[str]:
        """Send one command; the reply's lines (extended: up to and without ``RPRT``)."""
        sock = self._connect()
        sock.settimeout(self.timeout_s)
        sock.sendall(((("+" if self.extended else "") + command) + "\n").encode())
        deadline = time.monotonic() + self.timeout_s
        if not self.extended:
            line = self._line(sock, deadline)
            m = _RPRT.match(line)
            if m and int(m.group(1)) != 0:
                raise _RigRefused(int(m.group(1)))
            return [line]
        lines: list[str] = []
        while True:
            line = self._line(sock, deadline)
            m = _RPRT.match(line)
            if m:
                if int(m.group(1)) != 0:
                    raise _RigRefused(int(m.group(1)))
                return lines
            if line:
                lines.append(line)
            if len(lines) > 32:
                raise _Garbled("no RPRT line ends the reply")

    def query(self, command: str) -> float:
        """Send ``command`` (e.g. ``l STRENGTH``) and return its numeric value."""
        last = ""
        for attempt in range(self.retries + 1):
            try:
                return _value(self._exchange(command), command)
            except _RigRefused as exc:
                raise MeasurementError(f"rigctld refused {command!r}: RPRT {exc.code}"
                                       f"{_RPRT_TEXT.get(exc.code, '')}") from None
            except TimeoutError:
                last = f"no reply to {command!r} within {self.timeout_s:g} s"
            except _Garbled as exc:
                last = f"unreadable reply to {command!r}: {exc}"
            except OSError as exc:
                last = f"connection to {self.host}:{self.port} failed: {exc.strerror or exc}"
            self.close()  # a late or partial reply would desynchronise: start afresh
            if attempt < self.retries:
                self.reconnects += 1
        raise MeasurementError(f"rigctld at {self.host}:{self.port}: {last}")

    # -- receiver ----------------------------------------------------------------
    def read(self) -> Reading:
        level = self.query("l STRENGTH")
        return Reading(level, quantisation_sigma_db(self.resolution_db), self.unit,
                       self.url, None, 1)

    def read_db(self) -> float:
        return self.read().level_db

    def freq_hz(self) -> float | None:
        return self.query("f")


class _RigRefused(Exception):
    def __init__(self, code: int) -> None:
        super().__init__(code)
        self.code = code


class _Garbled(Exception):
    pass


# Hamlib's error codes (rig.h, enum rig_errcode_e) for the messages users see most.
_RPRT_TEXT = {-1: " (invalid parameter)", -4: " (not implemented)", -5: " (timeout at the rig)",
              -6: " (input/output error)", -11: " (feature not available)"}


def _value(lines: list[str], command: str) -> float:
    """The numeric value in a reply: the last line holding a number, label allowed."""
    for line in reversed(lines):
        text = line.rsplit(":", 1)[-1].strip() if ":" in line else line.strip()
        if _NUMBER.match(text):
            value = float(text)
            if value == value and abs(value) != float("inf"):
                return value
    shown = " | ".join(lines)[:80]
    raise _Garbled(f"expected a number, got {shown!r}")


def open_url(u: ReceiverUrl) -> RigctlReceiver:
    """A :class:`RigctlReceiver` for a parsed ``rigctl://`` URL."""
    timeout = u.pop_float("timeout_s", 2.0, minimum=0.01, maximum=120.0) or 2.0
    reply = u.pop_choice("reply", "extended", ("extended", "plain"))
    res = u.pop_float("resolution_db", 1.0, minimum=0.0, maximum=20.0)
    u.check_used()
    return RigctlReceiver(u.host, u.port or DEFAULT_PORT, timeout_s=timeout,
                          extended=reply == "extended", resolution_db=res or 0.0, url=u.text)
