"""Bad input from a careless user: one line, exit 2, never a traceback, never NaN.

Two parts: a table of inputs that once ended in a Python traceback or a silent ignore
(each row says what it checks), and a seeded fuzz that mutates one value of the example
station file at a time and runs the command that reads it. The contract is the
project's (README "Bad input gives one line naming the offending key or value and exit
code 2"); JSON validity is RFC 8259 §6 ("Numeric values that cannot be represented ...
such as Infinity and NaN are not permitted").
"""

from __future__ import annotations

import argparse
import json
import math
import random
import tomllib
from pathlib import Path

import pytest

from nullsteer.cli import build_parser, main

ROOT = Path(__file__).resolve().parents[1]
EXAMPLE = ROOT / "examples" / "station.toml"


def run_cli(argv: list[str], capsys) -> tuple[int, str, str]:
    """Run the command in-process; any exception but SystemExit fails the test."""
    try:
        code = main(argv)
    except SystemExit as exc:  # argparse's usage errors
        code = exc.code if isinstance(exc.code, int) else 2
    out, err = capsys.readouterr()
    return code, out, err


def assert_clean(code: int, out: str, err: str, json_out: bool) -> None:
    assert "Traceback" not in err and "Traceback" not in out
    for word in ("NaN", "Infinity", " nan", " inf "):
        assert word not in out, f"{word!r} in output"
    if code == 2:
        lines = [ln for ln in err.splitlines() if ln.strip() and not ln.startswith("nullsteer: warning")]
        assert len(lines) == 1 and lines[0].startswith(("nullsteer: error:", "usage:")) or \
            lines[-1].startswith("nullsteer: error:"), err
    if json_out and code == 0:
        def refuse(name: str):
            raise AssertionError(f"{name} in --json output")
        json.loads(out, parse_constant=refuse)


def _toml_value(v) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, float):
        if math.isnan(v):
            return "nan"
        if math.isinf(v):
            return "inf" if v > 0 else "-inf"
        return repr(v)
    if isinstance(v, int):
        return str(v)
    if isinstance(v, str):
        return json.dumps(v)
    if isinstance(v, list):
        return "[" + ", ".join(_toml_value(x) for x in v) + "]"
    if isinstance(v, dict):
        return "{ " + ", ".join(f"{json.dumps(k)} = {_toml_value(x)}" for k, x in v.items()) + " }"
    raise TypeError(type(v))


def dump_toml(raw: dict) -> str:
    """A small TOML writer for the station file's shapes (tables, arrays of tables)."""
    lines: list[str] = []

    def table(prefix: str, body: dict, array: bool) -> None:
        subs = {k: v for k, v in body.items()
                if isinstance(v, list) and v and all(isinstance(x, dict) for x in v)}
        lines.append(f"[[{prefix}]]" if array else f"[{prefix}]")
        for k, v in body.items():
            if k not in subs:
                lines.append(f"{json.dumps(k)} = {_toml_value(v)}")
        for k, items in subs.items():
            for item in items:
                table(f"{prefix}.{k}", item, True)

    for name, value in raw.items():
        if isinstance(value, list):
            for item in value:
                table(name, item, True)
        else:
            table(name, value, False)
    return "\n".join(lines) + "\n"


# Each row: argv with {station} for a written station file, and what it checks.
TRACEBACK_CASES = [
    (["model", "--config", "{bad_utf8}"], "non-UTF-8 station file"),
    (["sun", "--lat", "53.41", "--lon", "-7.93", "--date", "9999-12-31", "--tz", "UTC"], "year 9999"),
    (["schedule", "--config", "{example}", "--from", "9999-12-30T00:00"], "year 9999 in schedule"),
    (["autonull", "--config", "{example}", "--freq", "1.83", "--null-bearing", "245",
      "--source", "sim", "--dwell", "nan"], "--dwell nan"),
    (["autonull", "--config", "{example}", "--freq", "1.83", "--null-bearing", "245",
      "--source", "sim", "--interval", "inf"], "--interval inf"),
    (["autonull", "--link", "loop://", "--freq", "1.83", "--fed-end", "A", "--start-ohms", "900",
      "--source", "command", "--command", "'unclosed"], "unclosed quote in --command"),
    (["status", "--link", "mqtt://u:pw@127.0.0.1:1/d?connect_timeout=-1"], "connect_timeout=-1"),
    (["status", "--link", "mqtt://u:pw@127.0.0.1:1/d?connect_timeout=inf"], "connect_timeout=inf"),
    (["firmware", "deploy", "--port", "/dev/null", "--bundle", "{tmp}", "--dry-run",
      "--timeout", "nan"], "deploy --timeout nan"),
    (["firmware", "bundle", "--config", "{example}", "-o", "/proc/nullsteer-x"], "bundle -o /proc/x"),
    (["report", "--config", "{example}", "-o", "/proc/nullsteer-x"], "report -o /proc/x"),
    (["report", "--config", "{example}", "-o", "{file}"], "report -o EXISTING_FILE"),
    (["plot", "azimuth", "--config", "{example}", "-o", "/dev/null/x.png"], "plot -o /dev/null/x.png"),
    (["status", "--config", "{deep_board}"], "deeply nested board JSON"),
    (["model", "--config", "{grund}"], "misspelled section [grund]"),
    (["schedule", "--config", "{rules}"], "misspelled section [[rules]]"),
    (["ladder", "--config", "{ladders}"], "misspelled section [ladders]"),
]


@pytest.fixture()
def inputs(tmp_path: Path) -> dict[str, str]:
    bad = tmp_path / "bad.toml"
    bad.write_bytes(b"\xff\xfe[site]\n")
    deep = tmp_path / "deep.json"
    deep.write_text("[" * 100000 + "]" * 100000)
    example = EXAMPLE.read_text()
    with_deep = tmp_path / "deep-board.toml"
    with_deep.write_text(example.replace('board = "board-sim.json"', f'board = "{deep}"'))
    a_file = tmp_path / "a-file"
    a_file.write_text("x")
    names = {"grund": "[grund]\nkind = \"real\"\n", "rules": "[[rules]]\nat = \"sunset\"\n",
             "ladders": "[ladders]\nrelays = 4\n"}
    out = {"bad_utf8": str(bad), "example": str(EXAMPLE), "tmp": str(tmp_path),
           "file": str(a_file), "deep_board": str(with_deep)}
    for key, extra in names.items():
        p = tmp_path / f"{key}.toml"
        p.write_text(example.replace('board = "board-sim.json"',
                                     f'board = "{EXAMPLE.parent / "board-sim.json"}"') + extra)
        out[key] = str(p)
    return out


@pytest.mark.parametrize("argv, what", TRACEBACK_CASES, ids=[w for _, w in TRACEBACK_CASES])
def test_bad_input_is_one_line_and_exit_2(argv, what, inputs, capsys):
    code, out, err = run_cli([a.format(**inputs) for a in argv], capsys)
    assert code == 2, f"{what}: exit {code}\n{err}"
    assert_clean(code, out, err, json_out=False)


def test_a_misspelled_section_names_the_right_one(inputs, capsys):
    code, _, err = run_cli(["model", "--config", inputs["grund"]], capsys)
    assert code == 2 and "grund" in err and "did you mean 'ground'" in err


def test_every_option_has_help_and_no_markup():
    def walk(parser: argparse.ArgumentParser, path: str):
        assert "`" not in (parser.description or ""), path
        for action in parser._actions:
            if isinstance(action, argparse._SubParsersAction):
                for name, sub in action.choices.items():
                    yield from walk(sub, f"{path} {name}")
            elif action.option_strings:
                assert action.help, f"{path} {action.option_strings[0]} has no help text"
                assert "`" not in action.help, f"{path} {action.option_strings[0]}"
                yield action

    assert sum(1 for _ in walk(build_parser(), "nullsteer")) > 50


# --- the fuzz -------------------------------------------------------------------------------

#: The command that reads each section (station keys only; nothing talks to a board).
READER = {"site": ["schedule", "--days", "2", "--json"], "antenna": ["model", "--json"],
          "ground": ["model", "--json"], "band": ["model", "--json"], "feed": ["model", "--json"],
          "noise": ["noise", "--json"], "presets": ["schedule", "--days", "2", "--json"],
          "rule": ["schedule", "--days", "2", "--json"],
          "ladder": ["ladder", "--json", "--relays", "4"]}
ODD_VALUES = [float("nan"), float("inf"), -float("inf"), 1e300, -1.0, 0, 1e-320, "", "x",
              True, [], 10**30, -7]


def _leaves(raw: dict, section: str):
    value = raw[section]
    items = value if isinstance(value, list) else [value]
    for i, table in enumerate(items):
        for key, v in table.items():
            if not isinstance(v, (list, dict)) or (isinstance(v, list) and v and not isinstance(v[0], dict)):
                yield i, key


def _fuzz_cases(n: int, seed: int = 20261201):
    raw = tomllib.loads(EXAMPLE.read_text())
    rng = random.Random(seed)
    leaves = [(s, i, k) for s in READER for i, k in _leaves(raw, s)]
    return [(rng.choice(leaves), rng.choice(ODD_VALUES)) for _ in range(n)]


@pytest.mark.parametrize("case", _fuzz_cases(70), ids=lambda c: f"{c[0][0]}.{c[0][2]}={c[1]!r}")
def test_fuzzed_station_file_never_crashes(case, tmp_path, capsys):
    (section, index, key), value = case
    raw = tomllib.loads(EXAMPLE.read_text())
    for dev in raw.get("device", []):
        dev["board"] = str(EXAMPLE.parent / dev["board"])
    target = raw[section][index] if isinstance(raw[section], list) else raw[section]
    target[key] = value
    path = tmp_path / "station.toml"
    path.write_text(dump_toml(raw))
    code, out, err = run_cli(READER[section] + ["--config", str(path)], capsys)
    assert code in (0, 2), f"exit {code}: {err}"
    assert_clean(code, out, err, json_out=True)


def _board_variant(tmp_path: Path, name: str, change) -> str:
    config = json.loads((ROOT / "examples" / "board-sim.json").read_text())
    change(config)
    path = tmp_path / f"{name}.json"
    path.write_text(json.dumps(config))
    return str(path)


# Each row: a change to the demo board config, and the key the one-line error must name.
BOARD_CASES = [
    ("pin-negative", lambda c: c["relays"][0].update(pin=-1), "relays[0].pin"),
    ("pin-huge", lambda c: c["relays"][0].update(pin=10**30), "relays[0].pin"),
    ("mqtt-host", lambda c: c.update(mqtt={"host": 5, "id": "flag-ne"}), "mqtt.host"),
    ("end-label", lambda c: c.update(mqtt={"host": "127.0.0.1", "id": "flag-ne",
                                            "end_labels": {"A": 7}}), "mqtt.end_labels.A"),
]


@pytest.mark.parametrize("name, change, key", BOARD_CASES, ids=[c[0] for c in BOARD_CASES])
def test_bad_board_config_is_exit_2_naming_the_key(name, change, key, tmp_path, capsys):
    board = _board_variant(tmp_path, name, change)
    code, out, err = run_cli(["status", "--link", f"sim://?board={board}"], capsys)
    assert code == 2, err
    assert f"board.{key}:" in err, err
    assert_clean(code, out, err, json_out=False)


def test_set_outside_the_table_warns(capsys):
    # the demo board's lowest setting is about 1001 ohm (examples/board-sim.json)
    code, out, err = run_cli(["set", "--link", "loop://", "--ohms", "800", "--json"], capsys)
    assert code == 0 and "below the ladder's lowest setting" in err
    assert json.loads(out)["warnings"]
