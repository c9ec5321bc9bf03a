"""Receivers: where signal levels come from, named by a URL whose scheme picks the handler
(as pyserial's ``serial_for_url`` picks a port handler).

=========== ======================================================= ===================
scheme      example                                                 module
=========== ======================================================= ===================
rigctl      ``rigctl://127.0.0.1:4532`` (Hamlib's rigctld)            :mod:`.rigctl`
rtltcp      ``rtltcp://127.0.0.1:1234?freq_mhz=1.83&gain=30``       :mod:`.rtltcp`
iqwav       ``iqwav:recording.wav?centre_mhz=1.8``                  :mod:`.iqwav`
sim         ``sim://`` (the simulator's virtual receiver, loopback)  :mod:`.loopback`
=========== ======================================================= ===================

Every receiver returns :class:`~.base.Reading` objects (level, spread, unit) and is
also a measurement source (``read_db``) for :class:`nullsteer.reception.measure.Meter`.
Readings of a real radio depend on its AGC and its meter's resolution; IQ levels
depend on the SDR's gain: keep both fixed while comparing settings.
"""

from __future__ import annotations

import importlib
from typing import Any

from nullsteer.errors import ConfigError
from nullsteer.reception.receivers.base import Reading, Receiver, split_url

#: scheme -> module defining ``open_url(parsed_url, **context)``
SCHEMES = {
    "rigctl": "nullsteer.reception.receivers.rigctl",
    "rtltcp": "nullsteer.reception.receivers.rtltcp",
    "iqwav": "nullsteer.reception.receivers.iqwav",
    "sim": "nullsteer.reception.receivers.loopback",
}

__all__ = ["Reading", "Receiver", "SCHEMES", "open_receiver"]


def open_receiver(url: str, freq_hz: float | None = None, mode: str | None = None,
                  bandwidth_hz: float | None = None, **context: Any) -> Receiver:
    """Open the receiver ``url`` names.

    Parameters
    ----------
    url : str
        The receiver URL; an unknown scheme is a ConfigError (exit 2).
    freq_hz : float or None
        The frequency of interest (``--freq``): tunes IQ receivers; a rig is not retuned.
    mode, bandwidth_hz : str, float or None
        ``--mode`` / ``--bandwidth`` for IQ receivers (override the URL's options).
    context
        Extra objects a scheme needs (``sim://``: ``virtual``, ``board_state``).
    """
    u = split_url(url)
    if u.scheme not in SCHEMES:
        raise ConfigError("--receiver", f"unknown scheme {u.scheme!r} (use one of "
                                        f"{', '.join(s + ':' for s in SCHEMES)})")
    module = importlib.import_module(SCHEMES[u.scheme])
    if u.scheme == "rigctl":
        if mode is not None or bandwidth_hz is not None:
            raise ConfigError("--mode" if mode is not None else "--bandwidth",
                              "applies to IQ receivers only; a rig's level is its S-meter")
        return module.open_url(u)  # type: ignore[no-any-return]
    receiver = module.open_url(u, freq_hz=freq_hz, **context)
    if mode is not None or bandwidth_hz is not None:
        if receiver.settings is None:
            raise ConfigError("--mode" if mode is not None else "--bandwidth",
                              "sim:// gives the virtual receiver's level; add ?iq=1 to "
                              "measure it from IQ")
        receiver.settings = receiver.settings.with_overrides(mode, bandwidth_hz)
    return receiver  # type: ignore[no-any-return]
