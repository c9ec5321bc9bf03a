"""Serial port on a pseudo-terminal (the unix port under the simulator)."""

READ_CHUNK = 256


class PtyPort:
    """A pseudo-terminal (or any tty) by path, as the simulator provides one.

    Puts the tty in raw mode with VMIN = 0, VTIME = 1 and reads byte by byte while
    ``select.poll`` reports data, so a reply never waits for a read timeout.
    """

    def __init__(self, path: str) -> None:
        import select
        import termios
        self.f = open(path, "r+b")
        fd = self.f.fileno()
        termios.setraw(fd)
        attrs = termios.tcgetattr(fd)
        cc = attrs[6]
        cc[6] = 0  # VMIN
        cc[5] = 1  # VTIME, tenths of a second
        termios.tcsetattr(fd, termios.TCSANOW, attrs)
        self.poll = select.poll()
        self.poll.register(self.f, select.POLLIN)

    def read(self, timeout_ms: int) -> bytes:
        if not self.poll.poll(timeout_ms):
            return b""
        out = bytearray()
        while len(out) < READ_CHUNK and self.poll.poll(0):
            b = self.f.read(1)
            if not b:
                break
            out.extend(b)
        return bytes(out)

    def write(self, data: bytes) -> None:
        self.f.write(data)
