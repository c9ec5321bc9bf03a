"""``nullsteer ladder``: design the relay ladder, print it, write the board table.

Quick form: ``nullsteer ladder --range 400:2500 --relays 7 --series E24 --topology
series-shorting``. With ``--config station.toml`` the ``[ladder]`` section is used
(flags override it); without ``range_ohm`` there, the range and the error target come
from the antenna model of the same file, and the predicted null loss is printed.
"""

from __future__ import annotations

import argparse
import math
from typing import Any

from nullsteer.cli.common import add_json_flag, print_json
from nullsteer.config import load_station
from nullsteer.errors import ConfigError
from nullsteer.ladder import (PARTS_CAUTION, LadderSpec, Parasitics, design_ladder,
                              parse_ladder, parts_list, reactance_warnings,
                              seen_termination_ohm, settings_rows, suggest_transformer_ratio,
                              wiring_diagram, write_board_ladder)
from nullsteer.ladder.network import format_ohm
from nullsteer.ladder.spec import parse_relays
from nullsteer.ladder.topology import TOPOLOGIES

FLAGS = {"range": "--range", "relays": "--relays", "tolerance": "--tolerance",
         "series": "--series", "topology": "--topology", "target": "--target-pct"}
DEFAULT_TIME_LIMIT_S = 30.0


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
    p.add_argument("--time-limit", type=float, default=None,
                   help=f"search time limit, s (default {DEFAULT_TIME_LIMIT_S:g})")
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


def _merge(args: argparse.Namespace, spec: LadderSpec) -> dict:
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
    limit = args.time_limit if args.time_limit is not None else (spec.time_limit_s or DEFAULT_TIME_LIMIT_S)
    if not limit > 0:
        raise ConfigError("--time-limit", f"must be > 0 s, got {limit:g}")
    return {"relays": relays, "series": args.series or spec.series,
            "tolerance_pct": args.tolerance if args.tolerance is not None else spec.tolerance_pct,
            "topology": args.topology or spec.topology, "parasitics": par,
            "time_limit_s": limit}


def _model(station) -> tuple[Any, Any, Any]:
    """Solve the station's loop; returns (solution, needed range, elevations) or Nones."""
    try:
        from nullsteer.antenna.needed import needed_range, span_elevations
        from nullsteer.antenna.ports import LoopModel
        from nullsteer.antenna.specs import freqs_array, parse_antenna, parse_band, parse_feed, parse_ground
    except ImportError:  # antenna model not installed in this build
        return None, None, None
    band = parse_band(station.section("band", required=True))
    model = LoopModel(parse_antenna(station.section("antenna", required=True)),
                      parse_ground(station.section("ground")), parse_feed(station.section("feed")))
    sol = model.solve(freqs_array(band))
    span = band.elevation_span_deg
    return sol, needed_range(sol, span), span_elevations(span)


def run(args: argparse.Namespace) -> int:
    spec = LadderSpec()
    station = None
    if args.config:
        station = load_station(args.config)
        spec = parse_ladder(station.section("ladder"))
    opts = _merge(args, spec)
    sol = needed = elevations = None
    if args.range:
        loop_range = parse_range_flag(args.range)
    elif spec.range_ohm:
        loop_range = spec.range_ohm
    elif station is not None and not args.no_model:
        sol, needed, elevations = _model(station)
        if needed is None or not math.isfinite(needed.hi_ohm):
            raise ConfigError("ladder.range_ohm", "the antenna model gives no finite range; set it")
        loop_range = (needed.lo_ohm, needed.hi_ohm)
    else:
        raise ConfigError("--range", "give --range LO:HI (or --config with [ladder] range_ohm "
                          "or an antenna model)")
    target = args.target_pct if args.target_pct is not None else spec.target_error_pct
    if target is None:
        target = 5.0
        if needed is not None and needed.fb_loss_db_per_pct > 0:
            target = spec.null_loss_goal_db / needed.fb_loss_db_per_pct
    remote = spec.remote
    lo, hi = loop_range
    if remote is not None:
        lo, hi = lo / remote.transformer_ratio, hi / remote.transformer_ratio
    design = design_ladder(lo, hi, opts["relays"], opts["series"], opts["tolerance_pct"],
                           opts["topology"], parasitics=opts["parasitics"],
                           target_error_pct=target, time_limit_s=opts["time_limit_s"],
                           names=FLAGS if not args.config else None)
    out: dict = design.to_json()
    out["loop_range_ohm"] = list(loop_range)
    out["target_error_pct"] = target
    out["parts"] = [r.to_json() for r in parts_list(design, spec.induced_w)]
    out["parts_caution"] = PARTS_CAUTION
    out["induced_w_assumed"] = spec.induced_w
    if remote is not None:
        import numpy as np
        f = np.asarray(getattr(sol, "freqs_hz", [1.8e6, 3.6e6, 7.0e6]), dtype=float)
        seen = seen_termination_ohm(design, remote, f)
        out["remote"] = {
            "suggested": suggest_transformer_ratio(*loop_range, remote.coax.z0_ohm),
            "transformer_ratio": remote.transformer_ratio,
            "warnings": reactance_warnings(seen, f, max(design.worst_case_error_pct, 1.0),
                                           *loop_range)}
    if sol is not None:
        from nullsteer.ladder.nullloss import predicted_null_loss
        loss = predicted_null_loss(design, sol, elevations, remote=remote)
        out["null_loss"] = loss.to_json()
        out["needed_fb_loss_db_per_pct"] = needed.fb_loss_db_per_pct
    if args.board_config:
        write_board_ladder(design, args.board_config)
        out["board_config"] = args.board_config
    if args.json:
        print_json(out)
    else:
        print(_human(design, out))
    return 0


def _human(design, out: dict) -> str:
    lines = [f"Ladder: {design.topology}, {design.relays} relays, {design.series} "
             f"±{design.tolerance_pct:g} %, wanted {format_ohm(design.r_min_ohm)} .. "
             f"{format_ohm(design.r_max_ohm)}"]
    proof = "proven optimal" if design.proven_optimal else "best found before the time limit (not proven)"
    lines.append(f"worst-case error {design.worst_case_error_pct:.2f} % (nominal "
                 f"{design.nominal_error_pct:.2f} %), worst step {design.worst_step_pct:.2f} %, "
                 f"{proof}; {design.search_nodes} nodes in {design.search_time_s:.2f} s")
    if "null_loss" in out:
        lines.append(f"predicted null loss from quantisation: {out['null_loss']['worst_db']:.2f} dB "
                     "worst over band, elevations and both fed ends")
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
