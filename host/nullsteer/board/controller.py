"""Talking to one board: requests with sequence numbers, timeouts, retries, typed replies.

Commands are absolute ("be in this state"), so a retry after a lost reply is always
safe; "flip" is computed here from the board's reported state. A request is sent again,
with a fresh sequence number (and a fresh frame counter when signed), after a timeout or
when the board says the line arrived damaged (``ERR CRC``/``FORMAT``/``SIZE``: noise, or
a lost newline that merged two lines). A ``REPLAY`` reply signed by the board moves the
host's frame counter past the board's and the request is sent once more.
"""

from __future__ import annotations

import logging
import time
from collections.abc import Iterable
from dataclasses import dataclass

from nullsteer.protocol import wire
from nullsteer.station.bearing import FedEnd
from nullsteer.errors import BoardError, ConfigError, LinkError

__all__ = ["BoardInfo", "BoardState", "BoardStatus", "Controller", "FedEnd"]
from nullsteer.board.counter import FrameCounter
from nullsteer.board.links import Link

#: ERR codes meaning "the line arrived damaged": the request is sent again
RETRY_CODES = frozenset({wire.E_CRC, wire.E_FORMAT, wire.E_SIZE})

log = logging.getLogger(__name__)


@dataclass(frozen=True)
class BoardState:
    """The board's relay state as it reports it."""

    fed_end: FedEnd
    mask: int
    open: bool
    ohms: float | None = None
    short: bool = False

    def to_json(self) -> dict[str, object]:
        return {"fed_end": self.fed_end.value, "mask": self.mask, "open": self.open,
                "short": self.short, "ohms": self.ohms}


@dataclass(frozen=True)
class BoardStatus:
    """STATUS reply: state plus housekeeping."""

    state: BoardState
    firmware: str
    boots: int
    uptime_s: int
    heap_bytes: int
    changed: bool | None = None

    def to_json(self) -> dict[str, object]:
        out = self.state.to_json()
        out.update(firmware=self.firmware, boots=self.boots, uptime_s=self.uptime_s,
                   heap_bytes=self.heap_bytes)
        if self.changed is not None:
            out["changed"] = self.changed
        return out


@dataclass(frozen=True)
class BoardInfo:
    """INFO reply."""

    firmware: str
    protocol: int
    board: str
    bits: int
    roles: tuple[str, ...]
    table_entries: int

    @property
    def max_mask(self) -> int:
        return (1 << self.bits) - 1

    def to_json(self) -> dict[str, object]:
        return {"firmware": self.firmware, "protocol": self.protocol, "board": self.board,
                "bits": self.bits, "roles": list(self.roles),
                "table_entries": self.table_entries}


def _int(fields: dict[str, str], key: str, default: int = 0) -> int:
    try:
        return wire.parse_int(fields.get(key, str(default)))
    except ValueError:
        raise LinkError(f"board sent a bad {key}={fields.get(key)!r}") from None


def state_from_fields(fields: dict[str, str]) -> BoardState:
    """A :class:`BoardState` from the fields of an OK reply to STATUS or SET."""
    try:
        ohms = wire.parse_decimal(fields["ohms"]) if "ohms" in fields else None
        return BoardState(FedEnd(fields["end"]), wire.parse_uint(fields["mask"]),
                          fields["open"] == "1", ohms, fields.get("short") == "1")
    except (KeyError, ValueError) as exc:
        raise LinkError(f"board reply lacks a valid state field ({exc})") from None


def status_from_fields(fields: dict[str, str]) -> BoardStatus:
    changed = fields.get("changed")
    return BoardStatus(state=state_from_fields(fields), firmware=fields.get("fw", "?"),
                       boots=_int(fields, "boots"), uptime_s=_int(fields, "up_s"),
                       heap_bytes=_int(fields, "heap"),
                       changed=None if changed is None else changed == "1")


class Controller:
    """One board behind one link.

    Parameters
    ----------
    link : Link
        The transport (see :func:`nullsteer.board.links.open_link`).
    timeout_s : float
        How long to wait for each reply, seconds.
    retries : int
        Extra attempts after a timeout or a damaged line (safe: every command is absolute).
    key : bytes or None
        Shared key for signed frames (HMAC-SHA256), or None for unsigned frames.
    counter : FrameCounter or None
        The frame counter of signed frames (default: the host's file for ``key``, see
        :mod:`nullsteer.board.counter`).
    """

    def __init__(self, link: Link, timeout_s: float = 1.0, retries: int = 2,
                 key: bytes | None = None, counter: FrameCounter | None = None) -> None:
        self.link = link
        self.timeout_s = timeout_s
        self.retries = retries
        self.key = key
        self.counter = counter if counter is not None or key is None \
            else FrameCounter.for_key(key)
        self.resyncs = 0
        self._seq = int(time.monotonic() * 1000) % wire.SEQ_MAX + 1
        self._info: BoardInfo | None = None
        self._table: list[tuple[int, float]] | None = None

    # -- plumbing ---------------------------------------------------------------
    def _next_seq(self) -> int:
        self._seq = self._seq % wire.SEQ_MAX + 1
        return self._seq

    def _frame(self, seq: int, verb: str, fields: Iterable[tuple[str, object]]) -> bytes:
        if self.key is None or self.counter is None:
            return wire.encode(seq, verb, tuple(fields))
        return wire.sign(seq, verb, tuple(fields), self.key, self.counter.next())

    def _board_counter(self, raw: bytes) -> int | None:
        """The board's last accepted counter from a REPLAY reply it signed, else None."""
        if self.key is None:
            return None
        try:
            return wire.verify(raw, self.key)
        except wire.WireError:
            return None

    def request(self, verb: str, fields: Iterable[tuple[str, object]] = ()) -> dict[str, str]:
        """Send one request and return the fields of its OK reply.

        Raises :class:`BoardError` on an ERR reply other than a damaged line, and
        :class:`LinkError` when no valid reply arrives after all attempts.
        """
        fields = tuple(fields)
        sent: list[int] = []
        attempt = 0
        resynced = False
        damaged = ""
        while attempt <= self.retries:
            seq = self._next_seq()
            sent.append(seq)
            line = self._frame(seq, verb, fields)
            log.debug("-> %s", line)
            self.link.write_line(line)
            got = self._await(seq, sent)
            attempt += 1
            if got is None:
                log.info("%s: no reply to %s (attempt %d)", self.link.url, verb, attempt)
                continue
            reply, raw = got
            if reply.verb != "ERR":
                return reply.fields
            code = reply.fields.get("code", "?")
            if code in RETRY_CODES:
                damaged = code
                log.info("%s: %s arrived damaged (ERR %s, attempt %d)", self.link.url, verb,
                         code, attempt)
                continue
            board_ctr = self._board_counter(raw) if code == wire.E_REPLAY else None
            if board_ctr is not None and not resynced and self.counter is not None:
                resynced = True  # one catch-up per request; it is not a failed attempt
                attempt -= 1
                self.resyncs += 1
                self.counter.advance_past(board_ctr)
                log.info("%s: frame counter behind the board's (%d): catching up",
                         self.link.url, board_ctr)
                continue
            raise BoardError(code, reply.fields.get("msg", "").replace("_", " "))
        why = f"the board kept reporting damaged lines (ERR {damaged})" if damaged else \
            f"no reply to {verb}"
        raise LinkError(f"{self.link.url}: {why} after {self.retries + 1} attempts of "
                        f"{self.timeout_s:g} s")

    def _await(self, seq: int, sent: list[int]) -> tuple[wire.Frame, bytes] | None:
        """The reply to ``seq`` or, unless it only reports a damaged line, to an earlier
        attempt of the same request (the board answered it late); None on timeout."""
        deadline = time.monotonic() + self.timeout_s
        while (remaining := deadline - time.monotonic()) > 0:
            raw = self.link.read_line(remaining)
            if raw is None:
                return None
            try:
                frame = wire.decode_reply(raw)
            except wire.WireError as exc:
                log.info("%s: dropped a bad line (%s)", self.link.url, exc)
                continue
            if frame.seq == seq:
                return frame, raw
            if frame.seq in sent and not (frame.verb == "ERR" and
                                          frame.fields.get("code") in RETRY_CODES):
                return frame, raw
            log.debug("%s: ignored %s seq %d", self.link.url, frame.verb, frame.seq)
        return None

    # -- commands ---------------------------------------------------------------
    def ping(self) -> None:
        self.request("PING")

    def info(self, refresh: bool = False) -> BoardInfo:
        if self._info is None or refresh:
            f = self.request("INFO")
            roles = tuple(r for r in f.get("roles", "").split(",") if r)
            self._info = BoardInfo(firmware=f.get("fw", "?"), protocol=_int(f, "proto"),
                                   board=f.get("board", "?"), bits=_int(f, "bits"),
                                   roles=roles, table_entries=_int(f, "table"))
        return self._info

    def firmware_mismatch(self) -> str | None:
        """One line of warning when the board's firmware is not the one this host ships
        (different major or minor version), else None."""
        from nullsteer.board.bundle import check_firmware_version, firmware_version

        return check_firmware_version(self.info().firmware, firmware_version())

    def status(self) -> BoardStatus:
        return status_from_fields(self.request("STATUS"))

    def table(self) -> list[tuple[int, float]]:
        """The board's ladder table, (mask, ohms) sorted by ohms; empty if none loaded."""
        if self._table is None:
            total = self.info().table_entries
            rows: list[tuple[int, float]] = []
            while len(rows) < total:
                f = self.request("TABLE", (("start", len(rows)), ("count", 16)))
                chunk = [item for item in f.get("t", "").split(",") if item]
                if not chunk:
                    raise LinkError("board sent an empty TABLE chunk")
                for item in chunk:
                    mask, _, ohms = item.partition(":")
                    try:
                        rows.append((wire.parse_uint(mask), wire.parse_decimal(ohms)))
                    except ValueError:
                        raise LinkError(f"board sent a bad TABLE row {item!r}") from None
            self._table = rows
        return self._table

    def load_table(self, rows: list[tuple[int, float]]) -> None:
        """Write a new ladder table to the board (TLOAD, chunks within the line limit).

        ``rows`` are (mask, ohms) sorted by ohms. The board stages the chunks and puts
        the table in use, saved atomically, only with the last one; signed like every
        frame when the controller has a key."""
        items = ["%d:%s" % (m, wire.format_ohms(r)) for m, r in rows]
        k = 0
        while k < len(items):
            chunk: list[str] = []
            while k < len(items) and len(",".join(chunk + [items[k]])) <= wire.MAX_VALUE:
                chunk.append(items[k])
                k += 1
            self.request("TLOAD", (("start", k - len(chunk)), ("rows", len(items)),
                                   ("t", ",".join(chunk))))
        self._table = None
        self._info = None

    def set_state(self, fed_end: FedEnd, mask: int, open_: bool,
                  short: bool = False) -> BoardStatus:
        """Be in this state. The mask is checked against the board's bits before sending;
        ``short`` (termination shorted) needs a board with a ``short`` relay and is sent
        only when set (its absence means not shorted)."""
        info = self.info()
        if not 0 <= mask <= info.max_mask:
            raise ConfigError("--mask", f"{mask} is outside 0..{info.max_mask} "
                                        f"for this board's {info.bits} ladder relays")
        if short and "short" not in info.roles:
            raise ConfigError("--short", "this board has no relay of role short")
        fields: list[tuple[str, object]] = [("end", fed_end.value), ("mask", mask), ("open", open_)]
        if short:
            fields.append(("short", 1))
        return self._after_set(self.request("SET", fields))

    def _after_set(self, fields: dict[str, str]) -> BoardStatus:
        # SET replies carry the state; fetch housekeeping with it for a full status.
        state = state_from_fields(fields)
        status = self.status()
        changed = fields.get("changed")
        return BoardStatus(state=state, firmware=status.firmware, boots=status.boots,
                           uptime_s=status.uptime_s, heap_bytes=status.heap_bytes,
                           changed=None if changed is None else changed == "1")

    def flip(self) -> BoardStatus:
        """Swap fed and terminated ends, keeping the termination."""
        now = self.status().state
        return self.set_state(now.fed_end.other, now.mask, now.open, now.short)

    def self_test(self, dwell_ms: int = 50) -> dict[str, str]:
        """Run the board's relay self-test (receiver protected throughout)."""
        info = self.info()
        relays = max(len(info.roles), info.bits + 3)
        old = self.timeout_s
        # each relay is stepped on and off, dwelling each time; 150 ms per step more
        # covers settle times and latching-relay pulses
        self.timeout_s = old + relays * 2 * (dwell_ms + 150) / 1000.0
        try:
            return self.request("TEST", (("dwell_ms", dwell_ms),))
        finally:
            self.timeout_s = old

    def close(self) -> None:
        self.link.close()

    def __enter__(self) -> Controller:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()
