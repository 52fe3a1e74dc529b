import datetime as dt
import json

import numpy as np
from django.core.management.base import BaseCommand, CommandError

from observatory_ops.calc import forecast, nights, windows
from observatory_ops.mirrors import services
from observatory_ops.registry.models import Site


class Command(BaseCommand):
    help = (
        "The cheapest run of N consecutive nights to lose for downtime (e.g. a recoat), with the next best, "
        "at a registered site or at a position."
    )

    def add_arguments(self, parser):
        parser.add_argument("slug", nargs="?")
        parser.add_argument("--lat", type=float)
        parser.add_argument("--lon", type=float)
        parser.add_argument("--elevation-m", type=float, default=0.0)
        parser.add_argument("--tz")
        parser.add_argument("--days", type=int, required=True, help="length of the downtime in days")
        parser.add_argument("--start", required=True, help="first possible day, YYYY-MM-DD")
        parser.add_argument("--horizon-days", type=int, default=365)
        parser.add_argument("--alternatives", type=int, default=3)
        parser.add_argument("--json", action="store_true", dest="as_json")

    def handle(self, *args, **o):
        try:
            start = dt.date.fromisoformat(o["start"])
        except ValueError:
            raise CommandError(f"--start must be a date as YYYY-MM-DD, not {o['start']!r}") from None
        try:
            if o["slug"]:
                site = Site.objects.filter(slug=o["slug"]).first()
                if site is None:
                    raise CommandError(f"no site with slug {o['slug']!r}")
                cost = np.array([c.cost for c in services.night_costs(site, start, o["horizon_days"])])
            else:
                missing = [f"--{k}" for k in ("lat", "lon", "tz") if o[k] is None]
                if missing:
                    raise CommandError(
                        f"give a site slug, or all of --lat, --lon and --tz (missing {', '.join(missing)})"
                    )
                place = nights.Site(o["lat"], o["lon"], o["elevation_m"], o["tz"])
                sky = nights.nights_for_range(place, start, o["horizon_days"])
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
        self.stdout.write("Cheapest first; cost = expected usable moonless open hours lost.")
        for r in records:
            self.stdout.write(f"{r['start']} to {r['end']}: {r['cost']:.1f} h")
