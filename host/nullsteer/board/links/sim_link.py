"""``sim://`` — a simulated board: the real firmware under the MicroPython unix port.

``sim://?board=PATH&state=DIR`` starts a fresh interpreter running ``firmware/`` with
the board config at PATH (default: the demo board) and its state file in DIR (default:
a temporary folder removed on close, so the state lasts as long as the link). Give a
``state`` folder to keep the relay state from one command to the next, as a real board
keeps it across power cycles. The board is stopped when the link is closed.

To share one simulated board between several commands, run ``nullsteer sim`` and pass
the ``serial://`` URL it prints.
"""

from __future__ import annotations

from nullsteer.errors import LinkError
from nullsteer.board.links import query_options
from nullsteer.board.links.serial_link import SerialLink
from nullsteer.board.links.serial_link import open_url as open_serial


class SimLink:
    """A serial link to a :class:`~nullsteer.sim.SimBoard` that it owns."""

    def __init__(self, url: str, board: object, serial: SerialLink) -> None:
        self.url = url
        self.board = board
        self._serial = serial

    def write_line(self, line: bytes) -> None:
        self._serial.write_line(line)

    def read_line(self, timeout_s: float) -> bytes | None:
        return self._serial.read_line(timeout_s)

    def close(self) -> None:
        self._serial.close()
        self.board.stop()  # type: ignore[attr-defined]


def open_url(url: str, board_config: str | None = None, **_: object) -> SimLink:
    """Start a simulated board for ``url``; ``board_config`` is used when the URL has none."""
    from nullsteer.sim import DEFAULT_BOARD_CONFIG, SimBoard

    options = query_options(url)
    config = options.get("board") or board_config or DEFAULT_BOARD_CONFIG
    board = SimBoard(config, state_dir=options.get("state") or None)
    try:
        board.start()
    except OSError as exc:
        raise LinkError(f"cannot start the simulated board: {exc}") from None
    try:
        serial = open_serial(board.url)
    except Exception:
        board.stop()
        raise
    return SimLink(url, board, serial)
