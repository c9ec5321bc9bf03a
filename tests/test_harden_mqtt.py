"""Attacks through a real broker on the real firmware (MicroPython unix port).

Relay positions come from the simulator's pin log. Broker behaviour relied on: MQTT 3.1.1
(OASIS Standard, 2014) retained messages sent to every new subscriber (§3.3.1.3), QoS 1
delivery (§4.3.2) and the last will on a dropped connection (§3.1.2.5); mosquitto
implements it. Replay defence: a message authentication code stops forgery but not
replay; replays are refused by a counter (or nonce) the receiver has not seen, kept across
restarts (common practice, e.g. the anti-replay window of RFC 4303 §3.4.3, from memory).
"""

from __future__ import annotations

import json
import time

from mqtt_support import MqttSimBoard, Watcher

from nullsteer.board.controller import Controller, FedEnd
from nullsteer.board.links import open_link
from nullsteer.protocol import wire

DEV = "flag-ne"
T = f"nullsteer/{DEV}/"
KEY = bytes(range(32))


def block(broker, **extra):
    out = {"host": broker.host, "port": broker.port, "id": DEV, "keepalive_s": 5,
           "backoff_s": 0.1, "backoff_max_s": 1.0}
    out.update(extra)
    return out


def wait_reply(spy: Watcher, seq: int, timeout_s: float = 3.0) -> bytes | None:
    deadline = time.monotonic() + timeout_s
    while time.monotonic() < deadline:
        rep = spy.latest.get(T + "rep", b"")
        if rep.startswith(b"NS1 %d " % seq):
            return rep
        time.sleep(0.02)
    return None


def test_a_captured_signed_frame_is_refused_after_a_reboot(make_broker, tmp_path):
    broker = make_broker()
    board = MqttSimBoard(block(broker, key_hex=KEY.hex()), state_dir=tmp_path / "state")
    with board:
        spy = Watcher(broker.host, broker.port, [T + "req", T + "rep"])
        try:
            with Controller(open_link(broker.url(DEV)), timeout_s=2.0, key=KEY) as c:
                c.set_state(FedEnd.B, 5, False)
                captured = None
                while captured is None:  # the SET (set_state reads STATUS after it)
                    topic, payload, _ = spy.messages.get(timeout=2.0)
                    if topic == T + "req" and b" SET " in payload:
                        captured = payload
                c.set_state(FedEnd.A, 11, False)
            assert board.state() == ("A", 11, False)
            board.restart()  # RAM is gone; only the board's files remain
            assert board.state() == ("A", 11, False)
            spy.publish(T + "req", captured)
            seq = wire.decode(captured).seq
            rep = wait_reply(spy, seq)
            assert rep is not None and b"code=REPLAY" in rep
            assert board.state() == ("A", 11, False)  # nothing moved
            # the honest host still gets through after the reboot
            with Controller(open_link(broker.url(DEV)), timeout_s=2.0, key=KEY) as c:
                c.set_state(FedEnd.B, 3, False)
            assert board.state() == ("B", 3, False)
        finally:
            spy.close()


def test_a_frame_from_far_ahead_does_not_lock_out_an_honest_host(make_broker):
    broker = make_broker()
    with MqttSimBoard(block(broker, key_hex=KEY.hex())) as board:
        spy = Watcher(broker.host, broker.port, [T + "rep"])
        try:
            assert spy.connected.wait(3.0)
            # one frame signed with the right key, stamped far ahead of the honest host
            # (a host with a clock 100 s fast, or a counter file from elsewhere)
            ahead = int(time.time()) + 100
            spy.publish(T + "req", wire.sign(9, "PING", (), KEY, ahead))
            rep = wait_reply(spy, 9)
            assert rep is not None and b" OK" in rep
            with Controller(open_link(broker.url(DEV)), timeout_s=2.0, key=KEY) as c:
                after = c.set_state(FedEnd.B, 6, False)
            assert after.state.mask == 6 and board.state() == ("B", 6, False)
        finally:
            spy.close()


def test_an_oversize_retained_request_is_dropped_without_reconnecting(make_broker):
    broker = make_broker()
    w = Watcher(broker.host, broker.port, [T + "avail", T + "state"])
    try:
        with MqttSimBoard(block(broker)) as board:
            assert w.wait_for(T + "avail", b"online", timeout_s=5.0) == b"online"
            while not w.messages.empty():
                w.messages.get_nowait()
            # retained, so the broker sends it again at every (re)connect (§3.3.1.3)
            w.publish(T + "req", b"NS1 1 PING " + b"x" * 5000, retain=True)
            time.sleep(2.5)
            avail = []
            while not w.messages.empty():
                topic, payload, _ = w.messages.get_nowait()
                if topic == T + "avail":
                    avail.append(payload)
            assert b"offline" not in avail, f"{avail.count(b'offline')} reconnects"
            doc = json.loads(w.wait_for(T + "state", timeout_s=1.0))
            assert doc.get("dropped", 0) >= 1  # counted
            # more oversize QoS 1 messages than mosquitto keeps in flight unacknowledged
            # (max_inflight_messages, default 20, mosquitto.conf(5)): each must still be
            # acknowledged (§4.3.2) or the board would hear nothing after them
            for _ in range(30):
                w.publish(T + "req", b"NS1 2 PING " + b"y" * 6000)
            with Controller(open_link(broker.url(DEV)), timeout_s=2.0) as c:
                c.set_state(FedEnd.B, 4, False)  # still answering
            assert board.state() == ("B", 4, False)
            w.publish(T + "req", b"", retain=True)  # clear it
    finally:
        w.close()


def test_bearing_set_refuses_non_finite_numbers(make_broker):
    broker = make_broker()
    with MqttSimBoard(block(broker, end_a_bearing_deg=30.0)) as board:
        with Controller(open_link(broker.url(DEV)), timeout_s=2.0) as c:
            c.set_state(FedEnd.A, 7, False)
        w = Watcher(broker.host, broker.port, [T + "log"])
        try:
            assert w.connected.wait(3.0)
            for text in (b"nan", b"inf", b"-inf", b"1e999", b"1_0"):
                w.publish(T + "bearing/set", text)
            time.sleep(1.0)
            assert board.state() == ("A", 7, False)
            # a finite bearing still works: with end A's null at 210 deg (30 + 180), a
            # wanted 30 deg is nearer end B's null (common practice: the null points
            # toward the terminated end)
            w.publish(T + "bearing/set", b"30")
            deadline = time.monotonic() + 3.0
            while board.state()[0] != "B" and time.monotonic() < deadline:
                time.sleep(0.05)
            assert board.state() == ("B", 7, False)
        finally:
            w.close()


def _guard_parts():
    from nullsteer.sim.firmware import firmware_module
    mqtt_link = firmware_module("mqtt_link")
    import store
    return mqtt_link, store


def test_the_counter_survives_a_reboot_and_costs_few_writes(tmp_path):
    # anti-replay across restarts (RFC 4303 §3.4.3 keeps the window's right edge; a
    # restarted receiver must not accept old numbers, from memory): after a "reboot" (a new
    # guard from the same file) no counter up to the last accepted one is accepted again
    mqtt_link, store = _guard_parts()
    writes = []

    class CountingStore(store.CounterStore):
        def save(self, last):
            writes.append(last)
            super().save(last)

    path = str(tmp_path / "ns_ctr.txt")
    guard = mqtt_link.ReplayGuard(CountingStore(path))
    for ctr in range(1, 201):
        assert guard.check(ctr) is None
        guard.accept(ctr)
    assert guard.check(200) is not None and guard.check(17) is not None
    assert len(writes) <= 4  # reserved ahead: not one flash write per frame
    rebooted = mqtt_link.ReplayGuard(store.CounterStore(path))
    for ctr in (1, 150, 200):
        assert rebooted.check(ctr) is not None
    assert rebooted.check(max(writes) + 1) is None


def test_a_counter_that_cannot_be_saved_refuses_the_frame(tmp_path):
    mqtt_link, store = _guard_parts()

    class BrokenStore(store.CounterStore):
        def save(self, last):
            raise OSError(28, "no space left")

    guard = mqtt_link.ReplayGuard(BrokenStore(str(tmp_path / "c.txt")))
    try:
        guard.accept(5)
        raised = False
    except OSError:
        raised = True
    assert raised and guard.check(5) is None  # not recorded as accepted either
