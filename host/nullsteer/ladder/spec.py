"""The ``[ladder]`` section of the station file.

Keys (all optional except where the CLI gives no default):

``series``               "E12" | "E24" | "E48" | "E96" (default "E24")
``tolerance_pct``        resistor tolerance, % (default: the series' own)
``relays``               ladder relays, or "auto" for the fewest that meet the target
``topology``             "series-shorting" | "series-shunt"
``range_ohm``            [lo, hi] wanted terminations (default: the antenna model's range)
``target_error_pct``     worst-case error goal for relays = "auto" (default 5; with the
                         antenna model: the error that costs ``null_loss_goal_db``)
``null_loss_goal_db``    allowed F/B loss from quantisation, dB (default 3)
``contact_ohm``          closed relay contact resistance, ohms (default 0.1)
``open_capacitance_pf``  capacitance across an open contact, pF (default 1.0)
``induced_w``            RF power assumed to reach the termination, W (default 0.25)
``search_time_budget_s`` seconds one optimiser search may take before it stops with
                         the best build so far, marked not proven (default 2)
``search_node_budget``   nodes one search may visit (default: no count limit); given
                         without ``search_time_budget_s`` it replaces the clock, so the
                         design is the same on any machine
``null_depth_ceiling_db`` deepest null counted in the predicted null loss, dB (default
                         30; see :mod:`nullsteer.ladder.nullloss`)

``[ladder.remote]`` (ladder in the shack, through a second line; all keys needed):
``transformer_ratio``, ``coax_z0_ohm``, ``coax_velocity_factor``,
``coax_loss_db_per_100m_at_10mhz``, ``coax_length_m``.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from nullsteer.antenna.feedline import Coax
from nullsteer.station.config import check_unknown, get_float, get_int, get_str
from nullsteer.errors import ConfigError
from nullsteer.ladder.network import Parasitics
from nullsteer.ladder.nullloss import DEFAULT_CEILING_DB
from nullsteer.ladder.optimise import DEFAULT_TIME_BUDGET_S
from nullsteer.ladder.remote import RemoteSpec

_KEYS = {"series", "tolerance_pct", "relays", "topology", "range_ohm", "target_error_pct",
         "null_loss_goal_db", "contact_ohm", "open_capacitance_pf", "induced_w",
         "search_node_budget", "search_time_budget_s", "null_depth_ceiling_db", "remote"}
_REMOTE = {"transformer_ratio", "coax_z0_ohm", "coax_velocity_factor",
           "coax_loss_db_per_100m_at_10mhz", "coax_length_m"}


@dataclass(frozen=True)
class LadderSpec:
    """Parsed ``[ladder]`` section (None: not given)."""

    series: str = "E24"
    tolerance_pct: float | None = None
    relays: int | None = None          # None: auto
    topology: str = "series-shorting"
    range_ohm: tuple[float, float] | None = None
    target_error_pct: float | None = None
    null_loss_goal_db: float = 3.0
    parasitics: Parasitics = Parasitics()
    induced_w: float = 0.25
    node_budget: int | None = None
    time_budget_s: float | None = DEFAULT_TIME_BUDGET_S
    null_depth_ceiling_db: float = DEFAULT_CEILING_DB
    remote: RemoteSpec | None = None


def parse_relays(value: Any, key: str) -> int | None:
    """An int >= 1 or "auto" (None)."""
    if value == "auto":
        return None
    if isinstance(value, bool) or not isinstance(value, int) or value < 1:
        raise ConfigError(key, f"must be a whole number >= 1 or \"auto\", got {value!r}")
    return value


def parse_range(value: Any, key: str) -> tuple[float, float]:
    """[lo, hi] in ohms with 0 < lo < hi."""
    if (not isinstance(value, list) or len(value) != 2
            or any(isinstance(v, bool) or not isinstance(v, (int, float)) for v in value)):
        raise ConfigError(key, f"must be [lo, hi] in ohms, got {value!r}")
    lo, hi = float(value[0]), float(value[1])
    if not 0 < lo < hi:
        raise ConfigError(key, f"needs 0 < lo < hi, got [{lo:g}, {hi:g}]")
    return lo, hi


def parse_remote(table: dict[str, Any], where: str = "ladder.remote") -> RemoteSpec:
    check_unknown(table, _REMOTE, where)
    coax = Coax(z0_ohm=get_float(table, "coax_z0_ohm", where, minimum=0.0, exclusive_min=True),
                velocity_factor=get_float(table, "coax_velocity_factor", where, minimum=0.0,
                                          exclusive_min=True, maximum=1.0),
                loss_db_per_100m=get_float(table, "coax_loss_db_per_100m_at_10mhz", where,
                                           minimum=0.0),
                length_m=get_float(table, "coax_length_m", where, minimum=0.0))
    ratio = get_float(table, "transformer_ratio", where, minimum=0.0, exclusive_min=True)
    return RemoteSpec(ratio, coax)


def parse_ladder(table: dict[str, Any], where: str = "ladder") -> LadderSpec:
    """Parse ``[ladder]``; every bad value raises ConfigError naming ``ladder.<key>``."""
    check_unknown(table, _KEYS, where)
    remote = table.get("remote")
    if remote is not None and not isinstance(remote, dict):
        raise ConfigError(f"{where}.remote", "must be a table ([ladder.remote])")
    tol = table.get("tolerance_pct")
    target = table.get("target_error_pct")
    return LadderSpec(
        series=get_str(table, "series", where, default="E24"),
        tolerance_pct=None if tol is None else get_float(table, "tolerance_pct", where,
                                                         minimum=0.0, maximum=20.0),
        relays=parse_relays(table.get("relays", "auto"), f"{where}.relays"),
        topology=get_str(table, "topology", where, default="series-shorting"),
        range_ohm=None if "range_ohm" not in table else parse_range(table["range_ohm"],
                                                                      f"{where}.range_ohm"),
        target_error_pct=None if target is None else get_float(
            table, "target_error_pct", where, minimum=0.0, exclusive_min=True),
        null_loss_goal_db=get_float(table, "null_loss_goal_db", where, default=3.0,
                                    minimum=0.0, exclusive_min=True),
        parasitics=Parasitics(
            get_float(table, "contact_ohm", where, default=0.1, minimum=0.0, maximum=10.0),
            get_float(table, "open_capacitance_pf", where, default=1.0, minimum=0.0,
                      maximum=1000.0) * 1e-12),
        induced_w=get_float(table, "induced_w", where, default=0.25, minimum=0.0),
        node_budget=None if "search_node_budget" not in table else get_int(
            table, "search_node_budget", where, minimum=1),
        time_budget_s=None if ("search_node_budget" in table
                               and "search_time_budget_s" not in table) else get_float(
            table, "search_time_budget_s", where, default=DEFAULT_TIME_BUDGET_S, minimum=0.0,
            exclusive_min=True, maximum=3600.0),
        null_depth_ceiling_db=get_float(table, "null_depth_ceiling_db", where,
                                        default=DEFAULT_CEILING_DB, minimum=0.0,
                                        exclusive_min=True),
        remote=None if remote is None else parse_remote(remote, f"{where}.remote"))
