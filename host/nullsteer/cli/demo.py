"""``nullsteer demo``: the main job, end to end, on a simulated board.

1. model the station's loop and find the termination range it needs over its band;
2. design the relay ladder for that range and write its table into a board config;
3. start a simulated board (the real firmware under MicroPython) with that config;
4. set a preset, flip the null, open the termination, showing the relay switching order;
5. find the deepest null on an (invented) interferer by measurement on the simulator;
6. run the schedule service time-shifted over the next day: flips at the sun events;
7. write the report (plots, ladder, parts, noise) to the output folder.
"""

from __future__ import annotations

import argparse
import json
from datetime import datetime
from pathlib import Path
from typing import Any

from nullsteer.cli.common import add_json_flag, print_json
from nullsteer.station.config import Station, load_station
from nullsteer.errors import ConfigError


def _say(args: argparse.Namespace, text: str = "") -> None:
    if not args.json:
        print(text, flush=True)


def step_model(station: Station) -> tuple[Any, Any]:
    """Solve the station's loop over its band; returns (solution, needed range)."""
    from nullsteer.antenna.needed import needed_range
    from nullsteer.antenna.station import station_loop

    loop = station_loop(station)
    solution = loop.solve()
    return solution, needed_range(solution, loop.band.elevation_span_deg)


def switching_order(events: list, since: int) -> str:
    """The relay changes after index ``since`` as "NAME on +t ms, ..."."""
    new = events[since:]
    if not new:
        return "no relay moved"
    t0 = new[0].t_s
    return ", ".join(f"{e.name} {'on' if e.energised else 'off'} +{(e.t_s - t0) * 1000:.0f} ms"
                     for e in new)


def step_board(args: argparse.Namespace, station: Station, board_config: Path) -> dict[str, Any]:
    """Drive a simulated board: preset, flip, open; returns what happened."""
    from nullsteer.cli.board import describe
    from nullsteer.board.controller import Controller
    from nullsteer.board.links.serial_link import open_url as open_serial
    from nullsteer.station.presets import parse_presets, resolve_target
    from nullsteer.sim import SimBoard
    from nullsteer.protocol import wire

    presets = parse_presets(station)
    out: dict[str, Any] = {"steps": []}
    with SimBoard(board_config, state_dir=args.out / "board-state") as board:
        ctl = Controller(open_serial(board.url), timeout_s=2.0)
        info = ctl.info()
        table = ctl.table()
        out["board"] = info.to_json()
        warning = ctl.firmware_mismatch()
        if warning:
            _say(args, f"  warning: {warning}")
        _say(args, f"simulated board on {board.url}: firmware {info.firmware}, "
                   f"{info.bits} ladder relays, {len(table)} settings "
                   f"{table[0][1]:.0f}..{table[-1][1]:.0f} ohm")
        name = next(iter(presets), None)
        plan: list[tuple[str, Any]] = []
        if name is not None:
            target = resolve_target(presets[name])
            plan.append((f"preset {name}", target))
        for label, target in plan:
            mask = 0
            if target.ohms is not None:
                mask, _, _ = wire.nearest_by_ratio(table, target.ohms)
            before = len(board.events())
            status = ctl.set_state(target.fed_end, mask, target.open)
            out["steps"].append({"step": label, **status.to_json()})
            _say(args, f"  {label:<16} {describe(status)}")
            _say(args, f"  {'':<16} relays: {switching_order(board.events(), before)}")
        for label, action in (("flip", ctl.flip), ("flip back", ctl.flip)):
            before = len(board.events())
            status = action()
            out["steps"].append({"step": label, **status.to_json()})
            _say(args, f"  {label:<16} {describe(status)}")
            _say(args, f"  {'':<16} relays: {switching_order(board.events(), before)}")
        now = ctl.status().state
        before = len(board.events())
        status = ctl.set_state(now.fed_end, now.mask, True)
        out["steps"].append({"step": "open", **status.to_json()})
        _say(args, f"  {'open':<16} {describe(status)}")
        _say(args, f"  {'':<16} relays: {switching_order(board.events(), before)}")
        status = ctl.set_state(now.fed_end, now.mask, False)
        ctl.close()
    return out


def step_schedule(args: argparse.Namespace, station: Station, board_config: Path) -> list[str]:
    """The schedule service, time-shifted over the next day, flipping a simulated board."""
    from nullsteer.board.controller import Controller
    from nullsteer.board.links.serial_link import open_url as open_serial
    from nullsteer.schedule.service import Service, ServiceOptions
    from nullsteer.sim import SimBoard
    from nullsteer.station.site import parse_site

    start = datetime.now(parse_site(station).tz).replace(second=0, microsecond=0)
    with SimBoard(board_config) as board:
        service = Service(station, ServiceOptions(start=start, speed=0.0, days=1.0),
                          opener=lambda device: Controller(open_serial(board.url), timeout_s=2.0))
        service.run()
        for line in service.lines:
            _say(args, f"  {line}")
        state = board.state()
    _say(args, f"  relays now: fed end {state[0]}, mask {state[1]}, open {int(state[2])}")
    return list(service.lines)


def run(args: argparse.Namespace) -> int:
    from nullsteer.board.devices import parse_devices
    from nullsteer.ladder import write_board_ladder
    from nullsteer.ladder.station import design_for_station
    from nullsteer.report.builder import write_report

    station = load_station(args.config)
    args.out = Path(args.out)
    args.out.mkdir(parents=True, exist_ok=True)
    summary: dict[str, Any] = {}

    _say(args, "== 1. the loop and the termination it needs")
    solution, need = step_model(station)
    summary["needed_range_ohm"] = [need.lo_ohm, need.hi_ohm]
    freqs = solution.freqs_hz / 1e6
    _say(args, f"  band {freqs[0]:.3f}..{freqs[-1]:.3f} MHz: termination needed "
               f"{need.lo_ohm:.0f}..{need.hi_ohm:.0f} ohm")

    _say(args, "== 2. the relay ladder")
    planned = design_for_station(station, solution=solution, needed=need)
    design = planned.design
    summary["ladder"] = planned.to_json()
    _say(args, f"  {len(design.resistors_ohm)} relays, base {design.base_ohm:g} ohm + "
               + ", ".join(f"{r:g}" for r in design.resistors_ohm)
               + f" ohm; worst step {design.worst_step_pct:.1f} %, worst case "
                 f"{design.worst_case_error_pct:.1f} % with tolerance "
                 f"({'proven optimal' if design.proven_optimal else 'best found, not proven'})")
    if planned.null_loss is not None:
        loss = planned.null_loss
        _say(args, f"  predicted null loss from the steps: worst {loss.worst_db:.2f} dB "
                   f"(nulls capped at {loss.ceiling_db:g} dB; uncapped {loss.worst_raw_db:.1f} dB)")
    devices = parse_devices(station)
    source = next((d.board_config for d in devices if d.board_config is not None), None)
    if source is None:
        raise ConfigError("device.board", "the demo needs a [[device]] with a board config")
    board_config = args.out / "board.json"
    board_config.write_text(source.read_text())
    write_board_ladder(design, board_config)
    _say(args, f"  board config with the ladder table: {board_config}")

    _say(args, "== 3. the board, driven from the shack (simulated, real firmware)")
    summary["board"] = step_board(args, station, board_config)

    _say(args, "== 4. auto-null on the loudest interferer (virtual receiver)")
    from nullsteer.reception.autonull_run import demo_autonull

    result = demo_autonull(args.config, board_config=board_config,
                           progress=None if args.json else _progress)
    summary["autonull"] = result.to_json()
    _say(args, f"  best setting mask {result.best_mask} = {result.best_ohms:.0f} ohm, "
               f"{_null_text(result)} against the reversed direction, "
               f"{result.switchings} switchings (+{result.confirm_switchings} to confirm)")

    _say(args, "== 5. the next day of scheduled flips, time-shifted (service against the board)")
    summary["schedule"] = step_schedule(args, station, board_config)

    _say(args, "== 6. report")
    page = write_report(station, args.out, fed_end=result.fed_end, autonull=result.to_json(),
                        board_config=board_config, design=design)
    (args.out / "demo.json").write_text(json.dumps(summary, indent=2, default=str) + "\n")
    summary["report"] = str(page)
    _say(args, f"  {page}")
    if args.json:
        print_json(summary)
    return 0


def _progress(text: str, probe: Any = None, level_db: float | None = None) -> None:
    if probe is not None:
        text = f"{text:<9} mask {probe.mask:3d} = {probe.ohms:6.0f} ohm: {probe.level_db:6.1f} dB"
    elif level_db is not None:
        text = f"{text:<9} {level_db:6.1f} dB"
    print(f"    {text}", flush=True)


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("demo", help="the main job end to end on a simulated board")
    from nullsteer.sim import EXAMPLE_STATION

    p.add_argument("--config", default=EXAMPLE_STATION, metavar="FILE",
                   help="station file (default: the invented demo station in examples/)")
    p.add_argument("--out", default="out/demo", metavar="DIR", help="where to write the report")
    add_json_flag(p)
    p.set_defaults(func=run)


def _null_text(result) -> str:  # noqa: ANN001 - an AutonullResult
    if result.significance is not None:
        return result.significance.describe()
    return f"null {result.null_db:+.1f} dB"
