"""Sign-in limits behind a reverse proxy: failures count per client address and user name, and per client
address, never per user name alone, so nobody can keep a person out of their own account (OWASP
Authentication Cheat Sheet, "Login Throttling": account lockout lets an attacker deny users their accounts).

The client addresses are from the documentation blocks of RFC 5737 (IPv4) and RFC 3849 (IPv6).
"""
from __future__ import annotations

import socket

import pytest
from django.core.cache import cache

from observatory_ops.access.login import MAX_ADDRESS_FAILURES, MAX_FAILURES

PROXY = "127.0.0.1"  # the README's reverse proxy, on the same machine as gunicorn
ATTACKER, ADMINISTRATOR, COLLEAGUE = "203.0.113.66", "198.51.100.7", "192.0.2.40"
RIGHT = {"administrator": "pw-administrator-123456", "engineer": "pw-engineer-123456", "viewer": "pw-viewer-123456"}


@pytest.fixture(autouse=True)
def _empty_cache():
    cache.clear()
    yield
    cache.clear()


@pytest.fixture
def one_proxy(settings):
    settings.TRUSTED_PROXIES = 1


def sign_in(client, username: str, password: str, forwarded_for: str | None = None, remote: str = PROXY):
    """A sign-in as gunicorn sees it: from ``remote``, with the proxy's X-Forwarded-For when given."""
    extra = {"REMOTE_ADDR": remote}
    if forwarded_for is not None:
        extra["HTTP_X_FORWARDED_FOR"] = forwarded_for
    return client.post("/login/", {"username": username, "password": password}, **extra)


def test_wrong_guesses_from_one_address_do_not_lock_the_administrator_out_from_another(users, client, one_proxy):
    for _ in range(MAX_FAILURES + 3):
        sign_in(client, "administrator", "guess", forwarded_for=ATTACKER)
    assert sign_in(client, "administrator", RIGHT["administrator"], forwarded_for=ATTACKER).status_code == 429
    assert sign_in(client, "administrator", RIGHT["administrator"], forwarded_for=ADMINISTRATOR).status_code == 302


def test_the_right_password_from_an_address_that_has_not_failed_is_never_refused(users, client, one_proxy):
    """Wrong guesses for one user name from many addresses, each up to its own limit: still no lockout."""
    for attacker in range(1, 40):
        for _ in range(MAX_FAILURES):
            assert sign_in(client, "administrator", "guess", forwarded_for=f"203.0.113.{attacker}").status_code == 200
    assert sign_in(client, "administrator", RIGHT["administrator"], forwarded_for=ADMINISTRATOR).status_code == 302


def test_one_address_trying_many_user_names_is_stopped_for_every_name(users, client, one_proxy):
    """A few guesses at each of many names stay under the per-name limit; the per-address limit ends them."""
    for attempt in range(MAX_ADDRESS_FAILURES):
        assert sign_in(client, f"name-{attempt}", "guess", forwarded_for=ATTACKER).status_code == 200
    refused = sign_in(client, "engineer", RIGHT["engineer"], forwarded_for=ATTACKER)
    assert refused.status_code == 429
    assert b"Too many failed sign-ins from this address, under any user name. Wait 15 minutes." in refused.content
    assert sign_in(client, "engineer", RIGHT["engineer"], forwarded_for=COLLEAGUE).status_code == 302


def test_a_good_sign_in_does_not_clear_what_its_address_did_to_other_names(users, client, one_proxy):
    for attempt in range(MAX_ADDRESS_FAILURES - 1):
        sign_in(client, f"name-{attempt}", "guess", forwarded_for=ATTACKER)
    assert sign_in(client, "viewer", RIGHT["viewer"], forwarded_for=ATTACKER).status_code == 302
    client.logout()
    sign_in(client, "another-name", "guess", forwarded_for=ATTACKER)
    assert sign_in(client, "viewer", RIGHT["viewer"], forwarded_for=ATTACKER).status_code == 429


def test_an_address_the_client_writes_itself_into_the_header_changes_nothing(users, client, one_proxy):
    """The proxy appends the address it saw; what the client sent before it is the client's own word."""
    for fake in range(MAX_FAILURES):
        sign_in(client, "administrator", "guess", forwarded_for=f"10.0.0.{fake}, {ATTACKER}")
    assert sign_in(client, "administrator", RIGHT["administrator"],
                   forwarded_for=f"10.9.9.9, {ATTACKER}").status_code == 429


def test_without_trusted_proxies_the_header_is_ignored(users, client, settings):
    """OBSOPS_TRUSTED_PROXIES unset (0): gunicorn faces the clients itself, and anyone may send the header."""
    assert settings.TRUSTED_PROXIES == 0
    for fake in range(MAX_FAILURES):
        sign_in(client, "viewer", "guess", forwarded_for=f"10.0.0.{fake}", remote=ATTACKER)
    assert sign_in(client, "viewer", RIGHT["viewer"], forwarded_for=ADMINISTRATOR, remote=ATTACKER).status_code == 429
    assert sign_in(client, "viewer", RIGHT["viewer"], remote=COLLEAGUE).status_code == 302


def test_behind_two_proxies_the_address_two_hops_from_the_right_counts(users, client, settings):
    settings.TRUSTED_PROXIES = 2
    for _ in range(MAX_FAILURES):
        sign_in(client, "viewer", "guess", forwarded_for=f"10.0.0.1, {ATTACKER}, 192.0.2.250")
    assert sign_in(client, "viewer", RIGHT["viewer"], forwarded_for=f"{ATTACKER}, 192.0.2.251").status_code == 429
    assert sign_in(client, "viewer", RIGHT["viewer"], forwarded_for=f"{ATTACKER}, {ADMINISTRATOR}, 192.0.2.250",
                   ).status_code == 302


def test_an_ipv6_client_counts_by_its_64_bit_network(users, client, one_proxy):
    """An end site gets a /64 (RFC 4291, section 2.5.4: 64-bit interface identifiers), so a client could take a
    new address in it for every guess."""
    for host in range(1, MAX_FAILURES + 1):
        sign_in(client, "viewer", "guess", forwarded_for=f"2001:db8:1:2::{host:x}")
    assert sign_in(client, "viewer", RIGHT["viewer"], forwarded_for="2001:db8:1:2::ffff").status_code == 429
    assert sign_in(client, "viewer", RIGHT["viewer"], forwarded_for="2001:db8:1:3::1").status_code == 302


@pytest.fixture
def cache_server_down(settings):
    """The cache on Redis, at a loopback port held by a socket that does not listen: every connection is
    refused, as when the Redis server is stopped."""
    with socket.socket() as closed:
        closed.bind(("127.0.0.1", 0))
        port = closed.getsockname()[1]
        settings.CACHES = {"default": {"BACKEND": "django.core.cache.backends.redis.RedisCache",
                                       "LOCATION": f"redis://127.0.0.1:{port}/0"}}
        yield


def test_sign_in_goes_on_with_a_warning_when_the_cache_is_down(users, client, cache_server_down, caplog):
    from django.core.cache import cache as unreachable

    with pytest.raises(Exception, match="Connection refused|Error 111"):
        unreachable.get("anything")
    assert sign_in(client, "viewer", "guess", remote=ATTACKER).status_code == 200
    assert sign_in(client, "viewer", RIGHT["viewer"], remote=ADMINISTRATOR).status_code == 302
    assert "sign-in limit not applied: could not read the failed sign-ins in the cache (ConnectionError" in caplog.text


def test_the_number_of_trusted_proxies_comes_from_the_environment():
    import os
    import subprocess
    import sys

    script = "from django.conf import settings; print(settings.TRUSTED_PROXIES)"
    env = {**os.environ, "DJANGO_SETTINGS_MODULE": "observatory_ops.settings"}
    env.pop("OBSOPS_TRUSTED_PROXIES", None)
    run = subprocess.run([sys.executable, "-c", script], env=env, capture_output=True, text=True, check=True)
    assert run.stdout.strip() == "0"
    run = subprocess.run([sys.executable, "-c", script], env={**env, "OBSOPS_TRUSTED_PROXIES": "1"},
                         capture_output=True, text=True, check=True)
    assert run.stdout.strip() == "1"
    run = subprocess.run([sys.executable, "-c", script], env={**env, "OBSOPS_TRUSTED_PROXIES": "one"},
                         capture_output=True, text=True, check=False)
    assert run.returncode != 0
    assert "OBSOPS_TRUSTED_PROXIES must be a whole number of 0 or more, not 'one'." in run.stderr
