"""Discovery: a small hub stand-in that follows the MQTT discovery convention drives the
simulated board with no host program involved.

Convention (source: the MQTT discovery documentation of the open-source Home Assistant
project, "MQTT Discovery" and the select/number/switch entity pages): configs are JSON,
retained, on ``<prefix>/<component>/[<node_id>/]<object_id>/config``; ``command_topic``
receives commands, ``state_topic`` carries the state; a select sends one of ``options``;
a number a value within ``min``..``max``; a switch ``payload_on``/``payload_off`` and
reports ``state_on``/``state_off``; availability is ``payload_available`` on
``availability_topic``; a hub announces a restart with ``online`` on ``<prefix>/status``
and devices then publish their configs again.
"""

from __future__ import annotations

import json
import math
import re

from mqtt_support import MqttSimBoard, Watcher, board_config

PREFIX = "hubtest"
CONFIG_TOPIC = re.compile(r"^%s/(select|number|switch)/([^/]+)/([^/]+)/config$" % PREFIX)
REQUIRED = {"select": ("options",), "number": ("min", "max", "step"),
            "switch": ("payload_on", "payload_off")}


class HubStandIn:
    """Subscribes to the prefix, parses configs, sends commands, reads states."""

    def __init__(self, broker):
        self.w = Watcher(broker.host, broker.port, [PREFIX + "/#", "nullsteer/#"])

    def entities(self, want: int, timeout_s: float = 5.0) -> dict[str, dict]:
        def configs(latest: dict) -> dict[str, dict]:
            found = {}
            for topic, payload in list(latest.items()):
                m = CONFIG_TOPIC.match(topic)
                if m and payload:
                    found[m.group(1) + ":" + m.group(3)] = (topic, json.loads(payload))
            return found

        self.w.wait_until(lambda latest: len(configs(latest)) >= want, timeout_s)
        found = configs(dict(self.w.latest))
        if len(found) < want:
            raise AssertionError(f"only {len(found)} configs arrived")
        for name, (topic, cfg) in found.items():
            for key in ("command_topic", "state_topic", "unique_id", "device",
                        "availability_topic") + REQUIRED[name.split(":")[0]]:
                assert key in cfg, (topic, key)
        return {name: cfg for name, (_, cfg) in found.items()}

    def command(self, cfg: dict, payload: str) -> None:
        self.w.publish(cfg["command_topic"], payload)

    def state(self, cfg: dict, want: str, timeout_s: float = 3.0) -> bytes | None:
        return self.w.wait_for(cfg["state_topic"], want.encode(), timeout_s)


def nearest_by_ratio_independent(table, ohms):
    # smallest |ln(R / R_k)|: "nearest by ratio" as the protocol defines it
    return min(table, key=lambda row: abs(math.log(ohms / row[1])))


def test_hub_stand_in_drives_the_board(make_broker):
    broker = make_broker()
    presets = {"dx-east": {"end": "B", "ohms": 900.0}, "figure8": {"open": True}}
    blk = {"host": broker.host, "port": broker.port, "id": "flag-ne",
           "discovery_prefix": PREFIX, "presets": presets, "end_a_bearing_deg": 65.0}
    table = [tuple(row) for row in board_config()["ladder"]["table"]]
    hub = HubStandIn(broker)
    try:
        with MqttSimBoard(blk) as board:
            ents = hub.entities(4)
            assert set(ents) == {"select:end", "number:ohms", "select:preset", "switch:open"}
            # one device block groups them
            ids = {tuple(e["device"]["identifiers"]) for e in ents.values()}
            assert len(ids) == 1
            avail = ents["select:end"]
            assert hub.w.wait_for(avail["availability_topic"],
                                  avail["payload_available"].encode()) is not None
            num = ents["number:ohms"]
            ohms_values = sorted(r[1] for r in table)
            assert num["min"] == ohms_values[0] and num["max"] == ohms_values[-1]
            gaps = [b - a for a, b in zip(ohms_values, ohms_values[1:]) if b > a]
            assert 0 < num["step"] <= min(gaps)

            # number: a value in range -> the nearest ladder setting by ratio
            hub.command(num, "1500")
            mask, ohms = nearest_by_ratio_independent(table, 1500.0)
            assert hub.state(num, "%.1f" % ohms) is not None
            assert board.state()[1:] == (mask, False)

            # select: the other end (by its label)
            end = ents["select:end"]
            assert len(end["options"]) == 2 and "null 245" in end["options"][0]
            hub.command(end, end["options"][1])
            assert hub.state(end, end["options"][1]) is not None
            assert board.state()[0] == "B"

            # switch: open termination
            sw = ents["switch:open"]
            hub.command(sw, sw["payload_on"])
            assert hub.state(sw, sw["state_on"]) is not None
            assert board.state()[2] is True
            # the state matches the open preset now
            pre = ents["select:preset"]
            assert hub.state(pre, "figure8") is not None

            # select: a preset with ohms
            hub.command(pre, "dx-east")
            assert hub.state(pre, "dx-east") is not None
            mask, _ = nearest_by_ratio_independent(table, 900.0)
            assert board.state() == ("B", mask, False)

            # a value the ladder cannot reach is refused and moves nothing
            before = board.state()
            log = "nullsteer/flag-ne/log"
            hub.w.latest.pop(log, None)
            hub.command(num, "50000")
            # the board says so on its log topic once it has handled the command
            assert hub.w.wait_for(log, timeout_s=3.0) is not None
            assert b"refused" in hub.w.latest[log]
            assert board.state() == before

            # hub restart: configs deleted, then the hub's birth message
            configs = [t for t in hub.w.latest if CONFIG_TOPIC.match(t)]
            for topic in configs:
                hub.w.publish(topic, b"", retain=True)
            # the deletions came back to the hub's own subscription: the broker has them
            assert hub.w.wait_until(lambda latest: all(latest.get(t) == b"" for t in configs), 3.0)
            for topic in configs:
                hub.w.latest.pop(topic)
            hub.w.publish(PREFIX + "/status", b"online")
            assert len(hub.entities(4)) == 4
    finally:
        hub.w.close()
