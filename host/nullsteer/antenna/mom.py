"""Thin-wire method of moments: triangle basis, Galerkin testing, mixed-potential EFIE.

Formulation (Rao, Wilton & Glisson's triangle functions applied to wires; e.g. Gibson,
*The Method of Moments in Electromagnetics*, ch. on thin wires; Balanis §8.4 for the
thin-wire equations). Time dependence e^{+jωt}. With basis functions f_n (see
:mod:`nullsteer.antenna.geometry`) and the reduced kernel G(R) = e^{−jkR}/R,
R = √(|r − r'|² + a²) (source current on the wire axis, observation on its surface)::

    Z_mn = (jη/4π) [ k ∫∫ f_m·f_n G  −  (1/k) ∫∫ (∇·f_m)(∇'·f_n) G ]

The matrix is symmetric (Galerkin testing, reciprocity). Integrals are evaluated per
segment pair for the two linear halves ("1 − s/l" and "s/l") of each segment, then summed
into basis functions. Far segment pairs use a 2×2-point Gauss rule. Near pairs (centres
closer than ``NEAR_FACTOR`` segment lengths, including the self term) use an 8-point outer
rule, the 1/R part of the inner integral in closed form (∫ds/R = asinh, ∫s ds/R = ΔR) and
an 8-point rule for the smooth remainder (e^{−jkR} − 1)/R.

Ground enters through image source sets (:mod:`nullsteer.antenna.ground`): over perfect
ground the mirrored segments with the current mirrored and negated (horizontal parts
reversed, vertical kept, charge negated: exact). Over real ground the horizontal currents'
image is sunk by a complex depth, while the vertical currents and the charges use the
quasi-static image coefficient K = (εc − 1)/(εc + 1) at the mirror point. Delta-gap sources and lumped loads sit at basis nodes: a gap of
voltage V at node m gives V_m = V, a load Z_L adds Z_L to Z_mm. Optional wire loss adds
the surface resistance per length Rs/(2πa), Rs = √(πfμ0/σ), through the Gram matrix.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from nullsteer.antenna.feedline import C0_M_PER_S
from nullsteer.antenna.geometry import Mesh

ETA0_OHM = 376.730313668
MU0_H_PER_M = 1.25663706212e-6
NEAR_FACTOR = 3.0
_G2 = np.array([0.5 - 0.5 / np.sqrt(3.0), 0.5 + 0.5 / np.sqrt(3.0)])
_X8, _W8 = np.polynomial.legendre.leggauss(8)
_X8, _W8 = 0.5 * (_X8 + 1.0), 0.5 * _W8
_MIRROR = np.array([1.0, 1.0, -1.0])


def _lam(u: np.ndarray) -> np.ndarray:
    """Values of the two linear halves (1 − u, u) at u, shape (2, len(u))."""
    return np.stack([1.0 - u, u])


@dataclass
class _Near:
    """Near segment pairs of one source set, with their frequency-independent parts."""

    p: np.ndarray          # (K,) observation segment
    q: np.ndarray          # (K,) source segment
    static: np.ndarray     # (K, 8, 2) closed-form ∫ λ_j / R over the source, per outer point
    r_inner: np.ndarray    # (K, 8, 8) distances outer point -> inner point (real sets)


class MomOperator:
    """Frequency-independent precomputation of a mesh's MoM matrix, and its fill.

    Parameters
    ----------
    mesh : Mesh
        Segments and basis functions.
    image : bool
        True over a perfect or real ground (adds the image source set).
    wire_conductivity_s_per_m : float
        0 for lossless wire.
    """

    def __init__(self, mesh: Mesh, image: bool, wire_conductivity_s_per_m: float = 0.0):
        self.mesh = mesh
        self.image = image
        self.sigma_wire = wire_conductivity_s_per_m
        self.l = mesh.length_m
        self.t = mesh.tangent
        self.a = mesh.radius_m
        self.obs_pts = self._src_pts(mesh.start_m, mesh.end_m)
        self.r_direct = self._far_distance(mesh.start_m, mesh.end_m)
        self.near_direct = self._near(mesh.start_m, mesh.end_m, singular=True)
        if image:
            self.img_start = mesh.start_m * _MIRROR
            self.img_end = mesh.end_m * _MIRROR
            self.near_image = self._near(self.img_start, self.img_end, singular=True)
        seg_l = mesh.basis_end * mesh.n_segments + mesh.basis_seg
        n2 = 2 * mesh.n_segments
        self._lin = [(seg_l[:, e, None] * n2 + seg_l[None, :, f]).ravel()
                     for e in range(2) for f in range(2)]
        self._sgn = [np.outer(mesh.basis_sign[:, e], mesh.basis_sign[:, f])
                     for e in range(2) for f in range(2)]
        q = self.obs_pts.shape[0]
        self._triu = np.triu_indices(q)
        self._r_packed = self.r_direct[self._triu]
        self._ir_packed = 1.0 / self._r_packed

    # -- geometry -------------------------------------------------------------------
    def _src_pts(self, start: np.ndarray, end: np.ndarray) -> np.ndarray:
        """Gauss points ordered point-major: index a·S + segment."""
        return (start[None, :, :] + _G2[:, None, None] * (end - start)[None, :, :]).reshape(-1, 3)

    def _far_distance(self, start: np.ndarray, end: np.ndarray) -> np.ndarray:
        po, ps = self.obs_pts, self._src_pts(start, end)
        a2 = np.tile(self.a ** 2, 2)
        r2 = (np.sum(po * po, 1)[:, None] + np.sum(ps * ps, 1)[None, :] - 2.0 * (po @ ps.T)
              + a2[None, :])
        if np.isrealobj(r2):
            np.maximum(r2, a2[None, :], out=r2)
        return np.sqrt(r2)

    def _near(self, start: np.ndarray, end: np.ndarray, singular: bool) -> _Near:
        m = self.mesh
        c_obs = 0.5 * (m.start_m + m.end_m)
        c_src = 0.5 * (start + end)
        d = np.linalg.norm(c_obs[:, None, :] - c_src[None, :, :], axis=2)
        lim = NEAR_FACTOR * np.maximum(self.l[:, None], self.l[None, :])
        p, q = np.nonzero(d < lim)
        lq = self.l[q]
        obs = m.start_m[p][:, None, :] + _X8[None, :, None] * (m.end_m[p] - m.start_m[p])[:, None, :]
        s0 = start[q]
        tq = (end[q] - s0) / lq[:, None]
        dv = obs - s0[:, None, :]                                   # (K, 8, 3)
        z0 = np.einsum("kox,kx->ko", dv, tq)
        rho2 = np.sum(dv * dv, 2) - z0 ** 2 + self.a[q][:, None] ** 2
        rho = np.sqrt(np.maximum(rho2, 1e-300))
        r_a = np.sqrt(rho2 + z0 ** 2)
        r_b = np.sqrt(rho2 + (lq[:, None] - z0) ** 2)
        i0 = np.arcsinh((lq[:, None] - z0) / rho) + np.arcsinh(z0 / rho)
        i1 = ((r_b - r_a) + z0 * i0) / lq[:, None]                  # ∫ (s'/l) / R ds'
        static = np.stack([i0 - i1, i1], axis=2)
        inner = s0[:, None, :] + (_X8[None, :, None] * lq[:, None, None]) * tq[:, None, :]
        diff = obs[:, :, None, :] - inner[:, None, :, :]
        r_inner = np.sqrt(np.sum(diff * diff, 3) + self.a[q][:, None, None] ** 2)
        return _Near(p=p, q=q, static=static, r_inner=r_inner)

    # -- fill -----------------------------------------------------------------------
    @staticmethod
    def _kernel(k: float, r: np.ndarray, inv_r: np.ndarray | None = None) -> np.ndarray:
        """G = e^{−jkR}/R (complex R allowed)."""
        if not np.isrealobj(r):
            return np.exp(-1j * k * r) / r
        kr = k * r
        ir = 1.0 / r if inv_r is None else inv_r
        g = np.empty(r.shape, complex)
        g.real = np.cos(kr) * ir
        g.imag = np.sin(kr) * ir
        g.imag *= -1.0
        return g

    def _near_integrals(self, k: float, near: _Near) -> tuple[np.ndarray, np.ndarray]:
        """Accurate A (K, 2, 2) and Φ (K,) of the near pairs."""
        kr = k * near.r_inner
        smooth = np.where(kr > 1e-9, (np.exp(-1j * kr) - 1.0) / near.r_inner, -1j * k)
        lam8 = _lam(_X8) * _W8                                      # (2, 8)
        inner = np.einsum("kob,jb->koj", smooth, lam8) * self.l[near.q][:, None, None]
        inner += near.static
        a = np.einsum("ia,kaj->kij", lam8, inner) * self.l[near.p][:, None, None]
        return a, a.sum(axis=(1, 2))

    def _direct_kernel(self, k: float) -> np.ndarray:
        """G between the direct set's own Gauss points, using its symmetry (half the work)."""
        gp = self._kernel(k, self._r_packed, self._ir_packed)
        g = np.empty(self.r_direct.shape, complex)
        g[self._triu] = gp
        g[self._triu[1], self._triu[0]] = gp
        return g

    def _add_set(self, zl: np.ndarray, k: float, r_far: np.ndarray, near: _Near | None,
                 tt: np.ndarray, qcoef: complex, g: np.ndarray | None = None) -> None:
        """Add one source set's (jη/4π)[k (t·t') A − qcoef (1/k) (∇·)(∇'·) Φ] to ``zl``.

        Far pairs: 2×2 Gauss. With g_ab the kernel at Gauss points a (observation) and b
        (source), e = 1/√3 and s = (+1, −1) for the halves (1 − u, u):
        A_ij = l_p l_q / 16 · [ΣΣ g + s_j e Σ_a(g_a1 − g_a2) + s_i e Σ_b(g_1b − g_2b)
        + s_i s_j e² (g11 − g12 − g21 + g22)], Φ = l_p l_q / 4 · ΣΣ g; the divergences are
        d_i = ∓1/l so (∇·)(∇'·)Φ = s_i s_j ΣΣ g / 4. Near pairs are then replaced.
        """
        s = self.mesh.n_segments
        c = 1j * ETA0_OHM / (4.0 * np.pi)
        g4 = (self._kernel(k, r_far) if g is None else g).reshape(2, s, 2, s)
        g11, g12, g21, g22 = g4[0, :, 0], g4[0, :, 1], g4[1, :, 0], g4[1, :, 1]
        e = 1.0 / np.sqrt(3.0)
        sa, sb, da, db = g11 + g22, g12 + g21, g11 - g22, g12 - g21
        x0, x3 = sa + sb, (e * e) * (sa - sb)
        x1, x2 = e * (da - db), e * (da + db)
        vec = (c * k / 16.0) * tt * (self.l[:, None] * self.l[None, :])
        sca = (c * qcoef / (4.0 * k)) * x0
        zl[0, :, 0] += vec * (x0 + x3 + x1 + x2) - sca
        zl[1, :, 1] += vec * (x0 + x3 - x1 - x2) - sca
        zl[0, :, 1] += vec * (x0 - x3 - x1 + x2) + sca
        zl[1, :, 0] += vec * (x0 - x3 + x1 - x2) + sca
        if near is None or near.p.size == 0:
            return
        p, q = near.p, near.q
        sgn = np.array([[1.0, -1.0], [-1.0, 1.0]])
        y0, y1, y2, y3 = x0[p, q], x1[p, q], x2[p, q], x3[p, q]
        far_a = np.stack([np.stack([y0 + y3 + y1 + y2, y0 - y3 - y1 + y2], -1),
                          np.stack([y0 - y3 + y1 - y2, y0 + y3 - y1 - y2], -1)], 1)
        far_a *= (self.l[p] * self.l[q] / 16.0)[:, None, None]
        far_phi = y0 * self.l[p] * self.l[q] / 4.0
        a_n, phi_n = self._near_integrals(k, near)
        da_ = a_n - far_a
        dphi = (phi_n - far_phi) / (self.l[p] * self.l[q])
        zl[:, p, :, q] += c * (k * tt[p, q][:, None, None] * da_
                               - (qcoef / k) * sgn[None] * dphi[:, None, None])

    def local_matrix(self, freq_hz: float, image_shift_m: complex = 0j,
                     image_coef: complex = 1.0) -> np.ndarray:
        """Segment-half interaction matrix, shape (2, S, 2, S) (half, segment), ohms.

        Parameters
        ----------
        freq_hz : float
        image_shift_m : complex
            Extra complex depth of the horizontal-current image (0: perfect ground).
        image_coef : complex
            Quasi-static image coefficient K of the vertical currents and of the charges
            (1 for a perfect ground, (εc − 1)/(εc + 1) for a real one).
        """
        k = 2.0 * np.pi * freq_hz / C0_M_PER_S
        s = self.mesh.n_segments
        zl = np.zeros((2, s, 2, s), complex)
        self._add_set(zl, k, self.r_direct, self.near_direct, self.t @ self.t.T, 1.0,
                      self._direct_kernel(k))
        if self.image:
            th = self.t * np.array([1.0, 1.0, 0.0])
            tz = self.t * np.array([0.0, 0.0, 1.0])
            r_real = self._far_image_real()
            if image_shift_m == 0 and image_coef == 1.0:
                mirrored = tz @ tz.T - th @ th.T
                self._add_set(zl, k, r_real, self.near_image, mirrored, -1.0)
            else:
                self._add_set(zl, k, r_real, self.near_image, image_coef * (tz @ tz.T),
                              -image_coef)
                shift = np.array([0.0, 0.0, -image_shift_m])
                r_c = self._far_distance(self.img_start + shift, self.img_end + shift)
                self._add_set(zl, k, r_c, None, -(th @ th.T), 0.0)
        if self.sigma_wire > 0:
            rs = np.sqrt(np.pi * freq_hz * MU0_H_PER_M / self.sigma_wire)
            r_per_m = rs / (2.0 * np.pi * self.a)
            gram = np.array([[1 / 3, 1 / 6], [1 / 6, 1 / 3]])
            idx = np.arange(s)
            zl[:, idx, :, idx] += (r_per_m * self.l)[:, None, None] * gram
        return zl

    def _far_image_real(self) -> np.ndarray:
        if not hasattr(self, "_r_img_real"):
            self._r_img_real = self._far_distance(self.img_start, self.img_end)
        return self._r_img_real

    def assemble(self, zl: np.ndarray) -> np.ndarray:
        """Sum segment-half interactions into the (N, N) basis-function matrix."""
        flat = zl.reshape(-1)
        n = self.mesh.n_unknowns
        z = np.zeros((n, n), dtype=complex)
        for lin, sgn in zip(self._lin, self._sgn):
            z += sgn * flat.take(lin).reshape(n, n)
        return z

    def matrix(self, freq_hz: float, image_shift_m: complex = 0j,
               image_coef: complex = 1.0) -> np.ndarray:
        """The (N, N) impedance matrix at ``freq_hz``, ohms (no port loads)."""
        return self.assemble(self.local_matrix(freq_hz, image_shift_m, image_coef))


def port_excitation(n_unknowns: int, port_indices: list[int]) -> np.ndarray:
    """Right-hand sides for a 1 V delta gap at each port in turn, shape (N, P)."""
    v = np.zeros((n_unknowns, len(port_indices)), dtype=complex)
    for col, idx in enumerate(port_indices):
        v[idx, col] = 1.0
    return v
