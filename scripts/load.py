#!/usr/bin/env python3
"""Load test: many technicians at once against a real server, then count what was kept.

    .venv/bin/python scripts/load.py --clients 10 --seconds 15
    .venv/bin/python scripts/load.py --database sqlite:////tmp/load.sqlite3 --clients 50
    .venv/bin/python scripts/load.py --database postgres://postgres@127.0.0.1:55432/load

1. The database (``--database``, else ``DATABASE_URL``, else a new SQLite file in a temporary
   folder) is migrated and, if it holds no unit, loaded with the demo fleet. Only a database
   on this machine is accepted (127.0.0.1, localhost, ::1, or a SQLite file).
2. gunicorn serves Holdfast on 127.0.0.1 (a free port), or ``--url`` names a server already
   running on loopback and serving that same database; any other host is refused.
3. Open bench visits are made ready for the saves (one per unit that can take one), and
   ``--clients`` threads sign in through the login form (the demo technician, every other
   one the demo supervisor, who alone corrects closed records). Once all
   have, for ``--seconds`` (at most 600) they mix the overview, unit pages, bench-visit
   saves (each adds an anode reading whose note is a unique mark) and amendments to closed
   records (each with a unique reason). Every form is read from the page and posted back
   with its CSRF token.
4. It reports requests, p50/p95 latency per kind, errors, saves refused because a colleague
   saved the same visit first (the version check; correct behaviour, not an error), and lost
   writes: saves and amendments the server acknowledged (302) whose mark is not in the
   database afterwards. Then it runs ``rebuild_state --check``.

Exit status: 0 when nothing was lost, no request failed and the check passed; 1 otherwise;
3 when the server could not be started or reached.
"""

from __future__ import annotations

import argparse
import http.cookiejar
import ipaddress
import json
import os
import random
import re
import secrets
import socket
import subprocess
import sys
import tempfile
import threading
import time
import urllib.error
import urllib.parse
import urllib.request
from collections import Counter, defaultdict
from dataclasses import dataclass, field
from html.parser import HTMLParser
from pathlib import Path
from typing import Any

ROOT = Path(__file__).resolve().parent.parent
LOOPBACK_NAMES = {"localhost"}
DEMO_PASSWORD = "holdfast-demo"
MAX_SECONDS = 600
MAX_CLIENTS = 500
# Share of each kind of step (the rest of a technician's day is reading).
MIX = (("overview", 30), ("unit", 30), ("save", 25), ("amend", 15))
START_FAILED = 3


def is_loopback(host: str | None) -> bool:
    if not host:
        return False
    if host.lower() in LOOPBACK_NAMES:
        return True
    try:
        return ipaddress.ip_address(host.strip("[]")).is_loopback
    except ValueError:
        return False


def check_database_url(url: str) -> None:
    parsed = urllib.parse.urlparse(url)
    if parsed.scheme.startswith("sqlite"):
        return
    if not is_loopback(parsed.hostname):
        raise SystemExit(
            f"refused: the database host {parsed.hostname!r} is not this machine; the load "
            "test only runs against 127.0.0.1, localhost or ::1."
        )


def check_server_url(url: str) -> str:
    parsed = urllib.parse.urlparse(url)
    if parsed.scheme not in ("http", "https") or not is_loopback(parsed.hostname):
        raise SystemExit(
            f"refused: {url!r} is not a server on this machine; give http://127.0.0.1:<port>, "
            "http://localhost:<port> or http://[::1]:<port>."
        )
    return url.rstrip("/")


# ----------------------------------------------------------------------------- forms in pages


@dataclass
class Form:
    action: str
    fields: list[tuple[str, str]] = field(default_factory=list)
    selects: dict[str, list[str]] = field(default_factory=dict)


class _FormParser(HTMLParser):
    """The post forms of a page with the values a browser would send as they stand."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.forms: list[Form] = []
        self._select: str | None = None
        self._select_options: list[tuple[str, bool]] = []
        self._textarea: str | None = None
        self._text: list[str] = []

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        a = {k: (v or "") for k, v in attrs}
        if tag == "form" and a.get("method", "get").lower() == "post":
            self.forms.append(Form(action=a.get("action", "")))
            return
        if not self.forms:
            return
        form = self.forms[-1]
        if tag == "input" and a.get("name"):
            kind = a.get("type", "text").lower()
            if kind in ("submit", "button", "file", "image", "reset"):
                return
            if kind in ("checkbox", "radio") and "checked" not in a:
                return
            form.fields.append((a["name"], a.get("value", "on" if kind == "checkbox" else "")))
        elif tag == "select" and a.get("name"):
            self._select, self._select_options = a["name"], []
        elif tag == "option" and self._select is not None:
            self._select_options.append((a.get("value", ""), "selected" in a))
        elif tag == "textarea" and a.get("name"):
            self._textarea, self._text = a["name"], []

    def handle_data(self, data: str) -> None:
        if self._textarea is not None:
            self._text.append(data)

    def handle_endtag(self, tag: str) -> None:
        if tag == "select" and self._select is not None and self.forms:
            values = [v for v, _ in self._select_options]
            chosen = [v for v, selected in self._select_options if selected]
            value = chosen[0] if chosen else (values[0] if values else "")
            self.forms[-1].fields.append((self._select, value))
            self.forms[-1].selects[self._select] = values
            self._select = None
        elif tag == "textarea" and self._textarea is not None and self.forms:
            self.forms[-1].fields.append((self._textarea, "".join(self._text).lstrip("\n")))
            self._textarea = None


def post_forms(html: str) -> list[Form]:
    parser = _FormParser()
    parser.feed(html)
    return parser.forms


def form_with(html: str, name: str) -> Form:
    for form in post_forms(html):
        if any(n == name for n, _ in form.fields):
            return form
    raise LookupError(f"no form with a field {name!r} on the page")


def set_field(form: Form, name: str, value: str) -> None:
    form.fields = [(n, v) for n, v in form.fields if n != name] + [(name, value)]


# ----------------------------------------------------------------------------- clients


class _NoRedirect(urllib.request.HTTPRedirectHandler):
    def redirect_request(self, *args: Any, **kwargs: Any) -> None:
        return None


@dataclass
class Tally:
    lock: threading.Lock = field(default_factory=threading.Lock)
    latency: dict[str, list[float]] = field(default_factory=lambda: defaultdict(list))
    errors: Counter[str] = field(default_factory=Counter)
    error_samples: list[str] = field(default_factory=list)
    conflicts: int = 0
    saves_acked: set[str] = field(default_factory=set)
    amends_acked: set[str] = field(default_factory=set)

    def error(self, kind: str, message: str) -> None:
        with self.lock:
            self.errors[kind] += 1
            if len(self.error_samples) < 10:
                self.error_samples.append(f"{kind}: {message[:300]}")


class Client:
    def __init__(self, base: str, tally: Tally) -> None:
        self.base = base
        self.tally = tally
        self.opener = urllib.request.build_opener(
            urllib.request.HTTPCookieProcessor(http.cookiejar.CookieJar()), _NoRedirect()
        )

    def request(
        self, kind: str, path: str, data: list[tuple[str, str]] | None = None
    ) -> tuple[int, str]:
        body = urllib.parse.urlencode(data).encode() if data is not None else None
        req = urllib.request.Request(self.base + path, data=body)
        started = time.perf_counter()
        try:
            with self.opener.open(req, timeout=60) as response:
                status, text = response.status, response.read().decode("utf-8", "replace")
        except urllib.error.HTTPError as exc:
            status, text = exc.code, exc.read().decode("utf-8", "replace")
        elapsed = time.perf_counter() - started
        with self.tally.lock:
            self.tally.latency[kind].append(elapsed)
        return status, text

    def login(self, username: str) -> None:
        status, page = self.request("login", "/accounts/login/")
        form = form_with(page, "username")
        set_field(form, "username", username)
        set_field(form, "password", DEMO_PASSWORD)
        status, _ = self.request("login", "/accounts/login/", form.fields)
        if status != 302:
            raise RuntimeError(f"login as {username} failed with HTTP {status}")


def _save(client: Client, record_id: int, mark: str) -> None:
    tally = client.tally
    status, page = client.request("save_form", f"/records/{record_id}/edit/")
    if status != 200:
        tally.error("save_form", f"HTTP {status} for record {record_id}")
        return
    form = form_with(page, "version")
    total = int(dict(form.fields)["anodes-TOTAL_FORMS"])
    row = f"anodes-{total - 1}"
    positions = [v for v in form.selects.get(f"{row}-position", []) if v]
    if not positions:
        tally.error("save_form", f"record {record_id} offers no blank anode row")
        return
    set_field(form, f"{row}-position", random.choice(positions))
    set_field(form, f"{row}-remaining_percent", f"{random.uniform(40, 95):.1f}")
    set_field(form, f"{row}-note", mark)
    status, page = client.request("save", f"/records/{record_id}/edit/", form.fields)
    if status == 302:
        with tally.lock:
            tally.saves_acked.add(mark)
    elif status == 400 and STALE in page:
        with tally.lock:
            tally.conflicts += 1
    else:
        errors = re.findall(r'class="errorlist[^"]*"[^>]*>(.*?)</ul>', page, re.S)
        tally.error("save", f"HTTP {status} for record {record_id}: {errors[:2]}")


def _amend(client: Client, record_id: int, mark: str) -> None:
    tally = client.tally
    # The form's third step: the record itself (its summary) picked in the two steps before.
    status, page = client.request(
        "amend_form",
        f"/records/{record_id}/amend/?target=servicerecord:{record_id}&field=summary",
    )
    if status != 200:
        tally.error("amend_form", f"HTTP {status} for record {record_id}")
        return
    form = form_with(page, "reason")
    set_field(form, "corrected_value", f"Summary corrected under load ({mark})")
    set_field(form, "reason", mark)
    status, page = client.request("amend", f"/records/{record_id}/amend/", form.fields)
    if status == 302:
        with tally.lock:
            tally.amends_acked.add(mark)
    elif status == 400 and STALE in page:
        with tally.lock:
            tally.conflicts += 1
    else:
        tally.error("amend", f"HTTP {status} for record {record_id}")


# What the version check says when a colleague saved the same record first (a refusal that
# keeps both people's work safe: correct behaviour under load, not an error).
STALE = "after you loaded it. Nothing of yours was saved"


class Clock:
    """Every client signs in first; the timed mix starts when the last one has (the barrier's
    action sets the clock before any thread is released)."""

    def __init__(self, parties: int, seconds: float) -> None:
        self.seconds = seconds
        self.start = 0.0
        self.deadline = 0.0
        self.started = threading.Barrier(parties, action=self._go, timeout=600)

    def _go(self) -> None:
        self.start = time.monotonic()
        self.deadline = self.start + self.seconds


def run_client(
    number: int,
    base: str,
    tally: Tally,
    clock: Clock,
    targets: dict[str, list[Any]],
    run_id: str,
) -> None:
    rng = random.Random(number)
    client = Client(base, tally)
    signed_in = False
    # Supervisors correct closed records; every other client is a technician.
    supervisor = number % 2 == 1
    try:
        client.login("supervisor" if supervisor else "technician")
        signed_in = True
    except Exception as exc:  # noqa: BLE001 - every failure is counted and reported
        tally.error("login", repr(exc))
    finally:
        clock.started.wait()
    if not signed_in:
        return
    kinds = [k for k, w in MIX for _ in range(w)]
    step = 0
    while time.monotonic() < clock.deadline:
        step += 1
        kind = rng.choice(kinds)
        mark = f"load-{run_id}-{number}-{step}"
        try:
            if kind == "overview":
                status, _ = client.request("overview", "/")
                if status != 200:
                    tally.error("overview", f"HTTP {status}")
            elif kind == "unit":
                serial = rng.choice(targets["serials"])
                status, _ = client.request("unit", f"/units/{serial}/")
                if status != 200:
                    tally.error("unit", f"HTTP {status} for {serial}")
            elif kind == "save" and targets["open"]:
                _save(client, targets["open"][number % len(targets["open"])], mark)
            elif kind == "amend" and targets["closed"] and supervisor:
                _amend(client, rng.choice(targets["closed"]), mark)
        except Exception as exc:  # noqa: BLE001 - every failure is counted and reported
            tally.error(kind, repr(exc))


# ----------------------------------------------------------------------------- the run


def free_port() -> int:
    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        return int(sock.getsockname()[1])


def start_gunicorn(
    env: dict[str, str], workers: int, threads: int
) -> tuple[subprocess.Popen[bytes], str]:
    port = free_port()
    # The server's log goes to a file (a pipe nobody reads would fill and stall the server);
    # its tracebacks say what any 5xx was.
    log_path = Path(tempfile.mkstemp(prefix="holdfast-load-server-", suffix=".log")[1])
    log = log_path.open("wb")
    print(f"server log: {log_path}", flush=True)
    process = subprocess.Popen(
        [
            sys.executable,
            "-m",
            "gunicorn",
            "fleet.wsgi:application",
            "--bind",
            f"127.0.0.1:{port}",
            "--workers",
            str(workers),
            "--threads",
            str(threads),
            "--timeout",
            "120",
        ],
        cwd=ROOT,
        env=env,
        stdout=subprocess.DEVNULL,
        stderr=log,
    )
    base = f"http://127.0.0.1:{port}"
    until = time.monotonic() + 60
    while time.monotonic() < until:
        if process.poll() is not None:
            err = log_path.read_text(errors="replace")
            print(f"gunicorn could not start:\n{err[-2000:]}", file=sys.stderr)
            raise SystemExit(START_FAILED)
        try:
            with urllib.request.urlopen(base + "/accounts/login/", timeout=2) as response:
                if response.status == 200:
                    return process, base
        except OSError:
            time.sleep(0.2)
    process.terminate()
    print("gunicorn did not answer within 60 s", file=sys.stderr)
    raise SystemExit(START_FAILED)


def prepare(clients: int) -> dict[str, list[Any]]:
    """Migrate, load the demo fleet if empty, and list what the clients work on."""
    from django.contrib.auth import get_user_model
    from django.core.exceptions import ValidationError
    from django.core.management import call_command
    from django.utils import timezone

    from fleet.models import ServiceRecord, Transponder
    from fleet.services.records import check_can_open_record, service_record_save

    call_command("migrate", verbosity=0)
    if not Transponder.objects.exists():
        print("loading the demo fleet (the database has no unit)", flush=True)
        call_command("seed_demo", "--force")  # a scratch load-test database, DEBUG off
    technician = get_user_model().objects.get(username="technician")
    open_ids = list(
        ServiceRecord.objects.filter(closed_at__isnull=True).values_list("pk", flat=True)
    )
    for unit in Transponder.objects.select_related("place").order_by("serial"):
        if len(open_ids) >= clients or unit.place is None:
            continue
        try:
            check_can_open_record(unit)
        except ValidationError:
            continue
        record = service_record_save(
            record=ServiceRecord(
                unit=unit,
                opened_at=timezone.now().replace(microsecond=0),
                technician=technician,
                place=unit.place,
            ),
            by=technician,
        )
        open_ids.append(record.pk)
    closed = list(
        ServiceRecord.objects.filter(closed_at__isnull=False)
        .order_by("-opened_at")
        .values_list("pk", flat=True)[:40]
    )
    serials = list(Transponder.objects.values_list("serial", flat=True))
    return {"open": open_ids, "closed": closed, "serials": serials}


def percentile(values: list[float], share: float) -> float:
    ordered = sorted(values)
    index = min(len(ordered) - 1, max(0, round(share * (len(ordered) - 1))))
    return ordered[index]


def _arguments(argv: list[str] | None) -> argparse.Namespace:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--clients", type=int, default=50, help="concurrent clients (1-500)")
    parser.add_argument("--seconds", type=float, default=60.0, help="duration (at most 600)")
    parser.add_argument("--database", default="", help="database URL (loopback or SQLite)")
    parser.add_argument("--url", default="", help="a running server on loopback to load")
    parser.add_argument("--workers", type=int, default=3, help="gunicorn worker processes")
    parser.add_argument("--threads", type=int, default=4, help="threads per gunicorn worker")
    parser.add_argument("--json", default="", help="also write the figures to this file")
    args = parser.parse_args(argv)
    if not 1 <= args.clients <= MAX_CLIENTS:
        parser.error(f"--clients must be 1 to {MAX_CLIENTS}")
    if not 0 < args.seconds <= MAX_SECONDS:
        parser.error(f"--seconds must be more than 0 and at most {MAX_SECONDS}")
    return args


def main(argv: list[str] | None = None) -> int:
    args = _arguments(argv)
    base = check_server_url(args.url) if args.url else ""

    scratch = None
    database = args.database or os.environ.get("DATABASE_URL", "")
    if not database:
        scratch = tempfile.mkdtemp(prefix="holdfast-load-")
        database = f"sqlite:///{scratch}/load.sqlite3"
    check_database_url(database)
    env = {
        **os.environ,
        "DATABASE_URL": database,
        "SECRET_KEY": os.environ.get("SECRET_KEY") or secrets.token_urlsafe(40),
        "DEBUG": "false",
        "DJANGO_SETTINGS_MODULE": "fleet.settings",
    }
    os.environ.update(env)
    sys.path.insert(0, str(ROOT))
    import django

    django.setup()
    print(f"database: {database}", flush=True)
    targets = prepare(args.clients)
    # DEBUG is off: the server serves the collected, hashed static files (WhiteNoise).
    from django.core.management import call_command

    call_command("collectstatic", "--noinput", verbosity=0)

    server = None
    if not base:
        server, base = start_gunicorn(env, args.workers, args.threads)
    print(
        f"server: {base}; {args.clients} clients for {args.seconds:g} s; "
        f"{len(targets['open'])} open visits, {len(targets['closed'])} closed records",
        flush=True,
    )
    run_id = secrets.token_hex(3)
    tally = Tally()
    clock = Clock(args.clients + 1, args.seconds)
    threads = [
        threading.Thread(
            target=run_client, args=(n, base, tally, clock, targets, run_id), daemon=True
        )
        for n in range(args.clients)
    ]
    try:
        for thread in threads:
            thread.start()
        clock.started.wait()
        for thread in threads:
            thread.join(timeout=max(0.0, clock.deadline - time.monotonic()) + 120)
        wall = time.monotonic() - clock.start
    finally:
        if server is not None:
            server.terminate()
            try:
                server.wait(timeout=30)
            except subprocess.TimeoutExpired:
                server.kill()

    from django.core.management import CommandError, call_command
    from django.db import connection

    from fleet.models import Amendment, AnodeReading

    connection.close()  # read what the server committed, from a new connection
    prefix = f"load-{run_id}-"
    saves_found = set(
        AnodeReading.objects.filter(note__startswith=prefix).values_list("note", flat=True)
    )
    amends_found = set(
        Amendment.objects.filter(reason__startswith=prefix).values_list("reason", flat=True)
    )
    lost_saves = tally.saves_acked - saves_found
    lost_amends = tally.amends_acked - amends_found
    try:
        call_command("rebuild_state", check=True, stdout=sys.stdout, stderr=sys.stderr)
        check_ok = True
    except CommandError as exc:
        print(f"rebuild_state --check: {exc}", file=sys.stderr)
        check_ok = False

    requests = sum(len(v) for k, v in tally.latency.items() if k != "login")
    figures: dict[str, Any] = {
        "clients": args.clients,
        "seconds": round(wall, 1),
        "requests": requests,
        "requests_per_second": round(requests / wall, 1) if wall else 0.0,
        "latency_ms": {
            kind: {
                "count": len(values),
                "p50": round(1000 * percentile(values, 0.50), 1),
                "p95": round(1000 * percentile(values, 0.95), 1),
            }
            for kind, values in sorted(tally.latency.items())
        },
        "errors": dict(tally.errors),
        "error_samples": tally.error_samples,
        "save_conflicts_refused": tally.conflicts,
        "saves_acknowledged": len(tally.saves_acked),
        "saves_found": len(saves_found),
        "amendments_acknowledged": len(tally.amends_acked),
        "amendments_found": len(amends_found),
        "lost_writes": len(lost_saves) + len(lost_amends),
        "rebuild_check_passed": check_ok,
    }
    print(
        f"\n{requests} requests after sign-in in {wall:.1f} s "
        f"({figures['requests_per_second']} per s)"
    )
    print(f"{'kind':<12}{'count':>8}{'p50 ms':>10}{'p95 ms':>10}")
    for kind, row in figures["latency_ms"].items():
        print(f"{kind:<12}{row['count']:>8}{row['p50']:>10}{row['p95']:>10}")
    print(f"errors: {sum(tally.errors.values())} {dict(tally.errors) or ''}")
    for sample in tally.error_samples:
        print(f"  {sample}")
    print(f"writes refused by the version check (a colleague saved first): {tally.conflicts}")
    print(
        f"saves acknowledged {len(tally.saves_acked)}, found {len(saves_found)}; "
        f"amendments acknowledged {len(tally.amends_acked)}, found {len(amends_found)}"
    )
    print(f"lost writes: {figures['lost_writes']}")
    print(f"rebuild_state --check: {'passed' if check_ok else 'FAILED'}")
    if args.json:
        Path(args.json).write_text(json.dumps(figures, indent=2) + "\n")
    if scratch:
        print(f"(the scratch database stays in {scratch})")
    ok = check_ok and requests > 0 and not figures["lost_writes"] and not tally.errors
    return 0 if ok else 1


if __name__ == "__main__":
    raise SystemExit(main())
