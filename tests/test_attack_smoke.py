"""The smoke scale of the attack run (tests/attack_suite.py; ``make attack`` runs it all).

What counts as a failure is stated in the suite's docstring, from firmware/PROTOCOL.md:
frames that fail their check never move a relay, every request gets exactly one reply
line, a power cut leaves the old or the new state, acknowledged state is the relay state.
The oracle for "damaged" is an independent CRC (CPython's binascii.crc_hqx, CRC-16/
CCITT-FALSE with init 0xFFFF, CPython library documentation).
"""

from __future__ import annotations

import binascii

import attack_suite

from nullsteer.protocol import wire


def test_the_oracle_tells_intact_from_damaged_lines():
    good = wire.encode(17, "SET", (("end", "A"), ("mask", 37), ("open", 0)))
    assert good == b"NS1 17 SET end=A mask=37 open=0 *7EA9\n"  # golden vector
    assert binascii.crc_hqx(good[:-7], 0xFFFF) == 0x7EA9
    assert attack_suite.intact(good)
    assert not attack_suite.intact(good.replace(b"37", b"38"))
    assert not attack_suite.intact(good.replace(b"7EA9", b"7ea9"))


def test_smoke_run_has_no_failures():
    fig = attack_suite.run(smoke=True, seed=7, budget_s=30.0)
    assert fig.failures == []
    assert fig.frames >= 2000 and fig.commands >= 300 and fig.cuts >= 100
    assert fig.faults > 10  # the soak did inject faults
    assert fig.streams >= 100 and fig.packets > 1000  # the MQTT packet reader was fed
