"""Typed specs of the station sections the antenna model reads, and their parsers.

The keys of ``[antenna]``, ``[ground]``, ``[band]`` and ``[feed]`` (types, units,
defaults, ranges, meaning) are described once, in :mod:`nullsteer.antenna.sections`, and
read through those descriptions here; ``docs/station-file.md`` is generated from them.
Geometry is converted to polylines in the loop's own frame (see :class:`AntennaSpec`).
"""

from __future__ import annotations

import enum
import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from nullsteer.antenna.feedline import Coax
from nullsteer.antenna.sections import (ANTENNA, BAND, COMMON_KEYS, FEED, GROUND, MAX_EXTENT_M,
                                        POLYLINE_KEYS, PVC_EPS, RECTANGLE_KEYS, TRIANGLE_KEYS)
from nullsteer.station.config import check_unknown, parse_freqs_mhz
from nullsteer.errors import ConfigError


class Shape(enum.Enum):
    RECTANGLE = "rectangle"
    TRIANGLE = "triangle"
    POLYLINES = "polylines"


class GroundKind(enum.Enum):
    FREE = "free"
    PERFECT = "perfect"
    REAL = "real"


@dataclass(frozen=True)
class StakeSpec:
    """The earth connection of a ground point: a measured resistance, or a driven rod."""

    resistance_ohm: float | None = None
    length_m: float = 1.0
    diameter_m: float = 0.016


@dataclass(frozen=True)
class AntennaSpec:
    """Loop geometry in the loop's own frame (see the module docstring for the keys).

    ``polylines`` holds the wire vertices ``(along_m, across_m, height_m)``; ``closed``
    tells which polylines close on themselves; ``end_a_m`` / ``end_b_m`` are the port
    vertices. Rectangle and triangle specs are converted to this form by the parser.
    """

    shape: Shape
    polylines: tuple[tuple[tuple[float, float, float], ...], ...]
    closed: tuple[bool, ...]
    end_a_m: tuple[float, float, float]
    end_b_m: tuple[float, float, float]
    wire_diameter_m: float = 1.6e-3
    end_a_bearing_deg: float = 0.0
    segments_per_wire: int = 0
    wire_conductivity_s_per_m: float = 0.0
    insulation_m: float = 0.0
    insulation_eps: float = PVC_EPS
    ground_points: tuple[tuple[float, float, float], ...] = ()
    stake: StakeSpec | None = None
    notes: tuple[str, ...] = ()
    termination_ohm: float | None = None

    @property
    def radius_m(self) -> float:
        return self.wire_diameter_m / 2.0

    @property
    def outer_radius_m(self) -> float:
        """Conductor radius plus insulation: the axis height of a wire lying on the soil."""
        return self.wire_diameter_m / 2.0 + self.insulation_m


@dataclass(frozen=True)
class GroundSpec:
    """Ground under the loop: kind, conductivity σ (S/m) and relative permittivity εr."""

    kind: GroundKind = GroundKind.REAL
    conductivity_s_per_m: float = 0.005
    permittivity: float = 13.0


@dataclass(frozen=True)
class BandSpec:
    """Frequencies (Hz) and the elevations (degrees) of the signals to be nulled."""

    freqs_hz: tuple[float, ...]
    elevations_deg: tuple[float, ...]

    @property
    def elevation_span_deg(self) -> tuple[float, float]:
        return (min(self.elevations_deg), max(self.elevations_deg))


@dataclass(frozen=True)
class FeedSpec:
    """Receiver chain at the fed end: ideal transformer, coax, receiver input resistance."""

    transformer_ratio: float = 9.0
    receiver_ohm: float = 50.0
    coax: Coax | None = None


_W = "antenna"
_SHAPE_KEYS = {"rectangle": RECTANGLE_KEYS, "triangle": TRIANGLE_KEYS, "polylines": POLYLINE_KEYS}


def rectangle_polyline(length_m: float, height_m: float, bottom_m: float,
                       port_position: str = "bottom"):
    """Vertices of a rectangle in the loop frame, and its two port vertices."""
    a, b = length_m / 2.0, -length_m / 2.0
    if port_position == "middle":
        mid = 0.5 * (height_m + bottom_m)
        pts: tuple[tuple[float, float, float], ...] = (
            (a, 0.0, bottom_m), (a, 0.0, mid), (a, 0.0, height_m), (b, 0.0, height_m),
            (b, 0.0, mid), (b, 0.0, bottom_m))
        return pts, (a, 0.0, mid), (b, 0.0, mid)
    corners: tuple[tuple[float, float, float], ...] = (
        (a, 0.0, bottom_m), (a, 0.0, height_m), (b, 0.0, height_m), (b, 0.0, bottom_m))
    return corners, (a, 0.0, bottom_m), (b, 0.0, bottom_m)


def _point(value: Any, key: str) -> tuple[float, float, float]:
    if (not isinstance(value, list) or len(value) != 3
            or any(isinstance(v, bool) or not isinstance(v, (int, float)) for v in value)):
        raise ConfigError(key, f"must be a point [along_m, across_m, height_m], got {value!r}")
    p = (float(value[0]), float(value[1]), float(value[2]))
    if not all(math.isfinite(v) and abs(v) <= MAX_EXTENT_M for v in p):
        raise ConfigError(key, f"must be finite and within {MAX_EXTENT_M:g} m, got {value!r}")
    return p


def _parse_polylines(t: dict[str, Any]):
    raw = t.get("polylines")
    if not isinstance(raw, list) or not raw:
        raise ConfigError(f"{_W}.polylines", "must be a non-empty list of point lists")
    lines = []
    for i, line in enumerate(raw):
        key = f"{_W}.polylines[{i}]"
        if not isinstance(line, list) or len(line) < 2:
            raise ConfigError(key, "must be a list of at least two points")
        lines.append(tuple(_point(p, f"{key}[{j}]") for j, p in enumerate(line)))
    closed_raw = t.get("closed", [True] * len(lines))
    if (not isinstance(closed_raw, list) or len(closed_raw) != len(lines)
            or not all(isinstance(c, bool) for c in closed_raw)):
        raise ConfigError(f"{_W}.closed", f"must be a list of {len(lines)} true/false values")
    for i, (line, c) in enumerate(zip(lines, closed_raw)):
        if c and len(line) < 3:
            raise ConfigError(f"{_W}.polylines[{i}]", "a closed polyline needs three points")
    ends = []
    for key in ("end_a_point_m", "end_b_point_m"):
        if key not in t:
            raise ConfigError(f"{_W}.{key}", "is required for shape polylines")
        ends.append(_point(t[key], f"{_W}.{key}"))
    return tuple(lines), tuple(closed_raw), ends[0], ends[1]


def _parse_triangle(t: dict[str, Any]):
    length = ANTENNA.get(t, "length_m", _W)
    base_h = ANTENNA.get(t, "base_height_m", _W)
    apex_h = ANTENNA.get(t, "apex_height_m", _W)
    offset = ANTENNA.get(t, "apex_offset_m", _W, minimum=-length / 2, maximum=length / 2)
    if abs(apex_h - base_h) < 1e-3:
        raise ConfigError(f"{_W}.apex_height_m", "must differ from base_height_m")
    corners = {"base_a": (length / 2, 0.0, base_h), "base_b": (-length / 2, 0.0, base_h),
               "apex": (offset, 0.0, apex_h)}
    ca = ANTENNA.get(t, "end_a_corner", _W)
    cb = ANTENNA.get(t, "end_b_corner", _W)
    if ca == cb:
        raise ConfigError(f"{_W}.end_b_corner", f"must differ from end_a_corner ({ca!r})")
    pts = (corners["base_a"], corners["apex"], corners["base_b"])
    return (pts,), (True,), corners[ca], corners[cb]


def parse_antenna(table: dict[str, Any]) -> AntennaSpec:
    """Parse the ``[antenna]`` table; bad or unknown keys raise ConfigError."""
    shape = Shape(ANTENNA.get(table, "shape", _W))
    check_unknown(table, set(COMMON_KEYS) | set(_SHAPE_KEYS[shape.value]), _W)
    diameter_mm = ANTENNA.get(table, "wire_diameter_mm", _W)
    bearing = ANTENNA.get(table, "end_a_bearing_deg", _W) % 360.0
    nseg = ANTENNA.get(table, "segments_per_wire", _W)
    sigma = ANTENNA.get(table, "wire_conductivity_s_per_m", _W)
    if shape is Shape.RECTANGLE:
        length = ANTENNA.get(table, "length_m", _W)
        height = ANTENNA.get(table, "height_m", _W)
        bottom = ANTENNA.get(table, "bottom_m", _W)
        if bottom >= height:
            raise ConfigError(f"{_W}.bottom_m", f"must be below height_m ({height:g}), "
                              f"got {bottom:g}")
        pos = ANTENNA.get(table, "port_position", _W)
        pts, ea, eb = rectangle_polyline(length, height, bottom, pos)
        lines, closed = (pts,), (True,)
    elif shape is Shape.TRIANGLE:
        lines, closed, ea, eb = _parse_triangle(table)
    else:
        lines, closed, ea, eb = _parse_polylines(table)
    for i, line in enumerate(lines):
        for p in line:
            if p[2] < 0.0:
                raise ConfigError(f"{_W}.polylines[{i}]", f"point {list(p)} is below ground")
    ins_mm = ANTENNA.get(table, "insulation_mm", _W)
    ins_eps = ANTENNA.get(table, "insulation_eps", _W)
    grounds, stake = _parse_ground_points(table, lines) if shape is Shape.POLYLINES else ((), None)
    outer = diameter_mm * 5e-4 + ins_mm * 1e-3
    lines, ea, eb, notes = _rest_on_soil(lines, ea, eb, grounds, outer)
    return AntennaSpec(shape=shape, polylines=lines, closed=closed, end_a_m=ea, end_b_m=eb,
                       wire_diameter_m=diameter_mm * 1e-3, end_a_bearing_deg=bearing,
                       segments_per_wire=nseg, wire_conductivity_s_per_m=sigma,
                       insulation_m=ins_mm * 1e-3, insulation_eps=ins_eps,
                       ground_points=grounds, stake=stake, notes=notes,
                       termination_ohm=parse_termination(table.get("termination"),
                                                         f"{_W}.termination"))


def parse_termination(value: Any, key: str) -> float | None:
    """A termination: ohms (≥ 0), "short" (0) or "open" (inf); None when absent.

    Strings holding a number (a command-line value) are read as ohms.
    """
    if value is None:
        return None
    if isinstance(value, str):
        word = value.strip().lower()
        if word == "short":
            return 0.0
        if word == "open":
            return math.inf
        try:
            value = float(word)
        except ValueError:
            raise ConfigError(key, f"must be ohms, short or open; got {value!r}") from None
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise ConfigError(key, f"must be ohms, short or open; got {value!r}")
    r = float(value)
    if not (math.isfinite(r) and r >= 0.0):
        raise ConfigError(key, f"must be a finite resistance >= 0 ohms, short or open; got {value!r}")
    return r


def _parse_ground_points(t: dict[str, Any], lines) -> tuple[tuple, StakeSpec | None]:
    """``ground_points_m`` (vertices at height 0 that go into the soil) and their stake."""
    key = f"{_W}.ground_points_m"
    raw = t.get("ground_points_m", [])
    if not isinstance(raw, list):
        raise ConfigError(key, "must be a list of points [along_m, across_m, 0]")
    verts = {p for line in lines for p in line}
    pts = []
    for j, v in enumerate(raw):
        p = _point(v, f"{key}[{j}]")
        if p[2] != 0.0:
            raise ConfigError(f"{key}[{j}]", f"a ground point sits on the soil (height 0), "
                              f"got {p[2]:g} m")
        if p not in verts:
            raise ConfigError(f"{key}[{j}]", f"point {list(p)} is not a polyline vertex")
        pts.append(p)
    stake_keys = ("stake_ohm", "stake_length_m", "stake_diameter_mm")
    if not pts:
        for k in stake_keys:
            if k in t:
                raise ConfigError(f"{_W}.{k}", "needs ground_points_m")
        return (), None
    r = ANTENNA.get(t, "stake_ohm", _W) if "stake_ohm" in t else None
    length = ANTENNA.get(t, "stake_length_m", _W)
    dia = ANTENNA.get(t, "stake_diameter_mm", _W)
    return tuple(pts), StakeSpec(resistance_ohm=r, length_m=length, diameter_m=dia * 1e-3)


def _rest_on_soil(lines, ea, eb, grounds, outer_m: float):
    """Lift every vertex lower than the wire's outer radius (ground points excepted) to it.

    A wire cannot sink into the soil: its axis rests at least one outer radius above it.
    """
    keep = set(grounds)
    lifted: list[float] = []

    def lift(p):
        if p in keep or p[2] >= outer_m:
            return p
        lifted.append(p[2])
        return (p[0], p[1], outer_m)

    lines = tuple(tuple(lift(p) for p in line) for line in lines)
    ea, eb = lift(ea), lift(eb)
    notes: tuple[str, ...] = ()
    if any(h > 0 for h in lifted):
        notes = (f"wire below its outer radius ({outer_m * 1e3:.2g} mm) lifted to rest on "
                 "the soil",)
    return lines, ea, eb, notes


#: Ground categories named as ITU-R P.527 names them: (conductivity S/m, εr). Values from
#: memory of the Recommendation's curves at about 1 MHz (the same pairs head the ground-
#: wave curves of ITU-R P.368); not read from the curves here.
SOIL_PRESETS: dict[str, tuple[float, float]] = {
    "sea-water": (5.0, 70.0),
    "fresh-water": (3e-3, 80.0),
    "wet-ground": (1e-2, 30.0),
    "medium-dry": (1e-3, 15.0),
    "very-dry": (1e-4, 3.0),
}


def parse_ground(table: dict[str, Any]) -> GroundSpec:
    """Parse the ``[ground]`` table; bad or unknown keys raise ConfigError."""
    GROUND.check(table, "ground")
    kind = GroundKind(GROUND.get(table, "kind", "ground"))
    if "preset" in table:
        name = GROUND.get(table, "preset", "ground")
        for k in ("conductivity_s_per_m", "permittivity"):
            if k in table:
                raise ConfigError(f"ground.{k}", "cannot be combined with ground.preset")
        if kind is not GroundKind.REAL:
            raise ConfigError("ground.preset", f"needs kind real, got {kind.value!r}")
        sigma_p, eps_p = SOIL_PRESETS[name]
        return GroundSpec(kind=kind, conductivity_s_per_m=sigma_p, permittivity=eps_p)
    sigma = GROUND.get(table, "conductivity_s_per_m", "ground")
    eps = GROUND.get(table, "permittivity", "ground")
    return GroundSpec(kind=kind, conductivity_s_per_m=sigma, permittivity=eps)


def parse_elevations_deg(value: Any, key: str, step_deg: float = 5.0) -> tuple[float, ...]:
    """Elevations in degrees: a number, ``[lo, hi]`` span, "lo:hi[:step]" or a list."""
    if isinstance(value, str):
        try:
            nums = [float(p) for p in value.split(":")]
        except ValueError:
            raise ConfigError(key, f"expected degrees or lo:hi[:step], got {value!r}") from None
        if len(nums) == 1:
            vals = nums
        elif len(nums) in (2, 3):
            lo, hi = nums[0], nums[1]
            step = nums[2] if len(nums) == 3 else step_deg
            vals = _span(lo, hi, step, key)
        else:
            raise ConfigError(key, f"expected degrees or lo:hi[:step], got {value!r}")
    elif isinstance(value, (int, float)) and not isinstance(value, bool):
        vals = [float(value)]
    elif isinstance(value, list) and value and all(
            isinstance(v, (int, float)) and not isinstance(v, bool) for v in value):
        vals = _span(float(value[0]), float(value[1]), step_deg, key) if len(value) == 2 \
            else [float(v) for v in value]
    else:
        raise ConfigError(key, f"expected degrees, [lo, hi] or a list, got {value!r}")
    for v in vals:
        if not (math.isfinite(v) and 0.0 < v <= 90.0):
            raise ConfigError(key, f"{v:g}° is outside 0 < elevation <= 90")
    return tuple(sorted(set(vals)))


def _span(lo: float, hi: float, step: float, key: str) -> list[float]:
    if not step > 0:
        raise ConfigError(key, f"step must be > 0, got {step:g}")
    if hi < lo:
        raise ConfigError(key, f"span end {hi:g} is below its start {lo:g}")
    n = int(math.floor((hi - lo) / step + 1e-9))
    vals = [lo + i * step for i in range(n + 1)]
    if hi - vals[-1] > 1e-9:
        vals.append(hi)
    return vals


def parse_band(table: dict[str, Any]) -> BandSpec:
    """Parse the ``[band]`` table (``freqs_mhz``, ``elevation_deg``)."""
    BAND.check(table, "band")
    if "freqs_mhz" not in table:
        raise ConfigError("band.freqs_mhz", "is required")
    freqs = parse_freqs_mhz(table["freqs_mhz"], "band.freqs_mhz")
    step = BAND.get(table, "elevation_step_deg", "band")
    els = parse_elevations_deg(table.get("elevation_deg", [10.0, 60.0]), "band.elevation_deg",
                               step)
    return BandSpec(freqs_hz=tuple(f * 1e6 for f in freqs), elevations_deg=els)


def parse_feed(table: dict[str, Any]) -> FeedSpec:
    """Parse the ``[feed]`` table (transformer, receiver, optional coax)."""
    w = "feed"
    FEED.check(table, w)
    ratio = FEED.get(table, "transformer_ratio", w)
    rx = FEED.get(table, "receiver_ohm", w)
    length = FEED.get(table, "coax_length_m", w)
    coax = None
    if length > 0:
        coax = Coax(z0_ohm=FEED.get(table, "coax_z0_ohm", w),
                    velocity_factor=FEED.get(table, "coax_velocity_factor", w),
                    loss_db_per_100m=FEED.get(table, "coax_loss_db_per_100m_at_10mhz", w),
                    length_m=length)
    return FeedSpec(transformer_ratio=ratio, receiver_ohm=rx, coax=coax)


def freqs_array(band: BandSpec) -> np.ndarray:
    """The band's frequencies as a float array, hertz."""
    return np.asarray(band.freqs_hz, dtype=float)
