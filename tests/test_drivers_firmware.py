"""Relay drivers (firmware/drivers.py) under the MicroPython unix port, with recording fakes.

tests/drivers_mp_scenarios.py runs every scenario once under ``micropython`` (and once
under CPython: both must record the same thing); the checks here assert the exact
recorded sequences. Sources are named beside each check:

* 74HC595-class shift registers: the family's data sheets (function table: serial data
  taken on the rising shift-clock edge, storage register loaded on the rising
  storage-clock edge, OE active low; serial output Q7S is the last stage) -- from memory;
  the generic part number is made by many makers.
* MCP23017-class port expander: data sheet DS20001952C, Table 3-1 / Table 3-5 with
  IOCON.BANK = 0: IODIRA 0x00 (power-on 0xFF), GPIOA 0x12, OLATA 0x14, B registers at +1,
  sequential addressing on by default.
* Dual-coil latching relays: a pulse of at least the data sheet's minimum width on the
  set or the reset coil, never both coils at once, no coil current while holding --
  common practice (relay data sheets, from memory).
"""

from __future__ import annotations

import json
import os
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

from nullsteer.sim import find_micropython
from nullsteer.sim.firmware import wire_source

ROOT = Path(__file__).parents[1]
SCRIPT = ROOT / "tests" / "drivers_mp_scenarios.py"
EXAMPLE = ROOT / "examples" / "board-sim.json"
PATH = f"{ROOT / 'firmware'}:{ROOT / 'tests'}"


def _run(cmd: list[str], env: dict) -> dict:
    done = subprocess.run(cmd, env={**os.environ, **env}, capture_output=True, timeout=60,
                          cwd=ROOT)
    assert done.returncode == 0, done.stderr.decode() + done.stdout.decode()
    return json.loads(done.stdout)


@pytest.fixture(scope="module")
def work(tmp_path_factory) -> Path:
    """A folder with the codec as the board sees it (``wire.py``) and room for state files."""
    folder = tmp_path_factory.mktemp("drivers")
    shutil.copy(wire_source(), folder / "wire.py")
    return folder


@pytest.fixture(scope="module")
def mp(work) -> dict:
    return _run([str(find_micropython()), str(SCRIPT), str(EXAMPLE), str(work)],
                {"MICROPYPATH": f".frozen:{PATH}:{work}"})


@pytest.fixture(scope="module")
def cpython(work) -> dict:
    return _run([sys.executable, str(SCRIPT), str(EXAMPLE), str(work)],
                {"PYTHONPATH": f"{PATH}:{work}"})


def shift_frame(levels: list[int]) -> list[list]:
    """Pin writes for one frame: MSB-first (highest output first), one clock pulse per
    bit with the data set before the rising edge, then one latch pulse (data sheet
    function table, from memory)."""
    out: list[list] = []
    for i in range(len(levels) - 1, -1, -1):
        out += [["data", levels[i]], ["clock", 1], ["clock", 0]]
    return out + [["latch", 1], ["latch", 0]]


def levels16(*high: int) -> list[int]:
    return [1 if i in high else 0 for i in range(16)]


def test_micropython_and_cpython_record_the_same(mp, cpython):
    assert mp == cpython


def test_shift_chain_boot_frame_then_output_enable(mp):
    s = mp["shift_basic"]
    # boot: an all-off frame is latched before OE goes low (outputs were high impedance)
    assert s["log"][:s["first"]] == shift_frame([0] * 16) + [["oe", 0]]


def test_shift_chain_frame_is_msb_first_with_latch_after_last_bit(mp):
    s = mp["shift_basic"]
    # relays 0, 3, 5 on outputs 0, 3, 9
    assert s["log"][s["first"]:s["mid"]] == shift_frame(levels16(0, 3, 9))
    assert s["outputs"] == levels16(0, 3, 9)  # what the modelled chips drive
    assert s["idempotent"] is True  # nothing staged: not one pin write


def test_shift_chain_readback_reshifts_without_latching(mp):
    s = mp["shift_basic"]
    readback = s["log"][s["mid"]:]
    assert readback == shift_frame(levels16(0, 3, 9))[:-2]  # same bits, no latch pulse
    assert s["check"] == []
    assert s["outputs_after_check"] == s["outputs"]  # outputs did not move


def test_shift_chain_readback_finds_a_broken_data_line(mp):
    # data line stuck high: every stage reads 1; relays 0 and 2 should be low
    assert mp["shift_broken"]["check"] == [0, 2]
    assert mp["shift_no_sense"]["check"] is None  # no sense pin wired: no read-back


def test_expander_writes_latches_before_directions(mp):
    e = mp["expander_basic"]
    log = e["log"]
    # boot: OLATA/OLATB = off levels (GPB7 active low -> high), then IODIRA/B = outputs
    assert log[0] == ["w", 0x21, 0x14, [0x00, 0x80]]
    assert log[1] == ["w", 0x21, 0x00, [0x00, 0x00]]
    assert e["pins_boot"] == levels16(15)
    # relays 1, 2, 3 on: GPA1 high, GPB0 high, GPB7 (active low) low; one OLAT write
    assert log[2] == ["w", 0x21, 0x14, [0x02, 0x01]]
    assert e["pins"] == levels16(1, 8)
    # read-back: two bytes from GPIOA
    assert log[3:] == [["r", 0x21, 0x12, 2]]
    assert e["check"] == []


def test_expander_readback_reports_a_held_pin_and_a_missing_chip(mp):
    assert mp["expander_stuck"]["check"] == [1]
    assert mp["expander_absent"]["raised"] is True  # no acknowledge -> OSError


def _coils_never_both_on(log: list[list], pairs: list[tuple[str, str]]) -> bool:
    level: dict[str, int] = {}
    for item in log:
        if item[0] != "sleep":
            level[item[0]] = item[1]
            for a, b in pairs:
                if level.get(a) == 1 and level.get(b) == 1:
                    return False
    return True


def test_latching_pulses_then_both_coils_off(mp):
    g = mp["latching_gpio"]
    log = g["log"]
    # boot: every coil off, then a reset pulse for each relay (position unknown at power-on)
    assert log[:g["boot"]] == [["s0", 0], ["s1", 0], ["r0", 0], ["r1", 0],
                               ["r0", 1], ["sleep", 30], ["r0", 0],
                               ["r1", 1], ["sleep", 30], ["r1", 0]]
    assert g["idempotent"] is True
    assert log[g["boot"]:] == [["s1", 1], ["sleep", 30], ["s1", 0],
                               ["s0", 1], ["sleep", 30], ["s0", 0],
                               ["r1", 1], ["sleep", 30], ["r1", 0]]
    assert g["levels"] == [0, 0, 0, 0]  # no coil current while holding
    assert g["state"] == [True, False]
    assert _coils_never_both_on(log, [("s0", "r0"), ("s1", "r1")])
    assert g["check"] is None  # plain GPIO: no read-back


def test_latching_on_expander_active_low(mp):
    e = mp["latching_expander"]
    assert e["log"] == [["w", 0x20, 0x14, [0x03, 0x00]], ["w", 0x20, 0x00, [0x00, 0x00]],
                        ["w", 0x20, 0x14, [0x01, 0x00]], ["sleep", 15],  # reset coil GPA1
                        ["w", 0x20, 0x14, [0x03, 0x00]],
                        ["w", 0x20, 0x14, [0x02, 0x00]], ["sleep", 15],  # set coil GPA0
                        ["w", 0x20, 0x14, [0x03, 0x00]],
                        ["r", 0x20, 0x12, 2]]
    assert e["pins"] == [1, 1] and e["check"] == []


def test_build_driver_from_config_blocks(mp):
    b = mp["build_kinds"]
    assert b["gpio"]["type"] is None  # plain GPIO stays relays.GpioDriver
    assert b["gpio_latching"]["type"] == "LatchingDriver"
    # pins made at their off level before anything else (relay 1 active low)
    assert b["gpio_latching"]["log"][:4] == [["pin", 2, 1, 0], ["pin", 3, 1, 1],
                                             ["pin", 12, 1, 0], ["pin", 13, 1, 1]]
    shift = b["shift"]
    assert shift["type"] == "PortDriver" and shift["driver"]["length"] == 16
    assert shift["log"][:2] == [["pin", 19, 1, 1], ["pin", 20, 0, None]]  # OE high, sense in
    assert shift["log"][-1] == ["set", 19, 0]  # outputs enabled after the first latch
    exp = b["expander"]
    assert exp["type"] == "PortDriver"
    assert exp["log"][2:] == [["i2c", 1, 7, 6, 100000], ["w", 0x24, 0x14, [0x00, 0x80]],
                              ["w", 0x24, 0x00, [0x00, 0x00]]]


def test_bank_self_test_names_the_relay_that_reads_back_wrong(mp):
    b = mp["bank_selftest"]
    # GPA2 (the reversal relay's output) held low: energising REV reads back wrong
    assert b["stepped"] == 3 and b["faults"] == ["REV"]
    assert b["levels"] == {"L0": True, "L1": False, "REV": False, "PROT": False}  # restored


def test_app_test_reply_carries_the_read_back(mp):
    a = mp["app_selftest"]
    ok = a["healthy"]["fields"]
    assert a["healthy"]["verb"] == "OK" and ok["relays"] == "9" and ok["rb"] == "ok"
    assert "bad" not in ok
    bad = a["rev_stuck"]["fields"]
    assert bad["rb"] == "fail" and bad["bad"] == "REV"
