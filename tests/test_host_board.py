"""Host controller and board commands, end to end against the firmware.

The firmware answers from the real MicroPython interpreter behind a pseudo-terminal
(``SimBoard``) or, for the fast cases, in-process (``loop://``). What counts as correct
is the protocol the firmware documents (firmware/PROTOCOL.md) and the facts of the trade
named beside the checks.
"""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest

from nullsteer.protocol import wire
from nullsteer.cli import main
from nullsteer.board.controller import Controller, FedEnd
from nullsteer.errors import BoardError, LinkError
from nullsteer.board.links import open_link
from nullsteer.sim import DEFAULT_BOARD_CONFIG, SimBoard

EXAMPLE_STATION = Path(__file__).parents[1] / "examples" / "station.toml"


@pytest.fixture(scope="module")
def board():
    with SimBoard(DEFAULT_BOARD_CONFIG) as b:
        yield b


def run_cli(capsys, *argv: str) -> tuple[int, str, str]:
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def test_status_json_has_the_documented_keys(board, capsys):
    code, out, _ = run_cli(capsys, "status", "--link", board.url, "--json")
    assert code == 0
    data = json.loads(out)
    for key in ("fed_end", "mask", "open", "firmware"):
        assert key in data
    assert data["firmware"] == "0.1.0"


def test_set_flip_and_idempotence_through_the_real_interpreter(board, capsys):
    code, out, _ = run_cli(capsys, "set", "--link", board.url, "--fed-end", "A", "--mask", "5", "--json")
    assert code == 0 and json.loads(out)["mask"] == 5
    assert board.state() == ("A", 5, False)
    # The same absolute command again moves no relay (idempotent commands: DESIGN.md).
    n_events = len(board.events())
    code, out, _ = run_cli(capsys, "set", "--link", board.url, "--fed-end", "A", "--mask", "5", "--json")
    assert json.loads(out)["changed"] is False
    assert len(board.events()) == n_events
    # flip swaps the ends and keeps the termination; twice is the identity.
    run_cli(capsys, "flip", "--link", board.url)
    assert board.state() == ("B", 5, False)
    run_cli(capsys, "flip", "--link", board.url)
    assert board.state() == ("A", 5, False)


def test_set_ohms_picks_nearest_by_ratio(board, capsys):
    code, out, _ = run_cli(capsys, "set", "--link", board.url, "--ohms", "1000", "--json")
    data = json.loads(out)
    table = Controller(open_link(board.url)).table()
    # nearest by ratio: no table entry is closer in |ln(R/R_k)| (geometric spacing of
    # IEC 60063 series: common practice)
    import math
    best = min(abs(math.log(1000 / r)) for _, r in table)
    assert abs(math.log(1000 / data["ohms"])) == pytest.approx(best)
    assert data["error_pct"] == pytest.approx(100 * (data["ohms"] / 1000 - 1), abs=0.01)


@pytest.mark.parametrize("argv, fragment", [
    (["set", "--mask", "999"], "--mask: 999 is outside 0..127"),
    (["set", "--mask", "-1"], "--mask must be >= 0"),
    (["set", "--mask", "x"], "--mask must be a whole number"),
    (["set", "--fed-end", "C"], "--fed-end must be A or B"),
    (["set", "--ohms", "5"], "--ohms: 5 ohm is far outside"),
    (["set", "--ohms", "-3"], "--ohms must be > 0"),
    (["set"], "say what to set"),
    (["set", "--null-bearing", "400"], "0..360"),
    (["set", "--null-bearing", "10", "--mask", "1"], "--null-bearing: needs --config"),
    (["set", "--mask", "1", "--ohms", "900"], "not allowed with argument"),
])
def test_bad_input_exits_2_with_one_line_and_moves_nothing(board, capsys, argv, fragment):
    before = board.events()
    code = None
    try:
        code = main([*argv, "--link", board.url])
    except SystemExit as exc:  # argparse usage errors
        code = exc.code
    _, err = capsys.readouterr()
    assert code == 2
    lines = err.strip().splitlines()
    assert len(lines) == 1 and fragment in lines[0]
    assert board.events() == before


def test_no_board_named_is_a_usage_error(capsys, monkeypatch):
    monkeypatch.delenv("NULLSTEER_LINK", raising=False)
    code, _, err = run_cli(capsys, "status")
    assert code == 2 and "no board given" in err


def test_unreachable_board_exits_3(tmp_path, capsys):
    code, _, err = run_cli(capsys, "status", "--link", f"serial://{tmp_path}/no-such-tty")
    assert code == 3 and "cannot open" in err


class _Lossy:
    """A link that loses the first ``drop`` replies (a noisy or sleeping line)."""

    def __init__(self, inner, drop: int) -> None:
        self.inner, self.drop, self.url = inner, drop, "lossy://"

    def write_line(self, line: bytes) -> None:
        self.inner.write_line(line)
        if self.drop > 0:
            self.drop -= 1
            self.inner.read_line(1.0)  # swallow the reply

    def read_line(self, timeout_s: float):
        return self.inner.read_line(timeout_s)

    def close(self) -> None:
        self.inner.close()


def test_retry_after_a_lost_reply_is_safe():
    ctl = Controller(_Lossy(open_link("loop://"), drop=2), timeout_s=0.05, retries=2)
    status = ctl.set_state(FedEnd.B, 3, False)
    assert status.state.fed_end is FedEnd.B and status.state.mask == 3


def test_no_reply_after_all_attempts_is_a_link_error():
    ctl = Controller(_Lossy(open_link("loop://"), drop=10), timeout_s=0.02, retries=1)
    with pytest.raises(LinkError, match="after 2 attempts"):
        ctl.ping()


def test_board_refusal_is_a_board_error():
    ctl = Controller(open_link("loop://"))
    with pytest.raises(BoardError) as info:
        ctl.request("SET", (("end", "A"),))
    assert info.value.code == wire.E_MISSING


def test_sim_command_prints_link_first(tmp_path):
    proc = subprocess.Popen([sys.executable, "-m", "nullsteer", "sim", "--state-dir", str(tmp_path)],
                            stdout=subprocess.PIPE, stderr=subprocess.DEVNULL, text=True)
    try:
        first = proc.stdout.readline().strip()
        assert first.startswith("link: serial://")
        ctl = Controller(open_link(first.split(" ", 1)[1]), timeout_s=2.0)
        assert ctl.status().firmware == "0.1.0"
        ctl.close()
    finally:
        proc.terminate()
        proc.wait(timeout=10)
    assert proc.returncode == 0


def test_null_bearing_from_station_file(capsys):
    # end_a_bearing_deg = 65 in the example: a null toward 70 deg needs fed end B
    # (terminated small loop nulls toward its terminated end: common practice).
    code, out, _ = run_cli(capsys, "set", "--link", "loop://", "--config", str(EXAMPLE_STATION),
                           "--null-bearing", "70", "--mask", "2", "--json")
    data = json.loads(out)
    assert code == 0 and data["fed_end"] == "B" and data["null_bearing_deg"] == pytest.approx(65.0)


def test_selftest_steps_every_relay_with_the_receiver_protected(board, capsys):
    # Break-before-make practice (DESIGN.md): the protect relay is on before any other
    # relay moves and released only at the end.
    before = len(board.events())
    code, out, _ = run_cli(capsys, "selftest", "--link", board.url, "--dwell-ms", "0", "--json")
    data = json.loads(out)
    assert code == 0 and data["rb"] == "none" and data["readback_failed"] is False
    events = board.events()[before:]
    protect = [i for i, e in enumerate(events) if e.name == "PROT"]
    others = [i for i, e in enumerate(events) if e.name != "PROT"]
    assert events[protect[0]].energised and protect[0] < min(others)
    assert not events[protect[-1]].energised and protect[-1] > max(others)
    # every non-protect relay was stepped on and off again
    names = {e.name for e in events} - {"PROT"}
    assert len(names) == int(data["relays"])


def test_info_warns_on_a_firmware_mismatch(monkeypatch, capsys):
    import nullsteer.board.bundle as bundle
    monkeypatch.setattr(bundle, "firmware_version", lambda firmware=None: "9.0.0")
    code, out, err = run_cli(capsys, "info", "--link", "loop://", "--json")
    assert code == 0 and "warning" in err
    assert json.loads(out)["firmware_warning"]


def test_set_short_on_a_board_with_a_short_relay(tmp_path, capsys):
    # PROTOCOL.md: SET short=1; the CLI's --short, flip keeps it, --mask ends it.
    cfg = json.loads(Path(DEFAULT_BOARD_CONFIG).read_text())
    cfg["relays"].append({"name": "SHORT", "role": "short", "pin": 12, "settle_ms": 5})
    path = tmp_path / "board.json"
    path.write_text(json.dumps(cfg))
    url = f"loop://?board={path}"
    code, out, _ = run_cli(capsys, "set", "--link", url, "--short", "--json")
    assert code == 0 and json.loads(out)["short"] is True and json.loads(out)["open"] is False
    code, out, _ = run_cli(capsys, "set", "--link", url, "--mask", "3", "--json")
    assert json.loads(out)["short"] is False
    with pytest.raises(SystemExit) as exc:                     # exclusive flags: usage error
        run_cli(capsys, "set", "--link", url, "--short", "--open")
    assert exc.value.code == 2


def test_set_short_refused_without_a_short_relay(board, capsys):
    code, _, err = run_cli(capsys, "set", "--link", board.url, "--short")
    assert code == 2 and "--short" in err
