"""Team-mode fixtures: real Redis (tests/app/conftest.py), real Celery worker
processes and a real ``serve --team`` (gunicorn), each started as a process
group and stopped by its pid, with bounded waits."""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time

import pytest

from ..browser.conftest import ROOT, Server

ADMIN, ADMIN_PW = "ana", "correct horse battery"
USER, USER_PW = "bo", "another long secret"


class Worker:
    """``bendline worker`` in its own process group."""

    def __init__(self, redis_url, log_dir, name, concurrency=1):
        self.redis_url, self.name, self.concurrency = redis_url, name, concurrency
        self.log_path = os.path.join(str(log_dir), f"worker-{name}.log")
        self.proc = None

    def start(self, timeout=60):
        from bendline.app.store.redis_store import RedisRunStore

        self.log = open(self.log_path, "ab")
        self.proc = subprocess.Popen(
            [sys.executable, "-m", "bendline.app.cli", "worker", "--redis", self.redis_url, "--name", self.name,
             "--concurrency", str(self.concurrency), "--loglevel", "INFO"],
            cwd=ROOT, env=dict(os.environ, PYTHONPATH=ROOT), stdout=self.log, stderr=subprocess.STDOUT,
            start_new_session=True,
        )
        store = RedisRunStore(self.redis_url)
        deadline = time.time() + timeout
        while time.time() < deadline:
            if self.proc.poll() is not None:
                raise RuntimeError(f"worker exited: {open(self.log_path).read()[-2000:]}")
            if any(w["name"] == self.name for w in store.list_workers()):
                time.sleep(1.0)  # let Celery finish connecting its consumer
                return self
            time.sleep(0.3)
        raise RuntimeError("worker did not register in time")

    def kill(self):
        """SIGKILL the whole worker (main process and its pool children)."""
        if self.proc and self.proc.poll() is None:
            os.killpg(self.proc.pid, signal.SIGKILL)
            self.proc.wait(timeout=10)

    def stop(self):
        if self.proc and self.proc.poll() is None:
            os.killpg(self.proc.pid, signal.SIGTERM)
            try:
                self.proc.wait(timeout=20)
            except subprocess.TimeoutExpired:
                self.kill()
        if getattr(self, "log", None):
            self.log.close()


@pytest.fixture
def team_users(redis_url):
    from bendline.app.team.users import UserStore

    users = UserStore(redis_url)
    users.add(ADMIN, ADMIN_PW, admin=True)
    users.add(USER, USER_PW)
    return users


@pytest.fixture
def workers(redis_url, tmp_path):
    started = []

    def start(name, concurrency=1):
        w = Worker(redis_url, tmp_path, name, concurrency).start()
        started.append(w)
        return w

    yield start
    for w in started:
        w.stop()


@pytest.fixture
def team_server(redis_url, team_users, tmp_path):
    data = tmp_path / "team-data"
    data.mkdir()
    srv = Server(data, "--team", "--redis", redis_url, "--insecure-cookies", "--processes", "2").start()
    yield srv
    srv.stop()
