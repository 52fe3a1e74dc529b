from django.apps import AppConfig


class AccessConfig(AppConfig):
    name = "observatory_ops.access"
    label = "access"
    verbose_name = "Access and roles"
