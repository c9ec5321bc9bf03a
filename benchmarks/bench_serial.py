"""Set -> acknowledgement round trip over the simulated serial link.

The real firmware runs under the MicroPython unix port behind a pseudo-terminal pair;
the host controller sends SET frames through pyserial, as it would to a USB board.
Printed: median and spread over N commands for PING, an unchanged SET (no relay moves)
and a changed SET (relays switch with their settle times, state saved), and the
settle time the board config asks for, so the protocol overhead can be read off.
Goal (issue 2): median <= 50 ms plus the relay settle time.
"""

from __future__ import annotations

import json
import statistics
import time

from timing import summary

from nullsteer.board.controller import Controller, FedEnd
from nullsteer.board.links import open_link
from nullsteer.sim import DEFAULT_BOARD_CONFIG, SimBoard

N = 200


def timed(fn, n: int) -> list[float]:
    out = []
    for i in range(n):
        t0 = time.perf_counter()
        fn(i)
        out.append((time.perf_counter() - t0) * 1000.0)
    return out


def main() -> None:
    cfg = json.loads(open(DEFAULT_BOARD_CONFIG).read())
    settle = {r["role"]: r.get("settle_ms", 0) for r in cfg["relays"]}
    # a ladder change with protect_ladder: protect, ladder, reconnect -> 3 settle waits
    settle_ms = settle.get("protect", 0) * 2 + settle.get("ladder", 0)
    with SimBoard(DEFAULT_BOARD_CONFIG) as board:
        ctl = Controller(open_link(board.url), timeout_s=2.0)
        ctl.info()
        ping = timed(lambda i: ctl.request("PING"), N)
        same = timed(lambda i: ctl.request("SET", (("end", "A"), ("mask", 7), ("open", 0))), N)
        changed = timed(lambda i: ctl.request(
            "SET", (("end", "A"), ("mask", 7 if i % 2 else 56), ("open", 0))), N)
        flips = timed(lambda i: ctl.request(
            "SET", (("end", FedEnd.B if i % 2 else FedEnd.A), ("mask", 7), ("open", 0))), N // 2)
        ctl.close()
    print("Round trips over the simulated serial link (MicroPython unix port + pty)")
    print(summary("PING", ping))
    print(summary("SET, nothing to switch", same))
    print(summary("SET, ladder changes", changed))
    print(summary("SET, reversal (flip)", flips))
    print(f"relay settle time in a ladder change per the board config: {settle_ms} ms; "
          f"protocol + save overhead = median {statistics.median(changed) - settle_ms:.2f} ms "
          f"(goal <= 50 ms)")


if __name__ == "__main__":
    main()
