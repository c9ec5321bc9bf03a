"""The model's summary of a solved loop: what ``nullsteer model`` prints and the report
tabulates (optimum termination, F/B, feed impedance, RDF, gains, null, needed range).

Never does: I/O, printing.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from nullsteer.antenna.metrics import azimuth_pattern, null_of
from nullsteer.antenna.needed import needed_range
from nullsteer.antenna.validity import single_null_warnings
from nullsteer.station.bearing import FedEnd, null_bearing_deg


def termination_label(r: float | None) -> dict[str, Any]:
    """``{"kind": optimum|short|open|resistor, "ohm": ...}`` for a termination."""
    if r is None:
        return {"kind": "optimum", "ohm": None}
    if r == 0:
        return {"kind": "short", "ohm": 0.0}
    if np.isinf(r):
        return {"kind": "open", "ohm": None}
    return {"kind": "resistor", "ohm": r}


def summarise(sol: Any, antenna: Any, elevations_deg: Any, fed_end: FedEnd) -> dict[str, Any]:
    """The summary of solution ``sol`` (a PortSolution) of ``antenna`` for ``fed_end``.

    With one elevation, ``r_opt_ohm`` maximises F/B there; with a span, the ratio of the
    forward to the backward power summed over the span's elevations (degrees). The
    figures are at ``antenna.termination_ohm`` when it is set, else at the optimum.
    Gains are in dBi: ``gain_front_dbi`` is the loop's own (directivity times radiation
    efficiency), ``realized_gain_front_dbi`` counts the transformer, coax and the match
    to the receiver too.
    """
    els = np.asarray(elevations_deg, dtype=float)
    r_opt = sol.optimum_termination_ohm(fed_end, els)
    r_each = sol.optimum_termination_ohm(fed_end, els, each=True)
    fb_each = np.stack([sol.fb_db(r_each[:, j], fed_end, e) for j, e in enumerate(els)], 1)
    front, back = sol.axis_bearings_deg(fed_end)

    def span_fb(r):
        gf = sol.gain(r, fed_end, front, els).sum(-1)
        gb = sol.gain(r, fed_end, back, els).sum(-1)
        return 10 * np.log10(np.maximum(gf, 1e-300) / np.maximum(gb, 1e-300))

    fb_opt = span_fb(r_opt)
    r_eval = r_opt if antenna.termination_ohm is None else np.full(r_opt.shape,
                                                                   antenna.termination_ohm)
    fb_span = span_fb(r_eval)
    zfeed = sol.feed_impedance_ohm(r_eval, fed_end)
    rdf = sol.rdf_db(r_eval, fed_end)
    mid_el = float(els[len(els) // 2])
    az, pat = azimuth_pattern(sol, r_eval, fed_end, mid_el)
    null = null_of(az, pat[:, 0])
    gain_front = sol.gain_dbi(r_eval, fed_end, front, mid_el)
    realized = sol.gain_dbi(r_eval, fed_end, front, mid_el, realized=True)
    loss = sol.termination_loss_fraction(r_eval, fed_end)
    nr = needed_range(sol, tuple(els) if len(els) > 2 else (els.min(), els.max()),
                      fed_ends=(FedEnd.A, FedEnd.B))
    rows = []
    for i, f in enumerate(sol.freqs_hz):
        rows.append({
            "freq_mhz": f / 1e6, "r_opt_ohm": float(r_opt[i]),
            "fb_db_at_r_opt": float(fb_opt[i]), "fb_db": float(fb_span[i]),
            "feed_impedance_ohm": [float(zfeed[i].real), float(zfeed[i].imag)],
            "rdf_db": float(rdf[i]), "gain_front_dbi": float(gain_front[i]),
            "realized_gain_front_dbi": float(realized[i]),
            "termination_loss_pct": float(100 * loss[i]),
            "null_bearing_deg": float(null.bearing_deg[i]),
            "null_depth_db": float(null.depth_db[i]),
            "by_elevation": [{"elevation_deg": float(e), "r_opt_ohm": float(r_each[i, j]),
                              "fb_db_at_r_opt": float(fb_each[i, j])}
                             for j, e in enumerate(els)]})
    warnings = list(sol.warnings) + single_null_warnings(sol.freqs_hz, fb_opt)
    return {"fed_end": fed_end.value, "null_toward_deg": null_bearing_deg(
                fed_end, antenna.end_a_bearing_deg),
            "termination": termination_label(antenna.termination_ohm),
            "elevations_deg": [float(e) for e in els], "pattern_elevation_deg": mid_el,
            "segments": sol.mesh.n_segments, "unknowns": sol.mesh.n_unknowns,
            "frequencies": rows, "needed_range_ohm": [nr.lo_ohm, nr.hi_ohm],
            "fb_loss_db_per_pct": nr.fb_loss_db_per_pct,
            "loss_curve_db": {f"{k:g}": v for k, v in nr.loss_curve_db.items()},
            "warnings": warnings}
