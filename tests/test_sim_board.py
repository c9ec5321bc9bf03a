"""The firmware under the real MicroPython unix port, through a pseudo-terminal.

A raw pyserial client talks to SimBoard.url; relay behaviour is read back from the fake
machine's pin log (real monotonic times). Rules and their sources are named beside each
check.
"""

import json
import time
from pathlib import Path

import pytest
import serial

from nullsteer.protocol import wire
from nullsteer.errors import ConfigError
from nullsteer.sim import SimBoard

EXAMPLE = Path(__file__).parents[1] / "examples" / "board-sim.json"


def config(**changes):
    cfg = json.loads(EXAMPLE.read_text())
    cfg.update(changes)
    return cfg


class Client:
    """Minimal raw serial client: send a frame, return the reply with the same seq."""

    def __init__(self, url):
        path = url[len("serial://"):].split("?")[0]
        self.port = serial.Serial(path, 115200, timeout=3.0)
        self.seq = 0

    def raw(self, line):
        self.port.write(line)
        while True:
            got = self.port.readline()
            assert got.endswith(b"\n"), "no reply within the timeout"
            frame = wire.decode_reply(got)
            if frame.seq != 0 or frame.verb == "ERR":
                return frame

    def req(self, verb, *fields):
        self.seq += 1
        reply = self.raw(wire.encode(self.seq, verb, fields))
        assert reply.seq == self.seq
        return reply

    def close(self):
        self.port.close()


@pytest.fixture(scope="module")
def sim():
    with SimBoard(config()) as board:
        client = Client(board.url)
        yield board, client
        client.close()


def test_end_to_end_info_status_set(sim):
    board, c = sim
    assert board.boot_events()[0].fields["fw"] == "0.1.0"
    assert c.req("PING").verb == "OK"
    info = c.req("INFO").fields
    assert info["board"] == "heronmoor-flag-ne" and info["bits"] == "7"
    reply = c.req("SET", ("end", "B"), ("ohms", "900"), ("open", 0))
    assert reply.fields["changed"] == "1" and reply.fields["end"] == "B"
    assert board.state() == ("B", int(reply.fields["mask"]), False)
    st = c.req("STATUS").fields
    assert st["mask"] == reply.fields["mask"] and int(st["heap"]) > 0


@pytest.mark.parametrize("line,code", [
    (wire.encode(50, "SET", (("end", "A"), ("mask", 1), ("open", 0)))[:-5] + b"0000\n",
     "CRC"),
    (b"NS1 51 SET end=A mask=1\n", "FORMAT"),  # truncated: no check value
    (wire.encode(52, "SET", (("foo", 1),)), "KEY"),
    (wire.encode(53, "SET", (("end", "A"), ("mask", 128), ("open", 0))), "RANGE"),
    (b"NS2 54 PING *" + b"%04X" % wire.crc16_ccitt_false(b"NS2 54 PING") + b"\n",
     "VERSION"),
    (b"NS1 55 SET end=A mask=1 open=0 " + b"y" * 700 + b" *0000\n", "SIZE"),
])
def test_bad_frames_get_err_and_move_no_relay(sim, line, code):
    # Protocol rule (firmware/PROTOCOL.md): every failure is an ERR reply, and a frame
    # that fails any check moves no relay.
    board, c = sim
    c.req("SET", ("end", "A"), ("mask", 17), ("open", 0))
    before = len(board.events())
    reply = c.raw(line)
    assert reply.verb == "ERR" and reply.fields["code"] == code
    assert c.req("PING").verb == "OK"  # the link is still in step
    assert len(board.events()) == before
    assert board.state() == ("A", 17, False)


def test_reversal_break_before_make_real_timing(sim):
    # Common practice: protect the receiver, swap, let the contacts settle, reconnect.
    board, c = sim
    c.req("SET", ("end", "A"), ("mask", 2), ("open", 0))
    start = len(board.events())
    c.req("SET", ("end", "B"), ("mask", 4), ("open", 0))
    ev = board.events()[start:]
    names = [(e.name, e.energised) for e in ev]
    assert names[0] == ("PROT", True) and names[-1] == ("PROT", False)
    rev = [e for e in ev if e.name == "REV"]
    assert len(rev) == 1 and rev[0].energised
    assert rev[0].t_s - ev[0].t_s >= 0.005  # PROT settle_ms = 5
    assert ev[-1].t_s - rev[0].t_s >= 0.008 + 0.005  # REV then ladder settle
    assert board.state() == ("B", 4, False)


def test_idempotent_set_moves_nothing(sim):
    board, c = sim
    c.req("SET", ("end", "B"), ("mask", 99), ("open", 1))
    before = len(board.events())
    reply = c.req("SET", ("end", "B"), ("mask", 99), ("open", 1))
    assert reply.fields["changed"] == "0"
    assert len(board.events()) == before


def test_ohms_nearest_by_ratio_under_micropython(sim):
    # Nearest by ratio (smallest |ln R/R_k|); the table is the JSON one (float32 on the
    # board, which changes no choice here: no query sits within 1e-6 of a midpoint).
    board, c = sim
    import math
    table = json.loads(EXAMPLE.read_text())["ladder"]["table"]
    lo, hi = min(t[1] for t in table), max(t[1] for t in table)
    for r in (lo / 1.9, lo * 1.01, (lo * hi) ** 0.5, hi * 0.97, hi * 1.5):
        want = min(table, key=lambda t: abs(math.log(r / t[1])))[0]
        assert c.req("SET", ("end", "A"), ("ohms", "%.1f" % r), ("open", 0)).fields[
            "mask"] == str(want)


def test_restart_restores_state_and_counts_boots(sim):
    board, c = sim
    c.req("SET", ("end", "B"), ("mask", 33), ("open", 0))
    boots = int(board.boot_events()[-1].fields["boots"])
    board.restart()
    ev = board.boot_events()[-1].fields
    assert ev["restored"] == "1" and int(ev["boots"]) == boots + 1
    assert board.state() == ("B", 33, False)
    assert c.req("STATUS").fields["mask"] == "33"


def test_boot_policy_safe_under_micropython(tmp_path):
    with SimBoard(config(), state_dir=tmp_path) as board:
        c = Client(board.url)
        c.req("SET", ("end", "B"), ("mask", 77), ("open", 1))
        c.close()
    with SimBoard(config(boot="safe", safe_state={"end": "A", "mask": 1, "open": False}),
                  state_dir=tmp_path) as board:
        assert board.boot_events()[-1].fields["restored"] == "0"
        assert board.state() == ("A", 1, False)


def test_corrupt_state_file_boots_safe_under_micropython(tmp_path):
    (tmp_path / "ns_state.txt").write_bytes(b"NS1 0 EVT kind=state end=B mask=3\x00\xff")
    with SimBoard(config(), state_dir=tmp_path) as board:
        assert board.boot_events()[-1].fields["restored"] == "0"
        assert board.state() == ("A", 0, False)


@pytest.mark.slow
def test_power_cut_during_state_write_always_boots_valid(tmp_path):
    # POSIX.1-2017 rename() is atomic: the board must come back in the old or the new
    # state whatever instant the power fails. The board writes its state file in 8-byte
    # pieces 3 ms apart (test_write_pause_ms), and SIGKILL falls at a spread of instants
    # across the switching and the write.
    old, new = ("A", 5, False), ("B", 100, True)
    seen = set()
    torn = 0
    with SimBoard(config(test_write_pause_ms=3), state_dir=tmp_path) as board:
        c = Client(board.url)
        c.req("SET", ("end", "A"), ("mask", 5), ("open", 0))
        for k in range(24):
            line = wire.encode(900 + k, "SET", (("end", "B"), ("mask", 100), ("open", 1)))
            c.port.write(line)
            time.sleep(0.004 * k)
            board.kill()
            if (tmp_path / "ns_state.txt.tmp").exists():
                torn += 1
            board.start()
            c.port.reset_input_buffer()
            got = board.state()
            assert got in (old, new), (k, got)
            st = c.req("STATUS").fields
            assert (st["end"], int(st["mask"]), st["open"] == "1") == got
            seen.add(got)
            if got == new:
                c.req("SET", ("end", "A"), ("mask", 5), ("open", 0))
        c.close()
    assert seen == {old, new}
    assert torn >= 1  # at least one kill landed inside a write (timing varies with load)


def test_bad_board_config_is_a_config_error():
    cfg = config()
    cfg["relays"][0]["role"] = "heater"
    with pytest.raises(ConfigError, match=r"relays\[0\]\.role"):
        SimBoard(cfg)
