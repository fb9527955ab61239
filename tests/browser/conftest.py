import os
import shutil
import threading
import time

import pytest
from django.core.signals import request_finished, request_started

CHROMIUM = "/usr/bin/chromium"
CHROMIUM_ARGS = [
    "--no-sandbox",
    "--disable-gpu",
    "--disable-dev-shm-usage",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
    "--no-first-run",
]


def _required() -> bool:
    return os.environ.get("HOLDFAST_REQUIRE_BROWSER", "0").lower() in {"1", "true", "yes"}


@pytest.fixture(scope="session")
def browser():
    if not shutil.which(CHROMIUM):
        message = f"{CHROMIUM} is not installed (apt-get install chromium)"
        if _required():
            pytest.fail(message)
        pytest.skip(message)
    # live_server runs Django in a thread beside Playwright's event loop.
    os.environ["DJANGO_ALLOW_ASYNC_UNSAFE"] = "true"
    from playwright.sync_api import sync_playwright

    with sync_playwright() as playwright:
        chromium = playwright.chromium.launch(
            executable_path=CHROMIUM, headless=True, args=CHROMIUM_ARGS
        )
        yield chromium
        chromium.close()


@pytest.fixture
def page(browser):
    context = browser.new_context(viewport={"width": 1024, "height": 1366})
    page = context.new_page()
    page.set_default_timeout(15_000)
    yield page
    context.close()


class _InFlight:
    """Requests the live server is still answering. A page's images and charts can still be
    loading when a test's last assertion passes; their views must end before the test's
    database is emptied, or the emptying meets a view's open transaction."""

    def __init__(self):
        self.count = 0
        self.changed = threading.Condition()

    def started(self, **kwargs):
        with self.changed:
            self.count += 1

    def finished(self, **kwargs):
        with self.changed:
            self.count -= 1
            self.changed.notify_all()

    def wait_idle(self, timeout: float) -> bool:
        with self.changed:
            return self.changed.wait_for(lambda: self.count <= 0, timeout=timeout)


@pytest.fixture(scope="session")
def _in_flight():
    tracker = _InFlight()
    request_started.connect(tracker.started, dispatch_uid="browser-in-flight-start")
    request_finished.connect(tracker.finished, dispatch_uid="browser-in-flight-end")
    yield tracker
    request_started.disconnect(dispatch_uid="browser-in-flight-start")
    request_finished.disconnect(dispatch_uid="browser-in-flight-end")


@pytest.fixture(autouse=True)
def _browser_quiet_before_flush(request, _in_flight):
    """Set up after pytest-django's live-server fixture (so torn down before its flush): closes
    every browser context the test opened, then waits for the server's last answer."""
    yield
    if "browser" not in request.fixturenames:
        return
    browser = request.getfixturevalue("browser")
    for context in list(browser.contexts):
        context.close()
    time.sleep(0.05)  # a request already accepted reaches request_started
    assert _in_flight.wait_idle(timeout=60), "the live server kept answering after the test"
