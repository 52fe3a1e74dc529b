from django.apps import AppConfig


class ReliabilityConfig(AppConfig):
    name = "observatory_ops.reliability"
    label = "reliability"
    verbose_name = "Reliability"
