"""``nullsteer service``: dry run over a day (times checked against astral, a reference
library used only in tests), CLI errors, and a real run on a simulated MQTT board."""

from __future__ import annotations

import re
import datetime as dt
import math
import shutil
import zoneinfo
from pathlib import Path

import pytest
from astral import LocationInfo
from astral.sun import sun
from mqtt_support import BOARD_JSON, MqttSimBoard, board_config

from nullsteer.cli import main
from nullsteer.station.config import load_station
from nullsteer.schedule.service import Service, ServiceOptions

EXAMPLE = Path(__file__).resolve().parents[1] / "examples" / "station.toml"
ZONE = zoneinfo.ZoneInfo("Europe/Dublin")


def station_file(tmp_path: Path, link: str) -> Path:
    text = re.sub(r'^link = "[^"]*"', f'link = "{link}"', EXAMPLE.read_text(), count=1,
                  flags=re.M)
    assert f'link = "{link}"' in text
    path = tmp_path / "station.toml"
    path.write_text(text)
    shutil.copy(BOARD_JSON, tmp_path / "board-sim.json")
    return path


def astral_event(lat, lon, day, which):
    # astral: pass the local date and tzinfo (it treats a bare date as UTC)
    loc = LocationInfo("x", "x", "UTC", lat, lon)
    return sun(loc.observer, date=day, tzinfo=ZONE)[which]


def test_dry_run_over_a_day_sends_nothing_and_follows_the_sun(tmp_path, capsys):
    # an unreachable broker: a dry run must not even try to connect
    path = station_file(tmp_path, "mqtt://127.0.0.1:9/flag-ne?connect_timeout=0.2")
    code = main(["service", "--config", str(path), "--dry-run",
                 "--from", "2026-06-21T00:00", "--speed", "0", "--days", "1"])
    assert code == 0
    lines = capsys.readouterr().out.strip().splitlines()
    assert len(lines) == 3  # catch-up, then the two rules of the day
    assert "catch-up" in lines[0] and "dx-east" in lines[0]
    assert all("dry run, nothing sent" in line for line in lines)
    when = [dt.datetime.fromisoformat(line.split(" ")[0]) for line in lines]
    day = dt.date(2026, 6, 21)
    # rule 0: site sunset - 30 min; rule 1: sunrise at 40.1 N 75.3 W (examples/station.toml)
    # tolerance 2 min: the NOAA method vs astral (REFERENCES.md, "Sun")
    expect_west = astral_event(53.412, -7.930, day, "sunset") - dt.timedelta(minutes=30)
    expect_east = astral_event(40.1, -75.3, day, "sunrise")
    assert abs((when[1] - expect_east).total_seconds()) < 120 and "dx-west" in lines[1]
    assert abs((when[2] - expect_west).total_seconds()) < 120 and "dx-east" in lines[2]
    # the catch-up action is yesterday's sunset rule
    prev = astral_event(53.412, -7.930, day - dt.timedelta(days=1), "sunset")
    assert abs((when[0] - (prev - dt.timedelta(minutes=30))).total_seconds()) < 120


def test_time_shift_runs_a_day_fast(tmp_path):
    # speed 86400: one virtual day per real second, with real (short) sleeps
    path = station_file(tmp_path, "mqtt://127.0.0.1:9/flag-ne")
    svc = Service(load_station(path), ServiceOptions(
        dry_run=True, start=dt.datetime(2026, 12, 1, 12, 0, tzinfo=ZONE), speed=86400.0,
        days=1.0))
    assert svc.run() == 0
    assert svc.applied == 3
    assert svc.clock.now() >= dt.datetime(2026, 12, 2, 12, 0, tzinfo=ZONE)


@pytest.mark.parametrize("argv, flag", [
    (["--dry-run", "--speed", "0"], "--days"),
    (["--dry-run", "--from", "yesterday", "--speed", "0", "--days", "1"], "--from"),
])
def test_bad_arguments_exit_2(tmp_path, capsys, argv, flag):
    path = station_file(tmp_path, "sim://")
    assert main(["service", "--config", str(path)] + argv) == 2
    assert flag in capsys.readouterr().err


def test_service_sets_the_board_over_mqtt(tmp_path, make_broker):
    broker = make_broker()
    table = [tuple(r) for r in board_config()["ladder"]["table"]]
    mask_1300 = min(table, key=lambda r: abs(math.log(1300.0 / r[1])))[0]  # nearest by ratio (preset dx-east)
    blk = {"host": broker.host, "port": broker.port, "id": "flag-ne"}
    with MqttSimBoard(blk) as board:
        path = station_file(tmp_path, broker.url("flag-ne"))
        # start just before the site's sunset rule: catch-up gives dx-west (fed B),
        # then the sunset rule (dx-east, fed A) fires within the hour
        start = astral_event(53.412, -7.930, dt.date(2026, 12, 1), "sunset") - \
            dt.timedelta(minutes=40)
        svc = Service(load_station(path), ServiceOptions(start=start, speed=0.0,
                                                         days=1.0 / 24))
        assert svc.run() == 0
        assert len(svc.lines) == 2, svc.lines
        assert "catch-up" in svc.lines[0] and "dx-west" in svc.lines[0]
        assert "dx-east" in svc.lines[1] and "FAILED" not in " ".join(svc.lines)
        assert board.state() == ("A", mask_1300, False)
