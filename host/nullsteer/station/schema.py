"""One description per station-file section: its keys, types, units, defaults and ranges.

A :class:`Section` is both the reader and the reference of a section: the module that
parses ``[feed]`` declares ``FEED = Section("feed", ...)`` with a :class:`Key` per key,
then reads with ``FEED.check(table, where)`` (unknown keys refused with a "did you mean")
and ``FEED.get(table, "transformer_ratio", where)`` (type, default and range from the
key). ``nullsteer reference`` prints every registered section as Markdown; that text is
``docs/station-file.md``, and a test keeps the file current.

Never does: physics, I/O.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from enum import StrEnum
from typing import Any

from nullsteer.station.config import (check_unknown, get_bool, get_float, get_int, get_str)


class Kind(StrEnum):
    """What a key holds, as the reference names it."""

    NUMBER = "number"
    INTEGER = "integer"
    STRING = "string"
    BOOLEAN = "boolean"
    TABLE = "table"
    LIST = "list"
    ANY = "number, string or list"


class _Required:
    def __repr__(self) -> str:
        return "required"


#: The default of a key that must be given.
REQUIRED: Any = _Required()


@dataclass(frozen=True)
class Key:
    """One key of a section.

    Parameters
    ----------
    name : str
        The key as written in the file.
    kind : Kind
        Its type.
    doc : str
        What it means, one sentence or two (Markdown).
    unit : str
        Unit as the user writes it (``m``, ``MHz``, ``deg``...), or empty.
    default : Any
        Value when absent; :data:`REQUIRED` when it must be given; None when absence
        means "not used" (the reader decides).
    minimum, maximum : float or None
        Range of a number; ``exclusive_min`` makes the lower bound strict.
    choices : tuple of str or None
        The allowed strings.
    """

    name: str
    kind: Kind
    doc: str
    unit: str = ""
    default: Any = None
    minimum: float | None = None
    maximum: float | None = None
    exclusive_min: bool = False
    choices: tuple[str, ...] | None = None

    def range_text(self) -> str:
        if self.choices:
            return " \\| ".join(f"`{c}`" for c in self.choices)
        if self.minimum is None and self.maximum is None:
            return ""
        lo = "" if self.minimum is None else f"{self.minimum:g}"
        hi = "" if self.maximum is None else f"{self.maximum:g}"
        if self.exclusive_min and self.maximum is None:
            return f"> {lo}"
        if self.maximum is None:
            return f">= {lo}"
        if self.minimum is None:
            return f"<= {hi}"
        return f"({lo}, {hi}]" if self.exclusive_min else f"{lo} .. {hi}"

    def default_text(self) -> str:
        if self.default is REQUIRED:
            return "required"
        if self.default is None:
            return "—"
        if isinstance(self.default, bool):
            return "true" if self.default else "false"
        if isinstance(self.default, float) and math.isfinite(self.default):
            return f"{self.default:g}"
        if isinstance(self.default, str):
            return f'"{self.default}"'
        return str(self.default)


@dataclass(frozen=True)
class Section:
    """A table (``[name]``), an array of tables (``[[name]]``) or a nested table.

    ``name`` is the dotted path (``rule.where``, ``sim.station``); ``form`` is ``table``,
    ``array``, or ``entry`` (an inline table that is the value of a key, e.g. one preset).
    """

    name: str
    doc: str
    keys: tuple[Key, ...]
    form: str = "table"

    def __post_init__(self) -> None:
        _REGISTRY[self.name] = self

    @property
    def names(self) -> frozenset[str]:
        return frozenset(k.name for k in self.keys)

    def key(self, name: str) -> Key:
        for k in self.keys:
            if k.name == name:
                return k
        raise KeyError(f"{self.name} has no key {name!r}")  # a programming error

    def check(self, table: dict[str, Any], where: str) -> None:
        """Refuse keys of ``table`` this section does not describe (ConfigError)."""
        check_unknown(table, self.names, where)

    def get(self, table: dict[str, Any], name: str, where: str, **override: Any) -> Any:
        """Read key ``name`` of ``table`` with its type, default and range.

        A key whose default is None reads as None when absent. ``override`` replaces a field of the key for this read (e.g. a maximum that
        depends on another key); the reference shows the declared one.
        """
        k = self.key(name)
        fields = {"default": k.default, "minimum": k.minimum, "maximum": k.maximum,
                  "exclusive_min": k.exclusive_min, "choices": k.choices, **override}
        if fields["default"] is None and name not in table:
            return None  # absence means "not used"
        default = _MISSING_DEFAULT if fields["default"] is REQUIRED else fields["default"]
        kwargs: dict[str, Any] = {} if default is _MISSING_DEFAULT else {"default": default}
        if k.kind is Kind.NUMBER:
            return get_float(table, name, where, minimum=fields["minimum"],
                             maximum=fields["maximum"], exclusive_min=fields["exclusive_min"],
                             **kwargs)
        if k.kind is Kind.INTEGER:
            lo, hi = fields["minimum"], fields["maximum"]
            return get_int(table, name, where, minimum=None if lo is None else int(lo),
                           maximum=None if hi is None else int(hi), **kwargs)
        if k.kind is Kind.STRING:
            return get_str(table, name, where, choices=fields["choices"], **kwargs)
        if k.kind is Kind.BOOLEAN:
            return get_bool(table, name, where, **kwargs)
        raise TypeError(f"{self.name}.{name}: read {k.kind.value} keys yourself")


_MISSING_DEFAULT = object()
_REGISTRY: dict[str, Section] = {}


def registered() -> dict[str, Section]:
    """Every section declared so far, by dotted name (import the readers first)."""
    return dict(_REGISTRY)


def section_markdown(sec: Section) -> str:
    """One section of the reference: heading, description, a table of its keys."""
    entry = f"[{sec.name}] entries" if "." not in sec.name else f"{sec.name} entries"
    title = {"array": f"[[{sec.name}]]", "entry": entry}.get(sec.form, f"[{sec.name}]")
    lines = [f"## `{title}`", "", sec.doc.strip(), "",
             "| key | type | unit | default | range | meaning |",
             "| --- | --- | --- | --- | --- | --- |"]
    for k in sec.keys:
        lines.append(f"| `{k.name}` | {k.kind.value} | {k.unit} | {k.default_text()} | "
                     f"{k.range_text()} | {' '.join(k.doc.split())} |")
    return "\n".join(lines) + "\n"
