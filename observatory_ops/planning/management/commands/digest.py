from django.core.management.base import BaseCommand, CommandError

from observatory_ops.planning import digest
from observatory_ops.planning.services import site_today
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
        printed = digest.mail_is_printed()
        failed = []
        for target in sites:
            try:
                sent = digest.due_digest_send(target)
                target.refresh_from_db(fields=["digest_refused"])
            except OSError as exc:  # the mail server (smtplib.SMTPException is one): said, and the next site tried
                failed.append(target.name)
                self.stderr.write(f"{target.name}: not sent, the mail server failed: {exc}. The people mailed before "
                                  "it failed are not mailed again; run the command again once the server is back.")
                continue
            if not sent:
                outcome = f"nothing sent: {_why_not_sent(target)}"
            elif printed:
                outcome = (f"printed to the log, not sent, for {sent} address(es): EMAIL_BACKEND is the console "
                           "backend (set EMAIL_BACKEND=django.core.mail.backends.smtp.EmailBackend and EMAIL_HOST "
                           "to send)")
            else:
                outcome = f"sent to {sent} address(es)"
            if sent and target.digest_refused:
                outcome += f"; the mail server refused {target.digest_refused}"
            self.stdout.write(f"{target.name}: {outcome}")
        if failed:
            raise CommandError(f"the digest of {', '.join(failed)} was not sent (above)")


def _why_not_sent(site: Site) -> str:
    """Which of the reasons a digest goes nowhere holds (a deployment review could not tell them apart)."""
    site.refresh_from_db(fields=["digest_sent_on"])
    today = site_today(site)
    if site.digest_sent_on == today:
        site.refresh_from_db(fields=["digest_refused"])
        refused = f"; the mail server refused {site.digest_refused}" if site.digest_refused else ""
        return f"already sent today ({today:%d %b %Y}){refused}"
    if not digest.recipients(site):
        return "nobody to send it to has an e-mail address (the site's 'Due digest to', or every engineer)"
    return "nothing is due or overdue at the site"
