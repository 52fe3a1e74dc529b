from django.apps import AppConfig


class ApiConfig(AppConfig):
    name = "observatory_ops.api"
    label = "api"
    verbose_name = "Ingest API"
