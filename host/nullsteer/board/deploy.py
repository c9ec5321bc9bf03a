"""Putting a bundle (:mod:`nullsteer.board.bundle`) on a board with ``mpremote``.

``mpremote`` is found on PATH first, then beside the running Python. A deploy is four
mpremote sessions:

1. *park*: remove ``main.py`` and reset the board, so that neither the old firmware nor
   its watchdog (which keeps running once started, on most ports) runs during the copy;
2. *copy*: ``fs cp`` every file, ``main.py`` last;
3. *verify*: ``fs sha256sum`` every file and compare with the bundle's hashes;
4. *reset* into the new firmware, only when every file read back right.

The board's saved state (``ns_state.txt``) is not touched. A deploy that stops half-way
leaves a board without ``main.py``: it boots to the MicroPython prompt with its relays
released, and the next deploy finishes the job.
"""

from __future__ import annotations

import os
import re
import shutil
import subprocess
import sys
import time
from pathlib import Path

from nullsteer.board.bundle import Bundle, board_name
from nullsteer.errors import LinkError


def find_mpremote() -> str:
    """The ``mpremote`` executable: PATH first, then beside the running Python."""
    found = shutil.which("mpremote")
    if found:
        return found
    here = Path(sys.executable).parent / "mpremote"
    if here.is_file() and os.access(here, os.X_OK):
        return str(here)
    raise LinkError("mpremote is not installed (pip install mpremote)")


#: Run on the board before the copy: take away the entry point so that the reset that
#: follows leaves the firmware (and its watchdog) stopped while the files are copied.
PARK_CODE = "import os; 'main.py' in os.listdir() and os.remove('main.py')"


def deploy_commands(bundle: Bundle, folder: Path, port: str, reset: bool = True) -> list[list[str]]:
    """mpremote argument lists of a deploy, in order: park (remove ``main.py``, reset),
    copy (entry point last), read back the hashes, reset. ``folder`` holds the files.

    Parking first matters on boards with a watchdog: it keeps running after mpremote
    interrupts the firmware and would reset the board in the middle of a long copy; after
    the parking reset nothing runs. A deploy that fails later leaves a board without
    ``main.py``: it boots to the prompt with every relay released, and a new deploy
    finishes the job."""
    for f in bundle.files:
        board_name(f.name, "bundle")
    park = ["connect", port, "exec", PARK_CODE, "+", "reset"]
    copy = ["connect", port]
    for i, f in enumerate(bundle.files):
        copy += (["+"] if i else []) + ["fs", "cp", str(folder / f.name), f":{f.name}"]
    verify = ["connect", port, "fs", "sha256sum"] + [f":{f.name}" for f in bundle.files]
    steps = [park, copy, verify]
    if reset:
        steps.append(["connect", port, "reset"])
    return steps


def parse_sha256sum(output: str) -> dict[str, str]:
    """Board file name -> hex digest from ``mpremote fs sha256sum`` output (each file's
    ``sha256sum :NAME`` line followed by its digest)."""
    out: dict[str, str] = {}
    name = None
    for line in output.splitlines():
        line = line.strip()
        if line.startswith("sha256sum :"):
            name = line[len("sha256sum :"):]
        elif name is not None and re.fullmatch(r"[0-9a-f]{64}", line):
            out[name] = line
            name = None
    return out


def hash_mismatches(bundle: Bundle, board_hashes: dict[str, str]) -> list[str]:
    """Names of bundle files whose hash on the board is missing or different."""
    return [f.name for f in bundle.files if board_hashes.get(f.name) != f.sha256]


def _mpremote(exe: str, args: list[str], timeout_s: float) -> str:
    try:
        done = subprocess.run([exe] + args, capture_output=True, text=True, timeout=timeout_s)
    except subprocess.TimeoutExpired:
        raise LinkError(f"mpremote {' '.join(args[:3])} ... did not finish in {timeout_s:g} s") from None
    if done.returncode != 0:
        last = (done.stderr.strip() or done.stdout.strip()).splitlines()[-1:] or ["no output"]
        raise LinkError(f"mpremote failed ({done.returncode}): {last[0]}")
    return done.stdout


def deploy(bundle: Bundle, folder: Path, port: str, reset: bool = True,
           timeout_s: float = 120.0, settle_s: float = 2.0) -> dict[str, str]:
    """Park, copy, verify and reset; returns the board's hashes. A file that does not read
    back with its hash raises LinkError (the board is then not reset).

    Parameters
    ----------
    timeout_s : float
        Time allowed for each mpremote step, seconds.
    settle_s : float
        After the parking reset, how long the board's USB port may take to come back,
        seconds (the copy is retried every half second until then).
    """
    exe = find_mpremote()
    park, copy, verify, *rest = deploy_commands(bundle, folder, port, reset)
    _mpremote(exe, park, timeout_s)
    deadline = time.monotonic() + settle_s
    while True:
        try:
            _mpremote(exe, copy, timeout_s)
            break
        except LinkError:
            if time.monotonic() >= deadline:
                raise
            time.sleep(0.5)
    hashes = parse_sha256sum(_mpremote(exe, verify, timeout_s))
    bad = hash_mismatches(bundle, hashes)
    if bad:
        raise LinkError(f"{len(bad)} file(s) did not read back correctly from the board: "
                        f"{', '.join(bad)}; deploy again (the board was not reset)")
    for step in rest:
        _mpremote(exe, step, timeout_s)
    return hashes
