"""Firmware App under CPython (in-process, fake pins, virtual clock): fast protocol checks.

The same firmware modules run under MicroPython in tests/test_sim_board.py. Sources of the
rules checked here are named beside each check.
"""

import json
import os
from pathlib import Path

import numpy as np
import pytest

from nullsteer.protocol import wire
from nullsteer.sim import InProcessBoard, load_firmware

EXAMPLE = Path(__file__).parents[1] / "examples" / "board-sim.json"
GOLDEN = json.loads((Path(__file__).parent / "golden" / "wire_vectors.json").read_text())
FW = load_firmware()


def config(**changes):
    cfg = json.loads(EXAMPLE.read_text())
    cfg.update(changes)
    return cfg


def req(board, seq, verb, *fields):
    reply = wire.decode_reply(board.handle_line(wire.encode(seq, verb, fields)))
    assert reply.seq == seq
    return reply


@pytest.fixture
def board(tmp_path):
    b = InProcessBoard(config(), tmp_path)
    b.boot()
    return b


def test_boot_event_and_info(board):
    info = req(board, 1, "INFO").fields
    assert info["proto"] == "1" and info["bits"] == "7" and info["table"] == "128"
    assert info["roles"] == "ladder,reverse,protect,open"
    st = req(board, 2, "STATUS").fields
    mask0 = dict((m, r) for m, r in json.loads(EXAMPLE.read_text())["ladder"]["table"])[0]
    assert (st["end"], st["mask"], st["open"], st["ohms"]) == ("A", "0", "0", "%.1f" % mask0)
    assert board.state() == ("A", 0, False)


BAD_SET = [  # (fields, code): protocol rules of firmware/PROTOCOL.md
    ((("end", "A"), ("mask", 128), ("open", 0)), "RANGE"),  # beyond 7 ladder bits
    ((("end", "C"), ("mask", 1), ("open", 0)), "RANGE"),
    ((("end", "A"), ("mask", 1)), "MISSING"),
    ((("mask", 1), ("open", 0)), "MISSING"),
    ((("end", "A"), ("mask", 1), ("open", 2)), "RANGE"),
    ((("end", "A"), ("mask", 1), ("ohms", "900"), ("open", 0)), "KEY"),
    ((("end", "A"), ("ohms", "150"), ("open", 0)), "RANGE"),  # < table's lowest / 2
    ((("end", "A"), ("ohms", "9000"), ("open", 0)), "RANGE"),  # > table's highest * 2
    ((("end", "A"), ("ohms", "nan"), ("open", 0)), "FORMAT"),  # not a finite decimal
    ((("end", "A"), ("mask", "1.5"), ("open", 0)), "FORMAT"),
]


@pytest.mark.parametrize("fields,code", BAD_SET)
def test_bad_set_is_refused_and_moves_nothing(board, fields, code):
    req(board, 1, "SET", ("end", "B"), ("mask", 9), ("open", 0))
    before = len(board.pin_log)
    reply = req(board, 7, "SET", *fields)
    assert reply.verb == "ERR" and reply.fields["code"] == code
    assert len(board.pin_log) == before
    assert board.state() == ("B", 9, False)


@pytest.mark.parametrize("case", GOLDEN["request_errors"], ids=lambda c: c["name"])
def test_malformed_frames_get_err_and_move_nothing(board, case):
    line = bytes.fromhex(case["line_hex"]) if "line_hex" in case else case["line"].encode()
    before = len(board.pin_log)
    reply = wire.decode_reply(board.handle_line(line))
    assert reply.verb == "ERR" and reply.fields["code"] == case["code"]
    assert reply.seq == case["seq"]
    assert len(board.pin_log) == before


def _times(events, name, energised):
    return [e.t_s for e in events if e.name == name and e.energised == energised]


def test_reversal_is_break_before_make(board):
    # Common practice (relay switching of receiver inputs): the receiver is protected
    # before the feed changes and reconnected only after the contacts have settled.
    req(board, 1, "SET", ("end", "A"), ("mask", 3), ("open", 0))
    start = len(board.events())
    req(board, 2, "SET", ("end", "B"), ("mask", 96), ("open", 0))
    ev = board.events()[start:]
    prot_on = _times(ev, "PROT", True)
    prot_off = _times(ev, "PROT", False)
    rev = _times(ev, "REV", True)
    ladder = [e.t_s for e in ev if e.name.startswith("L")]
    assert len(prot_on) == 1 and len(prot_off) == 1 and len(rev) == 1 and len(ladder) == 4
    assert prot_on[0] + 0.005 <= rev[0]  # PROT settle 5 ms before the swap
    assert rev[0] + 0.008 <= min(ladder)  # REV settle 8 ms
    assert max(ladder) + 0.005 <= prot_off[0]  # ladder settle before reconnecting
    assert [e.name for e in ev][0] == "PROT" and [e.name for e in ev][-1] == "PROT"
    assert board.state() == ("B", 96, False)


def test_ladder_change_without_protection_when_configured(tmp_path):
    b = InProcessBoard(config(protect_ladder=False), tmp_path)
    b.boot()
    start = len(b.events())
    req(b, 1, "SET", ("end", "A"), ("mask", 5), ("open", 1))
    names = {e.name for e in b.events()[start:]}
    assert names == {"L0", "L2", "OPEN"}
    start = len(b.events())
    req(b, 2, "SET", ("end", "B"), ("mask", 5), ("open", 1))  # a swap always protects
    assert [e.name for e in b.events()[start:]] == ["PROT", "REV", "PROT"]


def test_idempotent_set_switches_nothing(board):
    # Absolute "be in this state" commands (protocol principle: a retry is always safe).
    first = req(board, 1, "SET", ("end", "B"), ("mask", 77), ("open", 1))
    assert first.fields["changed"] == "1"
    state_file = board.state_dir / "ns_state.txt"
    mtime = state_file.stat().st_mtime_ns
    before = len(board.pin_log)
    again = req(board, 2, "SET", ("end", "B"), ("mask", 77), ("open", 1))
    assert again.fields["changed"] == "0"
    assert len(board.pin_log) == before
    assert state_file.stat().st_mtime_ns == mtime
    assert {k: again.fields[k] for k in ("end", "mask", "open")} == {
        "end": "B", "mask": "77", "open": "1"}


def test_ohms_picks_nearest_by_ratio_example_table(board):
    # Nearest by ratio = smallest |ln(R / R_k)|: resistor series are geometric
    # (IEC 60063), so closeness is a ratio. Reference: numpy argmin over the JSON table.
    table = json.loads(EXAMPLE.read_text())["ladder"]["table"]
    masks = np.array([m for m, _ in table])
    ohms = np.array([r for _, r in table])
    rng = np.random.default_rng(7)
    lo, hi = ohms.min() / 1.9, ohms.max() * 1.9  # requests within the accepted span (x2)
    for seq, r in enumerate(np.exp(rng.uniform(np.log(lo), np.log(hi), 60)), start=1):
        want = masks[np.argmin(np.abs(np.log(r / ohms)))]
        reply = req(board, seq, "SET", ("end", "A"), ("ohms", "%.3f" % r), ("open", 0))
        assert reply.fields["mask"] == str(want), r


def test_ohms_ratio_not_difference(tmp_path):
    # Between 100 and 400 ohm the ratio midpoint is 200 (geometric mean), the arithmetic
    # one 250: 220 ohm is nearer 400 by ratio (ln 400/220 = 0.60 < ln 220/100 = 0.79).
    cfg = config()
    cfg["ladder"] = {"table": [[0, 100.0], [3, 400.0]]}
    b = InProcessBoard(cfg, tmp_path)
    b.boot()
    assert req(b, 1, "SET", ("end", "A"), ("ohms", "220"), ("open", 0)).fields["mask"] == "3"
    assert req(b, 2, "SET", ("end", "A"), ("ohms", "195"), ("open", 0)).fields["mask"] == "0"


def test_ohms_without_table_is_state_error(tmp_path):
    cfg = config()
    del cfg["ladder"]
    b = InProcessBoard(cfg, tmp_path)
    b.boot()
    reply = req(b, 1, "SET", ("end", "A"), ("ohms", "900"), ("open", 0))
    assert reply.fields["code"] == "STATE"
    assert "ohms" not in req(b, 2, "STATUS").fields
    assert req(b, 3, "TABLE").fields["code"] == "STATE"
    assert req(b, 4, "SET", ("end", "A"), ("mask", 3), ("open", 0)).verb == "OK"


def test_table_chunks_rebuild_the_table(board):
    table = json.loads(EXAMPLE.read_text())["ladder"]["table"]
    got = []
    seq = 1
    while len(got) < len(table):
        reply = req(board, seq, "TABLE", ("start", len(got)), ("count", 16))
        n = int(reply.fields["n"])
        assert 1 <= n <= 16 and int(reply.fields["start"]) == len(got)
        got += [(int(a), float(b)) for a, b in
                (item.split(":") for item in reply.fields["t"].split(","))]
        seq += 1
    assert got == [(m, round(r, 1)) for m, r in table]
    assert req(board, seq, "TABLE", ("start", 128)).fields["code"] == "RANGE"


def test_self_test_steps_every_relay_under_protection(board):
    req(board, 1, "SET", ("end", "B"), ("mask", 6), ("open", 0))
    start = len(board.events())
    reply = req(board, 2, "TEST", ("dwell_ms", 20))
    assert reply.fields["relays"] == "9"
    ev = board.events()[start:]
    assert ev[0].name == "PROT" and ev[0].energised
    assert ev[-1].name == "PROT" and not ev[-1].energised
    inner = ev[1:-1]
    for name in ("L0", "L1", "L2", "L3", "L4", "L5", "L6", "REV", "OPEN"):
        steps = [e for e in inner if e.name == name]
        assert len(steps) == 2 and steps[0].energised != steps[1].energised, name
        assert steps[1].t_s - steps[0].t_s >= 0.020 - 1e-9
    assert board.state() == ("B", 6, False)
    assert int(reply.fields["ms"]) >= 9 * 2 * 20


class PowerCut(BaseException):
    """Not an Exception: nothing in the firmware may catch it (the power is gone)."""


class CuttingFs:
    """Real files, but the power fails at file-system operation number ``cut_at``; a
    write cut mid-way leaves the first half of its bytes on disk. ``no_replace`` makes
    rename refuse an existing target (as some FAT drivers do)."""

    def __init__(self, no_replace=False):
        self.ops = 0
        self.cut_at = None
        self.no_replace = no_replace

    def tick(self, partial=None):
        self.ops += 1
        if self.cut_at is not None and self.ops >= self.cut_at:
            if partial is not None:
                partial()
            raise PowerCut()

    def open(self, path, mode):
        self.tick()
        return _CutFile(self, open(path, mode))

    def rename(self, old, new):
        self.tick()
        if self.no_replace and os.path.exists(new):
            raise OSError(17, "exists")
        os.rename(old, new)

    def remove(self, path):
        self.tick()
        os.remove(path)

    def sync(self):
        self.tick()


class _CutFile:
    def __init__(self, fs, f):
        self.fs, self.f = fs, f

    def write(self, data):
        self.fs.tick(lambda: (self.f.write(data[:len(data) // 2]), self.f.flush()))
        return self.f.write(data)

    def read(self, n):
        self.fs.tick()
        return self.f.read(n)

    def flush(self):
        self.fs.tick()
        self.f.flush()

    def close(self):
        self.fs.tick()
        self.f.close()


@pytest.mark.parametrize("no_replace", [False, True])
def test_power_cut_at_every_step_of_a_state_write(tmp_path, no_replace):
    # POSIX.1-2017 rename(): replacing an existing file is atomic, so a reader sees the
    # old or the new file, never a mix. The cut is tried at every file operation of a
    # save; each time a fresh boot must restore the old or the new state, never garbage.
    first = InProcessBoard(config(), tmp_path)
    first.boot()
    req(first, 1, "SET", ("end", "A"), ("mask", 5), ("open", 0))
    old, new = ("A", 5, False), ("B", 100, True)
    seen = set()
    k = 1
    while True:
        fs = CuttingFs(no_replace)
        b = InProcessBoard(config(), tmp_path, fs=fs)
        b.boot()
        assert b.state() == old
        fs.cut_at = fs.ops + k
        try:
            req(b, 2, "SET", ("end", "B"), ("mask", 100), ("open", 1))
            completed = True
        except PowerCut:
            completed = False
        after = InProcessBoard(config(), tmp_path)
        event = wire.decode_reply(after.boot()).fields
        assert event["restored"] == "1"
        assert after.state() in (old, new)
        seen.add(after.state())
        if after.state() == new:  # put the old state back for the next cut point
            req(after, 3, "SET", ("end", "A"), ("mask", 5), ("open", 0))
        if completed:
            break
        k += 1
    assert k >= 6  # the save has several steps, each one was cut
    assert seen == {old, new}


@pytest.mark.parametrize("content", [
    b"", b"garbage\n", b"NS1 0 EVT kind=state end=B mask=5 open=0 boots=3 *0000\n",
    wire.encode(0, "EVT", (("kind", "state"), ("end", "B"), ("mask", 900), ("open", 0),
                           ("boots", 2))),  # mask beyond the ladder
    wire.encode(0, "EVT", (("kind", "state"), ("end", "B"), ("mask", 5), ("open", 0),
                           ("boots", 2)))[:30],  # torn
    bytes(range(256)),
])
def test_bad_state_file_boots_to_safe_state(tmp_path, content):
    (tmp_path / "ns_state.txt").write_bytes(content)
    cfg = config(safe_state={"end": "A", "mask": 3, "open": True})
    b = InProcessBoard(cfg, tmp_path)
    event = wire.decode_reply(b.boot()).fields
    assert event["restored"] == "0" and event["boots"] == "1"
    assert b.state() == ("A", 3, True)


def test_boot_policy_safe_and_boot_count(tmp_path):
    b = InProcessBoard(config(), tmp_path)
    b.boot()
    req(b, 1, "SET", ("end", "B"), ("mask", 64), ("open", 0))
    b2 = InProcessBoard(config(), tmp_path)
    ev = wire.decode_reply(b2.boot()).fields
    assert (ev["restored"], ev["boots"]) == ("1", "2") and b2.state() == ("B", 64, False)
    b3 = InProcessBoard(config(boot="safe"), tmp_path)
    ev = wire.decode_reply(b3.boot()).fields
    assert (ev["restored"], ev["boots"]) == ("0", "3") and b3.state() == ("A", 0, False)


def test_line_assembler_limits_and_splits():
    asm = FW.link_serial.LineAssembler()
    ping = wire.encode(1, "PING")
    assert asm.feed(ping[:5]) == [] and asm.feed(ping[5:]) == [ping]
    assert asm.feed(b"\r\n\n") == []
    crlf = ping[:-1] + b"\r\n"
    assert asm.feed(crlf) == [crlf]
    lines = asm.feed(b"x" * 2000 + b"\n" + ping)
    assert len(lines) == 2 and len(lines[0]) == wire.MAX_LINE + 1 and lines[1] == ping
    with pytest.raises(wire.WireError) as info:
        wire.decode_request(lines[0])
    assert info.value.code == "SIZE"
    edge = b"a" * (wire.MAX_LINE - 1) + b"\n"  # exactly MAX_LINE bytes: kept whole
    assert asm.feed(edge) == [edge]


@pytest.mark.parametrize("change,key", [
    ({"colour": 1}, "colour"),
    ({"boot": "maybe"}, "boot"),
    ({"watchdog_ms": 100}, "watchdog_ms"),
    ({"safe_state": {"end": "A", "mask": 128, "open": False}}, "safe_state.mask"),
    ({"ladder": {"table": [[0, 500.0], [1, 400.0]]}}, "ladder.table[1]"),
    ({"ladder": {"table": [[200, 500.0]]}}, "ladder.table[0]"),
])
def test_board_config_errors_name_the_key(change, key):
    with pytest.raises(FW.boardcfg.BoardConfigError) as info:
        FW.boardcfg.parse_board(config(**change))
    assert info.value.key == key


def test_board_config_relay_errors():
    cfg = config()
    cfg["relays"][3]["pin"] = 2
    with pytest.raises(FW.boardcfg.BoardConfigError) as info:
        FW.boardcfg.parse_board(cfg)
    assert info.value.key == "relays[3].pin"
    cfg = config()
    del cfg["relays"][2]  # ladder bit 2 missing
    with pytest.raises(FW.boardcfg.BoardConfigError, match="2 is missing"):
        FW.boardcfg.parse_board(cfg)
    cfg = config()
    cfg["relays"] = [r for r in cfg["relays"] if r["role"] != "protect"]
    with pytest.raises(FW.boardcfg.BoardConfigError, match="protect"):
        FW.boardcfg.parse_board(cfg)


def test_table_load_is_staged_checked_and_atomic(tmp_path):
    # PROTOCOL.md, TLOAD: chunks in order; the new table is in use only after the last
    # one; a bad or out-of-order chunk is refused and the old table stays.
    b = InProcessBoard(config(), tmp_path)
    b.boot()
    old = req(b, 1, "TABLE", ("start", 0), ("count", 2)).fields["t"]
    assert req(b, 2, "TLOAD", ("start", 0), ("rows", 3), ("t", "5:410.2,1:455.0")).fields == {
        "staged": "2", "rows": "3"}
    assert req(b, 3, "TABLE", ("start", 0), ("count", 2)).fields["t"] == old   # not yet
    bad = req(b, 4, "TLOAD", ("start", 1), ("rows", 3), ("t", "3:498.7"))
    assert bad.verb == "ERR" and bad.fields["code"] == "RANGE"                 # wrong start
    assert req(b, 5, "TLOAD", ("start", 0), ("rows", 2), ("t", "5:500.0,1:400.0")).fields[
        "code"] == "RANGE"                                                     # not sorted
    assert req(b, 6, "TLOAD", ("start", 0), ("rows", 2), ("t", "5:400.0,5:500.0")).fields[
        "code"] == "RANGE"                                                     # mask twice
    assert req(b, 7, "TLOAD", ("start", 0), ("rows", 2), ("t", "200:400.0,5:500.0")).fields[
        "code"] == "RANGE"                                                     # beyond 7 bits
    assert req(b, 8, "INFO").fields["table"] == "128"
    req(b, 9, "TLOAD", ("start", 0), ("rows", 3), ("t", "5:410.2,1:455.0"))
    assert req(b, 10, "TLOAD", ("start", 2), ("rows", 3), ("t", "3:498.7")).fields["done"] == "1"
    assert req(b, 11, "INFO").fields["table"] == "3"
    assert req(b, 12, "SET", ("end", "A"), ("ohms", "460"), ("open", 0)).fields["mask"] == "1"
    b2 = InProcessBoard(config(), tmp_path)                    # power cut and reboot
    b2.boot()
    assert req(b2, 1, "TABLE").fields["t"] == "5:410.2,1:455.0,3:498.7"


def _short_config():
    cfg = config()
    relays = cfg["relays"] + [{"name": "SHORT", "role": "short", "pin": 12, "settle_ms": 6}]
    cfg["relays"] = relays
    return cfg


def test_short_state_exclusive_and_break_before_make(tmp_path):
    # PROTOCOL.md, SET short=1: the termination shorted (closed loop). Open and short are
    # mutually exclusive; going open -> short releases OPEN and lets it settle before
    # SHORT closes (break before make, common practice for relay changeovers).
    b = InProcessBoard(_short_config(), tmp_path)
    b.boot()
    assert req(b, 1, "INFO").fields["roles"] == "ladder,reverse,protect,open,short"
    assert req(b, 2, "STATUS").fields["short"] == "0"
    bad = req(b, 3, "SET", ("end", "A"), ("mask", 0), ("open", 1), ("short", 1))
    assert bad.verb == "ERR" and bad.fields["code"] == "RANGE"
    req(b, 4, "SET", ("end", "A"), ("mask", 0), ("open", 1))
    start = len(b.events())
    ok = req(b, 5, "SET", ("end", "A"), ("mask", 0), ("open", 0), ("short", 1)).fields
    assert (ok["open"], ok["short"], ok["changed"]) == ("0", "1", "1")
    ev = b.events()[start:]
    open_off = _times(ev, "OPEN", False)
    short_on = _times(ev, "SHORT", True)
    assert len(open_off) == 1 and len(short_on) == 1
    assert open_off[0] + 0.005 <= short_on[0]          # OPEN's settle time first
    assert req(b, 6, "SET", ("end", "A"), ("mask", 3), ("open", 0)).fields["short"] == "0"
    req(b, 7, "SET", ("end", "B"), ("mask", 0), ("open", 0), ("short", 1))
    b2 = InProcessBoard(_short_config(), tmp_path)     # the shorted state survives a reboot
    b2.boot()
    assert req(b2, 1, "STATUS").fields["short"] == "1"


def test_short_refused_without_a_short_relay(board):
    reply = req(board, 1, "SET", ("end", "A"), ("mask", 0), ("open", 0), ("short", 1))
    assert reply.verb == "ERR" and reply.fields["code"] == "RANGE"
    assert "short" not in req(board, 2, "STATUS").fields
