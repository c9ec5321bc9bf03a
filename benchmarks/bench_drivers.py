"""Relay drivers and bundle: time per switch, heap cost, bytes a deploy writes (printed).

Runs the drivers under the MicroPython unix port with do-nothing pins and bus (so the
figures are the firmware's own work per change; a real board adds its pin/bus time:
e.g. 100 kHz I2C needs about 0.3 ms for a 3-byte register write) and measures the heap
each driver module takes. Figures only; nothing is asserted.
"""

from __future__ import annotations

import os
import subprocess
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "host"))

from nullsteer.sim import find_micropython  # noqa: E402

SCRIPT = r'''
import gc, time
gc.collect(); h0 = gc.mem_alloc()
import drivercfg
gc.collect(); h1 = gc.mem_alloc()
import drivers
gc.collect(); h2 = gc.mem_alloc()
print("heap drivercfg (boot only, unloaded after)  %6d B" % (h1 - h0))
print("heap drivers (boards with a driver block)   %6d B" % (h2 - h1))

class Pin:
    def value(self, v=None):
        return 0

class Bus:
    def writeto_mem(self, a, r, b):
        pass
    def readfrom_mem(self, a, r, n):
        return bytes(n)

def per_apply_us(drv, n=200):
    t = time.ticks_us()
    for i in range(n):
        drv.set(0, i & 1 == 0)
        drv.apply()
    return time.ticks_diff(time.ticks_us(), t) / n

for length in (8, 16, 32, 64):
    port = drivers.ShiftChain(Pin(), Pin(), Pin(), length, Pin(), Pin())
    drv = drivers.PortDriver(port, list(range(length)), [False] * length)
    drv.force_all()
    us = per_apply_us(drv)
    t = time.ticks_us()
    for i in range(50):
        drv.check()
    rb = time.ticks_diff(time.ticks_us(), t) / 50
    print("shift chain %3d outputs: apply %7.1f us, read-back %7.1f us" % (length, us, rb))
drv = drivers.PortDriver(drivers.Expander(Bus()), list(range(10)), [False] * 10)
drv.force_all()
print("expander 10 relays:      apply %7.1f us (plus the bus transfer)" % per_apply_us(drv))
slept = []
drv = drivers.LatchingDriver(drivers.GpioPort([Pin() for _ in range(20)]), list(range(10)),
                             list(range(10, 20)), 25, slept.append)
drv.force_all()
print("latching 10 relays:      apply %7.1f us + one %d ms pulse per changed relay"
      % (per_apply_us(drv), 25))
'''


def main() -> None:
    print("relay drivers, MicroPython unix port (64-bit), do-nothing pins and bus")
    with tempfile.TemporaryDirectory() as tmp:
        script = Path(tmp) / "bench.py"
        script.write_text(SCRIPT)
        env = dict(os.environ, MICROPYPATH=f".frozen:{ROOT / 'firmware'}")
        done = subprocess.run([str(find_micropython()), "-X", "heapsize=256K", str(script)],
                              env=env, capture_output=True, text=True, timeout=120)
        print(done.stdout.rstrip() or done.stderr)

    from nullsteer.board.bundle import make_bundle
    from nullsteer.station.config import load_station
    from nullsteer.board.devices import parse_devices

    station = load_station(ROOT / "examples" / "station.toml")
    bundle = make_bundle(station, parse_devices(station)[0], None)
    total = sum(len(f.data) for f in bundle.files)
    print(f"bundle of the demo device: {len(bundle.files)} files, {total} bytes "
          f"(board.json {len(bundle.files[-2].data)} bytes)")


if __name__ == "__main__":
    main()
