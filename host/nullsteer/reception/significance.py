"""Is a null real? The difference of two sets of readings with a confidence interval.

After the search, the best setting (candidate) and the reference are read afresh in the
order candidate, reference, reference, candidate (an ABBA block: a level drifting
linearly with time, a slow fade, cancels from the difference). The search's own
reading of the best setting is *not* used: it is the lowest of several noisy
readings and so biased low (on pure noise it would always show a "null").

The null depth is ``mean(candidate) - mean(reference)`` of the individual readings in
dB, its uncertainty that of Welch's unequal-variances t-test (B. L. Welch, Biometrika
34, 1947; NIST/SEMATECH e-Handbook of Statistical Methods, section 7.3.1), with the
Welch-Satterthwaite degrees of freedom. Each side's variance is at least the mean of
its readings' own squared spreads (a meter's resolution, an IQ reading's averaging),
so identical quantised readings never claim infinite precision. The null is
*significant* when the whole two-sided confidence interval lies below 0 dB.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from statistics import NormalDist
from typing import Any

_BIG_DOF = 1e6


def t_two_sided(t: float, dof: int) -> float:
    """``A(t|v) = P(|T| < t)`` for Student's t with integer ``dof`` (Abramowitz and Stegun,
    eq. 26.7.3 for odd, 26.7.4 for even degrees of freedom)."""
    theta = math.atan(abs(t) / math.sqrt(dof))
    c2 = math.cos(theta) ** 2
    if dof % 2 == 0:
        term, total = 1.0, 1.0
        for k in range(1, dof // 2):
            term *= c2 * (2 * k - 1) / (2 * k)
            total += term
        return math.sin(theta) * total
    if dof == 1:
        return 2.0 * theta / math.pi
    term, total = 1.0, 1.0
    for k in range(1, (dof - 1) // 2):
        term *= c2 * (2 * k) / (2 * k + 1)
        total += term
    return 2.0 / math.pi * (theta + math.sin(theta) * math.cos(theta) * total)


def t_quantile(p: float, dof: float) -> float:
    """Quantile ``p`` of Student's t distribution with ``dof`` degrees of freedom.

    Below 30 degrees of freedom: the exact distribution at ``floor(dof)`` (a fractional
    Welch-Satterthwaite figure rounded down: a slightly wider, safe interval), inverted
    by bisection; from 30 up the Cornish-Fisher expansion of Abramowitz and Stegun,
    eq. 26.7.5 (error below 1e-4 there).
    """
    if not 0.0 < p < 1.0:
        raise ValueError(f"p must be in (0, 1), got {p}")
    if dof <= 0:
        raise ValueError(f"dof must be > 0, got {dof}")
    if p < 0.5:
        return -t_quantile(1.0 - p, dof)
    if dof < 30:
        v = max(1, int(math.floor(dof)))
        target = 2.0 * p - 1.0
        lo, hi = 0.0, 1.0
        while t_two_sided(hi, v) < target:
            hi *= 2.0
        for _ in range(100):
            mid = 0.5 * (lo + hi)
            if t_two_sided(mid, v) < target:
                lo = mid
            else:
                hi = mid
        return 0.5 * (lo + hi)
    x = NormalDist().inv_cdf(p)
    n = float(dof)
    g1 = (x ** 3 + x) / 4.0
    g2 = (5 * x ** 5 + 16 * x ** 3 + 3 * x) / 96.0
    g3 = (3 * x ** 7 + 19 * x ** 5 + 17 * x ** 3 - 15 * x) / 384.0
    g4 = (79 * x ** 9 + 776 * x ** 7 + 1482 * x ** 5 - 1920 * x ** 3 - 945 * x) / 92160.0
    return x + g1 / n + g2 / n ** 2 + g3 / n ** 3 + g4 / n ** 4


def _side(values: Sequence[float], sigmas: Sequence[float]) -> tuple[float, float, float]:
    """(mean, variance of the mean, dof) of one side's readings in dB."""
    n = len(values)
    mean = sum(values) / n
    floor = sum(s * s for s in sigmas) / len(sigmas) if sigmas else 0.0
    if n >= 2:
        var = sum((v - mean) ** 2 for v in values) / (n - 1)
        dof = float(n - 1) if var >= floor else _BIG_DOF
        return mean, max(var, floor) / n, dof
    return mean, floor, _BIG_DOF


@dataclass(frozen=True)
class NullEstimate:
    """A null depth with its confidence interval (dB; negative: the level went down)."""

    null_db: float
    ci_low_db: float
    ci_high_db: float
    confidence: float
    dof: float
    candidate_reads: int
    reference_reads: int

    @property
    def significant(self) -> bool:
        return self.ci_high_db < 0.0

    def describe(self) -> str:
        pct = f"{100 * self.confidence:g} %"
        interval = f"{self.null_db:+.1f} dB ({pct} interval {self.ci_low_db:+.1f} to " \
                   f"{self.ci_high_db:+.1f} dB)"
        if self.significant:
            return f"null {interval}"
        return (f"no significant null: {interval}, not distinguishable from the reference "
                "(the interferer is not above the noise, or the readings scatter too much)")

    def to_json(self) -> dict[str, Any]:
        return {"null_db": round(self.null_db, 2), "ci_low_db": round(self.ci_low_db, 2),
                "ci_high_db": round(self.ci_high_db, 2), "confidence": self.confidence,
                "dof": round(min(self.dof, 9999.0), 1), "significant": self.significant,
                "candidate_reads": self.candidate_reads,
                "reference_reads": self.reference_reads, "text": self.describe()}


def null_estimate(candidate_db: Sequence[float], reference_db: Sequence[float],
                  candidate_sigma_db: Sequence[float] = (),
                  reference_sigma_db: Sequence[float] = (),
                  confidence: float = 0.95) -> NullEstimate:
    """Welch's t interval for ``mean(candidate) - mean(reference)``.

    Parameters
    ----------
    candidate_db, reference_db : sequences of float
        Individual readings, dB (at least one each).
    candidate_sigma_db, reference_sigma_db : sequences of float
        Each reading's own spread (one sigma), dB; may be empty.
    confidence : float
        Two-sided confidence level, e.g. 0.95.
    """
    if not candidate_db or not reference_db:
        raise ValueError("need at least one candidate and one reference reading")
    mc, vc, dc = _side(candidate_db, candidate_sigma_db)
    mr, vr, dr = _side(reference_db, reference_sigma_db)
    se2 = vc + vr
    diff = mc - mr
    if se2 <= 0.0:
        return NullEstimate(diff, diff, diff, confidence, _BIG_DOF, len(candidate_db),
                            len(reference_db))
    dof = se2 ** 2 / (vc ** 2 / dc + vr ** 2 / dr) if (vc > 0 or vr > 0) else _BIG_DOF
    half = t_quantile(0.5 + confidence / 2.0, dof) * math.sqrt(se2)
    return NullEstimate(diff, diff - half, diff + half, confidence, dof, len(candidate_db),
                        len(reference_db))
