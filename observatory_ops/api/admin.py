"""API tokens in the admin, for administrators only: create (the secret is shown once, and a calendar token's
subscription link with it), list, revoke.

Nothing here edits or deletes a token: a token that should stop working is revoked, and stays listed.
"""
from django.contrib import admin, messages
from django.core.exceptions import PermissionDenied
from django.shortcuts import get_object_or_404, redirect
from django.template.response import TemplateResponse
from django.urls import path, reverse
from simple_history.admin import SimpleHistoryAdmin

from observatory_ops.access.roles import ADMINISTRATOR, has_role

from . import services
from .forms import ApiTokenCreateForm
from .models import ApiToken
from .selectors import calendar_link


def _at_site(token: ApiToken, when) -> str:
    """A time of a token as its site's pages give times: the site's local time, the zone named."""
    return f"{when.astimezone(token.site.zone):%d %b %Y %H:%M} ({token.site.time_zone})" if when else ""


#: The session key under which a new token's secret waits for the page that shows it once.
SHOWN_ONCE = "api_token_shown_once"


@admin.register(ApiToken)
class ApiTokenAdmin(SimpleHistoryAdmin):
    list_display = ("name", "site", "purpose", "shown_prefix", "created", "created_by", "last_used", "revoked")
    list_select_related = ("site", "created_by")
    list_filter = ("site", "purpose", ("revoked_at", admin.EmptyFieldListFilter))
    fields = ("site", "name", "purpose", "shown_prefix", "created_at", "created_by", "last_used_at", "revoked_at")
    readonly_fields = fields
    actions = ["revoke"]

    @admin.display(description="created (site time)", ordering="created_at")
    def created(self, token: ApiToken) -> str:
        return _at_site(token, token.created_at)

    @admin.display(description="last used (site time)", ordering="last_used_at")
    def last_used(self, token: ApiToken) -> str:
        return _at_site(token, token.last_used_at) or "never"

    @admin.display(description="revoked (site time)", ordering="revoked_at")
    def revoked(self, token: ApiToken) -> str:
        return _at_site(token, token.revoked_at)

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
        """The "create token" flow: a short form, then one page that shows the secret, never again. The secret goes
        to that page through the session and is taken out there, so reloading it neither shows the secret again nor
        (as a form sent again would) creates a second token."""
        if not self.has_add_permission(request):
            raise PermissionDenied
        form = ApiTokenCreateForm(request.POST or None)
        if request.method == "POST" and form.is_valid():
            data = form.cleaned_data
            token, secret = services.api_token_create(data["site"], data["name"], by=request.user,
                                                      purpose=data["purpose"])
            self.log_addition(request, token, [{"added": {}}])
            request.session[SHOWN_ONCE] = {"token": token.pk, "secret": secret}
            return redirect(reverse("admin:api_apitoken_created", args=[token.pk]))
        context = {**self.admin_site.each_context(request), "opts": self.opts, "form": form,
                   "title": "Create API token"}
        return TemplateResponse(request, "api/token_create.html", context)

    def get_urls(self):
        created = path("<int:pk>/created/", self.admin_site.admin_view(self.created_view), name="api_apitoken_created")
        return [created, *super().get_urls()]

    def created_view(self, request, pk):
        """The secret of the token just created, once: taken out of the session as it is shown."""
        if not self.has_add_permission(request):
            raise PermissionDenied
        token = get_object_or_404(ApiToken.objects.select_related("site"), pk=pk)
        kept = request.session.get(SHOWN_ONCE) or {}
        secret = request.session.pop(SHOWN_ONCE)["secret"] if kept.get("token") == token.pk else ""
        context = {**self.admin_site.each_context(request), "opts": self.opts, "title": "API token created",
                   "token": token, "secret": secret}
        if secret and token.purpose == ApiToken.Purpose.CALENDAR:
            context["calendar_link"] = calendar_link(token, secret, request.build_absolute_uri("/"))
        return TemplateResponse(request, "api/token_created.html", context)

    @admin.action(description="Revoke the selected tokens")
    def revoke(self, request, queryset):
        revoked = [services.api_token_revoke(token) for token in queryset.filter(revoked_at__isnull=True)]
        for token in revoked:
            self.log_change(request, token, "Revoked.")
        self.message_user(request, f"{len(revoked)} token(s) revoked; they are refused from now on.", messages.SUCCESS)
