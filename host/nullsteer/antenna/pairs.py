"""Close segment pairs of the MoM fill: frequency-independent tables and their scatter.

The far part of the matrix uses a one-point (centroid) rule on every segment pair
(:mod:`nullsteer.antenna.mom`). Pairs closer than ``mid_factor`` segment lengths get a
correction, the better rule minus the centroid rule, for the integrals of the two linear
halves λ_i of each segment::

    A_ij = ∫∫ λ_i(s) λ_j(s') G(R) ds ds',   G = e^{−jkR}/R

- near pairs (centres closer than ``near_factor`` lengths, self term included): 8-point
  outer rule, the 1/R part of the inner integral in closed form (asinh), an 8-point inner
  rule for the smooth remainder (e^{−jkR} − 1)/R;
- intermediate pairs: the 2×2-point Gauss rule.

Every rule is a weighted sum of G over fixed points, so with the power series
G = Σ_n (−jk)^n R^{n−1}/n! (entire; the n = 0 term is the 1/R part) the correction is
Σ_n c_n(k)·ΔM_n with moments ΔM_n that depend on the geometry only. They are computed
once, already scattered onto the basis-function pairs of the matrix, so a frequency costs a
small matrix-vector product. The series is summed to a relative truncation below 1e-16 of
its first term; with x = k·R_max of the close pairs, the cancellation of the alternating
terms loses about e^x in precision: x ≈ 3 for segments of λ/20 and pairs within 8
lengths (1e-14), x ≈ 6 at λ/10 (1e-13), x ≈ 14 at λ/4 (1e-10). With the rule
"2×2 everywhere" (``mid_factor`` = inf, a reference only) x grows with the whole mesh.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from nullsteer.antenna.geometry import Mesh

G2 = np.array([0.5 - 0.5 / np.sqrt(3.0), 0.5 + 0.5 / np.sqrt(3.0)])
_X8, _W8 = np.polynomial.legendre.leggauss(8)
X8, W8 = 0.5 * (_X8 + 1.0), 0.5 * _W8
SERIES_TOL = 1e-16


def lam(u: np.ndarray) -> np.ndarray:
    """Values of the two linear halves (1 − u, u) at u, shape (2, len(u))."""
    return np.stack([1.0 - u, u])


def segment_points(start: np.ndarray, end: np.ndarray, idx: np.ndarray,
                   u: np.ndarray) -> np.ndarray:
    """Points at fractions ``u`` along segments ``idx``: (K, len(u), 3) metres."""
    s0 = start[idx]
    return s0[:, None, :] + u[None, :, None] * (end[idx] - s0)[:, None, :]


def series_terms(x: float) -> int:
    """Number of terms n = 0..N−1 so that x^N/N! < SERIES_TOL (and N > x)."""
    n, term = 1, 1.0
    while term >= SERIES_TOL or n <= x:
        term *= x / n
        n += 1
    return n


def series_coefficients(k: float, rho_m: float, n_terms: int) -> np.ndarray:
    """c̃_n = (−j·k·ρ)^n / n!, n = 0..n_terms − 1 (complex)."""
    c = np.empty(n_terms, complex)
    c[0] = 1.0
    for n in range(1, n_terms):
        c[n] = c[n - 1] * (-1j * k * rho_m) / n
    return c


class Scatter:
    """Sums half-segment pair values into the (N, N) basis-function matrix.

    Parameters
    ----------
    mesh : Mesh
    p, e, q, f : ndarray (E,) int
        Entry list: observation segment p, its half e; source segment q, its half f.
    """

    def __init__(self, mesh: Mesh, p: np.ndarray, e: np.ndarray, q: np.ndarray,
                 f: np.ndarray) -> None:
        s, n = mesh.n_segments, mesh.n_unknowns
        members: dict[int, list[tuple[int, float]]] = {}
        for m in range(n):
            for j in range(2):
                sg = float(mesh.basis_sign[m, j])
                if sg != 0.0:
                    h = int(mesh.basis_end[m, j]) * s + int(mesh.basis_seg[m, j])
                    members.setdefault(h, []).append((m, sg))
        width = max((len(v) for v in members.values()), default=1)
        basis = np.full((2 * s, width), -1)
        sign = np.zeros((2 * s, width))
        for h, lst in members.items():
            for i, (m, sg) in enumerate(lst):
                basis[h, i], sign[h, i] = m, sg
        h_obs, h_src = e * s + p, f * s + q
        src, tgt, sgn = [], [], []
        for i in range(width):
            for j in range(width):
                bm, bn = basis[h_obs, i], basis[h_src, j]
                ok = (bm >= 0) & (bn >= 0)
                src.append(np.nonzero(ok)[0])
                tgt.append(bm[ok] * n + bn[ok])
                sgn.append(sign[h_obs, i][ok] * sign[h_src, j][ok])
        self.src = np.concatenate(src)
        self.sign = np.concatenate(sgn)
        self.targets, self.inverse = np.unique(np.concatenate(tgt), return_inverse=True)

    def table(self, values: np.ndarray) -> np.ndarray:
        """Scatter real entry values (R, E) to (R, U) over the unique targets."""
        out = np.zeros((self.targets.size, values.shape[0]))
        np.add.at(out, self.inverse, (values[:, self.src] * self.sign).T)
        return out.T

    def add_to(self, z: np.ndarray, values: np.ndarray) -> None:
        """Add complex entry values (E,) to the matrix ``z`` (N, N) in place."""
        v = values[self.src] * self.sign
        u = self.targets.size
        acc = np.bincount(self.inverse, v.real, u) + 1j * np.bincount(self.inverse, v.imag, u)
        z.reshape(-1)[self.targets] += acc


def close_pairs(mesh: Mesh, start: np.ndarray, end: np.ndarray, factor: float
                ) -> tuple[np.ndarray, np.ndarray]:
    """(p, q) with centres closer than ``factor`` × the longer segment length."""
    c_obs = 0.5 * (mesh.start_m + mesh.end_m)
    c_src = 0.5 * (start + end)
    d = np.linalg.norm(c_obs[:, None, :] - c_src[None, :, :], axis=2)
    lim = factor * np.maximum(mesh.length_m[:, None], mesh.length_m[None, :])
    p, q = np.nonzero(d < lim)
    return p, q


def entries(k_pairs: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Flattened (pair, i, j) index arrays for (K, 2, 2) values."""
    kk, i, j = np.meshgrid(np.arange(k_pairs), [0, 1], [0, 1], indexing="ij")
    return kk.ravel(), i.ravel(), j.ravel()


@dataclass(frozen=True)
class _Kind:
    """One rule's share of the moments: scale_k · Σ w_ij[...] (R/ρ)^(n−1) for n ≥ n_from."""

    rows: np.ndarray       # (K',) indices into the close-pair list
    r: np.ndarray          # (K', ...) point distances / ρ
    w: np.ndarray          # (2, 2, ...) rule weights times the halves' values
    scale: np.ndarray      # (K',) length factor (and sign)
    n_from: int


@dataclass
class PairSeries:
    """Moment tables of one source set's close pairs, scattered onto basis pairs.

    Attributes
    ----------
    p, q : ndarray (K,)
        Observation and source segment of each close pair.
    scatter : Scatter
        Entry (pair, i, j) → basis pairs.
    rho_m : float
        Length scale of the series (longest segment), metres.
    r_max_m : float
        Largest point distance among the close pairs, metres.
    """

    p: np.ndarray
    q: np.ndarray
    scatter: Scatter
    rho_m: float
    r_max_m: float
    kinds: list = field(default_factory=list, repr=False)
    static: tuple = field(default=(np.zeros(0, int), np.zeros((0, 2, 2))), repr=False)
    _tables: dict = field(default_factory=dict, repr=False)

    def moments(self, n_terms: int) -> np.ndarray:
        """ΔM̃_n (n_terms, K, 2, 2): better rule minus centroid rule, in units of ρ."""
        out = np.zeros((n_terms, self.p.size, 2, 2))
        rows, m0 = self.static
        out[0, rows] += m0
        for kd in self.kinds:
            r = kd.r.reshape(kd.rows.size, -1)
            w = kd.w.reshape(2, 2, -1)
            pw = r ** (kd.n_from - 1.0)
            for n in range(kd.n_from, n_terms):
                out[n, kd.rows] += np.einsum("kx,ijx->kij", pw, w) * kd.scale[:, None, None]
                pw = pw * r
        return out

    def tables(self, n_terms: int, vec_parts: dict[str, np.ndarray],
               lengths: np.ndarray) -> tuple[list[str], np.ndarray]:
        """Scattered tables: (names, array (n_terms, len(names)·U)).

        One table per vector part and a last one named "scalar". ``vec_parts`` maps a
        name to the per-pair factor t_p·t_q of that part; the scalar table carries
        s_i s_j Σ_ij ΔM / (l_p l_q) (the charge term, s = (1, −1)).
        """
        if n_terms not in self._tables:
            m = self.moments(n_terms)                           # (n, K, 2, 2)
            out = [self.scatter.table((m * tt[None, :, None, None]).reshape(n_terms, -1))
                   for tt in vec_parts.values()]
            phi = m.sum(axis=(2, 3)) / (lengths[self.p] * lengths[self.q])[None, :]
            sgn = np.array([[1.0, -1.0], [-1.0, 1.0]])
            out.append(self.scatter.table(
                (phi[:, :, None, None] * sgn[None, None]).reshape(n_terms, -1)))
            self._tables = {n_terms: (list(vec_parts) + ["scalar"],
                                      np.ascontiguousarray(np.concatenate(out, axis=1)))}
        return self._tables[n_terms]

    def values(self, k: float, n_terms: int, vec_parts: dict[str, np.ndarray],
               lengths: np.ndarray) -> dict[str, np.ndarray]:
        """Σ_n c_n(k) T_n for every table: name -> complex (U,) (ΔA in m, scaled)."""
        names, tab = self.tables(n_terms, vec_parts, lengths)
        coef = series_coefficients(k, self.rho_m, n_terms) / self.rho_m
        two = np.einsum("cn,nu->cu", np.stack([coef.real, coef.imag]), tab)
        v = (two[0] + 1j * two[1]).reshape(len(names), -1)
        return dict(zip(names, v))

def pair_series(mesh: Mesh, start: np.ndarray, end: np.ndarray, near_factor: float,
                mid_factor: float, r_centroid_m: np.ndarray) -> PairSeries:
    """Build the close-pair moments of the source set (start, end) seen from ``mesh``.

    Parameters
    ----------
    mesh : Mesh
        Observation segments (and basis functions).
    start, end : ndarray (S, 3)
        Source segments (the mesh itself or its mirror image), metres.
    near_factor, mid_factor : float
        Pair classes by centre distance in units of the longer segment length.
    r_centroid_m : ndarray (S, S)
        Centroid distance the far rule uses for this set, so that its contribution is
        removed exactly.
    """
    p, q = close_pairs(mesh, start, end, mid_factor)
    lp, lq = mesh.length_m[p], mesh.length_m[q]
    a = mesh.radius_m[q]
    rho = float(np.max(mesh.length_m))
    ll = lp * lq
    dn = 0.5 * (mesh.start_m + mesh.end_m)[p] - 0.5 * (start + end)[q]
    near = np.linalg.norm(dn, axis=1) < near_factor * np.maximum(lp, lq)
    rc = r_centroid_m[p, q]
    # centroid rule, removed from every close pair: (l_p l_q / 4) G(R_c) for each i, j
    kinds = [_Kind(np.arange(p.size), rc / rho, np.full((2, 2), 0.25), -ll, 0)]
    r_max = float(np.max(rc)) if p.size else 0.0
    mid = np.nonzero(~near)[0]
    if mid.size:   # 2×2 Gauss: (l_p l_q / 4) Σ_ab λ_i(u_a) λ_j(u_b) G(R_ab)
        obs = segment_points(mesh.start_m, mesh.end_m, p[mid], G2)
        src = segment_points(start, end, q[mid], G2)
        diff = obs[:, :, None, :] - src[:, None, :, :]
        r = np.sqrt(np.sum(diff * diff, 3) + a[mid][:, None, None] ** 2)
        lg = lam(G2)
        kinds.append(_Kind(mid, r / rho, np.einsum("ia,jb->ijab", lg, lg) / 4.0, ll[mid], 0))
        r_max = max(r_max, float(np.max(r)))
    nr = np.nonzero(near)[0]
    static = (np.zeros(0, int), np.zeros((0, 2, 2)))
    if nr.size:    # closed-form 1/R part (n = 0) and the 8×8 smooth series (n ≥ 1)
        st, r_inner = _near_geometry(mesh, start, end, p[nr], q[nr])
        lam8 = lam(X8) * W8
        static = (nr, np.einsum("io,koj->kij", lam8, st) * (lp[nr] * rho)[:, None, None])
        kinds.append(_Kind(nr, r_inner / rho, np.einsum("io,jb->ijob", lam8, lam8),
                           ll[nr], 1))
        r_max = max(r_max, float(np.max(r_inner)))
    kk, i, j = entries(p.size)
    return PairSeries(p=p, q=q, scatter=Scatter(mesh, p[kk], i, q[kk], j), rho_m=rho,
                      r_max_m=r_max, kinds=kinds, static=static)


def _near_geometry(mesh: Mesh, start: np.ndarray, end: np.ndarray, p: np.ndarray,
                   q: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Closed-form ∫ λ_j/R ds' per outer point (K, 8, 2), outer→inner distances (K, 8, 8)."""
    lq = mesh.length_m[q]
    a = mesh.radius_m[q]
    obs = segment_points(mesh.start_m, mesh.end_m, p, X8)
    s0 = start[q]
    tq = (end[q] - s0) / lq[:, None]
    dv = obs - s0[:, None, :]
    z0 = np.einsum("kox,kx->ko", dv, tq)
    rho2 = np.sum(dv * dv, 2) - z0 ** 2 + a[:, None] ** 2
    rho = np.sqrt(np.maximum(rho2, 1e-300))
    r_a = np.sqrt(rho2 + z0 ** 2)
    r_b = np.sqrt(rho2 + (lq[:, None] - z0) ** 2)
    i0 = np.arcsinh((lq[:, None] - z0) / rho) + np.arcsinh(z0 / rho)
    i1 = ((r_b - r_a) + z0 * i0) / lq[:, None]                  # ∫ (s'/l) / R ds'
    static = np.stack([i0 - i1, i1], axis=2)
    inner = s0[:, None, :] + (X8[None, :, None] * lq[:, None, None]) * tq[:, None, :]
    diff = obs[:, :, None, :] - inner[:, None, :, :]
    return static, np.sqrt(np.sum(diff * diff, 3) + a[:, None, None] ** 2)
