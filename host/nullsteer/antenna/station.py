"""The station file's loop: its ``[antenna]``, ``[ground]``, ``[band]`` and ``[feed]``
sections read together, and the model solved over the band.

This is the one place that turns a station file into a solved :class:`PortSolution`;
the model, ladder, auto-null, noise, plot and demo commands all come through here.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from nullsteer.antenna.ports import LoopModel, PortSolution
from nullsteer.antenna.specs import (AntennaSpec, BandSpec, FeedSpec, GroundSpec, parse_antenna,
                                     parse_band, parse_elevations_deg, parse_feed, parse_ground)

#: Frequency used when the station file gives no ``[band].freqs_mhz`` (160 m), hertz.
DEFAULT_FREQ_HZ = 1.83e6
#: Elevations of the signals to be nulled when ``[band].elevation_deg`` is absent, degrees.
DEFAULT_ELEVATION_SPAN_DEG = [10.0, 60.0]


@dataclass(frozen=True)
class StationLoop:
    """The parsed loop of a station file."""

    antenna: AntennaSpec
    ground: GroundSpec
    band: BandSpec
    feed: FeedSpec

    def model(self) -> LoopModel:
        return LoopModel(self.antenna, self.ground, self.feed)

    def solve(self, freqs_hz: Sequence[float] | None = None) -> PortSolution:
        """One MoM solve per frequency (default: the band's), hertz."""
        f = self.band.freqs_hz if freqs_hz is None else freqs_hz
        return self.model().solve(np.asarray(f, dtype=float))


def parse_station_band(table: dict[str, Any]) -> BandSpec:
    """``[band]``, with 1.83 MHz when it names no frequencies."""
    if "freqs_mhz" in table:
        return parse_band(table)
    return BandSpec((DEFAULT_FREQ_HZ,), parse_elevations_deg(
        table.get("elevation_deg", DEFAULT_ELEVATION_SPAN_DEG), "band.elevation_deg"))


def station_loop(station: Any) -> StationLoop:
    """Read the loop sections of ``station`` (a :class:`nullsteer.station.config.Station`);
    bad values raise ConfigError naming the key."""
    return StationLoop(antenna=parse_antenna(station.section("antenna", required=True)),
                       ground=parse_ground(station.section("ground")),
                       band=parse_station_band(station.section("band")),
                       feed=parse_feed(station.section("feed")))


def solve_station_model(station: Any, freqs_hz: Sequence[float] | None = None) -> PortSolution:
    """The station's loop solved at ``freqs_hz`` (default: its band)."""
    return station_loop(station).solve(freqs_hz)


def station_elevations_deg(station: Any) -> tuple[float, ...]:
    """The elevations of the signals to be nulled (``[band].elevation_deg``), degrees."""
    return parse_station_band(station.section("band")).elevations_deg
