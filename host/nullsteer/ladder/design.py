"""A designed ladder: values, settings table, figures, parts list and board table.

:func:`design_ladder` is the entry point. Settings are reported as the DC value of the
built network including relay contact resistance (what the board presents); the
optimiser itself works with ideal contacts (see :mod:`nullsteer.ladder.optimise`).
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass, field, replace

import numpy as np

from nullsteer.protocol import wire
from nullsteer.errors import ConfigError
from nullsteer.ladder.coverage import (ratio_error_pct, tolerance_shift, worst_case_error_pct,
                                       worst_log_error, worst_step_pct)
from nullsteer.ladder.eseries import get_series
from nullsteer.ladder.network import Parasitics, network_impedance_ohm
from nullsteer.ladder.optimise import (DEFAULT_TIME_BUDGET_S, Candidates, SearchResult,
                                       branch_and_bound, default_candidates)
from nullsteer.ladder.topology import LadderValues, Topology, get_topology

MAX_RELAYS = 12


@dataclass(frozen=True)
class Setting:
    """One relay state: ``mask`` (bit i drives ladder relay i) and its DC value, ohms."""

    mask: int
    ohms: float


@dataclass(frozen=True)
class LadderDesign:
    """A ladder build and its figures.

    Attributes
    ----------
    topology : str
    series : str
    tolerance_pct : float
        Resistor tolerance used for the worst case, percent.
    r_min_ohm, r_max_ohm : float
        Wanted termination range, ohms.
    values : LadderValues
    parasitics : Parasitics
    settings : tuple of Setting
        Every mask, sorted by DC ohms (with contact resistance).
    worst_step_pct : float
        Largest ratio step between neighbouring settings bracketing the range, percent.
    worst_case_error_pct : float
        Largest ratio error, over the range, of the nearest setting for a build at the
        tolerance extremes, percent (contacts included).
    nominal_error_pct : float
        The same with exact resistor values.
    proven_optimal : bool
        The search finished (False: stopped by its time or node budget; the best build
        found).
    search_nodes : int
    search_time_s : float
    time_budget_s : float or None
        The search's time budget, seconds.
    """

    topology: str
    series: str
    tolerance_pct: float
    r_min_ohm: float
    r_max_ohm: float
    values: LadderValues
    parasitics: Parasitics
    settings: tuple[Setting, ...]
    worst_step_pct: float
    worst_case_error_pct: float
    nominal_error_pct: float
    proven_optimal: bool = True
    search_nodes: int = 0
    search_time_s: float = 0.0
    time_budget_s: float | None = None
    extra: dict = field(default_factory=dict, compare=False)

    @property
    def relays(self) -> int:
        return len(self.values.resistors_ohm)

    @property
    def resistors_ohm(self) -> list[float]:
        return self.values.resistors_ohm

    @property
    def base_ohm(self) -> float:
        return self.values.base_ohm

    @property
    def topo(self) -> Topology:
        return get_topology(self.topology)

    def to_json(self) -> dict:
        return {"topology": self.topology, "series": self.series,
                "tolerance_pct": self.tolerance_pct, "range_ohm": [self.r_min_ohm, self.r_max_ohm],
                "relays": self.relays, "base_ohm": self.base_ohm,
                "resistors_ohm": self.resistors_ohm,
                "contact_ohm": self.parasitics.contact_ohm,
                "open_capacitance_pf": self.parasitics.open_capacitance_f * 1e12,
                "settings": [{"mask": s.mask, "ohms": s.ohms} for s in self.settings],
                "worst_step_pct": self.worst_step_pct,
                "worst_case_error_pct": self.worst_case_error_pct,
                "nominal_error_pct": self.nominal_error_pct,
                "proven_optimal": self.proven_optimal, "search_nodes": self.search_nodes,
                "search_time_s": self.search_time_s, "time_budget_s": self.time_budget_s}


def dc_settings(topology: Topology, values: LadderValues, parasitics: Parasitics,
                r_scale: float = 1.0) -> np.ndarray:
    """DC ohms of every mask 0 .. 2**bits - 1 (mask order), contacts included."""
    masks = np.arange(2 ** len(values.resistors_ohm))
    z = network_impedance_ohm(topology.tree(values), masks, 0.0, parasitics, r_scale)
    return z[:, 0].real


def evaluate(topology: Topology, values: LadderValues, lo_ohm: float, hi_ohm: float,
             tolerance_pct: float, parasitics: Parasitics, series: str,
             result: SearchResult | None = None, search_time_s: float = 0.0) -> LadderDesign:
    """Figures of a given build (also used for hand-picked values)."""
    dc = dc_settings(topology, values, parasitics)
    order = np.argsort(dc, kind="stable")
    settings = tuple(Setting(int(m), float(dc[m])) for m in order)
    return LadderDesign(
        topology=topology.name.value, series=series, tolerance_pct=tolerance_pct,
        r_min_ohm=lo_ohm, r_max_ohm=hi_ohm, values=values, parasitics=parasitics,
        settings=settings, worst_step_pct=worst_step_pct(dc, lo_ohm, hi_ohm),
        worst_case_error_pct=worst_case_error_pct(dc, lo_ohm, hi_ohm, tolerance_pct),
        nominal_error_pct=(math.exp(worst_log_error(dc, lo_ohm, hi_ohm)) - 1) * 100,
        proven_optimal=result.proven if result else True,
        search_nodes=result.nodes if result else 0, search_time_s=search_time_s)


def _check_inputs(r_min_ohm: float, r_max_ohm: float, relays: int | None, tolerance_pct: float,
                  topology: Topology, names: dict[str, str]) -> None:
    if not (math.isfinite(r_min_ohm) and r_min_ohm > 0):
        raise ConfigError(names["range"], f"lower end must be > 0 ohm, got {r_min_ohm:g}")
    if not (math.isfinite(r_max_ohm) and r_max_ohm > r_min_ohm):
        raise ConfigError(names["range"],
                          f"lower end {r_min_ohm:g} must be below upper end {r_max_ohm:g}")
    if relays is not None and not topology.min_relays() <= relays <= MAX_RELAYS:
        raise ConfigError(names["relays"], f"{topology.name.value} needs "
                          f"{topology.min_relays()}..{MAX_RELAYS} relays, got {relays}")
    if not 0.0 <= tolerance_pct < 20.0:
        raise ConfigError(names["tolerance"], f"must be 0..20 %, got {tolerance_pct:g}")


_NAMES = {"range": "range_ohm", "relays": "relays", "tolerance": "tolerance_pct",
          "series": "series", "topology": "topology", "target": "target_error_pct"}


def design_ladder(r_min_ohm: float, r_max_ohm: float, relays: int | None, series: str = "E24",
                  tolerance_pct: float | None = None, topology: str = "series-shorting", *,
                  parasitics: Parasitics | None = None, target_error_pct: float = 5.0,
                  candidates: Candidates | None = None,
                  node_budget: int | None = None,
                  time_budget_s: float | None = DEFAULT_TIME_BUDGET_S,
                  names: dict[str, str] | None = None,
                  counts: list[int] | None = None) -> LadderDesign:
    """Design the ladder for a wanted termination range.

    Parameters
    ----------
    r_min_ohm, r_max_ohm : float
        Range of terminations the user may want, ohms.
    relays : int or None
        Ladder relays; None picks the fewest that meet ``target_error_pct``.
    series : str
        ``E12``, ``E24``, ``E48`` or ``E96``.
    tolerance_pct : float, optional
        Resistor tolerance, percent (default: the series' own tolerance).
    topology : str
        ``series-shorting`` or ``series-shunt``.
    parasitics : Parasitics, optional
        Relay contact resistance and open-contact capacitance (default 0.1 Ω, 1 pF).
    target_error_pct : float
        Worst-case error goal for ``relays=None``, percent.
    candidates : Candidates, optional
        Values the search may use (default: the series over the range).
    node_budget : int, optional
        Nodes one search may visit (None: no count limit; a count keeps a design
        reproducible).
    time_budget_s : float, optional
        Seconds one search may take (default 2; None: no clock). A design from a
        stopped search has ``proven_optimal`` False.
    names : dict, optional
        Key names for error messages (``range``, ``relays``, ``tolerance``, ``series``,
        ``topology``, ``target``), e.g. the CLI's flags.
    counts : list of int, optional
        Relay counts tried in order for ``relays=None`` (default: the topology's minimum
        up to MAX_RELAYS).
    """
    nm = {**_NAMES, **(names or {})}
    topo = get_topology(topology, nm["topology"])
    es = get_series(series, nm["series"])
    tol = es.tolerance_pct if tolerance_pct is None else float(tolerance_pct)
    _check_inputs(r_min_ohm, r_max_ohm, relays, tol, topo, nm)
    if relays is None and not target_error_pct > tol:
        raise ConfigError(nm["target"], f"target {target_error_pct:g} % must exceed the "
                          f"resistor tolerance {tol:g} %")
    par = parasitics if parasitics is not None else Parasitics()
    shift, _ = tolerance_shift(tol)
    lo, hi = r_min_ohm * shift, r_max_ohm * shift
    if relays is not None:
        counts = [relays]
    elif counts is None:
        counts = list(range(topo.min_relays(), MAX_RELAYS + 1))
    design = None
    for n in counts:
        cands = candidates or default_candidates(es, lo, hi, n)
        t0 = time.perf_counter()
        result = branch_and_bound(topo, lo, hi, n, cands, node_budget=node_budget,
                                  time_budget_s=time_budget_s)
        design = replace(evaluate(topo, result.values, r_min_ohm, r_max_ohm, tol, par, es.name,
                                  result, time.perf_counter() - t0), time_budget_s=time_budget_s)
        if relays is not None or design.worst_case_error_pct <= target_error_pct:
            return design
    assert design is not None
    raise ConfigError(nm["relays"], f"no {topo.name.value} ladder of up to {MAX_RELAYS} relays "
                      f"meets {target_error_pct:g} % (best {design.worst_case_error_pct:.2f} %)")


def settings_impedance_ohm(design: LadderDesign, freq_hz: np.ndarray | float,
                           r_scale: float = 1.0, open_mode: bool = False) -> np.ndarray:
    """Impedance of every setting (in ``design.settings`` order) at each frequency.

    Returns complex ohms, shape (len(settings), F); contacts and open-contact
    capacitance included; ``r_scale`` scales every resistor (tolerance extremes).
    """
    masks = np.array([s.mask for s in design.settings])
    return network_impedance_ohm(design.topo.tree(design.values), masks, freq_hz,
                                 design.parasitics, r_scale, open_mode)


def open_impedance_ohm(design: LadderDesign, freq_hz: np.ndarray | float) -> np.ndarray:
    """Impedance presented in open mode (open relay energised), per setting and frequency."""
    return settings_impedance_ohm(design, freq_hz, open_mode=True)


def nearest_setting(table: LadderDesign | list | tuple, ohms: float,
                    key: str = "--ohms") -> tuple[int, float, float]:
    """Setting nearest by ratio to ``ohms``: (mask, setting ohms, signed error percent).

    ``table`` is a design or a sequence of (mask, ohms) pairs (the board table).
    """
    if isinstance(table, LadderDesign):
        pairs = [(s.mask, s.ohms) for s in table.settings]
    else:
        pairs = [(int(m), float(o)) for m, o in table]
    if not (isinstance(ohms, (int, float)) and math.isfinite(ohms) and ohms > 0):
        raise ConfigError(key, f"must be a resistance > 0 ohm, got {ohms!r}")
    usable = [(m, o) for m, o in pairs if o > 0 and math.isfinite(o)]
    if not usable:
        raise ConfigError(key, "the ladder table has no usable setting")
    mask, best = usable[wire.nearest_index([o for _, o in usable], ohms)]
    return mask, best, ratio_error_pct(best, ohms)


def with_values(design: LadderDesign, values: LadderValues) -> LadderDesign:
    """The same design problem evaluated for other values (e.g. a comparison build)."""
    d = evaluate(design.topo, values, design.r_min_ohm, design.r_max_ohm,
                 design.tolerance_pct, design.parasitics, design.series)
    return replace(d, proven_optimal=False)
