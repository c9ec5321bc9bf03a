"""Pattern metrics on a solved loop: cuts, null bearing and depth, peak gain, sweeps.

All functions take a :class:`~nullsteer.antenna.ports.PortSolution` and return numpy
arrays with frequency first (see its shape rules). Gains are dBi (IEEE gain: the power
burned in the termination counts as input power) unless ``realized`` is asked for.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from nullsteer.antenna.ports import PortSolution


@dataclass(frozen=True)
class Null:
    """Deepest point of an azimuth cut: bearing (deg), depth below the cut's peak (dB)."""

    bearing_deg: np.ndarray
    depth_db: np.ndarray
    peak_dbi: np.ndarray


def azimuth_grid(step_deg: float = 1.0) -> np.ndarray:
    """Compass bearings 0 ≤ az < 360 in ``step_deg`` steps."""
    return np.arange(0.0, 360.0, step_deg)


def azimuth_pattern(sol: PortSolution, termination_ohm, fed_end, el_deg,
                    step_deg: float = 1.0, realized: bool = False) -> tuple[np.ndarray, np.ndarray]:
    """(az_deg (A,), gain_dbi (F, *T, E, A)) at the given elevations."""
    az = azimuth_grid(step_deg)
    el = np.atleast_1d(np.asarray(el_deg, float))
    g = sol.gain_dbi(termination_ohm, fed_end, az[None, :], el[:, None], realized=realized)
    return az, g


def elevation_pattern(sol: PortSolution, termination_ohm, fed_end, az_deg: float,
                      step_deg: float = 1.0, realized: bool = False
                      ) -> tuple[np.ndarray, np.ndarray]:
    """(el_deg (E,), gain_dbi (F, *T, E)) from 0 to 90° toward compass ``az_deg``."""
    el = np.arange(0.0, 90.0 + 1e-9, step_deg)
    return el, sol.gain_dbi(termination_ohm, fed_end, az_deg, el, realized=realized)


def null_of(az_deg: np.ndarray, gain_dbi: np.ndarray) -> Null:
    """Bearing and depth of the deepest null of azimuth cuts (last axis = azimuth).

    The bearing is refined by a parabola through the minimum and its neighbours.
    """
    i = np.argmin(gain_dbi, axis=-1)
    n = gain_dbi.shape[-1]
    g0 = np.take_along_axis(gain_dbi, i[..., None], -1)[..., 0]
    gm = np.take_along_axis(gain_dbi, ((i - 1) % n)[..., None], -1)[..., 0]
    gp = np.take_along_axis(gain_dbi, ((i + 1) % n)[..., None], -1)[..., 0]
    den = gm - 2 * g0 + gp
    with np.errstate(divide="ignore", invalid="ignore"):
        off = np.where(den > 0, 0.5 * (gm - gp) / den, 0.0)
    step = az_deg[1] - az_deg[0]
    peak = gain_dbi.max(axis=-1)
    return Null(bearing_deg=(az_deg[i] + np.clip(off, -0.5, 0.5) * step) % 360.0,
                depth_db=peak - g0, peak_dbi=peak)


def peak_gain_dbi(sol: PortSolution, termination_ohm, fed_end, realized: bool = False,
                  step_deg: float = 2.0) -> np.ndarray:
    """Peak gain over the upper hemisphere on a ``step_deg`` grid, dBi, (F, *T)."""
    az = azimuth_grid(step_deg)
    el = np.arange(step_deg / 2, 90.0, step_deg)
    g = sol.gain_dbi(termination_ohm, fed_end, az[None, :], el[:, None], realized=realized)
    return g.reshape(g.shape[:-2] + (-1,)).max(axis=-1)


#: Deepest null counted when losses are compared, dB. At the exact optimum for one
#: elevation the modelled null is practically infinitely deep, so any error "costs" a
#: lot against infinity; it is common practice (from memory) that nulls on sky-wave
#: signals deeper than about 30 dB are not kept for long, because the arriving
#: elevation and polarisation wander.
NULL_DEPTH_CEILING_DB = 30.0


def fb_loss_db(sol: PortSolution, fed_end, el_deg, r_opt_ohm: np.ndarray,
               error_pct: np.ndarray, ceiling_db: float | None = None) -> np.ndarray:
    """F/B lost when the termination is off by ±``error_pct`` from ``r_opt_ohm``.

    Parameters
    ----------
    r_opt_ohm : ndarray (F,)
        Optimum at ``el_deg`` (one elevation) for each frequency.
    error_pct : ndarray (P,)
        Termination errors, per cent.
    ceiling_db : float or None
        Cap both F/B values at this depth before the difference (None: no cap).

    Returns the worse of the high and low side, dB, shape (F, P).
    """
    e = np.asarray(error_pct, float) / 100.0
    r = np.asarray(r_opt_ohm, float)[:, None]
    fb0 = sol.fb_db(r, fed_end, el_deg)[:, 0]
    hi = sol.fb_db(r * (1 + e), fed_end, el_deg)
    lo = sol.fb_db(r / (1 + e), fed_end, el_deg)
    worse = np.minimum(hi, lo)
    if ceiling_db is not None:
        fb0, worse = np.minimum(fb0, ceiling_db), np.minimum(worse, ceiling_db)
    return fb0[:, None] - worse
