"""Benchmark: the cheapest recoat window over a two-year horizon (730 nights).

Run from the repository root: ``python benchmarks/bench_windows.py``. Target (issue 5): a window search
over a two-year horizon in at most 1 s, for the search alone and for the search with the per-night cost
assembly (open fraction per night from twelve monthly values, booked runs, :func:`windows.night_cost`), both with
a crew working every day and no day off (the recoat's total days in a row), and for the search the planner runs:
the recoat phases on a Monday-to-Friday crew's working days, without and with listed days off. Every search is
:func:`windows.cheapest_crew_windows`.
The nights (astropy) are computed once and timed separately: the shell reads them from its nights cache.
Figures are medians over repeated runs. The site, its monthly open fractions and its booked runs are invented.
"""

from __future__ import annotations

import datetime as dt
import os
import statistics
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from observatory_ops.calc.nights import Site, nights_for_range  # noqa: E402
from observatory_ops.calc.windows import (  # noqa: E402
    EVERY_DAY,
    RECOAT_PHASES,
    cheapest_crew_windows,
    night_cost,
    total_days,
)

SITE = Site(latitude_deg=31.4, longitude_deg=-108.2, elevation_m=1800.0, time_zone="America/Phoenix")
START = dt.date(2027, 1, 1)
NIGHTS = 730
ALTERNATIVES = 3
RUNS = 21
TARGET_S = 1.0
#: The crew's working days as ISO weekdays: Monday to Friday, the site setting's default.
CREW_DAYS = frozenset({1, 2, 3, 4, 5})
#: Whole days the crew is off besides weekends (invented: year-end holidays and a week's site closure).
DAYS_OFF = [dt.date(2027, 12, 24), dt.date(2027, 12, 27), dt.date(2027, 12, 31), dt.date(2028, 1, 3),
            *(dt.date(2028, 8, 7) + dt.timedelta(days=i) for i in range(5))]
#: Fraction of dark hours the dome was open, January..December (invented: a summer monsoon dip).
MONTHLY_OPEN_FRACTION = np.array([0.62, 0.66, 0.72, 0.80, 0.84, 0.70, 0.38, 0.42, 0.64, 0.78, 0.70, 0.60])
#: Booked observing runs, first and last night inclusive (invented).
BOOKED_RUNS = [(dt.date(2027, 3, 2), dt.date(2027, 3, 15)), (dt.date(2027, 10, 20), dt.date(2027, 11, 9)),
               (dt.date(2028, 5, 1), dt.date(2028, 5, 6))]


def seconds(work) -> tuple[float, object]:
    began = time.perf_counter()
    result = work()
    return time.perf_counter() - began, result


def median_seconds(work) -> tuple[float, object]:
    timings, result = [], None
    for _ in range(RUNS):
        elapsed, result = seconds(work)
        timings.append(elapsed)
    return statistics.median(timings), result


def assembled_cost(dates: np.ndarray, moonless_dark_hours: np.ndarray) -> np.ndarray:
    months = dates.astype("datetime64[M]").astype(int) % 12
    booked = np.zeros(dates.size, dtype=bool)
    for first, last in BOOKED_RUNS:
        booked |= (dates >= np.datetime64(first)) & (dates <= np.datetime64(last))
    return night_cost(moonless_dark_hours, MONTHLY_OPEN_FRACTION[months], booked=booked)


def verdict(figure_s: float) -> str:
    return "met" if figure_s <= TARGET_S else "NOT met"


def main() -> None:
    days = total_days(RECOAT_PHASES)
    print(f"site {SITE}, {NIGHTS} nights from {START}, {days}-day recoat window with {ALTERNATIVES} alternatives")
    print(f"load average {os.getloadavg()[0]:.2f} on {os.cpu_count()} cores")
    cold_s, _ = seconds(lambda: nights_for_range(SITE, START, 2))
    print(f"first nights call (astropy warm-up, excluded): {cold_s:.3f} s")
    nights_s, nights = seconds(lambda: nights_for_range(SITE, START, NIGHTS))
    print(f"nights for the horizon (astropy, once; cached by the shell): {nights_s:.3f} s")

    cost = assembled_cost(nights.dates, nights.moonless_dark_hours)
    search_s, _ = median_seconds(
        lambda: cheapest_crew_windows(cost, RECOAT_PHASES, START.isoweekday(), EVERY_DAY, ALTERNATIVES)
    )
    total_s, windows = median_seconds(
        lambda: cheapest_crew_windows(assembled_cost(nights.dates, nights.moonless_dark_hours), RECOAT_PHASES,
                                      START.isoweekday(), EVERY_DAY, ALTERNATIVES)
    )
    print(f"window search alone:               median {search_s * 1e3:8.3f} ms   target <= {TARGET_S} s: "
          f"{verdict(search_s)}")
    print(f"cost assembly and window search:   median {total_s * 1e3:8.3f} ms   target <= {TARGET_S} s: "
          f"{verdict(total_s)}")
    crew_s, crew_windows = median_seconds(
        lambda: cheapest_crew_windows(assembled_cost(nights.dates, nights.moonless_dark_hours), RECOAT_PHASES,
                                      START.isoweekday(), CREW_DAYS, ALTERNATIVES)
    )
    print(f"assembly and Mon-Fri crew search:  median {crew_s * 1e3:8.3f} ms   target <= {TARGET_S} s: "
          f"{verdict(crew_s)}")
    off = [(day - START).days for day in DAYS_OFF]
    off_s, off_windows = median_seconds(
        lambda: cheapest_crew_windows(assembled_cost(nights.dates, nights.moonless_dark_hours), RECOAT_PHASES,
                                      START.isoweekday(), CREW_DAYS, ALTERNATIVES, days_off=off)
    )
    print(f"{f'... with {len(off)} listed days off:':<35}median {off_s * 1e3:8.3f} ms   target <= {TARGET_S} s: "
          f"{verdict(off_s)}")
    print(f"with the nights computation:              {(nights_s + total_s):8.3f} s    (for information)")
    for label, found in (("every day", windows), ("Mon-Fri crew", crew_windows),
                         ("Mon-Fri crew, days off", off_windows)):
        print(f" {label}:")
        for window in found:
            first = nights.dates[window.start_index]
            last = nights.dates[window.start_index + window.days - 1]
            print(f"  {first} .. {last} ({window.days} nights): {window.cost:7.2f} expected usable moonless open "
                  "hours lost")


if __name__ == "__main__":
    main()
