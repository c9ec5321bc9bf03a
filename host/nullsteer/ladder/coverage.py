"""How well a set of settings covers a wanted termination range (the optimiser's objective).

The error of a setting ``s`` for a wanted termination ``R`` is a ratio,
``max(s/R, R/s)``; it is quoted in percent as ``(ratio - 1) * 100``. The worst-case
error of a ladder over ``[lo, hi]`` is the largest, over every wanted ``R`` in the
range, of the error of the setting nearest (by ratio) to ``R``.

With resistor tolerance ``t`` every setting of a resistor network lies within
``[s (1 - t), s (1 + t)]`` (series and parallel combinations are increasing and
homogeneous of degree one in the resistor values). Were the setting picked nearest to
``R`` times the shift ``1/sqrt(1 - t**2)``,
the worst-case ratio ``rho`` would satisfy ``ln rho = h + tau`` with
``tau = 0.5 ln((1 + t)/(1 - t))`` and ``h`` the nominal log error over the shifted range;
the optimiser uses that shifted range as its target. The board, though, picks the
setting nearest to ``R`` itself, and :func:`worst_case_error_pct` reports the worst
case for that rule (a little larger).
"""

from __future__ import annotations

import math

import numpy as np

_TINY_OHM = 1e-9


def log_settings(settings_ohm: np.ndarray) -> np.ndarray:
    """Sorted natural logs of the finite settings (zero is clamped to a tiny value)."""
    s = np.asarray(settings_ohm, dtype=float)
    s = s[np.isfinite(s)]
    return np.sort(np.log(np.maximum(s, _TINY_OHM)), axis=-1)


def gap_errors_rows(x_sorted: np.ndarray, lo_log: float, hi_log: float) -> np.ndarray:
    """Per row, the worst log error inside each stretch of [lo_log, hi_log] between
    neighbouring settings, and below the first and above the last setting.

    Parameters
    ----------
    x_sorted : ndarray, shape (N, M)
        Natural logs of the settings (ohms), each row ascending.
    lo_log, hi_log : float
        ln of the range ends (ohms), ``lo_log < hi_log``.

    Returns
    -------
    ndarray, shape (N, M + 1)
        Column 0: below the first setting, 1 .. M-1: between settings m-1 and m, M: above
        the last; 0 for a stretch outside the range. The row maximum is the worst error.
    """
    x = np.atleast_2d(x_sorted)
    below = np.maximum(x[:, :1] - lo_log, 0.0)
    above = np.maximum(hi_log - x[:, -1:], 0.0)
    left, right = x[:, :-1], x[:, 1:]
    p = np.maximum(left, lo_log)
    q = np.minimum(right, hi_log)
    c = np.clip(0.5 * (left + right), p, q)
    tent = np.where(p <= q, np.minimum(c - left, right - c), 0.0)
    return np.concatenate((below, tent, above), axis=1)


def worst_log_error_rows(x_sorted: np.ndarray, lo_log: float, hi_log: float) -> np.ndarray:
    """Worst nominal log error for each row of sorted log settings: shape (N, M) ->
    (N,), ``max over ln R in [lo_log, hi_log] of min_m |x_m - ln R|``."""
    return gap_errors_rows(x_sorted, lo_log, hi_log).max(axis=1)


def worst_log_error(settings_ohm: np.ndarray, lo_ohm: float, hi_ohm: float) -> float:
    """Worst nominal log error of one set of settings over [lo_ohm, hi_ohm]."""
    x = log_settings(settings_ohm)
    return float(worst_log_error_rows(x[None, :], math.log(lo_ohm), math.log(hi_ohm))[0])


def tolerance_shift(tolerance_pct: float) -> tuple[float, float]:
    """(range shift factor, tau) for a tolerance in percent; see the module docstring."""
    t = tolerance_pct / 100.0
    return 1.0 / math.sqrt(1.0 - t * t), 0.5 * math.log((1.0 + t) / (1.0 - t))


def worst_case_error_pct(settings_ohm: np.ndarray, lo_ohm: float, hi_ohm: float,
                         tolerance_pct: float) -> float:
    """Worst-case ratio error over the range including resistor tolerance, percent, for
    the board's choice rule: the nominal setting nearest to the wanted R by ratio
    (``protocol.wire.nearest_index``), built anywhere within ``[s (1 - t), s (1 + t)]``.

    With x = ln R and z the chosen nominal log value, the worst ratio is
    ``z - x + ln(1 + t)`` for x <= z and ``x - z - ln(1 - t)`` for x > z; over the
    stretch [L, U] of the range where z is nearest (bounded by the log midpoints to its
    neighbours, clipped to the range), each branch is largest at an end of the stretch.
    """
    t = tolerance_pct / 100.0
    a, b = math.log1p(t), -math.log1p(-t)
    z = log_settings(settings_ohm)
    la, lb = math.log(lo_ohm), math.log(hi_ohm)
    mids = 0.5 * (z[:-1] + z[1:])
    lower = np.maximum(np.concatenate(([-np.inf], mids)), la)
    upper = np.minimum(np.concatenate((mids, [np.inf])), lb)
    used = lower <= upper
    z, lower, upper = z[used], lower[used], upper[used]

    def err(x: np.ndarray) -> np.ndarray:
        return np.where(x <= z, z - x + a, x - z + b)

    worst = float(np.maximum(err(lower), err(upper)).max())
    return (math.exp(worst) - 1.0) * 100.0


def worst_step_pct(settings_ohm: np.ndarray, lo_ohm: float, hi_ohm: float) -> float:
    """Largest ratio step between neighbouring settings inside the range, percent: a
    pair that straddles an end of the range counts only its part inside the range."""
    s = np.sort(np.asarray(settings_ohm, dtype=float))
    s = s[np.isfinite(s) & (s > 0)]
    if s.size < 2:
        return float("inf")
    left, right = np.maximum(s[:-1], lo_ohm), np.minimum(s[1:], hi_ohm)
    touches = right >= left
    if not touches.any():
        return float("inf")
    return float(((right / left)[touches].max() - 1.0) * 100.0)


def ratio_error_pct(setting_ohm: float, wanted_ohm: float) -> float:
    """Signed error of a setting for a wanted value, percent of the wanted value."""
    return (setting_ohm / wanted_ohm - 1.0) * 100.0
