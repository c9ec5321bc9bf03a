"""``mqtt://`` and ``mqtts://`` — a board reached through an MQTT broker (paho-mqtt 2.x).

URL: ``mqtt://[user[:password]@]host[:port]/<device-id>[?option=value&...]``; ``mqtts://``
is the same over TLS (default port 8883 instead of 1883). Options:

=================== ==================================================================
``base``            topic base (default ``nullsteer``): topics ``<base>/<device-id>/...``
``client_id``       MQTT client id (default: unique per connection, ``nullsteer-host-…``)
``keepalive``       keepalive in seconds (default 30)
``password_env``    read the password from this environment variable instead of the URL
``ca``              CA certificate (PEM) for mqtts (default: the system's CAs)
``cert``, ``key``   client certificate and key (PEM) for brokers that ask for one
``insecure``        ``1``: the host does not check the broker's host name against its
                    certificate; a board bundled for ``mqtts://`` without ``ca`` does
                    not check the broker at all (refused without this option)
``connect_timeout`` seconds to wait for the first connection (default 5)
=================== ==================================================================

Request lines are published to ``<base>/<id>/req`` (QoS 1) and reply lines are read from
``<base>/<id>/rep``; the board's retained ``state`` (JSON) and ``avail`` topics are
followed too (:attr:`MqttLink.state`, :attr:`MqttLink.available`). Topic layout: see
``firmware/mqtt_link.py``.

paho-mqtt 2.x traps handled here: the callback API version is passed explicitly (the 1.x
positional client id raises TypeError); every callback is guarded (an exception would
kill the network thread while ``is_connected()`` still says True); subscriptions are made
in ``on_connect`` (they are lost on reconnect otherwise); publish completion is taken from
``on_publish``, not ``wait_for_publish``; client ids are unique per connection.
After a reconnect the retained state is received again (resync) and reply lines queued
before it are dropped; :attr:`MqttLink.connects` counts connections.

TLS: the first connection is made in :meth:`MqttLink.start` itself, so a broker
certificate that is not accepted (another CA, another name) or a port that does not speak
TLS raises a :class:`LinkError` saying so at once instead of a retry loop ending in a
timeout; a broker that is merely not there yet is retried in the background until
``connect_timeout``. Unreadable ``ca``/``cert``/``key`` files are a ConfigError. Messages
never show the URL's password.
"""

from __future__ import annotations

import json
import logging
import os
import queue
import socket
import ssl
import threading
import time
import uuid
from collections.abc import Callable
from typing import Any
from urllib.parse import unquote, urlsplit, urlunsplit

import paho.mqtt.client as mqtt

from nullsteer.errors import ConfigError, LinkError, redacted
from nullsteer.board.links import query_options

log = logging.getLogger(__name__)

OPTIONS = frozenset({"base", "client_id", "keepalive", "password_env", "ca", "cert", "key",
                     "insecure", "connect_timeout"})


def _guarded(fn: Callable[..., None]) -> Callable[..., None]:
    """Wrap a paho callback so that no exception reaches the network thread."""

    def wrapper(*args: Any) -> None:
        try:
            fn(*args)
        except Exception:  # noqa: BLE001 - the loop thread must survive anything
            log.exception("MQTT callback %s failed", fn.__name__)

    wrapper.__name__ = fn.__name__
    return wrapper


def tls_failure(exc: ssl.SSLError) -> str:
    """One line on why a TLS handshake failed."""
    if isinstance(exc, ssl.SSLCertVerificationError):
        return f"broker certificate not accepted: {exc.verify_message}"
    return f"TLS handshake failed: {exc.reason or exc} (is this a TLS port?)"


def parse_url(url: str) -> dict[str, Any]:
    """Split an mqtt(s) URL into connection settings; bad parts raise ConfigError."""
    shown = redacted(url)  # what messages may show
    parts = urlsplit(url)
    options = query_options(url)
    for key in options:
        if key not in OPTIONS:
            raise ConfigError("--link", f"unknown option {key!r} in {shown!r} "
                                        f"(known: {', '.join(sorted(OPTIONS))})")
    tls = parts.scheme == "mqtts"
    device = parts.path.strip("/")
    if not device or "/" in device or any(c in device for c in "+# "):
        raise ConfigError("--link", f"expected mqtt://host/<device-id>, got {shown!r}")
    if not parts.hostname:
        raise ConfigError("--link", f"no broker host in {shown!r}")
    try:
        port = parts.port or (8883 if tls else 1883)
        keepalive = int(options.get("keepalive", "30"))
        timeout_s = float(options.get("connect_timeout", "5"))
    except ValueError as exc:
        raise ConfigError("--link", f"bad number in {shown!r}: {exc}") from None
    if not 0 < timeout_s <= 600:  # also refuses nan and inf
        raise ConfigError("--link", f"connect_timeout must be > 0 and at most 600 s, got {timeout_s:g}")
    if not 5 <= keepalive <= 3600:
        raise ConfigError("--link", f"keepalive must be 5..3600 s, got {keepalive}")
    password = unquote(parts.password) if parts.password is not None else None
    if "password_env" in options:
        name = options["password_env"]
        if name not in os.environ:
            raise ConfigError("--link", f"environment variable {name} is not set")
        password = os.environ[name]
    base = options.get("base", "nullsteer").strip("/")
    if not base or any(c in base for c in "+# "):
        raise ConfigError("--link", f"bad topic base {base!r}")
    return {"host": parts.hostname, "port": port, "tls": tls, "device": device,
            "user": unquote(parts.username) if parts.username is not None else None,
            "password": password, "base": base, "keepalive": keepalive,
            "connect_timeout_s": timeout_s,
            "client_id": options.get("client_id") or f"nullsteer-host-{uuid.uuid4().hex[:12]}",
            "ca": options.get("ca"), "cert": options.get("cert"), "key": options.get("key"),
            "insecure": options.get("insecure", "0") == "1"}


class MqttLink:
    """A line link to one board through a broker (see the module docstring)."""

    def __init__(self, url: str, settings: dict[str, Any]) -> None:
        self.url = redacted(url)
        self.settings = settings
        self.device_id: str = settings["device"]
        self.topic = f"{settings['base']}/{self.device_id}/"
        self.state: dict[str, Any] | None = None
        self.available: bool | None = None
        self.connects = 0
        self.published = 0
        self.on_state: list[Callable[[dict[str, Any]], None]] = []
        self._lines: queue.Queue[bytes] = queue.Queue()
        self._cv = threading.Condition()
        self._connected = False
        self._refused: str | None = None
        self._sub_mid = -1
        c = mqtt.Client(mqtt.CallbackAPIVersion.VERSION2, client_id=settings["client_id"],
                        protocol=mqtt.MQTTv311, clean_session=True)
        if settings["user"] is not None:
            c.username_pw_set(settings["user"], settings["password"])
        if settings["tls"]:
            try:
                c.tls_set(ca_certs=settings["ca"], certfile=settings["cert"],
                          keyfile=settings["key"], cert_reqs=ssl.CERT_REQUIRED)
            except (OSError, ValueError) as exc:  # ssl.SSLError is an OSError
                files = ", ".join(f"{k}={settings[k]}" for k in ("ca", "cert", "key")
                                  if settings[k])
                raise ConfigError("--link", f"cannot use the TLS files ({files or 'system CAs'})"
                                            f" of {self.url}: {exc}") from None
            c.tls_insecure_set(settings["insecure"])
        c.connect_timeout = settings["connect_timeout_s"]
        c.reconnect_delay_set(min_delay=1, max_delay=8)
        c.on_connect = _guarded(self._on_connect)
        c.on_disconnect = _guarded(self._on_disconnect)
        c.on_message = _guarded(self._on_message)
        c.on_publish = _guarded(self._on_publish)
        c.on_subscribe = _guarded(self._on_subscribe)
        self._client = c

    # --- callbacks (network thread) ----------------------------------------------------
    def _on_connect(self, client: mqtt.Client, userdata: Any, flags: Any, reason: Any,
                    properties: Any) -> None:
        if reason.is_failure:
            with self._cv:
                self._refused = str(reason)
                self._cv.notify_all()
            return
        sock = client.socket()
        if sock is not None and hasattr(sock, "setsockopt"):
            try:  # a request and its reply are a few dozen bytes: send them at once
                sock.setsockopt(socket.IPPROTO_TCP, socket.TCP_NODELAY, 1)
            except OSError:
                pass
        while True:  # replies to requests sent before this connection are stale
            try:
                self._lines.get_nowait()
            except queue.Empty:
                break
        _, mid = client.subscribe([(self.topic + "rep", 1), (self.topic + "state", 1),
                                   (self.topic + "avail", 1)])
        with self._cv:
            self._sub_mid = mid if mid is not None else -1
            self._refused = None

    def _on_subscribe(self, client: mqtt.Client, userdata: Any, mid: int, reasons: Any,
                      properties: Any) -> None:
        # Usable only once the broker confirmed the subscriptions: a request sent before
        # that could be answered on a reply topic nobody listens to yet.
        with self._cv:
            if mid != self._sub_mid:
                return
            self._connected = True
            self.connects += 1
            self._cv.notify_all()
        log.info("%s: connected (%d)", self.url, self.connects)

    def _on_disconnect(self, client: mqtt.Client, userdata: Any, flags: Any, reason: Any,
                       properties: Any) -> None:
        with self._cv:
            self._connected = False
            self._cv.notify_all()
        log.info("%s: disconnected (%s)", self.url, reason)

    def _on_message(self, client: mqtt.Client, userdata: Any, msg: mqtt.MQTTMessage) -> None:
        name = msg.topic[len(self.topic):] if msg.topic.startswith(self.topic) else ""
        if name == "rep":
            line = bytes(msg.payload)
            self._lines.put(line if line.endswith(b"\n") else line + b"\n")
        elif name == "state":
            doc = json.loads(msg.payload.decode())
            if not isinstance(doc, dict):
                raise ValueError("state is not a JSON object")
            with self._cv:
                self.state = doc
                self._cv.notify_all()
            for fn in list(self.on_state):
                fn(doc)
        elif name == "avail":
            with self._cv:
                self.available = msg.payload == b"online"
                self._cv.notify_all()

    def _on_publish(self, client: mqtt.Client, userdata: Any, mid: int, reason: Any,
                    properties: Any) -> None:
        with self._cv:
            self.published += 1
            self._cv.notify_all()

    # --- life cycle ------------------------------------------------------------------
    def start(self) -> MqttLink:
        """Connect (the network thread then reconnects by itself) and wait for CONNACK.

        The first attempt runs here: a TLS failure is final (LinkError at once); a broker
        that refuses or is unreachable is retried in the background until the timeout."""
        s = self.settings
        try:
            self._client.connect(s["host"], s["port"], keepalive=s["keepalive"])
        except ssl.SSLError as exc:  # includes the host name check (check_hostname)
            raise LinkError(f"{self.url}: {tls_failure(exc)}") from None
        except ConnectionResetError as exc:
            if not s["tls"]:
                raise LinkError(f"{self.url}: cannot connect: {exc}") from None
            # dropped during the handshake: what a plain MQTT port does to a ClientHello
            raise LinkError(f"{self.url}: TLS handshake failed: connection reset by the "
                            "broker (is this a TLS port?)") from None
        except TimeoutError:
            raise LinkError(f"{self.url}: no answer within {s['connect_timeout_s']:g} s") \
                from None
        except ValueError as exc:
            raise LinkError(f"{self.url}: cannot connect: {exc}") from None
        except OSError as exc:  # not there (yet): keep trying until the timeout
            log.info("%s: %s; retrying", self.url, exc)
            try:
                self._client.connect_async(s["host"], s["port"], keepalive=s["keepalive"])
            except (OSError, ValueError) as exc2:
                raise LinkError(f"{self.url}: cannot connect: {exc2}") from None
        self._client.loop_start()
        if not self.wait_connected(s["connect_timeout_s"]):
            why = self._refused or f"no connection within {s['connect_timeout_s']:g} s"
            self.close()
            raise LinkError(f"{self.url}: {why}")
        return self

    def wait_connected(self, timeout_s: float) -> bool:
        deadline = time.monotonic() + timeout_s
        with self._cv:
            while not self._connected and self._refused is None:
                left = deadline - time.monotonic()
                if left <= 0:
                    return False
                self._cv.wait(left)
            return self._connected

    def wait_state(self, predicate: Callable[[dict[str, Any]], bool],
                   timeout_s: float) -> dict[str, Any] | None:
        """The board's retained state once ``predicate(state)`` holds, or None on timeout."""
        deadline = time.monotonic() + timeout_s
        with self._cv:
            while self.state is None or not predicate(self.state):
                left = deadline - time.monotonic()
                if left <= 0:
                    return None
                self._cv.wait(left)
            return self.state

    @property
    def connected(self) -> bool:
        return self._connected

    def publish_page_url(self, url: str, timeout_s: float = 2.0) -> bool:
        """Tell the board where the control page is (retained on ``<base>/<id>/page``; an
        empty ``url`` withdraws it); the board puts it in its hub discovery. True once
        the broker has it."""
        with self._cv:
            before = self.published
        self._client.publish(self.topic + "page", url.encode(), qos=1, retain=True)
        deadline = time.monotonic() + timeout_s
        with self._cv:
            while self.published == before:
                left = deadline - time.monotonic()
                if left <= 0:
                    return False
                self._cv.wait(left)
        return True

    # --- Link protocol ---------------------------------------------------------------
    def write_line(self, line: bytes) -> None:
        if not self._connected and not self.wait_connected(self.settings["connect_timeout_s"]):
            raise LinkError(f"{self.url}: not connected to the broker")
        info = self._client.publish(self.topic + "req", line, qos=1)
        if info.rc != mqtt.MQTT_ERR_SUCCESS:
            raise LinkError(f"{self.url}: publish failed ({mqtt.error_string(info.rc)})")

    def read_line(self, timeout_s: float) -> bytes | None:
        try:
            return self._lines.get(timeout=max(0.0, timeout_s))
        except queue.Empty:
            return None

    def close(self) -> None:
        """Disconnect cleanly and stop the network thread (idempotent)."""
        try:
            self._client.disconnect()
        except Exception:  # noqa: BLE001 - closing must not fail
            pass
        self._client.loop_stop()
        self._connected = False


def open_url(url: str, **_: object) -> MqttLink:
    """Open ``url`` (see the module docstring) and wait until the broker accepted us."""
    return MqttLink(url, parse_url(url)).start()
