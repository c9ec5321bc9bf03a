"""Levels from complex IQ samples: Welch-averaged periodogram, carrier and channel modes.

The estimator follows Heinzel, Rüdiger and Schilling, "Spectrum and spectral density
estimation by the Discrete Fourier Transform (DFT)" (2002): segments of ``N`` samples
with 50 % overlap, each multiplied by a periodic ("DFT-even") Hann window ``w``, with

* ``S1 = sum(w)``, ``S2 = sum(w**2)`` (their eq. 19, 20);
* power spectral density ``PSD_k = |X_k|**2 / (fs * S2)`` (eq. 24; two-sided, since IQ
  samples are complex there is no folding of negative frequencies);
* equivalent noise bandwidth ``ENBW = fs * S2 / S1**2`` (eq. 22), 1.5 bins for Hann.

The power in a band is the sum of ``PSD_k * fs / N`` over the bins whose centres lie
in it: for white noise of density ``N0`` that is ``N0 * B``, and for a tone of power
``A**2`` the sum over its main lobe (plus leakage) is ``A**2`` by Parseval's theorem,
whatever the window. So one sum serves both modes:

``carrier``
    a narrow window of +-3 bins (the Hann main lobe is +-2 bins) around the tuned
    offset: the carrier's power with the noise of about 7 bins, an RBW of ``ENBW``;
``channel``
    every bin within +-bandwidth/2 of the tuned offset: the total power in a channel.

Levels are in dBFS: 0 dBFS is a complex tone of amplitude 1 (``|I + jQ| = 1``) after
the samples are scaled to +-1 full scale (common practice in SDR software).

The spread of a reading comes from the segment-to-segment scatter of the band power,
divided by the number of segments and widened for the correlation of 50 %-overlapped
Hann segments (variance factor ``1 + 2 c**2`` with ``c = 0.167``, the overlap
correlation of Hann at 50 % listed by Heinzel et al. 2002, Table 1; Welch 1967).
"""

from __future__ import annotations

import math
from functools import lru_cache
from dataclasses import dataclass
from enum import Enum

import numpy as np

from nullsteer.errors import ConfigError

#: Overlap correlation of the Hann window at 50 % overlap (Heinzel et al. 2002, Table 1).
HANN_OVERLAP_CORRELATION = 0.167
#: Bins either side of the offset summed in carrier mode.
CARRIER_HALF_BINS = 3
_TINY = 1e-30  # floor for logarithms of empty bands: -300 dB, never -inf in output


class Mode(str, Enum):
    """What the level covers."""

    CARRIER = "carrier"
    CHANNEL = "channel"


@lru_cache(maxsize=8)
def _hann(n: int) -> np.ndarray:
    k = np.arange(n)
    w = 0.5 - 0.5 * np.cos(2.0 * np.pi * k / n)
    w.setflags(write=False)
    return w


def hann_periodic(n: int) -> np.ndarray:
    """The DFT-even Hann window of ``n`` points (Heinzel et al. 2002, Appendix C.1)."""
    return _hann(int(n))


def segment_length(rate_hz: float, rbw_hz: float) -> int:
    """Power-of-two segment length whose Hann ENBW (1.5 fs/N) is at most ``rbw_hz``."""
    need = 1.5 * rate_hz / rbw_hz
    return 1 << max(4, math.ceil(math.log2(max(need, 1.0))))


@dataclass(frozen=True)
class Welch:
    """Averaged PSD of one block of samples.

    Attributes
    ----------
    freqs_hz : ndarray
        Bin centres relative to the centre frequency, ascending, hertz.
    segments_psd : ndarray
        ``(K, N)`` PSD of each segment, full-scale^2 per hertz (fftshifted).
    rate_hz : float
        Sample rate.
    enbw_hz : float
        Equivalent noise bandwidth of one bin.
    """

    freqs_hz: np.ndarray
    segments_psd: np.ndarray
    rate_hz: float
    enbw_hz: float

    @property
    def psd(self) -> np.ndarray:
        """The Welch average, full-scale^2 per hertz."""
        return self.segments_psd.mean(axis=0)  # type: ignore[no-any-return]

    @property
    def bin_hz(self) -> float:
        return self.rate_hz / self.segments_psd.shape[1]


def welch(samples: np.ndarray, rate_hz: float, nperseg: int) -> Welch:
    """Welch's method on complex ``samples`` (Hann, 50 % overlap, no detrending)."""
    x = np.asarray(samples, dtype=np.complex128)  # one upcast, not one per segment
    n = int(nperseg)
    if n < 16 or len(x) < n:
        raise ConfigError("--receiver", f"a reading of {len(x)} samples is shorter than one "
                                        f"segment of {n} (raise duration_s or rbw_hz)")
    step = n // 2
    count = (len(x) - n) // step + 1
    w = hann_periodic(n)
    s2 = float(np.sum(w * w))
    s1 = float(np.sum(w))
    segments = np.lib.stride_tricks.sliding_window_view(x[:(count - 1) * step + n], n)[::step]
    spec = np.fft.fft(segments * w, axis=1)
    power = spec.real ** 2
    power += spec.imag ** 2
    power *= 1.0 / (rate_hz * s2)
    psd = np.fft.fftshift(power, axes=1)
    freqs = np.fft.fftshift(np.fft.fftfreq(n, 1.0 / rate_hz))
    return Welch(freqs, psd, rate_hz, rate_hz * s2 / (s1 * s1))


def band_mask(w: Welch, offset_hz: float, mode: Mode, bandwidth_hz: float) -> np.ndarray:
    """Boolean mask of the bins a level sums."""
    if mode is Mode.CARRIER:
        k0 = int(np.argmin(np.abs(w.freqs_hz - offset_hz)))
        k = np.arange(len(w.freqs_hz))
        return np.abs(k - k0) <= CARRIER_HALF_BINS
    half = bandwidth_hz / 2.0
    sel = np.abs(w.freqs_hz - offset_hz) <= half
    if not sel.any():
        raise ConfigError("--bandwidth", f"{bandwidth_hz:g} Hz is narrower than one bin "
                                         f"({w.bin_hz:.3g} Hz)")
    return sel  # type: ignore[no-any-return]


def band_level(w: Welch, offset_hz: float, mode: Mode, bandwidth_hz: float
               ) -> tuple[float, float]:
    """(level dBFS, spread dB) of the power in the band."""
    if abs(offset_hz) > w.rate_hz / 2.0:
        raise ConfigError("--freq", f"offset {offset_hz:g} Hz lies outside the "
                                    f"{w.rate_hz:g} S/s band")
    sel = band_mask(w, offset_hz, mode, bandwidth_hz)
    per_segment = w.segments_psd[:, sel].sum(axis=1) * w.bin_hz
    mean = float(per_segment.mean())
    k = len(per_segment)
    if k >= 2 and mean > 0:
        rel = float(np.std(per_segment, ddof=1)) / mean
        rel *= math.sqrt((1.0 + 2.0 * HANN_OVERLAP_CORRELATION ** 2) / k)
    else:
        rel = 1.0  # one segment: no scatter to judge from; about 1 in 1 (chi-square, 2 dof)
    level = 10.0 * math.log10(max(mean, _TINY))
    spread = 10.0 / math.log(10.0) * math.log1p(min(rel, 10.0))
    return level, spread


def u8_to_complex(raw: bytes | np.ndarray) -> np.ndarray:
    """Interleaved unsigned 8-bit I/Q (centre 127.5) to complex samples of +-1 full scale."""
    a = np.frombuffer(raw, dtype=np.uint8) if isinstance(raw, (bytes, bytearray, memoryview)) \
        else np.asarray(raw, dtype=np.uint8)
    if len(a) % 2:
        a = a[:-1]
    f = a.astype(np.float32)
    f -= 127.5
    f *= 1.0 / 127.5
    return f[0::2] + 1j * f[1::2]


def s16_to_complex(raw: bytes) -> np.ndarray:
    """Interleaved signed 16-bit little-endian I/Q to complex samples of +-1 full scale."""
    a = np.frombuffer(raw, dtype="<i2").astype(np.float32) / 32768.0
    if len(a) % 2:
        a = a[:-1]
    return a[0::2] + 1j * a[1::2]
