"""``nullsteer firmware deploy``: dry run in full, and the real path against a stand-in.

There is no board here: the real path runs against tests/bundle_fake_mpremote.py placed
first on PATH, which records its arguments and keeps a fake board file system. The
command lines follow the mpremote documentation (MicroPython docs, "mpremote", from
memory): ``connect PORT``, ``fs cp SRC :DST``, ``fs sha256sum :FILE``, ``reset``,
``exec CODE``, commands chained with ``+``. A deploy to a real board is checked on paper only.
"""

from __future__ import annotations

import hashlib
import json
import os
import stat
import sys
from pathlib import Path

import pytest

from nullsteer.board.bundle import read_bundle, write_bundle
from nullsteer.board.deploy import deploy_commands, parse_sha256sum
from nullsteer.cli import main

from test_bundle_files import bundle_for, station_dir

FAKE = Path(__file__).with_name("bundle_fake_mpremote.py")
PORT = "/dev/ttyACM7"


@pytest.fixture
def fake_board(tmp_path, monkeypatch):
    """PATH starts with a stand-in mpremote; returns (board folder, log path)."""
    bin_dir = tmp_path / "bin"
    bin_dir.mkdir()
    exe = bin_dir / "mpremote"
    exe.write_text(f"#!{sys.executable}\n" + FAKE.read_text())
    exe.chmod(exe.stat().st_mode | stat.S_IXUSR)
    board = tmp_path / "board-fs"
    board.mkdir()
    log = tmp_path / "mpremote.log"
    log.write_text("")
    monkeypatch.setenv("PATH", f"{bin_dir}{os.pathsep}{os.environ['PATH']}")
    monkeypatch.setenv("FAKE_BOARD_DIR", str(board))
    monkeypatch.setenv("FAKE_MPREMOTE_LOG", str(log))
    monkeypatch.delenv("FAKE_CORRUPT", raising=False)
    monkeypatch.delenv("FAKE_FAIL_CONNECT", raising=False)
    monkeypatch.delenv("FAKE_DOWN_TIMES", raising=False)
    return board, log


def calls(log: Path) -> list[list[str]]:
    return [json.loads(line) for line in log.read_text().splitlines()]


@pytest.fixture
def bundle_dir(tmp_path):
    (tmp_path / "st").mkdir()
    b = bundle_for(station_dir(tmp_path / "st", ladder=False))
    out = tmp_path / "bundle"
    write_bundle(b, out)
    return out


def test_dry_run_lists_everything_and_runs_nothing(fake_board, bundle_dir, capsys):
    board, log = fake_board
    assert main(["firmware", "deploy", "--port", PORT, "--bundle", str(bundle_dir),
                 "--dry-run", "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    b = read_bundle(bundle_dir)
    assert out["dry_run"] is True and out["port"] == PORT
    assert out["files"] == [{"name": f.name, "bytes": len(f.data), "sha256": f.sha256}
                            for f in b.files]
    park, copy, verify, reset = out["commands"]
    # park: remove main.py and reset, so no firmware (no watchdog) runs during the copy
    assert park[:4] == ["mpremote", "connect", PORT, "exec"] and park[-2:] == ["+", "reset"]
    assert "os.remove('main.py')" in park[4]
    expect_copy = ["mpremote", "connect", PORT]
    for i, f in enumerate(b.files):
        expect_copy += (["+"] if i else []) + ["fs", "cp", str(bundle_dir / f.name), f":{f.name}"]
    assert copy == expect_copy
    assert copy[-1] == ":main.py"  # entry point last
    assert verify == ["mpremote", "connect", PORT, "fs", "sha256sum"] + [f":{f.name}" for f in b.files]
    assert reset == ["mpremote", "connect", PORT, "reset"]
    assert calls(log) == [] and list(board.iterdir()) == []  # nothing ran, nothing written


def test_dry_run_human_output(fake_board, bundle_dir, capsys):
    assert main(["firmware", "deploy", "--port", PORT, "--bundle", str(bundle_dir), "--dry-run"]) == 0
    text = capsys.readouterr().out
    assert f"dry run: would write {len(read_bundle(bundle_dir).files)} files" in text
    assert ":main.py" in text and "mpremote connect /dev/ttyACM7 reset" in text
    assert calls(fake_board[1]) == []


def test_deploy_parks_copies_verifies_then_resets(fake_board, bundle_dir, capsys):
    board, log = fake_board
    (board / "main.py").write_text("old firmware\n")
    (board / "ns_state.txt").write_text("kept\n")
    assert main(["firmware", "deploy", "--port", PORT, "--bundle", str(bundle_dir),
                 "--settle", "0"]) == 0
    b = read_bundle(bundle_dir)
    assert calls(log) == deploy_commands(b, bundle_dir, PORT)  # park, copy, verify, reset
    for f in b.files:
        assert (board / f.name).read_bytes() == f.data
    assert (board / "ns_state.txt").read_text() == "kept\n"  # the saved state is left alone
    assert (board / ".resets").read_text() == "2"  # parking reset and final reset
    assert f"verified {len(b.files)} files" in capsys.readouterr().out


def test_deploy_from_config_in_one_go(fake_board, tmp_path, capsys):
    board, log = fake_board
    (tmp_path / "st2").mkdir()
    path = station_dir(tmp_path / "st2", ladder=False)
    assert main(["firmware", "deploy", "--port", PORT, "--config", str(path), "--no-reset",
                 "--json", "--settle", "0"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["reset"] is False and "board.json" in out["verified"]
    assert len(calls(log)) == 3  # park, copy and verify; no final reset
    board_json = json.loads((board / "board.json").read_text())
    assert board_json["link"]["port"] == "stdio"


def test_a_file_that_reads_back_wrong_stops_before_reset(fake_board, bundle_dir, monkeypatch,
                                                          capsys):
    board, log = fake_board
    monkeypatch.setenv("FAKE_CORRUPT", "relays.py")
    assert main(["firmware", "deploy", "--port", PORT, "--bundle", str(bundle_dir),
                 "--settle", "0"]) == 3
    err = capsys.readouterr().err
    assert "relays.py" in err and "not reset" in err
    assert len(calls(log)) == 3 and (board / ".resets").read_text() == "1"  # parking only


def test_copy_waits_for_the_port_after_the_parking_reset(fake_board, bundle_dir, monkeypatch):
    board, log = fake_board
    monkeypatch.setenv("FAKE_DOWN_TIMES", "2")
    assert main(["firmware", "deploy", "--port", PORT, "--bundle", str(bundle_dir),
                 "--settle", "5"]) == 0
    assert len(calls(log)) == 6  # park, two refused connections, copy, verify, reset


def test_absent_port_is_a_link_error(fake_board, bundle_dir, monkeypatch, capsys):
    monkeypatch.setenv("FAKE_FAIL_CONNECT", "1")
    assert main(["firmware", "deploy", "--port", PORT, "--bundle", str(bundle_dir),
                 "--settle", "0"]) == 3
    assert "failed to access" in capsys.readouterr().err


def test_bad_arguments_exit_2(fake_board, bundle_dir, tmp_path, capsys):
    assert main(["firmware", "deploy", "--port", PORT]) == 2
    assert main(["firmware", "deploy", "--port", PORT, "--bundle", str(bundle_dir),
                 "--config", "x.toml"]) == 2
    assert main(["firmware", "deploy", "--port", PORT, "--bundle", str(tmp_path / "none")]) == 2
    assert calls(fake_board[1]) == []


def test_parse_sha256sum_output():
    digest = hashlib.sha256(b"").hexdigest()  # FIPS 180-2 empty-message digest e3b0c442...
    assert digest.startswith("e3b0c442")
    text = f"sha256sum :main.py\n{digest}\nsha256sum :wire.py\n{'0' * 64}\n"
    assert parse_sha256sum(text) == {"main.py": digest, "wire.py": "0" * 64}
