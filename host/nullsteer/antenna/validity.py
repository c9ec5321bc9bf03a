"""What the model can be trusted with: the resource budget checked before a solve, and
the validity warnings a result carries.

Budget (stated): at most :data:`MAX_UNKNOWNS` unknowns and :data:`MEMORY_BUDGET_BYTES`
of estimated peak memory. The estimate counts the stacked impedance matrices of the sweep
(16 bytes per complex entry), the frequency-independent tables of the fill (about
:data:`_FILL_BYTES_PER_PAIR` bytes per segment pair) and the far-field work arrays of the
hemisphere integral behind the RDF (projections and phase factors of every quadrature
point toward every direction of the grid, and the radiation vectors per frequency). It is
a coarse upper estimate, made from the mesh before anything is filled, so that an
electrically huge request (a loop at hundreds of MHz) is refused in milliseconds instead
of exhausting the machine.
"""

from __future__ import annotations

import numpy as np

from nullsteer.antenna.feedline import C0_M_PER_S
from nullsteer.antenna.geometry import Mesh
from nullsteer.errors import ConfigError

MAX_UNKNOWNS = 3000
MEMORY_BUDGET_BYTES = 2 * 1024 ** 3
_FILL_BYTES_PER_PAIR = 200
#: F/B at the optimum termination at or below which one rear null is not achievable, dB.
SINGLE_NULL_FB_DB = 3.0


def hemisphere_order(mesh: Mesh, max_freq_hz: float) -> int:
    """Gauss points in elevation of the hemisphere grid for the average gain (≥ 16).

    Twice the electrical radius k·r_max of the wires plus 8 (the far field of a source of
    radius r is band-limited to about k·r harmonics).
    """
    ext = float(np.max(np.linalg.norm(np.vstack([mesh.start_m, mesh.end_m]), axis=1)))
    k = 2.0 * np.pi * max_freq_hz / C0_M_PER_S
    return int(max(16, 2 * k * ext + 8))


def estimated_bytes(mesh: Mesh, n_freqs: int, max_freq_hz: float) -> float:
    """Coarse peak-memory estimate of a solve and its RDF, bytes (see module docstring)."""
    s, n = mesh.n_segments, mesh.n_unknowns
    n_el = hemisphere_order(mesh, max_freq_hz)
    dirs = 2 * n_el * n_el                       # n_el elevations × 2·n_el azimuths
    q = 2 * s                                    # two Gauss points per segment
    matrices = n_freqs * n * n * 16.0 + 4 * n * n * 8.0
    fill = s * s * float(_FILL_BYTES_PER_PAIR)
    far = q * 2 * dirs * (8.0 + 16.0) + n_freqs * 2 * 3 * 2 * dirs * 16.0
    return matrices + fill + far


def check_budget(mesh: Mesh, n_freqs: int, max_freq_hz: float, key: str = "band.freqs_mhz"
                 ) -> None:
    """Raise ConfigError naming ``key`` when the solve would exceed the stated budget."""
    need = estimated_bytes(mesh, n_freqs, max_freq_hz)
    n = mesh.n_unknowns
    if n > MAX_UNKNOWNS or need > MEMORY_BUDGET_BYTES:
        raise ConfigError(key, f"{n} unknowns and about {need / 2 ** 30:.1f} GiB at "
                          f"{max_freq_hz / 1e6:g} MHz exceed the model's budget "
                          f"({MAX_UNKNOWNS} unknowns, {MEMORY_BUDGET_BYTES / 2 ** 30:.0f} GiB); "
                          "lower the highest frequency or the loop size")


def single_null_warnings(freqs_hz, fb_at_optimum_db) -> list[str]:
    """The "too large for a single rear null" warning for each frequency where F/B at the
    optimum termination is at or below :data:`SINGLE_NULL_FB_DB`."""
    out = []
    for f, fb in zip(np.asarray(freqs_hz, float), np.asarray(fb_at_optimum_db, float)):
        if not fb > SINGLE_NULL_FB_DB:
            out.append(f"this loop is too large for a single rear null at {f / 1e6:g} MHz "
                       f"(F/B at the optimum termination {fb:.1f} dB)")
    return out
