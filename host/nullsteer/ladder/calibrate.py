"""Calibration: the ladder rebuilt from measured resistor values.

Inputs (CSV files with a header line, ohms as a meter reads them):

``resistors``  ``ref,ohms``: each ladder resistor by its reference in the parts list and
               the wiring diagram (``R0`` base, ``R1``.. chain, ``Rs1``.. shunts).
``settings``   ``mask,ohms``: the bench test's reading of the termination at each mask
               (hardware_notes/bench-test.md writes this file).

:func:`calibrate` fits the part values to everything measured (a meter reading of a part
counts as a strong measurement of it; the settings' readings constrain the parts through
the network of :mod:`nullsteer.ladder.topology` with its contact resistance), flags

* a part whose fitted value is off its nominal value by more than its tolerance (plus
  the meter's allowance): probably the wrong value fitted, and
* a setting whose reading disagrees with the fitted parts by more than the meter's
  allowance: a wiring or relay fault on the bits of that mask;

and returns the design evaluated for the fitted values with zero tolerance, whose table
is what the board should use (settings with a fault left out).
"""

from __future__ import annotations

import csv
import math
from dataclasses import dataclass, replace
from pathlib import Path

import numpy as np

from nullsteer.errors import ConfigError
from nullsteer.ladder.design import LadderDesign, Setting, dc_settings, evaluate
from nullsteer.ladder.topology import LadderValues

#: Meter allowance: relative and absolute part of a reading's uncertainty (a typical
#: handheld meter's ohms range, ±(0.5 % + a few digits); common practice).
METER_REL = 0.005
METER_ABS_OHM = 0.5


@dataclass(frozen=True)
class PartFlag:
    ref: str
    nominal_ohm: float
    fitted_ohm: float

    @property
    def off_pct(self) -> float:
        return (self.fitted_ohm / self.nominal_ohm - 1.0) * 100.0

    def to_json(self) -> dict:
        return {"ref": self.ref, "nominal_ohm": self.nominal_ohm,
                "fitted_ohm": self.fitted_ohm, "off_pct": self.off_pct}


@dataclass(frozen=True)
class SettingFlag:
    mask: int
    measured_ohm: float
    predicted_ohm: float

    def to_json(self) -> dict:
        return {"mask": self.mask, "measured_ohm": self.measured_ohm,
                "predicted_ohm": self.predicted_ohm}


@dataclass(frozen=True)
class Calibration:
    """Fitted parts (ref -> ohms), the flags and the calibrated design."""

    fitted_ohm: dict[str, float]
    wrong_parts: tuple[PartFlag, ...]
    faulty_settings: tuple[SettingFlag, ...]
    design: LadderDesign
    nominal: LadderDesign

    def to_json(self) -> dict:
        return {"fitted_ohm": self.fitted_ohm,
                "wrong_parts": [p.to_json() for p in self.wrong_parts],
                "faulty_settings": [s.to_json() for s in self.faulty_settings],
                "nominal_error_pct": self.design.nominal_error_pct,
                "worst_case_error_pct": self.design.worst_case_error_pct,
                "nominal_design_worst_case_pct": self.nominal.worst_case_error_pct,
                "table_rows": len(self.design.settings)}


def part_refs(design: LadderDesign) -> list[str]:
    """References of the parts in parameter order: R0 (when fitted), R1.., Rs1..."""
    v = design.values
    refs = ["R0"] if v.base_ohm > 0 else []
    refs += [f"R{i + 1}" for i in range(len(v.chain_ohm))]
    return refs + [f"Rs{j + 1}" for j in range(len(v.shunt_ohm))]


def _values(design: LadderDesign, params: dict[str, float]) -> LadderValues:
    v = design.values
    return LadderValues(params.get("R0", v.base_ohm),
                        tuple(params[f"R{i + 1}"] for i in range(len(v.chain_ohm))),
                        tuple(params[f"Rs{j + 1}"] for j in range(len(v.shunt_ohm))))


def _nominal(design: LadderDesign) -> dict[str, float]:
    v = design.values
    vals = ([v.base_ohm] if v.base_ohm > 0 else []) + list(v.chain_ohm) + list(v.shunt_ohm)
    return dict(zip(part_refs(design), vals))


def read_csv(path: str | Path, key_col: str, flag: str) -> list[tuple[str, float]]:
    """Rows (key, ohms) of a CSV file with columns ``key_col`` and ``ohms``."""
    try:
        with open(path, newline="") as f:
            rows = list(csv.DictReader(f))
    except OSError as exc:
        raise ConfigError(flag, f"cannot read {path}: {exc.strerror}") from None
    out = []
    for i, row in enumerate(rows, start=2):
        if key_col not in row or "ohms" not in row:
            raise ConfigError(flag, f"{path}: needs the columns {key_col},ohms")
        try:
            ohms = float(row["ohms"])
        except (TypeError, ValueError):
            raise ConfigError(flag, f"{path} line {i}: ohms {row['ohms']!r} is not a number") from None
        if not (math.isfinite(ohms) and ohms > 0):
            raise ConfigError(flag, f"{path} line {i}: ohms must be > 0, got {row['ohms']}")
        out.append((str(row[key_col]).strip(), ohms))
    return out


def _allow(r_ohm: np.ndarray | float) -> np.ndarray | float:
    return METER_REL * np.asarray(r_ohm) + METER_ABS_OHM


def calibrate(design: LadderDesign, resistors: list[tuple[str, float]] | None = None,
              settings: list[tuple[str, float]] | None = None,
              flag_names: tuple[str, str] = ("--resistors", "--settings")) -> Calibration:
    """Fit the parts of ``design`` to the measurements (see the module docstring):
    ``resistors`` (ref, ohms) and ``settings`` (mask as text, ohms)."""
    nominal = _nominal(design)
    refs = list(nominal)
    meter = {}
    for ref, ohms in resistors or []:
        if ref not in nominal:
            raise ConfigError(flag_names[0], f"unknown part {ref!r} (this ladder has "
                              f"{', '.join(refs)})")
        meter[ref] = ohms
    bits = design.relays
    measured: dict[int, float] = {}
    for key, ohms in settings or []:
        try:
            mask = int(key, 0)
        except ValueError:
            raise ConfigError(flag_names[1], f"mask {key!r} is not a whole number") from None
        if not 0 <= mask < 2 ** bits:
            raise ConfigError(flag_names[1], f"mask {mask} outside 0..{2 ** bits - 1}")
        measured[mask] = ohms
    topo, par = design.topo, design.parasitics
    x = np.log(np.array([meter.get(r, nominal[r]) for r in refs]))
    use = np.array(sorted(measured), dtype=int)
    faulty: set[int] = set()
    for _ in range(3):                   # fit, drop the settings that disagree, refit
        keep = np.array([m for m in use if m not in faulty], dtype=int)
        x = _fit(design, refs, x, meter, keep, measured)
        model = dc_settings(topo, _values(design, dict(zip(refs, np.exp(x)))), par)
        bad = {int(m) for m in use
               if abs(model[m] - measured[int(m)]) > 3.0 * _allow(measured[int(m)])}
        if bad == faulty:
            break
        faulty = bad
    fitted = {r: float(v) for r, v in zip(refs, np.exp(x))}
    tol = design.tolerance_pct / 100.0
    wrong = tuple(PartFlag(r, nominal[r], fitted[r]) for r in refs
                  if abs(fitted[r] - nominal[r]) > tol * nominal[r] + float(_allow(nominal[r])))
    values = _values(design, fitted)
    model = dc_settings(topo, values, par)
    flags = tuple(SettingFlag(m, measured[m], float(model[m])) for m in sorted(faulty))
    cal = evaluate(topo, values, design.r_min_ohm, design.r_max_ohm, 0.0, par, design.series)
    table = tuple(s for s in cal.settings if s.mask not in faulty)
    cal = replace(cal, settings=table, proven_optimal=design.proven_optimal)
    return Calibration(fitted, wrong, flags, cal, design)


def _fit(design: LadderDesign, refs: list[str], x0: np.ndarray, meter: dict[str, float],
         masks: np.ndarray, measured: dict[int, float], rounds: int = 12) -> np.ndarray:
    """Gauss-Newton on the log part values: residuals of the settings' readings and of
    the meter's part readings, each divided by its meter allowance."""
    if masks.size == 0:
        return x0
    topo, par = design.topo, design.parasitics
    y = np.array([measured[int(m)] for m in masks])
    w_set = 1.0 / np.asarray(_allow(y))
    part_idx = [i for i, r in enumerate(refs) if r in meter]
    w_part = np.array([1.0 / float(_allow(meter[refs[i]])) for i in part_idx])
    x = x0.copy()

    def residual(xv: np.ndarray) -> np.ndarray:
        s = dc_settings(topo, _values(design, dict(zip(refs, np.exp(xv)))), par)[masks]
        r = [(s - y) * w_set]
        if part_idx:
            r.append((np.exp(xv[part_idx]) - [meter[refs[i]] for i in part_idx]) * w_part)
        return np.concatenate(r)

    for _ in range(rounds):
        r0 = residual(x)
        jac = np.empty((r0.size, x.size))
        for j in range(x.size):
            dx = np.zeros_like(x)
            dx[j] = 1e-6
            jac[:, j] = (residual(x + dx) - r0) / 1e-6
        step, *_ = np.linalg.lstsq(jac, -r0, rcond=None)
        x = x + np.clip(step, -0.5, 0.5)
        if np.abs(step).max() < 1e-10:
            break
    return x


__all__ = ["Calibration", "PartFlag", "SettingFlag", "calibrate", "part_refs", "read_csv",
           "METER_REL", "METER_ABS_OHM", "Setting"]
