"""The board as an MQTT device: host frames, hub commands, availability, retained state.

Topics (``T`` = ``<base>/<device id>/``, base default ``nullsteer``):

==================== ========= ================================================= ======
topic                direction payload                                           retain
==================== ========= ================================================= ======
``T avail``          out       ``online`` (birth) / ``offline`` (last will)      yes
``T req``            in        one protocol request line (as on the serial link) no
``T rep``            out       the reply line                                    no
``T state``          out       JSON: end mask open ohms preset boots dropped     yes
``T end``            out       the fed end's label (``A``/``B`` or configured)   yes
``T ohms``           out       the termination in ohms, ``%.1f``                 yes
``T open``           out       ``ON`` (termination disconnected) / ``OFF``       yes
``T preset``         out       the preset matching the state, or ``custom``      yes
``T bearing``        out       the fed end's null bearing, degrees (``%d``)       yes
``T short``          out       ``ON``/``OFF`` (boards reporting a shorted state) yes
``T diag``           out       JSON ``{"boots","fw","up_s"}``, every minute      yes
``T page``           in        the control page's URL (retained, from the host)  --
``T end/set``        in        ``A``/``B`` or an end label                       no
``T bearing/set``    in        wanted null bearing, degrees -360..360 (nearest)  no
``T ohms/set``       in        ohms (nearest ladder setting by ratio; closes)    no
``T open/set``       in        ``ON``/``OFF``                                    no
``T preset/set``     in        a preset name from the board config               no
``T flip/set``       in        ``PRESS``: swap fed and terminated ends           no
``T short/set``      in        ``ON``/``OFF`` (boards reporting a shorted state) no
``T log``            out       one line of text per refused hub command          no
``<prefix>/status``  in        the hub's birth ``online``: republish discovery   --
==================== ========= ================================================= ======

Everything that moves a relay goes through ``App.handle_line`` (hub commands are turned
into ``SET`` frames), so the same checks apply and a refused command moves nothing.
Messages arriving with the retain flag on command topics are ignored: a stale retained
command must not move the antenna at every reconnect.

Security: only ``T req`` carries host frames (the board subscribes to its own topics
only). With a ``key_hex`` in the config every host frame must be signed
(``wire.sign``: HMAC-SHA256 over the frame with its counter ``ctr``); the board refuses
unsigned or wrongly signed frames (``ERR AUTH``) and replays (``ERR REPLAY``): a frame's
counter must be above the last accepted one. The guard needs no clock and survives
reboots: before a frame is acted on, the board makes sure ``ns_ctr.txt`` (beside the state
file, written atomically) holds a counter at least as high, reserving ``CTR_RESERVE`` more
at a time so that an honest host costs one flash write per ``CTR_RESERVE`` frames; after a
reboot the whole reservation counts as used. The ``REPLAY`` reply is signed by the board
with its last accepted counter, so an honest host that fell behind (another host with the
same key went ahead, or the reservation after a reboot) catches up and retries, and no
single frame can lock honest hosts out. An exact repeat of one of the last few accepted
frames (a QoS 1 duplicate) gets the cached reply again and moves nothing. Hub commands
cannot be signed: they are off by default when a key is set (``"hub": true`` turns them
on; then protect the ``T .../set`` topics with the broker's ACL).

Robustness: a message larger than the client's buffer limit is discarded as it arrives
and counted (``"dropped"`` in ``T state``); the connection stays up. Numbers from hub
topics are read with the codec's strict decimal reader: ``nan``/``inf`` are refused.

Discovery (decided: the board publishes it). The board has its ladder table, its presets
and its state, so a home-automation hub that follows the MQTT discovery convention sees
and drives the antenna with the host switched off. One device-based config (see
``discovery.py``) is published retained after every connect, again a random 0.5-5 s
after the hub announces ``online`` on ``<prefix>/status``, and when the control page's
URL on ``T page`` changes; the per-entity configs of earlier firmware are retracted
(empty retained payloads) at the same time.
"""

try:
    from typing import TYPE_CHECKING
except ImportError:  # MicroPython
    TYPE_CHECKING = False
if TYPE_CHECKING:
    from typing import Any

import gc
import json

import wire
from link_serial import LineAssembler
from mqtt_client import MQTTClient, TLSError


def _config_error(key: str, message: str) -> Exception:
    """A boardcfg.BoardConfigError, imported only when there is an error to report (the
    board config reader is unloaded after boot to save heap)."""
    from boardcfg import BoardConfigError
    return BoardConfigError(key, message)

MQTT_KEYS = ("host", "port", "user", "password", "tls", "ca_file", "server_hostname",
             "base", "id", "keepalive_s", "discovery", "discovery_prefix", "name",
             "key_hex", "hub", "end_labels", "end_a_bearing_deg", "presets",
             "wifi", "backoff_s", "backoff_max_s", "log", "insecure", "rediscover_max_s")
PRESET_KEYS = ("end", "mask", "ohms", "open")
HUB_TOPICS = ("end", "bearing", "ohms", "open", "preset", "flip", "short")
CUSTOM = "custom"
CTR_RESERVE = 64  # frame counters reserved in ns_ctr.txt per flash write
DIAG_MS = 60000       # diagnostics (boots, firmware, uptime) are republished this often
PAGE_URL_MAX = 200
REPLY_CACHE = 4


def _opt_str(obj: dict, key: str, default: "str | None", where: str = "mqtt.") -> "str | None":
    value = obj.get(key, default)
    if value is not None and (not isinstance(value, str) or not value):
        raise _config_error(where + key, "must be a non-empty string")
    return value


def _num(obj: dict, key: str, default: float, lo: float, hi: float) -> float:
    value = obj.get(key, default)
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not lo <= value <= hi:
        raise _config_error("mqtt." + key, "must be a number in %s..%s" % (lo, hi))
    return value


def _topic_word(value: str, key: str) -> str:
    for ch in value:
        if ch in "+#/ " or ord(ch) < 0x21 or ord(ch) > 0x7E:
            raise _config_error(key, "must not contain + # / or spaces: %r" % (value,))
    return value


def parse_presets(obj: object, bits: int) -> dict:
    """name -> {"end": "A"|"B"|None, "mask": int|None, "ohms": float|None, "open": bool}."""
    if obj is None:
        return {}
    if not isinstance(obj, dict):
        raise _config_error("mqtt.presets", "must be an object of presets")
    out = {}
    for name in obj:
        p = obj[name]
        where = "mqtt.presets." + name
        _topic_word(name, where)
        if name == CUSTOM or not isinstance(p, dict):
            raise _config_error(where, "must be an object (and not named custom)")
        for key in p:
            if key not in PRESET_KEYS:
                raise _config_error(where + "." + key, "unknown key")
        end = p.get("end")
        if end is not None and end not in ("A", "B"):
            raise _config_error(where + ".end", "must be A or B")
        mask = p.get("mask")
        if mask is not None and (isinstance(mask, bool) or not isinstance(mask, int)
                                 or not 0 <= mask < (1 << bits)):
            raise _config_error(where + ".mask", "outside the %d ladder bits" % bits)
        ohms = p.get("ohms")
        if ohms is not None and (isinstance(ohms, bool) or not isinstance(ohms, (int, float))
                                 or not ohms > 0):
            raise _config_error(where + ".ohms", "must be > 0")
        if mask is not None and ohms is not None:
            raise _config_error(where, "give mask or ohms, not both")
        open_ = p.get("open", False)
        if not isinstance(open_, bool):
            raise _config_error(where + ".open", "must be true or false")
        out[name] = {"end": end, "mask": mask, "ohms": None if ohms is None else float(ohms),
                     "open": open_}
    return out


def parse_mqtt(obj: object, bits: int = 16) -> dict:
    """Check the board config's ``"mqtt"`` block; returns it with defaults filled in."""
    if not isinstance(obj, dict):
        raise _config_error("mqtt", "must be an object")
    for key in obj:
        if key not in MQTT_KEYS:
            raise _config_error("mqtt." + key, "unknown key")
    m = {}  # type: dict
    m["host"] = _opt_str(obj, "host", None)
    if m["host"] is None:
        raise _config_error("mqtt.host", "missing (broker host name or address)")
    tls = obj.get("tls", False)
    if not isinstance(tls, bool):
        raise _config_error("mqtt.tls", "must be true or false")
    m["tls"] = tls
    m["port"] = int(_num(obj, "port", 8883 if tls else 1883, 1, 65535))
    for key in ("user", "password", "ca_file", "server_hostname", "key_hex", "name"):
        m[key] = _opt_str(obj, key, None)
    insecure = obj.get("insecure", False)
    if not isinstance(insecure, bool):
        raise _config_error("mqtt.insecure", "must be true or false")
    if tls and m["ca_file"] is None and not insecure:
        raise _config_error("mqtt.ca_file", "needed with tls, so that the board checks the "
                                            "broker (or say insecure: true)")
    m["insecure"] = insecure
    if m["server_hostname"] is None:
        m["server_hostname"] = m["host"]
    m["base"] = _opt_str(obj, "base", "nullsteer")
    for part in m["base"].split("/"):
        _topic_word(part, "mqtt.base")
    m["id"] = _topic_word(_opt_str(obj, "id", None) or "", "mqtt.id")
    if not m["id"]:
        raise _config_error("mqtt.id", "missing (the device id of the station file)")
    m["keepalive_s"] = int(_num(obj, "keepalive_s", 30, 5, 3600))
    m["discovery_prefix"] = _opt_str(obj, "discovery_prefix", "homeassistant")
    m["key"] = None
    if m["key_hex"] is not None:
        try:
            import binascii
            m["key"] = binascii.unhexlify(m["key_hex"])
        except ValueError:
            raise _config_error("mqtt.key_hex", "must be hex digits")
        if len(m["key"]) < 16:
            raise _config_error("mqtt.key_hex", "key must be at least 16 bytes")
    hub = obj.get("hub", m["key"] is None)
    disc = obj.get("discovery", True)
    log = obj.get("log", False)
    for key, value in (("hub", hub), ("discovery", disc), ("log", log)):
        if not isinstance(value, bool):
            raise _config_error("mqtt." + key, "must be true or false")
    m["hub"], m["discovery"], m["log"] = hub, disc and hub, log
    labels = obj.get("end_labels", {})
    if not isinstance(labels, dict):
        raise _config_error("mqtt.end_labels", "must be an object {A: ..., B: ...}")
    m["bearing"] = obj.get("end_a_bearing_deg")
    if m["bearing"] is not None:
        _num(obj, "end_a_bearing_deg", 0, -360, 360)
    m["labels"] = {}
    for end in ("A", "B"):
        default = end
        if m["bearing"] is not None:
            default = "%s (null %d deg)" % (end, round(null_bearing(end, m["bearing"])))
        m["labels"][end] = _opt_str(labels, end, default, "mqtt.end_labels.")
    m["presets"] = parse_presets(obj.get("presets"), bits)
    wifi = obj.get("wifi")
    if wifi is not None and (not isinstance(wifi, dict) or "ssid" not in wifi):
        raise _config_error("mqtt.wifi", "must be an object with ssid (and password)")
    m["wifi"] = wifi
    m["backoff_s"] = _num(obj, "backoff_s", 0.25, 0.01, 60)
    m["backoff_max_s"] = _num(obj, "backoff_max_s", 4.0, m["backoff_s"], 3600)
    m["rediscover_max_s"] = _num(obj, "rediscover_max_s", 5.0, 0.5, 60)
    return m


def random_delay_ms(max_s: float, min_s: float = 0.5) -> int:
    """A random wait in ``min_s``..``max_s`` (ms), from the board's random source."""
    import os
    spread = max(0.0, max_s - min_s)
    return int((min_s + spread * os.urandom(1)[0] / 255.0) * 1000)


def page_url_ok(text: str) -> bool:
    """An empty string (no page) or an http(s) URL of printable ASCII, not too long."""
    if text == "":
        return True
    if len(text) > PAGE_URL_MAX or not (text.startswith("http://") or
                                        text.startswith("https://")):
        return False
    for ch in text:
        if ord(ch) <= 0x20 or ord(ch) > 0x7E or ch in "\"<>":
            return False
    return True


def null_bearing(end: str, end_a_bearing_deg: float) -> float:
    """Where the null points with ``end`` fed (toward the terminated end), degrees."""
    return (end_a_bearing_deg + (180.0 if end == "A" else 0.0)) % 360.0


def end_for_bearing(wanted_deg: float, end_a_bearing_deg: float) -> str:
    """The fed end whose null lies nearest ``wanted_deg`` (ties go to A)."""
    miss = {}
    for end in ("A", "B"):
        d = abs(null_bearing(end, end_a_bearing_deg) - wanted_deg % 360.0)
        miss[end] = min(d, 360.0 - d)
    return "A" if miss["A"] <= miss["B"] else "B"


class ReplayGuard:
    """Accepts a signed frame only when its counter is above every one accepted before,
    across reboots (see the module docstring).

    Parameters
    ----------
    store : CounterStore
        Where the highest counter that may have been accepted is kept (store.py).
    reserve : int
        Counters reserved per write.
    """

    def __init__(self, store: "Any", reserve: int = CTR_RESERVE) -> None:
        self.store = store
        self.reserve = reserve
        self.last = store.load()  # after a reboot every reserved counter counts as used
        self.ceiling = self.last
        store.discard_tmp()

    def check(self, ctr: int) -> "str | None":
        """None if ``ctr`` may be accepted, else the reason (one protocol word)."""
        if ctr <= self.last:
            return "counter_%d_not_above_%d" % (ctr, self.last)
        return None

    def accept(self, ctr: int) -> None:
        """Record ``ctr`` as accepted; its reservation is on flash before this returns
        (raises OSError when it cannot be written: the frame must then be refused)."""
        if ctr > self.ceiling:
            ceiling = min(ctr + self.reserve, wire.CTR_MAX)
            self.store.save(ceiling)
            self.ceiling = ceiling
        self.last = ctr


class BoardMqtt:
    """The MQTT side of one board.

    Parameters
    ----------
    app : App
        The protocol handler (``handle_line``) and owner of the relay state.
    m : dict
        The checked ``"mqtt"`` block (:func:`parse_mqtt`).
    make_client : callable
        ``make_client(m) -> MQTTClient`` (tests inject; default :func:`make_client`).
    clock : object
        ``ticks_ms`` / ``ticks_diff`` / ``sleep_ms``.
    net_up : callable or None
        Brings the network up before each connection attempt (Wi-Fi, see net.py).
    counter : CounterStore or None
        The replay guard's counter file (default: ``ns_ctr.txt`` beside the state file,
        through the app's file access).
    idle : callable or None
        Run while a connection attempt waits for the broker (feeds the watchdog).
    """

    def __init__(self, app: "Any", m: dict, make_client: "Any", clock: "Any",
                 net_up: "Any" = None, counter: "Any" = None, idle: "Any" = None) -> None:
        self.net_up = net_up
        self.idle = idle
        self.app = app
        self.m = m
        self.make_client = make_client
        self.clock = clock
        self.t = m["base"] + "/" + m["id"] + "/"
        self.guard = None  # type: Any
        if m["key"] is not None:
            if counter is None:
                from store import CounterStore, counter_path
                counter = CounterStore(counter_path(app.store.path), app.store.fs)
            self.guard = ReplayGuard(counter)
        self.client = None  # type: Any
        self.next_try_ms = clock.ticks_ms()
        self.backoff_ms = int(m["backoff_s"] * 1000)
        self.published = None  # type: Any
        self.replies = []  # type: list
        self.hub_seq = 0
        self.connects = 0
        self.dropped_before = 0  # messages dropped on earlier connections
        self.status_topic = m["discovery_prefix"] + "/status"
        self.info = {}  # type: dict
        self.table = []  # type: list
        self.has_open = False
        self.has_short = False
        self.page_url = ""
        self.discovery_due_ms = None  # type: Any
        self.diag_next_ms = clock.ticks_ms()
        self.load_board_facts()

    def log(self, text: str) -> None:
        if self.m["log"]:
            print("mqtt:", text)

    # --- connection ------------------------------------------------------------------
    def connect(self) -> None:
        c = self.make_client(self.m)
        c.set_will(self.t + "avail", b"offline", True, 1)
        c.on_message = self.on_message
        c.idle = self.idle
        c.connect(True)
        self.client = c
        subs = [(self.t + "req", 1)]
        if self.m["hub"]:
            subs += [(self.t + name + "/set", 1) for name in HUB_TOPICS]
        if self.m["discovery"]:
            subs += [(self.status_topic, 1), (self.t + "page", 1)]
        c.subscribe(subs)  # every connect: the session is clean
        c.publish(self.t + "avail", b"online", True, 1)
        self.published = None
        self.publish_state()
        self.publish_diag()
        if self.m["discovery"]:
            self.publish_discovery()
        self.connects += 1
        self.log("connected to %s:%d (%d)" % (self.m["host"], self.m["port"], self.connects))

    def step(self, timeout_ms: int = 20) -> None:
        """Serve the connection for up to ``timeout_ms``; reconnect with backoff."""
        c = self.client
        if c is None or not c.connected:
            now = self.clock.ticks_ms()
            if self.clock.ticks_diff(now, self.next_try_ms) >= 0:
                try:
                    if self.net_up is not None:
                        self.net_up()
                    self.connect()
                    self.backoff_ms = int(self.m["backoff_s"] * 1000)
                except OSError as exc:
                    self.client = None
                    self.log("connect failed: %s; next try in %d ms" % (exc, self.backoff_ms))
                    self.next_try_ms = self.clock.ticks_ms() + self.backoff_ms
                    self.backoff_ms = min(self.backoff_ms * 2,
                                          int(self.m["backoff_max_s"] * 1000))
                    return
            else:
                self.clock.sleep_ms(min(timeout_ms, max(1, self.clock.ticks_diff(
                    self.next_try_ms, now))))
                return
        try:
            self.client.poll(timeout_ms)
            self.publish_state()
            self.timers()
        except OSError as exc:
            self.log("connection lost: %s" % (exc,))
            self.client.close()
            self.dropped_before += self.client.dropped
            self.client = None
            self.next_try_ms = self.clock.ticks_ms()

    def close(self, clean: bool = True) -> None:
        """Leave: publish ``offline`` (a clean DISCONNECT sends no will) and disconnect."""
        if self.client is not None and self.client.connected:
            try:
                if clean:
                    self.client.publish(self.t + "avail", b"offline", True, 1)
                self.client.disconnect()
            except OSError:
                pass
        self.client = None

    # --- the App, through its own protocol ------------------------------------------
    def ask(self, verb: str, fields: "Any" = ()) -> dict:
        """Fields of the App's OK reply to a local request (empty dict on ERR)."""
        self.hub_seq = self.hub_seq % wire.SEQ_MAX + 1
        try:
            frame = wire.decode_reply(self.app.handle_line(wire.encode(self.hub_seq, verb,
                                                                       fields)))
        except wire.WireError:
            return {}
        return frame.fields if frame.verb == "OK" else {}

    def load_board_facts(self) -> None:
        """INFO and the ladder table, read once through the protocol."""
        self.info = self.ask("INFO")
        table = []  # type: list
        total = int(self.info.get("table", "0"))
        while len(table) < total:
            chunk = self.ask("TABLE", (("start", len(table)), ("count", 16))).get("t", "")
            if not chunk:
                break
            for item in chunk.split(","):
                mask, ohms = item.split(":")
                table.append((int(mask), float(ohms)))
        self.table = table
        self.has_open = "open" in self.info.get("roles", "").split(",")
        self.has_short = "short" in self.ask("STATUS")

    # --- outgoing --------------------------------------------------------------------
    def preset_of(self, end: str, mask: int, open_: bool) -> str:
        """The first preset (by name) whose target equals the state, else ``custom``."""
        for name in sorted(self.m["presets"]):
            p = self.m["presets"][name]
            if p["open"] != open_ or (p["end"] is not None and p["end"] != end):
                continue
            want = p["mask"]
            if want is None and p["ohms"] is not None:
                best = wire.nearest_by_ratio(self.table, p["ohms"])
                want = best[0] if best is not None else None
            if want == mask or (p["open"] and want is None):
                return name
        return CUSTOM

    @property
    def dropped(self) -> int:
        """Oversize or malformed messages dropped since boot."""
        c = self.client
        return self.dropped_before + (c.dropped if c is not None else 0)

    def publish_state(self) -> None:
        """Publish the relay state (retained) when it (or the drop count) differs from
        what was published."""
        s = self.app.bank.state
        key = (s.end, s.mask, s.open_, self.dropped)
        if key == self.published:
            return
        f = self.ask("STATUS")
        if not f:
            return
        ohms = float(f["ohms"]) if "ohms" in f else None
        end, mask, open_ = f["end"], int(f["mask"]), f["open"] == "1"
        preset = self.preset_of(end, mask, open_)
        doc = {"end": end, "mask": mask, "open": open_, "ohms": ohms, "preset": preset,
               "boots": int(f.get("boots", "0")), "dropped": key[3]}
        c = self.client
        c.publish(self.t + "state", json.dumps(doc), True, 1)
        if self.m["hub"]:
            c.publish(self.t + "end", self.m["labels"][end], True, 1)
            if ohms is not None:
                c.publish(self.t + "ohms", f["ohms"], True, 1)
            c.publish(self.t + "open", "ON" if open_ else "OFF", True, 1)
            c.publish(self.t + "preset", preset, True, 1)
            if self.m["bearing"] is not None:
                c.publish(self.t + "bearing", "%d" % round(null_bearing(end, self.m["bearing"])),
                          True, 1)
            if "short" in f:
                c.publish(self.t + "short", "ON" if f["short"] == "1" else "OFF", True, 1)
        self.published = key

    def publish_diag(self) -> None:
        """Boots, firmware and uptime for the hub's diagnostic sensors (retained)."""
        f = self.ask("STATUS")
        if f:
            doc = {"boots": int(f.get("boots", "0")), "fw": f.get("fw", "?"),
                   "up_s": int(f.get("up_s", "0"))}
            self.client.publish(self.t + "diag", json.dumps(doc), True, 1)
        self.diag_next_ms = self.clock.ticks_ms() + DIAG_MS

    def timers(self) -> None:
        """Diagnostics every minute; discovery when its random delay has passed."""
        now = self.clock.ticks_ms()
        if self.clock.ticks_diff(now, self.diag_next_ms) >= 0:
            self.publish_diag()
        due = self.discovery_due_ms
        if due is not None and self.clock.ticks_diff(now, due) >= 0:
            self.discovery_due_ms = None
            self.publish_discovery()

    def publish_discovery(self) -> None:
        import discovery  # type: ignore[import-not-found]  # host/nullsteer/protocol/discovery.py
        prefix = self.m["discovery_prefix"]
        for topic in discovery.legacy_topics(prefix, self.m["id"]):
            self.client.publish(topic, b"", True, 1)
        topic, payload = discovery.device_config(
            prefix, self.m["base"], self.m["id"],
            self.m["name"] or self.m["id"], self.info.get("fw", "?"),
            self.info.get("board", "?"), [self.m["labels"]["A"], self.m["labels"]["B"]],
            discovery.ohms_span(self.table), sorted(self.m["presets"]), self.has_open,
            self.has_short, self.m["bearing"] is not None, self.page_url or None)
        text = json.dumps(payload)
        del payload
        gc.collect()  # the config is the board's largest message: room for it in one piece
        self.client.publish(topic, text, True, 1)

    # --- incoming --------------------------------------------------------------------
    def on_message(self, topic: str, payload: bytes, retained: bool) -> None:
        if topic == self.t + "req":
            if not retained:
                self.client.publish(self.t + "rep", self.host_frame(payload), False, 1)
        elif topic == self.status_topic:
            if payload == b"online" and self.m["discovery"]:
                self.discovery_due_ms = self.clock.ticks_ms() + random_delay_ms(
                    self.m["rediscover_max_s"])
        elif topic == self.t + "page":
            try:
                url = payload.decode().strip()
            except UnicodeError:
                url = None
            if url is not None and page_url_ok(url) and url != self.page_url:
                self.page_url = url
                if self.m["discovery"]:
                    self.publish_discovery()
        elif self.m["hub"] and topic.startswith(self.t) and topic.endswith("/set"):
            if not retained:
                self.hub_command(topic[len(self.t):-4], payload)
        # anything else is not ours: ignored

    def host_frame(self, line: bytes) -> bytes:
        """Check a request line (signature, replay) and answer it."""
        if not line.endswith(b"\n"):
            line = line + b"\n"
        key = self.m["key"]
        if key is None:
            return self.app.handle_line(line)
        try:
            frame = wire.decode_request(line)
        except wire.WireError as exc:
            return wire.encode_error(exc.seq, exc.code, exc.message)
        try:
            ctr = wire.verify(line, key)
        except wire.WireError as exc:  # verify does not know the seq: answer with it
            return wire.encode_error(frame.seq, exc.code, exc.message)
        for cached_line, reply in self.replies:
            if cached_line == line:
                return reply  # a duplicate delivery: same answer, nothing moves
        why = self.guard.check(ctr)
        if why is not None:  # signed, so that the host may trust the counter and catch up
            return wire.sign(frame.seq, "ERR", (("code", wire.E_REPLAY), ("msg", why)), key,
                             self.guard.last)
        try:
            self.guard.accept(ctr)
        except OSError:
            return wire.encode_error(frame.seq, wire.E_HW, "cannot save the frame counter")
        reply = self.app.handle_line(line)
        self.replies.append((line, reply))
        if len(self.replies) > REPLY_CACHE:
            self.replies.pop(0)
        return reply

    def hub_command(self, name: str, payload: bytes) -> None:
        """Turn a hub command into a SET frame for the App; refusals go to ``T log``."""
        try:
            text = payload.decode().strip()
        except UnicodeError:
            text = ""
        s = self.app.bank.state
        fields = None  # type: Any
        if name == "end":
            end = text.upper() if text.upper() in ("A", "B") else None
            for e in ("A", "B"):
                if text == self.m["labels"][e]:
                    end = e
            if end is not None:
                fields = [("end", end), ("mask", s.mask), ("open", s.open_)]
        elif name == "bearing" and self.m["bearing"] is not None:
            try:  # the codec's reader: finite decimals only (no nan, inf or 1_0)
                wanted = wire.parse_decimal(text)
            except ValueError:
                wanted = None
            if wanted is not None and -360.0 <= wanted <= 360.0:
                fields = [("end", end_for_bearing(wanted, self.m["bearing"])),
                          ("mask", s.mask), ("open", s.open_)]
        elif name == "ohms":
            fields = [("end", s.end), ("ohms", text), ("open", False)]
        elif name == "open" and text in ("ON", "OFF"):
            fields = [("end", s.end), ("mask", s.mask), ("open", text == "ON")]
        elif name == "preset" and text in self.m["presets"]:
            p = self.m["presets"][text]
            fields = [("end", p["end"] or s.end), ("open", p["open"])]
            if p["ohms"] is not None:
                fields.append(("ohms", wire.format_ohms(p["ohms"])))
            else:
                fields.append(("mask", s.mask if p["mask"] is None else p["mask"]))
        elif name == "preset" and text == CUSTOM:
            return
        elif name == "flip" and text == "PRESS":
            fields = [("end", "B" if s.end == "A" else "A"), ("mask", s.mask),
                      ("open", s.open_)]
        elif name == "short" and self.has_short and text in ("ON", "OFF"):
            fields = [("end", s.end), ("mask", s.mask), ("open", s.open_),
                      ("short", text == "ON")]
        if fields is None:
            self.client.publish(self.t + "log", "refused %s/set %s" % (name, text[:40]))
            return
        self.hub_seq = self.hub_seq % wire.SEQ_MAX + 1
        try:
            line = wire.encode(self.hub_seq, "SET", fields)
        except ValueError:
            self.client.publish(self.t + "log", "refused %s/set %s" % (name, text[:40]))
            return
        reply = self.app.handle_line(line)
        if not reply.startswith(("NS1 %d OK" % self.hub_seq).encode()):
            self.client.publish(self.t + "log", "refused %s/set: %s" % (
                name, reply.decode().strip()))


def make_client(m: dict) -> MQTTClient:
    """An :class:`MQTTClient` for the ``"mqtt"`` block, with TLS when asked for."""
    ctx = None
    if m["tls"]:
        import ssl
        ctx = ssl.SSLContext(ssl.PROTOCOL_TLS_CLIENT)
        if m["ca_file"]:
            try:
                ctx.load_verify_locations(cadata=read_ca(m["ca_file"]))
            except ValueError as exc:  # MicroPython: "invalid cert"
                raise TLSError("mqtt.ca_file %s: not a usable certificate (%s)"
                               % (m["ca_file"], exc))
            ctx.verify_mode = ssl.CERT_REQUIRED  # type: ignore[attr-defined]
        else:
            ctx.verify_mode = ssl.CERT_NONE  # type: ignore[attr-defined]
    return MQTTClient(client_id_for(m["id"]), m["host"], m["port"], m["user"],
                      m["password"], m["keepalive_s"], ctx, m["server_hostname"])


def read_ca(path: str) -> bytes:
    """The CA certificate of ``mqtt.ca_file`` in DER (MicroPython's TLS does not read PEM).

    Problems raise TLSError (an OSError: the link logs it and retries with backoff, the
    serial link goes on working), naming the key and the file."""
    try:
        with open(path, "rb") as f:
            ca = f.read()
    except OSError as exc:
        raise TLSError("mqtt.ca_file %s: cannot read it (%s)" % (path, exc))
    # DER starts with a SEQUENCE tag (0x30); PEM is text ("-----BEGIN CERTIFICATE-----")
    if not ca or ca[0] != 0x30:
        raise TLSError("mqtt.ca_file %s: not a DER certificate (convert PEM with "
                       "openssl x509 -outform der)" % path)
    return ca


def client_id_for(device_id: str) -> str:
    """A client id unique per connection: the device id plus random hex."""
    import os
    import binascii
    return "ns-" + device_id + "-" + binascii.hexlify(os.urandom(4)).decode()


def serve(app: "Any", m: dict, idle: "Any", clock: "Any", port: "Any" = None) -> None:
    """Run the MQTT link for ever, beside the serial ``port`` when one is given.

    Wi-Fi is joined before each connection attempt where the board has it (net.py);
    ``idle()`` runs after each pass (feeds the watchdog)."""
    import net
    link = BoardMqtt(app, m, make_client, clock, net_up=net.joiner(m["wifi"], clock, idle),
                     idle=idle)
    asm = LineAssembler()
    while True:
        if port is not None:
            data = port.read(2)
            if data:
                for line in asm.feed(data):
                    port.write(app.handle_line(line))
        link.step(20)
        idle()
