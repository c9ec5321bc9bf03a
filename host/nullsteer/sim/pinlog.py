"""Read the fake ``machine`` pin log and turn pin levels into relay states.

Log lines are ``<ticks_us> <pin> <level>``; only complete lines count (a power cut may
leave a torn last line).
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path


@dataclass(frozen=True)
class RelayEvent:
    """One coil change: ``t_s`` (monotonic seconds), relay ``name``, ``energised``."""

    t_s: float
    name: str
    energised: bool


def read_pin_log(path: Path) -> list[tuple[float, str, int]]:
    """(t_s, pin, level) for every complete line of the log, in file order."""
    try:
        data = path.read_bytes()
    except FileNotFoundError:
        return []
    out = []
    for line in data.split(b"\n")[:-1]:  # the part after the last newline is torn
        parts = line.split()
        if len(parts) == 3 and parts[2] in (b"0", b"1"):
            out.append((int(parts[0]) / 1e6, parts[1].decode(), int(parts[2])))
    return out


def relay_events(log: list[tuple[float, str, int]], cfg) -> list[RelayEvent]:
    """Pin levels as relay events, using the board config's pins and active-low flags."""
    by_pin = {str(cfg.pins[k]): k for k in range(len(cfg.relays))}
    out = []
    for t_s, pin, level in log:
        k = by_pin.get(pin)
        if k is None:
            continue
        energised = (level == 0) if cfg.active_low[k] else (level == 1)
        out.append(RelayEvent(t_s, cfg.relays[k].name, energised))
    return out


def final_levels(events: list[RelayEvent]) -> dict[str, bool]:
    """Relay name -> energised after the last event of each relay."""
    levels: dict[str, bool] = {}
    for ev in events:
        levels[ev.name] = ev.energised
    return levels


def decode_state(levels: dict[str, bool], cfg) -> tuple[str, int, bool]:
    """(fed_end, mask, open) as the coils show it; ValueError if the reversal relays
    disagree or a relay has never been driven."""
    ends = set()
    mask = 0
    open_ = False
    for r in cfg.relays:
        if r.name not in levels:
            raise ValueError(f"relay {r.name} has not been driven")
        on = levels[r.name]
        if r.role == "reverse":
            ends.add("B" if on else "A")
        elif r.role == "ladder" and on:
            mask |= 1 << r.bit
        elif r.role == "open":
            open_ = on
    if len(ends) != 1:
        raise ValueError("reversal relays disagree")
    return ends.pop(), mask, open_
