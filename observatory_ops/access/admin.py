"""The admin's list of people shows each one's role (``roles.role_of``) and filters by it; a person named on records
is kept, with a message saying why and what to do instead (``PersonAdmin``)."""
from django.contrib import admin, messages
from django.contrib.admin import actions as admin_actions
from django.contrib.admin.utils import unquote
from django.contrib.auth import get_user_model
from django.contrib.auth.admin import UserAdmin
from django.db.models import Q
from django.shortcuts import redirect
from django.urls import reverse

from observatory_ops.archive.history import person

from .roles import ADMINISTRATOR, ROLES, highest_role
from .selectors import records_naming

User = get_user_model()


class RoleFilter(admin.SimpleListFilter):
    """By role: the highest role group a person is in (a superuser is an administrator), or none."""

    title = "role"
    parameter_name = "role"
    NONE = "none"

    def lookups(self, request, model_admin):
        return [*((role, role) for role in ROLES), (self.NONE, "no role")]

    def queryset(self, request, queryset):
        value = self.value()
        if value is None:
            return queryset
        if value == self.NONE:
            return queryset.exclude(Q(is_superuser=True) | Q(groups__name__in=ROLES))
        if value == ADMINISTRATOR:
            return queryset.filter(Q(is_superuser=True) | Q(groups__name=ADMINISTRATOR)).distinct()
        if value not in ROLES:
            return queryset.none()
        higher = ROLES[ROLES.index(value) + 1:]
        above = queryset.filter(Q(is_superuser=True) | Q(groups__name__in=higher)).values("pk")
        return queryset.filter(groups__name=value).exclude(pk__in=above).distinct()


admin.site.unregister(User)


def kept_on_records(people) -> str:
    """Why ``people`` are not deleted, naming each one named on records and what they are named on ("Ana Ruiz (ana)
    is named on 3 service records and 1 work order"), and what to do instead; "" when none is named on any. The
    records keep who did what, and their keys refuse the deletion (``selectors.protecting_fields``): without this
    the admin said it would delete those records but lacked the permission, when nothing would have been deleted."""
    named = records_naming([p.pk for p in people])
    kept = [p for p in people if p.pk in named]
    if not kept:
        return ""
    listed = "; ".join(f"{person(p)} ({p.username}) is named on {named[p.pk]}" for p in kept)
    text = (f"{listed}. A person named on records stays on them and is not deleted: untick Active on "
            f"{'their page' if len(kept) == 1 else 'each one’s page'} instead, so they can no longer sign in.")
    if len(kept) < len(people):
        text += " Nobody was deleted: tick the others again to delete them."
    return text


@admin.register(User)
class PersonAdmin(UserAdmin):
    list_display = ("username", "first_name", "last_name", "email", "role", "is_staff", "is_active")
    list_filter = (RoleFilter, "is_staff", "is_superuser", "is_active")
    actions = ["delete_selected"]

    def delete_view(self, request, object_id, extra_context=None):
        user = self.get_object(request, unquote(object_id))
        refusal = kept_on_records([user]) if user is not None and self.has_delete_permission(request, user) else ""
        if refusal:
            self.message_user(request, refusal, messages.ERROR)
            return redirect(reverse("admin:auth_user_change", args=[user.pk]))
        return super().delete_view(request, object_id, extra_context)

    @admin.action(permissions=["delete"], description=admin_actions.delete_selected.short_description)
    def delete_selected(self, request, queryset):
        """Django's own deletion of the people ticked, unless any is named on records (``kept_on_records``)."""
        refusal = kept_on_records(list(queryset))
        if refusal:
            self.message_user(request, refusal, messages.ERROR)
            return None
        return admin_actions.delete_selected(self, request, queryset)

    def get_queryset(self, request):
        return super().get_queryset(request).prefetch_related("groups")

    @admin.display(description="role")
    def role(self, user) -> str:
        """As ``roles.role_of`` reads it, from the groups fetched with the list (shown for inactive people too)."""
        if user.is_superuser:
            return ADMINISTRATOR
        return highest_role(group.name for group in user.groups.all()) or "–"
