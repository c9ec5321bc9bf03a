"""Feedline and feed-transformer transforms (closed-form, Pozar §2.3 and §2.7).

All impedances are complex ohms, lengths metres, frequencies hertz. Arrays broadcast.

The line model is a uniform TEM line with characteristic impedance ``z0_ohm``, velocity
factor ``vf`` and matched loss ``alpha`` given in dB per 100 m at a reference
frequency and scaled with the square root of frequency (conductor loss dominates coax
loss at HF; common practice).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

C0_M_PER_S = 299_792_458.0
NEPER_PER_DB = 1.0 / (20.0 / np.log(10.0))  # 1 dB = 0.1151 Np (amplitude)


@dataclass(frozen=True)
class Coax:
    """A coaxial line.

    Parameters
    ----------
    z0_ohm : float
        Characteristic impedance, ohms (taken as real: low-loss line).
    velocity_factor : float
        Phase velocity over c, e.g. 0.66 for solid polyethylene (common practice).
    loss_db_per_100m : float
        Matched loss in dB per 100 m at ``loss_ref_hz``.
    length_m : float
        Physical length, metres.
    loss_ref_hz : float
        Frequency at which ``loss_db_per_100m`` is specified, hertz.
    """

    z0_ohm: float
    velocity_factor: float
    loss_db_per_100m: float
    length_m: float
    loss_ref_hz: float = 10e6

    def gamma(self, freq_hz: np.ndarray | float) -> np.ndarray:
        """Propagation constant γ = α + jβ, per metre, at ``freq_hz``."""
        f = np.asarray(freq_hz, dtype=float)
        alpha = self.loss_db_per_100m / 100.0 * NEPER_PER_DB * np.sqrt(f / self.loss_ref_hz)
        beta = 2.0 * np.pi * f / (self.velocity_factor * C0_M_PER_S)
        return alpha + 1j * beta

    def input_impedance(self, z_load_ohm: np.ndarray | complex,
                        freq_hz: np.ndarray | float) -> np.ndarray:
        """Impedance looking into the line terminated in ``z_load_ohm`` (Pozar eq. 2.91 with loss)."""
        return line_input_impedance(z_load_ohm, self.z0_ohm, self.gamma(freq_hz) * self.length_m)

    def abcd(self, freq_hz: np.ndarray | float) -> np.ndarray:
        """ABCD matrix of the line, shape (..., 2, 2) (Pozar Table 4.1)."""
        gl = self.gamma(freq_hz) * self.length_m
        z0 = self.z0_ohm
        m = np.empty(np.shape(gl) + (2, 2), dtype=complex)
        m[..., 0, 0] = np.cosh(gl)
        m[..., 0, 1] = z0 * np.sinh(gl)
        m[..., 1, 0] = np.sinh(gl) / z0
        m[..., 1, 1] = np.cosh(gl)
        return m

    def matched_loss_db(self, freq_hz: np.ndarray | float) -> np.ndarray:
        """Matched loss of the whole length, dB."""
        return 20.0 * np.real(self.gamma(freq_hz)) * self.length_m / np.log(10.0)


def line_input_impedance(z_load_ohm: np.ndarray | complex, z0_ohm: float,
                         gamma_l: np.ndarray | complex) -> np.ndarray:
    """Zin = Z0 (ZL + Z0 tanh γl) / (Z0 + ZL tanh γl)  (Pozar §2.7).

    An infinite ``z_load_ohm`` (open) gives Z0 / tanh γl.
    """
    zl = np.asarray(z_load_ohm, dtype=complex)
    t = np.tanh(np.asarray(gamma_l, dtype=complex))
    with np.errstate(invalid="ignore", divide="ignore"):
        zin = z0_ohm * (zl + z0_ohm * t) / (z0_ohm + zl * t)
        zin_open = z0_ohm / t
    return np.where(np.isinf(zl), zin_open, zin)


def transformer_to_primary(z_secondary_ohm: np.ndarray | complex,
                           impedance_ratio: float) -> np.ndarray:
    """Ideal transformer: impedance seen at the antenna side for a load on the line side.

    ``impedance_ratio`` is antenna-side over line-side impedance (turns ratio squared),
    e.g. 9 for a 3:1 turns transformer feeding 50 Ω coax from a ~450 Ω loop.
    """
    return np.asarray(z_secondary_ohm, dtype=complex) * impedance_ratio


def transformer_to_secondary(z_primary_ohm: np.ndarray | complex,
                             impedance_ratio: float) -> np.ndarray:
    """Ideal transformer: impedance seen on the line side for a load on the antenna side."""
    return np.asarray(z_primary_ohm, dtype=complex) / impedance_ratio


def mismatch_loss_db(z_source_ohm: np.ndarray | complex,
                     z_load_ohm: np.ndarray | complex) -> np.ndarray:
    """Power lost by mismatch between a source and its load, dB (≥ 0).

    1 − |Γ|² with the power-wave reflection coefficient Γ = (ZL − Zs*) / (ZL + Zs).
    """
    zs = np.asarray(z_source_ohm, dtype=complex)
    zl = np.asarray(z_load_ohm, dtype=complex)
    gamma = (zl - np.conj(zs)) / (zl + zs)
    return -10.0 * np.log10(np.clip(1.0 - np.abs(gamma) ** 2, 1e-30, None))
