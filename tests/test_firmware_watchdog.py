"""The board's watchdog, watched: the real firmware under the MicroPython unix port with a
recording watchdog in place of ``machine.WDT``.

Rule checked (common practice for hardware watchdogs, e.g. the MicroPython ``machine.WDT``
documentation: "once started it cannot be stopped ... feed it periodically to prevent it
expiring and resetting the system"): between the watchdog's start and the end of each
scenario, no two consecutive feeds are further apart than the configured timeout, so a
real board would never be reset while it is healthy. Scenarios: normal running with
requests, a long relay sequence (every relay with a long settle time), and
MQTT reconnect storms (a broker port that drops every connection, one that accepts and
never answers, and a real broker restarted under the board).

The timeout used is 2 s: well above the firmware's 100 ms feeding slices, so the machine's
load cannot fake a failure, and well below the relay sequence (several relays × 0.6 s) and the MQTT
client's 5 s connect timeout, so a path that forgets to feed shows.
"""

from __future__ import annotations

import json
import socket
import threading
from pathlib import Path

import pytest
from mqtt_support import MqttSimBoard, Watcher

from nullsteer.board.controller import Controller, FedEnd
from nullsteer.board.links import open_link
from nullsteer.sim import SimBoard

EXAMPLE = Path(__file__).parents[1] / "examples" / "board-sim.json"
TIMEOUT_MS = 2000

#: appended to the simulator's fake machine.py: a WDT that logs its start and each feed
RECORDING_WDT = '''

_wdt_log = open(%r, "ab")


class WDT:
    def __init__(self, id=0, timeout=5000):
        self.timeout = timeout
        _wdt_log.write(b"start %%d %%d\\n" %% (time.ticks_ms(), timeout))

    def feed(self):
        _wdt_log.write(b"feed %%d\\n" %% time.ticks_ms())
'''


class _Recording:
    """Mix-in: the simulated board's machine.py gets the recording watchdog."""

    wdt_log: Path

    def _build_modules(self, board_path: str) -> Path:
        path = super()._build_modules(board_path)  # type: ignore[misc]
        with open(self.module_dir / "machine.py", "a") as f:  # type: ignore[attr-defined]
            f.write(RECORDING_WDT % str(self.wdt_log))
        return path

    def feed_gaps_ms(self) -> tuple[int, list[int]]:
        """(configured timeout, gaps between the start and consecutive feeds) per boot."""
        timeout, gaps, last = None, [], None
        for line in self.wdt_log.read_text().splitlines():
            kind, *vals = line.split()
            if kind == "start":
                timeout, last = int(vals[1]), int(vals[0])
            elif kind == "feed" and last is not None:
                gaps.append(int(vals[0]) - last)
                last = int(vals[0])
        assert timeout is not None, "the firmware never started its watchdog"
        return timeout, gaps


class RecordingSimBoard(_Recording, SimBoard):
    def __init__(self, cfg: dict, wdt_log: Path) -> None:
        self.wdt_log = wdt_log
        super().__init__(cfg)


class RecordingMqttSimBoard(_Recording, MqttSimBoard):
    def __init__(self, block: dict, cfg: dict, wdt_log: Path) -> None:
        self.wdt_log = wdt_log
        super().__init__(block, cfg)


def board_config(settle_ms: int | None = None) -> dict:
    cfg = json.loads(EXAMPLE.read_text())
    cfg["watchdog_ms"] = TIMEOUT_MS
    if settle_ms is not None:
        for relay in cfg["relays"]:
            relay["settle_ms"] = settle_ms
    return cfg


def check_gaps(board: _Recording, min_feeds: int) -> None:
    timeout, gaps = board.feed_gaps_ms()
    assert timeout == TIMEOUT_MS
    assert len(gaps) >= min_feeds
    assert max(gaps) < timeout, f"watchdog starved for {max(gaps)} ms (timeout {timeout} ms)"


def test_normal_running_feeds_the_watchdog(tmp_path):
    with RecordingSimBoard(board_config(), tmp_path / "wdt.log") as board:
        with Controller(open_link(board.url), timeout_s=3.0) as c:
            for mask in (5, 90, 0, 127, 33):
                c.set_state(FedEnd.B if mask % 2 else FedEnd.A, mask, False)
            # idle on the board's own clock for longer than the timeout (its status
            # reports uptime in seconds), then one more change: the relay settle feeds,
            # so a serial loop that forgot to feed shows as one long gap before it
            start = c.status().uptime_s
            pace = threading.Event()          # never set: a paced poll of the board
            while c.status().uptime_s < start + 3:
                pace.wait(0.2)
            c.set_state(FedEnd.A, 1, False)
    # every pass of the serial loop (100 ms) feeds: three idle seconds give dozens
    check_gaps(board, min_feeds=20)


def test_long_relay_sequence_keeps_feeding(tmp_path):
    # every relay settling 600 ms: one change of all the relays it moves (ladder, reverse,
    # open; the protect relay stays) settles for over 3 s, longer than the timeout
    with RecordingSimBoard(board_config(settle_ms=600), tmp_path / "wdt.log") as board:
        with Controller(open_link(board.url), timeout_s=30.0) as c:
            c.set_state(FedEnd.B, 127, True)
    check_gaps(board, min_feeds=25)


class Listener:
    """A loopback TCP port that accepts connections and either drops them at once or
    holds them without a byte (a hung broker); counts the connections it got."""

    def __init__(self, hold: bool) -> None:
        self.sock = socket.socket()
        self.sock.bind(("127.0.0.1", 0))
        self.sock.listen(16)
        self.port = self.sock.getsockname()[1]
        self.hold = hold
        self.held: list[socket.socket] = []
        self.count = 0
        self.cv = threading.Condition()
        self.thread = threading.Thread(target=self._run, daemon=True)
        self.thread.start()

    def _run(self) -> None:
        while True:
            try:
                conn, _ = self.sock.accept()
            except OSError:
                return
            if self.hold:
                self.held.append(conn)
            else:
                conn.close()
            with self.cv:
                self.count += 1
                self.cv.notify_all()

    def wait_connections(self, n: int, timeout_s: float) -> bool:
        with self.cv:
            return self.cv.wait_for(lambda: self.count >= n, timeout_s)

    def close(self) -> None:
        self.sock.close()
        for c in self.held:
            c.close()


@pytest.mark.parametrize("hold", [False, True], ids=["dropping", "silent"])
def test_mqtt_reconnect_storm_keeps_feeding(tmp_path, hold):
    listener = Listener(hold)
    block = {"host": "127.0.0.1", "port": listener.port, "id": "wdt-storm",
             "keepalive_s": 5, "backoff_s": 0.05, "backoff_max_s": 0.2}
    cfg = {**board_config(), "mqtt": block}
    try:
        with RecordingSimBoard(cfg, tmp_path / "wdt.log") as board:
            # the board retries: the silent port holds each try until the client gives up
            # (5 s, the client's connect timeout)
            assert listener.wait_connections(2 if hold else 5, 30.0), board.console()[-400:]
            with Controller(open_link(board.url), timeout_s=3.0) as c:
                c.set_state(FedEnd.B, 12, False)    # the serial link still answers
    finally:
        listener.close()
    check_gaps(board, min_feeds=10)


def test_broker_restarts_keep_feeding(tmp_path, make_broker):
    broker = make_broker()
    block = {"host": broker.host, "port": broker.port, "id": "wdt-restart",
             "keepalive_s": 5, "backoff_s": 0.05, "backoff_max_s": 0.2}
    topic = "nullsteer/wdt-restart/avail"
    with RecordingMqttSimBoard(block, board_config(), tmp_path / "wdt.log") as board:
        for _ in range(2):
            broker.kill()
            broker.start()
            w = Watcher(broker.host, broker.port, [topic])
            try:   # the board is back once its birth message is there again
                assert w.wait_for(topic, b"online", 15.0) is not None, board.console()[-400:]
            finally:
                w.close()
    check_gaps(board, min_feeds=10)
