"""Compass bearings of the loop's null, and which end to feed for a wanted null.

With fed end A the null points toward the terminated end B, i.e. along the loop's axis
away from end A: bearing ``end_a_bearing_deg + 180``. With fed end B it points toward
end A: ``end_a_bearing_deg``. (A terminated small loop nulls toward its terminated end:
common practice.)
"""

from __future__ import annotations

from enum import StrEnum

from nullsteer.errors import ConfigError


class FedEnd(StrEnum):
    """Which corner of the loop feeds the receiver ("A" or "B" as the user labels them);
    the other one is terminated."""

    A = "A"
    B = "B"

    @property
    def other(self) -> "FedEnd":
        return FedEnd.B if self is FedEnd.A else FedEnd.A

    @classmethod
    def parse(cls, text: str, key: str = "--fed-end") -> "FedEnd":
        """``text`` (any case) as a fed end; ConfigError naming ``key`` otherwise."""
        try:
            return cls(str(text).upper())
        except ValueError:
            raise ConfigError(key, f"must be A or B, got {text!r}") from None


def wrap_deg(bearing_deg: float) -> float:
    """A bearing folded into 0 <= b < 360 degrees."""
    return bearing_deg % 360.0


def angle_between_deg(a_deg: float, b_deg: float) -> float:
    """Smallest angle between two bearings, 0..180 degrees."""
    d = abs(wrap_deg(a_deg) - wrap_deg(b_deg))
    return min(d, 360.0 - d)


def null_bearing_deg(fed_end: FedEnd | str, end_a_bearing_deg: float) -> float:
    """Where the null points when ``fed_end`` ("A" or "B") feeds the receiver."""
    if fed_end == "A":
        return wrap_deg(end_a_bearing_deg + 180.0)
    if fed_end == "B":
        return wrap_deg(end_a_bearing_deg)
    raise ValueError(f"fed end must be 'A' or 'B', got {fed_end!r}")


def fed_end_for_null(wanted_null_deg: float, end_a_bearing_deg: float) -> tuple[FedEnd, float]:
    """The fed end whose null lies nearest ``wanted_null_deg``, and the miss in degrees.

    Ties (a wanted null exactly broadside) go to end A.
    """
    miss_a = angle_between_deg(wanted_null_deg, null_bearing_deg(FedEnd.A, end_a_bearing_deg))
    miss_b = angle_between_deg(wanted_null_deg, null_bearing_deg(FedEnd.B, end_a_bearing_deg))
    return (FedEnd.A, miss_a) if miss_a <= miss_b else (FedEnd.B, miss_b)
