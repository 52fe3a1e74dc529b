"""The roles, in rising order of what they may do.

- viewer: reads every page.
- technician: also logs service work, readings and nightly usage, and works on work orders.
- engineer: also edits the register (sites, telescopes, subsystems) and service plans, issues work orders.
- administrator: also manages people and API tokens. A Django superuser counts as administrator.

Each role is a Django group of the same name (created by this app's migration).
"""
from __future__ import annotations

VIEWER = "viewer"
TECHNICIAN = "technician"
ENGINEER = "engineer"
ADMINISTRATOR = "administrator"
ROLES = (VIEWER, TECHNICIAN, ENGINEER, ADMINISTRATOR)
_RANK = {name: rank for rank, name in enumerate(ROLES)}


def role_of(user) -> str | None:
    """The highest role a user holds, or None for anonymous users and users in no role group."""
    if not getattr(user, "is_authenticated", False) or not user.is_active:
        return None
    if user.is_superuser:
        return ADMINISTRATOR
    cached = getattr(user, "_obsops_role", False)
    if cached is not False:
        return cached
    role = highest_role(user.groups.values_list("name", flat=True))
    user._obsops_role = role
    return role


def highest_role(group_names) -> str | None:
    """The highest of the roles among a user's group names, or None when none of them is a role."""
    names = set(group_names)
    held = [r for r in ROLES if r in names]
    return held[-1] if held else None


def has_role(user, needed: str) -> bool:
    """True when the user's role is ``needed`` or above."""
    role = role_of(user)
    return role is not None and _RANK[role] >= _RANK[needed]


def holders_of(needed: str):
    """The active users whose role is ``needed`` or above, as a query (superusers included)."""
    from django.contrib.auth import get_user_model
    from django.db.models import Q

    names = ROLES[_RANK[needed]:]
    return get_user_model().objects.filter(Q(groups__name__in=names) | Q(is_superuser=True), is_active=True).distinct()
