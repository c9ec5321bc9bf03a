"""Board configuration: read and check the JSON board file (schema in BOARD_CONFIG.md).

Pure code for MicroPython and CPython (the simulator reads the same file with it).
Every problem raises :class:`BoardConfigError` naming the offending key.
"""

from array import array

from drivercfg import BoardConfigError, parse_driver  # the error class lives in the lower reader
from relays import (ENDS, ROLE_LADDER, ROLE_OPEN, ROLE_PROTECT, ROLE_REVERSE, ROLE_SHORT, ROLES,
                    Relay, State)

TOP_KEYS = ("board", "relays", "protect_ladder", "link", "boot", "safe_state", "state_file",
            "watchdog_ms", "ladder", "test_write_pause_ms", "driver", "mqtt")
RELAY_KEYS = ("name", "role", "bit", "pin", "active_low", "settle_ms", "reset_pin")
LINK_KEYS = ("kind", "port", "path", "id", "baud", "tx", "rx", "de_pin")
PORTS = ("stdio", "uart", "pty")
BOOT_POLICIES = ("restore", "safe")
MAX_BITS = 16
MAX_PIN = 255  # GPIO numbers of the boards in hardware_notes are far below this


class BoardConfig:
    """The checked board configuration (attributes as in BOARD_CONFIG.md).

    It has no methods on purpose: a method would keep this whole module (its globals)
    alive after boot, when the reader is unloaded to save heap.
    """

    name = ""
    relays: "list[Relay]"
    pins: "list"
    active_low: "list[bool]"
    bits = 0
    protect_ladder = True
    link: "dict"
    boot = "restore"
    safe_state: "State"
    state_file = "ns_state.txt"
    watchdog_ms = 0
    table_masks: "array"  # the ladder table sorted by ohms, as compact arrays
    table_ohms: "array"  # (6 bytes a row instead of two boxed objects)
    write_pause_ms = 0
    driver: "dict"  # the checked "driver" block (drivercfg.parse_driver)
    mqtt: "dict | None" = None  # the raw "mqtt" block, checked by mqtt_link.parse_mqtt


def _unknown(obj: dict, allowed: tuple, where: str) -> None:
    for key in obj:
        if key not in allowed:
            raise BoardConfigError(where + key, "unknown key")


def _int(obj: dict, key: str, lo: int, hi: int, default: "int | None", where: str) -> int:
    value = obj.get(key, default)
    if value is None:
        raise BoardConfigError(where + key, "missing")
    if isinstance(value, bool) or not isinstance(value, int):
        raise BoardConfigError(where + key, "must be a whole number, got %r" % (value,))
    if value < lo or value > hi:
        raise BoardConfigError(where + key, "%d outside %d..%d" % (value, lo, hi))
    return value


def _bool(obj: dict, key: str, default: bool, where: str) -> bool:
    value = obj.get(key, default)
    if not isinstance(value, bool):
        raise BoardConfigError(where + key, "must be true or false, got %r" % (value,))
    return value


def _str(obj: dict, key: str, default: "str | None", where: str,
         choices: "tuple | None" = None) -> str:
    value = obj.get(key, default)
    if not isinstance(value, str) or not value:
        raise BoardConfigError(where + key, "must be a non-empty string, got %r" % (value,))
    if choices is not None and value not in choices:
        raise BoardConfigError(where + key, "must be one of " + "/".join(choices))
    return value


def _pin(obj: dict, key: str, where: str) -> "int | str":
    value = obj.get(key)
    if isinstance(value, bool) or not isinstance(value, (int, str)) or value == "" \
            or (isinstance(value, int) and not 0 <= value <= MAX_PIN):
        raise BoardConfigError(where + key, "must be a pin number 0..%d or a pin name, got %r"
                               % (MAX_PIN, value))
    return value


def parse_relays(items: object, cfg: BoardConfig) -> None:
    if not isinstance(items, list) or not items:
        raise BoardConfigError("relays", "must be a non-empty list")
    names = []  # type: list[str]
    bits = []  # type: list[int]
    counts = {}  # type: dict[str, int]
    for i in range(len(items)):
        item = items[i]
        where = "relays[%d]." % i
        if not isinstance(item, dict):
            raise BoardConfigError("relays[%d]" % i, "must be an object")
        _unknown(item, RELAY_KEYS, where)
        role = _str(item, "role", None, where, ROLES)
        name = _str(item, "name", role + str(i), where)
        if name in names:
            raise BoardConfigError(where + "name", "duplicate name " + name)
        bit = -1
        if role == ROLE_LADDER:
            bit = _int(item, "bit", 0, MAX_BITS - 1, None, where)
            if bit in bits:
                raise BoardConfigError(where + "bit", "duplicate ladder bit %d" % bit)
            bits.append(bit)
        elif "bit" in item:
            raise BoardConfigError(where + "bit", "only ladder relays have a bit")
        pin = _pin(item, "pin", where)
        if pin in cfg.pins:
            raise BoardConfigError(where + "pin", "pin %r used twice" % (pin,))
        names.append(name)
        counts[role] = counts.get(role, 0) + 1
        cfg.relays.append(Relay(name, role, bit, _int(item, "settle_ms", 0, 1000, 10, where)))
        cfg.pins.append(pin)
        cfg.active_low.append(_bool(item, "active_low", False, where))
    cfg.bits = len(bits)
    for b in range(cfg.bits):
        if b not in bits:
            raise BoardConfigError("relays", "ladder bits must be 0..%d, %d is missing"
                                   % (cfg.bits - 1, b))
    if not 1 <= counts.get(ROLE_REVERSE, 0) <= 2:
        raise BoardConfigError("relays", "need one or two relays of role reverse")
    if counts.get(ROLE_PROTECT, 0) != 1:
        raise BoardConfigError("relays", "need exactly one relay of role protect")
    if counts.get(ROLE_OPEN, 0) > 1:
        raise BoardConfigError("relays", "at most one relay of role open")
    if counts.get(ROLE_SHORT, 0) > 1:
        raise BoardConfigError("relays", "at most one relay of role short")


def parse_state(obj: object, key: str, bits: int, has_open: bool,
                has_short: bool = False) -> State:
    if not isinstance(obj, dict):
        raise BoardConfigError(key, "must be an object with end, mask, open")
    _unknown(obj, ("end", "mask", "open", "short"), key + ".")
    end = _str(obj, "end", "A", key + ".", ENDS)
    mask = _int(obj, "mask", 0, (1 << bits) - 1, 0, key + ".")
    open_ = _bool(obj, "open", False, key + ".")
    if open_ and not has_open:
        raise BoardConfigError(key + ".open", "board has no open relay")
    short = _bool(obj, "short", False, key + ".")
    if short and not has_short:
        raise BoardConfigError(key + ".short", "board has no short relay")
    if short and open_:
        raise BoardConfigError(key + ".short", "open and short exclude each other")
    return State(end, mask, open_, short)


def parse_table(ladder: object, cfg: BoardConfig) -> None:
    """Read ``ladder.table`` (optional) into ``cfg.table_masks`` / ``cfg.table_ohms``."""
    if ladder is None:
        return
    if not isinstance(ladder, dict):
        raise BoardConfigError("ladder", "must be an object")
    table = ladder.get("table")
    if table is None:
        return
    if not isinstance(table, list):
        raise BoardConfigError("ladder.table", "must be a list of [mask, ohms]")
    bits = cfg.bits
    last = 0.0
    for i in range(len(table)):
        row = table[i]
        key = "ladder.table[%d]" % i
        if not isinstance(row, list) or len(row) != 2:
            raise BoardConfigError(key, "must be [mask, ohms]")
        mask, ohms = row[0], row[1]
        if isinstance(mask, bool) or not isinstance(mask, int) or not 0 <= mask < (1 << bits):
            raise BoardConfigError(key, "mask %r outside the %d ladder bits" % (mask, bits))
        if isinstance(ohms, bool) or not isinstance(ohms, (int, float)) or not ohms > 0:
            raise BoardConfigError(key, "ohms must be > 0, got %r" % (ohms,))
        if ohms < last:
            raise BoardConfigError(key, "table must be sorted by ohms")
        last = float(ohms)
        cfg.table_masks.append(mask)
        cfg.table_ohms.append(last)


def parse_link(obj: object) -> dict:
    if obj is None:
        obj = {"kind": "serial", "port": "stdio"}
    if not isinstance(obj, dict):
        raise BoardConfigError("link", "must be an object")
    _unknown(obj, LINK_KEYS, "link.")
    _str(obj, "kind", "serial", "link.", ("serial",))
    port = _str(obj, "port", "stdio", "link.", PORTS)
    out = {"kind": "serial", "port": port}  # type: dict
    if port == "uart":
        out["id"] = _int(obj, "id", 0, 15, 0, "link.")
        out["baud"] = _int(obj, "baud", 300, 3000000, 115200, "link.")
        for key in ("tx", "rx", "de_pin"):
            out[key] = _pin(obj, key, "link.") if obj.get(key) is not None else None
    elif port == "pty":
        out["path"] = obj.get("path")
        if out["path"] is not None:
            _str(obj, "path", None, "link.")
    return out


def parse_board(obj: object) -> BoardConfig:
    """Check a decoded board JSON object and return a :class:`BoardConfig`."""
    if not isinstance(obj, dict):
        raise BoardConfigError("board config", "must be a JSON object")
    _unknown(obj, TOP_KEYS, "")
    cfg = BoardConfig()
    cfg.relays, cfg.pins, cfg.active_low, cfg.link = [], [], [], {}
    cfg.safe_state = State("A", 0, False)
    cfg.table_masks, cfg.table_ohms = array("H"), array("f")
    cfg.name = _str(obj, "board", None, "")
    parse_relays(obj.get("relays"), cfg)
    has_open = False
    has_short = False
    for r in cfg.relays:
        if r.role == ROLE_OPEN:
            has_open = True
        if r.role == ROLE_SHORT:
            has_short = True
    cfg.protect_ladder = _bool(obj, "protect_ladder", True, "")
    cfg.link = parse_link(obj.get("link"))
    cfg.boot = _str(obj, "boot", "restore", "", BOOT_POLICIES)
    cfg.safe_state = parse_state(obj.get("safe_state", {}),
                                 "safe_state", cfg.bits, has_open, has_short)
    cfg.state_file = _str(obj, "state_file", "ns_state.txt", "")
    cfg.watchdog_ms = _int(obj, "watchdog_ms", 0, 600000, 0, "")
    if 0 < cfg.watchdog_ms < 500:
        raise BoardConfigError("watchdog_ms", "use 0 (off) or at least 500 ms")
    parse_table(obj.get("ladder"), cfg)
    cfg.write_pause_ms = _int(obj, "test_write_pause_ms", 0, 1000, 0, "")
    cfg.driver = parse_driver(obj.get("driver"), obj["relays"], cfg.pins)
    # The MQTT block is checked by mqtt_link.parse_mqtt (loaded only on MQTT boards).
    cfg.mqtt = obj.get("mqtt")
    return cfg


def load_board(path: str) -> BoardConfig:
    """Read and check a board JSON file."""
    import json
    try:
        with open(path) as f:
            obj = json.load(f)
    except OSError:
        raise BoardConfigError(path, "cannot read the board file")
    except ValueError:
        raise BoardConfigError(path, "not valid JSON")
    except (MemoryError, RuntimeError):  # nesting deeper than the board's parser or heap allows
        raise BoardConfigError(path, "too large or nested too deeply")
    return parse_board(obj)
