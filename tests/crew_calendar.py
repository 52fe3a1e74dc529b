"""The independent reference the crew-day tests share: where each recoat phase falls by numpy's business-day
calendar (``numpy.busday_offset``, a general-purpose implementation independent of calc.windows), with the crew's
days as the weekmask and its days off as ``holidays=``; what calc.windows.phase_days gives, as dates; and the
hypothesis strategies both test files draw from."""
from __future__ import annotations

import datetime as dt
from collections.abc import Sequence

import numpy as np
from hypothesis import strategies as st

from observatory_ops.calc.windows import Phase, phase_days

MON_FRI = frozenset({1, 2, 3, 4, 5})
#: The work our crew does at the telescope, as the feature asks for it (the coating is at an outside plant).
CREW_WORK = ("removal", "reinstall", "realignment")


def weekmask(crew: frozenset[int]) -> str:
    """numpy's weekmask runs Monday to Sunday, as ISO weekdays 1 to 7 do."""
    return "".join("1" if day in crew else "0" for day in range(1, 8))


def busday_reference(
    phases: list[Phase], start: dt.date, crew: frozenset[int], days_off: Sequence[dt.date] = ()
) -> list[tuple[dt.date, dt.date]]:
    """Each phase's first and last date from numpy's business-day calendar with the days off as holidays: a crew
    phase from the first working day on (``busday_offset`` rolled forward) to its ``days - 1``-th working day
    after that; any other phase on calendar days."""
    mask, holidays = weekmask(crew), np.array(list(days_off), dtype="datetime64[D]")
    cursor, laid = np.datetime64(start, "D"), []
    for phase in phases:
        if phase.days and phase.work in CREW_WORK:
            first = np.busday_offset(cursor, 0, roll="forward", weekmask=mask, holidays=holidays)
            last = np.busday_offset(first, phase.days - 1, roll="forward", weekmask=mask, holidays=holidays)
        else:
            first, last = cursor, cursor + np.timedelta64(phase.days - 1, "D")
        laid.append((first.astype(dt.date), last.astype(dt.date)))
        cursor = last + np.timedelta64(1, "D")
    return laid


def dated(
    phases: list[Phase], start: dt.date, crew: frozenset[int], days_off: Sequence[dt.date] = ()
) -> list[tuple[dt.date, dt.date]]:
    """What calc.windows.phase_days gives, as (first, last) dates from ``start``."""
    off = [(day - start).days for day in days_off if day >= start]
    return [(start + dt.timedelta(days=p.first), start + dt.timedelta(days=p.last))
            for p in phase_days(phases, start.isoweekday(), crew, days_off=off)]


phase_lists = st.lists(
    st.builds(Phase, name=st.just("step"), days=st.integers(0, 6), work=st.sampled_from([*CREW_WORK, "coating", ""])),
    min_size=1, max_size=6,
).filter(lambda phases: sum(p.days for p in phases) > 0)
crews = st.frozensets(st.integers(1, 7), min_size=1)
dates = st.dates(dt.date(2000, 1, 1), dt.date(2040, 12, 31))


def mirror_under_a_flat_sky(telescope, first_night: dt.date, nights: int):
    """A 500 mm borosilicate primary coated on 1 Aug 2025, and a sky of 4 moonless dark hours on each of ``nights``
    nights from ``first_night`` (every night costs the same to lose). Invented."""
    from observatory_ops.mirrors.models import CoatingEvent, Mirror
    from observatory_ops.planning.models import NightSky
    from observatory_ops.registry.models import Subsystem

    primary = Subsystem.objects.create(telescope=telescope, kind="primary_mirror", name="Primary")
    made = Mirror.objects.create(subsystem=primary, diameter_mm=500, thickness_mm=50, hole_mm=120,
                                 material="borosilicate", cell_mass_kg=30)
    CoatingEvent.objects.create(mirror=made, coated_on=dt.date(2025, 8, 1), metal="al")
    NightSky.objects.bulk_create(
        NightSky(site=telescope.site, night=first_night + dt.timedelta(days=i), dark_hours=8,
                 moon_illumination=0.5, moonless_dark_hours=4) for i in range(nights)
    )
    return made
