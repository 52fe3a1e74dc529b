"""Benchmark: one site-year of nights with observatory_ops.calc.nights beside the same year with PyEphem.

Run from the repository root: ``python benchmarks/bench_nights.py``. Target: a site-year in 0.5 s or less.
The first call is timed separately and left out of the figure (astropy loads its Earth-orientation
tables and builds its transformation graph once per process); the figure is the median of the
following runs. The site is invented.
"""

from __future__ import annotations

import datetime as dt
import os
import statistics
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from observatory_ops.calc.nights import Site, nights_for_range  # noqa: E402
from tests.test_calc_nights import event_difference_s, pyephem_night  # noqa: E402

SITE = Site(latitude_deg=-27.35, longitude_deg=-69.9, elevation_m=2100.0, time_zone="America/Santiago")
START = dt.date(2025, 1, 1)
NIGHTS = 365
RUNS = 7
TARGET_S = 0.5


def seconds(work) -> tuple[float, object]:
    began = time.perf_counter()
    result = work()
    return time.perf_counter() - began, result


def main() -> None:
    print(f"site {SITE}, {NIGHTS} nights from {START}, load average {os.getloadavg()[0]:.2f} on {os.cpu_count()} cores")
    cold_s, _ = seconds(lambda: nights_for_range(SITE, START, 2))
    print(f"first call (astropy warm-up, excluded): {cold_s:.3f} s")

    timings = []
    for _ in range(RUNS):
        elapsed, table = seconds(lambda: nights_for_range(SITE, START, NIGHTS))
        timings.append(elapsed)
    median_s = statistics.median(timings)
    verdict = "met" if median_s <= TARGET_S else "NOT met"
    print(f"nights.py site-year: median {median_s:.3f} s, best {min(timings):.3f} s over {RUNS} runs")
    print(f"target {TARGET_S} s: {verdict}")

    nights = [START + dt.timedelta(days=i) for i in range(NIGHTS)]
    pyephem_s, reference = seconds(lambda: [pyephem_night(SITE, night) for night in nights])
    print(f"PyEphem site-year (4 events per night): {pyephem_s:.3f} s")

    columns = {"sunset": table.sunset_utc, "sunrise": table.sunrise_utc, "dusk": table.dusk_utc, "dawn": table.dawn_utc}
    for event, times in columns.items():
        worst_s = max(event_difference_s(times[i], reference[i][event]) for i in range(NIGHTS))
        print(f"largest |nights.py - PyEphem| for {event}: {worst_s:.1f} s (event times are rounded to the second)")

    twenty_years_s, _ = seconds(lambda: nights_for_range(SITE, START, 20 * 365))
    print(f"nights.py, twenty years in one call: {twenty_years_s:.2f} s")


if __name__ == "__main__":
    main()
