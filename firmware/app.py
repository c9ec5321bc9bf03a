"""The board application: one request line in, one reply line out.

:meth:`App.handle_line` is the whole protocol handler (semantics in PROTOCOL.md). It
takes its relay bank, state store and clock from the constructor and imports nothing
board-specific, so the serial link, a later MQTT link and host tests under CPython all
drive the same object.
"""


import wire
from relays import ENDS, ROLES, State
from store import parse_rows

try:
    from typing import TYPE_CHECKING
except ImportError:  # MicroPython
    TYPE_CHECKING = False
if TYPE_CHECKING:
    from typing import Any
    from boardcfg import BoardConfig
    from relays import RelayBank
    from store import StateStore

FW_VERSION = "0.1.0"
TABLE_CHUNK = 16  # most table entries per TABLE reply
OHMS_SPAN = 2.0  # ohms= may lie at most this factor outside the table's span
DWELL_MAX_MS = 2000


class App:
    """Protocol handler and owner of the switching state.

    Parameters
    ----------
    cfg : BoardConfig
        Checked board configuration.
    bank : RelayBank
        Relay bank (with its driver and sleep function).
    store : StateStore
        State persistence.
    clock : object
        ``ticks_ms()`` and ``ticks_diff(a, b)`` (``time`` on MicroPython).
    heap_fn : callable, optional
        Returns bytes of heap in use (after a collect); 0 when absent.
    """

    def __init__(self, cfg: "BoardConfig", bank: "RelayBank", store: "StateStore",
                 clock: "Any", heap_fn: "Any" = None) -> None:
        self.cfg = cfg
        self.bank = bank
        self.store = store
        self.clock = clock
        self.heap_fn = heap_fn
        self.boots = 0
        self.restored = False
        self.t0_ms = clock.ticks_ms()
        self.has_open = False
        self.has_short = False
        for r in cfg.relays:
            if r.role == "open":
                self.has_open = True
            if r.role == "short":
                self.has_short = True
        self.masks = cfg.table_masks
        self.ohms = cfg.table_ohms
        self.staged_masks = []  # type: list
        self.staged_ohms = []  # type: list
        self.staged_rows = 0

    # --- boot -------------------------------------------------------------------------
    def boot(self) -> bytes:
        """Choose the start state (restored or safe), switch into it, count the boot and
        return the boot event line."""
        state, boots = self.store.load()
        self.store.discard_tmp()
        loaded = self.store.load_table(self.bank.bits)
        if loaded is not None:  # a table written over the link replaces the config's
            self._use_table(loaded[0], loaded[1])
        self.restored = state is not None and self.cfg.boot == "restore"
        if state is not None and state.short and not self.has_short:
            self.restored = False  # saved on another board config: start safe
        if state is None or not self.restored:
            state = self.cfg.safe_state
        self.boots = boots + 1
        self.bank.power_on(state)
        try:
            self.store.save(self.bank.state, self.boots)
        except OSError:
            pass  # the board still runs; the next change tries again
        return wire.encode(0, "EVT", (("kind", "boot"), ("fw", FW_VERSION),
                                      ("boots", self.boots), ("restored", self.restored)))

    # --- requests ---------------------------------------------------------------------
    def handle_line(self, line: bytes) -> bytes:
        """Answer one request line (with or without its newline); never raises."""
        seq = 0
        try:
            frame = wire.decode_request(line)
            seq = frame.seq
            handler = getattr(self, "_do_" + frame.verb.lower())
            return wire.encode(seq, "OK", handler(frame.seq, frame.fields))
        except wire.WireError as exc:
            return wire.encode_error(exc.seq, exc.code, exc.message)
        except Exception as exc:  # a fault must still be answered
            return wire.encode_error(seq, wire.E_HW, "%s %s" % (type(exc).__name__, exc))

    def _state_fields(self, state: State) -> list:
        out = [("end", state.end), ("mask", state.mask), ("open", state.open_)]
        if self.has_short:
            out.append(("short", state.short))
        for k in range(len(self.masks)):
            if self.masks[k] == state.mask:
                out.append(("ohms", wire.format_ohms(self.ohms[k])))
                break
        return out

    def _do_ping(self, seq: int, f: dict) -> list:
        return []

    def _do_info(self, seq: int, f: dict) -> list:
        present = [role for role in ROLES if any(r.role == role for r in self.cfg.relays)]
        return [("fw", FW_VERSION), ("proto", wire.VERSION), ("board", self.cfg.name),
                ("bits", self.bank.bits), ("roles", ",".join(present)),
                ("table", len(self.masks))]

    def _do_status(self, seq: int, f: dict) -> list:
        up_s = self.clock.ticks_diff(self.clock.ticks_ms(), self.t0_ms) // 1000
        heap = self.heap_fn() if self.heap_fn is not None else 0
        return self._state_fields(self.bank.state) + [
            ("fw", FW_VERSION), ("boots", self.boots), ("up_s", up_s), ("heap", heap)]

    def _target(self, seq: int, f: dict) -> State:
        """The requested state, fully checked before anything moves."""
        end = wire.field_choice(f, "end", ENDS, seq)
        if "mask" in f and "ohms" in f:
            raise wire.WireError(wire.E_KEY, "give mask or ohms, not both", seq)
        if "ohms" in f:
            table = self.ohms
            if not len(table):
                raise wire.WireError(wire.E_STATE, "no ladder table: use mask", seq)
            # the span counts from the rows as the protocol writes them (one decimal):
            # a table kept as 32-bit floats holds 1944.7 as 1944.69995..., and twice the
            # row as written (3889.4) must still be accepted
            ohms = wire.field_float(f, "ohms", float(wire.format_ohms(table[0])) / OHMS_SPAN,
                                    float(wire.format_ohms(table[-1])) * OHMS_SPAN, seq)
            mask = self.masks[wire.nearest_index(table, ohms)]
        else:
            mask = wire.field_int(f, "mask", 0, (1 << self.bank.bits) - 1, seq)
        open_ = wire.field_bool(f, "open", seq)
        if open_ and not self.has_open:
            raise wire.WireError(wire.E_RANGE, "board has no open relay", seq)
        short = wire.field_bool(f, "short", seq, False)
        if short and not self.has_short:
            raise wire.WireError(wire.E_RANGE, "board has no short relay", seq)
        if short and open_:
            raise wire.WireError(wire.E_RANGE, "open and short exclude each other", seq)
        return State(end, mask, open_, short)

    def _do_set(self, seq: int, f: dict) -> list:
        target = self._target(seq, f)
        changed = self.bank.go(target)
        out = self._state_fields(self.bank.state) + [("changed", changed)]
        if changed:
            try:
                self.store.save(self.bank.state, self.boots)
            except OSError:
                out.append(("saved", 0))
        return out

    def _do_table(self, seq: int, f: dict) -> list:
        n = len(self.masks)
        if not n:
            raise wire.WireError(wire.E_STATE, "no ladder table", seq)
        start = wire.field_int(f, "start", 0, n - 1, seq, 0)
        count = wire.field_int(f, "count", 1, TABLE_CHUNK, seq, TABLE_CHUNK)
        parts = []  # type: list[str]
        size = 0
        for k in range(start, min(n, start + count)):
            item = "%d:%s" % (self.masks[k], wire.format_ohms(self.ohms[k]))
            if size + len(item) + 1 > wire.MAX_VALUE:
                break
            parts.append(item)
            size += len(item) + 1
        return [("start", start), ("n", len(parts)), ("t", ",".join(parts))]

    def _use_table(self, masks: list, ohms: list) -> None:
        from array import array
        self.masks, self.ohms = array("H", masks), array("f", ohms)

    def _do_tload(self, seq: int, f: dict) -> list:
        """Stage rows of a new ladder table; the last chunk saves it atomically and only
        then puts it in use (an interrupted transfer leaves the old table)."""
        rows = wire.field_int(f, "rows", 1, 1 << self.bank.bits, seq)
        start = wire.field_int(f, "start", 0, rows - 1, seq)
        if "t" not in f:
            raise wire.WireError(wire.E_MISSING, "missing t", seq)
        if start == 0:
            self.staged_masks, self.staged_ohms, self.staged_rows = [], [], rows
        elif rows != self.staged_rows or start != len(self.staged_masks):
            raise wire.WireError(wire.E_RANGE, "expected start=%d rows=%d" % (
                len(self.staged_masks), self.staged_rows), seq)
        masks = list(self.staged_masks)
        ohms = list(self.staged_ohms)
        parse_rows(f["t"], self.bank.bits, masks, ohms, seq)
        if len(masks) > rows:
            raise wire.WireError(wire.E_RANGE, "more than rows=%d" % rows, seq)
        self.staged_masks, self.staged_ohms = masks, ohms
        if len(masks) < rows:
            return [("staged", len(masks)), ("rows", rows)]
        if len(set(masks)) != rows:
            self.staged_masks, self.staged_ohms = [], []
            raise wire.WireError(wire.E_RANGE, "a mask appears twice", seq)
        self.staged_masks, self.staged_ohms = [], []
        self.store.save_table(masks, ohms)   # OSError -> HW reply, the old table stays
        self._use_table(masks, ohms)
        return [("staged", rows), ("rows", rows), ("done", 1)]

    def _do_test(self, seq: int, f: dict) -> list:
        dwell = wire.field_int(f, "dwell_ms", 0, DWELL_MAX_MS, seq, 50)
        t = self.clock.ticks_ms()
        stepped = self.bank.self_test(dwell)
        ms = self.clock.ticks_diff(self.clock.ticks_ms(), t)
        faults = self.bank.faults
        out = [("relays", stepped), ("ms", ms)] + self._state_fields(self.bank.state)
        out.append(("rb", "none" if faults is None else ("fail" if faults else "ok")))
        if faults:
            out.append(("bad", ",".join(faults)[:wire.MAX_VALUE]))
        return out
