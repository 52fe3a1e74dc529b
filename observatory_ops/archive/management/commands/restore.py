from pathlib import Path

from django.core.management.base import BaseCommand, CommandError

from observatory_ops.archive.backup import BackupError, backup_restore
from observatory_ops.command_files import database_in_use, unreachable


class Command(BaseCommand):
    help = "Load a backup written by `backup` into an empty, migrated database (all or nothing)."

    def add_arguments(self, parser):
        parser.add_argument("file", help="a backup file written by the backup command (.gz or not)")

    def handle(self, *args, file, **options):
        path = Path(file)
        try:
            if path.is_dir():
                raise CommandError(f"{file} is a folder, not a backup file")
            if not path.is_file():
                raise CommandError(f"{file}: no such file")
        except PermissionError:
            raise unreachable(file) from None
        try:
            counts = backup_restore(path)
        except BackupError as exc:
            raise CommandError(str(exc)) from None
        except OSError as exc:
            raise CommandError(f"cannot read {file}: {exc.strerror}") from None
        self.stdout.write(f"{sum(counts.values()):,} rows in {len(counts)} tables restored from {file} into "
                          f"{database_in_use()}")
