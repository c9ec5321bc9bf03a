"""Remote ladder through a second line: line transforms against scikit-rf and Pozar."""

import warnings

import numpy as np
import pytest

from nullsteer.antenna.feedline import C0_M_PER_S, Coax
from nullsteer.ladder import (LadderValues, Parasitics, RemoteSpec, evaluate, get_topology,
                              seen_termination_ohm, suggest_transformer_ratio)

skrf = pytest.importorskip("skrf")


def _design():
    v = LadderValues(10.0, (5.0, 10.0, 20.0, 40.0))
    return evaluate(get_topology("series-shorting"), v, 15, 80, 1.0, Parasitics(0.0, 0.0), "E24")


def test_quarter_wave_inverts_exactly():
    # Pozar §2.3: a lossless λ/4 line of 50 Ω into 100 Ω presents 25 Ω.
    f = 10e6
    coax = Coax(50.0, 0.66, 0.0, 0.25 * 0.66 * C0_M_PER_S / f)
    assert coax.input_impedance(100.0, f) == pytest.approx(25.0, abs=1e-9)


def test_seen_termination_matches_scikit_rf():
    # scikit-rf's DefinedGammaZ0 line cascaded with a load is an independent
    # implementation; its propagation constant is built here from the definitions
    # (Pozar §2.7: α = (dB/m)/(20·log10 e), scaled with √(f/10 MHz) as the coax model
    # states; β = 2πf/(VF·c)), not taken from the project's Coax.gamma.
    d = _design()
    coax = Coax(50.0, 0.66, 4.0, 37.0)
    remote = RemoteSpec(9.0, coax)
    f = np.array([1.8e6, 3.6e6, 7.1e6, 14.2e6])
    seen = seen_termination_ohm(d, remote, f)
    freq = skrf.Frequency.from_f(f, unit="Hz")
    alpha = 4.0 / 100.0 / (20.0 * np.log10(np.e)) * np.sqrt(f / 10e6)
    gamma = alpha + 1j * 2 * np.pi * f / (0.66 * C0_M_PER_S)
    media = skrf.media.DefinedGammaZ0(frequency=freq, z0=50.0, gamma=gamma)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for i, s in enumerate(d.settings):
            gl = (s.ohms - 50.0) / (s.ohms + 50.0)
            zin = (media.line(37.0, "m") ** media.load(gl)).z[:, 0, 0]
            assert seen[i] == pytest.approx(9.0 * zin, rel=1e-9)


def test_matched_line_passes_the_value_through():
    # A lossless line terminated in Z0 presents Z0 at any length (Pozar §2.3).
    v = LadderValues(50.0, (1.0,))
    d = evaluate(get_topology("series-shorting"), v, 40, 60, 1.0, Parasitics(0.0, 0.0), "E24")
    seen = seen_termination_ohm(d, RemoteSpec(16.0, Coax(50.0, 0.8, 0.0, 23.0)), [2e6, 5e6])
    assert seen[0] == pytest.approx(16 * 50.0, rel=1e-12)


def test_suggested_ratio_centres_the_range_on_z0():
    s = suggest_transformer_ratio(400.0, 1600.0, 50.0)
    assert s["exact_ratio"] == pytest.approx(16.0)
    assert s["ratio"] == 16.0 and s["turns"] == 4.0   # nearest practical winding
