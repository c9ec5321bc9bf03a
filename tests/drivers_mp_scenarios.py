"""Relay-driver scenarios with recording fakes; prints one JSON object of recorded logs.

Runs under the MicroPython unix port (``MICROPYPATH=.frozen:firmware:tests``) and under
CPython alike (tests/test_drivers_firmware.py runs it with both and compares). Written in
the common subset: no f-strings, no dataclasses.

The fakes model the parts as their data sheets describe them (from memory of the generic
part families' data sheets):

* 74HC595 class: the shift register takes the serial input on the rising edge of the
  shift clock, stage n moves to stage n+1, the last stage is the serial output (Q7S /
  QH'); a rising edge of the storage clock copies the shift register to the output
  latches; OE high puts the outputs in high impedance (read here as None).
* MCP23017 class (DS20001952C, Table 3-5 with IOCON.BANK = 0): IODIR resets to 0xFF
  (inputs), OLAT to 0x00; with sequential addressing a two-byte access covers the A and
  B register of a pair; reading GPIO returns the pin levels, which for an output pin are
  its latch unless something holds the pin (``stuck`` here).
"""

import json
import sys

import drivercfg
import drivers

try:
    import relays
except ImportError:  # pragma: no cover
    relays = None


class Log:
    def __init__(self):
        self.items = []

    def add(self, *item):
        self.items.append(list(item))


class FakePin:
    """An output (or input) pin that records every write as [name, level]."""

    def __init__(self, log, name, on_write=None, reader=None):
        self.log = log
        self.name = name
        self.level = 0
        self.on_write = on_write
        self.reader = reader

    def value(self, level=None):
        if level is None:
            return self.reader() if self.reader is not None else self.level
        self.level = 1 if level else 0
        self.log.add(self.name, self.level)
        if self.on_write is not None:
            self.on_write(self.name, self.level)
        return None


class FakeChain:
    """A chain of 74HC595-class chips driven through FakePins."""

    def __init__(self, log, length, stuck_data=None):
        self.length = length
        self.stages = [0] * length
        self.outputs = [None] * length  # None: high impedance (OE high)
        self.latches = [0] * length
        self.oe_high = True
        self.stuck_data = stuck_data  # a broken data line reads as this level
        self.prev = {"clock": 0, "latch": 0}
        self.data = FakePin(log, "data", self._edge)
        self.clock = FakePin(log, "clock", self._edge)
        self.latch = FakePin(log, "latch", self._edge)
        self.oe = FakePin(log, "oe", self._edge)
        self.oe.level = 1
        self.sense = FakePin(log, "sense", None, self._serial_out)

    def _serial_out(self):
        return self.stages[self.length - 1]

    def _edge(self, name, level):
        if name in self.prev:
            rising = level == 1 and self.prev[name] == 0
            self.prev[name] = level
            if rising and name == "clock":
                bit = self.data.level if self.stuck_data is None else self.stuck_data
                self.stages = [bit] + self.stages[:-1]
            elif rising and name == "latch":
                self.latches = list(self.stages)
        elif name == "oe":
            self.oe_high = level == 1
        self.outputs = [None] * self.length if self.oe_high else list(self.latches)


class FakeExpander:
    """An I2C bus with one MCP23017-class expander; records every transfer."""

    def __init__(self, log, addr=0x20, stuck=None):
        self.log = log
        self.addr = addr
        self.regs = [0] * 0x16
        self.regs[0x00] = 0xFF  # IODIRA
        self.regs[0x01] = 0xFF  # IODIRB
        self.stuck = stuck or {}  # pin number -> level held by a fault

    def pins(self):
        out = []
        for p in range(16):
            port = p // 8
            bit = p % 8
            if (self.regs[0x00 + port] >> bit) & 1:
                level = None  # input: floating
            else:
                level = (self.regs[0x14 + port] >> bit) & 1
            out.append(self.stuck.get(p, level))
        return out

    def writeto_mem(self, addr, reg, buf):
        self.log.add("w", addr, reg, list(buf))
        if addr != self.addr:
            raise OSError(19)  # no acknowledge
        for i in range(len(buf)):
            r = reg + i
            self.regs[r] = buf[i]

    def readfrom_mem(self, addr, reg, n):
        self.log.add("r", addr, reg, n)
        if addr != self.addr:
            raise OSError(19)
        levels = self.pins()
        out = []
        for i in range(n):
            port = reg + i - 0x12
            byte = 0
            for bit in range(8):
                if levels[port * 8 + bit]:
                    byte |= 1 << bit
            out.append(byte)
        return bytes(out)


def shift_basic():
    """A 16-output chain: stage relays 0, 3, 9, apply, then change relay 3 only."""
    log = Log()
    chain = FakeChain(log, 16)
    port = drivers.ShiftChain(chain.data, chain.clock, chain.latch, 16, chain.oe, chain.sense)
    drv = drivers.PortDriver(port, [0, 1, 2, 3, 8, 9], [False] * 6)
    drv.force_all()
    first = len(log.items)
    drv.set(0, True)
    drv.set(3, True)
    drv.set(5, True)
    drv.apply()
    outputs_after = list(chain.outputs)
    mid = len(log.items)
    drv.apply()  # nothing staged: no bits at all
    same = len(log.items) == mid
    check = drv.check()
    after_check = list(chain.outputs)
    return {"log": log.items, "first": first, "mid": mid, "idempotent": same,
            "outputs": outputs_after, "check": check, "outputs_after_check": after_check}


def shift_broken():
    """The data line of the chain reads as 1 whatever is sent (a broken wire)."""
    log = Log()
    chain = FakeChain(log, 8, stuck_data=1)
    chain.oe_high = False  # OE tied low on this board
    port = drivers.ShiftChain(chain.data, chain.clock, chain.latch, 8, None, chain.sense)
    drv = drivers.PortDriver(port, [0, 1, 2, 3], [False, False, False, True])
    drv.force_all()
    drv.set(1, True)
    drv.apply()
    return {"check": drv.check(), "outputs": chain.outputs}


def shift_no_sense():
    log = Log()
    chain = FakeChain(log, 8)
    port = drivers.ShiftChain(chain.data, chain.clock, chain.latch, 8)
    drv = drivers.PortDriver(port, [0, 1], [False, False])
    drv.force_all()
    return {"check": drv.check()}


def expander_basic():
    """Relays on GPA0, GPA1, GPB0 and GPB7 (active low on GPB7)."""
    log = Log()
    bus = FakeExpander(log, 0x21)
    port = drivers.Expander(bus, 0x21)
    drv = drivers.PortDriver(port, [0, 1, 8, 15], [False, False, False, True])
    drv.force_all()
    pins_boot = bus.pins()
    drv.set(1, True)
    drv.set(2, True)
    drv.set(3, True)
    drv.apply()
    check = drv.check()
    return {"log": log.items, "pins_boot": pins_boot, "pins": bus.pins(), "check": check}


def expander_stuck():
    """GPA1 is held low by a fault (e.g. a shorted driver input)."""
    log = Log()
    bus = FakeExpander(log, 0x20, stuck={1: 0})
    drv = drivers.PortDriver(drivers.Expander(bus), [0, 1, 2], [False] * 3)
    drv.force_all()
    drv.set(1, True)
    drv.apply()
    return {"check": drv.check(), "pins": bus.pins()[:3]}


def expander_absent():
    """Nothing answers at the configured address: the bus error reaches the caller."""
    log = Log()
    bus = FakeExpander(log, 0x20)
    drv = drivers.PortDriver(drivers.Expander(bus, 0x27), [0], [False])
    try:
        drv.force_all()
        return {"raised": False}
    except OSError:
        return {"raised": True}


def latching_gpio():
    """Two latching relays on GPIO: set coils on pins s0, s1, reset coils on r0, r1."""
    log = Log()
    pins = [FakePin(log, n) for n in ("s0", "s1", "r0", "r1")]
    port = drivers.GpioPort(pins)

    def sleep_ms(ms):
        log.add("sleep", ms)

    drv = drivers.LatchingDriver(port, [0, 1], [2, 3], 30, sleep_ms)
    drv.force_all()
    boot = len(log.items)
    drv.set(1, True)
    drv.apply()
    mid = len(log.items)
    drv.apply()
    same = len(log.items) == mid
    drv.set(1, False)
    drv.set(0, True)
    drv.apply()
    return {"log": log.items, "boot": boot, "idempotent": same,
            "levels": [p.level for p in pins], "state": [drv.get(0), drv.get(1)],
            "check": drv.check()}


def latching_expander():
    """One latching relay on an expander, set coil GPA0, reset coil GPA1, active low."""
    log = Log()
    bus = FakeExpander(log, 0x20)

    def sleep_ms(ms):
        log.add("sleep", ms)

    drv = drivers.LatchingDriver(drivers.Expander(bus), [0], [1], 15, sleep_ms, [True])
    drv.force_all()
    drv.set(0, True)
    drv.apply()
    return {"log": log.items, "pins": bus.pins()[:2], "check": drv.check()}


def bank_selftest():
    """The relay bank's self-test over an expander with GPA2 held low by a fault."""
    if relays is None:
        return None
    log = Log()
    bus = FakeExpander(log, 0x20, stuck={2: 0})
    rel = [relays.Relay("L0", "ladder", 0, 1), relays.Relay("L1", "ladder", 1, 1),
           relays.Relay("REV", "reverse", -1, 1), relays.Relay("PROT", "protect", -1, 1)]
    drv = drivers.PortDriver(drivers.Expander(bus), [0, 1, 2, 3], [False] * 4)
    bank = relays.RelayBank(rel, drv, lambda ms: None, True)
    bank.power_on(relays.State("A", 1, False))
    n = bank.self_test(0)
    return {"stepped": n, "faults": getattr(bank, "faults", "absent"),
            "levels": bank.levels()}


class FakeMachine:
    """Stands in for ``machine``: Pin and I2C constructors record how they were made."""

    def __init__(self, log, addr=0x24, stuck=None):
        self.log = log
        machine = self

        class Pin:
            IN = 0
            OUT = 1

            def __init__(self, pin_id, mode=-1, value=None):
                machine.log.add("pin", pin_id, mode, value)
                self.pin_id = pin_id
                self.level = value

            def value(self, level=None):
                if level is None:
                    return 0
                machine.log.add("set", self.pin_id, level)
                return None

        class I2C:
            def __init__(self, bus_id, scl=None, sda=None, freq=0):
                machine.log.add("i2c", bus_id, None if scl is None else scl.pin_id,
                                None if sda is None else sda.pin_id, freq)
                self.bus = FakeExpander(machine.log, addr, stuck)

            def writeto_mem(self, addr, reg, buf):
                self.bus.writeto_mem(addr, reg, buf)

            def readfrom_mem(self, addr, reg, n):
                return self.bus.readfrom_mem(addr, reg, n)

        self.Pin = Pin
        self.I2C = I2C


def build_kinds():
    """build_driver from checked driver blocks, with a fake machine module."""
    out = {}
    blocks = {
        "gpio": (None, [{"pin": 2}, {"pin": 3}], [2, 3]),
        "gpio_latching": ({"latching": {"pulse_ms": 25}},
                          [{"pin": 2, "reset_pin": 12}, {"pin": 3, "reset_pin": 13}], [2, 3]),
        "shift": ({"kind": "shift", "data": 16, "clock": 17, "latch": 18, "oe": 19,
                   "sense": 20}, [{"pin": 0}, {"pin": 9}], [0, 9]),
        "expander": ({"kind": "expander", "i2c": {"id": 1, "scl": 7, "sda": 6}, "addr": 0x24},
                     [{"pin": 0}, {"pin": 15}], [0, 15]),
    }
    for name in ("gpio", "gpio_latching", "shift", "expander"):
        block, rel, pins = blocks[name]
        log = Log()
        drv = drivercfg.parse_driver(block, rel, pins)
        built = drivers.build_driver(drv, pins, [False, True], FakeMachine(log),
                                     lambda ms: log.add("sleep", ms))
        if built is not None:
            built.force_all()
        out[name] = {"driver": drv, "type": None if built is None else type(built).__name__,
                     "log": log.items}
    return out


class FakeClock:
    def __init__(self):
        self.now = 0

    def ticks_ms(self):
        return self.now

    def ticks_diff(self, a, b):
        return a - b

    def sleep_ms(self, ms):
        self.now += ms


def app_selftest():
    """The firmware App on an expander board answers TEST with its read-back result.

    argv: the example board config and a folder for the state file."""
    if len(sys.argv) < 3:
        return None
    import boardcfg
    import hw
    import wire
    out = {}
    for name, stuck in (("healthy", None), ("rev_stuck", {7: 0})):
        with open(sys.argv[1]) as f:
            raw = json.load(f)
        for k in range(len(raw["relays"])):
            raw["relays"][k]["pin"] = k
        raw["driver"] = {"kind": "expander", "i2c": {"id": 0}}
        raw["state_file"] = sys.argv[2] + "/state-" + name + ".txt"
        cfg = boardcfg.parse_board(raw)
        log = Log()
        app = hw.build_app(cfg, FakeMachine(log, 0x20, stuck), FakeClock(), hw.NoWatchdog())
        app.boot()
        reply = wire.decode_reply(app.handle_line(wire.encode(5, "TEST", (("dwell_ms", 0),))))
        out[name] = {"verb": reply.verb, "fields": reply.fields}
    return out


SCENARIOS = {
    "app_selftest": app_selftest,
    "build_kinds": build_kinds,
    "shift_basic": shift_basic,
    "shift_broken": shift_broken,
    "shift_no_sense": shift_no_sense,
    "expander_basic": expander_basic,
    "expander_stuck": expander_stuck,
    "expander_absent": expander_absent,
    "latching_gpio": latching_gpio,
    "latching_expander": latching_expander,
    "bank_selftest": bank_selftest,
}


def main():
    out = {}
    for name in SCENARIOS:
        out[name] = SCENARIOS[name]()
    sys.stdout.write(json.dumps(out))
    sys.stdout.write("\n")


if __name__ == "__main__":
    main()
