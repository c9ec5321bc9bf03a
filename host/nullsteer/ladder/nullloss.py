"""Predicted null loss from quantisation: F/B at the chosen setting vs at the optimum.

Works with any solved loop object that offers ``freqs_hz``,
``optimum_termination_ohm(fed_end, elevations_deg, each=True) -> (F, E)`` and
``fb_db(termination_ohm (F,), fed_end, elevation_deg) -> (F,)`` (the antenna model's
``PortSolution``). For every frequency, elevation and fed end the setting is the one the
board would pick for the optimum (nearest by ratio of the nominal table, or, with a
remote line, nearest seen impedance); its actual impedance at that frequency includes the
relay parasitics, the line (if any) and the resistor tolerance extremes (all parts at
-t, nominal, +t). The loss is F/B(optimum) - F/B(setting), worst of the three builds.

Null depth ceiling: at the exact optimum for one elevation the modelled null is
practically infinitely deep, so any error "costs" a lot against infinity. Both F/B
values are therefore capped at ``ceiling_db`` (default 30 dB) before taking the
difference: it is common practice (from memory) that nulls on sky-wave signals deeper
than about 30 dB are not kept for long, because the arriving elevation and polarisation
wander. The capped loss is the figure the 3 dB goal applies to; the raw loss is reported
beside it.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from nullsteer.antenna.metrics import NULL_DEPTH_CEILING_DB
from nullsteer.ladder.design import LadderDesign, settings_impedance_ohm
from nullsteer.ladder.remote import RemoteSpec, seen_termination_ohm

#: Deepest null counted, dB (common practice, from memory: see the module docstring).
DEFAULT_CEILING_DB = NULL_DEPTH_CEILING_DB


@dataclass(frozen=True)
class NullLoss:
    """Loss table and its worst case.

    Attributes
    ----------
    freqs_hz : ndarray (F,)
    elevations_deg : ndarray (E,)
    loss_db : dict
        Fed end -> ndarray (F, E) of F/B lost with both F/B capped at ``ceiling_db``, dB
        (nan where open is the optimum).
    worst_db : float
        Worst capped loss (the goal figure), dB.
    raw_loss_db : dict
        The same without the cap.
    worst_raw_db : float
    ceiling_db : float
    """

    freqs_hz: np.ndarray
    elevations_deg: np.ndarray
    loss_db: dict
    worst_db: float
    raw_loss_db: dict
    worst_raw_db: float
    ceiling_db: float = DEFAULT_CEILING_DB

    def to_json(self) -> dict:
        return {"worst_db": self.worst_db, "worst_raw_db": self.worst_raw_db,
                "ceiling_db": self.ceiling_db,
                "freqs_mhz": (self.freqs_hz / 1e6).tolist(),
                "elevations_deg": self.elevations_deg.tolist(),
                "loss_db": {k: [[float(x) if np.isfinite(x) else None for x in row] for row in v]
                            for k, v in self.loss_db.items()}}


def _impedances(design: LadderDesign, f: np.ndarray, remote: RemoteSpec | None) -> list[np.ndarray]:
    t = design.tolerance_pct / 100.0
    out = []
    for scale in (1.0 - t, 1.0, 1.0 + t):
        out.append(seen_termination_ohm(design, remote, f, scale) if remote
                   else settings_impedance_ohm(design, f, scale))
    return out


def _worst(table: dict) -> float:
    finite = [v[np.isfinite(v)] for v in table.values()]
    allv = np.concatenate(finite) if finite else np.zeros(0)
    return float(allv.max()) if allv.size else float("nan")


def predicted_null_loss(design: LadderDesign, solution, elevations_deg, fed_ends=("A", "B"),
                        remote: RemoteSpec | None = None,
                        ceiling_db: float = DEFAULT_CEILING_DB) -> NullLoss:
    """F/B lost to quantisation at each frequency and elevation, dB.

    Parameters
    ----------
    design : LadderDesign
    solution : PortSolution-like
        Solved loop (see the module docstring).
    elevations_deg : sequence of float
        Elevations of the signals to be nulled.
    fed_ends : sequence
        Fed ends to evaluate (values accepted by the solution, e.g. "A", "B").
    remote : RemoteSpec, optional
        The line to a remote ladder.
    ceiling_db : float
        Cap on both F/B values for the capped loss, dB (see the module docstring).
    """
    f = np.asarray(solution.freqs_hz, dtype=float)
    el = np.atleast_1d(np.asarray(elevations_deg, dtype=float))
    zs = _impedances(design, f, remote)                        # each (M, F)
    nominal_dc = np.array([s.ohms for s in design.settings])
    rows = np.arange(f.size)
    table: dict = {}
    raw_table: dict = {}
    for fe in fed_ends:
        r_opt = np.asarray(solution.optimum_termination_ohm(fe, el, each=True), dtype=float)
        loss = np.full((f.size, el.size), np.nan)
        raw = np.full((f.size, el.size), np.nan)
        for j, e in enumerate(el):
            r = r_opt[:, j]
            ok = np.isfinite(r) & (r > 0)
            if not ok.any():
                continue
            rr = np.where(ok, r, 1.0)
            if remote is None:
                pick = np.argmin(np.abs(np.log(nominal_dc[:, None] / rr[None, :])), axis=0)
            else:
                pick = np.argmin(np.abs(zs[1] - rr[None, :]), axis=0)
            fb_opt = np.asarray(solution.fb_db(rr, fe, e), dtype=float).reshape(f.size)
            worst = np.zeros(f.size)
            worst_raw = np.zeros(f.size)
            for z in zs:
                fb = np.asarray(solution.fb_db(z[pick, rows], fe, e), dtype=float).reshape(f.size)
                worst = np.maximum(worst, np.minimum(fb_opt, ceiling_db)
                                   - np.minimum(fb, ceiling_db))
                worst_raw = np.maximum(worst_raw, fb_opt - fb)
            loss[:, j] = np.where(ok, worst, np.nan)
            raw[:, j] = np.where(ok, worst_raw, np.nan)
        name = str(getattr(fe, "value", fe))
        table[name], raw_table[name] = loss, raw
    return NullLoss(f, el, table, _worst(table), raw_table, _worst(raw_table), ceiling_db)
