"""API tokens in the admin, for administrators only: create (the secret is shown once, and a calendar token's
subscription link with it), list, revoke.

Nothing here edits or deletes a token: a token that should stop working is revoked, and stays listed.
"""
from django.contrib import admin, messages
from django.core.exceptions import PermissionDenied
from django.template.response import TemplateResponse
from simple_history.admin import SimpleHistoryAdmin

from observatory_ops.access.roles import ADMINISTRATOR, has_role

from . import services
from .forms import ApiTokenCreateForm
from .models import ApiToken
from .selectors import calendar_link


@admin.register(ApiToken)
class ApiTokenAdmin(SimpleHistoryAdmin):
    list_display = ("name", "site", "purpose", "shown_prefix", "created_at", "created_by", "last_used_at", "revoked_at")
    list_filter = ("site", "purpose", ("revoked_at", admin.EmptyFieldListFilter))
    fields = ("site", "name", "purpose", "shown_prefix", "created_at", "created_by", "last_used_at", "revoked_at")
    readonly_fields = fields
    actions = ["revoke"]

    @admin.display(description="token starts with")
    def shown_prefix(self, token: ApiToken) -> str:
        return f"{token.prefix}…"

    def has_module_permission(self, request):
        return has_role(request.user, ADMINISTRATOR)

    def has_view_permission(self, request, obj=None):
        return has_role(request.user, ADMINISTRATOR)

    def has_add_permission(self, request):
        return has_role(request.user, ADMINISTRATOR)

    def has_change_permission(self, request, obj=None):
        return False  # a token is revoked (the action below), never edited

    def has_delete_permission(self, request, obj=None):
        return False  # revoked tokens stay listed: who created which token, and when it stopped working

    def add_view(self, request, form_url="", extra_context=None):
        """The "create token" flow: a short form, then one page that shows the secret, never again."""
        if not self.has_add_permission(request):
            raise PermissionDenied
        form = ApiTokenCreateForm(request.POST or None)
        context = {**self.admin_site.each_context(request), "opts": self.opts, "form": form}
        context["title"] = "Create API token"
        if request.method == "POST" and form.is_valid():
            data = form.cleaned_data
            token, secret = services.api_token_create(data["site"], data["name"], by=request.user,
                                                      purpose=data["purpose"])
            self.log_addition(request, token, [{"added": {}}])
            context.update(title="API token created", token=token, secret=secret)
            if token.purpose == ApiToken.Purpose.CALENDAR:
                context["calendar_link"] = calendar_link(token, secret, request.build_absolute_uri("/"))
            return TemplateResponse(request, "api/token_created.html", context)
        return TemplateResponse(request, "api/token_create.html", context)

    @admin.action(description="Revoke the selected tokens")
    def revoke(self, request, queryset):
        revoked = [services.api_token_revoke(token) for token in queryset.filter(revoked_at__isnull=True)]
        for token in revoked:
            self.log_change(request, token, "Revoked.")
        self.message_user(request, f"{len(revoked)} token(s) revoked; they are refused from now on.", messages.SUCCESS)
