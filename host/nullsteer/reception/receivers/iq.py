"""What IQ receivers (``rtltcp://``, ``iqwav:``) share: their level settings and readings.

URL options common to both:

``mode``          ``carrier`` (default) or ``channel`` (see :mod:`.spectrum`)
``bandwidth_hz``  channel width for ``channel`` mode (default 2400)
``rbw_hz``        largest resolution bandwidth (Hann ENBW) wanted; sets the segment
                  length (default 50)
``duration_s``    samples per reading, seconds (default 0.2)
``offset_khz``    where the signal lies relative to the centre frequency, kHz (default
                  0; ``rtltcp`` tunes ``freq - offset`` so the signal lands there)
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from nullsteer.errors import ConfigError
from nullsteer.reception.receivers.base import Reading, ReceiverUrl
from nullsteer.reception.receivers.spectrum import Mode, band_level, segment_length, welch


@dataclass(frozen=True)
class IqSettings:
    """How a level is taken from IQ samples (SI units)."""

    mode: Mode = Mode.CARRIER
    bandwidth_hz: float = 2400.0
    rbw_hz: float = 50.0
    duration_s: float = 0.2
    offset_hz: float = 0.0

    def with_overrides(self, mode: str | None = None, bandwidth_hz: float | None = None
                       ) -> IqSettings:
        """These settings with the command line's ``--mode`` / ``--bandwidth`` applied."""
        out = self
        if mode is not None:
            out = replace(out, mode=Mode(mode))
        if bandwidth_hz is not None:
            if not bandwidth_hz > 0:
                raise ConfigError("--bandwidth", f"must be > 0, got {bandwidth_hz:g}")
            out = replace(out, bandwidth_hz=float(bandwidth_hz))
        return out


def parse_iq_settings(u: ReceiverUrl) -> IqSettings:
    """The common options of an IQ receiver URL (removed from ``u.options``)."""
    mode = u.pop_choice("mode", "carrier", tuple(m.value for m in Mode))
    return IqSettings(
        mode=Mode(mode),
        bandwidth_hz=u.pop_float("bandwidth_hz", 2400.0, minimum=0.0, exclusive_min=True,
                                 maximum=10e6) or 2400.0,
        rbw_hz=u.pop_float("rbw_hz", 50.0, minimum=0.01, maximum=1e6) or 50.0,
        duration_s=u.pop_float("duration_s", 0.2, minimum=0.001, maximum=60.0) or 0.2,
        offset_hz=1e3 * (u.pop_float("offset_khz", 0.0, minimum=-5e3, maximum=5e3) or 0.0))


def samples_needed(settings: IqSettings, rate_hz: float) -> int:
    """Samples in one reading: the duration, but at least two segments."""
    n = segment_length(rate_hz, settings.rbw_hz)
    return max(int(round(settings.duration_s * rate_hz)), 2 * n)


def iq_reading(samples: np.ndarray, rate_hz: float, settings: IqSettings, url: str,
               freq_hz: float | None) -> Reading:
    """A :class:`Reading` in dBFS of ``samples`` at the settings' offset."""
    n = segment_length(rate_hz, settings.rbw_hz)
    w = welch(samples, rate_hz, n)
    level, spread = band_level(w, settings.offset_hz, settings.mode, settings.bandwidth_hz)
    return Reading(level, spread, "dBFS", url, freq_hz, parts=w.segments_psd.shape[0])
