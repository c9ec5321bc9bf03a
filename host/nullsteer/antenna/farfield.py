"""Far field of the MoM currents, directions and sphere quadrature.

Directions are compass azimuth (degrees clockwise from north) and elevation (degrees
above the horizon); r̂ = (sin az·cos el, cos az·cos el, sin el) in east/north/up.
The radiation vector N(r̂) = ∫ J(r') e^{jk r̂·r'} dl' gives E_θ,φ = −jωμ0/(4πr)·N_θ,φ
(Balanis §3.6, e^{+jωt}), radiation intensity U = η k² |N_t|² / (32π²) and gain
G = 4πU / P_in = η k² |N_t|² / (8π P_in). θ̂ is the vertical polarisation, φ̂ the
horizontal one.

Over ground the field is the direct ray plus the mirrored currents (mirror the geometry,
negate the current: the perfect-ground image) with their θ part weighted by Rv and their φ
part by −Rh (Fresnel, :func:`nullsteer.antenna.ground.fresnel`); over perfect ground this
is the exact image (Rv = 1, Rh = −1). Directions below the horizon carry no field over
ground.
"""

from __future__ import annotations

import numpy as np

from nullsteer.antenna.feedline import C0_M_PER_S
from nullsteer.antenna.geometry import Mesh
from nullsteer.antenna.ground import reflection_coefficients
from nullsteer.antenna.mom import ETA0_OHM
from nullsteer.antenna.specs import GroundKind, GroundSpec

_G2 = np.array([0.5 - 0.5 / np.sqrt(3.0), 0.5 + 0.5 / np.sqrt(3.0)])
_MIRROR = np.array([1.0, 1.0, -1.0])
# Directions per matrix product: small products stay single-threaded in the BLAS
# library, which on a shared 2-core machine is faster than handing them to threads.
_BLOCK = 64


def unit_vectors(az_deg: np.ndarray, el_deg: np.ndarray
                 ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(r̂, θ̂, φ̂), each (D, 3), for flattened compass azimuths and elevations (degrees)."""
    az = np.radians(np.ravel(az_deg))
    el = np.radians(np.ravel(el_deg))
    ca, sa, ce, se = np.cos(az), np.sin(az), np.cos(el), np.sin(el)
    r = np.stack([sa * ce, ca * ce, se], 1)
    th = np.stack([sa * se, ca * se, -ce], 1)
    ph = np.stack([-ca, sa, np.zeros_like(az)], 1)
    return r, th, ph


def current_weights(mesh: Mesh, seg_currents: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Quadrature points (Q, 3) and vector current moments (Q, 3, P) of segment currents.

    ``seg_currents`` has shape (S, 2, P): current at each segment end, amps.
    """
    d = mesh.end_m - mesh.start_m
    pts = (mesh.start_m[:, None, :] + _G2[None, :, None] * d[:, None, :]).reshape(-1, 3)
    i0, i1 = seg_currents[:, 0], seg_currents[:, 1]
    cur = (1.0 - _G2)[None, :, None] * i0[:, None, :] + _G2[None, :, None] * i1[:, None, :]
    mom = 0.5 * d[:, None, :, None] * cur[:, :, None, :]            # (S, 2, 3, P)
    return pts, mom.reshape(pts.shape[0], 3, -1)


def phase_factors(k_per_m: np.ndarray, proj_m: np.ndarray):
    """Yield e^{j k_f·proj} for each wavenumber in turn (proj: r̂·r' in metres).

    Equal steps between successive wavenumbers reuse one step factor, so a uniform
    frequency sweep costs one complex multiply per frequency instead of an exponential
    (e^{j(k + Δk)x} = e^{jkx}·e^{jΔkx}); the rounding error grows by about one ulp per
    step (1e-13 after 1000 frequencies). The array yielded is updated in place by the
    next step: use it before advancing.
    """
    ks = np.asarray(k_per_m, float)
    if ks.size == 0:
        return
    e = np.exp(1j * ks[0] * proj_m)
    yield e
    step, dk_step = e, np.nan
    for k_prev, k in zip(ks[:-1], ks[1:]):
        dk = k - k_prev
        if not abs(dk - dk_step) <= 1e-12 * abs(dk):
            step, dk_step = np.exp(1j * dk * proj_m), dk
        np.multiply(e, step, out=e)
        yield e


def fields_multi(mesh: Mesh, seg_currents: np.ndarray, freqs_hz: np.ndarray,
                 az_deg: np.ndarray, el_deg: np.ndarray, ground: GroundSpec) -> np.ndarray:
    """N_θ and N_φ (A·m) at several frequencies, shape (F, 2, P, D).

    Parameters
    ----------
    mesh : Mesh
    seg_currents : ndarray (F, S, 2, P)
        Segment-end currents of P excitations at each frequency, amps.
    freqs_hz : ndarray (F,)
    az_deg, el_deg : array_like
        Directions (broadcast together, flattened to D), degrees.
    ground : GroundSpec

    The geometry projections r̂·r' are computed once for all frequencies. Over ground
    the mirrored currents' radiation vector at r̂ is −M·N(M r̂) (M mirrors z), so direct
    and image come from one evaluation at the directions r̂ and M r̂.
    """
    az, el = np.broadcast_arrays(np.asarray(az_deg, float), np.asarray(el_deg, float))
    freqs = np.atleast_1d(np.asarray(freqs_hz, float))
    rhat, th, ph = unit_vectors(az, el)
    nd = rhat.shape[0]
    grounded = ground.kind is not GroundKind.FREE
    dirs = np.vstack([rhat, rhat * _MIRROR]) if grounded else rhat
    d = mesh.end_m - mesh.start_m
    pts = (mesh.start_m[:, None, :] + _G2[None, :, None] * d[:, None, :]).reshape(-1, 3)
    proj = pts @ dirs.T                                              # (Q, D')
    k = 2.0 * np.pi * freqs / C0_M_PER_S
    p = seg_currents.shape[-1]
    n = np.empty((freqs.size, 3 * p, dirs.shape[0]), complex)
    for i, e in enumerate(phase_factors(k, proj)):
        _, mom = current_weights(mesh, seg_currents[i])              # (Q, 3, P)
        mt = mom.reshape(mom.shape[0], 3 * p).T
        for j in range(0, e.shape[1], _BLOCK):
            np.matmul(mt, e[:, j:j + _BLOCK], out=n[i, :, j:j + _BLOCK])
    n = n.reshape(freqs.size, 3, p, -1)
    n_th = np.einsum("fxpd,dx->fpd", n[..., :nd], th)
    n_ph = np.einsum("fxpd,dx->fpd", n[..., :nd], ph)
    if grounded:
        ni = n[..., nd:] * -_MIRROR[None, :, None, None]
        el_flat = np.ravel(el)
        rv, rh = reflection_coefficients(ground, freqs[:, None], np.radians(el_flat))
        n_th += rv[:, None, :] * np.einsum("fxpd,dx->fpd", ni, th)
        n_ph -= rh[:, None, :] * np.einsum("fxpd,dx->fpd", ni, ph)
        below = el_flat < 0
        n_th[..., below] = 0.0
        n_ph[..., below] = 0.0
    return np.stack([n_th, n_ph], 1)


def fields(mesh: Mesh, seg_currents: np.ndarray, freq_hz: float, az_deg: np.ndarray,
           el_deg: np.ndarray, ground: GroundSpec) -> np.ndarray:
    """N_θ and N_φ (A·m) for each excitation, shape (2, P, D) over flattened directions.

    Parameters
    ----------
    mesh : Mesh
    seg_currents : ndarray (S, 2, P)
        Segment-end currents of P excitations, amps.
    freq_hz : float
    az_deg, el_deg : array_like
        Directions (broadcast together, flattened to D), degrees.
    ground : GroundSpec
    """
    return fields_multi(mesh, np.asarray(seg_currents)[None], np.array([freq_hz]), az_deg,
                        el_deg, ground)[0]


def gain_factor(freq_hz: np.ndarray | float) -> np.ndarray:
    """η k² / (8π): gain = factor · |N_t|² / P_in (P_in in watts, N in A·m)."""
    k = 2.0 * np.pi * np.asarray(freq_hz, float) / C0_M_PER_S
    return ETA0_OHM * k ** 2 / (8.0 * np.pi)


def sphere_grid(n_el: int, n_az: int, upper_only: bool = True
                ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Gauss-Legendre in sin(el) × uniform azimuth: (az_deg, el_deg, weight_sr), each (D,).

    Weights sum to 2π (upper hemisphere) or 4π (whole sphere).
    """
    x, w = np.polynomial.legendre.leggauss(n_el)
    if upper_only:
        mu, wmu = 0.5 * (x + 1.0), 0.5 * w
    else:
        mu, wmu = x, w
    az = (np.arange(n_az) + 0.5) * 360.0 / n_az
    el = np.degrees(np.arcsin(mu))
    az_g, el_g = np.meshgrid(az, el)
    wt = np.repeat(wmu, n_az) * (2.0 * np.pi / n_az)
    return az_g.ravel(), el_g.ravel(), wt
