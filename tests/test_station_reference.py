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
    if registered()[section].form == "entry":   # one named entry of the section
        target = {"ohms": 900.0} if key == "null_bearing_deg" else {"fed_end": "A", "ohms": 900.0}
        raw[section]["probe"] = target
        where = f"{section}.probe"
    else:
        target = raw[section][0] if isinstance(raw[section], list) else raw[section]
        where = f"{section}[0]" if isinstance(raw[section], list) else section
    target[key] = int(value) if isinstance(value, float) and value.is_integer() else value
    path = tmp_path / "station.toml"
    path.write_text(dump_toml(raw))
    code, _, err = run_cli(READER[section] + ["--config", str(path)], capsys)
    assert code == 2 and f"{where}.{key}" in err, err


def test_every_section_of_the_file_is_described():
    # the loader's list of top-level sections and the reference must name the same
    # sections: a section read but not described would be missing from the docs
    from nullsteer.station.config import SECTIONS
    reference_text()
    described = registered()
    missing = [name for name in SECTIONS if name not in described]
    assert not missing, f"sections read but not described: {missing}"


def _example_keys():
    raw = tomllib.loads(EXAMPLE.read_text())
    for section, value in raw.items():
        items = value if isinstance(value, list) else [value]
        for table in items:
            if section == "presets":
                for entry in table.values():
                    yield "presets", set(entry)
                continue
            plain = {k for k, v in table.items()
                     if not (isinstance(v, list) and v and isinstance(v[0], dict))
                     and not (isinstance(v, dict) and k in ("remote", "where"))}
            yield section, plain


def test_every_key_of_the_example_is_described():
    # every key the complete example uses appears in the reference of its section
    reference_text()
    described = registered()
    for section, keys in _example_keys():
        assert keys <= described[section].names, (section, keys - described[section].names)
