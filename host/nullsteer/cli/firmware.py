"""``nullsteer firmware bundle|deploy``: the files a board needs, and putting them on it.

``bundle --config STATION [--device ID] -o DIR`` writes the firmware modules, ``wire.py``,
``board.json`` (pins, roles, driver, ladder table, link, MQTT block and keys) and a
manifest into DIR. ``deploy --port PORT (--bundle DIR | --config STATION [--device ID])``
copies them with mpremote, reads every file's SHA-256 back from the board and resets it;
``--dry-run`` lists what would be written and the mpremote commands, touching nothing.
"""

from __future__ import annotations

import argparse
import shlex
import shutil
from pathlib import Path

from nullsteer.board.bundle import (Bundle, make_bundle, public_config, read_bundle,
                                    staged_folder, write_bundle)
from nullsteer.board.deploy import deploy, deploy_commands
from nullsteer.cli.common import add_json_flag, print_json
from nullsteer.station.config import load_station
from nullsteer.board.devices import parse_devices, pick_device
from nullsteer.errors import ConfigError


REDESIGN_HELP = ("take the ladder table from the designer ([ladder] of the station) even "
                 "when the board file has one (check that it matches the resistors fitted)")


def bundle_from_config(config: str, device_id: str | None, redesign: bool = False) -> Bundle:
    """The bundle of one ``[[device]]`` of a station file.

    The ladder table is the board file's own (written by ``nullsteer ladder
    --board-config``: it describes the resistors in the box); the designer runs only when
    the board file has none, or with ``redesign``."""
    from nullsteer.board.bundle import designed_ladder_block, read_board_file
    station = load_station(config)
    device = pick_device(parse_devices(station), device_id)
    ladder = None
    if redesign or "ladder" not in read_board_file(device):
        ladder = designed_ladder_block(station)
    return make_bundle(station, device, ladder)


def summary(bundle: Bundle) -> list[str]:
    """Human lines describing a bundle's board config."""
    c = bundle.board_config
    roles: dict[str, int] = {}
    for r in c["relays"]:
        roles[r["role"]] = roles.get(r["role"], 0) + 1
    driver = c.get("driver") or {}
    kind = driver.get("kind", "gpio") + (", latching" if driver.get("latching") else "")
    link = c["link"]
    link_text = f"serial {link['port']}" + (f" (UART {link.get('id', 0)}, {link.get('baud')} baud"
                                              + (", RS-485" if link.get("de_pin") is not None else "")
                                              + ")" if link["port"] == "uart" else "")
    if "mqtt" in c:
        m = c["mqtt"]
        link_text += f" + MQTT {m['host']}:{m['port']} as {m['id']}" + (
            ", signed frames" if m.get("key_hex") else "")
        if m.get("tls"):
            link_text += (", TLS: broker NOT checked (insecure)" if m.get("insecure") else
                          f", TLS: broker checked ({m.get('ca_file')}, name "
                          f"{m.get('server_hostname')})")
    table = c["ladder"].get("table") or []
    lines = [f"board {c['board']} (device {bundle.device_id}), firmware {bundle.firmware_version}",
             f"relays: {', '.join(f'{n} {role}' for role, n in roles.items())}; driver {kind}",
             f"link: {link_text}"]
    if table:
        lines.append(f"ladder: {c['ladder'].get('topology', '?')}, {len(table)} settings, "
                     f"{table[0][1]:.1f} .. {table[-1][1]:.1f} ohm")
    return lines


def _file_rows(bundle: Bundle) -> list[dict]:
    return [{"name": f.name, "bytes": len(f.data), "sha256": f.sha256} for f in bundle.files]


def run_bundle(args: argparse.Namespace) -> int:
    bundle = bundle_from_config(args.config, args.device, args.redesign)
    out = Path(args.out)
    written = write_bundle(bundle, out)
    if args.json:
        print_json({"dir": str(out), "device": bundle.device_id,
                    "firmware": bundle.firmware_version, "files": _file_rows(bundle),
                    "board_config": public_config(bundle.board_config)})
        return 0
    for line in summary(bundle):
        print(line)
    print(f"wrote {len(written)} files to {out}:")
    for f in bundle.files:
        print(f"  {f.name:<16} {len(f.data):>6} bytes  sha256 {f.sha256[:16]}")
    print(f"next: nullsteer firmware deploy --port PORT --bundle {out}")
    return 0


def run_deploy(args: argparse.Namespace) -> int:
    if (args.bundle is None) == (args.config is None):
        raise ConfigError("--bundle", "give either --bundle DIR or --config STATION")
    if args.bundle is not None and (args.device is not None or args.redesign):
        raise ConfigError("--device" if args.device is not None else "--redesign",
                          "goes with --config (a bundle is made for one device)")
    staged = None
    if args.bundle is not None:
        folder = Path(args.bundle)
        bundle = read_bundle(folder)
    else:
        bundle = bundle_from_config(args.config, args.device, args.redesign)
        folder = staged = staged_folder(bundle)
    try:
        commands = deploy_commands(bundle, folder, args.port, reset=not args.no_reset)
        if args.dry_run:
            if args.json:
                print_json({"dry_run": True, "port": args.port, "device": bundle.device_id,
                            "firmware": bundle.firmware_version, "files": _file_rows(bundle),
                            "commands": [["mpremote"] + c for c in commands]})
                return 0
            for line in summary(bundle):
                print(line)
            print(f"dry run: would write {len(bundle.files)} files to the board on {args.port}:")
            for f in bundle.files:
                print(f"  :{f.name:<16} {len(f.data):>6} bytes  sha256 {f.sha256[:16]}")
            print("then run:")
            for c in commands:
                print("  " + shlex.join(["mpremote"] + c))
            return 0
        hashes = deploy(bundle, folder, args.port, reset=not args.no_reset,
                        timeout_s=args.timeout, settle_s=args.settle)
    finally:
        if staged is not None:
            shutil.rmtree(staged, ignore_errors=True)
    if args.json:
        print_json({"dry_run": False, "port": args.port, "device": bundle.device_id,
                    "firmware": bundle.firmware_version, "verified": sorted(hashes),
                    "reset": not args.no_reset})
    else:
        print(f"wrote and verified {len(bundle.files)} files (SHA-256 read back) on {args.port}")
        print("board reset: it boots the new firmware now" if not args.no_reset
              else "board not reset (--no-reset)")
        print(f"check: nullsteer info --link serial://{args.port} (expect firmware "
              f"{bundle.firmware_version})")
    return 0


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("firmware", help="bundle the board's files and deploy them (mpremote)")
    fsub = p.add_subparsers(dest="firmware_command", metavar="ACTION")
    fsub.required = True

    b = fsub.add_parser("bundle", help="write the files a board needs into a folder")
    b.add_argument("--config", required=True, metavar="FILE", help="station file (TOML)")
    b.add_argument("--device", metavar="ID", help="device id from the station file")
    b.add_argument("-o", "--out", required=True, metavar="DIR", help="bundle folder")
    b.add_argument("--redesign", action="store_true", help=REDESIGN_HELP)
    add_json_flag(b)
    b.set_defaults(func=run_bundle)

    d = fsub.add_parser("deploy", help="copy a bundle onto a board, verify, reset")
    d.add_argument("--port", required=True, help="the board's serial port (e.g. /dev/ttyACM0)")
    d.add_argument("--bundle", metavar="DIR", help="a folder written by 'firmware bundle'")
    d.add_argument("--config", metavar="FILE", help="station file: bundle and deploy in one go")
    d.add_argument("--device", metavar="ID", help="device id (with --config)")
    d.add_argument("--redesign", action="store_true", help=REDESIGN_HELP)
    d.add_argument("--dry-run", action="store_true", help="list what would be written; touch nothing")
    d.add_argument("--no-reset", action="store_true", help="leave the board running after the copy")
    d.add_argument("--timeout", type=float, default=120.0, metavar="S",
                   help="time allowed for each mpremote step (default 120 s)")
    d.add_argument("--settle", type=float, default=2.0, metavar="S",
                   help="wait up to this long for the port after the first reset (default 2 s)")
    add_json_flag(d)
    d.set_defaults(func=run_deploy)
