import datetime as dt
import json

from django.core.management.base import BaseCommand, CommandError

from observatory_ops.calc import nights
from observatory_ops.planning import selectors, services
from observatory_ops.registry.models import Site


class Command(BaseCommand):
    help = (
        "Sunset, sunrise, astronomical dusk and dawn, dark hours and Moon for each night at a registered site "
        "(cached) or at a position."
    )

    def add_arguments(self, parser):
        parser.add_argument("slug", nargs="?", help="registered site (uses and fills its nights cache)")
        parser.add_argument("--lat", type=float, help="latitude, degrees north")
        parser.add_argument("--lon", type=float, help="longitude, degrees east")
        parser.add_argument("--elevation-m", type=float, default=0.0)
        parser.add_argument("--tz", help="IANA time zone, e.g. Europe/Madrid")
        parser.add_argument("--start", required=True, help="local date of the first evening, YYYY-MM-DD")
        parser.add_argument("--days", type=int, required=True)
        parser.add_argument("--json", action="store_true", help="print a JSON list, one object per night")

    def handle(self, *args, **o):
        try:
            start = dt.date.fromisoformat(o["start"])
        except ValueError:
            raise CommandError(f"--start must be a date as YYYY-MM-DD, not {o['start']!r}") from None
        try:
            if o["slug"]:
                if any(o[k] is not None for k in ("lat", "lon", "tz")):
                    raise CommandError("give either a site slug or --lat/--lon/--tz, not both")
                site = Site.objects.filter(slug=o["slug"]).first()
                if site is None:
                    raise CommandError(f"no site with slug {o['slug']!r}")
                nights.Site(site.latitude_deg, site.longitude_deg, site.elevation_m, site.time_zone)
                if not 1 <= o["days"] <= nights.MAX_NIGHTS:
                    raise ValueError(f"--days must be between 1 and {nights.MAX_NIGHTS}, not {o['days']}")
                end = start + dt.timedelta(days=o["days"] - 1)
                services.site_sky_refresh(site, start, end)
                records = selectors.sky_records(site, start, end)
            else:
                missing = [f"--{k}" for k in ("lat", "lon", "tz") if o[k] is None]
                if missing:
                    raise CommandError(
                        f"give a site slug, or all of --lat, --lon and --tz (missing {', '.join(missing)})"
                    )
                place = nights.Site(o["lat"], o["lon"], o["elevation_m"], o["tz"])
                records = nights.nights_for_range(place, start, o["days"]).to_records()
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
