"""Simulated board (real firmware under MicroPython) <-> real mosquitto <-> host link.

Relay positions are read from the simulator's pin log (what the coils did), not from
what the board says about itself. The broker behaviour relied on is that of MQTT 3.1.1
(OASIS Standard, 2014): the last will published when a client drops without DISCONNECT
(§3.1.2.5), retained messages kept and sent to new subscribers (§3.3.1.3), QoS 1
delivery (§4.3.2), and CONNACK return code 5, not authorised, for a wrong password
(§3.2.2.3); mosquitto implements it.
"""

from __future__ import annotations

import json
import time

import pytest
from mqtt_support import MqttSimBoard, Watcher

from nullsteer.board.controller import Controller, FedEnd
from nullsteer.errors import LinkError
from nullsteer.board.links import open_link

DEV = "flag-ne"
T = f"nullsteer/{DEV}/"


def block(broker, **extra):
    out = {"host": broker.host, "port": broker.port, "id": DEV, "keepalive_s": 5,
           "backoff_s": 0.1, "backoff_max_s": 1.0}
    out.update(extra)
    return out


def test_set_and_status_through_the_broker(make_broker):
    broker = make_broker()
    with MqttSimBoard(block(broker)) as board:
        link = open_link(broker.url(DEV))
        with Controller(link, timeout_s=2.0) as c:
            assert c.info().bits == 7
            after = c.set_state(FedEnd.B, 37, False)
            # the relays really moved (pin log of the simulator)
            assert board.state() == ("B", 37, False)
            assert after.state.mask == 37 and after.changed is True
            assert c.status().state == after.state
            # retained state follows (JSON on <base>/<id>/state)
            state = link.wait_state(lambda s: s["mask"] == 37, 3.0)
            assert state is not None and state["end"] == "B" and state["open"] is False
            assert link.available is True


def test_retained_state_survives_a_broker_restart(make_broker):
    # mosquitto keeps retained messages across a restart only with persistence
    # (mosquitto.conf(5), "persistence"); the broker is stopped cleanly (SIGTERM).
    broker = make_broker(persistence=True)
    with MqttSimBoard(block(broker)) as board:
        link = open_link(broker.url(DEV))
        with Controller(link, timeout_s=2.0) as c:
            c.set_state(FedEnd.B, 21, True)
            # the board answers first and publishes its retained state after: the
            # broker must hold the new state before the board is cut off
            assert link.wait_state(lambda s: s["mask"] == 21, 3.0) is not None
        board.kill()
    broker.restart()
    w = Watcher(broker.host, broker.port, [T + "state", T + "avail"])
    try:
        raw = w.wait_for(T + "state", timeout_s=3.0)
        assert raw is not None
        doc = json.loads(raw)
        assert (doc["end"], doc["mask"], doc["open"]) == ("B", 21, True)
        assert w.wait_for(T + "avail", timeout_s=3.0) == b"offline"  # will of the killed board
    finally:
        w.close()


def test_board_reconnects_and_resyncs_within_5_s(make_broker):
    broker = make_broker()
    with MqttSimBoard(block(broker)) as board:
        link = open_link(broker.url(DEV))
        c = Controller(link, timeout_s=2.0)
        try:
            c.set_state(FedEnd.A, 9, False)
            assert link.wait_state(lambda s: s["mask"] == 9, 3.0)
            broker.stop()
            time.sleep(1.5)
            broker.start()
            t0 = time.monotonic()
            w = Watcher(broker.host, broker.port, [T + "avail", T + "state"])
            try:
                assert w.wait_for(T + "avail", b"online", timeout_s=5.0) == b"online"
                took = time.monotonic() - t0
                assert took < 5.0
                # the board re-subscribed: a request after the outage is answered, and
                # the host link resynced its retained state after its own reconnect
                assert link.wait_connected(5.0)
                after = c.set_state(FedEnd.B, 10, False)
                assert after.state.mask == 10 and board.state() == ("B", 10, False)
                assert link.connects >= 2
                assert link.wait_state(lambda s: s["mask"] == 10, 3.0)
            finally:
                w.close()
        finally:
            c.close()


def test_last_will_on_a_killed_board(make_broker):
    broker = make_broker()
    w = Watcher(broker.host, broker.port, [T + "avail"])
    try:
        with MqttSimBoard(block(broker)) as board:
            assert w.wait_for(T + "avail", b"online", timeout_s=5.0) == b"online"
            board.kill()  # a power cut: no DISCONNECT, the broker sends the will
            assert w.wait_for(T + "avail", b"offline", timeout_s=8.0) == b"offline"
    finally:
        w.close()


def test_a_wrong_password_is_refused_and_moves_nothing(make_broker):
    broker = make_broker(users={"board": "board-pw", "host": "host-pw"})
    with MqttSimBoard(block(broker, user="board", password="board-pw")) as board:
        before = board.state()
        with pytest.raises(LinkError):
            open_link(broker.url(DEV, "host", "wrong-pw", connect_timeout="3"))
        assert board.state() == before
        # the right password works (so the refusal above was about the password)
        with Controller(open_link(broker.url(DEV, "host", "host-pw")), timeout_s=2.0) as c:
            c.set_state(FedEnd.B, 3, False)
        assert board.state() == ("B", 3, False)


def test_acl_keeps_other_clients_off_the_device_topics(make_broker):
    # mosquitto.conf(5) acl_file: a publish the ACL denies is dropped by the broker
    acl = ("user board\ntopic readwrite nullsteer/flag-ne/#\ntopic readwrite homeassistant/#\n"
           "user host\ntopic readwrite nullsteer/flag-ne/#\n"
           "user other\ntopic readwrite nullsteer/other/#\n")
    users = {"board": "b-pw", "host": "h-pw", "other": "o-pw"}
    broker = make_broker(users=users, acl=acl)
    with MqttSimBoard(block(broker, user="board", password="b-pw")) as board:
        before = board.state()
        intruder = Watcher(broker.host, broker.port, [T + "#"], user="other", password="o-pw")
        try:
            assert intruder.connected.wait(3.0)
            sent = [intruder.publish(T + "req", b"NS1 7 SET end=B mask=99 open=1 *0000\n"),
                    intruder.publish(T + "ohms/set", b"2000"),
                    intruder.publish(T + "end/set", b"B" if before[0] == "A" else b"A")]
            # the broker acknowledged each one (QoS 1 PUBACK, MQTT 3.1.1 §4.3.2) and has
            # decided about it: denied by the ACL, it was never forwarded to the board
            for info in sent:
                info.wait_for_publish(3.0)
                assert info.is_published()
            # a request from the host afterwards reaches the board after anything the
            # broker forwarded before it (one connection, in order): once it is answered,
            # the board has seen all it will ever see of the intruder's messages
            with Controller(open_link(broker.url(DEV, "host", "h-pw")), timeout_s=3.0) as c:
                c.status()
            assert board.state() == before
        finally:
            intruder.close()


def test_unsigned_and_replayed_frames_move_no_relay(make_broker):
    key = bytes(range(32))
    broker = make_broker()
    with MqttSimBoard(block(broker, key_hex=key.hex())) as board:
        spy = Watcher(broker.host, broker.port, [T + "req", T + "rep"])
        link = open_link(broker.url(DEV))
        try:
            plain = Controller(link, timeout_s=2.0, retries=0)  # no key: unsigned frames
            from nullsteer.errors import BoardError
            before = board.state()
            with pytest.raises(BoardError) as err:
                plain.request("SET", (("end", "B"), ("mask", 77), ("open", 0)))
            assert err.value.code == "AUTH"
            assert board.state() == before
            signed = Controller(link, timeout_s=2.0, retries=0, key=key)
            signed.request("SET", (("end", "B"), ("mask", 5), ("open", 0)))
            captured = spy.wait_for(T + "req", timeout_s=2.0)
            assert captured is not None and b" sig=" in captured
            for mask in (6, 7, 8, 9, 11):  # push the captured frame out of the retry cache
                signed.request("SET", (("end", "A"), ("mask", mask), ("open", 0)))
                time.sleep(1.05 if mask == 6 else 0)  # a later ts than the captured frame
            assert board.state() == ("A", 11, False)
            spy.publish(T + "req", captured)  # replay of an accepted frame
            rep = None
            deadline = time.monotonic() + 3.0
            while time.monotonic() < deadline:
                rep = spy.latest.get(T + "rep", b"")
                if b" ERR " in rep:
                    break
                time.sleep(0.05)
            assert rep is not None and b"code=REPLAY" in rep
            assert board.state() == ("A", 11, False)
        finally:
            spy.close()
            link.close()
