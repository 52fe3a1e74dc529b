import os

from django.conf import settings
from django.core.management import call_command
from django.core.management.base import BaseCommand, CommandError

from fixtures_demo import generator
from observatory_ops.planning import selectors


class Command(BaseCommand):
    help = "Migrate, load the invented demo observatory (once), print the demo logins, then serve on 127.0.0.1:8000."

    def add_arguments(self, parser):
        parser.add_argument("--no-serve", action="store_true", help="stop after loading")
        parser.add_argument("--port", default="8000")

    def handle(self, *args, **options):
        # The demo's logins have passwords printed in the README: never in a database of real records.
        refusal = generator.load_refusal()
        if refusal:
            raise CommandError(refusal)
        call_command("migrate", verbosity=0)
        logins = generator.demo_users()
        self.stdout.write("Loading the demo observatory (three years of nights; this takes a few seconds)...")
        site, created = generator.build()
        self.stdout.write(("Loaded " if created else "Already loaded: ") + site.name)
        counts = selectors.status_counts(site)
        self.stdout.write(f"Due summary: {counts['overdue']} overdue, {counts['due']} due, {counts['later']} later.")
        for status in selectors.due_for_site(site)[:5]:
            self.stdout.write(f"  [{status.status}] {status.plan.subsystem}: {status.plan.name}")
        self.stdout.write("Demo logins (user / password):")
        for username, role, password in logins:
            shown = password or "(an existing account, left as it was: not a demo login)"
            self.stdout.write(f"  {role:<14} {username} / {shown}")
        if not options["no_serve"]:
            served = f"http://127.0.0.1:{options['port']}"
            # The links the pages write for use elsewhere (the API's due list "page", the work-order sheets' QR codes)
            # point where this demo serves, not at the default port; an address set in the environment stays.
            if "SITE_URL" not in os.environ:
                settings.SITE_URL = served
            self.stdout.write(f"Serving at {served}/ (Ctrl-C to stop)")
            call_command("runserver", f"127.0.0.1:{options['port']}", use_reloader=False)
