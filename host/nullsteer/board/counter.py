"""The host's frame counter for signed frames, one small file per signing key.

A signed frame carries a counter that must be above every counter the board accepted
before (firmware/PROTOCOL.md, "Signed frames"). The host keeps the last counter it used
in ``<state dir>/ctr-<key id>``; every frame takes the next one. The file saves a round
trip, it is not what makes replays fail: a host whose file is missing or behind (another
host with the same key went ahead, or the board reserved counters before a reboot) gets
a ``REPLAY`` reply that the board signed with its last accepted counter, moves past it
(:meth:`FrameCounter.advance_past`) and retries.

The state folder is ``$NULLSTEER_STATE_DIR``, else ``$XDG_STATE_HOME/nullsteer``, else
``~/.local/state/nullsteer`` (XDG Base Directory specification), created owner-only.
Updates are atomic (temporary file, ``os.replace``) and serialised between processes
with an advisory lock (``fcntl.flock``) where the system has one.
"""

from __future__ import annotations

import hashlib
import os
from contextlib import contextmanager
from collections.abc import Iterator
from pathlib import Path

from nullsteer.protocol import wire

ENV_STATE_DIR = "NULLSTEER_STATE_DIR"


def state_dir() -> Path:
    """The host's state folder (see the module docstring); not created here."""
    if os.environ.get(ENV_STATE_DIR):
        return Path(os.environ[ENV_STATE_DIR])
    xdg = os.environ.get("XDG_STATE_HOME")
    base = Path(xdg) if xdg else Path.home() / ".local" / "state"
    return base / "nullsteer"


def key_id(key: bytes) -> str:
    """A name for ``key`` that does not reveal it: 16 hex digits of a domain-separated
    SHA-256."""
    return hashlib.sha256(b"nullsteer frame counter\x00" + key).hexdigest()[:16]


class FrameCounter:
    """The last frame counter used with one key, in ``path``."""

    def __init__(self, path: Path) -> None:
        self.path = Path(path)

    @classmethod
    def for_key(cls, key: bytes, folder: Path | None = None) -> FrameCounter:
        return cls((folder or state_dir()) / f"ctr-{key_id(key)}")

    @contextmanager
    def _locked(self) -> Iterator[None]:
        self.path.parent.mkdir(parents=True, exist_ok=True, mode=0o700)
        fd = os.open(self.path.with_name(self.path.name + ".lock"), os.O_RDWR | os.O_CREAT,
                     0o600)
        try:
            try:
                import fcntl
                fcntl.flock(fd, fcntl.LOCK_EX)
            except ImportError:  # no advisory locks here: one process at a time
                pass
            yield
        finally:
            os.close(fd)  # closing releases the lock

    def _read(self) -> int:
        try:
            return min(wire.parse_uint(self.path.read_text().strip()), wire.CTR_MAX)
        except (OSError, ValueError):
            return 0  # missing or damaged: the board's REPLAY reply tells where to go on

    def _write(self, value: int) -> None:
        tmp = self.path.with_name(self.path.name + ".tmp")
        fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_TRUNC, 0o600)
        with os.fdopen(fd, "w") as f:
            f.write(f"{value}\n")
        os.replace(tmp, self.path)

    @property
    def last(self) -> int:
        """The last counter used (0: none)."""
        return self._read()

    def next(self) -> int:
        """Take the next counter (saved before it is returned)."""
        with self._locked():
            value = self._read() + 1
            if value > wire.CTR_MAX:
                raise OverflowError("frame counter exhausted: give the board a new key")
            self._write(value)
            return value

    def advance_past(self, board_last: int) -> None:
        """Make the next counter larger than ``board_last`` (a verified board counter)."""
        with self._locked():
            if self._read() < board_last:
                self._write(min(board_last, wire.CTR_MAX))
