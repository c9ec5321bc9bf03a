"""The attack run: seeded, bounded fuzz, fault soak, power cuts and MQTT attacks.

    .venv/bin/python tests/attack_suite.py [--smoke] [--seed N] [--json]

``make attack`` runs the full suite and prints its figures; ``tests/test_attack_smoke.py``
runs the smoke scale inside ``make test`` (a few seconds). Every loop is bounded in count
and in time (``--budget-s`` per part); every server binds to 127.0.0.1. The same seed
gives the same attacks.

Parts and what counts as a failure (the rules of firmware/PROTOCOL.md):

``fuzz``     mutated request lines into the firmware's protocol handler under CPython
             (in-process, fake pins) and through the serial pty of the real firmware
             under the MicroPython unix port: a relay move from a line whose check value
             does not match (recomputed with CPython's ``binascii.crc_hqx``, an
             independent CRC-16/CCITT-FALSE), a reply that is not exactly one valid
             frame, or an exception, is a failure.
``soak``     SET commands through the host controller over a link that flips bytes,
             drops and merges lines (lost newline), duplicates requests and damages
             replies: a command that ends in an error, or a board whose relays (pin log)
             differ from the last acknowledged state, is a failure.
``cuts``     power cuts at every step of the state and counter writes (file access that
             dies at step k): a reboot that finds neither the old nor the new state, or a
             frame counter below one already accepted, is a failure.
``mqtt``     the board's MQTT packet reader (firmware/mqtt_client.py under CPython) fed
             broker streams cut into random pieces, with oversize and malformed PUBLISH
             packets: a missing PUBACK for a QoS 1 PUBLISH (MQTT 3.1.1 §4.3.2), a message
             delivered that should not be or the reverse, a buffer beyond the limit, or an
             exception, is a failure. Then the real firmware under MicroPython with a
             signing key, behind a real
             mosquitto: unsigned, wrongly signed, replayed (live and after a reboot),
             bit-flipped, garbage and oversize frames, non-finite hub commands and a frame
             counter far ahead: any relay move (pin log), broker reconnect of the board,
             or an honest host locked out is a failure.
"""

from __future__ import annotations

import argparse
import binascii
import json
import os
import random
import re
import sys
import tempfile
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))

from nullsteer.protocol import wire  # noqa: E402

INTACT = re.compile(rb"^(NS1 [1-9][0-9]{0,4} [A-Z]+(?: [a-z][a-z0-9_]{0,15}=[!-)+-~]{1,200})*)"
                    rb" \*([0-9A-F]{4})\r?\n?$")


@dataclass
class Figures:
    """What one run did and what went wrong."""

    frames: int = 0  # fuzzed lines answered
    commands: int = 0  # soak commands
    faults: int = 0  # faults injected in the soak
    cuts: int = 0  # power cuts
    attacks: int = 0  # MQTT attacks on the running board
    streams: int = 0  # broker streams fed to the board's MQTT packet reader
    packets: int = 0  # PUBLISH packets in them
    failures: list[str] = field(default_factory=list)
    seconds: dict[str, float] = field(default_factory=dict)

    def fail(self, what: str) -> None:
        if len(self.failures) < 50:
            self.failures.append(what)
        else:
            self.failures[-1] = f"... and more (last: {what})"


def intact(line: bytes) -> bool:
    """A well-formed request line whose check value matches (independent CRC)."""
    m = INTACT.match(line)
    return m is not None and binascii.crc_hqx(m.group(1), 0xFFFF) == int(m.group(2), 16)


# --- fuzz -------------------------------------------------------------------------------
def _good_lines(rng: random.Random) -> list[bytes]:
    out = []
    for seq in range(1, 40):
        end = rng.choice("AB")
        out.append(wire.encode(seq, "SET", (("end", end), ("mask", rng.randrange(128)),
                                             ("open", rng.randrange(2)))))
        out.append(wire.encode(seq, "SET", (("end", end), ("ohms", "%.1f" % rng.uniform(600, 3000)),
                                             ("open", 0))))
    out += [wire.encode(7, "STATUS"), wire.encode(8, "TABLE", (("start", 3),)),
            wire.encode(9, "TEST", (("dwell_ms", 0),))]
    return out


def mutate(rng: random.Random, line: bytes, other: bytes) -> bytes:
    """One damaged version of ``line`` (some mutations may leave it intact by chance)."""
    b = bytearray(line)
    kind = rng.randrange(12)
    i = rng.randrange(len(b))
    if kind == 0:
        b[i] ^= 1 << rng.randrange(8)
    elif kind == 1:
        b.insert(i, rng.randrange(256))
    elif kind == 2:
        del b[i]
    elif kind == 3:
        b = b[:i] + b"\n"
    elif kind == 4:  # lost newline: two lines run together
        b = b[:-1] + other
    elif kind == 5:
        b = b[:-6] + b[-6:].lower()
    elif kind == 6:  # digit separators and padding
        b = bytearray(re.sub(rb"=([0-9])", rb"=0\1", bytes(b), count=1))
    elif kind == 7:
        b = bytearray(re.sub(rb"([0-9])([0-9])", rb"\1_\2", bytes(b), count=1))
    elif kind == 8:
        b = b[:-1] + b"x" * rng.randrange(400, 900) + b"\n"
    elif kind == 9:
        b = bytearray(bytes(b).replace(b"NS1", rng.choice([b"NS+1", b"NS01", b"NS2", b"ns1"])))
    elif kind == 10:
        b = bytearray(rng.randrange(256) for _ in range(rng.randrange(1, 80))) + b"\n"
    else:
        for _ in range(rng.randrange(2, 6)):
            b[rng.randrange(len(b))] = rng.randrange(0x20, 0x7F)
    return bytes(b)


def _one_reply(reply: bytes) -> bool:
    if reply.count(b"\n") != 1 or not reply.endswith(b"\n"):
        return False
    try:
        wire.decode_reply(reply)
    except wire.WireError:
        return False
    return True


def _inprocess_board() -> Any:
    """The firmware app in this process, its state files written without ``os.sync``
    (which flushes the whole machine's disks: the cuts part tests the write order)."""
    from nullsteer.sim import DEFAULT_BOARD_CONFIG, InProcessBoard
    board = InProcessBoard(DEFAULT_BOARD_CONFIG, fs=CuttingFs())
    board.boot()
    return board


def fuzz_inprocess(fig: Figures, rng: random.Random, n: int, budget_s: float) -> None:
    board = _inprocess_board()
    good = _good_lines(rng)
    t_end = time.monotonic() + budget_s
    for k in range(n):
        if time.monotonic() > t_end:
            break
        line = mutate(rng, rng.choice(good), rng.choice(good))
        before = len(board.pin_log)
        try:
            reply = board.handle_line(line)
        except Exception as exc:  # noqa: BLE001 - the handler must never raise
            fig.fail(f"fuzz: {type(exc).__name__} {exc} on {line[:60]!r}")
            continue
        fig.frames += 1
        if not _one_reply(reply):
            fig.fail(f"fuzz: bad reply {reply[:60]!r} to {line[:60]!r}")
        if len(board.pin_log) != before and not intact(line):
            fig.fail(f"fuzz: a damaged line moved relays: {line[:80]!r}")


def fuzz_micropython(fig: Figures, rng: random.Random, n: int, budget_s: float) -> None:
    """Through the serial pty of the real firmware under MicroPython."""
    from nullsteer.board.links import open_link
    from nullsteer.sim import DEFAULT_BOARD_CONFIG, SimBoard
    good = _good_lines(rng)
    with SimBoard(DEFAULT_BOARD_CONFIG) as board:
        link = open_link(board.url)
        try:
            reported = board.state()
            t_end = time.monotonic() + budget_s
            for k in range(n):
                if time.monotonic() > t_end:
                    break
                line = mutate(rng, rng.choice(good), rng.choice(good))
                if b"\n" in line[:-1] or not line.endswith(b"\n"):
                    line = line.replace(b"\n", b" ") + b"\n"  # one line per exchange
                if not line.strip():
                    continue  # blank lines are skipped, unanswered (PROTOCOL.md)
                link.write_line(line)
                reply = link.read_line(2.0)
                while reply is not None and reply.startswith(b"NS1 0 EVT"):
                    reply = link.read_line(2.0)
                if reply is None:
                    fig.fail(f"fuzz/mpy: no reply to {line[:60]!r}")
                    continue
                fig.frames += 1
                if not _one_reply(reply):
                    fig.fail(f"fuzz/mpy: bad reply {reply[:60]!r}")
                    continue
                frame = wire.decode_reply(reply)
                if frame.verb == "OK" and frame.fields.get("changed") == "1":
                    if not intact(line):
                        fig.fail(f"fuzz/mpy: a damaged line moved relays: {line[:80]!r}")
                    f = frame.fields
                    reported = (f["end"], int(f["mask"]), f["open"] == "1")
                if k % 200 == 199 and board.state() != reported:
                    fig.fail(f"fuzz/mpy: relays {board.state()} but board said {reported}")
            if board.state() != reported:
                fig.fail(f"fuzz/mpy: relays {board.state()} but board said {reported}")
        finally:
            link.close()


# --- soak -------------------------------------------------------------------------------
class FaultyLink:
    """A loop:// link whose lines are damaged, dropped, merged or duplicated at random."""

    def __init__(self, link: Any, rng: random.Random, rate: float, fig: Figures) -> None:
        self.link, self.rng, self.rate, self.fig = link, rng, rate, fig
        self.url = "faulty+" + link.url
        self.held = b""  # a line whose newline was lost, waiting for the next one

    def _hit(self) -> bool:
        if self.rng.random() < self.rate:
            self.fig.faults += 1
            return True
        return False

    def write_line(self, line: bytes) -> None:
        if self._hit():
            kind = self.rng.randrange(4)
            if kind == 0:
                i = self.rng.randrange(len(line) - 1)
                line = line[:i] + bytes([line[i] ^ 0x10]) + line[i + 1:]
            elif kind == 1:
                return  # lost
            elif kind == 2:
                self.held = line[:-1]  # newline lost: runs into the next line
                return
            else:
                self.link.write_line(line)  # duplicated
        if self.held:
            line, self.held = self.held + line, b""
        self.link.write_line(line)

    def read_line(self, timeout_s: float) -> bytes | None:
        line = self.link.read_line(timeout_s)
        if line is not None and self._hit():
            if self.rng.randrange(2):
                return None  # reply lost
            i = self.rng.randrange(len(line) - 1)
            return line[:i] + bytes([line[i] ^ 0x01]) + line[i + 1:]
        return line

    def close(self) -> None:
        self.link.close()


def soak(fig: Figures, rng: random.Random, n: int, budget_s: float, rate: float = 0.05) -> None:
    from nullsteer.board.controller import Controller
    from nullsteer.board.links.loop_link import LoopLink
    from nullsteer.errors import NullsteerError
    inner = LoopLink("loop://", _inprocess_board())
    link = FaultyLink(inner, rng, rate, fig)
    ctl = Controller(link, timeout_s=0.01, retries=4)
    acked = inner.board.state()
    t_end = time.monotonic() + budget_s
    for k in range(n):
        if time.monotonic() > t_end:
            break
        target = (rng.choice("AB"), rng.randrange(128), bool(rng.randrange(2)))
        fig.commands += 1
        try:
            f = ctl.request("SET", (("end", target[0]), ("mask", target[1]),
                                    ("open", target[2])))
        except NullsteerError as exc:
            fig.fail(f"soak: command {k} failed: {exc}")
            acked = None
            continue
        acked = (f["end"], int(f["mask"]), f["open"] == "1")
        if acked != target:
            fig.fail(f"soak: board acknowledged {acked} for {target}")
        if k % 100 == 99 and inner.board.state() != acked:  # the pin log, every 100
            fig.fail(f"soak: relays {inner.board.state()} after acknowledging {acked}")
    if acked is not None and inner.board.state() != acked:
        fig.fail(f"soak: final relays {inner.board.state()} != last acknowledged {acked}")


# --- power cuts -------------------------------------------------------------------------
class PowerCut(Exception):
    """The power went at this step."""


class CuttingFs:
    """File access that dies at step ``cut_at`` (each open, write, flush, close, rename,
    remove and sync is a step); ``cut_at`` < 0 never."""

    def __init__(self, cut_at: int = -1) -> None:
        import os as _os
        self.os = _os
        self.cut_at = cut_at
        self.steps = 0

    def _step(self) -> None:
        if self.steps == self.cut_at:
            raise PowerCut()
        self.steps += 1

    def open(self, path: str, mode: str) -> Any:
        self._step()
        f = open(path, mode)
        fs = self

        class Cutting:
            def write(self, data: bytes) -> None:
                fs._step()
                f.write(data)

            def flush(self) -> None:
                fs._step()
                f.flush()

            def read(self, n: int) -> bytes:
                return f.read(n)

            def close(self) -> None:
                f.close()

        return Cutting()

    def rename(self, old: str, new: str) -> None:
        self._step()
        self.os.rename(old, new)

    def remove(self, path: str) -> None:
        self._step()
        self.os.remove(path)

    def sync(self) -> None:
        self._step()


class NoRenameOverFs(CuttingFs):
    """A file system that will not rename over an existing file (the store then removes
    the old file first)."""

    def rename(self, old: str, new: str) -> None:
        if self.os.path.exists(new):
            self._step()
            raise OSError(17, "exists")
        super().rename(old, new)


def cuts(fig: Figures, rng: random.Random, n: int, budget_s: float) -> None:
    from nullsteer.sim.firmware import load_firmware
    fw = load_firmware()
    store_mod, relays = fw.store, fw.relays
    t_end = time.monotonic() + budget_s
    folder = Path(tempfile.mkdtemp(prefix="nullsteer-cuts-"))
    k = 0
    while fig.cuts < n and time.monotonic() < t_end:
        fs_class = CuttingFs if k % 2 == 0 else NoRenameOverFs
        path = str(folder / f"s{k}.txt")
        old = relays.State(rng.choice("AB"), rng.randrange(128), False)
        new = relays.State(rng.choice("AB"), rng.randrange(128), True)
        store_mod.StateStore(path, 7, True, fs_class()).save(old, 3)
        probe = fs_class()
        store_mod.StateStore(path, 7, True, probe, pause_ms=1, sleep_ms=lambda ms: None
                             ).save(new, 4)
        total = probe.steps
        store_mod.StateStore(path, 7, True, fs_class()).save(old, 3)
        cut_at = rng.randrange(total)
        try:
            store_mod.StateStore(path, 7, True, fs_class(cut_at), pause_ms=1,
                                 sleep_ms=lambda ms: None).save(new, 4)
        except PowerCut:
            pass
        fig.cuts += 1
        state, boots = store_mod.StateStore(path, 7, True).load()
        got = None if state is None else (state.end, state.mask, state.open_, boots)
        if got not in ((old.end, old.mask, old.open_, 3), (new.end, new.mask, new.open_, 4)):
            fig.fail(f"cuts: state {got} after a cut at step {cut_at}/{total}")
        # the frame counter: never below one the guard accepted before the cut
        cpath = str(folder / f"c{k}.txt")
        accepted = rng.randrange(1, 10 ** 9)
        store_mod.CounterStore(cpath, fs_class()).save(accepted)
        try:
            store_mod.CounterStore(cpath, fs_class(rng.randrange(12))).save(accepted + 64)
        except PowerCut:
            pass
        fig.cuts += 1
        last = store_mod.CounterStore(cpath).load()
        if last not in (accepted, accepted + 64):
            fig.fail(f"cuts: counter {last}, accepted {accepted}")
        k += 1


# --- MQTT -------------------------------------------------------------------------------
def _mqtt_client_module() -> Any:
    from nullsteer.sim.firmware import firmware_module
    firmware_module("mqtt_link")
    return sys.modules["mqtt_client"]


def mqtt_reader(fig: Figures, rng: random.Random, n: int, budget_s: float) -> None:
    """The board's MQTT packet reader fed a broker stream cut into random pieces:
    valid, oversize and malformed PUBLISH packets among others. Every QoS 1 PUBLISH must
    get its PUBACK (MQTT 3.1.1 §4.3.2), only whole messages up to the limit reach the
    handler, and the buffer never holds much more than the limit."""
    mc = _mqtt_client_module()

    class Sock:
        def __init__(self) -> None:
            self.out = bytearray()

        def send(self, data: Any) -> int:
            self.out += bytes(data)
            return len(data)

    t_end = time.monotonic() + budget_s
    done = 0
    while done < n and time.monotonic() < t_end:
        c = mc.MQTTClient("fuzz", "127.0.0.1")
        c.sock = Sock()
        got: list[tuple[str, bytes]] = []
        c.on_message = lambda topic, payload, retained: got.append((topic, payload))
        stream, want_msgs, want_acks, bad = bytearray(), [], [], 0
        for _ in range(rng.randrange(5, 40)):
            kind = rng.randrange(10)
            topic = "nullsteer/fd/" + "t" * rng.randrange(1, 30)
            size = rng.choice([0, 1, 60, 500, 4000, 4090, 4200, 9000, 20000])
            payload = bytes(rng.randrange(256) for _ in range(min(size, 64))) * \
                (size // 64 + 1)
            payload = payload[:size]
            qos = rng.randrange(2)
            pid = rng.randrange(1, 65536)
            if kind < 6:
                pkt = mc.publish_packet(topic, payload, False, qos, pid)
                oversize = mc.decode_length(pkt, 1)[0] > mc.MAX_PACKET
                if qos:
                    want_acks.append(pid)
                if not oversize:
                    want_msgs.append((topic, payload))
                else:
                    bad += 1
            elif kind == 6:  # topic length beyond the body: malformed, nothing to answer
                pkt = mc.packet(mc.PUBLISH | 2, b"\xff\xf0abc")
                bad += 1
            elif kind == 7:  # topic not UTF-8 (§1.5.3): dropped, still acknowledged
                tb = b"ns/\xff\xfe"
                pkt = mc.packet(mc.PUBLISH | 2, bytes((0, len(tb))) + tb +
                                bytes((pid >> 8, pid & 255)) + b"x")
                want_acks.append(pid)
                bad += 1
            elif kind == 8:
                pkt = mc.packet(mc.PINGRESP, b"")
            else:
                pkt = mc.packet(mc.SUBACK, bytes((0, 1, 1)))
            stream += pkt
        i = 0
        while i < len(stream):
            step = rng.randrange(1, 1025)
            c.buf.extend(stream[i:i + step])
            i += step
            try:
                pkt = c._take()
                while pkt is not None:
                    c._dispatch(pkt[0], pkt[1])
                    pkt = c._take()
            except Exception as exc:  # noqa: BLE001 - nothing here may end the connection
                fig.fail(f"mqtt reader: {type(exc).__name__} {exc}")
                break
            if len(c.buf) > mc.MAX_PACKET + 5 + 1024:
                fig.fail(f"mqtt reader: buffer grew to {len(c.buf)} bytes")
        acks = []
        out = bytes(c.sock.out)
        while out:
            if out[0] != mc.PUBACK or out[1] != 2:
                fig.fail(f"mqtt reader: unexpected packet {out[:4]!r} sent")
                break
            acks.append((out[2] << 8) | out[3])
            out = out[4:]
        if acks != want_acks:
            fig.fail(f"mqtt reader: PUBACKs {acks[:5]}... != {want_acks[:5]}...")
        if got != want_msgs:
            fig.fail(f"mqtt reader: {len(got)} messages delivered, {len(want_msgs)} expected")
        if c.dropped != bad:
            fig.fail(f"mqtt reader: dropped {c.dropped}, expected {bad}")
        fig.streams += 1
        fig.packets += len(want_acks) + len(want_msgs)
        done += 1


def mqtt_attacks(fig: Figures, rng: random.Random, n_flood: int, budget_s: float) -> None:
    from conftest import Broker
    from mqtt_support import MqttSimBoard, Watcher

    from nullsteer.board.controller import Controller, FedEnd
    from nullsteer.board.links import open_link

    dev, key = "flag-ne", bytes(rng.randrange(256) for _ in range(32))
    t = f"nullsteer/{dev}/"
    folder = Path(tempfile.mkdtemp(prefix="nullsteer-attack-"))
    os.environ["NULLSTEER_STATE_DIR"] = str(folder / "host")
    broker = Broker(folder).start()
    block = {"host": broker.host, "port": broker.port, "id": dev, "keepalive_s": 5,
             "backoff_s": 0.1, "backoff_max_s": 1.0, "key_hex": key.hex(), "hub": True,
             "end_a_bearing_deg": 30.0}
    board = MqttSimBoard(block, state_dir=folder / "state")
    t_end = time.monotonic() + budget_s
    try:
        board.start()
        spy = Watcher(broker.host, broker.port, [t + "#"])
        spy.connected.wait(3.0)
        host = Controller(open_link(broker.url(dev)), timeout_s=2.0, key=key)

        def attack(name: str, payload: bytes, topic: str = "req", retain: bool = False,
                   settle_s: float = 0.0) -> None:
            before = board.state()
            spy.publish(t + topic, payload, retain=retain)
            if settle_s:
                time.sleep(settle_s)
            fig.attacks += 1
            if board.state() != before:
                fig.fail(f"mqtt: {name} moved relays {before} -> {board.state()}")

        def captured_set() -> bytes:
            while True:
                topic, payload, _ = spy.messages.get(timeout=3.0)
                if topic == t + "req" and b" SET " in payload:
                    return payload

        def drain() -> None:
            while not spy.messages.empty():
                spy.messages.get_nowait()

        drain()
        host.set_state(FedEnd.B, 5, False)
        old = captured_set()
        host.set_state(FedEnd.A, 11, False)
        attack("unsigned SET", wire.encode(3, "SET", (("end", "B"), ("mask", 99), ("open", 1))),
               settle_s=0.3)
        attack("SET signed with another key",
               wire.sign(4, "SET", (("end", "B"), ("mask", 98), ("open", 0)), key[::-1], 10 ** 12),
               settle_s=0.3)
        attack("live replay", old, settle_s=0.3)
        flipped = bytearray(old)
        flipped[old.index(b"mask=") + 5] ^= 0x01
        attack("bit-flipped signed SET", bytes(flipped), settle_s=0.3)
        for text in (b"nan", b"inf", b"-inf", b"1e999", b"0x10"):
            attack(f"bearing/set {text!r}", text, "bearing/set")
        for text in (b"nan", b"inf", b"1_200", b"-5"):
            attack(f"ohms/set {text!r}", text, "ohms/set")
        attack("end/set garbage", bytes(range(1, 40)), "end/set", settle_s=0.3)
        # floods: garbage, oversize, oversize retained
        drain()
        for i in range(n_flood):
            if time.monotonic() > t_end:
                break
            junk = bytes(rng.randrange(256) for _ in range(rng.randrange(1, 600)))
            attack("garbage", junk)
        for i in range(min(30, n_flood)):
            attack("oversize", b"NS1 1 PING " + b"z" * rng.randrange(4100, 9000))
        attack("oversize retained", b"NS1 1 PING " + b"r" * 5000, retain=True, settle_s=1.0)
        if board.state() != ("A", 11, False):  # after the floods settled (pin log)
            fig.fail(f"mqtt: the floods moved relays to {board.state()}")
        offline = [p for topic, p, _ in list(spy.messages.queue) if topic == t + "avail"
                   and p == b"offline"]
        if offline:
            fig.fail(f"mqtt: the board reconnected {len(offline)} times under the flood")
        if host.set_state(FedEnd.B, 12, False).state.mask != 12:  # still answering
            fig.fail("mqtt: honest host not served after the floods")
        spy.publish(t + "req", b"", retain=True)
        # replay after a reboot, then a frame far ahead, then the honest host again
        board.restart()
        attack("replay after a reboot", old, settle_s=0.5)
        ahead = wire.sign(5, "PING", (), key, host.counter.last + 10 ** 6)
        spy.publish(t + "req", ahead)
        fig.attacks += 1
        time.sleep(0.3)
        try:
            if host.set_state(FedEnd.A, 13, False).state.mask != 13:
                fig.fail("mqtt: honest host got a wrong state after a far-ahead frame")
        except Exception as exc:  # noqa: BLE001
            fig.fail(f"mqtt: honest host locked out after a far-ahead frame: {exc}")
        if board.state() != ("A", 13, False):
            fig.fail(f"mqtt: relays {board.state()} at the end")
        host.close()
        spy.close()
    finally:
        board.stop()
        broker.stop()


# --- run --------------------------------------------------------------------------------
SCALES = {  # part -> (full, smoke)
    "fuzz": (100000, 3000),
    "fuzz_mpy": (3000, 0),
    "soak": (10000, 400),
    "cuts": (1400, 100),
    "flood": (1000, 0),
    "reader": (2000, 100),
}


def run(smoke: bool = False, seed: int = 1, budget_s: float = 240.0,
        parts: tuple[str, ...] = ("fuzz", "soak", "cuts", "mqtt")) -> Figures:
    scale = {k: v[1 if smoke else 0] for k, v in SCALES.items()}
    fig = Figures()
    rng = random.Random(seed)
    steps = [("fuzz", lambda: fuzz_inprocess(fig, rng, scale["fuzz"], budget_s)),
             ("fuzz", lambda: fuzz_micropython(fig, rng, scale["fuzz_mpy"], budget_s)
              if scale["fuzz_mpy"] else None),
             ("soak", lambda: soak(fig, rng, scale["soak"], budget_s)),
             ("cuts", lambda: cuts(fig, rng, scale["cuts"], budget_s)),
             ("mqtt", lambda: mqtt_reader(fig, rng, scale["reader"], budget_s)),
             ("mqtt", lambda: mqtt_attacks(fig, rng, scale["flood"], budget_s)
              if not smoke else None)]
    for name, step in steps:
        if name in parts:
            t0 = time.monotonic()
            step()
            fig.seconds[name] = round(fig.seconds.get(name, 0.0) + time.monotonic() - t0, 2)
    return fig


def main(argv: list[str] | None = None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--smoke", action="store_true", help="the short scale of make test")
    p.add_argument("--seed", type=int, default=1)
    p.add_argument("--budget-s", type=float, default=240.0, help="time bound of each part")
    p.add_argument("--json", action="store_true")
    args = p.parse_args(argv)
    fig = run(args.smoke, args.seed, args.budget_s)
    if args.json:
        print(json.dumps(fig.__dict__, indent=1))
    else:
        print(f"attack run, seed {args.seed}{' (smoke)' if args.smoke else ''}")
        print(f"  fuzzed frames answered   {fig.frames}")
        print(f"  soak commands            {fig.commands} ({fig.faults} faults injected)")
        print(f"  power cuts               {fig.cuts}")
        print(f"  MQTT attacks             {fig.attacks} on the board, {fig.streams} broker "
              f"streams ({fig.packets} PUBLISH) into its packet reader")
        print(f"  failures                 {len(fig.failures)}")
        print(f"  seconds                  {fig.seconds}")
        for f in fig.failures:
            print("  FAIL " + f)
    return 1 if fig.failures else 0


if __name__ == "__main__":
    raise SystemExit(main())
