from django.apps import AppConfig


class ArchiveConfig(AppConfig):
    name = "observatory_ops.archive"
    label = "archive"
    verbose_name = "History and backups"
