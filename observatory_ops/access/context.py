"""Template context: the signed-in user's role and what it allows, for showing or hiding buttons."""
from .roles import ADMINISTRATOR, ENGINEER, TECHNICIAN, has_role, role_of


def roles(request):
    user = getattr(request, "user", None)
    return {
        "user_role": role_of(user) if user else None,
        "can_log": bool(user) and has_role(user, TECHNICIAN),
        "can_edit": bool(user) and has_role(user, ENGINEER),
        "can_administer": bool(user) and has_role(user, ADMINISTRATOR),
    }
