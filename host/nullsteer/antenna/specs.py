"""Typed specs of the station sections the antenna model reads, and their parsers.

Sections and keys (SI units unless the key says otherwise)
----------------------------------------------------------
``[antenna]`` common keys:
    ``shape``               "rectangle" | "triangle" | "polylines"
    ``wire_diameter_mm``    conductor diameter (default 1.6)
    ``end_a_bearing_deg``   compass bearing from the loop centre toward end A (default 0)
    ``segments_per_wire``   0 (default): chosen from the rules of thumb; N > 0: N segments
                            on every straight piece
    ``wire_conductivity_s_per_m``  0 (default): lossless wire; e.g. 5.8e7 for copper
    ``insulation_mm``       thickness of the wire's insulation (default 0: bare wire; a
                            typical PVC-insulated hook-up or house wire has 0.6–0.8 mm)
    ``insulation_eps``      relative permittivity of the insulation (default 3.5, PVC;
                            from memory: PVC is 3–5 at HF)

A wire resting on the soil (``bottom_m = 0``, or polyline points at height 0) has its
axis at its outer radius (conductor radius plus insulation); any wire lower than that is
lifted to it, with a warning. Only the vertices listed in ``ground_points_m`` (polylines:
points ``[along_m, across_m, 0]`` of the loop frame where a wire end goes into the soil)
connect to the ground, each through a stake: ``stake_ohm`` (a measured value) or
Dwight's rod formula from ``stake_length_m`` (default 1.0) and ``stake_diameter_mm``
(default 16) and the ground's conductivity.

rectangle (ground-level loop, flag): ``length_m`` (horizontal, end A side to end B side),
``height_m`` (top wire above ground), ``bottom_m`` (bottom wire above ground) and
``port_position`` = "bottom" (default: feed and termination at the bottom corners of the
end A / end B vertical sides) | "middle" (at the middle of those sides).

triangle (pennant, delta): ``length_m`` (horizontal side, end A corner to end B corner),
``base_height_m`` (height of that horizontal side), ``apex_height_m`` (third corner; above
or below the horizontal side), ``apex_offset_m`` (horizontal position of the apex along the
axis from the centre, positive toward end A; 0 = symmetric delta, ±length_m/2 = right
triangle), and ``end_a_corner`` / ``end_b_corner`` = "base_a" | "base_b" | "apex" (defaults
"base_a" and "base_b": the corners of the horizontal side toward end A and end B).

polylines (anything else): ``polylines`` = list of point lists, each point
``[along_m, across_m, height_m]`` in the loop's own frame (along: on the axis, positive
toward end A; across: horizontal, 90° clockwise of end A's bearing seen from above;
height: above ground); points shared between polylines join there (junction);
``closed`` = list of booleans (default: every polyline closed); ``end_a_point_m`` and
``end_b_point_m`` = the vertices (same frame) where the two ports sit.

``termination`` (optional): the resistor now on the loop, ohms, or "short" / "open"; the
model then reports the loop at that termination as well as the optimum.

``[ground]``: ``kind`` free | perfect | real (default real); for real ``conductivity_s_per_m`` (default
0.005) and ``permittivity`` (default 13, "average" ground of the ARRL table), or
``preset`` = one of :data:`SOIL_PRESETS` (ITU-R P.527 ground categories) instead of the two.

``[band]``: ``freqs_mhz`` ("start:stop:step", a number or a list); ``elevation_deg``: a
number (one elevation), ``[lo, hi]`` (a span, sampled every ``elevation_step_deg``,
default 5), a "lo:hi:step" string, or a list of three or more elevations.

``[feed]``: ``transformer_ratio`` (antenna-side over line-side impedance, default 9),
``receiver_ohm`` (50), ``coax_z0_ohm`` (50), ``coax_velocity_factor`` (0.66),
``coax_loss_db_per_100m_at_10mhz`` (4.0), ``coax_length_m`` (0: no line).
"""

from __future__ import annotations

import enum
import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from nullsteer.antenna.feedline import Coax
from nullsteer.station.config import (check_unknown, get_float, get_int, get_str,
                              parse_freqs_mhz)
from nullsteer.errors import ConfigError


class Shape(enum.Enum):
    RECTANGLE = "rectangle"
    TRIANGLE = "triangle"
    POLYLINES = "polylines"


class GroundKind(enum.Enum):
    FREE = "free"
    PERFECT = "perfect"
    REAL = "real"


#: Relative permittivity of PVC insulation (from memory: 3–5 at HF; 3.5 taken).
PVC_EPS = 3.5


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


_COMMON = {"shape", "wire_diameter_mm", "end_a_bearing_deg", "segments_per_wire",
           "wire_conductivity_s_per_m", "insulation_mm", "insulation_eps", "termination"}
_RECT = {"length_m", "height_m", "bottom_m", "port_position"}
_TRI = {"length_m", "base_height_m", "apex_height_m", "apex_offset_m", "end_a_corner",
        "end_b_corner"}
_POLY = {"polylines", "closed", "end_a_point_m", "end_b_point_m", "ground_points_m",
         "stake_ohm", "stake_length_m", "stake_diameter_mm"}
_W = "antenna"


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


#: The largest extent (length, height) of a loop, metres: far beyond any receiving loop,
#: small enough that the segment count cannot overflow before the memory guard.
MAX_EXTENT_M = 1000.0


def _parse_triangle(t: dict[str, Any]):
    length = get_float(t, "length_m", _W, minimum=0.0, exclusive_min=True,
                       maximum=MAX_EXTENT_M)
    base_h = get_float(t, "base_height_m", _W, minimum=0.0,
                       maximum=MAX_EXTENT_M)
    apex_h = get_float(t, "apex_height_m", _W, minimum=0.0,
                       maximum=MAX_EXTENT_M)
    offset = get_float(t, "apex_offset_m", _W, default=0.0, minimum=-length / 2,
                       maximum=length / 2)
    if abs(apex_h - base_h) < 1e-3:
        raise ConfigError(f"{_W}.apex_height_m", "must differ from base_height_m")
    corners = {"base_a": (length / 2, 0.0, base_h), "base_b": (-length / 2, 0.0, base_h),
               "apex": (offset, 0.0, apex_h)}
    ca = get_str(t, "end_a_corner", _W, default="base_a", choices=tuple(corners))
    cb = get_str(t, "end_b_corner", _W, default="base_b", choices=tuple(corners))
    if ca == cb:
        raise ConfigError(f"{_W}.end_b_corner", f"must differ from end_a_corner ({ca!r})")
    pts = (corners["base_a"], corners["apex"], corners["base_b"])
    return (pts,), (True,), corners[ca], corners[cb]


def parse_antenna(table: dict[str, Any]) -> AntennaSpec:
    """Parse the ``[antenna]`` table; bad or unknown keys raise ConfigError."""
    shape = Shape(get_str(table, "shape", _W, default="rectangle",
                          choices=tuple(s.value for s in Shape)))
    extra = {Shape.RECTANGLE: _RECT, Shape.TRIANGLE: _TRI, Shape.POLYLINES: _POLY}[shape]
    check_unknown(table, _COMMON | extra, _W)
    diameter_mm = get_float(table, "wire_diameter_mm", _W, default=1.6, minimum=0.0,
                            exclusive_min=True, maximum=100.0)
    bearing = get_float(table, "end_a_bearing_deg", _W, default=0.0, minimum=-360.0,
                        maximum=360.0) % 360.0
    nseg = get_int(table, "segments_per_wire", _W, default=0, minimum=0, maximum=400)
    sigma = get_float(table, "wire_conductivity_s_per_m", _W, default=0.0, minimum=0.0)
    if shape is Shape.RECTANGLE:
        length = get_float(table, "length_m", _W, minimum=0.0, exclusive_min=True,
                           maximum=MAX_EXTENT_M)
        height = get_float(table, "height_m", _W, minimum=0.0, exclusive_min=True,
                           maximum=MAX_EXTENT_M)
        bottom = get_float(table, "bottom_m", _W, minimum=0.0,
                           maximum=MAX_EXTENT_M)
        if bottom >= height:
            raise ConfigError(f"{_W}.bottom_m", f"must be below height_m ({height:g}), "
                              f"got {bottom:g}")
        pos = get_str(table, "port_position", _W, default="bottom", choices=("bottom", "middle"))
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
    ins_mm = get_float(table, "insulation_mm", _W, default=0.0, minimum=0.0, maximum=50.0)
    ins_eps = get_float(table, "insulation_eps", _W, default=PVC_EPS, minimum=1.0,
                        maximum=100.0)
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
    r = get_float(t, "stake_ohm", _W, minimum=0.0) if "stake_ohm" in t else None
    length = get_float(t, "stake_length_m", _W, default=1.0, minimum=0.0, exclusive_min=True,
                       maximum=100.0)
    dia = get_float(t, "stake_diameter_mm", _W, default=16.0, minimum=0.0, exclusive_min=True,
                    maximum=1000.0)
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
    check_unknown(table, {"kind", "conductivity_s_per_m", "permittivity", "preset"}, "ground")
    kind = GroundKind(get_str(table, "kind", "ground", default="real",
                              choices=tuple(k.value for k in GroundKind)))
    if "preset" in table:
        name = get_str(table, "preset", "ground", choices=tuple(SOIL_PRESETS))
        for k in ("conductivity_s_per_m", "permittivity"):
            if k in table:
                raise ConfigError(f"ground.{k}", "cannot be combined with ground.preset")
        if kind is not GroundKind.REAL:
            raise ConfigError("ground.preset", f"needs kind real, got {kind.value!r}")
        sigma_p, eps_p = SOIL_PRESETS[name]
        return GroundSpec(kind=kind, conductivity_s_per_m=sigma_p, permittivity=eps_p)
    sigma = get_float(table, "conductivity_s_per_m", "ground", default=0.005, minimum=0.0,
                      maximum=1e8)
    eps = get_float(table, "permittivity", "ground", default=13.0, minimum=1.0, maximum=200.0)
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
    check_unknown(table, {"freqs_mhz", "elevation_deg", "elevation_step_deg"}, "band")
    if "freqs_mhz" not in table:
        raise ConfigError("band.freqs_mhz", "is required")
    freqs = parse_freqs_mhz(table["freqs_mhz"], "band.freqs_mhz")
    step = get_float(table, "elevation_step_deg", "band", default=5.0, minimum=0.0,
                     exclusive_min=True)
    els = parse_elevations_deg(table.get("elevation_deg", [10.0, 60.0]), "band.elevation_deg",
                               step)
    return BandSpec(freqs_hz=tuple(f * 1e6 for f in freqs), elevations_deg=els)


def parse_feed(table: dict[str, Any]) -> FeedSpec:
    """Parse the ``[feed]`` table (transformer, receiver, optional coax)."""
    w = "feed"
    check_unknown(table, {"transformer_ratio", "receiver_ohm", "coax_z0_ohm",
                          "coax_velocity_factor", "coax_loss_db_per_100m_at_10mhz",
                          "coax_length_m"}, w)
    ratio = get_float(table, "transformer_ratio", w, default=9.0, minimum=0.01, maximum=1e4)
    rx = get_float(table, "receiver_ohm", w, default=50.0, minimum=0.1, maximum=1e6)
    length = get_float(table, "coax_length_m", w, default=0.0, minimum=0.0, maximum=1e5)
    coax = None
    if length > 0:
        coax = Coax(z0_ohm=get_float(table, "coax_z0_ohm", w, default=50.0, minimum=1.0,
                                     maximum=1000.0),
                    velocity_factor=get_float(table, "coax_velocity_factor", w, default=0.66,
                                              minimum=0.0, exclusive_min=True, maximum=1.0),
                    loss_db_per_100m=get_float(table, "coax_loss_db_per_100m_at_10mhz", w,
                                               default=4.0, minimum=0.0, maximum=100.0),
                    length_m=length)
    return FeedSpec(transformer_ratio=ratio, receiver_ohm=rx, coax=coax)


def freqs_array(band: BandSpec) -> np.ndarray:
    """The band's frequencies as a float array, hertz."""
    return np.asarray(band.freqs_hz, dtype=float)
