"""The control page's JSON API against a loopback board (the firmware's own handler).

Outside references: the fed-end/null rule "a terminated loop nulls toward its terminated
end" (common practice), "nearest setting by ratio" as the board protocol defines it
(smallest |ln(R/R_k)|, firmware/PROTOCOL.md) computed here independently with ``math``,
sunset times from astral (reference library used only in tests), and the HTTP rules the
safety checks rest on (RFC 9110 status codes; the Fetch standard's CORS preflight for
non-safelisted request headers such as X-Nullsteer-Request: from memory).
"""

from __future__ import annotations

import datetime as dt
import math
import subprocess
import sys
import tomllib
import xml.etree.ElementTree as ET

import pytest

from nullsteer.errors import ConfigError
from nullsteer.web.server import check_listen
from web_support import (Client, CountingOpener, EventReader, board_table, serve,
                         station_file, stop)

END_A_DEG = 65.0  # examples/station.toml [antenna].end_a_bearing_deg
DEV = "/api/devices/flag-ne"


def nearest_by_ratio(ohms: float) -> tuple[int, float]:
    return min(board_table(), key=lambda row: abs(math.log(ohms / row[1])))


@pytest.fixture
def page(tmp_path):
    opener = CountingOpener()
    desk, server = serve(station_file(tmp_path), opener)
    yield Client(server), opener, desk, server
    stop(desk, server)


def test_flip_preset_ohms_bearing_open(page):
    client, opener, desk, server = page
    status, snap = client.get(DEV)
    assert status == 200 and snap["available"] and snap["fed_end"] == "A"
    # fed A: the null points toward end B, i.e. end A's bearing + 180 (common practice)
    assert snap["null_bearing_deg"] == pytest.approx((END_A_DEG + 180) % 360)

    status, out = client.post(DEV + "/flip")
    assert status == 200 and out["device"]["fed_end"] == "B"
    assert out["device"]["null_bearing_deg"] == pytest.approx(END_A_DEG)
    assert out["device"]["mask"] == snap["mask"]  # a flip keeps the termination

    status, out = client.post(DEV + "/preset", {"name": "dx-east"})
    mask, _ = nearest_by_ratio(1300.0)  # dx-east = { fed_end = "A", ohms = 1300.0 }
    assert status == 200
    assert (out["device"]["fed_end"], out["device"]["mask"], out["device"]["open"]) == ("A", mask, False)
    assert out["device"]["presets"] == ["dx-east"]

    status, out = client.post(DEV + "/set", {"ohms": 1500})
    mask, r = nearest_by_ratio(1500.0)
    assert status == 200 and out["device"]["mask"] == mask
    assert out["error_pct"] == pytest.approx(100 * (r - 1500.0) / 1500.0, abs=0.01)
    assert out["device"]["presets"] == []

    status, out = client.post(DEV + "/set", {"null_bearing_deg": 80})  # nearer 65 than 245
    assert status == 200 and out["device"]["fed_end"] == "B"

    status, out = client.post(DEV + "/set", {"open": True})
    assert status == 200 and out["device"]["open"] is True
    assert out["device"]["null_bearing_deg"] is None
    assert "short" not in out["device"]  # this board reports no shorted state

    status, out = client.post(DEV + "/set", {"fed_end": "A", "mask": 3})
    assert status == 200 and (out["device"]["fed_end"], out["device"]["mask"]) == ("A", 3)
    assert out["device"]["open"] is False


BAD = [  # (path, body, status, key named in the reason)
    ("/set", {"ohms": -5}, 400, "ohms"),
    ("/set", {"ohms": "900"}, 400, "ohms"),
    ("/set", {"ohms": 50000}, 400, "ohms"),          # far outside the ladder
    ("/set", {"mask": 9999}, 400, "mask"),           # 7 relays: 0..127
    ("/set", {"mask": 1.5}, 400, "mask"),
    ("/set", {"fed_end": "C"}, 400, "fed_end"),
    ("/set", {"null_bearing_deg": 400}, 400, "null_bearing_deg"),
    ("/set", {"fed_end": "A", "null_bearing_deg": 10}, 400, "null_bearing_deg"),
    ("/set", {"ohms": 900, "open": True}, 400, "ohms"),
    ("/set", {"open": False}, 400, "open"),
    ("/set", {"short": True}, 400, "short"),         # no short relay on this board
    ("/set", {"volume": 3}, 400, "volume"),
    ("/set", {}, 400, "set"),
    ("/preset", {"name": "nope"}, 400, "name"),
    ("/preset", {"name": "dx-west", "freq_mhz": 99}, 400, "freq_mhz"),
    ("/flip", {"now": True}, 400, "now"),
    ("/autonull", {"freq_mhz": 0}, 400, "freq_mhz"),
    ("/autonull", {"freq_mhz": 1.83, "save_preset": "bad name!"}, 400, "save_preset"),
    ("/reboot", {}, 404, "reboot"),
]


@pytest.mark.parametrize("path,body,code,key", BAD)
def test_bad_input_is_refused_with_one_line_and_nothing_sent(page, path, body, code, key):
    client, opener, desk, server = page
    before = client.get(DEV)[1]
    sent = len(opener.written)
    status, out = client.post(DEV + path, body)
    assert status == code
    assert key in out["error"] and "\n" not in out["error"]
    assert opener.written[sent:] == []  # not even a STATUS: checked before any traffic
    after = client.get(DEV)[1]
    assert {k: after[k] for k in ("fed_end", "mask", "open")} == \
        {k: before[k] for k in ("fed_end", "mask", "open")}


REQUEST_CHECKS = [  # (headers, raw body, status, words in the reason)
    ({"X-Nullsteer-Request": ""}, "{}", 403, "X-Nullsteer-Request"),
    ({"Origin": "http://evil.example"}, "{}", 403, "origin"),
    ({"Content-Type": "text/plain"}, "{}", 400, "application/json"),
    ({}, "{not json", 400, "JSON"),
    ({}, "[1, 2]", 400, "object"),
    ({}, "{\"ohms\": " + "9" * 5000 + "}", 400, "larger"),
    ({"Host": "evil.example:8765"}, "{}", 403, "host"),
]


@pytest.mark.parametrize("headers,raw,code,word", REQUEST_CHECKS)
def test_state_changes_need_the_request_checks(page, headers, raw, code, word):
    client, opener, desk, server = page
    sent = len(opener.sets())
    status, out = client.post(DEV + "/flip", raw, headers=headers)
    assert status == code and word.lower() in out["error"].lower()
    assert len(opener.sets()) == sent


def test_get_cannot_change_state_and_unknown_device_is_404(page):
    client, opener, desk, server = page
    sent = len(opener.sets())
    assert client.get(DEV + "/flip")[0] == 404
    assert client.get("/api/devices/nope")[0] == 404
    assert client.post("/api/devices/nope/flip")[0] == 404
    assert len(opener.sets()) == sent


def test_events_follow_every_change(page):
    client, opener, desk, server = page
    events = EventReader(server)
    try:
        assert events.wait(lambda n, d: n == "device" and d["id"] == "flag-ne") is not None
        start = len(events.events)
        assert client.post(DEV + "/flip")[0] == 200
        ev = events.wait(lambda n, d: n == "device" and d["fed_end"] == "B", start=start)
        assert ev is not None
    finally:
        events.close()


def test_pattern_points_its_null_toward_the_terminated_end(page):
    client, opener, desk, server = page
    status, p = client.get(DEV + "/pattern?freq_mhz=1.83")
    assert status == 200 and p["freq_mhz"] == pytest.approx(1.83)
    # fed A: null toward end B at end A's bearing + 180 = 245 deg (common practice); the
    # model's deepest point lies within a few degrees of the loop's axis
    off = abs((p["null_bearing_deg"] - 245.0 + 180) % 360 - 180)
    assert off < 8
    svg = ET.fromstring(p["svg"])
    ns = "{http://www.w3.org/2000/svg}"
    classes = [e.get("class") for e in svg.iter(ns + "path")]
    assert classes == ["rev", "now"]  # the reversed direction drawn on the same scale
    assert client.get(DEV + "/pattern?freq_mhz=abc")[0] == 400


def test_schedule_shows_the_next_sunset_rule_as_astral_has_it(page):
    from astral import Observer
    from astral import sun as asun

    client, opener, desk, server = page
    status, out = client.get(DEV + "/schedule")
    assert status == 200 and out["next"]
    west = next(a for a in out["next"] if a["preset"] == "dx-east")  # sunset -30 min at the site
    when = dt.datetime.fromisoformat(west["when"])
    # astral [reference library]: sunset at the site (examples/station.toml [site])
    obs = Observer(latitude=53.412, longitude=-7.930)
    ref = asun.sunset(obs, date=when.astimezone(dt.timezone.utc).date()) - dt.timedelta(minutes=30)
    assert abs((when - ref).total_seconds()) < 120
    times = [dt.datetime.fromisoformat(a["when"]) for a in out["next"]]
    assert times == sorted(times)


def test_autonull_from_the_page_shows_probes_and_its_preset_at_once(page, tmp_path):
    client, opener, desk, server = page
    events = EventReader(server)
    try:
        # the invented interferer of the demo: 1.830 MHz from 248 deg ([[sim.station]])
        status, out = client.post(DEV + "/autonull", {"freq_mhz": 1.83, "null_bearing_deg": 248,
                                                      "save_preset": "page-160"})
        assert status == 202 and out["run"]["fed_end"] == "A"
        # a second command while it runs is refused
        busy = client.post(DEV + "/flip")
        assert busy[0] == 409 and "auto-null" in busy[1]["error"]
        done = events.wait(lambda n, d: n == "autonull" and d["kind"] in ("done", "failed"),
                           timeout_s=60)
        assert done is not None and done[1]["kind"] == "done", done
        probes = [e for n, e in events.events if n == "autonull" and e.get("kind") == "probe"]
        assert len(probes) >= 3
        result = done[1]["run"]["result"]
        # the board ends on the best setting found
        snap = client.get(DEV)[1]
        assert snap["mask"] == result["best_mask"] and snap["busy"] is None
        # saved into the station file (TOML, read independently) and offered at once
        saved = tomllib.loads((tmp_path / "station.toml").read_text())["presets"]["page-160"]
        assert saved["bands"]["160m"]["ohms"] == pytest.approx(result["best_ohms"], abs=0.1)
        names = [p["name"] for p in client.get("/api/station")[1]["presets"]]
        assert "page-160" in names
        assert "page-160" in snap["presets"]
    finally:
        events.close()


def test_token_is_needed_off_loopback_and_then_checked(tmp_path):
    with pytest.raises(ConfigError, match="--token-file"):
        check_listen("0.0.0.0", None)
    check_listen("::1", None)
    token = "k3y-for-tests-0123456789"
    desk, server = serve(station_file(tmp_path), token=token)
    try:
        anon = Client(server)
        assert anon.get("/api/station")[0] == 401
        assert anon.post(DEV + "/flip")[0] == 401
        assert anon.get("/?token=wrong-token-xxxxxxxx")[0] == 401
        conn_status = anon.get(f"/?token={token}")
        assert conn_status[0] == 303
        assert Client(server, token).get("/api/station")[0] == 200
        assert Client(server, token).post(DEV + "/flip")[0] == 200
        assert anon.get("/", headers={"Cookie": f"nullsteer_token={token}"})[0] == 200
    finally:
        stop(desk, server)


def test_serve_refuses_a_public_address_without_a_token(tmp_path):
    done = subprocess.run([sys.executable, "-m", "nullsteer", "serve", "--config",
                           str(station_file(tmp_path)), "--listen", "0.0.0.0:0"],
                          capture_output=True, text=True, timeout=60)
    assert done.returncode == 2
    assert done.stderr.strip().count("\n") == 0 and "--token-file" in done.stderr


class ShortReportingOpener(CountingOpener):
    """A board whose STATUS reports a shorted state (``short=0``), as boards with a
    ``short`` relay do: the reply is re-framed with the field added."""

    def __call__(self, device):
        from nullsteer.protocol import wire

        ctl = super().__call__(device)
        link = ctl.link
        read = link.read_line

        def read_line(timeout_s):
            line = read(timeout_s)
            if line is None:
                return None
            frame = wire.decode_reply(line)
            if frame.verb == "OK" and "boots" in frame.fields and "short" not in frame.fields:
                return wire.encode(frame.seq, "OK", tuple(frame.fields.items()) + (("short", 0),))
            return line

        link.read_line = read_line
        return ctl


def test_short_is_shown_only_when_the_board_reports_it(tmp_path):
    opener = ShortReportingOpener()
    desk, server = serve(station_file(tmp_path), opener)
    try:
        client = Client(server)
        snap = client.get(DEV)[1]
        assert snap["short"] is False
        sent = len(opener.written)
        status, out = client.post(DEV + "/set", {"short": True})
        # this host's controller has no shorted state yet: refused before sending
        from nullsteer.board.controller import Controller
        import inspect

        if "short" not in inspect.signature(Controller.set_state).parameters:
            assert status == 400 and "short" in out["error"]
            assert opener.written[sent:] == []
    finally:
        stop(desk, server)


def test_pattern_svg_puts_the_null_mark_on_the_compass_bearing():
    import numpy as np

    from nullsteer.web.pattern import RADIUS, SIZE, PatternCut, pattern_svg

    az = np.arange(0.0, 360.0, 2.0)
    # a made-up cardioid 1 + cos(az - 270): peak toward 270 (west), null toward 90 (east)
    now = 10 * np.log10(np.maximum(1e-6, (1 + np.cos(np.radians(az - 270))) / 2))
    cut = PatternCut(az, now, now[::-1], 1.83e6, 35.0, 900.0, "A")
    assert cut.summary()["null_bearing_deg"] == 90.0
    svg = ET.fromstring(pattern_svg(cut, 90.0))
    ns = "{http://www.w3.org/2000/svg}"
    dot = next(e for e in svg.iter(ns + "circle") if e.get("class") == "nulldot")
    # compass: north up, clockwise, so east is to the right of the centre
    assert float(dot.get("cx")) == pytest.approx(SIZE / 2 + RADIUS, abs=0.1)
    assert float(dot.get("cy")) == pytest.approx(SIZE / 2, abs=0.1)
