"""``nullsteer schedule`` on the command line (astral as test-only reference)."""

from __future__ import annotations

import datetime as dt
import json
import zoneinfo
from pathlib import Path

import pytest
from astral import Observer
from astral import sun as asun

from nullsteer.cli import main

EXAMPLE = Path(__file__).resolve().parents[1] / "examples" / "station.toml"
DUBLIN = zoneinfo.ZoneInfo("Europe/Dublin")
HEAD = ('[site]\nlat_deg = 53.412\nlon_deg = -7.930\ntimezone = "Europe/Dublin"\n'
        '[presets]\nwest = { fed_end = "A", ohms = 900.0 }\n'
        '[[device]]\nid = "flag-ne"\n')


def run_cli(capsys, *argv):
    code = main(["schedule", *argv])
    out, err = capsys.readouterr()
    return code, out, err


def test_example_station_json_matches_astral(capsys):
    # astral [reference library]: the demo's sunset -30 min rule (site) and far-region
    # sunrise rule (40.1 N 75.3 W), over 3 days from local midnight, +-2 min.
    code, out, _ = run_cli(capsys, "--config", str(EXAMPLE), "--from", "2026-03-27",
                           "--days", "3", "--json")
    assert code == 0
    data = json.loads(out)
    assert dt.datetime.fromisoformat(data["from"]) == dt.datetime(2026, 3, 27, tzinfo=DUBLIN)
    assert dt.datetime.fromisoformat(data["to"]) == dt.datetime(2026, 3, 30, tzinfo=DUBLIN)
    acts = data["actions"]
    assert [a["rule"] for a in acts] == [1, 0] * 3
    site, far = Observer(53.412, -7.930), Observer(40.1, -75.3)
    ny = zoneinfo.ZoneInfo("America/New_York")
    for a in acts:
        when = dt.datetime.fromisoformat(a["when"])
        if a["rule"] == 0:
            ref = asun.sunset(site, when.astimezone(DUBLIN).date(), tzinfo=DUBLIN)
            ref -= dt.timedelta(minutes=30)
            assert a["target"] == {"fed_end": "A", "ohms": 1300.0, "open": False}
        else:
            ref = asun.sunrise(far, when.astimezone(ny).date(), tzinfo=ny)
            assert a["target"]["fed_end"] == "B"
        assert abs((when - ref).total_seconds()) <= 120
        assert a["devices"] == ["flag-ne"]
    assert data["in_force"]["rule"] == 0     # the previous evening's sunset action
    assert data["skipped"] == []


def test_text_lists_polar_skips(tmp_path, capsys):
    # astral [reference library]: no sunset at 78.2 N in December (ValueError).
    cfg = tmp_path / "polar.toml"
    cfg.write_text('[site]\nlat_deg = 78.2\nlon_deg = 15.6\ntimezone = "Arctic/Longyearbyen"\n'
                   '[presets]\nwest = { fed_end = "A", ohms = 900.0 }\n'
                   '[[rule]]\nat = "sunset"\npreset = "west"\n', encoding="utf-8")
    code, out, _ = run_cli(capsys, "--config", str(cfg), "--from", "2026-12-20", "--days", "2")
    assert code == 0
    with pytest.raises(ValueError):
        asun.sunset(Observer(78.2, 15.6), dt.date(2026, 12, 20))
    assert "no actions in this window" in out
    skipped = [l for l in out.splitlines() if "polar night" in l]
    assert len(skipped) == 2 and "2026-12-20" in skipped[0]


@pytest.mark.parametrize("rule,key", [
    ('at = "noon"\npreset = "west"', "rule[0].at"),
    ('at = "25:00"\npreset = "west"', "rule[0].at"),
    ('at = "sunset"\npreset = "east"', "rule[0].preset"),
    ('at = "sunset"', "rule[0].preset"),
    ('at = "sunset"\npreset = "west"\nofset_min = 5', "rule[0].ofset_min"),
    ('at = "sunset"\npreset = "west"\noffset_min = 1000', "rule[0].offset_min"),
    ('at = "sunset"\npreset = "west"\ndays = ["funday"]', "rule[0].days"),
    ('at = "sunset"\npreset = "west"\ndays = []', "rule[0].days"),
    ('at = "sunset"\npreset = "west"\ndevice = "loop-9"', "rule[0].device"),
    ('at = "sunset"\npreset = "west"\nwhere = { lat_deg = 95.0, lon_deg = 0.0 }',
     "rule[0].where.lat_deg"),
    ('at = "sunset"\npreset = "west"\nwhere = { lat = 40.0, lon_deg = 0.0 }', "rule[0].where.lat"),
    ('at = "07:00"\npreset = "west"\nwhere = { lat_deg = 40.0, lon_deg = 0.0 }', "rule[0].where"),
])
def test_bad_rule_keys_exit_2(tmp_path, capsys, rule, key):
    # CLI contract (errors.py): a bad rule is one line naming rule[i].<key>, exit code 2.
    cfg = tmp_path / "bad.toml"
    cfg.write_text(HEAD + "[[rule]]\n" + rule + "\n", encoding="utf-8")
    code, out, err = run_cli(capsys, "--config", str(cfg), "--from", "2026-01-01")
    assert code == 2 and out == ""
    lines = err.strip().splitlines()
    assert len(lines) == 1 and f"{key}:" in lines[0]


@pytest.mark.parametrize("argv,flag", [
    (["--days", "0"], "--days"), (["--days", "week"], "--days"),
    (["--from", "tomorrow"], "--from"), (["--freq-mhz", "-3"], "--freq-mhz"),
])
def test_bad_flags_exit_2(capsys, argv, flag):
    # CLI contract: one line naming the flag, exit 2.
    code, _, err = run_cli(capsys, "--config", str(EXAMPLE), *argv)
    assert code == 2 and flag in err and len(err.strip().splitlines()) == 1


def test_missing_config_exit_2(tmp_path, capsys):
    code, _, err = run_cli(capsys, "--config", str(tmp_path / "none.toml"))
    assert code == 2 and "--config" in err
