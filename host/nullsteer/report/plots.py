"""Pictures: patterns, F/B versus termination, needed range, the auto-null path.

matplotlib is the optional ``plot`` extra (``pip install 'nullsteer[plot]'``); it is
imported only when a figure is drawn, with the non-interactive Agg backend. Polar plots
use compass bearings: north up, bearings clockwise.

Each ``*_figure`` function takes plain arrays (so it can be tested and reused without the
antenna model) and returns a matplotlib Figure; :func:`station_plot_data` computes those
arrays from a station file, and :func:`save_figure` writes PNG or SVG.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from nullsteer.errors import ConfigError

KINDS = ("azimuth", "elevation", "fb", "range", "path")
_COLOURS = {"A": "tab:blue", "B": "tab:orange", "open": "tab:gray"}


def _mpl() -> Any:
    try:
        import matplotlib
    except ImportError:
        raise ConfigError("plot", "matplotlib is not installed: install the plot extra "
                                  "(pip install 'nullsteer[plot]')") from None
    matplotlib.use("Agg", force=True)
    import matplotlib.pyplot as plt

    return plt


def save_figure(fig: Any, path: str | Path) -> Path:
    """Write ``fig`` as PNG or SVG (by the file's suffix) and close it."""
    p = Path(path)
    if p.suffix.lower() not in (".png", ".svg"):
        raise ConfigError("-o", f"the file must end in .png or .svg, got {p.name!r}")
    p.parent.mkdir(parents=True, exist_ok=True)
    fig.savefig(p, dpi=110, bbox_inches="tight")
    _mpl().close(fig)
    return p


def _plain_log_axis(axis: Any) -> None:
    """Plain-number tick labels on a log axis (1000, 1500, ... rather than 10^3 forms)."""
    from matplotlib.ticker import FuncFormatter, LogLocator, NullFormatter

    lo, hi = axis.get_view_interval()
    fmt = FuncFormatter(lambda v, _: f"{v:g}")
    axis.set_major_formatter(fmt)
    if hi / max(lo, 1e-12) < 12:
        axis.set_minor_locator(LogLocator(subs=(1.0, 1.5, 2.0, 3.0, 5.0, 7.0)))
        axis.set_minor_formatter(fmt)
    else:
        axis.set_minor_formatter(NullFormatter())


def _floor_db(g_db: np.ndarray, peak_db: float, span_db: float) -> np.ndarray:
    return np.maximum(g_db, peak_db - span_db)


def azimuth_figure(az_deg: np.ndarray, gains_dbi: dict[str, np.ndarray], elevation_deg: float,
                   freq_hz: float, null_bearing_deg: float | None = None,
                   span_db: float = 60.0, title: str = "") -> Any:
    """Azimuth pattern at one elevation; curves keyed "A", "B" (fed end) and "open".

    Gains in dBi, the loop's own (directivity times radiation efficiency), not the
    realized gain at the receiver; the radial axis shows ``span_db`` below the overall peak (the open loop
    burns nothing in a termination, so it is usually some 20-30 dB above the terminated
    patterns; all curves share one scale).
    """
    plt = _mpl()
    fig = plt.figure(figsize=(6.4, 6.4))
    ax = fig.add_subplot(projection="polar")
    ax.set_theta_zero_location("N")
    ax.set_theta_direction(-1)
    peak = math.ceil((max(float(np.max(g)) for g in gains_dbi.values()) + 1.0) / 5.0) * 5.0
    lo = peak - span_db
    th = np.radians(np.append(az_deg, az_deg[0]))
    labels = {"A": "fed end A", "B": "fed end B", "open": "open (no termination)"}
    for key, g in gains_dbi.items():
        r = np.minimum(_floor_db(np.append(g, g[0]), peak, span_db), peak) - lo
        ax.plot(th, r, color=_COLOURS.get(key), lw=2 if key != "open" else 1.4,
                ls="-" if key != "open" else "--", label=labels.get(key, key))
    if null_bearing_deg is not None:
        ax.plot([math.radians(null_bearing_deg)] * 2, [0, span_db], color="tab:red", lw=1.2,
                ls=":", label=f"null bearing {null_bearing_deg:.0f}°")
    ticks = np.arange(0, span_db + 1e-9, 10.0)
    ax.set_rticks(ticks)
    ax.set_yticklabels([f"{lo + t:.0f} dBi" for t in ticks], fontsize=7)
    ax.set_rlabel_position(112.5)
    ax.set_rlim(0, span_db)
    ax.set_thetagrids(range(0, 360, 30), [f"{b}°" + {0: " N", 90: " E", 180: " S", 270: " W"}.get(b, "")
                                          for b in range(0, 360, 30)])
    ax.set_title(title or f"Azimuth pattern at {elevation_deg:g}° elevation, "
                          f"{freq_hz / 1e6:g} MHz (loop gain, dBi; not realized)", pad=18)
    ax.legend(loc="lower left", bbox_to_anchor=(-0.12, -0.12), fontsize=8)
    return fig


def elevation_figure(el_deg: np.ndarray, front_dbi: np.ndarray, back_dbi: np.ndarray,
                     freq_hz: float, termination_ohm: float, front_bearing_deg: float,
                     back_bearing_deg: float, span_db: float = 40.0) -> Any:
    """Elevation pattern along the loop's axis (toward the fed end and the terminated end)."""
    plt = _mpl()
    fig = plt.figure(figsize=(6.4, 4.4))
    ax = fig.add_subplot()
    peak = float(max(np.max(front_dbi), np.max(back_dbi)))
    ax.plot(el_deg, front_dbi, color="tab:blue", lw=2,
            label=f"toward the fed end ({front_bearing_deg:.0f}°)")
    ax.plot(el_deg, back_dbi, color="tab:red", lw=2,
            label=f"toward the terminated end ({back_bearing_deg:.0f}°)")
    ax.set_ylim(peak - span_db, peak + 3)
    ax.set_xlim(0, 90)
    ax.set_xlabel("elevation angle (degrees above the horizon)")
    ax.set_ylabel("loop gain (dBi; not realized gain)")
    ax.set_title(f"Elevation pattern along the axis, {freq_hz / 1e6:g} MHz, "
                 f"termination {termination_ohm:.0f} Ω")
    ax.grid(True, alpha=0.4)
    ax.legend(fontsize=8)
    return fig


def fb_figure(r_ohm: np.ndarray, fb_db: dict[str, np.ndarray], freq_hz: float,
              settings_ohm: Sequence[float] = (), optimum_ohm: float | None = None) -> Any:
    """F/B versus termination (log axis), one curve per elevation; ladder settings as ticks."""
    plt = _mpl()
    fig = plt.figure(figsize=(7.0, 4.4))
    ax = fig.add_subplot()
    for label, fb in fb_db.items():
        ax.semilogx(r_ohm, fb, lw=2, label=label)
    top = max(float(np.max(v)) for v in fb_db.values())
    if len(settings_ohm):
        s = np.asarray(settings_ohm, float)
        ax.plot(s, np.full(s.shape, -2.0), "|", color="k", ms=9, alpha=0.7,
                label=f"ladder settings ({len(s)})")
    if optimum_ohm is not None and math.isfinite(optimum_ohm):
        ax.axvline(optimum_ohm, color="tab:red", ls=":", label=f"model optimum {optimum_ohm:.0f} Ω")
    ax.set_ylim(-4, top + 5)
    _plain_log_axis(ax.xaxis)
    ax.set_xlabel("termination resistance (Ω)")
    ax.set_ylabel("front-to-back ratio (dB)")
    ax.set_title(f"F/B versus termination, {freq_hz / 1e6:g} MHz")
    ax.grid(True, which="both", alpha=0.35)
    ax.legend(fontsize=8)
    return fig


def range_figure(freqs_hz: np.ndarray, r_opt_ohm: dict[str, np.ndarray],
                 settings_ohm: Sequence[float] = ()) -> Any:
    """Optimum termination over the band for each elevation, and the ladder's span."""
    plt = _mpl()
    fig = plt.figure(figsize=(7.0, 4.4))
    ax = fig.add_subplot()
    f_mhz = np.asarray(freqs_hz) / 1e6
    allr = np.concatenate([np.asarray(v, float) for v in r_opt_ohm.values()])
    allr = allr[np.isfinite(allr)]
    for label, r in r_opt_ohm.items():
        ax.semilogy(f_mhz, r, "o-", lw=1.6, ms=4, label=label)
    if allr.size:
        ax.axhspan(allr.min(), allr.max(), color="tab:green", alpha=0.12,
                   label=f"needed {allr.min():.0f}–{allr.max():.0f} Ω")
    if len(settings_ohm):
        s = np.asarray(settings_ohm, float)
        ax.axhline(s.min(), color="k", ls="--", lw=1, label=f"ladder {s.min():.0f}–{s.max():.0f} Ω")
        ax.axhline(s.max(), color="k", ls="--", lw=1)
    _plain_log_axis(ax.yaxis)
    ax.set_xlabel("frequency (MHz)")
    ax.set_ylabel("termination for best F/B (Ω)")
    ax.set_title("Needed termination range over the band")
    ax.grid(True, which="both", alpha=0.35)
    ax.legend(fontsize=8)
    return fig


def path_figure(path: Sequence[dict[str, Any]], freq_hz: float,
                sweep: dict[float, float] | None = None, reference_db: float | None = None) -> Any:
    """Auto-null path: each visited setting's level versus ohms, numbered in order."""
    plt = _mpl()
    fig = plt.figure(figsize=(7.0, 4.4))
    ax = fig.add_subplot()
    if sweep:
        xs = sorted(sweep)
        ax.semilogx(xs, [sweep[x] for x in xs], color="0.7", lw=1.2,
                    label="every setting (exhaustive sweep)")
    r = [p["ohms"] for p in path]
    lv = [p["level_db"] for p in path]
    ax.semilogx(r, lv, "-", color="tab:blue", lw=0.8, alpha=0.6)
    ax.scatter(r, lv, c=range(len(r)), cmap="viridis", zorder=3, label="visited, in order")
    for p in path:
        ax.annotate(str(p["order"]), (p["ohms"], p["level_db"]), textcoords="offset points",
                    xytext=(4, 4), fontsize=8)
    if path:
        best = min(path, key=lambda p: p["level_db"])
        ax.plot(best["ohms"], best["level_db"], "*", color="tab:red", ms=14, zorder=4,
                label=f"best {best['ohms']:.0f} Ω")
    if reference_db is not None:
        ax.axhline(reference_db, color="tab:orange", ls="--", label="reference reading")
    _plain_log_axis(ax.xaxis)
    ax.set_xlabel("termination (Ω)")
    ax.set_ylabel("received level (dB)")
    ax.set_title(f"Auto-null path at {freq_hz / 1e6:g} MHz ({len(path)} settings visited)")
    ax.grid(True, which="both", alpha=0.35)
    ax.legend(fontsize=8)
    return fig


# -- from a station file ------------------------------------------------------------
@dataclass
class PlotData:
    """What the station figures need, computed once from the antenna model."""

    solution: Any
    freqs_hz: np.ndarray
    elevations_deg: tuple[float, ...]
    fed_end: str
    end_a_bearing_deg: float
    settings_ohm: list[float] = field(default_factory=list)

    def freq_index(self, freq_hz: float | None) -> int:
        if freq_hz is None:
            return len(self.freqs_hz) // 2
        return int(np.argmin(np.abs(self.freqs_hz - freq_hz)))

    def optimum(self, fi: int) -> float:
        from nullsteer.reception.autonull_run import predicted_optimum_ohm

        return predicted_optimum_ohm(self.solution, self.fed_end, self.elevations_deg, fi)


def station_plot_data(station: Any, fed_end: str = "A", freqs_hz: Sequence[float] | None = None,
                      table: Sequence[tuple[int, float]] | None = None) -> PlotData:
    """Solve the station's model for plotting (band frequencies unless ``freqs_hz``)."""
    from nullsteer.antenna.specs import freqs_array, parse_band
    from nullsteer.reception.autonull_run import solve_station_model, station_elevations_deg

    f = np.asarray(freqs_hz if freqs_hz is not None else freqs_array(parse_band(station.section("band"))))
    sol = solve_station_model(station, [float(x) for x in f])
    end_a = float(station.section("antenna").get("end_a_bearing_deg", 0.0))
    return PlotData(sol, f, station_elevations_deg(station), fed_end, end_a,
                    sorted(float(r) for _, r in (table or [])))


def station_figure(kind: str, data: PlotData, freq_hz: float | None = None,
                   elevation_deg: float | None = None, termination_ohm: float | None = None,
                   autonull: dict[str, Any] | None = None) -> Any:
    """One of :data:`KINDS` for the station (``autonull``: a result's ``to_json()``)."""
    from nullsteer.station.bearing import null_bearing_deg

    fi = data.freq_index(freq_hz)
    f = float(data.freqs_hz[fi])
    el = elevation_deg if elevation_deg is not None else float(np.mean(data.elevations_deg[:1] +
                                                                        data.elevations_deg[-1:]))
    r = termination_ohm if termination_ohm is not None else data.optimum(fi)
    sol = data.solution
    if kind == "azimuth":
        az = np.arange(0.0, 360.0, 1.0)
        g = {fe: sol.gain_dbi(r, fe, az, el, freq_index=fi)[0] for fe in ("A", "B")}
        g["open"] = sol.gain_dbi(np.inf, "A", az, el, freq_index=fi)[0]
        return azimuth_figure(az, g, el, f, null_bearing_deg(data.fed_end, data.end_a_bearing_deg),
                              title=f"Azimuth pattern at {el:g}° elevation, {f / 1e6:g} MHz, "
                                    f"{r:.0f} Ω\n(loop gain, dBi: directivity × efficiency; not realized gain)")
    if kind == "elevation":
        els = np.arange(1.0, 90.5, 1.0)
        front, back = sol.axis_bearings_deg(data.fed_end)
        gf = sol.gain_dbi(r, data.fed_end, front, els, freq_index=fi)[0]
        gb = sol.gain_dbi(r, data.fed_end, back, els, freq_index=fi)[0]
        return elevation_figure(els, gf, gb, f, r, front, back)
    if kind == "fb":
        rr = np.geomspace(100.0, 10000.0, 300)
        span = sorted({data.elevations_deg[0], data.elevations_deg[-1], el})
        fb = {f"{e:g}° elevation": sol.fb_db(rr[None, :], data.fed_end, e, freq_index=fi)[0]
              for e in span}
        return fb_figure(rr, fb, f, data.settings_ohm, data.optimum(fi))
    if kind == "range":
        span = sorted({data.elevations_deg[0], data.elevations_deg[-1]})
        ropt = {f"{e:g}° elevation": np.ravel(sol.optimum_termination_ohm(data.fed_end, [e]))
                for e in span}
        return range_figure(data.freqs_hz, ropt, data.settings_ohm)
    if kind == "path":
        if not autonull:
            raise ConfigError("plot", "the path plot needs an auto-null result (--autonull FILE)")
        return path_figure(autonull["path"], autonull["freq_mhz"] * 1e6,
                           reference_db=autonull.get("reference_level_db"))
    raise ConfigError("KIND", f"must be one of {', '.join(KINDS)}; got {kind!r}")
