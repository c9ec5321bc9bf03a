"""Presets: named antenna states (fed end + termination), optionally per band.

``[presets]`` of the station file maps a name to an inline table::

    [presets]
    dx-east  = { fed_end = "A", ohms = 900.0 }          # end A toward 65 deg
    dx-west  = { null_bearing_deg = 65.0, ohms = 900.0,
                 bands = { "160m" = { ohms = 950.0 }, "80m" = { ohms = 780.0 } } }
    wide     = { fed_end = "A", ohms = 850.0,
                 bands = [ { freq_lo_mhz = 0.52, freq_hi_mhz = 1.0, ohms = 1100.0 },
                           { freq_lo_mhz = 1.0, freq_hi_mhz = 1.71, open = true } ] }
    no-null  = { open = true }

Keys of one preset:

``fed_end``
    ``"A"`` or ``"B"``: the corner connected to the receiver; the other end is
    terminated and the rear null points toward it.
``null_bearing_deg``
    Instead of ``fed_end``: the compass bearing (deg) the null should point to. It is
    resolved with ``[antenna].end_a_bearing_deg``: fed end A puts the null toward
    ``end_a_bearing + 180``, fed end B toward ``end_a_bearing``; the nearer one wins
    (an exact tie goes to A).
``ohms``
    Termination resistance in ohms (> 0, at most 1 MOhm); required unless ``open``.
    The controller maps it to the nearest ladder setting.
``open``
    ``true``: termination disconnected (no rear null). ``ohms``,
    ``null_bearing_deg`` and ``bands`` are then not allowed; ``fed_end`` is optional
    (default ``"A"``, so that the target stays an absolute state).
``bands``
    Per-band overrides of ``ohms`` (or ``open = true`` for that band), either as a table
    keyed by band name (see :data:`BAND_EDGES_MHZ`) or as a list of tables with
    ``freq_lo_mhz``, ``freq_hi_mhz`` and ``ohms``/``open``. Ranges include both edges
    and must not overlap (two ranges may share an edge, which then belongs to the lower
    one). A frequency outside every range uses the preset's ``ohms``.
"""

from __future__ import annotations

from dataclasses import dataclass
from collections.abc import Callable
from typing import Any

from nullsteer.station.bearing import FedEnd as End
from nullsteer.station.bearing import fed_end_for_null
from nullsteer.errors import ConfigError
from nullsteer.station.config import Station, check_unknown, get_float
from nullsteer.station.schema import REQUIRED, Key, Kind, Section

#: Band names accepted in ``bands = { ... }``, with edges in MHz. Amateur bands take the
#: widest edges among the three ITU regions (common practice: the region-2 plan for
#: 160/80/40 m, national 60 m allocations); "lw"/"mw" are the broadcast bands
#: (148.5-283.5 kHz in region 1; 520-1710 kHz covering the region 1 and 2 plans).
BAND_EDGES_MHZ: dict[str, tuple[float, float]] = {
    "lw": (0.1485, 0.2835),
    "2200m": (0.1357, 0.1378),
    "630m": (0.472, 0.479),
    "mw": (0.520, 1.710),
    "160m": (1.800, 2.000),
    "80m": (3.500, 4.000),
    "60m": (5.250, 5.450),
    "40m": (7.000, 7.300),
    "30m": (10.100, 10.150),
    "20m": (14.000, 14.350),
    "17m": (18.068, 18.168),
    "15m": (21.000, 21.450),
    "12m": (24.890, 24.990),
    "10m": (28.000, 29.700),
}

_MAX_OHMS = 1.0e6

PRESET = Section("presets", """`[presets]` maps a name to an inline table, e.g.
`dx-east = { fed_end = "A", ohms = 900.0 }` or `no-null = { open = true }`; `nullsteer set
--preset NAME`, the schedule's rules and the page use them by name. Give `fed_end` or
`null_bearing_deg`, and `ohms` or `open = true`.""", (
    Key("fed_end", Kind.STRING, "The corner connected to the receiver; the rear null points "
        "toward the other, terminated end. Optional with `open = true` (then A).",
        choices=("A", "B")),
    Key("null_bearing_deg", Kind.NUMBER, "Instead of `fed_end`: the compass bearing the null "
        "should point to; the fed end whose null is nearer wins (a tie goes to A). Needs "
        "`antenna.end_a_bearing_deg`.", "deg", None, 0.0, 360.0),
    Key("ohms", Kind.NUMBER, "Termination; the board uses its ladder setting nearest by "
        "ratio. Required unless `open = true`.", "ohm", None, 0.0, _MAX_OHMS,
        exclusive_min=True),
    Key("open", Kind.BOOLEAN, "Termination disconnected (no rear null); `ohms`, "
        "`null_bearing_deg` and `bands` are then not allowed.", default=False),
    Key("bands", Kind.ANY, "Per-band overrides: a table keyed by band name "
        "(`{ \"160m\" = { ohms = 950.0 } }`; names: "
        + ", ".join(f"`{b}`" for b in BAND_EDGES_MHZ) + ") or a list of ranges "
        "(`[ { freq_lo_mhz = 0.52, freq_hi_mhz = 1.0, ohms = 1100.0 } ]`); see below."),
), form="entry")

BANDS = Section("presets.bands", """One override inside a preset's `bands`. Ranges include
both edges and must not overlap (a shared edge belongs to the lower range); a frequency
outside every override uses the preset's own `ohms`.""", (
    Key("ohms", Kind.NUMBER, "Termination on this band; required unless `open = true`.",
        "ohm", None, 0.0, _MAX_OHMS, exclusive_min=True),
    Key("open", Kind.BOOLEAN, "Termination disconnected on this band.", default=False),
    Key("freq_lo_mhz", Kind.NUMBER, "List form only: lower edge.", "MHz", None, 0.01, 1000.0),
    Key("freq_hi_mhz", Kind.NUMBER, "List form only: upper edge, above `freq_lo_mhz`.", "MHz",
        None, 0.01, 1000.0),
), form="entry")

PRESET_KEYS = PRESET.names
_BAND_KEYS = frozenset({"ohms", "open"})
_RANGE_KEYS = BANDS.names


@dataclass(frozen=True)
class BandSetting:
    """A per-band override inside a preset.

    Attributes
    ----------
    label : str
        Band name, or ``"lo-hi MHz"`` for a range written as a list entry.
    freq_lo_hz, freq_hi_hz : float
        Edges, Hz (both included).
    ohms : float or None
        Termination, ohms; None when ``open``.
    open : bool
        Termination disconnected on this band.
    """

    label: str
    freq_lo_hz: float
    freq_hi_hz: float
    ohms: float | None
    open: bool = False

    def covers(self, freq_hz: float) -> bool:
        """True if ``freq_hz`` lies within the edges (inclusive)."""
        return self.freq_lo_hz <= freq_hz <= self.freq_hi_hz


@dataclass(frozen=True)
class Target:
    """An absolute antenna state: which end is fed, and the termination.

    Attributes
    ----------
    fed_end : End
        Corner connected to the receiver.
    ohms : float or None
        Termination resistance, ohms; None when ``open``.
    open : bool
        Termination disconnected (no rear null).
    """

    fed_end: End
    ohms: float | None
    open: bool

    def describe(self) -> str:
        """Short text such as ``"fed B, 900 ohm"`` or ``"fed A, open"``."""
        if self.open:
            return f"fed {self.fed_end.value}, open"
        return f"fed {self.fed_end.value}, {self.ohms:g} ohm"

    def to_json(self) -> dict[str, Any]:
        return {"fed_end": self.fed_end.value, "ohms": self.ohms, "open": self.open}


@dataclass(frozen=True)
class Preset:
    """One parsed preset (see the module docstring for the keys).

    Attributes
    ----------
    name : str
        Its key in ``[presets]``.
    fed_end : End
        Fed end (resolved from ``null_bearing_deg`` when that was given).
    ohms : float or None
        Default termination, ohms; None when ``open``.
    open : bool
        Open-termination preset.
    bands : tuple of BandSetting
        Per-band overrides, sorted by lower edge.
    null_bearing_deg : float or None
        The null bearing the user asked for, if given that way.
    """

    name: str
    fed_end: End
    ohms: float | None
    open: bool = False
    bands: tuple[BandSetting, ...] = ()
    null_bearing_deg: float | None = None


def _read_ohms(table: dict[str, Any], where: str) -> float:
    if "ohms" not in table:
        raise ConfigError(f"{where}.ohms", "is required (or open = true)")
    return PRESET.get(table, "ohms", where)


def _read_override(table: Any, where: str, allowed: frozenset[str]) -> tuple[float | None, bool]:
    if not isinstance(table, dict):
        raise ConfigError(where, "must be a table such as { ohms = 900.0 }")
    check_unknown(table, allowed, where)
    if BANDS.get(table, "open", where):
        if "ohms" in table:
            raise ConfigError(f"{where}.ohms", "cannot be combined with open = true")
        return None, True
    return _read_ohms(table, where), False


def _parse_bands(value: Any, where: str) -> tuple[BandSetting, ...]:
    items: list[BandSetting] = []
    if isinstance(value, dict):
        for band, entry in value.items():
            key = f"{where}.{band}"
            if band not in BAND_EDGES_MHZ:
                raise ConfigError(key, "unknown band (expected one of: "
                                       f"{', '.join(BAND_EDGES_MHZ)}; or use a list of "
                                       "{ freq_lo_mhz, freq_hi_mhz, ohms })")
            ohms, is_open = _read_override(entry, key, _BAND_KEYS)
            lo, hi = BAND_EDGES_MHZ[band]
            items.append(BandSetting(band, lo * 1e6, hi * 1e6, ohms, is_open))
    elif isinstance(value, list):
        for i, entry in enumerate(value):
            key = f"{where}[{i}]"
            ohms, is_open = _read_override(entry, key, _RANGE_KEYS)
            lo = BANDS.get(entry, "freq_lo_mhz", key, default=REQUIRED)
            hi = BANDS.get(entry, "freq_hi_mhz", key, default=REQUIRED)
            if hi <= lo:
                raise ConfigError(f"{key}.freq_hi_mhz", f"must be above freq_lo_mhz ({lo:g})")
            items.append(BandSetting(f"{lo:g}-{hi:g} MHz", lo * 1e6, hi * 1e6, ohms, is_open))
    else:
        raise ConfigError(where, "must be a table keyed by band name or a list of ranges")
    items.sort(key=lambda b: b.freq_lo_hz)
    for prev, cur in zip(items, items[1:]):
        if cur.freq_lo_hz < prev.freq_hi_hz:
            raise ConfigError(where, f"ranges {prev.label} and {cur.label} overlap")
    return tuple(items)


def parse_preset(name: str, table: Any, end_a_bearing_deg: float | None) -> Preset:
    """Parse one preset; ``end_a_bearing_deg`` is needed only for ``null_bearing_deg``.

    Parameters
    ----------
    name : str
        The preset's key in ``[presets]``.
    table : dict
        Its inline table.
    end_a_bearing_deg : float or None
        ``[antenna].end_a_bearing_deg``, compass degrees, or None if not given.
    """
    where = f"presets.{name}"
    if not isinstance(table, dict):
        raise ConfigError(where, "must be a table such as { fed_end = \"A\", ohms = 900.0 }")
    PRESET.check(table, where)
    if PRESET.get(table, "open", where):
        for key in ("ohms", "null_bearing_deg", "bands"):
            if key in table:
                raise ConfigError(f"{where}.{key}", "cannot be combined with open = true")
        fed = End(PRESET.get(table, "fed_end", where, default="A"))
        return Preset(name=name, fed_end=fed, ohms=None, open=True)
    if "fed_end" in table and "null_bearing_deg" in table:
        raise ConfigError(f"{where}.null_bearing_deg", "give either fed_end or null_bearing_deg")
    wanted: float | None = None
    if "null_bearing_deg" in table:
        wanted = PRESET.get(table, "null_bearing_deg", where)
        if end_a_bearing_deg is None:
            raise ConfigError(f"{where}.null_bearing_deg",
                              "needs antenna.end_a_bearing_deg to choose the fed end")
        fed, _ = fed_end_for_null(wanted, end_a_bearing_deg)
    elif "fed_end" in table:
        fed = End(PRESET.get(table, "fed_end", where))
    else:
        raise ConfigError(f"{where}.fed_end", "is required (or null_bearing_deg, or open = true)")
    bands = _parse_bands(table["bands"], f"{where}.bands") if "bands" in table else ()
    return Preset(name=name, fed_end=fed, ohms=_read_ohms(table, where), open=False,
                  bands=bands, null_bearing_deg=wanted)


def parse_presets(station: Station) -> dict[str, Preset]:
    """All presets of ``[presets]`` by name (empty if the section is absent)."""
    section = station.section("presets")
    antenna = station.section("antenna")
    end_a: float | None = None
    if "end_a_bearing_deg" in antenna:
        end_a = get_float(antenna, "end_a_bearing_deg", "antenna", minimum=-360.0, maximum=360.0)
    return {name: parse_preset(name, table, end_a) for name, table in section.items()}


def resolve_target(preset: Preset, freq_hz: float | None = None) -> Target:
    """The absolute state ``preset`` asks for at ``freq_hz``.

    Parameters
    ----------
    preset : Preset
        A parsed preset.
    freq_hz : float or None
        Receive frequency, Hz. A band override covering it wins; None (frequency not
        known) or a frequency outside every override gives the preset's default.
    """
    if freq_hz is not None:
        for band in preset.bands:
            if band.covers(freq_hz):
                return Target(preset.fed_end, band.ohms, band.open)
    return Target(preset.fed_end, preset.ohms, preset.open)


def preset_targets(preset: Preset) -> list[Target]:
    """Every absolute state ``preset`` can ask for: its default and each band override."""
    out = [Target(preset.fed_end, preset.ohms, preset.open)]
    out += [Target(preset.fed_end, b.ohms, b.open) for b in preset.bands]
    return out


def presets_in_state(presets: dict[str, Preset], fed_end: str, mask: int, open_: bool,
                     mask_for_ohms: Callable[[float], int | None]) -> list[str]:
    """Names (sorted) of the presets whose state the board is in now.

    Parameters
    ----------
    presets : dict
        Parsed presets by name.
    fed_end, mask, open_ : str, int, bool
        The board's reported state.
    mask_for_ohms : callable
        The board's setting for a wanted resistance (its nearest-by-ratio rule), or None
        when the board has no ladder table.

    An open target matches whatever mask the ladder holds (the termination is
    disconnected); an ohms target matches the setting the board would choose for it.
    A preset matches if its default or any of its band overrides does.
    """
    found = []
    for name in sorted(presets):
        for t in preset_targets(presets[name]):
            if t.fed_end.value != fed_end or t.open != open_:
                continue
            if t.open or (t.ohms is not None and mask_for_ohms(t.ohms) == mask):
                found.append(name)
                break
    return found
