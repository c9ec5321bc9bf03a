"""One HTML page for a station: geometry, model, pictures, ladder, schedule and noise.

:func:`write_report` writes ``index.html`` and the figures (SVG) into a folder. The
model table is the one ``nullsteer model`` prints (:func:`nullsteer.antenna.summary.
summarise`); the ladder comes from the station's board config (its ``"ladder"`` block),
and its parts and settings tables are the CLI's (``parts_list``, ``settings_rows``: "step"
is always the step to the next setting up); the coming schedule is ``nullsteer
schedule``'s plan; the noise budget comes from ``[noise]`` and the antenna model.

Never does: talk to a board.
"""

from __future__ import annotations

import datetime as dt
import html
import json
import math
from collections.abc import Sequence
from pathlib import Path
from typing import Any

from nullsteer.station.config import Station
from nullsteer.errors import ConfigError

_CSS = ("body{font-family:sans-serif;max-width:60em;margin:2em auto;color:#222}"
        "table{border-collapse:collapse;margin:1em 0}td,th{border:1px solid #bbb;"
        "padding:.2em .6em;text-align:right}th{background:#eee}img{max-width:100%}"
        ".fig{display:inline-block;width:48%;vertical-align:top}")


def board_ladder(station: Station, board_config: str | Path | None = None) -> dict[str, Any]:
    """The ``"ladder"`` block of ``board_config``, else of the first device's board config
    (empty if none)."""
    from nullsteer.board.devices import parse_devices

    paths = [Path(board_config)] if board_config is not None else [
        d.board_config for d in parse_devices(station) if d.board_config is not None]
    for path in paths:
        if path.exists():
            try:
                cfg = json.loads(path.read_text())
            except ValueError as exc:
                raise ConfigError(str(path), f"board config is not JSON: {exc}") from None
            return dict(cfg.get("ladder") or {})
    return {}


def _table(headers: Sequence[str], rows: Sequence[Sequence[Any]]) -> str:
    head = "".join(f"<th>{html.escape(h)}</th>" for h in headers)
    body = "".join("<tr>" + "".join(f"<td>{html.escape(str(c))}</td>" for c in r) + "</tr>"
                   for r in rows)
    return f"<table><tr>{head}</tr>{body}</table>"


def _fmt(v: Any, fmt: str) -> str:
    return "—" if v is None or (isinstance(v, float) and not math.isfinite(v)) else format(v, fmt)


def _geometry_html(station: Station, sol: Any) -> list[str]:
    """The loop and ground as the station file gives them, and the mesh the model used."""
    rows = [(f"antenna.{k}", json.dumps(v)) for k, v in station.section("antenna").items()]
    rows += [(f"ground.{k}", json.dumps(v)) for k, v in station.section("ground").items()]
    rows += [("model segments", str(sol.mesh.n_segments)),
             ("model unknowns", str(sol.mesh.n_unknowns))]
    return ["<h2>Geometry</h2>", _table(("key", "value"), rows)]


def _model_html(station: Station, data: Any, fed_end: str) -> list[str]:
    """The table of ``nullsteer model`` for the band, from the solution already solved."""
    from nullsteer.antenna.station import station_loop
    from nullsteer.antenna.summary import summarise
    from nullsteer.station.bearing import FedEnd

    rep = summarise(data.solution, station_loop(station).antenna, data.elevations_deg,
                    FedEnd(fed_end))
    term = rep["termination"]
    at = {"optimum": "at the optimum termination", "short": "termination shorted",
          "open": "termination open"}.get(term["kind"]) or f"at {term['ohm']:g} Ω"
    rows = [(f"{r['freq_mhz']:.3f}", _fmt(r["r_opt_ohm"], ".0f"), _fmt(r["fb_db"], ".1f"),
             f"{_fmt(r['feed_impedance_ohm'][0], '.0f')} {_fmt(r['feed_impedance_ohm'][1], '+.0f')}j",
             _fmt(r["rdf_db"], ".2f"), _fmt(r["gain_front_dbi"], ".1f"),
             _fmt(r["realized_gain_front_dbi"], ".1f"), _fmt(r["null_bearing_deg"], ".0f"),
             _fmt(r["null_depth_db"], ".1f")) for r in rep["frequencies"]]
    lo, hi = rep["needed_range_ohm"]
    out = ["<h2>Model</h2>", f"<p>Fed end {rep['fed_end']}, null toward "
           f"{rep['null_toward_deg']:.0f}°; figures {html.escape(at)}; gains at "
           f"{rep['pattern_elevation_deg']:g}° elevation toward the front. <i>Gain</i> is the "
           "loop's own (directivity × radiation efficiency); <i>realized gain</i> also counts "
           "the transformer, the coax and the match to the receiver.</p>",
           _table(("MHz", "R_opt Ω", "F/B dB", "Z feed Ω", "RDF dB", "gain dBi",
                   "realized gain dBi", "null °", "null depth dB"), rows),
           f"<p>Needed termination range (both fed ends, all elevations): "
           f"{_fmt(lo, '.0f')}–{_fmt(hi, '.0f')} Ω.</p>"]
    out += [f"<p>Warning: {html.escape(w)}</p>" for w in rep["warnings"]]
    return out


def _ladder_html(station: Station, ladder: dict[str, Any], design: Any) -> list[str]:
    """Parts and settings tables, the same rows as ``nullsteer ladder`` prints."""
    from nullsteer.ladder import PARTS_CAUTION, parse_ladder, parts_list
    from nullsteer.ladder.eseries import get_series
    from nullsteer.ladder.network import format_ohm
    from nullsteer.ladder.outputs import design_from_board_block, settings_rows

    out = ["<h2>Ladder</h2>"]
    if not ladder:
        return out + ["<p>No ladder table in the board config.</p>"]
    spec = parse_ladder(station.section("ladder"))
    if design is None:
        tol = spec.tolerance_pct
        if tol is None:
            tol = get_series(spec.series, "ladder.series").tolerance_pct
        design = design_from_board_block(ladder, spec.parasitics, spec.series, tol)
    out.append(f"<p>Topology {html.escape(design.topology)}, {design.relays} relays, "
               f"{len(design.settings)} settings.</p>")
    rows = [(r.ref, format_ohm(r.value_ohm), f"{r.series} ±{r.tolerance_pct:g} %",
             f"{r.power_w:g} W", r.role) for r in parts_list(design, spec.induced_w)]
    out.append(f"<h3>Parts (power rating for {spec.induced_w:g} W reaching the termination, "
               "derated 2×)</h3>" + _table(("part", "value", "series", "rating", "position"),
                                          rows) + f"<p>{html.escape(PARTS_CAUTION)}</p>")
    srows = [(mask, f"0x{mask:03x}", f"{ohms:.1f}", "" if math.isnan(step) else f"{step:+.2f}")
             for mask, ohms, step in settings_rows(design)]
    out.append("<h3>Settings</h3>" + _table(("mask", "hex", "ohms", "step to next %"), srows))
    return out


def _schedule_html(station: Station, now: dt.datetime | None) -> list[str]:
    """The next two days of scheduled actions (``nullsteer schedule --days 2``)."""
    from nullsteer.schedule.rules import plan

    if not station.array("rule"):
        return []
    start = now or dt.datetime.now(dt.timezone.utc)
    result = plan(station, start, start + dt.timedelta(days=2))
    rows = [(f"{a.when:%a %Y-%m-%d %H:%M %Z}", a.preset,
             a.target.describe(), a.basis, ", ".join(a.device_ids)) for a in result.actions]
    out = ["<h2>Coming schedule</h2>",
           f"<p>Two days from {result.start:%Y-%m-%d %H:%M %Z}; times are the site's.</p>"]
    if rows:
        out.append(_table(("when", "preset", "state", "basis", "devices"), rows))
    else:
        out.append("<p>No actions in these two days.</p>")
    return out


def write_report(station: Station, out_dir: str | Path, fed_end: str = "A",
                 autonull: dict[str, Any] | None = None,
                 board_config: str | Path | None = None, design: Any = None,
                 now: dt.datetime | None = None) -> Path:
    """Write the report; returns the path of ``index.html``.

    Parameters
    ----------
    station : Station
        The station file.
    out_dir : path
        Folder to write (created).
    fed_end : str
        Fed end for the patterns and the noise budget.
    autonull : dict or None
        An auto-null result (``AutonullResult.to_json()``) to include with its path plot.
    board_config : path or None
        Board config whose ladder block is reported (default: the first device's).
    design : LadderDesign or None
        The ladder design behind that block (default: rebuilt from the block, with the
        series and tolerance of ``[ladder]``).
    now : datetime or None
        Start of the two days of coming scheduled actions (default: now).
    """
    from nullsteer.reception.noise import model_noise_budgets, parse_noise
    from nullsteer.report.plots import save_figure, station_figure, station_plot_data

    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    ladder = board_ladder(station, board_config)
    table = [(int(m), float(r)) for m, r in ladder.get("table", [])]
    data = station_plot_data(station, fed_end, table=table)
    kinds = ["azimuth", "elevation", "fb", "range"] + (["path"] if autonull else [])
    figs = []
    for kind in kinds:
        fig = station_figure(kind, data, autonull=autonull)
        figs.append(save_figure(fig, out / f"{kind}.svg").name)
    spec = parse_noise(station.section("noise"))
    budgets = model_noise_budgets(data.solution, spec, fed_end)
    site = station.section("site")
    parts = [f"<h1>nullsteer report: {html.escape(str(site.get('name', station.path.stem)))}</h1>",
             f"<p>Station file {html.escape(str(station.path))}; fed end {fed_end}; "
             f"band {data.freqs_hz[0] / 1e6:g}–{data.freqs_hz[-1] / 1e6:g} MHz, "
             f"elevations {data.elevations_deg[0]:g}–{data.elevations_deg[-1]:g}°.</p>",
             ]
    parts += _geometry_html(station, data.solution)
    parts += _model_html(station, data, fed_end)
    parts.append("<h2>Pictures</h2>")
    parts += [f'<div class="fig"><img src="{f}" alt="{f}"></div>' for f in figs]
    if autonull:
        null = autonull.get("null_db")
        parts.append("<h2>Auto-null</h2><p>" + html.escape(
            f"{autonull['freq_mhz']:g} MHz, fed end {autonull['fed_end']}: best setting mask "
            f"{autonull['best_mask']} ({autonull['best_ohms']:.0f} Ω), "
            + (f"null {null:+.1f} dB relative to the {autonull['reference']} reading, "
               if null is not None else "")
            + f"{autonull['switchings']} switchings.") + "</p>")
    parts += _ladder_html(station, ladder, design)
    parts += _schedule_html(station, now)
    parts.append(f"<h2>Noise (ITU-R P.372 {spec.category.value}, {spec.bandwidth_hz:g} Hz)</h2>")
    parts.append(_table(
        ("MHz", "Fam dB", "loop eta dBi", "external dBm", "system NF dB", "margin dB",
         "SNR loss dB", f"preamp for {spec.margin_db:g} dB"),
        [(f"{b.freq_hz / 1e6:g}", f"{b.fam_db:.1f}", f"{b.avg_gain_db:.1f}",
          f"{b.external_dbm:.1f}", f"{b.system_nf_db:.1f}", f"{b.margin_db:.1f}",
          f"{b.snr_loss_db:.2f}",
          "impossible" if b.preamp_needed_db is None else f"{b.preamp_needed_db:.1f} dB")
         for b in budgets]))
    page = out / "index.html"
    page.write_text("<!DOCTYPE html><html><head><meta charset='utf-8'><title>nullsteer report"
                    f"</title><style>{_CSS}</style></head><body>" + "\n".join(parts)
                    + "</body></html>\n", encoding="utf-8")
    return page


def demo_report(station_path: str | Path, out_dir: str | Path) -> tuple[Path, Any]:
    """Auto-null on the simulator, then the report with its path: for ``nullsteer demo``.

    Returns (path of index.html, the AutonullResult).
    """
    from nullsteer.reception.autonull_run import demo_autonull
    from nullsteer.station.config import load_station

    result = demo_autonull(station_path)
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    (out / "autonull.json").write_text(json.dumps(result.to_json(), indent=2) + "\n")
    page = write_report(load_station(station_path), out, fed_end=result.fed_end,
                        autonull=result.to_json())
    return page, result
