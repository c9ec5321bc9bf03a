"""``nullsteer firmware bundle``: the files a board needs and its board.json.

Sources beside each check. The board side of the link follows MicroPython's own layout
(common practice, MicroPython docs from memory: the USB serial port is the REPL's
``sys.stdin``/``sys.stdout``; ``main.py`` runs at boot). SHA-256 is checked against the
FIPS 180-2 example ("abc").
"""

from __future__ import annotations

import re
import hashlib
import json
from pathlib import Path

import pytest

from nullsteer.protocol import wire
from nullsteer.board.bundle import (BOARD_FILE, MANIFEST, BundleFile, check_board_config,
                              check_firmware_version, firmware_version, make_bundle,
                              read_bundle, write_bundle)
from nullsteer.cli import main
from nullsteer.station.config import load_station
from nullsteer.board.devices import parse_devices
from nullsteer.errors import ConfigError
from nullsteer.sim.firmware import firmware_dir, parse_board_config

EXAMPLES = Path(__file__).parents[1] / "examples"
KEY_HEX = "00112233445566778899aabbccddeeff"


def station_dir(tmp_path: Path, link: str = "serial:///dev/ttyUSB0", extra: str = "",
                board: dict | None = None, ladder: bool = True) -> Path:
    """A copy of the demo station with its own board file; a fixed ladder range keeps
    the designer away from the (slow) antenna model."""
    text = (EXAMPLES / "station.toml").read_text()
    if "\n[firmware]" in text:  # the test gives its own [firmware] section (or none)
        start = text.index("\n[firmware]")
        text = text[:start] + text[text.index("\n[", start + 1):]
    text = re.sub(r'^link = "[^"]*"', f'link = "{link}"', text, count=1, flags=re.M)
    text = text.replace("# range_ohm = [400, 2500]", "range_ohm = [400.0, 2500.0]")
    if not ladder:
        start = text.index("[ladder]")
        text = text[:start] + text[text.index("[noise]"):]
    (tmp_path / "station.toml").write_text(text + extra)
    cfg = board if board is not None else json.loads((EXAMPLES / "board-sim.json").read_text())
    (tmp_path / "board-sim.json").write_text(json.dumps(cfg))
    (tmp_path / "key.hex").write_text(KEY_HEX + "\n")
    return tmp_path / "station.toml"


def bundle_for(path: Path):
    station = load_station(path)
    return make_bundle(station, parse_devices(station)[0], None)


def test_sha256_matches_the_published_example():
    # FIPS 180-2, appendix B.1: SHA-256("abc")
    assert BundleFile("x", b"abc").sha256 == \
        "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"


def test_serial_bundle_has_the_modules_the_board_needs(tmp_path):
    b = bundle_for(station_dir(tmp_path, ladder=False))
    names = [f.name for f in b.files]
    assert names[-1] == "main.py"  # the entry point is copied last
    assert set(names) == {"main.py", "hw.py", "app.py", "relays.py", "drivercfg.py", "drivers.py",
                          "boardcfg.py", "store.py", "link_serial.py", "port_stdio.py", "wire.py",
                          BOARD_FILE}
    files = {f.name: f.data for f in b.files}
    assert files["wire.py"] == Path(wire.__file__).read_bytes()  # the one codec, verbatim
    for name in names:
        if name not in ("wire.py", BOARD_FILE):
            assert files[name] == (firmware_dir() / name).read_bytes()
    # the simulator's pty becomes the USB serial port (MicroPython's REPL stdio)
    assert b.board_config["link"] == {"kind": "serial", "port": "stdio"}
    assert parse_board_config(json.loads(files[BOARD_FILE])).name == "heronmoor-flag-ne"
    assert b.firmware_version == firmware_version()


def test_uart_and_rs485_settings_from_the_firmware_section(tmp_path):
    extra = '\n[firmware]\nboard_port = "uart"\nuart_id = 1\nbaud = 38400\ntx_pin = 4\n' \
            'rx_pin = 5\nde_pin = 6\nwatchdog_ms = 8000\n'
    b = bundle_for(station_dir(tmp_path, extra=extra, ladder=False))
    assert b.board_config["link"] == {"kind": "serial", "port": "uart", "id": 1, "baud": 38400,
                                      "tx": 4, "rx": 5, "de_pin": 6}
    assert b.board_config["watchdog_ms"] == 8000
    assert "port_uart.py" in [f.name for f in b.files]
    assert "port_stdio.py" not in [f.name for f in b.files]


def test_mqtt_bundle_carries_broker_id_key_and_presets(tmp_path):
    extra = '\n[firmware]\nwifi_ssid = "fieldnet"\n'
    path = station_dir(tmp_path, link="mqtt://board:pw@10.0.0.2:1884/flag-ne?base=ns", extra=extra,
                       ladder=False)
    text = path.read_text().replace('board = "board-sim.json"',
                                    'board = "board-sim.json"\nkey_file = "key.hex"')
    path.write_text(text)
    b = bundle_for(path)
    m = b.board_config["mqtt"]
    assert (m["host"], m["port"], m["id"], m["base"], m["user"], m["password"]) == \
        ("10.0.0.2", 1884, "flag-ne", "ns", "board", "pw")
    assert m["key_hex"] == KEY_HEX and m["wifi"] == {"ssid": "fieldnet"}
    import tomllib
    presets = tomllib.loads(path.read_text())["presets"]
    east = presets["dx-east"]
    assert m["presets"]["dx-east"] == {"end": east["fed_end"], "open": False,
                                       "ohms": float(east["ohms"])}
    assert m["presets"]["no-null"]["open"] is True
    names = [f.name for f in b.files]
    assert {"mqtt_client.py", "mqtt_link.py", "net.py", "discovery.py"} <= set(names)
    entry = dict((f.name, f.data) for f in b.files)["main.py"]
    assert b"hw.run()" in entry  # hw.run starts the MQTT link when the config has one
    check_board_config(b.board_config)  # the firmware's own readers accept it


def test_written_bundle_reads_back_and_refuses_edits(tmp_path):
    (tmp_path / "st").mkdir()
    b = bundle_for(station_dir(tmp_path / "st", ladder=False))
    out = tmp_path / "bundle"
    write_bundle(b, out)
    assert (out / BOARD_FILE).stat().st_mode & 0o077 == 0  # may hold keys: owner only
    manifest = json.loads((out / MANIFEST).read_text())
    assert [e["name"] for e in manifest["files"]] == [f.name for f in b.files]
    for e in manifest["files"]:
        assert hashlib.sha256((out / e["name"]).read_bytes()).hexdigest() == e["sha256"]
    assert read_bundle(out).files == b.files
    (out / "relays.py").write_bytes((out / "relays.py").read_bytes() + b"\n# edited\n")
    with pytest.raises(ConfigError) as err:
        read_bundle(out)
    assert "relays.py" in str(err.value)


def test_bad_board_file_is_refused_before_anything_is_written(tmp_path, capsys):
    cfg = json.loads((EXAMPLES / "board-sim.json").read_text())
    cfg["driver"] = {"kind": "expander", "addr": 0x50}
    path = station_dir(tmp_path, board=cfg, ladder=False)
    out = tmp_path / "bundle"
    assert main(["firmware", "bundle", "--config", str(path), "-o", str(out)]) == 2
    assert "board.driver.addr" in capsys.readouterr().err
    assert not out.exists()


@pytest.mark.parametrize("extra,key", [
    ('\n[firmware]\nboard_port = "spi"\n', "firmware.board_port"),
    ('\n[firmware]\nwatchdog_ms = 100\n', "firmware.watchdog_ms"),
    ('\n[firmware]\nbaud_rate = 9600\n', "firmware.baud_rate"),
    ('\n[firmware]\nwifi_password_env = "NS_NO_SUCH_VARIABLE_SET"\n', "firmware.wifi_password_env"),
])
def test_bad_firmware_keys_exit_2_naming_the_key(tmp_path, capsys, extra, key):
    path = station_dir(tmp_path, extra=extra, ladder=False)
    assert main(["firmware", "bundle", "--config", str(path), "-o", str(tmp_path / "b")]) == 2
    assert key in capsys.readouterr().err


def test_device_without_board_file(tmp_path, capsys):
    path = station_dir(tmp_path, ladder=False)
    path.write_text(path.read_text().replace('board = "board-sim.json"', ""))
    assert main(["firmware", "bundle", "--config", str(path), "-o", str(tmp_path / "b")]) == 2
    assert "board" in capsys.readouterr().err


def four_relay_board() -> dict:
    cfg = json.loads((EXAMPLES / "board-sim.json").read_text())
    cfg["relays"] = [r for r in cfg["relays"] if r["role"] != "ladder" or r["bit"] < 4]
    del cfg["ladder"]
    return cfg


def test_designed_ladder_must_match_the_board_relays(tmp_path, capsys):
    path = station_dir(tmp_path, board=four_relay_board())  # [ladder] relays = 7
    from nullsteer.board.bundle import assemble_board_config
    station = load_station(path)
    block = {"topology": "series-shorting", "resistors_ohm": [10.0] * 7, "base_ohm": 0.0,
             "table": [[0, 1.0]]}
    with pytest.raises(ConfigError) as err:
        assemble_board_config(station, parse_devices(station)[0], block)
    assert "4 ladder relays" in str(err.value) and "has 7" in str(err.value)


def test_bundle_keeps_the_board_files_ladder_table(tmp_path, capsys):
    # the board file's table describes the resistors fitted: it goes to the board as is
    path = station_dir(tmp_path)
    out = tmp_path / "bundle"
    assert main(["firmware", "bundle", "--config", str(path), "-o", str(out)]) == 0
    board = json.loads((out / BOARD_FILE).read_text())
    assert board["ladder"] == json.loads((EXAMPLES / "board-sim.json").read_text())["ladder"]
    assert "wrote 13 files" in capsys.readouterr().out  # 12 for the board + the manifest


def test_bundle_command_with_the_designer_ladder(tmp_path, capsys):
    pytest.importorskip("nullsteer.ladder.station")  # the designer's station-level entry
    path = station_dir(tmp_path, board=four_relay_board())  # no ladder table: designer
    path.write_text(path.read_text().replace("relays = 7 ", "relays = 4 "))  # a quick search
    out = tmp_path / "bundle"
    assert main(["firmware", "bundle", "--config", str(path), "-o", str(out), "--json"]) == 0
    report = json.loads(capsys.readouterr().out)
    board = json.loads((out / BOARD_FILE).read_text())
    lad = board["ladder"]
    assert lad["topology"] == "series-shorting" and len(lad["resistors_ohm"]) == 4
    table = lad["table"]
    assert sorted(m for m, _ in table) == list(range(16))
    ohms = [r for _, r in table]
    assert ohms == sorted(ohms)
    # series resistances add (Ohm's law): base + the inserted resistors; a shorted one
    # leaves its closed contact (0.1 ohm, the designer's default contact resistance, in
    # parallel with it), and the reversal and open contacts add 0.1 ohm each
    c = 0.1
    for mask, r_table in table:
        r = lad["base_ohm"] + 2 * c
        for i, ri in enumerate(lad["resistors_ohm"]):
            r += ri if (mask >> i) & 1 else ri * c / (ri + c)
        assert r_table == pytest.approx(r, abs=0.051)
    assert report["firmware"] == firmware_version()


VERSIONS = [  # (reported, expected, agrees): x.y.z, same major.minor = same protocol
    ("0.1.0", "0.1.0", True),
    ("0.1.3", "0.1.0", True),
    ("0.0.9", "0.1.0", False),
    ("1.0.0", "0.1.0", False),
    ("?", "0.1.0", False),
    (None, "0.1.0", False),
    ("dev", "0.1.0", False),
]


@pytest.mark.parametrize("reported,expected,agrees", VERSIONS)
def test_check_firmware_version(reported, expected, agrees):
    msg = check_firmware_version(reported, expected)
    assert (msg is None) == agrees
    if msg is not None:
        assert expected in msg and "\n" not in msg
        if reported == "0.0.9":
            assert "older" in msg and "nullsteer firmware deploy" in msg
        if reported == "1.0.0":
            assert "newer" in msg
