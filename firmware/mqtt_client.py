"""A compact, non-blocking MQTT 3.1.1 client for the board (MicroPython and CPython).

Why our own client: the small MicroPython MQTT clients published on PyPI use an old
upload format that pip cannot install, and the board package index is not reachable from
every machine that builds this project, so a fresh checkout could not fetch one. The
subset the board needs (OASIS MQTT 3.1.1: CONNECT with will and credentials, PUBLISH
QoS 0/1 both ways, SUBSCRIBE, PINGREQ, DISCONNECT) fits in this one file, runs the same
under the MicroPython unix port in tests and on a real board, and never blocks the main
loop for longer than the caller allows.

Use::

    c = MQTTClient("flag-ne-3f2a", "192.0.2.10", user="board", password="...")
    c.set_will("nullsteer/flag-ne/avail", b"offline", retain=True, qos=1)
    c.on_message = handler          # handler(topic: str, payload: bytes, retained: bool)
    c.connect()                     # blocking, bounded by connect_timeout_s
    c.subscribe([("nullsteer/flag-ne/req", 1)])
    while True:
        c.poll(20)                  # waits at most 20 ms; pings; raises OSError when lost

Design notes

* Reads never block: a ``select.poll`` object says whether bytes are waiting; bytes go
  into a buffer and whole packets are taken out of it (fixed header + "remaining length"
  varint, MQTT 3.1.1 §2.2.3). Writes use the socket in blocking mode with a timeout:
  packets are small and a stuck write means the connection is lost anyway.
* Keepalive (§3.1.2.10): a PINGREQ goes out when nothing was sent for half the keepalive
  period; if no packet at all arrives within the keepalive period after a PINGREQ, the
  connection is declared lost (OSError). A broker drops a silent client after 1.5 x
  keepalive, so pinging at half of it keeps a margin.
* QoS 1 PUBLISH received: the PUBACK is sent before the handler runs (at-least-once;
  the board's commands are absolute, so a duplicate is harmless). QoS 1 PUBLISH sent:
  the packet id is kept until its PUBACK; :attr:`unacked` counts them. Sessions are
  clean (the board re-subscribes and republishes its state after every connect), so
  nothing is retransmitted across connections.
* TLS: pass an ``ssl`` context (MicroPython: ``ssl.SSLContext(ssl.PROTOCOL_TLS_CLIENT)``
  with ``load_verify_locations(cadata=<CA in DER>)``; MicroPython wants DER, not PEM).
  The broker's name is checked against its certificate (``server_hostname``, default
  ``host``). MicroPython's TLS reports a refused certificate as ``ValueError`` (checked on
  the unix port, mbedTLS 3.6): it is raised here as :class:`TLSError`, an ``OSError``, so
  the caller's reconnect loop treats it like any other failed connection. A TLS socket
  that holds decrypted bytes not yet read shows as readable to ``select.poll`` on
  MicroPython; on CPython :meth:`MQTTClient._fill` asks ``pending()``.
* Bounded memory: a packet longer than :data:`MAX_PACKET` is never buffered. Its bytes
  are thrown away as they arrive (a QoS 1 PUBLISH still gets its PUBACK, so the broker's
  in-flight window does not fill up) and :attr:`MQTTClient.dropped` counts it; a PUBLISH
  whose topic or length fields do not add up, or that the handler cannot take, is
  dropped and counted the same way. The connection stays up: only a broken stream (a
  remaining length of more than four bytes, §2.2.3) ends it.
* Errors: every failure of the connection raises ``OSError``; a refused CONNECT raises
  :class:`MQTTError` (a subclass) with the CONNACK return code (§3.2.2.3).
"""

try:
    from typing import TYPE_CHECKING
except ImportError:  # MicroPython
    TYPE_CHECKING = False
if TYPE_CHECKING:
    from typing import Any

import select
import socket
import time

CONNECT = 0x10
CONNACK = 0x20
PUBLISH = 0x30
PUBACK = 0x40
SUBSCRIBE = 0x82
SUBACK = 0x90
PINGREQ = 0xC0
PINGRESP = 0xD0
DISCONNECT = 0xE0

MAX_PACKET = 4096  # largest packet the board keeps; bigger ones are discarded and counted

#: CONNACK return codes, MQTT 3.1.1 §3.2.2.3
CONNACK_TEXT = {
    1: "unacceptable protocol version",
    2: "client identifier rejected",
    3: "server unavailable",
    4: "bad user name or password",
    5: "not authorised",
}


class MQTTError(OSError):
    """The broker refused the connection; ``code`` is the CONNACK return code."""

    def __init__(self, code: int) -> None:
        super().__init__("connection refused: %s (code %d)"
                         % (CONNACK_TEXT.get(code, "unknown"), code))
        self.code = code


class TLSError(OSError):
    """The TLS handshake failed (certificate not trusted, wrong name, not a TLS port)."""


def _ticks_ms() -> int:
    f = getattr(time, "ticks_ms", None)
    if f is not None:
        return f()
    return int(time.monotonic() * 1000)  # type: ignore[attr-defined]  # CPython only


def _ticks_diff(a: int, b: int) -> int:
    f = getattr(time, "ticks_diff", None)
    if f is not None:
        return f(a, b)
    return a - b


def encode_length(n: int) -> bytes:
    """The "remaining length" varint of MQTT 3.1.1 §2.2.3 (0..268 435 455)."""
    if n < 0 or n > 268435455:
        raise ValueError("remaining length out of range")
    out = bytearray()
    while True:
        byte = n % 128
        n //= 128
        if n:
            byte |= 0x80
        out.append(byte)
        if not n:
            return bytes(out)


def decode_length(buf: "Any", start: int) -> "tuple[int, int]":
    """(length, header bytes used) of the varint at ``buf[start:]``; (-1, 0) if incomplete.

    Raises ValueError for a varint longer than four bytes (malformed, §2.2.3)."""
    value = 0
    mult = 1
    for i in range(4):
        if start + i >= len(buf):
            return -1, 0
        byte = buf[start + i]
        value += (byte & 0x7F) * mult
        if not byte & 0x80:
            return value, i + 1
        mult *= 128
    raise ValueError("malformed remaining length")


def _str(data: "Any") -> bytes:
    if isinstance(data, str):
        data = data.encode()
    return bytes((len(data) >> 8, len(data) & 0xFF)) + data


def packet(kind: int, body: bytes) -> bytes:
    """A whole control packet: first byte, remaining length, body."""
    return bytes((kind,)) + encode_length(len(body)) + body


def connect_packet(client_id: str, keepalive_s: int, clean: bool = True,
                   user: "str | None" = None, password: "str | None" = None,
                   will: "tuple | None" = None) -> bytes:
    """CONNECT (§3.1). ``will`` is (topic, payload bytes, retain, qos) or None."""
    flags = 0x02 if clean else 0
    payload = _str(client_id)
    if will is not None:
        topic, msg, retain, qos = will
        flags |= 0x04 | (qos << 3) | (0x20 if retain else 0)
        payload += _str(topic) + _str(msg)
    if user is not None:
        flags |= 0x80
        payload += _str(user)
        if password is not None:
            flags |= 0x40
            payload += _str(password)
    head = _str("MQTT") + bytes((4, flags, keepalive_s >> 8, keepalive_s & 0xFF))
    return packet(CONNECT, head + payload)


def publish_head(topic: str, payload_len: int, retain: bool = False, qos: int = 0,
                 pid: int = 0, dup: bool = False) -> bytes:
    """PUBLISH (§3.3) up to its payload: fixed header, topic and (qos 1) packet id. The
    payload follows as it is, so a large message is never copied into a second buffer
    (a board's heap is small and fragments)."""
    first = PUBLISH | (qos << 1) | (1 if retain else 0) | (0x08 if dup else 0)
    var = _str(topic)
    if qos:
        var += bytes((pid >> 8, pid & 0xFF))
    return bytes((first,)) + encode_length(len(var) + payload_len) + var


def publish_packet(topic: str, payload: bytes, retain: bool = False, qos: int = 0,
                   pid: int = 0, dup: bool = False) -> bytes:
    """PUBLISH (§3.3) whole; ``pid`` is used only with qos 1."""
    return publish_head(topic, len(payload), retain, qos, pid, dup) + payload


def subscribe_packet(pid: int, topics: "list") -> bytes:
    """SUBSCRIBE (§3.8) for (topic filter, max qos) pairs."""
    body = bytes((pid >> 8, pid & 0xFF))
    for topic, qos in topics:
        body += _str(topic) + bytes((qos,))
    return packet(SUBSCRIBE, body)


def _no_delay(sock: "Any") -> None:
    """Send small packets at once (TCP_NODELAY): an MQTT command and its reply are a few
    dozen bytes each, and Nagle's algorithm against delayed ACKs would hold each one
    back by tens of milliseconds. Ports without the option keep the default."""
    try:
        sock.setsockopt(getattr(socket, "IPPROTO_TCP", 6), getattr(socket, "TCP_NODELAY", 1), 1)
    except (OSError, AttributeError, TypeError):
        pass


class MQTTClient:
    """One connection to a broker.

    Parameters
    ----------
    client_id : str
        Unique per connection to the broker (two clients with one id knock each other off).
    host : str
        Broker host name or address.
    port : int
        Broker port (1883 plain, 8883 TLS by convention).
    user, password : str or None
        Credentials, sent in CONNECT.
    keepalive_s : int
        Keepalive period in seconds (0 turns pinging off).
    ssl_context : object or None
        An ``ssl.SSLContext`` to wrap the socket in TLS; None for plain TCP.
    server_hostname : str or None
        Name checked against the broker certificate (default ``host``).
    connect_timeout_s : float
        Bound on the TCP/TLS set-up and on the wait for CONNACK, seconds.

    ``idle`` (attribute, default None): called between the 100 ms slices of the wait for
    CONNACK, so a board feeds its watchdog while a hung broker keeps it waiting.
    """

    def __init__(self, client_id: str, host: str, port: int = 1883,
                 user: "str | None" = None, password: "str | None" = None,
                 keepalive_s: int = 30, ssl_context: "Any" = None,
                 server_hostname: "str | None" = None,
                 connect_timeout_s: float = 5.0) -> None:
        self.client_id = client_id
        self.host = host
        self.port = port
        self.user = user
        self.password = password
        self.keepalive_s = keepalive_s
        self.ssl_context = ssl_context
        self.server_hostname = server_hostname or host
        self.connect_timeout_s = connect_timeout_s
        self.will = None  # type: tuple | None
        self.on_message = None  # type: Any
        self.sock = None  # type: Any
        self.poller = None  # type: Any
        self.buf = bytearray()
        self.pid = 0
        self.unacked = {}  # type: dict[int, int]
        self.suback = {}  # type: dict[int, bytes]
        self.last_tx_ms = 0
        self.last_rx_ms = 0
        self.ping_out_ms = -1
        self.connected = False
        self.dropped = 0  # oversize or malformed messages thrown away
        self.skip = None  # type: Any  # the oversize packet being discarded (see _discard)
        self.idle = None  # type: Any

    # --- set-up ----------------------------------------------------------------------
    def set_will(self, topic: str, payload: bytes, retain: bool = False, qos: int = 0) -> None:
        """The last will the broker publishes if this client vanishes (§3.1.2.5)."""
        self.will = (topic, payload, retain, qos)

    def connect(self, clean: bool = True) -> bool:
        """Open the connection and wait for CONNACK; returns the session-present flag."""
        self.close()
        info = socket.getaddrinfo(self.host, self.port, 0, socket.SOCK_STREAM)[0]
        raw = socket.socket(info[0], socket.SOCK_STREAM)
        _no_delay(raw)
        try:
            raw.settimeout(self.connect_timeout_s)
            raw.connect(info[-1])
            sock = raw
            if self.ssl_context is not None:
                sock = self._wrap(raw)
            self.sock = sock
            self.poller = select.poll()
            self.poller.register(sock, select.POLLIN)
            self.buf = bytearray()
            self.skip = None
            self.unacked = {}
            self._send(connect_packet(self.client_id, self.keepalive_s, clean,
                                      self.user, self.password, self.will))
            deadline = _ticks_ms() + int(self.connect_timeout_s * 1000)
            while True:
                pkt = self._take()
                if pkt is not None:
                    break
                left = _ticks_diff(deadline, _ticks_ms())
                if left <= 0:
                    raise OSError("no CONNACK within %s s" % self.connect_timeout_s)
                self._fill(min(left, 100))
                if self.idle is not None:
                    self.idle()
            kind, body = pkt
            if kind & 0xF0 != CONNACK or len(body) != 2:
                raise OSError("expected CONNACK")
            if body[1] != 0:
                raise MQTTError(body[1])
        except Exception:
            self.close()
            try:
                raw.close()  # harmless when the TLS socket (closed above) owned it
            except OSError:
                pass
            raise
        self.connected = True
        self.last_rx_ms = _ticks_ms()
        self.ping_out_ms = -1
        return bool(body[0] & 1)

    def _wrap(self, raw: "Any") -> "Any":
        """The TLS socket over ``raw``, handshake done; failures raise TLSError."""
        try:
            return self.ssl_context.wrap_socket(raw, server_hostname=self.server_hostname)
        except OSError as exc:
            raise TLSError("TLS handshake failed: %s" % (exc,))
        except ValueError as exc:  # MicroPython: certificate refused (mbedTLS text)
            raise TLSError("TLS handshake failed: %s" % (str(exc).strip(),))

    def close(self) -> None:
        """Drop the socket without DISCONNECT (the broker then publishes the will)."""
        self.connected = False
        if self.sock is not None:
            try:
                self.sock.close()
            except OSError:
                pass
        self.sock = None
        self.poller = None

    def disconnect(self) -> None:
        """Send DISCONNECT (the broker discards the will) and close."""
        if self.sock is not None:
            try:
                self._send(packet(DISCONNECT, b""))
            except OSError:
                pass
        self.close()

    # --- sending ---------------------------------------------------------------------
    def _send(self, data: bytes) -> None:
        if self.sock is None:
            raise OSError("not connected")
        view = memoryview(data)
        write = getattr(self.sock, "write", None) or self.sock.send  # MicroPython / CPython
        sent = 0
        while sent < len(data):
            n = write(view[sent:])
            if n is None or n <= 0:
                raise OSError("write failed")
            sent += n
        self.last_tx_ms = _ticks_ms()

    def _next_pid(self) -> int:
        self.pid = self.pid % 65535 + 1
        return self.pid

    def publish(self, topic: str, payload: "Any", retain: bool = False, qos: int = 0) -> int:
        """Send a message; returns the packet id (0 for qos 0)."""
        if isinstance(payload, str):
            payload = payload.encode()
        pid = self._next_pid() if qos else 0
        self._send(publish_head(topic, len(payload), retain, qos, pid))
        self._send(payload)
        if qos:
            self.unacked[pid] = _ticks_ms()
        return pid

    def subscribe(self, topics: "list") -> int:
        """Subscribe to (topic filter, qos) pairs; the SUBACK is read by :meth:`poll`."""
        pid = self._next_pid()
        self._send(subscribe_packet(pid, topics))
        return pid

    def ping(self) -> None:
        self._send(packet(PINGREQ, b""))
        self.ping_out_ms = _ticks_ms()

    # --- receiving -------------------------------------------------------------------
    def _fill(self, timeout_ms: int) -> bool:
        """Read what is waiting (waiting at most ``timeout_ms``); True if bytes came."""
        if self.poller is None:
            raise OSError("not connected")
        pending = getattr(self.sock, "pending", None)  # CPython TLS: bytes already decrypted
        events = [(self.sock, select.POLLIN)] if pending is not None and pending() else \
            self.poller.poll(max(0, timeout_ms))
        if not events:
            return False
        for _obj, ev in events:
            if ev & (select.POLLERR | select.POLLHUP) and not ev & select.POLLIN:
                raise OSError("connection closed by the broker")
        recv = getattr(self.sock, "recv", None)  # a TLS socket on MicroPython has only read
        data = recv(1024) if recv is not None else self.sock.read(1024)
        if not data:
            raise OSError("connection closed by the broker")
        self.buf.extend(data)
        self.last_rx_ms = _ticks_ms()
        self.ping_out_ms = -1  # anything from the broker shows the link is alive
        return True

    def _take(self) -> "tuple | None":
        """The next whole packet from the buffer as (first byte, body), or None."""
        if self.skip is not None and not self._discard():
            return None
        if len(self.buf) < 2:
            return None
        length, used = decode_length(self.buf, 1)
        if length < 0:
            return None
        if length > MAX_PACKET:
            # too big to keep: discard its body as it arrives, remembering only what a
            # QoS 1 PUBLISH needs for its PUBACK: [kind, bytes left, position, topic
            # length, packet id bytes]
            self.dropped += 1
            self.skip = [self.buf[0], length, 0, -1, bytearray()]
            self.buf = self.buf[1 + used:]
            if not self._discard():
                return None
            return self._take()
        end = 1 + used + length
        if len(self.buf) < end:
            return None
        kind = self.buf[0]
        body = bytes(self.buf[1 + used:end])
        self.buf = self.buf[end:]
        return kind, body

    def _discard(self) -> bool:
        """Throw away buffered bytes of the oversize packet; True once it is all gone."""
        kind, left, pos, tlen, pid = self.skip
        qos = (kind >> 1) & 3 if kind & 0xF0 == PUBLISH else 0
        buf = self.buf
        i = 0
        while left and i < len(buf):
            if pos < 2:  # topic length, MSB first (§3.3.2.1)
                tlen = tlen * 256 + buf[i] if pos else buf[i]
                n = 1
            elif qos and 2 + tlen <= pos < 4 + tlen:
                pid.append(buf[i])
                n = 1
            else:
                stop = 2 + tlen if qos and pos < 2 + tlen else pos + left
                n = min(len(buf) - i, left, stop - pos)
            i += n
            pos += n
            left -= n
        self.buf = buf[i:]
        if left:
            self.skip = [kind, left, pos, tlen, pid]
            return False
        self.skip = None
        if qos and len(pid) == 2:
            self._send(packet(PUBACK, bytes(pid)))
        return True

    def _dispatch(self, kind: int, body: bytes) -> None:
        ptype = kind & 0xF0
        if ptype == PUBLISH:
            qos = (kind >> 1) & 3
            tlen = (body[0] << 8) | body[1] if len(body) >= 2 else len(body)
            at = 2 + tlen
            if at + (2 if qos else 0) > len(body):
                self.dropped += 1  # the lengths do not add up: nothing to answer
                return
            if qos:
                pid = body[at:at + 2]
                at += 2
                self._send(packet(PUBACK, pid))
            try:
                topic = body[2:2 + tlen].decode()
            except UnicodeError:  # §1.5.3: topics are UTF-8
                self.dropped += 1
                return
            if self.on_message is not None:
                try:
                    self.on_message(topic, body[at:], bool(kind & 1))
                except OSError:
                    raise  # the connection itself failed (e.g. while replying)
                except Exception:  # a message the handler cannot take: drop it, go on
                    self.dropped += 1
        elif ptype == PUBACK and len(body) == 2:
            self.unacked.pop((body[0] << 8) | body[1], None)
        elif ptype == SUBACK and len(body) >= 3:
            self.suback[(body[0] << 8) | body[1]] = body[2:]
            if len(self.suback) > 8:
                self.suback.pop(next(iter(self.suback)))
        elif ptype == PINGRESP:
            pass
        # anything else (PUBREC... for qos 2 we never ask for) is ignored

    def poll(self, timeout_ms: int = 0) -> int:
        """Handle incoming packets, waiting at most ``timeout_ms``; keep the link alive.

        Returns the number of packets handled. Raises OSError when the connection is lost
        (closed by the broker, or no answer to a ping within the keepalive period)."""
        if not self.connected:
            raise OSError("not connected")
        try:
            handled = 0
            wait = timeout_ms
            while True:
                pkt = self._take()
                while pkt is not None:
                    self._dispatch(pkt[0], pkt[1])
                    handled += 1
                    pkt = self._take()
                if not self._fill(wait):
                    break
                wait = 0
            self._keepalive()
            return handled
        except Exception:
            self.close()
            raise

    def _keepalive(self) -> None:
        if not self.keepalive_s:
            return
        now = _ticks_ms()
        period_ms = self.keepalive_s * 1000
        if self.ping_out_ms >= 0:
            if _ticks_diff(now, self.ping_out_ms) > period_ms:
                raise OSError("broker did not answer a ping within %d s" % self.keepalive_s)
        if self.ping_out_ms < 0 and _ticks_diff(now, self.last_tx_ms) >= period_ms // 2:
            self.ping()
