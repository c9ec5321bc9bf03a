"""``nullsteer noise``: external noise (ITU-R P.372) against the receiver, preamp needed.

With ``--config`` the loop's efficiency comes from the antenna model at each band
frequency (termination at the model's optimum); without it give ``--avg-gain-dbi``.
The margin is external noise over the chain's own noise, both referred to the loop's
terminals; the preamp gain printed is the least that gives ``--margin`` dB.
"""

from __future__ import annotations

import argparse

from nullsteer.cli.common import add_json_flag, positive_float, print_json
from nullsteer.errors import ConfigError


def register(subparsers: argparse._SubParsersAction) -> None:
    p = subparsers.add_parser("noise", help="external noise vs receiver noise; preamp gain needed",
                              description=__doc__.splitlines()[0])
    p.add_argument("--config", metavar="FILE", help="station file (TOML)")
    p.add_argument("--freq", metavar="MHZ", help="frequency or start:stop:step, MHz "
                                                 "(default the [band] frequencies)")
    p.add_argument("--category", help="ITU-R P.372 category: city, residential, rural, "
                                      "quiet-rural, galactic (default [noise] or rural)")
    p.add_argument("--avg-gain-dbi", type=float, metavar="DB",
                   help="the loop's noise efficiency (average gain), dBi, instead of the model")
    p.add_argument("--receiver-nf", type=float, metavar="DB", help="receiver noise figure, dB")
    p.add_argument("--bandwidth", type=positive_float("--bandwidth"), metavar="HZ",
                   help="receiver bandwidth, Hz")
    p.add_argument("--preamp-nf", type=float, metavar="DB", help="preamp noise figure, dB")
    p.add_argument("--preamp-gain", type=float, metavar="DB", help="preamp fitted now, dB")
    p.add_argument("--cable-loss", type=float, metavar="DB",
                   help="coax loss, dB (default from [feed], or 0)")
    p.add_argument("--margin", type=float, metavar="DB", help="wanted margin, dB (default 10)")
    p.add_argument("--fed-end", choices=("A", "B"), default="A",
                   help="end feeding the receiver (default A)")
    add_json_flag(p)
    p.set_defaults(func=run)


def _spec(args: argparse.Namespace, table: dict):
    from nullsteer.reception.noise import parse_noise

    t = dict(table)
    for flag, key in (("category", "category"), ("receiver_nf", "receiver_nf_db"),
                      ("bandwidth", "bandwidth_hz"), ("preamp_nf", "preamp_nf_db"),
                      ("preamp_gain", "preamp_gain_db"), ("margin", "margin_db")):
        value = getattr(args, flag)
        if value is not None:
            t[key] = value
    try:
        return parse_noise(t)
    except ConfigError as exc:  # name the flag, not the key, when the value came from one
        bad_flag: str | None = next((f for f, k in (("--category", "category"), ("--receiver-nf", "receiver_nf_db"),
                                    ("--bandwidth", "bandwidth_hz"), ("--preamp-nf", "preamp_nf_db"),
                                    ("--preamp-gain", "preamp_gain_db"), ("--margin", "margin_db"))
                     if exc.key == f"noise.{k}" and getattr(args, f[2:].replace("-", "_")) is not None),
                    None)
        if bad_flag:
            raise ConfigError(bad_flag, exc.message) from None
        raise


def run(args: argparse.Namespace) -> int:
    from nullsteer.station.config import load_station, parse_freqs_mhz
    from nullsteer.reception.noise import model_noise_budgets, station_noise_budgets

    station = load_station(args.config) if args.config else None
    spec = _spec(args, station.section("noise") if station else {})
    if args.freq is not None:
        freqs = [f * 1e6 for f in parse_freqs_mhz(_num_or_text(args.freq), "--freq")]
    elif station is not None and "freqs_mhz" in station.section("band"):
        freqs = [f * 1e6 for f in parse_freqs_mhz(station.section("band")["freqs_mhz"],
                                                  "band.freqs_mhz")]
    else:
        raise ConfigError("--freq", "is required without a station file")
    if args.avg_gain_dbi is not None or station is None:
        if args.avg_gain_dbi is None:
            raise ConfigError("--avg-gain-dbi", "is required without --config")
        loss = args.cable_loss or 0.0
        budgets = station_noise_budgets(spec, freqs, [args.avg_gain_dbi] * len(freqs),
                                        [loss] * len(freqs))
    else:
        from nullsteer.reception.autonull_run import solve_station_model

        budgets = model_noise_budgets(solve_station_model(station, freqs), spec, args.fed_end)
        if args.cable_loss is not None:
            budgets = station_noise_budgets(spec, freqs, [b.avg_gain_db for b in budgets],
                                            [args.cable_loss] * len(freqs))
    if args.json:
        print_json({"category": spec.category.value, "bandwidth_hz": spec.bandwidth_hz,
                    "margin_target_db": spec.margin_db,
                    "frequencies": [b.to_json() for b in budgets]})
        return 0
    print(f"ITU-R P.372 {spec.category.value}, {spec.bandwidth_hz:g} Hz, receiver NF "
          f"{spec.receiver_nf_db:g} dB, preamp NF {spec.preamp_nf_db:g} dB at the {spec.preamp_at}")
    print(f"{'MHz':>7} {'Fam dB':>7} {'eta dBi':>8} {'ext dBm':>8} {'sys NF':>7} "
          f"{'margin':>7} {'SNR loss':>8} {'preamp for ' + format(spec.margin_db, 'g') + ' dB':>16}")
    for b in budgets:
        need = "impossible" if b.preamp_needed_db is None else f"{b.preamp_needed_db:.1f} dB"
        print(f"{b.freq_hz / 1e6:7.3f} {b.fam_db:7.1f} {b.avg_gain_db:8.1f} {b.external_dbm:8.1f} "
              f"{b.system_nf_db:7.1f} {b.margin_db:7.1f} {b.snr_loss_db:8.2f} {need:>16}")
    for note in sorted({n for b in budgets for n in b.notes}):
        print(f"note: {note}")
    return 0


def _num_or_text(text: str):
    try:
        return float(text)
    except ValueError:
        return text
