"""The receive chain (receiver ← coax ← transformer ← loop) against outside values.

Sources:

* Pozar, *Microwave Engineering*, 4th ed., §2.7 (attenuation in dB and nepers: a matched
  line of loss L dB passes 10^(−L/10) of the power; 1 Np = 20·log10(e) dB ≈ 8.686 dB),
  §2.3 (λ/4 transformer Zin = Z0²/ZL), §12.1 (two-port power gains: the transducer gain
  G_T = P_L/P_avs and its S-parameter form; section and equation numbers from memory).
* scikit-rf (test-only), an independent transmission-line implementation; the
  propagation constant handed to it is built here from the dB-per-length definition,
  never from the project's ``Coax.gamma``.

The attenuation is written out in this file from its definition so that a wrong dB→neper
factor in the project cannot cancel against itself.
"""

import math
import warnings

import numpy as np
import pytest

from nullsteer.antenna.feedline import Coax, mismatch_loss_db
from nullsteer.antenna.ports import transducer_gain
from nullsteer.antenna.specs import FeedSpec

skrf = pytest.importorskip("skrf")

C = 299_792_458.0  # m/s, SI definition


def alpha_np_per_m(db_per_100m: float, f_hz, ref_hz: float):
    """Amplitude attenuation from the dB definition: L_dB = 20·log10(e^(αl)) (Pozar §2.7),
    scaled with √f as the coax model states (conductor loss, common practice)."""
    return db_per_100m / 100.0 / (20.0 * math.log10(math.e)) * np.sqrt(np.asarray(f_hz) / ref_hz)


def independent_gamma(db_per_100m, vf, f_hz, ref_hz):
    return alpha_np_per_m(db_per_100m, f_hz, ref_hz) + 1j * 2 * np.pi * np.asarray(f_hz) / (vf * C)


def pozar_transducer_gain(s: np.ndarray, gs: complex, gl: complex) -> float:
    """G_T of a two-port with source and load reflection coefficients (Pozar §12.1)."""
    s11, s12, s21, s22 = s[0, 0], s[0, 1], s[1, 0], s[1, 1]
    den = (1 - s11 * gs) * (1 - s22 * gl) - s12 * s21 * gs * gl
    return float(abs(s21) ** 2 * (1 - abs(gs) ** 2) * (1 - abs(gl) ** 2) / abs(den) ** 2)


def test_quarter_wave_worked_case_is_eight_ninths():
    # Worked by hand: 900 Ω antenna, 9:1 ideal transformer -> 100 Ω on the line side; a
    # lossless λ/4 of 50 Ω inverts it to 50²/100 = 25 Ω (Pozar §2.3); a 50 Ω receiver
    # then takes P_L/P_avs = 4·Rs·R/(Rs + R)² = 4·50·25/75² = 8/9 (Pozar §12.1, the
    # conjugate-mismatch factor 1 − |Γ|², Γ = (25 − 50)/(25 + 50) = −1/3). Exact case.
    f = 7.0e6
    quarter = 0.25 * 0.66 * C / f
    feed = FeedSpec(transformer_ratio=9.0, receiver_ohm=50.0,
                    coax=Coax(50.0, 0.66, 0.0, quarter, loss_ref_hz=f))
    g = transducer_gain(np.array([900.0 + 0j]), feed, np.array([f]))
    assert float(g[0]) == pytest.approx(8.0 / 9.0, rel=1e-9)
    # no coax: 900/9 = 100 Ω into 50 Ω, Γ = 1/3 -> again 8/9; 450 Ω is matched -> 1
    plain = FeedSpec(transformer_ratio=9.0, receiver_ohm=50.0)
    assert float(transducer_gain(np.array([900.0 + 0j]), plain, np.array([f]))[0]) == \
        pytest.approx(8.0 / 9.0, rel=1e-12)
    assert float(transducer_gain(np.array([450.0 + 0j]), plain, np.array([f]))[0]) == \
        pytest.approx(1.0, rel=1e-12)


def test_mismatch_loss_of_the_worked_case():
    # 1 − |Γ|² = 8/9 for 25 Ω into 50 Ω (Pozar §2.3 / §12.1): 0.5115 dB.
    assert float(mismatch_loss_db(50.0, 25.0)) == pytest.approx(-10 * math.log10(8 / 9), rel=1e-12)


@pytest.mark.parametrize("zs, zl", [(50 + 25j, 50.0), (30 + 40j, 120 - 10j), (300 - 200j, 75.0)])
def test_mismatch_loss_with_a_complex_source(zs, zl):
    # Power delivered over power available (Pozar §2.6, §12.1): 4·Rs·RL / |Zs + ZL|²,
    # by hand; a conjugate match (ZL = Zs*) delivers all of it.
    want = 4 * zs.real * complex(zl).real / abs(zs + zl) ** 2
    assert float(mismatch_loss_db(zs, zl)) == pytest.approx(-10 * math.log10(want), rel=1e-12)
    assert float(mismatch_loss_db(zs, np.conj(zs))) == pytest.approx(0.0, abs=1e-12)


@pytest.mark.parametrize("loss_db_per_100m, length_m, f_hz", [
    (2.0, 30.0, 3.6e6), (5.0, 80.0, 14.0e6), (0.8, 150.0, 1.83e6)])
def test_matched_coax_passes_its_db_per_length(loss_db_per_100m, length_m, f_hz):
    # Definition (Pozar §2.7): a matched line of loss L dB delivers 10^(−L/10) of the
    # available power; L = (dB/100 m)·(l/100 m)·√(f/f_ref) by the model's stated scaling.
    ref = 10e6
    coax = Coax(50.0, 0.78, loss_db_per_100m, length_m, loss_ref_hz=ref)
    want_db = loss_db_per_100m * length_m / 100.0 * math.sqrt(f_hz / ref)
    assert float(coax.matched_loss_db(f_hz)) == pytest.approx(want_db, rel=1e-12)
    feed = FeedSpec(transformer_ratio=9.0, receiver_ohm=50.0, coax=coax)
    g = float(transducer_gain(np.array([450.0 + 0j]), feed, np.array([f_hz]))[0])
    assert g == pytest.approx(10 ** (-want_db / 10), rel=1e-9)
    # the line's own α against the definition written out above
    assert float(np.real(coax.gamma(f_hz))) == pytest.approx(
        float(alpha_np_per_m(loss_db_per_100m, f_hz, ref)), rel=1e-12)


def test_scikit_rf_line_loss_from_the_definition():
    # scikit-rf's matched line with α given independently: |S21|² in dB is −L.
    f = np.array([1.83e6, 3.6e6, 7.1e6])
    freq = skrf.Frequency.from_f(f, unit="Hz")
    media = skrf.media.DefinedGammaZ0(frequency=freq, z0=50.0,
                                      gamma=independent_gamma(3.0, 0.66, f, 10e6))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        s21 = media.line(60.0, "m").s[:, 1, 0]
    assert 20 * np.log10(np.abs(s21)) == pytest.approx(
        -3.0 * 0.6 * np.sqrt(f / 10e6), rel=1e-9)


@pytest.mark.parametrize("z_ant, rx_ohm", [
    (950.0 - 310.0j, 50.0), (180.0 + 420.0j, 50.0), (2200.0 + 0j, 75.0), (60.0 - 20.0j, 50.0)])
def test_lossy_mismatched_chain_against_scikit_rf_and_pozar(z_ant, rx_ohm):
    # Independent path: scikit-rf builds the lossy coax (γ from the dB definition), the
    # ideal transformer maps the antenna to Z/n² on the line side (lossless, so the power
    # into Z/n² is the power into the antenna), and Pozar's G_T formula (§12.1) with the
    # receiver as the source (Γ_S against 50 Ω) and that load gives P_L/P_avs.
    f = np.array([1.83e6, 3.55e6, 7.1e6, 10.1e6])
    ratio, length, db100, vf = 9.0, 45.0, 4.0, 0.66
    feed = FeedSpec(transformer_ratio=ratio, receiver_ohm=rx_ohm,
                    coax=Coax(50.0, vf, db100, length, loss_ref_hz=10e6))
    got = transducer_gain(np.full(f.shape, z_ant, complex), feed, f)
    freq = skrf.Frequency.from_f(f, unit="Hz")
    media = skrf.media.DefinedGammaZ0(frequency=freq, z0=50.0,
                                      gamma=independent_gamma(db100, vf, f, 10e6))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        s = media.line(length, "m").s
    zl = z_ant / ratio
    gl = (zl - 50.0) / (zl + 50.0)
    gs = (rx_ohm - 50.0) / (rx_ohm + 50.0)
    want = [pozar_transducer_gain(s[i], gs, gl) for i in range(len(f))]
    assert got == pytest.approx(want, rel=1e-9)
    # passivity: a passive chain never delivers more than is available
    assert np.all(got <= 1.0)


def test_open_antenna_takes_no_power():
    # An open circuit absorbs nothing (definition of power delivered, Pozar §2.3).
    feed = FeedSpec(coax=Coax(50.0, 0.66, 3.0, 20.0))
    assert float(transducer_gain(np.array([np.inf + 0j]), feed, np.array([3.6e6]))[0]) == 0.0
