"""What every receiver gives: a :class:`Reading` (level, its spread, unit) and its URL.

A receiver is an object with ``url`` (without secrets), ``unit``, ``read() ->
Reading``, ``freq_hz() -> float | None`` (the frequency the receiver reports it is
tuned to, None when it cannot say), ``read_db()`` (the level alone, so a receiver is
also a measurement source for :class:`nullsteer.reception.measure.Meter`) and
``close()``.

``spread_db`` is the standard uncertainty (one sigma) of the reading's level, dB: the
scatter of what was averaged into it, and never less than the meter's resolution
allows (a meter with steps of ``r`` dB carries ``r / sqrt(12)`` of quantisation
uncertainty, the standard deviation of a uniform error; common practice).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Protocol
from urllib.parse import parse_qsl, urlsplit

from nullsteer.errors import ConfigError


@dataclass(frozen=True)
class Reading:
    """One level reading.

    Attributes
    ----------
    level_db : float
        The level, in ``unit``.
    spread_db : float
        Its standard uncertainty (one sigma), dB.
    unit : str
        ``"dBFS"`` (IQ receivers), ``"dB rel S9"`` (rig control), ``"dBm"`` (virtual).
    receiver : str
        The receiver's URL (no secrets).
    freq_hz : float or None
        The frequency read, hertz, when known.
    parts : int
        How many raw values were averaged into it (segments, meter polls).
    """

    level_db: float
    spread_db: float
    unit: str
    receiver: str
    freq_hz: float | None = None
    parts: int = 1

    def to_json(self) -> dict[str, Any]:
        return {"level_db": round(self.level_db, 2), "spread_db": round(self.spread_db, 2),
                "unit": self.unit, "receiver": self.receiver,
                "freq_mhz": None if self.freq_hz is None else self.freq_hz / 1e6,
                "parts": self.parts}


class Receiver(Protocol):
    """See the module docstring."""

    url: str
    unit: str
    name: str
    resolution_db: float

    def read(self) -> Reading:
        """One reading now."""

    def read_db(self) -> float:
        """The level of one reading now, dB."""

    def freq_hz(self) -> float | None:
        """The frequency the receiver says it is tuned to, hertz (None: cannot say)."""

    def close(self) -> None:
        """Release sockets, files and threads."""


def quantisation_sigma_db(resolution_db: float) -> float:
    """Standard deviation of a uniform rounding error of step ``resolution_db``."""
    return resolution_db / math.sqrt(12.0)


@dataclass(frozen=True)
class ReceiverUrl:
    """A receiver URL split into scheme, host, port, path and query options."""

    scheme: str
    host: str
    port: int | None
    path: str
    options: dict[str, str]
    text: str  # the URL as shown to the user (password removed)

    def pop_float(self, key: str, default: float | None, minimum: float | None = None,
                  maximum: float | None = None, exclusive_min: bool = False) -> float | None:
        """Option ``key`` as a finite float within the bounds (ConfigError naming it)."""
        if key not in self.options:
            return default
        raw = self.options.pop(key)
        try:
            value = float(raw)
        except ValueError:
            raise ConfigError(f"--receiver {key}", f"must be a number, got {raw!r}") from None
        low_bad = minimum is not None and (value <= minimum if exclusive_min else value < minimum)
        if not math.isfinite(value) or low_bad or (maximum is not None and value > maximum):
            bounds = (f"{'>' if exclusive_min else '>='} {minimum:g}" if minimum is not None else "")
            if maximum is not None:
                bounds += (" and " if bounds else "") + f"<= {maximum:g}"
            raise ConfigError(f"--receiver {key}", f"must be {bounds}, got {raw!r}")
        return value

    def pop_choice(self, key: str, default: str, choices: tuple[str, ...]) -> str:
        value = self.options.pop(key, default)
        if value not in choices:
            raise ConfigError(f"--receiver {key}", f"must be one of {', '.join(choices)}, "
                                                   f"got {value!r}")
        return value

    def check_used(self) -> None:
        """ConfigError naming the first option no handler took."""
        if self.options:
            key = sorted(self.options)[0]
            raise ConfigError(f"--receiver {key}", f"is not an option of {self.scheme} receivers")


def split_url(url: str, default_port: int | None = None) -> ReceiverUrl:
    """Parse ``scheme://host:port/path?k=v`` or ``scheme:path?k=v``."""
    parts = urlsplit(url)
    scheme = parts.scheme.lower()
    if not scheme:
        raise ConfigError("--receiver", f"expected a URL such as rigctl://127.0.0.1:4532, got {url!r}")
    try:
        port = parts.port if parts.port is not None else default_port
    except ValueError:
        raise ConfigError("--receiver", f"bad port in {url!r}") from None
    options: dict[str, str] = {}
    for key, value in parse_qsl(parts.query, keep_blank_values=True):
        if key in options:
            raise ConfigError(f"--receiver {key}", "given twice")
        options[key] = value
    netloc = parts.hostname or ""
    if parts.port is not None:
        netloc += f":{parts.port}"
    sep = "://" if url.split(":", 1)[1].startswith("//") else ":"
    shown = f"{scheme}{sep}{netloc}{parts.path}" + (f"?{parts.query}" if parts.query else "")
    return ReceiverUrl(scheme, parts.hostname or "", port, parts.path, options, shown)


