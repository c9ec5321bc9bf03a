"""The codec is exactly as strict as firmware/PROTOCOL.md says, and numbers are finite.

Sources: the frame grammar of firmware/PROTOCOL.md and wire.py's docstring (four
upper-case hex check digits, decimal numbers without padding or digit separators, marker
``NS1``); IEEE 754 binary32 (a table stored as 32-bit floats) read with numpy, an
independent implementation used only here; CRC recomputed with CPython's binascii.crc_hqx
(CRC-16/CCITT-FALSE with init 0xFFFF, CPython library documentation).
"""

from __future__ import annotations

import binascii
import json
from pathlib import Path

import numpy as np
import pytest

from nullsteer.board.controller import Controller, state_from_fields
from nullsteer.board.links import open_link
from nullsteer.errors import BoardError, LinkError
from nullsteer.protocol import wire

ROOT = Path(__file__).resolve().parents[1]


def sealed(body: str, fmt: str = "%04X") -> bytes:
    """``body`` with a correct check value written in ``fmt`` (independent CRC)."""
    return (body + " *" + fmt % binascii.crc_hqx(body.encode(), 0xFFFF) + "\n").encode()


def body_with_crc(pred) -> str:
    for seq in range(1, 5000):
        body = "NS1 %d PING" % seq
        if pred(binascii.crc_hqx(body.encode(), 0xFFFF)):
            return body
    raise AssertionError("no body found")


def test_lower_case_check_digits_are_refused():
    body = body_with_crc(lambda c: any(ch in "ABCDEF" for ch in "%04X" % c))
    assert wire.decode_request(sealed(body)).verb == "PING"
    with pytest.raises(wire.WireError) as err:
        wire.decode_request(sealed(body, "%04x"))
    assert err.value.code == wire.E_FORMAT


@pytest.mark.parametrize("fmt", ["%4X", "%-4X", "%+04X"])
def test_padded_check_digits_are_refused(fmt):
    body = body_with_crc(lambda c: c < 0x1000)  # three significant digits
    text = (fmt % binascii.crc_hqx(body.encode(), 0xFFFF))[:4]
    line = (body + " *" + text + "\n").encode()
    with pytest.raises(wire.WireError) as err:
        wire.decode_request(line)
    assert err.value.code == wire.E_FORMAT


@pytest.mark.parametrize("body", [
    "NS1 5 SET end=A mask=0x1_0 open=0",   # digit separator in hex
    "NS1 5 SET end=A mask=1_0 open=0",     # digit separator in decimal
    "NS1 5 SET end=A mask=007 open=0",     # zero padding
    "NS1 5 SET end=A mask=+7 open=0",      # sign
    "NS1 5 SET end=A mask=0x open=0",      # no hex digits
    "NS1 5 SET end=A ohms=1_200 open=0",
    "NS1 5 SET end=A ohms=0900.0 open=0",
    "NS1 5 SET end=A ohms=900. open=0",
    "NS1 5 SET end=A ohms=nan open=0",
    "NS1 5 SET end=A ohms=inf open=0",
    "NS1 5 SET end=A ohms=1e999 open=0",   # overflows to infinity
    "NS1 5 TEST dwell_ms=1_0",
])
def test_numbers_outside_the_grammar_move_nothing(body):
    link = open_link("loop://")
    before = link.board.handle_line(sealed("NS1 1 STATUS"))
    reply = wire.decode_reply(link.board.handle_line(sealed(body)))
    assert reply.verb == "ERR" and reply.fields["code"] in ("FORMAT", "RANGE"), reply
    assert link.board.handle_line(sealed("NS1 1 STATUS")) == before


@pytest.mark.parametrize("body", ["NS+1 5 PING", "NS01 5 PING", "NS1.0 5 PING", "ns1 5 PING",
                                  "NS 5 PING", "NS1 05 PING", "NS1 +5 PING"])
def test_marker_and_sequence_number_are_exact(body):
    with pytest.raises(wire.WireError) as err:
        wire.decode_request(sealed(body))
    assert err.value.code == wire.E_FORMAT


def test_a_str_line_with_non_ascii_digits_is_a_format_error():
    # str lines are checked like bytes: U+00B9 (superscript one) is a "digit" to str.isdigit
    with pytest.raises(wire.WireError) as err:
        wire.decode_request("NS1 \u00b9 PING *0000\n")
    assert err.value.code == wire.E_FORMAT


def test_ohms_exactly_twice_the_top_row_of_a_float32_table(tmp_path):
    # PROTOCOL.md: ohms may lie up to a factor 2 above the highest row. A top row written
    # 1944.7 is slightly less once stored as IEEE 754 binary32 (numpy):
    top = float(np.float32(1944.7))
    assert top < 1944.7 and 2 * top < 3889.4
    config = json.loads((ROOT / "examples" / "board-sim.json").read_text())
    table = config["ladder"]["table"]
    assert table[-1][1] < 1944.7  # the demo table, with its top row raised to that value
    table[-1][1] = 1944.7
    board = tmp_path / "board.json"
    board.write_text(json.dumps(config))
    link = open_link(f"loop://?board={board}")
    with Controller(link) as c:
        assert c.table()[-1][1] == 1944.7
        f = c.request("SET", (("end", "A"), ("ohms", "3889.4"), ("open", 0)))
        assert float(f["ohms"]) == 1944.7
        with pytest.raises(BoardError) as err:
            c.request("SET", (("end", "A"), ("ohms", "3889.5"), ("open", 0)))
        assert err.value.code == "RANGE"
        # and the same at the low end: half the bottom row is accepted
        low = table[0][1] / 2
        assert c.request("SET", (("end", "A"), ("ohms", f"{low:.2f}"), ("open", 0)))["mask"] \
            == str(table[0][0])


@pytest.mark.parametrize("value", ["nan", "inf", "-inf", "1e999"])
def test_host_refuses_a_board_reply_with_a_non_finite_number(value):
    with pytest.raises(LinkError):
        state_from_fields({"end": "A", "mask": "1", "open": "0", "ohms": value})
