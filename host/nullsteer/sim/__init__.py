"""Simulator: the board firmware under the MicroPython unix port, or in-process.

* :class:`SimBoard` runs ``firmware/`` under the real ``micropython`` interpreter with a
  fake ``machine`` module (pin changes are logged) behind a pseudo-terminal.
* :class:`InProcessBoard` runs the same firmware ``App`` under CPython with fake pins,
  for fast tests that do not need a serial port.
"""

from pathlib import Path

from nullsteer.sim.board import SimBoard, read_board_config
from nullsteer.sim.firmware import find_micropython, firmware_dir, load_firmware
from nullsteer.sim.inprocess import InProcessBoard
from nullsteer.sim.pinlog import RelayEvent

__all__ = ["SimBoard", "InProcessBoard", "RelayEvent", "read_board_config", "find_micropython",
           "firmware_dir", "load_firmware"]

#: The demo board config (7 ladder relays, reversal, protect, open; a ladder table).
DEFAULT_BOARD_CONFIG = str(Path(__file__).resolve().parents[3] / "examples" / "board-sim.json")
#: The invented demo station file beside it (the demo's default, from any folder).
EXAMPLE_STATION = str(Path(DEFAULT_BOARD_CONFIG).with_name("station.toml"))
