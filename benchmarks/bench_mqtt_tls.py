"""MQTT over TLS against plain TCP, on loopback with a real mosquitto, figures side by side.

1. Board side: the firmware's MQTT client under the MicroPython unix port (heap as the
   simulator gives an MQTT board), ``connect()`` = TCP + TLS handshake (EC P-256
   certificate, mbedTLS) + CONNECT/CONNACK, N times each way; plus the MicroPython heap
   held while connected (``gc.mem_alloc()`` after connect minus before). On the unix
   port mbedTLS allocates with the C library, outside that heap, so the TLS figure does
   not include mbedTLS's own buffers (tens of KiB on a board): not a board RAM figure.
2. Host side: SET -> reply with the simulated board, host ``mqtt://`` vs ``mqtts://`` and
   board plain vs TLS, N commands each.
"""

from __future__ import annotations

import json
import statistics
import subprocess
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
from nullsteer.sim import SimBoard, find_micropython  # noqa: E402
from nullsteer.sim.board import MQTT_HEAP_BYTES  # noqa: E402

N_CONNECT = 20
N_SET = 100

BOARD_SCRIPT = """
import gc, json, ssl, time
from mqtt_client import MQTTClient
def once(port, ca):
    ctx = None
    if ca:
        ctx = ssl.SSLContext(ssl.PROTOCOL_TLS_CLIENT)
        with open(ca, "rb") as f:
            ctx.load_verify_locations(cadata=f.read())
        ctx.verify_mode = ssl.CERT_REQUIRED
    gc.collect()
    before = gc.mem_alloc()
    c = MQTTClient("bench-%d" % time.ticks_ms(), "127.0.0.1", port, ssl_context=ctx)
    t0 = time.ticks_us()
    c.connect()
    us = time.ticks_diff(time.ticks_us(), t0)
    gc.collect()
    held = gc.mem_alloc() - before
    c.disconnect()
    return us / 1000, held
for kind, port, ca in ARGS:
    for i in range(N):
        ms, held = once(port, ca)
        print(json.dumps([kind, ms, held]))
"""


def board_connects(plain: Broker, tls: Broker) -> dict[str, list[tuple[float, int]]]:
    assert tls.tls is not None
    args = [("plain", plain.port, ""), ("tls", tls.port, str(tls.tls.ca_der))]
    script = f"ARGS = {args!r}\nN = {N_CONNECT}\n" + BOARD_SCRIPT
    out = subprocess.run([str(find_micropython()), "-X", f"heapsize={MQTT_HEAP_BYTES}",
                          "-c", script], capture_output=True, text=True, check=True,
                         env={"MICROPYPATH": f".frozen:{REPO / 'firmware'}"}, timeout=120)
    got: dict[str, list[tuple[float, int]]] = {"plain": [], "tls": []}
    for line in out.stdout.splitlines():
        kind, ms, held = json.loads(line)
        got[kind].append((ms, held))
    return got


def set_round_trips(broker: Broker, block: dict, url: str) -> list[float]:
    board = MqttSimBoard(block)
    SimBoard.start(board, 10.0)  # online is awaited below through the host link itself
    try:
        link = open_link(url)
        deadline = time.monotonic() + 10
        while getattr(link, "available", None) is not True and time.monotonic() < deadline:
            time.sleep(0.02)
        c = Controller(link, timeout_s=2.0)
        ms: list[float] = []
        for i in range(N_SET):
            t0 = time.perf_counter()
            c.request("SET", (("end", "A"), ("mask", 1 + i % 2), ("open", 0)))
            ms.append((time.perf_counter() - t0) * 1000)
        c.close()
        return ms
    finally:
        board.stop()


def main() -> int:
    folder = Path(tempfile.mkdtemp(prefix="bench-mqtt-tls-"))
    (folder / "plain").mkdir()
    (folder / "tls").mkdir()
    plain = Broker(folder / "plain").start()
    tls = Broker(folder / "tls", tls=True).start()
    assert tls.tls is not None
    try:
        got = board_connects(plain, tls)
        print(f"board connect (MicroPython unix port, heap {MQTT_HEAP_BYTES // 1024} KiB, "
              f"N = {N_CONNECT} each)")
        for kind in ("plain", "tls"):
            ms = [m for m, _ in got[kind]]
            held = statistics.median(h for _, h in got[kind])
            print(summary(f"  {kind}", ms) + f"   MicroPython heap held {held / 1024:4.1f} KiB")
        ratio = (statistics.median(m for m, _ in got["tls"])
                 / statistics.median(m for m, _ in got["plain"]))
        print(f"  TLS / plain connect time: {ratio:.0f} x (heap: mbedTLS buffers are "
              "outside the unix port's heap)")

        print(f"host SET -> reply through the broker (N = {N_SET} each)")
        base = {"host": "127.0.0.1", "keepalive_s": 30}
        p_ms = set_round_trips(plain, {**base, "port": plain.port, "id": "bench-plain"},
                               plain.url("bench-plain"))
        t_ms = set_round_trips(tls, {**base, "port": tls.port, "id": "bench-tls", "tls": True,
                                     "ca_file": str(tls.tls.ca_der)},
                               tls.url("bench-tls", ca=str(tls.tls.ca_pem)))
        print(summary("  plain (both sides)", p_ms))
        print(summary("  TLS (both sides)", t_ms))
        print(f"  TLS / plain median: {statistics.median(t_ms) / statistics.median(p_ms):.2f} x")
    finally:
        plain.stop()
        tls.stop()
    return 0


if __name__ == "__main__":
    sys.exit(main())
