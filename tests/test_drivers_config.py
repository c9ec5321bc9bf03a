"""The board config's ``driver`` block: bad values are refused naming the key.

Checked with the firmware's own reader under CPython (nullsteer.sim.parse_board_config),
the one the board runs at boot and the host runs before writing a bundle. The limits come
from the parts: an MCP23017-class expander has 16 I/O and bus addresses 0x20..0x27
(0b0100 A2 A1 A0; data sheet DS20001952C, section 3.3.1, from memory); a 74HC595-class
chip has 8 outputs (family data sheets).
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from nullsteer.errors import ConfigError
from nullsteer.sim import InProcessBoard
from nullsteer.sim.firmware import parse_board_config
from nullsteer.protocol import wire

EXAMPLE = json.loads((Path(__file__).parents[1] / "examples" / "board-sim.json").read_text())


def board(driver: dict | None, **relay_changes) -> dict:
    cfg = json.loads(json.dumps(EXAMPLE))
    if driver is not None:
        cfg["driver"] = driver
    for k, r in enumerate(cfg["relays"]):
        if driver is not None and driver.get("kind") in ("shift", "expander"):
            r["pin"] = k
        for key, values in relay_changes.items():
            r[key] = values[k]
    return cfg


def test_defaults_per_kind():
    assert parse_board_config(board(None)).driver["kind"] == "gpio"
    shift = parse_board_config(board({"kind": "shift", "data": 20, "clock": 21, "latch": 22}))
    assert shift.driver["length"] == 16  # 10 outputs need two 8-bit chips
    exp = parse_board_config(board({"kind": "expander"}))
    assert exp.driver["addr"] == 0x20 and exp.driver["length"] == 16
    latch = parse_board_config(board({"latching": {"pulse_ms": 40}},
                                     reset_pin=[30 + k for k in range(10)]))
    assert latch.driver["reset_pins"][0] == 30 and latch.driver["pulse_ms"] == 40


BAD = [
    ({"kind": "relay-card"}, {}, "board.driver.kind"),
    ({"kind": "shift", "data": 20, "clock": 21}, {}, "board.driver.latch"),
    ({"kind": "shift", "data": 20, "clock": 20, "latch": 22}, {}, "board.driver.clock"),
    ({"kind": "shift", "data": 1, "clock": 2, "latch": 3, "length": 12}, {}, "board.driver.length"),
    ({"kind": "shift", "data": 1, "clock": 2, "latch": 3, "length": 8}, {}, "board.relays[8].pin"),
    ({"kind": "expander", "addr": 0x40}, {}, "board.driver.addr"),
    ({"kind": "expander", "i2c": {"bus": 1}}, {}, "board.driver.i2c.bus"),
    ({"kind": "gpio", "data": 4}, {}, "board.driver.data"),
    ({"latching": {"pulse_ms": 0}}, {"reset_pin": list(range(30, 40))}, "board.driver.latching.pulse_ms"),
    ({"latching": {"pulse_ms": 20}}, {"reset_pin": [30] * 10}, "board.relays[1].reset_pin"),
    ({"latching": {"pulse_ms": 20}}, {"reset_pin": [2] + list(range(31, 40))}, "board.relays[0].reset_pin"),
    ({}, {"reset_pin": list(range(30, 40))}, "board.relays[0].reset_pin"),
]


@pytest.mark.parametrize("driver,changes,key", BAD, ids=[b[2] for b in BAD])
def test_bad_driver_blocks_name_the_key(driver, changes, key):
    cfg = board(driver, **changes)  # (length 8: ten relays on outputs 0..9 do not fit)
    with pytest.raises(ConfigError) as err:
        parse_board_config(cfg)
    assert err.value.key == key


def test_gpio_board_reports_no_read_back(tmp_path):
    b = InProcessBoard(board(None), tmp_path)
    b.boot()
    reply = wire.decode_reply(b.handle_line(wire.encode(3, "TEST", (("dwell_ms", 0),))))
    # plain GPIO cannot read its outputs: rb=none (PROTOCOL.md, TEST reply)
    assert reply.fields["rb"] == "none" and "bad" not in reply.fields
