from django.conf import settings
from django.core.management.base import BaseCommand, CommandError

from observatory_ops.api import services
from observatory_ops.api.models import ApiToken
from observatory_ops.api.selectors import calendar_link
from observatory_ops.command_files import database_in_use, site_by_slug
from observatory_ops.registry.models import Site


class Command(BaseCommand):
    help = (
        "Create, list or revoke the API tokens control software uses to post nights (README: Ingest API), and the "
        "calendar tokens of planned-work subscriptions (README: Calendar subscription)."
    )

    def add_arguments(self, parser):
        actions = parser.add_subparsers(dest="action", required=True)
        create = actions.add_parser("create", help="create a token and print its secret, once")
        create.add_argument("--site", required=True, help="site slug")
        create.add_argument("--name", required=True, help="what uses it, e.g. 'east dome control computer'")
        create.add_argument(
            "--calendar", action="store_true",
            help="a calendar token: prints the link a calendar application subscribes to (from SITE_URL); it reads "
            "the planned-work calendar only",
        )
        revoke = actions.add_parser("revoke", help="revoke a token: it is refused from now on")
        revoke.add_argument("id", type=int, help="the token's number, as `api_token list` shows it")
        listing = actions.add_parser("list", help="list the tokens (never their secrets)")
        listing.add_argument("--site", help="site slug (default: all sites)")

    def handle(self, *args, action, **options):
        getattr(self, f"_{action}")(**options)

    def _site(self, slug: str) -> Site:
        return site_by_slug(slug)

    def _create(self, site, name, calendar, **options):
        purpose = ApiToken.Purpose.CALENDAR if calendar else ApiToken.Purpose.CONTROL
        try:
            token, secret = services.api_token_create(self._site(site), name, purpose=purpose)
        except ValueError as exc:
            raise CommandError(str(exc)) from None
        what = "Calendar token" if calendar else "Token"
        self.stderr.write(
            f"{what} {token.pk} ({token.name}) for site {token.site.slug}. Copy it now: it is shown once. Stored in "
            f"{database_in_use()}."
        )
        # The link holds the secret, so it is what is printed: a calendar application is given the link, not the token.
        self.stdout.write(calendar_link(token, secret, settings.SITE_URL) if calendar else secret)

    def _revoke(self, id, **options):
        token = ApiToken.objects.filter(pk=id).first()
        if token is None:
            raise CommandError(f"no API token {id}")
        try:
            services.api_token_revoke(token)
        except ValueError as exc:
            raise CommandError(str(exc)) from None
        self.stdout.write(f"Token {token.pk} ({token.name}, site {token.site.slug}) revoked.")

    def _list(self, site=None, **options):
        tokens = ApiToken.objects.select_related("site")
        if site:
            tokens = tokens.filter(site=self._site(site))
        if not tokens:
            self.stdout.write("No API tokens." if not site else f"No API tokens for site {site}.")
            return
        # Dates and times at each token's site, as its pages show them; the site column as wide as its longest slug.
        width = max(len("site"), *(len(t.site.slug) for t in tokens))
        self.stdout.write(
            f"{'id':>4}  {'site':<{width}}  {'purpose':<8}  {'begins':<9} {'created':<10}  "
            f"{'last used (site time)':<21}  {'state':<18} name"
        )
        for t in tokens:
            zone = t.site.zone
            state = f"revoked {t.revoked_at.astimezone(zone):%Y-%m-%d}" if t.revoked_at else "active"
            created = f"{t.created_at.astimezone(zone):%Y-%m-%d}"
            used = f"{t.last_used_at.astimezone(zone):%Y-%m-%d %H:%M}" if t.last_used_at else "never"
            self.stdout.write(
                f"{t.pk:>4}  {t.site.slug:<{width}}  {t.purpose:<8}  {t.prefix}…  {created}  {used:<21}  "
                f"{state:<18} {t.name}"
            )
