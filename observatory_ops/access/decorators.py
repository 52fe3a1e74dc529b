"""``requires(role)``: the one way a view declares who may use it.

Anonymous users are sent to the login page; signed-in users below the role get 403 with a page that
says which role is needed. The role is kept on the view as ``required_role`` so a test can walk every
URL and check that each view declares one.
"""
from __future__ import annotations

from functools import wraps

from django.contrib.auth.views import redirect_to_login
from django.shortcuts import render

from .roles import ROLES, has_role


def requires(role: str):
    if role not in ROLES:
        raise ValueError(f"unknown role {role!r}; roles are {', '.join(ROLES)}")

    def decorate(view):
        @wraps(view)
        def guarded(request, *args, **kwargs):
            if not request.user.is_authenticated:
                return redirect_to_login(request.get_full_path())
            if not has_role(request.user, role):
                return render(request, "access/forbidden.html", {"needed": role}, status=403)
            return view(request, *args, **kwargs)

        guarded.required_role = role
        return guarded

    return decorate
