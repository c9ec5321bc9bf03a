"""Remote termination: the ladder in the shack, reached through a second feedline.

Loop corner -- transformer (impedance ratio n², loop side over line side) -- coax --
ladder. The loop sees ``n² · Zin`` where ``Zin`` is the line's input impedance with the
ladder setting as load (Pozar §2.3/§2.7, closed form in
:mod:`nullsteer.antenna.feedline`). A matched line (R/n² = Z0) passes the ladder value
through unchanged apart from loss, so the suggested ratio puts the geometric middle of
the wanted range at Z0.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from nullsteer.antenna.feedline import Coax, transformer_to_primary
from nullsteer.ladder.design import LadderDesign, settings_impedance_ohm

#: Turns ratios a builder can wind on a small core (common practice), as n (not n²).
PRACTICAL_TURNS = (1.0, 1.5, 2.0, 2.5, 3.0, 3.5, 4.0, 4.5, 5.0, 6.0)


@dataclass(frozen=True)
class RemoteSpec:
    """Transformer at the terminated corner and the line to the ladder.

    Parameters
    ----------
    transformer_ratio : float
        Impedance ratio n² (loop side over line side).
    coax : Coax
        The line from that transformer to the ladder.
    """

    transformer_ratio: float
    coax: Coax


def seen_termination_ohm(design: LadderDesign, remote: RemoteSpec,
                         freq_hz: np.ndarray | float, r_scale: float = 1.0) -> np.ndarray:
    """Termination the loop sees for each setting (``design.settings`` order) and frequency."""
    f = np.atleast_1d(np.asarray(freq_hz, dtype=float))
    z_set = settings_impedance_ohm(design, f, r_scale)
    return transformer_to_primary(remote.coax.input_impedance(z_set, f[None, :]),
                                  remote.transformer_ratio)


def ladder_range_ohm(r_lo_ohm: float, r_hi_ohm: float, transformer_ratio: float) -> tuple[float, float]:
    """Ladder range that maps to a loop-side range through an ideal matched line."""
    return r_lo_ohm / transformer_ratio, r_hi_ohm / transformer_ratio


def suggest_transformer_ratio(r_lo_ohm: float, r_hi_ohm: float, z0_ohm: float) -> dict:
    """Impedance ratio that puts sqrt(r_lo r_hi)/n² at Z0, exact and nearest practical turns."""
    exact = math.sqrt(r_lo_ohm * r_hi_ohm) / z0_ohm
    n = min(PRACTICAL_TURNS, key=lambda t: abs(math.log(t * t / exact)))
    return {"exact_ratio": exact, "turns": n, "ratio": n * n}


def reactance_warnings(seen_ohm: np.ndarray, freq_hz: np.ndarray, limit_pct: float,
                       lo_ohm: float, hi_ohm: float) -> list[dict]:
    """Frequencies where a setting inside the wanted range has |X|/R above ``limit_pct``.

    A reactive termination moves the null as an error of the same size in ohms would, so
    a useful limit is the ladder's own worst-case error (compare like with like).
    """
    out = []
    f = np.atleast_1d(freq_hz)
    for j, fj in enumerate(f):
        z = seen_ohm[:, j]
        inside = (z.real >= lo_ohm) & (z.real <= hi_ohm)
        if not inside.any():
            out.append({"freq_mhz": fj / 1e6, "worst_x_over_r_pct": float("nan"),
                        "message": "no setting lands inside the wanted range"})
            continue
        ratio = np.abs(z.imag[inside]) / z.real[inside] * 100.0
        worst = float(ratio.max())
        if worst > limit_pct:
            out.append({"freq_mhz": fj / 1e6, "worst_x_over_r_pct": worst,
                        "message": f"reactance up to {worst:.1f} % of R costs null depth"})
    return out
