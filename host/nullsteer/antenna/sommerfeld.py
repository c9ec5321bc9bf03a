"""Sommerfeld integrals of a wire over a homogeneous lossy half-space, and their table.

Formulation: Sommerfeld's potentials for sources and observers in air above a ground of
complex relative permittivity εc (k1² = εc·k0², same μ0; time dependence e^{+jωt};
Sommerfeld 1909, in the form of Michalski & Mosig, "Multilayered media Green's functions
in integral equation formulations", IEEE Trans. AP 45, 1997, their "traditional"
potential). With ρ the horizontal distance and ζ = z + z' the height sum, the reflected
vector potential of a current element ŝ·I·dl is (μ0/4π)·I·dl times::

    A_h = ŝ_h·U,   A_z = s_z·V − (ŝ_h·∇_h)W

    U = ∫ J0(λρ) λ/(j·kz0) · R_TE · e^{−j·kz0·ζ} dλ,   R_TE = (kz0 − kz1)/(kz0 + kz1)
    V = ∫ J0(λρ) λ/(j·kz0) · R_TM · e^{−j·kz0·ζ} dλ,   R_TM = (εc·kz0 − kz1)/(εc·kz0 + kz1)
    W = ∫ J0(λρ) λ · 2(εc − 1)/((kz0 + kz1)(εc·kz0 + kz1)) · e^{−j·kz0·ζ} dλ

(kz_i = √(k_i² − λ²), Im kz_i ≤ 0), obtained from continuity of A_x, ∂A_x/∂z, A_z and
∇·A/k² at z = 0. The Lorenz gauge gives the scalar potential of the charges; integrated
by parts along the wire the charges see ``K = U − ∂W/∂ζ`` and the vertical currents add
``X = ∂(V + K)/∂ζ`` (the part of the scalar potential a vertical current carries that the
charge kernel does not). Limits: a perfect ground gives U = −g', V = g', K = −g', W = X = 0
(the image, g' = e^{−jk0R'}/R', R' = √(ρ² + ζ²)); the quasi-static limit gives
K → −(εc − 1)/(εc + 1)·g' and V → +(εc − 1)/(εc + 1)·g' near the source.

Evaluation (Michalski's recipe, "Extrapolation methods for Sommerfeld integral tails",
IEEE Trans. AP 46, 1998, in outline): from 0 to λ_b (beyond the branch points of air
and, for a low-loss ground, of the soil) along a half-ellipse in the first quadrant of
the λ plane, semi-minor axis min(k0, 1/ρ); then along the real axis in steps of the
asymptotic half-period π/max(ρ, ζ) (Gauss–Legendre, 8 points each) over the spectral
transition of the soil, and the remaining tail summed by Wynn's ε-algorithm on the
partial sums. For a ground so conductive that |k1|·ζ ≫ 1 at every wire, the perfect
image is taken out of U, V, K analytically first (the remainder is then small and
smooth).

Each kernel is kept as F(R', θ)·g'(R') with θ = atan(ρ/ζ): F is bounded and smooth
(it tends to the image coefficients above), so it is tabulated once per frequency on a
grid uniform in log R' and θ and interpolated by bicubic splines.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.interpolate import RectBivariateSpline
from scipy.special import j0, j1, jv

NAMES = ("U", "V", "W_rho", "K", "X")
_XG, _WG = np.polynomial.legendre.leggauss(8)
_XE, _WE = np.polynomial.legendre.leggauss(48)
#: |k1|·ζ_min above which the perfect image is extracted first ("conductor mode").
CONDUCTOR_KZETA = 30.0
#: Half-periods summed by the ε-algorithm after the dense part (odd).
TAIL_TERMS = 15
#: Cap on the Gauss points along the half-ellipse.
MAX_ELLIPSE = 800
#: Cap on the dense panels over the soil's spectral transition.
MAX_DENSE = 600


def _kz(k2: complex, lam: np.ndarray) -> np.ndarray:
    """√(k² − λ²) on the proper sheet (Im ≤ 0)."""
    kz = np.sqrt(k2 - lam * lam)
    return np.where(kz.imag > 0, -kz, kz)


def _integrands(lam: np.ndarray, rho: np.ndarray, zeta: np.ndarray, k0: float,
                eps_c: complex, conductor: bool, complex_path: bool) -> np.ndarray:
    """The five integrands (5, ...) at spectral points ``lam`` (broadcast with ρ, ζ)."""
    kz0 = _kz(k0 * k0 + 0j, lam)
    kz1 = _kz(eps_c * k0 * k0, lam)
    d_te = kz0 + kz1
    d_tm = eps_c * kz0 + kz1
    r_te = (kz0 - kz1) / d_te
    r_tm = (eps_c * kz0 - kz1) / d_tm
    q = 2.0 * (eps_c - 1.0) / (d_te * d_tm)
    e = np.exp(-1j * kz0 * zeta)
    x = lam * rho
    if complex_path:
        b0, b1 = jv(0, x), jv(1, x)
    else:
        b0, b1 = j0(x.real), j1(x.real)
    u_te = r_te + 1.0 if conductor else r_te
    u_tm = r_tm - 1.0 if conductor else r_tm
    a = b0 * lam * e
    f_u = a * u_te / (1j * kz0)
    f_v = a * u_tm / (1j * kz0)
    f_w = -b1 * lam * lam * q * e
    f_wz = a * (-1j * kz0) * q
    f_k = f_u - f_wz
    f_x = -a * (r_te + r_tm) + a * kz0 * kz0 * q
    return np.stack([f_u, f_v, f_w, f_k, f_x])


def _wynn(s: np.ndarray) -> np.ndarray:
    """Wynn's ε-algorithm on partial sums ``s`` (M, ...), M odd: the limit estimate.

    ε_{-1} = 0, ε_0 = S_n, ε_{k+1}^{(n)} = ε_{k-1}^{(n+1)} + 1/(ε_k^{(n+1)} − ε_k^{(n)});
    ε_{M-1}^{(0)} is returned (the last partial sum where the recursion breaks down).
    """
    prev = np.zeros((s.shape[0] + 1,) + s.shape[1:], s.dtype)
    cur = s
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        while cur.shape[0] > 1:
            d = cur[1:] - cur[:-1]
            small = np.abs(d) < 1e-300
            nxt = prev[1:cur.shape[0]] + 1.0 / np.where(small, 1e-300, d)
            prev, cur = cur, nxt
    est = cur[0]
    size = np.max(np.abs(s), axis=0)
    settled = np.abs(s[-1] - s[-2]) <= 1e-9 * size      # converged already: no acceleration
    wild = ~np.isfinite(est) | (np.abs(est) > 1e3 * size + 1e-300)
    return np.where(settled | wild, s[-1], est)


def integrals(rho: np.ndarray, zeta: np.ndarray, k0: float, eps_c: complex,
              conductor: bool) -> np.ndarray:
    """The reflected kernels (5, P) at points (ρ, ζ) (P,), metres (see module docstring).

    With ``conductor`` the perfect image is left out of U, V and K (add it back).
    """
    rho = np.asarray(rho, float)
    zeta = np.asarray(zeta, float)
    k1 = np.sqrt(eps_c) * k0
    low_loss = abs(k1.imag) < k1.real / 3.0
    lam_b = 1.5 * max(k0, k1.real if low_loss else k0)
    # half-ellipse 0 → λ_b in the first quadrant
    span = np.maximum(rho, zeta)
    b = np.minimum(k0, 1.0 / np.maximum(rho, 1e-12))[:, None]
    # 48 points, or 10 per oscillation of J0 along the ellipse for distant points
    n_e = int(min(MAX_ELLIPSE, max(48, 10 * np.ceil(lam_b * float(np.max(rho)) / np.pi))))
    xe, we = np.polynomial.legendre.leggauss(n_e) if n_e != _XE.size else (_XE, _WE)
    phi = 0.5 * np.pi * (xe + 1.0)
    lam = 0.5 * lam_b * (1.0 - np.cos(phi))[None, :] + 1j * b * np.sin(phi)[None, :]
    dlam = (0.5 * lam_b * np.sin(phi))[None, :] + 1j * b * np.cos(phi)[None, :]
    f = _integrands(lam, rho[:, None], zeta[:, None], k0, eps_c, conductor, True)
    total = np.sum(f * (dlam * (0.5 * np.pi * we))[None], axis=-1)
    # real axis: dense panels over the soil's transition, then ε-summed half-periods
    step = np.pi / np.maximum(span, 1e-12)
    k_c = lam_b if conductor else lam_b + 4.0 * abs(k1)
    k_c = np.minimum(k_c, lam_b + 40.0 / np.maximum(zeta, 1e-12))
    # panels graded away from the branch point k_s (the integrand varies on the scale of
    # the distance to it), each cut into pieces no longer than the half-period π/ρ
    k_s = lam_b / 1.5
    top = float(np.max(k_c))
    edges = [lam_b]
    while edges[-1] < top:
        edges.append(min(top, k_s + 1.5 * (edges[-1] - k_s)))
    xg = 0.5 * (_XG + 1.0)
    frac = np.clip((k_c - lam_b) / max(top - lam_b, 1e-300), 0.0, 1.0)   # per point
    for a, b in zip(edges[:-1], edges[1:]):
        pieces = max(1, int(min(MAX_DENSE, np.max(np.ceil((b - a) * frac / step)))))
        h = (b - a) / pieces * frac
        for j in range(pieces):
            lo = lam_b + (a - lam_b + j * (b - a) / pieces) * frac
            lam_r = lo[:, None] + h[:, None] * xg[None, :]
            f = _integrands(lam_r, rho[:, None], zeta[:, None], k0, eps_c, conductor, False)
            total = total + np.sum(f * (0.5 * _WG)[None, None, :], -1) * h[None]
    sums = np.empty((5, TAIL_TERMS, rho.size), complex)
    run = total
    for n in range(TAIL_TERMS):
        lam_r = (k_c + n * step)[:, None] + step[:, None] * xg[None, :]
        f = _integrands(lam_r, rho[:, None], zeta[:, None], k0, eps_c, conductor, False)
        run = run + np.sum(f * (0.5 * _WG)[None, None, :], -1) * step[None]
        sums[:, n] = run
    out = _wynn(np.moveaxis(sums, 1, 0))
    return out


def image_kernel(r_m: np.ndarray, k0: float) -> np.ndarray:
    """g'(R') = e^{−jk0R'}/R'."""
    return np.exp(-1j * k0 * r_m) / r_m


@dataclass
class HalfSpaceTable:
    """F = kernel / g' of the five kernels on a (log R', θ) grid at one frequency."""

    k0: float
    eps_c: complex
    conductor: bool
    splines: list

    def __call__(self, r_m: np.ndarray, theta_rad: np.ndarray) -> np.ndarray:
        """(5, ...) F values at R' (m) and θ = atan(ρ/ζ); the extracted image added back."""
        lr = np.log(np.asarray(r_m, float))
        th = np.asarray(theta_rad, float)
        out = np.empty((5,) + lr.shape, complex)
        for i, (sr, si) in enumerate(self.splines):
            out[i] = sr.ev(lr, th) + 1j * si.ev(lr, th)
        return out + static_part(self.eps_c, self.conductor, th)


def static_part(eps_c: complex, conductor: bool, theta_rad: np.ndarray) -> np.ndarray:
    """The closed-form part of F (5, ...) kept out of the splines.

    Conductor mode: the perfect image (U, V, K) = (−1, +1, −1). Otherwise the
    quasi-static image of a dielectric, K_s = (εc − 1)/(εc + 1): V → K_s, K → −K_s,
    ∂W/∂ρ → K_s·(R' − ζ)/(ρ·R') = K_s·tan(θ/2)/R' (so F_W → K_s·tan(θ/2)). The splines then
    carry only the smooth remainder, which is small where the loop is electrically
    close to the ground, so interpolation errors do not upset the near cancellations
    that make the radiation resistance of a small loop.
    """
    th = np.asarray(theta_rad, float)
    out = np.zeros((5,) + th.shape, complex)
    if conductor:
        out[0], out[1], out[3] = -1.0, 1.0, -1.0
        return out
    ks = (eps_c - 1.0) / (eps_c + 1.0)
    out[1], out[3] = ks, -ks
    out[2] = ks * np.tan(0.5 * th)
    return out


def half_space_table(k0: float, eps_c: complex, r_min_m: float, r_max_m: float,
                     zeta_min_m: float, per_decade: int = 6, n_theta: int = 9
                     ) -> HalfSpaceTable:
    """Tabulate the kernels for distances R' in [r_min, r_max] (metres) at one frequency."""
    k1 = np.sqrt(eps_c) * k0
    conductor = abs(k1) * zeta_min_m > CONDUCTOR_KZETA
    lo, hi = np.log(r_min_m * 0.9), np.log(r_max_m * 1.1)
    n_r = max(6, int(np.ceil((hi - lo) / np.log(10.0) * per_decade)) + 1)
    lr = np.linspace(lo, hi, n_r)
    th = np.linspace(0.0, 0.5 * np.pi, n_theta)
    rr, tt = np.meshgrid(np.exp(lr), th, indexing="ij")
    rho, zeta = rr * np.sin(tt), rr * np.cos(tt)
    vals = integrals(rho.ravel(), zeta.ravel(), k0, eps_c, conductor)
    fv = (vals / image_kernel(rr.ravel(), k0)[None]).reshape(5, n_r, n_theta)
    if not conductor:       # (conductor mode: the integrals already leave the image out)
        fv = fv - static_part(complex(eps_c), conductor, tt)
    splines = [(RectBivariateSpline(lr, th, fv[i].real), RectBivariateSpline(lr, th, fv[i].imag))
               for i in range(5)]
    return HalfSpaceTable(k0=k0, eps_c=complex(eps_c), conductor=conductor, splines=splines)
