"""The ``[ladder]`` and ``[ladder.remote]`` sections of the station file.

Both are described once, as :class:`~nullsteer.station.schema.Section` objects (their
keys, units, defaults and ranges), and read through those descriptions; ``nullsteer
reference`` prints them into ``docs/station-file.md``.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from nullsteer.antenna.feedline import Coax
from nullsteer.errors import ConfigError
from nullsteer.ladder.eseries import SERIES, get_series
from nullsteer.ladder.network import Parasitics
from nullsteer.ladder.nullloss import DEFAULT_CEILING_DB
from nullsteer.ladder.optimise import DEFAULT_TIME_BUDGET_S
from nullsteer.ladder.remote import RemoteSpec
from nullsteer.ladder.topology import TOPOLOGIES, get_topology
from nullsteer.station.schema import REQUIRED, Key, Kind, Section

LADDER = Section("ladder", """The relay ladder of standard resistors at the termination
corner (`nullsteer ladder` designs it; the command-line options override these keys).
Without `range_ohm` the wanted range comes from the antenna model.""", (
    Key("series", Kind.STRING, "Preferred-value series of the resistors (IEC 60063): "
        + ", ".join(f"`{n}`" for n in SERIES) + " (any case).", default="E24"),
    Key("tolerance_pct", Kind.NUMBER, "Resistor tolerance; default: the series' own (E12 10 %, "
        "E24 5 %, E48 2 %, E96 1 %).", "%", None, 0.0, 20.0),
    Key("relays", Kind.ANY, "Ladder relays (a whole number >= 1), or `\"auto\"` for the fewest "
        "that meet the error goal.", default="auto"),
    Key("topology", Kind.STRING, "How resistors and relays are wired (see `nullsteer ladder "
        "--help`).", default="series-shorting", choices=tuple(TOPOLOGIES)),
    Key("range_ohm", Kind.LIST, "`[lo, hi]` wanted terminations, 0 < lo < hi; default: the "
        "range the antenna model needs.", "ohm", None),
    Key("target_error_pct", Kind.NUMBER, "Worst-case error goal when `relays = \"auto\"`; "
        "default 5, or with the antenna model the error that costs `null_loss_goal_db`.",
        "%", None, 0.0, exclusive_min=True),
    Key("null_loss_goal_db", Kind.NUMBER, "F/B loss allowed from the ladder's steps.", "dB",
        3.0, 0.0, exclusive_min=True),
    Key("contact_ohm", Kind.NUMBER, "Resistance of a closed relay contact.", "ohm", 0.1,
        0.0, 10.0),
    Key("open_capacitance_pf", Kind.NUMBER, "Capacitance across an open contact.", "pF", 1.0,
        0.0, 1000.0),
    Key("induced_w", Kind.NUMBER, "RF power assumed to reach the termination (sizes the "
        "resistors' power rating).", "W", 0.25, 0.0),
    Key("search_time_budget_s", Kind.NUMBER, "Longest one optimiser search may take; it "
        "then stops with the best build so far, marked not proven.", "s",
        DEFAULT_TIME_BUDGET_S, 0.0, 3600.0, exclusive_min=True),
    Key("search_node_budget", Kind.INTEGER, "Nodes one search may visit; given without "
        "`search_time_budget_s` it replaces the clock, so the design is the same on any "
        "machine.", default=None, minimum=1),
    Key("null_depth_ceiling_db", Kind.NUMBER, "Deepest null counted in the predicted null "
        "loss.", "dB", DEFAULT_CEILING_DB, 0.0, exclusive_min=True),
    Key("remote", Kind.TABLE, "`[ladder.remote]`: the ladder sits in the shack, reached "
        "through a second line (below)."),
))

REMOTE = Section("ladder.remote", """A ladder in the shack instead of at the loop: the
termination corner reaches it through a transformer and a second coax. Every key is
needed.""", (
    Key("transformer_ratio", Kind.NUMBER, "Impedance ratio of the transformer at the "
        "termination corner.", "", REQUIRED, 0.0, exclusive_min=True),
    Key("coax_z0_ohm", Kind.NUMBER, "Characteristic impedance of the second line.", "ohm",
        REQUIRED, 0.0, exclusive_min=True),
    Key("coax_velocity_factor", Kind.NUMBER, "Its velocity factor.", "", REQUIRED, 0.0, 1.0,
        exclusive_min=True),
    Key("coax_loss_db_per_100m_at_10mhz", Kind.NUMBER, "Its matched loss at 10 MHz "
        "(scaled with the square root of frequency).", "dB/100 m", REQUIRED, 0.0),
    Key("coax_length_m", Kind.NUMBER, "Its length.", "m", REQUIRED, 0.0),
))


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
    """Parse ``[ladder.remote]`` (every key required)."""
    REMOTE.check(table, where)
    coax = Coax(z0_ohm=REMOTE.get(table, "coax_z0_ohm", where),
                velocity_factor=REMOTE.get(table, "coax_velocity_factor", where),
                loss_db_per_100m=REMOTE.get(table, "coax_loss_db_per_100m_at_10mhz", where),
                length_m=REMOTE.get(table, "coax_length_m", where))
    return RemoteSpec(REMOTE.get(table, "transformer_ratio", where), coax)


def parse_ladder(table: dict[str, Any], where: str = "ladder") -> LadderSpec:
    """Parse ``[ladder]``; every bad value raises ConfigError naming ``ladder.<key>``."""
    LADDER.check(table, where)
    remote = table.get("remote")
    if remote is not None and not isinstance(remote, dict):
        raise ConfigError(f"{where}.remote", "must be a table ([ladder.remote])")
    series = LADDER.get(table, "series", where)
    get_series(series, f"{where}.series")
    topology = LADDER.get(table, "topology", where)
    get_topology(topology, f"{where}.topology")
    node_budget = LADDER.get(table, "search_node_budget", where)
    clock_replaced = node_budget is not None and "search_time_budget_s" not in table
    return LadderSpec(
        series=series,
        tolerance_pct=LADDER.get(table, "tolerance_pct", where),
        relays=parse_relays(table.get("relays", "auto"), f"{where}.relays"),
        topology=topology,
        range_ohm=None if "range_ohm" not in table else parse_range(table["range_ohm"],
                                                                      f"{where}.range_ohm"),
        target_error_pct=LADDER.get(table, "target_error_pct", where),
        null_loss_goal_db=LADDER.get(table, "null_loss_goal_db", where),
        parasitics=Parasitics(LADDER.get(table, "contact_ohm", where),
                              LADDER.get(table, "open_capacitance_pf", where) * 1e-12),
        induced_w=LADDER.get(table, "induced_w", where),
        node_budget=node_budget,
        time_budget_s=None if clock_replaced else LADDER.get(table, "search_time_budget_s",
                                                             where),
        null_depth_ceiling_db=LADDER.get(table, "null_depth_ceiling_db", where),
        remote=None if remote is None else parse_remote(remote, f"{where}.remote"))
