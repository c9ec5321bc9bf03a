"""Serial link: line assembly and the serve loop.

A port (``port_stdio``, ``port_uart``, ``port_pty``: one module each, so a board loads
only the one it uses) has ``read(timeout_ms) -> bytes`` (what arrived, possibly b"") and
``write(data)``. :class:`LineAssembler` cuts the byte stream into lines; :func:`serve`
hands each line to ``App.handle_line`` and writes the reply.
"""

import wire

try:
    from typing import TYPE_CHECKING
except ImportError:  # MicroPython
    TYPE_CHECKING = False
if TYPE_CHECKING:
    from typing import Any

class LineAssembler:
    """Cuts a byte stream into lines of at most ``max_line`` bytes (newline included).

    A longer line is not kept: its first ``max_line + 1`` bytes are held, the rest is
    discarded up to the newline, and the held bytes are delivered so that the codec
    answers ``ERR code=SIZE``. Empty lines are skipped.
    """

    def __init__(self, max_line: int = wire.MAX_LINE) -> None:
        self.max_line = max_line
        self.buf = bytearray()
        self.overflow = False

    def feed(self, data: bytes) -> list:
        """Add received bytes; return the complete lines (each ending in b"\\n")."""
        lines = []
        for b in data:
            if b == 10:
                line = bytes(self.buf)
                if self.overflow or line.rstrip(b"\r"):
                    lines.append(line if self.overflow else line + b"\n")
                self.buf = bytearray()
                self.overflow = False
            elif not self.overflow:
                self.buf.append(b)
                if len(self.buf) >= self.max_line:  # no room left for the newline
                    self.overflow = True
                    self.buf.append(0x20)  # one byte more than a frame may have
        return lines


def serve(port: "Any", app: "Any", idle: "Any", poll_ms: int = 100) -> None:
    """Run the serial link for ever: read, assemble, answer; ``idle()`` after each pass
    (feeds the watchdog)."""
    asm = LineAssembler()
    while True:
        data = port.read(poll_ms)
        if data:
            for line in asm.feed(data):
                port.write(app.handle_line(line))
        idle()
