"""The station-file reference: generated from the readers' own descriptions, and true.

``docs/station-file.md`` must be what ``nullsteer reference`` prints today, and each
described range must be the one the reader enforces: a value past a key's documented
maximum, written into the example station file, must be refused naming that key.
"""

from __future__ import annotations

import tomllib
from pathlib import Path

import pytest

from nullsteer.cli.reference import reference_text
from nullsteer.station.schema import Kind, registered
from test_cli_hygiene import EXAMPLE, READER, dump_toml, run_cli

ROOT = Path(__file__).resolve().parents[1]


def test_docs_station_file_is_current():
    text = (ROOT / "docs" / "station-file.md").read_text(encoding="utf-8")
    assert text == reference_text(), "run: nullsteer reference > docs/station-file.md"


def _probes():
    reference_text()  # imports every reader
    for name, sec in sorted(registered().items()):
        if name not in READER:
            continue
        for key in sec.keys:
            if key.kind in (Kind.NUMBER, Kind.INTEGER) and key.maximum is not None:
                yield name, key.name, key.maximum * 2 + 1
            if key.kind is Kind.STRING and key.choices:
                yield name, key.name, "not-a-choice"


@pytest.mark.parametrize("section, key, value", list(_probes()),
                         ids=lambda v: str(v))
def test_documented_range_is_enforced(section, key, value, tmp_path, capsys):
    raw = tomllib.loads(EXAMPLE.read_text())
    for dev in raw.get("device", []):
        dev["board"] = str(EXAMPLE.parent / dev["board"])
    target = raw[section][0] if isinstance(raw[section], list) else raw[section]
    target[key] = int(value) if isinstance(value, float) and value.is_integer() else value
    path = tmp_path / "station.toml"
    path.write_text(dump_toml(raw))
    code, _, err = run_cli(READER[section] + ["--config", str(path)], capsys)
    where = f"{section}[0]" if isinstance(raw[section], list) else section
    assert code == 2 and f"{where}.{key}" in err, err
