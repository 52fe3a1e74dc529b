from django.apps import AppConfig


class RegistryConfig(AppConfig):
    name = "observatory_ops.registry"
    label = "registry"
    verbose_name = "Register"

    def ready(self) -> None:
        from django import forms

        from observatory_ops.calc import astropy_offline
        from observatory_ops.formats.en.formats import DATE_INVALID, DATETIME_INVALID

        astropy_offline.configure()
        # Every date field of every form says which formats it reads (formats/en/formats.py).
        forms.DateField.default_error_messages = {**forms.DateField.default_error_messages, "invalid": DATE_INVALID}
        forms.DateTimeField.default_error_messages = {**forms.DateTimeField.default_error_messages,
                                                      "invalid": DATETIME_INVALID}
