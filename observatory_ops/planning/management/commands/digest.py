from django.core.management.base import BaseCommand, CommandError

from observatory_ops.planning import digest
from observatory_ops.registry.models import Site


class Command(BaseCommand):
    help = (
        "Send today's due digest of each site (or one) to the engineers, once a day per site: for cron where "
        "Celery beat does not run. Brings each site's due states up to date first."
    )

    def add_arguments(self, parser):
        parser.add_argument("--site", help="site slug (default: every site)")

    def handle(self, *args, site=None, **options):
        sites = list(Site.objects.order_by("name"))
        if site:
            sites = [s for s in sites if s.slug == site]
            if not sites:
                raise CommandError(f"no site with slug {site!r}")
        for target in sites:
            sent = digest.due_digest_send(target)
            self.stdout.write(f"{target.name}: " + (f"sent to {sent} address(es)" if sent else
                              "nothing sent (nothing due, already sent today, or nobody with an e-mail address)"))
