"""Ground models: complex permittivity, Fresnel reflection, near-field image.

Far field (space wave): the direct ray plus the ray reflected at the ground, weighted by
the plane-wave Fresnel coefficients (Balanis §4.8), with the complex relative permittivity
εc = εr − j·60·σ·λ (λ in metres). The surface wave is not modelled, so the field of a real
ground vanishes at zero elevation.

Near field (the MoM kernel): a perfect ground is the exact image (reflected wires with
the current direction mirrored, Balanis §4.7). A real ground uses two approximate images:
the horizontal currents' image is the perfect-ground image sunk to a complex depth, the
image of a point at height h sitting at −(h + 2p) with p = 1 / (j·k0·√(εc − 1)) (complex
image method for a finitely conducting half-space, Wait / Bannister; from memory; for a
good conductor 2p = δ(1 − j), δ the skin depth). The vertical currents and the charges use
the quasi-static image of a dielectric half-space, coefficient K = (εc − 1)/(εc + 1) at the
mirror point (electrostatic image; common practice). Both become the perfect-ground
image when σ → ∞, and both are passive (they add loss, never gain). Validity limits (stated, not enforced): |εc| ≳ 10, wire
heights at least a few wire radii and ≳ 0.001 λ, and loops within about λ/2 of the ground
where the real ground matters most for the currents; the coupling to the ground is then
good to a few per cent in impedance, while patterns are set by the Fresnel far field.
"""

from __future__ import annotations

import numpy as np

from nullsteer.antenna.feedline import C0_M_PER_S
from nullsteer.antenna.specs import GroundKind, GroundSpec


def complex_permittivity(permittivity: float, conductivity_s_per_m: float,
                         freq_hz: np.ndarray | float) -> np.ndarray:
    """εc = εr − j·60·σ·λ, λ in metres (time dependence e^{+jωt}; Balanis §4.8)."""
    lam = C0_M_PER_S / np.asarray(freq_hz, dtype=float)
    return permittivity - 1j * 60.0 * conductivity_s_per_m * lam


def fresnel(eps_c: np.ndarray | complex, grazing_rad: np.ndarray | float
            ) -> tuple[np.ndarray, np.ndarray]:
    """Plane-wave reflection coefficients (Rv, Rh) at grazing angle ψ (Balanis §4.8).

    Rv = (εc·sinψ − √(εc − cos²ψ)) / (εc·sinψ + √(εc − cos²ψ)) for vertical (TM)
    polarisation and Rh = (sinψ − √(εc − cos²ψ)) / (sinψ + √(εc − cos²ψ)) for
    horizontal (TE). An infinite εc gives the perfect-ground values Rv = +1, Rh = −1.
    """
    eps = np.asarray(eps_c, dtype=complex)
    s = np.sin(np.asarray(grazing_rad, dtype=float))
    root = np.sqrt(eps - np.cos(np.asarray(grazing_rad, dtype=float)) ** 2)
    rv = (eps * s - root) / (eps * s + root)
    rh = (s - root) / (s + root)
    return rv, rh


def reflection_coefficients(ground: GroundSpec, freq_hz: np.ndarray | float,
                            grazing_rad: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(Rv, Rh) for the ground kind: zeros in free space, (+1, −1) over perfect ground.

    ``freq_hz`` and ``grazing_rad`` broadcast together (e.g. (F, 1) against (D,)).
    """
    g = np.asarray(grazing_rad, dtype=float)
    shape = np.broadcast_shapes(np.shape(freq_hz), g.shape)
    if ground.kind is GroundKind.FREE:
        return np.zeros(shape, complex), np.zeros(shape, complex)
    if ground.kind is GroundKind.PERFECT:
        return np.ones(shape, complex), -np.ones(shape, complex)
    eps = complex_permittivity(ground.permittivity, ground.conductivity_s_per_m, freq_hz)
    return fresnel(eps, g)


def image_depth_shift_m(ground: GroundSpec, freq_hz: float) -> complex:
    """Extra depth 2p of the near-field image below the mirror point, metres (complex).

    0 for a perfect ground; 2 / (j·k0·√(εc − 1)) for a real ground (see module docstring).
    """
    if ground.kind is not GroundKind.REAL:
        return 0j
    k0 = 2.0 * np.pi * freq_hz / C0_M_PER_S
    eps = complex_permittivity(ground.permittivity, ground.conductivity_s_per_m, freq_hz)
    root = np.sqrt(eps - 1.0)
    if root.real < 0:
        root = -root
    return complex(2.0 / (1j * k0 * root))


def quasi_static_image_coefficient(ground: GroundSpec, freq_hz: float) -> complex:
    """K = (εc − 1)/(εc + 1) for real ground, 1 for perfect ground, 0 in free space."""
    if ground.kind is GroundKind.FREE:
        return 0j
    if ground.kind is GroundKind.PERFECT:
        return 1.0 + 0j
    eps = complex_permittivity(ground.permittivity, ground.conductivity_s_per_m, freq_hz)
    return complex((eps - 1.0) / (eps + 1.0))


def is_air(ground: GroundSpec) -> bool:
    """True for free space, or for a "real" ground with εr = 1 and σ = 0 (no interface)."""
    return ground.kind is GroundKind.FREE or (
        ground.kind is GroundKind.REAL and ground.permittivity == 1.0
        and ground.conductivity_s_per_m == 0.0)


def dwight_rod_ohm(conductivity_s_per_m: float, length_m: float, diameter_m: float) -> float:
    """Resistance of one driven vertical rod to remote earth, ohms (inf for σ = 0).

    Dwight, "Calculation of resistances to ground", AIEE Transactions 55 (1936):
    R = ρ/(2πL)·(ln(4L/a) − 1), ρ = 1/σ the soil resistivity, L the rod length, a its
    radius.
    """
    if conductivity_s_per_m <= 0.0:
        return float("inf")
    a = diameter_m / 2.0
    return float((np.log(4.0 * length_m / a) - 1.0) / (2.0 * np.pi * length_m
                                                        * conductivity_s_per_m))


def near_field_warnings(ground: GroundSpec, freqs_hz: np.ndarray, lowest_m: float
                        ) -> list[str]:
    """Where the approximate near-field images of a real ground are outside their stated
    validity (module docstring): |εc| < 10, or a wire lower than 0.001 λ."""
    if ground.kind is not GroundKind.REAL or is_air(ground):
        return []
    f = np.asarray(freqs_hz, float)
    eps = np.abs(complex_permittivity(ground.permittivity, ground.conductivity_s_per_m, f))
    out = []
    low = f[eps < 10.0]
    if low.size:
        out.append(f"|εc| = {float(np.min(eps)):.3g} < 10 at {low[0] / 1e6:g} MHz: the "
                   "near-ground coupling is outside the model's stated validity")
    limit_m = 1e-3 * C0_M_PER_S / float(np.max(f))        # 0.001 λ at the top frequency
    if lowest_m < limit_m:
        out.append(f"wire {lowest_m * 1e3:.3g} mm above real ground is below 0.001 λ "
                   f"({limit_m * 1e3:.3g} mm): the near-ground coupling is outside the "
                   "model's stated validity")
    return out
