import os
import shutil

import pytest

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
