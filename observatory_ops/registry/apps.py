from django.apps import AppConfig


class RegistryConfig(AppConfig):
    name = "observatory_ops.registry"
    label = "registry"
    verbose_name = "Register"

    def ready(self) -> None:
        from observatory_ops.calc import astropy_offline

        astropy_offline.configure()
