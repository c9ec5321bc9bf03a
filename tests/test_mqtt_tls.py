"""MQTT over TLS for real: a mosquitto TLS listener with a throw-away CA made at test time,
the real firmware under the MicroPython unix port (its ``ssl`` module, mbedTLS) and the
host's ``mqtts://`` link (paho-mqtt over CPython's ``ssl``, OpenSSL).

Sources relied on:

* mosquitto.conf(5), "Certificate based SSL/TLS Support": a listener with ``cafile``,
  ``certfile`` and ``keyfile`` speaks only TLS;
* RFC 8446 §4.4.2 / RFC 5280 §6 (certificate path validation): a client that trusts only
  one CA refuses a server certificate that CA did not sign;
* RFC 5280 §4.2.1.6: the names a server certificate is valid for are its subjectAltName
  entries; checking them against the name the client connected to is common practice
  (RFC 6125 describes it), so a board told another broker name refuses the connection;
* RFC 8446 §5.1 (record layer): TLS records start with a content-type byte (20..24); a
  plain MQTT CONNECT starts with 0x10, which a TLS server does not accept;
* MQTT 3.1.1 §3.2 (OASIS, 2014): a broker that accepts a CONNECT answers with CONNACK
  (first byte 0x20).

Relay positions come from the simulator's pin log (what the coils did).
"""

from __future__ import annotations

import socket
import sys
import time
from collections.abc import Callable, Iterator
from pathlib import Path
from typing import Any

import pytest
from conftest import Broker, ThrowawayCA, new_ca, unique
from mqtt_support import MqttSimBoard
from nullsteer.board.controller import Controller, FedEnd
from nullsteer.errors import ConfigError, LinkError
from nullsteer.board.links import open_link
from nullsteer.sim import SimBoard

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "firmware"))
import mqtt_client  # firmware module; loads under CPython too


def wait_until(cond: Callable[[], bool], timeout_s: float) -> bool:
    deadline = time.monotonic() + timeout_s
    while time.monotonic() < deadline:
        if cond():
            return True
        time.sleep(0.02)
    return cond()


def tls_block(broker: Broker, device: str, ca_file: Path, **extra: Any) -> dict[str, Any]:
    """The board's "mqtt" block for the TLS broker (firmware/BOARD_CONFIG.md)."""
    out = {"host": broker.host, "port": broker.port, "id": device, "tls": True,
           "ca_file": str(ca_file), "keepalive_s": 5, "backoff_s": 0.1,
           "backoff_max_s": 0.5, "log": True}
    out.update(extra)
    return out


def boot(block: dict[str, Any]) -> MqttSimBoard:
    """Boot a simulated board without waiting for it on the broker: the wait in
    ``MqttSimBoard.start`` listens with a plain-TCP client, which a TLS port refuses."""
    board = MqttSimBoard(block)
    SimBoard.start(board, 10.0)
    return board


def host_url(broker: Broker, device: str, ca: Path, **query: str) -> str:
    return broker.url(device, ca=str(ca), **query)


def relay_moves(board: SimBoard) -> int:
    return len(board.events())


@pytest.fixture(scope="module")
def tls_site(tmp_path_factory: pytest.TempPathFactory) -> Iterator[tuple[Broker, MqttSimBoard]]:
    """A TLS broker and a board on it that trusts the broker's CA (DER ``ca_file``)."""
    broker = Broker(tmp_path_factory.mktemp("tls-broker"), tls=True).start()
    assert broker.tls is not None
    board = boot(tls_block(broker, unique("tls-board"), broker.tls.ca_der))
    try:
        link = open_link(host_url(broker, board.mqtt_block["id"], broker.tls.ca_pem))
        try:
            if not wait_until(lambda: link.available is True, 10.0):
                raise RuntimeError("the board did not come online over TLS: "
                                   + board.console()[-800:])
        finally:
            link.close()
        yield broker, board
    finally:
        board.stop()
        broker.stop()


def test_host_and_board_set_and_status_over_tls(tls_site):
    broker, board = tls_site
    assert broker.tls is not None
    device = board.mqtt_block["id"]
    link = open_link(host_url(broker, device, broker.tls.ca_pem))
    with Controller(link, timeout_s=2.0) as c:
        assert c.info().bits == 7
        after = c.set_state(FedEnd.B, 45, False)
        assert board.state() == ("B", 45, False)  # the coils moved
        assert c.status().state == after.state
        state = link.wait_state(lambda s: s["mask"] == 45, 3.0)
        assert state is not None and state["end"] == "B"
        assert link.available is True
        c.set_state(FedEnd.A, 6, True)
        assert board.state() == ("A", 6, True)


def test_a_host_that_does_not_trust_the_broker_is_refused_and_moves_nothing(
        tls_site, throwaway_ca):
    broker, board = tls_site
    assert broker.tls is not None
    device = board.mqtt_block["id"]
    other: ThrowawayCA = throwaway_ca("not the broker's CA")
    before, moves = board.state(), relay_moves(board)
    with pytest.raises(LinkError) as err:
        open_link(host_url(broker, device, other.pem, connect_timeout="5"))
    text = str(err.value)
    # the reason, not "no connection within 5 s": a refused certificate is final
    assert "broker certificate not accepted" in text, text
    assert board.state() == before and relay_moves(board) == moves
    # the broker's own CA works (so the refusal above was about the CA)
    with Controller(open_link(host_url(broker, device, broker.tls.ca_pem)), timeout_s=2.0) as c:
        c.set_state(FedEnd.B, 17, False)
    assert board.state() == ("B", 17, False)


def test_plain_tcp_to_the_tls_port_gets_no_mqtt(tls_site):
    broker, board = tls_site
    device = board.mqtt_block["id"]
    moves = relay_moves(board)
    # a raw MQTT CONNECT (the board client's own encoder) gets no CONNACK
    with socket.create_connection((broker.host, broker.port), timeout=2.0) as s:
        s.sendall(mqtt_client.connect_packet(unique("plain"), 30))
        try:
            answer = s.recv(64)
        except (ConnectionResetError, TimeoutError):
            answer = b""
    assert not answer.startswith(bytes((mqtt_client.CONNACK,))), answer
    # the host's plain mqtt:// link never gets connected
    plain = f"mqtt://{broker.host}:{broker.port}/{device}?connect_timeout=1"
    with pytest.raises(LinkError):
        open_link(plain)
    assert relay_moves(board) == moves


def test_mqtts_to_a_plain_broker_fails_as_a_tls_error(mqtt_broker, tmp_path):
    ca = new_ca(tmp_path / "ca", "some CA")
    url = f"mqtts://{mqtt_broker.host}:{mqtt_broker.port}/{unique('dev')}?ca={ca.pem}"
    with pytest.raises(LinkError) as err:
        open_link(url)
    assert "TLS" in str(err.value)


def test_a_missing_or_bad_ca_file_is_a_config_error(tmp_path):
    bad = tmp_path / "not-a-cert.pem"
    bad.write_text("hello\n")
    for path in (tmp_path / "missing.pem", bad):
        with pytest.raises(ConfigError) as err:
            open_link(f"mqtts://127.0.0.1:9/dev?ca={path}")
        assert err.value.key == "--link" and str(path) in str(err.value)


@pytest.mark.parametrize("case", ["other CA", "other name", "PEM not DER"])
def test_a_board_that_cannot_trust_the_broker_stays_off_it_and_keeps_serving(
        tls_site, tmp_path, case):
    broker, _ = tls_site
    assert broker.tls is not None
    device = unique("untrusting")
    extra: dict[str, Any] = {}
    if case == "other CA":
        ca_file = new_ca(tmp_path / "other", "not the broker's CA").der
        expect = "signed"  # mbedTLS: "not correctly signed by the trusted CA"
    elif case == "other name":
        ca_file, extra = broker.tls.ca_der, {"server_hostname": "broker.invalid"}
        expect = "does not match"  # mbedTLS: "Common Name (CN) does not match ..."
    else:
        ca_file = broker.tls.ca_pem  # MicroPython's TLS reads DER only (PITFALLS.md)
        expect = "DER"
    board = boot(tls_block(broker, device, ca_file, **extra))
    try:
        link = open_link(host_url(broker, device, broker.tls.ca_pem))
        try:
            # the board retries with backoff (0.1 .. 0.5 s): wait for several tries
            assert wait_until(lambda: board.console().count("connect failed") >= 3, 8.0), \
                board.console()[-800:]
            assert link.available is not True  # no birth "online" from this board
        finally:
            link.close()
        assert board.running(), "a refused certificate must not stop the firmware"
        assert expect in board.console(), board.console()[-800:]
        assert "Traceback" not in board.console()
        # the serial link still works: the board is usable without the broker
        with Controller(open_link(board.url), timeout_s=2.0) as c:
            c.set_state(FedEnd.B, 3, False)
        assert board.state() == ("B", 3, False)
    finally:
        board.stop()


def test_link_errors_do_not_show_the_password(tls_site, throwaway_ca):
    # credentials stay out of messages and logs (common practice)
    broker, _ = tls_site
    url = (f"mqtts://host:s3cret-pw@{broker.host}:{broker.port}/{unique('dev')}"
           f"?ca={throwaway_ca('other').pem}")
    with pytest.raises(LinkError) as err:
        open_link(url)
    assert "s3cret-pw" not in str(err.value) and "host:***@" in str(err.value)
