"""Two-port reduction of a terminated loop: one MoM solve per frequency, then circuit algebra.

Port 0 is end A, port 1 end B. For each frequency the MoM system is solved once with
two right-hand sides (1 V delta gap at A, then at B, the other port shorted), which gives
the short-circuit admittance matrix Y (Y[q, p] = current at port q for 1 V at port p) and
the far field N_p of each excitation. With the receiver side driven by 1 V and a load
admittance Y_T = 1/Z_T at the terminated port (V_t = −Z_T·I_t)::

    V_t = −Y_tf / (Y_T + Y_tt)          (0 for a short, −Y_tf/Y_tt when open)
    Y_in = Y_ff + Y_ft·V_t,  Z_feed = 1/Y_in,  P_in = ½·Re(Y_in)
    N = N_f + V_t·N_t,  G = η k² |N|² / (8π P_in)

so every termination, the open state, either fed end (swap the roles) and any receiver
load follow without another solve. P_in includes the power burned in the termination and
in the wire, so G is the gain of an inefficient antenna (IEEE gain). The realized gain
also counts the transducer gain of transformer + coax into the receiver resistance
(power delivered to the antenna over power available from a source of the receiver's
resistance, the reciprocal of the receive case).

Shapes: ``termination_ohm`` broadcasts against (F,) on its first axis: pass a scalar, an
(F,) array (one value per frequency), or ``r[None, :]`` for a common set of T values;
results have shape (F, *T, *D) where D is the broadcast shape of ``az_deg``/``el_deg``.
``np.inf`` means open, 0 a short; complex values are allowed.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from nullsteer.antenna import farfield as ff
from nullsteer.antenna.feedline import C0_M_PER_S
from nullsteer.antenna.geometry import FedEnd, Mesh, as_fed_end, build_mesh
from nullsteer.antenna.ground import dwight_rod_ohm, half_space_table, is_air
from nullsteer.antenna.mom import (ETA0_OHM, MID_FACTOR, MomOperator, coating_h_per_m,
                                   port_excitation)
from nullsteer.antenna.specs import AntennaSpec, FeedSpec, GroundKind, GroundSpec
from nullsteer.antenna.validity import check_budget, hemisphere_order
from nullsteer.errors import ConfigError

_IDX = {FedEnd.A: (0, 1), FedEnd.B: (1, 0)}


def transducer_gain(z_antenna_ohm: np.ndarray, feed: FeedSpec, freq_hz: np.ndarray
                    ) -> np.ndarray:
    """Power into the antenna over power available from the receiver-side source.

    The chain is: source of resistance ``feed.receiver_ohm`` → coax → ideal transformer
    (antenna/line impedance ratio ``feed.transformer_ratio``) → antenna. Uses the ABCD
    matrices of :mod:`nullsteer.antenna.feedline`; ``freq_hz`` broadcasts with
    ``z_antenna_ohm`` on the leading axis.
    """
    zl = np.asarray(z_antenna_ohm, complex)
    f = np.asarray(freq_hz, float).reshape((-1,) + (1,) * (zl.ndim - 1))
    n = np.sqrt(feed.transformer_ratio)
    a, b, c, d = 1.0 / n, 0.0 + 0j, 0.0 + 0j, n + 0j
    if feed.coax is not None:
        m = feed.coax.abcd(f)
        ca, cb, cc, cd = m[..., 0, 0], m[..., 0, 1], m[..., 1, 0], m[..., 1, 1]
        a, b, c, d = ca * a + cb * c, ca * b + cb * d, cc * a + cd * c, cc * b + cd * d
    rs = feed.receiver_ohm
    with np.errstate(invalid="ignore", divide="ignore"):
        den = a * zl + b + rs * (c * zl + d)
        gt = 4.0 * rs * np.real(zl) / np.abs(den) ** 2
    return np.where(np.isfinite(zl), gt, 0.0)


@dataclass
class PortSolution:
    """The solved two-port at each frequency, with pattern, impedance and RDF algebra.

    Attributes
    ----------
    freqs_hz : ndarray (F,)
    y_siemens : ndarray (F, 2, 2)
        Short-circuit admittance matrix, ports ordered (A, B).
    seg_currents : ndarray (F, S, 2, 2)
        Segment-end currents for 1 V at A (last index 0) and at B (1).
    """

    freqs_hz: np.ndarray
    y_siemens: np.ndarray
    seg_currents: np.ndarray
    mesh: Mesh
    ground: GroundSpec
    feed: FeedSpec
    end_a_bearing_deg: float
    notes: tuple[str, ...] = ()
    _cache: dict = field(default_factory=dict, repr=False)

    @property
    def z_ohm(self) -> np.ndarray:
        """Open-circuit impedance matrix of the two-port, (F, 2, 2) ohms."""
        return np.linalg.inv(self.y_siemens)

    @property
    def warnings(self) -> tuple[str, ...]:
        """Rule-of-thumb and validity warnings of the mesh and the ground model."""
        return self.mesh.warnings + self.notes

    def _sel(self, freq_index) -> np.ndarray:
        idx = np.arange(len(self.freqs_hz))
        return idx if freq_index is None else np.atleast_1d(idx[freq_index])

    def port_fields(self, az_deg, el_deg, freq_index=None) -> np.ndarray:
        """N_θ, N_φ of each port excitation: (F', 2 pol, 2 ports, D) with D flattened."""
        az, el = np.broadcast_arrays(np.asarray(az_deg, float), np.asarray(el_deg, float))
        key = (az.tobytes(), el.tobytes(), az.shape)
        if key not in self._cache:
            if len(self._cache) > 64:
                self._cache.clear()
            self._cache[key] = ff.fields_multi(self.mesh, self.seg_currents, self.freqs_hz,
                                               az, el, self.ground)
        return self._cache[key][self._sel(freq_index)]

    # -- circuit algebra --------------------------------------------------------------
    def _term(self, termination_ohm, fed_end, sel) -> tuple[np.ndarray, np.ndarray]:
        """Terminated-port voltage V_t and feed admittance Y_in for V_fed = 1, (F', *T)."""
        f_i, t_i = _IDX[as_fed_end(fed_end)]
        zt = np.asarray(termination_ohm, complex)
        zt = zt.reshape((1,)) if zt.ndim == 0 else zt
        shape = np.broadcast_shapes(zt.shape, (len(sel),) + (1,) * (zt.ndim - 1))
        zt = np.broadcast_to(zt, shape)
        y = self.y_siemens[sel].reshape((len(sel), 2, 2) + (1,) * (zt.ndim - 1))
        y_ff, y_ft, y_tf, y_tt = y[:, f_i, f_i], y[:, f_i, t_i], y[:, t_i, f_i], y[:, t_i, t_i]
        is_open = np.isinf(zt)
        z_fin = np.where(is_open, 0.0, zt)
        with np.errstate(invalid="ignore", divide="ignore"):
            vt = np.where(is_open, -y_tf / y_tt, -y_tf * z_fin / (1.0 + z_fin * y_tt))
        return vt, y_ff + y_ft * vt

    def feed_impedance_ohm(self, termination_ohm, fed_end, freq_index=None) -> np.ndarray:
        """Impedance at the fed corner (what the transformer sees), complex ohms (F', *T)."""
        _, y_in = self._term(termination_ohm, fed_end, self._sel(freq_index))
        return 1.0 / y_in

    def termination_loss_fraction(self, termination_ohm, fed_end, freq_index=None):
        """Fraction of the input power burned in the termination, (F', *T)."""
        sel = self._sel(freq_index)
        vt, y_in = self._term(termination_ohm, fed_end, sel)
        zt = np.broadcast_to(np.asarray(termination_ohm, complex), vt.shape)
        with np.errstate(divide="ignore", invalid="ignore"):
            yt = np.where(np.isinf(zt) | (zt == 0), 0.0, 1.0 / np.where(zt == 0, 1, zt))
        return np.abs(vt) ** 2 * np.real(yt) / np.real(y_in)

    @staticmethod
    def _field_basis(fields, pol: str) -> np.ndarray:
        """(F', 4, D) real: |a|², Re(a·b̄), Im(a·b̄), |b|² summed over the polarisations.

        fields (F', 2 pol, 2 [fed, term], D). With V_t = v, |a + v·b|² is
        [1, 2·Re v, 2·Im v, |v|²] · basis, so every termination costs four real
        multiply-adds per direction.
        """
        pols = {"vertical": [0], "horizontal": [1], "total": [0, 1]}.get(pol)
        if pols is None:
            raise ValueError(f"polarisation must be total, vertical or horizontal, got {pol!r}")
        a, b = fields[:, pols, 0], fields[:, pols, 1]
        pab = np.sum(a * np.conj(b), 1)
        return np.stack([np.sum(a.real ** 2 + a.imag ** 2, 1), pab.real, pab.imag,
                         np.sum(b.real ** 2 + b.imag ** 2, 1)], 1)

    def gain(self, termination_ohm, fed_end, az_deg, el_deg, freq_index=None,
             realized: bool = False, polarisation: str = "total") -> np.ndarray:
        """Linear gain (F', *T, *D); see :meth:`gain_dbi`."""
        sel = self._sel(freq_index)
        fe = as_fed_end(fed_end)
        az, el = np.broadcast_arrays(np.asarray(az_deg, float), np.asarray(el_deg, float))
        key = ("basis", az.tobytes(), el.tobytes(), az.shape, fe, polarisation)
        if key not in self._cache:
            pf = self.port_fields(az, el)
            self._cache[key] = self._field_basis(pf[:, :, list(_IDX[fe])], polarisation)
        basis = self._cache[key][sel]                                       # (F', 4, D)
        vt, y_in = self._term(termination_ohm, fe, sel)
        scale = ff.gain_factor(self.freqs_hz[sel]).reshape((-1,) + (1,) * (vt.ndim - 1)) / (
            0.5 * np.real(y_in))
        if realized:
            scale = scale * transducer_gain(1.0 / y_in, self.feed, self.freqs_hz[sel])
        coef = np.stack([scale, 2.0 * scale * vt.real, 2.0 * scale * vt.imag,
                         scale * (vt.real ** 2 + vt.imag ** 2)], -1)
        nf = coef.shape[0]            # F', or the termination's first axis when F' = 1
        coef = coef.reshape(nf, -1, 4)
        basis = np.broadcast_to(basis, (nf,) + basis.shape[1:])
        g = np.empty((nf, coef.shape[1], basis.shape[-1]))
        for i in range(nf):   # per frequency: the (T, D) block stays in cache
            np.einsum("ti,id->td", coef[i], basis[i], out=g[i])
        return g.reshape(vt.shape + az.shape)

    def gain_dbi(self, termination_ohm, fed_end, az_deg, el_deg, freq_index=None,
                 realized: bool = False, polarisation: str = "total") -> np.ndarray:
        """Gain in dBi toward (az_deg, el_deg), shape (F', *T, *D).

        Parameters
        ----------
        termination_ohm : complex array_like
            Termination at the other end (see the module docstring for shapes).
        fed_end : FedEnd or "A"/"B"
        az_deg, el_deg : array_like
            Compass azimuth and elevation, degrees (broadcast together).
        freq_index : int, slice or index array, optional
            Frequencies to evaluate (default all).
        realized : bool
            Include transformer/coax mismatch and coax loss into the receiver.
        polarisation : "total" | "vertical" | "horizontal"
        """
        g = self.gain(termination_ohm, fed_end, az_deg, el_deg, freq_index, realized,
                      polarisation)
        np.maximum(g, 1e-30, out=g)
        np.log10(g, out=g)
        g *= 10.0
        return g

    def axis_bearings_deg(self, fed_end) -> tuple[float, float]:
        """(front, back) compass bearings: toward the fed end, toward the terminated end."""
        fe = as_fed_end(fed_end)
        front = self.end_a_bearing_deg if fe is FedEnd.A else self.end_a_bearing_deg + 180
        return front % 360.0, (front + 180.0) % 360.0

    def fb_db(self, termination_ohm, fed_end, el_deg, freq_index=None) -> np.ndarray:
        """Front-to-back ratio along the axis at each elevation, dB, (F', *T, *E)."""
        front, back = self.axis_bearings_deg(fed_end)
        el = np.asarray(el_deg, float)
        gf = self.gain(termination_ohm, fed_end, front, el, freq_index)
        gb = self.gain(termination_ohm, fed_end, back, el, freq_index)
        return 10.0 * np.log10(np.maximum(gf, 1e-30) / np.maximum(gb, 1e-30))

    # -- optimum termination ---------------------------------------------------------
    def _fb_quadratics(self, fed_end, el_deg, freq_index=None) -> np.ndarray:
        """Coefficients (F', 2 [front, back], 3, E) of |Y·a + w|² = c0·Y² + c1·Y + c2."""
        fe = as_fed_end(fed_end)
        f_i, t_i = _IDX[fe]
        sel = self._sel(freq_index)
        el = np.atleast_1d(np.asarray(el_deg, float))
        front, back = self.axis_bearings_deg(fe)
        az = np.concatenate([np.full(el.shape, front), np.full(el.shape, back)])
        pf = self.port_fields(az, np.concatenate([el, el]), freq_index)   # (F',2,2,2E)
        y = self.y_siemens[sel]
        a = pf[:, :, f_i]
        w = y[:, t_i, t_i, None, None] * pf[:, :, f_i] - y[:, t_i, f_i, None, None] * pf[:, :, t_i]
        c0 = np.sum(np.abs(a) ** 2, 1)
        c1 = 2.0 * np.sum(np.real(a * np.conj(w)), 1)
        c2 = np.sum(np.abs(w) ** 2, 1)
        q = np.stack([c0, c1, c2], 1).reshape(len(sel), 3, 2, -1)
        return np.moveaxis(q, 2, 1)

    def optimum_termination_ohm(self, fed_end, elevation_deg, freq_index=None,
                                each: bool = False) -> np.ndarray:
        """Resistance (ohms, real ≥ 0, inf = open) that maximises F/B, per frequency.

        With one elevation this is the F/B there. With several, the ratio of the summed
        forward power to the summed backward power over those elevations is maximised
        (shape (F',)), unless ``each`` is True: then one optimum per elevation (F', E).
        F/B(Y) with Y = 1/R is a ratio of two real quadratics in Y, so the optimum is a
        root of a quadratic equation (or an end point: open or short); no search.
        """
        q = self._fb_quadratics(fed_end, elevation_deg, freq_index)
        if not each:
            q = q.sum(axis=-1, keepdims=True)
        a, b, c = q[:, 0, 0], q[:, 0, 1], q[:, 0, 2]
        d, e, f = q[:, 1, 0], q[:, 1, 1], q[:, 1, 2]
        qa, qb, qc = a * e - b * d, 2.0 * (a * f - c * d), b * f - c * e
        disc = np.sqrt(np.maximum(qb * qb - 4.0 * qa * qc, 0.0)).astype(complex)
        with np.errstate(divide="ignore", invalid="ignore"):
            roots = np.stack([(-qb + disc) / (2 * qa), (-qb - disc) / (2 * qa),
                              -qc / qb + 0j]).real
            roots = np.where(np.isfinite(roots) & (roots > 0), roots, 0.0)
            cand = np.concatenate([roots, np.zeros((1,) + a.shape), np.full((1,) + a.shape, 1e9)])
            ratio = (a * cand ** 2 + b * cand + c) / (d * cand ** 2 + e * cand + f)
        ratio = np.where(np.isfinite(ratio), ratio, -1.0)
        best = np.take_along_axis(cand, np.argmax(ratio, axis=0)[None], 0)[0]
        with np.errstate(divide="ignore"):
            r = np.where(best > 0, 1.0 / best, np.inf)
        return r if each else r[..., 0]

    # -- RDF ---------------------------------------------------------------------------
    def _hemisphere_gram(self, freq_index=None) -> np.ndarray:
        """∫ N_i·N_j* dΩ over the upper hemisphere, (F', 2, 2) by port (A, B)."""
        key = "gram"
        if key not in self._cache:
            n_el = hemisphere_order(self.mesh, float(np.max(self.freqs_hz)))
            az, el, w = ff.sphere_grid(n_el, 2 * n_el)
            pf = self.port_fields(az, el)                       # (F, 2, 2, D)
            self._cache[key] = np.einsum("fcid,fcjd,d->fij", pf, np.conj(pf), w)
        return self._cache[key][self._sel(freq_index)]

    def average_gain(self, termination_ohm, fed_end, freq_index=None) -> np.ndarray:
        """Average gain, linear, (F', *T): ∫ G dΩ over the upper hemisphere divided by 4π.

        This is the normalisation modelling programs report as "average gain": the
        fraction of the power accepted at the feed that is radiated into the upper half
        space, so a lossless antenna over perfect ground gives exactly 1 and every loss
        (termination, wire, real ground) lowers it. It is also the share of isotropic
        sky noise the loop delivers to its feed (ITU-R P.372 defines Fa at a lossless
        short monopole over perfect ground, whose average gain is 1).
        """
        fe = as_fed_end(fed_end)
        sel = self._sel(freq_index)
        vt, y_in = self._term(termination_ohm, fe, sel)
        f_i, t_i = _IDX[fe]
        gram = self._hemisphere_gram(freq_index)
        g = gram.reshape(gram.shape[:1] + (1,) * (vt.ndim - 1) + (2, 2))
        scale = ff.gain_factor(self.freqs_hz[sel]).reshape((-1,) + (1,) * (vt.ndim - 1)) / (
            0.5 * np.real(y_in))
        return scale * (g[..., f_i, f_i] + 2 * np.real(np.conj(vt) * g[..., f_i, t_i])
                        + np.abs(vt) ** 2 * g[..., t_i, t_i]).real / (4 * np.pi)

    def rdf_db(self, termination_ohm, fed_end, freq_index=None) -> np.ndarray:
        """Receiving directivity factor, dB, (F', *T).

        NCVEC E9H03: peak gain compared with the average gain over the hemisphere. The
        peak is taken along the forward axis (toward the fed end, elevations 1..90° in
        1° steps); the average is :meth:`average_gain` (upper hemisphere over 4π, the
        convention of the "average gain" that modelling programs report and in which
        published RDF figures of receiving antennas are quoted: a lossless short
        vertical over perfect ground has RDF = 4.77 dB).
        """
        fe = as_fed_end(fed_end)
        front, _ = self.axis_bearings_deg(fe)
        el = np.arange(1.0, 91.0)
        peak = self.gain(termination_ohm, fe, np.full(el.shape, front), el, freq_index).max(axis=-1)
        avg = self.average_gain(termination_ohm, fe, freq_index)
        return 10.0 * np.log10(np.maximum(peak, 1e-300) / np.maximum(avg, 1e-300))

    # -- virtual receiver ---------------------------------------------------------------
    def received_power_w(self, e_field_v_per_m, az_deg, el_deg, termination_ohm, fed_end,
                         freq_index=None) -> np.ndarray:
        """Power into the receiver for an incident, vertically polarised plane wave, watts.

        Parameters
        ----------
        e_field_v_per_m : array_like
            RMS field strength of the incident wave, V/m (broadcasts with the result).
        az_deg, el_deg : array_like
            Direction the wave arrives from (compass, elevation), degrees.
        termination_ohm, fed_end, freq_index
            As for :meth:`gain_dbi`.

        Reciprocity: P = (E²/η0)·λ²/(4π)·G_v, G_v the realized gain for the vertical (θ)
        polarisation, which includes the ground reflection of the incoming wave, the
        power burned in the termination and the feed mismatch. Vertical polarisation is
        right for ground wave and low-angle sky wave; at zero elevation over real ground
        the space-wave model gives no signal (no surface wave), so use el > 0.
        """
        sel = self._sel(freq_index)
        g = self.gain(termination_ohm, fed_end, az_deg, el_deg, freq_index, realized=True,
                      polarisation="vertical")
        lam = (C0_M_PER_S / self.freqs_hz[sel]).reshape((-1,) + (1,) * (g.ndim - 1))
        e2 = np.asarray(e_field_v_per_m, float) ** 2
        return e2 / ETA0_OHM * lam ** 2 / (4 * np.pi) * g


def watts_to_dbm(p_w: np.ndarray) -> np.ndarray:
    """Power in dBm from watts."""
    return 10.0 * np.log10(np.maximum(np.asarray(p_w, float), 1e-30) / 1e-3)


class LoopModel:
    """A loop over its ground, ready to be solved at a set of frequencies.

    Parameters
    ----------
    antenna : AntennaSpec
    ground : GroundSpec
    feed : FeedSpec, optional
        Receiver chain for realized gain and received power (default: 9:1, 50 Ω, no coax).
    density : float
        Multiplier on the automatic segment counts (convergence studies).
    mid_factor : float
        Distance (segment lengths) below which pairs use the 2×2 Gauss rule instead of
        the centroid rule (:class:`~nullsteer.antenna.mom.MomOperator`; accuracy studies).
    """

    def __init__(self, antenna: AntennaSpec, ground: GroundSpec,
                 feed: FeedSpec | None = None, density: float = 1.0,
                 mid_factor: float = MID_FACTOR) -> None:
        self.antenna = antenna
        self.ground = ground
        self.feed = feed or FeedSpec()
        self.density = density
        self.mid_factor = mid_factor

    def mesh(self, max_freq_hz: float) -> Mesh:
        return build_mesh(self.antenna, not is_air(self.ground), max_freq_hz, self.density)

    def stake_ohm(self) -> float:
        """Series resistance of each ground point's earth connection, ohms.

        0 over perfect ground; the user's ``stake_ohm``, else Dwight's rod formula
        (:func:`~nullsteer.antenna.ground.dwight_rod_ohm`) with the ground's σ.
        """
        st = self.antenna.stake
        if st is None or self.ground.kind is GroundKind.PERFECT:
            return 0.0
        if st.resistance_ohm is not None:
            return st.resistance_ohm
        r = dwight_rod_ohm(self.ground.conductivity_s_per_m, st.length_m, st.diameter_m)
        if not np.isfinite(r):
            raise ConfigError("antenna.stake_ohm", "a ground of zero conductivity has no "
                              "rod resistance: give stake_ohm")
        return r

    def solve(self, freqs_hz) -> PortSolution:
        """One MoM solve per frequency (two right-hand sides); returns the two-port data.

        The mesh is checked against the budget of :mod:`nullsteer.antenna.validity`
        before anything is filled (ConfigError naming ``band.freqs_mhz``).
        """
        freqs = np.atleast_1d(np.asarray(freqs_hz, float))
        f_max = float(np.max(freqs))
        mesh = self.mesh(f_max)
        check_budget(mesh, freqs.size, f_max)
        ground = GroundSpec(kind=GroundKind.FREE) if is_air(self.ground) else self.ground
        ant = self.antenna
        op = MomOperator(mesh, ground.kind is not GroundKind.FREE,
                         ant.wire_conductivity_s_per_m, self.mid_factor,
                         coating_h_per_m(ant.radius_m, ant.outer_radius_m, ant.insulation_eps))
        ports = [mesh.ports[FedEnd.A], mesh.ports[FedEnd.B]]
        rhs = port_excitation(mesh.n_unknowns, ports)
        zs = np.stack([op.matrix(f) for f in freqs] if ground.kind is not GroundKind.REAL
                      else self._half_space_matrices(op, ground, freqs))
        r_stake = self.stake_ohm()
        for node in mesh.ground_nodes:     # the node's wires share one earth connection
            zs[:, np.array(node)[:, None], np.array(node)[None, :]] += r_stake
        cur = np.linalg.solve(zs, np.broadcast_to(rhs, zs.shape[:1] + rhs.shape))
        y = cur[:, ports, :]
        seg = np.moveaxis(mesh.segment_currents(np.moveaxis(cur, 0, 1)), 2, 0)
        notes = ant.notes + tuple(passivity_warnings(freqs, y))
        return PortSolution(freqs_hz=freqs, y_siemens=y, seg_currents=seg, mesh=mesh,
                            ground=ground, feed=self.feed,
                            end_a_bearing_deg=ant.end_a_bearing_deg, notes=notes)


    @staticmethod
    def _half_space_matrices(op: MomOperator, ground: GroundSpec, freqs: np.ndarray
                             ) -> list[np.ndarray]:
        """The matrices over a lossy half-space: one Sommerfeld table per frequency."""
        fill = op.half_space(2.0 * np.pi * float(np.max(freqs)) / C0_M_PER_S)
        lo, hi = fill.r_range_m
        return [op.matrix(f, half_space_table(ground, f, lo, hi, fill.zeta_min_m))
                for f in freqs]


def passivity_warnings(freqs_hz: np.ndarray, y_siemens: np.ndarray) -> list[str]:
    """A warning for each frequency where the two-port is not passive.

    A passive two-port has a positive semi-definite Hermitian part of Z (every
    termination absorbs power; circuit theory, common practice). A negative eigenvalue
    means the ground model has gone outside what it can do.
    """
    z = np.linalg.inv(y_siemens)
    herm = 0.5 * (z + np.conj(np.swapaxes(z, 1, 2)))
    lo = np.linalg.eigvalsh(herm)[:, 0]
    scale = np.max(np.abs(z), axis=(1, 2))
    bad = np.nonzero(lo < -1e-7 * scale)[0]
    if bad.size == 0:
        return []
    return [f"the two-port is not passive at {freqs_hz[bad[0]] / 1e6:g} MHz (Re Z eigenvalue "
            f"{lo[bad[0]]:.3g} Ω) in {bad.size} of {len(freqs_hz)} frequencies: the "
            "near-ground model is outside its validity; do not trust these figures"]
