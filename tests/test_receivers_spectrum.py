"""Welch levels from IQ against closed-form values (and scipy.signal.welch when installed).

Sources:
* Heinzel, Rüdiger, Schilling, "Spectrum and spectral density estimation by the DFT"
  (2002): Hann window NENBW = 1.5 bins (their Table 1 / Appendix C.1); PSD scaling
  |X|^2 / (fs S2) (eq. 24); a tone's power is the sum of its PSD bins times the bin width
  (Parseval's theorem);
* white complex Gaussian noise of variance sigma^2 has two-sided density sigma^2 / fs;
* rounding to a step q adds uniform noise of variance q^2 / 12 per real component
  (Widrow's quantisation model; common practice);
* the scatter of independent repeated readings, against the spread each reading claims.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from nullsteer.errors import ConfigError
from nullsteer.reception.receivers.spectrum import (Mode, band_level, hann_periodic, u8_to_complex,
                                                    welch)

FS = 240_000.0
N = 4096


def tone(amplitude: float, freq_hz: float, n: int, phase: float = 0.3) -> np.ndarray:
    t = np.arange(n) / FS
    return amplitude * np.exp(1j * (2 * np.pi * freq_hz * t + phase))


def noise(sigma2: float, n: int, seed: int) -> np.ndarray:
    rng = np.random.default_rng(seed)
    return math.sqrt(sigma2 / 2) * (rng.standard_normal(n) + 1j * rng.standard_normal(n))


def test_hann_enbw_is_one_and_a_half_bins():
    # Heinzel et al. 2002, Table 1: Hann NENBW = 1.5000 bins
    w = welch(np.zeros(4 * N, complex), FS, N)
    assert w.enbw_hz / w.bin_hz == pytest.approx(1.5, abs=1e-9)
    # DFT-even Hann: w[0] = 0, w[N/2] = 1 (Heinzel et al. 2002, Appendix C.1)
    h = hann_periodic(8)
    assert h[0] == 0.0 and h[4] == pytest.approx(1.0)


@pytest.mark.parametrize("amp_dbfs, bin_offset", [(-6.0, 0.0), (-20.0, 0.5), (-40.0, 0.25)])
def test_carrier_level_is_the_tone_power(amp_dbfs, bin_offset):
    # a complex tone of amplitude A has power A^2: 20 log10(A) dBFS, on or between bins
    a = 10 ** (amp_dbfs / 20)
    f = (300 + bin_offset) * FS / N
    level, spread = band_level(welch(tone(a, f, 20 * N), FS, N), f, Mode.CARRIER, 0.0)
    assert level == pytest.approx(amp_dbfs, abs=0.02)
    assert spread < 0.01  # a steady tone scatters nothing between segments


def test_noise_density_and_channel_power():
    sigma2 = 1e-3  # -30 dBFS of noise over the whole band
    w = welch(noise(sigma2, 400 * N, seed=3), FS, N)
    # density sigma^2 / fs, averaged over all bins (sampling scatter ~ 1/sqrt(K N))
    assert np.mean(w.psd) == pytest.approx(sigma2 / FS, rel=0.01)
    b = 12_000.0
    level, spread = band_level(w, 0.0, Mode.CHANNEL, b)
    nbins = int(np.sum(np.abs(w.freqs_hz) <= b / 2))
    expect = 10 * math.log10(sigma2 / FS * nbins * w.bin_hz)
    assert level == pytest.approx(expect, abs=3 * spread + 0.02)
    assert abs(nbins * w.bin_hz - b) <= w.bin_hz  # the bins span the asked bandwidth


def test_tone_plus_noise_in_a_channel_adds_in_power():
    a2, sigma2 = 1e-2, 1e-3
    f = 5_000.0
    x = tone(math.sqrt(a2), f, 200 * N) + noise(sigma2, 200 * N, seed=5)
    w = welch(x, FS, N)
    b = 2_400.0
    level, _ = band_level(w, f, Mode.CHANNEL, b)
    nbins = int(np.sum(np.abs(w.freqs_hz - f) <= b / 2))
    expect = 10 * math.log10(a2 + sigma2 / FS * nbins * w.bin_hz)
    assert level == pytest.approx(expect, abs=0.05)


def test_u8_quantisation_noise_floor():
    # a quiet input quantised to u8: q = 1/127.5 full scale, variance q^2/12 per component
    rng = np.random.default_rng(11)
    sigma2 = (3 / 127.5) ** 2  # a few LSB of noise, as a dongle's own noise
    x = math.sqrt(sigma2 / 2) * (rng.standard_normal(200 * N) + 1j * rng.standard_normal(200 * N))
    inter = np.empty(2 * len(x))
    inter[0::2], inter[1::2] = x.real, x.imag
    raw = np.clip(np.round(127.5 + 127.5 * inter), 0, 255).astype(np.uint8).tobytes()
    w = welch(u8_to_complex(raw), FS, N)
    q = 1 / 127.5
    assert np.mean(w.psd) == pytest.approx((sigma2 + 2 * q * q / 12) / FS, rel=0.02)


def test_u8_scaling_centre_and_full_scale():
    # rtl_tcp's u8 I/Q centre is 127.5 (common practice): 0 and 255 are -1 and +1
    z = u8_to_complex(bytes([0, 255, 255, 0]))
    assert z[0] == pytest.approx(-1 + 1j) and z[1] == pytest.approx(1 - 1j)


def test_claimed_spread_matches_the_scatter_of_repeated_readings():
    levels, spreads = [], []
    for seed in range(150):
        w = welch(noise(1e-3, 12 * N, seed=100 + seed), FS, N)
        lv, sp = band_level(w, 0.0, Mode.CHANNEL, 2_000.0)
        levels.append(lv)
        spreads.append(sp)
    ratio = float(np.std(levels, ddof=1)) / float(np.mean(spreads))
    assert 0.7 < ratio < 1.3, ratio


def test_matches_scipy_welch_when_installed():
    signal = pytest.importorskip("scipy.signal")
    x = tone(0.1, 12_345.0, 30 * N) + noise(1e-4, 30 * N, seed=2)
    f, p = signal.welch(x, FS, window="hann", nperseg=N, noverlap=N // 2, detrend=False,
                        return_onesided=False, scaling="density")
    w = welch(x, FS, N)
    assert np.allclose(np.fft.fftshift(p), w.psd, rtol=1e-9, atol=0)
    assert np.allclose(np.fft.fftshift(f), w.freqs_hz)


def test_short_blocks_and_bad_bands_are_config_errors():
    with pytest.raises(ConfigError, match="shorter than one segment"):
        welch(np.zeros(100, complex), FS, N)
    w = welch(np.zeros(4 * N, complex), FS, N)
    with pytest.raises(ConfigError, match="narrower than one bin"):
        band_level(w, w.bin_hz / 2, Mode.CHANNEL, 1.0)
    with pytest.raises(ConfigError, match="outside"):
        band_level(w, FS, Mode.CARRIER, 0.0)
    # an empty band reads a finite floor, never -inf
    level, _ = band_level(w, 0.0, Mode.CARRIER, 0.0)
    assert math.isfinite(level)
