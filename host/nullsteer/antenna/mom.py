"""Thin-wire method of moments: triangle basis, Galerkin testing, mixed-potential EFIE.

Formulation (Rao, Wilton & Glisson's triangle functions applied to wires; e.g. Gibson,
*The Method of Moments in Electromagnetics*, ch. on thin wires; Balanis §8.4 for the
thin-wire equations). Time dependence e^{+jωt}. With basis functions f_n (see
:mod:`nullsteer.antenna.geometry`) and the reduced kernel G(R) = e^{−jkR}/R,
R = √(|r − r'|² + a²) (source current on the wire axis, observation on its surface)::

    Z_mn = (jη/4π) [ k ∫∫ f_m·f_n G  −  (1/k) ∫∫ (∇·f_m)(∇'·f_n) G ]

The matrix is symmetric (Galerkin testing, reciprocity). Integrals are taken per segment
pair for the two linear halves ("1 − s/l" and "s/l") of each segment and summed into
basis functions. Far pairs use the one-point (centroid) rule: A_ij = l_p l_q G(R_c)/4,
with R_c the centre distance and a² = (a_p² + a_q²)/2 in the reduced kernel (symmetric),
evaluated on the packed upper triangle only. Pairs closer than ``MID_FACTOR`` segment
lengths get the 2×2-point Gauss rule and pairs closer than ``NEAR_FACTOR`` lengths
(self term included) an 8-point outer rule with the 1/R part of the inner integral in
closed form; both as frequency-independent power-series tables
(:mod:`nullsteer.antenna.pairs`). The centroid rule's relative error on a pair at
distance R is of order (l/R)²/24 + (kl)²/24 (Taylor expansion of the midpoint rule), so
at R ≥ ``MID_FACTOR``·l with l ≤ λ/20 it is below 5e-4 per pair, and the impedances and
optimum terminations move by far less (see the benchmark and tests).

Ground enters through the image source set: over perfect ground the mirrored segments
with the current mirrored and negated (horizontal parts reversed, vertical kept, charge
negated: exact). Over a lossy ground the same image geometry carries the Sommerfeld
kernels of the half-space (:mod:`nullsteer.antenna.halfspace`). Delta-gap sources
and lumped loads sit at basis nodes: a gap of voltage V at node m gives V_m = V, a load
Z_L adds Z_L to Z_mm. Optional wire loss adds the surface resistance per length
Rs/(2πa), Rs = √(πfμ0/σ), through the Gram matrix of the halves. An insulating coating
(outer radius b, relative permittivity εr) adds the series impedance per length
jω·μ0/(2π)·(1 − 1/εr)·ln(b/a) the same way (Richmond & Newman, "Dielectric coated wire
antennas", Radio Science 11, 1976; the kernel keeps the conductor radius a).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from nullsteer.antenna.feedline import C0_M_PER_S
from nullsteer.antenna.geometry import Mesh
from nullsteer.antenna.halfspace import HalfSpaceFill
from nullsteer.antenna.pairs import PairSeries, Scatter, pair_series, series_terms
from nullsteer.antenna.sommerfeld import HalfSpaceTable

ETA0_OHM = 376.730313668
MU0_H_PER_M = 1.25663706212e-6
NEAR_FACTOR = 3.0
MID_FACTOR = 8.0
_MIRROR = np.array([1.0, 1.0, -1.0])
_C = 1j * ETA0_OHM / (4.0 * np.pi)


@dataclass
class _Set:
    """A source set: packed centroid distances, vector-term factors, close-pair tables."""

    r_packed: np.ndarray               # (P,) metres (real sets)
    c_over_r: np.ndarray               # (P,) (η/4π)/R, ohm/m
    parts: dict[str, np.ndarray]       # name -> packed l_p l_q (t_p·t_q) of that part
    close: PairSeries
    close_parts: dict[str, np.ndarray]  # name -> per close pair t_p·t_q


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
    mid_factor : float
        Pairs closer than this many segment lengths use the 2×2 Gauss rule instead of
        the centroid rule (``np.inf``: every pair, the reference for accuracy checks).
    coating_h_per_m : float
        Series inductance per metre of an insulating coating (:func:`coating_h_per_m`).
    """

    def __init__(self, mesh: Mesh, image: bool, wire_conductivity_s_per_m: float = 0.0,
                 mid_factor: float = MID_FACTOR, coating_h_per_m: float = 0.0):
        self.mesh = mesh
        self.image = image
        self.sigma_wire = wire_conductivity_s_per_m
        self.coating_h_per_m = coating_h_per_m
        s, n = mesh.n_segments, mesh.n_unknowns
        self.l = mesh.length_m
        self.a = mesh.radius_m
        d = mesh.end_m - mesh.start_m
        self._iu = np.triu_indices(s)
        packed = np.empty((s, s), dtype=np.intp)
        packed[self._iu] = np.arange(self._iu[0].size)
        packed[self._iu[1], self._iu[0]] = packed[self._iu]
        seg, end, sign = mesh.basis_seg, mesh.basis_end, mesh.basis_sign
        # Z = Σ over the two halves of each basis function of σ_m σ_n (V ∓ S)[p, q]:
        # index into h = [V − S, V + S, −(V − S), −(V + S), 0] (packed): the second
        # block when the halves' ends differ, the negated ones for σ_m σ_n = −1, the
        # zero for an absent half
        n_packed = self._iu[0].size
        self._gather = []
        for e in range(2):
            for f in range(2):
                sg = np.outer(sign[:, e], sign[:, f])
                differ = end[:, e][:, None] != end[:, f][None, :]
                lin = (packed[seg[:, e][:, None], seg[:, f][None, :]] + n_packed * differ
                       + 2 * n_packed * (sg < 0))
                self._gather.append(np.where(sg == 0, 4 * n_packed, lin))
        cen = 0.5 * (mesh.start_m + mesh.end_m)
        a2 = 0.5 * (self.a[:, None] ** 2 + self.a[None, :] ** 2)
        iu = self._iu

        def full(v: np.ndarray) -> np.ndarray:   # (S, S) symmetric -> packed upper triangle
            return v[iu]

        dd = d @ d.T
        r_dir = np.sqrt(np.sum((cen[:, None] - cen[None, :]) ** 2, 2) + a2)
        close = pair_series(mesh, mesh.start_m, mesh.end_m, NEAR_FACTOR, mid_factor, r_dir)
        tt = dd / np.outer(self.l, self.l)
        eta = ETA0_OHM / (4.0 * np.pi)
        self.sets = [_Set(full(r_dir), eta / full(r_dir), {"tt": full(dd)}, close,
                          {"tt": tt[close.p, close.q]})]
        if image:
            self.img_start = mesh.start_m * _MIRROR
            self.img_end = mesh.end_m * _MIRROR
            ci = cen * _MIRROR
            r_img = np.sqrt(np.sum((cen[:, None] - ci[None, :]) ** 2, 2) + a2)
            dz = np.outer(d[:, 2], d[:, 2])
            dh = d[:, :2] @ d[:, :2].T
            close_i = pair_series(mesh, self.img_start, self.img_end, NEAR_FACTOR,
                                  mid_factor, r_img)
            ll = np.outer(self.l, self.l)
            self.sets.append(_Set(full(r_img), eta / full(r_img), {"z": full(dz), "h": full(dh)},
                                  close_i,
                                  {"z": (dz / ll)[close_i.p, close_i.q],
                                   "h": (dh / ll)[close_i.p, close_i.q]}))
            self._r_img = r_img
            self._half_space: HalfSpaceFill | None = None
            self._half_space_k = 0.0
        # wire loss: Rs/(2πa) per metre through the Gram matrix of the halves, per Rs
        idx = np.repeat(np.arange(s), 4)
        ee, ff = np.tile([0, 0, 1, 1], s), np.tile([0, 1, 0, 1], s)
        gram = np.array([[1 / 3, 1 / 6], [1 / 6, 1 / 3]])
        self._loss = Scatter(mesh, idx, ee, idx, ff)
        self._gram_table = self._loss.table((self.l[idx] * gram[ee, ff])[None, :])[0]
        self._loss_table = self._loss.table(
            (self.l[idx] / (2.0 * np.pi * self.a[idx]) * gram[ee, ff])[None, :])[0]
        self._n = n

    # -- kernel -----------------------------------------------------------------------
    @staticmethod
    def _kernel(k: float, r: np.ndarray, c_over_r: np.ndarray | None = None) -> np.ndarray:
        """(jη/4π)·G = (η/4π)(sin kR + j cos kR)/R (complex R allowed).

        ``c_over_r`` is the precomputed (η/4π)/R of a real R.
        """
        if not np.isrealobj(r):
            return _C * np.exp(-1j * k * r) / r
        kr = k * r
        g = np.empty(r.shape, complex)
        np.sin(kr, out=g.real)
        np.cos(kr, out=g.imag)
        cr = ETA0_OHM / (4.0 * np.pi) / r if c_over_r is None else c_over_r
        g.real *= cr
        g.imag *= cr
        return g

    def _close(self, z: np.ndarray, k: float, st: _Set, weights: dict[str, complex],
               qcoef: complex) -> None:
        """Add the close-pair corrections of one real source set to ``z``."""
        cl = st.close
        if cl.p.size == 0:
            return
        vals = cl.values(k, series_terms(k * cl.r_max_m), st.close_parts, self.l)
        val = (-_C * qcoef / k) * vals["scalar"]
        for name, w in weights.items():
            val += (_C * k * w) * vals[name]
        z.reshape(-1)[cl.scatter.targets] += val

    # -- fill -------------------------------------------------------------------------
    def half_space(self, k_max: float) -> HalfSpaceFill:
        """The reflected fill over a lossy half-space (built once, for wavenumbers ≤ k_max)."""
        if self._half_space is None or self._half_space_k < k_max:
            self._half_space = HalfSpaceFill(self.mesh, self.sets[1].close, self._r_img, k_max)
            self._half_space_k = k_max
        return self._half_space

    def matrix(self, freq_hz: float, table: HalfSpaceTable | None = None) -> np.ndarray:
        """The (N, N) impedance matrix at ``freq_hz``, ohms (no port loads).

        Parameters
        ----------
        freq_hz : float
        table : HalfSpaceTable, optional
            The lossy half-space's kernels at this frequency
            (:func:`nullsteer.antenna.sommerfeld.half_space_table`); without it an operator
            built with ``image`` fills the perfect-ground image.
        """
        k = 2.0 * np.pi * freq_hz / C0_M_PER_S
        d = self.sets[0]
        npk = d.r_packed.size
        h = np.empty(4 * npk + 1, complex)
        h0, h1 = h[:npk], h[npk:2 * npk]
        g = self._kernel(k, d.r_packed, d.c_over_r)
        vec = (k / 4.0) * d.parts["tt"]                  # segment vectors folded in
        np.multiply(g, vec - 1.0 / k, out=h0)
        np.multiply(g, vec + 1.0 / k, out=h1)
        perfect = self.image and table is None
        if perfect:
            im = self.sets[1]
            gi = self._kernel(k, im.r_packed, im.c_over_r)
            vec = (k / 4.0) * (im.parts["z"] - im.parts["h"])
            h0 += gi * (vec + 1.0 / k)
            h1 += gi * (vec - 1.0 / k)
        np.negative(h[:2 * npk], out=h[2 * npk:4 * npk])
        h[-1] = 0.0
        z = h.take(self._gather[0])
        for lin in self._gather[1:]:
            z += h.take(lin)
        self._close(z, k, d, {"tt": 1.0}, 1.0)
        if perfect:
            self._close(z, k, self.sets[1], {"z": 1.0, "h": -1.0}, -1.0)
        elif self.image and table is not None:
            self.half_space(k).add_to(z, k, table)
        if self.sigma_wire > 0:
            rs = np.sqrt(np.pi * freq_hz * MU0_H_PER_M / self.sigma_wire)
            z.reshape(-1)[self._loss.targets] += rs * self._loss_table
        if self.coating_h_per_m > 0:
            z.reshape(-1)[self._loss.targets] += (
                2j * np.pi * freq_hz * self.coating_h_per_m) * self._gram_table
        return z


def coating_h_per_m(conductor_radius_m: float, outer_radius_m: float, eps_r: float) -> float:
    """Series inductance per metre of a dielectric coating: μ0/(2π)·(1 − 1/εr)·ln(b/a)
    (Richmond & Newman 1976, see the module docstring); 0 for a bare wire."""
    if outer_radius_m <= conductor_radius_m or eps_r <= 1.0:
        return 0.0
    return float(MU0_H_PER_M / (2.0 * np.pi) * (1.0 - 1.0 / eps_r)
                 * np.log(outer_radius_m / conductor_radius_m))


def port_excitation(n_unknowns: int, port_indices: list[int]) -> np.ndarray:
    """Right-hand sides for a 1 V delta gap at each port in turn, shape (N, P)."""
    v = np.zeros((n_unknowns, len(port_indices)), dtype=complex)
    for col, idx in enumerate(port_indices):
        v[idx, col] = 1.0
    return v
