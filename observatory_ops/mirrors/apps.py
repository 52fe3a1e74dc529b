from django.apps import AppConfig


class MirrorsConfig(AppConfig):
    name = "observatory_ops.mirrors"
    label = "mirrors"
    verbose_name = "Mirrors and recoating"
