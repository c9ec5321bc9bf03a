"""A stand-in for ``mpremote`` used by tests/test_bundle_deploy.py (copied onto PATH).

It records every invocation (one JSON list of arguments per line in $FAKE_MPREMOTE_LOG)
and keeps a fake board file system in $FAKE_BOARD_DIR, following the mpremote command
line as its documentation describes it (MicroPython docs, "mpremote", from memory):
``connect PORT`` first, commands chained with ``+``, ``fs cp SRC :DST`` copies to the
board, ``fs sha256sum :FILE ...`` prints ``sha256sum :FILE`` then the hex digest of each
file, ``exec CODE`` runs code (only the deploy's "remove main.py" is understood), ``reset``
hard-resets (counted in ``.resets``). $FAKE_CORRUPT names a file whose copy arrives damaged (one
byte changed); $FAKE_FAIL_CONNECT=1 makes connecting fail like an absent port;
$FAKE_DOWN_TIMES=N makes the first N connections after a reset fail (USB coming back).
"""

import hashlib
import json
import os
import sys
from pathlib import Path


def main(argv):
    with open(os.environ["FAKE_MPREMOTE_LOG"], "a") as log:
        log.write(json.dumps(argv) + "\n")
    board = Path(os.environ["FAKE_BOARD_DIR"])
    if argv[:1] != ["connect"] or len(argv) < 2:
        print("mpremote: expected connect PORT first", file=sys.stderr)
        return 1
    down = board / ".down"
    resets = int((board / ".resets").read_text()) if (board / ".resets").exists() else 0
    missed = int(down.read_text()) if down.exists() else 0
    if resets and missed < int(os.environ.get("FAKE_DOWN_TIMES", "0")):
        down.write_text(str(missed + 1))  # the port is still coming back after a reset
        print(f"mpremote: failed to access {argv[1]} (it may be in use by another program)",
              file=sys.stderr)
        return 1
    if os.environ.get("FAKE_FAIL_CONNECT") == "1":
        print(f"mpremote: failed to access {argv[1]} (it may be in use by another program)",
              file=sys.stderr)
        return 1
    commands, current = [], []
    for arg in argv[2:]:
        if arg == "+":
            commands.append(current)
            current = []
        else:
            current.append(arg)
    commands.append(current)
    for cmd in commands:
        if cmd[:2] == ["fs", "cp"] and len(cmd) == 4 and cmd[3].startswith(":"):
            data = Path(cmd[2]).read_bytes()
            name = cmd[3][1:]
            if name == os.environ.get("FAKE_CORRUPT"):
                data = data[:-1] + bytes([data[-1] ^ 1])
            (board / name).write_bytes(data)
            print(f"cp {cmd[2]} {cmd[3]}")
        elif cmd[:2] == ["fs", "sha256sum"]:
            for path in cmd[2:]:
                print(f"sha256sum {path}")
                print(hashlib.sha256((board / path.lstrip(":")).read_bytes()).hexdigest())
        elif cmd[:1] == ["exec"] and len(cmd) == 2:
            # only the deploy's parking code is understood: it removes main.py
            if "os.remove('main.py')" not in cmd[1]:
                print(f"mpremote: unexpected code {cmd[1]!r}", file=sys.stderr)
                return 1
            (board / "main.py").unlink(missing_ok=True)
        elif cmd == ["reset"]:
            (board / ".resets").write_text(str(resets + 1))
            down.write_text("0")
        else:
            print(f"mpremote: unknown command {cmd}", file=sys.stderr)
            return 1
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
