"""What each role may do in the Django admin, kept in step with the roles after every migrate.

Pages check roles with ``requires``; the admin checks Django model permissions, so each role group gets
the permissions below. A person also needs "staff status" to open the admin (the demo gives it to the
engineer and the administrator).
"""
from __future__ import annotations

from .roles import ADMINISTRATOR, ENGINEER, TECHNICIAN, VIEWER

_OURS = ("registry", "logbook", "planning", "workorders", "mirrors", "api")
#: Models an engineer adds and changes in the admin (the register, plans, parts, mirrors). No deletes but
#: those below: subsystems are retired, records are append-only.
_ENGINEER_EDITS = {
    "registry": ("site", "telescope", "subsystem", "crewdayoff"),
    "planning": ("serviceplan", "trigger", "bookedrun", "closure"),
    "workorders": ("part", "isolationpoint", "energycontrolinspection"),
    "mirrors": ("mirror", "coatingevent", "cleaningevent"),
}
#: What an engineer deletes: a crew day off or a closure listed by mistake or called off is a setting, not a record;
#: a night stored by mistake (sent under the wrong telescope, a test telescope's) is removed with a reason and its
#: site recomputed (``logbook.services.nights_remove``). The history keeps them all the same.
_ENGINEER_DELETES = {"registry": ("crewdayoff",), "logbook": ("nightusage",), "planning": ("closure",)}


def role_permissions(role: str, all_permissions) -> list:
    """The Permission rows a role group holds, chosen from ``all_permissions``."""
    view = [p for p in all_permissions if p.content_type.app_label in _OURS and p.codename.startswith("view_")]
    if role in (VIEWER, TECHNICIAN):
        return view
    if role == ENGINEER:
        edits = [
            p for p in all_permissions
            if p.content_type.model in _ENGINEER_EDITS.get(p.content_type.app_label, ())
            and p.codename.split("_", 1)[0] in ("add", "change")
            or p.content_type.model in _ENGINEER_DELETES.get(p.content_type.app_label, ())
            and p.codename.startswith("delete_")
        ]
        return view + edits
    if role == ADMINISTRATOR:
        return [p for p in all_permissions if p.content_type.app_label in (*_OURS, "auth")]
    return []


def sync_role_permissions(**kwargs) -> None:
    """post_migrate handler: give each role group its permissions (idempotent)."""
    from django.contrib.auth.models import Group, Permission

    from .roles import ROLES

    everything = list(Permission.objects.select_related("content_type"))
    for role in ROLES:
        group, _ = Group.objects.get_or_create(name=role)
        group.permissions.set(role_permissions(role, everything))
