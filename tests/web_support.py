"""Helpers for the control-page tests: a station on a loopback board, a served page, and
a small HTTP client that speaks the API the way the page does."""

from __future__ import annotations

import json
import re
import threading
import http.client
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from nullsteer.board.controller import Controller
from nullsteer.board.devices import Device
from nullsteer.board.links import open_link
from nullsteer.web.desk import Desk
from nullsteer.web.server import PageServer

REPO = Path(__file__).resolve().parents[1]
EXAMPLE = REPO / "examples" / "station.toml"
BOARD = REPO / "examples" / "board-sim.json"


def board_table() -> list[tuple[int, float]]:
    """The demo board's ladder table as its board config file lists it."""
    return [(int(m), float(r)) for m, r in json.loads(BOARD.read_text())["ladder"]["table"]]


def station_file(folder: Path, link: str | None = None, state: Path | None = None) -> Path:
    """The example station with its device on ``link`` (default: a ``loop://`` board)."""
    text = EXAMPLE.read_text()
    if link is None:
        state = state or folder / "board-state"
        state.mkdir(exist_ok=True)
        link = f"loop://?board={BOARD}&state={state}"
    text = re.sub(r'^link = "[^"]*".*$', f'link = "{link}"', text, count=1, flags=re.M)
    text = text.replace('board = "board-sim.json"', f'board = "{BOARD}"')
    path = folder / "station.toml"
    path.write_text(text)
    return path


@dataclass
class CountingOpener:
    """Opens each device's link and records every line written to the board."""

    written: list[bytes] = field(default_factory=list)

    def __call__(self, device: Device) -> Controller:
        link = open_link(device.link, board_config=str(device.board_config))
        original = link.write_line

        def write_line(line: bytes) -> None:
            self.written.append(line)
            original(line)

        link.write_line = write_line  # type: ignore[method-assign]
        return Controller(link, timeout_s=device.timeout_s, retries=device.retries)

    def sets(self) -> list[bytes]:
        return [w for w in self.written if b" SET " in w]


class Client:
    """The page's side of the API: JSON bodies and the request header the page sends."""

    def __init__(self, server: PageServer, token: str | None = None) -> None:
        self.host, self.port = server.server_address[:2]
        self.token = token

    def call(self, method: str, path: str, body: Any = None,
             headers: dict[str, str] | None = None) -> tuple[int, Any]:
        conn = http.client.HTTPConnection(self.host, self.port, timeout=30)
        h = {"Host": f"{self.host}:{self.port}"}
        if self.token:
            h["Authorization"] = f"Bearer {self.token}"
        data = None
        if method == "POST":
            h.update({"Content-Type": "application/json", "X-Nullsteer-Request": "1"})
            data = body if isinstance(body, (bytes, str)) else json.dumps(body or {})
        h.update(headers or {})
        conn.request(method, path, body=data, headers={k: v for k, v in h.items() if v})
        res = conn.getresponse()
        raw = res.read()
        conn.close()
        ctype = res.getheader("Content-Type", "")
        return res.status, (json.loads(raw) if "json" in ctype else raw)

    def get(self, path: str, **kw: Any) -> tuple[int, Any]:
        return self.call("GET", path, **kw)

    def post(self, path: str, body: Any = None, **kw: Any) -> tuple[int, Any]:
        return self.call("POST", path, body, **kw)


class EventReader:
    """Follows ``/api/events`` in a thread; ``wait(pred)`` returns the first matching event."""

    def __init__(self, server: PageServer) -> None:
        host, port = server.server_address[:2]
        self.conn = http.client.HTTPConnection(host, port, timeout=30)
        self.conn.request("GET", "/api/events", headers={"Host": f"{host}:{port}"})
        self.res = self.conn.getresponse()
        self.events: list[tuple[str, Any]] = []
        self.cv = threading.Condition()
        threading.Thread(target=self._read, daemon=True).start()

    def _read(self) -> None:
        name = None
        try:
            while True:
                line = self.res.fp.readline()
                if not line:
                    return
                text = line.decode().rstrip("\n")
                if text.startswith("event: "):
                    name = text[7:]
                elif text.startswith("data: ") and name:
                    with self.cv:
                        self.events.append((name, json.loads(text[6:])))
                        self.cv.notify_all()
        except (OSError, ValueError):
            return

    def wait(self, pred: Any, timeout_s: float = 10.0, start: int = 0) -> tuple[str, Any] | None:
        import time

        deadline = time.monotonic() + timeout_s
        with self.cv:
            while True:
                for ev in self.events[start:]:
                    if pred(*ev):
                        return ev
                left = deadline - time.monotonic()
                if left <= 0:
                    return None
                self.cv.wait(left)

    def close(self) -> None:
        import socket

        sock = getattr(getattr(self.res.fp, "raw", None), "_sock", None)
        if isinstance(sock, socket.socket):
            try:
                sock.shutdown(socket.SHUT_RDWR)
            except OSError:
                pass
        self.res.close()
        self.conn.close()


def serve(station: Path, opener: Any = None, token: str | None = None,
          poll_s: float = 0.3) -> tuple[Desk, PageServer]:
    """A desk and a page server on a free loopback port, both started."""
    kwargs = {"opener": opener} if opener is not None else {}
    desk = Desk(station, poll_s=poll_s, **kwargs)
    server = PageServer(("127.0.0.1", 0), desk, token)
    desk.page_url = server.url
    desk.start()
    server.start()
    return desk, server


def stop(desk: Desk, server: PageServer) -> None:
    server.stop()
    desk.stop()
