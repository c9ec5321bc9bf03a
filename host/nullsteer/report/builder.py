"""One HTML page for a station: pictures, the ladder, its parts and the noise budget.

:func:`write_report` writes ``index.html`` and the figures (SVG) into a folder. The
ladder comes from the station's board config (its ``"ladder"`` block: resistors, base
resistor, settings table); the noise budget from ``[noise]`` and the antenna model.
"""

from __future__ import annotations

import html
import json
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


def write_report(station: Station, out_dir: str | Path, fed_end: str = "A",
                 autonull: dict[str, Any] | None = None,
                 board_config: str | Path | None = None, design: Any = None) -> Path:
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
        The ladder design behind that block; when given, the parts list carries each
        resistor's tolerance and power rating (``nullsteer.ladder.parts_list``).
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
             "<h2>Pictures</h2>"]
    parts += [f'<div class="fig"><img src="{f}" alt="{f}"></div>' for f in figs]
    if autonull:
        null = autonull.get("null_db")
        parts.append("<h2>Auto-null</h2><p>" + html.escape(
            f"{autonull['freq_mhz']:g} MHz, fed end {autonull['fed_end']}: best setting mask "
            f"{autonull['best_mask']} ({autonull['best_ohms']:.0f} Ω), "
            + (f"null {null:+.1f} dB relative to the {autonull['reference']} reading, "
               if null is not None else "")
            + f"{autonull['switchings']} switchings.") + "</p>")
    parts.append("<h2>Ladder</h2>")
    if ladder:
        parts.append(f"<p>Topology {html.escape(str(ladder.get('topology', '?')))}, base "
                     f"{ladder.get('base_ohm', 0):g} Ω, {len(table)} settings.</p>")
        from nullsteer.ladder import PARTS_CAUTION, parts_list

        rows: list[tuple[str, ...]]
        if design is not None:
            rows = [(r.ref, f"{r.value_ohm:g} Ω", r.role, f"{r.series} ±{r.tolerance_pct:g} %",
                     f"{r.power_w:g} W") for r in parts_list(design)]
            head: tuple[str, ...] = ("part", "value", "position", "series", "rating")
        else:
            res = ladder.get("resistors_ohm", [])
            rows = [(f"R{i + 1}", f"{r:g} Ω", f"ladder relay {i}") for i, r in enumerate(res)]
            if ladder.get("base_ohm"):
                rows.append(("R0", f"{ladder['base_ohm']:g} Ω", "fixed base"))
            head = ("part", "value", "position")
        parts.append("<h3>Parts list</h3>" + _table(head, rows)
                     + f"<p>{html.escape(PARTS_CAUTION)}</p>")
        srt = sorted(table, key=lambda t: t[1])
        steps = [""] + [f"{(b[1] / a[1] - 1) * 100:.1f}" for a, b in zip(srt, srt[1:])]
        parts.append("<h3>Settings</h3>" + _table(
            ("mask", "ohms", "step %"), [(m, f"{r:.1f}", s) for (m, r), s in zip(srt, steps)]))
    else:
        parts.append("<p>No ladder table in the board config.</p>")
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
