"""Sign-in with limits on repeated failures (OWASP Authentication Cheat Sheet, "Login Throttling").

Failed sign-ins are counted within ``WINDOW_S`` of the first one, in two ways:

- per client address and user name: after ``MAX_FAILURES`` further attempts for that pair are refused
  without checking the password, until the window has passed;
- per client address: after ``MAX_ADDRESS_FAILURES`` every sign-in from that address is refused, so one
  address cannot try a few passwords on each of many user names.

Nothing is counted per user name alone, not even as a slowdown: anyone anywhere could then keep a person (the
administrator too) out of their own account by guessing wrong under their name, the denial of service the
cheat sheet warns account lockout brings; and a delay would hold a web process per attempt. So the right
password from an address that has not failed is never refused. Guessing one password from many addresses is
met by the password rules (``AUTH_PASSWORD_VALIDATORS``), not here.

The client address is ``REMOTE_ADDR``, or, behind ``settings.TRUSTED_PROXIES`` reverse proxies (environment
``OBSOPS_TRUSTED_PROXIES``), the address in ``X-Forwarded-For`` that many hops from the right: each proxy
appends the address it saw, so that one was written by the outermost trusted proxy, while entries further
left come from the client and could be anything. An IPv6 client counts by its /64 network, the block one
end site is given (RFC 4291, section 2.5.4: 64-bit interface identifiers), or it could move to a new
address for each guess.

The counts live in Django's cache (the default in-process cache on one machine; Redis when several web
processes serve the site, see README "Deployment"). When the cache fails, sign-in goes on without the limit
and a warning is logged: Redis being down must not keep everyone out.
"""
from __future__ import annotations

import hashlib
import ipaddress
import logging

from django.conf import settings
from django.contrib.auth.views import LoginView
from django.core.cache import cache
from django.shortcuts import render

log = logging.getLogger(__name__)

MAX_FAILURES = 5
MAX_ADDRESS_FAILURES = 20
WINDOW_S = 15 * 60


def client_address(request) -> str:
    """The address the sign-in came from: see the module's docstring."""
    remote = request.META.get("REMOTE_ADDR", "")
    hops = settings.TRUSTED_PROXIES
    forwarded = request.META.get("HTTP_X_FORWARDED_FOR", "")
    if not hops:
        if forwarded:
            log.warning("sign-in through a proxy (X-Forwarded-For is set) while OBSOPS_TRUSTED_PROXIES is 0: "
                        "failed sign-ins are counted against the proxy's address %s", remote)
        return remote
    chain = [entry.strip() for entry in forwarded.split(",") if entry.strip()]
    if len(chain) < hops:
        # Not passed through every trusted proxy: nothing in the header can be trusted.
        return remote
    return chain[-hops]


def _counted(address: str) -> str:
    try:
        ip = ipaddress.ip_address(address)
    except ValueError:
        return address
    if ip.version == 4:
        return str(ip)
    if ip.ipv4_mapped:  # an IPv4 client seen by a dual-stack proxy
        return str(ip.ipv4_mapped)
    return str(ipaddress.ip_network(f"{ip}/64", strict=False))


def _keys(request) -> tuple[str, str]:
    """The cache keys of (address and user name, address)."""
    address = _counted(client_address(request))
    username = request.POST.get("username", "").strip().lower()
    pair = hashlib.sha256(f"{username}|{address}".encode()).hexdigest()
    return f"login-failures:{pair}", f"login-failures-address:{hashlib.sha256(address.encode()).hexdigest()}"


def _cache_failed(what: str, exc: Exception) -> None:
    log.warning("sign-in limit not applied: could not %s the failed sign-ins in the cache (%s: %s)",
                what, type(exc).__name__, exc)


#: What a signed-in person whose account cannot open the admin is told there, in place of a sign-in form that
#: reads as if they had been signed out (a technician's review): Django's admin sends them to sign in again.
ADMIN_NOT_ALLOWED = (
    "The admin pages (the register, service plans, isolation points, parts and people) are for engineers and "
    "administrators whose accounts have staff status. Yours does not: an administrator of the site can give it "
    "another role, or sign out and sign in with an account that has it."
)


class LimitedLoginView(LoginView):
    def get(self, request, *args, **kwargs):
        if (request.user.is_authenticated and not request.user.is_staff
                and self.get_redirect_url().startswith("/admin/")):
            return render(request, "403.html", {"reason": ADMIN_NOT_ALLOWED}, status=403)
        return super().get(request, *args, **kwargs)

    def post(self, request, *args, **kwargs):
        pair_key, address_key = self._keys = _keys(request)
        try:
            counts = cache.get_many([pair_key, address_key])
        except Exception as exc:  # any cache backend's error: Redis raises its own, none share a base
            _cache_failed("read", exc)
            self._keys = None  # the cache is not answering: do not wait on it again for this request
            return super().post(request, *args, **kwargs)
        wait = f"Wait {WINDOW_S // 60} minutes"
        if counts.get(pair_key, 0) >= MAX_FAILURES:
            return self._refused(f"Too many failed sign-ins for this user from this address. {wait} and try "
                                 "again; if the password is forgotten, an administrator sets a new one meanwhile, "
                                 "to use once the wait is over.")
        if counts.get(address_key, 0) >= MAX_ADDRESS_FAILURES:
            return self._refused(f"Too many failed sign-ins from this address, under any user name. {wait}.")
        return super().post(request, *args, **kwargs)

    def _refused(self, message: str):
        # The user name tried, so an operator can tell a forgotten password from guessing (an operator review).
        log.warning("sign-in refused for %r from %s: %s", self.request.POST.get("username", "")[:150],
                    client_address(self.request), message)
        form = self.get_form()
        form.errors.clear()
        form.add_error(None, message)
        return self.render_to_response(self.get_context_data(form=form, locked=True), status=429)

    def form_invalid(self, form):
        if self._keys:
            try:
                for key in self._keys:
                    cache.add(key, 0, WINDOW_S)
                    cache.incr(key)
            except Exception as exc:  # as in post()
                _cache_failed("count", exc)
        return super().form_invalid(form)

    def form_valid(self, form):
        # Only the pair's count: signing in to one account must not clear what an address did to others.
        if self._keys:
            try:
                cache.delete(self._keys[0])
            except Exception as exc:  # as in post()
                _cache_failed("clear", exc)
        return super().form_valid(form)
