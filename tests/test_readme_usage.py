"""Every line of the README's usage block runs as written against a simulated board.

The lines are read from README.md itself (so a new usage line is run the day it is
added). ``URL`` is the link a ``nullsteer sim`` started for the test prints, as the
README says; ``./level.sh`` is a script that prints a level in dB, as the auto-null
line expects. The receivers the lines name are there too: the real ``rigctld`` (dummy
rig), an rtl_tcp stand-in and a recorded ``recording.wav``; their addresses in the lines
(``127.0.0.1:4532``, ``127.0.0.1:1234``) are replaced by the ports the test's servers got.
The ``--short`` line needs a board with a relay of role short: its ``URL`` is a second
simulated board, the demo board plus that relay. ``calibrate`` reads ``parts.csv`` and
``readings.csv`` as the bench test writes them (here: the demo ladder's nominal values).
Lines that need hardware on this machine are named in :data:`HARDWARE_ONLY` and skipped;
long-running commands are started and stopped once they say they are up.
"""

from __future__ import annotations

import json
import os
import re
import shlex
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]

#: Lines that talk to hardware this machine does not have (a USB serial adaptor).
HARDWARE_ONLY = {"nullsteer status --link serial:///dev/ttyUSB0"}
#: Commands that run until stopped: started, checked to say what the README says, stopped.
LONG_RUNNING = {"sim": "link: ", "serve": "page: ", "follow": ""}


def usage_lines() -> list[str]:
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    block = text[text.index("## Usage"):]
    block = block[block.index("```sh") + 5:]
    block = block[:block.index("```")]
    lines = []
    for raw in block.splitlines():
        line = re.sub(r"\s+#.*$", "", raw).strip()
        if line:
            lines.append(re.sub(r"\s+", " ", line))
    return lines


def _argv(line: str, url: str, ports: dict[str, str] | None = None) -> list[str]:
    words = shlex.split(line)
    assert words[0] == "nullsteer"
    out = []
    for w in words[1:]:
        w = url if w == "URL" else w
        for readme_addr, real in (ports or {}).items():
            w = w.replace(readme_addr, real)
        out.append(w)
    return [sys.executable, "-m", "nullsteer"] + out


@pytest.fixture(scope="module")
def workdir(tmp_path_factory):
    """A user's folder: a copy of examples/ and a level script."""
    work = tmp_path_factory.mktemp("readme")
    shutil.copytree(ROOT / "examples", work / "examples")
    ladder = json.loads((ROOT / "examples" / "board-sim.json").read_text())["ladder"]
    parts = [("R0", ladder["base_ohm"])] + [(f"R{i + 1}", r)
                                            for i, r in enumerate(ladder["resistors_ohm"])]
    (work / "parts.csv").write_text("ref,ohms\n" + "".join(f"{r},{v}\n" for r, v in parts))
    (work / "readings.csv").write_text("mask,ohms\n" + "".join(
        f"{m},{r}\n" for m, r in ladder["table"]))
    script = work / "level.sh"
    script.write_text("#!/bin/sh\necho -42.5\n")
    script.chmod(0o755)
    return work


@pytest.fixture(scope="module")
def receivers(workdir):
    """rigctld, an rtl_tcp stand-in and recording.wav: the README's receiver lines' addresses."""
    import numpy as np

    from nullsteer.reception.receivers.iqwav import write_iq_wav
    from nullsteer.reception.receivers.standin import IqStandIn
    from receiver_support import Rigctld

    rate = 96000.0
    n = np.arange(int(rate))
    tone = 0.25 * np.exp(2j * np.pi * 30e3 * n / rate)  # 1.83 MHz in a 1.8 MHz recording
    write_iq_wav(workdir / "recording.wav", tone, rate)
    rig = Rigctld()
    iq = IqStandIn(lambda centre_hz: ([(0.0, 1e-3)], 1e-9)).start()
    try:
        yield {"127.0.0.1:4532": f"127.0.0.1:{rig.port}", "127.0.0.1:1234": f"127.0.0.1:{iq.port}"}
    finally:
        iq.stop()
        rig.stop()


def _start_sim(workdir, *extra):
    return subprocess.Popen([sys.executable, "-m", "nullsteer", "sim", *extra], cwd=workdir,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)


@pytest.fixture(scope="module")
def short_url(workdir):
    """A simulated board with a relay of role short (the demo board plus pin 12)."""
    config = json.loads((ROOT / "examples" / "board-sim.json").read_text())
    config["relays"].append({"name": "SHORT", "role": "short", "pin": 12, "settle_ms": 5})
    board = workdir / "board-short.json"
    board.write_text(json.dumps(config))
    proc = _start_sim(workdir, "--board", str(board))
    try:
        first = proc.stdout.readline()
        assert first.startswith(LONG_RUNNING["sim"]), first + proc.stderr.read()
        yield first[len(LONG_RUNNING["sim"]):].strip()
    finally:
        proc.terminate()
        proc.wait(timeout=30)


@pytest.fixture(scope="module")
def sim_url(workdir):
    proc = _start_sim(workdir)
    try:
        first = proc.stdout.readline()  # blocks until the board is up (event, not a sleep)
        assert first.startswith(LONG_RUNNING["sim"]), first + proc.stderr.read()
        yield first[len(LONG_RUNNING["sim"]):].strip()
    finally:
        proc.terminate()
        proc.wait(timeout=30)


def test_the_usage_block_is_found():
    lines = usage_lines()
    assert len(lines) >= 20 and all(line.startswith("nullsteer ") for line in lines)


@pytest.mark.slow
def test_every_usage_line_runs(workdir, sim_url, short_url, receivers):
    env = {**os.environ, "MPLBACKEND": "Agg"}
    env.pop("NULLSTEER_LINK", None)
    ran = []
    for line in usage_lines():
        command = line.split()[1]
        if line in HARDWARE_ONLY or command == "sim":
            continue  # sim: the fixture above ran it and read its "link: URL"
        if command in LONG_RUNNING:
            proc = subprocess.Popen(_argv(line, sim_url, receivers), cwd=workdir, env=env, text=True,
                                    stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                                    stdin=subprocess.DEVNULL)
            try:
                first = proc.stdout.readline()  # the command says it is up
                assert first.startswith(LONG_RUNNING[command]), f"{line}\n{first}"
            finally:
                proc.terminate()
                proc.wait(timeout=30)
            ran.append((line, first))
            continue
        url = short_url if "--short" in line.split() else sim_url
        proc = subprocess.run(_argv(line, url, receivers), cwd=workdir, env=env, capture_output=True,
                              text=True, timeout=300, stdin=subprocess.DEVNULL)
        assert proc.returncode == 0, f"{line}\nexit {proc.returncode}\n{proc.stderr[-2000:]}"
        assert "Traceback" not in proc.stderr, line
        ran.append((line, proc.stdout))
    by_line = dict(ran)
    # the station's simulated board keeps its state between commands: set, then status
    status = next(out for line, out in ran if line.startswith("nullsteer status --config"))
    assert "mask 45" in status, status
    assert (workdir / "azimuth.png").stat().st_size > 1000
    assert (workdir / "out" / "report" / "index.html").exists()
    assert len(by_line) >= len(usage_lines()) - len(HARDWARE_ONLY) - 1
