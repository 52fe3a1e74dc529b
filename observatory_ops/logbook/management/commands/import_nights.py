from pathlib import Path

from django.conf import settings
from django.core.management.base import BaseCommand, CommandError
from django.template.defaultfilters import pluralize

from observatory_ops.command_files import site_by_slug, unreachable
from observatory_ops.logbook import services


def _not_a_file(path: Path) -> str:
    """What the path names instead of a file to read, in words: the command is often given a folder or a device by
    mistake, and "no such file" would send whoever typed it looking for a file that is there."""
    if path.is_dir():
        return "is a directory, not a file; give the path of a CSV file"
    if path.exists():
        return "is not a regular file (a device, a pipe or a socket); give the path of a CSV file"
    return "no such file"


#: How many bad rows are listed, the rest counted, as the upload page lists them
#: (logbook/templates/logbook/nights_import.html): a file of many bad rows printed 2.4 million lines, and the first
#: few show what is wrong.
ROWS_LISTED = 50


class Command(BaseCommand):
    help = "Import nightly usage from a CSV file (format in README.md). All or nothing unless --skip-bad."

    def add_arguments(self, parser):
        parser.add_argument("file", help="the CSV file of nights (header: night,open_hours,...; see README.md)")
        parser.add_argument("--site", required=True, help="site slug")
        parser.add_argument("--skip-bad", action="store_true", help="store the good rows and list the bad ones")

    def handle(self, *args, file, site, skip_bad, **options):
        target = site_by_slug(site)
        path = Path(file)
        try:
            if not path.is_file():
                raise CommandError(f"{file}: {_not_a_file(path)}")
            size, limit = path.stat().st_size, settings.NIGHTS_UPLOAD_MAX_BYTES
        except PermissionError:
            raise unreachable(file) from None
        if size > limit:  # the upload page's limit: a file of 50 MB took 87 s and 2.3 GB of memory
            raise CommandError(f"{file}: the file is {size:,} bytes; the limit is {limit:,} bytes. Split it into "
                               "files of fewer nights and import each. Nothing was stored.")

        def progress(done, total):
            self.stderr.write(f"\r  {done:,}/{total:,} rows checked and written", ending="\n" if done == total else "")
            self.stderr.flush()

        try:
            data = path.read_bytes()
        except OSError as exc:  # no permission to read it, or a disk error
            raise CommandError(f"{file}: cannot be read ({exc.strerror})") from None
        report = services.nights_import(target, data, skip_bad=skip_bad, progress=progress)
        if report.file_problem:  # the whole file is refused: no line to name (the summary says why)
            raise CommandError(f"{file}: {report.summary}")
        rows = report.refused_rows or report.skipped_rows  # each row once, with all its problems, as the page
        for line, reason in rows[:ROWS_LISTED]:
            self.stderr.write(f"line {line}: {reason}")
        if len(rows) > ROWS_LISTED:
            more = len(rows) - ROWS_LISTED
            self.stderr.write(f"... and {more:,} more {'bad' if report.errors else 'skipped'} row{pluralize(more)}, "
                              "not listed.")
        if report.errors:
            raise CommandError(f"{file}: {report.summary}")
        for night, telescope in sorted({(c.night, c.telescope) for c in report.changes}):
            changed = [f"{c.column} {c.old_text} -> {c.new_text}" for c in report.changes
                       if (c.night, c.telescope) == (night, telescope)]
            self.stdout.write(f"updated night {services.night_named(night, telescope)}: {'; '.join(changed)}")
        self.stdout.write(f"{file}: {report.summary}")
        count = len(report.updated_nights)
        how_many = f"{count:,}" if count else "no"
        self.stdout.write(f"Changed {how_many} stored night{pluralize(count)}.")
