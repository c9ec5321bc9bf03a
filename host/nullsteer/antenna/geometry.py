"""Wire mesh for the thin-wire MoM: segments, triangle basis functions, ports.

Coordinates are east/north/up metres (x east, y north, z up, ground at z = 0), with the
loop centre above the origin. The loop frame of :mod:`nullsteer.antenna.specs`
(along, across, height) is rotated so that "along" points to ``end_a_bearing_deg``.

Each straight piece of a polyline is cut into equal segments. A triangle ("rooftop")
basis function lives on the two segments meeting at a node: it rises linearly from 0 to 1
along the first segment and falls back to 0 along the second, so the current is continuous
through the node and corners need no special treatment. A node where k > 2 segments meet
(junction) gets k − 1 basis functions that pair the first segment with each of the others.
A ground node (a vertex named in the spec's ground points, over a perfect or real
ground) is connected to its image: each wire there gets the half triangle on the wire (the
image half is carried by the image term of the kernel), and the node's basis functions are
listed in ``Mesh.ground_nodes`` so the stake resistance can be put in series. Any other
vertex at height 0 is an ordinary node (the spec has lifted the wire to rest on the soil).
A free wire end carries no basis function (zero current).

Segmenting rules of thumb (common practice for thin-wire MoM): segment length ≤ λ/20 at
the highest frequency (warning above λ/10), segment length ≥ 8 wire radii for the reduced
kernel (warning below), and at least ``MIN_SEGMENTS_LOOP`` segments around a loop so the
near coupling between its wires is resolved even when it is electrically small.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from nullsteer.antenna.feedline import C0_M_PER_S
from nullsteer.antenna.specs import AntennaSpec
from nullsteer.station.bearing import FedEnd
from nullsteer.errors import ConfigError

MIN_SEGMENTS_LOOP = 40
_TOL_M = 1e-6


def as_fed_end(value: "FedEnd | str") -> FedEnd:
    """Accept a FedEnd or the strings "A"/"B" (case-insensitive)."""
    if isinstance(value, FedEnd):
        return value
    try:
        return FedEnd(str(value).upper())
    except ValueError:
        raise ValueError(f"fed end must be 'A' or 'B', got {value!r}") from None


@dataclass(frozen=True)
class Mesh:
    """Straight segments and the basis functions defined on them.

    Attributes
    ----------
    start_m, end_m : ndarray (S, 3)
        Segment end points, metres.
    radius_m : ndarray (S,)
        Wire radius of each segment, metres.
    basis_seg, basis_end : ndarray (N, 2) int
        The two (segment, local end) pairs of each basis function; local end 0 is the
        segment start (function ``1 − s/l``), 1 its end (function ``s/l``).
    basis_sign : ndarray (N, 2)
        ±1 so that current flows into the node on the first segment and out of it on the
        second; 0 marks an absent half (grounded wire end).
    ports : dict
        ``{FedEnd.A: basis index, FedEnd.B: basis index}``.
    warnings : tuple of str
        Rule-of-thumb violations found while segmenting.
    """

    start_m: np.ndarray
    end_m: np.ndarray
    radius_m: np.ndarray
    basis_seg: np.ndarray
    basis_end: np.ndarray
    basis_sign: np.ndarray
    ports: dict = field(default_factory=dict)
    warnings: tuple[str, ...] = ()
    ground_nodes: tuple[tuple[int, ...], ...] = ()
    """Basis indices of each ground node (their currents share the node's stake)."""

    @property
    def n_segments(self) -> int:
        return int(self.start_m.shape[0])

    @property
    def n_unknowns(self) -> int:
        return int(self.basis_seg.shape[0])

    @property
    def length_m(self) -> np.ndarray:
        return np.linalg.norm(self.end_m - self.start_m, axis=1)

    @property
    def tangent(self) -> np.ndarray:
        d = self.end_m - self.start_m
        return d / np.linalg.norm(d, axis=1)[:, None]

    def segment_currents(self, basis_currents: np.ndarray) -> np.ndarray:
        """Current at both ends of every segment, shape (S, 2, ...) from (N, ...) amps.

        The current flows along each segment's own direction (start → end).
        """
        i = np.asarray(basis_currents)
        out = np.zeros((self.n_segments, 2) + i.shape[1:], dtype=complex)
        for e in range(2):
            w = self.basis_sign[:, e].reshape((-1,) + (1,) * (i.ndim - 1))
            np.add.at(out, (self.basis_seg[:, e], self.basis_end[:, e]), w * i)
        return out


def frame_to_enu(points: np.ndarray, end_a_bearing_deg: float) -> np.ndarray:
    """Loop frame (along toward end A, across, height) to east/north/up, metres."""
    b = math.radians(end_a_bearing_deg)
    along = np.array([math.sin(b), math.cos(b), 0.0])
    across = np.array([math.cos(b), -math.sin(b), 0.0])
    p = np.asarray(points, dtype=float)
    return p[..., :1] * along + p[..., 1:2] * across + p[..., 2:3] * np.array([0.0, 0.0, 1.0])


def _pieces(spec: AntennaSpec) -> list[tuple[np.ndarray, np.ndarray]]:
    out = []
    for line, closed in zip(spec.polylines, spec.closed):
        pts = frame_to_enu(np.array(line), spec.end_a_bearing_deg)
        seq = list(pts) + ([pts[0]] if closed else [])
        for p0, p1 in zip(seq[:-1], seq[1:]):
            if np.linalg.norm(p1 - p0) > _TOL_M:
                out.append((p0, p1))
    return out


def segment_counts(lengths_m: np.ndarray, max_freq_hz: float, radius_m: float,
                   fixed: int = 0, density: float = 1.0) -> tuple[np.ndarray, list[str]]:
    """Segments per straight piece from the rules of thumb, and the warnings they raise.

    Parameters
    ----------
    lengths_m : ndarray
        Lengths of the straight pieces, metres.
    max_freq_hz : float
        Highest frequency to be solved, hertz.
    radius_m : float
        Wire radius, metres.
    fixed : int
        If > 0, use this many segments on every piece.
    density : float
        Multiplier on the automatic counts (convergence studies).
    """
    lam = C0_M_PER_S / max_freq_hz
    total = float(np.sum(lengths_m))
    if fixed > 0:
        n = np.full(len(lengths_m), fixed)
    else:
        dmax = min(lam / 20.0, total / MIN_SEGMENTS_LOOP) / density
        n = np.maximum(1, np.ceil(lengths_m / dmax - 1e-9)).astype(int)
    seg = lengths_m / n
    warnings = []
    if np.max(seg) > lam / 10.0:
        warnings.append(f"segment length {np.max(seg):.3g} m exceeds λ/10 = {lam / 10:.3g} m "
                        "at the highest frequency: results are unreliable")
    if np.min(seg) < 8.0 * radius_m:
        warnings.append(f"segment length {np.min(seg):.3g} m is under 8 wire radii "
                        f"({8 * radius_m:.3g} m): thin-wire kernel accuracy falls off")
    return n, warnings


def build_mesh(spec: AntennaSpec, grounded: bool, max_freq_hz: float,
               density: float = 1.0) -> Mesh:
    """Cut the spec's polylines into segments and define basis functions and ports.

    Parameters
    ----------
    spec : AntennaSpec
        Geometry (loop frame); its ports become ``{FedEnd.A: ..., FedEnd.B: ...}``.
    grounded : bool
        True over a perfect or real ground: wire ends at z = 0 connect to their image.
    max_freq_hz : float
        Highest frequency to be solved (sets the segment length), hertz.
    density : float
        Multiplier on the automatic segment counts.
    """
    pieces = _pieces(spec)
    ports = {FedEnd.A: frame_to_enu(np.array(spec.end_a_m), spec.end_a_bearing_deg),
             FedEnd.B: frame_to_enu(np.array(spec.end_b_m), spec.end_a_bearing_deg)}
    keys = {FedEnd.A: "antenna.end_a_point_m", FedEnd.B: "antenna.end_b_point_m"}
    if spec.ground_points and not grounded:
        raise ConfigError("antenna.ground_points_m", "needs a ground (kind perfect or real)")
    gpts = [frame_to_enu(np.array(p), spec.end_a_bearing_deg) for p in spec.ground_points]
    return mesh_from_pieces(pieces, spec.radius_m, ports, grounded, max_freq_hz,
                            spec.segments_per_wire, density, keys, ground_points=gpts)


def _key(p: np.ndarray) -> tuple[int, ...]:
    return tuple(int(round(float(v) / (10 * _TOL_M))) for v in p)


def mesh_from_pieces(pieces: list[tuple[np.ndarray, np.ndarray]], radius_m: float,
                     port_points: dict, grounded: bool, max_freq_hz: float,
                     fixed: int = 0, density: float = 1.0,
                     port_keys: dict | None = None,
                     ground_points: list[np.ndarray] | None = None) -> Mesh:
    """Mesh straight pieces (east/north/up end points, metres) with ports at given vertices.

    Parameters
    ----------
    pieces : list of (p0, p1)
        Straight wires; shared end points join.
    radius_m : float
        Wire radius, metres.
    port_points : dict
        Port name -> vertex (east, north, up) where a delta-gap port sits.
    grounded, max_freq_hz, fixed, density
        See :func:`build_mesh` and :func:`segment_counts`.
    port_keys : dict, optional
        Port name -> configuration key named in the error if the point is no vertex.
    ground_points : list of points, optional
        Vertices connected to the ground when ``grounded`` (None: every vertex at z = 0,
        for hand-built meshes such as a monopole on its ground plane).
    """
    lengths = np.array([np.linalg.norm(p1 - p0) for p0, p1 in pieces])
    counts, warnings = segment_counts(lengths, max_freq_hz, radius_m, fixed, density)
    starts, ends = [], []
    for (p0, p1), n in zip(pieces, counts):
        t = np.linspace(0.0, 1.0, n + 1)[:, None]
        pts = p0 + t * (p1 - p0)
        starts.extend(pts[:-1])
        ends.extend(pts[1:])
    start, end = np.array(starts), np.array(ends)
    nodes: dict[tuple[int, ...], int] = {}
    attached: dict[int, list[tuple[int, int]]] = {}
    height: dict[int, float] = {}
    for s in range(len(start)):
        for e, p in ((0, start[s]), (1, end[s])):
            node = nodes.setdefault(_key(p), len(nodes))
            attached.setdefault(node, []).append((s, e))
            height[node] = float(p[2])
    if ground_points is None:
        to_ground = {n for n, h in height.items() if abs(h) < 1e-6}
    else:
        to_ground = {nodes[_key(np.asarray(p, float))] for p in ground_points
                     if _key(np.asarray(p, float)) in nodes}
    bseg, bend, bsign, bnode = [], [], [], []
    for node, segs in attached.items():
        if grounded and node in to_ground:
            for s, e in segs:  # half basis: current flows out of the ground up the wire
                bseg.append((s, s)); bend.append((e, e))
                bsign.append((1.0 if e == 0 else -1.0, 0.0)); bnode.append(node)
            continue
        s0, e0 = segs[0]
        for s1, e1 in segs[1:]:
            bseg.append((s0, s1)); bend.append((e0, e1))
            bsign.append((1.0 if e0 == 1 else -1.0, 1.0 if e1 == 0 else -1.0))
            bnode.append(node)
    ports = {}
    for name, p in port_points.items():
        key = (port_keys or {}).get(name, f"port {name}")
        found = nodes.get(_key(np.asarray(p, dtype=float)))
        if found is None:
            raise ConfigError(key, f"point {np.round(p, 4).tolist()} is not a wire vertex")
        idx = [i for i, n in enumerate(bnode) if n == found]
        if len(idx) != 1:
            raise ConfigError(key, "a port must sit where exactly two segments meet")
        ports[name] = idx[0]
    gnodes = tuple(tuple(i for i, n in enumerate(bnode) if n == g)
                   for g in sorted(to_ground)) if grounded else ()
    return Mesh(start_m=start, end_m=end, radius_m=np.full(len(start), radius_m),
                basis_seg=np.array(bseg, dtype=int).reshape(-1, 2),
                basis_end=np.array(bend, dtype=int).reshape(-1, 2),
                basis_sign=np.array(bsign, dtype=float).reshape(-1, 2),
                ports=ports, warnings=tuple(warnings), ground_nodes=gnodes)
