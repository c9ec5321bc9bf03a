"""Fast matrix fill and far field: what the shortcuts cost, against their error bounds."""

import numpy as np

from nullsteer.antenna import farfield as ff
from nullsteer.antenna.geometry import mesh_from_pieces
from nullsteer.antenna.mom import MomOperator, port_excitation
from nullsteer.antenna.ports import LoopModel
from nullsteer.antenna.specs import parse_antenna, parse_ground

FT = 0.3048
# QST, July 2000 example flag (REFERENCES.md): 14 × 29 ft, top 20 ft, bottom 6 ft, #14.
QST_FLAG = dict(shape="rectangle", length_m=29 * FT, height_m=20 * FT, bottom_m=6 * FT,
                wire_diameter_mm=1.628, end_a_bearing_deg=65.0)


def test_centroid_rule_keeps_optimum_termination():
    # Midpoint-rule error (l²/24)·f'' (Davis & Rabinowitz, Methods of Numerical
    # Integration, §2.2; from memory): for pairs beyond 8 segment lengths it is < 1e-3
    # per pair, so the flag's R_opt, feed impedance and F/B must stay within 0.1 % /
    # 0.01 dB of the 2×2 Gauss rule on every pair (the task's accuracy goal).
    freqs = [1.83e6, 3.6e6]
    out = []
    for mid in (8.0, np.inf):
        sol = LoopModel(parse_antenna(QST_FLAG), parse_ground({"kind": "real"}),
                        mid_factor=mid).solve(freqs)
        out.append((sol.optimum_termination_ohm("A", [10.0, 30.0, 60.0], each=True),
                    sol.feed_impedance_ohm(900.0, "A"), sol.fb_db(900.0, "A", 20.0)))
    (r0, z0, f0), (r1, z1, f1) = out
    assert np.all(np.abs(r0 / r1 - 1) < 1e-3)
    assert np.all(np.abs(z0 / z1 - 1) < 1e-3)
    assert np.all(np.abs(f0 - f1) < 0.01)


def test_centroid_rule_dipole_impedance():
    # Balanis §4.6 half-wave dipole (λ = 1 m): the fast fill must agree with the 2×2
    # rule on every pair to 0.1 % in Zin (midpoint-rule bound, as above); the
    # reference must itself be non-trivially different (the rules are not the same).
    p0, pc, p1 = np.array([0, 0, -0.25]), np.zeros(3), np.array([0, 0, 0.25])
    m = mesh_from_pieces([(p0, pc), (pc, p1)], 1e-4, {"f": pc}, False, 299_792_458.0,
                         fixed=40)
    rhs = port_excitation(m.n_unknowns, [m.ports["f"]])
    zin = []
    for mid in (8.0, np.inf):
        z = MomOperator(m, False, mid_factor=mid).matrix(299_792_458.0)
        zin.append(1.0 / np.linalg.solve(z, rhs)[m.ports["f"], 0])
    assert 1e-9 < abs(zin[0] / zin[1] - 1) < 1e-3


def test_uniform_sweep_phase_recurrence():
    # Exponent law e^{j(k+Δk)x} = e^{jkx}·e^{jΔkx} (exact arithmetic): the far field of a
    # uniform sweep from the step recurrence equals the per-frequency direct exponential.
    sol = LoopModel(parse_antenna(QST_FLAG), parse_ground({"kind": "real"})).solve(
        np.linspace(1.8e6, 2.0e6, 41))
    az, el = np.meshgrid(np.arange(0.0, 360.0, 7.0), [5.0, 35.0, 80.0])
    multi = ff.fields_multi(sol.mesh, sol.seg_currents, sol.freqs_hz, az, el, sol.ground)
    for i in (0, 17, 40):
        one = ff.fields(sol.mesh, sol.seg_currents[i], sol.freqs_hz[i], az, el, sol.ground)
        assert np.allclose(multi[i], one, rtol=1e-11, atol=1e-12 * np.abs(one).max())


def test_gain_matches_direct_field_sum():
    # Definition of gain (Balanis §2.9: G = 4πU/P_in) evaluated straight from the port
    # fields, for many terminations and directions at once (the fast quadratic-form path).
    sol = LoopModel(parse_antenna(QST_FLAG), parse_ground({"kind": "perfect"})).solve(
        [1.83e6, 3.6e6])
    r = np.array([200.0, 950.0, np.inf])
    az = np.arange(0.0, 360.0, 30.0)
    g = sol.gain(r[None, :], "B", az, 25.0)
    pf = sol.port_fields(az, np.full(az.shape, 25.0))
    vt, y_in = sol._term(r[None, :], "B", np.arange(2))
    n = pf[:, :, 1][:, :, None, :] + vt[:, None, :, None] * pf[:, :, 0][:, :, None, :]
    direct = ff.gain_factor(sol.freqs_hz)[:, None, None] * np.sum(np.abs(n) ** 2, 1) / (
        0.5 * np.real(y_in))[:, :, None]
    assert np.allclose(g, direct, rtol=1e-10)
