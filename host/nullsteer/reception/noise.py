"""External radio noise (ITU-R P.372) against the receiving system's own noise (Friis).

Man-made and galactic noise (ITU-R P.372, Table 1 / §6): the median external noise
figure ``Fam = c - d * log10(f_MHz)`` dB above kT0b, for 0.3..250 MHz (galactic noise
from ~10 MHz up, where the ionosphere lets it through). The available noise power from
a lossless antenna is ``Pn = Fa + 10 log10(b) - 204`` dBW (P.372 eq. 6; kT0 = -204 dBW/Hz
with T0 = 290 K).

A real receiving loop is far from lossless: it delivers only a fraction ``eta`` of the
ambient noise to its feed, where ``eta`` is the antenna's *average* realized gain over
all directions (linear; 0 dBi for a lossless antenna in isotropic noise). The loss part
adds thermal noise ``(1 - eta) kT0b`` (the wires and termination are at ~T0). So, in
units of kT0b at the antenna terminals::

    external   = eta * fa + (1 - eta)
    internal   = F_sys - 1            (the receiving chain's own noise, referred there)
    margin_db  = 10 log10(external / internal)

with ``F_sys`` the Friis cascade (Friis 1944; Pozar, *Microwave Engineering*, 4th ed.,
§10.3) of preamp, cable (a matched passive loss L at T0 has F = L) and receiver. The SNR
lost to the chain's noise is ``10 log10(1 + 10^(-margin/10))``; 10 dB of margin costs
about 0.4 dB (common practice). All figures here are ratios in dB unless the name says
otherwise.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from enum import Enum
from typing import Any

from nullsteer.station.schema import Key, Kind, Section
from nullsteer.errors import ConfigError

#: kT0 in dBW/Hz for T0 = 290 K (ITU-R P.372 eq. 6).
KT0_DBW_PER_HZ = -204.0
#: Wanted margin of external noise over the chain's own noise, dB (common practice).
DEFAULT_MARGIN_DB = 10.0


class NoiseCategory(str, Enum):
    """Environment categories of ITU-R P.372 Table 1 (our spelling of their names)."""

    CITY = "city"
    RESIDENTIAL = "residential"
    RURAL = "rural"
    QUIET_RURAL = "quiet-rural"
    GALACTIC = "galactic"

    @classmethod
    def parse(cls, text: str, key: str = "noise.category") -> NoiseCategory:
        try:
            return cls(text.lower())
        except ValueError:
            names = ", ".join(c.value for c in cls)
            raise ConfigError(key, f"must be one of {names}; got {text!r}") from None


#: (c, d) of Fam = c - d log10(f_MHz), ITU-R P.372 Table 1.
P372_CONSTANTS: dict[NoiseCategory, tuple[float, float]] = {
    NoiseCategory.CITY: (76.8, 27.7),
    NoiseCategory.RESIDENTIAL: (72.5, 27.7),
    NoiseCategory.RURAL: (67.2, 27.7),
    NoiseCategory.QUIET_RURAL: (53.6, 28.6),
    NoiseCategory.GALACTIC: (52.0, 23.0),
}
#: Frequency range of the Table 1 fits, MHz.
P372_RANGE_MHZ = (0.3, 250.0)
#: Below the fits' range, down to this frequency (MHz), the Table 1 line is extended and
#: every budget says so (:func:`extrapolation_note`). From memory: P.372 describes LF and
#: low-MF noise through atmospheric noise (lightning, §4, charts by season and time
#: block), which there usually exceeds man-made noise; that is not modelled here, so the
#: extended line is a floor for a quiet night, not a forecast.
EXTRAPOLATE_DOWN_TO_MHZ = 0.01


def extrapolation_note(freq_hz: float) -> str | None:
    """A note when ``freq_hz`` lies below the range of ITU-R P.372 Table 1, else None."""
    f_mhz = freq_hz / 1e6
    if f_mhz >= P372_RANGE_MHZ[0]:
        return None
    return (f"below {P372_RANGE_MHZ[0]:g} MHz the man-made noise line of ITU-R P.372 Table 1 "
            "is extrapolated; atmospheric noise (P.372 §4) usually dominates there and is "
            "not included")


def external_noise_figure_db(freq_hz: float, category: NoiseCategory | str) -> float:
    """Median external noise figure Fam, dB above kT0b (ITU-R P.372 Table 1).

    Parameters
    ----------
    freq_hz : float
        Frequency, hertz: 0.3..250 MHz, the range of the fit, or down to
        :data:`EXTRAPOLATE_DOWN_TO_MHZ` with the line extended (see
        :func:`extrapolation_note`).
    category : NoiseCategory or str
        Environment category.
    """
    cat = NoiseCategory.parse(category) if isinstance(category, str) else category
    f_mhz = freq_hz / 1e6
    lo, hi = EXTRAPOLATE_DOWN_TO_MHZ, P372_RANGE_MHZ[1]
    if not lo <= f_mhz <= hi:
        raise ConfigError("freq", f"{f_mhz:g} MHz is outside the {lo:g}..{hi:g} MHz "
                                  "this noise model covers (ITU-R P.372 Table 1 is fitted "
                                  f"for {P372_RANGE_MHZ[0]:g}..{hi:g} MHz)")
    c, d = P372_CONSTANTS[cat]
    return c - d * math.log10(f_mhz)


def noise_power_dbw(fa_db: float, bandwidth_hz: float) -> float:
    """Available noise power Pn = Fa + 10 log10(b) - 204 dBW (ITU-R P.372 eq. 6)."""
    if not bandwidth_hz > 0:
        raise ConfigError("bandwidth_hz", f"must be > 0, got {bandwidth_hz:g}")
    return fa_db + 10.0 * math.log10(bandwidth_hz) + KT0_DBW_PER_HZ


def db_to_ratio(x_db: float) -> float:
    return 10.0 ** (x_db / 10.0)


def ratio_to_db(x: float) -> float:
    return 10.0 * math.log10(x)


@dataclass(frozen=True)
class Stage:
    """One two-port of the receiving chain.

    Parameters
    ----------
    name : str
        Label for reports ("preamp", "coax", "receiver").
    nf_db : float
        Noise figure, dB (>= 0).
    gain_db : float
        Available power gain, dB (negative for a loss).
    """

    name: str
    nf_db: float
    gain_db: float


def passive_stage(name: str, loss_db: float) -> Stage:
    """A matched passive loss at T0: its noise figure equals its loss (Pozar §10.2)."""
    return Stage(name, nf_db=loss_db, gain_db=-loss_db)


def friis_noise_factor(stages: Sequence[Stage]) -> float:
    """Noise factor (linear) of a cascade: F = F1 + (F2 - 1)/G1 + (F3 - 1)/(G1 G2) + ...

    Friis's formula (Pozar, *Microwave Engineering*, 4th ed., eq. 10.23). An empty
    cascade is noiseless (F = 1).
    """
    total, gain = 1.0, 1.0
    for st in stages:
        total += (db_to_ratio(st.nf_db) - 1.0) / gain
        gain *= db_to_ratio(st.gain_db)
    return total


def snr_loss_db(margin_db: float) -> float:
    """SNR lost when external noise exceeds the chain's own by ``margin_db`` (common practice)."""
    return ratio_to_db(1.0 + db_to_ratio(-margin_db))


@dataclass(frozen=True)
class ReceiveChain:
    """Preamp, cable and receiver; ``preamp_at`` is "antenna" (before the cable) or "shack".

    Parameters
    ----------
    receiver_nf_db : float
        Receiver noise figure, dB.
    cable_loss_db : float
        Matched loss of the feedline at the frequency of interest, dB.
    preamp_nf_db, preamp_gain_db : float
        Preamp noise figure and gain, dB; a gain of 0 with NF 0 means "no preamp".
    preamp_at : str
        "antenna" or "shack".
    """

    receiver_nf_db: float
    cable_loss_db: float = 0.0
    preamp_nf_db: float = 0.0
    preamp_gain_db: float = 0.0
    preamp_at: str = "antenna"

    def stages(self, preamp_gain_db: float | None = None) -> list[Stage]:
        g = self.preamp_gain_db if preamp_gain_db is None else preamp_gain_db
        pre = Stage("preamp", self.preamp_nf_db, g)
        cable = passive_stage("coax", self.cable_loss_db)
        rx = Stage("receiver", self.receiver_nf_db, 0.0)
        return [pre, cable, rx] if self.preamp_at == "antenna" else [cable, pre, rx]

    def noise_factor(self, preamp_gain_db: float | None = None) -> float:
        return friis_noise_factor(self.stages(preamp_gain_db))


def antenna_noise_kt0(fa_db: float, avg_gain_db: float) -> float:
    """Noise at the antenna terminals in units of kT0b: eta*fa + (1 - eta).

    ``avg_gain_db`` is the antenna's average realized gain over all directions (dBi),
    i.e. its noise-delivery efficiency eta. Clipped at 0 dBi (a passive antenna cannot
    deliver more than it collects from isotropic noise).
    """
    eta = min(db_to_ratio(avg_gain_db), 1.0)
    return eta * db_to_ratio(fa_db) + (1.0 - eta)


def required_preamp_gain_db(chain: ReceiveChain, external_kt0: float,
                            margin_db: float = DEFAULT_MARGIN_DB) -> float | None:
    """Smallest preamp gain (dB, >= 0) giving ``margin_db``; None if no gain suffices.

    From the Friis cascade split at the preamp: F = Fb + (Fp - 1)/Gb + (Fa - 1)/(Gb Gp),
    with (Fb, Gb) the stages before the preamp and Fa the noise factor of those after it.
    As Gp grows the chain approaches Fb + (Fp - 1)/Gb; if that alone already spoils the
    margin, no gain helps (use a quieter preamp, or move it to the antenna).
    """
    stages = chain.stages(0.0)
    i = next(k for k, s in enumerate(stages) if s.name == "preamp")
    before, after = stages[:i], stages[i + 1:]
    fb = friis_noise_factor(before)
    gb = db_to_ratio(sum(s.gain_db for s in before))
    fp = db_to_ratio(chain.preamp_nf_db)
    fa = friis_noise_factor(after)
    allowed = external_kt0 / db_to_ratio(margin_db)  # allowed F_sys - 1
    floor = fb - 1.0 + (fp - 1.0) / gb
    if floor >= allowed:
        return None
    gp = (fa - 1.0) / (gb * (allowed - floor))
    return max(0.0, ratio_to_db(gp)) if gp > 0 else 0.0


@dataclass(frozen=True)
class NoiseBudget:
    """External noise versus the chain's own noise at one frequency (see module docstring)."""

    freq_hz: float
    category: str
    bandwidth_hz: float
    fam_db: float
    avg_gain_db: float
    external_dbm: float
    system_nf_db: float
    internal_dbm: float
    margin_db: float
    snr_loss_db: float
    preamp_needed_db: float | None
    margin_target_db: float
    notes: list[str] = field(default_factory=list)

    def to_json(self) -> dict[str, Any]:
        return {"freq_mhz": self.freq_hz / 1e6, "category": self.category,
                "bandwidth_hz": self.bandwidth_hz, "fam_db": round(self.fam_db, 2),
                "avg_gain_dbi": round(self.avg_gain_db, 2),
                "external_dbm": round(self.external_dbm, 2),
                "system_nf_db": round(self.system_nf_db, 2),
                "internal_dbm": round(self.internal_dbm, 2),
                "margin_db": round(self.margin_db, 2), "snr_loss_db": round(self.snr_loss_db, 2),
                "preamp_needed_db": (None if self.preamp_needed_db is None
                                     else round(self.preamp_needed_db, 1)),
                "margin_target_db": self.margin_target_db, "notes": list(self.notes)}


def noise_budget(freq_hz: float, avg_gain_db: float, chain: ReceiveChain,
                 category: NoiseCategory | str = NoiseCategory.RURAL,
                 bandwidth_hz: float = 500.0,
                 margin_target_db: float = DEFAULT_MARGIN_DB,
                 sizing_chain: ReceiveChain | None = None) -> NoiseBudget:
    """The noise budget of one frequency.

    Parameters
    ----------
    freq_hz : float
        Frequency, hertz.
    avg_gain_db : float
        The loop's average realized gain over all directions, dBi (from the antenna
        model: peak gain minus RDF when RDF is referred to the full sphere).
    chain : ReceiveChain
        Preamp, cable, receiver.
    category : NoiseCategory or str
        ITU-R P.372 environment.
    bandwidth_hz : float
        Receiver bandwidth, hertz.
    margin_target_db : float
        Wanted margin of external over internal noise, dB.
    sizing_chain : ReceiveChain or None
        The chain whose preamp gain is solved for the margin (default ``chain``); lets
        the margin be reported for the chain as fitted while sizing the intended preamp.

    Returns
    -------
    NoiseBudget
        Powers are referred to the antenna terminals, dBm in ``bandwidth_hz``.
    """
    cat = NoiseCategory.parse(category) if isinstance(category, str) else category
    fam = external_noise_figure_db(freq_hz, cat)
    ext = antenna_noise_kt0(fam, avg_gain_db)
    f_sys = chain.noise_factor()
    internal = max(f_sys - 1.0, 1e-12)
    floor_dbm = noise_power_dbw(0.0, bandwidth_hz) + 30.0
    margin = ratio_to_db(ext / internal)
    need = required_preamp_gain_db(sizing_chain or chain, ext, margin_target_db)
    notes = []
    if need is None:
        notes.append("no preamp gain reaches the margin: the preamp's own noise figure "
                     "(or the loss ahead of it) is too high")
    below = extrapolation_note(freq_hz)
    if below:
        notes.append(below)
    if cat is NoiseCategory.GALACTIC and freq_hz < 10e6:
        notes.append("galactic noise barely reaches the ground below ~10 MHz (P.372 §5)")
    return NoiseBudget(freq_hz=freq_hz, category=cat.value, bandwidth_hz=bandwidth_hz,
                       fam_db=fam, avg_gain_db=avg_gain_db,
                       external_dbm=floor_dbm + ratio_to_db(ext),
                       system_nf_db=ratio_to_db(f_sys), internal_dbm=floor_dbm + ratio_to_db(internal),
                       margin_db=margin, snr_loss_db=snr_loss_db(margin),
                       preamp_needed_db=need, margin_target_db=margin_target_db, notes=notes)


# -- station file -------------------------------------------------------------------
NOISE = Section("noise", "The receiving chain and its noise surroundings, for `nullsteer noise`, "
                "the report and the virtual receiver.", (
    Key("category", Kind.STRING, "ITU-R P.372 environment category.", default="rural",
        choices=tuple(c.value for c in NoiseCategory)),
    Key("receiver_nf_db", Kind.NUMBER, "Receiver noise figure.", "dB", 12.0, 0.0, 60.0),
    Key("bandwidth_hz", Kind.NUMBER, "Receiver bandwidth.", "Hz", 500.0, 0.0, 1e7,
        exclusive_min=True),
    Key("preamp_nf_db", Kind.NUMBER, "Noise figure of the preamp (fitted or planned).", "dB",
        3.0, 0.0, 30.0),
    Key("preamp_gain_db", Kind.NUMBER, "Gain of the preamp fitted now; 0 means none.", "dB",
        0.0, 0.0, 60.0),
    Key("preamp_at", Kind.STRING, "Where the preamp sits: before the coax or after it.",
        default="antenna", choices=("antenna", "shack")),
    Key("margin_db", Kind.NUMBER, "Wanted margin of external noise over the chain's own.",
        "dB", DEFAULT_MARGIN_DB, 0.0, 40.0),
))


@dataclass(frozen=True)
class NoiseSpec:
    """The ``[noise]`` section: environment, receiver and preamp.

    Keys: see :data:`NOISE`.
    """

    category: NoiseCategory
    receiver_nf_db: float = 12.0
    bandwidth_hz: float = 500.0
    preamp_nf_db: float = 3.0
    preamp_gain_db: float = 0.0
    preamp_at: str = "antenna"
    margin_db: float = DEFAULT_MARGIN_DB

    def chain(self, cable_loss_db: float) -> ReceiveChain:
        return ReceiveChain(receiver_nf_db=self.receiver_nf_db, cable_loss_db=cable_loss_db,
                            preamp_nf_db=self.preamp_nf_db if self.preamp_gain_db > 0 else 0.0,
                            preamp_gain_db=self.preamp_gain_db, preamp_at=self.preamp_at)

    def chain_for_sizing(self, cable_loss_db: float) -> ReceiveChain:
        """The chain with the preamp's NF in place (its gain is what gets solved for)."""
        return ReceiveChain(receiver_nf_db=self.receiver_nf_db, cable_loss_db=cable_loss_db,
                            preamp_nf_db=self.preamp_nf_db, preamp_gain_db=self.preamp_gain_db,
                            preamp_at=self.preamp_at)


def parse_noise(table: dict[str, Any], where: str = "noise") -> NoiseSpec:
    """Read ``[noise]``; bad keys raise ConfigError naming ``noise.<key>``."""
    NOISE.check(table, where)
    cat = NoiseCategory.parse(NOISE.get(table, "category", where, choices=None),
                              f"{where}.category")
    values = {k: NOISE.get(table, k, where) for k in ("receiver_nf_db", "bandwidth_hz",
                                                      "preamp_nf_db", "preamp_gain_db",
                                                      "preamp_at", "margin_db")}
    return NoiseSpec(category=cat, **values)


def station_noise_budgets(spec: NoiseSpec, freqs_hz: Sequence[float],
                          avg_gain_db: Sequence[float],
                          cable_loss_db: Sequence[float]) -> list[NoiseBudget]:
    """One :class:`NoiseBudget` per frequency, the preamp's gain solved for the margin.

    The call for ``model`` output: pass the model's average realized gain per frequency
    (dBi, at the loop's feed, before the coax) and the coax loss per frequency (dB).
    The reported margin is that of the chain as fitted now (``preamp_gain_db``).
    """
    if not len(freqs_hz) == len(avg_gain_db) == len(cable_loss_db):
        raise ValueError("freqs_hz, avg_gain_db and cable_loss_db must have one value each")
    return [noise_budget(f, g, spec.chain(loss), spec.category, spec.bandwidth_hz,
                         spec.margin_db, sizing_chain=spec.chain_for_sizing(loss))
            for f, g, loss in zip(freqs_hz, avg_gain_db, cable_loss_db)]


# -- from the antenna model -----------------------------------------------------------
def loop_noise_efficiency_db(solution: Any, termination_ohm: complex, fed_end: str,
                             freq_index: int, feed: Any = None) -> float:
    """The loop's noise-delivery efficiency eta, dB (the ``avg_gain_db`` of this module).

    eta = (1/4 pi) * integral of G over the upper hemisphere: the fraction of isotropic
    sky noise delivered to the feed (a lossless antenna over perfect ground gives 1,
    as the monopole that defines P.372's Fa): the model's ``average_gain``.

    Parameters
    ----------
    solution : nullsteer.antenna.ports.PortSolution
        The solved model.
    termination_ohm : complex
        Termination (``math.inf`` for open).
    fed_end : str
        "A" or "B".
    freq_index : int
        Index of the frequency in ``solution.freqs_hz``.
    feed : FeedSpec or None
        When given, eta also counts the transducer gain of this receiver chain
        (transformer, coax) - the noise delivered into the receiver; None gives eta at
        the loop's own terminals (IEEE gain, losses of wire and termination only).
    """
    import numpy as np

    from nullsteer.antenna.ports import transducer_gain

    eta = float(np.ravel(solution.average_gain(termination_ohm, fed_end, freq_index=freq_index))[0])
    if feed is not None:
        z = solution.feed_impedance_ohm(termination_ohm, fed_end, freq_index=freq_index)
        f = solution.freqs_hz[freq_index]
        eta *= float(np.ravel(transducer_gain(np.ravel(z), feed, np.array([f])))[0])
    return ratio_to_db(max(eta, 1e-30))


def model_noise_budgets(solution: Any, spec: NoiseSpec, fed_end: str = "A",
                        termination_ohm: Sequence[complex] | None = None) -> list[NoiseBudget]:
    """Noise budgets at every solved frequency of the antenna model (for ``model`` output).

    Parameters
    ----------
    solution : nullsteer.antenna.ports.PortSolution
        The solved loop; its ``feed`` gives the transformer, receiver and coax.
    spec : NoiseSpec
        From :func:`parse_noise` (``[noise]`` of the station file).
    fed_end : str
        "A" or "B".
    termination_ohm : sequence or None
        Termination per frequency; default the model's F/B optimum over 10..60 deg.

    The loop's efficiency is taken at the transformer's secondary (transformer mismatch
    included, coax excluded), and the coax enters the Friis cascade as a passive loss.
    """
    from dataclasses import replace

    import numpy as np

    freqs = [float(f) for f in solution.freqs_hz]
    if termination_ohm is None:
        termination_ohm = list(np.ravel(solution.optimum_termination_ohm(fed_end, [10.0, 60.0])))
    feed = solution.feed
    no_coax = replace(feed, coax=None)
    gains = [loop_noise_efficiency_db(solution, complex(t), fed_end, i, feed=no_coax)
             for i, t in enumerate(termination_ohm)]
    losses = [0.0 if feed.coax is None else float(feed.coax.matched_loss_db(f)) for f in freqs]
    return station_noise_budgets(spec, freqs, gains, losses)
