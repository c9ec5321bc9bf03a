"""Home-automation discovery configs for one antenna board (MQTT discovery convention).

Common open-source home-automation hubs read discovery configs published retained under a
prefix (default ``homeassistant``). The convention offers one *device-based* config per
device on ``<prefix>/device/<object id>/config``: a ``device`` block, an ``origin``
block (required in this form: who publishes the config), options shared by all its
entities (availability, QoS) and a ``components`` map of entities, each with its
``platform``. An entity is removed by publishing the device config with that component
reduced to its ``platform`` key; a whole per-entity config (the older form,
``<prefix>/<component>/<node id>/<object id>/config``) is removed by an empty retained
payload. A hub announces a restart with ``online`` on ``<prefix>/status``; devices then
publish again (this board after a short random delay, so that many devices do not all
answer at once).

This module builds those payloads. It is written in the common subset of CPython and
MicroPython, like :mod:`nullsteer.protocol.wire`, and is copied onto the board as
``discovery.py``: the board publishes its discovery itself (see firmware/mqtt_link.py),
so the hub drives the antenna with the host switched off.

Entities of a board whose topics start with ``T = <base>/<id>/`` (components map key:
platform, topics):

* ``end`` select — the two end labels; ``T end`` / ``T end/set``;
* ``bearing`` number — the null bearing in degrees (0..359, the board picks the nearer
  end); ``T bearing`` / ``T bearing/set`` (only when the board knows the loop's bearing);
* ``flip`` button — reverse the null; ``T flip/set``;
* ``ohms`` number — min/max from the ladder table, step = the smallest gap between
  neighbouring settings; ``T ohms`` / ``T ohms/set`` (only with a table);
* ``preset`` select — preset names plus ``custom``; ``T preset`` / ``T preset/set``;
* ``open`` switch — ``ON``/``OFF``; ``T open`` / ``T open/set`` (only with an open relay);
* ``short`` switch — ``ON``/``OFF``; ``T short`` / ``T short/set`` (only when the
  board's status reports a shorted state);
* ``boots``, ``firmware``, ``uptime`` sensors, marked diagnostic, read from the JSON on
  ``T diag``.

``unique_id`` values start with the object id ``nullsteer_<base>_<id>`` (the topic
base's slashes as ``_``), so two installations with different topic bases on one broker
never collide.
"""

CUSTOM = "custom"
DEFAULT_PREFIX = "homeassistant"
ORIGIN_NAME = "nullsteer"
FLIP_PAYLOAD = "PRESS"
#: Per-entity config topics of earlier firmware, retracted: (platform, object id).
LEGACY = (("select", "end"), ("number", "ohms"), ("select", "preset"), ("switch", "open"))
#: Every component this board may publish, in publishing order, with its platform.
PLATFORMS = (("end", "select"), ("bearing", "number"), ("flip", "button"),
             ("ohms", "number"), ("preset", "select"), ("open", "switch"),
             ("short", "switch"), ("boots", "sensor"), ("firmware", "sensor"),
             ("uptime", "sensor"))


def ohms_span(table):
    """(min_ohm, max_ohm, step_ohm) of a ladder table ((mask, ohms) sorted by ohms).

    ``step_ohm`` is the smallest gap between distinct neighbouring values, rounded down
    to 0.1 ohm and at least 0.1 ohm; None for an empty table."""
    if not table:
        return None
    values = sorted(set([row[1] for row in table]))
    step = 0.0
    for i in range(1, len(values)):
        gap = values[i] - values[i - 1]
        if step == 0.0 or gap < step:
            step = gap
    step = max(0.1, int(step * 10) / 10.0) if step > 0 else 1.0
    return (values[0], values[-1], step)


def object_id(base, dev_id):
    """The device's discovery object id: ``nullsteer_<base>_<id>`` (``/`` as ``_``)."""
    return "nullsteer_" + base.replace("/", "_") + "_" + dev_id


def _control(t, oid, key, name):
    return {"name": name, "unique_id": oid + "_" + key, "state_topic": t + key,
            "command_topic": t + key + "/set"}


def _switch(t, oid, key, name):
    c = _control(t, oid, key, name)
    c.update({"payload_on": "ON", "payload_off": "OFF", "state_on": "ON", "state_off": "OFF"})
    return c


def _diagnostic(t, oid, key, name, field):
    return {"name": name, "unique_id": oid + "_" + key, "state_topic": t + "diag",
            "value_template": "{{ value_json." + field + " }}",
            "entity_category": "diagnostic"}


def components(base, dev_id, end_options, span, preset_names, has_open, has_short,
               has_bearing):
    """The ``components`` map: key -> config (a platform-only entry retracts it)."""
    t = base + "/" + dev_id + "/"
    oid = object_id(base, dev_id)
    made = {}
    end = _control(t, oid, "end", "Fed end")
    end.update({"options": list(end_options), "icon": "mdi:compass"})
    made["end"] = end
    if has_bearing:
        b = _control(t, oid, "bearing", "Null bearing")
        b.update({"min": 0, "max": 359, "step": 1, "mode": "box",
                  "unit_of_measurement": "\u00b0", "icon": "mdi:compass-outline"})
        made["bearing"] = b
    made["flip"] = {"name": "Flip null", "unique_id": oid + "_flip",
                    "command_topic": t + "flip/set", "payload_press": FLIP_PAYLOAD,
                    "icon": "mdi:swap-horizontal"}
    if span is not None:
        ohms = _control(t, oid, "ohms", "Termination")
        ohms.update({"min": span[0], "max": span[1], "step": span[2], "mode": "box",
                     "unit_of_measurement": "\u03a9"})
        made["ohms"] = ohms
    if preset_names:
        p = _control(t, oid, "preset", "Preset")
        p["options"] = list(preset_names) + [CUSTOM]
        made["preset"] = p
    if has_open:
        made["open"] = _switch(t, oid, "open", "Open termination")
    if has_short:
        made["short"] = _switch(t, oid, "short", "Shorted termination")
    made["boots"] = _diagnostic(t, oid, "boots", "Boots", "boots")
    made["boots"]["state_class"] = "total_increasing"
    made["firmware"] = _diagnostic(t, oid, "firmware", "Firmware", "fw")
    up = _diagnostic(t, oid, "uptime", "Uptime", "up_s")
    up.update({"device_class": "duration", "unit_of_measurement": "s",
               "state_class": "total_increasing"})
    made["uptime"] = up
    out = {}
    for key, platform in PLATFORMS:
        if key in made:
            made[key]["platform"] = platform
            out[key] = made[key]
        else:
            out[key] = {"platform": platform}
    return out


def device_config(prefix, base, dev_id, name, fw, model, end_options, span, preset_names,
                  has_open, has_short=False, has_bearing=False, page_url=None):
    """The device-based discovery message of one board: (topic, payload dict).

    Parameters
    ----------
    prefix : str
        Discovery prefix (the convention's default is ``homeassistant``).
    base, dev_id : str
        The board's topic base and device id (topics ``<base>/<dev_id>/...``).
    name : str
        Name shown for the device.
    fw, model : str
        Firmware version and board name (device block and origin).
    end_options : list of str
        Labels of fed end A and B (what the fed-end select shows and sends).
    span : tuple or None
        ``ohms_span(table)``; None leaves the termination number out.
    preset_names : list of str
        Preset names; the select also offers ``custom`` (the state matches no preset).
    has_open, has_short, has_bearing : bool
        Open relay; shorted state reported; the loop's bearing known (bearing number).
    page_url : str or None
        The control page (``nullsteer serve``), shown by the hub as the device's
        configuration link.
    """
    oid = object_id(base, dev_id)
    t = base + "/" + dev_id + "/"
    device = {"identifiers": [oid], "name": name, "model": model, "sw_version": fw,
              "manufacturer": "nullsteer (open source)"}
    if page_url:
        device["configuration_url"] = page_url
    payload = {
        "device": device,
        "origin": {"name": ORIGIN_NAME, "sw_version": fw},
        "availability_topic": t + "avail",
        "payload_available": "online",
        "payload_not_available": "offline",
        "qos": 1,
        "components": components(base, dev_id, end_options, span, preset_names, has_open,
                                 has_short, has_bearing),
    }
    return (prefix + "/device/" + oid + "/config", payload)


def legacy_topics(prefix, dev_id):
    """Per-entity config topics earlier firmware published: retract them (empty payload)."""
    node = "nullsteer_" + dev_id
    return [prefix + "/" + platform + "/" + node + "/" + key + "/config"
            for platform, key in LEGACY]
