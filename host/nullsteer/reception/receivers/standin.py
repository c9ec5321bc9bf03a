"""A stand-in rtl_tcp server on loopback, streaming synthetic IQ (demo and benchmarks).

:class:`IqStandIn` speaks the rtl_tcp wire format (see :mod:`.rtltcp`): it sends the
12-byte header, obeys the centre-frequency, sample-rate and direct-sampling commands,
and streams u8 I/Q paced to the sample rate. What it streams comes from a callable
``scene(centre_hz) -> (tones, noise_fs2_per_hz)`` asked again for every block of
``block_s`` seconds, so a scene that reads a board's relays follows each switching.
:func:`virtual_scene` makes such a scene from the simulator's virtual receiver.
"""

from __future__ import annotations

import socket
import struct
import threading
import time
from collections.abc import Callable, Sequence
from typing import Any

from nullsteer.reception.receivers.synth import IqSynth, quantise_u8

Scene = Callable[[float], tuple[Sequence[tuple[float, float]], float]]
TUNER_R820T = 5  # librtlsdr's tuner-type number for the R820T


class IqStandIn:
    """rtl_tcp stand-in; ``with IqStandIn(scene) as s: url = s.url``.

    Parameters
    ----------
    scene : callable
        ``scene(centre_hz) -> (tones [(offset_hz, power_fs2)], noise_fs2_per_hz)``.
    block_s : float
        Length of each streamed block, seconds.
    """

    def __init__(self, scene: Scene, block_s: float = 0.01, seed: int = 1) -> None:
        self.scene = scene
        self.block_s = block_s
        self.seed = seed
        self.rate_hz = 2.048e6
        self.centre_hz = 100e6
        self.direct = 0
        self.commands: list[tuple[int, int]] = []
        self._srv = socket.create_server(("127.0.0.1", 0))
        self.port = self._srv.getsockname()[1]
        self._stop = threading.Event()
        self._threads: list[threading.Thread] = []

    @property
    def url(self) -> str:
        return f"rtltcp://127.0.0.1:{self.port}"

    def start(self) -> IqStandIn:
        t = threading.Thread(target=self._accept, name="iq-standin", daemon=True)
        t.start()
        self._threads.append(t)
        return self

    def stop(self) -> None:
        self._stop.set()
        self._srv.close()
        for t in self._threads:
            t.join(timeout=2.0)

    def __enter__(self) -> IqStandIn:
        return self.start()

    def __exit__(self, *exc: object) -> None:
        self.stop()

    def _accept(self) -> None:
        self._srv.settimeout(0.2)
        while not self._stop.is_set():
            try:
                conn, _ = self._srv.accept()
            except (socket.timeout, OSError):
                continue
            t = threading.Thread(target=self._serve, args=(conn,), daemon=True)
            t.start()
            self._threads.append(t)

    def _commands(self, conn: socket.socket) -> None:
        buf = b""
        while not self._stop.is_set():
            try:
                chunk = conn.recv(64)
            except socket.timeout:
                continue
            except OSError:
                return
            if not chunk:
                return
            buf += chunk
            while len(buf) >= 5:
                cmd, value = struct.unpack(">BI", buf[:5])
                buf = buf[5:]
                self.commands.append((cmd, value))
                if cmd == 1:
                    self.centre_hz = float(value)
                elif cmd == 2:
                    self.rate_hz = float(value)
                elif cmd == 9:
                    self.direct = value

    def _serve(self, conn: socket.socket) -> None:
        conn.settimeout(0.2)
        synth: IqSynth | None = None
        try:
            conn.sendall(b"RTL0" + struct.pack(">II", TUNER_R820T, 29))
            reader = threading.Thread(target=self._commands, args=(conn,), daemon=True)
            reader.start()
            t_next = time.monotonic()
            while not self._stop.is_set():
                if synth is None or synth.rate_hz != self.rate_hz:
                    synth = IqSynth(self.rate_hz, self.seed)
                n = max(1, int(round(self.block_s * self.rate_hz)))
                tones, density = self.scene(self.centre_hz)
                data = quantise_u8(synth.block(n, tones, density))
                conn.sendall(data)
                t_next += n / self.rate_hz
                delay = t_next - time.monotonic()
                if delay > 0:
                    time.sleep(delay)
                elif delay < -1.0:  # far behind (a slow machine): do not try to catch up
                    t_next = time.monotonic()
        except OSError:
            pass
        finally:
            conn.close()


def virtual_scene(receiver: Any, freq_hz: float,
                  board_state: Callable[[], tuple[str, int, bool]],
                  gain_db: float) -> Scene:
    """A scene from the virtual receiver: its stations' power at ``freq_hz`` as one tone,
    its noise as white noise of the same power in its bandwidth; dBm + ``gain_db`` = dBFS."""
    g = 10.0 ** ((gain_db + 30.0) / 10.0)  # W -> FS^2: dBFS = dBW + 30 + gain_db

    def scene(centre_hz: float) -> tuple[list[tuple[float, float]], float]:
        signal_w, noise_w = receiver.powers_w(freq_hz, *board_state())
        return [(freq_hz - centre_hz, signal_w * g)], noise_w * g / receiver.bandwidth_hz

    return scene
