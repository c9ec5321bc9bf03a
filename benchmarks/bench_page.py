"""Control page: press -> board switched -> page updated, and the service's memory.

``nullsteer serve`` runs as its own process on the demo station with a ``sim://`` board
(the real firmware under the MicroPython unix port). Measured, for flips (each one
moves the reversing relay with the receiver protected):

* API: ``POST /api/devices/ID/flip`` returning (the board has switched and answered);
* API + events: until the ``device`` event with the new state reaches a second client
  following ``/api/events`` (what another page sees);
* browser (when Debian's chromium and chromedriver are installed): a click on the page's
  flip button until the page shows the new state (measured in the page with
  ``performance.now()``).

Memory: resident set of the service process (the simulated board's interpreter is a
separate process, shown apart). Goal (issue 13): <= 150 ms plus relay settle.
"""

from __future__ import annotations

import json
import os
import re
import socket
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from timing import summary

REPO = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(REPO / "tests"))
from web_support import Client, EventReader, station_file  # noqa: E402

N_API = 60
N_BROWSER = 30


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def rss_kib(pid: int) -> int:
    for line in Path(f"/proc/{pid}/status").read_text().splitlines():
        if line.startswith("VmRSS:"):
            return int(line.split()[1])
    return 0


def children(pid: int) -> list[int]:
    out = subprocess.run(["ps", "-o", "pid=", "--ppid", str(pid)], capture_output=True,
                         text=True).stdout.split()
    return [int(p) for p in out]


class _Addr:
    def __init__(self, port: int) -> None:
        self.server_address = ("127.0.0.1", port)


def settle_ms() -> int:
    cfg = json.loads((REPO / "examples" / "board-sim.json").read_text())
    settle = {r["role"]: r.get("settle_ms", 0) for r in cfg["relays"]}
    # a flip: protect on, settle, swap ends, settle, protect off (firmware order)
    return settle.get("protect", 0) + settle.get("reverse", 0)


def browser_latencies(url: str, n: int) -> list[float] | None:
    if not (os.access("/usr/bin/chromium", os.X_OK) and os.access("/usr/bin/chromedriver", os.X_OK)):
        return None
    from selenium import webdriver
    from selenium.webdriver.chrome.service import Service
    from selenium.webdriver.common.by import By

    opts = webdriver.ChromeOptions()
    opts.binary_location = "/usr/bin/chromium"
    for arg in ("--headless=new", "--no-sandbox", "--disable-gpu", "--disable-dev-shm-usage"):
        opts.add_argument(arg)
    d = webdriver.Chrome(service=Service("/usr/bin/chromedriver"), options=opts)
    try:
        d.get(url)
        sel = '[data-device="flag-ne"] [data-role="flip"]'
        deadline = time.monotonic() + 20
        while time.monotonic() < deadline:
            if d.execute_script("return document.querySelector('[data-device] [data-role=bearing]')"
                                " && document.querySelector('[data-device] [data-role=bearing]')"
                                ".textContent.endsWith('°')"):
                break
            time.sleep(0.05)
        for i in range(n):
            seen = d.execute_script("return window.nsTiming.latencies.length")
            d.find_element(By.CSS_SELECTOR, sel).click()
            t_end = time.monotonic() + 5
            while d.execute_script("return window.nsTiming.latencies.length") == seen and \
                    time.monotonic() < t_end:
                time.sleep(0.01)
            time.sleep(0.05)
        return [float(x) for x in d.execute_script("return window.nsTiming.latencies")]
    finally:
        d.quit()


def main() -> None:
    tmp = Path(tempfile.mkdtemp(prefix="nullsteer-bench-page-"))
    station = station_file(tmp, link=f"sim://?state={tmp / 'state'}")
    port = free_port()
    proc = subprocess.Popen([sys.executable, "-m", "nullsteer", "serve", "--config",
                             str(station), "--listen", f"127.0.0.1:{port}"],
                            stdout=subprocess.PIPE, stderr=subprocess.DEVNULL, text=True)
    try:
        line = proc.stdout.readline() if proc.stdout else ""
        if not line.startswith("page: "):
            raise SystemExit(f"serve did not start: {line!r}")
        addr = _Addr(port)
        client = Client(addr)  # type: ignore[arg-type]
        client.get("/api/devices/flag-ne/pattern")  # the model solved once
        idle_kib = rss_kib(proc.pid)
        events = EventReader(addr)  # type: ignore[arg-type]
        events.wait(lambda n, d: n == "device")
        api, seen = [], []
        for i in range(N_API):
            start = len(events.events)
            t0 = time.perf_counter()
            status, out = client.post("/api/devices/flag-ne/flip")
            t1 = time.perf_counter()
            want = out["device"]["fed_end"]
            ev = events.wait(lambda n, d: n == "device" and d.get("fed_end") == want,
                             start=start, timeout_s=5)
            t2 = time.perf_counter()
            if status != 200 or ev is None:
                raise SystemExit(f"flip {i} failed: {status} {out}")
            api.append((t1 - t0) * 1000)
            seen.append((t2 - t0) * 1000)
        browser = browser_latencies(f"http://127.0.0.1:{port}/", N_BROWSER)
        busy_kib = rss_kib(proc.pid)
        board_kib = sum(rss_kib(c) for c in children(proc.pid))
        events.close()
        print("Control page against a simulated board (sim://: real firmware, MicroPython)")
        print(f"relay settle in a flip (board config): {settle_ms()} ms")
        print(summary("press -> board switched", api))
        print(summary("press -> other page's event", seen))
        if browser:
            print(summary("click -> page shows it", browser))
        else:
            print("click -> page shows it     (chromium/chromedriver not installed: skipped)")
        print(f"service memory (VmRSS): {idle_kib / 1024:.1f} MiB after start, "
              f"{busy_kib / 1024:.1f} MiB after the runs; simulated board process "
              f"{board_kib / 1024:.1f} MiB")
    finally:
        proc.terminate()
        try:
            proc.wait(10)
        except subprocess.TimeoutExpired:
            proc.kill()


if __name__ == "__main__":
    main()
