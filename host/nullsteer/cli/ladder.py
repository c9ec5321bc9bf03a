"""``nullsteer ladder``: design the relay ladder, print it, write the board table.

Quick form: ``nullsteer ladder --range 400:2500 --relays 7 --series E24 --topology
series-shorting``. With ``--config station.toml`` the ``[ladder]`` section is used
(flags override it); without ``range_ohm`` there, the range and the error target come
from the antenna model of the same file, and the predicted null loss is printed.
"""

from __future__ import annotations

import argparse
import math
import sys
from dataclasses import replace
from typing import Any

from nullsteer.cli.common import add_json_flag, print_json
from nullsteer.station.config import load_station
from nullsteer.errors import ConfigError
from nullsteer.ladder import (PARTS_CAUTION, LadderSpec, Parasitics, parse_ladder, parts_list,
                              settings_rows, wiring_diagram, write_board_ladder)
from nullsteer.ladder.station import design_for_station
from nullsteer.ladder.network import format_ohm
from nullsteer.ladder.outputs import reach_warnings
from nullsteer.ladder.spec import parse_relays
from nullsteer.ladder.topology import TOPOLOGIES

FLAGS = {"range": "--range", "relays": "--relays", "tolerance": "--tolerance",
         "series": "--series", "topology": "--topology", "target": "--target-pct"}


def register(subparsers: Any) -> None:
    p = subparsers.add_parser("ladder", help="design the relay-switched termination ladder",
                              description=__doc__.splitlines()[0])
    p.add_argument("--config", help="station TOML file")
    p.add_argument("--range", help="wanted terminations LO:HI, ohms")
    p.add_argument("--relays", help='ladder relays, or "auto" (fewest meeting --target-pct)')
    p.add_argument("--series", help="E12 | E24 | E48 | E96")
    p.add_argument("--tolerance", type=float, help="resistor tolerance, %% (default: the series')")
    p.add_argument("--topology", help=" | ".join(TOPOLOGIES))
    p.add_argument("--target-pct", type=float, help="worst-case error goal for --relays auto, %%")
    p.add_argument("--contact-ohm", type=float, help="closed contact resistance, ohms")
    p.add_argument("--open-pf", type=float, help="open-contact capacitance, pF")
    p.add_argument("--time-budget", type=float, default=None, metavar="S",
                   help="seconds the optimiser may search before it stops (not proven); "
                        "default 2")
    p.add_argument("--node-budget", type=int, default=None,
                   help="nodes the optimiser may visit before it stops; alone, it replaces "
                        "the clock (reproducible)")
    p.add_argument("--board-config", help="board config JSON to write the ladder table into")
    p.add_argument("--no-model", action="store_true", help="do not run the antenna model")
    add_json_flag(p)
    p.set_defaults(func=run)


def parse_range_flag(text: str) -> tuple[float, float]:
    parts = text.split(":")
    try:
        lo, hi = (float(x) for x in parts)
    except ValueError:
        raise ConfigError("--range", f"expected LO:HI in ohms, got {text!r}") from None
    if not (math.isfinite(lo) and math.isfinite(hi) and lo > 0):
        raise ConfigError("--range", f"LO must be > 0 ohm, got {text!r}")
    if not lo < hi:
        raise ConfigError("--range", f"LO must be below HI, got {text!r}")
    return lo, hi


def _merge(args: argparse.Namespace, spec: LadderSpec) -> LadderSpec:
    """The station's ``[ladder]`` settings with the command-line flags applied."""
    relays = spec.relays
    if args.relays is not None:
        try:
            value: Any = "auto" if args.relays == "auto" else int(args.relays)
        except ValueError:
            raise ConfigError("--relays", f"must be a whole number or auto, got {args.relays!r}") from None
        if value != "auto" and value < 1:
            raise ConfigError("--relays", f"must be >= 1, got {value}")
        relays = parse_relays(value, "--relays")
    par = spec.parasitics
    if args.contact_ohm is not None or args.open_pf is not None:
        par = Parasitics(par.contact_ohm if args.contact_ohm is None else args.contact_ohm,
                         par.open_capacitance_f if args.open_pf is None else args.open_pf * 1e-12)
        if par.contact_ohm < 0 or par.open_capacitance_f < 0:
            raise ConfigError("--contact-ohm/--open-pf", "must be >= 0")
    budget = spec.node_budget if args.node_budget is None else args.node_budget
    if budget is not None and not budget >= 1:
        raise ConfigError("--node-budget", f"must be >= 1, got {budget}")
    seconds = spec.time_budget_s if args.time_budget is None else args.time_budget
    if args.node_budget is not None and args.time_budget is None:
        seconds = None                      # a count alone: reproducible, no clock
    if seconds is not None and not (math.isfinite(seconds) and 0 < seconds <= 3600):
        raise ConfigError("--time-budget", f"must be 0 < S <= 3600 seconds, got {seconds:g}")
    return replace(
        spec, relays=relays, series=args.series or spec.series,
        tolerance_pct=args.tolerance if args.tolerance is not None else spec.tolerance_pct,
        topology=args.topology or spec.topology, parasitics=par, node_budget=budget,
        time_budget_s=seconds,
        range_ohm=parse_range_flag(args.range) if args.range else spec.range_ohm,
        target_error_pct=args.target_pct if args.target_pct is not None else spec.target_error_pct)


def run(args: argparse.Namespace) -> int:
    spec = LadderSpec()
    station = None
    if args.config:
        station = load_station(args.config)
        spec = parse_ladder(station.section("ladder"))
    spec = _merge(args, spec)
    if spec.range_ohm is None and (station is None or args.no_model):
        raise ConfigError("--range", "give --range LO:HI (or --config with [ladder] range_ohm "
                          "or an antenna model)")
    sd = design_for_station(station, spec=spec, use_model=not args.no_model,
                            names=FLAGS if not args.config else None)
    design = sd.design
    out: dict = sd.to_json()
    out["parts"] = [r.to_json() for r in parts_list(design, spec.induced_w)]
    out["parts_caution"] = PARTS_CAUTION
    out["induced_w_assumed"] = spec.induced_w
    out["warnings"] = reach_warnings(design)
    if args.board_config:
        write_board_ladder(design, args.board_config)
        out["board_config"] = args.board_config
    if args.json:
        print_json(out)
    else:
        print(_human(design, out))
    for w in out["warnings"]:
        print(f"warning: {w}", file=sys.stderr)
    return 0


def _human(design, out: dict) -> str:
    lines = [f"Ladder: {design.topology}, {design.relays} relays, {design.series} "
             f"±{design.tolerance_pct:g} %, wanted {format_ohm(design.r_min_ohm)} .. "
             f"{format_ohm(design.r_max_ohm)}"]
    proof = "proven optimal" if design.proven_optimal else "best found, not proven"
    budget = "" if design.time_budget_s is None else f" of a {design.time_budget_s:g} s budget"
    lines.append(f"worst-case error {design.worst_case_error_pct:.2f} % (nominal "
                 f"{design.nominal_error_pct:.2f} %), worst step {design.worst_step_pct:.2f} %")
    lines.append(f"search: {proof}; {design.search_nodes} nodes in "
                 f"{design.search_time_s:.2f} s{budget}")
    if "null_loss" in out:
        nl = out["null_loss"]
        lines.append(f"predicted null loss from quantisation: {nl['worst_db']:.2f} dB worst over "
                     f"band, elevations and both fed ends with F/B capped at {nl['ceiling_db']:g} dB "
                     f"(goal {out['null_loss_goal_db']:g} dB); uncapped {nl['worst_raw_db']:.2f} dB")
    for t in out.get("auto_trials", []):
        lines.append(f"  auto: {t['relays']} relays -> {t['worst_capped_loss_db']:.2f} dB")
    lines += ["", "Parts (power rating for %.2g W reaching the termination, derated 2x):"
              % out["induced_w_assumed"]]
    for r in out["parts"]:
        lines.append(f"  {r['ref']:<4} {format_ohm(r['value_ohm']):>10}  {r['series']} "
                     f"±{r['tolerance_pct']:g} %  {r['power_w']:g} W  ({r['role']})")
    lines += ["  " + PARTS_CAUTION, "", "Settings (mask -> ohms, step to next):"]
    for mask, ohms, step in settings_rows(design):
        s = "" if math.isnan(step) else f"{step:+.2f} %"
        lines.append(f"  {mask:>5}  0x{mask:03x}  {ohms:>10.1f}  {s}")
    for w in out.get("remote", {}).get("warnings", []):
        lines.append(f"warning: {w['freq_mhz']:.3f} MHz: {w['message']}")
    if "remote" in out:
        sug = out["remote"]["suggested"]
        lines.append(f"remote line: suggested impedance ratio {sug['ratio']:g} "
                     f"({sug['turns']:g}:1 turns; exact {sug['exact_ratio']:.2f})")
    if "board_config" in out:
        lines.append(f"board table written to {out['board_config']}")
    lines += ["", wiring_diagram(design)]
    return "\n".join(lines)
