from pathlib import Path

from django.core.management.base import BaseCommand, CommandError

from observatory_ops.archive.backup import BackupError, backup_write
from observatory_ops.command_files import database_in_use, unreachable


class Command(BaseCommand):
    help = "Write the whole record (register, logbook, plans, work orders, mirrors, people, histories) to FILE."

    def add_arguments(self, parser):
        parser.add_argument("file", help="backup file; ending in .gz compresses it")

    def handle(self, *args, file, **options):
        path = Path(file)
        try:
            if path.exists():
                raise CommandError(f"{file} already exists; choose a new name (a backup never overwrites)")
        except PermissionError:
            raise unreachable(file, "write") from None
        try:
            counts = backup_write(path)
        except BackupError as exc:
            raise CommandError(str(exc)) from None
        except OSError as exc:
            raise CommandError(f"cannot write {file}: {exc.strerror}") from None
        self.stdout.write(f"{sum(counts.values()):,} rows in {len(counts)} tables written to {file}, from "
                          f"{database_in_use()}")
