import json

import numpy as np
from django.core.management.base import BaseCommand, CommandError

from observatory_ops.calc import forecast, nights, windows
from observatory_ops.mirrors import services
from observatory_ops.planning.management import place


class Command(BaseCommand):
    help = (
        "The cheapest downtime window for N days of work at the telescope, with the next best, cheapest first. At a "
        "registered site the work follows the site's crew as the recoat planner page does: it starts on a crew "
        "working day and pauses over the weekdays the crew does not work and its listed crew days off, with the "
        "telescope down, so those nights are lost too and counted in the window's cost. At a bare position there "
        "is no crew: every day counts as a working day (N consecutive nights)."
    )

    def add_arguments(self, parser):
        place.add_arguments(parser, "first possible day")
        parser.add_argument("--days", type=int, required=True,
                            help="days of work at the telescope (crew working days at a registered site)")
        parser.add_argument("--horizon-days", type=int, default=365,
                            help="how many nights from --start to search (default 365)")
        parser.add_argument("--alternatives", type=int, default=3, help="further windows after the cheapest")
        parser.add_argument("--json", action="store_true", dest="as_json")

    def handle(self, *args, **o):
        days, horizon = o["days"], o["horizon_days"]
        # Named by their options here: calc.windows words them as phases and a horizon.
        if days < 1:
            raise CommandError(f"--days must be at least 1, not {days}")
        if horizon < days:
            raise CommandError(f"--days {days} is longer than the horizon (--horizon-days {horizon}): lengthen it")
        if o["alternatives"] < 0:
            raise CommandError(f"--alternatives must be at least 0, not {o['alternatives']}")
        site = place.site_of(o)
        try:
            position = place.position_of(o) if site is None else None
        except ValueError as exc:
            raise CommandError(str(exc)) from None
        start = place.start_of(o, site)
        work = [windows.Phase("work at the telescope", days, windows.TELESCOPE_WORK)]
        try:
            if site is not None:
                _, _, found = services.site_crew_windows(site, start, horizon, work, o["alternatives"])
                crew = site.crew_days
                basis = (f"{days} crew working days at {site.name} ({site.crew_days_text}, less its listed crew days "
                         "off); the work starts on a working day and pauses over the others, with the telescope "
                         "down, so their nights are lost too and counted.")
            else:
                sky = nights.nights_for_range(position, start, horizon)
                # A bare position has no history: every month uses the prior open fraction.
                prior = np.full(len(sky.dark_hours), forecast.PRIOR_OPEN_FRACTION)
                cost = windows.night_cost(sky.moonless_dark_hours, prior)
                crew = windows.EVERY_DAY
                found = services.crew_windows(start, cost, work, crew, {}, o["alternatives"])
                basis = f"{days} consecutive days: a bare position has no crew, so every day counts as a working day."
        except ValueError as exc:
            raise CommandError(f"no window for {days} days of work at the telescope: {exc}") from None
        records = [
            {"start": w["start"].isoformat(), "end": w["end"].isoformat(), "nights_lost": w["nights"],
             "cost": w["cost"], "days_off": [{"date": day.isoformat(), "note": note} for day, note in w["days_off"]]}
            for w in found
        ]
        if o["as_json"]:
            self.stdout.write(json.dumps({"site": site.slug if site else None, "days_of_work": days,
                                          "crew_weekdays": sorted(crew), "windows": records}, indent=1))
            return
        self.stdout.write(f"Cheapest first; cost = expected usable moonless open hours lost. {basis}")
        for w in found:
            line = f"{w['start']:%a %Y-%m-%d} to {w['end']:%a %Y-%m-%d}: {w['nights']} nights lost, {w['cost']:.1f} h"
            if site is not None:
                off = "; ".join(f"{day:%a %Y-%m-%d}" + (f" ({note})" if note else "") for day, note in w["days_off"])
                line += f"; crew days off inside: {off or 'none'}"
            self.stdout.write(line)
