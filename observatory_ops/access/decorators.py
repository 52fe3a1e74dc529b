"""``requires(role)``: the one way a view declares who may use it.

Anonymous users are sent to the login page; signed-in users below the role get 403 with a page that
says which role is needed. The role is kept on the view as ``required_role`` so a test can walk every
URL and check that each view declares one. ``posted_only``: what a button's address answers a visit.
"""
from __future__ import annotations

from functools import wraps

from django.contrib import messages
from django.contrib.auth.views import redirect_to_login
from django.http import HttpResponseNotAllowed
from django.shortcuts import redirect, render

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


#: What a visit to a button's address is told (``posted_only``).
VISITED_A_BUTTON = ("That address belongs to a button (a reloaded page of questions, or its address opened again), so "
                    "nothing was done: here is the page it belongs to.")


def posted_only(request, back: str):
    """None for a POST; otherwise the answer to give: for a visit (GET or HEAD: a page of questions reloaded, or its
    address opened again) a redirect to ``back``, the page the button belongs to, saying nothing was done (an
    onboarding review reloaded "Before this order is issued" and got a blank 405 page with no way back); for any other
    method, 405."""
    if request.method == "POST":
        return None
    if request.method in ("GET", "HEAD"):
        if request.method == "GET":  # a HEAD (a link's preview) leaves no note for the person's next page
            messages.info(request, VISITED_A_BUTTON)
        return redirect(back)
    return HttpResponseNotAllowed(["POST"])
