"""Serial port on USB stdio (``sys.stdin`` / ``sys.stdout``)."""

READ_CHUNK = 256


class StdioPort:
    """USB serial through ``sys.stdin`` / ``sys.stdout`` (the REPL port)."""

    def __init__(self) -> None:
        import select
        import sys
        self.inp = sys.stdin.buffer
        self.out = sys.stdout.buffer
        self.poll = select.poll()
        self.poll.register(sys.stdin, select.POLLIN)

    def read(self, timeout_ms: int) -> bytes:
        out = bytearray()
        wait = timeout_ms
        while len(out) < READ_CHUNK and self.poll.poll(wait):
            b = self.inp.read(1)
            if not b:
                break
            out.extend(b)
            wait = 0
        return bytes(out)

    def write(self, data: bytes) -> None:
        self.out.write(data)
