"""iqwav: recorded IQ in a 2-channel WAV, written here with the standard library's
``wave`` module alone (not the package's writer).

Sources: the RIFF WAVE convention (8-bit PCM unsigned with 128 as zero, 16-bit signed
little-endian; common practice, Microsoft/IBM Multimedia Programming Interface 1991,
from memory); a complex tone of amplitude A has power A^2 (20 log10 A dBFS).
"""

from __future__ import annotations

import json
import math
import wave

import numpy as np
import pytest

from nullsteer.cli import main
from nullsteer.reception.receivers import open_receiver

RATE = 48_000


def write_wav(path, amp, tone_hz, bits, channels=2, seconds=1.0):
    n = int(RATE * seconds)
    t = np.arange(n) / RATE
    z = amp * np.exp(2j * np.pi * tone_hz * t)
    frames = np.empty(2 * n)
    frames[0::2], frames[1::2] = z.real, z.imag
    if bits == 8:
        data = np.round(frames * 127 + 128).astype(np.uint8).tobytes()
    else:
        data = np.round(frames * 32767).astype("<i2").tobytes()
    if channels == 1:
        data = data[: len(data) // 2]
    with wave.open(str(path), "wb") as w:
        w.setnchannels(channels)
        w.setsampwidth(bits // 8)
        w.setframerate(RATE)
        w.writeframes(data)


@pytest.mark.parametrize("bits, amp_db", [(16, -12.0), (16, -40.0), (8, -10.0)])
def test_tone_level_from_a_recording(tmp_path, bits, amp_db):
    p = tmp_path / "rec.wav"
    write_wav(p, 10 ** (amp_db / 20), 3_000.0, bits)
    # the file's full scale is 127/128 (8-bit) or 32767/32768 (16-bit) of the +-1 scaling
    scale_db = 20 * math.log10(127 / 128 if bits == 8 else 32767 / 32768)
    with open_receiver(f"iqwav:{p}?centre_mhz=1.8&duration_s=0.3", freq_hz=1.803e6) as rx:
        for _ in range(5):  # past the end of the 1 s file: it starts again
            r = rx.read()
            # 8 bits: the rounding error of a periodic tone is itself periodic (it falls
            # partly on the tone), worth up to ~1/40 of its amplitude here: 0.2 dB
            assert r.level_db == pytest.approx(amp_db + scale_db, abs=0.2 if bits == 8 else 0.02)


def test_level_command_on_a_recording(tmp_path, capsys):
    p = tmp_path / "rec.wav"
    write_wav(p, 0.1, -5_000.0, 16)
    code = main(["level", "--receiver", f"iqwav:{p}?offset_khz=-5", "--json"])
    out = json.loads(capsys.readouterr().out)
    assert code == 0 and out["unit"] == "dBFS" and out["mode"] == "carrier"
    assert out["level_db"] == pytest.approx(-20.0, abs=0.05)
    # channel mode over 20 kHz holds the same single tone
    assert main(["level", "--receiver", f"iqwav:{p}?offset_khz=-5", "--mode", "channel",
                 "--bandwidth", "20000", "--json"]) == 0
    assert json.loads(capsys.readouterr().out)["level_db"] == pytest.approx(-20.0, abs=0.05)


@pytest.mark.parametrize("make, fragment", [
    (lambda p: write_wav(p, 0.1, 1e3, 16, channels=1), "IQ needs 2"),
    (lambda p: p.write_bytes(b"not a wav"), "not a readable WAV"),
    (lambda p: None, "no such IQ recording"),
])
def test_bad_recordings_exit_2(tmp_path, capsys, make, fragment):
    p = tmp_path / "bad.wav"
    make(p)
    assert main(["level", "--receiver", f"iqwav:{p}"]) == 2
    err = capsys.readouterr().err
    assert fragment in err and err.count("\n") == 1
