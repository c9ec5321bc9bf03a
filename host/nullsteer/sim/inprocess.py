"""InProcessBoard: the firmware ``App`` under CPython, with fake pins and a virtual clock.

Relay settle times pass instantly on the virtual clock (``sleep_ms`` advances it), so a
host test can exchange hundreds of frames in milliseconds. The same firmware modules run
here as on the board (loaded by :func:`nullsteer.sim.firmware.load_firmware`).
"""

from __future__ import annotations

import os
import tempfile
from pathlib import Path
from types import SimpleNamespace
from typing import Any

from nullsteer.sim.board import STATE_FILE, read_board_config
from nullsteer.sim.firmware import load_firmware, parse_board_config
from nullsteer.sim.pinlog import RelayEvent, decode_state, final_levels, relay_events


class VirtualClock:
    """Milliseconds that advance only when slept."""

    def __init__(self) -> None:
        self.now_ms = 0

    def ticks_ms(self) -> int:
        return self.now_ms

    def ticks_diff(self, a: int, b: int) -> int:
        return a - b

    def sleep_ms(self, ms: int) -> None:
        self.now_ms += int(ms)


def _fake_machine(log: list[tuple[float, str, int]], clock: VirtualClock) -> SimpleNamespace:
    class Pin:
        OUT = 1

        def __init__(self, pin_id: Any, mode: int = -1, value: int | None = None) -> None:
            self.id = str(pin_id)
            self.level = 0
            if value is not None:
                self.level = 1 if value else 0
                log.append((clock.now_ms / 1000, self.id, self.level))

        def value(self, level: int | None = None) -> int | None:
            if level is None:
                return self.level
            level = 1 if level else 0
            if level != self.level:
                self.level = level
                log.append((clock.now_ms / 1000, self.id, level))
            return None

    return SimpleNamespace(Pin=Pin)


class InProcessBoard:
    """The firmware app in this process.

    Parameters
    ----------
    board_config : dict or path
        Board config (see firmware/BOARD_CONFIG.md).
    state_dir : path, optional
        Folder of the state file (default: a new temporary folder).
    fs : object, optional
        File access for the state store (``open``, ``rename``, ``remove``, ``sync``), e.g.
        one that cuts the power at a chosen step; default the real file system.
    """

    def __init__(self, board_config: dict | str | os.PathLike, state_dir: str | os.PathLike |
                 None = None, fs: Any = None) -> None:
        self.fw = load_firmware()
        self.config = read_board_config(board_config)
        self.state_dir = Path(state_dir) if state_dir is not None else Path(
            tempfile.mkdtemp(prefix="nullsteer-inproc-"))
        self.config["state_file"] = str(self.state_dir / STATE_FILE)
        self.cfg = parse_board_config(self.config)
        self.fs = fs
        self.clock = VirtualClock()
        self.pin_log: list[tuple[float, str, int]] = []
        self.app: Any = None

    def boot(self) -> bytes:
        """Power on (fresh pins, all de-energised) and return the boot event line."""
        machine = _fake_machine(self.pin_log, self.clock)
        self.app = self.fw.hw.build_app(self.cfg, machine, self.clock,
                                        self.fw.hw.NoWatchdog(), self.fs)
        return self.app.boot()

    def handle_line(self, line: bytes) -> bytes:
        if self.app is None:
            self.boot()
        return self.app.handle_line(line)

    def events(self) -> list[RelayEvent]:
        return relay_events(self.pin_log, self.cfg)

    def levels(self) -> dict[str, bool]:
        return final_levels(self.events())

    def state(self) -> tuple[str, int, bool]:
        return decode_state(self.levels(), self.cfg)
