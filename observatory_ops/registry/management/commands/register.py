from pathlib import Path

from django.contrib.auth import get_user_model
from django.core.management.base import BaseCommand, CommandError

from observatory_ops.access.roles import ENGINEER, has_role
from observatory_ops.command_files import site_by_slug, unreachable
from observatory_ops.planning.services import site_today
from observatory_ops.registry.models import Telescope
from observatory_ops.registry.register_file import RegisterFileError, read_register_file, register_import, register_of

#: The largest register file read: a telescope of a few hundred subsystems writes well under 2 MB.
REGISTER_FILE_MAX_BYTES = 10 * 1024 * 1024


class Command(BaseCommand):
    help = ("Write a telescope's subsystems and service plans to a JSON file, or read such a file into another "
            "telescope (README: Your own observatory). Serial numbers, in-service days and service history "
            "stay behind; the plans read in count with their last service unknown.")

    def add_arguments(self, parser):
        actions = parser.add_subparsers(dest="action", required=True)
        export = actions.add_parser("export", help="print the telescope's register as JSON (or write it to --output)")
        export.add_argument("--site", required=True, help="site slug")
        export.add_argument("--telescope", required=True, help="the telescope's name at the site")
        export.add_argument("--output", help="the file to write (default: print it)")
        read = actions.add_parser("import", help="read a register file into a telescope: all or nothing; what is "
                                                 "already there (same names) is left as it is")
        read.add_argument("file", help="the JSON file `register export` wrote")
        read.add_argument("--site", required=True, help="site slug")
        read.add_argument("--telescope", required=True, help="the telescope's name at the site")
        read.add_argument("--by", required=True, help="the user name of the site engineer reading it in (kept in the "
                                                      "change history)")

    def handle(self, *args, action, **options):
        getattr(self, f"_{action}")(**options)

    def _telescope(self, site: str, telescope: str) -> Telescope:
        found = site_by_slug(site)
        scope = found.telescopes.filter(name=telescope).first()
        if scope is None:
            known = ", ".join(found.telescopes.values_list("name", flat=True)) or "none"
            raise CommandError(f"no telescope named {telescope!r} at {found.name} (known: {known})")
        return scope

    def _export(self, site, telescope, output, **options):
        import json

        scope = self._telescope(site, telescope)
        text = json.dumps(register_of(scope, site_today(scope.site)), indent=2, ensure_ascii=False) + "\n"
        if not output:
            self.stdout.write(text, ending="")
            return
        try:
            Path(output).write_text(text, encoding="utf-8")
        except PermissionError:
            raise unreachable(output, "write") from None
        except OSError as exc:
            raise CommandError(f"{output}: cannot be written ({exc.strerror})") from None
        self.stderr.write(f"{scope.site.name} {scope.name}: register written to {output}.")

    def _import(self, file, site, telescope, by, **options):
        scope = self._telescope(site, telescope)
        person = get_user_model().objects.filter(username=by, is_active=True).first()
        if person is None or not has_role(person, ENGINEER):
            raise CommandError(f"{by!r} is not an active user with the site engineer's role: the register's plans are "
                               "the engineer's to set")
        path = Path(file)
        try:
            if not path.is_file():
                raise CommandError(f"{file}: no such file" if not path.exists() else f"{file}: not a regular file")
            if path.stat().st_size > REGISTER_FILE_MAX_BYTES:
                raise CommandError(f"{file}: larger than {REGISTER_FILE_MAX_BYTES:,} bytes: not a register file. "
                                   "Nothing was stored.")
            data = path.read_bytes()
        except PermissionError:
            raise unreachable(file) from None
        try:
            read = register_import(scope, read_register_file(data), person, site_today(scope.site))
        except RegisterFileError as exc:
            for problem in exc.problems[:50]:
                self.stderr.write(problem)
            more = f" (the first 50 of {len(exc.problems)} listed)" if len(exc.problems) > 50 else ""
            raise CommandError(f"{file}: refused{more}; nothing was stored.") from None
        for name in read.subsystems_added:
            self.stdout.write(f"added subsystem {name}")
        for name in read.plans_added:
            self.stdout.write(f"added plan {name}")
        self.stdout.write(f"{scope.site.name} {scope.name}: {read.summary}." + (
            " The plans added count from today with their last service unknown (due now) until their first service "
            "is logged." if read.plans_added else ""))
        for sentence in read.to_enter:
            self.stdout.write(f"Still to enter: {sentence}.")
