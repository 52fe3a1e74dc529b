from django.apps import AppConfig


class PlanningConfig(AppConfig):
    name = "observatory_ops.planning"
    label = "planning"
    verbose_name = "Planning"

    def ready(self) -> None:
        from . import checks  # noqa: F401  (importing registers the system checks)
