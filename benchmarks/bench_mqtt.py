"""Set -> state over MQTT on loopback, with the simulated board (real firmware under the
MicroPython unix port) and a real mosquitto. Goal: median <= 100 ms.

Two figures per command, over N alternating settings:
* reply: SET published by the host -> its reply line back at the host;
* state: SET published -> the board's retained state message (JSON) at the host.
"""

from __future__ import annotations

import statistics
import sys
import tempfile
import time
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(REPO / "tests"))

from timing import summary  # noqa: E402
from conftest import Broker  # noqa: E402  (the tests' broker fixture class)
from mqtt_support import MqttSimBoard  # noqa: E402

from nullsteer.board.controller import Controller  # noqa: E402
from nullsteer.board.links import open_link  # noqa: E402

N = 200
GOAL_MS = 100.0


def main() -> int:
    folder = Path(tempfile.mkdtemp(prefix="bench-mqtt-"))
    broker = Broker(folder).start()
    try:
        blk = {"host": broker.host, "port": broker.port, "id": "bench"}
        with MqttSimBoard(blk) as board:
            link = open_link(broker.url("bench"))
            c = Controller(link, timeout_s=2.0)
            heap = c.status().heap_bytes
            reply_ms: list[float] = []
            state_ms: list[float] = []
            for i in range(N):
                mask = 1 + i % 2  # alternate: every command switches relays
                t0 = time.perf_counter()
                c.request("SET", (("end", "A"), ("mask", mask), ("open", 0)))
                t1 = time.perf_counter()
                got = link.wait_state(lambda s, m=mask: s.get("mask") == m, 2.0)
                t2 = time.perf_counter()
                if got is None:
                    print("state message missing for command", i)
                    return 1
                reply_ms.append((t1 - t0) * 1000)
                state_ms.append((t2 - t0) * 1000)
            c.close()
            assert board.state()[1] == 1 + (N - 1) % 2
    finally:
        broker.stop()
    print(f"MQTT loopback, simulated board, {N} SET commands (relays switch every time)")
    print(summary("set -> reply", reply_ms))
    print(summary("set -> state", state_ms))
    med = statistics.median(state_ms)
    print(f"goal: median set -> state <= {GOAL_MS:.0f} ms: {med:.1f} ms "
          f"({'met' if med <= GOAL_MS else 'NOT met'}); ratio to goal {med / GOAL_MS:.2f}")
    print(f"board heap in use after a collect (STATUS heap): {heap} bytes")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
