"""``sim://`` — the simulator's virtual receiver as a receiver (tests and the demo, no radio).

It reads :class:`nullsteer.reception.virtual.VirtualReceiver` at the relay state the
board reports *now*, so it only exists beside a board: the caller passes
``virtual=`` (the receiver) and ``board_state=`` (``() -> (fed_end, mask, open)``) to
:func:`nullsteer.reception.receivers.open_receiver`.

``sim://`` gives the virtual receiver's level in dBm; ``sim://?iq=1`` turns it into
8-bit IQ (:mod:`.synth`, ``gain_db`` dB from dBm to dBFS, default 60) and measures that
with the same Welch estimator as the IQ receivers (carrier mode by default; the level
options of :mod:`.iq` apply).
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

from nullsteer.errors import ConfigError
from nullsteer.reception.receivers.base import Reading, ReceiverUrl, quantisation_sigma_db
from nullsteer.reception.receivers.iq import IqSettings, iq_reading, parse_iq_settings, samples_needed
from nullsteer.reception.receivers.spectrum import u8_to_complex
from nullsteer.reception.receivers.standin import virtual_scene
from nullsteer.reception.receivers.synth import IqSynth, quantise_u8

IQ_RATE_HZ = 48_000.0


class VirtualReceiverAdapter:
    """The virtual receiver at the board's present relay state."""

    name = "sim"

    def __init__(self, virtual: Any, freq_hz: float,
                 board_state: Callable[[], tuple[str, int, bool]],
                 settings: IqSettings | None = None, gain_db: float = 60.0, url: str = "sim://") -> None:
        self.virtual = virtual
        self._freq_hz = freq_hz
        self.board_state = board_state
        self.settings = settings
        self.url = url
        self.unit = "dBFS" if settings is not None else "dBm"
        self.resolution_db = 0.0
        self._scene = virtual_scene(virtual, freq_hz, board_state, gain_db)
        self._synth = IqSynth(IQ_RATE_HZ, seed=getattr(virtual.scenario, "seed", 1))

    def read(self) -> Reading:
        if self.settings is None:
            level = self.virtual.level_dbm(self._freq_hz, *self.board_state())
            jitter = float(getattr(self.virtual.scenario, "read_noise_db", 0.0))
            return Reading(level, max(jitter, quantisation_sigma_db(0.01)), self.unit, self.url,
                           self._freq_hz)
        tones, density = self._scene(self._freq_hz - self.settings.offset_hz)
        n = samples_needed(self.settings, IQ_RATE_HZ)
        raw = quantise_u8(self._synth.block(n, tones, density))
        return iq_reading(u8_to_complex(raw), IQ_RATE_HZ, self.settings, self.url, self._freq_hz)

    def read_db(self) -> float:
        return self.read().level_db

    def freq_hz(self) -> float | None:
        return self._freq_hz

    def close(self) -> None:
        pass


def open_url(u: ReceiverUrl, freq_hz: float | None = None, virtual: Any = None,
             board_state: Callable[[], tuple[str, int, bool]] | None = None
             ) -> VirtualReceiverAdapter:
    if virtual is None or board_state is None or freq_hz is None:
        raise ConfigError("--receiver", "sim:// is the simulator's virtual receiver: it needs "
                                        "a board and a station file (use it with autonull)")
    iq = u.pop_choice("iq", "0", ("0", "1"))
    settings = parse_iq_settings(u) if iq == "1" else None
    gain = u.pop_float("gain_db", 60.0, minimum=-100.0, maximum=200.0)
    u.check_used()
    return VirtualReceiverAdapter(virtual, freq_hz, board_state, settings,
                                  60.0 if gain is None else gain, url=u.text)
