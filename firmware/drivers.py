"""Relay drivers for real boards: shift-register chains, an I2C port expander, latching relays.

Every driver here has the relay-driver interface of :class:`relays.GpioDriver` --
``count``, ``set(index, energised)`` (stage), ``apply()`` (make the staged coils real),
``get(index)`` (last applied), ``force_all()`` (drive everything once, at boot) -- plus
``check()``: a read-back of the outputs, returning the indices of the relays whose
outputs disagree with what was applied (``[]`` when all agree) or ``None`` when the
hardware cannot read back. The relay bank's self-test calls it.

A driver moves its coils through an *output port*: a row of output bits written in one
go. Ports have ``size``, ``write(levels, force=False)`` (a list of 0/1, one per output) and
``read()`` (the levels seen, or ``None``):

``GpioPort``        MCU pins, one per output; no read-back.
``ShiftChain``      chained serial-in/parallel-out shift registers with output latches
                    (the generic 74HC595 part number, made by many makers): data, clock,
                    latch pins, optional output-enable and an optional sense pin wired to
                    the last chip's serial output for read-back.
``Expander``        a 16-bit I2C port expander of the generic MCP23017 kind, through an
                    injected ``machine.I2C``-like bus; read-back from its GPIO register.

:class:`PortDriver` puts ordinary (mono-stable) relays on a port, one output per coil.
:class:`LatchingDriver` drives dual-coil latching relays: a pulse of ``pulse_ms`` on the
set or the reset coil, then both coils off; the contacts hold without power.

Nothing here imports a hardware module: pins, buses and ``sleep_ms`` are passed in
(:func:`build_driver` makes them from ``machine`` on the board), so the drivers run on
the MicroPython unix port and under CPython with fakes. ``drivercfg.parse_driver`` checks
the board config's ``"driver"`` block at boot; this module is loaded only by boards that
use one of these drivers (plain GPIO boards save its heap).
"""

try:
    from typing import TYPE_CHECKING
except ImportError:  # MicroPython
    TYPE_CHECKING = False
if TYPE_CHECKING:
    from typing import Any

KIND_GPIO = "gpio"  # as in drivercfg.py (kept apart for heap; see there)
KIND_SHIFT = "shift"

# Register addresses of the MCP23017-class expander with IOCON.BANK = 0 (the power-on
# default): data sheet DS20001952C, Table 3-1 (register addresses) and Table 3-5
# (control register summary, IOCON.BANK = 0). Port A at the address, port B at +1; with
# IOCON.SEQOP = 0 (default) a two-byte write or read covers A then B.
REG_IODIRA = 0x00  # direction, 1 = input (power-on value 0xFF: all inputs)
REG_GPIOA = 0x12  # reads the levels on the pins
REG_OLATA = 0x14  # output latches
EXPANDER_ADDR = 0x20  # 0b0100 A2 A1 A0 with the address pins low
EXPANDER_SIZE = 16  # GPA0-7, GPB0-7


# --- output ports ---------------------------------------------------------------------
class GpioPort:
    """Outputs on MCU pins (``value(level)`` objects); a pin is written only on change."""

    def __init__(self, pins: list) -> None:
        self.pins = pins
        self.size = len(pins)
        self._levels = [-1] * self.size

    def write(self, levels: list, force: bool = False) -> None:
        for i in range(self.size):
            if force or levels[i] != self._levels[i]:
                self.pins[i].value(levels[i])
                self._levels[i] = levels[i]

    def read(self) -> "list | None":
        return None


class ShiftChain:
    """Chained serial-in shift registers with output latches (74HC595 class).

    A frame is shifted MSB-first: output ``length - 1`` (the last output of the chip
    farthest from the board) first, output 0 last; data is taken on the rising clock edge,
    and a latch pulse after the last bit moves the whole frame to the outputs at once.

    Parameters
    ----------
    data, clock, latch : Pin
        Output pins to the first chip's serial input, shift clock and storage clock.
    length : int
        Outputs in the chain (8 per chip).
    oe : Pin, optional
        Output enable (active low), held high (outputs off) until the first frame is
        latched, so the coils cannot pick up the chips' random power-on content.
    sense : Pin, optional
        Input pin wired to the last chip's serial output: enables :meth:`read`.
    """

    def __init__(self, data: "Any", clock: "Any", latch: "Any", length: int,
                 oe: "Any" = None, sense: "Any" = None) -> None:
        self.data = data
        self.clock = clock
        self.latch = latch
        self.oe = oe
        self.sense = sense
        self.size = length
        self._last = None  # type: list | None
        self._enabled = False

    def _shift(self, levels: list) -> list:
        """Shift ``levels`` in; return what came out of the last stage, output order."""
        out = [0] * self.size
        for i in range(self.size - 1, -1, -1):
            if self.sense is not None:
                out[i] = 1 if self.sense.value() else 0
            self.data.value(levels[i])
            self.clock.value(1)
            self.clock.value(0)
        return out

    def write(self, levels: list, force: bool = False) -> None:
        if not force and self._last == levels:
            return
        self._shift(levels)
        self.latch.value(1)
        self.latch.value(0)
        self._last = list(levels)
        if self.oe is not None and not self._enabled:
            self.oe.value(0)
            self._enabled = True

    def read(self) -> "list | None":
        """Shift the last frame in again (no latch pulse: the outputs do not move) and
        return the bits that came out of the chain, which must equal that frame."""
        if self.sense is None or self._last is None:
            return None
        return self._shift(self._last)


class Expander:
    """A 16-bit I2C port expander (MCP23017 class): outputs 0-7 are GPA0-7, 8-15 GPB0-7.

    Parameters
    ----------
    i2c : I2C
        Has ``writeto_mem(addr, reg, buf)`` and ``readfrom_mem(addr, reg, n)``.
    addr : int
        7-bit bus address (0x20..0x27).
    """

    def __init__(self, i2c: "Any", addr: int = EXPANDER_ADDR) -> None:
        self.i2c = i2c
        self.addr = addr
        self.size = EXPANDER_SIZE
        self._word = -1
        self._outputs = False

    def write(self, levels: list, force: bool = False) -> None:
        word = 0
        for i in range(self.size):
            if levels[i]:
                word |= 1 << i
        if not force and word == self._word:
            return
        self.i2c.writeto_mem(self.addr, REG_OLATA, bytes((word & 0xFF, word >> 8)))
        self._word = word
        if force or not self._outputs:
            # latches first, then directions: the pins leave high impedance at their level
            self.i2c.writeto_mem(self.addr, REG_IODIRA, bytes((0, 0)))
            self._outputs = True

    def read(self) -> "list | None":
        raw = self.i2c.readfrom_mem(self.addr, REG_GPIOA, 2)
        word = raw[0] | (raw[1] << 8)
        return [(word >> i) & 1 for i in range(self.size)]


# --- relay drivers ----------------------------------------------------------------------
def _level(on: bool, active_low: bool) -> int:
    return 0 if on == active_low else 1


class PortDriver:
    """Mono-stable relays on an output port: relay ``k`` is output ``outputs[k]``.

    Parameters
    ----------
    port : GpioPort, ShiftChain or Expander
    outputs : list of int
        Port output of each relay (relay order).
    active_low : list of bool
        Per relay: True when a low output energises the coil.
    """

    def __init__(self, port: "Any", outputs: list, active_low: list) -> None:
        self.port = port
        self.outputs = outputs
        self.active_low = active_low
        self.count = len(outputs)
        self._staged = [False] * self.count
        self._applied = [False] * self.count

    def _levels(self, states: list) -> list:
        levels = [0] * self.port.size
        for k in range(self.count):
            levels[self.outputs[k]] = _level(states[k], self.active_low[k])
        return levels

    def set(self, index: int, energised: bool) -> None:
        self._staged[index] = energised

    def get(self, index: int) -> bool:
        return self._applied[index]

    def apply(self) -> None:
        if self._staged != self._applied:
            self.port.write(self._levels(self._staged))
            self._applied = list(self._staged)

    def force_all(self) -> None:
        self.port.write(self._levels(self._staged), True)
        self._applied = list(self._staged)

    def check(self) -> "list | None":
        seen = self.port.read()
        if seen is None:
            return None
        want = self._levels(self._applied)
        return [k for k in range(self.count) if seen[self.outputs[k]] != want[self.outputs[k]]]


class LatchingDriver:
    """Dual-coil latching relays: relay ``k`` has a set coil on output ``set_outputs[k]``
    (energised contacts) and a reset coil on ``reset_outputs[k]``.

    Changing a relay drives its one coil for ``pulse_ms``, then turns both coils off;
    relays are pulsed one at a time (one coil current at a time). :meth:`force_all`
    pulses every relay, since a latching relay's position at power-on is unknown.

    Parameters
    ----------
    port : GpioPort, ShiftChain or Expander
    set_outputs, reset_outputs : list of int
        Port outputs of the set and reset coils (relay order).
    pulse_ms : int
        Coil pulse width, milliseconds (the relay data sheet's minimum, with margin).
    sleep_ms : callable
        ``sleep_ms(ms)`` (the board's, feeding the watchdog).
    active_low : list of bool, optional
        Per relay: True when a low output drives its coils.
    """

    def __init__(self, port: "Any", set_outputs: list, reset_outputs: list, pulse_ms: int,
                 sleep_ms: "Any", active_low: "list | None" = None) -> None:
        self.port = port
        self.set_outputs = set_outputs
        self.reset_outputs = reset_outputs
        self.pulse_ms = pulse_ms
        self.sleep_ms = sleep_ms
        self.count = len(set_outputs)
        self.active_low = active_low if active_low is not None else [False] * self.count
        self._staged = [False] * self.count
        self._applied = [False] * self.count

    def _idle(self) -> list:
        levels = [0] * self.port.size
        for k in range(self.count):
            off = _level(False, self.active_low[k])
            levels[self.set_outputs[k]] = off
            levels[self.reset_outputs[k]] = off
        return levels

    def _pulse(self, k: int, on: bool) -> None:
        levels = self._idle()
        coil = self.set_outputs[k] if on else self.reset_outputs[k]
        levels[coil] = _level(True, self.active_low[k])
        self.port.write(levels)
        self.sleep_ms(self.pulse_ms)
        self.port.write(self._idle())
        self._applied[k] = on

    def set(self, index: int, energised: bool) -> None:
        self._staged[index] = energised

    def get(self, index: int) -> bool:
        return self._applied[index]

    def apply(self) -> None:
        for k in range(self.count):
            if self._staged[k] != self._applied[k]:
                self._pulse(k, self._staged[k])

    def force_all(self) -> None:
        self.port.write(self._idle(), True)
        for k in range(self.count):
            self._pulse(k, self._staged[k])

    def check(self) -> "list | None":
        """Both coils of every relay must be off between pulses."""
        seen = self.port.read()
        if seen is None:
            return None
        idle = self._idle()
        return [k for k in range(self.count)
                if seen[self.set_outputs[k]] != idle[self.set_outputs[k]]
                or seen[self.reset_outputs[k]] != idle[self.reset_outputs[k]]]


def _gpio_port(machine: "Any", pins: list, idle: list) -> GpioPort:
    return GpioPort([machine.Pin(pins[i], machine.Pin.OUT, value=idle[i])
                     for i in range(len(pins))])


def build_driver(drv: dict, pins: list, active_low: list, machine: "Any",
                 sleep_ms: "Any") -> "Any":
    """The relay driver the checked ``driver`` block describes, or None for plain GPIO
    relays (the caller then uses :class:`relays.GpioDriver`).

    Parameters
    ----------
    drv : dict
        From ``drivercfg.parse_driver``.
    pins, active_low : list
        Each relay's pin (or port output) and polarity.
    machine : module
        ``machine`` (``Pin``, ``I2C``), injected.
    sleep_ms : callable
        Used for latching pulses.
    """
    kind = drv["kind"]
    reset = drv["reset_pins"]
    if kind == KIND_GPIO and reset is None:
        return None
    if kind == KIND_GPIO:
        coil_pins = list(pins) + list(reset)
        idle = [_level(False, a) for a in active_low] * 2
        port = _gpio_port(machine, coil_pins, idle)  # type: Any
        set_out = list(range(len(pins)))
        reset_out = [len(pins) + k for k in range(len(pins))]
    else:
        if kind == KIND_SHIFT:
            Pin = machine.Pin
            oe = Pin(drv["oe"], Pin.OUT, value=1) if drv["oe"] is not None else None
            sense = Pin(drv["sense"], Pin.IN) if drv["sense"] is not None else None
            port = ShiftChain(Pin(drv["data"], Pin.OUT, value=0),
                              Pin(drv["clock"], Pin.OUT, value=0),
                              Pin(drv["latch"], Pin.OUT, value=0), drv["length"], oe, sense)
        else:
            bus = drv["i2c"]
            kw = {"freq": bus["freq"]}  # type: dict
            for key in ("scl", "sda"):
                if bus[key] is not None:
                    kw[key] = machine.Pin(bus[key])
            port = Expander(machine.I2C(bus["id"], **kw), drv["addr"])
        set_out = list(pins)
        reset_out = reset
    if reset is None:
        return PortDriver(port, set_out, active_low)
    return LatchingDriver(port, set_out, reset_out, drv["pulse_ms"], sleep_ms, active_low)
