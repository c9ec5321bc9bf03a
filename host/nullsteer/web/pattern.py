"""The page's azimuth picture: the model's pattern of the present setting as an SVG.

The setting in force and the same termination with the ends swapped (the reversed
direction) are drawn on one dB scale, relative to the stronger of the two, on a compass
rose (north up, bearings clockwise). :func:`pattern_cut` computes the cut from a solved
model; :func:`pattern_svg` only draws, so it can be checked with made-up numbers.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

#: Depth shown below the pattern's peak, dB (the centre of the rose).
FLOOR_DB = 40.0
RING_DB = (0.0, -10.0, -20.0, -30.0)
SIZE = 320
RADIUS = 130.0


@dataclass(frozen=True)
class PatternCut:
    """An azimuth cut of the present setting and of its reverse.

    Attributes
    ----------
    az_deg : ndarray
        Compass bearings, degrees.
    now_dbi, reversed_dbi : ndarray
        Gain of the present setting and of the same termination fed from the other end,
        dBi.
    freq_hz, elevation_deg, termination_ohm : float
        Where the cut was taken (``inf`` ohms: open termination).
    fed_end : str
        Fed end of the present setting.
    """

    az_deg: np.ndarray
    now_dbi: np.ndarray
    reversed_dbi: np.ndarray
    freq_hz: float
    elevation_deg: float
    termination_ohm: float
    fed_end: str

    def summary(self) -> dict[str, Any]:
        """Null bearing and depth, and F/B along the loop's axis, for the page's text."""
        i = int(np.argmin(self.now_dbi))
        peak = float(np.max(self.now_dbi))
        out = {"freq_mhz": round(self.freq_hz / 1e6, 4), "elevation_deg": self.elevation_deg,
               "peak_dbi": round(peak, 2),
               "null_bearing_deg": round(float(self.az_deg[i]), 1),
               "null_depth_db": round(peak - float(self.now_dbi[i]), 1),
               "termination_ohm": (None if not math.isfinite(self.termination_ohm)
                                   else round(self.termination_ohm, 1))}
        return out


def pattern_cut(solution: Any, freq_index: int, fed_end: str, termination_ohm: float,
                elevation_deg: float, step_deg: float = 2.0) -> PatternCut:
    """The cut of ``solution`` (a PortSolution) at one of its frequencies."""
    az = np.arange(0.0, 360.0, step_deg)
    other = "B" if fed_end == "A" else "A"
    now = solution.gain_dbi(termination_ohm, fed_end, az, elevation_deg,
                            freq_index=freq_index)[0]
    rev = solution.gain_dbi(termination_ohm, other, az, elevation_deg,
                            freq_index=freq_index)[0]
    return PatternCut(az, np.asarray(now, float), np.asarray(rev, float),
                      float(solution.freqs_hz[freq_index]), float(elevation_deg),
                      float(termination_ohm), fed_end)


def _xy(az_deg: float, r: float) -> tuple[float, float]:
    """Compass bearing (north up, clockwise) and radius to SVG x, y."""
    a = math.radians(az_deg)
    c = SIZE / 2
    return c + r * math.sin(a), c - r * math.cos(a)


def _radius(rel_db: float) -> float:
    return RADIUS * max(0.0, (rel_db + FLOOR_DB) / FLOOR_DB)


def _path(az_deg: np.ndarray, rel_db: np.ndarray) -> str:
    pts = [_xy(float(a), _radius(float(g))) for a, g in zip(az_deg, rel_db)]
    return "M" + " L".join(f"{x:.1f},{y:.1f}" for x, y in pts) + " Z"


def pattern_svg(cut: PatternCut, null_bearing_deg: float | None = None) -> str:
    """The cut as a standalone SVG (text only from numbers; safe to inline)."""
    top = float(max(np.max(cut.now_dbi), np.max(cut.reversed_dbi)))
    now = cut.now_dbi - top
    rev = cut.reversed_dbi - top
    c = SIZE / 2
    parts = [f'<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {SIZE} {SIZE}" '
             'class="rose" role="img" aria-label="azimuth pattern">']
    for ring in RING_DB:
        r = _radius(ring)
        parts.append(f'<circle cx="{c}" cy="{c}" r="{r:.1f}" class="ring"/>')
        parts.append(f'<text x="{c + 3:.1f}" y="{c - r + 11:.1f}" class="ringlabel">'
                     f'{ring:g} dB</text>')
    for b in range(0, 360, 30):
        x, y = _xy(b, RADIUS)
        parts.append(f'<line x1="{c}" y1="{c}" x2="{x:.1f}" y2="{y:.1f}" class="spoke"/>')
        lx, ly = _xy(b, RADIUS + 14)
        label = {0: "N", 90: "E", 180: "S", 270: "W"}.get(b, f"{b}")
        parts.append(f'<text x="{lx:.1f}" y="{ly + 4:.1f}" class="bearing">{label}</text>')
    parts.append(f'<path d="{_path(cut.az_deg, rev)}" class="rev"/>')
    parts.append(f'<path d="{_path(cut.az_deg, now)}" class="now"/>')
    if null_bearing_deg is not None:
        x, y = _xy(null_bearing_deg, RADIUS)
        parts.append(f'<line x1="{c}" y1="{c}" x2="{x:.1f}" y2="{y:.1f}" class="nullray"/>')
        parts.append(f'<circle cx="{x:.1f}" cy="{y:.1f}" r="5" class="nulldot"/>')
    parts.append("</svg>")
    return "".join(parts)
