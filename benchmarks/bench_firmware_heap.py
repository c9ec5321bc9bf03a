"""Firmware figures under the MicroPython unix port (64-bit build), printed side by side.

* heap in use after boot (gc.mem_alloc() after a collect, as STATUS reports it), goal
  <= 32 KB, and its split by module;
* the smallest -X heapsize that still boots and answers;
* boot time and request round trips through the simulator's ptys.

    .venv/bin/python benchmarks/bench_firmware_heap.py
"""

import json
import os
import shutil
import statistics
import subprocess
import tempfile
import time
from pathlib import Path

import serial

from nullsteer.protocol import wire
from nullsteer.errors import LinkError
from nullsteer.sim import SimBoard, find_micropython, firmware_dir
from nullsteer.sim.board import FAKE_MACHINE
from nullsteer.sim.firmware import wire_source

EXAMPLE = Path(__file__).parents[1] / "examples" / "board-sim.json"
GOAL_BYTES = 32 * 1024

MEASURE = r"""
import gc
gc.collect(); base = gc.mem_alloc(); prev = base
def step(name):
    global prev
    gc.collect(); a = gc.mem_alloc(); print(name, a - prev); prev = a
import machine; step("machine (fake, sim only)")
import wire; step("wire (codec)")
import relays; step("relays")
import store; step("store")
import app; step("app")
import link_serial; step("link_serial")
import hw; step("hw")
cfg = hw._load_config("board.json"); step("board config (parsed, reader unloaded)")
clock = hw.Clock(); wdt = hw.make_watchdog(machine, 0)
a = hw.build_app(cfg, machine, clock, wdt); step("app objects (pins, bank, store)")
import port_pty; step("port_pty")
a.boot(); step("boot (state restored and saved)")
print("total", prev - base)
"""


def module_split() -> list[tuple[str, int]]:
    tmp = Path(tempfile.mkdtemp(prefix="nullsteer-bench-"))
    try:
        for src in firmware_dir().glob("*.py"):
            shutil.copy(src, tmp / src.name)
        shutil.copy(wire_source(), tmp / "wire.py")
        shutil.copy(FAKE_MACHINE, tmp / "machine.py")
        cfg = json.loads(EXAMPLE.read_text())
        cfg["state_file"] = str(tmp / "state.txt")
        (tmp / "board.json").write_text(json.dumps(cfg))
        (tmp / "measure.py").write_text(MEASURE)
        out = subprocess.run([str(find_micropython()), "-X", "heapsize=262144", "measure.py"],
                             cwd=tmp, env=dict(os.environ, MICROPYPATH=f".frozen:{tmp}"),
                             capture_output=True, text=True, timeout=60, check=True)
        rows = []
        for line in out.stdout.splitlines():
            name, _, value = line.rpartition(" ")
            rows.append((name, int(value)))
        return rows
    finally:
        shutil.rmtree(tmp, ignore_errors=True)


def ask(port, seq, verb, *fields):
    port.write(wire.encode(seq, verb, fields))
    while True:
        frame = wire.decode_reply(port.readline())
        if frame.seq == seq:
            return frame


def smallest_heap() -> int:
    for kib in (24, 32, 40, 48, 56, 64, 80, 96, 128):
        try:
            with SimBoard(EXAMPLE, heap_bytes=kib * 1024) as board:
                port = serial.Serial(board.url[9:].split("?")[0], 115200, timeout=2)
                ok = ask(port, 1, "STATUS").verb == "OK" and ask(port, 2, "SET", (
                    "end", "B"), ("ohms", "900"), ("open", 0)).verb == "OK"
                port.close()
                if ok:
                    return kib
        except (LinkError, ValueError, wire.WireError):
            continue
    return -1


def main() -> None:
    print("firmware heap and timing, MicroPython unix port (64-bit pointers)")
    split = module_split()
    total = dict(split)["total"]
    fake = split[0][1]
    for name, value in split[:-1]:
        print(f"  {name:42s} {value:7d} B")
    print(f"  {'total after boot':42s} {total:7d} B")
    print(f"  {'firmware only (without the fake machine)':42s} {total - fake:7d} B"
          f"   goal {GOAL_BYTES} B  ratio {(total - fake) / GOAL_BYTES:.2f}")
    t0 = time.monotonic()
    with SimBoard(EXAMPLE) as board:
        boot_s = time.monotonic() - t0
        port = serial.Serial(board.url[9:].split("?")[0], 115200, timeout=2)
        heap = int(ask(port, 1, "STATUS").fields["heap"])
        rtts = {"PING": [], "SET unchanged": [], "SET changed (switch + save)": []}
        for i in range(100):
            t = time.perf_counter()
            ask(port, 2 + 3 * i, "PING")
            rtts["PING"].append(time.perf_counter() - t)
            ask(port, 3 + 3 * i, "SET", ("end", "A"), ("mask", i % 128), ("open", 0))
            t = time.perf_counter()
            ask(port, 3 + 3 * i + 1, "SET", ("end", "A"), ("mask", i % 128), ("open", 0))
            rtts["SET unchanged"].append(time.perf_counter() - t)
            t = time.perf_counter()
            ask(port, 3 + 3 * i + 2, "SET", ("end", "B" if i % 2 else "A"),
                ("mask", (i + 1) % 128), ("open", 0))
            rtts["SET changed (switch + save)"].append(time.perf_counter() - t)
        port.close()
    print(f"  {'STATUS heap= (128 KiB heap, serving)':42s} {heap:7d} B")
    print(f"  {'boot time (start -> boot event)':42s} {boot_s * 1000:7.1f} ms")
    for name, values in rtts.items():
        print(f"  {'round trip ' + name:42s} {statistics.median(values) * 1000:7.2f} ms median"
              f"  {max(values) * 1000:7.2f} ms max")
    print(f"  {'smallest -X heapsize that boots and serves':42s} {smallest_heap():7d} KiB")


if __name__ == "__main__":
    main()
