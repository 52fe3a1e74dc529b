import datetime as dt
import json

from django.core.management.base import BaseCommand, CommandError

from observatory_ops.calc import nights
from observatory_ops.planning import selectors, services
from observatory_ops.planning.management import place


class Command(BaseCommand):
    help = (
        "Sunset, sunrise, astronomical dusk and dawn, dark hours and Moon for each night at a registered site "
        "(cached) or at a position."
    )

    def add_arguments(self, parser):
        place.add_arguments(parser, "local date of the first evening")
        parser.add_argument("--days", type=int, required=True)
        parser.add_argument("--json", action="store_true", help="print a JSON list, one object per night")

    def handle(self, *args, **o):
        site = place.site_of(o)
        start = place.start_of(o, site)
        try:
            if site is not None:
                nights.Site(site.latitude_deg, site.longitude_deg, site.elevation_m, site.time_zone)
                if not 1 <= o["days"] <= nights.MAX_NIGHTS:
                    raise ValueError(f"--days must be between 1 and {nights.MAX_NIGHTS}, not {o['days']}")
                end = start + dt.timedelta(days=o["days"] - 1)
                services.site_sky_refresh(site, start, end)
                records = selectors.sky_records(site, start, end)
            else:
                records = nights.nights_for_range(place.position_of(o), start, o["days"]).to_records()
        except ValueError as exc:
            raise CommandError(str(exc)) from None
        if o["json"]:
            self.stdout.write(json.dumps(records, indent=1))
            return
        self.stdout.write(f"{'night':<11} {'sunset':>6} {'dusk':>6} {'dawn':>6} {'sunrise':>7} {'dark h':>7} "
                          f"{'moon':>5} {'moonless h':>10}   (times UTC)")
        def hm(record, key):
            return record[key][11:16] if record[key] else "--"

        for r in records:
            self.stdout.write(
                f"{r['date']:<11} {hm(r, 'sunset'):>6} {hm(r, 'dusk'):>6} {hm(r, 'dawn'):>6} {hm(r, 'sunrise'):>7} "
                f"{r['dark_hours']:>7.2f} {r['moon_illumination']:>5.2f} {r['moonless_dark_hours']:>10.2f}"
            )
