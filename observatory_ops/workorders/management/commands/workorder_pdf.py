from pathlib import Path

from django.conf import settings
from django.core.management.base import BaseCommand, CommandError

from observatory_ops.workorders import pdf, selectors
from observatory_ops.workorders.models import WorkOrder


class Command(BaseCommand):
    help = "Write the printable PDF of one work order."

    def add_arguments(self, parser):
        parser.add_argument("id", type=int, help="work order id (the number without WO- and zeros)")
        parser.add_argument("-o", "--output", required=True, help="PDF file to write")
        parser.add_argument("--paper", choices=["A4", "letter"], default="A4")
        # The address the weekly batch and the digest's links use (a newcomer review: this command's own default,
        # the development server's, put 127.0.0.1 in the QR code of paper printed on a production site).
        parser.add_argument(
            "--base-url", default=None, help="address of the site, for the QR code (default: SITE_URL)"
        )

    def handle(self, *args, **o):
        order = WorkOrder.objects.select_related("site", "telescope", "assignee").filter(pk=o["id"]).first()
        if order is None:
            raise CommandError(f"no work order with id {o['id']}")
        output = Path(o["output"])
        folder = output.parent
        if not folder.is_dir():
            raise CommandError(f"the folder {str(folder)!r} does not exist: create it, or give another output file")
        url = (o["base_url"] or settings.SITE_URL).rstrip("/") + order.get_absolute_url()
        data = pdf.render_sheet(selectors.sheet(order, url), o["paper"])
        try:
            output.write_bytes(data)
        except OSError as exc:
            raise CommandError(f"cannot write {str(output)!r}: {exc.strerror or exc}") from None
        self.stdout.write(f"{order.number}: {len(data):,} bytes written to {o['output']}")
