"""One entry point for "the ladder of this station": range, design, null loss, remote line.

:func:`design_for_station` is what ``nullsteer ladder --config``, the demo and the
firmware bundle call. The wanted range is ``[ladder].range_ohm`` or, without it, the
antenna model's needed range over the band and elevation span. With a solved model the
predicted null loss from quantisation is computed (F/B capped at
``[ladder].null_depth_ceiling_db``, see :mod:`nullsteer.ladder.nullloss`), and
``relays = "auto"`` picks the fewest relays whose capped loss meets
``[ladder].null_loss_goal_db``; without a model "auto" uses the worst-case error target.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from nullsteer.errors import ConfigError
from nullsteer.ladder.design import MAX_RELAYS, LadderDesign, design_ladder
from nullsteer.ladder.nullloss import NullLoss, predicted_null_loss
from nullsteer.ladder.remote import reactance_warnings, seen_termination_ohm, suggest_transformer_ratio
from nullsteer.ladder.spec import LadderSpec, parse_ladder
from nullsteer.ladder.topology import get_topology

#: Worst-case error target without a model and without ``target_error_pct``, percent.
DEFAULT_TARGET_PCT = 5.0
#: Frequencies for the remote-line check when there is no band, Hz.
_REMOTE_FREQS_HZ = (1.8e6, 3.6e6, 7.0e6)


@dataclass(frozen=True)
class StationDesign:
    """The ladder of one station and what goes with it.

    Attributes
    ----------
    design : LadderDesign
        The ladder (its range is what the ladder itself sees: divided by the transformer
        ratio for a remote ladder).
    loop_range_ohm : (float, float)
        Terminations the loop needs, ohms.
    null_loss : NullLoss or None
        Predicted null loss from quantisation (None without a solved model).
    remote : dict or None
        Remote line: suggested ratio, the ratio used, reactance warnings.
    target_error_pct : float
        Worst-case error target used (for ``relays = "auto"`` without a model).
    null_loss_goal_db : float
    auto_trials : list of (int, float)
        With ``relays = "auto"`` and a model: (relays, capped worst loss dB) per count tried.
    """

    design: LadderDesign
    loop_range_ohm: tuple[float, float]
    null_loss: NullLoss | None
    remote: dict | None
    target_error_pct: float
    null_loss_goal_db: float = 3.0
    auto_trials: list = field(default_factory=list)

    def to_json(self) -> dict:
        out = self.design.to_json()
        out["loop_range_ohm"] = list(self.loop_range_ohm)
        out["target_error_pct"] = self.target_error_pct
        out["null_loss_goal_db"] = self.null_loss_goal_db
        if self.remote is not None:
            out["remote"] = self.remote
        if self.null_loss is not None:
            out["null_loss"] = self.null_loss.to_json()
        if self.auto_trials:
            out["auto_trials"] = [{"relays": n, "worst_capped_loss_db": w}
                                  for n, w in self.auto_trials]
        return out


def solve_station(station: Any) -> tuple[Any, Any, np.ndarray]:
    """Solve the station's loop over its band: (PortSolution, NeededRange, elevations deg)."""
    from nullsteer.antenna.needed import needed_range, span_elevations
    from nullsteer.antenna.station import station_loop

    loop = station_loop(station)
    sol = loop.solve()
    span = loop.band.elevation_span_deg
    return sol, needed_range(sol, span), span_elevations(span)


def _elevations(station: Any) -> np.ndarray:
    from nullsteer.antenna.needed import span_elevations
    from nullsteer.antenna.station import parse_station_band

    band = station.section("band") if station is not None else {}
    return span_elevations(parse_station_band(band).elevation_span_deg)


def _remote_info(design: LadderDesign, spec: LadderSpec, loop_range: tuple[float, float],
                 freqs_hz: np.ndarray) -> dict:
    remote = spec.remote
    assert remote is not None
    seen = seen_termination_ohm(design, remote, freqs_hz)
    return {"suggested": suggest_transformer_ratio(*loop_range, remote.coax.z0_ohm),
            "transformer_ratio": remote.transformer_ratio,
            "warnings": reactance_warnings(seen, freqs_hz, max(design.worst_case_error_pct, 1.0),
                                           *loop_range)}


def design_for_station(station: Any, solution: Any = None, needed: Any = None, *,
                       spec: LadderSpec | None = None, use_model: bool = True,
                       names: dict[str, str] | None = None) -> StationDesign:
    """Design the ladder of a station.

    Parameters
    ----------
    station : Station or None
        The station file (None only with ``spec.range_ohm`` given).
    solution : PortSolution, optional
        The station's solved loop over its band (solved here when it is needed and not
        given, unless ``use_model`` is False).
    needed : NeededRange, optional
        The model's needed range (computed from ``solution`` when not given).
    spec : LadderSpec, optional
        The ``[ladder]`` settings (default: parsed from the station; the CLI passes its
        flags merged in).
    use_model : bool
        Allow solving the antenna model.
    names : dict, optional
        Key names for error messages (see :func:`design_ladder`).
    """
    if spec is None:
        spec = parse_ladder(station.section("ladder") if station is not None else {})
    elevations = None
    if spec.range_ohm is None:
        if station is None or not use_model:
            raise ConfigError("ladder.range_ohm", "give the range (or a station with an "
                              "antenna model to take it from)")
        if solution is None:
            solution, needed, elevations = solve_station(station)
    if solution is not None:
        if needed is None:
            from nullsteer.antenna.needed import needed_range
            needed = needed_range(solution, tuple(_elevations(station)[[0, -1]]))
        if elevations is None:
            elevations = _elevations(station)
    if spec.range_ohm is not None:
        loop_range = spec.range_ohm
    else:
        if not math.isfinite(needed.hi_ohm):
            raise ConfigError("ladder.range_ohm", "the antenna model gives no finite range; set it")
        loop_range = (float(needed.lo_ohm), float(needed.hi_ohm))
    target = spec.target_error_pct
    if target is None:
        target = DEFAULT_TARGET_PCT
        if needed is not None and needed.fb_loss_db_per_pct > 0:
            target = spec.null_loss_goal_db / needed.fb_loss_db_per_pct
    lo, hi = loop_range
    if spec.remote is not None:
        lo, hi = lo / spec.remote.transformer_ratio, hi / spec.remote.transformer_ratio

    def build(relays: int | None) -> LadderDesign:
        return design_ladder(lo, hi, relays, spec.series, spec.tolerance_pct, spec.topology,
                             parasitics=spec.parasitics, target_error_pct=target,
                             node_budget=spec.node_budget,
                             time_budget_s=spec.time_budget_s, names=names)

    def loss(d: LadderDesign) -> NullLoss:
        return predicted_null_loss(d, solution, elevations, remote=spec.remote,
                                   ceiling_db=spec.null_depth_ceiling_db)

    trials: list[tuple[int, float]] = []
    null_loss = None
    if spec.relays is None and solution is not None:
        topo = get_topology(spec.topology, (names or {}).get("topology", "topology"))
        design = None
        for n in range(topo.min_relays(), MAX_RELAYS + 1):
            design = build(n)
            null_loss = loss(design)
            trials.append((n, null_loss.worst_db))
            if null_loss.worst_db <= spec.null_loss_goal_db:
                break
        else:
            assert null_loss is not None
            raise ConfigError((names or {}).get("relays", "ladder.relays"),
                              f"no ladder of up to {MAX_RELAYS} relays meets the null loss goal "
                              f"{spec.null_loss_goal_db:g} dB (best {null_loss.worst_db:.2f} dB)")
    else:
        design = build(spec.relays)
        if solution is not None:
            null_loss = loss(design)
    remote = None
    if spec.remote is not None:
        freqs = np.asarray(getattr(solution, "freqs_hz", _REMOTE_FREQS_HZ), dtype=float)
        remote = _remote_info(design, spec, loop_range, freqs)
    return StationDesign(design, loop_range, null_loss, remote, target,
                         spec.null_loss_goal_db, trials)
