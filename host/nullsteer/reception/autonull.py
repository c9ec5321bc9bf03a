"""Auto-null: find the ladder setting that minimises a measured level, in few switchings.

The search is a pure function over a ``measure(mask) -> dB`` callable and the ladder's
settings table sorted by ohms, so it runs the same against a real board, the simulator
or a bare model. It works in log-ohms (the ladder's settings are spaced roughly by
ratio):

1. **start** at the setting nearest the model's predicted optimum;
2. **bracket** (coarse): step by a ratio (default x1.35) toward lower level, doubling the
   step each time the level keeps falling, until a setting on each side reads higher;
3. **refine** (fine): inside the bracket, probe the vertex of a parabola through the
   three best points in *linear power* versus log-ohms (near the null the leaking
   signal's power grows as the square of the termination error, so a parabola in power
   is the right local shape; a V in dB is not), falling back to halving the larger gap
   (golden-section style) when the vertex is unusable; stop when both neighbours of the
   best setting have been read or the probe budget is spent.

Readings are taken once per visited setting (each reading is itself an average over a
dwell, see :class:`nullsteer.reception.measure.Meter`); a setting is never switched to twice.
Fading that is common to all settings shifts whole readings, which the bracket tolerates
because it compares neighbours read a few seconds apart.

:func:`run_autonull` wraps the search with a reference reading (the ``open``
state or the ``reversed`` fed end) so that ``null_db`` = best level - reference level
(negative: how far the null pushes the signal down), and counts every relay switching.
With ``confirm_blocks`` it then reads the best setting and the reference afresh in
ABBA blocks (best, reference, reference, best; two switchings per block, outside the
search's budget) and states the null with a confidence interval
(:mod:`nullsteer.reception.significance`): ``null_db`` is then that estimate, free of
the search's selection bias, and ``significant`` says whether it is distinguishable
from the reference at all.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from enum import Enum
from typing import Any

import numpy as np

from nullsteer.errors import ConfigError
from nullsteer.reception.measure import Measurement
from nullsteer.reception.significance import NullEstimate, null_estimate


class Reference(str, Enum):
    """What ``null_db`` is relative to."""

    OPEN = "open"          # termination disconnected: no null toward the signal
    REVERSED = "reversed"  # fed ends swapped, same setting: the main lobe on the signal
    NONE = "none"


@dataclass(frozen=True)
class Probe:
    """One visited setting, in visiting order."""

    order: int
    mask: int
    ohms: float
    level_db: float
    phase: str  # "start", "bracket", "refine"

    def to_json(self) -> dict[str, Any]:
        return {"order": self.order, "mask": self.mask, "ohms": self.ohms,
                "level_db": round(self.level_db, 2), "phase": self.phase}


@dataclass(frozen=True)
class SearchResult:
    """Outcome of :func:`search_null`."""

    best_mask: int
    best_ohms: float
    best_level_db: float
    probes: list[Probe]

    @property
    def visited(self) -> int:
        return len(self.probes)


class _Budget(Exception):
    pass


def _sorted_table(table: Sequence[tuple[int, float]]) -> tuple[list[int], np.ndarray]:
    if not table:
        raise ConfigError("ladder", "the ladder table is empty: nothing to search")
    rows = sorted(table, key=lambda r: r[1])
    ohms = np.array([r[1] for r in rows], dtype=float)
    if not np.all(ohms > 0):
        raise ConfigError("ladder", "every setting of the table needs ohms > 0 to search in log-ohms")
    return [int(r[0]) for r in rows], ohms


def _vertex(x: Sequence[float], p: Sequence[float]) -> float | None:
    """Abscissa of the parabola's minimum through three points, or None if not convex."""
    (x1, x2, x3), (p1, p2, p3) = x, p
    den = (x2 - x1) * (p2 - p3) - (x2 - x3) * (p2 - p1)
    if den == 0:
        return None
    num = (x2 - x1) ** 2 * (p2 - p3) - (x2 - x3) ** 2 * (p2 - p1)
    # convex (opening upward) iff the second divided difference is positive
    curv = ((p3 - p2) / (x3 - x2) - (p2 - p1) / (x2 - x1)) if x3 != x2 and x2 != x1 else 0.0
    if curv <= 0:
        return None
    return x2 - 0.5 * num / den


def search_null(table: Sequence[tuple[int, float]], measure: Callable[[int], float],
                start_ohm: float, max_probes: int = 10, coarse_ratio: float = 1.35,
                progress: Callable[[Probe], None] | None = None) -> SearchResult:
    """Find the setting with the lowest measured level.

    Parameters
    ----------
    table : sequence of (mask, ohms)
        The ladder's settings (any order; sorted by ohms here).
    measure : callable
        ``measure(mask) -> level_db``: switch to ``mask`` and read the level, dB.
    start_ohm : float
        Predicted optimum termination, ohms (the search starts at the nearest setting).
    max_probes : int
        Most settings visited (each costs one switching).
    coarse_ratio : float
        First bracketing step as a ratio of ohms (> 1).
    progress : callable or None
        Called with each :class:`Probe` as it is read.
    """
    if max_probes < 1:
        raise ConfigError("--max-switchings", "leaves no budget for the search")
    if not (math.isfinite(start_ohm) and start_ohm > 0):
        raise ConfigError("start_ohm", f"must be > 0, got {start_ohm!r}")
    if not coarse_ratio > 1:
        raise ConfigError("coarse_ratio", f"must be > 1, got {coarse_ratio:g}")
    masks, ohms = _sorted_table(table)
    xs = np.log(ohms)
    n = len(masks)
    levels: dict[int, float] = {}
    probes: list[Probe] = []

    def read(i: int, phase: str) -> float:
        if i in levels:
            return levels[i]
        if len(levels) >= max_probes:
            raise _Budget
        lv = float(measure(masks[i]))
        levels[i] = lv
        pr = Probe(len(probes) + 1, masks[i], float(ohms[i]), lv, phase)
        probes.append(pr)
        if progress is not None:
            progress(pr)
        return lv

    def nearest(x: float, not_in: Sequence[int] = ()) -> int:
        order = np.argsort(np.abs(xs - x), kind="stable")
        for j in order:
            if int(j) not in not_in:
                return int(j)
        return int(order[0])

    def power(i: int) -> float:
        return 10.0 ** (levels[i] / 10.0)

    i0 = nearest(math.log(start_ohm))
    try:
        read(i0, "start")
        a, b, c = _bracket(i0, xs, read, nearest, math.log(coarse_ratio), n)
        _refine(a, b, c, xs, read, levels, power)
    except _Budget:
        pass
    best = min(levels, key=lambda i: levels[i])
    return SearchResult(masks[best], float(ohms[best]), levels[best], probes)


def _step_index(i: int, x_target: float, xs: np.ndarray, direction: int,
                nearest: Callable[..., int], n: int) -> int | None:
    """The setting nearest ``x_target``, but at least one index beyond ``i``; None at the edge."""
    j = nearest(x_target)
    if direction > 0 and j <= i:
        j = i + 1
    if direction < 0 and j >= i:
        j = i - 1
    return j if 0 <= j < n else None


def _bracket(i0: int, xs: np.ndarray, read: Callable[[int, str], float],
             nearest: Callable[..., int], h: float, n: int) -> tuple[int, int, int]:
    """Indices (a, b, c), a < b < c (a or c may equal b at a table edge), f(b) lowest."""
    f0 = read(i0, "start")
    up = _step_index(i0, xs[i0] + h, xs, +1, nearest, n)
    f_up = read(up, "bracket") if up is not None else math.inf
    if up is not None and f_up < f0:
        direction, prev, cur = +1, i0, up
    else:
        down = _step_index(i0, xs[i0] - h, xs, -1, nearest, n)
        f_down = read(down, "bracket") if down is not None else math.inf
        if down is None or f_down >= f0:
            return (down if down is not None else i0, i0, up if up is not None else i0)
        direction, prev, cur = -1, i0, down
    step = h
    while True:
        step *= 2.0
        nxt = _step_index(cur, xs[cur] + direction * step, xs, direction, nearest, n)
        if nxt is None:  # ran into the end of the table: the edge is the bracket's side
            return (cur, cur, prev) if direction < 0 else (prev, cur, cur)
        if read(nxt, "bracket") >= read(cur, "bracket"):
            return (nxt, cur, prev) if direction < 0 else (prev, cur, nxt)
        prev, cur = cur, nxt


def _refine(a: int, b: int, c: int, xs: np.ndarray, read: Callable[[int, str], float],
            levels: dict[int, float], power: Callable[[int], float]) -> None:
    """Shrink the bracket (a, b, c) around the lowest reading until b's neighbours are read."""
    while True:
        gaps = [(b - a, "left"), (c - b, "right")]
        if max(g for g, _ in gaps) <= 1:
            return
        u: int | None = None
        if a < b < c:
            xv = _vertex((xs[a], xs[b], xs[c]), (power(a), power(b), power(c)))
            if xv is not None and xs[a] < xv < xs[c]:
                cand = int(np.argmin(np.abs(xs[a + 1:c] - xv))) + a + 1
                if cand not in levels:
                    u = cand
        if u is None:
            # halve the larger gap in log-ohms (golden-section style fallback)
            lo, hi = (a, b) if b - a >= c - b else (b, c)
            mid = 0.5 * (xs[lo] + xs[hi])
            inner = [j for j in range(lo + 1, hi) if j not in levels]
            if not inner:
                return
            u = min(inner, key=lambda j: abs(xs[j] - mid))
        fu = read(u, "refine")
        if fu < levels[b]:
            a, b, c = (a, u, b) if u < b else (b, u, c)
        elif u < b:
            a = u
        else:
            c = u


@dataclass
class AutonullResult:
    """What :func:`run_autonull` found; ``null_db`` = best level - reference level."""

    best_mask: int
    best_ohms: float
    best_level_db: float
    reference: Reference
    reference_level_db: float | None
    switchings: int
    probes: list[Probe]
    fed_end: str
    freq_hz: float
    start_ohm: float
    notes: list[str] = field(default_factory=list)
    significance: NullEstimate | None = None
    confirm_switchings: int = 0

    @property
    def search_null_db(self) -> float | None:
        """Best reading of the search minus the first reference reading, dB (biased low:
        the best is the lowest of several noisy readings)."""
        if self.reference_level_db is None:
            return None
        return self.best_level_db - self.reference_level_db

    @property
    def null_db(self) -> float | None:
        """The confirmed null depth when there is one, else the search's, dB."""
        if self.significance is not None:
            return self.significance.null_db
        return self.search_null_db

    @property
    def significant(self) -> bool | None:
        return None if self.significance is None else self.significance.significant

    def to_json(self) -> dict[str, Any]:
        return {"freq_mhz": self.freq_hz / 1e6, "fed_end": self.fed_end,
                "best_mask": self.best_mask, "best_ohms": self.best_ohms,
                "best_level_db": round(self.best_level_db, 2),
                "null_db": None if self.null_db is None else round(self.null_db, 2),
                "reference": self.reference.value,
                "reference_level_db": (None if self.reference_level_db is None
                                       else round(self.reference_level_db, 2)),
                "search_null_db": (None if self.search_null_db is None
                                   else round(self.search_null_db, 2)),
                "significant": self.significant,
                "significance": None if self.significance is None else self.significance.to_json(),
                "switchings": self.switchings, "confirm_switchings": self.confirm_switchings,
                "start_ohm": self.start_ohm,
                "path": [p.to_json() for p in self.probes], "notes": list(self.notes)}


class Switcher:
    """Counts switchings: ``set(fed_end, mask, open_)`` calls ``apply`` only on a change.

    Parameters
    ----------
    apply : callable
        ``apply(fed_end, mask, open_)``: put the board in that state (raises on failure).
    current : tuple or None
        The state the board is in now (fed_end, mask, open_), if known.
    """

    def __init__(self, apply: Callable[[str, int, bool], object],
                 current: tuple[str, int, bool] | None = None) -> None:
        self._apply = apply
        self.current = current
        self.switchings = 0
        self.last_good = current

    def set(self, fed_end: str, mask: int, open_: bool) -> None:
        state = (fed_end, mask, open_)
        if state == self.current:
            return
        self._apply(fed_end, mask, open_)
        self.current = self.last_good = state
        self.switchings += 1


def run_autonull(table: Sequence[tuple[int, float]], switcher: Switcher,
                 measure_db: Callable[[], float], fed_end: str, freq_hz: float,
                 start_ohm: float, reference: Reference = Reference.REVERSED,
                 max_switchings: int = 12, coarse_ratio: float = 1.35,
                 progress: Callable[[str, Probe | None, float | None], None] | None = None,
                 confirm_blocks: int = 0, measure: Callable[[], Measurement] | None = None,
                 ) -> AutonullResult:
    """Reference reading, search, and end on the best setting.

    Parameters
    ----------
    table : sequence of (mask, ohms)
        The ladder settings.
    switcher : Switcher
        Applies states and counts switchings.
    measure_db : callable
        Reads the level now (dwell and averaging included), dB.
    fed_end : str
        "A" or "B": the end fed during the search.
    freq_hz : float
        Frequency being nulled, hertz (for the record).
    start_ohm : float
        Predicted optimum, ohms.
    reference : Reference
        The reading ``null_db`` is relative to (one switching, taken first).
    max_switchings : int
        Budget for every switching, reference and final move included.
    progress : callable or None
        ``progress(kind, probe, level_db)`` with kind "reference", "probe", "final",
        "confirm-best" or "confirm-reference".
    confirm_blocks : int
        ABBA blocks read after the search for the significance check (0: none; needs a
        reference and ``measure``). The reference is then read at the best setting.
    measure : callable or None
        ``measure() -> Measurement`` (the readings with their spreads), for the check.
    """
    fed_end = str(getattr(fed_end, "value", fed_end))
    if fed_end not in ("A", "B"):
        raise ConfigError("--fed-end", f"must be A or B, got {fed_end!r}")
    masks, ohms = _sorted_table(table)
    start_mask = masks[int(np.argmin(np.abs(np.log(ohms) - math.log(start_ohm))))]
    ref_level = None
    if reference is Reference.OPEN:
        switcher.set(fed_end, start_mask, True)
    elif reference is Reference.REVERSED:
        switcher.set("B" if fed_end == "A" else "A", start_mask, False)
    if reference is not Reference.NONE:
        ref_level = measure_db()
        if progress is not None:
            progress("reference", None, ref_level)

    def measure_at(mask: int) -> float:
        switcher.set(fed_end, mask, False)
        return measure_db()

    budget = max_switchings - switcher.switchings - 1  # keep one for the final move
    result = search_null(table, measure_at, start_ohm, max_probes=max(1, budget),
                         coarse_ratio=coarse_ratio,
                         progress=(lambda p: progress("probe", p, p.level_db)) if progress else None)
    switcher.set(fed_end, result.best_mask, False)
    if progress is not None:
        progress("final", None, result.best_level_db)
    search_switchings = switcher.switchings
    estimate = None
    if confirm_blocks > 0 and measure is not None and reference is not Reference.NONE:
        estimate = _confirm(switcher, measure, fed_end, result.best_mask, reference,
                            confirm_blocks, progress)
    notes = []
    if estimate is not None and not estimate.significant:
        notes.append(estimate.describe())
    if result.best_mask in (masks[0], masks[-1]):
        notes.append("the best setting is at the end of the ladder's range: the optimum may "
                     "lie beyond it")
    return AutonullResult(best_mask=result.best_mask, best_ohms=result.best_ohms,
                          best_level_db=result.best_level_db, reference=reference,
                          reference_level_db=ref_level, switchings=search_switchings,
                          probes=result.probes, fed_end=fed_end, freq_hz=freq_hz,
                          start_ohm=start_ohm, notes=notes, significance=estimate,
                          confirm_switchings=switcher.switchings - search_switchings)


def _confirm(switcher: Switcher, measure: Callable[[], Measurement], fed_end: str,
             best_mask: int, reference: Reference, blocks: int,
             progress: Callable[[str, Probe | None, float | None], None] | None
             ) -> NullEstimate:
    """ABBA blocks of fresh readings at the best setting (A) and the reference (B)."""
    best = (fed_end, best_mask, False)
    ref = ((fed_end, best_mask, True) if reference is Reference.OPEN
           else ("B" if fed_end == "A" else "A", best_mask, False))
    cand: list[Measurement] = []
    refs: list[Measurement] = []
    for _ in range(blocks):
        for state, into, kind in ((best, cand, "confirm-best"), (ref, refs, "confirm-reference"),
                                  (ref, refs, "confirm-reference"), (best, cand, "confirm-best")):
            switcher.set(*state)
            m = measure()
            into.append(m)
            if progress is not None:
                progress(kind, None, m.level_db)
    return null_estimate([v for m in cand for v in m.levels_db],
                         [v for m in refs for v in m.levels_db],
                         [s for m in cand for s in m.sigmas_db],
                         [s for m in refs for s in m.sigmas_db])
