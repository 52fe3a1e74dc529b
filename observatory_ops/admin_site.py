"""The project's admin site: Django's, except that the search behind a choice typed into (``autocomplete_fields``)
names the records a choice names with their site as the saved choice does
(``registry.forms.NamedWithSiteAutocomplete``). Installed in place of django.contrib.admin (settings.INSTALLED_APPS),
so ``admin.site`` and ``@admin.register`` are this site."""
from django.contrib import admin
from django.contrib.admin.apps import AdminConfig


class ObservatoryAdminSite(admin.AdminSite):
    def autocomplete_view(self, request):
        # Imported here: this module is loaded with the installed apps, before the models it would bring.
        from observatory_ops.registry.forms import NamedWithSiteAutocomplete

        return NamedWithSiteAutocomplete.as_view(admin_site=self)(request)


class ObservatoryAdminConfig(AdminConfig):
    default_site = "observatory_ops.admin_site.ObservatoryAdminSite"

    def ready(self) -> None:
        # Every date field of every form says which formats it reads (formats/en/formats.py), and which part of a date
        # written in one of them does not exist (formats/calendar_words.py). Set here, first of the installed apps and
        # before the admin's discovery imports the apps' forms, whose fields copy the messages when their classes are
        # built.
        from django import forms

        from observatory_ops.formats import calendar_words, plain_numbers
        from observatory_ops.formats.en.formats import DATE_INVALID, DATETIME_INVALID

        forms.DateField.default_error_messages = {**forms.DateField.default_error_messages, "invalid": DATE_INVALID}
        forms.DateTimeField.default_error_messages = {**forms.DateTimeField.default_error_messages,
                                                      "invalid": DATETIME_INVALID}
        calendar_words.install()
        plain_numbers.install()  # and every number field reads only numbers written plainly (formats/plain_numbers.py)
        super().ready()
