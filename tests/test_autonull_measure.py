"""Measurement sources: the command and manual readers, averaging, error messages."""

from __future__ import annotations

import io
import math
import sys

import pytest

from nullsteer.errors import MeasurementError
from nullsteer.reception.measure import CommandSource, ManualSource, Meter, parse_level_db, power_mean_db


def test_parse_levels():
    assert parse_level_db("-87.5") == -87.5
    assert parse_level_db("  -87.5 dBm \n") == -87.5
    assert parse_level_db("+3e1 dB") == 30.0
    for bad in ("", "S9+10", "-87.5 -80", "nan", "level: -80"):
        with pytest.raises(MeasurementError):
            parse_level_db(bad)


def test_power_mean():
    # two equal powers average to themselves; -inf-like tiny one halves the power: -3.01 dB
    # (power averaging; common practice)
    assert power_mean_db([-80.0, -80.0]) == pytest.approx(-80.0)
    assert power_mean_db([-80.0, -300.0]) == pytest.approx(-80.0 - 10 * math.log10(2), abs=1e-9)


def test_command_source_reads_last_line():
    src = CommandSource([sys.executable, "-c", "print('tuning'); print('-91.25 dBm')"])
    assert src.read_db() == -91.25


@pytest.mark.parametrize("argv, fragment", [
    ([sys.executable, "-c", "print('no signal')"], "expected one level"),
    ([sys.executable, "-c", "import sys; sys.exit(3)"], "exited with 3"),
    ([sys.executable, "-c", "pass"], "printed nothing"),
    (["/nonexistent/level-reader"], "not found"),
])
def test_command_source_errors_are_clear(argv, fragment):
    with pytest.raises(MeasurementError, match=fragment):
        CommandSource(argv).read_db()


def test_command_source_timeout():
    src = CommandSource([sys.executable, "-c", "import time; time.sleep(5)"], timeout_s=0.3)
    with pytest.raises(MeasurementError, match="within 0.3 s"):
        src.read_db()


def test_manual_source_retries_then_gives_up():
    out = io.StringIO()
    src = ManualSource(stdin=io.StringIO("S7\n-73\n"), out=out)
    assert src.read_db() == -73.0
    assert "try again" in out.getvalue()
    with pytest.raises(MeasurementError):
        ManualSource(stdin=io.StringIO(""), out=io.StringIO()).read_db()


def test_meter_dwells_and_averages():
    slept = []
    values = iter([-80.0, -80.0, -80.0])

    class Src:
        name = "x"

        def read_db(self):
            return next(values)

    m = Meter(Src(), dwell_s=0.5, reads=3, interval_s=0.1, sleep=slept.append)
    assert m.measure_db() == pytest.approx(-80.0)
    assert slept == [0.5, 0.1, 0.1]
