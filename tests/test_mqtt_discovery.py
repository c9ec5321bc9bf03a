"""Discovery: a small hub stand-in that follows the MQTT discovery convention drives the
simulated board with no host program involved; the payloads are checked key by key.

Convention (source: the MQTT discovery documentation of the open-source Home Assistant
project, "MQTT Discovery" — device-based discovery, the origin block, removing entities —
and the select/number/switch/button/sensor entity pages; full key names as documented,
not the abbreviations): configs are JSON, retained; the device-based form is one config on
``<prefix>/device/<object_id>/config`` holding ``device``, ``origin`` (required in this
form, with its ``name``) and ``components`` (each with ``platform`` and, in this form,
``unique_id``); options outside ``components`` (availability, ``qos``) are shared by all
components. A component published with only its ``platform`` is removed; an empty
retained payload removes a per-entity config
(``<prefix>/<component>/[<node_id>/]<object_id>/config``). ``command_topic`` receives
commands, ``state_topic`` carries the state; a select sends one of ``options``; a number
a value within ``min``..``max``; a switch ``payload_on``/``payload_off`` and reports
``state_on``/``state_off``; a button sends ``payload_press`` (default ``PRESS``); a
diagnostic entity has ``entity_category: diagnostic``; a ``duration`` sensor has a time
unit; a hub announces a restart with ``online`` on ``<prefix>/status`` and devices then
publish again after a short random delay. Where these are from memory of that
documentation, the test says so.
"""

from __future__ import annotations

import json
import math
import time

from mqtt_support import MqttSimBoard, Watcher, board_config
from nullsteer.protocol import discovery

PREFIX = "hubtest"

#: Keys the convention documents for the device-based config (top level).
TOP_KEYS = {"device", "origin", "components", "availability_topic", "payload_available",
            "payload_not_available", "qos"}
DEVICE_KEYS = {"identifiers", "name", "model", "sw_version", "manufacturer",
               "configuration_url"}
ORIGIN_KEYS = {"name", "sw_version", "support_url"}
#: Per platform: keys that must be there, and the keys documented for it (subset check).
COMMON = {"platform", "name", "unique_id", "icon", "entity_category"}
SCHEMA = {
    "select": ({"command_topic", "options"}, COMMON | {"state_topic", "command_topic", "options"}),
    "number": ({"command_topic"}, COMMON | {"state_topic", "command_topic", "min", "max", "step",
                                            "mode", "unit_of_measurement"}),
    "switch": ({"command_topic"}, COMMON | {"state_topic", "command_topic", "payload_on",
                                            "payload_off", "state_on", "state_off"}),
    "button": ({"command_topic"}, COMMON | {"command_topic", "payload_press"}),
    "sensor": ({"state_topic"}, COMMON | {"state_topic", "value_template", "device_class",
                                          "unit_of_measurement", "state_class"}),
}


def check_schema(cfg: dict) -> dict[str, dict]:
    """Every key of a device-based config against the documented keys; returns the live
    components (those not reduced to their platform)."""
    assert set(cfg) <= TOP_KEYS, set(cfg) - TOP_KEYS
    assert {"device", "origin", "components"} <= set(cfg)
    assert set(cfg["device"]) <= DEVICE_KEYS and cfg["device"]["identifiers"]
    assert set(cfg["origin"]) <= ORIGIN_KEYS and cfg["origin"]["name"]
    live = {}
    for key, comp in cfg["components"].items():
        required, documented = SCHEMA[comp["platform"]]
        if set(comp) == {"platform"}:
            continue  # retracted (documented removal form)
        assert required <= set(comp), (key, required - set(comp))
        assert set(comp) <= documented, (key, set(comp) - documented)
        assert comp["unique_id"]
        if comp.get("entity_category") is not None:
            assert comp["entity_category"] in ("config", "diagnostic")
        live[key] = comp
    ids = [c["unique_id"] for c in live.values()]
    assert len(ids) == len(set(ids))
    return live


class HubStandIn:
    """Subscribes to the prefix, parses device configs, sends commands, reads states."""

    def __init__(self, broker):
        self.w = Watcher(broker.host, broker.port, [PREFIX + "/#", "nullsteer/#"])

    def config(self, timeout_s: float = 5.0, where=lambda cfg: True) -> dict:
        deadline = time.monotonic() + timeout_s
        while time.monotonic() < deadline:
            for topic, payload in list(self.w.latest.items()):
                if topic.startswith(PREFIX + "/device/") and topic.endswith("/config") and payload:
                    cfg = json.loads(payload)
                    if where(cfg):
                        return cfg
            time.sleep(0.02)
        raise AssertionError("no device config arrived")

    def command(self, cfg: dict, payload: str) -> None:
        self.w.publish(cfg["command_topic"], payload)

    def state(self, cfg: dict, want: str, timeout_s: float = 3.0) -> bytes | None:
        return self.w.wait_for(cfg["state_topic"], want.encode(), timeout_s)


def nearest_by_ratio_independent(table, ohms):
    # smallest |ln(R / R_k)|: "nearest by ratio" as the protocol defines it
    return min(table, key=lambda row: abs(math.log(ohms / row[1])))


def test_payload_keys_follow_the_documented_schema():
    topic, cfg = discovery.device_config(
        "homeassistant", "ns/site1", "flag-ne", "Flag", "0.1.0", "demo-board", ["A", "B"],
        (1000.9, 1944.7, 7.4), ["dx-east"], has_open=True, has_short=False, has_bearing=True,
        page_url="http://192.0.2.10:8765/")
    oid = "nullsteer_ns_site1_flag-ne"
    assert topic == f"homeassistant/device/{oid}/config"  # <prefix>/device/<object_id>/config
    live = check_schema(cfg)
    assert set(live) == {"end", "bearing", "flip", "ohms", "preset", "open", "boots",
                         "firmware", "uptime"}
    assert cfg["components"]["short"] == {"platform": "switch"}  # no shorted state: removed
    assert cfg["device"]["configuration_url"] == "http://192.0.2.10:8765/"
    assert live["flip"]["payload_press"] == "PRESS"
    for key in ("boots", "firmware", "uptime"):
        assert live[key]["entity_category"] == "diagnostic"
    assert live["uptime"]["device_class"] == "duration" and live["uptime"]["unit_of_measurement"] == "s"
    assert all(c["unique_id"].startswith(oid + "_") for c in live.values())
    assert live["bearing"]["min"] == 0 and live["bearing"]["max"] == 359
    # a board without table, open relay or bearing: those components are retracted
    _, bare = discovery.device_config("homeassistant", "nullsteer", "x", "X", "1", "b",
                                      ["A", "B"], None, [], False, True, False)
    live = check_schema(bare)
    assert {"ohms", "open", "bearing", "preset"}.isdisjoint(live) and "short" in live
    assert "configuration_url" not in bare["device"]


def test_two_installations_on_one_broker_never_share_a_unique_id():
    ids = []
    for base in ("nullsteer", "nullsteer/barn"):
        _, cfg = discovery.device_config("homeassistant", base, "flag-ne", "F", "1", "b",
                                         ["A", "B"], (1.0, 2.0, 0.1), ["p"], True)
        ids.append({c["unique_id"] for c in cfg["components"].values() if "unique_id" in c})
    assert ids[0] and ids[0].isdisjoint(ids[1])


def test_hub_stand_in_drives_the_board(make_broker):
    broker = make_broker()
    presets = {"dx-east": {"end": "B", "ohms": 900.0}, "figure8": {"open": True}}
    blk = {"host": broker.host, "port": broker.port, "id": "flag-ne",
           "discovery_prefix": PREFIX, "presets": presets, "end_a_bearing_deg": 65.0,
           "rediscover_max_s": 1.5}
    table = [tuple(row) for row in board_config()["ladder"]["table"]]
    hub = HubStandIn(broker)
    # a per-entity config left by earlier firmware, to be retracted
    legacy = f"{PREFIX}/select/nullsteer_flag-ne/end/config"
    hub.w.publish(legacy, b'{"name": "old"}', retain=True)
    assert hub.w.wait_for(legacy) is not None
    try:
        with MqttSimBoard(blk) as board:
            cfg = hub.config()
            ents = check_schema(cfg)
            assert set(ents) == {"end", "bearing", "flip", "ohms", "preset", "open", "boots",
                                 "firmware", "uptime"}
            assert hub.w.wait_for(legacy, b"", 5.0) == b""  # the empty retained payload
            assert cfg["origin"]["name"] == "nullsteer"
            assert hub.w.wait_for(cfg["availability_topic"],
                                  cfg["payload_available"].encode()) is not None
            num = ents["ohms"]
            ohms_values = sorted(r[1] for r in table)
            assert num["min"] == ohms_values[0] and num["max"] == ohms_values[-1]
            gaps = [b - a for a, b in zip(ohms_values, ohms_values[1:]) if b > a]
            assert 0 < num["step"] <= min(gaps) + 1e-9  # rows carry one decimal

            # number: a value in range -> the nearest ladder setting by ratio
            hub.command(num, "1500")
            mask, ohms = nearest_by_ratio_independent(table, 1500.0)
            assert hub.state(num, "%.1f" % ohms) is not None
            assert board.state()[1:] == (mask, False)

            # select: the other end (by its label)
            end = ents["end"]
            assert len(end["options"]) == 2 and "null 245" in end["options"][0]
            hub.command(end, end["options"][1])
            assert hub.state(end, end["options"][1]) is not None
            assert board.state()[0] == "B"
            # fed B: the null points toward end A, 65 deg (common practice)
            assert hub.state(ents["bearing"], "65") is not None

            # button: flip -> fed A, null toward 245 deg; the termination stays
            hub.command(ents["flip"], ents["flip"]["payload_press"])
            assert hub.state(ents["bearing"], "245") is not None
            assert board.state() == ("A", mask, False)

            # number: a null bearing -> the nearer end (80 deg is 15 off end A's 65)
            hub.command(ents["bearing"], "80")
            assert hub.state(ents["bearing"], "65") is not None and board.state()[0] == "B"

            # switch: open termination
            sw = ents["open"]
            hub.command(sw, sw["payload_on"])
            assert hub.state(sw, sw["state_on"]) is not None
            assert board.state()[2] is True
            pre = ents["preset"]
            assert hub.state(pre, "figure8") is not None

            # select: a preset with ohms
            hub.command(pre, "dx-east")
            assert hub.state(pre, "dx-east") is not None
            mask, _ = nearest_by_ratio_independent(table, 900.0)
            assert board.state() == ("B", mask, False)

            # diagnostics: boots, firmware and uptime from the diag topic
            diag = json.loads(hub.w.wait_for(ents["boots"]["state_topic"]) or b"{}")
            assert diag["boots"] >= 1 and diag["fw"] == cfg["device"]["sw_version"]
            assert isinstance(diag["up_s"], int)

            # a value the ladder cannot reach is refused and moves nothing
            before = board.state()
            hub.command(num, "50000")
            time.sleep(0.5)
            assert board.state() == before

            # hub restart: configs deleted, then the hub's birth message; the board
            # answers after a random delay of 0.5..rediscover_max_s
            topic = f"{PREFIX}/device/{discovery.object_id('nullsteer', 'flag-ne')}/config"
            hub.w.publish(topic, b"", retain=True)
            assert hub.w.wait_for(topic, b"") == b""
            t0 = time.monotonic()
            hub.w.publish(PREFIX + "/status", b"online")
            check_schema(hub.config(timeout_s=5.0))
            waited = time.monotonic() - t0
            assert 0.4 <= waited <= 1.5 + 1.0, waited
    finally:
        hub.w.close()


def test_configuration_url_points_at_the_page_while_serve_runs(make_broker, tmp_path):
    from web_support import serve, station_file, stop

    broker = make_broker()
    blk = {"host": broker.host, "port": broker.port, "id": "flag-ne",
           "discovery_prefix": PREFIX, "end_a_bearing_deg": 65.0}
    hub = HubStandIn(broker)
    try:
        with MqttSimBoard(blk, state_dir=tmp_path / "state"):
            assert "configuration_url" not in hub.config()["device"]
            desk, server = serve(station_file(tmp_path, link=broker.url("flag-ne")))
            try:
                cfg = hub.config(where=lambda c: "configuration_url" in c["device"])
                assert cfg["device"]["configuration_url"] == server.url
            finally:
                stop(desk, server)
            # serve stopped: the link is withdrawn
            cfg = hub.config(where=lambda c: "configuration_url" not in c["device"])
            assert "configuration_url" not in cfg["device"]
    finally:
        hub.w.close()
