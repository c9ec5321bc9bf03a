"""The MoM fill of the ground's reflected field over a lossy half-space (Sommerfeld).

With the kernels of :mod:`nullsteer.antenna.sommerfeld` (U, V, W, K, X, each F·g'), the
reflected part of the Galerkin matrix in the units of :mod:`nullsteer.antenna.mom`,
Z = (jη/4π)·[k·A_vec − A_sca/k], is, for the halves e, f of segments p, q::

    A_vec = ∫∫ λ_e λ_f [t_pz t_qz V + (t_ph·t_qh) U − t_pz (t_qh·ρ̂) ∂W/∂ρ]
    A_sca = ∫∫ λ_e' λ_f' K  +  ∫∫ λ_e' λ_f t_qz X

(λ' the derivative along the wire: the charge; ρ̂ the horizontal unit vector from the
source to the observer). The last term couples the charge of the observer to the current
of the source, so the matrix is not exactly symmetric (reciprocity holds to the accuracy
of the discretisation). Far pairs use the centroid rule with F read at the centroids.
Pairs close to the image use the close-pair moment tables of the perfect image
(:mod:`nullsteer.antenna.pairs`: better rule minus centroid rule of g', the 1/R part in
closed form), each weighted by F at the pair's centroids; F varies slowly on the scale
of a segment, so the near-singular part (the wire's own image when it lies low) is
integrated as accurately as over perfect ground.
"""

from __future__ import annotations

import numpy as np

from nullsteer.antenna.geometry import Mesh
from nullsteer.antenna.pairs import PairSeries, series_coefficients, series_terms
from nullsteer.antenna.sommerfeld import HalfSpaceTable, image_kernel

_C = 1j * 376.730313668 / (4.0 * np.pi)


class HalfSpaceFill:
    """Frequency-independent geometry of the reflected fill, and its per-frequency sum.

    Parameters
    ----------
    mesh : Mesh
    close : PairSeries
        Close pairs of the mesh with its mirror image (the image set of the operator).
    r_img_m : ndarray (S, S)
        Centroid distance to the mirrored centroids, with the reduced-kernel a².
    k_max : float
        Highest wavenumber to be filled (sets the series length of the close tables).
    """

    def __init__(self, mesh: Mesh, close: PairSeries, r_img_m: np.ndarray, k_max: float):
        s = mesh.n_segments
        ln = mesh.length_m
        d = mesh.end_m - mesh.start_m
        t = d / ln[:, None]
        cen = 0.5 * (mesh.start_m + mesh.end_m)
        dh = cen[:, None, :2] - cen[None, :, :2]
        rho = np.sqrt(np.sum(dh * dh, 2))
        zeta = cen[:, None, 2] + cen[None, :, 2]
        self.r = r_img_m
        self.theta = np.arctan2(rho, zeta)
        self.zeta_min_m = float(np.min(zeta))
        ll = np.outer(ln, ln)
        with np.errstate(invalid="ignore", divide="ignore"):
            rho_hat = np.where(rho[..., None] > 0, dh / rho[..., None], 0.0)
        self.vz = 0.25 * np.outer(d[:, 2], d[:, 2])
        self.vh = 0.25 * (d[:, :2] @ d[:, :2].T)
        self.vw = -0.25 * d[:, 2][:, None] * np.einsum("qx,pqx->pq", d[:, :2], rho_hat)
        self.xz = np.broadcast_to(0.5 * d[:, 2][None, :], (s, s))
        # basis assembly: half (seg, end) of each basis function, its sign and charge sign
        self.seg, self.sign = mesh.basis_seg, mesh.basis_sign
        self.qsign = np.where(mesh.basis_end == 1, 1.0, -1.0)
        # close pairs: moments of the image tables, per entry
        self.close = close
        self.n_terms = series_terms(k_max * close.r_max_m) if close.p.size else 0
        self._moments = close.moments(self.n_terms) if close.p.size else np.zeros(0)
        cp, cq = close.p, close.q
        self.cz = (np.outer(t[:, 2], t[:, 2]))[cp, cq]
        self.ch = (t[:, :2] @ t[:, :2].T)[cp, cq]
        self.cl = ll[cp, cq]
        self.sgn = np.array([[1.0, -1.0], [-1.0, 1.0]])

    @property
    def r_range_m(self) -> tuple[float, float]:
        return float(np.min(self.r)), float(np.max(self.r))

    def add_to(self, z: np.ndarray, k: float, table: HalfSpaceTable) -> None:
        """Add the reflected part at wavenumber ``k`` to ``z`` (N, N) in place."""
        f = table(self.r, self.theta)                     # (5, S, S): U, V, W_rho, K, X
        g = image_kernel(self.r, k)
        vec = (f[1] * self.vz + f[0] * self.vh + f[2] * self.vw) * g
        ks = f[3] * g
        xs = f[4] * g * self.xz
        ck, cq = _C * k, _C / k
        for e in range(2):
            pe, se, qe = self.seg[:, e], self.sign[:, e], self.qsign[:, e]
            for ff in range(2):
                pf, sf, qf = self.seg[:, ff], self.sign[:, ff], self.qsign[:, ff]
                w = se[:, None] * sf[None, :]
                blk = (ck * vec[pe[:, None], pf[None, :]]
                       - cq * (qe[:, None] * qf[None, :] * ks[pe[:, None], pf[None, :]]
                               + qe[:, None] * xs[pe[:, None], pf[None, :]]))
                z += w * blk
        self._add_close(z, k, f)

    def _add_close(self, z: np.ndarray, k: float, f: np.ndarray) -> None:
        cl = self.close
        if cl.p.size == 0:
            return
        coef = series_coefficients(k, cl.rho_m, self.n_terms) / cl.rho_m
        da = np.tensordot(coef, self._moments, axes=(0, 0))            # (K, 2, 2)
        fp = f[:, cl.p, cl.q]                                            # (5, K)
        vec = da * (fp[1] * self.cz + fp[0] * self.ch)[:, None, None]
        phi = da.sum(axis=(1, 2)) / self.cl
        sca = (fp[3] * phi)[:, None, None] * self.sgn[None]
        cl.scatter.add_to(z, (_C * k * vec - (_C / k) * sca).reshape(-1))
