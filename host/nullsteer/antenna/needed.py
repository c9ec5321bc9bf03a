"""The termination range a ladder must cover, and how fast the null fills in.

For every frequency of the band, every elevation of the span (signals to be nulled) and
both fed ends, the F/B-optimum termination is found in closed form
(:meth:`PortSolution.optimum_termination_ohm`). The needed range is the smallest and
largest of those optima. The sensitivity is the F/B lost per per cent of termination
error near the optimum: the worst case over the table of the loss at ±``ref_error_pct``
divided by ``ref_error_pct`` (an average slope; a deep null loses most in its first
per cent, so the loss curve at several errors is given too). F/B deeper than a realistic
null (``ceiling_db``, 30 dB by default) is not counted: see
:data:`~nullsteer.antenna.metrics.NULL_DEPTH_CEILING_DB`.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from nullsteer.antenna.geometry import FedEnd
from nullsteer.antenna.metrics import NULL_DEPTH_CEILING_DB, fb_loss_db
from nullsteer.antenna.ports import PortSolution

ERRORS_PCT = (1.0, 2.0, 5.0, 10.0, 20.0)


@dataclass(frozen=True)
class OptimumRow:
    """One line of the optimum table."""

    freq_hz: float
    fed_end: str
    elevation_deg: float
    r_opt_ohm: float
    fb_db: float

    def to_json(self) -> dict:
        return {"freq_mhz": self.freq_hz / 1e6, "fed_end": self.fed_end,
                "elevation_deg": self.elevation_deg, "r_opt_ohm": self.r_opt_ohm,
                "fb_db": self.fb_db}


@dataclass(frozen=True)
class NeededRange:
    """Termination range over band × elevation span × fed ends, with sensitivity.

    Attributes
    ----------
    lo_ohm, hi_ohm : float
        Smallest and largest optimum (inf if open is ever best).
    table : tuple of OptimumRow
    fb_loss_db_per_pct : float
        Worst-case F/B lost per % of termination error (slope over ±ref_error_pct).
    ref_error_pct : float
    loss_curve_db : dict
        Error (%) -> worst-case F/B lost (dB).
    """

    lo_ohm: float
    hi_ohm: float
    table: tuple[OptimumRow, ...]
    fb_loss_db_per_pct: float
    ref_error_pct: float
    loss_curve_db: dict

    def to_json(self) -> dict:
        return {"needed_range_ohm": [self.lo_ohm, self.hi_ohm],
                "fb_loss_db_per_pct": self.fb_loss_db_per_pct,
                "ref_error_pct": self.ref_error_pct,
                "loss_curve_db": {f"{k:g}": v for k, v in self.loss_curve_db.items()},
                "optima": [r.to_json() for r in self.table]}


def span_elevations(span_deg: tuple[float, float] | list[float], step_deg: float = 5.0
                    ) -> np.ndarray:
    """Elevations sampling a (lo, hi) span every ``step_deg``, both ends included."""
    lo, hi = float(min(span_deg)), float(max(span_deg))
    n = int(np.floor((hi - lo) / step_deg + 1e-9))
    el = lo + step_deg * np.arange(n + 1)
    return el if hi - el[-1] < 1e-9 else np.append(el, hi)


def needed_range(sol: PortSolution, elevation_span_deg=(10.0, 60.0), step_deg: float = 5.0,
                 fed_ends=(FedEnd.A, FedEnd.B), ref_error_pct: float = 5.0,
                 ceiling_db: float | None = NULL_DEPTH_CEILING_DB) -> NeededRange:
    """Needed termination range and null-depth sensitivity.

    Parameters
    ----------
    sol : PortSolution
        Solved over the band.
    elevation_span_deg : (lo, hi) or sequence
        Span of the signals to be nulled, degrees; sampled every ``step_deg`` (a sequence
        of more than two values is used as given).
    fed_ends : sequence of FedEnd
        Directions the user will switch between.
    ref_error_pct : float
        Termination error at which the sensitivity slope is taken, per cent.
    ceiling_db : float or None
        Null depth beyond which F/B is not counted in the sensitivity
        (:data:`~nullsteer.antenna.metrics.NULL_DEPTH_CEILING_DB`; None: uncapped).
    """
    span = list(elevation_span_deg)
    el = np.asarray(span, float) if len(span) > 2 else span_elevations(span, step_deg)
    rows, losses = [], []
    errs = np.array(sorted(set(ERRORS_PCT) | {ref_error_pct}))
    for fe in fed_ends:
        r = sol.optimum_termination_ohm(fe, el, each=True)               # (F, E)
        for j, e in enumerate(el):
            fb = sol.fb_db(r[:, j], fe, e)
            finite = np.isfinite(r[:, j])
            if np.any(finite):
                losses.append(fb_loss_db(sol, fe, e, np.where(finite, r[:, j], 1.0),
                                         errs, ceiling_db)[finite])
            for i, f in enumerate(sol.freqs_hz):
                rows.append(OptimumRow(float(f), fe.value, float(e), float(r[i, j]),
                                       float(fb[i])))
    values = np.array([row.r_opt_ohm for row in rows])
    loss = np.concatenate(losses) if losses else np.zeros((1, errs.size))
    worst = loss.max(axis=0)
    ref = float(worst[list(errs).index(ref_error_pct)])
    return NeededRange(lo_ohm=float(values.min()), hi_ohm=float(values.max()),
                       table=tuple(rows), fb_loss_db_per_pct=ref / ref_error_pct,
                       ref_error_pct=ref_error_pct,
                       loss_curve_db={float(e): float(w) for e, w in zip(errs, worst)})
