"""The "where and from when" arguments shared by the sky commands (`nights`, `windows`): a registered
site as --site SLUG (as `due` and `import_nights` take it), or a bare position with --lat, --lon, --elevation-m
and --tz; and a --start date, by default the place's today."""
from __future__ import annotations

import argparse
import datetime as dt

from django.core.management.base import CommandError
from django.utils import timezone

from observatory_ops.calc import nights
from observatory_ops.calc.night_of import zone
from observatory_ops.planning.services import site_today
from observatory_ops.registry.models import Site


def add_arguments(parser, start_help: str) -> None:
    parser.add_argument("--site", metavar="SLUG", help="registered site (uses its nights cache and history)")
    parser.add_argument("--lat", type=float, help="latitude, degrees north")
    parser.add_argument("--lon", type=float, help="longitude, degrees east")
    parser.add_argument("--elevation-m", type=float, default=0.0)
    parser.add_argument("--tz", help="IANA time zone, e.g. Europe/Madrid")
    parser.add_argument("--start", metavar="YYYY-MM-DD", help=f"{start_help} (default: today at the site, or in --tz)")
    # The site used to be given bare; such a call is refused with the option to use instead (site_of).
    parser.add_argument("positional_site", nargs="?", help=argparse.SUPPRESS)


def start_of(options: dict, site: Site | None) -> dt.date:
    """The --start date, or the place's local date today: the site's, or that of the bare position's --tz."""
    if options["start"] is None:
        if site is not None:
            return site_today(site)
        try:
            return timezone.now().astimezone(zone(options["tz"])).date()
        except ValueError as exc:
            raise CommandError(str(exc)) from None
    try:
        return dt.date.fromisoformat(options["start"])
    except ValueError:
        raise CommandError(f"--start must be a date as YYYY-MM-DD, not {options['start']!r}") from None


def site_of(options: dict) -> Site | None:
    """The registered site given by --site, or None when a bare position is given."""
    if options["positional_site"]:
        raise CommandError(f"give the site as --site {options['positional_site']} (the site is an option now, as in "
                           "the due and import_nights commands)")
    given = [k for k in ("lat", "lon", "tz") if options[k] is not None]
    if options["site"]:
        if given:
            raise CommandError("give either --site or --lat/--lon/--tz, not both")
        site = Site.objects.filter(slug=options["site"]).first()
        if site is None:
            raise CommandError(f"no site with slug {options['site']!r}")
        return site
    if len(given) < 3:
        missing = ", ".join(f"--{k}" for k in ("lat", "lon", "tz") if options[k] is None)
        raise CommandError(f"give --site SLUG, or all of --lat, --lon and --tz (missing {missing})")
    return None


def position_of(options: dict) -> nights.Site:
    """The bare position (ValueError naming the problem when it is not a place on Earth)."""
    return nights.Site(options["lat"], options["lon"], options["elevation_m"], options["tz"])
