"""``rtltcp://HOST:PORT`` — an RTL2832-based SDR served by ``rtl_tcp`` (its open protocol).

URL: ``rtltcp://127.0.0.1:1234?freq_mhz=1.83&rate=2400000&gain=auto&direct=auto`` (default
port 1234, rtl_tcp's). Options (plus the level options of :mod:`.iq`):

``freq_mhz``  frequency of the signal, MHz (``--freq`` overrides it); the tuner is set to
              ``freq - offset_khz``
``rate``      sample rate, samples/s (default 2400000)
``gain``      tuner gain in dB, or ``auto`` (default: the tuner's AGC)
``direct``    direct sampling: ``0`` off, ``1`` I branch, ``2`` Q branch, or ``auto``
              (default: Q branch below 24 MHz, where the usual tuners stop; MF and LF)
``ppm``       frequency correction, ppm (default 0)
``timeout_s`` longest wait for samples, seconds (default 3)

Wire format (rtl_tcp): on connecting the server sends 12 bytes, ``RTL0``, the tuner type
(u32 big-endian) and the number of gain steps (u32 BE); the client sends 5-byte commands
``struct.pack(">BI", command, value)`` — 1 centre frequency (Hz), 2 sample rate, 3 gain
mode (0 auto, 1 manual), 4 gain (tenths of dB), 5 frequency correction (ppm), 9 direct
sampling (0/1/2); then the server streams interleaved unsigned 8-bit I/Q centred on
127.5.

A thread drains the stream all the time (the server would otherwise queue old samples),
and a reading uses only samples that arrive after it was asked for: it passes over what
already waits in the socket's receive queue (``FIONREAD`` where the system has it), one
reader chunk that may be on its way to the buffer, and a short ``skip_s`` (default
0.01 s) for data still in flight from the server. The level is in dBFS; it moves
with the gain, so keep ``gain`` fixed (not ``auto``) while comparing settings.
"""

from __future__ import annotations

import socket
import struct
import sys
import threading
import time
from collections import deque

from nullsteer.errors import ConfigError, MeasurementError
from nullsteer.reception.receivers.base import Reading, ReceiverUrl
from nullsteer.reception.receivers.iq import IqSettings, iq_reading, parse_iq_settings, samples_needed
from nullsteer.reception.receivers.spectrum import u8_to_complex

DEFAULT_PORT = 1234
HEADER_MAGIC = b"RTL0"
RECV_CHUNK = 8192  # bytes per read of the drain thread
DIRECT_BELOW_HZ = 24e6  # the usual tuners (R820T and kin) start about here (common practice)


def queued_bytes(sock: socket.socket | None) -> int:
    """Bytes waiting in ``sock``'s receive queue (ioctl FIONREAD); 0 where unknown."""
    if sock is None or sys.platform == "win32":
        return 0
    import fcntl
    import termios
    try:
        buf = fcntl.ioctl(sock.fileno(), termios.FIONREAD, b"\0\0\0\0")
    except OSError:
        return 0
    return max(0, struct.unpack("i", buf)[0])


class Command:
    """rtl_tcp command numbers."""

    FREQ = 1
    RATE = 2
    GAIN_MODE = 3
    GAIN = 4
    PPM = 5
    DIRECT = 9


def command_bytes(command: int, value: int) -> bytes:
    """One 5-byte command: u8 command, u32 big-endian value (negative: two's complement)."""
    return struct.pack(">BI", command, value & 0xFFFFFFFF)


class RtlTcpReceiver:
    """Client of an rtl_tcp server; see the module docstring."""

    name = "rtltcp"
    unit = "dBFS"
    resolution_db = 0.0

    def __init__(self, host: str, port: int, freq_hz: float, rate_hz: float = 2.4e6,
                 gain_db: float | None = None, direct: int | None = None, ppm: int = 0,
                 settings: IqSettings | None = None, timeout_s: float = 3.0,
                 skip_s: float = 0.01, url: str = "") -> None:
        self.host, self.port = host or "127.0.0.1", port
        self.rate_hz = rate_hz
        self.gain_db = gain_db
        self.direct_choice = direct
        self.ppm = ppm
        self.settings = settings or IqSettings()
        self.timeout_s = timeout_s
        self.skip_s = skip_s
        self.url = url or f"rtltcp://{self.host}:{self.port}"
        self.tuner_type = 0
        self.gain_steps = 0
        self.reconnects = 0
        self._freq_hz = freq_hz
        self._sock: socket.socket | None = None
        self._thread: threading.Thread | None = None
        self._cond = threading.Condition()
        self._chunks: deque[bytes] = deque()
        self._first = 0      # stream byte index of the first byte held in _chunks
        self._total = 0      # stream bytes received so far
        self._keep = 0       # bytes to hold back
        self._error: str | None = None
        self._stop = False

    # -- connection --------------------------------------------------------------
    def direct_mode(self) -> int:
        if self.direct_choice is not None:
            return self.direct_choice
        return 2 if self._freq_hz < DIRECT_BELOW_HZ else 0

    def centre_hz(self) -> float:
        return self._freq_hz - self.settings.offset_hz

    def _open(self) -> None:
        try:
            sock = socket.create_connection((self.host, self.port), timeout=self.timeout_s)
        except OSError as exc:
            raise MeasurementError(f"cannot reach rtl_tcp at {self.host}:{self.port}: "
                                   f"{exc.strerror or exc}") from None
        try:
            header = b""
            while len(header) < 12:
                chunk = sock.recv(12 - len(header))
                if not chunk:
                    raise MeasurementError(f"{self.host}:{self.port} closed before the "
                                           "rtl_tcp header")
                header += chunk
            if header[:4] != HEADER_MAGIC:
                raise MeasurementError(f"{self.host}:{self.port} is not an rtl_tcp server "
                                       f"(header {header[:4]!r}, expected {HEADER_MAGIC!r})")
            self.tuner_type, self.gain_steps = struct.unpack(">II", header[4:12])
            cmds = [command_bytes(Command.RATE, int(round(self.rate_hz))),
                    command_bytes(Command.DIRECT, self.direct_mode()),
                    command_bytes(Command.FREQ, int(round(self.centre_hz())))]
            if self.ppm:
                cmds.append(command_bytes(Command.PPM, self.ppm))
            if self.gain_db is None:
                cmds.append(command_bytes(Command.GAIN_MODE, 0))
            else:
                cmds += [command_bytes(Command.GAIN_MODE, 1),
                         command_bytes(Command.GAIN, int(round(self.gain_db * 10)))]
            sock.sendall(b"".join(cmds))
        except socket.timeout:
            sock.close()
            raise MeasurementError(f"{self.host}:{self.port} sent no rtl_tcp header within "
                                   f"{self.timeout_s:g} s") from None
        except (MeasurementError, OSError):
            sock.close()
            raise
        sock.settimeout(0.5)
        self._keep = 4 * samples_needed(self.settings, self.rate_hz) * 2
        with self._cond:
            self._sock, self._error, self._stop = sock, None, False
            self._chunks.clear()
            self._first = self._total = 0
        self._thread = threading.Thread(target=self._drain, name="rtltcp-reader", daemon=True)
        self._thread.start()

    def _drain(self) -> None:
        sock = self._sock
        assert sock is not None
        while not self._stop:
            try:
                chunk = sock.recv(RECV_CHUNK)
            except socket.timeout:
                continue
            except OSError as exc:
                chunk, err = b"", f"connection failed: {exc.strerror or exc}"
            else:
                err = "the server closed the connection"
            with self._cond:
                if not chunk:
                    self._error = err
                    self._cond.notify_all()
                    return
                self._chunks.append(chunk)
                self._total += len(chunk)
                while self._chunks and self._total - self._first - len(self._chunks[0]) > self._keep:
                    self._first += len(self._chunks.popleft())
                self._cond.notify_all()

    def close(self) -> None:
        self._stop = True
        if self._sock is not None:
            try:
                self._sock.shutdown(socket.SHUT_RDWR)
            except OSError:
                pass
            self._sock.close()
        if self._thread is not None:
            self._thread.join(timeout=2.0)
        self._sock, self._thread = None, None

    def __enter__(self) -> RtlTcpReceiver:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    # -- samples -----------------------------------------------------------------
    def _fresh_bytes(self, count: int) -> bytes:
        """``count`` stream bytes that arrive after this call (an even start: I then Q)."""
        with self._cond:
            start = (self._total + queued_bytes(self._sock) + RECV_CHUNK
                     + 2 * int(self.skip_s * self.rate_hz))
            start += start % 2
            end = start + count
            deadline = time.monotonic() + self.timeout_s + count / (2 * self.rate_hz)
            while self._total < end:
                if self._error is not None:
                    raise ConnectionError(self._error)
                left = deadline - time.monotonic()
                if left <= 0:
                    raise TimeoutError
                self._cond.wait(left)
            data = b"".join(self._chunks)
            first = self._first
        return data[start - first:end - first]

    def samples(self, count: int) -> bytes:
        """Raw u8 I/Q for ``count`` complex samples; one reconnect on failure."""
        for attempt in (0, 1):
            if self._sock is None:
                self._open()
            try:
                return self._fresh_bytes(2 * count)
            except TimeoutError:
                last = f"no samples within {self.timeout_s:g} s"
            except ConnectionError as exc:
                last = str(exc)
            self.close()
            if attempt == 0:
                self.reconnects += 1
        raise MeasurementError(f"rtl_tcp at {self.host}:{self.port}: {last}")

    def read(self) -> Reading:
        n = samples_needed(self.settings, self.rate_hz)
        iq = u8_to_complex(self.samples(n))
        return iq_reading(iq, self.rate_hz, self.settings, self.url, self._freq_hz)

    def read_db(self) -> float:
        return self.read().level_db

    def freq_hz(self) -> float | None:
        return self._freq_hz


def open_url(u: ReceiverUrl, freq_hz: float | None = None) -> RtlTcpReceiver:
    """A :class:`RtlTcpReceiver` for a parsed ``rtltcp://`` URL; ``freq_hz`` overrides
    ``freq_mhz``."""
    settings = parse_iq_settings(u)
    f_mhz = u.pop_float("freq_mhz", None, minimum=0.0, exclusive_min=True, maximum=2000.0)
    if freq_hz is None:
        if f_mhz is None:
            raise ConfigError("--freq", "rtltcp:// needs a frequency: --freq MHZ or ?freq_mhz=")
        freq_hz = f_mhz * 1e6
    rate = u.pop_float("rate", 2.4e6, minimum=1e3, maximum=3.2e6) or 2.4e6
    gain_text = u.options.pop("gain", "auto")
    gain: float | None = None
    if gain_text != "auto":
        try:
            gain = float(gain_text)
        except ValueError:
            raise ConfigError("--receiver gain", f"must be dB or auto, got {gain_text!r}") from None
        if not -10.0 <= gain <= 60.0:
            raise ConfigError("--receiver gain", f"must be -10..60 dB, got {gain_text!r}")
    direct_text = u.pop_choice("direct", "auto", ("auto", "0", "1", "2"))
    ppm = u.pop_float("ppm", 0.0, minimum=-1000.0, maximum=1000.0) or 0.0
    timeout = u.pop_float("timeout_s", 3.0, minimum=0.05, maximum=120.0) or 3.0
    u.check_used()
    if abs(settings.offset_hz) >= rate / 2:
        raise ConfigError("--receiver offset_khz", f"must lie inside +-{rate / 2e3:g} kHz")
    return RtlTcpReceiver(u.host, u.port or DEFAULT_PORT, freq_hz, rate_hz=rate,
                          gain_db=gain, direct=None if direct_text == "auto" else int(direct_text),
                          ppm=int(round(ppm)), settings=settings, timeout_s=timeout, url=u.text)
