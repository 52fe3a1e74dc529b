"""The "where and from when" arguments shared by the sky commands (`nights`, `windows`): a registered
site's slug, or a bare position with --lat, --lon, --elevation-m and --tz; and a --start date."""
from __future__ import annotations

import datetime as dt

from django.core.management.base import CommandError

from observatory_ops.calc import nights
from observatory_ops.registry.models import Site


def add_arguments(parser, start_help: str) -> None:
    parser.add_argument("slug", nargs="?", help="registered site (uses its nights cache and history)")
    parser.add_argument("--lat", type=float, help="latitude, degrees north")
    parser.add_argument("--lon", type=float, help="longitude, degrees east")
    parser.add_argument("--elevation-m", type=float, default=0.0)
    parser.add_argument("--tz", help="IANA time zone, e.g. Europe/Madrid")
    parser.add_argument("--start", required=True, help=start_help)


def start_of(options: dict) -> dt.date:
    try:
        return dt.date.fromisoformat(options["start"])
    except ValueError:
        raise CommandError(f"--start must be a date as YYYY-MM-DD, not {options['start']!r}") from None


def site_of(options: dict) -> Site | None:
    """The registered site named by the slug, or None when a bare position is given."""
    given = [k for k in ("lat", "lon", "tz") if options[k] is not None]
    if options["slug"]:
        if given:
            raise CommandError("give either a site slug or --lat/--lon/--tz, not both")
        site = Site.objects.filter(slug=options["slug"]).first()
        if site is None:
            raise CommandError(f"no site with slug {options['slug']!r}")
        return site
    if len(given) < 3:
        missing = ", ".join(f"--{k}" for k in ("lat", "lon", "tz") if options[k] is None)
        raise CommandError(f"give a site slug, or all of --lat, --lon and --tz (missing {missing})")
    return None


def position_of(options: dict) -> nights.Site:
    """The bare position (ValueError naming the problem when it is not a place on Earth)."""
    return nights.Site(options["lat"], options["lon"], options["elevation_m"], options["tz"])
