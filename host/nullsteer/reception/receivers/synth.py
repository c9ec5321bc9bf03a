"""Synthetic IQ for the stand-ins: tones plus white Gaussian noise, quantised to u8.

Power is in full-scale units (FS^2: a complex tone of amplitude 1 has power 1, 0 dBFS);
the 8-bit quantiser rounds ``127.5 + 127.5 * x`` to 0..255 (clipping at full scale), as
the RTL2832's output is interleaved u8 I/Q centred on 127.5.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np


@dataclass
class IqSynth:
    """A continuous stream of synthetic IQ; tone phases carry over between blocks.

    Parameters
    ----------
    rate_hz : float
        Sample rate.
    seed : int
        Noise seed.
    """

    rate_hz: float
    seed: int = 1
    rng: np.random.Generator = field(init=False)
    _n0: int = field(default=0, init=False)

    def __post_init__(self) -> None:
        self.rng = np.random.default_rng(self.seed)

    def block(self, count: int, tones: Sequence[tuple[float, float]],
              noise_fs2_per_hz: float) -> np.ndarray:
        """``count`` complex samples: ``tones`` as (offset Hz, power FS^2) plus noise of
        density ``noise_fs2_per_hz`` (two-sided, FS^2/Hz)."""
        t = (self._n0 + np.arange(count)) / self.rate_hz
        self._n0 += count
        sigma = np.sqrt(max(noise_fs2_per_hz, 0.0) * self.rate_hz / 2.0)
        x = sigma * (self.rng.standard_normal(count) + 1j * self.rng.standard_normal(count))
        for offset_hz, power in tones:
            x += np.sqrt(max(power, 0.0)) * np.exp(2j * np.pi * offset_hz * t)
        return x  # type: ignore[no-any-return]


def quantise_u8(x: np.ndarray) -> bytes:
    """Complex samples of +-1 full scale as interleaved u8 I/Q (rtl_tcp's format)."""
    out = np.empty(2 * len(x), dtype=np.float64)
    out[0::2], out[1::2] = x.real, x.imag
    return np.clip(np.round(127.5 + 127.5 * out), 0, 255).astype(np.uint8).tobytes()
