"""``nullsteer serve``: the control page for the station's boards (see nullsteer.web)."""

from __future__ import annotations

import argparse
import signal
import sys
import threading

from nullsteer.cli.common import positive_float
from nullsteer.errors import ConfigError

DEFAULT_LISTEN = "127.0.0.1:8765"


def run(args: argparse.Namespace) -> int:
    from nullsteer.web.desk import Desk
    from nullsteer.web.server import PageServer, check_listen, parse_listen, read_token

    host, port = parse_listen(args.listen)
    token = read_token(args.token_file) if args.token_file else None
    check_listen(host, token)
    if args.public_url is not None and not args.public_url.startswith(("http://", "https://")):
        raise ConfigError("--public-url", f"must start with http:// or https://, "
                                          f"got {args.public_url!r}")
    shown = f"[{host}]" if ":" in host else host
    page_url = args.public_url or f"http://{shown}:{port}/"
    desk = Desk(args.config, poll_s=args.poll, autonull_command=args.autonull_command,
                page_url=page_url)
    try:
        server = PageServer((host, port), desk, token)
    except OSError as exc:
        raise ConfigError("--listen", f"cannot listen on {args.listen}: {exc.strerror}") from None
    if port == 0:
        desk.page_url = args.public_url or server.url
    desk.start()
    stop = threading.Event()
    for sig in (signal.SIGINT, signal.SIGTERM):
        signal.signal(sig, lambda *_: stop.set())
    server.start()
    print(f"page: {server.url}" + ("  (open once with ?token=... from your token file)"
                                   if token else ""), flush=True)
    print("serving; Ctrl-C stops", file=sys.stderr, flush=True)
    try:
        while not stop.wait(0.5):
            pass
    finally:
        server.stop()
        desk.stop()
    return 0


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("serve", help="serve the control page for the station's boards")
    p.add_argument("--config", required=True, metavar="FILE", help="station file (TOML)")
    p.add_argument("--listen", default=DEFAULT_LISTEN, metavar="HOST:PORT",
                   help=f"address to listen on (default {DEFAULT_LISTEN}; any non-loopback "
                        "address needs --token-file)")
    p.add_argument("--token-file", metavar="FILE",
                   help="file holding the access token (one word, 16+ characters)")
    p.add_argument("--public-url", metavar="URL",
                   help="the page's address as others reach it (given to MQTT boards for "
                        "their hub's configuration link; default the listen address)")
    p.add_argument("--poll", type=positive_float("--poll"), default=2.0, metavar="S",
                   help="seconds between status reads of each board (default 2)")
    p.add_argument("--autonull-command", metavar="CMD",
                   help="command printing one level in dB, for auto-null from the page "
                        "(default: the station's virtual receiver, [[sim.station]])")
    p.set_defaults(func=run)
