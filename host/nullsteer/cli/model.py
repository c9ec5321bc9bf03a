"""``nullsteer model``: optimum termination, F/B, feed impedance and RDF of a loop.

Either from a station file (``--config station.toml``: sections [antenna], [ground],
[band], [feed]) or from a quick description on the command line (``--length --height
--bottom --wire-mm --ground --sigma --eps``). ``--freq`` and ``--elevation`` override the
band. With one elevation, ``r_opt_ohm`` maximises F/B there; with a span it maximises the
ratio of the forward to the backward power summed over the span's elevations.
``--termination OHMS|short|open`` (or ``[antenna].termination``) evaluates the loop at that
termination instead of at the optimum (the optimum is still reported). ``--soil NAME``
takes σ and εr from an ITU-R P.527 ground category. Warnings (validity, a loop too large
for one rear null) go to stderr and into the ``warnings`` list of ``--json``, whose numbers
are always finite (null where undefined, e.g. an open termination's ohms).
"""

from __future__ import annotations

import argparse
import sys
from dataclasses import replace

import numpy as np

from nullsteer.station.bearing import FedEnd
from nullsteer.antenna.metrics import NULL_DEPTH_CEILING_DB
from nullsteer.antenna.ports import LoopModel
from nullsteer.antenna.station import station_loop
from nullsteer.antenna.specs import (SOIL_PRESETS, BandSpec, parse_antenna,
                                     parse_elevations_deg, parse_feed, parse_ground,
                                     parse_termination)
from nullsteer.antenna.summary import summarise
from nullsteer.cli.common import add_json_flag, print_json
from nullsteer.station.config import load_station, parse_freqs_mhz
from nullsteer.errors import ConfigError

_QUICK = ("length", "height", "bottom", "wire_mm", "ground", "sigma", "eps", "bearing", "soil",
          "insulation_mm")


def register(subparsers) -> None:
    p = subparsers.add_parser("model", help="model the loop: optimum termination, F/B, RDF",
                              description=__doc__.splitlines()[0])
    p.add_argument("--config", help="station TOML file")
    p.add_argument("--length", type=float, help="loop length, m (quick form)")
    p.add_argument("--height", type=float, help="top wire height, m")
    p.add_argument("--bottom", type=float, help="bottom wire height, m")
    p.add_argument("--wire-mm", dest="wire_mm", type=float, help="wire diameter, mm")
    p.add_argument("--ground", choices=("perfect", "free", "real"),
                   help="ground under the loop (quick form; default real)")
    p.add_argument("--sigma", type=float, help="ground conductivity, S/m (real ground)")
    p.add_argument("--eps", type=float, help="ground relative permittivity (real ground)")
    p.add_argument("--soil", choices=tuple(SOIL_PRESETS),
                   help="ground category (ITU-R P.527 names) instead of --sigma/--eps")
    p.add_argument("--insulation-mm", dest="insulation_mm", type=float,
                   help="wire insulation thickness, mm (PVC, εr 3.5)")
    p.add_argument("--termination", help="evaluate at this termination: ohms, short or open")
    p.add_argument("--bearing", type=float, help="compass bearing toward end A, degrees")
    p.add_argument("--freq", help="MHz, or start:stop:step")
    p.add_argument("--elevation", help="degrees, or lo:hi[:step] span")
    p.add_argument("--fed-end", dest="fed_end", choices=("A", "B"), default="A",
                   help="end feeding the receiver (default A)")
    add_json_flag(p)
    p.set_defaults(func=run)


def _quick_specs(args):
    if args.length is None:
        raise ConfigError("--length", "is required without --config")
    table = {"shape": "rectangle", "length_m": args.length,
             "height_m": args.height if args.height is not None else 6.0,
             "bottom_m": args.bottom if args.bottom is not None else 1.8,
             "wire_diameter_mm": args.wire_mm if args.wire_mm is not None else 1.6,
             "end_a_bearing_deg": args.bearing if args.bearing is not None else 0.0}
    if args.insulation_mm is not None:
        table["insulation_mm"] = args.insulation_mm
    flags = {"length_m": "--length", "height_m": "--height", "bottom_m": "--bottom",
             "wire_diameter_mm": "--wire-mm", "end_a_bearing_deg": "--bearing",
             "insulation_mm": "--insulation-mm"}
    try:
        antenna = parse_antenna(table)
    except ConfigError as exc:
        raise ConfigError(flags.get(exc.key.split(".")[-1], exc.key), exc.message) from None
    g = {"kind": args.ground or "real"}
    if args.sigma is not None:
        g["conductivity_s_per_m"] = args.sigma
    if args.eps is not None:
        g["permittivity"] = args.eps
    if args.soil is not None:
        g["preset"] = args.soil
    try:
        ground = parse_ground(g)
    except ConfigError as exc:
        key = {"ground.conductivity_s_per_m": "--sigma", "ground.permittivity": "--eps",
               "ground.preset": "--soil"}
        raise ConfigError(key.get(exc.key, "--ground"), exc.message) from None
    band = BandSpec(freqs_hz=(1.83e6,), elevations_deg=parse_elevations_deg(
        [10.0, 60.0], "--elevation"))
    return antenna, ground, band, parse_feed({})


def load_specs(args):
    """(antenna, ground, band, feed) from ``--config`` or the quick flags, with overrides."""
    if args.config:
        for name in _QUICK:
            if getattr(args, name) is not None:
                flag = "--" + name.replace("_", "-")
                raise ConfigError(flag, "cannot be combined with --config")
        loop = station_loop(load_station(args.config))
        antenna, ground, band, feed = loop.antenna, loop.ground, loop.band, loop.feed
    else:
        antenna, ground, band, feed = _quick_specs(args)
    freqs = band.freqs_hz
    els = band.elevations_deg
    if args.freq is not None:
        freqs = tuple(f * 1e6 for f in parse_freqs_mhz(args.freq, "--freq"))
    if args.elevation is not None:
        els = parse_elevations_deg(args.elevation, "--elevation")
    if len(freqs) > 2000:
        raise ConfigError("--freq", f"{len(freqs)} frequencies is too many (at most 2000)")
    if args.termination is not None:
        antenna = replace(antenna, termination_ohm=parse_termination(args.termination,
                                                                     "--termination"))
    return antenna, ground, BandSpec(freqs_hz=freqs, elevations_deg=els), feed


def compute(antenna, ground, band, feed, fed_end: FedEnd, freq_key: str = "band.freqs_mhz"
            ) -> dict:
    """The JSON report of ``nullsteer model`` (also used by the human table): the loop
    solved over the band, then :func:`nullsteer.antenna.summary.summarise`.

    A model too large for the budget raises ConfigError naming ``freq_key``.
    """
    try:
        sol = LoopModel(antenna, ground, feed).solve(np.array(band.freqs_hz))
    except ConfigError as exc:
        if exc.key == "band.freqs_mhz":
            raise ConfigError(freq_key, exc.message) from None
        raise
    return summarise(sol, antenna, band.elevations_deg, fed_end)


def _num(v, fmt: str, width: int) -> str:
    """A number for the table; None (undefined) and open (inf) print as words."""
    if v is None or (isinstance(v, float) and np.isnan(v)):
        return f"{'—':>{width}}"
    if isinstance(v, float) and np.isinf(v):
        return f"{'open':>{width}}"
    sign = "+" if fmt.startswith("+") else ""
    return f"{v:{sign}{width}{fmt.lstrip('+')}}"


def _print_table(rep: dict) -> None:
    els = rep["elevations_deg"]
    span = f"{els[0]:g}°" if len(els) == 1 else f"{els[0]:g}–{els[-1]:g}°"
    term = rep["termination"]
    at = {"optimum": "at the optimum termination", "short": "termination shorted",
          "open": "termination open"}.get(term["kind"]) or f"at {term['ohm']:g} Ω"
    print(f"fed end {rep['fed_end']}, null toward {rep['null_toward_deg']:.0f}°, "
          f"elevation {span}, {rep['unknowns']} unknowns; figures {at}")
    print(f"{'MHz':>8} {'R_opt Ω':>9} {'F/B dB':>7} {'Zfeed Ω':>18} {'RDF dB':>7} "
          f"{'G dBi':>7} {'null °':>7} {'depth dB':>8}")
    for r in rep["frequencies"]:
        z = r["feed_impedance_ohm"]
        print(f"{r['freq_mhz']:8.3f} {_num(r['r_opt_ohm'], '.0f', 9)} "
              f"{_num(r['fb_db'], '.1f', 7)} {_num(z[0], '.0f', 8)}{_num(z[1], '+.0f', 9)}j "
              f"{_num(r['rdf_db'], '.2f', 7)} {_num(r['gain_front_dbi'], '.1f', 7)} "
              f"{_num(r['null_bearing_deg'], '.0f', 7)} {_num(r['null_depth_db'], '.1f', 8)}")
    lo, hi = rep["needed_range_ohm"]
    print(f"needed termination range (both fed ends, all elevations): "
          f"{_num(lo, '.0f', 0)}–{_num(hi, '.0f', 0)} Ω; "
          f"F/B lost ≈ {rep['fb_loss_db_per_pct']:.2f} dB per % of error "
          f"(nulls deeper than {NULL_DEPTH_CEILING_DB:g} dB not counted)")


def run(args: argparse.Namespace) -> int:
    antenna, ground, band, feed = load_specs(args)
    freq_key = "--freq" if args.freq is not None else "band.freqs_mhz"
    rep = compute(antenna, ground, band, feed, FedEnd(args.fed_end), freq_key)
    for w in rep["warnings"]:
        print(f"warning: {w}", file=sys.stderr)
    if args.json:
        print_json(rep)
    else:
        _print_table(rep)
    return 0
