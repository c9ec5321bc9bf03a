"""Antenna model performance: port reduction, matrix fill vs LU, full sweep.

Plain script; prints figures and ratios side by side (goals in brackets), asserts nothing.
Run: .venv/bin/python benchmarks/bench_antenna.py
"""

from __future__ import annotations

import time

import numpy as np

from nullsteer.antenna.geometry import FedEnd, mesh_from_pieces
from nullsteer.antenna.mom import MID_FACTOR, MomOperator, port_excitation
from pathlib import Path

from nullsteer.antenna.ground import half_space_table
from nullsteer.antenna.needed import needed_range
from nullsteer.antenna.ports import LoopModel
from nullsteer.antenna.specs import parse_antenna, parse_ground
from nullsteer.antenna.station import station_loop
from nullsteer.station.config import load_station

EXAMPLE = Path(__file__).resolve().parents[1] / "examples" / "station.toml"

FLAG = dict(shape="rectangle", length_m=8.84, height_m=6.1, bottom_m=1.83,
            wire_diameter_mm=1.63, end_a_bearing_deg=65.0)


def best_of(fn, repeat=5):
    times = []
    for _ in range(repeat):
        t = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t)
    return min(times)


def port_reduction():
    model = LoopModel(parse_antenna(FLAG), parse_ground({"kind": "real"}))
    terms = np.geomspace(100.0, 10000.0, 256)
    sol = model.solve([1.83e6])
    mesh = sol.mesh
    op = MomOperator(mesh, True)
    table = real_table(op, model.ground, 1.83e6)
    pa, pb = mesh.ports[FedEnd.A], mesh.ports[FedEnd.B]

    def naive():
        z = op.matrix(1.83e6, table)
        v = np.zeros(mesh.n_unknowns, complex)
        v[pa] = 1
        out = []
        for r in terms:   # re-solve with the load in the matrix, as without the 2-port trick
            zl = z.copy()
            zl[pb, pb] += r
            out.append(1 / np.linalg.solve(zl, v)[pa])
        return out

    z0 = op.matrix(1.83e6, table)
    rhs = port_excitation(mesh.n_unknowns, [pa, pb])

    def reduced():   # same filled matrix: one solve with two right-hand sides + algebra
        cur = np.linalg.solve(z0, rhs)
        y = cur[[pa, pb], :]
        yt = 1.0 / terms
        return 1.0 / (y[0, 0] - y[0, 1] * y[1, 0] / (y[1, 1] + yt))

    t_fill = best_of(lambda: op.matrix(1.83e6, table), 5)
    t_naive, t_red = best_of(naive, 3), best_of(reduced, 20)
    t_naive_solves = t_naive - t_fill
    print(f"port reduction, 256 terminations ({mesh.n_unknowns} unknowns): 256 loaded "
          f"solves {t_naive_solves * 1e3:.2f} ms vs one 2-RHS solve + algebra "
          f"{t_red * 1e3:.3f} ms, ratio {t_naive_solves / t_red:.0f}x  [goal >= 100x]")
    print(f"  including the matrix fill ({t_fill * 1e3:.2f} ms) on both sides: ratio "
          f"{t_naive / (t_fill + t_red):.1f}x; the 2-port API call after solve(): "
          f"{best_of(lambda: sol.feed_impedance_ohm(terms[None, :], 'A'), 20) * 1e6:.0f} us")


def fill_vs_lu(n_target=400):
    sides = 8
    pts = [np.array([6 * np.cos(t), 6 * np.sin(t), 0.0])
           for t in 2 * np.pi * np.arange(sides) / sides]
    pieces = [(pts[i], pts[(i + 1) % sides]) for i in range(sides)]
    mesh = mesh_from_pieces(pieces, 1e-3, {"p": pts[0]}, False, 30e6, fixed=n_target // sides)
    op = MomOperator(mesh, False)
    z = op.matrix(10e6)
    rhs = port_excitation(mesh.n_unknowns, [0, 1])
    # best of 30: LU runs in BLAS threads, which a second busy process on a 2-core
    # machine stalls now and then (single runs of 3.5 ms and 160 ms were both seen)
    t_fill = best_of(lambda: op.matrix(10e6), 30)
    t_lu = best_of(lambda: np.linalg.solve(z, rhs), 30)
    print(f"matrix fill vs LU at {mesh.n_unknowns} unknowns: fill {t_fill * 1e3:.1f} ms, "
          f"LU+solve {t_lu * 1e3:.1f} ms, ratio {t_fill / t_lu:.2f}  [goal <= 2]")
    op_g = MomOperator(mesh, True)
    ground = parse_ground({"kind": "real"})
    table = real_table(op_g, ground, 10e6)
    t_tab = best_of(lambda: real_table(op_g, ground, 10e6), 3)
    t_fill_g = best_of(lambda: op_g.matrix(10e6, table), 3)
    print(f"  same over real ground (Sommerfeld half-space): table {t_tab * 1e3:.1f} ms + "
          f"fill {t_fill_g * 1e3:.1f} ms")
    op_ref = MomOperator(mesh, False, mid_factor=np.inf)
    z_ref = op_ref.matrix(10e6)
    t_ref = best_of(lambda: op_ref.matrix(10e6), 3)
    zin = 1.0 / np.linalg.solve(z, rhs)[0, 0]
    zin_ref = 1.0 / np.linalg.solve(z_ref, rhs)[0, 0]
    print(f"  vs 2x2 Gauss on every pair ({t_ref * 1e3:.1f} ms): max |dZ_mn| / max |Z| "
          f"{np.max(np.abs(z - z_ref)) / np.max(np.abs(z_ref)):.1e}, input impedance "
          f"{abs(zin / zin_ref - 1) * 100:.4f} %")


def fill_accuracy():
    """What the centroid rule for distant pairs costs in accuracy (reference: 2×2 Gauss
    on every pair, mid_factor = inf, the rule used for all far pairs before)."""
    freqs = np.linspace(1.8e6, 2.0e6, 5)
    el = np.array([10.0, 30.0, 60.0])
    out = []
    for mid in (MID_FACTOR, np.inf):
        model = LoopModel(parse_antenna(FLAG), parse_ground({"kind": "real"}), mid_factor=mid)
        sol = model.solve(freqs)
        out.append((sol.optimum_termination_ohm("A", el, each=True),
                    sol.feed_impedance_ohm(900.0, "A"), sol.fb_db(900.0, "A", el),
                    sol.rdf_db(900.0, "A")))
    (r0, z0, f0, d0), (r1, z1, f1, d1) = out
    print(f"fill accuracy, flag over real ground, 1.8-2.0 MHz, el 10/30/60 deg, centroid "
          f"rule beyond {MID_FACTOR:g} segment lengths vs 2x2 Gauss everywhere: R_opt "
          f"{np.max(np.abs(r0 / r1 - 1)) * 100:.4f} %  [goal < 0.1 %], feed Z at 900 ohm "
          f"{np.max(np.abs(z0 / z1 - 1)) * 100:.4f} %, F/B {np.max(np.abs(f0 - f1)):.4f} dB, "
          f"RDF {np.max(np.abs(d0 - d1)):.4f} dB")


def real_table(op, ground, freq_hz):
    fill = op.half_space(2 * np.pi * freq_hz / 299_792_458.0)
    lo, hi = fill.r_range_m
    return half_space_table(ground, freq_hz, lo, hi, fill.zeta_min_m)


def full_sweep():
    freqs = np.linspace(1.8e6, 2.0e6, 60)
    terms = np.geomspace(100.0, 10000.0, 256)[None, :]
    az = np.arange(0.0, 360.0, 1.0)
    el = np.array([10.0, 30.0, 60.0])
    times = {}
    for kind in ("perfect", "real"):
        model = LoopModel(parse_antenna(FLAG), parse_ground({"kind": kind}))

        def sweep():
            sol = model.solve(freqs)
            out = []
            for fe in (FedEnd.A, FedEnd.B):
                out.append(sol.gain_dbi(terms, fe, az[None, :], el[:, None]))
                out.append(sol.rdf_db(terms, fe))
            return out

        times[kind] = (best_of(sweep, 3), best_of(lambda: model.solve(freqs), 3))
    (tp, sp), (tr, sr) = times["perfect"], times["real"]
    print(f"full sweep 60 f x 2 ends x 256 R x 360 az x 3 el + RDF: perfect ground "
          f"{tp:.2f} s, real ground {tr:.2f} s, ratio {tr / tp:.1f}  "
          f"[goal real <= 1.5 s, <= 3x perfect]")
    print(f"  of which 60 MoM solves: perfect {sp:.3f} s, real {sr:.3f} s")


def demo_station_sweep():
    """The demo station's own loop and band (examples/station.toml), both grounds."""
    loop = station_loop(load_station(EXAMPLE))
    freqs = np.array(loop.band.freqs_hz)
    els = np.array(loop.band.elevations_deg)
    t = {}
    for kind in ("perfect", "real"):
        ground = loop.ground if kind == "real" else parse_ground({"kind": "perfect"})
        model = LoopModel(loop.antenna, ground, loop.feed)

        def run():
            sol = model.solve(freqs)
            r = sol.optimum_termination_ohm("A", els)
            return needed_range(sol, (els.min(), els.max())), sol.rdf_db(r, "A")

        t[kind] = best_of(run, 3)
    print(f"demo station sweep ({freqs.size} f, optimum, needed range, RDF): perfect "
          f"{t['perfect'] * 1e3:.0f} ms, real {t['real'] * 1e3:.0f} ms, ratio "
          f"{t['real'] / t['perfect']:.1f}  [goal <= 3x, <= 1.5 s]")


if __name__ == "__main__":
    port_reduction()
    fill_vs_lu()
    fill_accuracy()
    full_sweep()
    demo_station_sweep()
