"""``nullsteer sun`` on the command line, checked against astral (test-only reference)."""

from __future__ import annotations

import datetime as dt
import json
import zoneinfo

import pytest
from astral import Observer
from astral import sun as asun

from nullsteer.cli import main


def run_cli(capsys, *argv):
    code = main(["sun", *argv])
    out, err = capsys.readouterr()
    return code, out, err


def test_json_times_are_iso_with_offset_and_match_astral(capsys):
    # astral [reference library]: Dublin 2026-06-21 (IST, +01:00), all four events +-2 min.
    code, out, _ = run_cli(capsys, "--lat", "53.412", "--lon", "-7.93", "--date", "2026-06-21",
                           "--tz", "Europe/Dublin", "--json")
    assert code == 0
    data = json.loads(out)
    tz = zoneinfo.ZoneInfo("Europe/Dublin")
    obs = Observer(53.412, -7.93)
    day = dt.date(2026, 6, 21)
    for key, fn in (("dawn", asun.dawn), ("sunrise", asun.sunrise),
                    ("sunset", asun.sunset), ("dusk", asun.dusk)):
        when = dt.datetime.fromisoformat(data[key])
        assert when.utcoffset() == dt.timedelta(hours=1)
        assert abs((when - fn(obs, day, tzinfo=tz)).total_seconds()) <= 120
    ref_len = asun.sunset(obs, day, tzinfo=tz).timestamp() - asun.sunrise(obs, day, tzinfo=tz).timestamp()
    assert abs(data["day_length_s"] - ref_len) <= 120
    assert data["reasons"] == {}


def test_json_polar_night_nulls_with_reason(capsys):
    # Common practice / astral (ValueError): no sunrise at 78.2 N on 2026-12-21.
    code, out, _ = run_cli(capsys, "--lat", "78.2", "--lon", "15.6", "--date", "2026-12-21",
                           "--json")
    assert code == 0
    data = json.loads(out)
    with pytest.raises(ValueError):
        asun.sunrise(Observer(78.2, 15.6), dt.date(2026, 12, 21))
    assert data["sunrise"] is None and data["sunset"] is None
    assert "below the horizon" in data["reasons"]["sunrise"]
    assert data["day_length_s"] == 0


def test_text_output_shows_local_and_utc(capsys):
    # astral [reference library]: the text form shows the local sunrise, HH:MM, +-2 min.
    code, out, _ = run_cli(capsys, "--lat", "38.9", "--lon", "-77.0", "--date", "2026-01-15",
                           "--tz", "America/New_York")
    assert code == 0
    ref = asun.sunrise(Observer(38.9, -77.0), dt.date(2026, 1, 15),
                       tzinfo=zoneinfo.ZoneInfo("America/New_York"))
    line = next(l for l in out.splitlines() if l.strip().startswith("sunrise"))
    hh, mm = line.split()[1].split(":")
    shown = ref.replace(hour=int(hh), minute=int(mm), second=0, microsecond=0)
    assert abs((shown - ref).total_seconds()) <= 180
    assert "EST" in line and "UTC" in line


@pytest.mark.parametrize("argv,flag", [
    (["--lat", "91", "--lon", "0", "--date", "2026-01-01"], "--lat"),      # latitude <= 90 deg
    (["--lat", "north", "--lon", "0"], "--lat"),
    (["--lat", "10", "--lon", "200"], "--lon"),                            # longitude <= 180 deg
    (["--lat", "10", "--lon", "0", "--date", "2026-02-30"], "--date"),     # no 30 February
    (["--lat", "10", "--lon", "0", "--date", "yesterday"], "--date"),
    (["--lat", "10", "--lon", "0", "--tz", "Europe/Atlantis"], "--tz"),    # not in tzdata
])
def test_bad_arguments_exit_2_with_one_line(capsys, argv, flag):
    # CLI contract (errors.py): configuration/usage errors exit 2 with one line naming the flag.
    code, out, err = run_cli(capsys, *argv)
    assert code == 2
    assert out == ""
    assert len(err.strip().splitlines()) == 1 and flag in err
