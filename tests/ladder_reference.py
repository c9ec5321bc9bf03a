"""Brute-force reference for a ladder's worst-case coverage error (used by several tests).

See tests/test_ladder_coverage.py for the definition and its sources.
"""

import numpy as np


def brute_force_pct(settings, lo, hi, tol_pct, n=200_001):
    t = tol_pct / 100.0
    r = np.geomspace(lo, hi, n)[:, None]
    s = np.asarray(settings, float)[None, :]
    worst_each = np.maximum(s * (1 + t) / r, r / (s * (1 - t)))
    return (worst_each.min(axis=1).max() - 1.0) * 100.0
