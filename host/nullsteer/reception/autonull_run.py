"""Running an auto-null on a board: model start point, measurement source, presets.

This is the I/O side of :mod:`nullsteer.reception.autonull` (which stays a pure search):

* :func:`solve_station_model` (from :mod:`nullsteer.antenna.station`) solves the station's
  antenna model at one frequency;
* :func:`predicted_optimum_ohm` is the search's start point;
* :func:`build_virtual_receiver` makes the simulator's receiver for a station file;
* :func:`autonull_on_controller` runs the search through a
  :class:`~nullsteer.board.controller.Controller` (every setting really goes through the
  board), restoring the state the board was in if a measurement fails;
* :func:`save_band_preset` records the result as a preset for that band in the station
  file;
* :func:`demo_autonull` does all of it on a simulated board (for ``nullsteer demo``).
"""

from __future__ import annotations

import math
import os
import re
import tempfile
import tomllib
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import Any

import numpy as np

from nullsteer.antenna.station import solve_station_model, station_elevations_deg
from nullsteer.reception.autonull import AutonullResult, Probe, Reference, Switcher, run_autonull
from nullsteer.station.config import Station, load_station
from nullsteer.errors import ConfigError, LinkError, MeasurementError, NullsteerError
from nullsteer.reception.measure import Meter, Source
from nullsteer.reception.noise import NoiseCategory, db_to_ratio, parse_noise

ProgressFn = Callable[[str, Probe | None, float | None], None]


def predicted_optimum_ohm(solution: Any, fed_end: str, elevations_deg: Sequence[float],
                          freq_index: int = 0) -> float:
    """The model's F/B-optimum termination over the elevations, ohms (inf if open is best)."""
    r = solution.optimum_termination_ohm(fed_end, list(elevations_deg), freq_index=freq_index)
    return float(np.ravel(r)[0])


def table_termination(table: Sequence[tuple[int, float]]) -> Callable[[int, float], complex]:
    """``termination_ohm(mask, freq_hz)`` from a board table (DC resistance of each setting)."""
    ohms = {int(m): float(r) for m, r in table}

    def termination(mask: int, freq_hz: float) -> complex:
        if mask not in ohms:
            raise ConfigError("--mask", f"setting {mask} is not in the ladder table")
        return complex(ohms[mask])

    return termination


def ladder_termination(block: dict[str, Any]) -> Callable[[int, float], complex]:
    """``termination_ohm(mask, freq_hz)`` from a board config's ladder block: each
    setting's impedance at frequency, relay contact resistance and open-contact
    capacitance included (``nullsteer.ladder.settings_impedance_ohm``)."""
    from nullsteer.ladder import design_from_board_block, settings_impedance_ohm

    design = design_from_board_block(block)
    masks = {s.mask: i for i, s in enumerate(design.settings)}
    cache: dict[float, np.ndarray] = {}

    def termination(mask: int, freq_hz: float) -> complex:
        if mask not in masks:
            raise ConfigError("--mask", f"setting {mask} is not in the ladder table")
        if freq_hz not in cache:
            cache[freq_hz] = np.ravel(settings_impedance_ohm(design, freq_hz))
        return complex(cache[freq_hz][masks[mask]])

    return termination


def board_termination(board_config: str | Path | None,
                      table: Sequence[tuple[int, float]]) -> Callable[[int, float], complex]:
    """The simulated termination: from the board config's ladder block when it names the
    topology and resistors (impedance at frequency), else the table's DC values."""
    if board_config is not None and Path(board_config).exists():
        import json

        try:
            block = json.loads(Path(board_config).read_text()).get("ladder") or {}
        except ValueError:
            block = {}
        if "topology" in block and "resistors_ohm" in block:
            return ladder_termination(block)
    return table_termination(table)


def build_virtual_receiver(station: Station, solution: Any,
                           termination: Callable[[int, float], complex],
                           clock: Callable[[], float] | None = None) -> Any:
    """The simulator's receiver for this station: ``[sim]`` stations, ``[noise]`` chain."""
    from nullsteer.reception.virtual import ModelResponse, VirtualReceiver, parse_scenario

    scenario = parse_scenario(station)
    noise = parse_noise(station.section("noise"))
    kwargs: dict[str, Any] = {}
    if clock is not None:
        kwargs["clock"] = clock
    return VirtualReceiver(response=ModelResponse(solution), scenario=scenario,
                           termination_ohm=termination, noise_category=noise.category,
                           bandwidth_hz=noise.bandwidth_hz,
                           system_noise_factor=db_to_ratio(noise.receiver_nf_db), **kwargs)


def board_state_reader(controller: Any) -> Callable[[], tuple[str, int, bool]]:
    """Read the relays: from the simulated board's pins when there is one, else STATUS."""
    board = getattr(controller.link, "board", None)
    if board is not None and hasattr(board, "state"):
        return board.state  # type: ignore[no-any-return]

    def from_status() -> tuple[str, int, bool]:
        s = controller.status().state
        return (s.fed_end.value, s.mask, s.open)

    return from_status


def autonull_on_controller(controller: Any, meter: Meter, freq_hz: float, fed_end: str,
                           start_ohm: float, reference: Reference = Reference.REVERSED,
                           max_switchings: int = 12,
                           progress: ProgressFn | None = None,
                           confirm_blocks: int = 1) -> AutonullResult:
    """Run the search through ``controller``; on a measurement failure put back the old state.

    ``confirm_blocks`` ABBA blocks of fresh readings follow the search (two switchings
    each) and give the null's confidence interval (see :func:`run_autonull`).

    A :class:`MeasurementError` restores the state the board was in before the search
    (the last state known good for listening) and is re-raised with that said. A
    :class:`LinkError` is re-raised as is: the board keeps the last state it applied
    (commands are absolute and the board persists its state).
    """
    from nullsteer.board.controller import FedEnd

    table = controller.table()
    if not table:
        raise ConfigError("ladder", "the board has no ladder table loaded: nothing to search")
    before = controller.status().state
    initial = (before.fed_end.value, before.mask, before.open)

    def apply(fe: str, mask: int, open_: bool) -> None:
        controller.set_state(FedEnd(fe), mask, open_)

    switcher = Switcher(apply, current=initial)
    try:
        return run_autonull(table, switcher, meter.measure_db, fed_end, freq_hz, start_ohm,
                            reference=reference, max_switchings=max_switchings,
                            progress=progress, confirm_blocks=confirm_blocks,
                            measure=meter.measure)
    except MeasurementError as exc:
        try:
            switcher.set(*initial)
        except NullsteerError:
            raise MeasurementError(f"{exc}; the board could not be put back "
                                   f"(last state set: {_describe(switcher.last_good)})") from None
        raise MeasurementError(f"{exc}; board put back to its state before the search "
                               f"({_describe(initial)})") from None
    except LinkError as exc:
        raise LinkError(f"{exc}; the board keeps its last state "
                        f"({_describe(switcher.last_good)})") from None


def _describe(state: tuple[str, int, bool] | None) -> str:
    if state is None:
        return "unknown"
    fe, mask, open_ = state
    return f"fed {fe}, mask {mask}" + (", open" if open_ else "")


# -- presets ------------------------------------------------------------------------
_MARK = "# preset written by nullsteer autonull"
_NAME = re.compile(r"^[A-Za-z0-9_-]{1,40}$")


def band_of(freq_hz: float) -> str | None:
    """The named band (see :data:`nullsteer.station.presets.BAND_EDGES_MHZ`) holding ``freq_hz``."""
    from nullsteer.station.presets import BAND_EDGES_MHZ

    f = freq_hz / 1e6
    for name, (lo, hi) in BAND_EDGES_MHZ.items():
        if lo <= f <= hi:
            return name
    return None


def _block(name: str, fed_end: str, default_ohms: float, bands: dict[str, float]) -> str:
    lines = [_MARK, f"[presets.{name}]", f'fed_end = "{fed_end}"',
             f"ohms = {default_ohms:.1f}"]
    inner = ", ".join(f'"{b}" = {{ ohms = {o:.1f} }}' for b, o in sorted(bands.items()))
    lines.append(f"bands = {{ {inner} }}")
    return "\n".join(lines) + "\n"


def save_band_preset(station_path: str | Path, name: str, fed_end: str, ohms: float,
                     freq_hz: float) -> str:
    """Record ``ohms`` for the band holding ``freq_hz`` in preset ``name`` of the file.

    The preset is written as a ``[presets.NAME]`` table marked as ours at the end of the
    file; a preset of that name written earlier by this function gets the band added or
    replaced (its other bands kept). A preset of that name written by hand is left alone
    (ConfigError). The file is rewritten atomically and re-read to check it. Returns the
    band name.
    """
    if not _NAME.match(name):
        raise ConfigError("--save-preset", f"use 1-40 letters, digits, '-' or '_', got {name!r}")
    band = band_of(freq_hz)
    if band is None:
        raise ConfigError("--save-preset", f"{freq_hz / 1e6:g} MHz is in no named band")
    path = Path(station_path)
    text = path.read_text(encoding="utf-8")
    raw = tomllib.loads(text)
    bands: dict[str, float] = {}
    pattern = re.compile(rf"(?ms)^{re.escape(_MARK)}\n\[presets\.{re.escape(name)}\]\n.*?(?=^\[|^#|\Z)")
    m = pattern.search(text)
    if m:
        old = tomllib.loads(m.group(0).split("\n", 1)[1]).get("presets", {}).get(name, {})
        if old.get("fed_end") == fed_end:
            bands = {b: float(v["ohms"]) for b, v in old.get("bands", {}).items() if "ohms" in v}
        text = text[:m.start()] + text[m.end():]
    elif name in raw.get("presets", {}):
        raise ConfigError("--save-preset", f"preset {name!r} exists in {path} and was not "
                                           "written by autonull: choose another name")
    bands[band] = float(ohms)
    new = text.rstrip("\n") + "\n\n" + _block(name, fed_end, float(ohms), bands)
    try:
        from nullsteer.station.presets import parse_presets

        parse_presets(Station(path=path, raw=tomllib.loads(new)))
    except (tomllib.TOMLDecodeError, ConfigError) as exc:
        raise ConfigError("--save-preset", f"the updated file would not load ({exc}); "
                                           "nothing written") from None
    fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=".station-", suffix=".toml")
    with os.fdopen(fd, "w", encoding="utf-8") as f:
        f.write(new)
    os.replace(tmp, path)
    return band


# -- the demo -------------------------------------------------------------------------
def demo_autonull(station_path: str | Path, freq_mhz: float | None = None,
                  fed_end: str | None = None, dwell_s: float = 0.05, reads: int = 3,
                  progress: ProgressFn | None = None,
                  board_config: str | Path | None = None) -> AutonullResult:
    """Auto-null on a simulated board (real firmware) with the virtual receiver.

    Parameters
    ----------
    station_path : path
        Station file with ``[[device]]`` (its ``board`` config), ``[sim]`` stations.
    freq_mhz : float or None
        Frequency to null; default the strongest ``[[sim.station]]``'s.
    fed_end : str or None
        "A"/"B"; default the end whose null points nearest that station.
    dwell_s, reads : float, int
        Dwell after each switching (s) and readings averaged per setting.
    board_config : path or None
        Board config for the simulated board; default the first device's.
    """
    from nullsteer.station.bearing import fed_end_for_null
    from nullsteer.board.controller import Controller
    from nullsteer.board.devices import parse_devices
    from nullsteer.reception.receivers import open_receiver
    from nullsteer.reception.virtual import parse_scenario

    station = load_station(station_path)
    scenario = parse_scenario(station)
    if not scenario.stations:
        raise ConfigError("sim.station", "the demo needs at least one [[sim.station]]")
    loudest = max(scenario.stations, key=lambda s: s.field_dbuv_per_m)
    freq_hz = loudest.freq_hz if freq_mhz is None else freq_mhz * 1e6
    end_a = float(station.section("antenna").get("end_a_bearing_deg", 0.0))
    fe = fed_end or fed_end_for_null(loudest.bearing_deg, end_a)[0]
    devices = parse_devices(station)
    if board_config is None:
        board_config = next((d.board_config for d in devices if d.board_config is not None), None)
    if board_config is None:
        raise ConfigError("device.board", "the demo needs a [[device]] with a board config")
    with Controller(_open_sim(Path(board_config)), timeout_s=2.0) as ctl:
        solution = solve_station_model(station, [freq_hz])
        start = predicted_optimum_ohm(solution, fe, station_elevations_deg(station))
        table = ctl.table()
        receiver = build_virtual_receiver(station, solution,
                                          board_termination(board_config, table))
        source: Source = open_receiver("sim://", freq_hz=freq_hz, virtual=receiver,
                                       board_state=board_state_reader(ctl))
        meter = Meter(source, dwell_s=dwell_s, reads=reads, interval_s=0.02)
        start = start if math.isfinite(start) else max(r for _, r in table)
        return autonull_on_controller(ctl, meter, freq_hz, fe, start, progress=progress)


def _open_sim(board_config: Path) -> Any:
    """A link to a freshly started simulated board (stopped when the link closes)."""
    from nullsteer.board.links.serial_link import open_url as open_serial
    from nullsteer.board.links.sim_link import SimLink
    from nullsteer.sim import SimBoard

    board = SimBoard(board_config)
    try:
        board.start()
    except OSError as exc:
        raise LinkError(f"cannot start the simulated board: {exc}") from None
    try:
        return SimLink("sim://", board, open_serial(board.url))
    except Exception:
        board.stop()
        raise


def noise_category_names() -> list[str]:
    return [c.value for c in NoiseCategory]


def station_sim_meter(station: Station, solution: Any, controller: Any, freq_hz: float,
                      board_config: str | Path | None, dwell_s: float = 0.05,
                      reads: int = 3) -> Meter:
    """A meter reading the station's virtual receiver at ``controller``'s actual relays
    (the ``sim`` source, as ``nullsteer autonull --source sim`` and the control page
    use it)."""
    from nullsteer.reception.virtual import SimSource

    receiver = build_virtual_receiver(station, solution,
                                      board_termination(board_config, controller.table()))
    return Meter(SimSource(receiver, freq_hz, board_state_reader(controller)),
                 dwell_s=dwell_s, reads=reads, interval_s=0.02)
