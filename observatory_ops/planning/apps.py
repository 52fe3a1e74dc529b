from django.apps import AppConfig


class PlanningConfig(AppConfig):
    name = "observatory_ops.planning"
    label = "planning"
    verbose_name = "Planning"
