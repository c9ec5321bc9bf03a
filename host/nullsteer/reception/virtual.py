"""The virtual receiver: what a receiver on the simulated loop would read, in dB.

Invented stations of the demo scenario (``[[sim.station]]`` of the station file) arrive
as plane waves (frequency, compass bearing, elevation, field strength). Each one's power
into the receiver follows from the antenna model for the board's *present* relay state
(fed end, ladder setting -> termination impedance at frequency, open). To that are
added, in power:

* the external noise of ITU-R P.372 for the chosen category, scaled by the loop's
  average realized gain (an inefficient loop sees less external noise too), plus the
  thermal noise of its losses (see :mod:`nullsteer.reception.noise`);
* the receiving chain's own noise, (F - 1) kT0b.

Fading: every station has a slow log-normal fade (a Gauss-Markov process in dB with a
standard deviation and a correlation time, seeded) and a fast Rician scintillation
drawn per reading (K-factor in dB; K -> infinity is no scintillation). Readings are in
dBm referred to the antenna terminals (the chain's gain is a constant offset that does
not move a null).

Keys of ``[sim]`` and ``[[sim.station]]``: :data:`SIM` and :data:`SIM_STATION`.
"""

from __future__ import annotations

import math
import time
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from typing import Any, Protocol

import numpy as np

from nullsteer.station.config import Station
from nullsteer.station.schema import REQUIRED, Key, Kind, Section
from nullsteer.errors import ConfigError
from nullsteer.reception.noise import (KT0_DBW_PER_HZ, NoiseCategory, antenna_noise_kt0,
                             external_noise_figure_db)

_SIGMA_DOC = "Standard deviation of the slow log-normal fade."
SIM = Section("sim", "The virtual receiver of the simulator (demo and tests): fading of the "
              "invented stations heard on the loop.", (
    Key("seed", Kind.INTEGER, "Seed of the fading and reading noise.", default=1, minimum=0),
    Key("fading_sigma_db", Kind.NUMBER, _SIGMA_DOC, "dB", 2.0, 0.0, 30.0),
    Key("fading_tau_s", Kind.NUMBER, "Correlation time of the slow fade.", "s", 60.0, 0.0,
        exclusive_min=True),
    Key("rician_k_db", Kind.NUMBER, "Fast scintillation per reading: steady over scattered "
        "power (Rician K).", "dB", 15.0, -10.0, 60.0),
    Key("read_noise_db", Kind.NUMBER, "The receiver's own reading jitter.", "dB", 0.2, 0.0, 10.0),
    Key("station", Kind.LIST, "The invented stations: `[[sim.station]]` entries."),
))
SIM_STATION = Section("sim.station", "One invented transmitter arriving as a plane wave.", (
    Key("call", Kind.STRING, "Call sign (invented).", default=REQUIRED),
    Key("name", Kind.STRING, "Free text.", default=""),
    Key("freq_mhz", Kind.NUMBER, "Carrier frequency.", "MHz", REQUIRED, 0.01, 1000.0),
    Key("bearing_deg", Kind.NUMBER, "Compass bearing it arrives from.", "deg", REQUIRED, 0.0, 360.0),
    Key("elevation_deg", Kind.NUMBER, "Elevation it arrives at.", "deg", REQUIRED, 0.0, 90.0),
    Key("field_dbuv_per_m", Kind.NUMBER, "Field strength at the site.", "dBµV/m", REQUIRED,
        -60.0, 160.0),
    Key("fading_sigma_db", Kind.NUMBER, _SIGMA_DOC + " Overrides `[sim]`'s.", "dB", None,
        0.0, 30.0),
), form="array")


class AntennaResponse(Protocol):
    """What the receiver needs from the antenna model (once solved)."""

    def received_power_w(self, freq_hz: float, termination_ohm: complex, fed_end: str,
                         az_deg: np.ndarray, el_deg: np.ndarray,
                         field_v_per_m: np.ndarray) -> np.ndarray:
        """Power delivered to the receiver load by plane waves of these fields, W."""

    def average_gain_dbi(self, freq_hz: float, termination_ohm: complex, fed_end: str) -> float:
        """Average realized gain over all directions, dBi (noise-delivery efficiency)."""


@dataclass(frozen=True)
class SimStation:
    """One invented transmitter of the demo scenario."""

    call: str
    name: str
    freq_hz: float
    bearing_deg: float
    elevation_deg: float
    field_dbuv_per_m: float
    fading_sigma_db: float | None = None

    @property
    def field_v_per_m(self) -> float:
        return 1e-6 * 10.0 ** (self.field_dbuv_per_m / 20.0)


@dataclass(frozen=True)
class SimScenario:
    """The ``[sim]`` section: stations and fading settings."""

    stations: tuple[SimStation, ...]
    seed: int = 1
    fading_sigma_db: float = 2.0
    fading_tau_s: float = 60.0
    rician_k_db: float = 15.0
    read_noise_db: float = 0.2

    def near(self, freq_hz: float, bandwidth_hz: float) -> list[SimStation]:
        """Stations inside the receiver's passband centred on ``freq_hz``."""
        return [s for s in self.stations if abs(s.freq_hz - freq_hz) <= bandwidth_hz / 2.0]


def parse_station_entry(t: Any, where: str) -> SimStation:
    if not isinstance(t, dict):
        raise ConfigError(where, "must be a table")
    SIM_STATION.check(t, where)
    get = SIM_STATION.get
    return SimStation(
        call=get(t, "call", where), name=get(t, "name", where),
        freq_hz=1e6 * get(t, "freq_mhz", where), bearing_deg=get(t, "bearing_deg", where),
        elevation_deg=get(t, "elevation_deg", where),
        field_dbuv_per_m=get(t, "field_dbuv_per_m", where),
        fading_sigma_db=None if t.get("fading_sigma_db") is None
        else get(t, "fading_sigma_db", where))


def parse_scenario(station: Station) -> SimScenario:
    """Read ``[sim]`` and its ``[[sim.station]]`` entries (bad keys: ConfigError)."""
    t = station.section("sim")
    SIM.check(t, "sim")
    entries = t.get("station", [])
    if not isinstance(entries, list):
        raise ConfigError("sim.station", "must be an array of tables ([[sim.station]])")
    stations = tuple(parse_station_entry(e, f"sim.station[{i}]") for i, e in enumerate(entries))
    return SimScenario(
        stations=stations, **{k: SIM.get(t, k, "sim") for k in (
            "seed", "fading_sigma_db", "fading_tau_s", "rician_k_db", "read_noise_db")})


class Fading:
    """Per-station slow log-normal fade (Gauss-Markov in dB) plus Rician scintillation.

    Parameters
    ----------
    sigmas_db : sequence of float
        Standard deviation of each station's slow fade, dB.
    tau_s : float
        Correlation time of the slow fade, seconds (autocorrelation exp(-dt/tau)).
    rician_k_db : float
        K-factor of the fast part (steady over scattered power), dB.
    seed : int
        Random seed.
    """

    def __init__(self, sigmas_db: Sequence[float], tau_s: float, rician_k_db: float,
                 seed: int) -> None:
        self.rng = np.random.default_rng(seed)
        self.sigmas = np.asarray(sigmas_db, dtype=float)
        self.tau_s = tau_s
        self.k = 10.0 ** (rician_k_db / 10.0)
        self.state_db = self.rng.normal(0.0, 1.0, len(self.sigmas)) * self.sigmas
        self.t_s: float | None = None

    def gains(self, t_s: float) -> np.ndarray:
        """Power gain of each station's path at time ``t_s`` (linear)."""
        if self.t_s is not None and t_s > self.t_s:
            rho = math.exp(-(t_s - self.t_s) / self.tau_s)
            self.state_db = rho * self.state_db + math.sqrt(1.0 - rho * rho) * \
                self.rng.normal(0.0, 1.0, len(self.sigmas)) * self.sigmas
        self.t_s = t_s if self.t_s is None else max(self.t_s, t_s)
        n = len(self.sigmas)
        los = math.sqrt(self.k / (self.k + 1.0))
        scat = math.sqrt(1.0 / (2.0 * (self.k + 1.0)))
        amp = los + scat * (self.rng.normal(size=n) + 1j * self.rng.normal(size=n))
        return 10.0 ** (self.state_db / 10.0) * np.abs(amp) ** 2


class VirtualClock:
    """A clock for fast simulation: ``sleep`` advances ``now`` without waiting."""

    def __init__(self, start_s: float = 0.0) -> None:
        self.t_s = start_s

    def now(self) -> float:
        return self.t_s

    def sleep(self, dt_s: float) -> None:
        self.t_s += max(0.0, dt_s)


@dataclass
class VirtualReceiver:
    """Answers "level in dB at frequency f now" for a relay state.

    Parameters
    ----------
    response : AntennaResponse
        The solved antenna model.
    scenario : SimScenario
        Stations and fading.
    termination_ohm : callable
        ``termination_ohm(mask, freq_hz) -> complex``: the ladder setting's impedance.
    noise_category : NoiseCategory
        ITU-R P.372 environment.
    bandwidth_hz : float
        Receiver bandwidth, hertz.
    system_noise_factor : float
        The receiving chain's noise factor F (linear), referred to the antenna terminals.
    clock : callable
        ``clock() -> seconds`` (a :class:`VirtualClock`'s ``now`` for fast runs).
    """

    response: AntennaResponse
    scenario: SimScenario
    termination_ohm: Callable[[int, float], complex]
    noise_category: NoiseCategory = NoiseCategory.RURAL
    bandwidth_hz: float = 500.0
    system_noise_factor: float = 10.0 ** 1.2
    clock: Callable[[], float] = time.monotonic
    _fading: dict[float, tuple[list[SimStation], Fading]] = field(default_factory=dict, repr=False)

    def _stations(self, freq_hz: float) -> tuple[list[SimStation], Fading]:
        key = round(freq_hz, 1)
        if key not in self._fading:
            sts = self.scenario.near(freq_hz, self.bandwidth_hz)
            sig = [self.scenario.fading_sigma_db if s.fading_sigma_db is None else s.fading_sigma_db
                   for s in sts]
            seed = self.scenario.seed * 1_000_003 + int(key)
            self._fading[key] = (sts, Fading(sig, self.scenario.fading_tau_s,
                                             self.scenario.rician_k_db, seed))
        return self._fading[key]

    def powers_w(self, freq_hz: float, fed_end: str, mask: int, open_: bool,
                 faded: bool = True) -> tuple[float, float]:
        """(stations, noise) power in the passband for this relay state, W.

        The stations' part is faded unless ``faded=False``; the noise is the mean
        (external plus chain) noise power in ``bandwidth_hz``.
        """
        z = complex(math.inf) if open_ else complex(self.termination_ohm(mask, freq_hz))
        sts, fading = self._stations(freq_hz)
        noise_w = self.noise_w(freq_hz, z, fed_end)
        signal_w = 0.0
        if sts:
            az = np.array([s.bearing_deg for s in sts])
            el = np.array([s.elevation_deg for s in sts])
            e = np.array([s.field_v_per_m for s in sts])
            p = np.maximum(np.asarray(self.response.received_power_w(freq_hz, z, fed_end,
                                                                     az, el, e)), 0.0)
            if faded:
                p = p * fading.gains(self.clock())
            signal_w = float(np.sum(p))
        return signal_w, noise_w

    def level_dbm(self, freq_hz: float, fed_end: str, mask: int, open_: bool,
                  faded: bool = True) -> float:
        """Received level in the passband at ``freq_hz`` for this relay state, dBm.

        ``faded=False`` gives the mean level (no fading, no reading jitter): the
        "truth" that an exhaustive sweep is scored against.
        """
        signal_w, noise_w = self.powers_w(freq_hz, fed_end, mask, open_, faded)
        level = 10.0 * math.log10(signal_w + noise_w) + 30.0
        if faded and self.scenario.read_noise_db > 0:
            level += float(self._stations(freq_hz)[1].rng.normal(0.0, self.scenario.read_noise_db))
        return level

    def noise_w(self, freq_hz: float, termination_ohm: complex, fed_end: str) -> float:
        """External (P.372, through the loop's average gain) plus chain noise, W."""
        fam = external_noise_figure_db(freq_hz, self.noise_category)
        g_avg = self.response.average_gain_dbi(freq_hz, termination_ohm, fed_end)
        kt0b_w = 10.0 ** (KT0_DBW_PER_HZ / 10.0) * self.bandwidth_hz
        return kt0b_w * (antenna_noise_kt0(fam, g_avg) + self.system_noise_factor - 1.0)


class SimSource:
    """Measurement source ``sim``: the virtual receiver at the board's actual relay state.

    Parameters
    ----------
    receiver : VirtualReceiver
        The receiver.
    freq_hz : float
        Tuned frequency, hertz.
    board_state : callable
        ``board_state() -> (fed_end, mask, open)`` read from the board itself
        (:meth:`nullsteer.sim.SimBoard.state`), so readings follow the real relays.
    """

    name = "sim"

    def __init__(self, receiver: VirtualReceiver, freq_hz: float,
                 board_state: Callable[[], tuple[str, int, bool]]) -> None:
        self.receiver = receiver
        self.freq_hz = freq_hz
        self.board_state = board_state

    def read_db(self) -> float:
        fed_end, mask, open_ = self.board_state()
        return self.receiver.level_dbm(self.freq_hz, fed_end, mask, open_)


class ModelResponse:
    """:class:`AntennaResponse` from a solved :class:`nullsteer.antenna.ports.PortSolution`.

    Frequencies are matched to the nearest solved one (within 0.5 %); solve the model at
    the frequencies the receiver will be tuned to.
    """

    def __init__(self, solution: Any) -> None:
        self.solution = solution
        self._eta: dict[tuple[int, complex, str], float] = {}

    def freq_index(self, freq_hz: float) -> int:
        freqs = np.asarray(self.solution.freqs_hz, dtype=float)
        i = int(np.argmin(np.abs(freqs - freq_hz)))
        if abs(freqs[i] - freq_hz) > 0.005 * freq_hz:
            raise ConfigError("--freq", f"{freq_hz / 1e6:g} MHz was not solved by the antenna "
                                        "model (solve it at the tuned frequency)")
        return i

    def received_power_w(self, freq_hz: float, termination_ohm: complex, fed_end: str,
                         az_deg: np.ndarray, el_deg: np.ndarray,
                         field_v_per_m: np.ndarray) -> np.ndarray:
        i = self.freq_index(freq_hz)
        p = self.solution.received_power_w(np.asarray(field_v_per_m, float), az_deg, el_deg,
                                           termination_ohm, fed_end, freq_index=i)
        return np.ravel(p)

    def average_gain_dbi(self, freq_hz: float, termination_ohm: complex, fed_end: str) -> float:
        from nullsteer.reception.noise import loop_noise_efficiency_db

        i = self.freq_index(freq_hz)
        key = (i, complex(termination_ohm), fed_end)
        if key not in self._eta:
            self._eta[key] = loop_noise_efficiency_db(self.solution, termination_ohm, fed_end, i,
                                                      feed=self.solution.feed)
        return self._eta[key]
