"""Helpers for the MQTT tests: a simulated board that speaks MQTT, and a raw test client.

:class:`MqttSimBoard` is the simulator's :class:`~nullsteer.sim.SimBoard` (the real
firmware under the MicroPython unix port, fake pins) with an ``"mqtt"`` block added to
its board config; the firmware's ``hw.run`` then serves MQTT beside the serial pty and
the simulator copies ``discovery.py`` next to ``wire.py``.
"""

from __future__ import annotations

import json
import queue
import threading
import time
from pathlib import Path
from typing import Any

import paho.mqtt.client as mqtt

from nullsteer.sim import SimBoard

REPO = Path(__file__).resolve().parents[1]
BOARD_JSON = REPO / "examples" / "board-sim.json"


def board_config() -> dict[str, Any]:
    return json.loads(BOARD_JSON.read_text())


class MqttSimBoard(SimBoard):
    """A simulated board with an MQTT link.

    Parameters
    ----------
    mqtt_block : dict
        The board config's ``"mqtt"`` block (see firmware/mqtt_link.py).
    board : dict, optional
        Board config without the block (default: examples/board-sim.json).
    """

    def __init__(self, mqtt_block: dict[str, Any], board: dict[str, Any] | None = None,
                 state_dir: Any = None) -> None:
        self.mqtt_block = dict(mqtt_block)
        super().__init__({**(board or board_config()), "mqtt": self.mqtt_block},
                         state_dir=state_dir)

    def start(self, timeout_s: float = 10.0) -> MqttSimBoard:
        """Boot, then wait until the board is on the broker (its birth ``online``: it
        publishes that after subscribing, so requests from then on are heard)."""
        super().start(timeout_s)
        m = self.mqtt_block
        topic = f"{m.get('base', 'nullsteer')}/{m['id']}/avail"
        w = Watcher(m["host"], m["port"], [topic], m.get("user"), m.get("password"))
        try:
            if w.wait_for(topic, b"online", timeout_s) is None:
                raise RuntimeError("the simulated board did not come online: "
                                   + self.console()[-500:])
        finally:
            w.close()
        return self


class Watcher:
    """A plain paho client that records every message on the filters it follows."""

    def __init__(self, host: str, port: int, filters: list[str], user: str | None = None,
                 password: str | None = None, client_id: str | None = None) -> None:
        import uuid

        self.messages: queue.Queue[tuple[str, bytes, bool]] = queue.Queue()
        self.latest: dict[str, bytes] = {}
        self._cv = threading.Condition()
        self.connected = threading.Event()
        self.refused: Any = None
        c = mqtt.Client(mqtt.CallbackAPIVersion.VERSION2,
                        client_id=client_id or f"watcher-{uuid.uuid4().hex[:10]}")
        if user is not None:
            c.username_pw_set(user, password)

        def on_connect(client: Any, userdata: Any, flags: Any, reason: Any, props: Any) -> None:
            try:
                if reason.is_failure:
                    self.refused = reason
                    return
                client.subscribe([(f, 1) for f in filters])
                self.connected.set()
            except Exception:  # noqa: BLE001 - keep the network thread alive
                pass

        def on_message(client: Any, userdata: Any, msg: Any) -> None:
            try:
                with self._cv:
                    self.latest[msg.topic] = bytes(msg.payload)
                    self.messages.put((msg.topic, bytes(msg.payload), bool(msg.retain)))
                    self._cv.notify_all()
            except Exception:  # noqa: BLE001
                pass

        c.on_connect = on_connect
        c.on_message = on_message
        c.connect(host, port, keepalive=30)
        c.loop_start()
        self.client = c

    def wait_for(self, topic: str, payload: bytes | None = None,
                 timeout_s: float = 5.0) -> bytes | None:
        """The latest payload of ``topic`` once it is ``payload`` (any if None)."""
        deadline = time.monotonic() + timeout_s
        with self._cv:
            while True:
                got = self.latest.get(topic)
                if got is not None and (payload is None or got == payload):
                    return got
                left = deadline - time.monotonic()
                if left <= 0:
                    return None
                self._cv.wait(left)

    def wait_until(self, predicate: Any, timeout_s: float = 5.0) -> bool:
        """Wait (on message arrival, no polling) until ``predicate(latest)`` is true."""
        with self._cv:
            return self._cv.wait_for(lambda: predicate(self.latest), timeout_s)

    def publish(self, topic: str, payload: bytes | str, retain: bool = False) -> Any:
        """Publish with QoS 1; returns paho's MQTTMessageInfo (``wait_for_publish`` waits
        for the broker's PUBACK, MQTT 3.1.1 §4.3.2)."""
        return self.client.publish(topic, payload, qos=1, retain=retain)

    def close(self) -> None:
        self.client.disconnect()
        self.client.loop_stop()
