"""Follow the receiver: when it is retuned, put the termination where that band wants it.

:class:`Follower` decides the antenna state for a frequency:

1. the *chosen preset* — ``--preset NAME``, or, with schedule rules, the preset of the
   rule in force now (given as ``rule_preset()``): if it has a per-band override covering
   the frequency (``bands = {...}``, which ``autonull --save-preset`` writes), that;
   if it is an open preset, open;
2. with no chosen preset: the first preset of the file, fed from the chosen end, with a
   per-band override covering the frequency (a preset saved by auto-null for that band);
3. else the antenna model's F/B-optimum termination at that frequency for the fed end
   (the chosen preset's, else ``--fed-end``).

So schedule rules pick the direction (their preset's fed end) and the follower picks
the band's termination within it; a rule that fires while following takes effect at
the next poll. :func:`follow` polls a receiver's frequency and applies each new state
through a board, one log line per change.
"""

from __future__ import annotations

import datetime as dt
import math
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

from nullsteer.errors import MeasurementError
from nullsteer.station.bearing import FedEnd
from nullsteer.station.presets import Preset, Target, resolve_target

ModelOptimum = Callable[[float, str], float]
MAX_OHMS = 1.0e6


@dataclass(frozen=True)
class Decision:
    """The state for one frequency and why."""

    freq_hz: float
    band: str | None
    target: Target
    basis: str

    def to_json(self) -> dict[str, Any]:
        return {"freq_mhz": self.freq_hz / 1e6, "band": self.band, "basis": self.basis,
                **self.target.to_json()}


def band_override(preset: Preset, freq_hz: float) -> Target | None:
    """The preset's per-band override covering ``freq_hz`` as a target, or None."""
    if any(b.covers(freq_hz) for b in preset.bands):
        return resolve_target(preset, freq_hz)
    return None


class Follower:
    """Decides states for frequencies (see the module docstring).

    Parameters
    ----------
    presets : dict
        Parsed presets by name, in file order.
    fed_end : str
        "A" or "B": the fed end when no chosen preset gives one.
    model_optimum : callable
        ``model_optimum(freq_hz, fed_end) -> ohms`` (inf when open is best).
    preset : str or None
        ``--preset``: the chosen preset.
    rule_preset : callable or None
        ``rule_preset() -> name or None``: the preset of the schedule rule in force now.
    band_of : callable
        ``band_of(freq_hz) -> name or None`` (for the log).
    """

    def __init__(self, presets: dict[str, Preset], fed_end: str, model_optimum: ModelOptimum,
                 preset: str | None = None, rule_preset: Callable[[], str | None] | None = None,
                 band_of: Callable[[float], str | None] = lambda f: None) -> None:
        self.presets = presets
        self.fed_end = fed_end
        self.model_optimum = model_optimum
        self.preset = preset
        self.rule_preset = rule_preset
        self.band_of = band_of

    def chosen(self) -> tuple[Preset | None, str]:
        if self.preset is not None:
            return self.presets[self.preset], f"preset {self.preset}"
        if self.rule_preset is not None:
            name = self.rule_preset()
            if name is not None and name in self.presets:
                return self.presets[name], f"rule preset {name}"
        return None, ""

    def decide(self, freq_hz: float) -> Decision:
        band = self.band_of(freq_hz)
        label = band or f"{freq_hz / 1e6:g} MHz"
        preset, why = self.chosen()
        if preset is not None:
            if preset.open:
                return Decision(freq_hz, band, Target(preset.fed_end, None, True), why)
            hit = band_override(preset, freq_hz)
            if hit is not None:
                return Decision(freq_hz, band, hit, f"{why}, {label} setting")
            fed = preset.fed_end.value
        else:
            fed = self.fed_end
            for name, p in self.presets.items():
                hit = band_override(p, freq_hz) if p.fed_end.value == fed and not p.open else None
                if hit is not None:
                    return Decision(freq_hz, band, hit, f"preset {name}, {label} setting")
        ohms = self.model_optimum(freq_hz, fed)
        ohms = MAX_OHMS if not math.isfinite(ohms) else min(ohms, MAX_OHMS)
        basis = (f"{why}: no {label} setting, " if why else "") + "model optimum"
        return Decision(freq_hz, band, Target(FedEnd(fed), float(ohms), False), basis)


@dataclass
class FollowOptions:
    """Polling: every ``poll_s``; a retune is a move of at least ``min_step_hz``;
    ``polls`` stops after that many polls (None: run until stopped)."""

    poll_s: float = 1.0
    min_step_hz: float = 1000.0
    polls: int | None = None


def follow(receiver: Any, follower: Follower, apply: Callable[[Target], tuple[tuple, str]],
           emit: Callable[[dict[str, Any]], None], options: FollowOptions,
           sleep: Callable[[float], None], should_stop: Callable[[], bool] = lambda: False,
           now: Callable[[], dt.datetime] = lambda: dt.datetime.now(dt.timezone.utc)) -> int:
    """Poll ``receiver.freq_hz()``; on a retune (or a new rule preset) apply the decision.

    ``apply(target) -> (board state, note)`` puts the board there; ``emit(event)`` gets
    one event per change of board state (``kind`` "change") and per receiver outage
    (``kind`` "receiver", once until it answers again). Returns the number of changes.
    """
    last_freq: float | None = None
    last_target: Target | None = None
    last_state: tuple | None = None
    outage = False
    changes = 0
    n = 0
    while not should_stop() and (options.polls is None or n < options.polls):
        if n:
            sleep(options.poll_s)
        n += 1
        try:
            freq = receiver.freq_hz()
        except MeasurementError as exc:
            if not outage:
                emit({"kind": "receiver", "time": now().isoformat(timespec="seconds"),
                      "error": str(exc)})
            outage = True
            continue
        outage = False
        if freq is None:
            continue
        retuned = last_freq is None or abs(freq - last_freq) >= options.min_step_hz
        if not retuned and follower.rule_preset is None:
            continue
        decision = follower.decide(freq)
        if retuned:
            last_freq = freq
        if decision.target == last_target:
            continue
        state, note = apply(decision.target)
        last_target = decision.target
        if state != last_state:
            changes += 1
            emit({"kind": "change", "time": now().isoformat(timespec="seconds"),
                  **decision.to_json(), "board": note})
        last_state = state
    return changes
