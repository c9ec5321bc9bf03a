"""The HTTP side of ``nullsteer serve``: the page, the JSON API under ``/api/``, events.

Built on the standard library (``http.server.ThreadingHTTPServer``, one thread per
request; live updates as server-sent events on ``GET /api/events``): no dependency to
install or keep up to date on a shack PC, and a handful of pages on a local network is
far below what it handles.

Safety:

* it binds to a loopback address unless told otherwise; any other address needs a token
  (:func:`check_listen`). With a token, a request is let in by the header
  ``Authorization: Bearer TOKEN`` or by the cookie set when the page is opened once as
  ``/?token=TOKEN`` (HttpOnly, SameSite=Strict); tokens are compared in constant time and
  never printed;
* without a token, the ``Host`` header must name a loopback host (a page on another
  site cannot reach the service through DNS rebinding);
* every request that changes state is a ``POST`` with a JSON body, the header
  ``X-Nullsteer-Request: 1`` (a custom header: a page from another origin cannot send it
  without a CORS preflight, which this service never grants) and, when the browser sends
  an ``Origin``, the service's own origin;
* bodies are small (4 KiB), checked key by key; a bad one gets ``400`` with one line
  naming the key, and nothing reaches a board.

Status codes: 400 bad input, 401 no or wrong token, 403 a failed request check, 404
unknown path or device, 409 the board refused or is busy, 502 the board did not answer.
"""

from __future__ import annotations

import hmac
import ipaddress
import json
import logging
import math
import queue
import threading
from http import HTTPStatus
from http.cookies import SimpleCookie
from http.server import BaseHTTPRequestHandler, ThreadingHTTPServer
from importlib import resources
from typing import Any
from urllib.parse import parse_qs, urlsplit

from nullsteer.board.commands import Wish
from nullsteer.errors import BoardError, ConfigError, LinkError, NullsteerError
from nullsteer.station.bearing import FedEnd
from nullsteer.web.desk import Busy, Desk, UnknownDevice

log = logging.getLogger("nullsteer.web")

MAX_BODY = 4096
COOKIE = "nullsteer_token"
REQUEST_HEADER = "X-Nullsteer-Request"
STATIC = {"index.html": "text/html; charset=utf-8", "style.css": "text/css; charset=utf-8",
          "app.js": "text/javascript; charset=utf-8"}
KEEPALIVE_S = 15.0
_SET_KEYS = frozenset({"fed_end", "null_bearing_deg", "mask", "ohms", "open", "short"})
_PRESET_KEYS = frozenset({"name", "freq_mhz"})
_AUTONULL_KEYS = frozenset({"freq_mhz", "fed_end", "null_bearing_deg", "save_preset"})


class HttpError(Exception):
    """An answer other than 200, with its one-line reason."""

    def __init__(self, status: HTTPStatus, reason: str) -> None:
        super().__init__(reason)
        self.status = status
        self.reason = reason


def is_loopback(host: str) -> bool:
    if host == "localhost":
        return True
    try:
        return ipaddress.ip_address(host.strip("[]")).is_loopback
    except ValueError:
        return False


def parse_listen(text: str) -> tuple[str, int]:
    """``HOST:PORT`` (``[::1]:PORT`` for IPv6) -> (host, port); ConfigError otherwise."""
    host, sep, port = text.rpartition(":")
    if not sep or not host:
        raise ConfigError("--listen", f"expected HOST:PORT such as 127.0.0.1:8765, got {text!r}")
    try:
        number = int(port)
    except ValueError:
        raise ConfigError("--listen", f"port must be a number, got {port!r}") from None
    if not 0 <= number <= 65535:
        raise ConfigError("--listen", f"port must be 0..65535, got {number}")
    return host.strip("[]"), number


def check_listen(host: str, token: str | None) -> None:
    """Refuse a non-loopback address without a token."""
    if not is_loopback(host) and token is None:
        raise ConfigError("--listen", f"{host} is reachable from other machines: give "
                                      "--token-file FILE (or listen on 127.0.0.1)")


def read_token(path: str) -> str:
    """The token in ``path`` (first line; at least 16 characters)."""
    try:
        text = open(path, encoding="utf-8").read().strip()
    except OSError as exc:
        raise ConfigError("--token-file", f"cannot read {path}: {exc.strerror}") from None
    if len(text) < 16 or any(c.isspace() for c in text):
        raise ConfigError("--token-file", "the token must be one word of at least 16 "
                                          "characters")
    return text


# -- request bodies -------------------------------------------------------------------
def _check_keys(body: dict[str, Any], allowed: frozenset[str]) -> None:
    for key in body:
        if key not in allowed:
            raise ConfigError(key, f"unknown key (expected one of: {', '.join(sorted(allowed))})")


def _number(body: dict[str, Any], key: str) -> float | None:
    value = body.get(key)
    if value is None:
        return None
    if isinstance(value, bool) or not isinstance(value, (int, float)) or \
            not math.isfinite(value):
        raise ConfigError(key, f"must be a number, got {json.dumps(value)}")
    return float(value)


def _flag(body: dict[str, Any], key: str) -> bool | None:
    value = body.get(key)
    if value is not None and not isinstance(value, bool):
        raise ConfigError(key, f"must be true or false, got {json.dumps(value)}")
    return value


def _end(body: dict[str, Any], key: str = "fed_end") -> FedEnd | None:
    value = body.get(key)
    if value is None:
        return None
    if not isinstance(value, str):
        raise ConfigError(key, f"must be \"A\" or \"B\", got {json.dumps(value)}")
    return FedEnd.parse(value, key)


def wish_from_body(body: dict[str, Any]) -> Wish:
    """The ``POST .../set`` body as a :class:`Wish` (types checked, nothing sent)."""
    _check_keys(body, _SET_KEYS)
    mask = body.get("mask")
    if mask is not None and (isinstance(mask, bool) or not isinstance(mask, int)):
        raise ConfigError("mask", f"must be a whole number, got {json.dumps(mask)}")
    open_ = _flag(body, "open")
    if open_ is False:
        raise ConfigError("open", "say true to open; to close, give ohms or mask")
    ohms = _number(body, "ohms")
    if ohms is not None and not ohms > 0:
        raise ConfigError("ohms", f"must be > 0, got {ohms:g}")
    return Wish(fed_end=_end(body), null_bearing_deg=_number(body, "null_bearing_deg"),
                mask=mask, ohms=ohms, open=bool(open_), short=_flag(body, "short"))


# -- the handler ----------------------------------------------------------------------
class Handler(BaseHTTPRequestHandler):
    """One request. ``server`` is a :class:`PageServer`."""

    server: PageServer
    server_version = "nullsteer"
    sys_version = ""

    def log_message(self, format: str, *args: Any) -> None:  # noqa: A002 - stdlib's name
        log.debug("%s %s", self.address_string(), format % args)

    # plumbing
    def _send(self, status: HTTPStatus, body: bytes, ctype: str,
              headers: dict[str, str] | None = None) -> None:
        self.send_response(status)
        self.send_header("Content-Type", ctype)
        self.send_header("Content-Length", str(len(body)))
        self.send_header("Cache-Control", "no-store")
        self.send_header("X-Content-Type-Options", "nosniff")
        self.send_header("X-Frame-Options", "DENY")
        self.send_header("Referrer-Policy", "no-referrer")
        self.send_header("Content-Security-Policy",
                         "default-src 'self'; img-src 'self' data:; style-src 'self'; "
                         "frame-ancestors 'none'")
        for k, v in (headers or {}).items():
            self.send_header(k, v)
        self.end_headers()
        if self.command != "HEAD":
            self.wfile.write(body)

    def _json(self, obj: Any, status: HTTPStatus = HTTPStatus.OK) -> None:
        body = json.dumps(obj, allow_nan=False).encode()
        self._send(status, body, "application/json")

    def _fail(self, err: HttpError) -> None:
        self._json({"error": err.reason}, err.status)

    def _token_ok(self) -> bool:
        token = self.server.token
        if token is None:
            return True
        auth = self.headers.get("Authorization", "")
        if auth.startswith("Bearer ") and hmac.compare_digest(auth[7:].strip(), token):
            return True
        cookie = SimpleCookie(self.headers.get("Cookie", ""))
        got = cookie.get(COOKIE)
        return got is not None and hmac.compare_digest(got.value, token)

    def _check_host(self) -> None:
        if self.server.token is not None:
            return
        host = (self.headers.get("Host") or "").strip()
        name = host.rsplit(":", 1)[0] if not host.endswith("]") else host
        if not is_loopback(name.strip("[]")):
            raise HttpError(HTTPStatus.FORBIDDEN, f"host {host!r} is not this service's "
                                                  "loopback address")

    def _check_post(self) -> dict[str, Any]:
        if self.headers.get(REQUEST_HEADER) != "1":
            raise HttpError(HTTPStatus.FORBIDDEN, f"missing header {REQUEST_HEADER}: 1")
        origin = self.headers.get("Origin")
        if origin is not None and origin != f"http://{self.headers.get('Host', '')}":
            raise HttpError(HTTPStatus.FORBIDDEN, f"origin {origin!r} is not this service")
        ctype = (self.headers.get("Content-Type") or "").split(";")[0].strip()
        if ctype != "application/json":
            raise HttpError(HTTPStatus.BAD_REQUEST, "body must be application/json")
        try:
            length = int(self.headers.get("Content-Length", "0"))
        except ValueError:
            raise HttpError(HTTPStatus.BAD_REQUEST, "bad Content-Length") from None
        if not 0 <= length <= MAX_BODY:
            raise HttpError(HTTPStatus.BAD_REQUEST, f"body larger than {MAX_BODY} bytes")
        raw = self.rfile.read(length) if length else b"{}"
        try:
            body = json.loads(raw or b"{}")
        except ValueError:
            raise HttpError(HTTPStatus.BAD_REQUEST, "body is not JSON") from None
        if not isinstance(body, dict):
            raise HttpError(HTTPStatus.BAD_REQUEST, "body must be a JSON object")
        return body

    def _guard(self, fn: Any, *args: Any) -> None:
        """Run a route; map the package's errors to status codes with one-line reasons."""
        try:
            self._check_host()
            fn(*args)
        except HttpError as err:
            self._fail(err)
        except UnknownDevice as exc:
            self._fail(HttpError(HTTPStatus.NOT_FOUND, str(exc)))
        except ConfigError as exc:
            self._fail(HttpError(HTTPStatus.BAD_REQUEST, str(exc)))
        except (Busy, BoardError) as exc:
            self._fail(HttpError(HTTPStatus.CONFLICT, str(exc)))
        except LinkError as exc:
            self._fail(HttpError(HTTPStatus.BAD_GATEWAY, str(exc)))
        except NullsteerError as exc:
            self._fail(HttpError(HTTPStatus.CONFLICT, str(exc)))
        except (BrokenPipeError, ConnectionResetError):
            pass

    # routes
    def do_GET(self) -> None:
        self._guard(self._get)

    def do_HEAD(self) -> None:
        self._guard(self._get)

    def do_POST(self) -> None:
        self._guard(self._post)

    def _get(self) -> None:
        url = urlsplit(self.path)
        query = parse_qs(url.query)
        parts = [p for p in url.path.split("/") if p]
        if not parts and "token" in query and self.server.token is not None:
            given = query["token"][0]
            if not hmac.compare_digest(given, self.server.token):
                raise HttpError(HTTPStatus.UNAUTHORIZED, "wrong token")
            self._send(HTTPStatus.SEE_OTHER, b"", "text/plain", {
                "Location": "/",
                "Set-Cookie": f"{COOKIE}={given}; HttpOnly; SameSite=Strict; Path=/"})
            return
        if not self._token_ok():
            raise HttpError(HTTPStatus.UNAUTHORIZED,
                            "token needed: open the page once as /?token=TOKEN")
        if not parts or parts == ["index.html"]:
            return self._static("index.html")
        if parts[0] == "static" and len(parts) == 2:
            return self._static(parts[1])
        if parts[0] != "api":
            raise HttpError(HTTPStatus.NOT_FOUND, f"no page {url.path}")
        desk = self.server.desk
        if parts == ["api", "station"]:
            return self._json(desk.station_json())
        if parts == ["api", "events"]:
            return self._events()
        if len(parts) >= 3 and parts[1] == "devices":
            dev = parts[2]
            if len(parts) == 3:
                return self._json(desk.device_json(dev))
            if parts[3:] == ["pattern"]:
                freq = None
                if "freq_mhz" in query:
                    try:
                        freq = desk.check_freq(float(query["freq_mhz"][0]))
                    except ValueError:
                        raise ConfigError("freq_mhz", "must be a number of MHz") from None
                return self._json(desk.pattern(dev, freq))
            if parts[3:] == ["schedule"]:
                return self._json({"device": dev, "next": desk.next_actions(dev)})
            if parts[3:] == ["autonull"]:
                return self._json({"device": dev, "run": desk.device(dev).autonull})
        raise HttpError(HTTPStatus.NOT_FOUND, f"no API path {url.path}")

    def _post(self) -> None:
        if not self._token_ok():
            raise HttpError(HTTPStatus.UNAUTHORIZED, "token needed")
        body = self._check_post()
        parts = [p for p in urlsplit(self.path).path.split("/") if p]
        desk = self.server.desk
        if len(parts) != 4 or parts[:2] != ["api", "devices"]:
            raise HttpError(HTTPStatus.NOT_FOUND, f"no API path {self.path}")
        dev, verb = parts[2], parts[3]
        desk.device(dev)
        if verb == "flip":
            _check_keys(body, frozenset())
            return self._json(desk.flip(dev))
        if verb == "preset":
            _check_keys(body, _PRESET_KEYS)
            name = body.get("name")
            if not isinstance(name, str) or not name:
                raise ConfigError("name", "the preset's name is required")
            freq = body.get("freq_mhz")
            return self._json(desk.preset(dev, name, None if freq is None
                                          else desk.check_freq(freq)))
        if verb == "set":
            return self._json(desk.set(dev, wish_from_body(body)))
        if verb == "autonull":
            _check_keys(body, _AUTONULL_KEYS)
            if "freq_mhz" not in body:
                raise ConfigError("freq_mhz", "is required")
            if "fed_end" in body and "null_bearing_deg" in body:
                raise ConfigError("null_bearing_deg", "give either fed_end or null_bearing_deg")
            bearing = _number(body, "null_bearing_deg")
            if bearing is not None and not 0 <= bearing <= 360:
                raise ConfigError("null_bearing_deg", f"must be 0..360 degrees, got {bearing:g}")
            save = body.get("save_preset")
            if save is not None and not isinstance(save, str):
                raise ConfigError("save_preset", "must be a name")
            started = desk.start_autonull(dev, desk.check_freq(body["freq_mhz"]), _end(body),
                                          bearing, save or None)
            return self._json(started, HTTPStatus.ACCEPTED)
        raise HttpError(HTTPStatus.NOT_FOUND, f"no command {verb!r} (flip, preset, set, "
                                              "autonull)")

    def _static(self, name: str) -> None:
        if name not in STATIC:
            raise HttpError(HTTPStatus.NOT_FOUND, f"no file {name}")
        data = resources.files("nullsteer.web").joinpath("static", name).read_bytes()
        self._send(HTTPStatus.OK, data, STATIC[name])

    def _events(self) -> None:
        """Server-sent events: ``station`` and every ``device`` first, then changes."""
        desk = self.server.desk
        q = desk.events.subscribe()
        try:
            self.send_response(HTTPStatus.OK)
            self.send_header("Content-Type", "text/event-stream")
            self.send_header("Cache-Control", "no-store")
            self.send_header("X-Accel-Buffering", "no")
            self.end_headers()
            self._event("station", desk.station_json())
            for dd in desk.devices.values():
                if dd.snapshot is not None:
                    self._event("device", dd.snapshot)
            while not self.server.stopping.is_set():
                try:
                    item = q.get(timeout=KEEPALIVE_S)
                except queue.Empty:
                    self.wfile.write(b": keep-alive\n\n")
                    self.wfile.flush()
                    continue
                if item is None:
                    return
                self._event(*item)
        except (BrokenPipeError, ConnectionResetError, OSError):
            return
        finally:
            desk.events.unsubscribe(q)

    def _event(self, name: str, data: Any) -> None:
        payload = json.dumps(data, allow_nan=False, separators=(",", ":"))
        self.wfile.write(f"event: {name}\ndata: {payload}\n\n".encode())
        self.wfile.flush()


class PageServer(ThreadingHTTPServer):
    """The HTTP server with its :class:`Desk` and optional token."""

    daemon_threads = True
    allow_reuse_address = True

    def __init__(self, address: tuple[str, int], desk: Desk, token: str | None = None) -> None:
        check_listen(address[0], token)
        if ":" in address[0]:
            import socket

            self.address_family = socket.AF_INET6
        super().__init__(address, Handler)
        self.desk = desk
        self.token = token
        self.stopping = threading.Event()
        self._thread: threading.Thread | None = None

    @property
    def url(self) -> str:
        host, port = self.server_address[:2]
        name = host.decode() if isinstance(host, bytes) else str(host)
        shown = f"[{name}]" if ":" in name else name
        return f"http://{shown}:{port}/"

    def start(self) -> PageServer:
        """Serve in a background thread (tests, benchmarks)."""
        self._thread = threading.Thread(target=self.serve_forever, daemon=True,
                                        name="nullsteer-http")
        self._thread.start()
        return self

    def stop(self) -> None:
        self.stopping.set()
        self.desk.events.close()
        self.shutdown()
        self.server_close()
