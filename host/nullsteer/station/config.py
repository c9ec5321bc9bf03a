"""Station configuration: the TOML file a user writes, and typed readers for its keys.

A station file has the sections of :data:`SECTIONS` (see ``examples/station.toml``); any
other top-level name is refused when the file is loaded, with a "did you mean". Each
subsystem parses its own section with the readers below, so that every bad value is
reported as a one-line :class:`~nullsteer.errors.ConfigError` naming the dotted key
(exit code 2), and unknown keys inside a section are refused by :func:`check_unknown`.
"""

from __future__ import annotations

import difflib
import math
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from nullsteer.errors import ConfigError

_MISSING = object()

#: The top-level names of a station file: tables (``[name]``) and arrays of tables
#: (``[[name]]``).
SECTIONS: dict[str, str] = {
    "site": "table", "antenna": "table", "ground": "table", "band": "table", "feed": "table",
    "ladder": "table", "noise": "table", "presets": "table", "firmware": "table", "sim": "table",
    "device": "array", "rule": "array",
}


def did_you_mean(word: str, choices: Any) -> str:
    """`` (did you mean 'x'?)`` for the closest of ``choices``, or an empty string."""
    close = difflib.get_close_matches(word, [str(c) for c in choices], n=1, cutoff=0.6)
    return f" (did you mean {close[0]!r}?)" if close else ""


def check_sections(raw: dict[str, Any]) -> None:
    """Refuse top-level names that are not :data:`SECTIONS` or have the wrong form."""
    for name, value in raw.items():
        kind = SECTIONS.get(name)
        if kind is None:
            arrays = [n for n, k in SECTIONS.items() if k == "array"]
            known = ", ".join(f"[[{n}]]" if n in arrays else f"[{n}]" for n in SECTIONS)
            raise ConfigError(name, f"unknown section{did_you_mean(name, SECTIONS)}; "
                                    f"a station file has {known}")
        if kind == "array" and not (isinstance(value, list) and all(isinstance(v, dict) for v in value)):
            raise ConfigError(name, f"must be an array of tables: write [[{name}]]")
        if kind == "table" and not isinstance(value, dict):
            raise ConfigError(name, f"must be a table: write [{name}]")


@dataclass(frozen=True)
class Station:
    """A loaded station file: its path and raw sections (parsed on demand)."""

    path: Path
    raw: dict[str, Any] = field(repr=False)

    def section(self, name: str, required: bool = False) -> dict[str, Any]:
        """The table ``[name]`` (empty if absent and not ``required``)."""
        value = self.raw.get(name, _MISSING)
        if value is _MISSING:
            if required:
                raise ConfigError(name, f"section [{name}] is missing from {self.path}")
            return {}
        if not isinstance(value, dict):
            raise ConfigError(name, "must be a table")
        return value

    def array(self, name: str) -> list[dict[str, Any]]:
        """The array of tables ``[[name]]`` (empty if absent)."""
        value = self.raw.get(name, [])
        if not isinstance(value, list) or not all(isinstance(v, dict) for v in value):
            raise ConfigError(name, f"must be an array of tables ([[{name}]])")
        return value

    def resolve(self, relative: str) -> Path:
        """A path written in the file, taken relative to the file's folder."""
        p = Path(relative)
        return p if p.is_absolute() else (self.path.parent / p)


def load_station(path: str | Path) -> Station:
    """Read a station TOML file; unreadable or malformed files raise ConfigError."""
    p = Path(path)
    try:
        text = p.read_text(encoding="utf-8")
    except OSError as exc:
        raise ConfigError("--config", f"cannot read {p}: {exc.strerror}") from None
    except UnicodeDecodeError as exc:
        raise ConfigError("--config", f"{p} is not UTF-8 text (byte {exc.start}): "
                                      "save it as UTF-8") from None
    try:
        raw = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError("--config", f"{p} is not valid TOML: {exc}") from None
    check_sections(raw)
    return Station(path=p, raw=raw)


def get_float(table: dict[str, Any], key: str, where: str, default: Any = _MISSING,
              minimum: float | None = None, maximum: float | None = None,
              exclusive_min: bool = False) -> float:
    """Read a finite number ``table[key]``; ``where`` is the section name for messages."""
    name = f"{where}.{key}" if where else key
    value = table.get(key, default)
    if value is _MISSING:
        raise ConfigError(name, "is required")
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise ConfigError(name, f"must be a number, got {value!r}")
    value = float(value)
    if not math.isfinite(value):
        raise ConfigError(name, f"must be finite, got {value!r}")
    if minimum is not None and (value <= minimum if exclusive_min else value < minimum):
        op = ">" if exclusive_min else ">="
        raise ConfigError(name, f"must be {op} {minimum:g}, got {value:g}")
    if maximum is not None and value > maximum:
        raise ConfigError(name, f"must be <= {maximum:g}, got {value:g}")
    return value


def get_int(table: dict[str, Any], key: str, where: str, default: Any = _MISSING,
            minimum: int | None = None, maximum: int | None = None) -> int:
    name = f"{where}.{key}" if where else key
    value = table.get(key, default)
    if value is _MISSING:
        raise ConfigError(name, "is required")
    if isinstance(value, bool) or not isinstance(value, int):
        raise ConfigError(name, f"must be a whole number, got {value!r}")
    if minimum is not None and value < minimum:
        raise ConfigError(name, f"must be >= {minimum}, got {value}")
    if maximum is not None and value > maximum:
        raise ConfigError(name, f"must be <= {maximum}, got {value}")
    return value


def get_str(table: dict[str, Any], key: str, where: str, default: Any = _MISSING,
            choices: tuple[str, ...] | None = None) -> str:
    name = f"{where}.{key}" if where else key
    value = table.get(key, default)
    if value is _MISSING:
        raise ConfigError(name, "is required")
    if not isinstance(value, str):
        raise ConfigError(name, f"must be a string, got {value!r}")
    if choices is not None and value not in choices:
        raise ConfigError(name, f"must be one of {', '.join(choices)}; got {value!r}")
    return value


def get_bool(table: dict[str, Any], key: str, where: str, default: Any = _MISSING) -> bool:
    name = f"{where}.{key}" if where else key
    value = table.get(key, default)
    if value is _MISSING:
        raise ConfigError(name, "is required")
    if not isinstance(value, bool):
        raise ConfigError(name, f"must be true or false, got {value!r}")
    return value


def check_unknown(table: dict[str, Any], allowed: set[str] | frozenset[str], where: str) -> None:
    """Reject keys that are not in ``allowed`` (catches typos such as ``hieght_m``)."""
    for key in table:
        if key not in allowed:
            name = f"{where}.{key}" if where else key
            raise ConfigError(name, f"unknown key{did_you_mean(str(key), allowed)} "
                                    f"(expected one of: {', '.join(sorted(allowed))})")


def parse_freqs_mhz(value: Any, key: str) -> list[float]:
    """Frequencies in MHz from ``"start:stop:step"``, a single number or a list.

    The stop value is included when it falls on the grid (within 1e-9 of a step).
    Returns a sorted list of distinct positive values; errors name ``key``.
    """
    if isinstance(value, bool):
        raise ConfigError(key, f"must be MHz values, got {value!r}")
    if isinstance(value, (int, float)):
        values = [float(value)]
    elif isinstance(value, str):
        parts = value.split(":")
        try:
            nums = [float(p) for p in parts]
        except ValueError:
            raise ConfigError(key, f"expected start:stop:step in MHz, got {value!r}") from None
        if len(nums) == 1:
            values = nums
        elif len(nums) == 3:
            start, stop, step = nums
            if not step > 0:
                raise ConfigError(key, f"step must be > 0, got {step:g}")
            if stop < start:
                raise ConfigError(key, f"stop {stop:g} is below start {start:g}")
            n = int(math.floor((stop - start) / step + 1e-9)) + 1
            if n > 10000:
                raise ConfigError(key, f"{n} frequencies is too many (at most 10000)")
            values = [round(start + i * step, 9) for i in range(n)]
        else:
            raise ConfigError(key, f"expected start:stop:step in MHz, got {value!r}")
    elif isinstance(value, list):
        values = []
        for v in value:
            if isinstance(v, bool) or not isinstance(v, (int, float)):
                raise ConfigError(key, f"must be a list of MHz values, got {v!r}")
            values.append(float(v))
    else:
        raise ConfigError(key, f"must be MHz values, got {value!r}")
    if not values:
        raise ConfigError(key, "needs at least one frequency")
    for v in values:
        if not (math.isfinite(v) and 0.01 <= v <= 1000.0):
            raise ConfigError(key, f"{v:g} MHz is outside 0.01..1000 MHz")
    return sorted(set(values))
