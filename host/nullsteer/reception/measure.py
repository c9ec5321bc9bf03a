"""Measurement sources for the auto-null: where a signal level in dB comes from.

A source answers one question, "what is the level now?", as a float in dB (any fixed
reference: dBm, dBFS, S-meter dB; only differences matter). Three kinds:

``sim``
    The virtual receiver of the simulator (:mod:`nullsteer.reception.virtual`), which reads
    the simulated board's actual relays.
``command``
    A user command (argv, no shell) that prints one level in dB, e.g. a script asking
    the receiver software; the last non-empty line of its standard output is parsed as a
    number, optionally followed by a unit word (``-87.5``, ``-87.5 dBm``). A non-zero
    exit, a timeout or an unparsable line raises
    :class:`~nullsteer.errors.MeasurementError` (exit code 5).
``manual``
    Prompts for a reading typed by the user (an S-meter read by eye).

:class:`Meter` wraps a source with the dwell time after each switching and the number
of reads averaged (in power) per setting.
"""

from __future__ import annotations

import math
import re
import shlex
import subprocess
import sys
import time
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import Protocol, TextIO

from nullsteer.errors import ConfigError, MeasurementError

_NUMBER = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(?:[A-Za-z%/µ]+)?\s*$")


class Source(Protocol):
    """Anything with ``read_db() -> float``."""

    name: str

    def read_db(self) -> float:
        """One reading of the level now, dB."""


def parse_level_db(text: str, what: str = "reading") -> float:
    """A level in dB from one line such as ``-87.5`` or ``-87.5 dBm``.

    Raises MeasurementError quoting the text when it is not one finite number.
    """
    m = _NUMBER.match(text)
    if not m:
        raise MeasurementError(f"{what}: expected one level in dB such as -87.5, got {text.strip()!r}")
    value = float(m.group(1))
    if not math.isfinite(value):
        raise MeasurementError(f"{what}: level must be finite, got {text.strip()!r}")
    return value


class CommandSource:
    """Runs ``argv`` for each reading and parses the last line it prints.

    Parameters
    ----------
    argv : sequence of str or str
        The command; a string is split with shell rules (no shell is run).
    timeout_s : float
        Longest wait for one reading, seconds.
    """

    name = "command"

    def __init__(self, argv: Sequence[str] | str, timeout_s: float = 10.0) -> None:
        try:
            self.argv = shlex.split(argv) if isinstance(argv, str) else list(argv)
        except ValueError as exc:  # e.g. "No closing quotation"
            raise ConfigError("--command", f"cannot split {argv!r} into words: {exc}") from None
        if not self.argv:
            raise ConfigError("--command", "is empty")
        if not timeout_s > 0:
            raise ConfigError("--command-timeout", f"must be > 0, got {timeout_s:g}")
        self.timeout_s = timeout_s

    def read_db(self) -> float:
        cmd = shlex.join(self.argv)
        try:
            proc = subprocess.run(self.argv, capture_output=True, text=True,
                                  timeout=self.timeout_s, stdin=subprocess.DEVNULL)
        except FileNotFoundError:
            raise MeasurementError(f"measurement command not found: {self.argv[0]!r}") from None
        except PermissionError:
            raise MeasurementError(f"measurement command not executable: {self.argv[0]!r}") from None
        except subprocess.TimeoutExpired:
            raise MeasurementError(f"measurement command {cmd!r} gave no reading within "
                                   f"{self.timeout_s:g} s") from None
        if proc.returncode != 0:
            err = (proc.stderr.strip().splitlines() or [""])[-1]
            raise MeasurementError(f"measurement command {cmd!r} exited with {proc.returncode}"
                                   + (f": {err}" if err else ""))
        lines = [ln for ln in proc.stdout.splitlines() if ln.strip()]
        if not lines:
            raise MeasurementError(f"measurement command {cmd!r} printed nothing")
        return parse_level_db(lines[-1], f"measurement command {cmd!r}")


class ManualSource:
    """Asks the user to type the level read on the receiver.

    Parameters
    ----------
    ask : callable
        ``ask(prompt) -> str``; default reads a line from ``stdin`` after writing the
        prompt to ``out``.
    """

    name = "manual"

    def __init__(self, ask: Callable[[str], str] | None = None,
                 stdin: TextIO | None = None, out: TextIO | None = None) -> None:
        self._stdin = stdin or sys.stdin
        self._out = out or sys.stderr
        self._ask = ask or self._default_ask
        self.label = ""

    def _default_ask(self, prompt: str) -> str:
        self._out.write(prompt)
        self._out.flush()
        line = self._stdin.readline()
        if not line:
            raise MeasurementError("manual reading: input ended (no level typed)")
        return line

    def read_db(self) -> float:
        for _ in range(3):
            text = self._ask(f"level in dB{self.label}? ")
            try:
                return parse_level_db(text, "manual reading")
            except MeasurementError as exc:
                self._out.write(f"  {exc}; try again\n")
        raise MeasurementError("manual reading: three unreadable answers, giving up")


def power_mean_db(levels_db: Sequence[float]) -> float:
    """Mean of levels taken in power, returned in dB."""
    if not levels_db:
        raise ValueError("no levels to average")
    return 10.0 * math.log10(sum(10.0 ** (x / 10.0) for x in levels_db) / len(levels_db))


@dataclass
class Meter:
    """A source plus how to read it after each switching.

    Parameters
    ----------
    source : Source
        Where readings come from.
    dwell_s : float
        Wait after a switching before the first read (relay settle, AGC), seconds.
    reads : int
        Readings averaged (in power) per measurement.
    interval_s : float
        Wait between readings, seconds.
    sleep : callable
        ``sleep(seconds)``; the simulator passes its virtual clock's.
    """

    source: Source
    dwell_s: float = 0.3
    reads: int = 3
    interval_s: float = 0.1
    sleep: Callable[[float], None] = time.sleep

    def __post_init__(self) -> None:
        if self.reads < 1:
            raise ConfigError("--reads", f"must be >= 1, got {self.reads}")
        if self.dwell_s < 0:
            raise ConfigError("--dwell", f"must be >= 0, got {self.dwell_s:g}")
        if self.interval_s < 0:
            raise ConfigError("--interval", f"must be >= 0, got {self.interval_s:g}")

    def measure(self, reads: int | None = None) -> Measurement:
        """Dwell, then ``reads`` readings (default ``self.reads``) with their spreads.

        A source with ``read()`` (a receiver, :mod:`nullsteer.reception.receivers`)
        gives each reading's own spread; a plain ``read_db`` source counts as exact.
        """
        n = self.reads if reads is None else reads
        self.sleep(self.dwell_s)
        levels: list[float] = []
        sigmas: list[float] = []
        read = getattr(self.source, "read", None)
        for k in range(n):
            if k:
                self.sleep(self.interval_s)
            if read is not None:
                r = read()
                levels.append(float(r.level_db))
                sigmas.append(float(r.spread_db))
            else:
                levels.append(self.source.read_db())
                sigmas.append(0.0)
        return Measurement(tuple(levels), tuple(sigmas))

    def measure_db(self, reads: int | None = None) -> float:
        """Dwell, then the power mean of ``reads`` readings (default ``self.reads``), dB."""
        return self.measure(reads).level_db


@dataclass(frozen=True)
class Measurement:
    """The readings taken at one setting: dB values and each one's own spread (dB)."""

    levels_db: tuple[float, ...]
    sigmas_db: tuple[float, ...]

    @property
    def level_db(self) -> float:
        """Power mean of the readings, dB."""
        return power_mean_db(self.levels_db)

    @property
    def spread_db(self) -> float:
        """Standard uncertainty of the mean level (one sigma), dB: the readings' scatter
        over sqrt(n), but never less than their own spreads allow."""
        n = len(self.levels_db)
        own = math.sqrt(sum(s * s for s in self.sigmas_db) / n / n)
        if n < 2:
            return own
        mean = sum(self.levels_db) / n
        var = sum((v - mean) ** 2 for v in self.levels_db) / (n - 1)
        return max(math.sqrt(var / n), own)
