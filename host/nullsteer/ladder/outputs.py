"""What the builder and the board get: parts list, settings table, board table, wiring."""

from __future__ import annotations

import math

import json
import os
import tempfile
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any

import numpy as np

from nullsteer.errors import ConfigError
from nullsteer.ladder.design import LadderDesign, dc_settings, evaluate
from nullsteer.ladder.network import Parasitics, format_ohm, render_tree
from nullsteer.ladder.topology import LadderValues, get_topology

#: Standard power ratings of leaded film resistors, watts (common practice).
POWER_RATINGS_W = (0.125, 0.25, 0.5, 1.0, 2.0, 3.0)
#: Assumed RF power reaching the termination, watts: a receive-only loop near a
#: transmitting antenna of the same station (assumption; change with ``induced_w``).
DEFAULT_INDUCED_W = 0.25
DERATING = 2.0

PARTS_CAUTION = ("Use metal-film, thick-film or carbon-composition resistors; never "
                 "wire-wound parts (their inductance spoils the termination at RF).")


@dataclass(frozen=True)
class PartRow:
    """One line of the parts list."""

    ref: str
    role: str
    value_ohm: float
    series: str
    tolerance_pct: float
    worst_share: float   # largest fraction of the termination's power this part takes
    power_w: float       # chosen rating, watts

    def to_json(self) -> dict:
        return self.__dict__.copy()


def _power_shares(design: LadderDesign) -> list[float]:
    """Largest fraction of the termination power dissipated in each resistor (base first).

    For a resistive network fed by a current, part i takes the fraction
    (R_i / R) dR/dR_i of the power (Tellegen's theorem); dR/dR_i is found by perturbing R_i.
    """
    v = design.values
    base = dc_settings(design.topo, v, design.parasitics)
    names = ["base"] * (v.base_ohm > 0) + [f"c{i}" for i in range(len(v.chain_ohm))] \
        + [f"s{i}" for i in range(len(v.shunt_ohm))]
    shares = []
    eps = 1e-6
    for name in names:
        if name == "base":
            pv = replace(v, base_ohm=v.base_ohm * (1 + eps))
            r_i = v.base_ohm
        elif name[0] == "c":
            i = int(name[1:])
            chain = list(v.chain_ohm)
            r_i = chain[i]
            chain[i] *= 1 + eps
            pv = LadderValues(v.base_ohm, tuple(chain), v.shunt_ohm)
        else:
            i = int(name[1:])
            sh = list(v.shunt_ohm)
            r_i = sh[i]
            sh[i] *= 1 + eps
            pv = LadderValues(v.base_ohm, v.chain_ohm, tuple(sh))
        d = (dc_settings(design.topo, pv, design.parasitics) - base) / (r_i * eps)
        with np.errstate(divide="ignore", invalid="ignore"):
            frac = np.where(base > 0, r_i * d / base, 0.0)
        shares.append(float(np.clip(np.nanmax(frac), 0.0, 1.0)))
    return shares


def parts_list(design: LadderDesign, induced_w: float = DEFAULT_INDUCED_W) -> list[PartRow]:
    """Resistors to buy, with the power rating for ``induced_w`` watts reaching the
    termination and a derating of 2 (assumption stated in :data:`DEFAULT_INDUCED_W`)."""
    v = design.values
    refs = [("R0", "base", v.base_ohm)] * (v.base_ohm > 0)
    refs += [(f"R{i + 1}", f"chain, bit {i}", r) for i, r in enumerate(v.chain_ohm)]
    refs += [("Rs", f"shunt, bit {len(v.chain_ohm) + i}", r) for i, r in enumerate(v.shunt_ohm)]
    rows = []
    for (ref, role, value), share in zip(refs, _power_shares(design)):
        need = share * induced_w * DERATING
        rating = next((p for p in POWER_RATINGS_W if p >= need), POWER_RATINGS_W[-1])
        rows.append(PartRow(ref, role, value, design.series, design.tolerance_pct, share, rating))
    return rows


def settings_rows(design: LadderDesign) -> list[tuple[int, float, float]]:
    """(mask, ohms, step to the next setting in percent; nan for the last), sorted by ohms."""
    s = design.settings
    out = []
    for i, st in enumerate(s):
        step = (s[i + 1].ohms / st.ohms - 1) * 100 if i + 1 < len(s) and st.ohms > 0 else float("nan")
        out.append((st.mask, st.ohms, step))
    return out


def reach_warnings(design: LadderDesign) -> list[str]:
    """Plain warnings when the settings do not span the wanted range: the lowest setting
    above its low end or the highest below its high end by more than the resistors'
    tolerance (a smaller shortfall is lost in the parts' own spread). The worst-case
    error already counts the shortfall; this says where it comes from."""
    finite = [st.ohms for st in design.settings if math.isfinite(st.ohms) and st.ohms > 0]
    if not finite:
        return ["no setting has a finite resistance: the range is not reached"]
    out = []
    lo, hi = min(finite), max(finite)
    slack = 1.0 + design.tolerance_pct / 100.0
    if lo > design.r_min_ohm * slack:
        out.append(f"range not reached: the lowest setting {lo:.1f} ohm is above the wanted "
                   f"{design.r_min_ohm:.1f} ohm ({(lo / design.r_min_ohm - 1) * 100:.1f} % "
                   "high); add a relay or lower the base")
    if hi * slack < design.r_max_ohm:
        out.append(f"range not reached: the highest setting {hi:.1f} ohm is below the wanted "
                   f"{design.r_max_ohm:.1f} ohm ({(1 - hi / design.r_max_ohm) * 100:.1f} % "
                   "low); add a relay or narrow the range")
    return out


def board_ladder_block(design: Any) -> dict:
    """The ``"ladder"`` key of the board config (read by the firmware and the hubs).

    ``design`` is a LadderDesign, or a StationDesign (its ``design`` is used)."""
    design = getattr(design, "design", design)
    return {"topology": design.topology, "bits": design.relays,
            "resistors_ohm": design.resistors_ohm, "base_ohm": design.base_ohm,
            "table": [[s.mask, round(s.ohms, 1)] for s in design.settings]}


def design_from_board_block(block: dict, parasitics: Parasitics | None = None,
                            series: str = "E24", tolerance_pct: float = 1.0) -> LadderDesign:
    """The ladder a board config's ``"ladder"`` block describes (topology, base, resistors
    in bit order), for its settings' impedance at frequency; the design range is the
    table's span. Raises ConfigError naming ``ladder.<key>`` when the block lacks them."""
    for key in ("topology", "resistors_ohm"):
        if key not in block:
            raise ConfigError(f"ladder.{key}", "the board config's ladder block lacks it")
    topo = get_topology(str(block["topology"]), "ladder.topology")
    res = [float(r) for r in block["resistors_ohm"]]
    if len(res) <= topo.shunt_relays:
        raise ConfigError("ladder.resistors_ohm", f"{topo.name.value} needs more resistors")
    n_chain = len(res) - topo.shunt_relays
    values = LadderValues(float(block.get("base_ohm", 0.0)), tuple(res[:n_chain]),
                          tuple(res[n_chain:]))
    table = [float(r) for _, r in block.get("table", [])] or [1.0, 2.0]
    return evaluate(topo, values, min(table), max(table), tolerance_pct,
                    parasitics or Parasitics(), series)


def write_board_ladder(design: LadderDesign, path: str | Path, key: str = "--board-config") -> None:
    """Set the ``"ladder"`` key of the board config JSON at ``path``, keeping other keys.

    The file is created if absent and replaced atomically (temporary file, then rename).
    """
    p = Path(path)
    doc: dict = {}
    if p.exists():
        try:
            doc = json.loads(p.read_text(encoding="utf-8"))
        except (OSError, ValueError) as exc:
            raise ConfigError(key, f"cannot read {p} as JSON: {exc}") from None
        if not isinstance(doc, dict):
            raise ConfigError(key, f"{p} must hold a JSON object")
    doc["ladder"] = board_ladder_block(design)
    p.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=".ladder-", dir=str(p.parent))
    with os.fdopen(fd, "w", encoding="utf-8") as f:
        json.dump(doc, f, indent=2)
        f.write("\n")
    os.replace(tmp, p)


_ROLE_NOTES = """\
Role relays (not in the mask):
  K_OPEN  open-termination relay; NC contact in series with the ladder. Energised:
          termination open: no rear null (F/B about 0 dB). For the small-loop
          figure-8 (nulls broadside) the termination must be shorted instead.
  K_REV   reversal relay, DPDT. De-energised: end A to the receiver side, end B to the
          ladder. Energised: swapped (null toward the other end).
  K_PROT  receiver-protect relay; shorts the receiver input while K_REV moves.
          Reversal sequence: K_PROT on, settle; K_REV to the new state, settle;
          K_PROT off (break before make)."""


def wiring_diagram(design: LadderDesign) -> str:
    """Text wiring diagram of the build (from the same tree as the impedances)."""
    v = design.values
    head = [f"{design.topology} ladder, {design.relays} relays, "
            f"{format_ohm(design.settings[0].ohms)} .. {format_ohm(design.settings[-1].ohms)}",
            "Bit i = 1 energises relay K(i+1).", "",
            "  o TERMINATION (from K_REV: the terminated corner, or its line)"]
    body = ["  " + line for line in render_tree(design.topo.tree(v))]
    tail = ["  o RETURN (the other side of the termination port)", "", _ROLE_NOTES]
    return "\n".join(head + body + tail)
