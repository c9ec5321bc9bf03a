"""Designs: every reported value recomputed from the resistors and the wiring."""

import json
import math

import numpy as np
import pytest

from nullsteer.errors import ConfigError
from nullsteer.ladder import (PARTS_CAUTION, LadderValues, Parasitics, board_ladder_block,
                              design_ladder, evaluate, get_topology, nearest_setting,
                              parts_list, settings_impedance_ohm, wiring_diagram,
                              write_board_ladder)
from ladder_reference import brute_force_pct

RC, CP = 0.08, 1.5e-12
PAR = Parasitics(RC, CP)


def _par(a, b):
    return a * b / (a + b)


def _dc_by_hand(v: LadderValues, mask: int) -> float:
    """Series chain: base + inserted R + shorted (R || contact) + K_REV and K_OPEN contacts."""
    n = len(v.chain_ohm)
    chain = v.base_ohm + sum(r if mask >> i & 1 else _par(r, RC) for i, r in enumerate(v.chain_ohm))
    if v.shunt_ohm and mask >> n & 1:
        chain = _par(chain, v.shunt_ohm[0] + RC)
    return chain + 2 * RC


@pytest.mark.parametrize("topo", ["series-shorting", "series-shunt"])
def test_every_setting_recomputed(topo):
    d = design_ladder(500, 1800, 3, "E12", 1.0, topo, parasitics=PAR)
    assert sorted(s.mask for s in d.settings) == list(range(8))
    for s in d.settings:
        assert s.ohms == pytest.approx(_dc_by_hand(d.values, s.mask), rel=1e-12)
    ohms = [s.ohms for s in d.settings]
    assert ohms == sorted(ohms)
    # against the brute-force definition (tests/ladder_reference.py)
    assert d.worst_case_error_pct == pytest.approx(brute_force_pct(ohms, 500, 1800, 1.0), abs=1e-3)


def test_impedance_at_frequency_includes_open_contact_capacitance():
    # One inserted resistor R with capacitance C across its open contact: R || 1/(jωC)
    # (circuit theory); the other, shorted, is R || r_contact.
    v = LadderValues(0.0, (1000.0, 2000.0))
    d = evaluate(get_topology("series-shorting"), v, 500, 3000, 1.0, PAR, "E24")
    f = 30e6
    zc = 1 / (1j * 2 * math.pi * f * CP)
    want = _par(1000.0, zc) + _par(2000.0, RC) + 2 * RC
    row = [i for i, s in enumerate(d.settings) if s.mask == 1][0]
    assert settings_impedance_ohm(d, f)[row, 0] == pytest.approx(want, rel=1e-12)
    # 1 pF is about 5.3 kΩ at 30 MHz (REFERENCES.md, relays): a kΩ leg turns visibly reactive
    assert abs(settings_impedance_ohm(d, f)[row, 0].imag) > 100


def test_nearest_setting_by_ratio():
    table = [(0, 100.0), (1, 200.0), (2, 400.0)]
    # ratio distance: 283 is nearer 400 in ratio than 200 (sqrt(200*400) = 282.8)
    assert nearest_setting(table, 283.0)[0] == 2
    assert nearest_setting(table, 282.0)[0] == 1
    mask, ohms, err = nearest_setting(table, 190.0)
    assert (mask, ohms) == (1, 200.0) and err == pytest.approx((200 / 190 - 1) * 100)
    with pytest.raises(ConfigError, match="--ohms"):
        nearest_setting(table, -5.0)


def test_board_block_and_file_update(tmp_path):
    d = design_ladder(400, 2500, 3, "E12", None, "series-shorting")
    block = board_ladder_block(d)
    assert block["topology"] == "series-shorting" and block["bits"] == 3
    assert len(block["table"]) == 8
    assert [o for _, o in block["table"]] == sorted(o for _, o in block["table"])
    path = tmp_path / "board.json"
    path.write_text(json.dumps({"pins": {"k1": 2}, "ladder": {"old": 1}}))
    write_board_ladder(d, path)
    doc = json.loads(path.read_text())
    assert doc["pins"] == {"k1": 2} and doc["ladder"] == json.loads(json.dumps(block))
    fresh = tmp_path / "new.json"
    write_board_ladder(d, fresh)
    assert list(json.loads(fresh.read_text())) == ["ladder"]


def test_parts_list_power_share_of_a_series_chain():
    # In a series chain the current is common, so part i takes R_i / R_total of the power
    # (circuit theory); its worst setting is the smallest one containing it.
    v = LadderValues(100.0, (50.0, 400.0))
    d = evaluate(get_topology("series-shorting"), v, 100, 600, 1.0, Parasitics(0.0, 0.0), "E24")
    rows = parts_list(d, induced_w=1.0)
    assert rows[0].worst_share == pytest.approx(1.0)                  # base alone
    assert rows[1].worst_share == pytest.approx(50 / 150, rel=1e-4)
    assert rows[2].worst_share == pytest.approx(400 / 500, rel=1e-4)
    assert rows[2].power_w == 2.0                                     # 0.8 W x 2 derating
    assert "wire-wound" in PARTS_CAUTION


def test_wiring_diagram_names_every_part_and_role():
    d = design_ladder(400, 2500, 3, "E12", None, "series-shunt")
    text = wiring_diagram(d)
    for ref in ("K_OPEN", "K_REV", "K_PROT", "R1", "R2", "Rs", "K1", "K2", "K3"):
        assert ref in text


@pytest.mark.parametrize("kwargs,key", [
    (dict(r_min_ohm=2500, r_max_ohm=400, relays=4), "range_ohm"),
    (dict(r_min_ohm=400, r_max_ohm=2500, relays=0), "relays"),
    (dict(r_min_ohm=400, r_max_ohm=2500, relays=4, series="E7"), "series"),
    (dict(r_min_ohm=400, r_max_ohm=2500, relays=4, topology="zigzag"), "topology"),
])
def test_bad_input_names_the_key(kwargs, key):
    with pytest.raises(ConfigError) as exc:
        design_ladder(**kwargs)
    assert exc.value.key == key


def test_auto_picks_the_fewest_relays_meeting_the_target():
    d = design_ladder(600, 1500, None, "E24", 1.0, target_error_pct=6.0)
    assert d.worst_case_error_pct <= 6.0
    fewer = design_ladder(600, 1500, d.relays - 1, "E24", 1.0)
    assert fewer.worst_case_error_pct > 6.0
