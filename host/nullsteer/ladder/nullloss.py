"""Predicted null loss from quantisation: F/B at the chosen setting vs at the optimum.

Works with any solved loop object that offers ``freqs_hz``,
``optimum_termination_ohm(fed_end, elevations_deg, each=True) -> (F, E)`` and
``fb_db(termination_ohm (F,), fed_end, elevation_deg) -> (F,)`` (the antenna model's
``PortSolution``). For every frequency, elevation and fed end the setting is the one the
board would pick for the optimum (nearest by ratio of the nominal table, or, with a
remote line, nearest seen impedance); its actual impedance at that frequency includes the
relay parasitics, the line (if any) and the resistor tolerance extremes (all parts at
-t, nominal, +t). The loss is F/B(optimum) - F/B(setting), worst of the three builds.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from nullsteer.ladder.design import LadderDesign, settings_impedance_ohm
from nullsteer.ladder.remote import RemoteSpec, seen_termination_ohm


@dataclass(frozen=True)
class NullLoss:
    """Loss table and its worst case.

    Attributes
    ----------
    freqs_hz : ndarray (F,)
    elevations_deg : ndarray (E,)
    loss_db : dict
        Fed end -> ndarray (F, E) of F/B lost, dB (nan where open is the optimum).
    worst_db : float
    """

    freqs_hz: np.ndarray
    elevations_deg: np.ndarray
    loss_db: dict
    worst_db: float

    def to_json(self) -> dict:
        return {"worst_db": self.worst_db,
                "freqs_mhz": (self.freqs_hz / 1e6).tolist(),
                "elevations_deg": self.elevations_deg.tolist(),
                "loss_db": {k: np.where(np.isfinite(v), v, None).tolist()
                            for k, v in self.loss_db.items()}}


def _impedances(design: LadderDesign, f: np.ndarray, remote: RemoteSpec | None) -> list[np.ndarray]:
    t = design.tolerance_pct / 100.0
    out = []
    for scale in (1.0 - t, 1.0, 1.0 + t):
        out.append(seen_termination_ohm(design, remote, f, scale) if remote
                   else settings_impedance_ohm(design, f, scale))
    return out


def predicted_null_loss(design: LadderDesign, solution, elevations_deg, fed_ends=("A", "B"),
                        remote: RemoteSpec | None = None) -> NullLoss:
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
    """
    f = np.asarray(solution.freqs_hz, dtype=float)
    el = np.atleast_1d(np.asarray(elevations_deg, dtype=float))
    zs = _impedances(design, f, remote)                        # each (M, F)
    nominal_dc = np.array([s.ohms for s in design.settings])
    rows = np.arange(f.size)
    table: dict = {}
    for fe in fed_ends:
        r_opt = np.asarray(solution.optimum_termination_ohm(fe, el, each=True), dtype=float)
        loss = np.full((f.size, el.size), np.nan)
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
            for z in zs:
                fb = np.asarray(solution.fb_db(z[pick, rows], fe, e), dtype=float).reshape(f.size)
                worst = np.maximum(worst, fb_opt - fb)
            loss[:, j] = np.where(ok, worst, np.nan)
        table[str(getattr(fe, "value", fe))] = loss
    finite = [v[np.isfinite(v)] for v in table.values()]
    allv = np.concatenate(finite) if finite else np.zeros(0)
    return NullLoss(f, el, table, float(allv.max()) if allv.size else float("nan"))
