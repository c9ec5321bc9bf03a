"""Sun events and schedule planning: time per day computed, side by side.

Compares the vectorised one-pass path (``sun_events_for_dates``), a per-date loop of
``sun_events``, and astral (test-only reference; skipped if not installed), for a year
of all four events at the demo site; then planning a year of the demo station's rules.
Prints figures and ratios only; nothing is asserted.

Run: ``.venv/bin/python benchmarks/bench_sun.py``
"""

from __future__ import annotations

import datetime as dt
import time
import zoneinfo
from pathlib import Path

from nullsteer.station.config import load_station
from nullsteer.schedule.rules import parse_schedule, plan
from nullsteer.schedule.sun import sun_events, sun_events_for_dates

LAT, LON, ZONE = 53.412, -7.930, zoneinfo.ZoneInfo("Europe/Dublin")
DAYS = [dt.date(2026, 1, 1) + dt.timedelta(days=k) for k in range(365)]
EXAMPLE = Path(__file__).resolve().parents[1] / "examples" / "station.toml"


def best_of(fn, repeats: int = 3) -> float:
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return min(times)


def main() -> None:
    rows = []
    t_vec = best_of(lambda: sun_events_for_dates(LAT, LON, DAYS, ZONE))
    rows.append(("nullsteer, one pass (vectorised)", t_vec))
    t_loop = best_of(lambda: [sun_events(LAT, LON, d, ZONE) for d in DAYS])
    rows.append(("nullsteer, one call per date", t_loop))
    try:
        from astral import Observer
        from astral.sun import sun as astral_sun
        obs = Observer(LAT, LON)
        t_ast = best_of(lambda: [astral_sun(obs, d, tzinfo=ZONE) for d in DAYS])
        rows.append(("astral sun() per date (reference)", t_ast))
    except ImportError:
        pass
    print(f"{len(DAYS)} days x 4 events at {LAT} N {abs(LON)} W ({ZONE.key})")
    for name, t in rows:
        print(f"  {name:<36} {t * 1e3:8.1f} ms  {t / len(DAYS) * 1e6:8.1f} us/day  "
              f"x{t / t_vec:6.2f} vs one pass")

    sched = parse_schedule(load_station(EXAMPLE))
    start = dt.datetime(2026, 1, 1, tzinfo=ZONE)
    end = dt.datetime(2027, 1, 1, tzinfo=ZONE)
    t_plan = best_of(lambda: plan(sched, start, end))
    n = len(plan(sched, start, end).actions)
    t_week = best_of(lambda: plan(sched, start, start + dt.timedelta(days=7)), repeats=5)
    print(f"plan, demo station ({len(sched.rules)} rules): one year {t_plan * 1e3:.1f} ms "
          f"({n} actions, {t_plan / n * 1e6:.1f} us/action); one week {t_week * 1e3:.2f} ms")


if __name__ == "__main__":
    main()
