"""Presets: parsing, null-bearing resolution and per-band targets.

References: the null of a resistively terminated loop points toward the terminated end
[common practice; REFERENCES.md "Terminated loops"]; amateur band edges from the ITU
Radio Regulations Article 5 frequency allocation table (from memory; widest edges of
the three regions).
"""

from __future__ import annotations

from pathlib import Path

import pytest

from nullsteer.station.config import Station, load_station
from nullsteer.errors import ConfigError
from nullsteer.station.bearing import fed_end_for_null, null_bearing_deg
from nullsteer.station.presets import (End, Target, parse_presets,
                               resolve_target)

EXAMPLE = Path(__file__).resolve().parents[1] / "examples" / "station.toml"


def station(raw: dict) -> Station:
    return Station(path=Path("test.toml"), raw=raw)


def test_example_station_presets():
    # examples/station.toml (the documented demo): three presets, all resolvable.
    presets = parse_presets(load_station(EXAMPLE))
    assert resolve_target(presets["dx-east"]) == Target(End.A, 1300.0, False)
    assert resolve_target(presets["dx-west"]) == Target(End.B, 1300.0, False)
    fig8 = resolve_target(presets["no-null"])
    assert fig8.open and fig8.ohms is None


def test_null_points_toward_terminated_end():
    # Common practice: fed at A, terminated at B -> null toward B (opposite A).
    assert null_bearing_deg(End.A, 65.0) == pytest.approx(245.0)
    assert null_bearing_deg(End.B, 65.0) == pytest.approx(65.0)
    assert null_bearing_deg(End.A, 300.0) == pytest.approx(120.0)   # wraps past 360


@pytest.mark.parametrize("wanted,expected", [
    (245.0, End.A), (65.0, End.B),
    (150.0, End.B),   # 85 deg from B's null (65), 95 from A's (245)
    (160.0, End.A),   # 95 from 65, 85 from 245
    (10.0, End.B),    # 55 from 65 across north vs 125
    (300.0, End.A),   # 55 from 245 vs 125 across north
    (155.0, End.A),   # exact tie (90/90): documented to go to A
])
def test_null_bearing_resolves_to_the_nearer_end(wanted, expected):
    # Common practice geometry (nearest of the two possible null directions).
    assert fed_end_for_null(wanted, 65.0)[0] == expected


def test_null_bearing_preset_uses_antenna_bearing():
    st = station({"antenna": {"end_a_bearing_deg": 65.0},
                  "presets": {"eu": {"null_bearing_deg": 70.0, "ohms": 800.0}}})
    p = parse_presets(st)["eu"]
    assert p.fed_end == End.B and p.null_bearing_deg == 70.0


def test_band_table_overrides_by_frequency():
    # ITU RR Art. 5 (from memory): 160 m = 1.8-2.0 MHz, 80 m = 3.5-4.0 MHz (region 2).
    st = station({"presets": {"p": {"fed_end": "A", "ohms": 900.0,
                                    "bands": {"160m": {"ohms": 950.0}, "80m": {"ohms": 700.0},
                                              "40m": {"open": True}}}}})
    p = parse_presets(st)["p"]
    assert resolve_target(p, 1.83e6).ohms == 950.0
    assert resolve_target(p, 2.0e6).ohms == 950.0          # edges included
    assert resolve_target(p, 3.6e6).ohms == 700.0
    assert resolve_target(p, 7.1e6) == Target(End.A, None, True)
    assert resolve_target(p, 2.5e6).ohms == 900.0          # between bands: default
    assert resolve_target(p, None).ohms == 900.0           # frequency unknown: default


def test_band_ranges_list_and_shared_edge():
    st = station({"presets": {"mw": {"fed_end": "B", "ohms": 1000.0, "bands": [
        {"freq_lo_mhz": 1.0, "freq_hi_mhz": 1.71, "ohms": 1200.0},
        {"freq_lo_mhz": 0.52, "freq_hi_mhz": 1.0, "ohms": 1100.0}]}}})
    p = parse_presets(st)["mw"]
    assert resolve_target(p, 0.7e6).ohms == 1100.0
    assert resolve_target(p, 1.0e6).ohms == 1100.0         # shared edge: lower range
    assert resolve_target(p, 1.5e6).ohms == 1200.0
    assert resolve_target(p, 5.0e6).ohms == 1000.0


@pytest.mark.parametrize("preset,key", [
    ({"fed_end": "C", "ohms": 900.0}, "presets.x.fed_end"),
    ({"fed_end": "A", "ohms": -5.0}, "presets.x.ohms"),
    ({"fed_end": "A", "ohms": 0.0}, "presets.x.ohms"),
    ({"fed_end": "A"}, "presets.x.ohms"),
    ({"ohms": 900.0}, "presets.x.fed_end"),
    ({"fed_end": "A", "ohm": 900.0}, "presets.x.ohm"),
    ({"open": True, "ohms": 900.0}, "presets.x.ohms"),
    ({"open": "yes"}, "presets.x.open"),
    ({"fed_end": "A", "null_bearing_deg": 10.0, "ohms": 900.0}, "presets.x.null_bearing_deg"),
    ({"null_bearing_deg": 10.0, "ohms": 900.0}, "presets.x.null_bearing_deg"),  # no antenna
    ({"fed_end": "A", "ohms": 900.0, "bands": {"11m": {"ohms": 1.0}}}, "presets.x.bands.11m"),
    ({"fed_end": "A", "ohms": 900.0, "bands": {"80m": {"ohm": 1.0}}}, "presets.x.bands.80m.ohm"),
    ({"fed_end": "A", "ohms": 900.0, "bands": [{"freq_lo_mhz": 2.0, "freq_hi_mhz": 1.0,
                                               "ohms": 5.0}]}, "presets.x.bands[0].freq_hi_mhz"),
    ({"fed_end": "A", "ohms": 900.0, "bands": [
        {"freq_lo_mhz": 1.0, "freq_hi_mhz": 2.0, "ohms": 5.0},
        {"freq_lo_mhz": 1.5, "freq_hi_mhz": 3.0, "ohms": 6.0}]}, "presets.x.bands"),
    ("fed A", "presets.x"),
])
def test_bad_preset_keys_name_the_key(preset, key):
    # Station-file contract (nullsteer.station.config): one-line ConfigError naming the dotted key.
    with pytest.raises(ConfigError) as info:
        parse_presets(station({"presets": {"x": preset}}))
    assert info.value.key == key
    assert "\n" not in str(info.value)
