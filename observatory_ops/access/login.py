"""Sign-in with a limit on repeated failures.

After ``MAX_FAILURES`` failed sign-ins for one user name from one address within ``WINDOW_S``, further
attempts for that pair are refused without checking the password until the window has passed. The
counts live in Django's cache (the default in-process cache on one machine; point CACHES at Redis when
several web processes serve the site, see README "Deployment").
"""
from __future__ import annotations

import hashlib

from django.contrib.auth.views import LoginView
from django.core.cache import cache

MAX_FAILURES = 5
WINDOW_S = 15 * 60


def _key(request, username: str) -> str:
    address = request.META.get("REMOTE_ADDR", "")
    digest = hashlib.sha256(f"{username.strip().lower()}|{address}".encode()).hexdigest()
    return f"login-failures:{digest}"


class LimitedLoginView(LoginView):
    def post(self, request, *args, **kwargs):
        key = _key(request, request.POST.get("username", ""))
        if cache.get(key, 0) >= MAX_FAILURES:
            form = self.get_form()
            form.errors.clear()
            form.add_error(
                None,
                f"Too many failed sign-ins for this user from this address. Wait {WINDOW_S // 60} minutes, "
                "or ask an administrator to reset the password.",
            )
            return self.render_to_response(self.get_context_data(form=form, locked=True), status=429)
        return super().post(request, *args, **kwargs)

    def form_invalid(self, form):
        key = _key(self.request, self.request.POST.get("username", ""))
        cache.add(key, 0, WINDOW_S)
        cache.incr(key)
        return super().form_invalid(form)

    def form_valid(self, form):
        cache.delete(_key(self.request, self.request.POST.get("username", "")))
        return super().form_valid(form)
