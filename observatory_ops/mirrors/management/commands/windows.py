import json

import numpy as np
from django.core.management.base import BaseCommand, CommandError

from observatory_ops.calc import forecast, nights, windows
from observatory_ops.mirrors import services
from observatory_ops.planning.management import place


class Command(BaseCommand):
    help = (
        "The cheapest run of N consecutive nights to lose for downtime, with the next best, at a registered "
        "site or at a position. Every day counts as a working day: a recoat's phases on the crew's working "
        "days are planned on the mirror's recoat planner page."
    )

    def add_arguments(self, parser):
        place.add_arguments(parser, "first possible day, YYYY-MM-DD")
        parser.add_argument("--days", type=int, required=True, help="length of the downtime in days")
        parser.add_argument("--horizon-days", type=int, default=365)
        parser.add_argument("--alternatives", type=int, default=3)
        parser.add_argument("--json", action="store_true", dest="as_json")

    def handle(self, *args, **o):
        start = place.start_of(o)
        try:
            site = place.site_of(o)
            if site is not None:
                cost = np.array([c.cost for c in services.night_costs(site, start, o["horizon_days"])])
            else:
                sky = nights.nights_for_range(place.position_of(o), start, o["horizon_days"])
                # A bare position has no history: every month uses the prior open fraction.
                prior = np.full(len(sky.dark_hours), forecast.PRIOR_OPEN_FRACTION)
                cost = windows.night_cost(sky.moonless_dark_hours, prior)
            found = services.best_windows(start, cost, o["days"], o["alternatives"])
        except ValueError as exc:
            raise CommandError(str(exc)) from None
        records = [{"start": w["start"].isoformat(), "end": w["end"].isoformat(), "cost": w["cost"]} for w in found]
        if o["as_json"]:
            self.stdout.write(json.dumps({"windows": records}, indent=1))
            return
        self.stdout.write("Cheapest first; cost = expected usable moonless open hours lost. N consecutive days, "
                          "every day a working day (the recoat planner page follows the crew's working days).")
        for r in records:
            self.stdout.write(f"{r['start']} to {r['end']}: {r['cost']:.1f} h")
