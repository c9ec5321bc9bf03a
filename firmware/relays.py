"""Relay bank: roles, drivers and the switching order.

Runs on MicroPython and CPython alike: nothing here imports a hardware module. The pins
(or whatever moves the coils) sit behind a *driver*, and time passes through an injected
``sleep_ms`` callable, so tests drive the bank with fakes.

Roles
-----
``ladder``   bit ``i`` of the setting mask energises ladder relay ``i``.
``reverse``  energised = fed end B (the ends swap); de-energised = fed end A. One DPDT
             relay, or two relays (one per corner), all driven together.
``protect``  energised = receiver input shorted / disconnected; de-energised = listening.
``open``     energised = termination disconnected (no rear null).
``short``    energised = termination shorted (the closed loop: figure-8, nulls
             broadside). Open and short are never both requested.

Switching order (:meth:`RelayBank.go`): protect on -> settle -> swap the ends -> settle ->
ladder, open and short relays -> settle -> protect off; when open or short is released
and the other engaged, the release comes first and settles (break before make). The
protect step is taken whenever the fed end changes, and for ladder/open/short changes
only when ``protect_ladder`` is true.
"""

try:
    from typing import TYPE_CHECKING
except ImportError:  # MicroPython
    TYPE_CHECKING = False
if TYPE_CHECKING:
    from typing import Any

ROLE_LADDER = "ladder"
ROLE_REVERSE = "reverse"
ROLE_PROTECT = "protect"
ROLE_OPEN = "open"
ROLE_SHORT = "short"
ROLES = (ROLE_LADDER, ROLE_REVERSE, ROLE_PROTECT, ROLE_OPEN, ROLE_SHORT)
ENDS = ("A", "B")


class State:
    """A switching state: fed ``end`` ("A"/"B"), ladder ``mask`` (int), ``open_`` (bool),
    ``short`` (bool; never together with ``open_``)."""

    def __init__(self, end: str, mask: int, open_: bool, short: bool = False) -> None:
        self.end = end
        self.mask = mask
        self.open_ = open_
        self.short = short

    def __eq__(self, other: object) -> bool:
        if not isinstance(other, State):
            return False
        return (self.end == other.end and self.mask == other.mask
                and self.open_ == other.open_ and self.short == other.short)

    def __repr__(self) -> str:
        return "State(%r, %d, %r, %r)" % (self.end, self.mask, self.open_, self.short)


class Relay:
    """One relay: ``name``, ``role``, ladder ``bit`` (or -1) and ``settle_ms``."""

    def __init__(self, name: str, role: str, bit: int, settle_ms: int) -> None:
        self.name = name
        self.role = role
        self.bit = bit
        self.settle_ms = settle_ms


class GpioDriver:
    """Relays on plain output pins, one pin per coil.

    The driver interface (shared by future shift-register, port-expander and latching
    drivers) is: ``count``, ``set(index, energised)`` (stage a coil), ``apply()`` (make the
    staged coils real), ``get(index)`` (last applied logical state).

    Parameters
    ----------
    pins : list
        Objects with ``value(level)`` (e.g. ``machine.Pin`` in output mode).
    active_low : list of bool
        Per pin: True when a low level energises the coil.
    """

    def __init__(self, pins: list, active_low: list) -> None:
        self.pins = pins
        self.active_low = active_low
        self.count = len(pins)
        self._staged = [False] * self.count
        self._applied = [False] * self.count

    def set(self, index: int, energised: bool) -> None:
        self._staged[index] = energised

    def apply(self) -> None:
        for i in range(self.count):
            on = self._staged[i]
            if on != self._applied[i]:
                self.pins[i].value(0 if on == self.active_low[i] else 1)
                self._applied[i] = on

    def get(self, index: int) -> bool:
        return self._applied[index]

    def force_all(self) -> None:
        """Drive every pin to its staged level, changed or not (used once at boot)."""
        for i in range(self.count):
            on = self._staged[i]
            self.pins[i].value(0 if on == self.active_low[i] else 1)
            self._applied[i] = on


class RelayBank:
    """Maps a :class:`State` onto relays and switches them in a safe order.

    Parameters
    ----------
    relays : list of Relay
        In driver order (relay ``k`` is driver index ``k``).
    driver : object
        A relay driver (see :class:`GpioDriver`).
    sleep_ms : callable
        ``sleep_ms(ms)``; waits for relays to settle (may also feed a watchdog).
    protect_ladder : bool
        Also protect the receiver while ladder/open relays change.
    """

    def __init__(self, relays: list, driver: "Any", sleep_ms: "Any",
                 protect_ladder: bool = True) -> None:
        self.relays = relays
        self.driver = driver
        self.sleep_ms = sleep_ms
        self.protect_ladder = protect_ladder
        self.bits = 0
        for r in relays:
            if r.role == ROLE_LADDER and r.bit + 1 > self.bits:
                self.bits = r.bit + 1
        self.state = State("A", 0, False)
        self.faults = None  # type: list | None

    def _indices(self, role: str) -> list:
        return [k for k in range(len(self.relays)) if self.relays[k].role == role]

    def _wanted(self, k: int, state: State) -> bool:
        r = self.relays[k]
        if r.role == ROLE_LADDER:
            return bool((state.mask >> r.bit) & 1)
        if r.role == ROLE_REVERSE:
            return state.end == "B"
        if r.role == ROLE_OPEN:
            return state.open_
        if r.role == ROLE_SHORT:
            return state.short
        return self.driver.get(k)  # protect: left as it is

    def _switch(self, indices: list, state: State) -> None:
        """Stage and apply the given relays for ``state``; wait the longest settle."""
        settle = 0
        for k in indices:
            want = self._wanted(k, state)
            if want != self.driver.get(k):
                self.driver.set(k, want)
                if self.relays[k].settle_ms > settle:
                    settle = self.relays[k].settle_ms
        self.driver.apply()
        self._sleep(settle)

    def _protect(self, on: bool) -> None:
        settle = 0
        for k in self._indices(ROLE_PROTECT):
            if self.driver.get(k) != on:
                self.driver.set(k, on)
                settle = max(settle, self.relays[k].settle_ms)
        self.driver.apply()
        self._sleep(settle)

    def _sleep(self, ms: int) -> None:
        # A millisecond-tick sleep may end up to 1 ms early (it counts tick edges), so
        # one more keeps every settle time a true minimum.
        if ms > 0:
            self.sleep_ms(ms + 1)

    def power_on(self, state: State) -> None:
        """Boot: drive every pin de-energised, then switch safely into ``state``."""
        for k in range(len(self.relays)):
            self.driver.set(k, False)
        self.driver.force_all()
        self.state = State("A", 0, False)
        self.go(state)

    def go(self, target: State) -> bool:
        """Switch to ``target`` (already validated); returns True if any relay moved."""
        if target == self.state:
            return False
        swap = target.end != self.state.end
        protect = swap or self.protect_ladder
        if protect:
            self._protect(True)
        if swap:
            self._switch(self._indices(ROLE_REVERSE), target)
        term = self._indices(ROLE_LADDER) + self._indices(ROLE_OPEN) + self._indices(ROLE_SHORT)
        cur = self.state
        if (cur.open_ and target.short) or (cur.short and target.open_):
            # break before make: release the old termination mode first
            self._switch(term, State(target.end, cur.mask, False, False))
        self._switch(term, target)
        if protect:
            self._protect(False)
        self.state = target
        return True

    def self_test(self, dwell_ms: int) -> int:
        """Protect the receiver, energise and release every other relay in turn (dwelling
        ``dwell_ms`` after each change), restore the state, reconnect. Returns how many
        relays were stepped (the protect relay itself is exercised by the bracket).

        Where the driver can read its outputs back (``check()``), they are read after
        every change; :attr:`faults` is then the list of relay names that read back
        wrong (empty: all good), else None."""
        self._protect(True)
        check = getattr(self.driver, "check", None)  # drivers with read-back have it
        faults = [] if check is not None else None  # type: list | None
        stepped = 0
        for k in range(len(self.relays)):
            if self.relays[k].role == ROLE_PROTECT:
                continue
            before = self.driver.get(k)
            for level in (not before, before):
                self.driver.set(k, level)
                self.driver.apply()
                faults = self._read_back(check, faults)
                self._sleep(max(dwell_ms, self.relays[k].settle_ms))
            stepped += 1
        self._protect(False)
        self.faults = self._read_back(check, faults)
        return stepped

    def _read_back(self, check: "Any", faults: "list | None") -> "list | None":
        """Add the names of relays whose outputs read back wrong; None: no read-back."""
        if faults is None:
            return None
        bad = check()
        if bad is None:
            return None
        for k in bad:
            if self.relays[k].name not in faults:
                faults.append(self.relays[k].name)
        return faults

    def levels(self) -> dict:
        """Relay name -> energised (as last applied)."""
        out = {}
        for k in range(len(self.relays)):
            out[self.relays[k].name] = self.driver.get(k)
        return out
