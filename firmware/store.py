"""State persistence: the switching state and the boot count survive a power cut.

The state file holds one protocol line (``NS1 0 EVT kind=state end= mask= open= boots=
*CRC``), so the codec in ``wire.py`` checks its form and CRC: a torn or damaged file
never decodes. Writing is atomic: write ``<path>.tmp``, flush, close, ``os.sync()`` if
the port has it, then rename over ``<path>`` (the rename is the commit point). Where a
file system refuses to rename over an existing file, the old file is removed first; a
power cut in between leaves only the complete temporary file, which :meth:`load` then
accepts.

File access goes through a small ``fs`` object (``open``, ``rename``, ``remove``,
``sync``) so tests can cut the power at any step.

The frame counter of signed MQTT frames (:class:`CounterStore`, ``ns_ctr.txt`` beside the
state file: ``NS1 0 EVT kind=ctr last=<n> *CRC``) is written the same way, so a replay
guard survives a power cut and a reboot.
"""

try:
    from typing import TYPE_CHECKING
except ImportError:  # MicroPython
    TYPE_CHECKING = False
if TYPE_CHECKING:
    from typing import Any

import wire
from relays import ENDS, State


class PosixFs:
    """The real file system through ``open`` and ``os``."""

    def __init__(self) -> None:
        import os
        self.os = os

    def open(self, path: str, mode: str) -> "Any":
        return open(path, mode)

    def rename(self, old: str, new: str) -> None:
        self.os.rename(old, new)

    def remove(self, path: str) -> None:
        self.os.remove(path)

    def sync(self) -> None:
        sync = getattr(self.os, "sync", None)
        if sync is not None:
            sync()


def encode_state(state: State, boots: int) -> bytes:
    """The state file's content for ``state`` after ``boots`` boots."""
    fields = [("kind", "state"), ("end", state.end), ("mask", state.mask),
              ("open", state.open_)]
    if state.short:
        fields.append(("short", 1))
    fields.append(("boots", boots))
    return wire.encode(0, "EVT", fields)


def decode_state(data: bytes, bits: int, has_open: bool) -> "tuple[State, int]":
    """Parse and check a state file's content; raises ``wire.WireError`` or ValueError."""
    frame = wire.decode(data)
    f = frame.fields
    if frame.verb != "EVT" or f.get("kind") != "state":
        raise ValueError("not a state record")
    end = wire.field_choice(f, "end", ENDS)
    mask = wire.field_int(f, "mask", 0, (1 << bits) - 1)
    open_ = wire.field_bool(f, "open")
    if open_ and not has_open:
        raise ValueError("open state on a board without an open relay")
    short = wire.field_bool(f, "short", 0, False)
    if short and open_:
        raise ValueError("open and short together")
    boots = wire.field_int(f, "boots", 0, 2 ** 30)
    return State(end, mask, open_, short), boots


def parse_rows(text: str, bits: int, masks: list, ohms: list, seq: int = 0) -> None:
    """Append the rows of ``mask:ohms,...`` to ``masks``/``ohms``, checking each mask
    against ``bits`` and that ohms are finite, > 0 and ascending; raises WireError."""
    for item in text.split(","):
        mask_text, sep, ohm_text = item.partition(":")
        if not sep:
            raise wire.WireError(wire.E_FORMAT, "row %r is not mask:ohms" % item, seq)
        mask = wire.field_int({"mask": mask_text}, "mask", 0, (1 << bits) - 1, seq)
        r = wire.field_float({"ohms": ohm_text}, "ohms", 1e-3, 1e9, seq)
        if ohms and r < ohms[-1]:
            raise wire.WireError(wire.E_RANGE, "rows must be sorted by ohms", seq)
        masks.append(mask)
        ohms.append(r)


def decode_table(data: bytes, bits: int) -> "tuple[list, list]":
    """Parse a table file; raises WireError or ValueError when it is not complete."""
    lines = [ln for ln in data.split(b"\n") if ln.strip()]
    if not lines:
        raise ValueError("empty table file")
    head = wire.decode(lines[0])
    if head.verb != "EVT" or head.fields.get("kind") != "table":
        raise ValueError("not a table file")
    rows = wire.field_int(head.fields, "rows", 1, 1 << bits)
    masks = []  # type: list
    ohms = []  # type: list
    for ln in lines[1:]:
        frame = wire.decode(ln)
        if frame.fields.get("kind") != "rows":
            raise ValueError("not a table row line")
        parse_rows(frame.fields.get("t", ""), bits, masks, ohms)
    if len(masks) != rows:
        raise ValueError("table file has %d of %d rows" % (len(masks), rows))
    return masks, ohms


class AtomicRecord:
    """One protocol line in a file, written atomically and read back checked.

    Parameters
    ----------
    path : str
        File path; ``path + ".tmp"`` is the temporary file.
    fs : object, optional
        File access (default :class:`PosixFs`).
    pause_ms : int
        Test hook: write in 8-byte pieces and wait this long between steps, so a test can
        cut the power in the middle of a write. 0 in service.
    sleep_ms : callable, optional
        Used with ``pause_ms``.
    """

    def __init__(self, path: str, fs: "Any" = None, pause_ms: int = 0,
                 sleep_ms: "Any" = None) -> None:
        self.path = path
        self.tmp = path + ".tmp"
        self.fs = fs if fs is not None else PosixFs()
        self.pause_ms = pause_ms
        self.sleep_ms = sleep_ms

    def _pause(self) -> None:
        if self.pause_ms and self.sleep_ms is not None:
            self.sleep_ms(self.pause_ms)

    def _decode(self, data: bytes) -> "Any":
        raise NotImplementedError

    def _read(self, path: str) -> "Any":
        try:
            f = self.fs.open(path, "rb")
            try:
                data = f.read(wire.MAX_LINE + 1)
            finally:
                f.close()
            return self._decode(data)
        except (OSError, ValueError, wire.WireError):  # missing, unreadable, torn, invalid
            return None

    def _load(self) -> "Any":
        """The committed record, else a complete temporary one, else None; never raises."""
        got = self._read(self.path)
        if got is None:
            got = self._read(self.tmp)
        return got

    def discard_tmp(self) -> None:
        """Remove a leftover temporary file (after loading, at boot)."""
        try:
            self.fs.remove(self.tmp)
        except OSError:
            pass

    def _commit(self, data: bytes) -> None:
        """Write ``data`` atomically; raises OSError when the file system fails."""
        self._write(self.tmp, self.path, data)

    def _write(self, tmp: str, path: str, data: bytes) -> None:
        fs = self.fs
        f = fs.open(tmp, "wb")
        try:
            if self.pause_ms:
                for i in range(0, len(data), 8):
                    f.write(data[i:i + 8])
                    f.flush()
                    self._pause()
            else:
                f.write(data)
            f.flush()
        finally:
            f.close()
        fs.sync()
        self._pause()
        try:
            fs.rename(tmp, path)
        except OSError:
            fs.remove(path)
            self._pause()
            fs.rename(tmp, path)
        fs.sync()


def counter_path(state_file: str) -> str:
    """The counter file beside ``state_file`` (same folder, ``ns_ctr.txt``)."""
    return state_file[:state_file.rfind("/") + 1] + "ns_ctr.txt"


class CounterStore(AtomicRecord):
    """The highest frame counter the replay guard may have accepted (0: none yet)."""

    def _decode(self, data: bytes) -> int:
        frame = wire.decode(data)
        if frame.verb != "EVT" or frame.fields.get("kind") != "ctr":
            raise ValueError("not a counter record")
        return wire.field_int(frame.fields, "last", 0, wire.CTR_MAX)

    def load(self) -> int:
        got = self._load()
        return 0 if got is None else got

    def save(self, last: int) -> None:
        self._commit(wire.encode(0, "EVT", (("kind", "ctr"), ("last", last))))


class StateStore(AtomicRecord):
    """Atomic save and checked load of the state file.

    Parameters: ``path`` (the state file), ``fs``, ``pause_ms`` and ``sleep_ms`` as for
    :class:`AtomicRecord`; ``bits``, the number of ladder bits (masks beyond them are
    invalid); ``has_open``, whether the board has an open relay.
    """

    def __init__(self, path: str, bits: int, has_open: bool, fs: "Any" = None,
                 pause_ms: int = 0, sleep_ms: "Any" = None) -> None:
        AtomicRecord.__init__(self, path, fs, pause_ms, sleep_ms)
        self.bits = bits
        self.has_open = has_open

    def _decode(self, data: bytes) -> "tuple[State, int]":
        return decode_state(data, self.bits, self.has_open)

    def load(self) -> "tuple[State | None, int]":
        """Return (state or None, boots so far) from the committed file, else from a
        complete temporary file; (None, 0) when neither is valid. Never raises."""
        got = self._load()
        if got is None:
            return None, 0
        return got[0], got[1]

    def save(self, state: State, boots: int) -> None:
        """Write the state atomically; raises OSError when the file system fails."""
        self._commit(encode_state(state, boots))

    # --- the ladder table written over the link (TLOAD) ---------------------------
    def save_table(self, masks: "Any", ohms: "Any") -> None:
        """Write a ladder table atomically to ``<path>.table``: a header line with the
        row count, then lines of up to 16 rows, each a checked protocol line."""
        lines = [wire.encode(0, "EVT", (("kind", "table"), ("rows", len(masks))))]
        for k in range(0, len(masks), 16):
            items = ["%d:%s" % (masks[i], wire.format_ohms(ohms[i]))
                     for i in range(k, min(len(masks), k + 16))]
            lines.append(wire.encode(0, "EVT", (("kind", "rows"), ("t", ",".join(items)))))
        self._write(self.path + ".table.tmp", self.path + ".table", b"".join(lines))

    def load_table(self, bits: int) -> "tuple[list, list] | None":
        """The table saved by :meth:`save_table` as (masks, ohms), or None when absent or
        damaged (any line failing its check, a wrong count, unsorted). Never raises."""
        for path in (self.path + ".table", self.path + ".table.tmp"):
            try:
                f = self.fs.open(path, "rb")
                try:
                    data = f.read()
                finally:
                    f.close()
                return decode_table(data, bits)
            except (OSError, ValueError, wire.WireError):
                continue
        return None
