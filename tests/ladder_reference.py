"""Brute-force reference for a ladder's worst-case coverage error (used by several tests).

The rule is the board's (PROTOCOL.md, "nearest by ratio"): for each wanted R the board
picks the nominal setting s minimising |ln(R/s)|; the built resistor lies anywhere in
[s(1-t), s(1+t)], so the worst ratio error for that R is max(s(1+t)/R, R/(s(1-t))).
The reference samples R densely on a log grid and picks the setting by brute force over
the whole table; it shares no code with host/nullsteer/ladder/coverage.py.
See tests/test_ladder_coverage.py for the sources of the definition.
"""

import numpy as np


def brute_force_pct(settings, lo, hi, tol_pct, n=200_001):
    t = tol_pct / 100.0
    r = np.geomspace(lo, hi, n)
    s = np.asarray(settings, float)
    s = s[np.isfinite(s) & (s > 0)]
    worst = 0.0
    for r_part in np.array_split(r, max(1, n // 10_000)):   # bounded memory
        dist = np.abs(np.log(r_part[:, None] / s[None, :]))
        chosen = s[np.argmin(dist, axis=1)]      # lowest index wins a tie, as the board
        each = np.maximum(chosen * (1 + t) / r_part, r_part / (chosen * (1 - t)))
        worst = max(worst, float(each.max()))
    return (worst - 1.0) * 100.0
