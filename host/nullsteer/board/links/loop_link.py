"""``loop://`` — the loopback handler: the firmware's protocol handler in this process.

``loop://?board=PATH&state=DIR`` loads the firmware modules under CPython with fake pins
and a virtual clock (:class:`nullsteer.sim.InProcessBoard`); every written line is
answered at once. It exercises the same ``App.handle_line`` as a real board, without a
serial port or an interpreter process, and is meant for fast tests. Use ``sim://`` for
the real MicroPython interpreter.
"""

from __future__ import annotations

from collections import deque

from nullsteer.board.links import query_options


class LoopLink:
    """A link whose far end is an in-process firmware App."""

    def __init__(self, url: str, board: object) -> None:
        self.url = url
        self.board = board
        self._pending: deque[bytes] = deque()

    def write_line(self, line: bytes) -> None:
        reply = self.board.handle_line(line)  # type: ignore[attr-defined]
        if reply:
            self._pending.append(reply)

    def read_line(self, timeout_s: float) -> bytes | None:
        return self._pending.popleft() if self._pending else None

    def close(self) -> None:
        self._pending.clear()


def open_url(url: str, board_config: str | None = None, **_: object) -> LoopLink:
    from nullsteer.sim import DEFAULT_BOARD_CONFIG, InProcessBoard

    options = query_options(url)
    board = InProcessBoard(options.get("board") or board_config or DEFAULT_BOARD_CONFIG,
                           state_dir=options.get("state") or None)
    board.boot()
    return LoopLink(url, board)
