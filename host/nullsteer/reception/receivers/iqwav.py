"""``iqwav:PATH`` — recorded IQ: a 2-channel WAV file (I left, Q right), read with ``wave``.

URL: ``iqwav:recordings/band.wav?centre_mhz=1.8`` (a path relative to the working
folder, or ``iqwav:/abs/path.wav``). Options (plus the level options of :mod:`.iq`):

``centre_mhz``  the recording's centre frequency, MHz; with ``--freq`` the signal's
                offset is ``freq - centre`` (else ``offset_khz``, default 0)

8-bit WAV samples are unsigned (centre 128, the WAV convention), 16-bit ones signed
little-endian; both are scaled to +-1 full scale. Each reading takes the next block
of ``duration_s``; at the end of the file the recording starts again from the top.
"""

from __future__ import annotations

import wave
from dataclasses import replace
from pathlib import Path

import numpy as np

from nullsteer.errors import ConfigError, MeasurementError
from nullsteer.reception.receivers.base import Reading, ReceiverUrl
from nullsteer.reception.receivers.iq import IqSettings, iq_reading, parse_iq_settings, samples_needed
from nullsteer.reception.receivers.spectrum import s16_to_complex


def wav_to_complex(frames: bytes, sample_width: int) -> np.ndarray:
    """Interleaved 2-channel WAV frames to complex samples of +-1 full scale."""
    if sample_width == 1:  # unsigned, 128 = zero (RIFF WAVE convention)
        a = (np.frombuffer(frames, dtype=np.uint8).astype(np.float32) - 128.0) / 128.0
        return a[0::2] + 1j * a[1::2]
    return s16_to_complex(frames)


class IqWavReceiver:
    """Readings from a recorded IQ file; see the module docstring."""

    name = "iqwav"
    unit = "dBFS"
    resolution_db = 0.0

    def __init__(self, path: str | Path, settings: IqSettings | None = None,
                 centre_hz: float | None = None, freq_hz: float | None = None,
                 url: str = "") -> None:
        self.path = Path(path)
        self.url = url or f"iqwav:{self.path}"
        self.centre_hz = centre_hz
        self._freq_hz = freq_hz
        settings = settings or IqSettings()
        if centre_hz is not None and freq_hz is not None:
            settings = replace(settings, offset_hz=freq_hz - centre_hz)
        self.settings = settings
        try:
            self._wav = wave.open(str(self.path), "rb")
        except FileNotFoundError:
            raise ConfigError("--receiver", f"no such IQ recording: {self.path}") from None
        except (wave.Error, EOFError, OSError) as exc:
            raise ConfigError("--receiver", f"{self.path} is not a readable WAV file: {exc}") from None
        if self._wav.getnchannels() != 2:
            self._wav.close()
            raise ConfigError("--receiver", f"{self.path} has {self._wav.getnchannels()} "
                                            "channel(s); IQ needs 2 (I, Q)")
        if self._wav.getsampwidth() not in (1, 2):
            self._wav.close()
            raise ConfigError("--receiver", f"{self.path}: {8 * self._wav.getsampwidth()}-bit "
                                            "samples; use 8- or 16-bit PCM")
        self.rate_hz = float(self._wav.getframerate())
        if abs(self.settings.offset_hz) >= self.rate_hz / 2:
            self._wav.close()
            raise ConfigError("--freq", f"offset {self.settings.offset_hz:g} Hz lies outside "
                                        f"the recording's +-{self.rate_hz / 2:g} Hz")

    def close(self) -> None:
        self._wav.close()

    def __enter__(self) -> IqWavReceiver:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def _frames(self, count: int) -> bytes:
        total = self._wav.getnframes()
        if total < count:
            raise MeasurementError(f"{self.path} holds {total} samples, a reading needs "
                                   f"{count} (shorten duration_s or raise rbw_hz)")
        if self._wav.tell() + count > total:
            self._wav.rewind()
        return self._wav.readframes(count)

    def read(self) -> Reading:
        n = samples_needed(self.settings, self.rate_hz)
        iq = wav_to_complex(self._frames(n), self._wav.getsampwidth())
        return iq_reading(iq, self.rate_hz, self.settings, self.url, self._freq_hz)

    def read_db(self) -> float:
        return self.read().level_db

    def freq_hz(self) -> float | None:
        return self._freq_hz


def open_url(u: ReceiverUrl, freq_hz: float | None = None) -> IqWavReceiver:
    """An :class:`IqWavReceiver` for a parsed ``iqwav:`` URL."""
    settings = parse_iq_settings(u)
    centre = u.pop_float("centre_mhz", None, minimum=0.0, maximum=2000.0)
    u.check_used()
    path = (u.host + u.path) if u.host else u.path
    if not path:
        raise ConfigError("--receiver", "iqwav: needs a file, e.g. iqwav:recording.wav")
    return IqWavReceiver(path, settings, None if centre is None else centre * 1e6,
                         freq_hz, url=u.text)


def write_iq_wav(path: str | Path, samples: np.ndarray, rate_hz: float, bits: int = 16) -> None:
    """Write complex samples (+-1 full scale) as a 2-channel WAV of 8 or 16 bits."""
    z = np.asarray(samples)
    inter = np.empty(2 * len(z), dtype=np.float64)
    inter[0::2], inter[1::2] = z.real, z.imag
    if bits == 8:
        data = np.clip(np.round(inter * 128.0 + 128.0), 0, 255).astype(np.uint8).tobytes()
    else:
        data = np.clip(np.round(inter * 32768.0), -32768, 32767).astype("<i2").tobytes()
    with wave.open(str(path), "wb") as w:
        w.setnchannels(2)
        w.setsampwidth(bits // 8)
        w.setframerate(int(round(rate_hz)))
        w.writeframes(data)
