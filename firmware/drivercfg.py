"""The board config's ``"driver"`` block: check it against the relay list (boot only).

Read by ``boardcfg`` at boot and unloaded with it (the relay drivers themselves live in
``drivers.py``, loaded only when the board uses one). Schema: hardware_notes/
relays-and-drivers.md and BOARD_CONFIG.md. Errors are :class:`BoardConfigError`, defined here
(``boardcfg`` imports it from this module, so neither reader imports the other in a
circle), naming the key, e.g. ``driver.addr`` or ``relays[3].reset_pin``.
"""

# KIND_GPIO, KIND_SHIFT, EXPANDER_ADDR and EXPANDER_SIZE are also in drivers.py, on
# purpose: neither module imports the other, so a plain GPIO board never loads the
# drivers and the drivers never reload this reader after boot (heap).
KIND_GPIO = "gpio"
KIND_SHIFT = "shift"
KIND_EXPANDER = "expander"
KINDS = (KIND_GPIO, KIND_SHIFT, KIND_EXPANDER)
DRIVER_KEYS = ("kind", "data", "clock", "latch", "oe", "sense", "length", "i2c", "addr",
               "latching")
I2C_KEYS = ("id", "scl", "sda", "freq")
LATCHING_KEYS = ("pulse_ms",)
MAX_CHAIN = 128  # outputs: sixteen 8-bit chips
EXPANDER_ADDR = 0x20  # 0b0100 A2 A1 A0 with the address pins low (MCP23017 class)
EXPANDER_SIZE = 16


class BoardConfigError(ValueError):
    """A bad board configuration value; ``key`` names it (e.g. ``relays[3].pin``)."""

    def __init__(self, key: str, message: str) -> None:
        super().__init__(key + ": " + message)
        self.key = key
        self.message = message


def _error(key: str, message: str) -> Exception:
    return BoardConfigError(key, message)


def _pin(obj: dict, key: str, where: str, required: bool) -> "int | str | None":
    value = obj.get(key)
    if value is None and not required:
        return None
    if isinstance(value, bool) or not isinstance(value, (int, str)) or value == "" \
            or (isinstance(value, int) and not 0 <= value <= 255):
        raise _error(where + key, "must be a pin number 0..255 or a pin name, got %r" % (value,))
    return value


def _int(obj: dict, key: str, lo: int, hi: int, default: int, where: str) -> int:
    value = obj.get(key, default)
    if isinstance(value, bool) or not isinstance(value, int) or not lo <= value <= hi:
        raise _error(where + key, "must be a whole number in %d..%d, got %r"
                                % (lo, hi, value))
    return value


def _unknown(obj: dict, allowed: tuple, where: str) -> None:
    for key in obj:
        if key not in allowed:
            raise _error(where + key, "unknown key")


def _outputs(values: list, size: int, key: str) -> None:
    for i in range(len(values)):
        v = values[i]
        if isinstance(v, bool) or not isinstance(v, int) or not 0 <= v < size:
            raise _error("relays[%d].%s" % (i, key),
                                    "must be a port output 0..%d, got %r" % (size - 1, v))


def parse_driver(obj: object, relays: list, pins: list) -> dict:
    """Check the ``"driver"`` block against the relay list.

    Parameters
    ----------
    obj : dict or None
        The block (None: plain GPIO, one pin per relay).
    relays : list of dict
        The board config's raw ``relays`` entries (for ``reset_pin``).
    pins : list
        Each relay's ``pin`` as already read (GPIO pin, or port output number).

    Returns
    -------
    dict
        ``kind``, the pins of the kind, ``length`` (port outputs), ``pulse_ms`` (0: not
        latching) and ``reset_pins`` (list, or None when not latching).
    """
    if obj is None:
        obj = {}
    if not isinstance(obj, dict):
        raise _error("driver", "must be an object")
    _unknown(obj, DRIVER_KEYS, "driver.")
    kind = obj.get("kind", KIND_GPIO)
    if kind not in KINDS:
        raise _error("driver.kind", "must be one of " + "/".join(KINDS))
    out = {"kind": kind, "pulse_ms": 0, "reset_pins": None}  # type: dict
    reset = None  # type: list | None
    latching = obj.get("latching")
    if latching is not None:
        if not isinstance(latching, dict):
            raise _error("driver.latching", "must be an object with pulse_ms")
        _unknown(latching, LATCHING_KEYS, "driver.latching.")
        out["pulse_ms"] = _int(latching, "pulse_ms", 1, 1000, 20, "driver.latching.")
        reset = []
        for i in range(len(relays)):
            reset.append(_pin(relays[i], "reset_pin", "relays[%d]." % i, True))
            if reset[i] in pins or reset[i] in reset[:i]:
                raise _error("relays[%d].reset_pin" % i,
                                        "pin %r used twice" % (reset[i],))
        out["reset_pins"] = reset
    else:
        for i in range(len(relays)):
            if isinstance(relays[i], dict) and "reset_pin" in relays[i]:
                raise _error("relays[%d].reset_pin" % i,
                                        "only latching relays (driver.latching) have one")
    used = []  # type: list
    if kind == KIND_SHIFT:
        for key in ("data", "clock", "latch", "oe", "sense"):
            p = _pin(obj, key, "driver.", key in ("data", "clock", "latch"))
            if p is not None and p in used:
                raise _error("driver." + key, "pin %r used twice" % (p,))
            out[key] = p
            used.append(p)
        need = 0
        for p in pins + (reset or []):
            if isinstance(p, int) and not isinstance(p, bool) and p + 1 > need:
                need = p + 1
        out["length"] = _int(obj, "length", 8, MAX_CHAIN, max(8, (need + 7) // 8 * 8),
                             "driver.")
        if out["length"] % 8:
            raise _error("driver.length", "must be a multiple of 8 (8 per chip)")
    elif kind == KIND_EXPANDER:
        bus = obj.get("i2c", {})
        if not isinstance(bus, dict):
            raise _error("driver.i2c", "must be an object (id, scl, sda, freq)")
        _unknown(bus, I2C_KEYS, "driver.i2c.")
        out["i2c"] = {"id": _int(bus, "id", 0, 15, 0, "driver.i2c."),
                      "scl": _pin(bus, "scl", "driver.i2c.", False),
                      "sda": _pin(bus, "sda", "driver.i2c.", False),
                      "freq": _int(bus, "freq", 10000, 1000000, 100000, "driver.i2c.")}
        out["addr"] = _int(obj, "addr", 0x20, 0x27, EXPANDER_ADDR, "driver.")
        out["length"] = EXPANDER_SIZE
    else:
        for key in ("data", "clock", "latch", "oe", "sense", "length", "i2c", "addr"):
            if key in obj:
                raise _error("driver." + key, "not used by kind gpio")
        out["length"] = 0
    if kind != KIND_GPIO:
        _outputs(pins, out["length"], "pin")
        if reset is not None:
            _outputs(reset, out["length"], "reset_pin")
    return out
