"""SimBoard: the real firmware under the real MicroPython unix port, with fake pins.

``start()`` builds a module folder (the firmware files, ``wire.py`` from the host
package, and the fake ``machine``), writes the board config with the pty path and the
state file filled in, runs ``micropython main.py`` and returns once the board has sent its
boot event. The host talks to :attr:`SimBoard.url` like any serial board.
"""

from __future__ import annotations

import json
import os
import shutil
import signal
import subprocess
import tempfile
import threading
import time
from pathlib import Path
from typing import Any

from nullsteer.protocol import wire
from nullsteer.errors import ConfigError, LinkError
from nullsteer.sim.firmware import (discovery_source, find_micropython, firmware_dir,
                                    check_board_config, parse_board_config, wire_source)
from nullsteer.sim.pinlog import RelayEvent, decode_state, final_levels, read_pin_log, relay_events
from nullsteer.sim.ptyrelay import PtyRelay

DEFAULT_HEAP_BYTES = 128 * 1024
#: MicroPython heap for a board with an "mqtt" block: the firmware compiled from source
#: on the board (no frozen bytecode) plus sockets; boards with Wi-Fi have this much RAM.
MQTT_HEAP_BYTES = 256 * 1024
STATE_FILE = "ns_state.txt"
FAKE_MACHINE = Path(__file__).with_name("fake_machine.py")


def read_board_config(board_config: dict | str | os.PathLike) -> dict:
    """A board config given as a dict, or the path of its JSON file."""
    if isinstance(board_config, dict):
        return json.loads(json.dumps(board_config))  # a deep copy
    path = Path(board_config)
    try:
        return json.loads(path.read_text())
    except OSError as exc:
        raise ConfigError(str(path), f"cannot read board config: {exc.strerror}") from None
    except UnicodeDecodeError:
        raise ConfigError(str(path), "board config is not UTF-8 text") from None
    except ValueError as exc:
        raise ConfigError(str(path), f"board config is not JSON: {exc}") from None
    except RecursionError:
        raise ConfigError(str(path), "board config is nested too deeply to be a board config") from None


class SimBoard:
    """A simulated board.

    Parameters
    ----------
    board_config : dict or path
        Board config (see firmware/BOARD_CONFIG.md); its link and state file are replaced.
    state_dir : path, optional
        Where the state file lives; kept across :meth:`restart` and after :meth:`stop`
        when given (default: inside the simulator's temporary folder).
    heap_bytes : int, optional
        MicroPython heap (``-X heapsize``), default 128 KiB like a small board.
    """

    def __init__(self, board_config: dict | str | os.PathLike, state_dir: str | os.PathLike |
                 None = None, heap_bytes: int | None = None) -> None:
        self.config = read_board_config(board_config)
        self.cfg = check_board_config(self.config)
        self.heap_bytes = int(heap_bytes or (MQTT_HEAP_BYTES if "mqtt" in self.config
                                             else DEFAULT_HEAP_BYTES))
        if self.heap_bytes < 8 * 1024:
            raise ConfigError("heap_bytes", f"{self.heap_bytes} is too small (>= 8192)")
        self._tmp = Path(tempfile.mkdtemp(prefix="nullsteer-sim-"))
        self.state_dir = Path(state_dir) if state_dir is not None else self._tmp / "state"
        self.state_dir.mkdir(parents=True, exist_ok=True)
        self.module_dir = self._tmp / "modules"
        self.pin_log_path = self._tmp / "pins.log"
        self.output_path = self._tmp / "console.txt"
        self._proc: subprocess.Popen[bytes] | None = None
        self._relay: PtyRelay | None = None
        self._boots: list[wire.Frame] = []
        self._boot_cv = threading.Condition()
        self._line = bytearray()

    # --- set-up -----------------------------------------------------------------------
    @property
    def state_path(self) -> Path:
        return self.state_dir / STATE_FILE

    @property
    def url(self) -> str:
        """``serial:///dev/pts/N?baud=115200`` for the host side."""
        if self._relay is None:
            raise LinkError("simulated board not started")
        return f"serial://{self._relay.host_path}?baud=115200"

    def _build_modules(self, board_path: str) -> Path:
        self.module_dir.mkdir(parents=True, exist_ok=True)
        for src in firmware_dir().glob("*.py"):
            shutil.copy(src, self.module_dir / src.name)
        shutil.copy(wire_source(), self.module_dir / "wire.py")
        if "mqtt" in self.config:
            shutil.copy(discovery_source(), self.module_dir / "discovery.py")
        shutil.copy(FAKE_MACHINE, self.module_dir / "machine.py")
        config = dict(self.config)
        config["link"] = {"kind": "serial", "port": "pty", "path": board_path}
        config["state_file"] = str(self.state_path)
        path = self.module_dir / "board.json"
        path.write_text(json.dumps(config))
        return path

    def _on_board_bytes(self, data: bytes) -> None:
        self._line += data
        while b"\n" in self._line:
            i = self._line.index(b"\n")
            line = bytes(self._line[:i + 1])
            del self._line[:i + 1]
            if line.startswith(b"NS1 0 EVT kind=boot "):
                try:
                    frame = wire.decode_reply(line)
                except wire.WireError:
                    continue
                with self._boot_cv:
                    self._boots.append(frame)
                    self._boot_cv.notify_all()

    def start(self, timeout_s: float = 10.0) -> SimBoard:
        """Run the firmware; return once it has booted (LinkError on failure/timeout)."""
        if self._relay is None:
            self._relay = PtyRelay(self._on_board_bytes)
        if self._proc is not None and self._proc.poll() is None:
            raise LinkError("simulated board already running")
        config_path = self._build_modules(self._relay.board_path)
        self._relay.flush_board_input()
        env = dict(os.environ)
        env.update({"MICROPYPATH": f".frozen:{self.module_dir}",
                    "NULLSTEER_BOARD": str(config_path),
                    "NULLSTEER_PINLOG": str(self.pin_log_path)})
        with self._boot_cv:
            seen = len(self._boots)
        out = open(self.output_path, "ab")
        try:
            self._proc = subprocess.Popen(
                [str(find_micropython()), "-X", f"heapsize={self.heap_bytes}",
                 str(self.module_dir / "main.py")],
                cwd=self.module_dir, env=env, stdin=subprocess.DEVNULL, stdout=out,
                stderr=subprocess.STDOUT)
        finally:
            out.close()
        deadline = time.monotonic() + timeout_s
        with self._boot_cv:
            while len(self._boots) == seen:
                if self._proc.poll() is not None:
                    raise LinkError(f"simulated board exited ({self._proc.returncode}): "
                                    + self.console()[-300:].strip())
                left = deadline - time.monotonic()
                if left <= 0:
                    raise LinkError(f"simulated board did not boot within {timeout_s} s")
                self._boot_cv.wait(min(left, 0.05))
        return self

    # --- observation ------------------------------------------------------------------
    def console(self) -> str:
        """What the interpreter printed (tracebacks, config errors)."""
        try:
            return self.output_path.read_text(errors="replace")
        except FileNotFoundError:
            return ""

    def boot_events(self) -> list[wire.Frame]:
        """Every boot event seen so far (fields: fw, boots, restored)."""
        with self._boot_cv:
            return list(self._boots)

    def events(self) -> list[RelayEvent]:
        """Every relay coil change since the first start, in switching order."""
        return relay_events(read_pin_log(self.pin_log_path), self.cfg)

    def levels(self) -> dict[str, bool]:
        """Relay name -> energised (logical, after active-low), as last driven."""
        return final_levels(self.events())

    def state(self) -> tuple[str, int, bool]:
        """(fed_end, mask, open) decoded from the coil levels."""
        return decode_state(self.levels(), self.cfg)

    @property
    def pid(self) -> int | None:
        return self._proc.pid if self._proc is not None else None

    def running(self) -> bool:
        return self._proc is not None and self._proc.poll() is None

    # --- power ------------------------------------------------------------------------
    def kill(self) -> None:
        """SIGKILL the interpreter: a power cut at an arbitrary instant."""
        if self._proc is not None and self._proc.poll() is None:
            self._proc.send_signal(signal.SIGKILL)
            self._proc.wait()

    def restart(self, timeout_s: float = 10.0) -> SimBoard:
        """Power-cycle: kill if running, then boot again with the same state folder."""
        self.kill()
        return self.start(timeout_s)

    def stop(self) -> None:
        """Stop the interpreter, close the ptys and remove the temporary folder."""
        if self._proc is not None and self._proc.poll() is None:
            self._proc.terminate()
            try:
                self._proc.wait(timeout=2.0)
            except subprocess.TimeoutExpired:
                self.kill()
        if self._relay is not None:
            self._relay.close()
            self._relay = None
        shutil.rmtree(self._tmp, ignore_errors=True)

    def __enter__(self) -> SimBoard:
        if self._proc is None:
            self.start()
        return self

    def __exit__(self, *exc: Any) -> None:
        self.stop()
