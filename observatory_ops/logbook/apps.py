from django.apps import AppConfig


class LogbookConfig(AppConfig):
    name = "observatory_ops.logbook"
    label = "logbook"
    verbose_name = "Logbook"
