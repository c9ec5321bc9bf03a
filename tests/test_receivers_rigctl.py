"""rigctl:// against the real rigctld (Hamlib's dummy rig, Debian libhamlib-utils) and a
stand-in with odd replies; auto-null through rigctld reports no significant null.

Protocol facts checked (Hamlib rigctld(1) manual, "Extended Response Protocol"; the
reply forms as rigctld 4.5 prints them, see ../shared/PITFALLS.md): ``l STRENGTH`` answers
a bare number, ``+l STRENGTH`` answers ``get_level: STRENGTH`` / number / ``RPRT 0``;
``F``/``f`` set and get the frequency in Hz; errors are ``RPRT`` with a negative code.
The dummy rig holds no antenna: its level cannot depend on our relays, so a correct
significance check must find no null.
"""

from __future__ import annotations

import json
import time

import pytest

from nullsteer.cli import main
from nullsteer.errors import ConfigError, MeasurementError
from nullsteer.reception.receivers import open_receiver
from receiver_support import ScriptedRig, rigctld  # noqa: F401 - fixture


def test_reads_level_and_frequency_from_the_real_rigctld(rigctld):  # noqa: F811
    assert rigctld.raw("F 1830000") == "RPRT 0"
    for query in ("", "?reply=plain"):
        with open_receiver(rigctld.url + query) as rx:
            assert rx.freq_hz() == 1_830_000.0  # what rigctld was told, by another client
            r = rx.read()
            # S-meter in dB over S9; the dummy rig wanders within the S-meter's range
            assert -60 <= r.level_db <= 60 and r.level_db == int(r.level_db)
            assert r.unit == "dB rel S9"
            assert r.spread_db == pytest.approx(1 / 12 ** 0.5)  # 1 dB steps: q/sqrt(12)


def test_reconnects_after_rigctld_restarts():
    from receiver_support import Rigctld

    rig = Rigctld()
    rx = open_receiver(rig.url)
    rx.read()
    port = rig.port
    rig.stop()
    with pytest.raises(MeasurementError, match="cannot reach rigctld|failed"):
        rx.read()
    rig2 = Rigctld(port)  # the same port again, as after a restart
    try:
        deadline = time.monotonic() + 10
        while True:
            try:
                rx.read()
                break
            except MeasurementError:
                assert time.monotonic() < deadline
                time.sleep(0.1)
    finally:
        rx.close()
        rig2.stop()


def _odd(cmd: str, conn: int) -> bytes | None:
    table = {
        "+l STRENGTH": b"get_level: STRENGTH\r\nLevel Value: -54\r\nRPRT 0\r\n",  # label, CRLF
        "l STRENGTH": b"  -12.5 <split>\n",                                         # split packet
        "+f": b"get_freq:\nFrequency: 3600000\n<split>RPRT 0\n",
        "f": b"3600000\n",
    }
    return table.get(cmd, b"RPRT -11\n")


@pytest.mark.parametrize("query, level", [("", -54.0), ("?reply=plain", -12.5)])
def test_odd_but_valid_replies_are_parsed(query, level):
    rig = ScriptedRig(_odd)
    try:
        with open_receiver(rig.url + query) as rx:
            assert rx.read().level_db == level
            assert rx.freq_hz() == 3_600_000.0
    finally:
        rig.stop()


def test_rig_error_code_is_named():
    rig = ScriptedRig(lambda cmd, n: b"get_level: STRENGTH\nRPRT -11\n")
    try:
        with open_receiver(rig.url) as rx, pytest.raises(MeasurementError, match=r"RPRT -11 \(feature"):
            rx.read()
    finally:
        rig.stop()


def test_silence_and_garbage_reconnect_once_then_fail():
    # first connection: silent; second: answers. The reading succeeds on the retry.
    rig = ScriptedRig(lambda cmd, n: None if n == 1 else b"get_level: STRENGTH\n7\nRPRT 0\n")
    try:
        with open_receiver(rig.url + "?timeout_s=0.3") as rx:
            assert rx.read().level_db == 7.0
            assert rx.reconnects == 1 and rig.connections == 2
    finally:
        rig.stop()
    rig = ScriptedRig(lambda cmd, n: b"get_level: STRENGTH\nS9 plus a lot\nRPRT 0\n")
    try:
        with open_receiver(rig.url) as rx, pytest.raises(MeasurementError, match="expected a number"):
            rx.read()
        assert rig.connections == 2
    finally:
        rig.stop()
    rig = ScriptedRig(lambda cmd, n: b"<close>")
    try:
        with open_receiver(rig.url) as rx, pytest.raises(MeasurementError, match="closed"):
            rx.read()
    finally:
        rig.stop()


@pytest.mark.parametrize("url, key", [
    ("rigctl://127.0.0.1:4532?timeout_s=0", "--receiver timeout_s"),
    ("rigctl://127.0.0.1:4532?reply=fancy", "--receiver reply"),
    ("rigctl://127.0.0.1:4532?colour=red", "--receiver colour"),
    ("rigctl://127.0.0.1:99999", "--receiver"),
])
def test_bad_urls_name_the_option(url, key):
    with pytest.raises(ConfigError) as exc:
        open_receiver(url)
    assert exc.value.key == key


def test_level_command_json(rigctld, capsys):  # noqa: F811
    assert main(["level", "--receiver", rigctld.url, "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert set(out) >= {"level_db", "spread_db", "unit", "receiver"}
    assert out["unit"] == "dB rel S9" and out["receiver"] == rigctld.url
    assert main(["level", "--receiver", rigctld.url, "--mode", "channel"]) == 2
    assert "--mode" in capsys.readouterr().err


@pytest.mark.slow
def test_autonull_against_rigctld_finds_no_significant_null(rigctld, capsys):  # noqa: F811
    from pathlib import Path

    root = Path(__file__).resolve().parents[1]
    code = main(["autonull", "--link", "sim://", "--config", str(root / "examples" / "station.toml"),
                 "--freq", "1.83", "--fed-end", "A", "--receiver", rigctld.url,
                 "--dwell", "0.05", "--interval", "0.02", "--confirm", "2", "--json"])
    captured = capsys.readouterr()
    assert code == 0, captured.err
    out = json.loads(captured.out)
    assert out["significant"] is False
    assert out["significance"]["ci_low_db"] <= 0.0 <= out["significance"]["ci_high_db"]
    assert out["significance"]["text"].startswith("no significant null")
    assert out["unit"] == "dB rel S9" and out["source"] == rigctld.url
    assert out["confirm_switchings"] == 4 and out["switchings"] <= 12
