"""A bundle is complete: a board with only the bundle's files boots and answers.

The bundle folder is the MicroPython unix port's whole module path (plus the
simulator's fake ``machine``, standing in for the board's built-in one); its ``main.py``
runs as MicroPython runs it at boot (MicroPython docs: ``main.py`` is run after boot;
from memory) and talks over stdio, which is the USB serial port on a board. Frames are
checked with the one codec (nullsteer.protocol.wire; CRC-16/CCITT-FALSE per the CRC catalogue).
"""

from __future__ import annotations

import os
import select
import subprocess
import time

import pytest

from nullsteer.protocol import wire
from nullsteer.board.bundle import write_bundle
from nullsteer.sim import find_micropython
from nullsteer.sim.board import FAKE_MACHINE

from test_bundle_files import bundle_for, station_dir


def read_line(proc: subprocess.Popen, timeout_s: float = 10.0) -> bytes:
    assert proc.stdout is not None
    buf = b""
    deadline = time.monotonic() + timeout_s
    while not buf.endswith(b"\n"):
        left = deadline - time.monotonic()
        assert left > 0, f"no line from the board (got {buf!r})"
        ready, _, _ = select.select([proc.stdout], [], [], left)
        if ready:
            ch = os.read(proc.stdout.fileno(), 1)
            assert ch, "the board exited: " + (proc.stderr.read().decode() if proc.stderr else "")
            buf += ch
    return buf


@pytest.fixture
def booted(tmp_path):
    (tmp_path / "st").mkdir()
    b = bundle_for(station_dir(tmp_path / "st", ladder=False))
    folder = tmp_path / "board-fs"
    write_bundle(b, folder)
    machine_dir = tmp_path / "builtin"
    machine_dir.mkdir()
    (machine_dir / "machine.py").write_bytes(FAKE_MACHINE.read_bytes())
    env = dict(os.environ, MICROPYPATH=f".frozen:{folder}:{machine_dir}")
    env.pop("NULLSTEER_BOARD", None)
    proc = subprocess.Popen([str(find_micropython()), "-X", "heapsize=128K", "main.py"],
                            cwd=folder, env=env, stdin=subprocess.PIPE, stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE)
    yield b, proc, folder
    proc.kill()
    proc.wait()


def test_bundled_board_boots_and_answers_over_stdio(booted):
    b, proc, folder = booted
    boot = wire.decode_reply(read_line(proc))
    assert boot.verb == "EVT" and boot.fields["kind"] == "boot"
    assert boot.fields["fw"] == b.firmware_version
    assert proc.stdin is not None
    proc.stdin.write(wire.encode(1, "INFO"))
    proc.stdin.flush()
    info = wire.decode_reply(read_line(proc))
    assert info.seq == 1 and info.verb == "OK"
    assert info.fields["board"] == b.board_config["board"]
    assert int(info.fields["table"]) == len(b.board_config["ladder"]["table"])
    proc.stdin.write(wire.encode(2, "SET", (("end", "B"), ("mask", 3), ("open", 0))))
    proc.stdin.flush()
    reply = wire.decode_reply(read_line(proc))
    assert reply.verb == "OK" and reply.fields["end"] == "B" and reply.fields["changed"] == "1"
    assert (folder / "ns_state.txt").exists()  # the state file sits beside the bundle


@pytest.mark.slow
def test_bundled_mqtt_board_answers_through_the_broker(tmp_path, mqtt_broker):
    from conftest import unique

    from nullsteer.board.controller import Controller
    from nullsteer.board.links import open_link

    dev = unique("bundle")
    base = unique("nsb")
    url = mqtt_broker.url(dev, base=base)
    (tmp_path / "st").mkdir()
    b = bundle_for(station_dir(tmp_path / "st", link=url, ladder=False))
    assert b.board_config["mqtt"]["id"] == dev and b.board_config["mqtt"]["base"] == base
    folder = tmp_path / "board-fs"
    write_bundle(b, folder)
    machine_dir = tmp_path / "builtin"
    machine_dir.mkdir()
    (machine_dir / "machine.py").write_bytes(FAKE_MACHINE.read_bytes())
    env = dict(os.environ, MICROPYPATH=f".frozen:{folder}:{machine_dir}")
    proc = subprocess.Popen([str(find_micropython()), "-X", "heapsize=192K", "main.py"],
                            cwd=folder, env=env, stdin=subprocess.PIPE, stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE)
    try:
        assert wire.decode_reply(read_line(proc)).fields["kind"] == "boot"
        with Controller(open_link(url), timeout_s=5.0, retries=2) as ctl:
            info = ctl.info()
            assert info.board == b.board_config["board"] and info.firmware == b.firmware_version
            status = ctl.set_state(ctl.status().state.fed_end.other, 5, False)
            assert status.state.mask == 5
    finally:
        proc.kill()
        proc.wait()
