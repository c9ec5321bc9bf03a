"""Home-automation discovery configs for one antenna board (MQTT discovery convention).

Common open-source home-automation hubs read entity configs published (retained) on
``<prefix>/<component>/<node id>/<object id>/config``, with the default prefix
``homeassistant``; a hub announces its own restarts with ``online`` on
``<prefix>/status``, after which devices publish their configs again. Each config names
its state and command topics, availability and a ``device`` block that groups the
entities. This module builds those payloads; it is written in the common subset of
CPython and MicroPython, like :mod:`nullsteer.protocol.wire`, and is copied onto the board as
``discovery.py``: the board publishes its discovery itself (see firmware/mqtt_link.py),
so the hub drives the antenna with the host switched off.

Entities of a board whose topics start with ``T = <base>/<id>/``:

* ``select`` *fed end* — options: the two end labels; ``T end`` / ``T end/set``;
* ``number`` *termination* (ohms) — min/max from the ladder table, step = the smallest
  gap between neighbouring settings; ``T ohms`` / ``T ohms/set`` (only with a table);
* ``select`` *preset* — preset names plus ``custom``; ``T preset`` / ``T preset/set``;
* ``switch`` *open termination* — ``ON``/``OFF``; ``T open`` / ``T open/set`` (only
  when the board has an open relay).
"""

CUSTOM = "custom"
DEFAULT_PREFIX = "homeassistant"


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


def _common(base, dev_id, object_id, name, device):
    t = base + "/" + dev_id + "/"
    return {
        "name": name,
        "unique_id": "nullsteer_" + dev_id + "_" + object_id,
        "availability_topic": t + "avail",
        "payload_available": "online",
        "payload_not_available": "offline",
        "state_topic": t + object_id,
        "command_topic": t + object_id + "/set",
        "qos": 1,
        "device": device,
    }


def entity_configs(prefix, base, dev_id, name, fw, model, end_options, span,
                   preset_names, has_open):
    """The discovery messages of one board: a list of (topic, payload dict).

    Parameters
    ----------
    prefix : str
        Discovery prefix (the convention's default is ``homeassistant``).
    base, dev_id : str
        The board's topic base and device id (topics ``<base>/<dev_id>/...``).
    name : str
        Name shown for the device.
    fw, model : str
        Firmware version and board name, shown in the device block.
    end_options : list of str
        Labels of fed end A and B (what the fed-end select shows and sends).
    span : tuple or None
        ``ohms_span(table)``; None leaves the termination number out.
    preset_names : list of str
        Preset names; the select also offers ``custom`` (the state matches no preset).
    has_open : bool
        Whether the board has an open relay (the open switch).
    """
    device = {"identifiers": ["nullsteer_" + dev_id], "name": name, "model": model,
              "sw_version": fw, "manufacturer": "nullsteer (open source)"}
    node = "nullsteer_" + dev_id
    out = []
    end = _common(base, dev_id, "end", "Fed end", device)
    end["options"] = list(end_options)
    end["icon"] = "mdi:compass"
    out.append((prefix + "/select/" + node + "/end/config", end))
    if span is not None:
        ohms = _common(base, dev_id, "ohms", "Termination", device)
        ohms.update({"min": span[0], "max": span[1], "step": span[2], "mode": "box",
                     "unit_of_measurement": "\u03a9"})
        out.append((prefix + "/number/" + node + "/ohms/config", ohms))
    if preset_names:
        preset = _common(base, dev_id, "preset", "Preset", device)
        preset["options"] = list(preset_names) + [CUSTOM]
        out.append((prefix + "/select/" + node + "/preset/config", preset))
    if has_open:
        sw = _common(base, dev_id, "open", "Open termination", device)
        sw.update({"payload_on": "ON", "payload_off": "OFF",
                   "state_on": "ON", "state_off": "OFF"})
        out.append((prefix + "/switch/" + node + "/open/config", sw))
    return out
