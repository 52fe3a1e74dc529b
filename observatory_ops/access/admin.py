"""The admin's list of people shows each one's role (``roles.role_of``) and filters by it."""
from django.contrib import admin
from django.contrib.auth import get_user_model
from django.contrib.auth.admin import UserAdmin
from django.db.models import Q

from .roles import ADMINISTRATOR, ROLES, highest_role

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


@admin.register(User)
class PersonAdmin(UserAdmin):
    list_display = ("username", "first_name", "last_name", "email", "role", "is_staff", "is_active")
    list_filter = (RoleFilter, "is_staff", "is_superuser", "is_active")

    def get_queryset(self, request):
        return super().get_queryset(request).prefetch_related("groups")

    @admin.display(description="role")
    def role(self, user) -> str:
        """As ``roles.role_of`` reads it, from the groups fetched with the list (shown for inactive people too)."""
        if user.is_superuser:
            return ADMINISTRATOR
        return highest_role(group.name for group in user.groups.all()) or "–"
