"""ITU-R P.372 constants and the Friis cascade, against published values."""

from __future__ import annotations

import math

import pytest

from nullsteer.errors import ConfigError
from nullsteer.reception.noise import (NoiseCategory, ReceiveChain, Stage, antenna_noise_kt0,
                             external_noise_figure_db, friis_noise_factor, noise_budget,
                             noise_power_dbw, parse_noise, passive_stage,
                             required_preamp_gain_db, snr_loss_db)

# ITU-R P.372, Table 1: Fam = c - d log10(f_MHz)  (values as listed in REFERENCES.md)
P372_TABLE1 = {"city": (76.8, 27.7), "residential": (72.5, 27.7), "rural": (67.2, 27.7),
               "quiet-rural": (53.6, 28.6), "galactic": (52.0, 23.0)}


@pytest.mark.parametrize("name", sorted(P372_TABLE1))
def test_fam_follows_table1(name):
    c, d = P372_TABLE1[name]
    # at 1 MHz log10(f) = 0, so Fam = c (ITU-R P.372 Table 1)
    assert external_noise_figure_db(1e6, name) == pytest.approx(c, abs=1e-9)
    # at 10 MHz Fam = c - d (ITU-R P.372 Table 1)
    assert external_noise_figure_db(10e6, name) == pytest.approx(c - d, abs=1e-9)
    # one decade per d dB, anywhere in range
    assert (external_noise_figure_db(2e6, name) - external_noise_figure_db(20e6, name)
            == pytest.approx(d, abs=1e-9))


def test_fam_outside_fit_range_is_rejected_or_marked():
    # ITU-R P.372 Table 1 fits are stated for 0.3-250 MHz: above, refused; below (LF and
    # low MF, down to 10 kHz) the same line c - d log10(f) is extended and the budget says so
    with pytest.raises(ConfigError):
        external_noise_figure_db(300e6, "city")
    with pytest.raises(ConfigError):
        external_noise_figure_db(5e3, "rural")
    assert external_noise_figure_db(0.1e6, "rural") == pytest.approx(67.2 + 27.7, abs=1e-9)
    chain = ReceiveChain(receiver_nf_db=12.0)
    low = noise_budget(0.137e6, -40.0, chain, "rural")
    assert any("extrapolated" in n and "atmospheric" in n for n in low.notes)
    assert not any("extrapolated" in n for n in noise_budget(1.83e6, -40.0, chain, "rural").notes)


def test_noise_power_equation_6():
    # ITU-R P.372 eq. 6: Pn = Fa + 10 log10(b) - 204 dBW; Fa = 0 dB, b = 1 Hz -> kT0 = -204 dBW
    assert noise_power_dbw(0.0, 1.0) == pytest.approx(-204.0)
    # rural at 2 MHz in 500 Hz: 67.2 - 27.7 log10(2) + 10 log10(500) - 204
    expected = 67.2 - 27.7 * math.log10(2.0) + 10 * math.log10(500.0) - 204.0
    fa = external_noise_figure_db(2e6, "rural")
    assert noise_power_dbw(fa, 500.0) == pytest.approx(expected, abs=1e-9)
    # kT0 with T0 = 290 K, Boltzmann 1.380649e-23 J/K (CODATA): -203.98 dBW/Hz, i.e. -204 rounded
    assert 10 * math.log10(1.380649e-23 * 290.0) == pytest.approx(-204.0, abs=0.05)


def test_friis_worked_case():
    # Worked by hand with Friis (Pozar, Microwave Engineering 4th ed., eq. 10.23):
    # preamp NF 3 dB (F=1.9953) G 20 dB (100); coax 2 dB (F=1.5849, G=0.631); rx NF 10 dB (F=10)
    # F = 1.9953 + (1.5849-1)/100 + (10-1)/(100*0.63096) = 1.9953 + 0.00585 + 0.14264 = 2.1438
    f = friis_noise_factor([Stage("pre", 3.0, 20.0), passive_stage("coax", 2.0),
                            Stage("rx", 10.0, 0.0)])
    assert f == pytest.approx(2.1438, abs=2e-4)
    assert 10 * math.log10(f) == pytest.approx(3.312, abs=2e-3)


def test_passive_loss_before_receiver_adds_its_loss():
    # A matched attenuator at T0 has F = L, and L ahead of a receiver F gives F_total = L*F
    # (Pozar 4th ed. §10.2, noise figure of a lossy line)
    f = friis_noise_factor([passive_stage("coax", 3.0), Stage("rx", 8.0, 0.0)])
    assert 10 * math.log10(f) == pytest.approx(11.0, abs=1e-9)


def test_snr_loss_at_10db_margin():
    # 10 log10(1 + 10^(-m/10)), m = 10 dB -> 0.41 dB (common practice, REFERENCES.md)
    assert snr_loss_db(10.0) == pytest.approx(0.4139, abs=1e-3)
    assert snr_loss_db(0.0) == pytest.approx(3.0103, abs=1e-3)


def test_required_preamp_gain_by_hand():
    # Worked by hand from Friis (Pozar 4th ed. eq. 10.23) for preamp (Fp, Gp) ahead of a
    # cable of loss L (F = L, G = 1/L, §10.2) and a receiver Frx:
    #   F = Fp + (L − 1)/Gp + (Frx − 1)·L/Gp = Fp + (L·Frx − 1)/Gp.
    # A margin m needs F − 1 = ext/10^(m/10), so Gp = (L·Frx − 1)/(ext/10^(m/10) − (Fp − 1)).
    # Numbers: rural at 1.83 MHz, Fam = 67.2 − 27.7·log10(1.83) = 59.93 dB (P.372 Table 1);
    # η = −42 dB; ext = η·fa + (1 − η) = 63.09; L = 1.5 dB, Frx = 12 dB, Fp = 3 dB:
    # Gp = (1.4125·15.849 − 1)/(6.309 − 0.9953) = 4.025 -> 6.05 dB.
    chain = ReceiveChain(receiver_nf_db=12.0, cable_loss_db=1.5, preamp_nf_db=3.0,
                         preamp_at="antenna")
    fam = 67.2 - 27.7 * math.log10(1.83)
    eta = 10 ** (-4.2)
    ext = eta * 10 ** (fam / 10) + (1 - eta)
    assert antenna_noise_kt0(external_noise_figure_db(1.83e6, "rural"), -42.0) == \
        pytest.approx(ext, rel=1e-12)
    big_l, frx, fp = 10 ** 0.15, 10 ** 1.2, 10 ** 0.3
    gp = (big_l * frx - 1) / (ext / 10.0 - (fp - 1))
    assert required_preamp_gain_db(chain, ext, 10.0) == pytest.approx(10 * math.log10(gp), abs=1e-9)
    assert 10 * math.log10(gp) == pytest.approx(6.05, abs=0.01)
    # the same chain with the preamp in the shack: F = L + L(Fp − 1) + L(Frx − 1)/Gp
    shack = ReceiveChain(receiver_nf_db=12.0, cable_loss_db=1.5, preamp_nf_db=3.0,
                         preamp_at="shack")
    gp_shack = big_l * (frx - 1) / (ext / 10.0 - (big_l - 1) - big_l * (fp - 1))
    assert required_preamp_gain_db(shack, ext, 10.0) == pytest.approx(
        10 * math.log10(gp_shack), abs=1e-9)


@pytest.mark.parametrize("category, f_mhz, eta_db, rx_nf_db", [
    ("galactic", 14.0, -25.0, 8.0),     # both noise terms of the same size
    ("quiet-rural", 3.6, -40.0, 6.0),   # thermal part of the loss dominant
    ("residential", 7.1, -35.0, 10.0),  # ambient ahead
])
def test_noise_efficiency_mixing_at_interior_values(category, f_mhz, eta_db, rx_nf_db):
    # By hand: ITU-R P.372 Table 1 gives Fam = c − d·log10(f_MHz); a loop of noise
    # efficiency η delivers η·fa of the ambient plus (1 − η) of thermal noise from its
    # own loss at T0 (Nyquist; the standard mixing of an antenna of radiation efficiency
    # η, Pozar 4th ed. §10.1 / Kraus "antenna temperature", from memory), in kT0b units.
    # The chain's own noise is F − 1 (Friis); the margin is their ratio and the SNR
    # loss 10·log10(1 + 10^(−m/10)) (common practice). Interior η: neither term vanishes.
    c, d = P372_TABLE1[category]
    fa = 10 ** ((c - d * math.log10(f_mhz)) / 10)
    eta = 10 ** (eta_db / 10)
    ext = eta * fa + (1 - eta)
    assert 0.2 < eta * fa / (1 - eta) < 50      # really interior
    assert antenna_noise_kt0(10 * math.log10(fa), eta_db) == pytest.approx(ext, rel=1e-12)
    chain = ReceiveChain(receiver_nf_db=rx_nf_db)
    b = noise_budget(f_mhz * 1e6, eta_db, chain, category, 500.0)
    internal = 10 ** (rx_nf_db / 10) - 1
    assert b.margin_db == pytest.approx(10 * math.log10(ext / internal), abs=1e-9)
    assert b.snr_loss_db == pytest.approx(10 * math.log10(1 + internal / ext), abs=1e-9)
    # referred powers: kT0b in 500 Hz is −204 + 27 dBW = −147 dBm (P.372 eq. 6)
    floor_dbm = -204.0 + 10 * math.log10(500.0) + 30.0
    assert b.external_dbm == pytest.approx(floor_dbm + 10 * math.log10(ext), abs=1e-9)
    assert b.internal_dbm == pytest.approx(floor_dbm + 10 * math.log10(internal), abs=1e-9)


def test_preamp_too_noisy_is_impossible():
    # with the preamp's own excess noise above the allowed floor no gain helps (Friis: F -> Fp)
    chain = ReceiveChain(receiver_nf_db=12.0, cable_loss_db=0.0, preamp_nf_db=8.0)
    ext = antenna_noise_kt0(external_noise_figure_db(1.83e6, "quiet-rural"), -50.0)
    assert required_preamp_gain_db(chain, ext, 10.0) is None
    b = noise_budget(1.83e6, -50.0, chain, NoiseCategory.QUIET_RURAL, 500.0)
    assert b.preamp_needed_db is None and b.notes


def test_lossless_antenna_sees_fa():
    # a lossless antenna delivers the ambient noise itself: eta = 1 -> fa (ITU-R P.372 §2 definition)
    assert antenna_noise_kt0(40.0, 0.0) == pytest.approx(1e4)
    # a fully lossy one (eta -> 0) is a matched resistor at T0: kT0b, i.e. 1 (Nyquist; common practice)
    assert antenna_noise_kt0(40.0, -300.0) == pytest.approx(1.0)


def test_bad_noise_keys_name_the_key():
    with pytest.raises(ConfigError, match="noise.category"):
        parse_noise({"category": "suburban"})
    with pytest.raises(ConfigError, match="noise.bandwith_hz"):
        parse_noise({"bandwith_hz": 500})
