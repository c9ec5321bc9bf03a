"""Board commands as a person gives them, turned into checked absolute SETs.

The command line (``nullsteer set``/``flip``), the control page (``nullsteer serve``) and
the schedule service all come through here, so one set of checks guards every path to a
board: a bearing needs the loop's orientation, ohms are mapped to the board's nearest
ladder setting by ratio and refused when far outside the ladder, a mask must fit the
board's relays (checked again by :meth:`Controller.set_state`), a preset must exist in
the station file. Nothing is sent before every check has passed.

Error keys name the input as the caller spells it: ``name(key)`` turns an internal key
(``ohms``, ``mask``, ``fed_end``, ``null_bearing``, ``preset``, ``short``) into the
caller's spelling, ``--ohms`` on the command line (the default) or ``ohms`` in the page's
JSON API.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

from nullsteer.board.controller import BoardState, BoardStatus, Controller
from nullsteer.errors import ConfigError
from nullsteer.protocol import wire
from nullsteer.station.bearing import FedEnd, fed_end_for_null, null_bearing_deg
from nullsteer.station.presets import Preset, Target, presets_in_state, resolve_target

#: A wanted ohms value further than this ratio from every setting is refused.
MAX_OHMS_RATIO = 2.0

KeyNamer = Callable[[str], str]


def cli_name(key: str) -> str:
    """``null_bearing`` -> ``--null-bearing``: the command line's spelling of a key."""
    return "--" + key.replace("_", "-")


@dataclass(frozen=True)
class Wish:
    """What to set; None leaves that part as the board has it.

    Attributes
    ----------
    fed_end : FedEnd or None
        End to feed.
    null_bearing_deg : float or None
        Instead of ``fed_end``: where the null should point, compass degrees (0..360).
    mask, ohms : int or None, float or None
        A ladder mask, or a resistance (ohms) mapped to the nearest setting.
    open : bool
        Disconnect the termination.
    short : bool or None
        Short the termination (boards with a ``short`` relay only).
    """

    fed_end: FedEnd | None = None
    null_bearing_deg: float | None = None
    mask: int | None = None
    ohms: float | None = None
    open: bool = False
    short: bool | None = None

    def is_empty(self) -> bool:
        return (self.fed_end is None and self.null_bearing_deg is None and self.mask is None
                and self.ohms is None and not self.open and self.short is None)


@dataclass
class Outcome:
    """A command's result: the board's status after it, notes for a person, JSON extras."""

    status: BoardStatus
    notes: list[str] = field(default_factory=list)
    extra: dict[str, Any] = field(default_factory=dict)


def choose_mask_for_ohms(ctl: Controller, ohms: float, name: KeyNamer = cli_name
                         ) -> tuple[int, float, float]:
    """(mask, setting ohms, error %) of the board's setting nearest ``ohms`` by ratio."""
    if not (ohms > 0 and math.isfinite(ohms)):
        raise ConfigError(name("ohms"), f"must be a finite number > 0, got {ohms!r}")
    table = ctl.table()
    if not table:
        raise ConfigError(name("ohms"), "the board has no ladder table; write one with "
                                        "'nullsteer ladder --board-config FILE' and reload the board")
    lo, hi = table[0][1], table[-1][1]
    if not lo / MAX_OHMS_RATIO <= ohms <= hi * MAX_OHMS_RATIO:
        raise ConfigError(name("ohms"), f"{ohms:g} ohm is far outside the ladder's "
                                        f"{lo:.0f}..{hi:.0f} ohm")
    found = wire.nearest_by_ratio(table, ohms)
    assert found is not None
    return found


def outside_table_warning(table: list[tuple[int, float]], ohms: float,
                          name: KeyNamer = cli_name) -> str | None:
    """A warning when ``ohms`` lies beyond the table's ends (the board then takes the end)."""
    lo, hi = table[0][1], table[-1][1]
    if ohms < lo:
        return f"{name('ohms')} {ohms:g} is below the ladder's lowest setting {lo:.1f} ohm: set to that"
    if ohms > hi:
        return f"{name('ohms')} {ohms:g} is above the ladder's highest setting {hi:.1f} ohm: set to that"
    return None


def check_short(ctl: Controller, name: KeyNamer = cli_name) -> None:
    """Refuse the shorted state on a board without a relay of role ``short``."""
    if "short" not in ctl.info().roles:
        raise ConfigError(name("short"), "this board has no relay of role short")


def apply_wish(ctl: Controller, wish: Wish, end_a_bearing_deg: float | None,
               name: KeyNamer = cli_name) -> Outcome:
    """Check ``wish`` against the board and the station, then send one SET."""
    if wish.is_empty():
        raise ConfigError("set", "say what to set: fed end or null bearing, and/or "
                                 "mask, ohms, open")
    if sum(x is not None for x in (wish.mask, wish.ohms)) + wish.open + bool(wish.short) > 1:
        raise ConfigError(name("ohms"), "give one of mask, ohms, open or short")
    if wish.fed_end is not None and wish.null_bearing_deg is not None:
        raise ConfigError(name("null_bearing"), "give either a fed end or a null bearing")
    if wish.short:
        check_short(ctl, name)
    if wish.mask is not None:
        info = ctl.info()  # cached after the first request: nothing sent for a bad mask
        if not 0 <= wish.mask <= info.max_mask:
            raise ConfigError(name("mask"), f"{wish.mask} is outside 0..{info.max_mask} "
                                            f"for this board's {info.bits} ladder relays")
    notes: list[str] = []
    extra: dict[str, Any] = {}
    end = wish.fed_end
    if wish.null_bearing_deg is not None:
        b = wish.null_bearing_deg
        if not (math.isfinite(b) and 0.0 <= b <= 360.0):
            raise ConfigError(name("null_bearing"), f"must be 0..360 degrees, got {b!r}")
        if end_a_bearing_deg is None:
            raise ConfigError(name("null_bearing"), "needs the station file's "
                                                    "antenna.end_a_bearing_deg")
        end, miss = fed_end_for_null(b, end_a_bearing_deg)
        notes.append(f"null toward {b:.0f} deg: feeding end {end} "
                     f"(null at {null_bearing_deg(end, end_a_bearing_deg):.0f} deg, "
                     f"{miss:.0f} deg off)")
    mask_for: tuple[int, float, float] | None = None
    if wish.ohms is not None:
        mask_for = choose_mask_for_ohms(ctl, wish.ohms, name)
    now = ctl.status().state
    mask, open_ = now.mask, now.open
    if wish.mask is not None:
        mask, open_ = wish.mask, False
    if mask_for is not None and wish.ohms is not None:
        r_wanted = wish.ohms
        mask, r_set, err = mask_for
        open_ = False
        extra.update(wanted_ohms=wish.ohms, error_pct=round(err, 2))
        notes.append(f"nearest setting to {wish.ohms:g} ohm: mask {mask} = {r_set:.1f} ohm "
                     f"({err:+.1f} %)")
        outside = outside_table_warning(ctl.table(), r_wanted, name)
        if outside:
            extra["warnings"] = [outside]
    if wish.open:
        open_ = True
    # shorted stays shorted across a change of fed end; any new termination ends it
    short = now.short and wish.mask is None and wish.ohms is None and not wish.open
    if wish.short is not None:
        short = wish.short
        open_ = open_ and not short
    status = ctl.set_state(end or now.fed_end, mask, open_, short)
    return Outcome(status, notes, extra)


def flip(ctl: Controller) -> Outcome:
    """Swap the fed and terminated ends, keeping the termination."""
    return Outcome(ctl.flip())


def target_fields(target: Target, status: BoardStatus | None,
                  table: list[tuple[int, float]]) -> tuple[FedEnd, int, bool, str]:
    """(fed end, mask, open, note) for ``target`` on a board with ``table``.

    ``status`` is the board's present state (needed when the target keeps the mask:
    ``open`` presets, or no ohms). Raises ConfigError when ohms are asked of a board
    without a ladder table.
    """
    fed_end = FedEnd(target.fed_end.value)
    if target.ohms is not None and not target.open:
        best = wire.nearest_by_ratio(table, target.ohms)
        if best is None:
            raise ConfigError("presets", "the board has no ladder table for an ohms preset")
        mask, ohms, err = best
        return fed_end, mask, False, f"mask {mask} = {ohms:.1f} ohm ({err:+.1f} %)"
    mask = status.state.mask if status is not None else 0
    return fed_end, mask, target.open, f"mask {mask} kept"


def find_preset(presets: dict[str, Preset], wanted: str, name: KeyNamer = cli_name) -> Preset:
    """The preset called ``wanted``; ConfigError listing the names otherwise."""
    if wanted not in presets:
        have = ", ".join(sorted(presets)) or "none: the station file has no [presets]"
        raise ConfigError(name("preset"), f"no preset {wanted!r} (have {have})")
    return presets[wanted]


def apply_preset(ctl: Controller, preset: Preset, freq_hz: float | None = None) -> Outcome:
    """Put the board in ``preset``'s state (its band override at ``freq_hz`` if any)."""
    target = resolve_target(preset, freq_hz)
    status = ctl.status()
    fed_end, mask, open_, note = target_fields(target, status, ctl.table())
    after = ctl.set_state(fed_end, mask, open_)
    return Outcome(after, [f"preset {preset.name}: {target.describe()} ({note})"],
                   {"preset": preset.name})


def presets_now(ctl: Controller, presets: dict[str, Preset], state: BoardState) -> list[str]:
    """Names of the presets whose state ``state`` is (the board's ladder decides ohms)."""
    if not presets:
        return []
    table = ctl.table()

    def mask_for(ohms: float) -> int | None:
        best = wire.nearest_by_ratio(table, ohms)
        return best[0] if best is not None else None

    return presets_in_state(presets, state.fed_end.value, state.mask, state.open, mask_for)
