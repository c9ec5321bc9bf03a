"""Ground models: complex permittivity, Fresnel reflection, the half-space kernels.

Far field (space wave): the direct ray plus the ray reflected at the ground, weighted by
the plane-wave Fresnel coefficients (Balanis §4.8), with the complex relative permittivity
εc = εr − j·60·σ·λ (λ in metres). This is the far-field (stationary-phase) limit of the
same Sommerfeld integrals the near field uses, so both describe one ground. The surface
wave is not in the space wave, so the field of a real ground vanishes at zero elevation.

Near field (the MoM kernel): a perfect ground is the exact image (reflected wires with
the current direction mirrored, Balanis §4.7). A lossy ground is the homogeneous
half-space of Sommerfeld, evaluated by numerical integration and tabulated per frequency
(:mod:`nullsteer.antenna.sommerfeld`, :mod:`nullsteer.antenna.halfspace`); it is exact
for any εc, tends to the perfect image as σ → ∞ and to free space as εc → 1, and is
passive. The limits that remain are those of the thin-wire kernel: a wire lying on the
soil has its image two outer radii away, where the reduced kernel is good to a few per
cent. Stakes (ground points) are connected through the image, with Dwight's rod
resistance in series.
"""

from __future__ import annotations

import numpy as np

from nullsteer.antenna.feedline import C0_M_PER_S
from nullsteer.antenna.sommerfeld import HalfSpaceTable
from nullsteer.antenna.sommerfeld import half_space_table as sommerfeld_table
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


def half_space_table(ground: GroundSpec, freq_hz: float, r_min_m: float, r_max_m: float,
                     zeta_min_m: float) -> HalfSpaceTable:
    """The lossy half-space kernels at ``freq_hz`` for the distance range of a mesh."""
    k0 = 2.0 * np.pi * freq_hz / C0_M_PER_S
    eps = complex(complex_permittivity(ground.permittivity, ground.conductivity_s_per_m,
                                       freq_hz))
    return sommerfeld_table(k0, eps, r_min_m, r_max_m, zeta_min_m)


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
