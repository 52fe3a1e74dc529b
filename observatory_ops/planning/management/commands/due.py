import json

from django.core.management.base import BaseCommand, CommandError

from observatory_ops.planning import selectors
from observatory_ops.planning.services import sites_bring_up_to_date
from observatory_ops.registry.models import Site


class Command(BaseCommand):
    help = "Every service plan's governing trigger, value, limit, rate and forecast date with its band."

    def add_arguments(self, parser):
        parser.add_argument("--site", help="site slug (default: all sites)")
        parser.add_argument("--json", action="store_true", dest="as_json", help="print a JSON list, one per plan")

    def handle(self, *args, site=None, as_json=False, **options):
        target = None
        if site:
            target = Site.objects.filter(slug=site).first()
            if target is None:
                raise CommandError(f"no site with slug {site!r}")
        sites_bring_up_to_date([target] if target else None)
        records = selectors.due_records(target)
        if as_json:
            self.stdout.write(json.dumps(records, indent=1))
            return
        for r in records:
            self.stdout.write(f"[{r['status']:<7}] {r['subsystem']}: {r['plan']}\n          {r['reason']}")
