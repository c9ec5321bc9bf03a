"""hardware_notes/: the builder's notes agree with the code and with their sources.

* The worked power estimate is recomputed from the demo station's loop with the small-loop
  effective height h = 2 pi A / lambda (Kraus, Antennas, small loop; from memory) and the
  short-monopole field E = 300 sqrt(P) / d mV/m (P kW, d km; 300 V cymomotive force per
  kW, the usual reference figure; from memory).
* The expander register addresses are those of the MCP23017/MCP23S17 data sheet
  DS20001952C, Table 3-5 (IOCON.BANK = 0): IODIRA 0x00, GPIOA 0x12, OLATA 0x14.
* Bias-tee sizing: X_L >= 10 Z0 and X_C <= Z0 / 10 at the lowest frequency (common
  practice).
"""

from __future__ import annotations

import math
import re
import tomllib
from pathlib import Path

import pytest

from nullsteer.board.bundle import FIRMWARE_KEYS
from nullsteer.sim import load_firmware

ROOT = Path(__file__).parents[1]
NOTES = ROOT / "hardware_notes"
FW = load_firmware()


def note(name: str) -> str:
    return (NOTES / name).read_text()


def numbers(text: str) -> list[float]:
    return [float(x) for x in re.findall(r"\d+(?:\.\d+)?", text)]


def test_every_linked_note_exists():
    for md in NOTES.glob("*.md"):
        for target in re.findall(r"\]\(([^)#]+)\)", md.read_text()):
            if "://" not in target:
                assert (md.parent / target).exists(), f"{md.name} links to missing {target}"


def test_worked_power_estimate_matches_the_demo_loop():
    station = tomllib.loads((ROOT / "examples" / "station.toml").read_text())
    a = station["antenna"]
    area_m2 = a["length_m"] * (a["height_m"] - a["bottom_m"])
    lam_m = 299.792458e6 / 1.6e6
    h_eff_m = 2 * math.pi * area_m2 / lam_m
    v = 3.0 * h_eff_m
    r_fed = station["feed"]["receiver_ohm"] * station["feed"]["transformer_ratio"]
    text = note("termination-resistors.md")
    assert f"A = {a['length_m']:g} × {a['height_m'] - a['bottom_m']:.1f} = {area_m2:.1f} m²" in text
    assert f"h_eff = 2π × {area_m2:.1f} / 187.5 = {h_eff_m:.2f} m" in text
    assert f"**{v:.1f} V**" in text
    assert f"**{v * v / 390 * 1e3:.0f} mW**" in text  # lowest setting of the demo ladder: 390 ohm
    assert f"**{v * v / (4 * r_fed) * 1e3:.1f} mW**" in text
    assert f"**{(3.0 * a['height_m']) ** 2 / 390:.2f} W**" in text
    # field of a 50 kW station at 1 km and 0.5 km
    assert round(300 * math.sqrt(50) / 1.0 / 1000) == 2 and round(300 * math.sqrt(50) / 0.5 / 1000) == 4
    assert "about 2 V/m at 1 km and 4 V/m at 500 m" in text


def test_bias_tee_sizing():
    f, z0 = 0.5e6, 50.0
    l_uh = 10 * z0 / (2 * math.pi * f) * 1e6
    c_nf = 1 / (2 * math.pi * f * z0 / 10) * 1e9
    text = note("power-and-link.md")
    assert f"L ≥ {l_uh:.0f} µH" in text and f"C ≥ {c_nf:.0f} nF" in text


def test_expander_registers_per_data_sheet():
    import drivers  # registered by load_firmware
    assert (drivers.REG_IODIRA, drivers.REG_GPIOA, drivers.REG_OLATA) == (0x00, 0x12, 0x14)
    text = note("relays-and-drivers.md")
    assert "(OLATA/OLATB, 0x14/0x15)" in text and "(IODIRA/IODIRB, 0x00/0x01)" in text
    assert "(0x12/0x13)" in text


@pytest.mark.parametrize("keys", ["DRIVER_KEYS", "I2C_KEYS", "LATCHING_KEYS"])
def test_driver_block_keys_are_documented(keys):
    import drivercfg
    text = note("relays-and-drivers.md")
    for key in getattr(drivercfg, keys):
        assert f"`{key}`" in text or f"`i2c.{key}`" in text or f'"{key}"' in text, key


def test_firmware_section_keys_are_documented():
    text = note("README.md")
    table = text[text.index("### `[firmware]` keys"):text.index("### Firmware version")]
    documented = set(re.findall(r"`([a-z_]+)`", table))
    assert FIRMWARE_KEYS <= documented


def test_relay_roles_and_switching_order_match_the_firmware():
    text = note("README.md")
    for role in FW.relays.ROLES:
        assert f"`{role}`" in text
    assert "protect on, settle, swap ends, settle, ladder and\nopen relays, settle, protect off" in text


def test_safety_notes_defer_to_codes():
    text = note("enclosure-and-safety.md")
    assert "local electrical and building" in text and "licensed practice" in text
    assert "direct strike" in text
    assert "Never wire-wound" in note("termination-resistors.md").replace("**", "")
