"""Two pseudo-terminals joined by a relay thread.

The board (MicroPython) opens one pty, the host (pyserial) the other. They must not share
one pty: pyserial sets VMIN/VTIME on the tty it opens, and that setting is shared by every
opener. Both slave ends stay open in this process, so a board restart or a host reconnect
never gives the relay an EIO, and bytes written while nobody listens wait (up to
``MAX_PENDING`` per direction, oldest dropped first).
"""

from __future__ import annotations

import errno
import os
import pty
import select
import termios
import threading
import tty
from collections.abc import Callable

MAX_PENDING = 65536


class PtyRelay:
    """``board_path`` and ``host_path`` pty names; ``on_board_bytes(data)`` sees every
    byte the board sends (the simulator watches for boot events there)."""

    def __init__(self, on_board_bytes: Callable[[bytes], None] | None = None) -> None:
        self._bm, self._bs = pty.openpty()
        self._hm, self._hs = pty.openpty()
        for fd in (self._bs, self._hs):
            tty.setraw(fd)
        for fd in (self._bm, self._hm):
            os.set_blocking(fd, False)
        self.board_path = os.ttyname(self._bs)
        self.host_path = os.ttyname(self._hs)
        self._on_board = on_board_bytes
        self._wake_r, self._wake_w = os.pipe()
        self._stop = False
        self._thread = threading.Thread(target=self._run, name="nullsteer-pty-relay",
                                        daemon=True)
        self._thread.start()

    def flush_board_input(self) -> None:
        """Drop bytes queued toward the board (before a new interpreter starts)."""
        termios.tcflush(self._bs, termios.TCIFLUSH)

    def _run(self) -> None:
        to_board = bytearray()
        to_host = bytearray()
        while not self._stop:
            wr = []
            if to_board:
                wr.append(self._bm)
            if to_host:
                wr.append(self._hm)
            try:
                rd, ready, _ = select.select([self._bm, self._hm, self._wake_r], wr, [], 1.0)
            except (OSError, ValueError):
                return
            for fd in rd:
                if fd == self._wake_r:
                    continue
                data = _read(fd)
                if not data:
                    continue
                if fd == self._bm:
                    to_host += data
                    if self._on_board is not None:
                        self._on_board(data)
                else:
                    to_board += data
            for fd, buf in ((self._bm, to_board), (self._hm, to_host)):
                if fd in ready and buf:
                    n = _write(fd, bytes(buf))
                    del buf[:n]
                if len(buf) > MAX_PENDING:
                    del buf[:len(buf) - MAX_PENDING]

    def close(self) -> None:
        self._stop = True
        os.write(self._wake_w, b"x")
        self._thread.join(timeout=2.0)
        for fd in (self._bm, self._bs, self._hm, self._hs, self._wake_r, self._wake_w):
            try:
                os.close(fd)
            except OSError:
                pass


def _read(fd: int) -> bytes:
    try:
        return os.read(fd, 4096)
    except OSError as exc:
        if exc.errno in (errno.EAGAIN, errno.EIO):
            return b""
        raise


def _write(fd: int, data: bytes) -> int:
    try:
        return os.write(fd, data)
    except OSError as exc:
        if exc.errno in (errno.EAGAIN, errno.EIO):
            return 0
        raise
