"""Station-file readers, device entries, bearings and link URLs (host side, no board)."""

from __future__ import annotations

import pytest

from nullsteer.station.bearing import angle_between_deg, fed_end_for_null, null_bearing_deg
from nullsteer.station.config import Station, get_float, parse_freqs_mhz
from nullsteer.board.devices import parse_devices, pick_device
from nullsteer.errors import ConfigError
from nullsteer.board.links import open_link, query_options
from pathlib import Path


def test_freq_grid_includes_stop_when_on_grid():
    assert parse_freqs_mhz("1.8:2.0:0.05", "band.freqs_mhz") == [1.8, 1.85, 1.9, 1.95, 2.0]
    assert parse_freqs_mhz([3.6, 1.83, 3.6], "k") == [1.83, 3.6]
    assert parse_freqs_mhz(7.1, "k") == [7.1]


@pytest.mark.parametrize("value, fragment", [
    ("2.0:1.8:0.05", "below start"),
    ("1.8:2.0:0", "step must be > 0"),
    ("abc", "start:stop:step"),
    ([1.8, "x"], "list of MHz"),
    ([], "at least one"),
    ("0.001", "outside"),
])
def test_bad_freqs_name_the_key(value, fragment):
    with pytest.raises(ConfigError) as info:
        parse_freqs_mhz(value, "band.freqs_mhz")
    assert info.value.key == "band.freqs_mhz"
    assert fragment in str(info.value)


def test_get_float_limits_and_types():
    assert get_float({"h": 6}, "h", "antenna") == 6.0
    with pytest.raises(ConfigError, match="antenna.h: must be >= 0"):
        get_float({"h": -1}, "h", "antenna", minimum=0)
    with pytest.raises(ConfigError, match="antenna.h: must be a number"):
        get_float({"h": "six"}, "h", "antenna")
    with pytest.raises(ConfigError, match="antenna.h: is required"):
        get_float({}, "h", "antenna")


# Bearings: a terminated loop nulls toward its terminated end (common practice), so
# feeding end A puts the null on the far side from A.
@pytest.mark.parametrize("end_a, wanted, fed, miss", [
    (65.0, 245.0, "A", 0.0),
    (65.0, 65.0, "B", 0.0),
    (65.0, 200.0, "A", 45.0),
    (350.0, 10.0, "B", 20.0),
])
def test_fed_end_for_null(end_a, wanted, fed, miss):
    got, got_miss = fed_end_for_null(wanted, end_a)
    assert got == fed
    assert got_miss == pytest.approx(miss)
    assert angle_between_deg(null_bearing_deg(got, end_a), wanted) == pytest.approx(miss)


def _station(tmp_path: Path, devices: list[dict]) -> Station:
    return Station(path=tmp_path / "s.toml", raw={"device": devices})


def test_devices_parse_and_pick(tmp_path):
    st = _station(tmp_path, [{"id": "flag-ne", "link": "sim://", "board": "b.json"},
                             {"id": "pennant", "link": "serial:///dev/ttyUSB0"}])
    devs = parse_devices(st)
    assert devs[0].board_config == tmp_path / "b.json"
    assert pick_device(devs, "pennant").link == "serial:///dev/ttyUSB0"
    with pytest.raises(ConfigError, match="--device: several devices"):
        pick_device(devs, None)
    with pytest.raises(ConfigError, match="no device 'x'"):
        pick_device(devs, "x")


@pytest.mark.parametrize("entry, key", [
    ({"id": "a b", "link": "sim://"}, "device[0].id"),
    ({"id": "a", "link": "/dev/ttyUSB0"}, "device[0].link"),
    ({"id": "a", "link": "sim://", "speed": 3}, "device[0].speed"),
    ({"id": "a", "link": "sim://", "key_env": "NULLSTEER_NO_SUCH_VAR"}, "device[0].key_env"),
])
def test_bad_device_entries(tmp_path, entry, key):
    with pytest.raises(ConfigError) as info:
        parse_devices(_station(tmp_path, [entry]))
    assert info.value.key == key


def test_link_urls():
    assert query_options("serial:///dev/ttyUSB0?baud=9600&rtscts=1") == {"baud": "9600", "rtscts": "1"}
    with pytest.raises(ConfigError, match="unknown scheme 'gopher'"):
        open_link("gopher://x")
    with pytest.raises(ConfigError, match="expected a URL"):
        open_link("/dev/ttyUSB0")
    with pytest.raises(ConfigError, match="baud must be a whole number"):
        open_link("serial:///dev/null?baud=fast")
