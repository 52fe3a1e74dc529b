"""Load on loopback: gunicorn serving observatory_ops on PostgreSQL, 50 signed-in clients for 60 s.

Run from the repository root (needs the PostgreSQL server binaries, Debian package ``postgresql``):

    python benchmarks/load_test.py [--seconds 60] [--clients 50] [--workers 3] [--threads 1] [--database-url URL]

It starts a private, throw-away PostgreSQL cluster on 127.0.0.1 (``pg_private.py``: durability off)
unless ``--database-url`` names an empty PostgreSQL database, loads the demo into it (as ``python
manage.py demo --no-serve`` does), creates an API token for the demo site and a work order from four of
its due items, collects the static files (DEBUG is off), and starts gunicorn on 127.0.0.1 on a free
port with ``observatory_ops.wsgi`` and the deployment's settings: DEBUG=0, a fresh SECRET_KEY,
ALLOWED_HOSTS=127.0.0.1, and SECURE_SSL_REDIRECT=0 because it is plain HTTP on loopback with no HTTPS
proxy in front. The clients are threads using ``http.client``; each signs in through /login/ with the
CSRF token as the demo viewer, in its own session (the sign-in limit counts failures only), before the
clock starts. (Over plain HTTP the clients send back the session cookie that the server marks Secure; a
browser would not.) Then each client, until the time is up, requests in turn:

- the due list, ``GET /due/``;
- the work-order page, ``GET /workorders/<id>/``;
- the ingest API, ``POST /api/v1/sites/<slug>/nights`` with the Bearer token: one of the last 28
  logged nights with new figures, so each post updates a night and recomputes the site.

Target (issue 7): no errors. An error is any answer outside 2xx/3xx, or an exception (refused, reset,
timed out); the first few are printed. Also printed, per endpoint and overall: requests served,
requests per second, the median and the 95th percentile. Everything started here is stopped at the end.
"""
from __future__ import annotations

import argparse
import contextlib
import http.client
import io
import json
import os
import random
import re
import shutil
import signal
import subprocess
import sys
import tempfile
import threading
import time
import urllib.parse
from dataclasses import dataclass, field
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from benchmarks.pg_private import (  # noqa: E402
    ROOT,
    collect_static,
    free_port,
    milliseconds,
    private_cluster,
    production_environment,
    verdict,
)

HOST = "127.0.0.1"
REQUEST_TIMEOUT_S = 60.0
RECENT_NIGHTS = 28
ENDPOINTS = ("due list", "work-order page", "ingest API")
ERRORS_SHOWN = 5


@dataclass
class Target:
    """What the clients need to know about the loaded server."""

    port: int
    username: str
    password: str
    order_path: str
    nights_path: str
    token: str
    nights: list[str]


@dataclass
class Outcome:
    endpoint: str
    seconds: float
    status: int | None
    error: str | None


@dataclass
class Session:
    """One signed-in client: its own cookies, one HTTP connection per request."""

    port: int
    cookies: dict[str, str] = field(default_factory=dict)

    def request(self, method: str, path: str, body: bytes | None = None,
                headers: dict[str, str] | None = None) -> tuple[int, bytes]:
        connection = http.client.HTTPConnection(HOST, self.port, timeout=REQUEST_TIMEOUT_S)
        try:
            sent = {"Connection": "close", **(headers or {})}
            if self.cookies:
                sent["Cookie"] = "; ".join(f"{name}={value}" for name, value in self.cookies.items())
            connection.request(method, path, body=body, headers=sent)
            response = connection.getresponse()
            data = response.read()
            for cookie in response.headers.get_all("Set-Cookie") or []:
                name, _, rest = cookie.partition("=")
                self.cookies[name.strip()] = rest.split(";", 1)[0]
            return response.status, data
        finally:
            connection.close()

    def sign_in(self, username: str, password: str) -> None:
        status, page = self.request("GET", "/login/")
        found = re.search(rb'name="csrfmiddlewaretoken" value="([^"]+)"', page)
        if status != 200 or not found:
            raise RuntimeError(f"GET /login/ answered {status} without a CSRF token")
        form = urllib.parse.urlencode(
            {"username": username, "password": password, "csrfmiddlewaretoken": found.group(1).decode(), "next": "/"}
        ).encode()
        status, _ = self.request("POST", "/login/", form, {"Content-Type": "application/x-www-form-urlencoded"})
        if status != 302 or "sessionid" not in self.cookies:
            raise RuntimeError(f"sign-in answered {status} without a session")


# --- the server ----------------------------------------------------------------------------------------------


def load_demo() -> dict:
    """Demo, API token and a work order in the database of DATABASE_URL; returns what the clients need."""
    import django

    django.setup()
    from django.contrib.auth.models import User
    from django.core.management import call_command
    from django.db import connection, connections

    if connection.vendor != "postgresql":
        raise SystemExit("the load test runs on PostgreSQL: give a postgres:// --database-url")
    from fixtures_demo import generator
    from observatory_ops.api.services import api_token_create
    from observatory_ops.logbook.models import NightUsage
    from observatory_ops.planning.models import PlanStatus
    from observatory_ops.registry.models import Site
    from observatory_ops.workorders.services import work_order_from_due

    started = time.perf_counter()
    call_command("demo", no_serve=True, stdout=io.StringIO())
    collect_static()
    site = Site.objects.get(slug=generator.SITE_SLUG)
    _, token = api_token_create(site, "load test")
    due = PlanStatus.objects.filter(site=site).exclude(status="later").select_related("plan").order_by("urgency")
    plans = [status.plan for status in due[:4]]
    order = work_order_from_due(plans, User.objects.get(username="engineer"))
    nights = list(NightUsage.objects.filter(site=site).order_by("-night").values_list("night", flat=True))
    username, _, _, password = next(user for user in generator.DEMO_USERS if user[1] == "viewer")
    facts = {
        "username": username, "password": password, "order_path": order.get_absolute_url(),
        "nights_path": f"/api/v1/sites/{site.slug}/nights", "token": token,
        "nights": [night.isoformat() for night in nights[:RECENT_NIGHTS]],
        "stored_nights": NightUsage.objects.filter(site=site).count(),
    }
    print(f"demo loaded (Vestal Ridge, {facts['stored_nights']:,} nights, "
          f"{PlanStatus.objects.filter(site=site).count()} plans), token and work order made in "
          f"{time.perf_counter() - started:.1f} s")
    connections.close_all()
    return facts


@contextlib.contextmanager
def gunicorn(port: int, workers: int, threads: int, log_path: Path):
    """gunicorn serving observatory_ops.wsgi on 127.0.0.1:port; stopped (SIGTERM, then SIGKILL) on exit."""
    command = [sys.executable, "-m", "gunicorn", "observatory_ops.wsgi", "--bind", f"{HOST}:{port}",
               "--workers", str(workers), "--timeout", str(int(REQUEST_TIMEOUT_S)), "--error-logfile", str(log_path)]
    if threads > 1:
        command += ["--worker-class", "gthread", "--threads", str(threads)]
    with open(log_path, "ab") as log:
        server = subprocess.Popen(command, cwd=ROOT, env=os.environ.copy(), stdout=log, stderr=log,
                                  start_new_session=True)
    try:
        wait_until_serving(server, port)
        yield server
    finally:
        server.send_signal(signal.SIGTERM)
        try:
            server.wait(timeout=30)
        except subprocess.TimeoutExpired:
            os.killpg(server.pid, signal.SIGKILL)  # the group this script started: the master and its workers
            server.wait()


def wait_until_serving(server: subprocess.Popen, port: int, limit_s: float = 60.0) -> None:
    deadline = time.monotonic() + limit_s
    while time.monotonic() < deadline:
        if server.poll() is not None:
            raise RuntimeError(f"gunicorn exited with status {server.returncode} before serving")
        with contextlib.suppress(OSError, http.client.HTTPException):
            if Session(port).request("GET", "/login/")[0] == 200:
                return
        time.sleep(0.3)
    raise RuntimeError(f"gunicorn did not answer on {HOST}:{port} within {limit_s:.0f} s")


# --- the clients ---------------------------------------------------------------------------------------------


def one_request(session: Session, target: Target, endpoint: str, rng: random.Random) -> tuple[int, bytes]:
    if endpoint == "due list":
        return session.request("GET", "/due/")
    if endpoint == "work-order page":
        return session.request("GET", target.order_path)
    open_hours = round(rng.uniform(2.0, 9.0), 2)
    slews = rng.randint(10, 60)
    night = {"night": rng.choice(target.nights), "open_hours": open_hours, "slews": slews,
             "axis1_travel_deg": round(slews * rng.uniform(18, 32), 1),
             "axis2_travel_deg": round(slews * rng.uniform(10, 20), 1), "brake_cycles": slews + 2,
             "pm10_ugm3": round(rng.uniform(8, 80), 1), "humidity_pct": rng.randint(10, 70), "dew": False,
             "rain": False}
    return session.request("POST", target.nights_path, json.dumps([night]).encode(),
                           {"Authorization": f"Bearer {target.token}", "Content-Type": "application/json"})


def client(index: int, session: Session, target: Target, deadline: float, outcomes: list[Outcome]) -> None:
    rng = random.Random(index)
    turn = index
    while time.monotonic() < deadline:
        endpoint = ENDPOINTS[turn % len(ENDPOINTS)]
        turn += 1
        started = time.perf_counter()
        try:
            status, body = one_request(session, target, endpoint, rng)
            error = None if 200 <= status < 400 else f"HTTP {status}: {body[:300].decode(errors='replace')}"
        except (OSError, http.client.HTTPException) as exc:
            status, error = None, f"{type(exc).__name__}: {exc}"
        outcomes.append(Outcome(endpoint, time.perf_counter() - started, status, error))  # list.append is atomic


def sign_in_all(target: Target, count: int) -> tuple[list[Session], list[str], float]:
    sessions, failures = [Session(target.port) for _ in range(count)], []

    def sign_in(session: Session) -> None:
        try:
            session.sign_in(target.username, target.password)
        except (OSError, http.client.HTTPException, RuntimeError) as exc:
            failures.append(f"{type(exc).__name__}: {exc}")

    started = time.perf_counter()
    threads = [threading.Thread(target=sign_in, args=(s,)) for s in sessions]
    for thread in threads:
        thread.start()
    for thread in threads:
        thread.join()
    return sessions, failures, time.perf_counter() - started


def summarise(outcomes: list[Outcome], seconds: float) -> bool:
    print(f"{'endpoint':<18}{'served':>8}{'errors':>8}{'3xx':>6}{'req/s':>8}{'median ms':>11}{'p95 ms':>9}"
          f"{'max ms':>9}")
    for name in (*ENDPOINTS, "all"):
        mine = [o for o in outcomes if name in ("all", o.endpoint)]
        if not mine:
            print(f"{name:<18}{0:>8}")
            continue
        median, p95 = milliseconds([o.seconds for o in mine])
        errors = sum(1 for o in mine if o.error)
        redirects = sum(1 for o in mine if o.status and 300 <= o.status < 400)
        print(f"{name:<18}{len(mine) - errors:>8}{errors:>8}{redirects:>6}{len(mine) / seconds:>8.1f}{median:>11.0f}"
              f"{p95:>9.0f}{max(o.seconds for o in mine) * 1e3:>9.0f}")
    failed = [o for o in outcomes if o.error]
    for outcome in failed[:ERRORS_SHOWN]:
        print(f"  error on {outcome.endpoint} after {outcome.seconds * 1e3:.0f} ms: {outcome.error}")
    print(f"errors: {len(failed)}   target none: {verdict(not failed)}")
    return not failed


def run(args: argparse.Namespace, data_dir: str) -> bool:
    facts = load_demo()
    port = free_port(0)
    target = Target(port, facts["username"], facts["password"], facts["order_path"], facts["nights_path"],
                    facts["token"], facts["nights"])
    log_path = Path(data_dir) / "gunicorn.log"
    kind = f"{args.workers} gthread workers x {args.threads} threads" if args.threads > 1 else \
        f"{args.workers} sync workers"
    with gunicorn(port, args.workers, args.threads, log_path):
        print(f"gunicorn ({kind}) serving observatory_ops.wsgi on {HOST}:{port}, DEBUG off")
        sessions, failures, login_s = sign_in_all(target, args.clients)
        print(f"{args.clients} clients signed in as {target.username!r} in {login_s:.1f} s, each with its own session "
              f"({len(failures)} failed{': ' + failures[0] if failures else ''})")
        if failures:
            return False
        print(f"running {args.clients} clients for {args.seconds:.0f} s on {os.cpu_count()} cores "
              f"(load average {os.getloadavg()[0]:.2f} before)...")
        outcomes: list[Outcome] = []
        started = time.monotonic()
        deadline = started + args.seconds
        threads = [threading.Thread(target=client, args=(i, s, target, deadline, outcomes))
                   for i, s in enumerate(sessions)]
        for thread in threads:
            thread.start()
        for thread in threads:
            thread.join(REQUEST_TIMEOUT_S + args.seconds)
        elapsed = time.monotonic() - started
    print(f"gunicorn stopped; {elapsed:.1f} s of load, load average {os.getloadavg()[0]:.2f} at the end")
    held = summarise(outcomes, elapsed)
    logged = log_path.read_text(errors="replace").splitlines()
    trouble = [line for line in logged if re.search(r"ERROR|Traceback|CRITICAL|WORKER TIMEOUT", line)]
    print(f"gunicorn log: {len(logged)} lines, {len(trouble)} with ERROR, Traceback, CRITICAL or WORKER TIMEOUT")
    for line in trouble[:ERRORS_SHOWN]:
        print(f"  {line}")
    return held


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--seconds", type=float, default=60.0, help="length of the run (default 60)")
    parser.add_argument("--clients", type=int, default=50, help="concurrent signed-in clients (default 50)")
    parser.add_argument("--workers", type=int, default=3, help="gunicorn worker processes (default 3)")
    parser.add_argument("--threads", type=int, default=1, help="threads per worker; above 1 uses gthread workers")
    parser.add_argument("--database-url", help="an empty PostgreSQL database instead of a private cluster")
    args = parser.parse_args()
    if args.seconds <= 0 or args.clients < 1 or args.workers < 1 or args.threads < 1:
        parser.error("--seconds, --clients, --workers and --threads must be positive")
    with contextlib.ExitStack() as stack:
        data_dir = tempfile.mkdtemp(prefix="obsops-load-")
        stack.callback(shutil.rmtree, data_dir, ignore_errors=True)
        url = args.database_url or stack.enter_context(private_cluster())
        production_environment(url, data_dir, hosts=f"{HOST},localhost")
        held = run(args, data_dir)
    sys.exit(0 if held else 1)


if __name__ == "__main__":
    main()
