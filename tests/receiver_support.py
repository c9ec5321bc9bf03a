"""Test servers for the receiver tests: the real rigctld, a rigctld stand-in with odd
replies, and an rtl_tcp-protocol server streaming synthetic IQ.

The rtl_tcp server here is written from the protocol description alone (12-byte
header ``RTL0`` + tuner type + gain count, both u32 big-endian; 5-byte commands
``>BI``; u8 I/Q centred on 127.5), independent of the package's client and stand-in.
"""

from __future__ import annotations

import shutil
import socket
import struct
import subprocess
import threading
import time
from collections.abc import Callable

import pytest

RIGCTLD = shutil.which("rigctld") or "/usr/bin/rigctld"


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


class Rigctld:
    """The real rigctld with Hamlib's dummy rig (model 1) on a loopback port."""

    def __init__(self, port: int | None = None) -> None:
        self.port = port or free_port()
        self.proc = subprocess.Popen([RIGCTLD, "-m", "1", "-T", "127.0.0.1", "-t", str(self.port)],
                                     stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        deadline = time.monotonic() + 10
        while True:
            try:
                socket.create_connection(("127.0.0.1", self.port), timeout=0.5).close()
                return
            except OSError:
                if time.monotonic() > deadline or self.proc.poll() is not None:
                    self.stop()
                    raise RuntimeError("rigctld did not start")
                time.sleep(0.05)

    @property
    def url(self) -> str:
        return f"rigctl://127.0.0.1:{self.port}"

    def raw(self, line: str) -> str:
        """Send one plain command on a connection of our own; its first reply line."""
        with socket.create_connection(("127.0.0.1", self.port), timeout=2) as s:
            s.sendall(line.encode() + b"\n")
            return s.makefile().readline().strip()

    def stop(self) -> None:
        self.proc.terminate()
        try:
            self.proc.wait(5)
        except subprocess.TimeoutExpired:
            self.proc.kill()


@pytest.fixture(scope="module")
def rigctld():
    if not shutil.which("rigctld") and not shutil.which(RIGCTLD):
        pytest.fail("rigctld is missing: 'make test' installs libhamlib-utils as root")
    rig = Rigctld()
    yield rig
    rig.stop()


class LoopbackServer:
    """A TCP server on 127.0.0.1 serving each client with ``_serve(conn)`` in a thread."""

    def __init__(self) -> None:
        self.srv = socket.create_server(("127.0.0.1", 0))
        self.port = self.srv.getsockname()[1]
        self.connections = 0
        self._stop = False
        threading.Thread(target=self._accept, daemon=True).start()

    def _accept(self) -> None:
        self.srv.settimeout(0.1)
        while not self._stop:
            try:
                conn, _ = self.srv.accept()
            except (socket.timeout, OSError):
                continue
            self.connections += 1
            threading.Thread(target=self._serve, args=(conn,), daemon=True).start()

    def _serve(self, conn: socket.socket) -> None:
        raise NotImplementedError

    def stop(self) -> None:
        self._stop = True
        self.srv.close()


class ScriptedRig(LoopbackServer):
    """A rigctld stand-in: ``reply(command, connection_number) -> bytes | None``.

    None keeps silent (the client times out); the bytes ``b"<close>"`` drop the
    connection; a reply holding ``b"<split>"`` is sent in two packets with a pause.
    """

    def __init__(self, reply: Callable[[str, int], bytes | None]) -> None:
        self.reply = reply
        self.commands: list[str] = []
        super().__init__()

    @property
    def url(self) -> str:
        return f"rigctl://127.0.0.1:{self.port}"

    def _serve(self, conn: socket.socket) -> None:
        number = self.connections
        f = conn.makefile("rb")
        try:
            for line in f:
                cmd = line.decode().strip()
                self.commands.append(cmd)
                out = self.reply(cmd, number)
                if out is None:
                    continue
                if out == b"<close>":
                    break
                first, _, rest = out.partition(b"<split>")
                conn.sendall(first)
                if rest:
                    time.sleep(0.05)
                    conn.sendall(rest)
        except OSError:
            pass
        finally:
            conn.close()


class RtlTcpServer(LoopbackServer):
    """Streams ``iq_u8`` (bytes, cycled) to each client, paced to ``rate_hz``; records
    the commands received as (command, value) pairs."""

    def __init__(self, iq_u8: bytes, rate_hz: float, magic: bytes = b"RTL0",
                 drop_after_bytes: int | None = None) -> None:
        self.data = iq_u8
        self.rate_hz = rate_hz
        self.magic = magic
        self.drop_after = drop_after_bytes
        self.commands: list[tuple[int, int]] = []
        super().__init__()

    def url(self, query: str = "") -> str:
        return f"rtltcp://127.0.0.1:{self.port}" + (f"?{query}" if query else "")

    def _read_commands(self, conn: socket.socket) -> None:
        buf = b""
        while not self._stop:
            try:
                chunk = conn.recv(100)
            except OSError:
                return
            if not chunk:
                return
            buf += chunk
            while len(buf) >= 5:
                self.commands.append(struct.unpack(">BI", buf[:5]))
                buf = buf[5:]

    def _serve(self, conn: socket.socket) -> None:
        try:
            conn.sendall(self.magic + struct.pack(">II", 5, 29))
            threading.Thread(target=self._read_commands, args=(conn,), daemon=True).start()
            block = int(self.rate_hz * 0.005) * 2  # 5 ms of I/Q bytes
            pos, sent, t0 = 0, 0, time.monotonic()
            while not self._stop:
                if self.drop_after is not None and sent >= self.drop_after:
                    self.drop_after = None  # drop once; the next connection streams on
                    break
                chunk = (self.data[pos:] + self.data)[:block]
                pos = (pos + block) % len(self.data)
                conn.sendall(chunk)
                sent += len(chunk)
                delay = t0 + sent / 2 / self.rate_hz - time.monotonic()
                if delay > 0:
                    time.sleep(delay)
        except OSError:
            pass
        finally:
            conn.close()
