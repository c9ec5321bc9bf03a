"""Preferred resistor values of IEC 60063 (E12, E24, E48, E96) and their tolerances.

The tables are the lists printed in the standard, not the rounded formula
``10**(i/N)``: E12 and E24 keep their historical values (2.7, 3.0 ... 4.7, 8.2 differ
from the formula), E48 and E96 are given to three significant figures. Values are
mantissas in [100, 1000); a resistor value is ``mantissa * 10**k / 100`` ohms.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from nullsteer.errors import ConfigError

_E24 = (100, 110, 120, 130, 150, 160, 180, 200, 220, 240, 270, 300,
        330, 360, 390, 430, 470, 510, 560, 620, 680, 750, 820, 910)
_E12 = (100, 120, 150, 180, 220, 270, 330, 390, 470, 560, 680, 820)
_E48 = (100, 105, 110, 115, 121, 127, 133, 140, 147, 154, 162, 169,
        178, 187, 196, 205, 215, 226, 237, 249, 261, 274, 287, 301,
        316, 332, 348, 365, 383, 402, 422, 442, 464, 487, 511, 536,
        562, 590, 619, 649, 681, 715, 750, 787, 825, 866, 909, 953)
_E96 = (100, 102, 105, 107, 110, 113, 115, 118, 121, 124, 127, 130,
        133, 137, 140, 143, 147, 150, 154, 158, 162, 165, 169, 174,
        178, 182, 187, 191, 196, 200, 205, 210, 215, 221, 226, 232,
        237, 243, 249, 255, 261, 267, 274, 280, 287, 294, 301, 309,
        316, 324, 332, 340, 348, 357, 365, 374, 383, 392, 402, 412,
        422, 432, 442, 453, 464, 475, 487, 499, 511, 523, 536, 549,
        562, 576, 590, 604, 619, 634, 649, 665, 681, 698, 715, 732,
        750, 768, 787, 806, 825, 845, 866, 887, 909, 931, 953, 976)


@dataclass(frozen=True)
class ESeries:
    """One preferred-number series.

    Parameters
    ----------
    name : str
        ``"E12"``, ``"E24"``, ``"E48"`` or ``"E96"``.
    mantissas : tuple of int
        The values of one decade, scaled to 100..999.
    tolerance_pct : float
        The tolerance the standard associates with the series, percent.
    """

    name: str
    mantissas: tuple[int, ...]
    tolerance_pct: float

    def values_ohm(self, lo_ohm: float, hi_ohm: float) -> list[float]:
        """All values of the series within [lo_ohm, hi_ohm], ohms, ascending."""
        if not (lo_ohm > 0 and hi_ohm >= lo_ohm):
            raise ValueError("need 0 < lo_ohm <= hi_ohm")
        out: list[float] = []
        k = math.floor(math.log10(lo_ohm)) - 2
        while True:
            scale = 10.0 ** k
            for m in self.mantissas:
                v = round(m * scale, 10)
                if v > hi_ohm * (1 + 1e-12):
                    return out
                if v >= lo_ohm * (1 - 1e-12):
                    out.append(v)
            k += 1


SERIES: dict[str, ESeries] = {
    "E12": ESeries("E12", _E12, 10.0),
    "E24": ESeries("E24", _E24, 5.0),
    "E48": ESeries("E48", _E48, 2.0),
    "E96": ESeries("E96", _E96, 1.0),
}


def get_series(name: str, key: str = "series") -> ESeries:
    """The series called ``name`` (case-insensitive); unknown names raise ConfigError on ``key``."""
    s = SERIES.get(name.upper()) if isinstance(name, str) else None
    if s is None:
        raise ConfigError(key, f"unknown series {name!r} (expected one of: {', '.join(SERIES)})")
    return s
