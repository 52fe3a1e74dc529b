from django.apps import AppConfig


class WorkordersConfig(AppConfig):
    name = "observatory_ops.workorders"
    label = "workorders"
    verbose_name = "Work orders"
