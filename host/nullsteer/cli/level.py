"""``nullsteer level``: one reading from a receiver, to check the set-up before an auto-null.

Prints the level with its spread (one-sigma standard uncertainty), its unit and the
receiver: ``dBFS`` for IQ receivers (``rtltcp://``, ``iqwav:``), ``dB rel S9`` for a rig
through ``rigctl://`` (its S-meter: it depends on the radio's AGC and meter steps).
"""

from __future__ import annotations

import argparse

from nullsteer.cli.common import (add_json_flag, add_receiver_option, positive_float, print_json,
                                  receiver_url)
from nullsteer.errors import ConfigError


def register(subparsers: argparse._SubParsersAction) -> None:
    p = subparsers.add_parser("level", help="one level reading from a receiver",
                              description=__doc__.splitlines()[0])
    add_receiver_option(p)
    p.add_argument("--config", metavar="FILE", help="station file (for a device's receiver key)")
    p.add_argument("--device", metavar="ID", help="device id from the station file")
    p.add_argument("--freq", type=positive_float("--freq"), metavar="MHZ",
                   help="frequency of the signal, MHz (tunes IQ receivers)")
    p.add_argument("--bandwidth", type=positive_float("--bandwidth"), metavar="HZ",
                   help="channel width for --mode channel, Hz (IQ receivers)")
    p.add_argument("--mode", choices=("carrier", "channel"),
                   help="carrier: narrow RBW at the signal; channel: power in --bandwidth")
    add_json_flag(p)
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    from nullsteer.reception.receivers import open_receiver

    url = receiver_url(args)
    if not url:
        raise ConfigError("--receiver", "no receiver given: use --receiver URL or a device's "
                                        "receiver key in --config")
    freq_hz = None if args.freq is None else args.freq * 1e6
    rx = open_receiver(url, freq_hz=freq_hz, mode=args.mode, bandwidth_hz=args.bandwidth)
    try:
        reading = rx.read()
        tuned = rx.freq_hz() if freq_hz is None or getattr(rx, "name", "") == "rigctl" else freq_hz
    finally:
        rx.close()
    out = reading.to_json()
    out["freq_mhz"] = None if tuned is None else tuned / 1e6
    settings = getattr(rx, "settings", None)
    if settings is not None:
        out["mode"] = settings.mode.value
        out["bandwidth_hz"] = settings.bandwidth_hz if settings.mode.value == "channel" else None
    if args.json:
        print_json(out)
        return 0
    where = "" if tuned is None else f" at {tuned / 1e6:.6g} MHz"
    mode = f", {out['mode']}" if "mode" in out else ""
    print(f"{reading.level_db:.1f} {reading.unit} +- {reading.spread_db:.2f} dB{where}{mode} "
          f"({reading.receiver})")
    return 0
