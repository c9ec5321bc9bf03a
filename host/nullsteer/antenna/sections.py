"""The station-file sections the antenna model reads, described once.

``[antenna]``, ``[ground]``, ``[band]`` and ``[feed]``: every key with its type, unit,
default and range (:mod:`nullsteer.station.schema`). The parsers in
:mod:`nullsteer.antenna.specs` read through these descriptions, and ``nullsteer
reference`` prints them (``docs/station-file.md``).
"""

from __future__ import annotations

from nullsteer.station.schema import REQUIRED, Key, Kind, Section

#: Relative permittivity of PVC insulation (from memory: 3–5 at HF; 3.5 taken).
PVC_EPS = 3.5
#: The largest extent (length, height) of a loop, metres: far beyond any receiving loop,
#: small enough that the segment count cannot overflow before the memory guard.
MAX_EXTENT_M = 1000.0

_M = MAX_EXTENT_M
COMMON_KEYS = ("shape", "wire_diameter_mm", "end_a_bearing_deg", "segments_per_wire",
               "wire_conductivity_s_per_m", "insulation_mm", "insulation_eps", "termination")
RECTANGLE_KEYS = ("length_m", "height_m", "bottom_m", "port_position")
TRIANGLE_KEYS = ("length_m", "base_height_m", "apex_height_m", "apex_offset_m",
                 "end_a_corner", "end_b_corner")
POLYLINE_KEYS = ("polylines", "closed", "end_a_point_m", "end_b_point_m", "ground_points_m",
                 "stake_ohm", "stake_length_m", "stake_diameter_mm")

ANTENNA = Section("antenna", """The loop. `shape` picks the keys that describe it: a
`rectangle` (flag, ground-level loop), a `triangle` (pennant, delta) or `polylines`
(anything else, in the loop's own frame: *along* on the axis, positive toward end A;
*across* horizontal, 90° clockwise of end A's bearing seen from above; *height* above
ground). End A and end B are the two corners where the receiver and the termination
connect; which one feeds is chosen per command. A wire on the soil (`bottom_m = 0`, or
polyline points at height 0) has its axis at its outer radius; only `ground_points_m`
connect to the soil, through a stake.""", (
    Key("shape", Kind.STRING, "Which keys describe the loop.", default="rectangle",
        choices=("rectangle", "triangle", "polylines")),
    Key("wire_diameter_mm", Kind.NUMBER, "Conductor diameter.", "mm", 1.6, 0.0, 100.0,
        exclusive_min=True),
    Key("end_a_bearing_deg", Kind.NUMBER, "Compass bearing from the loop centre toward end A.",
        "deg", 0.0, -360.0, 360.0),
    Key("segments_per_wire", Kind.INTEGER, "Segments on every straight piece; 0 chooses them "
        "from the rules of thumb.", default=0, minimum=0, maximum=400),
    Key("wire_conductivity_s_per_m", Kind.NUMBER, "Wire conductivity; 0 is a lossless wire "
        "(copper: 5.8e7).", "S/m", 0.0, 0.0),
    Key("insulation_mm", Kind.NUMBER, "Thickness of the wire's insulation; 0 is bare wire "
        "(PVC hook-up or house wire: 0.6–0.8 mm).", "mm", 0.0, 0.0, 50.0),
    Key("insulation_eps", Kind.NUMBER, "Relative permittivity of the insulation (PVC 3–5 at "
        "HF, from memory).", "", PVC_EPS, 1.0, 100.0),
    Key("termination", Kind.ANY, "The resistor on the loop now: ohms, `\"short\"` or "
        "`\"open\"`; the model then reports the loop at it as well as at the optimum."),
    Key("length_m", Kind.NUMBER, "rectangle, triangle: horizontal extent, end A corner to "
        "end B corner.", "m", REQUIRED, 0.0, _M, exclusive_min=True),
    Key("height_m", Kind.NUMBER, "rectangle: top wire above ground.", "m", REQUIRED, 0.0, _M,
        exclusive_min=True),
    Key("bottom_m", Kind.NUMBER, "rectangle: bottom wire above ground; 0 rests on the soil.",
        "m", REQUIRED, 0.0, _M),
    Key("port_position", Kind.STRING, "rectangle: ports at the bottom corners of the end "
        "sides, or at their middle.", default="bottom", choices=("bottom", "middle")),
    Key("base_height_m", Kind.NUMBER, "triangle: height of the horizontal side.", "m",
        REQUIRED, 0.0, _M),
    Key("apex_height_m", Kind.NUMBER, "triangle: height of the third corner (above or below "
        "the horizontal side).", "m", REQUIRED, 0.0, _M),
    Key("apex_offset_m", Kind.NUMBER, "triangle: apex position along the axis from the "
        "centre, positive toward end A; 0 is a symmetric delta, ±length_m/2 a right "
        "triangle.", "m", 0.0),
    Key("end_a_corner", Kind.STRING, "triangle: the corner that is end A.", default="base_a",
        choices=("base_a", "base_b", "apex")),
    Key("end_b_corner", Kind.STRING, "triangle: the corner that is end B.", default="base_b",
        choices=("base_a", "base_b", "apex")),
    Key("polylines", Kind.LIST, "polylines: list of point lists, each point `[along_m, "
        "across_m, height_m]`; points shared between polylines join there.", "m", REQUIRED),
    Key("closed", Kind.LIST, "polylines: one true/false per polyline; default all closed."),
    Key("end_a_point_m", Kind.LIST, "polylines: the vertex where end A sits.", "m", REQUIRED),
    Key("end_b_point_m", Kind.LIST, "polylines: the vertex where end B sits.", "m", REQUIRED),
    Key("ground_points_m", Kind.LIST, "polylines: vertices at height 0 where a wire end goes "
        "into the soil (each through a stake).", "m", None),
    Key("stake_ohm", Kind.NUMBER, "Measured resistance of each stake; default from Dwight's "
        "rod formula and the ground.", "ohm", None, 0.0),
    Key("stake_length_m", Kind.NUMBER, "Length of each driven rod.", "m", 1.0, 0.0, 100.0,
        exclusive_min=True),
    Key("stake_diameter_mm", Kind.NUMBER, "Diameter of each driven rod.", "mm", 16.0, 0.0,
        1000.0, exclusive_min=True),
))

GROUND = Section("ground", "The ground under the loop.", (
    Key("kind", Kind.STRING, "Free space, a perfect conductor, or real soil (Sommerfeld "
        "half-space).", default="real", choices=("free", "perfect", "real")),
    Key("conductivity_s_per_m", Kind.NUMBER, "Soil conductivity (0.005: \"average\" ground).",
        "S/m", 0.005, 0.0, 1e8),
    Key("permittivity", Kind.NUMBER, "Soil relative permittivity.", "", 13.0, 1.0, 200.0),
    Key("preset", Kind.STRING, "Instead of the two above: an ITU-R P.527 ground category "
        "(values from memory).", default=None,
        choices=("sea-water", "fresh-water", "wet-ground", "medium-dry", "very-dry")),
))

BAND = Section("band", "The frequencies to model and the elevations of the signals to null.", (
    Key("freqs_mhz", Kind.ANY, "`\"start:stop:step\"`, a number or a list.", "MHz", REQUIRED),
    Key("elevation_deg", Kind.ANY, "A number, a span `[lo, hi]` (sampled every "
        "`elevation_step_deg`), `\"lo:hi:step\"`, or a list of three or more.", "deg",
        "[10, 60]"),
    Key("elevation_step_deg", Kind.NUMBER, "Sampling of an elevation span.", "deg", 5.0, 0.0,
        exclusive_min=True),
))

FEED = Section("feed", "The chain at the fed end: transformer, coax, receiver.", (
    Key("transformer_ratio", Kind.NUMBER, "Impedance ratio (turns ratio squared), antenna side "
        "over line side.", "", 9.0, 0.01, 1e4),
    Key("receiver_ohm", Kind.NUMBER, "Receiver input resistance.", "ohm", 50.0, 0.1, 1e6),
    Key("coax_length_m", Kind.NUMBER, "Feedline length; 0 is no line.", "m", 0.0, 0.0, 1e5),
    Key("coax_z0_ohm", Kind.NUMBER, "Feedline characteristic impedance.", "ohm", 50.0, 1.0,
        1000.0),
    Key("coax_velocity_factor", Kind.NUMBER, "Feedline velocity factor.", "", 0.66, 0.0, 1.0,
        exclusive_min=True),
    Key("coax_loss_db_per_100m_at_10mhz", Kind.NUMBER, "Matched loss at 10 MHz (scaled as "
        "the square root of frequency).", "dB/100 m", 4.0, 0.0, 100.0),
))
